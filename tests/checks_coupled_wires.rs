//! Checks of `pinflow dims` on coupled wires at filling 1/m (m odd) against
//! published values, with the model written two ways: two wires written out
//! explicitly (`[fields]`) and a periodic array (`[array]`).
//!
//! Each wire: fields (phi_R, phi_L), K = diag(1, -1), t = (1, 1). The term
//! between wire j and j + 1, as particles per wire (R, L):
//!   wire j: (-(m+1)/2, (m-1)/2),   wire j+1: (-(m-1)/2, (m+1)/2).
//!
//! Derivation of the expected values (from D = L^-T |S|^-1 L^-1, physics
//! reference section 1): a wire with V = [[1, lam], [lam, 1]] and no
//! interwire V has, for l = (a, b) on that wire,
//! Delta = ((a + b)^2 K_L + (a - b)^2 / K_L)/4 with
//! K_L = sqrt((1 - lam)/(1 + lam)), and dimensions add over wires.
//! Here l = K m gives wire j: (-(m+1)/2, -(m-1)/2), so a + b = -m, a - b = -1;
//! wire j+1: (-(m-1)/2, -(m+1)/2), a + b = -m, a - b = +1. Hence
//! Delta = (m^2 K_L + 1/K_L)/2:
//! - free electrons (lam = 0, K_L = 1): Delta = (m^2 + 1)/2;
//! - lam = (m^2 - 1)/(m^2 + 1) gives K_L = 1/m and Delta = (m + m)/2 = m.
//!
//! Spin: s = (1/2) sum (a^2 - b^2) = (1/2)(m - m) = 0; charge: t.m =
//! (-1) + (+1) = 0.
//!
//! A last check uses the "Infinite arrays" values of the project's check
//! list on a 128-wire periodic ring (the dense code path).

mod common;

use common::{assert_close, report_at, sliding, term};

/// Particle content (R, L) of the filling-1/m term on wires j and j + 1.
fn link(m: i64) -> ([i64; 2], [i64; 2]) {
    ([-(m + 1) / 2, (m - 1) / 2], [-(m - 1) / 2, (m + 1) / 2])
}

/// Two wires written out explicitly; `lam` is the intrawire interaction.
fn two_wires(m: i64) -> String {
    let (a, b) = link(m);
    format!(
        r#"
name = "two wires, filling 1/{m}"

[params]
lam = 0.0

[fields]
K = [[1, 0, 0, 0], [0, -1, 0, 0], [0, 0, 1, 0], [0, 0, 0, -1]]
charge = [1, 1, 1, 1]
V = [["1", "lam", "0", "0"],
     ["lam", "1", "0", "0"],
     ["0", "0", "1", "lam"],
     ["0", "0", "lam", "1"]]

[[term]]
name = "tunnel"
particles = [{}, {}, {}, {}]
"#,
        a[0], a[1], b[0], b[1]
    )
}

/// A periodic array of `wires` wires with the same term on every link.
fn array(m: i64, wires: usize) -> String {
    let (a, b) = link(m);
    format!(
        r#"
name = "array, filling 1/{m}"

[params]
lam = 0.0

[array]
wires = {wires}
boundary = "periodic"
K = [[1, 0], [0, -1]]
charge = [1, 1]

[array.V]
0 = [["1", "lam"], ["lam", "1"]]

[[term]]
name = "tunnel"
particles = {{ 0 = [{}, {}], 1 = [{}, {}] }}
"#,
        a[0], a[1], b[0], b[1]
    )
}

/// Models for one m: the explicit pair of wires and periodic arrays.
fn models(m: i64) -> Vec<String> {
    vec![two_wires(m), array(m, 3), array(m, 8)]
}

#[test]
fn free_electrons_delta_is_m_squared_plus_one_over_two() {
    // Kane, Mukhopadhyay & Lubensky, PRL 88, 036401 (2002): with free
    // electrons (V = identity) the filling-1/m term has
    // Delta = (m^2 + 1)/2 = 1, 5, 13 for m = 1, 3, 5 (value from memory;
    // derived in the module docs).
    for (m, expected) in [(1, 1.0), (3, 5.0), (5, 13.0)] {
        for text in models(m) {
            let r = report_at(&text, &[("lam", 0.0)]);
            let t = term(&r, "tunnel");
            assert_close(&format!("m = {m}: Delta"), t.dimension, expected, 1e-12);
            assert_eq!(t.spin, "0", "m = {m}: spin");
            assert_eq!(t.charge, "0", "m = {m}: charge");
            assert!(t.null && t.local && t.charge_ok, "m = {m}");
        }
    }
}

#[test]
fn intrawire_interaction_brings_delta_down_to_m() {
    // Teo & Kane, PRB 89, 085101 (2014): intrawire lam = (m^2 - 1)/(m^2 + 1)
    // and no interwire interaction give Delta = m (from memory; derived in
    // the module docs: K_L = 1/m there).
    for m in [1i64, 3, 5] {
        let m2 = (m * m) as f64;
        let lam = (m2 - 1.0) / (m2 + 1.0);
        for text in models(m) {
            let r = report_at(&text, &[("lam", lam)]);
            let t = term(&r, "tunnel");
            assert_close(&format!("m = {m}: Delta"), t.dimension, m as f64, 1e-12);
            assert_eq!(t.spin, "0");
            assert_eq!(t.charge, "0");
            // Tree level: relevant iff Delta = m < 2, i.e. only for m = 1.
            assert_eq!(t.relevant, m == 1, "m = {m}: relevance at tree level");
        }
    }
}

#[test]
fn delta_as_a_function_of_the_intrawire_interaction() {
    // Derived (module docs): Delta = (m^2 K_L + 1/K_L)/2 for any lam, with
    // K_L = sqrt((1 - lam)/(1 + lam)) [Giamarchi (2004), ch. 2]; the minimum
    // over K_L is Delta = m at K_L = 1/m.
    for m in [1i64, 3, 5] {
        for lam in [-0.4f64, 0.1, 0.5, 0.9] {
            let kl = ((1.0 - lam) / (1.0 + lam)).sqrt();
            let expected = ((m * m) as f64 * kl + 1.0 / kl) / 2.0;
            for text in models(m) {
                let r = report_at(&text, &[("lam", lam)]);
                let d = term(&r, "tunnel").dimension;
                assert_close(&format!("m = {m}, lam = {lam}"), d, expected, 1e-12);
                assert!(d >= m as f64 - 1e-12, "Delta >= m");
            }
        }
    }
}

#[test]
fn neighbouring_link_terms_commute() {
    // Derived: the link terms on (j, j+1) and (j+1, j+2) share wire j+1,
    // where their particle vectors are (-(m-1)/2, (m+1)/2) and
    // (-(m+1)/2, (m-1)/2); their mutual phase is
    // n^T K n' = (m-1)(m+1)/4 - (m+1)(m-1)/4 = 0, so all translates commute
    // and can be pinned together [Haldane, PRL 74, 2090 (1995); Teo & Kane
    // (2014)].
    for m in [1i64, 3, 5] {
        let r = report_at(&array(m, 8), &[]);
        let t = term(&r, "tunnel");
        assert!(t.self_commuting, "m = {m}: link terms commute");
        assert_eq!(r.commutation[0][0], "0");
        assert!(r.commutes[0][0]);
    }
}

#[test]
fn array_totals_scale_with_the_number_of_wires() {
    // Derived: K = diag(1, -1) per wire, so det K = (-1)^W, signature
    // (W, W), filling t^T K^-1 t = W (1 - 1) = 0 [Wen, Adv. Phys. 44, 405
    // (1995) for the formulas].
    for w in [3usize, 4, 8] {
        let r = report_at(&array(3, w), &[]);
        assert_eq!(r.fields, 2 * w);
        assert_eq!(r.wires, Some(w));
        assert_eq!(r.signature, [w, w]);
        assert_eq!(r.det_k, if w % 2 == 0 { "1" } else { "-1" });
        assert_eq!(r.filling, "0");
    }
}

#[test]
fn sliding_luttinger_liquid_on_a_large_ring() {
    // Mukhopadhyay, Kane & Lubensky, PRB 64, 045120 (2001) (structure from
    // memory; formulas derived in the project's check values): with
    // K(q) = K0 / sqrt(1 + lam cos q),
    //   interwire CDW      Delta = 2 int dq/2pi K(q) (1 - cos q),
    //   pair hopping       Delta = 2 int dq/2pi (1 - cos q) / K(q),
    //   single-particle    Delta = (1/2) int dq/2pi (K + 1/K)(1 - cos q),
    //                      spin 1.
    // At K0 = 0.8, lam = 0.5: 1.91562, 2.13776, 1.01334 (the check values);
    // the integrals evaluated to 20 digits with mpmath's quad give
    // 1.9156168687105, 2.1377629775186, 1.0133449615573 (derived). A
    // periodic ring of W wires is the trapezoid rule on q = 2 pi k / W; the
    // integrand is analytic in a strip |Im q| < arccosh(2) = 1.317, so with
    // W = 128 the rule is exact to far below 1e-12.
    // A periodic ring of 128 spinless wires (common::sliding).
    let r = report_at(&sliding("128", 0.1), &[]);
    let cases = [
        ("cdw", 1.915_616_868_710_5, 1.91562),
        ("pair_hop", 2.137_762_977_518_6, 2.13776),
        ("hop", 1.013_344_961_557_3, 1.01334),
    ];
    for (name, precise, listed) in cases {
        let t = term(&r, name);
        assert_close(&format!("{name} (listed value)"), t.dimension, listed, 5e-6);
        assert_close(&format!("{name} (integral)"), t.dimension, precise, 1e-12);
    }
    assert_eq!(term(&r, "cdw").spin, "0");
    assert_eq!(term(&r, "pair_hop").spin, "0");
    assert_eq!(term(&r, "hop").spin, "1");
    // Pair hopping across wires conserves charge: (+2) + (-2).
    assert_eq!(term(&r, "pair_hop").charge, "0");
}
