//! Integral Gram-Schmidt of independent integer vectors in envelope
//! (skyline) form: only the numbers, never the orthogonalised vectors.
//!
//! For a basis b_0..b_{k-1} with Gram matrix G: d_0 = 1 and d_{j+1} = det
//! of the Gram matrix of b_0..b_j; I_j = d_j b*_j (an integer vector) and
//! lambda_{j,l} = <b_j, I_l> = d_{l+1} mu_{j,l} for l < j, all integers
//! [Cohen, "A Course in Computational Algebraic Number Theory" (1993),
//! section 2.6.3, integral LLL, from memory]. Recurrence (0-based, derived
//! from the fraction-free one for I_j): u = G_jl; for i < l,
//! u <- (d_{i+1} u - lambda_{j,i} lambda_{l,i}) / d_i, exact; the result is
//! lambda_{j,l} (l < j) or d_{j+1} (l = j).
//!
//! Envelope: lambda_{j,l} = 0 for l below the first non-zero entry f_j of
//! row j of G (the LDL^T factor of a matrix has no fill outside its
//! envelope; here by induction: u starts at 0 and every product vanishes),
//! so only l in f_j..j is stored, and the steps i < max(f_j, f_l), where
//! the product vanishes, collapse to one factor d_m / d_0 = d_m. For the
//! banded Gram matrices of local vectors along an array the work is
//! O(k w^2) instead of the O(k^2 n) of forming every I_j.
//!
//! Owns: [`EnvelopeGs`]. Invariants: exact big-integer arithmetic, every
//! division exact; the numbers equal those of the dense recurrence (a test
//! compares them).

use num_bigint::BigInt;
use num_traits::{One, Zero};

use super::rational::Rational;
use super::zmat::ZMat;

/// The integral Gram-Schmidt numbers of a basis, in envelope form.
#[derive(Debug, Clone)]
pub struct EnvelopeGs {
    /// f_j: first column of row j of G that is non-zero (j if none before).
    first: Vec<usize>,
    /// lambda_{j,l} for l in f_j..j, at index l - f_j.
    lambda: Vec<Vec<BigInt>>,
    /// d_0 = 1, then d_1..d_k.
    d: Vec<BigInt>,
}

impl EnvelopeGs {
    /// From the Gram matrix of independent vectors (positive definite).
    pub fn from_gram(g: &ZMat) -> EnvelopeGs {
        let k = g.rows;
        let first: Vec<usize> = (0..k)
            .map(|j| (0..j).find(|&l| !g.at(j, l).is_zero()).unwrap_or(j))
            .collect();
        let mut gs = EnvelopeGs {
            first,
            lambda: Vec::with_capacity(k),
            d: vec![BigInt::one()],
        };
        for j in 0..k {
            let fj = gs.first[j];
            let mut row: Vec<BigInt> = Vec::with_capacity(j - fj);
            for l in fj..=j {
                let m = fj.max(gs.first[l]);
                let other = if l < j { Some(l) } else { None };
                let u = gs.entry(g.at(j, l), m, l, &row, other);
                if l < j {
                    row.push(u);
                } else {
                    gs.d.push(u);
                }
            }
            gs.lambda.push(row);
        }
        gs
    }

    /// From Gram-Schmidt data kept by an LLL reduction (mu_jl for l < j in
    /// row j, B_j): d_{j+1} = B_0 ... B_j and lambda_{j,l} = d_{l+1} mu_jl,
    /// integers (debug-checked); the envelope is that of the non-zero mu.
    pub fn from_gs(mu: &[Vec<Rational>], bb: &[Rational]) -> EnvelopeGs {
        let k = bb.len();
        let mut d = vec![BigInt::one()];
        for (j, b) in bb.iter().enumerate() {
            d.push(to_integer(&(b * Rational::from_integer(d[j].clone()))));
        }
        let first: Vec<usize> = (0..k)
            .map(|j| (0..j).find(|&l| !mu[j][l].is_zero()).unwrap_or(j))
            .collect();
        let lambda = (0..k)
            .map(|j| {
                (first[j]..j)
                    .map(|l| to_integer(&(&mu[j][l] * Rational::from_integer(d[l + 1].clone()))))
                    .collect()
            })
            .collect();
        EnvelopeGs { first, lambda, d }
    }

    /// The recurrence for one entry: start from G_jl d_m, then steps
    /// i = m..l with lambda_{j,i} from `row` (row j so far: the entries
    /// f_j..l, so f_j = l - row.len()) and lambda_{l,i} from row `other`
    /// (None: from `row` too, the diagonal l = j).
    fn entry(
        &self,
        g_jl: &BigInt,
        m: usize,
        l: usize,
        row: &[BigInt],
        other: Option<usize>,
    ) -> BigInt {
        let fj = l - row.len();
        let mut u = g_jl * &self.d[m];
        for i in m..l {
            let a = &row[i - fj];
            let b = match other {
                Some(o) => &self.lambda[o][i - self.first[o]],
                None => a,
            };
            u = step(u, &self.d[i + 1], &self.d[i], a, b);
        }
        u
    }

    /// Number of basis vectors.
    pub fn len(&self) -> usize {
        self.first.len()
    }

    /// True for the empty basis.
    pub fn is_empty(&self) -> bool {
        self.first.is_empty()
    }

    /// d_j (d_0 = 1; d_{j+1} = det of the Gram matrix of b_0..b_j).
    pub fn d(&self, j: usize) -> &BigInt {
        &self.d[j]
    }

    /// The stored lambda_{j,l}, as (l, lambda_{j,l}) for l in f_j..j.
    pub fn row(&self, j: usize) -> impl Iterator<Item = (usize, &BigInt)> {
        let f = self.first[j];
        self.lambda[j]
            .iter()
            .enumerate()
            .map(move |(i, x)| (f + i, x))
    }

    /// x_j = <a, I_j> for every j, from the dots <a, b_j> (same recurrence
    /// with a as an extra vector; entries outside the envelope of b_j
    /// vanish as above).
    pub fn coords(&self, dots: &[BigInt]) -> Vec<BigInt> {
        let mut x: Vec<BigInt> = Vec::with_capacity(self.len());
        for (j, dot) in dots.iter().enumerate().take(self.len()) {
            let f = self.first[j];
            let mut u = dot * &self.d[f];
            for (i, lam) in self.row(j) {
                u = step(u, &self.d[i + 1], &self.d[i], &x[i], lam);
            }
            x.push(u);
        }
        x
    }
}

/// A rational known to be an integer.
fn to_integer(x: &Rational) -> BigInt {
    debug_assert!(x.is_integer(), "integral Gram-Schmidt number");
    x.to_integer()
}

/// One step of the recurrence: (d_next u - a b) / d, an exact division.
fn step(u: BigInt, d_next: &BigInt, d: &BigInt, a: &BigInt, b: &BigInt) -> BigInt {
    let mut t = d_next * u;
    if !a.is_zero() && !b.is_zero() {
        t -= a * b;
    }
    if t.is_zero() || d.is_one() {
        return t;
    }
    debug_assert!((&t % d).is_zero(), "exact division");
    t / d
}
