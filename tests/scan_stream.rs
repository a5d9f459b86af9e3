//! The finishing step of a scan reads `points.csv` in one streaming pass.
//! Checked here: `summary.json` equals the summary computed the old way,
//! with every row in memory (a reference implementation kept only in this
//! file), on hand-made grids full of ties, missing numbers, generated
//! winners and every outcome; the phase legend lists the categories in the
//! display order that needs all rows; and the SVG maps of a large grid stay
//! small: runs of equal colour are one rectangle, and a map of a
//! continuous value with more runs than `pinflow::plot::MAX_SVG_RECTS` is
//! one embedded image with exactly the PNG's pixels.
//!
//! And the pass keeps a few bytes per point: finishing a grid of 200 000
//! points stays far below the memory the rows themselves would take.
//!
//! The grids are written as a single shard (1/1) with the library's own
//! meta line and CSV writer and joined with `pinflow merge`, which runs the
//! same finishing step as `pinflow scan` without any flows.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::time::Duration;

mod common;

use assert_cmd::Command;
use common::{peak_kb, svg_texts};
use pinflow::flow::Outcome;
use pinflow::scan::store::{csv_line, Meta, MAGIC};

const OUTCOMES: [&str; 6] = [
    "strong",
    "spinful",
    "gapless",
    "undecided",
    "unphysical",
    "failed",
];
use pinflow::scan::Axis;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde_json::{json, Value};

/// One hand-made row: outcome, winner, ell* and bare dimensions (None:
/// an empty cell).
#[derive(Debug, Clone)]
struct Row {
    coords: Vec<f64>,
    outcome: String,
    winner: String,
    ell_star: Option<f64>,
    dims0: Vec<Option<f64>>,
}

fn meta(axes: &[&str], terms: &[&str], target: Option<&str>, competitors: &[&str]) -> Meta {
    let axes: Vec<Axis> = axes.iter().map(|a| Axis::parse(a).unwrap()).collect();
    Meta {
        fingerprint: "0123456789abcdef".into(),
        model: "hand-made grid".into(),
        points: axes.iter().map(|a| a.n).product(),
        axes,
        terms: terms.iter().map(|t| t.to_string()).collect(),
        target: target.map(String::from),
        competitors: competitors.iter().map(|t| t.to_string()).collect(),
        shard: Some((1, 1)),
        infinite: false,
        symmetry_breaks: vec![],
    }
}

/// The grid point of index i (x fastest), as the scan computes it.
fn coords(meta: &Meta, index: usize) -> Vec<f64> {
    let mut rest = index;
    meta.axes
        .iter()
        .map(|a| {
            let v = a.value(rest % a.n);
            rest /= a.n;
            v
        })
        .collect()
}

fn cell(x: Option<f64>) -> String {
    x.map(|v| format!("{v}")).unwrap_or_default()
}

/// Write the rows as shard 1/1 and return its path.
fn write_shard(dir: &Path, meta: &Meta, rows: &[Row]) -> PathBuf {
    let shard = dir.join("shard-1-of-1.csv");
    let mut text = format!("{MAGIC}{}\n", serde_json::to_string(meta).unwrap());
    text.push_str(&csv_line(&meta.header()));
    for r in rows {
        let mut cells: Vec<String> = r.coords.iter().map(|x| format!("{x}")).collect();
        cells.push(r.outcome.clone());
        cells.push(r.winner.clone());
        cells.push(cell(r.ell_star));
        cells.extend(r.dims0.iter().map(|d| cell(*d)));
        cells.extend(r.dims0.iter().map(|_| String::new()));
        // No phase named (the phase columns come last): the figures fall
        // back to the outcome categories checked here.
        cells.extend(["", "false", "", "", ""].map(String::from));
        text.push_str(&csv_line(&cells));
    }
    std::fs::write(&shard, text).unwrap();
    shard
}

/// Write the rows as shard 1/1, merge it into `out`, and return `out`.
fn merged(dir: &Path, meta: &Meta, rows: &[Row]) -> PathBuf {
    let shard = write_shard(dir, meta, rows);
    let out = dir.join("out");
    Command::new(env!("CARGO_BIN_EXE_pinflow"))
        .current_dir(dir)
        .timeout(Duration::from_secs(120))
        .arg("merge")
        .arg(&shard)
        .arg("--out")
        .arg(&out)
        .assert()
        .success();
    out
}

// ------------------------------------------------- the reference summary

/// The summary as the finishing step computed it before streaming: from
/// all rows at once (outcome and winner counts, and the target's window
/// and margin: the minimum over competitors of Delta0(c) - Delta0(target),
/// non-finite margins skipped, the first largest one kept).
fn reference_summary(meta: &Meta, rows: &[Row]) -> Value {
    let mut outcomes: BTreeMap<String, usize> =
        OUTCOMES.iter().map(|o| (o.to_string(), 0)).collect();
    let mut winners: BTreeMap<String, usize> = BTreeMap::new();
    for r in rows {
        *outcomes.entry(r.outcome.clone()).or_default() += 1;
        if !r.winner.is_empty() {
            *winners.entry(r.winner.clone()).or_default() += 1;
        }
    }
    let target = meta
        .target
        .as_ref()
        .map(|t| reference_target(meta, rows, t));
    // Hunted competitors (`--competitors`) are the winners named auto:...
    let competitor_wins: BTreeMap<&String, &usize> = winners
        .iter()
        .filter(|(w, _)| w.starts_with("auto:"))
        .collect();
    json!({
        "model": meta.model,
        "axes": meta.axes.iter().map(|a| a.spec()).collect::<Vec<_>>(),
        "points": rows.len(),
        "outcomes": outcomes,
        "winners": winners,
        "competitor_wins": competitor_wins,
        "target": target,
        // Hand-made rows name no phase (see `write_shard`).
        "phases": [],
        "target_phase": meta.target.as_ref().map(|_| json!({
            "points": 0, "fraction": 0.0, "bounds": {}, "margin": null
        })),
    })
}

fn reference_target(meta: &Meta, rows: &[Row], name: &str) -> Value {
    let wins: Vec<&Row> = rows
        .iter()
        .filter(|r| r.outcome == "strong" && r.winner == name)
        .collect();
    let mut ranges = BTreeMap::new();
    for (i, a) in meta.axes.iter().enumerate() {
        let v: Vec<f64> = wins.iter().map(|r| r.coords[i]).collect();
        if !v.is_empty() {
            let lo = v.iter().cloned().fold(f64::INFINITY, f64::min);
            let hi = v.iter().cloned().fold(f64::NEG_INFINITY, f64::max);
            ranges.insert(a.name.clone(), [lo, hi]);
        }
    }
    let col = |t: &str| meta.terms.iter().position(|x| x == t);
    let comps: Vec<usize> = meta.competitors.iter().filter_map(|c| col(c)).collect();
    let dim = |r: &Row, t: usize| r.dims0[t].unwrap_or(f64::NAN);
    let mut margin = Value::Null;
    if let (Some(ti), false) = (col(name), comps.is_empty()) {
        let margins: Vec<(f64, &Row)> = wins
            .iter()
            .map(|r| {
                let m = comps
                    .iter()
                    .map(|&c| dim(r, c) - dim(r, ti))
                    .fold(f64::INFINITY, f64::min);
                (m, *r)
            })
            .filter(|(m, _)| m.is_finite())
            .collect();
        if let Some(&(first, _)) = margins.first() {
            let max = margins.iter().map(|m| m.0).fold(first, f64::max);
            let min = margins.iter().map(|m| m.0).fold(first, f64::min);
            let at = margins.iter().find(|m| m.0 == max).unwrap().1;
            let best: BTreeMap<String, f64> = meta
                .axes
                .iter()
                .zip(&at.coords)
                .map(|(a, x)| (a.name.clone(), *x))
                .collect();
            margin = json!({"min": min, "max": max, "best_point": best});
        }
    }
    json!({
        "name": name,
        "points": wins.len(),
        "fraction": wins.len() as f64 / rows.len() as f64,
        "ranges": ranges,
        "margin": margin,
        "competitors": meta.competitors,
    })
}

/// The labels of the categories in the phase legend. A map lists them in
/// the display order the old finishing step gave them after sorting all
/// rows: winners of strong outcomes (listed terms in model order, then
/// other names sorted), then spinful instabilities, then the outcomes
/// without a winner. A line figure lists its bands as they first appear
/// along x.
fn reference_legend(meta: &Meta, rows: &[Row]) -> Vec<String> {
    let mut keys: Vec<(usize, usize, String, String)> = rows
        .iter()
        .map(|r| {
            let has_winner = r.outcome == "strong" || r.outcome == "spinful";
            let w = if has_winner {
                r.winner.clone()
            } else {
                String::new()
            };
            let oi = OUTCOMES.iter().position(|o| *o == r.outcome).unwrap();
            let group = match (w.is_empty(), r.outcome.as_str()) {
                (true, _) => 2,
                (false, "strong") => 0,
                _ => 1,
            };
            let ti = meta
                .terms
                .iter()
                .position(|t| *t == w)
                .unwrap_or(meta.terms.len());
            (group * 100 + oi, ti, w, r.outcome.clone())
        })
        .collect();
    if meta.axes.len() == 2 {
        keys.sort();
    }
    let mut labels: Vec<String> = Vec::new();
    for (_, _, w, o) in keys {
        let label = match o.as_str() {
            "strong" => format!("{w} wins"),
            "spinful" => format!("{w}: spinful instability"),
            "unphysical" => "unphysical (V not positive definite)".into(),
            "failed" => "integration failed".into(),
            other => other.to_string(),
        };
        if !labels.contains(&label) {
            labels.push(label);
        }
    }
    labels
}

/// Rows with every outcome, listed and generated winners, winners where
/// the outcome has none, missing ell* and dimensions, and dimensions on a
/// coarse grid so that margins tie.
fn random_rows(meta: &Meta, rng: &mut ChaCha8Rng) -> Vec<Row> {
    let winners = ["cdw", "tunnel", "pair", "cdw+pair@1", "a-b"];
    (0..meta.points)
        .map(|i| {
            let outcome = OUTCOMES[rng.gen_range(0..OUTCOMES.len())].to_string();
            let with_winner = matches!(outcome.as_str(), "strong" | "spinful") || rng.gen_bool(0.1);
            // Strong rows favour the target, so it has a window.
            let winner = match (with_winner, outcome.as_str(), rng.gen_bool(0.5)) {
                (false, _, _) => String::new(),
                (true, "strong", true) => "tunnel".to_string(),
                _ => winners[rng.gen_range(0..winners.len())].to_string(),
            };
            let quarter = |rng: &mut ChaCha8Rng| rng.gen_range(2..16) as f64 * 0.25;
            let dims0 = meta
                .terms
                .iter()
                .map(|_| (!rng.gen_bool(0.05)).then(|| quarter(rng)))
                .collect();
            Row {
                coords: coords(meta, i),
                outcome,
                winner,
                ell_star: rng.gen_bool(0.7).then(|| rng.gen_range(0.5..30.0)),
                dims0,
            }
        })
        .collect()
}

#[test]
fn streamed_summary_equals_the_summary_of_all_rows() {
    let grids: [(&[&str], Option<&str>, &[&str]); 5] = [
        (&["u=0:1:23", "v=-1:2:17"], Some("tunnel"), &["cdw", "pair"]),
        (&["u=0.01:10:31:log", "v=0:1:9"], Some("tunnel"), &["pair"]),
        (&["u=0:1:301"], Some("tunnel"), &["cdw", "pair"]),
        (&["u=0:1:12", "v=0:1:12"], Some("tunnel"), &[]),
        (&["u=0:1:15", "v=0:3:11"], None, &[]),
    ];
    let terms = ["cdw", "tunnel", "pair"];
    let mut rng = ChaCha8Rng::seed_from_u64(20_251_202);
    let mut margins = 0;
    for (k, (axes, target, comps)) in grids.iter().enumerate() {
        let dir = tempfile::tempdir().unwrap();
        let m = meta(axes, &terms, *target, comps);
        let rows = random_rows(&m, &mut rng);
        let out = merged(dir.path(), &m, &rows);
        let text = std::fs::read_to_string(out.join("summary.json")).unwrap();
        let mut got: Value = serde_json::from_str(&text).unwrap();
        let obj = got.as_object_mut().unwrap();
        let notes = obj.remove("notes").expect("notes");
        assert!(obj.remove("files").is_some());
        // The run's provenance (docs/columns.md) is not part of the tally.
        assert!(obj.remove("provenance").is_some());
        // A negative margin (a more relevant competitor lost) is explained.
        let negative = got["target"]["margin"]["min"]
            .as_f64()
            .is_some_and(|m| m < 0.0);
        let explained = notes
            .as_array()
            .unwrap()
            .iter()
            .any(|n| n.as_str().unwrap().contains("lost in the flow"));
        assert_eq!(negative, explained, "grid {k}: {notes}");
        // Winners the model does not list are named in a note.
        let generated: Vec<&String> = got["winners"]
            .as_object()
            .unwrap()
            .keys()
            .filter(|w| !terms.contains(&w.as_str()) && !w.starts_with("auto:"))
            .collect();
        // Hunted competitors are counted apart, with a note of their own.
        let hunted = got["competitor_wins"].as_object().unwrap().len();
        let noted = notes
            .as_array()
            .unwrap()
            .iter()
            .any(|n| n.as_str().unwrap().starts_with("hunted competitors"));
        assert_eq!(hunted > 0, noted, "grid {k}");
        let named = notes.as_array().unwrap().iter().find_map(|n| {
            n.as_str()
                .unwrap()
                .strip_prefix("winners not listed in the model")
        });
        match named {
            Some(text) => {
                assert!(!generated.is_empty(), "grid {k}: {text}");
                for w in &generated {
                    assert!(text.contains(&format!("{w} (")), "grid {k}: {w} in {text}");
                }
            }
            None => assert!(generated.is_empty(), "grid {k}: {generated:?}"),
        }
        let obj = got.as_object_mut().unwrap();
        // A finite model's flows have no quadrature to check.
        assert_eq!(obj.remove("flow_quadrature"), Some(Value::Null));
        // Through the same writer and reader, equal numbers give equal values.
        let want = reference_summary(&m, &rows);
        let want: Value = serde_json::from_str(&serde_json::to_string(&want).unwrap()).unwrap();
        assert_eq!(got, want, "grid {k}");
        margins += usize::from(!got["target"]["margin"].is_null());

        let svg = std::fs::read_to_string(out.join("phase.svg")).unwrap();
        let legend = reference_legend(&m, &rows);
        let texts = svg_texts(&svg);
        let shown: Vec<&String> = texts.iter().filter(|t| legend.contains(t)).collect();
        assert_eq!(
            shown,
            legend.iter().collect::<Vec<_>>(),
            "legend of grid {k}"
        );
    }
    assert!(margins >= 3, "the grids must exercise the margin");
}

// ------------------------------------------------------ large SVG maps

/// An RGB PNG file: width, height and pixels.
fn read_png(path: &Path) -> (u32, u32, Vec<u8>) {
    let decoder = png::Decoder::new(std::fs::File::open(path).unwrap());
    let mut reader = decoder.read_info().unwrap();
    let mut buf = vec![0; reader.output_buffer_size()];
    let info = reader.next_frame(&mut buf).unwrap();
    assert_eq!(info.color_type, png::ColorType::Rgb, "{}", path.display());
    buf.truncate(info.buffer_size());
    (info.width, info.height, buf)
}

fn base64_decode(text: &str) -> Vec<u8> {
    let digit = |c: u8| match c {
        b'A'..=b'Z' => c - b'A',
        b'a'..=b'z' => c - b'a' + 26,
        b'0'..=b'9' => c - b'0' + 52,
        b'+' => 62,
        b'/' => 63,
        _ => panic!("not base64: {c}"),
    };
    let mut out = Vec::new();
    for chunk in text.as_bytes().chunks(4) {
        let real: Vec<u8> = chunk.iter().filter(|c| **c != b'=').copied().collect();
        let n = real
            .iter()
            .enumerate()
            .fold(0u32, |n, (i, &c)| n | u32::from(digit(c)) << (18 - 6 * i));
        out.extend(n.to_be_bytes()[1..real.len()].iter());
    }
    out
}

/// The value of attribute `name` in the element text `el`.
fn attr<'a>(el: &'a str, name: &str) -> &'a str {
    let start = el.find(&format!(" {name}=\"")).unwrap() + name.len() + 3;
    &el[start..start + el[start..].find('"').unwrap()]
}

/// The meta of a grid `x=0:1:nx`, `y=0:1:ny` whose target tunnel competes
/// with cdw and pair.
fn block_meta(nx: usize, ny: usize, terms: &[&str]) -> Meta {
    let axes = [format!("x=0:1:{nx}"), format!("y=0:1:{ny}")];
    let axes: Vec<&str> = axes.iter().map(String::as_str).collect();
    meta(&axes, terms, Some("tunnel"), &["cdw", "pair"])
}

/// A grid of points: outcome regions in large blocks (a strong
/// cdw band, a tunnel disc, a gapless strip), ell* a smooth function of
/// both axes, and bare dimensions crossing 2 along lines.
fn block_rows(meta: &Meta) -> Vec<Row> {
    (0..meta.points)
        .map(|i| {
            let c = coords(meta, i);
            let (x, y) = (c[0], c[1]);
            let (outcome, winner) = if y > 0.8 {
                ("gapless", "")
            } else if (x - 0.5).powi(2) + (y - 0.4).powi(2) < 0.04 {
                ("strong", "tunnel")
            } else {
                ("strong", "cdw")
            };
            Row {
                coords: c,
                outcome: outcome.into(),
                winner: winner.into(),
                ell_star: (y <= 0.8).then_some(1.0 + 10.0 * x + 2.0 * y + x * y),
                dims0: vec![Some(1.5 + x), Some(1.2 + y), Some(3.0 - x - y)],
            }
        })
        .collect()
}

#[test]
fn large_maps_merge_equal_runs_and_embed_a_continuous_map_as_one_image() {
    let dir = tempfile::tempdir().unwrap();
    let (nx, ny) = (240, 160);
    let m = block_meta(nx, ny, &["cdw", "tunnel", "pair"]);
    let out = merged(dir.path(), &m, &block_rows(&m));
    let cells = nx * ny;
    assert!(cells > pinflow::plot::MAX_SVG_RECTS);

    // Phase map: large uniform regions, one rectangle per run of a row.
    let phase = std::fs::read_to_string(out.join("phase.svg")).unwrap();
    let rects = phase.matches("<rect").count();
    assert!(!phase.contains("<image"), "few runs stay vector");
    assert!(rects >= ny, "at least one rectangle per row: {rects}");
    assert!(rects < cells / 50, "{rects} rectangles for {cells} cells");
    assert!(
        svg_texts(&phase).iter().any(|t| t == "Δ0(tunnel) = 2"),
        "the tree-level lines are drawn"
    );

    // ell* map: every cell has its own colour, so one image replaces them.
    let heat = std::fs::read_to_string(out.join("ell_star.svg")).unwrap();
    assert_eq!(heat.matches("<image").count(), 1);
    assert!(
        heat.matches("<rect").count() < 300,
        "colour bar and key only"
    );
    assert!(
        heat.len() < 1_000_000,
        "ell_star.svg is {} bytes",
        heat.len()
    );
    assert!(!heat.contains("#FF00FF"), "no marker is left");
    let start = heat.find("<image").unwrap();
    let el = &heat[start..start + heat[start..].find("/>").unwrap()];
    let (x, y) = (
        attr(el, "x").parse::<usize>().unwrap(),
        attr(el, "y").parse::<usize>().unwrap(),
    );
    let (w, h) = (
        attr(el, "width").parse::<usize>().unwrap(),
        attr(el, "height").parse::<usize>().unwrap(),
    );
    let data = attr(el, "href")
        .strip_prefix("data:image/png;base64,")
        .unwrap();
    let embedded = dir.path().join("embedded.png");
    std::fs::write(&embedded, base64_decode(data)).unwrap();
    let (ew, eh, pixels) = read_png(&embedded);
    assert_eq!((ew as usize, eh as usize), (w, h));
    assert!(w > 400 && h > 400, "the image fills the plot: {w}×{h}");

    // The image shows what the PNG shows there (inside the frame line,
    // which is drawn on top of the cells).
    let (pw, _, page) = read_png(&out.join("ell_star.png"));
    let mut differ = 0;
    for row in 2..h - 2 {
        for col in 2..w - 2 {
            let a = &pixels[(row * w + col) * 3..][..3];
            let b = &page[((y + row) * pw as usize + x + col) * 3..][..3];
            differ += usize::from(a != b);
        }
    }
    assert_eq!(differ, 0, "pixels differ between the SVG image and the PNG");
}

#[test]
fn small_continuous_maps_stay_vector() {
    let dir = tempfile::tempdir().unwrap();
    let m = block_meta(30, 20, &["cdw", "tunnel", "pair"]);
    let out = merged(dir.path(), &m, &block_rows(&m));
    let heat = std::fs::read_to_string(out.join("ell_star.svg")).unwrap();
    assert!(!heat.contains("<image"));
    // 16 rows have a value: their cells differ in colour along x.
    assert!(
        heat.matches("<rect").count() > 16 * 20,
        "one rectangle per cell"
    );
}

// ------------------------------------------------------------ memory

#[test]
fn finishing_a_large_grid_keeps_a_few_bytes_per_point() {
    // Measured by hand on this grid: 104 MB peak when the finishing step
    // held every row (about 470 bytes each), 17 MB with the streaming pass
    // (12 bytes per point plus fixed page buffers).
    let dir = tempfile::tempdir().unwrap();
    let terms = ["cdw", "tunnel", "pair", "t3", "t4", "t5"];
    let m = block_meta(500, 400, &terms);
    let rows: Vec<Row> = block_rows(&m)
        .into_iter()
        .map(|mut r| {
            r.dims0.extend([Some(2.5), Some(3.5), None]);
            r
        })
        .collect();
    let shard = write_shard(dir.path(), &m, &rows);
    drop(rows);
    let mut child = std::process::Command::new(env!("CARGO_BIN_EXE_pinflow"))
        .current_dir(dir.path())
        .arg("merge")
        .arg(&shard)
        .arg("--out")
        .arg("out")
        .stdout(std::process::Stdio::null())
        .spawn()
        .unwrap();
    let start = std::time::Instant::now();
    let mut peak = None;
    let status = loop {
        if let Some(status) = child.try_wait().unwrap() {
            break status;
        }
        assert!(start.elapsed() < Duration::from_secs(300), "merge hangs");
        peak = peak_kb(child.id()).max(peak);
        std::thread::sleep(Duration::from_millis(2));
    };
    assert!(status.success());
    assert!(dir.path().join("out/summary.json").is_file());
    if let Some(kb) = peak {
        assert!(kb < 48_000, "peak memory {kb} kB for {} points", m.points);
    }
}

/// The outcome words are an interface (points.csv, summary.json): the
/// library's list must not drift from them.
#[test]
fn outcome_words_are_the_documented_ones() {
    let words: Vec<&str> = Outcome::ALL.iter().map(|o| o.word()).collect();
    assert_eq!(words, OUTCOMES);
}
