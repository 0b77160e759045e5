//! One segment made ready for every template: the weighted data `q = 4 df d~ / S`
//! and the inverse PSD in rescaled float32, plus the spectral moments that choose
//! each template's decimation.

use crate::error::{ensure, Result};
use crate::grid::inverse_psd_bin;
use crate::fft::KeptScratch;
use crate::spectrum::SegmentChain;
use crate::waveform::{Model, WeightShape};
use num_complex::{Complex32, Complex64};
use rayon::prelude::*;
use std::f64::consts::PI;

/// Bins per chunk of the spectral-moment sums. The weight is taken at the chunk
/// centre (one cube root per chunk); across a chunk `f^(-7/3)` changes by
/// `(7/3) 64 df / f`, 3% at 20 Hz for df = 1/256 Hz and less above, and the moments
/// only choose the decimation, whose loss bound has a factor-4 step between choices.
/// Band edges round to whole chunks, so this assumes `64 df` is small against the
/// band (segments of tens of seconds): at df = 0.5 Hz a chunk spans 32 Hz and a band
/// from 20 Hz would borrow weight from below it. Preparing a whole segment, table
/// included, took 42.7 ms for 2^19 bins on one loaded thread (`segment` bench; the
/// table's share was not separated).
pub(crate) const MOMENT_CHUNK: usize = 64;

/// Largest decimation of the coarse SNR series.
pub const MAX_DECIMATION: usize = 64;

/// Largest fractional SNR loss between coarse samples that decimation may cause.
///
/// For a template whose weight `|h~|^2 / S` has frequency variance `sigma_f^2`, the
/// normalised SNR of a matching signal a time `dt` off its peak is at least
/// `1 - (2 pi sigma_f dt)^2 / 2` (since `cos x >= 1 - x^2 / 2`), and a coarse sample
/// is at most `D / 2` samples off. The coarse threshold is lowered by twice that.
pub const MAX_DECIMATION_LOSS: f64 = 0.02;

/// One segment, prepared once and shared by every template.
pub struct Prepared {
    /// `4 df d~_k / S_k / q_scale` (complex float32).
    weighted_data: Vec<Complex32>,
    /// `(1 / S_k) / w_scale`, zero where `S` is infinite.
    inv_psd: Vec<f32>,
    q_scale: f64,
    w_scale: f64,
    df: f64,
    n: usize,
    pub(super) moments: MomentTable,
}

impl Prepared {
    /// `data` is `d~ = rfft(d) dt` on `n_freq` bins, `psd` the (truncated) PSD on
    /// the same grid with `inf` for excluded bins.
    ///
    /// # Errors
    /// Names `psd` if its length differs from `data`'s, if there are fewer than 2
    /// bins, or if it is `inf` at every frequency.
    pub fn new(data: &[Complex64], psd: &[f64], df: f64) -> Result<Self> {
        let n_freq = data.len();
        ensure(n_freq >= 2 && psd.len() == n_freq, "psd", || {
            format!("needs {n_freq} bins, got {}", psd.len())
        })?;
        // Parallel per-bin passes; the maxima are order-independent, so the result
        // does not depend on the thread count.
        let inv = |k: usize| inverse_psd_bin(psd[k]);
        // The largest |q|^2 (one square root at the end, not a hypot per bin).
        let (q2_max, w_max) = (0..n_freq)
            .into_par_iter()
            .map(|k| {
                let i = inv(k);
                ((data[k] * (4.0 * df * i)).norm_sqr(), i)
            })
            .reduce(|| (0.0, 0.0), |a, b| (a.0.max(b.0), a.1.max(b.1)));
        ensure(w_max > 0.0, "psd", || "is inf at every frequency".into())?;
        let q_max = q2_max.sqrt();
        let q_scale = if q_max > 0.0 && q_max.is_finite() { q_max } else { 1.0 };
        let (weighted_data, inv_psd): (Vec<Complex32>, Vec<f32>) = (0..n_freq)
            .into_par_iter()
            .map(|k| {
                let i = inv(k);
                let c = data[k] * (4.0 * df * i / q_scale);
                (Complex32::new(c.re as f32, c.im as f32), (i / w_max) as f32)
            })
            .unzip();
        let moments = MomentTable::new(&inv_psd, df);
        Ok(Prepared {
            weighted_data,
            inv_psd,
            q_scale,
            w_scale: w_max,
            df,
            n: 2 * (n_freq - 1),
            moments,
        })
    }

    /// A segment of strain `x` (even length `N`) sampled at `sample_rate`, with its
    /// PSD on the segment's grid: `d~ = rfft(x) / sample_rate` by a real FFT, then
    /// [`Prepared::new`].
    ///
    /// # Errors
    /// Names `x` for an odd or too short length; otherwise as [`Prepared::new`].
    pub fn from_strain(x: &[f64], psd: &[f64], sample_rate: f64) -> Result<Self> {
        let data = data_transform(x, sample_rate)?;
        Prepared::new(&data.spectrum, psd, sample_rate / x.len() as f64)
    }

    /// [`Prepared::from_strain`] of the segments `x[s..s + len]` for each `s` in
    /// `starts`, with PSD row `i` of `psds` (`len / 2 + 1` bins a row; a single
    /// row serves every segment), segments in parallel.
    ///
    /// # Errors
    /// Names `starts` if a segment runs past the end of `x`, `psds` if it holds
    /// neither one row nor one per segment.
    pub fn from_strain_segments(
        x: &[f64],
        starts: &[usize],
        len: usize,
        psds: &[f64],
        sample_rate: f64,
    ) -> Result<Vec<Self>> {
        let n_freq = len / 2 + 1;
        let rows = psds.len() / n_freq.max(1);
        ensure(
            psds.len() % n_freq.max(1) == 0 && (rows == 1 || rows == starts.len()),
            "psds",
            || format!("needs 1 or {} rows of {n_freq} bins, got {} values", starts.len(), psds.len()),
        )?;
        if let Some(&s) = starts.iter().find(|&&s| s + len > x.len()) {
            return Err(crate::Error::invalid(
                "starts",
                format!("segment [{s}, {}) runs past the {} samples", s + len, x.len()),
            ));
        }
        starts
            .par_iter()
            .enumerate()
            .map(|(i, &s)| {
                let row = if rows == 1 { 0 } else { i };
                Prepared::from_strain(&x[s..s + len], &psds[row * n_freq..(row + 1) * n_freq], sample_rate)
            })
            .collect()
    }

    /// [`Prepared::from_strain_segments`] with each segment's PSD estimated by
    /// `chain` from the block `blocks[b..b + block_len]` for each `b` in
    /// `block_starts` (one per segment). Per segment, the chain and the data
    /// transform run side by side on the pool; segments run in parallel. Equal,
    /// bit for bit, to [`SegmentChain::psds`] followed by
    /// [`Prepared::from_strain_segments`].
    ///
    /// # Errors
    /// Names `block_starts` if it does not hold one start per segment or a block
    /// runs past the end of `blocks`, `starts` if a segment runs past the end of
    /// `x`, `n_freq` if the chain's grid is not the segments'; otherwise as
    /// [`SegmentChain::psd`] (the first failing segment's error) and
    /// [`Prepared::from_strain`].
    #[allow(clippy::too_many_arguments)]
    pub fn from_strain_estimated(
        x: &[f64],
        starts: &[usize],
        len: usize,
        blocks: &[f64],
        block_starts: &[usize],
        block_len: usize,
        chain: &SegmentChain<'_>,
    ) -> Result<Vec<Self>> {
        ensure(block_starts.len() == starts.len(), "block_starts", || {
            format!("needs one start per segment ({}), got {}", starts.len(), block_starts.len())
        })?;
        ensure(chain.n_freq == len / 2 + 1, "n_freq", || {
            format!("the chain's grid has {} bins, the segments' {}", chain.n_freq, len / 2 + 1)
        })?;
        ensure(len >= 4 && len % 2 == 0, "x", || {
            format!("a segment needs an even number of samples (at least 4), got {len}")
        })?;
        if let Some(&s) = starts.iter().find(|&&s| s + len > x.len()) {
            return Err(crate::Error::invalid(
                "starts",
                format!("segment [{s}, {}) runs past the {} samples", s + len, x.len()),
            ));
        }
        if let Some(&b) = block_starts.iter().find(|&&b| b + block_len > blocks.len()) {
            return Err(crate::Error::invalid(
                "block_starts",
                format!("block [{b}, {}) runs past the {} samples", b + block_len, blocks.len()),
            ));
        }
        let sample_rate = chain.sample_rate;
        let df = sample_rate / len as f64;
        // Collected per segment, then the first error in segment order: which error
        // is reported must not depend on the thread count.
        let each: Vec<Result<Self>> = starts
            .par_iter()
            .zip(block_starts)
            .map(|(&s, &b)| {
                let (psd, data) = rayon::join(
                    || chain.psd(&blocks[b..b + block_len]),
                    || data_transform(&x[s..s + len], sample_rate),
                );
                let psd = psd?;
                ensure(!psd.iter().any(|p| p.is_nan()), "x", || {
                    "the PSD is undefined (values too large for float64)".into()
                })?;
                Prepared::new(&data?.spectrum, &psd, df)
            })
            .collect();
        each.into_iter().collect()
    }

    /// Frequency bins `n_freq = N / 2 + 1`.
    pub fn n_freq(&self) -> usize {
        self.weighted_data.len()
    }
    /// Samples `N` of the segment.
    pub fn n(&self) -> usize {
        self.n
    }
    /// Bin spacing, Hz.
    pub fn df(&self) -> f64 {
        self.df
    }
    /// `q_k / q_scale`.
    pub fn weighted_data(&self) -> &[Complex32] {
        &self.weighted_data
    }
    /// `(1 / S_k) / w_scale`.
    pub fn inv_psd(&self) -> &[f32] {
        &self.inv_psd
    }
    /// The factor taking [`Self::weighted_data`] back to `4 df d~ / S`.
    pub fn q_scale(&self) -> f64 {
        self.q_scale
    }
    /// The factor taking [`Self::inv_psd`] back to `1 / S`.
    pub fn w_scale(&self) -> f64 {
        self.w_scale
    }

    /// Variance (Hz^2) of frequency under `model`'s weight `|h~|^2 / S` over
    /// `[k_lo, k_hi)` (band edges rounded to whole moment chunks).
    pub fn frequency_variance(&self, model: &Model, k_lo: usize, k_hi: usize) -> f64 {
        let m = self.moments.sums(model, k_lo, k_hi, self.df);
        if m[0] > 0.0 {
            (m[2] / m[0] - (m[1] / m[0]).powi(2)).max(0.0)
        } else {
            0.0
        }
    }

    /// Largest power-of-two decimation `D` (dividing N) whose worst-case loss
    /// `(pi sigma_f D / fs)^2 / 2` stays below [`MAX_DECIMATION_LOSS`], and that loss.
    pub fn decimation(&self, model: &Model, k_lo: usize, k_hi: usize) -> (usize, f64) {
        let fs = self.n as f64 * self.df;
        let sigma_f = self.frequency_variance(model, k_lo, k_hi).sqrt();
        let loss = |d: usize| 0.5 * (PI * sigma_f * d as f64 / fs).powi(2);
        let mut d = 1usize;
        while d < MAX_DECIMATION
            && self.n % (2 * d) == 0
            && self.n / (2 * d) >= 64
            && loss(2 * d) <= MAX_DECIMATION_LOSS
        {
            d *= 2;
        }
        (d, loss(d))
    }
}

/// `d~ = rfft(x) / sample_rate` by one float64 real transform (serial), left in the
/// returned scratch's `spectrum`; the copy in and the scaling run on the pool, each
/// value from its own sample or bin.
///
/// # Errors
/// Names `x` for an odd or too short length.
pub fn data_transform(x: &[f64], sample_rate: f64) -> Result<KeptScratch<f64>> {
    const CHUNK: usize = 1 << 14;
    let n = x.len();
    ensure(n >= 4 && n % 2 == 0, "x", || {
        format!("a segment needs an even number of samples (at least 4), got {n}")
    })?;
    let mut fft = KeptScratch::<f64>::take(n);
    fft.time
        .par_chunks_mut(CHUNK)
        .zip(x.par_chunks(CHUNK))
        .for_each(|(t, x)| t.copy_from_slice(x));
    fft.rfft();
    fft.spectrum
        .par_chunks_mut(CHUNK)
        .for_each(|c| c.iter_mut().for_each(|c| *c /= sample_rate));
    Ok(fft)
}

/// Per-chunk sums `sum w_k f_k^m`, m = 0, 1, 2, of the inverse PSD, and the
/// Newtonian weight `f^(-7/3)` at each chunk centre.
///
/// A template's moments are summed over its band's chunks directly rather than
/// from prefix sums: a prefix sum would carry the weight of every chunk below the
/// band, and where `1/S` is large near DC the band's share can fall below the
/// prefix's round-off.
pub(super) struct MomentTable {
    n_freq: usize,
    /// `[sum w, sum w f, sum w f^2]` per chunk of `MOMENT_CHUNK` bins (DC excluded).
    chunks: Vec<[f64; 3]>,
    /// `fc^(-7/3)` at each chunk centre `fc` (zero at `fc = 0`).
    newtonian: Vec<f64>,
}

impl MomentTable {
    fn new(w: &[f32], df: f64) -> Self {
        let n_freq = w.len();
        let count = n_freq.div_ceil(MOMENT_CHUNK);
        let chunks: Vec<[f64; 3]> = (0..count)
            .into_par_iter()
            .map(|c| {
                let (lo, hi) = (c * MOMENT_CHUNK, ((c + 1) * MOMENT_CHUNK).min(n_freq));
                let mut m = [0.0; 3];
                for (k, &wk) in w.iter().enumerate().take(hi).skip(lo.max(1)) {
                    let f = k as f64 * df;
                    let b = wk as f64;
                    m[0] += b;
                    m[1] += b * f;
                    m[2] += b * f * f;
                }
                m
            })
            .collect();
        let newtonian = (0..count)
            .map(|c| {
                let fc = chunk_centre(c, n_freq, df);
                if fc > 0.0 {
                    1.0 / (fc * fc * fc.cbrt())
                } else {
                    0.0
                }
            })
            .collect();
        MomentTable {
            n_freq,
            chunks,
            newtonian,
        }
    }

    /// `[sum W, sum W f, sum W f^2]` over the chunks covering `[k_lo, k_hi)`, with
    /// `W_k = |h~(f_c)|^2 w_k` up to a constant factor, `f_c` the chunk centre.
    fn sums(&self, model: &Model, k_lo: usize, k_hi: usize, df: f64) -> [f64; 3] {
        self.sums_as(model.weight_shape(), model, k_lo, k_hi, df)
    }

    /// [`Self::sums`] with the weight taken as `shape` whatever the model says.
    pub(super) fn sums_as(
        &self,
        shape: WeightShape,
        model: &Model,
        k_lo: usize,
        k_hi: usize,
        df: f64,
    ) -> [f64; 3] {
        let (c_lo, c_hi) = (k_lo / MOMENT_CHUNK, k_hi.div_ceil(MOMENT_CHUNK));
        let mut m = [0.0; 3];
        for c in c_lo..c_hi {
            let weight = match shape {
                WeightShape::Newtonian => self.newtonian[c],
                WeightShape::General => {
                    let fc = chunk_centre(c, self.n_freq, df);
                    let a = if fc > 0.0 { model.amplitude(fc) } else { 0.0 };
                    a * a
                }
            };
            for i in 0..3 {
                m[i] += weight * self.chunks[c][i];
            }
        }
        m
    }
}

/// Centre frequency of chunk `c` (Hz).
fn chunk_centre(c: usize, n_freq: usize, df: f64) -> f64 {
    let (lo, hi) = (c * MOMENT_CHUNK, ((c + 1) * MOMENT_CHUNK).min(n_freq));
    0.5 * (lo + hi - 1) as f64 * df
}
