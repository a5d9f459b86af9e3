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
    pub fn value(&self, i: usize) -> f64 {
        if i == 0 {
            return self.min;
        }
        if i + 1 == self.n {
            return self.max;
        }
        let t = i as f64 / (self.n - 1) as f64;
        if self.log {
            (self.min.ln() + t * (self.max.ln() - self.min.ln())).exp()
        } else {
            // Weighted form: exact at both ends and closest to the decimal
            // grid more often than min + t (max - min).
            let (i, m) = (i as f64, (self.n - 1) as f64);
            (self.min * (m - i) + self.max * i) / m
        }
    }

    /// All values.
    pub fn values(&self) -> Vec<f64> {
        (0..self.n).map(|i| self.value(i)).collect()
    }

    /// The spec string that parses back to this axis.
    pub fn spec(&self) -> String {
        let log = if self.log { ":log" } else { "" };
        format!("{}={}:{}:{}{log}", self.name, self.min, self.max, self.n)
    }
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
        assert!(Axis::parse("x=0:1").is_err());
        assert!(Axis::parse("x=a:1:3").is_err());
    }
}
