//! Issue 19, "Data that can be silently wrong": `scan --resume` checks the
//! header and every finished row of the partial file against the grid; a
//! lock keeps two runs out of one output folder; term names are limited to
//! characters that CSV round-trips line by line; `--set` twice, inverted
//! log axes, a spacing typo and term vectors with l = K m above 2^20 are
//! refused with exit code 2 and the flag or key named. Runs the real binary
//! in temporary directories.

use std::fs::File;
use std::io::Write;
use std::path::{Path, PathBuf};

use predicates::prelude::*;

mod common;

use common::{flow_file, pinflow};

const AXIS: &str = "lambda=-0.5:0.5:9";

fn scan(dir: &Path, axis: &str, out: &Path, extra: &[&str]) -> assert_cmd::assert::Assert {
    pinflow(dir)
        .arg("scan")
        .arg(flow_file("spinless_wire.toml"))
        .args(["--x", axis, "--quiet", "--out"])
        .arg(out)
        .args(extra)
        .assert()
}

/// `scan` right after this process released a folder lock: retried while
/// the lock is still reported held. Another test thread may fork a child
/// between our `open` and its `exec`; the child then briefly shares the
/// lock's open file description (close-on-exec closes it only at `exec`),
/// which on a loaded machine can outlast the `drop`.
fn scan_after_release(dir: &Path, axis: &str, out: &Path, extra: &[&str]) {
    for _ in 0..40 {
        let output = pinflow(dir)
            .arg("scan")
            .arg(flow_file("spinless_wire.toml"))
            .args(["--x", axis, "--quiet", "--out"])
            .arg(out)
            .args(extra)
            .output()
            .unwrap();
        let stderr = String::from_utf8_lossy(&output.stderr);
        if output.status.success() {
            return;
        }
        assert!(stderr.contains("another pinflow run"), "{stderr}");
        std::thread::sleep(std::time::Duration::from_millis(250));
    }
    panic!("the folder stayed locked 10 s after its lock was released");
}

/// A complete partial file of a whole scan along `axis`: the shard file of
/// `--shard 1/1` with the shard taken out of its meta line.
fn partial_of(dir: &Path, axis: &str) -> String {
    let out = dir.join(format!("shard-{}", axis.replace([':', '=', '.'], "_")));
    scan(dir, axis, &out, &["--shard", "1/1"]).success();
    let text = std::fs::read_to_string(out.join("shard-1-of-1.csv")).unwrap();
    let (meta, rest) = text.split_once('\n').unwrap();
    let meta = meta.replace("\"shard\":[1,1]", "\"shard\":null");
    assert!(!meta.contains("[1,1]"), "{meta}");
    format!("{meta}\n{rest}")
}

/// `scan --resume` on a hand-made partial file; exit 2 with the fragments.
fn resume_refused(dir: &Path, name: &str, partial: &str, fragments: &[&str]) {
    let out = dir.join(name);
    std::fs::create_dir_all(&out).unwrap();
    let running = out.join(".points.running.csv");
    std::fs::write(&running, partial).unwrap();
    let mut a = scan(dir, AXIS, &out, &["--resume"]).code(2);
    for f in fragments {
        a = a.stderr(predicate::str::contains(*f));
    }
    assert_eq!(
        std::fs::read_to_string(&running).unwrap(),
        partial,
        "{name}: untouched"
    );
    assert!(!out.join("points.csv").exists(), "{name}");
}

#[test]
fn resume_checks_the_header_and_every_row() {
    let dir = tempfile::tempdir().unwrap();
    let good = partial_of(dir.path(), AXIS);
    let lines: Vec<&str> = good.split_inclusive('\n').collect();
    assert_eq!(lines.len(), 2 + 9);
    // The intact file resumes (nothing left to compute) to a whole scan.
    let ok = dir.path().join("ok");
    std::fs::create_dir_all(&ok).unwrap();
    std::fs::write(ok.join(".points.running.csv"), &good).unwrap();
    scan(dir.path(), AXIS, &ok, &["--resume"]).success();
    let whole = dir.path().join("whole");
    scan(dir.path(), AXIS, &whole, &[]).success();
    assert_eq!(
        std::fs::read(ok.join("points.csv")).unwrap(),
        std::fs::read(whole.join("points.csv")).unwrap()
    );
    // A damaged header (one column renamed).
    let header = lines[1].replacen("outcome", "outcom", 1);
    let damaged = [lines[0], &header].concat() + &lines[2..].concat();
    resume_refused(
        dir.path(),
        "header",
        &damaged,
        &["line 2", "header", "--resume"],
    );
    // Two rows swapped: row 3 holds the point of row 4.
    let mut swapped: Vec<&str> = lines.clone();
    swapped.swap(4, 5);
    resume_refused(
        dir.path(),
        "swapped",
        &swapped.concat(),
        &["line 5", "data row 3", "lambda = "],
    );
    // Rows of a different grid under this scan's first two lines.
    let other = partial_of(dir.path(), "lambda=-0.4:0.4:9");
    let other_rows: Vec<&str> = other.split_inclusive('\n').skip(2).collect();
    let mixed = [lines[0], lines[1]].concat() + &other_rows[..4].concat();
    resume_refused(dir.path(), "mixed", &mixed, &["line 3", "data row 1"]);
    // One row more than the grid has.
    let extra = good.clone() + lines[10];
    resume_refused(dir.path(), "extra", &extra, &["line 12", "one row more"]);
}

/// Hold the folder lock of `out` as another run would, with `pid` in it.
fn hold_lock(out: &Path, pid: &str, shared: bool) -> File {
    std::fs::create_dir_all(out).unwrap();
    let mut f = std::fs::OpenOptions::new()
        .read(true)
        .write(true)
        .create(true)
        .truncate(true)
        .open(out.join(".pinflow.lock"))
        .unwrap();
    if shared {
        f.try_lock_shared().unwrap();
    } else {
        f.try_lock().unwrap();
        f.write_all(pid.as_bytes()).unwrap();
    }
    f
}

#[test]
fn a_second_run_into_a_locked_folder_is_refused_with_the_holders_pid() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    let lock = hold_lock(&out, "4242\n", false);
    let before: Vec<_> = std::fs::read_dir(&out)
        .unwrap()
        .map(|e| e.unwrap().file_name())
        .collect();
    for extra in [&[][..], &["--shard", "1/2"][..], &["--resume"][..]] {
        scan(dir.path(), AXIS, &out, extra).code(2).stderr(
            predicate::str::contains("--out")
                .and(predicate::str::contains("another pinflow run (pid 4242)")),
        );
    }
    let after: Vec<_> = std::fs::read_dir(&out)
        .unwrap()
        .map(|e| e.unwrap().file_name())
        .collect();
    assert_eq!(before, after, "nothing written");
    drop(lock);
    scan_after_release(dir.path(), AXIS, &out, &[]);
}

#[test]
fn shards_share_a_folder_but_not_with_a_whole_scan() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    // A running shard holds the folder lock shared.
    let lock = hold_lock(&out, "", true);
    scan(dir.path(), AXIS, &out, &["--shard", "1/2"]).success();
    scan(dir.path(), AXIS, &out, &[])
        .code(2)
        .stderr(predicate::str::contains("shards of a scan"));
    drop(lock);
    // The same shard twice at once: its own lock.
    let mut own = std::fs::File::create(out.join(".shard-2-of-2.lock")).unwrap();
    own.try_lock().unwrap();
    own.write_all(b"777\n").unwrap();
    scan(dir.path(), AXIS, &out, &["--shard", "2/2"])
        .code(2)
        .stderr(predicate::str::contains("pid 777"));
    drop(own);
    scan_after_release(dir.path(), AXIS, &out, &["--shard", "2/2"]);
    // A finished shard is kept unless --overwrite; --resume has nothing to do.
    let before = std::fs::read(out.join("shard-2-of-2.csv")).unwrap();
    scan(dir.path(), AXIS, &out, &["--shard", "2/2"])
        .code(2)
        .stderr(predicate::str::contains("shard-2-of-2.csv"));
    scan(dir.path(), AXIS, &out, &["--shard", "2/2", "--resume"])
        .success()
        .stderr(predicate::str::contains("already complete"));
    scan(dir.path(), AXIS, &out, &["--shard", "2/2", "--overwrite"]).success();
    assert_eq!(std::fs::read(out.join("shard-2-of-2.csv")).unwrap(), before);
}

/// The spinless wire with one more term named `name`.
fn model_with_term(dir: &Path, name: &str) -> PathBuf {
    let mut text = std::fs::read_to_string(flow_file("spinless_wire.toml")).unwrap();
    let quoted = toml::Value::String(name.to_string()).to_string();
    text = text.replace(
        "[scan]",
        &format!("[[term]]\nname = {quoted}\nparticles = [3, -3]\ncoupling = 0.01\n\n[scan]"),
    );
    let path = dir.join("named.toml");
    std::fs::write(&path, text).unwrap();
    path
}

#[test]
fn term_names_that_csv_cannot_carry_are_refused_and_others_round_trip() {
    let dir = tempfile::tempdir().unwrap();
    for (name, what) in [
        ("a,b", "a comma"),
        ("say \"hi\"", "a double quote"),
        ("two\nlines", "control character"),
        ("tab\there", "control character"),
        (" padded", "space"),
    ] {
        let model = model_with_term(dir.path(), name);
        pinflow(dir.path())
            .arg("dims")
            .arg(&model)
            .assert()
            .code(2)
            .stderr(predicate::str::contains("named.toml").and(predicate::str::contains(what)))
            .stderr(predicate::str::contains("term \""));
    }
    // Other punctuation is fine, through a scan and shard-then-merge.
    let model = model_with_term(dir.path(), "3k_F (x+y)/2 'hex' {a; b}");
    let out = dir.path().join("out");
    for k in 1..=2 {
        pinflow(dir.path())
            .arg("scan")
            .arg(&model)
            .args([
                "--x",
                AXIS,
                "--quiet",
                "--shard",
                &format!("{k}/2"),
                "--out",
            ])
            .arg(&out)
            .assert()
            .success();
    }
    pinflow(dir.path())
        .arg("merge")
        .arg(out.join("shard-1-of-2.csv"))
        .arg(out.join("shard-2-of-2.csv"))
        .assert()
        .success();
    let points = std::fs::read_to_string(out.join("points.csv")).unwrap();
    assert!(points
        .lines()
        .next()
        .unwrap()
        .contains("dimension:3k_F (x+y)/2 'hex' {a; b}"));
    assert_eq!(points.lines().count(), 10);
}

#[test]
fn set_twice_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    pinflow(dir.path())
        .arg("dims")
        .arg(flow_file("spinless_wire.toml"))
        .args([
            "--set",
            "lambda=0.1",
            "--set",
            "delta=0",
            "--set",
            "lambda=0.2",
        ])
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "--set: `lambda` is given twice (--set lambda=0.1 and --set lambda=0.2)",
        ));
}

#[test]
fn inverted_log_axes_and_spacing_typos_are_refused_before_any_work() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    for (axis, fragment) in [
        (
            "lambda=0.5:0.1:5:log",
            "MIN must be below MAX with log spacing",
        ),
        (
            "lambda=0.2:0.2:5:log",
            "MIN must be below MAX with log spacing",
        ),
        (
            "lambda=0.1:0.5:5:lgo",
            "spacing `lgo` must be `lin` or `log`",
        ),
    ] {
        scan(dir.path(), axis, &out, &[])
            .code(2)
            .stderr(predicate::str::contains("--x").and(predicate::str::contains(fragment)));
        assert!(!out.exists(), "{axis}: nothing written");
    }
    // The same with two axes (the figure step used to fail with exit 1).
    pinflow(dir.path())
        .arg("scan")
        .arg(flow_file("spinless_wire.toml"))
        .args([
            "--x",
            AXIS,
            "--y",
            "delta=0.3:0.1:3:log",
            "--quiet",
            "--out",
        ])
        .arg(&out)
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--y"));
    assert!(!out.exists());
}

#[test]
fn particle_content_whose_lattice_vector_exceeds_2_pow_20_is_refused() {
    // l = K m with K = diag(1, -1) and m = (2^20, -2^20) is (2^20, 2^20):
    // at the limit, accepted; with K = diag(2, -2) it is 2^21: refused.
    let dir = tempfile::tempdir().unwrap();
    let base = "[fields]\nK = [[KK, 0], [0, -KK]]\ncharge = [1, 1]\nV = [[1, 0.2], [0.2, 1]]\n\n[[term]]\nname = \"big\"\nparticles = [1048576, -1048576]\n";
    for (k, code) in [("1", 0), ("2", 2)] {
        let path = dir.path().join(format!("k{k}.toml"));
        std::fs::write(&path, base.replace("KK", k)).unwrap();
        let a = pinflow(dir.path())
            .arg("dims")
            .arg(&path)
            .assert()
            .code(code);
        if code == 2 {
            a.stderr(
                predicate::str::contains("term \"big\".particles")
                    .and(predicate::str::contains("l = K m"))
                    .and(predicate::str::contains("2097152")),
            );
        }
    }
}
