//! The integer lattice a pinned set spans (docs/physics.md section 8):
//! span_Z of the lattice vectors l of every translate, decided exactly.
//!
//! Membership by the Smith form ([`crate::math::smith`]): with P A Q =
//! diag(d_1..d_r, 0..), v lies in the column span of A iff (P v)_i is
//! divisible by d_i for i < r and vanishes for i >= r (Q is unimodular).
//! Two spans are equal iff each contains the other's generators. Because K
//! is invertible, comparing spans of the l is comparing spans of the
//! particle vectors n = K^-1 l. Big integers throughout.
//!
//! Infinite arrays: the families are translation invariant; a span is
//! compared on the periodic stand-in ring (W = 4 (R + 2) + 1 wires) and on
//! the open window of the same W wires (the translates that do not wrap).
//! Equal phases are equal on both; this finite test is what "equal" means
//! for an infinite array. The rank per wire is exact: the rank over Q(z)
//! of the cell polynomials, see [`per_wire_rank`].

use num_bigint::BigInt;
use num_integer::Integer;
use num_traits::Zero;

use crate::core::lattice::{Family, Lattice};
use crate::math::smith::{smith, Smith};
use crate::math::zmat::{big, ZMat};

/// The integer span of the lattice vectors of a set of families, with the
/// open-window span of an infinite array.
#[derive(Debug, Clone)]
pub struct PinnedLattice {
    n: usize,
    smith: Smith,
    /// Infinite arrays: the span of the translates that do not wrap.
    window: Option<Box<PinnedLattice>>,
    /// P by columns and the invariant factors, when every entry fits in
    /// i64 (membership is then decided in i128, falling back to big
    /// integers on overflow).
    small: Option<(Vec<Vec<i64>>, Vec<i64>)>,
}

impl PinnedLattice {
    /// Span of every translate of `families` (dense vectors of length n).
    pub fn new(n: usize, families: &[&Family]) -> PinnedLattice {
        let rows: Vec<Vec<i64>> = families
            .iter()
            .flat_map(|f| f.translates.iter().map(|t| t.l.clone()))
            .collect();
        PinnedLattice::of_rows(n, &rows)
    }

    /// The span on a system's lattice: for an infinite array, also the span
    /// of the translates inside the open window (see the module docs).
    pub fn on(lat: &Lattice, families: &[&Family]) -> PinnedLattice {
        let mut all = PinnedLattice::new(lat.n, families);
        if lat.infinite {
            let rows: Vec<Vec<i64>> = families
                .iter()
                .flat_map(|f| f.translates.iter())
                .filter(|t| t.parts.iter().all(|(w, _)| *w >= t.anchor))
                .map(|t| t.l.clone())
                .collect();
            all.window = Some(Box::new(PinnedLattice::of_rows(lat.n, &rows)));
        }
        all
    }

    fn of_rows(n: usize, rows: &[Vec<i64>]) -> PinnedLattice {
        let a = if rows.is_empty() {
            ZMat::zeros(n, 0)
        } else {
            ZMat::from_i64(rows, n).transpose()
        };
        let smith = smith(&a);
        let small = small_form(&smith);
        PinnedLattice {
            n,
            smith,
            window: None,
            small,
        }
    }

    /// Rank over the rationals (gapped pairs of a finite array).
    pub fn rank(&self) -> usize {
        self.smith.rank()
    }

    /// v in span_Z (exact; see the module docs).
    pub fn contains(&self, v: &[i64]) -> bool {
        debug_assert_eq!(v.len(), self.n);
        if let Some(found) = self.contains_small(v) {
            return found;
        }
        self.contains_big(&big(v))
    }

    /// [`PinnedLattice::contains`] in i128 over the non-zero entries of v;
    /// None without the small form or on overflow.
    fn contains_small(&self, v: &[i64]) -> Option<bool> {
        let (cols, diag) = self.small.as_ref()?;
        let mut y = vec![0i128; cols.first().map_or(0, |c| c.len())];
        for (j, &x) in v.iter().enumerate().filter(|(_, x)| **x != 0) {
            for (yi, &p) in y.iter_mut().zip(&cols[j]) {
                *yi = yi.checked_add((p as i128).checked_mul(x as i128)?)?;
            }
        }
        Some(y.iter().enumerate().all(|(i, yi)| match diag.get(i) {
            Some(d) => yi % (*d as i128) == 0,
            None => *yi == 0,
        }))
    }

    fn contains_big(&self, v: &[BigInt]) -> bool {
        let y = self.smith.p.mul_vec(v);
        y.iter()
            .enumerate()
            .all(|(i, yi)| match self.smith.diag.get(i) {
                Some(d) => yi.is_multiple_of(d),
                None => yi.is_zero(),
            })
    }

    /// Every translate of the family lies in the span.
    pub fn contains_family(&self, f: &Family) -> bool {
        f.translates.iter().all(|t| self.contains(&t.l))
    }

    /// v in span_Q (the term is locked, though perhaps not pinned, by the
    /// set: its dimension in the pinned theory is zero).
    pub fn contains_rationally(&self, v: &[i64]) -> bool {
        let y = self.smith.p.mul_vec(&big(v));
        y.iter().skip(self.rank()).all(|yi| yi.is_zero())
    }

    /// The same lattice as the span of `families` (mutual membership).
    pub fn spans_same(&self, families: &[&Family]) -> bool {
        families.iter().all(|f| self.contains_family(f))
            && PinnedLattice::new(self.n, families).contains_all(self)
    }

    /// One phase: the same span (and, for infinite arrays, the same window
    /// span).
    pub fn same(&self, other: &PinnedLattice) -> bool {
        let windows = match (&self.window, &other.window) {
            (Some(a), Some(b)) => a.same(b),
            (None, None) => true,
            _ => false,
        };
        windows && self.contains_all(other) && other.contains_all(self)
    }

    /// Every generator of `other` lies in this span.
    fn contains_all(&self, other: &PinnedLattice) -> bool {
        // Generators of other's span: the columns of P^-1 D (P A Q = D).
        let s = &other.smith;
        (0..s.rank()).all(|i| {
            let col: Vec<BigInt> = s.p_inv.col(i).iter().map(|x| x * &s.diag[i]).collect();
            self.contains_big(&col)
        })
    }
}

/// Right-left pairs gapped per wire of an infinite array: the rank over
/// Q(z) of the polynomial vectors L_f(z) = sum_j l_j z^j of the pinned
/// families (cell vectors l_j on wire j of a translate unfolded from the
/// stand-in ring). Certificate as in `edges::line`: every minor has degree
/// at most min(n_c, P) D, so the largest rank at B + 1 distinct integer
/// points is the rank over Q(z). (l_j = K_c n_j: the same rank as the
/// particle vectors.)
pub fn per_wire_rank(lat: &Lattice, pinned: &[&Family]) -> usize {
    let polys: Vec<Vec<Vec<i64>>> = pinned
        .iter()
        .filter_map(|f| f.translates.first().map(|t| unfold(lat, &t.l)))
        .collect();
    let most = lat.cell.min(polys.len());
    let degree = polys
        .iter()
        .map(|p| p.len().saturating_sub(1))
        .max()
        .unwrap_or(0);
    let mut rank = 0;
    for z in 2..=(most * degree) as i64 + 2 {
        if rank == most {
            break;
        }
        let rows: Vec<Vec<BigInt>> = polys.iter().map(|p| evaluate(p, z)).collect();
        rank = rank.max(crate::math::bareiss::rank(&rows));
    }
    rank
}

/// Cell vectors of a ring vector, from the support wire after the largest
/// cyclic gap (unique: the stand-in ring is wider than twice every term).
fn unfold(lat: &Lattice, l: &[i64]) -> Vec<Vec<i64>> {
    let (c, w) = (lat.cell, lat.wires);
    let on: Vec<usize> = (0..w)
        .filter(|&j| l[j * c..(j + 1) * c].iter().any(|x| *x != 0))
        .collect();
    let (start, degree) = lat.unfolded_window(&on);
    let mut coeffs = vec![vec![0i64; c]; degree + 1];
    for &j in &on {
        coeffs[(j + w - start) % w] = l[j * c..(j + 1) * c].to_vec();
    }
    coeffs
}

/// sum_j l_j z^j, exactly (Horner).
fn evaluate(p: &[Vec<i64>], z: i64) -> Vec<BigInt> {
    let cell = p.first().map_or(0, |c| c.len());
    let z = BigInt::from(z);
    let mut v = vec![BigInt::zero(); cell];
    for c in p.iter().rev() {
        for (x, a) in v.iter_mut().zip(c) {
            *x = &*x * &z + a;
        }
    }
    v
}

/// P by columns and the invariant factors as i64, when they all fit.
fn small_form(smith: &Smith) -> Option<(Vec<Vec<i64>>, Vec<i64>)> {
    use num_traits::ToPrimitive;
    let p = &smith.p;
    let cols = (0..p.cols)
        .map(|j| (0..p.rows).map(|i| p.at(i, j).to_i64()).collect())
        .collect::<Option<Vec<Vec<i64>>>>()?;
    let diag = smith
        .diag
        .iter()
        .map(|d| d.to_i64().filter(|d| *d != 0))
        .collect::<Option<Vec<i64>>>()?;
    Some((cols, diag))
}
