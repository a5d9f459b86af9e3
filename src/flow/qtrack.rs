//! The in-flow estimate of an infinite array's quadrature error: what the
//! flow on the nested rule of half the points would give, estimated from
//! the trajectory of the N-point flow alone [docs/physics.md section 5;
//! docs/infinite-arrays.md].
//!
//! Why it works: each D(q) obeys its own equation, dD(q)/dell = -(1/8)
//! sum_a |y_a|^2 [D L_a L_a^H D - G_a G_a^H], local in q. The half rule's
//! points are the even points of the N-point rule, so the flow on N/2
//! points carries exactly the same D(q_2k) as the N-point flow would *if
//! the couplings y_a(ell) were the same*. The two flows differ only because
//! the couplings see different dimensions: the quadrature sums
//! Delta_c^(N/2) and Delta_c^(N) of one D(q). Their difference
//! e_c(ell) = Delta_c^(N/2) - Delta_c^(N), evaluated on the N-point flow at
//! each accepted step ([`crate::core::qspace::nested_dimensions`]), is the
//! source of every difference between the two flows.
//!
//! Propagation (first order in e, bounded rather than solved): two scalars
//! are integrated along the accepted steps,
//!
//! ```text
//! eta' = 2 max_c |e_c| + eps,    eps' = 2 eta max_c |dDelta_c/dell|,
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
//! delta Delta_c  = |e_c| + eps + |dDelta_c/dell| delta ell*,
//! ```
//!
//! reported relative as the check's are (docs of [`super::check`]), and
//! doubled. Neglected: terms of second order in e (the doubling covers
//! them: on rules so coarse that the difference is 3e-4 the undoubled
//! estimate came within 10 % of the true difference, `tests/q_estimate.rs`),
//! and the integrator's own error (the full check carries it too, of order
//! `rtol`; the estimate does not, as the docs of the check say). The estimate is not a
//! proof; it replaces the second flow only when it is [`MARGIN`] times
//! below the tolerance, and no margin decision (the winner against its
//! runner-up, a frozen or closure-excluded term, a marginal coupling of a
//! gapless flow) lies within [`MARGIN`] times its reach. Undecided flows
//! always get the full check. Invariant: a tracker only exists on the
//! Fourier layout of an even rule, and never changes the flow itself.

use super::background::Background;
use super::rhs::FlowRhs;
use super::{Outcome, DECAYED_AT_ONCE};
use crate::core::qspace::nested_dimensions;

/// Safety factor of every decision made from the estimate.
pub const MARGIN: f64 = 10.0;

/// The running estimate along one flow (see the module docs).
#[derive(Debug, Clone)]
pub struct Tracker {
    points: usize,
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
}

/// The estimated differences of a flow from the flow on half its points.
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
            points: wires,
            cell,
            ell: 0.0,
            dims: vec![0.0; rhs.channels.len()],
            gap: 0.0,
            eta: 0.0,
            eps: 0.0,
            fragile: false,
        };
        // A term frozen at the start on one rule but not on the other.
        for c in 0..rhs.channels.len() {
            let (full, half) = t.nested(rhs, y, c);
            let total = full + rhs.extra[c];
            t.fragile |= (total - DECAYED_AT_ONCE).abs() <= MARGIN * (half - full).abs();
        }
        t.measure(rhs, y);
        Some(t)
    }

    /// Mark a decision at the start as within reach of the estimate: the
    /// flow then gets the full check.
    pub fn mark_fragile(&mut self) {
        self.fragile = true;
    }

    /// (Delta^(N), Delta^(N/2)) of channel c's bosonic part.
    fn nested(&self, rhs: &FlowRhs, y: &[f64], c: usize) -> (f64, f64) {
        let d = &y[2 * rhs.channels.len()..];
        nested_dimensions(d, &rhs.channels[c].lq, self.points, self.cell)
    }

    /// Update `dims` and `gap` at state `y`; returns the largest change of
    /// a dimension since the last call.
    fn measure(&mut self, rhs: &FlowRhs, y: &[f64]) -> f64 {
        let (mut gap, mut change) = (0.0f64, 0.0f64);
        for c in 0..rhs.channels.len() {
            let (full, half) = self.nested(rhs, y, c);
            change = change.max((full - self.dims[c]).abs());
            self.dims[c] = full;
            if rhs.active[c] {
                gap = gap.max((half - full).abs());
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
        &self,
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
            let (full, half) = self.nested(rhs, y, c);
            let slope = rhs.bg.dimension(&dy[2 * nc..], rhs.channels[c]);
            let err = (half - full).abs() + self.eps + slope.abs() * shift;
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
