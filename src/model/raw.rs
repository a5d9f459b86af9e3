//! The first stage of reading a model: plain serde structs that mirror the
//! TOML file. Fields whose shape varies (numbers or expressions, lists or
//! per-wire tables) are kept as [`toml::Value`] and checked in the second
//! stage ([`super::Model::from_raw`]), which names the key of every problem.

use serde::Deserialize;
use toml::{Table, Value};

/// A whole model file.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawModel {
    /// Free text naming the model.
    pub name: Option<String>,
    /// Free text describing the model.
    pub description: Option<String>,
    /// Parameter names with default values.
    #[serde(default)]
    pub params: Table,
    /// Explicit form: the fields of the whole system.
    pub fields: Option<RawFields>,
    /// Array form: a wire cell repeated over wires.
    pub array: Option<RawArray>,
    /// Candidate cosine terms.
    #[serde(default)]
    pub term: Vec<RawTerm>,
    /// Defaults for `pinflow flow`.
    pub flow: Option<Table>,
    /// Defaults for `pinflow scan`.
    pub scan: Option<Table>,
    /// Symmetries: conserved U(1) charges and Z_n maps of the fields.
    #[serde(default)]
    pub symmetry: Vec<RawSymmetry>,
    /// Defaults of `--competitors` (hunted competitors in the flow).
    pub competitors: Option<Table>,
}

/// One `[[symmetry]]`: a U(1) (`charge`) or a Z_n (`map`, `shift`, `order`).
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawSymmetry {
    /// Unique name.
    pub name: String,
    /// U(1): the charge of every (cell) field.
    pub charge: Option<Value>,
    /// Z_n: the integer matrix W of phi -> W phi + 2 pi shift / order.
    pub map: Option<Value>,
    /// Z_n: the integer shift (default zero).
    pub shift: Option<Value>,
    /// Z_n: the order n.
    pub order: Option<Value>,
}

/// `[fields]`: the explicit form.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawFields {
    /// Integer symmetric K matrix.
    #[serde(rename = "K")]
    pub k: Value,
    /// Integer charge vector.
    pub charge: Value,
    /// Forward-scattering matrix: numbers or expressions.
    #[serde(rename = "V")]
    pub v: Value,
    /// Optional momentum per field (numbers or expressions).
    pub momentum: Option<Value>,
    /// Optional reciprocal lattice vector G: momenta are conserved modulo G.
    pub momentum_period: Option<Value>,
    /// Optional wire of every field (0, 1, ...): groups the fields by wire,
    /// so that the flow's closure range applies as in an array.
    pub wires: Option<Value>,
    /// With `wires`: "open" (default) or "periodic" (wire W-1 neighbours
    /// wire 0 when the closure range measures a term's width).
    pub boundary: Option<String>,
}

/// `[array]`: the array form.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawArray {
    /// Number of wires, or the string "infinite".
    pub wires: Value,
    /// "periodic" (default) or "open".
    pub boundary: Option<String>,
    /// One wire's K matrix.
    #[serde(rename = "K")]
    pub k: Value,
    /// One wire's charge vector.
    pub charge: Value,
    /// Forward-scattering blocks by wire separation.
    #[serde(rename = "V")]
    pub v: Table,
    /// Momentum per field of wire 0.
    pub momentum: Option<Value>,
    /// Momentum added once per wire index (e.g. from a magnetic flux).
    pub momentum_per_wire: Option<Value>,
    /// Optional reciprocal lattice vector G: momenta are conserved modulo G.
    pub momentum_period: Option<Value>,
}

/// One `[[term]]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawTerm {
    /// Unique name.
    pub name: String,
    /// Particle content m (l = K m): a list, or per wire offset a table.
    pub particles: Option<Value>,
    /// Lattice vector l: a list, or per wire offset a table.
    pub vector: Option<Value>,
    /// Bare coupling y (number or expression).
    pub coupling: Option<Value>,
    /// Phase chi of the cosine, in radians (number or expression).
    pub phase: Option<Value>,
    /// Fixed extra scaling dimension from sectors the bosons do not describe.
    pub extra_dimension: Option<Value>,
    /// Fixed extra conformal spin from such sectors (number or "p/q").
    pub extra_spin: Option<Value>,
    /// Marks the term the model is meant to realise.
    pub target: Option<bool>,
    /// Charge the term is allowed to carry (default 0), e.g. 2 for pairing
    /// from a nearby superconductor: a number (the electric charge) or a
    /// table by symmetry name (`{ charge = 2, Sz = 0 }`).
    pub allowed_charge: Option<Value>,
    /// Terms with the same group flow from one bare coupling and phase (the
    /// members of a symmetry orbit).
    pub group: Option<String>,
}
