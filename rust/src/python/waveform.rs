//! Bindings of `crate::waveform`: TaylorF2 spectra, durations, ISCO frequencies.

use super::{run, to_2d};
use crate::constants::{C_SI, MPC, T_SUN};
use crate::waveform;
use num_complex::{Complex32, Complex64};
use numpy::{IntoPyArray, PyArray1, PyReadonlyArray1};
use pyo3::exceptions::PyValueError;
use pyo3::prelude::*;

/// TaylorF2 templates `(K, n_freq)` as `dtype` ("complex64" or "complex128");
/// `f_high[i]` bounds template `i` (exclusive).
#[pyfunction]
#[allow(clippy::too_many_arguments)]
fn taylorf2<'py>(
    py: Python<'py>,
    m1: PyReadonlyArray1<'py, f64>,
    m2: PyReadonlyArray1<'py, f64>,
    chi1: PyReadonlyArray1<'py, f64>,
    chi2: PyReadonlyArray1<'py, f64>,
    f_low: f64,
    df: f64,
    n_freq: usize,
    f_high: PyReadonlyArray1<'py, f64>,
    distance: f64,
    phase_order: usize,
    dtype: &str,
) -> PyResult<Bound<'py, PyAny>> {
    let (m1, m2, chi1, chi2, f_high) = (
        m1.as_slice()?,
        m2.as_slice()?,
        chi1.as_slice()?,
        chi2.as_slice()?,
        f_high.as_slice()?,
    );
    let k = m1.len();
    let models = || waveform::models(m1, m2, chi1, chi2, distance, phase_order);
    match dtype {
        "complex128" => {
            let zero = Complex64::new(0.0, 0.0);
            let out = run(py, || Ok(waveform::spectra(&models()?, f_low, f_high, df, n_freq, zero, |h| h)))?;
            Ok(to_2d(py, k, n_freq, out)?.into_any())
        }
        "complex64" => {
            let zero = Complex32::new(0.0, 0.0);
            let store = |h: Complex64| Complex32::new(h.re as f32, h.im as f32);
            let out = run(py, || Ok(waveform::spectra(&models()?, f_low, f_high, df, n_freq, zero, store)))?;
            Ok(to_2d(py, k, n_freq, out)?.into_any())
        }
        _ => Err(PyValueError::new_err(format!(
            "dtype must be 'complex64' or 'complex128', got {dtype:?}"
        ))),
    }
}

#[pyfunction]
fn chirp_duration<'py>(
    py: Python<'py>,
    m1: PyReadonlyArray1<'py, f64>,
    m2: PyReadonlyArray1<'py, f64>,
    f_low: f64,
    phase_order: usize,
) -> PyResult<Bound<'py, PyArray1<f64>>> {
    let (a, b) = (m1.as_slice()?, m2.as_slice()?);
    Ok(run(py, || waveform::durations(a, b, f_low, phase_order))?.into_pyarray(py))
}

#[pyfunction]
fn isco_frequency<'py>(
    py: Python<'py>,
    m_total: PyReadonlyArray1<'py, f64>,
) -> PyResult<Bound<'py, PyArray1<f64>>> {
    let m = m_total.as_slice()?;
    Ok(run(py, || Ok(waveform::isco_frequencies(m)))?.into_pyarray(py))
}

pub(super) fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add("T_SUN", T_SUN)?;
    m.add("MPC", MPC)?;
    m.add("C_SI", C_SI)?;
    m.add_function(wrap_pyfunction!(taylorf2, m)?)?;
    m.add_function(wrap_pyfunction!(chirp_duration, m)?)?;
    m.add_function(wrap_pyfunction!(isco_frequency, m)?)?;
    Ok(())
}
