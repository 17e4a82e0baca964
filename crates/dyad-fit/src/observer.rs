//! How a caller follows a workflow while it runs: messages, warnings and
//! the sampler's progress reports arrive at an [`Observer`] the caller
//! implements (the `dyad` binary draws its progress line from them; a
//! batch runner may log them or ignore them with [`Silent`]).
//!
//! Cancelling is separate: a workflow that samples takes a
//! [`CancelFlag`]; setting it (from a Ctrl-C handler, another thread, a
//! time limit) makes the sampler checkpoint and return at the next step.

use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;

use dyad_sampler::Progress;

/// Receives what a running workflow has to say. Every method has an empty
/// default, so an implementation picks what it wants.
pub trait Observer {
    /// What the workflow is doing or found ("searching for a starting
    /// point ...", a run's description), for a person to read.
    fn message(&mut self, _text: &str) {}
    /// Something the user should know about the result (an unconverged
    /// chain, a stuck walker, a sparse orbit sampled without tempering).
    fn warning(&mut self, _text: &str) {}
    /// A sampling run of at most `max_steps` steps starts.
    fn sampling_started(&mut self, _max_steps: u64) {}
    /// A progress report of the running sampler.
    fn sampling_progress(&mut self, _progress: &Progress) {}
    /// The sampling run returned.
    fn sampling_finished(&mut self) {}
    /// `done` of `total` independent items (calibration systems) are done.
    fn items_done(&mut self, _done: usize, _total: usize) {}
}

/// An observer that ignores everything.
#[derive(Debug, Clone, Copy, Default)]
pub struct Silent;

impl Observer for Silent {}

/// A flag that asks a running workflow to stop (checkpointed, resumable).
#[derive(Debug, Clone, Default)]
pub struct CancelFlag(Arc<AtomicBool>);

impl CancelFlag {
    /// A flag not yet set.
    pub fn new() -> Self {
        Self::default()
    }

    /// Asks the workflow to stop.
    pub fn cancel(&self) {
        self.0.store(true, Ordering::SeqCst);
    }

    /// Whether stopping was asked for.
    pub fn is_cancelled(&self) -> bool {
        self.0.load(Ordering::SeqCst)
    }

    /// The shared flag the sampler polls.
    pub(crate) fn shared(&self) -> Arc<AtomicBool> {
        self.0.clone()
    }
}
