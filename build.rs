//! Records the source revision for `pinflow --version` and the provenance
//! block of every output: `PINFLOW_REVISION` is the git commit (with
//! `-modified` when the work tree has changes) or empty when the source is
//! not a git checkout or git is not installed. Never fails the build.

use std::process::Command;

fn git(args: &[&str]) -> Option<String> {
    let out = Command::new("git").args(args).output().ok()?;
    if !out.status.success() {
        return None;
    }
    Some(String::from_utf8_lossy(&out.stdout).trim().to_string())
}

fn main() {
    let revision = git(&["rev-parse", "--short=12", "HEAD"])
        .filter(|r| !r.is_empty())
        .map(|r| {
            let dirty = git(&["status", "--porcelain", "--untracked-files=no"])
                .is_some_and(|s| !s.is_empty());
            if dirty {
                format!("{r}-modified")
            } else {
                r
            }
        })
        .unwrap_or_default();
    println!("cargo:rustc-env=PINFLOW_REVISION={revision}");
    let version = env!("CARGO_PKG_VERSION");
    let long = if revision.is_empty() {
        version.to_string()
    } else {
        format!("{version} (revision {revision})")
    };
    println!("cargo:rustc-env=PINFLOW_VERSION_LONG={long}");
    if let Some(dir) = git(&["rev-parse", "--git-dir"]) {
        println!("cargo:rerun-if-changed={dir}/HEAD");
        println!("cargo:rerun-if-changed={dir}/index");
        if let Some(r) = git(&["symbolic-ref", "-q", "HEAD"]) {
            println!("cargo:rerun-if-changed={dir}/{r}");
        }
    }
    println!("cargo:rerun-if-changed=build.rs");
    println!("cargo:rerun-if-changed=src");
    println!("cargo:rerun-if-changed=Cargo.toml");
}
