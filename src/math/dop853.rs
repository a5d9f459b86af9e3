//! DOP853: the explicit Runge-Kutta method of order 8 of Dormand and
//! Prince with embedded error estimators of orders 5 and 3 and a dense
//! output of order 7, with adaptive step size.
//!
//! Source of the method, the coefficients and the step control: E. Hairer,
//! S. P. Norsett, G. Wanner, *Solving Ordinary Differential Equations I*,
//! 2nd ed. (Springer 1993), section II.10 ("DOP853"), and the coefficient
//! table printed with it (P. J. Prince and J. R. Dormand, J. Comput. Appl.
//! Math. 7, 67 (1981) for the 8(7) pair the method refines). The values in
//! `tableau` are those published digits, rounded to double.
//!
//! Why a stepper of our own rather than the `ode_solvers` crate's (which
//! has the same method): its steppers clone the state on every stage and
//! step (dozens of heap allocations per step), write dense output only on
//! a fixed grid, and measure the error as one root mean square over the
//! whole state. This one allocates only in [`Dop853::new`], exposes the
//! last step's dense output on demand (three extra evaluations, only when
//! asked), and measures the error per group of components: the state is
//! split into ranges (e.g. couplings, then a background matrix), each
//! range gets the DOP853 error norm of its own (root mean square over the
//! range), and the step's error is the largest, so a small group is held to
//! `rtol` however large the others are. A group may hold the upper triangle
//! of a symmetric matrix, row by row ([`Dop853::set_packed_symmetric`]): its
//! norm is then the root mean square over the full matrix (an off-diagonal
//! entry counts twice, the divisor is n^2), the same number as for the
//! matrix stored in full, so packing it leaves the step sequence unchanged
//! up to rounding.
//!
//! The per-step arithmetic over the state (stage combinations, error sums)
//! runs in blocks of 2 [`LANES`] components (then one of [`LANES`], then
//! one by one) with the stages as the inner loop, so the compiler vectorises
//! it and looks each stage up once per block; the nonzero coefficients of
//! every row are tables built at compile time. Each component's combination
//! is summed in stage order and the error norm's terms in component order,
//! as in plain loops (the same bits: only a packed symmetric group's norm is
//! summed differently, as 2 x all entries - the diagonal).
//!
//! Invariants: integration runs forward (`x_end > x`); after every accepted
//! step `y()` is the state at `x()` and `k[12]` holds the derivative there
//! (first same as last: it becomes `k[0]` of the next step, and until then
//! `k[0..=12]` are the last step's stages, which its dense output needs);
//! the dense output, once prepared, interpolates the last accepted step
//! [x_old, x] and equals the step's ends to rounding.

/// A right-hand side dy/dx = f(x, y).
pub trait Derivative {
    /// f(x, y) into `dy` (every entry written).
    fn eval(&self, x: f64, y: &[f64], dy: &mut [f64]);
}

impl<F: Fn(f64, &[f64], &mut [f64])> Derivative for F {
    fn eval(&self, x: f64, y: &[f64], dy: &mut [f64]) {
        self(x, y, dy)
    }
}

/// Why the integrator stopped before `x_end`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum StepError {
    /// The allowed number of attempted steps was used up at `x`.
    TooManySteps {
        /// Where.
        x: f64,
    },
    /// The step size fell below the rounding of x at `x`.
    StepSizeUnderflow {
        /// Where.
        x: f64,
    },
}

impl StepError {
    /// Where the integration stopped.
    pub fn x(&self) -> f64 {
        match *self {
            StepError::TooManySteps { x } | StepError::StepSizeUnderflow { x } => x,
        }
    }
}

/// Step control settings (Hairer's defaults for DOP853 except the
/// tolerances, which the caller chooses).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Control {
    /// Relative tolerance.
    pub rtol: f64,
    /// Absolute tolerance.
    pub atol: f64,
    /// Most attempted steps (accepted or rejected) per call of
    /// [`Dop853::start`].
    pub max_attempts: u64,
}

/// Safety factor of the step-size prediction.
const SAFE: f64 = 0.9;
/// The step may shrink by at most 1/FAC_MIN and grow by at most FAC_MAX.
const FAC_MIN: f64 = 0.333;
const FAC_MAX: f64 = 6.0;

/// Components per block of the vectorised loops (the wide blocks hold two).
const LANES: usize = 8;

/// A range of the state measured by one error norm.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Group {
    from: usize,
    to: usize,
    /// 0: plain root mean square over the range; n > 0: the range is the
    /// packed upper triangle of a symmetric n x n matrix (module docs).
    sym: usize,
}

/// An integrator with all its work space.
pub struct Dop853 {
    n: usize,
    groups: Vec<Group>,
    control: Control,
    x: f64,
    x_old: f64,
    x_end: f64,
    h: f64,
    h_max: f64,
    y: Vec<f64>,
    y_old: Vec<f64>,
    /// Stages 0..=15 (0: f at the step's start; 12: f at its end).
    k: Vec<Vec<f64>>,
    stage: Vec<f64>,
    /// Dense output coefficients of the last step.
    cont: Vec<Vec<f64>>,
    dense_ready: bool,
    /// k[12] holds f at the current point and must move to k[0] before the
    /// next step (it stays in place until then for the dense output).
    fsal_pending: bool,
    fac_old: f64,
    reject: bool,
    attempts: u64,
    /// Accepted steps since construction.
    pub accepted: u64,
    /// Right-hand side evaluations since construction.
    pub evaluations: u64,
}

impl Dop853 {
    /// Work space for states of `n` components, measured as one group.
    pub fn new(n: usize) -> Dop853 {
        Dop853 {
            n,
            groups: vec![Group {
                from: 0,
                to: n,
                sym: 0,
            }],
            control: Control {
                rtol: 1e-8,
                atol: 1e-12,
                max_attempts: 100_000,
            },
            x: 0.0,
            x_old: 0.0,
            x_end: 0.0,
            h: 0.0,
            h_max: 0.0,
            y: vec![0.0; n],
            y_old: vec![0.0; n],
            k: vec![vec![0.0; n]; 16],
            stage: vec![0.0; n],
            cont: vec![vec![0.0; n]; 7],
            dense_ready: false,
            fsal_pending: false,
            fac_old: 1e-4,
            reject: false,
            attempts: 0,
            accepted: 0,
            evaluations: 0,
        }
    }

    /// Measure the error per group: `bounds` are the group ends, increasing,
    /// the last equal to the state size (e.g. `[2c, n]` for c couplings
    /// stored as pairs, then the rest). Empty groups are skipped.
    pub fn set_groups(&mut self, bounds: &[usize]) {
        assert!(
            bounds.last() == Some(&self.n) && bounds.windows(2).all(|w| w[0] <= w[1]),
            "group bounds must increase up to the state size"
        );
        self.groups.clear();
        let mut from = 0;
        for &to in bounds {
            if to > from {
                self.groups.push(Group { from, to, sym: 0 });
            }
            from = to;
        }
    }

    /// Declare the group that starts at `from` (see [`Dop853::set_groups`])
    /// the upper triangle of a symmetric n x n matrix stored row by row
    /// (row i holds columns i..n): its error norm becomes the root mean
    /// square over the full matrix (module docs). Panics when no group of
    /// n(n+1)/2 components starts at `from` (a caller's bug).
    pub fn set_packed_symmetric(&mut self, from: usize, n: usize) {
        let g = self.groups.iter_mut().find(|g| g.from == from);
        let g = g.expect("a group starts there");
        assert_eq!(g.to - g.from, n * (n + 1) / 2, "packed triangle size");
        g.sym = n;
    }

    /// A group's sum of t(i) from its plain sum `all`, counted as over the
    /// full matrix for a packed symmetric group (2 all - diagonal), and the
    /// divisor of its mean: (sum, count).
    fn group_sum(g: &Group, all: f64, t: impl Fn(usize) -> f64) -> (f64, f64) {
        if g.sym == 0 {
            return (all, (g.to - g.from) as f64);
        }
        let (mut diag, mut p) = (0.0, g.from);
        for i in 0..g.sym {
            diag += t(p);
            p += g.sym - i;
        }
        (2.0 * all - diag, (g.sym * g.sym) as f64)
    }

    /// Current position.
    pub fn x(&self) -> f64 {
        self.x
    }

    /// Current state.
    pub fn y(&self) -> &[f64] {
        &self.y
    }

    /// Start of the last accepted step.
    pub fn x_old(&self) -> f64 {
        self.x_old
    }

    /// Begin an integration from (x0, y0) towards `x_end` (> x0); the
    /// first step size is chosen automatically, the largest is
    /// `x_end - x0`.
    pub fn start<F: Derivative>(&mut self, f: &F, x0: f64, y0: &[f64], x_end: f64, c: Control) {
        assert_eq!(y0.len(), self.n, "state size");
        self.control = c;
        self.x = x0;
        self.x_old = x0;
        self.x_end = x_end;
        self.h_max = x_end - x0;
        self.y.copy_from_slice(y0);
        self.fac_old = 1e-4;
        self.reject = false;
        self.attempts = 0;
        self.dense_ready = false;
        self.fsal_pending = false;
        f.eval(x0, &self.y, &mut self.k[0]);
        self.evaluations += 1;
        self.h = self.initial_step(f);
    }

    /// The weighted norm of `v` (largest root mean square of v_i / sk_i
    /// over the groups), with sk_i = atol + rtol |y_i|.
    fn norm_at_start(&self, v: &[f64]) -> f64 {
        let (rtol, atol) = (self.control.rtol, self.control.atol);
        let t = |i: usize| (v[i] / (atol + rtol * self.y[i].abs())).powi(2);
        self.groups
            .iter()
            .map(|g| {
                let all: f64 = (g.from..g.to).map(t).sum();
                let (s, count) = Self::group_sum(g, all, t);
                (s / count).sqrt()
            })
            .fold(0.0, f64::max)
    }

    /// Hairer's starting step for a method of order 8 (routine HINIT): an
    /// explicit Euler step of size h0 probes the second derivative.
    fn initial_step<F: Derivative>(&mut self, f: &F) -> f64 {
        let dnf = self.norm_at_start(&self.k[0]);
        let dny = self.norm_at_start(&self.y);
        let mut h = if dnf <= 1e-5 || dny <= 1e-5 {
            1e-6
        } else {
            0.01 * dny / dnf
        };
        h = h.min(self.h_max);
        for i in 0..self.n {
            self.stage[i] = self.y[i] + h * self.k[0][i];
        }
        f.eval(self.x + h, &self.stage, &mut self.k[1]);
        self.evaluations += 1;
        for i in 0..self.n {
            self.stage[i] = self.k[1][i] - self.k[0][i];
        }
        let der2 = self.norm_at_start(&self.stage) / h;
        let der12 = der2.max(dnf);
        let h1 = if der12 <= 1e-15 {
            1e-6f64.max(h * 1e-3)
        } else {
            (0.01 / der12).powf(1.0 / 8.0)
        };
        (100.0 * h).min(h1).min(self.h_max)
    }

    /// Take one accepted step (retrying rejected ones with smaller steps).
    /// Returns true when the step reached `x_end`.
    pub fn step<F: Derivative>(&mut self, f: &F) -> Result<bool, StepError> {
        loop {
            if self.attempts >= self.control.max_attempts {
                return Err(StepError::TooManySteps { x: self.x });
            }
            if 0.1 * self.h.abs() <= f64::EPSILON * self.x.abs() {
                return Err(StepError::StepSizeUnderflow { x: self.x });
            }
            if self.fsal_pending {
                // k[12] (f at the new point) becomes k[0]; the old k[0] is
                // not needed any more and k[12] is rewritten on acceptance.
                self.k.swap(0, 12);
                self.fsal_pending = false;
            }
            let last = self.x + 1.01 * self.h > self.x_end;
            if last {
                self.h = self.x_end - self.x;
            }
            self.attempts += 1;
            self.stages(f);
            let err = self.error();
            if let Some(h_new) = self.control_step(err) {
                self.accept(f, last);
                self.h = h_new;
                return Ok(last);
            }
        }
    }

    /// The twelve stages of a step of size h from (x, y): k[1..12], the
    /// new state (8th order) in `stage`.
    #[allow(clippy::needless_range_loop)] // s names the stage in C and A
    fn stages<F: Derivative>(&mut self, f: &F) {
        for s in 1..12 {
            self.combine(s);
            f.eval(self.x + C[s] * self.h, &self.stage, &mut self.k[s]);
        }
        self.evaluations += 11;
        self.combine(12);
    }

    /// stage = y + h sum_{j < row} A[row][j] k[j].
    fn combine(&mut self, row: usize) {
        combine_into(&mut self.stage, &self.y, &self.k, &LIVE_A[row], self.h);
    }

    /// The step's error relative to the tolerance (accept at <= 1): the
    /// DOP853 combination of the 5th- and 3rd-order estimates, per group,
    /// the largest over the groups. A new state or an estimate that is not
    /// finite counts as an infinite error (the step is rejected and
    /// shrinks).
    fn error(&self) -> f64 {
        let mut worst = 0.0f64;
        for g in &self.groups {
            let (e5, e3, finite) = self.error_sums(g.from, g.to);
            let (e5, count) = Self::group_sum(g, e5, |i| self.error_terms(i).0);
            let (e3, _) = Self::group_sum(g, e3, |i| self.error_terms(i).1);
            let mut deno = e5 + 0.01 * e3;
            if deno <= 0.0 {
                deno = 1.0;
            }
            let err = self.h.abs() * e5 * (1.0 / (deno * count)).sqrt();
            if !err.is_finite() || !finite {
                return f64::INFINITY;
            }
            worst = worst.max(err);
        }
        worst
    }

    /// Component i's squared scaled error estimates ((d5/sk)^2, (d3/sk)^2),
    /// d5 the 5th-order estimate, d3 = b - bhh the 3rd-order one.
    fn error_terms(&self, i: usize) -> (f64, f64) {
        let (rtol, atol) = (self.control.rtol, self.control.atol);
        let sk = atol + rtol * self.y[i].abs().max(self.stage[i].abs());
        let (e5, b): (&[_], &[_]) = (&LIVE_E5, &LIVE_A[12]);
        let d5 = e5.iter().fold(0.0, |a, &(j, c)| a + c * self.k[j][i]);
        let bs = b.iter().fold(0.0, |a, &(j, c)| a + c * self.k[j][i]);
        let bhh = BHH[0] * self.k[0][i] + BHH[1] * self.k[8][i] + BHH[2] * self.k[11][i];
        ((d5 / sk).powi(2), ((bs - bhh) / sk).powi(2))
    }

    /// Sums of [`Dop853::error_terms`] over a..b (terms formed in blocks of
    /// 2 [`LANES`], then one of [`LANES`], summed in component order), and
    /// whether every new state entry there is finite.
    fn error_sums(&self, a: usize, b: usize) -> (f64, f64, bool) {
        let (mut sums, mut fin) = ((0.0, 0.0), [0.0; LANES]);
        let mut from = a;
        while b - from >= 2 * LANES {
            self.error_block::<{ 2 * LANES }>(from, &mut sums, &mut fin);
            from += 2 * LANES;
        }
        if b - from >= LANES {
            self.error_block::<LANES>(from, &mut sums, &mut fin);
            from += LANES;
        }
        let (mut e5, mut e3) = sums;
        let mut finite = lanes_total(&fin) == 0.0;
        for i in from..b {
            let (t5, t3) = self.error_terms(i);
            (e5, e3) = (e5 + t5, e3 + t3);
            finite &= self.stage[i].is_finite();
        }
        (e5, e3, finite)
    }

    /// [`Dop853::error_sums`] on the `L` components from `from`: the terms
    /// added to `sums` in component order; `fin` gathers x - x of the new
    /// state (0 for finite x, NaN otherwise) in [`LANES`] partial sums.
    #[allow(clippy::eq_op)] // x - x tests finiteness
    #[inline(always)]
    fn error_block<const L: usize>(
        &self,
        from: usize,
        sums: &mut (f64, f64),
        fin: &mut [f64; LANES],
    ) {
        let (rtol, atol) = (self.control.rtol, self.control.atol);
        let r = from..from + L;
        let at = |v: &[f64]| -> [f64; L] { v[r.clone()].try_into().expect("a block") };
        let (d5, bs) = (
            stage_sum::<L>(&self.k, &LIVE_E5, &r),
            stage_sum::<L>(&self.k, &LIVE_A[12], &r),
        );
        let (k0, k8, k11) = (at(&self.k[0]), at(&self.k[8]), at(&self.k[11]));
        let (y, st) = (at(&self.y), at(&self.stage));
        let (mut t5, mut t3) = ([0.0; L], [0.0; L]);
        for l in 0..L {
            let sk = atol + rtol * y[l].abs().max(st[l].abs());
            let bhh = BHH[0] * k0[l] + BHH[1] * k8[l] + BHH[2] * k11[l];
            t5[l] = (d5[l] / sk).powi(2);
            t3[l] = ((bs[l] - bhh) / sk).powi(2);
            fin[l % LANES] += st[l] - st[l];
        }
        for l in 0..L {
            *sums = (sums.0 + t5[l], sums.1 + t3[l]);
        }
    }

    /// Step control (Hairer's, beta = 0): Some(next step size) when the
    /// step is accepted, None (and a smaller step) when rejected. A NaN
    /// error rejects the step.
    fn control_step(&mut self, err: f64) -> Option<f64> {
        let fac11 = err.powf(1.0 / 8.0);
        let fac = (fac11 / SAFE).clamp(1.0 / FAC_MAX, 1.0 / FAC_MIN);
        let fac = if fac.is_nan() { 1.0 / FAC_MIN } else { fac };
        if err <= 1.0 {
            self.fac_old = err.max(1e-4);
            let mut h_new = (self.h / fac).min(self.h_max);
            if self.reject {
                h_new = h_new.min(self.h);
            }
            self.reject = false;
            Some(h_new)
        } else {
            let shrink = (fac11 / SAFE).min(1.0 / FAC_MIN);
            let shrink = if shrink.is_nan() {
                1.0 / FAC_MIN
            } else {
                shrink
            };
            self.h /= shrink;
            self.reject = true;
            None
        }
    }

    /// Move to the end of an accepted step; k[0] becomes f there.
    fn accept<F: Derivative>(&mut self, f: &F, last: bool) {
        let x_new = if last { self.x_end } else { self.x + self.h };
        f.eval(x_new, &self.stage, &mut self.k[12]);
        self.evaluations += 1;
        self.accepted += 1;
        // y_old <- y, y <- stage (the stage buffer is scratch): no copies.
        std::mem::swap(&mut self.y_old, &mut self.y);
        std::mem::swap(&mut self.y, &mut self.stage);
        self.x_old = self.x;
        self.x = x_new;
        self.dense_ready = false;
        self.fsal_pending = true;
    }
}

/// The non-zero coefficients of a row of weights, as (stage, weight).
#[derive(Clone, Copy)]
struct Live {
    terms: [(usize, f64); 16],
    m: usize,
}

impl std::ops::Deref for Live {
    type Target = [(usize, f64)];
    fn deref(&self) -> &[(usize, f64)] {
        &self.terms[..self.m]
    }
}

/// The non-zero entries among the first `upto` of `a`, in order.
const fn live(a: &[f64], upto: usize) -> Live {
    let mut out = Live {
        terms: [(0, 0.0); 16],
        m: 0,
    };
    let mut j = 0;
    while j < upto {
        if a[j] != 0.0 {
            out.terms[out.m] = (j, a[j]);
            out.m += 1;
        }
        j += 1;
    }
    out
}

/// Row s of [`A`] restricted to its first s stages (the coefficients of
/// stage s), live entries only, for every s; built at compile time.
static LIVE_A: [Live; 16] = {
    let mut rows = [Live {
        terms: [(0, 0.0); 16],
        m: 0,
    }; 16];
    let mut s = 0;
    while s < 16 {
        rows[s] = live(&A[s], s);
        s += 1;
    }
    rows
};

/// The live entries of [`E5`].
static LIVE_E5: Live = live(&E5, 12);

/// sum_j c_j k_j over the `L` components in `r` (r.len() == L), per lane;
/// each lane starts at 0 and adds the stages in order.
#[inline(always)]
fn stage_sum<const L: usize>(
    k: &[Vec<f64>],
    w: &[(usize, f64)],
    r: &std::ops::Range<usize>,
) -> [f64; L] {
    let mut acc = [0.0; L];
    for &(j, c) in w {
        let kj: &[f64; L] = k[j][r.clone()].try_into().expect("a block");
        for l in 0..L {
            acc[l] += c * kj[l];
        }
    }
    acc
}

/// The sum of the lanes' partial sums (pairwise, fixed order).
#[inline]
fn lanes_total(a: &[f64; LANES]) -> f64 {
    ((a[0] + a[1]) + (a[2] + a[3])) + ((a[4] + a[5]) + (a[6] + a[7]))
}

/// out = y + h sum_j c_j k_j over the live coefficients `w`, summed per
/// component in stage order (blocks of 2 [`LANES`] components, then one of
/// [`LANES`], the stages inside, so the loop vectorises, reads each array
/// once and spends its stage lookups on twice the lanes).
fn combine_into(out: &mut [f64], y: &[f64], k: &[Vec<f64>], w: &[(usize, f64)], h: f64) {
    let n = out.len();
    let wide = n / (2 * LANES);
    for blk in 0..wide {
        let r = blk * 2 * LANES..(blk + 1) * 2 * LANES;
        combine_block::<{ 2 * LANES }>(out, y, k, w, h, r);
    }
    let mut from = wide * 2 * LANES;
    if n - from >= LANES {
        combine_block::<LANES>(out, y, k, w, h, from..from + LANES);
        from += LANES;
    }
    for i in from..n {
        let acc = w.iter().fold(0.0, |s, &(j, c)| s + c * k[j][i]);
        out[i] = y[i] + h * acc;
    }
}

/// [`combine_into`] on the `L` components in `r` (r.len() == L); each
/// lane's sum starts at 0 and adds the stages in order, as the scalar tail.
#[inline(always)]
fn combine_block<const L: usize>(
    out: &mut [f64],
    y: &[f64],
    k: &[Vec<f64>],
    w: &[(usize, f64)],
    h: f64,
    r: std::ops::Range<usize>,
) {
    let acc = stage_sum::<L>(k, w, &r);
    let yb: &[f64; L] = y[r.clone()].try_into().expect("a block");
    let o: &mut [f64; L] = (&mut out[r]).try_into().expect("a block");
    for l in 0..L {
        o[l] = yb[l] + h * acc[l];
    }
}

impl Dop853 {
    /// Prepare the dense output of the last accepted step (three more
    /// evaluations of f; nothing when already prepared). When its extra
    /// stages are not finite (a step far too long for the equations, at a
    /// loose tolerance) no dense output is available: [`Dop853::dense`]
    /// then returns false.
    pub fn prepare_dense<F: Derivative>(&mut self, f: &F) {
        if self.dense_ready || self.accepted == 0 || !self.fsal_pending {
            return;
        }
        let h = self.x - self.x_old;
        for s in 13..16 {
            combine_into(&mut self.stage, &self.y_old, &self.k, &LIVE_A[s], h);
            f.eval(self.x_old + C[s] * h, &self.stage, &mut self.k[s]);
        }
        self.evaluations += 3;
        for i in 0..self.n {
            let dy = self.y[i] - self.y_old[i];
            let (f0, f1) = (self.k[0][i], self.k[12][i]);
            self.cont[0][i] = dy;
            self.cont[1][i] = h * f0 - dy;
            self.cont[2][i] = 2.0 * dy - h * (f1 + f0);
            for (r, d) in D.iter().enumerate() {
                let mut acc = 0.0;
                for (j, c) in d.iter().enumerate() {
                    if *c != 0.0 {
                        acc += c * self.k[j][i];
                    }
                }
                self.cont[3 + r][i] = h * acc;
            }
        }
        self.dense_ready = self.cont.iter().all(|c| c.iter().all(|x| x.is_finite()));
    }

    /// The dense output at x in [x_old, x] into `out`; false (and `out`
    /// untouched) when no dense output is prepared or x lies outside the
    /// last step.
    pub fn dense(&self, x: f64, out: &mut [f64]) -> bool {
        if !self.dense_ready || x < self.x_old || x > self.x {
            return false;
        }
        let s = (x - self.x_old) / (self.x - self.x_old);
        let s1 = 1.0 - s;
        let c = &self.cont;
        for (i, o) in out.iter_mut().enumerate() {
            let inner = c[5][i] + s * c[6][i];
            let inner = c[4][i] + s1 * inner;
            let inner = c[3][i] + s * inner;
            let inner = c[2][i] + s1 * inner;
            let inner = c[1][i] + s * inner;
            let inner = c[0][i] + s1 * inner;
            *o = self.y_old[i] + s * inner;
        }
        true
    }
}

/// Nodes c_i of the sixteen stages (12 of the step, 13 its end, 14..16 the
/// dense output's).
#[allow(clippy::excessive_precision)]
const C: [f64; 16] = [
    0.0,
    0.526001519587677318785587544488e-01,
    0.789002279381515978178381316732e-01,
    0.118350341907227396726757197510,
    0.281649658092772603273242802490,
    0.333333333333333333333333333333,
    0.25,
    0.307692307692307692307692307692,
    0.651282051282051282051282051282,
    0.6,
    0.857142857142857142857142857142,
    1.0,
    1.0,
    0.1,
    0.2,
    0.777777777777777777777777777778,
];

/// Coefficients a_ij (row i: stage i; row 12 holds the 8th-order weights b_j).
#[allow(clippy::excessive_precision)]
const A: [[f64; 16]; 16] = [
    [
        0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0,
    ],
    [
        5.26001519587677318785587544488e-2,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
    ],
    [
        1.97250569845378994544595329183e-2,
        5.91751709536136983633785987549e-2,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
    ],
    [
        2.95875854768068491816892993775e-2,
        0.0,
        8.87627564304205475450678981324e-2,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
    ],
    [
        2.41365134159266685502369798665e-1,
        0.0,
        -8.84549479328286085344864962717e-1,
        9.24834003261792003115737966543e-1,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
    ],
    [
        3.7037037037037037037037037037e-2,
        0.0,
        0.0,
        1.70828608729473871279604482173e-1,
        1.25467687566822425016691814123e-1,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
    ],
    [
        3.7109375e-2,
        0.0,
        0.0,
        1.70252211019544039314978060272e-1,
        6.02165389804559606850219397283e-2,
        -1.7578125e-2,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
    ],
    [
        3.70920001185047927108779319836e-2,
        0.0,
        0.0,
        1.70383925712239993810214054705e-1,
        1.07262030446373284651809199168e-1,
        -1.53194377486244017527936158236e-2,
        8.27378916381402288758473766002e-3,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
    ],
    [
        6.24110958716075717114429577812e-1,
        0.0,
        0.0,
        -3.36089262944694129406857109825,
        -8.68219346841726006818189891453e-1,
        2.75920996994467083049415600797e1,
        2.01540675504778934086186788979e1,
        -4.34898841810699588477366255144e1,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
    ],
    [
        4.77662536438264365890433908527e-1,
        0.0,
        0.0,
        -2.48811461997166764192642586468,
        -5.90290826836842996371446475743e-1,
        2.12300514481811942347288949897e1,
        1.52792336328824235832596922938e1,
        -3.32882109689848629194453265587e1,
        -2.03312017085086261358222928593e-2,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
    ],
    [
        -9.3714243008598732571704021658e-1,
        0.0,
        0.0,
        5.18637242884406370830023853209,
        1.09143734899672957818500254654,
        -8.14978701074692612513997267357,
        -1.85200656599969598641566180701e1,
        2.27394870993505042818970056734e1,
        2.49360555267965238987089396762,
        -3.0467644718982195003823669022,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
    ],
    [
        2.27331014751653820792359768449,
        0.0,
        0.0,
        -1.05344954667372501984066689879e1,
        -2.00087205822486249909675718444,
        -1.79589318631187989172765950534e1,
        2.79488845294199600508499808837e1,
        -2.85899827713502369474065508674,
        -8.87285693353062954433549289258,
        1.23605671757943030647266201528e1,
        6.43392746015763530355970484046e-1,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
    ],
    [
        5.42937341165687622380535766363e-2,
        0.0,
        0.0,
        0.0,
        0.0,
        4.45031289275240888144113950566,
        1.89151789931450038304281599044,
        -5.8012039600105847814672114227,
        3.1116436695781989440891606237e-1,
        -1.52160949662516078556178806805e-1,
        2.01365400804030348374776537501e-1,
        4.47106157277725905176885569043e-2,
        0.0,
        0.0,
        0.0,
        0.0,
    ],
    [
        5.61675022830479523392909219681e-2,
        0.0,
        0.0,
        0.0,
        0.0,
        0.0,
        2.53500210216624811088794765333e-1,
        -2.46239037470802489917441475441e-1,
        -1.24191423263816360469010140626e-1,
        1.5329179827876569731206322685e-1,
        8.20105229563468988491666602057e-3,
        7.56789766054569976138603589584e-3,
        -8.298e-3,
        0.0,
        0.0,
        0.0,
    ],
    [
        3.18346481635021405060768473261e-2,
        0.0,
        0.0,
        0.0,
        0.0,
        2.83009096723667755288322961402e-2,
        5.35419883074385676223797384372e-2,
        -5.49237485713909884646569340306e-2,
        0.0,
        0.0,
        -1.08347328697249322858509316994e-4,
        3.82571090835658412954920192323e-4,
        -3.40465008687404560802977114492e-4,
        1.41312443674632500278074618366e-1,
        0.0,
        0.0,
    ],
    [
        -4.28896301583791923408573538692e-1,
        0.0,
        0.0,
        0.0,
        0.0,
        -4.69762141536116384314449447206,
        7.68342119606259904184240953878,
        4.06898981839711007970213554331,
        3.56727187455281109270669543021e-1,
        0.0,
        0.0,
        0.0,
        -1.39902416515901462129418009734e-3,
        2.9475147891527723389556272149,
        -9.15095847217987001081870187138,
        0.0,
    ],
];

/// Weights of the 5th-order error estimate (b_j - bhat_j).
#[allow(clippy::excessive_precision)]
const E5: [f64; 12] = [
    0.1312004499419488073250102996e-1,
    0.0,
    0.0,
    0.0,
    0.0,
    -0.1225156446376204440720569753e+1,
    -0.4957589496572501915214079952,
    0.1664377182454986536961530415e+1,
    -0.3503288487499736816886487290,
    0.3341791187130174790297318841,
    0.8192320648511571246570742613e-1,
    -0.2235530786388629525884427845e-1,
];

/// The 3rd-order estimate: b minus these weights on stages 1, 9 and 12.
#[allow(clippy::excessive_precision)]
const BHH: [f64; 3] = [
    0.244094488188976377952755905512,
    0.733846688281611857341361741547,
    0.220588235294117647058823529412e-1,
];

/// Dense output: the coefficients of its last four terms.
#[allow(clippy::excessive_precision)]
const D: [[f64; 16]; 4] = [
    [
        -0.84289382761090128651353491142e+1,
        0.0,
        0.0,
        0.0,
        0.0,
        0.56671495351937776962531783590,
        -0.30689499459498916912797304727e+1,
        0.23846676565120698287728149680e+1,
        0.21170345824450282767155149946e+1,
        -0.87139158377797299206789907490,
        0.22404374302607882758541771650e+1,
        0.63157877876946881815570249290,
        -0.88990336451333310820698117400e-1,
        0.18148505520854727256656404962e+2,
        -0.91946323924783554000451984436e+1,
        -0.44360363875948939664310572000e+1,
    ],
    [
        0.10427508642579134603413151009e+2,
        0.0,
        0.0,
        0.0,
        0.0,
        0.24228349177525818288430175319e+3,
        0.16520045171727028198505394887e+3,
        -0.37454675472269020279518312152e+3,
        -0.22113666853125306036270938578e+2,
        0.77334326684722638389603898808e+1,
        -0.30674084731089398182061213626e+2,
        -0.93321305264302278729567221706e+1,
        0.15697238121770843886131091075e+2,
        -0.31139403219565177677282850411e+2,
        -0.93529243588444783865713862664e+1,
        0.35816841486394083752465898540e+2,
    ],
    [
        0.19985053242002433820987653617e+2,
        0.0,
        0.0,
        0.0,
        0.0,
        -0.38703730874935176555105901742e+3,
        -0.18917813819516756882830838328e+3,
        0.52780815920542364900561016686e+3,
        -0.11573902539959630126141871134e+2,
        0.68812326946963000169666922661e+1,
        -0.10006050966910838403183860980e+1,
        0.77771377980534432092869265740,
        -0.27782057523535084065932004339e+1,
        -0.60196695231264120758267380846e+2,
        0.84320405506677161018159903784e+2,
        0.11992291136182789328035130030e+2,
    ],
    [
        -0.25693933462703749003312586129e+2,
        0.0,
        0.0,
        0.0,
        0.0,
        -0.15418974869023643374053993627e+3,
        -0.23152937917604549567536039109e+3,
        0.35763911791061412378285349910e+3,
        0.93405324183624310003907691704e+2,
        -0.37458323136451633156875139351e+2,
        0.10409964950896230045147246184e+3,
        0.29840293426660503123344363579e+2,
        -0.43533456590011143754432175058e+2,
        0.96324553959188282948394950600e+2,
        -0.39177261675615439165231486172e+2,
        -0.14972683625798562581422125276e+3,
    ],
];

#[cfg(test)]
mod tests {
    //! Checks against closed-form solutions (exact: the ODEs are linear or
    //! separable) and against the `ode_solvers` crate's DOP853, an
    //! independent implementation of the same method.
    use super::*;

    fn run<F: Derivative>(f: &F, y0: &[f64], x_end: f64, rtol: f64, groups: &[usize]) -> Dop853 {
        let mut d = Dop853::new(y0.len());
        d.set_groups(groups);
        let c = Control {
            rtol,
            atol: rtol * 1e-4,
            max_attempts: 100_000,
        };
        d.start(f, 0.0, y0, x_end, c);
        while !d.step(f).expect("integrates") {}
        d
    }

    /// y' = -y: y(x) = e^-x.
    #[test]
    fn exponential_decay() {
        let f = |_x: f64, y: &[f64], dy: &mut [f64]| dy[0] = -y[0];
        let d = run(&f, &[1.0], 5.0, 1e-10, &[1]);
        assert_eq!(d.x(), 5.0);
        let exact = (-5.0f64).exp();
        assert!((d.y()[0] - exact).abs() < 1e-9 * exact, "{}", d.y()[0]);
    }

    /// y'' = -y as a system: (y, y') = (cos x, -sin x) from (1, 0).
    #[test]
    fn harmonic_oscillator() {
        let f = |_x: f64, y: &[f64], dy: &mut [f64]| {
            dy[0] = y[1];
            dy[1] = -y[0];
        };
        let d = run(&f, &[1.0, 0.0], 10.0, 1e-11, &[2]);
        assert!((d.y()[0] - 10f64.cos()).abs() < 1e-9, "{}", d.y()[0]);
        assert!((d.y()[1] + 10f64.sin()).abs() < 1e-9, "{}", d.y()[1]);
    }

    /// The dense output of the last step of y' = y^2, y(0) = 1/2, which
    /// is y = 1/(2 - x) (separable), at points inside that step; at its
    /// ends it reproduces the step's states.
    #[test]
    fn dense_output_inside_the_last_step() {
        let f = |_x: f64, y: &[f64], dy: &mut [f64]| dy[0] = y[0] * y[0];
        let mut d = run(&f, &[0.5], 1.5, 1e-10, &[1]);
        let mut out = [0.0];
        assert!(!d.dense(1.5, &mut out), "not prepared yet");
        d.prepare_dense(&f);
        let (a, b) = (d.x_old(), d.x());
        assert!(b - a > 0.01, "a step wide enough to test: {a}..{b}");
        for t in [0.0, 0.1, 0.37, 0.5, 0.81, 1.0] {
            let x = a + t * (b - a);
            assert!(d.dense(x, &mut out));
            let exact = 1.0 / (2.0 - x);
            assert!(
                (out[0] - exact).abs() < 1e-8 * exact,
                "x = {x}: {} vs {exact}",
                out[0]
            );
        }
        assert!(d.dense(b, &mut out));
        assert!((out[0] - d.y()[0]).abs() <= 1e-14 * d.y()[0]);
        assert!(!d.dense(b + 1e-3, &mut out), "outside the step");
    }

    /// Step by step the same as `ode_solvers`' DOP853 with the same
    /// settings (Hairer's step control, beta = 0) on the logistic equation
    /// y' = y (1 - y), y(0) = 1/10, whose solution is y = 1/(1 + 9 e^-x).
    /// (Autonomous on purpose: `ode_solvers` 0.6 evaluates the twelfth
    /// stage at c = 0 instead of c = 1, which only matters when f depends
    /// on x.)
    #[test]
    fn same_as_ode_solvers_dop853() {
        use ode_solvers::dop_shared::{OutputType, System};
        struct Logistic;
        impl System<f64, nalgebra::DVector<f64>> for Logistic {
            fn system(&self, _x: f64, y: &nalgebra::DVector<f64>, dy: &mut nalgebra::DVector<f64>) {
                dy[0] = y[0] * (1.0 - y[0]);
            }
        }
        let (rtol, atol, x_end) = (1e-10, 1e-12, 10.0);
        let y0 = nalgebra::DVector::from_element(1, 0.1);
        let mut theirs = ode_solvers::Dop853::from_param(
            Logistic,
            0.0,
            x_end,
            0.0,
            y0,
            rtol,
            atol,
            0.9,
            0.0,
            0.333,
            6.0,
            x_end,
            0.0,
            100_000,
            u32::MAX,
            OutputType::Sparse,
        );
        let stats = theirs.integrate().expect("ode_solvers integrates");
        let f = |_x: f64, y: &[f64], dy: &mut [f64]| dy[0] = y[0] * (1.0 - y[0]);
        let mut ours = Dop853::new(1);
        let c = Control {
            rtol,
            atol,
            max_attempts: 100_000,
        };
        ours.start(&f, 0.0, &[0.1], x_end, c);
        let mut xs = vec![0.0];
        while !ours.step(&f).expect("integrates") {
            xs.push(ours.x());
        }
        xs.push(ours.x());
        assert_eq!(ours.accepted as usize, stats.accepted_steps as usize);
        assert_eq!(xs.len(), theirs.x_out().len());
        for (a, b) in xs.iter().zip(theirs.x_out()) {
            // The error estimates are differences of nearly equal sums:
            // their rounding (summation order) moves the step sizes in the
            // seventh digit or so, not more.
            assert!((a - b).abs() <= 1e-6 * b.abs().max(1.0), "{a} vs {b}");
        }
        let end = theirs.y_out().last().expect("output")[0];
        assert!(
            (ours.y()[0] - end).abs() <= 1e-11,
            "{} vs {end}",
            ours.y()[0]
        );
        let exact = 1.0 / (1.0 + 9.0 * (-x_end).exp());
        assert!(
            (ours.y()[0] - exact).abs() <= 1e-9,
            "{} vs {exact}",
            ours.y()[0]
        );
    }

    /// One decaying component next to a thousand constant ones: measured as
    /// one group, the constants dilute its error and it comes out far less
    /// accurate than rtol; as its own group it meets the tolerance.
    #[test]
    fn groups_hold_a_small_part_to_the_tolerance() {
        let f = |_x: f64, y: &[f64], dy: &mut [f64]| {
            dy.fill(0.0);
            dy[0] = -3.0 * y[0];
        };
        let y0 = vec![1.0; 1001];
        let rtol = 1e-6;
        let exact = (-12.0f64).exp();
        let err = |d: &Dop853| (d.y()[0] - exact).abs() / exact;
        let one = run(&f, &y0, 4.0, rtol, &[1001]);
        let two = run(&f, &y0, 4.0, rtol, &[1, 1001]);
        assert!(
            two.accepted > one.accepted,
            "{} vs {}",
            two.accepted,
            one.accepted
        );
        assert!(err(&two) < 10.0 * rtol, "grouped error {:e}", err(&two));
        assert!(
            err(&one) > 3.0 * err(&two),
            "{:e} vs {:e}",
            err(&one),
            err(&two)
        );
    }

    /// A step whose new state is not finite is rejected, not accepted:
    /// y' = y^2 from y(0) = 1 blows up at x = 1 (y = 1/(1 - x)); asked to
    /// go to x = 2 the integrator stops at the pole with a step-size
    /// error, every accepted state finite and (away from the pole) on the
    /// solution.
    #[test]
    fn a_blow_up_is_never_accepted() {
        let f = |_x: f64, y: &[f64], dy: &mut [f64]| dy[0] = y[0] * y[0];
        let mut d = Dop853::new(1);
        let c = Control {
            rtol: 1e-6,
            atol: 1e-9,
            max_attempts: 100_000,
        };
        d.start(&f, 0.0, &[1.0], 2.0, c);
        let e = loop {
            match d.step(&f) {
                Ok(done) => {
                    assert!(!done, "passed the pole");
                    assert!(d.y()[0].is_finite() && d.y()[0] > 0.0, "{}", d.y()[0]);
                    // Near the pole any error is amplified; away from it the
                    // accepted states follow the solution.
                    let exact = 1.0 / (1.0 - d.x());
                    let close = (d.y()[0] - exact).abs() < 1e-5 * exact;
                    assert!(d.x() > 0.9 || close, "x = {}: {}", d.x(), d.y()[0]);
                }
                Err(e) => break e,
            }
        };
        // It stops at the pole, to within the last steps' size (9e-8 past
        // it, measured: there y is finite but meaningless).
        assert!(e.x() > 0.9 && e.x() < 1.0 + 1e-6, "{e:?}");
    }

    /// Deterministic invented numbers in [-1/2, 1/2) (test inputs only).
    fn invented(seed: &mut u64) -> f64 {
        *seed = seed
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (*seed >> 11) as f64 / (1u64 << 53) as f64 - 0.5
    }

    /// A state of `lead` plain components then a symmetric n x n matrix,
    /// in full (row-major) and packed (upper triangle row by row).
    fn full_and_packed(lead: &[f64], m: &[f64], n: usize) -> (Vec<f64>, Vec<f64>) {
        let (mut full, mut packed) = (lead.to_vec(), lead.to_vec());
        full.extend_from_slice(m);
        for i in 0..n {
            packed.extend_from_slice(&m[i * n + i..(i + 1) * n]);
        }
        (full, packed)
    }

    /// A random symmetric n x n matrix, row-major, its entries spread over
    /// 2 `spread` + 1 decades.
    fn symmetric(n: usize, seed: &mut u64, spread: i32) -> Vec<f64> {
        let mut m = vec![0.0; n * n];
        for i in 0..n {
            for j in i..n {
                let x = invented(seed) * 10f64.powi((i + j) as i32 % (2 * spread + 1) - spread);
                (m[i * n + j], m[j * n + i]) = (x, x);
            }
        }
        m
    }

    /// The full n x n matrix of a packed upper triangle.
    fn unpack(y: &[f64], n: usize) -> Vec<f64> {
        let mut m = vec![0.0; n * n];
        let mut p = 0;
        for i in 0..n {
            for j in i..n {
                (m[i * n + j], m[j * n + i]) = (y[p], y[p]);
                p += 1;
            }
        }
        m
    }

    /// The error norm of a packed symmetric group equals that of the full
    /// matrix (off-diagonal entries counted twice, divisor n^2) on random
    /// stages and states, for the step's error and for the starting step's
    /// norm, to rounding (derived: the same sum, split differently).
    #[test]
    fn packed_symmetric_norm_equals_the_full_norm() {
        let mut seed = 7;
        for n in [1, 3, 5, 9] {
            let lead = [0.3, -0.2];
            let m = 2 + n * n;
            let p = 2 + n * (n + 1) / 2;
            let (mut full, mut packed) = (Dop853::new(m), Dop853::new(p));
            full.set_groups(&[2, m]);
            packed.set_groups(&[2, p]);
            packed.set_packed_symmetric(2, n);
            for d in [&mut full, &mut packed] {
                d.control = Control {
                    rtol: 1e-7,
                    atol: 1e-10,
                    max_attempts: 10,
                };
                d.h = 0.3;
            }
            let mut fill = |which: &mut dyn FnMut(&mut Dop853) -> &mut Vec<f64>| {
                let (a, b) = full_and_packed(&lead, &symmetric(n, &mut seed, 2), n);
                which(&mut full).copy_from_slice(&a);
                which(&mut packed).copy_from_slice(&b);
            };
            fill(&mut |d| &mut d.y);
            fill(&mut |d| &mut d.stage);
            for j in 0..13 {
                fill(&mut |d| &mut d.k[j]);
            }
            let (a, b) = (full.error(), packed.error());
            assert!(a > 0.0 && (a - b).abs() <= 1e-13 * a, "n = {n}: {a} vs {b}");
            let (a, b) = (
                full.norm_at_start(&full.k[3]),
                packed.norm_at_start(&packed.k[3]),
            );
            assert!(a > 0.0 && (a - b).abs() <= 1e-13 * a, "n = {n}: {a} vs {b}");
        }
    }

    /// A symmetric matrix Riccati equation dD/dx = B - D A D (A, B
    /// symmetric positive definite; invented numbers) integrated with D stored in full and
    /// packed: the same steps, the same result to rounding.
    #[test]
    fn packed_matrix_ode_takes_the_same_steps() {
        let n = 6;
        let mut seed = 11;
        // c I + S/2 (S random symmetric, entries below 1/2): positive
        // definite for c >= n/4, so D flows to the positive solution of
        // D A D = B without blowing up.
        let mut sym = |c: f64| {
            let mut m = symmetric(n, &mut seed, 0);
            m.iter_mut().for_each(|x| *x *= 0.5);
            (0..n).for_each(|i| m[i * n + i] += c);
            m
        };
        let (a, b, d0) = (sym(2.0), sym(3.0), sym(2.0));
        let rhs = move |d: &[f64], out: &mut [f64]| {
            for i in 0..n {
                for j in 0..n {
                    let mut s = b[i * n + j];
                    for k in 0..n {
                        for l in 0..n {
                            s -= d[i * n + k] * a[k * n + l] * d[l * n + j];
                        }
                    }
                    out[i * n + j] = s;
                }
            }
        };
        let f_full = |_x: f64, y: &[f64], dy: &mut [f64]| rhs(y, dy);
        let unpack = |y: &[f64]| unpack(y, n);
        let f_packed = |_x: f64, y: &[f64], dy: &mut [f64]| {
            let mut out = vec![0.0; n * n];
            rhs(&unpack(y), &mut out);
            dy.copy_from_slice(&full_and_packed(&[], &out, n).1);
        };
        let (y_full, y_packed) = full_and_packed(&[], &d0, n);
        let full = run(&f_full, &y_full, 4.0, 1e-9, &[n * n]);
        let mut packed = Dop853::new(y_packed.len());
        packed.set_packed_symmetric(0, n);
        let c = Control {
            rtol: 1e-9,
            atol: 1e-13,
            max_attempts: 100_000,
        };
        packed.start(&f_packed, 0.0, &y_packed, 4.0, c);
        while !packed.step(&f_packed).expect("integrates") {}
        assert!(full.accepted > 10, "{} steps", full.accepted);
        assert_eq!(full.accepted, packed.accepted);
        assert_eq!(full.evaluations, packed.evaluations);
        let end = unpack(packed.y());
        for (x, y) in full.y().iter().zip(&end) {
            assert!((x - y).abs() <= 1e-12 * x.abs().max(1.0), "{x} vs {y}");
        }
    }

    /// Too few attempts: an error naming where it stopped, not a panic.
    #[test]
    fn step_limit_is_an_error() {
        let f = |_x: f64, y: &[f64], dy: &mut [f64]| dy[0] = -50.0 * y[0];
        let mut d = Dop853::new(1);
        let c = Control {
            rtol: 1e-12,
            atol: 1e-16,
            max_attempts: 3,
        };
        d.start(&f, 0.0, &[1.0], 10.0, c);
        let e = loop {
            match d.step(&f) {
                Ok(true) => panic!("reached the end in 3 steps"),
                Ok(false) => {}
                Err(e) => break e,
            }
        };
        assert!(matches!(e, StepError::TooManySteps { .. }) && e.x() > 0.0 && e.x() < 10.0);
    }

    /// The blocked loops (16, then 8 components, then one by one) against
    /// plain per-component loops over the full coefficient rows, to the bit,
    /// for every length from 0 to 40 (a consistency check of two code paths
    /// on invented numbers): every stage combination, the error sums, and
    /// the finiteness test with one entry made infinite.
    #[test]
    fn blocked_sums_equal_plain_loops() {
        let mut seed = 3;
        for n in 0..=40 {
            let mut d = Dop853::new(n);
            d.control = Control {
                rtol: 1e-7,
                atol: 1e-10,
                max_attempts: 10,
            };
            for v in [&mut d.y, &mut d.stage].into_iter().chain(d.k.iter_mut()) {
                v.iter_mut().for_each(|x| *x = invented(&mut seed));
            }
            let h = 0.37;
            for s in 1..16 {
                let mut out = vec![0.0; n];
                combine_into(&mut out, &d.y, &d.k, &LIVE_A[s], h);
                for (i, &o) in out.iter().enumerate() {
                    let terms = (0..s).filter(|&j| A[s][j] != 0.0);
                    let acc = terms.fold(0.0, |a, j| a + A[s][j] * d.k[j][i]);
                    assert_eq!(
                        o.to_bits(),
                        (d.y[i] + h * acc).to_bits(),
                        "n {n} s {s} i {i}"
                    );
                }
            }
            let plain = (0..n).fold((0.0, 0.0), |(a, b), i| {
                let (t5, t3) = d.error_terms(i);
                (a + t5, b + t3)
            });
            let (e5, e3, finite) = d.error_sums(0, n);
            assert_eq!(
                (e5.to_bits(), e3.to_bits()),
                (plain.0.to_bits(), plain.1.to_bits())
            );
            assert!(finite, "n {n}");
            for i in 0..n {
                let keep = d.stage[i];
                d.stage[i] = f64::INFINITY;
                assert!(!d.error_sums(0, n).2, "n {n} i {i}");
                d.stage[i] = keep;
            }
        }
    }
}
