//! A team of helper threads that stays awake for the length of a run and
//! shares each half-step's walker updates with the calling thread.
//!
//! Why not a general thread pool: a half-step is a fork-join over a few
//! dozen walkers, tens to hundreds of microseconds of work, repeated twice
//! per step. Pool workers fall asleep between such short jobs, and waking
//! one costs tens of microseconds on a virtual machine, which capped the
//! two-thread speed-up at about 1.6x (PERFORMANCE.md). Helpers here spin
//! briefly between half-steps (then yield, then park), and claim walkers
//! from one shared counter, so the cost per half-step is a few atomic
//! operations and the load balances itself.
//!
//! Which thread updates a walker never changes the result: every walker
//! owns its random stream and the complementary half is read-only during a
//! half-step.

use std::sync::atomic::{AtomicBool, AtomicPtr, AtomicU32, AtomicU64, AtomicUsize, Ordering};
use std::sync::OnceLock;
use std::thread::{self, Scope, Thread};
use std::time::{Duration, Instant};

use crate::density::LogDensity;
use crate::ensemble::{EnsembleView, Rung, Walker};
use crate::moves::MoveMixture;

/// Tag of the ticket that tells helpers to leave.
const STOP_TAG: u32 = u32::MAX;
/// Index part of a ticket whose half-step is finished (no more claims).
const CLOSED: u32 = u32::MAX;
/// How long an idle helper spins, then yields, before it parks.
const SPIN_FOR: Duration = Duration::from_micros(20);
const YIELD_FOR: Duration = Duration::from_micros(300);

#[inline]
fn pack(tag: u32, index: u32) -> u64 {
    (u64::from(tag) << 32) | u64::from(index)
}

#[inline]
fn unpack(ticket: u64) -> (u32, u32) {
    ((ticket >> 32) as u32, ticket as u32)
}

/// The state shared by the calling thread (the leader) and its helpers.
///
/// Protocol: the leader writes a half-step's description (the fields below
/// the ticket), then publishes the ticket (tag, 0). Everybody claims chunks
/// of walker indices by compare-and-swap on the ticket, updates them and
/// subtracts them from `pending`. When `pending` reaches 0 the leader sets
/// the ticket to (tag, CLOSED) before it touches any field again, so a
/// claim can only succeed while the description it read is current.
pub(crate) struct Team {
    helpers: usize,
    ticket: AtomicU64,
    /// Leader-only: tag of the last published half-step.
    last_tag: AtomicU32,
    part: AtomicUsize,
    half: AtomicUsize,
    total: AtomicUsize,
    chunk: AtomicUsize,
    /// Per rung: its walkers, this step's split and its inverse
    /// temperature (as bits).
    walkers: Vec<AtomicPtr<Walker>>,
    orders: Vec<AtomicPtr<usize>>,
    betas: Vec<AtomicU64>,
    pending: AtomicUsize,
    sleeping: Vec<AtomicBool>,
    panicked: AtomicBool,
    threads: OnceLock<Vec<Thread>>,
}

/// Number of helper threads a run gets: the threads of the current rayon
/// pool (set by `--threads`), at most the machine's cores, minus the caller.
pub(crate) fn helper_count() -> usize {
    let cores = thread::available_parallelism().map_or(1, |n| n.get());
    rayon::current_num_threads().min(cores).saturating_sub(1)
}

impl Team {
    pub fn new(helpers: usize, n_rungs: usize) -> Self {
        Self {
            helpers,
            ticket: AtomicU64::new(pack(0, CLOSED)),
            last_tag: AtomicU32::new(0),
            part: AtomicUsize::new(0),
            half: AtomicUsize::new(0),
            total: AtomicUsize::new(0),
            chunk: AtomicUsize::new(1),
            walkers: (0..n_rungs)
                .map(|_| AtomicPtr::new(std::ptr::null_mut()))
                .collect(),
            orders: (0..n_rungs)
                .map(|_| AtomicPtr::new(std::ptr::null_mut()))
                .collect(),
            betas: (0..n_rungs).map(|_| AtomicU64::new(0)).collect(),
            pending: AtomicUsize::new(0),
            sleeping: (0..helpers).map(|_| AtomicBool::new(false)).collect(),
            panicked: AtomicBool::new(false),
            threads: OnceLock::new(),
        }
    }

    /// Number of helper threads (0: the leader works alone).
    pub fn helpers(&self) -> usize {
        self.helpers
    }

    /// Starts the helpers in `scope`; they run until [`Team::stop`].
    pub fn start<'scope, 'env, D: LogDensity + ?Sized>(
        &'env self,
        scope: &'scope Scope<'scope, 'env>,
        density: &'env D,
        moves: &'env MoveMixture,
    ) {
        let threads = (0..self.helpers)
            .map(|id| {
                scope
                    .spawn(move || self.help(id, density, moves))
                    .thread()
                    .clone()
            })
            .collect();
        // Set once, right after spawning; helpers never read it.
        let _ = self.threads.set(threads);
    }

    /// Tells the helpers to leave (they finish any claimed walkers first).
    pub fn stop(&self) {
        self.ticket.store(pack(STOP_TAG, 0), Ordering::SeqCst);
        self.wake_all(true);
    }

    fn wake_all(&self, always: bool) {
        if let Some(threads) = self.threads.get() {
            for (t, sleeping) in threads.iter().zip(&self.sleeping) {
                if always || sleeping.load(Ordering::SeqCst) {
                    t.unpark();
                }
            }
        }
    }

    /// Updates half `part` of every rung against the other half, sharing
    /// the walkers with the helpers in claims of `chunk` walkers.
    pub fn half_step<D: LogDensity + ?Sized>(
        &self,
        rungs: &mut [Rung],
        part: usize,
        chunk: usize,
        density: &D,
        moves: &MoveMixture,
    ) {
        let half = rungs.first().map_or(0, |r| r.walkers.len() / 2);
        let total = half * rungs.len();
        if total == 0 {
            return;
        }
        for (k, r) in rungs.iter_mut().enumerate() {
            let view = r.view();
            self.walkers[k].store(view.walkers, Ordering::Relaxed);
            // Helpers only read the split (AtomicPtr holds *mut).
            self.orders[k].store(view.order.cast_mut(), Ordering::Relaxed);
            self.betas[k].store(view.beta.to_bits(), Ordering::Relaxed);
        }
        self.part.store(part, Ordering::Relaxed);
        self.half.store(half, Ordering::Relaxed);
        self.total.store(total, Ordering::Relaxed);
        self.chunk.store(chunk.max(1), Ordering::Relaxed);
        self.pending.store(total, Ordering::Relaxed);
        let mut tag = self.last_tag.load(Ordering::Relaxed).wrapping_add(1);
        if tag == STOP_TAG {
            tag = 0;
        }
        self.last_tag.store(tag, Ordering::Relaxed);
        self.ticket.store(pack(tag, 0), Ordering::SeqCst);
        self.wake_all(false);

        // SAFETY: `rungs` is borrowed mutably for the whole half-step and
        // the leader waits below until every claimed walker is done.
        unsafe { self.drain(tag, density, moves) };
        let waited = Instant::now();
        while self.pending.load(Ordering::Acquire) != 0 {
            if self.panicked.load(Ordering::Acquire) {
                panic!("a sampler helper thread panicked while updating a walker");
            }
            if waited.elapsed() < SPIN_FOR {
                std::hint::spin_loop();
            } else {
                thread::yield_now();
            }
        }
        self.ticket.store(pack(tag, CLOSED), Ordering::SeqCst);
    }

    /// Claims and updates walkers of half-step `tag` until none are left.
    ///
    /// # Safety
    /// The walker pointers published for `tag` must stay valid and unused by
    /// anybody else until `pending` reaches 0 (the leader guarantees it).
    unsafe fn drain<D: LogDensity + ?Sized>(&self, tag: u32, density: &D, moves: &MoveMixture) {
        loop {
            let ticket = self.ticket.load(Ordering::SeqCst);
            let (t, start) = unpack(ticket);
            let total = self.total.load(Ordering::Relaxed);
            if t != tag || start as usize >= total {
                return;
            }
            let end = (start as usize + self.chunk.load(Ordering::Relaxed)).min(total);
            if self
                .ticket
                .compare_exchange_weak(
                    ticket,
                    pack(tag, end as u32),
                    Ordering::SeqCst,
                    Ordering::Relaxed,
                )
                .is_err()
            {
                continue;
            }
            // The claim succeeded on an open ticket of `tag`, so the fields
            // read here are the ones published for it.
            let part = self.part.load(Ordering::Relaxed);
            let half = self.half.load(Ordering::Relaxed);
            let guard = PanicFlag(&self.panicked);
            for index in start as usize..end {
                let (r, w) = (index / half, index % half);
                let view = EnsembleView {
                    walkers: self.walkers[r].load(Ordering::Relaxed),
                    order: self.orders[r].load(Ordering::Relaxed),
                    half,
                    beta: f64::from_bits(self.betas[r].load(Ordering::Relaxed)),
                };
                // SAFETY: walker (r, w) of the active half is claimed by
                // this thread alone; the other half is only read during the
                // half-step.
                view.advance(part, w, moves, density);
            }
            std::mem::forget(guard);
            self.pending
                .fetch_sub(end - start as usize, Ordering::Release);
        }
    }

    /// A helper's life: wait for a new ticket, work on it, repeat.
    fn help<D: LogDensity + ?Sized>(&self, id: usize, density: &D, moves: &MoveMixture) {
        // The tag of the ticket `new` made, not the current one: a helper
        // that starts late must still see every later ticket, the stop
        // included.
        let mut seen = 0;
        loop {
            let idle = Instant::now();
            let tag = loop {
                let (tag, _) = unpack(self.ticket.load(Ordering::SeqCst));
                if tag != seen {
                    break tag;
                }
                let waited = idle.elapsed();
                if waited < SPIN_FOR {
                    std::hint::spin_loop();
                } else if waited < YIELD_FOR {
                    thread::yield_now();
                } else {
                    // Announce the nap, then look once more: the leader
                    // publishes before it reads `sleeping`, so one of the
                    // two sees the other (no lost wake-up).
                    self.sleeping[id].store(true, Ordering::SeqCst);
                    if unpack(self.ticket.load(Ordering::SeqCst)).0 == seen {
                        thread::park();
                    }
                    self.sleeping[id].store(false, Ordering::SeqCst);
                }
            };
            if tag == STOP_TAG {
                return;
            }
            seen = tag;
            // SAFETY: see `drain`; claims only succeed on the open ticket.
            unsafe { self.drain(tag, density, moves) };
        }
    }
}

/// Raises the team's panic flag if a walker update unwinds, so the leader
/// stops waiting for walkers that will never be finished.
struct PanicFlag<'a>(&'a AtomicBool);

impl Drop for PanicFlag<'_> {
    fn drop(&mut self) {
        self.0.store(true, Ordering::Release);
    }
}

/// Stops the team when dropped, also while unwinding, so that a scope never
/// waits for helpers that were not told to leave.
pub(crate) struct StopOnDrop<'a>(pub &'a Team);

impl Drop for StopOnDrop<'_> {
    fn drop(&mut self) {
        self.0.stop();
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::density::FnLogPdf;
    use crate::ensemble::{step_all, Schedule};
    use crate::moves::{weighted, Scratch, Stretch, Walk};
    use crate::rng::{stream_rng, Stream};

    /// Three rungs of 12 walkers in 3-D, spread deterministically.
    fn rungs() -> Vec<Rung> {
        (0..3)
            .map(|r| {
                Rung::new(
                    [1.0, 0.5, 0.2][r],
                    (0..12)
                        .map(|w| Walker {
                            position: (0..3).map(|k| ((w * 3 + k) as f64 * 0.37).sin()).collect(),
                            log_prior: 0.0,
                            log_likelihood: f64::NEG_INFINITY,
                            rng: stream_rng(9, Stream::Walker { rung: r, walker: w }),
                            scratch: Scratch::new(3, 6),
                            accepted: 0,
                            proposed: 0,
                            rejection_run: 0,
                            longest_rejection_run: 0,
                        })
                        .collect(),
                )
            })
            .collect()
    }

    fn bits(rungs: &[Rung]) -> Vec<u64> {
        rungs
            .iter()
            .flat_map(|r| &r.walkers)
            .flat_map(|w| w.position.iter().chain([&w.log_likelihood]))
            .map(|v| v.to_bits())
            .collect()
    }

    /// The team path (helpers claiming walkers in every chunk size) gives
    /// the chain of the calling thread alone, bit for bit, and every walker
    /// is updated exactly once per half-step.
    #[test]
    fn team_steps_equal_serial_steps() {
        let density = FnLogPdf::new(3, |x: &[f64]| -0.5 * x.iter().map(|v| v * v).sum::<f64>());
        let moves = MoveMixture::new(vec![
            weighted(Stretch::default(), 0.6),
            weighted(Walk::default(), 0.4),
        ])
        .unwrap();
        let mut serial = rungs();
        let alone = Team::new(0, 3);
        for step in 0..50 {
            step_all(
                &mut serial,
                &density,
                &moves,
                Schedule::Serial,
                &alone,
                (5, step),
            );
        }
        for (helpers, chunk) in [(1, 1), (1, 5), (3, 2), (3, 40)] {
            let mut shared = rungs();
            let team = Team::new(helpers, 3);
            thread::scope(|scope| {
                team.start(scope, &density, &moves);
                let _stop = StopOnDrop(&team);
                for step in 0..50 {
                    step_all(
                        &mut shared,
                        &density,
                        &moves,
                        Schedule::Parallel { chunk },
                        &team,
                        (5, step),
                    );
                }
            });
            assert_eq!(
                bits(&serial),
                bits(&shared),
                "{helpers} helpers, chunks of {chunk}"
            );
            for w in shared.iter().flat_map(|r| &r.walkers) {
                assert_eq!(w.proposed, 50);
            }
        }
    }

    /// A helper that starts after the run has already finished still sees
    /// the stop and leaves (no hang).
    #[test]
    fn a_late_helper_still_stops() {
        let density = FnLogPdf::new(3, |x: &[f64]| -x[0] * x[0]);
        let moves = MoveMixture::default();
        let team = Team::new(2, 1);
        team.stop();
        thread::scope(|scope| team.start(scope, &density, &moves));
    }

    /// The schedule shares only half-steps worth it, in claims that leave
    /// every thread several to balance the load.
    #[test]
    fn schedule_from_cost() {
        assert_eq!(Schedule::from_cost(20_000.0, 16, 1, 0), Schedule::Serial);
        assert_eq!(Schedule::from_cost(100.0, 16, 1, 1), Schedule::Serial);
        assert_eq!(
            Schedule::from_cost(20_000.0, 16, 1, 1),
            Schedule::Parallel { chunk: 1 }
        );
        assert_eq!(
            Schedule::from_cost(600.0, 16, 1, 1),
            Schedule::Parallel { chunk: 2 }
        );
        assert_eq!(
            Schedule::from_cost(600.0, 32, 16, 1),
            Schedule::Parallel { chunk: 4 }
        );
    }
}
