//! Second-order ("one-loop") RG flow of competing cosine couplings together
//! with the renormalised fixed point, integrated with DOP853
//! ([`crate::math::dop853`]).
//!
//! Method and limits [docs/physics.md section 3]: first order (the
//! tree-level 2 - Delta) is exact for any V; the OPE and D-feedback terms
//! are second order in the couplings and use a single reference velocity.
//! Results are trustworthy while the couplings are small; "strong coupling"
//! means the perturbative flow has left its domain (|y| reaches y_strong),
//! and the gap estimate E ~ (u/alpha) e^{-ell*} is an order of magnitude.
//!
//! Two consequences worth knowing. (1) The single-cosine
//! Kosterlitz-Thouless law dDelta/dell = -(y^2/4) Delta^2 holds for one
//! vector; a family of translates in an array feeds back through all its
//! translates, dDelta/dell = -(1/16) y^2 sum_t [(l_0^T D l_t)^2 -
//! (l_0^T K^-1 l_t)^2], so the single-cosine critical coupling is not the
//! critical coupling of an array family unless its translates are
//! D-orthogonal. (2) A term past its momentum cut-off no longer counts: a
//! flow whose remaining terms have all decayed is "gapless" even if a
//! cut-off term was still large when it stopped (it averages out).
//! (3) The step control measures the local error of the couplings and of
//! D separately (a root mean square over each; the larger counts), so the
//! couplings meet `rtol` however many entries D has.
//!
//! Integrator (issue 15; `cargo bench --bench points -- integrator`,
//! benches/README.md): DOP853 of our own ([`crate::math::dop853`]) in place
//! of `ode_solvers`' Dormand-Prince 5(4), which on the 32-field ring's flow
//! took 92 accepted steps where DOP853 takes 22-23. The flow's loop
//! (`run_segment`) allocates nothing per step: the stepper's work space is
//! sized once per flow, the right-hand side has its own scratch, and the
//! stop hook ([`rhs::FlowRhs::after_step`]) only records samples when a
//! trajectory is asked for. ell* is located by bisection on DOP853's 7th
//! order dense output of the last step, prepared only for that step (three
//! more evaluations).
//!
//! Organisation: [`channels`] builds the exact plan (which couplings can
//! flow, OPE table), [`background`] stores D, [`rhs`] holds the equations
//! and the stop hook, [`check`] checks (and refines) the quadrature rule of
//! an infinite array's flow, [`report`] turns a [`FlowResult`] into
//! outputs, [`progress`] reports ell reached to a hook
//! ([`Flow::run_with_progress`]).
//!
//! Per-point work (issue 15): a [`Flow`] is built once per scan and keeps
//! what does not depend on the parameter point, formed on first use and
//! shared by every point's flow: the plan's OPE table grouped
//! ([`rhs::Shared`]), the channels' outer products per layout, which
//! channels commute, and what pinning a set does to a channel
//! ([`stages::Fates`]). Each is an exact function of its key (plan
//! indices), so a point's result does not depend on which point (or
//! thread) formed it first. A term with momentum mismatch k flows only up to
//! ell_k = ln(1/|k|); the integration restarts at each such breakpoint so
//! the right-hand side is smooth within each segment.

pub mod background;
pub mod channels;
pub mod check;
pub mod competitors;
pub mod kt;
pub mod limits;
mod ope;
mod ope_terms;
pub mod options;
pub mod progress;
pub mod qtrack;
pub mod report;
pub mod rhs;
pub mod stages;
mod translates;

use nalgebra::DVector;
use serde::Serialize;

use crate::core::system::{EvalPath, System};
use crate::error::{Error, InputError};
use crate::math::dop853::{Control, Dop853};
use background::Background;
use channels::{Channel, Origin, Plan};
pub use check::{CheckMethod, QuadratureCheck, RuleChoice, StoppedBy};
pub use options::{Closure, FlowOptions};
use rhs::{FlowRhs, Sample, Stop};
pub use stages::{Stage, StagesEnd};

/// The outcome of one flow.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Outcome {
    /// A null term reached strong coupling: it pins and opens a gap.
    Strong,
    /// A term with non-zero conformal spin reached strong coupling: the fixed
    /// point is unstable, but this term cannot open a gap on its own.
    Spinful,
    /// Every coupling decayed with every dimension above 2.
    Gapless,
    /// ell_max reached otherwise (near-marginal flows).
    Undecided,
    /// V is not positive definite at the point.
    Unphysical,
    /// The integrator could not continue.
    Failed,
}

impl Outcome {
    /// Every outcome, in the order outputs list them.
    pub const ALL: [Outcome; 6] = [
        Outcome::Strong,
        Outcome::Spinful,
        Outcome::Gapless,
        Outcome::Undecided,
        Outcome::Unphysical,
        Outcome::Failed,
    ];

    /// The outcome a word of [`Outcome::word`] names.
    pub fn from_word(word: &str) -> Option<Outcome> {
        Outcome::ALL.into_iter().find(|o| o.word() == word)
    }

    /// Whether a term won: the outcomes that name a winner.
    pub fn has_winner(self) -> bool {
        matches!(self, Outcome::Strong | Outcome::Spinful)
    }

    /// The word used in every output.
    pub fn word(self) -> &'static str {
        match self {
            Outcome::Strong => "strong",
            Outcome::Spinful => "spinful",
            Outcome::Gapless => "gapless",
            Outcome::Undecided => "undecided",
            Outcome::Unphysical => "unphysical",
            Outcome::Failed => "failed",
        }
    }
}

/// Start and end of one channel's flow.
#[derive(Debug, Clone, Serialize)]
pub struct ChannelResult {
    /// Name.
    pub name: String,
    /// "listed" or "generated".
    pub origin: String,
    /// For generated channels: how they were generated (e.g. "a+b").
    pub parents: Option<String>,
    /// Bare coupling y (as given; sign included).
    pub coupling0: f64,
    /// Bare phase chi.
    pub phase0: f64,
    /// Bare total dimension.
    pub dimension0: f64,
    /// |y| at the end of the flow.
    pub coupling: f64,
    /// Phase of the coupling at the end.
    pub phase: f64,
    /// Total dimension at the end of the flow.
    pub dimension: f64,
    /// Conformal spin (exact).
    pub spin: String,
    /// Charge (exact).
    pub charge: String,
    /// Momentum mismatch (units of 1/alpha), when momenta are given.
    pub momentum: Option<f64>,
    /// Scale at which a mismatched term stops flowing.
    pub ell_k: Option<f64>,
}

/// The runner-up of a strong-coupling outcome (JSON `runner_up`).
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct RunnerUp {
    /// Channel name.
    pub name: String,
    /// |y| at ell*.
    pub coupling: f64,
    /// `coupling` is within [`NEAR_TIE`] (relative) of y_strong: the
    /// winner is decided by a margin the second-order flow cannot resolve.
    pub near_tie: bool,
}

/// A runner-up within this fraction of y_strong is a near tie.
pub const NEAR_TIE: f64 = 0.05;

/// The result of one flow.
#[derive(Debug, Clone, Serialize)]
pub struct FlowResult {
    /// Outcome word.
    pub outcome: Outcome,
    /// Index of the winning channel.
    #[serde(skip)]
    pub winner_index: Option<usize>,
    /// Name of the winning channel.
    pub winner: Option<String>,
    /// Scale at which the winner reached y_strong.
    pub ell_star: Option<f64>,
    /// Successive pinning: one entry per pinned family, in order.
    pub stages: Vec<Stage>,
    /// Why the staged flow ended (null for points that could not flow).
    pub stages_end: Option<StagesEnd>,
    /// Scale of the last stage (ell* of the last pinned family; ell* when
    /// nothing pinned).
    pub ell_last: Option<f64>,
    /// Gap estimate relative to the bandwidth u/alpha: e^{-ell_last}.
    pub gap: Option<f64>,
    /// The phase of the final pinned set (null for points that could not
    /// flow).
    pub phase: Option<crate::core::phase::Phase>,
    /// Where the integration ended (its last stage's, when successive
    /// pinning flowed on).
    pub ell_end: f64,
    /// Every channel that flowed (listed first).
    pub terms: Vec<ChannelResult>,
    /// Strong and spinful outcomes: the channel with the largest |y| at
    /// ell* after the winner, among those still flowing there (not past
    /// their momentum cut-off); null when there is none or for other
    /// outcomes.
    pub runner_up: Option<RunnerUp>,
    /// Terms that commute with the winner (may pin together with it).
    pub commuting_with_winner: Vec<String>,
    /// Terms that do not commute with the winner (pinning suppresses them).
    pub suppressed: Vec<String>,
    /// Largest |D K D - K^-1| entry relative to |K^-1| at the end (for D
    /// carried in q-space: over the blocks D(q) K_c D(q) - K_c^-1).
    pub dkd_drift: f64,
    /// Infinite arrays: the quadrature rule D(q) was carried on, with the
    /// error estimate of the bare dimensions on it; null otherwise.
    pub quadrature: Option<crate::core::qspace::Quadrature>,
    /// Infinite arrays: the a-posteriori check of the flow's quadrature (the
    /// same flow on another rule; see [`check`]); null otherwise and for
    /// flows that failed or could not start.
    pub flow_quadrature: Option<QuadratureCheck>,
    /// The model's reciprocal lattice vector G (`momentum_period`) at the
    /// point, modulo which the momenta `k` are reduced; null without one.
    pub momentum_period: Option<f64>,
    /// Single null cosine flowing alone: what the Kosterlitz-Thouless
    /// invariant decided, and how far ell_max was extended (see [`kt`]);
    /// null when the invariant was not used.
    pub kt: Option<kt::KtDecision>,
    /// The pairs closure's range in wires (generated terms spanning more
    /// wires are left out); null when no range applies or without closure.
    pub closure_range: Option<usize>,
    /// Notes of the plan (closure range, translates flowed one by one).
    #[serde(skip)]
    pub plan_notes: Vec<String>,
    /// For each model term, its row in `terms` (the representative's
    /// translate when every translate flows on its own; see
    /// `channels::Plan::split`).
    #[serde(skip)]
    pub listed_rows: Vec<Option<usize>>,
    /// Accepted integration steps.
    pub steps: usize,
    /// Infinite arrays: the in-flow estimate of the difference from the
    /// flow on half the points ([`qtrack`]); None when not tracked or when
    /// the flow needs the full check.
    #[serde(skip)]
    pub q_estimate: Option<qtrack::Estimate>,
    /// Hunted competitors (`--competitors`) that joined this flow as terms,
    /// named `auto:<particle content>`; empty without them.
    pub competitors_added: Vec<String>,
    /// A message for unphysical or failed points.
    pub message: Option<String>,
    /// Trajectory (when recorded).
    #[serde(skip)]
    pub samples: Vec<Sample>,
}

/// A model prepared for many flows with the same options.
pub struct Flow<'s> {
    /// The system.
    pub sys: &'s System,
    /// Channels and OPE table.
    pub plan: Plan,
    /// Options.
    pub opts: FlowOptions,
    /// Integrate with the per-channel reference right-hand side
    /// ([`rhs::FlowRhs::derivative_reference`]); for tests comparing the two.
    pub reference_rhs: bool,
    /// How a dense D's feedback is formed (tests comparing the banded and
    /// the dense product; [`background::DenseRoute::Auto`] otherwise).
    pub dense_route: background::DenseRoute,
    /// Check every infinite array's flow by flowing it again on the half
    /// rule, even where the in-flow estimate would do (tests comparing the
    /// estimate, kept in [`FlowResult::q_estimate`], with the difference).
    pub full_check: bool,
    layout: Layout,
    /// Phases already named, by sorted plan indices of the pinned set.
    phases: std::sync::Mutex<std::collections::HashMap<Vec<usize>, crate::core::phase::Phase>>,
    /// The plan's channels on an infinite array's N-point rules, by N:
    /// independent of the parameter point, so built once per rule.
    rules: std::sync::Mutex<std::collections::HashMap<usize, std::sync::Arc<Vec<Channel>>>>,
    /// The plan's OPE table grouped once (see [`rhs::Shared`]).
    plan_ope: std::sync::OnceLock<ope_terms::GroupedOpe>,
    /// The channels' outer products, shared by the flows.
    outers: rhs::OuterCache,
    /// What pinning does to a channel, shared by the flows (see
    /// [`stages::Fates`]).
    fates: stages::Fates,
    /// Whether the representative of plan channel a commutes with every
    /// translate of plan channel b, by (a, b): exact, decided once.
    commutes: std::sync::Mutex<std::collections::HashMap<(usize, usize), bool>>,
}

/// Pairs kept at most in [`Flow`]'s commutation cache.
const MAX_COMMUTES: usize = 1 << 16;

/// How D is carried.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Layout {
    /// The dense matrix (explicit models, open arrays, `dense_d`).
    Dense,
    /// Fourier blocks on the W points of a periodic array, from the
    /// q-space fixed point.
    Ring,
    /// Fourier blocks on the points of the infinite array's quadrature
    /// rule (converged, or `q_points`).
    Infinite,
}

/// The start of one flow: D's layout and bare state, the channels with
/// their L(q) on that layout (infinite arrays), the quadrature, and (for
/// the infinite array's first flow) the bare fixed point on its rule, kept
/// for the quadrature check.
struct Start {
    bg: Background,
    d0: Vec<f64>,
    channels: Option<std::sync::Arc<Vec<Channel>>>,
    quadrature: Option<crate::core::qspace::Quadrature>,
    rule: Option<crate::core::qspace::QFixedPoint>,
    /// Estimate the quadrature error along the flow ([`qtrack`]).
    track: bool,
}

impl<'s> Flow<'s> {
    /// Prepare the plan (exact work done once).
    pub fn new(sys: &'s System, opts: FlowOptions) -> Flow<'s> {
        let plan = Plan::build(sys, opts.closure == Closure::Pairs, opts.closure_range);
        Flow::with_plan(sys, plan, opts)
    }

    /// With a plan built before for the same system and options (hunted
    /// competitors keep the plans of the systems they build).
    pub fn with_plan(sys: &'s System, plan: Plan, opts: FlowOptions) -> Flow<'s> {
        let layout = match sys.eval_path() {
            EvalPath::Infinite => Layout::Infinite,
            // Translates with their own momenta break translation invariance.
            EvalPath::Ring if !opts.dense_d && !plan.split => Layout::Ring,
            _ => Layout::Dense,
        };
        Flow {
            sys,
            plan,
            opts,
            reference_rhs: false,
            dense_route: background::DenseRoute::Auto,
            full_check: false,
            layout,
            phases: Default::default(),
            rules: Default::default(),
            plan_ope: Default::default(),
            outers: Default::default(),
            fates: Default::default(),
            commutes: Default::default(),
        }
    }

    fn start(&self, point: &[f64]) -> Result<Start, Error> {
        let lat = &self.sys.lattice;
        match self.layout {
            Layout::Dense => {
                let fp = self.sys.fixed_point(point)?;
                self.check_storage(point, &fp)?;
                let bg = Background::Dense { n: lat.n };
                let mut d0 = vec![0.0; bg.len()];
                bg.write(&fp.d, &mut d0);
                Ok(Start {
                    bg,
                    d0,
                    channels: None,
                    quadrature: None,
                    rule: None,
                    track: false,
                })
            }
            Layout::Ring => {
                let fp = self.sys.q_fixed_point(point, lat.wires)?;
                Ok(Start {
                    bg: Background::Fourier {
                        wires: lat.wires,
                        cell: lat.cell,
                    },
                    d0: fp.d,
                    channels: None,
                    quadrature: None,
                    rule: None,
                    track: false,
                })
            }
            Layout::Infinite => {
                let (fp, quad) = match self.opts.q_points {
                    Some(n) => self.sys.q_on_rule(point, n)?,
                    None => self.sys.q_converged(point)?,
                };
                let start = self.on_rule(&fp, quad)?;
                Ok(Start {
                    rule: Some(fp),
                    ..start
                })
            }
        }
    }

    /// Refuse a dense start whose listed terms' dimensions, computed from a
    /// D carried in doubles, have an error bound above
    /// [`crate::core::fixed_point::DIMENSION_ERROR_LIMIT`] (ill-conditioned V).
    fn check_storage(
        &self,
        point: &[f64],
        fp: &crate::core::fixed_point::FixedPoint,
    ) -> Result<(), Error> {
        let limit = crate::core::fixed_point::DIMENSION_ERROR_LIMIT;
        for (t, fam) in self.sys.model.terms.iter().zip(&self.sys.lattice.families) {
            let l = &fam.rep().l;
            let e = fp.dimension_error(l) + fp.storage_error(l);
            if e > limit || e.is_nan() {
                return Err(Error::Inaccurate(format!(
                    "{}: the flow at {} cannot be computed accurately: the scaling dimension of term \"{}\" from D in double precision has error bound {e:.1e} (relative; at most {limit:.0e} is accepted), V is badly conditioned there; choose another point",
                    self.sys.model.file,
                    self.sys.model.params.describe(point),
                    t.name
                )));
            }
        }
        Ok(())
    }

    /// The start of an infinite array's flow on the rule of `fp`.
    fn on_rule(
        &self,
        fp: &crate::core::qspace::QFixedPoint,
        quad: crate::core::qspace::Quadrature,
    ) -> Result<Start, Error> {
        let lat = &self.sys.lattice;
        let kinv = &self
            .sys
            .q
            .as_ref()
            .ok_or_else(|| Error::Numerical("an infinite array without q-space data".into()))?
            .kinv;
        let built = || {
            let on_rule = self.plan.channels.iter();
            std::sync::Arc::new(on_rule.map(|c| c.on_rule(lat, kinv, fp.points)).collect())
        };
        let channels = match self.rules.lock() {
            Ok(mut rules) => rules.entry(fp.points).or_insert_with(built).clone(),
            Err(_) => built(),
        };
        Ok(Start {
            bg: Background::Fourier {
                wires: fp.points,
                cell: lat.cell,
            },
            d0: fp.d.clone(),
            channels: Some(channels),
            quadrature: Some(quad),
            rule: None,
            track: false,
        })
    }

    /// Flow at one parameter point. An infinite array's flow is checked
    /// against the same flow on another quadrature rule, and refined when
    /// the check fails (see [`check`]).
    pub fn run(&self, point: &[f64]) -> Result<FlowResult, Error> {
        self.sys.model.check_point(point)?;
        self.check_translate_momenta(point)?;
        let mut start = match self.start(point) {
            Ok(start) => start,
            Err(e) => return unphysical_result(e),
        };
        match start.rule.take() {
            Some(fp) => self.run_checked(point, start, fp),
            None => self.run_from(point, start, self.opts.record),
        }
    }

    /// [`Flow::run`], calling `hook(ell reached, ell_max)` after accepted
    /// integration steps, at most once per `every` (for a progress bar or
    /// log lines; it must not print to stdout). The result is the same.
    pub fn run_with_progress(
        &self,
        point: &[f64],
        every: std::time::Duration,
        hook: progress::Hook,
    ) -> Result<FlowResult, Error> {
        progress::with_hook(every, hook, || self.run(point))
    }

    /// Flow from a prepared start; `record` keeps the trajectory.
    fn run_from(&self, point: &[f64], start: Start, record: bool) -> Result<FlowResult, Error> {
        let all: &[Channel] = start.channels.as_deref().unwrap_or(&self.plan.channels);
        let Prepared {
            mut rhs,
            included,
            bare,
            y0,
            dims0,
            momenta,
            ell_k,
        } = self.prepare(point, all, &start, record)?;
        let y_start = y0.clone();
        if start.track {
            rhs.q_track = self.tracker(&rhs, all, &start, y0.as_slice());
        }
        let mut integrated = integrate(&mut rhs, y0, &ell_k, &self.opts, 0.0);
        let q_estimate = self.q_estimate(&mut rhs, &integrated);
        let mut kt_decision = None;
        if let Some(c) = kt::regime(&rhs, y_start.as_slice(), &ell_k) {
            (integrated, kt_decision) =
                kt::decide(&mut rhs, c, y_start.as_slice(), integrated, &self.opts);
        }
        let staged = self.stages(&mut rhs, &integrated, &ell_k, &included);
        let mut result =
            self.summarise(&rhs, &included, &bare, &dims0, &momenta, &ell_k, integrated);
        result.kt = kt_decision;
        self.attach_stages(&mut result, staged, &included);
        result.quadrature = start.quadrature;
        result.q_estimate = q_estimate;
        result.momentum_period = self.sys.model.momentum_period_at(point);
        Ok(result)
    }

    /// The included channels, the right-hand side and the bare state of a
    /// flow from `start` (channels `all`: the plan's, or on the rule).
    fn prepare<'a>(
        &'a self,
        point: &[f64],
        all: &'a [Channel],
        start: &Start,
        record: bool,
    ) -> Result<Prepared<'a>, Error> {
        let bare = self.bare_couplings(point)?;
        let extra_listed = self.sys.extra_dimensions(point)?;
        let (included, bosonic) = self.included(&start.bg, all, &start.d0);
        let channels: Vec<&Channel> = included.iter().map(|&c| &all[c]).collect();
        let extra: Vec<f64> = included
            .iter()
            .map(|&c| extra_of(&self.plan.channels[c], &extra_listed))
            .collect();
        // The bare total dimensions, as `FlowRhs::dimension` gives them at
        // the bare state (whose D is d0): the same sum of the same numbers.
        let dims0: Vec<f64> = bosonic.iter().zip(&extra).map(|(b, x)| b + x).collect();
        let ope = remap_ope(&self.plan, &included);
        let momenta = self.momenta(point, &included);
        let shared = Some(rhs::Shared {
            plan_ope: self
                .plan_ope
                .get_or_init(|| ope_terms::GroupedOpe::of_table(&self.plan.ope)),
            plan_channels: self.plan.channels.len(),
            outers: &self.outers,
            plan: included.iter().map(|&c| c as u32).collect(),
        });
        let mut rhs = FlowRhs::with_tables(start.bg.clone(), channels, extra, ope, shared);
        rhs.y_strong = self.opts.y_strong;
        rhs.floor = self.opts.floor;
        rhs.record = record;
        rhs.reference = self.reference_rhs;
        rhs.set_dense_route(self.dense_route);
        if let Some(q) = &self.sys.q {
            rhs.set_cell_kinv(&q.kinv);
        }
        let y0 = self.bare_state(&mut rhs, &included, &bare, &start.d0, &dims0);
        let ell_k = momenta.iter().map(|k| k.and_then(cutoff_scale)).collect();
        Ok(Prepared {
            rhs,
            included,
            bare,
            y0,
            dims0,
            momenta,
            ell_k,
        })
    }

    /// The bare state: amplitudes of the listed channels, then D; channels
    /// too irrelevant to matter (bare total dimension `dims0`) are frozen at
    /// zero.
    fn bare_state(
        &self,
        rhs: &mut FlowRhs,
        included: &[usize],
        bare: &[(f64, f64)],
        d0: &[f64],
        dims0: &[f64],
    ) -> DVector<f64> {
        let mut y0 = DVector::zeros(rhs.state_len());
        for (i, &c) in included.iter().enumerate() {
            if let Some((y, chi)) = self.plan.term_of(c).map(|t| bare[t]) {
                let (re, im) = self.plan.channels[c].bare_amplitude(y, chi);
                y0[2 * i] = re;
                y0[2 * i + 1] = im;
            }
        }
        y0.as_mut_slice()[2 * included.len()..].copy_from_slice(d0);
        for i in 0..included.len() {
            // So irrelevant that the coupling vanishes within ell ~ 1/DECAYED_AT_ONCE:
            // treating it as zero keeps the flow from becoming needlessly stiff.
            if dims0[i] > DECAYED_AT_ONCE {
                rhs.frozen[i] = true;
                y0[2 * i] = 0.0;
                y0[2 * i + 1] = 0.0;
            }
        }
        y0
    }

    /// The right-hand side at the bare point of `point`'s first flow with
    /// every included coupling set to a non-zero test amplitude (so every
    /// null channel feeds back), by the matrix products and by the
    /// per-channel reference route: (products, reference, number of
    /// channels; the state holds 2 floats per channel, then D). For the test
    /// that the two agree (`tests/rhs_products.rs`).
    pub fn rhs_routes(&self, point: &[f64]) -> Result<(Vec<f64>, Vec<f64>, usize), Error> {
        self.at_test_state(point, |rhs, y| {
            let (mut fast, mut reference) = (vec![0.0; y.len()], vec![0.0; y.len()]);
            rhs.derivative(y, &mut fast);
            rhs.derivative_reference(y, &mut reference);
            (fast, reference)
        })
    }

    /// The right-hand side at the state of [`Flow::rhs_routes`] with a dense
    /// D's feedback formed by the banded and by the dense product
    /// (`tests/rhs_products.rs`): (banded, dense, number of channels).
    pub fn rhs_dense_routes(&self, point: &[f64]) -> Result<(Vec<f64>, Vec<f64>, usize), Error> {
        self.at_test_state(point, |rhs, y| {
            let mut out = [vec![0.0; y.len()], vec![0.0; y.len()]];
            let routes = [background::DenseRoute::Banded, background::DenseRoute::Full];
            for (route, o) in routes.into_iter().zip(&mut out) {
                rhs.set_dense_route(route);
                rhs.derivative(y, o);
            }
            let [banded, dense] = out;
            (banded, dense)
        })
    }

    /// `f` on the prepared first flow of `point` at a state with every
    /// included coupling set to a non-zero test amplitude, and the number
    /// of included channels.
    fn at_test_state<R>(
        &self,
        point: &[f64],
        f: impl FnOnce(&mut FlowRhs, &[f64]) -> (R, R),
    ) -> Result<(R, R, usize), Error> {
        let start = self.start(point)?;
        let all: &[Channel] = start.channels.as_deref().unwrap_or(&self.plan.channels);
        let mut prepared = self.prepare(point, all, &start, false)?;
        prepared.rhs.begin_segment();
        let mut y = prepared.y0.as_slice().to_vec();
        for i in 0..prepared.included.len() {
            y[2 * i] = 0.05 + 0.01 * (i % 7) as f64;
            y[2 * i + 1] = if prepared.rhs.channels[i].real_only() {
                0.0
            } else {
                0.02 - 0.005 * (i % 5) as f64
            };
        }
        let (a, b) = f(&mut prepared.rhs, &y);
        Ok((a, b, prepared.included.len()))
    }

    /// (y, chi) of every listed channel at a point.
    fn bare_couplings(&self, point: &[f64]) -> Result<Vec<(f64, f64)>, Error> {
        self.sys
            .model
            .terms
            .iter()
            .map(|t| {
                let (y, chi) = (t.coupling.eval(point), t.phase.eval(point));
                if !y.is_finite() || !chi.is_finite() {
                    let what = if y.is_finite() { "phase" } else { "coupling" };
                    return Err(Error::Input(InputError::new(
                        &self.sys.model.file,
                        format!("term \"{}\".{what}", t.name),
                        format!(
                            "must be a finite number, found {} at {}",
                            if y.is_finite() { chi } else { y },
                            self.sys.model.params.describe(point)
                        ),
                    )));
                }
                Ok((y, chi))
            })
            .collect()
    }

    /// Listed channels plus generated ones below the closure bound. A bare
    /// dimension equal to the bound in exact arithmetic (e.g. 2 l of a term
    /// with Delta = 1 against the bound 4) must not be decided by rounding,
    /// which differs between the dense and the q-space paths: values within
    /// [`CLOSURE_SLACK`] of the bound count as below it. With each
    /// included channel's bosonic dimension at `d0`.
    fn included(&self, bg: &Background, all: &[Channel], d0: &[f64]) -> (Vec<usize>, Vec<f64>) {
        let bound = self.opts.closure_bound + CLOSURE_SLACK;
        let (mut included, mut dims) = (Vec::new(), Vec::new());
        for (c, ch) in all.iter().enumerate() {
            let delta = bg.dimension(d0, ch);
            if c < self.plan.listed || delta < bound {
                included.push(c);
                dims.push(delta);
            }
        }
        (included, dims)
    }

    fn momenta(&self, point: &[f64], included: &[usize]) -> Vec<Option<f64>> {
        let k = self.sys.lattice.momenta(&self.sys.model, point);
        // A generated channel's particle content is the sum of its parents',
        // so its mismatch on the line is the sum of theirs, reduced once by
        // the period.
        let g = self.sys.model.momentum_period_at(point);
        included
            .iter()
            .map(|&c| {
                k.as_ref()
                    .map(|k| self.plan.channels[c].mismatch(&self.sys.lattice, k, g))
            })
            .collect()
    }

    /// The result of an integration: every channel's start and end, the
    /// drift of D K D, the winner's runner-up and the terms it suppresses.
    #[allow(clippy::too_many_arguments)]
    fn summarise(
        &self,
        rhs: &FlowRhs,
        included: &[usize],
        bare: &[(f64, f64)],
        dims0: &[f64],
        momenta: &[Option<f64>],
        ell_k: &[Option<f64>],
        integrated: Integrated,
    ) -> FlowResult {
        let y_end = integrated.state.as_slice();
        let terms = (0..included.len())
            .map(|i| {
                let cut = (momenta[i], ell_k[i]);
                self.channel_result(rhs, included, bare, dims0, y_end, i, cut)
            })
            .collect();
        let drift = self.end_drift(rhs, y_end);
        let winner = integrated.winner;
        let mut result = self.assemble(rhs, included, terms, drift, integrated);
        if let Some(w) = winner {
            result.runner_up = runner_up(&result, w, self.opts.y_strong);
            self.sort_by_winner(&mut result, included, w);
        }
        result
    }

    /// The drift of D K D at the end state (q-space blocks against the cell
    /// K, or the dense D against K).
    fn end_drift(&self, rhs: &FlowRhs, y_end: &[f64]) -> f64 {
        let d = &y_end[2 * rhs.channels.len()..];
        match (&rhs.bg, &self.sys.q) {
            (Background::Fourier { .. }, Some(q)) => rhs.bg.drift(d, &q.k),
            _ => rhs.bg.drift(d, &self.sys.k),
        }
    }

    /// The result's fields from the integration, before the winner's
    /// runner-up and the stages are filled in.
    fn assemble(
        &self,
        rhs: &FlowRhs,
        included: &[usize],
        terms: Vec<ChannelResult>,
        drift: f64,
        integrated: Integrated,
    ) -> FlowResult {
        FlowResult {
            outcome: integrated.outcome,
            winner_index: integrated.winner,
            winner: integrated
                .winner
                .map(|w| self.plan.channels[included[w]].name.clone()),
            ell_star: integrated.ell_star,
            ell_last: integrated.ell_star,
            gap: integrated.ell_star.map(|l| (-l).exp()),
            ell_end: integrated.ell_end,
            terms,
            dkd_drift: drift,
            closure_range: self.plan.range,
            plan_notes: self.plan_notes(),
            listed_rows: self.listed_rows(included),
            steps: rhs.steps,
            samples: rhs.samples.clone(),
            ..FlowResult::without_flow(integrated.outcome, String::new())
        }
        .with_message(integrated.message)
    }

    /// Start and end of channel `i` of a flow (`included[i]` in the plan).
    #[allow(clippy::too_many_arguments)]
    fn channel_result(
        &self,
        rhs: &FlowRhs,
        included: &[usize],
        bare: &[(f64, f64)],
        dims0: &[f64],
        y_end: &[f64],
        i: usize,
        (momentum, ell_k): (Option<f64>, Option<f64>),
    ) -> ChannelResult {
        let ch = &self.plan.channels[included[i]];
        let (y0, chi0) = self
            .plan
            .term_of(included[i])
            .map_or((0.0, 0.0), |t| bare[t]);
        ChannelResult {
            name: ch.name.clone(),
            origin: if matches!(ch.origin, Origin::Listed(_)) {
                "listed"
            } else {
                "generated"
            }
            .to_string(),
            parents: parents_of(&self.plan, ch),
            coupling0: y0,
            phase0: chi0,
            dimension0: dims0[i],
            coupling: rhs.coupling(y_end, i),
            phase: y_end[2 * i + 1].atan2(y_end[2 * i]),
            dimension: rhs.dimension(y_end, i),
            spin: ch.spin_text.clone(),
            charge: ch.charge_text.clone(),
            momentum,
            ell_k,
        }
    }

    /// Sort the other channels into those that commute with the winner `w`
    /// (every translate) and those it suppresses.
    fn sort_by_winner(&self, result: &mut FlowResult, included: &[usize], w: usize) {
        let win = &self.plan.channels[included[w]];
        let pairing = &self.sys.invariants.pairing;
        for (i, &c) in included.iter().enumerate() {
            if i == w {
                continue;
            }
            let other = &self.plan.channels[c];
            let key = (included[w], c);
            let known = self.commutes.lock().ok().and_then(|m| m.get(&key).copied());
            let commutes = known.unwrap_or_else(|| {
                let commutes = (other.family.translates.iter())
                    .all(|t| pairing.scaled_parts(&win.family.rep().parts, &t.parts) == 0);
                if let Ok(mut m) = self.commutes.lock() {
                    if m.len() < MAX_COMMUTES {
                        m.insert(key, commutes);
                    }
                }
                commutes
            });
            let list = if commutes {
                &mut result.commuting_with_winner
            } else {
                &mut result.suppressed
            };
            list.push(other.name.clone());
        }
    }
}

/// A point whose V is not positive definite is a result (outcome
/// `unphysical`); other errors stay errors.
fn unphysical_result(e: Error) -> Result<FlowResult, Error> {
    match e {
        Error::Unphysical(u) => Ok(FlowResult::without_flow(Outcome::Unphysical, u.to_string())),
        e => Err(e),
    }
}

impl FlowResult {
    /// The same result with `message`.
    fn with_message(self, message: Option<String>) -> FlowResult {
        FlowResult { message, ..self }
    }

    /// A result for a point that could not be flowed.
    pub fn without_flow(outcome: Outcome, message: String) -> FlowResult {
        FlowResult {
            outcome,
            winner_index: None,
            winner: None,
            ell_star: None,
            stages: Vec::new(),
            stages_end: None,
            ell_last: None,
            gap: None,
            phase: None,
            ell_end: 0.0,
            terms: Vec::new(),
            runner_up: None,
            commuting_with_winner: Vec::new(),
            suppressed: Vec::new(),
            dkd_drift: 0.0,
            quadrature: None,
            flow_quadrature: None,
            momentum_period: None,
            kt: None,
            closure_range: None,
            plan_notes: Vec::new(),
            listed_rows: Vec::new(),
            steps: 0,
            q_estimate: None,
            competitors_added: Vec::new(),
            message: Some(message),
            samples: Vec::new(),
        }
    }
}

/// The largest |y| at ell* among the channels other than the winner `w`
/// that still flow there (a term past its cut-off ell_k < ell* is not
/// competing). Couplings within [`rhs::TIE`] of the largest count as equal
/// and the first such term is named (as for the winner, so that rounding
/// never picks among couplings a symmetry makes equal).
fn runner_up(r: &FlowResult, w: usize, y_strong: f64) -> Option<RunnerUp> {
    let ell = r.ell_star?;
    let others = || {
        (r.terms.iter().enumerate())
            .filter(|(i, t)| *i != w && t.ell_k.is_none_or(|k| k > ell))
            .map(|(_, t)| t)
    };
    let top = others().map(|t| t.coupling).max_by(|a, b| a.total_cmp(b))?;
    // As `FlowRhs::strongest`: among couplings equal to rhs::TIE (mirror
    // images), the first in plan order, not the one rounding favours.
    others()
        .find(|t| t.coupling >= top * (1.0 - rhs::TIE))
        .map(|t| RunnerUp {
            name: t.name.clone(),
            coupling: t.coupling,
            near_tie: t.coupling >= (1.0 - NEAR_TIE) * y_strong,
        })
}

fn extra_of(ch: &Channel, extra_listed: &[f64]) -> f64 {
    match ch.origin {
        Origin::Listed(i) => extra_listed[i],
        Origin::Generated { .. } => 0.0,
    }
}

fn parents_of(plan: &Plan, ch: &Channel) -> Option<String> {
    match ch.origin {
        Origin::Listed(_) => None,
        Origin::Generated { a, sign, b, shift } => {
            // `shift` is already the shown one (signed on open arrays and
            // on the line of an infinite array; see `channels::shown_shift`).
            let op = if sign > 0 { "+" } else { "-" };
            let (na, nb) = (&plan.channels[a].name, &plan.channels[b].name);
            Some(if shift == 0 {
                format!("{na} {op} {nb}")
            } else {
                {
                    let unit = if shift.abs() == 1 { "wire" } else { "wires" };
                    format!("{na} {op} {nb} shifted by {shift} {unit}")
                }
            })
        }
    }
}

/// OPE entries among included channels, with compact indices.
fn remap_ope(plan: &Plan, included: &[usize]) -> Vec<channels::OpeEntry> {
    let mut pos = vec![usize::MAX; plan.channels.len()];
    for (i, &c) in included.iter().enumerate() {
        pos[c] = i;
    }
    plan.ope
        .iter()
        .filter(|e| pos[e.target] != usize::MAX && pos[e.a] != usize::MAX && pos[e.b] != usize::MAX)
        .map(|e| channels::OpeEntry {
            target: pos[e.target],
            a: pos[e.a],
            b: pos[e.b],
            ..*e
        })
        .collect()
}

/// ell_k = ln(1/|k|) for a mismatched term; None when k = 0 (within the
/// tolerance of `dims`).
pub fn cutoff_scale(k: f64) -> Option<f64> {
    (k.abs() >= crate::core::momentum::MOMENTUM_TOLERANCE).then(|| -(k.abs().ln()))
}

/// max |D K D - K^-1| / max |K^-1|.
pub fn dkd_drift(k: &nalgebra::DMatrix<f64>, d: &nalgebra::DMatrix<f64>) -> f64 {
    let Some(kinv) = k.clone().try_inverse() else {
        return f64::NAN;
    };
    let diff = d * k * d - &kinv;
    diff.amax() / kinv.amax()
}

/// Rounding allowance of the closure bound (see `Flow::included`).
pub const CLOSURE_SLACK: f64 = 1e-9;

/// Terms with a bare dimension above this are treated as decayed at once
/// (their coupling shrinks by e^-(Delta-2) per unit of ell).
pub const DECAYED_AT_ONCE: f64 = 40.0;

/// A flow ready to integrate (see `Flow::prepare`).
struct Prepared<'a> {
    rhs: FlowRhs<'a>,
    included: Vec<usize>,
    bare: Vec<(f64, f64)>,
    y0: DVector<f64>,
    /// Bare total dimension of each included channel.
    dims0: Vec<f64>,
    momenta: Vec<Option<f64>>,
    ell_k: Vec<Option<f64>>,
}

/// What the integration produced.
struct Integrated {
    outcome: Outcome,
    winner: Option<usize>,
    ell_star: Option<f64>,
    ell_end: f64,
    state: DVector<f64>,
    message: Option<String>,
}

impl Integrated {
    /// A result without a winner.
    fn ended(outcome: Outcome, ell_end: f64, state: DVector<f64>, message: Option<String>) -> Self {
        Integrated {
            outcome,
            winner: None,
            ell_star: None,
            ell_end,
            state,
            message,
        }
    }
}

/// The segment ends between ell0 and ell_max: every momentum cut-off in
/// between (cut-offs closer than 1e-9 are one: their terms stop together),
/// then ell_max.
fn breakpoints(ell_k: &[Option<f64>], ell0: f64, ell_max: f64) -> Vec<f64> {
    let mut breaks: Vec<f64> = ell_k
        .iter()
        .flatten()
        .copied()
        .filter(|l| *l > ell0 && *l < ell_max)
        .collect();
    breaks.push(ell_max);
    breaks.sort_by(f64::total_cmp);
    breaks.dedup_by(|b, a| *b - *a < 1e-9);
    breaks
}

/// Record the bare couplings and dimensions as the first sample.
fn record_start(rhs: &mut FlowRhs, y: &DVector<f64>) {
    if !rhs.samples.is_empty() || !rhs.record {
        return;
    }
    let n = rhs.channels.len();
    let sample = Sample {
        ell: 0.0,
        couplings: (0..n).map(|c| rhs.coupling(y.as_slice(), c)).collect(),
        dimensions: (0..n).map(|c| rhs.dimension(y.as_slice(), c)).collect(),
    };
    rhs.samples.push(sample);
}

/// Integrate segment by segment between the momentum cut-offs.
fn integrate(
    rhs: &mut FlowRhs,
    mut y: DVector<f64>,
    ell_k: &[Option<f64>],
    opts: &FlowOptions,
    ell0: f64,
) -> Integrated {
    let mut dop = stepper(rhs);
    let mut start = ell0;
    for end in breakpoints(ell_k, ell0, opts.ell_max) {
        for (c, k) in ell_k.iter().enumerate() {
            rhs.active[c] = !rhs.frozen[c] && k.is_none_or(|l| l > start + 1e-9);
        }
        rhs.begin_segment();
        record_start(rhs, &y);
        if end <= start {
            continue;
        }
        rhs.last_ell = start;
        if let Err(ell) = run_segment(rhs, &mut dop, y.as_slice(), start, end, opts) {
            let message = format!("integration failed at ell = {ell:.6}");
            return Integrated::ended(Outcome::Failed, ell, y, Some(message));
        }
        y.as_mut_slice().copy_from_slice(dop.y());
        match rhs.stop {
            Some(Stop::Strong {
                ell_before,
                ell_after,
            }) => return strong_result(rhs, &mut dop, y, ell_before, ell_after),
            Some(Stop::Decayed { ell }) => {
                return Integrated::ended(Outcome::Gapless, ell, y, None)
            }
            None => {}
        }
        if !y.iter().all(|x| x.is_finite()) {
            let message = format!("non-finite values in the flow before ell = {end:.6}");
            return Integrated::ended(Outcome::Failed, end, y, Some(message));
        }
        start = end;
    }
    Integrated::ended(Outcome::Undecided, opts.ell_max, y, None)
}

/// The integrator of a flow's equations, its work space sized once: the
/// error is measured on the couplings and on D separately, the larger
/// counts (see [`crate::math::dop853`]; docs/physics.md section 3).
fn stepper(rhs: &FlowRhs) -> Dop853 {
    let n = rhs.state_len();
    let mut dop = Dop853::new(n);
    dop.set_groups(&[2 * rhs.channels.len(), n]);
    if let Some(size) = rhs.bg.packed_symmetric() {
        dop.set_packed_symmetric(2 * rhs.channels.len(), size);
    }
    dop
}

/// One segment from `y` at `start` to `end`, or until the stop hook
/// ([`FlowRhs::after_step`]) ends it; the state reached is `dop.y()`. Err:
/// the ell at which the integrator gave up.
fn run_segment(
    rhs: &mut FlowRhs,
    dop: &mut Dop853,
    y: &[f64],
    start: f64,
    end: f64,
    opts: &FlowOptions,
) -> Result<(), f64> {
    let control = Control {
        rtol: opts.rtol,
        atol: opts.atol,
        max_attempts: u64::from(opts.max_steps),
    };
    dop.start(&*rhs, start, y, end, control);
    // Only a recorded trajectory needs samples inside the steps.
    let mut within = Vec::new();
    loop {
        let done = dop.step(&*rhs).map_err(|e| e.x())?;
        if rhs.record {
            record_within_step(rhs, dop, &mut within);
        }
        if rhs.after_step(dop.x(), dop.y()) || done {
            return Ok(());
        }
        progress::tick(dop.x(), opts.ell_max);
    }
}

/// Largest spacing in ell of a recorded trajectory's samples.
const SAMPLE_SPACING: f64 = 0.1;

/// Samples inside the last accepted step from its dense output, so that a
/// recorded trajectory (figures, JSON `trajectory`) follows the flow
/// smoothly although DOP853 takes long steps: at most [`SAMPLE_SPACING`]
/// apart. The step's end point is recorded by the stop hook.
fn record_within_step(rhs: &mut FlowRhs, dop: &mut Dop853, at: &mut Vec<f64>) {
    let (a, b) = (dop.x_old(), dop.x());
    let pieces = ((b - a) / SAMPLE_SPACING).ceil();
    if !(pieces > 1.0 && pieces < 1e4) {
        return;
    }
    dop.prepare_dense(&*rhs);
    at.resize(dop.y().len(), 0.0);
    let n = pieces as usize;
    for j in 1..n {
        let ell = a + (b - a) * j as f64 / n as f64;
        if dop.dense(ell, at) {
            rhs.record_sample(ell, at);
        }
    }
}

/// Locate ell* inside the last step by bisection on its dense output
/// (DOP853's own, 7th order).
fn strong_result(
    rhs: &FlowRhs,
    dop: &mut Dop853,
    y_end: DVector<f64>,
    lo: f64,
    hi: f64,
) -> Integrated {
    dop.prepare_dense(rhs);
    let mut at = vec![0.0; y_end.len()];
    // The bisection needs the couplings only: the dense output of the
    // first 2 C entries (the same numbers as of the whole state).
    let couplings = 2 * rhs.channels.len();
    let mut above = |ell: f64| -> Option<(usize, f64)> {
        let w = &mut at[..couplings];
        dop.dense(ell, w).then(|| rhs.strongest(w)).flatten()
    };
    let (mut a, mut b) = (lo, hi);
    for _ in 0..60 {
        let mid = 0.5 * (a + b);
        match above(mid) {
            Some((_, g)) if g >= rhs.y_strong => b = mid,
            Some(_) => a = mid,
            None => break,
        }
        if b - a < 1e-12 * (1.0 + b.abs()) {
            break;
        }
    }
    let winner = above(b)
        .or_else(|| rhs.strongest(y_end.as_slice()))
        .map(|(c, _)| c);
    // Report the state at ell*, not at the end of the last step.
    let y_end = if dop.dense(b, &mut at) {
        DVector::from_vec(at)
    } else {
        y_end
    };
    let spinful = winner.is_some_and(|w| !rhs.channels[w].null());
    Integrated {
        outcome: if spinful {
            Outcome::Spinful
        } else {
            Outcome::Strong
        },
        winner,
        ell_star: Some(b),
        ell_end: hi,
        state: y_end,
        message: None,
    }
}
