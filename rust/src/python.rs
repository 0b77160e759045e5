//! The only Python-facing module: converts arguments, releases the GIL around every
//! kernel, and maps core errors and panics to Python exceptions. No logic lives here;
//! validation with user-facing messages happens in the Python layer first.

use crate::error::Result as CoreResult;
use crate::{filter, search, spectrum, threads, waveform};
use num_complex::{Complex32, Complex64};
use numpy::ndarray::Array2;
use numpy::{
    IntoPyArray, PyArray1, PyArray2, PyReadonlyArray1, PyReadonlyArray2, PyUntypedArrayMethods,
};
use pyo3::exceptions::{PyRuntimeError, PyValueError};
use pyo3::prelude::*;
use std::panic::{catch_unwind, AssertUnwindSafe};

/// Run `f` without the GIL inside the chirpsift thread pool; a core error becomes
/// `ValueError`, a panic becomes `RuntimeError` instead of unwinding into Python.
fn run<T: Send>(py: Python<'_>, f: impl FnOnce() -> CoreResult<T> + Send) -> PyResult<T> {
    let outcome = py.detach(|| catch_unwind(AssertUnwindSafe(|| threads::install(f))));
    match outcome {
        Ok(Ok(v)) => Ok(v),
        Ok(Err(e)) => Err(PyValueError::new_err(e.to_string())),
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

fn to_2d<'py, T: numpy::Element>(
    py: Python<'py>,
    rows: usize,
    cols: usize,
    v: Vec<T>,
) -> PyResult<Bound<'py, PyArray2<T>>> {
    let a = Array2::from_shape_vec((rows, cols), v)
        .map_err(|e| PyRuntimeError::new_err(e.to_string()))?;
    Ok(a.into_pyarray(py))
}

#[pyfunction]
fn set_threads(n: usize) -> PyResult<()> {
    threads::set_threads(n).map_err(|e| PyValueError::new_err(e.to_string()))
}

#[pyfunction]
fn get_threads() -> usize {
    threads::get_threads()
}

#[pyfunction]
fn welch<'py>(
    py: Python<'py>,
    x: PyReadonlyArray2<'py, f64>,
    sample_rate: f64,
    step: usize,
    window: PyReadonlyArray1<'py, f64>,
    detrend: bool,
    median: bool,
) -> PyResult<Bound<'py, PyArray2<f64>>> {
    let (channels, n) = (x.shape()[0], x.shape()[1]);
    let xs = x.as_slice()?;
    let w = window.as_slice()?;
    let n_freq = w.len() / 2 + 1;
    let average = if median {
        spectrum::Average::Median
    } else {
        spectrum::Average::Mean
    };
    let out = run(py, || {
        spectrum::welch_channels(xs, n, sample_rate, step, w, detrend, average)
    })?;
    to_2d(py, channels, n_freq, out)
}

#[pyfunction]
fn design_psd<'py>(
    py: Python<'py>,
    freqs: PyReadonlyArray1<'py, f64>,
    curve: &str,
) -> PyResult<Bound<'py, PyArray1<f64>>> {
    let c = spectrum::DesignCurve::from_name(curve)
        .map_err(|e| PyValueError::new_err(e.to_string()))?;
    let f = freqs.as_slice()?;
    let out = run(py, || Ok(f.iter().map(|&x| c.psd(x)).collect::<Vec<f64>>()))?;
    Ok(out.into_pyarray(py))
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
    let out = run(py, || Ok(spectrum::psd_to_grid(f, p, df, n_freq)))?;
    Ok(out.into_pyarray(py))
}

#[pyfunction]
fn truncate_inverse_psd<'py>(
    py: Python<'py>,
    psd: PyReadonlyArray1<'py, f64>,
    max_len: usize,
    df: f64,
    f_low: f64,
) -> PyResult<Bound<'py, PyArray1<f64>>> {
    let p = psd.as_slice()?;
    let out = run(py, || {
        Ok(spectrum::truncate_inverse_psd(p, max_len, df, f_low))
    })?;
    Ok(out.into_pyarray(py))
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
        Ok(spectrum::whiten_channels(
            xs,
            n,
            ps,
            n_freq,
            sample_rate,
            f_low,
        ))
    })?;
    to_2d(py, channels, n, out)
}

/// TaylorF2 templates `(K, n_freq)`; `f_high[i]` bounds template `i` (exclusive).
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
    double: bool,
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
    if double {
        let zero = Complex64::new(0.0, 0.0);
        let out = run(py, || {
            Ok(waveform::spectra(
                &models()?,
                f_low,
                f_high,
                df,
                n_freq,
                zero,
                |h| h,
            ))
        })?;
        Ok(to_2d(py, k, n_freq, out)?.into_any())
    } else {
        let zero = Complex32::new(0.0, 0.0);
        let store = |h: Complex64| Complex32::new(h.re as f32, h.im as f32);
        let out = run(py, || {
            Ok(waveform::spectra(
                &models()?,
                f_low,
                f_high,
                df,
                n_freq,
                zero,
                store,
            ))
        })?;
        Ok(to_2d(py, k, n_freq, out)?.into_any())
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
    let out = run(py, || {
        a.iter()
            .zip(b)
            .map(|(&x, &y)| {
                Ok(waveform::time_to_coalescence(
                    &waveform::Binary::new(x, y, 0.0, 0.0)?,
                    f_low,
                    phase_order,
                ))
            })
            .collect::<CoreResult<Vec<f64>>>()
    })?;
    Ok(out.into_pyarray(py))
}

#[pyfunction]
fn isco_frequency<'py>(
    py: Python<'py>,
    m_total: PyReadonlyArray1<'py, f64>,
) -> PyResult<Bound<'py, PyArray1<f64>>> {
    let m = m_total.as_slice()?;
    let out = run(py, || {
        Ok(m.iter()
            .map(|&x| waveform::isco_frequency(x))
            .collect::<Vec<f64>>())
    })?;
    Ok(out.into_pyarray(py))
}

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
        let out = run(py, || {
            let (lo, hi) = filter::band(f_low, f_high, df, cols);
            Ok(filter::sigma(h, cols, &filter::inverse_psd(p), lo, hi, df))
        })?;
        Ok(out.into_pyarray(py))
    })
}

#[pyfunction]
#[pyo3(signature = (data, templates, psd, df, f_low, f_high, double))]
#[allow(clippy::too_many_arguments)]
fn snr_series<'py>(
    py: Python<'py>,
    data: PyReadonlyArray1<'py, Complex64>,
    templates: &Bound<'py, PyAny>,
    psd: PyReadonlyArray1<'py, f64>,
    df: f64,
    f_low: f64,
    f_high: Option<f64>,
    double: bool,
) -> PyResult<Bound<'py, PyAny>> {
    let (d, p) = (data.as_slice()?, psd.as_slice()?);
    let n = 2 * (d.len() - 1);
    with_templates!(templates, |h, rows, cols| {
        let (lo, hi) = filter::band(f_low, f_high, df, cols);
        let inv = filter::inverse_psd(p);
        if double {
            let out = run(py, || filter::snr_series::<f64, _>(d, h, &inv, lo, hi, df))?;
            Ok(to_2d(py, rows, n, out)?.into_any())
        } else {
            let out = run(py, || filter::snr_series::<f32, _>(d, h, &inv, lo, hi, df))?;
            Ok(to_2d(py, rows, n, out)?.into_any())
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
    let mode = filter::Mode::from_name(mode).map_err(|e| PyValueError::new_err(e.to_string()))?;
    let (rows, m) = (templates.shape()[0], templates.shape()[1]);
    let (d, t) = (data.as_slice()?, templates.as_slice()?);
    let (_, len) = mode
        .window(d.len(), m)
        .map_err(|e| PyValueError::new_err(e.to_string()))?;
    let out = run(py, || filter::correlate(d, t, m, mode))?;
    to_2d(py, rows, len, out)
}

/// The fused search over one segment; returns a dict of trigger columns.
#[pyfunction]
#[allow(clippy::too_many_arguments)]
fn search_segment<'py>(
    py: Python<'py>,
    data: PyReadonlyArray1<'py, Complex64>,
    psd: PyReadonlyArray1<'py, f64>,
    df: f64,
    m1: PyReadonlyArray1<'py, f64>,
    m2: PyReadonlyArray1<'py, f64>,
    chi1: PyReadonlyArray1<'py, f64>,
    chi2: PyReadonlyArray1<'py, f64>,
    f_high: PyReadonlyArray1<'py, f64>,
    phase_order: usize,
    f_low: f64,
    min_snr: f64,
    cluster: usize,
    chi2_bands: usize,
    valid_start: usize,
    valid_stop: usize,
) -> PyResult<Bound<'py, pyo3::types::PyDict>> {
    let (d, p) = (data.as_slice()?, psd.as_slice()?);
    let (m1, m2, chi1, chi2, f_high) = (
        m1.as_slice()?,
        m2.as_slice()?,
        chi1.as_slice()?,
        chi2.as_slice()?,
        f_high.as_slice()?,
    );
    let settings = search::Settings {
        f_low,
        min_snr,
        cluster,
        chi2_bands,
        valid_start,
        valid_stop,
    };
    let triggers = run(py, || {
        let segment = search::Segment::new(d, p, df)?;
        let templates: Vec<search::Template> =
            waveform::models(m1, m2, chi1, chi2, 1.0, phase_order)?
                .into_iter()
                .zip(f_high)
                .map(|(model, &f_high)| search::Template { model, f_high })
                .collect();
        search::search_segment(&segment, &templates, &settings)
    })?;
    let out = pyo3::types::PyDict::new(py);
    let ints = |f: fn(&search::Trigger) -> i64| {
        triggers.iter().map(f).collect::<Vec<_>>().into_pyarray(py)
    };
    let floats = |f: fn(&search::Trigger) -> f64| {
        triggers.iter().map(f).collect::<Vec<_>>().into_pyarray(py)
    };
    out.set_item("template", ints(|t| t.template as i64))?;
    out.set_item("index", ints(|t| t.index as i64))?;
    out.set_item("position", floats(|t| t.position))?;
    out.set_item("snr", floats(|t| t.snr))?;
    out.set_item("phase", floats(|t| t.phase))?;
    out.set_item("sigma", floats(|t| t.sigma))?;
    out.set_item("chi2", floats(|t| t.chi2))?;
    out.set_item("chi2_dof", ints(|t| t.chi2_dof as i64))?;
    Ok(out)
}

/// Seconds per unnormalised complex64 inverse FFT of length `n`, planned once, in
/// place with reused scratch, on the calling thread only: the benchmarks' yardstick.
#[pyfunction]
fn bench_inverse_fft(py: Python<'_>, n: usize, repeats: usize) -> PyResult<f64> {
    if n == 0 || repeats == 0 {
        return Err(PyValueError::new_err(format!(
            "n and repeats must be positive, got {n} and {repeats}"
        )));
    }
    Ok(py.detach(|| crate::yardstick::inverse_fft_seconds(n, repeats)))
}

/// Seconds per template to generate `m1[i], m2[i]` (non-spinning) on `n_freq` bins
/// into one reused complex64 buffer, as the fused kernel does, on the calling thread:
/// the benchmarks' measure of template generation alone.
#[pyfunction]
fn bench_template_generation<'py>(
    py: Python<'py>,
    m1: PyReadonlyArray1<'py, f64>,
    m2: PyReadonlyArray1<'py, f64>,
    f_low: f64,
    df: f64,
    n_freq: usize,
    repeats: usize,
) -> PyResult<f64> {
    let (a, b) = (m1.as_slice()?, m2.as_slice()?);
    if a.is_empty() || a.len() != b.len() || repeats == 0 {
        return Err(PyValueError::new_err(
            "m1 and m2 must be non-empty and of equal length, repeats positive",
        ));
    }
    let zeros = vec![0.0; a.len()];
    let models: Vec<(waveform::TaylorF2, f64)> = waveform::models(a, b, &zeros, &zeros, 1.0, 7)
        .map_err(|e| PyValueError::new_err(e.to_string()))?
        .into_iter()
        .zip(a.iter().zip(b))
        .map(|(model, (&x, &y))| (model, waveform::isco_frequency(x + y)))
        .collect();
    Ok(py.detach(|| crate::yardstick::generation_seconds(&models, f_low, df, n_freq, repeats)))
}

#[pymodule]
fn _core(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_function(wrap_pyfunction!(set_threads, m)?)?;
    m.add_function(wrap_pyfunction!(get_threads, m)?)?;
    m.add_function(wrap_pyfunction!(welch, m)?)?;
    m.add_function(wrap_pyfunction!(design_psd, m)?)?;
    m.add_function(wrap_pyfunction!(psd_to_grid, m)?)?;
    m.add_function(wrap_pyfunction!(truncate_inverse_psd, m)?)?;
    m.add_function(wrap_pyfunction!(whiten, m)?)?;
    m.add_function(wrap_pyfunction!(taylorf2, m)?)?;
    m.add_function(wrap_pyfunction!(chirp_duration, m)?)?;
    m.add_function(wrap_pyfunction!(isco_frequency, m)?)?;
    m.add_function(wrap_pyfunction!(sigma, m)?)?;
    m.add_function(wrap_pyfunction!(snr_series, m)?)?;
    m.add_function(wrap_pyfunction!(correlate, m)?)?;
    m.add_function(wrap_pyfunction!(search_segment, m)?)?;
    m.add_function(wrap_pyfunction!(bench_inverse_fft, m)?)?;
    m.add_function(wrap_pyfunction!(bench_template_generation, m)?)?;
    m.add("T_SUN", waveform::T_SUN)?;
    m.add("MPC", waveform::MPC)?;
    m.add("C_SI", waveform::C_SI)?;
    Ok(())
}
