//! `merge --partial`: a preview of an unfinished scan from what its shards
//! have finished so far (finished shard files, the growing files of running
//! or killed shards, none at all for shards not started).
//!
//! Invariants: the preview's `points.csv` holds only complete rows that
//! pass the same checks as a merge (the point's index and coordinates), in
//! index order, with the scan's header; points not finished yet are left
//! out. Its folder holds `preview.json` (the counts), which marks it as a
//! preview; a preview has no summary and no figures (they need every
//! point).

use std::fs::File;
use std::io::{BufRead, BufReader, Read, Write};
use std::path::{Path, PathBuf};

use serde::Serialize;

use super::store::{complete_length, csv_line, read_meta, Meta};
use super::{partial_path, shard_path};
use crate::error::{Error, InputError};

/// What a preview holds.
#[derive(Debug, Clone, Serialize)]
pub struct Preview {
    /// Points in the whole grid.
    pub points: usize,
    /// Points in the preview (finished so far).
    pub finished: usize,
    /// Per shard k = 1..N: the file read (empty if none) and its
    /// finished and expected rows.
    pub shards: Vec<ShardProgress>,
}

/// One shard of a preview.
#[derive(Debug, Clone, Serialize)]
pub struct ShardProgress {
    /// "k/n".
    pub shard: String,
    /// The file its rows came from ("" for a shard not started).
    pub file: String,
    /// Rows finished.
    pub finished: usize,
    /// Rows it has when complete.
    pub expected: usize,
}

/// The shard files of one scan, by k: the given ones, and for the others
/// a finished or running file beside the first given one.
fn collect(given: &[PathBuf]) -> Result<(Meta, Vec<Option<PathBuf>>), Error> {
    let bad =
        |p: &Path, m: String| -> Error { InputError::new(p.display().to_string(), "", m).into() };
    let first = read_meta(&given[0])?;
    let Some((_, n)) = first.shard else {
        return Err(bad(
            &given[0],
            "not a shard file (it has no shard k/n)".into(),
        ));
    };
    let same = |m: &Meta| {
        Meta {
            shard: None,
            ..m.clone()
        } == Meta {
            shard: None,
            ..first.clone()
        }
    };
    let mut files: Vec<Option<PathBuf>> = vec![None; n];
    for p in given {
        let m = read_meta(p)?;
        match m.shard {
            Some((k, nk)) if nk == n && same(&m) => {
                if files[k - 1].replace(p.clone()).is_some() {
                    return Err(bad(p, format!("shard {k}/{n} is given twice")));
                }
            }
            _ => {
                return Err(bad(
                    p,
                    format!("belongs to a different scan than {}", given[0].display()),
                ))
            }
        }
    }
    let dir = given[0].parent().unwrap_or(Path::new(".")).to_path_buf();
    for (i, slot) in files.iter_mut().enumerate().filter(|(_, s)| s.is_none()) {
        let k = i + 1;
        let found = [shard_path(&dir, k, n), partial_path(&dir, Some((k, n)))]
            .into_iter()
            .find(|p| read_meta(p).is_ok_and(|m| m.shard == Some((k, n)) && same(&m)));
        *slot = found;
    }
    let mut whole = first;
    whole.shard = None;
    Ok((whole, files))
}

/// The complete data rows of a shard file (a running file's cut last line
/// left out).
fn rows_of(path: &Path) -> Result<RowIter, Error> {
    let mut file = File::open(path).map_err(|e| Error::io(path, e))?;
    let len = complete_length(&mut file).map_err(|e| Error::io(path, e))?;
    let file = File::open(path).map_err(|e| Error::io(path, e))?;
    Ok(BufReader::new(file.take(len)).lines().skip(2))
}

/// Write the preview of the scan of the `given` shard files to a staged
/// file beside `target`; returns the counts and the staged file.
pub fn preview(given: &[PathBuf], target: &Path) -> Result<(Preview, PathBuf), Error> {
    let (meta, files) = collect(given)?;
    let n = files.len();
    let mut readers = Vec::with_capacity(n);
    for f in &files {
        readers.push(f.as_deref().map(rows_of).transpose()?);
    }
    let tmp = crate::output::temp_path(target);
    let mut counts = vec![0usize; n];
    let written = write_rows(&meta, &files, &mut readers, &mut counts, &tmp);
    if let Err(e) = written {
        let _ = std::fs::remove_file(&tmp);
        return Err(e);
    }
    let whole = Meta {
        shard: Some((1, n)),
        ..meta.clone()
    };
    let shards = (0..n)
        .map(|i| ShardProgress {
            shard: format!("{}/{n}", i + 1),
            file: files[i]
                .as_ref()
                .map(|p| p.display().to_string())
                .unwrap_or_default(),
            finished: counts[i],
            expected: Meta {
                shard: Some((i + 1, n)),
                ..whole.clone()
            }
            .expected_rows(),
        })
        .collect();
    let preview = Preview {
        points: meta.points,
        finished: counts.iter().sum(),
        shards,
    };
    Ok((preview, tmp))
}

/// The rows of one shard file.
type RowIter = std::iter::Skip<std::io::Lines<BufReader<std::io::Take<File>>>>;

/// The rows of one shard file, None once exhausted (or never started).
type Rows = Option<RowIter>;

/// Stream the finished rows in index order into `tmp`, checking each.
fn write_rows(
    meta: &Meta,
    files: &[Option<PathBuf>],
    readers: &mut [Rows],
    counts: &mut [usize],
    tmp: &Path,
) -> Result<(), Error> {
    let n = files.len();
    let mut out = std::io::BufWriter::new(File::create(tmp).map_err(|e| Error::io(tmp, e))?);
    out.write_all(csv_line(&meta.header()).as_bytes())
        .map_err(|e| Error::io(tmp, e))?;
    let width = meta.header().len();
    for index in 0..meta.points {
        let k = index % n;
        let (Some(reader), Some(path)) = (readers[k].as_mut(), files[k].as_ref()) else {
            continue;
        };
        let Some(line) = reader.next().transpose().map_err(|e| Error::io(path, e))? else {
            readers[k] = None;
            continue;
        };
        meta.check_shard_row(&line, index, width, n, path)?;
        counts[k] += 1;
        out.write_all(line.as_bytes())
            .and_then(|_| out.write_all(b"\n"))
            .map_err(|e| Error::io(tmp, e))?;
    }
    out.flush().map_err(|e| Error::io(tmp, e))
}

/// The name of the file that marks a preview folder.
pub const MARK: &str = "preview.json";
