//! The OPE terms of the right-hand side, -(1/2) sum_OPE w_a w_b^(*)
//! [docs/physics.md section 4], in two forms of the same sum.
//!
//! - [`LiveOpe`]: one entry per OPE entry, in the table's order, each
//!   forming its own product (the reference route's form).
//! - [`GroupedOpe`]: built once per segment from the live entries. Each
//!   distinct product w_a w_b^(*) is formed once (w_a w_b = w_b w_a, and
//!   w_a conj(w_b) is the conjugate of w_b conj(w_a), so a pair is stored
//!   with a <= b and the conjugation moved into the entry's sign), and the
//!   entries are sorted by target (stable, so each target's entries keep the
//!   table's order) and held as parallel arrays: an evaluation forms the
//!   products in one contiguous loop, then sums each target's weighted
//!   products in registers and writes it once.
//!
//! Invariants: every product is formed with the arithmetic of the
//! reference (the swap of factors changes no bit: multiplication and
//! addition commute in floating point); the sums differ from the reference
//! only by the order of the additions into a target (rounding). Nothing is
//! allocated per evaluation: the products' scratch is sized per segment.

use std::collections::HashMap;
use std::hash::BuildHasherDefault;

use super::channels::{OpeEntry, VecHasher};

/// An OPE entry as the reference evaluation uses it (same arithmetic as
/// the [`OpeEntry`] it comes from, to the bit: the conjugations become
/// factors +-1 and the weight is halved exactly), so the loop has no
/// branches.
#[derive(Debug, Clone, Copy)]
pub(super) struct LiveOpe {
    target: u32,
    a: u32,
    b: u32,
    /// -1 when w_b enters conjugated.
    b_sign: f64,
    /// -1 when the product is conjugated.
    p_sign: f64,
    /// weight / 2.
    half_weight: f64,
}

impl LiveOpe {
    pub(super) fn of(e: &OpeEntry) -> LiveOpe {
        let sign = |flip: bool| if flip { -1.0 } else { 1.0 };
        // Channel indices are far below 2^32 (the plan is bounded).
        LiveOpe {
            target: e.target as u32,
            a: e.a as u32,
            b: e.b as u32,
            b_sign: sign(e.b_conj),
            p_sign: sign(e.conj),
            half_weight: 0.5 * e.weight,
        }
    }
}

/// dw -= sum over `entries` of weight/2 w_a w_b^(*) (conjugated where the
/// entry says), one entry at a time (the reference).
pub(super) fn reference_terms(w: &[f64], dw: &mut [f64], entries: &[LiveOpe]) {
    for e in entries {
        let (a, b, t) = (e.a as usize, e.b as usize, e.target as usize);
        let (ar, ai) = (w[2 * a], w[2 * a + 1]);
        let (br, bi) = (w[2 * b], e.b_sign * w[2 * b + 1]);
        let (pr, pi) = (ar * br - ai * bi, e.p_sign * (ar * bi + ai * br));
        dw[2 * t] -= e.half_weight * pr;
        dw[2 * t + 1] -= e.half_weight * pi;
    }
}

/// The live OPE entries of a segment grouped by product and by target
/// (module docs), as parallel arrays.
#[derive(Debug, Clone, Default, PartialEq)]
pub(super) struct GroupedOpe {
    /// First factor of each distinct product.
    a: Vec<u32>,
    /// Second factor (a <= b).
    b: Vec<u32>,
    /// -1 when the second factor enters conjugated.
    b_sign: Vec<f64>,
    /// The targets, ascending, each once.
    targets: Vec<u32>,
    /// End (exclusive) of each target's entries in the arrays below.
    ends: Vec<u32>,
    /// Product of each entry.
    product: Vec<u32>,
    /// The factors of each entry's product: of its real part weight / 2,
    /// of its imaginary part weight / 2 times -1 when the entry conjugates
    /// the product (a pair, so one entry's two sums are one vector
    /// operation).
    factors: Vec<[f64; 2]>,
}

impl GroupedOpe {
    /// A whole OPE table grouped (every entry live).
    pub(super) fn of_table(table: &[OpeEntry]) -> GroupedOpe {
        let entries: Vec<LiveOpe> = table.iter().map(LiveOpe::of).collect();
        GroupedOpe::new(&entries)
    }

    /// Group `entries` (the live OPE entries of a segment).
    pub(super) fn new(entries: &[LiveOpe]) -> GroupedOpe {
        let mut g = GroupedOpe::default();
        // Index of each product (a, b, conjugated) with a <= b.
        let mut index: HashMap<u64, u32, BuildHasherDefault<VecHasher>> =
            HashMap::with_capacity_and_hasher(entries.len(), Default::default());
        let mut sorted: Vec<&LiveOpe> = entries.iter().collect();
        sorted.sort_by_key(|e| e.target);
        for e in sorted {
            let conj = e.b_sign < 0.0;
            // w_b conj(w_a) = conj(w_a conj(w_b)): swapping conjugated
            // factors conjugates the product.
            let (a, b, flip) = match e.a <= e.b {
                true => (e.a, e.b, 1.0),
                false => (e.b, e.a, if conj { -1.0 } else { 1.0 }),
            };
            let key = (a as u64) << 33 | (b as u64) << 1 | conj as u64;
            let next = g.a.len() as u32;
            let product = *index.entry(key).or_insert(next);
            if product == next {
                g.a.push(a);
                g.b.push(b);
                g.b_sign.push(e.b_sign);
            }
            g.push_entry(e.target, product, e.half_weight, flip * e.p_sign);
        }
        g
    }

    fn push_entry(&mut self, target: u32, product: u32, half_weight: f64, sign: f64) {
        self.push_factors(target, product, half_weight, sign * half_weight);
    }

    /// An entry with the factors of its product's real and imaginary parts.
    fn push_factors(&mut self, target: u32, product: u32, re: f64, im: f64) {
        if self.targets.last() != Some(&target) {
            self.targets.push(target);
            self.ends.push(self.product.len() as u32);
        }
        self.product.push(product);
        self.factors.push([re, im]);
        *self.ends.last_mut().expect("pushed") += 1;
    }

    /// The table of the entries among a subset of the channels, renumbered:
    /// `pos[c]` is the new index of channel c, `u32::MAX` for channels
    /// left out; the new indices must increase with the old ones. Equal,
    /// field by field, to [`GroupedOpe::new`] of the entries this table
    /// was built from, kept where target and both factors are in the
    /// subset and renumbered (a stable sort commutes with the filter, an
    /// increasing renumbering keeps every comparison, and products are
    /// numbered by first use in both), in one pass without sorting or
    /// hashing: a plan's table grouped once serves every segment of every
    /// flow.
    pub(super) fn restricted(&self, pos: &[u32]) -> GroupedOpe {
        let mut g = GroupedOpe::default();
        let mut renamed = vec![u32::MAX; self.a.len()];
        let mut start = 0;
        for (&t, &end) in self.targets.iter().zip(&self.ends) {
            let (t, range) = (pos[t as usize], start..end as usize);
            start = end as usize;
            if t == u32::MAX {
                continue;
            }
            for k in range {
                let p = self.product[k] as usize;
                let (a, b) = (pos[self.a[p] as usize], pos[self.b[p] as usize]);
                if a == u32::MAX || b == u32::MAX {
                    continue;
                }
                if renamed[p] == u32::MAX {
                    renamed[p] = g.a.len() as u32;
                    g.a.push(a);
                    g.b.push(b);
                    g.b_sign.push(self.b_sign[p]);
                }
                let [re, im] = self.factors[k];
                g.push_factors(t, renamed[p], re, im);
            }
        }
        g
    }

    /// Scratch floats an evaluation needs (two per distinct product).
    pub(super) fn scratch_len(&self) -> usize {
        2 * self.a.len()
    }

    /// dw -= sum of the entries' weighted products; `p` has
    /// [`GroupedOpe::scratch_len`] entries.
    pub(super) fn terms(&self, w: &[f64], dw: &mut [f64], p: &mut [f64]) {
        // Complex numbers as (re, im) pairs: one bounds check per access,
        // and each pair's two sums run side by side in one register.
        let (w, _) = w.as_chunks::<2>();
        let (dw, _) = dw.as_chunks_mut::<2>();
        let (p, _) = p.as_chunks_mut::<2>();
        let factors = self.a.iter().zip(&self.b).zip(&self.b_sign);
        for (((&a, &b), &b_sign), p) in factors.zip(p.iter_mut()) {
            let ([ar, ai], [br, bi]) = (w[a as usize], w[b as usize]);
            let bi = b_sign * bi;
            *p = [ar * br - ai * bi, ar * bi + ai * br];
        }
        let mut start = 0;
        for (&t, &end) in self.targets.iter().zip(&self.ends) {
            let range = start..end as usize;
            let mut acc = [0.0; 2];
            for (&k, c) in self.product[range.clone()].iter().zip(&self.factors[range]) {
                let pk = p[k as usize];
                acc[0] += c[0] * pk[0];
                acc[1] += c[1] * pk[1];
            }
            let d = &mut dw[t as usize];
            (d[0], d[1]) = (d[0] - acc[0], d[1] - acc[1]);
            start = end as usize;
        }
    }
}

#[cfg(test)]
mod tests {
    //! The grouped sum against the entry-by-entry reference on random
    //! tables (a consistency check of two code paths; the amplitudes and
    //! weights are arbitrary numbers from a fixed-seed generator).
    use super::*;

    /// A fixed-seed linear congruential generator (Knuth's MMIX constants).
    struct Lcg(u64);

    impl Lcg {
        fn next(&mut self, n: usize) -> usize {
            self.0 = self
                .0
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            ((self.0 >> 33) % n as u64) as usize
        }
    }

    fn entry(rng: &mut Lcg, channels: usize) -> OpeEntry {
        OpeEntry {
            target: rng.next(channels),
            conj: rng.next(2) == 1,
            a: rng.next(channels),
            b: rng.next(channels),
            b_conj: rng.next(2) == 1,
            weight: [1.0, 0.5, 2.0, 1.0 / 3.0][rng.next(4)],
        }
    }

    #[test]
    fn grouped_terms_equal_the_reference() {
        let mut rng = Lcg(15);
        for round in 0..20 {
            let channels = 1 + rng.next(9);
            let mut entries: Vec<LiveOpe> = (0..rng.next(120))
                .map(|_| LiveOpe::of(&entry(&mut rng, channels)))
                .collect();
            // Every entry once more with its factors swapped: the same
            // product (or its conjugate) reached from the other side.
            let swapped: Vec<LiveOpe> = (entries.iter())
                .map(|e| LiveOpe {
                    a: e.b,
                    b: e.a,
                    ..*e
                })
                .collect();
            entries.extend(swapped);
            let w: Vec<f64> = (0..2 * channels)
                .map(|_| rng.next(2001) as f64 / 1000.0 - 1.0)
                .collect();
            let start: Vec<f64> = (0..2 * channels).map(|i| 0.25 * i as f64).collect();
            let (mut reference, mut grouped) = (start.clone(), start);
            reference_terms(&w, &mut reference, &entries);
            let table = GroupedOpe::new(&entries);
            let mut p = vec![0.0; table.scratch_len()];
            table.terms(&w, &mut grouped, &mut p);
            let scale: f64 = entries.iter().map(|e| e.half_weight).sum::<f64>() + 4.0;
            for (x, y) in reference.iter().zip(&grouped) {
                assert!((x - y).abs() <= 1e-14 * scale, "round {round}: {x} vs {y}");
            }
            assert!(table.a.len() <= entries.len().max(1));
        }
    }

    #[test]
    fn a_restricted_table_is_the_table_of_the_kept_entries() {
        // Random tables and random subsets of the channels: cutting the
        // whole table's grouping down must give, field by field, the
        // grouping of the entries among the subset, renumbered (two code
        // paths of the same table; the entries are arbitrary).
        let mut rng = Lcg(9);
        for round in 0..40 {
            let channels = 1 + rng.next(12);
            let table: Vec<OpeEntry> = (0..rng.next(150))
                .map(|_| entry(&mut rng, channels))
                .collect();
            let keep: Vec<bool> = (0..channels).map(|_| rng.next(3) > 0).collect();
            let mut pos = vec![u32::MAX; channels];
            for (next, c) in (0..channels).filter(|&c| keep[c]).enumerate() {
                pos[c] = next as u32;
            }
            let kept: Vec<LiveOpe> = (table.iter())
                .filter(|e| keep[e.target] && keep[e.a] && keep[e.b])
                .map(|e| OpeEntry {
                    target: pos[e.target] as usize,
                    a: pos[e.a] as usize,
                    b: pos[e.b] as usize,
                    ..*e
                })
                .map(|e| LiveOpe::of(&e))
                .collect();
            let direct = GroupedOpe::new(&kept);
            let cut = GroupedOpe::of_table(&table).restricted(&pos);
            assert_eq!(cut, direct, "round {round}");
        }
    }

    #[test]
    fn swapped_factors_share_one_product() {
        // w_0 w_1 and w_1 w_0 are one product; w_0 conj(w_1) and
        // w_1 conj(w_0) another (conjugates of each other): two products
        // for four entries, and the sums as the reference's.
        let e = |a, b, b_conj| OpeEntry {
            target: 2,
            conj: false,
            a,
            b,
            b_conj,
            weight: 1.0,
        };
        let entries: Vec<LiveOpe> = [e(0, 1, false), e(1, 0, false), e(0, 1, true), e(1, 0, true)]
            .iter()
            .map(LiveOpe::of)
            .collect();
        let table = GroupedOpe::new(&entries);
        assert_eq!(table.scratch_len(), 4);
        let w = [0.3, -0.7, 1.1, 0.2, 0.0, 0.0];
        let (mut reference, mut grouped) = ([0.0; 6], [0.0; 6]);
        reference_terms(&w, &mut reference, &entries);
        table.terms(&w, &mut grouped, &mut [0.0; 4]);
        // w_0 w_1 + w_1 w_0 + w_0 conj(w_1) + w_1 conj(w_0)
        // = 2 w_0 w_1 + 2 Re(w_0 conj(w_1)), times -1/2, by hand:
        // w_0 w_1 = (0.33 + 0.14) + i (0.06 - 0.77) = 0.47 - 0.71 i,
        // Re(w_0 conj(w_1)) = 0.33 - 0.14 = 0.19: -0.66 + 0.71 i.
        for (got, want) in [(grouped[4], -0.66), (grouped[5], 0.71)] {
            assert!((got - want).abs() < 1e-15, "{grouped:?}");
        }
        for (x, y) in reference.iter().zip(&grouped) {
            assert!((x - y).abs() < 1e-15, "{reference:?} vs {grouped:?}");
        }
    }
}
