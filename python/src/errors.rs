//! The library's typed errors as Python exceptions: bad input (a value,
//! column, settings key or configuration) is a `ValueError` naming where it
//! is; a file that cannot be read or written is an `OSError`; anything
//! else is a `dyad.DyadError`.

use std::path::Path;

use dyad_fit::columns::ColumnError;
use dyad_fit::FitError;
use dyad_model::error::{Location, ModelError};
use pyo3::exceptions::{PyOSError, PyValueError};
use pyo3::{create_exception, PyErr};

create_exception!(
    _native,
    DyadError,
    pyo3::exceptions::PyRuntimeError,
    "A dyad workflow failed for a reason other than bad input (the sampler, an evidence estimate, a report)."
);

/// The label of settings given as a Python dict, in place of a file name.
pub(crate) const SETTINGS: &str = "settings";

/// `settings['priors']['period_days']` for the dotted key `priors.period_days`.
fn settings_place(key: &str) -> String {
    let mut place = SETTINGS.to_owned();
    for part in key.split('.') {
        place.push_str(&format!("['{part}']"));
    }
    place
}

/// The message of a model error, with a settings key written the Python way
/// (its line and column refer to text the binding made, so they are left out).
fn model_message(error: &ModelError) -> String {
    match error {
        ModelError::Input {
            location:
                Location {
                    file,
                    column: Some(key),
                    ..
                },
            message,
        } if file == Path::new(SETTINGS) => format!("{}: {message}", settings_place(key)),
        ModelError::Input {
            location: Location { file, .. },
            message,
        } if file == Path::new(SETTINGS) => format!("{SETTINGS}: {message}"),
        other => other.to_string(),
    }
}

/// The whole chain of a workflow error: what was being done, down to the cause.
fn describe(error: &FitError) -> String {
    match error {
        FitError::Context { context, source } => format!("{context}: {}", describe(source)),
        FitError::Model(e) => model_message(e),
        other => other.to_string(),
    }
}

/// A model error as a Python exception.
pub(crate) fn model_error(error: ModelError) -> PyErr {
    match &error {
        ModelError::Io { .. } => PyOSError::new_err(error.to_string()),
        _ => PyValueError::new_err(model_message(&error)),
    }
}

/// A workflow error as a Python exception.
pub(crate) fn fit_error(error: FitError) -> PyErr {
    let text = describe(&error);
    match error.root() {
        FitError::Model(ModelError::Io { .. }) | FitError::Io(_) => PyOSError::new_err(text),
        FitError::Model(_) | FitError::Invalid(_) | FitError::Toml(_) => {
            PyValueError::new_err(text)
        }
        _ => DyadError::new_err(text),
    }
}

/// A bad column or value as a `ValueError` naming the argument, column and index.
pub(crate) fn column_error(error: ColumnError) -> PyErr {
    PyValueError::new_err(error.to_string())
}

/// A `ValueError` about `place` (an argument, maybe with an index).
pub(crate) fn bad(place: impl std::fmt::Display, message: impl std::fmt::Display) -> PyErr {
    PyValueError::new_err(format!("{place}: {message}"))
}
