//! The Kosterlitz-Thouless regime: one null cosine flowing alone.
//!
//! When exactly one channel has a non-zero coupling and it is a null vector
//! of a single translate (an explicit model), with no extra dimension, no
//! momentum cut-off and no active channel its self-OPE could feed, the
//! second-order flow is exactly [docs/physics.md section 3]
//!
//! ```text
//! dDelta/dell = -(y^2/4) Delta^2,   dy/dell = (2 - Delta) y,
//! ```
//!
//! for any K, V and l, and I = y^2/2 - 8/Delta - 4 ln Delta is conserved
//! (derived in `tests/flow_kt.rs`). The separatrix is I_sep = -4 - 4 ln 2:
//! for I < I_sep the coupling decays to zero with Delta -> Delta_inf > 2
//! (the root of -8/Delta - 4 ln Delta = I), for I > I_sep it reaches strong
//! coupling, however long that takes near the separatrix.
//!
//! Use here: a flow in this regime that is undecided at ell_max, or that
//! stopped as "decayed" although I > I_sep (y can dip below the floor while
//! passing Delta = 2 next to the separatrix), is decided by I. Below the
//! separatrix the outcome is gapless with Delta_inf from I; above it the
//! integration is continued (ell_max extended, doubling up to
//! [`ELL_CAP`]) until the coupling reaches y_strong, so that ell* comes from
//! the flow itself. Within [`MARGIN`] times the invariant's numerical drift
//! of the separatrix nothing is decided. Invariant: the invariant is only
//! applied in the regime above, where it is exact for the flow equations.

use serde::Serialize;

use super::rhs::FlowRhs;
use super::{run_segment, stepper, strong_result, FlowOptions, Integrated, Outcome};
use crate::flow::background::Background;
use crate::flow::rhs::Stop;

/// I_sep = -4 - 4 ln 2 (the value of I at y = 0, Delta = 2).
pub const SEPARATRIX: f64 = -4.0 - 4.0 * std::f64::consts::LN_2;

/// The extension of ell_max stops here (the flow stays undecided).
pub const ELL_CAP: f64 = 1.0e5;

/// A start closer to the separatrix than this many times the drift of I
/// along the computed flow (plus 1e-12) is not decided.
pub const MARGIN: f64 = 10.0;

/// What the KT invariant decided (JSON `kt`).
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct KtDecision {
    /// The cosine flowing alone.
    pub channel: String,
    /// I = y^2/2 - 8/Delta - 4 ln Delta at the start of the flow.
    pub invariant: f64,
    /// I_sep = -4 - 4 ln 2.
    pub separatrix: f64,
    /// |I(end) - I(start)| along the computed flow.
    pub drift: f64,
    /// "above" (strong coupling), "below" (gapless) or "on" (undecided).
    pub side: String,
    /// The ell_max the flow was extended to (above the separatrix), or
    /// null when it was not extended.
    pub ell_max_extended: Option<f64>,
    /// Below the separatrix: the limit Delta_inf of the dimension.
    pub delta_inf: Option<f64>,
}

/// I = y^2/2 - 8/Delta - 4 ln Delta.
pub fn invariant(y: f64, delta: f64) -> f64 {
    0.5 * y * y - 8.0 / delta - 4.0 * delta.ln()
}

/// Delta_inf > 2 with -8/Delta - 4 ln Delta = i (for i < I_sep; bisection).
pub fn delta_inf(i: f64) -> f64 {
    let f = |d: f64| -8.0 / d - 4.0 * d.ln() - i;
    let (mut a, mut b) = (2.0, 4.0);
    while f(b) > 0.0 && b < 1e12 {
        b *= 2.0;
    }
    for _ in 0..200 {
        let m = 0.5 * (a + b);
        if f(m) > 0.0 {
            a = m;
        } else {
            b = m;
        }
    }
    0.5 * (a + b)
}

/// The channel flowing alone in the KT regime (see the module docs), if
/// the flow from state `y` is in it.
pub fn regime(rhs: &FlowRhs, y: &[f64], ell_k: &[Option<f64>]) -> Option<usize> {
    if !matches!(rhs.bg, Background::Dense { .. }) {
        return None;
    }
    let mut live = (0..rhs.channels.len()).filter(|&c| rhs.active[c] && rhs.coupling(y, c) > 0.0);
    let c = live.next()?;
    if live.next().is_some() {
        return None;
    }
    let ch = rhs.channels[c];
    let alone = rhs.null[c]
        && rhs.extra[c] == 0.0
        && ell_k[c].is_none()
        && ch.family.translates.len() == 1
        && !rhs
            .ope
            .iter()
            .any(|e| e.a == c && e.b == c && rhs.active[e.target]);
    alone.then_some(c)
}

/// Decide an undecided (or decayed) flow of the KT regime by the invariant;
/// other outcomes are returned unchanged.
pub(super) fn decide(
    rhs: &mut FlowRhs,
    c: usize,
    y_start: &[f64],
    integrated: Integrated,
    opts: &FlowOptions,
) -> (Integrated, Option<KtDecision>) {
    if !matches!(integrated.outcome, Outcome::Undecided | Outcome::Gapless) {
        return (integrated, None);
    }
    let i0 = invariant(rhs.coupling(y_start, c), rhs.dimension(y_start, c));
    let end = integrated.state.as_slice();
    let drift = (invariant(rhs.coupling(end, c), rhs.dimension(end, c)) - i0).abs();
    let margin = i0 - SEPARATRIX;
    let mut decision = KtDecision {
        channel: rhs.channels[c].name.clone(),
        invariant: i0,
        separatrix: SEPARATRIX,
        drift,
        side: "on".into(),
        ell_max_extended: None,
        delta_inf: None,
    };
    if margin.abs() <= MARGIN * drift + 1e-12 {
        let changed = integrated.outcome == Outcome::Undecided;
        return (integrated, changed.then_some(decision));
    }
    if margin < 0.0 {
        if integrated.outcome == Outcome::Gapless {
            return (integrated, None);
        }
        decision.side = "below".into();
        decision.delta_inf = Some(delta_inf(i0));
        let gapless = Integrated {
            outcome: Outcome::Gapless,
            ..integrated
        };
        return (gapless, Some(decision));
    }
    decision.side = "above".into();
    let (result, reached) = extend(rhs, integrated, opts);
    decision.ell_max_extended = Some(reached);
    (result, Some(decision))
}

/// Continue a flow above the separatrix, doubling ell_max up to
/// [`ELL_CAP`], until the coupling reaches y_strong; the decay stop is
/// switched off (the coupling does not vanish above the separatrix).
fn extend(rhs: &mut FlowRhs, integrated: Integrated, opts: &FlowOptions) -> (Integrated, f64) {
    rhs.floor = 0.0;
    rhs.stop = None;
    let mut y = integrated.state.clone();
    let mut start = integrated.ell_end;
    let mut dop = stepper(rhs);
    while start < ELL_CAP {
        let end = (2.0 * start.max(opts.ell_max)).min(ELL_CAP);
        rhs.last_ell = start;
        if run_segment(rhs, &mut dop, y.as_slice(), start, end, opts).is_err() {
            break;
        }
        y.as_mut_slice().copy_from_slice(dop.y());
        if let Some(Stop::Strong {
            ell_before,
            ell_after,
        }) = rhs.stop
        {
            return (strong_result(rhs, &mut dop, y, ell_before, ell_after), end);
        }
        if !y.iter().all(|x| x.is_finite()) {
            break;
        }
        start = end;
    }
    let undecided = Integrated {
        outcome: Outcome::Undecided,
        ell_end: start,
        state: y,
        ..integrated
    };
    (undecided, start)
}
