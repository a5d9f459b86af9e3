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
//! (the pairing in i128, the sum in i64). The lookup of the sum goes by a
//! linear hash h(v) = sum_f v_f r_f (wrapping u64 arithmetic, fixed odd
//! multipliers r_f): h(rep(a) + s t) = h(rep(a)) + s h(t) costs one
//! addition per pair, and only a hash that some plan vector has leads to
//! the sparse sum, compared exactly with the vectors of that hash (so a
//! collision never makes an entry). The pairing with rep(a) is formed once per channel a as a dense row
//! u = det(K_c) K^-1 rep(a) (wire by wire), so the test of each translate
//! is a sparse dot product; when an entry of u or of the translate reaches
//! 2^31 the pairing is summed entry by entry as before (the dot product's
//! terms then might not fit in i64).
//!
//! Invariants: the entries come in the order (a, b, translate of b, sign
//! +, then -), each with the target the dense vector index of the plan
//! gives (the sparse index is read off it), so the table does not depend
//! on how it is built.

use std::collections::HashMap;
use std::hash::BuildHasherDefault;

use super::channels::{Channel, OpeEntry, VecHasher, VectorIndex, Wiring};
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
    /// Every value is below [`SMALL`] in absolute value.
    small: bool,
    /// [`linear_hash`] of `l`.
    hash: u64,
}

/// The multiplier r_f of field f in [`linear_hash`] (SplitMix64 of f, odd).
fn multiplier(f: usize) -> u64 {
    let mut z = (f as u64).wrapping_add(0x9e37_79b9_7f4a_7c15);
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    (z ^ (z >> 31)) | 1
}

/// h(v) = sum_f v_f r_f in wrapping u64 arithmetic: linear in v.
fn linear_hash(entries: &[(usize, i64)]) -> u64 {
    entries.iter().fold(0u64, |h, &(f, x)| {
        h.wrapping_add(multiplier(f).wrapping_mul(x as u64))
    })
}

/// The plan's vectors (packed sparse, with their (channel, negated)) by
/// their [`linear_hash`].
type HashIndex = HashMap<u64, Vec<(Key, (usize, bool))>, BuildHasherDefault<VecHasher>>;

/// Bound on the entries of a translate and of a pairing row for the dot
/// product in [`Row::pairing`]: two factors below 2^31 multiply below 2^62.
const SMALL: u64 = 1 << 31;

/// The pairing with one representative as a dense row (see the module
/// docs), when all its entries are below [`SMALL`].
struct Row(Option<Vec<i64>>);

impl Row {
    /// u_f = sum_i det(K_c) (K_c^-1)_{i, f mod cell} rep_i over the entries
    /// i of rep on the wire of f (`n` fields).
    fn of(pairing: &Pairing, rep: &SparseTranslate, n: usize) -> Row {
        let cell = pairing.cell().max(1);
        let mut u = vec![0i128; n.div_ceil(cell) * cell];
        for &(wire, i, a) in &rep.cells {
            for j in 0..cell {
                let f = wire * cell + j;
                let t = pairing.entry(i, j).checked_mul(a as i128);
                match t.and_then(|t| u.get(f)?.checked_add(t)) {
                    Some(x) => u[f] = x,
                    None => return Row(None),
                }
            }
        }
        let small = |x: &i128| x.unsigned_abs() < SMALL as u128;
        Row(u
            .iter()
            .all(small)
            .then(|| u.iter().map(|&x| x as i64).collect()))
    }

    /// [`scaled`] of rep and t: the dot product with the row when both are
    /// small (exact: each term is below 2^62, the sum is taken in i128).
    fn pairing(&self, pairing: &Pairing, rep: &SparseTranslate, t: &SparseTranslate) -> i128 {
        match &self.0 {
            Some(u) if t.small => {
                t.l.iter()
                    .map(|&(f, x)| (u.get(f).copied().unwrap_or(0) * x) as i128)
                    .sum()
            }
            _ => scaled(pairing, rep, t),
        }
    }
}

/// A sparse vector packed as [field, value, field, value, ...] for lookups.
type Key = Vec<i64>;

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
    let small = entries.iter().all(|(_, x)| x.unsigned_abs() < SMALL);
    let hash = linear_hash(&entries);
    SparseTranslate {
        l: entries,
        cells,
        wires,
        set: 0,
        small,
        hash,
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

/// The plan's vectors by their linear hash.
fn hash_index(index: &VectorIndex) -> HashIndex {
    let mut out = HashIndex::default();
    for (v, hit) in index.entries() {
        let entries: Vec<(usize, i64)> = v
            .iter()
            .enumerate()
            .filter(|(_, x)| **x != 0)
            .map(|(f, x)| (f, *x))
            .collect();
        let slot = out.entry(linear_hash(&entries)).or_default();
        slot.push((pack(&entries), hit));
    }
    out
}

/// The OPE table (see the module docs and [`super::channels`]). The pairs
/// of each channel a are visited by wire set, then its entries are put in
/// the order (b, translate, sign).
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
    let lookup = hash_index(index);
    let fields = channels.first().map_or(0, |c| c.family.rep().l.len());
    let mut table: Vec<OpeEntry> = Vec::new();
    let mut of_a: Vec<((usize, usize, bool), OpeEntry)> = Vec::new();
    let mut key = Key::new();
    for (a, ca) in channels.iter().enumerate() {
        let rep = &sparse[a][ca.family.representative];
        let row = Row::of(pairing, rep, fields);
        let pairs = near[rep.set].iter().flat_map(|&y| &members[y]);
        for &(b, t) in pairs {
            let tb = &sparse[b][t];
            if row.pairing(pairing, rep, tb) != 0 {
                continue;
            }
            for (sign, b_conj) in [(1i64, false), (-1, true)] {
                let h = rep.hash.wrapping_add((sign as u64).wrapping_mul(tb.hash));
                let Some(found) = lookup.get(&h) else {
                    continue;
                };
                sum_into(&mut key, &rep.l, &tb.l, sign);
                let Some(&(_, (target, conj))) = found.iter().find(|(k, _)| *k == key) else {
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
                of_a.push(((b, t, b_conj), entry));
            }
        }
        of_a.sort_unstable_by_key(|(k, _)| *k);
        table.extend(of_a.drain(..).map(|(_, e)| e));
    }
    table
}
