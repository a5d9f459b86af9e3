//! `pinflow flow`: one flow at one point, its summary and (with `--out`)
//! its files.

use std::path::PathBuf;
use std::time::Duration;

use clap::Args;

use super::common::{
    check_outputs, emit_report, load_point, options_json, provenance, stamp_dir, FigureStyleArg,
    FlowFlags, FormatArg, PointArgs,
};
use crate::core::system::System;
use crate::error::{Error, InputError};
use crate::flow::competitors::{flow_once, CompetitorOptions};
use crate::flow::report::{FlowReport, PlotTerms};
use crate::flow::{Flow, FlowOptions, Outcome};
use crate::output;
use crate::search::SymmetryChoice;

/// `pinflow flow`.
#[derive(Debug, Args)]
pub struct FlowArgs {
    #[command(flatten)]
    pub point: PointArgs,
    #[command(flatten)]
    pub flow: FlowFlags,
    #[command(flatten)]
    pub competitors: CompetitorFlags,
    /// Output format of the summary on standard output.
    #[arg(long, value_enum, default_value_t = FormatArg::Text)]
    pub format: FormatArg,
    /// Also write summary.json, trajectory.csv, flow.png and flow.svg into this directory.
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// How figures look: `screen` (default) or `paper` (3.4 in wide PDF,
    /// 8-9 pt text, title and caption in a `.txt` beside each figure).
    #[arg(long, value_enum, default_value_t = FigureStyleArg::Screen)]
    pub figure_style: FigureStyleArg,
    /// Terms the flow figure draws: `all`, `listed` (the model's terms and
    /// the winner), or N: the listed terms plus the N generated terms with
    /// the largest |y| [default 6]; the caption says how many are left out.
    #[arg(long, value_name = "all|listed|N", default_value = "6", value_parser = parse_plot_terms)]
    pub plot_terms: PlotTerms,
    /// Run work above its limits: a pairs closure above its estimated work,
    /// a dense flow above 512 fields, hunted competitors above theirs
    /// (docs/flow-options.md).
    #[arg(long)]
    pub force: bool,
    /// Off a terminal (a batch job's log), print one plain progress line of
    /// a forced pairs closure and of the flow's integration (ell reached of
    /// ell_max) to standard error every SECONDS (decimals allowed; 0: never).
    /// On a terminal a long flow shows a bar instead.
    #[arg(long, value_name = "SECONDS", default_value_t = 60.0, value_parser = parse_seconds)]
    pub progress_every: f64,
}

/// Hunted competitors in the flow (`flow` and `scan`).
#[derive(Debug, Clone, Default, Args)]
pub struct CompetitorFlags {
    /// At each point, every allowed local operator (charge 0, spin 0, the
    /// model's symmetries) with bare dimension <= DELTA that the model does
    /// not list joins the flow as a term `auto:<particle content>`
    /// [default: the model's [competitors] delta, else off].
    #[arg(long, value_name = "DELTA", allow_hyphen_values = true)]
    pub competitors: Option<f64>,
    /// Bare coupling of the hunted competitors [default: the smallest
    /// non-zero coupling of the model's terms at the point].
    #[arg(long, value_name = "Y", allow_hyphen_values = true,
          value_parser = super::hunt::parse_coupling)]
    pub competitor_coupling: Option<f64>,
    /// Arrays: the most consecutive wires a hunted competitor may touch
    /// [default: the widest model term, at least 2].
    #[arg(long, value_name = "R", allow_hyphen_values = true)]
    pub competitor_range: Option<i64>,
    /// Which of the model's [[symmetry]] tables filter the hunted
    /// competitors: all, none, or a comma-separated list of names.
    #[arg(long = "competitor-symmetry", value_name = "all|none|NAME,...",
          default_value = "all", value_parser = super::hunt::parse_symmetry)]
    pub symmetry: SymmetryChoice,
}

impl CompetitorFlags {
    /// The flags as given, for the provenance block.
    pub(crate) fn recorded(&self) -> serde_json::Value {
        serde_json::json!({
            "competitors": self.competitors,
            "competitor_coupling": self.competitor_coupling,
            "competitor_range": self.competitor_range,
            "competitor_symmetry": format!("{:?}", self.symmetry),
        })
    }

    /// The options, over the model's [competitors] table (None: off).
    pub fn resolve(&self, sys: &System) -> Result<Option<CompetitorOptions>, Error> {
        let range = match self.competitor_range {
            Some(r) if r < 1 => {
                return Err(InputError::new(
                    "command line",
                    "--competitor-range",
                    format!("expected a number of consecutive wires (an integer >= 1), found {r}"),
                )
                .into())
            }
            r => r.map(|r| r as usize),
        };
        let opts = CompetitorOptions::resolve(
            &sys.model,
            self.competitors,
            self.competitor_coupling,
            range,
        )?;
        Ok(opts.map(|o| CompetitorOptions {
            symmetry: self.symmetry.clone(),
            ..o
        }))
    }
}

pub(super) fn run(args: FlowArgs) -> Result<(), Error> {
    check_outputs(&args.point, None, args.out.as_deref())?;
    args.figure_style.apply();
    let (sys, point) = load_point(&args.point)?;
    let opts = FlowOptions::resolve(&sys.model, &args.flow.overrides())?;
    crate::flow::limits::check_work(&sys, &opts, args.force)?;
    let comp = args
        .competitors
        .resolve(&sys)?
        .map(|c| c.forced(args.force));
    let result = match comp {
        None => {
            let every = Duration::from_secs_f64(args.progress_every);
            let plan = super::common::plan_with_progress(&sys, &opts, every);
            let flow = Flow::with_plan(&sys, plan, opts.clone());
            super::common::flow_with_progress(&flow, &point, every)?
        }
        comp => flow_once(&sys, &point, &opts, comp)?,
    };
    let unphysical = result.outcome == Outcome::Unphysical;
    let failed = result.outcome == Outcome::Failed;
    let names = sys.model.params.names();
    let options = options_json(&serde_json::json!({
        "flow": opts,
        "competitors": args.competitors.recorded(),
    }))?;
    let prov = provenance(
        "flow",
        &args.point.model,
        &sys.model.params,
        &point,
        options,
    )?;
    let report = FlowReport::new(&sys.model.name, names, &point, result, opts)
        .with_labels(&sys.model.params)
        .with_symmetry_notes(&sys, &point)?;
    if let Some(dir) = &args.out {
        report.write_dir_with(dir, args.plot_terms)?;
        stamp_dir(dir, &prov)?;
    }
    let format = args.format.into();
    emit_report(
        None,
        args.point.run_json.as_deref(),
        &output::render(&report, format)?,
        format,
        &prov,
    )?;
    let msg = report.result.message.clone().unwrap_or_default();
    if unphysical {
        return Err(Error::Input(InputError::new(&sys.model.file, "", msg)));
    }
    if failed {
        // The report (outcome "failed") is printed; the run still failed.
        return Err(Error::Numerical(format!(
            "{}: the flow failed at {}: {msg}",
            sys.model.file,
            sys.model.params.describe(&point)
        )));
    }
    Ok(())
}

/// `--plot-terms all|listed|N`.
fn parse_plot_terms(s: &str) -> Result<PlotTerms, String> {
    match s.trim() {
        "all" => Ok(PlotTerms::All),
        "listed" => Ok(PlotTerms::Listed),
        n => n.parse::<usize>().map(PlotTerms::Largest).map_err(|_| {
            format!("expected `all`, `listed` or a number of generated terms, found `{s}`")
        }),
    }
}

/// `--progress-every SECONDS`: a finite number >= 0 (decimals allowed).
fn parse_seconds(s: &str) -> Result<f64, String> {
    match s.trim().parse::<f64>() {
        Ok(x) if x.is_finite() && (0.0..=1e9).contains(&x) => Ok(x),
        _ => Err(format!(
            "expected a number of seconds from 0 to 1e9 (decimals allowed), found `{s}`"
        )),
    }
}
