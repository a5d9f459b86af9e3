//! Checks of `pinflow dims` on a single wire of spinless electrons against
//! published values (see each check for its source).
//!
//! Model: fields (phi_R, phi_L) with K = diag(1, -1), t = (1, 1) and
//! V = [[1, lam], [lam, 1]] (g2 = 2 pi v_F lam, g4 = 0 in g-ology). Every
//! model is written as TOML text and goes through `Model::parse`,
//! `System::new` and `DimsReport::build`.
//!
//! A formula used below to derive expected values (derived from
//! D = L^-T |S|^-1 L^-1 of docs/physics.md section 1): for this wire
//! D = (1/2) [[K_L + 1/K_L, K_L - 1/K_L], [K_L - 1/K_L, K_L + 1/K_L]], so a
//! vector l = (a, b) has Delta = ((a + b)^2 K_L + (a - b)^2 / K_L) / 4.

mod common;

use common::{assert_close, report_at, term};

/// The single wire with the four operators of the Giamarchi table and the
/// doubled half-charge operators of the Fradkin table.
const WIRE: &str = r#"
name = "single wire"

[params]
lambda = 0.3

[fields]
K = [[1, 0], [0, -1]]
charge = [1, 1]
V = [["1", "lambda"], ["lambda", "1"]]

[[term]]
name = "backscatter"
particles = [1, -1]

[[term]]
name = "pair"
particles = [1, 1]
allowed_charge = 2

[[term]]
name = "umklapp"
particles = [2, -2]

[[term]]
name = "electron"
particles = [1, 0]
allowed_charge = 1

# exp(2 i theta): twice the dual exponential exp(i theta) of half charge.
[[term]]
name = "dual_doubled"
vector = [1, -1]
allowed_charge = 2

# 2 x (2 phi + theta): twice the product of the density and exp(i theta).
[[term]]
name = "product_doubled"
vector = [3, 1]
allowed_charge = 2
"#;

/// Luttinger parameter of the wire [Giamarchi, "Quantum Physics in One
/// Dimension" (2004), ch. 2]: K_L = sqrt((1 - lam)/(1 + lam)).
fn luttinger(lam: f64) -> f64 {
    ((1.0 - lam) / (1.0 + lam)).sqrt()
}

/// Inverse of `luttinger`: lam = (1 - K_L^2)/(1 + K_L^2).
fn lambda_of(kl: f64) -> f64 {
    (1.0 - kl * kl) / (1.0 + kl * kl)
}

const LAMBDAS: [f64; 7] = [-0.6, -0.3, 0.0, 0.2, 0.45, 0.6, 0.85];

#[test]
fn luttinger_parameter_and_velocity() {
    // Giamarchi (2004), ch. 2: K_L = sqrt((1 - lam)/(1 + lam)) and
    // u = sqrt(1 - lam^2) for g2 = 2 pi v_F lam, g4 = 0.
    for lam in LAMBDAS {
        let r = report_at(WIRE, &[("lambda", lam)]);
        let kl = luttinger(lam);
        assert_close(
            "backscatter Delta = K_L",
            term(&r, "backscatter").dimension,
            kl,
            1e-12,
        );
        let u = (1.0 - lam * lam).sqrt();
        assert_eq!(r.velocities.len(), 2);
        for v in &r.velocities {
            assert_close("velocity u = sqrt(1 - lam^2)", *v, u, 1e-12);
        }
        // One right mover and one left mover (K = diag(1, -1)).
        let mut chi = r.chiralities.clone();
        chi.sort();
        assert_eq!(chi, vec![-1, 1]);
        assert_eq!(r.signature, [1, 1]);
    }
}

#[test]
fn backscattering_pair_umklapp_and_electron() {
    // Giamarchi (2004), ch. 2: 2k_F backscattering m = (1, -1) has
    // Delta = K_L, spin 0, charge 0; the pair operator m = (1, 1) has
    // Delta = 1/K_L, spin 0, charge 2; umklapp m = (2, -2) has
    // Delta = 4 K_L; the single electron m = (1, 0) has
    // Delta = (K_L + 1/K_L)/4 and spin 1/2.
    for lam in LAMBDAS {
        let r = report_at(WIRE, &[("lambda", lam)]);
        let kl = luttinger(lam);

        let b = term(&r, "backscatter");
        assert_close("backscatter Delta", b.dimension, kl, 1e-12);
        assert_eq!(b.spin, "0");
        assert_eq!(b.charge, "0");
        assert!(b.null && b.local && b.charge_ok);
        assert_eq!(b.vector, vec![1, 1], "l = K m for m = (1, -1)");

        let p = term(&r, "pair");
        assert_close("pair Delta", p.dimension, 1.0 / kl, 1e-12);
        assert_eq!(p.spin, "0");
        assert_eq!(p.charge, "2");
        assert!(p.charge_ok, "pairing declared with allowed_charge = 2");

        let u = term(&r, "umklapp");
        assert_close("umklapp Delta", u.dimension, 4.0 * kl, 1e-12);
        assert_eq!(u.spin, "0");
        assert_eq!(u.charge, "0");

        let e = term(&r, "electron");
        assert_close("electron Delta", e.dimension, (kl + 1.0 / kl) / 4.0, 1e-12);
        assert_eq!(e.spin, "1/2");
        assert_eq!(e.charge, "1");
        assert!(!e.null, "a fermion has spin 1/2, it cannot pin on its own");
        // Chiral weights: h - hbar = s and h + hbar = Delta (definition,
        // docs/physics.md section 1).
        assert_close("h - hbar = s", e.h - e.hbar, 0.5, 1e-12);
        assert_close("h + hbar = Delta", e.h + e.hbar, e.dimension, 1e-12);
    }
}

#[test]
fn free_right_moving_electron_has_weights_one_half_and_zero() {
    // Free chiral fermion psi_R: (h, hbar) = (1/2, 0) (standard CFT value,
    // from memory). Derived too: at K_L = 1, Delta = (K_L + 1/K_L)/4 = 1/2
    // and s = 1/2 [Giamarchi (2004)], so h = (Delta + s)/2 = 1/2, hbar = 0.
    let r = report_at(WIRE, &[("lambda", 0.0)]);
    let e = term(&r, "electron");
    assert_close("h", e.h, 0.5, 1e-12);
    assert_close("hbar", e.hbar, 0.0, 1e-12);
}

#[test]
fn umklapp_is_marginal_at_luttinger_parameter_one_half() {
    // Giamarchi (2004), ch. 2: umklapp Delta = 4 K_L is marginal (Delta = 2)
    // at K_L = 1/2, i.e. lam = (1 - 1/4)/(1 + 1/4) = 3/5 (derived).
    let r = report_at(WIRE, &[("lambda", 0.6)]);
    let u = term(&r, "umklapp");
    assert_close("umklapp Delta at K_L = 1/2", u.dimension, 2.0, 1e-12);
    assert_close("RG eigenvalue 2 - Delta", u.rg_eigenvalue, 0.0, 1e-12);
    // Slightly stronger repulsion: K_L < 1/2, umklapp relevant; slightly
    // weaker: irrelevant.
    let r = report_at(WIRE, &[("lambda", 0.61)]);
    assert!(term(&r, "umklapp").relevant, "K_L < 1/2: relevant");
    let r = report_at(WIRE, &[("lambda", 0.59)]);
    assert!(!term(&r, "umklapp").relevant, "K_L > 1/2: irrelevant");
}

#[test]
fn xxz_operators_at_the_xy_and_isotropic_points() {
    // Fradkin, "Field Theories of Condensed Matter Physics", 2nd ed. (2013),
    // table 5.1: XXZ chain operators at the XY point K_L = 1 and at the
    // isotropic point K_L = 1/2 have dimensions
    //   density cos(2 phi)                     1    and 1/2,
    //   dual exponential of half charge e^{i theta}  1/4  and 1/2,
    //   their product e^{i(2 phi + theta)}      5/4  and 1,
    //   the fermion                            1/2  and 5/8.
    // The density is our backscatter l = (1, 1) and the fermion our electron.
    // The half-charge operators are not in the lattice Z^2 of K = diag(1, -1):
    // their doubles are, l = (1, -1) (= the pair operator, e^{2 i theta}) and
    // l = (3, 1) (= 2 (2 phi + theta)), and Delta is quadratic in l, so
    // Delta(l/2) = Delta(l)/4 (derived).
    let cases = [(1.0, [1.0, 0.25, 1.25, 0.5]), (0.5, [0.5, 0.5, 1.0, 0.625])];
    for (kl, [density, dual, product, fermion]) in cases {
        let r = report_at(WIRE, &[("lambda", lambda_of(kl))]);
        assert_close("density", term(&r, "backscatter").dimension, density, 1e-12);
        let d = term(&r, "dual_doubled").dimension / 4.0;
        assert_close("dual exponential of half charge", d, dual, 1e-12);
        let p = term(&r, "product_doubled").dimension / 4.0;
        assert_close("product", p, product, 1e-12);
        assert_close("fermion", term(&r, "electron").dimension, fermion, 1e-12);
    }
}

/// The XXZ chain written with the Luther-Peschel relation in the model file:
/// K_L(Jz/J) = pi / (2 (pi - arccos(Jz/J))) and lam = (1 - K_L^2)/(1 + K_L^2)
/// (inverting K_L = sqrt((1 - lam)/(1 + lam))).
const XXZ: &str = r#"
name = "XXZ chain via Luther-Peschel"

[params]
Jz = 0.0

[fields]
K = [[1, 0], [0, -1]]
charge = [1, 1]
V = [["1", "(1 - (pi/(2*(pi - acos(Jz))))^2)/(1 + (pi/(2*(pi - acos(Jz))))^2)"],
     ["(1 - (pi/(2*(pi - acos(Jz))))^2)/(1 + (pi/(2*(pi - acos(Jz))))^2)", "1"]]

[[term]]
name = "umklapp"
particles = [2, -2]

[[term]]
name = "density"
particles = [1, -1]
"#;

#[test]
fn xxz_chain_luther_peschel_umklapp_marginal_at_isotropic_point() {
    // Luther & Peschel, PRB 12, 3908 (1975):
    // K_L(Jz/J) = pi / (2 (pi - arccos(Jz/J))), so K_L = 1 at Jz = 0 and
    // K_L = 1/2 at the isotropic point Jz = J, where umklapp (Delta = 4 K_L,
    // Giamarchi (2004) ch. 2) is exactly marginal.
    let r = report_at(XXZ, &[("Jz", 1.0)]);
    assert_close(
        "umklapp at Jz = J",
        term(&r, "umklapp").dimension,
        2.0,
        1e-12,
    );
    assert_close(
        "density at Jz = J",
        term(&r, "density").dimension,
        0.5,
        1e-12,
    );

    let r = report_at(XXZ, &[("Jz", 0.0)]);
    assert_close(
        "umklapp at Jz = 0",
        term(&r, "umklapp").dimension,
        4.0,
        1e-12,
    );
    assert_close(
        "density at Jz = 0",
        term(&r, "density").dimension,
        1.0,
        1e-12,
    );

    // Derived from the same relation: arccos(1/2) = pi/3 gives K_L = 3/4 and
    // umklapp Delta = 3; arccos(-1/2) = 2 pi/3 gives K_L = 3/2 and Delta = 6.
    let r = report_at(XXZ, &[("Jz", 0.5)]);
    assert_close(
        "umklapp at Jz = J/2",
        term(&r, "umklapp").dimension,
        3.0,
        1e-12,
    );
    let r = report_at(XXZ, &[("Jz", -0.5)]);
    assert_close(
        "umklapp at Jz = -J/2",
        term(&r, "umklapp").dimension,
        6.0,
        1e-12,
    );

    // Between the XY and isotropic points K_L > 1/2, so umklapp is
    // irrelevant there (derived from the same two relations).
    for jz in [0.0, 0.3, 0.6, 0.9, 0.99] {
        let r = report_at(XXZ, &[("Jz", jz)]);
        let u = term(&r, "umklapp");
        assert!(
            !u.relevant,
            "umklapp irrelevant at Jz = {jz} (Delta = {})",
            u.dimension
        );
        let kl = std::f64::consts::PI / (2.0 * (std::f64::consts::PI - jz.acos()));
        assert_close("umklapp Delta = 4 K_L(Jz)", u.dimension, 4.0 * kl, 1e-12);
    }
}
