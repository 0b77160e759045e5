//! The fused kernel: one prepared data segment against a bank of templates
//! generated on the fly, with thresholding, clustering, peak refinement and Allen's
//! chi-squared at the surviving peaks.
//!
//! Per template and per thread: generate the template straight into the product
//! `q_k h~_k*` with `q = 4 df d~ / S` ([`product`]), inverse-FFT it on a grid
//! decimated to the template's bandwidth ([`Prepared::decimation`]), scan the
//! analysable samples ([`crate::peaks`]), and re-evaluate candidates exactly
//! ([`crate::chisq`]). Nothing of size (templates x samples) exists; each thread
//! holds one buffer of the segment length.
//!
//! Scales: strain-scale numbers (PSD ~1e-47, h~ ~1e-22) are rescaled into O(1)
//! factors held in f64, so the float32 transform never sees values near underflow.

mod prepared;
pub mod product;

pub use prepared::{Prepared, MAX_DECIMATION, MAX_DECIMATION_LOSS};

use crate::chisq::{combine_bands, evaluate_bands};
use crate::error::{ensure, Result};
use crate::fft;
use crate::grid::band;
use crate::peaks::{cluster_peaks, find_peaks, parabolic_offset, vertex};
use crate::waveform::{models, Model};
use num_complex::Complex32;
use rayon::prelude::*;
use rustfft::Fft;
use std::sync::Arc;

/// Settings of one pass over a segment.
#[derive(Clone, Debug)]
pub struct Settings {
    /// Peak candidates have `|z| >= min_snr`.
    pub min_snr: f64,
    /// Half-width, in samples, within which only the loudest peak survives.
    pub cluster_samples: usize,
    /// Number `p` of chi-squared bands (`2p - 2` degrees of freedom).
    pub chi2_bands: usize,
    /// Analysable samples `[valid_start, valid_stop)` of the segment.
    pub valid_start: usize,
    pub valid_stop: usize,
}

/// A template: its model and upper frequency (Hz, exclusive).
#[derive(Clone, Debug)]
pub struct Template {
    pub model: Model,
    pub f_high: f64,
}

/// Templates checked and built once, then filtered against every segment.
#[derive(Clone, Debug)]
pub struct Bank {
    templates: Vec<Template>,
    f_low: f64,
}

impl Bank {
    /// A bank of `models` over `f_low <= f < f_high[i]` (`f_high = None`: each
    /// model's [`Model::default_f_high`]).
    ///
    /// # Errors
    /// Names `f_low` unless it is positive and finite, `f_high` unless it holds
    /// one value per model, each above `f_low`.
    pub fn new(models: Vec<Model>, f_high: Option<&[f64]>, f_low: f64) -> Result<Self> {
        ensure(f_low.is_finite() && f_low > 0.0, "f_low", || {
            format!("must be positive and finite, got {f_low} Hz")
        })?;
        if let Some(f) = f_high {
            ensure(f.len() == models.len(), "f_high", || {
                format!("needs one value per template ({}), got {}", models.len(), f.len())
            })?;
        }
        let templates: Vec<Template> = models
            .into_iter()
            .enumerate()
            .map(|(i, model)| {
                let f_high = f_high.map_or_else(|| model.default_f_high(), |f| f[i]);
                Template { model, f_high }
            })
            .collect();
        if let Some(i) = templates.iter().position(|t| !(t.f_high > f_low)) {
            return Err(crate::Error::invalid(
                "f_high",
                format!(
                    "must exceed f_low={f_low} Hz for every template, got {} Hz (template {i})",
                    templates[i].f_high
                ),
            ));
        }
        Ok(Bank { templates, f_low })
    }

    /// TaylorF2 templates `(m1[i], m2[i], chi1[i], chi2[i])`, phase to `v^phase_order`.
    ///
    /// # Errors
    /// As [`models`] and [`Bank::new`].
    #[allow(clippy::too_many_arguments)]
    pub fn taylorf2(
        m1: &[f64],
        m2: &[f64],
        chi1: &[f64],
        chi2: &[f64],
        f_high: Option<&[f64]>,
        f_low: f64,
        phase_order: usize,
    ) -> Result<Self> {
        Bank::new(models(m1, m2, chi1, chi2, 1.0, phase_order)?, f_high, f_low)
    }

    /// The templates, in bank order.
    pub fn templates(&self) -> &[Template] {
        &self.templates
    }
    /// Lower frequency cutoff of every template (Hz).
    pub fn f_low(&self) -> f64 {
        self.f_low
    }
    /// Number of templates.
    pub fn len(&self) -> usize {
        self.templates.len()
    }
    /// Whether the bank holds no template.
    pub fn is_empty(&self) -> bool {
        self.templates.is_empty()
    }
    /// Upper frequency of each template (Hz).
    pub fn f_high(&self) -> Vec<f64> {
        self.templates.iter().map(|t| t.f_high).collect()
    }
    /// Seconds from `f_low` to the end of each template's waveform.
    pub fn durations(&self) -> Vec<f64> {
        self.templates.iter().map(|t| t.model.duration(self.f_low)).collect()
    }
}

/// A clustered, refined peak of one template's SNR.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Trigger {
    /// Row of the template in the bank.
    pub template: usize,
    /// Sample of the peak in the segment.
    pub index: usize,
    /// Refined peak position in samples from the segment start.
    pub position: f64,
    /// `|z|` at the refined peak.
    pub snr: f64,
    /// `arg z` at the refined peak, radians.
    pub phase: f64,
    /// Template norm (template at 1 Mpc), strain units.
    pub sigma: f64,
    /// Allen's chi-squared.
    pub chi2: f64,
    /// Its degrees of freedom, `2p - 2`.
    pub chi2_dof: usize,
}

struct Scratch {
    buf: Vec<Complex32>,
    fft_scratch: Vec<Complex32>,
}

/// Filter `segment` with every template of `bank`; triggers come back ordered by
/// template, then time, independent of the thread count.
///
/// # Errors
/// Names `valid` unless `1 <= valid_start < valid_stop < N`, `chi2_bands` below 2.
pub fn filter_segment(segment: &Prepared, bank: &Bank, s: &Settings) -> Result<Vec<Trigger>> {
    let n = segment.n();
    ensure(
        s.valid_start >= 1 && s.valid_stop < n && s.valid_start < s.valid_stop,
        "valid",
        || {
            format!(
                "analysable range [{}, {}) must lie inside (0, {})",
                s.valid_start,
                s.valid_stop,
                n - 1
            )
        },
    )?;
    ensure(s.chi2_bands >= 2, "chi2_bands", || {
        "must be at least 2 (2p - 2 degrees of freedom)".into()
    })?;
    // One plan per decimation D = 2^i (transform length N / D), planned once here.
    let mut plans = Vec::new();
    let mut d = 1usize;
    while d <= MAX_DECIMATION && n % d == 0 {
        plans.push(fft::inverse::<f32>(n / d));
        d *= 2;
    }
    let scratch_len = plans
        .iter()
        .map(|p| p.get_inplace_scratch_len())
        .max()
        .unwrap_or(0);
    let zero = Complex32::new(0.0, 0.0);
    let kept: Vec<Scratch> = {
        let mut k = KEPT_SCRATCH.lock().unwrap_or_else(|e| e.into_inner());
        k.retain(|s| s.buf.len() == n && s.fft_scratch.len() == scratch_len);
        std::mem::take(&mut *k)
    };
    let pool = crate::scratch::Pool::with_items(
        || Scratch {
            buf: vec![zero; n],
            fft_scratch: vec![zero; scratch_len],
        },
        kept,
    );
    let f_low = bank.f_low();
    let per_template: Vec<Vec<Trigger>> = bank
        .templates()
        .par_iter()
        .enumerate()
        .map_init(
            || pool.take(),
            |scratch, (i, t)| filter_one(segment, t, i, f_low, s, &plans, scratch),
        )
        .collect();
    let mut back = pool.into_items();
    back.truncate(KEPT_KERNEL_SCRATCHES);
    *KEPT_SCRATCH.lock().unwrap_or_else(|e| e.into_inner()) = back;
    Ok(per_template.into_iter().flatten().collect())
}

/// Per-thread buffers (a segment-length complex64 series and its transform scratch,
/// 16 MiB at 2^20 samples) kept from one call to the next, at most this many: made
/// afresh each call, their pages' faults and zeroing cost the search a few tenths of
/// a transform per segment and thread.
const KEPT_KERNEL_SCRATCHES: usize = 2;

static KEPT_SCRATCH: std::sync::Mutex<Vec<Scratch>> = std::sync::Mutex::new(Vec::new());

/// Everything one template needs to turn buffer values into SNRs.
struct Scaled<'a> {
    seg: &'a Prepared,
    model: &'a Model,
    k_lo: usize,
    k_hi: usize,
    /// `1 / h_ref`, the O(1) rescaling of the template.
    inv_h: f64,
    /// `sum |h~_k / h_ref|^2 w_k`.
    norm: f64,
    /// Factor from buffer values to SNR.
    to_snr: f64,
}

fn filter_one(
    seg: &Prepared,
    t: &Template,
    index: usize,
    f_low: f64,
    s: &Settings,
    plans: &[Arc<dyn Fft<f32>>],
    scratch: &mut Scratch,
) -> Vec<Trigger> {
    let (k_lo, k_hi) = band(f_low, Some(t.f_high), seg.df(), seg.n_freq());
    let k_lo = k_lo.max(1);
    if k_hi <= k_lo {
        return Vec::new();
    }
    // O(1) template scale: the amplitude at the lowest bin is the largest.
    let h_ref = t.model.amplitude(k_lo as f64 * seg.df());
    let inv_h = 1.0 / h_ref;
    let (dec, loss) = seg.decimation(&t.model, k_lo, k_hi);
    let buf = &mut scratch.buf[..seg.n() / dec];
    let norm = product::fill_product(seg, &t.model, k_lo, k_hi, inv_h, buf);
    if !(norm > 0.0) {
        return Vec::new();
    }
    // sigma of the unscaled template, and the factor from buffer values to SNR.
    let sigma_unit = (4.0 * seg.df() * norm * seg.w_scale()).sqrt();
    let sigma = sigma_unit * h_ref;
    let sc = Scaled {
        seg,
        model: &t.model,
        k_lo,
        k_hi,
        inv_h,
        norm,
        to_snr: seg.q_scale() / sigma_unit,
    };
    plans[dec.trailing_zeros() as usize].process_with_scratch(buf, &mut scratch.fft_scratch);
    let kept = if dec == 1 {
        peaks_full_rate(buf, &sc, s)
    } else {
        peaks_decimated(buf, dec, loss, &sc, s)
    };
    triggers_at(&kept, &sc, index, sigma, s)
}

/// (peak sample, refined position) of the clustered peaks of a full-rate series.
fn peaks_full_rate(z: &[Complex32], sc: &Scaled, s: &Settings) -> Vec<(usize, f64)> {
    let threshold = s.min_snr / sc.to_snr;
    let peaks = find_peaks(z, s.valid_start, s.valid_stop, (threshold * threshold) as f32);
    cluster_peaks(&peaks, s.cluster_samples)
        .into_iter()
        .map(|i| (peaks[i].0, peaks[i].0 as f64 + parabolic_offset(z, peaks[i].0)))
        .collect()
}

/// Coarse candidates of a series decimated by `dec` (threshold lowered by the loss
/// bound), then exact `|z|` at the five full-rate samples around each, then the
/// full-rate peak rule and clustering.
fn peaks_decimated(
    z: &[Complex32],
    dec: usize,
    loss: f64,
    sc: &Scaled,
    s: &Settings,
) -> Vec<(usize, f64)> {
    let threshold = s.min_snr / sc.to_snr;
    let coarse_thr = threshold * (1.0 - 2.0 * loss);
    let m_len = z.len();
    let lo = (s.valid_start / dec).saturating_sub(1).max(1);
    let hi = (s.valid_stop.div_ceil(dec) + 1).min(m_len - 1);
    let coarse = find_peaks(z, lo, hi, (coarse_thr * coarse_thr) as f32);
    let survivors = cluster_peaks(&coarse, s.cluster_samples / dec);
    if survivors.is_empty() {
        return Vec::new();
    }
    let centres: Vec<i64> = survivors
        .iter()
        .map(|&i| {
            let j = coarse[i].0;
            ((j as f64 + parabolic_offset(z, j)) * dec as f64).round() as i64
        })
        .collect();
    let probe: Vec<f64> = centres
        .iter()
        .flat_map(|&c| (-2..=2).map(move |o| (c + o) as f64))
        .collect();
    let exact = evaluate_bands(sc.seg, sc.model, sc.k_lo, sc.k_hi, sc.inv_h, sc.norm, &probe, 1);
    let mut refined = Vec::new();
    for (c, vals) in centres.iter().zip(exact.chunks(5)) {
        let mag: Vec<f64> = vals.iter().map(|b| b[0].norm() * sc.to_snr).collect();
        let best = (1..4)
            .max_by(|&a, &b| mag[a].total_cmp(&mag[b]).then(b.cmp(&a)))
            .unwrap_or(2);
        let j = c + best as i64 - 2;
        let is_peak = mag[best] > mag[best - 1] && mag[best] >= mag[best + 1];
        if !is_peak
            || mag[best] < s.min_snr
            || j < s.valid_start as i64
            || j >= s.valid_stop as i64
        {
            continue;
        }
        let delta = vertex(mag[best - 1], mag[best], mag[best + 1]);
        let b = mag[best];
        refined.push((j as usize, (b / sc.to_snr).powi(2) as f32, j as f64 + delta));
    }
    refined.sort_by_key(|r| r.0);
    refined.dedup_by_key(|r| r.0);
    let peaks: Vec<(usize, f32)> = refined.iter().map(|r| (r.0, r.1)).collect();
    cluster_peaks(&peaks, s.cluster_samples)
        .into_iter()
        .map(|i| (refined[i].0, refined[i].2))
        .collect()
}

/// Triggers with SNR, phase and chi-squared evaluated exactly at each refined position.
fn triggers_at(
    kept: &[(usize, f64)],
    sc: &Scaled,
    template: usize,
    sigma: f64,
    s: &Settings,
) -> Vec<Trigger> {
    if kept.is_empty() {
        return Vec::new();
    }
    let positions: Vec<f64> = kept.iter().map(|k| k.1).collect();
    let evals = evaluate_bands(
        sc.seg,
        sc.model,
        sc.k_lo,
        sc.k_hi,
        sc.inv_h,
        sc.norm,
        &positions,
        s.chi2_bands,
    );
    kept.iter()
        .zip(evals)
        .map(|(&(index, position), bands)| {
            let (z, chi2) = combine_bands(&bands, sc.to_snr);
            Trigger {
                template,
                index,
                position,
                snr: z.norm(),
                phase: z.arg(),
                sigma,
                chi2,
                chi2_dof: 2 * s.chi2_bands - 2,
            }
        })
        .collect()
}

#[cfg(test)]
mod tests;
