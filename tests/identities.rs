//! Identities of the Gaussian fixed point on random inputs (property tests
//! with a fixed seed, so every run draws the same cases).
//!
//! Inputs: symmetric integer K, N = 2..6, entries in -4..=4, det K != 0
//! (singular draws are rejected; most draws are indefinite, some definite);
//! V = A A^T + c I with A uniform in [-1, 1] and c in [0.1, 2] (positive
//! definite). Identities (derived in the physics reference, section 1, from
//! D = L^-T |S|^-1 L^-1 with V = L L^T, S = L^-1 K L^-T):
//! - D K D = K^-1;
//! - D positive definite;
//! - det D = 1/|det K|;
//! - Delta_l = (1/2) l^T D l >= |s_l| = |(1/2) l^T K^-1 l|;
//! - D unchanged by V -> cV (c > 0);
//! - a field basis change phi = W phi', W in GL(N, Z), with K -> W^T K W,
//!   V -> W^T V W, t -> W^T t, l -> W^T l (and particles m -> W^-1 m) leaves
//!   every Delta, spin, charge, the filling and det K unchanged.
//!
//! The basis-change check goes through model text (`Model::parse`,
//! `System`, `DimsReport`); the others call `FixedPoint::solve` directly.

// Matrix loops read best with indices.
#![allow(clippy::needless_range_loop)]

mod common;

use common::{toml_f64_matrix, toml_int_matrix, toml_int_vector};
use nalgebra::{DMatrix, SymmetricEigen};
use pinflow::core::fixed_point::FixedPoint;
use pinflow::core::system::System;
use pinflow::dims::DimsReport;
use pinflow::math::bareiss;
use pinflow::math::rational;
use pinflow::model::Model;
use proptest::prelude::*;
use proptest::test_runner::{Config, RngAlgorithm, RngSeed};

/// One random draw.
#[derive(Debug, Clone)]
struct Case {
    k: Vec<Vec<i64>>,
    a: Vec<Vec<f64>>,
    c: f64,
    l: Vec<i64>,
    m: Vec<i64>,
    t: Vec<i64>,
    scale: f64,
    /// Elementary integer operations (kind, i, j, factor) building W.
    ops: Vec<(u8, usize, usize, i64)>,
}

fn symmetric(n: usize, upper: &[i64]) -> Vec<Vec<i64>> {
    let mut k = vec![vec![0; n]; n];
    let mut it = upper.iter();
    for i in 0..n {
        for j in i..n {
            let x = *it.next().unwrap();
            k[i][j] = x;
            k[j][i] = x;
        }
    }
    k
}

fn case() -> impl Strategy<Value = Case> {
    (2usize..=6).prop_flat_map(|n| {
        let ints = |lo: i64, hi: i64, len: usize| prop::collection::vec(lo..=hi, len);
        (
            ints(-4, 4, n * (n + 1) / 2),
            prop::collection::vec(prop::collection::vec(-1.0f64..1.0, n), n),
            0.1f64..2.0,
            ints(-3, 3, n),
            ints(-2, 2, n),
            ints(-2, 2, n),
            0.05f64..20.0,
            prop::collection::vec((0u8..3, 0..n, 0..n, -1i64..=1), 0..=4),
        )
            .prop_map(move |(upper, a, c, l, m, t, scale, ops)| Case {
                k: symmetric(n, &upper),
                a,
                c,
                l,
                m,
                t,
                scale,
                ops,
            })
    })
}

fn config() -> Config {
    Config {
        cases: 64,
        rng_algorithm: RngAlgorithm::ChaCha,
        rng_seed: RngSeed::Fixed(20_240_611),
        failure_persistence: None,
        ..Config::default()
    }
}

fn kf(k: &[Vec<i64>]) -> DMatrix<f64> {
    let n = k.len();
    DMatrix::from_fn(n, n, |i, j| k[i][j] as f64)
}

fn v_of(case: &Case) -> DMatrix<f64> {
    let n = case.k.len();
    let a = DMatrix::from_fn(n, n, |i, j| case.a[i][j]);
    let v = &a * a.transpose() + DMatrix::identity(n, n) * case.c;
    (&v + v.transpose()) * 0.5
}

/// K^-1 in floats from the exact inverse.
fn k_inverse(k: &[Vec<i64>]) -> Option<(f64, DMatrix<f64>)> {
    let (det, inv) = bareiss::det_and_inverse(k)?;
    let n = k.len();
    let det = rational::to_f64(&rational::Rational::from_integer(det));
    Some((
        det,
        DMatrix::from_fn(n, n, |i, j| rational::to_f64(&inv[i][j])),
    ))
}

fn max_abs(m: &DMatrix<f64>) -> f64 {
    m.iter().fold(0.0f64, |a, x| a.max(x.abs()))
}

/// W = product of elementary integer operations: add `f` times column j to
/// column i, swap columns i and j, or negate column i. |det W| = 1.
fn unimodular(n: usize, ops: &[(u8, usize, usize, i64)]) -> Vec<Vec<i64>> {
    let mut w: Vec<Vec<i64>> = (0..n)
        .map(|i| (0..n).map(|j| (i == j) as i64).collect())
        .collect();
    for &(kind, i, j, f) in ops {
        match kind {
            0 if i != j => {
                for row in w.iter_mut() {
                    row[i] += f * row[j];
                }
            }
            1 => {
                for row in w.iter_mut() {
                    row.swap(i, j);
                }
            }
            _ => {
                for row in w.iter_mut() {
                    row[i] = -row[i];
                }
            }
        }
    }
    w
}

fn transpose_times(w: &[Vec<i64>], v: &[i64]) -> Vec<i64> {
    let n = w.len();
    (0..n)
        .map(|j| (0..n).map(|i| w[i][j] * v[i]).sum())
        .collect()
}

fn matrix_times(w: &[Vec<i64>], v: &[i64]) -> Vec<i64> {
    w.iter()
        .map(|row| row.iter().zip(v).map(|(a, b)| a * b).sum())
        .collect()
}

fn congruence(w: &[Vec<i64>], k: &[Vec<i64>]) -> Vec<Vec<i64>> {
    let n = w.len();
    (0..n)
        .map(|a| {
            (0..n)
                .map(|b| {
                    let mut s = 0;
                    for i in 0..n {
                        for j in 0..n {
                            s += w[i][a] * k[i][j] * w[j][b];
                        }
                    }
                    s
                })
                .collect()
        })
        .collect()
}

/// Model text with K, t, V given numerically and two terms.
fn model_text(k: &[Vec<i64>], t: &[i64], v: &DMatrix<f64>, l: &[i64], m: &[i64]) -> String {
    let n = k.len();
    let rows: Vec<Vec<f64>> = (0..n)
        .map(|i| (0..n).map(|j| v[(i, j)]).collect())
        .collect();
    let mut text = format!(
        "[fields]\nK = {}\ncharge = {}\nV = {}\n\n[[term]]\nname = \"l\"\nvector = {}\n",
        toml_int_matrix(k),
        toml_int_vector(t),
        toml_f64_matrix(&rows),
        toml_int_vector(l),
    );
    if m.iter().any(|x| *x != 0) {
        text.push_str(&format!(
            "\n[[term]]\nname = \"m\"\nparticles = {}\n",
            toml_int_vector(m)
        ));
    }
    text
}

fn report(text: &str) -> DimsReport {
    let model = Model::parse(text, "random.toml").unwrap_or_else(|e| panic!("{e}\n{text}"));
    let sys = System::new(model).unwrap_or_else(|e| panic!("{e}\n{text}"));
    let point = sys.model.params.defaults().to_vec();
    DimsReport::build(&sys, &point).unwrap_or_else(|e| panic!("{e}\n{text}"))
}

proptest! {
    #![proptest_config(config())]

    #[test]
    fn dkd_is_k_inverse_and_d_is_positive_definite(case in case()) {
        let Some((det_k, kinv)) = k_inverse(&case.k) else {
            return Err(TestCaseError::reject("singular K"));
        };
        let k = kf(&case.k);
        let v = v_of(&case);
        let fp = FixedPoint::solve(&k, &v).expect("V = A A^T + c I is positive definite");
        let d = &fp.d;
        let n = k.nrows();

        // D K D = K^-1, to rounding relative to the size of D K D.
        let dkd = d * &k * d;
        let scale = max_abs(d).powi(2) * max_abs(&k) * n as f64;
        let err = max_abs(&(&dkd - &kinv));
        prop_assert!(err <= 1e-11 * scale, "D K D - K^-1 = {err:e} (scale {scale:e})");

        // D symmetric positive definite.
        prop_assert!(max_abs(&(d - d.transpose())) <= 1e-14 * max_abs(d));
        let eig = SymmetricEigen::new(d.clone()).eigenvalues;
        let smallest = eig.iter().cloned().fold(f64::INFINITY, f64::min);
        prop_assert!(smallest > 0.0, "D has eigenvalue {smallest}");

        // det D = 1/|det K|.
        let det_d: f64 = eig.iter().product();
        prop_assert!(
            (det_d * det_k.abs() - 1.0).abs() <= 1e-9,
            "det D |det K| = {}", det_d * det_k.abs()
        );

        // Velocities: one per field, positive; chiralities give the signature of K.
        let positive_k = SymmetricEigen::new(k.clone())
            .eigenvalues
            .iter()
            .filter(|e| **e > 0.0)
            .count();
        prop_assert_eq!(fp.velocities.len(), n);
        prop_assert!(fp.velocities.iter().all(|x| *x > 0.0 && x.is_finite()));
        prop_assert_eq!(fp.chirality.iter().filter(|c| **c > 0).count(), positive_k);
    }

    #[test]
    fn dimension_bounds_spin_and_d_is_scale_free(case in case()) {
        let Some((det, inv)) = bareiss::det_and_inverse(&case.k) else {
            return Err(TestCaseError::reject("singular K"));
        };
        let _ = det;
        let k = kf(&case.k);
        let v = v_of(&case);
        let fp = FixedPoint::solve(&k, &v).unwrap();

        // Delta_l >= |s_l| with s_l exact.
        let s = rational::to_f64(&(rational::dot_int(&rational::solve_with(&inv, &case.l), &case.l)
            / rational::int(2)));
        let delta = fp.dimension(&case.l);
        prop_assert!(
            delta >= s.abs() - 1e-9 * delta.max(1.0),
            "Delta = {delta} < |s| = {}", s.abs()
        );

        // D unchanged by V -> c V.
        let scaled = FixedPoint::solve(&k, &(&v * case.scale)).unwrap();
        let err = max_abs(&(&scaled.d - &fp.d));
        prop_assert!(err <= 1e-9 * max_abs(&fp.d), "D(cV) - D(V) = {err:e}");
        // Velocities scale with c (derived: S -> S/c, v = 1/|eig S|).
        for (a, b) in scaled.velocities.iter().zip(&fp.velocities) {
            prop_assert!((a - case.scale * b).abs() <= 1e-9 * a.abs());
        }
    }

    #[test]
    fn basis_change_leaves_dimensions_spins_and_charges_unchanged(case in case()) {
        if bareiss::det_and_inverse(&case.k).is_none() {
            return Err(TestCaseError::reject("singular K"));
        }
        let n = case.k.len();
        let w = unimodular(n, &case.ops);
        let (det_w, w_inv) = bareiss::det_and_inverse(&w).expect("W is unimodular");
        prop_assert!(det_w == 1.into() || det_w == (-1).into());
        let w_inv = rational::to_integers(&w_inv.concat()).expect("W^-1 is integral");
        let w_inv: Vec<Vec<i64>> = w_inv.chunks(n).map(|r| r.to_vec()).collect();

        let v = v_of(&case);
        let wf = kf(&w);
        let v2 = wf.transpose() * &v * &wf;
        let v2 = (&v2 + v2.transpose()) * 0.5;
        let k2 = congruence(&w, &case.k);
        let t2 = transpose_times(&w, &case.t);
        let l2 = transpose_times(&w, &case.l);
        let m2 = matrix_times(&w_inv, &case.m);

        let l_zero = case.l.iter().all(|x| *x == 0);
        let (l, l2) = if l_zero { (vec![1; n], transpose_times(&w, &vec![1; n])) } else { (case.l.clone(), l2) };
        let a = report(&model_text(&case.k, &case.t, &v, &l, &case.m));
        let b = report(&model_text(&k2, &t2, &v2, &l2, &m2));

        prop_assert_eq!(&a.det_k, &b.det_k);
        prop_assert_eq!(&a.filling, &b.filling);
        prop_assert_eq!(a.signature, b.signature);
        prop_assert_eq!(a.terms.len(), b.terms.len());
        for (x, y) in a.terms.iter().zip(&b.terms) {
            prop_assert_eq!(&x.spin, &y.spin, "spin of {}", x.name);
            prop_assert_eq!(&x.charge, &y.charge, "charge of {}", x.name);
            prop_assert_eq!(x.local, y.local);
            prop_assert!(
                (x.dimension - y.dimension).abs() <= 1e-8 * x.dimension.max(1.0),
                "Delta of {}: {} vs {}", x.name, x.dimension, y.dimension
            );
        }
        prop_assert_eq!(&a.commutation, &b.commutation);
        // Velocities are basis independent too (derived: eig S = eig V^-1 K,
        // and V'^-1 K' = W^-1 (V^-1 K) W is similar to V^-1 K).
        for (x, y) in a.velocities.iter().zip(&b.velocities) {
            prop_assert!((x - y).abs() <= 1e-8 * x.max(1.0), "velocity {x} vs {y}");
        }
    }
}
