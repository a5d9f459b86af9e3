//! Checked conversions from TOML values to the model's types. Each function
//! takes the dotted key of the value so that its errors name it.

use num_bigint::BigInt;
use num_traits::Zero;

use super::expr::{ParamSet, Scalar};
use crate::error::InputError;
use crate::math::rational::Rational;
use toml::Value;

/// The file being read, for error messages.
pub(crate) struct Ctx {
    pub file: String,
}

impl Ctx {
    pub fn new(file: &str) -> Self {
        Ctx {
            file: file.to_string(),
        }
    }

    pub fn err(&self, key: &str, message: impl Into<String>) -> InputError {
        InputError::new(&self.file, key, message)
    }
}

/// Letters, digits and underscores, starting with a letter.
pub(crate) fn is_identifier(name: &str) -> bool {
    let mut chars = name.chars();
    chars.next().is_some_and(|c| c.is_alphabetic())
        && chars.all(|c| c.is_alphanumeric() || c == '_')
}

fn kind(v: &Value) -> String {
    match v {
        Value::String(s) => format!("the string \"{s}\""),
        Value::Integer(i) => format!("the integer {i}"),
        Value::Float(x) => format!("the number {x}"),
        Value::Boolean(b) => format!("{b}"),
        Value::Array(_) => "a list".to_string(),
        Value::Table(_) => "a table".to_string(),
        Value::Datetime(_) => "a date".to_string(),
    }
}

/// A finite number.
pub(crate) fn number(ctx: &Ctx, v: &Value, key: &str) -> Result<f64, InputError> {
    let x = match v {
        Value::Integer(i) => *i as f64,
        Value::Float(x) => *x,
        other => return Err(ctx.err(key, format!("expected a number, found {}", kind(other)))),
    };
    if x.is_finite() {
        Ok(x)
    } else {
        Err(ctx.err(key, format!("expected a finite number, found {x}")))
    }
}

fn list<'a>(ctx: &Ctx, v: &'a Value, key: &str) -> Result<&'a Vec<Value>, InputError> {
    v.as_array()
        .ok_or_else(|| ctx.err(key, format!("expected a list, found {}", kind(v))))
}

fn integer(ctx: &Ctx, v: &Value, key: &str) -> Result<i64, InputError> {
    match v {
        Value::Integer(i) => Ok(*i),
        Value::Float(x) if x.fract() == 0.0 && x.abs() < 1e15 => Ok(*x as i64),
        other => Err(ctx.err(key, format!("expected an integer, found {}", kind(other)))),
    }
}

/// A list of exactly `n` integers.
pub(crate) fn int_vector(
    ctx: &Ctx,
    v: &Value,
    key: &str,
    n: usize,
    what: &str,
) -> Result<Vec<i64>, InputError> {
    let items = list(ctx, v, key)?;
    if items.len() != n {
        return Err(ctx.err(
            key,
            format!("expected {n} integers ({what}), found {}", items.len()),
        ));
    }
    items
        .iter()
        .enumerate()
        .map(|(i, x)| integer(ctx, x, &format!("{key}[{i}]")))
        .collect()
}

/// A non-empty square integer matrix.
pub(crate) fn int_matrix(ctx: &Ctx, v: &Value, key: &str) -> Result<Vec<Vec<i64>>, InputError> {
    let rows = list(ctx, v, key)?;
    if rows.is_empty() {
        return Err(ctx.err(key, "expected a non-empty square matrix (a list of rows)"));
    }
    let n = rows.len();
    rows.iter()
        .enumerate()
        .map(|(i, r)| {
            let rk = format!("{key}[{i}]");
            let items = list(ctx, r, &rk)?;
            if items.len() != n {
                return Err(ctx.err(
                    &rk,
                    format!(
                        "the matrix must be square: {n} rows, but this row has {} entries",
                        items.len()
                    ),
                ));
            }
            int_vector(ctx, r, &rk, n, "one per column")
        })
        .collect()
}

/// K must be symmetric (det K != 0 is checked with exact arithmetic later).
pub(crate) fn check_symmetric_int(ctx: &Ctx, k: &[Vec<i64>], key: &str) -> Result<(), InputError> {
    for (i, row) in k.iter().enumerate() {
        for (j, col) in k.iter().enumerate().take(i) {
            if row[j] != col[i] {
                return Err(ctx.err(
                    key,
                    format!(
                        "K must be symmetric: {key}[{i}][{j}] = {} but {key}[{j}][{i}] = {}",
                        row[j], col[i]
                    ),
                ));
            }
        }
    }
    Ok(())
}

/// A number or an expression string in the parameters.
pub(crate) fn scalar(
    ctx: &Ctx,
    v: &Value,
    key: &str,
    params: &ParamSet,
) -> Result<Scalar, InputError> {
    match v {
        Value::String(s) => {
            Scalar::compile(s, params).map_err(|e| ctx.err(key, format!("\"{s}\": {e}")))
        }
        other => Ok(Scalar::Const(number(ctx, other, key)?)),
    }
}

/// A list of `n` scalars.
pub(crate) fn scalar_vector(
    ctx: &Ctx,
    v: &Value,
    key: &str,
    params: &ParamSet,
    n: usize,
) -> Result<Vec<Scalar>, InputError> {
    let items = list(ctx, v, key)?;
    if items.len() != n {
        return Err(ctx.err(
            key,
            format!(
                "expected {n} entries (one per field), found {}",
                items.len()
            ),
        ));
    }
    items
        .iter()
        .enumerate()
        .map(|(i, x)| scalar(ctx, x, &format!("{key}[{i}]"), params))
        .collect()
}

/// An `n x n` matrix of scalars.
pub(crate) fn scalar_matrix(
    ctx: &Ctx,
    v: &Value,
    key: &str,
    params: &ParamSet,
    n: usize,
) -> Result<Vec<Vec<Scalar>>, InputError> {
    let rows = list(ctx, v, key)?;
    if rows.len() != n {
        return Err(ctx.err(
            key,
            format!(
                "expected a {n}x{n} matrix (as K), found {} rows",
                rows.len()
            ),
        ));
    }
    rows.iter()
        .enumerate()
        .map(|(i, r)| scalar_vector(ctx, r, &format!("{key}[{i}]"), params, n))
        .collect()
}

/// A wire offset written as a table key: a non-negative integer in
/// canonical form (no sign, no leading zeros), so that two keys never name
/// the same offset (e.g. "1" and "01", which would silently collide).
pub(crate) fn offset_key(ctx: &Ctx, key: &str, full: &str) -> Result<usize, InputError> {
    key.parse::<usize>()
        .ok()
        .filter(|o| *o <= 1_000_000 && o.to_string() == key)
        .ok_or_else(|| {
            ctx.err(
                full,
                format!("`{key}` is not a wire separation: keys must be non-negative integers written without sign or leading zeros (0 = same wire, 1 = nearest neighbour, ...)"),
            )
        })
}

/// Per-offset integer vectors `{ 0 = [...], 1 = [...] }`; a plain list means
/// offset 0 only. Sorted by offset.
pub(crate) fn offset_vectors(
    ctx: &Ctx,
    v: &Value,
    key: &str,
    n: usize,
) -> Result<Vec<(usize, Vec<i64>)>, InputError> {
    match v {
        Value::Array(_) => Ok(vec![(
            0,
            int_vector(ctx, v, key, n, "one per field of the wire cell")?,
        )]),
        Value::Table(t) => {
            let mut parts = Vec::new();
            for (k, item) in t {
                let full = format!("{key}.{k}");
                let off = offset_key(ctx, k, &full)?;
                parts.push((
                    off,
                    int_vector(ctx, item, &full, n, "one per field of the wire cell")?,
                ));
            }
            parts.sort_by_key(|p| p.0);
            if parts.is_empty() {
                return Err(ctx.err(key, "expected at least one wire offset"));
            }
            Ok(parts)
        }
        other => Err(ctx.err(
            key,
            format!(
                "expected a list of integers or a table by wire offset, found {}",
                kind(other)
            ),
        )),
    }
}

/// An optional exact rational: an integer, a "p/q" string, or a decimal
/// number with a short exact expansion (0.5, 0.25, ...). Missing means 0.
pub(crate) fn rational_opt(
    ctx: &Ctx,
    v: Option<&Value>,
    key: &str,
) -> Result<Rational, InputError> {
    let Some(v) = v else {
        return Ok(Rational::zero());
    };
    let bad = |what: String| {
        ctx.err(
            key,
            format!(
                "expected an exact fraction (an integer, \"p/q\" or a short decimal), found {what}"
            ),
        )
    };
    match v {
        Value::Integer(i) => Ok(Rational::from_integer(BigInt::from(*i))),
        Value::Float(x) => decimal_to_rational(*x).ok_or_else(|| bad(format!("{x}"))),
        Value::String(s) => parse_fraction(s).ok_or_else(|| bad(format!("\"{s}\""))),
        other => Err(bad(kind(other))),
    }
}

fn decimal_to_rational(x: f64) -> Option<Rational> {
    if !x.is_finite() {
        return None;
    }
    // Accept decimals that are exact with up to 6 decimal digits.
    let scaled = x * 1e6;
    let rounded = scaled.round();
    if (scaled - rounded).abs() > 1e-6 || rounded.abs() > 1e15 {
        return None;
    }
    Some(Rational::new(
        BigInt::from(rounded as i64),
        BigInt::from(1_000_000),
    ))
}

/// "p", "p/q" or "-p/q".
pub(crate) fn parse_fraction(s: &str) -> Option<Rational> {
    let s = s.trim();
    let (p, q) = match s.split_once('/') {
        Some((p, q)) => (
            p.trim().parse::<BigInt>().ok()?,
            q.trim().parse::<BigInt>().ok()?,
        ),
        None => (s.parse::<BigInt>().ok()?, BigInt::from(1)),
    };
    if q.is_zero() {
        return None;
    }
    Some(Rational::new(p, q))
}
