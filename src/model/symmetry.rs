//! The `[[symmetry]]` tables of a model file: conserved U(1) charges and
//! unitary Z_n maps of the fields (docs/physics.md section 6, "Symmetries").
//!
//! A U(1) has a charge vector t_s (one integer per field, per cell field in
//! arrays); the operator e^{i l.phi} carries the charge t_s^T K^-1 l = t_s.m.
//! A Z_n acts as phi -> W phi + 2 pi s / n with an integer matrix W (on one
//! wire's cell in arrays, the same on every wire) and an integer shift s.
//!
//! Invariants of a [`Symmetry`] once read: names are identifiers, unique,
//! and not `charge` (the key of the electric charge in `allowed_charge`);
//! a charge vector has one entry per (cell) field; a map is square of the
//! cell's size, preserves K exactly (W^T K W = K) and has order exactly n
//! on local operators: g^n acts trivially, g^d does not for any proper
//! divisor d of n. Whether V is symmetric is a property of a parameter point
//! and is checked where the symmetry is used ([`Symmetry::preserves_v`]).

use std::collections::BTreeSet;

use nalgebra::DMatrix;

use super::raw::RawSymmetry;
use super::values::{self, Ctx};
use crate::error::InputError;

/// Largest order n of a Z_n symmetry.
pub const MAX_ORDER: i64 = 1024;

/// What a symmetry does.
#[derive(Debug, Clone, PartialEq)]
pub enum SymmetryKind {
    /// A conserved U(1) with this charge per (cell) field.
    U1 {
        /// Charge vector t_s.
        charge: Vec<i64>,
    },
    /// phi -> W phi + 2 pi shift / order.
    Zn {
        /// W, square of the cell's size (rows act on phi).
        map: Vec<Vec<i64>>,
        /// The integer shift s.
        shift: Vec<i64>,
        /// n.
        order: i64,
    },
}

/// One validated `[[symmetry]]`.
#[derive(Debug, Clone, PartialEq)]
pub struct Symmetry {
    /// Unique name.
    pub name: String,
    /// U(1) or Z_n.
    pub kind: SymmetryKind,
}

impl Symmetry {
    /// The TOML key of this symmetry in messages.
    pub fn key(&self) -> String {
        format!("symmetry \"{}\"", self.name)
    }

    /// True for a U(1).
    pub fn is_u1(&self) -> bool {
        matches!(self.kind, SymmetryKind::U1 { .. })
    }

    /// Z_n: W^T V W = V for every block of V (cell blocks in arrays), to a
    /// relative 1e-12 of the largest entry. U(1)s always pass.
    pub fn preserves_v(&self, blocks: &[DMatrix<f64>]) -> bool {
        let SymmetryKind::Zn { map, .. } = &self.kind else {
            return true;
        };
        let n = map.len();
        let w = DMatrix::from_fn(n, n, |i, j| map[i][j] as f64);
        blocks.iter().all(|v| {
            let scale = v.amax().max(1e-300);
            (w.transpose() * v * &w - v).amax() <= 1e-12 * scale
        })
    }
}

/// Read every `[[symmetry]]` against the cell K (n_c fields).
pub(crate) fn read_symmetries(
    ctx: &Ctx,
    raw: &[RawSymmetry],
    k: &[Vec<i64>],
) -> Result<Vec<Symmetry>, InputError> {
    let mut names = BTreeSet::new();
    let mut out = Vec::with_capacity(raw.len());
    for s in raw {
        let key = format!("symmetry \"{}\"", s.name);
        if !values::is_identifier(&s.name) || s.name == "charge" {
            return Err(ctx.err(
                &format!("{key}.name"),
                "a symmetry name must start with a letter and use letters, digits and _ (and `charge` names the electric charge)",
            ));
        }
        if !names.insert(s.name.clone()) {
            return Err(ctx.err(
                &format!("{key}.name"),
                "duplicate symmetry name (names must be unique)",
            ));
        }
        let kind = read_kind(ctx, s, &key, k)?;
        out.push(Symmetry {
            name: s.name.clone(),
            kind,
        });
    }
    Ok(out)
}

fn read_kind(
    ctx: &Ctx,
    s: &RawSymmetry,
    key: &str,
    k: &[Vec<i64>],
) -> Result<SymmetryKind, InputError> {
    let n = k.len();
    match (&s.charge, &s.map) {
        (Some(c), None) => {
            if s.shift.is_some() || s.order.is_some() {
                return Err(ctx.err(key, "`shift` and `order` belong to a Z_n (`map`), not to a U(1) (`charge`)"));
            }
            let what = "one per field (per cell field in arrays)";
            let charge = values::int_vector(ctx, c, &format!("{key}.charge"), n, what)?;
            Ok(SymmetryKind::U1 { charge })
        }
        (None, Some(m)) => read_map(ctx, s, m, key, k),
        (Some(_), Some(_)) => Err(ctx.err(
            key,
            "give either `charge` (a conserved U(1)) or `map` (a Z_n), not both",
        )),
        (None, None) => Err(ctx.err(
            key,
            "missing `charge` (a conserved U(1)) or `map` (a Z_n: phi -> W phi + 2 pi shift / order)",
        )),
    }
}

fn read_map(
    ctx: &Ctx,
    s: &RawSymmetry,
    m: &toml::Value,
    key: &str,
    k: &[Vec<i64>],
) -> Result<SymmetryKind, InputError> {
    let n = k.len();
    let mkey = format!("{key}.map");
    let map = values::int_matrix(ctx, m, &mkey)?;
    if map.len() != n {
        return Err(ctx.err(
            &mkey,
            format!(
                "expected a {n}x{n} integer matrix (one row per field of the K matrix's cell), found {0}x{0}",
                map.len()
            ),
        ));
    }
    let shift = match &s.shift {
        Some(v) => values::int_vector(ctx, v, &format!("{key}.shift"), n, "one per field")?,
        None => vec![0; n],
    };
    let okey = format!("{key}.order");
    let order = match &s.order {
        Some(toml::Value::Integer(o)) if (2..=MAX_ORDER).contains(o) => *o,
        Some(other) => {
            return Err(ctx.err(
                &okey,
                format!("expected an integer from 2 to {MAX_ORDER} (n of Z_n), found {other}"),
            ))
        }
        None => return Err(ctx.err(&okey, "missing: the order n of the Z_n (2 for a Z_2)")),
    };
    check_preserves_k(ctx, &map, k, &mkey)?;
    check_order(ctx, &map, &shift, order, k, &okey)?;
    Ok(SymmetryKind::Zn { map, shift, order })
}

/// W^T K W = K exactly (i128; entries are bounded by the model's limits,
/// an overflow is reported as a failure to preserve K).
fn check_preserves_k(
    ctx: &Ctx,
    w: &[Vec<i64>],
    k: &[Vec<i64>],
    key: &str,
) -> Result<(), InputError> {
    let n = k.len();
    let kw = mul(k, w);
    let wt: Vec<Vec<i64>> = (0..n).map(|i| (0..n).map(|j| w[j][i]).collect()).collect();
    let wtkw = kw.and_then(|kw| mul(&wt, &kw));
    if wtkw.as_deref() == Some(k) {
        return Ok(());
    }
    Err(ctx.err(
        key,
        "the map does not preserve K: W^T K W != K, so it would change the commutation relations of the fields (check which fields it exchanges and their signs)",
    ))
}

/// A x B in i64 with overflow checks.
fn mul(a: &[Vec<i64>], b: &[Vec<i64>]) -> Option<Vec<Vec<i64>>> {
    let n = a.len();
    (0..n)
        .map(|i| {
            (0..n)
                .map(|j| {
                    (0..n).try_fold(0i64, |acc, t| {
                        acc.checked_add(a[i][t].checked_mul(b[t][j])?)
                    })
                })
                .collect()
        })
        .collect()
}

/// g^d acts trivially on every local operator l = K m: W^d = 1 and
/// K (sum_{i<d} W^i s) = 0 mod n (then e^{i l.(2 pi v / n)} = 1 for all m).
fn trivial_power(w: &[Vec<i64>], s: &[i64], n: i64, k: &[Vec<i64>], d: i64) -> Option<bool> {
    let size = w.len();
    let id: Vec<Vec<i64>> = (0..size)
        .map(|i| (0..size).map(|j| (i == j) as i64).collect())
        .collect();
    let mut power = id.clone();
    let mut v = vec![0i64; size];
    for _ in 0..d {
        // v <- s + W v builds sum_{i<d} W^i s; power <- W power.
        let wv: Vec<i64> = (0..size)
            .map(|i| (0..size).try_fold(0i64, |a, j| a.checked_add(w[i][j].checked_mul(v[j])?)))
            .collect::<Option<_>>()?;
        v = wv
            .iter()
            .zip(s)
            .map(|(a, b)| a.checked_add(*b))
            .collect::<Option<_>>()?;
        power = mul(w, &power)?;
    }
    if power != id {
        return Some(false);
    }
    let kv: Option<Vec<i64>> = k
        .iter()
        .map(|row| {
            row.iter()
                .zip(&v)
                .try_fold(0i64, |a, (x, y)| a.checked_add(x.checked_mul(*y)?))
        })
        .collect();
    Some(kv?.iter().all(|x| x % n == 0))
}

/// The order is exactly n on local operators.
fn check_order(
    ctx: &Ctx,
    w: &[Vec<i64>],
    s: &[i64],
    n: i64,
    k: &[Vec<i64>],
    key: &str,
) -> Result<(), InputError> {
    let overflow = || ctx.err(key, "the powers of the map overflow 64-bit integers");
    if !trivial_power(w, s, n, k, n).ok_or_else(overflow)? {
        return Err(ctx.err(
            key,
            format!("applying the map {n} times is not the identity (W^{n} != 1, or the shift does not add up to a multiple of 2 pi on local operators): the order is not {n}"),
        ));
    }
    for d in (1..n).filter(|d| n % d == 0) {
        if trivial_power(w, s, n, k, d).ok_or_else(overflow)? {
            return Err(ctx.err(
                key,
                format!("applying the map {d} times is already the identity on local operators: the order is {d}, not {n}"),
            ));
        }
    }
    Ok(())
}
