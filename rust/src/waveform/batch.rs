//! Many templates at once: models from parameter arrays, spectra on a grid,
//! durations and ISCO frequencies, in parallel over templates.

use super::{isco_frequency, time_to_coalescence, Binary, Model};
use crate::error::Result;
use crate::grid::band;
use num_complex::Complex64;
use rayon::prelude::*;

/// TaylorF2 models for templates `(m1[i], m2[i], chi1[i], chi2[i])` at `distance` Mpc.
///
/// # Errors
/// The first invalid template's parameter, as [`Binary::new`] and
/// [`super::TaylorF2::new`] name it.
pub fn models(
    m1: &[f64],
    m2: &[f64],
    chi1: &[f64],
    chi2: &[f64],
    distance: f64,
    phase_order: usize,
) -> Result<Vec<Model>> {
    (0..m1.len())
        .map(|i| {
            Model::taylorf2(
                &Binary::new(m1[i], m2[i], chi1[i], chi2[i])?,
                distance,
                phase_order,
            )
        })
        .collect()
}

/// Templates `(K, n_freq)` row-major, row `i` nonzero on `f_low <= f < f_high[i]`,
/// stored through `store` (e.g. to complex64); rows in parallel.
pub fn spectra<C: Copy + Send + Sync>(
    models: &[Model],
    f_low: f64,
    f_high: &[f64],
    df: f64,
    n_freq: usize,
    zero: C,
    store: impl Fn(Complex64) -> C + Sync,
) -> Vec<C> {
    let mut out = vec![zero; models.len() * n_freq];
    out.par_chunks_mut(n_freq.max(1))
        .enumerate()
        .for_each(|(i, row)| {
            let (k_lo, k_hi) = band(f_low, Some(f_high[i]), df, n_freq);
            models[i].for_each_block(k_lo, k_hi, df, |k0, block| {
                for (o, &h) in row[k0..k0 + block.len()].iter_mut().zip(block) {
                    *o = store(h);
                }
            });
        });
    out
}

/// Non-spinning TaylorT2 times (s) from `f_low` to coalescence of `(m1[i], m2[i])`.
///
/// # Errors
/// The first invalid mass, as [`Binary::new`] names it.
pub fn durations(m1: &[f64], m2: &[f64], f_low: f64, phase_order: usize) -> Result<Vec<f64>> {
    m1.iter()
        .zip(m2)
        .map(|(&a, &b)| {
            Ok(time_to_coalescence(
                &Binary::new(a, b, 0.0, 0.0)?,
                f_low,
                phase_order,
            ))
        })
        .collect()
}

/// ISCO frequencies (Hz) of total masses `m_total` (solar masses).
pub fn isco_frequencies(m_total: &[f64]) -> Vec<f64> {
    m_total.iter().map(|&m| isco_frequency(m)).collect()
}
