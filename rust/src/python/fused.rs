//! Bindings of `crate::fused`: the prepared bank and the kernel over one segment.

use super::run;
use crate::fused::{self, Bank, Prepared, Settings, Trigger};
use crate::spectrum::SegmentChain;
use num_complex::Complex64;
use numpy::{IntoPyArray, PyArray1, PyReadonlyArray1, PyReadonlyArray2};
use pyo3::prelude::*;
use pyo3::types::PyDict;

/// A template bank checked and built once (`crate::fused::Bank`), reused for every
/// segment.
#[pyclass(module = "chirpsift._core", frozen)]
pub(super) struct PreparedBank {
    pub(super) bank: Bank,
}

#[pymethods]
impl PreparedBank {
    #[new]
    #[allow(clippy::too_many_arguments)]
    fn new(
        py: Python<'_>,
        m1: PyReadonlyArray1<'_, f64>,
        m2: PyReadonlyArray1<'_, f64>,
        chi1: PyReadonlyArray1<'_, f64>,
        chi2: PyReadonlyArray1<'_, f64>,
        f_high: PyReadonlyArray1<'_, f64>,
        f_low: f64,
        phase_order: usize,
    ) -> PyResult<Self> {
        let (m1, m2, chi1, chi2, f_high) = (
            m1.as_slice()?,
            m2.as_slice()?,
            chi1.as_slice()?,
            chi2.as_slice()?,
            f_high.as_slice()?,
        );
        let bank = run(py, || {
            Bank::taylorf2(m1, m2, chi1, chi2, Some(f_high), f_low, phase_order)
        })?;
        Ok(PreparedBank { bank })
    }

    fn __len__(&self) -> usize {
        self.bank.len()
    }

    /// Lower frequency cutoff (Hz).
    #[getter]
    fn f_low(&self) -> f64 {
        self.bank.f_low()
    }

    /// Upper frequency of each template (Hz).
    #[getter]
    fn f_high<'py>(&self, py: Python<'py>) -> Bound<'py, PyArray1<f64>> {
        self.bank.f_high().into_pyarray(py)
    }

    /// Seconds from `f_low` to the end of each template (the family's own rule).
    #[getter]
    fn durations<'py>(&self, py: Python<'py>) -> Bound<'py, PyArray1<f64>> {
        self.bank.durations().into_pyarray(py)
    }
}

/// One segment made ready for every template (`crate::fused::Prepared`).
#[pyclass(module = "chirpsift._core", frozen)]
pub(super) struct PreparedSegment {
    prepared: Prepared,
}

#[pymethods]
impl PreparedSegment {
    /// Samples `N` of the segment.
    #[getter]
    fn n(&self) -> usize {
        self.prepared.n()
    }

    /// Bin spacing (Hz).
    #[getter]
    fn df(&self) -> f64 {
        self.prepared.df()
    }
}

/// A segment given in the frequency domain, `d~` and its PSD on the same grid.
#[pyfunction]
fn prepare_segment(
    py: Python<'_>,
    data: PyReadonlyArray1<'_, Complex64>,
    psd: PyReadonlyArray1<'_, f64>,
    df: f64,
) -> PyResult<PreparedSegment> {
    let (d, p) = (data.as_slice()?, psd.as_slice()?);
    let prepared = run(py, || Prepared::new(d, p, df))?;
    Ok(PreparedSegment { prepared })
}

/// Segments `x[s..s + len]` of strain, transformed in the core, with PSD rows
/// `psds` (one row, or one per segment); segments in parallel.
#[pyfunction]
fn prepare_segments(
    py: Python<'_>,
    x: PyReadonlyArray1<'_, f64>,
    starts: PyReadonlyArray1<'_, u64>,
    len: usize,
    psds: PyReadonlyArray2<'_, f64>,
    sample_rate: f64,
) -> PyResult<Vec<PreparedSegment>> {
    let (xs, p) = (x.as_slice()?, psds.as_slice()?);
    let starts: Vec<usize> = starts.as_slice()?.iter().map(|&s| s as usize).collect();
    let prepared = run(py, || Prepared::from_strain_segments(xs, &starts, len, p, sample_rate))?;
    Ok(prepared
        .into_iter()
        .map(|prepared| PreparedSegment { prepared })
        .collect())
}

/// Segments `x[s..s + len]` of strain with PSDs estimated by the spectrum chain
/// from blocks `blocks[b..b + block_len]`, one per segment; chain and data
/// transform side by side, segments in parallel.
#[pyfunction]
#[allow(clippy::too_many_arguments)]
fn prepare_segments_estimated(
    py: Python<'_>,
    x: PyReadonlyArray1<'_, f64>,
    starts: PyReadonlyArray1<'_, u64>,
    len: usize,
    blocks: PyReadonlyArray1<'_, f64>,
    block_starts: PyReadonlyArray1<'_, u64>,
    block_len: usize,
    sample_rate: f64,
    step: usize,
    window: PyReadonlyArray1<'_, f64>,
    max_len: usize,
    f_low: f64,
) -> PyResult<Vec<PreparedSegment>> {
    let (xs, bs, w) = (x.as_slice()?, blocks.as_slice()?, window.as_slice()?);
    let starts: Vec<usize> = starts.as_slice()?.iter().map(|&s| s as usize).collect();
    let block_starts: Vec<usize> = block_starts.as_slice()?.iter().map(|&s| s as usize).collect();
    let chain = SegmentChain {
        sample_rate,
        window: w,
        step,
        n_freq: len / 2 + 1,
        max_len,
        f_low,
    };
    let prepared = run(py, || {
        Prepared::from_strain_estimated(xs, &starts, len, bs, &block_starts, block_len, &chain)
    })?;
    Ok(prepared
        .into_iter()
        .map(|prepared| PreparedSegment { prepared })
        .collect())
}

/// The per-peak columns as a dict of arrays.
fn columns<'py>(py: Python<'py>, triggers: &[Trigger]) -> PyResult<Bound<'py, PyDict>> {
    let out = PyDict::new(py);
    let ints = |f: fn(&Trigger) -> i64| triggers.iter().map(f).collect::<Vec<_>>().into_pyarray(py);
    let floats = |f: fn(&Trigger) -> f64| triggers.iter().map(f).collect::<Vec<_>>().into_pyarray(py);
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

/// The fused kernel over one segment; returns a dict of per-peak columns.
#[pyfunction]
#[allow(clippy::too_many_arguments)]
fn filter_segment<'py>(
    py: Python<'py>,
    segment: &PreparedSegment,
    bank: &PreparedBank,
    min_snr: f64,
    cluster_samples: usize,
    chi2_bands: usize,
    valid_start: usize,
    valid_stop: usize,
) -> PyResult<Bound<'py, PyDict>> {
    let settings = Settings {
        min_snr,
        cluster_samples,
        chi2_bands,
        valid_start,
        valid_stop,
    };
    let (seg, b) = (&segment.prepared, &bank.bank);
    let triggers = run(py, || fused::filter_segment(seg, b, &settings))?;
    columns(py, &triggers)
}

pub(super) fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_class::<PreparedBank>()?;
    m.add_class::<PreparedSegment>()?;
    m.add_function(wrap_pyfunction!(prepare_segment, m)?)?;
    m.add_function(wrap_pyfunction!(prepare_segments, m)?)?;
    m.add_function(wrap_pyfunction!(prepare_segments_estimated, m)?)?;
    m.add_function(wrap_pyfunction!(filter_segment, m)?)?;
    Ok(())
}
