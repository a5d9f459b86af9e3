//! `pinflow dims`: the fixed-point report at one point, or with `--wires`
//! the dimensions against array size.

use std::path::PathBuf;

use clap::Args;

use super::common::{check_outputs, emit, FormatArg, PointArgs};
use crate::dims::convergence::ConvergenceReport;
use crate::dims::{DimsOptions, DimsReport};
use crate::error::Error;
use crate::model::Wires;
use crate::output;

/// `pinflow dims`.
#[derive(Debug, Args)]
pub struct DimsArgs {
    #[command(flatten)]
    pub point: PointArgs,
    /// Output format.
    #[arg(long, value_enum, default_value_t = FormatArg::Text)]
    pub format: FormatArg,
    /// Write to this file instead of standard output (`-` is standard output).
    #[arg(long, short = 'o', value_name = "FILE")]
    pub output: Option<PathBuf>,
    /// Arrays: every term's dimension for these array sizes instead, e.g.
    /// `4,8,16,32,infinite` (the model's boundary is kept).
    #[arg(long, value_name = "LIST", value_delimiter = ',', value_parser = parse_wires)]
    pub wires: Vec<Wires>,
    /// With --wires: also write convergence.png/svg, .csv and .json into this directory.
    #[arg(long, value_name = "DIR", requires = "wires")]
    pub out: Option<PathBuf>,
    /// Pin these terms (every translate in arrays) and report every term's
    /// dimension in the residual theory, or that it is disordered (repeatable:
    /// `--pin a --pin b`, or `--pin a,b`).
    #[arg(
        long,
        value_name = "NAME",
        value_delimiter = ',',
        conflicts_with = "wires"
    )]
    pub pin: Vec<String>,
}

/// Parse one entry of `--wires`: a whole number of wires or `infinite`.
fn parse_wires(s: &str) -> Result<Wires, String> {
    let s = s.trim();
    if s == "infinite" {
        return Ok(Wires::Infinite);
    }
    match s.parse::<usize>() {
        Ok(0) => Err("a number of wires must be at least 1".to_string()),
        Ok(w) => Ok(Wires::Finite(w)),
        Err(_) => Err(format!(
            "expected whole numbers of wires or `infinite`, separated by commas, found `{s}`"
        )),
    }
}

pub(super) fn run(args: DimsArgs) -> Result<(), Error> {
    check_outputs(
        &[&args.point.model],
        args.output.as_deref(),
        args.out.as_deref(),
    )?;
    let format = args.format.into();
    if !args.wires.is_empty() {
        let (model, _) = super::common::load_model(&args.point.model)?;
        let point = model.point_with(&args.point.set, "--set")?;
        let report = ConvergenceReport::build(&model, &point, &args.wires, "--wires")?;
        if let Some(dir) = &args.out {
            report.write_dir(dir)?;
        }
        return emit(args.output.as_deref(), &output::render(&report, format)?);
    }
    let (sys, point) = super::common::load_point(&args.point)?;
    let opts = DimsOptions {
        pins: args.pin.clone(),
        ..Default::default()
    };
    let report = DimsReport::build_opts(&sys, &point, &opts)?;
    emit(args.output.as_deref(), &output::render(&report, format)?)
}
