//! Momentum conservation in `pinflow hunt`: exact when every momentum is a
//! small rational at the point, otherwise within the stated tolerance.
//! Physics (derived): in the filling-1/3 demo the flux b = 6 k_F per wire
//! makes the tunnelling term m = {0: (-2, 1), 1: (-1, 2)} conserve momentum:
//! -2(k_F + j b) + (-k_F + j b) - (k_F + (j+1) b) + 2(-k_F + (j+1) b)
//! = -6 k_F + b = 0, while the filling-1 hop {0: (-1, 0), 1: (0, 1)} has
//! mismatch -2 k_F + b = 4 k_F (common practice in coupled-wire
//! constructions: the flux selects the commensurate term).

use assert_cmd::Command;
use serde_json::Value;

fn hunt(sets: &[&str]) -> Value {
    let model = concat!(env!("CARGO_MANIFEST_DIR"), "/flows/laughlin_third.toml");
    let mut cmd = Command::cargo_bin("pinflow").unwrap();
    cmd.args(["hunt", model, "--range", "3", "--format", "json"]);
    for s in sets {
        cmd.args(["--set", s]);
    }
    let out = cmd.output().unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

fn names(r: &Value) -> Vec<String> {
    r["operators"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|o| o["model_term"].as_str().map(str::to_string))
        .collect()
}

#[test]
fn rational_momenta_are_compared_exactly() {
    let r = hunt(&["g=0.8"]);
    assert_eq!(r["momentum_exact"], true);
    assert!(r["momentum_tolerance"].is_null());
    assert!(names(&r).contains(&"tunnel".to_string()));
    assert!(
        !names(&r).contains(&"hop".to_string()),
        "the hop carries momentum 4 k_F"
    );
}

#[test]
fn irrational_momenta_use_the_stated_tolerance() {
    // k_F = 0.05 sqrt(2) is not a rational with a small denominator.
    let r = hunt(&["g=0.8", "kF=0.07071067811865475"]);
    assert_eq!(r["momentum_exact"], false);
    assert_eq!(r["momentum_tolerance"], 1e-9);
    assert!(names(&r).contains(&"tunnel".to_string()));
    assert!(!names(&r).contains(&"hop".to_string()));
}
