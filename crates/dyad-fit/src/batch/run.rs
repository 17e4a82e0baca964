//! Running one shard of a batch: every system of the shard, in manifest
//! order, each in its own run folder. A finished system is skipped, one
//! with a checkpoint resumes from it, the rest start afresh; an error (or
//! a panic) of one system is recorded and the shard goes on with the next.
//! When the cancel flag is set (Ctrl-C, or SIGTERM from a scheduler that
//! preempts the job) the running system checkpoints and the shard stops.

use std::fs;
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};
use std::time::Duration;

use serde::{Deserialize, Serialize};

use crate::batch::manifest::{system_config, Manifest, SystemEntry};
use crate::batch::record::{SystemRecord, SystemResult, SystemState};
use crate::batch::shard::Shard;
use crate::error::{bail, Context, Result};
use crate::fit::{FitRequest, FitResult, FitRun, Outcome};
use crate::observer::{CancelFlag, Observer};
use crate::run_folder::{read_json, write_text, RunFiles};
use dyad_sampler::Progress;

/// The files of a batch's output folder.
#[derive(Debug, Clone)]
pub struct BatchFolder {
    /// The output folder.
    pub root: PathBuf,
}

impl BatchFolder {
    /// The output folder `root`.
    pub fn new(root: impl Into<PathBuf>) -> Self {
        Self { root: root.into() }
    }
    /// What the batch is made of: the manifest and the base configuration.
    pub fn inputs(&self) -> PathBuf {
        self.root.join("batch.json")
    }
    /// The configuration made for `system`.
    pub fn config(&self, system: &str) -> PathBuf {
        self.root.join("configs").join(format!("{system}.toml"))
    }
    /// The run folder of `system`.
    pub fn run_folder(&self, system: &str) -> PathBuf {
        self.root.join("systems").join(system)
    }
    /// The lock file of `system` (held while a process runs it).
    pub fn lock(&self, system: &str) -> PathBuf {
        self.root.join("records").join(format!("{system}.lock"))
    }
    /// The record of `system`.
    pub fn record(&self, system: &str) -> PathBuf {
        self.root.join("records").join(format!("{system}.json"))
    }
    /// The merged table of finished systems.
    pub fn results_table(&self) -> PathBuf {
        self.root.join("results.csv")
    }
    /// The systems that did not finish, with the reasons.
    pub fn failures_table(&self) -> PathBuf {
        self.root.join("failed.csv")
    }
}

/// What a batch is made of, kept in `batch.json` so that every shard and
/// the merge use the same manifest and base configuration.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BatchInputs {
    /// The manifest (absolute path).
    pub manifest: PathBuf,
    /// The base configuration (absolute path).
    pub base: PathBuf,
}

impl BatchInputs {
    /// Reads `batch.json` of a batch output folder.
    pub fn read(folder: &BatchFolder) -> Result<Self> {
        let path = folder.inputs();
        read_json(&path, "batch record", || {
            format!(
                "reading {} (is {} the output folder of a `dyad batch`?)",
                path.display(),
                folder.root.display()
            )
        })
    }

    /// Records the inputs in a new output folder, or checks that an
    /// existing one belongs to the same manifest and base configuration.
    fn record_or_check(&self, folder: &BatchFolder) -> Result<()> {
        if folder.inputs().exists() {
            let earlier = Self::read(folder)?;
            if earlier != *self {
                bail!(
                    "{} holds the batch of the manifest {} with the base configuration {}; \
                     give another output folder for {} with {}",
                    folder.root.display(),
                    earlier.manifest.display(),
                    earlier.base.display(),
                    self.manifest.display(),
                    self.base.display()
                );
            }
            return Ok(());
        }
        let mut text = serde_json::to_string_pretty(self)?;
        text.push('\n');
        // Shards that start together may all write it: the same bytes,
        // each write atomic.
        write_text(&folder.inputs(), &text)
    }
}

/// How to run a shard.
#[derive(Debug, Clone)]
pub struct ShardOptions {
    /// The base configuration every system starts from.
    pub base: PathBuf,
    /// The batch's output folder.
    pub output: PathBuf,
    /// Which systems to run.
    pub shard: Shard,
    /// Wall time between checkpoints (default: that of `dyad fit`).
    pub checkpoint_interval: Option<Duration>,
}

/// What a shard run did.
#[derive(Debug, Clone, Default)]
pub struct ShardSummary {
    /// Systems of the shard, in order.
    pub systems: Vec<String>,
    /// Systems finished by this run.
    pub finished: Vec<String>,
    /// Systems finished earlier and skipped.
    pub skipped: Vec<String>,
    /// Systems that failed, with the reason.
    pub failed: Vec<(String, String)>,
    /// The system stopped by the cancel flag, with where it stopped (the
    /// shard stopped there; the systems after it were not started).
    pub stopped: Option<(String, String)>,
    /// Systems left to another process that was running them at the time
    /// (the same shard started twice): neither run nor recorded here.
    pub busy: Vec<String>,
}

impl ShardSummary {
    /// Whether every system of the shard is finished.
    pub fn all_finished(&self) -> bool {
        self.failed.is_empty() && self.busy.is_empty() && self.stopped.is_none()
    }
}

/// Runs the systems of `options.shard` of the manifest at `manifest`.
/// Errors of single systems are recorded, not returned: an `Err` means the
/// batch itself could not run (unreadable manifest or base configuration,
/// an output folder of another batch).
pub fn run_shard(
    manifest: &Path,
    options: &ShardOptions,
    observer: &mut dyn Observer,
    cancel: &CancelFlag,
) -> Result<ShardSummary> {
    let manifest = Manifest::read(manifest)?;
    let base_text = fs::read_to_string(&options.base)
        .with_context(|| format!("reading the base configuration {}", options.base.display()))?;
    let base: toml::Table = toml::from_str(&base_text)
        .with_context(|| format!("the base configuration {}", options.base.display()))?;
    let folder = BatchFolder::new(
        std::path::absolute(&options.output)
            .with_context(|| format!("resolving {}", options.output.display()))?,
    );
    fs::create_dir_all(&folder.root)
        .with_context(|| format!("creating {}", folder.root.display()))?;
    BatchInputs {
        manifest: manifest.path.clone(),
        base: std::path::absolute(&options.base)
            .with_context(|| format!("resolving {}", options.base.display()))?,
    }
    .record_or_check(&folder)?;
    for sub in ["configs", "systems", "records"] {
        let path = folder.root.join(sub);
        fs::create_dir_all(&path).with_context(|| format!("creating {}", path.display()))?;
    }

    let mine: Vec<&SystemEntry> = manifest
        .systems
        .iter()
        .enumerate()
        .filter(|(k, _)| options.shard.holds(*k))
        .map(|(_, s)| s)
        .collect();
    let mut summary = ShardSummary {
        systems: mine.iter().map(|s| s.name.clone()).collect(),
        ..ShardSummary::default()
    };
    observer.message(&format!(
        "shard {} of the batch {}: {} of its {} systems",
        options.shard,
        manifest.path.display(),
        mine.len(),
        manifest.systems.len()
    ));
    for (done, system) in mine.iter().enumerate() {
        let name = &system.name;
        if cancel.is_cancelled() {
            // Asked to stop between two systems: this one never started.
            summary.stopped = Some((name.clone(), "was not started".to_owned()));
            break;
        }
        let lock = lock_system(&folder, name, observer)?;
        if matches!(lock, SystemLock::Busy) {
            observer.warning(&format!(
                "{name}: another process is running it (the same shard started twice?); left \
                 to that process"
            ));
            summary.busy.push(name.clone());
            continue;
        }
        observer.message(&format!("{name} ({} of {}):", done + 1, mine.len()));
        let mut prefixed = Prefixed {
            inner: &mut *observer,
            name,
        };
        let attempt = catch_unwind(AssertUnwindSafe(|| {
            run_system(system, &base, &folder, options, &mut prefixed, cancel)
        }));
        let state = match attempt {
            Ok(Ok(state)) => state,
            // Paths inside the batch folder are given relative to it, so
            // that the reason is the same wherever the batch ran.
            Ok(Err(e)) => {
                Step::Failed(error_chain(&e).replace(&format!("{}/", folder.root.display()), ""))
            }
            Err(panic) => Step::Failed(format!(
                "internal error (a bug of dyad): {}",
                panic_text(&panic)
            )),
        };
        let record = |state, reason: Option<String>, result| SystemRecord {
            system: name.clone(),
            state,
            reason,
            result,
        };
        let path = folder.record(name);
        match state {
            Step::Skipped => {
                observer.message(&format!("{name}: finished earlier, skipped"));
                summary.skipped.push(name.clone());
            }
            Step::Finished(result) => {
                record(SystemState::Finished, None, Some(*result)).write(&path)?;
                observer.message(&format!("{name}: finished"));
                summary.finished.push(name.clone());
            }
            Step::Failed(reason) => {
                observer.warning(&format!("{name} failed: {reason}"));
                record(SystemState::Failed, Some(reason.clone()), None).write(&path)?;
                summary.failed.push((name.clone(), reason));
            }
            Step::Stopped(at) => {
                observer.message(&format!("{name}: {at}; run the shard again to resume"));
                record(SystemState::Stopped, Some(at.clone()), None).write(&path)?;
                summary.stopped = Some((name.clone(), at));
                break;
            }
        }
    }
    Ok(summary)
}

/// The advisory lock on one system (`DIR/records/NAME.lock`), held while
/// this process runs it: two processes must not write one run folder at
/// once (an array submitted twice, a local run beside a Slurm one). The
/// operating system releases the lock when its holder ends, however it ends
/// (SIGKILL included), so a stale lock file never blocks a resubmission.
enum SystemLock {
    /// Ours until the file is dropped (kept for its lock, never read).
    Held { _file: fs::File },
    /// The file system cannot lock: the system runs unguarded (warned).
    Unguarded,
    /// Another process holds it.
    Busy,
}

fn lock_system(
    folder: &BatchFolder,
    system: &str,
    observer: &mut dyn Observer,
) -> Result<SystemLock> {
    let path = folder.lock(system);
    let file = fs::OpenOptions::new()
        .create(true)
        .truncate(false)
        .write(true)
        .open(&path)
        .with_context(|| format!("opening the lock file {}", path.display()))?;
    match file.try_lock() {
        Ok(()) => Ok(SystemLock::Held { _file: file }),
        Err(fs::TryLockError::WouldBlock) => Ok(SystemLock::Busy),
        Err(fs::TryLockError::Error(e)) => {
            observer.warning(&format!(
                "{system}: could not lock {} ({e}); running it without a guard against a \
                 second process",
                path.display()
            ));
            Ok(SystemLock::Unguarded)
        }
    }
}

/// What became of one system in this shard run.
enum Step {
    Skipped,
    Finished(Box<SystemResult>),
    Failed(String),
    Stopped(String),
}

/// Runs (resumes, or recognises as finished) one system.
fn run_system(
    system: &SystemEntry,
    base: &toml::Table,
    folder: &BatchFolder,
    options: &ShardOptions,
    observer: &mut dyn Observer,
    cancel: &CancelFlag,
) -> Result<Step> {
    let run_folder = folder.run_folder(&system.name);
    let config_path = folder.config(&system.name);
    let config_text = system_config(base, system, &run_folder)?;
    let files = RunFiles::new(&run_folder);
    let started = files.provenance().is_file() && files.config_copy().is_file();
    if started {
        let copy = fs::read_to_string(files.config_copy())
            .with_context(|| format!("reading {}", files.config_copy().display()))?;
        if copy != config_text {
            bail!(
                "its configuration changed since its run started (the base configuration or \
                 line {} of the manifest was edited): remove {} to run it afresh",
                system.line,
                run_folder.display()
            );
        }
        if let Some(record) = SystemRecord::read(&folder.record(&system.name))? {
            if record.state == SystemState::Finished {
                return Ok(Step::Skipped);
            }
        }
    }
    write_text(&config_path, &config_text)?;
    if started && files.outcome().is_file() && !is_stopped(&Outcome::read(&files)?) {
        // Sampled to the end, but the record was not written (the shard
        // was killed in between): the report gives the results again.
        observer.message("sampled earlier; reading its results");
        let posterior = crate::posterior::report(&run_folder)?;
        let outcome = Outcome::read(&files)?;
        return Ok(Step::Finished(Box::new(SystemResult::of_run(
            &outcome, &posterior,
        )?)));
    }
    let request = FitRequest::from_file(&config_path)?;
    let max_steps = request.config.sampler.max_steps as u64;
    // A checkpoint that cannot be read is no reason to give up the
    // system: from the start, the same seed gives the same draws.
    let resumable = started
        && files.checkpoint().is_file()
        && dyad_sampler::checkpoint_step(files.checkpoint()).is_ok_and(|done| done < max_steps);
    let result = if resumable {
        let run = FitRun::resume(&run_folder, None)?;
        if let Some(done) = run.steps_done() {
            observer.message(&format!("resuming at step {done} of {max_steps}"));
        }
        run.run(observer, cancel)?
    } else {
        // Never started, stopped before its first checkpoint, or killed
        // between its last checkpoint and its outcome: from the start.
        let mut request = request.into_folder(&run_folder, true);
        if let Some(interval) = options.checkpoint_interval {
            request = request.checkpoint_interval(interval);
        }
        request.prepare()?.run(observer, cancel)?
    };
    finished_or_stopped(result)
}

fn finished_or_stopped(result: FitResult) -> Result<Step> {
    if result.was_cancelled() {
        return Ok(Step::Stopped(format!(
            "stopped at step {} (checkpointed)",
            result.sampler.steps
        )));
    }
    let Some(posterior) = &result.posterior else {
        bail!("the run ended without a posterior");
    };
    Ok(Step::Finished(Box::new(SystemResult::of_run(
        &result.outcome,
        posterior,
    )?)))
}

/// Whether a run's outcome says it was stopped before its end.
fn is_stopped(outcome: &Outcome) -> bool {
    outcome.status == "stopped by the user"
}

/// An error with its causes, on one line.
fn error_chain(error: &crate::FitError) -> String {
    let mut text = error.to_string();
    let mut source = std::error::Error::source(error);
    while let Some(cause) = source {
        text.push_str(": ");
        text.push_str(&cause.to_string());
        source = cause.source();
    }
    text
}

fn panic_text(panic: &Box<dyn std::any::Any + Send>) -> String {
    panic
        .downcast_ref::<&str>()
        .map(|s| (*s).to_owned())
        .or_else(|| panic.downcast_ref::<String>().cloned())
        .unwrap_or_else(|| "a panic without a message".to_owned())
}

/// Passes a system's messages on with its name in front.
struct Prefixed<'a> {
    inner: &'a mut dyn Observer,
    name: &'a str,
}

impl Observer for Prefixed<'_> {
    fn message(&mut self, text: &str) {
        self.inner.message(&format!("{}: {text}", self.name));
    }
    fn warning(&mut self, text: &str) {
        self.inner.warning(&format!("{}: {text}", self.name));
    }
    fn sampling_started(&mut self, max_steps: u64) {
        self.inner.sampling_started(max_steps);
    }
    fn sampling_progress(&mut self, progress: &Progress) {
        self.inner.sampling_progress(progress);
    }
    fn sampling_finished(&mut self) {
        self.inner.sampling_finished();
    }
}
