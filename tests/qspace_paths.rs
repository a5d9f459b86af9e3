//! The two code paths of a periodic array agree: the dense N x N algebra
//! (N = W n_c fields) and the q-space algebra on the W points
//! q_k = 2 pi k / W (block-circulant matrices are block diagonal in q;
//! docs/physics.md section 5: "the two code paths must agree to
//! rounding"). No external value is involved: the inputs are seeded random
//! arrays (like `identities.rs`), so this checks one implementation against
//! the other.
//!
//! Covered: three cells (a spinless wire; a two-channel wire of 4 fields; a
//! cell with a non-diagonal K), interactions of range 1 and 2, even and odd
//! W, terms of range 0 to 2: every term's dimension, the mode velocities
//! and chiralities, the real-space D, and a V that is not positive
//! definite.

mod common;

use common::{system, toml_f64_matrix, toml_int_matrix, toml_int_vector};
use pinflow::dims::{Algebra, DimsReport};
use pinflow::error::Error;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// A periodic array of `wires` copies of the cell (K, t) with random V
/// blocks of the given range and a few random terms of range 0..=2 (those
/// that fit). Block 0 dominates so that V is positive definite.
fn random_array(k: &[Vec<i64>], t: &[i64], range: usize, wires: usize, seed: u64) -> String {
    let n = k.len();
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    // Symmetric, diagonally dominant: random lower triangle mirrored up.
    let mut lower = vec![vec![0.0; n]; n];
    for (a, row) in lower.iter_mut().enumerate() {
        row[a] = 3.0 + rng.gen_range(0.0..1.0);
        for x in row.iter_mut().take(a) {
            *x = rng.gen_range(-0.3..0.3);
        }
    }
    let block0: Vec<Vec<f64>> = (0..n)
        .map(|a| (0..n).map(|b| lower[a.max(b)][a.min(b)]).collect())
        .collect();
    let mut text = format!(
        "name = \"random ring\"\n[array]\nwires = {wires}\nboundary = \"periodic\"\nK = {}\ncharge = {}\n[array.V]\n0 = {}\n",
        toml_int_matrix(k),
        toml_int_vector(t),
        toml_f64_matrix(&block0)
    );
    for sep in 1..=range {
        let b: Vec<Vec<f64>> = (0..n)
            .map(|_| {
                (0..n)
                    .map(|_| rng.gen_range(-0.15..0.15) / sep as f64)
                    .collect()
            })
            .collect();
        text.push_str(&format!("{sep} = {}\n", toml_f64_matrix(&b)));
    }
    for (i, term_range) in [0usize, 1, 1, 2].iter().enumerate() {
        if *term_range >= wires {
            continue;
        }
        let parts: Vec<String> = (0..=*term_range)
            .map(|off| {
                let mut v: Vec<i64> = (0..n).map(|_| rng.gen_range(-2..=2)).collect();
                if v.iter().all(|x| *x == 0) {
                    v[0] = 1;
                }
                format!("{off} = {}", toml_int_vector(&v))
            })
            .collect();
        text.push_str(&format!(
            "\n[[term]]\nname = \"t{i}\"\nparticles = {{ {} }}\n",
            parts.join(", ")
        ));
    }
    text
}

/// (label, cell K, cell charge).
type Cell = (&'static str, Vec<Vec<i64>>, Vec<i64>);

fn cells() -> Vec<Cell> {
    vec![
        ("spinless wire", vec![vec![1, 0], vec![0, -1]], vec![1, 1]),
        (
            "two-channel wire",
            vec![
                vec![1, 0, 0, 0],
                vec![0, -1, 0, 0],
                vec![0, 0, 1, 0],
                vec![0, 0, 0, -1],
            ],
            vec![1, 1, 1, 1],
        ),
        (
            "non-diagonal cell",
            vec![vec![2, 1], vec![1, -1]],
            vec![1, 1],
        ),
    ]
}

#[track_caller]
fn close(what: &str, a: f64, b: f64) {
    let tol = 1e-11 * (1.0 + a.abs().max(b.abs()));
    assert!((a - b).abs() <= tol, "{what}: dense {a}, q-space {b}");
}

#[test]
fn dimensions_and_velocities_agree_on_random_rings() {
    let mut seed = 1;
    for (label, k, t) in cells() {
        for range in [1usize, 2] {
            for wires in [2 * range + 1, 2 * range + 2, 8] {
                seed += 1;
                let text = random_array(&k, &t, range, wires, seed);
                let sys = system(&text);
                let point = sys.model.params.defaults().to_vec();
                let dense = DimsReport::build_with(&sys, &point, Algebra::Dense).unwrap();
                let q = DimsReport::build_with(&sys, &point, Algebra::QSpace).unwrap();
                let auto = DimsReport::build(&sys, &point).unwrap();
                let case = format!("{label}, range {range}, {wires} wires");
                assert!(!dense.terms.is_empty(), "{case}: no terms");
                for (a, b) in dense.terms.iter().zip(&q.terms) {
                    close(
                        &format!("{case}: term {}", a.name),
                        a.dimension,
                        b.dimension,
                    );
                    assert_eq!(a.spin, b.spin);
                    assert_eq!(a.vector, b.vector);
                }
                assert_eq!(dense.velocities.len(), wires * k.len(), "{case}");
                assert_eq!(dense.velocities.len(), q.velocities.len(), "{case}");
                for (a, b) in dense.velocities.iter().zip(&q.velocities) {
                    close(&format!("{case}: velocity"), *a, *b);
                }
                assert_eq!(dense.chiralities, q.chiralities, "{case}");
                // The default for periodic arrays is the q-space path.
                for (a, b) in auto.terms.iter().zip(&q.terms) {
                    assert_eq!(a.dimension, b.dimension, "{case}");
                }
                assert!(q.quadrature.is_none() && !q.infinite);
            }
        }
    }
}

#[test]
fn real_space_d_from_q_space_is_the_dense_d() {
    // D_{j,j'} = (1/W) sum_q e^{iq(j-j')} D(q) on the W points is the dense
    // D of the ring, all of it.
    let mut seed = 100;
    for (label, k, t) in cells() {
        for (range, wires) in [(1usize, 4usize), (1, 7), (2, 6)] {
            seed += 1;
            let sys = system(&random_array(&k, &t, range, wires, seed));
            let point = sys.model.params.defaults().to_vec();
            let dense = sys.fixed_point(&point).unwrap().d;
            let (window, quad) = sys.real_space_window(&point, wires).unwrap();
            assert!(quad.is_none());
            let diff = (&dense - &window).amax();
            assert!(
                diff < 1e-12,
                "{label}, range {range}, {wires} wires: max difference {diff:e}"
            );
        }
    }
}

#[test]
fn a_ring_that_is_not_positive_definite_is_unphysical_on_both_paths() {
    // Intrawire lam = 0.3, interwire block w on both densities: V(q) has the
    // eigenvalue 1 + lam + 4 w cos q (derived for V^(1) = w [[1,1],[1,1]]),
    // negative at q = pi for w = 0.4 on a ring of even W.
    let text = r#"
[array]
wires = 6
K = [[1, 0], [0, -1]]
charge = [1, 1]
[array.V]
0 = [[1, 0.3], [0.3, 1]]
1 = [[0.4, 0.4], [0.4, 0.4]]
[[term]]
name = "cdw"
particles = { 0 = [1, -1], 1 = [-1, 1] }
"#;
    let sys = system(text);
    let point: Vec<f64> = Vec::new();
    let smallest = |algebra| match DimsReport::build_with(&sys, &point, algebra) {
        Err(Error::Unphysical(u)) => u.smallest_eigenvalue,
        other => panic!("expected an unphysical point, got {other:?}"),
    };
    let (dense, q) = (smallest(Algebra::Dense), smallest(Algebra::QSpace));
    // 1 + 0.3 - 1.6 = -0.3 (derived above).
    assert!((dense + 0.3).abs() < 1e-12, "{dense}");
    assert!((q + 0.3).abs() < 1e-12, "{q}");
}
