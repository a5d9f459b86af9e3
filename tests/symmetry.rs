//! Symmetries in the model file (`[[symmetry]]`), the operator search
//! filtered by them, orbits, grouped terms, and hunted competitors in the
//! flow (issue 16).
//!
//! Sources of the checks are named beside each test: Giamarchi, "Quantum
//! Physics in One Dimension" (2004), ch. 7 for the allowed operators of a
//! spinful wire (g1 spin backscattering; umklapp at half filling); the
//! others are derived in comments.

mod common;

use pinflow::core::system::System;
use pinflow::flow::competitors::{Competing, CompetitorOptions};
use pinflow::flow::{Flow, FlowOptions};
use pinflow::model::Model;
use pinflow::search::{hunt, HuntOptions, HuntReport, MomentumFilter, SymmetryChoice};

use common::system;

/// A spinful wire, fields (R up, L up, R down, L down), spin-symmetric V.
/// S_z charge (1, 1, -1, -1) (in units of 1/2); spin flip exchanges up and
/// down. Hand check of the action on operators: phi -> W phi with
/// (W phi)_0 = phi_2 (R up -> R down), so l.(W phi) = (W^T l).phi: the
/// vertex operator e^{i phi_0} (l = e_0) maps to e^{i phi_2} (W^T e_0 = e_2),
/// the transpose acting on l. In particle content m -> W^-1 m (= W here).
const SPINFUL: &str = r#"
name = "spinful wire"
[params]
a = 0.2
b = 0.1
c = 0.15
kF = 0.05
G = 1.0
[fields]
K = [[1, 0, 0, 0], [0, -1, 0, 0], [0, 0, 1, 0], [0, 0, 0, -1]]
charge = [1, 1, 1, 1]
V = [["1", "a", "c", "b"], ["a", "1", "b", "c"], ["c", "b", "1", "a"], ["b", "c", "a", "1"]]
momentum = ["kF", "-kF", "kF", "-kF"]
momentum_period = "G"

[[symmetry]]
name = "Sz"
charge = [1, 1, -1, -1]

[[symmetry]]
name = "spin_flip"
map = [[0, 0, 1, 0], [0, 0, 0, 1], [1, 0, 0, 0], [0, 1, 0, 0]]
order = 2
"#;

fn run(sys: &System, set: &[(&str, f64)], opts: &HuntOptions) -> HuntReport {
    let set: Vec<(String, f64)> = set.iter().map(|(n, v)| (n.to_string(), *v)).collect();
    let point = sys.model.point_with(&set, "test").unwrap();
    hunt(sys, &point, opts).unwrap_or_else(|e| panic!("hunt: {e}"))
}

fn with_symmetry(max_dim: f64, symmetry: SymmetryChoice) -> HuntOptions {
    HuntOptions {
        max_dim,
        symmetry,
        ..HuntOptions::default()
    }
}

/// S_z of a particle content, computed here (not by the library).
fn sz(m: &[i64]) -> i64 {
    m[0] + m[1] - m[2] - m[3]
}

fn is(m: &[i64], target: &[i64]) -> bool {
    m == target || m.iter().zip(target).all(|(a, b)| *a == -b)
}

#[test]
fn with_sz_conserved_no_operator_changes_sz() {
    // Giamarchi (2004), ch. 7: the spin-flip pair psi+_{R up} psi+_{L up}
    // psi_{R down} psi_{L down}, m = (1, 1, -1, -1), conserves charge and
    // momentum but changes S_z by 2 (cos sqrt8 theta_sigma); S_z
    // conservation must remove it and keep the g1 term (1, -1, -1, 1).
    let sys = system(SPINFUL);
    let none = run(&sys, &[], &with_symmetry(2.6, SymmetryChoice::None));
    assert!(
        none.operators.iter().any(|o| sz(&o.particles) != 0),
        "without the filter an S_z-changing operator is listed"
    );
    let only = SymmetryChoice::Names(vec!["Sz".into()]);
    let kept = run(&sys, &[], &with_symmetry(2.6, only));
    assert!(!kept.operators.is_empty());
    for op in &kept.operators {
        assert_eq!(sz(&op.particles), 0, "{:?} changes S_z", op.particles);
        assert_eq!(op.charges.get("Sz"), Some(&0));
    }
    // Exactly the S_z-neutral operators of the unfiltered search remain.
    let neutral: Vec<&Vec<i64>> = none
        .operators
        .iter()
        .map(|o| &o.particles)
        .filter(|m| sz(m) == 0)
        .collect();
    let listed: Vec<&Vec<i64>> = kept.operators.iter().map(|o| &o.particles).collect();
    assert_eq!(neutral, listed);
    assert!(kept
        .operators
        .iter()
        .any(|o| is(&o.particles, &[1, -1, -1, 1])));
}

#[test]
fn spin_flip_makes_g1_backscattering_one_orbit_of_size_one() {
    // Giamarchi (2004), ch. 7: at incommensurate filling the allowed
    // operator is g1 spin backscattering, m = (1, -1, -1, 1); spin flip maps
    // it to -m, the same cosine: an orbit of size 1 whose phase the symmetry
    // fixes (both signs in the orbit).
    let sys = system(SPINFUL);
    let rep = run(&sys, &[], &with_symmetry(2.6, SymmetryChoice::All));
    assert_eq!(rep.symmetries, vec!["Sz", "spin_flip"]);
    let g1: Vec<_> = rep
        .operators
        .iter()
        .filter(|o| is(&o.particles, &[1, -1, -1, 1]))
        .collect();
    assert_eq!(g1.len(), 1, "listed once");
    let orbit = &rep.orbits[g1[0].orbit.expect("an orbit") - 1];
    assert_eq!(orbit.size, 1);
    assert!(orbit.members[0].self_conjugate);
    assert_eq!(orbit.members[0].phase, "0");
    // Derived: in the spin sector phi_s = (phi_up - phi_down)/sqrt2 the
    // velocity matrix is [[1 - c, a - b], [a - b, 1 - c]], so
    // K_s = sqrt((1 - c - (a - b)) / (1 - c + (a - b))) and g1 = cos(sqrt8
    // phi_s) has Delta = 2 K_s (Giamarchi 2004, ch. 7).
    let (a, b, c) = (0.2f64, 0.1, 0.15);
    let k_s = ((1.0 - c - (a - b)) / (1.0 - c + (a - b))).sqrt();
    common::assert_close("Delta(g1)", g1[0].dimension, 2.0 * k_s, 1e-9);
    // Every listed operator is in exactly one orbit.
    let total: usize = rep.orbits.iter().map(|o| o.size).sum();
    assert_eq!(total, rep.operators.len());
}

#[test]
fn at_half_filling_umklapp_is_allowed_and_its_own_spin_flip_image() {
    // Giamarchi (2004), ch. 7: at half filling (4 kF = G) the umklapp
    // psi+_{R up} psi+_{R down} psi_{L up} psi_{L down}, m = (1, -1, 1, -1),
    // conserves momentum modulo G; spin flip maps m to itself.
    let sys = system(SPINFUL);
    let rep = run(
        &sys,
        &[("kF", 0.25)],
        &with_symmetry(2.6, SymmetryChoice::All),
    );
    let u: Vec<_> = rep
        .operators
        .iter()
        .filter(|o| is(&o.particles, &[1, -1, 1, -1]))
        .collect();
    assert_eq!(
        u.len(),
        1,
        "{:?}",
        rep.operators
            .iter()
            .map(|o| &o.particles)
            .collect::<Vec<_>>()
    );
    assert_eq!(rep.orbits[u[0].orbit.unwrap() - 1].size, 1);
    // Away from half filling it is not momentum-conserving.
    let away = run(&sys, &[], &with_symmetry(2.6, SymmetryChoice::All));
    assert!(!away
        .operators
        .iter()
        .any(|o| is(&o.particles, &[1, -1, 1, -1])));
}

/// One wire with a Z_2 that shifts phi_R by pi: phi -> phi + 2 pi s / 2,
/// s = (1, 0). Derived: e^{i l.phi} gets (-1)^{l.s} = (-1)^{l_R}; the
/// backscattering m = (1, -1) has l = K m = (1, 1), phase -1, so its orbit
/// sum vanishes; 2k_F umklapp m = (2, -2), l = (2, 2), phase +1, stays.
/// (A Z_2 of this form is what a translation by one site acts as at half
/// filling.) Order: g^1 is not trivial (K s = (1, 0) is not 0 mod 2),
/// g^2 is.
const SHIFTED: &str = r#"
[params]
g = 0.3
[fields]
K = [[1, 0], [0, -1]]
charge = [1, 1]
V = [["1", "g"], ["g", "1"]]
[[symmetry]]
name = "half_shift"
map = [[1, 0], [0, 1]]
shift = [1, 0]
order = 2
"#;

#[test]
fn a_phase_that_does_not_cancel_removes_the_operator() {
    let sys = system(SHIFTED);
    let none = run(&sys, &[], &with_symmetry(4.5, SymmetryChoice::None));
    assert!(none.operators.iter().any(|o| is(&o.particles, &[1, -1])));
    assert!(none.operators.iter().any(|o| is(&o.particles, &[2, -2])));
    let all = run(&sys, &[], &with_symmetry(4.5, SymmetryChoice::All));
    assert!(!all.operators.iter().any(|o| is(&o.particles, &[1, -1])));
    assert!(all.operators.iter().any(|o| is(&o.particles, &[2, -2])));
    assert!(all.removed_by_symmetry >= 1);
    assert_eq!(
        all.operators.len() + all.removed_by_symmetry,
        none.operators.len()
    );
}

/// A bilayer array: two spinless layers per wire, fields (R1, L1, R2, L2),
/// each layer with the filling-1/3 tunnelling of flows/laughlin_third.toml
/// and its link interaction, the layers coupled by u; layer exchange is a
/// Z_2 when V is the same in both layers (`asym` = 0).
const BILAYER: &str = r#"
name = "bilayer array"
[params]
lambda = 0.8
g = 0.45
u = 0.1
asym = 0.0
[array]
wires = 6
K = [[1, 0, 0, 0], [0, -1, 0, 0], [0, 0, 1, 0], [0, 0, 0, -1]]
charge = [1, 1, 1, 1]
[array.V]
0 = [["1", "lambda", "u", "0"], ["lambda", "1", "0", "u"], ["u", "0", "1 + asym", "lambda"], ["0", "u", "lambda", "1 + asym"]]
1 = [["0.4*g", "0.8*g", "0", "0"], ["0.2*g", "0.4*g", "0", "0"], ["0", "0", "0.4*g", "0.8*g"], ["0", "0", "0.2*g", "0.4*g"]]
[[symmetry]]
name = "layers"
map = [[0, 0, 1, 0], [0, 0, 0, 1], [1, 0, 0, 0], [0, 1, 0, 0]]
order = 2
[[term]]
name = "tunnel1"
particles = { 0 = [-2, 1, 0, 0], 1 = [-1, 2, 0, 0] }
coupling = 0.05
group = "tunnel"
[[term]]
name = "tunnel2"
particles = { 0 = [0, 0, -2, 1], 1 = [0, 0, -1, 2] }
group = "tunnel"
[[term]]
name = "cdw1"
particles = { 0 = [1, -1, 0, 0], 1 = [-1, 1, 0, 0] }
coupling = 0.04
group = "cdw"
[[term]]
name = "cdw2"
particles = { 0 = [0, 0, 1, -1], 1 = [0, 0, -1, 1] }
group = "cdw"
"#;

#[test]
fn layer_exchange_pairs_the_layers_in_orbits_of_two() {
    let sys = system(BILAYER);
    let rep = run(&sys, &[], &with_symmetry(2.0, SymmetryChoice::All));
    let of = |name: &str| {
        rep.operators
            .iter()
            .find(|o| o.model_term.as_deref() == Some(name))
            .and_then(|o| o.orbit)
            .unwrap_or_else(|| panic!("{name} not found"))
    };
    assert_eq!(of("tunnel1"), of("tunnel2"));
    assert_eq!(rep.orbits[of("tunnel1") - 1].size, 2);
    // Where V breaks the exchange, it is not used (and a note says so).
    let broken = run(
        &sys,
        &[("asym", 0.1)],
        &with_symmetry(2.0, SymmetryChoice::All),
    );
    assert!(broken.orbits.is_empty());
    assert!(broken
        .notes
        .iter()
        .any(|n| n.contains("layers: V breaks it")));
}

#[test]
fn a_group_takes_one_coupling() {
    let sys = system(BILAYER);
    let y = |name: &str| {
        let t = sys.model.terms.iter().find(|t| t.name == name).unwrap();
        t.coupling.eval(&[])
    };
    assert_eq!(y("tunnel2"), 0.05);
    assert_eq!(y("cdw2"), 0.04);
    let bad = BILAYER.replace("name = \"cdw2\"\n", "name = \"cdw2\"\ncoupling = 0.2\n");
    let e = Model::parse(&bad, "bad.toml").unwrap_err().to_string();
    assert!(e.contains("term \"cdw2\".coupling"), "{e}");
}

#[test]
fn orbit_couplings_stay_equal_along_the_flow() {
    // Derived: with W^T K W = K and W^T V W = V the flow equations commute
    // with the exchange, so members with equal bare data stay equal.
    let sys = system(BILAYER);
    let opts = FlowOptions {
        stages: Some(1),
        ..FlowOptions::default()
    };
    let point = sys.model.point_with(&[], "test").unwrap();
    let r = Flow::new(&sys, opts).run(&point).unwrap();
    let row = |name: &str| r.terms.iter().position(|t| t.name == name).unwrap();
    let pairs = [(row("tunnel1"), row("tunnel2")), (row("cdw1"), row("cdw2"))];
    assert!(r.samples.len() > 10);
    let mut worst: f64 = 0.0;
    for s in &r.samples {
        for (a, b) in pairs {
            worst = worst.max((s.couplings[a] - s.couplings[b]).abs());
            worst = worst.max((s.dimensions[a] - s.dimensions[b]).abs());
        }
    }
    assert!(worst <= 1e-12, "largest difference {worst:e}");
    // Not a trivial equality: the couplings grow (cdw wins at this point).
    assert!(
        r.samples.last().unwrap().couplings[pairs[1].0] > 0.5,
        "cdw grows"
    );
}

#[test]
fn competitors_on_the_third_array_find_the_hunted_next_nearest_cdw() {
    // The next-nearest-neighbour CDW {0: (1, -1), 2: (-1, 1)} (checks.md:
    // interwire CDW of range 2) is what `hunt --range 3` finds at the
    // default point; `--competitors 2 --competitor-range 3` must add it.
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("flows/laughlin_third.toml");
    let sys = System::load(&path).unwrap();
    let point = sys.model.point_with(&[], "test").unwrap();
    let rep = hunt(
        &sys,
        &point,
        &HuntOptions {
            range: Some(3),
            momentum: Some(MomentumFilter::Conserved),
            ..HuntOptions::default()
        },
    )
    .unwrap();
    let nnn = rep
        .operators
        .iter()
        .find(|o| o.particles == vec![1, -1, 0, 0, -1, 1])
        .expect("hunt finds the next-nearest-neighbour CDW");
    assert!(nnn.model_term.is_none());
    let comp = CompetitorOptions {
        delta: 2.0,
        coupling: None,
        range: Some(3),
        symmetry: SymmetryChoice::All,
        force: false,
    };
    let opts = FlowOptions::resolve(&sys.model, &Default::default()).unwrap();
    let r = Competing::new(&sys, opts, comp)
        .unwrap()
        .run(&point)
        .unwrap();
    let name = "auto:{0:(1,-1),2:(-1,1)}";
    assert!(
        r.competitors_added.iter().any(|n| n == name),
        "{:?}",
        r.competitors_added
    );
    assert!(r.terms.iter().any(|t| t.name == name));
    // Exactly the operators hunt lists that are not model terms.
    let new = rep
        .operators
        .iter()
        .filter(|o| o.model_term.is_none())
        .count();
    assert_eq!(r.competitors_added.len(), new);
}
