//! `pinflow dims`: the fixed-point report at one point, or with `--wires`
//! the dimensions against array size.

use std::path::PathBuf;

use clap::Args;

use super::common::{
    check_outputs, emit_report, options_json, provenance, stamp_dir, FigureStyleArg, FormatArg,
    PointArgs,
};
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
    /// How figures look: `screen` (default) or `paper` (3.4 in wide PDF,
    /// 8-9 pt text, title and caption in a `.txt` beside each figure).
    #[arg(long, value_enum, default_value_t = FigureStyleArg::Screen)]
    pub figure_style: FigureStyleArg,
    /// Evaluate even above 1024 fields on the dense path (work grows like N^3).
    #[arg(long)]
    pub force: bool,
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
    check_outputs(&args.point, args.output.as_deref(), args.out.as_deref())?;
    args.figure_style.apply();
    let format = args.format.into();
    if !args.wires.is_empty() {
        let (model, _) = super::common::load_model(&args.point.model)?;
        let point = model.point_with(&args.point.set, "--set")?;
        let report = ConvergenceReport::build(&model, &point, &args.wires, "--wires")?;
        let wires: Vec<String> = args
            .wires
            .iter()
            .map(|w| match w {
                Wires::Finite(n) => n.to_string(),
                Wires::Infinite => "infinite".to_string(),
            })
            .collect();
        let options = serde_json::json!({ "wires": wires });
        let prov = provenance("dims", &args.point.model, &model.params, &point, options)?;
        if let Some(dir) = &args.out {
            report.write_dir(dir)?;
            stamp_dir(dir, &prov)?;
        }
        return emit_report(
            args.output.as_deref(),
            args.point.run_json.as_deref(),
            &output::render(&report, format)?,
            format,
            &prov,
        );
    }
    let (sys, point) = super::common::load_point(&args.point)?;
    crate::dims::check_size(&sys, args.force)?;
    let opts = DimsOptions {
        pins: args.pin.clone(),
        ..Default::default()
    };
    let mut report = DimsReport::build_opts(&sys, &point, &opts)?;
    crate::search::breaks::annotate(&sys, &point, &mut report)?;
    let options = options_json(&serde_json::json!({ "pin": args.pin }))?;
    let prov = provenance(
        "dims",
        &args.point.model,
        &sys.model.params,
        &point,
        options,
    )?;
    emit_report(
        args.output.as_deref(),
        args.point.run_json.as_deref(),
        &output::render(&report, format)?,
        format,
        &prov,
    )
}
