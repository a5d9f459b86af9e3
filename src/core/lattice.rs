//! The concrete system a model describes: the dense K matrix and charge
//! vector of all fields, every translate of every term, and the forward-
//! scattering matrix V at a parameter point.
//!
//! Field order: wire-major, `field = wire * n_c + c`. In an array, block n of
//! V couples wire j (rows) to wire j + n (columns); V^(-n) = V^(n)T. A
//! periodic array wraps offsets modulo W; an open array keeps only the
//! translates that fit. Invariant: every translate's `parts` lie on distinct
//! wires and its dense vector `l` has length `n`.

use nalgebra::DMatrix;

use crate::error::InputError;
use crate::model::{Boundary, Content, Model, Structure, Wires};

/// One placement of a term.
#[derive(Debug, Clone, PartialEq)]
pub struct Translate {
    /// Wire that offset 0 sits on.
    pub anchor: usize,
    /// (wire, integer vector over the cell) as written in the model.
    pub parts: Vec<(usize, Vec<i64>)>,
    /// Dense lattice vector l over all fields.
    pub l: Vec<i64>,
}

/// All translates of one term.
#[derive(Debug, Clone, PartialEq)]
pub struct Family {
    /// Translates in anchor order.
    pub translates: Vec<Translate>,
    /// Index of the translate that stands for the family in reports (anchor
    /// 0 for periodic arrays, the middle one for open arrays).
    pub representative: usize,
}

impl Family {
    /// The translate that stands for the family.
    pub fn rep(&self) -> &Translate {
        &self.translates[self.representative]
    }
}

/// The dense realisation of a model with a finite number of fields.
#[derive(Debug, Clone)]
pub struct Lattice {
    /// Fields per wire.
    pub cell: usize,
    /// Number of wires (1 for explicit models).
    pub wires: usize,
    /// Boundary (None for explicit models).
    pub boundary: Option<Boundary>,
    /// Total number of fields.
    pub n: usize,
    /// K of all fields.
    pub k: Vec<Vec<i64>>,
    /// Charge vector of all fields.
    pub charge: Vec<i64>,
    /// One family per model term, in model order.
    pub families: Vec<Family>,
    /// This is the periodic stand-in of an infinite array (see
    /// [`Lattice::stand_in`]), not a physical ring.
    pub infinite: bool,
}

impl Lattice {
    /// Realise a model. Fails for an infinite array (it has no dense
    /// realisation: see [`Lattice::stand_in`]) and for particle vectors
    /// whose l = K m overflows.
    pub fn build(model: &Model) -> Result<Lattice, InputError> {
        let (wires, boundary) = match model.structure {
            Structure::Explicit => (1, None),
            Structure::Array {
                wires: Wires::Finite(w),
                boundary,
            } => (w, Some(boundary)),
            Structure::Array {
                wires: Wires::Infinite,
                ..
            } => {
                return Err(InputError::new(
                    &model.file,
                    "array.wires",
                    "an \"infinite\" array has no dense realisation; prepare it with System::new, which uses the q-space path and a periodic stand-in",
                ))
            }
        };
        Lattice::realise(model, wires, boundary, false)
    }

    /// The periodic stand-in of an infinite array: a ring of
    /// [`Model::stand_in_wires`] wires. Everything exact that depends only
    /// on terms (charges, spins, locality, mutual phases at every relative
    /// offset, the OPE table of the flow) is the same on this ring as on the
    /// infinite line, because the ring is wider than twice every vector the
    /// flow can produce: two vectors of widths a and b (in wires) on a ring
    /// of W > a + b wires overlap at a relative offset s exactly when they
    /// do on the line at the one offset s' = s mod W with |s'| < W/2, and a
    /// ring vector of width below W/2 unfolds to a unique line vector.
    /// Listed terms have width R + 1 and generated ones at most R + 2 (see
    /// `flow::channels`), so W = 4 (R + 2) + 1 suffices.
    pub fn stand_in(model: &Model) -> Result<Lattice, InputError> {
        let wires = model.stand_in_wires();
        Lattice::realise(model, wires, Some(Boundary::Periodic), true)
    }

    fn realise(
        model: &Model,
        wires: usize,
        boundary: Option<Boundary>,
        infinite: bool,
    ) -> Result<Lattice, InputError> {
        let cell = model.cell_fields();
        let n = cell.saturating_mul(wires);
        // The model reader refuses finite arrays above the limit; this also
        // bounds the stand-in ring of an infinite array.
        if n > crate::model::MAX_FIELDS {
            let what = if infinite {
                format!("the exact data of an infinite array is computed on a ring of {wires} wires (4 (R + 2) + 1 for terms reaching wire offset R), here ")
            } else {
                String::new()
            };
            return Err(InputError::new(
                &model.file,
                "array.wires",
                format!(
                    "{what}{wires} wires of {cell} fields make {n} fields, above the limit of {} fields",
                    crate::model::MAX_FIELDS
                ),
            ));
        }
        let (k, charge) = block_diagonal(model, wires);
        let mut lat = Lattice {
            cell,
            wires,
            boundary,
            n,
            k,
            charge,
            families: Vec::new(),
            infinite,
        };
        for term in &model.terms {
            let cell_l = cell_vectors(model, term)?;
            lat.families.push(lat.family(&cell_l));
        }
        Ok(lat)
    }

    /// Anchors at which a term of the given range has a translate.
    pub fn anchors(&self, range: usize) -> std::ops::Range<usize> {
        match self.boundary {
            None => 0..1,
            Some(Boundary::Periodic) => 0..self.wires,
            Some(Boundary::Open) => 0..self.wires.saturating_sub(range),
        }
    }

    /// All translates of a term given by cell-level lattice vectors per offset.
    pub fn family(&self, cell_l: &[(usize, Vec<i64>)]) -> Family {
        let range = cell_l.iter().map(|p| p.0).max().unwrap_or(0);
        let translates: Vec<Translate> =
            self.anchors(range).map(|a| self.place(cell_l, a)).collect();
        let representative = match self.boundary {
            Some(Boundary::Open) => (translates.len().saturating_sub(1)) / 2,
            _ => 0,
        };
        Family {
            translates,
            representative,
        }
    }

    /// Where a ring vector supported on the wires `on` (ascending) starts
    /// and how many wires past the start it reaches, read on the line: the
    /// start is the support wire after the largest cyclic gap (a single
    /// support wire has the whole ring as its gap). Unique when the ring is
    /// wider than twice the vector, as the stand-in ring is.
    pub fn unfolded_window(&self, on: &[usize]) -> (usize, usize) {
        let w = self.wires;
        let start = on
            .iter()
            .enumerate()
            .max_by_key(|&(i, &s)| {
                let prev = on[(i + on.len() - 1) % on.len()];
                ((s + w - prev - 1) % w, std::cmp::Reverse(s))
            })
            .map_or(0, |(_, &s)| s);
        let degree = on.iter().map(|&j| (j + w - start) % w).max().unwrap_or(0);
        (start, degree)
    }

    /// Place cell-level parts at an anchor wire.
    pub fn place(&self, cell_l: &[(usize, Vec<i64>)], anchor: usize) -> Translate {
        let mut l = vec![0i64; self.n];
        let mut parts = Vec::with_capacity(cell_l.len());
        for (off, v) in cell_l {
            let wire = (anchor + off) % self.wires.max(1);
            for (c, x) in v.iter().enumerate() {
                l[wire * self.cell + c] += x;
            }
            parts.push((wire, v.clone()));
        }
        Translate { anchor, parts, l }
    }

    /// Dense V at a parameter point, written into `out` (n x n). Returns the
    /// first non-finite or asymmetric entry as an error message.
    pub fn fill_v(
        &self,
        model: &Model,
        point: &[f64],
        out: &mut DMatrix<f64>,
    ) -> Result<(), String> {
        let blocks = eval_blocks(model, point)?;
        out.fill(0.0);
        let c = self.cell;
        for (sep, block) in blocks.iter().enumerate() {
            for j in 0..self.wires {
                let Some(j2) = self.partner(j, sep) else {
                    continue;
                };
                for a in 0..c {
                    for b in 0..c {
                        let x = block[(a, b)];
                        out[(j * c + a, j2 * c + b)] += x;
                        if sep > 0 {
                            out[(j2 * c + b, j * c + a)] += x;
                        }
                    }
                }
            }
        }
        check_symmetric(model, out)
    }

    /// Wire coupled to wire j by block `sep`, if any.
    fn partner(&self, j: usize, sep: usize) -> Option<usize> {
        match self.boundary {
            None => (sep == 0).then_some(j),
            Some(Boundary::Periodic) => Some((j + sep) % self.wires),
            Some(Boundary::Open) => (j + sep < self.wires).then_some(j + sep),
        }
    }

    /// K as a float matrix.
    pub fn k_f64(&self) -> DMatrix<f64> {
        DMatrix::from_fn(self.n, self.n, |i, j| self.k[i][j] as f64)
    }

    /// Momentum of every field at a parameter point (None if the model gives none).
    pub fn momenta(&self, model: &Model, point: &[f64]) -> Option<Vec<f64>> {
        let base = model.momentum.as_ref()?;
        let shift = model.momentum_per_wire.as_ref();
        let mut k = Vec::with_capacity(self.n);
        for w in 0..self.wires {
            for c in 0..self.cell {
                let s = shift.map_or(0.0, |s| s[c].eval(point));
                k.push(base[c].eval(point) + w as f64 * s);
            }
        }
        Some(k)
    }
}

/// The V blocks V^(0), V^(1), ... of a model at a parameter point (one
/// block for explicit models). Returns the first non-finite entry, or an
/// asymmetric block 0, as an error message naming the key.
pub fn eval_blocks(model: &Model, point: &[f64]) -> Result<Vec<DMatrix<f64>>, String> {
    let c = model.cell_fields();
    let mut out = Vec::with_capacity(model.v_blocks.len());
    for (sep, block) in model.v_blocks.iter().enumerate() {
        let mut m = DMatrix::zeros(c, c);
        for a in 0..c {
            for b in 0..c {
                let x = block[a][b].eval(point);
                if !x.is_finite() {
                    return Err(format!(
                        "{}: must be a finite number, found {x}",
                        block_key(model, sep, a, b)
                    ));
                }
                m[(a, b)] = x;
            }
        }
        out.push(m);
    }
    Ok(out)
}

/// Block 0 must be symmetric (the other blocks enter with their transposes).
pub fn check_block_symmetric(model: &Model, block0: &DMatrix<f64>) -> Result<(), String> {
    check_symmetric(model, block0)
}

fn block_key(model: &Model, sep: usize, a: usize, b: usize) -> String {
    match model.structure {
        Structure::Explicit => format!("fields.V[{a}][{b}]"),
        Structure::Array { .. } => format!("array.V.{sep}[{a}][{b}]"),
    }
}

fn check_symmetric(model: &Model, v: &DMatrix<f64>) -> Result<(), String> {
    let n = v.nrows();
    for i in 0..n {
        for j in 0..i {
            let (x, y) = (v[(i, j)], v[(j, i)]);
            if (x - y).abs() > 1e-12 * (1.0 + x.abs().max(y.abs())) {
                let key = match model.structure {
                    Structure::Explicit => "fields.V".to_string(),
                    Structure::Array { .. } => "array.V.0".to_string(),
                };
                return Err(format!(
                    "{key}: V must be symmetric, but V[{i}][{j}] = {x} and V[{j}][{i}] = {y}"
                ));
            }
        }
    }
    Ok(())
}

/// The dense K (block diagonal, one cell block per wire) and charge vector
/// of `wires` wires.
fn block_diagonal(model: &Model, wires: usize) -> (Vec<Vec<i64>>, Vec<i64>) {
    let cell = model.cell_fields();
    let n = cell * wires;
    let mut k = vec![vec![0i64; n]; n];
    let mut charge = vec![0i64; n];
    for w in 0..wires {
        for a in 0..cell {
            charge[w * cell + a] = model.cell_charge[a];
            for b in 0..cell {
                k[w * cell + a][w * cell + b] = model.cell_k[a][b];
            }
        }
    }
    (k, charge)
}

/// A term's cell-level lattice vectors per wire offset (l = K_c m for a
/// particle content).
fn cell_vectors(
    model: &Model,
    term: &crate::model::TermSpec,
) -> Result<Vec<(usize, Vec<i64>)>, InputError> {
    term.parts
        .iter()
        .map(|(off, v)| match term.content {
            Content::Vector => Ok((*off, v.clone())),
            Content::Particles => {
                cell_times(&model.cell_k, v)
                    .map(|l| (*off, l))
                    .ok_or_else(|| {
                        let key = format!("term \"{}\"", term.name);
                        InputError::new(&model.file, key, "K m overflows 64-bit integers")
                    })
            }
        })
        .collect()
}

/// K_cell m with overflow checks.
fn cell_times(k: &[Vec<i64>], m: &[i64]) -> Option<Vec<i64>> {
    k.iter()
        .map(|row| {
            row.iter()
                .zip(m)
                .try_fold(0i64, |acc, (a, b)| acc.checked_add(a.checked_mul(*b)?))
        })
        .collect()
}
