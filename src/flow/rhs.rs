//! The right-hand side of the flow equations and the stop hook.
//!
//! State layout: `[Re w_0, Im w_0, ..., Re w_{C-1}, Im w_{C-1}, D...]` with
//! D stored as the [`Background`] says. Equations [docs/physics.md
//! sections 3 and 4]:
//!
//! ```text
//! dw_c/dell = (2 - Delta_c - delta_c) w_c - (1/2) sum_OPE w_a w_b^(*)
//! dD/dell   = -(1/8) sum_{null c} |y_c|^2 sum_t [D l l^T D - K^-1 l l^T K^-1]
//! ```
//!
//! with y_c = 2 |w_c|; each OPE entry carries its weight n_a / n_c (see
//! [`super::channels`]), and a channel whose operator is minus one of its
//! own translates keeps a real amplitude. Channels past their momentum cut-off ell_k are
//! inactive: they neither flow nor feed back. Evaluation allocates nothing:
//! scratch space lives in a `RefCell` sized once.
//!
//! Per segment (between momentum cut-offs) the set of active channels is
//! fixed: [`FlowRhs::begin_segment`] lists the live channels and the OPE
//! entries among them once, grouped by product and target
//! ([`super::ope_terms`]), so an evaluation never filters; the flows of one
//! plan (a scan's points) cut it from the plan's table grouped once and
//! share the channels' outer products ([`Shared`]). The D feedback
//! is formed as matrix products ([`Background::evaluate`]), except for a
//! dense D with fewer null translates than half its size, where the
//! rank-one updates are cheaper;
//! [`FlowRhs::derivative_reference`] keeps the per-channel route as the
//! reference they are tested against.

use std::cell::RefCell;
use std::collections::HashMap;

use crate::math::dop853::Derivative;

use super::background::{Background, DenseRoute, Outer, Work};
use super::channels::{Channel, OpeEntry};
use super::ope_terms::{reference_terms, GroupedOpe, LiveOpe};
use crate::core::relevance::rg_eigenvalue;

/// Relative distance below which two couplings count as equal in
/// [`FlowRhs::strongest`]: far below the flow's accuracy (rtol 1e-8), far
/// above the rounding by which routes of the same sums differ (1e-12).
pub const TIE: f64 = 1e-10;

/// Why the integration stopped early.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Stop {
    /// Some active |y| reached y_strong within the last step.
    Strong {
        /// Start of the step.
        ell_before: f64,
        /// End of the step.
        ell_after: f64,
    },
    /// Every active coupling below the floor, every non-zero one irrelevant.
    Decayed {
        /// Where it was detected.
        ell: f64,
    },
}

/// One recorded point of the trajectory.
#[derive(Debug, Clone, PartialEq)]
pub struct Sample {
    /// ell.
    pub ell: f64,
    /// |y| of each channel.
    pub couplings: Vec<f64>,
    /// Total Delta of each channel.
    pub dimensions: Vec<f64>,
}

/// The ODE system of one flow.
pub struct FlowRhs<'a> {
    /// D storage.
    pub bg: Background,
    /// Flowing channels.
    pub channels: Vec<&'a Channel>,
    /// Extra dimension of each channel.
    pub extra: Vec<f64>,
    /// OPE entries (indices into `channels`).
    pub ope: Vec<OpeEntry>,
    /// Channel flows in the current segment.
    pub active: Vec<bool>,
    /// Channel never flows (decayed at once).
    pub frozen: Vec<bool>,
    /// Channel is a null vector (feeds back on D).
    pub null: Vec<bool>,
    /// Stop threshold.
    pub y_strong: f64,
    /// Decay floor.
    pub floor: f64,
    /// Record every accepted step.
    pub record: bool,
    /// Recorded trajectory.
    pub samples: Vec<Sample>,
    /// Set by the stop hook.
    pub stop: Option<Stop>,
    /// ell of the previous accepted step.
    pub last_ell: f64,
    /// Largest DKD drift seen is measured by the caller; steps counted here.
    pub steps: usize,
    /// Integrate with [`FlowRhs::derivative_reference`] (tests only).
    pub reference: bool,
    /// Infinite arrays: the in-flow quadrature estimate, advanced at every
    /// accepted step (see [`super::qtrack`]); None otherwise.
    pub q_track: Option<super::qtrack::Tracker>,
    /// Precomputed outer products of the null channels (of every channel
    /// when D is carried in q-space).
    outer: Vec<Option<Outer>>,
    /// Active channels of the current segment.
    live: Vec<usize>,
    /// OPE entries among active channels of the current segment, grouped
    /// for the evaluation.
    live_ope: GroupedOpe,
    /// What earlier flows of the same plan formed (see [`Shared`]); None:
    /// formed for this flow alone.
    shared: Option<Shared<'a>>,
    /// Channels whose amplitude is kept real.
    real: Vec<usize>,
    /// Dense D with few translates feeding back: the rank-one updates cost
    /// less than the products (see [`FlowRhs::new`]).
    rank_one: bool,
    scratch: RefCell<Scratch>,
}

/// Scratch space of one evaluation.
struct Scratch {
    /// |y_c|^2 of the channels that feed back, else 0.
    weight: Vec<f64>,
    /// Bosonic dimensions.
    dims: Vec<f64>,
    /// Matrix products.
    work: Work,
    /// The reference route's vector.
    reference: Vec<f64>,
    /// The OPE products of an evaluation (sized per segment).
    products: Vec<f64>,
}

impl Scratch {
    /// For `n` channels (the OPE products are sized per segment).
    fn new(n: usize, work: Work, reference: usize) -> Scratch {
        Scratch {
            weight: vec![0.0; n],
            dims: vec![0.0; n],
            work,
            reference: vec![0.0; reference],
            products: Vec::new(),
        }
    }
}

/// The channels' outer products ([`Background::outer`]) of a plan's
/// flows, keyed by the layout ([`layout_key`]) and the plan index: exact
/// functions of the key (they do not depend on the parameter point).
pub(super) type OuterCache = std::sync::Mutex<HashMap<(usize, usize, usize), Outer>>;

/// Entries kept at most in one [`OuterCache`] (beyond: formed per flow).
const MAX_OUTERS: usize = 4096;

/// The per-plan data a flow shares with the other flows of its plan (a
/// scan's points): the plan's whole OPE table grouped once, the outer
/// products, and the plan index of each flowing channel.
pub(super) struct Shared<'a> {
    /// The plan's OPE table (plan indices), grouped ([`GroupedOpe`]); each
    /// segment's table is cut from it ([`GroupedOpe::restricted`]).
    pub plan_ope: &'a GroupedOpe,
    /// Number of channels in the plan.
    pub plan_channels: usize,
    /// Outer products.
    pub outers: &'a OuterCache,
    /// Plan index of each of the flow's channels.
    pub plan: Vec<u32>,
}

/// The layout part of an [`OuterCache`] key.
fn layout_key(bg: &Background) -> (usize, usize) {
    match *bg {
        Background::Dense { n } => (0, n),
        Background::Fourier { wires, cell } => (wires, cell),
    }
}

impl Shared<'_> {
    /// The outer products of channel `i` (plan index `plan[i]`) on `bg`.
    fn outer(&self, bg: &Background, i: usize, ch: &Channel) -> Outer {
        let (a, b) = layout_key(bg);
        let key = (a, b, self.plan[i] as usize);
        if let Some(o) = self.outers.lock().ok().and_then(|m| m.get(&key).cloned()) {
            return o;
        }
        let o = bg.outer(ch);
        if let Ok(mut m) = self.outers.lock() {
            if m.len() < MAX_OUTERS {
                m.insert(key, o.clone());
            }
        }
        o
    }
}

impl<'a> FlowRhs<'a> {
    /// Build the system; scratch is sized once here.
    pub fn new(
        bg: Background,
        channels: Vec<&'a Channel>,
        extra: Vec<f64>,
        ope: Vec<OpeEntry>,
    ) -> Self {
        FlowRhs::with_tables(bg, channels, extra, ope, None)
    }

    /// [`FlowRhs::new`] taking the segments' grouped OPE tables and the
    /// channels' outer products from `shared` (`ope` must be the plan's
    /// entries among `channels`, as `Flow::prepare` forms them). With
    /// `shared`, call [`FlowRhs::begin_segment`] before evaluating.
    pub(super) fn with_tables(
        bg: Background,
        channels: Vec<&'a Channel>,
        extra: Vec<f64>,
        ope: Vec<OpeEntry>,
        shared: Option<Shared<'a>>,
    ) -> Self {
        let n = channels.len();
        let null: Vec<bool> = channels.iter().map(|c| c.null()).collect();
        let (outer, work) = feedback_data(&bg, &channels, shared.as_ref());
        let scratch = RefCell::new(Scratch::new(n, work, bg.scratch_len()));
        let real = (0..n).filter(|&c| channels[c].real_only()).collect();
        // A rank-one update costs ~n^2 per translate, the two products 2 n^3
        // (at several times the speed per operation): with fewer null
        // translates than n/2 (explicit models with a few terms) the
        // per-channel route is the faster one.
        let translates: usize = channels
            .iter()
            .filter(|c| c.null())
            .map(|c| c.l_sparse.len())
            .sum();
        let rank_one = matches!(bg, Background::Dense { n } if 2 * translates < n);
        let mut rhs = FlowRhs {
            bg,
            channels,
            extra,
            ope,
            active: vec![true; n],
            frozen: vec![false; n],
            null,
            y_strong: 1.0,
            floor: 1e-6,
            record: true,
            samples: Vec::new(),
            stop: None,
            last_ell: 0.0,
            steps: 0,
            reference: false,
            q_track: None,
            outer,
            live: Vec::new(),
            live_ope: GroupedOpe::default(),
            shared,
            real,
            rank_one,
            scratch,
        };
        // A shared plan's flows list their first segment when they start
        // integrating (`integrate` sets `active` first): grouping every
        // included channel here would be work thrown away.
        if rhs.shared.is_none() {
            rhs.begin_segment();
        }
        rhs
    }

    /// How a dense D's feedback is formed (default [`DenseRoute::Auto`]).
    pub fn set_dense_route(&mut self, route: DenseRoute) {
        self.scratch.get_mut().work.route = route;
    }

    /// Fourier layout: the cell's K^-1, so that N(q) is formed from M(q)
    /// ([`Work::set_cell_kinv`]); ignored on the dense layout.
    pub fn set_cell_kinv(&mut self, kinv: &nalgebra::DMatrix<f64>) {
        if matches!(self.bg, Background::Fourier { .. }) {
            self.scratch.get_mut().work.set_cell_kinv(kinv);
        }
    }

    /// List the active channels and the OPE entries among them; call after
    /// changing `active`, before integrating.
    pub fn begin_segment(&mut self) {
        let active = &self.active;
        self.live.clear();
        self.live
            .extend((0..self.channels.len()).filter(|&c| active[c]));
        self.live_ope = match &self.shared {
            None => group_live(&self.ope, active),
            Some(sh) => {
                // Plan index -> flow index of the active channels.
                let mut pos = vec![u32::MAX; sh.plan_channels];
                for (i, &c) in sh.plan.iter().enumerate() {
                    if active[i] {
                        pos[c as usize] = i as u32;
                    }
                }
                sh.plan_ope.restricted(&pos)
            }
        };
        let products = &mut self.scratch.get_mut().products;
        products.resize(self.live_ope.scratch_len(), 0.0);
    }

    /// Length of the state vector.
    pub fn state_len(&self) -> usize {
        2 * self.channels.len() + self.bg.len()
    }

    /// Total dimension of channel c in a state.
    #[inline]
    pub fn dimension(&self, y: &[f64], c: usize) -> f64 {
        let d = &y[2 * self.channels.len()..];
        let ch = self.channels[c];
        self.bg.dimension(d, ch) + self.extra[c]
    }

    /// |y_c| = 2 |w_c|.
    #[inline]
    pub fn coupling(&self, y: &[f64], c: usize) -> f64 {
        2.0 * y[2 * c].hypot(y[2 * c + 1])
    }

    /// Largest |y| among active channels, with its channel. Couplings within
    /// [`TIE`] (relative) of the largest count as equal and the first such
    /// channel (plan order: listed terms in the model's order first) is
    /// named, so that the order of a sum's rounding never decides between
    /// couplings that a symmetry makes equal (e.g. mirror images on a strip).
    pub fn strongest(&self, y: &[f64]) -> Option<(usize, f64)> {
        let live = || (0..self.channels.len()).filter(|&c| self.active[c]);
        let top = live()
            .map(|c| self.coupling(y, c))
            .max_by(|a, b| a.total_cmp(b))?;
        let c = live().find(|&c| self.coupling(y, c) >= top * (1.0 - TIE))?;
        Some((c, top))
    }

    fn decayed(&self, y: &[f64]) -> bool {
        (0..self.channels.len())
            .filter(|&c| self.active[c])
            .all(|c| {
                let g = self.coupling(y, c);
                g < self.floor && (g == 0.0 || rg_eigenvalue(self.dimension(y, c)) < 0.0)
            })
    }

    pub(super) fn record_sample(&mut self, ell: f64, y: &[f64]) {
        let n = self.channels.len();
        let couplings = (0..n).map(|c| self.coupling(y, c)).collect();
        let dimensions = (0..n).map(|c| self.dimension(y, c)).collect();
        self.samples.push(Sample {
            ell,
            couplings,
            dimensions,
        });
    }
}

/// The channels' outer products and the evaluation's work space (see
/// [`Background::evaluate`]), the outer products from `shared` when given.
fn feedback_data(
    bg: &Background,
    channels: &[&Channel],
    shared: Option<&Shared>,
) -> (Vec<Option<Outer>>, Work) {
    // On the Fourier layout every channel's L L^H gives its dimension
    // (see `Background::evaluate`); elsewhere only null channels need one.
    let fourier = matches!(bg, Background::Fourier { .. });
    let outer_of = |i: usize, c: &Channel| match shared {
        Some(s) => s.outer(bg, i, c),
        None => bg.outer(c),
    };
    let mut outer: Vec<_> = (channels.iter().enumerate())
        .map(|(i, c)| (c.null() || fourier).then(|| outer_of(i, c)))
        .collect();
    let mut work = bg.work();
    bg.merge_outer(&mut outer, &mut work);
    bg.prepare_dimensions(channels, &mut work);
    (outer, work)
}

/// The OPE entries among the `active` channels, grouped ([`GroupedOpe`]).
fn group_live(ope: &[OpeEntry], active: &[bool]) -> GroupedOpe {
    let entries: Vec<LiveOpe> = ope
        .iter()
        .filter(|e| active[e.target] && active[e.a] && active[e.b])
        .map(LiveOpe::of)
        .collect();
    GroupedOpe::new(&entries)
}

impl FlowRhs<'_> {
    /// The right-hand side at state `y` into `dy` (the D feedback as matrix
    /// products).
    pub fn derivative(&self, y: &[f64], dy: &mut [f64]) {
        let nc = self.channels.len();
        let (w, d) = y.split_at(2 * nc);
        let (dw, dd) = dy.split_at_mut(2 * nc);
        dw.fill(0.0);
        dd.fill(0.0);
        let mut guard = self.scratch.borrow_mut();
        let sc = &mut *guard;
        for &c in &self.live {
            sc.weight[c] = if self.null[c] {
                4.0 * (w[2 * c] * w[2 * c] + w[2 * c + 1] * w[2 * c + 1])
            } else {
                0.0
            };
        }
        let (channels, live, outer) = (&self.channels[..], &self.live[..], &self.outer[..]);
        let (weight, dims) = (&sc.weight[..], &mut sc.dims[..]);
        if self.rank_one {
            for &c in live {
                dims[c] = self.bg.dimension_and_feedback(
                    d,
                    channels[c],
                    weight[c],
                    dd,
                    &mut sc.reference,
                );
            }
        } else {
            self.bg
                .evaluate(d, channels, live, outer, weight, dims, dd, &mut sc.work);
        }
        for &c in &self.live {
            let rate = rg_eigenvalue(sc.dims[c] + self.extra[c]);
            dw[2 * c] += rate * w[2 * c];
            dw[2 * c + 1] += rate * w[2 * c + 1];
        }
        self.live_ope.terms(w, dw, &mut sc.products);
        self.zero_real(dw);
    }

    /// The right-hand side by the per-channel route (one rank-one update per
    /// channel and translate, filtering the OPE table on every call): the
    /// reference [`FlowRhs::derivative`] is tested against.
    pub fn derivative_reference(&self, y: &[f64], dy: &mut [f64]) {
        let nc = self.channels.len();
        let (w, d) = y.split_at(2 * nc);
        let (dw, dd) = dy.split_at_mut(2 * nc);
        dw.fill(0.0);
        dd.fill(0.0);
        let scratch = &mut self.scratch.borrow_mut().reference;
        for c in (0..nc).filter(|&c| self.active[c]) {
            let weight = if self.null[c] {
                4.0 * (w[2 * c] * w[2 * c] + w[2 * c + 1] * w[2 * c + 1])
            } else {
                0.0
            };
            let delta = self
                .bg
                .dimension_and_feedback(d, self.channels[c], weight, dd, scratch)
                + self.extra[c];
            let rate = rg_eigenvalue(delta);
            dw[2 * c] += rate * w[2 * c];
            dw[2 * c + 1] += rate * w[2 * c + 1];
        }
        let ope: Vec<LiveOpe> = self
            .ope
            .iter()
            .filter(|e| self.active[e.target] && self.active[e.a] && self.active[e.b])
            .map(LiveOpe::of)
            .collect();
        reference_terms(w, dw, &ope);
        self.zero_real(dw);
    }

    /// The real-only channels' imaginary parts set to zero.
    fn zero_real(&self, dw: &mut [f64]) {
        for &c in &self.real {
            dw[2 * c + 1] = 0.0;
        }
    }
}

impl Derivative for FlowRhs<'_> {
    fn eval(&self, _ell: f64, y: &[f64], dy: &mut [f64]) {
        if self.reference {
            self.derivative_reference(y, dy);
        } else {
            self.derivative(y, dy);
        }
    }
}

impl FlowRhs<'_> {
    /// The stop hook, after every accepted step at `ell` with state `y`:
    /// counts and records the step, and returns true (setting `stop`) when
    /// a coupling reached y_strong or every coupling decayed, or (without
    /// `stop`) when the state is no longer finite.
    pub fn after_step(&mut self, ell: f64, y: &[f64]) -> bool {
        self.steps += 1;
        if self.record {
            self.record_sample(ell, y);
        }
        if let Some(mut track) = self.q_track.take() {
            track.step(self, ell, y);
            self.q_track = Some(track);
        }
        let before = self.last_ell;
        self.last_ell = ell;
        if self.strongest(y).is_some_and(|(_, g)| g >= self.y_strong) {
            self.stop = Some(Stop::Strong {
                ell_before: before,
                ell_after: ell,
            });
            return true;
        }
        if self.decayed(y) {
            self.stop = Some(Stop::Decayed { ell });
            return true;
        }
        !y.iter().all(|x| x.is_finite())
    }
}
