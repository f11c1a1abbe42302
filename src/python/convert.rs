//! Between Python and the library: errors to exceptions, words in, JSON
//! values out.

use pyo3::exceptions::{PyException, PyFileNotFoundError, PyOSError, PyTypeError, PyValueError};
use pyo3::prelude::*;
use pyo3::types::{PyDict, PyList, PyString};
use serde_json::Value;

use crate::error::Error;

pyo3::create_exception!(
    quern,
    QuernError,
    PyException,
    "An error of quern's library that is neither a missing file (FileNotFoundError), another I/O error (OSError) nor an invalid setting (ValueError): a damaged or unfinished store or model, a store of another format version, a hash collision. The message is the command line's."
);

/// The exception for a library error, with the command line's message:
/// an I/O error is `FileNotFoundError` (file not found) or `OSError`, an
/// invalid setting `ValueError`, anything else [`QuernError`].
pub fn error(e: Error) -> PyErr {
    let msg = e.to_string();
    match &e {
        Error::Io { source, .. } if source.kind() == std::io::ErrorKind::NotFound => {
            PyFileNotFoundError::new_err(msg)
        }
        Error::Io { .. } => PyOSError::new_err(msg),
        Error::Config(_) => PyValueError::new_err(msg),
        _ => QuernError::new_err(msg),
    }
}

/// Words given as one string (split at whitespace, as on the command
/// line) or as an iterable of strings (joined by spaces, as the command
/// line joins its arguments): the text to tokenize.
pub fn words_text(what: &str, obj: &Bound<'_, PyAny>) -> PyResult<String> {
    if let Ok(s) = obj.cast::<PyString>() {
        return Ok(s.to_str()?.to_owned());
    }
    let Ok(iter) = obj.try_iter() else {
        return Err(PyTypeError::new_err(format!(
            "{what}: expected a string or an iterable of strings, not {}",
            obj.get_type().name()?
        )));
    };
    let mut out = String::new();
    for (i, item) in iter.enumerate() {
        let item = item?;
        let Ok(s) = item.cast::<PyString>() else {
            return Err(PyTypeError::new_err(format!(
                "{what}: item {i} is {}, not a string",
                item.get_type().name()?
            )));
        };
        if i > 0 {
            out.push(' ');
        }
        out.push_str(s.to_str()?);
    }
    Ok(out)
}

/// A JSON value as a Python object: `null` → `None`, numbers → `int` or
/// `float`, arrays → `list`, objects → `dict` (keys in order).
pub fn json_to_py(py: Python<'_>, v: &Value) -> PyResult<Py<PyAny>> {
    Ok(match v {
        Value::Null => py.None(),
        Value::Bool(b) => b.into_pyobject(py)?.to_owned().into_any().unbind(),
        Value::Number(n) => {
            if let Some(u) = n.as_u64() {
                u.into_pyobject(py)?.into_any().unbind()
            } else if let Some(i) = n.as_i64() {
                i.into_pyobject(py)?.into_any().unbind()
            } else {
                n.as_f64()
                    .unwrap_or(f64::NAN)
                    .into_pyobject(py)?
                    .into_any()
                    .unbind()
            }
        }
        Value::String(s) => PyString::new(py, s).into_any().unbind(),
        Value::Array(a) => {
            let l = PyList::empty(py);
            for x in a {
                l.append(json_to_py(py, x)?)?;
            }
            l.into_any().unbind()
        }
        Value::Object(o) => {
            let d = PyDict::new(py);
            for (k, x) in o {
                d.set_item(k, json_to_py(py, x)?)?;
            }
            d.into_any().unbind()
        }
    })
}

/// Any serializable record as a Python object, through JSON.
pub fn to_py(py: Python<'_>, v: &impl serde::Serialize) -> PyResult<Py<PyAny>> {
    let v = serde_json::to_value(v).map_err(|e| PyValueError::new_err(e.to_string()))?;
    json_to_py(py, &v)
}
