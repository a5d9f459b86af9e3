//! The `pinflow edges` command line on the bundled filling-1/3 demo, opened
//! (`boundary = "open"`): every output format, the choice of the pinned set
//! by `--pin` or by the flow, `-o FILE`, and the bad-input errors (exit code
//! 2 and a message naming the flag). Runs the real binary in temporary
//! directories.
//!
//! Check values: the Laughlin edges K = (-3) and (3), filling -+1/3 [Kane,
//! Mukhopadhyay & Lubensky, PRL 88, 036401 (2002); Teo & Kane, PRB 89,
//! 085101 (2014); from memory], with the signs and the generator (-1, 2) on
//! wire 0 derived in docs/physics.md section 7 (see tests/edges.rs).

/// Every test sits in this module so that the filter `edges` selects them all.
mod edges {
    use std::path::{Path, PathBuf};

    use assert_cmd::Command;
    use serde_json::Value;

    fn demo() -> PathBuf {
        Path::new(env!("CARGO_MANIFEST_DIR")).join("flows/laughlin_third.toml")
    }

    /// The demo with `boundary = "open"`, written into `dir`.
    fn opened(dir: &tempfile::TempDir) -> PathBuf {
        let text = std::fs::read_to_string(demo()).expect("demo model");
        assert!(text.contains("boundary = \"periodic\""));
        let path = dir.path().join("open.toml");
        std::fs::write(
            &path,
            text.replace("boundary = \"periodic\"", "boundary = \"open\""),
        )
        .unwrap();
        path
    }

    fn tmp() -> tempfile::TempDir {
        tempfile::tempdir().expect("temporary directory")
    }

    fn pinflow(dir: &tempfile::TempDir) -> Command {
        let mut cmd = Command::cargo_bin("pinflow").expect("the pinflow binary");
        cmd.current_dir(dir.path());
        cmd
    }

    fn ok(dir: &tempfile::TempDir, args: &[&str]) -> String {
        let out = pinflow(dir)
            .arg("edges")
            .args(args)
            .assert()
            .code(0)
            .get_output()
            .stdout
            .clone();
        String::from_utf8(out).expect("UTF-8")
    }

    fn json(dir: &tempfile::TempDir, args: &[&str]) -> Value {
        let mut all = args.to_vec();
        all.extend(["--format", "json"]);
        let text = ok(dir, &all);
        serde_json::from_str(&text).unwrap_or_else(|e| panic!("invalid JSON ({e}):\n{text}"))
    }

    /// Run and expect exit code 2; returns standard error.
    fn bad(dir: &tempfile::TempDir, args: &[&str]) -> String {
        let out = pinflow(dir)
            .arg("edges")
            .args(args)
            .assert()
            .code(2)
            .get_output()
            .clone();
        assert!(out.stdout.is_empty(), "nothing on standard output");
        String::from_utf8(out.stderr).expect("UTF-8")
    }

    fn fact<'a>(text: &'a str, key: &str) -> &'a str {
        text.lines()
            .find(|l| l.trim_start().starts_with(key))
            .unwrap_or_else(|| panic!("no line {key} in\n{text}"))
            .trim_start()[key.len()..]
            .trim()
    }

    #[test]
    fn text_output_names_the_two_laughlin_edges() {
        let dir = tmp();
        let model = opened(&dir);
        let m = model.to_str().unwrap();
        let out = ok(&dir, &[m, "--pin", "tunnel"]);
        assert!(out.starts_with("Pinned phase and edges"), "{out}");
        // 8 wires, 7 links: r = W - 1 = 7, 16 - 14 = 2 modes.
        assert_eq!(fact(&out, "gapped right-left pairs"), "7");
        assert_eq!(fact(&out, "gapless modes left"), "2");
        assert!(fact(&out, "bulk fully gapped").starts_with("yes"), "{out}");
        assert!(fact(&out, "window").starts_with("2 wire(s)"), "{out}");
        let row = |end: &str| {
            out.lines()
                .find(|l| l.trim_start().starts_with(end))
                .unwrap_or_else(|| panic!("no row {end}:\n{out}"))
                .split_whitespace()
                .collect::<Vec<_>>()
                .join(" ")
        };
        assert!(
            row("left ").starts_with("left 0-1 1 (-3) (1) -1/3"),
            "{}",
            row("left ")
        );
        assert!(
            row("right ").starts_with("right 6-7 1 (3) (1) 1/3"),
            "{}",
            row("right ")
        );
        assert!(
            row("strip ").contains(" 0 (1, 1) non-chiral 1 "),
            "{}",
            row("strip ")
        );
        assert!(out.contains("wire 0: (-1, 2)"), "{out}");
        assert_eq!(out, ok(&dir, &[m, "--pin", "tunnel", "--format", "text"]));
    }

    #[test]
    fn json_has_the_documented_fields() {
        let dir = tmp();
        let model = opened(&dir);
        let r = json(&dir, &[model.to_str().unwrap(), "--pin", "tunnel"]);
        assert_eq!(r["gapped_pairs"], 7);
        assert_eq!(r["gapless_modes"], 2);
        assert_eq!(r["fully_gapped"], true);
        assert_eq!(r["chosen_by"], "--pin");
        let edges = r["edges"].as_array().expect("edges");
        assert_eq!(edges.len(), 2);
        let want = [("left", -3, "-1/3"), ("right", 3, "1/3")];
        for (e, (end, k, filling)) in edges.iter().zip(want) {
            assert_eq!(e["end"], end);
            assert_eq!(e["k_matrix"], serde_json::json!([[k]]));
            assert_eq!(e["charge"], serde_json::json!([1]));
            assert_eq!(e["filling"], filling);
            assert_eq!(e["det"], k);
            assert_eq!(e["abs_det"], 3);
            assert_eq!(e["quasiparticles"].as_array().unwrap().len(), 3);
        }
        assert_eq!(
            edges[0]["generators"][0]["wires"],
            serde_json::json!([{ "wire": 0, "particles": [-1, 2] }])
        );
        assert_eq!(r["whole"]["end"], "strip");
        assert_eq!(r["whole"]["det"], -1);
        assert_eq!(r["whole"]["signature"], serde_json::json!([1, 1]));
    }

    #[test]
    fn other_formats() {
        let dir = tmp();
        let model = opened(&dir);
        let m = model.to_str().unwrap();
        let md = ok(&dir, &[m, "--pin", "tunnel", "--format", "markdown"]);
        assert!(md.contains("|---|") && md.contains("| left |"), "{md}");
        let tex = ok(&dir, &[m, "--pin", "tunnel", "--format", "latex"]);
        assert!(tex.contains("\\begin{tabular}"), "{tex}");
        assert_eq!(
            tex.matches("\\begin{tabular}").count(),
            tex.matches("\\end{tabular}").count()
        );
        let csv = ok(&dir, &[m, "--pin", "tunnel", "--format", "csv"]);
        let mut rows = csv.lines();
        assert!(rows.next().unwrap().starts_with("end,wires,modes,k_matrix"));
        assert_eq!(rows.count(), 3, "left, right, strip: {csv}");
    }

    #[test]
    fn the_flow_chooses_the_pinned_set() {
        // At g = 0.9 (lambda = 0.8) the tunnelling term wins the flow of the
        // demo; its pinned phase has the Laughlin edges.
        let dir = tmp();
        let model = opened(&dir);
        let r = json(&dir, &[model.to_str().unwrap(), "--set", "g=0.9"]);
        assert_eq!(r["chosen_by"], "flow");
        assert_eq!(r["winner"], "tunnel");
        assert_eq!(r["parameters"]["g"], 0.9);
        let names: Vec<&str> = r["pinned"]
            .as_array()
            .unwrap()
            .iter()
            .map(|p| p["name"].as_str().unwrap())
            .collect();
        assert_eq!(names, vec!["tunnel"]);
        assert_eq!(r["edges"][0]["k_matrix"], serde_json::json!([[-3]]));
        assert_eq!(r["edges"][1]["k_matrix"], serde_json::json!([[3]]));
        // At the defaults some null term wins too, and it is the one pinned.
        let r = json(&dir, &[model.to_str().unwrap()]);
        let winner = r["winner"].as_str().expect("a winner");
        assert_eq!(r["pinned"][0]["name"], winner);
    }

    #[test]
    fn a_periodic_array_is_fully_gapped() {
        // The demo itself (a ring of 8 wires): r = 8 = N/2, nothing left.
        let dir = tmp();
        let r = json(&dir, &[demo().to_str().unwrap(), "--pin", "tunnel"]);
        assert_eq!(r["gapped_pairs"], 8);
        assert_eq!(r["gapless_modes"], 0);
        assert_eq!(r["fully_gapped"], true);
        assert_eq!(r["edges"], serde_json::json!([]));
        assert_eq!(r["whole"]["end"], "bulk");
    }

    #[test]
    fn output_file() {
        let dir = tmp();
        let model = opened(&dir);
        let out = ok(
            &dir,
            &[
                model.to_str().unwrap(),
                "--pin",
                "tunnel",
                "--format",
                "json",
                "-o",
                "e.json",
            ],
        );
        assert!(out.is_empty());
        let text = std::fs::read_to_string(dir.path().join("e.json")).unwrap();
        let r: Value = serde_json::from_str(&text).unwrap();
        assert_eq!(r["gapped_pairs"], 7);
    }

    #[test]
    fn help_names_the_flags() {
        let dir = tmp();
        let out = ok(&dir, &["--help"]);
        for flag in ["--pin", "--window", "--set", "--format"] {
            assert!(out.contains(flag), "{flag}:\n{out}");
        }
    }

    #[test]
    fn bad_input_exits_with_code_2_and_names_the_flag() {
        let dir = tmp();
        let model = opened(&dir);
        let m = model.to_str().unwrap();
        let e = bad(&dir, &[m, "--pin", "nonsense"]);
        assert!(
            e.contains("--pin") && e.contains("unknown term \"nonsense\""),
            "{e}"
        );
        assert!(e.contains("tunnel, cdw, hop, pair_hop"), "{e}");
        // tunnel and cdw: mutual phase -2 (derived in tests/edges.rs).
        let e = bad(&dir, &[m, "--pin", "tunnel", "--pin", "cdw"]);
        assert!(
            e.contains("--pin") && e.contains("\"tunnel\"") && e.contains("\"cdw\""),
            "{e}"
        );
        assert!(e.contains("do not commute"), "{e}");
        let e = bad(&dir, &[m, "--pin", "tunnel", "--window", "1"]);
        assert!(e.contains("--window") && e.contains("--window 2"), "{e}");
        let e = bad(&dir, &[m, "--pin", "tunnel", "--window", "8"]);
        assert!(e.contains("--window") && e.contains("whole array"), "{e}");
        let e = bad(&dir, &[m, "--pin", "tunnel", "--window", "0"]);
        assert!(e.contains("--window"), "{e}");
        let e = bad(&dir, &[m, "--pin", "tunnel", "--window", "two"]);
        assert!(e.contains("--window"), "{e}");
        let e = bad(
            &dir,
            &[demo().to_str().unwrap(), "--pin", "tunnel", "--window", "2"],
        );
        assert!(e.contains("--window") && e.contains("periodic"), "{e}");
        let e = bad(&dir, &[m, "--pin", "tunnel", "--y-strong", "-1"]);
        assert!(e.contains("--y-strong"), "{e}");
        let e = bad(&dir, &[m, "--set", "nope=1"]);
        assert!(e.contains("--set") && e.contains("nope"), "{e}");
        let e = bad(&dir, &["missing.toml", "--pin", "tunnel"]);
        assert!(e.contains("missing.toml"), "{e}");
    }

    #[test]
    fn a_gapless_point_asks_for_pin() {
        // One spinless wire without interactions: umklapp has Delta = 4
        // (Giamarchi, "Quantum Physics in One Dimension" (2004), ch. 2, from
        // memory: 4 K with K = 1), so nothing pins.
        let dir = tmp();
        let path = dir.path().join("wire.toml");
        std::fs::write(
            &path,
            r#"
name = "free wire"
[fields]
K = [[1, 0], [0, -1]]
charge = [1, 1]
V = [[1, 0], [0, 1]]
[[term]]
name = "umklapp"
particles = [2, -2]
"#,
        )
        .unwrap();
        let e = bad(&dir, &[path.to_str().unwrap()]);
        assert!(e.contains("--pin") && e.contains("gapless"), "{e}");
        // Pinned by hand, it gaps the wire's only pair.
        let r = json(&dir, &[path.to_str().unwrap(), "--pin", "umklapp"]);
        assert_eq!(r["gapped_pairs"], 1);
        assert_eq!(r["fully_gapped"], true);
    }

    /// A charged pinned term (proximity pairing, charge t.m = 2 for m =
    /// (1, 1) on a spinless wire: derived from charge = t.m with t = (1, 1))
    /// breaks charge conservation to conservation modulo 2; the report says
    /// so instead of presenting the fillings as a Hall response. The
    /// neutral Laughlin pinning keeps charge (`null`).
    #[test]
    fn a_charged_pinned_set_says_charge_is_conserved_only_modulo_its_gcd() {
        let dir = tmp();
        let path = dir.path().join("two.toml");
        std::fs::write(
            &path,
            r#"[fields]
K = [[1, 0, 0, 0], [0, -1, 0, 0], [0, 0, 1, 0], [0, 0, 0, -1]]
charge = [1, 1, 1, 1]
V = [[1, 0, 0, 0], [0, 1, 0, 0], [0, 0, 1, 0], [0, 0, 0, 1]]

[[term]]
name = "pairing"
particles = [0, 0, 1, 1]
allowed_charge = 2
"#,
        )
        .unwrap();
        let p = path.to_str().unwrap();
        let r = json(&dir, &[p, "--pin", "pairing"]);
        assert_eq!(r["charge_conserved_modulo"], 2, "{r}");
        assert_eq!(r["gapped_pairs"], 1);
        assert_eq!(r["whole"]["modes"], 2);
        let notes = r["notes"].as_array().unwrap();
        assert!(
            notes
                .iter()
                .any(|n| n.as_str().unwrap().contains("conserved only modulo 2")),
            "{notes:?}"
        );
        let text = ok(&dir, &[p, "--pin", "pairing"]);
        assert!(fact(&text, "charge").contains("modulo 2"), "{text}");
        let open = opened(&dir);
        let r = json(&dir, &[open.to_str().unwrap(), "--pin", "tunnel"]);
        assert!(r["charge_conserved_modulo"].is_null(), "{r}");
    }

    /// An infinite array reports per-wire counts that no ring size enters.
    /// On a ring of W wires, pinning c_j - c_{j+2} (c_j the density wave of
    /// wire j) gaps W - gcd(2, W) pairs (derived: j -> j + 2 splits the ring
    /// into gcd(2, W) cycles, and each cycle keeps its sum free), so 17 wires
    /// leave 2 modes and 18 leave 4. On the infinite line the family has
    /// N(z) = (1, -1)(1 - z^2), of rank 1 over Q(z): 1 of 1 pairs per wire,
    /// fully gapped, with the rank dropping to 0 at q = 0 and q = pi alone
    /// (derived). (Regression: the line once gave the 17-wire stand-in
    /// ring's counts, with generators of charge 17, as its own.)
    #[test]
    fn an_infinite_array_reports_per_wire_counts() {
        let dir = tmp();
        let model = |wires: &str, extra: &str| {
            format!(
                "[params]\nlambda = 0.3\n[array]\nwires = {wires}\nK = [[1, 0], [0, -1]]\ncharge = [1, 1]\n[array.V]\n0 = [[\"1\", \"lambda\"], [\"lambda\", \"1\"]]\n[[term]]\nname = \"cdw2\"\nparticles = {{ 0 = [1, -1], 2 = [-1, 1] }}\n{extra}"
            )
        };
        for (file, wires, gapped, left) in [("r17.toml", "17", 16, 2), ("r18.toml", "18", 16, 4)] {
            std::fs::write(dir.path().join(file), model(wires, "")).unwrap();
            let v = json(&dir, &[file, "--pin", "cdw2"]);
            assert_eq!(v["gapped_pairs"], gapped, "{file}");
            assert_eq!(v["gapless_modes"], left, "{file}");
            assert!(v["gapped_pairs_per_wire"].is_null(), "{file}");
            assert_eq!(v["infinite"], false);
        }
        std::fs::write(dir.path().join("line.toml"), model("\"infinite\"", "")).unwrap();
        // An unpinned term reaching 6 wires away makes the stand-in ring
        // 4 (6 + 2) + 1 = 33 wires instead of 17.
        let far = "[[term]]\nname = \"far\"\nparticles = { 0 = [1, -1], 6 = [-1, 1] }\n";
        std::fs::write(dir.path().join("far.toml"), model("\"infinite\"", far)).unwrap();
        let v = json(&dir, &["line.toml", "--pin", "cdw2"]);
        assert_eq!(v["infinite"], true);
        assert_eq!(v["boundary"], "infinite");
        assert!(v["wires"].is_null(), "{v}");
        assert_eq!(v["fields"], 2);
        assert_eq!(v["gapped_pairs_per_wire"], 1);
        assert_eq!(v["gapped_pairs"], 1);
        assert_eq!(v["gapless_modes"], 0);
        assert_eq!(v["fully_gapped"], true);
        assert!(v["whole"].is_null(), "no ring-dependent theory: {v}");
        assert_eq!(v["edges"], serde_json::json!([]));
        assert_eq!(v["per_wire"]["rank_at_q_0"], 0);
        assert_eq!(v["per_wire"]["rank_at_q_pi"], 0);
        assert!(v["pinned"][0]["translates"].is_null());
        assert_eq!(v["pinned"][0]["n_of_z"], "(1, -1) + (-1, 1) z^2");
        let w = json(&dir, &["far.toml", "--pin", "cdw2"]);
        for key in [
            "gapped_pairs",
            "gapless_modes",
            "gapped_pairs_per_wire",
            "fully_gapped",
            "per_wire",
            "pinned",
            "fields",
        ] {
            assert_eq!(v[key], w[key], "{key} depends on the stand-in ring");
        }
        let text = ok(&dir, &["line.toml", "--pin", "cdw2"]);
        assert_eq!(
            fact(&text, "gapped right-left pairs"),
            "1 per wire (of 1)",
            "{text}"
        );
        assert!(
            fact(&text, "bulk fully gapped").starts_with("yes"),
            "{text}"
        );
        assert!(text.contains("at the single momentum q = 0"), "{text}");
        assert!(!text.contains("stand-in ring of"), "{text}");
        // A cell of two channels with only one pinned: 2 gapless modes per
        // wire, whose K matrix is not shown (derived: r = 1 of 2).
        std::fs::write(
            dir.path().join("two.toml"),
            "[array]\nwires = \"infinite\"\nK = [[1, 0, 0, 0], [0, -1, 0, 0], [0, 0, 1, 0], [0, 0, 0, -1]]\ncharge = [1, 1, 1, 1]\n[array.V]\n0 = [[1, 0, 0, 0], [0, 1, 0, 0], [0, 0, 1, 0], [0, 0, 0, 1]]\n[[term]]\nname = \"up\"\nparticles = { 0 = [-2, 1, 0, 0], 1 = [-1, 2, 0, 0] }\n",
        )
        .unwrap();
        let text = ok(&dir, &["two.toml", "--pin", "up"]);
        assert_eq!(
            fact(&text, "gapped right-left pairs"),
            "1 per wire (of 2)",
            "{text}"
        );
        assert!(
            fact(&text, "gapless modes left").contains("not computed for the infinite array"),
            "{text}"
        );
        assert!(fact(&text, "bulk fully gapped").starts_with("no"), "{text}");
    }

    /// The bundled (331) strip: pinning both tunnelling terms leaves the
    /// Halperin (331) edge at each end, K = +-[[3, 1], [1, 3]], det 8,
    /// filling +-1/2, quasiparticle group Z_8 [Halperin, Helv. Phys. Acta
    /// 56, 75 (1983); filling t^T K^-1 t = (3 - 1 - 1 + 3)/8 = 1/2,
    /// derived]. Both terms have Delta = 3 sqrt((1 + g)/(1 - g)) at s = 1
    /// (derived in the model's header: the u's are the normal modes and the
    /// link couples uR with uL as in a Luttinger liquid), 1.5 at g = -0.6.
    #[test]
    fn the_331_strip_leaves_the_331_edges() {
        let dir = tmp();
        let m = Path::new(env!("CARGO_MANIFEST_DIR")).join("flows/halperin_331_strip.toml");
        let m = m.to_str().unwrap();
        let v = json(&dir, &[m, "--pin", "t_up", "--pin", "t_dn"]);
        assert_eq!(v["fully_gapped"], true);
        let edges = v["edges"].as_array().unwrap();
        assert_eq!(edges.len(), 2);
        for (e, sign) in edges.iter().zip([-1i64, 1]) {
            let k: Vec<Vec<i64>> = serde_json::from_value(e["k_matrix"].clone()).unwrap();
            assert_eq!(k.len(), 2);
            let det = k[0][0] * k[1][1] - k[0][1] * k[1][0];
            assert_eq!(det, 8, "{k:?}");
            assert_eq!(e["abs_det"], 8);
            assert_eq!(e["group"], "Z_8");
            let expect = if sign > 0 { "1/2" } else { "-1/2" };
            assert_eq!(e["filling"], expect);
            let sig = if sign > 0 { [2, 0] } else { [0, 2] };
            assert_eq!(e["signature"], serde_json::json!(sig));
            // The trivial type heads the table, even where another type
            // has charge 0 and spin 0 modulo 1/2 too (l K^-1 l = 1 for
            // l = (-1, 1): spin 1/2).
            let first = &e["quasiparticles"][0];
            assert_eq!(first["l"], serde_json::json!([0, 0]), "{first}");
        }
        let out = pinflow(&dir)
            .args(["dims", m, "--set", "g=-0.6", "--format", "json"])
            .assert()
            .code(0)
            .get_output()
            .stdout
            .clone();
        let d: Value = serde_json::from_slice(&out).unwrap();
        for t in &d["terms"].as_array().unwrap()[..2] {
            let delta = t["dimension"].as_f64().unwrap();
            assert!((delta - 1.5).abs() < 1e-12, "{}: {delta}", t["name"]);
        }
    }
}
