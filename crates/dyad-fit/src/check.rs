//! `dyad check CONFIG`: validate a configuration and its data and say what a
//! fit would do, without sampling. Also the run description printed at the
//! start of `dyad fit` and kept in the report.

use std::f64::consts::PI;
use std::path::Path;

use anyhow::Result;

use dyad_model::config::RunConfig;
use dyad_model::data::Star;
use dyad_model::likelihood::Model;
use dyad_model::params::{FitMode, InclinationPrior, ScaledPrior};
use dyad_model::prior::{Prior, PriorShape};

use crate::plan::SamplingPlan;
use crate::terminal::say;

/// `dyad check CONFIG`.
pub fn check(config_path: &Path) -> Result<()> {
    let config = RunConfig::load(config_path)?;
    let model = Model::from_config(&config)?;
    let plan = SamplingPlan::new(&config, &model, None)?;
    say!("{}", describe(&config, &model, &plan))?;
    say!("configuration and data are valid.")?;
    Ok(())
}

/// A prior on an angle held in radians (a default, or one given in
/// radians), described in degrees as every angle in dyad's files and
/// reports is; `None` for a shape with no exact image in degrees.
fn radian_prior_in_degrees(prior: &Prior) -> Option<String> {
    // Degrees from radians, rounded to 1e-9 deg so that 2 pi reads 360.
    let k = 180.0 / PI;
    let d = |v: f64| {
        if v.is_finite() {
            (v * k * 1e9).round() / 1e9
        } else {
            v
        }
    };
    let in_degrees = match prior.shape() {
        PriorShape::Uniform { min, max } => Prior::uniform(d(min), d(max)),
        PriorShape::LogUniform { min, max } => Prior::log_uniform(d(min), d(max)),
        PriorShape::Normal { mean, sd } => Prior::normal(d(mean), d(sd)),
        PriorShape::TruncatedNormal { mean, sd, min, max } => {
            Prior::truncated_normal(d(mean), d(sd), d(min), d(max))
        }
        PriorShape::Fixed { value } => Prior::fixed(d(value)),
        PriorShape::LogNormal { .. } | PriorShape::Beta { .. } => return None,
    };
    in_degrees.ok().map(|p| format!("{} deg", p.describe()))
}

/// A prior in the unit the user gave it in (angles always in degrees).
pub fn describe_prior(p: &ScaledPrior, internal_unit: &str) -> String {
    let s = p.scale();
    if internal_unit == "rad" && (s - 1.0).abs() < 1e-15 {
        if let Some(text) = radian_prior_in_degrees(p.prior()) {
            return text;
        }
    }
    let unit = if (s - 365.25).abs() < 1e-9 {
        "yr"
    } else if (s - PI / 180.0).abs() < 1e-15 {
        "deg"
    } else if (s - 1.0).abs() < 1e-15 {
        internal_unit
    } else {
        return format!("{} x {s} {internal_unit}", p.prior().describe());
    };
    if unit.is_empty() {
        p.prior().describe()
    } else {
        format!("{} {unit}", p.prior().describe())
    }
}

/// The priors that matter for this model, as (quantity, description) pairs.
pub fn prior_lines(model: &Model) -> Vec<(String, String)> {
    let layout = model.layout();
    let p = layout.priors();
    let mut lines = vec![
        ("period".to_owned(), describe_prior(&p.period_days, "d")),
        (
            "eccentricity".to_owned(),
            describe_prior(&p.eccentricity, ""),
        ),
        (
            "omega (secondary)".to_owned(),
            describe_prior(&p.omega_rad, "rad"),
        ),
    ];
    let mode = model.mode();
    if layout.has_inclination() {
        let inc = match &p.inclination {
            InclinationPrior::Isotropic => "isotropic (uniform cos i)".to_owned(),
            InclinationPrior::Angle(a) => describe_prior(a, "rad"),
        };
        lines.push(("inclination".to_owned(), inc));
    }
    if mode != FitMode::VelocitiesOnly {
        lines.push((
            "node (Omega)".to_owned(),
            describe_prior(&p.node_rad, "rad"),
        ));
        lines.push((
            "total mass".to_owned(),
            describe_prior(&p.total_mass_msun, "M_sun"),
        ));
        lines.push((
            "parallax".to_owned(),
            describe_prior(&p.parallax_mas, "mas"),
        ));
    }
    if mode == FitMode::Joint {
        lines.push(("mass ratio q".to_owned(), describe_prior(&p.mass_ratio, "")));
    }
    if mode == FitMode::VelocitiesOnly {
        if layout.has_velocities_of(Star::Primary) {
            lines.push(("K1".to_owned(), describe_prior(&p.k1_kms, "km/s")));
        }
        if layout.has_velocities_of(Star::Secondary) {
            lines.push(("K2".to_owned(), describe_prior(&p.k2_kms, "km/s")));
        }
    }
    for (k, name) in model.dataset().instruments.iter().enumerate() {
        lines.push((
            format!("offset [{name}]"),
            describe_prior(&p.offset_kms[k], "km/s"),
        ));
        lines.push((
            format!("jitter [{name}]"),
            describe_prior(&p.jitter_kms[k], "km/s"),
        ));
    }
    lines
}

/// The data, model, priors and sampler plan in a few lines.
pub fn describe(config: &RunConfig, model: &Model, plan: &SamplingPlan) -> String {
    let data = model.dataset();
    let count = |star| data.velocities.iter().filter(|v| v.star == star).count();
    let mut out = String::new();
    let mode = match model.mode() {
        FitMode::Joint => "joint fit of relative astrometry and radial velocities",
        FitMode::AstrometryOnly => "relative astrometry only (Omega folded to [0, 180) deg)",
        FitMode::VelocitiesOnly if model.layout().has_inclination() => {
            "radial velocities only, with an inclination known from elsewhere (no node or parallax)"
        }
        FitMode::VelocitiesOnly => "radial velocities only (no inclination, node or parallax)",
    };
    out.push_str(&format!("configuration: {}\n", config.file.display()));
    out.push_str(&format!("model: {mode}\n"));
    out.push_str(&format!(
        "data: {} astrometric epochs; {} primary and {} secondary velocities from {} instrument(s)\n",
        data.astrometry.len(),
        count(Star::Primary),
        count(Star::Secondary),
        data.instruments.len()
    ));
    out.push_str(&format!(
        "sampled parameters ({}): {}\n",
        model.dim(),
        model.parameter_names().join(", ")
    ));
    out.push_str("priors:\n");
    for (name, prior) in prior_lines(model) {
        out.push_str(&format!("  {name:<20} {prior}\n"));
    }
    let s = &plan.sampler;
    let rule = s.convergence.as_ref().map_or_else(String::new, |c| {
        format!(
            " (stops earlier once every parameter has {} effective draws, bulk and tails, \
             and split R-hat at most {})",
            c.min_effective_draws, c.max_split_rhat
        )
    });
    out.push_str(&format!(
        "sampler: {} walkers, at most {} steps{rule}, thinning {}, seed {}\n",
        s.n_walkers, s.max_steps, s.thin, s.seed
    ));
    match &s.tempering {
        Some(t) => out.push_str(&format!(
            "tempering: {} temperatures, ladder adapted for {} steps then frozen\n",
            t.n_temperatures, t.burn_in_steps
        )),
        None => out.push_str("tempering: off\n"),
    }
    for note in &plan.notes {
        out.push_str(&format!("note: {note}\n"));
    }
    out.push_str(&format!(
        "output folder: {}",
        config.output.folder.display()
    ));
    out
}
