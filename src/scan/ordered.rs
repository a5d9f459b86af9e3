//! Rows computed in parallel and handed on in index order.
//!
//! Every worker takes the next index from a shared counter, computes its
//! row and files it; rows whose predecessors are all filed join the ready
//! list, which the writer hands on in batches. Unlike chunks computed one
//! after the other, no worker waits at a chunk's end for the slowest row of
//! the chunk, so a scan's speed-up with threads is not capped by the spread
//! of flow times.
//!
//! Invariants: rows reach the sink in index order, each once, so the output
//! bytes do not depend on the number of threads; a worker takes no index
//! more than [`WINDOW`] ahead of the first row not yet filed, so the rows
//! held in memory stay bounded however slow one row is.

use std::collections::BTreeMap;
use std::ops::Range;
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::{Condvar, Mutex, MutexGuard};
use std::time::Duration;

use crate::error::Error;

/// Rows handed to the sink at once, unless [`PATIENCE`] runs out first.
const BATCH: usize = 64;

/// Longest wait before the rows ready so far are handed on (the progress
/// display, and rows on disk for a resume, stay current).
const PATIENCE: Duration = Duration::from_millis(250);

/// Most rows a worker may run ahead of the first row not yet filed.
const WINDOW: usize = 4096;

/// Compute `row(j)` for every `j` in `range` on the current rayon pool and
/// hand the rows to `sink` in index order, in batches. The calling thread
/// writes (and, inside a pool, also computes); `sink` is called on it only.
/// The first error of `sink` stops the workers and is returned.
pub fn compute_in_order<F>(
    range: Range<usize>,
    row: F,
    sink: &mut dyn FnMut(Vec<String>) -> Result<(), Error>,
) -> Result<(), Error>
where
    F: Fn(usize) -> String + Sync,
{
    if range.is_empty() {
        return Ok(());
    }
    let threads = rayon::current_num_threads().max(1);
    // A caller inside the pool is one of its threads: it computes too.
    let inside = rayon::current_thread_index().is_some();
    let spawned = if inside { threads - 1 } else { threads };
    let work = Work::new(range, row, spawned);
    let mut result = Ok(());
    rayon::in_place_scope(|s| {
        for _ in 0..spawned {
            // Without a sink, computing cannot fail.
            s.spawn(|_| drop(work.compute(None)));
        }
        result = if inside {
            work.compute(Some(sink))
        } else {
            work.write(sink)
        };
        if result.is_err() {
            work.halt();
        }
    });
    result?;
    let rest = std::mem::take(&mut work.lock().ready);
    if rest.is_empty() {
        Ok(())
    } else {
        sink(rest)
    }
}

/// Rows filed so far.
struct Queue {
    /// Rows in order, not yet handed on.
    ready: Vec<String>,
    /// Rows that arrived before a predecessor.
    early: BTreeMap<usize, String>,
    /// Index of the first row not yet filed.
    frontier: usize,
    /// Spawned workers still running.
    running: usize,
}

impl Queue {
    /// File row `j`; returns whether the frontier moved.
    fn put(&mut self, j: usize, row: String) -> bool {
        if j != self.frontier {
            self.early.insert(j, row);
            return false;
        }
        self.ready.push(row);
        self.frontier += 1;
        while let Some(r) = self.early.remove(&self.frontier) {
            self.ready.push(r);
            self.frontier += 1;
        }
        true
    }
}

/// The state shared by the workers and the writer.
struct Work<F> {
    row: F,
    next: AtomicUsize,
    end: usize,
    stop: AtomicBool,
    queue: Mutex<Queue>,
    /// Signals the writer: a batch is ready or a worker finished.
    filled: Condvar,
    /// Signals waiting workers: the frontier moved (or the work stopped).
    room: Condvar,
}

impl<F: Fn(usize) -> String + Sync> Work<F> {
    fn new(range: Range<usize>, row: F, spawned: usize) -> Self {
        Work {
            row,
            next: AtomicUsize::new(range.start),
            end: range.end,
            stop: AtomicBool::new(false),
            queue: Mutex::new(Queue {
                ready: Vec::new(),
                early: BTreeMap::new(),
                frontier: range.start,
                running: spawned,
            }),
            filled: Condvar::new(),
            room: Condvar::new(),
        }
    }

    /// The queue (a panic elsewhere does not make it unusable: the panic
    /// itself reaches the caller at the end of the scope).
    fn lock(&self) -> MutexGuard<'_, Queue> {
        self.queue.lock().unwrap_or_else(|e| e.into_inner())
    }

    /// Stop handing out indices and wake every waiting worker.
    fn halt(&self) {
        self.stop.store(true, Ordering::SeqCst);
        let _q = self.lock();
        self.room.notify_all();
    }

    /// The next index to compute, once it is within [`WINDOW`] of the
    /// frontier; `None` when every index is taken or the work stopped.
    fn take(&self) -> Option<usize> {
        if self.stop.load(Ordering::SeqCst) {
            return None;
        }
        let j = self.next.fetch_add(1, Ordering::SeqCst);
        if j >= self.end {
            return None;
        }
        let mut q = self.lock();
        while j >= q.frontier + WINDOW && !self.stop.load(Ordering::SeqCst) {
            q = self.room.wait(q).unwrap_or_else(|e| e.into_inner());
        }
        (!self.stop.load(Ordering::SeqCst)).then_some(j)
    }

    /// Compute rows until none is left. A spawned worker (`sink` None)
    /// only files them; the caller inside the pool also hands on each full
    /// batch.
    fn compute(
        &self,
        mut sink: Option<&mut dyn FnMut(Vec<String>) -> Result<(), Error>>,
    ) -> Result<(), Error> {
        let _finished = Finished(self, sink.is_none());
        while let Some(j) = self.take() {
            let row = (self.row)(j);
            let batch = {
                let mut q = self.lock();
                if q.put(j, row) {
                    self.room.notify_all();
                }
                if q.ready.len() >= BATCH {
                    self.filled.notify_one();
                    if sink.is_some() {
                        std::mem::take(&mut q.ready)
                    } else {
                        Vec::new()
                    }
                } else {
                    Vec::new()
                }
            };
            if let (Some(s), false) = (sink.as_mut(), batch.is_empty()) {
                s(batch)?;
            }
        }
        Ok(())
    }

    /// The writer outside the pool: hand on each batch (or what is ready
    /// when [`PATIENCE`] runs out) until every spawned worker finished.
    fn write(&self, sink: &mut dyn FnMut(Vec<String>) -> Result<(), Error>) -> Result<(), Error> {
        loop {
            let (batch, last) = {
                let mut q = self.lock();
                while q.ready.len() < BATCH && q.running > 0 {
                    let (g, wait) = self
                        .filled
                        .wait_timeout(q, PATIENCE)
                        .unwrap_or_else(|e| e.into_inner());
                    q = g;
                    if wait.timed_out() {
                        break;
                    }
                }
                (std::mem::take(&mut q.ready), q.running == 0)
            };
            if !batch.is_empty() {
                sink(batch)?;
            }
            if last {
                return Ok(());
            }
        }
    }
}

/// Counts a spawned worker (`.1`) out when it ends, so that the writer
/// never waits for it; a worker ended by a panic also halts the others (its
/// row never comes, and a worker waiting for room would wait for ever), and
/// the panic reaches the caller at the end of the scope.
struct Finished<'a, F: Fn(usize) -> String + Sync>(&'a Work<F>, bool);

impl<F: Fn(usize) -> String + Sync> Drop for Finished<'_, F> {
    fn drop(&mut self) {
        if std::thread::panicking() {
            self.0.halt();
        }
        if self.1 {
            let mut q = self.0.lock();
            q.running -= 1;
            self.0.filled.notify_one();
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The rows of `range` from the global pool (the command line's case,
    /// the writer outside the pool) and from inside a pool of `threads`
    /// (the Python package's case, the caller computes too): the same.
    fn collect(
        range: Range<usize>,
        threads: usize,
        row: impl Fn(usize) -> String + Sync,
    ) -> Vec<String> {
        let run = || {
            let mut out = Vec::new();
            let mut sink = |rows: Vec<String>| {
                assert!(!rows.is_empty());
                out.extend(rows);
                Ok(())
            };
            compute_in_order(range.clone(), &row, &mut sink).map(|_| out)
        };
        let outside = run().unwrap();
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        let inside = pool.install(run).unwrap();
        assert_eq!(outside, inside);
        inside
    }

    #[test]
    fn rows_arrive_in_index_order_whatever_the_threads() {
        // Uneven row times, so that rows finish out of order.
        let row = |j: usize| {
            let spin = (j * 7919) % 13;
            std::thread::sleep(Duration::from_micros(spin as u64 * 20));
            format!("{j}\n")
        };
        let want: Vec<String> = (5..700).map(|j| format!("{j}\n")).collect();
        for threads in [1, 2, 3] {
            assert_eq!(collect(5..700, threads, row), want, "{threads} threads");
        }
    }

    #[test]
    fn a_failing_sink_stops_the_work_and_its_error_is_returned() {
        let computed = AtomicUsize::new(0);
        let row = |j: usize| {
            computed.fetch_add(1, Ordering::SeqCst);
            format!("{j}\n")
        };
        let mut sink = |_rows: Vec<String>| {
            Err(Error::io(
                std::path::Path::new("points"),
                std::io::Error::other("disk full"),
            ))
        };
        let e = compute_in_order(0..50_000, row, &mut sink).unwrap_err();
        assert!(e.to_string().contains("disk full"), "{e}");
        assert!(computed.load(Ordering::SeqCst) < 50_000);
    }

    #[test]
    fn a_panicking_row_reaches_the_caller_instead_of_a_hang() {
        // Row 3 never comes; without the halt the others would wait for
        // room behind it for ever (the range is far wider than the window).
        let row = |j: usize| {
            assert!(j != 3, "row 3 fails");
            format!("{j}\n")
        };
        let run = std::panic::catch_unwind(|| {
            let mut sink = |_rows: Vec<String>| Ok(());
            compute_in_order(0..4 * WINDOW, row, &mut sink)
        });
        assert!(run.is_err());
    }

    #[test]
    fn an_empty_range_calls_nothing() {
        let mut sink = |_rows: Vec<String>| -> Result<(), Error> { panic!("no rows") };
        compute_in_order(3..3, |_| unreachable!(), &mut sink).unwrap();
    }
}
