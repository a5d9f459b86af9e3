//! The couplings that flow ("channels") and the second-order OPE table.
//!
//! A channel is a term family: one of the model's terms, or a term that the
//! OPE of two commuting terms generates (l_a + l_b, l_a - l_b, 2 l_a; the
//! `pairs` closure). The plan is exact and independent of the parameter
//! point: candidates are generated once per model; each flow keeps those
//! whose bare dimension is below the closure bound.
//!
//! OPE rule [physics reference section 3, from Cardy (1996) ch. 5]: in
//! complex amplitudes w_l = (y/2) e^{i chi} (and w_{-l} = conj w_l),
//! dw_c/dell += -(1/2) sum over ordered pairs (x, y) of flowing vectors with
//! x + y = c and x^T K^-1 y = 0 of w_x w_y. With the first vector fixed at
//! +rep(a) (translation invariance), each (a, translate t of b, sign s) with
//! v = rep(a) + s t gives one ordered pair: it adds -(1/2) w_a w_b^(s) to
//! the channel c containing v, or the conjugate when -v is in c.

use std::collections::HashMap;

use num_complex::Complex64;
use num_traits::Zero;

use crate::core::invariants::{particles_of, Pairing};
use crate::core::lattice::{Family, Lattice};
use crate::core::qspace;
use crate::core::system::System;
use crate::math::rational::{self, Rational};
use crate::model::Boundary;

/// How a channel came about.
#[derive(Debug, Clone, PartialEq)]
pub enum Origin {
    /// The model's term with this index.
    Listed(usize),
    /// rep(a) + sign * (translate of b shifted by `shift` wires).
    Generated {
        /// First parent (channel index).
        a: usize,
        /// +1 or -1.
        sign: i8,
        /// Second parent (channel index).
        b: usize,
        /// Wire shift of b's translate relative to a's representative, as
        /// shown in names: on a ring modulo W (0..W); on an open array the
        /// signed difference of the anchors (an open array does not wrap);
        /// on the stand-in of an infinite array the shift on the line.
        shift: i64,
    },
}

/// One flowing coupling family.
#[derive(Debug, Clone)]
pub struct Channel {
    /// Name (model term name, or built from the parents' names).
    pub name: String,
    /// Where it comes from.
    pub origin: Origin,
    /// Its translates.
    pub family: Family,
    /// Exact spin (including extra spin for listed terms).
    pub spin: Rational,
    /// Exact charge.
    pub charge: Rational,
    /// m = K^-1 l of the representative.
    pub particles: Vec<Rational>,
    /// Sparse l of every translate: (field, value).
    pub l_sparse: Vec<Vec<(usize, f64)>>,
    /// Sparse K^-1 l of every translate.
    pub g_sparse: Vec<Vec<(usize, f64)>>,
    /// Periodic arrays: L(q_k) = sum_j l_j e^{-i q_k j} of the representative
    /// on the stored points k = 0..=W/2, k-major; empty otherwise (infinite
    /// arrays fill it per flow with [`Channel::on_rule`]).
    pub lq: Vec<Complex64>,
    /// Periodic arrays: K_c^-1 L(q_k).
    pub gq: Vec<Complex64>,
}

impl Channel {
    /// Spin zero: the channel can pin and feeds back on D.
    pub fn null(&self) -> bool {
        self.spin.is_zero()
    }

    /// The representative as (wire offset from its anchor, cell lattice
    /// vector) parts. On a ring the offsets are taken modulo W, which is
    /// the same phase on its W points; on the stand-in of an infinite array
    /// the representative sits at anchor 0 without wrapping, so the offsets
    /// are the line's.
    pub fn cell_parts(&self, lat: &Lattice) -> Vec<(usize, Vec<f64>)> {
        let rep = self.family.rep();
        rep.parts
            .iter()
            .map(|(wire, l)| {
                let off = (wire + lat.wires - rep.anchor) % lat.wires.max(1);
                (off, l.iter().map(|x| *x as f64).collect())
            })
            .collect()
    }

    /// A copy whose `lq`, `gq` are on the stored points of an N-point rule
    /// (the infinite array's flow on its quadrature points).
    pub fn on_rule(&self, lat: &Lattice, kinv: &nalgebra::DMatrix<f64>, points: usize) -> Channel {
        let lq = qspace::fourier_vector(&self.cell_parts(lat), lat.cell, points);
        let gq = qspace::times_cell(kinv, &lq);
        Channel {
            lq,
            gq,
            ..self.clone()
        }
    }
}

/// One OPE contribution: dw[target] += -(1/2) * op(w[a] * w[b]^(b_conj)).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct OpeEntry {
    /// Channel receiving the contribution.
    pub target: usize,
    /// The product lands on -c: conjugate it.
    pub conj: bool,
    /// First factor.
    pub a: usize,
    /// Second factor.
    pub b: usize,
    /// Use conj(w_b) (the second vector enters with a minus sign).
    pub b_conj: bool,
}

/// All channels that can flow for a model and their OPE table.
#[derive(Debug, Clone)]
pub struct Plan {
    /// Listed channels first (model order), then generated candidates.
    pub channels: Vec<Channel>,
    /// OPE entries among all channels.
    pub ope: Vec<OpeEntry>,
    /// Number of listed channels.
    pub listed: usize,
}

impl Plan {
    /// Build the plan. With `generate`, commuting pairs of listed terms add
    /// candidate channels (one generation; pairs whose parents carry an
    /// extra sector are skipped, since its fusion is not known).
    pub fn build(sys: &System, generate: bool) -> Plan {
        let lat = &sys.lattice;
        let mut plan = Plan {
            channels: Vec::new(),
            ope: Vec::new(),
            listed: sys.model.terms.len(),
        };
        for (i, (spec, fam)) in sys.model.terms.iter().zip(&lat.families).enumerate() {
            let ti = &sys.invariants.terms[i];
            plan.channels.push(make_channel(
                sys,
                spec.name.clone(),
                Origin::Listed(i),
                fam.clone(),
                ti.spin.clone(),
            ));
        }
        let mut index = VectorIndex::default();
        for (c, ch) in plan.channels.iter().enumerate() {
            index.add(c, &ch.family);
        }
        if generate {
            plan.generate_candidates(sys, &mut index);
        }
        plan.ope = ope_table(&plan.channels, &index, &sys.invariants.pairing);
        plan
    }

    fn generate_candidates(&mut self, sys: &System, index: &mut VectorIndex) {
        let lat = &sys.lattice;
        let window = self
            .channels
            .iter()
            .map(|c| support_width(lat, &c.family.rep().l))
            .max()
            .unwrap_or(1)
            + 1;
        let listed = self.listed;
        for a in 0..listed {
            for b in a..listed {
                if has_extra(sys, a) || has_extra(sys, b) {
                    continue;
                }
                let rep_a = self.channels[a].family.rep().clone();
                for tb in self.channels[b].family.translates.clone() {
                    if !sys.invariants.pairing.commute(&rep_a.l, &tb.l) {
                        continue;
                    }
                    for sign in [1i8, -1] {
                        let v: Vec<i64> = rep_a
                            .l
                            .iter()
                            .zip(&tb.l)
                            .map(|(x, y)| x + sign as i64 * y)
                            .collect();
                        if v.iter().all(|x| *x == 0) || index.find(&v).is_some() {
                            continue;
                        }
                        if support_width(lat, &v) > window {
                            continue;
                        }
                        let Some(fam) = family_of(lat, &v) else {
                            continue;
                        };
                        let shown = shown_shift(lat, rep_a.anchor, tb.anchor);
                        let name = generated_name(
                            &self.channels[a].name,
                            sign,
                            &self.channels[b].name,
                            a == b,
                            shown,
                        );
                        let spin = &self.channels[a].spin + &self.channels[b].spin;
                        let c = self.channels.len();
                        index.add(c, &fam);
                        let origin = Origin::Generated {
                            a,
                            sign,
                            b,
                            shift: shown,
                        };
                        self.channels
                            .push(make_channel(sys, name, origin, fam, spin));
                    }
                }
            }
        }
    }
}

/// The shift of b's translate (anchored at `b`) relative to a's
/// representative (anchored at `a`) as names show it. A ring counts it
/// modulo W. An open array does not wrap: a translate left of the
/// representative is a negative shift (counting it modulo W would name a
/// shift by W - 1 wires, which an open array of W wires cannot hold). On
/// the stand-in ring of an infinite array a shift past half the ring is a
/// negative shift on the line.
pub fn shown_shift(lat: &Lattice, a: usize, b: usize) -> i64 {
    let w = lat.wires.max(1);
    let shift = (b + w - a) % w;
    if lat.infinite {
        if 2 * shift > w {
            shift as i64 - w as i64
        } else {
            shift as i64
        }
    } else if lat.boundary == Some(Boundary::Open) {
        b as i64 - a as i64
    } else {
        shift as i64
    }
}

fn has_extra(sys: &System, term: usize) -> bool {
    let t = &sys.model.terms[term];
    !(t.extra_spin.is_zero() && t.extra_dimension.is_const() && t.extra_dimension.eval(&[]) == 0.0)
}

fn generated_name(a: &str, sign: i8, b: &str, same: bool, shift: i64) -> String {
    if same && sign > 0 && shift == 0 {
        return format!("2*{a}");
    }
    let op = if sign > 0 { "+" } else { "-" };
    if shift == 0 {
        format!("{a}{op}{b}")
    } else {
        format!("{a}{op}{b}@{shift}")
    }
}

fn make_channel(
    sys: &System,
    name: String,
    origin: Origin,
    family: Family,
    spin: Rational,
) -> Channel {
    let lat = &sys.lattice;
    let inv = &sys.invariants.cell_inverse;
    let mut l_sparse = Vec::with_capacity(family.translates.len());
    let mut g_sparse = Vec::with_capacity(family.translates.len());
    for t in &family.translates {
        l_sparse.push(sparse(t.l.iter().map(|x| *x as f64)));
        let m = particles_of(lat, inv, t);
        g_sparse.push(sparse(m.iter().map(rational::to_f64)));
    }
    let particles = particles_of(lat, inv, family.rep());
    let charge = rational::dot_int(&particles, &lat.charge);
    let mut ch = Channel {
        name,
        origin,
        family,
        spin,
        charge,
        particles,
        l_sparse,
        g_sparse,
        lq: Vec::new(),
        gq: Vec::new(),
    };
    // Periodic rings: L(q) on their W points. Infinite arrays: per flow.
    if let (Some(q), false) = (&sys.q, lat.infinite) {
        ch = ch.on_rule(lat, &q.kinv, lat.wires);
    }
    ch
}

fn sparse(values: impl Iterator<Item = f64>) -> Vec<(usize, f64)> {
    values.enumerate().filter(|(_, x)| *x != 0.0).collect()
}

/// Number of consecutive wires (cyclically for periodic arrays) spanned by
/// the support of a dense vector.
fn support_width(lat: &Lattice, v: &[i64]) -> usize {
    let wires: Vec<usize> = (0..lat.wires)
        .filter(|w| v[w * lat.cell..(w + 1) * lat.cell].iter().any(|x| *x != 0))
        .collect();
    minimal_window(lat, &wires).map_or(0, |(_, width)| width)
}

/// (start wire, width) of the smallest window containing the given wires.
fn minimal_window(lat: &Lattice, wires: &[usize]) -> Option<(usize, usize)> {
    let (&first, &last) = (wires.first()?, wires.last()?);
    if lat.boundary != Some(Boundary::Periodic) {
        return Some((first, last - first + 1));
    }
    // Periodic: the window starts after the largest cyclic gap.
    let w = lat.wires;
    let mut best = (first, last - first + 1);
    for (i, &start) in wires.iter().enumerate() {
        let prev = wires[(i + wires.len() - 1) % wires.len()];
        let width = (prev + w - start) % w + 1;
        if width < best.1 {
            best = (start, width);
        }
    }
    Some(best)
}

/// The family of a dense vector: its cell-level parts relative to the start
/// of its support window, placed at every anchor.
fn family_of(lat: &Lattice, v: &[i64]) -> Option<Family> {
    let wires: Vec<usize> = (0..lat.wires)
        .filter(|w| v[w * lat.cell..(w + 1) * lat.cell].iter().any(|x| *x != 0))
        .collect();
    let (start, width) = minimal_window(lat, &wires)?;
    let parts: Vec<(usize, Vec<i64>)> = (0..width)
        .map(|off| {
            let w = (start + off) % lat.wires;
            (off, v[w * lat.cell..(w + 1) * lat.cell].to_vec())
        })
        .filter(|(_, p)| p.iter().any(|x| *x != 0))
        .collect();
    let fam = lat.family(&parts);
    (!fam.translates.is_empty()).then_some(fam)
}

/// Maps every translate vector (and its negative) to (channel, sign).
#[derive(Debug, Default)]
struct VectorIndex {
    map: HashMap<Vec<i64>, (usize, bool)>,
}

impl VectorIndex {
    fn add(&mut self, channel: usize, fam: &Family) {
        for t in &fam.translates {
            self.map.entry(t.l.clone()).or_insert((channel, false));
            let neg: Vec<i64> = t.l.iter().map(|x| -x).collect();
            self.map.entry(neg).or_insert((channel, true));
        }
    }

    /// (channel, negated) of a vector.
    fn find(&self, v: &[i64]) -> Option<(usize, bool)> {
        self.map.get(v).copied()
    }
}

fn ope_table(channels: &[Channel], index: &VectorIndex, pairing: &Pairing) -> Vec<OpeEntry> {
    let mut table = Vec::new();
    for (a, ca) in channels.iter().enumerate() {
        let rep = ca.family.rep();
        for (b, cb) in channels.iter().enumerate() {
            for tb in &cb.family.translates {
                if !pairing.commute(&rep.l, &tb.l) {
                    continue;
                }
                for (sign, b_conj) in [(1i64, false), (-1, true)] {
                    let v: Vec<i64> = rep.l.iter().zip(&tb.l).map(|(x, y)| x + sign * y).collect();
                    if v.iter().all(|x| *x == 0) {
                        continue;
                    }
                    if let Some((target, conj)) = index.find(&v) {
                        table.push(OpeEntry {
                            target,
                            conj,
                            a,
                            b,
                            b_conj,
                        });
                    }
                }
            }
        }
    }
    table
}
