//! Issue 15 item 2: the flow's integration loop allocates nothing per
//! step. A counting global allocator (per thread) counts the heap
//! allocations of whole accepted steps of the flow's integrator
//! (`src/math/dop853.rs`) on the flow's right-hand side
//! (`src/flow/rhs.rs`) with its stop hook, as `src/flow/mod.rs` drives
//! them for a scan point (no trajectory recorded), on the 32-field
//! benchmark array as a periodic ring (D in q-space blocks): none at all.
//! As an open strip (dense D) with D M D formed by the banded product
//! (`src/math/banded.rs`, the route of large strips): none at all either.
//! By the dense product (the route where D's band is wide, e.g. this
//! 32-field strip) the two products go through `nalgebra`'s gemm, whose
//! `matrixmultiply` kernel allocates its packing buffer on every call: at
//! most those two per evaluation. A consistency check of the code, no
//! physics values.

use std::alloc::{GlobalAlloc, Layout, System as Heap};
use std::cell::Cell;
use std::path::Path;

use pinflow::core::system::System;
use pinflow::flow::background::{Background, DenseRoute};
use pinflow::flow::rhs::FlowRhs;
use pinflow::flow::{Flow, FlowOptions};
use pinflow::math::dop853::{Control, Dop853};
use pinflow::model::Model;

struct Counting;

thread_local! {
    static ALLOCATIONS: Cell<u64> = const { Cell::new(0) };
}

// SAFETY: every call is forwarded to the system allocator unchanged; the
// counter is a const-initialised thread local (no allocation of its own).
unsafe impl GlobalAlloc for Counting {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        ALLOCATIONS.with(|c| c.set(c.get() + 1));
        Heap.alloc(layout)
    }
    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        Heap.dealloc(ptr, layout)
    }
    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, size: usize) -> *mut u8 {
        ALLOCATIONS.with(|c| c.set(c.get() + 1));
        Heap.realloc(ptr, layout, size)
    }
}

#[global_allocator]
static GLOBAL: Counting = Counting;

fn allocations() -> u64 {
    ALLOCATIONS.with(|c| c.get())
}

/// The benchmark array with another boundary.
fn array32(boundary: &str) -> System {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("benches/models/array32.toml");
    let text = std::fs::read_to_string(&path).expect("bench model");
    let from = "boundary = \"periodic\"";
    assert!(text.contains(from));
    let text = text.replace(from, &format!("boundary = \"{boundary}\""));
    let model = Model::parse(&text, "benches/models/array32.toml").expect("model");
    System::new(model).expect("system")
}

/// The listed terms' right-hand side on D's layout, and the bare state.
fn listed_rhs<'a>(sys: &System, flow: &'a Flow, periodic: bool) -> (FlowRhs<'a>, Vec<f64>) {
    let point = sys.model.params.defaults().to_vec();
    let listed = flow.plan.listed;
    let channels: Vec<_> = flow.plan.channels[..listed].iter().collect();
    let ope = (flow.plan.ope.iter())
        .filter(|e| e.target < listed && e.a < listed && e.b < listed)
        .copied()
        .collect();
    let lat = &sys.lattice;
    let (bg, d) = if periodic {
        let fp = sys
            .q_fixed_point(&point, lat.wires)
            .expect("physical point");
        let bg = Background::Fourier {
            wires: lat.wires,
            cell: lat.cell,
        };
        (bg, fp.d)
    } else {
        let fp = sys.fixed_point(&point).expect("physical point");
        let bg = Background::Dense { n: lat.n };
        let mut d = vec![0.0; bg.len()];
        bg.write(&fp.d, &mut d);
        (bg, d)
    };
    let mut rhs = FlowRhs::new(bg, channels, vec![0.0; listed], ope);
    // As `Flow` does: N(q) from M(q) with the cell's K^-1.
    if let Some(q) = &sys.q {
        rhs.set_cell_kinv(&q.kinv);
    }
    rhs.record = false;
    let mut y = vec![0.0; 2 * listed];
    for (c, t) in sys.model.terms.iter().enumerate() {
        let (re, im) = flow.plan.channels[c].bare_amplitude(t.coupling.eval(&point), 0.0);
        y[2 * c] = re;
        y[2 * c + 1] = im;
    }
    y.extend_from_slice(&d);
    (rhs, y)
}

/// Allocations during the accepted steps after the first (which sizes
/// nothing either, but starts the count cleanly), the steps and the
/// evaluations of the right-hand side in that span.
fn allocations_per_flow(boundary: &str, route: DenseRoute) -> (u64, u64, u64) {
    let sys = array32(boundary);
    let flow = Flow::new(&sys, FlowOptions::default());
    let (mut rhs, y) = listed_rhs(&sys, &flow, boundary == "periodic");
    rhs.set_dense_route(route);
    let mut dop = Dop853::new(y.len());
    dop.set_groups(&[2 * rhs.channels.len(), y.len()]);
    if let Some(n) = rhs.bg.packed_symmetric() {
        dop.set_packed_symmetric(2 * rhs.channels.len(), n);
    }
    let control = Control {
        rtol: 1e-8,
        atol: 1e-12,
        max_attempts: 100_000,
    };
    dop.start(&rhs, 0.0, &y, 40.0, control);
    assert!(!dop.step(&rhs).expect("first step"));
    let mut out = vec![0.0; y.len()];
    let (before, evals) = (allocations(), dop.evaluations);
    loop {
        let done = dop.step(&rhs).expect("integrates");
        if rhs.after_step(dop.x(), dop.y()) || done {
            break;
        }
    }
    dop.prepare_dense(&rhs);
    assert!(dop.dense(0.5 * (dop.x_old() + dop.x()), &mut out));
    let after = allocations();
    assert!(rhs.stop.is_some(), "{boundary}: the flow reaches a stop");
    (after - before, dop.accepted, dop.evaluations - evals)
}

#[test]
fn integration_steps_allocate_nothing() {
    let (count, steps, _) = allocations_per_flow("periodic", DenseRoute::Auto);
    assert!(steps >= 5, "ring: only {steps} steps");
    assert_eq!(count, 0, "ring: {count} allocations in {steps} steps");
    let (count, steps, _) = allocations_per_flow("open", DenseRoute::Banded);
    assert!(steps >= 5, "strip, banded: only {steps} steps");
    assert_eq!(
        count, 0,
        "strip, banded: {count} allocations in {steps} steps"
    );
    let (count, steps, evals) = allocations_per_flow("open", DenseRoute::Full);
    assert!(steps >= 5, "strip: only {steps} steps");
    assert!(
        count <= 2 * evals,
        "strip, gemm: {count} allocations in {steps} steps ({evals} evaluations)"
    );
}

/// The counter sees allocations at all (the test above cannot pass
/// vacuously).
#[test]
fn the_counter_counts() {
    let before = allocations();
    let v: Vec<u64> = std::hint::black_box((0..100).collect());
    assert!(allocations() > before && v.len() == 100);
}
