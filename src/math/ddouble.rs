//! Double-double arithmetic and small dense symmetric-matrix routines in it.
//!
//! A [`Dd`] is an unevaluated sum `hi + lo` of two doubles with
//! `|lo| <= ulp(hi) / 2`, carrying about 31 significant decimal digits. The
//! building blocks are the error-free transformations TwoSum [Knuth, TAOCP
//! vol. 2, 4.2.2] and TwoProd with a fused multiply-add [Dekker, Numer. Math.
//! 18, 224 (1971)]; the operations follow Dekker's and Bailey's double-double
//! algorithms. Each operation has relative error below [`UNIT_ROUNDOFF`]
//! (a conservative 2^-102, several times the textbook bound).
//!
//! Matrices are square, row-major `n x n` vectors of [`Dd`] ([`DdMat`]).
//! Routines: Cholesky of a symmetric positive definite matrix, inverse of a
//! lower-triangular matrix, products, and the cyclic Jacobi eigen-solver for
//! a symmetric matrix [Golub & Van Loan, "Matrix Computations", 8.5], which
//! also gives small eigenvalues to high relative accuracy.
//! Invariant: every routine is deterministic (fixed loop order).

use std::ops::{Add, Div, Mul, Neg, Sub};

/// Relative error bound of one double-double operation used in error
/// estimates (2^-102; the operations below reach about 2^-104).
pub const UNIT_ROUNDOFF: f64 = 1.0 / (1u128 << 102) as f64;

/// A double-double number `hi + lo`.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Dd {
    /// Leading part (the value rounded to a double).
    pub hi: f64,
    /// Trailing part.
    pub lo: f64,
}

fn two_sum(a: f64, b: f64) -> (f64, f64) {
    let s = a + b;
    let bb = s - a;
    (s, (a - (s - bb)) + (b - bb))
}

fn quick_two_sum(a: f64, b: f64) -> (f64, f64) {
    let s = a + b;
    (s, b - (s - a))
}

impl Dd {
    /// Zero.
    pub const ZERO: Dd = Dd { hi: 0.0, lo: 0.0 };
    /// One.
    pub const ONE: Dd = Dd { hi: 1.0, lo: 0.0 };

    /// A double, exactly.
    pub fn from_f64(x: f64) -> Dd {
        Dd { hi: x, lo: 0.0 }
    }

    /// The value rounded to a double.
    pub fn to_f64(self) -> f64 {
        self.hi + self.lo
    }

    /// Absolute value.
    pub fn abs(self) -> Dd {
        if self.hi < 0.0 || (self.hi == 0.0 && self.lo < 0.0) {
            -self
        } else {
            self
        }
    }

    /// Square root (Newton step on the double root); NaN for x < 0.
    pub fn sqrt(self) -> Dd {
        if self.hi <= 0.0 {
            return if self.hi == 0.0 {
                Dd::ZERO
            } else {
                Dd::from_f64(f64::NAN)
            };
        }
        let r = self.hi.sqrt();
        let rr = Dd::from_f64(r) * Dd::from_f64(r);
        let corr = (self - rr).hi / (2.0 * r);
        let (hi, lo) = quick_two_sum(r, corr);
        Dd { hi, lo }
    }
}

impl Neg for Dd {
    type Output = Dd;
    fn neg(self) -> Dd {
        Dd {
            hi: -self.hi,
            lo: -self.lo,
        }
    }
}

impl Add for Dd {
    type Output = Dd;
    fn add(self, o: Dd) -> Dd {
        let (s, e) = two_sum(self.hi, o.hi);
        let (t, f) = two_sum(self.lo, o.lo);
        let (s, e) = quick_two_sum(s, e + t);
        let (hi, lo) = quick_two_sum(s, e + f);
        Dd { hi, lo }
    }
}

impl Sub for Dd {
    type Output = Dd;
    fn sub(self, o: Dd) -> Dd {
        self + (-o)
    }
}

impl Mul for Dd {
    type Output = Dd;
    fn mul(self, o: Dd) -> Dd {
        let p = self.hi * o.hi;
        let e = self.hi.mul_add(o.hi, -p);
        let e = e + (self.hi * o.lo + self.lo * o.hi);
        let (hi, lo) = quick_two_sum(p, e);
        Dd { hi, lo }
    }
}

impl Div for Dd {
    type Output = Dd;
    fn div(self, o: Dd) -> Dd {
        let q1 = self.hi / o.hi;
        let r = self - o * Dd::from_f64(q1);
        let q2 = r.hi / o.hi;
        let r = r - o * Dd::from_f64(q2);
        let q3 = r.hi / o.hi;
        let (hi, lo) = quick_two_sum(q1, q2);
        Dd { hi, lo } + Dd::from_f64(q3)
    }
}

/// A square matrix of double-doubles, row-major.
#[derive(Debug, Clone, PartialEq)]
pub struct DdMat {
    /// Order.
    pub n: usize,
    /// Entries, row-major.
    pub a: Vec<Dd>,
}

impl DdMat {
    /// The zero matrix of order n.
    pub fn zeros(n: usize) -> DdMat {
        DdMat {
            n,
            a: vec![Dd::ZERO; n * n],
        }
    }

    /// The identity of order n.
    pub fn identity(n: usize) -> DdMat {
        let mut m = DdMat::zeros(n);
        for i in 0..n {
            m.a[i * n + i] = Dd::ONE;
        }
        m
    }

    /// From a function of (row, column) giving doubles (exactly).
    pub fn from_fn(n: usize, f: impl Fn(usize, usize) -> f64) -> DdMat {
        let mut m = DdMat::zeros(n);
        for i in 0..n {
            for j in 0..n {
                m.a[i * n + j] = Dd::from_f64(f(i, j));
            }
        }
        m
    }

    /// Entry (i, j).
    pub fn at(&self, i: usize, j: usize) -> Dd {
        self.a[i * self.n + j]
    }

    fn set(&mut self, i: usize, j: usize, x: Dd) {
        self.a[i * self.n + j] = x;
    }

    /// The transpose.
    pub fn transpose(&self) -> DdMat {
        let n = self.n;
        let mut t = DdMat::zeros(n);
        for i in 0..n {
            for j in 0..n {
                t.set(j, i, self.at(i, j));
            }
        }
        t
    }

    /// The product self * o.
    pub fn mul(&self, o: &DdMat) -> DdMat {
        let n = self.n;
        let mut p = DdMat::zeros(n);
        for i in 0..n {
            for k in 0..n {
                let x = self.at(i, k);
                if x.hi == 0.0 {
                    continue;
                }
                for j in 0..n {
                    let y = o.at(k, j);
                    p.a[i * n + j] = p.a[i * n + j] + x * y;
                }
            }
        }
        p
    }

    /// The symmetric part (self + self^T) / 2.
    pub fn symmetrised(&self) -> DdMat {
        let n = self.n;
        let half = Dd::from_f64(0.5);
        let mut s = self.clone();
        for i in 0..n {
            for j in 0..i {
                let x = (self.at(i, j) + self.at(j, i)) * half;
                s.set(i, j, x);
                s.set(j, i, x);
            }
        }
        s
    }
}

/// Cholesky factor L (lower triangular, V = L L^T) of a symmetric matrix
/// (the lower triangle is read); None when a pivot is not positive.
pub fn cholesky(v: &DdMat) -> Option<DdMat> {
    let n = v.n;
    let mut l = DdMat::zeros(n);
    for j in 0..n {
        let mut d = v.at(j, j);
        for k in 0..j {
            d = d - l.at(j, k) * l.at(j, k);
        }
        if d.hi <= 0.0 || d.hi.is_nan() {
            return None;
        }
        let ljj = d.sqrt();
        l.set(j, j, ljj);
        for i in j + 1..n {
            let mut s = v.at(i, j);
            for k in 0..j {
                s = s - l.at(i, k) * l.at(j, k);
            }
            l.set(i, j, s / ljj);
        }
    }
    Some(l)
}

/// Inverse of a lower-triangular matrix with nonzero diagonal (forward
/// substitution, column by column).
pub fn lower_inverse(l: &DdMat) -> DdMat {
    let n = l.n;
    let mut x = DdMat::zeros(n);
    for c in 0..n {
        for i in c..n {
            let mut s = if i == c { Dd::ONE } else { Dd::ZERO };
            for k in c..i {
                s = s - l.at(i, k) * x.at(k, c);
            }
            x.set(i, c, s / l.at(i, i));
        }
    }
    x
}

/// Eigen-decomposition of a symmetric matrix by cyclic Jacobi rotations:
/// (eigenvalues, eigenvectors as the columns of an orthogonal matrix), in
/// the order the rotations leave them. A pair (p, q) is rotated while
/// |a_pq| exceeds 2^-106 sqrt(|a_pp a_qq|) (the relative-accuracy
/// criterion); at most 60 sweeps. An entry that is not finite (in `s` or
/// after a sweep) ends the iteration at once: no rotation can repair it,
/// and the caller sees it in the result (NaN never meets the criterion, so
/// every sweep would otherwise rotate every pair, 60 times).
pub fn jacobi_eigen(s: &DdMat) -> (Vec<Dd>, DdMat) {
    let n = s.n;
    let mut a = s.symmetrised();
    let mut u = DdMat::identity(n);
    let tiny = 2f64.powi(-106);
    for _ in 0..60 {
        if !(0..n).all(|p| (0..n).all(|q| a.at(p, q).hi.is_finite())) {
            break;
        }
        let mut rotated = false;
        for p in 0..n {
            for q in p + 1..n {
                let apq = a.at(p, q);
                let scale = (a.at(p, p).hi * a.at(q, q).hi).abs().sqrt();
                if apq.hi == 0.0 || apq.hi.abs() <= tiny * scale {
                    continue;
                }
                rotated = true;
                rotate(&mut a, &mut u, p, q);
            }
        }
        if !rotated {
            break;
        }
    }
    ((0..n).map(|i| a.at(i, i)).collect(), u)
}

/// One Jacobi rotation annihilating a_pq (a symmetric), accumulated in u.
fn rotate(a: &mut DdMat, u: &mut DdMat, p: usize, q: usize) {
    let n = a.n;
    let apq = a.at(p, q);
    let theta = (a.at(q, q) - a.at(p, p)) / (Dd::from_f64(2.0) * apq);
    let root = (theta * theta + Dd::ONE).sqrt();
    let t = if theta.hi >= 0.0 {
        Dd::ONE / (theta + root)
    } else {
        -(Dd::ONE / (root - theta))
    };
    let c = Dd::ONE / (t * t + Dd::ONE).sqrt();
    let s = t * c;
    for k in 0..n {
        let (akp, akq) = (a.at(k, p), a.at(k, q));
        a.set(k, p, c * akp - s * akq);
        a.set(k, q, s * akp + c * akq);
    }
    for k in 0..n {
        let (apk, aqk) = (a.at(p, k), a.at(q, k));
        a.set(p, k, c * apk - s * aqk);
        a.set(q, k, s * apk + c * aqk);
    }
    a.set(p, q, Dd::ZERO);
    a.set(q, p, Dd::ZERO);
    for k in 0..n {
        let (ukp, ukq) = (u.at(k, p), u.at(k, q));
        u.set(k, p, c * ukp - s * ukq);
        u.set(k, q, s * ukp + c * ukq);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn one_third_times_three_is_one_to_double_double_accuracy() {
        let third = Dd::ONE / Dd::from_f64(3.0);
        let err = (third * Dd::from_f64(3.0) - Dd::ONE).to_f64().abs();
        assert!(err < 1e-31, "{err}");
        // 1/3 is not a double: the trailing part carries the next digits.
        assert!(third.lo != 0.0);
    }

    #[test]
    fn sqrt_two_squared_is_two() {
        let r = Dd::from_f64(2.0).sqrt();
        assert!((r * r - Dd::from_f64(2.0)).to_f64().abs() < 1e-31);
    }

    #[test]
    fn jacobi_resolves_a_tiny_eigenvalue_of_a_nearly_singular_matrix() {
        // [[1, 1 - e], [1 - e, 1]] has eigenvalues e and 2 - e (derived:
        // eigenvectors (1, -1) and (1, 1)); with e = 2^-40 a double-precision
        // solver gets e only to about 1e-16 / e ~ 1e-4 relative.
        let e = 2f64.powi(-40);
        let m = DdMat::from_fn(2, |i, j| if i == j { 1.0 } else { 1.0 - e });
        let (vals, u) = jacobi_eigen(&m);
        let small = vals
            .iter()
            .map(|x| x.to_f64())
            .fold(f64::INFINITY, f64::min);
        assert!((small - e).abs() / e < 1e-15, "{small} vs {e}");
        let check = u.transpose().mul(&u);
        for i in 0..2 {
            for j in 0..2 {
                let want = if i == j { 1.0 } else { 0.0 };
                assert!((check.at(i, j).to_f64() - want).abs() < 1e-30);
            }
        }
    }

    #[test]
    fn cholesky_and_lower_inverse_reproduce_the_identity() {
        let v = DdMat::from_fn(3, |i, j| {
            [[4.0, 2.0, 0.5], [2.0, 3.0, 1.0], [0.5, 1.0, 2.0]][i][j]
        });
        let l = cholesky(&v).unwrap();
        let back = l.mul(&l.transpose());
        let li = lower_inverse(&l);
        let id = li.mul(&l);
        for i in 0..3 {
            for j in 0..3 {
                assert!((back.at(i, j) - v.at(i, j)).to_f64().abs() < 1e-30);
                let want = if i == j { 1.0 } else { 0.0 };
                assert!((id.at(i, j).to_f64() - want).abs() < 1e-30);
            }
        }
        let bad = DdMat::from_fn(2, |i, j| if i == j { 1.0 } else { 2.0 });
        assert!(cholesky(&bad).is_none());
    }
}
