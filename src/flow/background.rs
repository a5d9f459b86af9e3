//! The flowing scaling-dimension matrix D, in two storage layouts.
//!
//! Flow [physics reference section 3]:
//! dD/dell = -(1/8) sum_{null a} |y_a|^2 sum_{translates t}
//!           [ D l_t l_t^T D - K^-1 l_t l_t^T K^-1 ].
//! It keeps D K D = K^-1 exactly (the two terms of d(DKD) cancel when
//! DKD = K^-1); the drift of a numerical flow is measured by the caller.
//!
//! - [`Dense`]: the full N x N matrix (explicit models, open arrays).
//! - [`Circulant`]: periodic arrays, where D is block-circulant: only the
//!   blocks D^(n) = D[(0, .), (n, .)], n = 0..W-1, are stored, and the sum
//!   over translates becomes a circular autocorrelation of u = D l_rep:
//!   block n gets sum_i u_i u_{i+n}^T. Cost W^2 n_c^2 per channel instead of
//!   W (W n_c)^2.
//!
//! Neither layout allocates: callers pass scratch space of `scratch_len()`.

use nalgebra::DMatrix;

use super::channels::Channel;

/// Storage of D inside the ODE state.
#[derive(Debug, Clone)]
pub enum Background {
    /// Full matrix, row-major, n x n.
    Dense {
        /// Number of fields.
        n: usize,
    },
    /// Blocks D^(n) (each n_c x n_c, row-major), n = 0..W-1.
    Circulant {
        /// Wires.
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
            Background::Circulant { wires, cell } => wires * cell * cell,
        }
    }

    /// True for an empty state (never for a valid model).
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Scratch floats needed by [`Background::add_feedback`].
    pub fn scratch_len(&self) -> usize {
        match *self {
            Background::Dense { n } => n,
            Background::Circulant { wires, cell } => 2 * wires * cell,
        }
    }

    /// Write the state of a dense D.
    pub fn write(&self, d: &DMatrix<f64>, out: &mut [f64]) {
        match *self {
            Background::Dense { n } => {
                for i in 0..n {
                    for j in 0..n {
                        out[i * n + j] = d[(i, j)];
                    }
                }
            }
            Background::Circulant { wires, cell } => {
                for sep in 0..wires {
                    for a in 0..cell {
                        for b in 0..cell {
                            out[(sep * cell + a) * cell + b] = d[(a, sep * cell + b)];
                        }
                    }
                }
            }
        }
    }

    /// Entry D[i][j] of the state.
    #[inline]
    pub fn entry(&self, s: &[f64], i: usize, j: usize) -> f64 {
        match *self {
            Background::Dense { n } => s[i * n + j],
            Background::Circulant { wires, cell } => {
                let (wi, a) = (i / cell, i % cell);
                let (wj, b) = (j / cell, j % cell);
                let sep = (wj + wires - wi) % wires;
                s[(sep * cell + a) * cell + b]
            }
        }
    }

    /// The dense D of a state.
    pub fn dense(&self, s: &[f64]) -> DMatrix<f64> {
        let n = match *self {
            Background::Dense { n } => n,
            Background::Circulant { wires, cell } => wires * cell,
        };
        DMatrix::from_fn(n, n, |i, j| self.entry(s, i, j))
    }

    /// (1/2) l^T D l of a sparse vector.
    #[inline]
    pub fn dimension(&self, s: &[f64], l: &[(usize, f64)]) -> f64 {
        let mut acc = 0.0;
        for &(i, x) in l {
            for &(j, y) in l {
                acc += x * y * self.entry(s, i, j);
            }
        }
        0.5 * acc
    }

    /// ds += -(weight/8) sum_t [ D l_t l_t^T D - g_t g_t^T ] for a channel,
    /// with g = K^-1 l. `scratch` has at least `scratch_len()` entries.
    pub fn add_feedback(
        &self,
        s: &[f64],
        ch: &Channel,
        weight: f64,
        ds: &mut [f64],
        scratch: &mut [f64],
    ) {
        let c = -weight / 8.0;
        match *self {
            Background::Dense { n } => {
                let u = &mut scratch[..n];
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
            Background::Circulant { wires, cell } => {
                let n = wires * cell;
                let (u, g) = scratch.split_at_mut(n);
                let l = &ch.l_sparse[ch.family.representative];
                for (i, ui) in u.iter_mut().enumerate() {
                    *ui = l.iter().map(|&(j, x)| self.entry(s, i, j) * x).sum();
                }
                g[..n].fill(0.0);
                for &(i, x) in &ch.g_sparse[ch.family.representative] {
                    g[i] = x;
                }
                autocorrelate_into(u, &g[..n], wires, cell, c, ds);
            }
        }
    }
}

/// ds block sep (a, b) += c * sum_i (u[i, a] u[i+sep, b] - g[i, a] g[i+sep, b]).
fn autocorrelate_into(u: &[f64], g: &[f64], wires: usize, cell: usize, c: f64, ds: &mut [f64]) {
    for sep in 0..wires {
        for i in 0..wires {
            let j = (i + sep) % wires;
            for a in 0..cell {
                let (ua, ga) = (u[i * cell + a], g[i * cell + a]);
                if ua == 0.0 && ga == 0.0 {
                    continue;
                }
                for b in 0..cell {
                    let v = ua * u[j * cell + b] - ga * g[j * cell + b];
                    ds[(sep * cell + a) * cell + b] += c * v;
                }
            }
        }
    }
}
