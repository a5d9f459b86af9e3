//! `pinflow._native`: the Python extension over the pinflow library.
//!
//! Owns only the crossing between Python and the library: converting
//! keyword arguments into the library's plain option structs, releasing
//! the GIL while an engine runs, and turning library errors into
//! `pinflow.InputError` / `pinflow.RunError`. Every number comes from the
//! library's engines and leaves as the library's own serialisation (the
//! report's JSON, its CSV table, its text), so the Python package shows
//! exactly what the command line writes. Nothing is computed here.
//!
//! Invariant: no function here formats a number or names a column; the
//! Python layer (`pinflow/__init__.py`) turns JSON into Python objects and
//! CSV into DataFrames.

mod args;
mod errors;

use std::path::PathBuf;

use pinflow::core::system::System;
use pinflow::dims::convergence::ConvergenceReport;
use pinflow::dims::{DimsOptions, DimsReport};
use pinflow::edges::pins::{self, Selection};
use pinflow::edges::{analyse, report::EdgesReport};
use pinflow::error::{Error, InputError};
use pinflow::flow::competitors::flow_once;
use pinflow::flow::report::FlowReport;
use pinflow::flow::{FlowOptions, Outcome};
use pinflow::output::provenance::{self, Provenance};
use pinflow::output::{self, Format, Report};
use pinflow::scan::run::{check_size, resolve_axes, run_to_dir};
use pinflow::scan::{folder, partial_path, Scan, ScanSpec};
use pinflow::search::{emit_terms, hunt, smallest_coupling, HuntOptions};
use pyo3::prelude::*;
use pyo3::types::PyDict;
use serde::Serialize;

use args::{flow_overrides, hunt_filters, point_overrides};
use errors::{to_py, RunError};

/// A validated model made ready for evaluation (the library's `System`),
/// with the bytes of its file (a scan's fingerprint hashes them).
#[pyclass(module = "pinflow._native", frozen)]
struct Model {
    sys: System,
    bytes: Vec<u8>,
}

/// The renderings of one report: its JSON, its CSV table and its text.
fn renderings<R: Report + Serialize>(r: &R) -> Result<(String, String, String), Error> {
    Ok((
        output::render(r, Format::Json)?,
        output::render(r, Format::Csv)?,
        output::render(r, Format::Text)?,
    ))
}

impl Model {
    /// The provenance of a run on this model at `point`, made by the
    /// Python package (caller "python"; `arguments` the keyword arguments
    /// as given, `options` as the command records them).
    fn provenance(
        &self,
        command: &str,
        arguments: Vec<String>,
        point: &[f64],
        options: serde_json::Value,
    ) -> Provenance {
        let names = self.sys.model.params.names().iter().cloned();
        let file = (self.sys.model.file.as_str(), self.bytes.as_slice());
        let values = names.zip(point.iter().copied());
        let mut prov = Provenance::for_model(command, arguments, file, values, options);
        prov.caller = Some("python".to_string());
        prov.parameter_labels = self.sys.model.params.labels_json();
        prov
    }
}

#[pymethods]
impl Model {
    /// Load a model file (TOML).
    #[staticmethod]
    fn load(py: Python<'_>, path: PathBuf) -> PyResult<Model> {
        let file = path.display().to_string();
        py.allow_threads(|| {
            let sys = System::load(&path)?;
            let bytes = std::fs::read(&path).map_err(|e| Error::io(&path, e))?;
            Ok(Model { sys, bytes })
        })
        .map_err(|e| to_py(e, &file))
    }

    /// Read a model from TOML text; `file` names it in error messages.
    #[staticmethod]
    #[pyo3(signature = (text, file = "<string>"))]
    fn from_toml(py: Python<'_>, text: String, file: &str) -> PyResult<Model> {
        py.allow_threads(|| {
            let model = pinflow::model::Model::parse(&text, file)?;
            Ok(Model {
                sys: System::new(model)?,
                bytes: text.into_bytes(),
            })
        })
        .map_err(|e: Error| to_py(e, file))
    }

    /// The model's name.
    #[getter]
    fn name(&self) -> String {
        self.sys.model.name.clone()
    }

    /// The file the model was read from (or the name given to `from_toml`).
    #[getter]
    fn file(&self) -> String {
        self.sys.model.file.clone()
    }

    /// The model's TOML text, as read (`Model.from_toml(source, file)`
    /// rebuilds the same model: how a Model travels to a process pool).
    #[getter]
    fn source(&self) -> String {
        String::from_utf8_lossy(&self.bytes).into_owned()
    }

    /// Parameter names and default values, in the library's order.
    fn params(&self) -> Vec<(String, f64)> {
        let p = &self.sys.model.params;
        p.names()
            .iter()
            .cloned()
            .zip(p.defaults().iter().copied())
            .collect()
    }

    /// The names of the model's terms, in order.
    fn terms(&self) -> Vec<String> {
        self.sys
            .model
            .terms
            .iter()
            .map(|t| t.name.clone())
            .collect()
    }

    /// `pinflow dims`: (json, csv, text); with `wires`, the convergence
    /// report of `--wires` instead. `force`: `--force` (the dense size
    /// limit).
    #[pyo3(signature = (point, pin, wires = None, force = false))]
    fn dims(
        &self,
        py: Python<'_>,
        point: &Bound<'_, PyDict>,
        pin: Vec<String>,
        wires: Option<Vec<Bound<'_, PyAny>>>,
        force: bool,
    ) -> PyResult<(String, String, String)> {
        let set = point_overrides(point)?;
        let sizes = args::wire_counts(wires)?;
        self.run(py, |sys| {
            let point = sys.model.point_with(&set, "point")?;
            if let Some(sizes) = &sizes {
                if !pin.is_empty() {
                    return Err(InputError::new(
                        "command line",
                        "--pin",
                        "cannot be combined with wires",
                    )
                    .into());
                }
                return renderings(&ConvergenceReport::build(
                    &sys.model, &point, sizes, "wires",
                )?);
            }
            pinflow::dims::check_size(sys, force)?;
            let opts = DimsOptions {
                pins: pin,
                ..Default::default()
            };
            let mut report = DimsReport::build_opts(sys, &point, &opts)?;
            pinflow::search::breaks::annotate(sys, &point, &mut report)?;
            renderings(&report)
        })
    }

    /// `pinflow flow`: (json, csv, text, trajectory csv); with `out`, also
    /// the command's files in that directory. `force`: `--force` (the
    /// closure's work limit and the dense size limit).
    #[pyo3(signature = (point, options, out = None, force = false))]
    fn flow(
        &self,
        py: Python<'_>,
        point: &Bound<'_, PyDict>,
        options: &Bound<'_, PyDict>,
        out: Option<PathBuf>,
        force: bool,
    ) -> PyResult<(String, String, String, String)> {
        let set = point_overrides(point)?;
        let over = flow_overrides(options)?;
        let comp = args::competitors(&self.sys, options)?.map(|c| c.forced(force));
        let recorded_competitors = args::recorded_competitors(options)?;
        let mut arguments = args::recorded(&[], point, options)?;
        if force {
            arguments.push("force=True".to_string());
        }
        self.run(py, |sys| {
            if let Some(d) = &out {
                output::check_output_dir(d, "out")?;
            }
            let point = sys.model.point_with(&set, "point")?;
            let opts = FlowOptions::resolve(&sys.model, &over)?;
            check_flow_work(sys, &opts, force)?;
            // As `pinflow flow` records them: the options after defaults,
            // the competitor options as given.
            let recorded = serde_json::json!({"flow": opts, "competitors": recorded_competitors});
            let prov = self.provenance("flow", arguments, &point, recorded);
            let result = flow_once(sys, &point, &opts, comp)?;
            let names = sys.model.params.names();
            let report = FlowReport::new(&sys.model.name, names, &point, result, opts)
                .with_labels(&sys.model.params)
                .with_symmetry_notes(sys, &point)?;
            check_flow(sys, &point, &report)?;
            if let Some(d) = &out {
                report.write_dir(d)?;
                provenance::stamp_dir(d, &prov)?;
            }
            let (json, csv, text) = renderings(&report)?;
            Ok((json, csv, text, report.trajectory_csv()?))
        })
    }

    /// `pinflow scan` into the directory `out`: returns summary.json's text.
    /// `force`: `--force` (grid size, closure and dense size limits); `overwrite`:
    /// `--overwrite` (a folder holding another scan's files). The folder
    /// is locked while the scan runs, as by the command.
    #[pyo3(signature = (point, x, y, options, out, threads = None, force = false, color_by = "phase", overwrite = false))]
    #[allow(clippy::too_many_arguments)]
    fn scan(
        &self,
        py: Python<'_>,
        point: &Bound<'_, PyDict>,
        x: Option<String>,
        y: Option<String>,
        options: &Bound<'_, PyDict>,
        out: PathBuf,
        threads: Option<usize>,
        force: bool,
        color_by: &str,
        overwrite: bool,
    ) -> PyResult<String> {
        let set = point_overrides(point)?;
        let over = flow_overrides(options)?;
        let competitors = args::competitors(&self.sys, options)?.map(|c| c.forced(force));
        let recorded_competitors = args::recorded_competitors(options)?;
        let by = args::color_by(color_by)?;
        let pool = thread_pool(threads)?;
        let mut arguments = args::recorded(&[("x", &x), ("y", &y)], point, options)?;
        if force {
            arguments.push("force=True".to_string());
        }
        if overwrite {
            arguments.push("overwrite=True".to_string());
        }
        arguments.push(format!("color_by={color_by}"));
        self.run(py, |sys| {
            let base = sys.model.point_with(&set, "point")?;
            let axes = resolve_axes(&sys.model, x.as_deref(), y.as_deref())?;
            let options = FlowOptions::resolve(&sys.model, &over)?;
            check_flow_work(sys, &options, force)?;
            let recorded = serde_json::json!({
                "flow": options,
                "competitors": recorded_competitors,
                "color_by": color_by,
            });
            let mut prov = self.provenance("scan", arguments, &base, recorded);
            prov.grid = axes.iter().map(|a| a.spec()).collect();
            let spec = ScanSpec {
                axes,
                base,
                options,
                shard: None,
                competitors,
            };
            let scan = Scan::new(sys, &self.bytes, spec)?;
            check_size(scan.points(), force)?;
            output::check_output_dir(&out, "out")?;
            let partial = partial_path(&out, None);
            let lock = folder::claim(&out, None, || {
                folder::check_whole(&out, &partial, overwrite, (None, Some(&prov)))
            })?;
            let summary = pool.install(|| run_to_dir(&scan, &out, by, "out", Some(&prov)))?;
            drop(lock);
            output::to_json(&summary)
        })
    }

    /// `pinflow hunt`: (json, csv, text, the [[term]] blocks of `--emit-terms`).
    #[pyo3(signature = (point, max_dim, charge, spin, range, momentum, force, symmetry = None, coupling = None))]
    #[allow(clippy::too_many_arguments)]
    fn hunt(
        &self,
        py: Python<'_>,
        point: &Bound<'_, PyDict>,
        max_dim: &Bound<'_, PyAny>,
        charge: &Bound<'_, PyAny>,
        spin: &Bound<'_, PyAny>,
        range: Option<Bound<'_, PyAny>>,
        momentum: Option<String>,
        force: bool,
        symmetry: Option<Bound<'_, PyAny>>,
        coupling: Option<Bound<'_, PyAny>>,
    ) -> PyResult<(String, String, String, String)> {
        let set = point_overrides(point)?;
        let f = hunt_filters(charge, spin, range, momentum.as_deref())?;
        let symmetry = args::symmetry(symmetry.as_ref(), "symmetry")?;
        let coupling = coupling
            .filter(|c| !c.is_none())
            .map(|c| args::number(&c, "coupling"))
            .transpose()?;
        let opts = HuntOptions {
            max_dim: args::number(max_dim, "max_dim")?,
            charge: f.charge,
            spin: f.spin,
            range: f.range,
            momentum: f.momentum,
            force,
            symmetry,
            ..Default::default()
        };
        self.run(py, |sys| {
            let point = sys.model.point_with(&set, "point")?;
            let report = hunt(sys, &point, &opts)?;
            let (json, csv, text) = renderings(&report)?;
            let y = coupling.unwrap_or_else(|| smallest_coupling(sys, &point));
            Ok((json, csv, text, emit_terms(&report, &sys.model, y)))
        })
    }

    /// `pinflow edges`: (json, csv, text). `force`: `--force` (the size
    /// limit, and the closure's work limit when the flow picks the pins).
    #[pyo3(signature = (point, pin, window, options, force = false))]
    fn edges(
        &self,
        py: Python<'_>,
        point: &Bound<'_, PyDict>,
        pin: Vec<String>,
        window: Option<Bound<'_, PyAny>>,
        options: &Bound<'_, PyDict>,
        force: bool,
    ) -> PyResult<(String, String, String)> {
        let set = point_overrides(point)?;
        let over = flow_overrides(options)?;
        args::no_competitors(options)?;
        let window = args::window(window)?;
        self.run(py, |sys| {
            let point = sys.model.point_with(&set, "point")?;
            pinflow::edges::check_size(sys, force)?;
            let opts = FlowOptions::resolve(&sys.model, &over)?;
            if pin.is_empty() {
                check_flow_work(sys, &opts, force)?;
            }
            let selection: Selection = if pin.is_empty() {
                pins::from_flow(sys, &point, opts)?
            } else {
                pins::from_names(sys, &pin)?
            };
            let analysis = analyse(sys, &selection.pinned, window)?;
            renderings(&EdgesReport::new(sys, &point, &selection, &analysis))
        })
    }
}

impl Model {
    /// Run `f` on the system with the GIL released; errors become Python
    /// exceptions (a point where V is not positive definite is an input
    /// error of the model file, as on the command line).
    fn run<T: Send>(
        &self,
        py: Python<'_>,
        f: impl FnOnce(&System) -> Result<T, Error> + Send,
    ) -> PyResult<T> {
        py.allow_threads(|| f(&self.sys))
            .map_err(|e| to_py(e, &self.sys.model.file))
    }
}

/// What `pinflow flow` turns into a failure after its report: an
/// unphysical point (input) and a failed integration (run).
fn check_flow(sys: &System, point: &[f64], report: &FlowReport) -> Result<(), Error> {
    let msg = report.result.message.clone().unwrap_or_default();
    match report.result.outcome {
        Outcome::Unphysical => {
            Err(pinflow::error::InputError::new(&sys.model.file, "", msg).into())
        }
        Outcome::Failed => Err(Error::Numerical(format!(
            "{}: the flow failed at {}: {msg}",
            sys.model.file,
            sys.model.params.describe(point)
        ))),
        _ => Ok(()),
    }
}

/// The closure's work limit and the dense size limit, as the commands
/// apply them (`pinflow::flow::limits::check_work`).
fn check_flow_work(sys: &System, opts: &FlowOptions, force: bool) -> Result<(), Error> {
    pinflow::flow::limits::check_work(sys, opts, force)
}

/// A thread pool of `threads` workers (None: rayon's default, all cores).
fn thread_pool(threads: Option<usize>) -> PyResult<rayon::ThreadPool> {
    if threads == Some(0) {
        return Err(errors::input("threads", "must be at least 1"));
    }
    let mut b = rayon::ThreadPoolBuilder::new();
    if let Some(n) = threads {
        b = b.num_threads(n);
    }
    b.build()
        .map_err(|e| RunError::new_err(format!("cannot start the worker threads: {e}")))
}

/// Run the `pinflow` command line with these arguments (the first is the
/// program name); returns the exit code. The GIL is released meanwhile.
#[pyfunction]
fn run_cli(py: Python<'_>, argv: Vec<String>) -> i32 {
    py.allow_threads(|| pinflow::cli::main_with(argv))
}

/// The module.
#[pymodule]
fn _native(m: &Bound<'_, PyModule>) -> PyResult<()> {
    let py = m.py();
    m.add_class::<Model>()?;
    m.add_function(wrap_pyfunction!(run_cli, m)?)?;
    m.add("InputError", py.get_type::<errors::InputError>())?;
    m.add("RunError", py.get_type::<RunError>())?;
    m.add("__version__", env!("CARGO_PKG_VERSION"))?;
    m.add("FLOW_OPTIONS", args::FLOW_OPTIONS.to_vec())?;
    Ok(())
}
