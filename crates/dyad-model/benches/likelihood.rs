//! The joint log-posterior for 20, 100 and 1000 observations against the
//! cost of the Kepler solves it contains (one per observation). Target: at
//! most 1.5 times the Kepler solves. `log_posterior_error_model`: the same
//! with two astrometric sources, each with a sampled error scale and
//! jitter, and Student-t residuals with sampled degrees of freedom.
//! Results: crates/dyad-model/PERFORMANCE.md.

use criterion::{black_box, criterion_group, criterion_main, BenchmarkId, Criterion};

use dyad_model::astrometry_errors::ResidualDistribution;
use dyad_model::data::{AstrometryEpoch, Dataset, RelativePosition, Star, VelocityPoint};
use dyad_model::likelihood::Model;
use dyad_model::params::{ModelPriors, OrbitalParameters, PhysicalParameters, ScaledPrior};
use dyad_model::prior::Prior;
use dyad_orbit::kepler::{EccentricAnomaly, KeplerSolver, LANES};

fn truth() -> PhysicalParameters {
    PhysicalParameters {
        orbit: OrbitalParameters {
            period_days: 9000.0,
            eccentricity: 0.45,
            omega_rad: 2.0,
            mean_longitude_rad: 0.0,
            t_peri_jd: 2_452_000.0,
            inclination_rad: Some(1.0),
            node_rad: Some(1.3),
            total_mass_msun: Some(2.2),
            parallax_mas: Some(25.0),
            semi_major_axis_au: None,
            semi_major_axis_mas: None,
            mass_ratio: Some(0.7),
            k1_kms: None,
            k2_kms: None,
        },
        offsets_kms: vec![3.0, 3.5],
        jitters_kms: vec![0.2, 0.3],
    }
}

/// `n` observations: half astrometric epochs (alternately polar and
/// Cartesian), half velocities of both stars from two instruments.
fn model(n: usize, error_model: bool) -> (Model, Vec<f64>) {
    let n_astro = n / 2;
    let mut data = Dataset {
        instruments: vec!["a".into(), "b".into()],
        ..Dataset::default()
    };
    for k in 0..n_astro {
        let t = 2_448_000.0 + 12_000.0 * k as f64 / n_astro as f64;
        let position = if k % 2 == 0 {
            RelativePosition::Polar {
                sep_mas: 300.0,
                sep_err_mas: 2.0,
                pa_rad: 1.0,
                pa_err_rad: 0.01,
                corr: 0.1,
            }
        } else {
            RelativePosition::Cartesian {
                dra_mas: 100.0,
                ddec_mas: 200.0,
                dra_err_mas: 2.0,
                ddec_err_mas: 2.0,
                corr: 0.0,
            }
        };
        data.astrometry.push(AstrometryEpoch {
            t_jd: t,
            position,
            source: None,
        });
    }
    for k in 0..n - n_astro {
        data.velocities.push(VelocityPoint {
            t_jd: 2_450_000.0 + 9_000.0 * k as f64 / (n - n_astro) as f64,
            rv_kms: 2.0,
            rv_err_kms: 0.3,
            star: if k % 2 == 0 {
                Star::Primary
            } else {
                Star::Secondary
            },
            instrument: (k / 2) % 2,
        });
    }
    let mut priors = ModelPriors::defaults(&data);
    if error_model {
        // Two sources, each with a sampled scale and jitter, Student-t residuals.
        for (k, a) in data.astrometry.iter_mut().enumerate() {
            a.source = Some(["speckle", "imaging"][k % 2].to_owned());
        }
        priors = ModelPriors::defaults(&data);
        let e = &mut priors.astrometry_errors;
        let log_uniform =
            |lo, hi| ScaledPrior::internal(Prior::log_uniform(lo, hi).expect("valid"));
        e.scale = vec![log_uniform(0.1, 10.0); 2];
        e.jitter_mas = vec![log_uniform(0.01, 10.0); 2];
        e.distribution = ResidualDistribution::StudentT(log_uniform(1.0, 100.0));
    }
    let model = Model::new(data.clone(), &priors).expect("valid model");
    let x = model
        .layout()
        .from_physical(&truth())
        .expect("valid parameters");
    (model, x)
}

fn bench(c: &mut Criterion) {
    let mut group = c.benchmark_group("log_posterior_vs_kepler");
    for n in [20usize, 100, 1000] {
        let (model_errors, x_errors) = model(n, true);
        let (model, x) = model(n, false);
        group.bench_with_input(
            BenchmarkId::new("log_posterior_error_model", n),
            &n,
            |b, _| b.iter(|| model_errors.log_posterior(black_box(&x_errors))),
        );
        let times: Vec<f64> = model
            .dataset()
            .astrometry
            .iter()
            .map(|a| a.t_jd)
            .chain(model.dataset().velocities.iter().map(|v| v.t_jd))
            .collect();
        let elements = model
            .layout()
            .orbital(&x)
            .expect("in domain")
            .campbell_elements();
        group.bench_with_input(BenchmarkId::new("log_posterior", n), &n, |b, _| {
            b.iter(|| model.log_posterior(black_box(&x)))
        });
        // The Kepler solves alone: a solver for this eccentricity and one
        // batched solve per observation, as the likelihood does them.
        group.bench_with_input(BenchmarkId::new("kepler_solves", n), &n, |b, _| {
            b.iter(|| {
                let el = black_box(&elements);
                let solver = KeplerSolver::new(el.e).expect("valid");
                let mut m = [0.0; LANES];
                let mut out = [EccentricAnomaly {
                    e_anom: 0.0,
                    sin_e: 0.0,
                    cos_e: 1.0,
                }; LANES];
                let mut s = 0.0;
                for chunk in times.chunks(LANES) {
                    for (mi, &t) in m.iter_mut().zip(chunk) {
                        *mi = std::f64::consts::TAU * (t - el.t_peri_jd) / el.period_days;
                    }
                    solver.solve_many(&m[..chunk.len()], &mut out[..chunk.len()]);
                    s += out[..chunk.len()].iter().map(|a| a.e_anom).sum::<f64>();
                }
                s
            })
        });
    }
    group.finish();
    // The parts of the fixed cost per call (independent of n).
    let (model, x) = model(20, false);
    let mut parts = c.benchmark_group("per_call_parts");
    parts.bench_function("log_prior", |b| b.iter(|| model.log_prior(black_box(&x))));
    parts.bench_function("to_orbital_parameters", |b| {
        b.iter(|| model.layout().orbital(black_box(&x)))
    });
    let e = model.layout().orbital(&x).expect("in domain").eccentricity;
    parts.bench_function("kepler_solver_new", |b| {
        b.iter(|| KeplerSolver::new(black_box(e)))
    });
    parts.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
