//! Per-point costs on a 32-field array with six term families
//! (`benches/models/array32.toml`): building V and computing every
//! dimension (what `dims` and every scan point do first), and one full
//! second-order flow (with and without the pairs closure).
//!
//! The filling-1/3 demo (`flows/laughlin_third.toml`) as an infinite array
//! (q-space, refined quadrature) against a periodic array of 64 wires, by
//! the dense path (128 fields) and by the q-space path on its 64 points:
//! V and every dimension at one point.
//!
//! `pinflow edges` on a four-wire open array with a non-diagonal 4 x 4
//! cell pinned wire by wire (`tests/reference/edges_nondiagonal_cell.toml`):
//! the pinned set, the strip and both one-wire windows. Its 8 x 8 strip
//! form once made the readable reduction cycle (about 9 s).
//!
//! One flow of the infinite-array demo (`flows/sliding_array.toml`),
//! including its quadrature check.
//!
//! Issue 15's targets (`target:` benches, read by `benches/ratios.sh`): one
//! flow of the 32-field array as a periodic ring (q-space), as an open
//! strip (dense D) and as an infinite array (with its quadrature check),
//! each also with the per-channel reference right-hand side the matrix
//! products replaced.
//!
//! Run: `cargo bench --bench points` (only the targets: `cargo bench
//! --bench points -- target`).

use std::path::Path;

use criterion::{criterion_group, criterion_main, Criterion};
use pinflow::core::system::System;
use pinflow::edges::{analyse, pins};
use pinflow::flow::{Closure, Flow, FlowOptions};
use pinflow::model::Model;

fn model() -> System {
    System::load(Path::new(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/benches/models/array32.toml"
    )))
    .expect("bench model")
}

fn dims_point(c: &mut Criterion) {
    let sys = model();
    let point = sys.model.params.defaults().to_vec();
    c.bench_function("dims: V and all dimensions, 32 fields", |b| {
        b.iter(|| {
            let fp = sys.fixed_point(&point).expect("physical point");
            sys.lattice
                .families
                .iter()
                .map(|f| fp.dimension(&f.rep().l))
                .sum::<f64>()
        })
    });
}

fn flow_point(c: &mut Criterion) {
    let sys = model();
    let point = sys.model.params.defaults().to_vec();
    for closure in [Closure::None, Closure::Pairs] {
        let opts = FlowOptions {
            closure,
            record: false,
            ..FlowOptions::default()
        };
        let flow = Flow::new(&sys, opts);
        let name = format!("flow: 32 fields, 6 terms, closure {closure:?}");
        c.bench_function(&name, |b| b.iter(|| flow.run(&point).expect("flow")));
    }
}

/// The filling-1/3 demo with another number of wires.
fn third(wires: &str) -> System {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/flows/laughlin_third.toml");
    let text = std::fs::read_to_string(path).expect("demo model");
    assert!(text.contains("wires = 8"));
    let text = text.replace("wires = 8", &format!("wires = {wires}"));
    System::new(Model::parse(&text, path).expect("model")).expect("system")
}

fn infinite_against_dense(c: &mut Criterion) {
    let inf = third("\"infinite\"");
    let ring = third("64");
    // The default point (16 quadrature points suffice) and one where the
    // modes disperse more (32 points).
    for set in [
        vec![],
        vec![("g".to_string(), 0.3), ("lambda".to_string(), 0.5)],
    ] {
        let point = inf.model.point_with(&set, "bench").expect("point");
        let at = if set.is_empty() {
            "default point"
        } else {
            "g=0.3, lambda=0.5"
        };
        c.bench_function(
            &format!("dims: filling 1/3, infinite (q-space), {at}"),
            |b| {
                b.iter(|| {
                    let (fp, _) = inf.q_converged(&point).expect("physical point");
                    inf.q_dimensions(&fp).expect("q data").iter().sum::<f64>()
                })
            },
        );
        c.bench_function(&format!("dims: filling 1/3, 64 wires dense, {at}"), |b| {
            b.iter(|| {
                let fp = ring.fixed_point(&point).expect("physical point");
                ring.lattice
                    .families
                    .iter()
                    .map(|f| fp.dimension(&f.rep().l))
                    .sum::<f64>()
            })
        });
        c.bench_function(&format!("dims: filling 1/3, 64 wires q-space, {at}"), |b| {
            b.iter(|| {
                let fp = ring.q_fixed_point(&point, 64).expect("physical point");
                ring.q_dimensions(&fp).expect("q data").iter().sum::<f64>()
            })
        });
    }
}

fn edges_nondiagonal_cell(c: &mut Criterion) {
    let sys = System::load(Path::new(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/reference/edges_nondiagonal_cell.toml"
    )))
    .expect("edges model");
    let names = vec!["hop0".to_string()];
    c.bench_function("edges: 4 wires, non-diagonal 4 x 4 cell, pin hop0", |b| {
        b.iter(|| {
            let sel = pins::from_names(&sys, &names).expect("pinned set");
            analyse(&sys, &sel.pinned, None)
                .expect("analysis")
                .gapped_pairs
        })
    });
}

/// One flow of the infinite-array demo (`flows/sliding_array.toml`) at its
/// default point, with the trajectory recorded (`pinflow flow`) and without
/// (a scan point); every such flow includes its quadrature check.
fn infinite_flow(c: &mut Criterion) {
    let sys = System::load(Path::new(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/flows/sliding_array.toml"
    )))
    .expect("demo model");
    let point = sys.model.params.defaults().to_vec();
    for record in [true, false] {
        let opts = FlowOptions {
            record,
            ..FlowOptions::default()
        };
        let flow = Flow::new(&sys, opts);
        let name = format!("flow: sliding array (infinite), record {record}");
        c.bench_function(&name, |b| b.iter(|| flow.run(&point).expect("flow")));
    }
}

/// The benchmark array with its `wires`/`boundary` lines replaced.
fn array32_as(wires: &str, boundary: &str) -> System {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/benches/models/array32.toml");
    let text = std::fs::read_to_string(path).expect("bench model");
    assert!(text.contains("wires = 16\nboundary = \"periodic\"\n"));
    let text = text.replace(
        "wires = 16\nboundary = \"periodic\"\n",
        &format!("wires = {wires}\n{boundary}"),
    );
    System::new(Model::parse(&text, path).expect("model")).expect("system")
}

/// Issue 15's per-flow targets: ring, open strip and infinite array of the
/// 32-field model, with the matrix-product and the reference right-hand
/// side.
fn targets(c: &mut Criterion) {
    let layouts = [
        ("ring 16x2", array32_as("16", "boundary = \"periodic\"\n")),
        (
            "open strip 16x2 (dense)",
            array32_as("16", "boundary = \"open\"\n"),
        ),
        ("infinite", array32_as("\"infinite\"", "")),
    ];
    for (name, sys) in &layouts {
        let point = sys.model.params.defaults().to_vec();
        for reference in [false, true] {
            let opts = FlowOptions {
                record: false,
                ..FlowOptions::default()
            };
            let mut flow = Flow::new(sys, opts);
            flow.reference_rhs = reference;
            let rhs = if reference {
                "reference rhs"
            } else {
                "products"
            };
            c.bench_function(&format!("target: flow {name}, {rhs}"), |b| {
                b.iter(|| flow.run(&point).expect("flow"))
            });
        }
    }
}

criterion_group!(
    benches,
    targets,
    dims_point,
    flow_point,
    infinite_against_dense,
    edges_nondiagonal_cell,
    infinite_flow
);
criterion_main!(benches);
