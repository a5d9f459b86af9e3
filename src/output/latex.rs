//! LaTeX tables that compile unchanged in `article` and in `revtex4-2`.
//!
//! Invariants (tested in `tests/latex.rs`, compiled with pdflatex there when
//! it is installed):
//! - The only packages needed are the ones named in [`PACKAGES`] (amsmath
//!   for `\tfrac`, booktabs for the rules, graphicx for shrinking a table
//!   that is wider than the line); the first line of every output says so.
//! - Every character of user data (term names, model names) is escaped:
//!   `_ & % # $ { } ^ ~ \ | < >` never reach TeX as commands.
//! - Numbers are typeset in math mode (a real minus sign), `5.0000e-2` as
//!   `$5.0\times10^{-2}$`, integer fractions as `$\tfrac{p}{q}$`; symbols
//!   (`->`, `<=`, `|det K|`, `Delta`, ...) are typeset, not printed.
//! - Every table has a caption above it and a `\label` made of the report
//!   title and the caption; tables wider than a column are `table*`, and
//!   every tabular is shrunk (never enlarged) to the line width.

use super::{Report, Table};

/// The packages a document needs for these tables (all standard).
pub const PACKAGES: &str = "amsmath,booktabs,graphicx";

/// Estimated width above which a table spans both columns (points; a
/// revtex4-2 column is 246 pt wide).
const COLUMN_PT: usize = 240;

/// Cells longer than this are set as a ragged paragraph.
const LONG_CELL: usize = 60;

/// Render a report as LaTeX: comments with the needed packages and the
/// facts, then one float per table.
pub fn render<R: Report>(r: &R) -> String {
    let mut out = format!("% Needs \\usepackage{{{PACKAGES}}} (standard packages).\n");
    out.push_str(&format!("% {}\n", comment(&r.title())));
    for (k, v) in r.facts() {
        out.push_str(&format!("% {}: {}\n", comment(&k), comment(&v)));
    }
    let prefix = slug(&r.title());
    // The parameter point (with the model's labels and units, e.g. λ as
    // $\lambda$) closes every caption: a table in a paper says where it
    // was computed.
    let point = r
        .facts()
        .into_iter()
        .find(|(k, v)| k == "parameters" && v != "(none)")
        .map(|(_, v)| v);
    for t in r.tables() {
        out.push_str(&table_labelled(&t, &prefix, point.as_deref()));
    }
    for n in r.notes() {
        out.push_str(&format!("% note: {}\n", comment(&n)));
    }
    out
}

/// One table float, labelled by its caption alone.
pub fn table(t: &Table) -> String {
    table_labelled(t, "pinflow", None)
}

/// One table float with the label `tab:<prefix>:<caption>`; `point` (the
/// parameter values) is added to the caption, not to the label.
fn table_labelled(t: &Table, prefix: &str, point: Option<&str>) -> String {
    let long: Vec<bool> = (0..t.headers.len())
        .map(|j| t.rows.iter().any(|r| r[j].chars().count() > LONG_CELL))
        .collect();
    let wide = estimated_width(t) > COLUMN_PT;
    let env = if wide { "table*" } else { "table" };
    let cols: String = (0..t.headers.len())
        .map(|j| match j {
            _ if long[j] => 'l',
            0 => 'l',
            _ if numeric_column(t, j) => 'r',
            _ => 'l',
        })
        .collect();
    let mut out = format!("\\begin{{{env}}}[htbp]\n\\centering\n");
    let at = point.map_or(String::new(), |p| format!(" at {}", text(p)));
    out.push_str(&format!("\\caption{{{}{at}}}\n", text(&t.caption)));
    out.push_str(&format!("\\label{{tab:{prefix}:{}}}\n", slug(&t.caption)));
    out.push_str("\\resizebox{\\ifdim\\width>\\linewidth\\linewidth\\else\\width\\fi}{!}{%\n");
    out.push_str(&format!("\\begin{{tabular}}{{{cols}}}\n\\toprule\n"));
    out.push_str(&row(&t
        .headers
        .iter()
        .map(|h| header(h))
        .collect::<Vec<_>>()));
    out.push_str("\\midrule\n");
    for r in &t.rows {
        let cells: Vec<String> = r
            .iter()
            .zip(&long)
            .map(|(c, l)| if *l { paragraph(c) } else { cell(c) })
            .collect();
        out.push_str(&row(&cells));
    }
    out.push_str(&format!(
        "\\bottomrule\n\\end{{tabular}}}}\n\\end{{{env}}}\n"
    ));
    out
}

/// A rough width in points: 5 pt per character plus 12 pt of column gap.
fn estimated_width(t: &Table) -> usize {
    (0..t.headers.len())
        .map(|j| {
            let w = t
                .rows
                .iter()
                .map(|r| r[j].chars().count().min(LONG_CELL))
                .chain([t.headers[j].chars().count()])
                .max()
                .unwrap_or(0);
            5 * w + 12
        })
        .sum()
}

/// A column whose cells are all numbers (or empty / "-") is right-aligned.
fn numeric_column(t: &Table, j: usize) -> bool {
    t.rows
        .iter()
        .all(|r| r[j].is_empty() || r[j] == "-" || number(&r[j]).is_some())
}

fn row(cells: &[String]) -> String {
    format!("{} \\\\\n", cells.join(" & "))
}

/// A long cell as a ragged paragraph of a fixed width.
fn paragraph(c: &str) -> String {
    format!("\\parbox[t]{{7cm}}{{\\raggedright {}}}", text(c))
}

/// Headers with physics symbols typeset.
fn header(h: &str) -> String {
    let symbol = match h {
        "Delta" => "$\\Delta$",
        "Delta0" => "$\\Delta_0$",
        "2-Delta" => "$2-\\Delta$",
        "y" => "$y$",
        "y0" => "$y_0$",
        "ell_k" => "$\\ell_k$",
        "h" => "$h$",
        "hbar" => "$\\bar h$",
        "spin" => "$s$",
        "charge" => "$Q$",
        "k" => "$k$",
        "K" => "$K$",
        "K row" => "$K$ row",
        "particles m" => "$m$",
        "vector l" => "$l$",
        "l_a K^-1 l_b" => "$l_a^{T} K^{-1} l_b$",
        _ => "",
    };
    if !symbol.is_empty() {
        return symbol.to_string();
    }
    match h.strip_prefix("Delta ") {
        Some(rest) => format!("$\\Delta$ {}", text(rest)),
        None => text(h),
    }
}

/// A cell: a fraction, a number, or text with its symbols typeset.
fn cell(c: &str) -> String {
    if let Some((p, q)) = c.split_once('/') {
        if p.parse::<i64>().is_ok() && q.parse::<u64>().is_ok() {
            let (sign, p) = p.strip_prefix('-').map_or(("", p), |p| ("-", p));
            return format!("${sign}\\tfrac{{{p}}}{{{q}}}$");
        }
    }
    if c == "-" {
        return "--".to_string();
    }
    number(c).unwrap_or_else(|| text(c))
}

/// A number in math mode: `-0.5` -> `$-0.5$`, `5.0000e-2` ->
/// `$5.0\times10^{-2}$` (trailing zeros of the mantissa trimmed to one);
/// None for anything that is not a plain decimal number.
fn number(c: &str) -> Option<String> {
    let body = c.strip_prefix(['+', '-']).unwrap_or(c);
    let plain = |s: &str| {
        !s.is_empty()
            && s.chars().all(|ch| ch.is_ascii_digit() || ch == '.')
            && s.chars().filter(|&ch| ch == '.').count() <= 1
            && s.chars().any(|ch| ch.is_ascii_digit())
    };
    let sign = &c[..c.len() - body.len()];
    match body.split_once(['e', 'E']) {
        None if plain(body) => Some(format!("${sign}{body}$")),
        Some((m, e)) if plain(m) && e.trim_start_matches(['+', '-']).parse::<u32>().is_ok() => {
            let e: i32 = e.parse().ok()?;
            Some(scientific(sign, m, e))
        }
        _ => None,
    }
}

/// `m x 10^e` with the mantissa's trailing zeros trimmed (one decimal kept).
fn scientific(sign: &str, m: &str, e: i32) -> String {
    let m = match m.split_once('.') {
        Some((i, f)) => {
            let f = f.trim_end_matches('0');
            format!("{i}.{}", if f.is_empty() { "0" } else { f })
        }
        None => m.to_string(),
    };
    if m.trim_start_matches(['0', '.']).is_empty() {
        return "$0$".to_string();
    }
    let sign = if sign == "-" { "-" } else { "" };
    if e == 0 {
        return format!("${sign}{m}$");
    }
    format!("${sign}{m}\\times10^{{{e}}}$")
}

/// Text with LaTeX specials escaped and a few symbols typeset: `->`, `<=`,
/// `>=`, `!=`, `|det K|`, `Z_n`, `Delta`, and a minus sign before a digit
/// that does not follow a letter or digit.
pub fn text(s: &str) -> String {
    let chars: Vec<char> = s.chars().collect();
    let mut out = String::with_capacity(s.len() + 8);
    let mut i = 0;
    while i < chars.len() {
        if let Some((tex, n)) = symbol_at(&chars, i) {
            out.push_str(&tex);
            i += n;
            continue;
        }
        let ch = chars[i];
        let prev = if i > 0 { Some(chars[i - 1]) } else { None };
        let next_digit = chars.get(i + 1).is_some_and(|c| c.is_ascii_digit());
        if ch == '-' && next_digit && !prev.is_some_and(|p| p.is_alphanumeric()) {
            out.push_str("$-$");
        } else {
            push_escaped(&mut out, ch);
        }
        i += 1;
    }
    out
}

/// A typeset symbol starting at `chars[i]` and how many characters it takes.
fn symbol_at(chars: &[char], i: usize) -> Option<(String, usize)> {
    const SYMBOLS: [(&str, &str); 6] = [
        ("|det K|", "$|\\det K|$"),
        ("->", "$\\to$"),
        ("<=", "$\\le$"),
        (">=", "$\\ge$"),
        ("!=", "$\\ne$"),
        ("Delta", "$\\Delta$"),
    ];
    let rest: String = chars[i..].iter().take(8).collect();
    let word_start = i == 0 || !chars[i - 1].is_alphanumeric();
    for (plain, tex) in SYMBOLS {
        let whole_word = plain != "Delta" || word_start;
        if rest.starts_with(plain) && whole_word {
            return Some((tex.to_string(), plain.chars().count()));
        }
    }
    // Z_n: the cyclic group.
    if chars[i] == 'Z' && word_start && chars.get(i + 1) == Some(&'_') {
        let digits: String = chars[i + 2..]
            .iter()
            .take_while(|c| c.is_ascii_digit())
            .collect();
        if !digits.is_empty() {
            return Some((format!("$Z_{{{digits}}}$"), 2 + digits.len()));
        }
    }
    None
}

fn push_escaped(out: &mut String, ch: char) {
    match ch {
        '\\' => out.push_str("\\textbackslash{}"),
        '&' | '%' | '$' | '#' | '_' | '{' | '}' => {
            out.push('\\');
            out.push(ch);
        }
        '~' => out.push_str("\\textasciitilde{}"),
        '^' => out.push_str("\\textasciicircum{}"),
        // Math mode: OT1 text fonts have no such glyphs (the text commands
        // would fall back to a bitmap TS1 font).
        '|' => out.push_str("$|$"),
        '<' => out.push_str("$<$"),
        '>' => out.push_str("$>$"),
        _ if ch.is_ascii() => out.push(ch),
        _ => push_unicode(out, ch),
    }
}

/// Greek letters (as in parameter labels, `λ`) in math mode, a few other
/// symbols of figure labels likewise; Latin-1 letters as they are (utf8
/// input, the default of LaTeX since 2018); any other character, which
/// pdflatex could not typeset, as its code point in typewriter type.
fn push_unicode(out: &mut String, ch: char) {
    let code = ch as u32;
    let math = match ch {
        'α'..='ω' | 'Α'..='Ω' => match greek(ch) {
            Some(tex) if tex.starts_with('\\') => Some(tex),
            // A capital that looks like a Latin one is that letter.
            Some(latin) => return out.push_str(&latin),
            None => None,
        },
        'µ' => Some("\\mu".into()),
        'ℓ' => Some("\\ell".into()),
        '·' => Some("\\cdot".into()),
        '×' => Some("\\times".into()),
        '−' => Some("-".into()),
        '₀'..='₉' => Some(format!("_{{{}}}", code - '₀' as u32)),
        _ => None,
    };
    match math {
        Some(m) => {
            out.push('$');
            out.push_str(&m);
            out.push('$');
        }
        None if code < 0x100 => out.push(ch),
        None => out.push_str(&format!("{{\\ttfamily U+{code:04X}}}")),
    }
}

/// The TeX of a Greek letter: a math command (`\lambda`, `\Delta`), or the
/// Latin letter a capital looks like (`A`); None for the unassigned U+03A2.
fn greek(ch: char) -> Option<String> {
    const LOWER: [&str; 25] = [
        "alpha", "beta", "gamma", "delta", "epsilon", "zeta", "eta", "theta", "iota", "kappa",
        "lambda", "mu", "nu", "xi", "o", "pi", "rho", "varsigma", "sigma", "tau", "upsilon", "phi",
        "chi", "psi", "omega",
    ];
    const UPPER: [&str; 25] = [
        "A",
        "B",
        "\\Gamma",
        "\\Delta",
        "E",
        "Z",
        "H",
        "\\Theta",
        "I",
        "K",
        "\\Lambda",
        "M",
        "N",
        "\\Xi",
        "O",
        "\\Pi",
        "P",
        "",
        "\\Sigma",
        "T",
        "\\Upsilon",
        "\\Phi",
        "X",
        "\\Psi",
        "\\Omega",
    ];
    let code = ch as u32;
    match ch {
        // Omicron has no command: it is an o.
        'ο' => Some("o".into()),
        'α'..='ω' => Some(format!("\\{}", LOWER[(code - 'α' as u32) as usize])),
        'Α'..='Ω' => {
            Some(UPPER[(code - 'Α' as u32) as usize].to_string()).filter(|s| !s.is_empty())
        }
        _ => None,
    }
}

/// Escape LaTeX special characters (no symbol typesetting).
pub fn escape(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for ch in s.chars() {
        push_escaped(&mut out, ch);
    }
    out
}

/// A comment line's text: one line, no line breaks, and no `^^` (TeX
/// reads `^^M` as an end of line even inside a comment).
fn comment(s: &str) -> String {
    s.replace(['\n', '\r'], " ").replace('^', "^{}")
}

/// Lowercase ASCII letters and digits, everything else one `-`.
fn slug(s: &str) -> String {
    let mut out = String::new();
    for ch in s.chars() {
        if ch.is_ascii_alphanumeric() {
            out.push(ch.to_ascii_lowercase());
        } else if !out.ends_with('-') && !out.is_empty() {
            out.push('-');
        }
    }
    out.trim_end_matches('-').to_string()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_use_math_mode_and_times_ten() {
        assert_eq!(cell("5.0000e-2"), "$5.0\\times10^{-2}$");
        assert_eq!(cell("-1.6748e-1"), "$-1.6748\\times10^{-1}$");
        assert_eq!(cell("1.0000e0"), "$1.0$");
        assert_eq!(cell("0.0000e0"), "$0$");
        assert_eq!(cell("-0.6000"), "$-0.6000$");
        assert_eq!(cell("+0.267949"), "$+0.267949$");
        assert_eq!(cell("-2/3"), "$-\\tfrac{2}{3}$");
        assert_eq!(cell("-"), "--");
        assert_eq!(cell("e5"), "e5");
    }

    #[test]
    fn symbols_are_typeset_and_hyphens_in_words_stay() {
        assert_eq!(text("a -> b"), "a $\\to$ b");
        assert_eq!(text("Delta <= 2"), "$\\Delta$ $\\le$ 2");
        assert_eq!(text("Z_3"), "$Z_{3}$");
        assert_eq!(text("non-chiral"), "non-chiral");
        assert_eq!(text("(1, -1)"), "(1, $-$1)");
        assert_eq!(text("tunnel-hop@1"), "tunnel-hop@1");
        assert_eq!(header("|det K|"), "$|\\det K|$");
    }

    #[test]
    fn greek_and_other_unicode_become_commands_or_code_points() {
        assert_eq!(text("λ=0.8 meV"), "$\\lambda$=0.8 meV");
        assert_eq!(text("Δ₀ ΛΑ"), "$\\Delta$$_{0}$ $\\Lambda$A");
        assert_eq!(escape("ℓ·µ"), "$\\ell$$\\cdot$$\\mu$");
        assert_eq!(escape("é"), "é");
        // pdflatex has no glyph for it: its code point, visibly.
        assert_eq!(escape("☃"), "{\\ttfamily U+2603}");
    }

    #[test]
    fn labels_are_plain_slugs() {
        assert_eq!(
            slug("RG flow: filling-1/3 wire array"),
            "rg-flow-filling-1-3-wire-array"
        );
    }
}
