//! Figures: RG-flow plots, one-parameter scans and phase diagrams.
//!
//! This module owns everything that turns numbers into pictures. The rest of
//! the crate fills plain data structs ([`FlowFigure`], [`LineScanFigure`],
//! [`PhaseMap`], [`HeatMap`]) and calls one function per figure kind; the
//! module chooses layout, colours, fonts and file handling.
//!
//! * Every figure is written twice, as `<stem>.png` (raster, 1200×900 px,
//!   text ≥ 20 px so it stays legible when printed at paper width) and as
//!   `<stem>.svg` (vector, same layout).
//! * Files appear atomically: each is rendered in memory, written to a hidden
//!   temporary file in the target directory and renamed into place, so a
//!   failure never leaves a half-written figure behind.
//! * The DejaVu Sans font is embedded in the binary and registered once; no
//!   system font library is needed.
//! * Colours: the Okabe–Ito categorical palette (distinguishable under the
//!   common forms of colour-blindness) for terms and outcomes, and viridis
//!   (perceptually uniform) for continuous values; see [`palette`].
//! * Nothing here panics on bad data: inconsistent lengths, out-of-range
//!   indices and similar problems come back as [`PlotError`]. Non-finite
//!   values are skipped where a figure can do without them.

mod contour;
mod font;
mod layout;
pub mod lines;
pub mod map;
mod output;
pub mod palette;

use std::path::{Path, PathBuf};

pub use lines::{
    dimension_line_figure, flow_figure, Band, DimensionSeries, FlowFigure, FlowSeries,
    LineScanFigure,
};
pub use map::{contour_lines, heat_map, phase_diagram, Contour, HeatMap, PhaseMap};

/// Failure to produce a figure file.
///
/// Carries the file that could not be written (or, for invalid input, the
/// path stem that was asked for) and a human-readable reason.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("cannot write figure {}: {message}", path.display())]
pub struct PlotError {
    /// The output path (or path stem) concerned.
    pub path: PathBuf,
    /// What went wrong.
    pub message: String,
}

impl PlotError {
    /// Builds an error for `path` with the given message.
    pub fn new(path: &Path, message: impl Into<String>) -> Self {
        PlotError {
            path: path.to_path_buf(),
            message: message.into(),
        }
    }
}
