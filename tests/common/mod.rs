//! Helpers shared by the integration tests: build a model from TOML text
//! through the public API (`Model::parse` -> `System::new` ->
//! `DimsReport::build`) and look up terms by name; run the binary on a
//! bundled model and compare its JSON without the provenance block.
#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::time::Duration;

use pinflow::core::system::System;
use pinflow::dims::{DimsReport, TermRow};
use pinflow::error::{Error, InputError};
use pinflow::model::Model;
use pinflow::search::{ChargeFilter, HuntOptions, MomentumFilter, SpinFilter};

/// The pinflow binary built for these tests.
pub const BIN: &str = env!("CARGO_BIN_EXE_pinflow");

/// A bundled model of `flows/`.
pub fn flow_file(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("flows")
        .join(name)
}

/// The command, run in `dir` and given up after 120 s.
pub fn pinflow(dir: &Path) -> assert_cmd::Command {
    let mut cmd = assert_cmd::Command::new(BIN);
    cmd.current_dir(dir).timeout(Duration::from_secs(120));
    cmd
}

/// A command's JSON output without its `provenance` block (which it must
/// have).
pub fn without_provenance(json: &[u8]) -> serde_json::Value {
    let mut v: serde_json::Value = serde_json::from_slice(json).expect("JSON output");
    v.as_object_mut()
        .expect("a JSON object")
        .remove("provenance")
        .expect("a provenance block");
    v
}

/// The refusal (work above a limit) inside `e`; panics naming any other
/// error.
pub fn refusal(e: Error) -> InputError {
    match e {
        Error::Refused(e) => e,
        other => panic!("expected a refusal of work above a limit, got {other}"),
    }
}

/// The input error inside `e`; panics naming any other error.
pub fn input_error(e: Error) -> InputError {
    match e {
        Error::Input(e) => e,
        other => panic!("expected an input error, got {other}"),
    }
}

/// Search options that keep every charge, spin and momentum up to
/// `max_dim`.
pub fn every_operator(max_dim: f64) -> HuntOptions {
    HuntOptions {
        max_dim,
        charge: ChargeFilter::Any,
        spin: SpinFilter::Any,
        momentum: Some(MomentumFilter::Any),
        ..HuntOptions::default()
    }
}

/// Parse model text and prepare the system; panics with the error message.
pub fn system(toml: &str) -> System {
    let model = Model::parse(toml, "test.toml").unwrap_or_else(|e| panic!("model: {e}"));
    System::new(model).unwrap_or_else(|e| panic!("system: {e}"))
}

/// The `dims` report at the model's default parameters, with overrides.
pub fn report_at(toml: &str, overrides: &[(&str, f64)]) -> DimsReport {
    let sys = system(toml);
    let set: Vec<(String, f64)> = overrides.iter().map(|(n, v)| (n.to_string(), *v)).collect();
    let point = sys
        .model
        .point_with(&set, "test")
        .unwrap_or_else(|e| panic!("point: {e}"));
    DimsReport::build(&sys, &point).unwrap_or_else(|e| panic!("report: {e}"))
}

/// The `dims` report at the model's default parameters.
pub fn report(toml: &str) -> DimsReport {
    report_at(toml, &[])
}

/// The row of a term, by name.
pub fn term<'a>(r: &'a DimsReport, name: &str) -> &'a TermRow {
    r.terms
        .iter()
        .find(|t| t.name == name)
        .unwrap_or_else(|| panic!("no term named {name}"))
}

/// Index of a term in the report, by name.
pub fn term_index(r: &DimsReport, name: &str) -> usize {
    r.terms
        .iter()
        .position(|t| t.name == name)
        .unwrap_or_else(|| panic!("no term named {name}"))
}

/// Assert |a - b| <= tol * max(1, |b|), with a message naming the check.
#[track_caller]
pub fn assert_close(what: &str, a: f64, b: f64, tol: f64) {
    let scale = b.abs().max(1.0);
    assert!(
        (a - b).abs() <= tol * scale,
        "{what}: got {a}, expected {b} (difference {:e}, tolerance {tol:e})",
        (a - b).abs()
    );
}

/// Format an integer matrix as a TOML array of arrays.
pub fn toml_int_matrix(m: &[Vec<i64>]) -> String {
    let rows: Vec<String> = m.iter().map(|r| toml_int_vector(r)).collect();
    format!("[{}]", rows.join(", "))
}

/// Format an integer vector as a TOML array.
pub fn toml_int_vector(v: &[i64]) -> String {
    let items: Vec<String> = v.iter().map(|x| x.to_string()).collect();
    format!("[{}]", items.join(", "))
}

/// Format a float matrix as a TOML array of arrays (shortest round-trip
/// decimal form, so the parsed value is bit-identical).
pub fn toml_f64_matrix(m: &[Vec<f64>]) -> String {
    let rows: Vec<String> = m
        .iter()
        .map(|r| {
            let items: Vec<String> = r.iter().map(|x| format!("{x:?}")).collect();
            format!("[{}]", items.join(", "))
        })
        .collect();
    format!("[{}]", rows.join(", "))
}

/// The sliding Luttinger liquid of the project's check values ("Infinite
/// arrays"): spinless wires, intrawire g and nearest-neighbour
/// density-density w, written with K0 and lam: g = (1 - K0^2)/(1 + K0^2),
/// w = lam (1 + g)/4. Terms cdw, pair_hop, hop with the given coupling;
/// `wires` is a TOML value (a number or "\"infinite\"").
pub fn sliding(wires: &str, couplings: f64) -> String {
    format!(
        r#"
name = "sliding Luttinger liquid"

[params]
K0 = 0.8
lam = 0.5

[array]
wires = {wires}
K = [[1, 0], [0, -1]]
charge = [1, 1]

[array.V]
0 = [["1", "(1 - K0^2)/(1 + K0^2)"], ["(1 - K0^2)/(1 + K0^2)", "1"]]
1 = [["lam*(1 + (1 - K0^2)/(1 + K0^2))/4", "lam*(1 + (1 - K0^2)/(1 + K0^2))/4"],
     ["lam*(1 + (1 - K0^2)/(1 + K0^2))/4", "lam*(1 + (1 - K0^2)/(1 + K0^2))/4"]]

[[term]]
name = "cdw"
particles = {{ 0 = [1, -1], 1 = [-1, 1] }}
coupling = {couplings}

[[term]]
name = "pair_hop"
particles = {{ 0 = [1, 1], 1 = [-1, -1] }}
coupling = {couplings}

[[term]]
name = "hop"
particles = {{ 0 = [1, 0], 1 = [-1, 0] }}
coupling = {couplings}
"#
    )
}

/// Peak resident memory of a running process, in kB (Linux; None elsewhere
/// or once the process has ended).
pub fn peak_kb(pid: u32) -> Option<u64> {
    let status = std::fs::read_to_string(format!("/proc/{pid}/status")).ok()?;
    status
        .lines()
        .find(|l| l.starts_with("VmHWM:"))?
        .split_whitespace()
        .nth(1)?
        .parse()
        .ok()
}

/// The text elements of an SVG, trimmed.
pub fn svg_texts(svg: &str) -> Vec<String> {
    svg.split("<text")
        .skip(1)
        .filter_map(|s| {
            let body = &s[s.find('>')? + 1..];
            Some(body[..body.find("</text>")?].trim().to_string())
        })
        .collect()
}

/// An explicit open array of `wires` spinless wires (fields R, L of each
/// wire; K = diag(1, -1) per wire), the banded V of
/// `benches/models/explicit40.toml`, and the Laughlin tunnelling and CDW
/// terms between neighbours written out one by one (invented numbers: a
/// benchmark, not a physics demo). Every operator is its own term, so the
/// hunt of Delta <= 2 finds thousands besides the terms: 2797 on 8 wires,
/// 24057 on 12.
pub fn explicit_array(wires: usize) -> String {
    let n = 2 * wires;
    let mut k = vec![vec!["0".to_string(); n]; n];
    let mut v = vec![vec!["\"0\"".to_string(); n]; n];
    for w in 0..wires {
        let (r, l) = (2 * w, 2 * w + 1);
        k[r][r] = "1".into();
        k[l][l] = "-1".into();
        for (i, j, x) in [(r, r, "1"), (l, l, "1"), (r, l, "lambda"), (l, r, "lambda")] {
            v[i][j] = format!("\"{x}\"");
        }
        if w + 1 < wires {
            let (r2, l2) = (r + 2, l + 2);
            let couplings = [
                (r, r2, "0.4*g"),
                (r, l2, "0.8*g"),
                (l, r2, "0.2*g"),
                (l, l2, "0.4*g"),
            ];
            for (i, j, x) in couplings {
                v[i][j] = format!("\"{x}\"");
                v[j][i] = format!("\"{x}\"");
            }
        }
    }
    let rows = |m: &[Vec<String>]| {
        let r: Vec<String> = m
            .iter()
            .map(|row| format!("[{}]", row.join(", ")))
            .collect();
        format!("[{}]", r.join(", "))
    };
    let mut text =
        format!(
        "[params]\nlambda = 0.8\ng = 0.5\n[fields]\nK = {}\ncharge = [{}]\nV = {}\nwires = [{}]\n",
        rows(&k),
        vec!["1"; n].join(", "),
        rows(&v),
        (0..n).map(|f| (f / 2).to_string()).collect::<Vec<_>>().join(", ")
    );
    for w in 0..wires - 1 {
        for (name, cell) in [("tunnel", [-2, 1, -1, 2]), ("cdw", [1, -1, -1, 1])] {
            let mut p = vec![0i64; n];
            p[2 * w..2 * w + 4].copy_from_slice(&cell);
            let p: Vec<String> = p.iter().map(|x| x.to_string()).collect();
            text += &format!(
                "[[term]]\nname = \"{name}_{w}\"\nparticles = [{}]\ncoupling = 0.05\n",
                p.join(", ")
            );
        }
    }
    text
}
