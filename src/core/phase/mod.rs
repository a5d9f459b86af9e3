//! Naming the phase a pinned set produces (docs/physics.md section 8,
//! "Naming the phase"; section 6 for the lattice algebra).
//!
//! A pinned set is a list of term families (every translate on the array,
//! or on the periodic stand-in ring of an infinite array). Its phase is the
//! integer lattice span_Z of the lattice vectors l of all those translates
//! ([`lattice::PinnedLattice`]): two pinned sets are one phase iff they
//! span the same lattice. Pinning 2 l is not pinning l: l is in span_Q but
//! not in span_Z of {2 l}.
//!
//! The label is the smallest set of candidate families (the listed terms
//! first, then the generated ones) whose span is the lattice, ties broken
//! by fewer generated terms and then by candidate order, so it is a
//! function of the lattice alone; `gapless` when nothing is pinned.
//! Invariants: gapped pairs r = rank (per wire for an infinite array:
//! rank over Q(z), [`lattice::per_wire_rank`]), gapless modes N - 2 r
//! (n_c - 2 rho per wire), fully gapped when none is left. dims, flow and
//! scan all name phases here.

pub mod lattice;

use serde::Serialize;

use crate::core::lattice::{Family, Lattice};
use crate::core::system::System;
pub use lattice::{per_wire_rank, PinnedLattice};

/// The phase of a pinned set, as every output reports it.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct Phase {
    /// `{a, b}` (the spanning terms in braces), or `gapless`.
    pub label: String,
    /// The spanning terms of the label.
    pub terms: Vec<String>,
    /// Right-left pairs gapped (per wire for infinite arrays).
    pub gapped_pairs: usize,
    /// Gapless modes left (per wire for infinite arrays).
    pub gapless_modes: usize,
    /// No gapless mode left.
    pub fully_gapped: bool,
    /// The pinned lattice equals the target lattice (false when no term is
    /// marked as a target).
    pub target: bool,
}

/// Label of the phase with nothing pinned.
pub const GAPLESS: &str = "gapless";

/// One family that may name a phase.
#[derive(Debug, Clone, Copy)]
pub struct Candidate<'a> {
    /// Term name.
    pub name: &'a str,
    /// Listed in the model (preferred in labels).
    pub listed: bool,
    /// Its translates.
    pub family: &'a Family,
}

/// The phase of `pinned` (families), named from `candidates` (listed
/// first), compared with the span of `targets` (empty: no target).
pub fn name_phase(
    lat: &Lattice,
    candidates: &[Candidate],
    pinned: &[&Family],
    targets: &[&Family],
) -> Phase {
    let lattice = PinnedLattice::on(lat, pinned);
    let (gapped_pairs, modes) = if lat.infinite {
        (per_wire_rank(lat, pinned), lat.cell)
    } else {
        (lattice.rank(), lat.n)
    };
    let gapless_modes = modes.saturating_sub(2 * gapped_pairs);
    let target = !targets.is_empty() && PinnedLattice::on(lat, targets).same(&lattice);
    let terms = if pinned.is_empty() {
        Vec::new()
    } else {
        label_terms(&lattice, candidates, pinned.len(), &|f: &[&Family]| {
            PinnedLattice::on(lat, f)
        })
    };
    let label = if terms.is_empty() {
        GAPLESS.to_string()
    } else {
        format!("{{{}}}", terms.join(", "))
    };
    Phase {
        label,
        terms,
        gapped_pairs,
        gapless_modes,
        fully_gapped: gapless_modes == 0,
        target,
    }
}

/// The listed terms of a system as candidates.
pub fn listed(sys: &System) -> Vec<Candidate<'_>> {
    (sys.model.terms.iter())
        .zip(&sys.lattice.families)
        .map(|(t, f)| Candidate {
            name: &t.name,
            listed: true,
            family: f,
        })
        .collect()
}

/// The families of the terms a model marks as targets.
pub fn targets(sys: &System) -> Vec<&Family> {
    (sys.model.terms.iter())
        .zip(&sys.lattice.families)
        .filter(|(t, _)| t.target)
        .map(|(_, f)| f)
        .collect()
}

/// Subsets of candidates tried before the label falls back to a greedy
/// spanning set (written-out models list every translate as a term, and
/// the number of subsets grows combinatorially).
pub const LABEL_BUDGET: usize = 4096;

/// The fewest candidates spanning the lattice (fewer generated, then
/// candidate order); at most `most` are needed (the pinned set itself).
/// Subsets are tried by size, listed-only first, until [`LABEL_BUDGET`]
/// subsets have been tried; past it, a greedy spanning set (candidates in
/// order, each kept when it enlarges the span, then every one that is not
/// needed dropped) names the phase. Either way the label depends on the
/// lattice alone.
/// `span_of` builds the span of a subset on the same lattice as `lattice`.
fn label_terms(
    lattice: &PinnedLattice,
    candidates: &[Candidate],
    most: usize,
    span_of: &dyn Fn(&[&Family]) -> PinnedLattice,
) -> Vec<String> {
    let inside: Vec<&Candidate> = candidates
        .iter()
        .filter(|c| !c.family.translates.is_empty() && lattice.contains_family(c.family))
        .collect();
    let (listed, generated): (Vec<usize>, Vec<usize>) =
        (0..inside.len()).partition(|&i| inside[i].listed);
    let spans = |combo: &[usize]| {
        let fams: Vec<&Family> = combo.iter().map(|&i| inside[i].family).collect();
        let sub = span_of(&fams);
        sub.rank() == lattice.rank() && sub.same(lattice)
    };
    let names = |combo: &[usize]| combo.iter().map(|&i| inside[i].name.to_string()).collect();
    let mut budget = LABEL_BUDGET;
    for size in 1..=most.min(inside.len()) {
        for g in 0..=size.min(generated.len()) {
            if size - g > listed.len() {
                continue;
            }
            let mut a = Combination::new(listed.len(), size - g);
            while let Some(ia) = a.next() {
                let mut b = Combination::new(generated.len(), g);
                while let Some(ib) = b.next() {
                    if budget == 0 {
                        return names(&greedy(&inside, &spans));
                    }
                    budget -= 1;
                    let mut combo: Vec<usize> = ia.iter().map(|&k| listed[k]).collect();
                    combo.extend(ib.iter().map(|&k| generated[k]));
                    if spans(&combo) {
                        return names(&combo);
                    }
                }
            }
        }
    }
    Vec::new()
}

/// Candidates in order (listed first), each kept when it enlarges the span
/// so far, then each dropped when the rest still spans.
fn greedy(inside: &[&Candidate], spans: &dyn Fn(&[usize]) -> bool) -> Vec<usize> {
    let mut order: Vec<usize> = (0..inside.len()).collect();
    order.sort_by_key(|&i| !inside[i].listed);
    let mut kept: Vec<usize> = Vec::new();
    for i in order {
        let fams: Vec<&Family> = kept.iter().map(|&k| inside[k].family).collect();
        if !PinnedLattice::new(inside[i].family.translates[0].l.len(), &fams)
            .contains_family(inside[i].family)
        {
            kept.push(i);
        }
        if spans(&kept) {
            break;
        }
    }
    let mut at = kept.len();
    while at > 0 {
        at -= 1;
        let without: Vec<usize> = kept
            .iter()
            .enumerate()
            .filter(|(j, _)| *j != at)
            .map(|(_, &k)| k)
            .collect();
        if spans(&without) {
            kept = without;
        }
    }
    kept
}

/// The k-subsets of 0..n in lexicographic order, one at a time.
struct Combination {
    n: usize,
    c: Vec<usize>,
    started: bool,
}

impl Combination {
    fn new(n: usize, k: usize) -> Combination {
        Combination {
            n,
            c: (0..k).collect(),
            started: false,
        }
    }

    fn next(&mut self) -> Option<&[usize]> {
        let k = self.c.len();
        if k > self.n {
            return None;
        }
        if !self.started {
            self.started = true;
            return Some(&self.c);
        }
        let i = (0..k).rev().find(|&i| self.c[i] < self.n - k + i)?;
        self.c[i] += 1;
        for j in i + 1..k {
            self.c[j] = self.c[j - 1] + 1;
        }
        Some(&self.c)
    }
}

#[cfg(test)]
mod lattice_tests;

#[cfg(test)]
mod tests {
    use super::lattice_tests::family;
    use super::*;

    #[test]
    fn twice_a_vector_is_another_lattice() {
        // span_Z {2 l} does not contain l (derived: 2 does not divide 1).
        let l = family(&[vec![1, -1, 0, 0]]);
        let two = family(&[vec![2, -2, 0, 0]]);
        let a = PinnedLattice::new(4, &[&two]);
        assert!(!a.contains(&[1, -1, 0, 0]));
        assert!(a.contains_rationally(&[1, -1, 0, 0]));
        assert!(!a.spans_same(&[&l]));
        assert!(PinnedLattice::new(4, &[&l]).contains(&[2, -2, 0, 0]));
    }

    #[test]
    fn different_generators_same_lattice() {
        // {a, b} and {a + b, b} span the same lattice (a unimodular change,
        // derived); {a + b, a - b} does not (its index is |det| = 2).
        let a = family(&[vec![1, 0, 0, 1]]);
        let b = family(&[vec![0, 1, 1, 0]]);
        let s = family(&[vec![1, 1, 1, 1]]);
        let d = family(&[vec![1, -1, -1, 1]]);
        let ab = PinnedLattice::new(4, &[&a, &b]);
        assert!(ab.spans_same(&[&s, &b]));
        assert!(!ab.spans_same(&[&s, &d]));
        assert_eq!(ab.rank(), 2);
    }

    #[test]
    fn label_prefers_fewest_then_listed() {
        let a = family(&[vec![1, 0, 0, 1]]);
        let b = family(&[vec![0, 1, 1, 0]]);
        let s = family(&[vec![1, 1, 1, 1]]);
        let cands = [
            Candidate {
                name: "s",
                listed: false,
                family: &s,
            },
            Candidate {
                name: "a",
                listed: true,
                family: &a,
            },
            Candidate {
                name: "b",
                listed: true,
                family: &b,
            },
        ];
        let lattice = PinnedLattice::new(4, &[&s, &b]);
        let span = |f: &[&Family]| PinnedLattice::new(4, f);
        assert_eq!(label_terms(&lattice, &cands, 2, &span), vec!["a", "b"]);
        let only_s = PinnedLattice::new(4, &[&s]);
        assert_eq!(label_terms(&only_s, &cands, 1, &span), vec!["s"]);
    }

    #[test]
    fn combinations_are_complete() {
        let count = |n, k| {
            let mut c = Combination::new(n, k);
            let mut m = 0;
            while c.next().is_some() {
                m += 1;
            }
            m
        };
        assert_eq!(count(4, 2), 6);
        assert_eq!(count(3, 3), 1);
        assert_eq!(count(2, 3), 0);
        assert_eq!(count(5, 0), 1);
    }
}
