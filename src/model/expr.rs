//! Scalars written in a model file: plain numbers or arithmetic expressions
//! in the model's named parameters, compiled once and evaluated many times.
//!
//! Invariant: a compiled [`Scalar`] only refers to parameters that exist in
//! the [`ParamSet`] it was compiled against; the slot table maps the
//! expression's variables (exmex orders them alphabetically) to positions in
//! the parameter vector, so evaluation is a gather plus the exmex evaluation.

use exmex::prelude::*;

/// The named parameters of a model with their default values, in a fixed
/// (sorted) order. A parameter point is a `&[f64]` in this order.
#[derive(Debug, Clone, PartialEq)]
pub struct ParamSet {
    names: Vec<String>,
    defaults: Vec<f64>,
    /// How figures name each parameter (slot order; both parts optional).
    labels: Vec<ParamLabel>,
}

/// How figures name a parameter: `[params] lambda = { value = 0.8,
/// label = "λ", unit = "meV" }` (docs/model-format.md).
#[derive(Debug, Clone, Default, PartialEq, Eq, serde::Serialize)]
pub struct ParamLabel {
    /// Display name (may be Greek or other Unicode), else the name.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub label: Option<String>,
    /// Unit, shown in parentheses after the name.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub unit: Option<String>,
}

impl ParamLabel {
    /// True when neither a label nor a unit is given.
    pub fn is_empty(&self) -> bool {
        self.label.is_none() && self.unit.is_none()
    }

    /// Axis title of the parameter `name`: `λ (meV)`, `λ`, `lambda (meV)`
    /// or `lambda`.
    pub fn title(&self, name: &str) -> String {
        let shown = self.label.as_deref().unwrap_or(name);
        match self.unit.as_deref().filter(|u| !u.is_empty()) {
            Some(u) => format!("{shown} ({u})"),
            None => shown.to_string(),
        }
    }

    /// `λ = 0.8 meV` (the value as given, the unit after it).
    pub fn assignment(&self, name: &str, value: &str) -> String {
        let shown = self.label.as_deref().unwrap_or(name);
        match self.unit.as_deref().filter(|u| !u.is_empty()) {
            Some(u) => format!("{shown} = {value} {u}"),
            None => format!("{shown} = {value}"),
        }
    }
}

impl ParamSet {
    /// Build from (name, default) pairs; names are sorted for a stable order.
    pub fn new(pairs: Vec<(String, f64)>) -> Self {
        Self::with_labels(
            pairs
                .into_iter()
                .map(|(n, x)| (n, x, ParamLabel::default()))
                .collect(),
        )
    }

    /// Build from (name, default, label) triples, sorted by name.
    pub fn with_labels(mut triples: Vec<(String, f64, ParamLabel)>) -> Self {
        triples.sort_by(|a, b| a.0.cmp(&b.0));
        let mut set = ParamSet {
            names: Vec::new(),
            defaults: Vec::new(),
            labels: Vec::new(),
        };
        for (n, x, l) in triples {
            set.names.push(n);
            set.defaults.push(x);
            set.labels.push(l);
        }
        set
    }

    /// The label and unit of a parameter (empty for an unknown name).
    pub fn label(&self, name: &str) -> ParamLabel {
        self.index(name)
            .map(|i| self.labels[i].clone())
            .unwrap_or_default()
    }

    /// The labels of the parameters that have one, by name (for JSON).
    pub fn labels_json(&self) -> serde_json::Map<String, serde_json::Value> {
        self.names
            .iter()
            .zip(&self.labels)
            .filter(|(_, l)| !l.is_empty())
            .map(|(n, l)| (n.clone(), serde_json::to_value(l).unwrap_or_default()))
            .collect()
    }

    /// Parameter names in slot order.
    pub fn names(&self) -> &[String] {
        &self.names
    }

    /// Default values in slot order.
    pub fn defaults(&self) -> &[f64] {
        &self.defaults
    }

    /// Slot of a parameter.
    pub fn index(&self, name: &str) -> Option<usize> {
        self.names.iter().position(|n| n == name)
    }

    /// Number of parameters.
    pub fn len(&self) -> usize {
        self.names.len()
    }

    /// True when the model has no parameters.
    pub fn is_empty(&self) -> bool {
        self.names.is_empty()
    }

    /// A parameter point as a JSON object (name -> value), for reports.
    pub fn json_point(&self, point: &[f64]) -> serde_json::Map<String, serde_json::Value> {
        self.names
            .iter()
            .cloned()
            .zip(point.iter().map(|x| serde_json::json!(x)))
            .collect()
    }

    /// `name=value` pairs of a parameter point, for messages and reports.
    pub fn describe(&self, point: &[f64]) -> String {
        if self.names.is_empty() {
            return "(no parameters)".to_string();
        }
        self.names
            .iter()
            .zip(point)
            .map(|(n, v)| format!("{n}={v}"))
            .collect::<Vec<_>>()
            .join(", ")
    }
}

/// Why an expression could not be compiled.
#[derive(Debug, Clone, PartialEq)]
pub enum ExprError {
    /// The text is not a valid expression.
    Syntax(String),
    /// A name that is neither a parameter nor a known constant; with its
    /// byte position in the text.
    UnknownName { name: String, position: usize },
    /// A name called as a function (`name(...)`) that is not one of
    /// [`FUNCTIONS`]; with its byte position in the text.
    UnknownFunction { name: String, position: usize },
}

impl std::fmt::Display for ExprError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            ExprError::Syntax(m) => write!(f, "cannot parse expression: {m}"),
            ExprError::UnknownName { name, position } => write!(
                f,
                "unknown parameter `{name}` at position {} (declare it under [params])",
                position + 1
            ),
            ExprError::UnknownFunction { name, position } => write!(
                f,
                "unknown function `{name}` at position {} (known functions: {})",
                position + 1,
                FUNCTIONS.join(", ")
            ),
        }
    }
}

/// Names that expressions already give a meaning (constants and functions
/// of the expression parser, and `pi`): a parameter with one of these names
/// would be silently ignored or shadow the built-in (`e` is Euler's number).
pub const RESERVED_NAMES: &[&str] = &[
    "pi", "PI", "E", "e", "TAU", "abs", "acos", "acosh", "asin", "asinh", "atan", "atanh", "cbrt",
    "ceil", "cos", "cosh", "exp", "floor", "fract", "ln", "log", "log10", "log2", "round",
    "signum", "sin", "sinh", "sqrt", "tan", "tanh", "trunc",
];

/// The functions of expressions (the [`RESERVED_NAMES`] that are called).
pub const FUNCTIONS: &[&str] = &[
    "abs", "acos", "acosh", "asin", "asinh", "atan", "atanh", "cbrt", "ceil", "cos", "cosh", "exp",
    "floor", "fract", "ln", "log", "log10", "log2", "round", "signum", "sin", "sinh", "sqrt",
    "tan", "tanh", "trunc",
];

/// Largest number of distinct parameters one expression may use; evaluation
/// gathers them into a stack buffer of this size.
pub const MAX_EXPR_VARS: usize = 32;

/// A number or a compiled expression.
#[derive(Debug, Clone)]
pub enum Scalar {
    /// A literal number.
    Const(f64),
    /// A compiled expression with its slot table.
    Expr(Box<CompiledExpr>),
}

/// A compiled expression (see [`Scalar`]).
#[derive(Debug, Clone)]
pub struct CompiledExpr {
    text: String,
    expr: FlatEx<f64>,
    /// `slots[i]` is the parameter slot of the expression's i-th variable, or
    /// `None` for the built-in constant `pi`.
    slots: Vec<Option<usize>>,
}

impl Scalar {
    /// Compile `text` against `params`. Numbers are parsed directly.
    pub fn compile(text: &str, params: &ParamSet) -> Result<Scalar, ExprError> {
        let trimmed = text.trim();
        if let Ok(x) = trimmed.parse::<f64>() {
            return Ok(Scalar::Const(x));
        }
        check_characters(trimmed)?;
        check_functions(trimmed)?;
        let plain = expand_exponents(trimmed)?;
        let expr = FlatEx::<f64>::parse(&plain).map_err(|e| ExprError::Syntax(e.to_string()))?;
        let mut slots = Vec::with_capacity(expr.var_names().len());
        for name in expr.var_names() {
            match params.index(name) {
                Some(i) => slots.push(Some(i)),
                None if name == "pi" => slots.push(None),
                None => {
                    return Err(ExprError::UnknownName {
                        position: find_identifier(trimmed, name).unwrap_or(0),
                        name: name.clone(),
                    })
                }
            }
        }
        if slots.len() > MAX_EXPR_VARS {
            return Err(ExprError::Syntax(format!(
                "an expression may use at most {MAX_EXPR_VARS} parameters"
            )));
        }
        Ok(Scalar::Expr(Box::new(CompiledExpr {
            text: trimmed.to_string(),
            expr,
            slots,
        })))
    }

    /// Evaluate at a parameter point (slot order of the [`ParamSet`]).
    /// Returns NaN if the expression cannot be evaluated.
    pub fn eval(&self, point: &[f64]) -> f64 {
        match self {
            Scalar::Const(x) => *x,
            Scalar::Expr(c) => c.eval(point),
        }
    }

    /// True when the value does not depend on any parameter.
    pub fn is_const(&self) -> bool {
        matches!(self, Scalar::Const(_))
    }

    /// The text the scalar was written as (numbers are re-printed).
    pub fn text(&self) -> String {
        match self {
            Scalar::Const(x) => format!("{x}"),
            Scalar::Expr(c) => c.text.clone(),
        }
    }
}

impl CompiledExpr {
    fn eval(&self, point: &[f64]) -> f64 {
        let mut buf = [0.0f64; MAX_EXPR_VARS];
        for (b, slot) in buf.iter_mut().zip(&self.slots) {
            *b = match slot {
                Some(i) => point[*i],
                None => std::f64::consts::PI,
            };
        }
        self.expr.eval(&buf[..self.slots.len()]).unwrap_or(f64::NAN)
    }
}

/// Only the characters of the documented expression language reach the
/// parser: letters, digits, `_`, `.`, spaces, `+ - * / ^` and parentheses.
/// The parser gives other characters meanings of its own, and an
/// unterminated `{` (its quoting of unusual names) made it loop for ever.
fn check_characters(text: &str) -> Result<(), ExprError> {
    let allowed = |c: char| c.is_alphanumeric() || " \t_.+-*/^()".contains(c);
    match text.char_indices().find(|&(_, c)| !allowed(c)) {
        None => Ok(()),
        Some((i, c)) => Err(ExprError::Syntax(format!(
            "unexpected character `{c}` at position {} (expressions use numbers, parameter names, + - * / ^, parentheses and the functions sqrt, exp, ln, abs, sin, cos, tan)",
            text[..i].chars().count() + 1
        ))),
    }
}

/// Identifiers of `text` with their byte positions (a run of letters,
/// digits and `_` that starts with a letter or `_`; digits that start a
/// run belong to a number).
fn identifiers(text: &str) -> Vec<(usize, &str)> {
    let is_ident = |c: char| c.is_alphanumeric() || c == '_';
    let mut found = Vec::new();
    let mut chars = text.char_indices().peekable();
    while let Some((i, c)) = chars.next() {
        if !is_ident(c) {
            continue;
        }
        let mut end = i + c.len_utf8();
        while let Some(&(j, d)) = chars.peek() {
            if !is_ident(d) {
                break;
            }
            end = j + d.len_utf8();
            chars.next();
        }
        if !c.is_ascii_digit() {
            found.push((i, &text[i..end]));
        }
    }
    found
}

/// Every name followed by `(` must be one of [`FUNCTIONS`] (the parser's
/// own message for another one names its internals).
fn check_functions(text: &str) -> Result<(), ExprError> {
    for (i, name) in identifiers(text) {
        let called = text[i + name.len()..].trim_start().starts_with('(');
        if called && !FUNCTIONS.contains(&name) {
            return Err(ExprError::UnknownFunction {
                name: name.to_string(),
                position: i,
            });
        }
    }
    Ok(())
}

/// Largest decimal exponent written out by [`expand_exponents`]; beyond it
/// every double is 0 or infinite.
const MAX_EXPONENT: i64 = 400;

/// Rewrite numbers in scientific notation (`6.10352e-05`, `1E3`) as plain
/// decimals (`0.0000610352`, `1000`), which the expression parser reads:
/// the decimal text is the same number, so it parses to the same double.
fn expand_exponents(text: &str) -> Result<String, ExprError> {
    let b = text.as_bytes();
    let mut out = String::with_capacity(text.len());
    let mut i = 0;
    while i < b.len() {
        let starts_number = (b[i].is_ascii_digit()
            || (b[i] == b'.' && b.get(i + 1).is_some_and(u8::is_ascii_digit)))
            && (i == 0
                || !(b[i - 1].is_ascii_alphanumeric() || b[i - 1] == b'_' || b[i - 1] == b'.'));
        if !starts_number {
            let c = text[i..].chars().next().unwrap_or(' ');
            out.push(c);
            i += c.len_utf8();
            continue;
        }
        let (number, end) = read_number(text, i)?;
        out.push_str(&number);
        i = end;
    }
    Ok(out)
}

/// The number starting at byte `start`: its text as a plain decimal and the
/// byte after it.
fn read_number(text: &str, start: usize) -> Result<(String, usize), ExprError> {
    let b = text.as_bytes();
    let digits_from = |mut j: usize| {
        while j < b.len() && b[j].is_ascii_digit() {
            j += 1;
        }
        j
    };
    let int_end = digits_from(start);
    let frac_end = if b.get(int_end) == Some(&b'.') {
        digits_from(int_end + 1)
    } else {
        int_end
    };
    let mantissa_end = frac_end;
    let mut j = mantissa_end;
    if !matches!(b.get(j), Some(b'e' | b'E')) {
        return Ok((text[start..mantissa_end].to_string(), mantissa_end));
    }
    j += 1;
    if matches!(b.get(j), Some(b'+' | b'-')) {
        j += 1;
    }
    let exp_end = digits_from(j);
    let ident_after = b
        .get(exp_end)
        .is_some_and(|c| c.is_ascii_alphanumeric() || *c == b'_');
    if exp_end == j || ident_after {
        // Not an exponent (`2e` is 2 times Euler's e): leave it to the parser.
        return Ok((text[start..mantissa_end].to_string(), mantissa_end));
    }
    let exponent: i64 = text[mantissa_end + 1..exp_end]
        .parse()
        .ok()
        .filter(|e: &i64| e.abs() <= MAX_EXPONENT)
        .ok_or_else(|| {
            ExprError::Syntax(format!(
                "the exponent of `{}` is out of range (at most {MAX_EXPONENT} in magnitude)",
                &text[start..exp_end]
            ))
        })?;
    let int = &text[start..int_end];
    let frac = if frac_end > int_end {
        &text[int_end + 1..frac_end]
    } else {
        ""
    };
    Ok((shift_point(int, frac, exponent), exp_end))
}

/// The decimal `int.frac` times 10^exponent, written without an exponent.
fn shift_point(int: &str, frac: &str, exponent: i64) -> String {
    let digits = format!("{int}{frac}");
    let point = int.len() as i64 + exponent;
    let text = if point <= 0 {
        format!("0.{}{digits}", "0".repeat((-point) as usize))
    } else if point as usize >= digits.len() {
        format!("{digits}{}", "0".repeat(point as usize - digits.len()))
    } else {
        format!(
            "{}.{}",
            &digits[..point as usize],
            &digits[point as usize..]
        )
    };
    let trimmed = text.trim_start_matches('0');
    if trimmed.is_empty() || trimmed.starts_with('.') {
        format!("0{trimmed}")
    } else {
        trimmed.to_string()
    }
}

/// Byte position of `name` as a whole identifier in `text`.
fn find_identifier(text: &str, name: &str) -> Option<usize> {
    let is_ident = |c: char| c.is_alphanumeric() || c == '_';
    let mut from = 0;
    while let Some(off) = text[from..].find(name) {
        let start = from + off;
        let end = start + name.len();
        let before_ok = text[..start]
            .chars()
            .next_back()
            .is_none_or(|c| !is_ident(c));
        let after_ok = text[end..].chars().next().is_none_or(|c| !is_ident(c));
        if before_ok && after_ok {
            return Some(start);
        }
        from = end;
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;

    fn params() -> ParamSet {
        ParamSet::new(vec![("lambda".into(), 0.3), ("g".into(), 0.5)])
    }

    #[test]
    fn numbers_and_expressions_evaluate() {
        let p = params();
        let point = [0.5, 0.3]; // sorted: g, lambda
        assert_eq!(Scalar::compile("2.5", &p).unwrap().eval(&point), 2.5);
        let e = Scalar::compile("1 + lambda", &p).unwrap();
        assert!((e.eval(&point) - 1.3).abs() < 1e-15);
        let e = Scalar::compile("sqrt(1 - g^2)", &p).unwrap();
        assert!((e.eval(&point) - (0.75f64).sqrt()).abs() < 1e-15);
        let e = Scalar::compile("-lambda/2 + g*pi", &p).unwrap();
        assert!((e.eval(&point) - (-0.15 + 0.5 * std::f64::consts::PI)).abs() < 1e-14);
    }

    #[test]
    fn unknown_names_are_reported_with_position() {
        let err = Scalar::compile("1 + lamda", &params()).unwrap_err();
        assert_eq!(
            err,
            ExprError::UnknownName {
                name: "lamda".into(),
                position: 4
            }
        );
    }

    #[test]
    fn scientific_notation_is_the_same_number() {
        let p = params();
        let point = [0.5, 0.3]; // sorted: g, lambda
        for (text, want) in [
            ("g*6.10352e-05", 0.5 * 6.10352e-05),
            ("g*1E3", 0.5 * 1e3),
            ("lambda + 2.5e+2", 0.3 + 2.5e2),
            ("g * .5e1", 0.5 * 5.0),
            ("g*12e-1", 0.5 * 1.2),
            ("g*1e-320", 0.5 * 1e-320),
        ] {
            let got = Scalar::compile(text, &p).unwrap().eval(&point);
            assert_eq!(got, want, "{text}");
        }
        assert_eq!(shift_point("6", "10352", -5), "0.0000610352");
        assert_eq!(shift_point("12", "", 3), "12000");
        assert_eq!(shift_point("0", "5", 1), "5");
        assert_eq!(shift_point("1", "25", 1), "12.5");
        // `2e` alone is 2 times Euler's number, as before.
        let e = Scalar::compile("2e", &p).map(|s| s.eval(&point));
        assert!(e.map_or(true, |x| (x - 2.0 * std::f64::consts::E).abs() < 1e-12));
        assert!(Scalar::compile("g*1e999", &p).is_err());
    }

    #[test]
    fn unknown_functions_are_named_with_the_known_ones() {
        let err = Scalar::compile("1 + foo(g)", &params()).unwrap_err();
        assert_eq!(
            err,
            ExprError::UnknownFunction {
                name: "foo".into(),
                position: 4
            }
        );
        let text = err.to_string();
        assert!(
            text.contains("unknown function `foo` at position 5"),
            "{text}"
        );
        assert!(text.contains("sqrt"), "{text}");
        assert!(Scalar::compile("sqrt (g) + cos(lambda)", &params()).is_ok());
    }

    #[test]
    fn syntax_errors_are_reported() {
        assert!(matches!(
            Scalar::compile("1 + * 2", &params()),
            Err(ExprError::Syntax(_))
        ));
    }
}
