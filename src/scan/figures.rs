//! Figures of a finished scan, drawn from `points.csv`: a phase diagram
//! coloured by outcome with the tree-level lines Delta0 = 2 on top and a
//! map of ell* (two axes), or every bare Delta against the parameter with
//! outcome bands (one axis).
//!
//! A [`Canvas`] collects what the figures need during the one pass over
//! the rows (see [`super::points`]), and no more: the outcome category of
//! every point (a `u32`, numbered in order of first appearance and
//! renumbered into display order once all categories are known), and for
//! two axes ell* of every point (an `f64`, NaN for none) and the lines
//! Delta0 = 2, traced row by row as the rows arrive
//! ([`plot::ContourTracer`]); for one axis the bare dimension of every
//! term at every point, which the line figure draws. That is 12 bytes per
//! point of a plane, where the rows themselves took hundreds.

use std::collections::HashMap;
use std::fmt::Write as _;
use std::path::Path;

use super::points::Point;
use super::store::Meta;
use crate::core::relevance::SPACETIME_DIMENSION;
use crate::error::Error;
use crate::flow::Outcome;
use crate::plot::{
    self, palette, Band, Contour, ContourTracer, DimensionSeries, HeatMap, LineScanFigure, PhaseMap,
};

/// Caption stating the method's limits.
const CAPTION: &str = "Second-order RG, single reference velocity; lines: tree-level Δ0 = 2.";

/// What the phase map is coloured by.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ColorBy {
    /// The phase of the final pinned set (`phase` column; points without a
    /// phase by outcome).
    Phase,
    /// The first winner (outcome and winner), as before staging.
    Winner,
}

/// What the figures need, collected point by point.
pub struct Canvas {
    keys: Keys,
    by: ColorBy,
    /// Category of every point (first-appearance numbering until `write`).
    cells: Vec<u32>,
    shape: Shape,
}

/// The per-point data of the figure kind.
enum Shape {
    /// One axis: the bare dimension of every term at every point.
    Line { dims: Vec<Vec<f64>> },
    /// Two axes: ell* at every point and the Delta0 = 2 lines per term.
    Map {
        ell: Vec<f64>,
        lines: Vec<(usize, ContourTracer)>,
    },
}

impl Canvas {
    /// An empty canvas for the grid of `meta`.
    pub fn new(meta: &Meta, by: ColorBy) -> Canvas {
        let n = meta.points;
        let shape = if meta.axes.len() == 1 {
            Shape::Line {
                dims: meta.terms.iter().map(|_| Vec::with_capacity(n)).collect(),
            }
        } else {
            let (xs, ys) = (meta.axes[0].values(), meta.axes[1].values());
            let lines = line_terms(meta)
                .into_iter()
                .map(|t| {
                    (
                        t,
                        ContourTracer::new(xs.clone(), ys.clone(), SPACETIME_DIMENSION),
                    )
                })
                .collect();
            Shape::Map {
                ell: Vec::with_capacity(n),
                lines,
            }
        };
        Canvas {
            keys: Keys::default(),
            by,
            cells: Vec::with_capacity(n),
            shape,
        }
    }

    /// Take the next point (points come in index order).
    pub fn add(&mut self, p: &Point) {
        let id = match (self.by, p.phase()) {
            (ColorBy::Phase, phase) if !phase.is_empty() => {
                let kind = if p.target_phase() {
                    TARGET_PHASE
                } else {
                    PHASE
                };
                self.keys.id(kind, phase)
            }
            _ => self.keys.id(p.outcome(), p.winner()),
        };
        self.cells.push(id);
        match &mut self.shape {
            Shape::Line { dims } => {
                for (t, d) in dims.iter_mut().enumerate() {
                    d.push(p.dim0(t));
                }
            }
            Shape::Map { ell, lines } => {
                ell.push(p.ell_star().unwrap_or(f64::NAN));
                for (t, tracer) in lines.iter_mut() {
                    tracer.push(p.dim0(*t));
                }
            }
        }
    }

    /// Write the scan's figures into `dir`; returns the file names written.
    pub fn write(self, dir: &Path, meta: &Meta) -> Result<Vec<String>, Error> {
        let Canvas {
            keys,
            mut cells,
            shape,
            by,
        } = self;
        let cats = Categories::new(meta, keys.list);
        cats.renumber(&mut cells);
        let names: &[&str] = match shape {
            Shape::Line { dims } => {
                line_figure(dir, meta, dims, &cells, &cats)?;
                &["phase"]
            }
            Shape::Map { ell, lines } => {
                // Two independent figures, drawn at once.
                let phase = phase_data(meta, cells, lines, &cats, by);
                let ell_star = ell_star_data(meta, ell);
                plot::phase_diagram_and_heat_map(
                    (&dir.join("phase"), &phase),
                    (&dir.join("ell_star"), &ell_star),
                )?;
                &["phase", "ell_star"]
            }
        };
        let mut exts = vec!["png", "svg", "pdf"];
        if plot::figure_style() == plot::FigureStyle::Paper {
            exts.push("txt");
        }
        Ok(names
            .iter()
            .flat_map(|n| exts.iter().map(move |e| format!("{n}.{e}")))
            .collect())
    }
}

/// Category keys (outcome, winner) in order of first appearance.
#[derive(Default)]
struct Keys {
    list: Vec<(String, String)>,
    ids: HashMap<String, u32>,
    /// The lookup key of the current row (reused: no allocation per row).
    scratch: String,
}

impl Keys {
    /// The number of a row's category; the winner counts only for the
    /// outcomes that have one.
    fn id(&mut self, outcome: &str, winner: &str) -> u32 {
        let winner =
            if is_phase(outcome) || Outcome::from_word(outcome).is_some_and(Outcome::has_winner) {
                winner
            } else {
                ""
            };
        self.scratch.clear();
        // The length prefix keeps distinct pairs distinct.
        let _ = write!(self.scratch, "{}:{outcome}{winner}", outcome.len());
        if let Some(&id) = self.ids.get(self.scratch.as_str()) {
            return id;
        }
        // At most one new category per point, and a grid with more than
        // 2^32 points would not fit the per-point figure data anyway.
        let id = self.list.len() as u32;
        self.ids.insert(self.scratch.clone(), id);
        self.list.push((outcome.to_string(), winner.to_string()));
        id
    }
}

/// The outcome categories present in a scan, in a stable order: winning
/// listed terms (model order), other winners (sorted), then the other
/// outcomes.
struct Categories {
    labels: Vec<String>,
    colours: Vec<(u8, u8, u8)>,
    /// Fill of each category's band in a one-axis scan ([`band_colours`]).
    bands: Vec<(u8, u8, u8)>,
    /// Display index of each first-appearance number.
    display: Vec<u32>,
}

impl Categories {
    /// The categories of `found` (distinct keys in order of first
    /// appearance) in display order.
    fn new(meta: &Meta, found: Vec<(String, String)>) -> Categories {
        let mut sorted: Vec<usize> = (0..found.len()).collect();
        sorted.sort_by_key(|&i| order(meta, &found[i]));
        let mut display = vec![0u32; found.len()];
        for (d, &i) in sorted.iter().enumerate() {
            display[i] = d as u32;
        }
        let keys: Vec<(String, String)> = sorted.iter().map(|&i| found[i].clone()).collect();
        let labels = keys.iter().map(|(o, w)| label(o, w)).collect();
        let mut extra: Vec<&String> = keys
            .iter()
            .map(|k| &k.1)
            .filter(|w| !w.is_empty() && !meta.terms.contains(w))
            .collect();
        extra.sort();
        extra.dedup();
        let phases = keys.iter().filter(|k| is_phase(&k.0)).count();
        let term_colour: Vec<usize> = keys
            .iter()
            .enumerate()
            .map(|(i, (o, w))| match meta.terms.iter().position(|t| t == w) {
                // Phases (listed first) take palette entries in display order.
                _ if is_phase(o) => i,
                Some(t) => phases + t,
                None => phases + meta.terms.len() + extra.iter().position(|x| *x == w).unwrap_or(0),
            })
            .collect();
        let colours: Vec<(u8, u8, u8)> = keys
            .iter()
            .zip(&term_colour)
            .map(|(k, &t)| match (k.0.as_str(), k.1.as_str()) {
                (PHASE, crate::core::phase::GAPLESS) => colour("gapless", t),
                (o, _) if is_phase(o) => colour("strong", t),
                (o, _) => colour(o, t),
            })
            .collect();
        let bands = band_colours(meta, &keys, &colours);
        Categories {
            labels,
            colours,
            bands,
            display,
        }
    }

    /// Turn first-appearance numbers into display indices.
    fn renumber(&self, cells: &mut [u32]) {
        for c in cells {
            *c = self.display[*c as usize];
        }
    }

    /// Fill of a category's band in a one-axis scan.
    fn band_colour(&self, c: usize) -> (u8, u8, u8) {
        self.bands[c]
    }
}

/// Band fills of a one-axis scan, drawn under one line per listed term in
/// that term's colour: the map's colours lightened (the lines on top stay
/// legible), the greys as in the map. A winner's band takes its term's
/// colour already; so does a phase that pins one listed term alone, and
/// every other phase takes a colour after all listed terms', so that no
/// band shares its hue with the line of a term it is not about.
fn band_colours(
    meta: &Meta,
    keys: &[(String, String)],
    colours: &[(u8, u8, u8)],
) -> Vec<(u8, u8, u8)> {
    let mut others = 0;
    let mut phase_colour = |set: &str| {
        let single = set.strip_prefix('{').and_then(|s| s.strip_suffix('}'));
        match single.and_then(|t| meta.terms.iter().position(|x| x == t)) {
            Some(t) => colour("strong", t),
            None => {
                others += 1;
                colour("strong", meta.terms.len() + others - 1)
            }
        }
    };
    keys.iter()
        .zip(colours)
        .map(|((o, w), &c)| match (o.as_str(), w.as_str()) {
            (PHASE, crate::core::phase::GAPLESS) => band_shade(c),
            (o, set) if is_phase(o) => band_shade(phase_colour(set)),
            _ => band_shade(c),
        })
        .collect()
}

/// Category kinds of the phase map coloured by phase.
const PHASE: &str = "phase";
const TARGET_PHASE: &str = "target phase";

fn is_phase(kind: &str) -> bool {
    kind == PHASE || kind == TARGET_PHASE
}

fn order(meta: &Meta, (outcome, winner): &(String, String)) -> (usize, usize, String) {
    // Phases first: the target phase, then the others by label, gapless last.
    match outcome.as_str() {
        TARGET_PHASE => return (0, 0, winner.clone()),
        PHASE => {
            let last = usize::from(winner == crate::core::phase::GAPLESS);
            return (1, last, winner.clone());
        }
        _ => {}
    }
    let oi = Outcome::ALL
        .iter()
        .position(|o| o.word() == outcome)
        .unwrap_or(Outcome::ALL.len());
    let ti = meta
        .terms
        .iter()
        .position(|t| t == winner)
        .unwrap_or(meta.terms.len());
    let group = if winner.is_empty() {
        2
    } else if outcome == Outcome::Strong.word() {
        0
    } else {
        1
    };
    (10 + group * 100 + oi, ti, winner.clone())
}

fn label(outcome: &str, winner: &str) -> String {
    match (outcome, Outcome::from_word(outcome)) {
        (TARGET_PHASE, _) => format!("{winner} (target phase)"),
        (PHASE, _) if winner == crate::core::phase::GAPLESS => {
            "gapless phase (nothing pinned)".into()
        }
        (PHASE, _) => winner.to_string(),
        (_, Some(Outcome::Strong)) => format!("{winner} wins"),
        (_, Some(Outcome::Spinful)) => format!("{winner}: spinful instability"),
        (_, Some(o @ (Outcome::Gapless | Outcome::Undecided))) => o.word().into(),
        (_, Some(Outcome::Unphysical)) => "unphysical (V not positive definite)".into(),
        (_, Some(Outcome::Failed)) => "integration failed".into(),
        (_, None) => outcome.to_string(),
    }
}

/// Fills of the outcomes without a winner: four greys, well apart, and
/// never a winner's colour ([`palette::fill`] has no greys). Unphysical
/// points take the grey that the ℓ* map uses for "no value".
const GAPLESS_GREY: (u8, u8, u8) = (232, 232, 232);
const UNPHYSICAL_GREY: (u8, u8, u8) = (palette::MISSING.0, palette::MISSING.1, palette::MISSING.2);
const UNDECIDED_GREY: (u8, u8, u8) = (140, 140, 140);
const FAILED_GREY: (u8, u8, u8) = (95, 95, 95);

/// Colour of a category: winners take their term's fill colour (listed
/// terms by model order, generated winners after them), the outcomes
/// without a winner a grey.
fn colour(outcome: &str, term: usize) -> (u8, u8, u8) {
    let rgb = |c: plotters::style::RGBColor| (c.0, c.1, c.2);
    match Outcome::from_word(outcome) {
        Some(Outcome::Strong) => rgb(palette::fill(term)),
        Some(Outcome::Spinful) => rgb(palette::lighten(palette::fill(term), 0.55)),
        Some(Outcome::Gapless) => GAPLESS_GREY,
        Some(Outcome::Undecided) => UNDECIDED_GREY,
        Some(Outcome::Unphysical) => UNPHYSICAL_GREY,
        _ => FAILED_GREY,
    }
}

/// A map colour as a band: greys unchanged, other colours mixed 75 % with
/// white (a winner's band stays distinct from its spinful band, which is
/// already 55 % white in the map).
fn band_shade(c: (u8, u8, u8)) -> (u8, u8, u8) {
    if c.0 == c.1 && c.1 == c.2 {
        return c;
    }
    let l = palette::lighten(plotters::style::RGBColor(c.0, c.1, c.2), 0.75);
    (l.0, l.1, l.2)
}

/// Terms whose Delta0 = 2 line is drawn: the target and its competitors.
fn line_terms(meta: &Meta) -> Vec<usize> {
    let mut names: Vec<&String> = meta.target.iter().collect();
    names.extend(meta.competitors.iter());
    if names.is_empty() {
        names.extend(meta.terms.iter());
    }
    names
        .iter()
        .filter_map(|n| meta.terms.iter().position(|t| t == *n))
        .take(5)
        .collect()
}

fn phase_data(
    meta: &Meta,
    cells: Vec<u32>,
    lines: Vec<(usize, ContourTracer)>,
    cats: &Categories,
    by: ColorBy,
) -> PhaseMap {
    let lines = lines
        .into_iter()
        .map(|(t, tracer)| Contour {
            label: format!("Δ0({}) = 2", meta.terms[t]),
            points: tracer.finish(),
        })
        .filter(|c| !c.points.is_empty())
        .collect();
    PhaseMap {
        title: match by {
            ColorBy::Phase => format!("{}: phase after successive pinning", meta.model),
            ColorBy::Winner => format!("{}: which term reaches strong coupling first", meta.model),
        },
        x_name: meta.axes[0].title(),
        y_name: meta.axes[1].title(),
        x_log: meta.axes[0].log,
        y_log: meta.axes[1].log,
        xs: meta.axes[0].values(),
        ys: meta.axes[1].values(),
        cells,
        categories: cats.labels.clone(),
        category_colours: Some(cats.colours.clone()),
        lines,
        caption: CAPTION.into(),
    }
}

fn ell_star_data(meta: &Meta, values: Vec<f64>) -> HeatMap {
    HeatMap {
        title: format!(
            "{}: scale at which the winner reaches strong coupling",
            meta.model
        ),
        x_name: meta.axes[0].title(),
        y_name: meta.axes[1].title(),
        x_log: meta.axes[0].log,
        y_log: meta.axes[1].log,
        xs: meta.axes[0].values(),
        ys: meta.axes[1].values(),
        values,
        value_label: "ℓ* (gap ~ e^-ℓ*)".into(),
        // Grey is every point without an ell* in points.csv: unphysical
        // points (V not positive definite, never flowed) as well as flows
        // that ended gapless, undecided or failed.
        caption: "Grey: no ℓ* — unphysical points (V not positive definite) and flows \
             where no term reached strong coupling (gapless, undecided, failed); the phase \
             map tells them apart. Second-order RG, single reference velocity."
            .into(),
    }
}

fn line_figure(
    dir: &Path,
    meta: &Meta,
    dims: Vec<Vec<f64>>,
    cells: &[u32],
    cats: &Categories,
) -> Result<(), Error> {
    let xs = meta.axes[0].values();
    let series = meta
        .terms
        .iter()
        .zip(dims)
        .map(|(name, dimension)| DimensionSeries {
            name: name.clone(),
            dimension,
        })
        .collect();
    let data = LineScanFigure {
        title: format!("{}: bare dimensions and outcomes", meta.model),
        x_name: meta.axes[0].title(),
        x_log: meta.axes[0].log,
        xs: xs.clone(),
        series,
        bands: bands(&xs, cells, cats, meta.axes[0].log),
        caption:
            "Bands: outcome of the second-order flow (single reference velocity). Dashed: Δ = 2."
                .into(),
    };
    Ok(plot::dimension_line_figure(&dir.join("phase"), &data)?)
}

/// Runs of equal outcome as bands, split half-way between grid points
/// (on a log axis at the geometric mean, half-way as drawn).
fn bands(xs: &[f64], cells: &[u32], cats: &Categories, log: bool) -> Vec<Band> {
    let mid = |a: f64, b: f64| if log { (a * b).sqrt() } else { 0.5 * (a + b) };
    let mut out: Vec<Band> = Vec::new();
    for (i, &c) in cells.iter().enumerate() {
        let c = c as usize;
        let x0 = if i == 0 { xs[0] } else { mid(xs[i - 1], xs[i]) };
        let x1 = if i + 1 == xs.len() {
            xs[i]
        } else {
            mid(xs[i], xs[i + 1])
        };
        match out.last_mut() {
            Some(b) if b.label == cats.labels[c] => b.x1 = x1,
            _ => out.push(Band {
                x0,
                x1,
                label: cats.labels[c].clone(),
                colour: cats.band_colour(c),
            }),
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scan::axis::Axis;

    fn meta(terms: usize) -> Meta {
        let axis = |name: &str| Axis {
            name: name.into(),
            min: 0.0,
            max: 1.0,
            n: 2,
            log: false,
            label: None,
            unit: None,
        };
        Meta {
            fingerprint: String::new(),
            model: "m".into(),
            axes: vec![axis("x"), axis("y")],
            terms: (0..terms).map(|t| format!("t{t}")).collect(),
            target: None,
            competitors: Vec::new(),
            shard: None,
            points: 4,
            infinite: false,
            symmetry_breaks: Vec::new(),
        }
    }

    fn key(outcome: &str, winner: &str) -> (String, String) {
        (outcome.to_string(), winner.to_string())
    }

    /// Every outcome without a winner, as a scan meets them.
    fn neutral() -> Vec<(String, String)> {
        ["undecided", "unphysical", "failed"]
            .iter()
            .map(|o| key(o, ""))
            .collect()
    }

    /// Asserts that no two categories share a map colour or a band colour,
    /// and that unphysical points are the ℓ* map's "no value" grey.
    fn assert_distinct(cats: &Categories) {
        let n = cats.labels.len();
        let bands: Vec<_> = (0..n).map(|c| cats.band_colour(c)).collect();
        for (what, colours) in [("map", &cats.colours), ("band", &bands)] {
            for i in 0..n {
                for j in 0..i {
                    assert_ne!(
                        colours[i], colours[j],
                        "{what}: '{}' and '{}' share a colour",
                        cats.labels[i], cats.labels[j]
                    );
                }
            }
        }
        let unphysical = (cats.labels.iter()).position(|l| l.starts_with("unphysical"));
        let grey = (palette::MISSING.0, palette::MISSING.1, palette::MISSING.2);
        assert_eq!(cats.colours[unphysical.unwrap()], grey);
        assert_eq!(bands[unphysical.unwrap()], grey);
    }

    #[test]
    fn winner_categories_never_share_a_colour() {
        // Up to 20 listed terms, each winning and each spinful, generated
        // winners after them, and every outcome without a winner.
        for terms in [1, 4, 7, 8, 9, 20] {
            let m = meta(terms);
            let mut found = neutral();
            found.push(key("gapless", ""));
            for t in &m.terms {
                found.push(key("strong", t));
                found.push(key("spinful", t));
            }
            found.extend((0..5).map(|g| key("strong", &format!("g{g}+g{g}"))));
            assert_distinct(&Categories::new(&m, found));
        }
    }

    #[test]
    fn phase_categories_never_share_a_colour() {
        for phases in [1, 7, 8, 15] {
            let mut found = neutral();
            found.push(key(TARGET_PHASE, "{t0}"));
            found.push(key(PHASE, crate::core::phase::GAPLESS));
            found.extend((1..phases).map(|p| key(PHASE, &format!("{{t{p}}}"))));
            assert_distinct(&Categories::new(&meta(phases), found));
        }
    }

    #[test]
    fn one_axis_unphysical_band_is_grey_with_the_map_wording() {
        let cats = Categories::new(&meta(2), vec![key("strong", "t1"), key("unphysical", "")]);
        let band = bands(&[0.0, 1.0, 2.0], &[0, 1, 1], &cats, false);
        assert_eq!(band.len(), 2);
        assert_eq!(band[1].label, "unphysical (V not positive definite)");
        assert_eq!(band[1].colour, UNPHYSICAL_GREY);
        assert_eq!((band[1].x0, band[1].x1), (0.5, 2.0));
        // The winner's band is its term's fill colour, lightened.
        let t1 = palette::lighten(palette::fill(1), 0.75);
        assert_eq!(band[0].colour, (t1.0, t1.1, t1.2));
    }

    #[test]
    fn phase_bands_take_no_other_terms_line_colour() {
        // Terms t0..t3 draw lines in fill colours 0..3. The phase {t2}
        // takes t2's; {t0, t1} and {g} (a generated term) take 4 and 5
        // (in display order).
        let m = meta(4);
        let mut found = neutral();
        for set in ["{t0, t1}", "{t2}", "{g}"] {
            found.push(key(PHASE, set));
        }
        let cats = Categories::new(&m, found);
        let band_of = |set: &str| {
            let c = (cats.labels.iter()).position(|l| l.starts_with(set));
            cats.band_colour(c.unwrap())
        };
        let shade = |i: usize| band_shade(colour("strong", i));
        assert_eq!(band_of("{t2}"), shade(2));
        let mut others = [band_of("{t0, t1}"), band_of("{g}")];
        others.sort();
        let mut want = [shade(4), shade(5)];
        want.sort();
        assert_eq!(others, want);
        assert_distinct(&cats);
    }
}
