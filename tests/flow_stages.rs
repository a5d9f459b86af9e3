//! Successive pinning in `pinflow flow` and the phase it names (issue 14,
//! physics reference section 7), and `pinflow edges` without `--pin`.
//!
//! Sources of the checks:
//! - filling 1/m arrays [Kane, Mukhopadhyay & Lubensky, PRL 88, 036401
//!   (2002); Teo & Kane, PRB 89, 085101 (2014)]: pinning the tunnelling
//!   family on every link of a periodic array gaps every right-left pair,
//!   one pair per wire, and that is the target (Laughlin) phase;
//! - the two-component array `flows/two_targets.toml`: its dimensions are
//!   derived in the file's header (sum and difference sectors decouple on
//!   each link): Delta(t_diff) = 2 xs, Delta(t_up) = (xr + xs)/2, and with
//!   t_diff pinned Delta_P(t_up) = xr/2. At xs = 0.4, xr = 2 the combination
//!   wins (0.8 < 1.2) and t_up stays relevant (1.0): two stages, the target
//!   phase {t_up, t_dn}. At xr = 5 t_up is irrelevant once t_diff is pinned
//!   (2.5): a partly gapped phase {t_diff}, one pair per wire of two.

use std::path::{Path, PathBuf};

use assert_cmd::Command;
use serde_json::Value;

fn demo(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("flows")
        .join(name)
}

fn run_json(cmd: &str, args: &[&str]) -> Value {
    let out = Command::cargo_bin("pinflow")
        .unwrap()
        .arg(cmd)
        .args(args)
        .args(["--format", "json"])
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    serde_json::from_slice(&out).unwrap()
}

fn flow(model: &Path, args: &[&str]) -> Value {
    let mut all = vec![model.to_str().unwrap()];
    all.extend_from_slice(args);
    run_json("flow", &all)
}

fn pinned_names(v: &Value) -> Vec<String> {
    v["stages"]
        .as_array()
        .unwrap()
        .iter()
        .flat_map(|s| s["pinned"].as_array().unwrap().iter())
        .map(|n| n.as_str().unwrap().to_string())
        .collect()
}

#[test]
fn filling_one_third_array_pins_in_one_stage_and_is_the_target() {
    // g = 0.9: the tunnelling term wins (demo value); the checks are the
    // published consequences of pinning it [Kane et al. 2002; Teo & Kane 2014].
    let v = flow(&demo("laughlin_third.toml"), &["--set", "g=0.9"]);
    assert_eq!(v["winner"], "tunnel");
    assert_eq!(pinned_names(&v), vec!["tunnel"]);
    assert_eq!(v["stages_end"], "pinned");
    let p = &v["phase"];
    assert_eq!(p["label"], "{tunnel}");
    assert_eq!(p["gapped_pairs"], 8, "one pair per wire of 8");
    assert_eq!(p["gapless_modes"], 0);
    assert_eq!(p["fully_gapped"], true);
    assert_eq!(p["target"], true);
    assert_eq!(v["ell_last"], v["ell_star"]);
}

/// A periodic array of W spinless wires with only the filling-1/m term,
/// written like flows/laughlin_third.toml (its m = 3 case): the term joins
/// u = a phi_R + b phi_L of wire j to w = b phi_R + a phi_L of wire j + 1
/// (a = (m+1)/2, b = (m-1)/2); lambda = 2ab/(a^2+b^2) makes u, w the wire's
/// normal modes, and a link coupling g u_j w_{j+1}/(a^2+b^2) at g = 0.9
/// makes the term relevant (demo values; the checks are the phase's).
fn filling_one_over(m: i64, wires: &str) -> String {
    let (a, b) = ((m + 1) / 2, (m - 1) / 2);
    let n = (a * a + b * b) as f64;
    let lambda = (2 * a * b) as f64 / n;
    let g = 0.9 / n;
    let v1 = [
        [g * (a * b) as f64, g * (a * a) as f64],
        [g * (b * b) as f64, g * (a * b) as f64],
    ];
    format!(
        "name = \"1/{m}\"\n[array]\nwires = {wires}\nboundary = \"periodic\"\nK = [[1, 0], [0, -1]]\ncharge = [1, 1]\n\
         [array.V]\n0 = [[\"1\", \"{lambda}\"], [\"{lambda}\", \"1\"]]\n\
         1 = [[\"{}\", \"{}\"], [\"{}\", \"{}\"]]\n\
         [[term]]\nname = \"tunnel\"\nparticles = {{ 0 = [-{a}, {b}], 1 = [-{b}, {a}] }}\ncoupling = 0.05\ntarget = true\n",
        v1[0][0], v1[0][1], v1[1][0], v1[1][1]
    )
}

#[test]
fn filling_one_over_m_arrays_are_fully_gapped_targets() {
    let dir = tempfile::tempdir().unwrap();
    for (m, wires, pairs) in [
        (1, "6", 6),
        (3, "6", 6),
        (5, "5", 5),
        (3, "\"infinite\"", 1),
    ] {
        let path = dir.path().join(format!("m{m}.toml"));
        std::fs::write(&path, filling_one_over(m, wires)).unwrap();
        let v = flow(&path, &[]);
        assert_eq!(v["outcome"], "strong", "m = {m}: {v}");
        assert_eq!(pinned_names(&v), vec!["tunnel"], "m = {m}");
        let p = &v["phase"];
        // Per wire for the infinite array (rank over Q(z)).
        assert_eq!(p["gapped_pairs"], pairs, "m = {m}, wires {wires}");
        assert_eq!(p["gapless_modes"], 0, "m = {m}");
        assert_eq!(p["fully_gapped"], true);
        assert_eq!(p["target"], true);
    }
}

#[test]
fn two_targets_reached_after_two_stages_where_the_rest_is_relevant() {
    let v = flow(&demo("two_targets.toml"), &["--set", "xr=2"]);
    assert_eq!(v["outcome"], "strong");
    assert_eq!(v["winner"], "t_diff", "the combination pins first");
    assert_eq!(pinned_names(&v), vec!["t_diff", "t_up"]);
    let stages = v["stages"].as_array().unwrap();
    assert!(stages[1]["ell"].as_f64().unwrap() > stages[0]["ell"].as_f64().unwrap());
    assert_eq!(v["ell_last"], stages[1]["ell"]);
    let gap = v["gap"].as_f64().unwrap();
    assert!((gap - (-stages[1]["ell"].as_f64().unwrap()).exp()).abs() < 1e-15);
    let p = &v["phase"];
    // Two listed terms span {t_diff, t_up}: t_dn = t_up - t_diff.
    assert_eq!(p["label"], "{t_up, t_dn}");
    assert_eq!(p["target"], true);
    assert_eq!(p["gapped_pairs"], 8);
    assert_eq!(p["fully_gapped"], true);
}

#[test]
fn partly_gapped_phase_where_the_rest_is_irrelevant_and_edges_agree() {
    let model = demo("two_targets.toml");
    let v = flow(&model, &["--set", "xr=5"]);
    assert_eq!(v["winner"], "t_diff");
    assert_eq!(pinned_names(&v), vec!["t_diff"]);
    assert_eq!(v["stages_end"], "gapless");
    let p = &v["phase"];
    assert_eq!(p["label"], "{t_diff}");
    assert_eq!(p["target"], false);
    assert_eq!(p["gapped_pairs"], 4, "one pair per wire of the two");
    assert_eq!(p["gapless_modes"], 8);
    assert_eq!(p["fully_gapped"], false);
    // `edges` without --pin pins what the staged flow pinned.
    let e = run_json("edges", &[model.to_str().unwrap(), "--set", "xr=5"]);
    let text = e.to_string();
    assert!(text.contains("\"gapped_pairs\":4"), "{text}");
    let names: Vec<&str> = e["pinned"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| p["name"].as_str().unwrap())
        .collect();
    assert_eq!(names, vec!["t_diff"]);
}

#[test]
fn one_stage_is_the_single_stage_answer() {
    let model = demo("two_targets.toml");
    let staged = flow(&model, &["--set", "xr=2"]);
    let single = flow(&model, &["--set", "xr=2", "--stages", "1"]);
    for key in [
        "outcome",
        "winner",
        "ell_star",
        "terms",
        "commuting_with_winner",
    ] {
        assert_eq!(staged[key], single[key], "{key}");
    }
    assert_eq!(pinned_names(&single), vec!["t_diff"]);
    assert_eq!(single["stages_end"], "limit");
    assert_eq!(single["phase"]["label"], "{t_diff}");
    assert_eq!(single["phase"]["target"], false);
    assert_eq!(single["ell_last"], single["ell_star"]);
}

#[test]
fn zero_stages_is_refused() {
    let out = Command::cargo_bin("pinflow")
        .unwrap()
        .args([
            "flow",
            demo("two_targets.toml").to_str().unwrap(),
            "--stages",
            "0",
        ])
        .assert()
        .code(2)
        .get_output()
        .stderr
        .clone();
    let err = String::from_utf8(out).unwrap();
    assert!(err.contains("--stages") && err.contains("found 0"), "{err}");
}

#[test]
fn dense_and_fourier_layouts_stage_alike() {
    // The per-q reduction (Fourier blocks, rank-one per q) and the dense
    // reduction with every translate (pseudo-inverse) are the same D_P on
    // a periodic array (section 7: "for arrays it holds per q"); the staged
    // flows must agree to the integrator's accuracy.
    use pinflow::core::system::System;
    use pinflow::flow::{Flow, FlowOptions};
    use pinflow::model::Model;
    let text = std::fs::read_to_string(demo("two_targets.toml")).unwrap();
    let sys = System::new(Model::parse(&text, "two_targets.toml").unwrap()).unwrap();
    for xr in [2.0, 5.0] {
        let point = sys
            .model
            .point_with(&[("xr".to_string(), xr)], "test")
            .unwrap();
        let run = |dense_d: bool| {
            let opts = FlowOptions {
                dense_d,
                record: false,
                ..FlowOptions::default()
            };
            Flow::new(&sys, opts).run(&point).unwrap()
        };
        let (fourier, dense) = (run(false), run(true));
        assert_eq!(fourier.stages.len(), dense.stages.len(), "xr = {xr}");
        for (a, b) in fourier.stages.iter().zip(&dense.stages) {
            assert_eq!(a.pinned, b.pinned);
            assert!(
                (a.ell - b.ell).abs() < 1e-6,
                "xr = {xr}: {} vs {}",
                a.ell,
                b.ell
            );
        }
        assert_eq!(fourier.phase, dense.phase);
        assert!(fourier.dkd_drift < 1e-6 && dense.dkd_drift < 1e-6);
    }
}

/// A spinful wire, fields (R up, L up, R dn, L dn), K = diag(1, -1, 1, -1),
/// with a V that does not mix charge and spin: V = [[1, a, 0, b], [a, 1, b,
/// 0], [0, b, 1, a], [b, 0, a, 1]], a = (wr + ws)/2, b = (wr - ws)/2, is
/// [[1, w], [w, 1]] in the (R, L) fields of each of the sectors
/// (up +- dn)/sqrt 2 with w = wr (charge) and ws (spin) (derived).
fn spinful_wire(wr: f64, ws: f64) -> String {
    let (a, b) = ((wr + ws) / 2.0, (wr - ws) / 2.0);
    format!(
        "name = \"spinful wire\"\n[fields]\nK = [[1, 0, 0, 0], [0, -1, 0, 0], [0, 0, 1, 0], [0, 0, 0, -1]]\n\
         charge = [1, 1, 1, 1]\n\
         V = [[\"1\", \"{a}\", \"0\", \"{b}\"], [\"{a}\", \"1\", \"{b}\", \"0\"], [\"0\", \"{b}\", \"1\", \"{a}\"], [\"{b}\", \"0\", \"{a}\", \"1\"]]\n\
         [flow]\nclosure = \"none\"\n\
         [[term]]\nname = \"spin_bs\"\nparticles = [1, -1, -1, 1]\ncoupling = 0.2\n\
         [[term]]\nname = \"cdw\"\nparticles = [1, -1, 0, 0]\ncoupling = 1e-9\n\
         [[term]]\nname = \"pairing\"\nparticles = [1, 0, 0, 1]\ncoupling = 1e-9\n\
         [[term]]\nname = \"cdw4\"\nparticles = [1, -1, 1, -1]\ncoupling = 1e-9\n"
    )
}

#[test]
fn luther_emery_spin_gap_reduces_cdw_and_pairing_dimensions() {
    // Luther & Emery, PRL 33, 589 (1974); Giamarchi (2004) ch. 7: with the
    // spin gap (spin backscattering pinned), 2k_F CDW has Delta = K_rho/2
    // and singlet pairing 1/(2 K_rho), K_rho read off the 4k_F CDW,
    // Delta = 2 K_rho (physics reference section 7). The flow carries D
    // after the pin in the reference-velocity form D_P; the charge block of
    // D does not flow here (only spin_bs feeds back, and it lies in the spin
    // sector), so the values hold to rounding right after the pin.
    use pinflow::core::system::System;
    use pinflow::flow::{Flow, FlowOptions};
    use pinflow::model::Model;
    for (wr, ws) in [(0.3, 0.5), (-0.4, 0.3), (0.6, 0.6)] {
        let sys = System::new(Model::parse(&spinful_wire(wr, ws), "w.toml").unwrap()).unwrap();
        let point = sys.model.point_with(&[], "test").unwrap();
        let r = Flow::new(&sys, FlowOptions::default()).run(&point).unwrap();
        assert_eq!(r.winner.as_deref(), Some("spin_bs"), "wr {wr}, ws {ws}");
        let ell1 = r.stages[0].ell;
        let k_rho = r.terms[3].dimension0 / 2.0;
        let after = r
            .samples
            .iter()
            .find(|s| s.ell > ell1)
            .expect("a sample after the pin");
        let (cdw, pairing) = (after.dimensions[1], after.dimensions[2]);
        assert!(
            (cdw - k_rho / 2.0).abs() < 1e-9,
            "cdw {cdw} vs K_rho/2 = {}",
            k_rho / 2.0
        );
        assert!(
            (pairing - 1.0 / (2.0 * k_rho)).abs() < 1e-9,
            "pairing {pairing} vs 1/(2 K_rho) = {}",
            1.0 / (2.0 * k_rho)
        );
        assert!(
            after.couplings[0].is_nan(),
            "the pinned term leaves the trajectory"
        );
    }
}
