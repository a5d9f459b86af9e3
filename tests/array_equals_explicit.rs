//! A wire array (`[array]`) must give exactly what the same system written
//! out by hand (`[fields]`) gives: dimensions, spins, charges, locality and
//! commutation. The explicit model text is generated here from the array's
//! description, with the forward-scattering blocks placed by hand and every
//! translate of every term written as its own explicit term `name@anchor`.
//!
//! Conventions (docs/physics.md section 5): field = wire * n_c + c; block
//! n of V couples wire j (rows) to wire j + n (columns) and V^(-n) = V^(n)T;
//! a periodic array wraps wire indices modulo W, an open array keeps the
//! couplings and term translates that fit.
//!
//! The cells, blocks and terms below are arbitrary inputs of a consistency
//! test (no reference values are involved).

mod common;

use common::{assert_close, report_at, term, term_index};
use pinflow::dims::DimsReport;

#[derive(Clone, Copy, PartialEq, Debug)]
enum Bc {
    Periodic,
    Open,
}

struct TermDef {
    name: &'static str,
    /// "particles" or "vector".
    content: &'static str,
    /// (wire offset, integer vector over the cell).
    parts: Vec<(usize, Vec<i64>)>,
}

impl TermDef {
    fn range(&self) -> usize {
        self.parts.iter().map(|p| p.0).max().unwrap()
    }
}

struct Spec {
    params: Vec<(&'static str, f64)>,
    cell_k: Vec<Vec<i64>>,
    charge: Vec<i64>,
    /// V blocks by wire separation: expressions in the parameters.
    blocks: Vec<Vec<Vec<&'static str>>>,
    terms: Vec<TermDef>,
}

fn ints(v: &[i64]) -> String {
    common::toml_int_vector(v)
}

fn strings(v: &[String]) -> String {
    let items: Vec<String> = v.iter().map(|s| format!("\"{s}\"")).collect();
    format!("[{}]", items.join(", "))
}

fn params_text(spec: &Spec) -> String {
    let mut s = String::from("[params]\n");
    for (name, value) in &spec.params {
        s.push_str(&format!("{name} = {value:?}\n"));
    }
    s
}

fn bc_name(bc: Bc) -> &'static str {
    match bc {
        Bc::Periodic => "periodic",
        Bc::Open => "open",
    }
}

/// The array form.
fn array_text(spec: &Spec, wires: usize, bc: Bc) -> String {
    let mut s = format!("name = \"array\"\n\n{}\n", params_text(spec));
    s.push_str(&format!(
        "[array]\nwires = {wires}\nboundary = \"{}\"\nK = {}\ncharge = {}\n\n[array.V]\n",
        bc_name(bc),
        common::toml_int_matrix(&spec.cell_k),
        ints(&spec.charge)
    ));
    for (sep, block) in spec.blocks.iter().enumerate() {
        let rows: Vec<String> = block
            .iter()
            .map(|r| strings(&r.iter().map(|x| x.to_string()).collect::<Vec<_>>()))
            .collect();
        s.push_str(&format!("{sep} = [{}]\n", rows.join(", ")));
    }
    for t in &spec.terms {
        let value = if t.parts.len() == 1 && t.parts[0].0 == 0 {
            ints(&t.parts[0].1) // plain list: offset 0 only
        } else {
            let items: Vec<String> = t
                .parts
                .iter()
                .map(|(off, v)| format!("{off} = {}", ints(v)))
                .collect();
            format!("{{ {} }}", items.join(", "))
        };
        s.push_str(&format!(
            "\n[[term]]\nname = \"{}\"\n{} = {value}\n",
            t.name, t.content
        ));
    }
    s
}

/// Anchors at which a term of this range has a translate.
fn anchors(wires: usize, bc: Bc, range: usize) -> std::ops::Range<usize> {
    match bc {
        Bc::Periodic => 0..wires,
        Bc::Open => 0..wires - range,
    }
}

fn explicit_name(name: &str, anchor: usize) -> String {
    format!("{name}@{anchor}")
}

/// The same system written out: K, t and V over all fields, one term per
/// translate.
fn explicit_text(spec: &Spec, wires: usize, bc: Bc) -> String {
    let c = spec.cell_k.len();
    let n = c * wires;
    let mut k = vec![vec![0i64; n]; n];
    let mut charge = vec![0i64; n];
    for w in 0..wires {
        for a in 0..c {
            charge[w * c + a] = spec.charge[a];
            for b in 0..c {
                k[w * c + a][w * c + b] = spec.cell_k[a][b];
            }
        }
    }
    // V entries as lists of contributions (expressions), summed in the text.
    let mut v: Vec<Vec<Vec<String>>> = vec![vec![Vec::new(); n]; n];
    for (sep, block) in spec.blocks.iter().enumerate() {
        for j in 0..wires {
            let j2 = match bc {
                Bc::Periodic => (j + sep) % wires,
                Bc::Open if j + sep < wires => j + sep,
                Bc::Open => continue,
            };
            for a in 0..c {
                for b in 0..c {
                    let x = block[a][b];
                    if x == "0" {
                        continue;
                    }
                    v[j * c + a][j2 * c + b].push(format!("({x})"));
                    if sep > 0 {
                        v[j2 * c + b][j * c + a].push(format!("({x})"));
                    }
                }
            }
        }
    }
    let v_rows: Vec<String> = v
        .iter()
        .map(|row| {
            let cells: Vec<String> = row
                .iter()
                .map(|parts| {
                    if parts.is_empty() {
                        "0".to_string()
                    } else {
                        parts.join(" + ")
                    }
                })
                .collect();
            strings(&cells)
        })
        .collect();
    let mut s = format!("name = \"explicit\"\n\n{}\n", params_text(spec));
    s.push_str(&format!(
        "[fields]\nK = {}\ncharge = {}\nV = [{}]\n",
        common::toml_int_matrix(&k),
        ints(&charge),
        v_rows.join(",\n     ")
    ));
    for t in &spec.terms {
        for anchor in anchors(wires, bc, t.range()) {
            let mut dense = vec![0i64; n];
            for (off, vec) in &t.parts {
                let wire = (anchor + off) % wires;
                for (i, x) in vec.iter().enumerate() {
                    dense[wire * c + i] += x;
                }
            }
            s.push_str(&format!(
                "\n[[term]]\nname = \"{}\"\n{} = {}\n",
                explicit_name(t.name, anchor),
                t.content,
                ints(&dense)
            ));
        }
    }
    s
}

/// Compare the array report with the explicit one at one parameter point.
fn compare(spec: &Spec, wires: usize, bc: Bc, overrides: &[(&str, f64)]) {
    let ctx = format!("{} array of {wires} wires at {overrides:?}", bc_name(bc));
    let arr = report_at(&array_text(spec, wires, bc), overrides);
    let exp_text = explicit_text(spec, wires, bc);
    let exp = report_at(&exp_text, overrides);

    assert_eq!(arr.fields, exp.fields, "{ctx}: fields");
    assert_eq!(arr.signature, exp.signature, "{ctx}: signature");
    assert_eq!(arr.filling, exp.filling, "{ctx}: filling");
    assert_eq!(arr.det_k, exp.det_k, "{ctx}: det K");
    assert_eq!(arr.chiralities, exp.chiralities, "{ctx}: chiralities");
    for (x, y) in arr.velocities.iter().zip(&exp.velocities) {
        assert_close(&format!("{ctx}: velocity"), *x, *y, 1e-12);
    }

    let anchors_of = |t: &TermDef| anchors(wires, bc, t.range()).collect::<Vec<_>>();
    for (a, t) in spec.terms.iter().enumerate() {
        let row = &arr.terms[a];
        assert_eq!(row.name, t.name);
        let all = anchors_of(t);
        assert!(all.contains(&row.wire), "{ctx}: representative anchor");
        let e = term(&exp, &explicit_name(t.name, row.wire));
        let what = format!("{ctx}, term {}", t.name);
        assert_eq!(row.vector, e.vector, "{what}: vector l");
        assert_eq!(row.particles_exact, e.particles_exact, "{what}: particles");
        assert_close(&format!("{what}: Delta"), row.dimension, e.dimension, 1e-12);
        assert_eq!(row.spin, e.spin, "{what}: spin");
        assert_eq!(row.charge, e.charge, "{what}: charge");
        assert_eq!(row.local, e.local, "{what}: local");
        assert_eq!(row.null, e.null, "{what}: null");
        assert_eq!(row.charge_ok, e.charge_ok, "{what}: charge_ok");
        assert_eq!(row.relevant, e.relevant, "{what}: relevant");

        // Every translate has the same spin and charge; in a periodic array
        // the same dimension too (translation invariance).
        for &anchor in &all {
            let tr = term(&exp, &explicit_name(t.name, anchor));
            assert_eq!(tr.spin, row.spin, "{what}@{anchor}: spin");
            assert_eq!(tr.charge, row.charge, "{what}@{anchor}: charge");
            if bc == Bc::Periodic {
                assert_close(
                    &format!("{what}@{anchor}: Delta"),
                    tr.dimension,
                    row.dimension,
                    1e-12,
                );
            }
        }

        // Commutation with every family, from the explicit mutual phases.
        for (b, tb) in spec.terms.iter().enumerate() {
            let ib = term_index(&exp, &explicit_name(t.name, row.wire));
            // The report pairs a's representative with b's translate at the
            // same anchor, or b's representative when b has none there.
            let b_anchors = anchors_of(tb);
            let b_anchor = if b_anchors.contains(&row.wire) {
                row.wire
            } else {
                arr.terms[b].wire
            };
            let jb = term_index(&exp, &explicit_name(tb.name, b_anchor));
            assert_eq!(
                arr.commutation[a][b], exp.commutation[ib][jb],
                "{what}: phase with {}",
                tb.name
            );
            let all_zero = all.iter().all(|&i| {
                b_anchors.iter().all(|&j| {
                    let x = term_index(&exp, &explicit_name(t.name, i));
                    let y = term_index(&exp, &explicit_name(tb.name, j));
                    exp.commutation[x][y] == "0"
                })
            });
            assert_eq!(
                arr.commutes[a][b], all_zero,
                "{what}: commutes with {}",
                tb.name
            );
            if a == b {
                assert_eq!(row.self_commuting, all_zero, "{what}: self-commuting");
            }
        }
    }
    check_commutation_is_symmetric(&exp);
}

/// Mutual phases are symmetric: l_a^T K^-1 l_b = l_b^T K^-1 l_a.
fn check_commutation_is_symmetric(r: &DimsReport) {
    for (i, row) in r.commutation.iter().enumerate() {
        for (j, x) in row.iter().enumerate() {
            assert_eq!(*x, r.commutation[j][i], "commutation[{i}][{j}]");
        }
    }
}

/// One spinless wire per cell, K = diag(1, -1), blocks 0, 1 and 2.
fn spinless() -> Spec {
    Spec {
        params: vec![("lambda", 0.3), ("w", 0.08), ("u", 0.03)],
        cell_k: vec![vec![1, 0], vec![0, -1]],
        charge: vec![1, 1],
        blocks: vec![
            vec![vec!["1", "lambda"], vec!["lambda", "1"]],
            vec![vec!["w", "w/2"], vec!["2*w/3", "w"]],
            vec![vec!["u", "0"], vec!["u/2", "u"]],
        ],
        terms: vec![
            TermDef {
                name: "back",
                content: "particles",
                parts: vec![(0, vec![1, -1])],
            },
            TermDef {
                name: "tunnel3",
                content: "particles",
                parts: vec![(0, vec![-2, 1]), (1, vec![-1, 2])],
            },
            TermDef {
                name: "cdw",
                content: "particles",
                parts: vec![(0, vec![1, -1]), (1, vec![-1, 1])],
            },
            TermDef {
                name: "next_hop",
                content: "particles",
                parts: vec![(0, vec![1, 0]), (2, vec![-1, 0])],
            },
            TermDef {
                name: "pair_gap",
                content: "particles",
                parts: vec![(0, vec![1, 1]), (2, vec![-1, -1])],
            },
            TermDef {
                name: "vec",
                content: "vector",
                parts: vec![(0, vec![1, 0]), (1, vec![0, 1])],
            },
        ],
    }
}

/// Two channels per cell (4 fields), one of them with a non-diagonal K, so
/// that l = K m and fractional (non-local) vectors are exercised.
fn two_channel() -> Spec {
    Spec {
        params: vec![("lambda", 0.3), ("g", 0.15), ("w", 0.05), ("u", 0.02)],
        cell_k: vec![
            vec![1, 0, 0, 0],
            vec![0, -1, 0, 0],
            vec![0, 0, 3, 1],
            vec![0, 0, 1, -3],
        ],
        charge: vec![1, 1, 1, 1],
        blocks: vec![
            vec![
                vec!["1", "lambda", "g", "0"],
                vec!["lambda", "1", "0", "g"],
                vec!["g", "0", "1", "lambda/2"],
                vec!["0", "g", "lambda/2", "1"],
            ],
            vec![
                vec!["w", "w/2", "0", "w/3"],
                vec!["0", "w", "w/4", "0"],
                vec!["w/5", "0", "w", "0"],
                vec!["0", "0", "w/2", "w"],
            ],
            vec![
                vec!["u", "0", "0", "0"],
                vec!["0", "u", "0", "0"],
                vec!["0", "0", "u", "u/2"],
                vec!["0", "0", "0", "u"],
            ],
        ],
        terms: vec![
            TermDef {
                name: "intra",
                content: "particles",
                parts: vec![(0, vec![1, -1, 0, 0])],
            },
            TermDef {
                name: "hop1",
                content: "particles",
                parts: vec![(0, vec![1, 0, 0, 0]), (1, vec![-1, 0, 0, 0])],
            },
            TermDef {
                name: "mixed2",
                content: "particles",
                parts: vec![(0, vec![-1, 0, 1, 0]), (2, vec![0, 1, 0, -1])],
            },
            TermDef {
                name: "frac",
                content: "vector",
                parts: vec![(0, vec![0, 0, 1, 0]), (1, vec![0, 0, 0, 1])],
            },
            TermDef {
                name: "channel_flip",
                content: "particles",
                parts: vec![(0, vec![1, 0, -1, 0]), (1, vec![0, -1, 0, 1])],
            },
        ],
    }
}

#[test]
fn periodic_spinless_array_equals_explicit() {
    let spec = spinless();
    for wires in [5, 6] {
        compare(&spec, wires, Bc::Periodic, &[]);
        compare(&spec, wires, Bc::Periodic, &[("lambda", -0.2), ("w", 0.12)]);
    }
}

#[test]
fn periodic_two_channel_array_equals_explicit() {
    let spec = two_channel();
    for wires in [5, 6] {
        compare(&spec, wires, Bc::Periodic, &[]);
        compare(&spec, wires, Bc::Periodic, &[("g", -0.1), ("u", 0.04)]);
    }
}

#[test]
fn open_arrays_equal_explicit() {
    for wires in [3, 5, 6] {
        compare(&spinless(), wires, Bc::Open, &[]);
        compare(&two_channel(), wires, Bc::Open, &[("lambda", 0.5)]);
    }
}

#[test]
fn the_generated_explicit_model_has_every_translate() {
    // Guard on the generator itself: a periodic array of W wires has W
    // translates of every term, an open one W - range.
    let spec = spinless();
    let exp = report_at(&explicit_text(&spec, 5, Bc::Periodic), &[]);
    assert_eq!(exp.terms.len(), 5 * spec.terms.len());
    let exp = report_at(&explicit_text(&spec, 5, Bc::Open), &[]);
    let expected: usize = spec.terms.iter().map(|t| 5 - t.range()).sum();
    assert_eq!(exp.terms.len(), expected);
    // The fractional term of the two-channel cell is not local, both ways.
    let arr = report_at(&array_text(&two_channel(), 5, Bc::Periodic), &[]);
    assert!(!term(&arr, "frac").local);
}

/// The distinct scaling dimensions (rounded to 1e-9) of every operator a
/// hunt lists with Delta <= `bound`, any charge and spin, within `range`
/// wires (None: an explicit model, all of its fields).
fn hunted_dimensions(toml: &str, bound: f64, range: Option<usize>) -> Vec<i64> {
    use pinflow::search::{hunt, ChargeFilter, HuntOptions, SpinFilter};
    let sys = common::system(toml);
    let point = sys.model.point_with(&[], "test").unwrap();
    let opts = HuntOptions {
        max_dim: bound,
        charge: ChargeFilter::Any,
        spin: SpinFilter::Any,
        range,
        ..HuntOptions::default()
    };
    let report = hunt(&sys, &point, &opts).expect("hunt");
    let mut dims: Vec<i64> = report
        .operators
        .iter()
        .map(|op| (op.dimension * 1e9).round() as i64)
        .collect();
    dims.sort_unstable();
    dims.dedup();
    dims
}

#[test]
fn a_periodic_array_hunts_the_dimensions_of_its_explicit_form() {
    // The ring's hunt takes D of its window from D(q) on the W momenta
    // (per-q cell problems); the explicit model's, from the dense fixed
    // point of all fields: two routes to the same numbers. An explicit
    // model has no translations, so its hunt lists every placement of an
    // operator; the distinct dimensions must agree.
    let spec = spinless();
    let wires = 6;
    let ring = hunted_dimensions(&array_text(&spec, wires, Bc::Periodic), 2.5, Some(2));
    let explicit = hunted_dimensions(&explicit_text(&spec, wires, Bc::Periodic), 2.5, None);
    assert!(ring.len() > 3, "{ring:?}");
    for d in &ring {
        assert!(
            explicit.contains(d),
            "ring dimension {d}e-9 not among {explicit:?}"
        );
    }
}
