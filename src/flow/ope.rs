//! The second-order OPE table of a flow plan (the rule and the weights are
//! in [`super::channels`]; docs/physics.md section 4).
//!
//! Owns: for every channel a, every translate t of every channel b with
//! rep(a)^T K^-1 t = 0 and both signs s, the channel (if any) that holds
//! rep(a) + s t, as [`OpeEntry`]s.
//!
//! Method. Every translate is held sparse, as its (field, value) entries in
//! field order, with the sorted list of the wires it touches. A pair is
//! skipped before any arithmetic when the wires touched by exactly one of
//! the two span more wires than the widest channel: nothing cancels on
//! those wires, so they lie in the support of rep(a) + s t, which is then
//! no channel. The rest is exact integer arithmetic on the sparse entries
//! (the pairing in i128, the sum in i64) and one hash lookup of the sparse
//! sum.
//!
//! Invariants: the entries come in the order (a, b, translate of b, sign
//! +, then -), each with the target the dense vector index of the plan
//! gives (the sparse index is read off it), so the table does not depend
//! on how it is built.

use super::channels::{Channel, OpeEntry, VectorIndex, Wiring};
use crate::core::invariants::Pairing;

/// A translate as sparse entries and the wires it touches.
struct SparseTranslate {
    /// (field, value), in field order, values non-zero.
    l: Vec<(usize, i64)>,
    /// (wire, field within the cell, value) of the same entries.
    cells: Vec<(usize, usize, i64)>,
    /// Wires touched, sorted.
    wires: Vec<usize>,
    /// Index of `wires` among the distinct wire sets of the plan.
    set: usize,
}

/// A sparse vector packed as [field, value, field, value, ...] for lookups.
type Key = Vec<i64>;

/// Sparse vector -> (channel, the vector is minus a translate).
type SparseIndex = super::channels::VecMap<(usize, bool)>;

/// [`Pairing::scaled`] of two sparse translates: the pairing acts within
/// a wire (cell by cell).
fn scaled(pairing: &Pairing, x: &SparseTranslate, y: &SparseTranslate) -> i128 {
    let mut acc: i128 = 0;
    let mut start = 0;
    let other = &y.cells;
    for &(wire, i, a) in &x.cells {
        while start < other.len() && other[start].0 < wire {
            start += 1;
        }
        for &(_, j, b) in other[start..].iter().take_while(|e| e.0 == wire) {
            let t = pairing
                .entry(i, j)
                .saturating_mul(a as i128)
                .saturating_mul(b as i128);
            acc = acc.saturating_add(t);
        }
    }
    acc
}

fn sparse_of(l: &[i64], cell: usize, wire_of: &dyn Fn(usize) -> usize) -> SparseTranslate {
    let entries: Vec<(usize, i64)> = l
        .iter()
        .enumerate()
        .filter(|(_, x)| **x != 0)
        .map(|(f, x)| (f, *x))
        .collect();
    let mut wires: Vec<usize> = entries.iter().map(|(f, _)| wire_of(*f)).collect();
    wires.sort_unstable();
    wires.dedup();
    let cells = entries
        .iter()
        .map(|&(f, x)| (f / cell.max(1), f % cell.max(1), x))
        .collect();
    SparseTranslate {
        l: entries,
        cells,
        wires,
        set: 0,
    }
}

fn pack(entries: &[(usize, i64)]) -> Key {
    entries.iter().flat_map(|&(f, x)| [f as i64, x]).collect()
}

/// rep + sign * t, packed, into `out` (empty when it vanishes).
fn sum_into(out: &mut Key, a: &[(usize, i64)], b: &[(usize, i64)], sign: i64) {
    out.clear();
    let (mut i, mut j) = (0, 0);
    while i < a.len() || j < b.len() {
        let (f, x) = match (a.get(i), b.get(j)) {
            (Some(&(fa, xa)), Some(&(fb, xb))) if fa == fb => {
                i += 1;
                j += 1;
                (fa, xa + sign * xb)
            }
            (Some(&(fa, xa)), Some(&(fb, _))) if fa < fb => {
                i += 1;
                (fa, xa)
            }
            (Some(&(fa, xa)), None) => {
                i += 1;
                (fa, xa)
            }
            (_, Some(&(fb, xb))) => {
                j += 1;
                (fb, sign * xb)
            }
            (None, None) => break,
        };
        if x != 0 {
            out.push(f as i64);
            out.push(x);
        }
    }
}

/// The wires in exactly one of two sorted lists, into `out` (sorted).
fn symmetric_difference(out: &mut Vec<usize>, x: &[usize], y: &[usize]) {
    out.clear();
    let (mut i, mut j) = (0, 0);
    while i < x.len() || j < y.len() {
        match (x.get(i), y.get(j)) {
            (Some(p), Some(q)) if p == q => {
                i += 1;
                j += 1;
            }
            (Some(p), Some(q)) if p < q => {
                out.push(*p);
                i += 1;
            }
            (Some(p), None) => {
                out.push(*p);
                i += 1;
            }
            (_, Some(q)) => {
                out.push(*q);
                j += 1;
            }
            (None, None) => break,
        }
    }
}

/// The sparse translates of every channel, with their wire sets numbered.
fn sparse_channels(
    channels: &[Channel],
    wiring: Option<&Wiring>,
    cell: usize,
) -> Vec<Vec<SparseTranslate>> {
    let wire_of = |f: usize| wiring.map_or(0, |w| w.wire(f));
    let mut sets: std::collections::HashMap<Vec<usize>, usize> = Default::default();
    channels
        .iter()
        .map(|c| {
            c.family
                .translates
                .iter()
                .map(|t| {
                    let mut st = sparse_of(&t.l, cell, &wire_of);
                    let next = sets.len();
                    st.set = *sets.entry(st.wires.clone()).or_insert(next);
                    st
                })
                .collect()
        })
        .collect()
}

/// For every wire set x, the wire sets y that may pair with it: those for
/// which the wires in exactly one of x and y span at most the widest
/// channel (every set without a wiring).
fn near_sets(
    sparse: &[Vec<SparseTranslate>],
    channels: &[Channel],
    wiring: Option<&Wiring>,
) -> Vec<Vec<usize>> {
    let mut sets: Vec<&[usize]> = Vec::new();
    for st in sparse.iter().flatten() {
        if st.set == sets.len() {
            sets.push(&st.wires);
        }
    }
    let Some(w) = wiring else {
        return vec![(0..sets.len()).collect(); sets.len()];
    };
    let widest = channels
        .iter()
        .map(|c| w.span(&c.family.rep().l))
        .max()
        .unwrap_or(0);
    let mut diff = Vec::new();
    sets.iter()
        .map(|x| {
            (0..sets.len())
                .filter(|&y| {
                    symmetric_difference(&mut diff, x, sets[y]);
                    w.span_of(&diff) <= widest
                })
                .collect()
        })
        .collect()
}

/// The translates (channel, translate) of every wire set.
fn by_set(sparse: &[Vec<SparseTranslate>], sets: usize) -> Vec<Vec<(usize, usize)>> {
    let mut out = vec![Vec::new(); sets];
    for (b, translates) in sparse.iter().enumerate() {
        for (t, st) in translates.iter().enumerate() {
            out[st.set].push((b, t));
        }
    }
    out
}

/// The OPE table (see the module docs and [`super::channels`]). The pairs
/// are visited by wire set, then the entries are put in the order (a, b,
/// translate, sign).
pub(super) fn ope_table(
    channels: &[Channel],
    index: &VectorIndex,
    pairing: &Pairing,
    ring: bool,
    wiring: Option<&Wiring>,
) -> Vec<OpeEntry> {
    let sparse = sparse_channels(channels, wiring, pairing.cell());
    let near = near_sets(&sparse, channels, wiring);
    let members = by_set(&sparse, near.len());
    let lookup: SparseIndex = index
        .entries()
        .map(|(v, hit)| (pack(&sparse_of(v, 1, &|_| 0).l), hit))
        .collect();
    let mut table: Vec<((usize, usize, usize, bool), OpeEntry)> = Vec::new();
    let mut key = Key::new();
    for (a, ca) in channels.iter().enumerate() {
        let rep = &sparse[a][ca.family.representative];
        let pairs = near[rep.set].iter().flat_map(|&y| &members[y]);
        for &(b, t) in pairs {
            let tb = &sparse[b][t];
            if scaled(pairing, rep, tb) != 0 {
                continue;
            }
            for (sign, b_conj) in [(1i64, false), (-1, true)] {
                sum_into(&mut key, &rep.l, &tb.l, sign);
                let Some(&(target, conj)) = lookup.get(&key).filter(|_| !key.is_empty()) else {
                    continue;
                };
                let weight = if ring {
                    ca.family.translates.len() as f64
                        / channels[target].family.translates.len() as f64
                } else {
                    1.0
                };
                let entry = OpeEntry {
                    target,
                    conj,
                    a,
                    b,
                    b_conj,
                    weight,
                };
                table.push(((a, b, t, b_conj), entry));
            }
        }
    }
    table.sort_unstable_by_key(|(k, _)| *k);
    table.into_iter().map(|(_, e)| e).collect()
}
