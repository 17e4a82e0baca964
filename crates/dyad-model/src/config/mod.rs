//! The run configuration: one TOML file naming the data, the priors, an
//! optional starting guess, the sampler settings and the output folder.
//! Every key is documented, with units and defaults, in configs/README.md.
//!
//! The file is read in two stages: serde-derived raw tables ([`raw`], which
//! refuse unknown keys and wrong types), then checked settings ([`checks`]:
//! priors with reversed bounds or no support in the physical range
//! ([`domain`]), start values outside their prior, missing data files).
//! Every error names the file, the dotted key and, where the value is in the
//! file, its line and column. Data paths are relative to the folder of the
//! configuration file.
//!
//! The sampler settings are plain data: this crate does not depend on the
//! sampler.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

mod checks;
mod domain;
mod raw;

use crate::astrometry_errors::{astrometry_sources, AstrometryErrorPriors, ResidualDistribution};
use crate::data::Dataset;
use crate::error::ModelError;
use crate::params::{InclinationPrior, ModelPriors, ScaledPrior};
use crate::toml_input::Source;

/// Which data files to read.
#[derive(Debug, Clone, PartialEq)]
pub struct DataSettings {
    /// Relative astrometry CSV (`[data] astrometry`), resolved to a path.
    pub astrometry: Option<PathBuf>,
    /// Radial-velocity CSVs (`[data] velocities`), resolved.
    pub velocities: Vec<PathBuf>,
    /// Catalogue parallax and its error, mas (`[data] catalogue_parallax_mas`,
    /// `catalogue_parallax_err_mas`): becomes a normal prior truncated at 0.
    pub catalogue_parallax: Option<(f64, f64)>,
    /// Epoch at which the phase is defined, JD (`[data] reference_epoch_jd`);
    /// `None`: the mid-point of the data.
    pub reference_epoch_jd: Option<f64>,
}

/// Priors stated in the file (`None`: the default of [`ModelPriors::defaults`]).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct PriorSettings {
    /// `period_days` or `period_years`.
    pub period: Option<ScaledPrior>,
    /// `eccentricity`.
    pub eccentricity: Option<ScaledPrior>,
    /// `periastron_argument_deg`: omega of the secondary.
    pub omega: Option<ScaledPrior>,
    /// `inclination_deg` ("isotropic" or a prior).
    pub inclination: Option<InclinationPrior>,
    /// `node_deg`: position angle of the ascending node.
    pub node: Option<ScaledPrior>,
    /// `total_mass_msun`.
    pub total_mass: Option<ScaledPrior>,
    /// `parallax_mas`.
    pub parallax: Option<ScaledPrior>,
    /// `mass_ratio`.
    pub mass_ratio: Option<ScaledPrior>,
    /// `primary_semi_amplitude_kms` (velocities only).
    pub k1: Option<ScaledPrior>,
    /// `secondary_semi_amplitude_kms` (velocities only).
    pub k2: Option<ScaledPrior>,
    /// `offset_kms`: for every instrument without its own.
    pub offset: Option<ScaledPrior>,
    /// `jitter_kms`: for every instrument without its own.
    pub jitter: Option<ScaledPrior>,
    /// `[priors.instruments.NAME]`: per-instrument `offset_kms`, `jitter_kms`.
    pub instruments: BTreeMap<String, InstrumentPriors>,
}

/// Priors of one instrument.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct InstrumentPriors {
    /// `offset_kms`.
    pub offset: Option<ScaledPrior>,
    /// `jitter_kms`.
    pub jitter: Option<ScaledPrior>,
}

/// The astrometric error model (`[astrometry_errors]`); `None`: the
/// default (scale 1, no jitter, normal residuals).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct AstrometryErrorSettings {
    /// `scale`: prior of the error-scale factor of every source without its own.
    pub scale: Option<ScaledPrior>,
    /// `jitter_mas`: prior of the added jitter of every source without its own.
    pub jitter_mas: Option<ScaledPrior>,
    /// `distribution = "student_t"` with its `degrees_of_freedom` (prior or
    /// fixed); `None`: normal residuals.
    pub student_t: Option<ScaledPrior>,
    /// `[astrometry_errors.sources.NAME]`: per-source `scale`, `jitter_mas`.
    pub sources: BTreeMap<String, SourceErrorPriors>,
}

/// Error-model priors of one astrometric source.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct SourceErrorPriors {
    /// `scale`.
    pub scale: Option<ScaledPrior>,
    /// `jitter_mas`.
    pub jitter_mas: Option<ScaledPrior>,
}

/// An optional starting guess (`[start]`), in internal units; the starting
/// search tries it besides its own candidates.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct StartValues {
    /// `period_days` or `period_years`.
    pub period_days: Option<f64>,
    /// `eccentricity`.
    pub eccentricity: Option<f64>,
    /// `periastron_argument_deg`, radians.
    pub omega_rad: Option<f64>,
    /// `periastron_time_jd` or `periastron_time_jyear`, JD.
    pub t_peri_jd: Option<f64>,
    /// `inclination_deg`, radians.
    pub inclination_rad: Option<f64>,
    /// `node_deg`, radians.
    pub node_rad: Option<f64>,
    /// `total_mass_msun`.
    pub total_mass_msun: Option<f64>,
    /// `parallax_mas`.
    pub parallax_mas: Option<f64>,
    /// `mass_ratio`.
    pub mass_ratio: Option<f64>,
}

impl StartValues {
    /// Whether nothing is given.
    pub fn is_empty(&self) -> bool {
        *self == StartValues::default()
    }
}

/// Parallel tempering: off, an automatic number of temperatures, or a count.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Tempering {
    /// A single chain at temperature 1.
    Off,
    /// The sampler chooses the number of temperatures.
    Auto,
    /// This many temperatures (>= 2).
    Temperatures(usize),
}

/// Sampler settings (`[sampler]`), plain data for the binary to pass on.
#[derive(Debug, Clone, PartialEq)]
pub struct SamplerSettings {
    /// `walkers`: ensemble size (default 64).
    pub walkers: usize,
    /// `max_steps`: most ensemble steps (default 20000).
    pub max_steps: usize,
    /// `thinning`: keep every n-th step (default 1).
    pub thinning: usize,
    /// `burn_in_fraction`: share of the steps discarded (default 0.5).
    pub burn_in_fraction: f64,
    /// `seed` (default 1).
    pub seed: u64,
    /// `effective_draws`: stop once every sampled parameter has at least
    /// this many effective draws after burn-in, in the bulk and in the tails
    /// (default 1000) ...
    pub effective_draws: f64,
    /// ... `max_split_rhat`: and a rank-normalised split R-hat of at most
    /// this (default 1.03).
    pub max_split_rhat: f64,
    /// `mode_weight_error`: when the posterior has separate period modes,
    /// stop only once every mode's weight is known to this Monte Carlo
    /// standard error or better (default 0.01).
    pub mode_weight_error: f64,
    /// `temperatures`: "off" (default), "auto", or a number.
    pub tempering: Tempering,
    /// `period_windows_days` or `period_windows_years`: period ranges
    /// (days) to compare by evidence; empty: no comparison.
    pub period_windows_days: Vec<(f64, f64)>,
}

impl Default for SamplerSettings {
    fn default() -> Self {
        Self {
            walkers: 64,
            max_steps: 20_000,
            thinning: 1,
            burn_in_fraction: 0.5,
            effective_draws: 1000.0,
            max_split_rhat: 1.03,
            mode_weight_error: 0.01,
            seed: 1,
            tempering: Tempering::Off,
            period_windows_days: Vec::new(),
        }
    }
}

/// Output settings (`[output]`).
#[derive(Debug, Clone, PartialEq)]
pub struct OutputSettings {
    /// `folder`, resolved relative to the configuration file (default
    /// `dyad-run` beside it).
    pub folder: PathBuf,
    /// `orbits_on_sky_plot`: posterior orbits drawn on the sky plot
    /// (default [`DEFAULT_SKY_ORBITS`]).
    pub orbits_on_sky_plot: usize,
}

/// Posterior orbits drawn on the sky plot unless `[output]
/// orbits_on_sky_plot` says otherwise: enough to show the spread, few
/// enough that the measurements stay readable.
pub const DEFAULT_SKY_ORBITS: usize = 40;

/// A checked run configuration.
#[derive(Debug, Clone, PartialEq)]
pub struct RunConfig {
    /// The configuration file itself.
    pub file: PathBuf,
    /// `[data]`.
    pub data: DataSettings,
    /// `[priors]`.
    pub priors: PriorSettings,
    /// `[astrometry_errors]`.
    pub astrometry_errors: AstrometryErrorSettings,
    /// `[start]`.
    pub start: StartValues,
    /// `[sampler]`.
    pub sampler: SamplerSettings,
    /// `[output]`.
    pub output: OutputSettings,
}

impl RunConfig {
    /// Reads and checks a configuration file.
    pub fn load(path: &Path) -> Result<RunConfig, ModelError> {
        let text = std::fs::read_to_string(path).map_err(|source| ModelError::Io {
            path: path.to_owned(),
            source,
        })?;
        Self::from_toml_str(&text, path)
    }

    /// Parses configuration text as if read from `path` (which sets the
    /// folder data paths are relative to, and is named in errors).
    pub fn from_toml_str(text: &str, path: &Path) -> Result<RunConfig, ModelError> {
        let source = Source { file: path, text };
        checks::run_config(source.parse()?, source, checks::DataSource::Files)
    }

    /// Parses the settings of a fit whose measurements are given as arrays
    /// (bindings, notebooks): as [`RunConfig::from_toml_str`], but `[data]`
    /// is optional and may name no files (its catalogue parallax and
    /// reference epoch apply). `label` names the settings in errors.
    pub fn for_arrays_from_toml_str(text: &str, label: &Path) -> Result<RunConfig, ModelError> {
        let source = Source { file: label, text };
        checks::run_config(source.parse()?, source, checks::DataSource::Arrays)
    }

    /// Reads the data files named in `[data]`.
    pub fn load_dataset(&self) -> Result<Dataset, ModelError> {
        let velocities: Vec<&Path> = self.data.velocities.iter().map(PathBuf::as_path).collect();
        crate::load::load_dataset(self.data.astrometry.as_deref(), &velocities)
    }

    /// The complete priors for a data set: the file's priors over the
    /// defaults, per-instrument priors matched to the instruments in the
    /// data (an instrument named in the file but absent from the data is an
    /// error naming the key).
    pub fn model_priors(&self, dataset: &Dataset) -> Result<ModelPriors, ModelError> {
        let mut m = ModelPriors::defaults(dataset);
        let p = &self.priors;
        let set = |slot: &mut ScaledPrior, v: &Option<ScaledPrior>| {
            if let Some(v) = v {
                *slot = *v;
            }
        };
        set(&mut m.period_days, &p.period);
        set(&mut m.eccentricity, &p.eccentricity);
        set(&mut m.omega_rad, &p.omega);
        if let Some(i) = p.inclination {
            m.inclination = i;
        }
        set(&mut m.node_rad, &p.node);
        set(&mut m.total_mass_msun, &p.total_mass);
        set(&mut m.parallax_mas, &p.parallax);
        set(&mut m.mass_ratio, &p.mass_ratio);
        set(&mut m.k1_kms, &p.k1);
        set(&mut m.k2_kms, &p.k2);
        for k in 0..dataset.instruments.len() {
            set(&mut m.offset_kms[k], &p.offset);
            set(&mut m.jitter_kms[k], &p.jitter);
        }
        for (name, ip) in &p.instruments {
            let Some(k) = dataset.instruments.iter().position(|n| n == name) else {
                return Err(ModelError::at(
                    &self.file,
                    None,
                    Some(&format!("priors.instruments.{name}")),
                    format!(
                        "no instrument '{name}' in the velocity files (instruments found: {})",
                        if dataset.instruments.is_empty() {
                            "none".to_owned()
                        } else {
                            dataset.instruments.join(", ")
                        }
                    ),
                ));
            };
            set(&mut m.offset_kms[k], &ip.offset);
            set(&mut m.jitter_kms[k], &ip.jitter);
        }
        m.reference_epoch_jd = self.data.reference_epoch_jd;
        self.apply_astrometry_errors(dataset, &mut m.astrometry_errors)?;
        Ok(m)
    }

    /// The `[astrometry_errors]` table over the default (errors as given),
    /// per-source tables matched to the sources in the data (a source named
    /// in the file but absent from the data is an error naming the key).
    fn apply_astrometry_errors(
        &self,
        dataset: &Dataset,
        out: &mut AstrometryErrorPriors,
    ) -> Result<(), ModelError> {
        let e = &self.astrometry_errors;
        let (names, _) = astrometry_sources(dataset);
        for k in 0..names.len() {
            if let Some(p) = e.scale {
                out.scale[k] = p;
            }
            if let Some(p) = e.jitter_mas {
                out.jitter_mas[k] = p;
            }
        }
        for (name, sp) in &e.sources {
            let Some(k) = names.iter().position(|n| n == name) else {
                return Err(ModelError::at(
                    &self.file,
                    None,
                    Some(&format!("astrometry_errors.sources.{name}")),
                    format!(
                        "no astrometric source '{name}' in the astrometry file (sources found: {})",
                        if names.is_empty() {
                            "none".to_owned()
                        } else {
                            names.join(", ")
                        }
                    ),
                ));
            };
            if let Some(p) = sp.scale {
                out.scale[k] = p;
            }
            if let Some(p) = sp.jitter_mas {
                out.jitter_mas[k] = p;
            }
        }
        if let Some(dof) = e.student_t {
            out.distribution = ResidualDistribution::StudentT(dof);
        }
        Ok(())
    }
}
