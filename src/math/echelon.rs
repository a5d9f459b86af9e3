//! Exact rank and first-come independent subsets of integer vectors by a
//! sparse, fraction-free row echelon: the fast path behind
//! [`crate::math::bareiss::rank`] and [`crate::math::bareiss::pivot_columns`]
//! for the long, sparse vectors of arrays (a pinned translate touches a few
//! wires of hundreds).
//!
//! Algorithm: vectors are taken in order and reduced against the echelon
//! rows kept so far, each keyed by its leading index: while the vector's
//! leading entry x sits at the key of a row e (leading entry p), it becomes
//! (p v - x e) / gcd of its entries, which clears that entry and touches
//! only entries at or after it. A vector that reaches zero depends on
//! those before it; otherwise it is kept with its new leading index.
//!
//! Owns: [`independent`] (and [`independent_up_to`], which stops at a
//! known rank) and [`rank`]. Invariants: exact big-integer
//! arithmetic; the subset returned is the unique first-come maximal
//! independent subset over the rationals (vector i is kept iff it is not a
//! rational combination of vectors 0..i), whatever the elimination order,
//! so it equals what a dense elimination gives (a test compares them).

use std::collections::BTreeMap;

use num_bigint::BigInt;
use num_integer::Integer;
use num_traits::{One, Signed, Zero};

/// A sparse vector: (index, non-zero value), sorted by index.
type Sparse = Vec<(usize, BigInt)>;

/// Indices of the first-come maximal independent subset of the vectors.
pub fn independent(vectors: &[Vec<BigInt>]) -> Vec<usize> {
    independent_up_to(vectors, usize::MAX)
}

/// [`independent`] when the rank of all the vectors is known to be at most
/// `rank`: it stops once that many are kept (every later vector depends on
/// them then, so the answer is the same without reducing the rest).
pub fn independent_up_to(vectors: &[Vec<BigInt>], rank: usize) -> Vec<usize> {
    let mut rows: BTreeMap<usize, Sparse> = BTreeMap::new();
    let mut kept = Vec::new();
    for (i, v) in vectors.iter().enumerate() {
        if kept.len() >= rank {
            break;
        }
        let mut s: Sparse = v
            .iter()
            .enumerate()
            .filter(|(_, x)| !x.is_zero())
            .map(|(j, x)| (j, x.clone()))
            .collect();
        while let Some(lead) = s.first().map(|(j, _)| *j) {
            match rows.get(&lead) {
                Some(e) => s = eliminate(&s, e),
                None => break,
            }
        }
        if let Some(lead) = s.first().map(|(j, _)| *j) {
            rows.insert(lead, s);
            kept.push(i);
        }
    }
    kept
}

/// Rank over the rationals of the vectors.
pub fn rank(vectors: &[Vec<BigInt>]) -> usize {
    independent(vectors).len()
}

/// (p v - x e) / content, with x the leading entry of v and p that of e
/// (both at the same index): the leading entry cancels.
fn eliminate(v: &Sparse, e: &Sparse) -> Sparse {
    let x = &v[0].1;
    let p = &e[0].1;
    let g = x.gcd(p);
    let (a, b) = (p / &g, x / &g);
    let mut out: Sparse = Vec::with_capacity(v.len() + e.len());
    let (mut i, mut j) = (1, 1);
    while i < v.len() || j < e.len() {
        let vi = v.get(i).map_or(usize::MAX, |t| t.0);
        let ej = e.get(j).map_or(usize::MAX, |t| t.0);
        let (idx, val) = if vi < ej {
            i += 1;
            (vi, &a * &v[i - 1].1)
        } else if ej < vi {
            j += 1;
            (ej, -(&b * &e[j - 1].1))
        } else {
            i += 1;
            j += 1;
            (vi, &a * &v[i - 1].1 - &b * &e[j - 1].1)
        };
        if !val.is_zero() {
            out.push((idx, val));
        }
    }
    let c = out.iter().fold(BigInt::zero(), |g, (_, y)| g.gcd(y));
    if !c.is_zero() && !c.abs().is_one() {
        for (_, y) in out.iter_mut() {
            *y = &*y / &c;
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    /// Reference: i is kept iff the rank (dense Bareiss elimination, a
    /// second code path) grows when it is added to those before it.
    fn first_come(vs: &[Vec<BigInt>]) -> Vec<usize> {
        let mut out = Vec::new();
        let mut before = 0;
        for i in 0..vs.len() {
            let r = crate::math::bareiss::dense_rank(&vs[..=i]);
            if r > before {
                out.push(i);
                before = r;
            }
        }
        out
    }

    #[test]
    fn matches_dense_elimination_on_random_sparse_vectors() {
        let mut rng = ChaCha8Rng::seed_from_u64(19);
        for _ in 0..200 {
            let (m, n) = (rng.gen_range(0..=8), rng.gen_range(1..=9));
            let vs: Vec<Vec<BigInt>> = (0..m)
                .map(|_| {
                    (0..n)
                        .map(|_| {
                            let x = if rng.gen_bool(0.6) {
                                0
                            } else {
                                rng.gen_range(-4..=4)
                            };
                            BigInt::from(x)
                        })
                        .collect()
                })
                .collect();
            assert_eq!(independent(&vs), first_come(&vs), "{vs:?}");
            let r = crate::math::bareiss::dense_rank(&vs);
            assert_eq!(independent_up_to(&vs, r), first_come(&vs), "{vs:?}");
            assert_eq!(rank(&vs), crate::math::bareiss::dense_rank(&vs));
        }
    }

    #[test]
    fn small_cases_by_hand() {
        // (1, 2) and (2, 4) are proportional; (0, 0) is never kept; (1, 0)
        // and (0, 3) are independent (derived by hand).
        let v = |a: &[i64]| a.iter().map(|&x| BigInt::from(x)).collect::<Vec<_>>();
        assert_eq!(
            independent(&[v(&[0, 0]), v(&[1, 2]), v(&[2, 4]), v(&[1, 0])]),
            vec![1, 3]
        );
        assert_eq!(rank(&[v(&[1, 0]), v(&[0, 3])]), 2);
        assert_eq!(rank(&[]), 0);
    }
}
