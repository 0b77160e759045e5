//! Matched filtering of frequency-domain data against explicit templates: template
//! norms, complex SNR time series, and batched real cross-correlation.
//!
//! Inner products follow Allen et al. 2012 (PRD 85, 122006, arXiv:gr-qc/0509116):
//! `<a|b> = 4 Re sum_k a~_k b~_k* / S_k df`, complex SNR
//! `z_j = 4 df sum_k d~_k h~_k* / S_k exp(2 pi i j k / N) / sigma`.

use crate::error::{ensure, Result};
use crate::fft::{self, Planned, RealScratch};
use crate::grid::{band, inverse_psd};
use num_complex::{Complex, Complex32, Complex64};
use rayon::prelude::*;

/// Complex sample types templates may be stored in.
pub trait AsComplex64: Copy + Send + Sync {
    /// The value as complex128.
    fn c64(self) -> Complex64;
}
impl AsComplex64 for Complex32 {
    #[inline]
    fn c64(self) -> Complex64 {
        Complex64::new(self.re as f64, self.im as f64)
    }
}
impl AsComplex64 for Complex64 {
    #[inline]
    fn c64(self) -> Complex64 {
        self
    }
}

/// `sigma^2 = 4 df sum_{band} |h~_k|^2 / S_k`.
///
/// # Panics
/// If `k_hi` exceeds `h.len()` or `inv_psd.len()`.
pub fn sigma_sq<H: AsComplex64>(
    h: &[H],
    inv_psd: &[f64],
    k_lo: usize,
    k_hi: usize,
    df: f64,
) -> f64 {
    let mut acc = 0.0f64;
    for k in k_lo..k_hi {
        acc += h[k].c64().norm_sqr() * inv_psd[k];
    }
    4.0 * df * acc
}

/// Template norms `sigma` for `templates` stored row-major `(K, n_freq)`.
pub fn sigma<H: AsComplex64>(
    templates: &[H],
    n_freq: usize,
    inv_psd: &[f64],
    k_lo: usize,
    k_hi: usize,
    df: f64,
) -> Vec<f64> {
    templates
        .par_chunks(n_freq)
        .map(|h| sigma_sq(h, inv_psd, k_lo, k_hi, df).sqrt())
        .collect()
}

/// [`sigma`] over the band `f_low <= k df < f_high` with the PSD given as `S`
/// (`inf` excludes a bin): the whole computation behind `chirpsift.sigma`.
pub fn sigma_in_band<H: AsComplex64>(
    templates: &[H],
    n_freq: usize,
    psd: &[f64],
    df: f64,
    f_low: f64,
    f_high: Option<f64>,
) -> Vec<f64> {
    let (lo, hi) = band(f_low, f_high, df, n_freq);
    sigma(templates, n_freq, &inverse_psd(psd), lo, hi, df)
}

/// [`snr_series`] over the band `f_low <= k df < f_high` with the PSD given as `S`.
///
/// # Errors
/// As [`snr_series`].
pub fn snr_series_in_band<T: Planned, H: AsComplex64>(
    data: &[Complex64],
    templates: &[H],
    psd: &[f64],
    df: f64,
    f_low: f64,
    f_high: Option<f64>,
) -> Result<Vec<Complex<T>>> {
    let (lo, hi) = band(f_low, f_high, df, data.len());
    snr_series(data, templates, &inverse_psd(psd), lo, hi, df)
}

/// Complex SNR series `(K, N)`, `N = 2 (n_freq - 1)`, of `data` (`x~ = rfft(x) dt`)
/// against each template row. A template with zero norm in band is an error.
pub fn snr_series<T: Planned, H: AsComplex64>(
    data: &[Complex64],
    templates: &[H],
    inv_psd: &[f64],
    k_lo: usize,
    k_hi: usize,
    df: f64,
) -> Result<Vec<Complex<T>>> {
    let n_freq = data.len();
    let n = 2 * (n_freq - 1);
    let k_count = templates.len() / n_freq;
    let norms = sigma(templates, n_freq, inv_psd, k_lo, k_hi, df);
    if let Some(i) = norms.iter().position(|&s| !(s > 0.0) || !s.is_finite()) {
        return Err(crate::error::Error::invalid(
            "templates",
            format!(
                "template {i} has norm {} in the band [{}, {}) Hz",
                norms[i],
                k_lo as f64 * df,
                k_hi as f64 * df
            ),
        ));
    }
    let plan = fft::inverse::<T>(n);
    let zero = Complex::new(T::zero(), T::zero());
    let mut out = vec![zero; k_count * n];
    let pool = crate::scratch::Pool::new(|| vec![zero; plan.get_inplace_scratch_len()]);
    out.par_chunks_mut(n)
        .zip(templates.par_chunks(n_freq))
        .zip(norms.par_iter())
        .for_each_init(
            || pool.take(),
            |scratch, ((row, h), &s)| {
                let scale = 4.0 * df / s;
                for k in k_lo..k_hi {
                    let p = data[k] * h[k].c64().conj() * (inv_psd[k] * scale);
                    row[k] = Complex::new(T::from_f64(p.re).unwrap(), T::from_f64(p.im).unwrap());
                }
                plan.process_with_scratch(row, scratch);
            },
        );
    Ok(out)
}

/// Output layout of a cross-correlation, as `scipy.signal.correlate` defines it.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Mode {
    /// Every lag with any overlap, `n + m - 1` values.
    Full,
    /// The middle `n` values of `Full`.
    Same,
    /// Lags with full overlap only, `n - m + 1` values.
    Valid,
}

impl Mode {
    /// The mode named `"full"`, `"same"` or `"valid"`.
    ///
    /// # Errors
    /// Names `mode` for any other name.
    pub fn from_name(name: &str) -> Result<Self> {
        match name {
            "full" => Ok(Mode::Full),
            "same" => Ok(Mode::Same),
            "valid" => Ok(Mode::Valid),
            _ => Err(crate::error::Error::invalid(
                "mode",
                format!("must be 'valid', 'same' or 'full', got {name:?}"),
            )),
        }
    }

    /// (offset into the full correlation, output length) for data `n`, kernel `m`.
    ///
    /// # Errors
    /// Names `templates` when `Valid` and `m > n`.
    pub fn window(self, n: usize, m: usize) -> Result<(usize, usize)> {
        let full = n + m - 1;
        Ok(match self {
            Mode::Full => (0, full),
            Mode::Same => ((full - n) / 2, n),
            Mode::Valid => {
                ensure(m <= n, "templates", || {
                    format!("mode 'valid' needs templates no longer than data, got {m} > {n}")
                })?;
                (m - 1, n - m + 1)
            }
        })
    }
}

/// `out[i][j] = sum_t data[t + j + offset - (m - 1)] * templates[i][t]` by FFT, the
/// cross-correlation of `scipy.signal.correlate(data, templates[i], mode)`, as
/// `(rows, row length, values row-major)`.
///
/// # Errors
/// Names `templates` when `mode` is `Valid` and a template is longer than `data`.
pub fn correlate(
    data: &[f64],
    templates: &[f64],
    m: usize,
    mode: Mode,
) -> Result<(usize, usize, Vec<f64>)> {
    let n = data.len();
    let (offset, len) = mode.window(n, m)?;
    let nfft = fft::fast_length(n + m - 1);
    let mut data_fft = RealScratch::<f64>::new(nfft);
    data_fft.time[..n].copy_from_slice(data);
    data_fft.rfft();
    let d = data_fft.spectrum;
    let k_count = templates.len() / m;
    let mut out = vec![0.0f64; k_count * len];
    let inv = 1.0 / nfft as f64;
    let pool = crate::scratch::Pool::new(|| RealScratch::<f64>::new(nfft));
    out.par_chunks_mut(len.max(1))
        .zip(templates.par_chunks(m))
        .for_each_init(
            || pool.take(),
            |fft, (row, t)| {
                fft.time[..m].copy_from_slice(t);
                fft.time[m..].iter_mut().for_each(|x| *x = 0.0);
                fft.rfft();
                for (c, dk) in fft.spectrum.iter_mut().zip(&d) {
                    *c = dk * c.conj();
                }
                fft.irfft();
                // Circular lag l sits at index l mod nfft; full index i is lag i - (m - 1).
                for (j, o) in row.iter_mut().enumerate() {
                    let lag = (offset + j) as isize - (m as isize - 1);
                    let idx = lag.rem_euclid(nfft as isize) as usize;
                    *o = fft.time[idx] * inv;
                }
            },
        );
    Ok((k_count, len, out))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn direct_full(data: &[f64], t: &[f64]) -> Vec<f64> {
        // Definition of cross-correlation (numpy.correlate, mode 'full').
        let (n, m) = (data.len() as isize, t.len() as isize);
        (0..n + m - 1)
            .map(|i| {
                let lag = i - (m - 1);
                (0..m)
                    .filter(|&j| (0..n).contains(&(j + lag)))
                    .map(|j| data[(j + lag) as usize] * t[j as usize])
                    .sum()
            })
            .collect()
    }

    #[test]
    fn correlate_matches_definition_in_every_mode() {
        let data: Vec<f64> = (0..37).map(|i| ((i * 7 % 11) as f64 - 5.0) * 0.3).collect();
        let t: Vec<f64> = (0..2 * 8)
            .map(|i| ((i * 5 % 7) as f64 - 3.0) * 0.5)
            .collect();
        let (_, _, full) = correlate(&data, &t, 8, Mode::Full).unwrap();
        for (row, tt) in full.chunks(44).zip(t.chunks(8)) {
            for (a, b) in row.iter().zip(direct_full(&data, tt)) {
                assert!((a - b).abs() < 1e-12);
            }
        }
        let (_, _, valid) = correlate(&data, &t[..8], 8, Mode::Valid).unwrap();
        assert_eq!(valid.len(), 30);
        let (_, _, same) = correlate(&data, &t[..8], 8, Mode::Same).unwrap();
        let df = direct_full(&data, &t[..8]);
        assert!((valid[0] - df[7]).abs() < 1e-12);
        assert!((same[0] - df[3]).abs() < 1e-12);
        assert!(correlate(&data[..4], &t[..8], 8, Mode::Valid).is_err());
    }

    #[test]
    fn snr_of_template_against_itself_is_sigma_at_zero_lag() {
        // <h|h> / sigma = sigma (definition of the matched filter, Allen et al. 2012).
        let n_freq = 65;
        let h: Vec<Complex64> = (0..n_freq)
            .map(|k| Complex64::from_polar(1.0 / (1.0 + k as f64), 0.1 * k as f64 * k as f64))
            .collect();
        let inv = vec![2.0; n_freq];
        let (lo, hi) = band(1.0, None, 1.0, n_freq);
        let s = sigma_sq(&h, &inv, lo, hi, 1.0).sqrt();
        let z = snr_series::<f64, _>(&h, &h, &inv, lo, hi, 1.0).unwrap();
        let peak = z.iter().map(|c| c.norm()).fold(0.0, f64::max);
        assert!((z[0].re - s).abs() < 1e-9 * s && z[0].im.abs() < 1e-9 * s);
        assert!((peak - s).abs() < 1e-9 * s);
    }
}
