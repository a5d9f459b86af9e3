//! Line figures: the RG flow of couplings and scaling dimensions, and
//! one-parameter scans of scaling dimensions with outcome bands.

use std::path::Path;

use plotters::coord::Shift;
use plotters::prelude::*;
use serde::{Deserialize, Serialize};

use super::layout::{self, Area, Axes, Chart, Dash, LegendEntry, REFERENCE};
use super::logaxis::to_axis;
use super::output::{self, msg, Figure, Surface};
use super::palette;
use super::PlotError;

/// Smallest plotted |y| relative to the largest one on the log axis.
const LOG_FLOOR: f64 = 1e-8;
/// Line width of ordinary terms and of the winning term.
const THIN: u32 = 2;
const THICK: u32 = 5;
/// The marginal scaling dimension in 1+1 dimensions.
const MARGINAL: f64 = 2.0;

/// One cosine term followed along the flow.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FlowSeries {
    /// Legend name of the term.
    pub name: String,
    /// Coupling y(ℓ), one value per entry of [`FlowFigure::ell`].
    pub coupling: Vec<f64>,
    /// Scaling dimension Δ(ℓ), one value per entry of [`FlowFigure::ell`].
    pub dimension: Vec<f64>,
}

/// Data of an RG-flow figure: |y| (log scale) and Δ against ℓ.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FlowFigure {
    /// Title above the panels.
    pub title: String,
    /// Flow parameter ℓ = ln(α/α₀) at each step.
    pub ell: Vec<f64>,
    /// The terms, each drawn in its own colour in both panels.
    pub series: Vec<FlowSeries>,
    /// Index into `series` of the term that wins (drawn thicker).
    pub winner: Option<usize>,
    /// Scale ℓ* at which the flow was stopped (dotted vertical line).
    pub ell_star: Option<f64>,
    /// Scales of the later stages of successive pinning (dashed vertical
    /// lines).
    #[serde(default)]
    pub stages: Vec<f64>,
    /// Text under the figure, e.g. the limits of the method.
    pub caption: String,
}

/// Scaling dimension of one term along a parameter scan.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DimensionSeries {
    /// Legend name of the term.
    pub name: String,
    /// Δ at each entry of [`LineScanFigure::xs`] (NaN where undefined).
    pub dimension: Vec<f64>,
}

/// A parameter interval shaded by outcome.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Band {
    /// Start of the interval.
    pub x0: f64,
    /// End of the interval.
    pub x1: f64,
    /// Outcome name (one legend entry per distinct label).
    pub label: String,
    /// Fill colour, drawn opaque behind the lines and the grid (choose a
    /// light one); bands with the same label share their first colour.
    pub colour: (u8, u8, u8),
}

/// Data of a one-parameter scan: every term's Δ against the parameter.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LineScanFigure {
    /// Title above the plot.
    pub title: String,
    /// Name of the scanned parameter (x-axis label).
    pub x_name: String,
    /// The x axis is logarithmic (parameter values positive).
    #[serde(default)]
    pub x_log: bool,
    /// Parameter values.
    pub xs: Vec<f64>,
    /// One line per term.
    pub series: Vec<DimensionSeries>,
    /// Shaded outcome intervals drawn behind the lines.
    pub bands: Vec<Band>,
    /// Text under the figure.
    pub caption: String,
}

/// Writes `<path_stem>.png` and `<path_stem>.svg` showing the flow: |y| on a
/// log axis (top) and Δ with the marginal line Δ = 2 (bottom) against ℓ.
///
/// Zero or tiny couplings are drawn at 10⁻⁸ of the largest |y|; non-finite
/// values are left out (the line is broken there).
pub fn flow_figure(path_stem: &Path, data: &FlowFigure) -> Result<(), PlotError> {
    check_flow(data).map_err(|m| PlotError::new(path_stem, m))?;
    output::write_figure(path_stem, data)
}

/// Writes `<path_stem>.png` and `<path_stem>.svg` showing every term's Δ
/// against the scanned parameter, the marginal line Δ = 2 and shaded bands.
pub fn dimension_line_figure(path_stem: &Path, data: &LineScanFigure) -> Result<(), PlotError> {
    check_scan(data).map_err(|m| PlotError::new(path_stem, m))?;
    output::write_figure(path_stem, data)
}

fn check_flow(data: &FlowFigure) -> Result<(), String> {
    let n = data.ell.len();
    if n == 0 || data.series.is_empty() {
        return Err("flow figure needs at least one ℓ value and one series".into());
    }
    for s in &data.series {
        if s.coupling.len() != n || s.dimension.len() != n {
            return Err(format!(
                "series '{}' has {} couplings and {} dimensions for {} ℓ values",
                s.name,
                s.coupling.len(),
                s.dimension.len(),
                n
            ));
        }
    }
    match data.winner {
        Some(w) if w >= data.series.len() => Err(format!(
            "winner index {w} but only {} series",
            data.series.len()
        )),
        _ => Ok(()),
    }
}

fn check_scan(data: &LineScanFigure) -> Result<(), String> {
    let n = data.xs.len();
    if n == 0 {
        return Err("scan figure needs at least one parameter value".into());
    }
    if data.x_log && data.xs.iter().any(|x| *x <= 0.0) {
        return Err("a logarithmic x axis needs positive parameter values".into());
    }
    if let Some(s) = data.series.iter().find(|s| s.dimension.len() != n) {
        return Err(format!(
            "series '{}' has {} values for {} parameter values",
            s.name,
            s.dimension.len(),
            n
        ));
    }
    if data
        .bands
        .iter()
        .any(|b| !b.x0.is_finite() || !b.x1.is_finite())
    {
        return Err("band limits must be finite".into());
    }
    Ok(())
}

/// Range of ℓ (or of the scanned parameter) shown.
fn x_range(xs: &[f64]) -> (f64, f64) {
    layout::padded_range(xs.iter().copied(), 0.0).unwrap_or((0.0, 1.0))
}

/// Δ range, always including the marginal value.
fn dimension_range<'a>(columns: impl Iterator<Item = &'a [f64]>) -> (f64, f64) {
    let values = columns.flatten().copied().chain(std::iter::once(MARGINAL));
    layout::padded_range(values, 0.06).unwrap_or((1.0, 3.0))
}

/// log10 of |y| clipped below at `LOG_FLOOR` times the largest |y|, plus
/// the floor's log10. Non-finite couplings stay NaN.
fn log_couplings(series: &[FlowSeries]) -> (Vec<Vec<f64>>, f64) {
    let max = series
        .iter()
        .flat_map(|s| s.coupling.iter())
        .filter(|v| v.is_finite())
        .fold(0.0f64, |m, v| m.max(v.abs()));
    let reference = if max > 0.0 { max } else { 1.0 };
    let floor = reference * LOG_FLOOR;
    let logs = series
        .iter()
        .map(|s| {
            s.coupling
                .iter()
                .map(|v| match v.is_finite() {
                    true => v.abs().max(floor).log10(),
                    false => f64::NAN,
                })
                .collect()
        })
        .collect();
    (logs, floor.log10())
}

/// Whole decades enclosing the log values, at least one decade wide.
fn decade_range(logs: &[Vec<f64>], floor: f64) -> (f64, f64) {
    let (lo, hi) = layout::padded_range(logs.iter().flatten().copied(), 0.0)
        .map(|(l, h)| (l.floor(), h.ceil()))
        .unwrap_or((floor, floor + 1.0));
    (lo, hi.max(lo + 1.0))
}

/// Colour of the `i`-th term.
fn series_colour(i: usize) -> RGBColor {
    palette::categorical(i)
}

/// Dash of the `i`-th term: solid for the first eight, then a new dash
/// pattern each time the palette starts over, so no two terms look alike.
fn series_dash(i: usize) -> Dash {
    const CYCLE: [Dash; 4] = [Dash::Solid, Dash::Dashed, Dash::Long, Dash::Dotted];
    CYCLE[(i / palette::CATEGORICAL.len()) % CYCLE.len()]
}

impl FlowFigure {
    fn colour(&self, i: usize) -> RGBColor {
        series_colour(i)
    }

    fn width(&self, i: usize) -> u32 {
        if self.winner == Some(i) {
            THICK
        } else {
            THIN
        }
    }

    /// Indices in drawing order: the winner last so it lies on top.
    fn order(&self) -> Vec<usize> {
        let mut idx: Vec<usize> = (0..self.series.len())
            .filter(|&i| self.winner != Some(i))
            .collect();
        idx.extend(self.winner);
        idx
    }

    fn legend(&self) -> Vec<LegendEntry> {
        let mut entries: Vec<LegendEntry> = self
            .series
            .iter()
            .enumerate()
            .map(|(i, s)| {
                let label = match self.winner == Some(i) {
                    true => format!("{} (winner)", s.name),
                    false => s.name.clone(),
                };
                LegendEntry::line(label, self.colour(i), self.width(i), series_dash(i))
            })
            .collect();
        entries.push(marginal_entry());
        if let Some(l) = self.ell_star.filter(|l| l.is_finite()) {
            let label = format!("ℓ* = {}", layout::format_number(l));
            entries.push(LegendEntry::line(label, REFERENCE, 2, Dash::Dotted));
        }
        for (i, l) in self
            .stages
            .iter()
            .enumerate()
            .filter(|(_, l)| l.is_finite())
        {
            let label = format!("stage {}: ℓ = {}", i + 2, layout::format_number(*l));
            entries.push(LegendEntry::line(label, REFERENCE, 1, Dash::Dashed));
        }
        entries
    }

    fn draw_couplings<DB: DrawingBackend>(
        &self,
        area: &DrawingArea<DB, Shift>,
    ) -> Result<(), String> {
        let (logs, floor) = log_couplings(&self.series);
        let y = decade_range(&logs, floor);
        let pad = 0.03 * (y.1 - y.0);
        let ylim = (y.0 - pad, y.1 + pad);
        let mut chart = layout::chart_scaled(area, x_range(&self.ell), ylim, (false, true))?;
        let format = |v: &f64| layout::power_of_ten(*v);
        let decades = (y.1 - y.0).round() as usize;
        // One label per decade while they fit (about 30 px each): more
        // decades are thinned to every k-th (see `logaxis`).
        let (_, h) = area.dim_in_pixel();
        // On paper the two panels share the ℓ axis title (drawn below).
        let paper = super::style::figure_style() == super::style::FigureStyle::Paper;
        let axes = Axes {
            x_desc: if paper { "" } else { ELL_LABEL },
            y_desc: "|y|",
            y_labels: (decades + 1).min(10).min(h as usize / 30).max(2),
            y_format: Some(&format),
            grid: true,
        };
        layout::draw_mesh(&mut chart, &axes)?;
        for i in self.order() {
            let points = self.ell.iter().copied().zip(logs[i].iter().copied());
            self.draw_series(&mut chart, i, points)?;
        }
        self.draw_ell_star(&mut chart)
    }

    fn draw_dimensions<DB: DrawingBackend>(
        &self,
        area: &DrawingArea<DB, Shift>,
    ) -> Result<(), String> {
        let y = dimension_range(self.series.iter().map(|s| s.dimension.as_slice()));
        let x = x_range(&self.ell);
        let mut chart = layout::chart(area, x, y)?;
        layout::draw_mesh(&mut chart, &dimension_axes(ELL_LABEL))?;
        draw_marginal(&mut chart, x)?;
        for i in self.order() {
            let points = self.ell.iter().copied();
            let points = points.zip(self.series[i].dimension.iter().copied());
            self.draw_series(&mut chart, i, points)?;
        }
        self.draw_ell_star(&mut chart)
    }

    fn draw_series<DB: DrawingBackend>(
        &self,
        chart: &mut Chart<'_, DB>,
        i: usize,
        points: impl Iterator<Item = (f64, f64)>,
    ) -> Result<(), String> {
        for run in layout::finite_runs(points) {
            layout::draw_line(chart, &run, self.colour(i), self.width(i), series_dash(i))?;
        }
        Ok(())
    }

    fn draw_ell_star<DB: DrawingBackend>(&self, chart: &mut Chart<'_, DB>) -> Result<(), String> {
        let (x, y) = (chart.x_range(), chart.y_range());
        for &l in self
            .stages
            .iter()
            .filter(|l| l.is_finite() && x.contains(l))
        {
            let line = [(l, y.start), (l, y.end)];
            layout::draw_line(chart, &line, REFERENCE, 1, Dash::Dashed)?;
        }
        let Some(l) = self.ell_star.filter(|l| l.is_finite()) else {
            return Ok(());
        };
        if !x.contains(&l) {
            return Ok(());
        }
        let line = [(l, y.start), (l, y.end)];
        layout::draw_line(chart, &line, REFERENCE, 2, Dash::Dotted)
    }
}

/// Label of the flow-parameter axis.
const ELL_LABEL: &str = "ℓ = ln(α/α₀)";

fn dimension_axes(x_desc: &str) -> Axes<'_> {
    let paper = super::style::figure_style() == super::style::FigureStyle::Paper;
    Axes {
        x_desc,
        y_desc: if paper { "Δ" } else { "scaling dimension Δ" },
        y_labels: 8,
        y_format: None,
        grid: true,
    }
}

fn marginal_entry() -> LegendEntry {
    LegendEntry::line("Δ = 2 (marginal)", REFERENCE, 2, Dash::Dashed)
}

fn draw_marginal<DB: DrawingBackend>(
    chart: &mut Chart<'_, DB>,
    (x0, x1): (f64, f64),
) -> Result<(), String> {
    layout::draw_line(
        chart,
        &[(x0, MARGINAL), (x1, MARGINAL)],
        REFERENCE,
        2,
        Dash::Dashed,
    )
}

/// Splits the body into a plotting part and the legend (see
/// [`layout::split_legend`]).
fn with_legend<DB: DrawingBackend>(
    body: &DrawingArea<DB, Shift>,
    entries: &[LegendEntry],
) -> Result<(Area<DB>, Area<DB>, usize), String> {
    layout::split_legend(body, entries, 220)
}

impl Figure for FlowFigure {
    fn words(&self) -> (String, String) {
        (self.title.clone(), self.caption.clone())
    }

    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        _surface: &Surface,
    ) -> Result<(), String> {
        let body = layout::frame(root, &self.title, &self.caption)?;
        let entries = self.legend();
        let (plots, legend, columns) = with_legend(&body, &entries)?;
        let (_, h) = plots.dim_in_pixel();
        let (top, bottom) = plots.split_vertically(h as i32 / 2);
        self.draw_couplings(&top)?;
        self.draw_dimensions(&bottom)?;
        layout::draw_legend_grid(&legend, &entries, columns)
    }
}

/// Line width of the terms in a scan.
const SCAN_WIDTH: u32 = 3;
impl LineScanFigure {
    /// Distinct band labels in first-seen order, with their colour.
    fn band_kinds(&self) -> Vec<(&str, RGBColor)> {
        let mut kinds: Vec<(&str, RGBColor)> = Vec::new();
        for b in &self.bands {
            if !kinds.iter().any(|(l, _)| *l == b.label) {
                kinds.push((&b.label, rgb(b.colour)));
            }
        }
        kinds
    }

    fn legend(&self) -> Vec<LegendEntry> {
        let mut entries: Vec<LegendEntry> = self
            .series
            .iter()
            .enumerate()
            .map(|(i, s)| LegendEntry::line(&s.name, series_colour(i), SCAN_WIDTH, series_dash(i)))
            .collect();
        entries.push(marginal_entry());
        for (label, c) in self.band_kinds() {
            entries.push(LegendEntry::swatch(label, c, 1.0));
        }
        entries
    }

    fn draw_bands<DB: DrawingBackend>(&self, chart: &mut Chart<'_, DB>) -> Result<(), String> {
        let (x, y) = (chart.x_range(), chart.y_range());
        let kinds = self.band_kinds();
        for b in &self.bands {
            let (x0, x1) = (to_axis(b.x0, self.x_log), to_axis(b.x1, self.x_log));
            let (lo, hi) = (x0.min(x1).max(x.start), x0.max(x1).min(x.end));
            if lo.partial_cmp(&hi) != Some(std::cmp::Ordering::Less) {
                continue;
            }
            // The legend's colour of the label, so one label is one colour.
            let colour = kinds.iter().find(|(l, _)| *l == b.label).map(|k| k.1);
            let colour = colour.unwrap_or(rgb(b.colour));
            let rect = Rectangle::new([(lo, y.start), (hi, y.end)], colour.filled());
            chart.draw_series(std::iter::once(rect)).map_err(msg)?;
        }
        Ok(())
    }
}

impl Figure for LineScanFigure {
    fn words(&self) -> (String, String) {
        (self.title.clone(), self.caption.clone())
    }

    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        _surface: &Surface,
    ) -> Result<(), String> {
        let body = layout::frame(root, &self.title, &self.caption)?;
        let entries = self.legend();
        let (plot, legend, columns) = with_legend(&body, &entries)?;
        let xs: Vec<f64> = self.xs.iter().map(|&v| to_axis(v, self.x_log)).collect();
        let x = x_range(&xs);
        let y = dimension_range(self.series.iter().map(|s| s.dimension.as_slice()));
        let mut chart = layout::chart_scaled(&plot, x, y, (self.x_log, false))?;
        self.draw_bands(&mut chart)?;
        layout::draw_mesh(&mut chart, &dimension_axes(&self.x_name))?;
        draw_marginal(&mut chart, x)?;
        for (i, s) in self.series.iter().enumerate() {
            let points = xs.iter().copied().zip(s.dimension.iter().copied());
            for run in layout::finite_runs(points) {
                layout::draw_line(
                    &mut chart,
                    &run,
                    series_colour(i),
                    SCAN_WIDTH,
                    series_dash(i),
                )?;
            }
            if self.xs.len() <= MARKED_POINTS {
                // Few points (e.g. `dims --wires`): each one is a measurement.
                let points = xs.iter().copied().zip(s.dimension.iter().copied());
                let marks = points
                    .filter(|(x, y)| x.is_finite() && y.is_finite())
                    .map(|p| Circle::new(p, MARKER_RADIUS, series_colour(i).filled()));
                chart.draw_series(marks).map_err(msg)?;
            }
        }
        layout::draw_legend_grid(&legend, &entries, columns)
    }
}

fn rgb((r, g, b): (u8, u8, u8)) -> RGBColor {
    RGBColor(r, g, b)
}

/// A one-parameter figure with at most this many points marks each point.
const MARKED_POINTS: usize = 24;

/// Radius of a point marker in pixels.
const MARKER_RADIUS: i32 = 6;

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plot::testutil::{
        assert_deterministic, count_text, hex, read_outputs, sibling, svg_texts,
    };

    /// A flow with one relevant term, one irrelevant term, a zero term and
    /// a NaN in the middle of one series.
    fn sample_flow() -> FlowFigure {
        let ell: Vec<f64> = (0..=80).map(|i| f64::from(i) * 0.1).collect();
        let series = |name: &str, y0: f64, delta: f64| FlowSeries {
            name: name.into(),
            coupling: ell.iter().map(|l| y0 * ((2.0 - delta) * l).exp()).collect(),
            dimension: ell.iter().map(|l| delta + 0.01 * l).collect(),
        };
        let mut s = vec![
            series("tunnelling", 0.05, 1.5),
            series("pairing", 0.2, 2.6),
            series("umklapp", 0.0, 3.0),
        ];
        s[1].coupling[40] = f64::NAN;
        FlowFigure {
            title: "Two wires".into(),
            ell,
            series: s,
            winner: Some(0),
            ell_star: Some(5.99),
            stages: Vec::new(),
            caption: "Second order in y; valid while |y| ≪ 1.".into(),
        }
    }

    #[test]
    fn flow_figure_writes_png_and_svg_with_legend() {
        let dir = tempfile::tempdir().unwrap();
        let stem = dir.path().join("flow.k0.8");
        flow_figure(&stem, &sample_flow()).unwrap();
        let (_, svg) = read_outputs(&stem);
        for label in [
            "tunnelling (winner)",
            "pairing",
            "umklapp",
            "Δ = 2 (marginal)",
            "ℓ* = 5.99",
            "|y|",
            "scaling dimension Δ",
            "Two wires",
        ] {
            assert_eq!(count_text(&svg, label), 1, "legend/label '{label}'");
        }
        // Both panels carry the ℓ axis label.
        assert_eq!(count_text(&svg, "ℓ = ln(α/α₀)"), 2);
        // The winner is drawn thick in its colour, in both panels.
        let thick = format!("stroke=\"{}\" stroke-width=\"{THICK}\"", hex(palette::BLUE));
        assert!(svg.matches(&thick).count() >= 3, "winner not thick");
        let thin = format!(
            "stroke=\"{}\" stroke-width=\"{THIN}\"",
            hex(palette::VERMILLION)
        );
        assert!(svg.contains(&thin), "other terms not thin");
    }

    #[test]
    fn flow_log_axis_spans_whole_decades_and_clips_zero() {
        let dir = tempfile::tempdir().unwrap();
        let stem = dir.path().join("flow");
        flow_figure(&stem, &sample_flow()).unwrap();
        let (_, svg) = read_outputs(&stem);
        let texts = svg_texts(&svg);
        // Largest |y| is 0.05 e^4 ≈ 2.7, so the axis ends at 10¹; the zero
        // coupling sits at the floor 10⁻⁸ × 2.7 and the axis reaches 10⁻⁸.
        assert!(texts.iter().any(|t| t == "10¹"));
        assert!(texts.iter().any(|t| t == "10⁻⁸"));
        assert!(!texts.iter().any(|t| t == "10⁻⁹" || t == "10²"));
    }

    #[test]
    fn all_zero_negative_and_nan_couplings_do_not_fail() {
        let dir = tempfile::tempdir().unwrap();
        let mut data = sample_flow();
        data.series[0].coupling.iter_mut().for_each(|y| *y = 0.0);
        data.series[1]
            .coupling
            .iter_mut()
            .for_each(|y| *y = f64::NAN);
        data.series[2].coupling.iter_mut().for_each(|y| *y = 0.0);
        flow_figure(&dir.path().join("zero"), &data).unwrap();
        let (_, svg) = read_outputs(&dir.path().join("zero"));
        // Nothing positive: the axis shows the floor decade of a unit scale.
        assert!(svg_texts(&svg).iter().any(|t| t == "10⁻⁸"));

        data.series[0].coupling.iter_mut().for_each(|y| *y = -0.5);
        data.winner = None;
        data.ell_star = Some(f64::NAN);
        flow_figure(&dir.path().join("neg"), &data).unwrap();
        let (_, svg) = read_outputs(&dir.path().join("neg"));
        assert!(svg_texts(&svg).iter().any(|t| t == "10⁰"));
        assert_eq!(count_text(&svg, "tunnelling"), 1);
        assert!(!svg_texts(&svg).iter().any(|t| t.starts_with("ℓ* =")));
    }

    #[test]
    fn terms_beyond_the_palette_get_a_new_dash_pattern() {
        assert_eq!(series_dash(0), Dash::Solid);
        assert_eq!(series_dash(7), Dash::Solid);
        assert_eq!(series_dash(8), Dash::Dashed);
        // Colours no longer repeat either (src/plot/palette.rs).
        assert_ne!(series_colour(8), series_colour(0));
        let styles: Vec<(RGBColor, Dash)> = (0..32)
            .map(|i| (series_colour(i), series_dash(i)))
            .collect();
        for (i, a) in styles.iter().enumerate() {
            assert!(
                !styles[..i].contains(a),
                "term {i} looks like an earlier one"
            );
        }
    }

    #[test]
    fn overlong_title_caption_and_names_still_render() {
        let dir = tempfile::tempdir().unwrap();
        let mut data = sample_flow();
        data.title = "a very long title ".repeat(20);
        data.caption = "limits of the method ".repeat(200);
        data.series[0].name = "cos(2φ₁ − 2φ₂ + 2θ₃) ".repeat(10);
        flow_figure(&dir.path().join("long"), &data).unwrap();
        let (_, svg) = read_outputs(&dir.path().join("long"));
        let texts = svg_texts(&svg);
        assert!(texts
            .iter()
            .any(|t| t.starts_with("a very long title") && t.ends_with('…')));
        assert_eq!(
            texts.iter().filter(|t| t.starts_with("limits of")).count(),
            5
        );
    }

    #[test]
    fn flow_figure_is_deterministic() {
        let dir = tempfile::tempdir().unwrap();
        let data = sample_flow();
        assert_deterministic(dir.path(), |stem| flow_figure(stem, &data).unwrap());
    }

    #[test]
    fn inconsistent_flow_data_is_an_error_and_writes_nothing() {
        let dir = tempfile::tempdir().unwrap();
        let stem = dir.path().join("bad");
        let mut data = sample_flow();
        data.series[2].dimension.pop();
        let err = flow_figure(&stem, &data).unwrap_err();
        assert_eq!(err.path, stem);
        assert!(err.message.contains("umklapp"), "{}", err.message);

        let mut data = sample_flow();
        data.winner = Some(3);
        assert!(flow_figure(&stem, &data).is_err());
        let mut data = sample_flow();
        data.ell.clear();
        assert!(flow_figure(&stem, &data).is_err());
        assert!(!sibling(&stem, "png").exists() && !sibling(&stem, "svg").exists());
    }

    fn sample_scan() -> LineScanFigure {
        let xs: Vec<f64> = (0..=40).map(|i| 0.4 + f64::from(i) * 0.04).collect();
        LineScanFigure {
            title: "Dimensions against K".into(),
            x_name: "Luttinger parameter K".into(),
            series: vec![
                DimensionSeries {
                    name: "tunnelling".into(),
                    dimension: xs.iter().map(|k| 1.0 / k).collect(),
                },
                DimensionSeries {
                    name: "pairing".into(),
                    dimension: xs.iter().map(|k| 2.0 * k).collect(),
                },
            ],
            xs,
            x_log: false,
            bands: vec![
                Band {
                    x0: 0.4,
                    x1: 1.0,
                    label: "pairing relevant".into(),
                    colour: (250, 200, 170),
                },
                Band {
                    x0: 1.0,
                    x1: 1.5,
                    label: "tunnelling relevant".into(),
                    colour: (190, 215, 240),
                },
                Band {
                    x0: 1.9,
                    x1: 1.5, // reversed limits are accepted
                    label: "pairing relevant".into(),
                    colour: (250, 200, 170),
                },
                Band {
                    x0: 5.0,
                    x1: 6.0, // outside the scan: not drawn
                    label: "never seen".into(),
                    colour: (200, 235, 210),
                },
            ],
            caption: "Tree level.".into(),
        }
    }

    #[test]
    fn scan_figure_has_one_legend_entry_per_band_label() {
        let dir = tempfile::tempdir().unwrap();
        let stem = dir.path().join("scan");
        dimension_line_figure(&stem, &sample_scan()).unwrap();
        let (_, svg) = read_outputs(&stem);
        for label in [
            "tunnelling",
            "pairing",
            "Δ = 2 (marginal)",
            "pairing relevant",
            "tunnelling relevant",
            "never seen",
            "Luttinger parameter K",
        ] {
            assert_eq!(count_text(&svg, label), 1, "label '{label}'");
        }
        // Three bands inside the range plus three legend swatches; the band
        // outside the range is skipped.
        let fills = |c| svg.matches(&format!("fill=\"{}\"", hex(c))).count();
        assert_eq!(
            fills(RGBColor(250, 200, 170)),
            3,
            "pairing: two bands, one swatch"
        );
        assert_eq!(fills(RGBColor(190, 215, 240)), 2);
        assert_eq!(fills(RGBColor(200, 235, 210)), 1, "only the legend swatch");
    }

    #[test]
    fn scan_figure_is_deterministic_and_validates() {
        let dir = tempfile::tempdir().unwrap();
        let data = sample_scan();
        assert_deterministic(dir.path(), |s| dimension_line_figure(s, &data).unwrap());

        let mut bad = sample_scan();
        bad.series[0].dimension.truncate(3);
        assert!(dimension_line_figure(&dir.path().join("bad"), &bad).is_err());
        let mut bad = sample_scan();
        bad.bands[0].x1 = f64::INFINITY;
        assert!(dimension_line_figure(&dir.path().join("bad"), &bad).is_err());
    }
}
