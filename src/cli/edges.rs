//! `pinflow edges`: what a pinned set of terms leaves at one point.

use std::path::PathBuf;

use clap::Args;

use super::common::{
    check_outputs, emit_report, load_point, provenance, FlowFlags, FormatArg, PointArgs,
};
use crate::edges::pins::{self, Selection};
use crate::edges::{analyse, report::EdgesReport};
use crate::error::Error;
use crate::flow::FlowOptions;
use crate::output;

/// `pinflow edges`.
#[derive(Debug, Args)]
pub struct EdgesArgs {
    #[command(flatten)]
    pub point: PointArgs,
    /// Pin every translate of this term (repeatable) [default: flow at the
    /// point and pin the winner plus the listed terms that commute with it
    /// and with each other].
    #[arg(long = "pin", value_name = "NAME")]
    pub pin: Vec<String>,
    /// Analyse even above 512 fields (the exact theory's work grows like
    /// N^3), and flow with a pairs closure above its work limit.
    #[arg(long)]
    pub force: bool,
    /// Wires in the window at each end of an open array [default: the
    /// smallest window holding a translate of every pinned term].
    #[arg(long, value_name = "W")]
    pub window: Option<usize>,
    #[command(flatten)]
    pub flow: FlowFlags,
    /// Output format.
    #[arg(long, value_enum, default_value_t = FormatArg::Text)]
    pub format: FormatArg,
    /// Write to this file instead of standard output (`-` is standard output).
    #[arg(long, short = 'o', value_name = "FILE")]
    pub output: Option<PathBuf>,
}

pub(super) fn run(args: EdgesArgs) -> Result<(), Error> {
    check_outputs(&args.point, args.output.as_deref(), None)?;
    let (sys, point) = load_point(&args.point)?;
    crate::edges::check_size(&sys, args.force)?;
    // Flow options are checked even when --pin makes the flow unnecessary.
    let opts = FlowOptions::resolve(&sys.model, &args.flow.overrides())?;
    if args.pin.is_empty() {
        let generate = opts.closure == crate::flow::Closure::Pairs;
        crate::flow::channels::check_closure(&sys, generate, opts.closure_range, args.force)?;
    }
    // The flow options matter only when the flow chooses the pinned set.
    let opts_json = match args.pin.is_empty() {
        true => super::common::options_json(&opts)?,
        false => serde_json::Value::Null,
    };
    let selection: Selection = if args.pin.is_empty() {
        pins::from_flow(&sys, &point, opts)?
    } else {
        pins::from_names(&sys, &args.pin)?
    };
    let analysis = analyse(&sys, &selection.pinned, args.window)?;
    let report = EdgesReport::new(&sys, &point, &selection, &analysis);
    let options = serde_json::json!({ "pin": args.pin, "window": args.window, "flow": opts_json });
    let prov = provenance(
        "edges",
        &args.point.model,
        &sys.model.params,
        &point,
        options,
    )?;
    let format = args.format.into();
    let text = output::render(&report, format)?;
    emit_report(
        args.output.as_deref(),
        args.point.run_json.as_deref(),
        &text,
        format,
        &prov,
    )
}
