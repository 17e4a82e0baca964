//! Start-up checks of the initial ensemble.

use dyad_sampler::{
    check_initial_ensemble, ensemble_rank, run, FnDensity, FnLogPdf, MemorySink, RunConfig,
    RunControl, SamplerError, Start,
};
use rand::Rng;

fn normal3() -> impl dyad_sampler::LogDensity {
    FnLogPdf::new(3, |x: &[f64]| -0.5 * x.iter().map(|v| v * v).sum::<f64>())
}

#[test]
fn too_few_or_odd_walkers_are_refused_with_advice() {
    let mut sink = MemorySink::for_samples(3, 6);
    let start = Start::Ball {
        centre: vec![0.0; 3],
        scale: vec![1.0; 3],
    };
    for nw in [6, 7, 9] {
        let err = run(
            &normal3(),
            &RunConfig::new(nw, 1, 10),
            &start,
            &mut sink,
            RunControl::default(),
        )
        .unwrap_err();
        match err {
            SamplerError::BadEnsemble { advice, .. } => {
                assert!(advice.contains("more than twice"), "{advice}")
            }
            e => panic!("unexpected error {e}"),
        }
    }
}

#[test]
fn zero_spread_ball_is_degenerate() {
    let mut sink = MemorySink::for_samples(3, 8);
    let start = Start::Ball {
        centre: vec![0.0; 3],
        scale: vec![1.0, 0.0, 1.0],
    };
    let err = run(
        &normal3(),
        &RunConfig::new(8, 1, 10),
        &start,
        &mut sink,
        RunControl::default(),
    )
    .unwrap_err();
    assert!(matches!(err, SamplerError::BadEnsemble { .. }), "{err}");
    assert!(err.to_string().contains("spread"), "{err}");
}

#[test]
fn walkers_on_a_line_span_one_dimension() {
    // 8 walkers on the line x = y = z: rank 1 of 3.
    let pos: Vec<f64> = (0..8)
        .flat_map(|w| [w as f64, w as f64, w as f64])
        .collect();
    assert_eq!(ensemble_rank(&pos, 8, 3), 1);
    let err = check_initial_ensemble(&pos, 8, 3).unwrap_err();
    assert!(err.to_string().contains("spans only 1 of 3"), "{err}");
    let mut sink = MemorySink::for_samples(3, 8);
    let err = run(
        &normal3(),
        &RunConfig::new(8, 1, 10),
        &Start::Positions(pos),
        &mut sink,
        RunControl::default(),
    )
    .unwrap_err();
    assert!(err.to_string().contains("widen"), "{err}");
}

#[test]
fn full_rank_random_ensemble_passes() {
    let mut rng = <rand_xoshiro::Xoshiro256PlusPlus as rand::SeedableRng>::seed_from_u64(8);
    let pos: Vec<f64> = (0..8 * 3).map(|_| rng.gen::<f64>()).collect();
    assert_eq!(ensemble_rank(&pos, 8, 3), 3);
    check_initial_ensemble(&pos, 8, 3).unwrap();
}

#[test]
fn duplicate_walkers_are_reported() {
    let mut pos: Vec<f64> = (0..8 * 3).map(|i| ((i * 7919) % 31) as f64).collect();
    let (a, b) = pos.split_at_mut(3 * 5);
    b[..3].copy_from_slice(&a[3 * 2..3 * 3]);
    let err = check_initial_ensemble(&pos, 8, 3).unwrap_err();
    assert!(err.to_string().contains("walkers 2 and 5"), "{err}");
}

#[test]
fn start_outside_support_is_reported() {
    let target = FnDensity::new(
        1,
        |x: &[f64]| if x[0] > 0.0 { 0.0 } else { f64::NEG_INFINITY },
        |x: &[f64]| -x[0],
    );
    let pos: Vec<f64> = vec![1.0, 2.0, 3.0, -1.0];
    let mut sink = MemorySink::for_samples(1, 4);
    let err = run(
        &target,
        &RunConfig::new(4, 1, 10),
        &Start::Positions(pos),
        &mut sink,
        RunControl::default(),
    )
    .unwrap_err();
    assert!(err.to_string().contains("walker 3"), "{err}");
}

#[test]
fn no_valid_start_after_n_tries_is_a_typed_error() {
    let target = FnLogPdf::new(2, |_x: &[f64]| f64::NEG_INFINITY);
    let mut config = RunConfig::new(6, 1, 10);
    config.start_tries = 50;
    let mut sink = MemorySink::for_samples(2, 6);
    let draw = |rng: &mut dyn rand::RngCore, x: &mut [f64]| {
        for v in x.iter_mut() {
            *v = rng.gen::<f64>();
        }
    };
    let err = run(
        &target,
        &config,
        &Start::Draws(&draw),
        &mut sink,
        RunControl::default(),
    )
    .unwrap_err();
    assert!(
        matches!(
            err,
            SamplerError::NoValidStart {
                walker: 0,
                rung: 0,
                tries: 50
            }
        ),
        "{err}"
    );
}

#[test]
fn prior_draws_skip_points_of_zero_density() {
    // Half of the draws fall outside the support; every start must be inside.
    let target = FnDensity::new(
        2,
        |x: &[f64]| if x[0] > 0.0 { 0.0 } else { f64::NEG_INFINITY },
        |x: &[f64]| -0.5 * (x[0] * x[0] + x[1] * x[1]),
    );
    let draw = |rng: &mut dyn rand::RngCore, x: &mut [f64]| {
        for v in x.iter_mut() {
            *v = rng.gen::<f64>() * 2.0 - 1.0;
        }
    };
    let mut config = RunConfig::new(8, 3, 1);
    config.convergence = None;
    let mut sink = MemorySink::for_samples(2, 8);
    run(
        &target,
        &config,
        &Start::Draws(&draw),
        &mut sink,
        RunControl::default(),
    )
    .unwrap();
    let table = sink.table();
    assert_eq!(table.len(), 1);
    assert!(table.column(0, 0).iter().all(|v| *v > 0.0));
}
