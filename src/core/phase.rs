//! The identity of a pinned phase (physics reference section 7, "Naming
//! the phase"): two pinned sets are one phase iff they span the same
//! lattice, span_Z P_1 = span_Z P_2 (pinning 2l is not pinning l); the
//! phase's label and its invariants.
//!
//! Method (exact, big integers). A pinned set is given as term families;
//! its lattice is spanned by the lattice vectors l of every translate. We
//! compare spans of the l (integers always) rather than of the particle
//! vectors n = K^-1 l: K is invertible, so span_Z{l_i} = span_Z{l'_j} iff
//! span_Z{n_i} = span_Z{n'_j}. Each span is brought to its row Hermite
//! normal form (unique: echelon, positive pivots, entries above a pivot
//! reduced into [0, pivot)), and two spans are equal iff their forms are.
//!
//! - Explicit models, open and periodic arrays: all translates of the
//!   finite array, exactly.
//! - Infinite arrays: the families are translation invariant, so the
//!   lattice is a module over the Laurent polynomials. We compare the
//!   forms on the periodic stand-in ring of the system (W = 4 (R + 2) + 1
//!   wires) and on an open window of the same W wires (the translates that
//!   fit): equal phases are equal on both; this finite test is what
//!   "equal" means here for an infinite array (stated in every report that
//!   uses it). Its rank per wire (gapped pairs per wire) is exact: the rank
//!   of P(z) over Q(z), which is the largest rank of P(z_0) over z_0 = 1,
//!   2, ..., d + 1 for minors of degree at most d (a non-zero polynomial of
//!   degree d has at most d roots).
//!
//! Label: the fewest terms, listed before generated, whose families span
//! the lattice, joined in braces (`{t_up, t_dn}`); `gapless` when nothing
//! is pinned. Invariants: gapped_pairs = rank, gapless_modes = N - 2 rank
//! (per wire for infinite arrays), fully_gapped when none is left.

use num_bigint::BigInt;
use num_integer::Integer;
use num_traits::{Signed, Zero};

use crate::core::lattice::{Family, Lattice};

/// A lattice in Hermite normal form (rows, each of length `n`).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Hnf {
    /// Ambient dimension.
    pub n: usize,
    /// Basis rows (echelon, positive pivots, reduced above pivots).
    pub rows: Vec<Vec<BigInt>>,
}

impl Hnf {
    /// The row Hermite normal form of the span of the given vectors.
    pub fn of(n: usize, vectors: &[Vec<BigInt>]) -> Hnf {
        let mut m: Vec<Vec<BigInt>> = vectors.to_vec();
        let mut r = 0;
        let mut pivots = Vec::new();
        for c in 0..n {
            if r == m.len() {
                break;
            }
            if gcd_column(&mut m, r, c) {
                pivots.push(c);
                r += 1;
            }
        }
        m.truncate(r);
        for (i, &c) in pivots.iter().enumerate() {
            for k in 0..i {
                let q = m[k][c].div_floor(&m[i][c]);
                if !q.is_zero() {
                    let row = m[i].clone();
                    for (x, y) in m[k].iter_mut().zip(&row) {
                        *x -= &q * y;
                    }
                }
            }
        }
        Hnf { n, rows: m }
    }

    /// Rank of the lattice.
    pub fn rank(&self) -> usize {
        self.rows.len()
    }

    /// The lattice holds v.
    pub fn contains(&self, v: &[BigInt]) -> bool {
        let mut v = v.to_vec();
        for row in &self.rows {
            let c = row
                .iter()
                .position(|x| !x.is_zero())
                .expect("HNF rows are non-zero");
            let (q, rem) = v[c].div_rem(&row[c]);
            if !rem.is_zero() {
                return false;
            }
            for (x, y) in v.iter_mut().zip(row) {
                *x -= &q * y;
            }
        }
        v.iter().all(|x| x.is_zero())
    }
}

/// Euclid on column c among rows r..: leaves gcd (positive) at row r and
/// zeros below; false when the column is zero there.
fn gcd_column(m: &mut [Vec<BigInt>], r: usize, c: usize) -> bool {
    loop {
        let best = (r..m.len())
            .filter(|&i| !m[i][c].is_zero())
            .min_by(|&a, &b| m[a][c].abs().cmp(&m[b][c].abs()));
        let Some(p) = best else { return false };
        m.swap(r, p);
        if m[r][c].is_negative() {
            m[r].iter_mut().for_each(|x| *x = -x.clone());
        }
        let mut done = true;
        for i in r + 1..m.len() {
            if m[i][c].is_zero() {
                continue;
            }
            let q = m[i][c].div_floor(&m[r][c]);
            let row = m[r].clone();
            for (x, y) in m[i].iter_mut().zip(&row) {
                *x -= &q * y;
            }
            done &= m[i][c].is_zero();
        }
        if done {
            return true;
        }
    }
}

fn big(v: &[i64]) -> Vec<BigInt> {
    v.iter().map(|&x| BigInt::from(x)).collect()
}

/// The lattice spanned by every translate of the families (all fields of
/// the lattice).
pub fn span(lat: &Lattice, families: &[&Family]) -> Hnf {
    let vectors: Vec<Vec<BigInt>> = families
        .iter()
        .flat_map(|f| f.translates.iter().map(|t| big(&t.l)))
        .collect();
    Hnf::of(lat.n, &vectors)
}

/// The translates lying inside the open window of the first `wires` wires
/// (for infinite arrays: every translate that does not wrap around the
/// stand-in ring).
fn window_span(lat: &Lattice, families: &[&Family]) -> Hnf {
    let vectors: Vec<Vec<BigInt>> = families
        .iter()
        .flat_map(|f| f.translates.iter())
        .filter(|t| t.parts.iter().all(|(w, _)| *w >= t.anchor))
        .map(|t| big(&t.l))
        .collect();
    Hnf::of(lat.n, &vectors)
}

/// The identity of a pinned lattice on a system's lattice.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct PhaseLattice {
    /// The span of all translates (finite arrays, explicit models; the
    /// stand-in ring of an infinite array).
    pub all: Hnf,
    /// Infinite arrays: the span of the translates inside an open window.
    pub window: Option<Hnf>,
    /// Gapped pairs (per wire for infinite arrays).
    pub gapped_pairs: usize,
    /// Right-left pairs left gapless: fields - 2 rank (per wire for
    /// infinite arrays).
    pub gapless_modes: usize,
}

impl PhaseLattice {
    /// The phase lattice of a set of families.
    pub fn new(lat: &Lattice, families: &[&Family]) -> PhaseLattice {
        let all = span(lat, families);
        if lat.infinite {
            let r = per_wire_rank(lat, families);
            return PhaseLattice {
                window: Some(window_span(lat, families)),
                all,
                gapped_pairs: r,
                gapless_modes: lat.cell.saturating_sub(2 * r),
            };
        }
        let r = all.rank();
        PhaseLattice {
            all,
            window: None,
            gapped_pairs: r,
            gapless_modes: lat.n.saturating_sub(2 * r),
        }
    }

    /// Every pair is gapped.
    pub fn fully_gapped(&self) -> bool {
        self.gapless_modes == 0
    }

    /// One phase: the same lattice (see the module docs for the infinite
    /// array's test).
    pub fn same(&self, other: &PhaseLattice) -> bool {
        self.all == other.all && self.window == other.window
    }
}

/// Rank over Q(z) of the cell matrix P(z) = sum_n p_n z^n of the families
/// (one column each), exact: the largest rank of P(z_0) at z_0 = 1..=d+1.
pub fn per_wire_rank(lat: &Lattice, families: &[&Family]) -> usize {
    let c = lat.cell;
    let cols: Vec<Vec<(usize, Vec<i64>)>> = families
        .iter()
        .filter_map(|f| f.translates.first())
        // The translate at anchor 0 does not wrap (the ring is wider than a term).
        .map(|t| {
            t.parts
                .iter()
                .map(|(w, v)| (w - t.anchor, v.clone()))
                .collect()
        })
        .collect();
    if cols.is_empty() {
        return 0;
    }
    let degree = cols.iter().flatten().map(|(o, _)| *o).max().unwrap_or(0);
    // Minors have size at most min(c, columns) and degree at most that many times `degree`.
    let d = degree * c.min(cols.len());
    let mut best = 0;
    for z in 1..=(d + 1) {
        let z = BigInt::from(z);
        let rows: Vec<Vec<BigInt>> = (0..c)
            .map(|a| {
                cols.iter()
                    .map(|parts| {
                        parts
                            .iter()
                            .map(|(o, v)| BigInt::from(v[a]) * z.pow(*o as u32))
                            .sum()
                    })
                    .collect()
            })
            .collect();
        best = best.max(crate::math::bareiss::rank(&rows));
        if best == cols.len().min(c) {
            break;
        }
    }
    best
}

/// A term that can name a phase: a listed term or one the closure
/// generated, with its family on the system's lattice.
#[derive(Debug, Clone, Copy)]
pub struct Candidate<'a> {
    /// Its name.
    pub name: &'a str,
    /// Generated by the closure (listed terms come first in labels).
    pub generated: bool,
    /// Its family.
    pub family: &'a Family,
}

/// The fewest candidates (listed before generated, then in the given
/// order) whose families span `target`; None when no subset does (the
/// pinned set itself always does when it is among the candidates).
pub fn spanning_names(
    lat: &Lattice,
    target: &PhaseLattice,
    cands: &[Candidate],
) -> Option<Vec<String>> {
    if target.gapped_pairs == 0 && target.all.rank() == 0 {
        return Some(Vec::new());
    }
    // Only candidates whose family lies in the target lattice can take part.
    let inside: Vec<&Candidate> = cands
        .iter()
        .filter(|c| {
            c.family
                .translates
                .iter()
                .all(|t| target.all.contains(&big(&t.l)))
        })
        .collect();
    let mut order: Vec<&Candidate> = inside.iter().copied().filter(|c| !c.generated).collect();
    order.extend(inside.iter().copied().filter(|c| c.generated));
    for size in 1..=order.len().min(target.all.rank().max(1) + 2) {
        let mut found: Option<(usize, Vec<usize>)> = None;
        for_each_subset(order.len(), size, &mut |s| {
            let generated = s.iter().filter(|&&i| order[i].generated).count();
            if found.as_ref().is_some_and(|(g, _)| *g <= generated) {
                return;
            }
            let fams: Vec<&Family> = s.iter().map(|&i| order[i].family).collect();
            if PhaseLattice::new(lat, &fams).same(target) {
                found = Some((generated, s.to_vec()));
            }
        });
        if let Some((_, s)) = found {
            return Some(s.iter().map(|&i| order[i].name.to_string()).collect());
        }
    }
    None
}

fn for_each_subset(n: usize, k: usize, f: &mut dyn FnMut(&[usize])) {
    fn rec(start: usize, n: usize, k: usize, cur: &mut Vec<usize>, f: &mut dyn FnMut(&[usize])) {
        if cur.len() == k {
            f(cur);
            return;
        }
        for i in start..n {
            if n - i < k - cur.len() {
                break;
            }
            cur.push(i);
            rec(i + 1, n, k, cur, f);
            cur.pop();
        }
    }
    rec(0, n, k, &mut Vec::new(), f);
}

/// `{a, b}`, or `gapless` for an empty set.
pub fn label(names: &[String]) -> String {
    if names.is_empty() {
        "gapless".to_string()
    } else {
        format!("{{{}}}", names.join(", "))
    }
}

/// A pinned phase with its name and invariants.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
pub struct Phase {
    /// `{t_up, t_dn}` or `gapless`.
    pub label: String,
    /// The names in the label.
    pub terms: Vec<String>,
    /// Gapped right-left pairs (rank; per wire for infinite arrays).
    pub gapped_pairs: usize,
    /// Pairs left gapless (fields - 2 rank; per wire for infinite arrays).
    pub gapless_modes: usize,
    /// Nothing is left gapless.
    pub fully_gapped: bool,
    /// The lattice equals the target lattice (false without targets).
    pub target: bool,
}

/// Name a pinned lattice: the label from the candidates (falling back to
/// the pinned names themselves), its invariants, and whether it is the
/// target phase.
pub fn name(
    lat: &Lattice,
    pinned: &PhaseLattice,
    pinned_names: &[String],
    cands: &[Candidate],
    target: Option<&PhaseLattice>,
) -> Phase {
    let terms = spanning_names(lat, pinned, cands).unwrap_or_else(|| pinned_names.to_vec());
    Phase {
        label: label(&terms),
        terms,
        gapped_pairs: pinned.gapped_pairs,
        gapless_modes: pinned.gapless_modes,
        fully_gapped: pinned.fully_gapped(),
        target: target.is_some_and(|t| t.same(pinned)),
    }
}

/// The target lattice of a model: spanned by every term marked as a
/// target (None without targets).
pub fn target_lattice(sys: &crate::core::system::System) -> Option<PhaseLattice> {
    let t = sys.model.targets();
    if t.is_empty() {
        return None;
    }
    let fams: Vec<&Family> = t.iter().map(|&i| &sys.lattice.families[i]).collect();
    Some(PhaseLattice::new(&sys.lattice, &fams))
}

/// The listed terms of a system as candidates.
pub fn listed(sys: &crate::core::system::System) -> Vec<Candidate<'_>> {
    sys.model
        .terms
        .iter()
        .zip(&sys.lattice.families)
        .map(|(t, f)| Candidate {
            name: &t.name,
            generated: false,
            family: f,
        })
        .collect()
}

#[cfg(test)]
mod tests;
