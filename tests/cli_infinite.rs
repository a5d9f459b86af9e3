//! `wires = "infinite"` from the command line: `dims` (with its quadrature
//! and per-wire data), `dims --wires` (dimensions against array size, its
//! table, CSV, JSON and figure), `flow` (on the quadrature points,
//! `--q-points`, `[flow] q_points`), `scan`, the filling-1/3 demo turned
//! infinite, and exit code 2 with a clear message for bad input.
//!
//! The demo models carry invented numbers; the one physics value checked
//! here is the sliding Luttinger liquid's interwire CDW integral
//! [Mukhopadhyay, Kane & Lubensky, PRB 64, 045120 (2001), structure from
//! memory; formula derived in the project's check values], which the demo
//! reduces to when w2 = 0.

use std::path::{Path, PathBuf};

use assert_cmd::Command;
use serde_json::Value;

fn demo(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("flows")
        .join(name)
}

fn pinflow(dir: &Path) -> Command {
    let mut c = Command::cargo_bin("pinflow").unwrap();
    c.current_dir(dir);
    c
}

fn stdout_of(dir: &Path, args: &[&str]) -> String {
    let out = pinflow(dir)
        .args(args)
        .assert()
        .success()
        .get_output()
        .clone();
    String::from_utf8(out.stdout).unwrap()
}

fn json_of(dir: &Path, args: &[&str]) -> Value {
    let mut all: Vec<&str> = args.to_vec();
    all.extend(["--format", "json"]);
    serde_json::from_str(&stdout_of(dir, &all)).expect("JSON on standard output")
}

/// Run, expect exit code 2, an error on standard error containing every
/// needle, and nothing on standard output.
fn expect_bad_input(dir: &Path, args: &[&str], needles: &[&str]) {
    let out = pinflow(dir)
        .args(args)
        .assert()
        .code(2)
        .get_output()
        .clone();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(stderr.starts_with("error"), "{stderr}");
    for n in needles {
        assert!(stderr.contains(n), "expected {n:?} in: {stderr}");
    }
    assert!(
        out.stdout.is_empty(),
        "stdout: {}",
        String::from_utf8_lossy(&out.stdout)
    );
}

fn tmp() -> tempfile::TempDir {
    tempfile::tempdir().unwrap()
}

fn sliding() -> String {
    demo("sliding_array.toml").display().to_string()
}

fn term<'a>(v: &'a Value, name: &str) -> &'a Value {
    v["terms"]
        .as_array()
        .unwrap()
        .iter()
        .find(|t| t["name"] == name)
        .unwrap_or_else(|| panic!("no term {name}"))
}

#[test]
fn dims_of_an_infinite_array() {
    let dir = tmp();
    let m = sliding();
    let v = json_of(dir.path(), &["dims", &m]);
    assert_eq!(v["infinite"], true);
    assert!(v["wires"].is_null());
    assert_eq!(v["fields"], 2);
    assert_eq!(v["filling"], "0");
    assert_eq!(v["filling_per_wire"], "0");
    assert_eq!(v["det_k"], "-1");
    assert_eq!(v["det_k_cell"], "-1");
    assert_eq!(v["signature"], serde_json::json!([1, 1]));
    let q = &v["quadrature"];
    assert!(q["points"].as_u64().unwrap() >= 8);
    assert!(q["error_estimate"].as_f64().unwrap() <= q["tolerance"].as_f64().unwrap());
    assert_eq!(q["converged"], true);
    assert_eq!(v["velocities"].as_array().unwrap().len(), 2);
    let ranges = v["velocity_ranges"].as_array().unwrap();
    assert_eq!(ranges.len(), 2);
    for r in ranges {
        assert!(r[0].as_f64().unwrap() <= r[1].as_f64().unwrap());
    }
    assert_eq!(term(&v, "hop")["spin"], "1");
    assert_eq!(term(&v, "cdw")["vector"], serde_json::json!([1, 1, -1, -1]));
    // Text: the rule and the per-wire labels are stated.
    let text = stdout_of(dir.path(), &["dims", &m]);
    for needle in [
        "wires",
        "infinite",
        "quadrature",
        "points",
        "per wire",
        "velocity range",
    ] {
        assert!(text.contains(needle), "{needle} in:\n{text}");
    }
}

#[test]
fn the_demo_reduces_to_the_sliding_luttinger_liquid() {
    // With w2 = 0: K0 = sqrt((1 - lambda)/(1 + lambda)), lam = 4 w/(1 + lambda)
    // and Delta_cdw = 2 int dq/2pi K0 (1 - cos q)/sqrt(1 + lam cos q)
    // (derived in the project's check values). Integral: trapezoid sum of
    // the scalar formula on 20000 points.
    let dir = tmp();
    let m = sliding();
    let (lambda, w): (f64, f64) = (0.3, 0.15);
    let v = json_of(
        dir.path(),
        &[
            "dims",
            &m,
            "--set",
            "lambda=0.3",
            "--set",
            "w=0.15",
            "--set",
            "w2=0",
        ],
    );
    let k0 = ((1.0 - lambda) / (1.0 + lambda)).sqrt();
    let lam = 4.0 * w / (1.0 + lambda);
    let n = 20_000;
    let cdw: f64 = (0..n)
        .map(|k| {
            let q = 2.0 * std::f64::consts::PI * k as f64 / n as f64;
            2.0 * k0 * (1.0 - q.cos()) / (1.0 + lam * q.cos()).sqrt()
        })
        .sum::<f64>()
        / n as f64;
    let got = term(&v, "cdw")["dimension"].as_f64().unwrap();
    assert!((got - cdw).abs() < 1e-10, "{got} vs {cdw}");
}

#[test]
fn dims_against_array_size() {
    let dir = tmp();
    let m = sliding();
    let sizes = "6,8,16,32,infinite";
    let text = stdout_of(dir.path(), &["dims", &m, "--wires", sizes, "--out", "conv"]);
    for needle in ["wires", "Delta cdw", "Delta pair_hop", "infinite", "32"] {
        assert!(text.contains(needle), "{needle} in:\n{text}");
    }
    for f in [
        "convergence.png",
        "convergence.svg",
        "convergence.csv",
        "convergence.json",
    ] {
        let path = dir.path().join("conv").join(f);
        assert!(std::fs::metadata(&path).unwrap().len() > 100, "{f}");
    }
    let csv = stdout_of(
        dir.path(),
        &["dims", &m, "--wires", sizes, "--format", "csv"],
    );
    let mut lines = csv.lines();
    assert_eq!(
        lines.next().unwrap(),
        "wires,dimension:cdw,dimension:pair_hop,dimension:hop"
    );
    let rows: Vec<Vec<String>> = lines
        .map(|l| l.split(',').map(str::to_string).collect())
        .collect();
    let labels: Vec<&str> = rows.iter().map(|r| r[0].as_str()).collect();
    assert_eq!(labels, ["6", "8", "16", "32", "infinite"]);
    let v = json_of(dir.path(), &["dims", &m, "--wires", sizes]);
    assert_eq!(v["rows"][4]["wires"], "infinite");
    assert_eq!(v["rows"][0]["wires"], 6);
    assert!(v["rows"][0]["quadrature"].is_null());
    assert!(v["rows"][4]["quadrature"]["points"].is_number());
    // The infinite row is the plain dims of the model, and the periodic
    // rows approach it (the W-point trapezoid rule converges geometrically).
    let plain = json_of(dir.path(), &["dims", &m]);
    for (t, name) in ["cdw", "pair_hop", "hop"].iter().enumerate() {
        let inf = v["rows"][4]["dimensions"][t].as_f64().unwrap();
        assert_eq!(inf, term(&plain, name)["dimension"].as_f64().unwrap());
        let err: Vec<f64> = (0..4)
            .map(|r| (v["rows"][r]["dimensions"][t].as_f64().unwrap() - inf).abs())
            .collect();
        assert!(err.windows(2).all(|e| e[1] < e[0]), "{name}: {err:?}");
        assert!(err[3] < 1e-6, "{name}: {err:?}");
    }
}

#[test]
fn flow_and_scan_of_an_infinite_array() {
    let dir = tmp();
    let m = sliding();
    let v = json_of(dir.path(), &["flow", &m]);
    assert!(v["outcome"].is_string());
    let points = v["quadrature"]["points"].as_u64().unwrap();
    assert!(points >= 8);
    let v = json_of(dir.path(), &["flow", &m, "--q-points", "20"]);
    assert_eq!(v["quadrature"]["points"], 20);
    assert_eq!(v["options"]["q_points"], 20);
    let text = stdout_of(dir.path(), &["flow", &m, "--q-points", "20", "--out", "f"]);
    assert!(text.contains("20 points"), "{text}");
    assert!(dir.path().join("f/summary.json").exists());
    stdout_of(
        dir.path(),
        &[
            "scan",
            &m,
            "--x",
            "lambda=-0.5:0.7:5",
            "--y",
            "w=0:0.3:3",
            "--out",
            "s",
            "--quiet",
        ],
    );
    let csv = std::fs::read_to_string(dir.path().join("s/points.csv")).unwrap();
    assert_eq!(csv.lines().count(), 1 + 15);
    assert!(dir.path().join("s/phase.png").exists());
}

#[test]
fn the_filling_third_demo_runs_as_an_infinite_array() {
    let dir = tmp();
    let text = std::fs::read_to_string(demo("laughlin_third.toml")).unwrap();
    assert!(text.contains("wires = 8"));
    let model = dir.path().join("infinite.toml");
    std::fs::write(&model, text.replace("wires = 8", "wires = \"infinite\"")).unwrap();
    let m = model.display().to_string();
    let d = json_of(dir.path(), &["dims", &m]);
    assert_eq!(d["infinite"], true);
    assert_eq!(term(&d, "tunnel")["null"], true);
    let f = json_of(dir.path(), &["flow", &m]);
    assert!(f["quadrature"]["points"].is_number());
    stdout_of(
        dir.path(),
        &[
            "scan",
            &m,
            "--x",
            "lambda=0.5:0.9:3",
            "--y",
            "g=0:0.9:3",
            "--out",
            "s",
            "--quiet",
        ],
    );
    assert_eq!(
        std::fs::read_to_string(dir.path().join("s/points.csv"))
            .unwrap()
            .lines()
            .count(),
        10
    );
    stdout_of(dir.path(), &["dims", &m, "--wires", "3,8,infinite"]);
}

#[test]
fn bad_input_for_infinite_arrays() {
    let dir = tmp();
    let m = sliding();
    // V(q) not positive definite: 1 + lambda + 4 (w cos q + w2 cos 2q) < 0
    // near q = pi for w = 0.5 (derived from the V blocks of the demo).
    expect_bad_input(
        dir.path(),
        &["dims", &m, "--set", "w=0.5"],
        &[
            "not positive definite",
            "q = ",
            "w=0.5",
            "smallest eigenvalue",
        ],
    );
    // `flow` prints its (unphysical) summary and exits with 2.
    let out = pinflow(dir.path())
        .args(["flow", &m, "--set", "w=0.5"])
        .assert()
        .code(2)
        .get_output()
        .clone();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(
        stderr.contains("not positive definite") && stderr.contains("w=0.5"),
        "{stderr}"
    );
    assert!(String::from_utf8_lossy(&out.stdout).contains("unphysical"));
    expect_bad_input(
        dir.path(),
        &["flow", &m, "--q-points", "4"],
        &["--q-points", "from 5"],
    );
    expect_bad_input(
        dir.path(),
        &["flow", &m, "--q-points", "-3"],
        &["--q-points"],
    );
    expect_bad_input(
        dir.path(),
        &["flow", &m, "--q-points", "many"],
        &["--q-points"],
    );
    let finite = demo("laughlin_third.toml").display().to_string();
    expect_bad_input(
        dir.path(),
        &["flow", &finite, "--q-points", "16"],
        &["--q-points", "only for infinite arrays"],
    );
    let with_table = |line: &str| {
        let text = std::fs::read_to_string(demo("sliding_array.toml")).unwrap();
        let path = dir.path().join("table.toml");
        std::fs::write(&path, format!("{text}\n[flow]\n{line}\n")).unwrap();
        path.display().to_string()
    };
    let t = with_table("q_points = 2");
    expect_bad_input(
        dir.path(),
        &["flow", &t],
        &["flow.q_points", "from 5", "found 2"],
    );
    let t = with_table("q_points = \"many\"");
    expect_bad_input(
        dir.path(),
        &["flow", &t],
        &["flow.q_points", "whole number"],
    );
    // An infinite array has no ends.
    let text = std::fs::read_to_string(demo("sliding_array.toml")).unwrap();
    let open = dir.path().join("open.toml");
    std::fs::write(
        &open,
        text.replace(
            "wires = \"infinite\"",
            "wires = \"infinite\"\nboundary = \"open\"",
        ),
    )
    .unwrap();
    let open = open.display().to_string();
    expect_bad_input(dir.path(), &["dims", &open], &["array.boundary", "no ends"]);
    // --wires: bad entries, sizes that do not fit, explicit models.
    expect_bad_input(
        dir.path(),
        &["dims", &m, "--wires", "8,x"],
        &["--wires", "`x`"],
    );
    expect_bad_input(
        dir.path(),
        &["dims", &m, "--wires", "0"],
        &["--wires", "at least 1"],
    );
    expect_bad_input(
        dir.path(),
        &["dims", &m, "--wires", "4"],
        &["--wires", "interaction range 2", "needs at least 5 wires"],
    );
    let explicit = demo("spinless_wire.toml").display().to_string();
    expect_bad_input(
        dir.path(),
        &["dims", &explicit, "--wires", "8"],
        &["--wires", "explicit model"],
    );
    expect_bad_input(dir.path(), &["dims", &m, "--out", "x"], &["--wires"]);
}

/// The note of a flow whose quadrature check did not pass, if any.
fn quadrature_note(v: &Value) -> Option<String> {
    v["notes"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|n| n.as_str())
        .find(|n| n.contains("infinite array's flow"))
        .map(str::to_string)
}

#[test]
fn the_flow_of_the_demo_states_a_small_quadrature_estimate() {
    // The check flows the demo again on the nested rule of half the points
    // and finds the final dimensions and ell* the same to far below the
    // tolerance 1e-6 (about 1e-9, measured).
    let dir = tmp();
    let m = sliding();
    let v = json_of(dir.path(), &["flow", &m]);
    let c = &v["flow_quadrature"];
    assert_eq!(c["rule"], "refined");
    assert_eq!(c["points"], v["quadrature"]["points"]);
    assert_eq!(
        2 * c["compared_with"].as_u64().unwrap(),
        c["points"].as_u64().unwrap()
    );
    assert_eq!(c["tolerance"], 1e-6);
    assert_eq!(c["converged"], true);
    assert_eq!(c["same_outcome"], true);
    assert_eq!(c["refinements"], 0);
    assert!(c["stopped"].is_null());
    for key in ["dimension_error", "ell_star_error"] {
        let e = c[key].as_f64().unwrap();
        assert!((0.0..1e-7).contains(&e), "{key} = {e}");
    }
    assert_eq!(quadrature_note(&v), None);
    let text = stdout_of(dir.path(), &["flow", &m]);
    assert!(
        text.contains("flow quadrature") && text.contains("relative error estimate"),
        "{text}"
    );
    assert!(!text.contains("NOT converged"), "{text}");
}

#[test]
fn a_coarse_rule_is_flagged() {
    // 8 points: the bare dimensions are off by about 2e-5 and the flow's
    // final dimensions by about 3e-5 (relative, measured against a ring of
    // 256 wires in flow_paths.rs); the check against 16 points says so.
    let dir = tmp();
    let m = sliding();
    let v = json_of(dir.path(), &["flow", &m, "--q-points", "8"]);
    let c = &v["flow_quadrature"];
    assert_eq!(c["rule"], "fixed");
    assert_eq!(c["points"], 8);
    assert_eq!(c["compared_with"], 16);
    assert_eq!(c["converged"], false);
    let e = c["dimension_error"].as_f64().unwrap();
    assert!(e > 1e-5, "{e}");
    let note = quadrature_note(&v).expect("a note on the flow's quadrature");
    assert!(
        note.contains("8 points given") && note.contains("not converged"),
        "{note}"
    );
    let text = stdout_of(dir.path(), &["flow", &m, "--q-points", "8"]);
    assert!(
        text.contains("8 points (given)") && text.contains("NOT converged"),
        "{text}"
    );
    // The same check passes on 32 points.
    let v = json_of(dir.path(), &["flow", &m, "--q-points", "32"]);
    assert_eq!(v["flow_quadrature"]["converged"], true);
    assert_eq!(quadrature_note(&v), None);
}

#[test]
fn a_loose_integrator_does_not_fake_a_quadrature_error() {
    // The check compares the flow on two nested rules. The step control
    // measures the couplings' error on its own (src/math/dop853.rs), so
    // both flows take the same steps and the integrator's error, even at
    // rtol 1e-2, is common to both and cancels in the estimate (measured
    // about 5e-11, as at the default rtol). Under the former integrator,
    // whose error norm averaged over every entry of D(q), the two rules
    // stepped differently and rtol 1e-4 left a difference of 1.6e-5 that
    // refinement could not remove ("stalled").
    let dir = tmp();
    let m = sliding();
    let loose = json_of(dir.path(), &["flow", &m, "--rtol", "1e-2"]);
    let default = json_of(dir.path(), &["flow", &m]);
    let (c, d) = (&loose["flow_quadrature"], &default["flow_quadrature"]);
    assert_eq!(c["converged"], true);
    assert_eq!(c["refinements"], 0);
    assert_eq!(c["points"], d["points"]);
    let (e, e0) = (
        c["dimension_error"].as_f64().unwrap(),
        d["dimension_error"].as_f64().unwrap(),
    );
    // The default flow's check is the in-flow estimate of the rule's own
    // error (src/flow/qtrack.rs), far below a two-flow difference: only the
    // loose flow's own bound is compared.
    assert_eq!(d["method"], "estimate");
    assert!(e < 1e-9 && e0 < 1e-9, "{e} vs {e0}");
    assert_eq!(quadrature_note(&loose), None);
}

#[test]
fn a_scan_of_an_infinite_array_records_the_check() {
    let dir = tmp();
    let m = sliding();
    let axes = ["--x", "lambda=-0.5:0.7:4", "--y", "w=0:0.3:2"];
    let run = |out: &str, extra: &[&str]| -> (Vec<Vec<String>>, Value) {
        let mut args = vec!["scan", &m];
        args.extend(axes);
        args.extend(["--out", out, "--quiet"]);
        args.extend(extra);
        stdout_of(dir.path(), &args);
        let mut r = csv::Reader::from_path(dir.path().join(out).join("points.csv")).unwrap();
        let header: Vec<String> = r.headers().unwrap().iter().map(String::from).collect();
        // The quadrature columns, then the five phase columns.
        assert_eq!(
            header[header.len() - 8..header.len() - 5],
            ["q_points", "q_error", "q_converged"]
        );
        let rows = r
            .records()
            .map(|rec| rec.unwrap().iter().map(String::from).collect())
            .collect();
        let summary = std::fs::read_to_string(dir.path().join(out).join("summary.json")).unwrap();
        (rows, serde_json::from_str(&summary).unwrap())
    };
    // Unphysical points (V(q) not positive definite at small lambda and
    // large w, see bad_input_for_infinite_arrays) are not flowed and have
    // empty cells; the grid has some.
    let physical = |rows: &[Vec<String>]| -> usize {
        let n = rows[0].len();
        for row in rows {
            let unphysical = row[2] == "unphysical";
            assert_eq!(row[n - 6].is_empty(), unphysical, "{row:?}");
        }
        rows.iter().filter(|r| r[2] != "unphysical").count()
    };
    let (rows, s) = run("fine", &[]);
    let checked = physical(&rows);
    assert!(checked > 0 && checked < rows.len(), "{rows:?}");
    let q = &s["flow_quadrature"];
    assert_eq!(q["checked"].as_u64().unwrap() as usize, checked);
    assert_eq!(q["not_converged"], 0);
    assert!(q["largest_error"].as_f64().unwrap() < 1e-6);
    for row in rows.iter().filter(|r| r[2] != "unphysical") {
        let n = row.len();
        assert!(row[n - 8].parse::<usize>().unwrap() >= 16, "{row:?}");
        assert!(row[n - 7].parse::<f64>().unwrap() < 1e-6, "{row:?}");
        assert_eq!(row[n - 6], "true");
    }
    // 8 points everywhere: every check fails, and the summary says so.
    let (rows, s) = run("coarse", &["--q-points", "8"]);
    let q = &s["flow_quadrature"];
    assert_eq!(
        q["not_converged"].as_u64().unwrap() as usize,
        physical(&rows)
    );
    assert_eq!(q["points"], serde_json::json!([8, 8]));
    let notes: Vec<&str> = s["notes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|n| n.as_str().unwrap())
        .collect();
    assert!(
        notes.iter().any(|n| n.contains("not converged in q")),
        "{notes:?}"
    );
}
