//! The infinite array per wire: how many right-left pairs a pinned set gaps
//! per wire in the thermodynamic limit, exactly and independently of the
//! periodic stand-in ring on which the terms were placed.
//!
//! A pinned family whose translate at wire 0 has the particle vectors n_j
//! on wire j (j = 0..=D, cell vectors of length n_c) defines the vector of
//! polynomials N(z) = Σ_j n_j z^j in Z[z]^{n_c} (a Laurent polynomial in
//! general; anchoring the family at its first wire makes it a polynomial).
//! A ring of W wires diagonalises under translation: the pinned vectors of
//! the family at momentum q are N(z) with z = e^{iq}, z^W = 1, so the rank
//! of all pinned vectors on the ring is Σ_{z^W = 1} rank M(z), with M(z)
//! the n_c x P matrix whose columns are the N_p(z) of the P pinned
//! families. Per wire, as W grows, this is the rank ρ of M over the field
//! Q(z): rank M(z0) = ρ for every z0 except the finitely many roots common
//! to all ρ x ρ minors, so the exceptions change the ring's count by an
//! amount bounded independently of W and vanish per wire. (That is how the
//! ring's count depends on its size: pinning n_0 = (1, -1), n_2 = (-1, 1)
//! gives N(z) = (1, -1)(1 - z^2), which vanishes at z = ±1, so a ring of W
//! wires keeps gcd(2, W) modes, while ρ = 1.)
//!
//! Exact rank over Q(z), with a certificate. Every entry of M has degree at
//! most D, so every ρ' x ρ' minor is a polynomial of degree at most ρ' D.
//! Let ρ be the rank over Q(z) and ρ_max = min(n_c, P) ≥ ρ. (i) Every
//! minor larger than ρ vanishes identically, so rank M(z0) ≤ ρ at every
//! z0. (ii) Some ρ x ρ minor m(z) is a non-zero polynomial of degree at most
//! ρ D ≤ B := ρ_max D, so it has at most B roots, and among any B + 1
//! distinct points at least one z0 has m(z0) ≠ 0, where rank M(z0) ≥ ρ.
//! Hence ρ is the largest rank M(z0) over B + 1 distinct integers z0
//! (exact fraction-free elimination, [`crate::math::bareiss::rank`]); the
//! search stops early when it reaches ρ_max, which no point can exceed.
//! The points used are z0 = 2, 3, ..., B + 2 (any distinct values would do).
//!
//! Gapless modes per wire. The pinned families commute with all translates
//! of each other, i.e. every coefficient of N_p(1/z)^T K_c N_p'(z)
//! vanishes, so on |z| = 1 the columns of M(z) span an isotropic subspace of
//! the Hermitian form K_c (constant in q: the cell's K). Where that span
//! has dimension ρ, its K_c-orthogonal complement modulo itself is
//! non-degenerate with signature (n+ − ρ, n− − ρ), (n+, n−) the cell's.
//! So ρ ≤ min(n+, n−) ≤ n_c / 2, the bulk is fully gapped iff 2 ρ = n_c,
//! and the n_c − 2ρ gapless modes per wire have that signature. Their K
//! matrix is not computed: on any ring it is the Gram matrix of a lattice
//! whose generators can spread over every wire, and its entries and det
//! depend on the ring's size (the stand-in ring's would be an artefact).
//! The ranks at z = 1 (q = 0) and z = -1 (q = π) are reported too: a drop
//! there leaves extra modes at that one momentum (on a ring, modes spread
//! over every wire), which do not count per wire.

use num_bigint::BigInt;
use num_traits::Zero;

use super::pins::Pinned;
use crate::core::lattice::Lattice;
use crate::math::bareiss;

/// The polynomial vector N(z) of one pinned family: `coeffs[j]` is its
/// particle vector on wire j of the translate anchored at its first wire.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Polynomial {
    /// Family name.
    pub name: String,
    /// Cell vectors n_0, ..., n_D.
    pub coeffs: Vec<Vec<BigInt>>,
}

impl Polynomial {
    /// Degree D (the widest wire offset).
    pub fn degree(&self) -> usize {
        self.coeffs.len().saturating_sub(1)
    }

    /// N(z0), exactly.
    pub fn at(&self, z: &BigInt) -> Vec<BigInt> {
        let cell = self.coeffs.first().map_or(0, |c| c.len());
        // Horner's rule from the highest power.
        let mut v = vec![BigInt::zero(); cell];
        for c in self.coeffs.iter().rev() {
            for (x, a) in v.iter_mut().zip(c) {
                *x = &*x * z + a;
            }
        }
        v
    }

    /// "(1, -1) + (-1, 1) z^2": the non-zero terms.
    pub fn describe(&self) -> String {
        let parts: Vec<String> = self
            .coeffs
            .iter()
            .enumerate()
            .filter(|(_, c)| c.iter().any(|x| !x.is_zero()))
            .map(|(j, c)| {
                let v = format!(
                    "({})",
                    c.iter()
                        .map(|x| x.to_string())
                        .collect::<Vec<_>>()
                        .join(", ")
                );
                match j {
                    0 => v,
                    1 => format!("{v} z"),
                    _ => format!("{v} z^{j}"),
                }
            })
            .collect();
        if parts.is_empty() {
            "0".into()
        } else {
            parts.join(" + ")
        }
    }
}

/// What the pinned set does per wire of the infinite array.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct PerWire {
    /// Fields per wire n_c.
    pub cell: usize,
    /// ρ: right-left pairs gapped per wire (rank of M over Q(z)).
    pub rank: usize,
    /// Signature (n+ − ρ, n− − ρ) of the n_c − 2ρ gapless modes per wire.
    pub signature: (usize, usize),
    /// rank M(1): the pinned vectors at q = 0.
    pub rank_at_q0: usize,
    /// rank M(-1): the pinned vectors at q = π.
    pub rank_at_pi: usize,
    /// B = min(n_c, P) D: no non-zero minor has more roots.
    pub degree_bound: usize,
    /// Evaluation points used (at most B + 1; fewer when ρ_max was reached).
    pub points: usize,
    /// N(z) of each pinned family.
    pub polynomials: Vec<Polynomial>,
}

impl PerWire {
    /// Gapless modes per wire, n_c − 2ρ.
    pub fn gapless(&self) -> usize {
        self.cell - 2 * self.rank
    }
}

/// N(z) of a family from its translate anchored at wire 0 of a periodic
/// ring: the support is unfolded from the start of its shortest cyclic
/// window (the stand-in ring is more than twice as wide as any pinned term,
/// so that window is unique).
pub fn polynomial(lat: &Lattice, p: &Pinned) -> Polynomial {
    let n = &p.translates[0].n;
    let (c, w) = (lat.cell, lat.wires);
    let on: Vec<usize> = (0..w)
        .filter(|&j| n[j * c..(j + 1) * c].iter().any(|x| !x.is_zero()))
        .collect();
    let (start, degree) = lat.unfolded_window(&on);
    let mut coeffs = vec![vec![BigInt::zero(); c]; degree + 1];
    for &j in &on {
        coeffs[(j + w - start) % w] = n[j * c..(j + 1) * c].to_vec();
    }
    Polynomial {
        name: p.name.clone(),
        coeffs,
    }
}

/// Rank of M(z0), the matrix with rows N_p(z0) (the transpose of M: same rank).
fn rank_at(polys: &[Polynomial], z: &BigInt) -> usize {
    let rows: Vec<Vec<BigInt>> = polys.iter().map(|p| p.at(z)).collect();
    bareiss::rank(&rows)
}

/// The per-wire data of a pinned set; `signature` is the cell's (n+, n−).
/// Fails when the rank exceeds min(n+, n−), which commuting families
/// cannot do.
pub fn per_wire(
    lat: &Lattice,
    pinned: &[Pinned],
    signature: (usize, usize),
) -> Result<PerWire, String> {
    let polynomials: Vec<Polynomial> = pinned.iter().map(|p| polynomial(lat, p)).collect();
    let cell = lat.cell;
    let most = cell.min(polynomials.len());
    let degree = polynomials.iter().map(|p| p.degree()).max().unwrap_or(0);
    let degree_bound = most * degree;
    let mut rank = 0;
    let mut points = 0;
    for z in 2..=(degree_bound as u64 + 2) {
        if rank == most {
            break;
        }
        points += 1;
        rank = rank.max(rank_at(&polynomials, &BigInt::from(z)));
    }
    let (np, nm) = signature;
    if rank > np.min(nm) {
        return Err(format!(
            "internal inconsistency: the pinned families have rank {rank} per wire, more than the cell's signature ({np}, {nm}) allows for commuting terms"
        ));
    }
    Ok(PerWire {
        cell,
        rank,
        signature: (np - rank, nm - rank),
        rank_at_q0: rank_at(&polynomials, &BigInt::from(1)),
        rank_at_pi: rank_at(&polynomials, &BigInt::from(-1)),
        degree_bound,
        points,
        polynomials,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn poly(coeffs: &[&[i64]]) -> Polynomial {
        Polynomial {
            name: "p".into(),
            coeffs: coeffs
                .iter()
                .map(|c| c.iter().map(|&x| BigInt::from(x)).collect())
                .collect(),
        }
    }

    #[test]
    fn horner_evaluation() {
        // (1, -1) + (-1, 1) z^2 at z = 3: (1 - 9, -1 + 9) = (-8, 8), by hand.
        let p = poly(&[&[1, -1], &[0, 0], &[-1, 1]]);
        let v = p.at(&BigInt::from(3));
        assert_eq!(v, vec![BigInt::from(-8), BigInt::from(8)]);
        assert_eq!(p.degree(), 2);
        assert_eq!(p.describe(), "(1, -1) + (-1, 1) z^2");
    }

    #[test]
    fn proportional_polynomials_have_rank_one() {
        // N and z N are proportional over Q(z) (derived): rank 1 at every z0.
        let a = poly(&[&[-2, 1], &[-1, 2]]);
        let b = poly(&[&[0, 0], &[-2, 1], &[-1, 2]]);
        for z in [1, 2, 5, -1] {
            assert_eq!(rank_at(&[a.clone(), b.clone()], &BigInt::from(z)), 1);
        }
        // (1, 0) + (0, 1) z and (0, 1) + (1, 0) z: det = 1 - z^2, rank 2
        // except at z = ±1 (derived).
        let c = poly(&[&[1, 0], &[0, 1]]);
        let d = poly(&[&[0, 1], &[1, 0]]);
        assert_eq!(rank_at(&[c.clone(), d.clone()], &BigInt::from(1)), 1);
        assert_eq!(rank_at(&[c.clone(), d.clone()], &BigInt::from(-1)), 1);
        assert_eq!(rank_at(&[c, d], &BigInt::from(2)), 2);
    }
}
