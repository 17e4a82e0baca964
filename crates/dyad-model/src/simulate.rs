//! `dyad simulate SCENARIO.toml`: invented measurements of a binary with
//! known elements, written in the input format of DESIGN.md (and read back
//! by [`crate::load`]). The scenario keys are documented in
//! demo-data/README.md.
//!
//! Files are written atomically (a temporary file in the same folder, then a
//! rename), all of them only after every one has been prepared, and an
//! existing file is never replaced unless `overwrite` is set.
//!
//! Noise, when on, is Gaussian: an astrometric pair gets correlated errors
//! with the stated error bars and correlation; a velocity gets its error bar
//! and the instrument's jitter added in quadrature. The random stream is
//! Xoshiro256++ seeded from the scenario's `seed`, so a scenario always
//! produces the same files.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use rand::SeedableRng;
use rand_distr::{Distribution, StandardNormal};
use rand_xoshiro::Xoshiro256PlusPlus;

use dyad_orbit::constants::{DEG, JULIAN_YEAR_DAYS};
use dyad_orbit::{laws, velocity, CampbellElements, Orbit, TimeScale};

use crate::data::Star;
use crate::error::ModelError;
use crate::toml_walk::{describe_value, parse_table, Section};

/// True elements and physical parameters of a simulated binary, in
/// internal units.
#[derive(Debug, Clone, PartialEq)]
pub struct TrueSystem {
    /// Name (free text).
    pub name: String,
    /// Campbell elements, `a` in mas.
    pub elements: CampbellElements,
    /// Parallax, mas (needed for velocities).
    pub parallax_mas: Option<f64>,
    /// Mass ratio M2/M1 (needed for velocities).
    pub mass_ratio: Option<f64>,
    /// Systemic velocity, km/s.
    pub systemic_kms: f64,
}

impl TrueSystem {
    /// Semi-major axis in au, when the parallax is known.
    pub fn semi_major_axis_au(&self) -> Option<f64> {
        self.parallax_mas.map(|p| self.elements.a / p)
    }

    /// Total mass, M_sun, when the parallax is known.
    pub fn total_mass_msun(&self) -> Option<f64> {
        self.semi_major_axis_au()
            .map(|a| laws::total_mass_msun(a, self.elements.period_days))
    }
}

/// How the astrometry is written.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Form {
    Polar {
        sep_err: f64,
        pa_err_deg: f64,
        arcsec: bool,
    },
    Cartesian {
        dra_err: f64,
        ddec_err: f64,
    },
}

#[derive(Debug, Clone, PartialEq)]
struct AstrometryPlan {
    file: PathBuf,
    scale: TimeScale,
    epochs: Vec<f64>,
    form: Form,
    corr: f64,
    /// `sources`: (name, true error / quoted error), assigned to the epochs
    /// in turn; empty: no `source` column.
    sources: Vec<(String, f64)>,
    /// `outlier_epochs` (0-based) and `outlier_sigma`: those epochs are
    /// displaced by that many true errors in the first coordinate.
    outliers: Vec<usize>,
    outlier_sigma: f64,
}

#[derive(Debug, Clone, PartialEq)]
struct InstrumentPlan {
    name: String,
    offset_kms: f64,
    jitter_kms: f64,
    error_kms: f64,
    stars: Vec<Star>,
    epochs: Vec<f64>,
}

#[derive(Debug, Clone, PartialEq)]
struct VelocityPlan {
    file: PathBuf,
    scale: TimeScale,
    instruments: Vec<InstrumentPlan>,
}

/// A parsed scenario.
#[derive(Debug, Clone, PartialEq)]
pub struct Scenario {
    /// The true system.
    pub system: TrueSystem,
    /// Seed of the noise.
    pub seed: u64,
    /// Whether noise is added.
    pub noise: bool,
    astrometry: Option<AstrometryPlan>,
    velocities: Option<VelocityPlan>,
}

fn time_scale(s: &Section<'_>, key: &str) -> Result<TimeScale, ModelError> {
    match s.string(key)? {
        None => Ok(TimeScale::Jd),
        Some(name) => TimeScale::from_column_name(name).ok_or_else(|| {
            s.error(
                key,
                format!("unknown time scale '{name}'; use jd, mjd, jyear or byear"),
            )
        }),
    }
}

fn required(s: &Section<'_>, key: &str) -> Result<f64, ModelError> {
    s.f64(key)?
        .ok_or_else(|| s.error(key, format!("missing '{key}'")))
}

/// Epochs as JD: `epochs = [...]` or `first`, `last`, `count` (inclusive,
/// evenly spaced), in the section's time scale.
fn epochs(s: &Section<'_>, scale: TimeScale) -> Result<Vec<f64>, ModelError> {
    let explicit = s.get("epochs");
    let regular = s.get("first").is_some() || s.get("last").is_some() || s.get("count").is_some();
    let values: Vec<f64> = match (explicit, regular) {
        (Some(_), true) => {
            return Err(s.error(
                "epochs",
                "give either 'epochs' or 'first', 'last' and 'count', not both",
            ))
        }
        (Some(toml::Value::Array(items)), false) => {
            let mut out = Vec::with_capacity(items.len());
            for (n, item) in items.iter().enumerate() {
                match item {
                    toml::Value::Float(f) => out.push(*f),
                    toml::Value::Integer(i) => out.push(*i as f64),
                    other => {
                        return Err(s.error(
                            &format!("epochs[{n}]"),
                            format!("must be a number, found {}", describe_value(other)),
                        ))
                    }
                }
            }
            out
        }
        (Some(other), false) => {
            return Err(s.error(
                "epochs",
                format!("must be a list of numbers, found {}", describe_value(other)),
            ))
        }
        (None, true) => {
            let first = required(s, "first")?;
            let last = required(s, "last")?;
            let count =
                s.count("count", 1)?
                    .ok_or_else(|| s.error("count", "missing 'count'"))? as usize;
            if count > 1_000_000 {
                return Err(s.error("count", "at most 1000000 epochs"));
            }
            if count > 1 && last <= first {
                return Err(s.error(
                    "last",
                    format!("must be after 'first' ({first}), got {last}"),
                ));
            }
            (0..count)
                .map(|k| {
                    if count == 1 {
                        first
                    } else {
                        first + (last - first) * k as f64 / (count - 1) as f64
                    }
                })
                .collect()
        }
        (None, false) => {
            return Err(s.error(
                "epochs",
                "missing 'epochs' (or 'first', 'last' and 'count')",
            ))
        }
    };
    Ok(values.into_iter().map(|v| scale.to_jd(v)).collect())
}

fn positive(s: &Section<'_>, key: &str, v: f64) -> Result<f64, ModelError> {
    if v > 0.0 {
        Ok(v)
    } else {
        Err(s.error(key, format!("must be positive, got {v}")))
    }
}

fn read_system(s: &Section<'_>) -> Result<TrueSystem, ModelError> {
    s.allow_only(&[
        "name",
        "period_days",
        "period_years",
        "periastron_time_jd",
        "periastron_time_jyear",
        "periastron_time_byear",
        "eccentricity",
        "inclination_deg",
        "periastron_argument_deg",
        "node_deg",
        "mass_primary_msun",
        "mass_secondary_msun",
        "semi_major_axis_mas",
        "semi_major_axis_arcsec",
        "parallax_mas",
        "mass_ratio",
        "systemic_velocity_kms",
    ])?;
    let period_days = match s.one_of("period_days", "period_years")? {
        Some("a") => required(s, "period_days")?,
        Some(_) => required(s, "period_years")? * JULIAN_YEAR_DAYS,
        None => {
            return Err(s.error(
                "period_days",
                "missing the period ('period_days' or 'period_years')",
            ))
        }
    };
    positive(s, "period_days", period_days)?;
    let t_peri_jd = if s.get("periastron_time_jd").is_some() {
        required(s, "periastron_time_jd")?
    } else if s.get("periastron_time_jyear").is_some() {
        TimeScale::JulianYear.to_jd(required(s, "periastron_time_jyear")?)
    } else if s.get("periastron_time_byear").is_some() {
        TimeScale::BesselianYear.to_jd(required(s, "periastron_time_byear")?)
    } else {
        return Err(s.error(
            "periastron_time_jd",
            "missing the time of periastron ('periastron_time_jd', '_jyear' or '_byear')",
        ));
    };
    let e = required(s, "eccentricity")?;
    if !(0.0..1.0).contains(&e) {
        return Err(s.error("eccentricity", format!("must be in [0, 1), got {e}")));
    }
    let inc_deg = required(s, "inclination_deg")?;
    if !(0.0..=180.0).contains(&inc_deg) {
        return Err(s.error(
            "inclination_deg",
            format!("must be in [0, 180], got {inc_deg}"),
        ));
    }
    let omega_deg = required(s, "periastron_argument_deg")?;
    let node_deg = required(s, "node_deg")?;
    let parallax_mas = match s.f64("parallax_mas")? {
        Some(p) => Some(positive(s, "parallax_mas", p)?),
        None => None,
    };
    let masses = (s.f64("mass_primary_msun")?, s.f64("mass_secondary_msun")?);
    let axis = match s.one_of("semi_major_axis_mas", "semi_major_axis_arcsec")? {
        Some("a") => Some(required(s, "semi_major_axis_mas")?),
        Some(_) => Some(required(s, "semi_major_axis_arcsec")? * 1000.0),
        None => None,
    };
    let (a_mas, mass_ratio) = match (masses, axis) {
        ((Some(m1), Some(m2)), None) => {
            let m1 = positive(s, "mass_primary_msun", m1)?;
            if m2 < 0.0 {
                return Err(s.error("mass_secondary_msun", format!("must be >= 0, got {m2}")));
            }
            if s.get("mass_ratio").is_some() {
                return Err(s.error(
                    "mass_ratio",
                    "the masses already fix the mass ratio; remove it",
                ));
            }
            let plx = parallax_mas.ok_or_else(|| {
                s.error(
                    "parallax_mas",
                    "masses need a parallax to give the angular orbit",
                )
            })?;
            (
                laws::semi_major_axis_au(m1 + m2, period_days) * plx,
                Some(m2 / m1),
            )
        }
        ((None, None), Some(a)) => {
            let q = match s.f64("mass_ratio")? {
                Some(q) if q >= 0.0 => Some(q),
                Some(q) => return Err(s.error("mass_ratio", format!("must be >= 0, got {q}"))),
                None => None,
            };
            (positive(s, "semi_major_axis_mas", a)?, q)
        }
        ((Some(_), None), _) | ((None, Some(_)), _) => {
            return Err(s.error(
                "mass_secondary_msun",
                "give both masses ('mass_primary_msun' and 'mass_secondary_msun')",
            ))
        }
        ((Some(_), Some(_)), Some(_)) => {
            return Err(s.error(
                "semi_major_axis_mas",
                "give either the two masses or the semi-major axis, not both",
            ))
        }
        ((None, None), None) => {
            return Err(s.error(
                "mass_primary_msun",
                "give the two masses (and the parallax) or the semi-major axis",
            ))
        }
    };
    Ok(TrueSystem {
        name: s.string("name")?.unwrap_or("unnamed").to_owned(),
        elements: CampbellElements {
            period_days,
            t_peri_jd,
            e,
            a: a_mas,
            inc_rad: inc_deg * DEG,
            omega_rad: omega_deg * DEG,
            node_rad: node_deg * DEG,
        },
        parallax_mas,
        mass_ratio,
        systemic_kms: s.f64("systemic_velocity_kms")?.unwrap_or(0.0),
    })
}

fn read_astrometry(s: &Section<'_>, base: &Path) -> Result<AstrometryPlan, ModelError> {
    s.allow_only(&[
        "file",
        "time_column",
        "form",
        "epochs",
        "first",
        "last",
        "count",
        "separation_error_mas",
        "separation_error_arcsec",
        "position_angle_error_deg",
        "dra_error_mas",
        "ddec_error_mas",
        "corr",
        "sources",
        "outlier_epochs",
        "outlier_sigma",
    ])?;
    let file = base.join(
        s.string("file")?
            .ok_or_else(|| s.error("file", "missing the output file name"))?,
    );
    let scale = time_scale(s, "time_column")?;
    let form =
        match s.string("form")?.unwrap_or("polar") {
            "polar" => {
                let (sep_err, arcsec) =
                    match s.one_of("separation_error_mas", "separation_error_arcsec")? {
                        Some("a") => (required(s, "separation_error_mas")?, false),
                        Some(_) => (required(s, "separation_error_arcsec")?, true),
                        None => return Err(s.error(
                            "separation_error_mas",
                            "missing the separation error ('separation_error_mas' or '_arcsec')",
                        )),
                    };
                Form::Polar {
                    sep_err: positive(s, "separation_error_mas", sep_err)?,
                    pa_err_deg: positive(
                        s,
                        "position_angle_error_deg",
                        required(s, "position_angle_error_deg")?,
                    )?,
                    arcsec,
                }
            }
            "cartesian" => Form::Cartesian {
                dra_err: positive(s, "dra_error_mas", required(s, "dra_error_mas")?)?,
                ddec_err: positive(s, "ddec_error_mas", required(s, "ddec_error_mas")?)?,
            },
            other => {
                return Err(s.error(
                    "form",
                    format!("must be \"polar\" or \"cartesian\", got \"{other}\""),
                ))
            }
        };
    let corr = s.f64("corr")?.unwrap_or(0.0);
    if !(corr > -1.0 && corr < 1.0) {
        return Err(s.error("corr", format!("must be in (-1, 1), got {corr}")));
    }
    let mut sources = Vec::new();
    match s.get("sources") {
        None => {}
        Some(toml::Value::Array(items)) => {
            for (n, item) in items.iter().enumerate() {
                let key = format!("sources[{n}]");
                let toml::Value::Table(t) = item else {
                    return Err(s.error(&key, "must be a table { name = ..., error_factor = ... }"));
                };
                let one = Section {
                    file: s.file,
                    prefix: s.dotted(&key),
                    table: t,
                };
                one.allow_only(&["name", "error_factor"])?;
                let name = one
                    .string("name")?
                    .ok_or_else(|| one.error("name", "missing the source name"))?;
                if name.trim().is_empty() || name.contains([',', '"', '\n']) {
                    return Err(one.error(
                        "name",
                        "must be non-empty, without commas, quotes or line breaks",
                    ));
                }
                let factor = positive(
                    &one,
                    "error_factor",
                    one.f64("error_factor")?.unwrap_or(1.0),
                )?;
                sources.push((name.trim().to_owned(), factor));
            }
        }
        Some(other) => {
            return Err(s.error(
                "sources",
                format!("must be a list of tables, found {}", describe_value(other)),
            ))
        }
    }
    let epochs = epochs(s, scale)?;
    let mut outliers = Vec::new();
    if let Some(v) = s.get("outlier_epochs") {
        let bad = || {
            s.error(
                "outlier_epochs",
                "must be a list of epoch numbers (0-based)",
            )
        };
        let toml::Value::Array(items) = v else {
            return Err(bad());
        };
        for item in items {
            match item.as_integer() {
                Some(k) if k >= 0 && (k as usize) < epochs.len() => outliers.push(k as usize),
                _ => return Err(bad()),
            }
        }
    }
    Ok(AstrometryPlan {
        file,
        scale,
        epochs,
        form,
        corr,
        sources,
        outliers,
        outlier_sigma: s.f64("outlier_sigma")?.unwrap_or(10.0),
    })
}

fn read_velocities(s: &Section<'_>, base: &Path) -> Result<VelocityPlan, ModelError> {
    s.allow_only(&["file", "time_column", "instruments"])?;
    let file = base.join(
        s.string("file")?
            .ok_or_else(|| s.error("file", "missing the output file name"))?,
    );
    let scale = time_scale(s, "time_column")?;
    let Some(toml::Value::Array(items)) = s.get("instruments") else {
        return Err(s.error("instruments", "missing [[velocities.instruments]] tables"));
    };
    let mut instruments = Vec::with_capacity(items.len());
    for (n, item) in items.iter().enumerate() {
        let key = format!("instruments[{n}]");
        let toml::Value::Table(t) = item else {
            return Err(s.error(&key, "must be a table"));
        };
        let one = Section {
            file: s.file,
            prefix: s.dotted(&key),
            table: t,
        };
        one.allow_only(&[
            "name",
            "offset_kms",
            "jitter_kms",
            "error_kms",
            "stars",
            "epochs",
            "first",
            "last",
            "count",
        ])?;
        let name = one
            .string("name")?
            .ok_or_else(|| one.error("name", "missing the instrument name"))?;
        if name.trim().is_empty() || name.contains([',', '"', '\n']) {
            return Err(one.error(
                "name",
                "must be non-empty, without commas, quotes or line breaks",
            ));
        }
        let stars = match one.get("stars") {
            None => vec![Star::Primary],
            Some(toml::Value::Array(list)) => {
                let mut out = Vec::new();
                for v in list {
                    match v.as_str() {
                        Some("primary") => out.push(Star::Primary),
                        Some("secondary") => out.push(Star::Secondary),
                        _ => {
                            return Err(
                                one.error("stars", "must list \"primary\" and/or \"secondary\"")
                            )
                        }
                    }
                }
                out
            }
            Some(_) => {
                return Err(one.error(
                    "stars",
                    "must be a list such as [\"primary\", \"secondary\"]",
                ))
            }
        };
        let jitter_kms = one.f64("jitter_kms")?.unwrap_or(0.0);
        if jitter_kms < 0.0 {
            return Err(one.error("jitter_kms", "must be >= 0"));
        }
        instruments.push(InstrumentPlan {
            name: name.trim().to_owned(),
            offset_kms: one.f64("offset_kms")?.unwrap_or(0.0),
            jitter_kms,
            error_kms: positive(&one, "error_kms", required(&one, "error_kms")?)?,
            stars,
            epochs: epochs(&one, scale)?,
        });
    }
    Ok(VelocityPlan {
        file,
        scale,
        instruments,
    })
}

impl Scenario {
    /// Parses scenario text as if read from `path` (output files are
    /// relative to its folder).
    pub fn from_toml_str(text: &str, path: &Path) -> Result<Self, ModelError> {
        let table = parse_table(text, path)?;
        let base = path.parent().map(Path::to_owned).unwrap_or_default();
        let root = Section {
            file: path,
            prefix: String::new(),
            table: &table,
        };
        root.allow_only(&["seed", "noise", "system", "astrometry", "velocities"])?;
        let system = match root.sub("system")? {
            Some(s) => read_system(&s)?,
            None => return Err(root.error("system", "missing [system] with the true elements")),
        };
        let astrometry = match root.sub("astrometry")? {
            Some(s) => Some(read_astrometry(&s, &base)?),
            None => None,
        };
        let velocities = match root.sub("velocities")? {
            Some(s) => {
                let plan = read_velocities(&s, &base)?;
                if system.parallax_mas.is_none() || system.mass_ratio.is_none() {
                    return Err(root.error(
                        "velocities",
                        "velocities need the parallax and the mass ratio (or the two masses) in [system]",
                    ));
                }
                Some(plan)
            }
            None => None,
        };
        if astrometry.is_none() && velocities.is_none() {
            return Err(root.error(
                "astrometry",
                "nothing to simulate: add [astrometry] and/or [velocities]",
            ));
        }
        let noise = match root.get("noise") {
            None => true,
            Some(toml::Value::Boolean(b)) => *b,
            Some(other) => {
                return Err(root.error(
                    "noise",
                    format!("must be true or false, found {}", describe_value(other)),
                ))
            }
        };
        Ok(Scenario {
            system,
            seed: root.count("seed", 0)?.unwrap_or(1),
            noise,
            astrometry,
            velocities,
        })
    }

    /// Reads a scenario file.
    pub fn load(path: &Path) -> Result<Self, ModelError> {
        let text = std::fs::read_to_string(path).map_err(|source| ModelError::Io {
            path: path.to_owned(),
            source,
        })?;
        Self::from_toml_str(&text, path)
    }

    /// The files this scenario writes.
    pub fn output_files(&self) -> Vec<PathBuf> {
        let mut out = Vec::new();
        if let Some(a) = &self.astrometry {
            out.push(a.file.clone());
        }
        if let Some(v) = &self.velocities {
            if !out.contains(&v.file) {
                out.push(v.file.clone());
            }
        }
        out
    }

    /// The CSV texts to write, in the order of [`Self::output_files`].
    pub fn render(&self) -> Result<Vec<(PathBuf, String)>, ModelError> {
        let orbit = Orbit::new(&self.system.elements)
            .map_err(|e| ModelError::InvalidModel(format!("scenario orbit: {e}")))?;
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(self.seed);
        let mut normal = move || -> f64 {
            let z: f64 = StandardNormal.sample(&mut rng);
            z
        };
        let noise = if self.noise { 1.0 } else { 0.0 };
        let header =
            format!(
            "# Simulated by `dyad simulate` for the invented system \"{}\" ({}). Not real data.\n",
            self.system.name.replace(['\n', '\r'], " "),
            if self.noise { "with noise" } else { "noise-free" }
        );
        let mut out = Vec::new();
        if let Some(plan) = &self.astrometry {
            let mut text = header.clone();
            let tcol = plan.scale.column_name();
            let source_column = if plan.sources.is_empty() {
                ""
            } else {
                ",source"
            };
            match plan.form {
                Form::Polar { arcsec, .. } => {
                    let u = if arcsec { "arcsec" } else { "mas" };
                    let _ = writeln!(
                        text,
                        "{tcol},sep_{u},sep_err_{u},pa_deg,pa_err_deg,corr{source_column}"
                    );
                }
                Form::Cartesian { .. } => {
                    let _ = writeln!(
                        text,
                        "{tcol},dra_mas,ddec_mas,dra_err_mas,ddec_err_mas,corr{source_column}"
                    );
                }
            }
            let c = plan.corr;
            for (n, &t) in plan.epochs.iter().enumerate() {
                let p = orbit.sky_offset(t);
                // Correlated pair: r1 = s1 z1, r2 = s2 (c z1 + sqrt(1 - c^2) z2).
                let (z1, z2) = (normal() * noise, normal() * noise);
                let (mut n1, mut n2) = (z1, c * z1 + (1.0 - c * c).sqrt() * z2);
                // Mis-quoted errors: the noise is error_factor times the quoted error.
                let mut source_cell = String::new();
                if !plan.sources.is_empty() {
                    let (name, factor) = &plan.sources[n % plan.sources.len()];
                    n1 *= factor;
                    n2 *= factor;
                    if plan.outliers.contains(&n) {
                        n1 += plan.outlier_sigma * factor;
                    }
                    source_cell = format!(",{name}");
                } else if plan.outliers.contains(&n) {
                    n1 += plan.outlier_sigma;
                }
                let time = plan.scale.from_jd(t);
                match plan.form {
                    Form::Polar {
                        sep_err,
                        pa_err_deg,
                        arcsec,
                    } => {
                        let unit = if arcsec { 1000.0 } else { 1.0 };
                        let sep = (p.separation() / unit + sep_err * n1).abs();
                        let pa = (p.position_angle_rad() / DEG + pa_err_deg * n2).rem_euclid(360.0);
                        let pa = if pa >= 360.0 { 0.0 } else { pa };
                        let (sd, ed) = if arcsec { (7, 7) } else { (4, 4) };
                        let _ = writeln!(
                            text,
                            "{},{sep:.sd$},{sep_err:.ed$},{pa:.5},{pa_err_deg:.5},{c}{source_cell}",
                            fmt_time(time, plan.scale)
                        );
                    }
                    Form::Cartesian { dra_err, ddec_err } => {
                        let dra = p.dra + dra_err * n1;
                        let ddec = p.ddec + ddec_err * n2;
                        let _ = writeln!(
                            text,
                            "{},{dra:.4},{ddec:.4},{dra_err:.4},{ddec_err:.4},{c}{source_cell}",
                            fmt_time(time, plan.scale)
                        );
                    }
                }
            }
            out.push((plan.file.clone(), text));
        }
        if let Some(plan) = &self.velocities {
            let sys = &self.system;
            let el = &sys.elements;
            // Checked when parsing: velocities need both.
            let (a_au, q) = match (sys.semi_major_axis_au(), sys.mass_ratio) {
                (Some(a), Some(q)) => (a, q),
                _ => {
                    return Err(ModelError::InvalidModel(
                        "velocities need the parallax and mass ratio".into(),
                    ))
                }
            };
            let k = laws::relative_semi_amplitude_kms(a_au, el.period_days, el.e, el.inc_rad);
            let mut rows: Vec<(f64, String)> = Vec::new();
            for inst in &plan.instruments {
                for &t in &inst.epochs {
                    let v_rel = k * orbit.rv_shape(t);
                    let gamma = sys.systemic_kms + inst.offset_kms;
                    for &star in &inst.stars {
                        let v = match star {
                            Star::Primary => velocity::primary_velocity(gamma, q, v_rel),
                            Star::Secondary => velocity::secondary_velocity(gamma, q, v_rel),
                        };
                        let sigma = (inst.error_kms.powi(2) + inst.jitter_kms.powi(2)).sqrt();
                        let v = v + sigma * normal() * noise;
                        let star_name = match star {
                            Star::Primary => "primary",
                            Star::Secondary => "secondary",
                        };
                        rows.push((
                            t,
                            format!(
                                "{},{v:.4},{:.4},{star_name},{}",
                                fmt_time(plan.scale.from_jd(t), plan.scale),
                                inst.error_kms,
                                inst.name
                            ),
                        ));
                    }
                }
            }
            // Chronological order, stable for equal times.
            rows.sort_by(|a, b| a.0.total_cmp(&b.0));
            let mut text = String::new();
            let existing = out.iter().position(|(f, _)| *f == plan.file);
            if existing.is_some() {
                return Err(ModelError::InvalidModel(
                    "astrometry and velocities must go to different files".into(),
                ));
            }
            text.push_str(&header);
            let _ = writeln!(
                text,
                "{},rv_kms,rv_err_kms,star,instrument",
                plan.scale.column_name()
            );
            for (_, row) in rows {
                text.push_str(&row);
                text.push('\n');
            }
            out.push((plan.file.clone(), text));
        }
        Ok(out)
    }
}

fn fmt_time(value: f64, scale: TimeScale) -> String {
    match scale {
        TimeScale::Jd | TimeScale::Mjd => format!("{value:.5}"),
        TimeScale::JulianYear | TimeScale::BesselianYear => format!("{value:.6}"),
    }
}

/// Writes `text` to `path` atomically (never half-written).
fn write_atomic(path: &Path, text: &str) -> Result<(), ModelError> {
    let io = |path: &Path, source| ModelError::Io {
        path: path.to_owned(),
        source,
    };
    dyad_common::atomic::write_atomically(
        path,
        |w| w.write_all(text.as_bytes()).map_err(|e| io(path, e)),
        io,
    )
}

/// Runs a scenario file: simulates and writes its CSV files. Refuses (before
/// writing anything) if an output exists and `overwrite` is false. Returns
/// the files written.
pub fn run_scenario_file(path: &Path, overwrite: bool) -> Result<Vec<PathBuf>, ModelError> {
    let scenario = Scenario::load(path)?;
    let files = scenario.render()?;
    if !overwrite {
        for (file, _) in &files {
            if file.exists() {
                return Err(ModelError::at(
                    file,
                    None,
                    None,
                    "exists already; not overwritten (ask for --overwrite to replace it)",
                ));
            }
        }
    }
    let mut written = Vec::with_capacity(files.len());
    for (file, text) in &files {
        write_atomic(file, text)?;
        written.push(file.clone());
    }
    Ok(written)
}
