//! The residual theory per q, for periodic and infinite arrays (the
//! conventions of [`crate::core::qspace`]: V(q) = sum_n V^(n) e^{iqn}, a family
//! with cell vectors p_n at offset n has P(q) = sum_n p_n e^{-iqn}).
//!
//! Every matrix of the dense construction is translation invariant, so it
//! is block diagonal in q and each block is the dense algebra with
//! transposes replaced by Hermitian conjugates (as for D itself): W(q) =
//! ker P(q)^H, R(q) = K_c^-1 P(q), B(q) a basis of ker [P^H; R^H], K_P(q) =
//! B^H K_c B (Hermitian, no longer diagonal), V_P(q) = B^H V B - B^H V R
//! (R^H V R)^-1 R^H V B, and D_P(q) = B D(K_P, V_P) B^H with the Hermitian
//! fixed point D(K, V) = C^-H |S|^-1 C^-1, C C^H = V, S = C^-1 K C^-H (the
//! method of [`crate::core::fixed_point`] with complex entries). A family commutes
//! with every translate of another iff L(q)^H K^-1 P(q) = 0 for all q.
//!
//! Bases per q are numerical and orthonormal: span P(q) from the singular
//! value decomposition (rank: singular values above [`RANK_TOLERANCE`]
//! times the largest), B(q) from the eigenvectors of the projector onto
//! the orthogonal complement of span [P, R]. The rank can drop at single q
//! (a family such as phi_j - phi_{j+1} has P(0) = 0): on a finite ring that
//! drop is physical (the translates are dependent there). On the infinite
//! array the integrand is the limit from either side, so the infinite
//! array uses the midpoint rule q = 2 pi (k + 1/2) / N, whose points avoid
//! q = 0 and pi and every root of unity of order below 2N.

use nalgebra::{DMatrix, DVector, SymmetricEigen};
use num_complex::Complex64;

use super::Form;
use crate::core::qspace::{self, NotPositive, Quadrature};

/// Relative size below which a singular value of P(q) counts as zero.
pub const RANK_TOLERANCE: f64 = 1e-9;

/// A quadrature rule for the pinned integrals.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Rule {
    /// The W points q = 2 pi k / W of a periodic ring of W wires (exact).
    Ring(usize),
    /// The midpoint rule q = 2 pi (k + 1/2) / N of the infinite array (N even).
    Midpoint(usize),
}

impl Rule {
    /// (q, weight) of the points with q in [0, pi] (each q != 0, pi stands
    /// for itself and -q; D_P(-q) is the conjugate of D_P(q)).
    pub fn points(self) -> Vec<(f64, f64)> {
        match self {
            Rule::Ring(w) => (0..qspace::half(w))
                .map(|k| (qspace::q_of(k, w), qspace::weight(k, w)))
                .collect(),
            Rule::Midpoint(n) => (0..n / 2)
                .map(|k| (std::f64::consts::PI * (2 * k + 1) as f64 / n as f64, 2.0))
                .collect(),
        }
    }

    /// Total number of points N.
    pub fn size(self) -> usize {
        match self {
            Rule::Ring(n) | Rule::Midpoint(n) => n,
        }
    }
}

/// sum_n v_n e^{-iqn} of (offset, cell vector) parts.
pub fn fourier(parts: &[(usize, Vec<f64>)], cell: usize, q: f64) -> DVector<Complex64> {
    let mut out = DVector::from_element(cell, Complex64::new(0.0, 0.0));
    for (off, v) in parts {
        let ph = Complex64::from_polar(1.0, -q * *off as f64);
        for (a, x) in v.iter().enumerate() {
            out[a] += ph * *x;
        }
    }
    out
}

/// An orthonormal basis of the column span (numerical rank, see
/// [`RANK_TOLERANCE`]).
pub fn span(p: &DMatrix<Complex64>) -> DMatrix<Complex64> {
    let n = p.nrows();
    if p.ncols() == 0 {
        return DMatrix::zeros(n, 0);
    }
    let svd = p.clone().svd(true, false);
    let u = svd.u.expect("left singular vectors were requested");
    let top = svd.singular_values.iter().cloned().fold(0.0, f64::max);
    let keep: Vec<usize> = (0..svd.singular_values.len())
        .filter(|&i| top > 0.0 && svd.singular_values[i] > RANK_TOLERANCE * top)
        .collect();
    DMatrix::from_fn(n, keep.len(), |i, j| u[(i, keep[j])])
}

/// An orthonormal basis of the orthogonal complement of the span of the
/// orthonormal-or-not columns of `m` (numerical rank).
pub fn complement(m: &DMatrix<Complex64>) -> DMatrix<Complex64> {
    let n = m.nrows();
    let s = span(m);
    let proj = DMatrix::<Complex64>::identity(n, n) - &s * s.adjoint();
    let proj = (&proj + proj.adjoint()) * Complex64::new(0.5, 0.0);
    let eig = SymmetricEigen::new(proj);
    let keep: Vec<usize> = (0..n).filter(|&i| eig.eigenvalues[i] > 0.5).collect();
    DMatrix::from_fn(n, keep.len(), |i, j| eig.eigenvectors[(i, keep[j])])
}

/// The Hermitian fixed point D(K, V) for Hermitian K (non-degenerate) and
/// Hermitian positive definite V; the smallest eigenvalue of V otherwise.
pub fn hermitian_d(
    k: &DMatrix<Complex64>,
    v: &DMatrix<Complex64>,
) -> Result<DMatrix<Complex64>, f64> {
    let n = k.nrows();
    let c = qspace::cholesky(v).ok_or_else(|| qspace::smallest_eigenvalue(v))?;
    let mut cinv = DMatrix::<Complex64>::identity(n, n);
    if !c.solve_lower_triangular_mut(&mut cinv) {
        return Err(qspace::smallest_eigenvalue(v));
    }
    let s = &cinv * k * cinv.adjoint();
    let s = (&s + s.adjoint()) * Complex64::new(0.5, 0.0);
    let eig = SymmetricEigen::new(s);
    let mut scaled = eig.eigenvectors.clone();
    for (j, e) in eig.eigenvalues.iter().enumerate() {
        for i in 0..n {
            scaled[(i, j)] *= 1.0 / e.abs();
        }
    }
    let inner = scaled * eig.eigenvectors.adjoint();
    let d = cinv.adjoint() * inner * &cinv;
    Ok((&d + d.adjoint()) * Complex64::new(0.5, 0.0))
}

fn complex(m: &DMatrix<f64>) -> DMatrix<Complex64> {
    m.map(|x| Complex64::new(x, 0.0))
}

/// Exact form at one q: D_P(q) = B D(K_P, V_P) B^H (n_c x n_c), from K_c,
/// its inverse, V(q) and an orthonormal basis `ps` of span P(q).
pub fn exact_at(
    k: &DMatrix<f64>,
    kinv: &DMatrix<f64>,
    vq: &DMatrix<Complex64>,
    ps: &DMatrix<Complex64>,
) -> Result<DMatrix<Complex64>, f64> {
    let n = k.nrows();
    let r = span(&(complex(kinv) * ps));
    let mut both = DMatrix::zeros(n, ps.ncols() + r.ncols());
    both.columns_mut(0, ps.ncols()).copy_from(ps);
    both.columns_mut(ps.ncols(), r.ncols()).copy_from(&r);
    let b = complement(&both);
    if b.ncols() == 0 {
        return Ok(DMatrix::zeros(n, n));
    }
    let k_p = b.adjoint() * complex(k) * &b;
    let mut v_p = b.adjoint() * vq * &b;
    if r.ncols() > 0 {
        let rvr = r.adjoint() * vq * &r;
        let rvb = r.adjoint() * vq * &b;
        let x = rvr
            .clone()
            .lu()
            .solve(&rvb)
            .ok_or_else(|| qspace::smallest_eigenvalue(&rvr))?;
        v_p -= rvb.adjoint() * x;
    }
    let v_p = (&v_p + v_p.adjoint()) * Complex64::new(0.5, 0.0);
    let k_p = (&k_p + k_p.adjoint()) * Complex64::new(0.5, 0.0);
    let d = hermitian_d(&k_p, &v_p)?;
    let out = &b * d * b.adjoint();
    Ok((&out + out.adjoint()) * Complex64::new(0.5, 0.0))
}

/// Reference-velocity form at one q: D - D P (P^H D P)^-1 P^H D with `ps`
/// an orthonormal basis of span P(q).
pub fn reference_at(d: &DMatrix<Complex64>, ps: &DMatrix<Complex64>) -> DMatrix<Complex64> {
    if ps.ncols() == 0 {
        return d.clone();
    }
    let dp = d * ps;
    let pdp = ps.adjoint() * &dp;
    let n = d.nrows();
    let x = pdp
        .lu()
        .solve(&dp.adjoint())
        .unwrap_or_else(|| DMatrix::from_element(ps.ncols(), n, Complex64::new(f64::NAN, 0.0)));
    let out = d - &dp * x;
    (&out + out.adjoint()) * Complex64::new(0.5, 0.0)
}

/// The model data the per-q integrals need.
#[derive(Debug, Clone, Copy)]
pub struct QInput<'a> {
    /// K of one wire's cell.
    pub k: &'a DMatrix<f64>,
    /// Its inverse.
    pub kinv: &'a DMatrix<f64>,
    /// V blocks V^(0), V^(1), ...
    pub blocks: &'a [DMatrix<f64>],
    /// Pinned families as (offset, cell lattice vector) parts.
    pub pins: &'a [Vec<(usize, Vec<f64>)>],
    /// Terms whose pinned dimension is wanted, as parts.
    pub terms: &'a [Vec<(usize, Vec<f64>)>],
}

/// What one rule gives: every term's (1/2) int dq/2pi L^H D_P L, and the
/// smallest and largest rank of P(q) over the points.
#[derive(Debug, Clone)]
pub struct OnRule {
    /// Pinned bosonic dimension per term (meaningful for commuting terms).
    pub dimensions: Vec<f64>,
    /// [smallest, largest] rank of P(q) over the rule's points.
    pub ranks: [usize; 2],
}

/// Integrate on one rule.
pub fn on_rule(input: &QInput, rule: Rule, form: Form) -> Result<OnRule, NotPositive> {
    let cell = input.k.nrows();
    let mut acc = vec![0.0; input.terms.len()];
    let mut ranks = [usize::MAX, 0];
    for (q, w) in rule.points() {
        let vq = qspace::v_of_q(input.blocks, q);
        let cols: Vec<DVector<Complex64>> =
            input.pins.iter().map(|p| fourier(p, cell, q)).collect();
        let ps = span(&DMatrix::from_fn(cell, cols.len(), |i, j| cols[j][i]));
        ranks = [ranks[0].min(ps.ncols()), ranks[1].max(ps.ncols())];
        let fail = |e: f64| NotPositive {
            q,
            smallest_eigenvalue: e,
        };
        let d_p = match form {
            Form::Exact => exact_at(input.k, input.kinv, &vq, &ps).map_err(fail)?,
            Form::Reference => reference_at(&qspace::solve_q(input.k, &vq).map_err(fail)?.d, &ps),
        };
        for (a, t) in input.terms.iter().enumerate() {
            let l = fourier(t, cell, q);
            acc[a] += w * (l.adjoint() * &d_p * &l)[(0, 0)].re;
        }
    }
    let n = rule.size() as f64;
    Ok(OnRule {
        dimensions: acc.into_iter().map(|x| x / (2.0 * n)).collect(),
        ranks,
    })
}

/// The infinite array: the midpoint rule doubled from
/// [`qspace::start_points`]`(range)` until every dimension changes by at
/// most `tolerance` (or N reaches [`qspace::MAX_POINTS`]).
pub fn converge(
    input: &QInput,
    range: usize,
    form: Form,
    tolerance: f64,
) -> Result<(OnRule, Quadrature), NotPositive> {
    let mut n = qspace::start_points(range);
    let mut prev = on_rule(input, Rule::Midpoint(n), form)?;
    loop {
        n *= 2;
        let next = on_rule(input, Rule::Midpoint(n), form)?;
        let change = next
            .dimensions
            .iter()
            .zip(&prev.dimensions)
            .map(|(a, b)| (a - b).abs())
            .fold(0.0, f64::max);
        let converged = qspace::settled(&next.dimensions, &prev.dimensions, tolerance);
        if converged || n >= qspace::MAX_POINTS {
            let quad = Quadrature {
                points: n,
                error_estimate: change,
                tolerance,
                converged,
            };
            return Ok((next, quad));
        }
        prev = next;
    }
}
