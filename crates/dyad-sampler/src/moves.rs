//! Ensemble moves: the [`EnsembleMove`] trait, the stretch,
//! differential-evolution and walk moves, and their weighted mixture.
//!
//! Each move proposes a new position for one walker from the positions of
//! the complementary half of the ensemble (the red-blue split of
//! Foreman-Mackey et al. 2013, PASP 125, 306, sect. 3), which stays fixed
//! while the half is updated; that keeps every move a valid Metropolis-Hastings
//! update of the conditional target.
//!
//! The sampler does not choose a mixture for its callers: [`MoveMixture`]'s
//! default is the plain stretch move, and an application picks its own
//! (`dyad fit` does so in its workflow layer).

use std::fmt;

use rand::Rng;
use rand_distr::StandardNormal;
use serde::{Deserialize, Serialize};

use crate::ensemble::Walker;
use crate::error::SamplerError;
use crate::rng::StreamRng;

/// An ensemble move: proposes a position for one walker from the fixed
/// complementary half of the ensemble.
///
/// A move is shared by every thread of a run (`Send + Sync`, `&self`), so
/// all it keeps between steps is its [`EnsembleMove::state`], which every
/// checkpoint saves through serde and a resumed run hands back to
/// [`EnsembleMove::restore`]. For the moves here the state is their
/// parameters; a move that learns (say, an adapted scale) would return
/// what it learnt as well.
pub trait EnsembleMove: BoxedClone + fmt::Debug + Send + Sync {
    /// A short name (in messages and checkpoints), e.g. `"stretch"`.
    fn name(&self) -> &'static str;

    /// Checks the move's parameters.
    fn validate(&self) -> Result<(), SamplerError> {
        Ok(())
    }

    /// Fewest walkers the move needs in the complementary half.
    fn walkers_needed(&self) -> usize;

    /// Writes a proposal for the walker at `x` into `proposal` (of the same
    /// length) and returns the log of its Metropolis-Hastings factor. It
    /// must draw only from `rng`, the walker's own stream, so that the
    /// chain depends on the seed alone; `buffers` are preallocated so that
    /// a proposal needs no allocation.
    fn propose(
        &self,
        x: &[f64],
        complement: &Complement<'_>,
        rng: &mut StreamRng,
        proposal: &mut [f64],
        buffers: &mut MoveBuffers,
    ) -> f64;

    /// Everything the move needs to continue exactly after a resume, as a
    /// serde value; saved in every checkpoint.
    fn state(&self) -> serde_json::Value;

    /// Continues from a checkpointed [`EnsembleMove::state`]. The default,
    /// for moves that learn nothing, requires it to equal the configured
    /// state (so a resume with other move parameters is refused).
    fn restore(&mut self, state: &serde_json::Value) -> Result<(), SamplerError> {
        if *state == self.state() {
            Ok(())
        } else {
            Err(SamplerError::CheckpointMismatch(format!(
                "the checkpoint's {} move has state {state}, this run configures {}",
                self.name(),
                self.state()
            )))
        }
    }
}

/// A boxed copy of a move (so that a mixture can be cloned); implemented
/// for every move that is `Clone`.
pub trait BoxedClone {
    /// A boxed copy.
    fn boxed_clone(&self) -> Box<dyn EnsembleMove>;
}

impl<M: EnsembleMove + Clone + 'static> BoxedClone for M {
    fn boxed_clone(&self) -> Box<dyn EnsembleMove> {
        Box::new(self.clone())
    }
}

/// The complementary half of the ensemble during one walker's update: the
/// positions a move may read (they do not change while the half is updated).
pub struct Complement<'a> {
    walkers: *const Walker,
    /// Indices of the complementary walkers (`len` of them).
    order: &'a [usize],
}

impl<'a> Complement<'a> {
    /// The complement `order` (walker indices) of the walkers at `walkers`.
    ///
    /// # Safety
    /// `walkers` must point to a live array holding every index in `order`,
    /// and no walker listed in `order` may be written while the complement
    /// exists (during a half-step only the other half is written).
    pub(crate) unsafe fn new(walkers: *const Walker, order: &'a [usize]) -> Self {
        Self { walkers, order }
    }

    /// Number of complementary walkers.
    #[inline]
    pub fn len(&self) -> usize {
        self.order.len()
    }

    /// True when there are none (never the case in a run).
    #[inline]
    pub fn is_empty(&self) -> bool {
        self.order.is_empty()
    }

    /// Position of the `j`-th complementary walker (`j < len()`, panics otherwise).
    #[inline]
    pub fn position(&self, j: usize) -> &'a [f64] {
        let w = self.order[j];
        // SAFETY: by the contract of `Complement::new`, `w` indexes the live
        // walker array and nobody writes that walker while `self` exists.
        unsafe { (*self.walkers.add(w)).position.as_slice() }
    }
}

/// Buffers a move may use while proposing, allocated once per walker.
#[derive(Clone, Debug)]
pub struct MoveBuffers {
    /// As many indices as the complementary half has walkers.
    pub indices: Vec<usize>,
    /// As many values as there are parameters.
    pub vector: Vec<f64>,
}

/// Stretch move of Goodman & Weare (2010, CAMCoS 5, 65, eq. 7-10):
/// y = x_j + z (x - x_j), z drawn from g(z) proportional to 1/sqrt(z) on [1/a, a].
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Stretch {
    /// Scale parameter a > 1 (2 is the usual choice, Goodman & Weare 2010).
    pub a: f64,
}

impl Default for Stretch {
    /// a = 2.
    fn default() -> Self {
        Self { a: 2.0 }
    }
}

/// Differential-evolution move (ter Braak 2006, Stat. Comput. 16, 239;
/// in the ensemble form of Nelson et al. 2014, ApJS 210, 11):
/// y = x + gamma (x_j1 - x_j2) with gamma = gamma0 (1 + sigma n), n ~ N(0, 1).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct DifferentialEvolution {
    /// gamma0; `None` selects 2.38 / sqrt(2 d) (ter Braak 2006, sect. 2).
    pub gamma0: Option<f64>,
    /// Relative jitter of gamma (ter Braak 2006 uses a small value such as 1e-5).
    pub sigma: f64,
}

impl Default for DifferentialEvolution {
    /// Default gamma0, sigma = 1e-5.
    fn default() -> Self {
        Self {
            gamma0: None,
            sigma: 1e-5,
        }
    }
}

/// Walk move of Goodman & Weare (2010, sect. 3.2): y = x + sum_j n_j (x_j - mean_S)
/// over a random subset S of the complementary walkers, n_j ~ N(0, 1).
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct Walk {
    /// Subset size (at least 2); `None` uses the whole complementary half.
    pub subset: Option<usize>,
}

/// The serde state of a move whose state is its parameters.
fn parameters<T: Serialize>(move_: &T) -> serde_json::Value {
    // Plain structs of numbers and options: serialising cannot fail.
    serde_json::to_value(move_).unwrap_or(serde_json::Value::Null)
}

impl EnsembleMove for Stretch {
    fn name(&self) -> &'static str {
        "stretch"
    }

    fn validate(&self) -> Result<(), SamplerError> {
        let a = self.a;
        if !(a > 1.0 && a.is_finite()) {
            return Err(SamplerError::Config(format!(
                "stretch scale a must be a finite number > 1, got {a}"
            )));
        }
        Ok(())
    }

    fn walkers_needed(&self) -> usize {
        1
    }

    #[inline]
    fn propose(
        &self,
        x: &[f64],
        complement: &Complement<'_>,
        rng: &mut StreamRng,
        y: &mut [f64],
        _: &mut MoveBuffers,
    ) -> f64 {
        // Goodman & Weare (2010) eq. 9: z = ((a - 1) u + 1)^2 / a samples
        // g(z) ~ 1/sqrt(z) on [1/a, a]; the acceptance factor is z^(d-1) (eq. 11).
        let a = self.a;
        let dim = x.len();
        let j = rng.gen_range(0..complement.len());
        let xj = complement.position(j);
        let v: f64 = rng.gen();
        let z = ((a - 1.0) * v + 1.0).powi(2) / a;
        for i in 0..dim {
            y[i] = xj[i] + z * (x[i] - xj[i]);
        }
        (dim as f64 - 1.0) * z.ln()
    }

    fn state(&self) -> serde_json::Value {
        parameters(self)
    }
}

impl EnsembleMove for DifferentialEvolution {
    fn name(&self) -> &'static str {
        "differential_evolution"
    }

    fn validate(&self) -> Result<(), SamplerError> {
        if let Some(g) = self.gamma0 {
            if !(g > 0.0 && g.is_finite()) {
                return Err(SamplerError::Config(format!(
                    "differential-evolution gamma0 must be > 0, got {g}"
                )));
            }
        }
        let sigma = self.sigma;
        if !(sigma >= 0.0 && sigma.is_finite()) {
            return Err(SamplerError::Config(format!(
                "differential-evolution sigma must be >= 0, got {sigma}"
            )));
        }
        Ok(())
    }

    fn walkers_needed(&self) -> usize {
        2
    }

    #[inline]
    fn propose(
        &self,
        x: &[f64],
        complement: &Complement<'_>,
        rng: &mut StreamRng,
        y: &mut [f64],
        _: &mut MoveBuffers,
    ) -> f64 {
        let dim = x.len();
        let n_comp = complement.len();
        let j1 = rng.gen_range(0..n_comp);
        let mut j2 = rng.gen_range(0..n_comp - 1);
        if j2 >= j1 {
            j2 += 1;
        }
        let g0 = self.gamma0.unwrap_or(2.38 / (2.0 * dim as f64).sqrt());
        let n: f64 = rng.sample(StandardNormal);
        let gamma = g0 * (1.0 + self.sigma * n);
        let (a, b) = (complement.position(j1), complement.position(j2));
        for i in 0..dim {
            y[i] = x[i] + gamma * (a[i] - b[i]);
        }
        0.0
    }

    fn state(&self) -> serde_json::Value {
        parameters(self)
    }
}

impl EnsembleMove for Walk {
    fn name(&self) -> &'static str {
        "walk"
    }

    fn validate(&self) -> Result<(), SamplerError> {
        match self.subset {
            Some(s) if s < 2 => Err(SamplerError::Config(format!(
                "walk-move subset must hold at least 2 walkers, got {s}"
            ))),
            _ => Ok(()),
        }
    }

    fn walkers_needed(&self) -> usize {
        self.subset.unwrap_or(2).max(2)
    }

    #[inline]
    fn propose(
        &self,
        x: &[f64],
        complement: &Complement<'_>,
        rng: &mut StreamRng,
        y: &mut [f64],
        buffers: &mut MoveBuffers,
    ) -> f64 {
        let dim = x.len();
        let n_comp = complement.len();
        let s = self.subset.unwrap_or(n_comp).min(n_comp);
        // Partial Fisher-Yates over a buffer reset to the identity, so the
        // draw depends only on this walker's random stream.
        let idx = &mut buffers.indices[..n_comp];
        for (k, v) in idx.iter_mut().enumerate() {
            *v = k;
        }
        for k in 0..s {
            let r = rng.gen_range(k..n_comp);
            idx.swap(k, r);
        }
        let centre = &mut buffers.vector;
        centre.iter_mut().for_each(|c| *c = 0.0);
        for &j in &idx[..s] {
            let xj = complement.position(j);
            for i in 0..dim {
                centre[i] += xj[i];
            }
        }
        let inv = 1.0 / s as f64;
        centre.iter_mut().for_each(|c| *c *= inv);
        y.copy_from_slice(x);
        for &j in &idx[..s] {
            let n: f64 = rng.sample(StandardNormal);
            let xj = complement.position(j);
            for i in 0..dim {
                y[i] += n * (xj[i] - centre[i]);
            }
        }
        0.0
    }

    fn state(&self) -> serde_json::Value {
        parameters(self)
    }
}

/// One move of a mixture with its weight, for [`MoveMixture::new`].
pub fn weighted<M: EnsembleMove + 'static>(move_: M, weight: f64) -> (Box<dyn EnsembleMove>, f64) {
    (Box::new(move_), weight)
}

/// A weighted mixture of moves; each walker picks one move per step at random
/// with probability proportional to its weight.
#[derive(Debug)]
pub struct MoveMixture {
    moves: Vec<Box<dyn EnsembleMove>>,
    cumulative: Vec<f64>,
}

impl Clone for MoveMixture {
    fn clone(&self) -> Self {
        Self {
            moves: self.moves.iter().map(|m| m.boxed_clone()).collect(),
            cumulative: self.cumulative.clone(),
        }
    }
}

impl PartialEq for MoveMixture {
    /// Same moves (names and states) with the same weights.
    fn eq(&self, other: &Self) -> bool {
        self.checkpoint_states() == other.checkpoint_states()
    }
}

impl Default for MoveMixture {
    /// The stretch move alone (a = 2).
    fn default() -> Self {
        Self::single(Stretch::default())
    }
}

/// What a checkpoint records of one move of the mixture.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct MoveRecord {
    pub name: String,
    /// The cumulative weight, as its bit pattern (exact).
    pub cumulative_bits: u64,
    /// [`EnsembleMove::state`] as JSON text.
    pub state: String,
}

impl MoveMixture {
    /// A single move.
    pub fn single<M: EnsembleMove + 'static>(m: M) -> Self {
        Self {
            moves: vec![Box::new(m)],
            cumulative: vec![1.0],
        }
    }

    /// A mixture from (move, weight) pairs (see [`weighted`]); weights must
    /// be >= 0 with a positive sum, and every move's parameters valid.
    pub fn new(entries: Vec<(Box<dyn EnsembleMove>, f64)>) -> Result<Self, SamplerError> {
        if entries.is_empty() {
            return Err(SamplerError::Config("the move mixture is empty".into()));
        }
        let total: f64 = entries.iter().map(|(_, w)| *w).sum();
        if entries.iter().any(|(_, w)| !(*w >= 0.0 && w.is_finite()))
            || total.is_nan()
            || total <= 0.0
        {
            return Err(SamplerError::Config(
                "move weights must be finite, >= 0 and not all zero".into(),
            ));
        }
        let mut acc = 0.0;
        let mut moves = Vec::with_capacity(entries.len());
        let mut cumulative = Vec::with_capacity(entries.len());
        for (m, w) in entries {
            m.validate()?;
            acc += w / total;
            moves.push(m);
            cumulative.push(acc);
        }
        if let Some(last) = cumulative.last_mut() {
            *last = 1.0;
        }
        Ok(Self { moves, cumulative })
    }

    /// The probability of each move, in the order of [`Self::moves`].
    pub fn weights(&self) -> Vec<f64> {
        let mut previous = 0.0;
        self.cumulative
            .iter()
            .map(|&c| {
                let w = c - previous;
                previous = c;
                w
            })
            .collect()
    }

    /// The moves of the mixture.
    pub fn moves(&self) -> impl Iterator<Item = &dyn EnsembleMove> {
        self.moves.iter().map(|m| m.as_ref())
    }

    pub(crate) fn validate(&self, half: usize) -> Result<(), SamplerError> {
        for m in &self.moves {
            m.validate()?;
            let need = m.walkers_needed();
            if half < need {
                return Err(SamplerError::Config(format!(
                    "move {m:?} needs {need} walkers in each half of the ensemble, have {half}"
                )));
            }
        }
        Ok(())
    }

    /// The moves' names, weights and states, as a checkpoint records them.
    pub(crate) fn checkpoint_states(&self) -> Vec<MoveRecord> {
        self.moves
            .iter()
            .zip(&self.cumulative)
            .map(|(m, &c)| MoveRecord {
                name: m.name().to_string(),
                cumulative_bits: c.to_bits(),
                state: m.state().to_string(),
            })
            .collect()
    }

    /// Hands each move its checkpointed state; the moves and weights must
    /// be those of the checkpoint.
    pub(crate) fn restore(&mut self, records: &[MoveRecord]) -> Result<(), SamplerError> {
        let names = |r: &[MoveRecord]| r.iter().map(|r| r.name.clone()).collect::<Vec<_>>();
        let ours = self.checkpoint_states();
        let same_moves = records.len() == ours.len()
            && records
                .iter()
                .zip(&ours)
                .all(|(a, b)| a.name == b.name && a.cumulative_bits == b.cumulative_bits);
        if !same_moves {
            return Err(SamplerError::CheckpointMismatch(format!(
                "the checkpoint's moves {:?} with weights {:?} differ from this run's {:?} with {:?}",
                names(records),
                records
                    .iter()
                    .map(|r| f64::from_bits(r.cumulative_bits))
                    .collect::<Vec<_>>(),
                names(&ours),
                self.cumulative
            )));
        }
        for (m, r) in self.moves.iter_mut().zip(records) {
            let state: serde_json::Value = serde_json::from_str(&r.state).map_err(|e| {
                SamplerError::CheckpointMismatch(format!(
                    "the checkpoint's {} move state is not readable: {e}",
                    r.name
                ))
            })?;
            m.restore(&state)?;
        }
        Ok(())
    }

    #[inline]
    fn pick(&self, u: f64) -> &dyn EnsembleMove {
        let idx = self
            .cumulative
            .iter()
            .position(|&c| u < c)
            .unwrap_or(self.moves.len() - 1);
        self.moves[idx].as_ref()
    }
}

/// Scratch buffers of one walker, allocated once so that proposals allocate nothing.
#[derive(Clone, Debug)]
pub(crate) struct Scratch {
    pub proposal: Vec<f64>,
    pub buffers: MoveBuffers,
}

impl Scratch {
    pub fn new(dim: usize, half: usize) -> Self {
        Self {
            proposal: vec![0.0; dim],
            buffers: MoveBuffers {
                indices: (0..half).collect(),
                vector: vec![0.0; dim],
            },
        }
    }
}

/// Writes a proposal for the walker at `x` into `scratch.proposal` and
/// returns the log of the proposal's Metropolis-Hastings factor: picks one
/// move of the mixture (a uniform draw from the walker's stream, only when
/// there is a choice) and lets it propose.
#[inline]
pub(crate) fn propose(
    mixture: &MoveMixture,
    x: &[f64],
    complement: &Complement<'_>,
    rng: &mut StreamRng,
    scratch: &mut Scratch,
) -> f64 {
    let u: f64 = if mixture.moves.len() > 1 {
        rng.gen()
    } else {
        0.0
    };
    mixture.pick(u).propose(
        x,
        complement,
        rng,
        &mut scratch.proposal,
        &mut scratch.buffers,
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Weights are normalised and kept in order; a mixture equals another
    /// with the same moves, states and weights, and not one with other
    /// parameters.
    #[test]
    fn mixture_weights_and_equality() {
        let m = MoveMixture::new(vec![
            weighted(Stretch::default(), 3.0),
            weighted(DifferentialEvolution::default(), 7.0),
        ])
        .unwrap();
        let w = m.weights();
        assert!((w[0] - 0.3).abs() < 1e-15 && (w[1] - 0.7).abs() < 1e-15);
        assert_eq!(m, m.clone());
        let other = MoveMixture::new(vec![
            weighted(Stretch { a: 2.5 }, 3.0),
            weighted(DifferentialEvolution::default(), 7.0),
        ])
        .unwrap();
        assert_ne!(m, other);
    }

    /// A checkpointed state restores into the same mixture and is refused
    /// by one with other parameters or other weights.
    #[test]
    fn restore_checks_moves_and_states() {
        let m = MoveMixture::new(vec![
            weighted(Stretch::default(), 0.5),
            weighted(Walk { subset: Some(4) }, 0.5),
        ])
        .unwrap();
        let records = m.checkpoint_states();
        assert!(m.clone().restore(&records).is_ok());
        let mut changed = MoveMixture::new(vec![
            weighted(Stretch::default(), 0.5),
            weighted(Walk { subset: Some(5) }, 0.5),
        ])
        .unwrap();
        let err = changed.restore(&records).unwrap_err().to_string();
        assert!(err.contains("walk") && err.contains("subset"), "{err}");
        let mut reweighted = MoveMixture::new(vec![
            weighted(Stretch::default(), 0.6),
            weighted(Walk { subset: Some(4) }, 0.4),
        ])
        .unwrap();
        assert!(reweighted.restore(&records).is_err());
    }
}
