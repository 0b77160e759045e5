//! Bindings of `crate::filter` and `crate::grid`: template norms, SNR series,
//! cross-correlation, and the band rule.

use super::{run, to_2d};
use crate::filter::{self, Mode};
use crate::grid;
use num_complex::{Complex32, Complex64};
use numpy::{IntoPyArray, PyArray1, PyArray2, PyReadonlyArray1, PyReadonlyArray2, PyUntypedArrayMethods};
use pyo3::exceptions::PyValueError;
use pyo3::prelude::*;

/// Dispatch over complex64 / complex128 template arrays.
macro_rules! with_templates {
    ($templates:expr, |$h:ident, $rows:ident, $cols:ident| $body:expr) => {{
        if let Ok(a) = $templates.extract::<PyReadonlyArray2<Complex32>>() {
            let ($rows, $cols) = (a.shape()[0], a.shape()[1]);
            let $h = a.as_slice()?;
            $body
        } else {
            let a = $templates.extract::<PyReadonlyArray2<Complex64>>()?;
            let ($rows, $cols) = (a.shape()[0], a.shape()[1]);
            let $h = a.as_slice()?;
            $body
        }
    }};
}

/// `(k_lo, k_hi)`: the bins `f_low <= k df < f_high` of `n_freq` (the one band rule).
#[pyfunction]
#[pyo3(signature = (f_low, f_high, df, n_freq))]
fn band(f_low: f64, f_high: Option<f64>, df: f64, n_freq: usize) -> (usize, usize) {
    grid::band(f_low, f_high, df, n_freq)
}

#[pyfunction]
#[pyo3(signature = (templates, psd, df, f_low, f_high=None))]
fn sigma<'py>(
    py: Python<'py>,
    templates: &Bound<'py, PyAny>,
    psd: PyReadonlyArray1<'py, f64>,
    df: f64,
    f_low: f64,
    f_high: Option<f64>,
) -> PyResult<Bound<'py, PyArray1<f64>>> {
    let p = psd.as_slice()?;
    with_templates!(templates, |h, _rows, cols| {
        let out = run(py, || Ok(filter::sigma_in_band(h, cols, p, df, f_low, f_high)))?;
        Ok(out.into_pyarray(py))
    })
}

#[pyfunction]
#[pyo3(signature = (data, templates, psd, df, f_low, f_high, dtype))]
#[allow(clippy::too_many_arguments)]
fn snr_series<'py>(
    py: Python<'py>,
    data: PyReadonlyArray1<'py, Complex64>,
    templates: &Bound<'py, PyAny>,
    psd: PyReadonlyArray1<'py, f64>,
    df: f64,
    f_low: f64,
    f_high: Option<f64>,
    dtype: &str,
) -> PyResult<Bound<'py, PyAny>> {
    let (d, p) = (data.as_slice()?, psd.as_slice()?);
    let n = 2 * (d.len().max(1) - 1);
    with_templates!(templates, |h, rows, _cols| {
        match dtype {
            "complex128" => {
                let out = run(py, || filter::snr_series_in_band::<f64, _>(d, h, p, df, f_low, f_high))?;
                Ok(to_2d(py, rows, n, out)?.into_any())
            }
            "complex64" => {
                let out = run(py, || filter::snr_series_in_band::<f32, _>(d, h, p, df, f_low, f_high))?;
                Ok(to_2d(py, rows, n, out)?.into_any())
            }
            _ => Err(PyValueError::new_err(format!(
                "dtype must be 'complex64' or 'complex128', got {dtype:?}"
            ))),
        }
    })
}

#[pyfunction]
fn correlate<'py>(
    py: Python<'py>,
    data: PyReadonlyArray1<'py, f64>,
    templates: PyReadonlyArray2<'py, f64>,
    mode: &str,
) -> PyResult<Bound<'py, PyArray2<f64>>> {
    let mode = Mode::from_name(mode)?;
    let m = templates.shape()[1];
    let (d, t) = (data.as_slice()?, templates.as_slice()?);
    let (rows, len, out) = run(py, || filter::correlate(d, t, m, mode))?;
    to_2d(py, rows, len, out)
}

pub(super) fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_function(wrap_pyfunction!(band, m)?)?;
    m.add_function(wrap_pyfunction!(sigma, m)?)?;
    m.add_function(wrap_pyfunction!(snr_series, m)?)?;
    m.add_function(wrap_pyfunction!(correlate, m)?)?;
    Ok(())
}
