//! An echelon Z-basis of the lattice spanned by sparse integer vectors,
//! for exact membership in span_Z and span_Q without dense transforms.
//!
//! Algorithm: rows are kept keyed by their leading index (distinct, so they
//! are independent and their number is the rank). A vector is inserted by
//! clearing its leading entry x against the row e there (leading entry p):
//! if p divides x, v -= (x / p) e; otherwise, with g = gcd(p, x) = a p + b x
//! (extended Euclid), the pair (e, v) becomes (a e + b v, (p / g) v -
//! (x / g) e), a unimodular change (determinant a p / g + b x / g = 1), so
//! the span stays the same and the row's leading entry becomes g. A vector
//! that reaches zero adds nothing; otherwise it becomes a new row. Rows
//! keep a positive leading entry.
//!
//! Membership (derived): for an echelon basis, the coefficient of the row
//! with the smallest leading index is fixed by v's leading entry, so v lies
//! in span_Z iff repeated v -= (x / p) e reaches zero with p | x at every
//! step; and in span_Q iff the fraction-free (p v - x e) / gcd reaches zero.
//!
//! Owns: [`ZBasis`]. Invariants: exact big-integer arithmetic; the span is
//! that of every inserted vector; answers do not depend on insertion order
//! (a test compares with the Smith form).

use std::collections::BTreeMap;

use num_bigint::BigInt;
use num_integer::Integer;
use num_traits::{Signed, Zero};

/// A sparse vector: (index, non-zero value), sorted by index.
type Sparse = Vec<(usize, BigInt)>;

/// An echelon Z-basis (see the module docs).
#[derive(Debug, Clone, Default)]
pub struct ZBasis {
    rows: BTreeMap<usize, Sparse>,
}

impl ZBasis {
    /// The basis of the span of some vectors (dense, machine integers).
    pub fn of_i64(vectors: &[Vec<i64>]) -> ZBasis {
        let mut b = ZBasis::default();
        for v in vectors {
            b.insert(sparse_i64(v));
        }
        b
    }

    /// Rank over the rationals (number of rows).
    pub fn rank(&self) -> usize {
        self.rows.len()
    }

    /// Add a vector to the span.
    fn insert(&mut self, v: Sparse) {
        let mut s = v;
        while let Some((lead, x)) = s.first().cloned() {
            let Some(e) = self.rows.get_mut(&lead) else {
                if x.is_negative() {
                    s = combine(&BigInt::from(-1), &s, &BigInt::zero(), &[]);
                }
                self.rows.insert(lead, s);
                return;
            };
            let p = e[0].1.clone();
            if x.is_multiple_of(&p) {
                s = combine(&BigInt::from(1), &s, &-(&x / &p), e);
                continue;
            }
            let ext = p.extended_gcd(&x);
            let (g, a, b) = (ext.gcd, ext.x, ext.y);
            let new_e = combine(&a, e, &b, &s);
            s = combine(&(&p / &g), &s, &-(&x / &g), e);
            *e = new_e;
        }
    }

    /// v in span_Z.
    pub fn contains(&self, v: &[BigInt]) -> bool {
        let mut s = sparse(v);
        while let Some((lead, x)) = s.first().cloned() {
            let Some(e) = self.rows.get(&lead) else {
                return false;
            };
            let p = &e[0].1;
            if !x.is_multiple_of(p) {
                return false;
            }
            s = combine(&BigInt::from(1), &s, &-(&x / p), e);
        }
        true
    }

    /// v in span_Z (machine integers).
    pub fn contains_i64(&self, v: &[i64]) -> bool {
        self.contains(&v.iter().map(|&x| BigInt::from(x)).collect::<Vec<_>>())
    }

    /// v in span_Q.
    pub fn contains_rationally(&self, v: &[BigInt]) -> bool {
        let mut s = sparse(v);
        while let Some((lead, x)) = s.first().cloned() {
            let Some(e) = self.rows.get(&lead) else {
                return false;
            };
            let p = &e[0].1;
            let g = x.gcd(p);
            s = combine(&(p / &g), &s, &-(&x / &g), e);
            let c = s.iter().fold(BigInt::zero(), |c, (_, y)| c.gcd(y));
            if !c.is_zero() && c != BigInt::from(1) {
                s.iter_mut().for_each(|(_, y)| *y = &*y / &c);
            }
        }
        true
    }

    /// The rows, dense of length n (generators of the span).
    pub fn rows_dense(&self, n: usize) -> Vec<Vec<BigInt>> {
        self.rows
            .values()
            .map(|r| {
                let mut v = vec![BigInt::zero(); n];
                for (i, x) in r {
                    v[*i] = x.clone();
                }
                v
            })
            .collect()
    }
}

fn sparse(v: &[BigInt]) -> Sparse {
    v.iter()
        .enumerate()
        .filter(|(_, x)| !x.is_zero())
        .map(|(i, x)| (i, x.clone()))
        .collect()
}

fn sparse_i64(v: &[i64]) -> Sparse {
    v.iter()
        .enumerate()
        .filter(|(_, x)| **x != 0)
        .map(|(i, &x)| (i, BigInt::from(x)))
        .collect()
}

/// a u + b w (sparse, sorted; zero entries dropped).
fn combine(a: &BigInt, u: &[(usize, BigInt)], b: &BigInt, w: &[(usize, BigInt)]) -> Sparse {
    let mut out: Sparse = Vec::with_capacity(u.len() + w.len());
    let (mut i, mut j) = (0, 0);
    while i < u.len() || j < w.len() {
        let ui = u.get(i).map_or(usize::MAX, |t| t.0);
        let wj = w.get(j).map_or(usize::MAX, |t| t.0);
        let (idx, val) = if ui < wj {
            i += 1;
            (ui, a * &u[i - 1].1)
        } else if wj < ui {
            j += 1;
            (wj, b * &w[j - 1].1)
        } else {
            i += 1;
            j += 1;
            (ui, a * &u[i - 1].1 + b * &w[j - 1].1)
        };
        if !val.is_zero() {
            out.push((idx, val));
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::math::smith::smith;
    use crate::math::zmat::ZMat;
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    /// Reference membership by the Smith form (second code path): with
    /// P A Q = D, v in span_Z iff (P v)_i is divisible by d_i (i < r) and
    /// zero beyond; in span_Q iff zero beyond r.
    fn smith_member(rows: &[Vec<i64>], n: usize, v: &[BigInt]) -> (bool, bool) {
        let a = ZMat::from_i64(rows, n).transpose();
        let s = smith(&a);
        let y = s.p.mul_vec(v);
        let r = s.rank();
        let z = y.iter().skip(r).all(|x| x.is_zero());
        let zz = z && (0..r).all(|i| y[i].is_multiple_of(&s.diag[i]));
        (zz, z)
    }

    #[test]
    fn membership_matches_the_smith_form() {
        let mut rng = ChaCha8Rng::seed_from_u64(41);
        for case in 0..300 {
            let n = rng.gen_range(1..=7);
            let m = rng.gen_range(1..=6);
            let entry = |rng: &mut ChaCha8Rng| {
                if rng.gen_bool(0.5) {
                    0
                } else {
                    rng.gen_range(-4i64..=4)
                }
            };
            let rows: Vec<Vec<i64>> = (0..m)
                .map(|_| (0..n).map(|_| entry(&mut rng)).collect())
                .collect();
            let b = ZBasis::of_i64(&rows);
            assert_eq!(b.rank(), crate::math::echelon::rank(&to_big(&rows)));
            for _ in 0..6 {
                // Members, rational-only members and random vectors.
                let c: Vec<i64> = (0..m).map(|_| rng.gen_range(-3..=3)).collect();
                let mut v: Vec<BigInt> = (0..n)
                    .map(|i| BigInt::from((0..m).map(|k| c[k] * rows[k][i]).sum::<i64>()))
                    .collect();
                match rng.gen_range(0..3) {
                    0 => {}
                    1 => v[rng.gen_range(0..n)] += 1,
                    _ => v.iter_mut().for_each(|x| *x = &*x * 3 / 2),
                }
                let (z, q) = smith_member(&rows, n, &v);
                assert_eq!(b.contains(&v), z, "case {case}: {rows:?} {v:?}");
                assert_eq!(b.contains_rationally(&v), q, "case {case}: {rows:?} {v:?}");
            }
            for r in b.rows_dense(n) {
                assert!(smith_member(&rows, n, &r).0, "rows lie in the span");
            }
        }
    }

    fn to_big(rows: &[Vec<i64>]) -> Vec<Vec<BigInt>> {
        rows.iter()
            .map(|r| r.iter().map(|&x| BigInt::from(x)).collect())
            .collect()
    }
}
