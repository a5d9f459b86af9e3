//! The infinite array (`wires = "infinite"`): the sliding Luttinger liquid
//! check values, the window of the lam axis where interwire CDW and pair
//! hopping are both irrelevant, the honesty of the quadrature's error
//! estimate, the exact data per wire, commutation at every relative
//! offset, the real-space D of a window, and points where V(q) is not
//! positive definite.
//!
//! Sliding Luttinger liquid [Mukhopadhyay, Kane & Lubensky, PRB 64, 045120
//! (2001); structure from memory, formulas derived in the project's check
//! values]: cell K = diag(1, -1), t = (1, 1), V^(0) = [[1, g], [g, 1]],
//! V^(1) = w [[1, 1], [1, 1]]. With K0 = sqrt((1 - g)/(1 + g)) and
//! lam = 4 w / (1 + g), K(q) = K0 / sqrt(1 + lam cos q) and
//!   interwire CDW      Delta = 2 int dq/2pi K(q) (1 - cos q),
//!   pair hopping       Delta = 2 int dq/2pi (1 - cos q) / K(q),
//!   single particle    Delta = (1/2) int dq/2pi (K + 1/K)(1 - cos q), spin 1.
//! At K0 = 0.8, lam = 0.5: 1.91562, 2.13776, 1.01334.
//!
//! The tests evaluate these scalar integrals themselves (a plain periodic
//! trapezoid sum of the scalar formulas with many points), independently of
//! the tool's matrix algebra in q-space.

mod common;

use std::f64::consts::PI;
use std::path::Path;

use assert_cmd::Command;
use common::{assert_close, report_at, sliding, system, term};
use pinflow::core::qspace;
use pinflow::error::Error;

/// int_{-pi}^{pi} dq/2pi f(q) by the trapezoid sum of the scalar formula
/// on 20000 points (the integrands are analytic for |lam| < 1: far below
/// 1e-12 for the lam used here, derived from the strip of analyticity
/// |Im q| < arccosh(1/lam)).
fn integral(f: impl Fn(f64) -> f64) -> f64 {
    let n = 20_000;
    (0..n)
        .map(|k| f(2.0 * PI * k as f64 / n as f64))
        .sum::<f64>()
        / n as f64
}

fn k_of_q(k0: f64, lam: f64, q: f64) -> f64 {
    k0 / (1.0 + lam * q.cos()).sqrt()
}

fn cdw(k0: f64, lam: f64) -> f64 {
    2.0 * integral(|q| k_of_q(k0, lam, q) * (1.0 - q.cos()))
}

fn pair_hop(k0: f64, lam: f64) -> f64 {
    2.0 * integral(|q| (1.0 - q.cos()) / k_of_q(k0, lam, q))
}

fn hop(k0: f64, lam: f64) -> f64 {
    0.5 * integral(|q| {
        let k = k_of_q(k0, lam, q);
        (k + 1.0 / k) * (1.0 - q.cos())
    })
}

#[test]
fn sliding_luttinger_liquid_values() {
    let r = report_at(&sliding("\"infinite\"", 0.1), &[]);
    let cases = [
        ("cdw", 1.91562, cdw(0.8, 0.5)),
        ("pair_hop", 2.13776, pair_hop(0.8, 0.5)),
        ("hop", 1.01334, hop(0.8, 0.5)),
    ];
    for (name, listed, integral) in cases {
        let t = term(&r, name);
        // The check values (5 decimals) and the integrals themselves.
        assert_close(&format!("{name} (listed value)"), t.dimension, listed, 5e-6);
        assert_close(&format!("{name} (integral)"), t.dimension, integral, 1e-10);
    }
    assert_eq!(term(&r, "cdw").spin, "0");
    assert_eq!(term(&r, "pair_hop").spin, "0");
    assert_eq!(term(&r, "hop").spin, "1");
    assert_eq!(term(&r, "pair_hop").charge, "0");
    assert!(r.infinite && r.wires.is_none());
    assert_eq!(r.fields, 2);
    let q = r
        .quadrature
        .expect("an infinite array states its quadrature");
    assert!(q.converged && q.error_estimate <= q.tolerance);
    assert_eq!(q.tolerance, 1e-10);
    // Terms list the wires they touch: offsets 0 and 1.
    assert_eq!(term(&r, "cdw").vector, vec![1, 1, -1, -1]);
    assert_eq!(term(&r, "cdw").particles, Some(vec![1, -1, -1, 1]));
}

#[test]
fn the_velocity_at_q_zero_and_its_range() {
    // Per q the two modes have velocity u(q) = sqrt((1 - g)(1 + g)(1 + lam
    // cos q)) (derived: V(q) = [[a, b], [b, a]] with a = 1 + 2w cos q,
    // b = g + 2w cos q gives u = sqrt(a^2 - b^2) for K = diag(1, -1)).
    let r = report_at(&sliding("\"infinite\"", 0.1), &[]);
    let g: f64 = (1.0 - 0.64) / 1.64;
    let u = |q: f64| ((1.0 - g) * (1.0 + g) * (1.0 + 0.5 * q.cos())).sqrt();
    for v in &r.velocities {
        assert_close("velocity at q = 0", *v, u(0.0), 1e-12);
    }
    assert_eq!(r.chiralities, vec![1, -1]);
    for range in r.velocity_ranges.unwrap() {
        assert_close("slowest (q = pi)", range[0], u(PI), 1e-12);
        assert_close("fastest (q = 0)", range[1], u(0.0), 1e-12);
    }
}

/// The lam where a dimension crosses 2, by bisection on the scalar
/// integral (increasing or decreasing in lam on [lo, hi]).
fn crossing(f: impl Fn(f64) -> f64, mut lo: f64, mut hi: f64) -> f64 {
    let below_at_lo = f(lo) < 2.0;
    for _ in 0..60 {
        let mid = 0.5 * (lo + hi);
        if (f(mid) < 2.0) == below_at_lo {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

fn pinflow(dir: &Path) -> Command {
    let mut c = Command::cargo_bin("pinflow").unwrap();
    c.current_dir(dir);
    c
}

#[test]
fn scan_along_lam_opens_and_closes_the_window_where_the_integrals_say() {
    // Derived from the formulas above: at K0 = 0.8, Delta_cdw grows with lam
    // and crosses 2 at lam1; Delta_pair_hop falls and crosses 2 at lam2 > lam1:
    // both are irrelevant exactly for lam1 < lam < lam2.
    let lam1 = crossing(|l| cdw(0.8, l), 0.5, 0.75);
    let lam2 = crossing(|l| pair_hop(0.8, l), 0.5, 0.75);
    assert!(lam1 < lam2, "a window exists: {lam1} < {lam2}");
    let dir = tempfile::tempdir().unwrap();
    // Only the two competing terms, so that the window is theirs.
    let text = sliding("\"infinite\"", 0.005);
    let text = &text[..text.find("[[term]]\nname = \"hop\"").unwrap()];
    std::fs::write(dir.path().join("model.toml"), text).unwrap();
    pinflow(dir.path())
        .args([
            "scan",
            "model.toml",
            "--x",
            "lam=0.5:0.75:51",
            "--out",
            "out",
            "--quiet",
            "--closure",
            "none",
            "--ell-max",
            "1000",
        ])
        .assert()
        .success();
    let csv = std::fs::read_to_string(dir.path().join("out/points.csv")).unwrap();
    let mut lines = csv.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let col = |name: &str| header.iter().position(|h| *h == name).unwrap();
    let (c_lam, c_out, c_win) = (col("lam"), col("outcome"), col("winner"));
    let (c_cdw, c_ph) = (col("dimension0:cdw"), col("dimension0:pair_hop"));
    let mut inside = 0;
    for line in lines {
        let cells: Vec<&str> = line.split(',').collect();
        let lam: f64 = cells[c_lam].parse().unwrap();
        let d_cdw: f64 = cells[c_cdw].parse().unwrap();
        let d_ph: f64 = cells[c_ph].parse().unwrap();
        assert_close(&format!("cdw at lam = {lam}"), d_cdw, cdw(0.8, lam), 1e-9);
        assert_close(
            &format!("pair_hop at lam = {lam}"),
            d_ph,
            pair_hop(0.8, lam),
            1e-9,
        );
        let both_irrelevant = d_cdw > 2.0 && d_ph > 2.0;
        assert_eq!(
            both_irrelevant,
            lam > lam1 && lam < lam2,
            "lam = {lam}: window ({lam1}, {lam2})"
        );
        inside += both_irrelevant as usize;
        // Away from the edges the flow says the same. At second order a
        // null term with Delta slightly above 2 still grows when its bare
        // y exceeds the Kosterlitz-Thouless critical coupling y_c =
        // sqrt(2 (8/Delta + 4 ln(Delta/2) - 4)) = Delta - 2 + O((Delta-2)^2)
        // (project's flow check values, expanded): the flow's window is
        // narrower by the lam over which Delta - 2 < y = 0.005, i.e. by less
        // than 0.005 at each edge (dDelta/dlam > 1 here). Near the edges the
        // flow is slow (rate |2 - Delta|), hence ell_max = 1000.
        let (outcome, winner) = (cells[c_out], cells[c_win]);
        if lam < lam1 - 0.02 {
            assert_eq!((outcome, winner), ("strong", "cdw"), "lam = {lam}");
        } else if lam > lam2 + 0.02 {
            assert_eq!((outcome, winner), ("strong", "pair_hop"), "lam = {lam}");
        } else if lam > lam1 + 0.01 && lam < lam2 - 0.01 {
            assert_ne!(outcome, "strong", "lam = {lam}");
        }
    }
    // The grid step is 0.005: the window holds about (lam2 - lam1)/0.005 points.
    let expected = ((lam2 - lam1) / 0.005).floor() as usize;
    assert!(
        inside >= expected && inside <= expected + 1,
        "{inside} points inside, about {expected} expected"
    );
}

#[test]
fn quadrature_error_estimate_is_honest() {
    // Compare every dimension with a rule of 16 times the points (its own
    // error is far below the estimate, the rule converging geometrically).
    let text = sliding("\"infinite\"", 0.1);
    let sys = system(&text);
    for lam in [0.0, 0.5, 0.9, 0.99, 0.999] {
        let point = sys
            .model
            .point_with(&[("lam".to_string(), lam)], "test")
            .unwrap();
        let (fp, quad) = sys.q_converged(&point).unwrap();
        let (fine, _) = sys.q_on_rule(&point, 16 * quad.points).unwrap();
        let (a, b) = (
            sys.q_dimensions(&fp).unwrap(),
            sys.q_dimensions(&fine).unwrap(),
        );
        assert!(quad.converged, "lam = {lam}: {quad:?}");
        for (x, y) in a.iter().zip(&b) {
            let err = (x - y).abs();
            assert!(
                err <= quad.error_estimate.max(1e-14),
                "lam = {lam}: error {err:e} above the estimate {:e}",
                quad.error_estimate
            );
        }
        // A fixed (coarse) rule: the estimate must bound its real error too.
        for n in [8usize, 16, 32] {
            let (coarse, q) = sys.q_on_rule(&point, n).unwrap();
            for (x, y) in sys.q_dimensions(&coarse).unwrap().iter().zip(&b) {
                let err = (x - y).abs();
                assert!(
                    err <= q.error_estimate.max(1e-14),
                    "lam = {lam}, {n} points: error {err:e} above the estimate {:e}",
                    q.error_estimate
                );
            }
        }
    }
}

#[test]
fn a_point_where_v_of_q_is_not_positive_definite_names_q() {
    // Derived: V(q) has the eigenvalue (1 + g)(1 + lam cos q), negative for
    // cos q < -1/lam when lam > 1; the other eigenvalue is 1 - g > 0.
    let sys = system(&sliding("\"infinite\"", 0.1));
    let point = sys
        .model
        .point_with(&[("lam".to_string(), 1.2)], "test")
        .unwrap();
    match sys.q_converged(&point) {
        Err(Error::Unphysical(u)) => {
            let q = u.q.expect("the q-space path names q");
            assert!(q.cos() < -1.0 / 1.2, "q = {q}");
            let g = (1.0 - 0.64) / 1.64;
            let expected = (1.0 + g) * (1.0 + 1.2 * q.cos());
            assert_close(
                "smallest eigenvalue",
                u.smallest_eigenvalue,
                expected,
                1e-12,
            );
            let msg = u.to_string();
            assert!(msg.contains("lam=1.2") && msg.contains("q = "), "{msg}");
        }
        other => panic!("expected an unphysical point, got {other:?}"),
    }
    // Just below the edge the point is physical (and needs a fine rule).
    let point = sys
        .model
        .point_with(&[("lam".to_string(), 0.999)], "test")
        .unwrap();
    assert!(sys.q_converged(&point).is_ok());
}

#[test]
fn a_negative_window_between_quadrature_points_is_caught() {
    // V(q) = 1 + 2a cos q + 2b cos 2q on a one-field cell K = (1): with
    // a = -0.6, b = 0.45 its minimum 1 - 2b - a^2/(4b) = -0.1 (derived) lies
    // near q = 1.23, between the points of the 8-point rule, where V > 0.
    let text = r#"
[array]
wires = "infinite"
K = [[1]]
charge = [1]
[array.V]
0 = [[1]]
1 = [[-0.6]]
2 = [[0.45]]
[[term]]
name = "e"
particles = [1]
"#;
    let sys = system(text);
    for n in [8usize, 16] {
        match sys.q_fixed_point(&[], n) {
            Err(Error::Unphysical(u)) => {
                let q = u.q.unwrap();
                let v = 1.0 - 1.2 * q.cos() + 0.9 * (2.0 * q).cos();
                assert!(v <= 0.0, "q = {q}: V = {v}");
            }
            other => panic!("{n} points: expected unphysical, got {other:?}"),
        }
    }
}

#[test]
fn exact_data_per_wire() {
    // Arrays of layers: per-wire filling and det K are those of the cell
    // [Wen, Adv. Phys. 44, 405 (1995), the K-matrix table of the project's
    // check values]: Laughlin 1/3 (K = (3)): 1/3 and 3; Halperin (331):
    // 1/2 and 8, and its quasiparticle l = (1, 0) has charge 1/4 and spin
    // 3/16 (derived from the same formulas).
    let laughlin = r#"
[array]
wires = "infinite"
K = [[3]]
charge = [1]
[array.V]
0 = [[1]]
1 = [[0.2]]
[[term]]
name = "tunnel"
vector = { 0 = [1], 1 = [-1] }
"#;
    let r = report_at(laughlin, &[]);
    assert_eq!(r.filling, "1/3");
    assert_eq!(r.filling_per_wire.as_deref(), Some("1/3"));
    assert_eq!(r.det_k, "3");
    assert_eq!(r.det_k_cell.as_deref(), Some("3"));
    assert_eq!(r.signature, [1, 0]);
    let halperin = r#"
[array]
wires = "infinite"
K = [[3, 1], [1, 3]]
charge = [1, 1]
[array.V]
0 = [[1, 0.1], [0.1, 1]]
1 = [[0.1, 0], [0, 0.1]]
[[term]]
name = "qp"
vector = [1, 0]
"#;
    let r = report_at(halperin, &[]);
    assert_eq!(r.filling, "1/2");
    assert_eq!(r.det_k, "8");
    assert_eq!(r.signature, [2, 0]);
    let qp = term(&r, "qp");
    assert_eq!(qp.charge, "1/4");
    assert_eq!(qp.spin, "3/16");
    assert!(!qp.local);
}

/// A term as (wire offset, lattice vector on the two-field cell).
type Parts = Vec<(usize, [i64; 2])>;

/// Mutual phase l_a^T K^-1 l_b' of two terms on the infinite line, b
/// shifted by s wires, for the cell K = diag(1, -1) (K^-1 = K), written
/// out directly (derived from the formula of the physics reference).
fn line_phase(a: &[(usize, [i64; 2])], b: &[(usize, [i64; 2])], s: i64) -> i64 {
    let mut total = 0;
    for (oa, la) in a {
        for (ob, lb) in b {
            if *oa as i64 == *ob as i64 + s {
                total += la[0] * lb[0] - la[1] * lb[1];
            }
        }
    }
    total
}

#[test]
fn commutation_at_every_relative_offset() {
    // Terms of range 0 to 3: the infinite array's "commutes" must be the
    // line's (every relative offset), which a small ring can get wrong
    // (translates wrapping onto each other).
    let terms: Vec<(&str, Parts)> = vec![
        ("cdw", vec![(0, [1, 1]), (1, [-1, -1])]),
        ("a", vec![(0, [1, 0]), (1, [0, -1])]),
        ("b", vec![(0, [0, 1]), (3, [-1, 0])]),
        ("mixed", vec![(0, [1, -1]), (2, [1, 1])]),
        ("back", vec![(0, [1, -1])]),
        ("hop", vec![(0, [1, 0]), (1, [-1, 0])]),
    ];
    let mut text = String::from(
        "[array]\nwires = \"infinite\"\nK = [[1, 0], [0, -1]]\ncharge = [1, 1]\n[array.V]\n0 = [[1, 0.2], [0.2, 1]]\n1 = [[0.1, 0], [0, 0.1]]\n",
    );
    for (name, parts) in &terms {
        let p: Vec<String> = parts
            .iter()
            .map(|(o, l)| format!("{o} = [{}, {}]", l[0], l[1]))
            .collect();
        text.push_str(&format!(
            "[[term]]\nname = \"{name}\"\nvector = {{ {} }}\n",
            p.join(", ")
        ));
    }
    let r = report_at(&text, &[]);
    for (i, (na, a)) in terms.iter().enumerate() {
        for (j, (nb, b)) in terms.iter().enumerate() {
            let all_zero = (-8..=8).all(|s| line_phase(a, b, s) == 0);
            assert_eq!(r.commutes[i][j], all_zero, "{na} with {nb}");
            assert_eq!(
                r.commutation[i][j],
                line_phase(a, b, 0).to_string(),
                "{na} with {nb} at the same anchor"
            );
        }
    }
    for (i, t) in r.terms.iter().enumerate() {
        assert_eq!(t.self_commuting, r.commutes[i][i], "{}", t.name);
    }
    // a = {0: u, 1: v}, b = {0: p, 3: r} with u.p = 0, v.r = 0, v.p = 1 and
    // u.r = -1 (K^-1 = diag(1, -1)): on the line b shifted by 1 and by -3
    // do not commute with a; on a 4-wire ring those two shifts are one, and
    // the phases cancel.
    assert_eq!(line_phase(&terms[1].1, &terms[2].1, 1), 1);
    assert_eq!(line_phase(&terms[1].1, &terms[2].1, -3), -1);
    let ring = report_at(&text.replace("\"infinite\"", "4"), &[]);
    assert!(!r.commutes[1][2]);
    assert!(ring.commutes[1][2]);
}

#[test]
fn real_space_window_equals_a_large_ring() {
    // D_{j,j'} = int dq/2pi e^{iq(j-j')} D(q) restricted to 5 wires, against
    // the dense D of a 96-wire ring (translation invariant; it differs from
    // the infinite array by terms that decay exponentially with the ring's
    // size). V^(1) is not symmetric here, so the sign of q matters.
    let base = r#"
[params]
g = 0.5
[array]
wires = WIRES
K = [[1, 0], [0, -1]]
charge = [1, 1]
[array.V]
0 = [["1", "0.8"], ["0.8", "1"]]
1 = [["0.4*g", "0.8*g"], ["0.2*g", "0.4*g"]]
2 = [["0.05", "0.02"], ["0", "0.05"]]
[[term]]
name = "tunnel"
particles = { 0 = [-2, 1], 1 = [-1, 2] }
"#;
    let inf = system(&base.replace("WIRES", "\"infinite\""));
    let ring = system(&base.replace("WIRES", "96"));
    let point = inf.model.params.defaults().to_vec();
    let (window, quad) = inf.real_space_window(&point, 5).unwrap();
    let quad = quad.unwrap();
    assert!(quad.converged && quad.error_estimate <= qspace::TOLERANCE);
    let dense = ring.fixed_point(&point).unwrap().d;
    let top = dense.view((0, 0), (10, 10)).into_owned();
    let diff = (&window - &top).amax();
    assert!(
        diff < 1e-10,
        "window differs from the 96-wire ring by {diff:e}"
    );
    // D^(1) (fields 0, 1 against 2, 3) is not symmetric, so the other sign
    // of q (which gives D^(1)T there) would have failed the comparison.
    assert!((window[(0, 3)] - window[(1, 2)]).abs() > 1e-3);
}
