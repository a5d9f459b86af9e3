//! The figure style: `screen` (1200×900 px, title and caption drawn in)
//! or `paper` (680×600 px drawn as a 3.4 × 3.0 in PDF, with text sizes
//! scaled to 8-9 pt, see `font`; no title and no caption drawn: they go
//! to `<stem>.txt`; the legend goes under the plot, see `layout`).
//!
//! Invariant: the style is per thread and set by the command line before
//! any figure is written (figures are drawn on the thread that writes
//! them); the default is `screen`, so library callers and tests that never
//! set it get today's look.

use std::cell::Cell;

/// How figures look.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum FigureStyle {
    /// Large canvas, title and caption drawn in (the default).
    #[default]
    Screen,
    /// Single-column width 3.4 in, 8-9 pt text, no title or caption drawn.
    Paper,
}

thread_local! {
    static STYLE: Cell<FigureStyle> = const { Cell::new(FigureStyle::Screen) };
}

/// Set the style of the figures this thread writes from now on.
pub fn set_figure_style(style: FigureStyle) {
    STYLE.with(|s| s.set(style));
}

/// The style of the figures this thread writes.
pub fn figure_style() -> FigureStyle {
    STYLE.with(|s| s.get())
}

/// `f` run with `style` set on this thread, the thread's own style restored
/// afterwards (figures drawn on rayon's threads take the caller's style).
pub fn styled<R>(style: FigureStyle, f: impl FnOnce() -> R) -> R {
    let before = figure_style();
    set_figure_style(style);
    let out = f();
    set_figure_style(before);
    out
}

/// Canvas size in pixels.
pub(crate) fn canvas() -> (u32, u32) {
    match figure_style() {
        FigureStyle::Screen => (1200, 900),
        FigureStyle::Paper => (680, 600),
    }
}

/// Pixels per inch of the PDF page: 8 in wide on screen, 3.4 in on paper.
pub(crate) fn pdf_dpi() -> f32 {
    match figure_style() {
        FigureStyle::Screen => 150.0,
        FigureStyle::Paper => 200.0,
    }
}
