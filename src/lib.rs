//! pinflow: fixed-point data, second-order RG flows, phase diagrams and
//! operator searches for coupled-wire and Luttinger-liquid models.
//!
//! Layers, arrows only downwards (DEVELOPERS.md; `tests/layers.rs` checks):
//! - [`cli`]: the command line, the only module that knows clap, standard
//!   output, progress bars and exit codes;
//! - engines, each taking a [`core::system::System`] and plain options and
//!   returning a report: [`scan`] and [`edges`] over [`flow`] and
//!   [`search`] over [`dims`];
//! - [`core`]: one model at one point (lattice, invariants, momenta, the
//!   fixed point dense or per q, pinned phases);
//! - [`model`]: reading and validating model files;
//! - [`math`]: algorithms without physics, one file each;
//! - leaves: [`output`] (exporters), [`plot`] (figures), [`error`].
//!
//! The physics is in docs/physics.md. The method is weak-coupling
//! perturbation theory around a Gaussian fixed point, second order in the
//! couplings with a single reference velocity: see the README for its limits.

pub mod cli;
pub mod core;
pub mod dims;
pub mod edges;
pub mod error;
pub mod flow;
pub mod math;
pub mod model;
pub mod output;
pub mod plot;
pub mod scan;
pub mod search;
