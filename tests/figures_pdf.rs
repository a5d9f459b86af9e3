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
    // Every stream deflated (our own pass after svg2pdf, src/plot/pdf_streams.rs).
    let streams = bytes.windows(9).filter(|w| w == b">>\nstream").count();
    assert_eq!(
        text.matches("/Filter /FlateDecode").count(),
        streams,
        "a stream left uncompressed"
    );
    check_cross_references(bytes);
}

/// `startxref` points at the table, and every object in use at `N 0 obj`
/// (entries of 20 bytes: offset, generation, n or f, CR LF).
fn check_cross_references(bytes: &[u8]) {
    let text = String::from_utf8_lossy(bytes);
    let tail = &text[text.rfind("startxref\n").expect("no startxref") + 10..];
    let at: usize = tail.lines().next().unwrap().parse().unwrap();
    let table = &bytes[at..];
    let head_end = table.iter().position(|&b| b == b'\n').unwrap();
    let body_at = head_end
        + 1
        + table[head_end + 1..]
            .iter()
            .position(|&b| b == b'\n')
            .unwrap()
        + 1;
    let size = String::from_utf8_lossy(&table[head_end + 1..body_at - 1]).to_string();
    assert_eq!(
        &table[..head_end],
        b"xref",
        "startxref does not point at the table"
    );
    let count: usize = size.split(' ').nth(1).unwrap().parse().unwrap();
    for (i, entry) in table[body_at..].chunks(20).take(count).enumerate() {
        let entry = String::from_utf8_lossy(entry).to_string();
        if entry.as_bytes()[17] == b'n' {
            let offset: usize = entry[..10].parse().unwrap();
            let obj = format!("{i} 0 obj\n");
            assert!(
                bytes[offset..].starts_with(obj.as_bytes()),
                "object {i} not at {offset}"
            );
        }
    }
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
    // The two maps of a scan (a map's cells are the largest streams).
    Command::cargo_bin("pinflow")
        .unwrap()
        .current_dir(dir.path())
        .args([
            "scan",
            &demo(),
            "--x",
            "lambda=0.5:0.9:6",
            "--y",
            "g=0.6:0.9:5",
        ])
        .args(["--out", "map", "--quiet"])
        .assert()
        .success();
    for name in ["phase.pdf", "ell_star.pdf"] {
        check_pdf(&std::fs::read(dir.path().join("map").join(name)).unwrap());
    }
}

#[test]
fn paper_style_is_a_column_wide_with_the_caption_beside_it() {
    let dir = tempfile::tempdir().unwrap();
    flow(dir.path(), "paper", &["--figure-style", "paper"]);
    let pdf = dir.path().join("paper/flow.pdf");
    check_pdf(&std::fs::read(&pdf).unwrap());
    if let Some(size) = page_size(&pdf) {
        // 3.4 in = 244.8 pt wide, 3.0 in = 216 pt high.
        assert!(size.starts_with("244.8 x 216"), "{size}");
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

#[test]
fn plot_terms_limits_the_generated_curves_and_says_so() {
    let dir = tempfile::tempdir().unwrap();
    flow(dir.path(), "default", &["--figure-style", "paper"]);
    flow(
        dir.path(),
        "all",
        &["--figure-style", "paper", "--plot-terms", "all"],
    );
    flow(
        dir.path(),
        "listed",
        &["--figure-style", "paper", "--plot-terms", "listed"],
    );
    let summary: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.path().join("all/summary.json")).unwrap(),
    )
    .unwrap();
    let terms = summary["terms"].as_array().unwrap();
    let generated = terms.iter().filter(|t| t["origin"] != "listed").count();
    let winner_generated = terms
        .iter()
        .any(|t| t["name"] == summary["winner"] && t["origin"] != "listed");
    let txt = |d: &str| std::fs::read_to_string(dir.path().join(d).join("flow.txt")).unwrap();
    let svg = |d: &str| std::fs::read_to_string(dir.path().join(d).join("flow.svg")).unwrap();
    // The demo at g = 0.8 generates more than 6 terms; the default draws 6.
    assert!(generated > 6, "{generated}");
    let left = generated - 6 - usize::from(winner_generated);
    assert!(
        txt("default").contains(&format!(" {left} generated term(s)")),
        "{}",
        txt("default")
    );
    assert!(!txt("all").contains("not drawn"));
    let listed_left = generated - usize::from(winner_generated);
    assert!(txt("listed").contains(&format!(" {listed_left} generated term(s)")));
    // The generated term with the smallest |y| (hop+pair_hop, y ~ 1.7e-4 at
    // the end) is only in the `all` figure.
    assert!(svg("all").contains("hop+pair_hop"));
    assert!(!svg("default").contains("hop+pair_hop"));
    assert!(svg("listed").contains("pair_hop") && !svg("listed").contains("2*tunnel"));
}
