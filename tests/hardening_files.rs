//! Issue 19, "Files that must never be harmed": `-o` writes through
//! symbolic links and into special files (pipes, devices) without replacing
//! them, reports their write errors as they are, refuses to overwrite the
//! model; a scan or merge keeps another scan's files unless `--overwrite`,
//! removes the stale outputs of an earlier scan and the temporaries a killed
//! run left, and a refused run leaves its folder as it was. Runs the real
//! binary in temporary directories (special files: a fifo made there; the
//! only device used is `/dev/full`, written, never replaced).

use std::collections::BTreeMap;
use std::os::unix::fs::FileTypeExt;
use std::path::{Path, PathBuf};
use std::time::Duration;

use predicates::prelude::*;

mod common;

use common::{flow_file, pinflow, BIN};

/// Every file of a directory (hidden ones too) with its bytes.
fn listing(dir: &Path) -> BTreeMap<String, Vec<u8>> {
    std::fs::read_dir(dir)
        .unwrap()
        .map(|e| {
            let e = e.unwrap();
            // Only regular files are read (opening a fifo would wait).
            let regular = e.file_type().unwrap().is_file();
            let bytes = match regular {
                true => std::fs::read(e.path()).unwrap(),
                false => Vec::new(),
            };
            (e.file_name().to_string_lossy().to_string(), bytes)
        })
        .collect()
}

/// The model copied into `dir` (tests may point outputs at it).
fn model_copy(dir: &Path) -> PathBuf {
    let model = dir.join("m.toml");
    std::fs::copy(flow_file("spinless_wire.toml"), &model).unwrap();
    model
}

fn dims_json(dir: &Path, model: &Path) -> Vec<u8> {
    let out = pinflow(dir)
        .arg("dims")
        .arg(model)
        .args(["--format", "json"])
        .output()
        .unwrap();
    assert!(out.status.success());
    out.stdout
}

fn mkfifo(path: &Path) {
    let ok = std::process::Command::new("mkfifo")
        .arg(path)
        .status()
        .unwrap();
    assert!(ok.success(), "mkfifo");
}

#[test]
fn output_into_a_fifo_is_written_directly_and_the_fifo_stays() {
    let dir = tempfile::tempdir().unwrap();
    let model = model_copy(dir.path());
    let fifo = dir.path().join("pipe");
    mkfifo(&fifo);
    let reader = {
        let fifo = fifo.clone();
        std::thread::spawn(move || std::fs::read(fifo).unwrap())
    };
    pinflow(dir.path())
        .arg("dims")
        .arg(&model)
        .args(["--format", "json", "-o"])
        .arg(&fifo)
        .assert()
        .success();
    let got = reader.join().unwrap();
    assert_eq!(
        got,
        dims_json(dir.path(), &model),
        "the reader gets the report"
    );
    let kind = std::fs::symlink_metadata(&fifo).unwrap().file_type();
    assert!(kind.is_fifo(), "the fifo is still a fifo");
    assert!(
        !listing(dir.path()).keys().any(|n| n.contains("partial")),
        "no temporary beside the fifo"
    );
}

#[test]
fn dev_full_reports_no_space_and_dev_stdout_is_standard_output() {
    let dir = tempfile::tempdir().unwrap();
    let model = model_copy(dir.path());
    pinflow(dir.path())
        .arg("dims")
        .arg(&model)
        .args(["-o", "/dev/full"])
        .assert()
        .code(1)
        .stderr(
            predicate::str::contains("/dev/full")
                .and(predicate::str::contains("No space left on device")),
        );
    let full = std::fs::metadata("/dev/full").unwrap().file_type();
    assert!(full.is_char_device(), "/dev/full is still a device");
    let out = pinflow(dir.path())
        .arg("dims")
        .arg(&model)
        .args(["--format", "json", "-o", "/dev/stdout"])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert_eq!(out.stdout, dims_json(dir.path(), &model));
    let dash = pinflow(dir.path())
        .arg("dims")
        .arg(&model)
        .args(["--format", "json", "-o", "-"])
        .output()
        .unwrap();
    assert_eq!(dash.stdout, out.stdout, "`-o -` is standard output");
}

#[test]
fn output_through_a_symlink_writes_the_target_and_keeps_the_link() {
    let dir = tempfile::tempdir().unwrap();
    let model = model_copy(dir.path());
    std::fs::create_dir(dir.path().join("real")).unwrap();
    let target = dir.path().join("real").join("report.json");
    std::fs::write(&target, "old").unwrap();
    let link = dir.path().join("link.json");
    std::os::unix::fs::symlink("real/report.json", &link).unwrap();
    // A dangling link: its target is created.
    let dangling = dir.path().join("dangling.json");
    std::os::unix::fs::symlink("real/new.json", &dangling).unwrap();
    for l in [&link, &dangling] {
        pinflow(dir.path())
            .arg("dims")
            .arg(&model)
            .args(["--format", "json", "-o"])
            .arg(l)
            .assert()
            .success();
        let meta = std::fs::symlink_metadata(l).unwrap();
        assert!(
            meta.file_type().is_symlink(),
            "{} is still a link",
            l.display()
        );
    }
    let want = dims_json(dir.path(), &model);
    assert_eq!(std::fs::read(&target).unwrap(), want);
    assert_eq!(
        std::fs::read(dir.path().join("real/new.json")).unwrap(),
        want
    );
}

#[test]
fn the_model_file_is_never_an_output() {
    let dir = tempfile::tempdir().unwrap();
    let model = model_copy(dir.path());
    let before = std::fs::read(&model).unwrap();
    let link = dir.path().join("link.toml");
    std::os::unix::fs::symlink("m.toml", &link).unwrap();
    let hard = dir.path().join("hard.toml");
    std::fs::hard_link(&model, &hard).unwrap();
    let same_by_path = dir.path().join(".").join("m.toml");
    for (cmd, out) in [
        ("dims", &model),
        ("dims", &link),
        ("dims", &hard),
        ("dims", &same_by_path),
        ("hunt", &model),
        ("edges", &model),
    ] {
        let mut c = pinflow(dir.path());
        c.arg(cmd).arg(&model);
        if cmd == "edges" {
            c.args(["--pin", "umklapp"]);
        }
        if cmd == "hunt" {
            c.args(["--max-dim", "2"]);
        }
        c.arg("-o").arg(out).assert().code(2).stderr(
            predicate::str::contains("-o").and(predicate::str::contains("is the model file")),
        );
        assert_eq!(
            std::fs::read(&model).unwrap(),
            before,
            "{cmd} -o {}",
            out.display()
        );
    }
}

/// `pinflow scan` of the spinless wire along lambda into `out`.
fn scan(dir: &Path, out: &Path, extra: &[&str]) -> assert_cmd::assert::Assert {
    pinflow(dir)
        .arg("scan")
        .arg(flow_file("spinless_wire.toml"))
        .args(["--x", "lambda=-0.5:0.5:5", "--quiet", "--out"])
        .arg(out)
        .args(extra)
        .assert()
}

const PLANE: [&str; 2] = ["--y", "delta=0:0.2:3"];

#[test]
fn a_scan_keeps_a_users_files_unless_overwrite() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    std::fs::create_dir(&out).unwrap();
    for name in ["points.csv", "phase.png"] {
        std::fs::write(out.join(name), "mine").unwrap();
        let before = listing(&out);
        scan(dir.path(), &out, &[])
            .code(2)
            .stderr(predicate::str::contains("--out").and(predicate::str::contains(name)))
            .stderr(predicate::str::contains("--overwrite"));
        assert_eq!(listing(&out), before, "the folder is left as it was");
        std::fs::remove_file(out.join(name)).unwrap();
    }
    std::fs::write(out.join("summary.json"), "mine").unwrap();
    scan(dir.path(), &out, &["--overwrite"]).success();
    assert_ne!(std::fs::read(out.join("summary.json")).unwrap(), b"mine");
    assert!(out.join("points.csv").exists());
}

#[test]
fn the_same_scan_runs_again_in_its_own_folder() {
    // run.json records the whole run; the same run rewrites the same bytes
    // (--threads changes no byte), anything else is another scan.
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    scan(dir.path(), &out, &[]).success();
    let first = std::fs::read(out.join("points.csv")).unwrap();
    let before = listing(&out);
    scan(dir.path(), &out, &["--threads", "2"]).success();
    assert_eq!(std::fs::read(out.join("points.csv")).unwrap(), first);
    assert_eq!(listing(&out), before);
    for other in [&PLANE[..], &["--set", "delta=0.1"], &["--ell-max", "20"]] {
        scan(dir.path(), &out, other)
            .code(2)
            .stderr(predicate::str::contains("another scan"));
        assert_eq!(listing(&out), before, "the folder is left as it was");
    }
    // The model file changed since (its SHA-256 in run.json differs).
    let run = std::fs::read_to_string(out.join("run.json")).unwrap();
    let sha = run.split("\"model_sha256\": \"").nth(1).unwrap();
    std::fs::write(out.join("run.json"), run.replacen(&sha[..8], "00000000", 1)).unwrap();
    scan(dir.path(), &out, &[]).code(2);
}

#[test]
fn a_merge_keeps_earlier_outputs_unless_overwrite() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    for k in 1..=2 {
        scan(dir.path(), &out, &["--shard", &format!("{k}/2")]).success();
    }
    let shards = [out.join("shard-1-of-2.csv"), out.join("shard-2-of-2.csv")];
    pinflow(dir.path())
        .arg("merge")
        .args(&shards)
        .assert()
        .success();
    let before = listing(&out);
    pinflow(dir.path())
        .arg("merge")
        .args(&shards)
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--overwrite"));
    assert_eq!(listing(&out), before);
    pinflow(dir.path())
        .arg("merge")
        .args(&shards)
        .arg("--overwrite")
        .assert()
        .success();
    assert_eq!(listing(&out), before, "the same merge gives the same files");
}

#[test]
fn overwrite_removes_the_outputs_the_new_scan_does_not_write() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    scan(dir.path(), &out, &PLANE).success();
    assert!(out.join("ell_star.png").exists());
    scan(dir.path(), &out, &["--overwrite"]).success();
    for stale in ["ell_star.png", "ell_star.svg"] {
        assert!(
            !out.join(stale).exists(),
            "{stale} of the two-axis scan is gone"
        );
    }
    for kept in ["points.csv", "summary.json", "phase.png", "phase.svg"] {
        assert!(out.join(kept).exists(), "{kept}");
    }
}

#[test]
fn temporaries_of_a_killed_run_are_removed_by_the_next() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    std::fs::create_dir(&out).unwrap();
    let left = [
        ".phase.png.4242-0.tmp.png",
        ".ell_star.svg.4242-3.tmp.svg",
        ".points.csv.4242.partial",
        ".summary.json.4242.partial",
    ];
    for name in left {
        std::fs::write(out.join(name), "half").unwrap();
    }
    std::fs::write(out.join("notes.txt"), "mine").unwrap();
    scan(dir.path(), &out, &PLANE).success();
    let names: Vec<String> = listing(&out).into_keys().collect();
    for name in left {
        assert!(
            !names.iter().any(|n| n == name),
            "{name} removed: {names:?}"
        );
    }
    assert!(names.iter().any(|n| n == "notes.txt"), "other files stay");
    assert!(
        !names
            .iter()
            .any(|n| n.contains(".tmp.") || n.ends_with(".partial")),
        "{names:?}"
    );
}

#[test]
fn a_failed_merge_leaves_the_folder_as_it_was() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    for k in 1..=2 {
        scan(dir.path(), &out, &["--shard", &format!("{k}/2")]).success();
    }
    // Damage the last data row of shard 2: the merge finds it after
    // writing most rows.
    let shard2 = out.join("shard-2-of-2.csv");
    let text = std::fs::read_to_string(&shard2).unwrap();
    let damaged = text.replacen(",strong,", ",won,", 1);
    assert_ne!(damaged, text);
    std::fs::write(&shard2, damaged).unwrap();
    let before = listing(&out);
    pinflow(dir.path())
        .arg("merge")
        .arg(out.join("shard-1-of-2.csv"))
        .arg(&shard2)
        .assert()
        .code(2)
        .stderr(predicate::str::contains("damaged"));
    let after = listing(&out);
    let new: Vec<&String> = after.keys().filter(|k| !before.contains_key(*k)).collect();
    // Only the (empty, hidden) lock file may be new.
    assert!(new.iter().all(|n| *n == ".pinflow.lock"), "{new:?}");
    assert!(!out.join("points.csv").exists());
}

#[test]
fn a_killed_merge_never_leaves_points_without_their_summary_and_figures() {
    // Merges killed after 0 to 400 ms: whenever `points.csv` exists, the
    // summary and figures beside it are those of the finished merge
    // (points.csv is published last). The next merge removes what the
    // killed ones left.
    let dir = tempfile::tempdir().unwrap();
    let run = dir.path().join("run");
    let shard = |k: usize| {
        pinflow(dir.path())
            .arg("scan")
            .arg(flow_file("spinless_wire.toml"))
            .args([
                "--x",
                "lambda=-0.6:0.9:40",
                "--y",
                "delta=0:0.3:30",
                "--quiet",
            ])
            .args(["--shard", &format!("{k}/2"), "--out"])
            .arg(&run)
            .assert()
            .success();
    };
    shard(1);
    shard(2);
    let shards = [run.join("shard-1-of-2.csv"), run.join("shard-2-of-2.csv")];
    let reference = dir.path().join("reference");
    pinflow(dir.path())
        .arg("merge")
        .args(&shards)
        .arg("--out")
        .arg(&reference)
        .assert()
        .success();
    let outputs = [
        "points.csv",
        "summary.json",
        "phase.png",
        "phase.svg",
        "ell_star.png",
        "ell_star.svg",
    ];
    let want: Vec<Vec<u8>> = outputs
        .iter()
        .map(|n| std::fs::read(reference.join(n)).unwrap())
        .collect();
    for delay in [0u64, 10, 25, 50, 75, 100, 150, 200, 300, 400] {
        let mut child = std::process::Command::new(BIN)
            .arg("merge")
            .args(&shards)
            .arg("--overwrite")
            .current_dir(dir.path())
            .stdout(std::process::Stdio::null())
            .stderr(std::process::Stdio::null())
            .spawn()
            .unwrap();
        std::thread::sleep(Duration::from_millis(delay));
        let _ = child.kill();
        let _ = child.wait();
        if run.join("points.csv").exists() {
            for (name, bytes) in outputs.iter().zip(&want) {
                let got = std::fs::read(run.join(name)).unwrap_or_default();
                assert!(got == *bytes, "killed after {delay} ms: {name} differs");
            }
        }
    }
    pinflow(dir.path())
        .arg("merge")
        .args(&shards)
        .arg("--overwrite")
        .assert()
        .success();
    let names: Vec<String> = listing(&run).into_keys().collect();
    assert!(
        !names
            .iter()
            .any(|n| n.contains(".tmp.") || n.ends_with(".partial")),
        "{names:?}"
    );
}
