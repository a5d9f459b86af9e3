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

/// Momentum that moves with the translate (flux arrays).
///
/// With `momentum_per_wire` = b_c the fields of wire j carry k_c + j b_c, so
/// the translate of a term anchored one wire further carries
/// dk = sum_c N_c b_c more, where N_c = sum over the term's wires of its
/// particle content m_c (for b_c = b: dk = Q_N b with Q_N the net particle
/// number, e.g. 2 b for a pair). A neutral term has dk = 0; a charged one
/// has k_j = k_0 + j dk on translate j.
pub mod per_translate {
    use crate::core::lattice::Lattice;
    use crate::math::rational::{self as exact, Rational};
    use crate::model::Model;
    use num_traits::Zero;

    /// N_c = sum over wires of the particle content m (dense, all fields).
    pub fn net_particles(lat: &Lattice, particles: &[Rational]) -> Vec<Rational> {
        (0..lat.cell)
            .map(|c| {
                (0..lat.wires).fold(Rational::zero(), |acc, w| {
                    acc + &particles[w * lat.cell + c]
                })
            })
            .collect()
    }

    /// dk = sum_c N_c b_c at a point (not reduced by the momentum period);
    /// None for models without `momentum_per_wire`.
    pub fn shift(model: &Model, net: &[Rational], point: &[f64]) -> Option<f64> {
        let b = model.momentum_per_wire.as_ref()?;
        Some(
            net.iter()
                .zip(b)
                .map(|(n, s)| exact::to_f64(n) * s.eval(point))
                .sum(),
        )
    }

    /// dk can be non-zero somewhere in parameter space: after summing N_c
    /// over the components that share one expression b_c (the same text),
    /// some sum is non-zero with an expression that is not the constant 0.
    /// Different texts for one function count as different (the flow then
    /// splits the family into translates, which is exact, only slower).
    pub fn may_vary(model: &Model, net: &[Rational]) -> bool {
        let Some(b) = model.momentum_per_wire.as_ref() else {
            return false;
        };
        let mut groups: Vec<(String, Rational, bool)> = Vec::new();
        for (n, s) in net.iter().zip(b) {
            let zero = s.is_const() && s.eval(&[]) == 0.0;
            match groups.iter_mut().find(|g| g.0 == s.text()) {
                Some(g) => g.1 = &g.1 + n,
                None => groups.push((s.text(), n.clone(), zero)),
            }
        }
        groups.iter().any(|(_, n, zero)| !n.is_zero() && !zero)
    }

    /// The mismatch of a translate on the line (offsets from its anchor are
    /// not wrapped), from the particle content `m` of its dense vector and
    /// the momenta `k` of every field: sum_I m_I k_I plus, for each part a
    /// ring wraps to wire w < anchor, W b_c m_c (it sits on wire w + W of the
    /// line). Reduced by the period like [`super::mismatch`]. On an open
    /// array, an explicit model or a translate that does not wrap it is
    /// `mismatch` itself.
    pub fn line_mismatch(
        lat: &Lattice,
        m: &[Rational],
        anchor: usize,
        k: &[f64],
        period: Option<f64>,
    ) -> f64 {
        let m: Vec<f64> = m.iter().map(exact::to_f64).collect();
        line_mismatch_f64(lat, &m, anchor, k, period)
    }

    /// [`line_mismatch`] from the particle content already rounded to
    /// doubles (entry by entry, as [`line_mismatch`] rounds it): the same
    /// number, for callers that convert m once and evaluate it at many
    /// parameter points (a scan's channels).
    pub fn line_mismatch_f64(
        lat: &Lattice,
        m: &[f64],
        anchor: usize,
        k: &[f64],
        period: Option<f64>,
    ) -> f64 {
        let mut sum: f64 = m.iter().zip(k).map(|(m, p)| m * p).sum();
        if lat.boundary == Some(crate::model::Boundary::Periodic) && lat.wires > 1 {
            for w in 0..anchor.min(lat.wires) {
                for c in 0..lat.cell {
                    let b = k[lat.cell + c] - k[c];
                    sum += m[w * lat.cell + c] * (lat.wires as f64) * b;
                }
            }
        }
        super::reduce_momentum(sum, period)
    }
}
