//! pinflow: fixed-point data, second-order RG flows, phase diagrams and
//! operator searches for coupled-wire and Luttinger-liquid models.
//!
//! Architecture (one module per concern; see DEVELOPERS.md):
//! - [`model`]: reading and validating model files (two stages: raw serde
//!   structs, then a checked [`model::Model`] with compiled expressions);
//! - [`lattice`]: the dense realisation (all fields, every term translate, V
//!   at a point);
//! - [`exact`] and [`invariants`]: exact rational algebra and the data that
//!   does not depend on V (filling, charges, spins, commutation, locality);
//! - [`fixed_point`]: the scaling-dimension matrix D and velocities;
//! - [`qspace`]: the same in q-space for periodic and infinite arrays;
//! - [`system`]: a model prepared once for evaluation at many points;
//! - [`dims`]: the `pinflow dims` report, and [`convergence`] its
//!   `--wires` form (dimensions against array size);
//! - [`flow`]: the second-order RG flow of competing couplings and D;
//! - [`scan`]: parameter grids, shards, resume, summaries and figures;
//! - [`search`]: the exhaustive operator search (`pinflow hunt`);
//! - [`edges`]: what a pinned set of terms leaves (`pinflow edges`);
//! - [`output`]: text, JSON, CSV, Markdown and LaTeX exporters;
//! - [`plot`]: figures (PNG and SVG, embedded font);
//! - [`cli`]: the command line.
//!
//! The method is weak-coupling perturbation theory around a Gaussian fixed
//! point; see the README for its limits.

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
