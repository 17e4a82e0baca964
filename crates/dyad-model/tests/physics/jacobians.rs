//! Priors are stated on physical quantities; the sampler sees a density in
//! its own coordinates, which must carry the Jacobian of the map. These
//! tests integrate exp(ln prior term) numerically over each block of
//! sampled coordinates and check that the implied distribution of the
//! physical quantity is the requested prior (total mass 1, and its
//! cumulative distribution at chosen points). Reference CDFs: the priors'
//! own `cdf` (tested by model-io against statrs) and closed forms stated
//! beside each check (e.g. isotropic orientation: P(i < i0) = (1 - cos i0)/2,
//! common practice).

use std::f64::consts::PI;

use rand::SeedableRng;
use rand_xoshiro::Xoshiro256PlusPlus;

use dyad_model::data::Dataset;
use dyad_model::likelihood::Model;
use dyad_model::params::{InclinationPrior, ModelPriors, ScaledPrior};
use dyad_model::prior::Prior;

use crate::common::{invented_physical, small_joint_dataset};

fn term(model: &Model, x: &[f64], name: &str) -> f64 {
    model
        .layout()
        .log_prior_terms(x)
        .into_iter()
        .find(|(n, _)| *n == name)
        .unwrap_or_else(|| panic!("no prior term {name}"))
        .1
}

fn index(model: &Model, name: &str) -> usize {
    model
        .parameter_names()
        .iter()
        .position(|n| n == name)
        .unwrap_or_else(|| panic!("no {name}"))
}

fn model_with(data: &Dataset, edit: impl FnOnce(&mut ModelPriors)) -> (Model, Vec<f64>) {
    let mut priors = ModelPriors::defaults(data);
    edit(&mut priors);
    let model = Model::new(data.clone(), &priors).unwrap();
    let mut truth = invented_physical();
    if data.velocities.is_empty() {
        truth.offsets_kms.clear();
        truth.jitters_kms.clear();
    }
    // Put the node inside [0, pi) so it is valid in every mode.
    truth.orbit.node_rad = Some(1.2);
    let x = model.layout().from_physical(&truth).unwrap();
    (model, x)
}

/// Midpoint-rule integral over one coordinate on [lo, hi] of exp(term);
/// returns (total, mass where `region(value)`).
fn integrate_1d(
    model: &Model,
    x0: &[f64],
    i: usize,
    name: &str,
    (lo, hi): (f64, f64),
    n: usize,
    region: impl Fn(f64) -> bool,
) -> (f64, f64) {
    let h = (hi - lo) / n as f64;
    let mut x = x0.to_vec();
    let (mut total, mut inside) = (0.0, 0.0);
    for k in 0..n {
        x[i] = lo + (k as f64 + 0.5) * h;
        let w = term(model, &x, name).exp() * h;
        total += w;
        if region(x[i]) {
            inside += w;
        }
    }
    (total, inside)
}

/// Integral over a coordinate pair (iu, iv) in polar form
/// u = r cos t, v = r sin t, du dv = r dr dt (radius up to `r_max`);
/// `region(r, t)` selects the part whose mass is returned.
fn integrate_pair(
    model: &Model,
    x0: &[f64],
    (iu, iv): (usize, usize),
    name: &str,
    r_max: f64,
    (nr, nt): (usize, usize),
    region: impl Fn(f64, f64) -> bool,
) -> (f64, f64) {
    let hr = r_max / nr as f64;
    let ht = 2.0 * PI / nt as f64;
    let mut x = x0.to_vec();
    let (mut total, mut inside) = (0.0, 0.0);
    for a in 0..nr {
        let r = (a as f64 + 0.5) * hr;
        for b in 0..nt {
            let t = -PI + (b as f64 + 0.5) * ht;
            x[iu] = r * t.cos();
            x[iv] = r * t.sin();
            let w = term(model, &x, name).exp() * r * hr * ht;
            total += w;
            if region(r, t) {
                inside += w;
            }
        }
    }
    (total, inside)
}

fn close(what: &str, got: f64, want: f64, tol: f64) {
    assert!(
        (got - want).abs() < tol,
        "{what}: got {got}, want {want} (tol {tol})"
    );
}

#[test]
fn period_prior_in_log_coordinate() {
    let data = small_joint_dataset();
    // Default: log-uniform on [0.1, 1e6] d, so P(P < 1000 d) = ln(1e4) / ln(1e7) = 4/7.
    let (model, x) = model_with(&data, |_| {});
    let i = index(&model, "ln_period_days");
    let (total, below) = integrate_1d(&model, &x, i, "period", (-5.0, 16.0), 200_000, |s| {
        s.exp() < 1000.0
    });
    close("mass", total, 1.0, 1e-4);
    close("P(P < 1000 d)", below, 4.0 / 7.0, 1e-4);

    // A normal prior in years (scale 365.25 d per year): P(P < 32 yr) = Phi(2/3).
    let prior = Prior::normal(30.0, 3.0).unwrap();
    let (model, x) = model_with(&data, |p| p.period_days = ScaledPrior::new(prior, 365.25));
    let (total, below) = integrate_1d(&model, &x, i, "period", (7.0, 11.0), 200_000, |s| {
        s.exp() < 32.0 * 365.25
    });
    close("mass", total, 1.0, 1e-4);
    close("P(P < 32 yr)", below, prior.cdf(32.0), 1e-4);
}

#[test]
fn eccentricity_pair_carries_factor_two() {
    let data = small_joint_dataset();
    let e_prior = Prior::beta(2.0, 5.0).unwrap();
    let w_prior = Prior::normal(60.0, 40.0).unwrap(); // degrees, wrapped onto the circle
    let (model, x) = model_with(&data, |p| {
        p.eccentricity = ScaledPrior::internal(e_prior);
        p.omega_rad = ScaledPrior::new(w_prior, PI / 180.0);
    });
    let iu = index(&model, "sqrt_e_cos_omega");
    let iv = index(&model, "sqrt_e_sin_omega");
    let name = "eccentricity and omega";
    // Radius sqrt(e) up to 1; e < 0.25 is r < 0.5 (a grid edge).
    let (total, low_e) =
        integrate_pair(&model, &x, (iu, iv), name, 1.0, (2000, 720), |r, _| r < 0.5);
    close("mass", total, 1.0, 2e-4);
    close("P(e < 0.25)", low_e, e_prior.cdf(0.25), 2e-4);
    // omega in [0, 90 deg): wrapped normal, sum over turns.
    let (_, quarter) = integrate_pair(&model, &x, (iu, iv), name, 1.0, (500, 720), |_, t| {
        (0.0..PI / 2.0).contains(&t)
    });
    let wrapped: f64 = (-3..=3)
        .map(|k| w_prior.cdf(90.0 + 360.0 * k as f64) - w_prior.cdf(360.0 * k as f64))
        .sum();
    close("P(0 <= omega < 90 deg)", quarter, wrapped, 2e-4);
}

#[test]
fn phase_and_node_pairs() {
    let data = small_joint_dataset();
    let node_prior = Prior::normal(100.0, 50.0).unwrap();
    let (model, x) = model_with(&data, |p| {
        p.node_rad = ScaledPrior::new(node_prior, PI / 180.0)
    });
    let pu = index(&model, "phase_u");
    let pv = index(&model, "phase_v");
    // Uniform phase: P(0 <= lambda < 1 rad) = 1 / (2 pi).
    let (total, part) = integrate_pair(&model, &x, (pu, pv), "phase", 9.0, (900, 720), |_, t| {
        (0.0..1.0).contains(&t)
    });
    close("phase mass", total, 1.0, 1e-4);
    close("P(lambda in [0, 1))", part, 1.0 / (2.0 * PI), 2e-3);

    // Joint mode: Omega on the full circle, wrapped normal.
    let nu = index(&model, "node_u");
    let nv = index(&model, "node_v");
    let (total, part) = integrate_pair(&model, &x, (nu, nv), "node", 9.0, (900, 720), |_, t| {
        (0.0..120f64.to_radians()).contains(&t)
    });
    let want: f64 = (-3..=3)
        .map(|k| node_prior.cdf(120.0 + 360.0 * k as f64) - node_prior.cdf(360.0 * k as f64))
        .sum();
    close("node mass", total, 1.0, 1e-4);
    close("P(Omega in [0, 120 deg))", part, want, 2e-4);

    // Astrometry alone: Omega = atan2(v, u) / 2 on [0, 180 deg), the prior
    // folded: P(Omega in [0, 60 deg)) = sum_k [F(60 + 180 k) - F(180 k)].
    let mut astro = data.clone();
    astro.velocities.clear();
    astro.instruments.clear();
    let (model, x) = model_with(&astro, |p| {
        p.node_rad = ScaledPrior::new(node_prior, PI / 180.0)
    });
    let nu = index(&model, "node_u");
    let nv = index(&model, "node_v");
    // Polar angle t in (-pi, pi] maps to Omega = t/2 mod pi: Omega in [0, 60)
    // deg is t in [0, 120) deg.
    let (total, part) = integrate_pair(&model, &x, (nu, nv), "node", 9.0, (900, 720), |_, t| {
        (0.0..120f64.to_radians()).contains(&t)
    });
    let want: f64 = (-3..=3)
        .map(|k| node_prior.cdf(60.0 + 180.0 * k as f64) - node_prior.cdf(180.0 * k as f64))
        .sum();
    close("folded node mass", total, 1.0, 1e-4);
    close("P(Omega in [0, 60 deg)), folded", part, want, 2e-4);
}

#[test]
fn inclination_in_cosine() {
    let data = small_joint_dataset();
    let (model, x) = model_with(&data, |_| {});
    let i = index(&model, "cos_inclination");
    // Isotropic: P(i < 60 deg) = (1 - cos 60 deg) / 2 = 1/4.
    let (total, part) = integrate_1d(&model, &x, i, "inclination", (-1.0, 1.0), 100_000, |c| {
        c.acos() < 60f64.to_radians()
    });
    close("mass", total, 1.0, 1e-6);
    close("P(i < 60 deg)", part, 0.25, 1e-4);

    // A truncated normal on i in degrees: p(c) = p(i) / sin i.
    let prior = Prior::truncated_normal(70.0, 20.0, 0.0, 180.0).unwrap();
    let (model, x) = model_with(&data, |p| {
        p.inclination = InclinationPrior::Angle(ScaledPrior::new(prior, PI / 180.0))
    });
    let (total, part) = integrate_1d(&model, &x, i, "inclination", (-1.0, 1.0), 400_000, |c| {
        c.acos().to_degrees() < 80.0
    });
    close("mass", total, 1.0, 1e-3);
    close("P(i < 80 deg)", part, prior.cdf(80.0), 1e-3);
}

#[test]
fn mass_parallax_ratio_and_instrument_terms() {
    let data = small_joint_dataset();
    let mass = Prior::log_normal(1.0, 0.5).unwrap();
    let plx = Prior::truncated_normal(40.0, 2.0, 0.0, f64::INFINITY).unwrap();
    let q = Prior::beta(2.0, 2.0).unwrap();
    let jitter = Prior::log_uniform(0.01, 5.0).unwrap();
    let offset = Prior::normal(10.0, 4.0).unwrap();
    let (model, x) = model_with(&data, |p| {
        p.total_mass_msun = ScaledPrior::internal(mass);
        p.parallax_mas = ScaledPrior::internal(plx);
        p.mass_ratio = ScaledPrior::internal(q);
        p.jitter_kms = vec![ScaledPrior::internal(jitter); 2];
        p.offset_kms = vec![ScaledPrior::internal(offset); 2];
    });
    // (coordinate, prior term, integration range, threshold, map to physics, CDF there)
    type Check = (
        &'static str,
        &'static str,
        (f64, f64),
        f64,
        fn(f64) -> f64,
        f64,
    );
    let checks: [Check; 5] = [
        (
            "ln_total_mass_msun",
            "total mass",
            (-3.0, 5.0),
            3.0,
            f64::exp,
            mass.cdf(3.0),
        ),
        (
            "parallax_mas",
            "parallax",
            (20.0, 60.0),
            41.0,
            |v| v,
            plx.cdf(41.0),
        ),
        (
            "mass_ratio",
            "mass ratio",
            (0.0, 1.0),
            0.3,
            |v| v,
            q.cdf(0.3),
        ),
        (
            "ln_jitter_kms[north]",
            "jitter",
            (-6.0, 3.0),
            0.5,
            f64::exp,
            jitter.cdf(0.5),
        ),
        (
            "offset_kms[north]",
            "offset",
            (-20.0, 40.0),
            12.0,
            |v| v,
            offset.cdf(12.0),
        ),
    ];
    for (coordinate, name, range, at, to_physical, want) in checks {
        let i = index(&model, coordinate);
        let (total, part) =
            integrate_1d(&model, &x, i, name, range, 200_000, |s| to_physical(s) < at);
        close(&format!("{coordinate} mass"), total, 1.0, 1e-4);
        close(&format!("{coordinate} cdf"), part, want, 1e-4);
    }
}

#[test]
fn log_prior_is_the_sum_of_its_terms() {
    let data = small_joint_dataset();
    let (model, x) = model_with(&data, |_| {});
    let sum: f64 = model.layout().log_prior_terms(&x).iter().map(|t| t.1).sum();
    assert!((model.log_prior(&x) - sum).abs() < 1e-12);
    assert!(sum.is_finite());
}

#[test]
fn prior_draws_follow_the_prior_density() {
    // Draws in sampled coordinates (sample_prior) against the physical
    // priors: fractions below a threshold within 5 binomial sigma (seeded).
    let data = small_joint_dataset();
    let e_prior = Prior::beta(2.0, 5.0).unwrap();
    let (model, _) = model_with(&data, |p| p.eccentricity = ScaledPrior::internal(e_prior));
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(7);
    let n = 20_000;
    let (iu, iv) = (
        index(&model, "sqrt_e_cos_omega"),
        index(&model, "sqrt_e_sin_omega"),
    );
    let ic = index(&model, "cos_inclination");
    let ip = index(&model, "ln_period_days");
    let (mut low_e, mut low_i, mut short) = (0usize, 0usize, 0usize);
    for _ in 0..n {
        let x = model.layout().sample_prior(&mut rng);
        assert!(model.log_prior(&x).is_finite());
        if x[iu] * x[iu] + x[iv] * x[iv] < 0.25 {
            low_e += 1;
        }
        if x[ic].acos() < 60f64.to_radians() {
            low_i += 1;
        }
        if x[ip].exp() < 1000.0 {
            short += 1;
        }
    }
    for (what, count, p) in [
        ("e < 0.25", low_e, e_prior.cdf(0.25)),
        ("i < 60 deg", low_i, 0.25),
        ("P < 1000 d", short, 4.0 / 7.0),
    ] {
        let sigma = (p * (1.0 - p) / n as f64).sqrt();
        let f = count as f64 / n as f64;
        assert!((f - p).abs() < 5.0 * sigma, "{what}: fraction {f} vs {p}");
    }
}
