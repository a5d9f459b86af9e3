//! Phase diagrams over a line or a plane of parameters.
//!
//! Every grid point is one flow ([`crate::flow::Flow::run`], the same code
//! as `pinflow flow`; for an infinite array with its quadrature check,
//! [`crate::flow::check`], whose result ends the row). Points are computed
//! in parallel (rayon) and appended to the partial file in index order as
//! they are ready ([`ordered`]), so the output bytes do not depend on the
//! number of threads, an interrupted scan can be resumed, and shards of a
//! scan can be merged. The summary and figures are built from the finished
//! `points.csv` alone (see [`summary`]), which is why `merge` needs no model.
//!
//! Memory does not grow with the rows: computing holds a bounded window of
//! rows, resuming reads the partial file in blocks, and the finishing step
//! ([`run::finish`]) reads `points.csv` once, row by row ([`points`]), into
//! the summary's tally and the figures' canvas ([`figures`]), which keep a
//! few bytes per point (12 for a plane) instead of the rows.
//!
//! Index order: x varies fastest; point i has x index i % nx and y index
//! i / nx.

pub mod axis;
pub mod figures;
pub mod folder;
mod ordered;
pub mod phases;
pub mod points;
pub mod preview;
pub mod run;
pub mod store;
pub mod summary;

use std::path::{Path, PathBuf};

use crate::core::system::System;
use crate::error::{Error, InputError};
use crate::flow::{Flow, FlowOptions, FlowResult, Outcome};
pub use axis::Axis;
use store::{csv_line, Meta, RowFile};

/// Largest grid run without `--force`.
pub const MAX_POINTS: usize = 20_000_000;

/// What to scan.
#[derive(Debug, Clone)]
pub struct ScanSpec {
    /// One or two axes (x first).
    pub axes: Vec<Axis>,
    /// The fixed parameter point (defaults with `--set` overrides).
    pub base: Vec<f64>,
    /// Flow options.
    pub options: FlowOptions,
    /// (k, n), 1-based, to compute only every n-th point starting at k-1.
    pub shard: Option<(usize, usize)>,
    /// Hunted competitors joining every flow (`--competitors`).
    pub competitors: Option<crate::flow::competitors::CompetitorOptions>,
}

/// A scan prepared for running.
pub struct Scan<'s> {
    flow: Flow<'s>,
    competing: Option<crate::flow::competitors::Competing<'s>>,
    spec: ScanSpec,
    slots: Vec<usize>,
    /// File meta (fingerprint, columns, target).
    pub meta: Meta,
}

impl<'s> Scan<'s> {
    /// Check the axes against the model and prepare the flow plan.
    pub fn new(sys: &'s System, model_bytes: &[u8], mut spec: ScanSpec) -> Result<Scan<'s>, Error> {
        let slots = spec
            .axes
            .iter()
            .map(|a| {
                sys.model.params.index(&a.name).ok_or_else(|| {
                    InputError::new(
                        "command line",
                        "--x/--y",
                        format!(
                            "unknown axis parameter `{}` (known parameters: {})",
                            a.name,
                            sys.model.params.names().join(", ")
                        ),
                    )
                })
            })
            .collect::<Result<Vec<_>, _>>()?;
        if spec.axes.len() == 2 && spec.axes[0].name == spec.axes[1].name {
            return Err(InputError::new(
                "command line",
                "--y",
                "the two axes must be different parameters",
            )
            .into());
        }
        // N_x N_y must be countable (2^32 x 2^32 wrapped to 0 points).
        if spec
            .axes
            .iter()
            .try_fold(1usize, |p, a| p.checked_mul(a.n))
            .is_none()
        {
            return Err(InputError::new(
                "command line",
                "--x/--y",
                "the grid has more points than can be counted; narrow the axes",
            )
            .into());
        }
        spec.options.record = false;
        let mut meta = make_meta(sys, model_bytes, &spec);
        meta.symmetry_breaks = symmetry_breaks(sys, &spec, &slots)?;
        let flow = Flow::new(sys, spec.options.clone());
        let competing = spec
            .competitors
            .clone()
            .map(|c| crate::flow::competitors::Competing::new(sys, spec.options.clone(), c))
            .transpose()?;
        Ok(Scan {
            flow,
            competing,
            spec,
            slots,
            meta,
        })
    }

    /// Total number of grid points.
    pub fn points(&self) -> usize {
        self.spec.axes.iter().map(|a| a.n).product()
    }

    /// Number of grid points this run computes.
    pub fn count(&self) -> usize {
        match self.spec.shard {
            None => self.points(),
            Some((k, n)) => self.points().saturating_sub(k - 1).div_ceil(n),
        }
    }

    /// The grid index of the j-th point this run computes.
    pub fn index_at(&self, j: usize) -> usize {
        match self.spec.shard {
            None => j,
            Some((k, n)) => k - 1 + j * n,
        }
    }

    /// The parameter point of a grid index.
    pub fn point(&self, index: usize) -> Vec<f64> {
        grid_point(&self.spec, &self.slots, index)
    }

    /// Flow one grid point and format its CSV row.
    pub fn row(&self, index: usize) -> String {
        let point = self.point(index);
        let run = match &self.competing {
            Some(c) => c.run(&point),
            None => self.flow.run(&point),
        };
        let result = match run {
            Ok(r) => r,
            // Work refused at this point (too many hunted competitors, a
            // hunt above its limit) is not an undefined theory.
            Err(Error::Refused(e)) => FlowResult::without_flow(Outcome::Failed, e.message),
            Err(Error::Input(e)) => FlowResult::without_flow(Outcome::Unphysical, e.message),
            Err(e) => FlowResult::without_flow(Outcome::Failed, e.to_string()),
        };
        let coords: Vec<f64> = self.slots.iter().map(|&s| point[s]).collect();
        let mut cells = row_cells(&coords, &result, self.meta.terms.len());
        if self.meta.infinite {
            cells.extend(quadrature_cells(&result));
        }
        cells.extend(phase_cells(&result));
        csv_line(&cells)
    }

    /// Compute every remaining point of `file`, appending the rows in
    /// index order as they are ready (see [`ordered`]).
    pub fn run_into(&self, file: &mut RowFile, progress: &dyn Fn(usize)) -> Result<(), Error> {
        let count = self.count();
        let start = file.rows.min(count);
        let row = |j: usize| self.row(self.index_at(j));
        ordered::compute_in_order(start..count, row, &mut |rows| {
            file.append(&rows)?;
            progress(rows.len());
            Ok(())
        })?;
        file.sync()
    }
}

/// Cells of one row: axis values, outcome, winner, ell*, bare and final
/// dimensions of the listed terms (empty where there is no flow).
pub fn row_cells(coords: &[f64], r: &FlowResult, listed: usize) -> Vec<String> {
    let mut cells: Vec<String> = coords.iter().map(|x| format!("{x}")).collect();
    cells.push(r.outcome.word().to_string());
    cells.push(r.winner.clone().unwrap_or_default());
    cells.push(r.ell_star.map(|l| format!("{l}")).unwrap_or_default());
    // The row of model term i (its representative translate when the flow
    // split the families into translates).
    let row = |i: usize| r.listed_rows.get(i).copied().flatten();
    let dims = |f: &dyn Fn(usize) -> f64| -> Vec<String> {
        (0..listed)
            .map(|i| match row(i) {
                Some(j) if j < r.terms.len() => format!("{}", f(j)),
                _ => String::new(),
            })
            .collect()
    };
    cells.extend(dims(&|i| r.terms[i].dimension0));
    cells.extend(dims(&|i| r.terms[i].dimension));
    cells
}

/// The cells of [`store::QUADRATURE_COLUMNS`] (empty where the flow was
/// not checked: unphysical and failed points).
pub fn quadrature_cells(r: &FlowResult) -> Vec<String> {
    match &r.flow_quadrature {
        Some(c) => vec![
            c.points.to_string(),
            format!("{}", c.worst()),
            c.converged.to_string(),
        ],
        None => vec![String::new(); 3],
    }
}

/// The cells of [`store::PHASE_COLUMNS`] (empty where no phase is named).
pub fn phase_cells(r: &FlowResult) -> Vec<String> {
    let ell = r.ell_last.map(|l| format!("{l}")).unwrap_or_default();
    match &r.phase {
        Some(p) => vec![
            p.label.clone(),
            p.target.to_string(),
            ell,
            p.gapped_pairs.to_string(),
            p.gapless_modes.to_string(),
        ],
        None => vec![
            String::new(),
            "false".into(),
            ell,
            String::new(),
            String::new(),
        ],
    }
}

/// The declared symmetries the listed terms break over the whole grid (all
/// shards: every shard's meta is the same).
fn symmetry_breaks(
    sys: &System,
    spec: &ScanSpec,
    slots: &[usize],
) -> Result<Vec<crate::search::breaks::BreakCount>, Error> {
    let count = spec.axes.iter().map(|a| a.n).product();
    let point = |index: usize| grid_point(spec, slots, index);
    crate::search::breaks::tally(sys, count, &point)
}

/// The parameter point of a grid index (x fastest).
fn grid_point(spec: &ScanSpec, slots: &[usize], index: usize) -> Vec<f64> {
    let mut p = spec.base.clone();
    let mut rest = index;
    for (axis, &slot) in spec.axes.iter().zip(slots) {
        p[slot] = axis.value(rest % axis.n);
        rest /= axis.n;
    }
    p
}

fn make_meta(sys: &System, model_bytes: &[u8], spec: &ScanSpec) -> Meta {
    let terms: Vec<String> = sys.model.terms.iter().map(|t| t.name.clone()).collect();
    let target = sys.model.target();
    let competitors = target
        .map(|t| {
            (0..terms.len())
                .filter(|&b| b != t && !sys.invariants.commutes[t][b])
                .map(|b| terms[b].clone())
                .collect()
        })
        .unwrap_or_default();
    let mut meta = Meta {
        fingerprint: String::new(),
        model: sys.model.name.clone(),
        axes: spec.axes.clone(),
        terms,
        target: target.map(|t| sys.model.terms[t].name.clone()),
        competitors,
        shard: spec.shard,
        points: spec.axes.iter().map(|a| a.n).product(),
        infinite: sys.is_infinite(),
        symmetry_breaks: Vec::new(),
    };
    // The fingerprint identifies the whole scan, so it leaves out the shard:
    // every shard of one scan (and the unsharded scan) carries the same
    // fingerprint, and `merge` can compare them. The shard itself is still
    // part of the meta, so resuming checks it.
    let whole = Meta {
        shard: None,
        ..meta.clone()
    };
    let mut canonical = format!(
        "{}|{:?}|{}|{}",
        String::from_utf8_lossy(model_bytes),
        spec.base,
        serde_json::to_string(&spec.options).unwrap_or_default(),
        serde_json::to_string(&whole).unwrap_or_default()
    );
    // Hunted competitors change every row (absent: the fingerprint of a
    // scan without them is unchanged).
    if let Some(c) = &spec.competitors {
        canonical.push_str(&format!("|competitors {c:?}"));
    }
    meta.fingerprint = format!("{:016x}", fnv1a(canonical.as_bytes()));
    meta
}

/// FNV-1a, 64 bit: a stable fingerprint (not a security hash).
fn fnv1a(bytes: &[u8]) -> u64 {
    bytes.iter().fold(0xcbf2_9ce4_8422_2325u64, |h, b| {
        (h ^ *b as u64).wrapping_mul(0x0100_0000_01b3)
    })
}

/// File names inside the output directory.
pub fn partial_path(dir: &Path, shard: Option<(usize, usize)>) -> PathBuf {
    match shard {
        None => dir.join(".points.running.csv"),
        Some((k, n)) => dir.join(format!(".shard-{k}-of-{n}.running.csv")),
    }
}

/// Final name of a shard file.
pub fn shard_path(dir: &Path, k: usize, n: usize) -> PathBuf {
    dir.join(format!("shard-{k}-of-{n}.csv"))
}
