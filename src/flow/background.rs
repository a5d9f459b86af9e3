//! The flowing scaling-dimension matrix D, in two storage layouts.
//!
//! Flow [physics reference sections 3 and 4]:
//! dD/dell = -(1/8) sum_{null a} |y_a|^2 sum_{translates t}
//!           [ D l_t l_t^T D - K^-1 l_t l_t^T K^-1 ].
//! It keeps D K D = K^-1 exactly (the two terms of d(DKD) cancel when
//! DKD = K^-1); the drift of a numerical flow is measured by the caller.
//!
//! - [`Background::Dense`]: the full N x N matrix (explicit models, open
//!   arrays): each translate costs N^2.
//! - [`Background::Fourier`]: periodic arrays of W wires. D is block-
//!   circulant, D_{j,j'} = D^(j'-j), and is stored as its W Fourier blocks
//!   D(q) = sum_n D^(n) e^{i q n}, q = 2 pi k / W (each n_c x n_c,
//!   Hermitian). With L(q) = sum_j l_j e^{-i q j} (derived in a few lines:
//!   the sum over translates of u_t u_t^T, u = D l, is a circular
//!   autocorrelation whose transform is U(q) U(q)^H with U = D(q) L(q)):
//!
//!   ```text
//!   Delta      = (1/2W) sum_q L(q)^H D(q) L(q)
//!   dD(q)/dell = -(1/8) |y|^2 [ D(q) L L^H D(q) - G G^H ],  G = K_c^-1 L(q)
//!   ```
//!
//!   Cost W n_c^2 per channel instead of W N^2; since D and l are real,
//!   D(-q) = conj D(q) and only q in [0, pi] is stored. The same layout on
//!   the N points of a quadrature rule is the infinite array: its flow is
//!   exactly the family flow of a periodic array of N wires. The algebra
//!   (dimension, blocks, drift) lives in [`crate::core::qspace`], shared with the
//!   fixed point.
//!
//! Neither layout allocates: callers pass scratch space of `scratch_len()`.

use nalgebra::DMatrix;
use num_complex::Complex64;

use super::channels::Channel;
use crate::core::qspace;

/// Storage of D inside the ODE state.
#[derive(Debug, Clone)]
pub enum Background {
    /// Full matrix, row-major, n x n.
    Dense {
        /// Number of fields.
        n: usize,
    },
    /// Fourier blocks D(q_k), k = 0..=W/2, each n_c x n_c complex, stored
    /// as interleaved (re, im) pairs, row-major (the layout of
    /// [`crate::core::qspace`]).
    Fourier {
        /// Wires of a periodic array, or the points of the quadrature rule
        /// of an infinite array (number of q points).
        wires: usize,
        /// Fields per wire.
        cell: usize,
    },
}

impl Background {
    /// Number of state entries.
    pub fn len(&self) -> usize {
        match *self {
            Background::Dense { n } => n * n,
            Background::Fourier { wires, cell } => 2 * half(wires) * cell * cell,
        }
    }

    /// True for an empty state (never for a valid model).
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Scratch floats needed by [`Background::dimension_and_feedback`].
    pub fn scratch_len(&self) -> usize {
        match *self {
            Background::Dense { n } => n,
            Background::Fourier { cell, .. } => 2 * cell,
        }
    }

    /// Write the state of a dense D (for Fourier, D must be block-circulant).
    pub fn write(&self, d: &DMatrix<f64>, out: &mut [f64]) {
        match *self {
            Background::Dense { n } => {
                for i in 0..n {
                    for j in 0..n {
                        out[i * n + j] = d[(i, j)];
                    }
                }
            }
            Background::Fourier { wires, cell } => {
                for k in 0..half(wires) {
                    for a in 0..cell {
                        for b in 0..cell {
                            let z: Complex64 = (0..wires)
                                .map(|sep| d[(a, sep * cell + b)] * phase(k, sep as i64, wires))
                                .sum();
                            let at = 2 * ((k * cell + a) * cell + b);
                            out[at] = z.re;
                            out[at + 1] = z.im;
                        }
                    }
                }
            }
        }
    }

    /// The dense D of a state.
    pub fn dense(&self, s: &[f64]) -> DMatrix<f64> {
        match *self {
            Background::Dense { n } => DMatrix::from_fn(n, n, |i, j| s[i * n + j]),
            Background::Fourier { wires, cell } => {
                let blocks: Vec<DMatrix<f64>> = (0..wires)
                    .map(|sep| qspace::block(s, wires, cell, sep as i64))
                    .collect();
                let n = wires * cell;
                DMatrix::from_fn(n, n, |i, j| {
                    let (wi, a, wj, b) = (i / cell, i % cell, j / cell, j % cell);
                    blocks[(wj + wires - wi) % wires][(a, b)]
                })
            }
        }
    }

    /// Largest entry of D K D - K^-1 relative to the largest entry of K^-1:
    /// over the dense matrix, or over the stored Fourier blocks
    /// D(q) K_c D(q) - K_c^-1 (no dense matrix is formed). `k` is the dense
    /// K (Dense) or the cell K (Fourier).
    pub fn drift(&self, s: &[f64], k: &DMatrix<f64>) -> f64 {
        match *self {
            Background::Dense { .. } => super::dkd_drift(k, &self.dense(s)),
            Background::Fourier { wires, .. } => match k.clone().try_inverse() {
                Some(kinv) => qspace::drift(s, wires, k, &kinv),
                None => f64::NAN,
            },
        }
    }

    /// Bosonic dimension (1/2) l^T D l of a channel's representative.
    #[inline]
    pub fn dimension(&self, s: &[f64], ch: &Channel) -> f64 {
        match *self {
            Background::Dense { n } => {
                let l = &ch.l_sparse[ch.family.representative];
                let mut acc = 0.0;
                for &(i, x) in l {
                    for &(j, y) in l {
                        acc += x * y * s[i * n + j];
                    }
                }
                0.5 * acc
            }
            Background::Fourier { wires, cell } => qspace::dimension(s, &ch.lq, wires, cell),
        }
    }

    /// Bosonic dimension of a channel and, when `weight > 0`, its feedback
    /// ds += -(weight/8) sum_t [ D l_t l_t^T D - g_t g_t^T ] (g = K^-1 l),
    /// sharing the product D l between the two. `scratch` has at least
    /// `scratch_len()` entries.
    pub fn dimension_and_feedback(
        &self,
        s: &[f64],
        ch: &Channel,
        weight: f64,
        ds: &mut [f64],
        scratch: &mut [f64],
    ) -> f64 {
        match *self {
            Background::Dense { n } => {
                if weight > 0.0 {
                    dense_feedback(n, s, ch, -weight / 8.0, ds, &mut scratch[..n]);
                }
                self.dimension(s, ch)
            }
            Background::Fourier { wires, cell } => {
                // The sum over all W translates, scaled to the distinct ones.
                let c = -weight * ch.share / 8.0;
                let u = &mut scratch[..2 * cell];
                let mut acc = 0.0;
                for k in 0..half(wires) {
                    let lq = &ch.lq[k * cell..(k + 1) * cell];
                    let base = 2 * k * cell * cell;
                    let mut quad = 0.0;
                    for a in 0..cell {
                        let row = &s[base + 2 * a * cell..base + 2 * (a + 1) * cell];
                        let mut z = Complex64::new(0.0, 0.0);
                        for (d, l) in row.chunks_exact(2).zip(lq) {
                            z += Complex64::new(d[0], d[1]) * l;
                        }
                        quad += (lq[a].conj() * z).re;
                        u[2 * a] = z.re;
                        u[2 * a + 1] = z.im;
                    }
                    acc += qspace::weight(k, wires) * quad;
                    if weight > 0.0 {
                        let gq = &ch.gq[k * cell..(k + 1) * cell];
                        outer_update(u, gq, c, &mut ds[base..base + 2 * cell * cell]);
                    }
                }
                acc / (2.0 * wires as f64)
            }
        }
    }
}

/// ds += c (u u^H - g g^H) for one q block (u interleaved re/im).
#[inline]
fn outer_update(u: &[f64], g: &[Complex64], c: f64, ds: &mut [f64]) {
    let cell = g.len();
    for a in 0..cell {
        let ua = Complex64::new(u[2 * a], u[2 * a + 1]);
        for b in 0..cell {
            let ub = Complex64::new(u[2 * b], u[2 * b + 1]);
            let v = ua * ub.conj() - g[a] * g[b].conj();
            ds[2 * (a * cell + b)] += c * v.re;
            ds[2 * (a * cell + b) + 1] += c * v.im;
        }
    }
}

pub use crate::core::qspace::{half, phase, weight};

fn dense_feedback(n: usize, s: &[f64], ch: &Channel, c: f64, ds: &mut [f64], u: &mut [f64]) {
    for (l, g) in ch.l_sparse.iter().zip(&ch.g_sparse) {
        for (i, ui) in u.iter_mut().enumerate() {
            *ui = l.iter().map(|&(j, x)| s[i * n + j] * x).sum();
        }
        for i in 0..n {
            let row = &mut ds[i * n..(i + 1) * n];
            let cu = c * u[i];
            for (r, uj) in row.iter_mut().zip(u.iter()) {
                *r += cu * uj;
            }
        }
        for &(i, gi) in g {
            for &(j, gj) in g {
                ds[i * n + j] -= c * gi * gj;
            }
        }
    }
}
