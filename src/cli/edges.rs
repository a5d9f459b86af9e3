//! `pinflow edges`: what a pinned set of terms leaves at one point.

use std::path::PathBuf;

use clap::Args;

use super::common::{check_outputs, emit, load_point, FlowFlags, FormatArg, PointArgs};
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
    check_outputs(&[&args.point.model], args.output.as_deref(), None)?;
    let (sys, point) = load_point(&args.point)?;
    // Flow options are checked even when --pin makes the flow unnecessary.
    let opts = FlowOptions::resolve(&sys.model, &args.flow.overrides())?;
    let selection: Selection = if args.pin.is_empty() {
        pins::from_flow(&sys, &point, opts)?
    } else {
        pins::from_names(&sys, &args.pin)?
    };
    let analysis = analyse(&sys, &selection.pinned, args.window)?;
    let report = EdgesReport::new(&sys, &point, &selection, &analysis);
    emit(
        args.output.as_deref(),
        &output::render(&report, args.format.into())?,
    )
}
