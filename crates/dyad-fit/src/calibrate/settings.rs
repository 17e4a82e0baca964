//! The calibration settings file (keys in configs/calibration/README.md).

use std::path::{Path, PathBuf};

use crate::error::{bail, Context, FitError, Result};

/// Parsed calibration settings.
pub(super) struct Settings {
    pub(super) file: PathBuf,
    pub(super) systems: usize,
    pub(super) seed: u64,
    pub(super) draws: usize,
    pub(super) bins: usize,
    pub(super) output: PathBuf,
    /// `[observations]`: a `dyad simulate` scenario without `[system]`.
    pub(super) observations: toml::Table,
    /// `[priors]`, passed verbatim into every run configuration.
    pub(super) priors: toml::Table,
    /// `[sampler]`, passed into every run configuration (seed added).
    pub(super) sampler: toml::Table,
    /// `[astrometry_errors]`, passed verbatim into every run configuration;
    /// the true error scales are drawn from its priors and simulated.
    pub(super) astrometry_errors: Option<toml::Table>,
}

fn integer(table: &toml::Table, key: &str, file: &Path) -> Result<Option<u64>> {
    match table.get(key) {
        None => Ok(None),
        Some(toml::Value::Integer(i)) if *i >= 0 => Ok(Some(*i as u64)),
        Some(other) => bail!(
            "{}, key '{key}': must be a whole number >= 0, found {other}",
            file.display()
        ),
    }
}

fn sub_table(table: &toml::Table, key: &str, file: &Path) -> Result<Option<toml::Table>> {
    match table.get(key) {
        None => Ok(None),
        Some(toml::Value::Table(t)) => Ok(Some(t.clone())),
        Some(_) => bail!("{}, key '{key}': must be a table [{key}]", file.display()),
    }
}

impl Settings {
    pub(super) fn parse(text: &str, file: &Path) -> Result<Self> {
        let table: toml::Table =
            toml::from_str(text).with_context(|| format!("{}: not valid TOML", file.display()))?;
        const KEYS: [&str; 9] = [
            "astrometry_errors",
            "systems",
            "seed",
            "draws_per_system",
            "rank_bins",
            "output",
            "observations",
            "priors",
            "sampler",
        ];
        if let Some(k) = table.keys().find(|k| !KEYS.contains(&k.as_str())) {
            bail!(
                "{}: unknown key '{k}' (known: {})",
                file.display(),
                KEYS.join(", ")
            );
        }
        let systems = integer(&table, "systems", file)?.unwrap_or(200) as usize;
        let seed = integer(&table, "seed", file)?.unwrap_or(1);
        let draws = integer(&table, "draws_per_system", file)?.unwrap_or(99) as usize;
        let bins = integer(&table, "rank_bins", file)?.unwrap_or(20) as usize;
        if draws < 1 {
            bail!("{}, key 'draws_per_system': must be >= 1", file.display());
        }
        if bins < 2 || bins > draws + 1 {
            bail!(
                "{}, key 'rank_bins': must be in 2..={} (draws_per_system + 1)",
                file.display(),
                draws + 1
            );
        }
        let base = file.parent().map(Path::to_owned).unwrap_or_default();
        let output = match table.get("output") {
            None => base.join("calibration-run"),
            Some(toml::Value::String(s)) => base.join(s),
            Some(_) => bail!("{}, key 'output': must be a folder name", file.display()),
        };
        let observations = sub_table(&table, "observations", file)?.ok_or_else(|| {
            FitError::invalid(format!(
                "{}: missing [observations] (the observing plan)",
                file.display()
            ))
        })?;
        for key in ["astrometry", "velocities"] {
            if let Some(toml::Value::Table(t)) = observations.get(key) {
                if t.contains_key("file") {
                    bail!(
                        "{}, key 'observations.{key}.file': the file names are chosen by \
                         `dyad calibrate`; remove it",
                        file.display()
                    );
                }
            }
        }
        if let Some(k) = observations
            .keys()
            .find(|k| !["astrometry", "velocities"].contains(&k.as_str()))
        {
            bail!(
                "{}, key 'observations.{k}': unknown (give [observations.astrometry] and/or \
                 [observations.velocities]; the true system is drawn from the prior)",
                file.display()
            );
        }
        if let Some(toml::Value::Table(v)) = observations.get("velocities") {
            if let Some(toml::Value::Array(list)) = v.get("instruments") {
                for (n, inst) in list.iter().enumerate() {
                    if let toml::Value::Table(t) = inst {
                        for k in ["offset_kms", "jitter_kms"] {
                            if t.contains_key(k) {
                                bail!(
                                    "{}, key 'observations.velocities.instruments[{n}].{k}': \
                                     drawn from the prior ([priors] {k}); remove it",
                                    file.display()
                                );
                            }
                        }
                    }
                }
            }
        }
        let priors = sub_table(&table, "priors", file)?.unwrap_or_default();
        let sampler = sub_table(&table, "sampler", file)?.unwrap_or_default();
        if sampler.contains_key("seed") {
            bail!(
                "{}, key 'sampler.seed': every system's seed is derived from the top-level \
                 'seed'; remove it",
                file.display()
            );
        }
        Ok(Self {
            file: file.to_owned(),
            systems,
            seed,
            draws,
            bins,
            output,
            observations,
            priors,
            sampler,
            astrometry_errors: sub_table(&table, "astrometry_errors", file)?,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn unknown_and_forbidden_settings_are_refused() {
        let file = Path::new("x.toml");
        let base = "[observations.astrometry]\nform = \"cartesian\"\n";
        assert!(Settings::parse(base, file).is_ok());
        assert!(Settings::parse(&format!("systemz = 3\n{base}"), file).is_err());
        assert!(Settings::parse(&format!("{base}[sampler]\nseed = 3\n"), file).is_err());
        assert!(Settings::parse("systems = 3\n", file).is_err());
        assert!(Settings::parse(
            &format!("draws_per_system = 9\nrank_bins = 11\n{base}"),
            file
        )
        .is_err());
    }
}
