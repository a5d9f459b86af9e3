//! `pinflow hunt`: the exhaustive operator search at one point.

use std::io::IsTerminal;
use std::path::PathBuf;

use clap::{Args, ValueEnum};
use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};

use super::common::{
    check_outputs, emit, emit_report, load_point, provenance, FormatArg, PointArgs,
};
use crate::error::Error;
use crate::search::{
    emit_terms, hunt_with_progress, render, smallest_coupling, ChargeFilter, HuntFlags,
    HuntOptions, MomentumFilter, Progress, SpinFilter, SymmetryChoice, DEFAULT_LIMIT,
    FORCED_MAX_LISTED, MAX_LISTED,
};

/// `pinflow hunt`.
#[derive(Debug, Args)]
pub struct HuntArgs {
    #[command(flatten)]
    pub point: PointArgs,
    /// Largest scaling dimension listed (2: the relevant operators).
    #[arg(long, value_name = "DELTA", default_value = "2", allow_hyphen_values = true,
          value_parser = parse_max_dim)]
    pub max_dim: f64,
    /// Charge t.m of the operators: an integer, or `any`.
    #[arg(long, value_name = "Q", default_value = "0", allow_hyphen_values = true,
          value_parser = parse_charge)]
    pub charge: ChargeFilter,
    /// Conformal spin: 0 (operators that can pin on their own) or any.
    #[arg(long, value_enum, default_value = "0")]
    pub spin: SpinArg,
    /// Arrays: the most consecutive wires an operator may touch [default:
    /// the widest model term, at least 2].
    #[arg(long, value_name = "R", allow_hyphen_values = true,
          value_parser = parse_range)]
    pub range: Option<usize>,
    /// Momentum conservation, when the model gives momenta [default: conserved].
    #[arg(long, value_enum)]
    pub momentum: Option<MomentumArg>,
    /// Search even when the estimated number of lattice points is above the
    /// limit (at most 4000000 operators are still kept; a bar shows the
    /// points enumerated on a terminal), and on the dense path above 1024
    /// fields.
    #[arg(long)]
    pub force: bool,
    /// Print the operators that are not yet model terms as [[term]] blocks
    /// for the model file, instead of the report.
    #[arg(long, conflicts_with = "format")]
    pub emit_terms: bool,
    /// Which of the model's [[symmetry]] tables filter the operators: all,
    /// none, or a comma-separated list of names.
    #[arg(long, value_name = "all|none|NAME,...", default_value = "all",
          value_parser = parse_symmetry)]
    pub symmetry: SymmetryChoice,
    /// With --emit-terms: the bare coupling written for every term
    /// [default: the smallest non-zero coupling of the model's terms].
    #[arg(long, value_name = "Y", allow_hyphen_values = true, requires = "emit_terms",
          value_parser = parse_coupling)]
    pub coupling: Option<f64>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = FormatArg::Text)]
    pub format: FormatArg,
    /// Write to this file instead of standard output (`-` is standard output).
    #[arg(long, short = 'o', value_name = "FILE")]
    pub output: Option<PathBuf>,
}

/// Which conformal spins to keep.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum SpinArg {
    /// Spin zero only: the operators that can pin a mode on their own.
    #[value(name = "0")]
    Zero,
    /// Every spin.
    Any,
}

/// Momentum conservation (models that give momenta).
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum MomentumArg {
    /// Only operators whose momentum mismatch vanishes (within the tolerance).
    Conserved,
    /// Every momentum.
    Any,
}

/// Parse `--max-dim`: a finite number > 0.
fn parse_max_dim(s: &str) -> Result<f64, String> {
    let x: f64 = s
        .trim()
        .parse()
        .map_err(|_| format!("expected a number > 0 (a scaling dimension), found `{s}`"))?;
    if x.is_finite() && x > 0.0 {
        Ok(x)
    } else {
        Err(format!(
            "expected a finite number > 0 (a scaling dimension), found `{s}`"
        ))
    }
}

/// Parse `--range`: an integer >= 1.
fn parse_range(s: &str) -> Result<usize, String> {
    match s.trim().parse::<i64>() {
        Ok(r) if r >= 1 => Ok(r as usize),
        _ => Err(format!(
            "expected a number of consecutive wires (an integer >= 1), found `{s}`"
        )),
    }
}

/// Parse `--charge`: an integer or `any`.
fn parse_charge(s: &str) -> Result<ChargeFilter, String> {
    let t = s.trim();
    if t == "any" {
        return Ok(ChargeFilter::Any);
    }
    t.parse::<i64>()
        .map(ChargeFilter::Exactly)
        .map_err(|_| format!("expected an integer charge t.m or `any`, found `{s}`"))
}

/// Parse `--symmetry`: all, none, or names separated by commas.
pub(super) fn parse_symmetry(s: &str) -> Result<SymmetryChoice, String> {
    match s.trim() {
        "all" => Ok(SymmetryChoice::All),
        "none" => Ok(SymmetryChoice::None),
        list => {
            let names: Vec<String> = list.split(',').map(|n| n.trim().to_string()).collect();
            if names.iter().any(|n| n.is_empty()) {
                return Err(format!(
                    "expected all, none or symmetry names separated by commas, found `{s}`"
                ));
            }
            Ok(SymmetryChoice::Names(names))
        }
    }
}

/// Parse a bare coupling: a finite number.
pub(super) fn parse_coupling(s: &str) -> Result<f64, String> {
    match s.trim().parse::<f64>() {
        Ok(y) if y.is_finite() => Ok(y),
        _ => Err(format!(
            "expected a finite number (a bare coupling y), found `{s}`"
        )),
    }
}

fn options(args: &HuntArgs) -> HuntOptions {
    HuntOptions {
        max_dim: args.max_dim,
        charge: args.charge,
        spin: match args.spin {
            SpinArg::Zero => SpinFilter::Zero,
            SpinArg::Any => SpinFilter::Any,
        },
        range: args.range,
        momentum: args.momentum.map(|m| match m {
            MomentumArg::Conserved => MomentumFilter::Conserved,
            MomentumArg::Any => MomentumFilter::Any,
        }),
        force: args.force,
        limit: DEFAULT_LIMIT,
        max_listed: MAX_LISTED,
        forced_max_listed: FORCED_MAX_LISTED,
        symmetry: args.symmetry.clone(),
        stop_above: None,
        flags: HuntFlags::HUNT,
    }
}

pub(super) fn run(args: HuntArgs) -> Result<(), Error> {
    check_outputs(&args.point, args.output.as_deref(), None)?;
    let (sys, point) = load_point(&args.point)?;
    let bar = ProgressBar::hidden();
    let on_terminal = std::io::stderr().is_terminal();
    let report = hunt_with_progress(&sys, &point, &options(&args), &mut |p| match p {
        // Only searches of a million points or more show a bar.
        Progress::Estimated(n) if on_terminal && n >= 1e6 => {
            bar.set_draw_target(ProgressDrawTarget::stderr());
            bar.set_length(n.min(u64::MAX as f64) as u64);
            bar.set_style(
                ProgressStyle::with_template("{bar:40} {pos}/~{len} points, {per_sec}, eta {eta}")
                    .unwrap_or_else(|_| ProgressStyle::default_bar()),
            );
        }
        Progress::Estimated(_) => {}
        Progress::Enumerated(n) => bar.set_position(n),
    });
    bar.finish_and_clear();
    let report = report?;
    if args.emit_terms {
        let y = args
            .coupling
            .unwrap_or_else(|| smallest_coupling(&sys, &point));
        return emit(args.output.as_deref(), &emit_terms(&report, &sys.model, y));
    }
    let prov = provenance(
        "hunt",
        &args.point.model,
        &sys.model.params,
        &point,
        recorded(&args),
    )?;
    let format = args.format.into();
    let text = render(&report, format)?;
    emit_report(
        args.output.as_deref(),
        args.point.run_json.as_deref(),
        &text,
        format,
        &prov,
    )
}

/// The hunt's options for the provenance block.
fn recorded(args: &HuntArgs) -> serde_json::Value {
    serde_json::json!({
        "max_dim": args.max_dim,
        "charge": match args.charge {
            ChargeFilter::Any => serde_json::Value::from("any"),
            ChargeFilter::Exactly(q) => serde_json::Value::from(q),
            ChargeFilter::Model => serde_json::Value::from("model"),
        },
        "spin": match args.spin { SpinArg::Zero => "0", SpinArg::Any => "any" },
        "range": args.range,
        "momentum": args.momentum.map(|m| match m {
            MomentumArg::Conserved => "conserved",
            MomentumArg::Any => "any",
        }),
        "symmetry": format!("{:?}", args.symmetry),
        "force": args.force,
    })
}
