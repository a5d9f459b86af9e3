//! Reading a finished `points.csv` one row at a time.
//!
//! The summary and the figures are built in one pass over the file: each
//! row is parsed into a reused record and handed to the consumers as a
//! [`Point`] view, which parses a cell only when it is asked for. No row is
//! kept, so the pass needs memory for one row whatever the grid size.

use std::path::Path;

use super::store::Meta;
use crate::error::{Error, InputError};

/// One row of `points.csv`, borrowed from the reader's record.
pub struct Point<'r> {
    rec: &'r csv::StringRecord,
    /// Number of axes (the columns before `outcome`).
    axes: usize,
    /// Index of the `phase` column (`Meta::phase_column`).
    phase_at: usize,
}

impl Point<'_> {
    fn num(&self, i: usize) -> Option<f64> {
        self.rec.get(i).and_then(|s| s.parse::<f64>().ok())
    }

    /// Number of axes.
    pub fn axes(&self) -> usize {
        self.axes
    }

    /// Value of axis `i` (NaN if the cell is not a number).
    pub fn coord(&self, i: usize) -> f64 {
        self.num(i).unwrap_or(f64::NAN)
    }

    /// Outcome word.
    pub fn outcome(&self) -> &str {
        self.rec.get(self.axes).unwrap_or("")
    }

    /// Winner name (empty if none).
    pub fn winner(&self) -> &str {
        self.rec.get(self.axes + 1).unwrap_or("")
    }

    /// ell*, if the row has one.
    pub fn ell_star(&self) -> Option<f64> {
        self.num(self.axes + 2)
    }

    /// Bare dimension of listed term `t` (NaN where missing).
    pub fn dim0(&self, t: usize) -> f64 {
        self.num(self.axes + 3 + t).unwrap_or(f64::NAN)
    }

    /// Label of the phase (empty where none is named).
    pub fn phase(&self) -> &str {
        self.rec.get(self.phase_at).unwrap_or("")
    }

    /// The point is in the target phase.
    pub fn target_phase(&self) -> bool {
        self.rec.get(self.phase_at + 1) == Some("true")
    }

    /// ell of the last stage, if any.
    pub fn ell_last(&self) -> Option<f64> {
        self.num(self.phase_at + 2)
    }

    /// Gapped pairs and gapless modes of the phase.
    pub fn phase_counts(&self) -> Option<(usize, usize)> {
        let at = |i: usize| self.rec.get(i).and_then(|s| s.parse::<usize>().ok());
        Some((at(self.phase_at + 3)?, at(self.phase_at + 4)?))
    }

    /// Infinite arrays: the flow's quadrature check (points, relative error
    /// estimate, passed) from the three columns after the `terms` pairs of
    /// dimension columns; None where the flow was not checked.
    pub fn quadrature(&self, terms: usize) -> Option<(usize, f64, bool)> {
        let at = self.axes + 3 + 2 * terms;
        let points = self.rec.get(at).and_then(|s| s.parse::<usize>().ok())?;
        let error = self.num(at + 1)?;
        let passed = self.rec.get(at + 2).and_then(|s| s.parse::<bool>().ok())?;
        Some((points, error, passed))
    }
}

/// Call `each(point)` for every row of a points file, in order.
/// The file must hold exactly `meta.points` rows; rows past that are
/// counted for the message but not handed on.
pub fn for_each_point(path: &Path, meta: &Meta, mut each: impl FnMut(&Point)) -> Result<(), Error> {
    let mut reader = csv::Reader::from_path(path).map_err(|e| csv_error(path, e))?;
    let mut rec = csv::StringRecord::new();
    let mut rows = 0;
    while reader
        .read_record(&mut rec)
        .map_err(|e| csv_error(path, e))?
    {
        if rows < meta.points {
            let point = Point {
                rec: &rec,
                axes: meta.axes.len(),
                phase_at: meta.phase_column(),
            };
            each(&point);
        }
        rows += 1;
    }
    if rows != meta.points {
        return Err(Error::Input(InputError::new(
            path.display().to_string(),
            "",
            format!("expected {} points, found {rows}", meta.points),
        )));
    }
    Ok(())
}

fn csv_error(path: &Path, e: csv::Error) -> Error {
    Error::Input(InputError::new(
        path.display().to_string(),
        "",
        format!("cannot read the points file: {e}"),
    ))
}
