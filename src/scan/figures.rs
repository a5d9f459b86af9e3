//! Figures of a finished scan, drawn from the parsed rows of `points.csv`:
//! a phase diagram coloured by outcome with the tree-level lines
//! Delta0 = 2 on top and a map of ell* (two axes), or every bare Delta
//! against the parameter with outcome bands (one axis).

use std::path::Path;

use super::store::Meta;
use super::summary::{Row, OUTCOMES};
use crate::error::Error;
use crate::plot::{
    self, palette, Band, Contour, DimensionSeries, HeatMap, LineScanFigure, PhaseMap,
};

/// Caption stating the method's limits.
const CAPTION: &str = "Second-order RG, single reference velocity; lines: tree-level Δ0 = 2.";

/// Write the scan's figures into `dir`; returns the file names written.
pub fn write(dir: &Path, meta: &Meta, rows: &[Row]) -> Result<Vec<String>, Error> {
    let cats = Categories::new(meta, rows);
    if meta.axes.len() == 1 {
        line_figure(dir, meta, rows, &cats)?;
        return Ok(vec!["phase.png".into(), "phase.svg".into()]);
    }
    phase_figure(dir, meta, rows, &cats)?;
    ell_star_figure(dir, meta, rows)?;
    Ok(["phase.png", "phase.svg", "ell_star.png", "ell_star.svg"]
        .iter()
        .map(|s| s.to_string())
        .collect())
}

/// The outcome categories present in a scan, in a stable order: winning
/// listed terms (model order), other winners (sorted), then the other
/// outcomes.
struct Categories {
    labels: Vec<String>,
    colours: Vec<(u8, u8, u8)>,
    keys: Vec<(String, String)>,
    /// Palette index of each category's term (meaningful for winners).
    term_colour: Vec<usize>,
}

impl Categories {
    fn new(meta: &Meta, rows: &[Row]) -> Categories {
        let mut keys: Vec<(String, String)> = rows.iter().map(key).collect();
        keys.sort_by_key(|k| order(meta, k));
        keys.dedup();
        let labels = keys.iter().map(|(o, w)| label(o, w)).collect();
        let mut extra: Vec<&String> = keys
            .iter()
            .map(|k| &k.1)
            .filter(|w| !w.is_empty() && !meta.terms.contains(w))
            .collect();
        extra.sort();
        extra.dedup();
        let term_colour: Vec<usize> = keys
            .iter()
            .map(|(_, w)| match meta.terms.iter().position(|t| t == w) {
                Some(t) => t,
                None => meta.terms.len() + extra.iter().position(|x| *x == w).unwrap_or(0),
            })
            .collect();
        let colours = keys
            .iter()
            .zip(&term_colour)
            .map(|(k, &t)| colour(&k.0, t))
            .collect();
        Categories {
            labels,
            colours,
            keys,
            term_colour,
        }
    }

    /// Palette index of a category's band in a one-axis scan: a winner
    /// keeps its term's colour (as its line); other outcomes take the last
    /// palette entries (black last, drawn light: grey).
    fn band_colour(&self, c: usize) -> usize {
        match self.keys[c].0.as_str() {
            "strong" | "spinful" => self.term_colour[c],
            "gapless" => 7,
            "undecided" => 6,
            _ => 5,
        }
    }

    fn index(&self, row: &Row) -> usize {
        let k = key(row);
        self.keys.iter().position(|x| *x == k).unwrap_or(0)
    }
}

fn key(r: &Row) -> (String, String) {
    let winner = if r.outcome == "strong" || r.outcome == "spinful" {
        r.winner.clone()
    } else {
        String::new()
    };
    (r.outcome.clone(), winner)
}

fn order(meta: &Meta, (outcome, winner): &(String, String)) -> (usize, usize, String) {
    let oi = OUTCOMES
        .iter()
        .position(|o| o == outcome)
        .unwrap_or(OUTCOMES.len());
    let ti = meta
        .terms
        .iter()
        .position(|t| t == winner)
        .unwrap_or(meta.terms.len());
    let group = if winner.is_empty() {
        2
    } else if outcome == "strong" {
        0
    } else {
        1
    };
    (group * 100 + oi, ti, winner.clone())
}

fn label(outcome: &str, winner: &str) -> String {
    match outcome {
        "strong" => format!("{winner} wins"),
        "spinful" => format!("{winner}: spinful instability"),
        "gapless" => "gapless".into(),
        "undecided" => "undecided".into(),
        "unphysical" => "unphysical (V not positive definite)".into(),
        "failed" => "integration failed".into(),
        other => other.to_string(),
    }
}

/// Colour of a category: winners take their term's palette colour
/// (listed terms by model order, generated winners after them).
fn colour(outcome: &str, term: usize) -> (u8, u8, u8) {
    let rgb = |c: plotters::style::RGBColor| (c.0, c.1, c.2);
    match outcome {
        "strong" => rgb(palette::categorical(term)),
        "spinful" => rgb(palette::lighten(palette::categorical(term), 0.55)),
        "gapless" => (232, 232, 232),
        "undecided" => (170, 170, 170),
        "unphysical" => (255, 255, 255),
        _ => (60, 60, 60),
    }
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

fn phase_figure(dir: &Path, meta: &Meta, rows: &[Row], cats: &Categories) -> Result<(), Error> {
    let (xs, ys) = (meta.axes[0].values(), meta.axes[1].values());
    let lines = line_terms(meta)
        .into_iter()
        .map(|t| {
            let values: Vec<f64> = rows.iter().map(|r| r.dims0[t]).collect();
            Contour {
                label: format!("Δ0({}) = 2", meta.terms[t]),
                points: plot::contour_lines(&xs, &ys, &values, 2.0),
            }
        })
        .filter(|c| !c.points.is_empty())
        .collect();
    let data = PhaseMap {
        title: format!("{}: which term reaches strong coupling first", meta.model),
        x_name: meta.axes[0].name.clone(),
        y_name: meta.axes[1].name.clone(),
        xs,
        ys,
        cells: rows.iter().map(|r| cats.index(r)).collect(),
        categories: cats.labels.clone(),
        category_colours: Some(cats.colours.clone()),
        lines,
        caption: CAPTION.into(),
    };
    Ok(plot::phase_diagram(&dir.join("phase"), &data)?)
}

fn ell_star_figure(dir: &Path, meta: &Meta, rows: &[Row]) -> Result<(), Error> {
    let data = HeatMap {
        title: format!(
            "{}: scale at which the winner reaches strong coupling",
            meta.model
        ),
        x_name: meta.axes[0].name.clone(),
        y_name: meta.axes[1].name.clone(),
        xs: meta.axes[0].values(),
        ys: meta.axes[1].values(),
        values: rows.iter().map(|r| r.ell_star).collect(),
        value_label: "ℓ* (gap ~ e^-ℓ*)".into(),
        caption:
            "Grey: no term reached strong coupling. Second-order RG, single reference velocity."
                .into(),
    };
    Ok(plot::heat_map(&dir.join("ell_star"), &data)?)
}

fn line_figure(dir: &Path, meta: &Meta, rows: &[Row], cats: &Categories) -> Result<(), Error> {
    let xs = meta.axes[0].values();
    let series = meta
        .terms
        .iter()
        .enumerate()
        .map(|(t, name)| DimensionSeries {
            name: name.clone(),
            dimension: rows.iter().map(|r| r.dims0[t]).collect(),
        })
        .collect();
    let data = LineScanFigure {
        title: format!("{}: bare dimensions and outcomes", meta.model),
        x_name: meta.axes[0].name.clone(),
        xs: xs.clone(),
        series,
        bands: bands(&xs, rows, cats),
        caption:
            "Bands: outcome of the second-order flow (single reference velocity). Dashed: Δ = 2."
                .into(),
    };
    Ok(plot::dimension_line_figure(&dir.join("phase"), &data)?)
}

/// Runs of equal outcome as bands, split half-way between grid points.
fn bands(xs: &[f64], rows: &[Row], cats: &Categories) -> Vec<Band> {
    let mut out: Vec<Band> = Vec::new();
    for (i, r) in rows.iter().enumerate() {
        let c = cats.index(r);
        let x0 = if i == 0 {
            xs[0]
        } else {
            0.5 * (xs[i - 1] + xs[i])
        };
        let x1 = if i + 1 == xs.len() {
            xs[i]
        } else {
            0.5 * (xs[i] + xs[i + 1])
        };
        match out.last_mut() {
            Some(b) if b.label == cats.labels[c] => b.x1 = x1,
            _ => out.push(Band {
                x0,
                x1,
                label: cats.labels[c].clone(),
                colour_index: cats.band_colour(c),
            }),
        }
    }
    out
}
