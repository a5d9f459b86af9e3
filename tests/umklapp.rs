//! Momentum conserved modulo a reciprocal lattice vector (`momentum_period`).
//!
//! Model: one wire of spinless fermions, fields (phi_R, phi_L) with
//! K = diag(1, -1), t = (1, 1), V = [[1, lam], [lam, 1]] and momenta
//! (k_F, -k_F) in units of 1/a, so that half filling is k_F = pi/2 and the
//! reciprocal lattice vector is G = 2 pi.
//!
//! Values used below:
//! - K_L = sqrt((1 - lam)/(1 + lam)) and the umklapp term m = (2, -2) has
//!   Delta = 4 K_L [Giamarchi, "Quantum Physics in One Dimension" (2004),
//!   ch. 2; the same source as tests/checks_single_wire.rs]. Umklapp is
//!   relevant for K_L < 1/2.
//! - Momentum mismatch of m = (a, b): a k_F - b k_F (derived: sum_I m_I k_I).
//!   Umklapp (2, -2): 4 k_F, which is 2 pi = G at half filling (conserved
//!   modulo G), and 4 (pi/2 + d) - 2 pi = 4 d at k_F = pi/2 + d.
//!   Backscattering (1, -1): 2 k_F = pi = G/2 at half filling, the tie of the
//!   reduction to (-G/2, G/2]; the tie rule gives +G/2 = +pi, for (-1, 1)
//!   (mismatch -pi) as well. (3, -3): 6 k_F = 3 pi, reduced to pi (tie);
//!   at k_F = pi/2 + d it is 3 pi + 6 d, reduced by one G to pi + 6 d, which
//!   lies above G/2, so by two G to 6 d - pi.

mod flowcommon;

use std::path::Path;

use assert_cmd::Command;
use flowcommon::{lam_for, luttinger, num, tight};
use pinflow::dims::DimsReport;
use pinflow::flow::{Closure, Flow, Outcome};
use serde_json::Value;

const PI: f64 = std::f64::consts::PI;
const TOL: f64 = 1e-12;

/// The wire at `lam` and `kF`, with `period` as the momentum_period line
/// (empty: none), and the terms umklapp (2, -2), backscatter (1, -1),
/// backscatter_reversed (-1, 1) and six_kf (3, -3), each with `coupling`.
fn wire(lam: f64, kf: f64, period: &str, terms: &[(&str, &str)], coupling: f64) -> String {
    let mut s = format!(
        "name = \"wire\"\n[params]\nlam = {}\nkF = {}\n[fields]\nK = [[1, 0], [0, -1]]\ncharge = [1, 1]\nV = [[\"1\", \"lam\"], [\"lam\", \"1\"]]\nmomentum = [\"kF\", \"-kF\"]\n{period}\n",
        num(lam),
        num(kf)
    );
    for (name, m) in terms {
        s.push_str(&format!(
            "\n[[term]]\nname = \"{name}\"\nparticles = {m}\ncoupling = {}\n",
            num(coupling)
        ));
    }
    s
}

const ALL: &[(&str, &str)] = &[
    ("umklapp", "[2, -2]"),
    ("backscatter", "[1, -1]"),
    ("backscatter_reversed", "[-1, 1]"),
    ("six_kf", "[3, -3]"),
];

const PERIOD: &str = "momentum_period = \"2*pi\"";

fn dims(text: &str) -> DimsReport {
    let sys = flowcommon::system(text);
    let p = flowcommon::point(&sys);
    DimsReport::build(&sys, &p).unwrap_or_else(|e| panic!("{e}"))
}

fn row<'a>(r: &'a DimsReport, name: &str) -> &'a pinflow::dims::TermRow {
    r.terms.iter().find(|t| t.name == name).unwrap()
}

fn close(what: &str, a: f64, b: f64, tol: f64) {
    assert!((a - b).abs() <= tol, "{what}: got {a}, expected {b}");
}

#[test]
fn umklapp_at_half_filling_is_conserved_modulo_the_period() {
    let lam = 0.3;
    let r = dims(&wire(lam, PI / 2.0, PERIOD, ALL, 0.1));
    assert_eq!(r.momentum_period, Some(2.0 * PI));
    let u = row(&r, "umklapp");
    assert_eq!(u.momentum, Some(0.0), "4 k_F = 2 pi = G");
    assert_eq!(u.momentum_conserved, Some(true));
    // Delta = 4 K_L [Giamarchi (2004), ch. 2]; the period does not touch it.
    close(
        "umklapp dimension",
        u.dimension,
        4.0 * luttinger(lam),
        1e-10,
    );
    // The tie 2 k_F = G/2 is reported as +G/2, whichever its sign.
    for name in ["backscatter", "backscatter_reversed", "six_kf"] {
        let t = row(&r, name);
        close(name, t.momentum.unwrap(), PI, TOL);
        assert_eq!(t.momentum_conserved, Some(false), "{name}");
    }
    // The note states the period.
    assert!(
        r.notes
            .iter()
            .any(|n| n.contains("modulo the period G = 6.28319")),
        "{:?}",
        r.notes
    );
}

#[test]
fn without_the_period_umklapp_is_mismatched_by_four_kf() {
    let r = dims(&wire(0.3, PI / 2.0, "", ALL, 0.1));
    assert_eq!(r.momentum_period, None);
    let u = row(&r, "umklapp");
    close("umklapp", u.momentum.unwrap(), 2.0 * PI, TOL);
    assert_eq!(u.momentum_conserved, Some(false));
    close(
        "backscatter_reversed",
        row(&r, "backscatter_reversed").momentum.unwrap(),
        -PI,
        TOL,
    );
    close("six_kf", row(&r, "six_kf").momentum.unwrap(), 3.0 * PI, TOL);
    assert!(!r.notes.iter().any(|n| n.contains("momentum_period")));
}

#[test]
fn away_from_half_filling_umklapp_is_mismatched_by_four_d() {
    let d = 0.05;
    let r = dims(&wire(0.3, PI / 2.0 + d, PERIOD, ALL, 0.1));
    let u = row(&r, "umklapp");
    close("umklapp", u.momentum.unwrap(), 4.0 * d, TOL);
    assert_eq!(u.momentum_conserved, Some(false));
    close(
        "backscatter",
        row(&r, "backscatter").momentum.unwrap(),
        -PI + 2.0 * d,
        TOL,
    );
    close(
        "backscatter_reversed",
        row(&r, "backscatter_reversed").momentum.unwrap(),
        PI - 2.0 * d,
        TOL,
    );
    close(
        "six_kf",
        row(&r, "six_kf").momentum.unwrap(),
        6.0 * d - PI,
        TOL,
    );
    // Every reported mismatch is the representative in (-G/2, G/2].
    for t in &r.terms {
        let k = t.momentum.unwrap();
        assert!(k > -PI && k <= PI, "{}: {k}", t.name);
    }
}

#[test]
fn the_period_is_an_expression_in_the_parameters() {
    // G = 4 k_F: conserved at every k_F, not only at half filling.
    let r = dims(&wire(
        0.3,
        0.3,
        "momentum_period = \"4*kF\"",
        &[("umklapp", "[2, -2]")],
        0.1,
    ));
    assert_eq!(row(&r, "umklapp").momentum_conserved, Some(true));
}

#[test]
fn arrays_take_the_period_too() {
    let text = format!(
        "[params]\nlam = 0.3\nkF = {}\n[array]\nwires = 4\nK = [[1, 0], [0, -1]]\ncharge = [1, 1]\nmomentum = [\"kF\", \"-kF\"]\nmomentum_period = \"2*pi\"\n[array.V]\n0 = [[\"1\", \"lam\"], [\"lam\", \"1\"]]\n\n[[term]]\nname = \"umklapp\"\nparticles = {{ 0 = [2, -2] }}\n\n[[term]]\nname = \"umklapp_pair\"\nparticles = {{ 0 = [2, -2], 1 = [-1, 1] }}\n",
        num(PI / 2.0)
    );
    let r = dims(&text);
    assert_eq!(row(&r, "umklapp").momentum, Some(0.0));
    // 4 k_F - 2 k_F = pi: the tie again.
    close(
        "umklapp_pair",
        row(&r, "umklapp_pair").momentum.unwrap(),
        PI,
        TOL,
    );
    let infinite = text.replace("wires = 4", "wires = \"infinite\"");
    let r = dims(&infinite);
    assert_eq!(row(&r, "umklapp").momentum, Some(0.0));
}

// ------------------------------------------------------------------ flow

/// K_L = 0.4 < 1/2: umklapp has Delta = 1.6 and grows.
fn strong_repulsion() -> f64 {
    lam_for(0.4)
}

fn flow(text: &str) -> pinflow::flow::FlowResult {
    let sys = flowcommon::system(text);
    let p = flowcommon::point(&sys);
    Flow::new(&sys, tight(Closure::Pairs, 40.0))
        .run(&p)
        .unwrap_or_else(|e| panic!("{e}"))
}

#[test]
fn umklapp_reaches_strong_coupling_at_half_filling_only_with_the_period() {
    let lam = strong_repulsion();
    let terms = &[("umklapp", "[2, -2]")];
    let with = flow(&wire(lam, PI / 2.0, PERIOD, terms, 0.1));
    close(
        "Delta0 = 4 K_L",
        with.terms[0].dimension0,
        4.0 * luttinger(lam),
        1e-10,
    );
    assert_eq!(with.outcome, Outcome::Strong);
    assert_eq!(with.winner.as_deref(), Some("umklapp"));
    assert_eq!(with.terms[0].momentum, Some(0.0));
    assert_eq!(with.terms[0].ell_k, None);
    // Tree level alone, y = 0.1 e^{(2 - 1.6) ell} reaches 1 at
    // ell = ln(10)/0.4 = 5.76; the D feedback only lowers Delta, so the
    // flow gets there no later.
    let ell = with.ell_star.unwrap();
    assert!(ell > 1.0 && ell <= 10f64.ln() / 0.4 + 1e-6, "ell* = {ell}");

    // Without the period the mismatch is 2 pi: ell_k = ln(1/(2 pi)) < 0, so
    // the term is cut off before it flows at all.
    let without = flow(&wire(lam, PI / 2.0, "", terms, 0.1));
    assert_ne!(without.outcome, Outcome::Strong);
    close(
        "ell_k without the period",
        without.terms[0].ell_k.unwrap(),
        -(2.0 * PI).ln(),
        TOL,
    );
}

#[test]
fn away_from_half_filling_umklapp_stops_at_ell_k() {
    let lam = strong_repulsion();
    let d = 0.05;
    let r = flow(&wire(
        lam,
        PI / 2.0 + d,
        PERIOD,
        &[("umklapp", "[2, -2]")],
        0.1,
    ));
    // Mismatch 4 d = 0.2 (derived in the module docs): ell_k = ln(1/0.2).
    close("momentum", r.terms[0].momentum.unwrap(), 4.0 * d, TOL);
    close(
        "ell_k",
        r.terms[0].ell_k.unwrap(),
        (1.0 / 0.2f64).ln(),
        1e-12,
    );
    // y grows by at most about e^{0.4 ln 5} = 1.9 before the cut: no gap.
    assert_ne!(r.outcome, Outcome::Strong);
    assert!(r.terms[0].coupling < 1.0);
}

#[test]
fn generated_terms_reduce_the_sum_of_their_parents_momenta() {
    // Only backscattering is listed (mismatch 2 k_F = pi); the pairs closure
    // generates 2*backscatter = (2, -2), umklapp, with the sum 4 k_F = 2 pi,
    // which the period reduces to 0.
    let lam = strong_repulsion();
    let terms = &[("backscatter", "[1, -1]")];
    let find = |r: &pinflow::flow::FlowResult| {
        r.terms
            .iter()
            .find(|t| t.name == "2*backscatter")
            .cloned()
            .unwrap_or_else(|| panic!("no generated umklapp in {:?}", r.terms))
    };
    let with = find(&flow(&wire(lam, PI / 2.0, PERIOD, terms, 0.1)));
    assert_eq!(with.origin, "generated");
    assert_eq!(with.momentum, Some(0.0));
    assert_eq!(with.ell_k, None);
    let without = find(&flow(&wire(lam, PI / 2.0, "", terms, 0.1)));
    close("2*backscatter", without.momentum.unwrap(), 2.0 * PI, TOL);
}

// ------------------------------------------------------- command line

fn pinflow(dir: &Path) -> Command {
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_pinflow"));
    cmd.current_dir(dir);
    cmd
}

fn write(dir: &Path, text: &str) {
    std::fs::write(dir.join("wire.toml"), text).unwrap();
}

fn hunt(text: &str) -> Value {
    hunt_with(text, "conserved")
}

/// `pinflow hunt --max-dim 2 --momentum FILTER` on the model text.
fn hunt_with(text: &str, filter: &str) -> Value {
    let dir = tempfile::tempdir().unwrap();
    write(dir.path(), text);
    let out = pinflow(dir.path())
        .args([
            "hunt",
            "wire.toml",
            "--max-dim",
            "2",
            "--momentum",
            filter,
            "--format",
            "json",
        ])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

/// The particle contents of the listed operators.
fn found(r: &Value) -> Vec<Vec<i64>> {
    r["operators"]
        .as_array()
        .unwrap()
        .iter()
        .map(|o| {
            o["particles"]
                .as_array()
                .unwrap()
                .iter()
                .map(|x| x.as_i64().unwrap())
                .collect()
        })
        .collect()
}

#[test]
fn hunt_finds_umklapp_at_half_filling_only_with_the_period() {
    // At K_L = 0.4 the neutral null operators (a, -a) have Delta = a^2 K_L
    // (derived: l = (a, a), Delta = (2a)^2 K_L / 4), so below 2 only
    // backscattering (0.4, mismatch pi) and umklapp (1.6, mismatch 2 pi).
    let lam = strong_repulsion();
    let terms = &[("umklapp", "[2, -2]")];
    let with = hunt(&wire(lam, PI / 2.0, PERIOD, terms, 0.1));
    assert_eq!(found(&with), vec![vec![2, -2]], "{with}");
    assert_eq!(with["operators"][0]["model_term"], "umklapp");
    assert_eq!(with["operators"][0]["momentum"], 0.0);
    assert_eq!(with["momentum_period"], 2.0 * PI);
    // 2 pi is not a small rational: the float path with its tolerance.
    assert_eq!(with["momentum_exact"], false);

    let without = hunt(&wire(lam, PI / 2.0, "", terms, 0.1));
    assert!(found(&without).is_empty(), "{without}");
    assert!(without["momentum_period"].is_null());

    let away = hunt(&wire(lam, PI / 2.0 + 0.05, PERIOD, terms, 0.1));
    assert!(found(&away).is_empty(), "{away}");
}

#[test]
fn hunt_reduces_rational_momenta_exactly() {
    // Momenta in units of G: k_F = 1/4, G = 1 (both rational): the exact
    // path, k/G integral. At k_F = 1/4 + 1/100 umklapp is off by 1/25.
    let lam = strong_repulsion();
    let terms = &[("umklapp", "[2, -2]")];
    let with = hunt(&wire(lam, 0.25, "momentum_period = 1", terms, 0.1));
    assert_eq!(with["momentum_exact"], true);
    assert_eq!(found(&with), vec![vec![2, -2]], "{with}");
    let away = hunt(&wire(lam, 0.26, "momentum_period = 1", terms, 0.1));
    assert_eq!(away["momentum_exact"], true);
    assert!(found(&away).is_empty(), "{away}");
    // --momentum any lists both, with the reduced mismatch: backscattering
    // at 2 k_F = 0.52, reduced by G = 1 to -0.48.
    let r = hunt_with(&wire(lam, 0.26, "momentum_period = 1", terms, 0.1), "any");
    let ops = r["operators"].as_array().unwrap();
    assert_eq!(ops.len(), 2, "{r}");
    let k_of = |m: i64| {
        ops.iter()
            .find(|o| o["particles"][0].as_i64().unwrap().abs() == m)
            .unwrap()["momentum"]
            .as_f64()
            .unwrap()
            .abs()
    };
    close("backscatter |k|", k_of(1), 0.48, 1e-12);
    close("umklapp |k|", k_of(2), 0.04, 1e-12);
}

#[test]
fn a_scan_through_half_filling_finds_umklapp_only_there() {
    let dir = tempfile::tempdir().unwrap();
    write(
        dir.path(),
        &wire(
            strong_repulsion(),
            PI / 2.0,
            PERIOD,
            &[("umklapp", "[2, -2]")],
            0.1,
        ),
    );
    // Three points: pi/2 - 0.1, pi/2 (to rounding) and pi/2 + 0.1.
    let axis = format!("kF={}:{}:3", PI / 2.0 - 0.1, PI / 2.0 + 0.1);
    pinflow(dir.path())
        .args(["scan", "wire.toml", "--x", &axis, "--out", "run", "--quiet"])
        .assert()
        .success();
    let mut rd = csv::Reader::from_path(dir.path().join("run/points.csv")).unwrap();
    let outcomes: Vec<String> = rd.records().map(|r| r.unwrap()[1].to_string()).collect();
    assert_eq!(outcomes[1], "strong", "{outcomes:?}");
    assert!(
        outcomes[0] != "strong" && outcomes[2] != "strong",
        "{outcomes:?}"
    );
}

/// Run `dims` on a model and return (exit code, first line of stderr).
fn dims_error(text: &str) -> (i32, String) {
    let dir = tempfile::tempdir().unwrap();
    write(dir.path(), text);
    let out = pinflow(dir.path())
        .args(["dims", "wire.toml"])
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    (
        out.status.code().unwrap_or(-1),
        err.lines().next().unwrap_or("").to_string(),
    )
}

#[test]
fn a_period_needs_momenta() {
    let text = wire(0.3, PI / 2.0, PERIOD, &[("umklapp", "[2, -2]")], 0.1)
        .replace("momentum = [\"kF\", \"-kF\"]\n", "");
    let (code, msg) = dims_error(&text);
    assert_eq!(code, 2);
    assert!(
        msg.contains("wire.toml: fields.momentum_period: needs fields.momentum too"),
        "{msg}"
    );
    let array = "[array]\nwires = 4\nK = [[1, 0], [0, -1]]\ncharge = [1, 1]\nmomentum_period = 1\n[array.V]\n0 = [[1, 0.3], [0.3, 1]]\n";
    let (code, msg) = dims_error(array);
    assert_eq!(code, 2);
    assert!(
        msg.contains("array.momentum_period: needs array.momentum too"),
        "{msg}"
    );
}

#[test]
fn a_period_must_be_finite_and_positive_at_the_point() {
    for (g, shown) in [
        ("0", "found 0 at"),
        ("\"-2*pi\"", "found -6.283185307179586 at"),
        ("\"1/(lam - 0.3)\"", "found inf at"),
        ("\"sqrt(-lam)\"", "found NaN at"),
    ] {
        let text = wire(
            0.3,
            PI / 2.0,
            &format!("momentum_period = {g}"),
            &[("umklapp", "[2, -2]")],
            0.1,
        );
        let (code, msg) = dims_error(&text);
        assert_eq!(code, 2, "{g}: {msg}");
        assert!(
            msg.contains("wire.toml: fields.momentum_period: must be a finite number > 0"),
            "{g}: {msg}"
        );
        assert!(msg.contains(shown), "{g}: {msg}");
        assert!(msg.contains("kF=1.5707963267948966, lam=0.3"), "{g}: {msg}");
    }
}

/// `pinflow flow` states the period it reduced the momenta by, in the JSON
/// field `momentum_period` and in a note, and gives null without one.
#[test]
fn the_flow_report_states_the_period() {
    let terms = [("umklapp", "[2, -2]")];
    let run = |period: &str| -> Value {
        let dir = tempfile::tempdir().unwrap();
        write(dir.path(), &wire(0.5, PI / 2.0, period, &terms, 0.1));
        let out = pinflow(dir.path())
            .args(["flow", "wire.toml", "--format", "json"])
            .output()
            .unwrap();
        serde_json::from_slice(&out.stdout).unwrap()
    };
    let with = run(PERIOD);
    assert!((with["momentum_period"].as_f64().unwrap() - 2.0 * PI).abs() < 1e-12);
    let notes = with["notes"].as_array().unwrap();
    assert!(
        notes.iter().any(|n| n
            .as_str()
            .unwrap()
            .contains("conserved modulo the period G = 6.28319")),
        "{notes:?}"
    );
    let without = run("");
    assert!(without["momentum_period"].is_null(), "{without}");
}
