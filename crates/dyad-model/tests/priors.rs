//! Checks of `dyad_model::prior`: normalisation by numerical quadrature, the
//! cumulative distribution against quadrature of the density, cdf/quantile
//! inverses, densities and moments against statrs 0.17 (a general-purpose
//! statistics library, used here as an independent reference), seeded
//! sampling (moments within 5 Monte-Carlo standard errors and a
//! Kolmogorov-Smirnov test), the TOML form, and every constructor's errors.

use std::path::Path;

use dyad_model::prior::{Prior, PriorShape, MIN_TRUNCATED_MASS};
use dyad_model::ModelError;
use rand::SeedableRng;
use rand_xoshiro::Xoshiro256PlusPlus;
use statrs::distribution::{Continuous, ContinuousCDF};
use statrs::statistics::Distribution as _;

/// Composite two-point Gauss-Legendre rule of f on [a, b] with n intervals
/// (exact for cubics on each interval; never evaluates f at a or b, where a
/// density may be outside its open support).
fn gauss_legendre(f: impl Fn(f64) -> f64, a: f64, b: f64, n: usize) -> f64 {
    let h = (b - a) / n as f64;
    let offset = 0.5 * h / 3f64.sqrt();
    (0..n)
        .map(|k| {
            let mid = a + (k as f64 + 0.5) * h;
            f(mid - offset) + f(mid + offset)
        })
        .sum::<f64>()
        * 0.5
        * h
}

/// The integral of g(x) p(x) dx over the prior's support, by Gauss-Legendre quadrature
/// after a substitution that makes the integrand smooth and bounded:
/// x = mean + sd t for (truncated) normals, x = e^u for log-normal and
/// log-uniform, x = sin^2(phi) for beta (removes end-point singularities).
fn integrate(prior: &Prior, g: impl Fn(f64) -> f64) -> f64 {
    let density = |x: f64| prior.ln_pdf(x).exp();
    let n = 20_000;
    match prior.shape() {
        PriorShape::Uniform { min, max } => gauss_legendre(|x| g(x) * density(x), min, max, n),
        PriorShape::LogUniform { min, max } => gauss_legendre(
            |u| {
                let x = u.exp();
                g(x) * density(x) * x
            },
            min.ln(),
            max.ln(),
            n,
        ),
        PriorShape::Normal { mean, sd } => {
            gauss_legendre(|x| g(x) * density(x), mean - 14.0 * sd, mean + 14.0 * sd, n)
        }
        PriorShape::TruncatedNormal { mean, sd, min, max } => {
            let lo = min.max(mean - 14.0 * sd);
            let hi = max.min(mean + 14.0 * sd);
            gauss_legendre(|x| g(x) * density(x), lo, hi, n)
        }
        PriorShape::LogNormal { mu, sigma } => gauss_legendre(
            |u| {
                let x = u.exp();
                g(x) * density(x) * x
            },
            mu - 14.0 * sigma,
            mu + 14.0 * sigma,
            n,
        ),
        PriorShape::Beta { .. } => gauss_legendre(
            |phi| {
                let s = phi.sin();
                let c = phi.cos();
                let x = s * s;
                // dx = 2 sin cos dphi.
                g(x) * density(x) * 2.0 * s * c
            },
            0.0,
            std::f64::consts::FRAC_PI_2,
            n,
        ),
        PriorShape::Fixed { .. } => f64::NAN,
    }
}

fn continuous_priors() -> Vec<Prior> {
    vec![
        Prior::uniform(-2.0, 5.0).unwrap(),
        Prior::log_uniform(1.0, 1e6).unwrap(),
        Prior::normal(3.0, 0.7).unwrap(),
        Prior::truncated_normal(1.0, 2.0, 0.0, f64::INFINITY).unwrap(),
        Prior::truncated_normal(0.0, 1.0, -1.0, 2.0).unwrap(),
        // A window far in the upper tail (mass 2.9e-7): exercises the survival-function branch.
        Prior::truncated_normal(0.0, 1.0, 5.0, 7.0).unwrap(),
        // And far in the lower tail, with an infinite lower bound.
        Prior::truncated_normal(10.0, 1.0, f64::NEG_INFINITY, 5.0).unwrap(),
        Prior::log_normal(0.5, 0.4).unwrap(),
        Prior::beta(2.0, 5.0).unwrap(),
        Prior::beta(0.5, 0.5).unwrap(),
        Prior::beta(1.0, 3.0).unwrap(),
    ]
}

#[test]
fn densities_integrate_to_one() {
    // Analytic result: a normalised density integrates to 1.
    for prior in continuous_priors() {
        let total = integrate(&prior, |_| 1.0);
        assert!(
            (total - 1.0).abs() < 1e-7,
            "{}: integral of the density is {total}",
            prior.describe()
        );
    }
}

#[test]
fn means_match_quadrature() {
    // mean() against the first moment by quadrature (analytic identity).
    for prior in continuous_priors() {
        let quadrature = integrate(&prior, |x| x);
        let mean = prior.mean();
        assert!(
            (mean - quadrature).abs() < 1e-6 * (1.0 + quadrature.abs()),
            "{}: mean {mean}, quadrature {quadrature}",
            prior.describe()
        );
    }
}

#[test]
fn cdf_matches_integral_of_density() {
    // F(x) = integral of p up to x (definition), at the 10/50/90 % points.
    for prior in continuous_priors() {
        for p in [0.1, 0.5, 0.9] {
            let x = prior.quantile(p);
            let below = integrate(&prior, |t| if t <= x { 1.0 } else { 0.0 });
            // A step integrand limits the quadrature's accuracy to about one grid cell.
            assert!(
                (prior.cdf(x) - below).abs() < 2e-3,
                "{}: cdf({x}) = {}, integral = {below}",
                prior.describe(),
                prior.cdf(x)
            );
        }
    }
}

#[test]
fn cdf_and_quantile_are_inverse() {
    for prior in continuous_priors() {
        for &p in &[
            1e-9,
            1e-6,
            0.001,
            0.02,
            0.25,
            0.5,
            0.75,
            0.98,
            0.999,
            1.0 - 1e-6,
        ] {
            let x = prior.quantile(p);
            assert!(prior.contains(x) || x == prior.support().0 || x == prior.support().1);
            let back = prior.cdf(x);
            // Relative 2e-8: in the far-tail window [5, 7] both directions
            // subtract survival values near 3e-7, which erfc gives to ~1e-14 relative.
            assert!(
                (back - p).abs() < 2e-8 * p + 1e-15,
                "{}: cdf(quantile({p})) = {back}",
                prior.describe()
            );
        }
        assert_eq!(
            prior.quantile(0.0),
            prior.support().0,
            "{}",
            prior.describe()
        );
        assert_eq!(
            prior.quantile(1.0),
            prior.support().1,
            "{}",
            prior.describe()
        );
        assert!(prior.quantile(-0.1).is_nan() && prior.quantile(1.5).is_nan());
        assert!(prior.quantile(f64::NAN).is_nan());
    }
}

#[test]
fn densities_and_cdfs_match_statrs() {
    // statrs 0.17 Normal, LogNormal, Beta and Uniform as the reference.
    let xs = [0.013, 0.2, 0.5, 0.77, 0.99, 1.7, 3.0, 4.4, 8.0];
    let normal = Prior::normal(3.0, 0.7).unwrap();
    let reference = statrs::distribution::Normal::new(3.0, 0.7).unwrap();
    for &x in &xs {
        assert!((normal.ln_pdf(x) - reference.ln_pdf(x)).abs() < 1e-12);
        assert!((normal.cdf(x) - reference.cdf(x)).abs() < 1e-13);
    }
    let log_normal = Prior::log_normal(0.5, 0.4).unwrap();
    let reference = statrs::distribution::LogNormal::new(0.5, 0.4).unwrap();
    for &x in &xs {
        assert!(
            (log_normal.ln_pdf(x) - reference.ln_pdf(x)).abs() < 1e-11,
            "x = {x}"
        );
        assert!((log_normal.cdf(x) - reference.cdf(x)).abs() < 1e-13);
    }
    for (a, b) in [(2.0, 5.0), (0.5, 0.5), (1.0, 3.0), (30.0, 2.5)] {
        let beta = Prior::beta(a, b).unwrap();
        let reference = statrs::distribution::Beta::new(a, b).unwrap();
        for &x in xs.iter().filter(|x| **x < 1.0) {
            assert!(
                (beta.ln_pdf(x) - reference.ln_pdf(x)).abs() < 1e-11,
                "beta({a}, {b}) at {x}"
            );
            assert!((beta.cdf(x) - reference.cdf(x)).abs() < 1e-12);
        }
        assert!((beta.mean() - reference.mean().unwrap()).abs() < 1e-14);
    }
    let uniform = Prior::uniform(-2.0, 5.0).unwrap();
    let reference = statrs::distribution::Uniform::new(-2.0, 5.0).unwrap();
    for &x in &xs {
        let (ours, theirs) = (uniform.ln_pdf(x), reference.ln_pdf(x));
        assert!(
            ours == theirs || (ours - theirs).abs() < 1e-14,
            "x = {x}: {ours} vs {theirs}"
        );
    }
    // Truncated normal on a central window: the statrs normal density divided by its window mass.
    let truncated = Prior::truncated_normal(0.0, 1.0, -1.0, 2.0).unwrap();
    let reference = statrs::distribution::Normal::new(0.0, 1.0).unwrap();
    let mass = reference.cdf(2.0) - reference.cdf(-1.0);
    for &x in &xs {
        let expected = if x <= 2.0 {
            reference.ln_pdf(x) - mass.ln()
        } else {
            f64::NEG_INFINITY
        };
        assert!(
            (truncated.ln_pdf(x) - expected).abs() < 1e-12 || truncated.ln_pdf(x) == expected,
            "x = {x}"
        );
    }
}

/// Variance and fourth central moment by quadrature.
fn central_moments(prior: &Prior) -> (f64, f64) {
    let mean = prior.mean();
    let variance = integrate(prior, |x| (x - mean).powi(2));
    let fourth = integrate(prior, |x| (x - mean).powi(4));
    (variance, fourth)
}

#[test]
fn seeded_samples_have_the_right_moments() {
    // Monte-Carlo standard errors: sd/sqrt(n) for the mean and
    // sqrt((mu4 - var^2)/n) for the variance; tolerance 5 of them.
    let n = 20_000;
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(20_261_201);
    for prior in continuous_priors() {
        let draws: Vec<f64> = (0..n).map(|_| prior.sample(&mut rng)).collect();
        assert!(
            draws.iter().all(|x| prior.contains(*x)),
            "{}",
            prior.describe()
        );
        let sample_mean = draws.iter().sum::<f64>() / n as f64;
        let sample_var =
            draws.iter().map(|x| (x - sample_mean).powi(2)).sum::<f64>() / (n - 1) as f64;
        let (variance, fourth) = central_moments(&prior);
        let mean_se = (variance / n as f64).sqrt();
        let var_se = ((fourth - variance * variance) / n as f64).sqrt();
        assert!(
            (sample_mean - prior.mean()).abs() < 5.0 * mean_se,
            "{}: sample mean {sample_mean}, mean {}, se {mean_se}",
            prior.describe(),
            prior.mean()
        );
        assert!(
            (sample_var - variance).abs() < 5.0 * var_se,
            "{}: sample variance {sample_var}, variance {variance}, se {var_se}",
            prior.describe()
        );
    }
}

#[test]
fn variances_match_statrs() {
    // The quadrature variances used above, against statrs 0.17 closed forms.
    let cases: [(Prior, f64); 3] = [
        (
            Prior::normal(3.0, 0.7).unwrap(),
            statrs::distribution::Normal::new(3.0, 0.7)
                .unwrap()
                .variance()
                .unwrap(),
        ),
        (
            Prior::log_normal(0.5, 0.4).unwrap(),
            statrs::distribution::LogNormal::new(0.5, 0.4)
                .unwrap()
                .variance()
                .unwrap(),
        ),
        (
            Prior::beta(2.0, 5.0).unwrap(),
            statrs::distribution::Beta::new(2.0, 5.0)
                .unwrap()
                .variance()
                .unwrap(),
        ),
    ];
    for (prior, expected) in cases {
        let (variance, _) = central_moments(&prior);
        assert!(
            (variance - expected).abs() < 1e-8 * expected,
            "{}",
            prior.describe()
        );
    }
}

#[test]
fn seeded_samples_pass_a_kolmogorov_smirnov_test() {
    // sqrt(n) D_n < 1.95 is the 0.1 % critical value of the Kolmogorov
    // distribution (e.g. Press et al., Numerical Recipes, 3rd ed. 2007, sec. 14.3.3).
    let n = 5_000;
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(7);
    for prior in continuous_priors() {
        let mut draws: Vec<f64> = (0..n).map(|_| prior.sample(&mut rng)).collect();
        draws.sort_by(f64::total_cmp);
        let mut d: f64 = 0.0;
        for (k, x) in draws.iter().enumerate() {
            let f = prior.cdf(*x);
            d = d
                .max((f - k as f64 / n as f64).abs())
                .max(((k + 1) as f64 / n as f64 - f).abs());
        }
        let statistic = (n as f64).sqrt() * d;
        assert!(
            statistic < 1.95,
            "{}: sqrt(n) D = {statistic}",
            prior.describe()
        );
    }
}

#[test]
fn same_seed_same_draws() {
    let prior = Prior::truncated_normal(1.0, 2.0, 0.0, f64::INFINITY).unwrap();
    let draw = |seed| {
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
        (0..5).map(|_| prior.sample(&mut rng)).collect::<Vec<_>>()
    };
    assert_eq!(draw(3), draw(3));
    assert_ne!(draw(3), draw(4));
}

#[test]
fn support_contains_and_outside_values() {
    let log_uniform = Prior::log_uniform(1.0, 1e6).unwrap();
    assert_eq!(log_uniform.support(), (1.0, 1e6));
    assert!(log_uniform.contains(1.0) && log_uniform.contains(1e6) && !log_uniform.contains(0.5));
    assert_eq!(log_uniform.ln_pdf(2e6), f64::NEG_INFINITY);
    // log-uniform density at x: 1 / (x ln(max/min)) (definition).
    assert!((log_uniform.ln_pdf(10.0) - (-(10.0_f64.ln()) - (1e6_f64.ln()).ln())).abs() < 1e-14);

    let beta = Prior::beta(0.5, 0.5).unwrap();
    assert!(!beta.contains(0.0) && !beta.contains(1.0) && beta.contains(0.5));
    assert_eq!(
        beta.ln_pdf(0.0),
        f64::NEG_INFINITY,
        "end points are outside the open support"
    );
    let log_normal = Prior::log_normal(0.0, 1.0).unwrap();
    assert_eq!(log_normal.ln_pdf(0.0), f64::NEG_INFINITY);
    assert_eq!(log_normal.ln_pdf(-1.0), f64::NEG_INFINITY);
    let normal = Prior::normal(0.0, 1.0).unwrap();
    assert_eq!(normal.ln_pdf(f64::NAN), f64::NEG_INFINITY);
    assert_eq!(normal.ln_pdf(f64::INFINITY), f64::NEG_INFINITY);
    assert!(normal.ln_pdf(40.0).is_finite());
    for prior in continuous_priors() {
        assert!(!prior.is_fixed());
        assert!(!prior.ln_pdf(f64::NAN).is_nan());
    }
}

#[test]
fn fixed_is_a_point_mass() {
    let fixed = Prior::fixed(0.3).unwrap();
    assert!(fixed.is_fixed());
    assert_eq!(fixed.ln_pdf(0.3), 0.0);
    assert_eq!(fixed.ln_pdf(0.3000001), f64::NEG_INFINITY);
    assert_eq!(fixed.support(), (0.3, 0.3));
    assert_eq!(fixed.mean(), 0.3);
    assert_eq!(fixed.quantile(0.7), 0.3);
    assert_eq!(fixed.cdf(0.29), 0.0);
    assert_eq!(fixed.cdf(0.3), 1.0);
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(1);
    assert_eq!(fixed.sample(&mut rng), 0.3);
    assert_eq!(fixed.describe(), "fixed at 0.3");
}

#[test]
fn descriptions_are_short_and_readable() {
    assert_eq!(
        Prior::log_uniform(1.0, 1e6).unwrap().describe(),
        "log-uniform(1, 1e6)"
    );
    assert_eq!(
        Prior::uniform(0.0, 360.0).unwrap().describe(),
        "uniform(0, 360)"
    );
    assert_eq!(
        Prior::normal(5.2, 0.25).unwrap().describe(),
        "normal(mean 5.2, sd 0.25)"
    );
    assert_eq!(
        Prior::truncated_normal(10.0, 1.5, 0.0, f64::INFINITY)
            .unwrap()
            .describe(),
        "truncated normal(mean 10, sd 1.5, within [0, inf])"
    );
    assert_eq!(
        Prior::log_normal(0.0, 0.5).unwrap().describe(),
        "log-normal(ln x: mean 0, sd 0.5)"
    );
    assert_eq!(
        Prior::beta(0.867, 3.03).unwrap().describe(),
        "beta(0.867, 3.03)"
    );
    assert_eq!(Prior::fixed(2.5e-5).unwrap().describe(), "fixed at 2.5e-5");
}

fn expect_invalid(result: Result<Prior, ModelError>, needle: &str) {
    match result {
        Err(ModelError::InvalidPrior(message)) => {
            assert!(
                message.contains(needle),
                "message '{message}' lacks '{needle}'"
            )
        }
        other => panic!("expected an invalid-prior error containing '{needle}', got {other:?}"),
    }
}

#[test]
fn every_constructor_refuses_bad_parameters() {
    let nan = f64::NAN;
    let inf = f64::INFINITY;
    expect_invalid(Prior::uniform(2.0, 1.0), "less than");
    expect_invalid(Prior::uniform(1.0, 1.0), "less than");
    expect_invalid(Prior::uniform(nan, 1.0), "finite");
    expect_invalid(Prior::uniform(0.0, inf), "finite");
    expect_invalid(Prior::uniform(-f64::MAX, f64::MAX), "too wide");
    expect_invalid(Prior::log_uniform(0.0, 1.0), "min > 0");
    expect_invalid(Prior::log_uniform(-1.0, 1.0), "min > 0");
    expect_invalid(Prior::log_uniform(10.0, 1.0), "less than");
    expect_invalid(Prior::log_uniform(1.0, inf), "finite");
    expect_invalid(Prior::normal(0.0, 0.0), "positive");
    expect_invalid(Prior::normal(0.0, -1.0), "positive");
    expect_invalid(Prior::normal(nan, 1.0), "finite");
    expect_invalid(Prior::normal(0.0, inf), "finite");
    expect_invalid(Prior::truncated_normal(0.0, 0.0, -1.0, 1.0), "positive");
    expect_invalid(Prior::truncated_normal(0.0, 1.0, 1.0, -1.0), "less than");
    expect_invalid(Prior::truncated_normal(0.0, 1.0, nan, 1.0), "bounds");
    expect_invalid(Prior::truncated_normal(0.0, 1.0, inf, inf), "bounds");
    expect_invalid(Prior::truncated_normal(inf, 1.0, 0.0, 1.0), "finite");
    // Window 10 to 11 sd above the mean keeps ~7.6e-24 of the mass (negligible).
    expect_invalid(Prior::truncated_normal(0.0, 1.0, 10.0, 11.0), "keeps only");
    expect_invalid(
        Prior::truncated_normal(0.0, 1.0, -1e-12, 1e-12),
        "keeps only",
    );
    // The threshold itself is as documented: 6 sd above the mean keeps 9.9e-10 < 1e-9.
    assert_eq!(MIN_TRUNCATED_MASS, 1e-9);
    expect_invalid(Prior::truncated_normal(0.0, 1.0, 6.0, inf), "keeps only");
    assert!(Prior::truncated_normal(0.0, 1.0, 5.9, inf).is_ok());
    expect_invalid(Prior::log_normal(0.0, 0.0), "positive");
    expect_invalid(Prior::log_normal(nan, 1.0), "finite");
    expect_invalid(Prior::beta(0.0, 1.0), "positive");
    expect_invalid(Prior::beta(1.0, -2.0), "positive");
    expect_invalid(Prior::beta(inf, 1.0), "finite");
    expect_invalid(Prior::fixed(nan), "finite");
    expect_invalid(Prior::fixed(-inf), "finite");
}

fn parse(text: &str) -> toml::Value {
    let table: toml::Table = toml::from_str(&format!("p = {text}")).unwrap();
    table["p"].clone()
}

#[test]
fn toml_form_parses_every_shape() {
    let file = Path::new("run.toml");
    let key = "priors.period_days";
    let cases = [
        (
            "{ shape = \"uniform\", min = 0, max = 360.0 }",
            Prior::uniform(0.0, 360.0),
        ),
        (
            "{ shape = \"log_uniform\", min = 1.0, max = 1e6 }",
            Prior::log_uniform(1.0, 1e6),
        ),
        (
            "{ shape = \"normal\", mean = 5.0, sd = 0.5 }",
            Prior::normal(5.0, 0.5),
        ),
        (
            "{ shape = \"truncated_normal\", mean = 10.0, sd = 1.0, min = 0.0, max = inf }",
            Prior::truncated_normal(10.0, 1.0, 0.0, f64::INFINITY),
        ),
        (
            "{ shape = \"log_normal\", mu = 0.0, sigma = 0.3 }",
            Prior::log_normal(0.0, 0.3),
        ),
        (
            "{ shape = \"beta\", alpha = 0.867, beta = 3.03 }",
            Prior::beta(0.867, 3.03),
        ),
        ("{ shape = \"fixed\", value = 2 }", Prior::fixed(2.0)),
        ("7.5", Prior::fixed(7.5)),
        ("3", Prior::fixed(3.0)),
    ];
    for (text, expected) in cases {
        let parsed = Prior::from_toml(&parse(text), file, key).unwrap();
        assert_eq!(parsed, expected.unwrap(), "{text}");
    }
}

#[test]
fn serialised_form_reads_back() {
    for prior in continuous_priors()
        .into_iter()
        .chain([Prior::fixed(1.25).unwrap()])
    {
        let text = toml::to_string(&prior).unwrap();
        let value: toml::Value = toml::from_str(&text).unwrap();
        let back = Prior::from_toml(&value, Path::new("x.toml"), "p").unwrap();
        assert_eq!(back, prior, "{text}");
    }
    let text = toml::to_string(&Prior::log_uniform(1.0, 1e6).unwrap()).unwrap();
    assert!(text.contains("shape = \"log_uniform\""), "{text}");
}

#[test]
fn toml_errors_name_file_and_dotted_key() {
    let file = Path::new("configs/run.toml");
    let key = "priors.period_days";
    let cases = [
        (
            "{ shape = \"normal\", mean = 5.0, sdev = 0.5 }",
            "priors.period_days.sdev",
            "unknown field",
        ),
        (
            "{ shape = \"normal\", mean = 5.0 }",
            "priors.period_days.sd",
            "missing 'sd'",
        ),
        (
            "{ shape = \"gaussian\", mean = 5.0, sd = 1.0 }",
            "priors.period_days.shape",
            "unknown shape 'gaussian'",
        ),
        (
            "{ mean = 5.0, sd = 1.0 }",
            "priors.period_days.shape",
            "missing 'shape'",
        ),
        (
            "{ shape = 3, mean = 5.0 }",
            "priors.period_days.shape",
            "must be a string",
        ),
        (
            "{ shape = \"normal\", mean = \"5\", sd = 1.0 }",
            "priors.period_days.mean",
            "must be a number",
        ),
        (
            "{ shape = \"normal\", mean = 5.0, sd = -1.0 }",
            "column 'priors.period_days'",
            "positive",
        ),
        (
            "{ shape = \"log_uniform\", min = 0.0, max = 10.0 }",
            "column 'priors.period_days'",
            "min > 0",
        ),
        (
            "\"normal\"",
            "column 'priors.period_days'",
            "a prior is a number",
        ),
        (
            "[1.0, 2.0]",
            "column 'priors.period_days'",
            "a prior is a number",
        ),
        ("nan", "column 'priors.period_days'", "finite"),
    ];
    for (text, where_, what) in cases {
        let error = Prior::from_toml(&parse(text), file, key).unwrap_err();
        let message = error.to_string();
        assert!(
            matches!(error, ModelError::Input { .. }),
            "{text}: {error:?}"
        );
        assert!(message.starts_with("configs/run.toml"), "{text}: {message}");
        assert!(
            message.contains(where_),
            "{text}: '{message}' lacks '{where_}'"
        );
        assert!(message.contains(what), "{text}: '{message}' lacks '{what}'");
    }
}

#[test]
fn beta_cdf_tails_match_closed_forms() {
    // Analytic: Beta(1/2, 1/2) is the arcsine law, I_x = (2/pi) asin(sqrt x);
    // Beta(1, b) has I_x = 1 - (1 - x)^b. Far tails exercise the series branch.
    let arcsine = Prior::beta(0.5, 0.5).unwrap();
    for x in [1e-30_f64, 1e-20, 1e-12, 1e-9, 3e-7, 0.01, 0.3, 0.5, 0.9] {
        let exact = 2.0 / std::f64::consts::PI * x.sqrt().asin();
        let ours = arcsine.cdf(x);
        assert!(
            (ours - exact).abs() <= 1e-12 * exact,
            "x = {x}: {ours} vs {exact}"
        );
        let back = arcsine.quantile(exact);
        assert!(
            (back - x).abs() <= 1e-9 * x,
            "quantile({exact}) = {back}, expected {x}"
        );
    }
    // Near 1 by symmetry, I_x = 1 - (2/pi) asin(sqrt(1 - x)); 1 - x is exact here (Sterbenz).
    let x: f64 = 1.0 - 1e-12;
    let exact = 1.0 - 2.0 / std::f64::consts::PI * (1.0 - x).sqrt().asin();
    assert!((arcsine.cdf(x) - exact).abs() < 1e-15);
    let one_b = Prior::beta(1.0, 3.0).unwrap();
    for x in [1e-25_f64, 1e-9, 0.2, 0.7] {
        let exact = -(3.0 * (-x).ln_1p()).exp_m1();
        assert!((one_b.cdf(x) - exact).abs() <= 1e-12 * exact, "x = {x}");
    }
}
