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
pub(crate) fn style(px: f64, colour: RGBColor) -> TextStyle<'static> {
    (FAMILY, px).into_font().color(&colour)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn embedded_font_registers_and_is_a_truetype_file() {
        assert!(ensure_registered().is_ok());
        // Second call is a no-op with the same answer.
        assert!(ensure_registered().is_ok());
        // TrueType files start with version 1.0 (0x00010000).
        assert_eq!(&DEJAVU_SANS[..4], &[0, 1, 0, 0]);
    }
}
