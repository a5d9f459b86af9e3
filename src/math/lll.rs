//! LLL reduction of a definite quadratic form [Lenstra, Lenstra & Lovász,
//! Math. Ann. 261, 515 (1982)], in two arithmetics, both returning an exact
//! unimodular change of basis U (columns: the new basis in old
//! coordinates) with U^T G U reduced.
//!
//! - [`exact`]: rational Gram-Schmidt data from an integer Gram matrix,
//!   delta = 99/100. Used where the reduced form itself is the result
//!   (readable K matrices and bases in `math/reduce.rs`), so it must be
//!   exact and reproducible on any machine, whatever the size of the
//!   entries.
//! - [`float`]: the same steps on an f64 Gram matrix, delta = 0.99, with U
//!   kept in exact 64-bit integers. Used by the Fincke-Pohst enumeration
//!   (`math/ellipsoid.rs`), whose forms are real (scaling dimensions),
//!   where reduction only shapes the search tree: the set of points found
//!   does not depend on how well the basis is reduced, because U is exact
//!   and unimodular. Floats there make it fast on forms of dimension 20-60.
//!
//! Invariants: U is unimodular (only swaps and b_k -= q b_j moves); the
//! exact variant never rounds; the float variant fails rather than return
//! a U that overflowed or a form that is numerically singular. The tests
//! borrow their lattices from the tests of `math/reduce.rs` (random
//! unimodular scramblings) and `math/ellipsoid.rs` (a scrambled E8).

use nalgebra::DMatrix;
use num_bigint::BigInt;
use num_traits::{One, Zero};

use super::zmat::{self, ZMat};
use crate::math::rational::Rational;

/// Cap on the exact reduction's steps (it ends anyway; the cap bounds the
/// time on huge entries).
const MAX_EXACT_STEPS: usize = 1_000_000;

/// Nearest integer (halves rounded up).
pub fn round_rational(x: &Rational) -> BigInt {
    let half = Rational::new(BigInt::one(), BigInt::from(2));
    (x + half).floor().to_integer()
}

/// Exact LLL of sign * G (G definite, sign = +1 or -1).
pub fn exact_definite(g: &ZMat, sign: i32) -> ZMat {
    if sign > 0 {
        exact(g)
    } else {
        let neg = ZMat::from_rows(
            &g.to_rows()
                .into_iter()
                .map(|r| r.into_iter().map(|x| -x).collect())
                .collect::<Vec<_>>(),
            g.cols,
        );
        exact(&neg)
    }
}

/// Exact LLL reduction (delta = 99/100) of a positive definite Gram
/// matrix: returns unimodular U with U^T G U reduced.
pub fn exact(g: &ZMat) -> ZMat {
    exact_with_gs(g).0
}

/// Gram-Schmidt data of a basis: mu_kj (j < k, row k) and B_k = |b*_k|^2.
pub type GsData = (Vec<Vec<Rational>>, Vec<Rational>);

/// [`exact`], also returning the Gram-Schmidt data of the reduced basis
/// that the reduction keeps anyway (None if it stopped at its step cap,
/// where the last rows may be stale). At the end every row k was last
/// computed from the final form after every swap below it, and size
/// reduction updates it exactly, so the data are exact.
pub fn exact_with_gs(g: &ZMat) -> (ZMat, Option<GsData>) {
    let n = g.rows;
    let mut u = ZMat::identity(n);
    let mut mu = vec![vec![Rational::zero(); n]; n];
    let mut bb = vec![Rational::zero(); n];
    if n == 0 {
        return (u, Some((mu, bb)));
    }
    bb[0] = Rational::from_integer(g.at(0, 0).clone());
    if n < 2 {
        return (u, Some((mu, bb)));
    }
    let delta = Rational::new(BigInt::from(99), BigInt::from(100));
    let mut gm = g.clone();
    let mut k = 1;
    let mut guard = 0usize;
    while k < n {
        guard += 1;
        if guard > MAX_EXACT_STEPS {
            return (u, None);
        }
        if k == 1 {
            bb[0] = Rational::from_integer(gm.at(0, 0).clone());
        }
        gram_schmidt_row(&gm, &mut mu, &mut bb, k);
        size_reduce_exact(&mut gm, &mut u, &mut mu, k);
        // Size reduction leaves b*_k, hence B_k, unchanged.
        let rhs = (&delta - &mu[k][k - 1] * &mu[k][k - 1]) * &bb[k - 1];
        if bb[k] >= rhs {
            k += 1;
        } else {
            gm.swap_rows(k, k - 1);
            gm.swap_cols(k, k - 1);
            u.swap_cols(k, k - 1);
            k = (k - 1).max(1);
        }
    }
    (u, Some((mu, bb)))
}

/// b_k -= round(mu_kj) b_j for j = k-1, ..., 0, updating row k of mu.
fn size_reduce_exact(gm: &mut ZMat, u: &mut ZMat, mu: &mut [Vec<Rational>], k: usize) {
    for j in (0..k).rev() {
        let q = round_rational(&mu[k][j]);
        if q.is_zero() {
            continue;
        }
        let neg = -&q;
        zmat::basis_move(gm, u, k, j, &neg);
        let qr = Rational::from_integer(q);
        let (lower, upper) = mu.split_at_mut(k);
        for (x, y) in upper[0].iter_mut().zip(&lower[j]).take(j) {
            if !y.is_zero() {
                *x -= &qr * y;
            }
        }
        upper[0][j] -= &qr;
    }
}

/// Gram-Schmidt coefficients of row k from the Gram matrix (rows < k known).
pub(crate) fn gram_schmidt_row(g: &ZMat, mu: &mut [Vec<Rational>], bb: &mut [Rational], k: usize) {
    for j in 0..k {
        let mut x = Rational::from_integer(g.at(k, j).clone());
        // Zero coefficients (common for sparse bases) are skipped.
        for l in 0..j {
            if !mu[j][l].is_zero() && !mu[k][l].is_zero() {
                x -= &mu[j][l] * &mu[k][l] * &bb[l];
            }
        }
        mu[k][j] = x / &bb[j];
    }
    bb[k] = Rational::from_integer(g.at(k, k).clone())
        - (0..k)
            .filter(|&l| !mu[k][l].is_zero())
            .fold(Rational::zero(), |acc, l| {
                acc + &mu[k][l] * &mu[k][l] * &bb[l]
            });
}

/// Lovász constant of the float reduction.
pub const LLL_DELTA: f64 = 0.99;

/// An LLL-reduced basis of the integer lattice under a real quadratic form.
#[derive(Debug, Clone)]
pub struct Reduced {
    /// Basis vectors in the original coordinates: `basis[j]` is column j of
    /// the unimodular change of basis U.
    pub basis: Vec<Vec<i64>>,
    /// U^T G U, recomputed from the exact U at the end.
    pub gram: DMatrix<f64>,
    /// Number of swaps the reduction made.
    pub swaps: usize,
    /// True when the reduction stopped at its iteration cap (the basis is
    /// then valid but less reduced; the enumeration is still exact).
    pub capped: bool,
}

/// State of one float reduction: the current form, U (by columns) and the
/// Gram-Schmidt data (mu, r_kj = mu_kj B_j, B_k).
struct FloatState {
    gram: DMatrix<f64>,
    u: Vec<Vec<i64>>,
    mu: Vec<Vec<f64>>,
    r: Vec<Vec<f64>>,
    bstar: Vec<f64>,
}

/// Float LLL of the form G (symmetric positive definite), with U exact.
/// Fails when G is numerically singular or U overflows 64-bit integers.
pub fn float(g: &DMatrix<f64>) -> Result<Reduced, String> {
    let n = g.nrows();
    let mut s = FloatState {
        gram: (g + g.transpose()) * 0.5,
        u: (0..n)
            .map(|j| (0..n).map(|i| (i == j) as i64).collect())
            .collect(),
        mu: vec![vec![0.0f64; n]; n],
        r: vec![vec![0.0f64; n]; n],
        bstar: vec![0.0f64; n],
    };
    let (mut swaps, mut capped) = (0usize, false);
    if n == 0 {
        return Ok(Reduced {
            basis: s.u,
            gram: s.gram,
            swaps,
            capped,
        });
    }
    s.gso_row(0)?;
    let cap = 20_000 + 2_000 * n * n;
    let (mut steps, mut k) = (0usize, 1);
    while k < n {
        steps += 1;
        if steps > cap {
            capped = true;
            break;
        }
        s.gso_row(k)?;
        s.size_reduce(k)?;
        // Recompute row k from the updated form (cheap, keeps rounding low).
        s.gso_row(k)?;
        let mu = s.mu[k][k - 1];
        if s.bstar[k] < (LLL_DELTA - mu * mu) * s.bstar[k - 1] {
            s.swap(k)?;
            swaps += 1;
            k = (k - 1).max(1);
        } else {
            k += 1;
        }
    }
    Ok(Reduced {
        gram: transform(g, &s.u),
        basis: s.u,
        swaps,
        capped,
    })
}

impl FloatState {
    /// b_k -= round(mu_kj) b_j for j = k-1, ..., 0: U exactly, the form and
    /// row k of mu in floats.
    fn size_reduce(&mut self, k: usize) -> Result<(), String> {
        let n = self.gram.nrows();
        for j in (0..k).rev() {
            let q = self.mu[k][j].round();
            if q == 0.0 {
                continue;
            }
            if q.abs() > 1e15 {
                return Err("the basis reduction diverged (entries beyond 1e15)".into());
            }
            let qi = q as i64;
            let (lower, upper) = self.u.split_at_mut(k);
            for (x, y) in upper[0].iter_mut().zip(&lower[j]) {
                *x = qi
                    .checked_mul(*y)
                    .and_then(|p| x.checked_sub(p))
                    .ok_or("the basis reduction overflowed 64-bit integers")?;
            }
            let gram = &mut self.gram;
            let gkk = gram[(k, k)] - 2.0 * q * gram[(k, j)] + q * q * gram[(j, j)];
            for i in 0..n {
                if i != k {
                    let x = gram[(k, i)] - q * gram[(j, i)];
                    gram[(k, i)] = x;
                    gram[(i, k)] = x;
                }
            }
            gram[(k, k)] = gkk;
            let (lower, upper) = self.mu.split_at_mut(k);
            for (x, y) in upper[0][..j].iter_mut().zip(&lower[j][..j]) {
                *x -= q * y;
            }
            self.mu[k][j] -= q;
        }
        Ok(())
    }

    /// Swap b_k and b_{k-1} and refresh the Gram-Schmidt row k - 1.
    fn swap(&mut self, k: usize) -> Result<(), String> {
        self.u.swap(k, k - 1);
        self.gram.swap_rows(k, k - 1);
        self.gram.swap_columns(k, k - 1);
        self.gso_row(k - 1)
    }

    /// Gram-Schmidt data of row k from the form (rows < k up to date).
    fn gso_row(&mut self, k: usize) -> Result<(), String> {
        let (mu, r) = (&mut self.mu, &mut self.r);
        for j in 0..k {
            let mut x = self.gram[(k, j)];
            for i in 0..j {
                x -= mu[j][i] * r[k][i];
            }
            r[k][j] = x;
            mu[k][j] = x / self.bstar[j];
        }
        let mut b = self.gram[(k, k)];
        for j in 0..k {
            b -= mu[k][j] * r[k][j];
        }
        if b.is_nan() || b <= 0.0 || b.is_infinite() {
            return Err(
                "the quadratic form is numerically singular (not positive definite in floating point)"
                    .into(),
            );
        }
        self.bstar[k] = b;
        Ok(())
    }
}

/// U^T G U for an integer U given by columns.
fn transform(g: &DMatrix<f64>, u: &[Vec<i64>]) -> DMatrix<f64> {
    let n = u.len();
    let um = DMatrix::from_fn(n, n, |i, j| u[j][i] as f64);
    let t = um.transpose() * g * &um;
    (&t + t.transpose()) * 0.5
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::math::ellipsoid::tests::{e8, gram, scrambled};
    use crate::math::reduce::tests::{diag, random_unimodular};
    use num_traits::Signed;
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    #[test]
    fn exact_lll_conditions_hold() {
        // The two defining conditions of an LLL-reduced basis (Lenstra,
        // Lenstra & Lovasz 1982, from memory), recomputed here by plain
        // Gram-Schmidt:
        // |mu_ij| <= 1/2 and B_k >= (delta - mu_{k,k-1}^2) B_{k-1}.
        let mut rng = ChaCha8Rng::seed_from_u64(3);
        for _ in 0..30 {
            let n = rng.gen_range(2..=5);
            let b = random_unimodular(&mut rng, n, 12);
            let scale: Vec<i64> = (0..n).map(|_| rng.gen_range(1..=4)).collect();
            let g = b.gram(&diag(&scale));
            let u = exact(&g);
            assert!(zmat::det(&u).abs().is_one(), "unimodular");
            let r = u.gram(&g);
            let mut mu = vec![vec![Rational::zero(); n]; n];
            let mut bb = vec![Rational::zero(); n];
            for k in 0..n {
                gram_schmidt_row(&r, &mut mu, &mut bb, k);
            }
            let half = Rational::new(BigInt::one(), BigInt::from(2));
            let delta = Rational::new(BigInt::from(99), BigInt::from(100));
            for k in 1..n {
                for m in &mu[k][..k] {
                    assert!(m.abs() <= half, "size reduced");
                }
                assert!(bb[k] >= (&delta - &mu[k][k - 1] * &mu[k][k - 1]) * &bb[k - 1]);
            }
            // The form is only rewritten: same determinant.
            assert_eq!(zmat::det(&r), zmat::det(&g));
        }
    }

    #[test]
    fn float_lll_basis_is_unimodular_and_reduced() {
        // Checks of the definition [Lenstra, Lenstra & Lovasz (1982)]: |det U|
        // = 1 (exact), U^T G U = reduced Gram, |mu_kj| <= 1/2 (+ rounding)
        // and the Lovasz condition with delta = 0.99.
        let g = gram(&scrambled(&e8()));
        let red = float(&g).unwrap();
        assert!(!red.capped);
        assert!(red.swaps > 0, "the scrambled basis needs reduction");
        let longest = (0..8).map(|i| g[(i, i)]).fold(0.0, f64::max);
        assert!(longest > 10.0, "the scrambled basis has long vectors");
        let n = g.nrows();
        let cols: Vec<Vec<i64>> = (0..n)
            .map(|i| (0..n).map(|j| red.basis[j][i]).collect())
            .collect();
        let det = crate::math::bareiss::det_and_inverse(&cols).unwrap().0;
        assert_eq!(num_traits::Signed::abs(&det), num_bigint::BigInt::from(1));
        // Gram-Schmidt of the reduced Gram matrix, recomputed here.
        let gr = &red.gram;
        let mut mu = vec![vec![0.0; n]; n];
        let mut b = vec![0.0; n];
        for k in 0..n {
            for j in 0..k {
                let mut x = gr[(k, j)];
                for i in 0..j {
                    x -= mu[j][i] * mu[k][i] * b[i];
                }
                mu[k][j] = x / b[j];
            }
            b[k] = gr[(k, k)] - (0..k).map(|j| mu[k][j] * mu[k][j] * b[j]).sum::<f64>();
        }
        for k in 1..n {
            assert!(
                mu[k][..k].iter().all(|x| x.abs() <= 0.5 + 1e-9),
                "size reduction"
            );
            assert!(b[k] >= (LLL_DELTA - mu[k][k - 1].powi(2)) * b[k - 1] - 1e-9);
        }
        // LLL's bound on the first vector [Lenstra, Lenstra & Lovasz (1982)]:
        // |b_1|^2 <= (delta - 1/4)^-(n-1) lambda_1^2, with lambda_1^2 = 2 for E8.
        let factor = (1.0 / (LLL_DELTA - 0.25)).powi(n as i32 - 1);
        assert!(gr[(0, 0)] <= factor * 2.0 + 1e-9);
    }
}
