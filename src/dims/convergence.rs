//! `pinflow dims MODEL --wires 4,8,16,32,infinite`: how every term's
//! scaling dimension approaches the infinite array as the array grows.
//!
//! Each entry re-reads the model's array with that number of wires (same
//! boundary) and computes the `dims` report ([`crate::dims::DimsReport`]):
//! periodic arrays by the q-space path on their W points, open arrays by
//! the dense path, `infinite` by the refined quadrature. Output: one row
//! per array size, one column per term (text, JSON, CSV, Markdown, LaTeX),
//! and with `--out DIR` the figure `convergence.png/svg` (Delta against
//! 1/W, the infinite array at 1/W = 0) with `convergence.csv` and
//! `convergence.json`.

use std::path::Path;

use serde::Serialize;

use crate::core::qspace::Quadrature;
use crate::core::system::System;
use crate::dims::DimsReport;
use crate::error::Error;
use crate::model::{Boundary, Model, Structure, Wires};
use crate::output::{self, Report, Table};
use crate::plot::{dimension_line_figure, DimensionSeries, LineScanFigure};

/// One array size.
#[derive(Debug, Clone, Serialize)]
pub struct ConvergenceRow {
    /// Number of wires, or the string "infinite".
    pub wires: serde_json::Value,
    /// Total scaling dimension of every term (order of `terms`).
    pub dimensions: Vec<f64>,
    /// The infinite array's quadrature; null for finite arrays.
    pub quadrature: Option<Quadrature>,
}

/// The whole `dims --wires` report.
#[derive(Debug, Clone, Serialize)]
pub struct ConvergenceReport {
    /// Model name.
    pub model: String,
    /// Parameter point.
    pub parameters: serde_json::Map<String, serde_json::Value>,
    /// Labels and units of the parameters that have them in the model
    /// (absent when none has).
    #[serde(default, skip_serializing_if = "serde_json::Map::is_empty")]
    pub parameter_labels: serde_json::Map<String, serde_json::Value>,
    /// "periodic" or "open" (the finite arrays' boundary).
    pub boundary: String,
    /// Term names (columns).
    pub terms: Vec<String>,
    /// One row per requested array size, in the order given.
    pub rows: Vec<ConvergenceRow>,
    /// Notes.
    pub notes: Vec<String>,
}

impl ConvergenceReport {
    /// Compute every row. `key` names the option the sizes came from.
    pub fn build(
        model: &Model,
        point: &[f64],
        sizes: &[Wires],
        key: &str,
    ) -> Result<ConvergenceReport, Error> {
        let mut rows = Vec::with_capacity(sizes.len());
        let mut notes = Vec::new();
        for &w in sizes {
            let sys = System::new(model.with_wires(w, key)?)?;
            let report = DimsReport::build(&sys, point)?;
            if let Some(q) = &report.quadrature {
                notes.push(crate::dims::infinite_note(q));
            }
            rows.push(ConvergenceRow {
                wires: match w {
                    Wires::Finite(n) => serde_json::json!(n),
                    Wires::Infinite => serde_json::json!("infinite"),
                },
                dimensions: report.terms.iter().map(|t| t.dimension).collect(),
                quadrature: report.quadrature,
            });
        }
        let boundary = match model.structure {
            Structure::Array {
                boundary: Boundary::Open,
                ..
            } => "open",
            _ => "periodic",
        };
        notes.insert(
            0,
            format!("Finite arrays are {boundary}; a periodic array of W wires is the W-point trapezoid rule of the infinite array's q integral, so its dimensions converge to the infinite ones as fast as the rule does."),
        );
        Ok(ConvergenceReport {
            model: model.name.clone(),
            parameters: model.params.json_point(point),
            parameter_labels: model.params.labels_json(),
            boundary: boundary.to_string(),
            terms: model.terms.iter().map(|t| t.name.clone()).collect(),
            rows,
            notes,
        })
    }

    fn label(row: &ConvergenceRow) -> String {
        match &row.wires {
            serde_json::Value::String(s) => s.clone(),
            other => other.to_string(),
        }
    }

    /// Write `convergence.png/svg`, `convergence.csv` and `convergence.json`
    /// into `dir`.
    pub fn write_dir(&self, dir: &Path) -> Result<(), Error> {
        std::fs::create_dir_all(dir).map_err(|e| Error::io(dir, e))?;
        output::write_atomic(
            &dir.join("convergence.csv"),
            output::render(self, output::Format::Csv)?.as_bytes(),
        )?;
        output::write_atomic(
            &dir.join("convergence.json"),
            output::to_json(self)?.as_bytes(),
        )?;
        // Delta against 1/W: the infinite array sits at 0.
        let mut order: Vec<(f64, usize)> = self
            .rows
            .iter()
            .enumerate()
            .map(|(i, r)| (r.wires.as_f64().map_or(0.0, |w| 1.0 / w), i))
            .collect();
        order.sort_by(|a, b| a.0.total_cmp(&b.0));
        let figure = LineScanFigure {
            title: format!("{}: Δ against array size", self.model),
            x_name: "1/W (0 = infinite array)".to_string(),
            x_log: false,
            xs: order.iter().map(|o| o.0).collect(),
            series: self
                .terms
                .iter()
                .enumerate()
                .map(|(t, name)| DimensionSeries {
                    name: name.clone(),
                    dimension: order.iter().map(|o| self.rows[o.1].dimensions[t]).collect(),
                })
                .collect(),
            bands: Vec::new(),
            caption: format!(
                "Bare scaling dimensions of {} arrays of W wires at {}; Δ = 2 is marginal.",
                self.boundary,
                output::labelled_point(&self.parameters, &self.parameter_labels)
            ),
        };
        Ok(dimension_line_figure(&dir.join("convergence"), &figure)?)
    }
}

impl Report for ConvergenceReport {
    fn title(&self) -> String {
        format!("Scaling dimensions against array size: {}", self.model)
    }

    fn facts(&self) -> Vec<(String, String)> {
        vec![
            (
                "parameters".to_string(),
                output::labelled_parameters_fact(&self.parameters, &self.parameter_labels),
            ),
            ("boundary".to_string(), self.boundary.clone()),
        ]
    }

    fn tables(&self) -> Vec<Table> {
        let mut headers = vec!["wires".to_string()];
        headers.extend(self.terms.iter().map(|t| format!("Delta {t}")));
        let mut t = Table::with_headers("scaling dimension by array size", headers);
        for r in &self.rows {
            let mut row = vec![ConvergenceReport::label(r)];
            row.extend(r.dimensions.iter().map(|d| format!("{d:.10}")));
            t.push(row);
        }
        vec![t]
    }

    fn csv_table(&self) -> Table {
        let mut headers = vec!["wires".to_string()];
        headers.extend(self.terms.iter().map(|t| format!("dimension:{t}")));
        let mut t = Table::with_headers("dimensions", headers);
        for r in &self.rows {
            let mut row = vec![ConvergenceReport::label(r)];
            row.extend(r.dimensions.iter().map(|d| format!("{d}")));
            t.push(row);
        }
        t
    }

    fn notes(&self) -> Vec<String> {
        self.notes.clone()
    }
}
