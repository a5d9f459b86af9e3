//! The report of `pinflow edges`: the pinned set, the number of gapped
//! pairs, whether the bulk is fully gapped, and the theory at each end and
//! of the whole system (K matrix, charge vector, filling, signature,
//! |det K|, quasiparticle types, generators as particle content per wire).
//!
//! JSON fields fixed by the issue: `gapped_pairs`, `gapless_modes`,
//! `fully_gapped`, `edges` (each with `end`, `k_matrix`, `charge`,
//! `filling` as "p/q" or "p", `det`). Integers that do not fit 64 bits are
//! written as strings.
//!
//! Infinite arrays (as in `dims`): `fields` is the cell size, `wires` is
//! null, `infinite` is true, `gapped_pairs` and `gapless_modes` are per wire
//! and equal `gapped_pairs_per_wire` (null for finite arrays) and
//! `per_wire.gapless_modes`; `whole` is null and `edges` empty (no K
//! matrix of the gapless modes is computed: see `edges::line`); a pinned
//! family's `translates` is null (one per wire) and its `n_of_z` gives
//! N(z).
//!
//! Invariants: the report is built once from an [`super::Analysis`];
//! rendering only formats it, and the field names above are interfaces.

use num_bigint::BigInt;
use num_traits::{Signed, ToPrimitive};
use serde::{Serialize, Serializer};

use super::pins::{Selection, Source};
use super::{Analysis, Theory};
use crate::core::system::System;
use crate::math::rational::fmt_rational;
use crate::output::{Report, Table};

/// An exact integer: a JSON number when it fits 64 bits, else a string.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Int(pub BigInt);

impl Serialize for Int {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        match self.0.to_i64() {
            Some(i) => s.serialize_i64(i),
            None => s.serialize_str(&self.0.to_string()),
        }
    }
}

fn ints(v: &[BigInt]) -> Vec<Int> {
    v.iter().cloned().map(Int).collect()
}

/// Particle content on one wire.
#[derive(Debug, Clone, Serialize)]
pub struct WirePart {
    /// Wire index (0 for explicit models).
    pub wire: usize,
    /// Particle numbers of the wire's fields.
    pub particles: Vec<Int>,
}

/// One basis vector of a residual lattice.
#[derive(Debug, Clone, Serialize)]
pub struct Generator {
    /// Particle vector over all fields.
    pub particles: Vec<Int>,
    /// The same, on the wires where it is non-zero.
    pub wires: Vec<WirePart>,
    /// Its charge t.n.
    pub charge: Int,
    /// Its norm n^T K n (the diagonal entry of the K matrix).
    pub norm: Int,
}

/// One quasiparticle type.
#[derive(Debug, Clone, Serialize)]
pub struct QuasiparticleRow {
    /// A representative l in the basis of the generators.
    pub l: Vec<Int>,
    /// Charge t^T K^-1 l of the representative ("p/q").
    pub charge: String,
    /// Spin (1/2) l^T K^-1 l of the representative ("p/q").
    pub spin: String,
    /// Charge modulo 1.
    pub charge_mod_1: String,
    /// Spin modulo `spin_modulus` of the theory.
    pub spin_mod: String,
}

/// The theory of one region.
#[derive(Debug, Clone, Serialize)]
pub struct TheoryReport {
    /// "left", "right", "strip", "bulk" or "system".
    pub end: String,
    /// First and last wire of the region (arrays).
    pub wires: Option<[usize; 2]>,
    /// Number of gapless modes (the size of K).
    pub modes: usize,
    /// K matrix in the reduced basis.
    pub k_matrix: Vec<Vec<Int>>,
    /// Charge vector in the same basis.
    pub charge: Vec<Int>,
    /// t^T K^-1 t as "p/q" (or "p").
    pub filling: String,
    /// det K (1 for no modes).
    pub det: Int,
    /// |det K|: the number of quasiparticle types.
    pub abs_det: Int,
    /// [n+, n-].
    pub signature: [usize; 2],
    /// n+ - n-.
    pub chiral_central_charge: i64,
    /// "chiral (right-moving)", "chiral (left-moving)", "non-chiral" or "none".
    pub chirality: String,
    /// The quasiparticle group, e.g. "Z_3" or "trivial".
    pub group: String,
    /// "1" (even K) or "1/2" (odd K: fermionic, spins defined mod 1/2).
    pub spin_modulus: String,
    /// Every type is listed (else the trivial type and one per generator).
    pub all_types_listed: bool,
    /// Quasiparticle types, sorted by charge and spin modulo their periods.
    pub quasiparticles: Vec<QuasiparticleRow>,
    /// Basis of the residual lattice as particle content.
    pub generators: Vec<Generator>,
    /// Rank of the pinned vectors inside the region.
    pub pinned_inside: usize,
}

/// A pinned family.
#[derive(Debug, Clone, Serialize)]
pub struct PinnedRow {
    /// Term name.
    pub name: String,
    /// Number of translates pinned (null for an infinite array: one per wire).
    pub translates: Option<usize>,
    /// Widest support, in wires.
    pub span: usize,
    /// Particle content of its first translate.
    pub particles: Vec<WirePart>,
    /// Infinite arrays: N(z) = Σ_j n_j z^j, n_j its particle vector on wire
    /// j from its first wire, as "(1, -1) + (-1, 1) z^2" (null otherwise).
    pub n_of_z: Option<String>,
}

/// Infinite arrays: what the pinned set does per wire.
#[derive(Debug, Clone, Serialize)]
pub struct PerWireRow {
    /// Fields per wire n_c.
    pub fields: usize,
    /// r: right-left pairs gapped per wire, the rank over Q(z) of the
    /// pinned families' N(z).
    pub gapped_pairs: usize,
    /// n_c - 2r.
    pub gapless_modes: usize,
    /// [n+ - r, n- - r]: the signature of the gapless modes per wire.
    pub gapless_signature: [usize; 2],
    /// Their chirality (as in the theories of finite arrays).
    pub gapless_chirality: String,
    /// Rank of the pinned vectors at q = 0 (z = 1).
    pub rank_at_q_0: usize,
    /// Rank of the pinned vectors at q = pi (z = -1).
    pub rank_at_q_pi: usize,
    /// Bound on the degree of the minors of the N(z) matrix: the rank over
    /// Q(z) is the largest rank at any degree_bound + 1 distinct points.
    pub degree_bound: usize,
    /// Integer points z = 2, 3, ... evaluated (fewer than degree_bound + 1
    /// when the largest possible rank was reached).
    pub points_evaluated: usize,
}

/// A listed term that was not pinned.
#[derive(Debug, Clone, Serialize)]
pub struct SkippedRow {
    /// Term name.
    pub name: String,
    /// Why.
    pub reason: String,
}

/// The window at the ends.
#[derive(Debug, Clone, Serialize)]
pub struct WindowRow {
    /// Wires at each end.
    pub wires: usize,
    /// Chosen by default.
    pub default: bool,
}

/// The whole `edges` report.
#[derive(Debug, Clone, Serialize)]
pub struct EdgesReport {
    /// Model name.
    pub model: String,
    /// Parameter point (used by the flow when no `--pin` is given).
    pub parameters: serde_json::Map<String, serde_json::Value>,
    /// The point as "name=value, ..." for people.
    #[serde(skip)]
    pub point: String,
    /// Number of fields (infinite arrays: of one wire).
    pub fields: usize,
    /// Wires (finite arrays; null for explicit models and infinite arrays).
    pub wires: Option<usize>,
    /// "open", "periodic", "infinite" or "explicit".
    pub boundary: String,
    /// The array is infinite (the counts are then per wire).
    pub infinite: bool,
    /// "--pin" or "flow".
    pub chosen_by: String,
    /// The flow's winner (when chosen by the flow).
    pub winner: Option<String>,
    /// Scale at which it reached strong coupling.
    pub ell_star: Option<f64>,
    /// The pinned families.
    pub pinned: Vec<PinnedRow>,
    /// Terms considered and left out of the pinned set (none since the
    /// flow's stages choose it).
    pub skipped: Vec<SkippedRow>,
    /// r = rank of the pinned vectors (infinite arrays: per wire).
    pub gapped_pairs: usize,
    /// N - 2r (infinite arrays: per wire).
    pub gapless_modes: usize,
    /// Infinite arrays: r per wire (null for finite arrays and explicit models).
    pub gapped_pairs_per_wire: Option<usize>,
    /// Infinite arrays: the per-wire data (null otherwise).
    pub per_wire: Option<PerWireRow>,
    /// The bulk is fully gapped (null: undecided).
    pub fully_gapped: Option<bool>,
    /// How `fully_gapped` was decided.
    pub fully_gapped_basis: String,
    /// The window at the ends (open arrays).
    pub window: Option<WindowRow>,
    /// The theories at the two ends of an open array.
    pub edges: Vec<TheoryReport>,
    /// The theory of all fields (both edges of a strip together; what a
    /// periodic array leaves gapless; null for an infinite array).
    pub whole: Option<TheoryReport>,
    /// Null when the pinned terms are neutral; otherwise the gcd g of their
    /// charges: charge is conserved only modulo g, and the charge vectors
    /// and fillings of the theories depend on the basis.
    pub charge_conserved_modulo: Option<Int>,
    /// Remarks.
    pub notes: Vec<String>,
}

impl EdgesReport {
    /// Assemble the report.
    pub fn new(sys: &System, point: &[f64], sel: &Selection, a: &Analysis) -> EdgesReport {
        let lat = &sys.lattice;
        let infinite = lat.infinite;
        let (chosen_by, winner, ell_star) = match &sel.source {
            Source::Flags => ("--pin".to_string(), None, None),
            Source::Flow { winner, ell_star } => {
                ("flow".to_string(), Some(winner.clone()), *ell_star)
            }
        };
        let mut notes = a.notes.clone();
        notes.extend(basis_note(a));
        let per_wire_row = a.per_wire.as_ref().map(|pw| {
            notes.extend(line_notes(pw));
            per_wire_row(pw)
        });
        EdgesReport {
            model: sys.model.name.clone(),
            parameters: sys.model.params.json_point(point),
            point: sys.model.params.describe(point),
            fields: a.fields,
            wires: lat.boundary.filter(|_| !infinite).map(|_| lat.wires),
            boundary: boundary_word(sys).to_string(),
            infinite,
            chosen_by,
            winner,
            ell_star,
            pinned: pinned_rows(sys, sel, a),
            skipped: sel
                .skipped
                .iter()
                .map(|(n, r)| SkippedRow {
                    name: n.clone(),
                    reason: r.clone(),
                })
                .collect(),
            gapped_pairs: a.gapped_pairs,
            gapless_modes: a.gapless_modes,
            gapped_pairs_per_wire: a.per_wire.as_ref().map(|pw| pw.rank),
            per_wire: per_wire_row,
            fully_gapped: a.fully_gapped,
            fully_gapped_basis: a.gapped_basis.clone(),
            window: a.window.map(|w| WindowRow {
                wires: w.wires,
                default: w.default,
            }),
            edges: a.edges.iter().map(|t| theory_report(sys, t)).collect(),
            whole: a.whole.as_ref().map(|t| theory_report(sys, t)),
            charge_conserved_modulo: a.charge_modulus.clone().map(Int),
            notes,
        }
    }

    fn theories(&self) -> impl Iterator<Item = &TheoryReport> {
        self.edges.iter().chain(self.whole.as_ref())
    }
}

/// The pieces of the text facts.
impl EdgesReport {
    /// How the pinned set was chosen.
    fn chosen_by_fact(&self) -> String {
        if self.chosen_by != "flow" {
            return "--pin".to_string();
        }
        let ell = self
            .ell_star
            .map(|l| format!(" at ell* = {}", crate::output::short(l)))
            .unwrap_or_default();
        format!(
            "the flow at {}: \"{}\" reaches strong coupling first{ell}; pinned: every family its successive stages pin",
            self.point,
            self.winner.clone().unwrap_or_default()
        )
    }

    /// The pinned terms, each with its translates and particle content.
    fn pinned_fact(&self) -> String {
        let arrays = self.wires.is_some() || self.infinite;
        self.pinned
            .iter()
            .map(|p| {
                if let (Some(t), true) = (p.translates, arrays) {
                    format!(
                        "{} ({t} translates over {} wire(s), e.g. {})",
                        p.name,
                        p.span,
                        fmt_parts(&p.particles, true)
                    )
                } else if arrays {
                    format!(
                        "{} (one translate per wire, over {} wire(s), e.g. {}; N(z) = {})",
                        p.name,
                        p.span,
                        fmt_parts(&p.particles, true),
                        p.n_of_z.as_deref().unwrap_or("-")
                    )
                } else {
                    format!("{} {}", p.name, fmt_parts(&p.particles, false))
                }
            })
            .collect::<Vec<_>>()
            .join("; ")
    }

    /// The number of fields and how they are arranged.
    fn fields_fact(&self) -> String {
        match self.wires {
            _ if self.infinite => format!("{} per wire (infinite array)", self.fields),
            Some(w) => format!(
                "{} ({w} wires x {}, {})",
                self.fields,
                self.fields / w.max(1),
                self.boundary
            ),
            None => self.fields.to_string(),
        }
    }

    /// The gapped pairs and the gapless modes (per wire for an infinite array).
    fn count_facts(&self) -> (String, String) {
        let Some(pw) = &self.per_wire else {
            return (
                self.gapped_pairs.to_string(),
                self.gapless_modes.to_string(),
            );
        };
        let half = if pw.fields % 2 == 0 {
            (pw.fields / 2).to_string()
        } else {
            format!("{}/2", pw.fields)
        };
        let modes = if pw.gapless_modes == 0 {
            "0 per wire".to_string()
        } else {
            format!(
                "{} per wire (signature ({}, {}), {}); their K matrix is not computed for the infinite array",
                pw.gapless_modes,
                pw.gapless_signature[0],
                pw.gapless_signature[1],
                pw.gapless_chirality
            )
        };
        (format!("{} per wire (of {half})", pw.gapped_pairs), modes)
    }
}

/// One row per pinned term.
fn pinned_rows(sys: &System, sel: &Selection, a: &Analysis) -> Vec<PinnedRow> {
    sel.pinned
        .iter()
        .enumerate()
        .map(|(i, p)| PinnedRow {
            name: p.name.clone(),
            translates: (!sys.lattice.infinite).then_some(p.translates.len()),
            span: p.span(),
            particles: per_wire(sys, &p.translates[0].n),
            n_of_z: a.per_wire.as_ref().map(|pw| pw.polynomials[i].describe()),
        })
        .collect()
}

/// "infinite", "open", "periodic" or "explicit".
fn boundary_word(sys: &System) -> &'static str {
    match sys.lattice.boundary {
        _ if sys.lattice.infinite => "infinite",
        Some(crate::model::Boundary::Open) => "open",
        Some(crate::model::Boundary::Periodic) => "periodic",
        None => "explicit",
    }
}

/// The note on what the K matrices are and what does not depend on their
/// basis (when a theory of all fields was computed).
fn basis_note(a: &Analysis) -> Option<String> {
    let invariant = if a.charge_modulus.is_some() {
        "det, signature and the quasiparticle spins (mod 1, or 1/2 for odd K)"
    } else {
        "det, signature, filling and the quasiparticle charges (mod 1) and spins (mod 1, or 1/2 for odd K)"
    };
    a.whole.is_some().then(|| format!(
        "K matrices are Gram matrices n^T K n' of the particle vectors that commute with every pinned term, modulo the pinned ones, in a reduced basis; {invariant} do not depend on that basis."
    ))
}

/// The per-wire counts of an infinite array.
fn per_wire_row(pw: &super::line::PerWire) -> PerWireRow {
    PerWireRow {
        fields: pw.cell,
        gapped_pairs: pw.rank,
        gapless_modes: pw.gapless(),
        gapless_signature: [pw.signature.0, pw.signature.1],
        gapless_chirality: chirality(pw.signature).to_string(),
        rank_at_q_0: pw.rank_at_q0,
        rank_at_q_pi: pw.rank_at_pi,
        degree_bound: pw.degree_bound,
        points_evaluated: pw.points,
    }
}

fn per_wire(sys: &System, n: &[BigInt]) -> Vec<WirePart> {
    let lat = &sys.lattice;
    (0..lat.wires)
        .filter_map(|w| {
            let part = &n[w * lat.cell..(w + 1) * lat.cell];
            part.iter()
                .any(|x| x.sign() != num_bigint::Sign::NoSign)
                .then(|| WirePart {
                    wire: w,
                    particles: ints(part),
                })
        })
        .collect()
}

/// The chirality of modes of signature (n+, n-).
fn chirality(signature: (usize, usize)) -> &'static str {
    match signature {
        (0, 0) => "none",
        (_, 0) => "chiral (right-moving)",
        (0, _) => "chiral (left-moving)",
        _ => "non-chiral",
    }
}

/// The notes of an infinite array: what is per wire, the certificate of the
/// rank, what is not computed, and modes left at q = 0 or pi alone.
fn line_notes(pw: &super::line::PerWire) -> Vec<String> {
    let certificate = if pw.points <= pw.degree_bound {
        format!(
            "it reached the largest rank possible, min(fields per wire, pinned families) = {}, at z = {} (exact rational elimination)",
            pw.cell.min(pw.polynomials.len()),
            pw.points + 1
        )
    } else {
        format!(
            "it is the largest rank of the matrix at the {} integer points z = 2..{}, more than the at most {} roots of a non-zero minor (exact rational elimination)",
            pw.points,
            pw.points + 1,
            pw.degree_bound
        )
    };
    let mut notes = vec![format!(
        "infinite array: the counts are per wire in the thermodynamic limit, independent of any ring size: the number of right-left pairs gapped per wire is the rank over Q(z) of the matrix of the pinned families' particle vectors N(z) = sum_j n_j z^j (z = e^(iq)), and {certificate}. The terms were placed and checked (local, null, commuting) on a periodic stand-in ring, which is exact for such per-term and pairwise data; no count is taken on it."
    )];
    if pw.gapless() > 0 {
        notes.push(format!(
            "infinite array: the {} gapless mode(s) per wire have signature ({}, {}); their K matrix is not computed for the infinite array (on a ring it depends on the ring's size).",
            pw.gapless(),
            pw.signature.0,
            pw.signature.1
        ));
    }
    for (q, r) in [("0", pw.rank_at_q0), ("pi", pw.rank_at_pi)] {
        if r < pw.rank {
            notes.push(format!(
                "infinite array: at the single momentum q = {q} the pinned vectors have rank {r}, not {}: {} more right-left pair(s) stay gapless at that momentum alone, a set of momenta of measure zero that adds no mode per wire (on a ring of W wires such modes spread over every wire, and their number depends on W).",
                pw.rank,
                pw.rank - r
            ));
        }
    }
    notes
}

fn theory_report(sys: &System, t: &Theory) -> TheoryReport {
    let inv = &t.invariants;
    let res = &t.residual;
    let d = res.k.rows;
    let (np, nm) = inv.signature;
    let chirality = chirality(inv.signature).to_string();
    let group = if inv.group.is_empty() {
        "trivial".to_string()
    } else {
        inv.group
            .iter()
            .map(|g| format!("Z_{g}"))
            .collect::<Vec<_>>()
            .join(" x ")
    };
    TheoryReport {
        end: t.end.word().to_string(),
        wires: t.wires.map(|(a, b)| [a, b]),
        modes: d,
        k_matrix: res.k.to_rows().iter().map(|r| ints(r)).collect(),
        charge: ints(&res.charge),
        filling: fmt_rational(&inv.filling),
        det: Int(inv.det.clone()),
        abs_det: Int(inv.det.abs()),
        signature: [np, nm],
        chiral_central_charge: np as i64 - nm as i64,
        chirality,
        group,
        spin_modulus: if inv.odd { "1/2" } else { "1" }.to_string(),
        all_types_listed: inv.all_types,
        quasiparticles: inv
            .quasiparticles
            .iter()
            .map(|q| QuasiparticleRow {
                l: ints(&q.l),
                charge: fmt_rational(&q.charge),
                spin: fmt_rational(&q.spin),
                charge_mod_1: fmt_rational(&q.charge_mod),
                spin_mod: fmt_rational(&q.spin_mod),
            })
            .collect(),
        generators: res
            .generators
            .iter()
            .enumerate()
            .map(|(i, g)| Generator {
                particles: ints(g),
                wires: per_wire(sys, g),
                charge: Int(res.charge[i].clone()),
                norm: Int(res.k.at(i, i).clone()),
            })
            .collect(),
        pinned_inside: res.pinned_rank,
    }
}

fn fmt_ints(v: &[Int]) -> String {
    format!(
        "({})",
        v.iter()
            .map(|x| x.0.to_string())
            .collect::<Vec<_>>()
            .join(", ")
    )
}

/// A K matrix for a table: "(k)" for one mode; when `compact`, "diag(...)"
/// for a diagonal one and a pointer to the generator table beyond 3 modes.
fn fmt_matrix(m: &[Vec<Int>], compact: bool) -> String {
    let diagonal = m.iter().enumerate().all(|(i, r)| {
        r.iter()
            .enumerate()
            .all(|(j, x)| i == j || x.0.sign() == num_bigint::Sign::NoSign)
    });
    match m.len() {
        0 => "none".to_string(),
        1 => fmt_ints(&m[0]),
        _ if compact && diagonal => format!(
            "diag{}",
            fmt_ints(
                &m.iter()
                    .enumerate()
                    .map(|(i, r)| r[i].clone())
                    .collect::<Vec<_>>()
            )
        ),
        d if compact && d > 3 => format!("{d} x {d}: rows in the generator table"),
        _ => format!(
            "[{}]",
            m.iter()
                .map(|r| format!(
                    "[{}]",
                    r.iter()
                        .map(|x| x.0.to_string())
                        .collect::<Vec<_>>()
                        .join(", ")
                ))
                .collect::<Vec<_>>()
                .join(", ")
        ),
    }
}

fn fmt_parts(parts: &[WirePart], arrays: bool) -> String {
    if parts.is_empty() {
        return "0".to_string();
    }
    parts
        .iter()
        .map(|p| {
            if arrays {
                format!("wire {}: {}", p.wire, fmt_ints(&p.particles))
            } else {
                fmt_ints(&p.particles)
            }
        })
        .collect::<Vec<_>>()
        .join("; ")
}

fn describe(t: &TheoryReport) -> String {
    match (t.end.as_str(), t.wires) {
        ("left", Some([a, b])) | ("right", Some([a, b])) => {
            format!("{} end (wires {a}-{b})", t.end)
        }
        ("strip", _) => "whole strip".to_string(),
        ("bulk", _) => "bulk".to_string(),
        _ => "system".to_string(),
    }
}

impl Report for EdgesReport {
    fn title(&self) -> String {
        format!("Pinned phase and edges: {}", self.model)
    }

    fn facts(&self) -> Vec<(String, String)> {
        let mut f = vec![
            ("chosen by".to_string(), self.chosen_by_fact()),
            ("pinned".to_string(), self.pinned_fact()),
        ];
        for s in &self.skipped {
            f.push((format!("not pinned: {}", s.name), s.reason.clone()));
        }
        f.push(("fields".to_string(), self.fields_fact()));
        if let Some(g) = &self.charge_conserved_modulo {
            f.push((
                "charge".to_string(),
                format!(
                    "conserved only modulo {} (charged pinned terms): fillings below depend on the basis",
                    g.0
                ),
            ));
        }
        let (pairs, modes) = self.count_facts();
        f.push(("gapped right-left pairs".to_string(), pairs));
        f.push(("gapless modes left".to_string(), modes));
        let gapped = match self.fully_gapped {
            Some(true) => "yes",
            Some(false) => "no",
            None => "undecided",
        };
        f.push((
            "bulk fully gapped".to_string(),
            format!("{gapped} ({})", self.fully_gapped_basis),
        ));
        if let Some(w) = &self.window {
            let how = if w.default {
                "default: the smallest window holding a translate of every pinned term at each end"
            } else {
                "--window"
            };
            f.push((
                "window".to_string(),
                format!("{} wire(s) at each end ({how})", w.wires),
            ));
        }
        f
    }

    fn tables(&self) -> Vec<Table> {
        let mut tables = vec![self.summary(true)];
        let arrays = self.wires.is_some() || self.infinite;
        for t in self.theories() {
            if t.modes == 0 {
                continue;
            }
            let mut g = Table::new(
                &format!("{}: generators as particle content", describe(t)),
                &["generator", "K row", "charge", "particles"],
            );
            for (i, gen) in t.generators.iter().enumerate() {
                g.push(vec![
                    format!("g{}", i + 1),
                    fmt_ints(&t.k_matrix[i]),
                    gen.charge.0.to_string(),
                    fmt_parts(&gen.wires, arrays),
                ]);
            }
            tables.push(g);
            if t.abs_det.0 > BigInt::from(1) {
                let listed = if t.all_types_listed {
                    "all types"
                } else {
                    "trivial type and generators only"
                };
                let spin_col = format!("spin mod {}", t.spin_modulus);
                let mut q = Table::new(
                    &format!(
                        "{}: quasiparticles ({}, {listed}; l in the basis g)",
                        describe(t),
                        t.group
                    ),
                    &["l", "charge", "spin", "charge mod 1", &spin_col],
                );
                for x in &t.quasiparticles {
                    q.push(vec![
                        fmt_ints(&x.l),
                        x.charge.clone(),
                        x.spin.clone(),
                        x.charge_mod_1.clone(),
                        x.spin_mod.clone(),
                    ]);
                }
                tables.push(q);
            }
        }
        tables
    }

    /// The summary with the shared column names of `docs/columns.md`
    /// (`end`, `k_matrix`, `abs_det` as in the JSON).
    fn csv_table(&self) -> Table {
        let mut t = self.summary(false);
        for h in &mut t.headers {
            *h = match h.as_str() {
                "theory" => "end",
                "K" => "k_matrix",
                "|det K|" => "abs_det",
                other => other,
            }
            .to_string();
        }
        t
    }

    fn notes(&self) -> Vec<String> {
        self.notes.clone()
    }
}

impl EdgesReport {
    /// One row per theory (K in full unless `compact`).
    fn summary(&self, compact: bool) -> Table {
        let mut t = Table::new(
            "gapless theories",
            &[
                "theory",
                "wires",
                "modes",
                "K",
                "charge",
                "filling",
                "signature",
                "chirality",
                "|det K|",
                "group",
            ],
        );
        for th in self.theories() {
            t.push(vec![
                th.end.clone(),
                th.wires
                    .map(|[a, b]| format!("{a}-{b}"))
                    .unwrap_or_else(|| "-".into()),
                th.modes.to_string(),
                fmt_matrix(&th.k_matrix, compact),
                if th.modes == 0 {
                    "none".into()
                } else {
                    fmt_ints(&th.charge)
                },
                th.filling.clone(),
                format!("({}, {})", th.signature[0], th.signature[1]),
                th.chirality.clone(),
                th.abs_det.0.to_string(),
                th.group.clone(),
            ]);
        }
        if let Some(pw) = &self.per_wire {
            // No K matrix, charge vector, filling or |det K| per wire: see
            // `edges::line`.
            t.push(vec![
                "per wire".into(),
                "-".into(),
                pw.gapless_modes.to_string(),
                if pw.gapless_modes == 0 {
                    "none".into()
                } else {
                    "not computed".into()
                },
                "-".into(),
                "-".into(),
                format!("({}, {})", pw.gapless_signature[0], pw.gapless_signature[1]),
                pw.gapless_chirality.clone(),
                "-".into(),
                "-".into(),
            ]);
        }
        t
    }
}
