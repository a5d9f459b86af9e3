//! The two storage layouts of the flowing D (dense, and Fourier blocks for
//! periodic arrays) integrate the same equations: their results must agree
//! to the integrator's tolerance (common practice: two code paths for one
//! quantity checked against each other; no external source).

use std::path::Path;

use pinflow::flow::{Closure, Flow, FlowOptions};
use pinflow::system::System;

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

#[test]
fn the_infinite_flow_on_n_points_is_the_ring_of_n_wires() {
    let demo = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/flows/laughlin_third.toml"
    ))
    .unwrap()
    .replace("wires = 8", "wires = WIRES");
    assert!(demo.contains("WIRES"));
    for closure in [Closure::None, Closure::Pairs] {
        compare_infinite_with_ring(&demo, 16, &[("g", 0.8)], closure);
        compare_infinite_with_ring(&demo, 32, &[("g", 0.5), ("lambda", 0.6)], closure);
    }
    // A longer-range array with interactions of range 2 and terms of range 2.
    let bench = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/benches/models/array32.toml"
    ))
    .unwrap()
    .replace("wires = 16", "wires = WIRES");
    compare_infinite_with_ring(&bench, 24, &[("g", 0.6), ("w", 0.1)], Closure::Pairs);
}
