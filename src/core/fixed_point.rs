//! The Gaussian fixed point: scaling-dimension matrix D, velocities and
//! chiralities from K and V.
//!
//! Method [Wen, Adv. Phys. 44, 405 (1995); docs/physics.md section 1]:
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

use nalgebra::{Cholesky, DMatrix, DVector, SymmetricEigen};

pub use crate::error::Unphysical;

/// Fixed-point data at one parameter point.
#[derive(Debug, Clone)]
pub struct FixedPoint {
    /// Scaling-dimension matrix: Delta_l = l^T D l / 2 (rounded to doubles
    /// on the extended route; [`FixedPoint::dimension`] uses the full D).
    pub d: DMatrix<f64>,
    /// Mode velocities (units of the bare Fermi velocity), ascending by mode
    /// as returned by the eigen-solver, paired with `chirality`.
    pub velocities: Vec<f64>,
    /// +1 for right-moving (positive eigen-direction of K), -1 for left.
    pub chirality: Vec<i8>,
    /// How accurate D is: the route taken and the data of the error bound.
    pub accuracy: Accuracy,
}

/// Which route computed D and what bounds its error (see
/// [`FixedPoint::dimension_error`]).
#[derive(Debug, Clone)]
pub struct Accuracy {
    /// D was computed in double-double arithmetic (V or S ill-conditioned).
    pub extended: bool,
    /// Condition number of the equilibrated V, diag(V)^-1/2 V diag(V)^-1/2
    /// (the one that governs the Cholesky factor's accuracy).
    pub condition: f64,
    /// Trailing parts of D on the extended route (D = d + d_lo).
    d_lo: Option<DMatrix<f64>>,
    /// Columns: the chiral basis A (A^T K A = diag(sign s), A^T V A =
    /// diag(1/|s|)).
    basis: DMatrix<f64>,
    /// Eigenvalues s_i of S, paired with the columns of `basis`.
    eig: Vec<f64>,
    /// a_i = sum_p |A_pi| sqrt(V_pp): the size of a rounding-level
    /// perturbation of V seen by mode i.
    weight: Vec<f64>,
}

/// Largest error-growth indicator (see [`route_indicator`]) for which the
/// double-precision route is kept: below it, D is computed in doubles;
/// above it, in double-double. The indicator is a worst-case first-order
/// bound that grows as n^2 with the number of fields, so a smaller value
/// would send every large, well-conditioned dense model (a 256-wire open
/// strip: 512 fields) to the double-double route, about 20 times slower,
/// although its bound is already a quarter of [`DIMENSION_ERROR_LIMIT`].
pub const EXTENDED_ABOVE: f64 = DIMENSION_ERROR_LIMIT / 4.0;

/// Dimensions whose relative error bound exceeds this are refused (`dims`).
pub const DIMENSION_ERROR_LIMIT: f64 = 1e-8;

/// Unit roundoff of doubles, 2^-53.
const F64_UNIT: f64 = f64::EPSILON / 2.0;

impl FixedPoint {
    /// Compute the fixed point; `Err(smallest eigenvalue of V)` when V is not
    /// positive definite (only the lower triangle of V is read). Doubles are
    /// used unless [`route_indicator`] exceeds [`EXTENDED_ABOVE`]; then D is
    /// recomputed in double-double arithmetic.
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
        let s_eig: Vec<f64> = eig.eigenvalues.iter().cloned().collect();
        let condition = equilibrated_condition(v);
        if route_indicator(n, condition, &s_eig) > EXTENDED_ABOVE {
            return solve_extended(k, v, condition);
        }
        let (velocities, chirality) = modes_of(s_eig.iter().cloned());
        let basis = chiral_basis(&linv, u, &s_eig);
        Ok(FixedPoint {
            d,
            velocities,
            chirality,
            accuracy: Accuracy::new(false, condition, None, basis, s_eig, v),
        })
    }

    /// Scaling dimension (1/2) l^T D l of an integer vector (in
    /// double-double from the full D on the extended route).
    pub fn dimension(&self, l: &[i64]) -> f64 {
        match &self.accuracy.d_lo {
            None => quad_form(&self.d, l),
            Some(lo) => quad_form_dd(&self.d, lo, l),
        }
    }

    /// First-order bound on the relative error of [`FixedPoint::dimension`]
    /// for the vector l, from rounding errors of the route taken (see
    /// [`Accuracy::relative_error`]); 0 for l = 0.
    pub fn dimension_error(&self, l: &[i64]) -> f64 {
        let delta = self.dimension(l);
        let lf: Vec<f64> = l.iter().map(|x| *x as f64).collect();
        self.accuracy.relative_error(&self.d, &lf, delta)
    }

    /// Relative error of Delta_l when D is rounded to doubles and the
    /// quadratic form is summed in doubles (as the flow does):
    /// 2 n u (1/2) |l|^T |D| |l| / Delta_l (the last term of
    /// [`Accuracy::relative_error`] in double precision).
    pub fn storage_error(&self, l: &[i64]) -> f64 {
        let la: Vec<i64> = l.iter().map(|x| x.abs()).collect();
        let delta = self.dimension(l);
        if delta == 0.0 {
            return 0.0;
        }
        2.0 * l.len() as f64 * F64_UNIT * quad_form(&self.d.abs(), &la) / delta
    }

    /// [`Accuracy::input_sensitivity`] of the dimension of l.
    pub fn dimension_sensitivity(&self, l: &[i64]) -> f64 {
        let lf: Vec<f64> = l.iter().map(|x| *x as f64).collect();
        self.accuracy.input_sensitivity(&lf, self.dimension(l))
    }
}

/// Error growth of the double route: 4 n u (kappa_eq(V) + n kappa(S)),
/// with kappa(S) = max|s| / min|s| the velocity spread.
pub fn route_indicator(n: usize, condition: f64, s: &[f64]) -> f64 {
    let hi = s.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    let lo = s.iter().fold(f64::INFINITY, |m, x| m.min(x.abs()));
    let nf = n as f64;
    4.0 * nf * F64_UNIT * (condition + nf * hi / lo)
}

/// A = L^-T U |s|^-1/2 (columns: the chiral modes).
fn chiral_basis(linv: &DMatrix<f64>, u: &DMatrix<f64>, s: &[f64]) -> DMatrix<f64> {
    let mut a = linv.transpose() * u;
    for (j, e) in s.iter().enumerate() {
        let f = 1.0 / e.abs().sqrt();
        a.column_mut(j).iter_mut().for_each(|x| *x *= f);
    }
    a
}

/// The double-double route: Cholesky, triangular inverse, S and its Jacobi
/// eigen-decomposition, and D, all in double-double.
fn solve_extended(k: &DMatrix<f64>, v: &DMatrix<f64>, condition: f64) -> Result<FixedPoint, f64> {
    use crate::math::ddouble::{cholesky, jacobi_eigen, lower_inverse, Dd, DdMat};
    let n = k.nrows();
    let vd = DdMat::from_fn(n, |i, j| v[(i.max(j), i.min(j))]);
    let kd = DdMat::from_fn(n, |i, j| k[(i, j)]);
    let l = cholesky(&vd).ok_or_else(|| smallest_eigenvalue(v))?;
    let linv = lower_inverse(&l);
    let s = linv.mul(&kd).mul(&linv.transpose()).symmetrised();
    let (vals, u) = jacobi_eigen(&s);
    let mut inner = DdMat::zeros(n);
    for i in 0..n {
        for j in 0..n {
            let mut x = Dd::ZERO;
            for (m, e) in vals.iter().enumerate() {
                x = x + u.at(i, m) * u.at(j, m) / e.abs();
            }
            inner.a[i * n + j] = x;
        }
    }
    let dd = linv.transpose().mul(&inner).mul(&linv).symmetrised();
    let d = DMatrix::from_fn(n, n, |i, j| dd.at(i, j).hi);
    let d_lo = DMatrix::from_fn(n, n, |i, j| dd.at(i, j).lo);
    let s_eig: Vec<f64> = vals.iter().map(|x| x.to_f64()).collect();
    let (velocities, chirality) = modes_of(s_eig.iter().cloned());
    let to_f = |m: &DdMat| DMatrix::from_fn(n, n, |i, j| m.at(i, j).to_f64());
    let basis = chiral_basis(&to_f(&linv), &to_f(&u), &s_eig);
    Ok(FixedPoint {
        d,
        velocities,
        chirality,
        accuracy: Accuracy::new(true, condition, Some(d_lo), basis, s_eig, v),
    })
}

impl Accuracy {
    fn new(
        extended: bool,
        condition: f64,
        d_lo: Option<DMatrix<f64>>,
        basis: DMatrix<f64>,
        eig: Vec<f64>,
        v: &DMatrix<f64>,
    ) -> Accuracy {
        let n = v.nrows();
        let weight = (0..n)
            .map(|i| (0..n).map(|p| basis[(p, i)].abs() * v[(p, p)].sqrt()).sum())
            .collect();
        Accuracy {
            extended,
            condition,
            d_lo,
            basis,
            eig,
            weight,
        }
    }

    /// Every number the error bound uses is finite (false when V is so
    /// extreme that even the extended route overflows or underflows).
    pub fn is_finite(&self) -> bool {
        self.basis.iter().all(|x| x.is_finite())
            && self.eig.iter().all(|x| x.is_finite() && *x != 0.0)
            && self.weight.iter().all(|x| x.is_finite())
            && self
                .d_lo
                .as_ref()
                .is_none_or(|m| m.iter().all(|x| x.is_finite()))
    }

    /// Unit roundoff of the route.
    pub fn unit_roundoff(&self) -> f64 {
        if self.extended {
            crate::math::ddouble::UNIT_ROUNDOFF
        } else {
            F64_UNIT
        }
    }

    /// First-order relative error bound of Delta_l = `delta` (derived).
    ///
    /// In the chiral basis (l' = A^T l, v_i = 1/|s_i|):
    /// - Cholesky is backward stable with |dV_pq| <= c n u sqrt(V_pp V_qq)
    ///   [Higham, "Accuracy and Stability of Numerical Algorithms" (2002),
    ///   thm 10.3]; in the chiral basis |dV'_ij| <= c n u a_i a_j. A
    ///   perturbation dV' changes D' = 1 only between modes of opposite
    ///   chirality, dD'_ij = -2 dV'_ij / (v_i + v_j) (first-order Frechet
    ///   derivative of sign(V^-1 K), since D K = sign(V^-1 K)), so
    ///   |dDelta| <= c n u sum_{i right, j left} |l'_i||l'_j| 2 a_i a_j / (v_i + v_j).
    /// - The eigen-solver is backward stable, |dS| <= c n u max|s|; the
    ///   divided differences of 1/|s| are at most 1/(|s_i||s_j|), so
    ///   |dDelta| <= (c n u / 2) max|s| (sum_i |l'_i| / sqrt|s_i|)^2.
    /// - Forming D and the quadratic form: (c n u / 2) |l|^T |D| |l|.
    ///
    /// With c = 4; the extended route adds the final rounding to a double.
    pub fn relative_error(&self, d: &DMatrix<f64>, l: &[f64], delta: f64) -> f64 {
        if l.iter().all(|x| *x == 0.0) {
            return 0.0;
        }
        let n = l.len();
        let lp = self.chiral_components(l);
        let smax = self.eig.iter().fold(0.0f64, |m, x| m.max(x.abs()));
        let w: f64 = (0..n).map(|i| lp[i].abs() / self.eig[i].abs().sqrt()).sum();
        let e_s = 0.5 * smax * w * w;
        let la: Vec<f64> = l.iter().map(|x| x.abs()).collect();
        let e_q =
            0.5 * (d.abs() * DVector::from_column_slice(&la)).dot(&DVector::from_column_slice(&la));
        let c = 4.0 * n as f64 * self.unit_roundoff();
        let rel = c * (self.v_sensitivity(&lp) + e_s + e_q) / delta.abs();
        if self.extended {
            rel + F64_UNIT
        } else {
            rel
        }
    }

    /// First-order relative change of Delta_l = `delta` when every entry
    /// of V moves by half an ulp (relative 2^-53), i.e. how well the V
    /// stored in doubles determines Delta, whatever the route (the first
    /// term of [`Accuracy::relative_error`] with c n = 1).
    pub fn input_sensitivity(&self, l: &[f64], delta: f64) -> f64 {
        if l.iter().all(|x| *x == 0.0) {
            return 0.0;
        }
        F64_UNIT * self.v_sensitivity(&self.chiral_components(l)) / delta.abs()
    }

    /// l' = A^T l.
    fn chiral_components(&self, l: &[f64]) -> Vec<f64> {
        let n = l.len();
        (0..n)
            .map(|i| (0..n).map(|p| self.basis[(p, i)] * l[p]).sum())
            .collect()
    }

    /// sum_{i right, j left} |l'_i||l'_j| 2 a_i a_j / (v_i + v_j).
    fn v_sensitivity(&self, lp: &[f64]) -> f64 {
        let n = lp.len();
        let mut e_v = 0.0;
        for i in (0..n).filter(|i| self.eig[*i] > 0.0) {
            for j in (0..n).filter(|j| self.eig[*j] < 0.0) {
                let vsum = 1.0 / self.eig[i].abs() + 1.0 / self.eig[j].abs();
                e_v += 2.0 * (lp[i] * lp[j]).abs() * self.weight[i] * self.weight[j] / vsum;
            }
        }
        e_v
    }
}

/// (1/2) l^T (D + D_lo) l summed in double-double.
fn quad_form_dd(d: &DMatrix<f64>, lo: &DMatrix<f64>, l: &[i64]) -> f64 {
    use crate::math::ddouble::Dd;
    let nz: Vec<(usize, f64)> = l
        .iter()
        .enumerate()
        .filter(|(_, x)| **x != 0)
        .map(|(i, x)| (i, *x as f64))
        .collect();
    let mut s = Dd::ZERO;
    for &(i, a) in &nz {
        for &(j, b) in &nz {
            let dij = Dd::from_f64(d[(i, j)]) + Dd::from_f64(lo[(i, j)]);
            s = s + dij * Dd::from_f64(a * b);
        }
    }
    (s * Dd::from_f64(0.5)).to_f64()
}

/// The real symmetric form of a Hermitian problem at one q: K -> [[K, 0],
/// [0, K]], V -> [[Re V, -Im V], [Im V, Re V]]. D = sign(V^-1 K) K^-1 is a
/// matrix function, so the embedded D is [[Re D, -Im D], [Im D, Re D]] and
/// (1/2) x^T D x with x = (Re l, Im l) is (1/2) l^H D l (derived).
pub fn hermitian_embedding(
    k: &DMatrix<f64>,
    vq: &DMatrix<nalgebra::Complex<f64>>,
) -> (DMatrix<f64>, DMatrix<f64>) {
    let c = k.nrows();
    let ke = DMatrix::from_fn(2 * c, 2 * c, |i, j| {
        if i / c == j / c {
            k[(i % c, j % c)]
        } else {
            0.0
        }
    });
    let ve = DMatrix::from_fn(2 * c, 2 * c, |i, j| {
        let z = vq[(i % c, j % c)];
        match (i / c, j / c) {
            (0, 0) | (1, 1) => z.re,
            (0, 1) => -z.im,
            _ => z.im,
        }
    });
    (ke, ve)
}

/// Condition number of diag(V)^-1/2 V diag(V)^-1/2 (infinite when V is
/// not positive definite).
pub fn equilibrated_condition(v: &DMatrix<f64>) -> f64 {
    let n = v.nrows();
    let sym = (v + v.transpose()) * 0.5;
    let scaled = DMatrix::from_fn(n, n, |i, j| {
        sym[(i, j)] / (sym[(i, i)].abs().sqrt() * sym[(j, j)].abs().sqrt())
    });
    condition_number(&scaled)
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
    // Eigenvalues only: the same QR iterations without the eigenvectors.
    let eig = sym.symmetric_eigenvalues();
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
    sym.symmetric_eigenvalues()
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
