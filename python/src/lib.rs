//! The native module of the `dyad` Python package (`dyad._native`): fits,
//! resumes, reports, period comparisons and predictions through the
//! workflow library `dyad-fit`, and vectorised kinematics through
//! `dyad-orbit`. The package's Python code (python/dyad) wraps these
//! functions in its documented interface; nothing here is meant to be
//! called directly.
//!
//! Bad input is a `ValueError` naming the argument and index
//! ([`errors`]); workflows run with the GIL released and stop cleanly on
//! Ctrl-C ([`runner`]).

use pyo3::prelude::*;

mod convert;
mod errors;
mod fitting;
mod kinematics;
mod runner;

#[pymodule]
fn _native(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add("DyadError", m.py().get_type::<errors::DyadError>())?;
    m.add_function(wrap_pyfunction!(fitting::fit_file, m)?)?;
    m.add_function(wrap_pyfunction!(fitting::fit_arrays, m)?)?;
    m.add_function(wrap_pyfunction!(fitting::resume, m)?)?;
    m.add_function(wrap_pyfunction!(fitting::report, m)?)?;
    m.add_function(wrap_pyfunction!(fitting::compare_periods, m)?)?;
    m.add_function(wrap_pyfunction!(fitting::predict, m)?)?;
    m.add_function(wrap_pyfunction!(kinematics::positions, m)?)?;
    m.add_function(wrap_pyfunction!(kinematics::velocities, m)?)?;
    m.add("__version__", env!("CARGO_PKG_VERSION"))?;
    Ok(())
}
