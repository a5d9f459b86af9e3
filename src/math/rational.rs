//! Exact rational algebra on integer K matrices.
//!
//! Everything here is computed with big integers and big rationals, never
//! floats: determinants and inverses by fraction-free (Bareiss) Gauss-Jordan
//! elimination [Bareiss, Math. Comp. 22, 565 (1968)], so no intermediate
//! value overflows whatever the size of the matrix. Floats enter only in
//! [`signature`], whose result is checked against the exact sign of det K.

use num_bigint::BigInt;
use num_integer::Integer;
use num_traits::{One, Signed, ToPrimitive, Zero};

/// Exact rational number.
pub type Rational = num_rational::BigRational;

/// Print a rational as "p" or "p/q".
pub fn fmt_rational(r: &Rational) -> String {
    if r.is_integer() {
        r.numer().to_string()
    } else {
        format!("{}/{}", r.numer(), r.denom())
    }
}

/// Nearest float of a rational.
pub fn to_f64(r: &Rational) -> f64 {
    match (r.numer().to_f64(), r.denom().to_f64()) {
        (Some(p), Some(q)) if p.is_finite() && q.is_finite() => p / q,
        _ => {
            // Very large numerator or denominator: scale by powers of two.
            let shift = r.numer().bits().max(r.denom().bits()) as i64 - 60;
            let p = (r.numer() >> shift.max(0) as usize)
                .to_f64()
                .unwrap_or(f64::NAN);
            let q = (r.denom() >> shift.max(0) as usize)
                .to_f64()
                .unwrap_or(f64::NAN);
            p / q
        }
    }
}

/// The rational p/q with the smallest denominator q <= `max_den` within
/// `tol` (relative to max(1, |x|)) of x, by continued fractions; None if
/// there is none. Keep `max_den` small (about 1e4 for tol = 1e-12): any real
/// has approximations p/q within about 1/q^2, so a large `max_den` would
/// "recognise" every number. Used to recognise momenta like 0.05 = 1/20 or
/// 6 * 0.05 = 0.30000000000000004 = 3/10 so that they can be compared exactly.
pub fn small_rational(x: f64, max_den: i64, tol: f64) -> Option<Rational> {
    if !x.is_finite() || x.abs() > 1e12 {
        return None;
    }
    let scale = x.abs().max(1.0);
    let (mut p0, mut q0, mut p1, mut q1) = (0i128, 1i128, 1i128, 0i128);
    let mut r = x;
    for _ in 0..64 {
        let a = r.floor();
        let (p2, q2) = (a as i128 * p1 + p0, a as i128 * q1 + q0);
        if q2 > max_den as i128 {
            return None;
        }
        if (x - p2 as f64 / q2 as f64).abs() <= tol * scale {
            return Some(Rational::new(BigInt::from(p2), BigInt::from(q2)));
        }
        let frac = r - a;
        if frac == 0.0 {
            return None;
        }
        (p0, q0, p1, q1) = (p1, q1, p2, q2);
        r = 1.0 / frac;
    }
    None
}

/// Rational from an integer.
pub fn int(i: i64) -> Rational {
    Rational::from_integer(BigInt::from(i))
}

/// Determinant and inverse of a square integer matrix, or `None` when it is
/// singular. Fraction-free Gauss-Jordan: after elimination every diagonal
/// entry equals the determinant of the row-permuted matrix and the right
/// block equals that determinant times the inverse; all divisions are exact.
pub fn det_and_inverse(a: &[Vec<i64>]) -> Option<(BigInt, Vec<Vec<Rational>>)> {
    let n = a.len();
    let mut m: Vec<Vec<BigInt>> = a
        .iter()
        .enumerate()
        .map(|(i, row)| {
            let mut r: Vec<BigInt> = row.iter().map(|&x| BigInt::from(x)).collect();
            r.extend((0..n).map(|j| {
                if i == j {
                    BigInt::one()
                } else {
                    BigInt::zero()
                }
            }));
            r
        })
        .collect();
    let mut prev = BigInt::one();
    let mut sign = 1i32;
    for k in 0..n {
        let p = (k..n).find(|&r| !m[r][k].is_zero())?;
        if p != k {
            m.swap(p, k);
            sign = -sign;
        }
        eliminate_column(&mut m, k, &prev);
        prev = m[k][k].clone();
    }
    let d = prev;
    let inverse = m
        .iter()
        .map(|row| {
            row[n..]
                .iter()
                .map(|x| Rational::new(x.clone(), d.clone()))
                .collect()
        })
        .collect();
    let det = if sign < 0 { -d } else { d };
    Some((det, inverse))
}

/// One fraction-free Gauss-Jordan step on pivot (k, k) of the augmented matrix.
fn eliminate_column(m: &mut [Vec<BigInt>], k: usize, prev: &BigInt) {
    let pivot_row = m[k].clone();
    let pivot = pivot_row[k].clone();
    for (i, row) in m.iter_mut().enumerate() {
        if i == k {
            continue;
        }
        let factor = row[k].clone();
        for (j, x) in row.iter_mut().enumerate() {
            if j == k {
                continue;
            }
            let num = &pivot * &*x - &factor * &pivot_row[j];
            debug_assert!(num.is_multiple_of(prev));
            *x = num / prev;
        }
        row[k] = BigInt::zero();
    }
    // The pivot row itself keeps its entries (they are already the right minors).
}

/// `K^-1 l` for an integer vector, with a precomputed inverse.
pub fn solve_with(inverse: &[Vec<Rational>], l: &[i64]) -> Vec<Rational> {
    inverse
        .iter()
        .map(|row| {
            row.iter()
                .zip(l)
                .filter(|(_, &x)| x != 0)
                .fold(Rational::zero(), |acc, (r, &x)| acc + r * int(x))
        })
        .collect()
}

/// Dot product of a rational vector with an integer vector.
pub fn dot_int(m: &[Rational], l: &[i64]) -> Rational {
    m.iter()
        .zip(l)
        .filter(|(_, &x)| x != 0)
        .fold(Rational::zero(), |acc, (r, &x)| acc + r * int(x))
}

/// True when every entry is an integer.
pub fn is_integral(m: &[Rational]) -> bool {
    m.iter().all(|r| r.is_integer())
}

/// The integers of an integral rational vector (None if not integral or too large).
pub fn to_integers(m: &[Rational]) -> Option<Vec<i64>> {
    m.iter()
        .map(|r| {
            if r.is_integer() {
                r.numer().to_i64()
            } else {
                None
            }
        })
        .collect()
}

/// Signature (n+, n-) of a symmetric integer matrix with det != 0. Counted
/// from float eigenvalues; the parity of n- is checked against the exact
/// sign of det, and `None` is returned if they disagree.
pub fn signature(k: &[Vec<i64>], det: &BigInt) -> Option<(usize, usize)> {
    let n = k.len();
    let m = nalgebra::DMatrix::from_fn(n, n, |i, j| k[i][j] as f64);
    let eig = nalgebra::SymmetricEigen::new(m);
    let neg = eig.eigenvalues.iter().filter(|e| **e < 0.0).count();
    let det_negative = det.is_negative();
    ((neg % 2 == 1) == det_negative).then_some((n - neg, neg))
}

/// Greatest common divisor of two rationals' denominators is not needed
/// elsewhere; this helper reduces an integer vector by its gcd (for
/// printing primitive vectors).
pub fn gcd_of(v: &[i64]) -> i64 {
    v.iter().fold(0i64, |g, &x| g.gcd(&x))
}

/// Rank of a rational matrix (given as rows) by Gaussian elimination with
/// exact big rationals: the number of pivots found column by column.
pub fn rank(rows: &[Vec<Rational>]) -> usize {
    let mut m: Vec<Vec<Rational>> = rows.to_vec();
    let cols = m.iter().map(|r| r.len()).max().unwrap_or(0);
    let mut r = 0;
    for c in 0..cols {
        let Some(p) = (r..m.len()).find(|&i| c < m[i].len() && !m[i][c].is_zero()) else {
            continue;
        };
        m.swap(p, r);
        let pivot = m[r].clone();
        for row in m.iter_mut().skip(r + 1) {
            if c >= row.len() || row[c].is_zero() {
                continue;
            }
            let f = &row[c] / &pivot[c];
            for (j, x) in row.iter_mut().enumerate().skip(c) {
                if j < pivot.len() {
                    *x -= &f * &pivot[j];
                }
            }
        }
        r += 1;
        if r == m.len() {
            break;
        }
    }
    r
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rows(m: &[&[i64]]) -> Vec<Vec<Rational>> {
        m.iter()
            .map(|r| r.iter().map(|&x| int(x)).collect())
            .collect()
    }

    #[test]
    fn ranks_of_small_matrices() {
        // By hand: a zero matrix, proportional rows, a non-zero det (1*4 -
        // 2*3 = -2), a 3 x 3 with row 3 = row 1 + row 2, a wide 2 x 3 whose
        // first column vanishes.
        assert_eq!(rank(&rows(&[&[0, 0], &[0, 0]])), 0);
        assert_eq!(rank(&rows(&[&[1, 2], &[2, 4]])), 1);
        assert_eq!(rank(&rows(&[&[1, 2], &[3, 4]])), 2);
        assert_eq!(rank(&rows(&[&[1, 2, 3], &[4, 5, 6], &[5, 7, 9]])), 2);
        assert_eq!(rank(&rows(&[&[0, 1, 2], &[0, 3, 7]])), 2);
        assert_eq!(rank(&[]), 0);
    }
    use num_traits::FromPrimitive;

    fn rational_inverse(a: &[Vec<i64>]) -> Option<Vec<Vec<Rational>>> {
        // Plain Gauss-Jordan with rationals, as an independent reference.
        let n = a.len();
        let mut m: Vec<Vec<Rational>> = a
            .iter()
            .enumerate()
            .map(|(i, r)| {
                let mut row: Vec<Rational> = r.iter().map(|&x| int(x)).collect();
                row.extend((0..n).map(|j| int((i == j) as i64)));
                row
            })
            .collect();
        for k in 0..n {
            let p = (k..n).find(|&r| !m[r][k].is_zero())?;
            m.swap(p, k);
            let piv = m[k][k].clone();
            for x in m[k].iter_mut() {
                *x = &*x / &piv;
            }
            let prow = m[k].clone();
            for (i, row) in m.iter_mut().enumerate() {
                if i != k {
                    let f = row[k].clone();
                    for (x, y) in row.iter_mut().zip(&prow) {
                        *x = &*x - &f * y;
                    }
                }
            }
        }
        Some(m.into_iter().map(|r| r[n..].to_vec()).collect())
    }

    #[test]
    fn bareiss_matches_rational_gauss_jordan() {
        let cases: Vec<Vec<Vec<i64>>> = vec![
            vec![vec![3, 1], vec![1, 3]],
            vec![vec![0, 1, 2], vec![1, 0, 3], vec![2, 3, 1]],
            vec![vec![1, 0], vec![0, -1]],
            vec![
                vec![2, -1, 0, 0],
                vec![-1, 2, -1, 0],
                vec![0, -1, 2, -1],
                vec![0, 0, -1, 2],
            ],
        ];
        for a in cases {
            let (_, inv) = det_and_inverse(&a).unwrap();
            assert_eq!(inv, rational_inverse(&a).unwrap());
        }
    }

    #[test]
    fn determinants_of_known_matrices() {
        // Halperin (331): det 8 [Wen, Adv. Phys. 44, 405 (1995)].
        assert_eq!(
            det_and_inverse(&[vec![3, 1], vec![1, 3]]).unwrap().0,
            BigInt::from(8)
        );
        // A_4 Cartan matrix: det 5 (standard).
        let a4 = vec![
            vec![2, -1, 0, 0],
            vec![-1, 2, -1, 0],
            vec![0, -1, 2, -1],
            vec![0, 0, -1, 2],
        ];
        assert_eq!(det_and_inverse(&a4).unwrap().0, BigInt::from(5));
        assert!(det_and_inverse(&[vec![1, 2], vec![2, 4]]).is_none());
    }

    #[test]
    fn large_entries_do_not_overflow() {
        // 64x64 with entries of a few dozen: the determinant is far beyond i128.
        let n = 64;
        let a: Vec<Vec<i64>> = (0..n)
            .map(|i| {
                (0..n)
                    .map(|j| {
                        if i == j {
                            40
                        } else {
                            ((i * 7 + j * 13) % 5) as i64 - 2
                        }
                    })
                    .collect()
            })
            .map(|r: Vec<i64>| r)
            .collect();
        let sym: Vec<Vec<i64>> = (0..n)
            .map(|i| (0..n).map(|j| a[i.min(j)][i.max(j)]).collect())
            .collect();
        let (det, inv) = det_and_inverse(&sym).unwrap();
        assert!(det.bits() > 300);
        // K K^-1 = 1 exactly on a few rows.
        for i in [0, 31, 63] {
            for j in [0, 17, 63] {
                let s = (0..n).fold(Rational::zero(), |acc, k| acc + int(sym[i][k]) * &inv[k][j]);
                assert_eq!(s, Rational::from_u8((i == j) as u8).unwrap());
            }
        }
    }

    #[test]
    fn small_rationals_are_recognised() {
        let r = |p: i64, q: i64| Rational::new(BigInt::from(p), BigInt::from(q));
        assert_eq!(small_rational(0.05, 10_000, 1e-12), Some(r(1, 20)));
        assert_eq!(small_rational(6.0 * 0.05, 10_000, 1e-12), Some(r(3, 10)));
        assert_eq!(small_rational(-2.0 / 3.0, 10_000, 1e-12), Some(r(-2, 3)));
        assert_eq!(small_rational(0.0, 10_000, 1e-12), Some(r(0, 1)));
        assert_eq!(small_rational(std::f64::consts::PI, 10_000, 1e-12), None);
    }

    #[test]
    fn rational_printing() {
        assert_eq!(
            fmt_rational(&Rational::new(BigInt::from(6), BigInt::from(4))),
            "3/2"
        );
        assert_eq!(fmt_rational(&int(-2)), "-2");
    }
}
