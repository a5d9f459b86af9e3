//! Hunted competitors follow the model's own rules (issue 16): a competitor
//! joins exactly when the operator search with the model's allowed charges
//! and spins lists it (src/flow/competitors.rs, `ChargeFilter::Model`,
//! `SpinFilter::Model`).
//!
//! The expectations are derived in comments: the sets are compared with
//! the union of searches with a single charge (or any spin) filtered here,
//! a second code path through `hunt`. Physics of the pairing terms: a
//! superconducting proximity term psi_R up psi_L down carries charge 2
//! (Giamarchi 2004, ch. 7, from memory: the singlet pairing field of the
//! spinful wire).

mod common;

use std::collections::BTreeSet;

use pinflow::core::system::System;
use pinflow::flow::competitors::{auto_name, Competing, CompetitorOptions};
use pinflow::flow::FlowOptions;
use pinflow::search::{hunt, ChargeFilter, HuntOptions, SpinFilter, SymmetryChoice};

use common::system;

/// A spinful wire (R up, L up, R down, L down) without momenta, with the
/// listed terms.
fn wire(terms: &str) -> String {
    format!(
        r#"
name = "spinful wire"
[params]
a = 0.3
[fields]
K = [[1, 0, 0, 0], [0, -1, 0, 0], [0, 0, 1, 0], [0, 0, 0, -1]]
charge = [1, 1, 1, 1]
V = [["1", "a", "0.1", "0.05"], ["a", "1", "0.05", "0.1"], ["0.1", "0.05", "1", "a"], ["0.05", "0.1", "a", "1"]]
{terms}"#
    )
}

fn added(sys: &System, delta: f64) -> BTreeSet<String> {
    let point = sys.model.point_with(&[], "test").unwrap();
    let comp = CompetitorOptions {
        delta,
        coupling: None,
        range: None,
        symmetry: SymmetryChoice::All,
        force: false,
    };
    let opts = FlowOptions::resolve(&sys.model, &Default::default()).unwrap();
    let r = Competing::new(sys, opts, comp)
        .unwrap()
        .run(&point)
        .unwrap();
    r.competitors_added.into_iter().collect()
}

/// The unlisted operators of one search, by their competitor names, with
/// the spins kept.
fn hunted(sys: &System, delta: f64, charge: i64, spins: &[&str]) -> BTreeSet<String> {
    let point = sys.model.point_with(&[], "test").unwrap();
    let opts = HuntOptions {
        max_dim: delta,
        charge: ChargeFilter::Exactly(charge),
        spin: SpinFilter::Any,
        ..HuntOptions::default()
    };
    hunt(sys, &point, &opts)
        .unwrap()
        .operators
        .iter()
        .filter(|op| op.model_term.is_none() && spins.contains(&op.spin.as_str()))
        .map(auto_name)
        .collect()
}

#[test]
fn a_charge_two_term_lets_charge_two_competitors_in() {
    // pair: psi_R up psi_L down, m = (1, 0, 0, 1): charge 2, spin
    // (1/2)(1 - 1) = 0. The model allows |charge| 0 and 2, so the
    // competitors are the spin-0 operators of charge 0 and of charge 2;
    // among the latter the partner psi_L up psi_R down, m = (0, 1, 1, 0).
    let sys = system(&wire(
        r#"
[[term]]
name = "g1"
particles = [1, -1, -1, 1]
coupling = 0.1
[[term]]
name = "pair"
particles = [1, 0, 0, 1]
coupling = 0.1
allowed_charge = 2
"#,
    ));
    let got = added(&sys, 2.0);
    let mut expected = hunted(&sys, 2.0, 0, &["0"]);
    expected.extend(hunted(&sys, 2.0, 2, &["0"]));
    assert_eq!(got, expected);
    assert!(got.contains("auto:(0,1,1,0)"), "{got:?}");
    // Without the charge-2 term no charged competitor joins.
    let neutral = system(&wire(
        r#"
[[term]]
name = "g1"
particles = [1, -1, -1, 1]
coupling = 0.1
"#,
    ));
    assert_eq!(added(&neutral, 2.0), hunted(&neutral, 2.0, 0, &["0"]));
    assert!(!added(&neutral, 2.0).contains("auto:(0,1,1,0)"));
}

#[test]
fn a_spin_one_term_lets_spin_one_competitors_in() {
    // flip: psi+_R down psi_R up, m = (1, 0, -1, 0): charge 0, spin
    // (1/2)(1 + 1) = 1. The competitors are the neutral operators of spin
    // 0 or 1 (not -1: the conjugate of a spin-1 operator has spin 1 too,
    // the sign of the spin is no convention). Spin-1 neutral operators
    // solve m0^2 - m1^2 + m2^2 - m3^2 = 2 with sum 0: besides flip itself,
    // e.g. (2, -1, 0, -1), with free-fermion Delta = (4 + 1 + 1)/2 = 3, so
    // the bound is 3.2 here.
    let sys = system(&wire(
        r#"
[[term]]
name = "g1"
particles = [1, -1, -1, 1]
coupling = 0.1
[[term]]
name = "flip"
particles = [1, 0, -1, 0]
coupling = 0.1
"#,
    ));
    let got = added(&sys, 3.2);
    assert_eq!(got, hunted(&sys, 3.2, 0, &["0", "1"]));
    assert!(
        got.iter().any(|n| hunted(&sys, 3.2, 0, &["1"]).contains(n)),
        "a spin-1 competitor joins: {got:?}"
    );
    let minus_one = hunted(&sys, 3.2, 0, &["-1"]);
    assert!(!minus_one.is_empty() && got.is_disjoint(&minus_one));
}
