//! `pinflow edges` through the library: gapped pairs, full gapping of the
//! bulk, and the theory at each end of coupled-wire arrays pinned by the
//! filling-1/m term; invariance under changes of basis; refusals.
//!
//! Check values. The coupled-wire construction of the Laughlin state leaves
//! one chiral boson at each end of an open array, with K = (m) at one end
//! and (-m) at the other and filling 1/m [Kane, Mukhopadhyay & Lubensky,
//! PRL 88, 036401 (2002); Teo & Kane, PRB 89, 085101 (2014); from memory].
//! The lattice statements (r = W - 1, the edge generator, det = -1 for the
//! whole strip) are derived in the physics reference section 6 and beside
//! each test below.

mod common;

/// Every test sits in this module so that the filter `edges` selects them all.
mod edges {

    use num_bigint::BigInt;
    use num_traits::{Signed, ToPrimitive};
    use pinflow::core::system::System;
    use pinflow::edges::pins::{self, Selection};
    use pinflow::edges::{analyse, Analysis, End, Theory};
    use pinflow::flow::options::FlowOverrides;
    use pinflow::flow::FlowOptions;
    use pinflow::math::rational::Rational;
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    use crate::common::{system, toml_f64_matrix, toml_int_matrix, toml_int_vector};

    /// Particle content of the filling-1/m link term (m odd): wire j
    /// (-(m+1)/2, (m-1)/2), wire j+1 (-(m-1)/2, (m+1)/2), over the cell
    /// (phi_R, phi_L) with K = diag(1, -1) and t = (1, 1).
    fn link(m: i64) -> ([i64; 2], [i64; 2]) {
        let (a, b) = ((m + 1) / 2, (m - 1) / 2);
        ([-a, b], [-b, a])
    }

    /// An array of spinless wires with the filling-1/m term on every link.
    fn laughlin_array(m: i64, wires: usize, boundary: &str) -> String {
        let (p0, p1) = link(m);
        format!(
            r#"
name = "filling-1/{m} array"
[array]
wires = {wires}
boundary = "{boundary}"
K = [[1, 0], [0, -1]]
charge = [1, 1]
[array.V]
0 = [["1", "0.3"], ["0.3", "1"]]
[[term]]
name = "laughlin"
particles = {{ 0 = {}, 1 = {} }}
"#,
            toml_int_vector(&p0),
            toml_int_vector(&p1)
        )
    }

    fn pin(sys: &System, names: &[&str]) -> Selection {
        let names: Vec<String> = names.iter().map(|s| s.to_string()).collect();
        pins::from_names(sys, &names).unwrap_or_else(|e| panic!("pin: {e}"))
    }

    fn run(toml: &str, names: &[&str], window: Option<usize>) -> Analysis {
        let sys = system(toml);
        let sel = pin(&sys, names);
        analyse(&sys, &sel.pinned, window).unwrap_or_else(|e| panic!("analyse: {e}"))
    }

    /// The theory of all fields (every finite array and explicit model has one).
    fn whole(a: &Analysis) -> &Theory {
        a.whole.as_ref().expect("a theory of all fields")
    }

    fn q(p: i64, r: i64) -> Rational {
        Rational::new(BigInt::from(p), BigInt::from(r))
    }

    fn k_of(t: &Theory) -> Vec<Vec<i64>> {
        t.residual
            .k
            .to_rows()
            .iter()
            .map(|r| r.iter().map(|x| x.to_i64().unwrap()).collect())
            .collect()
    }

    fn ints(v: &[BigInt]) -> Vec<i64> {
        v.iter().map(|x| x.to_i64().unwrap()).collect()
    }

    /// (charge mod 1, spin mod its period) of every quasiparticle type.
    fn types(t: &Theory) -> Vec<(Rational, Rational)> {
        t.invariants
            .quasiparticles
            .iter()
            .map(|x| (x.charge_mod.clone(), x.spin_mod.clone()))
            .collect()
    }

    // ------------------------------------------------------- open 1/m arrays

    #[test]
    fn open_laughlin_arrays_leave_one_chiral_mode_at_each_end() {
        // Derived (physics reference section 6): the W - 1 link vectors are
        // independent null vectors, so r = W - 1 and 2W - 2r = 2 modes remain.
        // In the left window, a generator on wire 0 must be orthogonal to the
        // wire-0 part of l_0 = K n_0 = (-(m+1)/2, -(m-1)/2): n = ((m-1)/2,
        // -(m+1)/2) up to sign, primitive (consecutive integers), norm
        // ((m-1)^2 - (m+1)^2)/4 = -m, charge -1. At the right end the wire-(W-1)
        // part of l_{W-2} is (-(m-1)/2, -(m+1)/2), giving ((m+1)/2, -(m-1)/2)
        // of norm +m and charge 1. Signs: the left end keeps a left mover
        // (K < 0), the right end a right mover [Kane, Mukhopadhyay & Lubensky
        // (2002); Teo & Kane (2014); from memory].
        for m in [1i64, 3, 5] {
            for w in [4usize, 5, 6] {
                let a = run(&laughlin_array(m, w, "open"), &["laughlin"], None);
                let what = format!("m = {m}, W = {w}");
                assert_eq!(a.gapped_pairs, w - 1, "{what}: r = W - 1");
                assert_eq!(a.gapless_modes, 2, "{what}");
                assert_eq!(a.fully_gapped, Some(true), "{what}: the bulk is gapped");
                let win = a.window.expect("a window");
                assert_eq!(
                    (win.wires, win.default),
                    (2, true),
                    "{what}: default window"
                );
                assert_eq!(a.edges.len(), 2);
                let (left, right) = (&a.edges[0], &a.edges[1]);
                assert_eq!((left.end, right.end), (End::Left, End::Right));
                assert_eq!(k_of(left), vec![vec![-m]], "{what}: K at the left end");
                assert_eq!(k_of(right), vec![vec![m]], "{what}: K at the right end");
                // Charge vector +-1 (signs are fixed to make charges positive).
                assert_eq!(ints(&left.residual.charge), vec![1], "{what}");
                assert_eq!(ints(&right.residual.charge), vec![1], "{what}");
                assert_eq!(left.invariants.filling, q(-1, m), "{what}: filling");
                assert_eq!(right.invariants.filling, q(1, m), "{what}: filling");
                assert_eq!(left.invariants.signature, (0, 1));
                assert_eq!(right.invariants.signature, (1, 0));
                assert_eq!(left.invariants.det, BigInt::from(-m));
                assert_eq!(right.invariants.det, BigInt::from(m));
                // m quasiparticle types with charges k/m (mod 1) [Laughlin
                // quasiholes; Wen, Adv. Phys. 44, 405 (1995), from memory].
                let charges: Vec<Rational> = types(right).into_iter().map(|t| t.0).collect();
                let want: Vec<Rational> = (0..m).map(|k| q(k, m)).collect();
                assert_eq!(charges, want, "{what}: quasiparticle charges");
                // The generators, as particle content on the end wires.
                let (a0, b0) = ((m + 1) / 2, (m - 1) / 2);
                let mut gl = vec![0i64; 2 * w];
                gl[0] = -b0;
                gl[1] = a0;
                assert_eq!(
                    ints(&left.residual.generators[0]),
                    gl,
                    "{what}: left generator"
                );
                let mut gr = vec![0i64; 2 * w];
                gr[2 * w - 2] = a0;
                gr[2 * w - 1] = -b0;
                assert_eq!(
                    ints(&right.residual.generators[0]),
                    gr,
                    "{what}: right generator"
                );
                // Whole strip: one non-chiral unimodular theory. Derived: K is
                // unimodular and the pinned lattice is saturated and isotropic,
                // so M / S is unimodular; signature (1, 1) makes det = -1.
                assert_eq!(whole(&a).end, End::Strip);
                assert_eq!(
                    whole(&a).invariants.det,
                    BigInt::from(-1),
                    "{what}: strip det"
                );
                assert_eq!(whole(&a).invariants.signature, (1, 1));
                assert_eq!(whole(&a).invariants.filling, q(0, 1));
            }
        }
    }

    #[test]
    fn filling_third_generator_is_minus_one_two_on_wire_zero() {
        // Physics reference section 6: for m = 3 the edge generator near wire 0
        // is the particle vector (-1, 2) on that wire (up to sign), K = (-3).
        let a = run(&laughlin_array(3, 5, "open"), &["laughlin"], None);
        let g = ints(&a.edges[0].residual.generators[0]);
        let sign = if g[0] < 0 { 1 } else { -1 };
        assert_eq!(&g[..2], &[-sign, 2 * sign]);
        assert!(
            g[2..].iter().all(|x| *x == 0),
            "supported on wire 0 only: {g:?}"
        );
    }

    #[test]
    fn integer_edges_for_m_equal_one() {
        // m = 1: single-electron hopping; the edges are free chiral fermions,
        // K = (+-1), filling +-1, one quasiparticle type (the electron) [Teo &
        // Kane (2014), from memory].
        let a = run(&laughlin_array(1, 4, "open"), &["laughlin"], None);
        assert_eq!(k_of(&a.edges[0]), vec![vec![-1]]);
        assert_eq!(k_of(&a.edges[1]), vec![vec![1]]);
        for e in &a.edges {
            assert_eq!(e.invariants.det.abs(), BigInt::from(1));
            assert_eq!(e.invariants.quasiparticles.len(), 1);
            assert!(e.invariants.group.is_empty());
        }
    }

    #[test]
    fn larger_windows_give_the_same_edges() {
        // The edge theory is a property of the end, not of the window: any
        // window that holds a link term and stays away from the other end gives
        // the same K (derived: each extra wire adds two fields, one constraint
        // from the crossing link and one pinned link inside).
        for m in [3i64, 5] {
            let toml = laughlin_array(m, 7, "open");
            for w in [2usize, 3, 4, 5, 6] {
                let a = run(&toml, &["laughlin"], Some(w));
                assert_eq!(a.window.unwrap().wires, w);
                assert!(!a.window.unwrap().default);
                assert_eq!(k_of(&a.edges[0]), vec![vec![-m]], "m = {m}, window {w}");
                assert_eq!(k_of(&a.edges[1]), vec![vec![m]], "m = {m}, window {w}");
                assert!(
                    a.notes.iter().all(|n| !n.contains("changes between")),
                    "{:?}",
                    a.notes
                );
            }
        }
    }

    // ---------------------------------------------------------- periodic arrays

    #[test]
    fn periodic_laughlin_arrays_are_fully_gapped() {
        // A ring of W wires has W links, r = W = N/2 (derived: the W link
        // vectors are independent; their sum has (-m, m) on every wire), so no
        // gapless mode is left [Kane, Mukhopadhyay & Lubensky (2002), from
        // memory: the bulk of the coupled-wire Laughlin state is gapped].
        for m in [1i64, 3, 5] {
            for w in [3usize, 4, 5, 6] {
                let a = run(&laughlin_array(m, w, "periodic"), &["laughlin"], None);
                assert_eq!(a.gapped_pairs, w, "m = {m}, W = {w}");
                assert_eq!(a.gapless_modes, 0);
                assert_eq!(a.fully_gapped, Some(true));
                assert!(a.edges.is_empty());
                assert_eq!(whole(&a).end, End::Bulk);
                assert_eq!(whole(&a).residual.k.rows, 0);
            }
        }
    }

    #[test]
    fn a_partial_pin_set_leaves_the_bulk_gapless() {
        // Three wires written out explicitly, the filling-1/3 term pinned on the
        // first link only: r = 1 and 6 - 2 r = 4 modes are left (derived).
        let toml = format!(
            r#"
name = "three wires, one link pinned"
[fields]
K = {k}
charge = [1, 1, 1, 1, 1, 1]
V = {v}
[[term]]
name = "one_link"
particles = [-2, 1, -1, 2, 0, 0]
"#,
            k = toml_int_matrix(&diag(&[1, -1, 1, -1, 1, -1])),
            v = toml_f64_matrix(&identity_f64(6)),
        );
        let a = run(&toml, &["one_link"], None);
        assert_eq!(a.gapped_pairs, 1);
        assert_eq!(a.gapless_modes, 4);
        assert_eq!(a.fully_gapped, Some(false));
        assert_eq!(whole(&a).end, End::System);
        // K unimodular, S saturated isotropic: the residual is unimodular
        // (derived), with signature (2, 2).
        assert_eq!(whole(&a).invariants.det.abs(), BigInt::from(1));
        assert_eq!(whole(&a).invariants.signature, (2, 2));
    }

    // ------------------------------------------------ the demo, from the flow

    fn opened_demo() -> String {
        let path =
            std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("flows/laughlin_third.toml");
        let text = std::fs::read_to_string(path).expect("demo model");
        assert!(text.contains("boundary = \"periodic\""));
        text.replace("boundary = \"periodic\"", "boundary = \"open\"")
    }

    #[test]
    fn the_flow_pins_the_laughlin_term_of_the_opened_demo() {
        // At lambda = 0.8, g = 0.9 the tunnelling term wins the flow of the
        // demo (the README's phase diagram); the pinned phase then has the two
        // Laughlin edges K = (-3) and (3), filling -+1/3 (physics reference
        // section 6; Kane, Mukhopadhyay & Lubensky (2002), from memory).
        let sys = system(&opened_demo());
        let set = vec![("lambda".to_string(), 0.8), ("g".to_string(), 0.9)];
        let point = sys.model.point_with(&set, "test").unwrap();
        let opts = FlowOptions::resolve(&sys.model, &FlowOverrides::default()).unwrap();
        let sel = pins::from_flow(&sys, &point, opts).unwrap_or_else(|e| panic!("{e}"));
        let names: Vec<&str> = sel.pinned.iter().map(|p| p.name.as_str()).collect();
        assert_eq!(names, vec!["tunnel"]);
        let a = analyse(&sys, &sel.pinned, None).unwrap();
        assert_eq!(a.gapped_pairs, 7);
        assert_eq!(k_of(&a.edges[0]), vec![vec![-3]]);
        assert_eq!(k_of(&a.edges[1]), vec![vec![3]]);
        assert_eq!(a.edges[0].invariants.filling, q(-1, 3));
        assert_eq!(a.edges[1].invariants.filling, q(1, 3));
    }

    // ------------------------------------ a non-diagonal cell, wire by wire

    fn nondiagonal_cell() -> String {
        let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("tests/reference/edges_nondiagonal_cell.toml");
        std::fs::read_to_string(path).expect("tests/reference/edges_nondiagonal_cell.toml")
    }

    /// The cell of that model and its charge vector.
    const CELL_K: [[i64; 4]; 4] = [[-1, 0, 1, 0], [0, 3, 1, 1], [1, 1, -2, 0], [0, 1, 0, 2]];
    const CELL_T: [i64; 4] = [-3, 3, -3, -2];

    /// n^T K n' for the block-diagonal K of an array of such cells.
    fn cell_form(a: &[BigInt], b: &[BigInt]) -> BigInt {
        let mut sum = BigInt::from(0);
        for (x, y) in a.chunks(4).zip(b.chunks(4)) {
            for i in 0..4 {
                for j in 0..4 {
                    sum += &x[i] * CELL_K[i][j] * &y[j];
                }
            }
        }
        sum
    }

    #[test]
    fn a_non_diagonal_cell_pinned_wire_by_wire() {
        // Derivation. The cell K has det 7 (cofactor expansion by hand) and
        // signature (2, 2): det > 0 allows (4,0), (2,2) or (0,4), and the
        // diagonal holds both -1 and 3. hop0 is n = 2 s with s = (-1, 1, -1,
        // 0) primitive, s.K s = 0 and K s = (0, 2, 2, 1) of content 1. With
        // w = e_4 (w.K s = 1), H = span(s, w) has Gram [[0, 1], [1, 2]] of
        // det -1, so Z^4 = H ⊕ H^perp and s^perp = <s> ⊕ H^perp: one wire's
        // residual lattice s^perp / <s> is H^perp, of rank 2, det 7 / (-1) =
        // -7, signature (1, 1) and group Z_7 (7 is prime). By hand, H^perp =
        // {x : 2x_2 + 2x_3 + x_4 = 0, x_2 + 2x_4 = 0} has the basis (1, 0, 0,
        // 0), (0, -4, 3, 2): entries at most 4. The translates lie on
        // disjoint wires and K is block diagonal, so r = 4 and the strip is
        // the orthogonal sum of four copies: det (-7)^4 = 2401, signature (4,
        // 4), group Z_7^4; each one-wire window holds one copy. A ring of 4
        // wires with the same terms gaps 4 of 8 pairs: not fully gapped.
        let sys = system(&nondiagonal_cell());
        let sel = pin(&sys, &["hop0"]);
        let a = analyse(&sys, &sel.pinned, None).unwrap_or_else(|e| panic!("analyse: {e}"));
        assert_eq!(a.fields, 16);
        assert_eq!(a.gapped_pairs, 4);
        assert_eq!(a.gapless_modes, 8);
        assert_eq!(a.fully_gapped, Some(false));
        let win = a.window.expect("a window");
        assert_eq!((win.wires, win.default), (1, true));
        assert_eq!(a.edges.len(), 2);
        for e in &a.edges {
            let what = e.end.word();
            assert_eq!(e.residual.k.rows, 2, "{what}");
            assert_eq!(e.invariants.det, BigInt::from(-7), "{what}");
            assert_eq!(e.invariants.signature, (1, 1), "{what}");
            assert_eq!(e.invariants.group, vec![BigInt::from(7)], "{what}");
            assert_eq!(e.invariants.quasiparticles.len(), 7, "{what}: all types");
        }
        assert_eq!(whole(&a).residual.k.rows, 8);
        assert_eq!(whole(&a).invariants.det, BigInt::from(2401));
        assert_eq!(whole(&a).invariants.signature, (4, 4));
        assert_eq!(whole(&a).invariants.group, vec![BigInt::from(7); 4]);
        // The generators: short (entries no larger than those of the hand
        // basis above), supported in their region, commuting with every
        // pinned translate, with the reported K as Gram matrix and t.g as
        // charges. With that K's det equal to the derived det of M / S, they
        // span M / S (a sublattice of index d would have d^2 times it).
        // hop0 carries charge t.n = 18, so charges are defined only modulo
        // that of s (9) and the filling is not checked here.
        let pinned: Vec<&Vec<BigInt>> = sel.pinned[0].translates.iter().map(|t| &t.n).collect();
        for th in a.whole.iter().chain(&a.edges) {
            let what = th.end.word();
            let gens = &th.residual.generators;
            let (lo, hi) = th.wires.expect("array wires");
            for g in gens {
                assert!(
                    g.iter().all(|x| x.abs() <= BigInt::from(4)),
                    "{what}: long generator {g:?}"
                );
                for (i, x) in g.iter().enumerate() {
                    assert!(
                        x == &BigInt::from(0) || (lo..=hi).contains(&(i / 4)),
                        "{what}: {g:?} outside wires {lo}-{hi}"
                    );
                }
                for n in &pinned {
                    assert_eq!(cell_form(n, g), BigInt::from(0), "{what}: {g:?} vs {n:?}");
                }
            }
            for (i, gi) in gens.iter().enumerate() {
                for (j, gj) in gens.iter().enumerate() {
                    assert_eq!(&cell_form(gi, gj), th.residual.k.at(i, j), "{what}: K");
                }
                let t: BigInt = gi.iter().enumerate().map(|(f, x)| x * CELL_T[f % 4]).sum();
                assert_eq!(t, th.residual.charge[i], "{what}: charge of g{}", i + 1);
            }
        }
    }

    // ------------------------------------------------------ change of basis

    fn diag(d: &[i64]) -> Vec<Vec<i64>> {
        let n = d.len();
        (0..n)
            .map(|i| (0..n).map(|j| if i == j { d[i] } else { 0 }).collect())
            .collect()
    }

    fn identity_f64(n: usize) -> Vec<Vec<f64>> {
        (0..n)
            .map(|i| (0..n).map(|j| if i == j { 1.0 } else { 0.0 }).collect())
            .collect()
    }

    /// A random W in GL(n, Z) and its inverse (products of elementary moves).
    fn random_gl(rng: &mut ChaCha8Rng, n: usize, moves: usize) -> (Vec<Vec<i64>>, Vec<Vec<i64>>) {
        let mut w = diag(&vec![1; n]);
        let mut winv = diag(&vec![1; n]);
        for _ in 0..moves {
            let i = rng.gen_range(0..n);
            let j = (i + rng.gen_range(1..n)) % n;
            let k: i64 = if rng.gen_bool(0.5) { 1 } else { -1 };
            // W <- W E with E = 1 + k e_j e_i^T (col_i += k col_j);
            // W^-1 <- E^-1 W^-1 (row_j -= k row_i).
            for row in w.iter_mut() {
                row[i] += k * row[j];
            }
            let ri = winv[i].clone();
            for (x, y) in winv[j].iter_mut().zip(&ri) {
                *x -= k * y;
            }
            if rng.gen_bool(0.3) {
                // Also flip the sign of basis vector i.
                for row in w.iter_mut() {
                    row[i] = -row[i];
                }
                for x in winv[i].iter_mut() {
                    *x = -*x;
                }
            }
        }
        assert_eq!(matmul(&w, &winv), diag(&vec![1; n]), "W W^-1 = 1");
        (w, winv)
    }

    fn matmul(a: &[Vec<i64>], b: &[Vec<i64>]) -> Vec<Vec<i64>> {
        let (n, m, p) = (a.len(), b.len(), b[0].len());
        (0..n)
            .map(|i| {
                (0..p)
                    .map(|j| (0..m).map(|k| a[i][k] * b[k][j]).sum())
                    .collect()
            })
            .collect()
    }

    fn transpose(a: &[Vec<i64>]) -> Vec<Vec<i64>> {
        (0..a[0].len())
            .map(|j| a.iter().map(|r| r[j]).collect())
            .collect()
    }

    fn matvec(a: &[Vec<i64>], v: &[i64]) -> Vec<i64> {
        a.iter()
            .map(|r| r.iter().zip(v).map(|(x, y)| x * y).sum())
            .collect()
    }

    /// An explicit model: K, t, V = W^T W (positive definite) and one term per
    /// particle vector.
    fn explicit_model(k: &[Vec<i64>], t: &[i64], v: &[Vec<i64>], terms: &[Vec<i64>]) -> String {
        let vf: Vec<Vec<f64>> = v
            .iter()
            .map(|r| r.iter().map(|x| *x as f64).collect())
            .collect();
        let mut s = format!(
            "name = \"explicit\"\n[fields]\nK = {}\ncharge = {}\nV = {}\n",
            toml_int_matrix(k),
            toml_int_vector(t),
            toml_f64_matrix(&vf)
        );
        for (i, n) in terms.iter().enumerate() {
            s.push_str(&format!(
                "[[term]]\nname = \"t{i}\"\nparticles = {}\n",
                toml_int_vector(n)
            ));
        }
        s
    }

    /// The basis-independent data of an analysis.
    fn invariants_of(a: &Analysis) -> String {
        let th = |t: &Theory| {
            format!(
                "modes {} det {} sig {:?} filling {} group {:?} types {:?}",
                t.residual.k.rows,
                t.invariants.det,
                t.invariants.signature,
                t.invariants.filling,
                t.invariants.group,
                types(t)
            )
        };
        format!(
            "r {} gapless {} gapped {:?} whole [{}] edges [{}]",
            a.gapped_pairs,
            a.gapless_modes,
            a.fully_gapped,
            th(whole(a)),
            a.edges.iter().map(th).collect::<Vec<_>>().join("; ")
        )
    }

    /// Run an explicit model (K, t, terms) and the same model after a random
    /// change of basis phi = W phi': K -> W^T K W, t -> W^T t, particle vectors
    /// n -> W^-1 n (so that l = K n -> W^T l and t.n is unchanged), V -> W^T V W.
    fn check_basis_independence(k: &[Vec<i64>], t: &[i64], terms: &[Vec<i64>], seed: u64) {
        let n = k.len();
        let names: Vec<String> = (0..terms.len()).map(|i| format!("t{i}")).collect();
        let names: Vec<&str> = names.iter().map(|s| s.as_str()).collect();
        let base = run(
            &explicit_model(k, t, &diag(&vec![1; n]), terms),
            &names,
            None,
        );
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        for _ in 0..4 {
            let (w, winv) = random_gl(&mut rng, n, 3 * n);
            let wt = transpose(&w);
            let k2 = matmul(&wt, &matmul(k, &w));
            let t2 = matvec(&wt, t);
            let v2 = matmul(&wt, &w);
            let terms2: Vec<Vec<i64>> = terms.iter().map(|m| matvec(&winv, m)).collect();
            let other = run(&explicit_model(&k2, &t2, &v2, &terms2), &names, None);
            assert_eq!(invariants_of(&other), invariants_of(&base), "W = {w:?}");
        }
    }

    #[test]
    fn invariants_do_not_depend_on_the_field_basis() {
        // physics reference section 1: a change of field basis W in GL(N, Z)
        // maps K -> W^T K W, l -> W^T l and leaves every invariant unchanged.
        // (1) the open filling-1/3 strip of 4 wires written out explicitly,
        let (p0, p1) = link(3);
        let w = 4;
        let k = diag(&[1, -1, 1, -1, 1, -1, 1, -1]);
        let t = vec![1; 2 * w];
        let terms: Vec<Vec<i64>> = (0..w - 1)
            .map(|j| {
                let mut n = vec![0; 2 * w];
                n[2 * j..2 * j + 2].copy_from_slice(&p0);
                n[2 * j + 2..2 * j + 4].copy_from_slice(&p1);
                n
            })
            .collect();
        check_basis_independence(&k, &t, &terms, 11);
        // and it equals the array form's whole strip (det -1, signature (1, 1)).
        let names: Vec<String> = (0..terms.len()).map(|i| format!("t{i}")).collect();
        let names: Vec<&str> = names.iter().map(|s| s.as_str()).collect();
        let explicit = run(
            &explicit_model(&k, &t, &diag(&vec![1; 2 * w]), &terms),
            &names,
            None,
        );
        let array = run(&laughlin_array(3, w, "open"), &["laughlin"], None);
        assert_eq!(
            whole(&explicit).invariants.det,
            whole(&array).invariants.det
        );
        assert_eq!(explicit.gapped_pairs, array.gapped_pairs);
        // (2) two wires with one link pinned next to a filling-1/3 field
        // (K = 3, t = 1): the residual is the strip's unimodular pair plus the
        // untouched field, det -3 and filling 0 + 1/3 (derived), Z_3 types.
        let k = diag(&[1, -1, 1, -1, 3]);
        let t = vec![1; 5];
        let mut n = vec![0i64; 5];
        n[..2].copy_from_slice(&p0);
        n[2..4].copy_from_slice(&p1);
        let a = run(
            &explicit_model(&k, &t, &diag(&[1; 5]), &[n.clone()]),
            &["t0"],
            None,
        );
        assert_eq!(whole(&a).invariants.det, BigInt::from(-3));
        assert_eq!(whole(&a).invariants.filling, q(1, 3));
        assert_eq!(whole(&a).invariants.group, vec![BigInt::from(3)]);
        check_basis_independence(&k, &t, &[n], 12);
    }

    #[test]
    fn edges_do_not_depend_on_the_cell_basis() {
        // A change of basis of each wire's fields (the same W_c on every wire)
        // keeps the wires, so the ends can be compared: the same edge K, charge,
        // filling and types; the generators map back by W_c.
        let mut rng = ChaCha8Rng::seed_from_u64(21);
        for m in [3i64, 5] {
            let base = run(&laughlin_array(m, 5, "open"), &["laughlin"], None);
            for _ in 0..4 {
                let (w, winv) = random_gl(&mut rng, 2, 5);
                let wt = transpose(&w);
                let k2 = matmul(&wt, &matmul(&diag(&[1, -1]), &w));
                let t2 = matvec(&wt, &[1, 1]);
                let (p0, p1) = link(m);
                let v0 = [[1.0, 0.3], [0.3, 1.0]];
                let wf: Vec<Vec<f64>> = w
                    .iter()
                    .map(|r| r.iter().map(|x| *x as f64).collect())
                    .collect();
                // V0' = W_c^T V0 W_c.
                let v2: Vec<Vec<f64>> = (0..2)
                    .map(|i| {
                        (0..2)
                            .map(|j| {
                                let mut x = 0.0;
                                for (a, row) in v0.iter().enumerate() {
                                    for (b, v) in row.iter().enumerate() {
                                        x += wf[a][i] * v * wf[b][j];
                                    }
                                }
                                x
                            })
                            .collect()
                    })
                    .collect();
                let toml = format!(
                    r#"
name = "rotated cell"
[array]
wires = 5
boundary = "open"
K = {}
charge = {}
[array.V]
0 = {}
[[term]]
name = "laughlin"
particles = {{ 0 = {}, 1 = {} }}
"#,
                    toml_int_matrix(&k2),
                    toml_int_vector(&t2),
                    toml_f64_matrix(&v2),
                    toml_int_vector(&matvec(&winv, &p0)),
                    toml_int_vector(&matvec(&winv, &p1))
                );
                let other = run(&toml, &["laughlin"], None);
                assert_eq!(invariants_of(&other), invariants_of(&base), "W_c = {w:?}");
                for (e, e0) in other.edges.iter().zip(&base.edges) {
                    assert_eq!(k_of(e), k_of(e0));
                    assert_eq!(e.residual.charge, e0.residual.charge);
                    // Map the generator back wire by wire: n = W_c n'.
                    let g = ints(&e.residual.generators[0]);
                    let back: Vec<i64> = g.chunks(2).flat_map(|c| matvec(&w, c)).collect();
                    let g0 = ints(&e0.residual.generators[0]);
                    let neg: Vec<i64> = g0.iter().map(|x| -x).collect();
                    assert!(back == g0 || back == neg, "{back:?} vs {g0:?}");
                }
            }
        }
    }

    // ----------------------------------------------------------------- refusals

    const MIXED: &str = r#"
name = "terms that clash"
[array]
wires = 5
boundary = "open"
K = [[1, 0], [0, -1]]
charge = [1, 1]
[array.V]
0 = [["1", "0"], ["0", "1"]]
[[term]]
name = "tunnel"
particles = { 0 = [-2, 1], 1 = [-1, 2] }
[[term]]
name = "cdw"
particles = { 0 = [1, -1], 1 = [-1, 1] }
[[term]]
name = "twist"
particles = { 0 = [1, 1], 1 = [1, -1] }
[[term]]
name = "spinful"
particles = { 0 = [1, 0], 1 = [1, 0] }
"#;

    fn refused(toml: &str, names: &[&str]) -> String {
        let sys = system(toml);
        let names: Vec<String> = names.iter().map(|s| s.to_string()).collect();
        let e = pins::from_names(&sys, &names).expect_err("must be refused");
        assert_eq!(e.key, "--pin");
        e.message
    }

    #[test]
    fn a_non_commuting_pin_set_is_refused_with_the_pair() {
        // tunnel_j . cdw_j: wire j (-2)(1) + (1)(1) = -1, wire j+1 (-1)(-1) +
        // (2)(-1) = -1: mutual phase -2 (derived; l = K n, K = diag(1, -1)).
        let msg = refused(MIXED, &["tunnel", "cdw"]);
        assert!(
            msg.contains("\"tunnel\"") && msg.contains("\"cdw\""),
            "{msg}"
        );
        assert!(msg.contains("do not commute"), "{msg}");
        assert!(msg.contains("-2"), "{msg}");
        // A family whose neighbouring translates clash: twist_j on wire j+1 is
        // (1, -1) and twist_{j+1} there has l = (1, -1): phase 2 (derived).
        let msg = refused(MIXED, &["twist"]);
        assert!(msg.contains("two translates of \"twist\""), "{msg}");
    }

    #[test]
    fn terms_that_cannot_pin_are_refused() {
        // spin (1/2) l.n = (1/2)(1 + 1) = 1 (derived): not null.
        let msg = refused(MIXED, &["spinful"]);
        assert!(msg.contains("not null") && msg.contains("spinful"), "{msg}");
        let msg = refused(MIXED, &["tunnel", "nonsense"]);
        assert!(
            msg.contains("unknown term \"nonsense\"") && msg.contains("tunnel, cdw"),
            "{msg}"
        );
        // A vector on a K = (3) cell: K^-1 l = 1/3 is not integral (not local).
        let nonlocal = r#"
name = "laughlin wires"
[array]
wires = 4
boundary = "open"
K = [[3, 0], [0, -3]]
charge = [1, 1]
[array.V]
0 = [["1", "0"], ["0", "1"]]
[[term]]
name = "quasi"
vector = { 0 = [1, 1] }
"#;
        let msg = refused(nonlocal, &["quasi"]);
        assert!(msg.contains("not local") && msg.contains("1/3"), "{msg}");
    }

    #[test]
    fn windows_are_checked() {
        let sys = system(&laughlin_array(3, 5, "open"));
        let sel = pin(&sys, &["laughlin"]);
        let err = |w: usize| match analyse(&sys, &sel.pinned, Some(w)) {
            Err(pinflow::error::Error::Input(e)) => {
                assert_eq!(e.key, "--window");
                e.message
            }
            other => panic!("window {w} accepted: {:?}", other.map(|a| a.gapped_pairs)),
        };
        assert!(
            err(1).contains("no pinned term lies within 1 wire"),
            "{}",
            err(1)
        );
        assert!(err(1).contains("--window 2"));
        assert!(err(0).contains("at least 1"));
        assert!(err(5).contains("whole array"));
        let ring = system(&laughlin_array(3, 5, "periodic"));
        let sel = pin(&ring, &["laughlin"]);
        match analyse(&ring, &sel.pinned, Some(2)) {
            Err(pinflow::error::Error::Input(e)) => {
                assert_eq!(e.key, "--window");
                assert!(e.message.contains("periodic"), "{}", e.message);
            }
            _ => panic!("a window on a ring must be refused"),
        }
    }

    #[test]
    fn a_short_array_reports_only_the_strip() {
        // Two wires: a window holding the link covers the whole array.
        let a = run(&laughlin_array(3, 2, "open"), &["laughlin"], None);
        assert!(a.edges.is_empty());
        assert!(
            a.notes.iter().any(|n| n.contains("too short")),
            "{:?}",
            a.notes
        );
        assert_eq!(whole(&a).invariants.det, BigInt::from(-1));
    }

    // ------------------------------------------------------- infinite arrays

    /// An infinite array over `cell` (K, t) with named terms given as TOML
    /// particle tables, e.g. `{ 0 = [1, -1], 2 = [-1, 1] }`.
    fn line_model(k: &[Vec<i64>], t: &[i64], terms: &[(&str, String)]) -> String {
        let n = t.len();
        let mut s = format!(
            "name = \"line\"\n[array]\nwires = \"infinite\"\nK = {}\ncharge = {}\n[array.V]\n0 = {}\n",
            toml_int_matrix(k),
            toml_int_vector(t),
            toml_f64_matrix(&identity_f64(n)),
        );
        for (name, particles) in terms {
            s.push_str(&format!(
                "[[term]]\nname = \"{name}\"\nparticles = {particles}\n"
            ));
        }
        s
    }

    /// The spinless cell K = diag(1, -1), t = (1, 1).
    fn spinless_line(terms: &[(&str, String)]) -> String {
        line_model(&diag(&[1, -1]), &[1, 1], terms)
    }

    /// A TOML particle table from (offset, vector) pairs.
    fn table(parts: &[(usize, Vec<i64>)]) -> String {
        let inner: Vec<String> = parts
            .iter()
            .map(|(o, v)| format!("{o} = {}", toml_int_vector(v)))
            .collect();
        format!("{{ {} }}", inner.join(", "))
    }

    fn per_wire(a: &Analysis) -> &pinflow::edges::line::PerWire {
        a.per_wire
            .as_ref()
            .expect("per-wire data of an infinite array")
    }

    /// The n_c x n_c coefficient vectors of N(z), as i64.
    fn coefficients(a: &Analysis, family: usize) -> Vec<Vec<i64>> {
        per_wire(a).polynomials[family]
            .coeffs
            .iter()
            .map(|c| ints(c))
            .collect()
    }

    #[test]
    fn the_laughlin_line_gaps_one_pair_per_wire() {
        // Teo & Kane, PRB 89, 085101 (2014), physics reference section 6
        // (from memory): the coupled-wire filling-1/m state is fully gapped
        // in the bulk. Derived here: one null vector per link, N(z) = a + b z
        // with a = (-(m+1)/2, (m-1)/2), b = (-(m-1)/2, (m+1)/2), which is not
        // identically zero, so the rank over Q(z) is 1 = n_c / 2. At z = 1,
        // a + b = (-m, m) != 0 and at z = -1, a - b = (-1, -1) != 0: no drop
        // at q = 0 or pi.
        for m in [1i64, 3, 5] {
            let (a0, a1) = link(m);
            let toml = spinless_line(&[("laughlin", table(&[(0, a0.to_vec()), (1, a1.to_vec())]))]);
            let a = run(&toml, &["laughlin"], None);
            let pw = per_wire(&a);
            assert_eq!(pw.rank, 1, "m = {m}");
            assert_eq!((a.gapped_pairs, a.gapless_modes, a.fields), (1, 0, 2));
            assert_eq!(a.fully_gapped, Some(true));
            assert_eq!(pw.signature, (0, 0));
            assert_eq!((pw.rank_at_q0, pw.rank_at_pi), (1, 1));
            assert_eq!(coefficients(&a, 0), vec![a0.to_vec(), a1.to_vec()]);
            // Nothing ring-dependent is reported as a result.
            assert!(a.whole.is_none() && a.edges.is_empty() && a.window.is_none());
        }
    }

    #[test]
    fn a_term_that_skips_a_wire_gaps_one_pair_per_wire_whatever_the_ring() {
        // Derived: the range-2 density-wave family has N(z) = (1, -1)(1 - z^2),
        // rank 1 over Q(z), so 1 of 1 pairs per wire; it vanishes at z = +-1,
        // so the ranks at q = 0 and q = pi are 0. On rings it gaps
        // W - gcd(2, W) (see tests/cli_edges.rs): 1 per wire in the limit.
        let cdw2 = ("cdw2", table(&[(0, vec![1, -1]), (2, vec![-1, 1])]));
        let a = run(&spinless_line(std::slice::from_ref(&cdw2)), &["cdw2"], None);
        let pw = per_wire(&a).clone();
        assert_eq!(pw.rank, 1);
        assert_eq!(a.fully_gapped, Some(true));
        assert_eq!((pw.rank_at_q0, pw.rank_at_pi), (0, 0));
        assert_eq!(
            coefficients(&a, 0),
            vec![vec![1, -1], vec![0, 0], vec![-1, 1]]
        );
        // An unpinned term of range 2, 5 or 9 sets the stand-in ring to
        // 4 (R + 2) + 1 = 17, 29 or 45 wires: nothing reported may change.
        for reach in [5usize, 9] {
            let far = ("far", table(&[(0, vec![1, -1]), (reach, vec![-1, 1])]));
            let sys = system(&spinless_line(&[cdw2.clone(), far]));
            assert_eq!(sys.lattice.wires, 4 * (reach + 2) + 1);
            let sel = pin(&sys, &["cdw2"]);
            let b = analyse(&sys, &sel.pinned, None).unwrap();
            assert_eq!(per_wire(&b), &pw, "stand-in of {} wires", sys.lattice.wires);
            assert_eq!(
                (b.gapped_pairs, b.gapless_modes, b.fully_gapped, b.fields),
                (a.gapped_pairs, a.gapless_modes, a.fully_gapped, a.fields)
            );
        }
    }

    #[test]
    fn families_proportional_over_q_of_z_count_once() {
        // Derived: with a, b the filling-1/3 link vectors, the family written
        // from wire 1 has N(z) = z (a + b z) and the family {0: a, 1: a + b,
        // 2: b} has N(z) = (1 + z)(a + b z): both proportional to the first
        // over Q(z), so three families give rank 1, not 2 (their coefficient
        // vectors a, b, a + b do span Q^2). They commute: N_p(1/z)^T K N_q(z)
        // is a multiple of (a + b/z)^T K (a + b z) = 0 (a, b null and
        // a^T K b = 2 - 2 = 0). The sum family is null: 3 + 0 - 3 = 0.
        let (a0, a1) = link(3);
        let sum: Vec<i64> = a0.iter().zip(&a1).map(|(x, y)| x + y).collect();
        let toml = spinless_line(&[
            ("laughlin", table(&[(0, a0.to_vec()), (1, a1.to_vec())])),
            ("shifted", table(&[(1, a0.to_vec()), (2, a1.to_vec())])),
            (
                "sum",
                table(&[(0, a0.to_vec()), (1, sum), (2, a1.to_vec())]),
            ),
        ]);
        let a = run(&toml, &["laughlin", "shifted", "sum"], None);
        let pw = per_wire(&a);
        assert_eq!(pw.rank, 1);
        assert_eq!(a.gapped_pairs, 1);
        assert_eq!(a.fully_gapped, Some(true));
        // The certificate: 3 families of degree <= 2 over 2 fields give the
        // bound min(2, 3) * 2 = 4, and as rank 2 is never reached all
        // 5 points are evaluated.
        assert_eq!((pw.degree_bound, pw.points), (4, 5));
    }

    #[test]
    fn a_partly_pinned_line_gives_the_signature_of_its_gapless_modes() {
        // Derived: a cell (phi_R, phi_R', phi_L) with K = diag(1, 1, -1) and
        // the integer link n_j = (-1, 0, 0), n_{j+1} = (0, 0, 1) (null: 1 - 1;
        // translates meet on one wire with (0, 0, 1)^T K (-1, 0, 0) = 0).
        // N(z) = (-1, 0, z): rank 1, so 3 - 2 = 1 mode per wire of signature
        // (2 - 1, 1 - 1) = (1, 0), chiral; 2 r = 3 is impossible, so the bulk
        // is not fully gapped.
        let toml = line_model(
            &diag(&[1, 1, -1]),
            &[1, 1, 1],
            &[("link", table(&[(0, vec![-1, 0, 0]), (1, vec![0, 0, 1])]))],
        );
        let a = run(&toml, &["link"], None);
        let pw = per_wire(&a);
        assert_eq!((pw.rank, pw.gapless(), pw.signature), (1, 1, (1, 0)));
        assert_eq!(a.fully_gapped, Some(false));
        // Two spinless channels, one of them pinned by the filling-1/3 link:
        // r = 1 of 2, leaving 2 modes per wire of signature (1, 1) (derived).
        let (a0, a1) = link(3);
        let toml = line_model(
            &diag(&[1, -1, 1, -1]),
            &[1, 1, 1, 1],
            &[(
                "up",
                table(&[(0, vec![a0[0], a0[1], 0, 0]), (1, vec![a1[0], a1[1], 0, 0])]),
            )],
        );
        let a = run(&toml, &["up"], None);
        let pw = per_wire(&a);
        assert_eq!((pw.rank, pw.gapless(), pw.signature), (1, 2, (1, 1)));
        assert_eq!((a.gapped_pairs, a.gapless_modes), (1, 2));
        assert_eq!(a.fully_gapped, Some(false));
        // The same link on the second channel too: N_up and N_dn live on
        // disjoint fields, rank 2 = n_c / 2, fully gapped (derived).
        let both = toml.clone()
            + &format!(
                "[[term]]\nname = \"dn\"\nparticles = {}\n",
                table(&[(0, vec![0, 0, a0[0], a0[1]]), (1, vec![0, 0, a1[0], a1[1]])])
            );
        let a = run(&both, &["up", "dn"], None);
        assert_eq!((per_wire(&a).rank, a.gapless_modes), (2, 0));
        assert_eq!(a.fully_gapped, Some(true));
    }

    #[test]
    fn rings_approach_the_per_wire_rank() {
        // Derived (src/edges/line.rs): a ring of W wires gaps
        // sum over z^W = 1 of rank M(z), and rank M(z) = r except at the at
        // most B roots of a non-zero r x r minor, so W r - B r <= count <= W r.
        let (a0, a1) = link(3);
        let families = [
            ("laughlin", table(&[(0, a0.to_vec()), (1, a1.to_vec())])),
            ("cdw2", table(&[(0, vec![1, -1]), (2, vec![-1, 1])])),
            ("cdw3", table(&[(0, vec![1, -1]), (3, vec![-1, 1])])),
        ];
        for f in &families {
            let line = run(&spinless_line(std::slice::from_ref(f)), &[f.0], None);
            let pw = per_wire(&line);
            for w in [12usize, 13, 14] {
                let ring = spinless_line(std::slice::from_ref(f)).replace(
                    "wires = \"infinite\"",
                    &format!("wires = {w}\nboundary = \"periodic\""),
                );
                let count = run(&ring, &[f.0], None).gapped_pairs;
                let (r, b) = (pw.rank, pw.degree_bound);
                assert!(
                    w * r - b * r <= count && count <= w * r,
                    "{}: ring of {w} gaps {count}, per wire {r}, bound {b}",
                    f.0
                );
            }
        }
    }

    #[test]
    fn an_infinite_array_has_no_window() {
        let (a0, a1) = link(3);
        let toml = spinless_line(&[("laughlin", table(&[(0, a0.to_vec()), (1, a1.to_vec())]))]);
        let sys = system(&toml);
        let sel = pin(&sys, &["laughlin"]);
        let e = analyse(&sys, &sel.pinned, Some(2)).expect_err("no ends");
        assert!(
            e.to_string().contains("an infinite array (it has no ends)"),
            "{e}"
        );
    }
}
