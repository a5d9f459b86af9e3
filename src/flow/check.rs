//! The infinite array's flow carries D(q) on a quadrature rule that stays
//! fixed along ell; this module checks that rule a posteriori and refines
//! it when the check fails.
//!
//! Why a check is needed: the rule is chosen before the flow (the rule
//! that converges the bare dimensions, [`crate::core::qspace::converge`], or
//! `q_points`). Along the flow every D(q) follows its own equation
//! dD(q)/dell = -(1/8) sum_a |y_a|^2 [D L_a L_a^H D - G_a G_a^H] [physics
//! reference section 4], whose coefficients are trigonometric polynomials
//! in q; D(q) stays analytic in q, but it can sharpen, and nothing
//! guarantees that the rule that integrates the bare D(q) still integrates
//! the renormalised one.
//!
//! What is compared: what a flow reports at its end. The total dimension
//! of every flowing term at ell* (outcomes strong and spinful) or where the
//! flow ended (gapless, undecided), and ell* itself; and the outcome, the
//! winner and the set of flowing terms, which must be the same. Errors are
//! relative: |Delta_N - Delta_M| / Delta_N (Delta > 0 for every term, D
//! being positive definite), and |ell*_N - ell*_M| / max(ell*_N, 1) (below
//! ell* = 1 an absolute error, which is the relative error of the gap
//! estimate e^-ell*). One tolerance serves both (default [`TOLERANCE`],
//! 1e-6): ell* is about ln(y_strong / y_0) / (2 - Delta), so a relative
//! error of the rates moves ell* by about the same relative amount.
//!
//! How, using the rule's nesting: the refined bare rule has N = 2M points
//! (a power of two), and the M-point rule is nested in it (q_k on M points
//! is q_2k on N). The bare refinement stopped at N because M points already
//! gave every bare dimension to 1e-10, so the M-point rule is a sound rule
//! for the bare D(q), and its fixed point is a copy of every other point
//! of the N-point one ([`crate::core::qspace::QFixedPoint::coarsened`]). The
//! check flows the same point on M points and compares. When the
//! difference is above the tolerance, the flow is rerun on 2N points (the
//! bare fixed point refined, the N points reused), compared with the
//! N-point flow, and so on, until the difference is within the tolerance,
//! N reaches the cap (`q_max_points`, default [`crate::core::qspace::MAX_POINTS`])
//! or a doubling fails to halve the difference. The periodic trapezoid
//! rule's error falls geometrically with N for an analytic integrand, so a
//! difference that does not shrink is not quadrature error: usually it is
//! the integrator's (both flows carry its error, of the order of `rtol`;
//! the default rtol 1e-8 is two orders below the tolerance). The flow
//! reported is the finest one, with its difference from the flow on half
//! its points as the error estimate: as for the bare rule
//! ([`crate::core::qspace::Quadrature`]) an honest and, the error falling
//! geometrically, in practice generous bound.
//!
//! The first comparison is usually made without a second flow: the
//! N-point flow estimates its own distance from the exact flow along the
//! way ([`super::qtrack`]: the rule's error extrapolated from the
//! integrand's cosine coefficients, which fall geometrically), and that
//! estimate stands for the comparison when it is [`MARGIN`] times below the
//! tolerance (`method` "estimate"). When the estimate exists but is larger,
//! the M-point flow is skipped (it could only fail too) and the loop
//! starts by doubling; when there is none (a decision within its reach) the
//! M-point flow runs as above (`method` "flow"). Refinements always compare
//! two flows.
//!
//! A fixed rule (`q_points` = N) is not refined. It is compared with the
//! flow on 2N points, and the estimate is twice the difference (a bound on
//! the N-point error whenever doubling N at least halves it, as in
//! [`crate::core::qspace::on_rule`]).
//!
//! Cost: a flow costs in proportion to its number of points, so a check
//! that passes at once costs half a flow more (the M-point flow), or a few
//! per cent of a flow by the estimate (which also accepts the N-point rule
//! where the M-point one is coarse); a fixed
//! rule costs two flows more (the 2N-point flow). Each further doubling
//! costs the new flow. Every flow of a scan is checked in the same way, so
//! a scan's rows are the numbers `flow` reports at the same point.

use serde::Serialize;

use super::channels::Channel;
use super::qtrack::{Estimate, Tail, Tracker, MARGIN};
use super::rhs::FlowRhs;
use super::{Flow, FlowResult, Integrated, Outcome, Start, CLOSURE_SLACK};
use crate::core::qspace::{QFixedPoint, Quadrature};
use crate::error::Error;

/// Default relative tolerance of the check.
pub const TOLERANCE: f64 = 1e-6;

/// How the rule of the reported flow was chosen.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum RuleChoice {
    /// From the bare refinement, doubled while the check failed.
    Refined,
    /// Given (`--q-points`, `[flow] q_points`): checked, not refined.
    Fixed,
}

/// Why the refinement stopped before the check passed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum StoppedBy {
    /// The rule reached the most points allowed.
    Cap,
    /// Doubling the points did not halve the difference (not quadrature
    /// error: usually the integrator's).
    Stalled,
}

/// How the difference from the other rule was found.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum CheckMethod {
    /// Estimated along the flow itself ([`super::qtrack`]): the rule's own
    /// error from the integrand's cosine coefficients on it, propagated to
    /// the end.
    Estimate,
    /// The same point flowed again on the other rule and compared.
    Flow,
}

/// The outcome of the check (the `flow_quadrature` object of a flow).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct QuadratureCheck {
    /// "refined" or "fixed".
    pub rule: RuleChoice,
    /// Points of the rule of the reported flow (also `quadrature.points`).
    pub points: usize,
    /// Points of the rule it was compared with (half, or twice for a fixed
    /// rule); for `method` "estimate" half as well: the coefficients the
    /// estimate extrapolates are the ones that rule misses.
    pub compared_with: usize,
    /// Estimated relative error of the final dimensions: the largest
    /// |Delta_N - Delta_M| / Delta_N over the flowing terms (twice that for
    /// a fixed rule; for "estimate", the estimated |Delta_N - Delta| /
    /// Delta_N).
    pub dimension_error: f64,
    /// Estimated error of ell*, relative to max(ell*, 1); null when one of
    /// the two flows has no ell*.
    pub ell_star_error: Option<f64>,
    /// The two flows end the same way: outcome, winner, flowing terms.
    pub same_outcome: bool,
    /// The relative tolerance.
    pub tolerance: f64,
    /// Same outcome and both estimates within the tolerance.
    pub converged: bool,
    /// Doublings of the rule beyond the bare refinement's.
    pub refinements: usize,
    /// Why the refinement stopped before converging: "cap" or "stalled";
    /// null otherwise (and for a fixed rule).
    pub stopped: Option<StoppedBy>,
    /// "estimate": the rule's own error estimated along the flow,
    /// [`MARGIN`] times below the tolerance; "flow": found by flowing again
    /// on the other rule.
    pub method: CheckMethod,
}

impl QuadratureCheck {
    /// The larger of the two estimates (infinite when the flows end
    /// differently).
    pub fn worst(&self) -> f64 {
        Difference {
            dims: self.dimension_error,
            ell_star: self.ell_star_error,
            same: self.same_outcome,
        }
        .worst()
    }
}

/// A flow against a reference flow.
#[derive(Debug, Clone, Copy)]
struct Difference {
    dims: f64,
    ell_star: Option<f64>,
    same: bool,
}

impl Difference {
    /// `a` against the reference `b`.
    fn of(a: &FlowResult, b: &FlowResult) -> Difference {
        let names = |r: &FlowResult| r.terms.iter().map(|t| t.name.clone()).collect::<Vec<_>>();
        let same = a.outcome == b.outcome && a.winner == b.winner && names(a) == names(b);
        // NaN (a non-finite dimension) stays NaN, and fails the check.
        let dims = b
            .terms
            .iter()
            .filter_map(|t| {
                let s = a.terms.iter().find(|s| s.name == t.name)?;
                Some((s.dimension - t.dimension).abs() / t.dimension.abs())
            })
            .fold(0.0, |m: f64, x| if x.is_nan() { x } else { m.max(x) });
        let ell_star = match (a.ell_star, b.ell_star) {
            (Some(x), Some(y)) => Some((x - y).abs() / y.abs().max(1.0)),
            _ => None,
        };
        Difference {
            dims,
            ell_star,
            same,
        }
    }

    fn scaled(self, f: f64) -> Difference {
        Difference {
            dims: f * self.dims,
            ell_star: self.ell_star.map(|e| f * e),
            ..self
        }
    }

    /// The in-flow estimate as a difference (the same outcome: the
    /// estimate exists only when no decision is within its reach).
    fn estimated(e: Estimate) -> Difference {
        Difference {
            dims: e.dims,
            ell_star: e.ell_star,
            same: true,
        }
    }

    /// The larger error; infinite when the flows end differently or an
    /// error is not a number.
    fn worst(&self) -> f64 {
        let w = self.dims.max(self.ell_star.unwrap_or(0.0));
        if self.same && !self.dims.is_nan() && !w.is_nan() {
            w
        } else {
            f64::INFINITY
        }
    }
}

impl Flow<'_> {
    /// Flow an infinite array from its bare rule `fp` (the start is on it),
    /// then check the quadrature and, for a rule that was not given,
    /// refine it while the check fails.
    pub(super) fn run_checked(
        &self,
        point: &[f64],
        mut start: Start,
        fp: QFixedPoint,
    ) -> Result<FlowResult, Error> {
        start.track = true;
        let mut result = self.run_from(point, start, self.opts.record)?;
        if matches!(result.outcome, Outcome::Failed | Outcome::Unphysical) {
            return Ok(result);
        }
        let check = match self.opts.q_points {
            Some(n) => {
                let (finer, quad) = self.sys.q_refined(point, &fp)?;
                let other = self.flow_on(point, &finer, quad, false)?;
                let diff = Difference::of(&result, &other).scaled(2.0);
                self.check(RuleChoice::Fixed, n, finer.points, diff, 0, None)
            }
            None => match self.estimate_passes(&result) {
                Some(diff) => {
                    let check =
                        self.check(RuleChoice::Refined, fp.points, fp.points / 2, diff, 0, None);
                    QuadratureCheck {
                        method: CheckMethod::Estimate,
                        ..check
                    }
                }
                None => {
                    // An estimate of the rule's own error above the margin:
                    // the half rule's flow could only fail too, so the rule
                    // is doubled at once.
                    let skip_half = self.estimate_usable() && result.q_estimate.is_some();
                    self.refine(point, &mut result, fp, skip_half)?
                }
            },
        };
        result.flow_quadrature = Some(check);
        Ok(result)
    }

    /// The in-flow estimate as the check's difference, when it is
    /// [`MARGIN`] times below the tolerance (else the full check runs).
    /// The estimate leaves out the integrator's error, which a second flow
    /// also shows: with `rtol` not [`MARGIN`] times below the tolerance
    /// that error may exceed it, and the second flow runs.
    fn estimate_passes(&self, result: &FlowResult) -> Option<Difference> {
        if !self.estimate_usable() {
            return None;
        }
        let diff = Difference::estimated(result.q_estimate?);
        (MARGIN * diff.worst() <= self.opts.q_tolerance).then_some(diff)
    }

    /// The in-flow estimate may decide: no full check asked for, and `rtol`
    /// [`MARGIN`] times below the tolerance.
    fn estimate_usable(&self) -> bool {
        !self.full_check && MARGIN * self.opts.rtol <= self.opts.q_tolerance
    }

    /// The tracker of a flow from `start` at its bare state `y0`: marked
    /// fragile when a generated channel's inclusion (its bare dimension
    /// against the closure bound) could differ on the half rule.
    pub(super) fn tracker(
        &self,
        rhs: &FlowRhs,
        all: &[Channel],
        start: &Start,
        y0: &[f64],
    ) -> Option<Tracker> {
        let mut track = Tracker::new(rhs, y0)?;
        if let super::background::Background::Fourier { wires, cell } = start.bg {
            let bound = self.opts.closure_bound + CLOSURE_SLACK;
            let mut tail = Tail::new(wires);
            let close = all.iter().skip(self.plan.listed).any(|ch| {
                let (full, err) = tail.error(&start.d0, &ch.lq, cell);
                (full - bound).abs() <= MARGIN * err
            });
            if close {
                track.mark_fragile();
            }
        }
        Some(track)
    }

    /// The tracker's estimate at the end of the first integration (stage 1);
    /// the tracker is removed so later stages do not advance it.
    pub(super) fn q_estimate(&self, rhs: &mut FlowRhs, first: &Integrated) -> Option<Estimate> {
        let track = rhs.q_track.take()?;
        track.estimate(
            rhs,
            first.state.as_slice(),
            first.outcome,
            first.winner,
            first.ell_star,
        )
    }

    /// The refinement loop of a rule that was not given (module docs).
    fn refine(
        &self,
        point: &[f64],
        result: &mut FlowResult,
        mut fp: QFixedPoint,
        skip_half: bool,
    ) -> Result<QuadratureCheck, Error> {
        let tol = self.opts.q_tolerance;
        let mut compared_with = 0;
        let mut diff = Difference {
            dims: f64::NAN,
            ell_star: None,
            same: false,
        };
        // The nested rule of half the points; the bare refinement always
        // ends on an even N, and without one (or when the in-flow estimate
        // already found the rule too coarse) the loop starts by doubling.
        let coarse = fp.coarsened().filter(|_| !skip_half);
        if let (Some(coarse), Some(quad)) = (coarse, result.quadrature) {
            let other = self.flow_on(point, &coarse, quad, false)?;
            diff = Difference::of(&other, result);
            compared_with = coarse.points;
        }
        let (mut refinements, mut stopped) = (0, None);
        let mut previous = f64::INFINITY;
        while diff.worst() > tol {
            if fp.points >= self.opts.q_max_points {
                stopped = Some(StoppedBy::Cap);
                break;
            }
            if refinements > 0 && diff.worst() >= 0.5 * previous {
                stopped = Some(StoppedBy::Stalled);
                break;
            }
            let (finer, quad) = self.sys.q_refined(point, &fp)?;
            let next = self.flow_on(point, &finer, quad, self.opts.record)?;
            previous = diff.worst();
            diff = Difference::of(result, &next);
            compared_with = fp.points;
            *result = next;
            fp = finer;
            refinements += 1;
        }
        Ok(self.check(
            RuleChoice::Refined,
            fp.points,
            compared_with,
            diff,
            refinements,
            stopped,
        ))
    }

    /// The same flow on another rule (its fixed point and quadrature).
    fn flow_on(
        &self,
        point: &[f64],
        fp: &QFixedPoint,
        quad: Quadrature,
        record: bool,
    ) -> Result<FlowResult, Error> {
        self.run_from(point, self.on_rule(fp, quad)?, record)
    }

    fn check(
        &self,
        rule: RuleChoice,
        points: usize,
        compared_with: usize,
        diff: Difference,
        refinements: usize,
        stopped: Option<StoppedBy>,
    ) -> QuadratureCheck {
        let tolerance = self.opts.q_tolerance;
        QuadratureCheck {
            rule,
            points,
            compared_with,
            dimension_error: diff.dims,
            ell_star_error: diff.ell_star,
            same_outcome: diff.same,
            tolerance,
            converged: diff.worst() <= tolerance,
            refinements,
            stopped,
            method: CheckMethod::Flow,
        }
    }
}
