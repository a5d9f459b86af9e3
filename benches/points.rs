//! Per-point costs on a 32-field array with six term families
//! (`benches/models/array32.toml`): building V and computing every
//! dimension (what `dims` and every scan point do first), and one full
//! second-order flow (with and without the pairs closure).
//!
//! Run: `cargo bench --bench points`.

use std::path::Path;

use criterion::{criterion_group, criterion_main, Criterion};
use pinflow::flow::{Closure, Flow, FlowOptions};
use pinflow::system::System;

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

criterion_group!(benches, dims_point, flow_point);
criterion_main!(benches);
