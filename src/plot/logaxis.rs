//! Linear and logarithmic axes of the charts.
//!
//! A logarithmic axis carries log10 of the data (the figure code maps the
//! values, see [`to_axis`]); this module places its ticks where a reader
//! expects them on a log scale and labels them with the values, not their
//! logarithms: every decade when the axis spans three or more, else
//! 1-2-5 or 1..9 times the decades, else (a span below a factor of about
//! two) plain linear ticks of the values.
//!
//! Invariant: a linear [`AxisCoord`] behaves exactly like plotters' own
//! f64 axis (same mapping and key points), so linear figures are unchanged.

use std::ops::Range;

use plotters::coord::ranged1d::{DefaultFormatting, KeyPointHint, Ranged};
use plotters::coord::types::RangedCoordf64;

use super::layout::{format_number, power_of_ten};

/// One axis of a chart: plotters' f64 axis, with log ticks when `log`.
#[derive(Clone)]
pub(crate) struct AxisCoord {
    inner: RangedCoordf64,
    /// The axis carries log10 of the values.
    pub log: bool,
}

impl AxisCoord {
    /// An axis over `lo..hi` (log10 values when `log`).
    pub fn new((lo, hi): (f64, f64), log: bool) -> AxisCoord {
        AxisCoord {
            inner: (lo..hi).into(),
            log,
        }
    }
}

impl Ranged for AxisCoord {
    type FormatOption = DefaultFormatting;
    type ValueType = f64;

    fn map(&self, value: &f64, limit: (i32, i32)) -> i32 {
        self.inner.map(value, limit)
    }

    fn key_points<Hint: KeyPointHint>(&self, hint: Hint) -> Vec<f64> {
        if !self.log {
            return self.inner.key_points(hint);
        }
        let r = self.inner.range();
        log_ticks(r.start, r.end, hint.max_num_points())
    }

    fn range(&self) -> Range<f64> {
        self.inner.range()
    }
}

/// A data value as placed on an axis: log10 on a log axis (non-positive
/// values become NaN, which the figures skip).
pub(crate) fn to_axis(v: f64, log: bool) -> f64 {
    match log {
        false => v,
        true if v > 0.0 => v.log10(),
        true => f64::NAN,
    }
}

/// Ticks (log10 values) of a log axis over `lo..hi` (log10), at most `max`.
pub(crate) fn log_ticks(lo: f64, hi: f64, max: usize) -> Vec<f64> {
    let max = max.max(2);
    let decades = multiples(lo, hi, &[1]);
    if decades.len() >= 3 {
        let step = decades.len().div_ceil(max);
        // Keep the decades that are multiples of `step`, so 10^0 stays.
        return decades
            .into_iter()
            .filter(|d| (d.round() as i64).rem_euclid(step as i64) == 0)
            .collect();
    }
    for set in [&[1, 2, 5][..], &[1, 2, 3, 4, 5, 6, 7, 8, 9][..]] {
        let ticks = multiples(lo, hi, set);
        if (3..=max).contains(&ticks.len()) {
            return ticks;
        }
    }
    // Less than a factor of about two: linear ticks of the values.
    let values = RangedCoordf64::from(10f64.powf(lo)..10f64.powf(hi));
    values
        .key_points(max)
        .into_iter()
        .filter(|v| *v > 0.0)
        .map(f64::log10)
        .collect()
}

/// log10(m · 10^d) for every m of `set` and whole d inside `lo..=hi`.
fn multiples(lo: f64, hi: f64, set: &[u32]) -> Vec<f64> {
    let eps = 1e-9 * (hi - lo).abs().max(1.0);
    let mut out = Vec::new();
    let (first, last) = (lo.floor() as i64 - 1, hi.ceil() as i64);
    for d in first..=last {
        for &m in set {
            let v = d as f64 + f64::from(m).log10();
            if v >= lo - eps && v <= hi + eps {
                out.push(v);
            }
        }
    }
    out
}

/// The label of a log tick at log10 value `v`: `10⁻²` when every tick is
/// a decade (`decades`), else the value (`0.02`).
pub(crate) fn log_label(v: f64, decades: bool) -> String {
    if decades {
        return power_of_ten(v);
    }
    format_number(10f64.powf(v))
}

/// True when every tick of the log axis `lo..hi` is a whole decade.
pub(crate) fn all_decades(lo: f64, hi: f64, max: usize) -> bool {
    log_ticks(lo, hi, max)
        .iter()
        .all(|v| (v - v.round()).abs() < 1e-9)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn labels(lo: f64, hi: f64) -> Vec<String> {
        let d = all_decades(lo.log10(), hi.log10(), 8);
        log_ticks(lo.log10(), hi.log10(), 8)
            .into_iter()
            .map(|v| log_label(v, d))
            .collect()
    }

    #[test]
    fn wide_axes_tick_at_decades() {
        assert_eq!(labels(1e-3, 1.0), ["10⁻³", "10⁻²", "10⁻¹", "10⁰"]);
        assert_eq!(labels(0.005, 20.0), ["10⁻²", "10⁻¹", "10⁰", "10¹"]);
        // Sixteen decades: every other one, keeping 10⁰.
        let many = labels(1e-8, 1e8);
        assert_eq!(many, ["10⁻⁶", "10⁻³", "10⁰", "10³", "10⁶"]);
    }

    #[test]
    fn narrow_axes_tick_at_one_two_five_then_every_digit() {
        assert_eq!(labels(0.1, 1.0), ["0.1", "0.2", "0.5", "1"]);
        assert_eq!(labels(0.3, 3.0), ["0.5", "1", "2"]);
        assert_eq!(labels(0.02, 0.05), ["0.02", "0.03", "0.04", "0.05"]);
    }

    #[test]
    fn very_narrow_axes_fall_back_to_linear_ticks() {
        let t = log_ticks(0.021f64.log10(), 0.025f64.log10(), 8);
        assert!(t.len() >= 3, "{t:?}");
        assert!(t.windows(2).all(|w| w[0] < w[1]));
        assert!(t
            .iter()
            .all(|v| (0.021f64.log10()..=0.025f64.log10()).contains(v)));
    }

    #[test]
    fn values_map_to_log10_and_non_positive_ones_are_skipped() {
        assert_eq!(to_axis(100.0, true), 2.0);
        assert!(to_axis(0.0, true).is_nan() && to_axis(-1.0, true).is_nan());
        assert_eq!(to_axis(-1.0, false), -1.0);
    }
}
