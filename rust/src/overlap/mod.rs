//! The match of two templates: their normalised overlap maximised over coalescence
//! time and phase (Owen 1996, PRD 53, 6749, gr-qc/9511032),
//! `max_{t, phi} <h1|h2 e^{i(2 pi f t + phi)}> / sqrt(<h1|h1><h2|h2>)`, and the
//! fitting factor of points against a bank (the best match over candidate templates).
//!
//! Maximising over phase is taking the modulus of the complex overlap; maximising
//! over time is an inverse transform of the weighted product. The product is zero
//! outside the pair's common band `[a, b)`, so the transform is sized to that band
//! (`L = fast_length(b - a)` points, a complex transform: the band shifted to zero
//! frequency changes only the phase of the series, not its modulus), and covers
//! the whole circular time range `1/df` at spacing `1/(L df)`. The grid peak is
//! refined by Newton steps on `|z(t)|^2` from the vertex of a parabola through
//! `ln |z|` at the grid maximum and its neighbours, with `z`, `z'` and `z''` summed
//! exactly ([`sums`]: split real and imaginary parts, AVX2 and FMA where the
//! processor has them); the last step's quadratic model gives the peak value. A
//! flat-topped peak (pairs matching below about 0.8) is searched at half-sample
//! offsets over two samples either side first, since |z| ripples there.

use crate::error::{ensure, Error, Result};
use crate::fft::{self, fast_length};
use crate::filter::AsComplex64;
use crate::grid::{band, bin_at_or_above};
use crate::peaks::vertex;
use crate::scratch::Pool;
use crate::waveform::{Binary, Model};
use num_complex::Complex64;
use rayon::prelude::*;
use rustfft::Fft;
use std::collections::HashMap;
use std::sync::Arc;

mod sums;

/// Per-job buffers: the transform's input/output (the products first, zero-padded),
/// the products split into real and imaginary parts for the exact sums, the
/// transform's scratch, and plans cached per length (the shared planner sits behind
/// a lock).
#[derive(Default)]
pub struct Scratch {
    series: Vec<Complex64>,
    re: Vec<f64>,
    im: Vec<f64>,
    fft_scratch: Vec<Complex64>,
    plans: HashMap<usize, Arc<dyn Fft<f64>>>,
    template: Vec<Complex64>,
}

impl Scratch {
    fn plan(&mut self, n: usize) -> Arc<dyn Fft<f64>> {
        self.plans
            .entry(n)
            .or_insert_with(|| fft::inverse::<f64>(n))
            .clone()
    }

    /// The first `m` entries of the series, zeroed, for the products of a pair.
    fn products(&mut self, m: usize) -> &mut [Complex64] {
        self.series.clear();
        self.series.resize(m, Complex64::new(0.0, 0.0));
        &mut self.series
    }
}

/// Points of the inverse transform for a pair band of `bins` bins.
pub fn transform_length(bins: usize) -> usize {
    fast_length(bins.max(4))
}

/// Newton steps at most per pair after the first exact sum.
const MAX_STEPS: usize = 6;
/// Steps shorter than this (samples) are not tried.
const CONVERGED: f64 = 1e-4;
/// A Newton step of at most this many samples ends the refinement: the quadratic
/// model's peak value is returned instead of another sum at the step's end.
const ACCEPT_STEP: f64 = 3e-3;

/// `max_t |sum_{k} p_k exp(2 pi i k t)|` for the `m` products in the first `m`
/// entries of `scratch`'s series (bin `a + k` of the pair's band stored at `k`),
/// `t` in units of the circular period: the grid maximum of an `L`-point inverse
/// transform, refined by Newton steps on exactly summed `z`, `z'` and `z''`.
pub fn peak_modulus(scratch: &mut Scratch, m: usize) -> f64 {
    if m == 0 {
        return 0.0;
    }
    let l = transform_length(m);
    let plan = scratch.plan(l);
    let Scratch { series, re, im, fft_scratch, .. } = scratch;
    re.clear();
    im.clear();
    re.extend(series[..m].iter().map(|v| v.re));
    im.extend(series[..m].iter().map(|v| v.im));
    series.resize(l, Complex64::new(0.0, 0.0));
    let need = plan.get_inplace_scratch_len();
    if fft_scratch.len() < need {
        fft_scratch.resize(need, Complex64::new(0.0, 0.0));
    }
    plan.process_with_scratch(series, &mut fft_scratch[..need]);
    let j = argmax_modulus(series);
    let at = |i: isize| series[i.rem_euclid(l as isize) as usize].norm();
    let (a, b, c) = (at(j as isize - 1), at(j as isize), at(j as isize + 1));
    // The grid holds the series at the Nyquist rate of the band, where interpolation
    // misses the top of the peak: for 200 pairs of 10+10 Msun templates against
    // neighbours within 0.3 Msun from 30 Hz on the design curve, a parabola through
    // |z| is off by up to 13% (median 2.4%), and one exact sum at the vertex of a
    // parabola through ln|z| by up to 8% (median 0.2%). So Newton steps (`refine`)
    // start there.
    let (re, im) = (&re[..], &im[..]);
    let (value, climbed) = refine(re, im, l, j as f64 + ln_vertex(a, b, c));
    let mut best = value.max(b);
    // A flat top: for pairs that match below about 0.8, |z| stays within a few
    // percent of its largest grid sample over several samples and ripples there
    // (lobes about 1.2 samples apart), so the lobe the Newton steps climb from the
    // grid maximum need not hold the peak (shortfalls up to 1.5% were measured).
    // Such a neighbourhood is told by its grid samples: one next to j above FLAT_1 b
    // and one two from j above FLAT_2 b (every pair that fell short had at least
    // 0.96 b and 0.81 b; pairs matching 0.8-1 stay below 0.75 b two samples away).
    // Its profile is then summed at PROBE-sample offsets over +-SPAN samples and the
    // refinement run again from each of its local maxima within MARGIN of the
    // profile's largest value, except from the lobe already climbed.
    if a.max(c) > FLAT_1 * b && at(j as isize - 2).max(at(j as isize + 2)) > FLAT_2 * b {
        best = best.max(profile_peak(re, im, series, j, climbed));
        // other lobes whose grid maximum comes near j's (found 3-4 samples away
        // for pairs matching below 0.4)
        let floor = (LOBE * b) * (LOBE * b);
        for i in 0..l {
            if series[i].norm_sqr() < floor {
                continue;
            }
            let apart = (i as isize - j as isize).rem_euclid(l as isize).min((j as isize - i as isize).rem_euclid(l as isize));
            let v = series[i].norm();
            if apart > SPAN as isize && v >= LOBE * b && v >= at(i as isize - 1) && v >= at(i as isize + 1) {
                best = best.max(profile_peak(re, im, series, i, f64::NAN));
            }
        }
    }
    best
}

/// A flat top: a grid sample next to the maximum above FLAT_1 of it, and one two
/// samples from it above FLAT_2 of it.
const FLAT_1: f64 = 0.93;
const FLAT_2: f64 = 0.78;
/// Other grid local maxima of a flat top's series above this fraction of the largest
/// are searched too.
const LOBE: f64 = 0.8;
/// Probes of a flat top: offsets (samples) between them, per sample, the span either
/// side of the grid maximum (samples) and the count.
const PROBE: f64 = 0.5;
const PER_SAMPLE: usize = 2;
const SPAN: f64 = 2.0;
const PROFILE: usize = 9;
/// Local maxima of a flat top's profile within this fraction of its top are refined.
/// Measured on fine profiles of the lobed pairs: lobes about 1.2 samples apart whose
/// peaks differ by as little as 0.2%, and a probe 0.25 samples (PROBE / 2) from a
/// lobe's peak reads up to 0.9% low, so the lobe that holds the peak stays within
/// about 1.1% of the profile's top (3% leaves a margin). Quarter-sample probes with a
/// 1% margin gave the same matches (within 1.2e-8 of a fine-grid search over 1,400
/// pairs) at 12 sums instead of 4.
const MARGIN: f64 = 0.03;
/// A profile maximum this close (samples) to where a refinement ended is its lobe.
const SAME_LOBE: f64 = 0.25;

/// The best refined `|z|` near grid sample `j` of the transformed `series`: `|z|` at
/// PROBE-sample offsets over +-SPAN samples (the grid's samples, exact sums between),
/// then the refinement from each local maximum of that profile within MARGIN of its
/// largest value, unless the start lies within SAME_LOBE samples of `climbed` (where
/// a refinement has ended already; NaN for none).
fn profile_peak(re: &[f64], im: &[f64], series: &[Complex64], j: usize, climbed: f64) -> f64 {
    let l = series.len();
    let at = |i: isize| series[i.rem_euclid(l as isize) as usize].norm();
    let mut profile = [0.0f64; PROFILE];
    for (i, v) in profile.iter_mut().enumerate() {
        *v = if i % PER_SAMPLE == 0 {
            at(j as isize + (i / PER_SAMPLE) as isize - SPAN as isize)
        } else {
            sums::value(re, im, l, j as f64 + i as f64 * PROBE - SPAN).norm()
        };
    }
    let top = profile.iter().fold(0.0f64, |x, &y| x.max(y));
    let mut best = top;
    for i in 0..PROFILE {
        let v = profile[i];
        let left = if i > 0 { profile[i - 1] } else { 0.0 };
        let right = if i + 1 < PROFILE { profile[i + 1] } else { 0.0 };
        if v >= left && v >= right && v >= (1.0 - MARGIN) * top {
            let shift = if i > 0 && i + 1 < PROFILE { ln_vertex(left, v, right) } else { 0.0 };
            let t = j as f64 + (i as f64 + shift) * PROBE - SPAN;
            if !((t - climbed).abs() < SAME_LOBE) {
                best = best.max(refine(re, im, l, t).0);
            }
        }
    }
    best
}

/// Vertex (within half a spacing) of a parabola through `ln |z|` at three equally
/// spaced points, or through `|z|` where one is zero.
fn ln_vertex(a: f64, b: f64, c: f64) -> f64 {
    if a > 0.0 && b > 0.0 && c > 0.0 {
        vertex(a.ln(), b.ln(), c.ln())
    } else {
        vertex(a, b, c)
    }
}

/// The largest `|z|` reached by Newton steps on `f = |z(t)|^2` from `t` (samples), and
/// where (samples), with `z`, `z'` and `z''` summed exactly; a step that does not raise `|z|` is
/// halved. Once the Newton step is at most ACCEPT_STEP samples the quadratic model's
/// peak, `f + f'^2 / (2 |f''|)`, is returned rather than summed again. Its error is of
/// order `f''' step^3`: for the pairs of [`peak_modulus`]'s note it is within 4e-8 of
/// the refinement run to its old stopping rule (gain below 1e-7 f), and it saves the
/// sum that confirmed a converged step (3.6 sums per pair, not 4.1).
fn refine(re: &[f64], im: &[f64], l: usize, mut t: f64) -> (f64, f64) {
    let (mut z0, mut d1, mut d2) = sums::direct_sums(re, im, l, t);
    let mut value = z0.norm();
    for _ in 0..MAX_STEPS {
        let slope = 2.0 * (z0.conj() * d1).re;
        let curve = 2.0 * (d1.norm_sqr() + (z0.conj() * d2).re);
        let mut step = if curve < 0.0 {
            let newton = -slope / curve;
            if newton.abs() <= ACCEPT_STEP {
                value = (value * value + 0.5 * slope * newton).sqrt();
                t += newton;
                break;
            }
            newton.clamp(-1.0, 1.0)
        } else {
            0.25 * slope.signum()
        };
        let mut moved = false;
        while step.abs() >= CONVERGED {
            let (z1, e1, e2) = sums::direct_sums(re, im, l, t + step);
            if z1.norm() > value {
                (t, z0, d1, d2, value, moved) = (t + step, z1, e1, e2, z1.norm(), true);
                break;
            }
            step *= 0.5;
        }
        if !moved || step.abs() < CONVERGED {
            break;
        }
    }
    (value, t)
}

/// Index of the first largest `|z_j|^2` (lanes of four, then the first index that
/// holds the largest value: the same index as a plain scan).
fn argmax_modulus(z: &[Complex64]) -> usize {
    let mut top = [-1.0f64; 4];
    let mut chunks = z.chunks_exact(4);
    for c in &mut chunks {
        for j in 0..4 {
            let v = c[j].norm_sqr();
            top[j] = if v > top[j] { v } else { top[j] };
        }
    }
    for v in chunks.remainder() {
        let v = v.norm_sqr();
        top[0] = if v > top[0] { v } else { top[0] };
    }
    let largest = top.iter().fold(-1.0f64, |a, &b| if b > a { b } else { a });
    z.iter().position(|v| v.norm_sqr() == largest).unwrap_or(0)
}

/// Nonzero extent `[first, last + 1)` of `h` weighted by `w` within `[k_lo, k_hi)`,
/// and `sum |h|^2 w` over it; `Err(k)` for the first non-finite bin in the band.
///
/// The sum runs in four lanes over the whole band (bins outside the extent add
/// zero); a non-finite bin makes it non-finite, and only then is the band searched
/// for that bin.
fn extent<H: AsComplex64>(
    h: &[H],
    w: &[f64],
    k_lo: usize,
    k_hi: usize,
) -> std::result::Result<(usize, usize, f64), usize> {
    #[cfg(target_arch = "x86_64")]
    {
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the feature the function enables was detected just above.
            return unsafe { avx2::extent(h, w, k_lo, k_hi) };
        }
    }
    extent_lanes(h, w, k_lo, k_hi)
}

/// [`extent`]'s arithmetic, inlined into each caller so that each compiles it for its
/// own instruction set (the same operations in the same order: the same bits).
#[inline(always)]
fn extent_lanes<H: AsComplex64>(
    h: &[H],
    w: &[f64],
    k_lo: usize,
    k_hi: usize,
) -> std::result::Result<(usize, usize, f64), usize> {
    let (h, w) = (&h[k_lo..k_hi], &w[k_lo..k_hi]);
    let power = |k: usize| h[k].c64().norm_sqr() * w[k];
    let mut lanes = [0.0f64; 4];
    let (hc, wc) = (h.chunks_exact(4), w.chunks_exact(4));
    let (h_rest, w_rest) = (hc.remainder(), wc.remainder());
    for (hb, wb) in hc.zip(wc) {
        for j in 0..4 {
            lanes[j] += hb[j].c64().norm_sqr() * wb[j];
        }
    }
    for (j, (v, &wk)) in h_rest.iter().zip(w_rest).enumerate() {
        lanes[j] += v.c64().norm_sqr() * wk;
    }
    let norm = (lanes[0] + lanes[1]) + (lanes[2] + lanes[3]);
    if !norm.is_finite() {
        if let Some(k) = h.iter().position(|v| {
            let v = v.c64();
            !(v.re.is_finite() && v.im.is_finite())
        }) {
            return Err(k_lo + k);
        }
    }
    match (0..h.len()).position(|k| power(k) > 0.0) {
        Some(first) => {
            let last = (0..h.len()).rposition(|k| power(k) > 0.0).unwrap_or(first) + 1;
            Ok((k_lo + first, k_lo + last, norm))
        }
        None => Ok((k_hi, k_hi, norm)),
    }
}

/// `out_k = x_k y_k* w_k scale`.
fn weighted_product<H: AsComplex64>(out: &mut [Complex64], x: &[H], y: &[H], w: &[f64], scale: f64) {
    #[cfg(target_arch = "x86_64")]
    {
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the feature the function enables was detected just above.
            return unsafe { avx2::weighted_product(out, x, y, w, scale) };
        }
    }
    weighted_product_lanes(out, x, y, w, scale)
}

#[inline(always)]
fn weighted_product_lanes<H: AsComplex64>(out: &mut [Complex64], x: &[H], y: &[H], w: &[f64], scale: f64) {
    for (((v, a), b), &wk) in out.iter_mut().zip(x).zip(y).zip(w) {
        *v = a.c64() * b.c64().conj() * (wk * scale);
    }
}

/// The row scan and the product compiled for AVX2 (no fused multiply-adds: the
/// results are those of the portable code, bit for bit).
#[cfg(target_arch = "x86_64")]
mod avx2 {
    use super::{extent_lanes, weighted_product_lanes, AsComplex64, Complex64};

    /// # Safety
    /// The processor must have AVX2.
    #[target_feature(enable = "avx2")]
    pub unsafe fn extent<H: AsComplex64>(
        h: &[H],
        w: &[f64],
        k_lo: usize,
        k_hi: usize,
    ) -> std::result::Result<(usize, usize, f64), usize> {
        extent_lanes(h, w, k_lo, k_hi)
    }

    /// # Safety
    /// The processor must have AVX2.
    #[target_feature(enable = "avx2")]
    pub unsafe fn weighted_product<H: AsComplex64>(out: &mut [Complex64], x: &[H], y: &[H], w: &[f64], scale: f64) {
        weighted_product_lanes(out, x, y, w, scale)
    }
}

/// Which rows are compared: row `i` of `h1` with row `i` of `h2` (equal row counts),
/// or one row of `h1` with every row of `h2` (or every row of `h1` with one of `h2`).
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Pairing {
    Pairwise,
    Broadcast,
}

/// Matches of the rows of `h1` `(n1, n_freq)` and `h2` `(n2, n_freq)`, row-major, over
/// the bins `f_low <= k df < f_high`, weighted by `inv_psd` (`1/S`, zero where
/// excluded). Pairs as [`Pairing`]: `n1 == n2` pairs row by row; otherwise one side
/// must have one row and is compared with every row of the other.
///
/// Bins outside the band are never read.
///
/// # Errors
/// Row counts that neither pair nor broadcast, a `psd` of the wrong length, a row that
/// is not finite inside the band, or a row with no power in the band (its match is
/// undefined).
#[allow(clippy::too_many_arguments)]
pub fn matches<H: AsComplex64>(
    h1: &[H],
    h2: &[H],
    n_freq: usize,
    inv_psd: &[f64],
    df: f64,
    f_low: f64,
    f_high: Option<f64>,
) -> Result<Vec<f64>> {
    ensure(n_freq > 0, "h1", || "templates have no frequency bins".into())?;
    ensure(inv_psd.len() == n_freq, "psd", || {
        format!("has {} bins but the templates have {n_freq}", inv_psd.len())
    })?;
    let (n1, n2) = (h1.len() / n_freq, h2.len() / n_freq);
    ensure(n1 > 0, "h1", || "holds no templates".into())?;
    ensure(n2 > 0, "h2", || "holds no templates".into())?;
    ensure(n1 == n2 || n1 == 1 || n2 == 1, "h2", || {
        format!("has {n2} rows and h1 {n1}: give equal counts (pairwise) or one row on either side")
    })?;
    let (k_lo, k_hi) = band(f_low, f_high, df, n_freq);
    let rows = |h: &[H], name: &'static str| -> Result<Vec<(usize, usize, f64)>> {
        h.par_chunks(n_freq)
            .enumerate()
            .map(|(i, row)| {
                let e = extent(row, inv_psd, k_lo, k_hi).map_err(|k| {
                    Error::invalid(name, format!("row {i} is not finite at bin {k} (inside the band)"))
                })?;
                if e.2 > 0.0 && e.2.is_finite() {
                    Ok(e)
                } else {
                    Err(Error::invalid(name, format!(
                        "row {i} has no power between f_low and f_high where the PSD is finite"
                    )))
                }
            })
            .collect()
    };
    let (e1, e2) = (rows(h1, "h1")?, rows(h2, "h2")?);
    let n = n1.max(n2);
    let pool = Pool::new(Scratch::default);
    let out = (0..n)
        .into_par_iter()
        .map(|p| {
            let (i, j) = (if n1 == 1 { 0 } else { p }, if n2 == 1 { 0 } else { p });
            let (a, b) = (e1[i].0.max(e2[j].0), e1[i].1.min(e2[j].1));
            if b <= a {
                return 0.0;
            }
            let mut s = pool.take();
            let (r1, r2) = (&h1[i * n_freq..], &h2[j * n_freq..]);
            let scale = 1.0 / (e1[i].2 * e2[j].2).sqrt();
            weighted_product(s.products(b - a), &r1[a..b], &r2[a..b], &inv_psd[a..b], scale);
            peak_modulus(&mut s, b - a).min(1.0)
        })
        .collect();
    Ok(out)
}

/// Template parameters `(m1, m2, chi1, chi2)` by columns.
pub struct Params<'a> {
    pub m1: &'a [f64],
    pub m2: &'a [f64],
    pub chi1: &'a [f64],
    pub chi2: &'a [f64],
}

impl Params<'_> {
    fn len(&self) -> usize {
        self.m1.len()
    }
}

/// The frequency grid of a fitting-factor sweep: `1/S` on the finest grid
/// (`df_fine`, bins from 0), the band's lower edge and the upper cap (Hz).
pub struct SweepGrid<'a> {
    pub inv_psd: &'a [f64],
    pub df_fine: f64,
    pub f_low: f64,
    pub f_cap: f64,
}

/// Coarsest grid per point: the period `1/df` is `1/df_fine` halved while it stays
/// above `DURATION_SAFETY` times the longest template of the point's comparisons plus
/// `DURATION_PAD` s, so no correlation lag near the peak wraps around. What is left
/// is the aliasing of the ringing of the band edges: 10+10 against 10.5+9.8 Msun
/// from 30 Hz with flat weights (2.5 s templates) match 0.7128 with an 8 s period,
/// 0.7134 with 16 s and 0.7138 with 64 s (`tests::fitting_factor_equals_explicit_matches`).
const DURATION_SAFETY: f64 = 1.1;
const DURATION_PAD: f64 = 2.0;

/// The period (s) a comparison of templates lasting up to `longest` s needs.
pub fn required_period(longest: f64) -> f64 {
    DURATION_SAFETY * longest + DURATION_PAD
}

/// For every point, its best match over the bank templates `candidates` lists for it
/// (`indptr`/`indices`, compressed rows: point `p`'s candidates are
/// `indices[indptr[p]..indptr[p + 1]]`), and which template gave it (`-1` when a point
/// has no candidates, with match 0). Templates are TaylorF2 (`phase_order` 7),
/// generated on the fly on each point's grid (never stored), each from `f_low` to its
/// ISCO frequency or `f_cap`, whichever is lower.
///
/// # Errors
/// An invalid point or template (as [`crate::waveform::Binary::new`] names it), a
/// candidate index out of range, or a grid too coarse for the longest template.
pub fn best_matches(
    points: &Params<'_>,
    bank: &Params<'_>,
    indptr: &[usize],
    indices: &[usize],
    grid: &SweepGrid<'_>,
) -> Result<(Vec<f64>, Vec<i64>)> {
    let np = points.len();
    ensure(indptr.len() == np + 1, "indptr", || {
        format!("has {} entries for {np} points", indptr.len())
    })?;
    ensure(
        indptr.windows(2).all(|w| w[0] <= w[1]) && indptr.last() == Some(&indices.len()),
        "indptr",
        || "must rise from 0 to len(indices)".into(),
    )?;
    ensure(indptr[0] == 0, "indptr", || "must start at 0".into())?;
    let nb = bank.len();
    ensure(indices.iter().all(|&i| i < nb), "indices", || {
        format!("a candidate index is out of range for a bank of {nb}")
    })?;
    let pm = crate::waveform::models(points.m1, points.m2, points.chi1, points.chi2, 1.0, 7)?;
    let duration = |m: &Model| m.duration(grid.f_low);
    // Only the templates some point names are built, once per call: a sweep comes in
    // chunks of points, and a large bank's other templates would be built per chunk.
    let mut used = indices.to_vec();
    used.sort_unstable();
    used.dedup();
    let built: Vec<(Model, f64)> = used
        .par_iter()
        .map(|&c| {
            let b = Binary::new(bank.m1[c], bank.m2[c], bank.chi1[c], bank.chi2[c])?;
            let m = Model::taylorf2(&b, 1.0, 7)?;
            let d = duration(&m);
            Ok((m, d))
        })
        .collect::<Result<_>>()?;
    let template = |c: usize| &built[used.binary_search(&c).expect("every candidate was built")];
    let period_fine = 1.0 / grid.df_fine;
    let n_fine = grid.inv_psd.len();
    let pool = Pool::new(Scratch::default);
    let results: Vec<Result<(f64, i64)>> = (0..np)
        .into_par_iter()
        .map(|p| {
            let cands = &indices[indptr[p]..indptr[p + 1]];
            if cands.is_empty() {
                return Ok((0.0, -1));
            }
            let longest = cands
                .iter()
                .map(|&c| template(c).1)
                .fold(duration(&pm[p]), f64::max);
            let need = required_period(longest);
            if need > period_fine {
                return Err(Error::invalid("psd", format!(
                    "grid period {period_fine} s is shorter than the {need:.1} s point {p} needs"
                )));
            }
            let mut stride = 1usize;
            while period_fine / (2 * stride) as f64 >= need && (n_fine - 1) / (2 * stride) > 0 {
                stride *= 2;
            }
            let df = grid.df_fine * stride as f64;
            let n_freq = (n_fine - 1) / stride + 1;
            let w = |k: usize| grid.inv_psd[k * stride];
            let upper = |m: &Model| m.default_f_high().min(grid.f_cap);
            let (k_lo, k_hi_p) = band(grid.f_low, Some(upper(&pm[p])), df, n_freq);
            let mut s = pool.take();
            // the point, weighted: a_k = h_k / S_k, and its norm
            let mut a = std::mem::take(&mut s.template);
            a.clear();
            a.resize(k_hi_p.saturating_sub(k_lo), Complex64::new(0.0, 0.0));
            let mut norm_p = 0.0;
            pm[p].for_each_block(k_lo, k_hi_p, df, |k0, block| {
                for (j, &h) in block.iter().enumerate() {
                    let wk = w(k0 + j);
                    a[k0 + j - k_lo] = h * wk;
                    norm_p += h.norm_sqr() * wk;
                }
            });
            let mut best = (0.0f64, -1i64);
            if norm_p > 0.0 {
                for &c in cands {
                    let model = &template(c).0;
                    let k_hi_c = bin_at_or_above(upper(model), df).min(n_freq).max(k_lo);
                    let m = k_hi_c.min(k_hi_p).saturating_sub(k_lo);
                    let mut norm_c = 0.0;
                    let product = s.products(m);
                    model.for_each_block(k_lo, k_hi_c, df, |k0, block| {
                        for (j, &h) in block.iter().enumerate() {
                            let k = k0 + j;
                            norm_c += h.norm_sqr() * w(k);
                            if k - k_lo < m {
                                product[k - k_lo] = a[k - k_lo] * h.conj();
                            }
                        }
                    });
                    if norm_c <= 0.0 {
                        continue;
                    }
                    let v = (peak_modulus(&mut s, m) / (norm_p * norm_c).sqrt()).min(1.0);
                    if v > best.0 {
                        best = (v, c as i64);
                    }
                }
            }
            s.template = a;
            Ok(best)
        })
        .collect();
    let mut values = Vec::with_capacity(np);
    let mut which = Vec::with_capacity(np);
    for r in results {
        let (v, i) = r?;
        values.push(v);
        which.push(i);
    }
    Ok((values, which))
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::f64::consts::PI;

    /// Brute force: the overlap at `n_t` trial lags on a fine grid, by direct sums.
    fn brute(h1: &[Complex64], h2: &[Complex64], w: &[f64], df: f64, n_t: usize) -> f64 {
        let norm = |h: &[Complex64]| h.iter().zip(w).map(|(x, &wk)| x.norm_sqr() * wk).sum::<f64>();
        let s = (norm(h1) * norm(h2)).sqrt();
        let period = 1.0 / df;
        (0..n_t)
            .map(|i| {
                let t = period * i as f64 / n_t as f64;
                let z: Complex64 = (0..h1.len())
                    .map(|k| {
                        h1[k] * h2[k].conj() * w[k] * Complex64::from_polar(1.0, 2.0 * PI * k as f64 * df * t)
                    })
                    .sum();
                z.norm() / s
            })
            .fold(0.0, f64::max)
    }

    fn template(m1: f64, m2: f64, df: f64, n: usize, f_low: f64) -> Vec<Complex64> {
        let m = Model::taylorf2(&Binary::new(m1, m2, 0.0, 0.0).unwrap(), 1.0, 7).unwrap();
        let mut h = vec![Complex64::new(0.0, 0.0); n];
        let (k_lo, k_hi) = band(f_low, Some(m.default_f_high()), df, n);
        m.for_each_bin(k_lo, k_hi, df, |k, v| h[k] = v);
        h
    }

    #[test]
    fn self_match_is_one_and_symmetric_and_agrees_with_brute_force() {
        // 8 s period, 2 kHz Nyquist: 10+10 Msun templates from 30 Hz last ~2 s.
        let (df, n, f_low) = (0.125, 16385, 30.0);
        let w = vec![1.0; n];
        let (h1, h2) = (template(10.0, 10.0, df, n, f_low), template(11.0, 9.5, df, n, f_low));
        let one = matches(&h1, &h1, n, &w, df, f_low, None).unwrap()[0];
        assert!((one - 1.0).abs() < 1e-12, "{one}");
        let ab = matches(&h1, &h2, n, &w, df, f_low, None).unwrap()[0];
        let ba = matches(&h2, &h1, n, &w, df, f_low, None).unwrap()[0];
        assert!((ab - ba).abs() < 1e-9, "{ab} {ba}");
        // brute force over 4x finer lags than the band-limited series
        let b = brute(&h1, &h2, &w, df, 4 * 16384);
        assert!((ab - b).abs() < 2e-4, "kernel {ab} brute {b}");
        assert!(ab < 0.999 && ab > 0.3, "{ab}");
    }

    #[test]
    fn dispatched_scan_and_product_equal_the_portable_ones_bit_for_bit() {
        use num_complex::Complex32;
        let (df, n, f_low) = (0.125, 16385, 30.0);
        let w: Vec<f64> = (0..n).map(|k| 1.0 + (k % 7) as f64).collect();
        let (h1, h2) = (template(10.0, 10.0, df, n, f_low), template(11.0, 9.5, df, n, f_low));
        let h32: Vec<Complex32> = h2.iter().map(|v| Complex32::new(v.re as f32, v.im as f32)).collect();
        for (lo, hi) in [(240, 1761), (241, 1762), (0, n), (300, 303)] {
            assert_eq!(extent(&h1, &w, lo, hi), extent_lanes(&h1, &w, lo, hi));
            assert_eq!(extent(&h32, &w, lo, hi), extent_lanes(&h32, &w, lo, hi));
            let zero = Complex64::new(0.0, 0.0);
            let (mut a, mut b) = (vec![zero; hi - lo], vec![zero; hi - lo]);
            weighted_product(&mut a, &h1[lo..hi], &h2[lo..hi], &w[lo..hi], 0.3);
            weighted_product_lanes(&mut b, &h1[lo..hi], &h2[lo..hi], &w[lo..hi], 0.3);
            assert_eq!(a, b);
        }
        // a non-finite bin is found and named
        let mut bad = h1.clone();
        bad[500] = Complex64::new(f64::NAN, 0.0);
        assert_eq!(extent(&bad, &w, 240, 1761), Err(500));
    }

    #[test]
    fn shifted_rotated_copy_matches_one() {
        let (df, n, f_low) = (0.125, 16385, 30.0);
        let w = vec![1.0; n];
        let h1 = template(10.0, 10.0, df, n, f_low);
        let (t, phi) = (0.123456, 1.1);
        let h2: Vec<Complex64> = h1
            .iter()
            .enumerate()
            .map(|(k, &x)| x * Complex64::from_polar(1.0, 2.0 * PI * k as f64 * df * t + phi))
            .collect();
        let v = matches(&h1, &h2, n, &w, df, f_low, None).unwrap()[0];
        assert!((v - 1.0).abs() < 1e-6, "{v}");
    }

    #[test]
    fn fitting_factor_equals_explicit_matches() {
        // A point against three templates on a grid fine enough for all of them.
        let f_low = 30.0;
        let df_fine = 1.0 / 16.0;
        let n_fine = (2048.0 / df_fine) as usize + 1;
        let w: Vec<f64> = (0..n_fine).map(|k| if k == 0 { 0.0 } else { 1.0 }).collect();
        let pts = ([10.0], [10.0], [0.0], [0.0]);
        let bank = ([10.0, 10.5, 12.0], [10.0, 9.8, 9.0], [0.0; 3], [0.0; 3]);
        let grid = SweepGrid { inv_psd: &w, df_fine, f_low, f_cap: 2048.0 };
        let (v, i) = best_matches(
            &Params { m1: &pts.0, m2: &pts.1, chi1: &pts.2, chi2: &pts.3 },
            &Params { m1: &bank.0, m2: &bank.1, chi1: &bank.2, chi2: &bank.3 },
            &[0, 3],
            &[0, 1, 2],
            &grid,
        )
        .unwrap();
        assert_eq!(i[0], 0);
        assert!((v[0] - 1.0).abs() < 1e-9, "{}", v[0]);
        let (v, i) = best_matches(
            &Params { m1: &pts.0, m2: &pts.1, chi1: &pts.2, chi2: &pts.3 },
            &Params { m1: &bank.0, m2: &bank.1, chi1: &bank.2, chi2: &bank.3 },
            &[0, 2],
            &[1, 2],
            &grid,
        )
        .unwrap();
        // The same pair through `matches` on the grid the sweep picks (period 8 s:
        // the longest template lasts 2.5 s) agrees to round-off; on finer grids the
        // match moves by the aliasing of the band edges' ringing, ~1e-3.
        assert_eq!(i[0], 1);
        for (df, tol) in [(1.0 / 8.0, 1e-9), (1.0 / 16.0, 2e-3), (1.0 / 64.0, 2e-3)] {
            let n = (2048.0 / df) as usize + 1;
            let w: Vec<f64> = (0..n).map(|k| if k == 0 { 0.0 } else { 1.0 }).collect();
            let h1 = template(10.0, 10.0, df, n, f_low);
            let h2 = template(10.5, 9.8, df, n, f_low);
            let direct = matches(&h1, &h2, n, &w, df, f_low, Some(2048.0)).unwrap()[0];
            println!("df {df} direct {direct} sweep {}", v[0]);
            assert!((v[0] - direct).abs() < tol, "df {df}: sweep {} direct {direct}", v[0]);
        }
    }
}
