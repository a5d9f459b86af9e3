//! Successive pinning [physics reference section 7]: the flow continues
//! after its first winner pins.
//!
//! When a null, local channel reaches y_strong at ell_i, its family (every
//! translate) is pinned; every flowing channel that fails to commute with
//! one of its translates (exact l^T K^-1 p != 0) is disordered and leaves
//! the flow; every channel whose representative lies in span_Q of the
//! pinned vectors is locked by them (its dimension in the pinned theory is
//! zero) and leaves too. D is reduced in the reference-velocity form
//!
//! ```text
//! D_P = D - D P (P^T D P)^+ P^T D
//! ```
//!
//! (dense: P = the translates' l; Fourier layouts: per stored q with the
//! family's L(q), a rank-one update D(q) L L^H D(q) / (L^H D(q) L)), and the
//! survivors flow on from ell_i with their couplings as they are. Earlier
//! pins need no repetition: D_P p = 0 and the flow keeps D p = 0 (dD p =
//! -(1/8)|y|^2 [D l (l^T D p) - K^-1 l (l^T K^-1 p)] = 0 for surviving l),
//! so the pseudo-inverse drops their directions. The invariant of a later
//! stage is D K D = (its value at the stage's start), not K^-1 (the flow of
//! D K D vanishes as long as every active l is K^-1-orthogonal to P; derived
//! in a few lines from the equation of [`super::background`]); the drift is
//! measured against that.
//!
//! The staged flow ends when no channel is left flowing (the pinned set
//! gaps every pair: nothing commuting with a Lagrangian lattice lies outside
//! its rational span), when the survivors all decay (a gapless remainder),
//! at ell_max, when a spinful or non-local channel wins a stage (no pinning:
//! the flow stops as today), or after `stages` stages.

use std::collections::HashMap;

use nalgebra::{DMatrix, DVector};
use num_complex::Complex64;
use serde::Serialize;

use super::background::Background;
use super::channels::Origin;
use super::rhs::FlowRhs;
use super::{integrate, Flow, FlowResult, Integrated, Outcome};
use crate::core::invariants::{families_commute, Pairing};
use crate::core::lattice::{Family, Lattice};
use crate::core::phase::{name_phase, Candidate, Phase, PinnedLattice};

/// One stage of a staged flow.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Stage {
    /// Scale at which this stage's winner reached y_strong.
    pub ell: f64,
    /// The family pinned at this stage.
    pub pinned: Vec<String>,
    /// Channels that fail to commute with it (they leave the flow).
    pub disordered: Vec<String>,
}

/// How a staged flow ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum StagesEnd {
    /// Nothing is left flowing after the last pin.
    Pinned,
    /// Every surviving coupling decayed.
    Gapless,
    /// ell_max reached.
    Undecided,
    /// A spinful channel reached strong coupling (no pinning).
    Spinful,
    /// A null but non-local channel reached strong coupling (cannot pin).
    Nonlocal,
    /// The number of stages allowed (`--stages`) was reached.
    Limit,
    /// The integrator could not continue.
    Failed,
}

impl StagesEnd {
    /// The word used in outputs.
    pub fn word(self) -> &'static str {
        match self {
            StagesEnd::Pinned => "pinned",
            StagesEnd::Gapless => "gapless",
            StagesEnd::Undecided => "undecided",
            StagesEnd::Spinful => "spinful",
            StagesEnd::Nonlocal => "nonlocal",
            StagesEnd::Limit => "limit",
            StagesEnd::Failed => "failed",
        }
    }
}

/// What the staged flow produced (indices into the flowing channels).
pub(super) struct Staged {
    pub stages: Vec<Stage>,
    pub pinned: Vec<usize>,
    pub end: StagesEnd,
    /// Largest drift of D K D from its stage-start value in later stages.
    pub drift: f64,
    pub message: Option<String>,
    /// Where the last integration ended (None: no stage flowed on).
    pub ell_end: Option<f64>,
}

/// Run the stages after the first integration. `k` is the K the drift is
/// measured with (dense K, or the cell K of the Fourier layouts).
pub(super) fn run(
    rhs: &mut FlowRhs,
    first: &Integrated,
    ell_k: &[Option<f64>],
    opts: &super::FlowOptions,
    k: &DMatrix<f64>,
    lattice: Exact,
) -> Staged {
    let st = Staged {
        stages: Vec::new(),
        pinned: Vec::new(),
        end: end_of(first.outcome),
        drift: 0.0,
        message: None,
        ell_end: None,
    };
    let (Some(w), Some(ell)) = (first.winner, first.ell_star) else {
        return st;
    };
    if first.outcome != Outcome::Strong {
        return st;
    }
    let mut y = first.state.clone();
    let mut left_at: Vec<Option<f64>> = vec![None; rhs.channels.len()];
    let st = stage_loop(
        rhs,
        &mut y,
        (w, ell),
        &mut left_at,
        st,
        ell_k,
        opts,
        k,
        lattice,
    );
    hide_left(rhs, &left_at);
    st
}

/// The stages proper, from the first winner `w` at `ell`.
#[allow(clippy::too_many_arguments)]
fn stage_loop(
    rhs: &mut FlowRhs,
    y: &mut DVector<f64>,
    (mut w, mut ell): (usize, f64),
    left_at: &mut [Option<f64>],
    mut st: Staged,
    ell_k: &[Option<f64>],
    opts: &super::FlowOptions,
    k: &DMatrix<f64>,
    lattice: Exact,
) -> Staged {
    loop {
        if !crate::math::rational::is_integral(&rhs.channels[w].particles) {
            st.end = StagesEnd::Nonlocal;
            return st;
        }
        let (before, y_at_pin) = (rhs.frozen.clone(), y.clone());
        let alive = pin(rhs, y, w, &mut st, ell, lattice);
        if alive == 0 {
            st.end = StagesEnd::Pinned;
            return st;
        }
        if opts.stages.is_some_and(|most| st.stages.len() >= most) {
            st.end = StagesEnd::Limit;
            return st;
        }
        // The flow goes on: its trajectory restarts at ell, and the terms
        // that left have no value beyond it.
        trim_samples(rhs, ell, &y_at_pin);
        for (c, was) in before.iter().enumerate() {
            if !was && rhs.frozen[c] {
                left_at[c] = Some(ell);
            }
        }
        let nc = rhs.channels.len();
        reduce(&rhs.bg, &mut y.as_mut_slice()[2 * nc..], rhs.channels[w]);
        let reference = dkd_blocks(&rhs.bg, &y.as_slice()[2 * nc..], k);
        rhs.stop = None;
        let next = integrate(rhs, y.clone(), ell_k, opts, ell);
        st.ell_end = Some(next.ell_end);
        let end = dkd_blocks(&rhs.bg, &next.state.as_slice()[2 * nc..], k);
        st.drift = st.drift.max(drift_between(&end, &reference, k));
        st.end = end_of(next.outcome);
        match (next.outcome, next.winner, next.ell_star) {
            (Outcome::Strong, Some(nw), Some(nl)) => {
                w = nw;
                ell = nl;
                *y = next.state;
            }
            _ => {
                st.message = next.message;
                return st;
            }
        }
    }
}

impl Flow<'_> {
    /// The stages after the first integration.
    pub(super) fn stages(
        &self,
        rhs: &mut FlowRhs,
        first: &Integrated,
        ell_k: &[Option<f64>],
        included: &[usize],
    ) -> Staged {
        let k = match (&rhs.bg, &self.sys.q) {
            (Background::Fourier { .. }, Some(q)) => q.k.clone(),
            _ => self.sys.k.clone(),
        };
        let lattice = Exact {
            lat: &self.sys.lattice,
            pairing: &self.sys.invariants.pairing,
            included,
            fates: &self.fates,
        };
        run(rhs, first, ell_k, &self.opts, &k, lattice)
    }

    /// Put the stages and the phase into a result (`included` maps flowing
    /// channels to plan channels).
    pub(super) fn attach_stages(&self, r: &mut FlowResult, st: Staged, included: &[usize]) {
        r.stages = st.stages;
        r.stages_end = Some(st.end);
        r.ell_end = st.ell_end.unwrap_or(r.ell_end);
        r.ell_last = r.stages.last().map(|s| s.ell).or(r.ell_star);
        r.gap = r.ell_last.map(|l| (-l).exp());
        if st.drift.is_nan() || st.drift > r.dkd_drift {
            r.dkd_drift = st.drift;
        }
        if r.message.is_none() {
            r.message = st.message;
        }
        let mut pinned: Vec<usize> = st.pinned.iter().map(|&c| included[c]).collect();
        pinned.sort_unstable();
        let named = !pinned.is_empty() || st.end == StagesEnd::Gapless;
        r.phase = named.then(|| self.phase_of(pinned));
    }

    /// The phase of a pinned set of plan channels (cached: scans meet the
    /// same sets again and again).
    pub fn phase_of(&self, pinned: Vec<usize>) -> Phase {
        if let Some(p) = self
            .phases
            .lock()
            .ok()
            .and_then(|m| m.get(&pinned).cloned())
        {
            return p;
        }
        let chans = &self.plan.channels;
        let candidates: Vec<Candidate> = chans
            .iter()
            .map(|c| Candidate {
                name: &c.name,
                listed: matches!(c.origin, Origin::Listed(_)),
                family: &c.family,
            })
            .collect();
        let fams: Vec<&Family> = pinned.iter().map(|&c| &chans[c].family).collect();
        let targets = crate::core::phase::targets(self.sys);
        let phase = name_phase(&self.sys.lattice, &candidates, &fams, &targets);
        if let Ok(mut m) = self.phases.lock() {
            m.insert(pinned, phase.clone());
        }
        phase
    }
}

/// Text facts: one line per stage, then how the stages ended and the phase.
pub fn facts(r: &FlowResult) -> Vec<(String, String)> {
    let mut f: Vec<(String, String)> = r
        .stages
        .iter()
        .enumerate()
        .map(|(i, s)| {
            let mut line = format!("ell = {:.4}: pins {}", s.ell, s.pinned.join(", "));
            if !s.disordered.is_empty() {
                line.push_str(&format!("; disorders {}", s.disordered.join(", ")));
            }
            (format!("stage {}", i + 1), line)
        })
        .collect();
    if let Some(end) = r.stages_end {
        f.push(("stages end".into(), end_text(end).into()));
    }
    if let Some(p) = &r.phase {
        f.push(("phase".into(), phase_text(p, r.gap)));
    }
    f
}

fn end_text(end: StagesEnd) -> &'static str {
    match end {
        StagesEnd::Pinned => "pinned: nothing is left flowing",
        StagesEnd::Gapless => "gapless: every surviving coupling decayed",
        StagesEnd::Undecided => "undecided: ell_max reached with couplings still flowing",
        StagesEnd::Spinful => {
            "spinful: a term with conformal spin reached strong coupling (no pinning)"
        }
        StagesEnd::Nonlocal => {
            "nonlocal: a non-local null term reached strong coupling (cannot pin)"
        }
        StagesEnd::Limit => "limit: the number of stages allowed (--stages) was reached",
        StagesEnd::Failed => "failed: the integrator could not continue",
    }
}

/// "{a, b}: 8 gapped pairs, 0 gapless modes (fully gapped), target phase".
pub fn phase_text(p: &Phase, gap: Option<f64>) -> String {
    let mut s = format!(
        "{}: {} gapped pairs, {} gapless modes",
        p.label, p.gapped_pairs, p.gapless_modes
    );
    if p.fully_gapped {
        s.push_str(" (fully gapped)");
    }
    s.push_str(if p.target {
        ", the target phase"
    } else {
        ", not the target phase"
    });
    if let (Some(g), false) = (gap, p.terms.is_empty()) {
        s.push_str(&format!("; gap ~ {g:.3e} of u/alpha (last stage)"));
    }
    s
}

/// Drop recorded samples past `ell` (the step that crossed y_strong) and
/// record the state at `ell`, where the next stage starts.
fn trim_samples(rhs: &mut FlowRhs, ell: f64, y: &DVector<f64>) {
    if !rhs.record {
        return;
    }
    rhs.samples.retain(|s| s.ell < ell);
    let n = rhs.channels.len();
    let ys = y.as_slice();
    rhs.samples.push(super::Sample {
        ell,
        couplings: (0..n).map(|c| rhs.coupling(ys, c)).collect(),
        dimensions: (0..n).map(|c| rhs.dimension(ys, c)).collect(),
    });
}

/// A channel that left the flow has no value after it left (NaN in the
/// trajectory; figures break the line there).
fn hide_left(rhs: &mut FlowRhs, left_at: &[Option<f64>]) {
    for s in &mut rhs.samples {
        for (c, at) in left_at.iter().enumerate() {
            if at.is_some_and(|l| s.ell > l) {
                s.couplings[c] = f64::NAN;
                s.dimensions[c] = f64::NAN;
            }
        }
    }
}

/// The exact data the pinning step needs: the lattice of all fields, the
/// commutation pairing, the plan index of each flowing channel and the
/// fates already decided.
#[derive(Clone, Copy)]
pub(super) struct Exact<'a> {
    lat: &'a Lattice,
    pairing: &'a Pairing,
    included: &'a [usize],
    fates: &'a Fates,
}

/// What pinning a set of families does to one more flowing channel.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Fate {
    /// It commutes with the set and is not in its rational span: it flows on.
    Flows,
    /// It fails to commute with the family pinned last: it leaves.
    Disordered,
    /// It lies in the rational span of the pinned vectors: it leaves.
    Locked,
}

/// Fates decided by earlier flows of the same plan (a scan pins the same
/// sets again and again), keyed by the plan indices of the pinned channels
/// in the order they pinned and the plan index of the channel. Exact and
/// independent of the parameter point, so a flow's result does not depend
/// on which flow decided a fate first.
pub(super) type Fates = std::sync::Mutex<HashMap<(Vec<usize>, usize), Fate>>;

/// Fates kept at most in one [`Fates`] (beyond: decided per flow).
const MAX_FATES: usize = 1 << 16;

impl Exact<'_> {
    /// The fate of flowing channel `c` when `pinned` (flowing indices, in
    /// order; the last is the family pinned now) are pinned; `lattice`
    /// holds their pinned lattice once built.
    fn fate(
        &self,
        rhs: &FlowRhs,
        pinned: &[usize],
        c: usize,
        lattice: &mut Option<PinnedLattice>,
    ) -> Fate {
        let key: Vec<usize> = pinned.iter().map(|&p| self.included[p]).collect();
        let key = (key, self.included[c]);
        if let Some(f) = self.fates.lock().ok().and_then(|m| m.get(&key).copied()) {
            return f;
        }
        let win = &rhs.channels[pinned[pinned.len() - 1]].family;
        let ch = rhs.channels[c];
        let fate = if !families_commute(self.lat, self.pairing, win, &ch.family) {
            Fate::Disordered
        } else {
            let lattice = lattice.get_or_insert_with(|| {
                let fams: Vec<&Family> = pinned.iter().map(|&p| &rhs.channels[p].family).collect();
                PinnedLattice::new(self.lat.n, &fams)
            });
            match lattice.contains_rationally(&ch.family.rep().l) {
                true => Fate::Locked,
                false => Fate::Flows,
            }
        };
        if let Ok(mut m) = self.fates.lock() {
            if m.len() < MAX_FATES {
                m.insert(key, fate);
            }
        }
        fate
    }
}

fn end_of(o: Outcome) -> StagesEnd {
    match o {
        Outcome::Strong => StagesEnd::Pinned,
        Outcome::Spinful => StagesEnd::Spinful,
        Outcome::Gapless => StagesEnd::Gapless,
        Outcome::Undecided => StagesEnd::Undecided,
        Outcome::Unphysical | Outcome::Failed => StagesEnd::Failed,
    }
}

/// Pin channel `w` at `ell`: freeze it, the channels it disorders and those
/// it locks (zeroing their couplings), record the stage; returns the number
/// of channels still flowing.
fn pin(
    rhs: &mut FlowRhs,
    y: &mut DVector<f64>,
    w: usize,
    st: &mut Staged,
    ell: f64,
    exact: Exact,
) -> usize {
    st.pinned.push(w);
    let mut lattice = None;
    let mut disordered = Vec::new();
    let mut leave = vec![w];
    for c in (0..rhs.channels.len()).filter(|&c| c != w && !rhs.frozen[c]) {
        match exact.fate(rhs, &st.pinned, c, &mut lattice) {
            Fate::Disordered => {
                disordered.push(rhs.channels[c].name.clone());
                leave.push(c);
            }
            Fate::Locked => leave.push(c),
            Fate::Flows => {}
        }
    }
    for c in leave {
        rhs.frozen[c] = true;
        rhs.active[c] = false;
        y[2 * c] = 0.0;
        y[2 * c + 1] = 0.0;
    }
    st.stages.push(Stage {
        ell,
        pinned: vec![rhs.channels[w].name.clone()],
        disordered,
    });
    rhs.frozen.iter().filter(|f| !**f).count()
}

/// Relative size below which P^T D P counts as singular (a pinned direction
/// already reduced, or L(q) = 0).
const SINGULAR: f64 = 1e-10;

/// D -> D_P for the family of `ch`, in place.
fn reduce(bg: &Background, s: &mut [f64], ch: &super::channels::Channel) {
    match *bg {
        Background::Dense { n } => {
            let d = bg.dense(s);
            let t = ch.l_sparse.len();
            let mut p = DMatrix::zeros(n, t);
            for (j, l) in ch.l_sparse.iter().enumerate() {
                for &(i, x) in l {
                    p[(i, j)] = x;
                }
            }
            let dp = &d * &p;
            let m = p.transpose() * &dp;
            let m_plus = pseudo_inverse(&m);
            let mut reduced = &d - &dp * m_plus * dp.transpose();
            reduced = (&reduced + reduced.transpose()) * 0.5;
            bg.write(&reduced, s);
        }
        Background::Fourier { wires, cell } => {
            for q in 0..crate::core::qspace::half(wires) {
                let lq = &ch.lq[q * cell..(q + 1) * cell];
                reduce_block(s, q, cell, lq);
            }
        }
    }
}

/// Moore-Penrose inverse of a symmetric positive semi-definite matrix.
fn pseudo_inverse(m: &DMatrix<f64>) -> DMatrix<f64> {
    let e = nalgebra::SymmetricEigen::new(m.clone());
    let top = e.eigenvalues.iter().fold(0.0f64, |a, x| a.max(x.abs()));
    let mut out = DMatrix::zeros(m.nrows(), m.ncols());
    for (i, &lambda) in e.eigenvalues.iter().enumerate() {
        if lambda > SINGULAR * top && lambda > 0.0 {
            let v = e.eigenvectors.column(i);
            out += v * v.transpose() / lambda;
        }
    }
    out
}

/// D(q) -> D(q) - (D L)(D L)^H / (L^H D L) on stored block q.
fn reduce_block(s: &mut [f64], q: usize, cell: usize, lq: &[Complex64]) {
    let d = crate::core::qspace::block_at(s, q, cell);
    let l = nalgebra::DVector::from_column_slice(lq);
    let dl = &d * &l;
    let m = l.dotc(&dl).re;
    let scale = d.iter().map(|z| z.norm()).fold(0.0, f64::max) * l.norm_squared();
    if m <= SINGULAR * scale || m <= 0.0 {
        return;
    }
    let base = 2 * q * cell * cell;
    for a in 0..cell {
        for b in 0..cell {
            let z = d[(a, b)] - dl[a] * dl[b].conj() / m;
            let at = base + 2 * (a * cell + b);
            s[at] = z.re;
            s[at + 1] = z.im;
        }
    }
}

/// D K D on every stored block (one block for the dense layout).
fn dkd_blocks(bg: &Background, s: &[f64], k: &DMatrix<f64>) -> Vec<DMatrix<Complex64>> {
    let kc = k.map(|x| Complex64::new(x, 0.0));
    match *bg {
        Background::Dense { .. } => {
            // Real products (gemm): a complex product of real matrices
            // costs several times more for the same numbers.
            let d = bg.dense(s);
            vec![(&d * (k * &d)).map(|x| Complex64::new(x, 0.0))]
        }
        Background::Fourier { wires, cell } => (0..crate::core::qspace::half(wires))
            .map(|q| {
                let d = crate::core::qspace::block_at(s, q, cell);
                &d * &kc * &d
            })
            .collect(),
    }
}

/// Largest |a - b| entry relative to the largest |K^-1| entry.
fn drift_between(a: &[DMatrix<Complex64>], b: &[DMatrix<Complex64>], k: &DMatrix<f64>) -> f64 {
    let Some(kinv) = k.clone().try_inverse() else {
        return f64::NAN;
    };
    let worst = a
        .iter()
        .zip(b)
        .map(|(x, y)| (x - y).iter().map(|z| z.norm()).fold(0.0, f64::max))
        .fold(0.0, f64::max);
    worst / kinv.amax()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pseudo_inverse_of_a_rank_one_matrix() {
        // v v^T with |v|^2 = 2 has pseudo-inverse v v^T / 4 (derived).
        let m = DMatrix::from_row_slice(2, 2, &[1.0, 1.0, 1.0, 1.0]);
        let p = pseudo_inverse(&m);
        for x in p.iter() {
            assert!((x - 0.25).abs() < 1e-14);
        }
    }
}
