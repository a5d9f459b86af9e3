//! Hunted competitors in the flow (`--competitors DELTA`).
//!
//! At each point the operator search ([`crate::search::hunt`], with the
//! model's symmetries) lists every allowed local operator with bare
//! Delta <= DELTA within the search range, by the model's own rules: |charge|
//! 0 or one of the terms' |allowed_charge| ([`ChargeFilter::Model`]), each
//! declared U(1) likewise, conformal spin 0 or that of one of the model's
//! local terms ([`SpinFilter::Model`]), momentum conserved when the model
//! gives momenta; those that are not already model terms (up to
//! sign and translation) join the model as terms named
//! `auto:<particle content>` with bare coupling `coupling` (default: the
//! smallest non-zero listed coupling at the point), and the phase of their
//! orbit's symmetric combination. The enlarged model is then flowed like
//! any model: the pairs closure (with its range rule, docs/physics.md
//! section 4, and the closure range of the model's own terms), staged
//! pinning and the phase naming all see them as terms.
//!
//! Invariants: the same competitors give the same enlarged system, built
//! once and shared by every point that finds them (a cache keyed by the
//! terms added); the model's own terms keep their rows, first, in model
//! order; a flow without competitors at a point is the plain flow.

use std::collections::HashMap;
use std::sync::{Arc, Mutex};

use super::channels::Plan;
use super::{Closure, Flow, FlowOptions, FlowResult};
use crate::core::system::System;
use crate::error::{Error, InputError};
use crate::math::rational::Rational;
use crate::model::{Content, Model, Scalar, TermSpec};
use crate::search::{
    self, ChargeFilter, HuntFlags, HuntOptions, HuntReport, Operator, SpinFilter, SymmetryChoice,
};

/// Prefix of the names of hunted competitors.
pub const PREFIX: &str = "auto:";

/// The flags that set the hunt's bound and window here, named by its
/// errors and refusals (E143 in docs/errors.md); its charge and spin
/// filters are the model's (no flag).
pub const COMPETITOR_FLAGS: HuntFlags = HuntFlags {
    max_dim: "--competitors",
    max_dim_value: "--competitors DELTA",
    range: "--competitor-range",
    symmetry: "--competitor-symmetry",
    filters: None,
};

/// What to hunt for at each point.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct CompetitorOptions {
    /// Operators with bare Delta <= delta join.
    pub delta: f64,
    /// Their bare coupling (None: the smallest non-zero listed coupling).
    pub coupling: Option<f64>,
    /// Arrays: the search range in wires (None: the widest model term).
    pub range: Option<usize>,
    /// Which symmetries filter them.
    #[serde(skip)]
    pub symmetry: SymmetryChoice,
    /// `--force`: flow an enlarged model above [`COMPETITOR_WORK_LIMIT`]
    /// (never above [`FORCED_WORK_CEILING`]).
    #[serde(skip)]
    pub force: bool,
}

/// Most work (channels^2 x fields, the channels counted without any the
/// closure adds) of a flow with hunted competitors run without `--force`.
/// Measured on explicit 12- and 16-field cuts of
/// `benches/models/explicit40.toml`: 758 channels on 12 fields (6.9e6) flow
/// in 1.1 s, 2811 on 16 fields (1.3e8) in 22 s with `--closure none` and
/// 25 s with the closure: about 6e6 units per second of one core, so the
/// limit is about 15 s.
pub const COMPETITOR_WORK_LIMIT: f64 = 1e8;

/// Most work even `--force` runs: 100 times the limit (a quarter of an
/// hour, memory growing with the square of the channels). A 40-field
/// explicit model has 391,607 operators with Delta <= 2.
pub const FORCED_WORK_CEILING: f64 = 100.0 * COMPETITOR_WORK_LIMIT;

impl CompetitorOptions {
    /// From the flags (`--competitors`, `--competitor-coupling`,
    /// `--competitor-range`) over the model's `[competitors]` table; None
    /// when neither gives a DELTA.
    pub fn resolve(
        model: &Model,
        delta: Option<f64>,
        coupling: Option<f64>,
        range: Option<usize>,
    ) -> Result<Option<CompetitorOptions>, InputError> {
        let table = &model.competitors;
        let Some(delta) = delta.or(table.delta) else {
            if coupling.is_some() || range.is_some() {
                return Err(InputError::new(
                    "command line",
                    "--competitors",
                    "--competitor-coupling and --competitor-range need --competitors DELTA (or `delta` in the model's [competitors] table)",
                ));
            }
            return Ok(None);
        };
        if !(delta.is_finite() && delta > 0.0) {
            return Err(InputError::new(
                "command line",
                "--competitors",
                format!("expected a scaling dimension > 0, found {delta}"),
            ));
        }
        Ok(Some(CompetitorOptions {
            delta,
            coupling: coupling.or(table.coupling),
            range: range.or(table.range),
            symmetry: SymmetryChoice::All,
            force: false,
        }))
    }
}

impl CompetitorOptions {
    /// These options with `--force` set as given.
    pub fn forced(self, force: bool) -> Self {
        CompetitorOptions { force, ..self }
    }
}

/// Enlarged systems and their flow plans, by the terms added.
type Cache = Mutex<HashMap<String, Arc<(System, Plan)>>>;

/// Flows with hunted competitors at every point.
pub struct Competing<'s> {
    sys: &'s System,
    plain: Flow<'s>,
    comp: CompetitorOptions,
    cache: Cache,
}

impl<'s> Competing<'s> {
    /// Prepare; the symmetry names are checked here.
    pub fn new(sys: &'s System, opts: FlowOptions, comp: CompetitorOptions) -> Result<Self, Error> {
        // The same check as `hunt --symmetry`, under this command's flag.
        search::symmetry::chosen(sys, &comp.symmetry, COMPETITOR_FLAGS.symmetry)?;
        Ok(Competing {
            sys,
            plain: Flow::new(sys, opts),
            comp,
            cache: Mutex::new(HashMap::new()),
        })
    }

    /// The flow options.
    pub fn options(&self) -> &FlowOptions {
        &self.plain.opts
    }

    /// Hunt, enlarge the model, flow.
    pub fn run(&self, point: &[f64]) -> Result<FlowResult, Error> {
        let report = match search::hunt(self.sys, point, &self.hunt_options()) {
            Ok(r) => r,
            // The plain flow reports the point (unphysical, inaccurate).
            Err(Error::Unphysical(_)) | Err(Error::Inaccurate(_)) => return self.plain.run(point),
            Err(Error::Refused(e)) => return Err(self.hunt_refused(e, point)),
            Err(e) => return Err(e),
        };
        if report.truncated {
            // More operators match than the limit allows competitors (with
            // every model term among them): refused without listing them.
            return Err(self.too_many(self.most_added(), true, point));
        }
        let y = self
            .comp
            .coupling
            .unwrap_or_else(|| search::smallest_coupling(self.sys, point));
        let terms = auto_terms(&report, y);
        if terms.is_empty() {
            return self.plain.run(point);
        }
        self.check_work(terms.len(), point)?;
        let names: Vec<String> = terms.iter().map(|t| t.name.clone()).collect();
        let built = self.enlarged(terms)?;
        let (sys, plan) = (&built.0, built.1.clone());
        let mut result = Flow::with_plan(sys, plan, self.enlarged_options()).run(point)?;
        for t in result
            .terms
            .iter_mut()
            .filter(|t| t.name.starts_with(PREFIX))
        {
            t.origin = "hunted".into();
        }
        result.competitors_added = names;
        Ok(result)
    }

    /// Refuse, before the enlarged model is built, a flow whose work with
    /// `added` competitors is above the limit in force ([`Self::work_limit`]).
    fn check_work(&self, added: usize, point: &[f64]) -> Result<(), Error> {
        match self.work(added) <= self.work_limit() {
            true => Ok(()),
            false => Err(self.too_many(added, false, point)),
        }
    }

    /// The most work run: [`COMPETITOR_WORK_LIMIT`], or with `--force`
    /// [`FORCED_WORK_CEILING`].
    fn work_limit(&self) -> f64 {
        match self.comp.force {
            true => FORCED_WORK_CEILING,
            false => COMPETITOR_WORK_LIMIT,
        }
    }

    /// Channels^2 x fields of the flow with `added` competitors: the plain
    /// flow's channels and the competitors' (a translate each when the plan
    /// splits families), not those the closure would add: a lower bound.
    fn work(&self, added: usize) -> f64 {
        let lat = &self.sys.lattice;
        let per = match self.plain.plan.split {
            true => lat
                .families
                .iter()
                .map(|f| f.translates.len())
                .max()
                .unwrap_or(1),
            false => 1,
        };
        let channels = (self.plain.plan.channels.len() + added * per) as f64;
        channels * channels * lat.n as f64
    }

    /// The most competitors within [`Self::work_limit`].
    fn most_added(&self) -> usize {
        let (mut lo, mut hi) = (0usize, 1usize);
        while self.work(hi) <= self.work_limit() {
            (lo, hi) = (hi, 2 * hi);
        }
        // work(lo) <= limit < work(hi), or lo = 0 when even 1 is too many.
        while hi - lo > 1 {
            let mid = lo + (hi - lo) / 2;
            match self.work(mid) <= self.work_limit() {
                true => lo = mid,
                false => hi = mid,
            }
        }
        lo
    }

    /// The hunt may stop once more operators match than
    /// [`Self::most_added`] competitors and every translate of the model's
    /// terms (the model terms among them) could be: the flow would be
    /// refused whatever the rest of the listing.
    fn stop_above(&self) -> usize {
        let translates: usize = self
            .sys
            .lattice
            .families
            .iter()
            .map(|f| f.translates.len())
            .sum();
        self.most_added() + translates
    }

    /// The refusal of a flow with `added` competitors (`more`: more than
    /// that many, the most within the limit; the hunt stopped there),
    /// naming the count and the ways out.
    fn too_many(&self, added: usize, more: bool, point: &[f64]) -> Error {
        let (count, work) = match more {
            true => (
                format!("more than {added}"),
                format!("more than {:.0e}", self.work_limit()),
            ),
            false => (
                added.to_string(),
                format!("at least {:.1e}", self.work(added)),
            ),
        };
        let found = format!(
            "at {} the hunt finds {count} competitors with bare Delta <= {}; their flow would take {work} units of work (channels^2 x fields, before the closure adds any; limit {COMPETITOR_WORK_LIMIT:.0e}, about 15 s)",
            self.sys.model.params.describe(point),
            self.comp.delta,
        );
        let how = if self.comp.force {
            format!("even --force stops at {FORCED_WORK_CEILING:.0e} (memory and time grow with the square of the channels): lower --competitors DELTA or narrow --competitor-range")
        } else {
            "lower --competitors DELTA, narrow --competitor-range, or pass --force to run it anyway"
                .to_string()
        };
        Error::refused("--competitors", format!("{found}; {how}"))
    }

    /// A refusal of the hunt at `point` (worded in this command's flags,
    /// [`COMPETITOR_FLAGS`]), with the point and the bound.
    fn hunt_refused(&self, e: InputError, point: &[f64]) -> Error {
        Error::refused(
            "--competitors",
            format!(
                "at {} the hunt for competitors with bare Delta <= {} is refused: {}",
                self.sys.model.params.describe(point),
                self.comp.delta,
                e.message
            ),
        )
    }

    /// The flow options of the enlarged model: the closure range stays the
    /// one of the model's own terms (given, or its default, the widest
    /// listed term plus one wire), so that competitors as wide as the search
    /// range do not widen it and pairs of far-apart competitors stay out.
    fn enlarged_options(&self) -> FlowOptions {
        let mut opts = self.plain.opts.clone();
        if opts.closure_range.is_none() {
            opts.closure_range = self.plain.plan.range;
        }
        opts
    }

    fn hunt_options(&self) -> HuntOptions {
        HuntOptions {
            max_dim: self.comp.delta,
            charge: ChargeFilter::Model,
            spin: SpinFilter::Model,
            range: self.comp.range,
            symmetry: self.comp.symmetry.clone(),
            force: self.comp.force,
            stop_above: Some(self.stop_above()),
            flags: COMPETITOR_FLAGS,
            ..HuntOptions::default()
        }
    }

    /// The model with these terms added and its flow plan (cached by the
    /// terms' content).
    fn enlarged(&self, terms: Vec<TermSpec>) -> Result<Arc<(System, Plan)>, Error> {
        let key: String = terms
            .iter()
            .map(|t| {
                format!(
                    "{}|{}|{}|{:?};",
                    t.name,
                    t.coupling.text(),
                    t.phase.text(),
                    t.group
                )
            })
            .collect();
        if let Some(sys) = self.cache.lock().ok().and_then(|c| c.get(&key).cloned()) {
            return Ok(sys);
        }
        let mut model = self.sys.model.clone();
        model.terms.extend(terms);
        let sys = System::new(model)?;
        let opts = self.enlarged_options();
        let plan = Plan::build(&sys, opts.closure == Closure::Pairs, opts.closure_range);
        let sys = Arc::new((sys, plan));
        if let Ok(mut c) = self.cache.lock() {
            c.entry(key).or_insert_with(|| sys.clone());
        }
        Ok(sys)
    }
}

/// The operators of a hunt that are not model terms, as terms.
fn auto_terms(report: &HuntReport, y: f64) -> Vec<TermSpec> {
    report
        .operators
        .iter()
        .enumerate()
        .filter(|(_, op)| op.model_term.is_none())
        .map(|(row, op)| {
            let (group, phase) = orbit_phase(report, row + 1);
            TermSpec {
                name: auto_name(op),
                content: Content::Particles,
                parts: parts(op),
                coupling: Scalar::Const(y),
                phase: Scalar::Const(phase),
                extra_dimension: Scalar::Const(0.0),
                extra_spin: Rational::from_integer(0.into()),
                target: false,
                allowed_charge: Rational::from_integer(op.charge.into()),
                allowed_charges: op
                    .charges
                    .iter()
                    .filter(|(_, q)| **q != 0)
                    .map(|(name, q)| (name.clone(), Rational::from_integer((*q).into())))
                    .collect(),
                group,
            }
        })
        .collect()
}

/// The orbit group (`auto_orbit_k`, when the orbit has several members)
/// and the phase chi = 2 pi (turns) of a row in its orbit's combination.
fn orbit_phase(report: &HuntReport, row: usize) -> (Option<String>, f64) {
    let Some(k) = report.operators[row - 1].orbit else {
        return (None, 0.0);
    };
    let orbit = &report.orbits[k - 1];
    let turns = orbit
        .members
        .iter()
        .find(|m| m.operator == Some(row))
        .map_or(0.0, |m| fraction(&m.phase));
    let group = (orbit.size > 1).then(|| format!("auto_orbit_{k}"));
    (group, 2.0 * std::f64::consts::PI * turns)
}

/// "p/q" or "0" as a number.
fn fraction(s: &str) -> f64 {
    match s.split_once('/') {
        Some((p, q)) => p.parse::<f64>().unwrap_or(0.0) / q.parse::<f64>().unwrap_or(1.0),
        None => s.parse().unwrap_or(0.0),
    }
}

/// (wire offset, particle content) parts of an operator.
fn parts(op: &Operator) -> Vec<(usize, Vec<i64>)> {
    match &op.particles_by_wire {
        Some(by_wire) => {
            let mut p: Vec<(usize, Vec<i64>)> = by_wire
                .iter()
                .filter_map(|(w, v)| w.parse().ok().map(|w| (w, v.clone())))
                .collect();
            p.sort_by_key(|x| x.0);
            p
        }
        None => vec![(0, op.particles.clone())],
    }
}

/// `auto:(1,-1,-1,1)` for explicit models, `auto:{0:(1,-1),1:(-1,1)}` for
/// arrays (particle content by wire offset).
pub fn auto_name(op: &Operator) -> String {
    let list = |v: &[i64]| {
        v.iter()
            .map(|x| x.to_string())
            .collect::<Vec<_>>()
            .join(",")
    };
    match &op.particles_by_wire {
        Some(_) => {
            let body: Vec<String> = parts(op)
                .iter()
                .map(|(w, v)| format!("{w}:({})", list(v)))
                .collect();
            format!("{PREFIX}{{{}}}", body.join(","))
        }
        None => format!("{PREFIX}({})", list(&op.particles)),
    }
}

/// One flow at `point`, with hunted competitors when `comp` asks for them
/// (`pinflow flow` and the Python package's `Model.flow`).
pub fn flow_once(
    sys: &System,
    point: &[f64],
    opts: &FlowOptions,
    comp: Option<CompetitorOptions>,
) -> Result<FlowResult, Error> {
    match comp {
        Some(c) => Competing::new(sys, opts.clone(), c)?.run(point),
        None => Flow::new(sys, opts.clone()).run(point),
    }
}
