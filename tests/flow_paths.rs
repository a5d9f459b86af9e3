//! The two storage layouts of the flowing D (dense, and Fourier blocks for
//! periodic arrays) integrate the same equations: their results must agree
//! to the integrator's tolerance (common practice: two code paths for one
//! quantity checked against each other; no external source).

use std::path::Path;

use pinflow::core::system::System;
use pinflow::flow::{Closure, Flow, FlowOptions, FlowResult};

fn compare(model: &str, sets: &[(&str, f64)], closure: Closure) {
    let sys = System::load(Path::new(model)).unwrap();
    let overrides: Vec<(String, f64)> = sets.iter().map(|(k, v)| (k.to_string(), *v)).collect();
    let point = sys.model.point_with(&overrides, "--set").unwrap();
    let run = |dense_d: bool| {
        let opts = FlowOptions {
            closure,
            dense_d,
            rtol: 1e-10,
            atol: 1e-14,
            ..FlowOptions::default()
        };
        Flow::new(&sys, opts).run(&point).unwrap()
    };
    let (dense, fourier) = (run(true), run(false));
    assert_eq!(dense.outcome, fourier.outcome);
    assert_eq!(dense.winner, fourier.winner);
    let (a, b) = (dense.ell_star.unwrap(), fourier.ell_star.unwrap());
    assert!((a - b).abs() < 1e-6, "ell* {a} vs {b}");
    assert_eq!(dense.terms.len(), fourier.terms.len());
    for (x, y) in dense.terms.iter().zip(&fourier.terms) {
        assert_eq!(x.name, y.name);
        assert!(
            (x.dimension0 - y.dimension0).abs() < 1e-10,
            "{}: {} vs {}",
            x.name,
            x.dimension0,
            y.dimension0
        );
        assert!(
            (x.dimension - y.dimension).abs() < 1e-6,
            "{}: {} vs {}",
            x.name,
            x.dimension,
            y.dimension
        );
        assert!(
            (x.coupling - y.coupling).abs() < 1e-6 * (1.0 + x.coupling),
            "{}: {} vs {}",
            x.name,
            x.coupling,
            y.coupling
        );
    }
}

#[test]
fn dense_and_fourier_agree_on_the_demo_array() {
    let model = concat!(env!("CARGO_MANIFEST_DIR"), "/flows/laughlin_third.toml");
    compare(model, &[("g", 0.8)], Closure::None);
    compare(model, &[("g", 0.8)], Closure::Pairs);
    compare(model, &[("g", 0.5)], Closure::Pairs);
}

#[test]
fn dense_and_fourier_agree_on_a_longer_range_array() {
    let model = concat!(env!("CARGO_MANIFEST_DIR"), "/benches/models/array32.toml");
    compare(model, &[], Closure::None);
    compare(model, &[("g", 0.6), ("w", 0.1)], Closure::Pairs);
}

/// A generated channel's name on a ring of W wires (`a+b@s`, s in 0..W)
/// written as on the infinite line (s past W/2 is the negative shift s - W).
fn line_name(name: &str, wires: usize) -> String {
    match name.rsplit_once('@') {
        Some((head, s)) => {
            let s: i64 = s.parse().unwrap();
            let s = if 2 * s > wires as i64 {
                s - wires as i64
            } else {
                s
            };
            format!("{head}@{s}")
        }
        None => name.to_string(),
    }
}

/// The flow of an infinite array carried on N quadrature points is, term
/// by term, the family flow of a periodic array of N wires (the q-space
/// flow equations are the same sums; physics reference section 4). Two
/// code paths for one quantity, no external value.
fn compare_infinite_with_ring(text: &str, wires: usize, sets: &[(&str, f64)], closure: Closure) {
    let ring = System::new(
        pinflow::model::Model::parse(&text.replace("WIRES", &wires.to_string()), "ring.toml")
            .unwrap(),
    )
    .unwrap();
    let inf = System::new(
        pinflow::model::Model::parse(&text.replace("WIRES", "\"infinite\""), "inf.toml").unwrap(),
    )
    .unwrap();
    let overrides: Vec<(String, f64)> = sets.iter().map(|(k, v)| (k.to_string(), *v)).collect();
    let point = ring.model.point_with(&overrides, "--set").unwrap();
    let opts = |q_points| FlowOptions {
        closure,
        q_points,
        rtol: 1e-10,
        atol: 1e-14,
        ..FlowOptions::default()
    };
    let a = Flow::new(&ring, opts(None)).run(&point).unwrap();
    let b = Flow::new(&inf, opts(Some(wires))).run(&point).unwrap();
    let case = format!("{wires} wires, {sets:?}, {closure:?}");
    assert_eq!(a.outcome, b.outcome, "{case}");
    assert_eq!(
        a.winner.as_deref().map(|w| line_name(w, wires)),
        b.winner,
        "{case}"
    );
    match (a.ell_star, b.ell_star) {
        (Some(x), Some(y)) => assert!((x - y).abs() < 1e-6, "{case}: ell* {x} vs {y}"),
        (x, y) => assert_eq!(x, y, "{case}"),
    }
    assert_eq!(b.quadrature.unwrap().points, wires);
    let names_a: Vec<String> = a.terms.iter().map(|t| line_name(&t.name, wires)).collect();
    let names_b: Vec<String> = b.terms.iter().map(|t| t.name.clone()).collect();
    assert_eq!(names_a, names_b, "{case}");
    for (x, y) in a.terms.iter().zip(&b.terms) {
        let pairs = [
            ("Delta0", x.dimension0, y.dimension0, 1e-11),
            ("Delta", x.dimension, y.dimension, 1e-7),
            ("y", x.coupling, y.coupling, 1e-7),
        ];
        for (what, p, q, tol) in pairs {
            assert!(
                (p - q).abs() <= tol * (1.0 + p.abs()),
                "{case}: {} {what} {p} (ring) vs {q} (infinite)",
                y.name
            );
        }
    }
}

/// A model file of the repository with its line `line` (the number of
/// wires) replaced by `wires = WIRES`.
fn with_wires(file: &str, line: &str) -> String {
    let text = std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join(file)).unwrap();
    assert_eq!(text.matches(line).count(), 1, "{file}: {line}");
    text.replace(line, "wires = WIRES")
}

#[test]
fn the_infinite_flow_on_n_points_is_the_ring_of_n_wires() {
    let demo = with_wires("flows/laughlin_third.toml", "wires = 8");
    for closure in [Closure::None, Closure::Pairs] {
        compare_infinite_with_ring(&demo, 16, &[("g", 0.8)], closure);
        compare_infinite_with_ring(&demo, 32, &[("g", 0.5), ("lambda", 0.6)], closure);
    }
    // A longer-range array with interactions of range 2 and terms of range 2.
    let bench = with_wires("benches/models/array32.toml", "wires = 16");
    compare_infinite_with_ring(&bench, 24, &[("g", 0.6), ("w", 0.1)], Closure::Pairs);
}

/// The sliding-array demo with `wires = WIRES` in place of "infinite".
fn sliding_demo() -> String {
    with_wires("flows/sliding_array.toml", "wires = \"infinite\"")
}

fn system_of(text: &str, wires: &str) -> System {
    System::new(pinflow::model::Model::parse(&text.replace("WIRES", wires), "m.toml").unwrap())
        .unwrap()
}

/// Relative differences as the quadrature check measures them: the
/// largest |Delta_a - Delta_b| / Delta_b over the terms at the end, and
/// |ell*_a - ell*_b| / max(ell*_b, 1); `b` is the reference (a ring).
fn relative_differences(a: &FlowResult, b: &FlowResult, wires: usize) -> (f64, f64) {
    assert_eq!(a.outcome, b.outcome);
    assert_eq!(a.winner, b.winner.as_deref().map(|w| line_name(w, wires)));
    let names_b: Vec<String> = b.terms.iter().map(|t| line_name(&t.name, wires)).collect();
    let names_a: Vec<String> = a.terms.iter().map(|t| t.name.clone()).collect();
    assert_eq!(names_a, names_b);
    let dims = a
        .terms
        .iter()
        .zip(&b.terms)
        .map(|(x, y)| (x.dimension - y.dimension).abs() / y.dimension)
        .fold(0.0, f64::max);
    let ell = match (a.ell_star, b.ell_star) {
        (Some(x), Some(y)) => (x - y).abs() / y.max(1.0),
        (None, None) => 0.0,
        (x, y) => panic!("ell* {x:?} vs {y:?}"),
    };
    (dims, ell)
}

/// Options with a tight integrator (its error far below the quadrature
/// errors compared here), a rule and a tolerance of the quadrature check.
fn tight(q_points: Option<usize>, q_tolerance: f64) -> FlowOptions {
    FlowOptions {
        q_points,
        q_tolerance,
        rtol: 1e-11,
        atol: 1e-15,
        max_steps: 1_000_000,
        ..FlowOptions::default()
    }
}

/// The ring of 256 wires stands in for the exact infinite array: it is the
/// 256-point trapezoid rule of the same integrals (physics reference
/// section 4), and for the demo the rule converges geometrically (the bare
/// dimensions to 1e-10 on 32 points), so its own quadrature error is far
/// below everything compared. Two code paths, no external value.
const RING: usize = 256;

#[test]
fn the_checked_infinite_flow_is_the_flow_of_a_large_ring() {
    let text = sliding_demo();
    let inf = system_of(&text, "\"infinite\"");
    let ring = system_of(&text, &RING.to_string());
    let point = inf.model.params.defaults().to_vec();
    // Default options: the check passes, and the flow is the ring's to the
    // check's tolerance (the remaining difference is the integrator's,
    // rtol 1e-8, which the quadrature estimate does not cover).
    let a = Flow::new(&inf, FlowOptions::default()).run(&point).unwrap();
    let b = Flow::new(&ring, FlowOptions::default())
        .run(&point)
        .unwrap();
    let c = a
        .flow_quadrature
        .clone()
        .expect("an infinite array's flow is checked");
    assert!(c.converged && c.same_outcome, "{c:?}");
    assert_eq!(c.points, a.quadrature.unwrap().points);
    assert_eq!(2 * c.compared_with, c.points, "the nested half rule");
    let (dims, ell) = relative_differences(&a, &b, RING);
    assert!(
        dims <= c.tolerance && ell <= c.tolerance,
        "{dims:e}, {ell:e}"
    );
    // With a tight integrator the difference from the ring is the
    // quadrature's: within the estimate, plus 1e-10 for the two
    // integrations at rtol 1e-11.
    let b = Flow::new(&ring, tight(None, 1e-6)).run(&point).unwrap();
    let a = Flow::new(&inf, tight(None, 1e-6)).run(&point).unwrap();
    let c = a.flow_quadrature.clone().unwrap();
    let (dims, ell) = relative_differences(&a, &b, RING);
    assert!(dims <= c.dimension_error + 1e-10, "{dims:e} vs {c:?}");
    assert!(ell <= c.ell_star_error.unwrap() + 1e-10, "{ell:e} vs {c:?}");
    // A tolerance the 32-point flow misses (its estimate against 16 points
    // is about 5e-11) makes the check double the rule once; the flow it
    // reports is then exactly the flow on 64 points, and still the ring's.
    let r = Flow::new(&inf, tight(None, 2e-11)).run(&point).unwrap();
    let c = r.flow_quadrature.clone().unwrap();
    assert!(
        c.dimension_error.max(c.ell_star_error.unwrap()) <= 2e-11,
        "{c:?}"
    );
    assert_eq!(
        (c.refinements, c.points, c.compared_with),
        (1, 64, 32),
        "{c:?}"
    );
    assert!(c.converged && c.stopped.is_none(), "{c:?}");
    assert_eq!(r.quadrature.unwrap().points, 64);
    let on64 = Flow::new(&inf, tight(Some(64), 1e-6)).run(&point).unwrap();
    assert_eq!(r.ell_star, on64.ell_star);
    for (x, y) in r.terms.iter().zip(&on64.terms) {
        assert_eq!(
            (&x.name, x.dimension, x.coupling),
            (&y.name, y.dimension, y.coupling)
        );
    }
    let (dims, ell) = relative_differences(&r, &b, RING);
    assert!(dims <= 1e-10 && ell <= 1e-10, "{dims:e}, {ell:e}");
}

#[test]
fn the_estimate_of_a_given_rule_bounds_its_error() {
    // A rule given with q_points is compared with twice its points; the
    // estimate (twice the difference) must bound the real difference from
    // the ring, and the check must fail where that difference is above
    // the tolerance.
    let text = sliding_demo();
    let inf = system_of(&text, "\"infinite\"");
    let ring = system_of(&text, &RING.to_string());
    let point = inf.model.params.defaults().to_vec();
    let b = Flow::new(&ring, tight(None, 1e-6)).run(&point).unwrap();
    for n in [5, 6, 8, 10, 12, 16] {
        let a = Flow::new(&inf, tight(Some(n), 1e-6)).run(&point).unwrap();
        let c = a.flow_quadrature.clone().unwrap();
        assert_eq!((c.points, c.compared_with, c.refinements), (n, 2 * n, 0));
        assert_eq!(c.rule, pinflow::flow::RuleChoice::Fixed);
        let (dims, ell) = relative_differences(&a, &b, RING);
        let (est_dims, est_ell) = (c.dimension_error, c.ell_star_error.unwrap());
        assert!(
            dims <= est_dims + 1e-10,
            "{n} points: {dims:e} above {est_dims:e}"
        );
        assert!(
            ell <= est_ell + 1e-10,
            "{n} points: {ell:e} above {est_ell:e}"
        );
        if dims.max(ell) > c.tolerance {
            assert!(!c.converged, "{n} points: error {dims:e} passed the check");
        }
    }
    // The coarse rules are far off (about 1e-3 and 3e-5 in the dimensions,
    // measured), and the check says so.
    for n in [6, 8] {
        let c = Flow::new(&inf, tight(Some(n), 1e-6))
            .run(&point)
            .unwrap()
            .flow_quadrature
            .unwrap();
        assert!(
            !c.converged && c.dimension_error > 1e-5,
            "{n} points: {c:?}"
        );
    }
}

#[test]
fn the_refinement_stops_at_its_limit_and_says_so() {
    // A tolerance no flow meets (1e-15, below the integrator's error) and a
    // limit of 32 points, the demo's bare rule: the check fails and cannot
    // refine; it says that it hit the limit, and the report notes it.
    let text = sliding_demo();
    let inf = system_of(&text, "\"infinite\"");
    let point = inf.model.params.defaults().to_vec();
    let opts = FlowOptions {
        q_tolerance: 1e-15,
        q_max_points: 32,
        ..FlowOptions::default()
    };
    let r = Flow::new(&inf, opts.clone()).run(&point).unwrap();
    let c = r.flow_quadrature.clone().unwrap();
    assert_eq!((c.points, c.refinements), (32, 0), "{c:?}");
    assert_eq!(c.stopped, Some(pinflow::flow::StoppedBy::Cap));
    assert!(!c.converged);
    let report = pinflow::flow::report::FlowReport::new("m", &[], &[], r, opts.clone());
    assert!(
        report
            .notes
            .iter()
            .any(|n| n.contains("not converged in q") && n.contains("limit of 32 points")),
        "{:?}",
        report.notes
    );
    // Without the limit the same tolerance refines until doubling no longer
    // halves the difference (the integrator's error, not the quadrature's).
    let opts = FlowOptions {
        q_max_points: 1 << 10,
        ..opts
    };
    let c = Flow::new(&inf, opts)
        .run(&point)
        .unwrap()
        .flow_quadrature
        .unwrap();
    assert!(
        !c.converged && c.refinements >= 1 && c.stopped.is_some(),
        "{c:?}"
    );
}
