//! `[[symmetry]]` through the command line: bad input exits with code 2 and
//! a message naming the file and the key; `hunt --emit-terms` writes orbit
//! members as one group; `flow` and `scan` with `--competitors`.
//! Common practice (no published source) for the error checks; the physics
//! of symmetries is checked in `tests/symmetry.rs`.

use std::path::Path;

use assert_cmd::Command;

/// A spinful wire with S_z and spin flip (as in tests/symmetry.rs).
const SPINFUL: &str = r#"
[params]
a = 0.2
[fields]
K = [[1, 0, 0, 0], [0, -1, 0, 0], [0, 0, 1, 0], [0, 0, 0, -1]]
charge = [1, 1, 1, 1]
V = [["1", "a", "0", "0"], ["a", "1", "0", "0"], ["0", "0", "1", "a"], ["0", "0", "a", "1"]]

[[symmetry]]
name = "Sz"
charge = [1, 1, -1, -1]

[[symmetry]]
name = "flip"
map = [[0, 0, 1, 0], [0, 0, 0, 1], [1, 0, 0, 0], [0, 1, 0, 0]]
order = 2
"#;

const FLIP_MAP: &str = "map = [[0, 0, 1, 0], [0, 0, 0, 1], [1, 0, 0, 0], [0, 1, 0, 0]]";

fn run(model: &str, args: &[&str]) -> (i32, String, String) {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("m.toml"), model).unwrap();
    let out = Command::cargo_bin("pinflow")
        .unwrap()
        .current_dir(dir.path())
        .args(args)
        .output()
        .unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).to_string(),
        String::from_utf8_lossy(&out.stderr).to_string(),
    )
}

fn refused(model: &str, args: &[&str], file_and_key: &str, what: &str) {
    let (code, _, err) = run(model, args);
    assert_eq!(code, 2, "{err}");
    let first = err.lines().next().unwrap_or("");
    assert!(
        first.starts_with(&format!("error: {file_and_key}")),
        "{first}"
    );
    assert!(first.contains(what), "{first}");
    assert!(!err.contains("panicked"));
}

fn edit(old: &str, new: &str) -> String {
    assert_eq!(SPINFUL.matches(old).count(), 1, "{old}");
    SPINFUL.replace(old, new)
}

#[test]
fn a_map_that_is_not_integer() {
    let m = edit(
        FLIP_MAP,
        "map = [[0, 0, 1.5, 0], [0, 0, 0, 1], [1, 0, 0, 0], [0, 1, 0, 0]]",
    );
    refused(
        &m,
        &["hunt", "m.toml"],
        "m.toml: symmetry \"flip\".map[0][2]:",
        "expected an integer",
    );
}

#[test]
fn a_map_that_is_not_square() {
    let m = edit(FLIP_MAP, "map = [[0, 0, 1, 0], [0, 0, 0, 1], [1, 0, 0, 0]]");
    refused(
        &m,
        &["hunt", "m.toml"],
        "m.toml: symmetry \"flip\".map[0]:",
        "square",
    );
    let m = edit(FLIP_MAP, "map = [[0, 1], [1, 0]]");
    refused(
        &m,
        &["dims", "m.toml"],
        "m.toml: symmetry \"flip\".map:",
        "expected a 4x4 integer matrix",
    );
}

#[test]
fn a_map_that_does_not_preserve_k() {
    // Exchanging R up with L up flips the sign of K on them.
    let m = edit(
        FLIP_MAP,
        "map = [[0, 1, 0, 0], [1, 0, 0, 0], [0, 0, 1, 0], [0, 0, 0, 1]]",
    );
    refused(
        &m,
        &["flow", "m.toml"],
        "m.toml: symmetry \"flip\".map:",
        "does not preserve K",
    );
}

#[test]
fn a_wrong_order() {
    let m = edit("order = 2", "order = 4");
    refused(
        &m,
        &["hunt", "m.toml"],
        "m.toml: symmetry \"flip\".order:",
        "the order is 2, not 4",
    );
    let m = edit("order = 2", "order = 3");
    refused(
        &m,
        &["hunt", "m.toml"],
        "m.toml: symmetry \"flip\".order:",
        "the order is not 3",
    );
    let m = edit("order = 2", "order = 2\nshift = [1, 0, 0, 0]");
    refused(
        &m,
        &["hunt", "m.toml"],
        "m.toml: symmetry \"flip\".order:",
        "the order is not 2",
    );
}

#[test]
fn a_charge_of_the_wrong_length() {
    let m = edit("charge = [1, 1, -1, -1]", "charge = [1, 1, -1]");
    refused(
        &m,
        &["hunt", "m.toml"],
        "m.toml: symmetry \"Sz\".charge:",
        "expected 4 integers",
    );
}

#[test]
fn a_name_used_twice_or_unknown() {
    let m = edit("name = \"flip\"", "name = \"Sz\"");
    refused(
        &m,
        &["hunt", "m.toml"],
        "m.toml: symmetry \"Sz\".name:",
        "duplicate symmetry name",
    );
    refused(
        SPINFUL,
        &["hunt", "m.toml", "--symmetry", "Sz,spin"],
        "command line: --symmetry:",
        "unknown symmetry `spin` (m.toml declares: Sz, flip)",
    );
    refused(
        SPINFUL,
        &[
            "flow",
            "m.toml",
            "--competitors",
            "2",
            "--competitor-symmetry",
            "nope",
        ],
        "command line: --competitor-symmetry:",
        "unknown symmetry `nope`",
    );
    refused(
        SPINFUL,
        &["hunt", "m.toml", "--symmetry", "Sz,flip,Sz"],
        "command line: --symmetry:",
        "symmetry `Sz` is named twice",
    );
    refused(
        SPINFUL,
        &[
            "scan",
            "m.toml",
            "--x",
            "a=0.1:0.2:2",
            "--out",
            "out",
            "--competitors",
            "2",
            "--competitor-symmetry",
            "flip,flip",
        ],
        "command line: --competitor-symmetry:",
        "symmetry `flip` is named twice",
    );
}

#[test]
fn allowed_charge_names_a_u1() {
    let m = format!("{SPINFUL}\n[[term]]\nname = \"x\"\nparticles = [1, -1, -1, 1]\nallowed_charge = {{ charge = 0, Spin = 2 }}\n");
    refused(
        &m,
        &["dims", "m.toml"],
        "m.toml: term \"x\".allowed_charge.Spin:",
        "unknown symmetry `Spin`",
    );
    let m = format!("{SPINFUL}\n[[term]]\nname = \"x\"\nparticles = [1, -1, -1, 1]\nallowed_charge = {{ charge = 0, flip = 2 }}\n");
    refused(
        &m,
        &["dims", "m.toml"],
        "m.toml: term \"x\".allowed_charge.flip:",
        "Z_n symmetry",
    );
}

#[test]
fn allowed_charge_admits_that_charge_in_hunt() {
    // The spin flips (1, 0, 0, -1) and (0, 1, -1, 0) (S_z = 2 in units of
    // 1/2, one orbit under flip) are admitted once a term's allowed_charge
    // names that charge.
    let (_, without, _) = run(
        SPINFUL,
        &["hunt", "m.toml", "--max-dim", "2.2", "--format", "json"],
    );
    let m = format!("{SPINFUL}\n[[term]]\nname = \"flip_pair\"\nparticles = [1, 0, 0, -1]\nallowed_charge = {{ charge = 0, Sz = 2 }}\n");
    let (code, with, err) = run(
        &m,
        &["hunt", "m.toml", "--max-dim", "2.2", "--format", "json"],
    );
    assert_eq!(code, 0, "{err}");
    let count = |s: &str| {
        let v: serde_json::Value = serde_json::from_str(s).unwrap();
        v["operators"].as_array().unwrap().len()
    };
    assert_eq!(count(&with), count(&without) + 2, "{with}");
    assert!(with.contains("\"Sz\": 2"), "{with}");
}

#[test]
fn emitted_orbits_read_back_as_one_group() {
    // A bilayer array (fields R1, L1, R2, L2) with layer exchange: the
    // interwire CDW of each layer is one orbit of two.
    let model = r#"
[params]
lambda = 0.5
u = 0.1
[array]
wires = 6
K = [[1, 0, 0, 0], [0, -1, 0, 0], [0, 0, 1, 0], [0, 0, 0, -1]]
charge = [1, 1, 1, 1]
[array.V]
0 = [["1", "lambda", "u", "0"], ["lambda", "1", "0", "u"], ["u", "0", "1", "lambda"], ["0", "u", "lambda", "1"]]
[[symmetry]]
name = "layers"
map = [[0, 0, 1, 0], [0, 0, 0, 1], [1, 0, 0, 0], [0, 1, 0, 0]]
order = 2
[[term]]
name = "fwd"
particles = { 0 = [1, -1, -1, 1] }
coupling = 0.02
"#;
    let (code, blocks, err) = run(
        model,
        &["hunt", "m.toml", "--max-dim", "1.6", "--emit-terms"],
    );
    assert_eq!(code, 0, "{err}");
    assert!(
        blocks.contains("coupling = 0.02"),
        "default: the smallest listed coupling\n{blocks}"
    );
    assert!(blocks.contains("group = \"hunt_orbit_"), "{blocks}");
    let merged = format!("{model}\n{blocks}");
    let (code, dims, err) = run(&merged, &["dims", "m.toml", "--format", "json"]);
    assert_eq!(code, 0, "{err}\n{merged}");
    assert!(dims.contains("hunt_1"));
    let (_, given, _) = run(
        model,
        &[
            "hunt",
            "m.toml",
            "--max-dim",
            "1.6",
            "--emit-terms",
            "--coupling",
            "0.07",
        ],
    );
    assert!(
        given.contains("coupling = 0.07") && !given.contains("coupling = 0.02"),
        "{given}"
    );
}

#[test]
fn scan_counts_competitor_wins() {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("flows/laughlin_third.toml");
    let text = std::fs::read_to_string(path).unwrap();
    let (code, out, err) = run(
        &text,
        &[
            "scan",
            "m.toml",
            "--x",
            "g=0.45:0.55:3",
            "--competitors",
            "2",
            "--competitor-range",
            "3",
            "--out",
            "o",
            "-q",
            "--format",
            "json",
        ],
    );
    assert_eq!(code, 0, "{err}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    let wins = v["competitor_wins"].as_object().unwrap();
    let counted: u64 = wins.values().map(|n| n.as_u64().unwrap()).sum();
    let total: u64 = v["winners"]
        .as_object()
        .unwrap()
        .iter()
        .filter(|(k, _)| k.starts_with("auto:"))
        .map(|(_, n)| n.as_u64().unwrap())
        .sum();
    assert_eq!(counted, total);
    assert!(counted >= 1, "{out}");
}
