//! The limits checked before a flow starts: work that would run for
//! minutes without a word is refused unless `--force`, with an estimate and
//! the flag that overrides it. Owns the dense-path size limit; the closure's
//! channel limit lives with the closure ([`super::channels::check_closure`]).

use super::options::{Closure, FlowOptions};
use crate::core::system::System;
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
/// `force`.
pub fn check_dense_size(sys: &System, force: bool) -> Result<(), Error> {
    let Some((n, factor)) = sys.dense_above(DENSE_FLOW_FIELDS_LIMIT, force) else {
        return Ok(());
    };
    Err(Error::refused(
        "--force",
        format!(
            "the flow of all {n} fields runs on dense matrices (an open array or an explicit model): every step multiplies {n} x {n} matrices, work growing like N^3, about {factor:.1} times that of {DENSE_FLOW_FIELDS_LIMIT} fields (the limit, several seconds per flow); pass --force to run it anyway, or use a periodic array (computed per momentum q)"
        ),
    ))
}
