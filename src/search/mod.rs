//! `pinflow hunt`: every local operator of a model with scaling dimension up
//! to a bound, at one parameter point, with a certificate when there is none.
//!
//! Method (docs/physics.md section 6). A local operator is
//! O = exp(i l.phi) with l = K m, m in Z^N its particle content, and
//!
//! ```text
//! Delta(m) = (1/2) l^T D l = (1/2) m^T (K D K) m,
//! ```
//!
//! a positive-definite quadratic form in m (D is positive definite and K
//! invertible). So the operators with Delta <= Delta_max are the integer
//! points of an ellipsoid: a finite set, listed exactly by LLL reduction and
//! Fincke-Pohst enumeration ([`ellipsoid`]). The filters are exact integer
//! arithmetic (charge t.m, conformal spin (1/2) m^T K m) except momentum
//! conservation, whose momenta are floats: |k| below
//! [`crate::core::momentum::MOMENTUM_TOLERANCE`] counts as conserved, unless every
//! momentum (and the momentum period G, when the model gives one) is a small
//! rational at the point, and then k = 0 (or k/G integral) is checked
//! exactly. With a period, k is reduced to (-G/2, G/2] first
//! ([`crate::core::momentum::reduce_momentum`]).
//!
//! Arrays: the search runs on a window of R consecutive wires ([`window`])
//! with the block of D on its fields, and lists one operator per
//! translation class, placed with its support starting at the window's first
//! wire. The bound is applied with a relative tolerance
//! [`BOUND_TOLERANCE`], stated in the output: operators with
//! Delta <= Delta_max (1 + 1e-9) are listed, so that a term exactly at the
//! bound (e.g. umklapp at K_L = 1/2) is not lost to rounding.
//!
//! Guard rails: before enumerating, the number of points is estimated from
//! the ellipsoid's volume and from random probes of the search tree; above
//! [`DEFAULT_LIMIT`] the search is refused (with the estimate and how to
//! narrow it) unless forced. The operators kept are bounded even when
//! forced ([`FORCED_MAX_LISTED`]: memory stays bounded), and
//! [`hunt_with_progress`] reports the points enumerated against the
//! estimate, so that a forced search is never silent.
//!
//! Owns: the search options, the search space (window, K, t, D, the form
//! G = K D K) and the enumeration with its filters; the report and
//! `--emit-terms` live in [`report`]. Invariants: no printing, no exit
//! codes; the same input gives the same operators in the same order
//! (dimension rounded to 1e-9, then particle content), whatever the
//! thread count.

pub mod breaks;
pub mod orbits;
pub mod report;
pub mod symmetry;
pub mod window;

use std::collections::BTreeSet;

use nalgebra::DMatrix;

use crate::core::system::{EvalPath, System};
use crate::error::{Error, InputError};
use crate::math::ellipsoid::Ellipsoid;
use crate::math::rational;
pub use orbits::OrbitReport;
pub use report::{emit_terms, render, Estimate, HuntReport, Operator};
pub use symmetry::SymmetryChoice;
use window::Window;

/// Relative tolerance on the dimension bound.
pub const BOUND_TOLERANCE: f64 = 1e-9;
/// Extra relative slack of the tree search over the tolerant bound (the
/// reduced basis computes the form with different rounding; every candidate
/// is re-checked with the model's D).
const SEARCH_SLACK: f64 = 1e-7;
/// Largest estimated number of lattice points searched without `--force`.
pub const DEFAULT_LIMIT: f64 = 5e7;
/// Most operators listed without `--force` (a memory guard for searches
/// with few filters).
pub const MAX_LISTED: usize = 1_000_000;
/// Most operators kept with `--force`: a forced search must still end in
/// bounded memory (a few hundred bytes per operator, under 2 GB).
pub const FORCED_MAX_LISTED: usize = 4_000_000;
/// Points within the bound between two progress reports.
const PROGRESS_EVERY: u64 = 1 << 20;

/// An unforced search stops once it has visited this many times the limit
/// in lattice points: the estimate can miss ellipsoids that are very long
/// in a few directions (a nearly null V), and the limit bounds the work,
/// not only its estimate.
const LIMIT_OVERRUN: f64 = 4.0;
/// Random probes of the tree estimate (fixed seed).
const PROBES: usize = 2048;
const PROBE_SEED: u64 = 0x0070_696e_666c_6f77;

/// Which conformal spins to keep.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SpinFilter {
    /// Spin zero only: the operators that can pin a mode on their own.
    Zero,
    /// Every spin.
    Any,
    /// The model's own rule: spin zero, or the conformal spin of one of the
    /// model's local terms (bosonic part, without extra spin).
    Model,
}

/// Momentum conservation (models that give momenta).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum MomentumFilter {
    /// Only operators whose momentum mismatch vanishes (within the tolerance).
    Conserved,
    /// Every momentum.
    Any,
}

/// Which charges to keep.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ChargeFilter {
    /// Charge t.m equal to this integer.
    Exactly(i64),
    /// Every charge.
    Any,
    /// The model's own rule: |t.m| zero or the |allowed_charge| of one of
    /// the model's terms (as the U(1) symmetries read `allowed_charge`).
    Model,
}

/// The charges and spins the model's own terms allow
/// ([`ChargeFilter::Model`], [`SpinFilter::Model`]).
#[derive(Debug, Clone, Default)]
struct ModelRules {
    /// |charge| values.
    charges: BTreeSet<i128>,
    /// Twice the conformal spins, m^T K m.
    twice_spins: BTreeSet<i128>,
}

impl ModelRules {
    fn of(sys: &System) -> ModelRules {
        let mut rules = ModelRules {
            charges: [0].into(),
            twice_spins: [0].into(),
        };
        for (spec, inv) in sys.model.terms.iter().zip(&sys.invariants.terms) {
            if spec.allowed_charge.is_integer() {
                let q: Option<i128> = spec.allowed_charge.to_integer().try_into().ok();
                rules.charges.extend(q.map(|q| q.abs()));
            }
            let twice = (&inv.spin - &spec.extra_spin) * rational::int(2);
            if inv.local && twice.is_integer() {
                let t: Option<i128> = twice.to_integer().try_into().ok();
                rules.twice_spins.extend(t);
            }
        }
        rules
    }
}

/// What to search for.
#[derive(Debug, Clone, PartialEq)]
pub struct HuntOptions {
    /// Largest dimension listed.
    pub max_dim: f64,
    /// Charge filter.
    pub charge: ChargeFilter,
    /// Spin filter.
    pub spin: SpinFilter,
    /// Arrays: wires in the window (None: [`window::default_range`]).
    pub range: Option<usize>,
    /// Momentum filter (None: conserved when the model gives momenta).
    pub momentum: Option<MomentumFilter>,
    /// Search even above the limit.
    pub force: bool,
    /// Largest estimated number of points searched without `force`.
    pub limit: f64,
    /// Most operators listed without `force`.
    pub max_listed: usize,
    /// Most operators listed with `force` (a hard bound on memory).
    pub forced_max_listed: usize,
    /// Which of the model's symmetries filter the operators.
    pub symmetry: SymmetryChoice,
    /// Stop as soon as more than this many operators are certain to be
    /// listed, and return a report with no operators marked
    /// [`HuntReport::truncated`]: for callers that only need to know that
    /// the count passes a bound (hunted competitors). Certain means past
    /// every filter: it applies only when no Z_n map is in use (orbit sums
    /// that vanish remove operators after the enumeration).
    pub stop_above: Option<usize>,
    /// The names of the flags that set these options, for the errors and
    /// refusals that name them.
    pub flags: HuntFlags,
}

/// The names under which a command sets the search's bound and window:
/// its errors and refusals name them at the source, so that a command that
/// runs the search under flags of its own (`flow --competitors`) needs no
/// rewording.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct HuntFlags {
    /// Sets [`HuntOptions::max_dim`]; the key of the search's refusals.
    pub max_dim: &'static str,
    /// The same with its value, as a refusal asks for a smaller one.
    pub max_dim_value: &'static str,
    /// Sets [`HuntOptions::range`].
    pub range: &'static str,
    /// Sets [`HuntOptions::symmetry`].
    pub symmetry: &'static str,
    /// The filters a refusal of too many operators suggests (None: the
    /// command has no such flags).
    pub filters: Option<&'static str>,
}

impl HuntFlags {
    /// Those of `hunt` itself.
    pub const HUNT: HuntFlags = HuntFlags {
        max_dim: "--max-dim",
        max_dim_value: "--max-dim",
        range: "--range",
        symmetry: "--symmetry",
        filters: Some("--spin 0 and --charge 0"),
    };
}

impl Default for HuntFlags {
    fn default() -> Self {
        HuntFlags::HUNT
    }
}

impl Default for HuntOptions {
    fn default() -> Self {
        HuntOptions {
            max_dim: 2.0,
            charge: ChargeFilter::Exactly(0),
            spin: SpinFilter::Zero,
            range: None,
            momentum: None,
            force: false,
            limit: DEFAULT_LIMIT,
            max_listed: MAX_LISTED,
            forced_max_listed: FORCED_MAX_LISTED,
            symmetry: SymmetryChoice::All,
            stop_above: None,
            flags: HuntFlags::HUNT,
        }
    }
}

/// The data of the search space: window, exact K and t on it, the form G.
struct Space {
    window: Window,
    k: Vec<Vec<i64>>,
    t: Vec<i64>,
    d: DMatrix<f64>,
    gram: DMatrix<f64>,
    /// Non-zero entries of each row of K.
    k_rows: Vec<Vec<(usize, i64)>>,
    /// The model's symmetries in force at the point.
    sym: symmetry::InUse,
    /// The charges and spins of the model's own terms.
    rules: ModelRules,
}

impl Space {
    /// The space on `window`, whose D is `d` (window fields only).
    fn new(sys: &System, d: DMatrix<f64>, window: Window, sym: symmetry::InUse) -> Space {
        let idx = window.field_indices();
        let n = idx.len();
        let k: Vec<Vec<i64>> = idx
            .iter()
            .map(|&i| idx.iter().map(|&j| sys.lattice.k[i][j]).collect())
            .collect();
        let t: Vec<i64> = idx.iter().map(|&i| sys.lattice.charge[i]).collect();
        let kf = DMatrix::from_fn(n, n, |a, b| k[a][b] as f64);
        let gram = &kf * &d * &kf;
        let gram = (&gram + gram.transpose()) * 0.5;
        let k_rows = k
            .iter()
            .map(|row| {
                row.iter()
                    .enumerate()
                    .filter(|(_, x)| **x != 0)
                    .map(|(j, x)| (j, *x))
                    .collect()
            })
            .collect();
        Space {
            window,
            k,
            t,
            d,
            gram,
            k_rows,
            sym,
            rules: ModelRules::of(sys),
        }
    }

    /// l = K m on the window (None on overflow).
    fn vector(&self, m: &[i64]) -> Option<Vec<i64>> {
        self.k
            .iter()
            .map(|row| {
                row.iter()
                    .zip(m)
                    .try_fold(0i64, |acc, (a, b)| acc.checked_add(a.checked_mul(*b)?))
            })
            .collect()
    }

    /// (1/2) m^T G m over the non-zero entries `nz` of m.
    fn half_form(&self, m: &[i64], nz: &[usize]) -> f64 {
        let mut s = 0.0;
        for &i in nz {
            let mut row = 0.0;
            for &j in nz {
                row += self.gram[(i, j)] * m[j] as f64;
            }
            s += m[i] as f64 * row;
        }
        0.5 * s
    }

    /// m^T K m over the non-zero entries `nz` of m, with K's sparse rows.
    fn twice_spin_sparse(&self, m: &[i64], nz: &[usize]) -> i128 {
        nz.iter()
            .map(|&i| {
                let row: i128 = self.k_rows[i]
                    .iter()
                    .map(|&(j, kij)| kij as i128 * m[j] as i128)
                    .sum();
                m[i] as i128 * row
            })
            .sum()
    }

    /// m^T K m (twice the conformal spin), exactly.
    fn twice_spin(&self, m: &[i64]) -> i128 {
        let mut s = 0i128;
        for (i, row) in self.k.iter().enumerate() {
            if m[i] == 0 {
                continue;
            }
            for (j, kij) in row.iter().enumerate() {
                if m[j] != 0 && *kij != 0 {
                    s += m[i] as i128 * *kij as i128 * m[j] as i128;
                }
            }
        }
        s
    }

    fn charge(&self, m: &[i64]) -> i128 {
        m.iter()
            .zip(&self.t)
            .map(|(a, b)| *a as i128 * *b as i128)
            .sum()
    }
}

/// Largest denominator for momenta to be treated as exact rationals.
pub const MAX_MOMENTUM_DENOMINATOR: i64 = 10_000;

/// The search carries D in doubles: refuse a point where a single field's
/// dimension (l = e_i) from that D has an error bound above
/// [`crate::core::fixed_point::DIMENSION_ERROR_LIMIT`] (ill-conditioned V).
fn check_carried(
    sys: &System,
    point: &[f64],
    fp: &crate::core::fixed_point::FixedPoint,
) -> Result<(), Error> {
    let limit = crate::core::fixed_point::DIMENSION_ERROR_LIMIT;
    let n = fp.d.nrows();
    for i in 0..n {
        let l: Vec<i64> = (0..n).map(|j| (j == i) as i64).collect();
        let e = fp.dimension_error(&l) + fp.storage_error(&l);
        if e > limit || e.is_nan() {
            return Err(Error::Inaccurate(format!(
                "{}: the operator search at {} cannot be done accurately: D carried in doubles gives field {i} a dimension error bound of {e:.1e} (relative; at most {limit:.0e} is accepted), V is badly conditioned there; choose another point",
                sys.model.file,
                sys.model.params.describe(point)
            )));
        }
    }
    Ok(())
}

/// D on the window's fields (in `Window::field_indices` order), exact: the
/// block of the dense fixed point for open arrays and explicit models; for
/// a periodic array, the real-space window D_{j,j'} = (1/W) sum_q
/// e^{+iq(j-j')} D(q), exact on its W momenta (per-q cell problems: no N^3
/// work, no error bound growing with the number of fields, and nothing of
/// size N^2); for an infinite array, the same integral on the converged
/// q-space rule.
fn window_d(sys: &System, point: &[f64], window: &Window) -> Result<DMatrix<f64>, Error> {
    let block = |d: DMatrix<f64>| {
        let idx = window.field_indices();
        DMatrix::from_fn(idx.len(), idx.len(), |a, b| d[(idx[a], idx[b])])
    };
    match sys.eval_path() {
        EvalPath::Dense => dense_d(sys, point).map(block),
        EvalPath::Ring => match sys.real_space_window(point, window.wires) {
            // D(q) in doubles not accurate enough (V(q) ill-conditioned):
            // the dense route, with its extended precision and its bound.
            Err(Error::Numerical(_)) => dense_d(sys, point).map(block),
            r => Ok(r?.0),
        },
        EvalPath::Infinite => Ok(sys.real_space_window(point, window.wires)?.0),
    }
}

/// The dense fixed point's D, refused where carrying it in doubles would
/// make a field's dimension inaccurate.
fn dense_d(sys: &System, point: &[f64]) -> Result<DMatrix<f64>, Error> {
    let fp = sys.fixed_point(point)?;
    check_carried(sys, point, &fp)?;
    Ok(fp.d)
}

/// Momenta recognised as rationals at a point, with the momentum period
/// when the model gives one (also rational).
type ExactMomenta = (Vec<rational::Rational>, Option<rational::Rational>);

/// An error about a command-line option.
fn cmd_error(key: &str, m: String) -> Error {
    Error::Input(InputError::new("command line", key, m))
}

/// The momenta of the fields at a point and how they are compared.
struct Momenta {
    /// Momentum of each field (None: the model gives none).
    k: Option<Vec<f64>>,
    /// The momentum period G (umklapp), finite and positive after check_point.
    period: Option<f64>,
    /// The momenta (and G) as exact rationals, when all are small rationals.
    exact: Option<ExactMomenta>,
    /// The filter in force.
    filter: Option<MomentumFilter>,
}

impl Momenta {
    /// Read the momenta at a point; fail on a filter the model cannot serve
    /// or on a non-finite momentum.
    fn at(sys: &System, point: &[f64], opts: &HuntOptions) -> Result<Momenta, Error> {
        let k = sys.lattice.momenta(&sys.model, point);
        let filter = match (opts.momentum, &k) {
            (Some(MomentumFilter::Conserved), None) => {
                return Err(cmd_error(
                    "--momentum",
                    "the model gives no momenta (fields.momentum or array.momentum); omit the flag or use `--momentum any`".into(),
                ))
            }
            (Some(f), Some(_)) => Some(f),
            (None, Some(_)) => Some(MomentumFilter::Conserved),
            (_, None) => None,
        };
        if let Some(k) = &k {
            if let Some(i) = k.iter().position(|x| !x.is_finite()) {
                return Err(Error::Input(InputError::new(
                    &sys.model.file,
                    "momentum",
                    format!(
                        "the momentum of field {i} is {} at {}; expected a finite number",
                        k[i],
                        sys.model.params.describe(point)
                    ),
                )));
            }
        }
        let period = sys.model.momentum_period_at(point);
        let exact = k.as_ref().and_then(|k| exact_momenta(k, period));
        Ok(Momenta {
            k,
            period,
            exact,
            filter,
        })
    }

    /// The momentum of an operator with particle content `full` on the
    /// lattice (reduced by the period), and whether it is conserved: exactly
    /// when the momenta are rational, else within the tolerance.
    fn of(&self, full: &[i64]) -> (Option<f64>, bool) {
        let k = self.k.as_ref().map(|p| {
            full.iter()
                .zip(p)
                .filter(|(a, _)| **a != 0)
                .map(|(a, b)| *a as f64 * b)
                .sum::<f64>()
        });
        let k = k.map(|k| crate::core::momentum::reduce_momentum(k, self.period));
        let conserved = match (&self.exact, k) {
            (Some((q, g)), _) => {
                let k = rational::dot_int(q, full);
                match g {
                    Some(g) => (k / g).is_integer(),
                    None => num_traits::Zero::is_zero(&k),
                }
            }
            (None, Some(k)) => k.abs() < crate::core::momentum::MOMENTUM_TOLERANCE,
            (None, None) => true,
        };
        (k, conserved)
    }

    /// Whether an operator with particle content `full` passes the
    /// momentum filter (as in [`operator`]).
    fn listed(&self, full: &[i64]) -> bool {
        self.filter != Some(MomentumFilter::Conserved) || self.of(full).1
    }
}

/// Momenta that are all small rationals at this point are compared
/// exactly, and so is the period when there is one: k is conserved iff k/G
/// is an integer. An irrational period (2 pi, say) sends the comparison to
/// the float path with its tolerance.
fn exact_momenta(k: &[f64], period: Option<f64>) -> Option<ExactMomenta> {
    let small = |x: f64| rational::small_rational(x, MAX_MOMENTUM_DENOMINATOR, 1e-12);
    let k = k.iter().map(|x| small(*x)).collect::<Option<Vec<_>>>()?;
    let g = match period {
        // A tiny G could be recognised as 0: keep it on the float path.
        Some(g) => Some(small(g).filter(|g| !num_traits::Zero::is_zero(g))?),
        None => None,
    };
    Some((k, g))
}

/// The search bounds: `accept` on Delta, `bound` on m^T G m for the tree.
fn bounds(opts: &HuntOptions) -> (f64, f64) {
    let accept = opts.max_dim * (1.0 + BOUND_TOLERANCE);
    (accept, 2.0 * accept * (1.0 + SEARCH_SLACK))
}

/// Estimate the work; refuse above the limit unless forced.
fn estimate(ell: &Ellipsoid, space: &Space, opts: &HuntOptions) -> Result<Estimate, Error> {
    let bound = bounds(opts).1;
    let estimate = Estimate {
        volume: ell.volume_estimate(bound),
        tree: ell.tree_estimate(bound, PROBES, PROBE_SEED),
        limit: opts.limit,
    };
    if estimate.points() > opts.limit && !opts.force {
        return Err(Error::refused(
            opts.flags.max_dim,
            format!(
                "the search would examine about {:.2e} lattice points in {} dimensions (ellipsoid volume {:.2e}, search-tree estimate {:.2e}), above the limit {:.0e}; narrow it with {}, or pass --force to run it anyway",
                estimate.points(),
                ell.dim(),
                estimate.volume,
                estimate.tree,
                opts.limit,
                narrower(space, opts)
            ),
        ));
    }
    Ok(estimate)
}

/// What the enumeration kept.
struct Found {
    /// Canonical placements of the classes that pass the exact filters.
    kept: BTreeSet<Vec<i64>>,
    /// Points within the bound (before the filters).
    candidates: u64,
    /// Nodes of the search tree visited.
    examined: u64,
    /// Stopped at [`HuntOptions::stop_above`].
    truncated: bool,
}

/// Enumerate: keep the canonical placement of each class that passes the
/// exact filters and the bound (recomputed from the window's D).
fn enumerate(
    ell: &Ellipsoid,
    space: &Space,
    opts: &HuntOptions,
    momenta: &Momenta,
    progress: &mut dyn FnMut(u64),
) -> Result<Found, Error> {
    let (accept, bound) = bounds(opts);
    let cap = listing_cap(opts);
    // Listed for certain: kept and past the momentum filter (counted only
    // when stopping early is asked for and no Z_n map can remove any).
    let stop_above = opts.stop_above.filter(|_| !space.sym.has_maps());
    let (mut certain, mut truncated) = (0usize, false);
    let mut kept: BTreeSet<Vec<i64>> = BTreeSet::new();
    let mut candidates = 0u64;
    let mut nz: Vec<usize> = Vec::with_capacity(space.t.len());
    let (mut visited, mut overran) = (0u64, false);
    let stop_at = if opts.force {
        f64::INFINITY
    } else {
        LIMIT_OVERRUN * opts.limit
    };
    let visit = ell
        .for_each(bound, |m, _| {
            visited += 1;
            if visited as f64 > stop_at {
                overran = true;
                return false;
            }
            nz.clear();
            nz.extend((0..m.len()).filter(|&i| m[i] != 0));
            if space.half_form(m, &nz) > accept {
                return true;
            }
            candidates += 1;
            if candidates.is_multiple_of(PROGRESS_EVERY) {
                progress(candidates);
            }
            if !passes(space, opts, m, &nz) {
                return true;
            }
            let canon = space.window.canonical(m);
            let is_placement = canon.as_slice() == m || canon.iter().zip(m).all(|(a, b)| *a == -b);
            if is_placement {
                if let Some(s) = stop_above {
                    if !kept.contains(&canon) && momenta.listed(&space.window.place(&canon)) {
                        certain += 1;
                        if certain > s {
                            truncated = true;
                            return false;
                        }
                    }
                }
                kept.insert(canon);
                if kept.len() > cap {
                    return false;
                }
            }
            true
        })
        .map_err(|e| Error::Numerical(format!("operator search: {e}")))?;
    if overran {
        return Err(overrun_error(space, opts, visited));
    }
    if kept.len() > cap {
        let how = if opts.force {
            " (the bound of a forced search, which keeps its memory bounded)"
        } else {
            ""
        };
        let filters = match opts.flags.filters {
            Some(f) => format!(", the filters {f}"),
            None => String::new(),
        };
        return Err(Error::refused(
            opts.flags.max_dim,
            format!(
                "more than {cap} operators match{how}; narrow the search with {}{filters}{}",
                narrower(space, opts),
                if opts.force { "" } else { ", or pass --force" }
            ),
        ));
    }
    Ok(Found {
        kept,
        candidates,
        examined: visit.examined,
        truncated,
    })
}

/// The refusal of an unforced search that visited more than
/// [`LIMIT_OVERRUN`] times its limit although its estimate was below it.
fn overrun_error(space: &Space, opts: &HuntOptions, visited: u64) -> Error {
    Error::refused(
        opts.flags.max_dim,
        format!(
            "the search passed {visited} lattice points, more than {LIMIT_OVERRUN} times the limit {:.0e} its estimate stayed below (the ellipsoid is very long in some direction: V is nearly singular at this point); narrow it with {}, or pass --force to run it anyway",
            opts.limit,
            narrower(space, opts)
        ),
    )
}

/// How a refusal asks for a smaller search, in the caller's flags
/// ([`HuntOptions::flags`]): "a smaller --max-dim", and "or --range" on
/// arrays (whose window can narrow).
fn narrower(space: &Space, opts: &HuntOptions) -> String {
    let flags = &opts.flags;
    match space.window.array {
        true => format!("a smaller {} or {}", flags.max_dim_value, flags.range),
        false => format!("a smaller {}", flags.max_dim_value),
    }
}

/// Most operators kept: `max_listed`, or with `force` the larger
/// `forced_max_listed` (never unbounded).
fn listing_cap(opts: &HuntOptions) -> usize {
    if opts.force {
        opts.forced_max_listed.max(opts.max_listed)
    } else {
        opts.max_listed
    }
}

/// The exact filters on a point m (non-zero entries `nz`): charge, spin,
/// and a placement touching the window's first wire.
fn passes(space: &Space, opts: &HuntOptions, m: &[i64], nz: &[usize]) -> bool {
    let q: i128 = nz.iter().map(|&i| m[i] as i128 * space.t[i] as i128).sum();
    let charge_ok = match opts.charge {
        ChargeFilter::Any => true,
        ChargeFilter::Exactly(c) => q.abs() == (c as i128).abs(),
        ChargeFilter::Model => space.rules.charges.contains(&q.abs()),
    };
    let spin_ok = || match opts.spin {
        SpinFilter::Any => true,
        SpinFilter::Zero => space.twice_spin_sparse(m, nz) == 0,
        SpinFilter::Model => space
            .rules
            .twice_spins
            .contains(&space.twice_spin_sparse(m, nz)),
    };
    charge_ok
        && spin_ok()
        && space.sym.passes_u1(m, nz)
        // A canonical placement touches the window's first wire.
        && space.window.touches_first(m)
}

/// The operator of one kept class (sign flipped for a negative charge
/// filter), or None when the momentum filter drops it.
fn operator(
    sys: &System,
    space: &Space,
    momenta: &Momenta,
    terms: &TermIndex,
    canon: &[i64],
    flip: bool,
) -> Result<Option<Operator>, Error> {
    let m: Vec<i64> = if flip {
        canon.iter().map(|x| -x).collect()
    } else {
        canon.to_vec()
    };
    let l = space
        .vector(&m)
        .ok_or_else(|| Error::Numerical("K m overflowed 64-bit integers".into()))?;
    let dimension = crate::core::fixed_point::quad_form(&space.d, &l);
    let full = space.window.place(&m);
    let (k, conserved) = momenta.of(&full);
    if momenta.filter == Some(MomentumFilter::Conserved) && !conserved {
        return Ok(None);
    }
    let k = k.map(|k| if conserved { 0.0 } else { k });
    let spin = rational::Rational::new(space.twice_spin(&m).into(), 2.into());
    Ok(Some(Operator {
        particles_by_wire: space.window.array.then(|| {
            space
                .window
                .parts(&m)
                .into_iter()
                .map(|(w, v)| (w.to_string(), v))
                .collect()
        }),
        wires: space.window.support(&m),
        charge: space.charge(&m) as i64,
        spin: rational::fmt_rational(&spin),
        dimension,
        rg_eigenvalue: crate::core::relevance::rg_eigenvalue(dimension),
        momentum: k,
        model_term: terms.get(canon).cloned(),
        competitors: competitors(sys, &full),
        charges: space.sym.charges(&m),
        orbit: None,
        particles: m,
        vector: l,
    }))
}

/// Run the search at a parameter point.
pub fn hunt(sys: &System, point: &[f64], opts: &HuntOptions) -> Result<HuntReport, Error> {
    hunt_with_progress(sys, point, opts, &mut |_| {})
}

/// What a search reports while it runs.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Progress {
    /// The estimate of the points to enumerate, before the enumeration.
    Estimated(f64),
    /// Points within the bound enumerated so far (every 2^20).
    Enumerated(u64),
}

/// [`hunt`], calling `progress` with the estimate and then every 2^20
/// points enumerated (for a progress bar; it must not print to stdout).
pub fn hunt_with_progress(
    sys: &System,
    point: &[f64],
    opts: &HuntOptions,
    progress: &mut dyn FnMut(Progress),
) -> Result<HuntReport, Error> {
    if !(opts.max_dim.is_finite() && opts.max_dim > 0.0) {
        return Err(cmd_error(
            opts.flags.max_dim,
            format!(
                "expected a finite number > 0 (a scaling dimension), found {}",
                opts.max_dim
            ),
        ));
    }
    sys.model.check_point(point)?;
    let window = Window::choose(sys, opts.range, opts.flags.range)?;
    let chosen = symmetry::chosen(sys, &opts.symmetry, opts.flags.symmetry)?;
    let momenta = Momenta::at(sys, point, opts)?;
    sys.check_dense_size(opts.force)?;
    let d = window_d(sys, point, &window)?;
    let sym = symmetry::in_use(sys, point, &chosen, &window)?;
    let space = Space::new(sys, d, window, sym);
    let ell = Ellipsoid::new(&space.gram)
        .map_err(|e| Error::Numerical(format!("operator search: {e}")))?;
    let estimate = estimate(&ell, &space, opts)?;
    progress(Progress::Estimated(estimate.points()));
    let found = enumerate(&ell, &space, opts, &momenta, &mut |n| {
        progress(Progress::Enumerated(n))
    })?;
    let terms = term_index(sys, &space.window);
    let operators = match found.truncated {
        true => Vec::new(),
        false => listed_operators(sys, &space, &momenta, opts, &found, &terms)?,
    };
    let grouped = orbits::group(&space.window, &space.sym, operators, &terms)?;
    let mut report = HuntReport::new(
        sys,
        point,
        opts,
        &space.window,
        momenta.filter,
        estimate,
        found.examined,
        found.candidates,
        ell.reduction.capped,
        grouped.operators,
        momenta.exact.is_some(),
    );
    report.set_symmetries(&space.sym, grouped.orbits, grouped.removed);
    report.truncated = found.truncated;
    Ok(report)
}

/// The operators of the kept classes that pass the momentum filter, sorted
/// by dimension, then particle content (largest first).
fn listed_operators(
    sys: &System,
    space: &Space,
    momenta: &Momenta,
    opts: &HuntOptions,
    found: &Found,
    terms: &TermIndex,
) -> Result<Vec<Operator>, Error> {
    let flip = matches!(opts.charge, ChargeFilter::Exactly(c) if c < 0);
    let mut operators = Vec::with_capacity(found.kept.len());
    for canon in &found.kept {
        operators.extend(operator(sys, space, momenta, terms, canon, flip)?);
    }
    operators.sort_by(|a, b| {
        dim_key(a.dimension)
            .cmp(&dim_key(b.dimension))
            .then_with(|| b.particles.cmp(&a.particles))
    });
    Ok(operators)
}

/// The default bare coupling of emitted terms and hunted competitors: the
/// smallest non-zero |y| among the model's terms at the point (0.1, the
/// model default, when there is none).
pub fn smallest_coupling(sys: &System, point: &[f64]) -> f64 {
    sys.model
        .terms
        .iter()
        .map(|t| t.coupling.eval(point).abs())
        .filter(|y| y.is_finite() && *y > 0.0)
        .fold(None, |m: Option<f64>, y| Some(m.map_or(y, |m| m.min(y))))
        .unwrap_or(0.1)
}

/// Sort key of a dimension: rounded to 1e-9 so that equal dimensions (up to
/// rounding) sort by particle content (largest first), deterministically.
fn dim_key(d: f64) -> i64 {
    (d * 1e9).round() as i64
}

/// Canonical forms of the model's terms on the window -> term name,
/// computed once per search (the particle content of a term is a big
/// rational solve; terms wider than the window have none). The first term
/// of a form wins, as in the model's order.
pub(crate) type TermIndex = std::collections::HashMap<Vec<i64>, String>;

fn term_index(sys: &System, window: &Window) -> TermIndex {
    let inv = &sys.invariants;
    let mut index = TermIndex::new();
    for (spec, m) in sys.model.terms.iter().zip(&inv.terms) {
        let canon = rational::to_integers(&m.particles).and_then(|m| window.canonical_full(&m));
        if let Some(c) = canon {
            index.entry(c).or_insert_with(|| spec.name.clone());
        }
    }
    index
}

/// Model terms with a translate that does not commute with the operator:
/// m^T l' = l^T K^-1 l' != 0 (an integer, since m is integral).
fn competitors(sys: &System, full_m: &[i64]) -> Vec<String> {
    sys.model
        .terms
        .iter()
        .zip(&sys.lattice.families)
        .filter(|(_, fam)| {
            fam.translates.iter().any(|t| {
                full_m
                    .iter()
                    .zip(&t.l)
                    .map(|(a, b)| *a as i128 * *b as i128)
                    .sum::<i128>()
                    != 0
            })
        })
        .map(|(spec, _)| spec.name.clone())
        .collect()
}
