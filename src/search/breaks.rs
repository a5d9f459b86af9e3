//! Which declared symmetries the model's own terms break at a point (`dims`
//! JSON `breaks_symmetry`, one note per broken symmetry and term).
//!
//! U(1) s with charge vector t_s: a term with particle content m carries
//! q_s = t_s.m (exact, also for a non-local term); it breaks s when q_s is
//! neither 0 nor (up to sign) the charge its own `allowed_charge` names for
//! s.
//!
//! Z_n g (phi -> W phi + 2 pi s / n, see [`super::symmetry`]): the terms
//! sum_terms y cos(l.phi + chi) are, per class c of operators (up to sign
//! and translation), sum_c (A_c O_c + h.c.) with A_c the sum of
//! (y/2) e^{+-i chi} over the terms of class c (the sign: the term is a
//! translate of c, or of minus c). g maps O_c to e^{i theta} O_c' (or to
//! e^{i theta} O_c'^dagger), so the terms are invariant when A_c' =
//! e^{i theta} A_c (or its conjugate) for every member c' of the orbit of c.
//! A term breaks g when its orbit sum vanishes (g maps it to itself with
//! another phase), or when a member's amplitude differs: an image that is
//! not a listed term, or one listed with another coupling or phase.
//! Amplitudes agree to a relative 1e-12.
//!
//! Over many points (a scan, [`tally`]): one [`BreakCount`] per term and
//! symmetry it breaks somewhere, with how many points and the reason at the
//! first of them, and one per Z_n that V breaks somewhere. The U(1) checks
//! do not depend on the point, so a model without Z_n is checked once.
//!
//! Invariants: only the Z_n used at the point are checked (where V breaks
//! one, the note of [`super::symmetry::in_use`] says so and no term is
//! flagged for it); a non-local term (K^-1 l not integral) is checked
//! against the U(1)s only; results list the symmetries in model order.

use std::collections::HashMap;

use num_complex::Complex64;
use num_traits::{Signed, Zero};

use super::symmetry::{in_use, InUse};
use super::window::Window;
use super::HuntFlags;
use crate::core::system::System;
use crate::dims::DimsReport;
use crate::error::Error;
use crate::math::rational::{self, Rational};
use crate::model::{Symmetry, SymmetryKind};

/// Relative agreement of two amplitudes counted as equal.
const AMPLITUDE_TOLERANCE: f64 = 1e-12;

/// What the terms break at a point.
#[derive(Debug, Clone, Default)]
pub struct Broken {
    /// Per model term: (symmetry name, reason), in model order.
    pub terms: Vec<Vec<(String, String)>>,
    /// Symmetries not checked at this point (V breaks them), as notes.
    pub notes: Vec<String>,
    /// The names of those symmetries, in model order.
    pub unchecked: Vec<String>,
}

impl Broken {
    /// The notes `dims` gives: one per Z_n that V breaks at the point, then
    /// one per term and symmetry it breaks.
    pub fn all_notes(&self, sys: &System) -> Vec<String> {
        let mut out = self.notes.clone();
        for (spec, found) in sys.model.terms.iter().zip(&self.terms) {
            out.extend(found.iter().map(|(s, why)| term_note(&spec.name, s, why)));
        }
        out
    }
}

/// "term \"t\" breaks the declared symmetry S: why".
fn term_note(term: &str, symmetry: &str, why: &str) -> String {
    format!("term \"{term}\" breaks the declared symmetry {symmetry}: {why}")
}

/// The notes of [`Broken::all_notes`] at one point (`flow`).
pub fn notes_at(sys: &System, point: &[f64]) -> Result<Vec<String>, Error> {
    Ok(broken_symmetries(sys, point)?.all_notes(sys))
}

/// How often a listed term breaks a declared symmetry over a set of points
/// (a scan's meta line, its summary's notes).
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct BreakCount {
    /// The listed term; absent: V breaks the Z_n `symmetry` at these
    /// points, so it is not checked there.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub term: Option<String>,
    /// The declared symmetry.
    pub symmetry: String,
    /// Points where it is broken.
    pub points: usize,
    /// Index (in the order given) of the first of them.
    pub first: usize,
    /// Why, at the first of them.
    pub reason: String,
}

impl BreakCount {
    /// The note of a scan of `total` points (`at` describes a point).
    pub fn note(&self, total: usize, at: &str) -> String {
        let why = term_note(
            self.term.as_deref().unwrap_or(""),
            &self.symmetry,
            &self.reason,
        );
        match &self.term {
            Some(_) if self.points == total => format!("{why} (at all {total} points)"),
            Some(_) => format!(
                "{why} (at {} of the {total} points; the reason is the one at the first, {at})",
                self.points
            ),
            None => format!(
                "symmetry {}: V breaks it (W^T V W != V) at {} of the {total} points (the first: {at}), so it is not used there",
                self.symmetry, self.points
            ),
        }
    }
}

/// The broken symmetries over `count` points (`point(i)` gives the i-th),
/// checked one after the other (a scan prepares this before its thread
/// pool exists) and counted in index order: terms
/// in model order, each with its symmetries in model order, then the Z_n
/// that V breaks. Without a Z_n only the first point is checked (the U(1)
/// checks do not depend on it). Points where V is not valid are skipped
/// (the flow reports them as unphysical).
pub fn tally(
    sys: &System,
    count: usize,
    point: &dyn Fn(usize) -> Vec<f64>,
) -> Result<Vec<BreakCount>, Error> {
    let has_zn = sys.model.symmetries.iter().any(|s| !s.is_u1());
    if sys.model.symmetries.is_empty() || count == 0 {
        return Ok(Vec::new());
    }
    let mut counts: Vec<BreakCount> = Vec::new();
    let checked = if has_zn { count } else { 1 };
    for i in 0..checked {
        match broken_symmetries(sys, &point(i)) {
            Ok(b) => add_point(&mut counts, sys, i, b),
            // Unphysical points (their flows say so) are not checked.
            Err(Error::Input(_) | Error::Unphysical(_)) => {}
            Err(e) => return Err(e),
        }
    }
    if !has_zn {
        counts.iter_mut().for_each(|c| c.points = count);
    }
    counts.sort_by_key(|c| order_key(sys, c));
    Ok(counts)
}

/// Count the broken symmetries of point `i`.
fn add_point(counts: &mut Vec<BreakCount>, sys: &System, i: usize, b: Broken) {
    let terms = sys.model.terms.iter().zip(b.terms);
    let found = terms.flat_map(|(spec, found)| {
        found
            .into_iter()
            .map(move |(s, why)| (Some(spec.name.clone()), s, why))
    });
    let unchecked = b.unchecked.into_iter().zip(b.notes);
    let found = found.chain(unchecked.map(|(s, note)| (None, s, note)));
    for (term, symmetry, reason) in found {
        match counts
            .iter_mut()
            .find(|c| c.term == term && c.symmetry == symmetry)
        {
            Some(c) => c.points += 1,
            None => counts.push(BreakCount {
                term,
                symmetry,
                points: 1,
                first: i,
                reason,
            }),
        }
    }
}

/// Terms in model order (each with its symmetries in model order), then
/// the Z_n that V breaks.
fn order_key(sys: &System, c: &BreakCount) -> (usize, usize) {
    let terms = &sys.model.terms;
    let t = c
        .term
        .as_ref()
        .and_then(|t| terms.iter().position(|s| &s.name == t))
        .unwrap_or(terms.len());
    let s = sys
        .model
        .symmetries
        .iter()
        .position(|s| s.name == c.symmetry);
    (t, s.unwrap_or(usize::MAX))
}

/// Add the broken symmetries to a `dims` report: every row's
/// `breaks_symmetry`, a note per term and broken symmetry, and a note per
/// Z_n that V breaks at the point (not checked there).
pub fn annotate(sys: &System, point: &[f64], report: &mut DimsReport) -> Result<(), Error> {
    let broken = broken_symmetries(sys, point)?;
    report.notes.extend(broken.notes);
    for (row, found) in report.terms.iter_mut().zip(broken.terms) {
        for (name, reason) in found {
            report.notes.push(term_note(&row.name, &name, &reason));
            row.breaks_symmetry.push(name);
        }
    }
    Ok(())
}

/// Check every model term against every declared symmetry at `point`.
pub fn broken_symmetries(sys: &System, point: &[f64]) -> Result<Broken, Error> {
    let mut out = Broken {
        terms: vec![Vec::new(); sys.model.terms.len()],
        notes: Vec::new(),
        unchecked: Vec::new(),
    };
    if sys.model.symmetries.is_empty() {
        return Ok(out);
    }
    // No range is given, so no error names the flag.
    let window = Window::choose(sys, None, HuntFlags::HUNT.range)?;
    let classes = Classes::of(sys, point, &window);
    for s in &sys.model.symmetries {
        match &s.kind {
            SymmetryKind::U1 { charge } => {
                for (i, reason) in u1_breaks(sys, s, charge) {
                    out.terms[i].push((s.name.clone(), reason));
                }
            }
            SymmetryKind::Zn { .. } => {
                let used = in_use(sys, point, &[s], &window)?;
                if used.names.is_empty() {
                    out.notes.extend(used.notes);
                    out.unchecked.push(s.name.clone());
                    continue;
                }
                for (i, reason) in zn_breaks(sys, &used, &window, &classes)? {
                    out.terms[i].push((s.name.clone(), reason));
                }
            }
        }
    }
    Ok(out)
}

/// (term, reason) of the terms whose U(1) charge is not allowed.
fn u1_breaks(sys: &System, s: &Symmetry, charge: &[i64]) -> Vec<(usize, String)> {
    let cell = charge.len().max(1);
    let mut out = Vec::new();
    for (i, (spec, inv)) in sys
        .model
        .terms
        .iter()
        .zip(&sys.invariants.terms)
        .enumerate()
    {
        let tiled: Vec<i64> = (0..inv.particles.len()).map(|f| charge[f % cell]).collect();
        let q = rational::dot_int(&inv.particles, &tiled);
        let allowed = spec
            .allowed_charges
            .iter()
            .find(|(name, _)| name == &s.name)
            .map_or_else(Rational::zero, |(_, a)| a.clone());
        if !q.is_zero() && q.abs() != allowed.abs() {
            out.push((
                i,
                format!(
                    "it carries {} charge {} (allowed: {})",
                    s.name,
                    rational::fmt_rational(&q),
                    rational::fmt_rational(&allowed)
                ),
            ));
        }
    }
    out
}

/// The model's terms by canonical class on the window: each term's class
/// (None: non-local or wider than the window) and the amplitude A_c of
/// every class.
struct Classes {
    of_term: Vec<Option<Vec<i64>>>,
    amplitude: HashMap<Vec<i64>, Complex64>,
}

impl Classes {
    fn of(sys: &System, point: &[f64], window: &Window) -> Classes {
        let mut of_term = Vec::new();
        let mut amplitude: HashMap<Vec<i64>, Complex64> = HashMap::new();
        for (spec, inv) in sys.model.terms.iter().zip(&sys.invariants.terms) {
            let class = rational::to_integers(&inv.particles)
                .and_then(|m| window.canonical_full_signed(&m));
            if let Some((c, flipped)) = &class {
                let (y, chi) = (spec.coupling.eval(point), spec.phase.eval(point));
                let chi = if *flipped { -chi } else { chi };
                *amplitude.entry(c.clone()).or_default() += Complex64::from_polar(0.5 * y, chi);
            }
            of_term.push(class.map(|(c, _)| c));
        }
        Classes { of_term, amplitude }
    }

    fn amplitude(&self, class: &[i64]) -> Complex64 {
        self.amplitude.get(class).copied().unwrap_or_default()
    }
}

/// (term, reason) of the terms that one Z_n (alone in `used`) does not
/// map onto the listed terms with their amplitudes.
fn zn_breaks(
    sys: &System,
    used: &InUse,
    window: &Window,
    classes: &Classes,
) -> Result<Vec<(usize, String)>, Error> {
    let mut out = Vec::new();
    for (i, class) in classes.of_term.iter().enumerate() {
        let Some(c) = class else {
            continue;
        };
        let orbit = used.orbit(window, c)?;
        if !orbit.allowed {
            out.push((
                i,
                "it maps to itself with another phase, so its symmetric sum vanishes".to_string(),
            ));
            continue;
        }
        let a = classes.amplitude(c);
        let theta = |p: i64| 2.0 * std::f64::consts::PI * p as f64 / orbit.denominator as f64;
        let bad = orbit.members.iter().find(|m| {
            let image = a * Complex64::from_polar(1.0, theta(m.phase));
            let expected = if m.conjugate { image.conj() } else { image };
            let found = classes.amplitude(&m.particles);
            (found - expected).norm() > AMPLITUDE_TOLERANCE * found.norm().max(expected.norm())
        });
        if let Some(m) = bad {
            out.push((i, image_reason(sys, classes, window, &m.particles)));
        }
    }
    Ok(out)
}

/// Why an image class does not match: not listed, or listed with another
/// amplitude.
fn image_reason(sys: &System, classes: &Classes, window: &Window, class: &[i64]) -> String {
    let listed: Vec<&str> = classes
        .of_term
        .iter()
        .zip(&sys.model.terms)
        .filter(|(c, _)| c.as_deref() == Some(class))
        .map(|(_, t)| t.name.as_str())
        .collect();
    let content = if window.array {
        window
            .parts(class)
            .iter()
            .map(|(w, v)| format!("{w}:{v:?}"))
            .collect::<Vec<_>>()
            .join(", ")
    } else {
        format!("{class:?}")
    };
    if listed.is_empty() {
        format!("its image (particle content {content}) is not a listed term")
    } else {
        format!(
            "its image, term {}, has another coupling or phase",
            listed
                .iter()
                .map(|n| format!("\"{n}\""))
                .collect::<Vec<_>>()
                .join(", ")
        )
    }
}
