//! The scan by phase: how many points end in each phase (the label of the
//! final pinned set of the staged flow, `points.csv` column `phase`), and
//! the window of the target phase (column `target_phase`): its points,
//! fraction of the grid, the range of each axis it spans, and its gap
//! margin, the gap estimate e^-ell_last over those points (smallest,
//! largest and where it is largest: the most robust point).
//!
//! Folded row by row in index order like the rest of the summary
//! ([`super::summary::Tally`]); memory per distinct phase, not per point.

use std::collections::BTreeMap;

use serde::Serialize;

use super::points::Point;
use super::store::Meta;

/// One phase found in a scan.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PhaseRow {
    /// Label (`{a, b}` or `gapless`).
    pub label: String,
    /// Points ending in it.
    pub points: usize,
    /// It is the target phase.
    pub target: bool,
    /// Gapped pairs (per wire for infinite arrays).
    pub gapped_pairs: usize,
    /// Gapless modes left (per wire for infinite arrays).
    pub gapless_modes: usize,
}

/// The gap estimate e^-ell_last over the target phase's points.
#[derive(Debug, Clone, Serialize)]
pub struct GapMargin {
    /// Smallest gap (relative to u/alpha).
    pub min: f64,
    /// Largest gap.
    pub max: f64,
    /// Where the largest gap is found.
    pub best_point: BTreeMap<String, f64>,
}

/// Where the target phase is reached.
#[derive(Debug, Clone, Serialize)]
pub struct TargetPhase {
    /// Points in the target phase.
    pub points: usize,
    /// Fraction of all grid points.
    pub fraction: f64,
    /// [min, max] of each axis over those points (empty when none).
    pub bounds: BTreeMap<String, [f64; 2]>,
    /// The gap over those points (null when none).
    pub margin: Option<GapMargin>,
}

/// The phases so far.
pub struct PhaseTally {
    phases: BTreeMap<String, PhaseRow>,
    /// Tracked only when the model marks a target.
    target: Option<TargetWindow>,
}

struct TargetWindow {
    points: usize,
    lo: Vec<f64>,
    hi: Vec<f64>,
    min_gap: f64,
    best: Option<(f64, Vec<f64>)>,
}

impl PhaseTally {
    /// Empty tally for a scan.
    pub fn new(meta: &Meta) -> PhaseTally {
        let n = meta.axes.len();
        PhaseTally {
            phases: BTreeMap::new(),
            target: meta.target.as_ref().map(|_| TargetWindow {
                points: 0,
                lo: vec![f64::INFINITY; n],
                hi: vec![f64::NEG_INFINITY; n],
                min_gap: f64::INFINITY,
                best: None,
            }),
        }
    }

    /// Count one row.
    pub fn add(&mut self, p: &Point) {
        let label = p.phase();
        if !label.is_empty() {
            let (gapped_pairs, gapless_modes) = p.phase_counts().unwrap_or((0, 0));
            match self.phases.get_mut(label) {
                Some(row) => row.points += 1,
                None => {
                    self.phases.insert(
                        label.to_string(),
                        PhaseRow {
                            label: label.to_string(),
                            points: 1,
                            target: p.target_phase(),
                            gapped_pairs,
                            gapless_modes,
                        },
                    );
                }
            }
        }
        if let (Some(w), true) = (&mut self.target, p.target_phase()) {
            w.add(p);
        }
    }

    /// The phases (most points first, then by label) and the target window.
    pub fn finish(self, meta: &Meta, points: usize) -> (Vec<PhaseRow>, Option<TargetPhase>) {
        let mut rows: Vec<PhaseRow> = self.phases.into_values().collect();
        rows.sort_by(|a, b| b.points.cmp(&a.points).then_with(|| a.label.cmp(&b.label)));
        (rows, self.target.map(|w| w.finish(meta, points)))
    }
}

impl TargetWindow {
    fn add(&mut self, p: &Point) {
        self.points += 1;
        for (i, (lo, hi)) in self.lo.iter_mut().zip(&mut self.hi).enumerate() {
            let x = p.coord(i);
            *lo = lo.min(x);
            *hi = hi.max(x);
        }
        let Some(gap) = p.ell_last().map(|l| (-l).exp()) else {
            return;
        };
        self.min_gap = self.min_gap.min(gap);
        if self.best.as_ref().is_none_or(|(b, _)| gap > *b) {
            self.best = Some((gap, (0..p.axes()).map(|i| p.coord(i)).collect()));
        }
    }

    fn finish(self, meta: &Meta, points: usize) -> TargetPhase {
        let mut bounds = BTreeMap::new();
        if self.points > 0 {
            for (i, a) in meta.axes.iter().enumerate() {
                bounds.insert(a.name.clone(), [self.lo[i], self.hi[i]]);
            }
        }
        let margin = self.best.map(|(max, at)| GapMargin {
            min: self.min_gap,
            max,
            best_point: meta
                .axes
                .iter()
                .zip(&at)
                .map(|(a, x)| (a.name.clone(), *x))
                .collect(),
        });
        TargetPhase {
            points: self.points,
            fraction: if points == 0 {
                0.0
            } else {
                self.points as f64 / points as f64
            },
            bounds,
            margin,
        }
    }
}
