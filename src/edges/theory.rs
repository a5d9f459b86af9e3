//! The gapless theory left in a region once a set of terms is pinned
//! (docs/physics.md section 7), and its exact invariants.
//!
//! Region: a set of fields (all of them, or the wires of a window). With
//! pinned particle vectors n_p and the form <n, n'> = n^T K n':
//! 1. M = {n in Z^F : <n_p, n> = 0 for every pinned n_p touching the
//!    region}: the integer kernel of the rows l_p = K n_p restricted to the
//!    region (saturated, from the Smith normal form).
//! 2. S = M ∩ span_Q{n_p inside the region}: the saturation of the pinned
//!    vectors inside, in coordinates of M; its complement C in M.
//! 3. The residual lattice M / S has the basis C; its Gram matrix is the
//!    region's K matrix and t.n on C its charge vector.
//!
//! Without a window, S is exactly the radical of the form on M (derived:
//! M ⊗ Q = P^⊥, whose radical is P^⊥ ∩ P^⊥⊥ = span P, P being isotropic),
//! so the Gram matrix of C is non-degenerate. In a window, the pinned
//! terms that cross the window's inner edge enter step 1 only through
//! their parts inside it; should some combination of those parts be itself
//! null and commute with everything (an unclean cut), the Gram matrix of C
//! is degenerate and its radical is divided out as well; this is counted
//! and reported.
//!
//! Invariants: exact big-integer arithmetic throughout; every change of
//! basis is unimodular, so det, signature, filling and the quasiparticle
//! data do not depend on the readable basis chosen.

use num_bigint::BigInt;
use num_integer::Integer;
use num_traits::{One, Signed, ToPrimitive, Zero};

use crate::math::rational::Rational;
use crate::math::reduce::{reduce_form, ModuloLattice};
use crate::math::smith::{saturate, smith};
use crate::math::zmat::{self, dot, ZMat};

/// The residual lattice of a region, in a reduced basis.
#[derive(Debug, Clone)]
pub struct Residual {
    /// Basis of M / S: particle vectors over all fields (zero outside the
    /// region), each a short representative modulo the pinned lattice.
    pub generators: Vec<Vec<BigInt>>,
    /// Gram matrix of the generators: the region's K matrix.
    pub k: ZMat,
    /// t.n of each generator: the region's charge vector.
    pub charge: Vec<BigInt>,
    /// Rank of the pinned vectors inside the region.
    pub pinned_rank: usize,
    /// Extra null directions divided out at an unclean cut (0 normally).
    pub extra_radical: usize,
}

/// Compute the residual lattice of a region. `k` and `t` are those of all
/// fields; `constraints` are the lattice vectors l_p = K n_p of the pinned
/// translates touching the region and `inside` the particle vectors of those
/// lying inside it (all over all fields).
pub fn residual(
    k: &ZMat,
    t: &[BigInt],
    region: &[usize],
    constraints: &[Vec<BigInt>],
    inside: &[Vec<BigInt>],
) -> Result<Residual, String> {
    let f = region.len();
    let restrict = |v: &[BigInt]| -> Vec<BigInt> { region.iter().map(|&i| v[i].clone()).collect() };
    let k_f = ZMat::from_rows(
        &region
            .iter()
            .map(|&i| region.iter().map(|&j| k.at(i, j).clone()).collect())
            .collect::<Vec<_>>(),
        f,
    );
    let t_f = restrict(t);
    let c = ZMat::from_rows(
        &constraints.iter().map(|l| restrict(l)).collect::<Vec<_>>(),
        f,
    );
    let inside_f: Vec<Vec<BigInt>> = inside.iter().map(|n| restrict(n)).collect();
    // 1. M: kernel of the constraints, with coordinates from Q^-1.
    let sc = smith(&c);
    let rank_c = sc.rank();
    let m_basis = sc.q.col_range(rank_c..f);
    let to_m = sc.q_inv.row_range(rank_c..f);
    // 2. S: saturation of the pinned vectors inside, in coordinates of M.
    let (sat, comp) = saturation(&c, &to_m, &inside_f, m_basis.cols)?;
    let pinned_rank = sat.cols;
    let mut s_cols: Vec<Vec<BigInt>> = m_basis.mul(&sat).columns();
    // 3. Residual basis and its Gram matrix.
    let (basis, extra_radical) = divide_radical(m_basis.mul(&comp), &k_f, &mut s_cols)?;
    let modulo = pinned_modulo(f, inside_f, s_cols);
    let gens = readable(&basis, &k_f, &t_f, &modulo);
    let gram = ZMat::from_cols(f, &gens).gram(&k_f);
    let charge: Vec<BigInt> = gens.iter().map(|g| dot(&t_f, g)).collect();
    let n_all = k.rows;
    let generators = gens
        .into_iter()
        .map(|g| {
            let mut full = vec![BigInt::zero(); n_all];
            for (x, &i) in g.into_iter().zip(region) {
                full[i] = x;
            }
            full
        })
        .collect();
    Ok(Residual {
        generators,
        k: gram,
        charge,
        pinned_rank,
        extra_radical,
    })
}

/// The lattice generators are reduced modulo: the pinned vectors inside
/// (short: listed first, so that the independent subset used takes them
/// before the long saturation basis), then `s_cols`, a basis of S and of
/// the radical divided out. The vectors inside lie in S, so the rank is
/// `s_cols.len()` and the search for an independent subset stops there.
fn pinned_modulo(f: usize, inside_f: Vec<Vec<BigInt>>, s_cols: Vec<Vec<BigInt>>) -> ModuloLattice {
    let rank = s_cols.len();
    let mut cols = inside_f;
    cols.extend(s_cols);
    ModuloLattice::with_rank(&ZMat::from_cols(f, &cols), rank)
}

/// Step 2: the saturation S of the pinned vectors inside (restricted to the
/// region) in coordinates of M, and its complement C in M, as (S, C).
/// Fails when a vector inside violates a constraint.
fn saturation(
    c: &ZMat,
    to_m: &ZMat,
    inside: &[Vec<BigInt>],
    dim_m: usize,
) -> Result<(ZMat, ZMat), String> {
    let mut coords = Vec::with_capacity(inside.len());
    for nf in inside {
        if !c.mul_vec(nf).iter().all(|x| x.is_zero()) {
            return Err("a pinned vector does not commute with the pinned set".into());
        }
        coords.push(to_m.mul_vec(nf));
    }
    Ok(if coords.is_empty() {
        (ZMat::zeros(dim_m, 0), ZMat::identity(dim_m))
    } else {
        saturate(&ZMat::from_cols(dim_m, &coords))
    })
}

/// Step 3 at an unclean cut: when the Gram matrix of the basis is
/// degenerate, move its radical into S (`s_cols`) and keep the rest.
/// Returns the basis and the number of directions divided out.
fn divide_radical(
    basis: ZMat,
    k_f: &ZMat,
    s_cols: &mut Vec<Vec<BigInt>>,
) -> Result<(ZMat, usize), String> {
    let gram = basis.gram(k_f);
    if !zmat::det(&gram).is_zero() {
        return Ok((basis, 0));
    }
    let sg = smith(&gram);
    let r = sg.rank();
    s_cols.extend(basis.mul(&sg.q.col_range(r..gram.rows)).columns());
    let basis = basis.mul(&sg.q.col_range(0..r));
    if zmat::det(&basis.gram(k_f)).is_zero() {
        return Err("the residual form stays degenerate".into());
    }
    Ok((basis, gram.rows - r))
}

/// Readable generators of the residual lattice (restricted to the region):
/// short vectors modulo S first (the kernel and saturation bases can have
/// entries exponential in the number of wires), then the readable form,
/// then short representatives again, each with a positive charge (or, if
/// neutral, a positive first entry).
fn readable(basis: &ZMat, k_f: &ZMat, t_f: &[BigInt], modulo: &ModuloLattice) -> Vec<Vec<BigInt>> {
    let f = basis.rows;
    let basis = basis.mul(&modulo.shorten(basis));
    let short: Vec<Vec<BigInt>> = basis.columns().iter().map(|g| modulo.reduce(g)).collect();
    let basis = ZMat::from_cols(f, &short);
    let u = reduce_form(&basis.gram(k_f));
    let basis = basis.mul(&u);
    let mut gens: Vec<Vec<BigInt>> = basis.columns().iter().map(|g| modulo.reduce(g)).collect();
    for g in gens.iter_mut() {
        let q = dot(t_f, g);
        let first_negative = g
            .iter()
            .find(|x| !x.is_zero())
            .is_some_and(|x| x.is_negative());
        if q.is_negative() || (q.is_zero() && first_negative) {
            for x in g.iter_mut() {
                *x = -std::mem::take(x);
            }
        }
    }
    gens
}

/// One quasiparticle type: a coset l + K Z^d of the dual lattice.
#[derive(Debug, Clone, PartialEq)]
pub struct Quasiparticle {
    /// A short representative l (in the basis of the generators).
    pub l: Vec<BigInt>,
    /// Charge t^T K^-1 l of the representative.
    pub charge: Rational,
    /// Spin (1/2) l^T K^-1 l of the representative.
    pub spin: Rational,
    /// Charge modulo 1 (adding a local particle changes it by an integer).
    pub charge_mod: Rational,
    /// Spin modulo 1 (even K) or 1/2 (odd K).
    pub spin_mod: Rational,
}

/// Exact invariants of a K matrix with charge vector t.
#[derive(Debug, Clone)]
pub struct Invariants {
    /// det K (1 for the empty matrix).
    pub det: BigInt,
    /// (n+, n-).
    pub signature: (usize, usize),
    /// t^T K^-1 t.
    pub filling: Rational,
    /// Invariant factors > 1 of K (the quasiparticle group ⊕ Z/d_i).
    pub group: Vec<BigInt>,
    /// Every type when there are at most [`MAX_TYPES`], else one per
    /// generator of the group.
    pub quasiparticles: Vec<Quasiparticle>,
    /// All |det K| types are listed.
    pub all_types: bool,
    /// Some diagonal entry of K is odd (fermionic): spins are defined mod 1/2.
    pub odd: bool,
}

/// Types listed in full up to this number.
pub const MAX_TYPES: usize = 64;

/// Compute the invariants of a non-degenerate K with charge vector t.
pub fn invariants(k: &ZMat, t: &[BigInt]) -> Invariants {
    let d = k.rows;
    let det = zmat::det(k);
    let (pos, neg, _) = zmat::inertia(k);
    let s = smith(k);
    let kinv_t = s.solve(t).unwrap_or_default();
    let filling = kinv_t.iter().zip(t).fold(Rational::zero(), |acc, (a, b)| {
        acc + a * Rational::from_integer(b.clone())
    });
    let odd = (0..d).any(|i| k.at(i, i).is_odd());
    let mut group = Vec::new();
    let mut gens = Vec::new();
    for (i, di) in s.diag.iter().enumerate() {
        if !di.is_one() {
            group.push(di.clone());
            gens.push(s.p_inv.col(i));
        }
    }
    let count = det.abs().to_usize().unwrap_or(usize::MAX);
    let all_types = count <= MAX_TYPES;
    let types = Types {
        modulo: (d > 0).then(|| ModuloLattice::new(k)),
        smith: &s,
        kinv_t: &kinv_t,
        odd,
    };
    let reps = if all_types {
        every_coset(&group, &gens, d)
    } else {
        std::iter::once(vec![BigInt::zero(); d])
            .chain(gens)
            .collect()
    };
    let mut quasiparticles: Vec<Quasiparticle> = reps.into_iter().map(|l| types.make(l)).collect();
    // The trivial type first, then by charge and spin modulo their periods.
    let nontrivial = |q: &Quasiparticle| q.l.iter().any(|x| !x.is_zero());
    quasiparticles.sort_by(|x, y| {
        (nontrivial(x), &x.charge_mod, &x.spin_mod, &x.l).cmp(&(
            nontrivial(y),
            &y.charge_mod,
            &y.spin_mod,
            &y.l,
        ))
    });
    Invariants {
        det,
        signature: (pos, neg),
        filling,
        group,
        quasiparticles,
        all_types,
        odd,
    }
}

/// Representatives of every coset of the quasiparticle group: sum a_i g_i
/// with 0 <= a_i < d_i, the first index running fastest.
fn every_coset(group: &[BigInt], gens: &[Vec<BigInt>], d: usize) -> Vec<Vec<BigInt>> {
    let mut out = Vec::new();
    let mut a = vec![BigInt::zero(); group.len()];
    loop {
        let mut l = vec![BigInt::zero(); d];
        for (ai, g) in a.iter().zip(gens) {
            for (x, y) in l.iter_mut().zip(g) {
                *x += ai * y;
            }
        }
        out.push(l);
        let mut i = 0;
        while i < a.len() {
            a[i] += 1;
            if a[i] < group[i] {
                break;
            }
            a[i] = BigInt::zero();
            i += 1;
        }
        if i == a.len() {
            return out;
        }
    }
}

/// What is needed to describe one quasiparticle type of K.
struct Types<'a> {
    /// Short representatives modulo K Z^d (None for the empty K).
    modulo: Option<ModuloLattice>,
    /// The Smith form of K (solves K x = l exactly).
    smith: &'a crate::math::smith::Smith,
    /// K^-1 t.
    kinv_t: &'a [Rational],
    /// Some diagonal entry of K is odd.
    odd: bool,
}

impl Types<'_> {
    /// The type of l: a short representative, its charge and spin, and
    /// both modulo their ambiguity.
    fn make(&self, l: Vec<BigInt>) -> Quasiparticle {
        let l = self.modulo.as_ref().map_or(l.clone(), |m| m.reduce(&l));
        let kinv_l = self.smith.solve(&l).unwrap_or_default();
        let lr: Vec<Rational> = l
            .iter()
            .map(|x| Rational::from_integer(x.clone()))
            .collect();
        let charge = self
            .kinv_t
            .iter()
            .zip(&lr)
            .fold(Rational::zero(), |a, (x, y)| a + x * y);
        let spin = kinv_l
            .iter()
            .zip(&lr)
            .fold(Rational::zero(), |a, (x, y)| a + x * y)
            / Rational::from_integer(BigInt::from(2));
        let period = if self.odd {
            Rational::new(BigInt::one(), BigInt::from(2))
        } else {
            Rational::one()
        };
        Quasiparticle {
            charge_mod: modulo_rational(&charge, &Rational::one()),
            spin_mod: modulo_rational(&spin, &period),
            l,
            charge,
            spin,
        }
    }
}

/// x modulo p, in [0, p).
fn modulo_rational(x: &Rational, p: &Rational) -> Rational {
    let q = (x / p).floor();
    x - q * p
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::math::zmat::big;

    fn q(p: i64, r: i64) -> Rational {
        Rational::new(BigInt::from(p), BigInt::from(r))
    }

    #[test]
    fn laughlin_third_invariants() {
        // K = (3), t = (1): filling 1/3, three types with charges 0, 1/3,
        // 2/3 and spins l^2/6 [Wen, Adv. Phys. 44, 405 (1995), from memory]:
        // 0, 1/6, 2/3 = 1/6 mod 1/2 (K odd: spins are defined mod 1/2).
        let inv = invariants(&ZMat::from_i64(&[vec![3]], 1), &big(&[1]));
        assert_eq!(inv.det, BigInt::from(3));
        assert_eq!(inv.filling, q(1, 3));
        assert_eq!(inv.signature, (1, 0));
        assert!(inv.odd && inv.all_types);
        let cm: Vec<Rational> = inv
            .quasiparticles
            .iter()
            .map(|x| x.charge_mod.clone())
            .collect();
        assert_eq!(cm, vec![q(0, 1), q(1, 3), q(2, 3)]);
        let sm: Vec<Rational> = inv
            .quasiparticles
            .iter()
            .map(|x| x.spin_mod.clone())
            .collect();
        assert_eq!(sm, vec![q(0, 1), q(1, 6), q(1, 6)]);
    }

    #[test]
    fn halperin_331_group() {
        // (331): det 8, filling 1/2 for t = (1,1) [Wen (1995), from memory];
        // K = [[3,1],[1,3]] has Smith form diag(1, 8) (derived: gcd of the
        // entries is 1, det 8), so the group is Z_8.
        let inv = invariants(&ZMat::from_i64(&[vec![3, 1], vec![1, 3]], 2), &big(&[1, 1]));
        assert_eq!(inv.det, BigInt::from(8));
        assert_eq!(inv.filling, q(1, 2));
        assert_eq!(inv.group, vec![BigInt::from(8)]);
        assert_eq!(inv.quasiparticles.len(), 8);
    }

    #[test]
    fn one_wire_pinned_by_backscattering() {
        // One spinless wire, K = diag(1,-1), pinned by n = (1,-1): r = 1 and
        // nothing is left (derived: l = K n = (1, 1), so M = {n' : n'_R +
        // n'_L = 0} = span n = S and M / S = 0).
        let k = ZMat::from_i64(&[vec![1, 0], vec![0, -1]], 2);
        let r = residual(
            &k,
            &big(&[1, 1]),
            &[0, 1],
            &[big(&[1, 1])],
            &[big(&[1, -1])],
        )
        .unwrap();
        assert_eq!(r.pinned_rank, 1);
        assert_eq!(r.k.rows, 0);
    }
}
