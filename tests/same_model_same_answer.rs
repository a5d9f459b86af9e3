//! Same model, same answer (issue 13, items 1-3): an array and the same
//! wires written out as an explicit model (`[fields]`, one term per
//! translate, named `name@anchor`) must flow the same channels and give the
//! same ell* and final dimensions.
//!
//! - Closure range (item 1): the pairs closure keeps generated terms that
//!   span at most R wires, for arrays and for explicit models that group
//!   their fields by wire (`fields.wires`), the same way.
//! - Distinct operators (item 3): a generated term that repeats under a
//!   shift of the ring (bs + bs@3 on 6 wires) is one operator per distinct
//!   translate, with its full coupling.
//! - Momentum per translate (item 2): with `momentum_per_wire` a charged
//!   term's translate on wire j carries k_0 + j dk, dk = sum_c N_c b_c
//!   (derived: the fields of wire j carry k_c + j b_c, and the term's
//!   particle content on its wires sums to N_c per component).
//!
//! These are consistency tests between two code paths (no reference values
//! are involved); the cells, V blocks and couplings are arbitrary inputs,
//! random V drawn from a fixed-seed generator.

mod flowcommon;

use flowcommon::system;
use pinflow::core::system::System;
use pinflow::flow::{Closure, Flow, FlowOptions, FlowResult};

/// A fixed-seed generator (splitmix64), uniform in [0, 1).
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
    }

    fn range(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * self.next()
    }
}

/// (name, particles per wire offset, coupling, extra keys).
type TermDef = (&'static str, Vec<(usize, [i64; 2])>, f64, &'static str);

/// One spinless wire per cell, K = diag(1, -1), t = (1, 1).
struct Ring {
    wires: usize,
    periodic: bool,
    /// V blocks 0 and 1 (2 x 2).
    blocks: Vec<[[f64; 2]; 2]>,
    /// (name, particles per offset, coupling, extra keys).
    terms: Vec<TermDef>,
    /// (momentum of wire 0 per field, momentum per wire), optional.
    momenta: Option<([f64; 2], f64)>,
    /// Momentum period.
    period: Option<f64>,
}

impl Ring {
    fn boundary(&self) -> &'static str {
        if self.periodic {
            "periodic"
        } else {
            "open"
        }
    }

    fn array_text(&self) -> String {
        let mut s = format!(
            "[array]\nwires = {}\nboundary = \"{}\"\nK = [[1, 0], [0, -1]]\ncharge = [1, 1]\n",
            self.wires,
            self.boundary()
        );
        if let Some((k0, b)) = self.momenta {
            s += &format!(
                "momentum = [\"{:?}\", \"{:?}\"]\nmomentum_per_wire = [\"{b:?}\", \"{b:?}\"]\n",
                k0[0], k0[1]
            );
        }
        if let Some(g) = self.period {
            s += &format!("momentum_period = \"{g:?}\"\n");
        }
        s += "[array.V]\n";
        for (sep, b) in self.blocks.iter().enumerate() {
            s += &format!(
                "{sep} = [[\"{:?}\", \"{:?}\"], [\"{:?}\", \"{:?}\"]]\n",
                b[0][0], b[0][1], b[1][0], b[1][1]
            );
        }
        for (name, parts, y, extra) in &self.terms {
            let items: Vec<String> = parts
                .iter()
                .map(|(o, m)| format!("{o} = [{}, {}]", m[0], m[1]))
                .collect();
            s += &format!(
                "\n[[term]]\nname = \"{name}\"\nparticles = {{ {} }}\ncoupling = {y:?}\n{extra}\n",
                items.join(", ")
            );
        }
        s
    }

    /// The written-out form; `grouped` adds `fields.wires` and `boundary`.
    fn explicit_text(&self, grouped: bool) -> String {
        let n = 2 * self.wires;
        let mut v = vec![vec![0.0; n]; n];
        for (sep, b) in self.blocks.iter().enumerate() {
            for j in 0..self.wires {
                let j2 = if self.periodic {
                    (j + sep) % self.wires
                } else if j + sep < self.wires {
                    j + sep
                } else {
                    continue;
                };
                for a in 0..2 {
                    for c in 0..2 {
                        v[2 * j + a][2 * j2 + c] += b[a][c];
                        if sep > 0 {
                            v[2 * j2 + c][2 * j + a] += b[a][c];
                        }
                    }
                }
            }
        }
        let k: Vec<String> = (0..n)
            .map(|i| {
                let row: Vec<String> = (0..n)
                    .map(|j| {
                        if i != j {
                            "0"
                        } else if i % 2 == 0 {
                            "1"
                        } else {
                            "-1"
                        }
                        .to_string()
                    })
                    .collect();
                format!("[{}]", row.join(", "))
            })
            .collect();
        let vt: Vec<String> = v
            .iter()
            .map(|r| {
                let row: Vec<String> = r.iter().map(|x| format!("\"{x:?}\"")).collect();
                format!("[{}]", row.join(", "))
            })
            .collect();
        let mut s = format!(
            "[fields]\nK = [{}]\ncharge = [{}]\nV = [{}]\n",
            k.join(", "),
            vec!["1"; n].join(", "),
            vt.join(", ")
        );
        if grouped {
            let w: Vec<String> = (0..n).map(|f| (f / 2).to_string()).collect();
            s += &format!(
                "wires = [{}]\nboundary = \"{}\"\n",
                w.join(", "),
                self.boundary()
            );
        }
        if let Some((k0, b)) = self.momenta {
            let m: Vec<String> = (0..n)
                .map(|f| format!("\"{:?}\"", k0[f % 2] + (f / 2) as f64 * b))
                .collect();
            s += &format!("momentum = [{}]\n", m.join(", "));
        }
        if let Some(g) = self.period {
            s += &format!("momentum_period = \"{g:?}\"\n");
        }
        for (name, parts, y, extra) in &self.terms {
            let range = parts.iter().map(|p| p.0).max().unwrap_or(0);
            let anchors = if self.periodic {
                0..self.wires
            } else {
                0..self.wires - range
            };
            for a in anchors {
                let mut m = vec![0i64; n];
                for (o, p) in parts {
                    let w = (a + o) % self.wires;
                    m[2 * w] += p[0];
                    m[2 * w + 1] += p[1];
                }
                let ms: Vec<String> = m.iter().map(|x| x.to_string()).collect();
                s += &format!(
                    "\n[[term]]\nname = \"{name}@{a}\"\nparticles = [{}]\ncoupling = {y:?}\n{extra}\n",
                    ms.join(", ")
                );
            }
        }
        s
    }
}

fn opts(range: Option<usize>) -> FlowOptions {
    FlowOptions {
        closure: Closure::Pairs,
        closure_range: range,
        rtol: 1e-12,
        atol: 1e-15,
        max_steps: 1_000_000,
        ..FlowOptions::default()
    }
}

/// Flow at the default point, with the plan's channel vectors of every
/// result row.
fn flow(sys: &System, o: FlowOptions) -> (FlowResult, Vec<Vec<Vec<i64>>>) {
    let f = Flow::new(sys, o);
    let p = sys.model.params.defaults().to_vec();
    let r = f.run(&p).expect("flow runs");
    let vectors = r
        .terms
        .iter()
        .map(|t| {
            let ch = f.plan.channels.iter().find(|c| c.name == t.name).unwrap();
            ch.family.translates.iter().map(|t| t.l.clone()).collect()
        })
        .collect();
    (r, vectors)
}

/// Every row of the explicit flow matches the array's row whose family
/// holds its vector (or minus it): final dimension and |y| to `tol`; the
/// two flows have the same ell* and outcome, and the array's rows cover
/// exactly the explicit ones.
fn assert_same(array: &System, explicit: &System, o: FlowOptions, tol: f64, what: &str) {
    let (ra, va) = flow(array, o.clone());
    let (re, ve) = flow(explicit, o);
    assert_eq!(ra.outcome, re.outcome, "{what}: outcome");
    match (ra.ell_star, re.ell_star) {
        (Some(a), Some(e)) => assert!((a - e).abs() < tol, "{what}: ell* {a} vs {e}"),
        (a, e) => assert_eq!(a, e, "{what}: ell*"),
    }
    let mut used = vec![0usize; ra.terms.len()];
    for (row, vecs) in re.terms.iter().zip(&ve) {
        let l = &vecs[0];
        let neg: Vec<i64> = l.iter().map(|x| -x).collect();
        let i = va
            .iter()
            .position(|fam| fam.iter().any(|t| *t == *l || *t == neg))
            .unwrap_or_else(|| panic!("{what}: {} has no array channel", row.name));
        used[i] += 1;
        let a = &ra.terms[i];
        assert!(
            (a.dimension - row.dimension).abs() < tol,
            "{what}: {} {} vs {} {}",
            a.name,
            a.dimension,
            row.name,
            row.dimension
        );
        assert!(
            (a.coupling - row.coupling).abs() < tol,
            "{what}: coupling of {} {} vs {} {}",
            a.name,
            a.coupling,
            row.name,
            row.coupling
        );
    }
    // Each array row stands for as many explicit rows as it has distinct
    // translates.
    for (i, n) in used.iter().enumerate() {
        assert_eq!(
            *n,
            va[i].len(),
            "{what}: translates of {}",
            ra.terms[i].name
        );
    }
}

fn random_ring(rng: &mut Rng, wires: usize) -> Ring {
    let lam = rng.range(-0.4, 0.4);
    let b1 = [
        [rng.range(-0.1, 0.1), rng.range(-0.1, 0.1)],
        [rng.range(-0.1, 0.1), rng.range(-0.1, 0.1)],
    ];
    Ring {
        wires,
        periodic: true,
        blocks: vec![[[1.0, lam], [lam, 1.0]], b1],
        terms: vec![
            ("bs", vec![(0, [1, -1])], rng.range(0.05, 0.2), ""),
            (
                "cdw",
                vec![(0, [1, -1]), (1, [-1, 1])],
                rng.range(0.05, 0.2),
                "",
            ),
            (
                "pair_hop",
                vec![(0, [1, 1]), (1, [-1, -1])],
                rng.range(0.05, 0.2),
                "",
            ),
        ],
        momenta: None,
        period: None,
    }
}

/// Item 1: random rings of 4-7 wires, default closure range and the whole
/// ring; the array and its written-out form (fields grouped by wire) agree
/// to 1e-9. Before the closure range, the explicit form kept every
/// generated term and the array only those up to the widest listed term
/// plus one wire, and the two disagreed (ell* by ~1e-2).
#[test]
fn random_rings_flow_like_their_written_out_form() {
    let mut rng = Rng(13);
    for wires in [4, 5, 6, 7, 6] {
        let ring = random_ring(&mut rng, wires);
        let array = system(&ring.array_text());
        let explicit = system(&ring.explicit_text(true));
        for range in [None, Some(wires)] {
            let what = format!("{wires} wires, closure range {range:?}");
            assert_same(&array, &explicit, opts(range), 1e-9, &what);
        }
    }
}

/// Item 1: the range is reported; an explicit model without wires has none
/// and says so.
#[test]
fn closure_range_is_reported() {
    let ring = Ring {
        wires: 5,
        periodic: true,
        blocks: vec![[[1.0, 0.2], [0.2, 1.0]]],
        terms: vec![("cdw", vec![(0, [1, -1]), (1, [-1, 1])], 0.1, "")],
        momenta: None,
        period: None,
    };
    let (r, _) = flow(&system(&ring.array_text()), opts(None));
    // cdw spans 2 wires: the default range is 3.
    assert_eq!(r.closure_range, Some(3));
    assert!(r.plan_notes.iter().any(|n| n.contains("closure range 3")));
    let (r, _) = flow(&system(&ring.explicit_text(false)), opts(Some(2)));
    assert_eq!(r.closure_range, None);
    assert!(r.plan_notes.iter().any(|n| n.contains("not applied")));
    let (r, v) = flow(&system(&ring.explicit_text(true)), opts(Some(2)));
    assert_eq!(r.closure_range, Some(2));
    // cdw@j +- cdw@k span 3 wires or more: with range 2 only the listed
    // terms and 2*cdw@j (when below the closure bound) can remain.
    assert!(v.iter().all(|fam| fam.len() == 1));
    assert!(
        r.terms
            .iter()
            .all(|t| t.name.starts_with("cdw@") || t.name.starts_with("2*cdw@")),
        "{:?}",
        names(&r)
    );
    let (r, _) = flow(&system(&ring.explicit_text(true)), opts(Some(3)));
    assert!(
        r.terms.iter().any(|t| t.name == "cdw@0+cdw@1"),
        "{:?}",
        names(&r)
    );
}

fn names(r: &FlowResult) -> Vec<&str> {
    r.terms.iter().map(|t| t.name.as_str()).collect()
}

/// Item 3: a listed term spanning 5 wires of a 6-wire ring makes the
/// default range the whole ring, so every generated term flows in both
/// forms; bs + bs@3 and bs - bs@3 repeat under a shift by 3 wires. Before
/// the fix the array carried them as 6 translates with half the coupling
/// each (ell* 1.55330 against 1.55325); on 7 wires nothing repeats and the
/// two forms agreed already. The explicit form here has no wires (no range).
#[test]
fn half_ring_repeats_are_one_operator_with_its_full_coupling() {
    for wires in [6, 7] {
        let ring = Ring {
            wires,
            periodic: true,
            blocks: vec![[[1.0, 0.3], [0.3, 1.0]], [[0.1, 0.05], [0.02, 0.1]]],
            terms: vec![
                ("bs", vec![(0, [1, -1])], 0.1, ""),
                (
                    "far",
                    vec![(0, [1, -1]), (2, [1, -1]), (4, [-1, 1])],
                    0.05,
                    "",
                ),
            ],
            momenta: None,
            period: None,
        };
        let array = system(&ring.array_text());
        let explicit = system(&ring.explicit_text(false));
        let o = opts(Some(wires));
        assert_same(
            &array,
            &explicit,
            o.clone(),
            1e-9,
            &format!("{wires} wires"),
        );
        let (r, v) = flow(&array, o);
        if wires == 6 {
            let i = r.terms.iter().position(|t| t.name == "bs+bs@3").unwrap();
            assert_eq!(v[i].len(), 3, "bs+bs@3: 3 distinct operators on 6 wires");
            let j = r.terms.iter().position(|t| t.name == "bs-bs@3").unwrap();
            assert_eq!(v[j].len(), 3, "bs-bs@3: 3 distinct operators on 6 wires");
        }
    }
}

fn flux_ring(wires: usize, periodic: bool, period: Option<f64>) -> Ring {
    Ring {
        wires,
        periodic,
        blocks: vec![[[1.0, -0.4], [-0.4, 1.0]], [[0.1, 0.05], [0.02, 0.1]]],
        terms: vec![
            ("bs", vec![(0, [1, -1])], 0.05, ""),
            ("pair", vec![(0, [1, 1])], 0.05, "allowed_charge = 2"),
            ("hop", vec![(0, [1, 0]), (1, [-1, 0])], 0.02, ""),
        ],
        momenta: Some(([0.05, -0.05], 0.04)),
        period,
    }
}

/// Item 2, dims: the pair term (N = (1, 1)) gains dk = 2 b = 0.08 per
/// translate and is not momentum conserving as a family; the neutral terms
/// gain nothing. Before, dims gave no dk and called the pair's family
/// conserved whenever its representative was.
#[test]
fn dims_reports_momentum_per_translate() {
    let ring = flux_ring(5, false, None);
    let sys = system(&ring.array_text());
    let p = sys.model.params.defaults().to_vec();
    let r = pinflow::dims::DimsReport::build(&sys, &p).unwrap();
    let row = |n: &str| r.terms.iter().find(|t| t.name == n).unwrap();
    assert!((row("pair").momentum_per_translate.unwrap() - 0.08).abs() < 1e-12);
    assert_eq!(row("pair").momentum_conserved, Some(false));
    // The representative sits on wire 2 (the middle of an open array of
    // 5): m = (1, 1) there gives (kF + 2 b) + (-kF + 2 b) = 4 b = 0.16.
    assert!((row("pair").momentum.unwrap() - 0.16).abs() < 1e-12);
    assert_eq!(row("bs").momentum_per_translate, Some(0.0));
    assert_eq!(row("hop").momentum_per_translate, Some(0.0));
    assert!(r.notes.iter().any(|n| n.contains("momentum_per_translate")));
}

/// Item 2, flow: an open flux array flows every translate with its own
/// cut-off, exactly as its written-out form (same names name@wire).
/// Translate j of the pair has k_j = 4 b + (j - 2) 2 b = 2 j b (derived
/// above), so ell_k = ln(1/(2 j b)) and none for j = 0.
#[test]
fn open_flux_array_flows_each_translate_like_its_written_out_form() {
    for wires in [5, 6] {
        let ring = flux_ring(wires, false, None);
        let array = system(&ring.array_text());
        let explicit = system(&ring.explicit_text(true));
        let (ra, _) = flow(&array, opts(None));
        let (re, _) = flow(&explicit, opts(None));
        assert_eq!(names(&ra), names(&re));
        assert_eq!(ra.outcome, re.outcome);
        assert!((ra.ell_star.unwrap() - re.ell_star.unwrap()).abs() < 1e-9);
        for (a, e) in ra.terms.iter().zip(&re.terms) {
            assert!((a.dimension - e.dimension).abs() < 1e-9, "{}", a.name);
            assert!((a.coupling - e.coupling).abs() < 1e-9, "{}", a.name);
            assert_eq!(a.momentum.is_some(), e.momentum.is_some());
            assert!(
                (a.momentum.unwrap() - e.momentum.unwrap()).abs() < 1e-12,
                "{}",
                a.name
            );
        }
        for j in 0..wires {
            let t = ra
                .terms
                .iter()
                .find(|t| t.name == format!("pair@{j}"))
                .unwrap();
            let k = 2.0 * j as f64 * 0.04;
            assert!((t.momentum.unwrap() - k).abs() < 1e-12, "pair@{j}");
            match t.ell_k {
                None => assert_eq!(j, 0),
                Some(l) => assert!((l - (1.0 / k).ln()).abs() < 1e-12),
            }
        }
        // A generated term's momentum is the sum of its parents'.
        let t = ra.terms.iter().find(|t| t.name == "pair@1-pair@3").unwrap();
        assert!((t.momentum.unwrap() - (0.08 - 0.24)).abs() < 1e-12);
    }
}

/// Item 2, rings: the translates' momenta close around a periodic ring of
/// W wires only when W dk is a multiple of the momentum period; otherwise
/// the flow is refused, naming the term. With G = W b = 0.2 on 5 wires
/// (so W dk = 2 G, and the wire momenta themselves close, which the
/// written-out form needs for the translates across the seam) it flows,
/// translates one by one, like the written-out form.
#[test]
fn periodic_flux_ring_closes_or_is_refused() {
    let open = flux_ring(5, true, None);
    let sys = system(&open.array_text());
    let p = sys.model.params.defaults().to_vec();
    let err = Flow::new(&sys, opts(None)).run(&p).unwrap_err().to_string();
    assert!(
        err.contains("term \"pair\"") && err.contains("do not close"),
        "{err}"
    );
    let closed = flux_ring(5, true, Some(0.2));
    let array = system(&closed.array_text());
    let explicit = system(&closed.explicit_text(true));
    let (ra, _) = flow(&array, opts(None));
    let (re, _) = flow(&explicit, opts(None));
    assert_eq!(names(&ra), names(&re));
    assert!((ra.ell_star.unwrap() - re.ell_star.unwrap()).abs() < 1e-9);
    for (a, e) in ra.terms.iter().zip(&re.terms) {
        assert!((a.dimension - e.dimension).abs() < 1e-9, "{}", a.name);
        let (ka, ke) = (a.momentum.unwrap(), e.momentum.unwrap());
        assert!((ka - ke).abs() < 1e-12, "{}: {ka} vs {ke}", a.name);
    }
}

/// Item 2, infinite arrays: a term whose momentum changes per translate
/// cannot flow as a translation-invariant family; refused, naming it.
#[test]
fn infinite_flux_array_refuses_charged_terms() {
    let text = "[array]\nwires = \"infinite\"\nK = [[1, 0], [0, -1]]\ncharge = [1, 1]\nmomentum = [\"0.05\", \"-0.05\"]\nmomentum_per_wire = [\"0.04\", \"0.04\"]\n[array.V]\n0 = [[\"1\", \"0.2\"], [\"0.2\", \"1\"]]\n\n[[term]]\nname = \"pair\"\nparticles = [1, 1]\nallowed_charge = 2\n";
    let sys = system(text);
    let p = sys.model.params.defaults().to_vec();
    let err = Flow::new(&sys, FlowOptions::default())
        .run(&p)
        .unwrap_err()
        .to_string();
    assert!(
        err.contains("term \"pair\"") && err.contains("infinite array"),
        "{err}"
    );
}

/// `closure_range` is read from the [flow] table and checked.
#[test]
fn closure_range_key_and_flag_are_checked() {
    let ring = flux_ring(5, false, None);
    let bad = format!("{}\n[flow]\nclosure_range = 0\n", ring.array_text());
    let model = pinflow::model::Model::parse(&bad, "m.toml").unwrap();
    let over = pinflow::flow::options::FlowOverrides::default();
    let err = FlowOptions::resolve(&model, &over).unwrap_err().to_string();
    assert!(err.contains("flow.closure_range"), "{err}");
    let good = format!("{}\n[flow]\nclosure_range = 4\n", ring.array_text());
    let model = pinflow::model::Model::parse(&good, "m.toml").unwrap();
    assert_eq!(
        FlowOptions::resolve(&model, &over).unwrap().closure_range,
        Some(4)
    );
    let over = pinflow::flow::options::FlowOverrides {
        closure_range: Some(-1),
        ..Default::default()
    };
    let err = FlowOptions::resolve(&model, &over).unwrap_err().to_string();
    assert!(err.contains("--closure-range"), "{err}");
}
