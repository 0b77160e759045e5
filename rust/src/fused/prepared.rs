//! One segment made ready for every template: the weighted data `q = 4 df d~ / S`
//! and the inverse PSD in rescaled float32, plus the spectral moments that choose
//! each template's decimation.

use crate::error::{ensure, Result};
use crate::grid::inverse_psd_bin;
use crate::fft::{KeptScratch, RealScratch};
use crate::spectrum::SegmentChain;
use crate::waveform::{Model, WeightShape};
use num_complex::{Complex32, Complex64};
use rayon::prelude::*;
use std::f64::consts::PI;
use std::mem::MaybeUninit;

/// Bins per chunk of the spectral-moment sums. The weight is taken at the chunk
/// centre (one cube root per chunk); across a chunk `f^(-7/3)` changes by
/// `(7/3) 64 df / f`, 3% at 20 Hz for df = 1/256 Hz and less above, and the moments
/// only choose the decimation, whose loss bound has a factor-4 step between choices.
/// Band edges round to whole chunks, so this assumes `64 df` is small against the
/// band (segments of tens of seconds): at df = 0.5 Hz a chunk spans 32 Hz and a band
/// from 20 Hz would borrow weight from below it. The sums ride on the second
/// per-bin pass: [`Prepared::new`] took 1.9-2.0 ms for 2^19 bins on one thread,
/// 1.6 ms with the sums left out (yardstick 4.1-6.0 ms).
pub(crate) const MOMENT_CHUNK: usize = 64;

/// Bins per task of the two per-bin passes: whole moment chunks (the second pass
/// sums them as it writes them) and whole groups of them. 2^12, 2^14 and 2^16
/// timed alike (within this machine's noise) at 1 and 2 threads for 2^19 bins.
const PASS_CHUNK: usize = 1 << 14;

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
        check_psd(n_freq, psd)?;
        let k4 = 4.0 * df;
        // Parallel per-bin passes; the maxima are order-independent, so the result
        // does not depend on the thread count.
        let (q2_max, w_max) = data
            .par_chunks(PASS_CHUNK)
            .zip(psd.par_chunks(PASS_CHUNK))
            .map(|(d, s)| maxima(d, s, k4))
            .reduce(|| (0.0, 0.0), max_pair);
        Prepared::finish::<true>(data, psd, q2_max, w_max, df)
    }

    /// [`Prepared::new`] of `spectrum / sample_rate`, with `spectrum` left scaled
    /// and `scratch` (at least as long) left holding `1/S`: the scaling rides on
    /// the first pass, and the second reads `1/S` instead of dividing again.
    fn from_spectrum(
        spectrum: &mut [Complex64],
        scratch: &mut [f64],
        sample_rate: f64,
        psd: &[f64],
        df: f64,
    ) -> Result<Self> {
        let n_freq = spectrum.len();
        check_psd(n_freq, psd)?;
        let k4 = 4.0 * df;
        let inv = &mut scratch[..n_freq];
        let (q2_max, w_max) = spectrum
            .par_chunks_mut(PASS_CHUNK)
            .zip(psd.par_chunks(PASS_CHUNK))
            .zip(inv.par_chunks_mut(PASS_CHUNK))
            .map(|((d, s), i)| scale_and_maxima(d, s, i, sample_rate, k4))
            .reduce(|| (0.0, 0.0), max_pair);
        Prepared::finish::<false>(spectrum, inv, q2_max, w_max, df)
    }

    /// The second pass, from `d~` and either the PSD (`FROM_PSD`) or `1/S`: the
    /// float32 outputs and, chunk by chunk as they are written, the moment sums.
    fn finish<const FROM_PSD: bool>(
        data: &[Complex64],
        w: &[f64],
        q2_max: f64,
        w_max: f64,
        df: f64,
    ) -> Result<Self> {
        ensure(w_max > 0.0, "psd", || "is inf at every frequency".into())?;
        let n_freq = data.len();
        // The largest |q| (one square root here, not a hypot per bin).
        let q_max = q2_max.sqrt();
        let q_scale = if q_max > 0.0 && q_max.is_finite() { q_max } else { 1.0 };
        let scales = Scales {
            q_scale,
            w_max,
            df,
        };
        let mut weighted_data = Vec::with_capacity(n_freq);
        let mut inv_psd = Vec::with_capacity(n_freq);
        let mut chunks = vec![[0.0; 3]; n_freq.div_ceil(MOMENT_CHUNK)];
        // Written in place of fresh memory, not zeroed first.
        let written = weighted_data.spare_capacity_mut()[..n_freq]
            .par_chunks_mut(PASS_CHUNK)
            .zip(inv_psd.spare_capacity_mut()[..n_freq].par_chunks_mut(PASS_CHUNK))
            .zip(chunks.par_chunks_mut(PASS_CHUNK / MOMENT_CHUNK))
            .zip(data.par_chunks(PASS_CHUNK).zip(w.par_chunks(PASS_CHUNK)))
            .enumerate()
            .map(|(t, (((q, u), m), (d, w)))| {
                write_outputs::<FROM_PSD>(q, u, m, d, w, t * PASS_CHUNK, &scales)
            })
            .sum::<usize>();
        assert_eq!(written, n_freq, "every bin written once");
        // SAFETY: the elements `[0, n_freq)` of both were written just above (each
        // task writes each bin of its chunk, and the tasks' chunks tile the range).
        unsafe {
            weighted_data.set_len(n_freq);
            inv_psd.set_len(n_freq);
        }
        Ok(Prepared {
            weighted_data,
            inv_psd,
            q_scale,
            w_scale: w_max,
            df,
            n: 2 * (n_freq - 1),
            moments: MomentTable::from_chunks(chunks, n_freq, df),
        })
    }

    /// A segment of strain `x` (even length `N`) sampled at `sample_rate`, with its
    /// PSD on the segment's grid: `d~ = rfft(x) / sample_rate` by a real FFT, then
    /// [`Prepared::new`].
    ///
    /// # Errors
    /// Names `x` for an odd or too short length; otherwise as [`Prepared::new`].
    pub fn from_strain(x: &[f64], psd: &[f64], sample_rate: f64) -> Result<Self> {
        let mut fft = strain_transform(x)?;
        let RealScratch { time, spectrum, .. } = &mut *fft;
        Prepared::from_spectrum(spectrum, time, sample_rate, psd, sample_rate / x.len() as f64)
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
                    || strain_transform(&x[s..s + len]),
                );
                let psd = psd?;
                ensure(!psd.iter().any(|p| p.is_nan()), "x", || {
                    "the PSD is undefined (values too large for float64)".into()
                })?;
                let mut fft = data?;
                let RealScratch { time, spectrum, .. } = &mut *fft;
                Prepared::from_spectrum(spectrum, time, sample_rate, &psd, df)
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

/// `rfft(x)` by one float64 real transform (serial), left in the returned scratch's
/// `spectrum` (its `time` is free); the copy in runs on the pool. The scaling to
/// `d~ = rfft(x) / sample_rate` is left to [`Prepared::from_spectrum`]'s first pass.
///
/// # Errors
/// Names `x` for an odd or too short length.
pub fn strain_transform(x: &[f64]) -> Result<KeptScratch<f64>> {
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
    Ok(fft)
}

fn check_psd(n_freq: usize, psd: &[f64]) -> Result<()> {
    ensure(n_freq >= 2 && psd.len() == n_freq, "psd", || {
        format!("needs {n_freq} bins, got {}", psd.len())
    })
}

fn max_pair(a: (f64, f64), b: (f64, f64)) -> (f64, f64) {
    (a.0.max(b.0), a.1.max(b.1))
}

/// Independent running maxima, so the loops vectorise (a maximum is the same in
/// any order).
const LANES: usize = 4;

/// `(max |4 df d_k / S_k|^2, max 1/S_k)` over one task's bins.
fn maxima(d: &[Complex64], s: &[f64], k4: f64) -> (f64, f64) {
    #[cfg(target_arch = "x86_64")]
    {
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the feature the function enables was detected just above.
            return unsafe { avx2::maxima(d, s, k4) };
        }
    }
    maxima_lanes(d, s, k4)
}

/// [`maxima`]'s arithmetic, inlined into each caller so that each compiles it for
/// its own instruction set (the same operations in the same order: the same bits);
/// so too the other passes' `_lanes`.
#[inline(always)]
fn maxima_lanes(d: &[Complex64], s: &[f64], k4: f64) -> (f64, f64) {
    let (mut q2, mut w) = ([0.0f64; LANES], [0.0f64; LANES]);
    let mut lanes = |d: &[Complex64], s: &[f64]| {
        for l in 0..d.len() {
            let i = inverse_psd_bin(s[l]);
            q2[l] = q2[l].max((d[l] * (k4 * i)).norm_sqr());
            w[l] = w[l].max(i);
        }
    };
    let (dc, sc) = (d.chunks_exact(LANES), s.chunks_exact(LANES));
    let (dr, sr) = (dc.remainder(), sc.remainder());
    dc.zip(sc).for_each(|(d, s)| lanes(d, s));
    lanes(dr, sr);
    fold_lanes(q2, w)
}

/// [`maxima`] of `d / sample_rate`, with `d` scaled in place and `1/S` kept in `inv`.
fn scale_and_maxima(d: &mut [Complex64], s: &[f64], inv: &mut [f64], sample_rate: f64, k4: f64) -> (f64, f64) {
    #[cfg(target_arch = "x86_64")]
    {
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the feature the function enables was detected just above.
            return unsafe { avx2::scale_and_maxima(d, s, inv, sample_rate, k4) };
        }
    }
    scale_and_maxima_lanes(d, s, inv, sample_rate, k4)
}

#[inline(always)]
fn scale_and_maxima_lanes(
    d: &mut [Complex64],
    s: &[f64],
    inv: &mut [f64],
    sample_rate: f64,
    k4: f64,
) -> (f64, f64) {
    let (mut q2, mut w) = ([0.0f64; LANES], [0.0f64; LANES]);
    let mut lanes = |d: &mut [Complex64], s: &[f64], inv: &mut [f64]| {
        for l in 0..d.len() {
            let dk = d[l] / sample_rate;
            d[l] = dk;
            let i = inverse_psd_bin(s[l]);
            inv[l] = i;
            q2[l] = q2[l].max((dk * (k4 * i)).norm_sqr());
            w[l] = w[l].max(i);
        }
    };
    let mut dc = d.chunks_exact_mut(LANES);
    let (sc, mut ic) = (s.chunks_exact(LANES), inv.chunks_exact_mut(LANES));
    for ((d, s), i) in (&mut dc).zip(sc.clone()).zip(&mut ic) {
        lanes(d, s, i);
    }
    lanes(dc.into_remainder(), sc.remainder(), ic.into_remainder());
    fold_lanes(q2, w)
}

fn fold_lanes(q2: [f64; LANES], w: [f64; LANES]) -> (f64, f64) {
    let m = |a: [f64; LANES]| a.iter().fold(0.0f64, |m, &v| m.max(v));
    (m(q2), m(w))
}

/// The factors of the second pass.
struct Scales {
    q_scale: f64,
    w_max: f64,
    df: f64,
}

/// Moment chunks whose sums run side by side (independent additions rather than
/// one chain per chunk waiting on its previous sum).
const GROUP: usize = 4;

/// One task of the second pass over bins `[k0, k0 + d.len())`: `q` and `u` get
/// the float32 weighted data and inverse PSD, `m` the moment sums of the task's
/// chunks (`k0` a multiple of [`MOMENT_CHUNK`]). `w` is the PSD (`FROM_PSD`) or `1/S`.
/// Returns the bins written (all of `q` and `u`).
fn write_outputs<const FROM_PSD: bool>(
    q: &mut [MaybeUninit<Complex32>],
    u: &mut [MaybeUninit<f32>],
    m: &mut [[f64; 3]],
    d: &[Complex64],
    w: &[f64],
    k0: usize,
    sc: &Scales,
) -> usize {
    #[cfg(target_arch = "x86_64")]
    {
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the feature the function enables was detected just above.
            return unsafe { avx2::write_outputs::<FROM_PSD>(q, u, m, d, w, k0, sc) };
        }
    }
    write_outputs_lanes::<FROM_PSD>(q, u, m, d, w, k0, sc)
}

#[inline(always)]
fn write_outputs_lanes<const FROM_PSD: bool>(
    q: &mut [MaybeUninit<Complex32>],
    u: &mut [MaybeUninit<f32>],
    m: &mut [[f64; 3]],
    d: &[Complex64],
    w: &[f64],
    k0: usize,
    sc: &Scales,
) -> usize {
    assert!(q.len() == d.len() && u.len() == d.len() && w.len() == d.len());
    const G: usize = GROUP * MOMENT_CHUNK;
    let mut buf = [0.0f32; G];
    for (g, (((q, u), m), (d, w))) in q
        .chunks_mut(G)
        .zip(u.chunks_mut(G))
        .zip(m.chunks_mut(GROUP))
        .zip(d.chunks(G).zip(w.chunks(G)))
        .enumerate()
    {
        let buf = &mut buf[..d.len()];
        for ((((q, u), b), &d), &w) in q.iter_mut().zip(u.iter_mut()).zip(buf.iter_mut()).zip(d).zip(w) {
            let i = if FROM_PSD { inverse_psd_bin(w) } else { w };
            let c = d * (4.0 * sc.df * i / sc.q_scale);
            q.write(Complex32::new(c.re as f32, c.im as f32));
            *b = (i / sc.w_max) as f32;
            u.write(*b);
        }
        let k = k0 + g * G;
        if k == 0 {
            // DC is left out of the sums; a zero in its place adds nothing.
            buf[0] = 0.0;
        }
        if buf.len() == G {
            moment_group(buf, k, sc.df, m);
        } else {
            for (c, (b, m)) in buf.chunks(MOMENT_CHUNK).zip(m.iter_mut()).enumerate() {
                *m = moment_sums(b, k + c * MOMENT_CHUNK, sc.df);
            }
        }
    }
    d.len()
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
    fn from_chunks(chunks: Vec<[f64; 3]>, n_freq: usize, df: f64) -> Self {
        let newtonian = (0..chunks.len())
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

/// `[sum w, sum w f, sum w f^2]` of one chunk's weights `w` from bin `k0` on, in
/// bin order.
#[inline(always)]
fn moment_sums(w: &[f32], k0: usize, df: f64) -> [f64; 3] {
    let mut m = [0.0; 3];
    for (k, &wk) in (k0..).zip(w) {
        let f = k as f64 * df;
        let b = wk as f64;
        m[0] += b;
        m[1] += b * f;
        m[2] += b * f * f;
    }
    m
}

/// [`moment_sums`] of [`GROUP`] whole chunks from bin `k0` on, side by side: each
/// chunk's sums in its own bin order, as there.
#[inline(always)]
fn moment_group(w: &[f32], k0: usize, df: f64, out: &mut [[f64; 3]]) {
    let (mut m0, mut m1, mut m2) = ([0.0f64; GROUP], [0.0f64; GROUP], [0.0f64; GROUP]);
    let base: [f64; GROUP] = std::array::from_fn(|c| (k0 + c * MOMENT_CHUNK) as f64);
    for j in 0..MOMENT_CHUNK {
        let b: [f64; GROUP] = std::array::from_fn(|c| w[c * MOMENT_CHUNK + j] as f64);
        for c in 0..GROUP {
            // `base + j` is the integer `k`, exactly (k < 2^53), so f = k df as there.
            let f = (base[c] + j as f64) * df;
            m0[c] += b[c];
            m1[c] += b[c] * f;
            m2[c] += b[c] * f * f;
        }
    }
    for (c, o) in out.iter_mut().enumerate() {
        *o = [m0[c], m1[c], m2[c]];
    }
}

/// The per-bin passes compiled for AVX2 (no fused multiply-adds: the results are
/// those of the portable code, bit for bit).
#[cfg(target_arch = "x86_64")]
mod avx2 {
    use super::*;

    /// # Safety
    /// The processor must have AVX2.
    #[target_feature(enable = "avx2")]
    pub(super) unsafe fn maxima(d: &[Complex64], s: &[f64], k4: f64) -> (f64, f64) {
        maxima_lanes(d, s, k4)
    }

    /// # Safety
    /// The processor must have AVX2.
    #[target_feature(enable = "avx2")]
    pub(super) unsafe fn scale_and_maxima(
        d: &mut [Complex64],
        s: &[f64],
        inv: &mut [f64],
        sample_rate: f64,
        k4: f64,
    ) -> (f64, f64) {
        scale_and_maxima_lanes(d, s, inv, sample_rate, k4)
    }

    /// # Safety
    /// The processor must have AVX2.
    #[target_feature(enable = "avx2")]
    pub(super) unsafe fn write_outputs<const FROM_PSD: bool>(
        q: &mut [MaybeUninit<Complex32>],
        u: &mut [MaybeUninit<f32>],
        m: &mut [[f64; 3]],
        d: &[Complex64],
        w: &[f64],
        k0: usize,
        sc: &Scales,
    ) -> usize {
        write_outputs_lanes::<FROM_PSD>(q, u, m, d, w, k0, sc)
    }
}

/// Centre frequency of chunk `c` (Hz).
fn chunk_centre(c: usize, n_freq: usize, df: f64) -> f64 {
    let (lo, hi) = (c * MOMENT_CHUNK, ((c + 1) * MOMENT_CHUNK).min(n_freq));
    0.5 * (lo + hi - 1) as f64 * df
}
