//! Output formats shared by every command.
//!
//! A command's result is one documented struct that implements [`Report`]
//! (for the text-like formats) and `serde::Serialize` (for JSON). Each
//! format is a small file here: [`text`] (aligned terminal tables),
//! [`markdown`], [`latex`] (a table for a paper's appendix), [`csv`] (one
//! table, machine-readable) and JSON via serde. Files are written with
//! [`write_atomic`]: a temporary file in the target directory renamed into
//! place, so a failure never leaves a half-written output.

pub mod csv;
pub mod file;
pub mod latex;
pub mod markdown;
pub mod provenance;
pub mod text;

use std::path::Path;

use serde::Serialize;

use crate::error::Error;

/// Output formats of the reporting commands.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Format {
    /// Aligned tables for a terminal.
    #[default]
    Text,
    /// JSON (every field of the result).
    Json,
    /// CSV (the main table).
    Csv,
    /// Markdown tables.
    Markdown,
    /// LaTeX tabular environments.
    Latex,
}

/// `λ = 0.8 meV, g = 0.3`: a parameter point (name -> value) with the
/// labels and units of `labels` (name -> `{label, unit}`, both optional;
/// the model's `[params]` tables) where given, else `name = value`.
pub fn labelled_point(
    values: &serde_json::Map<String, serde_json::Value>,
    labels: &serde_json::Map<String, serde_json::Value>,
) -> String {
    let text = |v: Option<&serde_json::Value>| v.and_then(|x| x.as_str()).map(str::to_string);
    values
        .iter()
        .map(|(name, v)| {
            let l = labels.get(name);
            let shown = text(l.and_then(|l| l.get("label"))).unwrap_or_else(|| name.clone());
            match text(l.and_then(|l| l.get("unit"))).filter(|u| !u.is_empty()) {
                Some(u) => format!("{shown} = {v} {u}"),
                None => format!("{shown} = {v}"),
            }
        })
        .collect::<Vec<_>>()
        .join(", ")
}

/// A table of strings with a caption.
#[derive(Debug, Clone, PartialEq)]
pub struct Table {
    /// Caption.
    pub caption: String,
    /// Column headers.
    pub headers: Vec<String>,
    /// Rows (each as long as `headers`).
    pub rows: Vec<Vec<String>>,
}

impl Table {
    /// Empty table with the given headers.
    pub fn new(caption: &str, headers: &[&str]) -> Table {
        Table::with_headers(caption, headers.iter().map(|h| h.to_string()).collect())
    }

    /// Empty table with owned headers.
    pub fn with_headers(caption: &str, headers: Vec<String>) -> Table {
        Table {
            caption: caption.to_string(),
            headers,
            rows: Vec::new(),
        }
    }

    /// Append a row.
    pub fn push(&mut self, row: Vec<String>) {
        debug_assert_eq!(row.len(), self.headers.len());
        self.rows.push(row);
    }
}

/// What the text-like formats need from a result.
pub trait Report {
    /// One-line title.
    fn title(&self) -> String;
    /// Key facts printed above the tables.
    fn facts(&self) -> Vec<(String, String)>;
    /// Tables in order.
    fn tables(&self) -> Vec<Table>;
    /// The single table written as CSV.
    fn csv_table(&self) -> Table;
    /// Notes printed after the tables (limits of the method, warnings).
    fn notes(&self) -> Vec<String>;
}

/// Render a result in a format.
pub fn render<R: Report + Serialize>(report: &R, format: Format) -> Result<String, Error> {
    Ok(match format {
        Format::Text => text::render(report),
        Format::Markdown => markdown::render(report),
        Format::Latex => latex::render(report),
        Format::Csv => csv::render(&report.csv_table())?,
        Format::Json => to_json(report)?,
    })
}

/// The parameter point of a report as `name=value, ...` ("(none)" for a
/// model without parameters), for the facts of text-like formats.
pub fn parameters_fact(parameters: &serde_json::Map<String, serde_json::Value>) -> String {
    if parameters.is_empty() {
        return "(none)".to_string();
    }
    parameters
        .iter()
        .map(|(k, v)| format!("{k}={v}"))
        .collect::<Vec<_>>()
        .join(", ")
}

/// [`parameters_fact`] naming the parameters that have a label or unit in
/// the model by them (`λ=0.8 meV, g=0.5`).
pub fn labelled_parameters_fact(
    parameters: &serde_json::Map<String, serde_json::Value>,
    labels: &serde_json::Map<String, serde_json::Value>,
) -> String {
    if labels.is_empty() {
        return parameters_fact(parameters);
    }
    labelled_point(parameters, labels).replace(" = ", "=")
}

/// A number for people: at most 6 significant digits, trailing zeros
/// trimmed (machine outputs keep the full round-trip representation).
pub fn short(x: f64) -> String {
    if x == 0.0 || !x.is_finite() {
        return format!("{x}");
    }
    let digits = (5 - x.abs().log10().floor() as i32).clamp(0, 12) as usize;
    let s = format!("{x:.digits$}");
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    }
}

/// `x` with an explicit sign and `digits` decimals, for RG eigenvalues
/// 2 - Delta: a value that rounds to zero is shown as `0.000000`, not as
/// `-0.000000` (Delta = 2 computed as 2 + 1e-16).
pub fn signed_fixed(x: f64, digits: usize) -> String {
    let s = format!("{x:+.digits$}");
    if s[1..].chars().all(|c| c == '0' || c == '.') {
        s[1..].to_string()
    } else {
        s
    }
}

/// Pretty JSON with a trailing newline.
pub fn to_json<T: Serialize>(value: &T) -> Result<String, Error> {
    let mut s = serde_json::to_string_pretty(value)
        .map_err(|e| Error::Numerical(format!("cannot write JSON: {e}")))?;
    s.push('\n');
    Ok(s)
}

/// Write bytes to `path` atomically: a temporary file beside it, then a
/// rename; links are followed and special files written in place (see
/// [`file`]).
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<(), Error> {
    file::write_output(path, bytes)
}

/// Check an output file given by a flag before anything is computed: not a
/// directory, and its directory exists (`-` is standard output).
pub fn check_output_file(path: &Path, flag: &str) -> Result<(), crate::error::InputError> {
    let bad = |m: String| crate::error::InputError::new("command line", flag, m);
    if path.as_os_str() == "-" {
        return Ok(());
    }
    if path.is_dir() || path.file_name().is_none() {
        return Err(bad(format!(
            "`{}` is a directory; give a file name",
            path.display()
        )));
    }
    let parent = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    if !parent.is_dir() {
        return Err(bad(format!(
            "cannot write `{}`: the directory `{}` does not exist",
            path.display(),
            parent.display()
        )));
    }
    Ok(())
}

/// Check an output directory given by a flag: it may not exist yet (it is
/// created), but it may not be a file.
pub fn check_output_dir(dir: &Path, flag: &str) -> Result<(), crate::error::InputError> {
    let bad = |m: String| crate::error::InputError::new("command line", flag, m);
    if dir.exists() && !dir.is_dir() {
        return Err(bad(format!(
            "`{}` exists and is not a directory; give a directory for the output files",
            dir.display()
        )));
    }
    // A directory to be created under a regular file cannot be.
    if let Some(file) = dir.ancestors().skip(1).find(|a| a.is_file()) {
        return Err(bad(format!(
            "cannot create `{}`: `{}` is a file",
            dir.display(),
            file.display()
        )));
    }
    Ok(())
}

/// The temporary name used by [`write_atomic`] for `path`:
/// `.NAME.PID.partial` beside it (the process id keeps two runs apart; a
/// scan removes the ones a killed run left in its folder).
pub fn temp_path(path: &Path) -> std::path::PathBuf {
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_default();
    path.with_file_name(format!(".{name}.{}.partial", std::process::id()))
}

#[cfg(test)]
mod signed_tests {
    use super::signed_fixed;

    #[test]
    fn values_that_round_to_zero_have_no_sign() {
        assert_eq!(signed_fixed(2.0 - (2.0 + 1e-15), 6), "0.000000");
        assert_eq!(signed_fixed(0.0, 6), "0.000000");
        assert_eq!(signed_fixed(-4e-7, 6), "0.000000");
        assert_eq!(signed_fixed(-6e-7, 6), "-0.000001");
        assert_eq!(signed_fixed(1.0, 6), "+1.000000");
        assert_eq!(signed_fixed(-0.4444444, 6), "-0.444444");
    }
}
