//! The summary of a finished scan, read back from `points.csv`.
//!
//! Built from the CSV alone (with the scan's [`Meta`]) so that a scan, a
//! resumed scan and a merged set of shards give the same summary bytes.
//! The "stable window" of the target: the points where it wins, their
//! fraction of the grid, the range of each axis they span, and the margin
//! Delta0(competitor) - Delta0(target) to the nearest non-commuting term.

use std::collections::BTreeMap;
use std::path::Path;

use serde::Serialize;

use super::store::Meta;
use crate::error::{Error, InputError};
use crate::output::{short, Report, Table};

/// Outcome words in display order.
pub const OUTCOMES: [&str; 6] = [
    "strong",
    "spinful",
    "gapless",
    "undecided",
    "unphysical",
    "failed",
];

/// One parsed row of `points.csv`.
#[derive(Debug, Clone, PartialEq)]
pub struct Row {
    /// Axis values.
    pub coords: Vec<f64>,
    /// Outcome word.
    pub outcome: String,
    /// Winner name (empty if none).
    pub winner: String,
    /// ell* if any.
    pub ell_star: Option<f64>,
    /// Bare dimensions of the listed terms (NaN where missing).
    pub dims0: Vec<f64>,
    /// Infinite arrays: the flow's quadrature check (points, larger
    /// relative error estimate, passed); None elsewhere and where the flow
    /// was not checked.
    pub quadrature: Option<(usize, f64, bool)>,
}

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
    fn of(rows: &[Row]) -> QuadratureSummary {
        let checks: Vec<(usize, f64, bool)> = rows.iter().filter_map(|r| r.quadrature).collect();
        QuadratureSummary {
            checked: checks.len(),
            not_converged: checks.iter().filter(|c| !c.2).count(),
            points: [
                checks.iter().map(|c| c.0).min().unwrap_or(0),
                checks.iter().map(|c| c.0).max().unwrap_or(0),
            ],
            largest_error: checks.iter().map(|c| c.1).fold(0.0, f64::max),
        }
    }
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
    /// Where the target wins (when the model marks one).
    pub target: Option<TargetSummary>,
    /// Infinite arrays: the flows' quadrature checks over the grid; null
    /// otherwise.
    pub flow_quadrature: Option<QuadratureSummary>,
    /// Files written.
    pub files: Vec<String>,
    /// Limits of the method.
    pub notes: Vec<String>,
}

/// Parse the rows of a points file.
pub fn read_rows(path: &Path, meta: &Meta) -> Result<Vec<Row>, Error> {
    let mut reader = csv::Reader::from_path(path).map_err(|e| csv_error(path, e))?;
    let na = meta.axes.len();
    let nt = meta.terms.len();
    let mut rows = Vec::with_capacity(meta.points);
    for rec in reader.records() {
        let rec = rec.map_err(|e| csv_error(path, e))?;
        let num = |i: usize| rec.get(i).and_then(|s| s.parse::<f64>().ok());
        rows.push(Row {
            coords: (0..na).map(|i| num(i).unwrap_or(f64::NAN)).collect(),
            outcome: rec.get(na).unwrap_or("").to_string(),
            winner: rec.get(na + 1).unwrap_or("").to_string(),
            ell_star: num(na + 2),
            dims0: (0..nt)
                .map(|i| num(na + 3 + i).unwrap_or(f64::NAN))
                .collect(),
            quadrature: if meta.infinite {
                let at = na + 3 + 2 * nt;
                let points = rec.get(at).and_then(|s| s.parse::<usize>().ok());
                let passed = rec.get(at + 2).and_then(|s| s.parse::<bool>().ok());
                points
                    .zip(num(at + 1))
                    .zip(passed)
                    .map(|((p, e), c)| (p, e, c))
            } else {
                None
            },
        });
    }
    if rows.len() != meta.points {
        return Err(Error::Input(InputError::new(
            path.display().to_string(),
            "",
            format!("expected {} points, found {}", meta.points, rows.len()),
        )));
    }
    Ok(rows)
}

fn csv_error(path: &Path, e: csv::Error) -> Error {
    Error::Input(InputError::new(
        path.display().to_string(),
        "",
        format!("cannot read the points file: {e}"),
    ))
}

impl ScanSummary {
    /// Summarise parsed rows.
    pub fn build(meta: &Meta, rows: &[Row], files: Vec<String>) -> ScanSummary {
        let mut outcomes: BTreeMap<String, usize> =
            OUTCOMES.iter().map(|w| (w.to_string(), 0)).collect();
        let mut winners = BTreeMap::new();
        for r in rows {
            *outcomes.entry(r.outcome.clone()).or_insert(0) += 1;
            if !r.winner.is_empty() {
                *winners.entry(r.winner.clone()).or_insert(0) += 1;
            }
        }
        let target = meta.target.as_ref().map(|t| target_summary(meta, rows, t));
        let flow_quadrature = meta.infinite.then(|| QuadratureSummary::of(rows));
        let mut notes = vec![crate::flow::report::METHOD_NOTE.to_string()];
        if let Some(q) = flow_quadrature.as_ref().filter(|q| q.not_converged > 0) {
            notes.push(format!(
                "at {} of the {} points the infinite array's flow is not converged in q (q_converged = false in points.csv, with q_points and q_error); `pinflow flow` at such a point says why",
                q.not_converged, q.checked
            ));
        }
        ScanSummary {
            model: meta.model.clone(),
            axes: meta.axes.iter().map(|a| a.spec()).collect(),
            points: rows.len(),
            outcomes,
            winners,
            target,
            flow_quadrature,
            files,
            notes,
        }
    }
}

fn target_summary(meta: &Meta, rows: &[Row], name: &str) -> TargetSummary {
    let ti = meta.terms.iter().position(|t| t == name);
    let comp: Vec<usize> = meta
        .competitors
        .iter()
        .filter_map(|c| meta.terms.iter().position(|t| t == c))
        .collect();
    let wins: Vec<&Row> = rows
        .iter()
        .filter(|r| r.outcome == "strong" && r.winner == name)
        .collect();
    let mut ranges = BTreeMap::new();
    for (i, a) in meta.axes.iter().enumerate() {
        let vals = wins.iter().map(|r| r.coords[i]);
        let lo = vals.clone().fold(f64::INFINITY, f64::min);
        let hi = vals.fold(f64::NEG_INFINITY, f64::max);
        if !wins.is_empty() {
            ranges.insert(a.name.clone(), [lo, hi]);
        }
    }
    let margin = ti.and_then(|ti| margin_of(meta, &wins, ti, &comp));
    TargetSummary {
        name: name.to_string(),
        points: wins.len(),
        fraction: if rows.is_empty() {
            0.0
        } else {
            wins.len() as f64 / rows.len() as f64
        },
        ranges,
        margin,
        competitors: meta.competitors.clone(),
    }
}

fn margin_of(meta: &Meta, wins: &[&Row], ti: usize, comp: &[usize]) -> Option<Margin> {
    if comp.is_empty() {
        return None;
    }
    let mut best: Option<(f64, &Row)> = None;
    let mut min = f64::INFINITY;
    for r in wins {
        let m = comp
            .iter()
            .map(|&c| r.dims0[c] - r.dims0[ti])
            .fold(f64::INFINITY, f64::min);
        if !m.is_finite() {
            continue;
        }
        min = min.min(m);
        if best.is_none_or(|(b, _)| m > b) {
            best = Some((m, r));
        }
    }
    let (max, at) = best?;
    let best_point = meta
        .axes
        .iter()
        .zip(&at.coords)
        .map(|(a, x)| (a.name.clone(), *x))
        .collect();
    Some(Margin {
        min,
        max,
        best_point,
    })
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
        let mut w = Table::new("winners", &["term", "points"]);
        for (k, v) in &self.winners {
            w.push(vec![k.clone(), v.to_string()]);
        }
        vec![t, w]
    }

    fn csv_table(&self) -> Table {
        self.tables().remove(0)
    }

    fn notes(&self) -> Vec<String> {
        self.notes.clone()
    }
}
