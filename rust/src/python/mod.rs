//! The Python extension `chirpsift._core`: argument conversion, GIL release, error
//! mapping. Every computation lives in the core; validation with user-facing
//! messages happens in the numpy API first, and the core re-checks its invariants
//! and returns errors, which become `ValueError` through `From<Error> for PyErr`.

mod filter;
mod fused;
mod overlap;
mod spectrum;
mod timing;
mod waveform;

use crate::{threads, Error};
use numpy::ndarray::Array2;
use numpy::{IntoPyArray, PyArray2};
use pyo3::exceptions::{PyRuntimeError, PyValueError};
use pyo3::prelude::*;
use pyo3::types::PyDict;
use std::panic::{catch_unwind, AssertUnwindSafe};

impl From<Error> for PyErr {
    fn from(e: Error) -> PyErr {
        PyValueError::new_err(e.to_string())
    }
}

/// Run `f` without the GIL inside the chirpsift thread pool; a core error becomes
/// `ValueError`, a panic becomes `RuntimeError` instead of unwinding into Python.
pub(crate) fn run<T: Send>(
    py: Python<'_>,
    f: impl FnOnce() -> crate::Result<T> + Send,
) -> PyResult<T> {
    let outcome = py.detach(|| catch_unwind(AssertUnwindSafe(|| threads::install(f))));
    match outcome {
        Ok(result) => Ok(result?),
        Err(payload) => {
            let msg = payload
                .downcast_ref::<String>()
                .cloned()
                .or_else(|| payload.downcast_ref::<&str>().map(|s| s.to_string()))
                .unwrap_or_else(|| "unknown panic".into());
            Err(PyRuntimeError::new_err(format!(
                "internal error in the chirpsift core (please report): {msg}"
            )))
        }
    }
}

/// A row-major `(rows, cols)` buffer as a numpy array, without copying.
pub(crate) fn to_2d<T: numpy::Element>(
    py: Python<'_>,
    rows: usize,
    cols: usize,
    v: Vec<T>,
) -> PyResult<Bound<'_, PyArray2<T>>> {
    let a = Array2::from_shape_vec((rows, cols), v)
        .map_err(|e| PyRuntimeError::new_err(e.to_string()))?;
    Ok(a.into_pyarray(py))
}

#[pyfunction]
fn set_threads(n: usize) -> PyResult<()> {
    Ok(threads::set_threads(n)?)
}

#[pyfunction]
fn get_threads() -> usize {
    threads::get_threads()
}

/// How this extension was built.
fn build_info(py: Python<'_>) -> PyResult<Bound<'_, PyDict>> {
    let d = PyDict::new(py);
    d.set_item("version", env!("CARGO_PKG_VERSION"))?;
    d.set_item(
        "profile",
        if cfg!(debug_assertions) {
            "debug"
        } else {
            "release"
        },
    )?;
    d.set_item("target_arch", std::env::consts::ARCH)?;
    d.set_item("target_os", std::env::consts::OS)?;
    d.set_item("max_threads", threads::MAX_THREADS)?;
    Ok(d)
}

#[pymodule]
fn _core(m: &Bound<'_, PyModule>) -> PyResult<()> {
    let py = m.py();
    m.add("__version__", env!("CARGO_PKG_VERSION"))?;
    m.add("build_info", build_info(py)?)?;
    m.add("MAX_THREADS", threads::MAX_THREADS)?;
    m.add_function(wrap_pyfunction!(set_threads, m)?)?;
    m.add_function(wrap_pyfunction!(get_threads, m)?)?;
    spectrum::register(m)?;
    waveform::register(m)?;
    filter::register(m)?;
    fused::register(m)?;
    overlap::register(m)?;
    timing::register(m)?;
    Ok(())
}
