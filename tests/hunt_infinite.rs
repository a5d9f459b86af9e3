//! `pinflow hunt` on an infinite array uses the real-space window of the
//! q-space fixed point. Check values: the sliding-Luttinger-liquid
//! dimensions of checks.md ("Infinite arrays") [Mukhopadhyay, Kane &
//! Lubensky, PRB 64, 045120 (2001); structure from memory, the integrals
//! derived]: at K0 = 0.8, lam = 0.5 (g = 9/41, w = 0.152439...), interwire
//! CDW Delta = 1.91562 and interwire pair hopping Delta = 2.13776.

use assert_cmd::Command;
use serde_json::Value;

const MODEL: &str = r#"
name = "sliding check array"
[params]
g = 0.21951219512195122      # 9/41: K0 = sqrt((1-g)/(1+g)) = 0.8
w = 0.1524390243902439       # lam = 4 w / (1 + g) = 0.5
[array]
wires = "infinite"
K = [[1, 0], [0, -1]]
charge = [1, 1]
[array.V]
0 = [["1", "g"], ["g", "1"]]
1 = [["w", "w"], ["w", "w"]]
[[term]]
name = "cdw"
particles = { 0 = [1, -1], 1 = [-1, 1] }
"#;

fn hunt(args: &[&str]) -> Value {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("sliding.toml");
    std::fs::write(&path, MODEL).unwrap();
    let out = Command::cargo_bin("pinflow")
        .unwrap()
        .arg("hunt")
        .arg(&path)
        .args(args)
        .args(["--format", "json"])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

fn find<'a>(r: &'a Value, particles: &[i64]) -> Option<&'a Value> {
    r["operators"].as_array().unwrap().iter().find(|o| {
        let p: Vec<i64> = o["particles"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_i64().unwrap())
            .collect();
        p == particles || p.iter().map(|x| -x).collect::<Vec<_>>() == particles
    })
}

#[test]
fn hunt_on_the_infinite_array_finds_the_sliding_values() {
    let r = hunt(&["--range", "2", "--max-dim", "2.2"]);
    assert_eq!(r["boundary"], "infinite");
    let cdw = find(&r, &[1, -1, -1, 1]).expect("interwire CDW found");
    let d = cdw["dimension"].as_f64().unwrap();
    assert!((d - 1.91562).abs() < 5e-5, "CDW {d}");
    let pair = find(&r, &[1, 1, -1, -1]).expect("interwire pair hopping found");
    let d = pair["dimension"].as_f64().unwrap();
    assert!((d - 2.13776).abs() < 5e-5, "pair hopping {d}");
    // With the bound at 2 the pair hopping (Delta > 2) is not listed.
    let r2 = hunt(&["--range", "2"]);
    assert!(find(&r2, &[1, 1, -1, -1]).is_none());
    assert!(find(&r2, &[1, -1, -1, 1]).is_some());
}
