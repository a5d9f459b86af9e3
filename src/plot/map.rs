//! Maps over two parameters: categorical phase diagrams with contour
//! lines, and heat maps of a continuous value with a colour bar.
//!
//! Cells: each grid point fills the cell between the midpoints to its
//! neighbours. Runs of equal colour along a row are one rectangle. In the
//! SVG, a map whose runs number more than [`MAX_SVG_RECTS`] (a large grid
//! of a continuous value, where neighbouring cells rarely share a colour)
//! is instead one embedded image of exactly the pixels the PNG shows there.
//! That keeps the figure faithful: the SVG backend places every rectangle
//! on whole pixels of the same 1200×900 page as the PNG, so a vector map
//! could show nothing finer than those pixels, at tens of bytes per cell
//! (56 MB for 10^6 cells). Quantising the colours to the colour bar's
//! steps was not chosen because the PNG colours cells continuously, and
//! the two files should show the same picture. Axes, frame, contour lines
//! and legend stay vectors on top.

use std::path::Path;

use plotters::coord::Shift;
use plotters::prelude::*;
use serde::{Deserialize, Serialize};

pub use super::contour::{contour_lines, ContourTracer};
use super::font::{self, size};
use super::layout::{self, Axes, Chart, Dash, LegendEntry, INK};
use super::logaxis::to_axis;
use super::output::{self, msg, Figure, Raster, Surface, MARKER};
use super::palette;
use super::PlotError;

/// A labelled set of polylines drawn on top of a phase diagram.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Contour {
    /// Legend label, e.g. "Δ_tunnel = 2".
    pub label: String,
    /// Polylines in data coordinates (e.g. from [`contour_lines`]).
    pub points: Vec<Vec<(f64, f64)>>,
}

/// A phase diagram: one category per grid point.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PhaseMap {
    /// Title above the map.
    pub title: String,
    /// Name of the horizontal parameter.
    pub x_name: String,
    /// Name of the vertical parameter.
    pub y_name: String,
    /// The x axis is logarithmic (grid points positive).
    #[serde(default)]
    pub x_log: bool,
    /// The y axis is logarithmic (grid points positive).
    #[serde(default)]
    pub y_log: bool,
    /// Grid points along x (strictly increasing).
    pub xs: Vec<f64>,
    /// Grid points along y (strictly increasing).
    pub ys: Vec<f64>,
    /// Category index per grid point, row-major: `cells[iy * xs.len() + ix]`.
    pub cells: Vec<u32>,
    /// Legend label of each category.
    pub categories: Vec<String>,
    /// Fill colour per category; default: lightened Okabe–Ito colours.
    pub category_colours: Option<Vec<(u8, u8, u8)>>,
    /// Lines drawn on top of the cells, each with its own legend entry.
    pub lines: Vec<Contour>,
    /// Text under the figure.
    pub caption: String,
}

/// A heat map of a continuous value over two parameters.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct HeatMap {
    /// Title above the map.
    pub title: String,
    /// Name of the horizontal parameter.
    pub x_name: String,
    /// Name of the vertical parameter.
    pub y_name: String,
    /// The x axis is logarithmic (grid points positive).
    #[serde(default)]
    pub x_log: bool,
    /// The y axis is logarithmic (grid points positive).
    #[serde(default)]
    pub y_log: bool,
    /// Grid points along x (strictly increasing).
    pub xs: Vec<f64>,
    /// Grid points along y (strictly increasing).
    pub ys: Vec<f64>,
    /// Value per grid point, row-major; a non-finite value (no value: NaN)
    /// is drawn grey.
    pub values: Vec<f64>,
    /// Label of the colour bar, e.g. "ℓ* (gap ~ e^-ℓ*)".
    pub value_label: String,
    /// Text under the figure.
    pub caption: String,
}

/// Writes `<path_stem>.png` and `<path_stem>.svg`: filled cells centred on
/// the grid points, coloured by category, with the contour lines on top and
/// the legend in a column to the right of the plot.
pub fn phase_diagram(path_stem: &Path, data: &PhaseMap) -> Result<(), PlotError> {
    check_phase(data).map_err(|m| PlotError::new(path_stem, m))?;
    output::write_figure(path_stem, data)
}

/// Writes `<path_stem>.png` and `<path_stem>.svg`: cells coloured with
/// viridis, a colour bar with ticks, and missing values in grey.
pub fn heat_map(path_stem: &Path, data: &HeatMap) -> Result<(), PlotError> {
    check_heat(path_stem, data)?;
    output::write_figure(path_stem, data)
}

/// [`phase_diagram`] and [`heat_map`] at once (their formats drawn as
/// tasks shared by the pool's threads): the same files.
pub fn phase_diagram_and_heat_map(
    phase: (&Path, &PhaseMap),
    heat: (&Path, &HeatMap),
) -> Result<(), PlotError> {
    check_phase(phase.1).map_err(|m| PlotError::new(phase.0, m))?;
    check_heat(heat.0, heat.1)?;
    super::pair::write_pair(phase, heat)
}

fn check_heat(path_stem: &Path, data: &HeatMap) -> Result<(), PlotError> {
    check_grid(
        &data.xs,
        &data.ys,
        data.values.len(),
        (data.x_log, data.y_log),
    )
    .map_err(|m| PlotError::new(path_stem, m))
}

fn check_grid(xs: &[f64], ys: &[f64], cells: usize, log: (bool, bool)) -> Result<(), String> {
    for (axis, v, log) in [("x", xs, log.0), ("y", ys, log.1)] {
        if v.is_empty() {
            return Err(format!("no {axis} grid points"));
        }
        if log && v.iter().any(|t| *t <= 0.0) {
            return Err(format!(
                "a logarithmic {axis} axis needs positive grid points"
            ));
        }
        if v.iter().any(|t| !t.is_finite()) || v.windows(2).any(|w| w[1] <= w[0]) {
            return Err(format!(
                "{axis} grid must be finite and strictly increasing"
            ));
        }
    }
    if cells != xs.len() * ys.len() {
        return Err(format!(
            "{} cells for a {}×{} grid",
            cells,
            xs.len(),
            ys.len()
        ));
    }
    Ok(())
}

fn check_phase(data: &PhaseMap) -> Result<(), String> {
    check_grid(
        &data.xs,
        &data.ys,
        data.cells.len(),
        (data.x_log, data.y_log),
    )?;
    let n = data.categories.len();
    if let Some(c) = data.cells.iter().find(|&&c| c as usize >= n) {
        return Err(format!("category index {c} but only {n} categories"));
    }
    match &data.category_colours {
        Some(colours) if colours.len() < n => Err(format!(
            "{} category colours for {n} categories",
            colours.len()
        )),
        _ => Ok(()),
    }
}

/// Cell boundaries: midpoints between grid points, half a step beyond the
/// ends (a single point gets a unit-wide cell).
fn cell_edges(v: &[f64]) -> Vec<f64> {
    if v.len() == 1 {
        return vec![v[0] - 0.5, v[0] + 0.5];
    }
    let n = v.len();
    let mut edges = Vec::with_capacity(n + 1);
    edges.push(v[0] - 0.5 * (v[1] - v[0]));
    edges.extend(v.windows(2).map(|w| 0.5 * (w[0] + w[1])));
    edges.push(v[n - 1] + 0.5 * (v[n - 1] - v[n - 2]));
    edges
}

/// Largest number of rectangles the cells of a map take in an SVG; a map
/// with more runs is embedded as one image.
pub const MAX_SVG_RECTS: usize = 10_000;

/// A horizontal run of cells `start..end` of row `iy` with one colour.
struct Run {
    iy: usize,
    start: usize,
    end: usize,
    colour: RGBColor,
}

/// The runs of equal colour of one row of cells, left to right.
fn row_runs(iy: usize, nx: usize, colour_of: &dyn Fn(usize) -> RGBColor) -> Vec<Run> {
    let mut runs = Vec::new();
    let mut start = 0;
    while start < nx {
        let colour = colour_of(iy * nx + start);
        let mut end = start + 1;
        while end < nx && colour_of(iy * nx + end) == colour {
            end += 1;
        }
        runs.push(Run {
            iy,
            start,
            end,
            colour,
        });
        start = end;
    }
    runs
}

/// All runs, row by row (one row is held at a time).
fn runs<'a>(
    nx: usize,
    ny: usize,
    colour_of: &'a dyn Fn(usize) -> RGBColor,
) -> impl Iterator<Item = Run> + 'a {
    (0..ny).flat_map(move |iy| row_runs(iy, nx, colour_of))
}

/// Fills the grid cells, merging horizontal runs of equal colour into one
/// rectangle; on the SVG surface, one image when there are more runs than
/// [`MAX_SVG_RECTS`].
fn draw_cells<DB: DrawingBackend>(
    chart: &mut Chart<'_, DB>,
    (xs, ys): (&[f64], &[f64]),
    colour_of: &dyn Fn(usize) -> RGBColor,
    surface: &Surface,
) -> Result<(), String> {
    let (ex, ey) = (cell_edges(xs), cell_edges(ys));
    let (nx, ny) = (xs.len(), ys.len());
    if let Surface::Svg(_) = surface {
        if runs(nx, ny, colour_of).nth(MAX_SVG_RECTS).is_some() {
            return draw_raster(chart, (&ex, &ey), colour_of, surface);
        }
    }
    let rects = runs(nx, ny, colour_of).map(|r| {
        let corners = [(ex[r.start], ey[r.iy]), (ex[r.end], ey[r.iy + 1])];
        Rectangle::new(corners, r.colour.filled())
    });
    chart.draw_series(rects).map_err(msg).map(|_| ())
}

/// The cells as one raster: every run is filled into a page-sized bitmap
/// exactly as the PNG backend fills it, the box the grid covers is cut out
/// and handed to the surface, and a marker rectangle keeps its place among
/// the SVG elements.
fn draw_raster<DB: DrawingBackend>(
    chart: &mut Chart<'_, DB>,
    (ex, ey): (&[f64], &[f64]),
    colour_of: &dyn Fn(usize) -> RGBColor,
    surface: &Surface,
) -> Result<(), String> {
    let (nx, ny) = (ex.len() - 1, ey.len() - 1);
    let pixels = |a: (f64, f64), b: (f64, f64)| {
        let (p, q) = (chart.backend_coord(&a), chart.backend_coord(&b));
        ((p.0.min(q.0), p.1.min(q.1)), (p.0.max(q.0), p.1.max(q.1)))
    };
    let size = super::style::canvas();
    let mut page = vec![255u8; (size.0 * size.1 * 3) as usize];
    {
        let mut bitmap = BitMapBackend::with_buffer(&mut page, size);
        for r in runs(nx, ny, colour_of) {
            let (ul, br) = pixels((ex[r.start], ey[r.iy]), (ex[r.end], ey[r.iy + 1]));
            bitmap
                .draw_rect(ul, br, &r.colour.filled(), true)
                .map_err(msg)?;
        }
    }
    let whole = ((ex[0], ey[0]), (ex[nx], ey[ny]));
    let (ul, br) = pixels(whole.0, whole.1);
    if let Some(raster) = crop(&page, ul, br) {
        surface.embed(raster);
        let marker = Rectangle::new([whole.0, whole.1], MARKER.filled());
        chart.draw_series(std::iter::once(marker)).map_err(msg)?;
    }
    Ok(())
}

/// The pixels `ul..br` (end exclusive, clipped to the page) of an RGB page.
fn crop(page: &[u8], ul: (i32, i32), br: (i32, i32)) -> Option<Raster> {
    let size = super::style::canvas();
    let clip = |v: i32, max: u32| v.clamp(0, max as i32) as usize;
    let (x0, x1) = (clip(ul.0, size.0), clip(br.0, size.0));
    let (y0, y1) = (clip(ul.1, size.1), clip(br.1, size.1));
    if x0 >= x1 || y0 >= y1 {
        return None;
    }
    let row = size.0 as usize * 3;
    let rgb = (y0..y1)
        .flat_map(|y| &page[y * row + x0 * 3..y * row + x1 * 3])
        .copied()
        .collect();
    Some(Raster {
        x: x0 as i32,
        y: y0 as i32,
        width: (x1 - x0) as u32,
        height: (y1 - y0) as u32,
        rgb,
    })
}

/// Chart spanning the cells, with axes and labels but no grid lines
/// (the cells would hide them). `xs`, `ys` are as placed on the axes
/// ([`placed`]).
fn map_chart<'a, DB: DrawingBackend>(
    area: &'a DrawingArea<DB, Shift>,
    xs: &[f64],
    ys: &[f64],
    log: (bool, bool),
) -> Result<Chart<'a, DB>, String> {
    let (ex, ey) = (cell_edges(xs), cell_edges(ys));
    layout::chart_scaled(area, (ex[0], ex[xs.len()]), (ey[0], ey[ys.len()]), log)
}

/// Grid points as placed on an axis: log10 on a logarithmic axis, so a
/// log-spaced grid gets cells of equal width bounded at geometric means.
fn placed(v: &[f64], log: bool) -> Vec<f64> {
    v.iter().map(|&t| to_axis(t, log)).collect()
}

fn draw_map_axes<DB: DrawingBackend>(
    chart: &mut Chart<'_, DB>,
    x_name: &str,
    y_name: &str,
) -> Result<(), String> {
    let axes = Axes {
        x_desc: x_name,
        y_desc: y_name,
        y_labels: 8,
        y_format: None,
        grid: false,
    };
    layout::draw_mesh(chart, &axes)?;
    // A frame around the plotting area, above the cells.
    let (x, y) = (chart.x_range(), chart.y_range());
    let frame = [
        (x.start, y.start),
        (x.end, y.start),
        (x.end, y.end),
        (x.start, y.end),
        (x.start, y.start),
    ];
    layout::draw_line(chart, &frame, INK, 1, Dash::Solid)
}

/// Line colours and dash patterns of successive contours.
const CONTOUR_STYLES: [(RGBColor, Dash); 4] = [
    (RGBColor(0, 0, 0), Dash::Solid),
    (RGBColor(0, 60, 130), Dash::Dashed),
    (RGBColor(140, 40, 0), Dash::Long),
    (RGBColor(60, 60, 60), Dash::Dotted),
];
const CONTOUR_WIDTH: u32 = 3;

fn contour_style(i: usize) -> (RGBColor, Dash) {
    CONTOUR_STYLES[i % CONTOUR_STYLES.len()]
}

impl PhaseMap {
    fn colour(&self, category: usize) -> RGBColor {
        match &self.category_colours {
            Some(c) => RGBColor(c[category].0, c[category].1, c[category].2),
            None => palette::lighten(palette::categorical(category), 0.35),
        }
    }

    fn legend(&self) -> Vec<LegendEntry> {
        let mut entries: Vec<LegendEntry> = self
            .categories
            .iter()
            .enumerate()
            .map(|(i, name)| LegendEntry::swatch(name, self.colour(i), 1.0))
            .collect();
        for (i, c) in self.lines.iter().enumerate() {
            let (colour, dash) = contour_style(i);
            entries.push(LegendEntry::line(&c.label, colour, CONTOUR_WIDTH, dash));
        }
        entries
    }
}

impl Figure for PhaseMap {
    fn words(&self) -> (String, String) {
        (self.title.clone(), self.caption.clone())
    }

    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        surface: &Surface,
    ) -> Result<(), String> {
        let body = layout::frame(root, &self.title, &self.caption)?;
        let entries = self.legend();
        let (plot, legend, columns) = layout::split_legend(&body, &entries, 240)?;
        let log = (self.x_log, self.y_log);
        let (xs, ys) = (placed(&self.xs, log.0), placed(&self.ys, log.1));
        let mut chart = map_chart(&plot, &xs, &ys, log)?;
        let colour_of = |k: usize| self.colour(self.cells[k] as usize);
        draw_cells(&mut chart, (&xs, &ys), &colour_of, surface)?;
        draw_map_axes(&mut chart, &self.x_name, &self.y_name)?;
        for (i, contour) in self.lines.iter().enumerate() {
            let (colour, dash) = contour_style(i);
            for line in &contour.points {
                let line = line
                    .iter()
                    .map(|&(x, y)| (to_axis(x, log.0), to_axis(y, log.1)));
                for run in layout::finite_runs(line) {
                    layout::draw_line(&mut chart, &run, colour, CONTOUR_WIDTH, dash)?;
                }
            }
        }
        layout::draw_legend_grid(&legend, &entries, columns)
    }
}

/// Width of the colour-bar column of a heat map (narrower on paper).
fn colour_bar_column() -> i32 {
    match super::style::figure_style() {
        super::style::FigureStyle::Screen => 230,
        super::style::FigureStyle::Paper => 160,
    }
}
/// Number of colour steps in the colour bar.
const COLOUR_BAR_STEPS: usize = 128;

impl HeatMap {
    /// Finite value at cell `k`.
    fn value(&self, k: usize) -> Option<f64> {
        Some(self.values[k]).filter(|v| v.is_finite())
    }

    /// Value range mapped onto viridis.
    fn range(&self) -> (f64, f64) {
        let finite = (0..self.values.len()).filter_map(|k| self.value(k));
        layout::padded_range(finite, 0.0).unwrap_or((0.0, 1.0))
    }

    fn colour(&self, k: usize, (lo, hi): (f64, f64)) -> RGBColor {
        match self.value(k) {
            Some(v) => palette::viridis((v - lo) / (hi - lo)),
            None => palette::MISSING,
        }
    }

    fn draw_colour_bar<DB: DrawingBackend>(
        &self,
        area: &DrawingArea<DB, Shift>,
        (lo, hi): (f64, f64),
    ) -> Result<(), String> {
        let paper = super::style::figure_style() == super::style::FigureStyle::Paper;
        let mut bar = ChartBuilder::on(area)
            .margin(if paper { 8 } else { 12 })
            .margin_left(if paper { 10 } else { 20 })
            .x_label_area_size(if paper { 74 } else { 64 })
            .right_y_label_area_size(if paper { 100 } else { 110 })
            .build_cartesian_2d(0.0..1.0, lo..hi)
            .map_err(msg)?;
        let step = (hi - lo) / COLOUR_BAR_STEPS as f64;
        let rects = (0..COLOUR_BAR_STEPS).map(|i| {
            let y0 = lo + step * i as f64;
            let colour = palette::viridis((i as f64 + 0.5) / COLOUR_BAR_STEPS as f64);
            Rectangle::new([(0.0, y0), (1.0, y0 + step)], colour.filled())
        });
        bar.draw_series(rects).map_err(msg)?;
        let border = Rectangle::new([(0.0, lo), (1.0, hi)], INK.stroke_width(1));
        bar.draw_series(std::iter::once(border)).map_err(msg)?;
        let format = |v: &f64| layout::format_number(*v);
        bar.configure_mesh()
            .disable_x_mesh()
            .disable_y_mesh()
            .disable_x_axis()
            .y_labels(8)
            .y_label_formatter(&format)
            .y_desc(self.value_label.as_str())
            .label_style(font::style(size::TICK, INK))
            .axis_desc_style(font::style(size::AXIS, INK))
            .axis_style(INK.stroke_width(1))
            .draw()
            .map_err(msg)
    }

    /// Grey "no value" key at the foot of the colour-bar column.
    fn draw_missing_key<DB: DrawingBackend>(
        &self,
        column: &DrawingArea<DB, Shift>,
    ) -> Result<(), String> {
        let (_, h) = column.dim_in_pixel();
        let entry = [LegendEntry::swatch("no value", palette::MISSING, 1.0)];
        layout::draw_legend(column, &entry, h as i32 - 52).map(|_| ())
    }
}

impl Figure for HeatMap {
    fn words(&self) -> (String, String) {
        (self.title.clone(), self.caption.clone())
    }

    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        surface: &Surface,
    ) -> Result<(), String> {
        let body = layout::frame(root, &self.title, &self.caption)?;
        let (w, _) = body.dim_in_pixel();
        let (plot, column) = body.split_horizontally(w as i32 - colour_bar_column());
        let range = self.range();
        let log = (self.x_log, self.y_log);
        let (xs, ys) = (placed(&self.xs, log.0), placed(&self.ys, log.1));
        let mut chart = map_chart(&plot, &xs, &ys, log)?;
        let colour_of = |k: usize| self.colour(k, range);
        draw_cells(&mut chart, (&xs, &ys), &colour_of, surface)?;
        draw_map_axes(&mut chart, &self.x_name, &self.y_name)?;
        self.draw_colour_bar(&column, range)?;
        if (0..self.values.len()).any(|k| self.value(k).is_none()) {
            self.draw_missing_key(&column)?;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plot::testutil::{assert_deterministic, count_text, hex, read_outputs, sibling};

    fn grid(n: usize, a: f64, b: f64) -> Vec<f64> {
        (0..n)
            .map(|i| a + (b - a) * i as f64 / (n - 1) as f64)
            .collect()
    }

    /// Disc of category 0 in a background of 1, an unphysical strip (2) on
    /// top, and the disc's boundary as a contour.
    fn sample_phase() -> PhaseMap {
        let (xs, ys) = (grid(30, -1.0, 1.0), grid(20, 0.0, 2.0));
        let mut cells = Vec::new();
        let mut field = Vec::new();
        for &y in &ys {
            for &x in &xs {
                let r2 = x * x + (y - 1.0) * (y - 1.0);
                field.push(r2);
                cells.push(if y > 1.8 {
                    2
                } else if r2 < 0.25 {
                    0
                } else {
                    1
                });
            }
        }
        let lines = vec![
            Contour {
                label: "Δ_tunnel = 2".into(),
                points: contour_lines(&xs, &ys, &field, 0.25),
            },
            Contour {
                label: "Δ_pair = 2".into(),
                points: contour_lines(&xs, &ys, &field, 0.5),
            },
        ];
        PhaseMap {
            title: "Phases".into(),
            x_name: "g / v".into(),
            y_name: "K".into(),
            x_log: false,
            y_log: false,
            xs,
            ys,
            cells,
            categories: vec![
                "tunnel wins".into(),
                "gapless".into(),
                "unphysical (V not positive definite)".into(),
                "undecided".into(),
            ],
            category_colours: None,
            lines,
            caption: "Outcome at each grid point.".into(),
        }
    }

    #[test]
    fn cell_edges_are_midpoints_extended_by_half_a_step() {
        assert_eq!(cell_edges(&[0.0, 1.0, 3.0]), vec![-0.5, 0.5, 2.0, 4.0]);
        assert_eq!(cell_edges(&[2.0]), vec![1.5, 2.5]);
    }

    #[test]
    fn phase_diagram_writes_files_with_full_legend() {
        let dir = tempfile::tempdir().unwrap();
        let stem = dir.path().join("phase");
        phase_diagram(&stem, &sample_phase()).unwrap();
        let (_, svg) = read_outputs(&stem);
        for label in [
            "tunnel wins",
            "gapless",
            "unphysical (V not positive definite)",
            "undecided",
            "Δ_tunnel = 2",
            "Δ_pair = 2",
            "g / v",
            "K",
            "Phases",
        ] {
            assert_eq!(count_text(&svg, label), 1, "label '{label}'");
        }
        // Contours: solid black and dashed dark blue, each also in the legend.
        let (c0, _) = contour_style(0);
        let (c1, _) = contour_style(1);
        assert!(svg.contains(&format!("stroke=\"{}\" stroke-width=\"3\"", hex(c0))));
        assert!(
            svg.matches(&format!("stroke=\"{}\" stroke-width=\"3\"", hex(c1)))
                .count()
                > 10
        );
    }

    #[test]
    fn equal_neighbouring_cells_merge_into_one_rectangle_per_row() {
        let dir = tempfile::tempdir().unwrap();
        let stem = dir.path().join("uniform");
        let mut data = sample_phase();
        data.cells.iter_mut().for_each(|c| *c = 1);
        data.category_colours = Some(vec![(10, 20, 30), (200, 100, 50), (1, 2, 3), (4, 5, 6)]);
        phase_diagram(&stem, &data).unwrap();
        let (_, svg) = read_outputs(&stem);
        let fill = format!("fill=\"{}\"", hex(RGBColor(200, 100, 50)));
        // 20 rows plus the legend swatch.
        assert_eq!(svg.matches(&fill).count(), 21);
    }

    #[test]
    fn a_phase_map_of_many_runs_is_one_image_under_vector_lines() {
        let dir = tempfile::tempdir().unwrap();
        let stem = dir.path().join("stripes");
        let mut data = sample_phase();
        let (nx, ny) = (150, 80);
        data.xs = grid(nx, -1.0, 1.0);
        data.ys = grid(ny, 0.0, 2.0);
        // Alternating columns: one run per cell, 12 000 runs.
        data.cells = (0..nx * ny).map(|k| (k % nx % 2) as u32).collect();
        assert!(data.cells.len() > MAX_SVG_RECTS);
        phase_diagram(&stem, &data).unwrap();
        let (_, svg) = read_outputs(&stem);
        assert_eq!(svg.matches("<image").count(), 1);
        assert!(svg.matches("<rect").count() < 50, "legend swatches only");
        let image = svg.find("<image").unwrap();
        let first_line = svg.find("<polyline").unwrap();
        assert!(image < first_line, "the contour lines are drawn on top");
        assert_eq!(count_text(&svg, "Δ_tunnel = 2"), 1);
        assert_deterministic(dir.path(), |s| phase_diagram(s, &data).unwrap());
    }

    #[test]
    fn phase_diagram_is_deterministic() {
        let dir = tempfile::tempdir().unwrap();
        let data = sample_phase();
        assert_deterministic(dir.path(), |s| phase_diagram(s, &data).unwrap());
    }

    #[test]
    fn invalid_phase_maps_are_errors_and_write_nothing() {
        let dir = tempfile::tempdir().unwrap();
        let stem = dir.path().join("bad");
        let mut bad = sample_phase();
        bad.cells[7] = 4;
        let err = phase_diagram(&stem, &bad).unwrap_err();
        assert!(err.message.contains("category index 4"), "{}", err.message);
        let mut bad = sample_phase();
        bad.cells.pop();
        assert!(phase_diagram(&stem, &bad).is_err());
        let mut bad = sample_phase();
        bad.xs.swap(3, 4);
        assert!(phase_diagram(&stem, &bad).is_err());
        let mut bad = sample_phase();
        bad.category_colours = Some(vec![(0, 0, 0)]);
        assert!(phase_diagram(&stem, &bad).is_err());
        assert!(!sibling(&stem, "png").exists() && !sibling(&stem, "svg").exists());
    }

    #[test]
    fn the_pair_writes_the_bytes_each_figure_writes_alone() {
        // Both styles: the paper style also writes the .txt files.
        for look in [
            crate::plot::FigureStyle::Screen,
            crate::plot::FigureStyle::Paper,
        ] {
            crate::plot::styled(look, || {
                let dir = tempfile::tempdir().unwrap();
                let (phase, heat) = (sample_phase(), sample_heat(true));
                let alone = dir.path().join("alone");
                let pair = dir.path().join("pair");
                phase_diagram(&alone.join("phase"), &phase).unwrap();
                heat_map(&alone.join("heat"), &heat).unwrap();
                phase_diagram_and_heat_map(
                    (&pair.join("phase"), &phase),
                    (&pair.join("heat"), &heat),
                )
                .unwrap();
                let names = |d: &Path| {
                    let mut v: Vec<_> = std::fs::read_dir(d)
                        .unwrap()
                        .map(|e| e.unwrap().file_name())
                        .collect();
                    v.sort();
                    v
                };
                assert_eq!(names(&alone), names(&pair));
                for name in names(&alone) {
                    let a = std::fs::read(alone.join(&name)).unwrap();
                    assert_eq!(a, std::fs::read(pair.join(&name)).unwrap(), "{name:?}");
                }
            });
        }
    }

    #[test]
    fn a_pair_with_a_figure_that_cannot_be_drawn_is_an_error_naming_it() {
        let dir = tempfile::tempdir().unwrap();
        let mut bad = sample_phase();
        bad.xs.swap(3, 4);
        let (phase, heat) = (dir.path().join("phase"), dir.path().join("heat"));
        let err = phase_diagram_and_heat_map((&phase, &bad), (&heat, &sample_heat(true)))
            .unwrap_err()
            .to_string();
        assert!(err.contains("phase"), "{err}");
        for ext in ["png", "svg", "pdf"] {
            assert!(
                !sibling(&phase, ext).exists(),
                "{ext} of a failed figure written"
            );
        }
    }

    fn sample_heat(with_missing: bool) -> HeatMap {
        let (xs, ys) = (grid(24, 0.0, 1.0), grid(16, 0.5, 1.5));
        let values = ys
            .iter()
            .flat_map(|&y| xs.iter().map(move |&x| (x, y)))
            .map(|(x, y)| match with_missing && x > 0.8 && y > 1.2 {
                true => f64::NAN,
                false => 4.0 * x + y,
            })
            .collect();
        HeatMap {
            title: "Gap scale".into(),
            x_name: "g / v".into(),
            y_name: "K".into(),
            x_log: false,
            y_log: false,
            xs,
            ys,
            values,
            value_label: "ℓ* (gap ~ e^-ℓ*)".into(),
            caption: "Grey: no flow result.".into(),
        }
    }

    #[test]
    fn heat_map_has_colour_bar_and_marks_missing_values() {
        let dir = tempfile::tempdir().unwrap();
        let stem = dir.path().join("heat");
        heat_map(&stem, &sample_heat(true)).unwrap();
        let (_, svg) = read_outputs(&stem);
        assert_eq!(count_text(&svg, "ℓ* (gap ~ e^-ℓ*)"), 1);
        assert_eq!(count_text(&svg, "no value"), 1);
        // Values run from 0.5 to 5.5: the extreme cells take the ends of viridis.
        assert!(svg.contains(&format!("fill=\"{}\"", hex(palette::viridis(0.0)))));
        assert!(svg.contains(&format!("fill=\"{}\"", hex(palette::viridis(1.0)))));
        assert!(svg.contains(&format!("fill=\"{}\"", hex(palette::MISSING))));

        let complete = dir.path().join("complete");
        heat_map(&complete, &sample_heat(false)).unwrap();
        let (_, svg) = read_outputs(&complete);
        assert_eq!(count_text(&svg, "no value"), 0);
        assert!(!svg.contains(&format!("fill=\"{}\"", hex(palette::MISSING))));
    }

    #[test]
    fn heat_map_is_deterministic_and_validates() {
        let dir = tempfile::tempdir().unwrap();
        let data = sample_heat(true);
        assert_deterministic(dir.path(), |s| heat_map(s, &data).unwrap());
        let mut bad = sample_heat(true);
        bad.values.push(1.0);
        assert!(heat_map(&dir.path().join("bad"), &bad).is_err());
        let mut all_missing = sample_heat(true);
        all_missing.values.iter_mut().for_each(|v| *v = f64::NAN);
        heat_map(&dir.path().join("nan"), &all_missing).unwrap();
    }
}
