//! The operators found, grouped into orbits of the model's Z_n maps
//! ([`super::symmetry`]), and the symmetric combination of each orbit.
//!
//! Invariants: without a Z_n in use there are no orbits and nothing is
//! removed; with one, every listed operator belongs to exactly one orbit,
//! orbits are numbered in the order of their first operator, and the
//! operators of forbidden orbits (whose symmetrised sum vanishes) are
//! removed from the list and counted.

use std::collections::{BTreeMap, HashMap};

use serde::Serialize;

use super::report::Operator;
use super::symmetry::{InUse, Orbit};
use super::window::Window;
use super::TermIndex;
use crate::error::Error;

/// One member class of an orbit.
#[derive(Debug, Clone, Serialize)]
pub struct OrbitMember {
    /// Canonical particle content over the search window.
    pub particles: Vec<i64>,
    /// Arrays: by wire offset (the form of a model file's `particles`).
    pub particles_by_wire: Option<BTreeMap<String, Vec<i64>>>,
    /// 1-based row of the operator table (null: not listed, e.g. it fails
    /// another filter).
    pub operator: Option<usize>,
    /// The model term it is, if any.
    pub model_term: Option<String>,
    /// The phase chi (in turns, "p/q") of its cosine in the symmetric
    /// combination sum_members y cos(l.phi + 2 pi chi).
    pub phase: String,
    /// The orbit holds both the operator and its conjugate (the symmetry
    /// fixes the phase of its cosine).
    pub self_conjugate: bool,
}

/// One orbit of allowed operators.
#[derive(Debug, Clone, Serialize)]
pub struct OrbitReport {
    /// Number of distinct operators (classes up to sign and translation).
    pub size: usize,
    /// Their common scaling dimension.
    pub dimension: f64,
    /// The members.
    pub members: Vec<OrbitMember>,
    /// The symmetric combination, e.g. "#2 + #5" or "#3 + e^{2 pi i 1/3} #4".
    pub combination: String,
}

/// What [`group`] returns.
pub struct Grouped {
    /// The operators left (allowed by every map), with their orbit.
    pub operators: Vec<Operator>,
    /// The orbits.
    pub orbits: Vec<OrbitReport>,
    /// Operators removed because their orbit sum vanishes.
    pub removed: usize,
}

/// Group the operators into orbits; remove the forbidden ones.
pub fn group(
    window: &Window,
    sym: &InUse,
    operators: Vec<Operator>,
    terms: &TermIndex,
) -> Result<Grouped, Error> {
    if !sym.has_maps() {
        return Ok(Grouped {
            operators,
            orbits: Vec::new(),
            removed: 0,
        });
    }
    let canon: Vec<Vec<i64>> = operators
        .iter()
        .map(|o| window.canonical(&o.particles))
        .collect();
    let pos: HashMap<&Vec<i64>, usize> = canon.iter().enumerate().map(|(i, c)| (c, i)).collect();
    let n = operators.len();
    let (mut orbit_of, mut removed) = (vec![None; n], vec![false; n]);
    let mut raw: Vec<Orbit> = Vec::new();
    for i in 0..n {
        if orbit_of[i].is_some() || removed[i] {
            continue;
        }
        let o = sym.orbit(window, &canon[i])?;
        for c in o.classes() {
            if let Some(&j) = pos.get(c) {
                if o.allowed {
                    orbit_of[j] = Some(raw.len());
                } else {
                    removed[j] = true;
                }
            }
        }
        if o.allowed {
            raw.push(o);
        }
    }
    let mut row = vec![None; n];
    let mut kept = Vec::with_capacity(n);
    for (i, mut op) in operators.into_iter().enumerate() {
        if !removed[i] {
            row[i] = Some(kept.len() + 1);
            op.orbit = orbit_of[i].map(|k| k + 1);
            kept.push(op);
        }
    }
    let lookup = |c: &Vec<i64>| pos.get(c).and_then(|&i| row[i]);
    let orbits = raw
        .iter()
        .map(|o| report(o, window, &lookup, terms, &kept))
        .collect();
    Ok(Grouped {
        operators: kept,
        orbits,
        removed: removed.iter().filter(|r| **r).count(),
    })
}

/// "p/q" of num/den in [0, 1), reduced.
fn turns(num: i64, den: i64) -> String {
    let num = num.rem_euclid(den);
    let g = gcd(num, den);
    if num == 0 {
        "0".into()
    } else {
        format!("{}/{}", num / g, den / g)
    }
}

fn gcd(a: i64, b: i64) -> i64 {
    if b == 0 {
        a.abs().max(1)
    } else {
        gcd(b, a % b)
    }
}

/// The cosine phase of each class, numerator over 2 L (see the module
/// docs of [`super::symmetry`]): a class entering as O with phase t has
/// chi = t + a, as O^dagger chi = -t - a, as both chi = (t1 - t2)/2; the
/// global phase a is fixed by the first self-conjugate class (else 0).
fn cosine_phases(o: &Orbit) -> Vec<(Vec<i64>, i64, bool)> {
    let mut by_class: Vec<(Vec<i64>, Option<i64>, Option<i64>)> = Vec::new();
    for m in &o.members {
        let slot = match by_class.iter().position(|c| c.0 == m.particles) {
            Some(i) => i,
            None => {
                by_class.push((m.particles.clone(), None, None));
                by_class.len() - 1
            }
        };
        let ph = 2 * m.phase;
        if m.conjugate {
            by_class[slot].2 = Some(ph);
        } else {
            by_class[slot].1 = Some(ph);
        }
    }
    let alpha = by_class
        .iter()
        .find_map(|c| Some(-(c.1? + c.2?) / 2))
        .unwrap_or(0);
    by_class
        .into_iter()
        .map(|(c, plus, minus)| match (plus, minus) {
            (Some(a), Some(b)) => (c, (a - b) / 2, true),
            (Some(a), None) => (c, a + alpha, false),
            (None, Some(b)) => (c, -b - alpha, false),
            (None, None) => (c, 0, false),
        })
        .collect()
}

fn report(
    o: &Orbit,
    window: &Window,
    row: &dyn Fn(&Vec<i64>) -> Option<usize>,
    terms: &TermIndex,
    ops: &[Operator],
) -> OrbitReport {
    let den = 2 * o.denominator;
    let members: Vec<OrbitMember> = cosine_phases(o)
        .into_iter()
        .map(|(c, chi, self_conjugate)| OrbitMember {
            particles_by_wire: window.array.then(|| {
                window
                    .parts(&c)
                    .into_iter()
                    .map(|(w, v)| (w.to_string(), v))
                    .collect()
            }),
            operator: row(&c),
            model_term: terms.get(&c).cloned(),
            phase: turns(chi, den),
            self_conjugate,
            particles: c,
        })
        .collect();
    let dimension = members
        .iter()
        .find_map(|m| m.operator)
        .map_or(f64::NAN, |r| ops[r - 1].dimension);
    OrbitReport {
        size: members.len(),
        dimension,
        combination: combination(o, row),
        members,
    }
}

/// "#2 + e^{2 pi i 1/3} #4 + #4*" (#k: row k of the table, * its conjugate;
/// an operator not listed is shown by its particle content).
fn combination(o: &Orbit, row: &dyn Fn(&Vec<i64>) -> Option<usize>) -> String {
    o.members
        .iter()
        .map(|m| {
            let name = match row(&m.particles) {
                Some(r) => format!("#{r}"),
                None => format!("{:?}", m.particles),
            };
            let star = if m.conjugate { "*" } else { "" };
            match turns(m.phase, o.denominator).as_str() {
                "0" => format!("{name}{star}"),
                "1/2" => format!("- {name}{star}"),
                t => format!("e^{{2 pi i {t}}} {name}{star}"),
            }
        })
        .collect::<Vec<_>>()
        .join(" + ")
        .replace("+ - ", "- ")
}
