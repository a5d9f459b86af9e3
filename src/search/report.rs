//! The report of `pinflow hunt` (text, JSON, CSV, Markdown, LaTeX), its
//! certificate line, and the `--emit-terms` TOML blocks.
//!
//! Invariants: the report is plain data built once by [`super::hunt`];
//! rendering only formats it (no computation), and the JSON field and CSV
//! column names are interfaces. `--emit-terms` never reuses a name of the
//! model's terms and never repeats an operator that is already a term.

use std::collections::BTreeMap;

use serde::Serialize;

use super::window::Window;
use super::{ChargeFilter, HuntOptions, MomentumFilter, SpinFilter, BOUND_TOLERANCE};
use crate::core::system::System;
use crate::error::Error;
use crate::model::{Boundary, Model, Structure};
use crate::output::{self, Format, Report, Table};

/// One operator found (the canonical member of its sign and translation
/// class).
#[derive(Debug, Clone, Serialize)]
pub struct Operator {
    /// Particle content m over the search window's fields (wire-major,
    /// support starting at the window's first wire).
    pub particles: Vec<i64>,
    /// Arrays: m by wire offset from the first wire, zero wires omitted
    /// (the form of a model file's `particles = { 0 = [...], ... }`).
    pub particles_by_wire: Option<BTreeMap<String, Vec<i64>>>,
    /// Lattice vector l = K m over the window's fields.
    pub vector: Vec<i64>,
    /// Scaling dimension (1/2) l^T D l.
    pub dimension: f64,
    /// Tree-level RG eigenvalue 2 - Delta.
    pub rg_eigenvalue: f64,
    /// Conformal spin (1/2) m^T K m, exact ("p/q").
    pub spin: String,
    /// Charge t.m.
    pub charge: i64,
    /// Number of consecutive wires the operator touches (1 for explicit models).
    pub wires: usize,
    /// Momentum mismatch (units of the inverse cutoff), when the model gives momenta.
    pub momentum: Option<f64>,
    /// The model term this operator is (up to sign and translation), if any.
    pub model_term: Option<String>,
    /// Model terms with a translate that does not commute with it.
    pub competitors: Vec<String>,
    /// Charges under the model's U(1) symmetries in use, by name.
    #[serde(skip_serializing_if = "BTreeMap::is_empty")]
    pub charges: BTreeMap<String, i64>,
    /// 1-based number of its orbit under the Z_n symmetries in use (null
    /// when none is in use).
    pub orbit: Option<usize>,
}

/// Size of the search, estimated before enumerating.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct Estimate {
    /// Lattice points in the ellipsoid from its volume (both signs).
    pub volume: f64,
    /// Nodes of the search tree from random probes (one sign).
    pub tree: f64,
    /// The limit above which the search is refused without --force.
    pub limit: f64,
}

impl Estimate {
    /// The larger of the two estimates.
    pub fn points(&self) -> f64 {
        self.volume.max(self.tree)
    }
}

/// The whole `hunt` report.
#[derive(Debug, Clone, Serialize)]
pub struct HuntReport {
    /// Model name.
    pub model: String,
    /// Parameter point.
    pub parameters: serde_json::Map<String, serde_json::Value>,
    /// Fields of the whole system.
    pub fields: usize,
    /// Wires (arrays) or null.
    pub wires: Option<usize>,
    /// "periodic" or "open" (arrays) or null.
    pub boundary: Option<String>,
    /// Arrays: R, the most consecutive wires an operator may touch.
    pub range: Option<usize>,
    /// Arrays: first wire of the search window.
    pub window_first_wire: Option<usize>,
    /// Dimension of the searched lattice (fields in the window).
    pub search_fields: usize,
    /// The bound: operators with Delta <= max_dim (1 + bound_tolerance).
    pub max_dim: f64,
    /// Relative tolerance on the bound.
    pub bound_tolerance: f64,
    /// Charge filter (null: any charge).
    pub charge: Option<i64>,
    /// Spin filter: "0" or "any".
    pub spin: String,
    /// Momentum filter: "conserved", "any", or null without momenta.
    pub momentum: Option<String>,
    /// |k| below which the momentum counts as conserved (null when the
    /// momenta are rational and conservation is checked exactly).
    pub momentum_tolerance: Option<f64>,
    /// The momentum period G (`momentum_period`) at the point: momenta are
    /// conserved modulo G and `momentum` is reduced to (-G/2, G/2]; null
    /// without one.
    pub momentum_period: Option<f64>,
    /// Every momentum (and the momentum period, if any) is a rational p/q
    /// (q <= 10^4) at this point and conservation is checked exactly.
    pub momentum_exact: bool,
    /// Size estimates.
    pub estimate: Estimate,
    /// Lattice points examined (nodes of the enumeration tree).
    pub examined: u64,
    /// Lattice points in the window with Delta <= the bound, one per sign,
    /// before the charge, spin, translation and momentum filters.
    pub candidates: u64,
    /// The operators, by dimension, then by particle content (lexicographic,
    /// largest first).
    pub operators: Vec<Operator>,
    /// The certificate line.
    pub certificate: String,
    /// Limits of the method and warnings.
    pub notes: Vec<String>,
    /// The model's symmetries that filtered the operators at this point.
    pub symmetries: Vec<String>,
    /// Orbits of the operators under the Z_n symmetries in use (empty
    /// when none is in use).
    pub orbits: Vec<super::OrbitReport>,
    /// Operators removed because their symmetrised orbit sum vanishes.
    pub removed_by_symmetry: usize,
    /// The search stopped at [`super::HuntOptions::stop_above`]: more
    /// operators than that match, and none are listed.
    #[serde(skip)]
    pub truncated: bool,
}

/// "periodic", "open" or "infinite" for arrays, None for explicit models.
fn boundary_word(sys: &System, infinite: bool) -> Option<String> {
    match sys.model.structure {
        _ if infinite => Some("infinite".to_string()),
        Structure::Array { boundary, .. } => Some(match boundary {
            Boundary::Periodic => "periodic".to_string(),
            Boundary::Open => "open".to_string(),
        }),
        Structure::Explicit => None,
    }
}

/// The JSON words of the spin and momentum filters.
fn filter_words(spin: SpinFilter, momentum: Option<MomentumFilter>) -> (String, Option<String>) {
    (
        match spin {
            SpinFilter::Zero => "0".into(),
            SpinFilter::Any => "any".into(),
            SpinFilter::Model => "model".into(),
        },
        momentum.map(|m| match m {
            MomentumFilter::Conserved => "conserved".into(),
            MomentumFilter::Any => "any".into(),
        }),
    )
}

impl HuntReport {
    /// Assemble the report (called by [`super::hunt`]).
    #[allow(clippy::too_many_arguments)]
    // Over 60 lines only because it is one struct literal, field by field.
    pub(crate) fn new(
        sys: &System,
        point: &[f64],
        opts: &HuntOptions,
        window: &Window,
        momentum: Option<MomentumFilter>,
        estimate: Estimate,
        examined: u64,
        candidates: u64,
        capped: bool,
        operators: Vec<Operator>,
        exact_momenta: bool,
    ) -> HuntReport {
        let parameters = sys.model.params.json_point(point);
        let infinite = matches!(
            sys.model.structure,
            Structure::Array {
                wires: crate::model::Wires::Infinite,
                ..
            }
        );
        let (spin_word, momentum_word) = filter_words(opts.spin, momentum);
        let mut r = HuntReport {
            model: sys.model.name.clone(),
            parameters,
            fields: if infinite {
                sys.lattice.cell
            } else {
                sys.lattice.n
            },
            wires: (window.array && !infinite).then_some(window.total),
            boundary: boundary_word(sys, infinite),
            range: window.array.then_some(window.wires),
            window_first_wire: window.array.then_some(window.first),
            search_fields: window.fields(),
            max_dim: opts.max_dim,
            bound_tolerance: BOUND_TOLERANCE,
            charge: match opts.charge {
                ChargeFilter::Exactly(q) => Some(q),
                ChargeFilter::Any | ChargeFilter::Model => None,
            },
            spin: spin_word,
            momentum: momentum_word,
            momentum_tolerance: momentum
                .filter(|_| !exact_momenta)
                .map(|_| crate::core::momentum::MOMENTUM_TOLERANCE),
            momentum_period: sys.model.momentum_period_at(point),
            momentum_exact: exact_momenta && momentum.is_some(),
            estimate,
            examined,
            candidates,
            operators,
            certificate: String::new(),
            notes: Vec::new(),
            symmetries: Vec::new(),
            orbits: Vec::new(),
            removed_by_symmetry: 0,
            truncated: false,
        };
        r.certificate = r.certificate_line();
        r.notes = r.make_notes(sys, capped);
        r
    }

    /// Record the symmetries in use, the orbits and what they removed.
    pub(crate) fn set_symmetries(
        &mut self,
        sym: &super::symmetry::InUse,
        orbits: Vec<super::OrbitReport>,
        removed: usize,
    ) {
        self.symmetries = sym.names.clone();
        self.orbits = orbits;
        self.removed_by_symmetry = removed;
        self.notes.extend(sym.notes.iter().cloned());
        if !self.symmetries.is_empty() {
            self.notes.push(format!(
                "Symmetries used: {}. U(1): operators are neutral unless a term's allowed_charge names the symmetry; Z_n: an operator is kept when the sum over its orbit does not vanish{}.",
                self.symmetries.join(", "),
                if removed > 0 { format!(" ({removed} removed whose orbit sum vanishes)") } else { String::new() }
            ));
        }
        if !self.orbits.is_empty() {
            self.notes.push("Orbits: the symmetric combination sums y cos(l.phi + 2 pi chi) over the members, chi the member's phase (in turns); #k is row k of the operator table, #k* its conjugate.".into());
        }
        self.certificate = self.certificate_line();
    }

    /// "local, charge-neutral, spin-zero, momentum-conserving".
    fn qualifiers(&self) -> String {
        let mut q = vec!["local".to_string()];
        match self.charge {
            Some(0) => q.push("charge-neutral".into()),
            Some(c) => q.push(format!("charge-{c}")),
            None => {}
        }
        if self.spin == "0" {
            q.push("spin-zero".into());
        }
        if self.momentum.as_deref() == Some("conserved") {
            q.push("momentum-conserving".into());
        }
        if !self.symmetries.is_empty() {
            q.push(format!("{}-symmetric", self.symmetries.join("/")));
        }
        q.join(", ")
    }

    fn place(&self) -> String {
        match self.range {
            Some(r) => format!(
                "within a range of {r} wire{}",
                if r == 1 { "" } else { "s" }
            ),
            None => format!("among the {} fields", self.fields),
        }
    }

    fn certificate_line(&self) -> String {
        let tol = format!("bound tolerance: relative {:.0e}", self.bound_tolerance);
        let bound = format!("Delta <= {}", self.max_dim);
        match self.operators.len() {
            0 => format!(
                "certificate: no {} operator with {bound} exists {} ({tol})",
                self.qualifiers(),
                self.place()
            ),
            n => format!(
                "certificate: {n} {} operator{} with {bound} found {}, and no others ({tol})",
                self.qualifiers(),
                if n == 1 { "" } else { "s" },
                self.place()
            ),
        }
    }

    fn examined_line(&self) -> String {
        let mut filters = vec!["charge", "spin"];
        if self.range.is_some() {
            filters.push("translation");
        }
        if self.momentum.is_some() {
            filters.push("momentum");
        }
        let last = filters.pop().unwrap_or_default();
        format!(
            "examined: {} lattice points (nodes of the enumeration tree in {} dimensions); {} in the ellipsoid (one per sign) before the {} and {last} filters",
            self.examined,
            self.search_fields,
            self.candidates,
            filters.join(", "),
        )
    }

    fn make_notes(&self, sys: &System, capped: bool) -> Vec<String> {
        let mut notes = vec![
            "Exhaustive search: every integer m with (1/2) m^T K D K m <= max-dim on the searched fields (LLL reduction, then Fincke-Pohst enumeration); D is the Gaussian fixed point at this parameter point.".to_string(),
        ];
        let mut classes =
            "Each operator is listed once up to sign (m ~ -m; shown with positive charge, or a positive first entry)".to_string();
        if let (Some(first), Some(r)) = (self.window_first_wire, self.range) {
            classes.push_str(&format!(
                " and once per translation, placed with its first wire at offset 0 (wire {first} of the array; offsets 0..{} searched).",
                r - 1
            ));
        } else {
            classes.push('.');
        }
        notes.push(classes);
        if self.boundary.as_deref() == Some("open") {
            if let (Some(first), Some(r)) = (self.window_first_wire, self.range) {
                notes.push(format!(
                    "Open array: the search uses the bulk window of wires {first}..{}; the dimensions of translates near the ends differ.",
                    first + r - 1
                ));
            }
        }
        notes.push(
            "`model term`: the operator is that term of the model (up to sign and translation); `does not commute with`: model terms with a translate l' such that l^T K^-1 l' != 0 (they cannot pin together).".into(),
        );
        if self.momentum_exact {
            notes.push(format!(
                "Momenta{} are rational at this point (p/q with q <= {}): momentum conservation is checked exactly.",
                if self.momentum_period.is_some() { " and the momentum period" } else { "" },
                super::MAX_MOMENTUM_DENOMINATOR
            ));
        } else if let Some(tol) = self.momentum_tolerance {
            notes.push(format!(
                "Momenta are floats: a mismatch |k| < {tol:.0e} (units of the inverse cutoff) counts as conserved."
            ));
        }
        if let Some(g) = self.momentum_period {
            notes.push(crate::dims::period_note(g));
        }
        let momenta_checked = self.momentum_tolerance.is_some() || self.momentum_exact;
        if momenta_checked && sys.model.momentum_per_wire.is_some() && self.charge != Some(0) {
            notes.push("With array.momentum_per_wire the momentum of a charged operator depends on its position; it is given for the placement listed.".into());
        }
        if capped {
            notes.push("The basis reduction stopped at its iteration cap; the search is still exhaustive, only slower.".into());
        }
        notes
    }

    fn operator_table(&self) -> Table {
        let mut headers = vec![
            "#",
            "particles m",
            "vector l",
            "Delta",
            "2-Delta",
            "spin",
            "charge",
        ];
        let with_k = self.momentum.is_some();
        if with_k {
            headers.push("k");
        }
        headers.extend(["model term", "does not commute with"]);
        let with_orbit = !self.orbits.is_empty();
        if with_orbit {
            headers.push("orbit");
        }
        let caption = format!(
            "operators with Delta <= {} (local, up to sign{})",
            self.max_dim,
            if self.range.is_some() {
                " and translation"
            } else {
                ""
            }
        );
        let mut t = Table::new(&caption, &headers);
        let cell = self.search_fields / self.range.unwrap_or(1).max(1);
        for (i, op) in self.operators.iter().enumerate() {
            let mut row = vec![
                (i + 1).to_string(),
                compact(&op.particles, cell, self.range.is_some()),
                compact(&op.vector, cell, self.range.is_some()),
                format!("{:.6}", op.dimension),
                crate::output::signed_fixed(op.rg_eigenvalue, 6),
                op.spin.clone(),
                op.charge.to_string(),
            ];
            if with_k {
                row.push(match op.momentum {
                    Some(k) if k.abs() < crate::core::momentum::MOMENTUM_TOLERANCE => "0".into(),
                    Some(k) => format!("{k:.4}"),
                    None => "-".into(),
                });
            }
            row.push(op.model_term.clone().unwrap_or_else(|| "-".into()));
            row.push(if op.competitors.is_empty() {
                "-".into()
            } else {
                op.competitors.join(", ")
            });
            if with_orbit {
                row.push(op.orbit.map_or("-".into(), |k| k.to_string()));
            }
            t.push(row);
        }
        t
    }
}

/// A count estimate: one decimal below 10, an integer below a million,
/// else scientific notation.
fn count(x: f64) -> String {
    if x < 10.0 {
        format!("{x:.1}")
    } else if x < 1e6 {
        format!("{}", x.round())
    } else {
        format!("{x:.2e}").replace(".00e", "e")
    }
}

/// Arrays: "0:(1, -1) 1:(-1, 1)" (non-zero wires only); explicit models:
/// "(1, -1)", or "{3:1, 7:-1}" beyond 12 fields.
fn compact(v: &[i64], cell: usize, array: bool) -> String {
    let join = |s: &[i64]| {
        s.iter()
            .map(|x| x.to_string())
            .collect::<Vec<_>>()
            .join(", ")
    };
    if !array || cell == 0 {
        if v.len() <= 12 {
            return format!("({})", join(v));
        }
        // Long explicit vectors: the non-zero entries as index:value.
        let nz: Vec<String> = v
            .iter()
            .enumerate()
            .filter(|(_, x)| **x != 0)
            .map(|(i, x)| format!("{i}:{x}"))
            .collect();
        return format!("{{{}}}", nz.join(", "));
    }
    v.chunks(cell)
        .enumerate()
        .filter(|(_, c)| c.iter().any(|x| *x != 0))
        .map(|(w, c)| format!("{w}:({})", join(c)))
        .collect::<Vec<_>>()
        .join(" ")
}

impl Report for HuntReport {
    fn title(&self) -> String {
        format!("Operator hunt: {}", self.model)
    }

    fn facts(&self) -> Vec<(String, String)> {
        vec![
            ("parameters".into(), self.parameters_fact()),
            ("fields".into(), self.fields_fact()),
            ("search window".into(), self.window_fact()),
            (
                "bound".into(),
                format!(
                    "Delta <= {} (relative tolerance {:.0e})",
                    self.max_dim, self.bound_tolerance
                ),
            ),
            ("filters".into(), self.filters_fact()),
            (
                "estimate".into(),
                format!(
                    "about {} lattice points (ellipsoid volume {}, search tree {}; limit {})",
                    count(self.estimate.points()),
                    count(self.estimate.volume),
                    count(self.estimate.tree),
                    count(self.estimate.limit)
                ),
            ),
        ]
    }

    fn tables(&self) -> Vec<Table> {
        if self.operators.is_empty() {
            return Vec::new();
        }
        let mut tables = vec![self.operator_table()];
        if !self.orbits.is_empty() {
            tables.push(self.orbit_table());
        }
        tables
    }

    fn csv_table(&self) -> Table {
        let mut t = Table::new(
            "operators",
            &[
                "particles",
                "vector",
                "dimension",
                "rg_eigenvalue",
                "spin",
                "charge",
                "wires",
                "momentum",
                "model_term",
                "competitors",
            ],
        );
        let join = |v: &[i64]| {
            v.iter()
                .map(|x| x.to_string())
                .collect::<Vec<_>>()
                .join(" ")
        };
        for op in &self.operators {
            t.push(vec![
                join(&op.particles),
                join(&op.vector),
                format!("{}", op.dimension),
                format!("{}", op.rg_eigenvalue),
                op.spin.clone(),
                op.charge.to_string(),
                op.wires.to_string(),
                op.momentum.map(|k| format!("{k}")).unwrap_or_default(),
                op.model_term.clone().unwrap_or_default(),
                op.competitors.join(" "),
            ]);
        }
        t
    }

    fn notes(&self) -> Vec<String> {
        self.notes.clone()
    }
}

/// The pieces of the text facts.
impl HuntReport {
    /// One line per orbit: size, dimension, members, combination.
    fn orbit_table(&self) -> Table {
        let mut t = Table::new(
            "orbits under the Z_n symmetries (one symmetric combination each)",
            &["orbit", "size", "Delta", "members", "combination"],
        );
        let cell = self.search_fields / self.range.unwrap_or(1).max(1);
        for (k, o) in self.orbits.iter().enumerate() {
            let members: Vec<String> = o
                .members
                .iter()
                .map(|m| {
                    let who = m.operator.map_or_else(
                        || compact(&m.particles, cell, self.range.is_some()),
                        |r| format!("#{r}"),
                    );
                    if m.phase == "0" {
                        who
                    } else {
                        format!("{who} (chi {})", m.phase)
                    }
                })
                .collect();
            t.push(vec![
                (k + 1).to_string(),
                o.size.to_string(),
                format!("{:.6}", o.dimension),
                members.join(", "),
                o.combination.clone(),
            ]);
        }
        t
    }

    /// "g=0.5, K=2" or "(none)".
    fn parameters_fact(&self) -> String {
        if self.parameters.is_empty() {
            return "(none)".to_string();
        }
        self.parameters
            .iter()
            .map(|(k, v)| format!("{k}={v}"))
            .collect::<Vec<_>>()
            .join(", ")
    }

    /// The number of fields and how they are arranged.
    fn fields_fact(&self) -> String {
        match (self.wires, &self.boundary) {
            (Some(w), Some(b)) => format!("{} ({w} wires, {b})", self.fields),
            (None, Some(b)) if b == "infinite" => {
                format!("{} per wire (infinite array)", self.fields)
            }
            _ => self.fields.to_string(),
        }
    }

    /// The wires searched.
    fn window_fact(&self) -> String {
        match (self.range, self.window_first_wire) {
            (Some(r), Some(first)) => format!(
                "wires {first}..{} (range {r}), {} fields",
                first + r - 1,
                self.search_fields
            ),
            _ => format!("all {} fields", self.search_fields),
        }
    }

    /// The charge, spin and momentum filters in words.
    fn filters_fact(&self) -> String {
        let mut filters = vec![match self.charge {
            Some(q) => format!("charge {q}"),
            None => "any charge".into(),
        }];
        filters.push(if self.spin == "0" {
            "spin 0".into()
        } else {
            "any spin".into()
        });
        let modulo = self.momentum_period.map_or(String::new(), |g| {
            format!(" modulo G = {}", crate::output::short(g))
        });
        filters.push(match (self.momentum.as_deref(), self.momentum_tolerance) {
            (Some("conserved"), _) if self.momentum_exact => {
                format!("momentum conserved{modulo} (exact: rational momenta)")
            }
            (Some("conserved"), Some(tol)) => {
                format!("momentum conserved{modulo} (|k| < {tol:.0e})")
            }
            (Some(_), _) => "any momentum".into(),
            // No momenta in the model: nothing is filtered by momentum, so
            // a 2k_F backscattering term is listed as if it were
            // commensurate. Say so where the filters are listed.
            _ => "momentum not checked (the model gives no momenta)".into(),
        });
        if !self.symmetries.is_empty() {
            filters.push(format!("symmetries {}", self.symmetries.join(", ")));
        }
        filters.join(", ")
    }
}

/// Render the report; the text-like formats end with the certificate line
/// and the number of lattice points examined.
pub fn render(report: &HuntReport, format: Format) -> Result<String, Error> {
    let mut s = output::render(report, format)?;
    let (cert, exam) = (report.certificate.clone(), report.examined_line());
    match format {
        Format::Text => s.push_str(&format!("\n{cert}\n{exam}\n")),
        Format::Markdown => s.push_str(&format!("\n**{cert}**\n\n{exam}\n")),
        Format::Latex => s.push_str(&format!("% {cert}\n% {exam}\n")),
        Format::Json | Format::Csv => {}
    }
    Ok(s)
}

/// The operators that are not yet terms of the model, as `[[term]]` blocks
/// that can be pasted into the model file (names `hunt_1`, `hunt_2`, ...
/// avoiding the model's own names), each with bare coupling `coupling`.
/// With orbits, the members of one orbit share a `group` (one coupling)
/// and carry the phase of the symmetric combination.
pub fn emit_terms(report: &HuntReport, model: &Model, coupling: f64) -> String {
    let mut out = emit_header(report);
    let existing: std::collections::BTreeSet<&str> =
        model.terms.iter().map(|t| t.name.as_str()).collect();
    let mut next = 1usize;
    let mut fresh = || loop {
        let n = format!("hunt_{next}");
        next += 1;
        if !existing.contains(n.as_str()) {
            break n;
        }
    };
    let mut emitted = 0usize;
    for (row, op) in report.operators.iter().enumerate() {
        if op.model_term.is_some() {
            continue;
        }
        let (group, phase) = orbit_of(report, row + 1);
        out.push_str(&term_block(
            &fresh(),
            op,
            coupling,
            group.as_deref(),
            &phase,
        ));
        emitted += 1;
    }
    if emitted == 0 {
        out.push_str(&format!("# nothing new to add; {}\n", report.certificate));
    }
    out
}

/// The group (orbits with two or more new members) and the phase of row
/// `row` (1-based) in its orbit's symmetric combination.
fn orbit_of(report: &HuntReport, row: usize) -> (Option<String>, String) {
    let Some(k) = report.operators[row - 1].orbit else {
        return (None, "0".into());
    };
    let orbit = &report.orbits[k - 1];
    let new = orbit
        .members
        .iter()
        .filter(|m| m.operator.is_some() && m.model_term.is_none())
        .count();
    let phase = orbit
        .members
        .iter()
        .find(|m| m.operator == Some(row))
        .map_or("0".into(), |m| m.phase.clone());
    ((new >= 2).then(|| format!("hunt_orbit_{k}")), phase)
}

fn term_block(
    name: &str,
    op: &Operator,
    coupling: f64,
    group: Option<&str>,
    phase: &str,
) -> String {
    let mut out = format!(
        "\n[[term]]\nname = \"{name}\"  # Delta = {:.6}, spin {}, charge {}\nparticles = {}\ncoupling = {coupling}\n",
        op.dimension,
        op.spin,
        op.charge,
        particles_toml(op)
    );
    if phase != "0" {
        out.push_str(&format!("phase = \"2*pi*{phase}\"\n"));
    }
    if let Some(g) = group {
        out.push_str(&format!("group = \"{g}\"\n"));
    }
    let named: Vec<String> = op
        .charges
        .iter()
        .filter(|(_, q)| **q != 0)
        .map(|(n, q)| format!("{n} = {q}"))
        .collect();
    if !named.is_empty() {
        out.push_str(&format!(
            "allowed_charge = {{ charge = {}, {} }}\n",
            op.charge,
            named.join(", ")
        ));
    } else if op.charge != 0 {
        out.push_str(&format!("allowed_charge = {}\n", op.charge));
    }
    out
}

/// The comment lines that open the `--emit-terms` output.
fn emit_header(report: &HuntReport) -> String {
    let params: Vec<String> = report
        .parameters
        .iter()
        .map(|(k, v)| format!("{k}={v}"))
        .collect();
    let at = if params.is_empty() {
        String::new()
    } else {
        format!(" at {}", params.join(", "))
    };
    let mut out = format!(
        "# pinflow hunt{at}: {} operators with Delta <= {} ({}, {})\n",
        report.operators.len(),
        report.max_dim,
        report.qualifiers(),
        report.place()
    );
    let already: Vec<&str> = report
        .operators
        .iter()
        .filter_map(|o| o.model_term.as_deref())
        .collect();
    if !already.is_empty() {
        out.push_str(&format!(
            "# already terms of the model (not repeated): {}\n",
            already.join(", ")
        ));
    }
    out
}

/// A TOML list of integers: "[1, -1]".
fn toml_list(v: &[i64]) -> String {
    format!(
        "[{}]",
        v.iter()
            .map(|x| x.to_string())
            .collect::<Vec<_>>()
            .join(", ")
    )
}

/// The `particles` value of a term: a list, or for arrays an inline table
/// by wire offset ("{ 0 = [1, -1], 1 = [-1, 1] }").
fn particles_toml(op: &Operator) -> String {
    let Some(parts) = &op.particles_by_wire else {
        return toml_list(&op.particles);
    };
    let mut entries: Vec<(usize, &Vec<i64>)> = parts
        .iter()
        .filter_map(|(k, v)| k.parse::<usize>().ok().map(|w| (w, v)))
        .collect();
    entries.sort_by_key(|e| e.0);
    format!(
        "{{ {} }}",
        entries
            .iter()
            .map(|(w, v)| format!("{w} = {}", toml_list(v)))
            .collect::<Vec<_>>()
            .join(", ")
    )
}
