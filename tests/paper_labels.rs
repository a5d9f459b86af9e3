//! Figures and tables for a paper, second part (issue 17): parameter
//! labels and units from `[params]` tables, `:log` axes drawn
//! logarithmic, compact paper legends, `--run-json` for standard output,
//! and a scan's provenance written with its summary (library route).
//! No physics values here: the numbers are those of the plain model,
//! whose values other tests check against published sources.

use std::path::{Path, PathBuf};
use std::process::Command as Process;

use assert_cmd::Command;
use pinflow::model::Model;

fn demo() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("flows/laughlin_third.toml")
}

/// The filling-1/3 demo with `lambda` and `g` given as `[params]` tables.
fn labelled(dir: &Path) -> PathBuf {
    let text = std::fs::read_to_string(demo()).unwrap();
    let mut out = String::new();
    for line in text.lines() {
        let line = match line.split_whitespace().next() {
            Some("lambda") => r#"lambda = { value = 0.8, label = "λ", unit = "meV" }"#,
            Some("g") => r#"g = { value = 0.5, label = "γ" }"#,
            _ => line,
        };
        out.push_str(line);
        out.push('\n');
    }
    let path = dir.join("labelled.toml");
    std::fs::write(&path, out).unwrap();
    path
}

fn pinflow(dir: &Path) -> Command {
    let mut c = Command::cargo_bin("pinflow").unwrap();
    c.current_dir(dir);
    c
}

/// Contents of the SVG's `<text>` elements.
fn texts(svg: &Path) -> Vec<String> {
    let s = std::fs::read_to_string(svg).unwrap();
    s.split("<text")
        .skip(1)
        .filter_map(|p| Some(p[p.find('>')? + 1..p.find("</text>")?].trim().to_string()))
        .collect()
}

const PARAMS: &str = "name = \"m\"\n[fields]\nK = [[1, 0], [0, -1]]\ncharge = [1, 1]\nV = [[\"1\", \"a\"], [\"a\", \"1\"]]\n[[term]]\nname = \"b\"\nparticles = [1, -1]\n[params]\n";

#[test]
fn a_parameter_table_gives_value_label_and_unit_and_a_number_stays_valid() {
    let m = Model::parse(
        &format!("{PARAMS}a = {{ value = 0.25, label = \"λ\", unit = \"meV\" }}\nb = 2\n"),
        "m.toml",
    )
    .unwrap();
    assert_eq!(m.params.defaults(), &[0.25, 2.0]);
    let l = m.params.label("a");
    assert_eq!(l.title("a"), "λ (meV)");
    assert!(m.params.label("b").is_empty());
    assert_eq!(m.params.label("b").title("b"), "b");
    let json = m.params.labels_json();
    assert_eq!(json.len(), 1);
    assert_eq!(json["a"]["label"], "λ");
    // The value alone is a table too; label and unit are optional.
    let m = Model::parse(&format!("{PARAMS}a = {{ value = 0.5 }}\n"), "m.toml").unwrap();
    assert_eq!(m.params.defaults(), &[0.5]);
}

#[test]
fn bad_parameter_tables_are_refused_with_file_and_key() {
    let cases = [
        (
            "a = { value = 0.5, lable = \"x\" }",
            "params.a.lable",
            "unknown key",
        ),
        ("a = { label = \"x\" }", "params.a", "needs `value`"),
        (
            "a = { value = 0.5, unit = 3 }",
            "params.a.unit",
            "expected a string",
        ),
        (
            "a = { value = \"0.5\" }",
            "params.a.value",
            "expected a number",
        ),
        (
            "a = { value = 0.5, label = \"x\\ny\" }",
            "params.a.label",
            "one line",
        ),
    ];
    for (line, key, what) in cases {
        let e = Model::parse(&format!("{PARAMS}{line}\n"), "m.toml").unwrap_err();
        let text = e.to_string();
        assert!(
            text.contains("m.toml") && text.contains(key),
            "{line}: {text}"
        );
        assert!(text.contains(what), "{line}: {text}");
    }
}

#[test]
fn scan_figures_use_labels_and_draw_log_axes_logarithmic() {
    let dir = tempfile::tempdir().unwrap();
    let m = labelled(dir.path());
    pinflow(dir.path())
        .args(["scan", m.to_str().unwrap(), "--out", "s", "--quiet"])
        .args(["--x", "lambda=0.3:0.9:4", "--y", "g=0.01:1:4:log"])
        .assert()
        .success();
    for fig in ["phase", "ell_star"] {
        let t = texts(&dir.path().join(format!("s/{fig}.svg")));
        assert!(t.iter().any(|s| s == "λ (meV)"), "{fig}: x label in {t:?}");
        assert!(t.iter().any(|s| s == "γ"), "{fig}: y label in {t:?}");
        // Two decades, 0.01 to 1: ticks at the decades, not at 0.2, 0.4, ...
        for tick in ["10⁻²", "10⁻¹", "10⁰"] {
            assert!(t.iter().any(|s| s == tick), "{fig}: tick {tick} in {t:?}");
        }
        assert!(
            !t.iter().any(|s| s == "0.5"),
            "{fig}: linear tick on a log axis"
        );
    }
    // The summary records the labels with the axes' parameters.
    let json = std::fs::read_to_string(dir.path().join("s/summary.json")).unwrap();
    assert!(json.contains("\"provenance\""), "{json}");
}

#[test]
fn a_one_axis_log_scan_ticks_at_one_two_five() {
    let dir = tempfile::tempdir().unwrap();
    pinflow(dir.path())
        .args(["scan", demo().to_str().unwrap(), "--out", "s", "--quiet"])
        .args(["--x", "g=0.1:1:5:log"])
        .assert()
        .success();
    let t = texts(&dir.path().join("s/phase.svg"));
    for tick in ["0.1", "0.2", "0.5", "1"] {
        assert!(t.iter().any(|s| s == tick), "tick {tick} in {t:?}");
    }
    assert!(!t.iter().any(|s| s == "0.3"), "linear ticks: {t:?}");
}

#[test]
fn the_flow_caption_names_labelled_parameters() {
    let dir = tempfile::tempdir().unwrap();
    let m = labelled(dir.path());
    let out = pinflow(dir.path())
        .args([
            "flow",
            m.to_str().unwrap(),
            "--out",
            "f",
            "--format",
            "json",
        ])
        .args(["--figure-style", "paper"])
        .output()
        .unwrap();
    assert!(out.status.success());
    let caption = std::fs::read_to_string(dir.path().join("f/flow.txt")).unwrap();
    assert!(caption.contains("λ = 0.8 meV"), "{caption}");
    assert!(caption.contains("γ = 0.5"), "{caption}");
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["parameter_labels"]["lambda"]["unit"], "meV");
    if which("pdftotext") {
        let pdf = dir.path().join("f/flow.pdf");
        let t = Process::new("pdftotext")
            .arg(&pdf)
            .arg("-")
            .output()
            .unwrap();
        let t = String::from_utf8_lossy(&t.stdout);
        // The embedded font has the glyph: the text reads back as ℓ.
        assert!(t.contains('ℓ'), "{t}");
    }
}

fn which(tool: &str) -> bool {
    Process::new(tool)
        .arg("-v")
        .output()
        .map(|o| o.status.success())
        .unwrap_or(false)
}

/// Horizontal extent of the legend's text in a paper-style SVG: the x of
/// every legend label (they follow the plot's own text).
#[test]
fn the_paper_legend_sits_under_the_plot_in_columns() {
    let dir = tempfile::tempdir().unwrap();
    pinflow(dir.path())
        .args([
            "flow",
            demo().to_str().unwrap(),
            "--set",
            "g=0.8",
            "--out",
            "f",
        ])
        .args(["--figure-style", "paper"])
        .assert()
        .success();
    let svg = std::fs::read_to_string(dir.path().join("f/flow.svg")).unwrap();
    // (x, y) of each legend label: the text elements after the last tick.
    let at = |name: &str| -> (f64, f64) {
        let i = svg.find(&format!(">\n{name}\n</text>")).expect(name);
        let head = &svg[svg[..i].rfind("<text").unwrap()..i];
        let num = |k: &str| -> f64 {
            let j = head.find(&format!("{k}=\"")).unwrap() + k.len() + 2;
            head[j..j + head[j..].find('"').unwrap()].parse().unwrap()
        };
        (num("x"), num("y"))
    };
    let (first, second) = (at("tunnel (winner)"), at("cdw"));
    let marginal = at("Δ = 2 (marginal)");
    // Side by side in one row, below both panels (canvas 680 x 600).
    assert_eq!(first.1, second.1, "the first two entries in one row");
    assert!(second.0 > first.0 + 100.0, "columns: {first:?} {second:?}");
    assert!(first.1 > 600.0 * 0.6 && marginal.1 > 600.0 * 0.6);
    // 8-9 pt text: font-size in px at 200 px per inch.
    let size = svg.split("font-size=\"").nth(1).unwrap();
    let px: f64 = size[..size.find('"').unwrap()].parse().unwrap();
    let pt = px / 200.0 * 72.0;
    assert!((8.0..=9.1).contains(&pt), "{pt} pt");
}

#[test]
fn run_json_carries_the_provenance_of_a_csv_on_standard_output() {
    let dir = tempfile::tempdir().unwrap();
    let d = demo();
    let out = pinflow(dir.path())
        .args(["dims", d.to_str().unwrap(), "--format", "csv"])
        .args(["--set", "g=0.3", "--run-json", "run.json"])
        .output()
        .unwrap();
    assert!(out.status.success());
    let csv = String::from_utf8(out.stdout).unwrap();
    assert!(csv.starts_with("name,"), "nothing before the header: {csv}");
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("run.json")).unwrap())
            .unwrap();
    assert_eq!(v["command"], "dims");
    assert_eq!(v["parameters"]["g"], 0.3);
    // The flag itself is where an output goes: not recorded.
    assert!(!v["arguments"].to_string().contains("run-json"), "{v}");
    for (bad, why) in [
        ("-", "standard output"),
        (d.to_str().unwrap(), "model file"),
    ] {
        let e = pinflow(dir.path())
            .args([
                "dims",
                d.to_str().unwrap(),
                "--format",
                "csv",
                "--run-json",
                bad,
            ])
            .output()
            .unwrap();
        assert_eq!(e.status.code(), Some(2));
        let msg = String::from_utf8_lossy(&e.stderr);
        assert!(msg.contains("--run-json") && msg.contains(why), "{msg}");
    }
}

#[test]
fn the_library_scan_writes_run_json_and_stamps_the_summary_itself() {
    use pinflow::core::system::System;
    use pinflow::output::provenance::Provenance;
    use pinflow::scan::{run, Scan, ScanSpec};
    let dir = tempfile::tempdir().unwrap();
    let bytes = std::fs::read(demo()).unwrap();
    let sys =
        System::new(Model::parse(std::str::from_utf8(&bytes).unwrap(), "m").unwrap()).unwrap();
    let axes = run::resolve_axes(&sys.model, Some("lambda=0.3:0.9:3"), None).unwrap();
    let spec = ScanSpec {
        axes,
        base: sys.model.params.defaults().to_vec(),
        options: pinflow::flow::FlowOptions::resolve(&sys.model, &Default::default()).unwrap(),
        shard: None,
        competitors: None,
    };
    let scan = Scan::new(&sys, &bytes, spec).unwrap();
    let mut prov = Provenance::new("scan", vec!["x=lambda=0.3:0.9:3".into()]);
    prov.caller = Some("python".into());
    let by = pinflow::scan::figures::ColorBy::Phase;
    let out = dir.path().join("s");
    let summary = run::run_to_dir(&scan, &out, by, "out", Some(&prov)).unwrap();
    assert!(summary.files.contains(&"run.json".to_string()));
    let run: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("run.json")).unwrap()).unwrap();
    assert_eq!(run["caller"], "python");
    let s: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    assert_eq!(s["provenance"], run);
    // Without a provenance: no run.json, and none listed.
    let plain = dir.path().join("p");
    let summary = run::run_to_dir(&scan, &plain, by, "out", None).unwrap();
    assert!(!plain.join("run.json").exists());
    assert!(!summary.files.contains(&"run.json".to_string()));
}

#[test]
fn scan_and_flow_provenance_record_the_parameter_labels_and_units() {
    let dir = tempfile::tempdir().unwrap();
    let model = labelled(dir.path());
    let m = model.to_str().unwrap();
    pinflow(dir.path())
        .args([
            "scan",
            m,
            "--x",
            "lambda=0.3:0.9:3",
            "--out",
            "s",
            "--quiet",
        ])
        .assert()
        .success();
    let read = |p: &str| -> serde_json::Value {
        serde_json::from_str(&std::fs::read_to_string(dir.path().join(p)).unwrap()).unwrap()
    };
    let want = serde_json::json!({
        "g": {"label": "γ"},
        "lambda": {"label": "λ", "unit": "meV"},
    });
    assert_eq!(read("s/run.json")["parameter_labels"], want);
    assert_eq!(
        read("s/summary.json")["provenance"]["parameter_labels"],
        want
    );
    // Every command's provenance has them (here flow's JSON on stdout).
    let out = pinflow(dir.path())
        .args(["flow", m, "--format", "json"])
        .output()
        .unwrap();
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["provenance"]["parameter_labels"], want);
    // A model without labels records none (the key is absent).
    let spinless = Path::new(env!("CARGO_MANIFEST_DIR")).join("flows/spinless_wire.toml");
    let plain = pinflow(dir.path())
        .args(["flow", spinless.to_str().unwrap(), "--format", "json"])
        .output()
        .unwrap();
    let v: serde_json::Value = serde_json::from_slice(&plain.stdout).unwrap();
    assert!(v["provenance"].get("parameter_labels").is_none(), "{v}");
}
