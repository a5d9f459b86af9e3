//! The report of `pinflow dims`: exact and fixed-point data of every term at
//! one parameter point.

use serde::Serialize;

use crate::error::Error;
use crate::exact::{self, fmt_rational};
use crate::output::{Report, Table};
use crate::system::System;

/// Tolerance below which a momentum mismatch counts as conserved (units of
/// the inverse cutoff).
pub const MOMENTUM_TOLERANCE: f64 = 1e-9;

/// One term's row.
#[derive(Debug, Clone, Serialize)]
pub struct TermRow {
    /// Term name.
    pub name: String,
    /// Marked as the target of the model.
    pub target: bool,
    /// Lattice vector l of the representative translate (all fields).
    pub vector: Vec<i64>,
    /// Particle content m = K^-1 l, or null when it is not integral.
    pub particles: Option<Vec<i64>>,
    /// m as exact fractions (always present).
    pub particles_exact: Vec<String>,
    /// Wire of the representative translate (arrays; 0 otherwise).
    pub wire: usize,
    /// Total scaling dimension (bosonic part plus extra dimension).
    pub dimension: f64,
    /// Fixed extra dimension from sectors the bosons do not describe.
    pub extra_dimension: f64,
    /// Conformal spin (exact), including the extra spin.
    pub spin: String,
    /// Chiral weight h = (Delta + s)/2.
    pub h: f64,
    /// Chiral weight hbar = (Delta - s)/2.
    pub hbar: f64,
    /// Charge (exact).
    pub charge: String,
    /// Charge the term may carry.
    pub allowed_charge: String,
    /// Charge equals the allowed charge.
    pub charge_ok: bool,
    /// Built from microscopic particles (m integral).
    pub local: bool,
    /// Spin zero: can pin on its own.
    pub null: bool,
    /// Tree level: Delta < 2 (1+1D term).
    pub relevant: bool,
    /// Tree-level RG eigenvalue 2 - Delta.
    pub rg_eigenvalue: f64,
    /// Momentum mismatch k (units of 1/alpha), when the model gives momenta.
    pub momentum: Option<f64>,
    /// |k| below the tolerance.
    pub momentum_conserved: Option<bool>,
    /// Commutes with all of its own translates (arrays).
    pub self_commuting: bool,
    /// Bare coupling y at this point.
    pub coupling: f64,
}

/// The whole `dims` report.
#[derive(Debug, Clone, Serialize)]
pub struct DimsReport {
    /// Model name.
    pub model: String,
    /// Parameter point.
    pub parameters: serde_json::Map<String, serde_json::Value>,
    /// Number of fields.
    pub fields: usize,
    /// Wires (arrays) or null.
    pub wires: Option<usize>,
    /// [n+, n-].
    pub signature: [usize; 2],
    /// Filling "p/q".
    pub filling: String,
    /// det K (exact).
    pub det_k: String,
    /// Mode velocities, right movers first.
    pub velocities: Vec<f64>,
    /// +1 right, -1 left, paired with velocities.
    pub chiralities: Vec<i8>,
    /// One row per term.
    pub terms: Vec<TermRow>,
    /// Mutual phases l_a^T K^-1 l_b ("p/q").
    pub commutation: Vec<Vec<String>>,
    /// Every translate of a commutes with every translate of b.
    pub commutes: Vec<Vec<bool>>,
    /// Limits of the method and warnings.
    pub notes: Vec<String>,
}

impl DimsReport {
    /// Compute the report at a parameter point.
    pub fn build(sys: &System, point: &[f64]) -> Result<DimsReport, Error> {
        let fp = sys.fixed_point(point)?;
        let extra = sys.extra_dimensions(point)?;
        let momenta = sys.momentum_mismatches(point);
        let inv = &sys.invariants;
        let mut terms = Vec::new();
        for (i, (spec, fam)) in sys
            .model
            .terms
            .iter()
            .zip(&sys.lattice.families)
            .enumerate()
        {
            let ti = &inv.terms[i];
            let rep = fam.rep();
            let dimension = fp.dimension(&rep.l) + extra[i];
            let s = exact::to_f64(&ti.spin);
            let k = momenta.as_ref().map(|m| m[i]);
            terms.push(TermRow {
                name: spec.name.clone(),
                target: spec.target,
                vector: rep.l.clone(),
                particles: exact::to_integers(&ti.particles),
                particles_exact: ti.particles.iter().map(fmt_rational).collect(),
                wire: rep.anchor,
                dimension,
                extra_dimension: extra[i],
                spin: fmt_rational(&ti.spin),
                h: (dimension + s) / 2.0,
                hbar: (dimension - s) / 2.0,
                charge: fmt_rational(&ti.charge),
                allowed_charge: fmt_rational(&spec.allowed_charge),
                charge_ok: ti.charge_ok,
                local: ti.local,
                null: ti.null,
                relevant: dimension < 2.0,
                rg_eigenvalue: 2.0 - dimension,
                momentum: k,
                momentum_conserved: k.map(|k| k.abs() < MOMENTUM_TOLERANCE),
                self_commuting: ti.self_commuting,
                coupling: spec.coupling.eval(point),
            });
        }
        let names = sys.model.params.names();
        let parameters = names
            .iter()
            .cloned()
            .zip(point.iter().map(|x| serde_json::json!(x)))
            .collect();
        let mut notes = notes_for(&terms);
        let starred = inv.commutation.iter().zip(&inv.commutes).any(|(ph, ok)| {
            ph.iter()
                .zip(ok)
                .any(|(p, c)| num_traits::Zero::is_zero(p) && !c)
        });
        if starred {
            notes.push(
                "0* in the commutation table: the two terms commute at the same wire but not with every translate, so their families cannot all pin together".to_string(),
            );
        }
        Ok(DimsReport {
            model: sys.model.name.clone(),
            parameters,
            fields: sys.lattice.n,
            wires: matches!(sys.model.structure, crate::model::Structure::Array { .. })
                .then_some(sys.lattice.wires),
            signature: [inv.signature.0, inv.signature.1],
            filling: fmt_rational(&inv.filling),
            det_k: inv.det_k.to_string(),
            velocities: fp.velocities.clone(),
            chiralities: fp.chirality.clone(),
            terms,
            commutation: inv
                .commutation
                .iter()
                .map(|r| r.iter().map(fmt_rational).collect())
                .collect(),
            commutes: inv.commutes.clone(),
            notes,
        })
    }
}

fn notes_for(terms: &[TermRow]) -> Vec<String> {
    let mut notes = vec![
        "Scaling dimensions are those of the Gaussian fixed point; relevance is tree level (Delta < 2 for a term integrated over space and time).".to_string(),
    ];
    for t in terms {
        if !t.charge_ok {
            notes.push(format!(
                "term \"{}\" carries charge {} but is allowed {}: it does not conserve charge",
                t.name, t.charge, t.allowed_charge
            ));
        }
        if !t.local {
            notes.push(format!(
                "term \"{}\" is not local: K^-1 l is not integral (not built from particles)",
                t.name
            ));
        }
        if t.momentum_conserved == Some(false) {
            notes.push(format!(
                "term \"{}\" has momentum mismatch {:.6}: it oscillates and stops flowing at ell_k = ln(1/|k|)",
                t.name,
                t.momentum.unwrap_or(0.0)
            ));
        }
    }
    notes
}

impl Report for DimsReport {
    fn title(&self) -> String {
        format!("Fixed-point data: {}", self.model)
    }

    fn facts(&self) -> Vec<(String, String)> {
        let params = if self.parameters.is_empty() {
            "(none)".to_string()
        } else {
            self.parameters
                .iter()
                .map(|(k, v)| format!("{k}={v}"))
                .collect::<Vec<_>>()
                .join(", ")
        };
        let mut f = vec![
            ("parameters".to_string(), params),
            ("fields".to_string(), self.fields.to_string()),
        ];
        if let Some(w) = self.wires {
            f.push(("wires".to_string(), w.to_string()));
        }
        f.push((
            "signature (n+, n-)".to_string(),
            format!("({}, {})", self.signature[0], self.signature[1]),
        ));
        f.push(("filling".to_string(), self.filling.clone()));
        f.push(("det K".to_string(), self.det_k.clone()));
        f.push((
            "velocities".to_string(),
            fmt_velocities(&self.velocities, &self.chiralities),
        ));
        f
    }

    fn tables(&self) -> Vec<Table> {
        vec![self.term_table(), self.commutation_table()]
    }

    fn csv_table(&self) -> Table {
        let mut t = Table::new(
            "terms",
            &[
                "name",
                "target",
                "vector",
                "particles",
                "dimension",
                "spin",
                "h",
                "hbar",
                "charge",
                "charge_ok",
                "local",
                "null",
                "relevant",
                "rg_eigenvalue",
                "momentum",
                "momentum_conserved",
                "self_commuting",
                "coupling",
            ],
        );
        for r in &self.terms {
            t.push(vec![
                r.name.clone(),
                r.target.to_string(),
                join_ints(&r.vector),
                r.particles_exact.join(" "),
                format!("{}", r.dimension),
                r.spin.clone(),
                format!("{}", r.h),
                format!("{}", r.hbar),
                r.charge.clone(),
                r.charge_ok.to_string(),
                r.local.to_string(),
                r.null.to_string(),
                r.relevant.to_string(),
                format!("{}", r.rg_eigenvalue),
                r.momentum.map(|k| format!("{k}")).unwrap_or_default(),
                r.momentum_conserved
                    .map(|b| b.to_string())
                    .unwrap_or_default(),
                r.self_commuting.to_string(),
                format!("{}", r.coupling),
            ]);
        }
        t
    }

    fn notes(&self) -> Vec<String> {
        self.notes.clone()
    }
}

impl DimsReport {
    fn term_table(&self) -> Table {
        let mut t = Table::new(
            "terms",
            &[
                "term",
                "particles m",
                "vector l",
                "Delta",
                "2-Delta",
                "spin",
                "h",
                "hbar",
                "charge",
                "local",
                "null",
                "relevant",
                "k",
            ],
        );
        for r in &self.terms {
            let name = if r.target {
                format!("{} (target)", r.name)
            } else {
                r.name.clone()
            };
            let charge = if r.charge_ok {
                r.charge.clone()
            } else {
                format!("{} (!)", r.charge)
            };
            t.push(vec![
                name,
                compact_vector(&r.particles_exact),
                compact_vector(&r.vector.iter().map(|x| x.to_string()).collect::<Vec<_>>()),
                format!("{:.6}", r.dimension),
                format!("{:+.6}", r.rg_eigenvalue),
                r.spin.clone(),
                format!("{:.6}", r.h),
                format!("{:.6}", r.hbar),
                charge,
                yes_no(r.local),
                yes_no(r.null),
                yes_no(r.relevant),
                r.momentum
                    .map(|k| format!("{k:.4}"))
                    .unwrap_or_else(|| "-".into()),
            ]);
        }
        t
    }

    fn commutation_table(&self) -> Table {
        let mut headers = vec!["l_a K^-1 l_b".to_string()];
        headers.extend(self.terms.iter().map(|t| t.name.clone()));
        let mut t = Table::with_headers("commutation (0 = can pin together)", headers);
        for (i, row) in self.commutation.iter().enumerate() {
            let mut cells = vec![self.terms[i].name.clone()];
            for (j, x) in row.iter().enumerate() {
                let mark = if self.commutes[i][j] || x != "0" {
                    ""
                } else {
                    "*"
                };
                cells.push(format!("{x}{mark}"));
            }
            t.push(cells);
        }
        t
    }
}

fn yes_no(b: bool) -> String {
    if b { "yes" } else { "no" }.to_string()
}

fn join_ints(v: &[i64]) -> String {
    v.iter()
        .map(|x| x.to_string())
        .collect::<Vec<_>>()
        .join(" ")
}

/// Vectors print in full up to 12 entries; longer ones list only the
/// non-zero entries as index:value.
fn compact_vector(v: &[String]) -> String {
    if v.len() <= 12 {
        return format!("({})", v.join(", "));
    }
    let nz: Vec<String> = v
        .iter()
        .enumerate()
        .filter(|(_, x)| *x != "0")
        .map(|(i, x)| format!("{i}:{x}"))
        .collect();
    format!("{{{}}}", nz.join(", "))
}

fn fmt_velocities(v: &[f64], chi: &[i8]) -> String {
    let mut parts = Vec::new();
    let right: Vec<String> = v
        .iter()
        .zip(chi)
        .filter(|(_, c)| **c > 0)
        .map(|(x, _)| format!("{x:.4}"))
        .collect();
    let left: Vec<String> = v
        .iter()
        .zip(chi)
        .filter(|(_, c)| **c < 0)
        .map(|(x, _)| format!("{x:.4}"))
        .collect();
    if !right.is_empty() {
        parts.push(format!("right {}", summarise(&right)));
    }
    if !left.is_empty() {
        parts.push(format!("left {}", summarise(&left)));
    }
    parts.join("; ")
}

fn summarise(v: &[String]) -> String {
    if v.len() <= 6 {
        v.join(", ")
    } else {
        format!("{} ... {} ({} modes)", v[0], v[v.len() - 1], v.len())
    }
}
