//! The steps of a scan around the grid itself: which axes it has (flags
//! or the model's `[scan]` table), the size guard, and the summary and
//! figures built in one streaming pass over `points.csv` ([`finish`]).

use std::path::Path;

use super::figures::{Canvas, ColorBy};
use super::points::for_each_point;
use super::store::{self, Meta, RowFile};
use super::summary::{ScanSummary, Tally};
use super::{Axis, Scan, MAX_POINTS};
use crate::error::{Error, InputError};
use crate::model::Model;
use crate::output::{self, provenance, provenance::Provenance};

/// Summary and figures from the finished points file (`points`, the staged
/// `points.csv` that is renamed into place after this: see
/// [`super::folder`]): one pass feeds every row to the summary's tally and
/// the figures' canvas, which keep no rows (see [`super::figures`]). Writes
/// `summary.json` (with its `provenance` key when `prov` is given, which
/// also goes to `run.json`), `phases.csv` and the figures into `dir` and
/// returns the summary; the phase map is coloured `by`.
pub fn finish(
    dir: &Path,
    points: &Path,
    meta: &Meta,
    by: ColorBy,
    prov: Option<&Provenance>,
) -> Result<ScanSummary, Error> {
    let mut tally = Tally::new(meta);
    let mut canvas = Canvas::new(meta, by);
    for_each_point(points, meta, |p| {
        tally.add(p);
        canvas.add(p);
    })?;
    let mut files = vec!["points.csv".to_string(), "summary.json".to_string()];
    files.extend(canvas.write(dir, meta)?);
    files.push("phases.csv".to_string());
    if prov.is_some() {
        files.push("run.json".to_string());
    }
    let summary = tally.finish(meta, files);
    output::write_atomic(&dir.join("phases.csv"), phases_csv(&summary)?.as_bytes())?;
    let mut json = output::to_json(&summary)?;
    if let Some(p) = prov {
        json = provenance::stamp_json(&json, p)?;
        output::write_atomic(&dir.join("run.json"), output::to_json(p)?.as_bytes())?;
    }
    output::write_atomic(&dir.join("summary.json"), json.as_bytes())?;
    Ok(summary)
}

/// The phases table of `summary.json` as CSV, with the JSON's keys as
/// columns (`label` is the phase's name, the `phase` column of points.csv).
fn phases_csv(s: &ScanSummary) -> Result<String, Error> {
    let mut t = output::Table::new(
        "phases",
        &["label", "points", "target", "gapped_pairs", "gapless_modes"],
    );
    for r in &s.phases {
        t.push(vec![
            r.label.clone(),
            r.points.to_string(),
            r.target.to_string(),
            r.gapped_pairs.to_string(),
            r.gapless_modes.to_string(),
        ]);
    }
    output::csv::render(&t)
}

/// A whole scan computed into `dir` (created if missing), without progress
/// reporting, resuming or shards: the partial file, then [`publish`]. The
/// library route to what `pinflow scan` writes (the command adds those
/// three around the same steps); `flag` names the output directory in
/// errors, `prov` is the run's provenance (see [`finish`]).
pub fn run_to_dir(
    scan: &Scan,
    dir: &Path,
    by: ColorBy,
    flag: &str,
    prov: Option<&Provenance>,
) -> Result<ScanSummary, Error> {
    output::check_output_dir(dir, flag)?;
    std::fs::create_dir_all(dir).map_err(|e| Error::io(dir, e))?;
    let partial = super::partial_path(dir, None);
    let mut file = RowFile::create(&partial, &scan.meta)?;
    scan.run_into(&mut file, &|_| {})?;
    drop(file);
    publish(dir, &partial, &scan.meta, by, prov)
}

/// The end of a whole scan: `points.csv` staged from the finished partial
/// file, then [`publish_staged`]; the partial file is removed.
pub fn publish(
    dir: &Path,
    partial: &Path,
    meta: &Meta,
    by: ColorBy,
    prov: Option<&Provenance>,
) -> Result<ScanSummary, Error> {
    let staged = store::stage_points(partial, meta, &dir.join("points.csv"))?;
    let summary = publish_staged(dir, &staged, meta, by, prov)?;
    std::fs::remove_file(partial).map_err(|e| Error::io(partial, e))?;
    Ok(summary)
}

/// The summary and figures from staged points ([`finish`]), then the
/// points moved into place last (a `points.csv` marks a finished scan, see
/// [`super::folder`]; an earlier one is removed first), then the outputs
/// of an earlier scan that this one did not write are removed. On failure
/// the staged file is removed.
pub fn publish_staged(
    dir: &Path,
    staged: &Path,
    meta: &Meta,
    by: ColorBy,
    prov: Option<&Provenance>,
) -> Result<ScanSummary, Error> {
    let target = dir.join("points.csv");
    let done = (|| -> Result<ScanSummary, Error> {
        if target.exists() {
            std::fs::remove_file(&target).map_err(|e| Error::io(&target, e))?;
        }
        let summary = finish(dir, staged, meta, by, prov)?;
        std::fs::rename(staged, &target).map_err(|e| Error::io(&target, e))?;
        super::folder::remove_stale(dir, &summary.files)?;
        Ok(summary)
    })();
    done.inspect_err(|_| {
        let _ = std::fs::remove_file(staged);
    })
}

/// The axes of a scan: `x` and `y` as given on the command line (flags
/// `--x`, `--y`), else the model's `[scan]` table. A `y` from the table is
/// used only when `x` also comes from it.
pub fn resolve_axes(model: &Model, x: Option<&str>, y: Option<&str>) -> Result<Vec<Axis>, Error> {
    let from_table = |key: &str| table_axis(model, key);
    check_table_keys(model)?;
    let x_axis = match (x, from_table("x")?) {
        (Some(s), _) => parse_axis(model, s, "--x", "command line")?,
        (None, Some(s)) => parse_axis(model, &s, "scan.x", &model.file)?,
        (None, None) => {
            return Err(InputError::new(
                "command line",
                "--x",
                "give an axis (--x NAME=MIN:MAX:N) or a [scan] table with x",
            )
            .into())
        }
    };
    let mut axes = vec![x_axis];
    match (y, from_table("y")?) {
        (Some(s), _) => axes.push(parse_axis(model, s, "--y", "command line")?),
        (None, Some(s)) if x.is_none() => axes.push(parse_axis(model, &s, "scan.y", &model.file)?),
        _ => {}
    }
    Ok(axes)
}

/// An axis string of the model's `[scan]` table.
fn table_axis(model: &Model, key: &str) -> Result<Option<String>, Error> {
    match model.scan_table.as_ref().and_then(|t| t.get(key)) {
        None => Ok(None),
        Some(toml::Value::String(s)) => Ok(Some(s.clone())),
        Some(other) => Err(InputError::new(
            &model.file,
            format!("scan.{key}"),
            format!("expected an axis string \"NAME=MIN:MAX:N[:log]\", found {other}"),
        )
        .into()),
    }
}

fn check_table_keys(model: &Model) -> Result<(), Error> {
    if let Some(t) = model.scan_table.as_ref() {
        if let Some(k) = t.keys().find(|k| *k != "x" && *k != "y") {
            return Err(InputError::new(
                &model.file,
                format!("scan.{k}"),
                "unknown key (known: x, y)",
            )
            .into());
        }
    }
    Ok(())
}

/// Parse one axis; checked here, where it is known which flag or key gave it.
fn parse_axis(model: &Model, spec: &str, key: &str, file: &str) -> Result<Axis, Error> {
    let mut axis = Axis::parse(spec).map_err(|m| Error::Input(InputError::new(file, key, m)))?;
    let label = model.params.label(&axis.name);
    (axis.label, axis.unit) = (label.label, label.unit);
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
}

/// Refuse grids above [`MAX_POINTS`] unless forced.
pub fn check_size(points: usize, force: bool) -> Result<(), Error> {
    if points > MAX_POINTS && !force {
        let bytes = points as f64 * 120.0;
        return Err(Error::refused(
            "--x/--y",
            format!(
                "the grid has {points} points (about {:.1} GB of output and as many flows); narrow the axes or pass --force",
                bytes / 1e9
            ),
        ));
    }
    Ok(())
}
