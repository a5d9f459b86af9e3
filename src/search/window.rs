//! The block of fields an operator search runs on, and the canonical form of
//! an operator under sign and translation.
//!
//! Explicit models: all fields, no translations. Arrays: R consecutive wires.
//! A periodic array is translation invariant, so wires 0..R-1 stand for any
//! window; an open array uses the window in its middle (the bulk), where the
//! dimensions differ least from those of an infinite array. The scaling
//! dimension of an operator supported in the window needs only the block of
//! D on the window's fields (Delta = l^T D l / 2 with l zero elsewhere).
//!
//! Canonical form (one representative per class):
//! - translation: the support (the shortest run of consecutive wires
//!   containing every wire the operator touches; on a ring, the complement of
//!   the largest gap) is shifted to start at the window's first wire; on a
//!   ring, ties between equally short runs go to the lexicographically
//!   largest result;
//! - sign (m ~ -m): positive charge, or for neutral operators a positive
//!   first non-zero entry.

use crate::core::system::System;
use crate::error::InputError;
use crate::model::{Boundary, Structure};

/// Where the search runs.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Window {
    /// Fields per wire (all fields for explicit models).
    pub cell: usize,
    /// Wires in the window (R; 1 for explicit models).
    pub wires: usize,
    /// First wire of the window in the array.
    pub first: usize,
    /// Wires of the whole array (1 for explicit models).
    pub total: usize,
    /// A periodic array (translations wrap around).
    pub periodic: bool,
    /// An array model (translations exist at all).
    pub array: bool,
    /// Charge vector of one wire.
    pub cell_charge: Vec<i64>,
}

impl Window {
    /// The window for a model and an optional `--range` (R; by default
    /// [`default_range`]). Errors name `flag` (the one that set R, e.g.
    /// `--range`): 0, more wires than the array has, or any value for an
    /// explicit model.
    pub fn choose(sys: &System, range: Option<usize>, flag: &str) -> Result<Window, InputError> {
        let lat = &sys.lattice;
        let cmd = |m: String| InputError::new("command line", flag, m);
        match sys.model.structure {
            Structure::Explicit => {
                if range.is_some() {
                    return Err(cmd(format!(
                        "applies to arrays of wires only; this model gives [fields], and all of its {} fields are searched",
                        lat.n
                    )));
                }
                Ok(Window {
                    cell: lat.n,
                    wires: 1,
                    first: 0,
                    total: 1,
                    periodic: false,
                    array: false,
                    cell_charge: lat.charge.clone(),
                })
            }
            Structure::Array { boundary, .. } => {
                let w = lat.wires;
                let r = match range {
                    Some(0) => {
                        return Err(cmd(
                            "expected a number of consecutive wires of at least 1, found 0".into(),
                        ))
                    }
                    Some(r) if r > w => {
                        return Err(cmd(format!(
                            "expected at most {w} (the number of wires of the array), found {r}"
                        )))
                    }
                    Some(r) => r,
                    None => default_range(sys),
                };
                let periodic = boundary == Boundary::Periodic;
                Ok(Window {
                    cell: lat.cell,
                    wires: r,
                    first: if periodic { 0 } else { (w - r) / 2 },
                    total: w,
                    periodic,
                    array: true,
                    cell_charge: sys.model.cell_charge.clone(),
                })
            }
        }
    }

    /// Number of fields in the window.
    pub fn fields(&self) -> usize {
        self.wires * self.cell
    }

    /// Indices (in the whole system) of the window's fields, in order.
    pub fn field_indices(&self) -> Vec<usize> {
        (0..self.wires)
            .flat_map(|w| {
                let wire = (self.first + w) % self.total;
                (0..self.cell).map(move |c| wire * self.cell + c)
            })
            .collect()
    }

    /// A window vector placed in the whole system.
    pub fn place(&self, m: &[i64]) -> Vec<i64> {
        let mut full = vec![0i64; self.total * self.cell];
        for (i, f) in self.field_indices().into_iter().enumerate() {
            full[f] = m[i];
        }
        full
    }

    /// Canonical form of a window vector (see the module docs).
    pub fn canonical(&self, m: &[i64]) -> Vec<i64> {
        self.canonical_signed(m).0
    }

    /// Canonical form of a window vector and whether it is minus a
    /// translate of it (true) or a translate (false).
    pub fn canonical_signed(&self, m: &[i64]) -> (Vec<i64>, bool) {
        if self.periodic {
            let mut ring = vec![0i64; self.total * self.cell];
            ring[..m.len()].copy_from_slice(m);
            self.canonical_ring(&ring)
                .expect("an operator inside the window fits the window")
        } else {
            self.canonical_line(m, self.wires)
                .expect("an operator inside the window fits the window")
        }
    }

    /// Canonical form of a vector over all fields of the system (a model
    /// term), or `None` when it does not fit in R consecutive wires.
    pub fn canonical_full(&self, m: &[i64]) -> Option<Vec<i64>> {
        self.canonical_full_signed(m).map(|c| c.0)
    }

    /// [`Window::canonical_full`] and whether the vector is minus a
    /// translate of it.
    pub fn canonical_full_signed(&self, m: &[i64]) -> Option<(Vec<i64>, bool)> {
        if self.periodic {
            self.canonical_ring(m)
        } else {
            self.canonical_line(m, self.total)
        }
    }

    /// Number of wires an operator touches (its support length), for a
    /// window vector.
    pub fn support(&self, m: &[i64]) -> usize {
        let touched: Vec<usize> = (0..self.wires).filter(|&w| self.touches(m, w)).collect();
        match (touched.first(), touched.last()) {
            (Some(a), Some(b)) => b - a + 1,
            _ => 0,
        }
    }

    /// Non-zero cell vectors by wire offset (zero wires omitted).
    pub fn parts(&self, m: &[i64]) -> Vec<(usize, Vec<i64>)> {
        (0..self.wires)
            .filter(|&w| self.touches(m, w))
            .map(|w| (w, m[w * self.cell..(w + 1) * self.cell].to_vec()))
            .collect()
    }

    /// The vector touches the window's first wire (every canonical
    /// placement does).
    pub fn touches_first(&self, m: &[i64]) -> bool {
        self.touches(m, 0)
    }

    fn touches(&self, v: &[i64], w: usize) -> bool {
        v[w * self.cell..(w + 1) * self.cell]
            .iter()
            .any(|x| *x != 0)
    }

    /// Linear support: shift the first touched wire to 0, keep R wires.
    fn canonical_line(&self, v: &[i64], nwires: usize) -> Option<(Vec<i64>, bool)> {
        let touched: Vec<usize> = (0..nwires).filter(|&w| self.touches(v, w)).collect();
        let (&a, &b) = (touched.first()?, touched.last()?);
        if b - a + 1 > self.wires {
            return None;
        }
        let mut out = vec![0i64; self.fields()];
        let len = (b - a + 1) * self.cell;
        out[..len].copy_from_slice(&v[a * self.cell..a * self.cell + len]);
        Some(self.normalise_sign(out))
    }

    /// Ring support: start after a largest gap; ties by lexicographic order.
    fn canonical_ring(&self, v: &[i64]) -> Option<(Vec<i64>, bool)> {
        let w = self.total;
        let touched: Vec<usize> = (0..w).filter(|&x| self.touches(v, x)).collect();
        if touched.is_empty() {
            return None;
        }
        // Gap after touched[i]: untouched wires before the next touched one.
        let k = touched.len();
        let gaps: Vec<usize> = (0..k)
            .map(|i| (touched[(i + 1) % k] + w - touched[i] - 1) % w)
            .collect();
        let gaps: Vec<usize> = if k == 1 { vec![w - 1] } else { gaps };
        let widest = *gaps.iter().max()?;
        if w - widest > self.wires {
            return None;
        }
        let mut best: Option<(Vec<i64>, bool)> = None;
        for (i, g) in gaps.iter().enumerate() {
            if *g != widest {
                continue;
            }
            let start = touched[(i + 1) % k];
            let mut out = vec![0i64; self.fields()];
            for x in 0..self.wires {
                let src = (start + x) % w;
                out[x * self.cell..(x + 1) * self.cell]
                    .copy_from_slice(&v[src * self.cell..(src + 1) * self.cell]);
            }
            let out = self.normalise_sign(out);
            if best.as_ref().is_none_or(|b| out.0 > b.0) {
                best = Some(out);
            }
        }
        best
    }

    /// Positive charge; for neutral vectors a positive first non-zero entry;
    /// with whether the sign was flipped.
    fn normalise_sign(&self, mut v: Vec<i64>) -> (Vec<i64>, bool) {
        let charge = self.charge(&v);
        let flip = if charge != 0 {
            charge < 0
        } else {
            v.iter().find(|x| **x != 0).is_some_and(|x| *x < 0)
        };
        if flip {
            v.iter_mut().for_each(|x| *x = -*x);
        }
        (v, flip)
    }

    /// t.m of a vector laid out wire by wire.
    pub fn charge(&self, v: &[i64]) -> i128 {
        v.chunks(self.cell)
            .map(|chunk| {
                chunk
                    .iter()
                    .zip(&self.cell_charge)
                    .map(|(a, b)| *a as i128 * *b as i128)
                    .sum::<i128>()
            })
            .sum()
    }
}

/// Default R: the number of wires the widest model term touches, at least
/// 2, at most the number of wires.
pub fn default_range(sys: &System) -> usize {
    let widest = sys
        .model
        .terms
        .iter()
        .map(|t| t.range() + 1)
        .max()
        .unwrap_or(0);
    widest.max(2).min(sys.lattice.wires)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ring(total: usize, wires: usize) -> Window {
        Window {
            cell: 2,
            wires,
            first: 0,
            total,
            periodic: true,
            array: true,
            cell_charge: vec![1, 1],
        }
    }

    #[test]
    fn translation_and_sign_classes() {
        let w = ring(8, 3);
        // Same operator on wires (0,1) and (1,2), and its negative.
        let a = vec![1, -1, -1, 1, 0, 0];
        let b = vec![0, 0, 1, -1, -1, 1];
        let c: Vec<i64> = b.iter().map(|x| -x).collect();
        assert_eq!(w.canonical(&a), w.canonical(&b));
        assert_eq!(w.canonical(&a), w.canonical(&c));
        assert_eq!(w.canonical(&a), a);
        // Charged: the sign with positive charge.
        assert_eq!(w.canonical(&[0, 0, -1, -1, 0, 0]), vec![1, 1, 0, 0, 0, 0]);
    }

    #[test]
    fn ring_wrap_is_one_class() {
        // On a ring of 4 wires with R = 4, wires {3, 0} are neighbours: the
        // placement on (3, 0) and the one on (0, 1) are one class.
        let w = ring(4, 4);
        let on_01 = vec![1, 0, 0, -1, 0, 0, 0, 0];
        let on_30 = vec![0, -1, 0, 0, 0, 0, 1, 0];
        assert_eq!(w.canonical(&on_01), w.canonical(&on_30));
        assert_eq!(w.support(&w.canonical(&on_30)), 2);
    }

    #[test]
    fn open_array_window_is_in_the_middle() {
        let w = Window {
            cell: 2,
            wires: 3,
            first: (9 - 3) / 2,
            total: 9,
            periodic: false,
            array: true,
            cell_charge: vec![1, 1],
        };
        assert_eq!(w.field_indices(), (6..12).collect::<Vec<_>>());
        // A term over all fields on wires 5, 6 maps to offsets 0, 1.
        let mut full = vec![0i64; 18];
        full[10] = -1;
        full[13] = 1;
        assert_eq!(w.canonical_full(&full), Some(vec![1, 0, 0, -1, 0, 0]));
        // Wider than R: no canonical form.
        full[0] = 1;
        assert_eq!(w.canonical_full(&full), None);
    }
}
