//! The packed Hermitian blocks of the Fourier layout against plain complex
//! matrices (consistency checks of code paths; the blocks are arbitrary
//! numbers from a fixed-seed generator, no physics values).

use nalgebra::DMatrix;
use num_complex::Complex64;

use super::{block_outer, block_products, kinv_sandwich, pack_block, unpack_block, unpacking};

/// A fixed-seed linear congruential generator, numbers in [-1, 1].
struct Lcg(u64);

impl Lcg {
    fn next(&mut self) -> f64 {
        self.0 = self
            .0
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        ((self.0 >> 11) as f64 / (1u64 << 53) as f64) * 2.0 - 1.0
    }

    fn complex(&mut self) -> Complex64 {
        Complex64::new(self.next(), self.next())
    }
}

/// A random Hermitian cell x cell matrix.
fn hermitian(rng: &mut Lcg, cell: usize) -> DMatrix<Complex64> {
    let a = DMatrix::from_fn(cell, cell, |_, _| rng.complex());
    &a + a.adjoint()
}

/// Interleaved row-major form of a complex matrix (the state's layout).
fn interleave(m: &DMatrix<Complex64>) -> Vec<f64> {
    let c = m.nrows();
    (0..2 * c * c)
        .map(|i| {
            let z = m[(i / 2 / c, i / 2 % c)];
            if i % 2 == 0 {
                z.re
            } else {
                z.im
            }
        })
        .collect()
}

fn assert_close(a: &[f64], b: &[f64], tol: f64) {
    let scale = b.iter().fold(1.0f64, |m, x| m.max(x.abs()));
    for (x, y) in a.iter().zip(b) {
        assert!((x - y).abs() <= tol * scale, "{a:?}\n{b:?}");
    }
}

#[test]
fn pack_then_unpack_is_the_block() {
    let mut rng = Lcg(7);
    for cell in 1..5 {
        let h = interleave(&hermitian(&mut rng, cell));
        let mut packed = vec![0.0; cell * cell];
        pack_block(&h, cell, 1.0, 2.0, &mut packed);
        let mut back = vec![0.0; 2 * cell * cell];
        unpack_block(&packed, &unpacking(cell), &mut back);
        assert_eq!(back, h, "cell {cell}");
    }
}

#[test]
fn n_from_m_equals_the_sum_of_g_g_dagger() {
    // N = sum_c coef_c G_c G_c^H with G = K^-1 L against K^-1 M K^-1 with
    // M = sum_c coef_c L_c L_c^H (one q block, three channels).
    let mut rng = Lcg(11);
    for cell in 1..5 {
        let k = DMatrix::from_fn(cell, cell, |_, _| rng.next());
        let kinv = &k + k.transpose();
        let kinv_rows: Vec<f64> = (0..cell * cell)
            .map(|i| kinv[(i / cell, i % cell)])
            .collect();
        let (mut m, mut n) = (vec![0.0; cell * cell], vec![0.0; cell * cell]);
        for _ in 0..3 {
            let l: Vec<Complex64> = (0..cell).map(|_| rng.complex()).collect();
            let g: Vec<Complex64> = (0..cell)
                .map(|a| (0..cell).map(|b| l[b] * kinv[(a, b)]).sum())
                .collect();
            let coef = rng.next();
            let (mut ll, mut gg) = (vec![0.0; cell * cell], vec![0.0; cell * cell]);
            block_outer(&l, cell, &mut ll);
            block_outer(&g, cell, &mut gg);
            for i in 0..cell * cell {
                m[i] += coef * ll[i];
                n[i] += coef * gg[i];
            }
        }
        let map = unpacking(cell);
        let (mut m_full, mut n_sum) = (vec![0.0; 2 * cell * cell], vec![0.0; 2 * cell * cell]);
        unpack_block(&m, &map, &mut m_full);
        unpack_block(&n, &map, &mut n_sum);
        let (mut n_full, mut r) = (vec![0.0; 2 * cell * cell], vec![0.0; 2 * cell * cell]);
        kinv_sandwich::<0>(cell, &kinv_rows, &m_full, &mut n_full, &mut r);
        // The constant-cell copies (cells 1 and 2) give the same bits.
        let mut fixed = vec![0.0; 2 * cell * cell];
        match cell {
            1 => kinv_sandwich::<1>(cell, &kinv_rows, &m_full, &mut fixed, &mut r),
            2 => kinv_sandwich::<2>(cell, &kinv_rows, &m_full, &mut fixed, &mut r),
            _ => fixed.clone_from(&n_full),
        }
        for a in 0..cell {
            for b in a..cell {
                let i = 2 * (a * cell + b);
                assert_eq!(fixed[i..i + 2], n_full[i..i + 2]);
            }
        }
        // Only the upper triangle of n is formed.
        for a in 0..cell {
            for b in a..cell {
                let i = 2 * (a * cell + b);
                assert_close(&n_full[i..i + 2], &n_sum[i..i + 2], 1e-13);
            }
        }
    }
}

#[test]
fn block_products_equal_complex_matrix_products() {
    let mut rng = Lcg(13);
    for cell in 1..5 {
        let (d, m, n) = (
            hermitian(&mut rng, cell),
            hermitian(&mut rng, cell),
            hermitian(&mut rng, cell),
        );
        let start = interleave(&hermitian(&mut rng, cell));
        let mut ds = start.clone();
        let mut t = vec![0.0; 2 * cell * cell];
        let (di, mi, ni) = (interleave(&d), interleave(&m), interleave(&n));
        block_products::<0>(cell, &di, &mut ds, &mi, &ni, &mut t);
        // The constant-cell copies (cells 1 and 2) give the same bits.
        let mut fixed = start.clone();
        match cell {
            1 => block_products::<1>(cell, &di, &mut fixed, &mi, &ni, &mut t),
            2 => block_products::<2>(cell, &di, &mut fixed, &mi, &ni, &mut t),
            _ => fixed.clone_from(&ds),
        }
        assert_eq!(fixed, ds);
        let want = DMatrix::from_fn(cell, cell, |a, b| {
            let s = Complex64::new(start[2 * (a * cell + b)], start[2 * (a * cell + b) + 1]);
            s + (&d * &m * &d - &n)[(a, b)]
        });
        assert_close(&ds, &interleave(&want), 1e-13);
    }
}
