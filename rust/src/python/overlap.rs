//! Bindings of `crate::overlap`: matches of explicit templates, fitting factors.

use super::run;
use crate::filter::AsComplex64;
use crate::overlap::{self, Params, SweepGrid};
use num_complex::{Complex32, Complex64};
use numpy::{IntoPyArray, PyArray1, PyReadonlyArray1, PyReadonlyArray2, PyUntypedArrayMethods};
use pyo3::exceptions::PyValueError;
use pyo3::prelude::*;

/// `matches` on two template arrays of one complex type.
fn matches_of<'py, C: AsComplex64 + numpy::Element>(
    py: Python<'py>,
    a: PyReadonlyArray2<'py, C>,
    b: PyReadonlyArray2<'py, C>,
    inv: &[f64],
    band: (f64, f64, Option<f64>),
) -> PyResult<Bound<'py, PyArray1<f64>>> {
    let n = a.shape()[1];
    if b.shape()[1] != n {
        return Err(PyValueError::new_err(format!("h2: has {} frequency bins but h1 has {n}", b.shape()[1])));
    }
    let (x, y) = (a.as_slice()?, b.as_slice()?);
    let (df, f_low, f_high) = band;
    let out = run(py, || overlap::matches(x, y, n, inv, df, f_low, f_high))?;
    Ok(out.into_pyarray(py))
}

#[pyfunction]
#[pyo3(signature = (h1, h2, psd, df, f_low, f_high=None))]
fn matches<'py>(
    py: Python<'py>,
    h1: &Bound<'py, PyAny>,
    h2: &Bound<'py, PyAny>,
    psd: PyReadonlyArray1<'py, f64>,
    df: f64,
    f_low: f64,
    f_high: Option<f64>,
) -> PyResult<Bound<'py, PyArray1<f64>>> {
    let inv = crate::grid::inverse_psd(psd.as_slice()?);
    let band = (df, f_low, f_high);
    if let (Ok(a), Ok(b)) = (h1.extract::<PyReadonlyArray2<Complex64>>(), h2.extract::<PyReadonlyArray2<Complex64>>()) {
        return matches_of(py, a, b, &inv, band);
    }
    matches_of::<Complex32>(py, h1.extract()?, h2.extract()?, &inv, band)
}

#[pyfunction]
#[allow(clippy::too_many_arguments)]
#[allow(clippy::type_complexity)]
fn best_matches<'py>(
    py: Python<'py>,
    points: PyReadonlyArray2<'py, f64>,
    bank: PyReadonlyArray2<'py, f64>,
    indptr: PyReadonlyArray1<'py, i64>,
    indices: PyReadonlyArray1<'py, i64>,
    psd: PyReadonlyArray1<'py, f64>,
    df_fine: f64,
    f_low: f64,
    f_cap: f64,
) -> PyResult<(Bound<'py, PyArray1<f64>>, Bound<'py, PyArray1<i64>>)> {
    // parameters arrive as (4, n) rows m1, m2, chi1, chi2
    let cols = |a: &PyReadonlyArray2<'py, f64>| -> PyResult<Vec<Vec<f64>>> {
        let v = a.as_array();
        Ok((0..4).map(|r| v.row(r).to_vec()).collect())
    };
    let (p, b) = (cols(&points)?, cols(&bank)?);
    let to_usize = |a: &PyReadonlyArray1<'py, i64>| -> PyResult<Vec<usize>> {
        a.as_slice()?
            .iter()
            .map(|&i| usize::try_from(i).map_err(|_| PyValueError::new_err(format!("negative index {i}"))))
            .collect()
    };
    let (ip, ix) = (to_usize(&indptr)?, to_usize(&indices)?);
    let w = crate::grid::inverse_psd(psd.as_slice()?);
    let (values, which) = run(py, || {
        overlap::best_matches(
            &Params { m1: &p[0], m2: &p[1], chi1: &p[2], chi2: &p[3] },
            &Params { m1: &b[0], m2: &b[1], chi1: &b[2], chi2: &b[3] },
            &ip,
            &ix,
            &SweepGrid { inv_psd: &w, df_fine, f_low, f_cap },
        )
    })?;
    Ok((values.into_pyarray(py), which.into_pyarray(py)))
}

#[pyfunction]
fn required_period(longest: f64) -> f64 {
    overlap::required_period(longest)
}

/// Points of the inverse transform `matches` performs for a pair whose common band holds
/// `bins` bins (the smallest `2^a 3^b` at or above it, at least 4).
#[pyfunction]
fn transform_length(bins: usize) -> usize {
    overlap::transform_length(bins)
}

pub(super) fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_function(wrap_pyfunction!(transform_length, m)?)?;
    m.add_function(wrap_pyfunction!(matches, m)?)?;
    m.add_function(wrap_pyfunction!(best_matches, m)?)?;
    m.add_function(wrap_pyfunction!(required_period, m)?)?;
    Ok(())
}
