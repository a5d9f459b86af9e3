//! The couplings that flow ("channels") and the second-order OPE table.
//!
//! A channel is a term family: one of the model's terms, or a term that the
//! OPE of two commuting terms generates (l_a + l_b, l_a - l_b, 2 l_a; the
//! `pairs` closure). The plan is exact and independent of the parameter
//! point: candidates are generated once per model; each flow keeps those
//! whose bare dimension is below the closure bound.
//!
//! OPE rule [docs/physics.md section 4, from Cardy (1996) ch. 5]: in
//! complex amplitudes w_l = (y/2) e^{i chi} (and w_{-l} = conj w_l),
//! dw_c/dell += -(1/2) sum over ordered pairs (x, y) of flowing vectors with
//! x + y = c and x^T K^-1 y = 0 of w_x w_y. With the first vector fixed at
//! +rep(a) (translation invariance), each (a, translate t of b, sign s) with
//! v = rep(a) + s t gives one ordered pair: it adds -(1/2) w_a w_b^(s) to
//! the channel c containing v, or the conjugate when -v is in c.
//!
//! Distinct operators. A family stores each distinct operator once: on a
//! ring, a vector that repeats under a shift (bs + bs@3 on 6 wires, equal to
//! its translate by 3 wires; bs - bs@3, equal to minus it) has fewer
//! distinct translates n than wires W, and its coupling is that of one
//! operator (a listed term "stands for all its translates with one
//! coupling", so its W copies add up: see [`Channel::bare_amplitude`]). The
//! OPE sum with the first vector fixed at rep(a) then counts the pairs of
//! n_a distinct first vectors landing on n_c distinct targets, so each
//! entry carries the weight n_a / n_c (1 when nothing repeats). The
//! Fourier layout's feedback sums over all W translates and is scaled by
//! n / W ([`Channel::share`]). An operator equal to minus its own
//! translate has a real amplitude (translation invariance), kept real.
//!
//! Closure range. The pairs closure keeps a generated term when its bare
//! dimension is below the closure bound and its support spans at most R
//! consecutive wires (cyclically on a ring): R = `closure_range`, by default
//! the widest listed term plus one wire. It applies to arrays and to
//! explicit models that group their fields by wire (`fields.wires`), the
//! same way, so an array and its written-out form flow the same channels.
//! An explicit model without wires has no range (reported in a note).
//!
//! Momentum per translate. In a flux array (`momentum_per_wire`) a charged
//! term's translates carry different momenta (see
//! [`crate::core::momentum::per_translate`]). Such a model's finite arrays flow
//! every translate as its own channel (as the written-out explicit model
//! does), each with its own momentum and cut-off; generated terms get the
//! sum of their parents' momenta, taken on the line.

use std::collections::{BTreeMap, HashMap, HashSet};

use num_complex::Complex64;
use num_traits::Zero;

use crate::core::lattice::{Family, Lattice, Translate};
use crate::core::momentum::per_translate;
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
    /// `particles` rounded to doubles (converted once: the momentum
    /// mismatch is evaluated at every parameter point).
    pub particles_f64: Vec<f64>,
    /// `spin` and `charge` as printed ([`rational::fmt_rational`]), formed
    /// once for every flow's result.
    pub spin_text: String,
    /// See `spin_text`.
    pub charge_text: String,
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
    /// Fourier layout: distinct translates / W, the share of the W
    /// translates its feedback sums over that are distinct operators.
    pub share: f64,
    /// Copies of the representative (+l) and of its negative (-l) among the
    /// W placements of the term (1 and 0 unless it repeats on a ring).
    pub copies: (usize, usize),
}

impl Channel {
    /// Spin zero: the channel can pin and feeds back on D.
    pub fn null(&self) -> bool {
        self.spin.is_zero()
    }

    /// The operator is minus one of its own translates: its amplitude is real.
    pub fn real_only(&self) -> bool {
        self.copies.1 > 0
    }

    /// The amplitude (Re, Im) of one distinct operator of a listed term
    /// given as y e^{i chi} for each of its placements: its copies add,
    /// w = p (y/2) e^{i chi} + q (y/2) e^{-i chi} with (p, q) = `copies`.
    pub fn bare_amplitude(&self, y: f64, chi: f64) -> (f64, f64) {
        let (p, q) = (self.copies.0 as f64, self.copies.1 as f64);
        (0.5 * y * chi.cos() * (p + q), 0.5 * y * chi.sin() * (p - q))
    }

    /// The momentum mismatch of the representative on the line (see
    /// [`crate::core::momentum::per_translate::line_mismatch`]), given the momenta
    /// of every field.
    pub fn mismatch(&self, lat: &Lattice, k: &[f64], period: Option<f64>) -> f64 {
        let rep = self.family.rep();
        crate::core::momentum::per_translate::line_mismatch_f64(
            lat,
            &self.particles_f64,
            rep.anchor,
            k,
            period,
        )
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
    /// n_a / n_c: distinct translates of the first factor over those of
    /// the target (periodic arrays; 1 otherwise).
    pub weight: f64,
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
    /// Listed terms whose momentum may depend on the translate (flux
    /// arrays, charged terms); see the module docs.
    pub per_translate: Vec<usize>,
    /// N_c of each term in `per_translate` (the same order;
    /// [`per_translate::net_particles`]), formed once for every point.
    pub per_translate_net: Vec<Vec<Rational>>,
    /// Every listed family is split into single translates (a finite array
    /// with a term in `per_translate`): D must be carried dense.
    pub split: bool,
    /// The closure range applied, in wires (None: no range applies).
    pub range: Option<usize>,
    /// What the closure range did, for the report (None without closure).
    pub range_note: Option<String>,
    /// K^-1 of the cell vectors met while building (shared by all
    /// channels: they repeat the same few); emptied when the plan is built.
    solved: CellSolutions,
}

impl Plan {
    /// Build the plan. With `generate`, commuting pairs of listed terms add
    /// candidate channels (one generation; pairs whose parents carry an
    /// extra sector are skipped, since its fusion is not known) no wider
    /// than `range` wires (None: the default, see the module docs).
    pub fn build(sys: &System, generate: bool, range: Option<usize>) -> Plan {
        Plan::build_with_progress(sys, generate, range, &mut |_, _| {})
    }

    /// [`Plan::build`], calling `progress(done, total)` with the pairs of
    /// listed channels the closure has gone through (after each first
    /// member of a pair; for a progress bar, it must not print to stdout).
    pub fn build_with_progress(
        sys: &System,
        generate: bool,
        range: Option<usize>,
        progress: &mut dyn FnMut(u64, u64),
    ) -> Plan {
        let per_translate = translate_dependent(sys);
        let split = !per_translate.is_empty() && !sys.is_infinite() && sys.lattice.wires > 1;
        let per_translate_net = (per_translate.iter())
            .map(|&i| {
                per_translate::net_particles(&sys.lattice, &sys.invariants.terms[i].particles)
            })
            .collect();
        let mut plan = Plan {
            channels: Vec::new(),
            ope: Vec::new(),
            listed: 0,
            per_translate,
            per_translate_net,
            split,
            range: None,
            range_note: None,
            solved: CellSolutions::default(),
        };
        plan.add_listed(sys);
        let mut index = VectorIndex::default();
        for (c, ch) in plan.channels.iter().enumerate() {
            index.add(c, &ch.family);
        }
        if generate {
            let wiring = Wiring::of(sys);
            let applied = wiring
                .as_ref()
                .map(|w| range.unwrap_or_else(|| default_range(w, &plan.channels[..plan.listed])));
            plan.range = applied;
            plan.range_note = Some(range_note(applied, range.is_some()));
            let range = wiring.as_ref().zip(applied);
            plan.generate_candidates(sys, &mut index, range, progress);
        }
        plan.solved = CellSolutions::default();
        let ring = sys.lattice.boundary == Some(Boundary::Periodic) && !split;
        let wiring = Wiring::of(sys);
        plan.ope = super::ope::ope_table(
            &plan.channels,
            &index,
            &sys.invariants.pairing,
            ring,
            wiring.as_ref(),
        );
        plan
    }

    /// The model term a listed channel stands for.
    pub fn term_of(&self, c: usize) -> Option<usize> {
        match self.channels.get(c)?.origin {
            Origin::Listed(i) => Some(i),
            Origin::Generated { .. } => None,
        }
    }

    /// One channel per listed term, or per translate when split.
    fn add_listed(&mut self, sys: &System) {
        for (i, (spec, fam)) in sys
            .model
            .terms
            .iter()
            .zip(&sys.lattice.families)
            .enumerate()
        {
            let spin = sys.invariants.terms[i].spin.clone();
            if !self.split {
                let ch = make_channel(
                    sys,
                    spec.name.clone(),
                    Origin::Listed(i),
                    fam.clone(),
                    spin,
                    &mut self.solved,
                );
                self.channels.push(ch);
                continue;
            }
            for t in &fam.translates {
                let single = Family {
                    translates: vec![t.clone()],
                    representative: 0,
                };
                let name = format!("{}@{}", spec.name, t.anchor);
                let ch = make_channel(
                    sys,
                    name,
                    Origin::Listed(i),
                    single,
                    spin.clone(),
                    &mut self.solved,
                );
                self.channels.push(ch);
            }
        }
        self.listed = self.channels.len();
    }

    /// The pairs closure: for every pair of listed channels a <= b (no
    /// extra sectors), every translate of b commuting with rep(a) and both
    /// signs, rep(a) +- translate joins as a channel unless it is zero,
    /// known, or wider than the range.
    fn generate_candidates(
        &mut self,
        sys: &System,
        index: &mut VectorIndex,
        range: Option<(&Wiring, usize)>,
        progress: &mut dyn FnMut(u64, u64),
    ) {
        let listed = self.listed;
        let pairs = |a: usize| (a * listed - a * a.saturating_sub(1) / 2) as u64;
        for a in 0..listed {
            progress(pairs(a), pairs(listed));
            for b in a..listed {
                if has_extra(sys, self.term_of(a)) || has_extra(sys, self.term_of(b)) {
                    continue;
                }
                let rep_a = self.channels[a].family.rep().clone();
                for tb in self.channels[b].family.translates.clone() {
                    if sys.invariants.pairing.scaled_parts(&rep_a.parts, &tb.parts) != 0 {
                        continue;
                    }
                    for sign in [1i8, -1] {
                        self.add_candidate(sys, index, range, (a, &rep_a), (b, &tb), sign);
                    }
                }
            }
        }
        progress(pairs(listed), pairs(listed));
    }

    /// One candidate rep(a) + sign * tb (see [`Plan::generate_candidates`]).
    fn add_candidate(
        &mut self,
        sys: &System,
        index: &mut VectorIndex,
        range: Option<(&Wiring, usize)>,
        (a, rep_a): (usize, &Translate),
        (b, tb): (usize, &Translate),
        sign: i8,
    ) {
        let lat = &sys.lattice;
        let v: Vec<i64> = rep_a
            .l
            .iter()
            .zip(&tb.l)
            .map(|(x, y)| x + sign as i64 * y)
            .collect();
        if v.iter().all(|x| *x == 0) || index.find(&v).is_some() {
            return;
        }
        if range.is_some_and(|(w, r)| w.span(&v) > r) {
            return;
        }
        let fam = if self.split {
            single_of(lat, &v)
        } else {
            family_of(lat, &v)
        };
        let Some(fam) = fam else {
            return;
        };
        let shown = if self.split {
            0
        } else {
            shown_shift(lat, rep_a.anchor, tb.anchor)
        };
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
        let ch = make_channel(sys, name, origin, fam, spin, &mut self.solved);
        self.channels.push(ch);
    }
}

/// Largest [`closure_work`] flowed without `--force` (about 10 s of one
/// core; measured: 60 two-wire terms on 16 wires, work 1.1e10, 10 s).
pub const CLOSURE_WORK_LIMIT: f64 = 1e10;

/// An estimate of the work of a flow with the pairs closure, before the
/// closure is built: C^2 N, with N the fields and C the channels it may
/// hold: the L listed ones (one per term, or per translate when split) and
/// up to two per pair of listed channels and relative shift that fits the
/// closure range (at most 2 range - 1 shifts, and at most the translates).
/// The OPE table and every step of the flow touch each pair of channels
/// and a vector of N fields. Without the closure, C = L.
pub fn closure_work(sys: &System, generate: bool, range: Option<usize>) -> f64 {
    let lat = &sys.lattice;
    let split = !translate_dependent(sys).is_empty() && !sys.is_infinite() && lat.wires > 1;
    let translates = lat
        .families
        .iter()
        .map(|f| f.translates.len())
        .max()
        .unwrap_or(0);
    let listed: f64 = if split {
        lat.families.iter().map(|f| f.translates.len() as f64).sum()
    } else {
        lat.families.len() as f64
    };
    let range = range.unwrap_or(sys.model.range() + 2);
    let shifts = if split {
        1
    } else {
        translates.min(2 * range - 1).max(1)
    };
    let generated = if generate {
        listed * (listed + 1.0) * shifts as f64
    } else {
        0.0
    };
    let channels = listed + generated;
    channels * channels * lat.n as f64
}

/// Refuse a flow whose [`closure_work`] is above [`CLOSURE_WORK_LIMIT`]
/// unless `force`, with the estimate and the ways out.
pub fn check_closure(
    sys: &System,
    generate: bool,
    range: Option<usize>,
    force: bool,
) -> Result<(), crate::error::Error> {
    let work = closure_work(sys, generate, range);
    if force || work <= CLOSURE_WORK_LIMIT {
        return Ok(());
    }
    let how = if generate {
        "pass --closure none, a smaller --closure-range, or --force to run it anyway"
    } else {
        "pass --force to run it anyway"
    };
    Err(crate::error::Error::refused(
        "--closure",
        format!(
            "the flow of {} listed terms on {} fields would take about {work:.1e} units of work (channels^2 x fields, up to 2 channels per pair of terms and shift with the pairs closure; limit {CLOSURE_WORK_LIMIT:.0e}, about 10 s); {how}",
            sys.model.terms.len(),
            sys.lattice.n
        ),
    ))
}

/// Listed terms whose momentum may depend on the translate: arrays with
/// `momentum_per_wire` and a term whose dk can be non-zero
/// ([`crate::core::momentum::per_translate::may_vary`]).
pub fn translate_dependent(sys: &System) -> Vec<usize> {
    if sys.lattice.boundary.is_none() || sys.model.momentum_per_wire.is_none() {
        return Vec::new();
    }
    let lat = &sys.lattice;
    (0..sys.model.terms.len())
        .filter(|&i| {
            let net = per_translate::net_particles(lat, &sys.invariants.terms[i].particles);
            per_translate::may_vary(&sys.model, &net)
        })
        .collect()
}

/// The default closure range: the widest listed term plus one wire.
fn default_range(wiring: &Wiring, listed: &[Channel]) -> usize {
    listed
        .iter()
        .map(|c| wiring.span(&c.family.rep().l))
        .max()
        .unwrap_or(1)
        + 1
}

fn range_note(applied: Option<usize>, given: bool) -> String {
    match applied {
        Some(r) => format!(
            "closure range {r} wire(s): generated terms spanning more wires are left out ({})",
            if given {
                "closure_range"
            } else {
                "the default, the widest listed term plus one wire; set it with --closure-range"
            }
        ),
        None => "closure range not applied: the fields are not grouped by wire (fields.wires), so every commuting pair below the closure bound joins".to_string(),
    }
}

/// Which wire each field is on, for measuring how many wires a vector
/// spans: the array's wires, or an explicit model's `fields.wires`.
#[derive(Debug, Clone)]
pub struct Wiring {
    wire_of: Vec<usize>,
    wires: usize,
    periodic: bool,
}

impl Wiring {
    /// The wiring of a system (None: an explicit model without wires).
    pub fn of(sys: &System) -> Option<Wiring> {
        let lat = &sys.lattice;
        match lat.boundary {
            Some(b) => Some(Wiring {
                wire_of: (0..lat.n).map(|f| f / lat.cell.max(1)).collect(),
                wires: lat.wires,
                periodic: b == Boundary::Periodic,
            }),
            None => sys.model.field_wires.as_ref().map(|fw| Wiring {
                wire_of: fw.wire.clone(),
                wires: fw.wires,
                periodic: fw.periodic,
            }),
        }
    }

    /// The wire of a field.
    pub(super) fn wire(&self, field: usize) -> usize {
        self.wire_of[field]
    }

    /// Consecutive wires spanned by a sorted list of distinct wires.
    pub(super) fn span_of(&self, wires: &[usize]) -> usize {
        window(wires, self.wires, self.periodic).map_or(0, |(_, width)| width)
    }

    /// Consecutive wires (cyclically when periodic) spanned by the support
    /// of a dense vector.
    pub fn span(&self, v: &[i64]) -> usize {
        let mut touched = vec![false; self.wires];
        for (f, x) in v.iter().enumerate() {
            if *x != 0 {
                touched[self.wire_of[f]] = true;
            }
        }
        let wires: Vec<usize> = (0..self.wires).filter(|w| touched[*w]).collect();
        window(&wires, self.wires, self.periodic).map_or(0, |(_, width)| width)
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

fn has_extra(sys: &System, term: Option<usize>) -> bool {
    let Some(term) = term else {
        return false;
    };
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
    solved: &mut CellSolutions,
) -> Channel {
    let lat = &sys.lattice;
    let inv = &sys.invariants.cell_inverse;
    let placements = family.translates.len();
    let (family, copies) = distinct(family);
    let mut l_sparse = Vec::with_capacity(family.translates.len());
    let mut g_sparse = Vec::with_capacity(family.translates.len());
    for t in &family.translates {
        let (l, g) = solved.sparse_pair(lat, inv, t);
        l_sparse.push(l);
        g_sparse.push(g);
    }
    let particles = solved.particles(lat, inv, &family.rep().l);
    let charge = rational::dot_int(&particles, &lat.charge);
    let share = family.translates.len() as f64 / placements.max(1) as f64;
    let mut ch = Channel {
        name,
        origin,
        family,
        spin_text: rational::fmt_rational(&spin),
        charge_text: rational::fmt_rational(&charge),
        spin,
        charge,
        particles_f64: particles.iter().map(rational::to_f64).collect(),
        particles,
        l_sparse,
        g_sparse,
        lq: Vec::new(),
        gq: Vec::new(),
        share,
        copies,
    };
    // Periodic rings: L(q) on their W points. Infinite arrays: per flow.
    if let (Some(q), false) = (&sys.q, lat.infinite) {
        ch = ch.on_rule(lat, &q.kinv, lat.wires);
    }
    ch
}

/// m = K^-1 l wire by wire (as [`crate::core::invariants::particles_of`]), solving each distinct
/// cell vector once: the translates of a family, and the channels of a
/// plan, repeat the same few.
#[derive(Debug, Clone, Default)]
struct CellSolutions(HashMap<Vec<i64>, Vec<Rational>>);

impl CellSolutions {
    fn particles(&mut self, lat: &Lattice, inv: &[Vec<Rational>], l: &[i64]) -> Vec<Rational> {
        let mut m = vec![Rational::zero(); lat.n];
        for w in 0..lat.wires {
            let slice = &l[w * lat.cell..(w + 1) * lat.cell];
            if slice.iter().all(|x| *x == 0) {
                continue;
            }
            let sol = self
                .0
                .entry(slice.to_vec())
                .or_insert_with(|| rational::solve_with(inv, slice));
            m[w * lat.cell..(w + 1) * lat.cell].clone_from_slice(sol);
        }
        m
    }

    /// The nonzero entries of l and of m = K^-1 l of one translate, in
    /// field order, from its parts (cost of its support, not of all fields):
    /// the same lists as filtering the dense vectors.
    fn sparse_pair(
        &mut self,
        lat: &Lattice,
        inv: &[Vec<Rational>],
        t: &Translate,
    ) -> (SparseVector, SparseVector) {
        let mut on_wires: BTreeMap<usize, Vec<i64>> = BTreeMap::new();
        for (wire, v) in &t.parts {
            let sum = on_wires.entry(*wire).or_insert_with(|| vec![0; lat.cell]);
            sum.iter_mut().zip(v).for_each(|(s, x)| *s += x);
        }
        let (mut l, mut g) = (Vec::new(), Vec::new());
        for (wire, slice) in on_wires {
            if slice.iter().all(|x| *x == 0) {
                continue;
            }
            let base = wire * lat.cell;
            let sol = self
                .0
                .entry(slice.clone())
                .or_insert_with(|| rational::solve_with(inv, &slice));
            l.extend(nonzero(base, slice.iter().map(|x| *x as f64)));
            g.extend(nonzero(base, sol.iter().map(rational::to_f64)));
        }
        (l, g)
    }
}

/// (field, value) of the nonzero entries, in field order.
type SparseVector = Vec<(usize, f64)>;

/// (base + i, x) for the nonzero x of a cell's values.
fn nonzero(base: usize, values: impl Iterator<Item = f64>) -> impl Iterator<Item = (usize, f64)> {
    values
        .enumerate()
        .filter(|(_, x)| *x != 0.0)
        .map(move |(i, x)| (base + i, x))
}

/// The distinct translates of a family (a translate equal to plus or minus
/// an earlier one is the same operator), and how many of the placements
/// equal +rep and -rep.
fn distinct(family: Family) -> (Family, (usize, usize)) {
    let rep = family.rep().l.clone();
    let neg: Vec<i64> = rep.iter().map(|x| -x).collect();
    let copies = (
        family.translates.iter().filter(|t| t.l == rep).count(),
        family.translates.iter().filter(|t| t.l == neg).count(),
    );
    let mut kept: Vec<Translate> = Vec::with_capacity(family.translates.len());
    let mut seen: HashSet<Vec<i64>> = HashSet::new();
    let mut representative = 0;
    for (i, t) in family.translates.into_iter().enumerate() {
        let negated: Vec<i64> = t.l.iter().map(|x| -x).collect();
        if seen.contains(&t.l) || seen.contains(&negated) {
            continue;
        }
        seen.insert(t.l.clone());
        if i == family.representative {
            representative = kept.len();
        }
        kept.push(t);
    }
    let fam = Family {
        translates: kept,
        representative,
    };
    (fam, copies)
}

/// (start wire, width) of the smallest window of a ring or line of `total`
/// wires containing the given wires (sorted).
fn window(wires: &[usize], total: usize, periodic: bool) -> Option<(usize, usize)> {
    let (&first, &last) = (wires.first()?, wires.last()?);
    if !periodic {
        return Some((first, last - first + 1));
    }
    // Periodic: the window starts after the largest cyclic gap.
    let mut best = (first, last - first + 1);
    for (i, &start) in wires.iter().enumerate() {
        let prev = wires[(i + wires.len() - 1) % wires.len()];
        let width = (prev + total - start) % total + 1;
        if width < best.1 {
            best = (start, width);
        }
    }
    Some(best)
}

/// (start wire, width) of the smallest window containing the given wires.
fn minimal_window(lat: &Lattice, wires: &[usize]) -> Option<(usize, usize)> {
    window(wires, lat.wires, lat.boundary == Some(Boundary::Periodic))
}

/// A cell-level part of a vector: (wire offset, integer vector over the cell).
type CellPart = (usize, Vec<i64>);

/// The cell-level parts of a dense vector relative to the start of its
/// support window, and that start.
fn window_parts(lat: &Lattice, v: &[i64]) -> Option<(usize, Vec<CellPart>)> {
    let wires: Vec<usize> = (0..lat.wires)
        .filter(|w| v[w * lat.cell..(w + 1) * lat.cell].iter().any(|x| *x != 0))
        .collect();
    let (start, width) = minimal_window(lat, &wires)?;
    let parts = (0..width)
        .map(|off| {
            let w = (start + off) % lat.wires;
            (off, v[w * lat.cell..(w + 1) * lat.cell].to_vec())
        })
        .filter(|(_, p)| p.iter().any(|x| *x != 0))
        .collect();
    Some((start, parts))
}

/// A dense vector as a family of its one translate, anchored at the start
/// of its support window (split plans).
fn single_of(lat: &Lattice, v: &[i64]) -> Option<Family> {
    let (start, parts) = window_parts(lat, v)?;
    Some(Family {
        translates: vec![lat.place(&parts, start)],
        representative: 0,
    })
}

/// The family of a dense vector: its cell-level parts relative to the start
/// of its support window, placed at every anchor.
fn family_of(lat: &Lattice, v: &[i64]) -> Option<Family> {
    let (_, parts) = window_parts(lat, v)?;
    let fam = lat.family(&parts);
    (!fam.translates.is_empty()).then_some(fam)
}

/// A multiply-rotate hasher for integer vectors (the SipHash default was a
/// quarter of the time of a plan with a few hundred channels; the keys are
/// the model's own vectors, so no hash flooding is to be feared).
#[derive(Debug, Default, Clone, Copy)]
pub(super) struct VecHasher(u64);

impl std::hash::Hasher for VecHasher {
    fn finish(&self) -> u64 {
        self.0
    }
    fn write(&mut self, bytes: &[u8]) {
        let mut chunks = bytes.chunks_exact(8);
        for c in &mut chunks {
            let mut word = [0u8; 8];
            word.copy_from_slice(c);
            self.write_u64(u64::from_le_bytes(word));
        }
        for b in chunks.remainder() {
            self.write_u64(*b as u64);
        }
    }
    fn write_u64(&mut self, x: u64) {
        self.0 = (self.0.rotate_left(5) ^ x).wrapping_mul(0x517c_c1b7_2722_0a95);
    }
    fn write_i64(&mut self, x: i64) {
        self.write_u64(x as u64);
    }
    fn write_usize(&mut self, x: usize) {
        self.write_u64(x as u64);
    }
}

pub(super) type VecMap<V> = HashMap<Vec<i64>, V, std::hash::BuildHasherDefault<VecHasher>>;

/// Maps every translate vector (and its negative) to (channel, sign).
#[derive(Debug, Default)]
pub(super) struct VectorIndex {
    map: VecMap<(usize, bool)>,
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

    /// Every vector with its (channel, negated).
    pub(super) fn entries(&self) -> impl Iterator<Item = (&[i64], (usize, bool))> {
        self.map.iter().map(|(v, hit)| (v.as_slice(), *hit))
    }
}
