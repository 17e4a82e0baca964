//! Python values into the library's inputs, every refusal a `ValueError`
//! naming the argument (and index): NumPy arrays or sequences into columns
//! of numbers or texts, a settings dict into configuration text.

use dyad_fit::columns::Column;
use numpy::{
    PyArray1, PyArrayDescrMethods, PyArrayMethods, PyReadonlyArray1, PyUntypedArray,
    PyUntypedArrayMethods,
};
use pyo3::prelude::*;
use pyo3::types::{PyBool, PyDict, PyFloat, PyInt, PyList, PyString, PyTuple};

use crate::errors::bad;

/// What kind of values a NumPy dtype holds.
enum Kind {
    /// Integers or floating-point numbers (read as f64).
    Real,
    /// Unicode or byte strings.
    Text,
    /// Python objects (looked at one by one).
    Object,
}

/// The kind of `array`'s dtype, or the refusal naming `place`.
fn kind_of(place: &str, array: &Bound<'_, PyUntypedArray>) -> PyResult<Kind> {
    let dtype = array.dtype();
    match dtype.kind() {
        b'f' | b'i' | b'u' => Ok(Kind::Real),
        b'U' | b'S' => Ok(Kind::Text),
        b'O' => Ok(Kind::Object),
        _ => Err(bad(
            place,
            format!(
                "values of dtype {} are not accepted; give real numbers (or text for text columns)",
                dtype.str()?
            ),
        )),
    }
}

/// `value` as a one-dimensional NumPy array (`numpy.asarray`, no casting).
fn as_array<'py>(place: &str, value: &Bound<'py, PyAny>) -> PyResult<Bound<'py, PyUntypedArray>> {
    let py = value.py();
    let array = py
        .import("numpy")?
        .call_method1("asarray", (value,))
        .map_err(|e| bad(place, format!("not an array of values ({e})")))?;
    let array = array
        .cast_into::<PyUntypedArray>()
        .map_err(|_| bad(place, "not an array of values"))?;
    if array.ndim() != 1 {
        return Err(bad(
            place,
            format!(
                "expected a one-dimensional array, got {} dimensions",
                array.ndim()
            ),
        ));
    }
    Ok(array)
}

/// A contiguous float64 copy or view of an array of real numbers.
fn as_f64<'py>(
    place: &str,
    array: Bound<'py, PyUntypedArray>,
) -> PyResult<PyReadonlyArray1<'py, f64>> {
    let py = array.py();
    let converted = py
        .import("numpy")?
        .call_method1("ascontiguousarray", (array, "float64"))
        .map_err(|e| bad(place, format!("cannot be read as float64 ({e})")))?;
    converted
        .extract::<PyReadonlyArray1<'py, f64>>()
        .map_err(|e| bad(place, format!("cannot be read as float64 ({e})")))
}

/// Real numbers for the kinematics: one number, or a float64 view of an array.
pub(crate) enum Numbers<'py> {
    /// A Python number (or NumPy scalar).
    One(f64),
    /// A one-dimensional float64 array.
    Many(PyReadonlyArray1<'py, f64>),
}

impl Numbers<'_> {
    /// The values.
    pub(crate) fn as_slice(&self) -> PyResult<&[f64]> {
        match self {
            Numbers::One(x) => Ok(std::slice::from_ref(x)),
            Numbers::Many(a) => Ok(a.as_slice()?),
        }
    }
}

/// Real numbers for the kinematics from a number or an array of numbers.
/// A float or an int, and a contiguous float64 array, are taken as they
/// are (no Python call: the kinematics are meant for many small calls
/// too); anything else goes through `numpy.asarray` and its dtype is
/// checked.
pub(crate) fn numbers<'py>(place: &str, value: &Bound<'py, PyAny>) -> PyResult<Numbers<'py>> {
    if value.is_instance_of::<PyFloat>()
        || (value.is_instance_of::<PyInt>() && !value.is_instance_of::<PyBool>())
    {
        if let Ok(x) = value.extract::<f64>() {
            return Ok(Numbers::One(x));
        }
    }
    if let Ok(array) = value.cast::<PyArray1<f64>>() {
        if let Ok(view) = array.try_readonly() {
            if view.as_slice().is_ok() {
                return Ok(Numbers::Many(view));
            }
        }
    }
    let py = value.py();
    let array = py
        .import("numpy")?
        .call_method1("atleast_1d", (value,))
        .map_err(|e| bad(place, format!("not an array of numbers ({e})")))?;
    let array = as_array(place, &array)?;
    match kind_of(place, &array)? {
        Kind::Real => Ok(Numbers::Many(as_f64(place, array)?)),
        Kind::Text | Kind::Object => Err(bad(
            place,
            format!("values of dtype {} are not numbers", array.dtype().str()?),
        )),
    }
}

/// One column of a measurement table: numbers, or texts for the text
/// columns (`star`, `instrument`, `source`); a missing text (None, NaN) is
/// an empty one.
pub(crate) fn column(argument: &str, name: &str, value: &Bound<'_, PyAny>) -> PyResult<Column> {
    let place = format!("{argument}['{name}']");
    let array = as_array(&place, value)?;
    match kind_of(&place, &array)? {
        Kind::Real => Ok(Column::Numbers(as_f64(&place, array)?.as_slice()?.to_vec())),
        Kind::Text => {
            let list = array.call_method0("tolist")?;
            Ok(Column::Texts(list.extract::<Vec<String>>().map_err(
                |_| bad(&place, "text values that are not valid Unicode"),
            )?))
        }
        Kind::Object => {
            let list = array.call_method0("tolist")?.cast_into::<PyList>()?;
            let mut texts = Vec::with_capacity(list.len());
            let mut all_numbers = true;
            let mut numbers = Vec::with_capacity(list.len());
            for (index, item) in list.iter().enumerate() {
                if item.is_none() {
                    texts.push(String::new());
                    all_numbers = false;
                } else if let Ok(s) = item.cast::<PyString>() {
                    texts.push(s.extract::<String>()?);
                    all_numbers = false;
                } else if let (Ok(x), false) =
                    (item.extract::<f64>(), item.is_instance_of::<PyBool>())
                {
                    // A missing text in a data frame is NaN.
                    texts.push(if x.is_nan() {
                        String::new()
                    } else {
                        x.to_string()
                    });
                    numbers.push(x);
                } else {
                    return Err(bad(
                        format!("{place}[{index}]"),
                        format!(
                            "a value of type {} is neither a number nor text",
                            item.get_type().name()?
                        ),
                    ));
                }
            }
            Ok(if all_numbers {
                Column::Numbers(numbers)
            } else {
                Column::Texts(texts)
            })
        }
    }
}

/// The columns of a measurement table given as a mapping of column names
/// to arrays (a dict, or a data frame turned into one), in its order.
pub(crate) fn table(argument: &str, value: &Bound<'_, PyAny>) -> PyResult<Vec<(String, Column)>> {
    let dict = value.cast::<PyDict>().map_err(|_| {
        bad(
            argument,
            "expected a mapping of column names to arrays (a dict or a pandas DataFrame)",
        )
    })?;
    let mut columns = Vec::with_capacity(dict.len());
    for (key, values) in dict.iter() {
        let Ok(name) = key.cast::<PyString>() else {
            return Err(bad(argument, format!("the column name {key} is not text")));
        };
        let name = name.extract::<String>()?;
        let column = column(argument, &name, &values)?;
        columns.push((name, column));
    }
    Ok(columns)
}

/// A settings value as TOML, refusals naming its place (`settings['sampler']['seed']`).
fn toml_value(place: &str, value: &Bound<'_, PyAny>) -> PyResult<toml::Value> {
    if value.is_instance_of::<PyBool>() {
        return Ok(toml::Value::Boolean(value.extract()?));
    }
    if value.is_instance_of::<PyInt>()
        || value.hasattr("__index__")? && !value.is_instance_of::<PyFloat>()
    {
        if let Ok(i) = value.extract::<i64>() {
            return Ok(toml::Value::Integer(i));
        }
        return Err(bad(place, format!("the integer {value} is too large")));
    }
    if let Ok(s) = value.cast::<PyString>() {
        return Ok(toml::Value::String(s.extract::<String>()?));
    }
    if let Ok(dict) = value.cast::<PyDict>() {
        let mut table = toml::Table::new();
        for (key, item) in dict.iter() {
            let Ok(key) = key.cast::<PyString>() else {
                return Err(bad(place, format!("the key {key} is not text")));
            };
            let key = key.extract::<String>()?;
            let inner = format!("{place}['{key}']");
            table.insert(key, toml_value(&inner, &item)?);
        }
        return Ok(toml::Value::Table(table));
    }
    if value.is_instance_of::<PyList>() || value.is_instance_of::<PyTuple>() {
        let items: Vec<Bound<'_, PyAny>> = value.try_iter()?.collect::<PyResult<_>>()?;
        let mut array = Vec::with_capacity(items.len());
        for (index, item) in items.iter().enumerate() {
            array.push(toml_value(&format!("{place}[{index}]"), item)?);
        }
        return Ok(toml::Value::Array(array));
    }
    if value.is_none() {
        return Err(bad(place, "None is not a setting; leave the key out"));
    }
    match value.extract::<f64>() {
        Ok(x) => Ok(toml::Value::Float(x)),
        Err(_) => Err(bad(
            place,
            format!(
                "a value of type {} is not a setting (numbers, text, lists and dicts are)",
                value.get_type().name()?
            ),
        )),
    }
}

/// The settings dict (the tables of a configuration file: `priors`,
/// `sampler`, ...) as configuration text.
pub(crate) fn settings_text(settings: &Bound<'_, PyDict>) -> PyResult<String> {
    let table = toml_value(crate::errors::SETTINGS, settings.as_any())?;
    toml::to_string(&table).map_err(|e| bad(crate::errors::SETTINGS, e))
}
