//! The flowing scaling-dimension matrix D, in two storage layouts.
//!
//! Flow [docs/physics.md sections 3 and 5]:
//! dD/dell = -(1/8) sum_{null a} |y_a|^2 sum_{translates t}
//!           [ D l_t l_t^T D - K^-1 l_t l_t^T K^-1 ].
//! It keeps D K D = K^-1 exactly (the two terms of d(DKD) cancel when
//! DKD = K^-1); the drift of a numerical flow is measured by the caller.
//!
//! - [`Background::Dense`]: the symmetric N x N matrix as its upper
//!   triangle, row by row (row i holds columns i..N, [`packed_at`]; N(N+1)/2
//!   entries, half of the integrator's work on the full matrix; explicit
//!   models, open arrays): each translate costs N^2. The integrator measures
//!   its error as over the full matrix ([`Background::packed_symmetric`]).
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
//! The feedback as matrix products [`Background::evaluate`]: with the
//! per-channel sums over translates precomputed ([`Outer`]: sum_t l_t l_t^T
//! and sum_t g_t g_t^T, or L(q) L(q)^H and G(q) G(q)^H per stored q),
//! M = sum_c c_c sum_t l_t l_t^T and N = sum_c c_c sum_t g_t g_t^T
//! (c_c = -|y_c|^2/8, times the share on the Fourier layout) give
//! dD = D M D - N with two matrix products (per q block, or once for the
//! dense D) instead of one rank-one update per channel and translate. On
//! the Fourier layout every channel keeps its L(q) L(q)^H in the packed
//! Hermitian form ([`pack_block`]: per block the real diagonal and the
//! upper triangle, cell^2 reals instead of 2 cell^2), so its dimension is
//! one dot product with the packed D and M, N of all blocks are sums of
//! those arrays (contiguous loops, half the length of full blocks); the
//! per-block products run with the cell size a compile-time constant for
//! cells of one and two fields ([`block_steps`]: the same arithmetic,
//! unrolled, without bounds checks). The
//! per-channel route ([`Background::dimension_and_feedback`]) is kept as the
//! reference the products are tested against (`tests/rhs_products.rs`).
//! Invariants: the dense feedback is symmetrised and each block's feedback
//! is Hermitian with a real diagonal, so D stays symmetric (Hermitian per q)
//! to rounding of its own entries.
//!
//! Dense layout: every channel's sums lie on one merged list of positions
//! ([`Background::merge_outer`]), and D M D is formed either by gemm or,
//! where D's band above [`BAND_TOL`] of its largest entry makes it much
//! cheaper, on the band ([`crate::math::banded`]; the choice is made per
//! evaluation from the actual D, docs/flow-options.md "Large open strips").
//!
//! Neither layout allocates per evaluation (except gemm's packing buffer):
//! callers pass a [`Work`] from [`Background::work`] (or scratch space of
//! `scratch_len()` for the reference route).

use nalgebra::DMatrix;
use num_complex::Complex64;

use super::channels::Channel;
use crate::core::qspace;
use crate::math::banded;

/// Storage of D inside the ODE state.
#[derive(Debug, Clone)]
pub enum Background {
    /// Upper triangle of the symmetric n x n matrix, row by row
    /// ([`packed_at`]).
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
            Background::Dense { n } => n * (n + 1) / 2,
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

    /// Size of the symmetric matrix whose upper triangle the state packs
    /// (the integrator's [`crate::math::dop853::Dop853::set_packed_symmetric`]),
    /// None on the Fourier layout.
    pub fn packed_symmetric(&self) -> Option<usize> {
        match *self {
            Background::Dense { n } => Some(n),
            Background::Fourier { .. } => None,
        }
    }

    /// Write the state of a dense D (for Fourier, D must be block-circulant;
    /// for Dense, D is symmetric and its upper triangle is stored).
    pub fn write(&self, d: &DMatrix<f64>, out: &mut [f64]) {
        match *self {
            Background::Dense { n } => {
                let mut p = 0;
                for i in 0..n {
                    for j in i..n {
                        out[p] = d[(i, j)];
                        p += 1;
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
            Background::Dense { n } => DMatrix::from_fn(n, n, |i, j| s[sym_at(n, i, j)]),
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
                        acc += x * y * s[sym_at(n, i, j)];
                    }
                }
                0.5 * acc
            }
            Background::Fourier { wires, cell } => qspace::dimension(s, &ch.lq, wires, cell),
        }
    }

    /// Reference route (one rank-one update per channel and translate):
    /// bosonic dimension of a channel and, when `weight > 0`, its feedback
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

/// Position of entry (i, j), i <= j, in the packed upper triangle of an
/// n x n matrix stored row by row (row i holds columns i..n).
#[inline]
pub fn packed_at(n: usize, i: usize, j: usize) -> usize {
    debug_assert!(i <= j && j < n);
    i * (2 * n - i + 1) / 2 + (j - i)
}

/// Position of entry (i, j) or (j, i) of a packed symmetric matrix.
#[inline]
fn sym_at(n: usize, i: usize, j: usize) -> usize {
    if i <= j {
        packed_at(n, i, j)
    } else {
        packed_at(n, j, i)
    }
}

/// u += x D e_j for the packed symmetric D: column j is row i's entry
/// j - i for i <= j (a stride that shrinks by one per row), then the rest
/// of row j.
#[inline]
fn column_axpy(n: usize, s: &[f64], j: usize, x: f64, u: &mut [f64]) {
    let mut p = j;
    for (i, ui) in u[..j].iter_mut().enumerate() {
        *ui += s[p] * x;
        p += n - i - 1;
    }
    for (ui, d) in u[j..].iter_mut().zip(&s[p..p + n - j]) {
        *ui += d * x;
    }
}

/// The reference route's ds += c sum_t (u_t u_t^T - g_t g_t^T), u = D l_t,
/// on the packed upper triangle.
fn dense_feedback(n: usize, s: &[f64], ch: &Channel, c: f64, ds: &mut [f64], u: &mut [f64]) {
    for (l, g) in ch.l_sparse.iter().zip(&ch.g_sparse) {
        u.fill(0.0);
        for &(j, x) in l {
            column_axpy(n, s, j, x, u);
        }
        let mut p = 0;
        for i in 0..n {
            let row = &mut ds[p..p + n - i];
            p += n - i;
            let cu = c * u[i];
            for (r, uj) in row.iter_mut().zip(&u[i..]) {
                *r += cu * uj;
            }
        }
        for &(i, gi) in g {
            for &(j, gj) in g.iter().filter(|&&(j, _)| j >= i) {
                ds[packed_at(n, i, j)] -= c * gi * gj;
            }
        }
    }
}

/// The feedback data of one null channel, precomputed per flow: its
/// translates' outer products summed ([`Background::outer`]).
#[derive(Debug, Clone)]
pub enum Outer {
    /// The upper triangles (i <= j) of sum_t l_t l_t^T and sum_t g_t g_t^T
    /// on the union of their entries, as parallel arrays (so one index
    /// serves both sums). After [`Background::merge_outer`], `ll` and `gg`
    /// run over the positions `start..` of the union of every channel's
    /// entries ([`Work`]), with zeros where the channel has none.
    Dense {
        /// Row-major index i n + j of each entry, i <= j, ascending.
        at: Vec<usize>,
        /// sum_t l_t l_t^T at `at`.
        ll: Vec<f64>,
        /// sum_t g_t g_t^T at `at`.
        gg: Vec<f64>,
        /// The largest j - i among the entries (half-bandwidth).
        band: usize,
        /// Position of `at[0]` in the union (set by the merge).
        start: usize,
    },
    /// L(q) L(q)^H and then G(q) G(q)^H on every stored q, each block in
    /// the packed Hermitian form of [`pack_block`] with the off-diagonal
    /// entries doubled (exact), so that the dot product with a packed D is
    /// Re sum_ab over the whole block.
    Fourier {
        /// The packed L L^H blocks, then the packed G G^H blocks.
        packed: Vec<f64>,
    },
}

/// Scratch space of [`Background::evaluate`], sized once per flow.
#[derive(Debug, Clone)]
pub struct Work {
    /// M (dense: n x n; Fourier: one block).
    m: DMatrix<f64>,
    /// N, same shape as M.
    n: DMatrix<f64>,
    /// D M.
    t: DMatrix<f64>,
    /// D M D (dense only).
    r: DMatrix<f64>,
    /// Dense: D unpacked from the state (in full for gemm; only its band
    /// for the banded product, the rest unused).
    d: DMatrix<f64>,
    /// Fourier: M of every stored block, then N of every stored block,
    /// packed like [`Outer::Fourier`]; dense: M on the union `u`.
    mq: Vec<f64>,
    /// Dense: N on the union `u` (Fourier: unused).
    nq: Vec<f64>,
    /// Dense: the union of every channel's entries of M and N (row-major
    /// positions, upper triangle, ascending; [`Background::merge_outer`]).
    u: Vec<usize>,
    /// Dense: the transposed positions of `u`.
    ut: Vec<usize>,
    /// Fourier: D times each block's share of the sum over q, packed.
    dw: Vec<f64>,
    /// Fourier: the state position of each entry of `dw` ([`pack_block`]'s
    /// order).
    pack: Vec<usize>,
    /// Fourier: the share of `pack`'s entries.
    pack_share: Vec<f64>,
    /// Fourier: each entry of a full block as (position in its packed
    /// block, factor) ([`unpack_block`]).
    unpack: Vec<(usize, f64)>,
    /// Dense: how D M D is formed.
    pub route: DenseRoute,
    /// Dense: half-bandwidth of M and N (every channel's entries).
    bm: usize,
    /// Dense: per channel, the terms (position in the packed D, x_i x_j)
    /// of its representative's quadratic form in the order of
    /// [`Background::dimension`] ([`Background::prepare_dimensions`]);
    /// empty: not prepared.
    quad: Vec<Vec<(usize, f64)>>,
    /// Fourier: the cell's K^-1, row-major ([`Work::set_cell_kinv`]); when
    /// empty, N is summed from every channel's G G^H like M.
    kinv: Vec<f64>,
}

impl Work {
    /// Fourier layout: form N(q) = K_c^-1 M(q) K_c^-1 per block instead of
    /// summing every channel's G(q) G(q)^H (G = K_c^-1 L, so the two agree
    /// up to rounding): one sum over the channels instead of two.
    pub fn set_cell_kinv(&mut self, kinv: &DMatrix<f64>) {
        let c = kinv.nrows();
        self.kinv = (0..c * c).map(|i| kinv[(i / c, i % c)]).collect();
    }
}

/// How the dense layout forms D M D ([`Background::evaluate`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum DenseRoute {
    /// The banded product where it costs less than the dense one, decided
    /// on every evaluation from D's bandwidth (the default).
    Auto,
    /// Always the dense product (gemm).
    Full,
    /// Always the banded product (tests).
    Banded,
}

/// Entries of D below this fraction of D's largest entry count as zero in
/// the banded product (docs/flow-options.md, "Dense D: the banded
/// product"): a few units of rounding of D's largest entry, the accuracy
/// to which D is known at all (the far entries of the bare D of an open
/// 200-wire strip are rounding noise up to 3.5 units).
pub const BAND_TOL: f64 = 8.0 * f64::EPSILON;

/// How many times faster per multiply-add the dense product (gemm) runs
/// than the banded loops: the banded route is taken when its count of
/// multiply-adds times this is below 2 n^3. Measured (benches/README.md):
/// on the 32-field strip (b about 8, 4.7x fewer operations) the banded
/// route took 1.8x longer than gemm, so about 8x per operation; on the
/// 400-field strip it has 30-100x fewer operations and wins.
const GEMM_ADVANTAGE: f64 = 10.0;

impl Background {
    /// The precomputed outer products of a channel on this layout.
    pub fn outer(&self, ch: &Channel) -> Outer {
        match *self {
            Background::Dense { n } => dense_outer(n, ch),
            Background::Fourier { wires, cell } => {
                let p = half(wires) * cell * cell;
                let mut packed = vec![0.0; 2 * p];
                let (ll, gg) = packed.split_at_mut(p);
                block_outer(&ch.lq, cell, ll);
                block_outer(&ch.gq, cell, gg);
                Outer::Fourier { packed }
            }
        }
    }

    /// Scratch space for [`Background::evaluate`].
    pub fn work(&self) -> Work {
        let (rows, cols) = match *self {
            Background::Dense { n } => (n, n),
            Background::Fourier { cell, .. } => (2 * cell, cell),
        };
        let z = || DMatrix::zeros(rows, cols);
        let mut work = self.work_matrices(z);
        if let Background::Fourier { wires, cell } = *self {
            (work.pack, work.pack_share) = packing(wires, cell);
            work.unpack = unpacking(cell);
        }
        work
    }

    fn work_matrices(&self, z: impl Fn() -> DMatrix<f64>) -> Work {
        // Fourier: the packed length of all stored blocks; dense: D's size.
        let (q, dn) = match *self {
            Background::Dense { n } => (0, n),
            Background::Fourier { wires, cell } => (half(wires) * cell * cell, 0),
        };
        Work {
            m: z(),
            n: z(),
            t: z(),
            r: z(),
            d: DMatrix::zeros(dn, dn),
            mq: vec![0.0; 2 * q],
            nq: Vec::new(),
            dw: vec![0.0; q],
            route: DenseRoute::Auto,
            bm: 0,
            kinv: Vec::new(),
            pack: Vec::new(),
            pack_share: Vec::new(),
            unpack: Vec::new(),
            u: Vec::new(),
            ut: Vec::new(),
            quad: Vec::new(),
        }
    }

    /// Bosonic dimension of every live channel into `dims[c]`, and the
    /// feedback of D into `ds` (added) as matrix products: `weight[c]` is
    /// |y_c|^2 (0 for channels that do not feed back), `outer[c]` the
    /// channel's [`Outer`] (needed where `weight[c] > 0`; on the Fourier
    /// layout every channel's is used for its dimension when present).
    #[allow(clippy::too_many_arguments)]
    pub fn evaluate(
        &self,
        s: &[f64],
        channels: &[&Channel],
        live: &[usize],
        outer: &[Option<Outer>],
        weight: &[f64],
        dims: &mut [f64],
        ds: &mut [f64],
        work: &mut Work,
    ) {
        match *self {
            Background::Dense { n } => {
                let live = (channels, live, outer, weight);
                if dense_sums(self, s, live, dims, work) {
                    dense_products(n, s, ds, work);
                }
            }
            Background::Fourier { wires, cell } => {
                let live = (channels, live, outer, weight);
                fourier_evaluate(wires, cell, s, live, dims, ds, work);
            }
        }
    }
}

/// The channels, the live ones among them, their outer products and their
/// weights |y|^2, as [`Background::evaluate`] receives them.
type Live<'a, 'c> = (
    &'a [&'c Channel],
    &'a [usize],
    &'a [Option<Outer>],
    &'a [f64],
);

/// [`Background::evaluate`] on the Fourier layout. Every stored block at
/// once: with L L^H of a channel packed like D ([`Outer::Fourier`]), Re
/// sum_ab D(q)_ab conj(L L^H)_ab = Re L^H D(q) L is the plain dot product
/// of the two real arrays, so a channel's dimension is one dot product
/// with D weighted by each block's share (1/2W, twice for q and -q), and
/// M, N of all blocks are sums of the channels' arrays: contiguous loops
/// the compiler vectorises.
fn fourier_evaluate(
    wires: usize,
    cell: usize,
    s: &[f64],
    (channels, live, outer, weight): Live<'_, '_>,
    dims: &mut [f64],
    ds: &mut [f64],
    work: &mut Work,
) {
    let (p, blocks) = (cell * cell, half(wires));
    let packing = work.pack.iter().zip(&work.pack_share);
    for (w, (&at, &share)) in work.dw.iter_mut().zip(packing) {
        *w = share * s[at];
    }
    work.mq.fill(0.0);
    let mut any = false;
    for &c in live {
        let Some(Outer::Fourier { packed }) = &outer[c] else {
            dims[c] = qspace::dimension(s, &channels[c].lq, wires, cell);
            continue;
        };
        let (ll, gg) = packed.split_at(blocks * p);
        if weight[c] > 0.0 {
            // With K_c^-1 known, N follows from M per block.
            let coef = -weight[c] * channels[c].share / 8.0;
            let (mq, nq) = work.mq.split_at_mut(blocks * p);
            axpy(mq, ll, coef);
            if work.kinv.is_empty() {
                axpy(nq, gg, coef);
            }
            any = true;
        }
        dims[c] = dot(&work.dw, ll);
    }
    if !any {
        return;
    }
    // Cells of one and two fields (most models) with the cell a constant:
    // the per-block loops unroll and lose their bounds checks, the
    // arithmetic is the same.
    match cell {
        1 => block_steps::<1>(cell, blocks, s, ds, work),
        2 => block_steps::<2>(cell, blocks, s, ds, work),
        _ => block_steps::<0>(cell, blocks, s, ds, work),
    }
}

/// ds += D M D - N on every stored block ([`fourier_evaluate`], M and N
/// summed in `work.mq`); the cell is `C`, or `cell` when `C` is 0.
#[inline(always)]
fn block_steps<const C: usize>(
    cell: usize,
    blocks: usize,
    s: &[f64],
    ds: &mut [f64],
    work: &mut Work,
) {
    let cell = if C == 0 { cell } else { C };
    let (size, p) = (2 * cell * cell, cell * cell);
    let (mp, np) = work.mq.split_at(blocks * p);
    let (m, n) = (work.m.as_mut_slice(), work.n.as_mut_slice());
    let (t, r) = (work.t.as_mut_slice(), work.r.as_mut_slice());
    let (m, n, t, r) = (
        &mut m[..size],
        &mut n[..size],
        &mut t[..size],
        &mut r[..size],
    );
    for k in 0..blocks {
        let (range, rp) = (k * size..(k + 1) * size, k * p..(k + 1) * p);
        unpack_block(&mp[rp.clone()], &work.unpack[..size], m);
        if work.kinv.is_empty() {
            unpack_block(&np[rp], &work.unpack[..size], n);
        } else {
            kinv_sandwich::<C>(cell, &work.kinv[..p], m, n, r);
        }
        block_products::<C>(cell, &s[range.clone()], &mut ds[range], m, n, t);
    }
}

/// n = K_c^-1 m K_c^-1 for one block, upper triangle (m, n interleaved
/// complex, m Hermitian; `kinv` the real symmetric cell K^-1, row-major;
/// `r` scratch for K_c^-1 m): N(q) of the channels' G(q) = K_c^-1 L(q)
/// from M(q), exact up to rounding. Every sum runs along two rows (column
/// b of a Hermitian m is the conjugate of its row b, of kinv its row b).
/// The cell is `C`, or `cell` when `C` is 0 (as in [`block_steps`]).
#[inline(always)]
fn kinv_sandwich<const C: usize>(
    cell: usize,
    kinv: &[f64],
    m: &[f64],
    n: &mut [f64],
    r: &mut [f64],
) {
    let cell = if C == 0 { cell } else { C };
    for (ka, ra) in kinv.chunks_exact(cell).zip(r.chunks_exact_mut(2 * cell)) {
        for (mb, rab) in m.chunks_exact(2 * cell).zip(ra.chunks_exact_mut(2)) {
            let (mut re, mut im) = (0.0, 0.0);
            for (&x, z) in ka.iter().zip(mb.chunks_exact(2)) {
                re += x * z[0];
                im -= x * z[1];
            }
            (rab[0], rab[1]) = (re, im);
        }
    }
    for a in 0..cell {
        let ra = &r[2 * a * cell..2 * (a + 1) * cell];
        for b in a..cell {
            let (mut re, mut im) = (0.0, 0.0);
            for (x, &y) in ra.chunks_exact(2).zip(&kinv[b * cell..(b + 1) * cell]) {
                re += x[0] * y;
                im += x[1] * y;
            }
            (n[2 * (a * cell + b)], n[2 * (a * cell + b) + 1]) = (re, im);
        }
    }
}

#[cfg(test)]
mod fourier_tests;

/// sum_i a_i b_i, in four interleaved partial sums (so it vectorises).
#[inline]
fn dot(a: &[f64], b: &[f64]) -> f64 {
    let mut acc = [0.0; 4];
    let ((ca, ta), (cb, tb)) = (a.as_chunks::<4>(), b.as_chunks::<4>());
    let tail: f64 = ta.iter().zip(tb).map(|(x, y)| x * y).sum();
    for (x, y) in ca.iter().zip(cb) {
        for i in 0..4 {
            acc[i] += x[i] * y[i];
        }
    }
    reduce(acc, tail)
}

/// (acc_0 + acc_1) + (acc_2 + acc_3) + tail. The partial sums pass through
/// `black_box` (a no-op on the values): seeing this pairing, the compiler
/// otherwise keeps acc_0, acc_2 and acc_1, acc_3 in one register each and
/// shuffles every block of the loop (half its instructions).
#[inline]
fn reduce(acc: [f64; 4], tail: f64) -> f64 {
    let acc = std::hint::black_box(acc);
    (acc[0] + acc[1]) + (acc[2] + acc[3]) + tail
}

/// y += c x.
#[inline]
fn axpy(y: &mut [f64], x: &[f64], c: f64) {
    for (u, v) in y.iter_mut().zip(x) {
        *u += c * v;
    }
}

/// The channel's [`Outer::Dense`]: sum_t v_t v_t^T of its l and its g,
/// upper triangle, on the union of the two sums' entries.
fn dense_outer(n: usize, ch: &Channel) -> Outer {
    // Every product, then a stable sort by position: each position's
    // products are summed in the order they were made.
    let mut terms = Vec::new();
    for (which, vs) in [(0, &ch.l_sparse), (1, &ch.g_sparse)] {
        for v in vs {
            for &(i, x) in v {
                for &(j, y) in v.iter().filter(|&&(j, _)| j >= i) {
                    terms.push((i * n + j, which, terms.len(), x * y));
                }
            }
        }
    }
    // The running index makes every key distinct: an unstable sort gives
    // the stable order, without the stable sort's buffer.
    terms.sort_unstable_by_key(|&(p, which, k, _)| (p, which, k));
    let (mut at, mut ll, mut gg) = (Vec::new(), Vec::new(), Vec::new());
    for &(p, which, _, v) in &terms {
        if at.last() != Some(&p) {
            at.push(p);
            ll.push(0.0);
            gg.push(0.0);
        }
        let sums = [&mut ll, &mut gg];
        *sums[which].last_mut().expect("pushed") += v;
    }
    let kept: Vec<usize> = (0..at.len())
        .filter(|&k| ll[k] != 0.0 || gg[k] != 0.0)
        .collect();
    let at: Vec<usize> = kept.iter().map(|&k| at[k]).collect();
    let ll: Vec<f64> = kept.iter().map(|&k| ll[k]).collect();
    let gg: Vec<f64> = kept.iter().map(|&k| gg[k]).collect();
    let band = at.iter().map(|&p| p % n - p / n).max().unwrap_or(0);
    Outer::Dense {
        at,
        ll,
        gg,
        band,
        start: 0,
    }
}

impl Background {
    /// Dense layout: merge the channels' [`Outer::Dense`] into one list of
    /// positions (the union, kept in `work`) and re-express each channel's
    /// sums as a contiguous stretch of it, so that M and N on the union are
    /// sums of contiguous arrays ([`dense_sums`]). Call once per flow, after
    /// [`Background::outer`] and [`Background::work`]; nothing on the
    /// Fourier layout.
    pub fn merge_outer(&self, outer: &mut [Option<Outer>], work: &mut Work) {
        let Background::Dense { n } = *self else {
            return;
        };
        let mut union = std::collections::BTreeSet::new();
        for o in outer.iter() {
            if let Some(Outer::Dense { at, .. }) = o {
                union.extend(at.iter().copied());
            }
        }
        work.u = union.into_iter().collect();
        work.ut = work.u.iter().map(|&p| (p % n) * n + p / n).collect();
        work.mq = vec![0.0; work.u.len()];
        work.nq = vec![0.0; work.u.len()];
        work.bm = 0;
        for o in outer.iter_mut() {
            if let Some(Outer::Dense {
                at,
                ll,
                gg,
                band,
                start,
            }) = o
            {
                work.bm = work.bm.max(*band);
                let Some((&first, &last)) = at.first().zip(at.last()) else {
                    continue;
                };
                let pos = |p: usize| work.u.binary_search(&p).expect("in the union");
                let (lo, hi) = (pos(first), pos(last) + 1);
                let (mut l, mut g) = (vec![0.0; hi - lo], vec![0.0; hi - lo]);
                for (k, &p) in at.iter().enumerate() {
                    (l[pos(p) - lo], g[pos(p) - lo]) = (ll[k], gg[k]);
                }
                (*ll, *gg, *start) = (l, g, lo);
            }
        }
    }
}

impl Background {
    /// Dense layout: the channels' quadratic forms for their dimensions
    /// (the same products, summed in the same order as
    /// [`Background::dimension`], without its index arithmetic). Call once
    /// per flow; nothing on the Fourier layout.
    pub fn prepare_dimensions(&self, channels: &[&Channel], work: &mut Work) {
        let Background::Dense { n } = *self else {
            return;
        };
        work.quad = channels
            .iter()
            .map(|ch| {
                let l = &ch.l_sparse[ch.family.representative];
                let pairs = l
                    .iter()
                    .flat_map(|&(i, x)| l.iter().map(move |&(j, y)| (i, x, j, y)));
                pairs.map(|(i, x, j, y)| (sym_at(n, i, j), x * y)).collect()
            })
            .collect();
    }
}

/// The dense layout's dimensions into `dims`, and M, N (both triangles:
/// the union's positions, the rest stays zero) into `work`; false when no
/// channel feeds back. Needs [`Background::merge_outer`].
fn dense_sums(
    bg: &Background,
    s: &[f64],
    (channels, live, outer, weight): Live<'_, '_>,
    dims: &mut [f64],
    work: &mut Work,
) -> bool {
    work.mq.fill(0.0);
    work.nq.fill(0.0);
    let mut any = false;
    for &c in live {
        dims[c] = match work.quad.get(c) {
            Some(q) => 0.5 * q.iter().fold(0.0, |acc, &(p, xy)| acc + xy * s[p]),
            None => bg.dimension(s, channels[c]),
        };
        if let (true, Some(Outer::Dense { ll, gg, start, .. })) = (weight[c] > 0.0, &outer[c]) {
            let coef = -weight[c] / 8.0;
            axpy(&mut work.mq[*start..*start + ll.len()], ll, coef);
            axpy(&mut work.nq[*start..*start + gg.len()], gg, coef);
            any = true;
        }
    }
    let (m, nn) = (work.m.as_mut_slice(), work.n.as_mut_slice());
    for (k, (&p, &pt)) in work.u.iter().zip(&work.ut).enumerate() {
        (m[p], m[pt]) = (work.mq[k], work.mq[k]);
        (nn[p], nn[pt]) = (work.nq[k], work.nq[k]);
    }
    any
}

/// ds += (D M D + (D M D)^T)/2 - N for the dense layout (M, N in `work`;
/// D and ds packed), by the banded or the dense product as `work.route`
/// says.
fn dense_products(n: usize, s: &[f64], ds: &mut [f64], work: &mut Work) {
    let bm = work.bm;
    let b = match work.route {
        DenseRoute::Full => None,
        route => {
            let b = banded::packed_bandwidth(s, n, BAND_TOL * banded::max_abs(s));
            let dense = 2.0 * (n as f64).powi(3);
            let cheap = banded::triple_cost(n, b, bm) * GEMM_ADVANTAGE < dense;
            (route == DenseRoute::Banded || cheap).then_some(b)
        }
    };
    let Some(b) = b else {
        return gemm_products(n, s, ds, work);
    };
    banded::unpack_band(n, s, b, work.d.as_mut_slice());
    let (t, r) = (work.t.as_mut_slice(), work.r.as_mut_slice());
    banded::sym_triple(n, work.d.as_slice(), b, work.m.as_slice(), bm, t, r);
    let nn = work.n.as_slice();
    let (w, mut p) = (2 * b + bm, 0);
    for i in 0..n {
        let dsi = &mut ds[p..p + n - i];
        p += n - i;
        let (ri, ni) = (&r[i * n + i..(i + 1) * n], &nn[i * n + i..(i + 1) * n]);
        for (x, y) in dsi.iter_mut().zip(ri).take(w + 1) {
            *x += y;
        }
        for (x, y) in dsi.iter_mut().zip(ni).take(bm + 1) {
            *x -= y;
        }
    }
}

/// The dense product of [`dense_products`]: D unpacked in full, D M D by
/// gemm, symmetrised into the packed ds.
fn gemm_products(n: usize, s: &[f64], ds: &mut [f64], work: &mut Work) {
    banded::unpack_band(n, s, n.saturating_sub(1), work.d.as_mut_slice());
    work.t.gemm(1.0, &work.d, &work.m, 0.0);
    work.r.gemm(1.0, &work.t, &work.d, 0.0);
    let mut p = 0;
    for i in 0..n {
        for j in i..n {
            let sym = 0.5 * (work.r[(i, j)] + work.r[(j, i)]);
            ds[p] += sym - work.n[(i, j)];
            p += 1;
        }
    }
}

/// V V^H of every stored q block of a Fourier vector (k-major, `cell`
/// entries per block) into `out`, packed ([`pack_block`]) with the
/// off-diagonal entries doubled.
fn block_outer(v: &[Complex64], cell: usize, out: &mut [f64]) {
    let mut full = vec![0.0; 2 * cell * cell];
    for (vk, out) in v.chunks_exact(cell).zip(out.chunks_exact_mut(cell * cell)) {
        for a in 0..cell {
            for b in 0..cell {
                let z = vk[a] * vk[b].conj();
                full[2 * (a * cell + b)] = z.re;
                full[2 * (a * cell + b) + 1] = z.im;
            }
        }
        pack_block(&full, cell, 1.0, 2.0, out);
    }
}

/// The packed Hermitian form of a block `x` (interleaved (re, im),
/// row-major, cell x cell) into `out` (cell^2 reals): row by row, the real
/// part of the diagonal entry times `diag`, then (re, im) of each entry
/// right of the diagonal times `off`. The lower triangle and the diagonal's
/// imaginary parts are not read (a Hermitian block's are implied).
#[inline]
fn pack_block(x: &[f64], cell: usize, diag: f64, off: f64, out: &mut [f64]) {
    let mut i = 0;
    for a in 0..cell {
        let row = &x[2 * (a * cell + a)..2 * (a + 1) * cell];
        out[i] = diag * row[0];
        for (o, v) in out[i + 1..i + row.len() - 1].iter_mut().zip(&row[2..]) {
            *o = off * v;
        }
        i += row.len() - 1;
    }
}

/// The state positions of the packed entries of every stored block
/// ([`pack_block`]'s order) and each one's share of the sum over q (1/2W,
/// twice for q and -q).
fn packing(wires: usize, cell: usize) -> (Vec<usize>, Vec<f64>) {
    let (mut at, mut share) = (Vec::new(), Vec::new());
    for k in 0..half(wires) {
        let w = qspace::weight(k, wires) / (2.0 * wires as f64);
        let base = 2 * k * cell * cell;
        for a in 0..cell {
            at.push(base + 2 * (a * cell + a));
            for b in a + 1..cell {
                at.extend([base + 2 * (a * cell + b), base + 2 * (a * cell + b) + 1]);
            }
        }
        share.resize(at.len(), w);
    }
    (at, share)
}

/// For each entry of a full block (interleaved, row-major), its position
/// in the packed block and the factor that recovers it from a packed
/// block with doubled off-diagonal entries ([`Outer::Fourier`]): 1 on the
/// diagonal, 1/2 above it, -1/2 for the imaginary parts below it (the
/// conjugate), 0 for the diagonal's imaginary parts.
fn unpacking(cell: usize) -> Vec<(usize, f64)> {
    let mut pos = vec![0; cell * cell];
    let mut i = 0;
    for a in 0..cell {
        pos[a * cell + a] = i;
        i += 1;
        for b in a + 1..cell {
            pos[a * cell + b] = i;
            i += 2;
        }
    }
    let mut out = Vec::with_capacity(2 * cell * cell);
    for a in 0..cell {
        for b in 0..cell {
            out.extend(match a.cmp(&b) {
                std::cmp::Ordering::Equal => [(pos[a * cell + a], 1.0), (0, 0.0)],
                std::cmp::Ordering::Less => {
                    [(pos[a * cell + b], 0.5), (pos[a * cell + b] + 1, 0.5)]
                }
                std::cmp::Ordering::Greater => {
                    [(pos[b * cell + a], 0.5), (pos[b * cell + a] + 1, -0.5)]
                }
            });
        }
    }
    out
}

/// The full Hermitian block `x` (interleaved, row-major) of a packed one
/// `p` with doubled off-diagonal entries, by the map of [`unpacking`]
/// (exact: the factors are powers of two).
#[inline]
fn unpack_block(p: &[f64], map: &[(usize, f64)], x: &mut [f64]) {
    for (x, &(i, f)) in x.iter_mut().zip(map) {
        *x = f * p[i];
    }
}

/// ds += D M D - N for one q block: D and ds interleaved like the state,
/// M full (Hermitian), N's upper triangle, `t` scratch for D M. Real
/// arithmetic on (re, im) pairs; every sum runs along two rows (column b
/// of a Hermitian matrix is the conjugate of its row b). Only the upper
/// triangle of D M D is formed; the lower one is its conjugate and the
/// diagonal real, so the feedback is exactly Hermitian.
/// The cell is `C`, or `cell` when `C` is 0 (as in [`block_steps`]).
#[inline(always)]
fn block_products<const C: usize>(
    cell: usize,
    d: &[f64],
    ds: &mut [f64],
    m: &[f64],
    n: &[f64],
    t: &mut [f64],
) {
    let cell = if C == 0 { cell } else { C };
    let row = 2 * cell;
    for (da, ta) in d.chunks_exact(row).zip(t.chunks_exact_mut(row)) {
        for (mb, tab) in m.chunks_exact(row).zip(ta.chunks_exact_mut(2)) {
            (tab[0], tab[1]) = times_conj(da, mb);
        }
    }
    for a in 0..cell {
        let ta = &t[a * row..(a + 1) * row];
        for b in a..cell {
            let (re, im) = times_conj(ta, &d[b * row..(b + 1) * row]);
            let at = 2 * (a * cell + b);
            if a == b {
                ds[at] += re - n[at];
                continue;
            }
            let (vr, vi) = (re - n[at], im - n[at + 1]);
            (ds[at], ds[at + 1]) = (ds[at] + vr, ds[at + 1] + vi);
            let at = 2 * (b * cell + a);
            (ds[at], ds[at + 1]) = (ds[at] + vr, ds[at + 1] - vi);
        }
    }
}

/// sum_j x_j conj(y_j) of two interleaved complex rows.
#[inline(always)]
fn times_conj(x: &[f64], y: &[f64]) -> (f64, f64) {
    let (mut re, mut im) = (0.0, 0.0);
    for (x, y) in x.chunks_exact(2).zip(y.chunks_exact(2)) {
        re += x[0] * y[0] + x[1] * y[1];
        im += x[1] * y[0] - x[0] * y[1];
    }
    (re, im)
}
