//! Issue 19, "Small gaps users hit" (and from "Work that grows without a
//! word": `--threads 100000` and an endless model stream): scientific
//! notation in expressions, a model from standard input, a size cap on
//! model files, a thread cap, plain progress lines off a terminal,
//! 0-based shard indices, shell completions and a man page. Runs the real
//! binary in temporary directories.

use std::io::Write;
use std::path::Path;
use std::process::Stdio;
use std::time::{Duration, Instant};

use predicates::prelude::*;

mod common;

use common::{flow_file, pinflow, without_provenance, BIN};

fn stdout_of(dir: &Path, args: &[&str]) -> Vec<u8> {
    let out = pinflow(dir).args(args).output().unwrap();
    assert!(
        out.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    out.stdout
}

#[test]
fn scientific_notation_in_expressions_gives_the_same_numbers() {
    // The same model with its V entry written as `lambda*1e0` and
    // `lambda*10e-1` (both lambda: derived, 10e-1 = 1) and its coupling as
    // `2.0e-1` inside an expression: the dims JSON is identical.
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(flow_file("spinless_wire.toml")).unwrap();
    let plain = dir.path().join("plain.toml");
    std::fs::write(&plain, &text).unwrap();
    let sci = dir.path().join("sci.toml");
    let changed = text
        .replacen("[\"1\", \"lambda\"]", "[\"1\", \"lambda*1e0\"]", 1)
        .replacen("[\"lambda\", \"1\"]", "[\"lambda*10e-1\", \"1\"]", 1)
        .replacen("coupling = 0.2", "coupling = \"2.0e-1 + 0*lambda\"", 1);
    assert_ne!(changed, text);
    std::fs::write(&sci, changed).unwrap();
    let a = stdout_of(dir.path(), &["dims", "plain.toml", "--format", "json"]);
    let b = stdout_of(dir.path(), &["dims", "sci.toml", "--format", "json"]);
    // The provenance differs (the file name and digest); the results may not.
    assert_eq!(without_provenance(&a), without_provenance(&b));
}

#[test]
fn an_unknown_function_is_named_with_the_known_ones() {
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(flow_file("spinless_wire.toml"))
        .unwrap()
        .replacen("coupling = 0.2", "coupling = \"0.1*sinc(lambda)\"", 1);
    std::fs::write(dir.path().join("m.toml"), text).unwrap();
    pinflow(dir.path())
        .args(["dims", "m.toml"])
        .assert()
        .code(2)
        .stderr(
            predicate::str::contains("m.toml")
                .and(predicate::str::contains("term \"umklapp\".coupling"))
                .and(predicate::str::contains("unknown function `sinc`"))
                .and(predicate::str::contains("known functions: abs,"))
                .and(predicate::str::contains("sqrt")),
        );
}

#[test]
fn a_model_from_standard_input() {
    let dir = tempfile::tempdir().unwrap();
    let model = flow_file("spinless_wire.toml");
    let from_file = stdout_of(
        dir.path(),
        &["dims", model.to_str().unwrap(), "--format", "json"],
    );
    let text = std::fs::read(&model).unwrap();
    let out = pinflow(dir.path())
        .args(["dims", "-", "--format", "json"])
        .write_stdin(text.clone())
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert_eq!(
        without_provenance(&out.stdout),
        without_provenance(&from_file)
    );
    // Errors name standard input.
    pinflow(dir.path())
        .args(["dims", "-"])
        .write_stdin("[fields]\nK = 1\n")
        .assert()
        .code(2)
        .stderr(predicate::str::starts_with("error: <stdin>"));
    // A scan reads it once (model and fingerprint) and writes into out/stdin.
    pinflow(dir.path())
        .args(["scan", "-", "--x", "lambda=0:0.4:3", "--quiet"])
        .write_stdin(text)
        .assert()
        .success();
    assert!(dir.path().join("out/stdin/points.csv").exists());
}

#[test]
fn an_endless_model_stream_is_cut_off_with_a_clear_error() {
    let dir = tempfile::tempdir().unwrap();
    let start = Instant::now();
    pinflow(dir.path())
        .args(["dims", "/dev/zero"])
        .assert()
        .code(2)
        .stderr(
            predicate::str::contains("/dev/zero")
                .and(predicate::str::contains("larger than 64 MiB")),
        );
    assert!(start.elapsed() < Duration::from_secs(20));
    // The same through standard input.
    let mut child = std::process::Command::new(BIN)
        .args(["dims", "-"])
        .stdin(Stdio::piped())
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let mut stdin = child.stdin.take().unwrap();
    let writer = std::thread::spawn(move || {
        let block = vec![b'#'; 1 << 20];
        // Ends when pinflow stops reading (broken pipe).
        while stdin.write_all(&block).is_ok() {}
    });
    let out = child.wait_with_output().unwrap();
    writer.join().unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("<stdin>: the model file is larger"));
}

#[test]
fn a_huge_thread_count_is_capped_with_a_note() {
    let dir = tempfile::tempdir().unwrap();
    let model = flow_file("spinless_wire.toml");
    let start = Instant::now();
    pinflow(dir.path())
        .arg("scan")
        .arg(&model)
        .args([
            "--x",
            "lambda=0:0.4:3",
            "--quiet",
            "--threads",
            "100000",
            "--out",
            "a",
        ])
        .assert()
        .success()
        .stderr(predicate::str::contains(
            "note: --threads 100000 is more than 4 per core",
        ));
    assert!(
        start.elapsed() < Duration::from_secs(20),
        "{:?}",
        start.elapsed()
    );
    pinflow(dir.path())
        .arg("scan")
        .arg(&model)
        .args([
            "--x",
            "lambda=0:0.4:3",
            "--quiet",
            "--threads",
            "1",
            "--out",
            "b",
        ])
        .assert()
        .success()
        .stderr(predicate::str::contains("note").not());
    assert_eq!(
        std::fs::read(dir.path().join("a/points.csv")).unwrap(),
        std::fs::read(dir.path().join("b/points.csv")).unwrap()
    );
}

#[test]
fn zero_based_shards_merge_to_the_one_based_result() {
    let dir = tempfile::tempdir().unwrap();
    let model = flow_file("spinless_wire.toml");
    let run = |out: &str, shard: &str, base: &str| {
        pinflow(dir.path())
            .arg("scan")
            .arg(&model)
            .args(["--x", "lambda=-0.5:0.5:7", "--quiet", "--out", out])
            .args(["--shard", shard, "--shard-base", base])
            .assert()
    };
    for (k, base) in [("0/2", "0"), ("1/2", "0")] {
        run("zero", k, base).success();
    }
    for (k, base) in [("1/2", "1"), ("2/2", "1")] {
        run("one", k, base).success();
    }
    for d in ["zero", "one"] {
        pinflow(dir.path())
            .args([
                "merge",
                &format!("{d}/shard-1-of-2.csv"),
                &format!("{d}/shard-2-of-2.csv"),
            ])
            .assert()
            .success();
    }
    assert_eq!(
        std::fs::read(dir.path().join("zero/points.csv")).unwrap(),
        std::fs::read(dir.path().join("one/points.csv")).unwrap()
    );
    run("bad", "2/2", "0")
        .code(2)
        .stderr(predicate::str::contains("--shard").and(predicate::str::contains("0 <= K < N")));
    run("bad", "0/2", "1")
        .code(2)
        .stderr(predicate::str::contains("1 <= K <= N"));
    assert!(!dir.path().join("bad").exists());
}

#[test]
fn completions_and_man_page_come_from_the_command_definitions() {
    let dir = tempfile::tempdir().unwrap();
    for shell in ["bash", "zsh", "fish", "elvish", "powershell"] {
        let text = String::from_utf8(stdout_of(dir.path(), &["completions", shell])).unwrap();
        for word in ["pinflow", "scan", "merge", "progress-every", "shard-base"] {
            assert!(text.contains(word), "{shell} completions lack {word}");
        }
    }
    pinflow(dir.path())
        .args(["completions", "tcsh"])
        .assert()
        .code(2);
    let man = String::from_utf8(stdout_of(dir.path(), &["man"])).unwrap();
    assert!(
        man.starts_with(".ie") || man.contains(".TH pinflow"),
        "{}",
        &man[..200]
    );
    for word in [
        ".TH pinflow-scan",
        "\\-\\-overwrite",
        ".TH pinflow-merge",
        "hunt",
    ] {
        assert!(man.contains(word), "man page lacks {word}");
    }
}

#[test]
fn merge_partial_previews_an_unfinished_scan() {
    let dir = tempfile::tempdir().unwrap();
    let model = flow_file("spinless_wire.toml");
    let scan = |out: &str, args: &[&str]| {
        pinflow(dir.path())
            .arg("scan")
            .arg(&model)
            .args(["--x", "lambda=-0.5:0.5:9", "--quiet", "--out", out])
            .args(args)
            .assert()
            .success();
    };
    scan("run", &["--shard", "1/3"]);
    scan("run", &["--shard", "2/3"]);
    scan("whole", &[]);
    let whole = std::fs::read_to_string(dir.path().join("whole/points.csv")).unwrap();
    let whole: Vec<&str> = whole.lines().collect();
    // Shard 3 "running": its file with one finished row and half a row.
    let shard2 = std::fs::read_to_string(dir.path().join("run/shard-2-of-3.csv")).unwrap();
    let meta = shard2.lines().next().unwrap().replace("[2,3]", "[3,3]");
    let running = format!("{meta}\n{}\n{}\n{}", whole[0], whole[3], &whole[6][..5]);
    std::fs::write(dir.path().join("run/.shard-3-of-3.running.csv"), running).unwrap();
    let out = pinflow(dir.path())
        .args([
            "merge",
            "--partial",
            "run/shard-1-of-3.csv",
            "--format",
            "json",
        ])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let counts: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(counts["points"], 9);
    // Points 0..9: shards 1 and 2 complete (3 + 3), shard 3 one row.
    assert_eq!(counts["finished"], 7);
    assert_eq!(counts["shards"][2]["finished"], 1);
    let preview = std::fs::read_to_string(dir.path().join("run/preview/points.csv")).unwrap();
    let want: Vec<&str> = (0..=8)
        .filter(|i| *i != 5 && *i != 8)
        .map(|i| whole[i + 1])
        .collect();
    assert_eq!(preview.lines().next(), Some(whole[0]));
    assert_eq!(preview.lines().skip(1).collect::<Vec<_>>(), want);
    assert!(
        !dir.path().join("run/points.csv").exists(),
        "the scan folder is untouched"
    );
    // A second preview replaces the first without --overwrite.
    pinflow(dir.path())
        .args(["merge", "--partial", "run/shard-1-of-3.csv"])
        .assert()
        .success()
        .stdout(predicate::str::contains("preview: 7 of 9 points finished"));
}

#[test]
fn progress_lines_off_a_terminal() {
    // A scan of about ten chunks of 64 points on one thread (about 2 s of
    // work on a quiet machine), run with --progress-every 1 and stderr
    // piped: when it took over 3 s, a chunk ended over 1 s after the start
    // before the last one, so a plain progress line appeared; with --quiet
    // none.
    let dir = tempfile::tempdir().unwrap();
    let model = flow_file("laughlin_third_strip.toml");
    let run = |quiet: bool, out: &str| {
        let start = Instant::now();
        let mut cmd = pinflow(dir.path());
        cmd.arg("scan")
            .arg(&model)
            .args(["--x", "lambda=0.3:0.95:27", "--y", "g=0:0.95:24"])
            .args(["--threads", "1", "--progress-every", "1", "--out", out]);
        if quiet {
            cmd.arg("--quiet");
        }
        let o = cmd.output().unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        (
            String::from_utf8_lossy(&o.stderr).to_string(),
            start.elapsed(),
        )
    };
    let (text, took) = run(false, "a");
    let lines = text.lines().filter(|l| l.starts_with("progress: ")).count();
    if took > Duration::from_secs(3) {
        assert!(lines >= 1, "{took:?}: {text}");
    }
    for l in text.lines().filter(|l| l.starts_with("progress: ")) {
        assert!(
            l.contains(" points (") && l.contains("points/s, about "),
            "{l}"
        );
    }
    let (quiet, _) = run(true, "b");
    assert!(!quiet.contains("progress: "), "{quiet}");
}
