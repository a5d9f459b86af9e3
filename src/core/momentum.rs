//! Momenta of operators: the mismatch sum_I m_I k_I of a particle content,
//! reduced modulo the model's momentum period (umklapp), and the tolerance
//! below which a mismatch counts as conserved. The one place that dims,
//! flow and hunt take these from.

use crate::math::rational::{to_f64, Rational};

/// Tolerance below which a momentum mismatch counts as conserved (units of
/// the inverse cutoff).
pub const MOMENTUM_TOLERANCE: f64 = 1e-9;

/// The momentum mismatch sum_I m_I k_I of an operator with particle content
/// `m`, given the momentum of every field, reduced by the model's momentum
/// period G when it has one ([`reduce_momentum`]). A value below
/// [`MOMENTUM_TOLERANCE`] is the rounding left by momenta
/// that cancel (k_F written as a decimal, say): it is returned as exactly 0,
/// the value every command then treats as conserved.
pub fn mismatch(particles: &[Rational], k: &[f64], period: Option<f64>) -> f64 {
    let sum: f64 = particles.iter().zip(k).map(|(m, p)| to_f64(m) * p).sum();
    reduce_momentum(sum, period)
}

/// A momentum k as the mismatch that matters for the flow. Without a period
/// that is k itself. With a reciprocal lattice vector G (umklapp: momentum
/// is conserved only modulo G) it is the representative of k + G Z in
/// (-G/2, G/2], k - G round(k/G); the tie |k| = G/2 (backscattering 2 k_F
/// at half filling, with G = 4 k_F) is given the sign +, so that k and -k
/// have the same representative there, as they should (G/2 and -G/2 differ
/// by G). Values within [`MOMENTUM_TOLERANCE`] of 0 become
/// exactly 0, and values within it of -G/2 become +G/2, so the rounding of
/// the momenta cannot decide either. The remainder is taken with the exact
/// floating-point remainder (`rem_euclid`), so any finite k and G > 0 give a
/// finite result, however large k/G.
pub fn reduce_momentum(k: f64, period: Option<f64>) -> f64 {
    let tol = MOMENTUM_TOLERANCE;
    let mut r = k;
    if let Some(g) = period.filter(|g| g.is_finite() && *g > 0.0 && k.is_finite()) {
        // In [0, G] (G itself only by the rounding of a tiny negative k + G).
        r = k.rem_euclid(g);
        if r > 0.5 * g + tol {
            r -= g;
        } else if r > 0.5 * g {
            r = 0.5 * g;
        }
    }
    if r.abs() < tol {
        0.0
    } else {
        r
    }
}
