//! Products of symmetric banded matrices: R = A M A with A of half-
//! bandwidth `b` and M of half-bandwidth `bm`, in n (2b+1)(2bm+1) +
//! n (2b+2bm+1)(b+1) operations instead of 2 n^3, and the half-bandwidth
//! of a matrix above a threshold.
//!
//! Storage: dense n x n row-major slices; only the entries inside the bands
//! are read (entries of A farther than `b` from the diagonal count as zero,
//! whatever they hold) and only the entries of R within `2b + bm` of the
//! diagonal are written. Invariants: R is exactly symmetric (the upper
//! triangle is formed and mirrored); no allocation; the loops run in a
//! fixed order, so the result is the same bits on every call and thread.
//! With `b = bm = n - 1` this is the plain (dense) product.

/// max |a_ij| of an n x n matrix.
pub fn max_abs(a: &[f64]) -> f64 {
    a.iter().fold(0.0f64, |m, x| m.max(x.abs()))
}

/// The half-bandwidth of an n x n row-major matrix above `thr`: the
/// largest |i - j| with |a_ij| > thr (0 for a diagonal or zero matrix).
/// Scans from the far ends of every row toward the diagonal, stopping at
/// the band found so far.
pub fn bandwidth(a: &[f64], n: usize, thr: f64) -> usize {
    let mut b = 0;
    for i in 0..n {
        let row = &a[i * n..(i + 1) * n];
        if i > b {
            if let Some(j) = row[..i - b].iter().position(|x| x.abs() > thr) {
                b = i - j;
            }
        }
        if i + b + 1 < n {
            if let Some(j) = row[i + b + 1..].iter().rposition(|x| x.abs() > thr) {
                b += j + 1;
            }
        }
    }
    b
}

/// The half-bandwidth above `thr` of a symmetric n x n matrix given as its
/// packed upper triangle (row i holds columns i..n): the largest j - i with
/// |a_ij| > thr. Scans each row from its far end down to the band found so
/// far.
pub fn packed_bandwidth(a: &[f64], n: usize, thr: f64) -> usize {
    let (mut b, mut p) = (0, 0);
    for i in 0..n {
        let row = &a[p..p + n - i];
        p += n - i;
        if b + 1 < row.len() {
            if let Some(j) = row[b + 1..].iter().rposition(|x| x.abs() > thr) {
                b += j + 1;
            }
        }
    }
    b
}

/// Write the entries within `b` of the diagonal of the symmetric matrix
/// whose packed upper triangle is `a` (as in [`packed_bandwidth`]) into the
/// n x n row-major `out`, both triangles; the entries farther out are left
/// as they were ([`sym_triple`] does not read them).
pub fn unpack_band(n: usize, a: &[f64], b: usize, out: &mut [f64]) {
    let mut p = 0;
    for i in 0..n {
        let row = &a[p..p + (b + 1).min(n - i)];
        p += n - i;
        out[i * n + i..i * n + i + row.len()].copy_from_slice(row);
        for (k, &x) in row.iter().enumerate().skip(1) {
            out[(i + k) * n + i] = x;
        }
    }
}

/// Range of indices within `w` of `i` in 0..n.
#[inline]
fn around(i: usize, w: usize, n: usize) -> std::ops::Range<usize> {
    i.saturating_sub(w)..(i + w + 1).min(n)
}

/// Multiply-adds of [`sym_triple`] for these bands (to choose a route).
pub fn triple_cost(n: usize, b: usize, bm: usize) -> f64 {
    // Pairs (i, k) with |i - k| <= w inside an n x n matrix.
    let pairs = |w: usize| {
        let w = w.min(n.saturating_sub(1)) as f64;
        let nf = n as f64;
        nf * (2.0 * w + 1.0) - w * (w + 1.0)
    };
    let (bf, bmf) = (b.min(n) as f64, bm.min(n) as f64);
    pairs(b) * (2.0 * bmf + 1.0).min(n as f64) + pairs(b + bm) * (bf + 1.0)
}

/// R = A M A (see the module docs): `t` is scratch (n x n), `r` receives
/// the entries within `2b + bm` of the diagonal, both triangles.
pub fn sym_triple(
    n: usize,
    a: &[f64],
    b: usize,
    m: &[f64],
    bm: usize,
    t: &mut [f64],
    r: &mut [f64],
) {
    let wt = b + bm;
    // T = A M: row i of T lives within b + bm of the diagonal.
    for i in 0..n {
        let ti = around(i, wt, n);
        let (t0, trow) = (ti.start, &mut t[i * n + ti.start..i * n + ti.end]);
        trow.fill(0.0);
        for k in around(i, b, n) {
            let aik = a[i * n + k];
            let mk = around(k, bm, n);
            let (lo, hi) = (mk.start - t0, mk.end - t0);
            let mrow = &m[k * n + mk.start..k * n + mk.end];
            for (x, y) in trow[lo..hi].iter_mut().zip(mrow) {
                *x += aik * y;
            }
        }
    }
    // R = T A, upper triangle j >= i, then mirrored.
    let wr = 2 * b + bm;
    for i in 0..n {
        let rj = i..(i + wr + 1).min(n);
        let rrow = &mut r[i * n + rj.start..i * n + rj.end];
        rrow.fill(0.0);
        for k in around(i, wt, n) {
            let tik = t[i * n + k];
            let aj = around(k, b, n);
            let lo = aj.start.max(i);
            if lo >= aj.end {
                continue;
            }
            let arow = &a[k * n + lo..k * n + aj.end];
            for (x, y) in rrow[lo - i..aj.end - i].iter_mut().zip(arow) {
                *x += tik * y;
            }
        }
    }
    for i in 0..n {
        for j in i + 1..(i + wr + 1).min(n) {
            r[j * n + i] = r[i * n + j];
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A symmetric n x n matrix with half-bandwidth `w` (deterministic
    /// invented entries).
    fn banded(n: usize, w: usize, seed: u64) -> Vec<f64> {
        let mut a = vec![0.0; n * n];
        let mut s = seed;
        for i in 0..n {
            for j in i..(i + w + 1).min(n) {
                s = s
                    .wrapping_mul(6364136223846793005)
                    .wrapping_add(1442695040888963407);
                let x = (s >> 11) as f64 / (1u64 << 53) as f64 - 0.5;
                a[i * n + j] = x;
                a[j * n + i] = x;
            }
        }
        a
    }

    fn naive(n: usize, a: &[f64], m: &[f64]) -> Vec<f64> {
        let mul = |x: &[f64], y: &[f64]| {
            let mut z = vec![0.0; n * n];
            for i in 0..n {
                for k in 0..n {
                    for j in 0..n {
                        z[i * n + j] += x[i * n + k] * y[k * n + j];
                    }
                }
            }
            z
        };
        mul(&mul(a, m), a)
    }

    #[test]
    fn bandwidth_finds_the_farthest_entry() {
        let n = 9;
        let mut a = banded(n, 2, 1);
        assert_eq!(bandwidth(&a, n, 0.0), 2);
        a[8 * n + 3] = 1e-3;
        assert_eq!(bandwidth(&a, n, 0.0), 5);
        assert_eq!(bandwidth(&a, n, 0.01), 2);
        a[n + 7] = 0.5;
        assert_eq!(bandwidth(&a, n, 0.01), 6);
        assert_eq!(bandwidth(&vec![0.0; n * n], n, 0.0), 0);
    }

    /// Consistency with the plain triple product on banded inputs (exact
    /// bands, so no truncation: equal to rounding), including bands wider
    /// than the matrix.
    #[test]
    fn triple_equals_the_dense_product() {
        for &(n, b, bm) in &[(12, 2, 1), (12, 0, 3), (7, 6, 6), (10, 3, 20), (1, 0, 0)] {
            let (a, m) = (banded(n, b, 3), banded(n, bm, 4));
            let want = naive(n, &a, &m);
            let (mut t, mut r) = (vec![0.0; n * n], vec![f64::NAN; n * n]);
            sym_triple(n, &a, b, &m, bm, &mut t, &mut r);
            let w = 2 * b + bm;
            for i in 0..n {
                for j in 0..n {
                    let (got, x) = (r[i * n + j], want[i * n + j]);
                    if i.abs_diff(j) <= w {
                        assert!((got - x).abs() < 1e-14, "{n} {b} {bm}: ({i},{j}) {got} {x}");
                        assert_eq!(got, r[j * n + i]);
                    } else {
                        assert_eq!(x, 0.0);
                    }
                }
            }
        }
    }

    /// Entries of A outside the band are ignored (the truncation).
    #[test]
    fn entries_outside_the_band_are_ignored() {
        let n = 8;
        let (a, m) = (banded(n, 1, 5), banded(n, 1, 6));
        let mut wide = a.clone();
        wide[7] = 9.0;
        wide[7 * n] = 9.0;
        let (mut t, mut r1, mut r2) = (vec![0.0; n * n], vec![0.0; n * n], vec![0.0; n * n]);
        sym_triple(n, &a, 1, &m, 1, &mut t, &mut r1);
        sym_triple(n, &wide, 1, &m, 1, &mut t, &mut r2);
        assert_eq!(r1, r2);
    }

    #[test]
    fn cost_is_the_dense_count_for_full_bands() {
        let n = 10;
        let full = triple_cost(n, n - 1, n - 1);
        assert_eq!(full, (n * n * n + n * n * n) as f64);
        assert!(triple_cost(100, 3, 2) < 100.0 * 7.0 * 5.0 + 100.0 * 11.0 * 4.0 + 1.0);
    }
}
