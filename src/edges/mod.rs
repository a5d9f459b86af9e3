//! `pinflow edges`: what is left once a set of terms is pinned — the
//! number of gapped right-left pairs, whether the bulk is fully gapped, and
//! the gapless theory near each end of an open array (docs/physics.md
//! section 7).
//!
//! Method, all in exact integer arithmetic (big integers):
//! - the pinned set P: local, null, mutually commuting terms (all their
//!   translates), as particle vectors n_p; r = rank P gapped pairs;
//! - a region (all fields, or the wires of a window at one end): the
//!   integer kernel M of the pinned vectors under <n, n'> = n^T K n', the
//!   saturation S of the pinned vectors inside the region, and the
//!   residual lattice M / S, whose Gram matrix is the region's K matrix and
//!   whose charges t.n form its charge vector ([`theory`]);
//! - normal forms ([`crate::math::smith`]: Smith with transforms) and readable
//!   bases ([`crate::math::reduce`]: LLL on definite forms, a greedy descent with unit
//!   splitting on indefinite ones). Reported invariants (det, signature,
//!   filling, quasiparticle charges and spins modulo their ambiguity) do
//!   not depend on the basis.
//!
//! Windows: at each end of an open array, the operators supported on its
//! first (last) w wires that commute with every pinned translate, modulo
//! the pinned translates lying inside the window. The default w is the
//! smallest window that holds a translate of every pinned term at both
//! ends. Without a window the whole strip's two edges form one non-chiral
//! theory (det = +-1 when K is unimodular). "Fully gapped" for an open
//! array is decided on the periodic array of the same cell and terms.
//!
//! Infinite arrays: the terms are placed and checked (local, null,
//! commuting with every translate) on the periodic stand-in ring, which is
//! exact for per-term and pairwise data, but no count is taken there: the
//! ring's ranks depend on its size. The counts are per wire in the
//! thermodynamic limit, the rank over Q(z) of the pinned families' N(z)
//! ([`line`], with the certificate of that rank): `gapped_pairs` and
//! `gapless_modes` are then per wire, "fully gapped" means 2 r = n_c, and
//! the gapless modes per wire are described by their signature
//! (n+ − r, n− − r) only. Their K matrix is not computed (`whole` is None,
//! and there are no ends): on a ring it is the Gram matrix of generators
//! spread over every wire and depends on the ring's size.
//!
//! Owns: [`analyse`] (pinned set in, [`Analysis`] out; no printing), the
//! choice of the window and the notes on it. Invariants: counts satisfy
//! fields = 2 gapped_pairs + gapless_modes (per wire for infinite arrays),
//! checked against the residual theory of all fields.

pub mod line;
pub mod pins;
pub mod report;
pub mod theory;

use num_bigint::BigInt;
use num_traits::Zero;

use crate::core::invariants::particles_of;
use crate::core::lattice::Lattice;
use crate::core::system::System;
use crate::error::{Error, InputError};
use crate::math::zmat::{big, ZMat};
use crate::model::{Boundary, Structure, Wires};
use pins::Pinned;
use theory::Residual;

/// Which part of the system a theory describes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum End {
    /// The first wires of an open array.
    Left,
    /// The last wires of an open array.
    Right,
    /// A whole open array (both edges together).
    Strip,
    /// A periodic array (what the bulk leaves gapless).
    Bulk,
    /// An explicit model (all fields).
    System,
}

impl End {
    /// The word used in every output.
    pub fn word(self) -> &'static str {
        match self {
            End::Left => "left",
            End::Right => "right",
            End::Strip => "strip",
            End::Bulk => "bulk",
            End::System => "system",
        }
    }
}

/// The theory of one region.
#[derive(Debug, Clone)]
pub struct Theory {
    /// Which region.
    pub end: End,
    /// First and last wire of the region (arrays).
    pub wires: Option<(usize, usize)>,
    /// Its residual lattice.
    pub residual: Residual,
    /// Its exact invariants.
    pub invariants: theory::Invariants,
}

/// The window used at the ends of an open array.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Window {
    /// Wires at each end.
    pub wires: usize,
    /// Chosen by default (not `--window`).
    pub default: bool,
}

/// Everything `edges` computes.
#[derive(Debug, Clone)]
pub struct Analysis {
    /// Number of fields (infinite arrays: of one wire).
    pub fields: usize,
    /// r = rank of the pinned vectors (infinite arrays: per wire).
    pub gapped_pairs: usize,
    /// N - 2r (infinite arrays: per wire).
    pub gapless_modes: usize,
    /// The bulk is fully gapped (None: could not be decided).
    pub fully_gapped: Option<bool>,
    /// How `fully_gapped` was decided.
    pub gapped_basis: String,
    /// The theory of all fields (None for an infinite array: see [`line`]).
    pub whole: Option<Theory>,
    /// Infinite arrays: the per-wire data (None otherwise).
    pub per_wire: Option<line::PerWire>,
    /// The window, when the ends were separated.
    pub window: Option<Window>,
    /// The two ends of an open array.
    pub edges: Vec<Theory>,
    /// The pinned terms carry charge: charge is conserved only modulo this
    /// (the gcd of their charges t.n). None when every pinned term is
    /// neutral.
    pub charge_modulus: Option<BigInt>,
    /// Remarks (unclean cuts, windows that change the answer, ...).
    pub notes: Vec<String>,
}

/// Most fields whose exact residual theory is computed without `--force`:
/// the big-integer normal forms and reductions of [`theory`] on all N
/// fields take work growing like N^2.5 to N^3 (benches/README.md, issue 19:
/// with `--pin`, 0.1-0.3 s of one core at 512 fields, 0.8-1.5 s at 1024).
/// Without `--pin`, an open array's flow (the dense path, limited at the
/// same 512 fields in `flow::limits`) takes a few seconds at the limit.
pub const FIELDS_LIMIT: usize = 512;

/// Refuse, before any work, an analysis above [`FIELDS_LIMIT`] fields
/// unless `force`, naming the estimate and the flag. Infinite arrays are
/// counted per wire ([`line`]) and are not limited here.
pub fn check_size(sys: &System, force: bool) -> Result<(), Error> {
    let lat = &sys.lattice;
    if force || lat.infinite || lat.n <= FIELDS_LIMIT {
        return Ok(());
    }
    let factor = (lat.n as f64 / FIELDS_LIMIT as f64).powi(3);
    Err(Error::refused(
        "--force",
        format!(
            "the exact theory of all {} fields ({} wire(s) of {}) takes work growing like N^3, about {factor:.0} times that of {FIELDS_LIMIT} fields (the limit, a few seconds); pass --force to run it anyway",
            lat.n, lat.wires, lat.cell
        ),
    ))
}

/// The gcd of the charges t.n of the pinned vectors (None if all vanish).
fn charge_modulus(t: &[BigInt], ns: &[Vec<BigInt>]) -> Option<BigInt> {
    use num_integer::Integer;
    let g = ns.iter().fold(BigInt::zero(), |g, n| {
        let q: BigInt = t.iter().zip(n).map(|(a, b)| a * b).sum();
        g.gcd(&q)
    });
    (!g.is_zero()).then_some(g)
}

/// The note for a pinned set that breaks charge conservation.
fn charge_note(g: &BigInt) -> String {
    format!(
        "the pinned terms carry charge (the gcd of their charges is {g}): charge is conserved only modulo {g}, so the charge vectors, fillings and quasiparticle charges shown depend on the basis chosen and are not a Hall response; ranks, K up to equivalence, det, signature and spins do not depend on it"
    )
}

fn window_error(msg: String) -> Error {
    Error::Input(InputError::new("command line", "--window", msg))
}

/// Analyse a pinned set; `window` is the `--window` value, if given.
pub fn analyse(sys: &System, pinned: &[Pinned], window: Option<usize>) -> Result<Analysis, Error> {
    let lat = &sys.lattice;
    let k = ZMat::from_i64(&lat.k, lat.n);
    let t = big(&lat.charge);
    let open = lat.boundary == Some(Boundary::Open);
    let mut notes = Vec::new();
    if let (Some(_), false) = (window, open) {
        return Err(no_ends(lat));
    }
    let (ls, ns) = pinned_vectors(pinned);
    let charge_modulus = charge_modulus(&t, &ns);
    if let Some(g) = &charge_modulus {
        notes.push(charge_note(g));
    }
    if lat.infinite {
        return infinite(sys, pinned, charge_modulus, notes);
    }
    let whole = whole_theory(lat, &k, &t, &ls, &ns)?;
    let r = whole.residual.pinned_rank;
    let (fully_gapped, gapped_basis) = bulk_gapped(sys, pinned, r);
    let (edges, used_window) = if open {
        open_ends(sys, (&k, &t), pinned, window, fully_gapped, &mut notes)?
    } else {
        (Vec::new(), None)
    };
    Ok(Analysis {
        fields: lat.n,
        gapped_pairs: r,
        gapless_modes: lat.n - 2 * r,
        fully_gapped,
        gapped_basis,
        whole: Some(whole),
        per_wire: None,
        window: used_window,
        edges,
        charge_modulus,
        notes,
    })
}

/// The error for `--window` on a model without ends.
fn no_ends(lat: &Lattice) -> Error {
    let what = match lat.boundary {
        _ if lat.infinite => "an infinite array (it has no ends)",
        Some(Boundary::Periodic) => "a periodic array",
        _ => "an explicit model (no wires)",
    };
    window_error(format!(
        "only an open array has ends to look at; this model is {what}"
    ))
}

/// The vectors l and the particle vectors n of every pinned translate.
fn pinned_vectors(pinned: &[Pinned]) -> (Vec<Vec<BigInt>>, Vec<Vec<BigInt>>) {
    let translates = || pinned.iter().flat_map(|p| p.translates.iter());
    (
        translates().map(|t| t.l.clone()).collect(),
        translates().map(|t| t.n.clone()).collect(),
    )
}

/// The residual theory of all fields, checked against the mode count.
fn whole_theory(
    lat: &Lattice,
    k: &ZMat,
    t: &[BigInt],
    ls: &[Vec<BigInt>],
    ns: &[Vec<BigInt>],
) -> Result<Theory, Error> {
    let all: Vec<usize> = (0..lat.n).collect();
    let res = theory::residual(k, t, &all, ls, ns).map_err(Error::Numerical)?;
    let r = res.pinned_rank;
    if res.k.rows + 2 * r != lat.n || res.extra_radical != 0 {
        return Err(Error::Numerical(format!(
            "internal inconsistency: {} fields, rank {r}, but {} residual modes",
            lat.n, res.k.rows
        )));
    }
    let end = match lat.boundary {
        Some(Boundary::Open) => End::Strip,
        Some(Boundary::Periodic) => End::Bulk,
        None => End::System,
    };
    let open = lat.boundary == Some(Boundary::Open);
    Ok(make_theory(end, open.then_some((0, lat.wires - 1)), res))
}

/// Is the bulk fully gapped (None: undecided), and the sentence saying why;
/// `r` is the rank of the pinned vectors on all fields.
fn bulk_gapped(sys: &System, pinned: &[Pinned], r: usize) -> (Option<bool>, String) {
    let n = sys.lattice.n;
    match sys.lattice.boundary {
        Some(Boundary::Open) => match periodic_closure(sys, pinned) {
            Ok((gapped, w, rank, n)) => (
                Some(gapped),
                format!(
                    "the same terms gap {rank} of {} pairs on a periodic array of {w} wires",
                    n / 2
                ),
            ),
            Err(why) => (None, why),
        },
        Some(Boundary::Periodic) => (Some(2 * r == n), format!("{r} of {} pairs gapped", n / 2)),
        None => (
            Some(2 * r == n),
            format!("{r} of {} pairs gapped (all fields)", n / 2),
        ),
    }
}

/// The window size to use at the ends (None: the array is too short for
/// the default, noted), or an error for a bad `--window`.
fn choose_window(
    lat: &Lattice,
    window: Option<usize>,
    need: usize,
    notes: &mut Vec<String>,
) -> Result<Option<usize>, Error> {
    match window {
        Some(0) => Err(window_error("a window must hold at least 1 wire".into())),
        Some(w) if w >= lat.wires => Err(window_error(format!(
            "a window of {w} wires covers the whole array of {} wires; it must be smaller (without --window the default of {need} wires is used, and the whole strip is always reported)",
            lat.wires
        ))),
        Some(w) => Ok(Some(w)),
        None if need < lat.wires => Ok(Some(need)),
        None => {
            notes.push(format!(
                "the array of {} wires is too short to separate its ends: a window must hold {need} wires; only the whole strip is reported",
                lat.wires
            ));
            Ok(None)
        }
    }
}

/// The theories at both ends of an open array, with the notes on them.
fn open_ends(
    sys: &System,
    (k, t): (&ZMat, &[BigInt]),
    pinned: &[Pinned],
    window: Option<usize>,
    fully_gapped: Option<bool>,
    notes: &mut Vec<String>,
) -> Result<(Vec<Theory>, Option<Window>), Error> {
    let lat = &sys.lattice;
    let need = default_window(lat, pinned);
    let Some(w) = choose_window(lat, window, need, notes)? else {
        return Ok((Vec::new(), None));
    };
    let edges = ends(sys, k, t, pinned, w, need)?;
    let used = Window {
        wires: w,
        default: window.is_none(),
    };
    for e in &edges {
        if e.residual.extra_radical > 0 {
            notes.push(format!(
                "at the {} end, {} extra null direction(s) at the window's inner cut commute with everything and were divided out; try a larger --window",
                e.end.word(),
                e.residual.extra_radical
            ));
        }
    }
    if fully_gapped == Some(true) && w + 1 < lat.wires {
        let wider = ends(sys, k, t, pinned, w + 1, need)?;
        for (a, b) in edges.iter().zip(&wider) {
            if summary(a) != summary(b) {
                notes.push(format!(
                    "the theory at the {} end changes between windows of {w} and {} wires; the window may be too small",
                    a.end.word(),
                    w + 1
                ));
            }
        }
    }
    if fully_gapped == Some(false) {
        notes.push(
            "the bulk is not fully gapped: each window also holds the gapless bulk modes on its wires".into(),
        );
    }
    Ok((edges, Some(used)))
}

/// An infinite array: the counts per wire from the rank over Q(z) of the
/// pinned families' N(z) ([`line`]); no theory of all fields.
fn infinite(
    sys: &System,
    pinned: &[Pinned],
    charge_modulus: Option<BigInt>,
    notes: Vec<String>,
) -> Result<Analysis, Error> {
    let pw =
        line::per_wire(&sys.lattice, pinned, sys.invariants.signature).map_err(Error::Numerical)?;
    let half = if pw.cell % 2 == 0 {
        format!("{}", pw.cell / 2)
    } else {
        format!("{}/2", pw.cell)
    };
    Ok(Analysis {
        fields: pw.cell,
        gapped_pairs: pw.rank,
        gapless_modes: pw.gapless(),
        fully_gapped: Some(2 * pw.rank == pw.cell),
        gapped_basis: format!(
            "the pinned families' N(z) have rank {} over Q(z): {} of {half} pairs per wire",
            pw.rank, pw.rank
        ),
        whole: None,
        per_wire: Some(pw),
        window: None,
        edges: Vec::new(),
        charge_modulus,
        notes,
    })
}

fn make_theory(end: End, wires: Option<(usize, usize)>, residual: Residual) -> Theory {
    let invariants = theory::invariants(&residual.k, &residual.charge);
    Theory {
        end,
        wires,
        residual,
        invariants,
    }
}

/// The basis-independent data compared between windows.
fn summary(
    t: &Theory,
) -> (
    usize,
    BigInt,
    (usize, usize),
    crate::math::rational::Rational,
) {
    let i = &t.invariants;
    (
        t.residual.k.rows,
        i.det.clone(),
        i.signature,
        i.filling.clone(),
    )
}

/// Smallest window holding a translate of every pinned term at both ends.
fn default_window(lat: &Lattice, pinned: &[Pinned]) -> usize {
    pinned
        .iter()
        .map(|p| {
            let left = p
                .translates
                .iter()
                .map(|t| t.wires.1 + 1)
                .min()
                .unwrap_or(0);
            let right = p
                .translates
                .iter()
                .map(|t| lat.wires - t.wires.0)
                .min()
                .unwrap_or(0);
            left.max(right)
        })
        .max()
        .unwrap_or(1)
        .max(1)
}

/// The theories of windows of w wires at both ends.
fn ends(
    sys: &System,
    k: &ZMat,
    t: &[BigInt],
    pinned: &[Pinned],
    w: usize,
    need: usize,
) -> Result<Vec<Theory>, Error> {
    let lat = &sys.lattice;
    let mut out = Vec::new();
    for (end, lo, hi) in [
        (End::Left, 0, w - 1),
        (End::Right, lat.wires - w, lat.wires - 1),
    ] {
        let touching = pinned
            .iter()
            .flat_map(|p| &p.translates)
            .filter(|tr| tr.wires.0 <= hi && tr.wires.1 >= lo);
        let inside: Vec<Vec<BigInt>> = touching
            .clone()
            .filter(|tr| tr.wires.0 >= lo && tr.wires.1 <= hi)
            .map(|tr| tr.n.clone())
            .collect();
        if inside.is_empty() {
            return Err(window_error(format!(
                "no pinned term lies within {w} wire(s) of the {} end; the pinned terms need {need} wires there (use --window {need} or more)",
                end.word()
            )));
        }
        let ls: Vec<Vec<BigInt>> = touching.map(|tr| tr.l.clone()).collect();
        let region: Vec<usize> = (lo * lat.cell..(hi + 1) * lat.cell).collect();
        let res = theory::residual(k, t, &region, &ls, &inside).map_err(Error::Numerical)?;
        out.push(make_theory(end, Some((lo, hi)), res));
    }
    Ok(out)
}

/// Is the bulk fully gapped? The same cell and pinned terms on a periodic
/// array (of the same wires, or of 2 span - 1 if that is more, so that no
/// term overlaps itself around the ring). Returns (gapped, wires, rank,
/// fields).
fn periodic_closure(
    sys: &System,
    pinned: &[Pinned],
) -> Result<(bool, usize, usize, usize), String> {
    let span = pinned.iter().map(|p| p.span()).max().unwrap_or(1);
    let w = sys.lattice.wires.max(2 * span - 1).max(1);
    let mut model = sys.model.clone();
    model.structure = Structure::Array {
        wires: Wires::Finite(w),
        boundary: Boundary::Periodic,
    };
    let lat =
        Lattice::build(&model).map_err(|e| format!("cannot build the periodic array: {e}"))?;
    let inv = &sys.invariants.cell_inverse;
    let mut ls = Vec::new();
    let mut ns = Vec::new();
    for p in pinned {
        for tr in lat.family(&p.cell_l).translates {
            let m = particles_of(&lat, inv, &tr);
            ns.push(m.iter().map(|r| r.to_integer()).collect::<Vec<BigInt>>());
            ls.push(big(&tr.l));
        }
    }
    for n in &ns {
        // Only the fields where n is non-zero contribute to n.l.
        let on: Vec<usize> = (0..n.len()).filter(|&i| !n[i].is_zero()).collect();
        for l in &ls {
            let phase = on
                .iter()
                .filter(|&&i| !l[i].is_zero())
                .fold(BigInt::zero(), |acc, &i| acc + &n[i] * &l[i]);
            if !phase.is_zero() {
                return Err(format!(
                    "undecided: the pinned terms do not commute on a periodic array of {w} wires"
                ));
            }
        }
    }
    let rank = crate::math::bareiss::rank(&ns);
    Ok((2 * rank == lat.n, w, rank, lat.n))
}
