//! CSV output of a report's main table.

use super::Table;
use crate::error::Error;

/// Render one table as CSV with a header row.
pub fn render(t: &Table) -> Result<String, Error> {
    let mut w = ::csv::Writer::from_writer(Vec::new());
    let fail = |e: ::csv::Error| Error::Numerical(format!("cannot write CSV: {e}"));
    w.write_record(&t.headers).map_err(fail)?;
    for r in &t.rows {
        w.write_record(r).map_err(fail)?;
    }
    let bytes = w
        .into_inner()
        .map_err(|e| Error::Numerical(format!("cannot write CSV: {e}")))?;
    String::from_utf8(bytes).map_err(|e| Error::Numerical(format!("cannot write CSV: {e}")))
}
