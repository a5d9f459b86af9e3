//! The `pinflow hunt` command line: every output format on the demo models,
//! the certificate line, `--emit-terms` read back by `pinflow dims`, the
//! refusal above the size limit, and bad input (exit code 2 with a message
//! naming the flag). Runs the real binary in temporary directories.
//!
//! The tests sit in a module named `search` so that the filter of
//! `cargo test --test hunt --test cli_hunt --lib search` selects them all.

mod search {
    use std::path::{Path, PathBuf};

    use assert_cmd::Command;
    use predicates::prelude::*;
    use serde_json::Value;

    fn flow(name: &str) -> PathBuf {
        Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("flows")
            .join(name)
    }

    fn tmp() -> tempfile::TempDir {
        tempfile::tempdir().expect("temporary directory")
    }

    fn pinflow(dir: &tempfile::TempDir) -> Command {
        let mut cmd = Command::cargo_bin("pinflow").expect("the pinflow binary");
        cmd.current_dir(dir.path());
        cmd
    }

    fn hunt_ok(model: &Path, args: &[&str]) -> String {
        let dir = tmp();
        let out = pinflow(&dir)
            .arg("hunt")
            .arg(model)
            .args(args)
            .assert()
            .code(0)
            .get_output()
            .stdout
            .clone();
        String::from_utf8(out).expect("UTF-8 output")
    }

    fn hunt_json(model: &Path, args: &[&str]) -> Value {
        let mut all = vec!["--format", "json"];
        all.extend_from_slice(args);
        let text = hunt_ok(model, &all);
        serde_json::from_str(&text).unwrap_or_else(|e| panic!("invalid JSON ({e}):\n{text}"))
    }

    /// Run with bad arguments: exit code 2, and stderr contains every fragment.
    fn hunt_fails(model: &Path, args: &[&str], fragments: &[&str]) {
        let dir = tmp();
        let out = pinflow(&dir)
            .arg("hunt")
            .arg(model)
            .args(args)
            .assert()
            .code(2)
            .get_output()
            .stderr
            .clone();
        let err = String::from_utf8(out).unwrap();
        for f in fragments {
            assert!(err.contains(f), "{args:?}: `{f}` not in\n{err}");
        }
        assert!(!err.contains("panicked"), "{err}");
    }

    // ---------------------------------------------------------------- formats

    #[test]
    fn text_ends_with_the_certificate_and_the_count() {
        for name in ["spinless_wire.toml", "laughlin_third.toml"] {
            let text = hunt_ok(&flow(name), &[]);
            let lines: Vec<&str> = text.trim_end().lines().collect();
            let n = lines.len();
            assert!(lines[n - 2].starts_with("certificate: "), "{name}:\n{text}");
            assert!(lines[n - 1].starts_with("examined: "), "{name}:\n{text}");
            assert!(
                text.contains("operators with Delta <= 2"),
                "{name}:\n{text}"
            );
        }
    }

    #[test]
    fn demo_wire_lists_backscattering_with_delta_k_l() {
        // Giamarchi (2004), ch. 2: at lambda = 0.3 (the demo default)
        // K_L = sqrt(0.7/1.3) and backscattering m = (1,-1) has Delta = K_L; it
        // is the only charge-neutral spin-zero operator with Delta <= 2
        // (4 K_L = 2.94 for umklapp).
        let r = hunt_json(&flow("spinless_wire.toml"), &[]);
        let ops = r["operators"].as_array().unwrap();
        assert_eq!(ops.len(), 1, "{r:#}");
        let b = &ops[0];
        assert_eq!(b["particles"], serde_json::json!([1, -1]));
        assert_eq!(b["vector"], serde_json::json!([1, 1]));
        let kl = (0.7f64 / 1.3).sqrt();
        assert!((b["dimension"].as_f64().unwrap() - kl).abs() < 1e-12);
        assert_eq!(b["spin"], "0");
        assert_eq!(b["charge"], 0);
        assert_eq!(b["model_term"], "backscatter");
        assert_eq!(r["max_dim"], 2.0);
        assert!(r["examined"].as_u64().unwrap() > 0);
        assert!(r["certificate"]
        .as_str()
        .unwrap()
        .starts_with("certificate: 1 local, charge-neutral, spin-zero, momentum-conserving operator with Delta <= 2 found"));
        // Pairing with --charge 2: Delta = 1/K_L.
        let p = hunt_json(&flow("spinless_wire.toml"), &["--charge", "2"]);
        let ops = p["operators"].as_array().unwrap();
        assert_eq!(ops.len(), 1);
        assert_eq!(ops[0]["particles"], serde_json::json!([1, 1]));
        assert_eq!(ops[0]["charge"], 2);
        assert!((ops[0]["dimension"].as_f64().unwrap() - 1.0 / kl).abs() < 1e-12);
    }

    #[test]
    fn json_has_the_documented_fields() {
        let r = hunt_json(
            &flow("laughlin_third.toml"),
            &["--set", "g=0.8", "--range", "3"],
        );
        for key in [
            "operators",
            "examined",
            "max_dim",
            "certificate",
            "estimate",
            "range",
            "bound_tolerance",
        ] {
            assert!(!r[key].is_null(), "missing {key}");
        }
        assert_eq!(r["range"], 3);
        let ops = r["operators"].as_array().unwrap();
        assert!(!ops.is_empty());
        let mut last = 0.0;
        for op in ops {
            let m = op["particles"].as_array().expect("particles");
            assert_eq!(m.len(), 6, "3 wires of 2 fields");
            assert_eq!(op["vector"].as_array().unwrap().len(), 6);
            let d = op["dimension"].as_f64().unwrap();
            assert!(
                d <= 2.0 * (1.0 + 1e-9) && d >= last - 1e-9,
                "sorted by dimension"
            );
            last = d;
            assert_eq!(op["spin"], "0");
            assert_eq!(op["charge"], 0);
            assert!(op["momentum"].as_f64().unwrap().abs() < 1e-9);
            assert!(
                op["particles_by_wire"]["0"].is_array(),
                "support starts at offset 0"
            );
        }
        // The model's own tunnelling term is among them.
        assert!(ops.iter().any(|o| o["model_term"] == "tunnel"));
    }

    #[test]
    fn csv_has_one_row_per_operator() {
        let args = ["--set", "g=0.8", "--range", "3"];
        let r = hunt_json(&flow("laughlin_third.toml"), &args);
        let mut all = vec!["--format", "csv"];
        all.extend_from_slice(&args);
        let csv = hunt_ok(&flow("laughlin_third.toml"), &all);
        let mut reader = csv::Reader::from_reader(csv.as_bytes());
        let headers = reader.headers().unwrap().clone();
        assert_eq!(&headers[0], "particles");
        assert_eq!(&headers[2], "dimension");
        let rows: Vec<csv::StringRecord> = reader.records().map(|r| r.unwrap()).collect();
        assert_eq!(rows.len(), r["operators"].as_array().unwrap().len());
    }

    #[test]
    fn markdown_and_latex_carry_the_certificate() {
        let md = hunt_ok(&flow("laughlin_third.toml"), &["--format", "markdown"]);
        assert!(md.starts_with("## Operator hunt"));
        assert!(md.contains("| # | particles m |"));
        assert!(md.contains("**certificate: 2 local"), "{md}");
        let tex = hunt_ok(&flow("laughlin_third.toml"), &["--format", "latex"]);
        assert!(tex.contains("\\begin{tabular}"));
        assert!(tex.contains("% certificate: 2 local"), "{tex}");
    }

    #[test]
    fn certificate_when_nothing_is_found() {
        // Derived: on one spinless wire the neutral spin-zero operators are
        // m = (n, -n) with Delta = n^2 K_L, K_L = sqrt(0.7/1.3) = 0.734 at the
        // demo point, so none has Delta <= 0.5.
        let text = hunt_ok(&flow("spinless_wire.toml"), &["--max-dim", "0.5"]);
        assert!(text.contains("certificate: no local, charge-neutral, spin-zero, momentum-conserving operator with Delta <= 0.5 exists among the 2 fields"), "{text}");
        assert!(!text.contains("particles m"), "no empty table: {text}");
    }

    #[test]
    fn output_file() {
        let dir = tmp();
        pinflow(&dir)
            .args(["hunt"])
            .arg(flow("spinless_wire.toml"))
            .args(["-o", "hunt.txt"])
            .assert()
            .code(0)
            .stdout(predicate::str::is_empty());
        let text = std::fs::read_to_string(dir.path().join("hunt.txt")).unwrap();
        assert!(text.contains("certificate: "));
    }

    // ------------------------------------------------------------ emit-terms

    #[test]
    fn emitted_terms_are_read_back_by_dims() {
        let dir = tmp();
        let model = flow("laughlin_third.toml");
        let blocks = hunt_ok(&model, &["--set", "g=0.8", "--range", "3", "--emit-terms"]);
        assert!(blocks.contains("[[term]]"), "{blocks}");
        assert!(blocks.contains("already terms of the model (not repeated): tunnel"));
        let merged = format!("{}\n{blocks}", std::fs::read_to_string(&model).unwrap());
        let path = dir.path().join("merged.toml");
        std::fs::write(&path, merged).unwrap();
        let out = pinflow(&dir)
            .args(["dims", "--format", "json", "--set", "g=0.8"])
            .arg(&path)
            .assert()
            .code(0)
            .get_output()
            .stdout
            .clone();
        let dims: Value = serde_json::from_slice(&out).unwrap();
        let names: Vec<&str> = dims["terms"]
            .as_array()
            .unwrap()
            .iter()
            .map(|t| t["name"].as_str().unwrap())
            .collect();
        assert!(
            names.contains(&"hunt_1") && names.contains(&"hunt_2"),
            "{names:?}"
        );
        // Searching the merged model again: every operator is now a model term.
        let again = hunt_json(&path, &["--set", "g=0.8", "--range", "3"]);
        assert!(again["operators"]
            .as_array()
            .unwrap()
            .iter()
            .all(|o| o["model_term"].is_string()));
    }

    // ------------------------------------------------------------ guard rails

    #[test]
    fn refuses_a_search_beyond_reach_unless_forced() {
        // 16 fields at max-dim 30: about 4e13 lattice points.
        hunt_fails(
            &flow("laughlin_third.toml"),
            &["--max-dim", "30", "--range", "8"],
            &[
                "--max-dim",
                "above the limit",
                "--range",
                "--force",
                "lattice points",
            ],
        );
        // One wire at max-dim 1e8: about 6e8 points (pi 2 Delta / sqrt(det K D K)).
        hunt_fails(
            &flow("spinless_wire.toml"),
            &["--max-dim", "1e8"],
            &["above the limit", "--force"],
        );
    }

    // -------------------------------------------------------------- bad input

    #[test]
    fn bad_flags_exit_2_with_a_clear_message() {
        let wire = flow("spinless_wire.toml");
        let array = flow("laughlin_third.toml");
        hunt_fails(
            &wire,
            &["--max-dim", "-1"],
            &["--max-dim", "expected a finite number > 0"],
        );
        hunt_fails(&wire, &["--max-dim", "0"], &["--max-dim", "> 0"]);
        hunt_fails(&wire, &["--max-dim", "inf"], &["--max-dim", "finite"]);
        hunt_fails(
            &wire,
            &["--max-dim", "two"],
            &["--max-dim", "expected a number"],
        );
        hunt_fails(&array, &["--range", "0"], &["--range", "integer >= 1"]);
        hunt_fails(
            &array,
            &["--range", "9"],
            &["--range", "expected at most 8"],
        );
        hunt_fails(
            &wire,
            &["--range", "2"],
            &["--range", "arrays of wires only"],
        );
        hunt_fails(
            &wire,
            &["--spin", "3"],
            &["--spin", "possible values: 0, any"],
        );
        hunt_fails(&wire, &["--charge", "half"], &["--charge", "integer"]);
        hunt_fails(
            &wire,
            &["--momentum", "maybe"],
            &["--momentum", "conserved"],
        );
        hunt_fails(&wire, &["--bogus"], &["--bogus"]);
        hunt_fails(
            &wire,
            &["--set", "nope=1"],
            &["--set", "unknown parameter `nope`"],
        );
        hunt_fails(&wire, &["--set", "lambda=1.5"], &["not positive definite"]);
        hunt_fails(
            &wire,
            &["--emit-terms", "--format", "json"],
            &["--emit-terms", "cannot be used with"],
        );
    }

    #[test]
    fn momentum_conserved_needs_momenta() {
        let dir = tmp();
        let path = dir.path().join("plain.toml");
        std::fs::write(
            &path,
            "[fields]\nK = [[1, 0], [0, -1]]\ncharge = [1, 1]\nV = [[1, 0.2], [0.2, 1]]\n",
        )
        .unwrap();
        hunt_fails(
            &path,
            &["--momentum", "conserved"],
            &["--momentum", "the model gives no momenta"],
        );
        // Without the flag the search runs and says nothing about momenta.
        let text = hunt_ok(&path, &[]);
        assert!(
            text.contains("certificate: 1 local, charge-neutral, spin-zero operator"),
            "{text}"
        );
    }

    /// Without momenta in the model nothing is filtered by momentum, and
    /// the filters line says so (a 2k_F backscattering term would otherwise
    /// read as allowed). With momenta the line names the check instead.
    #[test]
    fn the_filters_say_when_momentum_is_not_checked() {
        let free = hunt_ok(&flow("sliding_array.toml"), &[]);
        let line = free
            .lines()
            .find(|l| l.trim_start().starts_with("filters"))
            .expect("a filters line");
        assert!(
            line.contains("momentum not checked (the model gives no momenta)"),
            "{line}"
        );
        let with = hunt_ok(&flow("laughlin_third.toml"), &[]);
        let line = with
            .lines()
            .find(|l| l.trim_start().starts_with("filters"))
            .expect("a filters line");
        assert!(line.contains("momentum conserved"), "{line}");
        assert!(!line.contains("not checked"), "{line}");
    }
}
