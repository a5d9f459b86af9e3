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
}

impl ParamSet {
    /// Build from (name, default) pairs; names are sorted for a stable order.
    pub fn new(mut pairs: Vec<(String, f64)>) -> Self {
        pairs.sort_by(|a, b| a.0.cmp(&b.0));
        let (names, defaults) = pairs.into_iter().unzip();
        ParamSet { names, defaults }
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
        let expr = FlatEx::<f64>::parse(trimmed).map_err(|e| ExprError::Syntax(e.to_string()))?;
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
    fn syntax_errors_are_reported() {
        assert!(matches!(
            Scalar::compile("1 + * 2", &params()),
            Err(ExprError::Syntax(_))
        ));
    }
}
