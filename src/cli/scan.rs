//! `pinflow scan` and `pinflow merge`: file handling, threads, the progress
//! bar and the summary printed at the end.

use std::io::IsTerminal;
use std::path::{Path, PathBuf};

use clap::Args;
use indicatif::{ProgressBar, ProgressStyle};

use super::common::{emit, load_point, FlowFlags, FormatArg, PointArgs};
use crate::error::{Error, InputError};
use crate::flow::FlowOptions;
use crate::output::{self, Format};
use crate::scan::figures::ColorBy;
use crate::scan::run::{check_size, finish, publish, resolve_axes};
use crate::scan::store::{self, RowFile};
use crate::scan::summary::ScanSummary;
use crate::scan::{partial_path, shard_path, Scan, ScanSpec};

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
    pub flow: FlowFlags,
    #[command(flatten)]
    pub competitors: super::flow::CompetitorFlags,
    /// Output directory [default: out/<model file stem>].
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Compute only the K-th of N interleaved parts, into DIR/shard-K-of-N.csv
    /// (join the parts with `pinflow merge`).
    #[arg(long, value_name = "K/N", value_parser = parse_shard)]
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
    /// Run grids larger than the safety limit, and a pairs closure above its
    /// work limit.
    #[arg(long)]
    pub force: bool,
    /// Format of the summary printed at the end.
    #[arg(long, value_enum, default_value_t = FormatArg::Text)]
    pub format: FormatArg,
    /// What phase.png/svg is coloured by.
    #[arg(long, value_enum, default_value_t = ColorByArg::Phase)]
    pub color_by: ColorByArg,
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
    #[arg(long, value_enum, default_value_t = FormatArg::Text)]
    pub format: FormatArg,
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

impl From<ColorByArg> for ColorBy {
    fn from(c: ColorByArg) -> ColorBy {
        match c {
            ColorByArg::Phase => ColorBy::Phase,
            ColorByArg::Winner => ColorBy::Winner,
        }
    }
}

/// Parse `k/n` (1 <= k <= n).
fn parse_shard(s: &str) -> Result<(usize, usize), String> {
    let (k, n) = s
        .split_once('/')
        .ok_or_else(|| format!("expected K/N, found `{s}`"))?;
    let k: usize = k
        .trim()
        .parse()
        .map_err(|_| format!("expected K/N with whole numbers, found `{s}`"))?;
    let n: usize = n
        .trim()
        .parse()
        .map_err(|_| format!("expected K/N with whole numbers, found `{s}`"))?;
    if n == 0 || k == 0 || k > n {
        return Err(format!("shard K/N needs 1 <= K <= N, found `{s}`"));
    }
    Ok((k, n))
}

/// Run `pinflow scan`.
pub(super) fn run_scan(args: ScanArgs) -> Result<(), Error> {
    let (sys, base) = load_point(&args.point)?;
    let axes = resolve_axes(&sys.model, args.x.as_deref(), args.y.as_deref())?;
    let options = FlowOptions::resolve(&sys.model, &args.flow.overrides())?;
    let generate = options.closure == crate::flow::Closure::Pairs;
    crate::flow::channels::check_closure(&sys, generate, options.closure_range, args.force)?;
    let spec = ScanSpec {
        axes,
        base,
        options,
        shard: args.shard,
        competitors: args.competitors.resolve(&sys)?,
    };
    let bytes = std::fs::read(&args.point.model).map_err(|e| Error::io(&args.point.model, e))?;
    let scan = Scan::new(&sys, &bytes, spec)?;
    check_size(scan.points(), args.force)?;
    if let Some(n) = args.threads {
        set_threads(n)?;
    }
    let dir = args
        .out
        .clone()
        .unwrap_or_else(|| default_dir(&args.point.model));
    output::check_output_dir(&dir, "--out")?;
    std::fs::create_dir_all(&dir).map_err(|e| Error::io(&dir, e))?;
    let partial = partial_path(&dir, args.shard);
    let mut file = if args.resume && partial.exists() {
        RowFile::resume(&partial, &scan.meta)?
    } else {
        RowFile::create(&partial, &scan.meta)?
    };
    let todo = scan.count();
    let bar = progress_bar(todo as u64, file.rows as u64, args.quiet);
    scan.run_into(&mut file, &|n| bar.inc(n as u64))?;
    bar.finish_and_clear();
    drop(file);
    match args.shard {
        Some((k, n)) => {
            let target = shard_path(&dir, k, n);
            std::fs::rename(&partial, &target).map_err(|e| Error::io(&target, e))?;
            eprintln!(
                "shard {k}/{n}: {todo} points written to {}; join all shards with `pinflow merge`",
                target.display()
            );
            Ok(())
        }
        None => {
            let summary = publish(&dir, &partial, &scan.meta, args.color_by.into())?;
            print_summary(&dir, &summary, args.format.into())
        }
    }
}

/// Run `pinflow merge`.
pub(super) fn run_merge(args: MergeArgs) -> Result<(), Error> {
    let dir = args
        .out
        .clone()
        .or_else(|| args.shards[0].parent().map(Path::to_path_buf))
        .unwrap_or_else(|| PathBuf::from("."));
    output::check_output_dir(&dir, "--out")?;
    std::fs::create_dir_all(&dir).map_err(|e| Error::io(&dir, e))?;
    let meta = store::merge(&args.shards, &dir.join("points.csv"))?;
    let summary = finish(&dir, &meta, args.color_by.into())?;
    print_summary(&dir, &summary, args.format.into())
}

/// Print the summary (whose files are written).
fn print_summary(dir: &Path, summary: &ScanSummary, format: Format) -> Result<(), Error> {
    let mut text = output::render(summary, format)?;
    if format == Format::Text {
        text.push_str(&format!("\nwritten to {}\n", dir.display()));
    }
    emit(None, &text)
}

fn set_threads(n: usize) -> Result<(), Error> {
    if n == 0 {
        return Err(InputError::new("command line", "--threads", "must be at least 1").into());
    }
    rayon::ThreadPoolBuilder::new()
        .num_threads(n)
        .build_global()
        .map_err(|e| Error::Numerical(format!("cannot start {n} threads: {e}")))
}

fn default_dir(model: &Path) -> PathBuf {
    let stem = model
        .file_stem()
        .map(|s| s.to_string_lossy().to_string())
        .unwrap_or_else(|| "scan".into());
    PathBuf::from("out").join(stem)
}

fn progress_bar(total: u64, done: u64, quiet: bool) -> ProgressBar {
    if quiet || !std::io::stderr().is_terminal() {
        return ProgressBar::hidden();
    }
    let bar = ProgressBar::new(total);
    bar.set_style(
        ProgressStyle::with_template("{bar:40} {pos}/{len} points, {per_sec}, eta {eta}")
            .unwrap_or_else(|_| ProgressStyle::default_bar()),
    );
    bar.set_position(done);
    bar
}
