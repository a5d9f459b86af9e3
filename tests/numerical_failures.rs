//! Numerical failure is a result, never a crash and never a silent wrong
//! answer:
//! - a nearly singular V is computed (in double-double when needed) while
//!   every dimension's error bound stays below 1e-8 and refused (exit 2,
//!   naming the point and the term) when it does not; the q-space path of
//!   an infinite array refuses a D(q) that fails D K D = K^-1;
//! - a non-finite value is caught where it first appears (V entries,
//!   momenta, couplings, phases, extra dimensions) and named by its key;
//! - an integrator that cannot take a step gives the outcome "failed" with
//!   "integration failed at ell = ...";
//! - a flow whose D drifts from D K D = K^-1 says so in its notes.

use pinflow::core::system::System;
use pinflow::dims::DimsReport;
use pinflow::error::Error;
use pinflow::flow::options::FlowOverrides;
use pinflow::flow::report::FlowReport;
use pinflow::flow::{Flow, FlowOptions, FlowResult, Outcome};
use pinflow::model::Model;
use pinflow::scan::{Axis, Scan, ScanSpec};
use pinflow::search::{self, HuntOptions};

fn system(text: &str) -> System {
    let model = Model::parse(text, "test.toml").unwrap_or_else(|e| panic!("model: {e}"));
    System::new(model).unwrap_or_else(|e| panic!("system: {e}"))
}

fn defaults(sys: &System) -> Vec<f64> {
    sys.model.params.defaults().to_vec()
}

fn flow_opts(sys: &System) -> FlowOptions {
    FlowOptions::resolve(&sys.model, &FlowOverrides::default()).expect("flow options")
}

/// Explicit two-field model with K = [[2, 1], [1, -3]] (det -7, one mode of
/// each chirality) and V = diag(s, 1): condition number 1/s.
fn skewed(s: &str) -> String {
    format!(
        "[params]\ns = {s}\n[fields]\nK = [[2, 1], [1, -3]]\ncharge = [1, 0]\nV = [[\"s\", 0], [0, 1]]\n\
         [[term]]\nname = \"b\"\nparticles = [1, -1]\n"
    )
}

fn numerical_message(r: Result<impl std::fmt::Debug, Error>) -> String {
    match r {
        Err(e @ Error::Numerical(_)) => {
            assert_eq!(e.exit_code(), 1, "a numerical failure exits with 1");
            e.to_string()
        }
        other => panic!("expected a numerical error, found {other:?}"),
    }
}

fn inaccurate_message(r: Result<impl std::fmt::Debug, Error>) -> String {
    match r {
        Err(e @ Error::Inaccurate(_)) => {
            assert_eq!(e.exit_code(), 2, "a refused point exits with 2");
            e.to_string()
        }
        other => panic!("expected a refused point, found {other:?}"),
    }
}

#[test]
fn a_v_with_condition_number_1e12_is_computed_on_the_dense_path() {
    // Reference: mpmath at 50 digits (the method of
    // tests/reference/fixed_point_mpmath.py) gives Delta of l = K (1, -1)
    // = (1, 4) as 2.00000000000174999999999825 for V = diag(1e-12, 1).
    // Doubles alone were refused here (D K D = K^-1 off by 1e-4); the
    // double-double route gets it to rounding, with a bound that says so.
    let sys = system(&skewed("1e-12"));
    let r = DimsReport::build(&sys, &defaults(&sys)).expect("computed");
    let want = 2.000_000_000_001_75;
    let rel = (r.terms[0].dimension - want).abs() / want;
    assert!(
        rel < 1e-15,
        "Delta = {} (relative error {rel:e})",
        r.terms[0].dimension
    );
    let bound = r.terms[0].dimension_error;
    assert!(bound >= rel && bound < 1e-12, "bound {bound:e}");
    assert!(
        r.notes.iter().any(|n| n.contains("double-double")),
        "{:?}",
        r.notes
    );
    Flow::new(&sys, flow_opts(&sys))
        .run(&defaults(&sys))
        .expect("the flow starts from an accurate D");
}

#[test]
fn a_v_with_condition_number_1e30_is_refused_on_the_dense_path() {
    let sys = system(&skewed("1e-30"));
    let point = defaults(&sys);
    let msg = inaccurate_message(DimsReport::build(&sys, &point));
    for part in [
        "cannot be computed accurately",
        "error bound",
        "term \"b\"",
        "s=0.000000000000000000000000000001",
    ] {
        assert!(msg.contains(part), "`{part}` missing from: {msg}");
    }
    inaccurate_message(Flow::new(&sys, flow_opts(&sys)).run(&point));
    inaccurate_message(search::hunt(&sys, &point, &HuntOptions::default()));
}

#[test]
fn a_v_with_condition_number_1e6_is_computed() {
    // Derived: with V = diag(s, 1) the fixed point still satisfies the
    // identity to rounding; dims succeeds.
    let sys = system(&skewed("1e-6"));
    let r = DimsReport::build(&sys, &defaults(&sys)).expect("computed");
    assert!(r.terms[0].dimension.is_finite() && r.terms[0].dimension > 0.0);
}

#[test]
fn a_nearly_singular_v_that_still_gives_an_accurate_fixed_point_is_computed() {
    // Single wire, V = [[1, lam], [lam, 1]] with lam = 1 - 1e-9: condition
    // number (1 + lam)/(1 - lam) = 2e9. The backscattering term l = (1, 1)
    // has Delta = K_L = sqrt((1 - lam)/(1 + lam)) [Giamarchi, Quantum
    // Physics in One Dimension (2004), ch. 2; the same check as the unit
    // test of fixed_point.rs]; 1 - lam is exact in floats (Sterbenz).
    let lam: f64 = 1.0 - 1e-9;
    let text = format!(
        "[params]\nlambda = {lam:?}\n[fields]\nK = [[1, 0], [0, -1]]\ncharge = [1, 1]\n\
         V = [[\"1\", \"lambda\"], [\"lambda\", \"1\"]]\n[[term]]\nname = \"backscatter\"\nvector = [1, 1]\n"
    );
    let sys = system(&text);
    let r = DimsReport::build(&sys, &defaults(&sys)).expect("computed");
    let k_l = ((1.0 - lam) / (1.0 + lam)).sqrt();
    let rel = (r.terms[0].dimension - k_l).abs() / k_l;
    assert!(
        rel < 1e-6,
        "Delta = {}, expected {k_l} (relative error {rel:e})",
        r.terms[0].dimension
    );
}

#[test]
fn a_badly_conditioned_v_is_refused_on_the_q_space_path() {
    // A periodic ring (q-space on its W points) and the infinite array
    // (refined quadrature) of the skewed cell: V^(0) = diag(1e-14, 1).
    // `dims` of the ring switches to the dense double-double route (the
    // same numbers); its flow and the infinite array, which carry D(q) in
    // doubles, are refused.
    for wires in ["8", "\"infinite\""] {
        let text = format!(
            "[array]\nwires = {wires}\nK = [[2, 1], [1, -3]]\ncharge = [1, 0]\n\
             [array.V]\n0 = [[1e-14, 0], [0, 1]]\n[[term]]\nname = \"b\"\nparticles = [1, -1]\n"
        );
        let sys = system(&text);
        assert!(sys.q.is_some(), "{wires} wires use the q-space path");
        if wires == "8" {
            let r = DimsReport::build(&sys, &defaults(&sys)).expect("dense route");
            assert!(r.notes.iter().any(|n| n.contains("double-double")));
        } else {
            let msg = numerical_message(DimsReport::build(&sys, &defaults(&sys)));
            assert!(
                msg.contains("cannot be computed accurately") && msg.contains("D K D = K^-1"),
                "{wires} wires: {msg}"
            );
        }
        numerical_message(Flow::new(&sys, flow_opts(&sys)).run(&defaults(&sys)));
    }
}

#[test]
fn a_scan_records_a_refused_point_as_failed_and_goes_on() {
    let sys = system(&skewed("1"));
    let mut opts = flow_opts(&sys);
    opts.ell_max = 3.0;
    let spec = ScanSpec {
        axes: vec![Axis::parse("s=1e-30:1:3:log").expect("axis")],
        base: defaults(&sys),
        options: opts,
        shard: None,
        competitors: None,
    };
    let scan = Scan::new(&sys, b"model", spec).expect("scan");
    let refused = scan.row(0);
    let fine = scan.row(2);
    assert!(refused.contains(",failed,"), "{refused}");
    assert!(!fine.contains("failed"), "{fine}");
}

/// A model whose only problem is one value at the point; every command
/// that evaluates the point names the key.
fn assert_named(text: &str, key: &str, what: &str) {
    let sys = system(text);
    let point = defaults(&sys);
    let check = |name: &str, e: Error| {
        let msg = e.to_string();
        assert_eq!(e.exit_code(), 2, "{name}: {msg}");
        assert!(
            msg.starts_with("test.toml: ") && msg.contains(key) && msg.contains(what),
            "{name}: expected `{key}` and `{what}` in: {msg}"
        );
    };
    check(
        "dims",
        DimsReport::build(&sys, &point).expect_err("dims refuses"),
    );
    check(
        "flow",
        Flow::new(&sys, flow_opts(&sys))
            .run(&point)
            .expect_err("flow refuses"),
    );
}

const WIRE: &str = "[params]\nlambda = 0.3\n[fields]\nK = [[1, 0], [0, -1]]\ncharge = [1, 1]\n";

#[test]
fn non_finite_v_entries_are_named() {
    let text = format!(
        "{WIRE}V = [[\"1\", \"lambda/0\"], [\"lambda/0\", \"1\"]]\n[[term]]\nname = \"b\"\nparticles = [1, -1]\n"
    );
    assert_named(
        &text,
        "fields.V[0][1]",
        "must be a finite number, found inf",
    );
}

#[test]
fn non_finite_couplings_and_phases_are_named() {
    let v = "V = [[\"1\", \"lambda\"], [\"lambda\", \"1\"]]\n";
    let text = format!(
        "{WIRE}{v}[[term]]\nname = \"b\"\nparticles = [1, -1]\ncoupling = \"1/(lambda - 0.3)\"\n"
    );
    assert_named(
        &text,
        "term \"b\".coupling",
        "must be a finite number, found inf",
    );
    let text = format!(
        "{WIRE}{v}[[term]]\nname = \"b\"\nparticles = [1, -1]\nphase = \"ln(lambda - 0.3)\"\n"
    );
    assert_named(&text, "term \"b\".phase", "found -inf");
}

#[test]
fn non_finite_extra_dimensions_are_named() {
    let v = "V = [[\"1\", \"lambda\"], [\"lambda\", \"1\"]]\n";
    let text = format!(
        "{WIRE}{v}[[term]]\nname = \"b\"\nparticles = [1, -1]\nextra_dimension = \"sqrt(-lambda)\"\n"
    );
    assert_named(&text, "term \"b\".extra_dimension", "found NaN");
}

#[test]
fn non_finite_momenta_are_named() {
    let v = "V = [[\"1\", \"lambda\"], [\"lambda\", \"1\"]]\n";
    let text = format!(
        "{WIRE}{v}momentum = [\"sqrt(-lambda)\", \"0\"]\n[[term]]\nname = \"b\"\nparticles = [1, -1]\n"
    );
    assert_named(&text, "fields.momentum[0]", "found NaN");
    // Finite per-wire momenta whose sum over 8 wires overflows.
    let text = "[array]\nwires = 8\nK = [[1, 0], [0, -1]]\ncharge = [1, 1]\nmomentum = [0, 0]\n\
                momentum_per_wire = [1e308, 1e308]\n[array.V]\n0 = [[1, 0], [0, 1]]\n\
                [[term]]\nname = \"b\"\nparticles = [1, -1]\n";
    assert_named(
        text,
        "array.momentum_per_wire[0]",
        "momentum of wire 7 non-finite",
    );
}

#[test]
fn an_integrator_that_cannot_take_a_step_reports_where_as_the_outcome() {
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/flows/spinless_wire.toml"
    ))
    .expect("demo model");
    let sys = system(&text);
    let point = defaults(&sys);
    // Too few steps allowed: the integrator stops part of the way.
    let mut opts = flow_opts(&sys);
    opts.max_steps = 3;
    let r = Flow::new(&sys, opts.clone()).run(&point).expect("a result");
    assert_eq!(r.outcome, Outcome::Failed);
    let msg = r.message.clone().expect("a message");
    let ell: f64 = msg
        .strip_prefix("integration failed at ell = ")
        .unwrap_or_else(|| panic!("{msg}"))
        .parse()
        .expect("a scale");
    assert!(ell > 0.0 && ell < opts.ell_max, "{msg}");
    assert!(
        (ell - r.ell_end).abs() < 1e-6,
        "{msg} vs ell_end {}",
        r.ell_end
    );
    let report = FlowReport::new("m", &[], &point, r, opts);
    assert_eq!(report.headline(), msg);
    // A tolerance no double can meet: the very first step underflows.
    let mut opts = flow_opts(&sys);
    opts.rtol = 1e-300;
    opts.atol = 1e-300;
    let r = Flow::new(&sys, opts).run(&point).expect("a result");
    assert_eq!(r.outcome, Outcome::Failed);
    assert_eq!(
        r.message.as_deref(),
        Some("integration failed at ell = 0.000000")
    );
}

#[test]
fn a_drift_of_d_k_d_above_1e_6_is_reported() {
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/flows/laughlin_third.toml"
    ))
    .expect("demo model");
    let sys = system(&text);
    let point = defaults(&sys);
    let notes = |rtol: f64| {
        let mut opts = flow_opts(&sys);
        opts.rtol = rtol;
        opts.atol = rtol;
        let r = Flow::new(&sys, opts.clone()).run(&point).expect("a result");
        let drift = r.dkd_drift;
        (drift, FlowReport::new("m", &[], &point, r, opts).notes)
    };
    let (drift, loose) = notes(0.5);
    assert!(drift > 1e-6, "a loose tolerance drifts: {drift:e}");
    assert!(
        loose
            .iter()
            .any(|n| n.contains("drifted from D K D = K^-1")),
        "{loose:?}"
    );
    let (drift, tight) = notes(1e-8);
    assert!(
        drift < 1e-6,
        "the default tolerance keeps the identity: {drift:e}"
    );
    assert!(!tight.iter().any(|n| n.contains("drifted")), "{tight:?}");
    // A non-finite drift is reported too.
    let mut r = FlowResult::without_flow(Outcome::Failed, "x".into());
    r.dkd_drift = f64::NAN;
    let notes = FlowReport::new("m", &[], &point, r, flow_opts(&sys)).notes;
    assert!(notes.iter().any(|n| n.contains("non-finite")), "{notes:?}");
}
