//! Exact data that does not depend on V: filling, det K, signature (exact,
//! from the inertia of K: [`crate::math::zmat::signature`]), and for
//! every term its particle content, charge, conformal spin, locality, null
//! status and mutual phases with the other terms.
//!
//! Formulas [Wen, Adv. Phys. 44, 405 (1995); Haldane, PRL 74, 2090 (1995)]:
//! nu = t^T K^-1 t; for O_l = exp(i l.phi), m = K^-1 l, Q = t.m,
//! s = (1/2) l.m (+ a fixed extra spin), mutual phase l_a^T K^-1 l_b = m_a.l_b;
//! O_l is local iff m is integral; a cosine can pin alone only if s = 0.
//!
//! Arrays: K is block diagonal, so m is computed wire by wire with the cell
//! inverse and mutual phases are sums over shared wires. Two families
//! commute when every pair of their translates does.
//!
//! Infinite arrays are computed on their periodic stand-in ring
//! ([`Lattice::stand_in`], exactly equivalent for every per-term and
//! pairwise quantity); the totals det K, signature and filling, which grow
//! with the number of wires, are then given per wire.

use num_bigint::BigInt;
use num_traits::Zero;

use crate::core::lattice::{Family, Lattice, Translate};
use crate::error::InputError;
use crate::math::rational::{self, Rational};
use crate::math::{bareiss, zmat};
use crate::model::Model;

/// Exact data of one term family (computed on its representative translate;
/// charge, spin and locality are the same for every translate).
#[derive(Debug, Clone)]
pub struct TermInvariants {
    /// Particle content m = K^-1 l of the representative (dense).
    pub particles: Vec<Rational>,
    /// Charge Q = t.m.
    pub charge: Rational,
    /// Conformal spin (1/2) l.m plus the term's extra spin.
    pub spin: Rational,
    /// m integral.
    pub local: bool,
    /// Spin zero.
    pub null: bool,
    /// Q equals the charge the term is allowed to carry.
    pub charge_ok: bool,
    /// The term commutes with all of its own translates.
    pub self_commuting: bool,
}

/// Exact data of a whole model.
#[derive(Debug, Clone)]
pub struct Invariants {
    /// det K of all fields (infinite arrays: of one wire).
    pub det_k: BigInt,
    /// Signature (n+, n-) (infinite arrays: of one wire).
    pub signature: (usize, usize),
    /// Filling t^T K^-1 t (infinite arrays: per wire).
    pub filling: Rational,
    /// det K_c of one wire's cell (explicit models: of K).
    pub cell_det: BigInt,
    /// Filling t_c^T K_c^-1 t_c of one wire.
    pub cell_filling: Rational,
    /// Cell K^-1.
    pub cell_inverse: Vec<Vec<Rational>>,
    /// One entry per term.
    pub terms: Vec<TermInvariants>,
    /// Mutual phase of term a's representative with term b's translate at
    /// the same anchor.
    pub commutation: Vec<Vec<Rational>>,
    /// Every translate of a commutes with every translate of b.
    pub commutes: Vec<Vec<bool>>,
    /// Integer form for fast commutation tests.
    pub pairing: Pairing,
}

/// det(K_c) l^T K^-1 l' in integer arithmetic, wire by wire with the cell
/// adjugate adj(K_c) = det(K_c) K_c^-1: zero exactly when l and l' commute.
/// The flow's plan tests thousands of pairs; this avoids big rationals.
#[derive(Debug, Clone)]
pub struct Pairing {
    cell: usize,
    adj: Vec<Vec<i128>>,
}

impl Pairing {
    /// From the cell determinant and inverse (entries of adj are integers;
    /// `None` if one does not fit in i128).
    pub fn new(cell_det: &BigInt, cell_inverse: &[Vec<Rational>]) -> Option<Pairing> {
        let det = Rational::from_integer(cell_det.clone());
        let adj = cell_inverse
            .iter()
            .map(|row| {
                row.iter()
                    .map(|r| {
                        let x = r * &det;
                        num_traits::ToPrimitive::to_i128(x.numer()).filter(|_| x.is_integer())
                    })
                    .collect::<Option<Vec<i128>>>()
            })
            .collect::<Option<Vec<_>>>()?;
        Some(Pairing {
            cell: cell_inverse.len(),
            adj,
        })
    }

    /// det(K_c) l^T K^-1 l' (saturating on overflow, which needs entries far
    /// beyond those a model may hold).
    pub fn scaled(&self, l: &[i64], lp: &[i64]) -> i128 {
        let c = self.cell;
        let mut acc: i128 = 0;
        for (a, b) in l.chunks_exact(c).zip(lp.chunks_exact(c)) {
            if a.iter().all(|x| *x == 0) || b.iter().all(|x| *x == 0) {
                continue;
            }
            for (i, &x) in a.iter().enumerate().filter(|(_, x)| **x != 0) {
                for (j, &y) in b.iter().enumerate().filter(|(_, y)| **y != 0) {
                    let t = self.adj[i][j]
                        .saturating_mul(x as i128)
                        .saturating_mul(y as i128);
                    acc = acc.saturating_add(t);
                }
            }
        }
        acc
    }

    /// [`Pairing::scaled`] of two translates given by their parts (wire,
    /// vector over the cell), without dense vectors.
    pub fn scaled_parts(&self, a: &[(usize, Vec<i64>)], b: &[(usize, Vec<i64>)]) -> i128 {
        let mut acc: i128 = 0;
        for (wa, la) in a {
            for (_, lb) in b.iter().filter(|(wb, _)| wb == wa) {
                acc = acc.saturating_add(self.scaled(la, lb));
            }
        }
        acc
    }

    /// Fields per cell.
    pub fn cell(&self) -> usize {
        self.cell
    }

    /// det(K_c) (K_c^-1)_{ij}, the pairing of two fields i, j of one cell.
    pub fn entry(&self, i: usize, j: usize) -> i128 {
        self.adj[i][j]
    }

    /// l and l' commute (l^T K^-1 l' = 0).
    pub fn commute(&self, l: &[i64], lp: &[i64]) -> bool {
        self.scaled(l, lp) == 0
    }
}

impl Invariants {
    /// Compute the exact data; fails when K is singular.
    pub fn compute(model: &Model, lat: &Lattice) -> Result<Invariants, InputError> {
        let cell = CellData::of(model)?;
        let CellData {
            det: cell_det,
            inverse: cell_inverse,
            signature: cell_sig,
            pairing,
        } = cell;
        // Totals scale with the wires; an infinite array reports one wire.
        let copies = if lat.infinite { 1 } else { lat.wires };
        let det_k = num_traits::pow(cell_det.clone(), copies);
        let signature = (cell_sig.0 * copies, cell_sig.1 * copies);
        let t_cell = &model.cell_charge;
        let cell_filling = rational::dot_int(&rational::solve_with(&cell_inverse, t_cell), t_cell);
        let filling = &cell_filling * rational::int(copies as i64);
        // Only the representative's particle content is needed densely;
        // commutation goes through the integer pairing, part by part.
        let reps: Vec<Vec<Rational>> = lat
            .families
            .iter()
            .map(|f| particles_of(lat, &cell_inverse, f.rep()))
            .collect();
        let terms = model
            .terms
            .iter()
            .zip(&lat.families)
            .zip(&reps)
            .map(|((spec, fam), m)| term_invariants(lat, &pairing, spec, fam, m))
            .collect();
        let (commutation, commutes) = pair_tables(lat, &pairing, &reps);
        Ok(Invariants {
            pairing,
            det_k,
            signature,
            filling,
            cell_det,
            cell_filling,
            cell_inverse,
            terms,
            commutation,
            commutes,
        })
    }
}

/// The exact data of one wire's cell (explicit models: of K).
struct CellData {
    det: BigInt,
    inverse: Vec<Vec<Rational>>,
    signature: (usize, usize),
    pairing: Pairing,
}

impl CellData {
    /// det, inverse, signature and integer pairing of the cell K; errors
    /// name `fields.K` or `array.K`.
    fn of(model: &Model) -> Result<CellData, InputError> {
        let key = match model.structure {
            crate::model::Structure::Explicit => "fields.K",
            crate::model::Structure::Array { .. } => "array.K",
        };
        let err = |msg: &str| InputError::new(&model.file, key, msg);
        let (det, inverse) = bareiss::det_and_inverse(&model.cell_k)
            .ok_or_else(|| err("K is singular (det K = 0); K must be invertible"))?;
        let signature = zmat::signature(&model.cell_k)
            .ok_or_else(|| err("cannot determine the signature of K reliably"))?;
        let pairing = Pairing::new(&det, &inverse)
            .ok_or_else(|| err("K^-1 has entries too large for the commutation tests"))?;
        Ok(CellData {
            det,
            inverse,
            signature,
            pairing,
        })
    }
}

/// The mutual phases at the same anchor and the commutation of every
/// pair of families.
type PairTables = (Vec<Vec<Rational>>, Vec<Vec<bool>>);

fn pair_tables(lat: &Lattice, pairing: &Pairing, reps: &[Vec<Rational>]) -> PairTables {
    let nf = lat.families.len();
    let mut commutation = vec![vec![Rational::zero(); nf]; nf];
    let mut commutes = vec![vec![true; nf]; nf];
    for a in 0..nf {
        for b in 0..nf {
            let fa = &lat.families[a];
            commutation[a][b] = same_anchor_phase(&reps[a], fa.rep(), &lat.families[b]);
            commutes[a][b] = families_commute(lat, pairing, fa, &lat.families[b]);
        }
    }
    (commutation, commutes)
}

/// m = K^-1 l of a translate, dense, computed wire by wire.
pub fn particles_of(lat: &Lattice, cell_inverse: &[Vec<Rational>], t: &Translate) -> Vec<Rational> {
    let mut m = vec![Rational::zero(); lat.n];
    for w in 0..lat.wires {
        let slice = &t.l[w * lat.cell..(w + 1) * lat.cell];
        if slice.iter().all(|x| *x == 0) {
            continue;
        }
        for (c, r) in rational::solve_with(cell_inverse, slice)
            .into_iter()
            .enumerate()
        {
            m[w * lat.cell + c] = r;
        }
    }
    m
}

fn term_invariants(
    lat: &Lattice,
    pairing: &Pairing,
    spec: &crate::model::TermSpec,
    fam: &Family,
    m: &[Rational],
) -> TermInvariants {
    let l = &fam.rep().l;
    let charge = rational::dot_int(m, &lat.charge);
    let spin = rational::dot_int(m, l) / rational::int(2) + &spec.extra_spin;
    TermInvariants {
        local: rational::is_integral(m),
        null: spin.is_zero(),
        charge_ok: charge == spec.allowed_charge,
        self_commuting: families_commute(lat, pairing, fam, fam),
        particles: m.to_vec(),
        charge,
        spin,
    }
}

fn same_anchor_phase(m_a: &[Rational], ta: &Translate, fb: &Family) -> Rational {
    let tb = fb
        .translates
        .iter()
        .find(|t| t.anchor == ta.anchor)
        .unwrap_or_else(|| fb.rep());
    rational::dot_int(m_a, &tb.l)
}

/// Every translate of `fa` commutes with every translate of `fb`.
///
/// The pairing of two translates depends only on their relative offset
/// (translation invariance: on a ring modulo W, on an open array for the
/// pairs that exist), so one pair per offset is tested: on a ring the
/// representative of `fa` against every translate of `fb`; on an open
/// array, whose anchors are consecutive, one pair for each offset between
/// the two anchor ranges. Cost O(W) pairs instead of O(W^2).
pub fn families_commute(lat: &Lattice, pairing: &Pairing, fa: &Family, fb: &Family) -> bool {
    let pair = |ta: &Translate, tb: &Translate| pairing.scaled_parts(&ta.parts, &tb.parts) == 0;
    if lat.boundary == Some(crate::model::Boundary::Periodic) {
        return fb.translates.iter().all(|tb| pair(fa.rep(), tb));
    }
    let (Some(ra), Some(rb)) = (anchor_range(fa), anchor_range(fb)) else {
        return fa
            .translates
            .iter()
            .all(|ta| fb.translates.iter().all(|tb| pair(ta, tb)));
    };
    let (a0, a1) = (ra.0 as i64, ra.1 as i64);
    let (b0, b1) = (rb.0 as i64, rb.1 as i64);
    (b0 - a1..=b1 - a0).all(|d| {
        // The smallest anchor i of fa with i + d an anchor of fb.
        let i = a0.max(b0 - d);
        let (ta, tb) = (
            &fa.translates[(i - a0) as usize],
            &fb.translates[(i + d - b0) as usize],
        );
        pair(ta, tb)
    })
}

/// First and last anchor of a family whose anchors are consecutive.
fn anchor_range(f: &Family) -> Option<(usize, usize)> {
    let first = f.translates.first()?.anchor;
    let consecutive = f
        .translates
        .iter()
        .enumerate()
        .all(|(k, t)| t.anchor == first + k);
    consecutive.then(|| (first, first + f.translates.len() - 1))
}
