//! The report of `pinflow dims`: exact and fixed-point data of every term at
//! one parameter point.
//!
//! Which path computes the fixed point ([`Algebra`]): periodic arrays of two
//! or more wires and infinite arrays use the q-space path
//! ([`crate::core::qspace`]), everything else the dense one. For an infinite
//! array the report is per wire: `fields` is the cell size, `wires` is null
//! (`infinite` is true), `signature`, `filling` and `det_k` are those of one
//! wire; `velocities` and `chiralities` are the modes at q = 0 and
//! `velocity_ranges` gives each mode's smallest and largest velocity over
//! the quadrature points; a term's `vector` and `particles` list the wires
//! 0..=range it touches; `quadrature` states the rule and its error
//! estimate.

pub mod convergence;

use serde::Serialize;

use crate::core::fixed_point::DIMENSION_ERROR_LIMIT;
use crate::core::lattice::Family;
use crate::core::momentum::MOMENTUM_TOLERANCE;
use crate::core::phase::{self, Phase};
use crate::core::qspace::Quadrature;
use crate::core::relevance::{is_relevant, rg_eigenvalue};
use crate::core::system::{EvalPath, System};
use crate::error::Error;
use crate::math::rational::{self, fmt_rational};
use crate::output::{Report, Table};

/// Which code path computes the fixed point of `dims`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Algebra {
    /// q-space for periodic arrays (W >= 2) and infinite arrays, dense
    /// otherwise.
    Auto,
    /// The dense N x N algebra (not for infinite arrays).
    Dense,
    /// The q-space algebra (periodic arrays of W >= 2 wires, infinite arrays).
    QSpace,
}

/// What one evaluation of the fixed point gives the report.
struct Evaluated {
    bosonic: Vec<f64>,
    /// Per term: [relative error bound, sensitivity to V's rounding].
    errors: Vec<[f64; 2]>,
    /// D was computed in double-double (ill-conditioned V).
    extended: bool,
    velocities: Vec<f64>,
    chiralities: Vec<i8>,
    velocity_ranges: Option<Vec<[f64; 2]>>,
    quadrature: Option<Quadrature>,
}

fn evaluate(sys: &System, point: &[f64], algebra: Algebra) -> Result<Evaluated, Error> {
    let q = match algebra {
        Algebra::Auto => sys.eval_path() != EvalPath::Dense,
        Algebra::Dense => false,
        Algebra::QSpace => true,
    };
    if !q {
        return evaluate_dense(sys, point);
    }
    if sys.is_infinite() {
        let (fp, quad) = sys.q_converged(point)?;
        // The infinite array's D(q) stays in doubles (there is no dense
        // path); the bound says how accurate it is.
        let (errors, _) = sys.q_dimension_errors(point, fp.points)?;
        return Ok(Evaluated {
            bosonic: sys.q_dimensions(&fp)?,
            errors,
            extended: false,
            velocities: fp.velocities[0].clone(),
            chiralities: fp.chirality.clone(),
            velocity_ranges: Some(fp.velocity_ranges()),
            quadrature: Some(quad),
        });
    }
    let (errors, extended) = sys.q_dimension_errors(point, sys.lattice.wires)?;
    if extended && algebra == Algebra::Auto {
        // Ill-conditioned V(q): the dense path of the same ring computes
        // the same numbers in double-double.
        return evaluate_dense(sys, point);
    }
    let fp = sys.q_fixed_point(point, sys.lattice.wires)?;
    let (velocities, chiralities) = fp.all_velocities();
    Ok(Evaluated {
        bosonic: sys.q_dimensions(&fp)?,
        errors,
        extended: false,
        velocities,
        chiralities,
        velocity_ranges: None,
        quadrature: None,
    })
}

fn evaluate_dense(sys: &System, point: &[f64]) -> Result<Evaluated, Error> {
    let fp = sys.fixed_point(point)?;
    let reps = || sys.lattice.families.iter().map(|f| &f.rep().l);
    Ok(Evaluated {
        bosonic: reps().map(|l| fp.dimension(l)).collect(),
        errors: reps()
            .map(|l| [fp.dimension_error(l), fp.dimension_sensitivity(l)])
            .collect(),
        extended: fp.accuracy.extended,
        velocities: fp.velocities,
        chiralities: fp.chirality,
        velocity_ranges: None,
        quadrature: None,
    })
}

/// Refuse a point where some dimension's error bound exceeds
/// [`DIMENSION_ERROR_LIMIT`] (the message names the point and the term).
fn check_errors(sys: &System, point: &[f64], ev: &Evaluated) -> Result<(), Error> {
    let worst = ev
        .errors
        .iter()
        .enumerate()
        .max_by(|a, b| a.1[0].total_cmp(&b.1[0]));
    match worst {
        Some((i, e)) if e[0] > DIMENSION_ERROR_LIMIT || e[0].is_nan() => Err(Error::Inaccurate(format!(
            "{}: the scaling dimension of term \"{}\" at {} cannot be computed accurately: its error bound is {:.1e} (relative; at most {:.0e} is accepted), V is badly conditioned there; choose another point",
            sys.model.file,
            sys.model.terms[i].name,
            sys.model.params.describe(point),
            e[0],
            DIMENSION_ERROR_LIMIT
        ))),
        _ => Ok(()),
    }
}

/// Notes on accuracy: the extended route, and dimensions that the rounding
/// of V's entries to doubles moves by more than the limit.
fn accuracy_notes(names: &[String], ev: &Evaluated) -> Vec<String> {
    let mut notes = Vec::new();
    if ev.extended {
        notes.push("V is ill-conditioned at this point: D was computed in double-double arithmetic (about 31 digits); `dimension_error` bounds each dimension's error".to_string());
    }
    for (name, e) in names.iter().zip(&ev.errors) {
        if e[1] > DIMENSION_ERROR_LIMIT {
            notes.push(format!(
                "the dimension of {name} is sensitive to V: rounding V's entries to doubles (relative 1.1e-16) can move it by {:.1e} (relative), so V's parameters must be known to that accuracy",
                e[1]
            ));
        }
    }
    notes
}

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
    /// First-order bound on the relative rounding error of `dimension`
    /// (see `FixedPoint::dimension_error`); points where it exceeds 1e-8
    /// are refused.
    pub dimension_error: f64,
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
    /// Names of the model's declared symmetries (`[[symmetry]]`) the term
    /// breaks at this point: a U(1) charge it is not allowed, or a Z_n that
    /// does not map it onto the listed terms with their couplings (see
    /// [`crate::search::breaks`]); empty when it respects every one.
    pub breaks_symmetry: Vec<String>,
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
    /// |k| below the tolerance, for every translate: false when the
    /// momentum depends on the translate.
    pub momentum_conserved: Option<bool>,
    /// Arrays with `momentum_per_wire`: the momentum added from one
    /// translate to the next, dk = sum_c N_c b_c (N_c the term's net
    /// particle number of component c), reduced by the momentum period; 0
    /// for a neutral term, null without `momentum_per_wire`. `momentum` is
    /// that of the translate on `wire`; the one on wire j has
    /// momentum + (j - wire) dk.
    pub momentum_per_translate: Option<f64>,
    /// Commutes with all of its own translates (arrays).
    pub self_commuting: bool,
    /// Bare coupling y at this point.
    pub coupling: f64,
    /// With `--pin`: commutes with every pinned translate.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub commutes_with_pinned: Option<bool>,
    /// With `--pin`: the dimension in the residual theory of the pinned set
    /// (exact Schur form with the real V, plus the extra dimension); null
    /// when the term is disordered.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub dimension_pinned: Option<Option<f64>>,
    /// With `--pin`: fails to commute with a pinned translate (its
    /// correlations decay exponentially in the pinned phase).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub disordered: Option<bool>,
}

/// The whole `dims` report.
#[derive(Debug, Clone, Serialize)]
pub struct DimsReport {
    /// Model name.
    pub model: String,
    /// Parameter point.
    pub parameters: serde_json::Map<String, serde_json::Value>,
    /// Number of fields (infinite arrays: of one wire).
    pub fields: usize,
    /// Wires (finite arrays) or null (explicit models, infinite arrays).
    pub wires: Option<usize>,
    /// The array is infinite (the totals below are then per wire).
    pub infinite: bool,
    /// [n+, n-] (infinite arrays: of one wire).
    pub signature: [usize; 2],
    /// Filling "p/q" (infinite arrays: per wire).
    pub filling: String,
    /// det K (exact; infinite arrays: of one wire).
    pub det_k: String,
    /// Arrays: the filling of one wire, t_c^T K_c^-1 t_c; null otherwise.
    pub filling_per_wire: Option<String>,
    /// Arrays: det K_c of one wire's cell; null otherwise.
    pub det_k_cell: Option<String>,
    /// Mode velocities, right movers first (infinite arrays: at q = 0).
    pub velocities: Vec<f64>,
    /// +1 right, -1 left, paired with velocities.
    pub chiralities: Vec<i8>,
    /// Infinite arrays: [smallest, largest] velocity of each mode over the
    /// quadrature points (modes as in `velocities`); null otherwise.
    pub velocity_ranges: Option<Vec<[f64; 2]>>,
    /// Infinite arrays: the quadrature rule and its error estimate; null
    /// otherwise.
    pub quadrature: Option<Quadrature>,
    /// The momentum period G (`momentum_period`) at the point, by which
    /// every term's `momentum` is reduced to (-G/2, G/2]; null without one.
    pub momentum_period: Option<f64>,
    /// With `--pin`: the pinned term families (every translate in arrays).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub pinned: Option<Vec<String>>,
    /// With `--pin`: the phase of the pinned set (label, invariants, and
    /// whether it is the target phase; see [`crate::core::phase`]).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub phase: Option<Phase>,
    /// With `--pin` on an infinite array: the quadrature of the pinned
    /// integrals (midpoint rule).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub pinned_quadrature: Option<Quadrature>,
    /// One row per term.
    pub terms: Vec<TermRow>,
    /// Mutual phases l_a^T K^-1 l_b ("p/q").
    pub commutation: Vec<Vec<String>>,
    /// Every translate of a commutes with every translate of b.
    pub commutes: Vec<Vec<bool>>,
    /// Limits of the method and warnings.
    pub notes: Vec<String>,
}

pub use crate::core::system::DENSE_FIELDS_LIMIT;

/// Refuse, before any work, a dense evaluation above
/// [`DENSE_FIELDS_LIMIT`] fields unless `force`, naming the estimate and the
/// flag ([`System::check_dense_size`]).
pub fn check_size(sys: &System, force: bool) -> Result<(), Error> {
    sys.check_dense_size(force)
}

/// Options of the `dims` report.
#[derive(Debug, Clone)]
pub struct DimsOptions {
    /// Term families to pin (empty: the plain report).
    pub pins: Vec<String>,
    /// The code path.
    pub algebra: Algebra,
}

impl Default for DimsOptions {
    fn default() -> Self {
        DimsOptions {
            pins: Vec::new(),
            algebra: Algebra::Auto,
        }
    }
}

impl DimsReport {
    /// The report with options: with pins, every term also gets its place
    /// in the residual theory of the pinned set ([`crate::core::pinned`]).
    pub fn build_opts(
        sys: &System,
        point: &[f64],
        opts: &DimsOptions,
    ) -> Result<DimsReport, Error> {
        let set = if opts.pins.is_empty() {
            None
        } else {
            Some(crate::core::pinned::set::from_names(
                sys, &opts.pins, "--pin",
            )?)
        };
        let mut report = DimsReport::build_with(sys, point, opts.algebra)?;
        if let Some(set) = set {
            let dense = opts.algebra == Algebra::Dense;
            let pd = crate::core::pinned::set::evaluate(
                sys,
                &set,
                point,
                crate::core::pinned::Form::Exact,
                dense,
            )?;
            report.add_pinned(&set, &pd);
            report.phase = Some(phase_of(sys, &set));
        }
        Ok(report)
    }

    fn add_pinned(
        &mut self,
        set: &crate::core::pinned::set::PinnedSet,
        pd: &crate::core::pinned::set::PinnedDims,
    ) {
        for (i, row) in self.terms.iter_mut().enumerate() {
            row.commutes_with_pinned = Some(pd.commutes[i]);
            row.disordered = Some(!pd.commutes[i]);
            row.dimension_pinned = Some(pd.bosonic[i].map(|d| d + row.extra_dimension));
        }
        self.pinned = Some(set.names.clone());
        self.pinned_quadrature = pd.quadrature;
        self.notes.push(pinned_note(
            &set.names,
            self.wires.is_some() || self.infinite,
        ));
        if let Some(q) = &pd.quadrature {
            self.notes.push(format!(
                "Pinned dimensions of the infinite array: midpoint rule q = 2 pi (k + 1/2) / N with {} points, error estimate {:.1e} (tolerance {:.0e}){}",
                q.points,
                q.error_estimate,
                q.tolerance,
                q.verdict("; ")
            ));
        }
    }

    /// Compute the report at a parameter point ([`Algebra::Auto`]).
    pub fn build(sys: &System, point: &[f64]) -> Result<DimsReport, Error> {
        DimsReport::build_with(sys, point, Algebra::Auto)
    }

    /// Compute the report with a chosen code path.
    pub fn build_with(sys: &System, point: &[f64], algebra: Algebra) -> Result<DimsReport, Error> {
        sys.model.check_point(point)?;
        let ev = evaluate(sys, point, algebra)?;
        check_errors(sys, point, &ev)?;
        let extra = sys.extra_dimensions(point)?;
        let momenta = sys.momentum_mismatches(point);
        let terms: Vec<TermRow> = (0..sys.model.terms.len())
            .map(|i| {
                let k = momenta.as_ref().map(|m| m[i]);
                term_row(
                    sys,
                    point,
                    i,
                    ev.bosonic[i] + extra[i],
                    extra[i],
                    ev.errors[i][0],
                    k,
                )
            })
            .collect();
        let notes = report_notes(sys, point, &terms, &ev);
        Ok(assemble(sys, point, ev, terms, notes))
    }
}

/// One term's row at a point (`dimension` includes the extra one).
fn term_row(
    sys: &System,
    point: &[f64],
    i: usize,
    dimension: f64,
    extra: f64,
    error: f64,
    k: Option<f64>,
) -> TermRow {
    let (spec, fam, ti) = (
        &sys.model.terms[i],
        &sys.lattice.families[i],
        &sys.invariants.terms[i],
    );
    let rep = fam.rep();
    let s = rational::to_f64(&ti.spin);
    let dk = per_translate_momentum(sys, i, point);
    // Infinite arrays: the representative sits at wire 0 of the stand-in
    // ring; list the wires 0..=range it touches.
    let shown = if sys.is_infinite() {
        (spec.range() + 1) * sys.lattice.cell
    } else {
        rep.l.len()
    };
    let particles = &ti.particles[..shown];
    TermRow {
        name: spec.name.clone(),
        target: spec.target,
        vector: rep.l[..shown].to_vec(),
        particles: rational::to_integers(particles),
        particles_exact: particles.iter().map(fmt_rational).collect(),
        wire: rep.anchor,
        dimension,
        dimension_error: error,
        extra_dimension: extra,
        spin: fmt_rational(&ti.spin),
        h: (dimension + s) / 2.0,
        hbar: (dimension - s) / 2.0,
        charge: fmt_rational(&ti.charge),
        allowed_charge: fmt_rational(&spec.allowed_charge),
        charge_ok: ti.charge_ok,
        breaks_symmetry: Vec::new(),
        local: ti.local,
        null: ti.null,
        relevant: is_relevant(dimension),
        rg_eigenvalue: rg_eigenvalue(dimension),
        momentum: k,
        momentum_conserved: k.map(|k| k.abs() < MOMENTUM_TOLERANCE && dk.is_none_or(|d| d == 0.0)),
        momentum_per_translate: dk,
        self_commuting: ti.self_commuting,
        coupling: spec.coupling.eval(point),
        commutes_with_pinned: None,
        dimension_pinned: None,
        disordered: None,
    }
}

/// The notes of a report, in the order they are printed.
fn report_notes(sys: &System, point: &[f64], terms: &[TermRow], ev: &Evaluated) -> Vec<String> {
    let inv = &sys.invariants;
    let mut notes = notes_for(terms);
    let names: Vec<String> = terms.iter().map(|t| t.name.clone()).collect();
    notes.extend(accuracy_notes(&names, ev));
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
    if let Some(q) = &ev.quadrature {
        notes.push(infinite_note(q));
    }
    if sys.lattice.boundary == Some(crate::model::Boundary::Open) {
        notes.push(open_array_note(terms, sys.lattice.cell));
    }
    if let Some(g) = sys.model.momentum_period_at(point) {
        notes.push(period_note(g));
    }
    notes
}

/// The report from its rows and notes.
fn assemble(
    sys: &System,
    point: &[f64],
    ev: Evaluated,
    terms: Vec<TermRow>,
    notes: Vec<String>,
) -> DimsReport {
    let inv = &sys.invariants;
    let infinite = sys.is_infinite();
    let array = matches!(sys.model.structure, crate::model::Structure::Array { .. });
    DimsReport {
        model: sys.model.name.clone(),
        parameters: sys.model.params.json_point(point),
        fields: if infinite {
            sys.lattice.cell
        } else {
            sys.lattice.n
        },
        wires: (array && !infinite).then_some(sys.lattice.wires),
        infinite,
        signature: [inv.signature.0, inv.signature.1],
        filling: fmt_rational(&inv.filling),
        det_k: inv.det_k.to_string(),
        filling_per_wire: array.then(|| fmt_rational(&inv.cell_filling)),
        det_k_cell: array.then(|| inv.cell_det.to_string()),
        velocities: ev.velocities,
        chiralities: ev.chiralities,
        velocity_ranges: ev.velocity_ranges,
        quadrature: ev.quadrature,
        momentum_period: sys.model.momentum_period_at(point),
        pinned: None,
        phase: None,
        pinned_quadrature: None,
        terms,
        commutation: inv
            .commutation
            .iter()
            .map(|r| r.iter().map(fmt_rational).collect())
            .collect(),
        commutes: inv.commutes.clone(),
        notes,
    }
}

/// The phase a pinned set of model terms spans.
fn phase_of(sys: &System, set: &crate::core::pinned::set::PinnedSet) -> Phase {
    let fams: Vec<&Family> = set
        .indices
        .iter()
        .map(|&i| &sys.lattice.families[i])
        .collect();
    phase::name_phase(
        &sys.lattice,
        &phase::listed(sys),
        &fams,
        &phase::targets(sys),
    )
}

/// What the pinned columns mean.
fn pinned_note(names: &[String], array: bool) -> String {
    let every = if array { "every translate of " } else { "" };
    format!(
        "Pinned: {every}{}. dimension_pinned is the scaling dimension in the residual Gaussian theory once these are pinned (the pinned combinations and their radical K^-1 P integrated out: Schur complement with the real V; docs/physics.md, section 8), plus any extra dimension; a term that fails to commute with a pinned translate is disordered (exponentially decaying correlations) and has no pinned dimension.",
        names.iter().map(|n| format!("\"{n}\"")).collect::<Vec<_>>().join(", ")
    )
}

/// dk of term i (see [`TermRow::momentum_per_translate`]); None for
/// explicit models and without `momentum_per_wire`.
fn per_translate_momentum(sys: &System, i: usize, point: &[f64]) -> Option<f64> {
    sys.lattice.boundary?;
    let net = crate::core::momentum::per_translate::net_particles(
        &sys.lattice,
        &sys.invariants.terms[i].particles,
    );
    let dk = crate::core::momentum::per_translate::shift(&sys.model, &net, point)?;
    Some(crate::core::momentum::reduce_momentum(
        dk,
        sys.model.momentum_period_at(point),
    ))
}

/// The note that states the momentum period in use (`dims`, `hunt`).
pub fn period_note(g: f64) -> String {
    format!(
        "Momenta are conserved modulo the period G = {} (momentum_period, a reciprocal lattice vector): every momentum mismatch k is reduced to k - G round(k/G) in (-G/2, G/2], with |k| = G/2 shown as +G/2; a term with k = G (umklapp) is momentum-conserving.",
        crate::output::short(g)
    )
}

/// The note that states how an infinite array was computed.
pub fn infinite_note(q: &Quadrature) -> String {
    let mut s = format!(
        "Infinite array: fields, signature, filling and det K are per wire; dimensions are the q-space integrals (1/2) int dq/2pi L(q)^H D(q) L(q) by the periodic trapezoid rule with {} points, error estimate {:.1e} (tolerance {:.0e}); velocities are at q = 0, velocity_ranges over q.",
        q.points, q.error_estimate, q.tolerance
    );
    if !q.converged {
        s.push_str(&format!(
            " The rule did NOT converge to the tolerance ({} points is the limit): V(q) is probably close to singular at some q.",
            q.points
        ));
    }
    s
}

/// Which translate an open array's rows show (the one nearest the middle:
/// translates near the ends see fewer neighbours and have other
/// dimensions).
fn open_array_note(terms: &[TermRow], cell: usize) -> String {
    let wires: Vec<String> = terms
        .iter()
        .map(|t| format!("{} at wire {}", t.name, t.wire))
        .collect();
    format!(
        "open array: each row is the translate nearest the middle ({}); field indices count {cell} fields per wire from wire 0; translates near the ends have other dimensions (JSON `wire`)",
        wires.join(", ")
    )
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
        if let Some(dk) = t.momentum_per_translate.filter(|dk| *dk != 0.0) {
            notes.push(format!(
                "term \"{}\" carries momentum that depends on the translate (momentum_per_wire acting on its net particle number): k = {:.6} on wire {} and {:+.6} more per wire (JSON momentum_per_translate); each translate stops flowing at its own ell_k, and `flow` flows the translates one by one",
                t.name,
                t.momentum.unwrap_or(0.0),
                t.wire,
                dk
            ));
        } else if t.momentum_conserved == Some(false) {
            notes.push(format!(
                "term \"{}\" has momentum mismatch {:.6}: it oscillates and stops flowing at ell_k = ln(1/|k|)",
                t.name,
                t.momentum.unwrap_or(0.0)
            ));
        }
    }
    notes
}

impl DimsReport {
    /// The pinned set and its phase (`--pin`).
    fn pinned_facts(&self) -> Vec<(String, String)> {
        let mut f: Vec<(String, String)> = self
            .pinned
            .iter()
            .map(|p| ("pinned".to_string(), p.join(", ")))
            .collect();
        if let Some(p) = &self.phase {
            let per = if self.infinite { " per wire" } else { "" };
            f.push((
                "phase".to_string(),
                format!(
                    "{}: {} gapped pairs, {} gapless modes{per}{}{}",
                    p.label,
                    p.gapped_pairs,
                    p.gapless_modes,
                    if p.fully_gapped { ", fully gapped" } else { "" },
                    if p.target { ", the target phase" } else { "" }
                ),
            ));
        }
        f
    }

    /// An infinite array's quadrature rule and error estimate.
    fn quadrature_fact(&self) -> Option<(String, String)> {
        self.quadrature.as_ref().map(|q| {
            (
                "quadrature".to_string(),
                format!(
                    "{} points, error estimate {:.1e} (tolerance {:.0e}{})",
                    q.points,
                    q.error_estimate,
                    q.tolerance,
                    q.verdict(", ")
                ),
            )
        })
    }

    /// Signature, filling and det K (per wire for an infinite array, and
    /// also per wire for a finite one).
    fn topology_facts(&self) -> Vec<(String, String)> {
        let per = if self.infinite { " (per wire)" } else { "" };
        let mut f = vec![
            (
                format!("signature (n+, n-){per}"),
                format!("({}, {})", self.signature[0], self.signature[1]),
            ),
            (format!("filling{per}"), self.filling.clone()),
            (format!("det K{per}"), self.det_k.clone()),
        ];
        if let (false, Some(nu), Some(det)) =
            (self.infinite, &self.filling_per_wire, &self.det_k_cell)
        {
            f.push(("filling per wire".to_string(), nu.clone()));
            f.push(("det K (one wire)".to_string(), det.clone()));
        }
        f
    }

    /// Mode velocities (at q = 0 and their ranges over q for infinite arrays).
    fn velocity_facts(&self) -> Vec<(String, String)> {
        let vel = fmt_velocities(&self.velocities, &self.chiralities);
        let Some(r) = &self.velocity_ranges else {
            return vec![("velocities".to_string(), vel)];
        };
        let ranges: Vec<String> = r
            .iter()
            .zip(&self.chiralities)
            .map(|(r, c)| {
                let side = if *c > 0 { "right" } else { "left" };
                format!("{side} {:.4}..{:.4}", r[0], r[1])
            })
            .collect();
        vec![
            ("velocities at q = 0".to_string(), vel),
            ("velocity range over q".to_string(), ranges.join("; ")),
        ]
    }
}

impl Report for DimsReport {
    fn title(&self) -> String {
        format!("Fixed-point data: {}", self.model)
    }

    fn facts(&self) -> Vec<(String, String)> {
        let mut f = vec![
            (
                "parameters".to_string(),
                crate::output::parameters_fact(&self.parameters),
            ),
            ("fields".to_string(), self.fields.to_string()),
        ];
        if let Some(w) = self.wires {
            f.push(("wires".to_string(), w.to_string()));
        }
        if self.infinite {
            f[1].0 = "fields per wire".to_string();
            f.push(("wires".to_string(), "infinite".to_string()));
            f.extend(self.quadrature_fact());
        }
        f.extend(self.topology_facts());
        f.extend(self.velocity_facts());
        f.extend(self.pinned_facts());
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
                "momentum_per_translate",
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
                r.momentum_per_translate
                    .map(|k| format!("{k}"))
                    .unwrap_or_default(),
            ]);
        }
        if self.pinned.is_some() {
            self.add_pinned_columns(&mut t);
        }
        t
    }

    fn notes(&self) -> Vec<String> {
        self.notes.clone()
    }
}

impl DimsReport {
    /// CSV columns commutes_with_pinned, dimension_pinned, disordered.
    fn add_pinned_columns(&self, t: &mut Table) {
        for h in ["commutes_with_pinned", "dimension_pinned", "disordered"] {
            t.headers.push(h.to_string());
        }
        for (cells, r) in t.rows.iter_mut().zip(&self.terms) {
            cells.push(opt_string(r.commutes_with_pinned));
            cells.push(opt_string(r.dimension_pinned.flatten()));
            cells.push(opt_string(r.disordered));
        }
    }

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
                crate::output::signed_fixed(r.rg_eigenvalue, 6),
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
        if self.pinned.is_some() {
            self.add_pinned_text(&mut t);
        }
        t
    }

    /// Text/Markdown/LaTeX column "Delta pinned": "pinned" for the pinned
    /// terms themselves, else the value, or "disordered".
    fn add_pinned_text(&self, t: &mut Table) {
        t.headers.push("Delta pinned".to_string());
        let pinned = self.pinned.as_deref().unwrap_or_default();
        for (cells, r) in t.rows.iter_mut().zip(&self.terms) {
            cells.push(match r.dimension_pinned.flatten() {
                _ if pinned.contains(&r.name) => "pinned".to_string(),
                Some(d) => format!("{d:.6}"),
                None => "disordered".to_string(),
            });
        }
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

fn opt_string<T: std::fmt::Display>(x: Option<T>) -> String {
    x.map(|v| v.to_string()).unwrap_or_default()
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
