//! `pinflow flow`: one flow at one point, its summary and (with `--out`)
//! its files.

use std::path::PathBuf;

use clap::Args;

use super::common::{check_outputs, emit, load_point, FlowFlags, FormatArg, PointArgs};
use crate::error::{Error, InputError};
use crate::flow::report::FlowReport;
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
    /// Build the pairs closure even when its estimated work is above the limit.
    #[arg(long)]
    pub force: bool,
}

pub(super) fn run(args: FlowArgs) -> Result<(), Error> {
    check_outputs(None, args.out.as_deref())?;
    let (sys, point) = load_point(&args.point)?;
    let opts = FlowOptions::resolve(&sys.model, &args.flow.overrides())?;
    let generate = opts.closure == crate::flow::Closure::Pairs;
    crate::flow::channels::check_closure(&sys, generate, opts.closure_range, args.force)?;
    let result = Flow::new(&sys, opts.clone()).run(&point)?;
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
