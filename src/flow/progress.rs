//! Progress of a flow's integration, for long flows (a 2048-field array, a
//! 200-term closure): a hook called with (ell reached, ell_max) after
//! accepted steps, at most once per chosen interval of wall time.
//!
//! The hook is installed for the duration of one [`super::Flow::run_with_progress`]
//! on the calling thread (a thread-local slot, restored afterwards, also on
//! unwinding), so the integration loop and its many callers (stages, the
//! Kosterlitz-Thouless extension) need no extra argument. Invariants: no
//! hook, no work beyond one thread-local lookup per accepted step; a hook
//! never changes the flow (it sees ell only), so results are identical
//! with and without it; the calls' ell never decreases within a stage.

use std::cell::RefCell;
use std::time::{Duration, Instant};

/// A progress hook: (ell reached, ell_max).
pub type Hook = Box<dyn FnMut(f64, f64)>;

struct Slot {
    hook: Hook,
    every: Duration,
    last: Instant,
}

thread_local! {
    static SLOT: RefCell<Option<Slot>> = const { RefCell::new(None) };
}

/// Run `f` with `hook` installed on this thread, called at most once per
/// `every` (Duration::ZERO: after every accepted step); the first call
/// comes `every` after the start.
pub(super) fn with_hook<T>(every: Duration, hook: Hook, f: impl FnOnce() -> T) -> T {
    struct Restore(Option<Slot>);
    impl Drop for Restore {
        fn drop(&mut self) {
            let old = self.0.take();
            SLOT.with(|s| *s.borrow_mut() = old);
        }
    }
    let slot = Slot {
        hook,
        every,
        last: Instant::now(),
    };
    let _restore = Restore(SLOT.with(|s| s.borrow_mut().replace(slot)));
    f()
}

/// After an accepted step: call the hook when one is installed and its
/// interval has passed.
pub(super) fn tick(ell: f64, ell_max: f64) {
    SLOT.with(|s| {
        let Ok(mut slot) = s.try_borrow_mut() else {
            return;
        };
        if let Some(slot) = slot.as_mut() {
            let now = Instant::now();
            if now.duration_since(slot.last) >= slot.every {
                slot.last = now;
                (slot.hook)(ell, ell_max);
            }
        }
    });
}
