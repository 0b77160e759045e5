//! The fused search kernel: one whitened data segment against a bank of TaylorF2
//! templates generated on the fly, with thresholding, clustering, peak refinement
//! and Allen's chi-squared at the surviving peaks.
//!
//! Per template and per thread: generate the template straight into the product
//! `q_k h~_k*` (with `q = 4 df d~ / S`), inverse-FFT it on a grid decimated to the
//! template's bandwidth, scan the analysable samples, and re-evaluate candidates
//! exactly. Nothing of size (templates x samples) exists; each thread holds one
//! buffer of the segment length.
//!
//! Scales: strain-scale numbers (PSD ~1e-47, h~ ~1e-22) are rescaled into O(1)
//! factors held in f64, so the float32 transform never sees values near underflow.

use crate::error::{ensure, Result};
use crate::fft;
use crate::filter::{band, inverse_psd_bin};
use crate::waveform::TaylorF2;
use num_complex::{Complex32, Complex64};
use rayon::prelude::*;
use std::f64::consts::PI;

/// One whitened segment, prepared once and shared by every template.
pub struct Segment {
    /// `4 df d~_k / S_k / q_scale`.
    q: Vec<Complex32>,
    /// `(1 / S_k) / w_scale`, zero outside the analysed band.
    w: Vec<f32>,
    q_scale: f64,
    w_scale: f64,
    df: f64,
    n: usize,
    /// Prefix sums over chunks of `f^(-7/3) w_k f^m`, m = 0, 1, 2: spectral moments of
    /// any template's weight `|h~|^2 / S` over a band, for choosing its decimation.
    moments: [Vec<f64>; 3],
}

impl Segment {
    /// `data` is `d~ = rfft(d) dt` on `n_freq` bins, `psd` the (truncated) PSD on the
    /// same grid with `inf` for excluded bins.
    pub fn new(data: &[Complex64], psd: &[f64], df: f64) -> Result<Self> {
        let n_freq = data.len();
        ensure(n_freq >= 2 && psd.len() == n_freq, "psd", || {
            format!("needs {n_freq} bins, got {}", psd.len())
        })?;
        // Parallel per-bin passes; the maxima are order-independent, so the result
        // does not depend on the thread count.
        let inv = |k: usize| inverse_psd_bin(psd[k]);
        let (q_max, w_max) = (0..n_freq)
            .into_par_iter()
            .map(|k| {
                let i = inv(k);
                ((data[k] * (4.0 * df * i)).norm(), i)
            })
            .reduce(|| (0.0, 0.0), |a, b| (a.0.max(b.0), a.1.max(b.1)));
        ensure(w_max > 0.0, "psd", || "is inf at every frequency".into())?;
        let q_scale = if q_max > 0.0 { q_max } else { 1.0 };
        let (q, w): (Vec<Complex32>, Vec<f32>) = (0..n_freq)
            .into_par_iter()
            .map(|k| {
                let i = inv(k);
                let c = data[k] * (4.0 * df * i / q_scale);
                (Complex32::new(c.re as f32, c.im as f32), (i / w_max) as f32)
            })
            .unzip();
        // Moments of f^(-7/3) w_k (a Newtonian template's weight) per chunk of
        // MOMENT_CHUNK bins, with f^(-7/3) taken at the chunk centre: one cube root per
        // chunk. They only choose the decimation, so 1% accuracy is plenty.
        let chunks = n_freq.div_ceil(MOMENT_CHUNK);
        let sums: Vec<[f64; 3]> = (0..chunks)
            .into_par_iter()
            .map(|c| {
                let (lo, hi) = (c * MOMENT_CHUNK, ((c + 1) * MOMENT_CHUNK).min(n_freq));
                let fc = 0.5 * (lo + hi - 1) as f64 * df;
                let scale = if fc > 0.0 {
                    1.0 / (fc * fc * fc.cbrt())
                } else {
                    0.0
                };
                let mut m = [0.0; 3];
                for k in lo.max(1)..hi {
                    let f = k as f64 * df;
                    let b = w[k] as f64 * scale;
                    m[0] += b;
                    m[1] += b * f;
                    m[2] += b * f * f;
                }
                m
            })
            .collect();
        let mut moments = [
            vec![0.0; chunks + 1],
            vec![0.0; chunks + 1],
            vec![0.0; chunks + 1],
        ];
        for (c, m) in sums.iter().enumerate() {
            for i in 0..3 {
                moments[i][c + 1] = moments[i][c] + m[i];
            }
        }
        Ok(Segment {
            q,
            w,
            q_scale,
            w_scale: w_max,
            df,
            n: 2 * (n_freq - 1),
            moments,
        })
    }

    pub fn n_freq(&self) -> usize {
        self.q.len()
    }

    /// Variance (Hz^2) of frequency under a template's weight over `[k_lo, k_hi)`
    /// (band edges rounded to whole moment chunks).
    fn frequency_variance(&self, k_lo: usize, k_hi: usize) -> f64 {
        let (c_lo, c_hi) = (k_lo / MOMENT_CHUNK, k_hi.div_ceil(MOMENT_CHUNK));
        let m = self.moments.each_ref().map(|p| p[c_hi] - p[c_lo]);
        if m[0] > 0.0 {
            (m[2] / m[0] - (m[1] / m[0]).powi(2)).max(0.0)
        } else {
            0.0
        }
    }

    /// Largest power-of-two decimation `D` (dividing N) whose worst-case loss
    /// `(pi sigma_f D / fs)^2 / 2` stays below `MAX_DECIMATION_LOSS`, and that loss.
    fn decimation(&self, k_lo: usize, k_hi: usize) -> (usize, f64) {
        let fs = self.n as f64 * self.df;
        let sigma_f = self.frequency_variance(k_lo, k_hi).sqrt();
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

/// Bins per chunk of the spectral-moment prefix sums.
const MOMENT_CHUNK: usize = 64;

/// Largest decimation of the coarse SNR series.
pub const MAX_DECIMATION: usize = 64;
/// Largest fractional SNR loss between coarse samples that decimation may cause.
///
/// For a template whose weight `|h~|^2 / S` has frequency variance `sigma_f^2`, the
/// normalised SNR of a matching signal a time `dt` off its peak is at least
/// `1 - (2 pi sigma_f dt)^2 / 2` (since `cos x >= 1 - x^2 / 2`), and a coarse sample
/// is at most `D / 2` samples off. The coarse threshold is lowered by twice that.
pub const MAX_DECIMATION_LOSS: f64 = 0.02;

/// Settings of one search pass over a segment.
#[derive(Clone, Debug)]
pub struct Settings {
    pub f_low: f64,
    pub min_snr: f64,
    /// Half-width, in samples, within which only the loudest peak survives.
    pub cluster: usize,
    pub chi2_bands: usize,
    /// Analysable samples `[valid_start, valid_stop)` of the segment.
    pub valid_start: usize,
    pub valid_stop: usize,
}

/// A template: its phase model and upper frequency (Hz, exclusive).
pub struct Template {
    pub model: TaylorF2,
    pub f_high: f64,
}

/// A clustered, refined peak of one template's SNR.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Trigger {
    pub template: usize,
    /// Sample of the peak in the segment.
    pub index: usize,
    /// Refined peak position in samples from the segment start.
    pub position: f64,
    pub snr: f64,
    /// `arg z` at the refined peak, radians.
    pub phase: f64,
    /// Template norm (template at 1 Mpc), strain units.
    pub sigma: f64,
    pub chi2: f64,
    pub chi2_dof: usize,
}

struct Scratch {
    buf: Vec<Complex32>,
    fft_scratch: Vec<Complex32>,
}

/// Search `segment` with every template; triggers come back ordered by template,
/// then time, independent of the thread count.
pub fn search_segment(
    segment: &Segment,
    templates: &[Template],
    s: &Settings,
) -> Result<Vec<Trigger>> {
    let n = segment.n;
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
    let pool = crate::scratch::Pool::new(|| Scratch {
        buf: vec![zero; n],
        fft_scratch: vec![zero; scratch_len],
    });
    let per_template: Vec<Vec<Trigger>> = templates
        .par_iter()
        .enumerate()
        .map_init(
            || pool.take(),
            |scratch, (i, t)| filter_one(segment, t, i, s, &plans, scratch),
        )
        .collect();
    Ok(per_template.into_iter().flatten().collect())
}

fn filter_one(
    seg: &Segment,
    t: &Template,
    index: usize,
    s: &Settings,
    plans: &[std::sync::Arc<dyn rustfft::Fft<f32>>],
    scratch: &mut Scratch,
) -> Vec<Trigger> {
    let n_freq = seg.n_freq();
    let (k_lo, k_hi) = band(s.f_low, Some(t.f_high), seg.df, n_freq);
    let k_lo = k_lo.max(1);
    if k_hi <= k_lo {
        return Vec::new();
    }
    // O(1) template scale: the amplitude at the lowest bin is the largest.
    let h_ref = t.model.amplitude(k_lo as f64 * seg.df);
    let inv_h = 1.0 / h_ref;
    // The product is stored shifted down by k_lo: |z| is unchanged, and with a
    // transform of length M = N / D the coarse series is exactly z at every D-th
    // sample (bins m >= M fold onto m mod M, which is exact at those samples).
    let (dec, loss) = seg.decimation(k_lo, k_hi);
    let m_len = seg.n / dec;
    let width = k_hi - k_lo;
    let buf = &mut scratch.buf[..m_len];
    let zero = Complex32::new(0.0, 0.0);
    let folded = width > m_len;
    if folded {
        buf.fill(zero);
    } else {
        buf[width..].fill(zero);
    }
    // Four partial sums (fixed assignment by bin) so the additions do not serialise.
    let mut partial = [0.0f64; 4];
    t.model.for_each_block(k_lo, k_hi, seg.df, |k0, block| {
        let n = block.len();
        let (q, w) = (&seg.q[k0..k0 + n], &seg.w[k0..k0 + n]);
        let m0 = k0 - k_lo;
        if !folded {
            fill_run(
                &mut buf[m0..m0 + n],
                block,
                q,
                w,
                inv_h,
                &mut partial,
                false,
            );
        } else {
            // Fold bins m >= M onto m mod M, one contiguous run per wrap.
            let mut done = 0;
            while done < n {
                let start = (m0 + done) % m_len;
                let take = (n - done).min(m_len - start);
                let run = done..done + take;
                fill_run(
                    &mut buf[start..start + take],
                    &block[run.clone()],
                    &q[run.clone()],
                    &w[run],
                    inv_h,
                    &mut partial,
                    true,
                );
                done += take;
            }
        }
    });
    let norm = (partial[0] + partial[1]) + (partial[2] + partial[3]);
    if !(norm > 0.0) {
        return Vec::new();
    }
    // sigma of the unscaled template, and the factor from buffer values to SNR.
    let sigma_unit = (4.0 * seg.df * norm * seg.w_scale).sqrt();
    let sigma = sigma_unit * h_ref;
    let to_snr = seg.q_scale / sigma_unit;
    plans[dec.trailing_zeros() as usize].process_with_scratch(buf, &mut scratch.fft_scratch);

    let threshold = s.min_snr / to_snr;
    // (peak sample, refined position) of every surviving peak, in time order.
    let kept: Vec<(usize, f64)> = if dec == 1 {
        let peaks = find_peaks(
            buf,
            s.valid_start,
            s.valid_stop,
            (threshold * threshold) as f32,
        );
        cluster_peaks(&peaks, s.cluster)
            .into_iter()
            .map(|i| {
                (
                    peaks[i].0,
                    peaks[i].0 as f64 + parabolic_offset(buf, peaks[i].0),
                )
            })
            .collect::<Vec<_>>()
    } else {
        // Coarse candidates (threshold lowered by the decimation loss bound), then
        // exact |z| at the five full-rate samples around each.
        let coarse_thr = threshold * (1.0 - 2.0 * loss);
        let lo = (s.valid_start / dec).saturating_sub(1).max(1);
        let hi = (s.valid_stop.div_ceil(dec) + 1).min(m_len - 1);
        let coarse = find_peaks(buf, lo, hi, (coarse_thr * coarse_thr) as f32);
        let survivors = cluster_peaks(&coarse, s.cluster / dec);
        if survivors.is_empty() {
            return Vec::new();
        }
        let centres: Vec<i64> = survivors
            .iter()
            .map(|&i| {
                let j = coarse[i].0;
                ((j as f64 + parabolic_offset(buf, j)) * dec as f64).round() as i64
            })
            .collect();
        let probe: Vec<f64> = centres
            .iter()
            .flat_map(|&c| (-2..=2).map(move |o| (c + o) as f64))
            .collect();
        let exact = evaluate_bands(seg, t, k_lo, k_hi, inv_h, norm, &probe, 1);
        let mut refined = Vec::new();
        for (c, vals) in centres.iter().zip(exact.chunks(5)) {
            let mag: Vec<f64> = vals.iter().map(|b| b[0].norm() * to_snr).collect();
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
            let (a, b, cc) = (mag[best - 1], mag[best], mag[best + 1]);
            let den = a - 2.0 * b + cc;
            let delta = if den < 0.0 {
                (0.5 * (a - cc) / den).clamp(-0.5, 0.5)
            } else {
                0.0
            };
            refined.push((j as usize, (b / to_snr).powi(2) as f32, j as f64 + delta));
        }
        refined.sort_by_key(|r| r.0);
        refined.dedup_by_key(|r| r.0);
        let peaks: Vec<(usize, f32)> = refined.iter().map(|r| (r.0, r.1)).collect();
        cluster_peaks(&peaks, s.cluster)
            .into_iter()
            .map(|i| (refined[i].0, refined[i].2))
            .collect()
    };
    if kept.is_empty() {
        return Vec::new();
    }
    let positions: Vec<f64> = kept.iter().map(|k| k.1).collect();
    let evals = evaluate_bands(seg, t, k_lo, k_hi, inv_h, norm, &positions, s.chi2_bands);
    kept.iter()
        .zip(evals)
        .map(|(&(j, pos), bands)| {
            let (z, chi2) = combine_bands(&bands, to_snr);
            Trigger {
                template: index,
                index: j,
                position: pos,
                snr: z.norm(),
                phase: z.arg(),
                sigma,
                chi2,
                chi2_dof: 2 * s.chi2_bands - 2,
            }
        })
        .collect()
}

/// `out[j] (+)= q_j conj(h_j / h_ref)` in f32 (products formed in f64), and the
/// template norm `|h_j / h_ref|^2 w_j` into four partial sums by `j mod 4`.
#[inline]
fn fill_run(
    out: &mut [Complex32],
    h: &[Complex64],
    q: &[Complex32],
    w: &[f32],
    inv_h: f64,
    partial: &mut [f64; 4],
    add: bool,
) {
    let n = out.len();
    let mut acc = [0.0f64; 4];
    for j in 0..n {
        let hj = h[j] * inv_h;
        acc[j & 3] += hj.norm_sqr() * w[j] as f64;
        let (qr, qi) = (q[j].re as f64, q[j].im as f64);
        let v = Complex32::new(
            (qr * hj.re + qi * hj.im) as f32,
            (qi * hj.re - qr * hj.im) as f32,
        );
        if add {
            out[j] += v;
        } else {
            out[j] = v;
        }
    }
    for (p, a) in partial.iter_mut().zip(acc) {
        *p += a;
    }
}

/// Local maxima of `|z|^2 >= threshold2` in `[start, stop)`: strictly above the
/// previous sample and at least the next one.
pub fn find_peaks(
    z: &[Complex32],
    start: usize,
    stop: usize,
    threshold2: f32,
) -> Vec<(usize, f32)> {
    let mut out = Vec::new();
    for j in start..stop {
        let p = z[j].norm_sqr();
        if p >= threshold2 && p > z[j - 1].norm_sqr() && p >= z[j + 1].norm_sqr() {
            out.push((j, p));
        }
    }
    out
}

/// Positions in `peaks` of the peaks with no louder one within `window` samples
/// (ties: the earlier peak wins). `peaks` is sorted by sample index.
pub fn cluster_peaks(peaks: &[(usize, f32)], window: usize) -> Vec<usize> {
    let mut kept = Vec::new();
    let mut lo = 0usize;
    for (i, &(j, p)) in peaks.iter().enumerate() {
        while peaks[lo].0 + window < j {
            lo += 1;
        }
        let mut best = true;
        let mut m = lo;
        while m < peaks.len() && peaks[m].0 <= j + window {
            let (jm, pm) = peaks[m];
            if m != i && (pm > p || (pm == p && jm < j)) {
                best = false;
                break;
            }
            m += 1;
        }
        if best {
            kept.push(i);
        }
    }
    kept
}

/// Vertex of the parabola through `|z|` at `j - 1, j, j + 1`, in `[-0.5, 0.5]`.
fn parabolic_offset(z: &[Complex32], j: usize) -> f64 {
    let (a, b, c) = (
        z[j - 1].norm() as f64,
        z[j].norm() as f64,
        z[j + 1].norm() as f64,
    );
    let den = a - 2.0 * b + c;
    if den < 0.0 {
        (0.5 * (a - c) / den).clamp(-0.5, 0.5)
    } else {
        0.0
    }
}

/// For each position `t` (samples), the band sums `sum_{k in band l} q_k h~_k* e^(2 pi i k t / N)`
/// over `p` bands of equal share of `sigma^2`: bin `k` belongs to band
/// `min(p - 1, floor(p C_k / sigma^2))`, `C_k` the norm accumulated below `k`.
fn evaluate_bands(
    seg: &Segment,
    t: &Template,
    k_lo: usize,
    k_hi: usize,
    inv_h: f64,
    norm: f64,
    positions: &[f64],
    p: usize,
) -> Vec<Vec<Complex64>> {
    let n = seg.n as f64;
    let mut sums = vec![vec![Complex64::new(0.0, 0.0); p]; positions.len()];
    // Twiddles exp(2 pi i k t / N) by recurrence, re-seeded exactly every 1024 bins.
    let steps: Vec<Complex64> = positions
        .iter()
        .map(|&x| Complex64::from_polar(1.0, 2.0 * PI * x / n))
        .collect();
    let mut rot: Vec<Complex64> = vec![Complex64::new(1.0, 0.0); positions.len()];
    let mut cumulative = 0.0f64;
    let per_band = norm / p as f64;
    t.model.for_each_bin(k_lo, k_hi, seg.df, |k, h| {
        let h = h * inv_h;
        let l = ((cumulative / per_band) as usize).min(p - 1);
        cumulative += h.norm_sqr() * seg.w[k] as f64;
        let q = seg.q[k];
        let prod = Complex64::new(q.re as f64, q.im as f64) * h.conj();
        let reseed = k == k_lo || (k - k_lo) % 1024 == 0;
        for (m, &x) in positions.iter().enumerate() {
            if reseed {
                rot[m] = Complex64::from_polar(1.0, 2.0 * PI * ((k as f64 * x) % n) / n);
            }
            sums[m][l] += prod * rot[m];
            rot[m] *= steps[m];
        }
    });
    sums
}

/// SNR `z = sum_l z_l` and Allen's `chi^2 = p sum_l |z_l - z / p|^2` from band sums.
fn combine_bands(bands: &[Complex64], to_snr: f64) -> (Complex64, f64) {
    let p = bands.len() as f64;
    let z: Complex64 = bands.iter().sum::<Complex64>() * to_snr;
    let chi2 = bands
        .iter()
        .map(|b| (b * to_snr - z / p).norm_sqr())
        .sum::<f64>()
        * p;
    (z, chi2)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn clustering_keeps_loudest_in_window() {
        let peaks = vec![(10, 1.0), (12, 3.0), (20, 2.0), (40, 2.0), (44, 2.0)];
        assert_eq!(cluster_peaks(&peaks, 5), vec![1, 2, 3]);
        assert_eq!(cluster_peaks(&peaks, 100), vec![1]);
        assert_eq!(cluster_peaks(&peaks, 0), vec![0, 1, 2, 3, 4]);
    }

    #[test]
    fn chi2_vanishes_when_bands_share_equally() {
        // Allen 2005 (PRD 71, 062001): z_l = z / p for a signal matching the template.
        let bands = vec![Complex64::new(1.0, 2.0); 8];
        let (z, chi2) = combine_bands(&bands, 0.5);
        assert!((z - Complex64::new(4.0, 8.0)).norm() < 1e-12);
        assert!(chi2.abs() < 1e-20);
    }
}
