//! From the raw tables to the checked configuration: units converted, the
//! alternatives (`period_days` or `period_years`) resolved, priors read
//! and checked against the physical range, start values checked against
//! their priors, data files found. Every error names the dotted key and,
//! where the value is in the file, its line and column.

use std::collections::BTreeMap;
use std::ops::Range;
use std::path::{Path, PathBuf};

use dyad_orbit::constants::{DEG, JULIAN_YEAR_DAYS};
use dyad_orbit::TimeScale;

use super::domain::{Domain, ANY, ECCENTRICITY, INCLINATION_DEG, NON_NEGATIVE, POSITIVE};
use super::raw::{
    Distribution, RawAstrometryErrors, RawConfig, RawData, RawOutput, RawPrior, RawPriors,
    RawSampler, RawStart, Window,
};
use super::{
    AstrometryErrorSettings, DataSettings, InstrumentPriors, OutputSettings, PriorSettings,
    RunConfig, SamplerSettings, SourceErrorPriors, StartValues, Tempering, DEFAULT_SKY_ORBITS,
};
use crate::astrometry_errors::DEFAULT_DEGREES_OF_FREEDOM;
use crate::data::Dataset;
use crate::error::ModelError;
use crate::params::{InclinationPrior, ModelPriors, ScaledPrior};
use crate::prior::Prior;
use crate::toml_input::{describe_value, span, value, Field, FileNames, Number, Source, Spanned};

/// A table of the file being checked: its dotted name, for errors.
struct Table<'a> {
    src: Source<'a>,
    name: &'a str,
}

impl Table<'_> {
    fn key(&self, key: &str) -> String {
        crate::toml_input::join_key(self.name, key)
    }

    fn at(&self, key: &str, span: Option<Range<usize>>, message: impl Into<String>) -> ModelError {
        self.src.error(&self.key(key), span, message)
    }

    fn error<T>(&self, key: &str, field: &Field<T>, message: impl Into<String>) -> ModelError {
        self.at(key, span(field), message)
    }

    /// Refuses both of two alternative keys.
    fn either<A, B>(
        &self,
        (a, first): (&str, &Field<A>),
        (b, second): (&str, &Field<B>),
    ) -> Result<(), ModelError> {
        if first.is_some() && second.is_some() {
            return Err(self.error(b, second, format!("give either '{a}' or '{b}', not both")));
        }
        Ok(())
    }

    /// A prior in the key's unit, scaled to internal units, with its
    /// support checked against the physical domain.
    fn prior(
        &self,
        key: &str,
        field: &RawPrior,
        scale: f64,
        domain: &Domain,
    ) -> Result<Option<ScaledPrior>, ModelError> {
        let Some(spanned) = field else {
            return Ok(None);
        };
        let prior = Prior::from_toml(spanned.get_ref(), self.src.file, &self.key(key))
            .map_err(|e| self.src.placed(e, Some(spanned.span())))?;
        if let Some(message) = domain.refuse(&prior) {
            return Err(self.error(key, field, message));
        }
        Ok(Some(ScaledPrior::new(prior, scale)))
    }

    /// A data file path relative to `base`, which must exist.
    fn existing_file(
        &self,
        key: &str,
        span: Option<Range<usize>>,
        name: &str,
        base: &Path,
    ) -> Result<PathBuf, ModelError> {
        let path = base.join(name);
        if !path.is_file() {
            return Err(self.at(
                key,
                span,
                format!(
                    "data file '{}' not found (paths are relative to the configuration file's folder)",
                    path.display()
                ),
            ));
        }
        Ok(path)
    }
}

fn number(field: &Field<Number>) -> Option<f64> {
    value(field).map(|Number(v)| v)
}

/// Where the measurements of a configuration come from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum DataSource {
    /// The files named in `[data]`.
    Files,
    /// Arrays given beside the configuration: `[data]` is optional and
    /// names no files.
    Arrays,
}

/// The checked configuration of a parsed file.
pub(super) fn run_config(
    raw: RawConfig,
    src: Source<'_>,
    source: DataSource,
) -> Result<RunConfig, ModelError> {
    let path = src.file;
    let base = path.parent().map(Path::to_owned).unwrap_or_default();
    let root = Table { src, name: "" };
    let empty;
    let raw_data = match (&raw.data, source) {
        (Some(raw_data), _) => raw_data,
        (None, DataSource::Files) => {
            return Err(root.at("data", None, "missing [data] section naming the data files"))
        }
        (None, DataSource::Arrays) => {
            empty = RawData::default();
            &empty
        }
    };
    let data = read_data(&Table { src, name: "data" }, raw_data, &base, source)?;
    let mut priors = match &raw.priors {
        Some(p) => read_priors(
            &Table {
                src,
                name: "priors",
            },
            p,
        )?,
        None => PriorSettings::default(),
    };
    if let Some((plx, err)) = data.catalogue_parallax {
        if priors.parallax.is_some() {
            let span = raw.priors.as_ref().and_then(|p| span(&p.parallax_mas));
            return Err(src.error(
                "priors.parallax_mas",
                span,
                "a parallax prior is given both here and by [data] catalogue_parallax_mas; keep one",
            ));
        }
        let prior = Prior::truncated_normal(plx, err, 0.0, f64::INFINITY).map_err(|e| {
            src.error(
                "data.catalogue_parallax_mas",
                span(&raw_data.catalogue_parallax_mas),
                e.to_string(),
            )
        })?;
        priors.parallax = Some(ScaledPrior::internal(prior));
    }
    let astrometry_errors = match &raw.astrometry_errors {
        Some(e) => read_astrometry_errors(
            &Table {
                src,
                name: "astrometry_errors",
            },
            e,
        )?,
        None => AstrometryErrorSettings::default(),
    };
    let start = match &raw.start {
        Some(s) => read_start(&Table { src, name: "start" }, s, &priors)?,
        None => StartValues::default(),
    };
    let sampler = match &raw.sampler {
        Some(s) => read_sampler(
            &Table {
                src,
                name: "sampler",
            },
            s,
        )?,
        None => SamplerSettings::default(),
    };
    let output = read_output(raw.output.as_ref(), &base);
    Ok(RunConfig {
        file: path.to_owned(),
        data,
        priors,
        astrometry_errors,
        start,
        sampler,
        output,
    })
}

fn read_output(raw: Option<&RawOutput>, base: &Path) -> OutputSettings {
    let folder = raw.and_then(|o| value(&o.folder));
    OutputSettings {
        folder: base.join(folder.as_deref().unwrap_or("dyad-run")),
        orbits_on_sky_plot: raw
            .and_then(|o| value(&o.orbits_on_sky_plot))
            .map_or(DEFAULT_SKY_ORBITS, |v| v.0 as usize),
    }
}

fn read_data(
    t: &Table<'_>,
    raw: &RawData,
    base: &Path,
    source: DataSource,
) -> Result<DataSettings, ModelError> {
    if source == DataSource::Arrays {
        for (key, given) in [
            ("astrometry", raw.astrometry.is_some()),
            ("velocities", raw.velocities.is_some()),
        ] {
            if given {
                return Err(t.at(
                    key,
                    None,
                    "the measurements are given as arrays here; remove the file name",
                ));
            }
        }
    }
    let astrometry = match &raw.astrometry {
        Some(name) => {
            Some(t.existing_file("astrometry", Some(name.span()), name.get_ref(), base)?)
        }
        None => None,
    };
    let velocities = match &raw.velocities {
        None => Vec::new(),
        Some(field) => match field.get_ref() {
            FileNames::One(name) => {
                vec![t.existing_file("velocities", Some(field.span()), name, base)?]
            }
            FileNames::Many(names) => names
                .iter()
                .enumerate()
                .map(|(n, name)| {
                    t.existing_file(
                        &format!("velocities[{n}]"),
                        Some(name.span()),
                        name.get_ref(),
                        base,
                    )
                })
                .collect::<Result<_, _>>()?,
        },
    };
    if source == DataSource::Files && astrometry.is_none() && velocities.is_empty() {
        return Err(t.at(
            "astrometry",
            None,
            "no data: give 'astrometry', 'velocities', or both",
        ));
    }
    let (parallax, parallax_err) = (&raw.catalogue_parallax_mas, &raw.catalogue_parallax_err_mas);
    let catalogue_parallax = match (number(parallax), number(parallax_err)) {
        (Some(p), Some(e)) => {
            if e <= 0.0 {
                return Err(t.error(
                    "catalogue_parallax_err_mas",
                    parallax_err,
                    format!("must be positive, got {e}"),
                ));
            }
            if p <= 0.0 {
                return Err(t.error(
                    "catalogue_parallax_mas",
                    parallax,
                    format!("must be positive, got {p}"),
                ));
            }
            Some((p, e))
        }
        (None, None) => None,
        (Some(_), None) => {
            return Err(t.error(
                "catalogue_parallax_err_mas",
                parallax,
                "a catalogue parallax needs its error too",
            ))
        }
        (None, Some(_)) => {
            return Err(t.error(
                "catalogue_parallax_mas",
                parallax_err,
                "a parallax error is given without the parallax",
            ))
        }
    };
    Ok(DataSettings {
        astrometry,
        velocities,
        catalogue_parallax,
        reference_epoch_jd: number(&raw.reference_epoch_jd),
    })
}

fn read_priors(t: &Table<'_>, raw: &RawPriors) -> Result<PriorSettings, ModelError> {
    t.either(
        ("period_days", &raw.period_days),
        ("period_years", &raw.period_years),
    )?;
    let period = match (&raw.period_days, &raw.period_years) {
        (Some(_), _) => t.prior("period_days", &raw.period_days, 1.0, &POSITIVE)?,
        (None, Some(_)) => t.prior(
            "period_years",
            &raw.period_years,
            JULIAN_YEAR_DAYS,
            &POSITIVE,
        )?,
        (None, None) => None,
    };
    let inclination = match raw.inclination_deg.as_ref().map(Spanned::get_ref) {
        Some(toml::Value::String(v)) if v == "isotropic" => Some(InclinationPrior::Isotropic),
        Some(toml::Value::String(v)) => {
            return Err(t.error(
                "inclination_deg",
                &raw.inclination_deg,
                format!("the only named inclination prior is \"isotropic\", got \"{v}\"; otherwise give a prior table in degrees"),
            ))
        }
        Some(_) => t
            .prior("inclination_deg", &raw.inclination_deg, DEG, &INCLINATION_DEG)?
            .map(InclinationPrior::Angle),
        None => None,
    };
    let mut instruments = BTreeMap::new();
    for (name, one) in &raw.instruments {
        let prefix = t.key(&format!("instruments.{name}"));
        let inst = Table {
            src: t.src,
            name: &prefix,
        };
        instruments.insert(
            name.clone(),
            InstrumentPriors {
                offset: inst.prior("offset_kms", &one.offset_kms, 1.0, &ANY)?,
                jitter: inst.prior("jitter_kms", &one.jitter_kms, 1.0, &NON_NEGATIVE)?,
            },
        );
    }
    Ok(PriorSettings {
        period,
        eccentricity: t.prior("eccentricity", &raw.eccentricity, 1.0, &ECCENTRICITY)?,
        omega: t.prior(
            "periastron_argument_deg",
            &raw.periastron_argument_deg,
            DEG,
            &ANY,
        )?,
        inclination,
        node: t.prior("node_deg", &raw.node_deg, DEG, &ANY)?,
        total_mass: t.prior("total_mass_msun", &raw.total_mass_msun, 1.0, &POSITIVE)?,
        parallax: t.prior("parallax_mas", &raw.parallax_mas, 1.0, &POSITIVE)?,
        mass_ratio: t.prior("mass_ratio", &raw.mass_ratio, 1.0, &NON_NEGATIVE)?,
        k1: t.prior(
            "primary_semi_amplitude_kms",
            &raw.primary_semi_amplitude_kms,
            1.0,
            &POSITIVE,
        )?,
        k2: t.prior(
            "secondary_semi_amplitude_kms",
            &raw.secondary_semi_amplitude_kms,
            1.0,
            &POSITIVE,
        )?,
        offset: t.prior("offset_kms", &raw.offset_kms, 1.0, &ANY)?,
        jitter: t.prior("jitter_kms", &raw.jitter_kms, 1.0, &NON_NEGATIVE)?,
        instruments,
    })
}

fn read_astrometry_errors(
    t: &Table<'_>,
    raw: &RawAstrometryErrors,
) -> Result<AstrometryErrorSettings, ModelError> {
    let student = value(&raw.distribution) == Some(Distribution::StudentT);
    let dof = &raw.degrees_of_freedom;
    let student_t = match (student, dof.as_ref().map(Spanned::get_ref)) {
        (false, None) => None,
        (false, Some(_)) => {
            return Err(t.error(
                "degrees_of_freedom",
                dof,
                "only used with distribution = \"student_t\"",
            ))
        }
        (true, None) => Some(ScaledPrior::internal(
            Prior::fixed(DEFAULT_DEGREES_OF_FREEDOM)
                .map_err(|e| t.error("distribution", &raw.distribution, e.to_string()))?,
        )),
        (true, Some(toml::Value::Float(_) | toml::Value::Integer(_))) => {
            let nu = match dof.as_ref().map(Spanned::get_ref) {
                Some(toml::Value::Float(f)) => *f,
                Some(toml::Value::Integer(i)) => *i as f64,
                _ => DEFAULT_DEGREES_OF_FREEDOM,
            };
            if !(nu.is_finite() && nu > 0.0) {
                return Err(t.error(
                    "degrees_of_freedom",
                    dof,
                    format!("must be a positive number, got {nu}"),
                ));
            }
            Some(ScaledPrior::internal(Prior::fixed(nu).map_err(|e| {
                t.error("degrees_of_freedom", dof, e.to_string())
            })?))
        }
        (true, Some(_)) => t.prior("degrees_of_freedom", dof, 1.0, &POSITIVE)?,
    };
    let mut sources = BTreeMap::new();
    for (name, one) in &raw.sources {
        let prefix = t.key(&format!("sources.{name}"));
        let source = Table {
            src: t.src,
            name: &prefix,
        };
        sources.insert(
            name.clone(),
            SourceErrorPriors {
                scale: source.prior("scale", &one.scale, 1.0, &POSITIVE)?,
                jitter_mas: source.prior("jitter_mas", &one.jitter_mas, 1.0, &NON_NEGATIVE)?,
            },
        );
    }
    Ok(AstrometryErrorSettings {
        scale: t.prior("scale", &raw.scale, 1.0, &POSITIVE)?,
        jitter_mas: t.prior("jitter_mas", &raw.jitter_mas, 1.0, &NON_NEGATIVE)?,
        student_t,
        sources,
    })
}

/// A start value in internal units with the key it came from.
struct StartValue<'a> {
    key: &'a str,
    field: &'a Field<Number>,
    /// Internal units per unit of the key.
    scale: f64,
}

impl StartValue<'_> {
    fn internal(&self) -> Option<f64> {
        number(self.field).map(|v| v * self.scale)
    }

    /// Checks the value against its physical range and its prior (given
    /// or default).
    fn checked(
        &self,
        t: &Table<'_>,
        prior: Option<&ScaledPrior>,
        default: Option<&ScaledPrior>,
        domain: &Domain,
    ) -> Result<Option<f64>, ModelError> {
        let Some(v) = self.internal() else {
            return Ok(None);
        };
        if !domain.contains(v / self.scale) {
            return Err(t.error(
                self.key,
                self.field,
                format!(
                    "start value {} is outside the allowed range {}",
                    v / self.scale,
                    domain.describe()
                ),
            ));
        }
        let Some(prior) = prior.or(default) else {
            return Ok(Some(v));
        };
        if !prior.contains(v) {
            return Err(t.error(
                self.key,
                self.field,
                format!(
                    "start value {} is where its prior ({}) has no support",
                    v / self.scale,
                    prior.prior().describe()
                ),
            ));
        }
        Ok(Some(v))
    }
}

fn read_start(
    t: &Table<'_>,
    raw: &RawStart,
    priors: &PriorSettings,
) -> Result<StartValues, ModelError> {
    t.either(
        ("period_days", &raw.period_days),
        ("period_years", &raw.period_years),
    )?;
    t.either(
        ("periastron_time_jd", &raw.periastron_time_jd),
        ("periastron_time_jyear", &raw.periastron_time_jyear),
    )?;
    let plain = |key, field| StartValue {
        key,
        field,
        scale: 1.0,
    };
    let degrees = |key, field| StartValue {
        key,
        field,
        scale: DEG,
    };
    let period = match &raw.period_years {
        Some(_) => StartValue {
            key: "period_years",
            field: &raw.period_years,
            scale: JULIAN_YEAR_DAYS,
        },
        None => plain("period_days", &raw.period_days),
    };
    let t_peri_jd = number(&raw.periastron_time_jd)
        .or_else(|| number(&raw.periastron_time_jyear).map(|y| TimeScale::JulianYear.to_jd(y)));
    let inclination = degrees("inclination_deg", &raw.inclination_deg);
    let inclination_prior = match &priors.inclination {
        Some(InclinationPrior::Angle(p)) => Some(p),
        _ => None,
    };
    // A start value must lie where its prior (given or default) has support.
    let defaults = ModelPriors::defaults(&Dataset::default());
    Ok(StartValues {
        period_days: period.checked(
            t,
            priors.period.as_ref(),
            Some(&defaults.period_days),
            &POSITIVE,
        )?,
        eccentricity: plain("eccentricity", &raw.eccentricity).checked(
            t,
            priors.eccentricity.as_ref(),
            Some(&defaults.eccentricity),
            &ECCENTRICITY,
        )?,
        omega_rad: degrees("periastron_argument_deg", &raw.periastron_argument_deg).internal(),
        t_peri_jd,
        inclination_rad: inclination.checked(t, inclination_prior, None, &INCLINATION_DEG)?,
        node_rad: degrees("node_deg", &raw.node_deg).internal(),
        total_mass_msun: plain("total_mass_msun", &raw.total_mass_msun).checked(
            t,
            priors.total_mass.as_ref(),
            Some(&defaults.total_mass_msun),
            &POSITIVE,
        )?,
        parallax_mas: plain("parallax_mas", &raw.parallax_mas).checked(
            t,
            priors.parallax.as_ref(),
            Some(&defaults.parallax_mas),
            &POSITIVE,
        )?,
        mass_ratio: plain("mass_ratio", &raw.mass_ratio).checked(
            t,
            priors.mass_ratio.as_ref(),
            Some(&defaults.mass_ratio),
            &NON_NEGATIVE,
        )?,
    })
}

fn read_sampler(t: &Table<'_>, raw: &RawSampler) -> Result<SamplerSettings, ModelError> {
    if raw.autocorrelation_times.is_some() {
        return Err(t.error(
            "autocorrelation_times",
            &raw.autocorrelation_times,
            "is no longer a setting: the run now stops on effective draws; use \
             `effective_draws = 1000` (fewest effective draws of every parameter, bulk and \
             tails) and `max_split_rhat = 1.03` instead",
        ));
    }
    let d = SamplerSettings::default();
    let walkers = value(&raw.walkers).map_or(d.walkers, |v| v.0 as usize);
    if !walkers.is_multiple_of(2) {
        return Err(t.error(
            "walkers",
            &raw.walkers,
            format!("must be even (the ensemble is split in halves), got {walkers}"),
        ));
    }
    let burn_in_fraction = number(&raw.burn_in_fraction).unwrap_or(d.burn_in_fraction);
    if !(0.0..1.0).contains(&burn_in_fraction) {
        return Err(t.error(
            "burn_in_fraction",
            &raw.burn_in_fraction,
            format!("must be in [0, 1), got {burn_in_fraction}"),
        ));
    }
    let effective_draws = number(&raw.effective_draws).unwrap_or(d.effective_draws);
    if effective_draws < 1.0 {
        return Err(t.error(
            "effective_draws",
            &raw.effective_draws,
            format!("must be a number of at least 1, got {effective_draws}"),
        ));
    }
    let max_split_rhat = number(&raw.max_split_rhat).unwrap_or(d.max_split_rhat);
    if max_split_rhat <= 1.0 {
        return Err(t.error(
            "max_split_rhat",
            &raw.max_split_rhat,
            format!("must be a number above 1 (e.g. 1.01 to 1.1), got {max_split_rhat}"),
        ));
    }
    let mode_weight_error = number(&raw.mode_weight_error).unwrap_or(d.mode_weight_error);
    if !(mode_weight_error > 0.0 && mode_weight_error < 0.5) {
        return Err(t.error(
            "mode_weight_error",
            &raw.mode_weight_error,
            format!("must be a number between 0 and 0.5 (e.g. 0.01), got {mode_weight_error}"),
        ));
    }
    let tempering = match raw.temperatures.as_ref().map(Spanned::get_ref) {
        None => Tempering::Off,
        Some(toml::Value::String(v)) if v == "off" => Tempering::Off,
        Some(toml::Value::String(v)) if v == "auto" => Tempering::Auto,
        Some(toml::Value::Integer(1)) => Tempering::Off,
        Some(toml::Value::Integer(n)) if (2..=256).contains(n) => {
            Tempering::Temperatures(*n as usize)
        }
        Some(other) => {
            return Err(t.error(
                "temperatures",
                &raw.temperatures,
                format!(
                    "must be \"off\", \"auto\" or a whole number from 1 to 256, found {}",
                    describe_value(other)
                ),
            ))
        }
    };
    t.either(
        ("period_windows_days", &raw.period_windows_days),
        ("period_windows_years", &raw.period_windows_years),
    )?;
    let period_windows_days = match (&raw.period_windows_days, &raw.period_windows_years) {
        (Some(w), _) => read_windows(t, "period_windows_days", w, 1.0)?,
        (None, Some(w)) => read_windows(t, "period_windows_years", w, JULIAN_YEAR_DAYS)?,
        (None, None) => Vec::new(),
    };
    Ok(SamplerSettings {
        walkers,
        max_steps: value(&raw.max_steps).map_or(d.max_steps, |v| v.0 as usize),
        thinning: value(&raw.thinning).map_or(d.thinning, |v| v.0 as usize),
        burn_in_fraction,
        seed: value(&raw.seed).map_or(d.seed, |v| v.0),
        effective_draws,
        max_split_rhat,
        mode_weight_error,
        tempering,
        period_windows_days,
    })
}

fn read_windows(
    t: &Table<'_>,
    key: &str,
    windows: &Spanned<Vec<Spanned<Window>>>,
    scale: f64,
) -> Result<Vec<(f64, f64)>, ModelError> {
    windows
        .get_ref()
        .iter()
        .enumerate()
        .map(|(n, window)| {
            let &Window(lo, hi) = window.get_ref();
            if !(lo > 0.0 && hi > lo) {
                return Err(t.at(
                    &format!("{key}[{n}]"),
                    Some(window.span()),
                    format!("needs 0 < low < high, got [{lo}, {hi}] (bounds reversed?)"),
                ));
            }
            Ok((lo * scale, hi * scale))
        })
        .collect()
}
