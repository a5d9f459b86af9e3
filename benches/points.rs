//! Per-point costs on a 32-field array with six term families
//! (`benches/models/array32.toml`): building V and computing every
//! dimension (what `dims` and every scan point do first), and one full
//! second-order flow without the pairs closure (with it, the default, it
//! is a `target:` bench below).
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
//! flow of the 32-field array as a periodic ring (q-space) and as an open
//! strip (dense D), and of the filling-1/3 demo on a 16-wire ring and as an
//! infinite array (32 quadrature points, with its check on 16), each also
//! with the per-channel reference right-hand side the matrix products
//! replaced. `integrator:` benches compare the flow's own DOP853
//! (`pinflow::math::dop853`) with `ode_solvers`' two methods.
//! Both measure the thread's CPU time, not wall time (see [`ThreadCpu`]).
//!
//! The exact inverse of K (`exact inverse:` benches): an explicit model's
//! K of 1024 fields (512 spinless wires, K = diag(1, -1) per wire) block by
//! block (`bareiss::det_and_inverse`), and 128 fields both ways (the whole
//! matrix by fraction-free elimination, `bareiss::dense_det_and_inverse`, takes about
//! 4 s at 256 fields and grows as n^3).
//!
//! Run: `cargo bench --bench points` (only the targets: `cargo bench
//! --bench points -- target`).

use std::path::Path;

use std::time::Duration;

use criterion::measurement::{Measurement, ValueFormatter, WallTime};
use criterion::{criterion_group, criterion_main, Criterion};
use pinflow::core::system::System;
use pinflow::edges::{analyse, pins};
use pinflow::flow::background::DenseRoute;
use pinflow::flow::{Closure, Flow, FlowOptions};
use pinflow::model::Model;

/// A bundled model file (path from the repository root) with one line
/// replaced (`from` must occur in it; pass `from == to` for the file as it
/// is).
fn variant(path: &str, from: &str, to: &str) -> System {
    let path = format!("{}/{path}", env!("CARGO_MANIFEST_DIR"));
    let text = std::fs::read_to_string(&path).expect("model file");
    assert!(text.contains(from), "{path}: {from:?}");
    System::new(Model::parse(&text.replace(from, to), &path).expect("model")).expect("system")
}

/// The 32-field benchmark array as it is (16-wire periodic ring).
fn model() -> System {
    array32_as("16", "boundary = \"periodic\"\n")
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

/// One flow of the benchmark array without the pairs closure (listed terms
/// only); with it (the default) it is the `target: flow ring 16x2` bench.
fn flow_point(c: &mut Criterion) {
    let sys = model();
    let point = sys.model.params.defaults().to_vec();
    let opts = FlowOptions {
        closure: Closure::None,
        record: false,
        ..FlowOptions::default()
    };
    let flow = Flow::new(&sys, opts);
    c.bench_function("flow: 32 fields, 6 terms, closure None", |b| {
        b.iter(|| flow.run(&point).expect("flow"))
    });
}

/// The filling-1/3 demo with another number of wires.
fn third(wires: &str) -> System {
    let to = format!("wires = {wires}");
    variant("flows/laughlin_third.toml", "wires = 8", &to)
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

/// Thread CPU time (`CLOCK_THREAD_CPUTIME_ID`) as criterion's measure: on
/// a machine shared with other jobs wall time measures the load, CPU time
/// the work. One flow runs on the calling thread only.
struct ThreadCpu(WallTime);

impl Measurement for ThreadCpu {
    type Intermediate = Duration;
    type Value = Duration;

    fn start(&self) -> Duration {
        thread_cpu()
    }
    fn end(&self, start: Duration) -> Duration {
        thread_cpu().saturating_sub(start)
    }
    fn add(&self, a: &Duration, b: &Duration) -> Duration {
        *a + *b
    }
    fn zero(&self) -> Duration {
        Duration::ZERO
    }
    fn to_f64(&self, v: &Duration) -> f64 {
        v.as_nanos() as f64
    }
    fn formatter(&self) -> &dyn ValueFormatter {
        self.0.formatter()
    }
}

fn thread_cpu() -> Duration {
    let mut ts = libc::timespec {
        tv_sec: 0,
        tv_nsec: 0,
    };
    // SAFETY: clock_gettime only writes the timespec it is given.
    let rc = unsafe { libc::clock_gettime(libc::CLOCK_THREAD_CPUTIME_ID, &mut ts) };
    assert_eq!(rc, 0, "thread CPU clock");
    Duration::new(ts.tv_sec as u64, ts.tv_nsec as u32)
}

/// The benchmark array with its `wires`/`boundary` lines replaced.
fn array32_as(wires: &str, boundary: &str) -> System {
    let to = format!("wires = {wires}\n{boundary}");
    let from = "wires = 16\nboundary = \"periodic\"\n";
    variant("benches/models/array32.toml", from, &to)
}

/// Issue 15's per-flow targets (module docs), with the matrix-product and
/// the reference right-hand side.
fn targets(c: &mut Criterion<ThreadCpu>) {
    let layouts = [
        ("ring 16x2", array32_as("16", "boundary = \"periodic\"\n")),
        (
            "open strip 16x2 (dense)",
            array32_as("16", "boundary = \"open\"\n"),
        ),
        ("filling 1/3, ring of 16 wires", third("16")),
        ("filling 1/3, infinite", third("\"infinite\"")),
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
    // The dense strip's D M D by either route (`Auto` above picks one per
    // evaluation; benches/README.md).
    let sys = &layouts[1].1;
    let point = sys.model.params.defaults().to_vec();
    for (route, label) in [(DenseRoute::Full, "gemm"), (DenseRoute::Banded, "banded")] {
        let opts = FlowOptions {
            record: false,
            ..FlowOptions::default()
        };
        let mut flow = Flow::new(sys, opts);
        flow.dense_route = route;
        c.bench_function(
            &format!("target: flow open strip 16x2 (dense), {label} route"),
            |b| b.iter(|| flow.run(&point).expect("flow")),
        );
    }
    // The infinite array with its quadrature always checked by a second
    // flow on half the points (before the in-flow estimate of issue 15
    // item 4): the estimate's saving, measured in the same run.
    let sys = &layouts[3].1;
    let point = sys.model.params.defaults().to_vec();
    let mut flow = Flow::new(
        sys,
        FlowOptions {
            record: false,
            ..FlowOptions::default()
        },
    );
    flow.full_check = true;
    c.bench_function(
        "target: flow filling 1/3, infinite, second-flow check",
        |b| b.iter(|| flow.run(&point).expect("flow")),
    );
}

/// The listed terms of the 32-field ring flowing alone (no generated
/// terms), from the bare fixed point: the system the integrators compare on.
fn ring_rhs<'a>(
    sys: &System,
    flow: &'a Flow,
    point: &[f64],
) -> (pinflow::flow::rhs::FlowRhs<'a>, nalgebra::DVector<f64>) {
    use pinflow::flow::background::Background;
    let listed = flow.plan.listed;
    let channels: Vec<_> = flow.plan.channels[..listed].iter().collect();
    let ope: Vec<_> = flow
        .plan
        .ope
        .iter()
        .filter(|e| e.target < listed && e.a < listed && e.b < listed)
        .copied()
        .collect();
    let fp = sys.q_fixed_point(point, 16).expect("physical point");
    let bg = Background::Fourier { wires: 16, cell: 2 };
    let mut rhs = pinflow::flow::rhs::FlowRhs::new(bg, channels, vec![0.0; listed], ope);
    if let Some(q) = &sys.q {
        rhs.set_cell_kinv(&q.kinv);
    }
    rhs.record = false;
    let mut y = nalgebra::DVector::zeros(rhs.state_len());
    for (c, t) in sys.model.terms.iter().enumerate() {
        let (re, im) = flow.plan.channels[c].bare_amplitude(t.coupling.eval(point), 0.0);
        y[2 * c] = re;
        y[2 * c + 1] = im;
    }
    y.as_mut_slice()[2 * listed..].copy_from_slice(&fp.d);
    (rhs, y)
}

/// Issue 15 item 2: the flow's integrator (`pinflow::math::dop853`,
/// error measured on the couplings and on D separately) against
/// `ode_solvers`' Dormand-Prince 5(4) (the flow's integrator before) and its
/// DOP853, on the ring's flow equations (listed terms), from ell = 0 to the
/// first strong coupling, at the default tolerances (rtol 1e-8, atol
/// 1e-12). Prints the accepted steps and the ell reached of each once.
fn integrators(c: &mut Criterion<ThreadCpu>) {
    let sys = model();
    let point = sys.model.params.defaults().to_vec();
    let flow = Flow::new(&sys, FlowOptions::default());
    for name in ["Dopri5", "Dop853", "pinflow"] {
        let run = || integrate_ring(name, &sys, &flow, &point);
        let (steps, ell) = run();
        eprintln!("integrator {name}: {steps} accepted steps to ell = {ell:.10}");
        c.bench_function(
            &format!("integrator: ring flow to strong coupling, {name}"),
            |b| b.iter(run),
        );
    }
}

/// `ode_solvers`' view of the flow's equations.
struct Ode<'a, 'b>(&'a mut pinflow::flow::rhs::FlowRhs<'b>);

impl ode_solvers::System<f64, nalgebra::DVector<f64>> for Ode<'_, '_> {
    fn system(&self, _x: f64, y: &nalgebra::DVector<f64>, dy: &mut nalgebra::DVector<f64>) {
        self.0.derivative(y.as_slice(), dy.as_mut_slice());
    }
    fn solout(&mut self, x: f64, y: &nalgebra::DVector<f64>, _dy: &nalgebra::DVector<f64>) -> bool {
        self.0.after_step(x, y.as_slice())
    }
}

/// One integration of the ring's flow with `ode_solvers`' "Dopri5" (the
/// flow's former parameters), its "Dop853" (Hairer's step control: no PI
/// term, step ratio in [0.333, 6]) or the flow's own "pinflow" stepper:
/// (accepted steps, ell of the last step).
fn integrate_ring(name: &str, sys: &System, flow: &Flow, point: &[f64]) -> (usize, f64) {
    use ode_solvers::dop_shared::OutputType;
    let (mut rhs, y) = ring_rhs(sys, flow, point);
    let (rtol, atol, end, out) = (1e-8, 1e-12, 40.0, OutputType::Sparse);
    let ok = match name {
        "Dopri5" => ode_solvers::Dopri5::from_param(
            Ode(&mut rhs),
            0.0,
            end,
            0.0,
            y,
            rtol,
            atol,
            0.9,
            0.04,
            0.2,
            10.0,
            end,
            0.0,
            100_000,
            u32::MAX,
            out,
        )
        .integrate()
        .is_ok(),
        "Dop853" => ode_solvers::Dop853::from_param(
            Ode(&mut rhs),
            0.0,
            end,
            0.0,
            y,
            rtol,
            atol,
            0.9,
            0.0,
            0.333,
            6.0,
            end,
            0.0,
            100_000,
            u32::MAX,
            out,
        )
        .integrate()
        .is_ok(),
        _ => own_stepper(&mut rhs, y.as_slice(), end, rtol, atol),
    };
    assert!(ok && rhs.stop.is_some(), "{name} reached strong coupling");
    (rhs.steps, rhs.last_ell)
}

/// The flow's integration loop on one segment (as `src/flow/mod.rs` runs
/// it): error groups couplings | D.
fn own_stepper(
    rhs: &mut pinflow::flow::rhs::FlowRhs,
    y: &[f64],
    end: f64,
    rtol: f64,
    atol: f64,
) -> bool {
    use pinflow::math::dop853::{Control, Dop853};
    let mut dop = Dop853::new(y.len());
    dop.set_groups(&[2 * rhs.channels.len(), y.len()]);
    let control = Control {
        rtol,
        atol,
        max_attempts: 100_000,
    };
    dop.start(&*rhs, 0.0, y, end, control);
    loop {
        match dop.step(&*rhs) {
            Err(_) => return false,
            Ok(done) => {
                if rhs.after_step(dop.x(), dop.y()) || done {
                    return true;
                }
            }
        }
    }
}

/// K = diag(1, -1) per wire on n fields.
fn wires_k(n: usize) -> Vec<Vec<i64>> {
    (0..n)
        .map(|i| {
            (0..n)
                .map(|j| if i == j { 1 - 2 * (i as i64 % 2) } else { 0 })
                .collect()
        })
        .collect()
}

fn exact_inverse(c: &mut Criterion) {
    use pinflow::math::bareiss;
    let (k1024, k128) = (wires_k(1024), wires_k(128));
    c.bench_function("exact inverse: 1024 fields, block by block", |b| {
        b.iter(|| bareiss::det_and_inverse(&k1024).expect("invertible"))
    });
    c.bench_function("exact inverse: 128 fields, block by block", |b| {
        b.iter(|| bareiss::det_and_inverse(&k128).expect("invertible"))
    });
    c.bench_function("exact inverse: 128 fields, whole matrix", |b| {
        b.iter(|| bareiss::dense_det_and_inverse(&k128).expect("invertible"))
    });
}

criterion_group!(
    benches,
    dims_point,
    flow_point,
    infinite_against_dense,
    edges_nondiagonal_cell,
    infinite_flow,
    exact_inverse
);
criterion_group! {
    name = cpu;
    config = Criterion::default().with_measurement(ThreadCpu(WallTime));
    targets = targets, integrators
}
criterion_main!(benches, cpu);
