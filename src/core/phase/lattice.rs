//! The integer lattice a pinned set spans (docs/physics.md section 8):
//! span_Z of the lattice vectors l of every translate, decided exactly.
//!
//! Membership by an echelon Z-basis of the span ([`crate::math::zbasis`]:
//! sparse rows keyed by their leading index, built by unimodular row
//! moves): v lies in span_Z iff it reduces to zero against the rows with
//! exact divisions, in span_Q iff its fraction-free reduction does. Two
//! spans are equal iff each contains the other's basis rows. Because K is
//! invertible, comparing spans of the l is comparing spans of the particle
//! vectors n = K^-1 l. Big integers throughout; the translates touch a few
//! wires each, so the work stays near linear in the number of wires (the
//! Smith form used before needed dense transforms of all fields).
//!
//! Infinite arrays: the families are translation invariant; a span is
//! compared on the periodic stand-in ring (W = 4 (R + 2) + 1 wires) and on
//! the open window of the same W wires (the translates that do not wrap).
//! Equal phases are equal on both; this finite test is what "equal" means
//! for an infinite array. The rank per wire is exact: the rank over Q(z)
//! of the cell polynomials, see [`per_wire_rank`].

use num_bigint::BigInt;
use num_traits::Zero;

use crate::core::lattice::{Family, Lattice};
use crate::math::zbasis::ZBasis;
use crate::math::zmat::big;

/// The integer span of the lattice vectors of a set of families, with the
/// open-window span of an infinite array.
#[derive(Debug, Clone)]
pub struct PinnedLattice {
    n: usize,
    basis: ZBasis,
    /// Infinite arrays: the span of the translates that do not wrap.
    window: Option<Box<PinnedLattice>>,
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
        PinnedLattice {
            n,
            basis: ZBasis::of_i64(rows),
            window: None,
        }
    }

    /// Rank over the rationals (gapped pairs of a finite array).
    pub fn rank(&self) -> usize {
        self.basis.rank()
    }

    /// v in span_Z (exact; see the module docs).
    pub fn contains(&self, v: &[i64]) -> bool {
        debug_assert_eq!(v.len(), self.n);
        self.basis.contains_i64(v)
    }

    /// Every translate of the family lies in the span.
    pub fn contains_family(&self, f: &Family) -> bool {
        f.translates.iter().all(|t| self.contains(&t.l))
    }

    /// v in span_Q (the term is locked, though perhaps not pinned, by the
    /// set: its dimension in the pinned theory is zero).
    pub fn contains_rationally(&self, v: &[i64]) -> bool {
        self.basis.contains_rationally(&big(v))
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

    /// Every generator of `other` (its basis rows) lies in this span.
    fn contains_all(&self, other: &PinnedLattice) -> bool {
        other
            .basis
            .rows_dense(other.n)
            .iter()
            .all(|r| self.basis.contains(r))
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
