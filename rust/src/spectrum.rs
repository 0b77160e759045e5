//! Noise spectra: Welch PSD estimation, analytic design curves, resampling onto a
//! filter's frequency grid, inverse spectrum truncation and whitening.
//!
//! PSDs of real strain are ~1e-47 / Hz, below float32's smallest normal number, so
//! every spectrum here is float64.

use crate::error::{ensure, Error, Result};
use crate::fft::{KeptScratch, RealScratch};
use crate::grid::bin_at_or_above;
use rayon::prelude::*;

/// How periodograms of the Welch segments are combined.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Average {
    /// Mean over segments.
    Mean,
    /// Median divided by its bias for exponentially distributed bins.
    Median,
}

impl Average {
    /// `"mean"` or `"median"`.
    ///
    /// # Errors
    /// Names `average` for any other name.
    pub fn from_name(name: &str) -> Result<Self> {
        match name {
            "mean" => Ok(Average::Mean),
            "median" => Ok(Average::Median),
            _ => Err(Error::invalid(
                "average",
                format!("must be 'median' or 'mean', got {name:?}"),
            )),
        }
    }
}

/// Expected median of `n` unit-mean exponential variables, as used by scipy:
/// `1 + sum_{i=1}^{(n-1)/2} (1/(2i+1) - 1/(2i))`. For odd `n` this is the exact
/// alternating harmonic sum; for even `n` (median = mean of the two middle values)
/// the exact value is the one for `n - 1`, which the same expression gives.
pub fn median_bias(n: usize) -> f64 {
    let half = n.saturating_sub(1) / 2;
    let mut b = 1.0;
    for i in 1..=half {
        let ii = 2.0 * i as f64;
        b += 1.0 / (ii + 1.0) - 1.0 / ii;
    }
    b
}

/// One-sided Welch PSD of `x`: periodograms of segments of `window.len()` samples
/// stepping by `step`, scaled to a density in 1/Hz and combined by `average`.
pub fn welch(
    x: &[f64],
    sample_rate: f64,
    step: usize,
    window: &[f64],
    detrend: bool,
    average: Average,
) -> Result<Vec<f64>> {
    let nperseg = window.len();
    ensure(nperseg >= 2, "segment_duration", || {
        format!("a segment must hold at least 2 samples, got {nperseg}")
    })?;
    ensure(x.len() >= nperseg, "x", || {
        format!(
            "{} samples are fewer than one segment of {nperseg}",
            x.len()
        )
    })?;
    ensure(step >= 1, "overlap", || {
        "segments must advance by at least one sample".into()
    })?;
    let n_seg = (x.len() - nperseg) / step + 1;
    let n_freq = nperseg / 2 + 1;
    let wsum2: f64 = window.iter().map(|w| w * w).sum();
    ensure(wsum2 > 0.0, "window", || {
        "window is identically zero".into()
    })?;
    let scale = 1.0 / (sample_rate * wsum2);

    // One periodogram per segment, row-major (segment, frequency).
    let mut grams = vec![0.0f64; n_seg * n_freq];
    let pool = crate::scratch::Pool::new(|| RealScratch::<f64>::new(nperseg));
    grams.par_chunks_mut(n_freq).enumerate().for_each_init(
        || pool.take(),
        |fft, (s, row)| {
            let seg = &x[s * step..s * step + nperseg];
            let mean = if detrend {
                seg.iter().sum::<f64>() / nperseg as f64
            } else {
                0.0
            };
            for ((t, &v), &w) in fft.time.iter_mut().zip(seg).zip(window) {
                *t = (v - mean) * w;
            }
            fft.rfft();
            for (k, (p, c)) in row.iter_mut().zip(&fft.spectrum).enumerate() {
                let one_sided = if k == 0 || (nperseg % 2 == 0 && k == n_freq - 1) {
                    1.0
                } else {
                    2.0
                };
                *p = c.norm_sqr() * scale * one_sided;
            }
        },
    );

    let mut psd = vec![0.0f64; n_freq];
    match average {
        Average::Mean => {
            for row in grams.chunks(n_freq) {
                for (p, g) in psd.iter_mut().zip(row) {
                    *p += g;
                }
            }
            psd.iter_mut().for_each(|p| *p /= n_seg as f64);
        }
        Average::Median => {
            // Columns are gathered a block of bins at a time (each row contributes one
            // contiguous run), so the gather reads whole cache lines instead of one
            // value per row stride; selection runs on integer keys in f64::total_cmp's
            // order.
            let bias = median_bias(n_seg);
            psd.par_chunks_mut(MEDIAN_BLOCK).enumerate().for_each_init(
                || vec![0i64; MEDIAN_BLOCK * n_seg],
                |columns, (b, out)| {
                    let (k0, width) = (b * MEDIAN_BLOCK, out.len());
                    for (s, row) in grams.chunks_exact(n_freq).enumerate() {
                        for (i, &g) in row[k0..k0 + width].iter().enumerate() {
                            columns[i * n_seg + s] = total_order_key(g);
                        }
                    }
                    for (p, column) in out.iter_mut().zip(columns.chunks_exact_mut(n_seg)) {
                        *p = median_of_keys(column) / bias;
                    }
                },
            );
        }
    }
    Ok(psd)
}

/// Bins per block of the median's column gather.
const MEDIAN_BLOCK: usize = 64;

/// An integer whose order is `f64::total_cmp`'s order of `x` (the same bit trick).
#[inline]
fn total_order_key(x: f64) -> i64 {
    let b = x.to_bits() as i64;
    b ^ (((b >> 63) as u64) >> 1) as i64
}

/// The f64 whose [`total_order_key`] is `k`.
#[inline]
fn from_total_order_key(k: i64) -> f64 {
    f64::from_bits((k ^ (((k >> 63) as u64) >> 1) as i64) as u64)
}

/// Median of values given by their [`total_order_key`]s, mean of the two middle
/// ones for an even count.
fn median_of_keys(v: &mut [i64]) -> f64 {
    let n = v.len();
    let mid = n / 2;
    let (_, &mut upper, _) = v.select_nth_unstable(mid);
    let upper = from_total_order_key(upper);
    if n % 2 == 1 {
        upper
    } else {
        let lower = v[..mid].iter().copied().max().map_or(f64::NEG_INFINITY, from_total_order_key);
        0.5 * (lower + upper)
    }
}

/// Published analytic fits to design sensitivities of ground-based interferometers.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum DesignCurve {
    Gen1FourKm,
    Gen1ThreeKm,
    Gen1SixHundredM,
    Gen1ThreeHundredM,
    Gen2Early,
    Gen2ZeroDetuned,
}

impl DesignCurve {
    /// The names [`DesignCurve::from_name`] accepts, in declaration order.
    pub const NAMES: [&'static str; 6] = [
        "gen1-4km",
        "gen1-3km",
        "gen1-600m",
        "gen1-300m",
        "gen2-early",
        "gen2-zero-detuned",
    ];

    /// The curve called `name`.
    ///
    /// # Errors
    /// Names `curve` for an unknown name.
    pub fn from_name(name: &str) -> Result<Self> {
        Ok(match name {
            "gen1-4km" => DesignCurve::Gen1FourKm,
            "gen1-3km" => DesignCurve::Gen1ThreeKm,
            "gen1-600m" => DesignCurve::Gen1SixHundredM,
            "gen1-300m" => DesignCurve::Gen1ThreeHundredM,
            "gen2-early" => DesignCurve::Gen2Early,
            "gen2-zero-detuned" => DesignCurve::Gen2ZeroDetuned,
            _ => {
                return Err(Error::invalid(
                    "curve",
                    format!(
                        "unknown curve {name:?}; choose one of {}",
                        Self::NAMES.join(", ")
                    ),
                ))
            }
        })
    }

    /// Lowest frequency (Hz) at which the fit is used; below it the PSD is `inf`.
    pub fn f_min(self) -> f64 {
        match self {
            DesignCurve::Gen1FourKm | DesignCurve::Gen1SixHundredM => 30.0,
            DesignCurve::Gen1ThreeKm | DesignCurve::Gen2Early | DesignCurve::Gen2ZeroDetuned => {
                10.0
            }
            DesignCurve::Gen1ThreeHundredM => 50.0,
        }
    }

    /// One-sided PSD in 1/Hz at frequency `f` (Hz); `inf` where the fit overflows
    /// (every fit grows without bound at high frequency).
    pub fn psd(self, f: f64) -> f64 {
        if !(f >= self.f_min()) || !f.is_finite() {
            return f64::INFINITY;
        }
        let s = self.fit(f);
        if s.is_nan() {
            f64::INFINITY
        } else {
            s
        }
    }

    fn fit(self, f: f64) -> f64 {
        match self {
            DesignCurve::Gen1FourKm => {
                let x = f / 150.0;
                9e-46 * ((4.49 * x).powf(-56.0) + 0.16 * x.powf(-4.52) + 0.52 + 0.32 * x * x)
            }
            DesignCurve::Gen1ThreeKm => {
                let x = f / 500.0;
                3.2e-46 * ((7.87 * x).powf(-4.8) + 6.0 / 17.0 / x + 1.0 + x * x)
            }
            DesignCurve::Gen1SixHundredM => {
                let x = f / 150.0;
                let x2 = x * x;
                1e-46
                    * ((3.4 * x).powf(-30.0)
                        + 34.0 / x
                        + 20.0 * (1.0 - x2 + 0.5 * x2 * x2) / (1.0 + 0.5 * x2))
            }
            DesignCurve::Gen1ThreeHundredM => {
                let x = f / 400.0;
                7.5e-46 * (x.powi(-5) + 13.0 / x + 9.0 * (1.0 + x * x))
            }
            DesignCurve::Gen2Early => {
                let x = f / 215.0;
                let x2 = x * x;
                1e-49
                    * (x.powf(-4.14) - 5.0 / x2
                        + 111.0 * (1.0 - x2 + 0.5 * x2 * x2) / (1.0 + 0.5 * x2))
            }
            DesignCurve::Gen2ZeroDetuned => {
                let x = f / 245.4;
                1e-48
                    * (0.0152 * x.powi(-4) + 0.2935 * x.powf(2.25) + 2.7951 * x.powf(1.5)
                        - 6.5080 * x.powf(0.75)
                        + 17.7622)
            }
        }
    }
}

/// The design curve called `curve` at each of `freqs` (Hz).
///
/// # Errors
/// Names `curve` for an unknown name.
pub fn design_psd(curve: &str, freqs: &[f64]) -> Result<Vec<f64>> {
    let c = DesignCurve::from_name(curve)?;
    Ok(freqs.iter().map(|&f| c.psd(f)).collect())
}

/// Bins per job of the per-bin passes over a segment's grid (whole cache pages, and
/// few enough jobs that scheduling costs nothing next to the work).
const GRID_CHUNK: usize = 1 << 14;

/// Linear interpolation of `(freqs, psd)` onto `k * df`, `k < n_freq`; `inf` outside
/// the input range or next to an `inf` sample. `freqs` must increase strictly.
/// Bins are filled in parallel chunks; each value depends on its own bin only.
///
/// # Panics
/// If `freqs` is empty or shorter than `psd`.
pub fn psd_to_grid(freqs: &[f64], psd: &[f64], df: f64, n_freq: usize) -> Vec<f64> {
    let mut out = vec![f64::INFINITY; n_freq];
    out.par_chunks_mut(GRID_CHUNK)
        .enumerate()
        .for_each(|(c, chunk)| grid_chunk(freqs, psd, df, c * GRID_CHUNK, chunk));
    out
}

/// Bins `k0..k0 + out.len()` of [`psd_to_grid`] into `out` (every bin written).
fn grid_chunk(freqs: &[f64], psd: &[f64], df: f64, k0: usize, out: &mut [f64]) {
    let last = freqs.len() - 1;
    // The last node at or below the chunk's first frequency, where a walk from bin 0
    // would stand on reaching it.
    let mut i = freqs
        .partition_point(|&f| f <= k0 as f64 * df)
        .saturating_sub(1)
        .min(last);
    for (j, o) in out.iter_mut().enumerate() {
        *o = f64::INFINITY;
        let f = (k0 + j) as f64 * df;
        if f < freqs[0] || f > freqs[last] {
            continue;
        }
        while i < last && freqs[i + 1] <= f {
            i += 1;
        }
        if freqs[i] == f {
            *o = psd[i];
            continue;
        }
        let (a, b) = (psd[i], psd[i + 1]);
        if a.is_finite() && b.is_finite() {
            let w = (f - freqs[i]) / (freqs[i + 1] - freqs[i]);
            *o = a + w * (b - a);
        }
    }
}

/// Inverse spectrum truncation (Allen et al. 2012, arXiv:gr-qc/0509116): limit the
/// impulse response of `1/sqrt(psd)` to `max_len` samples, so whitening corrupts
/// at most `max_len / 2` samples at each end of a segment.
///
/// Two full-length float64 real transforms (serial); the per-bin and per-sample
/// passes around them run on the pool, each value from its own bin or sample only.
pub fn truncate_inverse_psd(psd: &[f64], max_len: usize, df: f64, f_low: f64) -> Vec<f64> {
    truncate_inverse_psd_of(psd.len(), max_len, df, f_low, |k0, out| {
        out.copy_from_slice(&psd[k0..k0 + out.len()])
    })
}

/// [`truncate_inverse_psd`] of the PSD whose bins `k0..k0 + out.len()` the call
/// `psd(k0, out)` writes into `out` (chunks of at most `GRID_CHUNK` bins, in
/// parallel), so a PSD made on the fly (resampled) is never stored whole.
fn truncate_inverse_psd_of<F>(n_freq: usize, max_len: usize, df: f64, f_low: f64, psd: F) -> Vec<f64>
where
    F: Fn(usize, &mut [f64]) + Sync,
{
    let n = 2 * (n_freq - 1);
    let k_low = bin_at_or_above(f_low, df);
    let mut fft = KeptScratch::<f64>::take(n);
    fft.spectrum
        .par_chunks_mut(GRID_CHUNK)
        .enumerate()
        .for_each_init(
            || vec![0.0f64; GRID_CHUNK],
            |values, (c, out)| {
                let values = &mut values[..out.len()];
                psd(c * GRID_CHUNK, values);
                for (j, (o, &s)) in out.iter_mut().zip(values.iter()).enumerate() {
                    let r = if c * GRID_CHUNK + j >= k_low && s.is_finite() {
                        1.0 / s.sqrt()
                    } else {
                        0.0
                    };
                    *o = num_complex::Complex::new(r, 0.0);
                }
            },
        );
    fft.irfft();
    let half = (max_len / 2).min(n / 2);
    let inv_n = 1.0 / n as f64;
    fft.time[..half].iter_mut().for_each(|q| *q *= inv_n);
    fft.time[n - half..].iter_mut().for_each(|q| *q *= inv_n);
    fft.time[half..n - half]
        .par_chunks_mut(GRID_CHUNK)
        .for_each(|z| z.fill(0.0));
    fft.rfft();
    fft.spectrum
        .par_iter()
        .enumerate()
        .map(|(k, c)| {
            let r2 = c.norm_sqr();
            if k < k_low || r2 == 0.0 {
                f64::INFINITY
            } else {
                1.0 / r2
            }
        })
        .collect()
}

/// [`truncate_inverse_psd`] of each row of `psd` (`n_freq` bins a row), rows in parallel.
pub fn truncate_inverse_psd_rows(
    psd: &[f64],
    n_freq: usize,
    max_len: usize,
    df: f64,
    f_low: f64,
) -> Vec<f64> {
    let rows: Vec<Vec<f64>> = psd
        .par_chunks(n_freq.max(1))
        .map(|row| truncate_inverse_psd(row, max_len, df, f_low))
        .collect();
    rows.concat()
}

/// The spectrum chain of analysis segments, from strain to the PSD the filters
/// use: Welch (median average) of each data block, linear resampling onto the
/// segment's grid, inverse spectrum truncation.
#[derive(Clone, Debug)]
pub struct SegmentChain<'a> {
    /// Sampling rate, Hz.
    pub sample_rate: f64,
    /// Welch taper, one value per sample of a Welch segment.
    pub window: &'a [f64],
    /// Samples between Welch segments.
    pub step: usize,
    /// Bins of the analysis segment's grid, `N / 2 + 1`.
    pub n_freq: usize,
    /// Samples kept of the inverse PSD's impulse response.
    pub max_len: usize,
    /// Bins below this frequency (Hz) are excluded.
    pub f_low: f64,
}

impl SegmentChain<'_> {
    /// The truncated PSD (`n_freq` bins, `inf` where excluded) of one block.
    ///
    /// # Errors
    /// As [`welch`] for a block shorter than the window; names `x` when the median
    /// estimate is not positive at every frequency (more than half the block's
    /// Welch segments are zero, e.g. gated or blank data), where truncation would
    /// divide by zero.
    pub fn psd(&self, block: &[f64]) -> Result<Vec<f64>> {
        let nperseg = self.window.len();
        let estimate = welch(block, self.sample_rate, self.step, self.window, false, Average::Median)?;
        ensure(estimate.iter().all(|&p| p > 0.0), "x", || {
            "the median PSD estimate is zero at some frequency (more than half the Welch segments are zero)".into()
        })?;
        let spacing = self.sample_rate / nperseg as f64;
        let freqs: Vec<f64> = (0..estimate.len()).map(|k| k as f64 * spacing).collect();
        let df = self.sample_rate / (2 * (self.n_freq - 1)) as f64;
        // psd_to_grid and truncate_inverse_psd, the grid made chunk by chunk as the
        // truncation reads it (the same values, never stored whole)
        Ok(truncate_inverse_psd_of(self.n_freq, self.max_len, df, self.f_low, |k0, out| {
            grid_chunk(&freqs, &estimate, df, k0, out)
        }))
    }

    /// [`Self::psd`] of the blocks `x[s..s + block_len]` for each `s` in `starts`,
    /// blocks in parallel, rows concatenated.
    ///
    /// # Errors
    /// Names `starts` if a block runs past the end of `x`; otherwise as [`Self::psd`].
    pub fn psds(&self, x: &[f64], starts: &[usize], block_len: usize) -> Result<Vec<f64>> {
        if let Some(&s) = starts.iter().find(|&&s| s + block_len > x.len()) {
            return Err(Error::invalid(
                "starts",
                format!("block [{s}, {}) runs past the {} samples", s + block_len, x.len()),
            ));
        }
        let rows: Result<Vec<Vec<f64>>> = starts
            .par_iter()
            .map(|&s| self.psd(&x[s..s + block_len]))
            .collect();
        Ok(rows?.concat())
    }
}

/// Whiten one channel: `irfft(rfft(x) * sqrt(2 / (S fs)))`, zero at DC, below
/// `f_low` and where `S` is `inf`. Gaussian noise of PSD `S` comes out with unit variance.
pub fn whiten_into(
    x: &[f64],
    psd: &[f64],
    sample_rate: f64,
    f_low: f64,
    fft: &mut RealScratch<f64>,
    out: &mut [f64],
) {
    let n = x.len();
    let df = sample_rate / n as f64;
    let k_low = bin_at_or_above(f_low, df).max(1);
    fft.time.copy_from_slice(x);
    fft.rfft();
    let inv_n = 1.0 / n as f64;
    for (k, c) in fft.spectrum.iter_mut().enumerate() {
        let s = psd[k];
        let g = if k >= k_low && s.is_finite() {
            (2.0 / (s * sample_rate)).sqrt() * inv_n
        } else {
            0.0
        };
        *c *= g;
    }
    fft.irfft();
    out.copy_from_slice(&fft.time);
}

/// [`welch`] of each row of `x` (row-major, `n` samples a row), rows in parallel;
/// the PSDs come back concatenated.
pub fn welch_channels(
    x: &[f64],
    n: usize,
    sample_rate: f64,
    step: usize,
    window: &[f64],
    detrend: bool,
    average: Average,
) -> Result<Vec<f64>> {
    let rows: Result<Vec<Vec<f64>>> = x
        .par_chunks(n.max(1))
        .map(|row| welch(row, sample_rate, step, window, detrend, average))
        .collect();
    Ok(rows?.concat())
}

/// [`whiten_into`] for each row of `x` (`n` samples a row) with the matching row of
/// `psd` (`n_freq` bins a row; a single row serves every channel), rows in parallel.
pub fn whiten_channels(
    x: &[f64],
    n: usize,
    psd: &[f64],
    n_freq: usize,
    sample_rate: f64,
    f_low: f64,
) -> Vec<f64> {
    let per_channel = psd.len() > n_freq;
    let mut out = vec![0.0f64; x.len()];
    let pool = crate::scratch::Pool::new(|| RealScratch::<f64>::new(n));
    out.par_chunks_mut(n)
        .zip(x.par_chunks(n))
        .enumerate()
        .for_each_init(
            || pool.take(),
            |fft, (c, (o, row))| {
                let p = if per_channel {
                    &psd[c * n_freq..(c + 1) * n_freq]
                } else {
                    &psd[..n_freq]
                };
                whiten_into(row, p, sample_rate, f_low, fft, o);
            },
        );
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn median_bias_matches_published_values() {
        // Exact E[median] of N unit exponentials (order statistics): shared REFERENCES item 8.
        let table = [
            (1, 1.0),
            (3, 0.833333),
            (5, 0.783333),
            (7, 0.759524),
            (9, 0.745635),
            (11, 0.736544),
        ];
        for (n, b) in table {
            assert!((median_bias(n) - b).abs() < 1e-6, "n={n}");
        }
        assert!((median_bias(4) - 0.833333).abs() < 1e-6);
        assert!((median_bias(100001) - std::f64::consts::LN_2).abs() < 1e-5);
    }

    #[test]
    fn welch_of_white_noise_is_flat() {
        // White noise of variance s^2 sampled at fs has one-sided PSD 2 s^2 / fs (common practice).
        let fs = 256.0;
        let mut state = 12345u64;
        let x: Vec<f64> = (0..65536)
            .map(|_| {
                // Sum of 12 uniforms minus 6: approximately unit Gaussian.
                (0..12)
                    .map(|_| {
                        state = state
                            .wrapping_mul(6364136223846793005)
                            .wrapping_add(1442695040888963407);
                        (state >> 11) as f64 / (1u64 << 53) as f64
                    })
                    .sum::<f64>()
                    - 6.0
            })
            .collect();
        let window: Vec<f64> = (0..256)
            .map(|i| 0.5 - 0.5 * (2.0 * std::f64::consts::PI * i as f64 / 256.0).cos())
            .collect();
        let psd = welch(&x, fs, 128, &window, false, Average::Mean).unwrap();
        let mid: f64 = psd[10..120].iter().sum::<f64>() / 110.0;
        assert!((mid / (2.0 / fs) - 1.0).abs() < 0.03, "{mid}");
    }

    /// Uniform draws in [0, 1) from a 64-bit LCG (Knuth's MMIX constants).
    fn uniforms(seed: u64, n: usize) -> Vec<f64> {
        let mut state = seed;
        (0..n)
            .map(|_| {
                state = state.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
                (state >> 11) as f64 / (1u64 << 53) as f64
            })
            .collect()
    }

    #[test]
    fn median_of_keys_is_the_sorted_middle() {
        // The median of a sorted list (common practice): the middle value, or the mean
        // of the two middle values for an even count.
        for n in [1usize, 2, 3, 4, 7, 8, 127, 128] {
            for seed in 0..5u64 {
                let mut v: Vec<f64> = uniforms(seed * 131 + n as u64, n)
                    .iter()
                    .map(|u| if *u < 0.2 { 0.0 } else { (u * 8.0).floor() * 1e-45 })
                    .collect();
                let mut keys: Vec<i64> = v.iter().map(|&x| total_order_key(x)).collect();
                v.sort_by(f64::total_cmp);
                let expected = if n % 2 == 1 { v[n / 2] } else { 0.5 * (v[n / 2 - 1] + v[n / 2]) };
                assert_eq!(median_of_keys(&mut keys), expected, "n={n} seed={seed}");
            }
        }
        for x in [0.0, -0.0, 1e-300, 5e-324, 1.0, -2.5, f64::INFINITY, f64::NEG_INFINITY] {
            assert_eq!(from_total_order_key(total_order_key(x)).to_bits(), x.to_bits());
        }
        let mut xs = [3.0, -1.0, 0.0, -0.0, f64::INFINITY, 1e-310];
        let mut keys: Vec<i64> = xs.iter().map(|&x| total_order_key(x)).collect();
        keys.sort();
        xs.sort_by(f64::total_cmp);
        let back: Vec<u64> = keys.iter().map(|&k| from_total_order_key(k).to_bits()).collect();
        assert_eq!(back, xs.iter().map(|x| x.to_bits()).collect::<Vec<_>>());
    }

    #[test]
    fn psd_to_grid_in_chunks_equals_one_walk() {
        // The parallel chunks start where a single walk from bin 0 would stand: compare
        // with that walk (linear interpolation, written out) across chunk boundaries,
        // on irregular nodes some of which fall on bins.
        let df = 0.25;
        let n_freq = 3 * GRID_CHUNK + 17;
        let mut freqs = vec![3.0];
        for (i, u) in uniforms(7, 4000).iter().enumerate() {
            let step = if i % 3 == 0 { 0.25 * (1.0 + (u * 8.0).floor()) } else { 0.1 + 7.0 * u };
            freqs.push(freqs.last().unwrap() + step);
        }
        let mut psd: Vec<f64> = uniforms(8, freqs.len()).iter().map(|u| 1e-46 * (0.5 + u)).collect();
        psd[100] = f64::INFINITY;
        let got = psd_to_grid(&freqs, &psd, df, n_freq);
        let last = freqs.len() - 1;
        let mut i = 0usize;
        for (k, &g) in got.iter().enumerate() {
            let f = k as f64 * df;
            let expected = if f < freqs[0] || f > freqs[last] {
                f64::INFINITY
            } else {
                while i < last && freqs[i + 1] <= f {
                    i += 1;
                }
                if freqs[i] == f {
                    psd[i]
                } else if psd[i].is_finite() && psd[i + 1].is_finite() {
                    let w = (f - freqs[i]) / (freqs[i + 1] - freqs[i]);
                    psd[i] + w * (psd[i + 1] - psd[i])
                } else {
                    f64::INFINITY
                }
            };
            assert_eq!(g.to_bits(), expected.to_bits(), "bin {k}");
        }
        assert!(got[GRID_CHUNK..].iter().any(|g| g.is_finite()));
    }

    #[test]
    fn psd_to_grid_interpolates_and_marks_outside() {
        let f = [1.0, 2.0, 4.0];
        let p = [1.0, 3.0, f64::INFINITY];
        let g = psd_to_grid(&f, &p, 0.5, 10);
        assert!(g[0].is_infinite() && g[1].is_infinite());
        assert_eq!(g[2], 1.0);
        assert_eq!(g[3], 2.0);
        assert_eq!(g[4], 3.0);
        assert!(g[5].is_infinite() && g[8].is_infinite() && g[9].is_infinite());
    }

    #[test]
    fn design_curve_minimum_matches_published_note() {
        // REFERENCES item 9 note: the early second-generation fit has min sqrt(S) = 1.8e-24 near 228 Hz.
        let c = DesignCurve::Gen2Early;
        let (fmin, smin) = (100..400)
            .map(|f| (f as f64, c.psd(f as f64)))
            .fold((0.0, f64::MAX), |a, b| if b.1 < a.1 { b } else { a });
        assert!((smin.sqrt() / 1.8e-24 - 1.0).abs() < 0.03);
        assert!((fmin - 228.0).abs() < 5.0);
        assert!(c.psd(5.0).is_infinite());
    }
}
