//! Every move alone, and a mixture, on one shared Gaussian target (the way
//! a general-purpose ensemble sampler tests its moves; common practice).

use crate::common::*;
use dyad_sampler::{
    run, weighted, DifferentialEvolution, MemorySink, MoveMixture, RunConfig, RunControl,
    RunStatus, Start, Stretch, Walk,
};

fn check_move(mixture: MoveMixture, seed: u64) {
    let d = 4;
    let centre = vec![1.0, -2.0, 0.5, 3.0];
    let target = Gaussian::rotated(centre, &[0.1, 0.5, 2.0, 10.0], 11);
    let nw = 24;
    let mut config = RunConfig::new(nw, seed, 300_000);
    config.moves = mixture.clone();
    let start = Start::Ball {
        centre: vec![0.0; d],
        scale: vec![0.5; d],
    };
    let mut sink = MemorySink::for_samples(d, nw);
    let result = run(&target, &config, &start, &mut sink, RunControl::default()).unwrap();
    assert_eq!(
        result.status,
        RunStatus::Converged,
        "{mixture:?}: {:?}",
        result.warnings
    );
    let draws = draws_after(sink.table(), d, result.burn_in);
    for i in 0..d {
        let cii = target.cov[i * d + i];
        let ess = draws.ess[i];
        assert_within(
            &format!("{mixture:?}: mean of x{i}"),
            mean(&draws.columns[i]),
            target.mean[i],
            (cii / ess).sqrt(),
            4.0,
        );
        assert_within(
            &format!("{mixture:?}: variance of x{i}"),
            covariance(&draws.columns[i], &draws.columns[i]),
            cii,
            (2.0 * cii * cii / ess).sqrt(),
            4.0,
        );
    }
}

#[test]
fn stretch_move_alone() {
    check_move(MoveMixture::single(Stretch::default()), 1);
}

#[test]
fn differential_evolution_move_alone() {
    check_move(MoveMixture::single(DifferentialEvolution::default()), 2);
}

#[test]
fn walk_move_alone() {
    check_move(MoveMixture::single(Walk { subset: Some(5) }), 3);
}

#[test]
fn weighted_mixture_of_all_moves() {
    let m = MoveMixture::new(vec![
        weighted(Stretch::default(), 0.6),
        weighted(DifferentialEvolution::default(), 0.3),
        weighted(Walk::default(), 0.1),
    ])
    .unwrap();
    check_move(m, 4);
}

#[test]
fn mixture_rejects_bad_weights_and_parameters() {
    assert!(MoveMixture::new(vec![]).is_err());
    assert!(MoveMixture::new(vec![weighted(Stretch::default(), 0.0)]).is_err());
    assert!(MoveMixture::new(vec![weighted(Stretch::default(), -1.0)]).is_err());
    assert!(MoveMixture::new(vec![weighted(Stretch { a: 1.0 }, 1.0)]).is_err());
    assert!(MoveMixture::new(vec![weighted(Walk { subset: Some(1) }, 1.0)]).is_err());
}

/// A move written outside the crate, through the `EnsembleMove` trait: a
/// symmetric Gaussian random-walk step (Metropolis et al. 1953, J. Chem.
/// Phys. 21, 1087: a symmetric proposal has Metropolis-Hastings factor 1),
/// which needs no complementary walker.
#[derive(Clone, Debug, serde::Serialize)]
struct GaussianStep {
    scale: f64,
}

impl dyad_sampler::EnsembleMove for GaussianStep {
    fn name(&self) -> &'static str {
        "gaussian_step"
    }
    fn walkers_needed(&self) -> usize {
        0
    }
    fn propose(
        &self,
        x: &[f64],
        _: &dyad_sampler::Complement<'_>,
        rng: &mut dyad_sampler::StreamRng,
        proposal: &mut [f64],
        _: &mut dyad_sampler::MoveBuffers,
    ) -> f64 {
        use rand::Rng;
        for (y, &xi) in proposal.iter_mut().zip(x) {
            *y = xi + self.scale * rng.sample::<f64, _>(rand_distr::StandardNormal);
        }
        0.0
    }
    fn state(&self) -> serde_json::Value {
        serde_json::to_value(self).unwrap()
    }
}

#[test]
fn a_move_from_outside_the_crate_samples_the_target() {
    let m = MoveMixture::new(vec![
        weighted(Stretch::default(), 0.5),
        weighted(GaussianStep { scale: 0.3 }, 0.5),
    ])
    .unwrap();
    check_move(m, 5);
}
