//! Running a workflow from Python: on a thread of its own with the GIL
//! released, while the calling thread forwards its progress to a Python
//! reporter and polls Python's signal handlers every tenth of a second.
//!
//! Ctrl-C (a `KeyboardInterrupt`, in a terminal or a notebook) sets the
//! workflow's [`CancelFlag`]: the sampler checkpoints and returns at its
//! next step, and only then is the interrupt raised, so a run folder is
//! left resumable and nothing is half-written. A panic in the workflow (a
//! bug) becomes a `dyad.DyadError` instead of crossing into Python.

use std::panic::{catch_unwind, AssertUnwindSafe};
use std::sync::mpsc::{channel, RecvTimeoutError, Sender};
use std::thread;
use std::time::Duration;

use dyad_fit::{CancelFlag, Observer, Progress};
use pyo3::prelude::*;

use crate::errors::{fit_error, DyadError};

/// How often the calling thread looks for signals (and progress).
const POLL: Duration = Duration::from_millis(100);

/// What the workflow thread tells the calling thread.
enum Event {
    Message(String),
    Warning(String),
    Started(u64),
    Progress {
        step: u64,
        max_steps: u64,
        acceptance: f64,
        eta_seconds: Option<f64>,
    },
    Finished,
}

/// An observer that sends what it hears to the calling thread.
struct Forward(Sender<Event>);

impl Forward {
    fn send(&self, event: Event) {
        // The receiver lives until the workflow thread ends.
        let _ = self.0.send(event);
    }
}

impl Observer for Forward {
    fn message(&mut self, text: &str) {
        self.send(Event::Message(text.to_owned()));
    }
    fn warning(&mut self, text: &str) {
        self.send(Event::Warning(text.to_owned()));
    }
    fn sampling_started(&mut self, max_steps: u64) {
        self.send(Event::Started(max_steps));
    }
    fn sampling_progress(&mut self, p: &Progress) {
        self.send(Event::Progress {
            step: p.step,
            // The steps the stopping rule expects to need, never fewer than done.
            max_steps: p.target_steps.unwrap_or(p.max_steps).max(p.step),
            acceptance: p.acceptance,
            eta_seconds: p.eta.map(|d| d.as_secs_f64()),
        });
    }
    fn sampling_finished(&mut self) {
        self.send(Event::Finished);
    }
}

/// Calls the reporter's method for `event` (a reporter is any object with
/// `message`, `warning`, `started`, `progress` and `finished` methods).
fn report(reporter: &Bound<'_, PyAny>, event: Event) -> PyResult<()> {
    match event {
        Event::Message(text) => reporter.call_method1("message", (text,)),
        Event::Warning(text) => reporter.call_method1("warning", (text,)),
        Event::Started(max_steps) => reporter.call_method1("started", (max_steps,)),
        Event::Progress {
            step,
            max_steps,
            acceptance,
            eta_seconds,
        } => reporter.call_method1("progress", (step, max_steps, acceptance, eta_seconds)),
        Event::Finished => reporter.call_method0("finished"),
    }
    .map(|_| ())
}

/// The text of a panic's payload.
fn panic_text(payload: &(dyn std::any::Any + Send)) -> String {
    payload
        .downcast_ref::<&str>()
        .map(|s| (*s).to_owned())
        .or_else(|| payload.downcast_ref::<String>().cloned())
        .unwrap_or_else(|| "a panic".to_owned())
}

/// Runs `work` on its own thread with the GIL released (see the module docs).
pub(crate) fn run<T, W>(py: Python<'_>, reporter: Option<&Bound<'_, PyAny>>, work: W) -> PyResult<T>
where
    T: Send + 'static,
    W: FnOnce(&mut dyn Observer, &CancelFlag) -> dyad_fit::Result<T> + Send + 'static,
{
    let (sender, mut receiver) = channel();
    let cancel = CancelFlag::new();
    let flag = cancel.clone();
    let worker = thread::Builder::new()
        .name("dyad-workflow".to_owned())
        .spawn(move || {
            let mut observer = Forward(sender);
            catch_unwind(AssertUnwindSafe(|| work(&mut observer, &flag)))
        })
        .map_err(|e| DyadError::new_err(format!("cannot start the workflow thread: {e}")))?;
    // The first Python exception (KeyboardInterrupt, or one raised by the
    // reporter) stops the run; it is raised once the run has stopped.
    let mut interrupt: Option<PyErr> = None;
    loop {
        // The receiver is moved in and out: it may not be shared across threads.
        let (back, event) = py.detach(move || {
            let event = receiver.recv_timeout(POLL);
            (receiver, event)
        });
        receiver = back;
        match event {
            Ok(event) => {
                if let (None, Some(reporter)) = (&interrupt, reporter) {
                    if let Err(e) = report(reporter, event) {
                        cancel.cancel();
                        interrupt = Some(e);
                    }
                }
            }
            Err(RecvTimeoutError::Timeout) => {}
            Err(RecvTimeoutError::Disconnected) => break,
        }
        if interrupt.is_none() {
            if let Err(e) = py.check_signals() {
                cancel.cancel();
                interrupt = Some(e);
            }
        }
    }
    let joined = py.detach(|| worker.join());
    let outcome = match joined {
        Ok(Ok(result)) => result,
        Ok(Err(payload)) | Err(payload) => {
            return Err(DyadError::new_err(format!(
                "internal error in dyad (please report it): {}",
                panic_text(payload.as_ref())
            )))
        }
    };
    if let Some(e) = interrupt {
        return Err(e);
    }
    outcome.map_err(fit_error)
}
