//! Scan files: the partial file that grows as points finish, resuming,
//! shard files and merging.
//!
//! Layout of a partial or shard file: one line `# pinflow-scan <meta JSON>`,
//! the CSV header, then one row per point in index order. Rows are appended
//! a chunk at a time; a killed run leaves at most one incomplete last line,
//! which resuming cuts off. Invariant: the k-th complete row of a file is
//! the k-th point of its index list, so the number of complete rows is the
//! progress.

use std::fs::{File, OpenOptions};
use std::io::{BufRead, BufReader, Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use super::axis::Axis;
use crate::error::{Error, InputError};

/// Marker at the start of the first line of partial and shard files.
pub const MAGIC: &str = "# pinflow-scan ";

/// What a partial or shard file is part of.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Meta {
    /// Hash of the model file, the fixed parameters, the axes and the options.
    pub fingerprint: String,
    /// Model name.
    pub model: String,
    /// Scan axes (x first).
    pub axes: Vec<Axis>,
    /// The model's terms (column order).
    pub terms: Vec<String>,
    /// The target term, if the model marks one.
    pub target: Option<String>,
    /// Listed terms that do not commute with the target.
    pub competitors: Vec<String>,
    /// (k, n) for shard k of n (1-based), or None for a whole scan.
    pub shard: Option<(usize, usize)>,
    /// Points in the whole grid.
    pub points: usize,
    /// An infinite array: rows end with the flow's quadrature check
    /// (`q_points`, `q_error`, `q_converged`). Left out of the meta line
    /// when false, so the files of other models are as before.
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub infinite: bool,
    /// The declared symmetries the listed terms break over the whole grid
    /// (and the Z_n that V breaks), counted when the scan starts
    /// ([`crate::search::breaks::tally`]); every shard holds the same.
    /// Left out of the meta line when empty.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub symmetry_breaks: Vec<crate::search::breaks::BreakCount>,
}

impl Meta {
    /// The meta line of a file written by another run (a shard to merge, a
    /// partial file to resume) is checked before it is used: shard k of n
    /// with 1 <= k <= n, valid axes, and as many points as the axes make.
    pub fn check(&self) -> Result<(), String> {
        if let Some((k, n)) = self.shard {
            if k == 0 || k > n {
                return Err(format!("shard {k}/{n} is not a shard (needs 1 <= K <= N)"));
            }
        }
        if self.axes.is_empty() || self.axes.len() > 2 {
            return Err(format!("{} axes (a scan has 1 or 2)", self.axes.len()));
        }
        for a in &self.axes {
            if !(a.min.is_finite() && a.max.is_finite()) {
                return Err(format!("axis `{}` has non-finite bounds", a.name));
            }
            a.validate()?;
        }
        let points = self.axes.iter().try_fold(1usize, |p, a| p.checked_mul(a.n));
        if points != Some(self.points) {
            return Err(format!("{} points do not match the axes", self.points));
        }
        Ok(())
    }

    /// `x=0.1, y=2`: the axis values of point `index`.
    pub fn describe(&self, index: usize) -> String {
        let names = self.axes.iter().map(|a| a.name.as_str());
        names
            .zip(self.coords_of(index))
            .map(|(n, v)| format!("{n}={v}"))
            .collect::<Vec<_>>()
            .join(", ")
    }

    /// The cells a row of point `index` starts with (its axis values, as
    /// the scan writes them).
    fn coords_of(&self, index: usize) -> Vec<String> {
        let mut rest = index;
        self.axes
            .iter()
            .map(|a| {
                let v = a.value(rest % a.n);
                rest /= a.n;
                format!("{v}")
            })
            .collect()
    }

    /// Check the row of point `index` read from the shard file `path`, one
    /// of `n` shards (shard k holds the points k, k + n, ...): a damaged row
    /// is an input error naming the file, the point and the shard's data
    /// row (see [`Meta::check_row`]).
    pub(super) fn check_shard_row(
        &self,
        line: &str,
        index: usize,
        width: usize,
        n: usize,
        path: &Path,
    ) -> Result<(), Error> {
        self.check_row(line, index, width).map_err(|why| {
            InputError::new(
                path.display().to_string(),
                "",
                format!(
                    "the row of point {index} (data row {} of the shard) is damaged: {why}",
                    index / n + 1
                ),
            )
            .into()
        })
    }

    /// Check a data row of point `index`: `width` cells (the header's),
    /// the point's axis values, a known outcome. Rows without quotes (all
    /// but those with a quoted term name) are split directly; the others go
    /// through a CSV reader.
    pub(super) fn check_row(&self, line: &str, index: usize, width: usize) -> Result<(), String> {
        let quoted;
        let cells: Vec<&str> = if line.contains('"') {
            let mut reader = csv::ReaderBuilder::new()
                .has_headers(false)
                .from_reader(line.as_bytes());
            quoted = reader
                .records()
                .next()
                .and_then(|r| r.ok())
                .ok_or("not a CSV row")?;
            quoted.iter().collect()
        } else {
            line.split(',').collect()
        };
        if cells.len() != width {
            return Err(format!("{} cells, expected {width}", cells.len()));
        }
        for (j, want) in self.coords_of(index).iter().enumerate() {
            if cells[j] != want.as_str() {
                return Err(format!(
                    "{} = {}, expected {want}",
                    self.axes[j].name, cells[j]
                ));
            }
        }
        let outcome = cells[self.axes.len()];
        if crate::flow::Outcome::from_word(outcome).is_none() {
            return Err(format!("unknown outcome `{outcome}`"));
        }
        Ok(())
    }

    /// The point index of data row `row` (0-based) of this file.
    pub fn index_of_row(&self, row: usize) -> usize {
        match self.shard {
            None => row,
            Some((k, n)) => (k - 1) + row * n,
        }
    }

    /// Number of points this file must hold when complete.
    pub fn expected_rows(&self) -> usize {
        match self.shard {
            None => self.points,
            // Points k-1, k-1+n, ... (no overflow for any points).
            Some((k, n)) => self.points.saturating_sub(k - 1).div_ceil(n),
        }
    }

    /// The CSV header row.
    pub fn header(&self) -> Vec<String> {
        let mut h: Vec<String> = self.axes.iter().map(|a| a.name.clone()).collect();
        h.extend(
            ["outcome", "winner", "ell_star"]
                .iter()
                .map(|s| s.to_string()),
        );
        h.extend(self.terms.iter().map(|t| format!("dimension0:{t}")));
        h.extend(self.terms.iter().map(|t| format!("dimension:{t}")));
        if self.infinite {
            h.extend(QUADRATURE_COLUMNS.iter().map(|s| s.to_string()));
        }
        h.extend(PHASE_COLUMNS.iter().map(|s| s.to_string()));
        h
    }

    /// Index of the first of [`PHASE_COLUMNS`] in a row.
    pub fn phase_column(&self) -> usize {
        self.axes.len() + 3 + 2 * self.terms.len() + if self.infinite { 3 } else { 0 }
    }
}

/// The last columns of an infinite array's rows: the points of the rule
/// the flow was carried on, the larger relative error estimate of its
/// quadrature check (final dimensions, ell*; `inf` when the two flows end
/// differently) and whether the check passed; empty without a check.
pub const QUADRATURE_COLUMNS: [&str; 3] = ["q_points", "q_error", "q_converged"];

/// The last columns of every row (appended after all earlier columns, so
/// that their positions stay): the label of the final pinned set's phase
/// (`flow::stages`, `phase`; empty where no phase is named), whether it is
/// the target phase, ell of the last stage, and the phase's gapped pairs and
/// gapless modes (per wire for infinite arrays).
pub const PHASE_COLUMNS: [&str; 5] = [
    "phase",
    "target_phase",
    "ell_last",
    "gapped_pairs",
    "gapless_modes",
];

/// An open file that rows are appended to.
pub struct RowFile {
    file: File,
    path: PathBuf,
    /// Complete rows already in the file.
    pub rows: usize,
}

impl RowFile {
    /// Create (truncating) a partial file with its meta line and header.
    /// Not synced to disk here: a file that a crash leaves empty or cut
    /// before its first row is started afresh by [`RowFile::resume`], and
    /// the rows are made durable at the end of the run ([`RowFile::sync`]);
    /// a sync here would hold up every scan before its first point.
    pub fn create(path: &Path, meta: &Meta) -> Result<RowFile, Error> {
        let mut file = File::create(path).map_err(|e| Error::io(path, e))?;
        let json = serde_json::to_string(meta).map_err(|e| Error::Numerical(e.to_string()))?;
        let mut head = format!("{MAGIC}{json}\n");
        head.push_str(&csv_line(&meta.header()));
        file.write_all(head.as_bytes())
            .map_err(|e| Error::io(path, e))?;
        Ok(RowFile {
            file,
            path: path.to_path_buf(),
            rows: 0,
        })
    }

    /// Reopen a partial file to continue it: checks the meta, cuts an
    /// incomplete last line and counts the complete rows.
    pub fn resume(path: &Path, meta: &Meta) -> Result<RowFile, Error> {
        // A run killed between creating the file and writing its first line
        // leaves an empty file or a cut meta line: no rows, start afresh.
        let mut first = Vec::new();
        BufReader::new(File::open(path).map_err(|e| Error::io(path, e))?)
            .read_until(b'\n', &mut first)
            .map_err(|e| Error::io(path, e))?;
        if first.last() != Some(&b'\n') {
            return RowFile::create(path, meta);
        }
        let found = read_meta(path)?;
        if found != *meta {
            return Err(Error::Input(InputError::new(
                path.display().to_string(),
                "--resume",
                "the partial output was made with a different model, grid, shard or options; run with --overwrite instead of --resume to start over",
            )));
        }
        let mut file = OpenOptions::new()
            .read(true)
            .write(true)
            .open(path)
            .map_err(|e| Error::io(path, e))?;
        // Read in blocks, not whole: a partial file may hold millions of rows.
        let complete = complete_length(&mut file).map_err(|e| Error::io(path, e))?;
        let Some(rows) = verify_rows(path, &mut file, complete, meta)? else {
            // Not even the header made it: start the body afresh.
            drop(file);
            return RowFile::create(path, meta);
        };
        file.set_len(complete).map_err(|e| Error::io(path, e))?;
        file.seek(SeekFrom::End(0))
            .map_err(|e| Error::io(path, e))?;
        Ok(RowFile {
            file,
            path: path.to_path_buf(),
            rows,
        })
    }

    /// Append finished rows (already formatted lines) and flush them.
    pub fn append(&mut self, lines: &[String]) -> Result<(), Error> {
        let mut buf = String::with_capacity(lines.iter().map(|l| l.len()).sum());
        for l in lines {
            buf.push_str(l);
        }
        self.file
            .write_all(buf.as_bytes())
            .map_err(|e| Error::io(&self.path, e))?;
        self.file.flush().map_err(|e| Error::io(&self.path, e))?;
        self.rows += lines.len();
        Ok(())
    }

    /// Make the rows durable.
    pub fn sync(&self) -> Result<(), Error> {
        self.file.sync_data().map_err(|e| Error::io(&self.path, e))
    }
}

/// Block size for scanning a partial file.
const BLOCK: usize = 1 << 16;

/// Length of the file up to and including its last newline (0 if none),
/// found by reading blocks backwards from the end.
pub(super) fn complete_length(file: &mut File) -> std::io::Result<u64> {
    let mut end = file.seek(SeekFrom::End(0))?;
    let mut block = vec![0u8; BLOCK];
    while end > 0 {
        let start = end.saturating_sub(BLOCK as u64);
        let part = &mut block[..(end - start) as usize];
        file.seek(SeekFrom::Start(start))?;
        file.read_exact(part)?;
        if let Some(p) = part.iter().rposition(|b| *b == b'\n') {
            return Ok(start + p as u64 + 1);
        }
        end = start;
    }
    Ok(0)
}

/// Check the header (byte for byte) and every complete row of a partial
/// file (its first `len` bytes) against the scan: row r must be the point
/// the scan puts there, with the grid's coordinates. Returns the number of
/// rows, or None when the header is missing (the run was killed before
/// writing it). Reads line by line: memory does not grow with the rows.
fn verify_rows(
    path: &Path,
    file: &mut File,
    len: u64,
    meta: &Meta,
) -> Result<Option<usize>, Error> {
    let bad = |line: usize, why: String| -> Error {
        InputError::new(
            path.display().to_string(),
            "--resume",
            format!("line {line} of the partial output {why}; it does not belong to this scan: run with --overwrite instead of --resume to start over"),
        )
        .into()
    };
    file.seek(SeekFrom::Start(0))
        .map_err(|e| Error::io(path, e))?;
    let mut lines = BufReader::new(file.take(len)).lines().skip(1);
    let header = csv_line(&meta.header());
    match lines.next().transpose() {
        Ok(None) => return Ok(None),
        Ok(Some(h)) if header.strip_suffix('\n') == Some(h.as_str()) => {}
        Ok(Some(_)) | Err(_) => {
            return Err(bad(2, "(the CSV header) is damaged".into()));
        }
    }
    let width = meta.header().len();
    let mut rows = 0;
    for line in lines {
        let at = rows + 3;
        let line = line.map_err(|_| bad(at, "is not text".into()))?;
        if rows >= meta.expected_rows() {
            return Err(bad(
                at,
                format!(
                    "is one row more than the {} of the scan",
                    meta.expected_rows()
                ),
            ));
        }
        meta.check_row(&line, meta.index_of_row(rows), width)
            .map_err(|why| bad(at, format!("(data row {}) is wrong: {why}", rows + 1)))?;
        rows += 1;
    }
    Ok(Some(rows))
}

/// One CSV line (with newline) from cells.
pub fn csv_line(cells: &[String]) -> String {
    let mut w = csv::WriterBuilder::new()
        .terminator(csv::Terminator::Any(b'\n'))
        .from_writer(Vec::new());
    // Writing to memory cannot fail.
    let _ = w.write_record(cells);
    String::from_utf8(w.into_inner().unwrap_or_default()).unwrap_or_default()
}

/// Read the meta line of a partial or shard file.
pub fn read_meta(path: &Path) -> Result<Meta, Error> {
    let file = File::open(path).map_err(|e| {
        Error::Input(InputError::new(
            path.display().to_string(),
            "",
            format!("cannot read the scan file: {e}"),
        ))
    })?;
    let mut first = String::new();
    BufReader::new(file)
        .read_line(&mut first)
        .map_err(|e| Error::io(path, e))?;
    let bad = |why: &str| {
        Error::Input(InputError::new(
            path.display().to_string(),
            "",
            format!("not a pinflow scan file: {why}"),
        ))
    };
    let json = first
        .trim_end()
        .strip_prefix(MAGIC)
        .ok_or_else(|| bad("missing the `# pinflow-scan` line"))?;
    let meta: Meta = serde_json::from_str(json).map_err(|e| bad(&e.to_string()))?;
    meta.check()
        .map_err(|why| bad(&format!("its first line is damaged: {why}")))?;
    Ok(meta)
}

/// Iterate over the data rows (after the meta line and the header) of a
/// partial, shard or points file; `skip_meta` says whether a meta line comes first.
pub fn data_lines(
    path: &Path,
    skip_meta: bool,
) -> Result<impl Iterator<Item = std::io::Result<String>>, Error> {
    let file = File::open(path).map_err(|e| Error::io(path, e))?;
    let skip = if skip_meta { 2 } else { 1 };
    Ok(BufReader::new(file).lines().skip(skip))
}

/// Copy the rows of a complete partial file into a staged `points.csv`
/// (header and rows, without the meta line) beside `target`; returns the
/// staged file, which the caller renames into place once the summary and
/// figures are written (see [`super::folder`]).
pub fn stage_points(partial: &Path, meta: &Meta, target: &Path) -> Result<PathBuf, Error> {
    let tmp = crate::output::temp_path(target);
    let written = (|| -> Result<(), Error> {
        let mut out = std::io::BufWriter::new(File::create(&tmp).map_err(|e| Error::io(&tmp, e))?);
        out.write_all(csv_line(&meta.header()).as_bytes())
            .map_err(|e| Error::io(&tmp, e))?;
        for line in data_lines(partial, true)? {
            let line = line.map_err(|e| Error::io(partial, e))?;
            out.write_all(line.as_bytes())
                .and_then(|_| out.write_all(b"\n"))
                .map_err(|e| Error::io(&tmp, e))?;
        }
        out.flush().map_err(|e| Error::io(&tmp, e))
    })();
    if let Err(e) = written {
        let _ = std::fs::remove_file(&tmp);
        return Err(e);
    }
    Ok(tmp)
}

/// Merge complete shard files into a staged `points.csv` beside `target`
/// (renamed into place by the caller, as for [`stage_points`]); returns
/// the meta of the whole scan and the staged file.
pub fn merge(shards: &[PathBuf], target: &Path) -> Result<(Meta, PathBuf), Error> {
    let metas: Vec<Meta> = shards
        .iter()
        .map(|p| read_meta(p))
        .collect::<Result<_, _>>()?;
    let whole = check_shard_set(shards, &metas)?;
    let n = metas.len();
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by_key(|&i| metas[i].shard.map_or(0, |s| s.0));
    let mut readers = Vec::with_capacity(n);
    for &i in &order {
        readers.push(data_lines(&shards[i], true)?);
    }
    let tmp = crate::output::temp_path(target);
    let written = (|| -> Result<(), Error> {
        let mut out = std::io::BufWriter::new(File::create(&tmp).map_err(|e| Error::io(&tmp, e))?);
        out.write_all(csv_line(&whole.header()).as_bytes())
            .map_err(|e| Error::io(&tmp, e))?;
        let width = whole.header().len();
        for index in 0..whole.points {
            let k = index % n;
            let path = &shards[order[k]];
            let line = readers[k]
                .next()
                .transpose()
                .map_err(|e| Error::io(path, e))?;
            let line = line.ok_or_else(|| incomplete(path))?;
            // A damaged row must not reach points.csv.
            whole.check_shard_row(&line, index, width, n, path)?;
            out.write_all(line.as_bytes())
                .and_then(|_| out.write_all(b"\n"))
                .map_err(|e| Error::io(&tmp, e))?;
        }
        out.flush().map_err(|e| Error::io(&tmp, e))
    })();
    if let Err(e) = written {
        let _ = std::fs::remove_file(&tmp);
        return Err(e);
    }
    Ok((whole, tmp))
}

fn incomplete(path: &Path) -> Error {
    Error::Input(InputError::new(
        path.display().to_string(),
        "",
        "the shard is incomplete (finish it with `pinflow scan ... --shard k/n --resume`)",
    ))
}

/// The shard files must come from one scan, cover 1..=n once each, and be
/// complete.
fn check_shard_set(paths: &[PathBuf], metas: &[Meta]) -> Result<Meta, Error> {
    let bad = |path: &Path, msg: String| {
        Error::Input(InputError::new(path.display().to_string(), "", msg))
    };
    let first = metas
        .first()
        .ok_or_else(|| bad(Path::new("merge"), "no shard files given".into()))?;
    let Some((_, n)) = first.shard else {
        return Err(bad(
            &paths[0],
            "not a shard file (it has no shard k/n)".into(),
        ));
    };
    let mut seen = vec![false; n];
    for (p, m) in paths.iter().zip(metas) {
        let Some((k, nk)) = m.shard else {
            return Err(bad(p, "not a shard file".into()));
        };
        let mut a = m.clone();
        let mut b = first.clone();
        a.shard = None;
        b.shard = None;
        if a != b || nk != n {
            return Err(bad(
                p,
                format!("belongs to a different scan than {}", paths[0].display()),
            ));
        }
        if std::mem::replace(&mut seen[k - 1], true) {
            return Err(bad(p, format!("shard {k}/{n} is given twice")));
        }
        let rows = data_lines(p, true)?.count();
        if rows != m.expected_rows() {
            return Err(bad(
                p,
                format!(
                    "shard {k}/{n} is incomplete: {rows} of {} points",
                    m.expected_rows()
                ),
            ));
        }
    }
    if let Some(k) = seen.iter().position(|s| !s) {
        return Err(bad(&paths[0], format!("shard {}/{n} is missing", k + 1)));
    }
    let mut whole = first.clone();
    whole.shard = None;
    Ok(whole)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn meta() -> Meta {
        Meta {
            fingerprint: "f".into(),
            model: "m".into(),
            axes: vec![Axis::parse("x=0:1:3").expect("axis")],
            terms: vec!["a,b".into()],
            target: None,
            competitors: vec![],
            shard: None,
            points: 3,
            infinite: false,
            symmetry_breaks: vec![],
        }
    }

    #[test]
    fn rows_are_checked_with_and_without_quoted_cells() {
        let m = meta();
        let width = m.header().len();
        // The phase columns come last (the phase label is quoted: it has commas).
        assert_eq!(width, 11, "{:?}", m.header());
        // Plain row: split directly.
        assert_eq!(
            m.check_row("0.5,strong,a,1.5,0.9,0.8,{a},true,1.5,1,0", 1, width),
            Ok(())
        );
        // A term name with a comma is quoted; the quoted path counts it as
        // one cell.
        assert_eq!(
            m.check_row(
                "0.5,strong,\"a,b\",1.5,0.9,0.8,\"{a, b}\",true,1.5,2,0",
                1,
                width
            ),
            Ok(())
        );
        assert!(m
            .check_row(
                "0.5,strong,a,b,1.5,0.9,0.8,\"{a, b}\",true,1.5,2,0",
                1,
                width
            )
            .unwrap_err()
            .contains("12 cells, expected 11"));
        assert!(m
            .check_row(
                "0.5,strong,\"a,b,1.5,0.9,0.8,\"{a, b}\",true,1.5,2,0",
                1,
                width
            )
            .is_err());
        assert!(m
            .check_row("0,strong,a,1.5,0.9,0.8,\"{a, b}\",true,1.5,2,0", 1, width)
            .unwrap_err()
            .contains("x = 0, expected 0.5"));
        assert!(m
            .check_row("0.5,won,a,1.5,0.9,0.8,\"{a, b}\",true,1.5,2,0", 1, width)
            .unwrap_err()
            .contains("unknown outcome `won`"));
    }
}
