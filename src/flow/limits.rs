//! The limits checked before a flow starts: work that would run for
//! minutes without a word is refused unless `--force`, with an estimate and
//! the flag that overrides it. Owns the dense-path size limit; the closure's
//! channel limit lives with the closure ([`super::channels::check_closure`]).

use super::options::{Closure, FlowOptions};
use crate::core::system::{DenseWork, System};
use crate::error::Error;

/// Most fields a flow on the dense path (open arrays, explicit models)
/// integrates without `--force`: every right-hand side multiplies N x N
/// matrices, so the work grows like N^3 (benches/README.md, issue 19 table).
/// Periodic and infinite arrays flow per momentum q and are not limited.
pub const DENSE_FLOW_FIELDS_LIMIT: usize = 512;

/// Both checks before a flow (or a scan of flows): the closure's channel
/// count and the dense size. Each refusal names `--force`.
pub fn check_work(sys: &System, opts: &FlowOptions, force: bool) -> Result<(), Error> {
    let generate = opts.closure == Closure::Pairs;
    super::channels::check_closure(sys, generate, opts.closure_range, force)?;
    check_dense_size(sys, force)
}

/// Refuse a dense flow above [`DENSE_FLOW_FIELDS_LIMIT`] fields unless
/// `force` (E141 in docs/errors.md).
pub fn check_dense_size(sys: &System, force: bool) -> Result<(), Error> {
    sys.refuse_dense(DENSE_FLOW_FIELDS_LIMIT, force, DenseWork::Flow)
}
