//! Size: a forced grid of billions of points streams its rows with a small,
//! fixed memory (its grid indices are never held all at once), and `dims`
//! computes a 256-field array on the dense path.

use std::io::BufRead;
use std::path::Path;
use std::time::{Duration, Instant};

mod common;

use common::peak_kb;
use pinflow::core::system::System;
use pinflow::dims::DimsReport;
use pinflow::model::Model;

fn lines(path: &Path) -> usize {
    std::fs::File::open(path)
        .map(|f| std::io::BufReader::new(f).lines().count())
        .unwrap_or(0)
}

#[test]
fn a_forced_grid_of_4e9_points_streams_its_rows_in_little_memory() {
    // Found by hand: the scan collected all 4e9 grid indices (32 GB) before
    // computing the first point, and aborted.
    let dir = tempfile::tempdir().expect("temporary directory");
    let model = Path::new(env!("CARGO_MANIFEST_DIR")).join("flows/spinless_wire.toml");
    let mut child = std::process::Command::new(assert_cmd::cargo::cargo_bin("pinflow"))
        .current_dir(dir.path())
        .args([
            "scan",
            model.to_str().expect("a UTF-8 path"),
            "--x",
            "lambda=0:0.5:4000000000",
            "--out",
            "big",
            "--quiet",
            "--force",
            "--threads",
            "1",
        ])
        .stderr(std::process::Stdio::piped())
        .spawn()
        .expect("start pinflow");
    let partial = dir.path().join("big/.points.running.csv");
    let start = Instant::now();
    let mut rows = 0;
    while start.elapsed() < Duration::from_secs(60) {
        if let Ok(Some(status)) = child.try_wait() {
            panic!("the scan ended early: {status}");
        }
        rows = lines(&partial).saturating_sub(2);
        if rows >= 1000 {
            break;
        }
        std::thread::sleep(Duration::from_millis(50));
    }
    let peak = peak_kb(child.id());
    child.kill().expect("stop the scan");
    let _ = child.wait();
    assert!(rows >= 1000, "only {rows} rows written in 60 s");
    if let Some(kb) = peak {
        assert!(kb < 100_000, "peak memory {kb} kB after {rows} rows");
    }
}

#[test]
fn dims_computes_a_256_field_array_on_the_dense_path() {
    // An open array (the dense path) of 128 wires of two fields, with a
    // nearest-neighbour interaction.
    let text = r#"[params]
lambda = 0.3
g = 0.2
[array]
wires = 128
boundary = "open"
K = [[1, 0], [0, -1]]
charge = [1, 1]
[array.V]
0 = [["1", "lambda"], ["lambda", "1"]]
1 = [["g", "0"], ["0", "g"]]
[[term]]
name = "cdw"
particles = { 0 = [1, -1], 1 = [-1, 1] }
"#;
    let start = Instant::now();
    let sys = System::new(Model::parse(text, "big.toml").expect("model")).expect("system");
    assert!(sys.q.is_none(), "an open array takes the dense path");
    assert_eq!(sys.lattice.n, 256);
    let r = DimsReport::build(&sys, sys.model.params.defaults()).expect("dims");
    assert_eq!(r.fields, 256);
    let d = r.terms[0].dimension;
    assert!(d.is_finite() && d > 0.0, "Delta = {d}");
    assert!(
        start.elapsed() < Duration::from_secs(60),
        "took {:?}",
        start.elapsed()
    );
}
