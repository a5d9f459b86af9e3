//! Command-line interface: argument structs (clap derive) and the dispatch
//! from a parsed command to the library. `main.rs` only calls [`run`].
//!
//! Exit codes: 0 success, 1 a run failed (numerics, I/O), 2 bad input
//! (model file, flags, parameter point).

use std::path::PathBuf;

use clap::{Args, Parser, Subcommand};

use crate::dims::DimsReport;
use crate::error::{Error, InputError};
use crate::flow::options::FlowOverrides;
use crate::flow::report::FlowReport;
use crate::flow::{Flow, FlowOptions, Outcome};
use crate::output::{self, Format};
use crate::system::System;

/// Fixed-point data, RG flows and phase diagrams of coupled-wire and
/// Luttinger-liquid models.
#[derive(Debug, Parser)]
#[command(name = "pinflow", version, about, long_about = None)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// The subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Exact and fixed-point data of every term of a model at one parameter point.
    Dims(DimsArgs),
    /// Second-order RG flow of every term at one parameter point: which term
    /// reaches strong coupling first, and at what scale.
    Flow(FlowArgs),
    /// Flow every point of a line or plane of parameters and draw the phase
    /// diagram: which term wins where, and how fast.
    Scan(ScanArgs),
    /// Join the shard files of a scan (`scan --shard k/n`) into its full output.
    Merge(MergeArgs),
    /// List every local operator with scaling dimension up to a bound (an
    /// exhaustive lattice search), or certify that there is none.
    Hunt(HuntArgs),
    /// What a pinned set of terms leaves: gapped pairs, whether the bulk is
    /// fully gapped, and the K matrix, charges and filling at each end.
    Edges(EdgesArgs),
}

/// Options shared by commands that evaluate a model at one point.
#[derive(Debug, Args)]
pub struct PointArgs {
    /// The model file (TOML).
    pub model: PathBuf,
    /// Override a parameter, e.g. `--set lambda=0.4` (repeatable).
    #[arg(long = "set", value_name = "NAME=VALUE", value_parser = parse_assignment)]
    pub set: Vec<(String, f64)>,
}

/// `pinflow dims`.
#[derive(Debug, Args)]
pub struct DimsArgs {
    #[command(flatten)]
    pub point: PointArgs,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
    /// Write to this file instead of standard output (`-` is standard output).
    #[arg(long, short = 'o', value_name = "FILE")]
    pub output: Option<PathBuf>,
    /// Arrays: every term's dimension for these array sizes instead, e.g.
    /// `4,8,16,32,infinite` (the model's boundary is kept).
    #[arg(long, value_name = "LIST", value_delimiter = ',', value_parser = crate::convergence::parse_wires)]
    pub wires: Vec<crate::model::Wires>,
    /// With --wires: also write convergence.png/svg, .csv and .json into this directory.
    #[arg(long, value_name = "DIR", requires = "wires")]
    pub out: Option<PathBuf>,
}

/// `pinflow flow`.
#[derive(Debug, Args)]
pub struct FlowArgs {
    #[command(flatten)]
    pub point: PointArgs,
    #[command(flatten)]
    pub flow: FlowOverrides,
    /// Output format of the summary on standard output.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
    /// Also write summary.json, trajectory.csv, flow.png and flow.svg into this directory.
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
}

/// `pinflow scan`.
#[derive(Debug, Args)]
pub struct ScanArgs {
    #[command(flatten)]
    pub point: PointArgs,
    /// First axis: NAME=MIN:MAX:N, or NAME=MIN:MAX:N:log for log spacing
    /// [default: `x` of the model's [scan] table].
    #[arg(long, value_name = "AXIS")]
    pub x: Option<String>,
    /// Second axis, as --x [default: `y` of the model's [scan] table, if any].
    #[arg(long, value_name = "AXIS")]
    pub y: Option<String>,
    #[command(flatten)]
    pub flow: FlowOverrides,
    /// Output directory [default: out/<model file stem>].
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Compute only the K-th of N interleaved parts, into DIR/shard-K-of-N.csv
    /// (join the parts with `pinflow merge`).
    #[arg(long, value_name = "K/N", value_parser = crate::scan::parse_shard)]
    pub shard: Option<(usize, usize)>,
    /// Continue an interrupted scan without recomputing finished points.
    #[arg(long)]
    pub resume: bool,
    /// Number of worker threads [default: all cores].
    #[arg(long, value_name = "N")]
    pub threads: Option<usize>,
    /// No progress bar.
    #[arg(long, short = 'q')]
    pub quiet: bool,
    /// Run grids larger than the safety limit.
    #[arg(long)]
    pub force: bool,
    /// Format of the summary printed at the end.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
    /// What phase.png/svg is coloured by.
    #[arg(long, value_enum, default_value_t = ColorByArg::Phase)]
    pub color_by: ColorByArg,
}

/// What a scan's phase map is coloured by.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum ColorByArg {
    /// The phase of the final pinned set of the staged flow.
    Phase,
    /// The first term to reach strong coupling (the map before staging).
    Winner,
}

/// `pinflow merge`.
#[derive(Debug, Args)]
pub struct MergeArgs {
    /// The shard files (DIR/shard-K-of-N.csv), all N of them.
    #[arg(required = true)]
    pub shards: Vec<PathBuf>,
    /// Output directory [default: the directory of the first shard].
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Format of the summary printed at the end.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
    /// What phase.png/svg is coloured by.
    #[arg(long, value_enum, default_value_t = ColorByArg::Phase)]
    pub color_by: ColorByArg,
}

/// `pinflow hunt`.
#[derive(Debug, Args)]
pub struct HuntArgs {
    #[command(flatten)]
    pub point: PointArgs,
    /// Largest scaling dimension listed (2: the relevant operators).
    #[arg(long, value_name = "DELTA", default_value = "2", allow_hyphen_values = true,
          value_parser = crate::search::parse_max_dim)]
    pub max_dim: f64,
    /// Charge t.m of the operators: an integer, or `any`.
    #[arg(long, value_name = "Q", default_value = "0", allow_hyphen_values = true,
          value_parser = crate::search::parse_charge)]
    pub charge: crate::search::ChargeFilter,
    /// Conformal spin: 0 (operators that can pin on their own) or any.
    #[arg(long, value_enum, default_value = "0")]
    pub spin: crate::search::SpinFilter,
    /// Arrays: the most consecutive wires an operator may touch [default:
    /// the widest model term, at least 2].
    #[arg(long, value_name = "R", allow_hyphen_values = true,
          value_parser = crate::search::parse_range)]
    pub range: Option<usize>,
    /// Momentum conservation, when the model gives momenta [default: conserved].
    #[arg(long, value_enum)]
    pub momentum: Option<crate::search::MomentumFilter>,
    /// Search even when the estimated number of lattice points is above the limit.
    #[arg(long)]
    pub force: bool,
    /// Print the operators that are not yet model terms as [[term]] blocks
    /// for the model file, instead of the report.
    #[arg(long, conflicts_with = "format")]
    pub emit_terms: bool,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
    /// Write to this file instead of standard output (`-` is standard output).
    #[arg(long, short = 'o', value_name = "FILE")]
    pub output: Option<PathBuf>,
}

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
    pub flow: FlowOverrides,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
    /// Write to this file instead of standard output (`-` is standard output).
    #[arg(long, short = 'o', value_name = "FILE")]
    pub output: Option<PathBuf>,
}

/// Parse `name=value`.
pub fn parse_assignment(s: &str) -> Result<(String, f64), String> {
    let (name, value) = s
        .split_once('=')
        .ok_or_else(|| format!("expected NAME=VALUE, found `{s}`"))?;
    let name = name.trim();
    if name.is_empty() {
        return Err(format!("expected NAME=VALUE, found `{s}`"));
    }
    let x: f64 = value
        .trim()
        .parse()
        .map_err(|_| format!("`{}` is not a number (in `{s}`)", value.trim()))?;
    if !x.is_finite() {
        return Err(format!("`{}` must be a finite number", value.trim()));
    }
    Ok((name.to_string(), x))
}

/// Run a parsed command.
pub fn run(cli: Cli) -> Result<(), Error> {
    let model = match &cli.command {
        Command::Dims(a) => Some(a.point.model.clone()),
        Command::Flow(a) => Some(a.point.model.clone()),
        Command::Scan(a) => Some(a.point.model.clone()),
        Command::Hunt(a) => Some(a.point.model.clone()),
        Command::Edges(a) => Some(a.point.model.clone()),
        Command::Merge(_) => None,
    };
    let result = match cli.command {
        Command::Dims(args) => run_dims(args),
        Command::Flow(args) => run_flow(args),
        Command::Scan(args) => crate::scan::run::scan(args),
        Command::Merge(args) => crate::scan::run::merge(args),
        Command::Hunt(args) => crate::search::run(args),
        Command::Edges(args) => crate::edges::run(args),
    };
    // A point where V is not positive definite names the model file, like
    // every other input error.
    result.map_err(|e| match (e, model) {
        (Error::Unphysical(u), Some(m)) => {
            InputError::new(m.display().to_string(), "", u.to_string()).into()
        }
        (e, _) => e,
    })
}

pub(crate) fn load_point(args: &PointArgs) -> Result<(System, Vec<f64>), Error> {
    let sys = System::load(&args.model)?;
    let point = sys.model.point_with(&args.set, "--set")?;
    Ok((sys, point))
}

fn run_dims(args: DimsArgs) -> Result<(), Error> {
    check_outputs(args.output.as_deref(), args.out.as_deref())?;
    if !args.wires.is_empty() {
        let model = crate::model::Model::load(&args.point.model)?;
        let point = model.point_with(&args.point.set, "--set")?;
        let report =
            crate::convergence::ConvergenceReport::build(&model, &point, &args.wires, "--wires")?;
        if let Some(dir) = &args.out {
            report.write_dir(dir)?;
        }
        let text = output::render(&report, args.format)?;
        return emit(args.output.as_deref(), &text);
    }
    let (sys, point) = load_point(&args.point)?;
    let report = DimsReport::build(&sys, &point)?;
    let text = output::render(&report, args.format)?;
    emit(args.output.as_deref(), &text)
}

fn run_flow(args: FlowArgs) -> Result<(), Error> {
    check_outputs(None, args.out.as_deref())?;
    let (sys, point) = load_point(&args.point)?;
    let opts = FlowOptions::resolve(&sys.model, &args.flow)?;
    let flow = Flow::new(&sys, opts.clone());
    let result = flow.run(&point)?;
    let unphysical = result.outcome == Outcome::Unphysical;
    let failed = result.outcome == Outcome::Failed;
    let report = FlowReport::new(
        &sys.model.name,
        sys.model.params.names(),
        &point,
        result,
        opts,
    );
    if let Some(dir) = &args.out {
        report.write_dir(dir)?;
    }
    emit(None, &output::render(&report, args.format)?)?;
    if unphysical {
        let msg = report.result.message.clone().unwrap_or_default();
        return Err(Error::Input(InputError::new(&sys.model.file, "", msg)));
    }
    if failed {
        // The report (outcome "failed") is printed; the run still failed.
        let msg = report.result.message.clone().unwrap_or_default();
        return Err(Error::Numerical(format!(
            "{}: the flow failed at {}: {msg}",
            sys.model.file,
            sys.model.params.describe(&point)
        )));
    }
    Ok(())
}

/// Check `-o FILE` and `--out DIR` before any work is done.
pub(crate) fn check_outputs(
    file: Option<&std::path::Path>,
    dir: Option<&std::path::Path>,
) -> Result<(), Error> {
    if let Some(f) = file {
        output::check_output_file(f, "-o")?;
    }
    if let Some(d) = dir {
        output::check_output_dir(d, "--out")?;
    }
    Ok(())
}

/// Print to standard output, or write a file atomically.
pub(crate) fn emit(path: Option<&std::path::Path>, text: &str) -> Result<(), Error> {
    match path {
        None => output::write_atomic(std::path::Path::new("-"), text.as_bytes()),
        Some(p) => {
            output::check_output_file(p, "-o")?;
            output::write_atomic(p, text.as_bytes())
        }
    }
}

/// Turn an error into a user-facing message and exit code.
pub fn report_error(e: &Error) -> (String, i32) {
    (format!("error: {e}"), e.exit_code())
}
