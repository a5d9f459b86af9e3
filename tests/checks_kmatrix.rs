//! Checks of the exact K-matrix data reported by `pinflow dims` against the
//! table of Wen, Adv. Phys. 44, 405 (1995): filling nu = t^T K^-1 t and
//! |det K| (the torus degeneracy of an abelian state), and the charge and
//! spin of quasiparticles, Q = t^T K^-1 l and s = (1/2) l^T K^-1 l.
//! Fradkin, "Field Theories of Condensed Matter Physics", 2nd ed. (2013),
//! ch. 14 tabulates the same states. V is the identity: none of these
//! numbers depends on V.

mod common;

use common::{report, term, toml_int_matrix, toml_int_vector};

/// A model with the given K and t, V = identity, and the given terms.
fn kmodel(k: &[Vec<i64>], t: &[i64], terms: &str) -> String {
    let n = k.len();
    let v: Vec<Vec<i64>> = (0..n)
        .map(|i| (0..n).map(|j| (i == j) as i64).collect())
        .collect();
    format!(
        "name = \"K-matrix state\"\n\n[fields]\nK = {}\ncharge = {}\nV = {}\n\n{terms}",
        toml_int_matrix(k),
        toml_int_vector(t),
        toml_int_matrix(&v),
    )
}

#[test]
fn filling_and_determinant_of_the_table_states() {
    // Wen, Adv. Phys. 44, 405 (1995): (state, K, t, nu, |det K|).
    // For (mmn) states nu = 2/(m + n) (same source).
    type Row = (
        &'static str,
        Vec<Vec<i64>>,
        Vec<i64>,
        &'static str,
        &'static str,
    );
    let table: [Row; 4] = [
        ("Laughlin 1/3", vec![vec![3]], vec![1], "1/3", "3"),
        (
            "Halperin (331)",
            vec![vec![3, 1], vec![1, 3]],
            vec![1, 1],
            "1/2",
            "8",
        ),
        (
            "Halperin (330)",
            vec![vec![3, 0], vec![0, 3]],
            vec![1, 1],
            "2/3",
            "9",
        ),
        (
            "Halperin (332)",
            vec![vec![3, 2], vec![2, 3]],
            vec![1, 1],
            "2/5",
            "5",
        ),
    ];
    for (state, k, t, nu, det) in table {
        let r = report(&kmodel(&k, &t, ""));
        assert_eq!(r.filling, nu, "{state}: filling");
        let abs_det = r.det_k.trim_start_matches('-');
        assert_eq!(abs_det, det, "{state}: |det K|");
        // All four states are chiral: K positive definite (derived: the
        // diagonal entries 3 exceed the off-diagonal ones).
        assert_eq!(r.signature, [k.len(), 0], "{state}: signature");
    }
}

#[test]
fn halperin_331_quasiparticle_charge_and_spin() {
    // Wen (1995) formulas with K = [[3, 1], [1, 3]], K^-1 = (1/8)[[3, -1],
    // [-1, 3]]: the quasiparticle l = (1, 0) has Q = t^T K^-1 l =
    // (3 - 1)/8 = 1/4 and s = (1/2)(3/8) = 3/16, i.e. exchange angle
    // 2 pi s = 3 pi/8 (derived, as listed in the project's check values).
    // K^-1 l = (3/8, -1/8) is not integral: the quasiparticle is not local.
    let terms = r#"
[[term]]
name = "quasiparticle"
vector = [1, 0]
allowed_charge = "1/4"

[[term]]
name = "electron"
particles = [1, 0]
allowed_charge = 1
"#;
    let r = report(&kmodel(&[vec![3, 1], vec![1, 3]], &[1, 1], terms));
    let q = term(&r, "quasiparticle");
    assert_eq!(q.charge, "1/4");
    assert_eq!(q.spin, "3/16");
    assert!(!q.local, "K^-1 l = (3/8, -1/8) is not integral");
    assert_eq!(q.particles, None, "no integral particle content");
    assert_eq!(q.particles_exact, vec!["3/8", "-1/8"]);
    assert!(!q.null);
    assert!(
        r.notes
            .iter()
            .any(|n| n.contains("quasiparticle") && n.contains("not local")),
        "a note says the quasiparticle is not local: {:?}",
        r.notes
    );
    // The electron m = (1, 0), l = K m = (3, 1): charge 1 and spin
    // (1/2) m^T K m = 3/2, a fermion (derived from the same formulas).
    let e = term(&r, "electron");
    assert_eq!(e.vector, vec![3, 1]);
    assert_eq!(e.charge, "1");
    assert_eq!(e.spin, "3/2");
    assert!(e.local);
    // Mutual phase of quasiparticle and electron: l_q^T K^-1 l_e = m_e.l_q
    // = 1 (an integer: the electron sees the quasiparticle as local, derived).
    assert_eq!(r.commutation[0][1], "1");
}

#[test]
fn laughlin_quasiparticle_has_charge_one_third_and_spin_one_sixth() {
    // Wen (1995) formulas with K = (3): l = 1 has Q = 1/3 and
    // s = 1/6 (exchange angle pi/3, the Laughlin quasihole statistics; from
    // memory, and derived: s = (1/2)(1/3)). The electron m = 1 (l = 3) has
    // charge 1 and spin 3/2 (a fermion, derived).
    let terms = r#"
[[term]]
name = "quasihole"
vector = [1]
allowed_charge = "1/3"

[[term]]
name = "electron"
particles = [1]
allowed_charge = 1
"#;
    let r = report(&kmodel(&[vec![3]], &[1], terms));
    let q = term(&r, "quasihole");
    assert_eq!(q.charge, "1/3");
    assert_eq!(q.spin, "1/6");
    assert!(!q.local);
    let e = term(&r, "electron");
    assert_eq!(e.charge, "1");
    assert_eq!(e.spin, "3/2");
    assert!(e.local);
    // A chiral boson: Delta = s for every operator (derived: for K > 0,
    // D = K^-1 whatever V, so Delta = (1/2) l^2 / 3 = s).
    assert!((q.dimension - 1.0 / 6.0).abs() < 1e-12);
    assert!((e.dimension - 1.5).abs() < 1e-12);
}
