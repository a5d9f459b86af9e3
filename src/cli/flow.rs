//! `pinflow flow`: one flow at one point, its summary and (with `--out`)
//! its files.

use std::path::PathBuf;

use clap::Args;

use super::common::{check_outputs, emit, load_point, FlowFlags, FormatArg, PointArgs};
use crate::core::system::System;
use crate::error::{Error, InputError};
use crate::flow::competitors::{flow_once, CompetitorOptions};
use crate::flow::report::FlowReport;
use crate::flow::{FlowOptions, Outcome};
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
    check_outputs(&[&args.point.model], None, args.out.as_deref())?;
    let (sys, point) = load_point(&args.point)?;
    let opts = FlowOptions::resolve(&sys.model, &args.flow.overrides())?;
    let comp = args.competitors.resolve(&sys)?;
    let result = flow_once(&sys, &point, &opts, comp)?;
    let unphysical = result.outcome == Outcome::Unphysical;
    let failed = result.outcome == Outcome::Failed;
    let names = sys.model.params.names();
    let report = FlowReport::new(&sys.model.name, names, &point, result, opts);
    if let Some(dir) = &args.out {
        report.write_dir(dir)?;
    }
    emit(None, &output::render(&report, args.format.into())?)?;
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
