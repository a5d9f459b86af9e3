//! Same output bytes for 1 and 2 threads, in every command: `dims` (every
//! format, `--wires` with its files), `flow` (every format and the `--out`
//! files, figures included), `scan` (`--threads 1` against `--threads 2`,
//! an explicit model, a periodic array and an infinite one), `merge`,
//! `hunt` (every format and `--emit-terms`) and `edges`. Each command runs
//! in a fresh directory with `RAYON_NUM_THREADS` set to 1 and then 2;
//! standard output and every file the run wrote must be byte-identical.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use assert_cmd::Command;

fn flow_file(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("flows")
        .join(name)
}

/// Standard output and every file under the run's directory.
type Outputs = (Vec<u8>, BTreeMap<String, Vec<u8>>);

fn files_under(root: &Path, dir: &Path, out: &mut BTreeMap<String, Vec<u8>>) {
    for entry in std::fs::read_dir(dir).expect("read_dir") {
        let path = entry.expect("entry").path();
        if path.is_dir() {
            files_under(root, &path, out);
        } else {
            let rel = path
                .strip_prefix(root)
                .expect("prefix")
                .display()
                .to_string();
            out.insert(rel, std::fs::read(&path).expect("read"));
        }
    }
}

/// Run the commands (the last one's standard output is kept) with the
/// given number of threads in a fresh directory.
fn run(commands: &[Vec<String>], threads: usize) -> Outputs {
    let dir = tempfile::tempdir().expect("temporary directory");
    let mut stdout = Vec::new();
    for args in commands {
        let out = Command::cargo_bin("pinflow")
            .expect("the pinflow binary")
            .current_dir(dir.path())
            .env("RAYON_NUM_THREADS", threads.to_string())
            .args(
                args.iter()
                    .map(|a| a.replace("{threads}", &threads.to_string())),
            )
            .timeout(std::time::Duration::from_secs(300))
            .output()
            .expect("run pinflow");
        assert!(
            out.status.success(),
            "{args:?} with {threads} threads: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        stdout = out.stdout;
    }
    let mut files = BTreeMap::new();
    files_under(dir.path(), dir.path(), &mut files);
    (stdout, files)
}

fn args(line: &str, model: &str) -> Vec<String> {
    line.split_whitespace()
        .map(|a| {
            if a == "MODEL" {
                flow_file(model).display().to_string()
            } else {
                a.to_string()
            }
        })
        .collect()
}

/// The commands give identical bytes with 1 and 2 threads.
fn same(what: &str, model: &str, lines: &[&str]) {
    let commands: Vec<Vec<String>> = lines.iter().map(|l| args(l, model)).collect();
    let one = run(&commands, 1);
    let two = run(&commands, 2);
    assert!(
        !one.0.is_empty() || !one.1.is_empty(),
        "{what}: the run produced nothing to compare"
    );
    assert_eq!(
        one.1.keys().collect::<Vec<_>>(),
        two.1.keys().collect::<Vec<_>>(),
        "{what}: different files"
    );
    for (name, bytes) in &one.1 {
        assert!(bytes == &two.1[name], "{what}: {name} differs");
    }
    assert!(one.0 == two.0, "{what}: standard output differs");
}

const FORMATS: [&str; 5] = ["text", "json", "csv", "markdown", "latex"];

#[test]
fn dims_is_the_same_on_1_and_2_threads() {
    for model in [
        "spinless_wire.toml",
        "laughlin_third.toml",
        "sliding_array.toml",
    ] {
        for f in FORMATS {
            same(
                &format!("dims {model} --format {f}"),
                model,
                &[&format!("dims MODEL --format {f} -o dims.out")],
            );
        }
    }
    same(
        "dims --wires",
        "laughlin_third.toml",
        &["dims MODEL --wires 4,8,infinite --out conv --format json"],
    );
}

#[test]
fn flow_is_the_same_on_1_and_2_threads() {
    for model in [
        "spinless_wire.toml",
        "laughlin_third.toml",
        "laughlin_third_strip.toml",
        "sliding_array.toml",
    ] {
        same(
            &format!("flow {model} --out"),
            model,
            &["flow MODEL --set lambda=0.5 --out run"],
        );
        for f in FORMATS {
            same(
                &format!("flow {model} --format {f}"),
                model,
                &[&format!("flow MODEL --format {f}")],
            );
        }
    }
}

#[test]
fn scan_is_the_same_on_1_and_2_threads() {
    // Grids of more than one chunk of 64 points, so that both threads work.
    same(
        "scan of a wire",
        "spinless_wire.toml",
        &["scan MODEL --x lambda=-0.6:0.9:150 --threads {threads} --out s --quiet"],
    );
    same(
        "scan of a ring",
        "laughlin_third.toml",
        &["scan MODEL --x lambda=0.3:0.95:12 --y g=0:0.95:11 --ell-max 20 --threads {threads} --out s --quiet --format json"],
    );
    same(
        "scan of an infinite array",
        "sliding_array.toml",
        &["scan MODEL --x lambda=-0.4:0.8:10 --y w=0:0.3:8 --ell-max 15 --threads {threads} --out s --quiet"],
    );
}

#[test]
fn sharded_scan_and_merge_are_the_same_on_1_and_2_threads() {
    same(
        "shards and merge",
        "spinless_wire.toml",
        &[
            "scan MODEL --x lambda=-0.6:0.9:131 --threads {threads} --out s --shard 1/2 --quiet",
            "scan MODEL --x lambda=-0.6:0.9:131 --threads {threads} --out s --shard 2/2 --quiet",
            "merge s/shard-1-of-2.csv s/shard-2-of-2.csv --out s --format markdown",
        ],
    );
}

#[test]
fn hunt_is_the_same_on_1_and_2_threads() {
    for (model, extra) in [
        ("spinless_wire.toml", "--max-dim 4 --charge any --spin any"),
        ("laughlin_third.toml", "--max-dim 2 --range 3"),
    ] {
        for f in FORMATS {
            same(
                &format!("hunt {model} --format {f}"),
                model,
                &[&format!("hunt MODEL {extra} --format {f} -o hunt.out")],
            );
        }
        same(
            &format!("hunt {model} --emit-terms"),
            model,
            &[&format!("hunt MODEL {extra} --emit-terms")],
        );
    }
}

#[test]
fn edges_is_the_same_on_1_and_2_threads() {
    for f in FORMATS {
        same(
            &format!("edges --format {f}"),
            "laughlin_third_strip.toml",
            &[&format!("edges MODEL --set g=0.9 --format {f}")],
        );
    }
}
