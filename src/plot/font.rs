//! The embedded font and the text styles built on it.

use std::sync::OnceLock;

use plotters::style::{register_font, FontStyle, IntoFont, RGBColor, TextStyle};

/// DejaVu Sans, shipped with the crate (licence beside the file in `assets/fonts`).
pub(crate) static DEJAVU_SANS: &[u8] = include_bytes!("../../assets/fonts/DejaVuSans.ttf");

/// Family name under which the embedded font is registered.
pub(crate) const FAMILY: &str = "sans-serif";

static REGISTERED: OnceLock<Result<(), String>> = OnceLock::new();

/// Registers the embedded font with plotters (only the first call does work).
pub(crate) fn ensure_registered() -> Result<(), String> {
    REGISTERED
        .get_or_init(|| {
            register_font(FAMILY, FontStyle::Normal, DEJAVU_SANS)
                .map_err(|_| "the embedded DejaVu Sans font could not be parsed".to_string())
        })
        .clone()
}

/// Pixel sizes of the text roles used in every figure.
pub(crate) mod size {
    /// Figure title.
    pub const TITLE: f64 = 32.0;
    /// Axis descriptions ("|y|", parameter names).
    pub const AXIS: f64 = 26.0;
    /// Tick labels.
    pub const TICK: f64 = 22.0;
    /// Legend entries.
    pub const LEGEND: f64 = 22.0;
    /// Caption under the figure.
    pub const CAPTION: f64 = 21.0;
}

/// A text style in the embedded font with the given pixel size and colour.
/// Paper-style figures scale the sizes up (see [`paper_px`]).
pub(crate) fn style(px: f64, colour: RGBColor) -> TextStyle<'static> {
    let px = match super::style::figure_style() {
        super::style::FigureStyle::Screen => px,
        super::style::FigureStyle::Paper => paper_px(px),
    };
    (FAMILY, px).into_font().color(&colour)
}

/// Pixel size on the paper canvas (200 px per inch). plotters sets the
/// em at 0.806 of its size (its SVG writes `font-size="17.74"` for 22 px;
/// pdftotext measures the same in the PDF), so 28.6 px gives an 8.3 pt em
/// (tick labels, legend) and 31 px a 9.0 pt em (axis titles):
/// 28.6 × 0.806 / 200 × 72 = 8.3.
fn paper_px(px: f64) -> f64 {
    if px == size::AXIS {
        31.0
    } else {
        px * 1.3
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn paper_text_is_eight_to_nine_points() {
        // Em in points at 200 px per inch: 0.806 of the line height.
        let pt = |px: f64| paper_px(px) * 0.806 / 200.0 * 72.0;
        for role in [size::TICK, size::LEGEND, size::AXIS] {
            assert!(
                (8.0..=9.05).contains(&pt(role)),
                "{role} px: {} pt",
                pt(role)
            );
        }
    }

    #[test]
    fn embedded_font_registers_and_is_a_truetype_file() {
        assert!(ensure_registered().is_ok());
        // Second call is a no-op with the same answer.
        assert!(ensure_registered().is_ok());
        // TrueType files start with version 1.0 (0x00010000).
        assert_eq!(&DEJAVU_SANS[..4], &[0, 1, 0, 0]);
    }
}
