//! LaTeX tables (booktabs-free `tabular`, so they compile in any document).

use super::{Report, Table};

/// Render a report as LaTeX: a comment with the facts, then one `table`
/// environment per table.
pub fn render<R: Report>(r: &R) -> String {
    let mut out = format!("% {}\n", escape(&r.title()));
    for (k, v) in r.facts() {
        out.push_str(&format!("% {k}: {v}\n"));
    }
    for t in r.tables() {
        out.push_str(&table(&t));
    }
    for n in r.notes() {
        out.push_str(&format!("% note: {n}\n"));
    }
    out
}

/// One table environment.
pub fn table(t: &Table) -> String {
    let cols = "l".to_string() + &"r".repeat(t.headers.len().saturating_sub(1));
    let mut out = String::from("\\begin{table}[h]\n\\centering\n");
    out.push_str(&format!("\\begin{{tabular}}{{{cols}}}\n\\hline\n"));
    out.push_str(&row(&t
        .headers
        .iter()
        .map(|h| header(h))
        .collect::<Vec<_>>()));
    out.push_str("\\hline\n");
    for r in &t.rows {
        out.push_str(&row(&r.iter().map(|c| cell(c)).collect::<Vec<_>>()));
    }
    out.push_str("\\hline\n\\end{tabular}\n");
    out.push_str(&format!(
        "\\caption{{{}}}\n\\end{{table}}\n",
        escape(&t.caption)
    ));
    out
}

fn row(cells: &[String]) -> String {
    format!("{} \\\\\n", cells.join(" & "))
}

/// Headers with physics symbols typeset.
fn header(h: &str) -> String {
    match h {
        "Delta" => "$\\Delta$".into(),
        "2-Delta" => "$2-\\Delta$".into(),
        "h" => "$h$".into(),
        "hbar" => "$\\bar h$".into(),
        "spin" => "$s$".into(),
        "charge" => "$Q$".into(),
        "k" => "$k\\alpha$".into(),
        "particles m" => "$m$".into(),
        "vector l" => "$l$".into(),
        "l_a K^-1 l_b" => "$l_a^T K^{-1} l_b$".into(),
        other => escape(other),
    }
}

/// Fractions become `\tfrac`, everything else is escaped.
fn cell(c: &str) -> String {
    if let Some((p, q)) = c.split_once('/') {
        if p.parse::<i64>().is_ok() && q.parse::<i64>().is_ok() {
            let (sign, p) = p.strip_prefix('-').map_or(("", p), |p| ("-", p));
            return format!("${sign}\\tfrac{{{p}}}{{{q}}}$");
        }
    }
    escape(c)
}

/// Escape LaTeX special characters.
pub fn escape(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for ch in s.chars() {
        match ch {
            '\\' => out.push_str("\\textbackslash{}"),
            '&' | '%' | '$' | '#' | '_' | '{' | '}' => {
                out.push('\\');
                out.push(ch);
            }
            '~' => out.push_str("\\textasciitilde{}"),
            '^' => out.push_str("\\textasciicircum{}"),
            _ => out.push(ch),
        }
    }
    out
}
