//! Walkers, the red-blue ensemble update and its parallel evaluation.

use rand::Rng;

use crate::density::LogDensity;
use crate::moves::{propose, Complement, MoveMixture, Scratch};
use crate::rng::{stream_rng, Stream, StreamRng};
use crate::team::Team;

/// One walker: position, cached log-densities, its own random stream,
/// preallocated proposal buffers and acceptance book-keeping.
#[derive(Clone, Debug)]
pub(crate) struct Walker {
    pub position: Vec<f64>,
    pub log_prior: f64,
    pub log_likelihood: f64,
    pub rng: StreamRng,
    pub scratch: Scratch,
    pub accepted: u64,
    pub proposed: u64,
    /// Consecutive rejections up to now.
    pub rejection_run: u64,
    /// Longest run of consecutive rejections seen.
    pub longest_rejection_run: u64,
}

/// The tempered log target log_prior + beta * log_likelihood, with beta = 0
/// giving the prior exactly (no 0 * inf).
#[inline]
pub(crate) fn tempered(beta: f64, log_prior: f64, log_likelihood: f64) -> f64 {
    if beta == 0.0 {
        log_prior
    } else {
        log_prior + beta * log_likelihood
    }
}

impl Walker {
    /// One Metropolis-Hastings update against the fixed complementary half.
    #[inline]
    fn advance<D: LogDensity + ?Sized>(
        &mut self,
        complement: &Complement<'_>,
        moves: &MoveMixture,
        density: &D,
        beta: f64,
    ) {
        self.proposed += 1;
        let log_factor = propose(
            moves,
            &self.position,
            complement,
            &mut self.rng,
            &mut self.scratch,
        );
        let u: f64 = self.rng.gen();
        let y = &self.scratch.proposal;
        let lp = density.log_prior(y);
        let mut accepted = false;
        let mut ll = f64::NEG_INFINITY;
        // -inf or NaN prior: outside the support, likelihood not evaluated.
        if lp > f64::NEG_INFINITY && lp < f64::INFINITY {
            ll = density.log_likelihood(y);
            if ll > f64::NEG_INFINITY && ll < f64::INFINITY {
                let ln_ratio = log_factor + tempered(beta, lp, ll)
                    - tempered(beta, self.log_prior, self.log_likelihood);
                // ln u <= 0, so a non-negative ratio always accepts; skip the log.
                accepted = ln_ratio >= 0.0 || u.ln() < ln_ratio;
            }
        }
        if accepted {
            std::mem::swap(&mut self.position, &mut self.scratch.proposal);
            self.log_prior = lp;
            self.log_likelihood = ll;
            self.accepted += 1;
            self.rejection_run = 0;
        } else {
            self.rejection_run += 1;
            self.longest_rejection_run = self.longest_rejection_run.max(self.rejection_run);
        }
    }
}

/// Raw access to one ensemble during a half-step, so that walkers can be
/// updated from several threads: its walkers, this step's split (`order`,
/// a permutation whose first and second halves are the two halves of the
/// ensemble) and the inverse temperature.
#[derive(Clone, Copy)]
pub(crate) struct EnsembleView {
    pub walkers: *mut Walker,
    pub order: *const usize,
    pub half: usize,
    pub beta: f64,
}

impl EnsembleView {
    /// Updates the `w`-th walker of half `part` against the other half.
    ///
    /// # Safety
    /// The pointers must be valid for the whole half-step, `order` must be
    /// a permutation of the walkers, and no other thread may update the
    /// same walker or any walker of the other half meanwhile.
    #[inline]
    pub unsafe fn advance<D: LogDensity + ?Sized>(
        &self,
        part: usize,
        w: usize,
        moves: &MoveMixture,
        density: &D,
    ) {
        let (walkers, order, half) = (self.walkers, self.order, self.half);
        let other = (1 - part) * half;
        // The active walker and the complement are disjoint (`order` is a
        // permutation), and nobody writes the other half during this
        // half-step (this function's contract), so the complement may be
        // read while the active walker is written.
        let complement =
            Complement::new(walkers, std::slice::from_raw_parts(order.add(other), half));
        let active = &mut *walkers.add(*order.add(part * half + w));
        active.advance(&complement, moves, density, self.beta);
    }
}

/// One ensemble at inverse temperature `beta`.
#[derive(Clone, Debug)]
pub(crate) struct Rung {
    pub beta: f64,
    pub walkers: Vec<Walker>,
    /// This step's split of the walkers: the first half of `order` is one
    /// half of the ensemble, the rest the other (see [`Rung::split`]).
    pub order: Vec<usize>,
}

impl Rung {
    /// A rung with the identity split (drawn afresh before every step).
    pub fn new(beta: f64, walkers: Vec<Walker>) -> Self {
        let order = (0..walkers.len()).collect();
        Self {
            beta,
            walkers,
            order,
        }
    }

    /// Splits the walkers into two halves at random for step `step`, as
    /// the general-purpose implementation of Foreman-Mackey et al. (2013,
    /// PASP 125, 306) does: a fixed split lets information cross between
    /// the two halves only, and its chains decorrelate more slowly (measured
    /// in benchmarks/peer). The permutation comes from its own stream,
    /// seeded by (seed, rung, step), so it needs no state of its own: a
    /// resumed run draws the same splits.
    pub fn split(&mut self, seed: u64, rung: usize, step: u64) {
        let mut rng = stream_rng(seed, Stream::Split { rung, step });
        for (i, o) in self.order.iter_mut().enumerate() {
            *o = i;
        }
        // Fisher-Yates (Knuth, TAOCP vol. 2, Algorithm 3.4.2 P).
        for i in (1..self.order.len()).rev() {
            let j = rng.gen_range(0..=i);
            self.order.swap(i, j);
        }
    }

    /// Raw access for a half-step (see [`EnsembleView`]).
    pub fn view(&mut self) -> EnsembleView {
        EnsembleView {
            walkers: self.walkers.as_mut_ptr(),
            order: self.order.as_ptr(),
            half: self.walkers.len() / 2,
            beta: self.beta,
        }
    }

    /// Updates half `part` (0 = first half, 1 = second) against the other
    /// half on the calling thread (Foreman-Mackey et al. 2013, PASP 125,
    /// 306, Algorithm 3).
    pub fn half_step<D: LogDensity + ?Sized>(
        &mut self,
        part: usize,
        density: &D,
        moves: &MoveMixture,
    ) {
        debug_assert_eq!(self.order.len(), self.walkers.len());
        let view = self.view();
        for w in 0..view.half {
            // SAFETY: `self` is borrowed mutably for the whole loop, `order`
            // is a permutation (`split`), and this thread is alone.
            unsafe { view.advance(part, w, moves, density) };
        }
    }
}

/// How walker updates are spread over threads; chosen from measured cost,
/// it changes the speed only, never the chain.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum Schedule {
    /// All on the calling thread.
    Serial,
    /// Shared with the team's helpers in claims of this many walkers.
    Parallel { chunk: usize },
}

/// Least work in one half-step (all rungs) worth sharing between threads:
/// waking a spinning helper and the claims cost about a microsecond.
const PARALLEL_NANOS: f64 = 8_000.0;
/// Work per claim: keeps the shared counter quiet for cheap densities.
const CLAIM_NANOS: f64 = 2_000.0;

impl Schedule {
    /// Picks the schedule from the measured cost of one walker update.
    pub fn from_cost(
        nanos_per_walker: f64,
        walkers_per_half: usize,
        n_rungs: usize,
        helpers: usize,
    ) -> Self {
        let per_walker = nanos_per_walker.max(1.0);
        let total = walkers_per_half * n_rungs;
        if helpers == 0 || per_walker * (total as f64) < PARALLEL_NANOS {
            return Schedule::Serial;
        }
        // At least four claims per thread, so the load can balance.
        let most = (total / (4 * (helpers + 1))).max(1);
        let chunk = ((CLAIM_NANOS / per_walker).ceil() as usize).clamp(1, most);
        Schedule::Parallel { chunk }
    }
}

/// Advances every temperature by one full step (both halves), step number
/// `step` of a run with `seed` (which fix the random split of the walkers).
pub(crate) fn step_all<D: LogDensity + ?Sized>(
    rungs: &mut [Rung],
    density: &D,
    moves: &MoveMixture,
    schedule: Schedule,
    team: &Team,
    (seed, step): (u64, u64),
) {
    for (r, rung) in rungs.iter_mut().enumerate() {
        rung.split(seed, r, step);
    }
    for part in 0..2 {
        match schedule {
            Schedule::Parallel { chunk } if team.helpers() > 0 => {
                team.half_step(rungs, part, chunk, density, moves);
            }
            _ => {
                for r in rungs.iter_mut() {
                    r.half_step(part, density, moves);
                }
            }
        }
    }
}
