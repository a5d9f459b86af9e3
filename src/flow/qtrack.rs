//! The in-flow estimate of an infinite array's quadrature error: how far
//! the flow on the N-point rule is from the exact (infinitely fine) flow,
//! estimated from the trajectory of the N-point flow alone [docs/physics.md
//! section 5; docs/infinite-arrays.md].
//!
//! Why it works: each D(q) obeys its own equation, dD(q)/dell = -(1/8)
//! sum_a |y_a|^2 [D L_a L_a^H D - G_a G_a^H], local in q. A flow on a finer
//! rule carries exactly the same D(q) on the points the two rules share
//! *if the couplings y_a(ell) were the same*. The flows differ only because
//! the couplings see different dimensions: the quadrature sums of one
//! D(q). The N-point sum's own error e_c(ell) = |Delta_c^(N) - Delta_c|,
//! estimated at each accepted step from the integrand's cosine
//! coefficients on the rule ([`Tail`]: geometric fall extrapolated; where
//! the fall is not clearly geometric, the nested difference
//! |Delta_c^(N/2) - Delta_c^(N)|, which bounds the N/2 rule's error), is
//! the source of every difference.
//!
//! Propagation (first order in e, bounded rather than solved): two scalars
//! are integrated along the accepted steps,
//!
//! ```text
//! eta' = 2 max_c e_c + eps,    eps' = 2 eta max_c |dDelta_c/dell|,
//! ```
//!
//! eta bounding |delta ln y| of every coupling (d ln y_c/dell = 2 -
//! Delta_c + ..., so a dimension shifted by e shifts ln y_c by its
//! integral; the factor 2 covers a generated coupling, fed by the product
//! of two others), eps bounding the dimension change carried by the
//! different D trajectory (the feedback is linear in |y|^2, which eta moves
//! by at most 2 eta relative, so the extra change over a step is at most
//! 2 eta times the step's change). The loop closes: eps feeds eta, eta
//! feeds eps, so slow near-marginal flows, where a perturbation grows,
//! grow the estimate with them.
//!
//! At the end (ell* or where a gapless flow stopped), with r_w = d ln
//! y_w/dell the winner's growth rate there:
//!
//! ```text
//! delta ell*     = eta / r_w,
//! delta Delta_c  = e_c + eps + |dDelta_c/dell| delta ell*,
//! ```
//!
//! reported relative as the check's are (docs of [`super::check`]), and
//! doubled. Neglected: terms of second order in e (the doubling covers
//! them), and the integrator's own error (a second flow carries it too, of
//! order `rtol`; the estimate does not, as the docs of the check say).
//! `tests/q_estimate.rs` compares the estimate with the distance from the
//! flow on four times the points on rules of 8 to 16 points. The estimate
//! is not a proof; it replaces the second flow only when it is [`MARGIN`]
//! times below the tolerance, and no margin decision (the winner against
//! its runner-up, a frozen or closure-excluded term, a marginal coupling of
//! a gapless flow) lies within [`MARGIN`] times its reach. Undecided flows
//! always get the full check. Invariant: a tracker only exists on the
//! Fourier layout of an even rule, and never changes the flow itself.

use super::background::Background;
use super::rhs::FlowRhs;
use super::{Outcome, DECAYED_AT_ONCE};
use crate::core::qspace::{half, quadratic_form, weight};
use num_complex::Complex64;

/// Safety factor of every decision made from the estimate.
pub const MARGIN: f64 = 10.0;

/// The running estimate along one flow (see the module docs).
#[derive(Debug, Clone)]
pub struct Tracker {
    cell: usize,
    /// ell of the last accepted step.
    ell: f64,
    /// Delta_c^(N) of every channel at the last accepted step.
    dims: Vec<f64>,
    /// max_c |e_c| over the active channels at the last accepted step.
    gap: f64,
    /// Bound on |delta ln y| of every coupling.
    eta: f64,
    /// Bound on the dimension change through the D trajectory.
    eps: f64,
    /// A decision at the start lies within reach of the estimate.
    fragile: bool,
    /// The rule's own error per channel ([`Tail`]).
    tail: Tail,
}

/// The estimated differences of a flow from the exact flow (the rule's own
/// error; see the module docs).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Estimate {
    /// Largest relative difference of a final dimension.
    pub dims: f64,
    /// Difference of ell*, relative to max(ell*, 1); None without ell*.
    pub ell_star: Option<f64>,
}

impl Tracker {
    /// A tracker at the bare state `y` (ell = 0); None unless D is carried
    /// on an even rule.
    pub fn new(rhs: &FlowRhs, y: &[f64]) -> Option<Tracker> {
        let Background::Fourier { wires, cell } = rhs.bg else {
            return None;
        };
        if wires % 2 != 0 {
            return None;
        }
        let mut t = Tracker {
            cell,
            ell: 0.0,
            dims: vec![0.0; rhs.channels.len()],
            gap: 0.0,
            eta: 0.0,
            eps: 0.0,
            fragile: false,
            tail: Tail::new(wires),
        };
        // A term frozen at the start on one rule but not on the other.
        for c in 0..rhs.channels.len() {
            let (full, err) = t.rule_error(rhs, y, c);
            let total = full + rhs.extra[c];
            t.fragile |= (total - DECAYED_AT_ONCE).abs() <= MARGIN * err;
        }
        t.measure(rhs, y);
        Some(t)
    }

    /// Mark a decision at the start as within reach of the estimate: the
    /// flow then gets the full check.
    pub fn mark_fragile(&mut self) {
        self.fragile = true;
    }

    /// (Delta^(N), estimated |Delta^(N) - Delta|) of channel c's bosonic
    /// part ([`Tail`]).
    fn rule_error(&mut self, rhs: &FlowRhs, y: &[f64], c: usize) -> (f64, f64) {
        let d = &y[2 * rhs.channels.len()..];
        self.tail.error(d, &rhs.channels[c].lq, self.cell)
    }

    /// Update `dims` and `gap` at state `y`; returns the largest change of
    /// a dimension since the last call.
    fn measure(&mut self, rhs: &FlowRhs, y: &[f64]) -> f64 {
        let (mut gap, mut change) = (0.0f64, 0.0f64);
        for c in 0..rhs.channels.len() {
            let (full, err) = self.rule_error(rhs, y, c);
            change = change.max((full - self.dims[c]).abs());
            self.dims[c] = full;
            if rhs.active[c] {
                gap = gap.max(err);
            }
        }
        self.gap = gap;
        change
    }

    /// Advance over one accepted step ending at `ell` with state `y`.
    pub fn step(&mut self, rhs: &FlowRhs, ell: f64, y: &[f64]) {
        let dl = (ell - self.ell).max(0.0);
        let before = self.gap;
        let change = self.measure(rhs, y);
        // Trapezoid for the source, the larger end for the loop: the bound
        // errs on the generous side.
        self.eta += dl * ((before + self.gap) + self.eps);
        self.eps += 2.0 * self.eta * change;
        self.ell = ell;
    }

    /// The estimate at the end state `y` of a flow with this outcome
    /// (winner index and ell* for strong and spinful ones); None when the
    /// flow needs the full check (module docs).
    pub fn estimate(
        mut self,
        rhs: &FlowRhs,
        y: &[f64],
        outcome: Outcome,
        winner: Option<usize>,
        ell_star: Option<f64>,
    ) -> Option<Estimate> {
        if self.fragile || !(self.eta.is_finite() && self.eps.is_finite()) {
            return None;
        }
        let nc = rhs.channels.len();
        let mut dy = vec![0.0; y.len()];
        rhs.derivative(y, &mut dy);
        let rate = |c: usize| log_rate(y, &dy, c);
        let shift = match (outcome, winner, ell_star) {
            (Outcome::Strong | Outcome::Spinful, Some(w), Some(_)) => {
                let r = rate(w);
                if r.is_nan() || r <= 0.0 || !self.winner_is_clear(rhs, y, w, &rate) {
                    return None;
                }
                self.eta / r
            }
            (Outcome::Gapless, _, _) if self.decay_is_clear(rhs, y) => 0.0,
            _ => return None,
        };
        let mut dims = 0.0f64;
        for c in 0..nc {
            let (_, rule) = self.rule_error(rhs, y, c);
            let slope = rhs.bg.dimension(&dy[2 * nc..], rhs.channels[c]);
            let err = rule + self.eps + slope.abs() * shift;
            dims = dims.max(err / rhs.dimension(y, c).abs());
        }
        // Doubled for the neglected terms of second order (module docs).
        let ell_star = ell_star.map(|l| 2.0 * shift / l.abs().max(1.0));
        let dims = 2.0 * dims;
        dims.is_finite().then_some(Estimate { dims, ell_star })
    }

    /// No other active coupling is within reach of y_strong at ell*: its
    /// distance ln(y_strong / y_c) exceeds [`MARGIN`] times what the
    /// estimate can move it by.
    fn winner_is_clear(
        &self,
        rhs: &FlowRhs,
        y: &[f64],
        w: usize,
        rate: &dyn Fn(usize) -> f64,
    ) -> bool {
        let shift = self.eta / rate(w);
        (0..rhs.channels.len())
            .filter(|&c| c != w && rhs.active[c])
            .all(|c| {
                let g = rhs.coupling(y, c);
                let reach = 2.0 * self.eta + rate(c).abs() * shift;
                g == 0.0 || (rhs.y_strong / g).ln() > MARGIN * reach
            })
    }

    /// A gapless end is clear when every active coupling's rate 2 - Delta
    /// is further from zero than [`MARGIN`] times its possible shift.
    fn decay_is_clear(&self, rhs: &FlowRhs, y: &[f64]) -> bool {
        let shift = self.gap + self.eps;
        (0..rhs.channels.len())
            .filter(|&c| rhs.active[c])
            .all(|c| (rhs.dimension(y, c) - 2.0).abs() > MARGIN * shift)
    }
}

/// d ln|w_c|/dell = Re(conj(w) dw) / |w|^2 (NaN for w = 0).
fn log_rate(y: &[f64], dy: &[f64], c: usize) -> f64 {
    let (re, im) = (y[2 * c], y[2 * c + 1]);
    (re * dy[2 * c] + im * dy[2 * c + 1]) / (re * re + im * im)
}

/// Largest ratio of the two windows' envelopes (see [`Tail`]) for which
/// the geometric extrapolation is trusted; above it the nested difference
/// serves.
pub const MAX_RATIO: f64 = 0.5;

/// Most frequencies sampled per window of [`Tail`].
const PER_WINDOW: usize = 8;

/// The error of an N-point rule's sum of one integrand, estimated from the
/// integrand's own cosine coefficients on the rule (docs/infinite-arrays.md,
/// "The error of the rule itself").
///
/// With f(q) = Re L^H D L (real and even in q, D and l being real) and its
/// Fourier coefficients c_m, the rule's coefficients are
/// F_m = (1/N) sum_k f(q_k) cos(m q_k) = c_m + c_(N-m) + ... (aliased),
/// Delta_N - Delta = c_N + c_2N + ..., and the nested difference
/// Delta_(N/2) - Delta_N = F_(N/2) / 2 ~ c_(N/2). For an analytic periodic
/// integrand |c_m| falls geometrically: the envelope a of |F_m| over the
/// window A = [ceil(N/4), ceil(3N/8)) and b over B = [ceil(3N/8), N/2]
/// give the fall r = b / a per window spacing s = m_B - m_A, and the
/// error at m = N, (N - m_B) / s spacings beyond B's start, is estimated as
/// b r^((N - m_B)/s). Where the fall is not clearly geometric (r at or
/// above [`MAX_RATIO`], a = 0, or N < 8 with no windows) the estimate is
/// the nested difference |Delta_(N/2) - Delta_N|, which bounds the error
/// of the N/2 rule and so, the error falling, generously the N-point one's
/// (the estimate before this sharper one).
#[derive(Debug, Clone)]
pub struct Tail {
    points: usize,
    /// weight_k cos(m q_k) / N over the stored k, one row per sampled
    /// frequency: window A's rows first.
    rows: Vec<f64>,
    /// Rows of window A.
    in_a: usize,
    /// (N - m_B) / (m_B - m_A).
    power: f64,
    /// f(q_k) at the stored points (scratch).
    values: Vec<f64>,
}

impl Tail {
    /// The estimator of an N-point rule (N even).
    pub fn new(points: usize) -> Tail {
        let n = points;
        let (ma, mb) = (n.div_ceil(4), (3 * n).div_ceil(8));
        let (a, b) = if n >= 8 {
            (sampled(ma, mb - 1), sampled(mb, n / 2))
        } else {
            (Vec::new(), Vec::new())
        };
        let stored = half(n);
        let mut rows = Vec::with_capacity((a.len() + b.len()) * stored);
        for &m in a.iter().chain(&b) {
            for k in 0..stored {
                let phase = (m * k % n) as f64 * std::f64::consts::TAU / n as f64;
                rows.push(weight(k, n) * phase.cos() / n as f64);
            }
        }
        let power = if n >= 8 {
            (n - mb) as f64 / (mb - ma) as f64
        } else {
            0.0
        };
        Tail {
            points: n,
            rows,
            in_a: a.len(),
            power,
            values: vec![0.0; stored],
        }
    }

    /// (Delta_N, estimated |Delta_N - Delta|) of the integrand of `lq` at
    /// the D(q) state `d`.
    pub fn error(&mut self, d: &[f64], lq: &[Complex64], cell: usize) -> (f64, f64) {
        let n = self.points;
        let (mut full, mut alt, mut size) = (0.0, 0.0, 0.0);
        for (k, v) in self.values.iter_mut().enumerate() {
            *v = quadratic_form(d, lq, k, cell);
            let w = weight(k, n) * *v;
            full += w;
            alt += if k % 2 == 0 { w } else { -w };
            size += w.abs();
        }
        let scale = 1.0 / (2.0 * n as f64);
        let (full, nested) = (scale * full, (scale * alt).abs());
        // The rounding of the sum itself: no estimate claims less.
        let floor = f64::EPSILON * scale * size;
        let stored = self.values.len();
        let coef = |row: &[f64]| -> f64 {
            let s: f64 = row.iter().zip(&self.values).map(|(c, v)| c * v).sum();
            s.abs()
        };
        let mut rows = self.rows.chunks_exact(stored);
        let a = rows.by_ref().take(self.in_a).map(coef).fold(0.0, f64::max);
        let b = rows.map(coef).fold(0.0, f64::max);
        let r = b / a;
        let err = if a > 0.0 && r < MAX_RATIO {
            b * r.powf(self.power)
        } else {
            nested
        };
        (full, err.max(floor))
    }
}

/// At most [`PER_WINDOW`] frequencies from `lo` to `hi` (inclusive),
/// evenly spaced, both ends included.
fn sampled(lo: usize, hi: usize) -> Vec<usize> {
    let step = (hi - lo).div_ceil(PER_WINDOW - 1).max(1);
    let mut out: Vec<usize> = (lo..=hi).step_by(step).collect();
    if out.last() != Some(&hi) {
        out.push(hi);
    }
    out
}
