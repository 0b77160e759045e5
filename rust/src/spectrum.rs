//! Noise spectra: Welch PSD estimation, analytic design curves, resampling onto a
//! filter's frequency grid, inverse spectrum truncation and whitening.
//!
//! PSDs of real strain are ~1e-47 / Hz, below float32's smallest normal number, so
//! every spectrum here is float64.

use crate::error::{ensure, Error, Result};
use crate::fft::{KeptScratch, RealScratch};
use crate::grid::bin_at_or_above;
use crate::scratch::{Kept, Pool};
use num_complex::Complex;
use rayon::prelude::*;
use rustfft::Fft;
use std::sync::Arc;

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
    #[cfg(target_arch = "x86_64")]
    {
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the feature the function enables was detected just above.
            return unsafe { avx2::grid_chunk(freqs, psd, df, k0, out) };
        }
    }
    grid_chunk_lanes(freqs, psd, df, k0, out)
}

/// [`grid_chunk`]'s arithmetic, inlined into each caller so that each compiles it
/// for its own instruction set (the same operations in the same order: the same
/// bits). The bins between two nodes are interpolated in one branch-free loop, which
/// vectorises: the divisions, not the walk, are the cost (2^19 bins from 2^13 nodes,
/// one thread: 1.63 ms as a scalar walk, 0.70 ms so).
#[inline(always)]
fn grid_chunk_lanes(freqs: &[f64], psd: &[f64], df: f64, k0: usize, out: &mut [f64]) {
    let last = freqs.len() - 1;
    let freq = |j: usize| (k0 + j) as f64 * df;
    // The last node at or below the chunk's first frequency, where a walk from bin 0
    // would stand on reaching it.
    let mut i = freqs
        .partition_point(|&f| f <= k0 as f64 * df)
        .saturating_sub(1)
        .min(last);
    let mut j = 0;
    while j < out.len() {
        let f = freq(j);
        if f < freqs[0] || f > freqs[last] {
            out[j] = f64::INFINITY;
            j += 1;
            continue;
        }
        while i < last && freqs[i + 1] <= f {
            i += 1;
        }
        if i == last {
            // f is the last node itself
            out[j] = psd[last];
            j += 1;
            continue;
        }
        // bins j..end lie in [freqs[i], freqs[i + 1])
        let (lo, hi, a, b) = (freqs[i], freqs[i + 1], psd[i], psd[i + 1]);
        let mut end = j + 1;
        while end < out.len() && freq(end) < hi {
            end += 1;
        }
        let finite = a.is_finite() && b.is_finite();
        for (o, k) in out[j..end].iter_mut().zip(k0 + j..) {
            let f = k as f64 * df;
            let v = a + (f - lo) / (hi - lo) * (b - a);
            *o = if f == lo {
                a
            } else if finite {
                v
            } else {
                f64::INFINITY
            };
        }
        j = end;
    }
}

/// Inverse spectrum truncation (Allen et al. 2012, arXiv:gr-qc/0509116): limit the
/// impulse response of `1/sqrt(psd)` to `max_len` samples, so whitening corrupts
/// at most `max_len / 2` samples at each end of a segment.
///
/// The inverse transform is needed at the kept taps only and the forward one has
/// only those taps as input: with `N = M L`, `L >= max_len`, both run as about
/// `M / 2 + 1` independent complex transforms of `L` points on the pool (see
/// [`truncate_pruned`]); lengths without such a divisor take two full-length float64
/// real transforms (serial). Every value comes from its own bins, taps or residue in
/// a fixed order, so the result does not depend on the thread count.
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
    let half = (max_len / 2).min(n / 2);
    let mut out = inverse_sqrt_psd(n_freq, df, f_low, psd);
    let k_low = bin_at_or_above(f_low, df);
    match pruned_length(n, 2 * half) {
        Some(l) => truncate_pruned(&mut out, l, half, k_low),
        None => truncate_full(&mut out, half, k_low),
    }
    out
}

/// `r_k = 1 / sqrt(S_k)` on the `n_freq` bins, 0 below `f_low` and where `S_k` is not finite.
fn inverse_sqrt_psd<F>(n_freq: usize, df: f64, f_low: f64, psd: F) -> Vec<f64>
where
    F: Fn(usize, &mut [f64]) + Sync,
{
    let k_low = bin_at_or_above(f_low, df);
    let mut r = vec![0.0f64; n_freq];
    r.par_chunks_mut(GRID_CHUNK).enumerate().for_each(|(c, out)| {
        psd(c * GRID_CHUNK, out);
        inverse_sqrt_in_place(out, k_low.saturating_sub(c * GRID_CHUNK));
    });
    r
}

/// `v = 1 / sqrt(v)` for each value from `first` on, 0 where `v` is not finite and
/// before `first`.
fn inverse_sqrt_in_place(v: &mut [f64], first: usize) {
    #[cfg(target_arch = "x86_64")]
    {
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the feature the function enables was detected just above.
            return unsafe { avx2::inverse_sqrt_in_place(v, first) };
        }
    }
    inverse_sqrt_lanes(v, first)
}

/// [`inverse_sqrt_in_place`]'s arithmetic, branch-free so that it vectorises.
#[inline(always)]
fn inverse_sqrt_lanes(v: &mut [f64], first: usize) {
    let (below, kept) = v.split_at_mut(first.min(v.len()));
    below.fill(0.0);
    for o in kept {
        let r = 1.0 / o.sqrt();
        *o = if o.is_finite() { r } else { 0.0 };
    }
}

/// The per-bin passes compiled for AVX2 (no fused multiply-adds: the results are
/// those of the portable code, bit for bit).
#[cfg(target_arch = "x86_64")]
mod avx2 {
    /// # Safety
    /// The processor must have AVX2.
    #[target_feature(enable = "avx2")]
    pub unsafe fn grid_chunk(freqs: &[f64], psd: &[f64], df: f64, k0: usize, out: &mut [f64]) {
        super::grid_chunk_lanes(freqs, psd, df, k0, out)
    }

    /// # Safety
    /// The processor must have AVX2.
    #[target_feature(enable = "avx2")]
    pub unsafe fn inverse_sqrt_in_place(v: &mut [f64], first: usize) {
        super::inverse_sqrt_lanes(v, first)
    }

    /// # Safety
    /// The processor must have AVX2.
    #[target_feature(enable = "avx2")]
    pub unsafe fn invert_truncated(v: &mut [f64], first: usize) {
        super::invert_truncated_lanes(v, first)
    }
}

/// `1/|X_k|^2` (`inf` below `k_low` or where `|X_k|^2` is 0), written over `r`,
/// where `X = rfft(w)` and `w = irfft(r)` kept at `t < half` and `t >= N - half`:
/// two full-length float64 real transforms (serial).
fn truncate_full(r: &mut [f64], half: usize, k_low: usize) {
    let n = 2 * (r.len() - 1);
    let mut fft = KeptScratch::<f64>::take(n);
    fft.spectrum
        .par_chunks_mut(GRID_CHUNK)
        .zip(r.par_chunks(GRID_CHUNK))
        .for_each(|(o, v)| {
            for (o, &v) in o.iter_mut().zip(v) {
                *o = Complex::new(v, 0.0);
            }
        });
    fft.irfft();
    let inv_n = 1.0 / n as f64;
    fft.time[..half].iter_mut().for_each(|q| *q *= inv_n);
    fft.time[n - half..].iter_mut().for_each(|q| *q *= inv_n);
    fft.time[half..n - half]
        .par_chunks_mut(GRID_CHUNK)
        .for_each(|z| z.fill(0.0));
    fft.rfft();
    r.par_chunks_mut(GRID_CHUNK)
        .zip(fft.spectrum.par_chunks(GRID_CHUNK))
        .enumerate()
        .for_each(|(c, (o, x))| {
            o.iter_mut().zip(x).for_each(|(o, x)| *o = x.norm_sqr());
            invert_truncated(o, k_low.saturating_sub(c * GRID_CHUNK));
        });
}

/// The truncated PSD from `|X_k|^2` in place: `1 / |X_k|^2`, `inf` before `first`
/// and where `|X_k|^2` is 0.
fn invert_truncated(v: &mut [f64], first: usize) {
    #[cfg(target_arch = "x86_64")]
    {
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the feature the function enables was detected just above.
            return unsafe { avx2::invert_truncated(v, first) };
        }
    }
    invert_truncated_lanes(v, first)
}

/// [`invert_truncated`]'s arithmetic, branch-free so that it vectorises.
#[inline(always)]
fn invert_truncated_lanes(v: &mut [f64], first: usize) {
    let (below, kept) = v.split_at_mut(first.min(v.len()));
    below.fill(f64::INFINITY);
    for o in kept {
        let r = 1.0 / *o;
        *o = if *o == 0.0 { f64::INFINITY } else { r };
    }
}

/// The residue length `L` of the pruned truncation of `taps` kept samples out of
/// `n`: the smallest divisor of `n` with `taps <= L <= n / 2`; `None` (full-length
/// path) when there is none or `taps >= n / 2`, where pruning saves little.
fn pruned_length(n: usize, taps: usize) -> Option<usize> {
    if taps < 2 || 2 * taps >= n {
        return None;
    }
    let mut best: Option<usize> = None;
    let mut i = 1;
    while i * i <= n {
        if n % i == 0 {
            for d in [i, n / i] {
                if d >= taps && 2 * d <= n && best.map_or(true, |b| d < b) {
                    best = Some(d);
                }
            }
        }
        i += 1;
    }
    best
}

/// Taps recombined per parallel job; the sum over residues runs inside a job, in
/// one order, so the taps do not depend on the split.
const TAP_CHUNK: usize = 512;

/// Padding (complex values) after each residue row: rows `L` apart (a power of two
/// here) would share cache sets, and the bin gather reads all rows at once (it took
/// 3.7 ms instead of about 1 ms at `N = 2^20`, `L = 2^14`, unpadded).
const ROW_PAD: usize = 4;

/// Rows (residue pairs) filled per job: the rows' bins lie `M` apart in `r`, so one
/// job filling several adjacent residues reads each cache line of `r` once for all.
const PAIRS_PER_JOB: usize = 4;

/// Kept buffers and plans of the pruned truncation for one `(N, L)`.
struct Pruned {
    n: usize,
    l: usize,
    forward: Arc<dyn Fft<f64>>,
    inverse: Arc<dyn Fft<f64>>,
    /// Residues `0..=M/2`, `L` values each: first `Y[M k2 + k1]` and its inverse
    /// transform, later the pre-twiddled taps and their forward transform.
    rows: Vec<Complex<f64>>,
    /// `w[t]` for `t` in `0..=half`.
    taps: Vec<f64>,
    /// `exp(2 pi i m / N) = coarse[m >> shift] * fine[m & (2^shift - 1)]`, `m <= N / 4`.
    coarse: Vec<Complex<f64>>,
    fine: Vec<Complex<f64>>,
    shift: u32,
    scratch_len: usize,
    /// Per-thread transform scratches, lent through a [`Pool`] each call.
    scratches: Vec<Vec<Complex<f64>>>,
}

/// [`Pruned`] states kept between calls (about 8.6 MiB each at `N = 2^20`,
/// `L = 2^14`), since chains may run side by side.
static KEPT_PRUNED: Kept<Pruned> = Kept::new();

impl Pruned {
    fn take(n: usize, l: usize) -> Pruned {
        KEPT_PRUNED
            .take(|p| p.n == n && p.l == l)
            .unwrap_or_else(|| Pruned::new(n, l))
    }

    fn new(n: usize, l: usize) -> Pruned {
        let forward = crate::fft::forward::<f64>(l);
        let inverse = crate::fft::inverse::<f64>(l);
        let scratch_len = forward
            .get_inplace_scratch_len()
            .max(inverse.get_inplace_scratch_len());
        // twiddle indices t k1 stay below half (M / 2) <= N / 4; tables of about
        // sqrt(N / 4) entries each, every entry from its own sin_cos
        let top = n / 4;
        let shift = (usize::BITS - top.leading_zeros()).div_ceil(2);
        let cis = |m: usize| {
            let (s, c) = (std::f64::consts::TAU * m as f64 / n as f64).sin_cos();
            Complex::new(c, s)
        };
        let fine = (0..1usize << shift).map(cis).collect();
        let coarse = (0..=top >> shift).map(|h| cis(h << shift)).collect();
        Pruned {
            n,
            l,
            forward,
            inverse,
            rows: vec![Complex::new(0.0, 0.0); (n / l / 2 + 1) * (l + ROW_PAD)],
            taps: Vec::new(),
            coarse,
            fine,
            shift,
            scratch_len,
            scratches: Vec::new(),
        }
    }
}

/// `exp(2 pi i m / N)` from the two tables of [`Pruned`].
#[inline]
fn cis_at(coarse: &[Complex<f64>], fine: &[Complex<f64>], shift: u32, m: usize) -> Complex<f64> {
    coarse[m >> shift] * fine[m & ((1 << shift) - 1)]
}

/// [`truncate_full`] by pruned transforms, exact up to rounding. With `N = M L`
/// (`L >= 2 half`, `M >= 2`) and `k = M k2 + k1`:
///
/// - inverse, at the kept taps only: `w[t] = (1/N) sum_k1 exp(2 pi i t k1 / N)
///   Z_k1[t mod L]`, `Z_k1` the `L`-point inverse DFT of `Y[k1::M]` (`Y` the real,
///   even extension of `r`). `Z_(M-k1)` contributes the conjugate of `Z_k1`'s term,
///   so residues `0..=M/2` suffice (weight 2 for `0 < k1 < M/2`), and `w` is real
///   and even: `w[-t] = w[t]`, computed for `t` in `0..=half` with the residues
///   summed in ascending order (parallel over taps, never over residues).
/// - forward, from the `2 half` taps `t` in `[-half, half)` only: `X[M k2 + k1]` is
///   the `L`-point DFT of `y_k1[t mod L] = w[t] exp(-2 pi i t k1 / N)` at `k2`; `w`
///   is real, so `X[N - k] = conj X[k]` and residue `M - k1` is residue `k1` read
///   backwards (`|X[M k2 + k1]| = |X_(M-k1)[L - 1 - k2]|`).
///
/// The residues' rows are real, so two share one complex inverse transform. About
/// `M/4` transforms of `L` points inverse and `M/2 + 1` forward instead of two of `N`
/// real points, plus `(M/2 + 1) half` twiddled products for the taps. Measured at
/// `N = 2^20`, `L = 2^14` on one thread (excluding `1/sqrt(S)`): 6.3 ms against 10.0 ms
/// for the full-length path (inverse 1.6, taps 0.6, forward 2.6, bins 1.6 before their
/// inversion was vectorised).
fn truncate_pruned(r: &mut [f64], l: usize, half: usize, k_low: usize) {
    let n = 2 * (r.len() - 1);
    let m = n / l;
    let mut st = Pruned::take(n, l);
    let Pruned {
        forward,
        inverse,
        rows,
        taps,
        coarse,
        fine,
        shift,
        scratch_len,
        scratches,
        ..
    } = &mut st;
    let (coarse, fine, shift, scratch_len) = (&coarse[..], &fine[..], *shift, *scratch_len);
    taps.resize(half + 1, 0.0);
    let pool = Pool::with_items(|| vec![Complex::new(0.0, 0.0); scratch_len], std::mem::take(scratches));

    // residues k1 of the real, even extension of r, two real ones a complex row
    // (2p + i (2p + 1)), a few rows a job so each cache line of r read serves several
    // rows; their inverse transforms
    let stride = l + ROW_PAD;
    let residues = m / 2 + 1;
    let pairs = residues.div_ceil(2);
    let r_in: &[f64] = r;
    rows[..pairs * stride]
        .par_chunks_mut(PAIRS_PER_JOB * stride)
        .enumerate()
        .for_each_init(
            || pool.take(),
            |scratch, (g, group)| {
                let first = 2 * g * PAIRS_PER_JOB;
                let n_rows = group.len() / stride;
                let last_odd = first + 2 * n_rows > residues; // the last pair's odd residue is absent
                for k2 in 0..l {
                    let k0 = m * k2 + first;
                    for j in 0..n_rows {
                        let k = k0 + 2 * j;
                        let im = if last_odd && j + 1 == n_rows { 0.0 } else { r_in[(k + 1).min(n - k - 1)] };
                        group[j * stride + k2] = Complex::new(r_in[k.min(n - k)], im);
                    }
                }
                for row in group.chunks_exact_mut(stride) {
                    inverse.process_with_scratch(&mut row[..l], scratch);
                }
            },
        );

    // the kept taps, each a sum over residues in ascending order. The transform C of
    // a + i b (a, b real) gives 2 Z_a[t] = C[t] + conj C[-t], 2 Z_b[t] = -i (C[t] - conj C[-t]).
    let scale = 0.5 / n as f64;
    let weight = |k1: usize| if k1 == 0 || 2 * k1 == m { 1.0 } else { 2.0 };
    let rows_in: &[Complex<f64>] = rows;
    taps.par_chunks_mut(TAP_CHUNK).enumerate().for_each(|(c, acc)| {
        let t0 = c * TAP_CHUNK;
        acc.fill(0.0);
        for p in 0..pairs {
            let (ka, kb) = (2 * p, 2 * p + 1);
            let row = &rows_in[p * stride..p * stride + l];
            let (wa, wb) = (weight(ka), weight(kb));
            let with_b = kb < residues;
            for (j, a) in acc.iter_mut().enumerate() {
                let t = t0 + j;
                let cp = row[t];
                let cm = row[if t == 0 { 0 } else { l - t }].conj();
                let (za, db) = (cp + cm, cp - cm);
                let e = cis_at(coarse, fine, shift, t * ka);
                *a += wa * (e.re * za.re - e.im * za.im);
                if with_b {
                    // 2 Z_b = (db.im, -db.re)
                    let e = cis_at(coarse, fine, shift, t * kb);
                    *a += wb * (e.re * db.im + e.im * db.re);
                }
            }
        }
        acc.iter_mut().for_each(|a| *a *= scale);
    });

    // pre-twiddled taps of each residue and their forward transform
    let w: &[f64] = taps;
    rows.par_chunks_mut(stride).enumerate().for_each_init(
        || pool.take(),
        |scratch, (k1, row)| {
            let row = &mut row[..l];
            row[half..l - half].fill(Complex::new(0.0, 0.0));
            let mut i = 0;
            for t in 0..=half {
                let e = cis_at(coarse, fine, shift, i) * w[t];
                if t < half {
                    row[t] = e.conj();
                }
                if t > 0 {
                    row[l - t] = e;
                }
                i += k1;
            }
            forward.process_with_scratch(row, scratch);
        },
    );

    // bin k = M k2 + k1 from residue k1, or residue M - k1 backwards
    let rows_in: &[Complex<f64>] = rows;
    r.par_chunks_mut(GRID_CHUNK).enumerate().for_each(|(c, out)| {
        let k0 = c * GRID_CHUNK;
        let (mut k1, mut k2) = (k0 % m, k0 / m);
        for o in out.iter_mut() {
            let x = if 2 * k1 <= m {
                rows_in[k1 * stride + k2]
            } else {
                rows_in[(m - k1) * stride + (l - 1 - k2)]
            };
            *o = x.norm_sqr();
            k1 += 1;
            if k1 == m {
                k1 = 0;
                k2 += 1;
            }
        }
        invert_truncated(out, k_low.saturating_sub(k0));
    });
    *scratches = pool.into_items();
    KEPT_PRUNED.give_back(st);
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
    fn per_bin_passes_equal_their_scalar_formulas() {
        // The branch-free (vectorised) passes against the per-value definitions, bit
        // for bit, on strain-scale values with the special cases mixed in, whatever
        // the instruction set the dispatch picks; and the portable code alike.
        let mut v: Vec<f64> = uniforms(11, 1000).iter().map(|u| 1e-47 * (0.5 + u)).collect();
        for (i, special) in [0.0, -1e-47, f64::INFINITY, f64::NAN, f64::MIN_POSITIVE, 1e300].iter().enumerate() {
            v[17 * i + 3] = *special;
        }
        for first in [0, 5, 999, 1000, 2000] {
            let sqrt_expected: Vec<u64> = v.iter().enumerate()
                .map(|(k, &s)| if k >= first && s.is_finite() { 1.0 / s.sqrt() } else { 0.0 }.to_bits())
                .collect();
            let inv_expected: Vec<u64> = v.iter().enumerate()
                .map(|(k, &s)| if k < first || s == 0.0 { f64::INFINITY } else { 1.0 / s }.to_bits())
                .collect();
            let bits = |x: &[f64]| x.iter().map(|x| x.to_bits()).collect::<Vec<u64>>();
            let (mut a, mut b) = (v.clone(), v.clone());
            inverse_sqrt_in_place(&mut a, first);
            inverse_sqrt_lanes(&mut b, first);
            assert_eq!(bits(&a), sqrt_expected);
            assert_eq!(bits(&b), sqrt_expected);
            let (mut a, mut b) = (v.clone(), v.clone());
            invert_truncated(&mut a, first);
            invert_truncated_lanes(&mut b, first);
            assert_eq!(bits(&a), inv_expected);
            assert_eq!(bits(&b), inv_expected);
        }
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

    /// A smooth PSD of design-curve scale (1e-47 /Hz) with a notch of unusable bins.
    fn strain_scale_psd(n: usize, fs: f64) -> Vec<f64> {
        let mut s: Vec<f64> = (0..n / 2 + 1)
            .map(|k| {
                let f = k as f64 * fs / n as f64;
                1e-47 * (1.0 + (40.0 / (f + 5.0)).powi(4) + (f / 300.0).powi(2))
            })
            .collect();
        let notch = n / 5;
        s[notch..notch + 3].fill(f64::INFINITY);
        s
    }

    /// The truncation by its definition (Allen et al. 2012, arXiv:gr-qc/0509116),
    /// with direct DFT sums: `w[t] = (1/N) sum_k Y[k] cos(2 pi t k / N)` for the real,
    /// even `Y` of `r`, kept for `t` in `[-half, half)`; `X[k] = sum_t w[t]
    /// exp(-2 pi i t k / N)`; `1/|X|^2`, `inf` below `k_low`.
    fn truncation_by_direct_sums(psd: &[f64], half: usize, k_low: usize) -> Vec<f64> {
        let n = 2 * (psd.len() - 1);
        let r: Vec<f64> = psd
            .iter()
            .enumerate()
            .map(|(k, &s)| if k >= k_low && s.is_finite() { 1.0 / s.sqrt() } else { 0.0 })
            .collect();
        let angle = |j: usize| std::f64::consts::TAU * (j % n) as f64 / n as f64;
        let taps: Vec<(usize, f64)> = (0..2 * half)
            .map(|i| {
                let t = (n + i - half) % n; // t = i - half, mod N
                let w = (0..n).map(|k| r[k.min(n - k)] * angle(t * k).cos()).sum::<f64>();
                (t, w / n as f64)
            })
            .collect();
        (0..psd.len())
            .map(|k| {
                let (mut re, mut im) = (0.0, 0.0);
                for &(t, w) in &taps {
                    re += w * angle(t * k).cos();
                    im -= w * angle(t * k).sin();
                }
                if k < k_low {
                    f64::INFINITY
                } else {
                    1.0 / (re * re + im * im)
                }
            })
            .collect()
    }

    /// max |a - b| / max |b| over the finite bins of `b`; the inf bins must agree.
    fn relative_difference(a: &[f64], b: &[f64]) -> f64 {
        let (mut diff, mut scale) = (0.0f64, 0.0f64);
        for (x, y) in a.iter().zip(b) {
            assert_eq!(x.is_infinite(), y.is_infinite());
            if y.is_finite() {
                diff = diff.max((x - y).abs());
                scale = scale.max(y.abs());
            }
        }
        diff / scale
    }

    #[test]
    fn pruned_length_is_the_smallest_divisor_of_at_least_the_taps() {
        assert_eq!(pruned_length(1 << 20, 1 << 14), Some(1 << 14));
        assert_eq!(pruned_length(3 << 15, 1 << 12), Some(1 << 12));
        assert_eq!(pruned_length(1 << 20, 10_000), Some(1 << 14));
        assert_eq!(pruned_length(3 << 15, 5000), Some(6144));
        assert_eq!(pruned_length(2 * 4099, 100), Some(4099)); // N / 2 always divides even N
        assert_eq!(pruned_length(486, 50), Some(54)); // M = 9, odd
        assert_eq!(pruned_length(1 << 12, 2048), None); // T >= N / 2: full length
        assert_eq!(pruned_length(1 << 12, 4096), None);
        assert_eq!(pruned_length(1 << 12, 0), None);
    }

    #[test]
    fn truncation_matches_its_definition_by_direct_sums() {
        // Both paths against the definition evaluated term by term, at strain scale:
        // power-of-two N, even M; non-power-of-two N; odd M; an even count of residues
        // 0..=M/2 (M = 6, M = 2; the others odd); T >= N / 2 (full path).
        for (n, max_len, f_low) in [
            (1024usize, 100usize, 15.0),
            (768, 64, 0.0),
            (486, 50, 20.0),
            (480, 37, 10.0),
            (768, 100, 10.0),
            (512, 200, 10.0),
            (256, 200, 15.0),
        ] {
            let fs = 1024.0;
            let df = fs / n as f64;
            let psd = strain_scale_psd(n, fs);
            let half = max_len / 2;
            let k_low = bin_at_or_above(f_low, df);
            let expected = truncation_by_direct_sums(&psd, half, k_low);
            let got = truncate_inverse_psd(&psd, max_len, df, f_low);
            let d = relative_difference(&got, &expected);
            assert!(d < 1e-12, "n={n} max_len={max_len}: {d:e}");
            let mut full = inverse_sqrt_psd(psd.len(), df, f_low, |k0, o| o.copy_from_slice(&psd[k0..k0 + o.len()]));
            truncate_full(&mut full, half, k_low);
            let d = relative_difference(&full, &expected);
            assert!(d < 1e-12, "full n={n} max_len={max_len}: {d:e}");
            // the pruned path was taken where it should be
            assert_eq!(pruned_length(n, 2 * half).is_some(), 4 * half < n);
        }
    }

    #[test]
    fn pruned_truncation_agrees_with_the_full_length_path() {
        // Consistency of the two paths at search lengths (the direct sums above are
        // the outside check; numpy's in tests/test_reference_consistency.py).
        for (n, max_len) in [(1usize << 20, 1usize << 14), (3 << 15, 1 << 12), (3 << 15, 5000)] {
            let fs = 4096.0;
            let df = fs / n as f64;
            let psd = strain_scale_psd(n, fs);
            let half = max_len / 2;
            let k_low = bin_at_or_above(15.0, df);
            let l = pruned_length(n, 2 * half).expect("a divisor");
            let mut pruned = inverse_sqrt_psd(psd.len(), df, 15.0, |k0, o| o.copy_from_slice(&psd[k0..k0 + o.len()]));
            let mut full = pruned.clone();
            truncate_pruned(&mut pruned, l, half, k_low);
            truncate_full(&mut full, half, k_low);
            let d = relative_difference(&pruned, &full);
            assert!(d < 1e-12, "n={n} max_len={max_len}: {d:e}");
        }
    }

    #[test]
    fn truncation_is_bitwise_identical_across_thread_counts() {
        for (n, max_len) in [(1usize << 16, 1usize << 12), (3 << 15, 1 << 12), (486, 50), (1 << 12, 4096)] {
            let fs = 4096.0;
            let df = fs / n as f64;
            let psd = strain_scale_psd(n, fs);
            let runs: Vec<Vec<u64>> = (1..=3)
                .map(|k| {
                    let pool = rayon::ThreadPoolBuilder::new().num_threads(k).build().unwrap();
                    pool.install(|| truncate_inverse_psd(&psd, max_len, df, 15.0))
                        .iter()
                        .map(|v| v.to_bits())
                        .collect()
                })
                .collect();
            assert!(runs[1] == runs[0] && runs[2] == runs[0], "n={n} max_len={max_len}");
        }
    }

}

