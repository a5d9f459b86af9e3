//! Page furniture shared by all figures: title, caption, legend column,
//! axes set-up, styled lines and number formatting.

use plotters::coord::Shift;
use plotters::element::DashedPathElement;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use super::font::{self, size};
use super::logaxis::{self, AxisCoord};
use super::output::msg;

/// A chart with f64 axes (a log axis carries log10 values, see [`logaxis`]).
pub(crate) type Chart<'a, DB> = ChartContext<'a, DB, Cartesian2d<AxisCoord, AxisCoord>>;

/// A page region in pixel coordinates.
pub(crate) type Area<DB> = DrawingArea<DB, Shift>;

/// Colour of text, axes and reference lines.
pub(crate) const INK: RGBColor = RGBColor(30, 30, 30);
/// Colour of caption text.
const CAPTION_INK: RGBColor = RGBColor(70, 70, 70);
/// Colour of reference lines (Δ = 2, ℓ*).
pub(crate) const REFERENCE: RGBColor = RGBColor(90, 90, 90);
/// Colour of grid lines.
const GRID: RGBColor = RGBColor(225, 225, 225);

/// Space kept around the page, in pixels.
const PAGE_MARGIN: i32 = 16;
const TITLE_HEIGHT: i32 = 52;
const CAPTION_LINE: i32 = 26;
/// Longer captions are cut (with "…") so the plot keeps its room.
const MAX_CAPTION_LINES: usize = 5;
const LEGEND_ROW: i32 = 34;
const LEGEND_SAMPLE: i32 = 46;
const LEGEND_GAP: i32 = 12;

/// How a line is stroked.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Dash {
    Solid,
    Dashed,
    Dotted,
    Long,
}

impl Dash {
    /// Dash length and gap in pixels (`None` for a solid line).
    fn pattern(self) -> Option<(u32, u32)> {
        match self {
            Dash::Solid => None,
            Dash::Dashed => Some((12, 8)),
            Dash::Dotted => Some((3, 7)),
            Dash::Long => Some((26, 10)),
        }
    }
}

/// The symbol drawn in front of a legend label.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum Sample {
    /// A short line in the given colour, width and dash.
    Line(RGBColor, u32, Dash),
    /// A filled square in the given colour and opacity.
    Swatch(RGBColor, f64),
}

/// One row of a legend.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct LegendEntry {
    pub label: String,
    pub sample: Sample,
}

impl LegendEntry {
    pub fn line(label: impl Into<String>, colour: RGBColor, width: u32, dash: Dash) -> Self {
        LegendEntry {
            label: label.into(),
            sample: Sample::Line(colour, width, dash),
        }
    }

    pub fn swatch(label: impl Into<String>, colour: RGBColor, alpha: f64) -> Self {
        LegendEntry {
            label: label.into(),
            sample: Sample::Swatch(colour, alpha),
        }
    }
}

/// Draws the title and the caption and returns the area left between them.
pub(crate) fn frame<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    title: &str,
    caption: &str,
) -> Result<DrawingArea<DB, Shift>, String> {
    let page = root.margin(PAGE_MARGIN, PAGE_MARGIN, PAGE_MARGIN, PAGE_MARGIN);
    if super::style::figure_style() == super::style::FigureStyle::Paper {
        // A paper has its own caption: neither is drawn (see `style`).
        return Ok(page);
    }
    let (w, h) = page.dim_in_pixel();
    let caption_style = font::style(size::CAPTION, CAPTION_INK);
    let mut lines = wrap(&page, caption, &caption_style, w as i32)?;
    if lines.len() > MAX_CAPTION_LINES {
        lines.truncate(MAX_CAPTION_LINES);
        let last = format!("{} …", lines[MAX_CAPTION_LINES - 1]);
        lines[MAX_CAPTION_LINES - 1] = shorten_to_width(&page, &last, &caption_style, w as i32)?;
    }
    let caption_h = if lines.is_empty() {
        0
    } else {
        CAPTION_LINE * lines.len() as i32 + 10
    };
    let title_h = if title.trim().is_empty() {
        0
    } else {
        TITLE_HEIGHT
    };
    let (head, rest) = page.split_vertically(title_h);
    let (body, foot) = rest.split_vertically(h as i32 - title_h - caption_h);
    if title_h > 0 {
        let style = font::style(size::TITLE, INK).pos(Pos::new(HPos::Center, VPos::Center));
        let fitted = shorten_to_width(&head, title, &style, w as i32)?;
        head.draw_text(&fitted, &style, (w as i32 / 2, title_h / 2))
            .map_err(msg)?;
    }
    let left = caption_style.pos(Pos::new(HPos::Left, VPos::Top));
    for (i, line) in lines.iter().enumerate() {
        foot.draw_text(line, &left, (0, 10 + CAPTION_LINE * i as i32))
            .map_err(msg)?;
    }
    Ok(body)
}

/// Greedy word wrap of `text` to lines no wider than `max_width` pixels.
/// Explicit newlines start new lines; a single over-long word stays whole.
pub(crate) fn wrap<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    text: &str,
    style: &TextStyle,
    max_width: i32,
) -> Result<Vec<String>, String> {
    let mut lines = Vec::new();
    for paragraph in text.lines() {
        let mut current = String::new();
        for word in paragraph.split_whitespace() {
            let candidate = if current.is_empty() {
                word.to_string()
            } else {
                format!("{current} {word}")
            };
            if current.is_empty() || text_width(area, &candidate, style)? <= max_width {
                current = candidate;
            } else {
                lines.push(std::mem::replace(&mut current, word.to_string()));
            }
        }
        if !current.is_empty() {
            lines.push(current);
        }
    }
    Ok(lines)
}

/// Width of `text` in pixels when drawn in `style`.
pub(crate) fn text_width<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    text: &str,
    style: &TextStyle,
) -> Result<i32, String> {
    if text.is_empty() {
        return Ok(0);
    }
    let (w, _) = area.estimate_text_size(text, style).map_err(msg)?;
    Ok(w as i32)
}

/// Cuts `text` (adding "…") until it fits in `max_width` pixels.
fn shorten_to_width<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    text: &str,
    style: &TextStyle,
    max_width: i32,
) -> Result<String, String> {
    if text_width(area, text, style)? <= max_width {
        return Ok(text.to_string());
    }
    let mut chars: Vec<char> = text.chars().collect();
    while !chars.is_empty() {
        chars.pop();
        let candidate: String = chars.iter().collect::<String>() + "…";
        if text_width(area, &candidate, style)? <= max_width {
            return Ok(candidate);
        }
    }
    Ok(String::new())
}

/// Width in pixels a legend column needs for `entries`, within `[min, max]`.
pub(crate) fn legend_width<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    entries: &[LegendEntry],
    min: i32,
    max: i32,
) -> Result<i32, String> {
    let g = LegendGeometry::current();
    let style = font::style(size::LEGEND, INK);
    let mut widest = 0;
    for entry in entries {
        widest = widest.max(text_width(area, &entry.label, &style)?);
    }
    Ok((g.sample + g.gap + widest + 2 * g.gap).min(max).max(min))
}

/// Sizes of legend rows: large on screen, compact on paper.
#[derive(Clone, Copy)]
struct LegendGeometry {
    row: i32,
    line: i32,
    sample: i32,
    gap: i32,
}

impl LegendGeometry {
    fn current() -> LegendGeometry {
        match super::style::figure_style() {
            super::style::FigureStyle::Screen => LegendGeometry {
                row: LEGEND_ROW,
                line: LEGEND_ROW - 6,
                sample: LEGEND_SAMPLE,
                gap: LEGEND_GAP,
            },
            super::style::FigureStyle::Paper => LegendGeometry {
                row: 32,
                line: 29,
                sample: 30,
                gap: 6,
            },
        }
    }
}

/// Where a figure's legend goes: a column right of the plot (`screen`), or
/// (`paper`, where a column would take half of a 3.4 in figure) a block of
/// as many columns as fit under the plot. Returns the plot's area, the
/// legend's area and the number of legend columns.
pub(crate) fn split_legend<DB: DrawingBackend>(
    body: &Area<DB>,
    entries: &[LegendEntry],
    min_width: i32,
) -> Result<(Area<DB>, Area<DB>, usize), String> {
    let (w, h) = body.dim_in_pixel();
    if super::style::figure_style() == super::style::FigureStyle::Screen {
        let legend_w = legend_width(body, entries, min_width, w as i32 * 2 / 5)?;
        let (plot, legend) = body.split_horizontally(w as i32 - legend_w);
        return Ok((plot, legend, 1));
    }
    let columns = legend_columns(body, entries, w as i32)?;
    let height = legend_height(body, entries, columns, w as i32)?.min(h as i32 / 2);
    let (plot, legend) = body.split_vertically(h as i32 - height);
    Ok((plot, legend, columns))
}

/// Widths in pixels of the legend columns when `entries` fill `columns`
/// columns row by row (each column as wide as its widest entry).
fn column_widths<DB: DrawingBackend>(
    area: &Area<DB>,
    entries: &[LegendEntry],
    columns: usize,
) -> Result<Vec<i32>, String> {
    let g = LegendGeometry::current();
    let style = font::style(size::LEGEND, INK);
    let mut widths = vec![0; columns.max(1)];
    for (i, entry) in entries.iter().enumerate() {
        let w = g.sample + 3 * g.gap + text_width(area, &entry.label, &style)?;
        widths[i % columns.max(1)] = widths[i % columns.max(1)].max(w);
    }
    Ok(widths)
}

/// The most legend columns (each as wide as its widest entry) that fit
/// across `width` pixels; 1 when even one entry is wider.
fn legend_columns<DB: DrawingBackend>(
    area: &Area<DB>,
    entries: &[LegendEntry],
    width: i32,
) -> Result<usize, String> {
    for columns in (2..=entries.len()).rev() {
        if column_widths(area, entries, columns)?.iter().sum::<i32>() <= width {
            return Ok(columns);
        }
    }
    Ok(1)
}

/// The wrapped lines of every entry (wrapped only in a single column).
fn legend_lines<DB: DrawingBackend>(
    area: &Area<DB>,
    entries: &[LegendEntry],
    columns: usize,
    width: i32,
) -> Result<Vec<Vec<String>>, String> {
    let g = LegendGeometry::current();
    let style = font::style(size::LEGEND, INK);
    let text_w = match columns {
        0 | 1 => width - (g.sample + 3 * g.gap),
        _ => i32::MAX,
    };
    entries
        .iter()
        .map(|e| wrap(area, &e.label, &style, text_w))
        .collect()
}

/// Height in pixels of a legend of `columns` columns, `width` wide.
fn legend_height<DB: DrawingBackend>(
    area: &Area<DB>,
    entries: &[LegendEntry],
    columns: usize,
    width: i32,
) -> Result<i32, String> {
    let g = LegendGeometry::current();
    let lines = legend_lines(area, entries, columns, width)?;
    let rows: i32 = lines
        .chunks(columns.max(1))
        .map(|row| row.iter().map(|l| l.len().max(1)).max().unwrap_or(1) as i32)
        .map(|n| g.row + (n - 1) * g.line)
        .sum();
    Ok(rows + 2 * g.gap)
}

/// Draws `entries` into `area` in `columns` columns, row by row (on
/// screen a single column is the legend column of [`draw_legend`]).
pub(crate) fn draw_legend_grid<DB: DrawingBackend>(
    area: &Area<DB>,
    entries: &[LegendEntry],
    columns: usize,
) -> Result<(), String> {
    if columns <= 1 && super::style::figure_style() == super::style::FigureStyle::Screen {
        return draw_legend(area, entries, 12).map(|_| ());
    }
    let g = LegendGeometry::current();
    let (w, _) = area.dim_in_pixel();
    let columns = columns.max(1);
    let widths = column_widths(area, entries, columns)?;
    let lines = legend_lines(area, entries, columns, w as i32)?;
    let style = font::style(size::LEGEND, INK).pos(Pos::new(HPos::Left, VPos::Center));
    let mut top = g.gap;
    for (r, row) in entries.chunks(columns).enumerate() {
        let (mut x, mut tallest) = (0, 1);
        for (c, entry) in row.iter().enumerate() {
            let y = top + g.row / 2;
            draw_sample_sized(area, entry.sample, (x + g.gap, y), g.sample)?;
            let text_x = x + 2 * g.gap + g.sample;
            for (k, line) in lines[r * columns + c].iter().enumerate() {
                area.draw_text(line, &style, (text_x, y + k as i32 * g.line))
                    .map_err(msg)?;
            }
            tallest = tallest.max(lines[r * columns + c].len());
            x += widths[c];
        }
        top += g.row + (tallest as i32 - 1) * g.line;
    }
    Ok(())
}

/// Draws `entries` as rows from `top` down, inside `area` (labels that are
/// too wide wrap onto further rows). Returns the y just below the last row.
pub(crate) fn draw_legend<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    entries: &[LegendEntry],
    top: i32,
) -> Result<i32, String> {
    let g = LegendGeometry::current();
    let (w, _) = area.dim_in_pixel();
    let style = font::style(size::LEGEND, INK).pos(Pos::new(HPos::Left, VPos::Center));
    let text_x = g.gap + g.sample + g.gap;
    let mut y = top + g.row / 2;
    for entry in entries {
        draw_sample_sized(area, entry.sample, (g.gap, y), g.sample)?;
        let lines = wrap(area, &entry.label, &style, w as i32 - text_x - g.gap)?;
        for line in &lines {
            area.draw_text(line, &style, (text_x, y)).map_err(msg)?;
            y += g.line;
        }
        y += g.row - g.line + if lines.is_empty() { g.line } else { 0 };
    }
    Ok(y - g.row / 2)
}

/// Draws one legend symbol, `len` pixels long, with its left end at `(x, y)`.
fn draw_sample_sized<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    sample: Sample,
    (x, y): (i32, i32),
    len: i32,
) -> Result<(), String> {
    match sample {
        Sample::Line(colour, width, dash) => {
            let style = colour.stroke_width(width);
            let points = vec![(x, y), (x + len, y)];
            match dash.pattern() {
                None => area.draw(&PathElement::new(points, style)),
                Some((on, off)) => area.draw(&DashedPathElement::new(points, on, off, style)),
            }
            .map_err(msg)
        }
        Sample::Swatch(colour, alpha) => {
            let (half, inset) = if len >= 40 { (11, 4) } else { (8, 2) };
            let corners = [(x + inset, y - half), (x + len - inset, y + half)];
            area.draw(&Rectangle::new(corners, colour.mix(alpha).filled()))
                .map_err(msg)?;
            area.draw(&Rectangle::new(corners, INK.mix(0.6).stroke_width(1)))
                .map_err(msg)
        }
    }
}

/// Builds a chart with standard label areas on `area`.
pub(crate) fn chart<'a, DB: DrawingBackend>(
    area: &'a DrawingArea<DB, Shift>,
    x: (f64, f64),
    y: (f64, f64),
) -> Result<Chart<'a, DB>, String> {
    chart_scaled(area, x, y, (false, false))
}

/// [`chart`] with logarithmic axes where `log` says so (the ranges are
/// then log10 values).
pub(crate) fn chart_scaled<'a, DB: DrawingBackend>(
    area: &'a DrawingArea<DB, Shift>,
    x: (f64, f64),
    y: (f64, f64),
    log: (bool, bool),
) -> Result<Chart<'a, DB>, String> {
    let paper = super::style::figure_style() == super::style::FigureStyle::Paper;
    let (bottom, left) = if paper { (74, 104) } else { (64, 100) };
    ChartBuilder::on(area)
        .margin(if paper { 8 } else { 12 })
        .margin_right(if paper { 16 } else { 24 })
        .x_label_area_size(bottom)
        .y_label_area_size(left)
        .build_cartesian_2d(AxisCoord::new(x, log.0), AxisCoord::new(y, log.1))
        .map_err(msg)
}

/// Axis labels and formatting for [`draw_mesh`].
pub(crate) struct Axes<'f> {
    pub x_desc: &'f str,
    pub y_desc: &'f str,
    /// Number of y tick labels wanted.
    pub y_labels: usize,
    /// Optional formatter for y tick labels.
    pub y_format: Option<&'f dyn Fn(&f64) -> String>,
    /// Whether to draw grid lines at the labelled ticks.
    pub grid: bool,
}

/// Draws axes, ticks, tick labels, descriptions and a light grid.
pub(crate) fn draw_mesh<DB: DrawingBackend>(
    chart: &mut Chart<'_, DB>,
    axes: &Axes<'_>,
) -> Result<(), String> {
    // Tick positions are computed in floating point: a tick meant to be 0
    // on an axis that crosses it arrives as about 1e-16 of the span.
    let span = |r: std::ops::Range<f64>| (r.end - r.start).abs();
    let (x_span, y_span) = (span(chart.x_range()), span(chart.y_range()));
    let snap = |v: f64, s: f64| if v.abs() < 1e-9 * s { 0.0 } else { v };
    let spec = chart.as_coord_spec();
    let (x_log, y_log) = (spec.x_spec().log, spec.y_spec().log);
    // On paper the text is large for the canvas: at most one tick label
    // per 40 px of height and 90 px of width.
    let (mut x_labels, mut y_labels) = (8, axes.y_labels);
    if super::style::figure_style() == super::style::FigureStyle::Paper {
        let (w, h) = chart.plotting_area().dim_in_pixel();
        x_labels = x_labels.min(w as usize / 90).max(2);
        y_labels = y_labels.min(h as usize / 40).max(2);
    }
    let decades = |r: std::ops::Range<f64>, n| logaxis::all_decades(r.start, r.end, n);
    let (x_dec, y_dec) = (
        decades(chart.x_range(), x_labels),
        decades(chart.y_range(), y_labels),
    );
    let x_format = |v: &f64| match x_log {
        true => logaxis::log_label(*v, x_dec),
        false => format_number(snap(*v, x_span)),
    };
    let y_default = |v: &f64| match y_log {
        true => logaxis::log_label(*v, y_dec),
        false => format_number(snap(*v, y_span)),
    };
    let y_format: &dyn Fn(&f64) -> String = axes.y_format.unwrap_or(&y_default);
    chart
        .configure_mesh()
        .x_desc(axes.x_desc)
        .y_desc(axes.y_desc)
        .x_labels(x_labels)
        .y_labels(y_labels)
        .x_label_formatter(&x_format)
        .y_label_formatter(y_format)
        .label_style(font::style(size::TICK, INK))
        .axis_desc_style(font::style(size::AXIS, INK))
        .axis_style(INK.stroke_width(1))
        .bold_line_style(match axes.grid {
            true => GRID.stroke_width(1),
            false => TRANSPARENT.stroke_width(0),
        })
        .light_line_style(TRANSPARENT)
        .draw()
        .map_err(msg)
}

/// Splits `points` at non-finite values into drawable runs.
pub(crate) fn finite_runs(points: impl IntoIterator<Item = (f64, f64)>) -> Vec<Vec<(f64, f64)>> {
    let mut runs = vec![Vec::new()];
    for (x, y) in points {
        if x.is_finite() && y.is_finite() {
            if let Some(run) = runs.last_mut() {
                run.push((x, y));
            }
        } else if runs.last().is_some_and(|r| !r.is_empty()) {
            runs.push(Vec::new());
        }
    }
    runs.retain(|r| !r.is_empty());
    runs
}

/// Draws a polyline (already finite) in data coordinates.
pub(crate) fn draw_line<DB: DrawingBackend>(
    chart: &mut Chart<'_, DB>,
    points: &[(f64, f64)],
    colour: RGBColor,
    width: u32,
    dash: Dash,
) -> Result<(), String> {
    let style = colour.stroke_width(width);
    let kept = match width {
        0 | 1 => points.to_vec(),
        _ => thin_out(chart, points),
    };
    let pts = kept.into_iter();
    match dash.pattern() {
        None => chart.draw_series(LineSeries::new(pts, style)).map(|_| ()),
        Some((on, off)) => chart
            .draw_series(DashedLineSeries::new(pts, on, off, style))
            .map(|_| ()),
    }
    .map_err(msg)
}

/// Minimum pixel distance between the vertices of a thick line.
const THICK_VERTEX_SPACING: i64 = 7;

/// Drops vertices closer than a few pixels to the previously kept one
/// (always keeping both ends). Thick lines are rasterised as polygons with
/// integer corners, and densely sampled data would make them look ragged.
fn thin_out<DB: DrawingBackend>(chart: &Chart<'_, DB>, points: &[(f64, f64)]) -> Vec<(f64, f64)> {
    let mut kept: Vec<(f64, f64)> = Vec::with_capacity(points.len());
    let mut last_px: Option<(i32, i32)> = None;
    for (i, p) in points.iter().enumerate() {
        let px = chart.backend_coord(p);
        let far = last_px.is_none_or(|q| {
            let (dx, dy) = (i64::from(px.0 - q.0), i64::from(px.1 - q.1));
            dx * dx + dy * dy >= THICK_VERTEX_SPACING * THICK_VERTEX_SPACING
        });
        let last = i + 1 == points.len();
        if last && !far && kept.len() > 1 {
            // Too close to the previous vertex: move that vertex to the end
            // instead of adding a stub segment.
            kept.pop();
        }
        if far || last {
            kept.push(*p);
            last_px = Some(px);
        }
    }
    kept
}

/// Range `(lo, hi)` of the finite values, widened by `pad` of its span on
/// each side; a single value gets a unit-wide range, no value gives `None`.
pub(crate) fn padded_range(values: impl IntoIterator<Item = f64>, pad: f64) -> Option<(f64, f64)> {
    let (lo, hi) = values
        .into_iter()
        .filter(|v| v.is_finite())
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), v| {
            (l.min(v), h.max(v))
        });
    if lo > hi {
        return None;
    }
    let span = hi - lo;
    if span <= f64::EPSILON * lo.abs().max(1.0) {
        return Some((lo - 0.5, hi + 0.5));
    }
    Some((lo - pad * span, hi + pad * span))
}

/// Short, readable form of a number for ticks and legends. Magnitudes
/// below 1e-12 print as 0: on the linear axes drawn here they are rounding
/// left over from tick placement (a tick at -5.6e-17 is the tick at 0).
pub(crate) fn format_number(v: f64) -> String {
    if v.abs() < 1e-12 {
        return "0".to_string();
    }
    let a = v.abs();
    if !(1e-3..1e5).contains(&a) {
        return format!("{v:.1e}");
    }
    let decimals = (3 - a.log10().floor() as i32).clamp(0, 4) as usize;
    let s = format!("{v:.decimals$}");
    let s = if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    };
    if s == "-0" {
        "0".to_string()
    } else {
        s
    }
}

/// "10⁻⁵" for integer exponents, a plain number otherwise.
pub(crate) fn power_of_ten(exponent: f64) -> String {
    let k = exponent.round();
    if (exponent - k).abs() > 1e-6 {
        return format_number(10f64.powf(exponent));
    }
    const SUP: [char; 10] = ['⁰', '¹', '²', '³', '⁴', '⁵', '⁶', '⁷', '⁸', '⁹'];
    let mut s = String::from("10");
    if k < 0.0 {
        s.push('⁻');
    }
    for d in format!("{}", k.abs() as i64).chars() {
        s.push(SUP[d.to_digit(10).unwrap_or(0) as usize]);
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_are_short_and_exact_enough() {
        assert_eq!(format_number(0.0), "0");
        assert_eq!(format_number(-5.551115123125783e-17), "0");
        assert_eq!(format_number(2.0), "2");
        assert_eq!(format_number(0.30000000000000004), "0.3");
        assert_eq!(format_number(-1.25), "-1.25");
        assert_eq!(format_number(1234.5678), "1235");
        assert_eq!(format_number(0.0123456), "0.0123");
        assert_eq!(format_number(3.0e-7), "3.0e-7");
        assert_eq!(format_number(-1e-12), "-1.0e-12");
    }

    #[test]
    fn powers_of_ten_use_superscripts() {
        assert_eq!(power_of_ten(-5.0), "10⁻⁵");
        assert_eq!(power_of_ten(0.0), "10⁰");
        assert_eq!(power_of_ten(12.0), "10¹²");
        assert_eq!(power_of_ten(0.5), format_number(10f64.sqrt()));
    }

    #[test]
    fn runs_break_at_non_finite_points() {
        let pts = vec![
            (0.0, 1.0),
            (1.0, f64::NAN),
            (2.0, 2.0),
            (3.0, 3.0),
            (f64::INFINITY, 0.0),
        ];
        assert_eq!(
            finite_runs(pts),
            vec![vec![(0.0, 1.0)], vec![(2.0, 2.0), (3.0, 3.0)]]
        );
        assert!(finite_runs(vec![(f64::NAN, 0.0)]).is_empty());
    }

    #[test]
    fn padded_range_handles_degenerate_input() {
        assert_eq!(padded_range(vec![1.0, 3.0], 0.5), Some((0.0, 4.0)));
        assert_eq!(padded_range(vec![2.0, f64::NAN], 0.1), Some((1.5, 2.5)));
        assert_eq!(padded_range(vec![f64::NAN], 0.1), None);
    }
}
