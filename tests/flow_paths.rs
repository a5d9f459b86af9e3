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
