//! The `pinflow scan` and `pinflow merge` command lines: the output bytes do
//! not depend on the number of threads, on sharding then merging, or on an
//! interruption followed by `--resume` (real kills of the running binary,
//! and hand-cut partial files); bad input is refused with exit code 2 and a
//! message; the figures are written. Runs the real binary in temporary
//! directories.

use std::path::{Path, PathBuf};
use std::process::Stdio;
use std::time::{Duration, Instant};

mod common;

use assert_cmd::Command;
use common::svg_texts;
use predicates::prelude::*;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

const BIN: &str = env!("CARGO_BIN_EXE_pinflow");

fn flow_file(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("flows")
        .join(name)
}

fn tmp() -> tempfile::TempDir {
    tempfile::tempdir().expect("temporary directory")
}

fn pinflow(dir: &Path) -> Command {
    let mut cmd = Command::new(BIN);
    cmd.current_dir(dir).timeout(Duration::from_secs(60));
    cmd
}

/// `pinflow scan MODEL ARGS --out OUT --quiet`, expected to succeed.
fn scan_ok(model: &Path, args: &[&str], out: &Path) {
    pinflow(out.parent().unwrap())
        .arg("scan")
        .arg(model)
        .args(args)
        .arg("--out")
        .arg(out)
        .arg("--quiet")
        .assert()
        .success();
}

/// Files every finished two-axis scan writes.
const OUTPUTS: [&str; 10] = [
    "points.csv",
    "summary.json",
    "phases.csv",
    "run.json",
    "phase.svg",
    "ell_star.svg",
    "phase.png",
    "ell_star.png",
    "phase.pdf",
    "ell_star.pdf",
];

/// The files `names` are byte for byte the same in `a` and `b`.
#[track_caller]
fn assert_same_files(a: &Path, b: &Path, names: &[&str], what: &str) {
    for name in names {
        let x = std::fs::read(a.join(name)).unwrap_or_else(|e| panic!("{what}: {name}: {e}"));
        let y = std::fs::read(b.join(name)).unwrap_or_else(|e| panic!("{what}: {name}: {e}"));
        if x != y {
            let (xs, ys) = (String::from_utf8_lossy(&x), String::from_utf8_lossy(&y));
            let first = xs
                .lines()
                .zip(ys.lines())
                .position(|(l, m)| l != m)
                .unwrap_or(xs.lines().count().min(ys.lines().count()));
            panic!(
                "{what}: {name} differs (first at line {}):\n{:?}\n{:?}",
                first + 1,
                xs.lines().nth(first),
                ys.lines().nth(first)
            );
        }
    }
}

/// The filling-1/3 array with the default closure (generated terms join):
/// about 4 ms per point, so 100 points take a fraction of a second.
fn array_axes(n: usize) -> Vec<String> {
    vec![
        "--x".into(),
        format!("lambda=0.5:0.9:{n}"),
        "--y".into(),
        format!("g=0.5:0.95:{n}"),
    ]
}

fn strs(v: &[String]) -> Vec<&str> {
    v.iter().map(String::as_str).collect()
}

// ------------------------------------------------- threads, shards, merge

#[test]
fn threads_do_not_change_the_output() {
    let dir = tmp();
    let model = flow_file("laughlin_third.toml");
    let axes = array_axes(10);
    let (one, two) = (dir.path().join("one"), dir.path().join("two"));
    let mut args = strs(&axes);
    args.extend(["--threads", "1"]);
    scan_ok(&model, &args, &one);
    let mut args = strs(&axes);
    args.extend(["--threads", "2"]);
    scan_ok(&model, &args, &two);
    // 100 points: more than one chunk of 64 rows.
    let text = std::fs::read_to_string(one.join("points.csv")).unwrap();
    assert_eq!(text.lines().count(), 101);
    assert_same_files(&one, &two, &OUTPUTS, "--threads 1 vs --threads 2");
    assert!(!one.join(".points.running.csv").exists());
}

#[test]
fn three_shards_merged_equal_the_whole_scan() {
    let dir = tmp();
    let model = flow_file("laughlin_third.toml");
    let axes = array_axes(10);
    let whole = dir.path().join("whole");
    scan_ok(&model, &strs(&axes), &whole);
    let parts = dir.path().join("parts");
    for k in 1..=3 {
        let shard = format!("{k}/3");
        let mut args = strs(&axes);
        args.extend(["--shard", &shard]);
        scan_ok(&model, &args, &parts);
    }
    // 100 points in 3 interleaved shards: 34, 33, 33 rows (plus meta line
    // and header); no partial files left behind.
    for (k, rows) in [(1, 34), (2, 33), (3, 33)] {
        let f = parts.join(format!("shard-{k}-of-3.csv"));
        let text = std::fs::read_to_string(&f).unwrap();
        assert_eq!(text.lines().count(), rows + 2, "{}", f.display());
        assert!(!parts.join(format!(".shard-{k}-of-3.running.csv")).exists());
    }
    assert!(!parts.join("points.csv").exists(), "a shard is not a scan");
    // Merge, giving the shards out of order.
    let merged = dir.path().join("merged");
    pinflow(dir.path())
        .arg("merge")
        .args(["3", "1", "2"].map(|k| parts.join(format!("shard-{k}-of-3.csv"))))
        .arg("--out")
        .arg(&merged)
        .assert()
        .success();
    assert_same_files(&whole, &merged, &OUTPUTS, "merged shards vs whole scan");
}

// ------------------------------------------------- interruption and resume

/// Complete data rows of a partial file (lines after the meta line and
/// the header), if it exists.
fn complete_rows(path: &Path) -> Option<usize> {
    let bytes = std::fs::read(path).ok()?;
    Some(
        bytes
            .iter()
            .filter(|b| **b == b'\n')
            .count()
            .saturating_sub(2),
    )
}

/// The grid used for interruptions: 24 x 24 points, about 0.25 s of flows
/// on one thread (a kill waits for at most 140 rows and 40 ms more; rows
/// reach the file 64 at a time), so a kill lands mid-run.
const RESUME_GRID: usize = 24;

fn resume_args() -> Vec<String> {
    array_axes(RESUME_GRID)
}

/// Start a scan on one thread, wait until its partial file holds at least
/// `min_rows` complete rows (or merely exists, for 0), wait `delay` more,
/// then kill it. Returns the complete rows left behind.
fn interrupted_scan(
    model: &Path,
    args: &[&str],
    out: &Path,
    min_rows: usize,
    delay: Duration,
) -> usize {
    let running = out.join(".points.running.csv");
    let mut child = std::process::Command::new(BIN)
        .arg("scan")
        .arg(model)
        .args(args)
        .arg("--out")
        .arg(out)
        .args(["--quiet", "--threads", "1"])
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .expect("start the scan");
    let start = Instant::now();
    loop {
        if complete_rows(&running).is_some_and(|n| n >= min_rows) {
            break;
        }
        if let Some(status) = child.try_wait().unwrap() {
            panic!("the scan ended ({status}) before {min_rows} rows were written");
        }
        assert!(start.elapsed() < Duration::from_secs(60), "scan too slow");
        std::thread::sleep(Duration::from_millis(1));
    }
    std::thread::sleep(delay);
    child.kill().expect("kill the scan");
    let status = child.wait().unwrap();
    // Killed by the signal, not finished on its own.
    assert_eq!(status.code(), None, "the scan finished before the kill");
    assert!(running.exists(), "the partial file stays after a kill");
    assert!(!out.join("points.csv").exists());
    complete_rows(&running).unwrap()
}

/// `scan --resume` into `out` on two threads.
fn resume(model: &Path, args: &[&str], out: &Path) {
    let mut all = args.to_vec();
    all.extend(["--resume", "--threads", "2"]);
    scan_ok(model, &all, out);
    assert!(!out.join(".points.running.csv").exists());
}

#[test]
fn killed_scans_resume_to_the_same_output() {
    let dir = tmp();
    let model = flow_file("laughlin_third.toml");
    let axes = resume_args();
    let args = strs(&axes);
    let reference = dir.path().join("reference");
    scan_ok(&model, &args, &reference);
    // Kill points drawn with fixed seeds: a number of rows to wait for
    // (0 = as soon as the partial file exists) and a further delay.
    let mut rng = ChaCha8Rng::seed_from_u64(20_240_611);
    let mut cases: Vec<(usize, u64)> = vec![(0, 0)];
    for _ in 0..3 {
        cases.push((rng.gen_range(0..=140), rng.gen_range(0..=40)));
    }
    let mut left = Vec::new();
    for (i, &(min_rows, delay)) in cases.iter().enumerate() {
        let out = dir.path().join(format!("killed-{i}"));
        let rows = interrupted_scan(&model, &args, &out, min_rows, Duration::from_millis(delay));
        left.push(rows);
        resume(&model, &args, &out);
        assert_same_files(
            &reference,
            &out,
            &OUTPUTS,
            &format!("resumed after a kill with {rows} rows done (case {i})"),
        );
    }
    assert!(
        left.iter().any(|&r| r > 0),
        "at least one kill must leave finished rows to resume from: {left:?}"
    );
}

#[test]
fn hand_cut_partial_files_resume_to_the_same_output() {
    let dir = tmp();
    let model = flow_file("laughlin_third.toml");
    let axes = resume_args();
    let args = strs(&axes);
    let reference = dir.path().join("reference");
    scan_ok(&model, &args, &reference);
    let killed = dir.path().join("killed");
    let rows = interrupted_scan(&model, &args, &killed, 128, Duration::ZERO);
    assert!(rows >= 128);
    let partial = std::fs::read(killed.join(".points.running.csv")).unwrap();
    // Start of each line.
    let starts: Vec<usize> = std::iter::once(0)
        .chain(
            partial
                .iter()
                .enumerate()
                .filter(|(_, b)| **b == b'\n')
                .map(|(i, _)| i + 1),
        )
        .filter(|&i| i < partial.len())
        .collect();
    let (meta, header, last) = (starts[0], starts[1], *starts.last().unwrap());
    let last_len = partial.len() - last;
    let cuts = [
        ("half of the last row", last + last_len / 2),
        ("one byte of the last row", last + 1),
        ("the last row without its newline", partial.len() - 1),
        ("no rows, header complete", starts[2]),
        ("half of the header", header + 10),
        ("half of the meta line", meta + 30),
        ("an empty file", 0),
    ];
    for (what, len) in cuts {
        let out = dir.path().join(format!("cut-{len}"));
        std::fs::create_dir_all(&out).unwrap();
        std::fs::write(out.join(".points.running.csv"), &partial[..len]).unwrap();
        resume(&model, &args, &out);
        assert_same_files(&reference, &out, &OUTPUTS, &format!("resumed from {what}"));
    }
}

#[test]
fn resume_keeps_finished_rows() {
    // Resuming must not recompute finished rows: mark one in the partial
    // file and find the mark in points.csv.
    let dir = tmp();
    let model = flow_file("laughlin_third.toml");
    let axes = resume_args();
    let args = strs(&axes);
    let out = dir.path().join("out");
    let rows = interrupted_scan(&model, &args, &out, 64, Duration::ZERO);
    assert!(rows >= 64);
    let running = out.join(".points.running.csv");
    let text = std::fs::read_to_string(&running).unwrap();
    let mut lines: Vec<String> = text.split_inclusive('\n').map(String::from).collect();
    let first_row = &lines[2];
    let mut cells: Vec<&str> = first_row.trim_end().split(',').collect();
    assert_eq!(cells[2], "strong", "first row: {first_row}");
    cells[3] = "marked";
    lines[2] = format!("{}\n", cells.join(","));
    std::fs::write(&running, lines.concat()).unwrap();
    resume(&model, &args, &out);
    let points = std::fs::read_to_string(out.join("points.csv")).unwrap();
    let row0 = points.lines().nth(1).unwrap();
    assert!(row0.contains(",marked,"), "row 0 was recomputed: {row0}");
    assert_eq!(points.lines().count(), RESUME_GRID * RESUME_GRID + 1);
}

#[test]
fn resume_refuses_a_partial_file_of_other_settings() {
    let dir = tmp();
    let model = flow_file("laughlin_third.toml");
    let axes = resume_args();
    let args = strs(&axes);
    let out = dir.path().join("out");
    interrupted_scan(&model, &args, &out, 1, Duration::ZERO);
    let running = out.join(".points.running.csv");
    let before = std::fs::read(&running).unwrap();
    let other_grid = array_axes(RESUME_GRID - 1);
    let mut other_options = strs(&axes);
    other_options.extend(["--ell-max", "30"]);
    let mut other_point = strs(&axes);
    other_point.extend(["--set", "kF=0.04"]);
    for other in [strs(&other_grid), other_options, other_point] {
        pinflow(dir.path())
            .arg("scan")
            .arg(&model)
            .args(&other)
            .arg("--out")
            .arg(&out)
            .args(["--quiet", "--resume"])
            .assert()
            .code(2)
            .stderr(predicate::str::contains(
                "made with a different model, grid, shard or options",
            ));
        assert_eq!(std::fs::read(&running).unwrap(), before, "left untouched");
        assert!(!out.join("points.csv").exists());
    }
}

// ------------------------------------------------------------- bad input

/// `pinflow scan spinless_wire.toml ARGS --out DIR/out`: exit code 2 and a
/// message containing every fragment; nothing is written.
#[track_caller]
fn scan_refused(args: &[&str], fragments: &[&str]) {
    let dir = tmp();
    let out = dir.path().join("out");
    let assert = pinflow(dir.path())
        .arg("scan")
        .arg(flow_file("spinless_wire.toml"))
        .args(args)
        .arg("--out")
        .arg(&out)
        .arg("--quiet")
        .timeout(Duration::from_secs(20))
        .assert()
        .code(2);
    let stderr = String::from_utf8_lossy(&assert.get_output().stderr).to_string();
    for f in fragments {
        assert!(stderr.contains(f), "{args:?}: `{f}` not in: {stderr}");
    }
    assert!(!out.exists(), "{args:?}: the output directory was created");
}

#[test]
fn bad_axes_are_refused() {
    scan_refused(
        &["--x", "mu=0:1:3"],
        &["--x: unknown axis parameter `mu`", "lambda", "delta"],
    );
    scan_refused(
        &["--x", "lambda=0:0.5:3", "--y", "mu=0:1:3"],
        &["--y: unknown axis parameter `mu`"],
    );
    scan_refused(&["--x", "lambda=0:0.5:1"], &["--x", "at least 2 points"]);
    scan_refused(&["--x", "lambda=0:0.5:0"], &["at least 2 points"]);
    scan_refused(&["--x", "lambda=0.5:0.1:5"], &["MIN must be below MAX"]);
    scan_refused(&["--x", "lambda=0.5:0.5:5"], &["MIN must be below MAX"]);
    scan_refused(
        &["--x", "lambda=0:0.5:3", "--y", "delta=0.1:0:3"],
        &["--y", "MIN must be below MAX"],
    );
    scan_refused(
        &["--x", "delta=0:0.1:5:log"],
        &["log spacing needs positive bounds"],
    );
    scan_refused(
        &["--x", "delta=-0.1:0.1:5:log"],
        &["log spacing needs positive bounds"],
    );
    scan_refused(
        &["--x", "delta=0.1:-0.1:5:log"],
        &["log spacing needs positive bounds"],
    );
    scan_refused(
        &["--x", "lambda=0:0.5:3", "--y", "lambda=0:0.5:3"],
        &["must be different parameters"],
    );
}

#[test]
fn oversized_grid_is_refused_with_an_estimate() {
    // 5000 x 5000 = 25 000 000 points > 20 000 000; at about 120 bytes per
    // row that is 3.0 GB of output. Refused before anything is written
    // (the directory is not even created), within the timeout.
    scan_refused(
        &["--x", "lambda=0:0.9:5000", "--y", "delta=0:1:5000"],
        &["25000000 points", "3.0 GB", "--force"],
    );
}

#[test]
fn bad_shard_numbers_are_refused() {
    for bad in ["0/3", "4/3", "1/0", "3"] {
        scan_refused(&["--x", "lambda=0:0.5:3", "--shard", bad], &["--shard"]);
    }
    scan_refused(
        &["--x", "lambda=0:0.5:3", "--shard", "0/3"],
        &["1 <= K <= N"],
    );
    scan_refused(
        &["--x", "lambda=0:0.5:3", "--shard", "4/3"],
        &["1 <= K <= N"],
    );
}

#[test]
fn unwritable_output_fails_at_once() {
    // An output directory under a regular file cannot be created: a bad
    // --out, refused before any point is computed (exit code 2, bad input;
    // docs/errors.md E67). The grid (10 000 points of the array with
    // generated terms) would take far longer than the timeout if the scan
    // ran before failing.
    let dir = tmp();
    let file = dir.path().join("a-file");
    std::fs::write(&file, "not a directory").unwrap();
    let out = file.join("out");
    pinflow(dir.path())
        .arg("scan")
        .arg(flow_file("laughlin_third.toml"))
        .args(array_axes(100))
        .arg("--out")
        .arg(&out)
        .arg("--quiet")
        .timeout(Duration::from_secs(10))
        .assert()
        .code(2)
        .stderr(predicate::str::contains("a-file").and(predicate::str::contains("--out")));
}

/// Three complete shards of a small scan in `dir/name`; extra arguments
/// change the scan.
fn small_shards(dir: &Path, name: &str, extra: &[&str]) -> Vec<PathBuf> {
    let out = dir.join(name);
    for k in 1..=3 {
        let shard = format!("{k}/3");
        let mut args = vec![
            "--x",
            "lambda=-0.5:0.8:5",
            "--y",
            "delta=0:0.1:3",
            "--closure",
            "none",
        ];
        args.extend(extra);
        args.extend(["--shard", &shard]);
        scan_ok(&flow_file("spinless_wire.toml"), &args, &out);
    }
    (1..=3)
        .map(|k| out.join(format!("shard-{k}-of-3.csv")))
        .collect()
}

/// `pinflow merge FILES --out DIR/merged`: exit code 2, the fragments in
/// the message, and no points.csv.
#[track_caller]
fn merge_refused(dir: &Path, files: &[&PathBuf], fragments: &[&str]) {
    let merged = dir.join("merged");
    let assert = pinflow(dir)
        .arg("merge")
        .args(files)
        .arg("--out")
        .arg(&merged)
        .assert()
        .code(2);
    let stderr = String::from_utf8_lossy(&assert.get_output().stderr).to_string();
    for f in fragments {
        assert!(stderr.contains(f), "`{f}` not in: {stderr}");
    }
    assert!(!merged.join("points.csv").exists());
}

#[test]
fn bad_shard_sets_are_refused() {
    let dir = tmp();
    let d = dir.path();
    let a = small_shards(d, "a", &[]);
    let b = small_shards(d, "b", &["--ell-max", "30"]);
    // The good set merges (so the refusals below are about the sets).
    pinflow(d)
        .arg("merge")
        .args(&a)
        .arg("--out")
        .arg(d.join("good"))
        .assert()
        .success();
    // Shards of two different scans.
    merge_refused(
        d,
        &[&a[0], &a[1], &b[2]],
        &["shard-3-of-3.csv", "belongs to a different scan"],
    );
    // A missing shard.
    merge_refused(d, &[&a[0], &a[2]], &["shard 2/3 is missing"]);
    // A shard given twice.
    merge_refused(
        d,
        &[&a[0], &a[1], &a[1], &a[2]],
        &["shard 2/3 is given twice"],
    );
    // An incomplete shard: its last row cut off.
    let text = std::fs::read_to_string(&a[1]).unwrap();
    let cut = d.join("cut");
    std::fs::create_dir_all(&cut).unwrap();
    let short = cut.join("shard-2-of-3.csv");
    let keep = text.trim_end().rfind('\n').unwrap() + 1;
    std::fs::write(&short, &text[..keep]).unwrap();
    merge_refused(
        d,
        &[&a[0], &short, &a[2]],
        &["shard 2/3 is incomplete: 4 of 5 points"],
    );
    // A finished points.csv is not a shard file.
    let good = d.join("good").join("points.csv");
    merge_refused(d, &[&good], &["not a pinflow scan file"]);
}

// --------------------------------------------------------------- figures

#[track_caller]
fn assert_figure(dir: &Path, stem: &str, labels: &[&str]) {
    let png = std::fs::read(dir.join(format!("{stem}.png"))).unwrap();
    assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n", "{stem}.png signature");
    assert!(png.len() > 1000, "{stem}.png is suspiciously small");
    let svg = std::fs::read_to_string(dir.join(format!("{stem}.svg"))).unwrap();
    assert!(svg.contains("<svg"), "{stem}.svg");
    let texts = svg_texts(&svg);
    for l in labels {
        assert!(
            texts.iter().any(|t| t == l),
            "{stem}.svg has no label {l}: {texts:?}"
        );
    }
}

#[test]
fn figures_of_one_and_two_axis_scans() {
    let dir = tmp();
    let model = flow_file("spinless_wire.toml");
    let one = dir.path().join("one");
    scan_ok(&model, &["--x", "lambda=-0.5:0.8:9"], &one);
    assert_figure(&one, "phase", &["lambda"]);
    assert!(!one.join("ell_star.png").exists() && !one.join("ell_star.svg").exists());
    let two = dir.path().join("two");
    scan_ok(
        &model,
        &["--x", "lambda=-0.5:0.8:5", "--y", "delta=0:0.1:3"],
        &two,
    );
    assert_figure(&two, "phase", &["lambda", "delta"]);
    assert_figure(&two, "ell_star", &["lambda", "delta"]);
    // The summary lists what was written: points.csv, summary.json,
    // phases.csv, run.json and each figure as PNG, SVG and PDF.
    for (out, n) in [(&one, 7), (&two, 10)] {
        let s: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap())
                .unwrap();
        let files = s["files"].as_array().unwrap();
        assert_eq!(files.len(), n);
        for f in files {
            assert!(out.join(f.as_str().unwrap()).is_file(), "{f}");
        }
    }
}

#[test]
fn model_scan_table_gives_the_default_axis() {
    // flows/spinless_wire.toml has [scan] x = "lambda=-0.6:0.9:61".
    let dir = tmp();
    let out = dir.path().join("out");
    scan_ok(
        &flow_file("spinless_wire.toml"),
        &["--closure", "none"],
        &out,
    );
    let s: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    assert_eq!(s["axes"], serde_json::json!(["lambda=-0.6:0.9:61"]));
    assert_eq!(s["points"], 61);
}
