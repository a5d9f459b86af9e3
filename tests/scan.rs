//! What `pinflow scan` computes: every row is the single-point flow at its
//! grid point (checked against `pinflow flow`), the grid itself (values and
//! index order), the Kosterlitz-Thouless separatrix of one null cosine
//! located by a scan, and the `target` block of `summary.json` recomputed
//! from `points.csv`. Runs the real binary in temporary directories; every
//! scan here takes well under a second.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use assert_cmd::Command;
use serde_json::Value;

fn flow_file(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("flows")
        .join(name)
}

fn tmp() -> tempfile::TempDir {
    tempfile::tempdir().expect("temporary directory")
}

fn pinflow(dir: &Path) -> Command {
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_pinflow"));
    cmd.current_dir(dir);
    cmd
}

/// One row of `points.csv`, by column name (the raw strings).
#[derive(Debug, Clone)]
struct Row(BTreeMap<String, String>);

impl Row {
    fn get(&self, col: &str) -> &str {
        self.0
            .get(col)
            .unwrap_or_else(|| panic!("no column {col} in {:?}", self.0))
    }

    fn num(&self, col: &str) -> f64 {
        let s = self.get(col);
        s.parse()
            .unwrap_or_else(|_| panic!("column {col}: `{s}` is not a number"))
    }

    fn opt(&self, col: &str) -> Option<f64> {
        let s = self.get(col);
        (!s.is_empty()).then(|| self.num(col))
    }
}

/// Header and rows of a points file.
fn read_points(path: &Path) -> (Vec<String>, Vec<Row>) {
    let mut r = csv::Reader::from_path(path).expect("points.csv is readable");
    let header: Vec<String> = r.headers().unwrap().iter().map(String::from).collect();
    let rows = r
        .records()
        .map(|rec| {
            let rec = rec.expect("a well-formed CSV row");
            assert_eq!(rec.len(), header.len(), "row length");
            Row(header
                .iter()
                .cloned()
                .zip(rec.iter().map(String::from))
                .collect())
        })
        .collect();
    (header, rows)
}

/// Run `pinflow scan MODEL ARGS --out DIR/out --quiet` and return the
/// output directory (inside `dir`).
fn scan(dir: &Path, model: &Path, args: &[&str]) -> PathBuf {
    let out = dir.join("out");
    pinflow(dir)
        .arg("scan")
        .arg(model)
        .args(args)
        .arg("--out")
        .arg(&out)
        .arg("--quiet")
        .assert()
        .success();
    out
}

fn summary(out: &Path) -> Value {
    let text = std::fs::read_to_string(out.join("summary.json")).expect("summary.json");
    serde_json::from_str(&text).expect("summary.json is JSON")
}

/// `pinflow flow MODEL --set ... ARGS --format json`: the JSON report and
/// the exit code.
fn single_flow(dir: &Path, model: &Path, set: &[(&str, &str)], args: &[&str]) -> (Value, i32) {
    let mut cmd = pinflow(dir);
    cmd.arg("flow").arg(model);
    for (k, v) in set {
        cmd.arg("--set").arg(format!("{k}={v}"));
    }
    let out = cmd.args(args).args(["--format", "json"]).output().unwrap();
    let text = String::from_utf8(out.stdout).unwrap();
    let json = serde_json::from_str(&text)
        .unwrap_or_else(|e| panic!("flow output is not JSON ({e}): {text}"));
    (json, out.status.code().unwrap_or(-1))
}

#[track_caller]
fn assert_close(what: &str, a: f64, b: f64, tol: f64) {
    assert!(
        (a - b).abs() <= tol * b.abs().max(1.0),
        "{what}: {a} vs {b} (difference {:e}, tolerance {tol:e})",
        (a - b).abs()
    );
}

/// Compare every row of a scan with `pinflow flow` at the row's point (the
/// axis values are passed exactly as printed, which round-trips the f64).
fn rows_match_single_flows(model: &Path, axes: &[&str], options: &[&str]) -> Vec<Row> {
    let dir = tmp();
    let mut args: Vec<&str> = Vec::new();
    args.extend(["--x", axes[0]]);
    if axes.len() > 1 {
        args.extend(["--y", axes[1]]);
    }
    args.extend(options);
    let out = scan(dir.path(), model, &args);
    let (header, rows) = read_points(&out.join("points.csv"));
    let names: Vec<String> = axes
        .iter()
        .map(|a| a.split('=').next().unwrap().to_string())
        .collect();
    let terms: Vec<String> = header
        .iter()
        .filter_map(|h| h.strip_prefix("dimension0:").map(String::from))
        .collect();
    assert!(!terms.is_empty(), "the header lists the terms: {header:?}");
    for row in &rows {
        let set: Vec<(&str, &str)> = names.iter().map(|n| (n.as_str(), row.get(n))).collect();
        let (json, code) = single_flow(dir.path(), model, &set, options);
        let at = format!("{set:?}");
        assert_eq!(json["outcome"], row.get("outcome"), "outcome at {at}");
        // A point where V is not positive definite is an input error of
        // `pinflow flow` (exit 2); the scan records it and goes on.
        let expect_code = if row.get("outcome") == "unphysical" {
            2
        } else {
            0
        };
        assert_eq!(code, expect_code, "exit code of flow at {at}");
        assert_eq!(
            json["winner"].as_str().unwrap_or(""),
            row.get("winner"),
            "winner at {at}"
        );
        match (json["ell_star"].as_f64(), row.opt("ell_star")) {
            (Some(a), Some(b)) => assert_close(&format!("ell* at {at}"), b, a, 1e-12),
            (None, None) => {}
            (a, b) => panic!("ell* at {at}: flow {a:?}, scan {b:?}"),
        }
        let jterms = json["terms"].as_array().unwrap();
        for t in &terms {
            let jt = jterms.iter().find(|j| j["name"] == t.as_str());
            for (key, col) in [("dimension0", "dimension0:"), ("dimension", "dimension:")] {
                let cell = row.opt(&format!("{col}{t}"));
                match (jt.and_then(|j| j[key].as_f64()), cell) {
                    (Some(a), Some(b)) => assert_close(&format!("{key} {t} at {at}"), b, a, 1e-12),
                    (None, None) => {}
                    (a, b) => panic!("{key} of {t} at {at}: flow {a:?}, scan {b:?}"),
                }
            }
        }
        // Infinite arrays: the flow's quadrature check, as `flow` states it.
        if header.iter().any(|h| h == "q_points") {
            let c = &json["flow_quadrature"];
            if c.is_null() {
                assert_eq!(row.get("q_points"), "", "q_points at {at}");
                continue;
            }
            assert_eq!(
                row.num("q_points"),
                c["points"].as_f64().unwrap(),
                "at {at}"
            );
            let worst = c["dimension_error"]
                .as_f64()
                .unwrap()
                .max(c["ell_star_error"].as_f64().unwrap_or(0.0));
            assert_close(
                &format!("q_error at {at}"),
                row.num("q_error"),
                worst,
                1e-12,
            );
            let converged = c["converged"].as_bool().unwrap().to_string();
            assert_eq!(row.get("q_converged"), converged, "at {at}");
        }
    }
    rows
}

#[test]
fn rows_equal_single_flows_infinite_array() {
    // The infinite-array demo on a 3 x 2 grid; w = 0.3 at lambda = -0.4 is
    // unphysical (1 + lambda + 4 (w2 - w) < 0 at q = pi, derived from the
    // model's V blocks).
    let rows = rows_match_single_flows(
        &flow_file("sliding_array.toml"),
        &["lambda=-0.4:0.6:3", "w=0.1:0.3:2"],
        &[],
    );
    assert_eq!(rows.len(), 6);
    assert!(rows.iter().any(|r| r.get("outcome") == "unphysical"));
    assert!(rows.iter().any(|r| r.get("q_converged") == "true"));
}

#[test]
fn rows_equal_single_flows_spinless_wire() {
    // All 15 points of a 5 x 3 grid, default closure (generated terms join).
    let rows = rows_match_single_flows(
        &flow_file("spinless_wire.toml"),
        &["lambda=-0.5:0.8:5", "delta=0:0.1:3"],
        &[],
    );
    assert_eq!(rows.len(), 15);
    // The grid must exercise more than one kind of result, or the
    // comparison says little: two different winners and a gapless point.
    let winners: std::collections::BTreeSet<&str> = rows
        .iter()
        .map(|r| r.get("winner"))
        .filter(|w| !w.is_empty())
        .collect();
    assert!(winners.len() >= 2, "winners {winners:?}");
    assert!(rows.iter().any(|r| r.get("outcome") == "gapless"));
}

#[test]
fn rows_equal_single_flows_wire_array_with_unphysical_points() {
    // 3 x 3 corner of the filling-1/3 array where V stops being positive
    // definite at some points (large lambda and g).
    let rows = rows_match_single_flows(
        &flow_file("laughlin_third.toml"),
        &["lambda=0.75:0.85:3", "g=0.85:0.95:3"],
        &["--closure", "none"],
    );
    assert_eq!(rows.len(), 9);
    assert!(rows.iter().any(|r| r.get("outcome") == "unphysical"));
    assert!(rows.iter().any(|r| r.get("outcome") == "strong"));
}

#[test]
fn grid_values_and_index_order() {
    // Row i has x index i % nx and y index i / nx (x fastest). Expected
    // values computed here: linear min + i (max - min)/(n - 1), log
    // min (max/min)^(i/(n - 1)).
    let dir = tmp();
    let out = scan(
        dir.path(),
        &flow_file("spinless_wire.toml"),
        &[
            "--x",
            "delta=1e-3:1e-1:5:log",
            "--y",
            "lambda=-0.2:0.4:4",
            "--closure",
            "none",
        ],
    );
    let (header, rows) = read_points(&out.join("points.csv"));
    assert_eq!(
        &header[..5],
        ["delta", "lambda", "outcome", "winner", "ell_star"]
    );
    assert_eq!(rows.len(), 20);
    for (i, r) in rows.iter().enumerate() {
        let (ix, iy) = (i % 5, i / 5);
        let x = 1e-3 * 100f64.powf(ix as f64 / 4.0);
        let y = -0.2 + iy as f64 * 0.6 / 3.0;
        assert_close(&format!("delta of row {i}"), r.num("delta"), x, 1e-14);
        assert_close(&format!("lambda of row {i}"), r.num("lambda"), y, 1e-14);
    }
    // End points are exact.
    assert_eq!(rows[0].get("delta"), "0.001");
    assert_eq!(rows[4].get("delta"), "0.1");
    assert_eq!(rows[19].get("lambda"), "0.4");
}

// ------------------------------------------------ Kosterlitz-Thouless line

/// One null cosine, cos(4 phi) (umklapp, particles [2, -2]) in a spinless
/// wire with K = diag(1, -1) and forward scattering lambda; its bare
/// coupling is the parameter y0.
const KT_MODEL: &str = r#"
name = "umklapp alone"

[params]
lambda = 0.4
y0 = 0.1

[fields]
K = [[1, 0], [0, -1]]
charge = [1, 1]
V = [["1", "lambda"], ["lambda", "1"]]

[[term]]
name = "umklapp"
particles = [2, -2]
coupling = "y0"
"#;

/// Bare dimension of cos(4 phi): 4 K_L with K_L = sqrt((1 - lambda)/(1 + lambda))
/// (a cos(2 p phi) has scaling dimension p^2 K; K for g4 = 0, g2 = 2 pi v_F
/// lambda; Giamarchi, "Quantum Physics in One Dimension" (2004), ch. 2,
/// from memory).
fn kt_delta0(lambda: f64) -> f64 {
    4.0 * ((1.0 - lambda) / (1.0 + lambda)).sqrt()
}

/// Critical bare coupling of the KT flow at bare dimension Delta0 > 2.
///
/// Derivation. Giamarchi's equations for the coupling y of
/// cos(sqrt 8 phi) (from memory): dK/dl = -y^2 K^2 / 2, dy/dl = (2 - 2K) y.
/// With Delta = 2K (the dimension of that cosine): dDelta/dl =
/// -(y^2/4) Delta^2 and dy/dl = (2 - Delta) y, the same form for any null
/// cosine. Then I = y^2/2 - 8/Delta - 4 ln Delta is conserved:
/// dI/dl = (2 - Delta) y^2 + (8/Delta^2 - 4/Delta)(-(y^2/4) Delta^2)
///       = (2 - Delta) y^2 - 2 y^2 + Delta y^2 = 0.
/// The separatrix is the trajectory that ends at (Delta, y) = (2, 0):
/// I = -4 - 4 ln 2. Starting at Delta0 > 2, y0 = y_c on it, so
/// y_c^2 = 2 (8/Delta0 + 4 ln(Delta0/2) - 4). Below y_c the flow ends on
/// the fixed line y = 0, Delta > 2 (gapless); above, y grows (strong).
fn kt_critical(delta0: f64) -> f64 {
    (2.0 * (8.0 / delta0 + 4.0 * (delta0 / 2.0).ln() - 4.0)).sqrt()
}

#[test]
fn kosterlitz_thouless_separatrix() {
    let dir = tmp();
    let model = dir.path().join("kt.toml");
    std::fs::write(&model, KT_MODEL).unwrap();
    // lambda = 0.28 gives Delta0 = 3, lambda = 0.535 gives Delta0 = 2.2016.
    let (ny, ymin, ymax) = (81usize, 0.1, 0.9);
    let step = (ymax - ymin) / (ny - 1) as f64;
    let yaxis = format!("y0={ymin}:{ymax}:{ny}");
    let out = scan(
        dir.path(),
        &model,
        &[
            "--x",
            "lambda=0.28:0.535:6",
            "--y",
            &yaxis,
            "--closure",
            "none",
            "--ell-max",
            "200",
        ],
    );
    let (_, rows) = read_points(&out.join("points.csv"));
    assert_eq!(rows.len(), 6 * ny);
    for ix in 0..6 {
        let column: Vec<&Row> = rows.iter().skip(ix).step_by(6).collect();
        let lambda = column[0].num("lambda");
        let delta0 = kt_delta0(lambda);
        assert!(delta0 > 2.19 && delta0 < 3.0 + 1e-12, "Delta0 = {delta0}");
        let yc = kt_critical(delta0);
        let mut strong = 0;
        let mut last_rank = 0;
        for r in &column {
            assert_close(
                &format!("Delta0 at lambda = {lambda}"),
                r.num("dimension0:umklapp"),
                delta0,
                1e-12,
            );
            let y0 = r.num("y0");
            let outcome = r.get("outcome");
            let at = format!("lambda = {lambda} (Delta0 = {delta0:.4}, y_c = {yc:.4}), y0 = {y0}");
            match outcome {
                "gapless" => assert!(y0 < yc + step, "gapless above the separatrix at {at}"),
                "strong" => {
                    assert!(y0 > yc - step, "strong below the separatrix at {at}");
                    assert_eq!(r.get("winner"), "umklapp");
                    strong += 1;
                }
                // Flows next to the separatrix are slow.
                "undecided" => assert!((y0 - yc).abs() < step, "undecided at {at}"),
                other => panic!("outcome {other} at {at}"),
            }
            // Along y0 the outcomes go gapless, (undecided,) strong.
            let rank = ["gapless", "undecided", "strong"]
                .iter()
                .position(|o| *o == outcome)
                .unwrap();
            assert!(rank >= last_rank, "outcomes not monotone in y0 at {at}");
            last_rank = rank;
        }
        // Each column crosses the separatrix (tree level alone would call
        // every point gapless, since Delta0 > 2).
        assert!(
            strong > 0 && strong < column.len(),
            "no crossing at lambda = {lambda}"
        );
    }
}

// ------------------------------------------------------ the target block

#[test]
fn target_block_matches_points() {
    let dir = tmp();
    let out = scan(
        dir.path(),
        &flow_file("laughlin_third.toml"),
        &[
            "--x",
            "lambda=0.55:0.85:7",
            "--y",
            "g=0.6:0.95:8",
            "--closure",
            "none",
        ],
    );
    let (header, rows) = read_points(&out.join("points.csv"));
    let s = summary(&out);
    let t = &s["target"];
    assert_eq!(t["name"], "tunnel", "the model marks tunnel as its target");
    assert_eq!(s["points"], rows.len());

    // Outcome and winner counts.
    for (word, n) in s["outcomes"].as_object().unwrap() {
        let count = rows.iter().filter(|r| r.get("outcome") == word).count();
        assert_eq!(n.as_u64().unwrap() as usize, count, "outcome {word}");
    }
    let counted: usize = s["outcomes"]
        .as_object()
        .unwrap()
        .values()
        .map(|v| v.as_u64().unwrap() as usize)
        .sum();
    assert_eq!(counted, rows.len(), "every row has a listed outcome");

    let wins: Vec<&Row> = rows
        .iter()
        .filter(|r| r.get("outcome") == "strong" && r.get("winner") == "tunnel")
        .collect();
    assert!(
        !wins.is_empty() && wins.len() < rows.len(),
        "tunnel must win somewhere, but not everywhere, on this grid"
    );
    assert_eq!(t["points"], wins.len());
    assert_eq!(
        t["fraction"].as_f64().unwrap(),
        wins.len() as f64 / rows.len() as f64
    );
    let ranges = t["ranges"].as_object().unwrap();
    assert_eq!(ranges.len(), 2);
    let mut narrower = false;
    for axis in ["lambda", "g"] {
        let vals: Vec<f64> = wins.iter().map(|r| r.num(axis)).collect();
        let lo = vals.iter().cloned().fold(f64::INFINITY, f64::min);
        let hi = vals.iter().cloned().fold(f64::NEG_INFINITY, f64::max);
        assert_eq!(ranges[axis][0].as_f64().unwrap(), lo, "{axis} min");
        assert_eq!(ranges[axis][1].as_f64().unwrap(), hi, "{axis} max");
        let all: Vec<f64> = rows.iter().map(|r| r.num(axis)).collect();
        let (amin, amax) = (
            all.iter().cloned().fold(f64::INFINITY, f64::min),
            all.iter().cloned().fold(f64::NEG_INFINITY, f64::max),
        );
        narrower |= lo > amin || hi < amax;
    }
    assert!(
        narrower,
        "the window must be narrower than the grid on some axis"
    );

    // Margin: min over the listed competitors of Delta0(c) - Delta0(tunnel),
    // its smallest and largest value over the winning points.
    let comps: Vec<String> = t["competitors"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c.as_str().unwrap().to_string())
        .collect();
    assert!(!comps.is_empty());
    for c in &comps {
        assert!(
            header.contains(&format!("dimension0:{c}")),
            "competitor {c}"
        );
    }
    let margins: Vec<(f64, &Row)> = wins
        .iter()
        .map(|r| {
            let m = comps
                .iter()
                .map(|c| r.num(&format!("dimension0:{c}")) - r.num("dimension0:tunnel"))
                .fold(f64::INFINITY, f64::min);
            (m, *r)
        })
        .collect();
    let min = margins.iter().map(|m| m.0).fold(f64::INFINITY, f64::min);
    let (max, best) = margins
        .iter()
        .fold((f64::NEG_INFINITY, None), |(b, at), (m, r)| {
            if *m > b {
                (*m, Some(*r))
            } else {
                (b, at)
            }
        });
    let best = best.unwrap();
    let m = &t["margin"];
    assert_close("margin min", m["min"].as_f64().unwrap(), min, 1e-12);
    assert_close("margin max", m["max"].as_f64().unwrap(), max, 1e-12);
    for axis in ["lambda", "g"] {
        assert_eq!(m["best_point"][axis].as_f64().unwrap(), best.num(axis));
    }
}
