//! The `pinflow dims` command line: every output format on the demo models,
//! `--set`, `-o FILE`, and the bad-input errors (exit code 2 and a message
//! that names the offending key). Runs the real binary in temporary
//! directories.

use std::path::{Path, PathBuf};

use assert_cmd::Command;
use predicates::prelude::*;
use serde_json::Value;

fn flow(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("flows")
        .join(name)
}

/// `pinflow` run in a fresh temporary directory (kept alive by the caller).
fn pinflow(dir: &tempfile::TempDir) -> Command {
    let mut cmd = Command::cargo_bin("pinflow").expect("the pinflow binary");
    cmd.current_dir(dir.path());
    cmd
}

fn tmp() -> tempfile::TempDir {
    tempfile::tempdir().expect("temporary directory")
}

/// Run `dims` with extra arguments and return its standard output.
fn dims_ok(model: &Path, args: &[&str]) -> String {
    let dir = tmp();
    let out = pinflow(&dir)
        .arg("dims")
        .arg(model)
        .args(args)
        .assert()
        .success()
        .code(0)
        .get_output()
        .stdout
        .clone();
    String::from_utf8(out).expect("UTF-8 output")
}

fn dims_json(model: &Path, args: &[&str]) -> Value {
    let mut all = vec!["--format", "json"];
    all.extend_from_slice(args);
    let text = dims_ok(model, &all);
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("invalid JSON ({e}):\n{text}"))
}

fn json_term<'a>(r: &'a Value, name: &str) -> &'a Value {
    r["terms"]
        .as_array()
        .unwrap()
        .iter()
        .find(|t| t["name"] == name)
        .unwrap_or_else(|| panic!("no term {name}"))
}

fn is_fraction(s: &str) -> bool {
    let (p, q) = s.split_once('/').unwrap_or((s, "1"));
    p.parse::<i64>().is_ok() && q.parse::<u64>().is_ok_and(|q| q > 0)
}

fn close(a: f64, b: f64, tol: f64) -> bool {
    (a - b).abs() <= tol * b.abs().max(1.0)
}

// ---------------------------------------------------------------- formats

#[test]
fn json_has_the_documented_fields() {
    for name in ["spinless_wire.toml", "laughlin_third.toml"] {
        let r = dims_json(&flow(name), &[]);
        let fields = r["fields"].as_u64().expect("fields") as usize;
        let sig = r["signature"].as_array().expect("signature");
        assert_eq!(sig.len(), 2);
        let (np, nm) = (sig[0].as_u64().unwrap(), sig[1].as_u64().unwrap());
        assert_eq!((np + nm) as usize, fields, "{name}: n+ + n- = fields");
        assert!(is_fraction(r["filling"].as_str().expect("filling string")));
        let det = r["det_k"].as_str().expect("det_k string");
        assert!(det.parse::<i64>().is_ok(), "{name}: det_k = {det}");
        let v = r["velocities"].as_array().expect("velocities");
        assert_eq!(v.len(), fields);
        assert!(v.iter().all(|x| x.as_f64().is_some_and(|x| x > 0.0)));
        let terms = r["terms"].as_array().expect("terms");
        assert!(!terms.is_empty());
        for t in terms {
            assert!(t["name"].is_string());
            let l = t["vector"].as_array().expect("vector");
            assert_eq!(l.len(), fields);
            assert!(l.iter().all(|x| x.is_i64()));
            assert!(t["particles"].is_array() || t["particles"].is_null());
            assert!(t["dimension"].as_f64().is_some_and(|d| d > 0.0));
            assert!(is_fraction(t["spin"].as_str().expect("spin string")));
            assert!(is_fraction(t["charge"].as_str().expect("charge string")));
            for key in ["local", "null", "relevant"] {
                assert!(t[key].is_boolean(), "{name}: {key}");
            }
        }
        let c = r["commutation"].as_array().expect("commutation");
        assert_eq!(c.len(), terms.len());
        for row in c {
            let row = row.as_array().expect("a row");
            assert_eq!(row.len(), terms.len());
            assert!(row.iter().all(|x| x.as_str().is_some_and(is_fraction)));
        }
    }
}

#[test]
fn json_values_of_the_demo_wire() {
    // Giamarchi, "Quantum Physics in One Dimension" (2004), ch. 2: at
    // lam = 0.3 (the default), K_L = sqrt(0.7/1.3); backscattering
    // Delta = K_L, umklapp 4 K_L, pairing 1/K_L (charge 2).
    let r = dims_json(&flow("spinless_wire.toml"), &[]);
    let kl = (0.7f64 / 1.3).sqrt();
    let d = |n: &str| json_term(&r, n)["dimension"].as_f64().unwrap();
    assert!(close(d("backscatter"), kl, 1e-12));
    assert!(close(d("umklapp"), 4.0 * kl, 1e-12));
    assert!(close(d("pairing"), 1.0 / kl, 1e-12));
    assert_eq!(json_term(&r, "pairing")["charge"], "2");
    assert_eq!(r["filling"], "0");
    assert_eq!(r["det_k"], "-1");
}

#[test]
fn text_output() {
    for (name, terms) in [
        (
            "spinless_wire.toml",
            &["backscatter", "umklapp", "pairing"][..],
        ),
        (
            "laughlin_third.toml",
            &["tunnel", "cdw", "hop", "pair_hop"][..],
        ),
    ] {
        let out = dims_ok(&flow(name), &[]);
        assert!(out.starts_with("Fixed-point data"), "{out}");
        assert!(out.contains("filling") && out.contains("det K"));
        for t in terms {
            assert!(out.contains(t), "{name}: text names term {t}");
        }
        // The same as --format text.
        assert_eq!(out, dims_ok(&flow(name), &["--format", "text"]));
    }
}

#[test]
fn csv_has_a_header_and_one_row_per_term() {
    for (name, n_terms) in [("spinless_wire.toml", 3), ("laughlin_third.toml", 4)] {
        let out = dims_ok(&flow(name), &["--format", "csv"]);
        let mut reader = csv::Reader::from_reader(out.as_bytes());
        let headers = reader.headers().expect("a header row").clone();
        for h in ["name", "dimension", "spin", "charge"] {
            assert!(headers.iter().any(|x| x == h), "{name}: CSV column {h}");
        }
        let rows: Vec<csv::StringRecord> = reader.records().map(|r| r.unwrap()).collect();
        assert_eq!(rows.len(), n_terms, "{name}: one row per term");
        let col = headers.iter().position(|h| h == "dimension").unwrap();
        for row in &rows {
            assert_eq!(row.len(), headers.len());
            assert!(row[col].parse::<f64>().is_ok());
        }
    }
}

#[test]
fn markdown_and_latex_tables() {
    for name in ["spinless_wire.toml", "laughlin_third.toml"] {
        let md = dims_ok(&flow(name), &["--format", "markdown"]);
        assert!(
            md.lines().filter(|l| l.starts_with('|')).count() >= 3,
            "{md}"
        );
        assert!(md.contains("|---|"));
        let tex = dims_ok(&flow(name), &["--format", "latex"]);
        assert!(tex.contains("\\begin{tabular}"), "{tex}");
        assert!(tex.contains("\\end{tabular}"));
        assert_eq!(
            tex.matches("\\begin{tabular}").count(),
            tex.matches("\\end{tabular}").count()
        );
    }
}

// ------------------------------------------------------------- --set, -o

#[test]
fn set_changes_the_dimension_as_the_formula_says() {
    // Giamarchi (2004), ch. 2: lam = 0.6 gives K_L = sqrt(0.4/1.6) = 1/2,
    // so umklapp (4 K_L) is marginal, Delta = 2, and backscattering 1/2.
    let r = dims_json(&flow("spinless_wire.toml"), &["--set", "lambda=0.6"]);
    assert_eq!(r["parameters"]["lambda"], 0.6);
    let d = |n: &str| json_term(&r, n)["dimension"].as_f64().unwrap();
    assert!(close(d("umklapp"), 2.0, 1e-12), "{}", d("umklapp"));
    assert!(close(d("backscatter"), 0.5, 1e-12));

    // Teo & Kane, PRB 89, 085101 (2014) (from memory; derived in
    // checks_coupled_wires.rs): intrawire lam = (9 - 1)/(9 + 1) = 0.8 and no
    // interwire interaction give Delta = 3 for the filling-1/3 term. The
    // filling-1 hop then has Delta = (K_L + 1/K_L)/2 with K_L = 1/3, i.e. 5/3
    // (derived, same formula).
    let r = dims_json(
        &flow("laughlin_third.toml"),
        &["--set", "lambda=0.8", "--set", "g=0"],
    );
    let d = |n: &str| json_term(&r, n)["dimension"].as_f64().unwrap();
    assert!(close(d("tunnel"), 3.0, 1e-12), "{}", d("tunnel"));
    assert!(close(d("hop"), 5.0 / 3.0, 1e-12), "{}", d("hop"));
    // The link interaction g of the demo couples (2 phi_R + phi_L)_j to
    // (phi_R + 2 phi_L)_{j+1}; at lam = 0.8 these are the wires' normal
    // modes, so each link is a two-mode Luttinger liquid with parameter
    // sqrt((1 - g)/(1 + g)) and the tunnel term has
    // Delta = 3 sqrt((1 - g)/(1 + g)) (derived from the same formula).
    let r = dims_json(
        &flow("laughlin_third.toml"),
        &["--set", "lambda=0.8", "--set", "g=0.4"],
    );
    let d = json_term(&r, "tunnel")["dimension"].as_f64().unwrap();
    let expected = 3.0 * (0.6f64 / 1.4).sqrt();
    assert!(close(d, expected, 1e-12), "{d} vs {expected}");
}

#[test]
fn output_file_is_written() {
    let dir = tmp();
    let target = dir.path().join("report.json");
    pinflow(&dir)
        .arg("dims")
        .arg(flow("laughlin_third.toml"))
        .args(["--format", "json", "-o"])
        .arg(&target)
        .assert()
        .success()
        .stdout(predicate::str::is_empty());
    let text = std::fs::read_to_string(&target).expect("the output file exists");
    let r: Value = serde_json::from_str(&text).expect("the file holds JSON");
    assert_eq!(r["wires"], 8);
    // The atomic write leaves no temporary file behind.
    let names: Vec<String> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().to_string())
        .collect();
    assert_eq!(names, vec!["report.json".to_string()]);

    // A relative path is resolved in the working directory; text format.
    pinflow(&dir)
        .arg("dims")
        .arg(flow("spinless_wire.toml"))
        .args(["--output", "wire.txt"])
        .assert()
        .success();
    let text = std::fs::read_to_string(dir.path().join("wire.txt")).unwrap();
    assert!(text.contains("umklapp"));
}

// ------------------------------------------------------------ bad input

const WIRE: &str = r#"
[params]
lambda = 0.3

[fields]
K = [[1, 0], [0, -1]]
charge = [1, 1]
V = [["1", "lambda"], ["lambda", "1"]]
"#;

/// Write `text` as `model.toml` in a temporary directory, run `dims` on it,
/// expect exit code 2 and an error message containing every `needles`.
fn expect_input_error(text: &str, args: &[&str], needles: &[&str]) {
    let dir = tmp();
    std::fs::write(dir.path().join("model.toml"), text).unwrap();
    let out = pinflow(&dir)
        .args(["dims", "model.toml"])
        .args(args)
        .assert()
        .failure()
        .code(2)
        .get_output()
        .clone();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(stderr.starts_with("error:"), "{stderr}");
    for n in needles {
        assert!(
            stderr.contains(n),
            "expected {n:?} in the message: {stderr}"
        );
    }
    assert!(out.stdout.is_empty(), "nothing on standard output");
}

fn wire_with(k: &str, v: &str) -> String {
    format!("[params]\nlambda = 0.3\n\n[fields]\nK = {k}\ncharge = [1, 1]\nV = {v}\n")
}

const GOOD_V: &str = r#"[["1", "lambda"], ["lambda", "1"]]"#;

#[test]
fn bad_k_matrices() {
    expect_input_error(
        &wire_with("[[1, 0], [0]]", GOOD_V),
        &[],
        &["model.toml", "fields.K[1]", "square"],
    );
    expect_input_error(
        &wire_with("[[1, 1], [0, -1]]", GOOD_V),
        &[],
        &["fields.K", "symmetric"],
    );
    expect_input_error(
        &wire_with("[[1, 2], [2, 4]]", GOOD_V),
        &[],
        &["fields.K", "singular"],
    );
    expect_input_error(
        &wire_with("[[1, 0.5], [0.5, -1]]", GOOD_V),
        &[],
        &["fields.K[0][1]", "integer"],
    );
}

#[test]
fn bad_v_matrices() {
    let k = "[[1, 0], [0, -1]]";
    expect_input_error(
        &wire_with(k, r#"[["1", "lambda"], ["0.2", "1"]]"#),
        &[],
        &["fields.V", "symmetric"],
    );
    // Not positive definite at the requested point: lam = 1.5 gives
    // eigenvalues 1 +- 1.5, the smallest -0.5 (derived).
    expect_input_error(
        WIRE,
        &["--set", "lambda=1.5"],
        &["positive definite", "lambda=1.5", "-5.000000e-1"],
    );
    expect_input_error(
        &wire_with(k, r#"[["1", "sqrt(-1-lambda)"], ["sqrt(-1-lambda)", "1"]]"#),
        &[],
        &["fields.V[0][1]", "NaN", "lambda=0.3"],
    );
    expect_input_error(
        &wire_with(k, r#"[["1", "1 + lamda"], ["1 + lamda", "1"]]"#),
        &[],
        &["fields.V[0][1]", "lamda", "position 5"],
    );
}

#[test]
fn unknown_parameter_on_the_command_line() {
    expect_input_error(WIRE, &["--set", "lamda=0.2"], &["--set", "lamda", "lambda"]);
}

#[test]
fn bad_terms() {
    let with = |t: &str| format!("{WIRE}\n{t}");
    expect_input_error(
        &with("[[term]]\nname = \"a\"\nparticles = [1, 0, 0]\n"),
        &[],
        &["term \"a\".particles", "expected 2"],
    );
    expect_input_error(
        &with("[[term]]\nname = \"a\"\nvector = [1, 0.5]\n"),
        &[],
        &["term \"a\".vector[1]", "integer"],
    );
    expect_input_error(
        &with("[[term]]\nname = \"a\"\nparticles = [1, -1]\n\n[[term]]\nname = \"a\"\nparticles = [1, 1]\n"),
        &[],
        &["term \"a\"", "duplicate"],
    );
}

fn array(wires: &str, extra_block: &str) -> String {
    format!(
        "[array]\nwires = {wires}\nK = [[1, 0], [0, -1]]\ncharge = [1, 1]\n\n[array.V]\n0 = [[1, 0], [0, 1]]\n{extra_block}\n"
    )
}

#[test]
fn bad_arrays() {
    let zero = "[[0, 0], [0, 0]]";
    expect_input_error(
        &array("4", &format!("-1 = {zero}")),
        &[],
        &["array.V.-1", "non-negative integer"],
    );
    expect_input_error(
        &array("4", &format!("a = {zero}")),
        &[],
        &["array.V.a", "non-negative integer"],
    );
    // Regression: "01" and "1" name the same separation; one block used to
    // replace the other silently. Offsets must be written canonically.
    expect_input_error(
        &array("4", "1 = [[0.1, 0], [0, 0.1]]\n01 = [[0.2, 0], [0, 0.2]]"),
        &[],
        &["array.V.01", "leading zeros"],
    );
    // The same for term offsets ("+1" used to be read as 1, "00" as 0 and
    // summed with offset 0).
    expect_input_error(
        &format!(
            "{}\n[[term]]\nname = \"cdw\"\nparticles = {{ 0 = [1, -1], \"+1\" = [-1, 1] }}\n",
            array("4", "")
        ),
        &[],
        &["term \"cdw\".particles.+1", "non-negative integer"],
    );
    expect_input_error(
        &format!(
            "{}\n[[term]]\nname = \"cdw\"\nparticles = {{ 0 = [1, -1], 00 = [-1, 1] }}\n",
            array("4", "")
        ),
        &[],
        &["term \"cdw\".particles.00"],
    );
    // Periodic W = 2 with block 1: wires 0 and 1 would be coupled twice.
    expect_input_error(
        &array("2", "1 = [[0.1, 0], [0, 0.1]]"),
        &[],
        &["array.V", "interaction range 1", "2 wires"],
    );
    // Infinite arrays: the number of wires must be a positive integer or
    // the exact word; a term may reach at most 64 wires.
    expect_input_error(
        &array("\"endless\"", ""),
        &[],
        &["array.wires", "\"infinite\""],
    );
    expect_input_error(&array("0", ""), &[], &["array.wires", "positive integer"]);
    expect_input_error(
        &format!(
            "{}\n[[term]]\nname = \"far\"\nparticles = {{ 0 = [1, -1], 65 = [-1, 1] }}\n",
            array("\"infinite\"", "")
        ),
        &[],
        &["term \"far\".particles", "at most offset 64"],
    );
}

#[test]
fn missing_model_file() {
    let dir = tmp();
    pinflow(&dir)
        .args(["dims", "no_such_model.toml"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("no_such_model.toml"))
        .stderr(predicate::str::contains("cannot read"));
}

#[test]
fn a_term_that_does_not_conserve_charge_is_flagged() {
    // A single electron m = (1, 0) carries charge 1 (Giamarchi (2004)); the
    // default allowed charge is 0, so it is flagged but still reported.
    let text = format!("{WIRE}\n[[term]]\nname = \"hop\"\nparticles = [1, 0]\n");
    let dir = tmp();
    let path = dir.path().join("model.toml");
    std::fs::write(&path, text).unwrap();

    let r = dims_json(&path, &[]);
    let t = json_term(&r, "hop");
    assert_eq!(t["charge"], "1");
    assert_eq!(t["charge_ok"], false);
    let notes = r["notes"].as_array().unwrap();
    assert!(notes.iter().any(|n| {
        let n = n.as_str().unwrap();
        n.contains("\"hop\"") && n.contains("does not conserve charge")
    }));

    let text = dims_ok(&path, &[]);
    let row = text
        .lines()
        .find(|l| l.trim_start().starts_with("hop "))
        .expect("a row for hop");
    assert!(row.contains("1 (!)"), "{row}");
    assert!(text.contains("note: term \"hop\" carries charge 1"));
}

#[test]
fn clap_definition_is_consistent() {
    use clap::CommandFactory;
    pinflow::cli::Cli::command().debug_assert();
}

/// Momenta that cancel are reported as exactly zero, not as the rounding
/// left by decimal k_F. Derivation for the demo array: fields of wire j
/// carry k = (k_F + 6 j k_F, -k_F + 6 j k_F); the tunnelling term has
/// m = (-2, 1) on wire 0 and (-1, 2) on wire 1, so its mismatch is
/// -2 k_F - k_F - 7 k_F + 10 k_F = 0. Hopping, m = (-1, 0) on wire 0 and
/// (0, 1) on wire 1, has -k_F + 5 k_F = 4 k_F = 0.2 at k_F = 0.05.
#[test]
fn cancelling_momenta_are_exactly_zero() {
    let r = dims_json(&flow("laughlin_third.toml"), &[]);
    let k = |n: &str| json_term(&r, n)["momentum"].as_f64().unwrap();
    assert_eq!(k("tunnel"), 0.0);
    assert_eq!(json_term(&r, "tunnel")["momentum_conserved"], true);
    assert!(close(k("hop"), 0.2, 1e-12), "{}", k("hop"));
    assert_eq!(json_term(&r, "hop")["momentum_conserved"], false);
    // Away from the matching flux the tunnelling term is mismatched.
    let r = dims_json(&flow("laughlin_third.toml"), &["--set", "db=0.01"]);
    assert!(close(
        json_term(&r, "tunnel")["momentum"].as_f64().unwrap(),
        0.01,
        1e-12
    ));
}

/// An open array's rows are one translate each; the text says which (the
/// JSON field `wire`), so that a reader does not take a middle translate
/// for one at the ends. For 8 wires and terms spanning 2 wires the
/// translates start at wires 0..=6; the middle one starts at wire 3.
#[test]
fn an_open_array_says_which_translate_each_row_is() {
    let text = dims_ok(&flow("laughlin_third_strip.toml"), &[]);
    assert!(
        text.contains("open array: each row is the translate nearest the middle (tunnel at wire 3"),
        "{text}"
    );
    let r = dims_json(&flow("laughlin_third_strip.toml"), &[]);
    assert_eq!(json_term(&r, "tunnel")["wire"], 3);
    let ring = dims_ok(&flow("laughlin_third.toml"), &[]);
    assert!(!ring.contains("open array"), "{ring}");
}
