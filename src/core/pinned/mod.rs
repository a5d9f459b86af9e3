//! The residual Gaussian theory of a pinned set (docs/physics.md section
//! 8): what is left of a Luttinger liquid once a set P of null, local,
//! mutually commuting lattice vectors is pinned, and the scaling dimensions
//! of the operators that commute with it.
//!
//! Two forms, both returned as a "pinned D": a field-space matrix D_P with
//! Delta_P(l) = (1/2) l^T D_P l for every l with l^T K^-1 P = 0.
//!
//! - Exact form ([`exact`]): W = ker P^T, radical R = K^-1 P, B a basis of
//!   a complement of span R in W, K_P = B^T K B, V_P = B^T V B -
//!   B^T V R (R^T V R)^-1 R^T V B, l_P = B^T l and D_P = B D(K_P, V_P) B^T.
//! - Reference-velocity form ([`reference`]): D_P = D - D P (P^T D P)^-1
//!   P^T D, exact when V = D^-1 (all velocities equal).
//!
//! Derivation of l_P = B^T l (the pairing). The action is (1/4pi) int
//! [phi^T K d_t d_x phi - d_x phi^T V d_x phi]. Pinning P fixes p^T phi, so
//! the fluctuations live in W: phi = B a + R b (columns of B and R are
//! field-space vectors, elements of W). The Berry term phi^T K phi' has
//! R^T K w = P^T K^-1 K w = P^T w = 0 for every w in W, so b has no
//! dynamics: the Berry term is a^T K_P a'. The V term is quadratic in (a,
//! b); integrating out b (b = -(R^T V R)^-1 R^T V B a, exact at Gaussian
//! level) leaves a^T V_P a. An operator exp(i l.phi) is a linear form on
//! fields, so l.phi = l^T B a + l^T R b, and l^T R = (R^T l)^T =
//! (P^T K^-1 l)^T = 0 when l commutes with P: l.phi = (B^T l).a. The
//! lattice vector l (a covector: it pairs with fields, not with K) is
//! therefore restricted by B^T, and Delta_P(l) = (1/2) (B^T l)^T D(K_P,
//! V_P) (B^T l) = (1/2) l^T [B D(K_P, V_P) B^T] l. Nothing depends on the
//! choice of B: B -> B G (G invertible) gives K_P -> G^T K_P G, V_P -> G^T
//! V_P G, D(K_P, V_P) -> G^-1 D G^-T, so B D B^T is unchanged; the same
//! holds for R -> R H in V_P. K_P is non-degenerate: the radical of K on W
//! is W ∩ K^-1 W^perp = W ∩ span R = span R, which B avoids.
//!
//! Construction of B (exact): B is the integer kernel of the 2r x N matrix
//! [P^T; P^T adj K] (adj K = det K K^-1), i.e. the w in W with R^T w = 0.
//! It meets span R only in 0 (R y with R^T R y = 0 forces y = 0) and has
//! dimension N - 2r, so it is a complement of span R in W. The integer
//! kernel comes from the Smith normal form ([`crate::math::smith`]); the
//! numerics then use an orthonormal basis of the same span (thin QR), which
//! the result does not depend on but which keeps the products well
//! conditioned. R is restricted to independent columns (exact rank). The
//! integer kernel of an open strip can grow geometrically along it (entries
//! 2^511 on the 512-wire filling-1/3 strip with its tunnelling term
//! pinned), so each huge column is scaled by a power of two before it
//! becomes floats ([`to_f64_scaled`]); the span, all that matters, is kept.
//!
//! Per q (periodic and infinite arrays) the same algebra holds block by
//! block with Hermitian conjugates, see [`q`]. The pinned set itself (names,
//! validation, commutation and the evaluation at a point) is in [`set`].

pub mod q;
pub mod set;

use nalgebra::DMatrix;
use num_bigint::BigInt;
use num_traits::{ToPrimitive, Zero};

use crate::core::fixed_point::FixedPoint;
use crate::math::bareiss;
use crate::math::rational::{self as exact, Rational};
use crate::math::smith;
use crate::math::zmat::ZMat;

/// Which form of the residual theory.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Form {
    /// Schur complement with the real V (what a fixed-point report gives).
    Exact,
    /// D_P = D - D P (P^T D P)^-1 P^T D (what a flow carrying D continues).
    Reference,
}

/// Indices of a maximal independent subset of the vectors (exact rank over
/// the rationals, first come first kept).
pub fn independent(vectors: &[Vec<i64>]) -> Vec<usize> {
    // The vectors as columns: the independent ones are the pivot columns.
    let n = vectors.first().map_or(0, |v| v.len());
    let rows: Vec<Vec<BigInt>> = (0..n)
        .map(|i| vectors.iter().map(|v| BigInt::from(v[i])).collect())
        .collect();
    if rows.is_empty() {
        return Vec::new();
    }
    bareiss::pivot_columns(&rows)
}

/// The exact complement basis B (N x (N - 2r) integer columns): the integer
/// kernel of [P^T; P^T adj K]. `p` are lattice vectors (any spanning set);
/// None when K is singular.
pub fn complement_basis(k: &[Vec<i64>], p: &[Vec<i64>]) -> Option<ZMat> {
    let n = k.len();
    let (det, inv) = bareiss::det_and_inverse(k)?;
    let mut rows: Vec<Vec<BigInt>> = p
        .iter()
        .map(|v| v.iter().map(|&x| BigInt::from(x)).collect())
        .collect();
    for v in p {
        // (adj K p)_i = det * sum_j (K^-1)_{ij} p_j, an integer.
        let on = nonzero(v);
        let row = (0..n)
            .map(|i| {
                let s = sparse_dot(&inv[i], v, &on);
                (s * Rational::from_integer(det.clone())).to_integer()
            })
            .collect();
        rows.push(row);
    }
    if rows.is_empty() {
        return Some(ZMat::identity(n));
    }
    Some(smith::kernel(&ZMat::from_rows(&rows, n)))
}

/// sum_j a_j b_j over the indices `on` where b is non-zero (K^-1 of an
/// array is block diagonal and a pinned vector touches a few wires: most
/// terms vanish).
fn sparse_dot(a: &[Rational], b: &[i64], on: &[usize]) -> Rational {
    on.iter()
        .filter(|&&j| !a[j].is_zero())
        .map(|&j| &a[j] * exact::int(b[j]))
        .sum()
}

/// Indices of the non-zero entries.
fn nonzero(v: &[i64]) -> Vec<usize> {
    (0..v.len()).filter(|&j| v[j] != 0).collect()
}

/// An integer matrix as floats (entries beyond f64 become infinite and are
/// caught by the finiteness checks of the callers).
pub fn to_f64(m: &ZMat) -> DMatrix<f64> {
    DMatrix::from_fn(m.rows, m.cols, |i, j| {
        m.at(i, j).to_f64().unwrap_or(f64::INFINITY)
    })
}

/// Columns with an entry of more bits than this are scaled by a power of
/// two in [`to_f64_scaled`]: below it, the sum of squares of 2^20 entries
/// (a column's norm) stays finite.
pub const SCALE_ABOVE_BITS: u64 = 500;

/// An integer matrix as floats, each column whose largest entry has more
/// than [`SCALE_ABOVE_BITS`] bits divided by a power of two so that its
/// largest entry lies in [1, 2) (entries below 2^-1074 of it become 0).
/// Only the span of the columns matters to the callers, and a power of two
/// changes no bit of the others. Why: the complement basis of a pinned open
/// strip can grow geometrically along it (the 512-wire filling-1/3 strip
/// with its tunnelling term pinned has entries 2^511, whose squares
/// overflow), while its span is perfectly well conditioned.
pub fn to_f64_scaled(m: &ZMat) -> DMatrix<f64> {
    let shift: Vec<i64> = (0..m.cols)
        .map(|j| {
            let bits = (0..m.rows).map(|i| m.at(i, j).bits()).max().unwrap_or(0);
            if bits > SCALE_ABOVE_BITS {
                bits as i64 - 1
            } else {
                0
            }
        })
        .collect();
    DMatrix::from_fn(m.rows, m.cols, |i, j| scaled(m.at(i, j), shift[j]))
}

/// x 2^-s, rounded (relative error below 2^-62; 0 below the subnormals).
pub fn scaled(x: &BigInt, s: i64) -> f64 {
    if s == 0 {
        return x.to_f64().unwrap_or(f64::INFINITY);
    }
    let cut = x.bits().saturating_sub(64);
    // |top| < 2^64, exact as a BigInt, rounded once to f64.
    let top = (x >> cut).to_f64().unwrap_or(0.0);
    let e = cut as i64 - s;
    // Two factors, each a normal power of two for |e| up to 2 x 1022.
    let half = e / 2;
    top * pow2(half) * pow2(e - half)
}

/// 2^e as a float for |e| <= 1022 (0 or infinity beyond).
fn pow2(e: i64) -> f64 {
    if e < -1022 {
        0.0
    } else if e > 1023 {
        f64::INFINITY
    } else {
        f64::from_bits(((e + 1023) as u64) << 52)
    }
}

/// Columns as a matrix (N x len).
pub fn columns(n: usize, vectors: &[&[i64]]) -> DMatrix<f64> {
    DMatrix::from_fn(n, vectors.len(), |i, j| vectors[j][i] as f64)
}

/// An orthonormal basis of the column span of a full-column-rank matrix.
pub fn orthonormal(m: &DMatrix<f64>) -> DMatrix<f64> {
    if m.ncols() == 0 {
        return m.clone();
    }
    m.clone().qr().q()
}

/// The data the exact form needs besides V: the field-space bases B
/// (complement) and R (radical), orthonormalised.
#[derive(Debug, Clone)]
pub struct Split {
    /// Complement of span R in W (N x (N - 2r)).
    pub b: DMatrix<f64>,
    /// Radical K^-1 P (N x r).
    pub r: DMatrix<f64>,
    /// Rank r of the pinned set.
    pub rank: usize,
}

impl Split {
    /// Build the split for K (integer, dense) and pinned lattice vectors
    /// (any spanning set); None when K is singular.
    pub fn new(k: &[Vec<i64>], p: &[Vec<i64>]) -> Option<Split> {
        let n = k.len();
        let keep = independent(p);
        let p_ind: Vec<Vec<i64>> = keep.iter().map(|&i| p[i].clone()).collect();
        let b = complement_basis(k, &p_ind)?;
        let (_, inv) = bareiss::det_and_inverse(k)?;
        let on: Vec<Vec<usize>> = p_ind.iter().map(|v| nonzero(v)).collect();
        let r = DMatrix::from_fn(n, p_ind.len(), |i, j| {
            exact::to_f64(&sparse_dot(&inv[i], &p_ind[j], &on[j]))
        });
        Some(Split {
            b: orthonormal(&to_f64_scaled(&b)),
            r: orthonormal(&r),
            rank: p_ind.len(),
        })
    }

    /// The same split with a given (not orthonormalised) complement basis,
    /// for tests of the independence of B.
    pub fn with_basis(&self, b: DMatrix<f64>) -> Split {
        Split {
            b,
            r: self.r.clone(),
            rank: self.rank,
        }
    }
}

/// Exact form: D_P = B D(K_P, V_P) B^T (N x N). `Err` carries the smallest
/// eigenvalue of the matrix that is not positive definite (V_P, or R^T V R).
pub fn exact(k: &DMatrix<f64>, v: &DMatrix<f64>, split: &Split) -> Result<DMatrix<f64>, f64> {
    let (b, r) = (&split.b, &split.r);
    let n = k.nrows();
    if b.ncols() == 0 {
        return Ok(DMatrix::zeros(n, n));
    }
    let k_p = b.transpose() * k * b;
    let k_p = (&k_p + k_p.transpose()) * 0.5;
    let mut v_p = b.transpose() * v * b;
    if r.ncols() > 0 {
        let rvr = r.transpose() * v * r;
        let chol = rvr.clone().cholesky().ok_or_else(|| smallest(&rvr))?;
        let rvb = r.transpose() * v * b;
        v_p -= rvb.transpose() * chol.solve(&rvb);
    }
    let v_p = (&v_p + v_p.transpose()) * 0.5;
    let fp = FixedPoint::solve(&k_p, &v_p)?;
    let d = b * fp.d * b.transpose();
    Ok((&d + d.transpose()) * 0.5)
}

/// Reference-velocity form: D_P = D - D P (P^T D P)^-1 P^T D, with P
/// columns of pinned lattice vectors (independent).
pub fn reference(d: &DMatrix<f64>, p: &DMatrix<f64>) -> DMatrix<f64> {
    if p.ncols() == 0 {
        return d.clone();
    }
    let dp = d * p;
    let pdp = p.transpose() * &dp;
    let x = match pdp.clone().cholesky() {
        Some(c) => c.solve(&dp.transpose()),
        None => pdp
            .lu()
            .solve(&dp.transpose())
            .unwrap_or_else(|| DMatrix::from_element(p.ncols(), d.nrows(), f64::NAN)),
    };
    let out = d - &dp * x;
    (&out + out.transpose()) * 0.5
}

/// (1/2) l^T D_P l.
pub fn dimension(d_p: &DMatrix<f64>, l: &[i64]) -> f64 {
    crate::core::fixed_point::quad_form(d_p, l)
}

/// l^T K^-1 p = 0 for every pinned p (exact), given K^-1 rationally.
pub fn commutes(kinv: &[Vec<Rational>], l: &[i64], p: &[Vec<i64>]) -> bool {
    let m = exact::solve_with(kinv, l);
    p.iter().all(|v| exact::dot_int(&m, v).is_zero())
}

fn smallest(m: &DMatrix<f64>) -> f64 {
    let s = (m + m.transpose()) * 0.5;
    s.symmetric_eigenvalues()
        .iter()
        .cloned()
        .fold(f64::INFINITY, f64::min)
}

#[cfg(test)]
mod tests;
