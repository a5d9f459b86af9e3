//! Checks of the residual theory (sources beside each test).

use nalgebra::DMatrix;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

use super::*;

fn spinful_k() -> Vec<Vec<i64>> {
    // Fields (R up, L up, R down, L down).
    let d = [1, -1, 1, -1];
    (0..4)
        .map(|i| (0..4).map(|j| if i == j { d[i] } else { 0 }).collect())
        .collect()
}

fn kf(k: &[Vec<i64>]) -> DMatrix<f64> {
    DMatrix::from_fn(k.len(), k.len(), |i, j| k[i][j] as f64)
}

/// V = [[A, B], [B, A]] over (up, down) blocks of (R, L): invariant under
/// exchanging up and down, so it does not mix charge (A + B) and spin
/// (A - B).
fn spin_symmetric_v(a: [[f64; 2]; 2], b: [[f64; 2]; 2]) -> DMatrix<f64> {
    DMatrix::from_fn(4, 4, |i, j| {
        let (si, sj) = (i / 2, j / 2);
        let (ci, cj) = (i % 2, j % 2);
        if si == sj {
            a[ci][cj]
        } else {
            b[ci][cj]
        }
    })
}

/// l = K m for the spinful K.
fn l_of(m: [i64; 4]) -> Vec<i64> {
    vec![m[0], -m[1], m[2], -m[3]]
}

fn half_form(d: &DMatrix<f64>, l: &[i64]) -> f64 {
    dimension(d, l)
}

/// Luther-Emery [Luther & Emery, PRL 33, 589 (1974); Giamarchi, "Quantum
/// Physics in One Dimension" (2004), ch. 7; docs/physics.md section 8,
/// shared checks "Pinned phases"]: with the spin backscattering m = (1, -1,
/// -1, 1) pinned, the 2k_F CDW has Delta = K_rho/2 and singlet pairing
/// 1/(2 K_rho), with K_rho = Delta(4k_F CDW)/2; before pinning the CDW is
/// (K_rho + K_sigma)/2 with K_sigma = Delta(pinned term)/2. The three V are
/// our own (invented couplings; g2-type R-L couplings within and between
/// spins, plus different up-down g4 terms); both forms must agree.
#[test]
fn luther_emery_in_both_forms() {
    let k = spinful_k();
    let pin = l_of([1, -1, -1, 1]);
    let cdw2 = l_of([1, -1, 0, 0]);
    let pair = l_of([1, 0, 0, 1]);
    let cdw4 = l_of([1, -1, 1, -1]);
    let vs = [
        spin_symmetric_v([[1.0, 0.3], [0.3, 1.0]], [[0.2, 0.1], [0.1, 0.2]]),
        spin_symmetric_v([[1.2, 0.5], [0.5, 0.9]], [[0.1, -0.2], [-0.2, 0.3]]),
        spin_symmetric_v([[0.8, -0.25], [-0.25, 0.8]], [[-0.3, 0.4], [0.4, -0.1]]),
    ];
    let split = Split::new(&k, std::slice::from_ref(&pin)).unwrap();
    assert_eq!(split.rank, 1);
    assert_eq!(split.b.ncols(), 2);
    for v in &vs {
        let fp = FixedPoint::solve(&kf(&k), v).unwrap();
        let k_rho = half_form(&fp.d, &cdw4) / 2.0;
        let k_sigma = half_form(&fp.d, &pin) / 2.0;
        // Before pinning.
        assert!((half_form(&fp.d, &cdw2) - (k_rho + k_sigma) / 2.0).abs() < 1e-12);
        assert!((half_form(&fp.d, &pair) - (1.0 / k_rho + k_sigma) / 2.0).abs() < 1e-12);
        assert!(
            (k_rho - 1.0).abs() > 0.05,
            "K_rho = {k_rho} should differ from 1"
        );
        let exact_d = exact(&kf(&k), v, &split).unwrap();
        let p = columns(4, &[&pin]);
        let reference_d = reference(&fp.d, &p);
        for d_p in [&exact_d, &reference_d] {
            assert!((half_form(d_p, &cdw2) - k_rho / 2.0).abs() < 1e-12);
            assert!((half_form(d_p, &pair) - 1.0 / (2.0 * k_rho)).abs() < 1e-12);
            assert!((half_form(d_p, &cdw4) - 2.0 * k_rho).abs() < 1e-12);
            assert!(half_form(d_p, &pin).abs() < 1e-12);
        }
    }
    // Commutation: 2k_F CDW, pairing and 4k_F CDW commute with the pin;
    // the spin-flip (1, 0, -1, 0)... the up-spin forward phase m = (1, 0, 0, 0) does not.
    let (_, inv) = crate::math::bareiss::det_and_inverse(&k).unwrap();
    for l in [&cdw2, &pair, &cdw4] {
        assert!(commutes(&inv, l, std::slice::from_ref(&pin)));
    }
    assert!(!commutes(
        &inv,
        &l_of([1, 0, 0, 0]),
        std::slice::from_ref(&pin)
    ));
}

fn random_v(rng: &mut ChaCha8Rng, n: usize) -> DMatrix<f64> {
    let a = DMatrix::from_fn(n, n, |_, _| rng.gen_range(-0.6..0.6));
    &a * a.transpose() + DMatrix::identity(n, n) * 0.5
}

/// A six-field model (three spinful-like pairs, K = diag(1,-1,1,-1,1,-1))
/// with two commuting null pins; the operators listed commute with both.
/// Integer vectors (rows of a matrix, or a list of lattice vectors).
type Vectors = Vec<Vec<i64>>;

fn six_field() -> (Vectors, Vectors, Vectors) {
    let k: Vec<Vec<i64>> = (0..6)
        .map(|i| {
            (0..6)
                .map(|j| {
                    if i == j {
                        if i % 2 == 0 {
                            1
                        } else {
                            -1
                        }
                    } else {
                        0
                    }
                })
                .collect()
        })
        .collect();
    // l = K m; pins m = (1,-1,-1,1,0,0) and (0,0,1,-1,-1,1): null, commuting.
    let l = |m: [i64; 6]| -> Vec<i64> { (0..6).map(|i| m[i] * k[i][i]).collect() };
    let pins = vec![l([1, -1, -1, 1, 0, 0]), l([0, 0, 1, -1, -1, 1])];
    // m.l_p = 0 for both pins (checked below with `commutes`).
    let ops = vec![
        l([1, -1, 0, 0, 0, 0]),
        l([1, 0, 0, 1, 1, 0]),
        l([1, -1, 1, -1, 1, -1]),
        l([2, 0, 1, 1, 0, 2]),
    ];
    (k, pins, ops)
}

/// Derived check (docs/physics.md section 8): when V = D^-1 (every
/// velocity equal) the exact and reference-velocity forms coincide; at a
/// random V they differ (both code paths exist and are distinct).
#[test]
fn exact_equals_reference_when_v_is_d_inverse() {
    let (k, pins, ops) = six_field();
    let (_, inv) = crate::math::bareiss::det_and_inverse(&k).unwrap();
    for l in &ops {
        assert!(commutes(&inv, l, &pins));
    }
    let split = Split::new(&k, &pins).unwrap();
    assert_eq!((split.rank, split.b.ncols()), (2, 2));
    let cols: Vec<&[i64]> = pins.iter().map(|p| p.as_slice()).collect();
    let p = columns(6, &cols);
    let mut rng = ChaCha8Rng::seed_from_u64(14);
    let mut largest_difference: f64 = 0.0;
    for _ in 0..5 {
        let v = random_v(&mut rng, 6);
        let d = FixedPoint::solve(&kf(&k), &v).unwrap().d;
        // V = D^-1 has D(K, D^-1) = D (a derived identity: D K D = K^-1).
        let v_ref = d.clone().try_inverse().unwrap();
        let v_ref = (&v_ref + v_ref.transpose()) * 0.5;
        let ex = exact(&kf(&k), &v_ref, &split).unwrap();
        let re = reference(&d, &p);
        for l in &ops {
            let (a, b) = (dimension(&ex, l), dimension(&re, l));
            assert!((a - b).abs() < 1e-12, "{a} vs {b}");
        }
        let ex_real = exact(&kf(&k), &v, &split).unwrap();
        for l in &ops {
            largest_difference =
                largest_difference.max((dimension(&ex_real, l) - dimension(&re, l)).abs());
        }
    }
    assert!(
        largest_difference > 1e-3,
        "the forms should differ at random V: {largest_difference}"
    );
}

fn random_unimodular(rng: &mut ChaCha8Rng, n: usize) -> DMatrix<f64> {
    let mut u = DMatrix::<f64>::identity(n, n);
    for _ in 0..6 {
        let (i, j) = (rng.gen_range(0..n), rng.gen_range(0..n));
        if i == j || n < 2 {
            continue;
        }
        let c = rng.gen_range(-2..=2) as f64;
        let row = u.row(j) * c;
        let mut ri = u.row_mut(i);
        ri += row;
    }
    u
}

/// Derived (docs/physics.md section 8; see the module docs): the exact
/// form does not depend on B. Three changes: the integer kernel basis as it
/// comes (not orthonormalised), the same times a random unimodular matrix,
/// and a different complement B + R X (shifted by the radical).
#[test]
fn exact_form_is_independent_of_the_basis() {
    let (k, pins, ops) = six_field();
    let split = Split::new(&k, &pins).unwrap();
    let b_int = to_f64(&complement_basis(&k, &pins).unwrap());
    let mut rng = ChaCha8Rng::seed_from_u64(7);
    let v = random_v(&mut rng, 6);
    let base = exact(&kf(&k), &v, &split).unwrap();
    let r_raw = DMatrix::from_fn(6, 2, |i, j| pins[j][i] as f64 * k[i][i] as f64);
    for trial in 0..6 {
        let u = random_unimodular(&mut rng, b_int.ncols());
        let mut b = &b_int * u;
        if trial % 2 == 1 {
            let x = DMatrix::from_fn(2, b.ncols(), |_, _| rng.gen_range(-3..=3) as f64);
            b += &r_raw * x;
        }
        let other = exact(&kf(&k), &v, &split.with_basis(b)).unwrap();
        for l in &ops {
            let (a, c) = (dimension(&base, l), dimension(&other, l));
            assert!((a - c).abs() < 1e-10, "trial {trial}: {a} vs {c}");
        }
    }
}

/// Derived: per q, the exact and reference forms of [`q`] reproduce the
/// dense ones on a single cell (q-independent input: one wire).
#[test]
fn per_q_forms_match_dense_on_one_cell() {
    let (k, pins, ops) = six_field();
    let mut rng = ChaCha8Rng::seed_from_u64(3);
    let v = random_v(&mut rng, 6);
    let kd = kf(&k);
    let kinv = kd.clone().try_inverse().unwrap();
    let split = Split::new(&k, &pins).unwrap();
    let dense = exact(&kd, &v, &split).unwrap();
    let c = |m: &DMatrix<f64>| m.map(|x| num_complex::Complex64::new(x, 0.0));
    let p = DMatrix::from_fn(6, 2, |i, j| pins[j][i] as f64);
    let ps = q::span(&c(&p));
    let per_q = q::exact_at(&kd, &kinv, &c(&v), &ps).unwrap();
    assert!((per_q.map(|z| z.re) - &dense).amax() < 1e-12);
    assert!(per_q.map(|z| z.im).amax() < 1e-12);
    let d = FixedPoint::solve(&kd, &v).unwrap().d;
    let r_dense = reference(&d, &p);
    let r_q = q::reference_at(&c(&d), &ps);
    assert!((r_q.map(|z| z.re) - &r_dense).amax() < 1e-12);
    let _ = ops;
}

/// Issue 19 (the 512-wire filling-1/3 strip with "tunnel" pinned failed with
/// "smallest eigenvalue inf"): the integer complement basis of an open
/// strip grows geometrically along it, and its squares overflowed. A steep
/// family reproduces it on 30 wires: K = diag(1, -1) per wire, pinned
/// l_j = (p, q | r, s) = (-2^19, 1 | -1, 2^19) on wires j, j + 1 (null:
/// p^2 - q^2 + r^2 - s^2 = 0; translates commute: r p - s q = 0).
///
/// Derived value: the residual fields are w with l_j.w = 0 and
/// (K^-1 l_j).w = 0, i.e. p a_j + r a_{j+1} = 0 and q b_j + s b_{j+1} = 0
/// for the R amplitudes a and L amplitudes b: a_j ∝ (-r/p)^(W-1-j) (an R
/// mode at the right end) and b_j ∝ (-q/s)^j (an L mode at the left end),
/// entries up to 2^(19 x 29) in integers. Each is chiral with K_P = +-1, and
/// V couples them only through overlaps of order 2^-(19 x 29), so D(K_P,
/// V_P) = 1 and D_P = a a^T + b b^T (normalised): the projector onto the
/// two edge modes, whatever lambda. A NumPy computation by another route
/// (the complement from an SVD of [P, K^-1 P]) gives the same within 1e-15.
#[test]
fn steep_open_strip_leaves_its_two_chiral_edge_modes() {
    let w = 30;
    let n = 2 * w;
    let k: Vec<Vec<i64>> = (0..n)
        .map(|i| (0..n).map(|j| i64::from(i == j) * [1, -1][i % 2]).collect())
        .collect();
    let (p, q, r, s) = (-(1i64 << 19), 1i64, -1i64, 1i64 << 19);
    let pins: Vec<Vec<i64>> = (0..w - 1)
        .map(|j| {
            let mut l = vec![0; n];
            l[2 * j..2 * j + 4].copy_from_slice(&[p, q, r, s]);
            l
        })
        .collect();
    let lam = 0.3;
    let v = DMatrix::from_fn(n, n, |i, j| match (i / 2 == j / 2, i == j) {
        (_, true) => 1.0,
        (true, false) => lam,
        _ => 0.0,
    });
    let split = Split::new(&k, &pins).unwrap();
    let d_p = exact(&kf(&k), &v, &split).expect("a positive residual theory");
    let mut a = DMatrix::zeros(n, 1);
    let mut b = DMatrix::zeros(n, 1);
    for j in 0..w {
        a[(2 * j, 0)] = (-(r as f64) / p as f64).powi((w - 1 - j) as i32);
        b[(2 * j + 1, 0)] = (-(q as f64) / s as f64).powi(j as i32);
    }
    let (a, b) = (&a / a.norm(), &b / b.norm());
    let projector = &a * a.transpose() + &b * b.transpose();
    let err = (&d_p - &projector).amax();
    assert!(err < 1e-9, "D_P differs from the edge projector by {err:e}");
}

/// Derived: x 2^-s for integers beyond f64 (3 2^600 + 1 scaled by 2^600 is
/// 3 to within 2^-598; a negative one; 1 scaled by 2^1100 underflows to 0),
/// and a column of more than [`SCALE_ABOVE_BITS`] bits is scaled so that
/// its largest entry lies in [1, 2) while a small column is unchanged.
#[test]
fn big_integers_scale_into_floats() {
    use num_bigint::BigInt;
    let big = (BigInt::from(3) << 600u32) + 1;
    assert_eq!(scaled(&big, 600), 3.0);
    assert_eq!(scaled(&-big.clone(), 599), -6.0);
    assert_eq!(scaled(&BigInt::from(1), 1100), 0.0);
    assert_eq!(scaled(&BigInt::from(5), 0), 5.0);
    let m = ZMat::from_rows(
        &[
            vec![big.clone(), BigInt::from(7)],
            vec![BigInt::from(1) << 599u32, BigInt::from(-2)],
        ],
        2,
    );
    let f = to_f64_scaled(&m);
    // 3 2^600 has 602 bits: scaled by 2^-601 it is 1.5, and 2^599 is 0.25.
    assert_eq!((f[(0, 0)], f[(1, 0)]), (1.5, 0.25));
    assert_eq!((f[(0, 1)], f[(1, 1)]), (7.0, -2.0));
    assert!(to_f64(&m)[(0, 0)] > 1e180);
}
