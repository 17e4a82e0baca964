//! The workflows for Python: fitting a configuration file or arrays,
//! resuming, reporting a run folder, comparing period windows and
//! predicting. Each returns plain Python values (dicts, lists, NumPy
//! arrays, and JSON text for nested records); the `dyad` package wraps
//! them in its result classes.

use std::path::{Path, PathBuf};

use dyad_fit::columns::dataset_from_columns;
use dyad_fit::periods::{PeriodComparison, PeriodOptions};
use dyad_fit::predict::{PredictOptions, Prediction};
use dyad_fit::{FitRequest, FitResult, FitRun, PosteriorReport, RunConfig};
use numpy::{PyArray1, PyArrayMethods};
use pyo3::exceptions::PyKeyboardInterrupt;
use pyo3::prelude::*;
use pyo3::types::PyDict;
use serde_json::json;

use crate::convert::{numbers, settings_text, table};
use crate::errors::{column_error, fit_error, model_error, DyadError, SETTINGS};
use crate::runner;

/// JSON text of a serialisable record.
fn json_text(value: &impl serde::Serialize) -> PyResult<String> {
    serde_json::to_string(value).map_err(|e| DyadError::new_err(e.to_string()))
}

/// The posterior as Python values: the draws as a 2-D array (draw, column)
/// with the column names and units, their log-posterior, the period mode
/// of every draw, and the summary and modes as JSON.
fn posterior_dict<'py>(py: Python<'py>, p: &PosteriorReport) -> PyResult<Bound<'py, PyDict>> {
    let d = PyDict::new(py);
    let table = &p.draws.table;
    let names: Vec<&str> = table.params.iter().map(|i| i.name.as_str()).collect();
    let units: Vec<&str> = table.params.iter().map(|i| i.unit.as_str()).collect();
    let columns = names.len();
    let rows = table.values.len().checked_div(columns).unwrap_or(0);
    let values = PyArray1::from_slice(py, &table.values).reshape([rows, columns])?;
    d.set_item("names", names)?;
    d.set_item("units", units)?;
    d.set_item("values", values)?;
    d.set_item(
        "log_posterior",
        PyArray1::from_slice(py, &table.log_posterior),
    )?;
    let labels: Vec<u64> = p.modes.labels.iter().map(|&l| l as u64).collect();
    d.set_item("mode_labels", PyArray1::from_vec(py, labels))?;
    d.set_item("walkers", p.draws.walkers)?;
    d.set_item("summary_json", json_text(&p.summary)?)?;
    d.set_item("modes_json", json_text(&p.modes.modes)?)?;
    d.set_item("text", &p.text)?;
    Ok(d)
}

/// A fit's result as Python values.
fn result_dict<'py>(py: Python<'py>, r: &FitResult) -> PyResult<Bound<'py, PyDict>> {
    let d = PyDict::new(py);
    let o = &r.outcome;
    d.set_item("status", &o.status)?;
    d.set_item("steps", o.steps)?;
    d.set_item("burn_in", o.burn_in)?;
    d.set_item("cancelled", r.was_cancelled())?;
    d.set_item("warnings", o.warnings.clone())?;
    d.set_item("diagnostics_json", json_text(&o.diagnostics)?)?;
    d.set_item("evidence_json", json_text(&r.evidence)?)?;
    d.set_item("inverse_temperatures", o.inverse_temperatures.clone())?;
    d.set_item("swap_acceptance_rate", o.swap_acceptance_rate.clone())?;
    d.set_item("folder", r.folder.as_ref().map(|f| f.display().to_string()))?;
    match &r.posterior {
        Some(p) => d.set_item("posterior", posterior_dict(py, p)?)?,
        None => d.set_item("posterior", py.None())?,
    }
    Ok(d)
}

/// A `KeyboardInterrupt` of a run into `folder` carries the folder (as
/// `run_folder`), for the package to say where the checkpoint is.
fn with_run_folder(py: Python<'_>, error: PyErr, folder: &Path) -> PyErr {
    if error.is_instance_of::<PyKeyboardInterrupt>(py) {
        // Setting an attribute of an exception object does not fail.
        let _ = error
            .value(py)
            .setattr("run_folder", folder.display().to_string());
    }
    error
}

/// Fits the configuration file `config` (into `folder` instead of its
/// `[output] folder` when given).
#[pyfunction]
#[pyo3(signature = (config, folder=None, overwrite=false, reporter=None))]
pub(crate) fn fit_file<'py>(
    py: Python<'py>,
    config: PathBuf,
    folder: Option<PathBuf>,
    overwrite: bool,
    reporter: Option<Bound<'py, PyAny>>,
) -> PyResult<Bound<'py, PyDict>> {
    let request = FitRequest::from_file(&config).map_err(fit_error)?;
    let folder = folder.unwrap_or_else(|| request.config.output.folder.clone());
    let request = request.into_folder(&folder, overwrite);
    let result = runner::run(py, reporter.as_ref(), move |observer, cancel| {
        request.prepare()?.run(observer, cancel)
    })
    .map_err(|e| with_run_folder(py, e, &folder))?;
    result_dict(py, &result)
}

/// Fits measurements given as tables of columns under `settings` (the
/// tables of a configuration file, without data files). In memory.
#[pyfunction]
#[pyo3(signature = (astrometry, velocities, settings, reporter=None))]
pub(crate) fn fit_arrays<'py>(
    py: Python<'py>,
    astrometry: Option<Bound<'py, PyAny>>,
    velocities: Option<Bound<'py, PyAny>>,
    settings: Bound<'py, PyDict>,
    reporter: Option<Bound<'py, PyAny>>,
) -> PyResult<Bound<'py, PyDict>> {
    let astrometry = astrometry.map(|t| table("astrometry", &t)).transpose()?;
    let velocities = velocities.map(|t| table("velocities", &t)).transpose()?;
    let dataset =
        dataset_from_columns(astrometry.as_deref(), velocities.as_deref()).map_err(column_error)?;
    let text = settings_text(&settings)?;
    let config =
        RunConfig::for_arrays_from_toml_str(&text, Path::new(SETTINGS)).map_err(model_error)?;
    let result = runner::run(py, reporter.as_ref(), move |observer, cancel| {
        FitRequest::from_arrays(config, dataset)
            .prepare()?
            .run(observer, cancel)
    })?;
    result_dict(py, &result)
}

/// Continues the stopped run in `folder` from its checkpoint.
#[pyfunction]
#[pyo3(signature = (folder, max_steps=None, reporter=None))]
pub(crate) fn resume<'py>(
    py: Python<'py>,
    folder: PathBuf,
    max_steps: Option<u64>,
    reporter: Option<Bound<'py, PyAny>>,
) -> PyResult<Bound<'py, PyDict>> {
    let run_folder = folder.clone();
    let result = runner::run(py, reporter.as_ref(), move |observer, cancel| {
        FitRun::resume(&folder, max_steps)?.run(observer, cancel)
    })
    .map_err(|e| with_run_folder(py, e, &run_folder))?;
    result_dict(py, &result)
}

/// Redraws the report of the finished run in `folder` and returns its posterior.
#[pyfunction]
pub(crate) fn report(py: Python<'_>, folder: PathBuf) -> PyResult<Bound<'_, PyDict>> {
    let posterior = runner::run(py, None, move |_, _| dyad_fit::posterior::report(&folder))?;
    posterior_dict(py, &posterior)
}

/// Compares the period windows of the configuration file `config` by evidence.
#[pyfunction]
#[pyo3(signature = (config, output=None, overwrite=false, reporter=None))]
pub(crate) fn compare_periods(
    py: Python<'_>,
    config: PathBuf,
    output: Option<PathBuf>,
    overwrite: bool,
    reporter: Option<Bound<'_, PyAny>>,
) -> PyResult<String> {
    let comparison = runner::run(py, reporter.as_ref(), move |observer, cancel| {
        let options = PeriodOptions { output, overwrite };
        dyad_fit::periods::compare(&config, &options, observer, cancel)
    })?;
    comparison_json(&comparison)
}

fn comparison_json(c: &PeriodComparison) -> PyResult<String> {
    let windows: Vec<_> = c
        .windows
        .iter()
        .map(|w| {
            json!({
                "lo_days": w.lo_days,
                "hi_days": w.hi_days,
                "prior_mass": w.prior_mass,
                "evidence": w.evidence,
                "stepping_stone": w.stepping_stone,
                "thermodynamic_integration": w.thermodynamic_integration,
                "masses": w.masses.iter().map(|m| json!({
                    "name": m.name, "median": m.median,
                    "q68": [m.lo68, m.hi68], "q95": [m.lo95, m.hi95],
                })).collect::<Vec<_>>(),
            })
        })
        .collect();
    json_text(&json!({
        "folder": c.folder.display().to_string(),
        "windows": windows,
        "table": c.table,
    }))
}

/// Predictive bands at `epochs` (in the time scale `scale`) from the
/// finished run in `folder`, written into a new `prediction-N` folder.
#[pyfunction]
#[pyo3(signature = (folder, epochs, scale="jd"))]
pub(crate) fn predict(
    py: Python<'_>,
    folder: PathBuf,
    epochs: Bound<'_, PyAny>,
    scale: &str,
) -> PyResult<String> {
    let epochs = numbers("epochs", &epochs)?.as_slice()?.to_vec();
    if let Some(k) = epochs.iter().position(|e| !e.is_finite()) {
        return Err(crate::errors::bad(
            format!("epochs[{k}]"),
            format!("{} is not a finite number", epochs[k]),
        ));
    }
    let options = PredictOptions {
        epochs,
        from: None,
        to: None,
        step: None,
        scale: scale.to_owned(),
    };
    let prediction = runner::run(py, None, move |_, _| {
        dyad_fit::predict::predict(&folder, &options)
    })?;
    prediction_json(&prediction)
}

fn prediction_json(p: &Prediction) -> PyResult<String> {
    let columns: Vec<&str> = p.quantities.iter().map(|q| q.column()).collect();
    let bands: Vec<Vec<Vec<_>>> = p
        .per_mode
        .iter()
        .map(|epochs| {
            epochs
                .iter()
                .map(|e| {
                    e.bands
                        .iter()
                        .map(|b| json!([b.median, b.q68, b.q90, b.q95]))
                        .collect()
                })
                .collect()
        })
        .collect();
    json_text(&json!({
        "folder": p.folder.display().to_string(),
        "epochs_jd": p.epochs_jd,
        "quantities": columns,
        "modes": p.modes,
        "bands": bands,
        "text": p.text,
    }))
}
