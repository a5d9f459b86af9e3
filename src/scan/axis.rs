//! Scan axes: `name=min:max:n` (linear) or `name=min:max:n:log`.
//!
//! Grid values are computed directly from the index, never by repeated
//! addition, so no rounding accumulates; the end points are exact.

use serde::{Deserialize, Serialize};

/// One axis of a scan.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Axis {
    /// Parameter name.
    pub name: String,
    /// First value.
    pub min: f64,
    /// Last value.
    pub max: f64,
    /// Number of values (at least 2).
    pub n: usize,
    /// Logarithmic spacing.
    pub log: bool,
    /// The parameter's display label from the model (figures only).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub label: Option<String>,
    /// The parameter's unit from the model (figures only).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub unit: Option<String>,
}

impl Axis {
    /// Parse `name=min:max:n[:log|:lin]`; `key` names the flag or table key
    /// in messages.
    pub fn parse(spec: &str) -> Result<Axis, String> {
        let (name, range) = spec
            .split_once('=')
            .ok_or_else(|| format!("expected NAME=MIN:MAX:N[:log], found `{spec}`"))?;
        let parts: Vec<&str> = range.split(':').map(str::trim).collect();
        if !(3..=4).contains(&parts.len()) {
            return Err(format!("expected NAME=MIN:MAX:N[:log], found `{spec}`"));
        }
        let num = |s: &str, what: &str| -> Result<f64, String> {
            s.parse::<f64>()
                .ok()
                .filter(|x| x.is_finite())
                .ok_or_else(|| format!("{what} `{s}` is not a finite number (in `{spec}`)"))
        };
        let min = num(parts[0], "MIN")?;
        let max = num(parts[1], "MAX")?;
        let n: usize = parts[2]
            .parse()
            .map_err(|_| format!("N `{}` is not a whole number (in `{spec}`)", parts[2]))?;
        let log = match parts.get(3) {
            None | Some(&"lin") => false,
            Some(&"log") => true,
            Some(other) => {
                return Err(format!(
                    "spacing `{other}` must be `lin` or `log` (in `{spec}`)"
                ))
            }
        };
        let axis = Axis {
            name: name.trim().to_string(),
            min,
            max,
            n,
            log,
            label: None,
            unit: None,
        };
        axis.validate().map(|_| axis)
    }

    /// Check n >= 2, min < max and positive bounds (log).
    pub fn validate(&self) -> Result<(), String> {
        if self.name.is_empty() {
            return Err("the axis needs a parameter name".into());
        }
        if self.n < 2 {
            return Err(format!(
                "axis `{}` needs at least 2 points, found {}",
                self.name, self.n
            ));
        }
        if self.log && (self.min <= 0.0 || self.max <= 0.0) {
            return Err(format!(
                "log spacing needs positive bounds, found {}:{} on axis `{}`",
                self.min, self.max, self.name
            ));
        }
        if self.min >= self.max {
            return Err(format!(
                "MIN must be below MAX with {} spacing, found {}:{} on axis `{}`",
                if self.log { "log" } else { "linear" },
                self.min,
                self.max,
                self.name
            ));
        }
        Ok(())
    }

    /// The i-th value (0 <= i < n).
    ///
    /// Linear axes whose bounds and step are decimals with at most 12
    /// digits after the point give the double nearest to the decimal
    /// min + i*step (0.325, not 0.32499999999999996): the value is computed
    /// as an integer count of the decimal unit and parsed from its decimal
    /// text. Other axes use the weighted form (linear) or the exponential
    /// (log), rounded to 15 significant digits.
    pub fn value(&self, i: usize) -> f64 {
        if i == 0 {
            return self.min;
        }
        if i + 1 == self.n {
            return self.max;
        }
        let t = i as f64 / (self.n - 1) as f64;
        if self.log {
            let x = (self.min.ln() + t * (self.max.ln() - self.min.ln())).exp();
            return format!("{x:.14e}").parse().unwrap_or(x);
        }
        if let Some(x) = self.decimal_value(i) {
            return x;
        }
        // Weighted form: exact at both ends.
        let (i, m) = (i as f64, (self.n - 1) as f64);
        (self.min * (m - i) + self.max * i) / m
    }

    /// min + i*step as a decimal, when min, max and the step are decimals
    /// with at most 12 digits after the point (integers of that unit below
    /// 2^53).
    fn decimal_value(&self, i: usize) -> Option<f64> {
        let steps = (self.n - 1) as i128;
        for digits in 0..=12u32 {
            let unit = 10f64.powi(digits as i32);
            let lo = as_integer(self.min * unit)?;
            let hi = as_integer(self.max * unit)?;
            let (Some(lo), Some(hi)) = (lo, hi) else {
                continue;
            };
            if (hi - lo) % steps != 0 {
                continue;
            }
            let k = lo + (hi - lo) / steps * i as i128;
            return decimal_text(k, digits).parse().ok();
        }
        None
    }
    /// All values.
    pub fn values(&self) -> Vec<f64> {
        (0..self.n).map(|i| self.value(i)).collect()
    }

    /// The axis title of figures: `λ (meV)` from the model's label and
    /// unit, else the parameter name.
    pub fn title(&self) -> String {
        crate::model::ParamLabel {
            label: self.label.clone(),
            unit: self.unit.clone(),
        }
        .title(&self.name)
    }

    /// The spec string that parses back to this axis.
    pub fn spec(&self) -> String {
        let log = if self.log { ":log" } else { "" };
        format!("{}={}:{}:{}{log}", self.name, self.min, self.max, self.n)
    }
}

/// `x` as an integer when it is one to within rounding (Some(None) when it
/// is not; None when it is too large to count exactly).
fn as_integer(x: f64) -> Option<Option<i128>> {
    if x.abs() >= 9.0e15 {
        return None;
    }
    let r = x.round();
    Some(((x - r).abs() <= 1e-9 * r.abs().max(1.0)).then_some(r as i128))
}

/// The decimal text of k * 10^-digits.
fn decimal_text(k: i128, digits: u32) -> String {
    let sign = if k < 0 { "-" } else { "" };
    let a = k.unsigned_abs();
    let unit = 10u128.pow(digits);
    format!(
        "{sign}{}.{:0width$}",
        a / unit,
        a % unit,
        width = digits as usize
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn linear_values_have_exact_end_points() {
        let a = Axis::parse("lambda=0:0.9:181").unwrap();
        let v = a.values();
        assert_eq!(v.len(), 181);
        assert_eq!(v[0], 0.0);
        assert_eq!(v[180], 0.9);
        assert!((v[90] - 0.45).abs() < 1e-15);
    }

    #[test]
    fn linear_values_are_the_decimals_typed() {
        // 0.3 + 0.025 i, as typed in flows/laughlin_third.toml.
        let a = Axis::parse("lambda=0.3:0.95:27").unwrap();
        let text: Vec<String> = a.values().iter().map(|v| v.to_string()).collect();
        assert_eq!(text[1], "0.325");
        assert_eq!(text[25], "0.925");
        assert!(text.iter().all(|t| t.len() <= 5), "{text:?}");
        let b = Axis::parse("g=-1:1:21").unwrap();
        assert_eq!(b.value(7).to_string(), "-0.3");
        // A step that is no short decimal keeps the weighted form.
        let c = Axis::parse("x=0:1:4").unwrap();
        assert!((c.value(1) - 1.0 / 3.0).abs() < 1e-16);
    }

    #[test]
    fn log_values() {
        let a = Axis::parse("w=1e-3:1:4:log").unwrap();
        let v = a.values();
        assert!((v[1] - 1e-2).abs() < 1e-15 && (v[2] - 1e-1).abs() < 1e-14);
        assert_eq!(v[3], 1.0);
    }

    #[test]
    fn bad_axes_are_refused() {
        assert!(Axis::parse("x=0:1:1").unwrap_err().contains("at least 2"));
        assert!(Axis::parse("x=1:0:5")
            .unwrap_err()
            .contains("MIN must be below MAX"));
        assert!(Axis::parse("x=0:1:5:log").unwrap_err().contains("positive"));
        // Issue 19: log axes skipped MIN < MAX (descending and MIN = MAX).
        for spec in ["x=1:0.1:5:log", "x=0.5:0.5:5:log"] {
            let e = Axis::parse(spec).unwrap_err();
            assert!(e.contains("MIN must be below MAX with log spacing"), "{e}");
        }
        let e = Axis::parse("x=0.1:1:5:lgo").unwrap_err();
        assert!(e.contains("spacing `lgo` must be `lin` or `log`"), "{e}");
        assert!(Axis::parse("x=0:1").is_err());
        assert!(Axis::parse("x=a:1:3").is_err());
    }
}
