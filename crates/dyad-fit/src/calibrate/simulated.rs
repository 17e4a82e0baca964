//! The simulated systems: per-system seeds, the truth drawn from the prior,
//! and each system's scenario, data and run configuration on disk.

use std::collections::BTreeMap;
use std::fs;
use std::path::Path;

use dyad_common::seed::mix64;
use dyad_model::config::RunConfig;
use dyad_model::likelihood::Model;
use dyad_model::simulate::Scenario;

use super::settings::Settings;
use crate::error::{Context, FitError, Result};
use crate::run_folder::write_text;

/// A seed for stream `stream` of system `system`: SplitMix64 finaliser
/// (Steele, Lea & Flood 2014, "Fast splittable pseudorandom number
/// generators") over the combined inputs, so that nearby inputs give
/// unrelated seeds.
pub(super) fn system_seed(seed: u64, system: usize, stream: u64) -> u64 {
    let z = seed
        .wrapping_mul(dyad_common::seed::GOLDEN_GAMMA)
        .wrapping_add((system as u64).wrapping_mul(0xD1B5_4A32_D192_ED03))
        .wrapping_add(stream.wrapping_mul(0x8CB9_2BA7_2F3D_8DD7));
    mix64(mix64(z))
}

pub(super) const STREAM_TRUTH: u64 = 1;
pub(super) const STREAM_NOISE: u64 = 2;
pub(super) const STREAM_SAMPLER: u64 = 3;
pub(super) const STREAM_TIES: u64 = 4;

/// A true system drawn from the prior: the scenario's `[system]` table and
/// each instrument's offset and jitter, by instrument name.
pub(super) struct Truth {
    system: toml::Table,
    instruments: BTreeMap<String, (f64, f64)>,
    /// Each astrometric source's true error scale (its simulated noise is
    /// that times the quoted errors).
    error_factors: BTreeMap<String, f64>,
}

/// The true system of prior draw `x` in the layout of `model`.
pub(super) fn truth_of(model: &Model, x: &[f64], name: &str) -> Result<Truth> {
    let p = model
        .layout()
        .to_physical(x)
        .ok_or_else(|| FitError::invalid("a prior draw lies outside the model's domain"))?;
    let o = &p.orbit;
    let need = |v: Option<f64>, what: &str| {
        v.ok_or_else(|| {
            FitError::invalid(format!(
                "calibration needs astrometry and velocities of both stars ({what} missing)"
            ))
        })
    };
    let mut t = toml::Table::new();
    t.insert("name".into(), name.into());
    t.insert("period_days".into(), o.period_days.into());
    t.insert("periastron_time_jd".into(), o.t_peri_jd.into());
    t.insert("eccentricity".into(), o.eccentricity.into());
    t.insert(
        "inclination_deg".into(),
        need(o.inclination_rad, "inclination")?.to_degrees().into(),
    );
    t.insert(
        "periastron_argument_deg".into(),
        o.omega_rad.to_degrees().into(),
    );
    t.insert(
        "node_deg".into(),
        need(o.node_rad, "node")?.to_degrees().into(),
    );
    t.insert(
        "semi_major_axis_mas".into(),
        need(o.semi_major_axis_mas, "semi-major axis")?.into(),
    );
    t.insert(
        "parallax_mas".into(),
        need(o.parallax_mas, "parallax")?.into(),
    );
    t.insert(
        "mass_ratio".into(),
        need(o.mass_ratio, "mass ratio")?.into(),
    );
    // Each instrument's offset is the systemic velocity as it measures it.
    t.insert("systemic_velocity_kms".into(), 0.0.into());
    let instruments = model
        .dataset()
        .instruments
        .iter()
        .zip(p.offsets_kms.iter().zip(&p.jitters_kms))
        .map(|(n, (&off, &jit))| (n.clone(), (off, jit)))
        .collect();
    let layout = model.layout();
    let error_factors = layout
        .astrometry_sources()
        .iter()
        .enumerate()
        .map(|(k, n)| (n.clone(), layout.error_scale(x, k)))
        .collect();
    Ok(Truth {
        system: t,
        instruments,
        error_factors,
    })
}

/// The `[system]` of the template: a fixed invented binary.
fn template_system() -> toml::Table {
    let mut t = toml::Table::new();
    t.insert("name".into(), "calibration template".into());
    t.insert("period_days".into(), 1000.0.into());
    t.insert("periastron_time_jd".into(), 2_451_545.0.into());
    t.insert("eccentricity".into(), 0.3.into());
    t.insert("inclination_deg".into(), 60.0.into());
    t.insert("periastron_argument_deg".into(), 30.0.into());
    t.insert("node_deg".into(), 40.0.into());
    t.insert("semi_major_axis_mas".into(), 100.0.into());
    t.insert("parallax_mas".into(), 20.0.into());
    t.insert("mass_ratio".into(), 0.5.into());
    t
}

/// Writes the scenario, data and run configuration of one system into
/// `folder` and returns the run configuration. `truth` is `None` for the
/// template (noise-free data of a fixed invented system, used only to learn
/// the parameter layout, which depends on the epochs and instruments alone).
pub(super) fn write_system(
    settings: &Settings,
    folder: &Path,
    truth: Option<(Truth, u64)>,
    sampler_seed: u64,
    noise: bool,
) -> Result<RunConfig> {
    fs::create_dir_all(folder).with_context(|| format!("creating {}", folder.display()))?;
    let mut scenario = settings.observations.clone();
    let (system, instruments, error_factors, noise_seed, noise) = match truth {
        Some((t, seed)) => (t.system, t.instruments, t.error_factors, seed, noise),
        None => (
            template_system(),
            BTreeMap::new(),
            BTreeMap::new(),
            1,
            false,
        ),
    };
    if let Some(toml::Value::Table(a)) = scenario.get_mut("astrometry") {
        a.insert("file".into(), "positions.csv".into());
        if let Some(toml::Value::Array(list)) = a.get_mut("sources") {
            for source in list.iter_mut() {
                let toml::Value::Table(t) = source else {
                    continue;
                };
                let name = t.get("name").and_then(|n| n.as_str()).map(str::trim);
                if let Some(&factor) = name.and_then(|n| error_factors.get(n)) {
                    t.insert("error_factor".into(), factor.into());
                }
            }
        }
    }
    if let Some(toml::Value::Table(v)) = scenario.get_mut("velocities") {
        v.insert("file".into(), "velocities.csv".into());
        if let Some(toml::Value::Array(list)) = v.get_mut("instruments") {
            for inst in list.iter_mut() {
                let toml::Value::Table(t) = inst else {
                    continue;
                };
                let name = t.get("name").and_then(|n| n.as_str()).map(str::trim);
                if let Some(&(offset, jitter)) = name.and_then(|n| instruments.get(n)) {
                    t.insert("offset_kms".into(), offset.into());
                    t.insert("jitter_kms".into(), jitter.into());
                }
            }
        }
    }
    // TOML integers are signed 64-bit.
    scenario.insert(
        "seed".into(),
        toml::Value::Integer((noise_seed >> 1) as i64),
    );
    scenario.insert("noise".into(), noise.into());
    scenario.insert("system".into(), toml::Value::Table(system));
    let scenario_path = folder.join("scenario.toml");
    let scenario_text = format!(
        "# Written by `dyad calibrate` ({}); rerun with `dyad simulate`.\n{}",
        settings.file.display(),
        toml::to_string(&scenario)?
    );
    let parsed = Scenario::from_toml_str(&scenario_text, &scenario_path)
        .with_context(|| format!("the observing plan of {}", settings.file.display()))?;
    for (path, text) in parsed.render()? {
        write_text(&path, &text)?;
    }
    write_text(&scenario_path, &scenario_text)?;

    let mut run = toml::Table::new();
    let mut data = toml::Table::new();
    if scenario.contains_key("astrometry") {
        data.insert("astrometry".into(), "positions.csv".into());
    }
    if scenario.contains_key("velocities") {
        data.insert(
            "velocities".into(),
            toml::Value::Array(vec!["velocities.csv".into()]),
        );
    }
    run.insert("data".into(), toml::Value::Table(data));
    run.insert("priors".into(), toml::Value::Table(settings.priors.clone()));
    if let Some(errors) = &settings.astrometry_errors {
        run.insert(
            "astrometry_errors".into(),
            toml::Value::Table(errors.clone()),
        );
    }
    let mut sampler = settings.sampler.clone();
    sampler.insert(
        "seed".into(),
        toml::Value::Integer((sampler_seed >> 1) as i64),
    );
    run.insert("sampler".into(), toml::Value::Table(sampler));
    let mut output = toml::Table::new();
    output.insert("folder".into(), "fit".into());
    run.insert("output".into(), toml::Value::Table(output));
    let run_path = folder.join("run.toml");
    let run_text = format!(
        "# Written by `dyad calibrate` ({}); refit with `dyad fit`.\n{}",
        settings.file.display(),
        toml::to_string(&run)?
    );
    write_text(&run_path, &run_text)?;
    Ok(RunConfig::from_toml_str(&run_text, &run_path)?)
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_xoshiro::Xoshiro256PlusPlus;

    #[test]
    fn system_seeds_differ_between_systems_and_streams() {
        let mut seen = std::collections::BTreeSet::new();
        for i in 0..100 {
            for s in 1..5 {
                assert!(seen.insert(system_seed(7, i, s)));
            }
        }
        assert_ne!(system_seed(1, 0, 1), system_seed(2, 0, 1));
    }

    #[test]
    fn noise_free_simulations_fit_the_truth_exactly() {
        // The simulator (dyad-orbit's Orbit) and the likelihood (its batched
        // solver) must agree: at the true parameters every residual of
        // noise-free data is zero up to the rounding of the CSV columns
        // (4 decimals). A sign or unit error between them shows up here.
        let dir = tempfile::tempdir().expect("temp dir");
        let file =
            Path::new(env!("CARGO_MANIFEST_DIR")).join("../../configs/calibration/small.toml");
        let text = std::fs::read_to_string(&file).expect("small.toml");
        let mut settings = Settings::parse(&text, &file).expect("valid settings");
        settings.output = dir.path().to_owned();
        let template_config = write_system(&settings, &dir.path().join("template"), None, 1, false)
            .expect("template");
        let template = Model::from_config(&template_config).expect("model");
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(5);
        for n in 0..20 {
            let x = template.layout().sample_prior(&mut rng);
            let truth = truth_of(&template, &x, "test").expect("truth");
            let folder = dir.path().join(format!("{n}"));
            let config =
                write_system(&settings, &folder, Some((truth, 3)), 1, false).expect("written");
            let model = Model::from_config(&config).expect("model");
            let res = model.residuals(&x).expect("residuals");
            for a in &res.astrometry {
                for r in a.residual {
                    assert!(r.abs() < 2e-4, "system {n}: astrometric residual {r}");
                }
            }
            assert_eq!(res.velocities.len(), 24);
            for v in &res.velocities {
                assert!(
                    v.residual_kms.abs() < 2e-4,
                    "system {n}: velocity residual {v:?}"
                );
            }
        }
    }
}
