//! Bindings of `crate::timing`, registered as the submodule `_core.timing`: probes
//! for the benchmarks, not part of the search.

use super::fused::PreparedBank;
use crate::timing::{self, Transform};
use pyo3::prelude::*;

/// Seconds per transform of length `n`: complex64 inverse, complex128 inverse
/// (`double`), or (`real`) float64 complex-to-real inverse; on the calling thread.
#[pyfunction]
#[pyo3(signature = (n, real, repeats, double=false))]
fn transform_seconds(py: Python<'_>, n: usize, real: bool, repeats: usize, double: bool) -> PyResult<f64> {
    let kind = match (real, double) {
        (true, _) => Transform::RealFloat64Inverse,
        (false, true) => Transform::Complex128Inverse,
        (false, false) => Transform::Complex64Inverse,
    };
    Ok(py.detach(|| timing::transform_seconds(n, kind, repeats))?)
}

/// Seconds per template to generate `bank` on `n_freq` bins of spacing `df`, as the
/// fused kernel does, on the calling thread.
#[pyfunction]
fn generation_seconds(
    py: Python<'_>,
    bank: &PreparedBank,
    df: f64,
    n_freq: usize,
    repeats: usize,
) -> PyResult<f64> {
    let b = &bank.bank;
    Ok(py.detach(|| timing::generation_seconds(b, df, n_freq, repeats))?)
}

pub(super) fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    let sub = PyModule::new(m.py(), "timing")?;
    sub.add_function(wrap_pyfunction!(transform_seconds, &sub)?)?;
    sub.add_function(wrap_pyfunction!(generation_seconds, &sub)?)?;
    m.add_submodule(&sub)?;
    Ok(())
}
