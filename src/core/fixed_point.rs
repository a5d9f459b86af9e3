//! The Gaussian fixed point: scaling-dimension matrix D, velocities and
//! chiralities from K and V.
//!
//! Method [Wen, Adv. Phys. 44, 405 (1995); physics reference section 1]:
//! Cholesky V = L L^T, S = L^-1 K L^-T (symmetric, same signature as K),
//! |S| its matrix absolute value, and
//!
//! ```text
//! D = L^-T |S|^-1 L^-1,   Delta_l = (1/2) l^T D l,
//! v_i = 1 / |eig_i(S)|,   chirality_i = sign(eig_i(S)).
//! ```
//!
//! Derivation: with S = U diag(s) U^T, the basis change A = L^-T U |s|^-1/2
//! gives A^T K A = diag(sign s) and A^T V A = diag(1/|s|), so the fields
//! split into chiral bosons of velocity 1/|s_i|, each with exp(i n phi) of
//! dimension n^2/2; l.phi = (A^T l).phi' has Delta = |A^T l|^2 / 2 =
//! (1/2) l^T A A^T l and A A^T = L^-T U |s|^-1 U^T L^-1 = D.
//!
//! Invariants (tested on random inputs): D K D = K^-1, D positive definite,
//! det D = 1/|det K|, Delta_l >= |s_l|, D unchanged by V -> cV.

use nalgebra::{Cholesky, DMatrix, SymmetricEigen};

pub use crate::error::Unphysical;

/// Fixed-point data at one parameter point.
#[derive(Debug, Clone)]
pub struct FixedPoint {
    /// Scaling-dimension matrix: Delta_l = l^T D l / 2.
    pub d: DMatrix<f64>,
    /// Mode velocities (units of the bare Fermi velocity), ascending by mode
    /// as returned by the eigen-solver, paired with `chirality`.
    pub velocities: Vec<f64>,
    /// +1 for right-moving (positive eigen-direction of K), -1 for left.
    pub chirality: Vec<i8>,
}

impl FixedPoint {
    /// Compute the fixed point; `Err(smallest eigenvalue of V)` when V is not
    /// positive definite (only the lower triangle of V is read).
    pub fn solve(k: &DMatrix<f64>, v: &DMatrix<f64>) -> Result<FixedPoint, f64> {
        let n = k.nrows();
        let chol = Cholesky::new(v.clone()).ok_or_else(|| smallest_eigenvalue(v))?;
        let mut linv = DMatrix::identity(n, n);
        if !chol.l().solve_lower_triangular_mut(&mut linv) {
            return Err(smallest_eigenvalue(v));
        }
        let s = &linv * k * linv.transpose();
        let s = (&s + s.transpose()) * 0.5;
        let eig = SymmetricEigen::new(s);
        let mut abs_inv = DMatrix::zeros(n, n);
        for (i, e) in eig.eigenvalues.iter().enumerate() {
            abs_inv[(i, i)] = 1.0 / e.abs();
        }
        let u = &eig.eigenvectors;
        let inner = u * abs_inv * u.transpose();
        let d = linv.transpose() * inner * &linv;
        let d = (&d + d.transpose()) * 0.5;
        let (velocities, chirality) = modes_of(eig.eigenvalues.iter().cloned());
        Ok(FixedPoint {
            d,
            velocities,
            chirality,
        })
    }

    /// Scaling dimension (1/2) l^T D l of an integer vector.
    pub fn dimension(&self, l: &[i64]) -> f64 {
        quad_form(&self.d, l)
    }
}

/// Velocities 1/|s_i| and chiralities sign(s_i) of the eigenvalues s_i of
/// S, right movers first, each group by ascending velocity.
pub fn modes_of(eigenvalues: impl Iterator<Item = f64>) -> (Vec<f64>, Vec<i8>) {
    sorted_modes(
        eigenvalues
            .map(|e| (1.0 / e.abs(), if e > 0.0 { 1 } else { -1 }))
            .collect(),
    )
}

/// (velocity, chirality) pairs sorted right movers first, each group by
/// ascending velocity, split into the two lists.
pub fn sorted_modes(mut modes: Vec<(f64, i8)>) -> (Vec<f64>, Vec<i8>) {
    modes.sort_by(|a, b| b.1.cmp(&a.1).then(a.0.total_cmp(&b.0)));
    modes.into_iter().unzip()
}

/// (1/2) l^T D l for an integer vector, skipping zero entries.
pub fn quad_form(d: &DMatrix<f64>, l: &[i64]) -> f64 {
    let nz: Vec<(usize, f64)> = l
        .iter()
        .enumerate()
        .filter(|(_, x)| **x != 0)
        .map(|(i, x)| (i, *x as f64))
        .collect();
    let mut s = 0.0;
    for &(i, a) in &nz {
        for &(j, b) in &nz {
            s += a * d[(i, j)] * b;
        }
    }
    0.5 * s
}

/// How far a computed D is from D K D = K^-1: the largest entry of
/// (D K)^2 - 1, relative to the largest entry of (D K)^2 (at least 1).
/// NaN when D has non-finite entries.
pub fn identity_drift(k: &DMatrix<f64>, d: &DMatrix<f64>) -> f64 {
    let dk = d * k;
    let sq = &dk * &dk;
    if !sq.iter().all(|x| x.is_finite()) {
        return f64::NAN;
    }
    let scale = sq.amax().max(1.0);
    let n = sq.nrows();
    (sq - DMatrix::<f64>::identity(n, n)).amax() / scale
}

/// Condition number of a symmetric positive definite matrix: the ratio of
/// its largest to its smallest eigenvalue (infinite when the smallest is
/// not positive).
pub fn condition_number(v: &DMatrix<f64>) -> f64 {
    let sym = (v + v.transpose()) * 0.5;
    let eig = SymmetricEigen::new(sym).eigenvalues;
    let lo = eig.iter().cloned().fold(f64::INFINITY, f64::min);
    let hi = eig.iter().cloned().fold(f64::NEG_INFINITY, f64::max);
    if lo > 0.0 {
        hi / lo
    } else {
        f64::INFINITY
    }
}

/// Smallest eigenvalue of a symmetric matrix (for the "not positive
/// definite" message).
pub fn smallest_eigenvalue(v: &DMatrix<f64>) -> f64 {
    let sym = (v + v.transpose()) * 0.5;
    SymmetricEigen::new(sym)
        .eigenvalues
        .iter()
        .cloned()
        .fold(f64::INFINITY, f64::min)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn single_wire_luttinger_parameter() {
        // Giamarchi (2004) ch. 2: K_L = sqrt((1-lam)/(1+lam)), u = sqrt(1-lam^2);
        // backscattering l = (1, 1) has Delta = K_L, pairing l = (1, -1) has 1/K_L.
        let lam: f64 = 0.4;
        let k = DMatrix::from_row_slice(2, 2, &[1.0, 0.0, 0.0, -1.0]);
        let v = DMatrix::from_row_slice(2, 2, &[1.0, lam, lam, 1.0]);
        let fp = FixedPoint::solve(&k, &v).unwrap();
        let kl = ((1.0 - lam) / (1.0 + lam)).sqrt();
        assert!((fp.dimension(&[1, 1]) - kl).abs() < 1e-12);
        assert!((fp.dimension(&[1, -1]) - 1.0 / kl).abs() < 1e-12);
        for v in &fp.velocities {
            assert!((v - (1.0 - lam * lam).sqrt()).abs() < 1e-12);
        }
        assert_eq!(fp.chirality, vec![1, -1]);
    }

    #[test]
    fn not_positive_definite_reports_smallest_eigenvalue() {
        let k = DMatrix::from_row_slice(2, 2, &[1.0, 0.0, 0.0, -1.0]);
        let v = DMatrix::from_row_slice(2, 2, &[1.0, 1.5, 1.5, 1.0]);
        let e = FixedPoint::solve(&k, &v).unwrap_err();
        assert!((e + 0.5).abs() < 1e-12);
    }
}
