//! PDF figures and `--figure-style`: every figure is also a vector PDF that
//! parses and embeds its font; the paper style is 3.4 in wide, draws no
//! title or caption and writes them to a `.txt`. No physics values here.

use std::path::Path;
use std::process::Command as Process;

use assert_cmd::Command;

fn demo() -> String {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("flows/laughlin_third.toml")
        .display()
        .to_string()
}

fn flow(dir: &Path, out: &str, extra: &[&str]) {
    Command::cargo_bin("pinflow")
        .unwrap()
        .current_dir(dir)
        .args(["flow", &demo(), "--set", "g=0.8", "--out", out])
        .args(extra)
        .assert()
        .success();
}

/// The PDF's structure without a PDF library: header, trailer, one page,
/// and an embedded TrueType font program (a subset of DejaVu Sans).
fn check_pdf(bytes: &[u8]) {
    let text = String::from_utf8_lossy(bytes);
    assert!(text.starts_with("%PDF-"), "no PDF header");
    assert!(text.trim_end().ends_with("%%EOF"), "no PDF trailer");
    assert!(text.contains("/FontFile2"), "font not embedded");
    assert!(text.contains("DejaVuSans"), "not the embedded font");
    let pages = text.matches("/Type /Page").count() - text.matches("/Type /Pages").count();
    assert_eq!(pages, 1, "one page");
}

/// Page size in points as pdfinfo reports it, when poppler is installed.
fn page_size(pdf: &Path) -> Option<String> {
    let out = Process::new("pdfinfo").arg(pdf).output().ok()?;
    assert!(
        out.status.success(),
        "pdfinfo cannot parse {}",
        pdf.display()
    );
    let text = String::from_utf8_lossy(&out.stdout).to_string();
    let line = text.lines().find(|l| l.starts_with("Page size:"))?;
    Some(line.trim_start_matches("Page size:").trim().to_string())
}

#[test]
fn every_figure_has_a_pdf_with_its_font() {
    let dir = tempfile::tempdir().unwrap();
    flow(dir.path(), "screen", &[]);
    let pdf = dir.path().join("screen/flow.pdf");
    check_pdf(&std::fs::read(&pdf).unwrap());
    match page_size(&pdf) {
        // 1200 px at 150 px per inch.
        Some(size) => assert!(size.starts_with("576 x 432"), "{size}"),
        None => eprintln!("note: pdfinfo not installed; the PDF was checked by its structure only"),
    }
    assert!(!dir.path().join("screen/flow.txt").exists());
}

#[test]
fn paper_style_is_a_column_wide_with_the_caption_beside_it() {
    let dir = tempfile::tempdir().unwrap();
    flow(dir.path(), "paper", &["--figure-style", "paper"]);
    let pdf = dir.path().join("paper/flow.pdf");
    check_pdf(&std::fs::read(&pdf).unwrap());
    if let Some(size) = page_size(&pdf) {
        // 3.4 in = 244.8 pt wide.
        assert!(size.starts_with("244.8 x 183.6"), "{size}");
    }
    let txt = std::fs::read_to_string(dir.path().join("paper/flow.txt")).unwrap();
    let (title, caption) = txt.split_once("\n\n").unwrap();
    assert!(title.contains("tunnel wins"), "{txt}");
    assert!(caption.contains("g = 0.8"), "{txt}");
    // Neither is drawn into the figure.
    let svg = std::fs::read_to_string(dir.path().join("paper/flow.svg")).unwrap();
    assert!(
        !svg.contains("tunnel wins"),
        "title drawn in the paper style"
    );
    assert!(
        !svg.contains("Second-order"),
        "caption drawn in the paper style"
    );
}
