//! Plain input types. The binary converts its own model types into these,
//! so this crate does not depend on how the model is parameterised.

use crate::error::ReportError;
use serde::Serialize;

/// How a parameter's draws are summarised.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum ParameterKind {
    /// An ordinary real number.
    Linear,
    /// An angle that wraps with the given period (in the parameter's own
    /// unit, usually degrees: 360 for omega, 180 for a node known only
    /// modulo 180).
    Angle {
        /// The wrapping period.
        period_deg: f64,
    },
}

/// Name, unit and plot label of one parameter.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ParameterInfo {
    /// Machine name, e.g. `"m1"`, `"period"`, `"omega_secondary"`.
    pub name: String,
    /// Unit as written in reports, e.g. `"Msun"`, `"d"`, `"deg"`, `"km/s"`;
    /// empty for dimensionless numbers.
    pub unit: String,
    /// Label for plots and tables, e.g. `"M₁"`.
    pub label: String,
    /// Linear or angle.
    #[serde(flatten)]
    pub kind: ParameterKind,
}

impl ParameterInfo {
    /// A linear parameter.
    pub fn linear(name: &str, unit: &str, label: &str) -> Self {
        ParameterInfo {
            name: name.to_string(),
            unit: unit.to_string(),
            label: label.to_string(),
            kind: ParameterKind::Linear,
        }
    }

    /// An angle wrapping with `period_deg`.
    pub fn angle(name: &str, unit: &str, label: &str, period_deg: f64) -> Self {
        ParameterInfo {
            name: name.to_string(),
            unit: unit.to_string(),
            label: label.to_string(),
            kind: ParameterKind::Angle { period_deg },
        }
    }

    /// The CSV column name: the name, followed by `_unit` unless the name
    /// already says its unit (`period_days` with unit `d` stays
    /// `period_days`; `k1` with unit `km/s` becomes `k1_km_s`), so each unit
    /// is written once. Every character other than ASCII letters, digits and
    /// `_` becomes `_`; dimensionless units (empty or `1`) add nothing.
    pub fn column_name(&self) -> String {
        let name = sanitised(&self.name);
        let unit = self.unit.trim();
        if unit.is_empty() || unit == "1" || names_unit(&name, unit) {
            return name;
        }
        sanitised(&format!("{name}_{unit}"))
    }

    /// Axis text: `label [unit]`, or just the label for dimensionless numbers.
    pub fn axis_label(&self) -> String {
        if self.unit.trim().is_empty() {
            self.label.clone()
        } else {
            format!("{} [{}]", self.label, self.unit)
        }
    }
}

/// `text` with every run of characters other than ASCII letters, digits and
/// `_` replaced by one `_`, and no trailing `_`.
fn sanitised(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        if c.is_ascii_alphanumeric() || c == '_' {
            out.push(c);
        } else if !out.ends_with('_') {
            out.push('_');
        }
    }
    out.trim_end_matches('_').to_string()
}

/// Whether one of the `_`-separated words of a column name already spells
/// `unit` (a log unit `ln(u)` counts as `u`): the model's names carry their
/// units in the words we use for them, e.g. `days` and `jd` for `d`, `msun`
/// for `M☉`, `kms` for `km/s`.
fn names_unit(name: &str, unit: &str) -> bool {
    let unit = unit
        .strip_prefix("ln(")
        .and_then(|u| u.strip_suffix(')'))
        .unwrap_or(unit);
    let spellings: &[&str] = match unit {
        "d" | "JD" => &["d", "days", "jd"],
        "yr" => &["yr", "years", "jyear", "byear"],
        "M☉" | "M_sun" | "Msun" => &["msun"],
        "km/s" => &["kms"],
        "m/s" => &["ms"],
        _ => &[],
    };
    let own = sanitised(unit).to_ascii_lowercase();
    name.split('_').any(|word| {
        let word = word.to_ascii_lowercase();
        word == own || spellings.contains(&word.as_str())
    })
}

/// Posterior draws of all parameters, stored draw-major:
/// `values[draw * params.len() + p]`.
#[derive(Debug, Clone)]
pub struct PosteriorDraws {
    /// The parameters, in column order.
    pub params: Vec<ParameterInfo>,
    /// Draw-major values.
    pub values: Vec<f64>,
    /// Log-posterior of each draw (any additive constant).
    pub log_posterior: Vec<f64>,
}

impl PosteriorDraws {
    /// Checks the lengths agree and returns the draws.
    pub fn new(
        params: Vec<ParameterInfo>,
        values: Vec<f64>,
        log_posterior: Vec<f64>,
    ) -> Result<Self, ReportError> {
        let draws = PosteriorDraws {
            params,
            values,
            log_posterior,
        };
        draws.validate()?;
        Ok(draws)
    }

    /// Checks the lengths agree and the angle periods are positive.
    pub fn validate(&self) -> Result<(), ReportError> {
        let n_params = self.params.len();
        if n_params == 0 {
            return Err(ReportError::InvalidInput("no parameters".into()));
        }
        if self.values.len() != n_params * self.log_posterior.len() {
            return Err(ReportError::InvalidInput(format!(
                "{} values do not make {} draws of {} parameters",
                self.values.len(),
                self.log_posterior.len(),
                n_params
            )));
        }
        if self.log_posterior.is_empty() {
            return Err(ReportError::InvalidInput("no draws".into()));
        }
        for p in &self.params {
            if let ParameterKind::Angle { period_deg } = p.kind {
                if !(period_deg.is_finite() && period_deg > 0.0) {
                    return Err(ReportError::InvalidInput(format!(
                        "angle {} has period {period_deg}",
                        p.name
                    )));
                }
            }
        }
        Ok(())
    }

    /// Number of draws.
    pub fn n_draws(&self) -> usize {
        self.log_posterior.len()
    }

    /// Number of parameters.
    pub fn n_params(&self) -> usize {
        self.params.len()
    }

    /// The values of parameter `p` across draws (copied into a new vector).
    pub fn column(&self, p: usize) -> Vec<f64> {
        let n = self.n_params();
        self.values.iter().skip(p).step_by(n).copied().collect()
    }

    /// Index of the parameter called `name`.
    pub fn index_of(&self, name: &str) -> Option<usize> {
        self.params.iter().position(|p| p.name == name)
    }
}

/// Free-form run metadata shown at the top of every summary.
#[derive(Debug, Clone, Default, Serialize)]
pub struct RunMetadata {
    /// Title line, e.g. the system's name.
    pub title: String,
    /// Ordered `(key, value)` lines: data files, priors, error model,
    /// parallax used, seed, convergence notes, ...
    pub entries: Vec<(String, String)>,
}
