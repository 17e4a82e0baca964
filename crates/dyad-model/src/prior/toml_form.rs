//! The TOML form of a prior: a bare number (fixed) or an inline table with
//! a `shape` key.

use std::path::Path;

use super::Prior;
use crate::error::ModelError;

impl Prior {
    /// Parses the TOML form, naming the file and dotted key in errors.
    ///
    /// Accepted: a bare number (a fixed value), or a table whose `shape` is one of
    /// `uniform {min, max}`, `log_uniform {min, max}`, `normal {mean, sd}`,
    /// `truncated_normal {mean, sd, min, max}`, `log_normal {mu, sigma}` (of ln x),
    /// `beta {alpha, beta}`, `fixed {value}`. Unknown shapes, unknown or missing
    /// fields and non-numeric values are errors at `key.field`.
    pub fn from_toml(value: &toml::Value, file: &Path, key: &str) -> Result<Prior, ModelError> {
        let at = |sub: Option<&str>, message: String| {
            let dotted = match sub {
                Some(field) => format!("{key}.{field}"),
                None => key.to_owned(),
            };
            ModelError::at(file, None, Some(&dotted), message)
        };
        let located = |result: Result<Prior, ModelError>| {
            result.map_err(|error| match error {
                ModelError::InvalidPrior(message) => at(None, message),
                other => other,
            })
        };
        let table = match value {
            toml::Value::Integer(i) => return located(Prior::fixed(*i as f64)),
            toml::Value::Float(f) => return located(Prior::fixed(*f)),
            toml::Value::Table(table) => table,
            other => {
                return Err(at(
                    None,
                    format!(
                        "a prior is a number (a fixed value) or a table such as \
                         {{ shape = \"uniform\", min = 0.0, max = 1.0 }}; found a {}",
                        other.type_str()
                    ),
                ))
            }
        };
        const SHAPES: &str =
            "uniform, log_uniform, normal, truncated_normal, log_normal, beta, fixed";
        let shape_name = match table.get("shape") {
            Some(toml::Value::String(s)) => s.as_str(),
            Some(other) => {
                return Err(at(
                    Some("shape"),
                    format!(
                        "shape must be a string (one of {SHAPES}), found a {}",
                        other.type_str()
                    ),
                ))
            }
            None => {
                return Err(at(
                    Some("shape"),
                    format!("missing 'shape'; give one of {SHAPES}"),
                ))
            }
        };
        let fields: &[&str] = match shape_name {
            "uniform" | "log_uniform" => &["min", "max"],
            "normal" => &["mean", "sd"],
            "truncated_normal" => &["mean", "sd", "min", "max"],
            "log_normal" => &["mu", "sigma"],
            "beta" => &["alpha", "beta"],
            "fixed" => &["value"],
            other => {
                return Err(at(
                    Some("shape"),
                    format!("unknown shape '{other}'; accepted: {SHAPES}"),
                ))
            }
        };
        // Reject typos before looking for the fields, so `sdev` is reported as unknown.
        for name in table.keys() {
            if name != "shape" && !fields.contains(&name.as_str()) {
                return Err(at(
                    Some(name),
                    format!(
                        "unknown field '{name}' for a {shape_name} prior; expected {}",
                        fields.join(", ")
                    ),
                ));
            }
        }
        let mut numbers = [0.0_f64; 4];
        for (slot, name) in numbers.iter_mut().zip(fields) {
            *slot = match table.get(*name) {
                Some(toml::Value::Float(f)) => *f,
                Some(toml::Value::Integer(i)) => *i as f64,
                Some(other) => {
                    return Err(at(
                        Some(name),
                        format!("'{name}' must be a number, found a {}", other.type_str()),
                    ))
                }
                None => {
                    return Err(at(
                        Some(name),
                        format!(
                            "missing '{name}'; a {shape_name} prior needs {}",
                            fields.join(", ")
                        ),
                    ))
                }
            };
        }
        let [a, b, c, d] = numbers;
        located(match shape_name {
            "uniform" => Prior::uniform(a, b),
            "log_uniform" => Prior::log_uniform(a, b),
            "normal" => Prior::normal(a, b),
            "truncated_normal" => Prior::truncated_normal(a, b, c, d),
            "log_normal" => Prior::log_normal(a, b),
            "beta" => Prior::beta(a, b),
            _ => Prior::fixed(a),
        })
    }
}
