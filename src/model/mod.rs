//! Model files: reading, validating and evaluating them.
//!
//! Reading happens in two stages: [`raw::RawModel`] mirrors the TOML file,
//! then [`Model::from_raw`] checks every key and builds a validated model
//! whose matrices have checked sizes and whose expressions are compiled
//! against the declared parameters. Every error names the file and the key.
//!
//! Invariants of a [`Model`]: the cell K is square, symmetric and integer
//! (its determinant is checked in [`crate::core::lattice`]); every V block is
//! `n_c x n_c` with compiled entries; every term has one integer vector per
//! wire offset, each of length `n_c`; term names are unique.

pub mod expr;
pub mod raw;
pub mod symmetry;
mod values;

use std::collections::BTreeSet;
use std::path::Path;

use crate::error::InputError;
use crate::math::rational::Rational;
pub use expr::{ParamLabel, ParamSet, Scalar};
use num_traits::Zero;
use raw::{RawArray, RawFields, RawModel, RawTerm};
pub use symmetry::{Symmetry, SymmetryKind};
use values::Ctx;

/// Most fields a model may have in all (wires times fields per wire). Every
/// point builds dense N x N matrices (K, V, D) and diagonalises one, so a
/// larger system would take minutes to hours per point, or exhaust memory;
/// such a model is refused when it is read.
pub const MAX_FIELDS: usize = 2048;

/// Largest magnitude of an entry of K or of a term's integer vector. With
/// at most [`MAX_FIELDS`] fields, every entry of l = K m and of sums of a few
/// such vectors then stays far inside 64-bit integers and is exact as a
/// float (below 2^53), which the flow and the search rely on.
pub const MAX_ENTRY: i64 = 1 << 20;

/// Largest model file read, in bytes. An explicit model at [`MAX_FIELDS`]
/// written out in full (K and V, 2048 x 2048 entries each) takes about
/// 30 MB; an endless stream (`/dev/zero`) is cut off here instead of being
/// read until memory runs out.
pub const MAX_MODEL_BYTES: u64 = 64 << 20;

/// The text of a model from any reader (a file, standard input), at most
/// [`MAX_MODEL_BYTES`] long and UTF-8; `file` names it in messages.
pub fn read_text(reader: impl std::io::Read, file: &str) -> Result<String, InputError> {
    use std::io::Read;
    let mut bytes = Vec::new();
    reader
        .take(MAX_MODEL_BYTES + 1)
        .read_to_end(&mut bytes)
        .map_err(|e| InputError::new(file, "", format!("cannot read the model file: {e}")))?;
    if bytes.len() as u64 > MAX_MODEL_BYTES {
        return Err(InputError::new(
            file,
            "",
            format!(
                "the model file is larger than {} MiB (the limit; a model at the largest size, {MAX_FIELDS} fields, takes about 30 MB): is it the right file?",
                MAX_MODEL_BYTES >> 20
            ),
        ));
    }
    String::from_utf8(bytes).map_err(|e| {
        InputError::new(
            file,
            "",
            format!(
                "the model file is not UTF-8 text (invalid byte at offset {})",
                e.utf8_error().valid_up_to()
            ),
        )
    })
}

/// How the fields are organised.
#[derive(Debug, Clone, PartialEq)]
pub enum Structure {
    /// `[fields]`: the K matrix of the whole system is given.
    Explicit,
    /// `[array]`: a wire cell repeated over wires.
    Array {
        /// Number of wires.
        wires: Wires,
        /// Boundary condition.
        boundary: Boundary,
    },
}

/// Number of wires of an array.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Wires {
    /// A finite array.
    Finite(usize),
    /// The thermodynamic limit (computed in q-space, see [`crate::core::qspace`]).
    Infinite,
}

/// Boundary condition of an array.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Boundary {
    /// Wire W-1 couples to wire 0.
    Periodic,
    /// Two free ends.
    Open,
}

/// How a term's integer vectors are to be read.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Content {
    /// Particle content m; the lattice vector is l = K m.
    Particles,
    /// The lattice vector l itself.
    Vector,
}

/// A validated candidate cosine term.
#[derive(Debug, Clone)]
pub struct TermSpec {
    /// Unique name.
    pub name: String,
    /// How `parts` is to be read.
    pub content: Content,
    /// (wire offset, integer vector of length n_c); explicit models have the
    /// single offset 0 and a vector over all fields.
    pub parts: Vec<(usize, Vec<i64>)>,
    /// Bare coupling y.
    pub coupling: Scalar,
    /// Phase chi (radians).
    pub phase: Scalar,
    /// Fixed extra scaling dimension delta.
    pub extra_dimension: Scalar,
    /// Fixed extra conformal spin sigma.
    pub extra_spin: Rational,
    /// One of the terms the model is meant to realise (any number may be
    /// targets; the target phase is the lattice they span).
    pub target: bool,
    /// Charge the term may carry without being flagged.
    pub allowed_charge: Rational,
    /// Charges under the model's U(1) symmetries that the term may carry
    /// (the other keys of an `allowed_charge` table), by symmetry name.
    pub allowed_charges: Vec<(String, Rational)>,
    /// The group whose members flow from one bare coupling (None: alone).
    pub group: Option<String>,
}

impl TermSpec {
    /// Largest wire offset the term touches (0 for explicit models).
    pub fn range(&self) -> usize {
        self.parts.iter().map(|p| p.0).max().unwrap_or(0)
    }
}

/// How an explicit model groups its fields by wire (`fields.wires`,
/// `fields.boundary`). Invariant: `wire` has one entry per field, and every
/// wire 0..wires is used by at least one field.
#[derive(Debug, Clone, PartialEq)]
pub struct FieldWires {
    /// Wire of every field.
    pub wire: Vec<usize>,
    /// Number of wires.
    pub wires: usize,
    /// Wire wires-1 neighbours wire 0.
    pub periodic: bool,
}

/// A validated model (see the module docs for its invariants).
#[derive(Debug, Clone)]
pub struct Model {
    /// Free-text name.
    pub name: String,
    /// The file it was read from (for messages).
    pub file: String,
    /// Named parameters with defaults.
    pub params: ParamSet,
    /// Explicit or array.
    pub structure: Structure,
    /// K of the cell (explicit models: of the whole system).
    pub cell_k: Vec<Vec<i64>>,
    /// Charge vector of the cell.
    pub cell_charge: Vec<i64>,
    /// Forward-scattering blocks by wire separation (explicit: one block).
    pub v_blocks: Vec<Vec<Vec<Scalar>>>,
    /// Momentum per field of the cell (wire 0).
    pub momentum: Option<Vec<Scalar>>,
    /// Momentum added once per wire index.
    pub momentum_per_wire: Option<Vec<Scalar>>,
    /// Reciprocal lattice vector G (`momentum_period`): a mismatch is only
    /// defined modulo G and is reduced to (-G/2, G/2].
    pub momentum_period: Option<Scalar>,
    /// Candidate terms.
    pub terms: Vec<TermSpec>,
    /// Explicit models: the wire of every field, when `fields.wires` groups
    /// them (None otherwise and for arrays, whose wires are their own).
    pub field_wires: Option<FieldWires>,
    /// The `[flow]` table, checked by the flow module.
    pub flow_table: Option<toml::Table>,
    /// The `[scan]` table, checked by the scan module.
    pub scan_table: Option<toml::Table>,
    /// The `[[symmetry]]` tables.
    pub symmetries: Vec<Symmetry>,
    /// The `[competitors]` table.
    pub competitors: CompetitorDefaults,
}

/// The `[competitors]` table: defaults of `--competitors` and
/// `--competitor-coupling` (None: not given).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct CompetitorDefaults {
    /// `delta`: hunted operators with bare Delta <= delta join the flow.
    pub delta: Option<f64>,
    /// `coupling`: their bare coupling.
    pub coupling: Option<f64>,
    /// `range`: the hunt's range in wires (arrays).
    pub range: Option<usize>,
}

impl Model {
    /// Wires of the periodic stand-in ring on which an infinite array's
    /// exact data is computed (see `core::lattice::Lattice::stand_in`):
    /// 4 (R + 2) + 1 for terms of range R.
    pub fn stand_in_wires(&self) -> usize {
        let range = self.terms.iter().map(|t| t.range()).max().unwrap_or(0);
        4 * (range + 2) + 1
    }

    /// Read and validate a model file.
    pub fn load(path: &Path) -> Result<Model, InputError> {
        let file = path.display().to_string();
        let opened = std::fs::File::open(path)
            .map_err(|e| InputError::new(&file, "", format!("cannot read the model file: {e}")))?;
        Model::parse(&read_text(opened, &file)?, &file)
    }

    /// Parse and validate model text; `file` names it in messages.
    pub fn parse(text: &str, file: &str) -> Result<Model, InputError> {
        let raw: RawModel = toml::from_str(text).map_err(|e| {
            InputError::new(
                file,
                "",
                format!("not a valid model file: {}", e.to_string().trim_end()),
            )
        })?;
        Model::from_raw(raw, file)
    }

    /// Second stage: check every key of the raw model.
    pub fn from_raw(raw: RawModel, file: &str) -> Result<Model, InputError> {
        let ctx = Ctx::new(file);
        let params = read_params(&ctx, &raw.params)?;
        let mut model = match (raw.fields, raw.array) {
            (Some(fields), None) => read_explicit(&ctx, fields, params)?,
            (None, Some(array)) => read_array(&ctx, array, params)?,
            (Some(_), Some(_)) => {
                return Err(ctx.err("", "give either [fields] or [array], not both"))
            }
            (None, None) => {
                return Err(ctx.err(
                    "",
                    "missing [fields] (explicit K, charge, V) or [array] (a wire cell repeated over wires)",
                ))
            }
        };
        model.name = raw.name.unwrap_or_else(|| file.to_string());
        model.symmetries = symmetry::read_symmetries(&ctx, &raw.symmetry, &model.cell_k)?;
        model.terms = read_terms(&ctx, &model, &raw.term)?;
        model.competitors = read_competitors(&ctx, raw.competitors.as_ref())?;
        check_competitor_range(&ctx, &model)?;
        model.flow_table = raw.flow;
        model.scan_table = raw.scan;
        Ok(model)
    }

    /// Number of fields in one wire cell (all fields for explicit models).
    pub fn cell_fields(&self) -> usize {
        self.cell_k.len()
    }

    /// Parameter point from the defaults with `name=value` overrides.
    /// `origin` names where the overrides came from (e.g. `--set`).
    pub fn point_with(
        &self,
        overrides: &[(String, f64)],
        origin: &str,
    ) -> Result<Vec<f64>, InputError> {
        let mut point = self.params.defaults().to_vec();
        for (i, (name, value)) in overrides.iter().enumerate() {
            if let Some((_, first)) = overrides[..i].iter().find(|(n, _)| n == name) {
                return Err(InputError::new(
                    "command line",
                    origin,
                    format!("`{name}` is given twice ({origin} {name}={first} and {origin} {name}={value}); give each parameter once"),
                ));
            }
            let slot = self.params.index(name).ok_or_else(|| {
                let known = if self.params.is_empty() {
                    "the model has no parameters".to_string()
                } else {
                    format!("known parameters: {}", self.params.names().join(", "))
                };
                InputError::new(
                    "command line",
                    origin,
                    format!("unknown parameter `{name}` ({known})"),
                )
            })?;
            if !value.is_finite() {
                return Err(InputError::new(
                    "command line",
                    origin,
                    format!("`{name}` must be a finite number"),
                ));
            }
            point[slot] = *value;
        }
        Ok(point)
    }

    /// True for `wires = "infinite"`.
    pub fn is_infinite(&self) -> bool {
        matches!(
            self.structure,
            Structure::Array {
                wires: Wires::Infinite,
                ..
            }
        )
    }

    /// Largest wire separation of an interaction block or a term (0 for
    /// explicit models).
    pub fn range(&self) -> usize {
        let terms = self.terms.iter().map(|t| t.range()).max().unwrap_or(0);
        terms.max(self.v_blocks.len().saturating_sub(1))
    }

    /// The same array with another number of wires (the boundary is kept).
    /// `key` names where the number came from (e.g. `--wires`) in messages.
    pub fn with_wires(&self, wires: Wires, key: &str) -> Result<Model, InputError> {
        let Structure::Array { boundary, .. } = self.structure else {
            return Err(InputError::new(
                "command line",
                key,
                format!(
                    "{} is an explicit model ([fields]); a number of wires needs an [array] model",
                    self.file
                ),
            ));
        };
        let ctx = Ctx::new("command line");
        match wires {
            Wires::Finite(0) => return Err(ctx.err(key, "a number of wires must be at least 1")),
            Wires::Finite(w) => {
                check_size(&ctx, wires, self.cell_fields(), key)?;
                check_range_fits(
                    &ctx,
                    w,
                    boundary,
                    self.v_blocks.len() - 1,
                    key,
                    "the interaction range",
                )?;
                for t in &self.terms {
                    if w <= t.range() {
                        return Err(ctx.err(
                            key,
                            format!(
                                "term \"{}\" reaches wire offset {}, which does not fit an array of {w} wires",
                                t.name,
                                t.range()
                            ),
                        ));
                    }
                }
            }
            Wires::Infinite => {
                for t in &self.terms {
                    check_infinite_range(
                        &Ctx::new(&self.file),
                        t.range(),
                        &format!("term \"{}\"", t.name),
                    )?;
                }
            }
        }
        let mut m = self.clone();
        m.structure = Structure::Array { wires, boundary };
        Ok(m)
    }

    /// Every value evaluated at a parameter point that is not checked where
    /// it is used (momenta, and each term's coupling and phase) must be
    /// finite there, and the momentum period finite and positive; the error
    /// names the first key that is not. V is checked
    /// when it is evaluated, extra dimensions by
    /// [`crate::core::system::System::extra_dimensions`].
    pub fn check_point(&self, point: &[f64]) -> Result<(), InputError> {
        let base = match self.structure {
            Structure::Explicit => "fields",
            Structure::Array { .. } => "array",
        };
        let vectors = [
            (self.momentum.as_ref(), "momentum"),
            (self.momentum_per_wire.as_ref(), "momentum_per_wire"),
        ];
        let mut checks: Vec<(String, &Scalar)> = Vec::new();
        for (v, name) in vectors {
            for (i, s) in v.into_iter().flatten().enumerate() {
                checks.push((format!("{base}.{name}[{i}]"), s));
            }
        }
        self.check_last_momentum(point)?;
        self.check_period(point, base)?;
        for t in &self.terms {
            checks.push((format!("term \"{}\".coupling", t.name), &t.coupling));
            checks.push((format!("term \"{}\".phase", t.name), &t.phase));
        }
        for (key, s) in checks {
            let x = s.eval(point);
            if !x.is_finite() {
                return Err(InputError::new(
                    &self.file,
                    key,
                    format!(
                        "must be a finite number, found {x} at {}",
                        self.params.describe(point)
                    ),
                ));
            }
        }
        Ok(())
    }

    /// The last wire's momentum, base + (W - 1) shift, must stay finite
    /// too (W: the array's wires, or the stand-in ring of an infinite one).
    fn check_last_momentum(&self, point: &[f64]) -> Result<(), InputError> {
        let (Some(base), Some(shift), Structure::Array { wires, .. }) =
            (&self.momentum, &self.momentum_per_wire, &self.structure)
        else {
            return Ok(());
        };
        let w = match wires {
            Wires::Finite(w) => *w,
            Wires::Infinite => self.stand_in_wires(),
        };
        for (c, (b, s)) in base.iter().zip(shift).enumerate() {
            let last = b.eval(point) + (w.saturating_sub(1)) as f64 * s.eval(point);
            if b.eval(point).is_finite() && s.eval(point).is_finite() && !last.is_finite() {
                return Err(InputError::new(
                    &self.file,
                    format!("array.momentum_per_wire[{c}]"),
                    format!(
                        "makes the momentum of wire {} non-finite ({last}) at {}",
                        w.saturating_sub(1),
                        self.params.describe(point)
                    ),
                ));
            }
        }
        Ok(())
    }

    /// `momentum_period` (of `[fields]` or `[array]`: `base`) must be
    /// finite and positive at the point.
    fn check_period(&self, point: &[f64], base: &str) -> Result<(), InputError> {
        let Some(g) = &self.momentum_period else {
            return Ok(());
        };
        let x = g.eval(point);
        if x.is_finite() && x > 0.0 {
            return Ok(());
        }
        Err(InputError::new(
            &self.file,
            format!("{base}.momentum_period"),
            format!(
                "must be a finite number > 0 (the reciprocal lattice vector G; momenta are conserved modulo G), found {x} at {}",
                self.params.describe(point)
            ),
        ))
    }

    /// The reciprocal lattice vector G at a point, when the model gives
    /// `momentum_period` (finite and positive once [`Model::check_point`]
    /// has passed).
    pub fn momentum_period_at(&self, point: &[f64]) -> Option<f64> {
        self.momentum_period.as_ref().map(|g| g.eval(point))
    }

    /// Index of the first term marked as the target, if any.
    pub fn target(&self) -> Option<usize> {
        self.terms.iter().position(|t| t.target)
    }

    /// Indices of every term marked as a target (any number; two or more
    /// must pin together, see [`crate::pinned::set::check_targets`]).
    pub fn targets(&self) -> Vec<usize> {
        (0..self.terms.len())
            .filter(|&i| self.terms[i].target)
            .collect()
    }
}

fn read_params(ctx: &Ctx, table: &toml::Table) -> Result<ParamSet, InputError> {
    let mut pairs = Vec::new();
    for (name, value) in table {
        let key = format!("params.{name}");
        if !values::is_identifier(name) {
            return Err(ctx.err(
                &key,
                "a parameter name must start with a letter and use letters, digits and _",
            ));
        }
        if expr::RESERVED_NAMES.contains(&name.as_str()) {
            return Err(ctx.err(
                &key,
                format!("`{name}` is a built-in name of expressions (a constant or function); choose another parameter name"),
            ));
        }
        pairs.push(read_param(ctx, value, &key).map(|(x, l)| (name.clone(), x, l))?);
    }
    Ok(ParamSet::with_labels(pairs))
}

/// One parameter: a number, or `{ value = 0.8, label = "λ", unit = "meV" }`.
fn read_param(ctx: &Ctx, value: &toml::Value, key: &str) -> Result<(f64, ParamLabel), InputError> {
    let Some(table) = value.as_table() else {
        return Ok((values::number(ctx, value, key)?, ParamLabel::default()));
    };
    if let Some(k) = table
        .keys()
        .find(|k| !["value", "label", "unit"].contains(&k.as_str()))
    {
        return Err(ctx.err(
            &format!("{key}.{k}"),
            "unknown key (a parameter table has value, label, unit)",
        ));
    }
    let x = match table.get("value") {
        Some(v) => values::number(ctx, v, &format!("{key}.value"))?,
        None => {
            return Err(ctx.err(
                key,
                "a parameter table needs `value` (the default value), e.g. { value = 0.8, label = \"λ\" }",
            ))
        }
    };
    let text = |field: &str| -> Result<Option<String>, InputError> {
        match table.get(field) {
            None => Ok(None),
            Some(toml::Value::String(s)) if s.chars().any(char::is_control) => Err(ctx.err(
                &format!("{key}.{field}"),
                "expected a string on one line (no control characters)",
            )),
            Some(toml::Value::String(s)) => Ok(Some(s.clone())),
            Some(other) => Err(ctx.err(
                &format!("{key}.{field}"),
                format!("expected a string, found {}", other.type_str()),
            )),
        }
    };
    let label = ParamLabel {
        label: text("label")?,
        unit: text("unit")?,
    };
    Ok((x, label))
}

fn read_explicit(ctx: &Ctx, f: RawFields, params: ParamSet) -> Result<Model, InputError> {
    let k = values::int_matrix(ctx, &f.k, "fields.K")?;
    values::check_symmetric_int(ctx, &k, "fields.K")?;
    check_entries(ctx, &k, "fields.K")?;
    let n = k.len();
    if n > MAX_FIELDS {
        return Err(ctx.err(
            "fields.K",
            format!("a model may have at most {MAX_FIELDS} fields, found {n}"),
        ));
    }
    let charge = values::int_vector(ctx, &f.charge, "fields.charge", n, "one per field")?;
    let v = values::scalar_matrix(ctx, &f.v, "fields.V", &params, n)?;
    let momentum = f
        .momentum
        .as_ref()
        .map(|m| values::scalar_vector(ctx, m, "fields.momentum", &params, n))
        .transpose()?;
    let momentum_period = read_period(
        ctx,
        &f.momentum_period,
        "fields",
        momentum.is_some(),
        &params,
    )?;
    let field_wires = read_field_wires(ctx, &f.wires, f.boundary.as_deref(), n)?;
    Ok(Model {
        name: String::new(),
        file: ctx.file.clone(),
        params,
        structure: Structure::Explicit,
        cell_k: k,
        cell_charge: charge,
        v_blocks: vec![v],
        momentum,
        momentum_per_wire: None,
        momentum_period,
        terms: Vec::new(),
        field_wires,
        flow_table: None,
        scan_table: None,
        symmetries: Vec::new(),
        competitors: CompetitorDefaults::default(),
    })
}

/// `fields.wires` (one wire index per field, every wire 0..W used) and
/// `fields.boundary` ("open" or "periodic", only with `wires`).
fn read_field_wires(
    ctx: &Ctx,
    wires: &Option<toml::Value>,
    boundary: Option<&str>,
    n: usize,
) -> Result<Option<FieldWires>, InputError> {
    let Some(v) = wires else {
        if boundary.is_some() {
            return Err(ctx.err(
                "fields.boundary",
                "needs fields.wires (the wire of every field); without it the fields are not grouped by wire",
            ));
        }
        return Ok(None);
    };
    let raw = values::int_vector(ctx, v, "fields.wires", n, "one wire index per field")?;
    // Every wire holds a field, so there are at most n wires.
    if let Some((i, w)) = raw
        .iter()
        .enumerate()
        .find(|(_, w)| !(0..n as i64).contains(*w))
    {
        return Err(ctx.err(
            &format!("fields.wires[{i}]"),
            format!(
                "expected a wire index from 0 to {} (the number of fields less one), found {w}",
                n - 1
            ),
        ));
    }
    let count = raw.iter().copied().max().unwrap_or(-1) + 1;
    let mut used = vec![false; count as usize];
    for w in &raw {
        used[*w as usize] = true;
    }
    if let Some(gap) = used.iter().position(|u| !u) {
        return Err(ctx.err(
            "fields.wires",
            format!(
                "wires are numbered 0 to {} without gaps, but no field is on wire {gap}",
                count - 1
            ),
        ));
    }
    let periodic = match boundary {
        None | Some("open") => false,
        Some("periodic") => true,
        Some(other) => {
            return Err(ctx.err(
                "fields.boundary",
                format!("expected \"open\" or \"periodic\", found \"{other}\""),
            ))
        }
    };
    Ok(Some(FieldWires {
        wire: raw.iter().map(|w| *w as usize).collect(),
        wires: count as usize,
        periodic,
    }))
}

fn read_array(ctx: &Ctx, a: RawArray, params: ParamSet) -> Result<Model, InputError> {
    let wires = read_wires(ctx, &a.wires)?;
    let boundary = read_boundary(ctx, wires, a.boundary.as_deref())?;
    let k = values::int_matrix(ctx, &a.k, "array.K")?;
    values::check_symmetric_int(ctx, &k, "array.K")?;
    check_entries(ctx, &k, "array.K")?;
    let n = k.len();
    check_size(ctx, wires, n, "array.wires")?;
    let charge = values::int_vector(
        ctx,
        &a.charge,
        "array.charge",
        n,
        "one per field of the wire cell",
    )?;
    let v_blocks = read_blocks(ctx, &a.v, &params, n)?;
    let (momentum, momentum_per_wire) = read_array_momenta(ctx, &a, &params, n)?;
    let momentum_period = read_period(
        ctx,
        &a.momentum_period,
        "array",
        momentum.is_some(),
        &params,
    )?;
    if let Wires::Finite(w) = wires {
        check_range_fits(
            ctx,
            w,
            boundary,
            v_blocks.len() - 1,
            "array.V",
            "interaction range",
        )?;
    }
    Ok(Model {
        name: String::new(),
        file: ctx.file.clone(),
        params,
        structure: Structure::Array { wires, boundary },
        cell_k: k,
        cell_charge: charge,
        v_blocks,
        momentum,
        momentum_per_wire,
        momentum_period,
        terms: Vec::new(),
        field_wires: None,
        flow_table: None,
        scan_table: None,
        symmetries: Vec::new(),
        competitors: CompetitorDefaults::default(),
    })
}

/// `array.momentum` and `array.momentum_per_wire` (which needs the first).
#[allow(clippy::type_complexity)]
fn read_array_momenta(
    ctx: &Ctx,
    a: &RawArray,
    params: &ParamSet,
    n: usize,
) -> Result<(Option<Vec<Scalar>>, Option<Vec<Scalar>>), InputError> {
    let vec_opt = |v: &Option<toml::Value>, key: &str| {
        v.as_ref()
            .map(|m| values::scalar_vector(ctx, m, key, params, n))
            .transpose()
    };
    let momentum = vec_opt(&a.momentum, "array.momentum")?;
    let momentum_per_wire = vec_opt(&a.momentum_per_wire, "array.momentum_per_wire")?;
    if momentum_per_wire.is_some() && momentum.is_none() {
        return Err(ctx.err(
            "array.momentum_per_wire",
            "needs array.momentum (the momenta of wire 0) too",
        ));
    }
    Ok((momentum, momentum_per_wire))
}

/// `array.boundary`: periodic (the default) or open; an infinite array
/// has no ends.
fn read_boundary(ctx: &Ctx, wires: Wires, text: Option<&str>) -> Result<Boundary, InputError> {
    if wires == Wires::Infinite && text == Some("open") {
        return Err(ctx.err(
            "array.boundary",
            "an infinite array has no ends: leave out `boundary` (or write \"periodic\")",
        ));
    }
    match text {
        None | Some("periodic") => Ok(Boundary::Periodic),
        Some("open") => Ok(Boundary::Open),
        Some(other) => Err(ctx.err(
            "array.boundary",
            format!("expected \"periodic\" or \"open\", found \"{other}\""),
        )),
    }
}

/// `momentum_period` of `[fields]` or `[array]` (`base`): an expression for
/// the reciprocal lattice vector G, which needs the momenta it reduces.
/// That G is finite and positive is checked at each point
/// ([`Model::check_point`]).
fn read_period(
    ctx: &Ctx,
    v: &Option<toml::Value>,
    base: &str,
    has_momenta: bool,
    params: &ParamSet,
) -> Result<Option<Scalar>, InputError> {
    let Some(v) = v else {
        return Ok(None);
    };
    let key = format!("{base}.momentum_period");
    if !has_momenta {
        return Err(ctx.err(
            &key,
            format!("needs {base}.momentum too: the period G reduces momentum mismatches, and without momenta there are none"),
        ));
    }
    values::scalar(ctx, v, &key, params).map(Some)
}

fn read_wires(ctx: &Ctx, v: &toml::Value) -> Result<Wires, InputError> {
    match v {
        toml::Value::Integer(w) if *w >= 1 => Ok(Wires::Finite(*w as usize)),
        toml::Value::String(s) if s == "infinite" => Ok(Wires::Infinite),
        other => Err(ctx.err(
            "array.wires",
            format!("expected a positive integer or \"infinite\", found {other}"),
        )),
    }
}

/// Every entry within [`MAX_ENTRY`] in magnitude; `rows` are the rows of K,
/// or one row per wire offset of a term.
fn check_entries(ctx: &Ctx, rows: &[Vec<i64>], key: &str) -> Result<(), InputError> {
    for (i, row) in rows.iter().enumerate() {
        if let Some(j) = row.iter().position(|x| x.unsigned_abs() > MAX_ENTRY as u64) {
            let at = if rows.len() == 1 {
                format!("{key}[{j}]")
            } else {
                format!("{key}[{i}][{j}]")
            };
            return Err(ctx.err(
                &at,
                format!(
                    "entries must be at most {MAX_ENTRY} in magnitude, found {}",
                    row[j]
                ),
            ));
        }
    }
    Ok(())
}

/// At most [`MAX_FIELDS`] fields in all, checked before anything of that
/// size is built (`wires = 1000000000` must fail at once, not exhaust
/// memory); `key` names where the number of wires came from.
fn check_size(ctx: &Ctx, wires: Wires, cell: usize, key: &str) -> Result<(), InputError> {
    let Wires::Finite(w) = wires else {
        return Ok(());
    };
    if w.checked_mul(cell).is_none_or(|n| n > MAX_FIELDS) {
        let (key, what) = if cell > MAX_FIELDS {
            ("array.K", format!("{cell} fields per wire"))
        } else {
            (
                key,
                format!(
                    "{w} wires of {cell} field{} (at most {} wires)",
                    if cell == 1 { "" } else { "s" },
                    MAX_FIELDS / cell.max(1)
                ),
            )
        };
        return Err(ctx.err(
            key,
            format!("a model may have at most {MAX_FIELDS} fields in all, found {what}"),
        ));
    }
    Ok(())
}

/// A periodic array needs W > 2 R so that every pair of wires is coupled by
/// one block only; an open array needs W > R.
fn check_range_fits(
    ctx: &Ctx,
    wires: usize,
    boundary: Boundary,
    range: usize,
    key: &str,
    what: &str,
) -> Result<(), InputError> {
    let (ok, need) = match boundary {
        Boundary::Periodic => (wires > 2 * range || range == 0, 2 * range + 1),
        Boundary::Open => (wires > range, range + 1),
    };
    if ok {
        Ok(())
    } else {
        let b = if boundary == Boundary::Periodic {
            "periodic"
        } else {
            "open"
        };
        Err(ctx.err(
            key,
            format!("{what} {range} does not fit a {b} array of {wires} wires (needs at least {need} wires)"),
        ))
    }
}

/// Largest term range of an infinite array (its exact data is computed on
/// a periodic stand-in of 4 (R + 2) + 1 wires).
pub const MAX_INFINITE_TERM_RANGE: usize = 64;

fn check_infinite_range(ctx: &Ctx, range: usize, key: &str) -> Result<(), InputError> {
    if range > MAX_INFINITE_TERM_RANGE {
        return Err(ctx.err(
            key,
            format!(
                "the term reaches wire offset {range}; terms of an infinite array may reach at most offset {MAX_INFINITE_TERM_RANGE}"
            ),
        ));
    }
    Ok(())
}

fn read_blocks(
    ctx: &Ctx,
    table: &toml::Table,
    params: &ParamSet,
    n: usize,
) -> Result<Vec<Vec<Vec<Scalar>>>, InputError> {
    let mut by_sep: Vec<Option<Vec<Vec<Scalar>>>> = Vec::new();
    for (key, value) in table {
        let full = format!("array.V.{key}");
        let sep = values::offset_key(ctx, key, &full)?;
        // Missing blocks up to the largest separation are filled with zeros
        // below: refuse a separation no array within MAX_FIELDS can have
        // before allocating them.
        if sep.saturating_add(1).saturating_mul(n) > MAX_FIELDS {
            return Err(ctx.err(
                &full,
                format!(
                    "wire separation {sep} is beyond any array pinflow can compute (at most {MAX_FIELDS} fields in all, so at most {} wires of {n} fields)",
                    MAX_FIELDS / n.max(1)
                ),
            ));
        }
        let block = values::scalar_matrix(ctx, value, &full, params, n)?;
        if by_sep.len() <= sep {
            by_sep.resize(sep + 1, None);
        }
        by_sep[sep] = Some(block);
    }
    if by_sep.first().is_none_or(|b| b.is_none()) {
        return Err(ctx.err(
            "array.V",
            "missing block 0 (the intrawire forward scattering)",
        ));
    }
    Ok(by_sep
        .into_iter()
        .map(|b| b.unwrap_or_else(|| vec![vec![Scalar::Const(0.0); n]; n]))
        .collect())
}

fn read_terms(ctx: &Ctx, model: &Model, raw: &[RawTerm]) -> Result<Vec<TermSpec>, InputError> {
    let mut names = BTreeSet::new();
    let mut terms = Vec::with_capacity(raw.len());
    for t in raw {
        let key = format!("term \"{}\"", t.name.escape_debug());
        if t.name.trim().is_empty() {
            return Err(ctx.err("term.name", "a term needs a non-empty name"));
        }
        check_term_name(ctx, &t.name, &key)?;
        if !names.insert(t.name.clone()) {
            return Err(ctx.err(&key, "duplicate term name (names must be unique)"));
        }
        terms.push(read_term(ctx, model, t, &key)?);
    }
    tie_groups(ctx, raw, &mut terms)?;
    Ok(terms)
}

/// The entries of a term's parts, and of its lattice vector l = K m when
/// it is given by particle content m, within [`MAX_ENTRY`] (docs/physics.md
/// section 1: l = K m); and not all zero.
fn check_parts(
    ctx: &Ctx,
    model: &Model,
    content: Content,
    parts: &[(usize, Vec<i64>)],
    vkey: &str,
    table: bool,
) -> Result<(), InputError> {
    for (off, v) in parts {
        let at = if table {
            format!("{vkey}.{off}")
        } else {
            vkey.to_string()
        };
        check_entries(ctx, std::slice::from_ref(v), &at)?;
        if content == Content::Particles {
            check_k_times(ctx, &model.cell_k, v, &at)?;
        }
    }
    if parts.iter().all(|(_, v)| v.iter().all(|x| *x == 0)) {
        return Err(ctx.err(vkey, "the zero vector is not a cosine term"));
    }
    Ok(())
}

/// Every entry of l = K m within [`MAX_ENTRY`] (K and m are, but their
/// product can reach 2^40 x fields).
fn check_k_times(ctx: &Ctx, k: &[Vec<i64>], m: &[i64], key: &str) -> Result<(), InputError> {
    for (i, row) in k.iter().enumerate() {
        let l: i128 = row
            .iter()
            .zip(m)
            .map(|(a, b)| *a as i128 * *b as i128)
            .sum();
        if l.unsigned_abs() > MAX_ENTRY as u128 {
            return Err(ctx.err(
                key,
                format!(
                    "its lattice vector l = K m has entry l[{i}] = {l}; entries must be at most {MAX_ENTRY} in magnitude"
                ),
            ));
        }
    }
    Ok(())
}

/// Term names become CSV column names and cells (`points.csv`, shard
/// files, `--format csv`), read back line by line: they may not hold a
/// comma, a double quote, a control character (newline, tab) or
/// surrounding spaces (docs/model-format.md).
fn check_term_name(ctx: &Ctx, name: &str, key: &str) -> Result<(), InputError> {
    let bad = name
        .chars()
        .find(|c| *c == ',' || *c == '"' || c.is_control());
    if let Some(c) = bad {
        return Err(ctx.err(
            key,
            format!(
                "a term name may not contain {} (names are CSV columns; use letters, digits, spaces and other punctuation)",
                match c {
                    ',' => "a comma".to_string(),
                    '"' => "a double quote".to_string(),
                    c => format!("the control character {:?}", c),
                }
            ),
        ));
    }
    if name.trim() != name {
        return Err(ctx.err(key, "a term name may not start or end with a space"));
    }
    Ok(())
}

fn read_term(ctx: &Ctx, model: &Model, t: &RawTerm, key: &str) -> Result<TermSpec, InputError> {
    let (content, parts, vkey) = read_parts(ctx, model, t, key)?;
    check_term_fits(ctx, model, &parts, &vkey)?;
    let scalar =
        |v: &Option<toml::Value>, name: &str, default: f64| -> Result<Scalar, InputError> {
            match v {
                None => Ok(Scalar::Const(default)),
                Some(v) => values::scalar(ctx, v, &format!("{key}.{name}"), &model.params),
            }
        };
    let (allowed_charge, allowed_charges) = read_allowed(ctx, model, t, key)?;
    Ok(TermSpec {
        name: t.name.clone(),
        content,
        parts,
        coupling: scalar(&t.coupling, "coupling", 0.1)?,
        phase: scalar(&t.phase, "phase", 0.0)?,
        extra_dimension: scalar(&t.extra_dimension, "extra_dimension", 0.0)?,
        extra_spin: values::rational_opt(ctx, t.extra_spin.as_ref(), &format!("{key}.extra_spin"))?,
        target: t.target.unwrap_or(false),
        allowed_charge,
        allowed_charges,
        group: read_group(ctx, t, key)?,
    })
}

/// How a term's vectors are read, its parts per wire offset, and the key.
type Parts = (Content, Vec<(usize, Vec<i64>)>, String);

/// `particles` or `vector`: how to read them, the parts per wire offset
/// (entries within [`MAX_ENTRY`], also those of l = K m; not all zero) and
/// the key they came from.
fn read_parts(ctx: &Ctx, model: &Model, t: &RawTerm, key: &str) -> Result<Parts, InputError> {
    let (content, value, sub) = match (&t.particles, &t.vector) {
        (Some(p), None) => (Content::Particles, p, "particles"),
        (None, Some(v)) => (Content::Vector, v, "vector"),
        (Some(_), Some(_)) => {
            return Err(ctx.err(key, "give either `particles` or `vector`, not both"))
        }
        (None, None) => {
            return Err(ctx.err(
                key,
                "missing `particles` (particle content m) or `vector` (lattice vector l)",
            ))
        }
    };
    let vkey = format!("{key}.{sub}");
    let n = model.cell_fields();
    let parts = match model.structure {
        Structure::Explicit => vec![(
            0,
            values::int_vector(ctx, value, &vkey, n, "one per field")?,
        )],
        Structure::Array { .. } => values::offset_vectors(ctx, value, &vkey, n)?,
    };
    check_parts(ctx, model, content, &parts, &vkey, value.is_table())?;
    Ok((content, parts, vkey))
}

/// The term's wire offsets fit the array (and an infinite array's limit).
fn check_term_fits(
    ctx: &Ctx,
    model: &Model,
    parts: &[(usize, Vec<i64>)],
    vkey: &str,
) -> Result<(), InputError> {
    let range = parts.iter().map(|p| p.0).max().unwrap_or(0);
    if model.is_infinite() {
        check_infinite_range(ctx, range, vkey)?;
    }
    if let Structure::Array {
        wires: Wires::Finite(w),
        ..
    } = model.structure
    {
        if w <= range {
            return Err(ctx.err(
                vkey,
                format!("the term reaches wire offset {range}, which does not fit an array of {w} wires"),
            ));
        }
    }
    Ok(())
}

/// `allowed_charge`: a number (the electric charge) or a table by symmetry
/// name, `charge` meaning the electric charge and every other key a U(1)
/// of the model.
type Allowed = (Rational, Vec<(String, Rational)>);

fn read_allowed(ctx: &Ctx, model: &Model, t: &RawTerm, key: &str) -> Result<Allowed, InputError> {
    let akey = format!("{key}.allowed_charge");
    let Some(toml::Value::Table(table)) = &t.allowed_charge else {
        let electric = values::rational_opt(ctx, t.allowed_charge.as_ref(), &akey)?;
        return Ok((electric, Vec::new()));
    };
    let mut electric = Rational::zero();
    let mut others = Vec::new();
    for (name, v) in table {
        let k = format!("{akey}.{name}");
        let q = values::rational_opt(ctx, Some(v), &k)?;
        if name == "charge" {
            electric = q;
            continue;
        }
        match model.symmetries.iter().find(|s| &s.name == name) {
            Some(s) if s.is_u1() => others.push((name.clone(), q)),
            Some(_) => {
                return Err(ctx.err(&k, format!("`{name}` is a Z_n symmetry, which has no charge; only U(1) symmetries (`charge = [...]`) and `charge` (electric) can be named")))
            }
            None => {
                let u1: Vec<&str> = model.symmetries.iter().filter(|s| s.is_u1()).map(|s| s.name.as_str()).collect();
                return Err(ctx.err(&k, format!("unknown symmetry `{name}`; expected `charge` (electric) or a U(1) of the model ({})", if u1.is_empty() { "none declared".to_string() } else { u1.join(", ") })));
            }
        }
    }
    Ok((electric, others))
}

fn read_group(ctx: &Ctx, t: &RawTerm, key: &str) -> Result<Option<String>, InputError> {
    match &t.group {
        Some(g) if g.trim().is_empty() => {
            Err(ctx.err(&format!("{key}.group"), "a group needs a non-empty name"))
        }
        g => Ok(g.clone()),
    }
}

/// Members of one group flow from one bare coupling: a member that omits
/// `coupling` takes the group's; one that gives another is refused.
fn tie_groups(ctx: &Ctx, raw: &[RawTerm], terms: &mut [TermSpec]) -> Result<(), InputError> {
    let mut given: std::collections::BTreeMap<String, (usize, Scalar)> = Default::default();
    for (i, (r, t)) in raw.iter().zip(terms.iter()).enumerate() {
        let (Some(g), Some(_)) = (&t.group, &r.coupling) else {
            continue;
        };
        match given.get(g) {
            Some((j, c)) if c.text() != t.coupling.text() => {
                return Err(ctx.err(
                    &format!("term \"{}\".coupling", t.name),
                    format!("differs from the coupling of group \"{g}\" ({} in term \"{}\"); members of a group flow from one coupling: give it once or equally", c.text(), terms[*j].name),
                ))
            }
            Some(_) => {}
            None => {
                given.insert(g.clone(), (i, t.coupling.clone()));
            }
        }
    }
    for (r, t) in raw.iter().zip(terms.iter_mut()) {
        if let (Some(g), None) = (&t.group, &r.coupling) {
            if let Some((_, c)) = given.get(g) {
                t.coupling = c.clone();
            }
        }
    }
    Ok(())
}

/// `[competitors] range` against the model's layout, so that an error names
/// the file and key (as `--competitor-range` is checked when the hunt's
/// window is chosen): arrays only, and at most the wires of a finite array.
fn check_competitor_range(ctx: &Ctx, model: &Model) -> Result<(), InputError> {
    let Some(r) = model.competitors.range else {
        return Ok(());
    };
    let key = "competitors.range";
    match model.structure {
        Structure::Explicit => Err(ctx.err(
            key,
            "applies to arrays of wires only; this model gives [fields], and all of its fields are searched",
        )),
        Structure::Array {
            wires: Wires::Finite(w),
            ..
        } if r > w => Err(ctx.err(
            key,
            format!("expected at most {w} (the number of wires of the array), found {r}"),
        )),
        Structure::Array { .. } => Ok(()),
    }
}

/// The `[competitors]` table: `delta`, `coupling` (numbers) and `range`
/// (an integer >= 1).
fn read_competitors(
    ctx: &Ctx,
    table: Option<&toml::Table>,
) -> Result<CompetitorDefaults, InputError> {
    let mut out = CompetitorDefaults::default();
    let Some(table) = table else {
        return Ok(out);
    };
    for (name, v) in table {
        let key = format!("competitors.{name}");
        match name.as_str() {
            "delta" => {
                let x = values::number(ctx, v, &key)?;
                if x <= 0.0 {
                    return Err(
                        ctx.err(&key, format!("expected a scaling dimension > 0, found {x}"))
                    );
                }
                out.delta = Some(x);
            }
            "coupling" => out.coupling = Some(values::number(ctx, v, &key)?),
            "range" => match v {
                toml::Value::Integer(r) if *r >= 1 => out.range = Some(*r as usize),
                other => {
                    return Err(ctx.err(
                        &key,
                        format!(
                        "expected a number of consecutive wires (an integer >= 1), found {other}"
                    ),
                    ))
                }
            },
            _ => return Err(ctx.err(&key, "unknown key; expected `delta`, `coupling` or `range`")),
        }
    }
    Ok(out)
}
