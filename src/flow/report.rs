//! The `pinflow flow` report: summary in every format, the trajectory CSV
//! and the output directory.

use std::path::Path;

use serde::Serialize;

use super::{
    CheckMethod, Closure, FlowOptions, FlowResult, Outcome, QuadratureCheck, RuleChoice, StoppedBy,
};
use crate::error::Error;
use crate::output::{self, Report, Table};

/// The note of a flow decided by the Kosterlitz-Thouless invariant.
fn kt_note(k: &super::kt::KtDecision, ell_max: f64) -> String {
    let gap = k.invariant - k.separatrix;
    let base = format!(
        "{} is a single null cosine flowing alone, where the Kosterlitz-Thouless invariant I = y^2/2 - 8/Delta - 4 ln Delta is exact: I - I_sep = {gap:.3e} (numerical drift {:.1e})",
        k.channel, k.drift
    );
    match (k.side.as_str(), k.ell_max_extended) {
        ("above", Some(e)) => format!(
            "{base}; above the separatrix it reaches strong coupling, so ell_max was extended from {ell_max} (up to {e})"
        ),
        ("below", _) => format!(
            "{base}; below the separatrix y -> 0 and Delta -> {:.6}, so the flow is gapless although ell_max = {ell_max} was reached first",
            k.delta_inf.unwrap_or(f64::NAN)
        ),
        _ => format!("{base}: on the separatrix within the accuracy of the flow, undecided"),
    }
}

/// The limits of the method, stated with every flow result.
pub const METHOD_NOTE: &str = "Second-order (one-loop) weak-coupling RG around a Gaussian fixed point with a single reference velocity; \"strong\" means |y| reached y_strong, where perturbation theory stops being reliable. The gap estimate e^-ell* is an order of magnitude.";

/// Everything `pinflow flow` reports.
#[derive(Debug, Clone, Serialize)]
pub struct FlowReport {
    /// Model name.
    pub model: String,
    /// Parameter point.
    pub parameters: serde_json::Map<String, serde_json::Value>,
    /// Labels and units of the parameters that have them in the model
    /// (absent when none has): how figures name them.
    #[serde(default, skip_serializing_if = "serde_json::Map::is_empty")]
    pub parameter_labels: serde_json::Map<String, serde_json::Value>,
    /// The result (flattened: `outcome`, `winner`, `ell_star`, `terms`, ...).
    #[serde(flatten)]
    pub result: FlowResult,
    /// Options used.
    pub options: FlowOptions,
    /// Limits of the method.
    pub notes: Vec<String>,
}

impl FlowReport {
    /// Wrap a result.
    pub fn new(
        model: &str,
        names: &[String],
        point: &[f64],
        result: FlowResult,
        options: FlowOptions,
    ) -> Self {
        let parameters = names
            .iter()
            .cloned()
            .zip(point.iter().map(|x| serde_json::json!(x)))
            .collect();
        let mut notes = vec![METHOD_NOTE.to_string()];
        // A NaN drift (non-finite D) is reported too.
        if result.dkd_drift.is_nan() || result.dkd_drift > 1e-6 {
            notes.push(if result.dkd_drift.is_finite() {
                format!(
                    "the flowing D drifted from D K D = K^-1 by {:.2e} (relative); tighten --rtol",
                    result.dkd_drift
                )
            } else {
                "the flowing D has non-finite entries: D K D = K^-1 no longer holds".to_string()
            });
        }
        if let Some(q) = result.quadrature.filter(|q| !q.converged) {
            notes.push(format!(
                "the infinite array's quadrature with {} points is not converged (error estimate {:.1e} above {:.0e}); choose more points with --q-points",
                q.points, q.error_estimate, q.tolerance
            ));
        }
        if let Some(g) = result.momentum_period {
            notes.push(crate::dims::period_note(g));
        }
        notes.extend(result.plan_notes.iter().cloned());
        if !result.competitors_added.is_empty() {
            notes.push(format!(
                "hunted competitors added as terms ({}): {}",
                result.competitors_added.len(),
                result.competitors_added.join(", ")
            ));
        }
        if let Some(k) = &result.kt {
            notes.push(kt_note(k, options.ell_max));
        }
        if let Some(c) = result.flow_quadrature.as_ref().filter(|c| !c.converged) {
            notes.push(check_note(c));
        }
        FlowReport {
            model: model.to_string(),
            parameters,
            parameter_labels: serde_json::Map::new(),
            result,
            options,
            notes,
        }
    }

    /// One sentence saying what happened.
    pub fn headline(&self) -> String {
        let r = &self.result;
        match r.outcome {
            Outcome::Strong => format!(
                "{} reaches strong coupling first, at ell* = {:.4} (gap ~ {:.3e} of the bandwidth u/alpha){}",
                r.winner.as_deref().unwrap_or("?"),
                r.ell_star.unwrap_or(f64::NAN),
                r.ell_star.map_or(f64::NAN, |l| (-l).exp()),
                self.tie_text()
            ),
            Outcome::Spinful => format!(
                "{} (conformal spin != 0) reaches strong coupling at ell* = {:.4}: the fixed point is unstable, but this term alone opens no gap{}",
                r.winner.as_deref().unwrap_or("?"),
                r.ell_star.unwrap_or(f64::NAN),
                self.tie_text()
            ),
            Outcome::Gapless => self.gapless_text(),
            Outcome::Undecided => format!("no decision by ell_max = {} (near-marginal flow)", r.ell_end),
            Outcome::Unphysical => format!("unphysical point: {}", r.message.as_deref().unwrap_or("")),
            Outcome::Failed => r.message.clone().unwrap_or_else(|| "integration failed".into()),
        }
    }

    /// "; near tie: ..." when the runner-up is within 5 % of y_strong.
    fn tie_text(&self) -> String {
        match &self.result.runner_up {
            Some(r) if r.near_tie => format!(
                "; near tie: {} has |y| = {:.4} at ell*, within {:.0} % of y_strong = {}",
                r.name,
                r.coupling,
                100.0 * super::NEAR_TIE,
                self.options.y_strong
            ),
            _ => String::new(),
        }
    }

    /// What happened in a gapless flow: terms stopped by their momentum
    /// cut-off before they decayed below the floor are named with the
    /// coupling they reached there ("grew to" or "decayed to"); the rest
    /// decayed.
    fn gapless_text(&self) -> String {
        let r = &self.result;
        if let Some(k) = r.kt.as_ref().filter(|k| k.side == "below") {
            return format!(
                "{} flows to zero (Kosterlitz-Thouless invariant below the separatrix; Delta -> {:.6}): gapless (stable fixed point)",
                k.channel,
                k.delta_inf.unwrap_or(f64::NAN)
            );
        }
        let cut: Vec<String> = r
            .terms
            .iter()
            .filter(|t| t.ell_k.is_some_and(|k| k <= r.ell_end) && t.coupling >= self.options.floor)
            .map(|t| {
                let how = if t.coupling > t.coupling0.abs() {
                    "grew"
                } else {
                    "decayed"
                };
                format!(
                    "{} {how} to {:.3} and stopped at its momentum cut-off ell_k = {:.2}",
                    t.name,
                    t.coupling,
                    t.ell_k.unwrap_or(f64::NAN)
                )
            })
            .collect();
        if cut.is_empty() {
            return format!(
                "every coupling decayed by ell = {:.4}: gapless (stable fixed point)",
                r.ell_end
            );
        }
        let rest = if cut.len() == r.terms.len() {
            "no term flows past its cut-off".to_string()
        } else {
            format!("every other coupling decayed by ell = {:.4}", r.ell_end)
        };
        format!("{}; {rest}: gapless (stable fixed point)", cut.join("; "))
    }

    /// A short outcome for figure titles.
    pub fn headline_short(&self) -> String {
        let r = &self.result;
        match (r.outcome, &r.winner, r.ell_star) {
            (Outcome::Strong, Some(w), Some(l)) => format!("{w} wins at ell* = {l:.3}"),
            (Outcome::Spinful, Some(w), Some(l)) => {
                format!("{w} (spinful) strong at ell* = {l:.3}")
            }
            (o, _, _) => o.word().to_string(),
        }
    }

    /// The parameter point as `name = value` pairs.
    pub fn point_text(&self) -> String {
        format!(
            "At {}.",
            crate::output::labelled_point(&self.parameters, &self.parameter_labels)
        )
    }

    /// The same report with the labels and units of `params` (figures name
    /// the parameters by them; the JSON records them).
    pub fn with_labels(mut self, params: &crate::model::ParamSet) -> Self {
        self.parameter_labels = params.labels_json();
        self
    }

    /// The same report with a note per listed term and declared symmetry
    /// it breaks at the point, and per Z_n that V breaks there (the notes
    /// of `dims`, [`crate::search::breaks`]). An unphysical point gets
    /// none: the symmetries cannot be checked where V is not valid.
    pub fn with_symmetry_notes(
        mut self,
        sys: &crate::core::system::System,
        point: &[f64],
    ) -> Result<Self, Error> {
        if self.result.outcome != Outcome::Unphysical {
            let notes = crate::search::breaks::notes_at(sys, point)?;
            self.notes.extend(notes);
        }
        Ok(self)
    }

    /// Write `summary.json`, `trajectory.csv`, `terms.csv` and the figures
    /// into `dir` (the figure draws the default terms, see [`PlotTerms`]).
    pub fn write_dir(&self, dir: &Path) -> Result<(), Error> {
        self.write_dir_with(dir, PlotTerms::default())
    }

    /// [`FlowReport::write_dir`] with a choice of the terms drawn.
    pub fn write_dir_with(&self, dir: &Path, plot_terms: PlotTerms) -> Result<(), Error> {
        std::fs::create_dir_all(dir).map_err(|e| Error::io(dir, e))?;
        output::write_atomic(
            &dir.join("trajectory.csv"),
            self.trajectory_csv()?.as_bytes(),
        )?;
        crate::flow::report::figure::write(self, &dir.join("flow"), plot_terms)?;
        // The terms table also as CSV: summary.json nests it.
        output::write_atomic(
            &dir.join("terms.csv"),
            output::csv::render(&output::Report::csv_table(self))?.as_bytes(),
        )?;
        output::write_atomic(&dir.join("summary.json"), output::to_json(self)?.as_bytes())
    }

    /// The trajectory as CSV: `ell`, then `coupling:<name>` and `dimension:<name>`
    /// for every channel.
    pub fn trajectory_csv(&self) -> Result<String, Error> {
        let names: Vec<&str> = self.result.terms.iter().map(|t| t.name.as_str()).collect();
        let mut headers = vec!["ell".to_string()];
        headers.extend(names.iter().map(|n| format!("coupling:{n}")));
        headers.extend(names.iter().map(|n| format!("dimension:{n}")));
        let mut t = Table::with_headers("trajectory", headers);
        for s in &self.result.samples {
            let mut row = vec![format!("{}", s.ell)];
            row.extend(s.couplings.iter().map(|x| format!("{x}")));
            row.extend(s.dimensions.iter().map(|x| format!("{x}")));
            t.push(row);
        }
        output::csv::render(&t)
    }
}

impl FlowReport {
    /// The table for people (text, Markdown, LaTeX): the winner marked on
    /// its name, numbers rounded, "-" where a term has no momentum.
    fn people_table(&self) -> Table {
        let mut t = Table::new(
            "terms (start -> end of the flow)",
            &[
                "term", "origin", "spin", "y0", "Delta0", "y", "Delta", "k", "ell_k",
            ],
        );
        for c in &self.result.terms {
            let mark = if self.result.winner.as_deref() == Some(c.name.as_str()) {
                " (winner)"
            } else {
                ""
            };
            t.push(vec![
                format!("{}{mark}", c.name),
                c.parents
                    .clone()
                    .map_or(c.origin.clone(), |p| p.to_string()),
                c.spin.clone(),
                format!("{:.4e}", c.coupling0),
                format!("{:.6}", c.dimension0),
                format!("{:.4e}", c.coupling),
                format!("{:.6}", c.dimension),
                c.momentum.map_or("-".into(), |k| format!("{k:.4}")),
                c.ell_k.map_or("-".into(), |l| format!("{l:.3}")),
            ]);
        }
        t
    }
}

impl Report for FlowReport {
    fn title(&self) -> String {
        format!("RG flow: {}", self.model)
    }

    fn facts(&self) -> Vec<(String, String)> {
        let r = &self.result;
        let mut f = vec![
            (
                "parameters".to_string(),
                output::labelled_parameters_fact(&self.parameters, &self.parameter_labels),
            ),
            ("outcome".to_string(), r.outcome.word().to_string()),
            ("summary".to_string(), self.headline()),
        ];
        f.extend(super::stages::facts(r));
        if !r.commuting_with_winner.is_empty() {
            f.push((
                "commute with winner".into(),
                r.commuting_with_winner.join(", "),
            ));
        }
        if !r.suppressed.is_empty() {
            f.push(("suppressed by winner".into(), r.suppressed.join(", ")));
        }
        f.push((
            "options".to_string(),
            format!(
                "ell_max={}, y_strong={}, closure={}, rtol={:e}",
                self.options.ell_max,
                self.options.y_strong,
                match self.options.closure {
                    Closure::Pairs => match r.closure_range {
                        Some(range) => format!(
                            "pairs (bound {}, range {range} wires)",
                            self.options.closure_bound
                        ),
                        None => format!("pairs (bound {})", self.options.closure_bound),
                    },
                    Closure::None => "none".to_string(),
                },
                self.options.rtol
            ),
        ));
        if let Some(q) = &r.quadrature {
            f.push((
                "quadrature".into(),
                format!(
                    "infinite array: D(q) carried on {} points (bare dimensions: error estimate {:.1e}, tolerance {:.0e}{})",
                    q.points,
                    q.error_estimate,
                    q.tolerance,
                    q.verdict(", ")
                ),
            ));
        }
        if let Some(c) = &r.flow_quadrature {
            f.push(("flow quadrature".into(), check_fact(c)));
        }
        f.push((
            "steps".into(),
            format!("{} (D K D drift {:.1e})", r.steps, r.dkd_drift),
        ));
        f
    }

    fn tables(&self) -> Vec<Table> {
        vec![self.people_table()]
    }

    /// The machine-readable table: plain term names (the winner is the
    /// `winner` column, not a mark on the name), numbers in the shortest
    /// round-trip form, and an empty cell where a term has no momentum.
    fn csv_table(&self) -> Table {
        let mut t = Table::new(
            "terms (start -> end of the flow)",
            &[
                "name",
                "origin",
                "spin",
                "coupling0",
                "dimension0",
                "coupling",
                "dimension",
                "momentum",
                "ell_k",
                "winner",
            ],
        );
        for c in &self.result.terms {
            let winner = self.result.winner.as_deref() == Some(c.name.as_str());
            t.push(vec![
                c.name.clone(),
                c.parents
                    .clone()
                    .map_or(c.origin.clone(), |p| p.to_string()),
                c.spin.clone(),
                format!("{}", c.coupling0),
                format!("{}", c.dimension0),
                format!("{}", c.coupling),
                format!("{}", c.dimension),
                c.momentum.map_or(String::new(), |k| format!("{k}")),
                c.ell_k.map_or(String::new(), |l| format!("{l}")),
                winner.to_string(),
            ]);
        }
        t
    }

    fn notes(&self) -> Vec<String> {
        self.notes.clone()
    }
}

/// The estimates of a quadrature check: "2.1e-9 for the final dimensions
/// and 3.0e-9 for ell*".
fn check_estimates(c: &QuadratureCheck) -> String {
    let mut s = format!("{:.1e} for the final dimensions", c.dimension_error);
    if let Some(e) = c.ell_star_error {
        s.push_str(&format!(" and {e:.1e} for ell*"));
    }
    s
}

/// What the estimate is measured against.
fn check_against(c: &QuadratureCheck) -> String {
    match c.rule {
        RuleChoice::Fixed => format!(
            "twice the difference from the flow on {} points",
            c.compared_with
        ),
        RuleChoice::Refined if c.method == CheckMethod::Estimate => format!(
            "estimated along the flow against the rule of {} points",
            c.compared_with
        ),
        RuleChoice::Refined => format!("against the flow on {} points", c.compared_with),
    }
}

/// The text fact stating the flow's quadrature check, in the form of the
/// bare rule's: points, estimate, tolerance.
fn check_fact(c: &QuadratureCheck) -> String {
    let rule = match (c.rule, c.refinements) {
        (RuleChoice::Fixed, _) => format!("{} points (given)", c.points),
        (RuleChoice::Refined, 0) => format!("{} points", c.points),
        (RuleChoice::Refined, 1) => format!("{} points (refined once)", c.points),
        (RuleChoice::Refined, k) => format!("{} points (refined {k} times)", c.points),
    };
    format!(
        "{rule}, relative error estimate {} ({}; tolerance {:.0e}{}{})",
        check_estimates(c),
        check_against(c),
        c.tolerance,
        if c.same_outcome {
            ""
        } else {
            ", the two flows end differently"
        },
        if c.converged { "" } else { ", NOT converged" }
    )
}

/// The note of a quadrature check that did not pass.
fn check_note(c: &QuadratureCheck) -> String {
    let mut body = format!(
        "its relative error estimate is {} ({}; tolerance {:.0e})",
        check_estimates(c),
        check_against(c),
        c.tolerance
    );
    if !c.same_outcome {
        body.push_str(
            ", and the two flows do not even end the same way (outcome, winner or flowing terms)",
        );
    }
    match (c.rule, c.stopped) {
        (RuleChoice::Fixed, _) => format!(
            "the infinite array's flow on the {} points given (--q-points or flow.q_points) is not converged: {body}; choose more points, or leave the number of points to the refinement",
            c.points
        ),
        (_, Some(StoppedBy::Cap)) => format!(
            "the infinite array's flow is not converged in q: the refinement stopped at the limit of {} points, where {body}; D(q) is probably close to singular at some q",
            c.points
        ),
        (_, _) => format!(
            "the infinite array's flow is not converged in q: doubling the points to {} did not halve the difference, so it is not the quadrature's error alone; {body}; it is probably the integrator's error: tighten --rtol",
            c.points
        ),
    }
}

/// Which terms the flow figure draws (`--plot-terms`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PlotTerms {
    /// Every channel.
    All,
    /// The model's listed terms (and the winner).
    Listed,
    /// The listed terms, the winner, and the N generated terms with the
    /// largest |y| anywhere on the flow.
    Largest(usize),
}

impl Default for PlotTerms {
    fn default() -> PlotTerms {
        PlotTerms::Largest(6)
    }
}

/// The flow figure: |y| (log axis) and Delta against ell.
pub mod figure {
    use super::{FlowReport, PlotTerms, METHOD_NOTE};
    use crate::error::Error;
    use crate::flow::FlowResult;
    use crate::plot::{flow_figure, FlowFigure, FlowSeries};
    use std::path::Path;

    /// The channels drawn, in their order: listed terms and the winner
    /// always, generated ones by their largest |y| on the flow (ties by
    /// order, so the choice is deterministic).
    pub fn chosen(r: &FlowResult, which: PlotTerms) -> Vec<usize> {
        let keep = |i: usize| r.terms[i].origin == "listed" || r.winner_index == Some(i);
        let n = r.terms.len();
        let extra = match which {
            PlotTerms::All => return (0..n).collect(),
            PlotTerms::Listed => 0,
            PlotTerms::Largest(k) => k,
        };
        let peak = |i: usize| {
            r.samples
                .iter()
                .map(|s| s.couplings[i].abs())
                .filter(|y| y.is_finite())
                .fold(0.0, f64::max)
        };
        let mut generated: Vec<usize> = (0..n).filter(|&i| !keep(i)).collect();
        generated.sort_by(|&a, &b| peak(b).total_cmp(&peak(a)).then(a.cmp(&b)));
        generated.truncate(extra);
        let mut out: Vec<usize> = (0..n).filter(|&i| keep(i)).collect();
        out.extend(generated);
        out.sort_unstable();
        out
    }

    /// Write `<stem>.png`, `.svg` and `.pdf`.
    pub fn write(report: &FlowReport, stem: &Path, which: PlotTerms) -> Result<(), Error> {
        let r = &report.result;
        let drawn = chosen(r, which);
        let left_out = r.terms.len() - drawn.len();
        let series = drawn
            .iter()
            .map(|&i| (i, &r.terms[i]))
            .map(|(i, t)| FlowSeries {
                name: t.name.clone(),
                coupling: r.samples.iter().map(|s| s.couplings[i]).collect(),
                dimension: r.samples.iter().map(|s| s.dimensions[i]).collect(),
            })
            .collect();
        let data = FlowFigure {
            title: format!(
                "{}: {}{}",
                report.model,
                report.headline_short(),
                match (&r.phase, r.stages.len()) {
                    (Some(p), n) if n > 1 => format!("; phase {} after {n} stages", p.label),
                    _ => String::new(),
                }
            ),
            ell: r.samples.iter().map(|s| s.ell).collect(),
            series,
            winner: r
                .winner_index
                .and_then(|w| drawn.iter().position(|&i| i == w)),
            ell_star: r.ell_star,
            stages: r.stages.iter().skip(1).map(|s| s.ell).collect(),
            caption: format!(
                "{} {}{}",
                report.point_text(),
                METHOD_NOTE,
                left_out_note(left_out)
            ),
        };
        Ok(flow_figure(stem, &data)?)
    }

    /// " N generated terms with smaller |y| are not drawn (...)" or "".
    fn left_out_note(n: usize) -> String {
        match n {
            0 => String::new(),
            _ => format!(
                " {n} generated term(s) with smaller |y| not drawn (--plot-terms all draws every term)."
            ),
        }
    }
}
