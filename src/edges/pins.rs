//! The pinned set: the families named with `--pin`, or the outcome of the
//! flow at a point (the final pinned set of its successive pinning: every
//! family pinned at one of its stages, `flow::stages`). A pinned family must be local (K^-1 l integral),
//! null (bosonic spin zero) and commute with every pinned translate,
//! including its own; each refusal names the term or the failing pair.

use num_bigint::BigInt;
use num_traits::Zero;

use crate::core::invariants::particles_of;
use crate::core::lattice::{Family, Lattice, Translate};
use crate::core::system::System;
use crate::error::{Error, InputError};
use crate::flow::{Flow, FlowOptions, Outcome};
use crate::math::rational::{self, fmt_rational, Rational};
use crate::math::zmat::{big, dot};

/// One placement of a pinned term.
#[derive(Debug, Clone)]
pub struct PinnedTranslate {
    /// Anchor wire.
    pub anchor: usize,
    /// First and last wire of its support (open arrays; (0, 0) otherwise).
    pub wires: (usize, usize),
    /// Number of consecutive wires (cyclically in a periodic array) that
    /// hold its support.
    pub width: usize,
    /// Lattice vector l = K n over all fields.
    pub l: Vec<BigInt>,
    /// Particle vector n over all fields.
    pub n: Vec<BigInt>,
}

/// A pinned family (all translates of one term).
#[derive(Debug, Clone)]
pub struct Pinned {
    /// Term name.
    pub name: String,
    /// Its translates in the array.
    pub translates: Vec<PinnedTranslate>,
    /// Cell-level lattice vectors per wire offset (from the first wire of
    /// the support), to place the family in other arrays.
    pub cell_l: Vec<(usize, Vec<i64>)>,
}

impl Pinned {
    /// Widest support of a translate, in wires.
    pub fn span(&self) -> usize {
        self.translates.iter().map(|t| t.width).max().unwrap_or(0)
    }
}

/// How the pinned set was chosen.
#[derive(Debug, Clone)]
pub enum Source {
    /// Named with `--pin`.
    Flags,
    /// The flow at the point.
    Flow {
        /// The winning channel.
        winner: String,
        /// Scale at which it reached strong coupling.
        ell_star: Option<f64>,
    },
}

/// The pinned set and how it was chosen.
#[derive(Debug, Clone)]
pub struct Selection {
    /// The pinned families.
    pub pinned: Vec<Pinned>,
    /// Where they came from.
    pub source: Source,
    /// Listed terms considered and left out, with the reason.
    pub skipped: Vec<(String, String)>,
}

/// The families named with `--pin` (duplicates ignored).
pub fn from_names(sys: &System, names: &[String]) -> Result<Selection, InputError> {
    let flag = |msg: String| InputError::new("command line", "--pin", msg);
    let mut indices: Vec<usize> = Vec::new();
    for name in names {
        let Some(i) = sys.model.terms.iter().position(|t| &t.name == name) else {
            let known: Vec<&str> = sys.model.terms.iter().map(|t| t.name.as_str()).collect();
            return Err(flag(format!(
                "unknown term \"{name}\" (the model's terms: {})",
                if known.is_empty() {
                    "none".to_string()
                } else {
                    known.join(", ")
                }
            )));
        };
        if !indices.contains(&i) {
            indices.push(i);
        }
    }
    let mut pinned: Vec<Pinned> = Vec::new();
    for &i in &indices {
        let spec = &sys.model.terms[i];
        let fam = &sys.lattice.families[i];
        pinned.push(prepare(sys, &spec.name, fam, &spec.extra_spin).map_err(flag)?);
    }
    for (a, p) in pinned.iter().enumerate() {
        for q in &pinned[..=a] {
            check_pair(sys, q, p).map_err(flag)?;
        }
    }
    Ok(Selection {
        pinned,
        source: Source::Flags,
        skipped: Vec::new(),
    })
}

/// Flow at the point and pin the final pinned set of its stages (the
/// winner alone with `--stages 1`).
pub fn from_flow(sys: &System, point: &[f64], opts: FlowOptions) -> Result<Selection, Error> {
    // Only the outcome and the pinned set are read: no trajectory (its
    // samples cost three more evaluations of the flow per step).
    let opts = FlowOptions {
        record: false,
        ..opts
    };
    let flow = Flow::new(sys, opts);
    let res = flow.run(point)?;
    let file = &sys.model.file;
    match res.outcome {
        Outcome::Strong => {}
        Outcome::Unphysical => {
            return Err(Error::Input(InputError::new(
                file,
                "",
                res.message.unwrap_or_default(),
            )))
        }
        Outcome::Failed => {
            return Err(Error::Numerical(format!(
                "the flow at {} failed ({}); name the terms to pin with --pin NAME",
                sys.model.params.describe(point),
                res.message.unwrap_or_default()
            )))
        }
        other => {
            return Err(Error::Input(InputError::new(
                "command line",
                "--pin",
                format!(
                    "no term pins at {}: the flow ends with outcome \"{}\" (no null term reaches strong coupling); name the terms to pin with --pin NAME",
                    sys.model.params.describe(point),
                    other.word()
                ),
            )))
        }
    }
    let winner = res.winner.clone().unwrap_or_default();
    let mut names: Vec<String> = res.stages.iter().flat_map(|s| s.pinned.clone()).collect();
    if names.is_empty() {
        names.push(winner.clone());
    }
    let mut pinned: Vec<Pinned> = Vec::new();
    for name in &names {
        let p = pin_channel(sys, &flow, name)?;
        for q in pinned.iter().chain(std::iter::once(&p)) {
            check_pair(sys, q, &p).map_err(|m| {
                InputError::new(file, format!("term \"{name}\""), cannot_pin(name, m))
            })?;
        }
        pinned.push(p);
    }
    Ok(Selection {
        pinned,
        source: Source::Flow {
            winner,
            ell_star: res.ell_star,
        },
        skipped: Vec::new(),
    })
}

/// A channel of the flow's plan prepared for pinning.
fn pin_channel(sys: &System, flow: &Flow, name: &str) -> Result<Pinned, Error> {
    let channel = flow
        .plan
        .channels
        .iter()
        .find(|c| c.name == name)
        .ok_or_else(|| Error::Numerical(format!("the pinned term \"{name}\" is not a channel")))?;
    let extra = match sys.model.terms.iter().position(|t| t.name == name) {
        Some(i) => sys.model.terms[i].extra_spin.clone(),
        None => Rational::zero(),
    };
    let key = format!("term \"{name}\"");
    prepare(sys, name, &channel.family, &extra)
        .map_err(|m| Error::Input(InputError::new(&sys.model.file, &key, cannot_pin(name, m))))
}

/// Particle vectors of a family, checked to be local and null.
fn prepare(
    sys: &System,
    name: &str,
    family: &Family,
    extra_spin: &Rational,
) -> Result<Pinned, String> {
    let lat = &sys.lattice;
    let inv = &sys.invariants.cell_inverse;
    if family.translates.is_empty() {
        return Err(format!(
            "term \"{name}\" has no translate in this array of {} wires",
            lat.wires
        ));
    }
    let translates = family
        .translates
        .iter()
        .map(|t| pinned_translate(lat, inv, name, t, extra_spin))
        .collect::<Result<Vec<_>, _>>()?;
    let first = &family.translates[0];
    let lo = translates[0].wires.0;
    let cell_l = first
        .parts
        .iter()
        .filter(|(_, v)| v.iter().any(|x| *x != 0))
        .map(|(w, v)| ((w + lat.wires - lo) % lat.wires.max(1), v.clone()))
        .collect();
    Ok(Pinned {
        name: name.to_string(),
        translates,
        cell_l,
    })
}

/// One translate checked to be local (integral K^-1 l) and null (spin 0).
fn pinned_translate(
    lat: &Lattice,
    inv: &[Vec<Rational>],
    name: &str,
    t: &Translate,
    extra_spin: &Rational,
) -> Result<PinnedTranslate, String> {
    let m = particles_of(lat, inv, t);
    let Some(n) = integers(&m) else {
        return Err(format!(
            "term \"{name}\" is not local: its particle content K^-1 l = ({}) is not integral, so it is not built from particles and cannot pin",
            m.iter().map(fmt_rational).collect::<Vec<_>>().join(", ")
        ));
    };
    let l = big(&t.l);
    let spin2 = dot(&l, &n);
    if !spin2.is_zero() {
        let spin = fmt_rational(&Rational::new(spin2, BigInt::from(2)));
        let extra = if extra_spin.is_zero() {
            String::new()
        } else {
            format!(
                " (its extra spin {} does not make the bosonic vector null)",
                fmt_rational(extra_spin)
            )
        };
        return Err(format!(
            "term \"{name}\" is not null: its conformal spin (1/2) l.K^-1 l is {spin}, not 0{extra}; only null terms can pin"
        ));
    }
    let (wires, width) = support(lat, &t.l);
    Ok(PinnedTranslate {
        anchor: t.anchor,
        wires,
        width,
        l,
        n,
    })
}

/// Every translate of a commutes with every translate of b (a may be b).
fn check_pair(sys: &System, a: &Pinned, b: &Pinned) -> Result<(), String> {
    let arrays = sys.lattice.boundary.is_some();
    for ta in &a.translates {
        // The phase only sees the fields where n_a is non-zero (a translate
        // touches a few wires of the array).
        let on: Vec<usize> = (0..ta.n.len()).filter(|&i| !ta.n[i].is_zero()).collect();
        for tb in &b.translates {
            let phase = on
                .iter()
                .filter(|&&i| !tb.l[i].is_zero())
                .fold(BigInt::zero(), |acc, &i| acc + &ta.n[i] * &tb.l[i]);
            if phase.is_zero() {
                continue;
            }
            let at = |t: &PinnedTranslate| {
                if arrays {
                    format!(" at wire {}", t.anchor)
                } else {
                    String::new()
                }
            };
            let pair = if a.name == b.name {
                format!(
                    "two translates of \"{}\" ({} and {})",
                    a.name,
                    at(ta).trim_start(),
                    at(tb).trim_start()
                )
            } else {
                format!("\"{}\"{} and \"{}\"{}", a.name, at(ta), b.name, at(tb))
            };
            return Err(format!(
                "{pair} do not commute: their mutual phase l_a.K^-1 l_b is {phase}, not 0; a pinned set must commute"
            ));
        }
    }
    Ok(())
}

/// First and last wire on which a dense vector is non-zero, and the number
/// of consecutive wires holding it (the shortest cyclic window in a
/// periodic array).
pub fn support(lat: &Lattice, l: &[i64]) -> ((usize, usize), usize) {
    let wires: Vec<usize> = (0..lat.wires)
        .filter(|w| l[w * lat.cell..(w + 1) * lat.cell].iter().any(|x| *x != 0))
        .collect();
    let (Some(&lo), Some(&hi)) = (wires.first(), wires.last()) else {
        return ((0, 0), 0);
    };
    let mut width = hi - lo + 1;
    if lat.boundary == Some(crate::model::Boundary::Periodic) {
        // The window starts after the largest cyclic gap between support wires.
        let w = lat.wires;
        for (i, &start) in wires.iter().enumerate() {
            let prev = wires[(i + wires.len() - 1) % wires.len()];
            width = width.min((prev + w - start) % w + 1);
        }
    }
    ((lo, hi), width)
}

fn integers(m: &[Rational]) -> Option<Vec<BigInt>> {
    rational::is_integral(m).then(|| m.iter().map(|r| r.to_integer()).collect())
}

/// Why the flow's winner cannot pin, without naming it twice (the key
/// already names it).
fn cannot_pin(winner: &str, why: String) -> String {
    let why = match why.strip_prefix(&format!("term \"{winner}\" ")) {
        Some(rest) => format!("it {rest}"),
        None => why,
    };
    format!("wins the flow but cannot pin: {why}; name the terms to pin with --pin NAME")
}
