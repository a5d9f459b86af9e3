//! `pinflow scan` and `pinflow merge`: file handling, threads, the progress
//! bar and the summary printed at the end.

use std::path::{Path, PathBuf};
use std::time::Duration;

use clap::Args;

use super::common::{
    bare_provenance, emit, emit_report, load_point_text, options_json, provenance, FigureStyleArg,
    FlowFlags, FormatArg, PointArgs, Progress,
};
use crate::core::system::System;
use crate::error::{Error, InputError};
use crate::flow::FlowOptions;
use crate::output::provenance::Provenance;
use crate::output::{self, Format};
use crate::scan::figures::ColorBy;
use crate::scan::folder::{self, FolderLock};
use crate::scan::preview;
use crate::scan::run::{check_size, publish, publish_staged, resolve_axes};
use crate::scan::store::{self, Meta, RowFile};
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
    /// (join the parts with `pinflow merge`); K counts from 1, or from 0
    /// with `--shard-base 0` (a scheduler's array index:
    /// `--shard $SLURM_ARRAY_TASK_ID/N --shard-base 0`).
    #[arg(long, value_name = "K/N", value_parser = parse_shard)]
    pub shard: Option<(usize, usize)>,
    /// Whether the K of --shard counts from 1 (default) or from 0.
    #[arg(long, value_name = "0|1", default_value_t = 1, value_parser = clap::value_parser!(u8).range(0..=1), requires = "shard")]
    pub shard_base: u8,
    /// Continue an interrupted scan without recomputing finished points.
    #[arg(long)]
    pub resume: bool,
    /// Replace the files of an earlier scan in the output directory
    /// (without it, a directory holding them is refused).
    #[arg(long, conflicts_with = "resume")]
    pub overwrite: bool,
    /// Number of worker threads [default: all cores; at most 4 per core].
    #[arg(long, value_name = "N")]
    pub threads: Option<usize>,
    /// No progress bar and no progress lines.
    #[arg(long, short = 'q')]
    pub quiet: bool,
    /// Off a terminal (a batch job's log), print one plain progress line
    /// to standard error every SECONDS (0: never).
    #[arg(long, value_name = "SECONDS", default_value_t = 60)]
    pub progress_every: u64,
    /// Run grids larger than the safety limit, a pairs closure above its
    /// work limit, dense flows above 512 fields and hunted competitors above
    /// their limit.
    #[arg(long)]
    pub force: bool,
    /// Format of the summary printed at the end.
    #[arg(long, value_enum, default_value_t = FormatArg::Text)]
    pub format: FormatArg,
    /// What phase.png/svg is coloured by.
    #[arg(long, value_enum, default_value_t = ColorByArg::Phase)]
    pub color_by: ColorByArg,
    /// How figures look: `screen` (default) or `paper` (3.4 in wide PDF,
    /// 8-9 pt text, title and caption in a `.txt` beside each figure).
    #[arg(long, value_enum, default_value_t = FigureStyleArg::Screen)]
    pub figure_style: FigureStyleArg,
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
    /// Replace the files of an earlier scan or merge in the output
    /// directory (without it, a directory holding them is refused).
    #[arg(long)]
    pub overwrite: bool,
    /// Preview an unfinished scan: join the rows its shards have finished
    /// so far (the shard files given, and for the other shards their
    /// finished or running files beside the first one) into
    /// `points.csv` and `preview.json` [default --out: DIR/preview]; no
    /// summary or figures.
    #[arg(long)]
    pub partial: bool,
    /// Format of the summary printed at the end.
    #[arg(long, value_enum, default_value_t = FormatArg::Text)]
    pub format: FormatArg,
    /// What phase.png/svg is coloured by.
    #[arg(long, value_enum, default_value_t = ColorByArg::Phase)]
    pub color_by: ColorByArg,
    /// How figures look: `screen` (default) or `paper` (3.4 in wide PDF,
    /// 8-9 pt text, title and caption in a `.txt` beside each figure).
    #[arg(long, value_enum, default_value_t = FigureStyleArg::Screen)]
    pub figure_style: FigureStyleArg,
}

/// What a scan's phase map is coloured by.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum ColorByArg {
    /// The phase of the final pinned set of the staged flow.
    Phase,
    /// The first term to reach strong coupling (the map before staging).
    Winner,
}

impl ColorByArg {
    /// The flag's value as typed.
    fn word(self) -> &'static str {
        match self {
            ColorByArg::Phase => "phase",
            ColorByArg::Winner => "winner",
        }
    }
}

impl From<ColorByArg> for ColorBy {
    fn from(c: ColorByArg) -> ColorBy {
        match c {
            ColorByArg::Phase => ColorBy::Phase,
            ColorByArg::Winner => ColorBy::Winner,
        }
    }
}

/// Parse `k/n` (0 <= k <= n; the base is checked in [`shard_of`]).
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
    if n == 0 || k > n {
        return Err(format!("shard K/N needs 1 <= K <= N, found `{s}`"));
    }
    Ok((k, n))
}

/// The shard as (k, n) with k counted from 1, from `--shard` and
/// `--shard-base`.
fn shard_of(args: &ScanArgs) -> Result<Option<(usize, usize)>, Error> {
    let Some((k, n)) = args.shard else {
        return Ok(None);
    };
    let base = usize::from(args.shard_base);
    if k < base || k - base >= n {
        let range = if base == 0 {
            "0 <= K < N"
        } else {
            "1 <= K <= N"
        };
        return Err(InputError::new(
            "command line",
            "--shard",
            format!("with --shard-base {base} a shard K/N needs {range}, found {k}/{n}"),
        )
        .into());
    }
    Ok(Some((k - base + 1, n)))
}

/// Run `pinflow scan`.
pub(super) fn run_scan(args: ScanArgs) -> Result<(), Error> {
    args.figure_style.apply();
    let shard = shard_of(&args)?;
    let (sys, base, text) = load_point_text(&args.point)?;
    let axes = resolve_axes(&sys.model, args.x.as_deref(), args.y.as_deref())?;
    let options = FlowOptions::resolve(&sys.model, &args.flow.overrides())?;
    crate::flow::limits::check_work(&sys, &options, args.force)?;
    let prov = scan_provenance(&args, &sys, &base, &options, &axes)?;
    let spec = ScanSpec {
        axes,
        base,
        options,
        shard,
        competitors: args
            .competitors
            .resolve(&sys)?
            .map(|c| c.forced(args.force)),
    };
    let scan = Scan::new(&sys, text.as_bytes(), spec)?;
    check_size(scan.points(), args.force)?;
    let threads = args.threads.map(thread_count).transpose()?;
    let dir = args
        .out
        .clone()
        .unwrap_or_else(|| default_dir(&args.point.model));
    output::check_output_dir(&dir, "--out")?;
    if let Some(r) = args.point.run_json.as_deref() {
        super::common::check_run_json(r, &[args.point.model.as_path()], None, Some(&dir))?;
    }
    let Some(_lock) = prepare_dir(&dir, &scan.meta, &args, &prov)? else {
        return Ok(());
    };
    if let Some(n) = threads {
        set_threads(n)?;
    }
    let partial = partial_path(&dir, shard);
    let mut file = if args.resume && partial.exists() {
        RowFile::resume(&partial, &scan.meta)?
    } else {
        RowFile::create(&partial, &scan.meta)?
    };
    let todo = scan.count();
    let progress = scan_progress(todo as u64, file.rows as u64, &args);
    scan.run_into(&mut file, &|n| progress.add(n as u64))?;
    progress.finish();
    drop(file);
    match shard {
        Some((k, n)) => {
            let target = shard_path(&dir, k, n);
            std::fs::rename(&partial, &target).map_err(|e| Error::io(&target, e))?;
            let run = target.with_extension("run.json");
            output::write_atomic(&run, output::to_json(&prov)?.as_bytes())?;
            eprintln!(
                "shard {k}/{n}: {todo} points written to {}; join all shards with `pinflow merge`",
                target.display()
            );
            Ok(())
        }
        None => {
            let by = args.color_by.into();
            let summary = publish(&dir, &partial, &scan.meta, by, Some(&prov))?;
            let run_json = args.point.run_json.as_deref();
            print_summary(&dir, &summary, (args.format.into(), run_json), &prov)
        }
    }
}

/// The progress of a scan of `total` points, `done` of them resumed (none
/// with `--quiet`).
fn scan_progress(total: u64, done: u64, args: &ScanArgs) -> Progress {
    let every = if args.quiet { 0 } else { args.progress_every };
    let progress = Progress::new(total, done, "points", Duration::from_secs(every));
    if !args.quiet {
        progress.show("");
    }
    progress
}

/// Create and lock the output directory and check what it holds (see
/// `scan::folder`). None: a `--resume`d shard that is already complete
/// (nothing to do).
fn prepare_dir(
    dir: &Path,
    meta: &Meta,
    args: &ScanArgs,
    prov: &Provenance,
) -> Result<Option<FolderLock>, Error> {
    let shard = meta.shard;
    folder::claim(dir, shard, || match shard {
        Some((k, n)) => check_shard_dir(dir, meta, (k, n), args),
        None => {
            let partial = partial_path(dir, None);
            folder::check_whole(
                dir,
                &partial,
                args.overwrite,
                (Some(args.resume), Some(prov)),
            )
        }
    })
}

/// Create `dir` and take its lock; also says whether the lock file is new
/// (a refused run removes it, leaving the directory as it was).
fn lock_dir(dir: &Path, shard: Option<(usize, usize)>) -> Result<(FolderLock, bool), Error> {
    std::fs::create_dir_all(dir).map_err(|e| Error::io(dir, e))?;
    let created = !dir.join(folder::LOCK).exists();
    Ok((folder::lock(dir, shard)?, created))
}

/// A shard: its finished file is kept unless `--overwrite`; with
/// `--resume` a finished shard of this very scan is nothing to do.
fn check_shard_dir(
    dir: &Path,
    meta: &Meta,
    (k, n): (usize, usize),
    args: &ScanArgs,
) -> Result<bool, Error> {
    if args.overwrite {
        return Ok(true);
    }
    let done = shard_path(dir, k, n);
    if done.exists() {
        if args.resume && store::read_meta(&done).is_ok_and(|m| m == *meta) {
            eprintln!("shard {k}/{n} is already complete in {}", done.display());
            return Ok(false);
        }
        folder::refuse_existing(dir, &[file_name(&done)], "")?;
    }
    let partial = partial_path(dir, Some((k, n)));
    if partial.exists() && !args.resume {
        let found = [format!("the unfinished {}", file_name(&partial))];
        folder::refuse_existing(dir, &found, ", --resume to continue it")?;
    }
    Ok(true)
}

fn file_name(p: &Path) -> String {
    p.file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_default()
}

/// The provenance of a scan: the point off the axes, the grid, the flow
/// and competitor options and the colouring.
fn scan_provenance(
    args: &ScanArgs,
    sys: &System,
    base: &[f64],
    options: &FlowOptions,
    axes: &[crate::scan::Axis],
) -> Result<Provenance, Error> {
    let recorded = options_json(&serde_json::json!({
        "flow": options,
        "competitors": args.competitors.recorded(),
        "color_by": args.color_by.word(),
    }))?;
    let mut prov = provenance("scan", &args.point.model, &sys.model.params, base, recorded)?;
    prov.grid = axes.iter().map(|a| a.spec()).collect();
    Ok(prov)
}

/// Run `pinflow merge`.
pub(super) fn run_merge(args: MergeArgs) -> Result<(), Error> {
    args.figure_style.apply();
    let shards_dir = args.shards[0]
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .map_or_else(|| PathBuf::from("."), Path::to_path_buf);
    let dir = match (&args.out, args.partial) {
        (Some(d), _) => d.clone(),
        (None, false) => shards_dir,
        (None, true) => shards_dir.join("preview"),
    };
    output::check_output_dir(&dir, "--out")?;
    let (lock, created) = lock_dir(&dir, None)?;
    // A preview replaces an earlier preview without asking.
    let replaceable = args.overwrite || (args.partial && dir.join(preview::MARK).exists());
    let found = folder::present(&dir, &folder::OUTPUTS);
    let checked = if replaceable {
        Ok(())
    } else {
        folder::refuse_existing(&dir, &found, "")
    };
    if let Err(e) = checked {
        drop(lock);
        if created {
            let _ = std::fs::remove_file(dir.join(folder::LOCK));
        }
        return Err(e);
    }
    folder::remove_temporaries(&dir)?;
    if args.partial {
        return write_preview(&dir, &args);
    }
    let prov = shard_provenance(&args.shards[0])?;
    let (meta, staged) = store::merge(&args.shards, &dir.join("points.csv"))?;
    let summary = publish_staged(&dir, &staged, &meta, args.color_by.into(), Some(&prov))?;
    print_summary(&dir, &summary, (args.format.into(), None), &prov)
}

/// `merge --partial`: the preview's rows and counts, then the counts on
/// standard output (JSON with `--format json`, else one line).
fn write_preview(dir: &Path, args: &MergeArgs) -> Result<(), Error> {
    let target = dir.join("points.csv");
    let (counts, staged) = preview::preview(&args.shards, &target)?;
    let json = output::to_json(&counts)?;
    let done = output::write_atomic(&dir.join(preview::MARK), json.as_bytes())
        .and_then(|_| std::fs::rename(&staged, &target).map_err(|e| Error::io(&target, e)))
        .and_then(|_| folder::remove_stale(dir, &["points.csv".to_string()]));
    if let Err(e) = done {
        let _ = std::fs::remove_file(&staged);
        return Err(e);
    }
    if args.format == FormatArg::Json {
        return emit(None, &json);
    }
    let shards: Vec<String> = counts
        .shards
        .iter()
        .map(|s| format!("{} {}/{}", s.shard, s.finished, s.expected))
        .collect();
    emit(
        None,
        &format!(
            "preview: {} of {} points finished (shard rows done/expected: {}); written to {}\n",
            counts.finished,
            counts.points,
            shards.join(", "),
            target.display()
        ),
    )
}

/// The provenance of a merged scan: that of its first shard (written
/// beside it as `<shard>.run.json`) without its `--shard K/N`, which is
/// the provenance of the whole scan; else a record of the merge alone.
fn shard_provenance(shard: &Path) -> Result<Provenance, Error> {
    let run = shard.with_extension("run.json");
    let mut prov = bare_provenance("merge");
    if let Ok(text) = std::fs::read_to_string(&run) {
        prov.command = "scan".to_string();
        let v: serde_json::Value = serde_json::from_str(&text).map_err(|e| {
            InputError::new(run.display().to_string(), "", format!("not JSON: {e}"))
        })?;
        let field = |k: &str| v.get(k).cloned().unwrap_or(serde_json::Value::Null);
        prov.model = field("model").as_str().map(str::to_string);
        prov.model_sha256 = field("model_sha256").as_str().map(str::to_string);
        if let serde_json::Value::Object(m) = field("parameters") {
            prov.parameters = m;
        }
        if let serde_json::Value::Object(m) = field("parameter_labels") {
            prov.parameter_labels = m;
        }
        prov.options = field("options");
        prov.grid = serde_json::from_value(field("grid")).unwrap_or_default();
        let args: Vec<String> = serde_json::from_value(field("arguments")).unwrap_or_default();
        prov.arguments = without_shard(args);
    }
    Ok(prov)
}

/// Arguments without `--shard K/N` (or `--shard=K/N`).
fn without_shard(args: Vec<String>) -> Vec<String> {
    let mut out = Vec::new();
    let mut skip = false;
    for a in args {
        if std::mem::take(&mut skip) || a.starts_with("--shard=") {
            continue;
        }
        if a == "--shard" {
            skip = true;
        } else {
            out.push(a);
        }
    }
    out
}

/// Print the summary (`run.json` and the provenance of `summary.json`
/// were written with it, see `scan::run::finish`).
fn print_summary(
    dir: &Path,
    summary: &ScanSummary,
    (format, run_json): (Format, Option<&Path>),
    prov: &Provenance,
) -> Result<(), Error> {
    let mut text = output::render(summary, format)?;
    if format == Format::Text {
        text.push_str(&format!("\nwritten to {}\n", dir.display()));
    }
    emit_report(None, run_json, &text, format, prov)
}

/// Most worker threads per core: more only adds overhead (100000 threads
/// took 30 s to start).
const THREADS_PER_CORE: usize = 4;

/// The number of worker threads for `--threads n`: at least 1, and capped
/// at [`THREADS_PER_CORE`] per core with a note.
fn thread_count(n: usize) -> Result<usize, Error> {
    if n == 0 {
        return Err(InputError::new("command line", "--threads", "must be at least 1").into());
    }
    let cores = std::thread::available_parallelism().map_or(1, |c| c.get());
    let cap = THREADS_PER_CORE * cores;
    if n > cap {
        eprintln!(
            "note: --threads {n} is more than {THREADS_PER_CORE} per core; using {cap} ({cores} core{})",
            if cores == 1 { "" } else { "s" }
        );
        return Ok(cap);
    }
    Ok(n)
}

fn set_threads(n: usize) -> Result<(), Error> {
    rayon::ThreadPoolBuilder::new()
        .num_threads(n)
        .build_global()
        .map_err(|e| Error::Numerical(format!("cannot start {n} threads: {e}")))
}

fn default_dir(model: &Path) -> PathBuf {
    if model.as_os_str() == "-" {
        return PathBuf::from("out").join("stdin");
    }
    let stem = model
        .file_stem()
        .map(|s| s.to_string_lossy().to_string())
        .unwrap_or_else(|| "scan".into());
    PathBuf::from("out").join(stem)
}
