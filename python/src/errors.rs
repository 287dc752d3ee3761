//! The library's errors as Python exceptions: bad input becomes `InputError` (re-raised as
//! `copyloop.NetworkError` by the Python layer), bad options `ValueError`, unreadable files
//! `OSError`, failures of copyloop itself `RuntimeError`.

use copyloop::Error;
use pyo3::exceptions::{PyOSError, PyRuntimeError, PyValueError};
use pyo3::PyErr;

pyo3::create_exception!(
    _native,
    InputError,
    pyo3::exceptions::PyException,
    "Bad network input: args are (message as the CLI prints it, file, line, column, first message)."
);

/// The Python exception for a library error.
pub fn to_py(e: Error) -> PyErr {
    let text = e.to_string();
    match &e {
        Error::Input(diags) => {
            let first = diags.first();
            let file = first.map(|d| d.file.clone()).unwrap_or_default();
            let line = first.map_or(0, |d| d.span.line);
            let col = first.map_or(0, |d| d.span.col);
            let short = first.map(|d| d.message.clone()).unwrap_or_default();
            InputError::new_err((text, file, line, col, short))
        }
        Error::Usage(_) | Error::Invalid { .. } => {
            PyValueError::new_err(text.trim_start_matches("error: ").to_string())
        }
        Error::Io { .. } => PyOSError::new_err(text.trim_start_matches("error: ").to_string()),
        Error::Internal(_) => PyRuntimeError::new_err(text),
        Error::Interrupted => pyo3::exceptions::PyKeyboardInterrupt::new_err(text),
    }
}
