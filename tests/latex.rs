//! `--format latex` of every command: hostile names are escaped (always
//! checked), and a sample of each command's LaTeX compiles unchanged in
//! `revtex4-2` and in `article` with only the packages its first line names
//! (checked when `pdflatex` is installed; skipped with a message otherwise).
//! No physics values here: the tables are the same numbers as the text
//! format, whose values other tests check against published sources.

use std::path::{Path, PathBuf};
use std::process::Command as Process;

use assert_cmd::Command;

fn flows(name: &str) -> String {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("flows")
        .join(name)
        .display()
        .to_string()
}

/// Every special character of LaTeX in a term name and a model name.
const HOSTILE_TERM: &str = r"um_k&l%a#p$p{}^~\x";
const HOSTILE_MODEL: &str = r"wire_&%#$\{\}^^Mevil~ model";

/// The single-wire demo with a hostile model name and term name.
fn hostile_model(dir: &Path) -> PathBuf {
    let text = std::fs::read_to_string(flows("spinless_wire.toml")).unwrap();
    let text = text
        .replace(
            "name = \"umklapp\"",
            &format!("name = '''{HOSTILE_TERM}'''"),
        )
        .replace(
            "name = \"spinless wire near half filling\"",
            &format!("name = '''{HOSTILE_MODEL}'''"),
        );
    let path = dir.join("hostile.toml");
    std::fs::write(&path, text).unwrap();
    path
}

/// The filling-1/3 demo with labels and units on its parameters (Greek,
/// an underscore, a unit), as `[params]` tables.
fn labelled_model(dir: &Path) -> PathBuf {
    let text = std::fs::read_to_string(flows("laughlin_third.toml")).unwrap();
    let mut out = String::new();
    for line in text.lines() {
        let line = match line.split_whitespace().next() {
            Some("lambda") => r#"lambda = { value = 0.8, label = "λ", unit = "meV" }"#,
            Some("g") => r#"g = { value = 0.5, label = "Γ_link/v_F" }"#,
            _ => line,
        };
        out.push_str(line);
        out.push('\n');
    }
    let path = dir.join("labelled.toml");
    std::fs::write(&path, out).unwrap();
    path
}

fn latex(dir: &Path, args: &[&str]) -> String {
    let out = Command::cargo_bin("pinflow")
        .unwrap()
        .current_dir(dir)
        .args(args)
        .args(["--format", "latex"])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout).unwrap()
}

#[test]
fn hostile_names_are_escaped() {
    let dir = tempfile::tempdir().unwrap();
    let m = hostile_model(dir.path());
    let tex = latex(dir.path(), &["dims", m.to_str().unwrap()]);
    let escaped = r"um\_k\&l\%a\#p\$p\{\}\textasciicircum{}\textasciitilde{}\textbackslash{}x";
    assert!(tex.contains(escaped), "{tex}");
    // The model name is only in a comment, where `^^M` would end the line.
    assert!(!tex.contains("^^"), "{tex}");
    assert!(tex.starts_with("% Needs \\usepackage{amsmath,booktabs,graphicx}"));
    for line in tex.lines().filter(|l| !l.starts_with('%')) {
        // Outside comments, every special character is escaped or a command.
        let bare = line
            .replace(escaped, "")
            .replace("\\\\", "")
            .replace("\\&", "")
            .replace("\\_", "");
        assert!(!bare.contains('_') || bare.contains("$"), "{line}");
        let bare = bare.strip_suffix('%').unwrap_or(&bare);
        assert!(!bare.contains('#') && !bare.contains('%'), "{line}");
        assert_eq!(bare.matches('$').count() % 2, 0, "unbalanced math: {line}");
    }
}

fn have(tool: &str) -> bool {
    Process::new(tool)
        .arg("-v")
        .output()
        .map(|o| o.status.success())
        .unwrap_or(false)
}

/// One sample of each command's LaTeX (and the hostile model).
fn samples(dir: &Path) -> Vec<(String, String)> {
    let laughlin = flows("laughlin_third.toml");
    let hostile = hostile_model(dir).display().to_string();
    let labelled = labelled_model(dir).display().to_string();
    let small = ["--x", "lambda=0.3:0.95:4", "--y", "g=0:0.95:3", "--quiet"];
    let mut scan = vec!["scan", laughlin.as_str(), "--out", "scan"];
    scan.extend(small);
    let cases: Vec<(&str, Vec<&str>)> = vec![
        ("dims", vec!["dims", &laughlin]),
        ("hostile", vec!["dims", &hostile]),
        ("pinned", vec!["dims", &laughlin, "--pin", "tunnel"]),
        ("flow", vec!["flow", &laughlin, "--set", "g=0.8"]),
        ("hunt", vec!["hunt", &laughlin]),
        ("edges", vec!["edges", &laughlin, "--pin", "tunnel"]),
        ("edgesflow", vec!["edges", &laughlin]),
        ("scan", scan),
        ("wires", vec!["dims", &laughlin, "--wires", "3,4,infinite"]),
        ("labelled", vec!["flow", &labelled, "--set", "g=0.8"]),
        ("labelledwires", vec!["dims", &labelled, "--wires", "3,4"]),
    ];
    cases
        .into_iter()
        .map(|(name, args)| (name.to_string(), latex(dir, &args)))
        .collect()
}

/// Compile every sample in one document of class `class`; returns the log.
fn compile(dir: &Path, class: &str, samples: &[(String, String)]) -> String {
    let mut doc = format!("\\documentclass{{{class}}}\n\\usepackage{{amsmath,booktabs,graphicx}}\n\\begin{{document}}\n");
    for (name, tex) in samples {
        std::fs::write(dir.join(format!("{name}.tex")), tex).unwrap();
        doc.push_str(&format!("\\input{{{name}.tex}}\n\\clearpage\n"));
    }
    doc.push_str("\\end{document}\n");
    let stem = format!("doc-{class}");
    std::fs::write(dir.join(format!("{stem}.tex")), doc).unwrap();
    let out = Process::new("pdflatex")
        .current_dir(dir)
        .args(["-interaction=nonstopmode", "-halt-on-error", &stem])
        .output()
        .unwrap();
    let log = std::fs::read_to_string(dir.join(format!("{stem}.log"))).unwrap_or_default();
    assert!(out.status.success(), "{class}: pdflatex failed:\n{log}");
    log
}

#[test]
fn every_command_compiles_in_revtex_and_article() {
    if !have("pdflatex") {
        eprintln!("SKIPPED: pdflatex is not installed; the LaTeX compile test did not run");
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let samples = samples(dir.path());
    for class in ["revtex4-2", "article"] {
        let log = compile(dir.path(), class, &samples);
        for bad in ["Overfull \\hbox", "Undefined control sequence", "Missing $"] {
            assert!(!log.contains(bad), "{class}: {bad} in the log:\n{log}");
        }
        let pdf = dir.path().join(format!("doc-{class}.pdf"));
        if !have("pdftotext") {
            eprintln!("note: pdftotext is not installed; the typeset text was not read back");
            continue;
        }
        let text = Process::new("pdftotext")
            .arg(&pdf)
            .arg("-")
            .output()
            .unwrap();
        let text = String::from_utf8_lossy(&text.stdout);
        // The hostile name comes out letter for letter (pdftotext reads `\_`
        // as a rule and `^`, `~` as accents); numbers as 5.0 x 10^-2 and
        // minus signs as U+2212.
        for part in ["k&l%a#p$p{}", "\\x (target)"] {
            assert!(text.contains(part), "{class}: {part} not in {text}");
        }
        assert!(text.contains('\u{2212}'), "{class}: no real minus sign");
        // Parameter labels: Greek typeset as math, the underscore kept.
        assert!(text.contains("λ=0.8 meV"), "{class}: no λ label in {text}");
        // (pdftotext reads the escaped underscores as spaces.)
        assert!(
            text.contains("Γ link/v F=0.8"),
            "{class}: no Γ label in {text}"
        );
        assert!(text.contains("\u{00d7} 10"), "{class}: no x 10^n");
    }
}
