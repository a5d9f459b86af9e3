//! Dense big-integer matrices and the exact helpers the lattice algorithms
//! need: products, Gram matrices, elementary row and column moves, the
//! determinant (through [`crate::math::bareiss`]) and the exact inertia and
//! signature of a symmetric matrix (congruence diagonalisation over the
//! rationals; Sylvester's law of inertia).
//!
//! Invariants: a [`ZMat`] keeps its shape even with zero rows or columns;
//! no floats, no overflow.

use num_bigint::BigInt;
use num_traits::{One, Signed, Zero};

use crate::math::bareiss;
use crate::math::rational::Rational;

/// A dense integer matrix, row-major. Keeps its shape even with zero rows or
/// columns (an empty basis is a matrix with zero columns).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ZMat {
    /// Number of rows.
    pub rows: usize,
    /// Number of columns.
    pub cols: usize,
    a: Vec<BigInt>,
}

impl ZMat {
    /// The zero matrix.
    pub fn zeros(rows: usize, cols: usize) -> ZMat {
        ZMat {
            rows,
            cols,
            a: vec![BigInt::zero(); rows * cols],
        }
    }

    /// The identity.
    pub fn identity(n: usize) -> ZMat {
        let mut m = ZMat::zeros(n, n);
        for i in 0..n {
            m.a[i * n + i] = BigInt::one();
        }
        m
    }

    /// From rows of machine integers (all of the same length `cols`).
    pub fn from_i64(rows: &[Vec<i64>], cols: usize) -> ZMat {
        let mut m = ZMat::zeros(rows.len(), cols);
        for (i, r) in rows.iter().enumerate() {
            debug_assert_eq!(r.len(), cols);
            for (j, x) in r.iter().enumerate() {
                m.a[i * cols + j] = BigInt::from(*x);
            }
        }
        m
    }

    /// From rows of big integers (all of the same length `cols`).
    pub fn from_rows(rows: &[Vec<BigInt>], cols: usize) -> ZMat {
        let mut m = ZMat::zeros(rows.len(), cols);
        for (i, r) in rows.iter().enumerate() {
            debug_assert_eq!(r.len(), cols);
            for (j, x) in r.iter().enumerate() {
                m.a[i * cols + j] = x.clone();
            }
        }
        m
    }

    /// From columns (all of length `rows`).
    pub fn from_cols(rows: usize, cols: &[Vec<BigInt>]) -> ZMat {
        let mut m = ZMat::zeros(rows, cols.len());
        for (j, c) in cols.iter().enumerate() {
            debug_assert_eq!(c.len(), rows);
            for (i, x) in c.iter().enumerate() {
                m.a[i * cols.len() + j] = x.clone();
            }
        }
        m
    }

    /// Entry (i, j).
    pub fn at(&self, i: usize, j: usize) -> &BigInt {
        &self.a[i * self.cols + j]
    }

    /// Mutable entry (i, j).
    pub fn at_mut(&mut self, i: usize, j: usize) -> &mut BigInt {
        &mut self.a[i * self.cols + j]
    }

    /// Row i as a vector.
    pub fn row(&self, i: usize) -> Vec<BigInt> {
        self.a[i * self.cols..(i + 1) * self.cols].to_vec()
    }

    /// Column j as a vector.
    pub fn col(&self, j: usize) -> Vec<BigInt> {
        (0..self.rows).map(|i| self.at(i, j).clone()).collect()
    }

    /// All columns.
    pub fn columns(&self) -> Vec<Vec<BigInt>> {
        (0..self.cols).map(|j| self.col(j)).collect()
    }

    /// The columns in a range, as a matrix.
    pub fn col_range(&self, range: std::ops::Range<usize>) -> ZMat {
        let cols: Vec<Vec<BigInt>> = range.map(|j| self.col(j)).collect();
        ZMat::from_cols(self.rows, &cols)
    }

    /// The rows in a range, as a matrix.
    pub fn row_range(&self, range: std::ops::Range<usize>) -> ZMat {
        let rows: Vec<Vec<BigInt>> = range.map(|i| self.row(i)).collect();
        ZMat::from_rows(&rows, self.cols)
    }

    /// Transpose.
    pub fn transpose(&self) -> ZMat {
        let mut t = ZMat::zeros(self.cols, self.rows);
        for i in 0..self.rows {
            for j in 0..self.cols {
                t.a[j * self.rows + i] = self.at(i, j).clone();
            }
        }
        t
    }

    /// Product self * other.
    pub fn mul(&self, other: &ZMat) -> ZMat {
        assert_eq!(self.cols, other.rows, "matrix shapes");
        let mut p = ZMat::zeros(self.rows, other.cols);
        for i in 0..self.rows {
            for k in 0..self.cols {
                let x = self.at(i, k);
                if x.is_zero() {
                    continue;
                }
                for j in 0..other.cols {
                    let y = other.at(k, j);
                    if !y.is_zero() {
                        p.a[i * other.cols + j] += x * y;
                    }
                }
            }
        }
        p
    }

    /// Matrix times vector.
    pub fn mul_vec(&self, v: &[BigInt]) -> Vec<BigInt> {
        assert_eq!(self.cols, v.len(), "matrix-vector shapes");
        // Only the non-zero entries of v contribute (the vectors of arrays
        // touch a few wires).
        let nz: Vec<usize> = (0..v.len()).filter(|&j| !v[j].is_zero()).collect();
        (0..self.rows)
            .map(|i| {
                let row = &self.a[i * self.cols..(i + 1) * self.cols];
                nz.iter()
                    .filter(|&&j| !row[j].is_zero())
                    .fold(BigInt::zero(), |acc, &j| acc + &row[j] * &v[j])
            })
            .collect()
    }

    /// Gram matrix B^T G B of the columns of `self` under the form G.
    pub fn gram(&self, form: &ZMat) -> ZMat {
        self.transpose().mul(&form.mul(self))
    }

    /// True when every entry is zero.
    pub fn is_zero(&self) -> bool {
        self.a.iter().all(|x| x.is_zero())
    }

    /// True when the matrix is square and symmetric.
    pub fn is_symmetric(&self) -> bool {
        self.rows == self.cols
            && (0..self.rows).all(|i| (0..i).all(|j| self.at(i, j) == self.at(j, i)))
    }

    /// Entries as rows of big integers.
    pub fn to_rows(&self) -> Vec<Vec<BigInt>> {
        (0..self.rows).map(|i| self.row(i)).collect()
    }

    /// row_i += q * row_j.
    pub fn add_row_multiple(&mut self, i: usize, j: usize, q: &BigInt) {
        if q.is_zero() {
            return;
        }
        for c in 0..self.cols {
            let y = self.a[j * self.cols + c].clone();
            if !y.is_zero() {
                self.a[i * self.cols + c] += q * y;
            }
        }
    }

    /// col_i += q * col_j.
    pub fn add_col_multiple(&mut self, i: usize, j: usize, q: &BigInt) {
        if q.is_zero() {
            return;
        }
        for r in 0..self.rows {
            let y = self.a[r * self.cols + j].clone();
            if !y.is_zero() {
                self.a[r * self.cols + i] += q * y;
            }
        }
    }

    /// Swap rows i and j.
    pub fn swap_rows(&mut self, i: usize, j: usize) {
        if i != j {
            for c in 0..self.cols {
                self.a.swap(i * self.cols + c, j * self.cols + c);
            }
        }
    }

    /// Swap columns i and j.
    pub fn swap_cols(&mut self, i: usize, j: usize) {
        if i != j {
            for r in 0..self.rows {
                self.a.swap(r * self.cols + i, r * self.cols + j);
            }
        }
    }

    /// Negate row i.
    pub fn negate_row(&mut self, i: usize) {
        for c in 0..self.cols {
            let x = std::mem::take(&mut self.a[i * self.cols + c]);
            self.a[i * self.cols + c] = -x;
        }
    }

    /// Negate column j.
    pub fn negate_col(&mut self, j: usize) {
        for r in 0..self.rows {
            let x = std::mem::take(&mut self.a[r * self.cols + j]);
            self.a[r * self.cols + j] = -x;
        }
    }
}

/// The basis move b_i += k b_j, applied to a Gram matrix G (both its row
/// and column i) and to the change of basis U (column i).
pub fn basis_move(g: &mut ZMat, u: &mut ZMat, i: usize, j: usize, k: &BigInt) {
    if k.is_zero() {
        return;
    }
    g.add_col_multiple(i, j, k);
    g.add_row_multiple(i, j, k);
    u.add_col_multiple(i, j, k);
}

/// Dot product of two integer vectors.
pub fn dot(a: &[BigInt], b: &[BigInt]) -> BigInt {
    a.iter()
        .zip(b)
        .filter(|(x, y)| !x.is_zero() && !y.is_zero())
        .fold(BigInt::zero(), |acc, (x, y)| acc + x * y)
}

/// Integer vector from machine integers.
pub fn big(v: &[i64]) -> Vec<BigInt> {
    v.iter().map(|x| BigInt::from(*x)).collect()
}

/// The bilinear form u^T G v.
pub fn form(g: &ZMat, u: &[BigInt], v: &[BigInt]) -> BigInt {
    dot(u, &g.mul_vec(v))
}

/// Determinant of a square matrix (fraction-free elimination, see
/// [`crate::math::bareiss`]). The empty matrix has determinant 1.
pub fn det(m: &ZMat) -> BigInt {
    assert_eq!(m.rows, m.cols, "determinant of a square matrix");
    bareiss::det(&m.to_rows())
}

/// Signature (n+, n-) of a symmetric non-degenerate integer matrix given
/// by rows, from the exact [`inertia`]; `None` when it is degenerate.
pub fn signature(k: &[Vec<i64>]) -> Option<(usize, usize)> {
    let (pos, neg, zero) = inertia(&ZMat::from_i64(k, k.len()));
    (zero == 0).then_some((pos, neg))
}

/// Inertia (n+, n-, n0) of a symmetric integer matrix, exactly: congruence
/// diagonalisation over the rationals (Sylvester's law of inertia).
pub fn inertia(g: &ZMat) -> (usize, usize, usize) {
    let n = g.rows;
    let mut a: Vec<Vec<Rational>> = (0..n)
        .map(|i| {
            (0..n)
                .map(|j| Rational::from_integer(g.at(i, j).clone()))
                .collect()
        })
        .collect();
    let mut active: Vec<usize> = (0..n).collect();
    let (mut pos, mut neg) = (0, 0);
    while !active.is_empty() {
        let pivot = active.iter().copied().find(|&i| !a[i][i].is_zero());
        let i = match pivot {
            Some(i) => i,
            None => {
                // All diagonal entries vanish: b_i -> b_i + b_j for a pair with
                // a_ij != 0 makes a_ii = 2 a_ij != 0.
                let pair = active.iter().find_map(|&i| {
                    active
                        .iter()
                        .find(|&&j| j != i && !a[i][j].is_zero())
                        .map(|&j| (i, j))
                });
                let Some((i, j)) = pair else {
                    break;
                };
                let row_j = a[j].clone();
                for (x, y) in a[i].iter_mut().zip(row_j) {
                    *x += y;
                }
                for row in a.iter_mut() {
                    let y = row[j].clone();
                    row[i] += y;
                }
                i
            }
        };
        let piv = a[i][i].clone();
        if piv.is_positive() {
            pos += 1;
        } else {
            neg += 1;
        }
        active.retain(|&k| k != i);
        for &j in &active {
            let f = &a[j][i] / &piv;
            if f.is_zero() {
                continue;
            }
            for &k in &active {
                let d = &f * &a[i][k];
                a[j][k] -= d;
            }
        }
    }
    (pos, neg, n - pos - neg)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn m(rows: &[&[i64]]) -> ZMat {
        let cols = rows.first().map_or(0, |r| r.len());
        ZMat::from_i64(&rows.iter().map(|r| r.to_vec()).collect::<Vec<_>>(), cols)
    }

    #[test]
    fn determinants() {
        // A_4 Cartan matrix: det 5 (standard); the others by hand.
        let a4 = m(&[
            &[2, -1, 0, 0],
            &[-1, 2, -1, 0],
            &[0, -1, 2, -1],
            &[0, 0, -1, 2],
        ]);
        assert_eq!(det(&a4), BigInt::from(5));
        assert_eq!(det(&m(&[&[0, 1], &[1, 0]])), BigInt::from(-1));
        assert_eq!(det(&m(&[&[1, 2], &[2, 4]])), BigInt::zero());
        assert_eq!(det(&ZMat::zeros(0, 0)), BigInt::one());
    }

    #[test]
    fn inertia_of_known_forms() {
        // Hyperbolic plane U = [[0,1],[1,0]]: signature (1,1).
        assert_eq!(inertia(&m(&[&[0, 1], &[1, 0]])), (1, 1, 0));
        assert_eq!(inertia(&m(&[&[-3, -4], &[-4, -5]])), (1, 1, 0));
        assert_eq!(inertia(&m(&[&[3, 1], &[1, 3]])), (2, 0, 0));
        assert_eq!(inertia(&m(&[&[1, 1], &[1, 1]])), (1, 0, 1));
        assert_eq!(inertia(&m(&[&[0, 0], &[0, 0]])), (0, 0, 2));
        // Signatures: Halperin (331) is positive definite [Wen, Adv. Phys.
        // 44, 405 (1995)]; sigma_z has one of each; singular has none.
        assert_eq!(signature(&[vec![3, 1], vec![1, 3]]), Some((2, 0)));
        assert_eq!(signature(&[vec![1, 0], vec![0, -1]]), Some((1, 1)));
        assert_eq!(signature(&[vec![1, 1], vec![1, 1]]), None);
    }
}
