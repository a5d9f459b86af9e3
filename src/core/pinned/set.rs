//! A pinned set of model terms on a [`System`]: validation of the names
//! (known, local, bosonic null, every translate commuting with every
//! other), the exact commutation test of the other terms, and their
//! dimensions in the residual theory at a parameter point.
//!
//! Arrays pin every translate of a named family. Explicit models and open
//! arrays use the dense exact construction ([`super::Split`]); periodic
//! arrays of two or more wires and infinite arrays the per-q form
//! ([`super::q`]): the ring's own W points, or the refined midpoint rule.
//! Invariant: a term is given a pinned dimension only when it commutes with
//! every pinned translate (else it is disordered).

use nalgebra::DMatrix;
use num_traits::Zero;

use super::q::{self, QInput, Rule};
use super::{Form, Split};
use crate::core::invariants::particles_of;
use crate::core::qspace::{self, Quadrature};
use crate::core::system::System;
use crate::error::{Error, InputError};
use crate::math::rational::{self as exact, fmt_rational, Rational};

/// Validated pinned families (model term indices, in the order named).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct PinnedSet {
    /// Term names.
    pub names: Vec<String>,
    /// Model term indices.
    pub indices: Vec<usize>,
}

/// Why a set of names cannot pin (the message names the term or the pair).
pub fn check_names(sys: &System, names: &[String]) -> Result<PinnedSet, String> {
    let mut set = PinnedSet {
        names: Vec::new(),
        indices: Vec::new(),
    };
    for name in names {
        let Some(i) = sys.model.terms.iter().position(|t| &t.name == name) else {
            let known: Vec<&str> = sys.model.terms.iter().map(|t| t.name.as_str()).collect();
            return Err(format!(
                "unknown term \"{name}\" (the model's terms: {})",
                if known.is_empty() {
                    "none".to_string()
                } else {
                    known.join(", ")
                }
            ));
        };
        if !set.indices.contains(&i) {
            check_one(sys, i)?;
            set.indices.push(i);
            set.names.push(name.clone());
        }
    }
    for (a, &i) in set.indices.iter().enumerate() {
        for &j in &set.indices[..=a] {
            clash(sys, j, i)?;
        }
    }
    Ok(set)
}

/// The terms marked `target = true`, when there are two or more: they must
/// pin together (the target phase is the lattice they span). The error
/// names the model file, the last target's key and the failing term or
/// pair. One target (or none) is not checked here: a single target may be
/// any term, as before several targets were allowed.
pub fn check_targets(sys: &System) -> Result<(), InputError> {
    let names: Vec<String> = sys
        .model
        .targets()
        .into_iter()
        .map(|i| sys.model.terms[i].name.clone())
        .collect();
    if names.len() < 2 {
        return Ok(());
    }
    check_names(sys, &names).map(|_| ()).map_err(|m| {
        InputError::new(
            &sys.model.file,
            format!("term \"{}\".target", names[names.len() - 1]),
            format!(
                "the targets must pin together (the target phase is the lattice they span): {m}"
            ),
        )
    })
}

/// The families named with a flag (`--pin`): errors name the flag.
pub fn from_names(sys: &System, names: &[String], flag: &str) -> Result<PinnedSet, InputError> {
    check_names(sys, names).map_err(|m| InputError::new("command line", flag, m))
}

/// Local, bosonic null, with at least one translate.
fn check_one(sys: &System, i: usize) -> Result<(), String> {
    let name = &sys.model.terms[i].name;
    let fam = &sys.lattice.families[i];
    if fam.translates.is_empty() {
        return Err(format!(
            "term \"{name}\" has no translate in this array of {} wires",
            sys.lattice.wires
        ));
    }
    let ti = &sys.invariants.terms[i];
    if !ti.local {
        return Err(format!(
            "term \"{name}\" is not local: its particle content K^-1 l = ({}) is not integral, so it is not built from particles and cannot pin",
            ti.particles.iter().map(fmt_rational).collect::<Vec<_>>().join(", ")
        ));
    }
    let spin2 = exact::dot_int(&ti.particles, &fam.rep().l);
    if !spin2.is_zero() {
        return Err(format!(
            "term \"{name}\" is not null: its conformal spin (1/2) l.K^-1 l is {}, not 0; only null terms can pin",
            fmt_rational(&(spin2 / Rational::from_integer(2.into())))
        ));
    }
    Ok(())
}

/// Every translate of term a commutes with every translate of term b.
fn clash(sys: &System, a: usize, b: usize) -> Result<(), String> {
    let lat = &sys.lattice;
    let inv = &sys.invariants.cell_inverse;
    let (fa, fb) = (&lat.families[a], &lat.families[b]);
    for ta in &fa.translates {
        let m = particles_of(lat, inv, ta);
        // Only the fields where K^-1 l_a is non-zero contribute.
        let on: Vec<usize> = (0..m.len()).filter(|&i| !m[i].is_zero()).collect();
        for tb in &fb.translates {
            let phase: Rational = on
                .iter()
                .filter(|&&i| tb.l[i] != 0)
                .map(|&i| &m[i] * exact::int(tb.l[i]))
                .sum();
            if phase.is_zero() {
                continue;
            }
            let (na, nb) = (&sys.model.terms[a].name, &sys.model.terms[b].name);
            let at = |w: usize| {
                if lat.boundary.is_some() {
                    format!(" at wire {w}")
                } else {
                    String::new()
                }
            };
            let pair = if a == b {
                format!(
                    "two translates of \"{na}\" ({} and {})",
                    at(ta.anchor).trim_start(),
                    at(tb.anchor).trim_start()
                )
            } else {
                format!("\"{na}\"{} and \"{nb}\"{}", at(ta.anchor), at(tb.anchor))
            };
            return Err(format!(
                "{pair} do not commute: their mutual phase l_a.K^-1 l_b is {}, not 0; a pinned set must commute",
                fmt_rational(&phase)
            ));
        }
    }
    Ok(())
}

/// Term `t` commutes with every translate of every pinned family (exact).
pub fn commutes(sys: &System, set: &PinnedSet, t: usize) -> bool {
    set.indices.iter().all(|&p| sys.invariants.commutes[t][p])
}

/// A dense lattice vector (all fields of the lattice) commutes with every
/// pinned translate (exact): for terms the closure generates.
pub fn commutes_vector(sys: &System, set: &PinnedSet, l: &[i64]) -> bool {
    set.indices.iter().all(|&p| {
        sys.lattice.families[p]
            .translates
            .iter()
            .all(|t| sys.invariants.pairing.commute(l, &t.l))
    })
}

/// The dense lattice vectors of every pinned translate.
pub fn vectors(sys: &System, set: &PinnedSet) -> Vec<Vec<i64>> {
    set.indices
        .iter()
        .flat_map(|&p| {
            sys.lattice.families[p]
                .translates
                .iter()
                .map(|t| t.l.clone())
        })
        .collect()
}

/// Every term's place in the residual theory at a point.
#[derive(Debug, Clone)]
pub struct PinnedDims {
    /// Per term: commutes with every pinned translate.
    pub commutes: Vec<bool>,
    /// Per term: bosonic dimension in the residual theory (None when the
    /// term does not commute: disordered).
    pub bosonic: Vec<Option<f64>>,
    /// Infinite arrays: the quadrature of the pinned integrals.
    pub quadrature: Option<Quadrature>,
}

/// Evaluate at a point with the given form; `dense` forces the dense
/// construction for a periodic array (a cross-check of the per-q one).
pub fn evaluate(
    sys: &System,
    set: &PinnedSet,
    point: &[f64],
    form: Form,
    dense: bool,
) -> Result<PinnedDims, Error> {
    let commuting: Vec<bool> = (0..sys.model.terms.len())
        .map(|t| commutes(sys, set, t))
        .collect();
    let (all, quadrature) = match (&sys.q, dense) {
        (Some(_), false) => per_q(sys, set, point, form)?,
        _ => (dense_dims(sys, set, point, form)?, None),
    };
    let bosonic = all
        .into_iter()
        .zip(&commuting)
        .map(|(d, &c)| c.then_some(d))
        .collect();
    Ok(PinnedDims {
        commutes: commuting,
        bosonic,
        quadrature,
    })
}

fn numerical(sys: &System, point: &[f64], e: f64) -> Error {
    Error::Numerical(format!(
        "{}: the residual theory of the pinned set at {} is not positive (smallest eigenvalue {e:.3e})",
        sys.model.file,
        sys.model.params.describe(point)
    ))
}

fn dense_dims(sys: &System, set: &PinnedSet, point: &[f64], form: Form) -> Result<Vec<f64>, Error> {
    let d_p = dense_matrix(sys, set, point, form)?;
    Ok(sys
        .lattice
        .families
        .iter()
        .map(|f| super::dimension(&d_p, &f.rep().l))
        .collect())
}

fn per_q(
    sys: &System,
    set: &PinnedSet,
    point: &[f64],
    form: Form,
) -> Result<(Vec<f64>, Option<Quadrature>), Error> {
    let qm = sys.q.as_ref().expect("per_q is only called with a q model");
    let blocks = sys.v_blocks(point)?;
    let pins: Vec<Vec<(usize, Vec<f64>)>> =
        set.indices.iter().map(|&i| qm.terms[i].clone()).collect();
    let input = QInput {
        k: &qm.k,
        kinv: &qm.kinv,
        blocks: &blocks,
        pins: &pins,
        terms: &qm.terms,
    };
    let fail = |e: qspace::NotPositive| numerical(sys, point, e.smallest_eigenvalue);
    if qm.infinite {
        let (res, quad) = q::converge(&input, qm.range, form, qspace::TOLERANCE).map_err(fail)?;
        Ok((res.dimensions, Some(quad)))
    } else {
        let res = q::on_rule(&input, Rule::Ring(sys.lattice.wires), form).map_err(fail)?;
        Ok((res.dimensions, None))
    }
}

/// The pinned D of a whole dense system (explicit, open or periodic) at a
/// point, for callers that need the matrix (tests, the staged flow).
pub fn dense_matrix(
    sys: &System,
    set: &PinnedSet,
    point: &[f64],
    form: Form,
) -> Result<DMatrix<f64>, Error> {
    let p = vectors(sys, set);
    match form {
        Form::Exact => {
            let split = Split::new(&sys.lattice.k, &p)
                .ok_or_else(|| Error::Numerical("K is singular".to_string()))?;
            let v = sys.v_at(point)?;
            super::exact(&sys.k, &v, &split).map_err(|e| numerical(sys, point, e))
        }
        Form::Reference => {
            let fp = sys.fixed_point(point)?;
            let keep = super::independent(&p);
            let cols: Vec<&[i64]> = keep.iter().map(|&i| p[i].as_slice()).collect();
            Ok(super::reference(
                &fp.d,
                &super::columns(sys.lattice.n, &cols),
            ))
        }
    }
}
