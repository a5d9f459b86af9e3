//! Aligned plain-text tables for a terminal.

use super::{Report, Table};

/// Render a report as text.
pub fn render<R: Report>(r: &R) -> String {
    let mut out = format!("{}\n", r.title());
    let facts = r.facts();
    let width = facts
        .iter()
        .map(|(k, _)| k.chars().count())
        .max()
        .unwrap_or(0);
    for (k, v) in &facts {
        out.push_str(&format!("  {k:<width$}  {v}\n"));
    }
    for t in r.tables() {
        out.push('\n');
        out.push_str(&table(&t));
    }
    let notes = r.notes();
    if !notes.is_empty() {
        out.push('\n');
        for n in notes {
            out.push_str(&format!("note: {n}\n"));
        }
    }
    out
}

/// One aligned table with its caption; numbers right-aligned.
pub fn table(t: &Table) -> String {
    let n = t.headers.len();
    let mut widths: Vec<usize> = t.headers.iter().map(|h| h.chars().count()).collect();
    for row in &t.rows {
        for (w, c) in widths.iter_mut().zip(row) {
            *w = (*w).max(c.chars().count());
        }
    }
    let mut out = format!("{}\n", t.caption);
    let line = |cells: &[String]| {
        let mut s = String::from(" ");
        for (i, c) in cells.iter().enumerate().take(n) {
            let pad = widths[i].saturating_sub(c.chars().count());
            if looks_numeric(c) {
                s.push_str(&" ".repeat(pad + 1));
                s.push_str(c);
            } else {
                s.push(' ');
                s.push_str(c);
                s.push_str(&" ".repeat(pad));
            }
            s.push(' ');
        }
        s.trim_end().to_string() + "\n"
    };
    out.push_str(&line(&t.headers));
    let rule: usize = widths.iter().map(|w| w + 2).sum::<usize>() + 1;
    out.push_str(&format!("  {}\n", "-".repeat(rule.saturating_sub(2))));
    for row in &t.rows {
        out.push_str(&line(row));
    }
    out
}

fn looks_numeric(s: &str) -> bool {
    let s = s.trim_end_matches('*');
    !s.is_empty() && s.parse::<f64>().is_ok()
        || (s.contains('/') && s.split('/').all(|p| p.parse::<i64>().is_ok()))
}
