//! Fraction-free Gaussian elimination [Bareiss, Math. Comp. 22, 565
//! (1968)] on integer matrices: the one elimination behind the exact
//! determinant, the exact inverse and the exact rank.
//!
//! Owns: [`det`], [`det_and_inverse`], [`rank`], [`pivot_columns`]. Invariants: big integers
//! only, no floats and no overflow; every division is exact, because after
//! the step on the t-th pivot every remaining entry is a (t+1) x (t+1)
//! minor of the input built on the pivot rows and columns, and the
//! divisor is the previous pivot, itself such a minor. The same holds when
//! columns without a pivot are skipped (row echelon form of a rectangular
//! matrix), which is how [`rank`] uses it.

use num_bigint::BigInt;
use num_traits::{One, Zero};

use crate::math::rational::Rational;

/// What one elimination found.
struct Echelon {
    /// Number of pivots (the rank of the eliminated block).
    pivots: usize,
    /// The last pivot: +-det of the leading square block when it is full rank.
    last: BigInt,
    /// True after an odd number of row swaps.
    odd: bool,
    /// The pivot columns, in order (the dense reference of
    /// [`pivot_columns`], compared in a test).
    #[cfg_attr(not(test), allow(dead_code))]
    columns: Vec<usize>,
}

/// Fraction-free elimination of the first `cols` columns of `m` (every row
/// at least that long; further columns, e.g. an identity block, are carried
/// along). `full` also clears above each pivot (Gauss-Jordan), which turns
/// an augmented [A | 1] into [d 1 | d A^-1] with d = +-det A. Columns
/// without a pivot are skipped.
fn eliminate(m: &mut [Vec<BigInt>], cols: usize, full: bool) -> Echelon {
    let mut prev = BigInt::one();
    let mut odd = false;
    let mut r = 0;
    let mut columns = Vec::new();
    for c in 0..cols {
        if r == m.len() {
            break;
        }
        let Some(p) = (r..m.len()).find(|&i| !m[i][c].is_zero()) else {
            continue;
        };
        if p != r {
            m.swap(p, r);
            odd = !odd;
        }
        clear_column(m, r, c, &prev, full);
        prev = m[r][c].clone();
        columns.push(c);
        r += 1;
    }
    Echelon {
        pivots: r,
        last: prev,
        odd,
        columns,
    }
}

/// One fraction-free step on pivot (r, c): every other row (only the rows
/// below when not `full`) becomes (pivot * row - row[c] * pivot row) / prev.
/// The pivot row keeps its entries (they are already the right minors).
fn clear_column(m: &mut [Vec<BigInt>], r: usize, c: usize, prev: &BigInt, full: bool) {
    let pivot_row = m[r].clone();
    let pivot = &pivot_row[c];
    for (i, row) in m.iter_mut().enumerate() {
        if i == r || (!full && i < r) {
            continue;
        }
        let factor = row[c].clone();
        for (j, x) in row.iter_mut().enumerate() {
            if j == c {
                continue;
            }
            let num = pivot * &*x - &factor * &pivot_row[j];
            debug_assert!((&num % prev).is_zero(), "Bareiss division is exact");
            *x = num / prev;
        }
        row[c] = BigInt::zero();
    }
}

/// Determinant of a square integer matrix given by rows; the empty matrix
/// has determinant 1.
pub fn det(rows: &[Vec<BigInt>]) -> BigInt {
    let n = rows.len();
    debug_assert!(rows.iter().all(|r| r.len() == n), "square matrix");
    let mut m = rows.to_vec();
    let e = eliminate(&mut m, n, false);
    if e.pivots < n {
        BigInt::zero()
    } else if e.odd {
        -e.last
    } else {
        e.last
    }
}

/// Determinant and inverse of a square integer matrix, or `None` when it is
/// singular. A matrix that splits into diagonal blocks after a common
/// permutation of rows and columns (the connected components of the graph
/// of its non-zero entries; e.g. the K of an array, one block per wire) is
/// inverted block by block: the determinant is the product of the blocks'
/// and the inverse has the same blocks, so the result is the same exact
/// value as one elimination of the whole, at a cost of the blocks' sizes
/// cubed instead of n^3.
pub fn det_and_inverse(a: &[Vec<i64>]) -> Option<(BigInt, Vec<Vec<Rational>>)> {
    let n = a.len();
    let blocks = components(a);
    if blocks.len() <= 1 {
        return dense_det_and_inverse(a);
    }
    let mut det = BigInt::one();
    let mut inverse = vec![vec![Rational::zero(); n]; n];
    for b in &blocks {
        let sub: Vec<Vec<i64>> = b
            .iter()
            .map(|&i| b.iter().map(|&j| a[i][j]).collect())
            .collect();
        let (d, inv) = dense_det_and_inverse(&sub)?;
        det *= d;
        for (r, &i) in b.iter().enumerate() {
            for (c, &j) in b.iter().enumerate() {
                inverse[i][j] = inv[r][c].clone();
            }
        }
    }
    Some((det, inverse))
}

/// The connected components of the graph with an edge i - j wherever
/// a[i][j] or a[j][i] is non-zero, each sorted, in order of their least
/// index.
fn components(a: &[Vec<i64>]) -> Vec<Vec<usize>> {
    let n = a.len();
    let mut seen = vec![false; n];
    let mut out = Vec::new();
    for s in 0..n {
        if seen[s] {
            continue;
        }
        seen[s] = true;
        let mut part = vec![s];
        let mut k = 0;
        while k < part.len() {
            let i = part[k];
            k += 1;
            for j in 0..n {
                if !seen[j] && (a[i][j] != 0 || a[j][i] != 0) {
                    seen[j] = true;
                    part.push(j);
                }
            }
        }
        part.sort_unstable();
        out.push(part);
    }
    out
}

/// [`det_and_inverse`] by one Gauss-Jordan elimination on [A | 1]: at the
/// end every diagonal entry of the left block equals the determinant d of
/// the row-permuted matrix and the right block equals d A^-1.
pub fn dense_det_and_inverse(a: &[Vec<i64>]) -> Option<(BigInt, Vec<Vec<Rational>>)> {
    let n = a.len();
    let mut m: Vec<Vec<BigInt>> = a
        .iter()
        .enumerate()
        .map(|(i, row)| {
            let mut r: Vec<BigInt> = row.iter().map(|&x| BigInt::from(x)).collect();
            r.extend((0..n).map(|j| BigInt::from((i == j) as u8)));
            r
        })
        .collect();
    let e = eliminate(&mut m, n, true);
    if e.pivots < n {
        return None;
    }
    let d = e.last;
    let inverse = m
        .iter()
        .map(|row| {
            row[n..]
                .iter()
                .map(|x| Rational::new(x.clone(), d.clone()))
                .collect()
        })
        .collect();
    Some((if e.odd { -d } else { d }, inverse))
}

/// Rank of an integer matrix given by rows (all of one length), by the
/// sparse echelon of [`crate::math::echelon`] (the same number as
/// [`dense_rank`], much faster on long sparse rows).
pub fn rank(rows: &[Vec<BigInt>]) -> usize {
    crate::math::echelon::rank(rows)
}

/// Rank by one dense fraction-free elimination (the reference for
/// [`rank`]).
pub fn dense_rank(rows: &[Vec<BigInt>]) -> usize {
    let cols = rows.first().map_or(0, |r| r.len());
    debug_assert!(rows.iter().all(|r| r.len() == cols), "rectangular matrix");
    let mut m = rows.to_vec();
    eliminate(&mut m, cols, false).pivots
}

/// The pivot columns of an integer matrix given by rows: the first-come
/// maximal set of independent columns (a column has a pivot iff it is not
/// a rational combination of the columns before it).
/// Computed on the columns by the sparse echelon of
/// [`crate::math::echelon`] (the first-come subset is unique).
pub fn pivot_columns(rows: &[Vec<BigInt>]) -> Vec<usize> {
    let cols = rows.first().map_or(0, |r| r.len());
    debug_assert!(rows.iter().all(|r| r.len() == cols), "rectangular matrix");
    let columns: Vec<Vec<BigInt>> = (0..cols)
        .map(|j| rows.iter().map(|r| r[j].clone()).collect())
        .collect();
    crate::math::echelon::independent(&columns)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::math::rational::int;
    use crate::math::smith::smith;
    use crate::math::zmat::ZMat;
    use num_traits::FromPrimitive;
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    fn big_rows(m: &[&[i64]]) -> Vec<Vec<BigInt>> {
        m.iter()
            .map(|r| r.iter().map(|&x| BigInt::from(x)).collect())
            .collect()
    }

    #[test]
    fn ranks_of_small_matrices() {
        // By hand: a zero matrix, proportional rows, a non-zero det (1*4 -
        // 2*3 = -2), a 3 x 3 with row 3 = row 1 + row 2, a wide 2 x 3 whose
        // first column vanishes, a tall 3 x 2 whose pivot skips a column.
        assert_eq!(rank(&big_rows(&[&[0, 0], &[0, 0]])), 0);
        assert_eq!(rank(&big_rows(&[&[1, 2], &[2, 4]])), 1);
        assert_eq!(rank(&big_rows(&[&[1, 2], &[3, 4]])), 2);
        assert_eq!(rank(&big_rows(&[&[1, 2, 3], &[4, 5, 6], &[5, 7, 9]])), 2);
        assert_eq!(rank(&big_rows(&[&[0, 1, 2], &[0, 3, 7]])), 2);
        assert_eq!(rank(&big_rows(&[&[1, 2, 5], &[2, 4, 7], &[3, 6, 1]])), 2);
        assert_eq!(rank(&[]), 0);
    }

    /// An m x n matrix of random entries in -2..=2.
    fn small_random_rows(rng: &mut ChaCha8Rng, m: usize, n: usize) -> Vec<Vec<BigInt>> {
        (0..m)
            .map(|_| {
                (0..n)
                    .map(|_| BigInt::from(rng.gen_range(-2..=2)))
                    .collect()
            })
            .collect()
    }

    #[test]
    fn sparse_pivot_columns_match_the_dense_elimination() {
        let mut rng = ChaCha8Rng::seed_from_u64(23);
        for _ in 0..60 {
            let (m, n) = (rng.gen_range(1..=6), rng.gen_range(1..=8));
            let a = small_random_rows(&mut rng, m, n);
            let dense = eliminate(&mut a.clone(), n, false).columns;
            assert_eq!(pivot_columns(&a), dense);
        }
    }

    #[test]
    fn pivot_columns_are_the_first_come_independent_columns() {
        // Second code path: column j is kept iff it raises the rank of the
        // columns kept before it (rank by elimination of the kept columns).
        let mut rng = ChaCha8Rng::seed_from_u64(12);
        for _ in 0..40 {
            let (m, n) = (rng.gen_range(1..=5), rng.gen_range(1..=7));
            let a = small_random_rows(&mut rng, m, n);
            let cols = |keep: &[usize]| -> Vec<Vec<BigInt>> {
                a.iter()
                    .map(|r| keep.iter().map(|&j| r[j].clone()).collect())
                    .collect()
            };
            let mut kept: Vec<usize> = Vec::new();
            for j in 0..n {
                let mut with = kept.clone();
                with.push(j);
                if dense_rank(&cols(&with)) > kept.len() {
                    kept = with;
                }
            }
            assert_eq!(pivot_columns(&a), kept);
        }
    }

    #[test]
    fn rank_agrees_with_the_smith_form() {
        // Second code path: the number of invariant factors of the Smith
        // normal form (src/math/smith.rs), on random low-rank products.
        let mut rng = ChaCha8Rng::seed_from_u64(11);
        for _ in 0..60 {
            let (m, n, k) = (
                rng.gen_range(1..=6),
                rng.gen_range(1..=6),
                rng.gen_range(1..=4),
            );
            let a: Vec<Vec<i64>> = (0..m)
                .map(|_| (0..k).map(|_| rng.gen_range(-3..=3)).collect())
                .collect();
            let b: Vec<Vec<i64>> = (0..k)
                .map(|_| (0..n).map(|_| rng.gen_range(-3..=3)).collect())
                .collect();
            let z = ZMat::from_i64(&a, k).mul(&ZMat::from_i64(&b, n));
            assert_eq!(rank(&z.to_rows()), smith(&z).rank(), "{z:?}");
        }
    }

    #[test]
    fn determinants() {
        // A_4 Cartan matrix: det 5 (standard); Halperin (331): det 8 [Wen,
        // Adv. Phys. 44, 405 (1995)]; the others by hand.
        let a4 = big_rows(&[
            &[2, -1, 0, 0],
            &[-1, 2, -1, 0],
            &[0, -1, 2, -1],
            &[0, 0, -1, 2],
        ]);
        assert_eq!(det(&a4), BigInt::from(5));
        assert_eq!(det(&big_rows(&[&[3, 1], &[1, 3]])), BigInt::from(8));
        assert_eq!(det(&big_rows(&[&[0, 1], &[1, 0]])), BigInt::from(-1));
        assert_eq!(det(&big_rows(&[&[1, 2], &[2, 4]])), BigInt::zero());
        assert_eq!(det(&[]), BigInt::one());
        assert_eq!(
            det_and_inverse(&[vec![3, 1], vec![1, 3]]).unwrap().0,
            BigInt::from(8)
        );
        assert!(det_and_inverse(&[vec![1, 2], vec![2, 4]]).is_none());
    }

    fn rational_inverse(a: &[Vec<i64>]) -> Option<Vec<Vec<Rational>>> {
        // Plain Gauss-Jordan with rationals, as an independent reference.
        let n = a.len();
        let mut m: Vec<Vec<Rational>> = a
            .iter()
            .enumerate()
            .map(|(i, r)| {
                let mut row: Vec<Rational> = r.iter().map(|&x| int(x)).collect();
                row.extend((0..n).map(|j| int((i == j) as i64)));
                row
            })
            .collect();
        for k in 0..n {
            let p = (k..n).find(|&r| !m[r][k].is_zero())?;
            m.swap(p, k);
            let piv = m[k][k].clone();
            for x in m[k].iter_mut() {
                *x = &*x / &piv;
            }
            let prow = m[k].clone();
            for (i, row) in m.iter_mut().enumerate() {
                if i != k {
                    let f = row[k].clone();
                    for (x, y) in row.iter_mut().zip(&prow) {
                        *x = &*x - &f * y;
                    }
                }
            }
        }
        Some(m.into_iter().map(|r| r[n..].to_vec()).collect())
    }

    #[test]
    fn inverse_matches_rational_gauss_jordan() {
        let cases: Vec<Vec<Vec<i64>>> = vec![
            vec![vec![3, 1], vec![1, 3]],
            vec![vec![0, 1, 2], vec![1, 0, 3], vec![2, 3, 1]],
            vec![vec![1, 0], vec![0, -1]],
            vec![
                vec![2, -1, 0, 0],
                vec![-1, 2, -1, 0],
                vec![0, -1, 2, -1],
                vec![0, 0, -1, 2],
            ],
        ];
        for a in cases {
            let (d, inv) = det_and_inverse(&a).unwrap();
            assert_eq!(inv, rational_inverse(&a).unwrap());
            let rows: Vec<Vec<BigInt>> = a
                .iter()
                .map(|r| r.iter().map(|&x| BigInt::from(x)).collect())
                .collect();
            assert_eq!(d, det(&rows), "both entry points agree");
        }
    }

    #[test]
    fn one_field_blocks_of_a_wide_diagonal_k() {
        // K = diag(1, -1) per wire, 512 wires: 1024 blocks of one field,
        // det = (-1)^512 = 1 and K^-1 = K (derived: each 1 x 1 block is its
        // own inverse).
        let n = 1024;
        let k: Vec<Vec<i64>> = (0..n)
            .map(|i| {
                (0..n)
                    .map(|j| if i == j { 1 - 2 * (i as i64 % 2) } else { 0 })
                    .collect()
            })
            .collect();
        assert_eq!(components(&k).len(), n);
        let (d, inv) = det_and_inverse(&k).expect("invertible");
        assert_eq!(d, BigInt::one());
        for (i, row) in inv.iter().enumerate() {
            for (j, x) in row.iter().enumerate() {
                assert_eq!(*x, Rational::from_integer(BigInt::from(k[i][j])));
            }
        }
    }

    #[test]
    fn block_diagonal_inverse_matches_one_elimination() {
        // Random blocks (a wire's K, say), shuffled by a common permutation
        // of rows and columns: the block-by-block route must give the same
        // exact det and inverse as the dense elimination and as plain
        // rational Gauss-Jordan (two independent paths).
        let mut rng = ChaCha8Rng::seed_from_u64(7);
        let mut tried = 0;
        while tried < 30 {
            let sizes: Vec<usize> = (0..rng.gen_range(2..=4))
                .map(|_| rng.gen_range(1..=3))
                .collect();
            let n: usize = sizes.iter().sum();
            let mut a = vec![vec![0i64; n]; n];
            let mut at = 0;
            for s in &sizes {
                for row in a.iter_mut().skip(at).take(*s) {
                    for x in row.iter_mut().skip(at).take(*s) {
                        *x = rng.gen_range(-3..=3);
                    }
                }
                at += s;
            }
            let mut perm: Vec<usize> = (0..n).collect();
            for i in (1..n).rev() {
                perm.swap(i, rng.gen_range(0..=i));
            }
            let a: Vec<Vec<i64>> = perm
                .iter()
                .map(|&i| perm.iter().map(|&j| a[i][j]).collect())
                .collect();
            let (Some(fast), Some(dense)) = (det_and_inverse(&a), dense_det_and_inverse(&a)) else {
                assert_eq!(
                    det_and_inverse(&a).is_none(),
                    dense_det_and_inverse(&a).is_none()
                );
                continue;
            };
            tried += 1;
            assert_eq!(fast, dense);
            assert_eq!(fast.1, rational_inverse(&a).unwrap());
        }
    }

    #[test]
    fn large_entries_do_not_overflow() {
        // 64x64 with entries of a few dozen: the determinant is far beyond i128.
        let n = 64;
        let sym: Vec<Vec<i64>> = (0..n)
            .map(|i| {
                (0..n)
                    .map(|j| {
                        let (a, b) = (i.min(j), i.max(j));
                        if a == b {
                            40
                        } else {
                            ((a * 7 + b * 13) % 5) as i64 - 2
                        }
                    })
                    .collect()
            })
            .collect();
        let (d, inv) = det_and_inverse(&sym).unwrap();
        assert!(d.bits() > 300);
        // K K^-1 = 1 exactly on a few rows.
        for i in [0, 31, 63] {
            for j in [0, 17, 63] {
                let s = (0..n).fold(Rational::zero(), |acc, k| acc + int(sym[i][k]) * &inv[k][j]);
                assert_eq!(s, Rational::from_u8((i == j) as u8).unwrap());
            }
        }
    }
}
