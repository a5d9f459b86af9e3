//! Readable bases: reduction of an integer symmetric form to a small
//! GL(n, Z)-equivalent one, and of vectors modulo a lattice.
//!
//! - Definite forms: exact LLL reduction ([`crate::math::lll::exact`],
//!   delta = 99/100), followed by pairwise reduction
//!   (b_i -= round(G_ij / G_jj) b_j while it shortens b_i).
//! - Indefinite forms: LLL does not apply. A greedy descent over the moves
//!   b_i -> b_i + k b_j lowers the sum of |entries| (ties: the sum of
//!   |diagonal entries|); a basis vector of norm +-1 is split off
//!   (b_j -= G_ij G_ii b_i makes it orthogonal to the rest), which for odd
//!   unimodular forms typically ends at diag(+-1). Visible unit vectors
//!   are split off before any descent move, and a search for a hidden one
//!   is kept only when it ends with more of them split off at no larger
//!   cost, so the reduction cannot cycle. What is left, if definite, is
//!   LLL-reduced. Orthogonal summands are reduced separately.
//! - Vectors modulo a lattice: nearest planes, then 1-norm descent whose
//!   moves are the best integer multiple of a basis vector (a weighted
//!   median), not unit steps, so long vectors take few moves.
//!
//! Owns: the readable-basis descent ([`reduce_form`]) and short
//! representatives modulo a lattice ([`ModuloLattice`]). Invariant: every
//! step is a unimodular change of basis, so det, signature, filling and
//! the quasiparticle data do not depend on it; only readability does.

use num_bigint::BigInt;
use num_integer::Integer;
use num_traits::{One, Signed, ToPrimitive, Zero};

use super::envelope_gs::EnvelopeGs;
use super::lll::{self, round_rational};
use super::zmat::{self, ZMat};
use crate::math::rational::Rational;

/// Cap on greedy moves (each strictly lowers a non-negative integer cost,
/// so the descent ends anyway; the cap bounds the time on huge entries).
const MAX_MOVES: usize = 100_000;

/// A unimodular U (columns: the new basis in old coordinates) such that
/// U^T G U is the readable form of the symmetric non-degenerate G.
///
/// Orthogonal summands (the connected components of the graph of non-zero
/// entries, e.g. the decoupled wires of a strip pinned wire by wire) are
/// reduced separately, so the form stays their direct sum. When there are
/// several, the whole form is reduced once more, since a unit vector may
/// hide across summands (e + f + g in U ⊕ <-1>, U the hyperbolic plane,
/// which is diag(1, -1, -1)); that result is kept when it is no worse (see
/// [`better`]). The basis is then sorted as a whole.
pub fn reduce_form(g: &ZMat) -> ZMat {
    let n = g.rows;
    let parts = orthogonal_summands(g);
    let mut u = ZMat::identity(n);
    for part in &parts {
        let v = reduce_summand(&block(g, part));
        for (r, &ir) in part.iter().enumerate() {
            for (c, &ic) in part.iter().enumerate() {
                *u.at_mut(ir, ic) = v.at(r, c).clone();
            }
        }
    }
    let mut gm = u.gram(g);
    if parts.len() > 1 {
        let v = reduce_summand(&gm);
        let joined = v.gram(&gm);
        if !better(&gm, &joined) {
            u = u.mul(&v);
            gm = joined;
        }
    }
    sort_basis(&gm, &mut u);
    u
}

/// Basis vectors of norm +-1 orthogonal to all the others (split off).
fn split_units(g: &ZMat) -> usize {
    (0..g.rows)
        .filter(|&i| {
            g.at(i, i).abs().is_one() && (0..g.cols).all(|j| j == i || g.at(i, j).is_zero())
        })
        .count()
}

/// The readability order of two forms: a smaller sum of |entries|, then
/// more unit vectors split off.
fn better(a: &ZMat, b: &ZMat) -> bool {
    let (ca, cb) = (cost(a).0, cost(b).0);
    ca < cb || (ca == cb && split_units(a) > split_units(b))
}

/// The index sets of the orthogonal summands of G: connected components
/// of the graph with an edge i - j where G_ij != 0 (each sorted, in order
/// of their least index).
fn orthogonal_summands(g: &ZMat) -> Vec<Vec<usize>> {
    let n = g.rows;
    let mut seen = vec![false; n];
    let mut parts = Vec::new();
    for start in 0..n {
        if seen[start] {
            continue;
        }
        seen[start] = true;
        let mut part = vec![start];
        let mut next = 0;
        while next < part.len() {
            let i = part[next];
            next += 1;
            for (j, seen_j) in seen.iter_mut().enumerate() {
                if !*seen_j && !g.at(i, j).is_zero() {
                    *seen_j = true;
                    part.push(j);
                }
            }
        }
        part.sort_unstable();
        parts.push(part);
    }
    parts
}

/// The reduction of one summand (unsorted).
///
/// Rounds: split off a visible unit vector (before anything else, so that
/// no move can merge it back into the rest); else reduce the rest (LLL if
/// definite, the greedy descent if not) and split off a unit vector that
/// appears. At a dead end (no unit vector visible), a hidden one may be
/// found by [`find_unit`]; using it unfreezes every basis vector, so it is
/// kept only if the next dead end has strictly more unit vectors split
/// off and no larger sum of |entries|; otherwise the earlier dead end is
/// restored and returned. Without
/// that rule the hidden-unit step can undo and redo the same splits until
/// the round cap, growing U by a few bits per round (e.g. on four copies
/// of a 2 x 2 form of determinant -7, U reached entries of 10^32).
/// Bound (derived): the counts at dead ends strictly increase and are at
/// most n, and between two dead ends each round freezes one vector, so
/// there are at most (n + 1)^2 rounds, within the cap below.
fn reduce_summand(g: &ZMat) -> ZMat {
    let n = g.rows;
    let mut gm = g.clone();
    let mut u = ZMat::identity(n);
    let mut frozen = vec![false; n];
    // The last dead end: its number of unit vectors, its cost and U.
    let mut dead_end: Option<(usize, BigInt, ZMat)> = None;
    for _ in 0..(n + 1) * (n + 2) {
        let rest: Vec<usize> = (0..n).filter(|&i| !frozen[i]).collect();
        if rest.is_empty() {
            break;
        }
        if split_visible_unit(&mut gm, &mut u, &mut frozen) {
            continue;
        }
        let sub = block(&gm, &rest);
        let (p, q, _) = zmat::inertia(&sub);
        if p == rest.len() || q == rest.len() {
            let v = lll::exact_definite(&sub, if p > 0 { 1 } else { -1 });
            embed(&mut gm, &mut u, &rest, &v);
            pairwise(&mut gm, &mut u, &frozen);
        } else {
            descend(&mut gm, &mut u, &frozen);
        }
        if split_visible_unit(&mut gm, &mut u, &mut frozen) {
            continue;
        }
        let units = frozen.iter().filter(|f| **f).count();
        let total = cost(&gm).0;
        if let Some((best, best_total, u0)) = dead_end {
            if units <= best || total > best_total {
                u = u0;
                break;
            }
        }
        // Stuck: a unit vector may still hide in a combination, e.g.
        // e + f + g in U ⊕ <-1> (U the hyperbolic plane).
        let Some((i, c)) = find_unit(&gm, &frozen) else {
            break;
        };
        dead_end = Some((units, total, u.clone()));
        if c[i] < 0 {
            gm.negate_row(i);
            gm.negate_col(i);
            u.negate_col(i);
        }
        for (j, &cj) in c.iter().enumerate() {
            if j != i && cj != 0 {
                zmat::basis_move(&mut gm, &mut u, i, j, &BigInt::from(cj));
            }
        }
        frozen = vec![false; n];
        split(&mut gm, &mut u, i, &frozen);
        frozen[i] = true;
    }
    u
}

/// Split off the first non-frozen basis vector of norm +-1 and freeze it;
/// false if there is none.
fn split_visible_unit(g: &mut ZMat, u: &mut ZMat, frozen: &mut [bool]) -> bool {
    let Some(i) = (0..g.rows).find(|&i| !frozen[i] && g.at(i, i).abs().is_one()) else {
        return false;
    };
    split(g, u, i, frozen);
    frozen[i] = true;
    true
}

/// Make every non-frozen b_j orthogonal to the unit vector b_i:
/// b_j -= (G_ij / G_ii) b_i, and 1 / G_ii = G_ii for G_ii = +-1.
fn split(g: &mut ZMat, u: &mut ZMat, i: usize, frozen: &[bool]) {
    let gii = g.at(i, i).clone();
    for (j, &fixed) in frozen.iter().enumerate() {
        if j != i && !fixed {
            let c = -(g.at(i, j) * &gii);
            zmat::basis_move(g, u, j, i, &c);
        }
    }
}

/// Largest dimension searched for hidden unit vectors (3^n combinations).
const UNIT_SEARCH_MAX: usize = 8;

/// A combination v = sum c_j b_j, c_j in {-1, 0, 1}, with v.v = +-1 and
/// c_i = +-1 for a non-frozen i (so b_i -> v is unimodular); fewest terms.
fn find_unit(g: &ZMat, frozen: &[bool]) -> Option<(usize, Vec<i64>)> {
    let n = g.rows;
    if n > UNIT_SEARCH_MAX || frozen.iter().all(|f| *f) {
        return None;
    }
    let small: Vec<Vec<i64>> = g
        .to_rows()
        .iter()
        .map(|r| r.iter().map(|x| x.to_i64()).collect::<Option<Vec<i64>>>())
        .collect::<Option<_>>()?;
    if small.iter().flatten().any(|x| x.abs() > 1 << 20) {
        return None;
    }
    let mut best: Option<(usize, usize, Vec<i64>)> = None;
    let mut c = vec![-1i64; n];
    loop {
        let terms = c.iter().filter(|x| **x != 0).count();
        if terms > 1 && best.as_ref().is_none_or(|b| terms < b.0) {
            let norm: i64 = (0..n)
                .map(|a| (0..n).map(|b| c[a] * small[a][b] * c[b]).sum::<i64>())
                .sum();
            if norm.abs() == 1 {
                if let Some(i) = (0..n).find(|&i| !frozen[i] && c[i] != 0) {
                    best = Some((terms, i, c.clone()));
                }
            }
        }
        let mut k = 0;
        while k < n && c[k] == 1 {
            c[k] = -1;
            k += 1;
        }
        if k == n {
            break;
        }
        c[k] += 1;
    }
    best.map(|(_, i, c)| (i, c))
}

/// The sub-Gram matrix of some basis vectors.
fn block(g: &ZMat, idx: &[usize]) -> ZMat {
    ZMat::from_rows(
        &idx.iter()
            .map(|&i| idx.iter().map(|&j| g.at(i, j).clone()).collect())
            .collect::<Vec<_>>(),
        idx.len(),
    )
}

/// Apply a change of basis V of the vectors `idx` (new b_idx[c] =
/// sum_r V_rc b_idx[r]) to G and U.
fn embed(g: &mut ZMat, u: &mut ZMat, idx: &[usize], v: &ZMat) {
    let n = g.rows;
    let mut w = ZMat::identity(n);
    for (r, &ir) in idx.iter().enumerate() {
        for (c, &ic) in idx.iter().enumerate() {
            *w.at_mut(ir, ic) = v.at(r, c).clone();
        }
    }
    *u = u.mul(&w);
    *g = w.gram(g);
}

/// Sum of |entries| and sum of |diagonal entries| of G after b_i += k b_j.
fn cost_after(
    g: &ZMat,
    i: usize,
    j: usize,
    k: &BigInt,
    base: &(BigInt, BigInt),
) -> (BigInt, BigInt) {
    let n = g.rows;
    let (mut total, mut diag) = base.clone();
    for l in 0..n {
        if l == i {
            continue;
        }
        let new = g.at(i, l) + k * g.at(j, l);
        total += (new.abs() - g.at(i, l).abs()) * 2;
    }
    let two = BigInt::from(2);
    let new_ii = g.at(i, i) + &two * k * g.at(i, j) + k * k * g.at(j, j);
    let d = new_ii.abs() - g.at(i, i).abs();
    total += &d;
    diag += d;
    (total, diag)
}

fn cost(g: &ZMat) -> (BigInt, BigInt) {
    let n = g.rows;
    let mut total = BigInt::zero();
    let mut diag = BigInt::zero();
    for i in 0..n {
        for j in 0..n {
            total += g.at(i, j).abs();
        }
        diag += g.at(i, i).abs();
    }
    (total, diag)
}

/// Integer candidates k for b_i + k b_j: small shifts, the vertex and the
/// real roots of the norm (a quadratic in k), and the zeros of every entry
/// of row i, each rounded both ways. All exact.
fn candidates(g: &ZMat, i: usize, j: usize) -> Vec<BigInt> {
    let (a, b, c) = (g.at(j, j), g.at(i, j), g.at(i, i));
    let mut ks: Vec<BigInt> = [1i64, -1, 2, -2].iter().map(|x| BigInt::from(*x)).collect();
    let push_ratio = |num: BigInt, den: &BigInt, ks: &mut Vec<BigInt>| {
        if den.is_zero() {
            return;
        }
        let f = num.div_floor(den);
        for k in [f.clone() - 1, f.clone(), f + 1] {
            if !k.is_zero() && !ks.contains(&k) {
                ks.push(k);
            }
        }
    };
    if !a.is_zero() {
        push_ratio(-b, a, &mut ks);
        let disc = b * b - a * c;
        if !disc.is_negative() {
            let s = disc.sqrt();
            push_ratio(-b + &s, a, &mut ks);
            push_ratio(-b - &s, a, &mut ks);
        }
    } else if !b.is_zero() {
        push_ratio(-c, &(b * 2), &mut ks);
    }
    for l in 0..g.rows {
        if l != i {
            push_ratio(-g.at(i, l), g.at(j, l), &mut ks);
        }
    }
    ks
}

/// Greedy descent on the non-frozen basis vectors.
fn descend(g: &mut ZMat, u: &mut ZMat, frozen: &[bool]) {
    let n = g.rows;
    for _ in 0..MAX_MOVES {
        let base = cost(g);
        let mut best: Option<((BigInt, BigInt), usize, usize, BigInt)> = None;
        for i in (0..n).filter(|&i| !frozen[i]) {
            for j in (0..n).filter(|&j| j != i && !frozen[j]) {
                for k in candidates(g, i, j) {
                    let c = cost_after(g, i, j, &k, &base);
                    if c < base && best.as_ref().is_none_or(|b| c < b.0) {
                        best = Some((c, i, j, k));
                    }
                }
            }
        }
        match best {
            Some((_, i, j, k)) => zmat::basis_move(g, u, i, j, &k),
            None => return,
        }
    }
}

/// Pairwise reduction of a definite block: b_i -= q b_j with
/// q = round(G_ij / G_jj) while it lowers |G_ii|.
fn pairwise(g: &mut ZMat, u: &mut ZMat, frozen: &[bool]) {
    let n = g.rows;
    for _ in 0..MAX_MOVES {
        let mut moved = false;
        for i in (0..n).filter(|&i| !frozen[i]) {
            for j in (0..n).filter(|&j| !frozen[j]) {
                if i == j || g.at(j, j).is_zero() {
                    continue;
                }
                let q = round_rational(&Rational::new(g.at(i, j).clone(), g.at(j, j).clone()));
                if q.is_zero() {
                    continue;
                }
                let two = BigInt::from(2);
                let k = -q;
                let new_ii = g.at(i, i) + &two * &k * g.at(i, j) + &k * &k * g.at(j, j);
                if new_ii.abs() < g.at(i, i).abs() {
                    zmat::basis_move(g, u, i, j, &k);
                    moved = true;
                }
            }
        }
        if !moved {
            break;
        }
    }
}

/// Order the basis: positive norms first, then by |norm| (stable).
fn sort_basis(g: &ZMat, u: &mut ZMat) {
    let n = g.rows;
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by_key(|&i| (g.at(i, i).is_negative(), g.at(i, i).abs()));
    let cols: Vec<Vec<BigInt>> = order.iter().map(|&i| u.col(i)).collect();
    *u = ZMat::from_cols(u.rows, &cols);
}

/// Short representatives modulo the lattice spanned by some integer
/// vectors (Euclidean norm): an independent subset of them is LLL-reduced,
/// v is reduced by nearest planes [Babai, Combinatorica 6, 1 (1986)], then
/// by single steps v -> v +- s while the sum of |entries| drops.
pub struct ModuloLattice {
    dim: usize,
    basis: Vec<Vec<BigInt>>,
    /// The non-zero entries of each basis vector (sparse lattices).
    basis_on: Vec<Vec<usize>>,
    /// Integral Gram-Schmidt numbers of the basis: d_j and
    /// lambda_{j,l} = <b_j, I_l>, I_l = d_l b*_l, in envelope form
    /// ([`crate::math::envelope_gs`]; the vectors I_l are never formed).
    gs: EnvelopeGs,
}

impl ModuloLattice {
    /// Prepare the lattice spanned by the columns of S (they may be
    /// linearly dependent; a maximal independent subset is used, which
    /// spans a sublattice of finite index: representatives stay in the
    /// same class modulo the full lattice).
    pub fn new(s: &ZMat) -> ModuloLattice {
        ModuloLattice::with_rank(s, usize::MAX)
    }

    /// [`ModuloLattice::new`] when the columns of S are known to span a
    /// lattice of rank at most `rank` (the search for an independent subset
    /// stops there; the same subset, see [`crate::math::echelon`]).
    pub fn with_rank(s: &ZMat, rank: usize) -> ModuloLattice {
        let cols = independent(&s.columns(), rank);
        let dim = s.rows;
        let sub = ZMat::from_cols(dim, &cols);
        let (u, data) = lll::exact_with_gs(&sparse_gram(&cols));
        let basis = sub.mul(&u).columns();
        // The reduction's own Gram-Schmidt data when it has them (the
        // reduced basis of local vectors is seldom local: dense envelope).
        let gs = match data {
            Some((mu, bb)) => EnvelopeGs::from_gs(&mu, &bb),
            None => EnvelopeGs::from_gram(&sparse_gram(&basis)),
        };
        let basis_on = basis.iter().map(|b| support(b)).collect();
        ModuloLattice {
            dim,
            basis,
            basis_on,
            gs,
        }
    }

    /// <v, I_j> for every j (exact; see [`EnvelopeGs::coords`]).
    fn coords(&self, v: &[BigInt]) -> Vec<BigInt> {
        let dots: Vec<BigInt> = self
            .basis_on
            .iter()
            .zip(&self.basis)
            .map(|(on, b)| sparse_dot(v, b, on))
            .collect();
        self.gs.coords(&dots)
    }

    /// A short representative of v + lattice.
    pub fn reduce(&self, v: &[BigInt]) -> Vec<BigInt> {
        let mut v = v.to_vec();
        // Nearest planes: c_j = round(<v', b*_j> / |b*_j|^2) for the current
        // v' = v - sum_{i>j} c_i b_i, and <v', I_j> = <v, I_j> - sum_{i>j}
        // c_i lambda_{i,j}, |b*_j|^2 = d_{j+1} / d_j (exact).
        let mut x = self.coords(&v);
        for j in (0..self.basis.len()).rev() {
            let c = round_rational(&Rational::new(x[j].clone(), self.gs.d(j + 1).clone()));
            if !c.is_zero() {
                for &i in &self.basis_on[j] {
                    v[i] -= &c * &self.basis[j][i];
                }
                for (l, lam) in self.gs.row(j) {
                    x[l] -= &c * lam;
                }
            }
        }
        self.descend_l1(&mut v);
        v
    }

    /// 1-norm descent: the best of v +- b and v + c b (c the best multiple)
    /// over the basis, while the sum of |entries| drops. Only the entries
    /// where b is non-zero change, so costs are updated on those (the
    /// same numbers as summing all entries; first-come on ties).
    fn descend_l1(&self, v: &mut [BigInt]) {
        for _ in 0..MAX_MOVES {
            let total = l1(v);
            let mut best: (BigInt, Option<(usize, BigInt)>) = (total.clone(), None);
            for (j, (b, on)) in self.basis.iter().zip(&self.basis_on).enumerate() {
                let vs: Vec<BigInt> = on.iter().map(|&i| v[i].clone()).collect();
                let bs: Vec<BigInt> = on.iter().map(|&i| b[i].clone()).collect();
                let line = best_multiple(&vs, &bs);
                let rest = &total - l1(&vs);
                let steps = [BigInt::one(), -BigInt::one()];
                let extra = (line.abs() > BigInt::one()).then_some(line);
                for s in steps.iter().chain(extra.as_ref()) {
                    let c = vs
                        .iter()
                        .zip(&bs)
                        .fold(rest.clone(), |a, (x, y)| a + (x + y * s).abs());
                    if c < best.0 {
                        best = (c, Some((j, s.clone())));
                    }
                }
            }
            let Some((j, s)) = best.1 else { break };
            for &i in &self.basis_on[j] {
                v[i] += &self.basis[j][i] * &s;
            }
        }
    }

    /// A unimodular U making the columns of C short modulo the lattice:
    /// LLL on the Gram matrix of their projections orthogonal to it
    /// (scaled to integers). The columns of C must be independent modulo
    /// the lattice.
    pub fn shorten(&self, c: &ZMat) -> ZMat {
        let d = c.cols;
        if d < 2 {
            return ZMat::identity(d);
        }
        // <p_a, p_b> for the projections p orthogonal to the lattice:
        // <v_a, v_b> - sum_j <v_a, I_j> <v_b, I_j> / (d_{j-1} d_j), since
        // <v, b*_j> = <v, I_j> / d_{j-1} and |b*_j|^2 = d_j / d_{j-1}.
        let cols = c.columns();
        let x: Vec<Vec<BigInt>> = cols.iter().map(|v| self.coords(v)).collect();
        let gram: Vec<Vec<Rational>> = (0..d)
            .map(|a| {
                (0..d)
                    .map(|b| {
                        let whole = Rational::from_integer(zmat::dot(&cols[a], &cols[b]));
                        (0..self.gs.len())
                            .filter(|&j| !x[a][j].is_zero() && !x[b][j].is_zero())
                            .fold(whole, |acc, j| {
                                acc - Rational::new(
                                    &x[a][j] * &x[b][j],
                                    self.gs.d(j) * self.gs.d(j + 1),
                                )
                            })
                    })
                    .collect()
            })
            .collect();
        let den = gram
            .iter()
            .flatten()
            .fold(BigInt::one(), |l, x| l.lcm(x.denom()));
        let rows: Vec<Vec<BigInt>> = gram
            .iter()
            .map(|r| {
                r.iter()
                    .map(|x| (x * Rational::from_integer(den.clone())).to_integer())
                    .collect()
            })
            .collect();
        debug_assert_eq!(self.dim, c.rows);
        lll::exact(&ZMat::from_rows(&rows, d))
    }
}

/// Sum of |entries|.
fn l1(v: &[BigInt]) -> BigInt {
    v.iter().fold(BigInt::zero(), |a, x| a + x.abs())
}

/// An integer c minimising |v + c b|_1. The function of c is convex and
/// piecewise linear with breakpoints -v_i / b_i of weights |b_i|, so its
/// real minimum is at a weighted median of the breakpoints (derived), and
/// the integer minimum at the floor or the ceiling of that median. One
/// step to the best multiple replaces up to |c| unit steps, which matters
/// for long vectors.
fn best_multiple(v: &[BigInt], b: &[BigInt]) -> BigInt {
    let mut points: Vec<(Rational, BigInt)> = v
        .iter()
        .zip(b)
        .filter(|(_, y)| !y.is_zero())
        .map(|(x, y)| (Rational::new(-x, y.clone()), y.abs()))
        .collect();
    if points.is_empty() {
        return BigInt::zero();
    }
    points.sort_by(|a, b| a.0.cmp(&b.0));
    let total: BigInt = points.iter().map(|(_, w)| w).sum();
    let mut below = BigInt::zero();
    let mut median = points[0].0.clone();
    for (x, w) in &points {
        below += w;
        if &below * 2 >= total {
            median = x.clone();
            break;
        }
    }
    let lo = median.floor().to_integer();
    let hi = median.ceil().to_integer();
    let at = |c: &BigInt| -> BigInt {
        v.iter()
            .zip(b)
            .fold(BigInt::zero(), |a, (x, y)| a + (x + c * y).abs())
    };
    if at(&hi) < at(&lo) {
        hi
    } else {
        lo
    }
}

/// A maximal linearly independent subset of the vectors (the first-come
/// one, in order; [`crate::math::echelon`]), stopping at `rank` vectors.
fn independent(vs: &[Vec<BigInt>], rank: usize) -> Vec<Vec<BigInt>> {
    crate::math::echelon::independent_up_to(vs, rank)
        .into_iter()
        .map(|i| vs[i].clone())
        .collect()
}

/// The non-zero entries of a vector.
fn support(v: &[BigInt]) -> Vec<usize> {
    (0..v.len()).filter(|&i| !v[i].is_zero()).collect()
}

/// <v, b> over the non-zero entries `on` of b.
fn sparse_dot(v: &[BigInt], b: &[BigInt], on: &[usize]) -> BigInt {
    on.iter()
        .filter(|&&i| !v[i].is_zero())
        .fold(BigInt::zero(), |a, &i| a + &v[i] * &b[i])
}

/// The Gram matrix (Euclidean) of vectors, by sparse dots.
fn sparse_gram(vs: &[Vec<BigInt>]) -> ZMat {
    let k = vs.len();
    let on: Vec<Vec<usize>> = vs.iter().map(|v| support(v)).collect();
    let mut g = ZMat::zeros(k, k);
    for i in 0..k {
        for j in 0..=i {
            let x = sparse_dot(&vs[i], &vs[j], &on[j]);
            *g.at_mut(j, i) = x.clone();
            *g.at_mut(i, j) = x;
        }
    }
    g
}

/// gcd of a vector's entries (0 for the zero vector).
pub fn content(v: &[BigInt]) -> BigInt {
    v.iter().fold(BigInt::zero(), |g, x| g.gcd(x))
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    /// Integral Gram-Schmidt of independent integer vectors b_1..b_k: the
    /// vectors I_j = d_{j-1} b*_j and the numbers d_0 = 1, d_j = det of the
    /// Gram matrix of b_1..b_j (= <b_j, I_j>), all integers. Fraction-free
    /// recurrence (derived as for Bareiss elimination): u = b_j, then for i <
    /// j, u <- (d_i u - <b_j, I_i> I_i) / d_{i-1}, which keeps u = d_i times
    /// the part of b_j orthogonal to b_1..b_i (an integer vector by Cramer's
    /// rule, so the division is exact); the last u is I_j.
    fn integral_gram_schmidt(basis: &[Vec<BigInt>]) -> (Vec<Vec<BigInt>>, Vec<BigInt>) {
        let mut star: Vec<Vec<BigInt>> = Vec::with_capacity(basis.len());
        let mut d = vec![BigInt::one()];
        for b in basis {
            let mut u = b.clone();
            for (i, w) in star.iter().enumerate() {
                let lambda = zmat::dot(b, w);
                for (x, y) in u.iter_mut().zip(w) {
                    if x.is_zero() && (lambda.is_zero() || y.is_zero()) {
                        continue;
                    }
                    let mut t = &d[i + 1] * &*x;
                    if !lambda.is_zero() && !y.is_zero() {
                        t -= &lambda * y;
                    }
                    debug_assert!((&t % &d[i]).is_zero(), "exact division");
                    *x = t / &d[i];
                }
            }
            d.push(zmat::dot(b, &u));
            star.push(u);
        }
        (star, d)
    }

    /// Random independent vectors: local ones along a chain (banded Gram
    /// matrix, as for the translates of a pinned term) or dense ones.
    fn random_basis(rng: &mut ChaCha8Rng, banded: bool) -> Vec<Vec<BigInt>> {
        let n = rng.gen_range(4..=12);
        let k = rng.gen_range(1..=n);
        let vs: Vec<Vec<BigInt>> = (0..k)
            .map(|j| {
                (0..n)
                    .map(|i| {
                        let near = i >= j && i <= j + 2;
                        let x = if !banded || near {
                            rng.gen_range(-3..=3)
                        } else {
                            0
                        };
                        BigInt::from(x)
                    })
                    .collect()
            })
            .collect();
        independent(&vs, usize::MAX)
    }

    #[test]
    fn envelope_gram_schmidt_matches_the_dense_vectors() {
        // Second code path: the dense integral Gram-Schmidt above. The
        // envelope form must give the same d_j, lambda_{j,l} = <b_j, I_l>
        // and <v, I_j> for any v, on banded and dense bases.
        let mut rng = ChaCha8Rng::seed_from_u64(33);
        for case in 0..80 {
            let basis = random_basis(&mut rng, case % 2 == 0);
            if basis.is_empty() {
                continue;
            }
            let (star, d) = integral_gram_schmidt(&basis);
            let gs = EnvelopeGs::from_gram(&sparse_gram(&basis));
            for (j, dj) in d.iter().enumerate() {
                assert_eq!(gs.d(j), dj, "d_{j}, case {case}");
            }
            for (j, b) in basis.iter().enumerate() {
                let stored: Vec<(usize, BigInt)> = gs.row(j).map(|(l, x)| (l, x.clone())).collect();
                for (l, w) in star.iter().enumerate().take(j) {
                    let want = zmat::dot(b, w);
                    match stored.iter().find(|(m, _)| *m == l) {
                        Some((_, x)) => assert_eq!(x, &want, "case {case}"),
                        None => assert!(want.is_zero(), "outside the envelope"),
                    }
                }
            }
            let n = basis[0].len();
            let v: Vec<BigInt> = (0..n)
                .map(|_| BigInt::from(rng.gen_range(-9..=9)))
                .collect();
            let dots: Vec<BigInt> = basis.iter().map(|b| zmat::dot(&v, b)).collect();
            let want: Vec<BigInt> = star.iter().map(|w| zmat::dot(&v, w)).collect();
            assert_eq!(gs.coords(&dots), want, "case {case}");
        }
    }

    /// d_j and every lambda_{j,l} (zero outside the envelope), densely.
    fn dense_numbers(gs: &EnvelopeGs) -> (Vec<BigInt>, Vec<Vec<BigInt>>) {
        let k = gs.len();
        let d = (0..=k).map(|j| gs.d(j).clone()).collect();
        let lam = (0..k)
            .map(|j| {
                let mut row = vec![BigInt::zero(); j];
                for (l, x) in gs.row(j) {
                    row[l] = x.clone();
                }
                row
            })
            .collect();
        (d, lam)
    }

    #[test]
    fn lll_gram_schmidt_data_match_the_recomputed_numbers() {
        // The numbers taken from the exact LLL's own mu and B_j (what
        // ModuloLattice uses) against the recurrence on the Gram matrix of
        // the reduced basis (second code path).
        let mut rng = ChaCha8Rng::seed_from_u64(34);
        for case in 0..60 {
            let basis = random_basis(&mut rng, case % 2 == 0);
            if basis.is_empty() {
                continue;
            }
            let n = basis[0].len();
            let (u, data) = lll::exact_with_gs(&sparse_gram(&basis));
            let (mu, bb) = data.expect("within the step cap");
            let reduced = ZMat::from_cols(n, &basis).mul(&u).columns();
            let want = EnvelopeGs::from_gram(&sparse_gram(&reduced));
            let got = EnvelopeGs::from_gs(&mu, &bb);
            assert_eq!(dense_numbers(&got), dense_numbers(&want), "case {case}");
        }
    }

    #[test]
    fn integral_gram_schmidt_matches_rational_gram_schmidt() {
        // Second code path: textbook Gram-Schmidt in rationals; I_j must be
        // d_{j-1} b*_j and d_j / d_{j-1} = |b*_j|^2.
        let mut rng = ChaCha8Rng::seed_from_u64(31);
        for _ in 0..40 {
            let (k, n) = (rng.gen_range(1..=5), rng.gen_range(5..=8));
            let vs: Vec<Vec<BigInt>> = (0..k)
                .map(|_| {
                    (0..n)
                        .map(|_| BigInt::from(rng.gen_range(-3..=3)))
                        .collect()
                })
                .collect();
            let basis = independent(&vs, usize::MAX);
            let (star, d) = integral_gram_schmidt(&basis);
            let mut rstar: Vec<Vec<Rational>> = Vec::new();
            let dotr = |a: &[Rational], b: &[Rational]| -> Rational {
                a.iter().zip(b).map(|(x, y)| x * y).sum()
            };
            for (j, b) in basis.iter().enumerate() {
                let mut v: Vec<Rational> = b
                    .iter()
                    .map(|x| Rational::from_integer(x.clone()))
                    .collect();
                for w in &rstar {
                    let c = dotr(&v, w) / dotr(w, w);
                    for (x, y) in v.iter_mut().zip(w) {
                        *x -= &c * y;
                    }
                }
                let dj = Rational::from_integer(d[j].clone());
                let scaled: Vec<Rational> = v.iter().map(|x| x * &dj).collect();
                let ij: Vec<Rational> = star[j]
                    .iter()
                    .map(|x| Rational::from_integer(x.clone()))
                    .collect();
                assert_eq!(scaled, ij);
                assert_eq!(dotr(&v, &v) * dj, Rational::from_integer(d[j + 1].clone()));
                rstar.push(v);
            }
        }
    }

    /// A random unimodular matrix: a product of elementary moves.
    pub(crate) fn random_unimodular(rng: &mut ChaCha8Rng, n: usize, moves: usize) -> ZMat {
        let mut u = ZMat::identity(n);
        if n < 2 {
            return u;
        }
        for _ in 0..moves {
            let i = rng.gen_range(0..n);
            let j = (i + rng.gen_range(1..n)) % n;
            let k = BigInt::from(rng.gen_range(-2i64..=2));
            u.add_col_multiple(i, j, &k);
            if rng.gen_bool(0.2) {
                u.swap_cols(i, j);
            }
        }
        u
    }

    pub(crate) fn diag(d: &[i64]) -> ZMat {
        let n = d.len();
        let rows: Vec<Vec<i64>> = (0..n)
            .map(|i| (0..n).map(|j| if i == j { d[i] } else { 0 }).collect())
            .collect();
        ZMat::from_i64(&rows, n)
    }

    fn max_abs(g: &ZMat) -> BigInt {
        g.to_rows()
            .into_iter()
            .flatten()
            .map(|x| x.abs())
            .max()
            .unwrap_or_default()
    }

    #[test]
    fn definite_unimodular_forms_become_the_identity() {
        // G = U^T U is Z^n with the standard form in a scrambled basis
        // (derived: U unimodular); its readable form is the identity.
        let mut rng = ChaCha8Rng::seed_from_u64(4);
        for n in 1..=5 {
            let u = random_unimodular(&mut rng, n, 20);
            let g = u.gram(&ZMat::identity(n));
            let w = reduce_form(&g);
            assert_eq!(w.gram(&g), ZMat::identity(n), "n = {n}, start {g:?}");
        }
    }

    #[test]
    fn indefinite_odd_unimodular_forms_become_diagonal() {
        // An odd indefinite unimodular lattice is diag(1,..,1,-1,..,-1)
        // (Milnor & Husemoller, "Symmetric Bilinear Forms" (1973), ch. II,
        // from memory); the greedy descent should find such a basis from a
        // scrambled one. Positive norms are sorted first.
        let mut rng = ChaCha8Rng::seed_from_u64(5);
        for (p, q) in [(1, 1), (2, 1), (1, 2), (2, 2), (3, 1)] {
            for _ in 0..5 {
                let n = p + q;
                let mut d = vec![1i64; p];
                d.extend(vec![-1i64; q]);
                let u = random_unimodular(&mut rng, n, 10);
                let g = u.gram(&diag(&d));
                let w = reduce_form(&g);
                assert!(zmat::det(&w).abs().is_one());
                let r = w.gram(&g);
                assert_eq!(r, diag(&d), "({p},{q}) from {g:?}");
            }
        }
    }

    #[test]
    fn even_hyperbolic_plane_stays_small() {
        // U = [[0,1],[1,0]] is even: it has no vector of norm +-1, so the
        // descent must end at entries of size <= 1 without splitting.
        let mut rng = ChaCha8Rng::seed_from_u64(6);
        let h = ZMat::from_i64(&[vec![0, 1], vec![1, 0]], 2);
        for _ in 0..10 {
            let u = random_unimodular(&mut rng, 2, 8);
            let g = u.gram(&h);
            let w = reduce_form(&g);
            let r = w.gram(&g);
            assert!(max_abs(&r) <= BigInt::one(), "{r:?}");
            assert_eq!(zmat::det(&r), BigInt::from(-1));
        }
    }

    #[test]
    fn a_sum_of_four_planes_splits_without_cycling() {
        // The strip form of tests/reference/edges_nondiagonal_cell.toml: two
        // copies of <-1> ⊕ <7> and two of P = [[-1, 1], [1, 6]] (det -7).
        // Derived: in P, f + e is orthogonal to e and has norm 6 + 2 - 1 = 7,
        // so the form is diag(7, 7, 7, 7, -1, -1, -1, -1), positive norms
        // first. The hidden-unit search once undid and redid the splits
        // here until the round cap, with U growing to ~10^32.
        let g = ZMat::from_i64(
            &[
                vec![-1, 0, 0, 0, 0, 0, 0, 0],
                vec![0, -1, 0, 0, 0, 1, 0, 0],
                vec![0, 0, -1, 0, 0, 0, 0, 0],
                vec![0, 0, 0, -1, 0, 0, 0, 1],
                vec![0, 0, 0, 0, 7, 0, 0, 0],
                vec![0, 1, 0, 0, 0, 6, 0, 0],
                vec![0, 0, 0, 0, 0, 0, 7, 0],
                vec![0, 0, 0, 1, 0, 0, 0, 6],
            ],
            8,
        );
        let u = reduce_form(&g);
        assert_eq!(u.gram(&g), diag(&[7, 7, 7, 7, -1, -1, -1, -1]));
        assert!(max_abs(&u) <= BigInt::one(), "{u:?}");
        // The same form in scrambled bases: still a GL(8, Z) change of basis
        // with entries that stay small.
        let mut rng = ChaCha8Rng::seed_from_u64(7);
        for _ in 0..5 {
            let w = random_unimodular(&mut rng, 8, 16);
            let h = w.gram(&g);
            let v = reduce_form(&h);
            assert!(zmat::det(&v).abs().is_one(), "unimodular");
            let r = v.gram(&h);
            assert_eq!(zmat::inertia(&r), (4, 4, 0));
            assert!(max_abs(&v) < BigInt::from(1u64 << 20), "{v:?}");
            assert!(cost(&r).0 <= cost(&h).0, "no worse than the start");
        }
    }

    #[test]
    fn a_unit_hidden_across_summands_is_found() {
        // U ⊕ <-1> (U the hyperbolic plane) is odd, indefinite and
        // unimodular, hence diag(1, -1, -1) (Milnor & Husemoller, "Symmetric
        // Bilinear Forms" (1973), ch. II, from memory); the unit vector
        // e + f + g needs both summands.
        let g = ZMat::from_i64(&[vec![0, 1, 0], vec![1, 0, 0], vec![0, 0, -1]], 3);
        let u = reduce_form(&g);
        assert_eq!(u.gram(&g), diag(&[1, -1, -1]));
    }

    #[test]
    fn best_multiple_minimises_the_one_norm() {
        // Against brute force over c in [-40, 40]: the breakpoints -v_i / b_i
        // lie in [-10, 10] for entries |v_i| <= 10 and b_i != 0, and the
        // minimum of a convex function lies between them.
        let mut rng = ChaCha8Rng::seed_from_u64(9);
        for _ in 0..300 {
            let d = rng.gen_range(1..=6);
            let v: Vec<BigInt> = (0..d)
                .map(|_| BigInt::from(rng.gen_range(-10..=10)))
                .collect();
            let b: Vec<BigInt> = (0..d)
                .map(|_| BigInt::from(rng.gen_range(-3..=3)))
                .collect();
            let at = |c: i64| -> BigInt {
                v.iter()
                    .zip(&b)
                    .map(|(x, y)| (x + y * c).abs())
                    .fold(BigInt::zero(), |a, x| a + x)
            };
            let brute = (-40..=40).map(at).min().unwrap();
            let c = best_multiple(&v, &b);
            let got: BigInt = v
                .iter()
                .zip(&b)
                .map(|(x, y)| (x + y * &c).abs())
                .fold(BigInt::zero(), |a, x| a + x);
            assert_eq!(got, brute, "v = {v:?}, b = {b:?}, c = {c}");
        }
    }

    #[test]
    fn modulo_lattice_finds_short_representatives() {
        // v = e_0 + 7 s_0 - 3 s_1 reduces to a vector of 1-norm <= that of e_0.
        let s = ZMat::from_i64(&[vec![2, 1], vec![1, -1], vec![0, 3]], 2);
        let m = ModuloLattice::new(&s);
        let mut v = vec![BigInt::one(), BigInt::zero(), BigInt::zero()];
        for (c, coef) in [(0usize, 7i64), (1, -3)] {
            for (x, y) in v.iter_mut().zip(s.col(c)) {
                *x += y * coef;
            }
        }
        let r = m.reduce(&v);
        let l1: BigInt = r.iter().map(|x| x.abs()).sum();
        assert!(l1 <= BigInt::one(), "{r:?}");
    }
}
