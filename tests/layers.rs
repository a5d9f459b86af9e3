//! The source tree keeps its layers (DEVELOPERS.md): `cli/` is the only
//! place that knows clap, progress bars and standard output; engines
//! (dims, flow, scan, search, edges) sit over `core/`, which sits over
//! `model/`, over `math/`; `output/`, `plot/` and `error` are leaves.
//! Arrows only go down. Common practice (no published source): a layered
//! architecture checked by a test on the imports.

use std::path::{Path, PathBuf};

fn sources(dir: &Path, out: &mut Vec<PathBuf>) {
    for entry in std::fs::read_dir(dir).expect("read src") {
        let path = entry.expect("entry").path();
        if path.is_dir() {
            sources(&path, out);
        } else if path.extension().is_some_and(|e| e == "rs") {
            out.push(path);
        }
    }
}

/// The top-level module of a file under src/, and its code without
/// comments and without its unit tests.
fn module_and_code(src: &Path, path: &Path) -> (String, String) {
    let rel = path.strip_prefix(src).expect("under src");
    let top = rel.components().next().expect("component");
    let top = top
        .as_os_str()
        .to_string_lossy()
        .trim_end_matches(".rs")
        .to_string();
    let text = std::fs::read_to_string(path).expect("read");
    let text = match text.find("#[cfg(test)]") {
        Some(i) => &text[..i],
        None => &text[..],
    };
    let code: Vec<&str> = text
        .lines()
        .map(|l| l.split("//").next().unwrap_or(""))
        .collect();
    (top, code.join("\n"))
}

/// Rank of a top-level module: a module may use only lower ranks (and
/// itself). Engines may use engines of a lower rank (scan runs flows; a
/// flow with hunted competitors runs the operator search).
fn rank(module: &str) -> Option<u32> {
    Some(match module {
        "error" => 0,
        "output" | "plot" => 1,
        "math" => 2,
        "model" => 3,
        "core" => 4,
        "dims" => 5,
        "search" => 6,
        "flow" => 7,
        "edges" | "scan" => 8,
        "cli" => 9,
        "lib" | "main" => 10,
        _ => return None,
    })
}

fn all_sources() -> (PathBuf, Vec<PathBuf>) {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("src");
    let mut files = Vec::new();
    sources(&src, &mut files);
    files.sort();
    (src, files)
}

#[test]
fn only_the_command_line_knows_clap_progress_bars_and_stdout() {
    let (src, files) = all_sources();
    let mut offences = Vec::new();
    for path in &files {
        let (top, code) = module_and_code(&src, path);
        if top == "cli" || top == "main" {
            continue;
        }
        for word in [
            "clap",
            "indicatif",
            "crate::cli",
            "println!",
            "eprintln!",
            "stdout()",
        ] {
            if code.contains(word) {
                offences.push(format!("{} uses {word}", path.display()));
            }
        }
    }
    assert!(offences.is_empty(), "{offences:#?}");
}

#[test]
fn imports_only_go_down_the_layers() {
    let (src, files) = all_sources();
    let mut offences = Vec::new();
    for path in &files {
        let (top, code) = module_and_code(&src, path);
        let own = rank(&top).unwrap_or_else(|| panic!("{}: unknown module {top}", path.display()));
        for (i, _) in code.match_indices("crate::") {
            let used: String = code[i + 7..]
                .chars()
                .take_while(|c| c.is_ascii_alphanumeric() || *c == '_')
                .collect();
            if used == top {
                continue;
            }
            match rank(&used) {
                Some(r) if r < own => {}
                _ => offences.push(format!("{} ({top}) uses crate::{used}", path.display())),
            }
        }
    }
    offences.dedup();
    assert!(offences.is_empty(), "{offences:#?}");
}
