//! The run configuration: one TOML file naming the data, the priors, an
//! optional starting guess, the sampler settings and the output folder.
//! Every key is documented, with units and defaults, in configs/README.md.
//!
//! The file is read in two stages (raw TOML values, then checked settings)
//! by walking the tables by hand, so that every error names the file and
//! the dotted key: unknown keys, wrong types, priors with reversed bounds or
//! no support in the physical range, start values outside their prior,
//! missing data files. Data paths are relative to the folder of the
//! configuration file.
//!
//! The sampler settings are plain data: this crate does not depend on the
//! sampler.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use crate::astrometry_errors::{
    astrometry_sources, AstrometryErrorPriors, ResidualDistribution, DEFAULT_DEGREES_OF_FREEDOM,
};
use crate::data::Dataset;
use crate::error::ModelError;
use crate::params::{InclinationPrior, ModelPriors, ScaledPrior};
use crate::prior::Prior;
use crate::toml_walk::{describe_value, parse_table, Section};
use dyad_orbit::constants::{DEG, JULIAN_YEAR_DAYS};
use dyad_orbit::TimeScale;

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

/// Physical domain of each prior key, in the key's unit (lo, hi, hi open).
struct Domain {
    lo: f64,
    hi: f64,
    open_hi: bool,
    lo_open: bool,
}

const POSITIVE: Domain = Domain {
    lo: 0.0,
    hi: f64::INFINITY,
    open_hi: false,
    lo_open: true,
};
const NON_NEGATIVE: Domain = Domain {
    lo: 0.0,
    hi: f64::INFINITY,
    open_hi: false,
    lo_open: false,
};
const ANY: Domain = Domain {
    lo: f64::NEG_INFINITY,
    hi: f64::INFINITY,
    open_hi: false,
    lo_open: false,
};
const ECCENTRICITY: Domain = Domain {
    lo: 0.0,
    hi: 1.0,
    open_hi: true,
    lo_open: false,
};
const INCLINATION_DEG: Domain = Domain {
    lo: 0.0,
    hi: 180.0,
    open_hi: false,
    lo_open: false,
};

impl Domain {
    fn contains(&self, v: f64) -> bool {
        let lo_ok = if self.lo_open {
            v > self.lo
        } else {
            v >= self.lo
        };
        let hi_ok = if self.open_hi {
            v < self.hi
        } else {
            v <= self.hi
        };
        lo_ok && hi_ok
    }
    fn describe(&self) -> String {
        format!(
            "{}{}, {}{}",
            if self.lo_open { "(" } else { "[" },
            self.lo,
            self.hi,
            if self.open_hi || self.hi.is_infinite() {
                ")"
            } else {
                "]"
            }
        )
    }
}

/// A prior in the key's unit, scaled to internal units, with its
/// support checked against the physical domain.
fn prior_at(
    s: &Section<'_>,
    key: &str,
    scale: f64,
    domain: &Domain,
) -> Result<Option<ScaledPrior>, ModelError> {
    let Some(value) = s.get(key) else {
        return Ok(None);
    };
    let prior = Prior::from_toml(value, s.file, &s.dotted(key))?;
    check_prior_domain(s, key, &prior, domain)?;
    Ok(Some(ScaledPrior::new(prior, scale)))
}

fn check_prior_domain(
    section: &Section<'_>,
    key: &str,
    prior: &Prior,
    domain: &Domain,
) -> Result<(), ModelError> {
    let (lo, hi) = prior.support();
    if prior.is_fixed() {
        if !domain.contains(lo) {
            return Err(section.error(
                key,
                format!(
                    "fixed value {lo} is outside the allowed range {}",
                    domain.describe()
                ),
            ));
        }
        return Ok(());
    }
    let overlaps = hi > domain.lo
        && if domain.open_hi {
            lo < domain.hi
        } else {
            lo <= domain.hi
        };
    if !overlaps {
        return Err(section.error(
            key,
            format!(
                "the prior {} has no support in the allowed range {}",
                prior.describe(),
                domain.describe()
            ),
        ));
    }
    Ok(())
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
        let table = parse_table(text, path)?;
        let base = path.parent().map(Path::to_owned).unwrap_or_default();
        let root = Section {
            file: path,
            prefix: String::new(),
            table: &table,
        };
        root.allow_only(&[
            "data",
            "priors",
            "astrometry_errors",
            "start",
            "sampler",
            "output",
        ])?;

        let data = match root.sub("data")? {
            Some(s) => read_data(&s, &base)?,
            None => return Err(root.error("data", "missing [data] section naming the data files")),
        };
        let mut priors = match root.sub("priors")? {
            Some(s) => read_priors(&s)?,
            None => PriorSettings::default(),
        };
        if let Some((plx, err)) = data.catalogue_parallax {
            if priors.parallax.is_some() {
                return Err(ModelError::at(
                    path,
                    None,
                    Some("priors.parallax_mas"),
                    "a parallax prior is given both here and by [data] catalogue_parallax_mas; keep one",
                ));
            }
            let prior = Prior::truncated_normal(plx, err, 0.0, f64::INFINITY).map_err(|e| {
                ModelError::at(
                    path,
                    None,
                    Some("data.catalogue_parallax_mas"),
                    e.to_string(),
                )
            })?;
            priors.parallax = Some(ScaledPrior::internal(prior));
        }
        let astrometry_errors = match root.sub("astrometry_errors")? {
            Some(s) => read_astrometry_errors(&s)?,
            None => AstrometryErrorSettings::default(),
        };
        let start = match root.sub("start")? {
            Some(s) => read_start(&s, &priors)?,
            None => StartValues::default(),
        };
        let sampler = match root.sub("sampler")? {
            Some(s) => read_sampler(&s)?,
            None => SamplerSettings::default(),
        };
        let output = match root.sub("output")? {
            Some(s) => {
                s.allow_only(&["folder", "orbits_on_sky_plot"])?;
                OutputSettings {
                    folder: base.join(s.string("folder")?.unwrap_or("dyad-run")),
                    orbits_on_sky_plot: s
                        .count("orbits_on_sky_plot", 0)?
                        .map_or(DEFAULT_SKY_ORBITS, |v| v as usize),
                }
            }
            None => OutputSettings {
                folder: base.join("dyad-run"),
                orbits_on_sky_plot: DEFAULT_SKY_ORBITS,
            },
        };
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

fn read_data(s: &Section<'_>, base: &Path) -> Result<DataSettings, ModelError> {
    s.allow_only(&[
        "astrometry",
        "velocities",
        "catalogue_parallax_mas",
        "catalogue_parallax_err_mas",
        "reference_epoch_jd",
    ])?;
    let astrometry = match s.string("astrometry")? {
        Some(v) => Some(s.existing_file("astrometry", v, base)?),
        None => None,
    };
    let velocities = match s.get("velocities") {
        None => Vec::new(),
        Some(toml::Value::String(v)) => vec![s.existing_file("velocities", v, base)?],
        Some(toml::Value::Array(items)) => {
            let mut out = Vec::with_capacity(items.len());
            for (n, item) in items.iter().enumerate() {
                let key = format!("velocities[{n}]");
                match item {
                    toml::Value::String(v) => out.push(s.existing_file(&key, v, base)?),
                    other => {
                        return Err(s.error(
                            &key,
                            format!(
                                "must be a file name (string), found {}",
                                describe_value(other)
                            ),
                        ))
                    }
                }
            }
            out
        }
        Some(other) => {
            return Err(s.error(
                "velocities",
                format!(
                    "must be a file name or a list of file names, found {}",
                    describe_value(other)
                ),
            ))
        }
    };
    if astrometry.is_none() && velocities.is_empty() {
        return Err(s.error(
            "astrometry",
            "no data: give 'astrometry', 'velocities', or both",
        ));
    }
    let catalogue_parallax = match (
        s.f64("catalogue_parallax_mas")?,
        s.f64("catalogue_parallax_err_mas")?,
    ) {
        (Some(p), Some(e)) => {
            if e <= 0.0 {
                return Err(s.error(
                    "catalogue_parallax_err_mas",
                    format!("must be positive, got {e}"),
                ));
            }
            if p <= 0.0 {
                return Err(s.error(
                    "catalogue_parallax_mas",
                    format!("must be positive, got {p}"),
                ));
            }
            Some((p, e))
        }
        (None, None) => None,
        (Some(_), None) => {
            return Err(s.error(
                "catalogue_parallax_err_mas",
                "a catalogue parallax needs its error too",
            ))
        }
        (None, Some(_)) => {
            return Err(s.error(
                "catalogue_parallax_mas",
                "a parallax error is given without the parallax",
            ))
        }
    };
    Ok(DataSettings {
        astrometry,
        velocities,
        catalogue_parallax,
        reference_epoch_jd: s.f64("reference_epoch_jd")?,
    })
}

const PRIOR_KEYS: &[&str] = &[
    "period_days",
    "period_years",
    "eccentricity",
    "periastron_argument_deg",
    "inclination_deg",
    "node_deg",
    "total_mass_msun",
    "parallax_mas",
    "mass_ratio",
    "primary_semi_amplitude_kms",
    "secondary_semi_amplitude_kms",
    "offset_kms",
    "jitter_kms",
    "instruments",
];

fn read_priors(s: &Section<'_>) -> Result<PriorSettings, ModelError> {
    s.allow_only(PRIOR_KEYS)?;
    let period = match s.one_of("period_days", "period_years")? {
        Some("a") => prior_at(s, "period_days", 1.0, &POSITIVE)?,
        Some(_) => prior_at(s, "period_years", JULIAN_YEAR_DAYS, &POSITIVE)?,
        None => None,
    };
    let inclination = match s.get("inclination_deg") {
        Some(toml::Value::String(v)) if v == "isotropic" => Some(InclinationPrior::Isotropic),
        Some(toml::Value::String(v)) => {
            return Err(s.error(
                "inclination_deg",
                format!("the only named inclination prior is \"isotropic\", got \"{v}\"; otherwise give a prior table in degrees"),
            ))
        }
        Some(_) => prior_at(s, "inclination_deg", DEG, &INCLINATION_DEG)?.map(InclinationPrior::Angle),
        None => None,
    };
    let mut instruments = BTreeMap::new();
    if let Some(inst) = s.sub("instruments")? {
        for name in inst.table.keys() {
            let Some(one) = inst.sub(name)? else { continue };
            one.allow_only(&["offset_kms", "jitter_kms"])?;
            instruments.insert(
                name.clone(),
                InstrumentPriors {
                    offset: prior_at(&one, "offset_kms", 1.0, &ANY)?,
                    jitter: prior_at(&one, "jitter_kms", 1.0, &NON_NEGATIVE)?,
                },
            );
        }
    }
    Ok(PriorSettings {
        period,
        eccentricity: prior_at(s, "eccentricity", 1.0, &ECCENTRICITY)?,
        omega: prior_at(s, "periastron_argument_deg", DEG, &ANY)?,
        inclination,
        node: prior_at(s, "node_deg", DEG, &ANY)?,
        total_mass: prior_at(s, "total_mass_msun", 1.0, &POSITIVE)?,
        parallax: prior_at(s, "parallax_mas", 1.0, &POSITIVE)?,
        mass_ratio: prior_at(s, "mass_ratio", 1.0, &NON_NEGATIVE)?,
        k1: prior_at(s, "primary_semi_amplitude_kms", 1.0, &POSITIVE)?,
        k2: prior_at(s, "secondary_semi_amplitude_kms", 1.0, &POSITIVE)?,
        offset: prior_at(s, "offset_kms", 1.0, &ANY)?,
        jitter: prior_at(s, "jitter_kms", 1.0, &NON_NEGATIVE)?,
        instruments,
    })
}

fn read_astrometry_errors(s: &Section<'_>) -> Result<AstrometryErrorSettings, ModelError> {
    s.allow_only(&[
        "scale",
        "jitter_mas",
        "distribution",
        "degrees_of_freedom",
        "sources",
    ])?;
    let student = match s.string("distribution")? {
        None | Some("normal") => false,
        Some("student_t") => true,
        Some(other) => {
            return Err(s.error(
                "distribution",
                format!("must be \"normal\" or \"student_t\", got \"{other}\""),
            ))
        }
    };
    let student_t = match (student, s.get("degrees_of_freedom")) {
        (false, None) => None,
        (false, Some(_)) => {
            return Err(s.error(
                "degrees_of_freedom",
                "only used with distribution = \"student_t\"",
            ))
        }
        (true, None) => Some(ScaledPrior::internal(
            Prior::fixed(DEFAULT_DEGREES_OF_FREEDOM)
                .map_err(|e| s.error("distribution", e.to_string()))?,
        )),
        (true, Some(toml::Value::Float(_) | toml::Value::Integer(_))) => {
            let nu = s
                .f64("degrees_of_freedom")?
                .unwrap_or(DEFAULT_DEGREES_OF_FREEDOM);
            if nu.is_nan() || nu <= 0.0 {
                return Err(s.error("degrees_of_freedom", format!("must be positive, got {nu}")));
            }
            Some(ScaledPrior::internal(
                Prior::fixed(nu).map_err(|e| s.error("degrees_of_freedom", e.to_string()))?,
            ))
        }
        (true, Some(_)) => prior_at(s, "degrees_of_freedom", 1.0, &POSITIVE)?,
    };
    let mut sources = BTreeMap::new();
    if let Some(table) = s.sub("sources")? {
        for name in table.table.keys() {
            let Some(one) = table.sub(name)? else {
                continue;
            };
            one.allow_only(&["scale", "jitter_mas"])?;
            sources.insert(
                name.clone(),
                SourceErrorPriors {
                    scale: prior_at(&one, "scale", 1.0, &POSITIVE)?,
                    jitter_mas: prior_at(&one, "jitter_mas", 1.0, &NON_NEGATIVE)?,
                },
            );
        }
    }
    Ok(AstrometryErrorSettings {
        scale: prior_at(s, "scale", 1.0, &POSITIVE)?,
        jitter_mas: prior_at(s, "jitter_mas", 1.0, &NON_NEGATIVE)?,
        student_t,
        sources,
    })
}

fn read_start(s: &Section<'_>, priors: &PriorSettings) -> Result<StartValues, ModelError> {
    s.allow_only(&[
        "period_days",
        "period_years",
        "eccentricity",
        "periastron_argument_deg",
        "periastron_time_jd",
        "periastron_time_jyear",
        "inclination_deg",
        "node_deg",
        "total_mass_msun",
        "parallax_mas",
        "mass_ratio",
    ])?;
    // A start value must lie where its prior (given or default) has support.
    let defaults = ModelPriors::defaults(&Dataset::default());
    let check = |key: &str,
                 internal: Option<f64>,
                 prior: Option<&ScaledPrior>,
                 default: &ScaledPrior,
                 domain: &Domain,
                 scale: f64|
     -> Result<Option<f64>, ModelError> {
        let Some(v) = internal else { return Ok(None) };
        if !domain.contains(v / scale) {
            return Err(s.error(
                key,
                format!(
                    "start value {} is outside the allowed range {}",
                    v / scale,
                    domain.describe()
                ),
            ));
        }
        let prior = prior.unwrap_or(default);
        if !prior.contains(v) {
            return Err(s.error(
                key,
                format!(
                    "start value {} is where its prior ({}) has no support",
                    v / scale,
                    prior.prior().describe()
                ),
            ));
        }
        Ok(Some(v))
    };
    let period = match s.one_of("period_days", "period_years")? {
        Some("a") => ("period_days", s.f64("period_days")?, 1.0),
        Some(_) => (
            "period_years",
            s.f64("period_years")?.map(|v| v * JULIAN_YEAR_DAYS),
            JULIAN_YEAR_DAYS,
        ),
        None => ("period_days", None, 1.0),
    };
    let t_peri_jd = match s.one_of("periastron_time_jd", "periastron_time_jyear")? {
        Some("a") => s.f64("periastron_time_jd")?,
        Some(_) => s
            .f64("periastron_time_jyear")?
            .map(|y| TimeScale::JulianYear.to_jd(y)),
        None => None,
    };
    let deg = |key: &str| -> Result<Option<f64>, ModelError> { Ok(s.f64(key)?.map(|v| v * DEG)) };
    let inclination_rad = deg("inclination_deg")?;
    if let Some(i) = inclination_rad {
        if !INCLINATION_DEG.contains(i / DEG) {
            return Err(s.error(
                "inclination_deg",
                format!("start value {} is outside [0, 180]", i / DEG),
            ));
        }
        if let Some(InclinationPrior::Angle(p)) = &priors.inclination {
            if !p.contains(i) {
                return Err(s.error(
                    "inclination_deg",
                    format!(
                        "start value {} is where its prior ({}) has no support",
                        i / DEG,
                        p.prior().describe()
                    ),
                ));
            }
        }
    }
    let omega_rad = deg("periastron_argument_deg")?;
    let node_rad = deg("node_deg")?;
    Ok(StartValues {
        period_days: check(
            period.0,
            period.1,
            priors.period.as_ref(),
            &defaults.period_days,
            &POSITIVE,
            period.2,
        )?,
        eccentricity: check(
            "eccentricity",
            s.f64("eccentricity")?,
            priors.eccentricity.as_ref(),
            &defaults.eccentricity,
            &ECCENTRICITY,
            1.0,
        )?,
        omega_rad,
        t_peri_jd,
        inclination_rad,
        node_rad,
        total_mass_msun: check(
            "total_mass_msun",
            s.f64("total_mass_msun")?,
            priors.total_mass.as_ref(),
            &defaults.total_mass_msun,
            &POSITIVE,
            1.0,
        )?,
        parallax_mas: check(
            "parallax_mas",
            s.f64("parallax_mas")?,
            priors.parallax.as_ref(),
            &defaults.parallax_mas,
            &POSITIVE,
            1.0,
        )?,
        mass_ratio: check(
            "mass_ratio",
            s.f64("mass_ratio")?,
            priors.mass_ratio.as_ref(),
            &defaults.mass_ratio,
            &NON_NEGATIVE,
            1.0,
        )?,
    })
}

fn read_sampler(s: &Section<'_>) -> Result<SamplerSettings, ModelError> {
    if s.get("autocorrelation_times").is_some() {
        return Err(s.error(
            "autocorrelation_times",
            "is no longer a setting: the run now stops on effective draws; use \
             `effective_draws = 1000` (fewest effective draws of every parameter, bulk and \
             tails) and `max_split_rhat = 1.03` instead",
        ));
    }
    s.allow_only(&[
        "walkers",
        "max_steps",
        "thinning",
        "burn_in_fraction",
        "effective_draws",
        "max_split_rhat",
        "seed",
        "temperatures",
        "period_windows_days",
        "period_windows_years",
    ])?;
    let d = SamplerSettings::default();
    let walkers = s.count("walkers", 4)?.map_or(d.walkers, |v| v as usize);
    if walkers % 2 != 0 {
        return Err(s.error(
            "walkers",
            format!("must be even (the ensemble is split in halves), got {walkers}"),
        ));
    }
    let burn_in_fraction = s.f64("burn_in_fraction")?.unwrap_or(d.burn_in_fraction);
    if !(0.0..1.0).contains(&burn_in_fraction) {
        return Err(s.error(
            "burn_in_fraction",
            format!("must be in [0, 1), got {burn_in_fraction}"),
        ));
    }
    let effective_draws = s.f64("effective_draws")?.unwrap_or(d.effective_draws);
    if !(effective_draws.is_finite() && effective_draws >= 1.0) {
        return Err(s.error(
            "effective_draws",
            format!("must be a number of at least 1, got {effective_draws}"),
        ));
    }
    let max_split_rhat = s.f64("max_split_rhat")?.unwrap_or(d.max_split_rhat);
    if !(max_split_rhat.is_finite() && max_split_rhat > 1.0) {
        return Err(s.error(
            "max_split_rhat",
            format!("must be a number above 1 (e.g. 1.01 to 1.1), got {max_split_rhat}"),
        ));
    }
    let tempering = match s.get("temperatures") {
        None => Tempering::Off,
        Some(toml::Value::String(v)) if v == "off" => Tempering::Off,
        Some(toml::Value::String(v)) if v == "auto" => Tempering::Auto,
        Some(toml::Value::Integer(1)) => Tempering::Off,
        Some(toml::Value::Integer(n)) if *n >= 2 && *n <= 256 => {
            Tempering::Temperatures(*n as usize)
        }
        Some(other) => {
            return Err(s.error(
                "temperatures",
                format!(
                    "must be \"off\", \"auto\" or a whole number from 1 to 256, found {}",
                    describe_value(other)
                ),
            ))
        }
    };
    let windows = match s.one_of("period_windows_days", "period_windows_years")? {
        Some("a") => read_windows(s, "period_windows_days", 1.0)?,
        Some(_) => read_windows(s, "period_windows_years", JULIAN_YEAR_DAYS)?,
        None => Vec::new(),
    };
    Ok(SamplerSettings {
        walkers,
        max_steps: s.count("max_steps", 1)?.map_or(d.max_steps, |v| v as usize),
        thinning: s.count("thinning", 1)?.map_or(d.thinning, |v| v as usize),
        burn_in_fraction,
        seed: s.count("seed", 0)?.unwrap_or(d.seed),
        effective_draws,
        max_split_rhat,
        tempering,
        period_windows_days: windows,
    })
}

fn read_windows(s: &Section<'_>, key: &str, scale: f64) -> Result<Vec<(f64, f64)>, ModelError> {
    let bad = |n: Option<usize>, message: String| {
        let k = match n {
            Some(n) => format!("{key}[{n}]"),
            None => key.to_owned(),
        };
        s.error(&k, message)
    };
    let Some(toml::Value::Array(items)) = s.get(key) else {
        return Err(bad(
            None,
            "must be a list of [low, high] pairs, e.g. [[100, 200], [400, 800]]".into(),
        ));
    };
    let mut out = Vec::with_capacity(items.len());
    for (n, item) in items.iter().enumerate() {
        let pair = match item {
            toml::Value::Array(p) if p.len() == 2 => p,
            other => {
                return Err(bad(
                    Some(n),
                    format!(
                        "must be a [low, high] pair, found {}",
                        describe_value(other)
                    ),
                ))
            }
        };
        let num = |v: &toml::Value| match v {
            toml::Value::Float(f) => Some(*f),
            toml::Value::Integer(i) => Some(*i as f64),
            _ => None,
        };
        let (Some(lo), Some(hi)) = (num(&pair[0]), num(&pair[1])) else {
            return Err(bad(Some(n), "both ends must be numbers".into()));
        };
        if !(lo > 0.0 && hi > lo && hi.is_finite()) {
            return Err(bad(
                Some(n),
                format!("needs 0 < low < high, got [{lo}, {hi}] (bounds reversed?)"),
            ));
        }
        out.push((lo * scale, hi * scale));
    }
    Ok(out)
}
