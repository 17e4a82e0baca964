//! `dyad simulate SCENARIO.toml`: invented measurements of a binary with
//! known elements, written in the input format of docs/DESIGN.md (and read back
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

use std::path::{Path, PathBuf};

use rand::SeedableRng;
use rand_distr::{Distribution, StandardNormal};
use rand_xoshiro::Xoshiro256PlusPlus;

use dyad_common::csv_table::CsvText;
use dyad_orbit::constants::DEG;
use dyad_orbit::{laws, velocity, CampbellElements, Orbit, TimeScale};

use crate::data::Star;
use crate::error::ModelError;

mod scenario_file;

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

impl Scenario {
    /// Parses scenario text as if read from `path` (output files are
    /// relative to its folder).
    pub fn from_toml_str(text: &str, path: &Path) -> Result<Self, ModelError> {
        scenario_file::parse(text, path)
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
            let mut table = CsvText::with_preamble(&header);
            let tcol = plan.scale.column_name();
            let mut columns: Vec<String> = match plan.form {
                Form::Polar { arcsec, .. } => {
                    let u = if arcsec { "arcsec" } else { "mas" };
                    vec![
                        tcol.into(),
                        format!("sep_{u}"),
                        format!("sep_err_{u}"),
                        "pa_deg".into(),
                        "pa_err_deg".into(),
                        "corr".into(),
                    ]
                }
                Form::Cartesian { .. } => [
                    tcol,
                    "dra_mas",
                    "ddec_mas",
                    "dra_err_mas",
                    "ddec_err_mas",
                    "corr",
                ]
                .map(String::from)
                .to_vec(),
            };
            if !plan.sources.is_empty() {
                columns.push("source".into());
            }
            table.record(&columns).map_err(csv_error)?;
            let c = plan.corr;
            for (n, &t) in plan.epochs.iter().enumerate() {
                let p = orbit.sky_offset(t);
                // Correlated pair: r1 = s1 z1, r2 = s2 (c z1 + sqrt(1 - c^2) z2).
                let (z1, z2) = (normal() * noise, normal() * noise);
                let (mut n1, mut n2) = (z1, c * z1 + (1.0 - c * c).sqrt() * z2);
                // Mis-quoted errors: the noise is error_factor times the quoted error.
                let mut source_cell = None;
                if !plan.sources.is_empty() {
                    let (name, factor) = &plan.sources[n % plan.sources.len()];
                    n1 *= factor;
                    n2 *= factor;
                    if plan.outliers.contains(&n) {
                        n1 += plan.outlier_sigma * factor;
                    }
                    source_cell = Some(name.as_str());
                } else if plan.outliers.contains(&n) {
                    n1 += plan.outlier_sigma;
                }
                let time = fmt_time(plan.scale.from_jd(t), plan.scale);
                let mut row = match plan.form {
                    Form::Polar {
                        sep_err,
                        pa_err_deg,
                        arcsec,
                    } => {
                        let unit = if arcsec { 1000.0 } else { 1.0 };
                        let sep = (p.separation() / unit + sep_err * n1).abs();
                        let pa = (p.position_angle_rad() / DEG + pa_err_deg * n2).rem_euclid(360.0);
                        let pa = if pa >= 360.0 { 0.0 } else { pa };
                        let d = if arcsec { 7 } else { 4 };
                        vec![
                            time,
                            format!("{sep:.d$}"),
                            format!("{sep_err:.d$}"),
                            format!("{pa:.5}"),
                            format!("{pa_err_deg:.5}"),
                            format!("{c}"),
                        ]
                    }
                    Form::Cartesian { dra_err, ddec_err } => {
                        let dra = p.dra + dra_err * n1;
                        let ddec = p.ddec + ddec_err * n2;
                        vec![
                            time,
                            format!("{dra:.4}"),
                            format!("{ddec:.4}"),
                            format!("{dra_err:.4}"),
                            format!("{ddec_err:.4}"),
                            format!("{c}"),
                        ]
                    }
                };
                row.extend(source_cell.map(str::to_owned));
                table.record(&row).map_err(csv_error)?;
            }
            out.push((plan.file.clone(), table.finish().map_err(csv_error)?));
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
            let mut rows: Vec<(f64, [String; 5])> = Vec::new();
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
                            [
                                fmt_time(plan.scale.from_jd(t), plan.scale),
                                format!("{v:.4}"),
                                format!("{:.4}", inst.error_kms),
                                star_name.to_owned(),
                                inst.name.clone(),
                            ],
                        ));
                    }
                }
            }
            // Chronological order, stable for equal times.
            rows.sort_by(|a, b| a.0.total_cmp(&b.0));
            let existing = out.iter().position(|(f, _)| *f == plan.file);
            if existing.is_some() {
                return Err(ModelError::InvalidModel(
                    "astrometry and velocities must go to different files".into(),
                ));
            }
            let mut table = CsvText::with_preamble(&header);
            table
                .record([
                    plan.scale.column_name(),
                    "rv_kms",
                    "rv_err_kms",
                    "star",
                    "instrument",
                ])
                .map_err(csv_error)?;
            for (_, row) in &rows {
                table.record(row).map_err(csv_error)?;
            }
            out.push((plan.file.clone(), table.finish().map_err(csv_error)?));
        }
        Ok(out)
    }
}

/// A table assembled in memory cannot fail but for records of unequal
/// length, a defect of this file.
fn csv_error(e: csv::Error) -> ModelError {
    ModelError::InvalidModel(format!("assembling a simulated table: {e}"))
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
