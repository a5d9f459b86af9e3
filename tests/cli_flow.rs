//! `pinflow flow` from the command line: text and JSON summaries, the output
//! directory, and exit code 2 with a clear message for bad input.
//!
//! The demo models in `flows/` carry invented parameter values; these tests
//! check the interface, not physics values (those are in flow_kt.rs,
//! flow_physics.rs and flow_outcomes.rs).

use std::path::{Path, PathBuf};

use assert_cmd::Command;
use predicates::prelude::*;
use serde_json::Value;

const OUTCOMES: [&str; 6] = [
    "strong",
    "spinful",
    "gapless",
    "undecided",
    "unphysical",
    "failed",
];

fn demo(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("flows")
        .join(name)
}

fn pinflow() -> Command {
    Command::cargo_bin("pinflow").unwrap()
}

fn flow_json(args: &[&str]) -> Value {
    let out = pinflow()
        .arg("flow")
        .args(args)
        .args(["--format", "json"])
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    serde_json::from_slice(&out).expect("stdout is JSON")
}

/// The fields every JSON summary must carry, with the allowed values.
fn check_summary(v: &Value) {
    let outcome = v["outcome"].as_str().expect("outcome is a string");
    assert!(OUTCOMES.contains(&outcome), "outcome {outcome}");
    let strong = matches!(outcome, "strong" | "spinful");
    assert_eq!(v["winner"].is_string(), strong, "{v}");
    assert_eq!(v["ell_star"].is_number(), strong, "{v}");
    assert!(v.get("winner").is_some() && v.get("ell_star").is_some());
    let terms = v["terms"].as_array().expect("terms is an array");
    assert!(!terms.is_empty());
    for t in terms {
        assert!(t["name"].is_string(), "{t}");
        for key in ["coupling0", "dimension0", "coupling", "dimension"] {
            assert!(t[key].is_number(), "{key} in {t}");
        }
    }
    if let Some(w) = v["winner"].as_str() {
        assert!(
            terms.iter().any(|t| t["name"] == w),
            "winner {w} among the terms"
        );
    }
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
fn text_summary_of_the_single_wire() {
    pinflow()
        .arg("flow")
        .arg(demo("spinless_wire.toml"))
        .assert()
        .success()
        .stdout(
            predicate::str::contains("outcome")
                .and(predicate::str::contains("strong"))
                .and(predicate::str::contains("reaches strong coupling first"))
                .and(predicate::str::contains("backscatter"))
                .and(predicate::str::contains("umklapp"))
                .and(predicate::str::contains("pairing")),
        );
}

#[test]
fn json_summary_of_the_single_wire() {
    let v = flow_json(&[demo("spinless_wire.toml").to_str().unwrap()]);
    check_summary(&v);
    // Bare dimensions from the fixed point at lambda = 0.3 [Giamarchi (2004)
    // ch. 2; checks.md]: backscattering K_L, pairing 1/K_L, umklapp 4 K_L.
    let k_l = (0.7f64 / 1.3).sqrt();
    for (name, delta) in [
        ("backscatter", k_l),
        ("pairing", 1.0 / k_l),
        ("umklapp", 4.0 * k_l),
    ] {
        let d = term(&v, name)["dimension0"].as_f64().unwrap();
        assert!((d - delta).abs() < 1e-12, "{name}: {d}");
    }
    // --set and the flow overrides reach the flow.
    let v = flow_json(&[
        demo("spinless_wire.toml").to_str().unwrap(),
        "--set",
        "lambda=-0.3",
        "--ell-max",
        "7.5",
        "--closure",
        "none",
    ]);
    check_summary(&v);
    assert_eq!(v["parameters"]["lambda"], -0.3);
    assert_eq!(v["options"]["ell_max"], 7.5);
    assert_eq!(v["options"]["closure"], "none");
    assert_eq!(
        v["terms"].as_array().unwrap().len(),
        3,
        "no generated terms"
    );
}

#[test]
fn the_laughlin_array_with_a_strong_link_interaction() {
    let path = demo("laughlin_third.toml");
    let v = flow_json(&[path.to_str().unwrap(), "--set", "g=0.8"]);
    check_summary(&v);
    assert_eq!(v["parameters"]["g"], 0.8);
    assert_eq!(v["outcome"], "strong");
    assert_eq!(v["winner"], "tunnel");
    pinflow()
        .arg("flow")
        .arg(&path)
        .args(["--set", "g=0.8"])
        .assert()
        .success()
        .stdout(predicate::str::contains(
            "tunnel reaches strong coupling first",
        ));
}

#[test]
fn other_formats_render() {
    for format in ["csv", "markdown", "latex"] {
        pinflow()
            .arg("flow")
            .arg(demo("spinless_wire.toml"))
            .args(["--format", format])
            .assert()
            .success()
            .stdout(predicate::str::contains("backscatter"));
    }
}

#[test]
fn out_dir_has_trajectory_and_summary() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("run");
    let stdout = pinflow()
        .arg("flow")
        .arg(demo("laughlin_third.toml"))
        .args(["--set", "g=0.8", "--format", "json", "--out"])
        .arg(&out)
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    let printed: Value = serde_json::from_slice(&stdout).unwrap();
    let summary: Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    check_summary(&summary);
    assert_eq!(summary["outcome"], printed["outcome"]);
    assert_eq!(summary["winner"], printed["winner"]);
    assert_eq!(summary["ell_star"], printed["ell_star"]);

    let csv = std::fs::read_to_string(out.join("trajectory.csv")).unwrap();
    let mut lines = csv.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    assert_eq!(header[0], "ell");
    let names: Vec<&str> = summary["terms"]
        .as_array()
        .unwrap()
        .iter()
        .map(|t| t["name"].as_str().unwrap())
        .collect();
    for n in &names {
        assert!(
            header.contains(&format!("coupling:{n}").as_str()),
            "coupling:{n} in {header:?}"
        );
        assert!(
            header.contains(&format!("dimension:{n}").as_str()),
            "dimension:{n} in {header:?}"
        );
    }
    assert_eq!(header.len(), 1 + 2 * names.len());
    let rows: Vec<Vec<f64>> = lines
        .map(|l| l.split(',').map(|x| x.parse().unwrap()).collect())
        .collect();
    assert!(rows.len() > 5);
    assert!(rows.iter().all(|r| r.len() == header.len()));
    assert_eq!(rows[0][0], 0.0);
    assert!(rows.windows(2).all(|w| w[1][0] >= w[0][0]), "ell increases");
    // The first row holds the bare couplings and dimensions of the summary.
    let col = |h: String| header.iter().position(|x| *x == h).unwrap();
    let t = &summary["terms"][0];
    let name = t["name"].as_str().unwrap();
    let y0 = t["coupling0"].as_f64().unwrap().abs();
    assert!((rows[0][col(format!("coupling:{name}"))] - y0).abs() < 1e-15);
    assert!(
        (rows[0][col(format!("dimension:{name}"))] - t["dimension0"].as_f64().unwrap()).abs()
            < 1e-12
    );
    let ell_end = summary["ell_end"].as_f64().unwrap();
    assert!((rows.last().unwrap()[0] - ell_end).abs() < 1e-12);
}

/// Runs `pinflow flow` and expects exit code 2 with every fragment in stderr.
fn rejects(args: &[&str], fragments: &[&str]) {
    let assert = pinflow().arg("flow").args(args).assert().code(2);
    let stderr = String::from_utf8_lossy(&assert.get_output().stderr).to_string();
    for f in fragments {
        assert!(stderr.contains(f), "`{f}` missing from: {stderr}");
    }
}

#[test]
fn bad_flags_exit_with_code_2() {
    let wire = demo("spinless_wire.toml");
    let w = wire.to_str().unwrap();
    rejects(&[w, "--ell-max", "0"], &["--ell-max", "> 0"]);
    rejects(&[w, "--y-strong", "-1"], &["--y-strong", "> 0", "-1"]);
    rejects(&[w, "--y-strong=-1"], &["--y-strong", "> 0"]);
    rejects(
        &[w, "--closure-bound", "-1"],
        &["--closure-bound", ">= 0", "-1"],
    );
    rejects(&[w, "--rtol", "0"], &["--rtol", "> 0"]);
    // Below double precision the step control could only fail.
    rejects(&[w, "--rtol", "1e-15"], &["--rtol", "1e-14", "1e-15"]);
    rejects(&[w, "--rtol", "1"], &["--rtol", "below 1"]);
    // A value with an exponent and a leading hyphen reaches the check.
    rejects(&[w, "--atol", "-1e-3"], &["--atol", "> 0", "-0.001"]);
    rejects(&[w, "--max-steps", "0"], &["--max-steps", "from 1"]);
    rejects(&[w, "--floor", "2"], &["--floor", "below y_strong"]);
    rejects(&[w, "--closure", "all"], &["--closure"]);
    rejects(&[w, "--set", "nope=1"], &["unknown parameter `nope`"]);
}

#[test]
fn an_unphysical_point_exits_with_code_2() {
    let wire = demo("spinless_wire.toml");
    rejects(
        &[wire.to_str().unwrap(), "--set", "lambda=1.5"],
        &["not positive definite", "lambda=1.5"],
    );
}

/// The single-wire demo with `edit` applied, written to a temporary file.
fn edited(dir: &Path, name: &str, edit: impl Fn(String) -> String) -> PathBuf {
    let text = std::fs::read_to_string(demo("spinless_wire.toml")).unwrap();
    let changed = edit(text.clone());
    assert_ne!(changed, text, "the edit applies");
    let path = dir.join(name);
    std::fs::write(&path, changed).unwrap();
    path
}

#[test]
fn bad_model_files_exit_with_code_2() {
    let dir = tempfile::tempdir().unwrap();
    let nan = edited(dir.path(), "nan.toml", |t| {
        t.replacen("coupling = 0.05", "coupling = \"sqrt(-1)\"", 1)
    });
    rejects(
        &[nan.to_str().unwrap()],
        &["\"backscatter\".coupling", "finite", "NaN"],
    );
    let unknown = edited(dir.path(), "unknown.toml", |t| {
        t + "\n[flow]\nell_mx = 10\n"
    });
    rejects(
        &[unknown.to_str().unwrap()],
        &["flow.ell_mx", "unknown key"],
    );
    let negative = edited(dir.path(), "negative.toml", |t| {
        t + "\n[flow]\nell_max = -1\n"
    });
    rejects(
        &[negative.to_str().unwrap()],
        &["flow.ell_max", "> 0", "-1"],
    );
    let closure = edited(dir.path(), "closure.toml", |t| {
        t + "\n[flow]\nclosure = \"triples\"\n"
    });
    rejects(
        &[closure.to_str().unwrap()],
        &["flow.closure", "\"pairs\" or \"none\""],
    );
    rejects(
        &[dir.path().join("missing.toml").to_str().unwrap()],
        &["cannot read"],
    );
    let steps = edited(dir.path(), "steps.toml", |t| {
        t + "\n[flow]\nmax_steps = 2.5\n"
    });
    rejects(
        &[steps.to_str().unwrap()],
        &["flow.max_steps", "whole number of steps", "2.5"],
    );
    let tight = edited(dir.path(), "tight.toml", |t| t + "\n[flow]\nrtol = 1e-16\n");
    rejects(&[tight.to_str().unwrap()], &["flow.rtol", "1e-14"]);
}

/// A step limit from the model file is obeyed: three steps cannot reach
/// strong coupling or the end of the flow, and the report says where the
/// integrator stopped.
#[test]
fn a_step_limit_from_the_model_file_ends_the_flow_as_failed() {
    let dir = tempfile::tempdir().unwrap();
    let limited = edited(dir.path(), "limited.toml", |t| {
        t + "\n[flow]\nmax_steps = 3\n"
    });
    let out = pinflow()
        .args(["flow", limited.to_str().unwrap(), "--format", "json"])
        .assert()
        .code(1)
        .get_output()
        .clone();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(stderr.contains("integration failed at ell = "), "{stderr}");
    let json: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(json["outcome"], "failed", "{json}");
    // Without the limit the same model flows to its end.
    pinflow()
        .args(["flow", demo("spinless_wire.toml").to_str().unwrap()])
        .assert()
        .success();
}

/// An open array does not wrap: a generated term built from a translate one
/// wire to the left of its parent's representative is named with shift -1.
/// (Regression: the shift was counted modulo W, so the 8-wire strip showed
/// `tunnel+tunnel@7`, a shift no open array of 8 wires can hold.) The
/// parents of the generated terms of the strip are two-wire terms, so
/// derived: every shift s that exists satisfies |s| <= W - 2 = 6 and the
/// two commuting overlapping translates of `tunnel` are at s = +1 or -1.
#[test]
fn generated_terms_on_an_open_array_name_signed_shifts() {
    let v = flow_json(&[
        demo("laughlin_third_strip.toml").to_str().unwrap(),
        "--set",
        "g=0.9",
    ]);
    let mut shifts = Vec::new();
    for t in v["terms"].as_array().unwrap() {
        let name = t["name"].as_str().unwrap();
        if let Some((_, s)) = name.split_once('@') {
            let s: i64 = s.parse().unwrap();
            assert!(s.abs() <= 6, "{name}: shift past the open strip");
            let parents = t["parents"].as_str().unwrap();
            let unit = if s.abs() == 1 { "wire" } else { "wires" };
            assert!(
                parents.ends_with(&format!("shifted by {s} {unit}")),
                "{name}: {parents}"
            );
            shifts.push(s);
        }
    }
    assert!(shifts.contains(&-1), "no term with shift -1: {shifts:?}");
    assert!(v["terms"]
        .as_array()
        .unwrap()
        .iter()
        .any(|t| t["name"] == "tunnel+tunnel@-1"));
}

/// `--format csv` is for machines: the term column holds the plain name
/// (the winner is a `winner` column), numbers are the JSON values in
/// shortest round-trip form, and a missing momentum is an empty cell.
/// (Regression: the CSV was the text table, with "tunnel (winner)", five
/// significant digits and "-".)
#[test]
fn flow_csv_is_machine_readable() {
    let m = demo("laughlin_third.toml");
    let v = flow_json(&[m.to_str().unwrap(), "--set", "g=0.8"]);
    let out = pinflow()
        .arg("flow")
        .arg(&m)
        .args(["--set", "g=0.8", "--format", "csv"])
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    let csv = String::from_utf8(out).unwrap();
    let mut lines = csv.lines();
    assert_eq!(
        lines.next().unwrap(),
        "name,origin,spin,coupling0,dimension0,coupling,dimension,momentum,ell_k,winner"
    );
    let terms = v["terms"].as_array().unwrap();
    let rows: Vec<Vec<String>> = lines
        .filter(|l| !l.is_empty())
        .map(|l| l.split(',').map(str::to_string).collect())
        .collect();
    assert_eq!(rows.len(), terms.len());
    let mut winners = 0;
    for (row, t) in rows.iter().zip(terms) {
        assert_eq!(row[0], t["name"].as_str().unwrap());
        for (col, key) in [
            (3, "coupling0"),
            (4, "dimension0"),
            (5, "coupling"),
            (6, "dimension"),
        ] {
            same(&row[col], &t[key], key);
        }
        match t["ell_k"].as_f64() {
            Some(_) => same(&row[8], &t["ell_k"], "ell_k"),
            None => assert_eq!(row[8], ""),
        }
        let winner = v["winner"].as_str() == t["name"].as_str();
        assert_eq!(row[9], winner.to_string());
        winners += winner as usize;
    }
    assert_eq!(winners, 1, "the demo at g=0.8 has one winner");
}

/// A CSV cell holds the full double: it agrees with the JSON value to the
/// last bit up to serde_json's own parsing, which (without its
/// `float_roundtrip` feature) may be one unit in the last place off.
fn same(cell: &str, json: &Value, key: &str) {
    let a: f64 = cell.parse().unwrap();
    let b = json.as_f64().unwrap();
    assert!(
        (a - b).abs() <= 2.0 * f64::EPSILON * b.abs(),
        "{key}: CSV {cell}, JSON {b}"
    );
    assert!(cell.len() > 8 || a == b, "{key}: {cell} looks rounded");
}
