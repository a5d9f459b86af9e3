//! The Smith normal form [H. J. S. Smith, Phil. Trans. R. Soc. 151, 293
//! (1861)] with both unimodular transforms and their inverses, and the
//! lattice operations built on it: integer kernel, saturation of a column
//! span, completion of a saturated set to a basis of Z^n. (The plain rank
//! of a matrix is [`crate::math::bareiss::rank`]; [`Smith::rank`] is the
//! number of invariant factors of a form already computed.)
//!
//! Algorithm (the textbook one, written here): pick the entry of least
//! absolute value in the remaining block as pivot, clear its row and column
//! with rounded quotients (remainders at most half the pivot) until nothing
//! else is left in them, and restore divisibility by adding a row that
//! holds a non-multiple. All arithmetic is in big integers.
//!
//! Facts used (P A Q = D, P and Q unimodular):
//! - the last n - rank columns of Q are a basis of the integer kernel of A,
//!   and that basis is saturated;
//! - the first rank columns of P^-1 span the saturation of the column span
//!   of A (span_Q(A) ∩ Z^m), and the remaining columns of P^-1 complete them
//!   to a basis of Z^m;
//! - Z^m / A Z^n ≅ ⊕ Z/d_i (the quasiparticle group when A = K), with the
//!   columns of P^-1 as generators.

use num_bigint::BigInt;
use num_integer::Integer;
use num_traits::{One, Signed, Zero};

use super::zmat::ZMat;
use crate::math::rational::Rational;

/// P A Q = D with D = diag(d_1, ..., d_rank, 0, ...), d_i > 0, d_i | d_{i+1}.
#[derive(Debug, Clone)]
pub struct Smith {
    /// The non-zero invariant factors d_1 | d_2 | ... (length = rank).
    pub diag: Vec<BigInt>,
    /// Row transform (m x m, unimodular).
    pub p: ZMat,
    /// Its inverse.
    pub p_inv: ZMat,
    /// Column transform (n x n, unimodular).
    pub q: ZMat,
    /// Its inverse.
    pub q_inv: ZMat,
}

impl Smith {
    /// Rank of A.
    pub fn rank(&self) -> usize {
        self.diag.len()
    }

    /// The rational solution of A x = b for a square invertible A (None if
    /// A is singular): x = Q D^-1 P b.
    pub fn solve(&self, b: &[BigInt]) -> Option<Vec<Rational>> {
        let n = self.q.rows;
        if self.p.rows != n || self.rank() != n {
            return None;
        }
        let y = self.p.mul_vec(b);
        let z: Vec<Rational> = y
            .into_iter()
            .zip(&self.diag)
            .map(|(yi, d)| Rational::new(yi, d.clone()))
            .collect();
        Some(
            (0..n)
                .map(|i| {
                    (0..n).fold(Rational::zero(), |acc, j| {
                        acc + Rational::from_integer(self.q.at(i, j).clone()) * &z[j]
                    })
                })
                .collect(),
        )
    }
}

/// Nearest-integer quotient of a by b (b != 0), so |a - q b| <= |b| / 2.
fn round_div(a: &BigInt, b: &BigInt) -> BigInt {
    let two = BigInt::from(2);
    let (q, r) = a.div_mod_floor(b);
    // r has the sign of b; move to the nearer multiple.
    if (&r * &two).abs() > b.abs() {
        q + BigInt::one()
    } else {
        q
    }
}

struct Work {
    a: ZMat,
    p: ZMat,
    p_inv: ZMat,
    q: ZMat,
    q_inv: ZMat,
}

impl Work {
    /// row_i -= f row_t (P alike; P^-1: col_t += f col_i).
    fn row_sub(&mut self, i: usize, t: usize, f: &BigInt) {
        if f.is_zero() {
            return;
        }
        let neg = -f;
        self.a.add_row_multiple(i, t, &neg);
        self.p.add_row_multiple(i, t, &neg);
        self.p_inv.add_col_multiple(t, i, f);
    }

    /// col_j -= f col_t (Q alike; Q^-1: row_t += f row_j).
    fn col_sub(&mut self, j: usize, t: usize, f: &BigInt) {
        if f.is_zero() {
            return;
        }
        let neg = -f;
        self.a.add_col_multiple(j, t, &neg);
        self.q.add_col_multiple(j, t, &neg);
        self.q_inv.add_row_multiple(t, j, f);
    }

    fn swap_rows(&mut self, i: usize, j: usize) {
        self.a.swap_rows(i, j);
        self.p.swap_rows(i, j);
        self.p_inv.swap_cols(i, j);
    }

    fn swap_cols(&mut self, i: usize, j: usize) {
        self.a.swap_cols(i, j);
        self.q.swap_cols(i, j);
        self.q_inv.swap_rows(i, j);
    }

    fn negate_row(&mut self, i: usize) {
        self.a.negate_row(i);
        self.p.negate_row(i);
        self.p_inv.negate_col(i);
    }
}

/// Smith normal form of an integer matrix, with transforms.
pub fn smith(a: &ZMat) -> Smith {
    let (m, n) = (a.rows, a.cols);
    let mut w = Work {
        a: a.clone(),
        p: ZMat::identity(m),
        p_inv: ZMat::identity(m),
        q: ZMat::identity(n),
        q_inv: ZMat::identity(n),
    };
    let mut diag = Vec::new();
    for t in 0..m.min(n) {
        // Pivot: least non-zero |entry| in the remaining block.
        let Some((pi, pj)) = least_entry(&w.a, t..m, t..n) else {
            break;
        };
        w.swap_rows(t, pi);
        w.swap_cols(t, pj);
        w.diagonalise_at(t);
        if w.a.at(t, t).is_negative() {
            w.negate_row(t);
        }
        diag.push(w.a.at(t, t).clone());
    }
    Smith {
        diag,
        p: w.p,
        p_inv: w.p_inv,
        q: w.q,
        q_inv: w.q_inv,
    }
}

impl Work {
    /// Clear row and column t around the pivot (t, t) until the pivot
    /// divides every entry of the remaining block.
    fn diagonalise_at(&mut self, t: usize) {
        loop {
            self.reduce_by_pivot(t);
            if self.move_remainder(t) {
                continue;
            }
            if !self.restore_divisibility(t) {
                break;
            }
        }
    }

    /// Subtract rounded multiples of row and column t from the others, so
    /// that what remains in column and row t is at most half the pivot.
    fn reduce_by_pivot(&mut self, t: usize) {
        let (m, n) = (self.a.rows, self.a.cols);
        let piv = self.a.at(t, t).clone();
        // Zero entries give a zero quotient (no operation): skipped.
        for i in t + 1..m {
            if !self.a.at(i, t).is_zero() {
                let f = round_div(self.a.at(i, t), &piv);
                self.row_sub(i, t, &f);
            }
        }
        for j in t + 1..n {
            if !self.a.at(t, j).is_zero() {
                let f = round_div(self.a.at(t, j), &piv);
                self.col_sub(j, t, &f);
            }
        }
    }

    /// Swap the least remainder left in column or row t (smaller than the
    /// pivot) into the pivot; false when both are clear.
    fn move_remainder(&mut self, t: usize) -> bool {
        let (m, n) = (self.a.rows, self.a.cols);
        let a = &self.a;
        let rest_col = (t + 1..m)
            .filter(|&i| !a.at(i, t).is_zero())
            .min_by_key(|&i| a.at(i, t).magnitude());
        let rest_row = (t + 1..n)
            .filter(|&j| !a.at(t, j).is_zero())
            .min_by_key(|&j| a.at(t, j).magnitude());
        match (rest_col, rest_row) {
            (None, None) => return false,
            (Some(i), Some(j)) => {
                if a.at(i, t).abs() <= a.at(t, j).abs() {
                    self.swap_rows(t, i);
                } else {
                    self.swap_cols(t, j);
                }
            }
            (Some(i), None) => self.swap_rows(t, i),
            (None, Some(j)) => self.swap_cols(t, j),
        }
        true
    }

    /// Row and column t cleared: if some entry of the remaining block is
    /// not a multiple of the pivot, row_t += row_i brings it into row t
    /// (true); false when the block is divisible.
    fn restore_divisibility(&mut self, t: usize) -> bool {
        let (m, n) = (self.a.rows, self.a.cols);
        let piv = self.a.at(t, t).clone();
        if piv.magnitude().is_one() {
            // A unit pivot divides everything.
            return false;
        }
        let bad = (t + 1..m).find(|&i| (t + 1..n).any(|j| !self.a.at(i, j).is_multiple_of(&piv)));
        match bad {
            Some(i) => {
                let minus_one = -BigInt::one();
                self.row_sub(t, i, &minus_one);
                true
            }
            None => false,
        }
    }
}

fn least_entry(
    a: &ZMat,
    rows: std::ops::Range<usize>,
    cols: std::ops::Range<usize>,
) -> Option<(usize, usize)> {
    // The first entry (row by row) of least magnitude; a unit cannot be
    // beaten, so the scan stops at the first one.
    let mut best: Option<(usize, usize)> = None;
    for i in rows {
        for j in cols.clone() {
            let x = a.at(i, j);
            if x.is_zero() {
                continue;
            }
            if best.is_none_or(|(bi, bj)| x.magnitude() < a.at(bi, bj).magnitude()) {
                best = Some((i, j));
                if x.magnitude().is_one() {
                    return best;
                }
            }
        }
    }
    best
}

/// A saturated basis (columns, n x (n - rank)) of {x in Z^n : A x = 0}.
pub fn kernel(a: &ZMat) -> ZMat {
    let s = smith(a);
    s.q.col_range(s.rank()..a.cols)
}

/// For columns B (m x k): a basis S of the saturation span_Q(B) ∩ Z^m
/// (m x rank) and columns C completing it to a basis [S C] of Z^m.
pub fn saturate(b: &ZMat) -> (ZMat, ZMat) {
    let s = smith(b);
    let r = s.rank();
    (s.p_inv.col_range(0..r), s.p_inv.col_range(r..b.rows))
}

#[cfg(test)]
mod tests {
    use super::*;
    use num_traits::ToPrimitive;
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    // ---- brute force, independent of the code above --------------------

    /// Determinant by Laplace expansion along the first row.
    fn laplace(m: &[Vec<i128>]) -> i128 {
        let n = m.len();
        if n == 0 {
            return 1;
        }
        (0..n)
            .map(|j| {
                let minor: Vec<Vec<i128>> = m[1..]
                    .iter()
                    .map(|r| {
                        r.iter()
                            .enumerate()
                            .filter(|(c, _)| *c != j)
                            .map(|(_, x)| *x)
                            .collect()
                    })
                    .collect();
                let s = if j % 2 == 0 { 1 } else { -1 };
                s * m[0][j] * laplace(&minor)
            })
            .sum()
    }

    fn subsets(n: usize, k: usize) -> Vec<Vec<usize>> {
        if k == 0 {
            return vec![vec![]];
        }
        if n < k {
            return vec![];
        }
        let mut out = subsets(n - 1, k);
        for mut s in subsets(n - 1, k - 1) {
            s.push(n - 1);
            out.push(s);
        }
        out
    }

    /// All k x k minors of a matrix.
    fn minors(a: &[Vec<i128>], k: usize) -> Vec<i128> {
        let (m, n) = (a.len(), a.first().map_or(0, |r| r.len()));
        let mut out = Vec::new();
        for rows in subsets(m, k) {
            for cols in subsets(n, k) {
                let sub: Vec<Vec<i128>> = rows
                    .iter()
                    .map(|&i| cols.iter().map(|&j| a[i][j]).collect())
                    .collect();
                out.push(laplace(&sub));
            }
        }
        out
    }

    fn gcd_all(v: &[i128]) -> i128 {
        v.iter().fold(0i128, |g, x| g.gcd(x))
    }

    /// Rank = size of the largest non-vanishing minor.
    fn brute_rank(a: &[Vec<i128>]) -> usize {
        let (m, n) = (a.len(), a.first().map_or(0, |r| r.len()));
        (1..=m.min(n))
            .rev()
            .find(|&k| minors(a, k).iter().any(|x| *x != 0))
            .unwrap_or(0)
    }

    fn small(z: &ZMat) -> Vec<Vec<i128>> {
        (0..z.rows)
            .map(|i| (0..z.cols).map(|j| z.at(i, j).to_i128().unwrap()).collect())
            .collect()
    }

    fn random(rng: &mut ChaCha8Rng, m: usize, n: usize, range: i64) -> ZMat {
        let rows: Vec<Vec<i64>> = (0..m)
            .map(|_| (0..n).map(|_| rng.gen_range(-range..=range)).collect())
            .collect();
        ZMat::from_i64(&rows, n)
    }

    /// Random low-rank matrix: a product of two random matrices.
    fn random_low_rank(rng: &mut ChaCha8Rng, m: usize, n: usize) -> ZMat {
        let r = rng.gen_range(1..=m.min(n));
        random(rng, m, r, 3).mul(&random(rng, r, n, 3))
    }

    fn shapes(rng: &mut ChaCha8Rng, count: usize) -> Vec<ZMat> {
        (0..count)
            .map(|c| {
                let m = rng.gen_range(1..=4);
                let n = rng.gen_range(1..=4);
                if c % 2 == 0 {
                    random(rng, m, n, 4)
                } else {
                    random_low_rank(rng, m, n)
                }
            })
            .collect()
    }

    #[test]
    fn smith_against_determinantal_divisors() {
        // d_1 d_2 ... d_k = gcd of the k x k minors (the determinantal
        // divisors; Newman, "Integral Matrices" (1972), ch. II, from memory).
        let mut rng = ChaCha8Rng::seed_from_u64(8);
        for a in shapes(&mut rng, 120) {
            let s = smith(&a);
            let small_a = small(&a);
            assert_eq!(s.rank(), brute_rank(&small_a), "rank of {a:?}");
            let mut prod = BigInt::one();
            for (k, d) in s.diag.iter().enumerate() {
                assert!(d.is_positive());
                if k > 0 {
                    assert!(d.is_multiple_of(&s.diag[k - 1]), "divisibility");
                }
                prod *= d;
                let g = gcd_all(&minors(&small_a, k + 1));
                assert_eq!(prod, BigInt::from(g), "divisor {} of {a:?}", k + 1);
            }
            // P A Q = D and the inverses are inverses.
            let d = s.p.mul(&a).mul(&s.q);
            for i in 0..a.rows {
                for j in 0..a.cols {
                    let want = if i == j && i < s.rank() {
                        s.diag[i].clone()
                    } else {
                        BigInt::zero()
                    };
                    assert_eq!(d.at(i, j), &want);
                }
            }
            assert_eq!(s.p.mul(&s.p_inv), ZMat::identity(a.rows));
            assert_eq!(s.q.mul(&s.q_inv), ZMat::identity(a.cols));
        }
    }

    #[test]
    fn kernel_is_the_saturated_integer_kernel() {
        // A basis of the integer kernel: A X = 0, n - rank columns, and the
        // gcd of its maximal minors is 1 (saturated); every small integer
        // solution found by enumeration lies in its rational span.
        let mut rng = ChaCha8Rng::seed_from_u64(88);
        for a in shapes(&mut rng, 80) {
            let x = kernel(&a);
            let rank_a = brute_rank(&small(&a));
            assert_eq!(x.cols, a.cols - rank_a);
            assert!(a.mul(&x).is_zero());
            if x.cols > 0 {
                let sx = small(&x);
                assert_eq!(gcd_all(&minors(&sx, x.cols)), 1, "saturated: {x:?}");
                let n = a.cols;
                let mut v = vec![-2i64; n];
                loop {
                    let bv: Vec<BigInt> = v.iter().map(|&y| BigInt::from(y)).collect();
                    if a.mul_vec(&bv).iter().all(|y| y.is_zero()) {
                        let mut cols = x.columns();
                        cols.push(bv);
                        let aug = ZMat::from_cols(n, &cols);
                        assert_eq!(brute_rank(&small(&aug)), x.cols, "{v:?} in span");
                    }
                    // next vector of the box [-2, 2]^n
                    let mut i = 0;
                    while i < n && v[i] == 2 {
                        v[i] = -2;
                        i += 1;
                    }
                    if i == n {
                        break;
                    }
                    v[i] += 1;
                }
            }
        }
    }

    #[test]
    fn saturation_and_completion() {
        // [S C] unimodular (brute-force det +-1), S spans the same rational
        // space as B, and B lies in the integer span of S: the coordinates of
        // every column of B in the basis [S C] (adjugate / det) are integers
        // and vanish on C.
        let mut rng = ChaCha8Rng::seed_from_u64(888);
        for b in shapes(&mut rng, 80) {
            let (s, c) = saturate(&b);
            let rank_b = brute_rank(&small(&b));
            assert_eq!(s.cols, rank_b);
            assert_eq!(s.cols + c.cols, b.rows);
            let mut cols = s.columns();
            cols.extend(c.columns());
            let u = small(&ZMat::from_cols(b.rows, &cols));
            let det = laplace(&u);
            assert!(det == 1 || det == -1, "unimodular: {u:?}");
            for col in b.columns() {
                let y: Vec<i128> = (0..b.rows)
                    .map(|i| {
                        // Cramer: y_i = det(U with column i replaced) / det U.
                        let mut ui = u.clone();
                        for (r, row) in ui.iter_mut().enumerate() {
                            row[i] = col[r].to_i128().unwrap();
                        }
                        laplace(&ui) * det
                    })
                    .collect();
                assert!(y[s.cols..].iter().all(|v| *v == 0), "B in span S");
            }
            // S itself is saturated: the gcd of its maximal minors is 1.
            if s.cols > 0 {
                assert_eq!(gcd_all(&minors(&small(&s), s.cols)), 1);
            }
        }
    }

    #[test]
    fn solve_rational() {
        // [[3,1],[1,3]] x = (1,1): x = (1/4, 1/4) (by hand); a singular
        // matrix has no solution.
        let a = ZMat::from_i64(&[vec![3, 1], vec![1, 3]], 2);
        let one = BigInt::one();
        let x = smith(&a).solve(&[one.clone(), one.clone()]).unwrap();
        let q = Rational::new(one.clone(), BigInt::from(4));
        assert_eq!(x, vec![q.clone(), q]);
        let s = ZMat::from_i64(&[vec![1, 2], vec![2, 4]], 2);
        assert!(smith(&s).solve(&[one.clone(), one]).is_none());
    }

    #[test]
    fn big_entries_stay_exact() {
        // Entries near 2^62: products overflow i64 but not BigInt.
        let big = 1i64 << 62;
        let a = ZMat::from_i64(&[vec![big, big - 1], vec![big - 1, big - 2]], 2);
        let s = smith(&a);
        // det = big(big-2) - (big-1)^2 = -1: unimodular, both invariants 1.
        assert_eq!(s.diag, vec![BigInt::one(), BigInt::one()]);
        assert_eq!(s.p.mul(&a).mul(&s.q), ZMat::identity(2));
    }
}
