//! The error catalogue (`docs/errors.md`): every entry runs the real binary
//! in a fresh directory and checks the exit code and the exact first line
//! of standard error; `the_catalogue_shows_every_case` checks that the page
//! shows each command and message verbatim, so the page and the binary
//! cannot drift apart.
//!
//! Inputs are the two base models of the page (`wire.toml`, an explicit
//! single wire, and `ring.toml`, a periodic array of 8 wires) with one
//! change each.
//!
//! `PINFLOW_CATALOGUE_PRINT=1` prints what the binary says for every entry
//! instead of checking (for writing the page).

use std::path::Path;

use assert_cmd::Command;

mod common;

const WIRE: &str = r#"[params]
lambda = 0.3

[fields]
K = [[1, 0], [0, -1]]
charge = [1, 1]
V = [["1", "lambda"], ["lambda", "1"]]

[[term]]
name = "backscatter"
particles = [1, -1]
"#;

const RING: &str = r#"[params]
lambda = 0.3

[array]
wires = 8
K = [[1, 0], [0, -1]]
charge = [1, 1]

[array.V]
0 = [["1", "lambda"], ["lambda", "1"]]

[[term]]
name = "tunnel"
particles = { 0 = [-2, 1], 1 = [-1, 2] }

[[term]]
name = "cdw"
particles = { 0 = [1, -1], 1 = [-1, 1] }
"#;

/// A setup step run before the failing command.
enum Step {
    /// A pinflow command that must succeed.
    Run(Vec<String>),
    /// Keep the first `n` lines of a file.
    Truncate(&'static str, usize),
    /// Copy a file.
    Copy(&'static str, &'static str),
    /// Replace line `n` (1-based) of a file.
    Line(&'static str, usize, &'static str),
    /// Replace a piece of text (occurring once) in a file.
    Edit(&'static str, &'static str, &'static str),
}

struct Case {
    id: &'static str,
    files: Vec<(&'static str, String)>,
    setup: Vec<Step>,
    args: Vec<String>,
    code: i32,
    message: &'static str,
}

/// `base` with `old` replaced by `new` (which must occur once).
fn with(base: &str, old: &str, new: &str) -> String {
    assert_eq!(base.matches(old).count(), 1, "`{old}` must occur once");
    base.replacen(old, new, 1)
}

fn args(line: &str) -> Vec<String> {
    line.split_whitespace().map(str::to_string).collect()
}

fn case(
    id: &'static str,
    files: Vec<(&'static str, String)>,
    line: &str,
    code: i32,
    message: &'static str,
) -> Case {
    Case {
        id,
        files,
        setup: Vec::new(),
        args: args(line),
        code,
        message,
    }
}

fn wire(old: &str, new: &str) -> Vec<(&'static str, String)> {
    vec![("wire.toml", with(WIRE, old, new))]
}

fn ring(old: &str, new: &str) -> Vec<(&'static str, String)> {
    vec![("ring.toml", with(RING, old, new))]
}

/// A ring model with momenta, a flux per wire and the pair term in place
/// of cdw.
fn flux_pair(ring: &str) -> String {
    let r = with(
        ring,
        "charge = [1, 1]",
        "charge = [1, 1]\nmomentum = [\"0.05\", \"-0.05\"]\nmomentum_per_wire = [\"0.04\", \"0.04\"]",
    );
    let r = with(&r, "name = \"cdw\"", "name = \"pair\"");
    with(
        &r,
        "particles = { 0 = [1, -1], 1 = [-1, 1] }",
        "particles = [1, 1]\nallowed_charge = 2",
    )
}

fn base() -> Vec<(&'static str, String)> {
    vec![
        ("wire.toml", WIRE.to_string()),
        ("ring.toml", RING.to_string()),
    ]
}

/// Three shards of a small scan of wire.toml into `run/`.
fn shards(n: usize, x: &str) -> Vec<Step> {
    (1..=n)
        .map(|k| {
            Step::Run(args(&format!(
                "scan wire.toml --x {x} --out run --shard {k}/{n} --quiet"
            )))
        })
        .collect()
}

fn cases() -> Vec<Case> {
    let kv = "V = [[\"1\", \"lambda\"], [\"lambda\", \"1\"]]";
    let term = "particles = [1, -1]\n";
    let mut c = vec![
        // ------------------------------------------------ files and syntax
        case("E01", base(), "dims missing.toml", 2,
            "error: missing.toml: cannot read the model file: No such file or directory (os error 2)"),
        case("E02", wire("[fields]", "[fields"), "dims wire.toml", 2,
            "error: wire.toml: not a valid model file: TOML parse error at line 4, column 8"),
        case("E03", wire("[fields]", "[feilds]"), "dims wire.toml", 2,
            "error: wire.toml: not a valid model file: TOML parse error at line 4, column 2"),
        case("E04", vec![("empty.toml", "name = \"nothing yet\"\n".into())], "dims empty.toml", 2,
            "error: empty.toml: missing [fields] (explicit K, charge, V) or [array] (a wire cell repeated over wires)"),
        case("E05", vec![("both.toml", format!("{WIRE}\n[array]\nwires = 4\nK = [[1]]\ncharge = [1]\nV = {{ 0 = [[1]] }}\n"))], "dims both.toml", 2,
            "error: both.toml: give either [fields] or [array], not both"),
        // ------------------------------------------------ matrices
        case("E06", wire("K = [[1, 0], [0, -1]]", "K = [[1, 0], [0]]"), "dims wire.toml", 2,
            "error: wire.toml: fields.K[1]: the matrix must be square: 2 rows, but this row has 1 entries"),
        case("E07", wire("K = [[1, 0], [0, -1]]", "K = [[1, 2], [0, -1]]"), "dims wire.toml", 2,
            "error: wire.toml: fields.K: K must be symmetric: fields.K[1][0] = 0 but fields.K[0][1] = 2"),
        case("E08", wire("K = [[1, 0], [0, -1]]", "K = [[1, 1], [1, 1]]"), "dims wire.toml", 2,
            "error: wire.toml: fields.K: K is singular (det K = 0); K must be invertible"),
        case("E09", wire("K = [[1, 0], [0, -1]]", "K = [[1, 0], [0, -3000000]]"), "dims wire.toml", 2,
            "error: wire.toml: fields.K[1][1]: entries must be at most 1048576 in magnitude, found -3000000"),
        case("E10", wire("charge = [1, 1]", "charge = [1]"), "dims wire.toml", 2,
            "error: wire.toml: fields.charge: expected 2 integers (one per field), found 1"),
        case("E11", wire(kv, "V = [[\"1\", \"lambda\"]]"), "dims wire.toml", 2,
            "error: wire.toml: fields.V: expected a 2x2 matrix (as K), found 1 rows"),
        case("E12", wire(kv, "V = [[\"1\", \"lambda\"], [\"0\", \"1\"]]"), "dims wire.toml", 2,
            "error: wire.toml: fields.V: V must be symmetric, but V[1][0] = 0 and V[0][1] = 0.3 at lambda=0.3"),
        case("E13", base(), "dims wire.toml --set lambda=1.5", 2,
            "error: wire.toml: V is not positive definite at lambda=1.5: smallest eigenvalue -5.000000e-1 (an unstable theory; choose parameters where V > 0)"),
        case("E14", vec![("wire.toml", with(&with(WIRE, "K = [[1, 0], [0, -1]]", "K = [[2, 1], [1, -3]]"), kv, "V = [[\"lambda\", \"0\"], [\"0\", \"1\"]]"))], "dims wire.toml --set lambda=1e-30", 2,
            "error: wire.toml: the scaling dimension of term \"backscatter\" at lambda=0.000000000000000000000000000001 cannot be computed accurately: its error bound is 7.9e-1 (relative; at most 1e-8 is accepted), V is badly conditioned there; choose another point"),
        // ------------------------------------------------ arrays
        case("E15", ring("wires = 8", "wires = 0"), "dims ring.toml", 2,
            "error: ring.toml: array.wires: expected a positive integer or \"infinite\", found 0"),
        case("E16", ring("wires = 8", "wires = 1000000000"), "dims ring.toml", 2,
            "error: ring.toml: array.wires: a model may have at most 2048 fields in all, found 1000000000 wires of 2 fields (at most 1024 wires)"),
        case("E17", ring("wires = 8", "wires = 8\nboundary = \"closed\""), "dims ring.toml", 2,
            "error: ring.toml: array.boundary: expected \"periodic\" or \"open\", found \"closed\""),
        case("E18", ring("0 = [[\"1\"", "1 = [[\"1\""), "dims ring.toml", 2,
            "error: ring.toml: array.V: missing block 0 (the intrawire forward scattering)"),
        case("E19", ring("[array.V]\n", "[array.V]\n01 = [[0, 0], [0, 0]]\n"), "dims ring.toml", 2,
            "error: ring.toml: array.V.01: `01` is not a wire separation: keys must be non-negative integers written without sign or leading zeros (0 = same wire, 1 = nearest neighbour, ...)"),
        case("E20", ring("[array.V]\n", "[array.V]\n4 = [[0, 0.1], [0.1, 0]]\n"), "dims ring.toml", 2,
            "error: ring.toml: array.V: interaction range 4 does not fit a periodic array of 8 wires (needs at least 9 wires)"),
        case("E21", ring("charge = [1, 1]", "charge = [1, 1]\nmomentum_per_wire = [\"0.1\", \"0.1\"]"), "dims ring.toml", 2,
            "error: ring.toml: array.momentum_per_wire: needs array.momentum (the momenta of wire 0) too"),
        case("E22", ring("wires = 8", "wires = \"infinite\"\nboundary = \"open\""), "dims ring.toml", 2,
            "error: ring.toml: array.boundary: an infinite array has no ends: leave out `boundary` (or write \"periodic\")"),
        // ------------------------------------------------ terms
        case("E23", vec![("wire.toml", format!("{WIRE}\n[[term]]\nname = \"backscatter\"\nparticles = [1, 1]\n"))], "dims wire.toml", 2,
            "error: wire.toml: term \"backscatter\": duplicate term name (names must be unique)"),
        case("E24", wire(term, "particles = [1, -1]\nvector = [1, 1]\n"), "dims wire.toml", 2,
            "error: wire.toml: term \"backscatter\": give either `particles` or `vector`, not both"),
        case("E25", wire(term, "particles = [0, 0]\n"), "dims wire.toml", 2,
            "error: wire.toml: term \"backscatter\".particles: the zero vector is not a cosine term"),
        case("E26", wire(term, "particles = [1, -1, 0]\n"), "dims wire.toml", 2,
            "error: wire.toml: term \"backscatter\".particles: expected 2 integers (one per field), found 3"),
        case("E27", ring("0 = [-2, 1], 1 = [-1, 2]", "0 = [-2, 1], 8 = [-1, 2]"), "dims ring.toml", 2,
            "error: ring.toml: term \"tunnel\".particles: the term reaches wire offset 8, which does not fit an array of 8 wires"),
        case("E28", wire(term, "particles = [1, -1]\nextra_spin = \"one half\"\n"), "dims wire.toml", 2,
            "error: wire.toml: term \"backscatter\".extra_spin: expected an exact fraction (an integer, \"p/q\" or a short decimal), found \"one half\""),
        case("E29", vec![("wire.toml", format!("{WIRE}target = true\n\n[[term]]\nname = \"pairing\"\nparticles = [1, 1]\ntarget = true\n"))], "dims wire.toml", 2,
            "error: wire.toml: term \"pairing\".target: the targets must pin together (the target phase is the lattice they span): \"backscatter\" and \"pairing\" do not commute: their mutual phase l_a.K^-1 l_b is 2, not 0; a pinned set must commute"),
        case("E30", wire(term, "particles = [1, -1]\nextra_dimension = \"lambda - 1\"\n"), "dims wire.toml", 2,
            "error: wire.toml: term \"backscatter\".extra_dimension: must be a finite number >= 0, found -0.7 at lambda=0.3"),
        // ------------------------------------------------ parameters and expressions
        case("E31", wire("lambda = 0.3", "lambda = 0.3\n2nd = 1"), "dims wire.toml", 2,
            "error: wire.toml: params.2nd: a parameter name must start with a letter and use letters, digits and _"),
        case("E32", wire("lambda = 0.3", "lambda = 0.3\ne = 0.01"), "dims wire.toml", 2,
            "error: wire.toml: params.e: `e` is a built-in name of expressions (a constant or function); choose another parameter name"),
        case("E33", wire("lambda = 0.3", "lambda = \"0.3\""), "dims wire.toml", 2,
            "error: wire.toml: params.lambda: expected a number, found the string \"0.3\""),
        case("E34", wire(term, "particles = [1, -1]\ncoupling = \"0.1 * (lambda\"\n"), "dims wire.toml", 2,
            "error: wire.toml: term \"backscatter\".coupling: \"0.1 * (lambda\": cannot parse expression: parentheses mismatch"),
        case("E35", wire(term, "particles = [1, -1]\ncoupling = \"0.1 * lamda\"\n"), "dims wire.toml", 2,
            "error: wire.toml: term \"backscatter\".coupling: \"0.1 * lamda\": unknown parameter `lamda` at position 7 (declare it under [params])"),
        case("E36", wire(term, "particles = [1, -1]\ncoupling = \"0.1 / (lambda - 0.3)\"\n"), "flow wire.toml", 2,
            "error: wire.toml: term \"backscatter\".coupling: must be a finite number, found inf at lambda=0.3"),
        case("E37", wire("charge = [1, 1]", "charge = [1, 1]\nmomentum = [\"sqrt(-lambda)\", \"0\"]"), "dims wire.toml", 2,
            "error: wire.toml: fields.momentum[0]: must be a finite number, found NaN at lambda=0.3"),
        case("E38", wire(kv, "V = [[\"1\", \"lambda / 0\"], [\"lambda / 0\", \"1\"]]"), "dims wire.toml", 2,
            "error: wire.toml: fields.V[0][1]: must be a finite number, found inf at lambda=0.3"),
        // ------------------------------------------------ flags and [flow]
        case("E39", base(), "dims wire.toml --set lamda=0.4", 2,
            "error: command line: --set: unknown parameter `lamda` (known parameters: lambda)"),
        case("E40", base(), "dims wire.toml --set lambda=abc", 2,
            "error: invalid value 'lambda=abc' for '--set <NAME=VALUE>': `abc` is not a number (in `lambda=abc`)"),
        case("E41", base(), "flow wire.toml --ell-max -1", 2,
            "error: command line: --ell-max: must be a finite number > 0, found -1"),
        case("E42", base(), "flow wire.toml --floor 2", 2,
            "error: command line: --floor: the decay floor must be below y_strong"),
        case("E43", base(), "flow wire.toml --closure all", 2,
            "error: invalid value 'all' for '--closure <CLOSURE>'"),
        case("E44", vec![("wire.toml", format!("{WIRE}\n[flow]\nsteps = 100\n"))], "flow wire.toml", 2,
            "error: wire.toml: flow.steps: unknown key (known: ell_max, y_strong, floor, closure, closure_bound, closure_range, rtol, atol, max_steps, q_points, stages)"),
        case("E45", vec![("wire.toml", format!("{WIRE}\n[flow]\nell_max = \"long\"\n"))], "flow wire.toml", 2,
            "error: wire.toml: flow.ell_max: expected a number, found \"long\""),
        // ------------------------------------------------ scan axes and options
        case("E46", base(), "scan wire.toml --x lambda=0:0.5", 2,
            "error: command line: --x: expected NAME=MIN:MAX:N[:log], found `lambda=0:0.5`"),
        case("E47", base(), "scan wire.toml --x lambda=0:0.5:20 --y mu=0:1:5", 2,
            "error: command line: --y: unknown axis parameter `mu` (known parameters: lambda)"),
        case("E48", base(), "scan wire.toml --x lambda=0:0.5:20:log", 2,
            "error: command line: --x: log spacing needs positive bounds, found 0:0.5 on axis `lambda`"),
        case("E49", base(), "scan wire.toml --x lambda=0.5:0:20", 2,
            "error: command line: --x: MIN must be below MAX with linear spacing, found 0.5:0 on axis `lambda`"),
        case("E50", base(), "scan wire.toml --x lambda=0:0.5:1", 2,
            "error: command line: --x: axis `lambda` needs at least 2 points, found 1"),
        case("E51", base(), "scan wire.toml --x lambda=0:0.5:20 --y lambda=0:0.2:3", 2,
            "error: command line: --y: the two axes must be different parameters"),
        case("E52", base(), "scan wire.toml", 2,
            "error: command line: --x: give an axis (--x NAME=MIN:MAX:N) or a [scan] table with x"),
        case("E53", vec![("wire.toml", format!("{WIRE}\n[scan]\nx = \"lambda=0:0.5:20\"\nz = \"lambda=0:0.1:3\"\n"))], "scan wire.toml", 2,
            "error: wire.toml: scan.z: unknown key (known: x, y)"),
        case("E54", wire("lambda = 0.3", "lambda = 0.3\nmu = 0"), "scan wire.toml --x lambda=0:0.5:5000 --y mu=0:1:5000", 2,
            "error: command line: --x/--y: the grid has 25000000 points (about 3.0 GB of output and as many flows); narrow the axes or pass --force"),
        case("E55", base(), "scan wire.toml --x lambda=0:0.5:20 --threads 0", 2,
            "error: command line: --threads: must be at least 1"),
        case("E56", base(), "scan wire.toml --x lambda=0:0.5:20 --shard 3/2", 2,
            "error: invalid value '3/2' for '--shard <K/N>': shard K/N needs 1 <= K <= N, found `3/2`"),
        // Found by hand: 2^32 x 2^32 points wrapped to a grid of 0 points,
        // and the figures then aborted.
        case("E57", wire("lambda = 0.3", "lambda = 0.3\nmu = 0"), "scan wire.toml --x lambda=0:0.5:4294967296 --y mu=0:1:4294967296", 2,
            "error: command line: --x/--y: the grid has more points than can be counted; narrow the axes"),
        Case {
            id: "E58",
            files: base(),
            // An interrupted scan (made here by copying a finished run over
            // the partial file of another), then resumed with other options.
            setup: vec![
                Step::Run(args("scan wire.toml --x lambda=0:0.5:40 --out r --shard 1/1 --quiet")),
                Step::Copy("r/shard-1-of-1.csv", "r/.points.running.csv"),
            ],
            args: args("scan wire.toml --x lambda=0:0.5:40 --out r --resume --ell-max 10"),
            code: 2,
            message: "error: r/.points.running.csv: --resume: the partial output was made with a different model, grid, shard or options; run with --overwrite instead of --resume to start over",
        },
        // ------------------------------------------------ shard sets
        Case {
            id: "E59",
            files: base(),
            setup: shards(3, "lambda=0:0.5:7"),
            args: args("merge run/shard-1-of-3.csv run/shard-2-of-3.csv"),
            code: 2,
            message: "error: run/shard-1-of-3.csv: shard 3/3 is missing",
        },
        Case {
            id: "E60",
            files: base(),
            setup: shards(3, "lambda=0:0.5:7"),
            args: args("merge run/shard-1-of-3.csv run/shard-2-of-3.csv run/shard-2-of-3.csv"),
            code: 2,
            message: "error: run/shard-2-of-3.csv: shard 2/3 is given twice",
        },
        Case {
            id: "E61",
            files: base(),
            setup: {
                let mut s = shards(3, "lambda=0:0.5:7");
                s.push(Step::Run(args(
                    "scan wire.toml --x lambda=0:0.6:7 --out other --shard 3/3 --quiet",
                )));
                s
            },
            args: args("merge run/shard-1-of-3.csv run/shard-2-of-3.csv other/shard-3-of-3.csv"),
            code: 2,
            message: "error: other/shard-3-of-3.csv: belongs to a different scan than run/shard-1-of-3.csv",
        },
        Case {
            id: "E62",
            files: base(),
            setup: {
                let mut s = shards(3, "lambda=0:0.5:7");
                s.push(Step::Truncate("run/shard-3-of-3.csv", 3));
                s
            },
            args: args("merge run/shard-1-of-3.csv run/shard-2-of-3.csv run/shard-3-of-3.csv"),
            code: 2,
            message: "error: run/shard-3-of-3.csv: shard 3/3 is incomplete: 1 of 2 points",
        },
        Case {
            id: "E63",
            files: base(),
            // Found by hand: a shard whose first line says shard 1/0 made
            // merge panic (index out of bounds).
            setup: {
                let mut s = shards(3, "lambda=0:0.5:7");
                s.push(Step::Edit("run/shard-1-of-3.csv", "\"shard\":[1,3]", "\"shard\":[1,0]"));
                s
            },
            args: args("merge run/shard-1-of-3.csv run/shard-2-of-3.csv run/shard-3-of-3.csv"),
            code: 2,
            message: "error: run/shard-1-of-3.csv: not a pinflow scan file: its first line is damaged: shard 1/0 is not a shard (needs 1 <= K <= N)",
        },
        Case {
            id: "E64",
            files: base(),
            // A damaged row was copied into points.csv, which the summary
            // then refused, leaving the damaged points.csv behind.
            setup: {
                let mut s = shards(3, "lambda=0:0.5:7");
                s.push(Step::Line("run/shard-2-of-3.csv", 4, "0.5,strong,backscatter,1.5,1,1,,false,,,"));
                s
            },
            args: args("merge run/shard-1-of-3.csv run/shard-2-of-3.csv run/shard-3-of-3.csv"),
            code: 2,
            message: "error: run/shard-2-of-3.csv: the row of point 4 (data row 2 of the shard) is damaged: lambda = 0.5, expected 0.3333333333333333",
        },
        case("E65", base(), "merge wire.toml", 2,
            "error: wire.toml: not a pinflow scan file: missing the `# pinflow-scan` line"),
        case("E66", base(), "merge run/shard-1-of-4.csv", 2,
            "error: run/shard-1-of-4.csv: cannot read the scan file: No such file or directory (os error 2)"),
        // ------------------------------------------------ output paths
        case("E67", base(), "dims wire.toml -o results/dims.txt", 2,
            "error: command line: -o: cannot write `results/dims.txt`: the directory `results` does not exist"),
        case("E68", base(), "dims wire.toml -o .", 2,
            "error: command line: -o: `.` is a directory; give a file name"),
        case("E69", base(), "flow wire.toml --out ring.toml", 2,
            "error: command line: --out: `ring.toml` exists and is not a directory; give a directory for the output files"),
        case("E70", base(), "scan wire.toml --x lambda=0:0.5:20 --out ring.toml/scan", 2,
            "error: command line: --out: cannot create `ring.toml/scan`: `ring.toml` is a file"),
        // ------------------------------------------------ hunt
        case("E71", base(), "hunt wire.toml --max-dim 0", 2,
            "error: invalid value '0' for '--max-dim <DELTA>': expected a finite number > 0 (a scaling dimension), found `0`"),
        case("E72", base(), "hunt wire.toml --range 2", 2,
            "error: command line: --range: applies to arrays of wires only; this model gives [fields], and all of its 2 fields are searched"),
        case("E73", base(), "hunt ring.toml --range 9", 2,
            "error: command line: --range: expected at most 8 (the number of wires of the array), found 9"),
        case("E74", base(), "hunt wire.toml --charge one", 2,
            "error: invalid value 'one' for '--charge <Q>': expected an integer charge t.m or `any`, found `one`"),
        case("E75", base(), "hunt wire.toml --momentum conserved", 2,
            "error: command line: --momentum: the model gives no momenta (fields.momentum or array.momentum); omit the flag or use `--momentum any`"),
        case("E76", base(), "hunt ring.toml --max-dim 40 --charge any --spin any --range 4", 2,
            "error: command line: --max-dim: the search would examine about 1.66e8 lattice points in 8 dimensions (ellipsoid volume 1.66e8, search-tree estimate 9.65e7), above the limit 5e7; narrow it with a smaller --max-dim or --range, or pass --force to run it anyway"),
        // ------------------------------------------------ edges and dims --wires
        case("E77", base(), "edges ring.toml --pin tunel", 2,
            "error: command line: --pin: unknown term \"tunel\" (the model's terms: tunnel, cdw)"),
        case("E78", base(), "edges ring.toml --pin tunnel --pin cdw", 2,
            "error: command line: --pin: \"tunnel\" at wire 0 and \"cdw\" at wire 0 do not commute: their mutual phase l_a.K^-1 l_b is -2, not 0; a pinned set must commute"),
        case("E79", base(), "edges wire.toml --pin backscatter --window 2", 2,
            "error: command line: --window: only an open array has ends to look at; this model is an explicit model (no wires)"),
        case("E80", base(), "dims wire.toml --wires 4,8", 2,
            "error: command line: --wires: wire.toml is an explicit model ([fields]); a number of wires needs an [array] model"),
        case("E81", base(), "dims ring.toml --wires 8,5000", 2,
            "error: command line: --wires: a model may have at most 2048 fields in all, found 5000 wires of 2 fields (at most 1024 wires)"),
        // ------------------------------------------------ numerical failure
        case("E82", base(), "flow wire.toml --max-steps 3", 1,
            "error: wire.toml: the flow failed at lambda=0.3: integration failed at ell = 0.581867"),
        case("E83", base(), "flow wire.toml --rtol 1e-15", 2,
            "error: command line: --rtol: expected a relative tolerance from 1e-14 (double precision) to below 1, found 1e-15"),
        case("E84", base(), "flow wire.toml --max-steps 0", 2,
            "error: command line: --max-steps: expected a whole number of steps from 1 to 1000000000, found 0"),
        // ------------------------------------------------ edges: what can pin
        case("E85", base(), "edges wire.toml --set lambda=-0.8", 2,
            "error: command line: --pin: no term pins at lambda=-0.8: the flow ends with outcome \"gapless\" (no null term reaches strong coupling); name the terms to pin with --pin NAME"),
        case("E86", wire(term, "particles = [1, 0]\n"), "edges wire.toml --pin backscatter", 2,
            "error: command line: --pin: term \"backscatter\" is not null: its conformal spin (1/2) l.K^-1 l is 1/2, not 0; only null terms can pin"),
        case("E87",
            vec![("wire.toml", with(&with(WIRE, term, "vector = [1, 1]\n"), "K = [[1, 0], [0, -1]]", "K = [[3, 0], [0, -3]]"))],
            "edges wire.toml", 2,
            "error: wire.toml: term \"backscatter\": wins the flow but cannot pin: it is not local: its particle content K^-1 l = (1/3, -1/3) is not integral, so it is not built from particles and cannot pin; name the terms to pin with --pin NAME"),
        case("E88", ring("wires = 8\n", "wires = 8\nboundary = \"open\"\n"), "edges ring.toml --pin tunnel --window 8", 2,
            "error: command line: --window: a window of 8 wires covers the whole array of 8 wires; it must be smaller (without --window the default of 2 wires is used, and the whole strip is always reported)"),
        case("E89", ring("wires = 8\n", "wires = 8\nboundary = \"open\"\n"), "edges ring.toml --pin tunnel --window 0", 2,
            "error: command line: --window: a window must hold at least 1 wire"),
        // ------------------------------------------------ expressions (cont.)
        case("E90", wire(term, "particles = [1, -1]\ncoupling = \"0.1 * {lambda}\"\n"), "dims wire.toml", 2,
            "error: wire.toml: term \"backscatter\".coupling: \"0.1 * {lambda}\": cannot parse expression: unexpected character `{` at position 7 (expressions use numbers, parameter names, + - * / ^, parentheses and the functions sqrt, exp, ln, abs, sin, cos, tan)"),
        // ------------------------------------------------ momentum period
        case("E91", wire("charge = [1, 1]", "charge = [1, 1]\nmomentum_period = \"2*pi\""), "dims wire.toml", 2,
            "error: wire.toml: fields.momentum_period: needs fields.momentum too: the period G reduces momentum mismatches, and without momenta there are none"),
        case("E92", wire("charge = [1, 1]", "charge = [1, 1]\nmomentum = [\"pi/2\", \"-pi/2\"]\nmomentum_period = 0"), "dims wire.toml", 2,
            "error: wire.toml: fields.momentum_period: must be a finite number > 0 (the reciprocal lattice vector G; momenta are conserved modulo G), found 0 at lambda=0.3"),
        // ------------------------------------------------ edges (cont.)
        case("E93", ring("wires = 8\n", "wires = \"infinite\"\n"), "edges ring.toml --pin tunnel --window 2", 2,
            "error: command line: --window: only an open array has ends to look at; this model is an infinite array (it has no ends)"),
        // ------------------------------------------------ closure range, momentum per translate
        case("E94", base(), "flow ring.toml --closure-range 0", 2,
            "error: command line: --closure-range: expected a whole number of wires, at least 1 (a generated term spans at least one wire), found 0"),
        case("E95", wire("charge = [1, 1]", "charge = [1, 1]\nwires = [1, 1]"), "dims wire.toml", 2,
            "error: wire.toml: fields.wires: wires are numbered 0 to 1 without gaps, but no field is on wire 0"),
        case("E96", vec![("ring.toml", flux_pair(RING))], "flow ring.toml", 2,
            "error: ring.toml: term \"pair\": its momentum changes by 0.08 from one translate to the next (momentum_per_wire acting on a term with net particle number (1, 1)), and on a periodic ring of 8 wires 8 times that, 0.64, is not a multiple of the momentum period (the model gives none): the translates' momenta do not close around the ring; use an open array, or momenta for which 8 dk is a multiple of momentum_period"),
        case("E97", vec![("ring.toml", flux_pair(&with(RING, "wires = 8", "wires = \"infinite\"")))], "flow ring.toml", 2,
            "error: ring.toml: term \"pair\": its momentum changes by 0.08 from one translate to the next (momentum_per_wire acting on a term with net particle number (1, 1)), so its translates have different cut-offs ell_k; an infinite array flows translation-invariant families only: use a finite array (its translates flow one by one) or a momentum_per_wire that leaves the term's momentum unchanged"),
        // ------------------------------------------------ dims --pin
        case("E98", base(), "dims wire.toml --pin backscater", 2,
            "error: command line: --pin: unknown term \"backscater\" (the model's terms: backscatter)"),
        case("E99", wire(term, "particles = [1, 0]\n"), "dims wire.toml --pin backscatter", 2,
            "error: command line: --pin: term \"backscatter\" is not null: its conformal spin (1/2) l.K^-1 l is 1/2, not 0; only null terms can pin"),
        case("E100",
            vec![("wire.toml", with(&with(WIRE, term, "vector = [1, 1]\n"), "K = [[1, 0], [0, -1]]", "K = [[3, 0], [0, -3]]"))],
            "dims wire.toml --pin backscatter", 2,
            "error: command line: --pin: term \"backscatter\" is not local: its particle content K^-1 l = (1/3, -1/3) is not integral, so it is not built from particles and cannot pin"),
        case("E101", base(), "dims ring.toml --pin tunnel,cdw", 2,
            "error: command line: --pin: \"tunnel\" at wire 0 and \"cdw\" at wire 0 do not commute: their mutual phase l_a.K^-1 l_b is -2, not 0; a pinned set must commute"),
        // ------------------------------------------------ successive pinning
        case("E102", base(), "flow wire.toml --stages 0", 2,
            "error: command line: --stages: expected a whole number of stages from 1 (stop at the first winner) to 1000000, found 0"),
        // ------------------------------------------------ files and data (issue 19)
        case("E120", base(), "dims wire.toml -o ./wire.toml", 2,
            "error: command line: -o: `./wire.toml` is the model file `wire.toml`; writing there would destroy it: give another output file"),
        case("E121", wire("name = \"backscatter\"", "name = \"back,scatter\""), "dims wire.toml", 2,
            "error: wire.toml: term \"back,scatter\": a term name may not contain a comma (names are CSV columns; use letters, digits, spaces and other punctuation)"),
        case("E122", base(), "dims wire.toml --set lambda=0.1 --set lambda=0.2", 2,
            "error: command line: --set: `lambda` is given twice (--set lambda=0.1 and --set lambda=0.2); give each parameter once"),
        case("E123", vec![("wire.toml", with(&with(WIRE, "K = [[1, 0], [0, -1]]", "K = [[2, 0], [0, -2]]"), term, "particles = [1048576, -1048576]\n"))], "dims wire.toml", 2,
            "error: wire.toml: term \"backscatter\".particles: its lattice vector l = K m has entry l[0] = 2097152; entries must be at most 1048576 in magnitude"),
        case("E124", base(), "scan wire.toml --x lambda=0.5:0.1:5:log", 2,
            "error: command line: --x: MIN must be below MAX with log spacing, found 0.5:0.1 on axis `lambda`"),
        case("E125", base(), "dims /dev/zero", 2,
            "error: /dev/zero: the model file is larger than 64 MiB (the limit; a model at the largest size, 2048 fields, takes about 30 MB): is it the right file?"),
        case("E126", wire(term, "particles = [1, -1]\ncoupling = \"0.1*sinc(lambda)\"\n"), "dims wire.toml", 2,
            "error: wire.toml: term \"backscatter\".coupling: \"0.1*sinc(lambda)\": unknown function `sinc` at position 5 (known functions: abs, acos, acosh, asin, asinh, atan, atanh, cbrt, ceil, cos, cosh, exp, floor, fract, ln, log, log10, log2, round, signum, sin, sinh, sqrt, tan, tanh, trunc)"),
        case("E127", wire(term, "particles = [1, -1]\ncoupling = \"lambda*1e999\"\n"), "dims wire.toml", 2,
            "error: wire.toml: term \"backscatter\".coupling: \"lambda*1e999\": cannot parse expression: the exponent of `1e999` is out of range (at most 400 in magnitude)"),
        Case {
            id: "E128",
            files: base(),
            setup: vec![Step::Run(args("scan wire.toml --x lambda=0:0.5:5 --out r --quiet"))],
            args: args("scan wire.toml --x lambda=0:0.5:6 --out r --quiet"),
            code: 2,
            message: "error: command line: --out: `r` already holds the files of another scan (points.csv, summary.json, phases.csv, run.json, phase.png, phase.svg, phase.pdf); pass --overwrite to replace them, or choose another --out",
        },
        Case {
            id: "E129",
            files: base(),
            // A finished run copied over the partial file, with the row of
            // lambda = 0.125 moved to 0.15.
            setup: vec![
                Step::Run(args("scan wire.toml --x lambda=0:0.5:5 --out r --shard 1/1 --quiet")),
                Step::Copy("r/shard-1-of-1.csv", "r/.points.running.csv"),
                Step::Edit("r/.points.running.csv", "\"shard\":[1,1]", "\"shard\":null"),
                Step::Edit("r/.points.running.csv", "\n0.125,", "\n0.15,"),
            ],
            args: args("scan wire.toml --x lambda=0:0.5:5 --out r --resume --quiet"),
            code: 2,
            message: "error: r/.points.running.csv: --resume: line 4 of the partial output (data row 2) is wrong: lambda = 0.15, expected 0.125; it does not belong to this scan: run with --overwrite instead of --resume to start over",
        },
        case("E130", base(), "scan wire.toml --x lambda=0:0.5:20 --shard 2/2 --shard-base 0", 2,
            "error: command line: --shard: with --shard-base 0 a shard K/N needs 0 <= K < N, found 2/2"),
        // ------------------------------------------------ parameter labels
        case("E131", wire("lambda = 0.3", "lambda = { value = 0.3, lable = \"λ\" }"), "dims wire.toml", 2,
            "error: wire.toml: params.lambda.lable: unknown key (a parameter table has value, label, unit)"),
        case("E132", wire("lambda = 0.3", "lambda = { label = \"λ\" }"), "dims wire.toml", 2,
            "error: wire.toml: params.lambda: a parameter table needs `value` (the default value), e.g. { value = 0.8, label = \"λ\" }"),
        case("E133", wire("lambda = 0.3", "lambda = { value = 0.3, unit = 3 }"), "dims wire.toml", 2,
            "error: wire.toml: params.lambda.unit: expected a string, found integer"),
        case("E134", wire("lambda = 0.3", "lambda = { value = \"0.3\" }"), "dims wire.toml", 2,
            "error: wire.toml: params.lambda.value: expected a number, found the string \"0.3\""),
        case("E135", wire("lambda = 0.3", "lambda = { value = 0.3, label = \"a\\nb\" }"), "dims wire.toml", 2,
            "error: wire.toml: params.lambda.label: expected a string on one line (no control characters)"),
        // ------------------------------------------------ --run-json
        case("E136", base(), "dims wire.toml --format csv --run-json -", 2,
            "error: command line: --run-json: standard output carries the report; give a file for the provenance"),
        case("E137", base(), "dims wire.toml --run-json wire.toml", 2,
            "error: command line: --run-json: `wire.toml` is the model file `wire.toml`; writing there would destroy it: give another output file"),
        case("E138", base(), "dims wire.toml --format csv --run-json missing/run.json", 2,
            "error: command line: --run-json: cannot write `missing/run.json`: the directory `missing` does not exist"),
        case("E139", base(), "dims wire.toml --format csv -o t.csv --run-json t.csv", 2,
            "error: command line: --run-json: `t.csv` is also the -o file; give the provenance its own file"),
        case("E140", base(), "flow wire.toml --out . --run-json run.json", 2,
            "error: command line: --run-json: `run.json` is in the --out directory `.`, which gets the run's files and its own run.json; give a file outside it"),
        // ------------------------------------------------ size limits
        case("E141", ring("wires = 8", "wires = 300\nboundary = \"open\""), "flow ring.toml", 2,
            "error: command line: --force: the flow of all 600 fields runs on dense matrices (an open array or an explicit model): every step multiplies 600 x 600 matrices, work growing like N^3, about 1.6 times that of 512 fields (the limit, several seconds per flow); pass --force to run it anyway, or use a periodic array (computed per momentum q)"),
        case("E142", vec![("array.toml", common::explicit_array(8))], "flow array.toml --competitors 2", 2,
            "error: command line: --competitors: at g=0.5, lambda=0.8 the hunt finds more than 2448 competitors with bare Delta <= 2; their flow would take more than 1e8 units of work (channels^2 x fields, before the closure adds any; limit 1e8, about 15 s); lower --competitors DELTA, narrow --competitor-range, or pass --force to run it anyway"),
        case("E143", vec![("array40.toml", common::explicit_array(20))], "flow array40.toml --competitors 3", 2,
            "error: command line: --competitors: at g=0.5, lambda=0.8 the hunt for competitors with bare Delta <= 3 is refused: the search would examine about 2.97e8 lattice points in 40 dimensions (ellipsoid volume 1.32e7, search-tree estimate 2.97e8), above the limit 5e7; narrow it with a smaller --competitors DELTA, or pass --force to run it anyway"),
    ];
    // By number: E100 comes after E99, not after E10.
    c.sort_by_key(|c| c.id[1..].parse::<u32>().expect("ids are E and a number"));
    c
}

fn run_case(c: &Case) -> (i32, String) {
    let dir = tempfile::tempdir().expect("temporary directory");
    for (name, text) in &c.files {
        std::fs::write(dir.path().join(name), text).expect("write input");
    }
    let pinflow = || {
        let mut cmd = Command::cargo_bin("pinflow").expect("the pinflow binary");
        cmd.current_dir(dir.path())
            .timeout(std::time::Duration::from_secs(60));
        cmd
    };
    for step in &c.setup {
        match step {
            Step::Run(a) => {
                pinflow().args(a).assert().success();
            }
            Step::Truncate(file, n) => {
                let p = dir.path().join(file);
                let text = std::fs::read_to_string(&p).expect("read");
                let kept: String = text.lines().take(*n).map(|l| format!("{l}\n")).collect();
                std::fs::write(&p, kept).expect("write");
            }
            Step::Copy(from, to) => {
                std::fs::copy(dir.path().join(from), dir.path().join(to)).expect("copy");
            }
            Step::Line(file, n, new) => {
                let p = dir.path().join(file);
                let text = std::fs::read_to_string(&p).expect("read");
                let lines: Vec<String> = text
                    .lines()
                    .enumerate()
                    .map(|(i, l)| {
                        if i + 1 == *n {
                            new.to_string()
                        } else {
                            l.to_string()
                        }
                    })
                    .collect();
                std::fs::write(&p, lines.join("\n") + "\n").expect("write");
            }
            Step::Edit(file, old, new) => {
                let p = dir.path().join(file);
                let text = std::fs::read_to_string(&p).expect("read");
                std::fs::write(&p, with(&text, old, new)).expect("write");
            }
        }
    }
    let out = pinflow().args(&c.args).output().expect("run pinflow");
    let stderr = String::from_utf8_lossy(&out.stderr).to_string();
    (out.status.code().unwrap_or(-1), stderr)
}

fn check(id: &str) {
    let all = cases();
    let c = all.iter().find(|c| c.id == id).expect("a catalogue entry");
    let (code, stderr) = run_case(c);
    let first = stderr.lines().next().unwrap_or("");
    if std::env::var_os("PINFLOW_CATALOGUE_PRINT").is_some() {
        eprintln!("{id} [{code}] pinflow {}\n{stderr}", c.args.join(" "));
        return;
    }
    assert_eq!(code, c.code, "{id}: exit code; stderr:\n{stderr}");
    assert_eq!(first, c.message, "{id}: message");
    assert!(!stderr.contains("panicked"), "{id}: {stderr}");
}

/// The page shows every entry's command and message verbatim, in order.
#[test]
fn the_catalogue_shows_every_case() {
    let page =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/errors.md"))
            .expect("docs/errors.md");
    let mut at = 0;
    for c in cases() {
        let heading = format!("### {} ", c.id);
        let start = page[at..]
            .find(&heading)
            .unwrap_or_else(|| panic!("{}: no heading `{heading}` (in order)", c.id))
            + at;
        let end = page[start + 1..]
            .find("\n### ")
            .map_or(page.len(), |e| e + start + 1);
        let section = &page[start..end];
        let command = format!("$ pinflow {}", c.args.join(" "));
        assert!(
            section.contains(&command),
            "{}: `{command}` not shown",
            c.id
        );
        assert!(
            section.contains(c.message),
            "{}: message not shown:\n{}",
            c.id,
            c.message
        );
        assert!(
            section.contains(&format!("Exit code {}.", c.code)),
            "{}: exit code {} not shown",
            c.id,
            c.code
        );
        at = end;
    }
    assert!(cases().len() >= 30);
}

macro_rules! entries {
    ($($name:ident => $id:literal),* $(,)?) => {
        $(
            #[test]
            fn $name() {
                check($id);
            }
        )*
        /// Every entry has its test.
        #[test]
        fn every_entry_has_a_test() {
            let tested = [$($id),*];
            for c in cases() {
                assert!(tested.contains(&c.id), "{} has no test", c.id);
            }
        }
    };
}

entries! {
    e01_missing_model_file => "E01",
    e02_not_toml => "E02",
    e03_unknown_key => "E03",
    e04_no_fields_or_array => "E04",
    e05_fields_and_array => "E05",
    e06_k_not_square => "E06",
    e07_k_not_symmetric => "E07",
    e08_k_singular => "E08",
    e09_k_entry_too_large => "E09",
    e10_charge_length => "E10",
    e11_v_shape => "E11",
    e12_v_not_symmetric => "E12",
    e13_v_not_positive_definite => "E13",
    e14_v_badly_conditioned => "E14",
    e15_no_wires => "E15",
    e16_too_many_wires => "E16",
    e17_unknown_boundary => "E17",
    e18_missing_block_0 => "E18",
    e19_block_key => "E19",
    e20_range_does_not_fit => "E20",
    e21_momentum_per_wire_alone => "E21",
    e22_infinite_open_array => "E22",
    e23_duplicate_term => "E23",
    e24_particles_and_vector => "E24",
    e25_zero_vector => "E25",
    e26_term_length => "E26",
    e27_term_too_wide => "E27",
    e28_extra_spin => "E28",
    e29_targets_do_not_pin_together => "E29",
    e30_negative_extra_dimension => "E30",
    e31_parameter_name => "E31",
    e32_reserved_parameter_name => "E32",
    e33_parameter_not_a_number => "E33",
    e34_expression_syntax => "E34",
    e35_expression_unknown_name => "E35",
    e36_non_finite_coupling => "E36",
    e37_non_finite_momentum => "E37",
    e38_non_finite_v => "E38",
    e39_set_unknown_parameter => "E39",
    e40_set_not_a_number => "E40",
    e41_negative_ell_max => "E41",
    e42_floor_above_y_strong => "E42",
    e43_unknown_closure => "E43",
    e44_flow_table_key => "E44",
    e45_flow_table_type => "E45",
    e46_axis_syntax => "E46",
    e47_axis_parameter => "E47",
    e48_log_axis => "E48",
    e49_axis_order => "E49",
    e50_axis_points => "E50",
    e51_same_axes => "E51",
    e52_no_axis => "E52",
    e53_scan_table_key => "E53",
    e54_grid_too_large => "E54",
    e55_no_threads => "E55",
    e56_shard_range => "E56",
    e57_uncountable_grid => "E57",
    e58_resume_other_options => "E58",
    e59_shard_missing => "E59",
    e60_shard_twice => "E60",
    e61_shards_of_two_scans => "E61",
    e62_incomplete_shard => "E62",
    e63_damaged_shard_meta => "E63",
    e64_damaged_shard_row => "E64",
    e65_not_a_scan_file => "E65",
    e66_unreadable_shard => "E66",
    e67_output_directory_missing => "E67",
    e68_output_is_a_directory => "E68",
    e69_out_is_a_file => "E69",
    e70_out_cannot_be_created => "E70",
    e71_max_dim => "E71",
    e72_range_explicit => "E72",
    e73_range_too_wide => "E73",
    e74_charge => "E74",
    e75_momentum_filter => "E75",
    e76_search_too_large => "E76",
    e77_pin_unknown => "E77",
    e78_pins_do_not_commute => "E78",
    e79_window_explicit => "E79",
    e80_wires_explicit => "E80",
    e81_wires_too_many => "E81",
    e82_integration_failed => "E82",
    e83_rtol_beyond_double_precision => "E83",
    e84_step_limit_out_of_range => "E84",
    e85_nothing_pins => "E85",
    e86_pin_not_null => "E86",
    e87_winner_not_local => "E87",
    e88_window_whole_array => "E88",
    e89_window_empty => "E89",
    e90_character_outside_expressions => "E90",
    e91_momentum_period_without_momenta => "E91",
    e92_momentum_period_not_positive => "E92",
    e93_window_on_an_infinite_array => "E93",
    e94_closure_range_zero => "E94",
    e95_field_wires_with_a_gap => "E95",
    e96_flux_ring_does_not_close => "E96",
    e97_infinite_flux_array => "E97",
    e98_dims_pin_unknown => "E98",
    e99_dims_pin_not_null => "E99",
    e100_dims_pin_not_local => "E100",
    e101_dims_pins_do_not_commute => "E101",
    e102_zero_stages => "E102",
    e120_output_is_the_model => "E120",
    e121_term_name_with_a_comma => "E121",
    e122_set_twice => "E122",
    e123_lattice_vector_too_large => "E123",
    e124_log_axis_min_above_max => "E124",
    e125_model_file_too_large => "E125",
    e126_unknown_function => "E126",
    e127_exponent_out_of_range => "E127",
    e128_folder_with_another_scan => "E128",
    e129_resume_row_of_another_grid => "E129",
    e130_zero_based_shard_out_of_range => "E130",
    e131_unknown_key_in_a_parameter_table => "E131",
    e132_parameter_table_without_value => "E132",
    e133_unit_not_a_string => "E133",
    e134_parameter_value_not_a_number => "E134",
    e135_label_on_two_lines => "E135",
    e136_run_json_to_standard_output => "E136",
    e137_run_json_is_the_model => "E137",
    e138_run_json_in_a_missing_directory => "E138",
    e139_run_json_is_the_output_file => "E139",
    e140_run_json_inside_the_out_directory => "E140",
    e141_dense_flow_above_the_limit => "E141",
    e142_too_many_hunted_competitors => "E142",
    e143_hunt_for_competitors_above_its_limit => "E143",
}
