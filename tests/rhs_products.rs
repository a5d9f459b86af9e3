//! Issue 15, "every result equal to today's": the D feedback formed as
//! matrix products (`src/flow/background.rs`, `Background::evaluate`) against
//! the per-channel route it replaced (one rank-one update per channel and
//! translate, kept as `FlowRhs::derivative_reference`).
//!
//! Three comparisons, all consistency checks between code paths (no
//! physics reference values are involved; the random models' cells, V
//! blocks and couplings are arbitrary inputs from a fixed-seed generator):
//! - the right-hand side itself, at the bare fixed point with every coupling
//!   set non-zero (so every null channel feeds back), to 1e-9 relative to
//!   the largest entry of its part (couplings, D);
//! - whole flows integrated with either right-hand side, to 1e-9;
//! - the bundled models' flows against the JSON that `pinflow flow MODEL
//!   --format json` wrote (`tests/reference/flows/`), to 1e-9 on ell*, the
//!   gap, every term's final coupling, phase and dimension, and the stages.
//!   First captured from the binary of commit 6dc5e7e (matrix products);
//!   captured again when the flow moved from `ode_solvers`' Dormand-Prince
//!   5(4) to its own DOP853 with a per-group error norm
//!   (`src/math/dop853.rs`), after checking that the new values are closer
//!   to the tight references below than the old ones (largest change 1.7e-8
//!   in ell*, 3.7e-9 in a final dimension; benches/README.md).
//!
//! And one convergence check, against an independent integrator: the same
//! flows computed by the binary of commit 00c1d58 (`ode_solvers`'
//! Dormand-Prince 5(4)) with `--rtol 1e-12` (`tests/reference/flows_tight/`).
//! At the default rtol 1e-8 the flow must come within [`DEFAULT_TOL`] of
//! them (ell*, stages, dimensions; couplings and the gap e^-ell within
//! [`COUPLING_TOL`], they are exponentials of the flow); at rtol 1e-12
//! within [`TIGHT_TOL`].
//!
//! Not compared: `ell_end` (the end of the integrator's last step, which
//! moves with step-size decisions: e.g. 1.8e-6 relative on
//! `flows/halperin_331_strip.toml`), `steps`, and the rounding measures
//! `dkd_drift` and the quadrature error estimates.

mod flowcommon;

use std::path::Path;

use flowcommon::{num, system};
use pinflow::core::system::System;
use pinflow::flow::background::DenseRoute;
use pinflow::flow::{Flow, FlowOptions, FlowResult};
use pinflow::math::banded;
use serde_json::Value;

/// Relative tolerance of every comparison here.
const TOL: f64 = 1e-9;

/// Largest |a - b| over a part, relative to the largest |b| of that part.
fn rel_diff(a: &[f64], b: &[f64]) -> f64 {
    let scale = b.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    let diff = a
        .iter()
        .zip(b)
        .fold(0.0f64, |m, (x, y)| m.max((x - y).abs()));
    if scale == 0.0 {
        diff
    } else {
        diff / scale
    }
}

/// The two right-hand sides agree on the couplings' part and on D's part.
fn check_rhs(sys: &System, what: &str) {
    let flow = Flow::new(sys, FlowOptions::default());
    let point = sys.model.params.defaults().to_vec();
    let (fast, reference, nc) = flow.rhs_routes(&point).expect("rhs at the bare point");
    let nw = 2 * nc;
    let dw = rel_diff(&fast[..nw], &reference[..nw]);
    let dd = rel_diff(&fast[nw..], &reference[nw..]);
    assert!(dw <= TOL && dd <= TOL, "{what}: couplings {dw:e}, D {dd:e}");
    let scale = reference[nw..].iter().fold(0.0f64, |m, x| m.max(x.abs()));
    assert!(
        scale > 0.0 || !any_null(&flow),
        "{what}: no feedback to compare"
    );
}

fn any_null(flow: &Flow) -> bool {
    flow.plan.channels.iter().any(|c| c.null())
}

/// The default flow (rtol 1e-8) against the rtol 1e-12 references: ell*,
/// stages and dimensions. The flow's error control holds the local error of
/// every step to rtol; its largest distance on the bundled models is 1.9e-9
/// (ell* of `flows/sliding_array.toml`), the former integrator's 1.5e-8.
const DEFAULT_TOL: f64 = 5e-9;
/// The same for the final couplings and the gap (largest 1.6e-8; formerly
/// 1e-7).
const COUPLING_TOL: f64 = 3e-8;
/// Both integrators at rtol 1e-12 (largest difference 1.4e-9, a coupling of
/// `benches/models/array32.toml`; 8.4e-11 on ell*).
const TIGHT_TOL: f64 = 3e-9;

/// Relative difference with a floor of 1e-6 for tiny values (decayed
/// couplings).
fn close_to(a: f64, b: f64, tol: f64) -> bool {
    (a - b).abs() <= tol * a.abs().max(b.abs()).max(1e-6)
}

fn opt_close_to(a: Option<f64>, b: Option<f64>, tol: f64) -> bool {
    match (a, b) {
        (Some(a), Some(b)) => close_to(a, b, tol),
        (None, None) => true,
        _ => false,
    }
}

/// The compared fields of two results agree (see the module docs).
fn same_result(a: &FlowResult, b: &FlowResult, what: &str) {
    same_result_to(a, b, what, TOL, TOL);
}

/// [`same_result`] to `tol`, the final couplings to `coupling_tol`.
fn same_result_to(a: &FlowResult, b: &FlowResult, what: &str, tol: f64, coupling_tol: f64) {
    assert_eq!(a.outcome, b.outcome, "{what}: outcome");
    assert_eq!(a.winner, b.winner, "{what}: winner");
    assert!(
        opt_close_to(a.ell_star, b.ell_star, tol),
        "{what}: ell* {:?} {:?}",
        a.ell_star,
        b.ell_star
    );
    assert!(
        opt_close_to(a.ell_last, b.ell_last, tol),
        "{what}: ell_last"
    );
    assert_eq!(a.terms.len(), b.terms.len(), "{what}: terms");
    for (s, t) in a.terms.iter().zip(&b.terms) {
        assert_eq!(s.name, t.name, "{what}");
        for (x, y, field, tol) in [
            (s.coupling, t.coupling, "coupling", coupling_tol),
            (s.dimension, t.dimension, "dimension", tol),
            (s.phase, t.phase, "phase", tol),
        ] {
            assert!(close_to(x, y, tol), "{what}: {} {field} {x} vs {y}", s.name);
        }
    }
    assert_eq!(a.stages.len(), b.stages.len(), "{what}: stages");
    for (s, t) in a.stages.iter().zip(&b.stages) {
        assert!(
            close_to(s.ell, t.ell, tol),
            "{what}: stage at {} vs {}",
            s.ell,
            t.ell
        );
        assert_eq!(s.pinned, t.pinned, "{what}");
    }
}

/// A flow with the products and with the reference right-hand side.
fn check_flows(sys: &System, what: &str) {
    let point = sys.model.params.defaults().to_vec();
    let opts = FlowOptions {
        record: false,
        ..FlowOptions::default()
    };
    let fast = Flow::new(sys, opts.clone()).run(&point).expect("flow");
    let mut reference = Flow::new(sys, opts);
    reference.reference_rhs = true;
    let reference = reference.run(&point).expect("reference flow");
    same_result(&fast, &reference, what);
}

fn root() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

/// The bundled models and the benchmark array.
fn bundled() -> Vec<(String, System)> {
    let mut paths: Vec<_> = std::fs::read_dir(root().join("flows"))
        .expect("flows/")
        .map(|e| e.expect("entry").path())
        .filter(|p| p.extension().is_some_and(|e| e == "toml"))
        .collect();
    paths.sort();
    paths.push(root().join("benches/models/array32.toml"));
    paths
        .into_iter()
        .map(|p| {
            let name = p.file_stem().expect("name").to_string_lossy().into_owned();
            (name, System::load(&p).expect("bundled model"))
        })
        .collect()
}

#[test]
fn bundled_models_rhs_products_equal_reference_route() {
    for (name, sys) in bundled() {
        check_rhs(&sys, &name);
    }
}

#[test]
fn bundled_models_flows_equal_reference_route() {
    for (name, sys) in bundled() {
        check_flows(&sys, &name);
    }
}

/// The JSON number at a path (null -> None).
fn number(v: &Value, key: &str) -> Option<f64> {
    v.get(key).and_then(Value::as_f64)
}

/// Tolerances of a comparison with captured outputs: (ell*, stages and
/// dimensions; couplings and phases).
type Tols = (f64, f64);

/// A captured output `old` (JSON) and a new result agree within `tol`.
fn same_as_captured(name: &str, old: &Value, new: &FlowResult, (tol, coupling_tol): Tols) {
    let new_json = serde_json::to_value(new).expect("serialise");
    assert_eq!(old["outcome"], new_json["outcome"], "{name}");
    assert_eq!(old["winner"], new_json["winner"], "{name}");
    for (key, tol) in [("ell_star", tol), ("ell_last", tol), ("gap", coupling_tol)] {
        let (a, b) = (number(old, key), new_json.get(key).and_then(Value::as_f64));
        assert!(opt_close_to(a, b, tol), "{name}: {key} {a:?} vs {b:?}");
    }
    let terms = old["terms"].as_array().expect("terms");
    assert_eq!(terms.len(), new.terms.len(), "{name}: terms");
    for (t, n) in terms.iter().zip(&new.terms) {
        assert_eq!(t["name"].as_str(), Some(n.name.as_str()), "{name}");
        for (key, x, tol) in [
            ("coupling", n.coupling, coupling_tol),
            ("dimension", n.dimension, tol),
            ("phase", n.phase, coupling_tol),
            ("dimension0", n.dimension0, tol),
        ] {
            let y = number(t, key).expect("number");
            assert!(close_to(x, y, tol), "{name}: {} {key} {x} vs {y}", n.name);
        }
    }
    let stages = old["stages"].as_array().expect("stages");
    assert_eq!(stages.len(), new.stages.len(), "{name}: stages");
    for (s, n) in stages.iter().zip(&new.stages) {
        let ell = number(s, "ell").expect("ell");
        assert!(
            close_to(ell, n.ell, tol),
            "{name}: stage {ell} vs {}",
            n.ell
        );
    }
}

/// The captured output of a bundled model in `dir` (under tests/reference).
fn captured(dir: &str, name: &str) -> Value {
    let path = root().join(format!("tests/reference/{dir}/{name}.json"));
    let text = std::fs::read_to_string(&path).expect("captured output");
    serde_json::from_str(&text).expect("json")
}

/// The bundled model's flow at its default point with `rtol`.
fn flow_at(sys: &System, rtol: f64) -> FlowResult {
    let point = sys.model.params.defaults().to_vec();
    let opts = FlowOptions {
        rtol,
        ..FlowOptions::default()
    };
    Flow::new(sys, opts).run(&point).expect("flow")
}

#[test]
fn bundled_models_flows_equal_captured_outputs() {
    for (name, sys) in bundled() {
        let new = flow_at(&sys, FlowOptions::default().rtol);
        same_as_captured(&name, &captured("flows", &name), &new, (TOL, TOL));
    }
}

#[test]
fn bundled_models_flows_converge_to_the_tight_references() {
    for (name, sys) in bundled() {
        let tight = captured("flows_tight", &name);
        let default = flow_at(&sys, FlowOptions::default().rtol);
        let what = format!("{name} at the default rtol");
        same_as_captured(&what, &tight, &default, (DEFAULT_TOL, COUPLING_TOL));
        let what = format!("{name} at rtol 1e-12");
        same_as_captured(&what, &tight, &flow_at(&sys, 1e-12), (TIGHT_TOL, TIGHT_TOL));
    }
}

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

    fn int(&mut self, lo: i64, hi: i64) -> i64 {
        lo + ((hi - lo + 1) as f64 * self.next()) as i64
    }
}

/// A random array of spinless wires (K = diag(1, -1) per wire): V blocks 0
/// and 1 with a dominant diagonal (positive definite), three terms over
/// wire offsets 0..=1 with small odd/even particle contents.
fn random_array(rng: &mut Rng, wires: &str, boundary: &str) -> String {
    // |V1| <= 0.2, so V(q) >= 1 - 0.5 - 2 * 0.2 > 0 for every q.
    let lam = rng.range(-0.5, 0.5);
    let (a, b, c) = (
        rng.range(0.0, 0.1),
        rng.range(-0.1, 0.1),
        rng.range(0.0, 0.1),
    );
    let mut s = format!(
        "name = \"random\"\n[array]\nwires = {wires}\n{boundary}K = [[1, 0], [0, -1]]\ncharge = [1, 1]\n[array.V]\n0 = [[\"1\", \"{}\"], [\"{}\", \"1\"]]\n1 = [[\"{}\", \"{}\"], [\"{}\", \"{}\"]]\n",
        num(lam),
        num(lam),
        num(a),
        num(b),
        num(c),
        num(a)
    );
    let shapes: [[[i64; 2]; 2]; 4] = [
        [[-2, 1], [-1, 2]],
        [[1, -1], [-1, 1]],
        [[-1, 0], [0, 1]],
        [[1, 1], [-1, -1]],
    ];
    for (i, shape) in shapes.iter().enumerate().take(3) {
        let m = rng.int(0, 1);
        let coupling = rng.range(0.02, 0.3);
        s += &format!(
            "[[term]]\nname = \"t{i}\"\nparticles = {{ 0 = [{}, {}], 1 = [{}, {}] }}\ncoupling = {}\n",
            shape[0][0] * (1 + m),
            shape[0][1] * (1 + m),
            shape[1][0] * (1 + m),
            shape[1][1] * (1 + m),
            num(coupling)
        );
    }
    s
}

#[test]
fn random_models_rhs_and_flows_equal_reference_route() {
    let mut rng = Rng(0x15_5eed);
    let layouts = [
        ("6", "boundary = \"periodic\"\n"),
        ("5", "boundary = \"open\"\n"),
        ("\"infinite\"", ""),
        ("4", "boundary = \"periodic\"\n"),
    ];
    for round in 0..8 {
        let (wires, boundary) = layouts[round % layouts.len()];
        let text = random_array(&mut rng, wires, boundary);
        let sys = system(&text);
        let what = format!("random model {round}:\n{text}");
        check_rhs(&sys, &what);
        check_flows(&sys, &what);
    }
}

/// A random explicit model: three spinless wires written out (`[fields]`,
/// K = diag(1, -1) per wire), V the identity plus a symmetric perturbation
/// with entries below 0.1 (diagonally dominant, so positive definite), and
/// four terms on pairs of wires.
fn random_explicit(rng: &mut Rng) -> String {
    let n = 6;
    let mut v = vec![vec![0.0; n]; n];
    for (i, j) in (0..n).flat_map(|i| (i..n).map(move |j| (i, j))) {
        let x = if i == j { 1.0 } else { rng.range(-0.1, 0.1) };
        v[i][j] = x;
        v[j][i] = x;
    }
    let rows: Vec<String> = v
        .iter()
        .map(|r| {
            let cells: Vec<String> = r.iter().map(|x| format!("\"{}\"", num(*x))).collect();
            format!("[{}]", cells.join(", "))
        })
        .collect();
    let mut s = format!(
        "name = \"random explicit\"\n[fields]\nK = [[1,0,0,0,0,0],[0,-1,0,0,0,0],[0,0,1,0,0,0],[0,0,0,-1,0,0],[0,0,0,0,1,0],[0,0,0,0,0,-1]]\ncharge = [1, 1, 1, 1, 1, 1]\nV = [{}]\n",
        rows.join(", ")
    );
    let terms: [[i64; 6]; 4] = [
        [-2, 1, -1, 2, 0, 0],
        [0, 0, -2, 1, -1, 2],
        [1, -1, -1, 1, 0, 0],
        [1, -1, 0, 0, -1, 1],
    ];
    for (i, t) in terms.iter().enumerate() {
        let parts: Vec<String> = t.iter().map(|x| x.to_string()).collect();
        s += &format!(
            "[[term]]\nname = \"e{i}\"\nparticles = [{}]\ncoupling = {}\n",
            parts.join(", "),
            num(rng.range(0.02, 0.3))
        );
    }
    s
}

#[test]
fn random_explicit_models_rhs_and_flows_equal_reference_route() {
    let mut rng = Rng(0x15_e7b1);
    for round in 0..4 {
        let text = random_explicit(&mut rng);
        let sys = system(&text);
        let what = format!("random explicit model {round}:\n{text}");
        check_rhs(&sys, &what);
        check_flows(&sys, &what);
    }
}

/// The filling-1/3 strip of `flows/laughlin_third_strip.toml` with 40 wires
/// (80 fields) at (lambda, g).
fn strip40(lambda: f64, g: f64) -> System {
    let text = std::fs::read_to_string(root().join("flows/laughlin_third_strip.toml"))
        .expect("bundled strip");
    let text = text
        .replace("\nwires = 8\n", "\nwires = 40\n")
        .replace("lambda = 0.8 ", &format!("lambda = {} ", num(lambda)))
        .replace("g = 0.5 ", &format!("g = {} ", num(g)));
    system(&text)
}

/// Half-bandwidth of the bare D above the banded product's threshold.
fn bare_bandwidth(sys: &System) -> (usize, usize) {
    let point = sys.model.params.defaults().to_vec();
    let d = sys.fixed_point(&point).expect("fixed point").d;
    let n = d.nrows();
    let rows: Vec<f64> = (0..n * n).map(|i| d[(i / n, i % n)]).collect();
    let thr = pinflow::flow::background::BAND_TOL * banded::max_abs(&rows);
    (banded::bandwidth(&rows, n, thr), n)
}

/// Issue 15 / issue 19: the banded product D M D (entries of D below
/// `BAND_TOL` of its largest one dropped, `src/flow/background.rs`) against
/// the dense product on a 40-wire open strip, at the demo's point (D banded
/// up to rounding noise) and at two points where D decays geometrically
/// along the strip. A consistency check between two code paths (no physics
/// values): the right-hand side to 1e-12 of its part's largest entry; whole
/// flows to 3e-12 in ell*, the stages and every dimension (largest measured
/// 1.15e-12, a dimension at lambda = 0.6, g = 0.7, once D was stored as its
/// upper triangle and merged with main's regrouped sums; each such change
/// of rounding moves it), and the final
/// couplings (exponentials of the flow, which magnify rounding: reordering
/// the sums alone, with nothing dropped, moves a coupling of the 200-wire
/// strip by 2.6e-12, benches/README.md) to 1e-10.
#[test]
fn banded_product_equals_the_dense_one_on_a_40_wire_strip() {
    for (lambda, g) in [(0.8, 0.5), (0.6, 0.7), (0.95, 0.1)] {
        let sys = strip40(lambda, g);
        let what = format!("40-wire strip at lambda = {lambda}, g = {g}");
        let (b, n) = bare_bandwidth(&sys);
        assert!(b + 1 < n, "{what}: bandwidth {b} of {n}, nothing dropped");
        let point = sys.model.params.defaults().to_vec();
        let opts = FlowOptions {
            record: false,
            ..FlowOptions::default()
        };
        let mut flow = Flow::new(&sys, opts);
        let (band, dense, nc) = flow.rhs_dense_routes(&point).expect("rhs");
        let nw = 2 * nc;
        let dw = rel_diff(&band[..nw], &dense[..nw]);
        let dd = rel_diff(&band[nw..], &dense[nw..]);
        assert!(
            dw <= 1e-12 && dd <= 1e-12,
            "{what}: couplings {dw:e}, D {dd:e}"
        );
        assert!(dense[nw..].iter().any(|&x| x != 0.0), "{what}: no feedback");
        let mut run = |route| {
            flow.dense_route = route;
            flow.run(&point).expect("flow")
        };
        let (b, d) = (run(DenseRoute::Banded), run(DenseRoute::Full));
        assert!(d.ell_star.is_some(), "{what}: a coupling grows strong");
        same_result_to(&b, &d, &what, 3e-12, 1e-10);
    }
}

/// Issue 15 (packed dense D): the dense layout stores D's upper triangle
/// (`src/flow/background.rs`, `Background::Dense`). Its right-hand side by
/// every route (matrix products by gemm and by the banded product, and the
/// per-channel reference) against the feedback computed here in full from
/// the fixed point's full D with plain `nalgebra` products:
/// dD = -(1/8) sum_null |y|^2 sum_t [D l_t l_t^T D - g_t g_t^T]
/// (docs/physics.md section 3), and every channel's dimension against
/// (1/2) l^T D l. A consistency check between code paths (no physics
/// values), to 1e-12 of the largest entry. Also: writing the full D and
/// reading it back is exact.
#[test]
fn packed_dense_rhs_equals_a_full_matrix_computation() {
    use pinflow::flow::background::{packed_at, Background};
    use pinflow::flow::rhs::FlowRhs;
    let array = std::fs::read_to_string(root().join("benches/models/array32.toml"))
        .expect("bench model")
        .replace("boundary = \"periodic\"", "boundary = \"open\"");
    for (what, sys) in [
        ("40-wire strip", strip40(0.8, 0.5)),
        ("array32, open", system(&array)),
    ] {
        let point = sys.model.params.defaults().to_vec();
        let flow = Flow::new(&sys, FlowOptions::default());
        let listed = flow.plan.listed;
        let channels: Vec<_> = flow.plan.channels[..listed].iter().collect();
        let d = sys.fixed_point(&point).expect("fixed point").d;
        let n = d.nrows();
        let bg = Background::Dense { n };
        assert_eq!(bg.len(), n * (n + 1) / 2);
        let mut y: Vec<f64> = (0..2 * listed)
            .map(|i| 0.04 + 0.01 * (i % 5) as f64)
            .collect();
        y.resize(2 * listed + bg.len(), 0.0);
        bg.write(&d, &mut y[2 * listed..]);
        let sym = (&d + d.transpose()) * 0.5;
        assert_eq!(
            bg.dense(&y[2 * listed..]).upper_triangle(),
            d.upper_triangle()
        );
        // The reference, in full.
        let mut want = nalgebra::DMatrix::<f64>::zeros(n, n);
        let vec_of = |v: &[(usize, f64)]| {
            let mut x = nalgebra::DVector::zeros(n);
            v.iter().for_each(|&(i, a)| x[i] = a);
            x
        };
        for (c, ch) in channels.iter().enumerate().filter(|(_, ch)| ch.null()) {
            let w2 = 4.0 * (y[2 * c].powi(2) + y[2 * c + 1].powi(2));
            for (l, g) in ch.l_sparse.iter().zip(&ch.g_sparse) {
                let (u, g) = (&sym * vec_of(l), vec_of(g));
                want -= (&u * u.transpose() - &g * g.transpose()) * (w2 / 8.0);
            }
        }
        let scale = want.amax();
        assert!(scale > 0.0, "{what}: no feedback");
        let mut rhs = FlowRhs::new(bg.clone(), channels.clone(), vec![0.0; listed], vec![]);
        for route in [DenseRoute::Full, DenseRoute::Banded, DenseRoute::Auto] {
            rhs.set_dense_route(route);
            let mut got = vec![f64::NAN; y.len()];
            rhs.derivative(&y, &mut got);
            let mut reference = vec![f64::NAN; y.len()];
            rhs.derivative_reference(&y, &mut reference);
            for (name, out) in [("products", &got), ("per channel", &reference)] {
                let ds = &out[2 * listed..];
                for i in 0..n {
                    for j in i..n {
                        let (a, b) = (ds[packed_at(n, i, j)], want[(i, j)]);
                        assert!(
                            (a - b).abs() <= 1e-12 * scale,
                            "{what}, {route:?}, {name}: ({i}, {j}) {a:e} vs {b:e}"
                        );
                    }
                }
            }
        }
        for (c, ch) in channels.iter().enumerate() {
            let l = vec_of(&ch.l_sparse[ch.family.representative]);
            let want = 0.5 * l.dot(&(&sym * &l));
            let got = rhs.dimension(&y, c);
            assert!(
                (got - want).abs() <= 1e-12 * want.abs().max(1.0),
                "{what}: {c}"
            );
        }
    }
}
