//! Held-out coverage of `dyad predict`'s bands: on seeded, invented systems
//! fitted on their first ten years of positions, the true positions at six
//! later epochs (1 to 10 years after the last measurement) must fall inside
//! the 68, 90 and 95 per cent posterior-predictive bands at those rates.
//!
//! What is checked: the band of the *true* position (the noise-free orbit),
//! which is what `dyad predict` reports. A new measurement scatters about
//! the true position by its own error as well; its band would be wider.
//!
//! Why the nominal rate is exact: every true system is drawn from the very
//! prior the fit uses (period, eccentricity, angles, total mass, parallax,
//! periastron time), so for each held-out epoch the truth is a draw from the
//! prior predictive and, if the pipeline is right, lies in the central p
//! interval of the posterior predictive with probability exactly p, averaged
//! over the prior and the noise (the argument of simulation-based
//! calibration: Cook, Gelman & Rubin 2006, J. Comput. Graph. Stat. 15, 675;
//! Talts et al. 2018, arXiv:1804.06788).
//!
//! Period modes: `dyad predict` gives each period mode its own bands. The
//! truth is scored against the whole posterior predictive, the mixture of
//! the modes weighted by their weights, through its CDF at the truth
//! interpolated between each mode's written quantiles (exact with one
//! mode; see `cdf_at`). The test prints which systems had several modes.
//!
//! How points are counted: the systems are independent, so at one held-out
//! epoch the hits of the S systems are S independent Bernoulli(p) trials.
//! The six epochs of one system are not independent (one posterior orbit
//! predicts them all), so the pooled fraction over S x 6 points has a
//! standard error between sqrt(p(1-p)/(6S)) (independent points) and
//! sqrt(p(1-p)/S) (fully correlated points). The test holds every pooled
//! fraction within 2.5 of the larger one (two-sided 1.2 % per check when the
//! pipeline is right) and prints the standard error estimated from the
//! spread of the per-system fractions (cluster sampling: Cochran 1977,
//! "Sampling Techniques", 3rd ed., sect. 9.2). Seeded and deterministic: the
//! same seeds give the same hits on any machine and thread count.
//!
//! Cost: 48 fits of 12 positions (two at a time): 410 s in --release on 2
//! cores under a load average of about 15, under 3 min of CPU.

use std::fs;
use std::path::Path;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::Mutex;

use rand::{Rng, SeedableRng};
use rand_distr::StandardNormal;
use rand_xoshiro::Xoshiro256PlusPlus;

mod support;
use support::run_ok as dyad;

use dyad_model::simulate::Scenario;
use dyad_orbit::time::TimeScale;
use dyad_orbit::Orbit;

/// Number of simulated systems.
const SYSTEMS: usize = 48;

/// Held-out epochs (Julian years); the fitted positions run 2000.0-2010.0.
const HELD_OUT: [f64; 6] = [2011.0, 2012.5, 2014.0, 2016.0, 2018.0, 2020.0];

/// Nominal probabilities of the bands checked and their CSV column suffixes.
const LEVELS: [(f64, &str, &str); 3] = [
    (0.68, "lo68", "hi68"),
    (0.90, "lo90", "hi90"),
    (0.95, "lo95", "hi95"),
];

/// The quantities checked: CSV column stem, and whether it is an angle.
const QUANTITIES: [(&str, bool); 2] = [("sep_mas", false), ("pa_deg", true)];

/// Priors of every fit; `draw_truth` draws from exactly these.
const CONFIG: &str = r#"[data]
astrometry = "positions.csv"
[priors]
period_years = { shape = "log_uniform", min = 3.0, max = 15.0 }
eccentricity = { shape = "uniform", min = 0.0, max = 0.8 }
periastron_argument_deg = { shape = "uniform", min = 0.0, max = 360.0 }
inclination_deg = "isotropic"
total_mass_msun = { shape = "log_uniform", min = 0.8, max = 4.0 }
parallax_mas = { shape = "normal", mean = 25.0, sd = 0.5 }
[sampler]
walkers = 32
max_steps = 8000
effective_draws = 400
burn_in_fraction = 0.5
temperatures = "off"
seed = SEED
[output]
folder = "run"
"#;

/// A log-uniform draw on [lo, hi].
fn log_uniform(rng: &mut Xoshiro256PlusPlus, lo: f64, hi: f64) -> f64 {
    (lo.ln() + rng.gen::<f64>() * (hi / lo).ln()).exp()
}

/// A scenario whose system is drawn from the fit's prior (see [`CONFIG`]):
/// the node uniform on the circle (the astrometric fit folds it onto
/// [0, 180), which leaves the positions unchanged), the periastron time
/// uniform over one period (the fit's phase is uniform on the circle), and
/// the mass ratio, which the positions do not depend on, fixed at 0.6.
fn draw_truth(system: usize) -> String {
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(0xC0FE_0000 + system as u64);
    let period = log_uniform(&mut rng, 3.0, 15.0);
    let eccentricity = rng.gen_range(0.0..0.8);
    let omega = rng.gen_range(0.0..360.0);
    let inclination = rng.gen_range(-1.0f64..1.0).acos().to_degrees();
    let node = rng.gen_range(0.0..360.0);
    let total_mass = log_uniform(&mut rng, 0.8, 4.0);
    let z: f64 = rng.sample(StandardNormal);
    let parallax = 25.0 + 0.5 * z;
    let t_peri = 2005.0 + period * (rng.gen::<f64>() - 0.5);
    let noise_seed = rng.gen_range(0..1u64 << 40);
    let (m1, m2) = (total_mass / 1.6, 0.6 * total_mass / 1.6);
    format!(
        r#"seed = {noise_seed}
noise = true
[system]
name = "held-out coverage system {system} (invented, tests only)"
period_years = {period:?}
periastron_time_jyear = {t_peri:?}
eccentricity = {eccentricity:?}
inclination_deg = {inclination:?}
periastron_argument_deg = {omega:?}
node_deg = {node:?}
mass_primary_msun = {m1:?}
mass_secondary_msun = {m2:?}
parallax_mas = {parallax:?}
[astrometry]
file = "positions.csv"
time_column = "jyear"
form = "cartesian"
first = 2000.0
last = 2010.0
count = 12
dra_error_mas = 2.0
ddec_error_mas = 2.0
corr = 0.0
"#
    )
}

/// `hits[quantity][level][epoch]` of one system.
type Hits = [[[bool; HELD_OUT.len()]; LEVELS.len()]; QUANTITIES.len()];

/// Simulates, fits and predicts system `system` in `dir`; whether each
/// held-out truth lies in each band, and the number of period modes.
fn one_system(dir: &Path, system: usize) -> (Hits, usize) {
    fs::create_dir_all(dir).unwrap();
    let scenario = dir.join("scenario.toml");
    fs::write(&scenario, draw_truth(system)).unwrap();
    dyad(&["simulate".as_ref(), scenario.as_os_str()]);
    let truth = Orbit::new(&Scenario::load(&scenario).unwrap().system.elements).unwrap();
    let config = dir.join("fit.toml");
    fs::write(
        &config,
        CONFIG.replace("SEED", &(1000 + system).to_string()),
    )
    .unwrap();
    dyad(&["fit".as_ref(), config.as_os_str(), "--quiet".as_ref()]);
    let run = dir.join("run");
    let mut args: Vec<std::ffi::OsString> = vec!["predict".into(), run.clone().into()];
    args.extend(HELD_OUT.iter().map(|e| e.to_string().into()));
    let args: Vec<&std::ffi::OsStr> = args.iter().map(|a| a.as_os_str()).collect();
    dyad(&args);

    let csv = fs::read_to_string(run.join("prediction-1/predictions.csv")).unwrap();
    let mut lines = csv.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let rows: Vec<Vec<f64>> = lines
        .map(|l| l.split(',').map(|v| v.parse::<f64>().unwrap()).collect())
        .collect();
    let col = |name: &str| {
        header
            .iter()
            .position(|h| *h == name)
            .unwrap_or_else(|| panic!("no column {name} in {header:?}"))
    };
    let modes = rows.len() / HELD_OUT.len();
    assert_eq!(rows.len(), modes * HELD_OUT.len(), "system {system}");
    let mut hits: Hits = Default::default();
    for (k, &epoch) in HELD_OUT.iter().enumerate() {
        let of_epoch: Vec<&Vec<f64>> = rows
            .iter()
            .filter(|r| r[col("epoch_jyear")] == epoch)
            .collect();
        assert_eq!(of_epoch.len(), modes, "system {system}, epoch {epoch}");
        let s = truth.sky_offset(TimeScale::JulianYear.to_jd(epoch));
        let truth_of = [s.dra.hypot(s.ddec), s.dra.atan2(s.ddec).to_degrees()];
        for (q, &(stem, angle)) in QUANTITIES.iter().enumerate() {
            // The predictive CDF at the truth: the modes' CDFs weighted by
            // the modes' weights (see `cdf_at`).
            let total: f64 = of_epoch.iter().map(|r| r[col("mode_weight")]).sum();
            let cdf: f64 = of_epoch
                .iter()
                .map(|r| {
                    let quantiles = QUANTILE_COLUMNS.map(|(c, _)| r[col(&format!("{stem}_{c}"))]);
                    // Angles: the truth on the turn nearest the mode's median.
                    let median = quantiles[3];
                    let value = if angle {
                        median + (truth_of[q] - median + 180.0).rem_euclid(360.0) - 180.0
                    } else {
                        truth_of[q]
                    };
                    r[col("mode_weight")] / total * cdf_at(&quantiles, value)
                })
                .sum();
            for (l, &(p, _, _)) in LEVELS.iter().enumerate() {
                hits[q][l][k] = (0.5 * (1.0 - p)..=0.5 * (1.0 + p)).contains(&cdf);
            }
        }
    }
    (hits, modes)
}

/// The band columns in increasing order of probability.
const QUANTILE_COLUMNS: [(&str, f64); 7] = [
    ("lo95", 0.025),
    ("lo90", 0.05),
    ("lo68", 0.16),
    ("median", 0.5),
    ("hi68", 0.84),
    ("hi90", 0.95),
    ("hi95", 0.975),
];

/// A mode's predictive CDF at `value`, from its seven quantiles: linear
/// between them, and from 0 to 0.025 (0.975 to 1) over the width of the
/// 95 % interval's tail beyond its ends. With one mode this is exact for the
/// question asked: the truth lies in the central p band if and only if the
/// CDF there lies in [(1-p)/2, (1+p)/2], since the band ends are the
/// quantiles interpolated through. With several modes the interpolation
/// between quantiles is an approximation of the mixture's CDF.
fn cdf_at(quantiles: &[f64; 7], value: f64) -> f64 {
    let (first, last) = (quantiles[0], quantiles[6]);
    let tail = (quantiles[1] - quantiles[0])
        .max(quantiles[6] - quantiles[5])
        .max(1e-12);
    if value < first {
        return 0.025 * (1.0 - (first - value) / tail).max(0.0);
    }
    if value > last {
        return 0.975 + 0.025 * ((value - last) / tail).min(1.0);
    }
    for (w, p) in quantiles.windows(2).zip(QUANTILE_COLUMNS.windows(2)) {
        if value <= w[1] {
            let f = if w[1] > w[0] {
                (value - w[0]) / (w[1] - w[0])
            } else {
                1.0
            };
            return p[0].1 + f * (p[1].1 - p[0].1);
        }
    }
    0.975
}

#[test]
fn held_out_positions_fall_in_the_predictive_bands_at_the_nominal_rates() {
    let dir = tempfile::tempdir().unwrap();
    let next = AtomicUsize::new(0);
    let results: Mutex<Vec<(usize, Hits, usize)>> = Mutex::new(Vec::new());
    // Two systems at a time; each system's result depends on its seeds only.
    std::thread::scope(|scope| {
        for _ in 0..2 {
            scope.spawn(|| loop {
                let system = next.fetch_add(1, Ordering::SeqCst);
                if system >= SYSTEMS {
                    break;
                }
                let (hits, modes) = one_system(&dir.path().join(format!("{system:02}")), system);
                results.lock().unwrap().push((system, hits, modes));
            });
        }
    });
    let mut results = results.into_inner().unwrap();
    results.sort_by_key(|r| r.0);
    assert_eq!(results.len(), SYSTEMS);

    let s = SYSTEMS as f64;
    let n = (SYSTEMS * HELD_OUT.len()) as f64;
    let mut failures = Vec::new();
    let multimodal: Vec<usize> = results.iter().filter(|r| r.2 > 1).map(|r| r.0).collect();
    eprintln!(
        "held-out coverage, {SYSTEMS} systems x {} epochs ({} points per band); \
         systems with several period modes: {multimodal:?}",
        HELD_OUT.len(),
        SYSTEMS * HELD_OUT.len()
    );
    for (q, &(stem, _)) in QUANTITIES.iter().enumerate() {
        for (l, &(p, _, _)) in LEVELS.iter().enumerate() {
            let per_system: Vec<f64> = results
                .iter()
                .map(|(_, h, _)| {
                    h[q][l].iter().filter(|&&x| x).count() as f64 / HELD_OUT.len() as f64
                })
                .collect();
            let pooled = per_system.iter().sum::<f64>() / s;
            let per_epoch: Vec<f64> = (0..HELD_OUT.len())
                .map(|k| results.iter().filter(|(_, h, _)| h[q][l][k]).count() as f64 / s)
                .collect();
            // Cluster-sampling standard error of the pooled fraction
            // (equal cluster sizes): the spread of the per-system fractions.
            let spread = per_system.iter().map(|f| (f - pooled).powi(2)).sum::<f64>() / (s - 1.0);
            let se_cluster = (spread / s).sqrt();
            let se_points = (p * (1.0 - p) / n).sqrt();
            let se_systems = (p * (1.0 - p) / s).sqrt();
            let z = (pooled - p) / se_systems;
            eprintln!(
                "{stem} {:.0} %: pooled {pooled:.3} (binomial sd {se_points:.3} for independent \
                 points, {se_systems:.3} for independent systems; cluster estimate {se_cluster:.3}; \
                 z = {z:+.2} on the systems' sd); per epoch {per_epoch:.3?}",
                100.0 * p
            );
            if z.abs() > 2.5 {
                failures.push(format!(
                    "{stem} {:.0} %: pooled coverage {pooled:.3}, {z:+.2} binomial sd from nominal",
                    100.0 * p
                ));
            }
        }
    }
    assert!(failures.is_empty(), "{failures:#?}");
}
