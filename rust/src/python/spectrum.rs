//! Bindings of `crate::spectrum`: Welch, design curves, resampling, truncation,
//! whitening.

use super::{run, to_2d};
use crate::spectrum::{self, Average, DesignCurve, SegmentChain};
use numpy::{IntoPyArray, PyArray1, PyArray2, PyReadonlyArray1, PyReadonlyArray2, PyUntypedArrayMethods};
use pyo3::prelude::*;

#[pyfunction]
fn welch<'py>(
    py: Python<'py>,
    x: PyReadonlyArray2<'py, f64>,
    sample_rate: f64,
    step: usize,
    window: PyReadonlyArray1<'py, f64>,
    detrend: bool,
    average: &str,
) -> PyResult<Bound<'py, PyArray2<f64>>> {
    let (channels, n) = (x.shape()[0], x.shape()[1]);
    let average = Average::from_name(average)?;
    let (xs, w) = (x.as_slice()?, window.as_slice()?);
    let out = run(py, || {
        spectrum::welch_channels(xs, n, sample_rate, step, w, detrend, average)
    })?;
    to_2d(py, channels, w.len() / 2 + 1, out)
}

#[pyfunction]
fn design_psd<'py>(
    py: Python<'py>,
    freqs: PyReadonlyArray1<'py, f64>,
    curve: &str,
) -> PyResult<Bound<'py, PyArray1<f64>>> {
    let f = freqs.as_slice()?;
    Ok(run(py, || spectrum::design_psd(curve, f))?.into_pyarray(py))
}

#[pyfunction]
fn psd_to_grid<'py>(
    py: Python<'py>,
    freqs: PyReadonlyArray1<'py, f64>,
    psd: PyReadonlyArray1<'py, f64>,
    df: f64,
    n_freq: usize,
) -> PyResult<Bound<'py, PyArray1<f64>>> {
    let (f, p) = (freqs.as_slice()?, psd.as_slice()?);
    Ok(run(py, || Ok(spectrum::psd_to_grid(f, p, df, n_freq)))?.into_pyarray(py))
}

/// Truncate every row of `psd` (rows in parallel).
#[pyfunction]
fn truncate_inverse_psd<'py>(
    py: Python<'py>,
    psd: PyReadonlyArray2<'py, f64>,
    max_len: usize,
    df: f64,
    f_low: f64,
) -> PyResult<Bound<'py, PyArray2<f64>>> {
    let (rows, n_freq) = (psd.shape()[0], psd.shape()[1]);
    let p = psd.as_slice()?;
    let out = run(py, || {
        Ok(spectrum::truncate_inverse_psd_rows(p, n_freq, max_len, df, f_low))
    })?;
    to_2d(py, rows, n_freq, out)
}

/// Whiten each row of `x` with the matching row of `psd` (one row broadcasts).
#[pyfunction]
fn whiten<'py>(
    py: Python<'py>,
    x: PyReadonlyArray2<'py, f64>,
    psd: PyReadonlyArray2<'py, f64>,
    sample_rate: f64,
    f_low: f64,
) -> PyResult<Bound<'py, PyArray2<f64>>> {
    let (channels, n) = (x.shape()[0], x.shape()[1]);
    let n_freq = psd.shape()[1];
    let (xs, ps) = (x.as_slice()?, psd.as_slice()?);
    let out = run(py, || {
        Ok(spectrum::whiten_channels(xs, n, ps, n_freq, sample_rate, f_low))
    })?;
    to_2d(py, channels, n, out)
}

/// The truncated PSD of each block `x[s..s + block_len]` (blocks in parallel).
#[pyfunction]
#[allow(clippy::too_many_arguments)]
fn segment_psds<'py>(
    py: Python<'py>,
    x: PyReadonlyArray1<'py, f64>,
    starts: PyReadonlyArray1<'py, u64>,
    block_len: usize,
    sample_rate: f64,
    step: usize,
    window: PyReadonlyArray1<'py, f64>,
    n_freq: usize,
    max_len: usize,
    f_low: f64,
) -> PyResult<Bound<'py, PyArray2<f64>>> {
    let (xs, w) = (x.as_slice()?, window.as_slice()?);
    let starts: Vec<usize> = starts.as_slice()?.iter().map(|&s| s as usize).collect();
    let chain = SegmentChain {
        sample_rate,
        window: w,
        step,
        n_freq,
        max_len,
        f_low,
    };
    let out = run(py, || chain.psds(xs, &starts, block_len))?;
    to_2d(py, starts.len(), n_freq, out)
}

pub(super) fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add("DESIGN_CURVES", DesignCurve::NAMES)?;
    m.add_function(wrap_pyfunction!(welch, m)?)?;
    m.add_function(wrap_pyfunction!(design_psd, m)?)?;
    m.add_function(wrap_pyfunction!(psd_to_grid, m)?)?;
    m.add_function(wrap_pyfunction!(truncate_inverse_psd, m)?)?;
    m.add_function(wrap_pyfunction!(whiten, m)?)?;
    m.add_function(wrap_pyfunction!(segment_psds, m)?)?;
    Ok(())
}
