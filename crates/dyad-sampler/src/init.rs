//! Initial ensembles and the start-up check.

use rand::RngCore;
use rand_distr::{Distribution, StandardNormal};

use crate::density::LogDensity;
use crate::error::SamplerError;

/// A user function that writes one random starting point (for example a
/// prior draw) into its second argument using the given generator.
pub type DrawFn<'a> = &'a (dyn Fn(&mut dyn RngCore, &mut [f64]) + Sync);

/// How to place the walkers before the first step.
#[derive(Clone)]
pub enum Start<'a> {
    /// A Gaussian ball: coordinate i of each walker is `centre[i] + scale[i] * n`,
    /// n ~ N(0, 1). Every scale must be > 0. A draw where the density is
    /// zero or not finite (a prior bound, a window edge) is redrawn, and the
    /// ball shrinks by half after every [`SHRINK_EVERY`] failed draws of a
    /// walker: when the centre has a finite density the walker is so placed
    /// near it, inside the support, even when the centre sits at a bound.
    Ball {
        /// Centre of the ball (a good guess of the mode).
        centre: Vec<f64>,
        /// Per-parameter spread.
        scale: Vec<f64>,
    },
    /// Several Gaussian balls (e.g. one per mode of a multimodal
    /// posterior): walker w is drawn from ball `w % centres.len()`. Every
    /// centre must have a finite density; see [`Start::Ball`] for how walkers
    /// are kept inside the support.
    Balls {
        /// Centres of the balls.
        centres: Vec<Vec<f64>>,
        /// Per-parameter spread of each ball (all > 0).
        scales: Vec<Vec<f64>>,
    },
    /// Independent draws from a user function (typically the prior).
    Draws(DrawFn<'a>),
    /// Explicit positions, walker-major (`[walker * dim + i]`), used for every
    /// temperature of a tempered run.
    Positions(Vec<f64>),
}

impl std::fmt::Debug for Start<'_> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Start::Ball { centre, scale } => f
                .debug_struct("Ball")
                .field("centre", centre)
                .field("scale", scale)
                .finish(),
            Start::Balls { centres, .. } => {
                f.debug_struct("Balls").field("n", &centres.len()).finish()
            }
            Start::Draws(_) => f.write_str("Draws(..)"),
            Start::Positions(p) => f.debug_tuple("Positions").field(&p.len()).finish(),
        }
    }
}

/// Valid start: finite log prior and finite log likelihood.
pub(crate) fn density_at<D: LogDensity + ?Sized>(density: &D, x: &[f64]) -> Option<(f64, f64)> {
    let lp = density.log_prior(x);
    if !lp.is_finite() {
        return None;
    }
    let ll = density.log_likelihood(x);
    ll.is_finite().then_some((lp, ll))
}

/// Places `n_walkers` walkers (walker-major positions) and returns
/// positions, log priors and log likelihoods.
#[allow(clippy::type_complexity)]
pub(crate) fn place_walkers<D: LogDensity + ?Sized>(
    density: &D,
    start: &Start<'_>,
    n_walkers: usize,
    rung: usize,
    max_tries: usize,
    rng: &mut dyn RngCore,
) -> Result<(Vec<f64>, Vec<f64>, Vec<f64>), SamplerError> {
    let dim = density.dim();
    let mut pos = vec![0.0; n_walkers * dim];
    let mut lps = vec![0.0; n_walkers];
    let mut lls = vec![0.0; n_walkers];
    match start {
        Start::Positions(p) => {
            if p.len() != n_walkers * dim {
                return Err(SamplerError::Config(format!(
                    "explicit start holds {} numbers, expected n_walkers * dim = {}",
                    p.len(),
                    n_walkers * dim
                )));
            }
            pos.copy_from_slice(p);
            for w in 0..n_walkers {
                let (lp, ll) =
                    density_at(density, &pos[w * dim..(w + 1) * dim]).ok_or_else(|| {
                        SamplerError::BadEnsemble {
                        problem: format!(
                            "walker {w} starts where the density is zero or not finite"
                        ),
                        advice:
                            "move it inside the prior support and where the likelihood is finite"
                                .into(),
                    }
                    })?;
                lps[w] = lp;
                lls[w] = ll;
            }
        }
        Start::Ball { centre, scale } => {
            let balls = (std::slice::from_ref(centre), std::slice::from_ref(scale));
            let out = (&mut pos[..], &mut lps[..], &mut lls[..]);
            place_in_balls(density, balls, out, rung, max_tries, rng)?;
        }
        Start::Balls { centres, scales } => {
            let out = (&mut pos[..], &mut lps[..], &mut lls[..]);
            place_in_balls(density, (centres, scales), out, rung, max_tries, rng)?;
        }
        Start::Draws(draw) => {
            let out = (&mut pos[..], &mut lps[..], &mut lls[..]);
            draw_walkers(density, out, rung, max_tries, rng, &mut |rng, _, _, x| {
                draw(rng, x)
            })?;
        }
    }
    Ok((pos, lps, lls))
}

/// Failed draws of a walker after which its start ball shrinks by half.
pub const SHRINK_EVERY: usize = 10;

/// Checks the balls and draws walker w from ball `w % n`, shrinking a
/// walker's ball by half after every [`SHRINK_EVERY`] failed draws when the
/// centre itself has a finite density (so the draws end up inside the
/// support near the centre, by construction).
fn place_in_balls<D: LogDensity + ?Sized>(
    density: &D,
    (centres, scales): (&[Vec<f64>], &[Vec<f64>]),
    out: (&mut [f64], &mut [f64], &mut [f64]),
    rung: usize,
    max_tries: usize,
    rng: &mut dyn RngCore,
) -> Result<(), SamplerError> {
    let dim = density.dim();
    if centres.is_empty() || centres.len() != scales.len() {
        return Err(SamplerError::Config(format!(
            "{} start-ball centres and {} scales",
            centres.len(),
            scales.len()
        )));
    }
    let mut shrinks = Vec::with_capacity(centres.len());
    for (centre, scale) in centres.iter().zip(scales) {
        if centre.len() != dim || scale.len() != dim {
            return Err(SamplerError::Config(format!(
                "start ball has {} centre and {} scale values for {dim} parameters",
                centre.len(),
                scale.len()
            )));
        }
        if let Some(i) = scale.iter().position(|s| !(*s > 0.0 && s.is_finite())) {
            return Err(SamplerError::BadEnsemble {
                problem: format!("start-ball scale of parameter {i} is {}", scale[i]),
                advice: "give every parameter a positive spread, otherwise the walkers \
                         span fewer dimensions than the problem"
                    .into(),
            });
        }
        shrinks.push(density_at(density, centre).is_some());
    }
    draw_walkers(density, out, rung, max_tries, rng, &mut |rng, w, t, x| {
        let b = w % centres.len();
        let factor = if shrinks[b] {
            0.5f64.powi((t / SHRINK_EVERY) as i32)
        } else {
            1.0
        };
        for (i, xi) in x.iter_mut().enumerate() {
            let n: f64 = StandardNormal.sample(rng);
            *xi = centres[b][i] + factor * scales[b][i] * n;
        }
    })
}

/// A start proposal: (generator, walker, failed tries so far, position to fill).
type Proposal<'a> = dyn FnMut(&mut dyn RngCore, usize, usize, &mut [f64]) + 'a;

/// Fills every walker's position with proposals until one has a finite
/// density (at most `max_tries` per walker), recording its log prior and
/// log likelihood. `propose` gets the walker and the number of its failed
/// tries so far.
fn draw_walkers<D: LogDensity + ?Sized>(
    density: &D,
    (pos, lps, lls): (&mut [f64], &mut [f64], &mut [f64]),
    rung: usize,
    max_tries: usize,
    rng: &mut dyn RngCore,
    propose: &mut Proposal<'_>,
) -> Result<(), SamplerError> {
    let dim = density.dim();
    for w in 0..lps.len() {
        let x = &mut pos[w * dim..(w + 1) * dim];
        let found = (0..max_tries).find_map(|t| {
            propose(rng, w, t, x);
            density_at(density, x)
        });
        let (lp, ll) = found.ok_or(SamplerError::NoValidStart {
            walker: w,
            rung,
            tries: max_tries,
        })?;
        lps[w] = lp;
        lls[w] = ll;
    }
    Ok(())
}

/// Numerical rank of the centred positions (walker-major, `n_walkers x dim`),
/// by modified Gram-Schmidt on the parameter columns (Golub & Van Loan,
/// Matrix Computations, 4th ed., sect. 5.2.8) with a relative tolerance.
pub fn ensemble_rank(positions: &[f64], n_walkers: usize, dim: usize) -> usize {
    let mut cols: Vec<Vec<f64>> = (0..dim)
        .map(|i| {
            let col: Vec<f64> = (0..n_walkers).map(|w| positions[w * dim + i]).collect();
            let mean = col.iter().sum::<f64>() / n_walkers as f64;
            col.into_iter().map(|v| v - mean).collect()
        })
        .collect();
    let mut basis: Vec<Vec<f64>> = Vec::new();
    for col in cols.iter_mut() {
        let norm0 = col.iter().map(|v| v * v).sum::<f64>().sqrt();
        if norm0.is_nan() || norm0 <= 0.0 || !norm0.is_finite() {
            continue;
        }
        for q in &basis {
            let dot: f64 = q.iter().zip(col.iter()).map(|(a, b)| a * b).sum();
            col.iter_mut().zip(q).for_each(|(c, qv)| *c -= dot * qv);
        }
        let norm = col.iter().map(|v| v * v).sum::<f64>().sqrt();
        if norm > 1e-9 * norm0 {
            basis.push(col.iter().map(|v| v / norm).collect());
        }
    }
    basis.len()
}

/// Checks that an ensemble can explore a `dim`-dimensional space: enough walkers,
/// no duplicates, full rank. Positions are walker-major.
pub fn check_initial_ensemble(
    positions: &[f64],
    n_walkers: usize,
    dim: usize,
) -> Result<(), SamplerError> {
    check_walker_count(n_walkers, dim)?;
    for a in 0..n_walkers {
        for b in (a + 1)..n_walkers {
            if positions[a * dim..(a + 1) * dim] == positions[b * dim..(b + 1) * dim] {
                return Err(SamplerError::BadEnsemble {
                    problem: format!("walkers {a} and {b} start at the same point"),
                    advice: "start every walker at a different point (a ball with a positive \
                             spread, or independent prior draws)"
                        .into(),
                });
            }
        }
    }
    // Each half moves using the other half only, so each half must span the space.
    let half = n_walkers / 2;
    for (name, range) in [("first", 0..half), ("second", half..n_walkers)] {
        let part = &positions[range.start * dim..range.end * dim];
        let rank = ensemble_rank(part, half, dim);
        if rank < dim {
            return Err(SamplerError::BadEnsemble {
                problem: format!(
                    "the {name} half of the walkers spans only {rank} of {dim} dimensions"
                ),
                advice: "widen the start ball (every parameter needs a spread), use prior \
                         draws, or use more walkers; the ensemble moves can never leave a \
                         lower-dimensional subspace"
                    .into(),
            });
        }
    }
    Ok(())
}

pub(crate) fn check_walker_count(n_walkers: usize, dim: usize) -> Result<(), SamplerError> {
    if dim == 0 {
        return Err(SamplerError::Config("the density has no parameters".into()));
    }
    if !n_walkers.is_multiple_of(2) || n_walkers < 2 * dim + 2 {
        return Err(SamplerError::BadEnsemble {
            problem: format!("{n_walkers} walkers for {dim} parameters"),
            advice: format!(
                "use an even number of walkers, more than twice the number of parameters \
                 (at least {}), so that each half of the ensemble spans the space",
                2 * dim + 2
            ),
        });
    }
    Ok(())
}
