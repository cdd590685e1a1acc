//! Limits of one computation: a cancellation flag and a memory budget.
//!
//! Every long computation takes a [`Guard`]. It checks [`Guard::check`]
//! between blocks of work (a relaxed atomic load, about a nanosecond), so
//! that a caller on another thread (the Python binding, when the user presses
//! Ctrl-C) can stop it with [`Guard::cancel`]; and it asks
//! [`Guard::reserve`] before allocating an output whose size it can tell in
//! advance, so that an input that would need more memory than the budget is
//! refused with the estimate instead of aborting the process.
//! Results never depend on the guard: a computation either finishes with the
//! same answer or fails.

use crate::error::{Error, Result};
use std::sync::atomic::{AtomicBool, Ordering};

/// Cancellation flag and memory budget of one computation.
#[derive(Debug)]
pub struct Guard {
    stopped: AtomicBool,
    memory_limit: u64,
}

impl Default for Guard {
    fn default() -> Self {
        Self::unlimited()
    }
}

impl Guard {
    /// A guard with a budget of `memory_limit` bytes for outputs.
    pub fn new(memory_limit: u64) -> Self {
        Self { stopped: AtomicBool::new(false), memory_limit }
    }

    /// A guard that is never cancelled by itself and allows any size (for
    /// tests and examples; the process may still run out of memory).
    pub fn unlimited() -> Self {
        Self::new(u64::MAX)
    }

    /// Ask the computation to stop at its next check.
    pub fn cancel(&self) {
        self.stopped.store(true, Ordering::Relaxed);
    }

    /// Whether [`cancel`](Self::cancel) was called.
    #[inline]
    pub fn is_cancelled(&self) -> bool {
        self.stopped.load(Ordering::Relaxed)
    }

    /// `Err(Interrupted)` once cancelled.
    #[inline]
    pub fn check(&self) -> Result<()> {
        if self.is_cancelled() {
            Err(Error::Interrupted)
        } else {
            Ok(())
        }
    }

    /// The budget in bytes.
    pub fn memory_limit(&self) -> u64 {
        self.memory_limit
    }

    /// Refuse when `bytes` (an estimate of what `what` needs) exceeds the
    /// budget; `advice` says how to need less.
    ///
    /// ```
    /// use vicino_core::guard::Guard;
    /// let g = Guard::new(1000);
    /// assert!(g.reserve(999.0, "a test", "nothing").is_ok());
    /// assert!(g.reserve(1001.0, "a test", "nothing").is_err());
    /// ```
    pub fn reserve(&self, bytes: f64, what: &'static str, advice: &'static str) -> Result<()> {
        if bytes > self.memory_limit as f64 {
            return Err(Error::TooLarge { what, needed: bytes, limit: self.memory_limit, advice });
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cancel_is_seen() {
        let g = Guard::unlimited();
        assert!(g.check().is_ok());
        g.cancel();
        assert_eq!(g.check(), Err(Error::Interrupted));
    }
}
