//! Physics of the second-order flow beyond one cosine: how a pinning term
//! changes the dimensions of the others (the D feedback), the OPE
//! coefficients, and the equivalence of a periodic family with its
//! translates written out one by one.
//!
//! Equations [physics reference section 3, derived from Cardy, "Scaling and
//! Renormalization in Statistical Physics" (1996), ch. 5; the single-cosine
//! limit is Giamarchi, "Quantum Physics in One Dimension" (2004), app. E,
//! from memory]:
//!
//!     dy_a/dl = (2 - Delta_a) y_a + OPE terms,
//!     dD/dl   = -(1/8) sum_{b: s_b = 0} y_b^2 [D l_b l_b^T D - K^-1 l_b l_b^T K^-1].
//!
//! Per-term rate (derived): Delta_a = (1/2) l_a^T D l_a, so
//!
//!     dDelta_a/dl = -(1/16) sum_{b null} y_b^2 [ (l_a^T D l_b)^2 - (l_a^T K^-1 l_b)^2 ].
//!
//! A term b commuting with a (l_a^T K^-1 l_b = 0) can only lower Delta_a;
//! a non-commuting one contributes +(1/16) y_b^2 (l_a^T K^-1 l_b)^2 minus
//! its D overlap, and raises Delta_a when the overlap vanishes (as for the
//! dual pair below).

#[path = "flowcommon/mod.rs"]
mod common;

use std::collections::HashMap;

use common::*;
use nalgebra::{DMatrix, DVector};
use pinflow::core::system::System;
use pinflow::flow::{Closure, Flow, FlowResult};

/// K = diag(1, -1, 1, -1, ...) for `wires` spinless wires: K^-1 = K.
fn k_diag(wires: usize) -> DMatrix<f64> {
    DMatrix::from_fn(2 * wires, 2 * wires, |i, j| {
        if i != j {
            0.0
        } else if i % 2 == 0 {
            1.0
        } else {
            -1.0
        }
    })
}

/// l = K m for particle content m over all fields.
fn l_of(m: &[i64]) -> DVector<f64> {
    let k = k_diag(m.len() / 2);
    &k * DVector::from_iterator(m.len(), m.iter().map(|x| *x as f64))
}

fn bare_d(sys: &System) -> DMatrix<f64> {
    sys.fixed_point(&point(sys)).unwrap().d
}

fn form(a: &DVector<f64>, m: &DMatrix<f64>, b: &DVector<f64>) -> f64 {
    (a.transpose() * m * b)[(0, 0)]
}

// (a1) A single wire with backscattering (m = (1, -1), Delta = K_L) and
// pairing (m = (1, 1), Delta = 1/K_L) [Giamarchi (2004) ch. 2; checks.md].
// They do not commute: l_b^T K^-1 l_p = m_b^T K m_p = 1 + 1 = 2.
//
// Derived: any D with D K D = K^-1 for K = diag(1, -1) (symmetric, positive)
// has the form [[a, c], [c, a]] with a^2 - c^2 = 1 (the diagonal of DKD
// gives a^2 - c^2 = 1 and b^2 - c^2 = 1, the off-diagonal c (a - b) = 0).
// Then Delta_b = a + c and Delta_p = a - c, so Delta_b * Delta_p = 1 along
// the whole flow: the pinning backscattering lowers its own dimension and
// raises that of its dual by the same factor.
#[test]
fn pinning_raises_the_dual_dimension() {
    let text = wire(
        0.3,
        &(term_toml("backscatter", "[1, -1]", 0.1, "")
            + &term_toml("pairing", "[1, 1]", 0.01, "allowed_charge = 2")),
    );
    let r = run(&system(&text), tight(Closure::None, 40.0));
    let (b, p) = (term(&r, "backscatter"), term(&r, "pairing"));
    let k_l = luttinger(0.3);
    assert!((r.terms[b].dimension0 - k_l).abs() < 1e-12);
    assert!((r.terms[p].dimension0 - 1.0 / k_l).abs() < 1e-12);
    assert_eq!(r.winner.as_deref(), Some("backscatter"));
    let mut prev: Option<(f64, f64)> = None;
    for s in &r.samples {
        let (db, dp) = (s.dimensions[b], s.dimensions[p]);
        assert!(
            (db * dp - 1.0).abs() < 1e-9,
            "Delta_b Delta_p = {} at ell = {}",
            db * dp,
            s.ell
        );
        if let Some((db0, dp0)) = prev {
            assert!(db <= db0 + 1e-12 && dp >= dp0 - 1e-12, "at ell = {}", s.ell);
        }
        prev = Some((db, dp));
    }
    let end = &r.terms;
    assert!(end[b].dimension < end[b].dimension0 - 0.02);
    assert!(end[p].dimension > end[p].dimension0 + 0.02);
}

// (a2) Initial rates of every term in two wires coupled by an interwire V:
// the pinning backscattering a on wire 1, a commuting backscattering c on
// wire 2 (its Delta can only fall), the non-commuting pairing p on wire 1,
// and an interwire electron hop e with conformal spin 1 (m^T K m = 2), which
// must not feed back on D. Closure none: no sum or difference of two listed
// vectors is listed, so there are no OPE terms and dy/dl = (2 - Delta) y.
// Each rate is compared with a finite difference over a short flow.
#[test]
fn initial_rates_follow_the_d_flow() {
    let terms = [
        ("a", [1i64, -1, 0, 0], 0.3, ""),
        ("c", [0, 0, 1, -1], 0.1, ""),
        ("p", [1, 1, 0, 0], 0.05, "allowed_charge = 2"),
        ("e", [1, 0, -1, 0], 0.2, ""),
    ];
    let mut text = String::from(
        "[fields]\nK = [[1, 0, 0, 0], [0, -1, 0, 0], [0, 0, 1, 0], [0, 0, 0, -1]]\n\
         charge = [1, 1, 1, 1]\n\
         V = [[1.0, 0.3, 0.1, 0.15], [0.3, 1.0, 0.15, 0.1], [0.1, 0.15, 1.0, 0.3], [0.15, 0.1, 0.3, 1.0]]\n",
    );
    for (name, m, y, extra) in &terms {
        text += &term_toml(name, &format!("{m:?}"), *y, extra);
    }
    let sys = system(&text);
    let d = bare_d(&sys);
    let kinv = k_diag(2);
    let ls: Vec<DVector<f64>> = terms.iter().map(|t| l_of(&t.1)).collect();
    let spin: Vec<f64> = ls.iter().map(|l| 0.5 * form(l, &kinv, l)).collect();
    assert_eq!(spin, vec![0.0, 0.0, 0.0, 1.0]);
    let h = 1e-4;
    let r = run(&sys, tight(Closure::None, h));
    assert_eq!(r.terms.len(), terms.len());
    for (x, (name, _, y, _)) in terms.iter().enumerate() {
        let t = &r.terms[term(&r, name)];
        let delta = 0.5 * form(&ls[x], &d, &ls[x]);
        assert!((t.dimension0 - delta).abs() < 1e-12);
        let mut rate = 0.0;
        for (b, (_, _, yb, _)) in terms.iter().enumerate() {
            if spin[b] != 0.0 {
                continue; // only null terms feed back on D
            }
            let (dd, kk) = (form(&ls[x], &d, &ls[b]), form(&ls[x], &kinv, &ls[b]));
            rate -= yb * yb / 16.0 * (dd * dd - kk * kk);
        }
        let measured = (t.dimension - t.dimension0) / h;
        assert!(
            (measured - rate).abs() < 1e-3 * rate.abs(),
            "{name}: dDelta/dl = {measured}, expected {rate}"
        );
        let y_rate = (2.0 - delta) * y;
        let y_measured = (t.coupling - y) / h;
        assert!(
            (y_measured - y_rate).abs() < 1e-3 * y_rate.abs(),
            "{name}: dy/dl = {y_measured}, expected {y_rate}"
        );
    }
    // Signs: a lowers itself and the commuting c; p, which does not commute
    // with a, rises.
    let rate = |name: &str| {
        let t = &r.terms[term(&r, name)];
        t.dimension - t.dimension0
    };
    assert!(rate("a") < 0.0 && rate("c") < 0.0 && rate("p") > 0.0);
}

// (b) OPE coefficients. Derivation (same shell integral as the D flow): in
// S' = sum_a (y_a / (2 pi alpha^2)) int cos(l_a.phi), the second-order term
// (1/2) S'^2 with both points in the shell alpha < r < alpha (1 + dl) (area
// 2 pi alpha^2 dl) and cos A cos B = (1/2)[cos(A + B) + cos(A - B)] gives,
// for a != b (two ordered pairs), +(y_a y_b / (4 pi alpha^2)) dl int cos(A+B)
// in e^{-S}, i.e. dy_{a+b}/dl = -(1/2) y_a y_b, and the same for a - b; a
// term with itself (one pair) gives dy_{2a}/dl = -(1/4) y_a^2. The contraction
// factor is 1 at r = alpha and, for commuting null terms, there is no
// angular dependence. The same integral applied to cos(A(x) - A(y)) gives
// Giamarchi's dK/dl = -y^2 K^2 / 2, so the two coefficients are consistent.
// Pairs that do not commute generate nothing at this order.
//
// Check: two backscatterings on different wires (commuting, null) with
// couplings y_a, y_b and a pairing p on wire 1 (does not commute with a);
// after a short flow h the generated couplings are y = -(coefficient) h to
// O(h^2) (the sign shows as phase pi).
//
// Phases (derived from the same product formula): cos(A + chi_a) cos(B + chi_b)
// = (1/2)[cos(A + B + chi_a + chi_b) + cos(A - B + chi_a - chi_b)], so the
// generated a + b carries phase chi_a + chi_b + pi (the minus sign), a - b
// carries chi_a - chi_b + pi and 2a carries 2 chi_a + pi.
fn check_ope(chi_a: f64, chi_b: f64, chi_p: f64) {
    let (ya, yb, yp) = (0.1, 0.2, 0.05);
    let phase = |chi: f64| format!("phase = {}", num(chi));
    let text = format!(
        "[fields]\nK = [[1, 0, 0, 0], [0, -1, 0, 0], [0, 0, 1, 0], [0, 0, 0, -1]]\n\
         charge = [1, 1, 1, 1]\n\
         V = [[1.0, 0.2, 0.05, 0.1], [0.2, 1.0, 0.1, 0.05], [0.05, 0.1, 1.0, 0.2], [0.1, 0.05, 0.2, 1.0]]\n{}{}{}",
        term_toml("a", "[1, -1, 0, 0]", ya, &phase(chi_a)),
        term_toml("b", "[0, 0, 1, -1]", yb, &phase(chi_b)),
        term_toml("p", "[1, 1, 0, 0]", yp, &(phase(chi_p) + "\nallowed_charge = 2")),
    );
    let sys = system(&text);
    let h = 1e-4;
    let mut opts = tight(Closure::Pairs, h);
    opts.closure_bound = 100.0;
    let r = run(&sys, opts);
    let names: Vec<&str> = r.terms.iter().map(|t| t.name.as_str()).collect();
    for absent in ["a+p", "a-p", "p+a", "p-a"] {
        assert!(!names.contains(&absent), "{absent} generated: {names:?}");
    }
    let expected = [
        ("a+b", 0.5 * ya * yb, chi_a + chi_b),
        ("a-b", 0.5 * ya * yb, chi_a - chi_b),
        ("2*a", 0.25 * ya * ya, 2.0 * chi_a),
        ("2*b", 0.25 * yb * yb, 2.0 * chi_b),
        ("b+p", 0.5 * yb * yp, chi_b + chi_p),
        ("b-p", 0.5 * yb * yp, chi_b - chi_p),
        ("2*p", 0.25 * yp * yp, 2.0 * chi_p),
    ];
    for (name, coefficient, chi) in expected {
        let t = &r.terms[term(&r, name)];
        assert_eq!(t.origin, "generated");
        assert_eq!(t.coupling0, 0.0);
        let slope = t.coupling / h;
        assert!(
            (slope - coefficient).abs() < 1e-3 * coefficient,
            "{name}: |y|/ell = {slope}, expected {coefficient}"
        );
        // Compare phases on the circle: chi + pi, i.e. a negative coupling.
        let want = chi + std::f64::consts::PI;
        let diff = (t.phase - want).sin().hypot((t.phase - want).cos() - 1.0);
        assert!(
            diff < 1e-6,
            "{name}: generated with phase {}, expected {want} (mod 2 pi)",
            t.phase
        );
    }
    // First order keeps the phase of a listed term.
    for (name, chi) in [("a", chi_a), ("b", chi_b), ("p", chi_p)] {
        let t = &r.terms[term(&r, name)];
        assert!((t.phase - chi).abs() < 1e-9, "{name}: {} vs {chi}", t.phase);
    }
}

#[test]
fn ope_coefficients_at_small_ell() {
    check_ope(0.0, 0.0, 0.0);
}

#[test]
fn ope_phases_at_small_ell() {
    check_ope(0.3, -0.7, 1.1);
}

// (c) A periodic array flowed as families equals the same array written out
// explicitly, every translate its own term with the same bare coupling.
struct Ring {
    wires: usize,
    block0: [[f64; 2]; 2],
    block1: [[f64; 2]; 2],
    /// (name, per-offset particle content, coupling)
    terms: Vec<(&'static str, Vec<[i64; 2]>, f64)>,
}

impl Ring {
    fn array_text(&self) -> String {
        let mat = |b: &[[f64; 2]; 2]| {
            format!(
                "[[{}, {}], [{}, {}]]",
                num(b[0][0]),
                num(b[0][1]),
                num(b[1][0]),
                num(b[1][1])
            )
        };
        let mut s = format!(
            "[array]\nwires = {}\nboundary = \"periodic\"\nK = [[1, 0], [0, -1]]\ncharge = [1, 1]\n\
             [array.V]\n0 = {}\n1 = {}\n",
            self.wires,
            mat(&self.block0),
            mat(&self.block1)
        );
        for (name, parts, y) in &self.terms {
            let table: Vec<String> = parts
                .iter()
                .enumerate()
                .map(|(off, m)| format!("{off} = {m:?}"))
                .collect();
            s += &term_toml(name, &format!("{{ {} }}", table.join(", ")), *y, "");
        }
        s
    }

    /// The dense m of a term anchored at wire j.
    fn dense_m(&self, parts: &[[i64; 2]], j: usize) -> Vec<i64> {
        let mut m = vec![0i64; 2 * self.wires];
        for (off, p) in parts.iter().enumerate() {
            let w = (j + off) % self.wires;
            m[2 * w] += p[0];
            m[2 * w + 1] += p[1];
        }
        m
    }

    fn explicit_text(&self) -> String {
        let n = 2 * self.wires;
        let w = self.wires;
        let mut v = vec![vec![0.0; n]; n];
        for j in 0..w {
            for a in 0..2 {
                for b in 0..2 {
                    v[2 * j + a][2 * j + b] += self.block0[a][b];
                    // V_{j, j+1} = V^(1); V_{j+1, j} = V^(1)T.
                    v[2 * j + a][2 * ((j + 1) % w) + b] += self.block1[a][b];
                    v[2 * ((j + 1) % w) + b][2 * j + a] += self.block1[a][b];
                }
            }
        }
        let rows = |f: &dyn Fn(usize, usize) -> String| -> String {
            let r: Vec<String> = (0..n)
                .map(|i| {
                    let e: Vec<String> = (0..n).map(|j| f(i, j)).collect();
                    format!("[{}]", e.join(", "))
                })
                .collect();
            format!("[{}]", r.join(", "))
        };
        let k = rows(&|i, j| {
            (if i != j {
                "0"
            } else if i % 2 == 0 {
                "1"
            } else {
                "-1"
            })
            .to_string()
        });
        let vt = rows(&|i, j| num(v[i][j]));
        let charge = vec!["1"; n].join(", ");
        let mut s = format!("[fields]\nK = {k}\ncharge = [{charge}]\nV = {vt}\n");
        for (name, parts, y) in &self.terms {
            for j in 0..w {
                let m = self.dense_m(parts, j);
                s += &term_toml(&format!("{name}.{j}"), &format!("{m:?}"), *y, "");
            }
        }
        s
    }
}

fn sample_ring(wires: usize) -> Ring {
    Ring {
        wires,
        block0: [[1.0, 0.25], [0.25, 1.0]],
        // A non-symmetric nearest-neighbour block.
        block1: [[0.1, 0.15], [0.05, 0.1]],
        terms: vec![
            ("cdw", vec![[1, -1], [-1, 1]], 0.3),
            ("umklapp", vec![[2, -2]], 0.2),
            ("pair_hop", vec![[1, 1], [-1, -1]], 0.1),
        ],
    }
}

#[test]
fn family_flow_equals_explicit_translates_without_closure() {
    for wires in [3, 5] {
        let ring = sample_ring(wires);
        let fam = run(&system(&ring.array_text()), tight(Closure::None, 2.0));
        let exp = run(&system(&ring.explicit_text()), tight(Closure::None, 2.0));
        assert_eq!(fam.outcome, exp.outcome);
        assert_eq!(fam.terms.len(), ring.terms.len());
        assert_eq!(exp.terms.len(), ring.terms.len() * wires);
        for (name, _, y) in &ring.terms {
            let f = &fam.terms[term(&fam, name)];
            // The flow moved these couplings and dimensions noticeably.
            assert!((f.coupling - y).abs() > 1e-2 && (f.dimension - f.dimension0).abs() > 1e-4);
            for j in 0..wires {
                let e = &exp.terms[term(&exp, &format!("{name}.{j}"))];
                assert!((e.dimension0 - f.dimension0).abs() < 1e-12);
                assert!(
                    (e.coupling - f.coupling).abs() < 1e-6 * f.coupling.max(1.0),
                    "{name}.{j}: y = {} vs family {}",
                    e.coupling,
                    f.coupling
                );
                assert!(
                    (e.dimension - f.dimension).abs() < 1e-6,
                    "{name}.{j}: Delta = {} vs family {}",
                    e.dimension,
                    f.dimension
                );
            }
        }
    }
}

/// Every flowing vector (all translates, up to sign) of a flow, with the
/// index of its channel in the result.
fn vectors(
    sys: &System,
    r: &FlowResult,
    opts: &pinflow::flow::FlowOptions,
) -> Vec<(Vec<i64>, usize)> {
    let flow = Flow::new(sys, opts.clone());
    assert_eq!(
        flow.plan.channels.len(),
        r.terms.len(),
        "all candidates included"
    );
    let mut out = Vec::new();
    for (c, ch) in flow.plan.channels.iter().enumerate() {
        assert_eq!(ch.name, r.terms[c].name);
        for t in &ch.family.translates {
            // Normalise the sign: first non-zero entry positive.
            let first = t.l.iter().find(|x| **x != 0).copied().unwrap();
            let v = t.l.iter().map(|x| x * first.signum()).collect();
            out.push((v, c));
        }
    }
    out
}

// With the pairs closure the two descriptions generate the same set of
// vectors on a 3-wire ring (every sum of two translates fits the family's
// generation window there), so they can be compared term by term.
#[test]
fn family_flow_equals_explicit_translates_with_pairs() {
    let ring = sample_ring(3);
    let mut opts = tight(Closure::Pairs, 1.5);
    opts.closure_bound = 100.0;
    let (fs, es) = (system(&ring.array_text()), system(&ring.explicit_text()));
    let fam = run(&fs, opts.clone());
    let exp = run(&es, opts.clone());
    assert_eq!(fam.outcome, exp.outcome);
    let fv = vectors(&fs, &fam, &opts);
    let ev: HashMap<Vec<i64>, usize> = vectors(&es, &exp, &opts).into_iter().collect();
    assert!(fam.terms.len() > ring.terms.len(), "terms were generated");
    assert_eq!(fv.len(), ev.len(), "same number of flowing vectors");
    let mut compared = 0;
    for (v, c) in &fv {
        let e = ev.get(v).unwrap_or_else(|| {
            panic!(
                "{v:?} ({}) not among the explicit terms",
                fam.terms[*c].name
            )
        });
        let (f, e) = (&fam.terms[*c], &exp.terms[*e]);
        assert!((f.dimension0 - e.dimension0).abs() < 1e-12, "{}", f.name);
        assert!(
            (f.coupling - e.coupling).abs() < 1e-6 * f.coupling.max(1.0),
            "{} / {}: y = {} vs {}",
            f.name,
            e.name,
            f.coupling,
            e.coupling
        );
        assert!(
            (f.dimension - e.dimension).abs() < 1e-6,
            "{} / {}: Delta = {} vs {}",
            f.name,
            e.name,
            f.dimension,
            e.dimension
        );
        compared += 1;
    }
    assert_eq!(compared, ev.len());
}
