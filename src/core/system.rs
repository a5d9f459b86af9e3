//! A model made ready for evaluation: the validated model, its dense
//! lattice and its exact invariants, computed once; and the evaluation of
//! the fixed point at parameter points.
//!
//! Two paths evaluate the fixed point of an array. The dense path
//! ([`System::fixed_point`]) works on all N = W n_c fields, O(N^3). The
//! q-space path ([`System::q_fixed_point`], [`crate::core::qspace`]) serves
//! periodic arrays of W >= 2 wires (W points, O(W n_c^3), exactly the same
//! numbers up to rounding) and the infinite array (a refined quadrature,
//! [`System::q_converged`]). An infinite array has no dense path: its
//! `lattice` is the periodic stand-in ring used for exact data.
//!
//! Also owns the wording of every refusal of dense work above its limit
//! ([`System::refuse_dense`], [`DenseWork`]); each caller keeps its limit.

use std::path::Path;

use nalgebra::DMatrix;

use crate::core::fixed_point::{FixedPoint, Unphysical};
use crate::core::invariants::Invariants;
use crate::core::lattice::{self, Lattice};
use crate::core::qspace::{self, NotPositive, QFixedPoint, Quadrature};
use crate::error::{Error, InputError};
use crate::model::{Boundary, Content, Model};

/// Largest violation of D K D = K^-1 (relative) accepted in a computed
/// fixed point. A nearly singular V (condition number around 1e12 and up)
/// loses about that factor of the float precision in D; when the identity
/// holds only worse than this, the point is refused with a message that
/// says so, instead of reporting dimensions with no correct digits.
pub const ACCURACY: f64 = 1e-6;

/// A model with everything that does not depend on the parameter point.
#[derive(Debug, Clone)]
pub struct System {
    /// The validated model.
    pub model: Model,
    /// Its dense realisation.
    pub lattice: Lattice,
    /// Exact data (independent of V).
    pub invariants: Invariants,
    /// K as floats.
    pub k: DMatrix<f64>,
    /// The cell data of the q-space path: periodic arrays of two or more
    /// wires and infinite arrays; None otherwise.
    pub q: Option<QModel>,
}

/// What the q-space path needs of a model, computed once.
#[derive(Debug, Clone)]
pub struct QModel {
    /// K of one wire's cell.
    pub k: DMatrix<f64>,
    /// Its inverse.
    pub kinv: DMatrix<f64>,
    /// Every term as (wire offset, cell lattice vector) parts.
    pub terms: Vec<Vec<(usize, Vec<f64>)>>,
    /// Largest separation of an interaction block or a term.
    pub range: usize,
    /// The array is infinite (else periodic with `wires` wires).
    pub infinite: bool,
}

/// Which algebra evaluates the fixed point of a system: decided once, here,
/// for every engine.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum EvalPath {
    /// All N fields as dense matrices (explicit models, open arrays, rings
    /// of one wire).
    Dense,
    /// A periodic array of W >= 2 wires, per q on its W points (the same
    /// numbers as the dense path up to rounding).
    Ring,
    /// The infinite array: per q on a refined quadrature; it has no dense
    /// path.
    Infinite,
}

/// Largest scale of V's entries (and inverse of the smallest) taken as
/// ordinary: squares and products of entries stay normal doubles.
const V_RANGE: f64 = 1e100;

/// A condition number of V above which V is named as the cause of an
/// inaccurate fixed point (double precision keeps about 16 digits; the
/// fixed point loses about as many as log10 of the condition number).
const V_CONDITION: f64 = 1e8;

/// Entries of K from which K is named as the cause of an inaccurate fixed
/// point (D K D: products of three entries of K and D).
const K_LARGE: f64 = 1e4;

/// Most fields evaluated on the dense path without `--force` (`dims`,
/// `hunt`): its eigendecompositions take work growing like N^3 (about 0.2 s
/// of one core at 400 fields, half a minute at 2000). Periodic and infinite
/// arrays go through q-space and are not limited.
pub const DENSE_FIELDS_LIMIT: usize = 1024;

/// The work on the dense path that a refusal names
/// ([`System::refuse_dense`], which owns the wording of both).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum DenseWork {
    /// The fixed point at a point (`dims`, `hunt`; limit
    /// [`DENSE_FIELDS_LIMIT`]).
    FixedPoint,
    /// A flow (`flow`, `scan`; its limit lives in `flow::limits`): every
    /// step of the integration multiplies N x N matrices.
    Flow,
}

impl System {
    /// Refuse, before any work, a dense fixed point above
    /// [`DENSE_FIELDS_LIMIT`] fields unless `force`, naming the estimate and
    /// the flag.
    pub fn check_dense_size(&self, force: bool) -> Result<(), Error> {
        self.refuse_dense(DENSE_FIELDS_LIMIT, force, DenseWork::FixedPoint)
    }

    /// Refuse `work` on the dense path above `limit` fields unless `force`
    /// ([`Self::dense_above`]): the one wording of every such refusal (E141
    /// in docs/errors.md), with the estimate, `--force` and the periodic
    /// array as the ways out.
    pub fn refuse_dense(&self, limit: usize, force: bool, work: DenseWork) -> Result<(), Error> {
        let Some((n, factor)) = self.dense_above(limit, force) else {
            return Ok(());
        };
        let (task, verb, step, at_limit) = match work {
            DenseWork::FixedPoint => (
                "the fixed point",
                "is computed with",
                String::new(),
                "a few seconds",
            ),
            DenseWork::Flow => (
                "the flow",
                "runs on",
                format!(": every step multiplies {n} x {n} matrices"),
                "several seconds per flow",
            ),
        };
        Err(Error::refused(
            "--force",
            format!(
                "{task} of all {n} fields {verb} dense matrices (an open array or an explicit model){step}, work growing like N^3, about {factor:.1} times that of {limit} fields (the limit, {at_limit}); pass --force to run it anyway, or use a periodic array (computed per momentum q)"
            ),
        ))
    }

    /// For a refusal of dense work: the number of fields and (N / limit)^3
    /// when this system takes the dense path with more than `limit` fields
    /// and `force` is not given; None otherwise.
    pub fn dense_above(&self, limit: usize, force: bool) -> Option<(usize, f64)> {
        let n = self.lattice.n;
        let refused = !force && self.eval_path() == EvalPath::Dense && n > limit;
        refused.then(|| (n, (n as f64 / limit as f64).powi(3)))
    }

    /// Load a model file and prepare it.
    pub fn load(path: &Path) -> Result<System, InputError> {
        System::new(Model::load(path)?)
    }

    /// Prepare a validated model.
    pub fn new(model: Model) -> Result<System, InputError> {
        let lattice = if model.is_infinite() {
            Lattice::stand_in(&model)?
        } else {
            Lattice::build(&model)?
        };
        let invariants = Invariants::compute(&model, &lattice)?;
        let k = lattice.k_f64();
        let periodic = lattice.boundary == Some(Boundary::Periodic) && lattice.wires >= 2;
        let q = periodic.then(|| QModel::new(&model, &lattice, &invariants));
        let sys = System {
            model,
            lattice,
            invariants,
            k,
            q,
        };
        crate::core::pinned::set::check_targets(&sys)?;
        Ok(sys)
    }

    /// True for an infinite array.
    pub fn is_infinite(&self) -> bool {
        self.lattice.infinite
    }

    /// The algebra that evaluates this system by default.
    pub fn eval_path(&self) -> EvalPath {
        if self.is_infinite() {
            EvalPath::Infinite
        } else if self.q.is_some() {
            EvalPath::Ring
        } else {
            EvalPath::Dense
        }
    }

    /// The V blocks V^(0), V^(1), ... at a point (checked: finite, block 0
    /// symmetric); errors name the entry and the point.
    pub fn v_blocks(&self, point: &[f64]) -> Result<Vec<DMatrix<f64>>, Error> {
        let blocks = lattice::eval_blocks(&self.model, point)
            .and_then(|b| lattice::check_block_symmetric(&self.model, &b[0]).map(|_| b))
            .map_err(|msg| self.point_error(msg, point))?;
        Ok(blocks)
    }

    fn point_error(&self, msg: String, point: &[f64]) -> Error {
        InputError::new(
            &self.model.file,
            "",
            format!("{msg} at {}", self.model.params.describe(point)),
        )
        .into()
    }

    fn q_model(&self) -> Result<&QModel, Error> {
        self.q.as_ref().ok_or_else(|| {
            InputError::new(
                &self.model.file,
                "array",
                "the q-space path needs a periodic array of at least 2 wires or an infinite array",
            )
            .into()
        })
    }

    fn unphysical(&self, point: &[f64], e: NotPositive) -> Error {
        Error::Unphysical(Unphysical {
            point: self.model.params.describe(point),
            smallest_eigenvalue: e.smallest_eigenvalue,
            q: Some(e.q),
        })
    }

    /// The fixed point on the N-point rule q_k = 2 pi k / N. For a periodic
    /// array of W wires, N = W gives its exact fixed point (the dense
    /// path's numbers); for an infinite array any N >= 1 is a quadrature
    /// rule, and V(q) is certified positive definite at every q.
    pub fn q_fixed_point(&self, point: &[f64], points: usize) -> Result<QFixedPoint, Error> {
        let qm = self.q_model()?;
        let blocks = self.v_blocks(point)?;
        let fp = QFixedPoint::solve(&qm.k, &blocks, points).map_err(|e| {
            // A periodic array: report the smallest eigenvalue over all q,
            // which is the smallest eigenvalue of the dense V.
            let worst = (0..qspace::half(points))
                .map(|k| {
                    let q = qspace::q_of(k, points);
                    let e = qspace::smallest_eigenvalue(&qspace::v_of_q(&blocks, q));
                    NotPositive {
                        q,
                        smallest_eigenvalue: e,
                    }
                })
                .min_by(|a, b| a.smallest_eigenvalue.total_cmp(&b.smallest_eigenvalue))
                .unwrap_or(e);
            self.unphysical(point, worst)
        })?;
        if qm.infinite {
            qspace::certify_positive(&blocks, points).map_err(|e| self.unphysical(point, e))?;
        }
        self.check_q(point, &fp)?;
        Ok(fp)
    }

    /// Refuse a q-space fixed point that is not accurate (see [`ACCURACY`]).
    fn check_q(&self, point: &[f64], fp: &QFixedPoint) -> Result<(), Error> {
        let qm = self.q_model()?;
        // qspace::drift takes maxima with f64::max, which skips NaN.
        let drift = if fp.d.iter().all(|x| x.is_finite()) {
            qspace::drift(&fp.d, fp.points, &qm.k, &qm.kinv)
        } else {
            f64::NAN
        };
        self.check_accuracy(point, drift, None, None)
    }

    /// The message for a fixed point whose D K D = K^-1 fails by `drift`
    /// (relative), with the condition number of V when it is known.
    fn check_accuracy(
        &self,
        point: &[f64],
        drift: f64,
        v: Option<&DMatrix<f64>>,
        cond: Option<f64>,
    ) -> Result<(), Error> {
        if drift <= ACCURACY {
            return Ok(());
        }
        let at = self.model.params.describe(point);
        let why = self.inaccuracy_cause(v, cond);
        let remedy = if why.starts_with("K ") {
            "choose a K with smaller entries"
        } else {
            "rescale V or choose another point"
        };
        let file = &self.model.file;
        Err(Error::Numerical(if drift.is_finite() {
            format!(
                "{file}: the fixed point at {at} cannot be computed accurately: {why}, and the computed D satisfies D K D = K^-1 only to {drift:.1e} (relative; {ACCURACY:.0e} is needed); {remedy}"
            )
        } else {
            format!(
                "{file}: the fixed point at {at} cannot be computed: {why}, and D has non-finite entries; {remedy}"
            )
        }))
    }

    /// Why a fixed point lost its accuracy, for the message: V's entries
    /// out of the range of doubles (subnormal or huge), V nearly singular,
    /// or K's large entries (a well-conditioned V is then not the cause).
    fn inaccuracy_cause(&self, v: Option<&DMatrix<f64>>, cond: Option<f64>) -> String {
        let vmax = v.map(|v| v.amax());
        let subnormal =
            v.is_some_and(|v| v.iter().any(|x| *x != 0.0 && x.abs() < f64::MIN_POSITIVE));
        let kmax = self.k.amax();
        match (vmax, cond) {
            (Some(m), _) if subnormal || m < V_RANGE.recip() => format!(
                "V's entries are tiny (largest |V_ij| = {m:.1e}{}); dimensions do not depend on the overall scale of V",
                if subnormal { ", some subnormal" } else { "" }
            ),
            (Some(m), _) if m > V_RANGE => format!(
                "V's entries are huge (largest |V_ij| = {m:.1e}); dimensions do not depend on the overall scale of V"
            ),
            (_, Some(c)) if c > V_CONDITION => {
                format!("V is badly conditioned there (condition number {c:.1e})")
            }
            _ if kmax >= K_LARGE => format!(
                "K has large entries (largest |K_ij| = {kmax:.0}; V is not the cause), which D K D = K^-1 cannot resolve in double precision"
            ),
            (_, Some(c)) => format!("V is well conditioned there (condition number {c:.1e}), but the fixed point equation lost precision"),
            (_, None) => "V(q) is badly conditioned there".to_string(),
        }
    }

    /// The infinite array's fixed point on the refined rule: N doubled until
    /// every term's dimension and every entry of D^(0) changes by at most
    /// [`qspace::TOLERANCE`] (see [`qspace::converge`]).
    pub fn q_converged(&self, point: &[f64]) -> Result<(QFixedPoint, Quadrature), Error> {
        let qm = self.q_model()?;
        let blocks = self.v_blocks(point)?;
        let (fp, quad) = qspace::converge(&qm.k, &blocks, &qm.terms, qm.range, qspace::TOLERANCE)
            .map_err(|e| self.unphysical(point, e))?;
        self.check_q(point, &fp)?;
        Ok((fp, quad))
    }

    /// The infinite array's fixed point on a given N-point rule, with the
    /// error estimate of that rule (its difference from the 2N-point rule).
    pub fn q_on_rule(
        &self,
        point: &[f64],
        points: usize,
    ) -> Result<(QFixedPoint, Quadrature), Error> {
        let qm = self.q_model()?;
        let blocks = self.v_blocks(point)?;
        let (fp, quad) = qspace::on_rule(&qm.k, &blocks, &qm.terms, points, qspace::TOLERANCE)
            .map_err(|e| self.unphysical(point, e))?;
        self.check_q(point, &fp)?;
        Ok((fp, quad))
    }

    /// The infinite array's fixed point on twice the points of `fp`, reusing
    /// its points, with the error estimate of the finer rule (its change
    /// from `fp`, see [`qspace::refine`]). `fp` is a rule of this point from
    /// [`System::q_converged`] or [`System::q_on_rule`], which have already
    /// certified V(q) positive definite at every q.
    pub fn q_refined(
        &self,
        point: &[f64],
        fp: &QFixedPoint,
    ) -> Result<(QFixedPoint, Quadrature), Error> {
        let qm = self.q_model()?;
        let blocks = self.v_blocks(point)?;
        let (finer, quad) = qspace::refine(&qm.k, &blocks, &qm.terms, fp, qspace::TOLERANCE)
            .map_err(|e| self.unphysical(point, e))?;
        self.check_q(point, &finer)?;
        Ok((finer, quad))
    }

    /// Bosonic dimension of every term from a q-space fixed point.
    pub fn q_dimensions(&self, fp: &QFixedPoint) -> Result<Vec<f64>, Error> {
        let qm = self.q_model()?;
        Ok(qm.terms.iter().map(|t| fp.dimension_of(t)).collect())
    }

    /// Error data of every term's q-space dimension on the N-point rule:
    /// (relative error bound, sensitivity to V's rounding) from the dense
    /// bound of [`FixedPoint::dimension_error`] on the real form of each
    /// V(q) ([`crate::core::fixed_point::hermitian_embedding`]), weighted like
    /// the quadrature; and whether any V(q) needed the extended route.
    pub fn q_dimension_errors(
        &self,
        point: &[f64],
        points: usize,
    ) -> Result<(Vec<[f64; 2]>, bool), Error> {
        let qm = self.q_model()?;
        let (c, n) = (qm.k.nrows(), points);
        let per_q = self.q_embedded_solutions(point, n)?;
        let extended = per_q.iter().any(|f| f.accuracy.extended);
        let rows = qm
            .terms
            .iter()
            .map(|t| q_term_error(t, &per_q, c, n))
            .collect();
        Ok((rows, extended))
    }

    /// The dense fixed point of the real form of V(q) at every q of the
    /// N-point rule (k = 0 .. N/2), for the error bounds.
    fn q_embedded_solutions(&self, point: &[f64], n: usize) -> Result<Vec<FixedPoint>, Error> {
        let qm = self.q_model()?;
        let blocks = self.v_blocks(point)?;
        let mut per_q = Vec::new();
        for k in 0..qspace::half(n) {
            let (ke, ve) = crate::core::fixed_point::hermitian_embedding(
                &qm.k,
                &qspace::v_of_q(&blocks, qspace::q_of(k, n)),
            );
            let Ok(f) = FixedPoint::solve(&ke, &ve) else {
                // Not positive definite: the q-space path's own report (the
                // worst q of a ring, the certified check of an infinite
                // array) is the error.
                return Err(match self.q_fixed_point(point, n) {
                    Err(e) => e,
                    Ok(_) => Error::Numerical(format!(
                        "V(q) at q = {:.6} failed the Cholesky factorisation of the error bound but not of the fixed point",
                        qspace::q_of(k, n)
                    )),
                });
            };
            per_q.push(f);
        }
        Ok(per_q)
    }

    /// The real-space D restricted to `wires` consecutive wires (fields
    /// wire-major), from D(q): D_{j,j'} = integral dq/2pi e^{iq(j-j')} D(q)
    /// (conventions of [`crate::core::qspace`]). A periodic array of W wires:
    /// exact on its W points (a window of at most W wires). An infinite
    /// array: the rule is doubled from the converged one until every entry
    /// changes by at most [`qspace::TOLERANCE`]; the quadrature reached is
    /// returned with it.
    pub fn real_space_window(
        &self,
        point: &[f64],
        wires: usize,
    ) -> Result<(DMatrix<f64>, Option<Quadrature>), Error> {
        let qm = self.q_model()?;
        if !qm.infinite {
            let w = self.lattice.wires;
            if wires > w {
                return Err(InputError::new(
                    &self.model.file,
                    "array.wires",
                    format!("a window of {wires} wires does not fit a periodic array of {w} wires"),
                )
                .into());
            }
            let fp = self.q_fixed_point(point, w)?;
            return Ok((fp.real_space_window(wires), None));
        }
        let blocks = self.v_blocks(point)?;
        let (mut fp, _) = self.q_converged(point)?;
        let mut window = fp.real_space_window(wires);
        loop {
            let finer = fp
                .refined(&qm.k, &blocks)
                .map_err(|e| self.unphysical(point, e))?;
            let next = finer.real_space_window(wires);
            let change = (&next - &window).amax();
            let converged = qspace::settled(next.as_slice(), window.as_slice(), qspace::TOLERANCE);
            fp = finer;
            window = next;
            if converged || fp.points >= qspace::MAX_POINTS {
                let quad = Quadrature {
                    points: fp.points,
                    error_estimate: change,
                    tolerance: qspace::TOLERANCE,
                    converged,
                };
                return Ok((window, Some(quad)));
            }
        }
    }

    /// Dense V at a point; errors name the entry and the point.
    pub fn v_at(&self, point: &[f64]) -> Result<DMatrix<f64>, Error> {
        let mut v = DMatrix::zeros(self.lattice.n, self.lattice.n);
        self.lattice
            .fill_v(&self.model, point, &mut v)
            .map_err(|msg| {
                InputError::new(
                    &self.model.file,
                    "",
                    format!("{msg} at {}", self.model.params.describe(point)),
                )
            })?;
        Ok(v)
    }

    /// The fixed point at a parameter point by the dense path; a V that is
    /// not positive definite is reported as [`Unphysical`] with the point.
    /// An infinite array has no dense fixed point (an input error that says
    /// so): use [`System::q_converged`].
    pub fn fixed_point(&self, point: &[f64]) -> Result<FixedPoint, Error> {
        if self.is_infinite() {
            return Err(InputError::new(
                &self.model.file,
                "array.wires",
                "an infinite array has no dense fixed point; it is computed in q-space (System::q_converged)",
            )
            .into());
        }
        let v = self.v_at(point)?;
        let fp = FixedPoint::solve(&self.k, &v).map_err(|smallest_eigenvalue| {
            Error::Unphysical(Unphysical {
                point: self.model.params.describe(point),
                smallest_eigenvalue,
                q: None,
            })
        })?;
        let drift = crate::core::fixed_point::identity_drift(&self.k, &fp.d);
        let trusted =
            fp.accuracy.extended && fp.accuracy.is_finite() && fp.d.iter().all(|x| x.is_finite());
        if drift <= ACCURACY || trusted {
            // The extended route is judged by its per-dimension error
            // bound (`FixedPoint::dimension_error`), not by the drift of
            // the D rounded to doubles.
            return Ok(fp);
        }
        let cond = crate::core::fixed_point::condition_number(&v);
        self.check_accuracy(point, drift, Some(&v), Some(cond))?;
        Ok(fp)
    }

    /// Extra (fixed) dimension of each term at a point; must be finite and >= 0.
    pub fn extra_dimensions(&self, point: &[f64]) -> Result<Vec<f64>, Error> {
        self.model
            .terms
            .iter()
            .map(|t| {
                let x = t.extra_dimension.eval(point);
                if x.is_finite() && x >= 0.0 {
                    Ok(x)
                } else {
                    Err(Error::Input(InputError::new(
                        &self.model.file,
                        format!("term \"{}\".extra_dimension", t.name),
                        format!(
                            "must be a finite number >= 0, found {x} at {}",
                            self.model.params.describe(point)
                        ),
                    )))
                }
            })
            .collect()
    }

    /// Momentum mismatch of each term's representative (None without
    /// momenta), reduced by the momentum period when the model gives one.
    pub fn momentum_mismatches(&self, point: &[f64]) -> Option<Vec<f64>> {
        let k = self.lattice.momenta(&self.model, point)?;
        let g = self.model.momentum_period_at(point);
        Some(
            self.invariants
                .terms
                .iter()
                .map(|t| crate::core::momentum::mismatch(&t.particles, &k, g))
                .collect(),
        )
    }
}

/// (relative error bound, sensitivity) of one term's q-space dimension:
/// the per-q dense bounds on the real form (Re l(q), Im l(q)), weighted
/// like the quadrature.
fn q_term_error(t: &[(usize, Vec<f64>)], per_q: &[FixedPoint], c: usize, n: usize) -> [f64; 2] {
    let lq = qspace::fourier_vector(t, c, n);
    let (mut delta, mut err, mut sens) = (0.0, 0.0, 0.0);
    for (k, f) in per_q.iter().enumerate() {
        let x: Vec<f64> = (0..2 * c)
            .map(|i| {
                if i < c {
                    lq[k * c + i].re
                } else {
                    lq[k * c + i - c].im
                }
            })
            .collect();
        let xd = nalgebra::DVector::from_column_slice(&x);
        let dk = 0.5 * (&f.d * &xd).dot(&xd);
        let w = qspace::weight(k, n);
        delta += w * dk;
        err += w * dk * f.accuracy.relative_error(&f.d, &x, dk);
        sens += w * dk * f.accuracy.input_sensitivity(&x, dk);
    }
    if delta > 0.0 {
        [err / delta, sens / delta]
    } else {
        [0.0, 0.0]
    }
}

impl QModel {
    fn new(model: &Model, lat: &Lattice, inv: &Invariants) -> QModel {
        let c = lat.cell;
        let k = DMatrix::from_fn(c, c, |i, j| model.cell_k[i][j] as f64);
        let kinv = DMatrix::from_fn(c, c, |i, j| {
            crate::math::rational::to_f64(&inv.cell_inverse[i][j])
        });
        let terms = model
            .terms
            .iter()
            .map(|t| {
                t.parts
                    .iter()
                    .map(|(off, v)| {
                        let l: Vec<f64> = match t.content {
                            Content::Vector => v.iter().map(|x| *x as f64).collect(),
                            // l = K_c m; exact in floats (it fitted in i64
                            // when the lattice was built).
                            Content::Particles => (0..c)
                                .map(|a| (0..c).map(|b| (model.cell_k[a][b] * v[b]) as f64).sum())
                                .collect(),
                        };
                        (*off, l)
                    })
                    .collect()
            })
            .collect();
        QModel {
            k,
            kinv,
            terms,
            range: model.range(),
            infinite: lat.infinite,
        }
    }
}
