//! The summary of a finished scan, read back from `points.csv`.
//!
//! Built from the CSV alone (with the scan's [`Meta`]) so that a scan, a
//! resumed scan and a merged set of shards give the same summary bytes.
//! The "stable window" of the target: the points where it wins, their
//! fraction of the grid, the range of each axis they span, and the margin
//! Delta0(competitor) - Delta0(target) to the nearest non-commuting term.
//!
//! A [`Tally`] takes the rows one at a time (see [`super::points`]) and
//! keeps only counts, ranges and the best point so far, so the summary of
//! any grid needs a few hundred bytes. Every number is folded over the
//! rows in index order, as a pass over all rows at once would fold it.

use std::collections::BTreeMap;

use serde::Serialize;

use super::points::Point;
use super::store::Meta;
use crate::flow::Outcome;
use crate::output::{short, Report, Table};

/// Margin of the target over its nearest competitor.
#[derive(Debug, Clone, Serialize)]
pub struct Margin {
    /// Smallest margin over the points the target wins.
    pub min: f64,
    /// Largest margin (the most robust point).
    pub max: f64,
    /// Where the largest margin is found.
    pub best_point: BTreeMap<String, f64>,
}

/// Where the target wins.
#[derive(Debug, Clone, Serialize)]
pub struct TargetSummary {
    /// Target term.
    pub name: String,
    /// Points it wins.
    pub points: usize,
    /// Fraction of all grid points.
    pub fraction: f64,
    /// [min, max] of each axis over those points.
    pub ranges: BTreeMap<String, [f64; 2]>,
    /// Margin in bare dimension to the nearest non-commuting term.
    pub margin: Option<Margin>,
    /// The non-commuting terms the margin is measured against.
    pub competitors: Vec<String>,
}

/// The scan summary (`summary.json`).
#[derive(Debug, Clone, Serialize)]
pub struct ScanSummary {
    /// Model name.
    pub model: String,
    /// Axes as `name=min:max:n[:log]`.
    pub axes: Vec<String>,
    /// Number of grid points.
    pub points: usize,
    /// Count per outcome word.
    pub outcomes: BTreeMap<String, usize>,
    /// Count per winning term (strong and spinful outcomes).
    pub winners: BTreeMap<String, usize>,
    /// Count per hunted competitor (`auto:...`, `--competitors`) among the
    /// winners (empty without them).
    pub competitor_wins: BTreeMap<String, usize>,
    /// Where the target wins (when the model marks one).
    pub target: Option<TargetSummary>,
    /// Points per phase of the final pinned set (most points first).
    pub phases: Vec<super::phases::PhaseRow>,
    /// Where the target phase is reached (when the model marks a target).
    pub target_phase: Option<super::phases::TargetPhase>,
    /// Infinite arrays: the flows' quadrature checks over the grid; null
    /// for other models.
    pub flow_quadrature: Option<QuadratureSummary>,
    /// Files written.
    pub files: Vec<String>,
    /// Limits of the method.
    pub notes: Vec<String>,
}

/// The quadrature checks of an infinite array's flows (the columns
/// `q_points`, `q_error`, `q_converged` of `points.csv`).
#[derive(Debug, Clone, Serialize)]
pub struct QuadratureSummary {
    /// Points whose flow was checked (all but unphysical and failed ones).
    pub checked: usize,
    /// Points whose check did not pass.
    pub not_converged: usize,
    /// Fewest and most quadrature points a flow was carried on.
    pub points: [usize; 2],
    /// Largest relative error estimate (null when infinite: two flows that
    /// end differently).
    pub largest_error: f64,
}

impl QuadratureSummary {
    fn new() -> QuadratureSummary {
        QuadratureSummary {
            checked: 0,
            not_converged: 0,
            points: [usize::MAX, 0],
            largest_error: 0.0,
        }
    }

    fn add(&mut self, (points, error, converged): (usize, f64, bool)) {
        self.checked += 1;
        self.not_converged += usize::from(!converged);
        self.points = [self.points[0].min(points), self.points[1].max(points)];
        self.largest_error = self.largest_error.max(error);
    }

    fn finish(mut self) -> QuadratureSummary {
        if self.checked == 0 {
            self.points = [0, 0];
        }
        self
    }
}

/// What a negative margin means: the target won although a listed term
/// that does not commute with it had a lower bare dimension there.
fn margin_note(t: &TargetSummary) -> Option<String> {
    let m = t.margin.as_ref().filter(|m| m.min < 0.0)?;
    Some(format!(
        "the margin is Delta0(competitor) - Delta0({}) at the points {} wins, against the listed terms that do not commute with it ({}); it is as low as {:.4}: there a competitor is more relevant at tree level and lost in the flow (its momentum mismatch cut it off, or the growth of {} raised its dimension), so the window rests on the flow, not on the bare dimensions",
        t.name,
        t.name,
        t.competitors.join(", "),
        m.min,
        t.name
    ))
}

/// `name@j`: the translate on wire j of a listed term (flows whose
/// translates carry their own momenta flow each one on its own).
fn is_translate(name: &str, terms: &[String]) -> bool {
    name.rsplit_once('@').is_some_and(|(term, wire)| {
        !wire.is_empty()
            && wire.bytes().all(|b| b.is_ascii_digit())
            && terms.iter().any(|t| t == term)
    })
}

/// Winners that the model does not list: terms generated at second order
/// by the pairs closure, named after their parents.
fn generated_winners_note(meta: &Meta, winners: &BTreeMap<String, usize>) -> Option<String> {
    let generated: Vec<String> = winners
        .iter()
        .filter(|(name, _)| !meta.terms.contains(name) && !is_translate(name, &meta.terms))
        .filter(|(name, _)| !name.starts_with(crate::flow::competitors::PREFIX))
        .map(|(name, n)| format!("{name} ({n} points)"))
        .collect();
    (!generated.is_empty()).then(|| {
        format!(
            "winners not listed in the model, generated at second order by commuting pairs of listed terms and named after them (a+b, a-b, 2*a; @n shifts b by n wires): {}; `pinflow flow --set ...` at such a point shows how it grew, and listing it as a term makes its bare data part of the scan",
            generated.join(", ")
        )
    })
}

/// "reached at 12 points (3.1% of the grid); x in [..]; gap from .. to ..".
fn target_phase_text(t: &super::phases::TargetPhase) -> String {
    let mut s = format!(
        "reached at {} points ({:.1}% of the grid)",
        t.points,
        100.0 * t.fraction
    );
    for (k, [a, b]) in &t.bounds {
        s.push_str(&format!("; {k} in [{}, {}]", short(*a), short(*b)));
    }
    if let Some(m) = &t.margin {
        let at: Vec<String> = m
            .best_point
            .iter()
            .map(|(k, v)| format!("{k}={}", short(*v)))
            .collect();
        s.push_str(&format!(
            "; gap e^-ell_last from {:.3e} to {:.3e} (largest at {})",
            m.min,
            m.max,
            at.join(", ")
        ));
    }
    s
}

/// The summary being accumulated over the rows of a points file.
pub struct Tally {
    points: usize,
    outcomes: BTreeMap<String, usize>,
    winners: BTreeMap<String, usize>,
    target: Option<Window>,
    /// Number of listed terms (the quadrature columns follow theirs).
    terms: usize,
    quadrature: Option<QuadratureSummary>,
    phases: super::phases::PhaseTally,
}

/// The target's window so far.
struct Window {
    name: String,
    wins: usize,
    /// Smallest and largest value of each axis over the wins.
    lo: Vec<f64>,
    hi: Vec<f64>,
    /// The target's column and its competitors' (when a margin is defined).
    margin: Option<MarginTally>,
}

/// The margin so far: its smallest value and the largest with its point.
struct MarginTally {
    term: usize,
    competitors: Vec<usize>,
    min: f64,
    best: Option<(f64, Vec<f64>)>,
}

/// Add one to the count of `key`, allocating only for a new key.
fn count(map: &mut BTreeMap<String, usize>, key: &str) {
    match map.get_mut(key) {
        Some(n) => *n += 1,
        None => {
            map.insert(key.to_string(), 1);
        }
    }
}

impl Tally {
    /// An empty tally for a scan described by `meta`.
    pub fn new(meta: &Meta) -> Tally {
        Tally {
            points: 0,
            outcomes: Outcome::ALL
                .iter()
                .map(|o| (o.word().to_string(), 0))
                .collect(),
            winners: BTreeMap::new(),
            target: meta.target.as_ref().map(|t| Window::new(meta, t)),
            terms: meta.terms.len(),
            quadrature: meta.infinite.then(QuadratureSummary::new),
            phases: super::phases::PhaseTally::new(meta),
        }
    }

    /// Count one row.
    pub fn add(&mut self, p: &Point) {
        self.points += 1;
        count(&mut self.outcomes, p.outcome());
        if !p.winner().is_empty() {
            count(&mut self.winners, p.winner());
        }
        if let Some(w) = &mut self.target {
            w.add(p);
        }
        self.phases.add(p);
        if let Some(q) = &mut self.quadrature {
            if let Some(check) = p.quadrature(self.terms) {
                q.add(check);
            }
        }
    }

    /// The summary of the rows counted.
    pub fn finish(self, meta: &Meta, files: Vec<String>) -> ScanSummary {
        let points = self.points;
        let flow_quadrature = self.quadrature.map(QuadratureSummary::finish);
        let target = self.target.map(|w| w.finish(meta, points));
        let (phases, target_phase) = self.phases.finish(meta, points);
        let mut notes = vec![crate::flow::report::METHOD_NOTE.to_string()];
        if let Some(t) = target.as_ref() {
            notes.extend(margin_note(t));
        }
        notes.extend(generated_winners_note(meta, &self.winners));
        notes.extend(
            meta.symmetry_breaks
                .iter()
                .map(|b| b.note(meta.points, &meta.describe(b.first))),
        );
        if let Some(q) = flow_quadrature.as_ref().filter(|q| q.not_converged > 0) {
            notes.push(format!(
                "at {} of the {} points the infinite array's flow is not converged in q (q_converged = false in points.csv, with q_points and q_error); `pinflow flow` at such a point says why",
                q.not_converged, q.checked
            ));
        }
        let competitor_wins: BTreeMap<String, usize> = self
            .winners
            .iter()
            .filter(|(name, _)| name.starts_with(crate::flow::competitors::PREFIX))
            .map(|(name, n)| (name.clone(), *n))
            .collect();
        if !competitor_wins.is_empty() {
            let total: usize = competitor_wins.values().sum();
            notes.push(format!(
                "hunted competitors (--competitors, named auto:<particle content>) won at {total} points: {}",
                competitor_wins
                    .iter()
                    .map(|(n, k)| format!("{n} ({k})"))
                    .collect::<Vec<_>>()
                    .join(", ")
            ));
        }
        ScanSummary {
            model: meta.model.clone(),
            axes: meta.axes.iter().map(|a| a.spec()).collect(),
            points,
            outcomes: self.outcomes,
            winners: self.winners,
            competitor_wins,
            target,
            phases,
            target_phase,
            flow_quadrature,
            files,
            notes,
        }
    }
}

impl Window {
    fn new(meta: &Meta, name: &str) -> Window {
        let term = meta.terms.iter().position(|t| t == name);
        let competitors: Vec<usize> = meta
            .competitors
            .iter()
            .filter_map(|c| meta.terms.iter().position(|t| t == c))
            .collect();
        let margin = term
            .filter(|_| !competitors.is_empty())
            .map(|term| MarginTally {
                term,
                competitors,
                min: f64::INFINITY,
                best: None,
            });
        let n = meta.axes.len();
        Window {
            name: name.to_string(),
            wins: 0,
            lo: vec![f64::INFINITY; n],
            hi: vec![f64::NEG_INFINITY; n],
            margin,
        }
    }

    fn add(&mut self, p: &Point) {
        if p.outcome() != Outcome::Strong.word() || p.winner() != self.name {
            return;
        }
        self.wins += 1;
        for (i, (lo, hi)) in self.lo.iter_mut().zip(&mut self.hi).enumerate() {
            let x = p.coord(i);
            *lo = lo.min(x);
            *hi = hi.max(x);
        }
        if let Some(m) = &mut self.margin {
            m.add(p);
        }
    }

    fn finish(self, meta: &Meta, points: usize) -> TargetSummary {
        let mut ranges = BTreeMap::new();
        if self.wins > 0 {
            for (i, a) in meta.axes.iter().enumerate() {
                ranges.insert(a.name.clone(), [self.lo[i], self.hi[i]]);
            }
        }
        TargetSummary {
            name: self.name,
            points: self.wins,
            fraction: if points == 0 {
                0.0
            } else {
                self.wins as f64 / points as f64
            },
            ranges,
            margin: self.margin.and_then(|m| m.finish(meta)),
            competitors: meta.competitors.clone(),
        }
    }
}

impl MarginTally {
    /// A winning row: its margin to the nearest competitor.
    fn add(&mut self, p: &Point) {
        let target = p.dim0(self.term);
        let m = self
            .competitors
            .iter()
            .map(|&c| p.dim0(c) - target)
            .fold(f64::INFINITY, f64::min);
        if !m.is_finite() {
            return;
        }
        self.min = self.min.min(m);
        if self.best.as_ref().is_none_or(|(b, _)| m > *b) {
            let coords = (0..p.axes()).map(|i| p.coord(i)).collect();
            self.best = Some((m, coords));
        }
    }

    fn finish(self, meta: &Meta) -> Option<Margin> {
        let (max, at) = self.best?;
        let best_point = meta
            .axes
            .iter()
            .zip(&at)
            .map(|(a, x)| (a.name.clone(), *x))
            .collect();
        Some(Margin {
            min: self.min,
            max,
            best_point,
        })
    }
}

impl Report for ScanSummary {
    fn title(&self) -> String {
        format!("Scan: {}", self.model)
    }

    fn facts(&self) -> Vec<(String, String)> {
        let mut f = vec![
            ("axes".to_string(), self.axes.join(", ")),
            ("points".to_string(), self.points.to_string()),
        ];
        if let Some(t) = &self.target {
            let ranges: Vec<String> = t
                .ranges
                .iter()
                .map(|(k, [a, b])| format!("{k} in [{}, {}]", short(*a), short(*b)))
                .collect();
            let mut s = format!(
                "{} wins at {} points ({:.1}% of the grid)",
                t.name,
                t.points,
                100.0 * t.fraction
            );
            if !ranges.is_empty() {
                s.push_str(&format!("; {}", ranges.join(", ")));
            }
            f.push(("target".to_string(), s));
            if let Some(m) = &t.margin {
                let at: Vec<String> = m
                    .best_point
                    .iter()
                    .map(|(k, v)| format!("{k}={}", short(*v)))
                    .collect();
                f.push((
                    "margin".to_string(),
                    format!(
                        "Delta0 gap to the nearest competitor from {:.4} to {:.4} (largest at {})",
                        m.min,
                        m.max,
                        at.join(", ")
                    ),
                ));
            }
        }
        if let Some(t) = &self.target_phase {
            f.push(("target phase".to_string(), target_phase_text(t)));
        }
        if let Some(q) = &self.flow_quadrature {
            let points = if q.points[0] == q.points[1] {
                q.points[0].to_string()
            } else {
                format!("{} to {}", q.points[0], q.points[1])
            };
            let mut s = format!(
                "checked at {} points: D(q) on {points} points, largest relative error estimate {:.1e}",
                q.checked, q.largest_error
            );
            if q.not_converged > 0 {
                s.push_str(&format!(", NOT converged at {} points", q.not_converged));
            }
            f.push(("flow quadrature".to_string(), s));
        }
        f.push(("files".to_string(), self.files.join(", ")));
        f
    }

    fn tables(&self) -> Vec<Table> {
        let mut t = Table::new("outcomes", &["outcome", "points"]);
        for (k, v) in &self.outcomes {
            t.push(vec![k.clone(), v.to_string()]);
        }
        let mut w = Table::new("winners", &["name", "points"]);
        for (k, v) in &self.winners {
            w.push(vec![k.clone(), v.to_string()]);
        }
        let mut p = Table::new(
            "phases (final pinned set)",
            &["phase", "points", "target", "gapped pairs", "gapless modes"],
        );
        for r in &self.phases {
            p.push(vec![
                r.label.clone(),
                r.points.to_string(),
                r.target.to_string(),
                r.gapped_pairs.to_string(),
                r.gapless_modes.to_string(),
            ]);
        }
        vec![t, w, p]
    }

    fn csv_table(&self) -> Table {
        self.tables().remove(0)
    }

    fn notes(&self) -> Vec<String> {
        self.notes.clone()
    }
}
