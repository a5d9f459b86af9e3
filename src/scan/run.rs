//! The `scan` and `merge` commands: option resolution, file handling,
//! progress display, and the final summary and figures, built in one
//! streaming pass over `points.csv` ([`finish`]).

use std::io::IsTerminal;
use std::path::{Path, PathBuf};

use indicatif::{ProgressBar, ProgressStyle};

use super::figures::{Canvas, ColorBy};
use super::points::for_each_point;
use super::store::{self, Meta, RowFile};
use super::summary::Tally;
use super::{partial_path, shard_path, Axis, Scan, ScanSpec, MAX_POINTS};
use crate::cli::{emit, load_point, MergeArgs, ScanArgs};
use crate::error::{Error, InputError};
use crate::flow::FlowOptions;
use crate::output;

/// Run `pinflow scan`.
pub fn scan(args: ScanArgs) -> Result<(), Error> {
    let (sys, base) = load_point(&args.point)?;
    let axes = resolve_axes(&args, &sys.model)?;
    let options = FlowOptions::resolve(&sys.model, &args.flow)?;
    let spec = ScanSpec {
        axes,
        base,
        options,
        shard: args.shard,
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
            let points = dir.join("points.csv");
            store::publish_points(&partial, &scan.meta, &points)?;
            finish(&dir, &scan.meta, args.format, color_by(args.color_by))?;
            std::fs::remove_file(&partial).map_err(|e| Error::io(&partial, e))
        }
    }
}

/// Run `pinflow merge`.
pub fn merge(args: MergeArgs) -> Result<(), Error> {
    let dir = args
        .out
        .clone()
        .or_else(|| args.shards[0].parent().map(Path::to_path_buf))
        .unwrap_or_else(|| PathBuf::from("."));
    output::check_output_dir(&dir, "--out")?;
    std::fs::create_dir_all(&dir).map_err(|e| Error::io(&dir, e))?;
    let meta = store::merge(&args.shards, &dir.join("points.csv"))?;
    finish(&dir, &meta, args.format, color_by(args.color_by))
}

fn color_by(c: crate::cli::ColorByArg) -> ColorBy {
    match c {
        crate::cli::ColorByArg::Phase => ColorBy::Phase,
        crate::cli::ColorByArg::Winner => ColorBy::Winner,
    }
}

/// Summary and figures from the finished points file: one pass feeds
/// every row to the summary's tally and the figures' canvas, which keep
/// no rows (see [`super::figures`]).
fn finish(dir: &Path, meta: &Meta, format: output::Format, by: ColorBy) -> Result<(), Error> {
    let mut tally = Tally::new(meta);
    let mut canvas = Canvas::new(meta, by);
    for_each_point(&dir.join("points.csv"), meta, |p| {
        tally.add(p);
        canvas.add(p);
    })?;
    let mut files = vec!["points.csv".to_string(), "summary.json".to_string()];
    files.extend(canvas.write(dir, meta)?);
    let summary = tally.finish(meta, files);
    output::write_atomic(
        &dir.join("summary.json"),
        output::to_json(&summary)?.as_bytes(),
    )?;
    let mut text = output::render(&summary, format)?;
    if format == output::Format::Text {
        text.push_str(&format!("\nwritten to {}\n", dir.display()));
    }
    emit(None, &text)
}

fn resolve_axes(args: &ScanArgs, model: &crate::model::Model) -> Result<Vec<Axis>, Error> {
    let table = model.scan_table.as_ref();
    let from_table = |key: &str| -> Result<Option<String>, Error> {
        match table.and_then(|t| t.get(key)) {
            None => Ok(None),
            Some(toml::Value::String(s)) => Ok(Some(s.clone())),
            Some(other) => Err(InputError::new(
                &model.file,
                format!("scan.{key}"),
                format!("expected an axis string \"NAME=MIN:MAX:N[:log]\", found {other}"),
            )
            .into()),
        }
    };
    if let Some(t) = table {
        if let Some(k) = t.keys().find(|k| *k != "x" && *k != "y") {
            return Err(InputError::new(
                &model.file,
                format!("scan.{k}"),
                "unknown key (known: x, y)",
            )
            .into());
        }
    }
    let parse = |spec: String, key: &str, file: &str| {
        let axis = Axis::parse(&spec).map_err(|m| Error::Input(InputError::new(file, key, m)))?;
        // Checked here, where it is known which flag or key gave the axis.
        if model.params.index(&axis.name).is_none() {
            let known = if model.params.is_empty() {
                "the model has no parameters".to_string()
            } else {
                format!("known parameters: {}", model.params.names().join(", "))
            };
            return Err(Error::Input(InputError::new(
                file,
                key,
                format!("unknown axis parameter `{}` ({known})", axis.name),
            )));
        }
        Ok(axis)
    };
    let x = match (&args.x, from_table("x")?) {
        (Some(s), _) => parse(s.clone(), "--x", "command line")?,
        (None, Some(s)) => parse(s, "scan.x", &model.file)?,
        (None, None) => {
            return Err(InputError::new(
                "command line",
                "--x",
                "give an axis (--x NAME=MIN:MAX:N) or a [scan] table with x",
            )
            .into())
        }
    };
    let mut axes = vec![x];
    match (&args.y, from_table("y")?) {
        (Some(s), _) => axes.push(parse(s.clone(), "--y", "command line")?),
        (None, Some(s)) if args.x.is_none() => axes.push(parse(s, "scan.y", &model.file)?),
        _ => {}
    }
    Ok(axes)
}

fn check_size(points: usize, force: bool) -> Result<(), Error> {
    if points > MAX_POINTS && !force {
        let bytes = points as f64 * 120.0;
        return Err(InputError::new(
            "command line",
            "--x/--y",
            format!(
                "the grid has {points} points (about {:.1} GB of output and as many flows); narrow the axes or pass --force",
                bytes / 1e9
            ),
        )
        .into());
    }
    Ok(())
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
