//! Issue 15 item 4: the in-flow estimate of an infinite array's quadrature
//! error (`src/flow/qtrack.rs`) against the difference it estimates, found
//! by flowing the same point on the nested rule of half the points
//! (`src/flow/check.rs`). Consistency checks between two code paths of
//! this crate: no physics reference value is involved. The models are the
//! bundled demos (`flows/sliding_array.toml`, `flows/laughlin_third.toml`
//! and `benches/models/array32.toml` made infinite) and random arrays from
//! a fixed-seed generator (arbitrary inputs, not physics).

mod flowcommon;

use flowcommon::{num, system};
use pinflow::core::system::System;
use pinflow::flow::{CheckMethod, Flow, FlowOptions, FlowResult, StoppedBy};

fn with_wires(path: &str, from: &str) -> System {
    let full = format!("{}/{path}", env!("CARGO_MANIFEST_DIR"));
    let text = std::fs::read_to_string(full).expect("bundled model");
    assert!(text.contains(from), "{path}");
    system(&text.replace(from, "wires = \"infinite\"\n"))
}

/// A random infinite array of spinless wires: V blocks 0, 1 and 2 (|V1| +
/// |V2| kept below the margin of V0, so V(q) is positive definite), three
/// terms over two wires with coupling 0.05 to 0.2.
fn random_array(seed: u64) -> System {
    let mut x = seed;
    let mut next = move || {
        x = x
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (x >> 11) as f64 / (1u64 << 53) as f64
    };
    let lam = 0.6 * next() - 0.3;
    let (a, b) = (0.3 * next() - 0.1, 0.1 * next());
    let w2 = 0.05 * next();
    let mut s = format!(
        "name = \"random\"\n[array]\nwires = \"infinite\"\nK = [[1, 0], [0, -1]]\ncharge = [1, 1]\n[array.V]\n0 = [[\"1\", \"{l}\"], [\"{l}\", \"1\"]]\n1 = [[\"{a}\", \"{b}\"], [\"{b}\", \"{a}\"]]\n2 = [[\"{w}\", \"0\"], [\"0\", \"{w}\"]]\n",
        l = num(lam),
        a = num(a),
        b = num(b),
        w = num(w2)
    );
    let shapes = [
        "[1, -1], 1 = [-1, 1]",
        "[1, 1], 1 = [-1, -1]",
        "[-2, 1], 1 = [-1, 2]",
    ];
    for (i, shape) in shapes.iter().enumerate() {
        s += &format!(
            "[[term]]\nname = \"t{i}\"\nparticles = {{ 0 = {shape} }}\ncoupling = {}\n",
            num(0.05 + 0.15 * next())
        );
    }
    system(&s)
}

/// The models and points compared (every point physical).
fn cases() -> Vec<(String, System, Vec<f64>)> {
    let mut out = Vec::new();
    let sliding = || with_wires("flows/sliding_array.toml", "wires = \"infinite\"\n");
    for p in [[0.3, 0.15, 0.03], [-0.2, 0.1, 0.03], [0.6, 0.3, 0.03]] {
        out.push(("sliding".to_string(), sliding(), p.to_vec()));
    }
    let third = || {
        with_wires(
            "flows/laughlin_third.toml",
            "wires = 8\nboundary = \"periodic\"\n",
        )
    };
    for p in [[0.6, 0.2, 0.05, 0.0], [0.8, 0.5, 0.05, 0.0]] {
        out.push(("laughlin_third".to_string(), third(), p.to_vec()));
    }
    let bench = with_wires(
        "benches/models/array32.toml",
        "wires = 16\nboundary = \"periodic\"\n",
    );
    let p = bench.model.params.defaults().to_vec();
    out.push(("array32".to_string(), bench, p));
    for seed in [3, 17, 41] {
        let sys = random_array(seed);
        out.push((format!("random {seed}"), sys, Vec::new()));
    }
    out
}

fn on_rule(sys: &System, point: &[f64], n: usize) -> FlowResult {
    let opts = FlowOptions {
        q_points: Some(n),
        rtol: 1e-11,
        atol: 1e-15,
        max_steps: 1_000_000,
        ..FlowOptions::default()
    };
    Flow::new(sys, opts).run(point).expect("flow")
}

/// Largest relative difference of the final dimensions and of ell*
/// (relative to max(ell*, 1)), `a` the reference; the outcome and the
/// winner must agree.
fn difference(a: &FlowResult, b: &FlowResult, what: &str) -> (f64, f64) {
    assert_eq!((a.outcome, &a.winner), (b.outcome, &b.winner), "{what}");
    let dims = a
        .terms
        .iter()
        .zip(&b.terms)
        .map(|(x, y)| (x.dimension - y.dimension).abs() / x.dimension)
        .fold(0.0, f64::max);
    let ell = match (a.ell_star, b.ell_star) {
        (Some(x), Some(y)) => (x - y).abs() / x.max(1.0),
        _ => 0.0,
    };
    (dims, ell)
}

/// Rounding and integrator floor of the comparison (both flows at rtol
/// 1e-11).
const FLOOR: f64 = 1e-10;

#[test]
fn the_in_flow_estimate_bounds_the_rules_own_error() {
    // The reference: the same point on four times the points (its error,
    // the rule's falling geometrically, is far below the N-point one's).
    let mut compared = 0;
    for (name, sys, point) in cases() {
        let point = if point.is_empty() {
            sys.model.params.defaults().to_vec()
        } else {
            point
        };
        for n in [8, 12, 16] {
            let a = on_rule(&sys, &point, n);
            let Some(est) = a.q_estimate else { continue };
            let b = on_rule(&sys, &point, 4 * n);
            let what = format!("{name} at {point:?}, {n} points");
            let (dims, ell) = difference(&b, &a, &what);
            assert!(dims <= est.dims + FLOOR, "{what}: {dims:e} above {est:?}");
            assert!(
                ell <= est.ell_star.unwrap_or(0.0) + FLOOR,
                "{what}: ell* {ell:e} above {est:?}"
            );
            // Not vacuous: a real error, estimated within a factor 1e5 (the
            // estimate is generous: its eta-eps loop and doubling, and the
            // nested difference where the fall is not clearly geometric;
            // 3e4 was seen on 8 points).
            eprintln!("{what}: error {dims:e}, estimated {:e}", est.dims);
            if dims > 1e-8 {
                assert!(est.dims < 1e5 * dims, "{what}: {est:?} against {dims:e}");
                compared += 1;
            }
        }
    }
    assert!(compared >= 4, "only {compared} comparisons above the floor");
}

#[test]
fn a_rule_too_coarse_for_the_flow_is_caught_and_refined() {
    // The filling-1/3 demo at its default point: the bare dimensions
    // converge on 16 points, but the flow sharpens D(q) so that 8 points
    // are off by more than the default tolerance's margin.
    let sys = with_wires(
        "flows/laughlin_third.toml",
        "wires = 8\nboundary = \"periodic\"\n",
    );
    let point = sys.model.params.defaults().to_vec();
    let coarse = on_rule(&sys, &point, 8);
    let fine = on_rule(&sys, &point, 64);
    let (dims, _) = difference(&fine, &coarse, "8 points");
    assert!(dims > 1e-7, "the 8-point rule is not coarse: {dims:e}");
    // No estimate (a decision within its reach) or one that fails.
    if let Some(est) = coarse.q_estimate {
        assert!(10.0 * est.dims > 1e-6, "{est:?} would pass 8 points");
    }
    // A tolerance the 16-point flow's estimate does not meet: the rule is
    // doubled at once (no flow on 8 points) and checked by a second flow.
    let opts = FlowOptions {
        q_tolerance: 1e-9,
        rtol: 1e-11,
        atol: 1e-15,
        max_steps: 1_000_000,
        ..FlowOptions::default()
    };
    let r = Flow::new(&sys, opts).run(&point).expect("flow");
    let c = r.flow_quadrature.clone().expect("checked");
    assert_eq!(c.method, CheckMethod::Flow, "{c:?}");
    assert!(c.refinements >= 1 && c.converged, "{c:?}");
    assert_eq!(2 * c.compared_with, c.points, "{c:?}");
    let (dims, ell) = difference(&fine, &r, "refined");
    assert!(dims.max(ell) <= 1e-9, "{dims:e} {ell:e}");
}

#[test]
fn a_refinement_that_stops_halving_the_difference_is_stalled() {
    // A loose integrator and a tolerance far below its error: the
    // difference between rules is the integrator's, does not halve when the
    // rule doubles, and the refinement stops as stalled (src/flow/check.rs).
    // rtol 1e-3: at 1e-5 the flows on 32 and 64 points can take the same
    // steps and agree to 2e-14 (they do since the OPE sums were regrouped,
    // src/flow/ope_terms.rs), which converges; at 1e-3 the rules differ by
    // 7e-13 from 64 to 256 points, the integrator's error.
    let sys = with_wires("flows/sliding_array.toml", "wires = \"infinite\"\n");
    let point = sys.model.params.defaults().to_vec();
    let opts = FlowOptions {
        q_tolerance: 1e-13,
        rtol: 1e-3,
        ..FlowOptions::default()
    };
    let r = Flow::new(&sys, opts).run(&point).expect("flow");
    let c = r.flow_quadrature.clone().expect("checked");
    assert_eq!(c.stopped, Some(StoppedBy::Stalled), "{c:?}");
    assert!(!c.converged && c.refinements >= 1, "{c:?}");
    assert!(c.points < pinflow::core::qspace::MAX_POINTS, "{c:?}");
    assert_eq!(c.method, CheckMethod::Flow, "{c:?}");
}

#[test]
fn results_with_the_estimate_equal_the_fully_checked_ones() {
    let mut estimated = 0;
    for (name, sys, point) in cases() {
        let point = if point.is_empty() {
            sys.model.params.defaults().to_vec()
        } else {
            point
        };
        let fast = Flow::new(&sys, FlowOptions::default())
            .run(&point)
            .expect("flow");
        let mut full = Flow::new(&sys, FlowOptions::default());
        full.full_check = true;
        let full = full.run(&point).expect("flow");
        let (c, d) = (
            fast.flow_quadrature.clone().unwrap(),
            full.flow_quadrature.clone().unwrap(),
        );
        assert_eq!(d.method, CheckMethod::Flow, "{name}");
        assert!(c.converged && d.converged, "{name}: {c:?} {d:?}");
        // The estimate may accept a rule the second flow would have
        // doubled: the results then agree within the tolerance.
        let (dims, ell) = difference(&full, &fast, &name);
        assert!(dims.max(ell) <= c.tolerance, "{name}: {dims:e} {ell:e}");
        if c.points == d.points {
            assert_eq!(fast.ell_star, full.ell_star, "{name}");
        }
        if c.method == CheckMethod::Estimate {
            estimated += 1;
            assert_eq!(2 * c.compared_with, c.points, "{name}");
            assert!(10.0 * c.worst() <= c.tolerance, "{name}: {c:?}");
        }
    }
    assert!(
        estimated >= 6,
        "the estimate served only {estimated} of the flows"
    );
}

#[test]
fn both_rules_are_summed_from_one_state() {
    // The half rule's sum from the N-point state equals the dimension on
    // the nested rule's own fixed point (every other point), and the full
    // sum equals the N-point dimension; any cell vectors serve.
    use pinflow::core::qspace::{fourier_vector, nested_dimensions};
    let sys = with_wires("flows/sliding_array.toml", "wires = \"infinite\"\n");
    let point = sys.model.params.defaults().to_vec();
    let parts = vec![
        (0, vec![1.0, -2.0]),
        (1, vec![-1.0, 2.0]),
        (3, vec![0.5, 0.0]),
    ];
    // The refined rule, and given rules with an even and an odd half.
    let mut rules = vec![sys.q_converged(&point).expect("physical").0];
    for n in [10, 12] {
        rules.push(sys.q_on_rule(&point, n).expect("physical").0);
    }
    for fp in rules {
        let coarse = fp.coarsened().expect("an even rule");
        let full = fourier_vector(&parts, 2, fp.points);
        let (n, m) = nested_dimensions(&fp.d, &full, fp.points, 2);
        let (dn, dm) = (fp.dimension_of(&parts), coarse.dimension_of(&parts));
        let what = format!("{} points", fp.points);
        assert!((n - dn).abs() <= 1e-14 * dn, "{what}: {n} vs {dn}");
        assert!((m - dm).abs() <= 1e-14 * dm, "{what}: {m} vs {dm}");
        assert!(n != m, "{what}: the two rules differ at all");
    }
}
