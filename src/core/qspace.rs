//! The q-space algebra of translation-invariant arrays: periodic arrays of
//! W wires and the infinite array.
//!
//! Conventions (the same as [`crate::flow::background`]): V_{j,j'} =
//! V^(j'-j) with V^(-n) = V^(n)T, and likewise for D; a term with lattice
//! vectors l_n on the wires at offset n from its anchor has
//!
//! ```text
//! V(q) = sum_n V^(n) e^{iqn}     (Hermitian),
//! D(q) = sum_n D^(n) e^{iqn},    D^(n) = integral dq/2pi e^{-iqn} D(q),
//! L(q) = sum_n l_n e^{-iqn},
//! Delta = (1/2) integral dq/2pi L(q)^H D(q) L(q).
//! ```
//!
//! Derivation: a block-circulant (or translation-invariant) matrix A with
//! A_{j,j'} = A^(j'-j) is multiplied, inverted and factorised block by
//! block in q, since (AB)^(p) = sum_n A^(n) B^(p-n) transforms to A(q) B(q);
//! transposition becomes the Hermitian conjugate, (A^T)(q) = A(q)^H for real
//! A. The Cholesky factor of V and the eigendecomposition of S therefore
//! become, per q, a complex Cholesky V(q) = C C^H and a Hermitian
//! eigendecomposition of S(q) = C^-1 K_c C^-H, with K(q) = K_c (K is block
//! diagonal). The fixed point [docs/physics.md section 1] is then, per q,
//!
//! ```text
//! D(q) = C^-H |S(q)|^-1 C^-1,   velocities 1/|eig S(q)|,
//! ```
//!
//! (D does not depend on which factor C is used: C -> C U with U unitary
//! leaves it unchanged.) And sum_{j,j'} l_j^T D^(j'-j) l_j' = integral dq/2pi
//! L(q)^H D(q) L(q) with the L above.
//!
//! docs/physics.md section 5 uses the same signs as this code, where V(q)
//! has e^{+iqn} and therefore the window of real space is D_{j,j'} = integral dq/2pi e^{+iq(j-j')} D(q) (see
//! [`QFixedPoint::real_space_window`]).
//!
//! A periodic array of W wires is exactly the W-point periodic trapezoid
//! rule q_k = 2 pi k / W of these integrals. The infinite array uses the
//! same rule with N points, doubled until the integrals change by less than
//! a tolerance ([`converge`]). Since V and l are real, D(-q) = conj D(q) and
//! L(-q) = conj L(q): only k = 0..=N/2 are stored, with weights
//! [`weight`].
//!
//! Storage: D(q_k) for the stored k as interleaved (re, im) pairs, k-major,
//! each block row-major n_c x n_c; the flow state uses the same layout.

use nalgebra::{DMatrix, SymmetricEigen};
use num_complex::Complex64;
use serde::Serialize;

use crate::core::fixed_point::{modes_of, sorted_modes};

/// Default absolute tolerance of the refined quadrature (on every scaling
/// dimension and every entry of the on-site block D^(0)).
pub const TOLERANCE: f64 = 1e-10;

/// Smallest number of quadrature points of the refined rule.
pub const MIN_POINTS: usize = 8;

/// Largest number of quadrature points (the refinement stops there and says
/// that it did not converge).
pub const MAX_POINTS: usize = 1 << 16;

/// Number of stored q points of an N-point rule: k = 0..=N/2.
pub fn half(points: usize) -> usize {
    points / 2 + 1
}

/// Weight of stored point k in sums over all N points: 1 for q = 0 and
/// q = pi, 2 for the others (each stands for itself and -q).
#[inline]
pub fn weight(k: usize, points: usize) -> f64 {
    if k == 0 || 2 * k == points {
        1.0
    } else {
        2.0
    }
}

/// q_k = 2 pi k / N.
#[inline]
pub fn q_of(k: usize, points: usize) -> f64 {
    2.0 * std::f64::consts::PI * k as f64 / points as f64
}

/// e^{i q_k n} with q_k = 2 pi k / N.
pub fn phase(k: usize, n: i64, points: usize) -> Complex64 {
    // Reduce k n modulo N first, so that large products stay exact.
    let r = (k as i128 * n as i128).rem_euclid(points as i128) as usize;
    Complex64::from_polar(1.0, q_of(r, points))
}

/// V(q) = V^(0) + sum_{n >= 1} [V^(n) e^{iqn} + V^(n)T e^{-iqn}].
pub fn v_of_q(blocks: &[DMatrix<f64>], q: f64) -> DMatrix<Complex64> {
    let c = blocks[0].nrows();
    let mut v = blocks[0].map(|x| Complex64::new(x, 0.0));
    for (n, b) in blocks.iter().enumerate().skip(1) {
        let e = Complex64::from_polar(1.0, q * n as f64);
        for i in 0..c {
            for j in 0..c {
                v[(i, j)] += b[(i, j)] * e + b[(j, i)] * e.conj();
            }
        }
    }
    v
}

/// L(q_k) = sum_n l_n e^{-i q_k n} on the stored points of an N-point rule,
/// k-major ((N/2 + 1) n_c entries). `parts` are (offset, cell vector).
pub fn fourier_vector(parts: &[(usize, Vec<f64>)], cell: usize, points: usize) -> Vec<Complex64> {
    let mut out = vec![Complex64::new(0.0, 0.0); half(points) * cell];
    for k in 0..half(points) {
        for (off, l) in parts {
            let ph = phase(k, -(*off as i64), points);
            for (a, x) in l.iter().enumerate() {
                out[k * cell + a] += ph * *x;
            }
        }
    }
    out
}

/// M L for every stored point (e.g. G(q) = K_c^-1 L(q)).
pub fn times_cell(m: &DMatrix<f64>, lq: &[Complex64]) -> Vec<Complex64> {
    let c = m.nrows();
    (0..lq.len())
        .map(|i| {
            let (k, a) = (i / c, i % c);
            (0..c).map(|b| lq[k * c + b] * m[(a, b)]).sum()
        })
        .collect()
}

/// Bosonic dimension (1/2N) sum_q L^H D L over the stored points of a
/// D(q) state (interleaved layout, see the module docs).
#[inline]
pub fn dimension(d: &[f64], lq: &[Complex64], points: usize, cell: usize) -> f64 {
    let mut acc = 0.0;
    for k in 0..half(points) {
        acc += weight(k, points) * quadratic_form(d, lq, k, cell);
    }
    acc / (2.0 * points as f64)
}

/// Re L(q_k)^H D(q_k) L(q_k) at stored point k (the integrand of a
/// dimension; the flow's quadrature estimate samples it, `flow::qtrack`).
#[inline]
pub fn quadratic_form(d: &[f64], lq: &[Complex64], k: usize, cell: usize) -> f64 {
    let lk = &lq[k * cell..(k + 1) * cell];
    let base = 2 * k * cell * cell;
    let mut term = 0.0;
    for (a, la) in lk.iter().enumerate() {
        let row = &d[base + 2 * a * cell..base + 2 * (a + 1) * cell];
        let z: Complex64 = lk
            .iter()
            .enumerate()
            .map(|(b, lb)| Complex64::new(row[2 * b], row[2 * b + 1]) * lb)
            .sum();
        term += (la.conj() * z).re;
    }
    term
}

/// The bosonic dimension of a D(q) state on its N-point rule and on the
/// nested rule of N/2 points (N even), whose stored points are the even
/// stored points of the N-point rule (q_k on N/2 points is q_2k on N):
/// (Delta_N, Delta_N/2), both from the same D(q) in one pass. Used by the
/// flow's in-flow quadrature estimate ([`crate::flow::check`]).
pub fn nested_dimensions(d: &[f64], lq: &[Complex64], points: usize, cell: usize) -> (f64, f64) {
    let coarse = points / 2;
    let (mut full, mut half_rule) = (0.0, 0.0);
    for k in 0..half(points) {
        let f = quadratic_form(d, lq, k, cell);
        full += weight(k, points) * f;
        if k % 2 == 0 {
            half_rule += weight(k / 2, coarse) * f;
        }
    }
    (
        full / (2.0 * points as f64),
        half_rule / (2.0 * coarse as f64),
    )
}

/// The real-space block D^(n) = (1/N) sum_q D(q) e^{-iqn} of a D(q) state.
pub fn block(d: &[f64], points: usize, cell: usize, n: i64) -> DMatrix<f64> {
    let mut out = DMatrix::zeros(cell, cell);
    for k in 0..half(points) {
        let ph = phase(k, -n, points);
        let w = weight(k, points);
        let base = 2 * k * cell * cell;
        for a in 0..cell {
            for b in 0..cell {
                let at = base + 2 * (a * cell + b);
                // D(-q) e^{iqn} = conj(D(q) e^{-iqn}): the pair gives 2 Re.
                out[(a, b)] += w * (Complex64::new(d[at], d[at + 1]) * ph).re;
            }
        }
    }
    out / points as f64
}

/// Largest entry of D(q) K_c D(q) - K_c^-1 over the stored points, relative
/// to the largest entry of K_c^-1 (the flow keeps D K D = K^-1 q by q).
pub fn drift(d: &[f64], points: usize, k: &DMatrix<f64>, kinv: &DMatrix<f64>) -> f64 {
    let cell = k.nrows();
    let kc = k.map(|x| Complex64::new(x, 0.0));
    let mut worst: f64 = 0.0;
    for q in 0..half(points) {
        let dq = block_at(d, q, cell);
        let diff = &dq * &kc * &dq - kinv.map(|x| Complex64::new(x, 0.0));
        worst = worst.max(diff.iter().map(|z| z.norm()).fold(0.0, f64::max));
    }
    worst / kinv.amax()
}

/// D(q_k) of a state as a matrix.
pub fn block_at(d: &[f64], k: usize, cell: usize) -> DMatrix<Complex64> {
    let base = 2 * k * cell * cell;
    DMatrix::from_fn(cell, cell, |a, b| {
        let at = base + 2 * (a * cell + b);
        Complex64::new(d[at], d[at + 1])
    })
}

/// V(q) is not positive definite at some q.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct NotPositive {
    /// Where (in [0, pi]; V(-q) is the complex conjugate of V(q)).
    pub q: f64,
    /// Smallest eigenvalue of V(q) there.
    pub smallest_eigenvalue: f64,
}

/// The fixed point at one q.
#[derive(Debug, Clone)]
pub struct QSolution {
    /// D(q), Hermitian.
    pub d: DMatrix<Complex64>,
    /// Mode velocities 1/|eig S(q)|: right movers first, each group ascending.
    pub velocities: Vec<f64>,
    /// +1 right, -1 left, paired with `velocities`.
    pub chirality: Vec<i8>,
}

/// D(q), velocities and chiralities from K_c and a Hermitian V(q); the
/// smallest eigenvalue of V(q) when it is not positive definite.
pub fn solve_q(k: &DMatrix<f64>, vq: &DMatrix<Complex64>) -> Result<QSolution, f64> {
    let n = k.nrows();
    let c = cholesky(vq).ok_or_else(|| smallest_eigenvalue(vq))?;
    let mut cinv = DMatrix::<Complex64>::identity(n, n);
    if !c.solve_lower_triangular_mut(&mut cinv) {
        return Err(smallest_eigenvalue(vq));
    }
    let kc = k.map(|x| Complex64::new(x, 0.0));
    let s = &cinv * kc * cinv.adjoint();
    let s = (&s + s.adjoint()) * Complex64::new(0.5, 0.0);
    let eig = SymmetricEigen::new(s);
    let u = &eig.eigenvectors;
    let mut scaled = u.clone();
    for (j, e) in eig.eigenvalues.iter().enumerate() {
        let f = 1.0 / e.abs();
        for i in 0..n {
            scaled[(i, j)] *= f;
        }
    }
    let inner = scaled * u.adjoint();
    let d = cinv.adjoint() * inner * &cinv;
    let d = (&d + d.adjoint()) * Complex64::new(0.5, 0.0);
    let (velocities, chirality) = modes_of(eig.eigenvalues.iter().cloned());
    Ok(QSolution {
        d,
        velocities,
        chirality,
    })
}

/// Lower-triangular C with C C^H = V for a Hermitian positive definite V;
/// None when a pivot is not positive. (nalgebra's complex `Cholesky` takes
/// complex square roots of negative pivots and so cannot detect a V that is
/// not positive definite.)
pub fn cholesky(v: &DMatrix<Complex64>) -> Option<DMatrix<Complex64>> {
    let n = v.nrows();
    let mut c = DMatrix::<Complex64>::zeros(n, n);
    for j in 0..n {
        let mut d = v[(j, j)].re;
        for k in 0..j {
            d -= c[(j, k)].norm_sqr();
        }
        if d.is_nan() || d <= 0.0 {
            return None;
        }
        let djj = d.sqrt();
        c[(j, j)] = Complex64::new(djj, 0.0);
        for i in j + 1..n {
            let mut s = v[(i, j)];
            for k in 0..j {
                s -= c[(i, k)] * c[(j, k)].conj();
            }
            c[(i, j)] = s / djj;
        }
    }
    Some(c)
}

/// Smallest eigenvalue of a Hermitian matrix.
pub fn smallest_eigenvalue(v: &DMatrix<Complex64>) -> f64 {
    let sym = (v + v.adjoint()) * Complex64::new(0.5, 0.0);
    sym.symmetric_eigenvalues()
        .iter()
        .cloned()
        .fold(f64::INFINITY, f64::min)
}

/// The fixed point on the stored points of an N-point rule.
#[derive(Debug, Clone)]
pub struct QFixedPoint {
    /// N: wires of a periodic array, or quadrature points.
    pub points: usize,
    /// Fields per wire.
    pub cell: usize,
    /// D(q_k), k = 0..=N/2, interleaved (re, im), k-major.
    pub d: Vec<f64>,
    /// Mode velocities at each stored q (right movers first, ascending).
    pub velocities: Vec<Vec<f64>>,
    /// Chirality of each mode (the same at every q: right movers first).
    pub chirality: Vec<i8>,
}

impl QFixedPoint {
    /// Solve on the stored points of an N-point rule.
    pub fn solve(
        k: &DMatrix<f64>,
        blocks: &[DMatrix<f64>],
        points: usize,
    ) -> Result<QFixedPoint, NotPositive> {
        let cell = k.nrows();
        let mut fp = QFixedPoint {
            points,
            cell,
            d: vec![0.0; 2 * half(points) * cell * cell],
            velocities: vec![Vec::new(); half(points)],
            chirality: Vec::new(),
        };
        for i in 0..half(points) {
            fp.set(i, solve_at(k, blocks, i, points)?);
        }
        Ok(fp)
    }

    /// The 2N-point rule, reusing the points of this one (q_k = q_{2k}').
    pub fn refined(
        &self,
        k: &DMatrix<f64>,
        blocks: &[DMatrix<f64>],
    ) -> Result<QFixedPoint, NotPositive> {
        let points = 2 * self.points;
        let c2 = 2 * self.cell * self.cell;
        let mut fp = QFixedPoint {
            points,
            cell: self.cell,
            d: vec![0.0; c2 * half(points)],
            velocities: vec![Vec::new(); half(points)],
            chirality: self.chirality.clone(),
        };
        for i in 0..half(points) {
            if i % 2 == 0 {
                let j = i / 2;
                fp.d[i * c2..(i + 1) * c2].copy_from_slice(&self.d[j * c2..(j + 1) * c2]);
                fp.velocities[i] = self.velocities[j].clone();
            } else {
                fp.set(i, solve_at(k, blocks, i, points)?);
            }
        }
        Ok(fp)
    }

    /// The N/2-point rule nested in this one (N even): its stored points
    /// q_k = 2 pi k / (N/2) are this rule's even stored points, so nothing
    /// is solved again. None for odd N.
    pub fn coarsened(&self) -> Option<QFixedPoint> {
        if !self.points.is_multiple_of(2) {
            return None;
        }
        let points = self.points / 2;
        let c2 = 2 * self.cell * self.cell;
        let mut d = Vec::with_capacity(c2 * half(points));
        let mut velocities = Vec::with_capacity(half(points));
        for i in 0..half(points) {
            d.extend_from_slice(&self.d[2 * i * c2..(2 * i + 1) * c2]);
            velocities.push(self.velocities[2 * i].clone());
        }
        Some(QFixedPoint {
            points,
            cell: self.cell,
            d,
            velocities,
            chirality: self.chirality.clone(),
        })
    }

    fn set(&mut self, i: usize, s: QSolution) {
        let c = self.cell;
        for a in 0..c {
            for b in 0..c {
                let at = 2 * ((i * c + a) * c + b);
                self.d[at] = s.d[(a, b)].re;
                self.d[at + 1] = s.d[(a, b)].im;
            }
        }
        self.velocities[i] = s.velocities;
        self.chirality = s.chirality;
    }

    /// Bosonic dimension of a term given by its L(q) on this rule's points.
    pub fn dimension(&self, lq: &[Complex64]) -> f64 {
        dimension(&self.d, lq, self.points, self.cell)
    }

    /// Bosonic dimension of a term given by (offset, cell lattice vector).
    pub fn dimension_of(&self, parts: &[(usize, Vec<f64>)]) -> f64 {
        self.dimension(&fourier_vector(parts, self.cell, self.points))
    }

    /// D(q_k) for a stored k.
    pub fn d_at(&self, k: usize) -> DMatrix<Complex64> {
        block_at(&self.d, k, self.cell)
    }

    /// The real-space block D^(n) (the rule's value of the integral).
    pub fn block(&self, n: i64) -> DMatrix<f64> {
        block(&self.d, self.points, self.cell, n)
    }

    /// The real-space D restricted to `wires` consecutive wires (fields
    /// wire-major): D_{j,j'} = D^(j'-j) = integral dq/2pi e^{iq(j-j')} D(q),
    /// evaluated with this rule. For a periodic array of W = N wires and a
    /// window of at most W wires it is the array's D exactly; for the
    /// infinite array it is accurate when N is large against the window
    /// (see [`real_space_window`] for a refined version).
    pub fn real_space_window(&self, wires: usize) -> DMatrix<f64> {
        let c = self.cell;
        let blocks: Vec<DMatrix<f64>> = (0..wires).map(|n| self.block(n as i64)).collect();
        let mut out = DMatrix::zeros(wires * c, wires * c);
        for j in 0..wires {
            for j2 in 0..wires {
                let b = if j2 >= j {
                    blocks[j2 - j].clone()
                } else {
                    blocks[j - j2].transpose()
                };
                out.view_mut((j * c, j2 * c), (c, c)).copy_from(&b);
            }
        }
        out
    }

    /// Velocities of all N q points (each stored point counted with its
    /// weight), right movers first, each group ascending: the mode list of
    /// a periodic array of N wires.
    pub fn all_velocities(&self) -> (Vec<f64>, Vec<i8>) {
        let mut modes: Vec<(f64, i8)> = Vec::new();
        for (k, v) in self.velocities.iter().enumerate() {
            let copies = weight(k, self.points) as usize;
            for _ in 0..copies {
                modes.extend(v.iter().cloned().zip(self.chirality.iter().cloned()));
            }
        }
        sorted_modes(modes)
    }

    /// Per mode (in the order of [`QFixedPoint::chirality`]): the smallest
    /// and largest velocity over the stored q.
    pub fn velocity_ranges(&self) -> Vec<[f64; 2]> {
        (0..self.chirality.len())
            .map(|m| {
                let it = self.velocities.iter().map(|v| v[m]);
                [
                    it.clone().fold(f64::INFINITY, f64::min),
                    it.fold(f64::NEG_INFINITY, f64::max),
                ]
            })
            .collect()
    }
}

fn solve_at(
    k: &DMatrix<f64>,
    blocks: &[DMatrix<f64>],
    i: usize,
    points: usize,
) -> Result<QSolution, NotPositive> {
    let q = q_of(i, points);
    solve_q(k, &v_of_q(blocks, q)).map_err(|smallest_eigenvalue| NotPositive {
        q,
        smallest_eigenvalue,
    })
}

/// How well the quadrature of an infinite array is converged.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Quadrature {
    /// Points N of the periodic trapezoid rule (q_k = 2 pi k / N).
    pub points: usize,
    /// Estimated absolute error of the scaling dimensions and of the
    /// entries of the on-site block D^(0). Refined rule ([`converge`]): the
    /// largest change from the rule with half the points; since the error
    /// of the periodic trapezoid rule falls geometrically with N, the
    /// result on N points is far more accurate than that (an honest, in
    /// practice generous, bound). Fixed rule ([`on_rule`]): twice the
    /// largest change to the rule with twice the points, which bounds the
    /// N-point error whenever doubling N at least halves it.
    pub error_estimate: f64,
    /// The tolerance asked for (absolute).
    pub tolerance: f64,
    /// error_estimate <= tolerance, or (for values above 100) below their
    /// rounding noise ([`ROUNDING`], see [`settled`]).
    pub converged: bool,
}

impl Quadrature {
    /// What the reports add after the tolerance: "" when the estimate meets
    /// it, else whether the rule is not converged or settled at the
    /// rounding noise of large values ([`settled`]).
    pub fn verdict(&self, separator: &str) -> String {
        if !self.converged {
            format!("{separator}NOT converged")
        } else if self.error_estimate > self.tolerance {
            format!("{separator}converged to the rounding noise of values above 100")
        } else {
            String::new()
        }
    }
}

/// The quantities the refinement watches: every term's dimension and the
/// entries of D^(0).
fn watched(fp: &QFixedPoint, terms: &[Vec<Complex64>]) -> Vec<f64> {
    let mut out: Vec<f64> = terms.iter().map(|l| fp.dimension(l)).collect();
    out.extend(fp.block(0).iter().cloned());
    out
}

/// L(q) of every term on the stored points of an N-point rule.
fn term_vectors(
    terms: &[Vec<(usize, Vec<f64>)>],
    cell: usize,
    points: usize,
) -> Vec<Vec<Complex64>> {
    terms
        .iter()
        .map(|t| fourier_vector(t, cell, points))
        .collect()
}

fn largest_change(a: &[f64], b: &[f64]) -> f64 {
    a.iter()
        .zip(b)
        .map(|(x, y)| (x - y).abs())
        .fold(0.0, f64::max)
}

/// Relative size of the rounding noise of an N-point sum (and of the
/// per-q eigendecompositions behind it): a change below `ROUNDING` times
/// the value is noise, not quadrature error, and no number of points
/// removes it. About 4500 ulps; it matters only for values above 100 (the
/// absolute tolerance 1e-10 is 1e-12 of 100). Without it, a term with a
/// huge dimension (Delta = 5e11 from entries of 10^6) never meets an
/// absolute tolerance and the rule grew to [`MAX_POINTS`].
pub const ROUNDING: f64 = 1e-12;

/// Whether every pair (a_i, b_i) agrees within `tolerance` or, for large
/// values, within their rounding noise ([`ROUNDING`] times the larger).
pub fn settled(a: &[f64], b: &[f64], tolerance: f64) -> bool {
    a.iter()
        .zip(b)
        .all(|(x, y)| (x - y).abs() <= tolerance.max(ROUNDING * x.abs().max(y.abs())))
}

/// The lowest number of points worth starting from: a power of two, at
/// least [`MIN_POINTS`] and at least 4 (R + 1) for interactions and terms of
/// range R (so the coarsest rule already resolves the trigonometric
/// polynomials V(q) and L(q)).
pub fn start_points(range: usize) -> usize {
    (4 * (range + 1)).max(MIN_POINTS).next_power_of_two()
}

/// One doubling of the rule: the 2N-point fixed point (reusing the N
/// points, [`QFixedPoint::refined`]) with its error estimate, the largest
/// change of every term's dimension and every entry of D^(0) from the
/// N-point rule (see [`Quadrature`]). No positivity certificate: the
/// caller certifies the rule it keeps.
pub fn refine(
    k: &DMatrix<f64>,
    blocks: &[DMatrix<f64>],
    terms: &[Vec<(usize, Vec<f64>)>],
    fp: &QFixedPoint,
    tolerance: f64,
) -> Result<(QFixedPoint, Quadrature), NotPositive> {
    let lq = |points: usize| term_vectors(terms, k.nrows(), points);
    let finer = fp.refined(k, blocks)?;
    let (a, b) = (
        watched(&finer, &lq(finer.points)),
        watched(fp, &lq(fp.points)),
    );
    let quad = Quadrature {
        points: finer.points,
        error_estimate: largest_change(&a, &b),
        tolerance,
        converged: settled(&a, &b, tolerance),
    };
    Ok((finer, quad))
}

/// Refine the periodic trapezoid rule by doubling N, from
/// [`start_points`]`(range)`, until every term's dimension and every entry
/// of D^(0) changes by at most `tolerance`, or N reaches [`MAX_POINTS`].
/// Then certifies that V(q) is positive definite for every q (not only on
/// the points). `terms` are (offset, cell vector) parts.
pub fn converge(
    k: &DMatrix<f64>,
    blocks: &[DMatrix<f64>],
    terms: &[Vec<(usize, Vec<f64>)>],
    range: usize,
    tolerance: f64,
) -> Result<(QFixedPoint, Quadrature), NotPositive> {
    let mut fp = QFixedPoint::solve(k, blocks, start_points(range))?;
    loop {
        let (finer, quad) = refine(k, blocks, terms, &fp, tolerance)?;
        fp = finer;
        if quad.converged || fp.points >= MAX_POINTS {
            certify_positive(blocks, fp.points)?;
            return Ok((fp, quad));
        }
    }
}

/// The fixed point of the infinite array on a given N-point rule, with an
/// error estimate from the 2N-point rule (see [`Quadrature`]), and the
/// positivity certificate.
pub fn on_rule(
    k: &DMatrix<f64>,
    blocks: &[DMatrix<f64>],
    terms: &[Vec<(usize, Vec<f64>)>],
    points: usize,
    tolerance: f64,
) -> Result<(QFixedPoint, Quadrature), NotPositive> {
    let lq = |points: usize| term_vectors(terms, k.nrows(), points);
    let fp = QFixedPoint::solve(k, blocks, points)?;
    let finer = fp.refined(k, blocks)?;
    let (a, b) = (watched(&fp, &lq(points)), watched(&finer, &lq(2 * points)));
    certify_positive(blocks, 2 * points)?;
    // |I_N - I| <= |I_N - I_2N| + |I_2N - I| <= 2 |I_N - I_2N| when
    // |I_2N - I| <= |I_N - I| / 2.
    let estimate = 2.0 * largest_change(&a, &b);
    let doubled: Vec<f64> = a.iter().zip(&b).map(|(x, y)| x + 2.0 * (y - x)).collect();
    Ok((
        fp,
        Quadrature {
            points,
            error_estimate: estimate,
            tolerance,
            converged: settled(&a, &doubled, tolerance),
        },
    ))
}

/// Prove that V(q) is positive definite for every q in [0, pi] (V(-q) is
/// its conjugate), or find a q where it is not.
///
/// Eigenvalues are 1-Lipschitz in the operator norm (Weyl), and
/// |dV/dq| <= B = sum_{n>=1} 2 n |V^(n)|_F, so on an interval of length h
/// whose two ends have smallest eigenvalues above B h / 2 every point is
/// positive (a sharper form of this test is used, see below). Intervals
/// that fail the test are bisected; a point with a non-positive smallest
/// eigenvalue is reported.
pub fn certify_positive(blocks: &[DMatrix<f64>], points: usize) -> Result<(), NotPositive> {
    let bound: f64 = blocks
        .iter()
        .enumerate()
        .skip(1)
        .map(|(n, b)| 2.0 * n as f64 * b.norm())
        .sum();
    let lowest = |q: f64| -> Result<f64, NotPositive> {
        let e = smallest_eigenvalue(&v_of_q(blocks, q));
        if e > 0.0 {
            Ok(e)
        } else {
            Err(NotPositive {
                q,
                smallest_eigenvalue: e,
            })
        }
    };
    let n = half(points);
    let qs: Vec<f64> = (0..n).map(|k| q_of(k, points)).collect();
    let es = qs
        .iter()
        .map(|&q| lowest(q))
        .collect::<Result<Vec<f64>, _>>()?;
    // The last stored point is pi (N even) or below it (N odd): close at pi.
    let mut ends: Vec<(f64, f64)> = qs.iter().cloned().zip(es).collect();
    if ends.last().is_some_and(|e| e.0 < std::f64::consts::PI) {
        let pi = std::f64::consts::PI;
        ends.push((pi, lowest(pi)?));
    }
    let budget = std::cell::Cell::new(CERTIFY_BUDGET);
    for w in ends.windows(2) {
        certify_interval(&lowest, bound, w[0], w[1], &budget)?;
    }
    Ok(())
}

/// Most extra evaluations of V(q) the positivity certificate may spend. A
/// V(q) whose smallest eigenvalue stays positive but tiny over a wide range
/// of q could need more; the certificate then accepts the point (every
/// sampled q was positive).
const CERTIFY_BUDGET: usize = 100_000;

fn certify_interval(
    lowest: &dyn Fn(f64) -> Result<f64, NotPositive>,
    bound: f64,
    (qa, ea): (f64, f64),
    (qb, eb): (f64, f64),
    budget: &std::cell::Cell<usize>,
) -> Result<(), NotPositive> {
    // On [qa, qb] the smallest eigenvalue is at least
    // max(ea - B (q - qa), eb - B (qb - q)) >= (ea + eb - B (qb - qa)) / 2.
    if ea + eb > bound * (qb - qa) || budget.get() == 0 {
        return Ok(());
    }
    budget.set(budget.get() - 1);
    let qm = 0.5 * (qa + qb);
    let em = lowest(qm)?;
    certify_interval(lowest, bound, (qa, ea), (qm, em), budget)?;
    certify_interval(lowest, bound, (qm, em), (qb, eb), budget)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn without_interwire_blocks_every_q_is_the_dense_single_wire() {
        // D(q) = D of one wire at every q, and so is every velocity (the
        // dense path of `fixed_point` on the cell).
        let k = DMatrix::from_row_slice(2, 2, &[1.0, 0.0, 0.0, -1.0]);
        let v = DMatrix::from_row_slice(2, 2, &[1.0, 0.4, 0.4, 1.0]);
        let dense = crate::core::fixed_point::FixedPoint::solve(&k, &v).unwrap();
        let fp = QFixedPoint::solve(&k, &[v], 6).unwrap();
        for i in 0..half(6) {
            let diff = fp.d_at(i).map(|z| z.re) - &dense.d;
            assert!(diff.amax() < 1e-14 && fp.d_at(i).map(|z| z.im).amax() < 1e-14);
            assert_eq!(fp.velocities[i].len(), 2);
            for (a, b) in fp.velocities[i].iter().zip(&dense.velocities) {
                assert!((a - b).abs() < 1e-14);
            }
        }
        assert_eq!(fp.chirality, dense.chirality);
    }

    #[test]
    fn the_coarsened_rule_is_the_rule_of_half_the_points() {
        // q_k = 2 pi k / (N/2) and q_2k = 2 pi (2k) / N are the same float
        // (numerator and denominator both doubled, which is exact), so the
        // nested rule is bit for bit the rule solved on N/2 points.
        let k = DMatrix::from_row_slice(2, 2, &[1.0, 0.0, 0.0, -1.0]);
        let blocks = vec![
            DMatrix::from_row_slice(2, 2, &[1.0, 0.3, 0.3, 1.0]),
            DMatrix::from_element(2, 2, 0.15),
            DMatrix::from_element(2, 2, 0.03),
        ];
        for n in [6, 8, 12, 32] {
            let fine = QFixedPoint::solve(&k, &blocks, n).unwrap();
            let half_rule = QFixedPoint::solve(&k, &blocks, n / 2).unwrap();
            let nested = fine.coarsened().unwrap();
            assert_eq!(nested.points, n / 2);
            assert_eq!(nested.d, half_rule.d, "{n} points");
            assert_eq!(nested.velocities, half_rule.velocities, "{n} points");
        }
        let odd = QFixedPoint::solve(&k, &blocks, 7).unwrap();
        assert!(odd.coarsened().is_none());
    }

    #[test]
    fn cholesky_refuses_a_matrix_that_is_not_positive_definite() {
        let z = |x: f64, y: f64| Complex64::new(x, y);
        // [[1, 2i], [-2i, 1]] has eigenvalues 1 +- 2 (derived): indefinite.
        let bad =
            DMatrix::from_row_slice(2, 2, &[z(1.0, 0.0), z(0.0, 2.0), z(0.0, -2.0), z(1.0, 0.0)]);
        assert!(cholesky(&bad).is_none());
        let good =
            DMatrix::from_row_slice(2, 2, &[z(2.0, 0.0), z(0.5, 0.5), z(0.5, -0.5), z(1.0, 0.0)]);
        let c = cholesky(&good).unwrap();
        let diff = &c * c.adjoint() - &good;
        assert!(diff.iter().all(|z| z.norm() < 1e-14));
    }

    #[test]
    fn a_negative_window_between_points_is_found() {
        // V(q) = 1 + 2 a cos q + 2 b cos 2q on one field with a minimum
        // slightly below zero between rule points: the certificate finds it.
        let (a, b) = (-0.6, 0.45);
        let blocks = vec![
            DMatrix::from_element(1, 1, 1.0),
            DMatrix::from_element(1, 1, a),
            DMatrix::from_element(1, 1, b),
        ];
        // min over q of 1 + 2a cos q + 2b cos 2q = 1 - 2b - a^2/(4b) at
        // cos q = -a/(4b) (derived): 1 - 0.9 - 0.2 = -0.1 < 0, near
        // q = 1.23, while the 8-point rule's q = 0, pi/4, ..., pi all give
        // V > 0 (0.7, 0.15, 0.1, 1.85, 3.1).
        for k in 0..5 {
            let q = q_of(k, 8);
            assert!(1.0 + 2.0 * a * q.cos() + 2.0 * b * (2.0 * q).cos() > 0.0);
        }
        let err = certify_positive(&blocks, 8).unwrap_err();
        assert!(err.smallest_eigenvalue < 0.0);
        let v = 1.0 + 2.0 * a * err.q.cos() + 2.0 * b * (2.0 * err.q).cos();
        assert!((v - err.smallest_eigenvalue).abs() < 1e-12);
    }
}
