//! Dimensions in a pinned phase (`pinflow dims --pin`, docs/physics.md
//! section 8): the residual theory through the public API on explicit,
//! open, periodic and infinite models, and the command line with every
//! format and the bad inputs.

mod common;

use std::path::{Path, PathBuf};

use assert_cmd::Command;
use pinflow::core::pinned::set::{self as pinset, PinnedSet};
use pinflow::core::pinned::Form;
use pinflow::core::system::System;
use pinflow::dims::{Algebra, DimsOptions, DimsReport};
use serde_json::Value;

fn flow(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("flows")
        .join(name)
}

fn text_of(name: &str) -> String {
    std::fs::read_to_string(flow(name)).expect("demo model")
}

/// The (331) bilayer strip of `flows/` as a periodic ring of `w` wires.
fn bilayer_ring(w: usize) -> String {
    text_of("halperin_331_strip.toml")
        .replace("wires = 6", &format!("wires = {w}"))
        .replace("boundary = \"open\"", "boundary = \"periodic\"")
}

/// The same as an infinite array.
fn bilayer_infinite() -> String {
    text_of("halperin_331_strip.toml")
        .replace("wires = 6", "wires = \"infinite\"")
        .replace("boundary = \"open\"\n", "")
}

fn at(sys: &System, set: &[(&str, f64)]) -> Vec<f64> {
    let set: Vec<(String, f64)> = set.iter().map(|(n, v)| (n.to_string(), *v)).collect();
    sys.model.point_with(&set, "test").expect("point")
}

fn pinned_report(sys: &System, point: &[f64], pins: &[&str], algebra: Algebra) -> DimsReport {
    let opts = DimsOptions {
        pins: pins.iter().map(|s| s.to_string()).collect(),
        algebra,
    };
    DimsReport::build_opts(sys, point, &opts).unwrap_or_else(|e| panic!("{e}"))
}

fn pinned_dim(r: &DimsReport, name: &str) -> Option<f64> {
    common::term(r, name)
        .dimension_pinned
        .expect("pinned report")
}

const SPINFUL: &str = r#"
name = "spinful wire"
[params]
g = 0.3
[fields]
K = [[1,0,0,0],[0,-1,0,0],[0,0,1,0],[0,0,0,-1]]
charge = [1,1,1,1]
V = [["1","g","0.2","0.1"],["g","1.3","0.1","-0.25"],["0.2","0.1","1","g"],["0.1","-0.25","g","1.3"]]
[[term]]
name = "spin_bs"
particles = [1,-1,-1,1]
[[term]]
name = "cdw2"
particles = [1,-1,0,0]
[[term]]
name = "pair"
particles = [1,0,0,1]
[[term]]
name = "cdw4"
particles = [1,-1,1,-1]
[[term]]
name = "up_only"
particles = [1,0,0,0]
"#;

/// Luther-Emery through a model file [Luther & Emery, PRL 33, 589 (1974);
/// Giamarchi (2004), ch. 7; shared checks "Pinned phases"]: V invariant
/// under exchanging up and down (our own numbers, with unequal R and L
/// velocities within a spin), spin backscattering pinned: CDW K_rho/2,
/// singlet pairing 1/(2 K_rho), K_rho = Delta(4k_F CDW)/2, in both forms;
/// the up-spin operator does not commute and is disordered.
#[test]
fn luther_emery_from_a_model_file() {
    let sys = common::system(SPINFUL);
    let set = pinset::from_names(&sys, &["spin_bs".to_string()], "--pin").unwrap();
    for g in [0.3, -0.2, 0.55] {
        let point = at(&sys, &[("g", g)]);
        let plain = DimsReport::build(&sys, &point).unwrap();
        let k_rho = common::term(&plain, "cdw4").dimension / 2.0;
        for form in [Form::Exact, Form::Reference] {
            let pd = pinset::evaluate(&sys, &set, &point, form, false).unwrap();
            let d = |n: &str| pd.bosonic[common::term_index(&plain, n)];
            common::assert_close("CDW", d("cdw2").unwrap(), k_rho / 2.0, 1e-12);
            common::assert_close("pairing", d("pair").unwrap(), 0.5 / k_rho, 1e-12);
            common::assert_close("4kF CDW", d("cdw4").unwrap(), 2.0 * k_rho, 1e-12);
            assert_eq!(d("up_only"), None);
        }
    }
}

/// Derived: a periodic array's per-q pinned dimensions (its own W points)
/// equal the dense construction (integer kernel, Schur complement on all N
/// fields) on the same ring.
#[test]
fn periodic_per_q_equals_dense() {
    let sys = common::system(&bilayer_ring(5));
    for (s, g) in [(0.6, -0.3), (1.0, -0.8), (0.2, 0.4)] {
        let point = at(&sys, &[("s", s), ("g", g)]);
        let q = pinned_report(&sys, &point, &["t_up"], Algebra::Auto);
        let dense = pinned_report(&sys, &point, &["t_up"], Algebra::Dense);
        for name in ["t_dn", "laughlin_up"] {
            let (a, b) = (
                pinned_dim(&q, name).unwrap(),
                pinned_dim(&dense, name).unwrap(),
            );
            common::assert_close(name, a, b, 1e-10);
        }
        assert_eq!(pinned_dim(&q, "hop_up"), None);
        assert_eq!(pinned_dim(&dense, "hop_up"), None);
    }
}

/// Derived: the infinite array (refined midpoint rule) and a ring of 80
/// wires (its exact W-point rule) agree on dimension_pinned to 1e-8; a
/// ring of 5 wires differs at one of the points (the comparison can fail).
#[test]
fn infinite_array_agrees_with_a_large_ring() {
    let inf = common::system(&bilayer_infinite());
    let ring = common::system(&bilayer_ring(80));
    let small = common::system(&bilayer_ring(5));
    let mut small_ring_differs = false;
    for (s, g) in [(0.6, -0.3), (1.0, -0.6)] {
        let point = [("s", s), ("g", g)];
        let a = pinned_report(&inf, &at(&inf, &point), &["t_up"], Algebra::Auto);
        let b = pinned_report(&ring, &at(&ring, &point), &["t_up"], Algebra::Auto);
        let c = pinned_report(&small, &at(&small, &point), &["t_up"], Algebra::Auto);
        assert!(a.pinned_quadrature.expect("infinite quadrature").converged);
        for name in ["t_dn", "laughlin_up"] {
            let (x, y) = (pinned_dim(&a, name).unwrap(), pinned_dim(&b, name).unwrap());
            common::assert_close(name, x, y, 1e-8);
        }
        let z = pinned_dim(&c, "t_dn").unwrap();
        small_ring_differs |= (z - pinned_dim(&a, "t_dn").unwrap()).abs() > 1e-6;
    }
    assert!(small_ring_differs);
}

/// Derived: pinning both tunnelling terms of the (331) strip (the dense
/// path of an open array): both have pinned dimension 0, the hopping terms
/// fail to commute and are disordered.
#[test]
fn open_strip_two_pins() {
    let sys = common::system(&text_of("halperin_331_strip.toml"));
    let point = at(&sys, &[]);
    let r = pinned_report(&sys, &point, &["t_up", "t_dn"], Algebra::Auto);
    assert_eq!(
        r.pinned.as_deref(),
        Some(&["t_up".to_string(), "t_dn".to_string()][..])
    );
    assert!(pinned_dim(&r, "t_up").unwrap().abs() < 1e-10);
    assert!(pinned_dim(&r, "t_dn").unwrap().abs() < 1e-10);
    assert_eq!(common::term(&r, "hop_up").disordered, Some(true));
    assert_eq!(common::term(&r, "hop_dn").disordered, Some(true));
    let set = PinnedSet {
        names: vec!["t_up".into(), "t_dn".into()],
        indices: vec![0, 1],
    };
    assert_eq!(pinset::from_names(&sys, &set.names, "--pin").unwrap(), set);
}

// ---- command line -------------------------------------------------------

fn pinflow() -> (Command, tempfile::TempDir) {
    let dir = tempfile::tempdir().expect("temporary directory");
    let mut cmd = Command::cargo_bin("pinflow").expect("the pinflow binary");
    cmd.current_dir(dir.path());
    (cmd, dir)
}

fn write_spinful(dir: &tempfile::TempDir) -> PathBuf {
    let p = dir.path().join("spinful.toml");
    std::fs::write(&p, SPINFUL).unwrap();
    p
}

#[test]
fn cli_dims_pin_in_every_format() {
    let (_, dir) = pinflow();
    let model = write_spinful(&dir);
    let run = |args: &[&str]| -> String {
        let (mut cmd, _d) = pinflow();
        let out = cmd
            .arg("dims")
            .arg(&model)
            .args(args)
            .assert()
            .success()
            .get_output()
            .stdout
            .clone();
        String::from_utf8(out).unwrap()
    };
    let json: Value =
        serde_json::from_str(&run(&["--pin", "spin_bs", "--format", "json"])).unwrap();
    assert_eq!(json["pinned"], serde_json::json!(["spin_bs"]));
    // Derived: one null vector of 4 fields gaps 1 pair and leaves 2 modes;
    // no term is a target.
    assert_eq!(
        json["phase"],
        serde_json::json!({"label": "{spin_bs}", "terms": ["spin_bs"], "gapped_pairs": 1,
            "gapless_modes": 2, "fully_gapped": false, "target": false})
    );
    let rows = json["terms"].as_array().unwrap();
    let row = |n: &str| rows.iter().find(|r| r["name"] == n).unwrap().clone();
    assert_eq!(row("cdw2")["commutes_with_pinned"], true);
    assert_eq!(row("cdw2")["disordered"], false);
    let k_rho = row("cdw4")["dimension"].as_f64().unwrap() / 2.0;
    let cdw = row("cdw2")["dimension_pinned"].as_f64().unwrap();
    assert!((cdw - k_rho / 2.0).abs() < 1e-12);
    assert_eq!(row("up_only")["dimension_pinned"], Value::Null);
    assert_eq!(row("up_only")["disordered"], true);
    let csv = run(&["--pin", "spin_bs", "--format", "csv"]);
    assert!(csv
        .lines()
        .next()
        .unwrap()
        .ends_with(",commutes_with_pinned,dimension_pinned,disordered"));
    assert!(csv
        .lines()
        .any(|l| l.starts_with("up_only,") && l.ends_with(",false,,true")));
    for fmt in ["text", "markdown", "latex"] {
        let out = run(&["--pin", "spin_bs", "--format", fmt]);
        let header = if fmt == "latex" {
            "$\\Delta$ pinned"
        } else {
            "Delta pinned"
        };
        assert!(out.contains(header), "{fmt}");
        assert!(out.contains("disordered"), "{fmt}");
    }
    // Without --pin nothing changes: no pinned fields.
    let plain: Value = serde_json::from_str(&run(&["--format", "json"])).unwrap();
    assert!(plain.get("pinned").is_none());
    assert!(plain["terms"][0].get("dimension_pinned").is_none());
}

fn dims_fails(model: &Path, pins: &[&str], expected: &str) {
    let (mut cmd, _d) = pinflow();
    let mut c = cmd.arg("dims").arg(model);
    for p in pins {
        c = c.args(["--pin", p]);
    }
    let out = c.assert().failure().code(2).get_output().stderr.clone();
    let err = String::from_utf8(out).unwrap();
    assert!(err.contains(expected), "{err}");
    assert!(err.starts_with("error: command line: --pin: "), "{err}");
}

#[test]
fn cli_dims_pin_bad_input() {
    let (_, dir) = pinflow();
    let model = write_spinful(&dir);
    dims_fails(&model, &["nope"], "unknown term \"nope\"");
    dims_fails(&model, &["up_only"], "term \"up_only\" is not null");
    dims_fails(
        &model,
        &["cdw2", "pair"],
        "\"cdw2\" and \"pair\" do not commute: their mutual phase l_a.K^-1 l_b is 1",
    );
    // K = diag(3, -3, 1, -1): vector (1, 1, 1, 1) has m = K^-1 l = (1/3, -1/3, 1, -1).
    let half = SPINFUL.replace(
        "name = \"up_only\"\nparticles = [1,0,0,0]",
        "name = \"frac\"\nvector = [1,1,1,1]",
    );
    let k2 = half.replace(
        "K = [[1,0,0,0],[0,-1,0,0],[0,0,1,0],[0,0,0,-1]]",
        "K = [[3,0,0,0],[0,-3,0,0],[0,0,1,0],[0,0,0,-1]]",
    );
    let p2 = dir.path().join("frac.toml");
    std::fs::write(&p2, k2).unwrap();
    dims_fails(&p2, &["frac"], "term \"frac\" is not local");
    // A ring: two translates of a family that do not commute are named by wire.
    let ring = flow("laughlin_third.toml");
    dims_fails(&ring, &["tunnel", "cdw"], "do not commute");
}

/// Several targets (issue 14, part 1): the (331) strip with both tunnelling
/// terms marked loads (they are null, local and commute); adding a
/// non-commuting third target (hop_up fails to commute with t_up, see
/// `open_strip_two_pins`) is refused with the pair named.
#[test]
fn several_targets() {
    let text = text_of("halperin_331_strip.toml");
    let both = text.replacen(
        "name = \"t_dn\"            # uR_dn of wire j with -uL_dn of wire j+1",
        "name = \"t_dn\"\ntarget = true",
        1,
    );
    let sys = common::system(&both);
    assert_eq!(sys.model.targets(), vec![0, 1]);
    let three = both.replacen("name = \"hop_up\"", "name = \"hop_up\"\ntarget = true", 1);
    let model = pinflow::model::Model::parse(&three, "three.toml").unwrap();
    let err = System::new(model).unwrap_err().to_string();
    assert!(
        err.starts_with("three.toml: term \"hop_up\".target: the targets must pin together"),
        "{err}"
    );
    assert!(
        err.contains("\"t_up\" at wire") && err.contains("\"hop_up\" at wire"),
        "{err}"
    );
}
