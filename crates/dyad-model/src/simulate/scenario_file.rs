//! Reading a scenario file: serde-derived raw tables (unknown keys refused),
//! then checked into a [`Scenario`] in internal units. Every error names
//! the dotted key and, where the value is in the file, its line and column.

use std::ops::Range;
use std::path::Path;

use serde::Deserialize;

use dyad_orbit::constants::{DEG, JULIAN_YEAR_DAYS};
use dyad_orbit::{laws, CampbellElements, TimeScale};

use super::{AstrometryPlan, Form, InstrumentPlan, Scenario, TrueSystem, VelocityPlan};
use crate::data::Star;
use crate::error::ModelError;
use crate::toml_input::{join_key, span, value, Field, Number, Source, Whole};

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawScenario {
    seed: Field<Whole<0>>,
    noise: Field<bool>,
    system: Option<RawSystem>,
    astrometry: Option<RawAstrometry>,
    velocities: Option<RawVelocities>,
}

/// `[system]`: the true elements.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSystem {
    name: Field<String>,
    period_days: Field<Number>,
    period_years: Field<Number>,
    periastron_time_jd: Field<Number>,
    periastron_time_jyear: Field<Number>,
    periastron_time_byear: Field<Number>,
    eccentricity: Field<Number>,
    inclination_deg: Field<Number>,
    periastron_argument_deg: Field<Number>,
    node_deg: Field<Number>,
    mass_primary_msun: Field<Number>,
    mass_secondary_msun: Field<Number>,
    semi_major_axis_mas: Field<Number>,
    semi_major_axis_arcsec: Field<Number>,
    parallax_mas: Field<Number>,
    mass_ratio: Field<Number>,
    systemic_velocity_kms: Field<Number>,
}

/// `[astrometry] form`.
#[derive(Debug, Clone, Copy, PartialEq, Deserialize)]
#[serde(rename_all = "snake_case")]
enum FormName {
    Polar,
    Cartesian,
}

/// `[astrometry]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawAstrometry {
    file: Field<String>,
    time_column: Field<String>,
    form: Field<FormName>,
    epochs: Field<Vec<Number>>,
    first: Field<Number>,
    last: Field<Number>,
    count: Field<Whole<1>>,
    separation_error_mas: Field<Number>,
    separation_error_arcsec: Field<Number>,
    position_angle_error_deg: Field<Number>,
    dra_error_mas: Field<Number>,
    ddec_error_mas: Field<Number>,
    corr: Field<Number>,
    sources: Option<Vec<RawSource>>,
    outlier_epochs: Field<Vec<Whole<0>>>,
    outlier_sigma: Field<Number>,
}

/// `[[astrometry.sources]]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSource {
    name: Field<String>,
    error_factor: Field<Number>,
}

/// `[velocities]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawVelocities {
    file: Field<String>,
    time_column: Field<String>,
    instruments: Option<Vec<RawInstrument>>,
}

/// `stars = ["primary", "secondary"]`.
#[derive(Debug, Clone, Copy, PartialEq, Deserialize)]
#[serde(rename_all = "snake_case")]
enum StarName {
    Primary,
    Secondary,
}

/// `[[velocities.instruments]]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawInstrument {
    name: Field<String>,
    offset_kms: Field<Number>,
    jitter_kms: Field<Number>,
    error_kms: Field<Number>,
    stars: Field<Vec<StarName>>,
    epochs: Field<Vec<Number>>,
    first: Field<Number>,
    last: Field<Number>,
    count: Field<Whole<1>>,
}

/// The epochs of a table: `epochs = [...]` or `first`, `last`, `count`.
struct EpochKeys<'a> {
    epochs: &'a Field<Vec<Number>>,
    first: &'a Field<Number>,
    last: &'a Field<Number>,
    count: &'a Field<Whole<1>>,
}

/// A table of the scenario being checked.
struct Table<'a> {
    src: Source<'a>,
    name: String,
}

impl Table<'_> {
    fn error<T>(&self, key: &str, field: &Field<T>, message: impl Into<String>) -> ModelError {
        self.at(key, span(field), message)
    }

    fn at(&self, key: &str, span: Option<Range<usize>>, message: impl Into<String>) -> ModelError {
        self.src.error(&join_key(&self.name, key), span, message)
    }

    fn required(&self, key: &str, field: &Field<Number>) -> Result<f64, ModelError> {
        number(field).ok_or_else(|| self.error(key, field, format!("missing '{key}'")))
    }

    fn positive(&self, key: &str, field: &Field<Number>, v: f64) -> Result<f64, ModelError> {
        if v > 0.0 {
            Ok(v)
        } else {
            Err(self.error(key, field, format!("must be positive, got {v}")))
        }
    }

    fn required_positive(&self, key: &str, field: &Field<Number>) -> Result<f64, ModelError> {
        let v = self.required(key, field)?;
        self.positive(key, field, v)
    }

    /// Refuses both of two alternative keys.
    fn either(
        &self,
        (a, first): (&str, &Field<Number>),
        (b, second): (&str, &Field<Number>),
    ) -> Result<(), ModelError> {
        if first.is_some() && second.is_some() {
            return Err(self.error(b, second, format!("give either '{a}' or '{b}', not both")));
        }
        Ok(())
    }

    fn time_scale(&self, field: &Field<String>) -> Result<TimeScale, ModelError> {
        match value(field) {
            None => Ok(TimeScale::Jd),
            Some(name) => TimeScale::from_column_name(&name).ok_or_else(|| {
                self.error(
                    "time_column",
                    field,
                    format!("unknown time scale '{name}'; use jd, mjd, jyear or byear"),
                )
            }),
        }
    }

    fn output_file(
        &self,
        field: &Field<String>,
        base: &Path,
    ) -> Result<std::path::PathBuf, ModelError> {
        let name =
            value(field).ok_or_else(|| self.at("file", None, "missing the output file name"))?;
        Ok(base.join(name))
    }

    /// A source or instrument name that can be written to a CSV cell as it is.
    fn label(&self, field: &Field<String>, what: &str) -> Result<String, ModelError> {
        let name = value(field)
            .ok_or_else(|| self.at("name", None, format!("missing the {what} name")))?;
        if name.trim().is_empty() || name.contains([',', '"', '\n']) {
            return Err(self.error(
                "name",
                field,
                "must be non-empty, without commas, quotes or line breaks",
            ));
        }
        Ok(name.trim().to_owned())
    }

    /// Epochs as JD, evenly spaced (inclusive) when given by `first`,
    /// `last` and `count`, in the table's time scale.
    fn epochs(&self, keys: EpochKeys<'_>, scale: TimeScale) -> Result<Vec<f64>, ModelError> {
        let regular = keys.first.is_some() || keys.last.is_some() || keys.count.is_some();
        let values: Vec<f64> = match (keys.epochs, regular) {
            (Some(_), true) => {
                return Err(self.error(
                    "epochs",
                    keys.epochs,
                    "give either 'epochs' or 'first', 'last' and 'count', not both",
                ))
            }
            (Some(list), false) => list.get_ref().iter().map(|n| n.0).collect(),
            (None, true) => {
                let first = self.required("first", keys.first)?;
                let last = self.required("last", keys.last)?;
                let count = value(keys.count)
                    .ok_or_else(|| self.at("count", None, "missing 'count'"))?
                    .0;
                if count > 1_000_000 {
                    return Err(self.error("count", keys.count, "at most 1000000 epochs"));
                }
                let count = count as usize;
                if count > 1 && last <= first {
                    return Err(self.error(
                        "last",
                        keys.last,
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
                return Err(self.at(
                    "epochs",
                    None,
                    "missing 'epochs' (or 'first', 'last' and 'count')",
                ))
            }
        };
        Ok(values.into_iter().map(|v| scale.to_jd(v)).collect())
    }
}

fn number(field: &Field<Number>) -> Option<f64> {
    value(field).map(|Number(v)| v)
}

/// Parses and checks scenario text read from `path`.
pub(super) fn parse(text: &str, path: &Path) -> Result<Scenario, ModelError> {
    let src = Source { file: path, text };
    let raw: RawScenario = src.parse()?;
    let base = path.parent().map(Path::to_owned).unwrap_or_default();
    let table = |name: &str| Table {
        src,
        name: name.to_owned(),
    };
    let root = table("");
    let system = match &raw.system {
        Some(s) => read_system(&table("system"), s)?,
        None => return Err(root.at("system", None, "missing [system] with the true elements")),
    };
    let astrometry = match &raw.astrometry {
        Some(a) => Some(read_astrometry(&table("astrometry"), a, &base)?),
        None => None,
    };
    let velocities = match &raw.velocities {
        Some(v) => {
            let plan = read_velocities(&table("velocities"), v, &base)?;
            if system.parallax_mas.is_none() || system.mass_ratio.is_none() {
                return Err(root.at(
                    "velocities",
                    None,
                    "velocities need the parallax and the mass ratio (or the two masses) in [system]",
                ));
            }
            Some(plan)
        }
        None => None,
    };
    if astrometry.is_none() && velocities.is_none() {
        return Err(root.at(
            "astrometry",
            None,
            "nothing to simulate: add [astrometry] and/or [velocities]",
        ));
    }
    Ok(Scenario {
        system,
        seed: value(&raw.seed).map_or(1, |s| s.0),
        noise: value(&raw.noise).unwrap_or(true),
        astrometry,
        velocities,
    })
}

fn read_system(t: &Table<'_>, raw: &RawSystem) -> Result<TrueSystem, ModelError> {
    t.either(
        ("period_days", &raw.period_days),
        ("period_years", &raw.period_years),
    )?;
    let period_days = match (number(&raw.period_days), number(&raw.period_years)) {
        (Some(days), _) => days,
        (None, Some(years)) => years * JULIAN_YEAR_DAYS,
        (None, None) => {
            return Err(t.at(
                "period_days",
                None,
                "missing the period ('period_days' or 'period_years')",
            ))
        }
    };
    let period_field = if raw.period_days.is_some() {
        &raw.period_days
    } else {
        &raw.period_years
    };
    t.positive("period_days", period_field, period_days)?;
    let t_peri_jd = if let Some(jd) = number(&raw.periastron_time_jd) {
        jd
    } else if let Some(year) = number(&raw.periastron_time_jyear) {
        TimeScale::JulianYear.to_jd(year)
    } else if let Some(year) = number(&raw.periastron_time_byear) {
        TimeScale::BesselianYear.to_jd(year)
    } else {
        return Err(t.at(
            "periastron_time_jd",
            None,
            "missing the time of periastron ('periastron_time_jd', '_jyear' or '_byear')",
        ));
    };
    let e = t.required("eccentricity", &raw.eccentricity)?;
    if !(0.0..1.0).contains(&e) {
        return Err(t.error(
            "eccentricity",
            &raw.eccentricity,
            format!("must be in [0, 1), got {e}"),
        ));
    }
    let inc_deg = t.required("inclination_deg", &raw.inclination_deg)?;
    if !(0.0..=180.0).contains(&inc_deg) {
        return Err(t.error(
            "inclination_deg",
            &raw.inclination_deg,
            format!("must be in [0, 180], got {inc_deg}"),
        ));
    }
    let omega_deg = t.required("periastron_argument_deg", &raw.periastron_argument_deg)?;
    let node_deg = t.required("node_deg", &raw.node_deg)?;
    let parallax_mas = match number(&raw.parallax_mas) {
        Some(p) => Some(t.positive("parallax_mas", &raw.parallax_mas, p)?),
        None => None,
    };
    t.either(
        ("semi_major_axis_mas", &raw.semi_major_axis_mas),
        ("semi_major_axis_arcsec", &raw.semi_major_axis_arcsec),
    )?;
    let axis = match (
        number(&raw.semi_major_axis_mas),
        number(&raw.semi_major_axis_arcsec),
    ) {
        (Some(mas), _) => Some((mas, &raw.semi_major_axis_mas)),
        (None, Some(arcsec)) => Some((arcsec * 1000.0, &raw.semi_major_axis_arcsec)),
        (None, None) => None,
    };
    let masses = (
        number(&raw.mass_primary_msun),
        number(&raw.mass_secondary_msun),
    );
    let (a_mas, mass_ratio) = match (masses, axis) {
        ((Some(m1), Some(m2)), None) => {
            let m1 = t.positive("mass_primary_msun", &raw.mass_primary_msun, m1)?;
            if m2 < 0.0 {
                return Err(t.error(
                    "mass_secondary_msun",
                    &raw.mass_secondary_msun,
                    format!("must be >= 0, got {m2}"),
                ));
            }
            if raw.mass_ratio.is_some() {
                return Err(t.error(
                    "mass_ratio",
                    &raw.mass_ratio,
                    "the masses already fix the mass ratio; remove it",
                ));
            }
            let plx = parallax_mas.ok_or_else(|| {
                t.at(
                    "parallax_mas",
                    None,
                    "masses need a parallax to give the angular orbit",
                )
            })?;
            (
                laws::semi_major_axis_au(m1 + m2, period_days) * plx,
                Some(m2 / m1),
            )
        }
        ((None, None), Some((a, field))) => {
            let q = match number(&raw.mass_ratio) {
                Some(q) if q >= 0.0 => Some(q),
                Some(q) => {
                    return Err(t.error(
                        "mass_ratio",
                        &raw.mass_ratio,
                        format!("must be >= 0, got {q}"),
                    ))
                }
                None => None,
            };
            (t.positive("semi_major_axis_mas", field, a)?, q)
        }
        ((Some(_), None), _) | ((None, Some(_)), _) => {
            return Err(t.at(
                "mass_secondary_msun",
                None,
                "give both masses ('mass_primary_msun' and 'mass_secondary_msun')",
            ))
        }
        ((Some(_), Some(_)), Some((_, field))) => {
            return Err(t.error(
                "semi_major_axis_mas",
                field,
                "give either the two masses or the semi-major axis, not both",
            ))
        }
        ((None, None), None) => {
            return Err(t.at(
                "mass_primary_msun",
                None,
                "give the two masses (and the parallax) or the semi-major axis",
            ))
        }
    };
    Ok(TrueSystem {
        name: value(&raw.name).unwrap_or_else(|| "unnamed".to_owned()),
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
        systemic_kms: number(&raw.systemic_velocity_kms).unwrap_or(0.0),
    })
}

fn read_astrometry(
    t: &Table<'_>,
    raw: &RawAstrometry,
    base: &Path,
) -> Result<AstrometryPlan, ModelError> {
    let file = t.output_file(&raw.file, base)?;
    let scale = t.time_scale(&raw.time_column)?;
    let form = match value(&raw.form).unwrap_or(FormName::Polar) {
        FormName::Polar => {
            t.either(
                ("separation_error_mas", &raw.separation_error_mas),
                ("separation_error_arcsec", &raw.separation_error_arcsec),
            )?;
            let (sep_err, arcsec, field) = match (
                number(&raw.separation_error_mas),
                number(&raw.separation_error_arcsec),
            ) {
                (Some(v), _) => (v, false, &raw.separation_error_mas),
                (None, Some(v)) => (v, true, &raw.separation_error_arcsec),
                (None, None) => {
                    return Err(t.at(
                        "separation_error_mas",
                        None,
                        "missing the separation error ('separation_error_mas' or '_arcsec')",
                    ))
                }
            };
            Form::Polar {
                sep_err: t.positive("separation_error_mas", field, sep_err)?,
                pa_err_deg: t
                    .required_positive("position_angle_error_deg", &raw.position_angle_error_deg)?,
                arcsec,
            }
        }
        FormName::Cartesian => Form::Cartesian {
            dra_err: t.required_positive("dra_error_mas", &raw.dra_error_mas)?,
            ddec_err: t.required_positive("ddec_error_mas", &raw.ddec_error_mas)?,
        },
    };
    let corr = number(&raw.corr).unwrap_or(0.0);
    if !(corr > -1.0 && corr < 1.0) {
        return Err(t.error("corr", &raw.corr, format!("must be in (-1, 1), got {corr}")));
    }
    let mut sources = Vec::new();
    for (n, one) in raw.sources.iter().flatten().enumerate() {
        let source = Table {
            src: t.src,
            name: join_key(&t.name, &format!("sources[{n}]")),
        };
        let name = source.label(&one.name, "source")?;
        let factor = number(&one.error_factor).unwrap_or(1.0);
        let factor = source.positive("error_factor", &one.error_factor, factor)?;
        sources.push((name, factor));
    }
    let epochs = t.epochs(
        EpochKeys {
            epochs: &raw.epochs,
            first: &raw.first,
            last: &raw.last,
            count: &raw.count,
        },
        scale,
    )?;
    let mut outliers = Vec::new();
    if let Some(list) = &raw.outlier_epochs {
        for Whole(k) in list.get_ref() {
            match usize::try_from(*k) {
                Ok(k) if k < epochs.len() => outliers.push(k),
                _ => {
                    return Err(t.at(
                        "outlier_epochs",
                        Some(list.span()),
                        format!(
                            "must be a list of epoch numbers (0-based, below {}), got {k}",
                            epochs.len()
                        ),
                    ))
                }
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
        outlier_sigma: number(&raw.outlier_sigma).unwrap_or(10.0),
    })
}

fn read_velocities(
    t: &Table<'_>,
    raw: &RawVelocities,
    base: &Path,
) -> Result<VelocityPlan, ModelError> {
    let file = t.output_file(&raw.file, base)?;
    let scale = t.time_scale(&raw.time_column)?;
    let Some(list) = &raw.instruments else {
        return Err(t.at(
            "instruments",
            None,
            "missing [[velocities.instruments]] tables",
        ));
    };
    let mut instruments = Vec::with_capacity(list.len());
    for (n, one) in list.iter().enumerate() {
        let inst = Table {
            src: t.src,
            name: join_key(&t.name, &format!("instruments[{n}]")),
        };
        let name = inst.label(&one.name, "instrument")?;
        let stars = match &one.stars {
            None => vec![Star::Primary],
            Some(list) => list
                .get_ref()
                .iter()
                .map(|s| match s {
                    StarName::Primary => Star::Primary,
                    StarName::Secondary => Star::Secondary,
                })
                .collect(),
        };
        let jitter_kms = number(&one.jitter_kms).unwrap_or(0.0);
        if jitter_kms < 0.0 {
            return Err(inst.error("jitter_kms", &one.jitter_kms, "must be >= 0"));
        }
        instruments.push(InstrumentPlan {
            name,
            offset_kms: number(&one.offset_kms).unwrap_or(0.0),
            jitter_kms,
            error_kms: inst.required_positive("error_kms", &one.error_kms)?,
            stars,
            epochs: inst.epochs(
                EpochKeys {
                    epochs: &one.epochs,
                    first: &one.first,
                    last: &one.last,
                    count: &one.count,
                },
                scale,
            )?,
        });
    }
    Ok(VelocityPlan {
        file,
        scale,
        instruments,
    })
}
