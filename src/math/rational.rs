//! Exact rational numbers and vectors: the [`Rational`] type, printing,
//! conversion to and from floats (the continued-fraction recognition of
//! small rationals), solves with a precomputed exact inverse, dot products.
//!
//! Invariants: big integers and big rationals only, so nothing overflows;
//! floats enter only in [`to_f64`] (output) and [`small_rational`] (which
//! recognises a float input as an exact rational or refuses). Determinants,
//! inverses and ranks live in [`crate::math::bareiss`], the signature in
//! [`crate::math::zmat::signature`].

use num_bigint::BigInt;
use num_integer::Integer;
use num_traits::{ToPrimitive, Zero};

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
        .filter(|(r, &x)| x != 0 && !r.is_zero())
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

/// Greatest common divisor of two rationals' denominators is not needed
/// elsewhere; this helper reduces an integer vector by its gcd (for
/// printing primitive vectors).
pub fn gcd_of(v: &[i64]) -> i64 {
    v.iter().fold(0i64, |g, &x| g.gcd(&x))
}

#[cfg(test)]
mod tests {
    use super::*;

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
