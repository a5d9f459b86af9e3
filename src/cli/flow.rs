//! `pinflow flow`: one flow at one point, its summary and (with `--out`)
//! its files.

use std::path::PathBuf;

use clap::Args;

use super::common::{
    check_outputs, emit_report, load_point, options_json, provenance, stamp_dir, FigureStyleArg,
    FlowFlags, FormatArg, PointArgs,
};
use crate::error::{Error, InputError};
use crate::flow::report::{FlowReport, PlotTerms};
use crate::flow::{Flow, FlowOptions, Outcome};
use crate::output;

/// `pinflow flow`.
#[derive(Debug, Args)]
pub struct FlowArgs {
    #[command(flatten)]
    pub point: PointArgs,
    #[command(flatten)]
    pub flow: FlowFlags,
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
}

pub(super) fn run(args: FlowArgs) -> Result<(), Error> {
    check_outputs(None, args.out.as_deref())?;
    args.figure_style.apply();
    let (sys, point) = load_point(&args.point)?;
    let opts = FlowOptions::resolve(&sys.model, &args.flow.overrides())?;
    let result = Flow::new(&sys, opts.clone()).run(&point)?;
    let unphysical = result.outcome == Outcome::Unphysical;
    let failed = result.outcome == Outcome::Failed;
    let names = sys.model.params.names();
    let prov = provenance(
        "flow",
        &args.point.model,
        names,
        &point,
        options_json(&opts)?,
    )?;
    let report = FlowReport::new(&sys.model.name, names, &point, result, opts);
    if let Some(dir) = &args.out {
        report.write_dir_with(dir, args.plot_terms)?;
        stamp_dir(dir, &prov)?;
    }
    let format = args.format.into();
    emit_report(None, &output::render(&report, format)?, format, &prov)?;
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
