//! Figures: RG-flow plots, one-parameter scans and phase diagrams.
//!
//! This module owns everything that turns numbers into pictures. The rest of
//! the crate fills plain data structs ([`FlowFigure`], [`LineScanFigure`],
//! [`PhaseMap`], [`HeatMap`]) and calls one function per figure kind; the
//! module chooses layout, colours, fonts and file handling.
//!
//! * Every figure is written three times, as `<stem>.png` (raster,
//!   1200×900 px, text ≥ 20 px), `<stem>.svg` and `<stem>.pdf` (vector, the
//!   embedded font subset into the PDF; see [`pdf`]). `--figure-style
//!   paper` draws 680×600 px with no title or caption as a 3.4 × 3.0 in
//!   PDF (text 8-9 pt, legend in columns under the plot) and writes the title and caption to `<stem>.txt`; see
//!   [`style`].
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
mod logaxis;
pub mod map;
mod output;
mod pair;
pub mod palette;
mod pdf;
mod pdf_streams;
pub mod style;

pub use lines::{
    dimension_line_figure, flow_figure, Band, DimensionSeries, FlowFigure, FlowSeries,
    LineScanFigure,
};
pub use map::{
    contour_lines, heat_map, phase_diagram, phase_diagram_and_heat_map, Contour, ContourTracer,
    HeatMap, PhaseMap, MAX_SVG_RECTS,
};

pub use crate::error::PlotError;
pub use style::{figure_style, set_figure_style, styled, FigureStyle};

/// Helpers shared by the figure tests.
#[cfg(test)]
pub(crate) mod testutil {
    use std::path::{Path, PathBuf};

    /// The eight bytes every PNG file starts with.
    const PNG_SIGNATURE: [u8; 8] = [0x89, b'P', b'N', b'G', 0x0d, 0x0a, 0x1a, 0x0a];

    /// `<stem>.<ext>` without touching dots inside the stem.
    pub fn sibling(stem: &Path, ext: &str) -> PathBuf {
        PathBuf::from(format!("{}.{ext}", stem.display()))
    }

    /// Reads the PNG and SVG written for `stem`, checking the PNG header.
    pub fn read_outputs(stem: &Path) -> (Vec<u8>, String) {
        let png = std::fs::read(sibling(stem, "png")).expect("PNG written");
        let svg = std::fs::read_to_string(sibling(stem, "svg")).expect("SVG written");
        assert!(png.len() > 10_000, "PNG suspiciously small: {}", png.len());
        assert_eq!(png[..8], PNG_SIGNATURE);
        // IHDR: width and height, big-endian, right after the chunk header.
        assert_eq!(&png[12..16], b"IHDR");
        assert_eq!(u32::from_be_bytes(png[16..20].try_into().unwrap()), 1200);
        assert_eq!(u32::from_be_bytes(png[20..24].try_into().unwrap()), 900);
        assert!(svg.starts_with("<svg"), "not an SVG document");
        assert!(svg.trim_end().ends_with("</svg>"), "SVG not closed");
        (png, svg)
    }

    /// Contents of all `<text>` elements of an SVG, trimmed.
    pub fn svg_texts(svg: &str) -> Vec<String> {
        svg.split("<text")
            .skip(1)
            .filter_map(|part| {
                let start = part.find('>')? + 1;
                let end = part.find("</text>")?;
                Some(part[start..end].trim().to_string())
            })
            .collect()
    }

    /// Number of `<text>` elements whose content is exactly `label`.
    pub fn count_text(svg: &str, label: &str) -> usize {
        svg_texts(svg).iter().filter(|t| *t == label).count()
    }

    /// Writes the figure twice and checks both files are byte-identical.
    pub fn assert_deterministic(dir: &Path, write: impl Fn(&Path)) {
        let (a, b) = (dir.join("first"), dir.join("second"));
        write(&a);
        write(&b);
        for ext in ["png", "svg"] {
            let x = std::fs::read(sibling(&a, ext)).unwrap();
            let y = std::fs::read(sibling(&b, ext)).unwrap();
            assert!(x == y, "{ext} output differs between two renders");
        }
    }

    /// Hex colour as the SVG backend writes it.
    pub fn hex(c: plotters::style::RGBColor) -> String {
        format!("#{:02X}{:02X}{:02X}", c.0, c.1, c.2)
    }
}
