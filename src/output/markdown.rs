//! Markdown tables.

use super::{Report, Table};

/// Render a report as Markdown.
pub fn render<R: Report>(r: &R) -> String {
    let mut out = format!("## {}\n\n", r.title());
    for (k, v) in r.facts() {
        out.push_str(&format!("- **{k}**: {}\n", escape(&v)));
    }
    for t in r.tables() {
        out.push('\n');
        out.push_str(&table(&t));
    }
    let notes = r.notes();
    if !notes.is_empty() {
        out.push('\n');
        for n in notes {
            out.push_str(&format!("> {}\n", escape(&n)));
        }
    }
    out
}

/// One Markdown table with its caption in bold.
pub fn table(t: &Table) -> String {
    let mut out = format!("**{}**\n\n", escape(&t.caption));
    let row = |cells: &[String]| {
        format!(
            "| {} |\n",
            cells
                .iter()
                .map(|c| escape(c))
                .collect::<Vec<_>>()
                .join(" | ")
        )
    };
    out.push_str(&row(&t.headers));
    out.push_str(&format!("|{}\n", "---|".repeat(t.headers.len())));
    for r in &t.rows {
        out.push_str(&row(r));
    }
    out
}

fn escape(s: &str) -> String {
    s.replace('|', "\\|")
}
