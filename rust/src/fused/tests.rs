//! The fused kernel against a naive evaluator: every SNR sample and chi-squared
//! band written as the direct sum `sum_k q_k h~_k* e^(2 pi i k t / N) / sigma` in
//! f64, with the template from its closed-form phase and amplitude (no blocks, no
//! FFT, no folding), as rustfft checks its algorithms against a naive DFT.

use super::*;
use crate::waveform::{Binary, WeightShape};
use num_complex::Complex64;
use std::f64::consts::PI;

const N: usize = 16384;
const FS: f64 = 256.0;
const DF: f64 = FS / N as f64;
const N_FREQ: usize = N / 2 + 1;
const F_LOW: f64 = 20.0;

/// Unit Gaussian samples from a fixed-seed LCG (sum of 12 uniforms minus 6).
fn gaussian(state: &mut u64) -> f64 {
    (0..12)
        .map(|_| {
            *state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (*state >> 11) as f64 / (1u64 << 53) as f64
        })
        .sum::<f64>()
        - 6.0
}

fn template(m1: f64, m2: f64) -> (TaylorF2Direct, Template) {
    let b = Binary::new(m1, m2, 0.2, -0.1).unwrap();
    let model = Model::taylorf2(&b, 1.0, 7).unwrap();
    let f_high = model.default_f_high();
    let direct = match &model {
        Model::TaylorF2(t) => TaylorF2Direct(t.clone()),
    };
    (direct, Template { model, f_high })
}

/// The template bin by bin from the closed form.
struct TaylorF2Direct(crate::waveform::TaylorF2);

impl TaylorF2Direct {
    fn h(&self, k: usize) -> Complex64 {
        let f = k as f64 * DF;
        let (phase, amp) = self.0.phase_amplitude(f);
        Complex64::from_polar(amp, -phase)
    }
}

/// Naive `(sigma, z(t) for each t, band sums at t)` for data `d`, PSD `s`.
struct Naive {
    sigma: f64,
    prod: Vec<(usize, Complex64, f64)>,
}

impl Naive {
    fn new(d: &[Complex64], s: &[f64], h: &TaylorF2Direct, f_high: f64) -> Self {
        let (k_lo, k_hi) = band(F_LOW, Some(f_high), DF, N_FREQ);
        let mut prod = Vec::new();
        let mut sigma2 = 0.0;
        for k in k_lo.max(1)..k_hi {
            let hk = h.h(k);
            let w = 1.0 / s[k];
            sigma2 += 4.0 * DF * hk.norm_sqr() * w;
            prod.push((k, 4.0 * DF * d[k] * w * hk.conj(), hk.norm_sqr() * w));
        }
        Naive {
            sigma: sigma2.sqrt(),
            prod,
        }
    }

    fn z(&self, t: f64) -> Complex64 {
        self.prod
            .iter()
            .map(|&(k, p, _)| p * Complex64::from_polar(1.0, 2.0 * PI * k as f64 * t / N as f64))
            .sum::<Complex64>()
            / self.sigma
    }

    /// Allen's chi-squared with `p` bands of equal share of `sigma^2`.
    fn chi2(&self, t: f64, p: usize) -> f64 {
        let total: f64 = self.prod.iter().map(|x| x.2).sum();
        let mut below = 0.0;
        let mut zl = vec![Complex64::new(0.0, 0.0); p];
        for &(k, q, w) in &self.prod {
            let l = ((below / (total / p as f64)) as usize).min(p - 1);
            below += w;
            zl[l] += q * Complex64::from_polar(1.0, 2.0 * PI * k as f64 * t / N as f64) / self.sigma;
        }
        let z: Complex64 = zl.iter().sum();
        p as f64 * zl.iter().map(|b| (b - z / p as f64).norm_sqr()).sum::<f64>()
    }
}

/// Noise of PSD `s` plus `h` at SNR `snr` coalescing at sample `t_c`.
fn data(s: &[f64], h: &TaylorF2Direct, f_high: f64, snr: f64, t_c: f64, seed: u64) -> Vec<Complex64> {
    let mut state = seed;
    let t = N as f64 / FS;
    let (k_lo, k_hi) = band(F_LOW, Some(f_high), DF, N_FREQ);
    let sigma = (k_lo.max(1)..k_hi)
        .map(|k| 4.0 * DF * h.h(k).norm_sqr() / s[k])
        .sum::<f64>()
        .sqrt();
    (0..N_FREQ)
        .map(|k| {
            // E|n~|^2 = T S / 2 (one-sided PSD; Allen et al. 2012).
            let noise = Complex64::new(gaussian(&mut state), gaussian(&mut state)) * (t * s[k] / 4.0).sqrt();
            let signal = if k >= k_lo.max(1) && k < k_hi {
                h.h(k) * Complex64::from_polar(snr / sigma, -2.0 * PI * k as f64 * t_c / N as f64)
            } else {
                Complex64::new(0.0, 0.0)
            };
            if k == 0 || k == N_FREQ - 1 {
                Complex64::new(0.0, 0.0)
            } else {
                noise + signal
            }
        })
        .collect()
}

/// Noise rising as f^6 (a template's weight f^(-25/3) is narrow, rms bandwidth
/// 3.7 Hz: decimated by 4 and folded) and white noise (weight f^(-7/3), rms
/// bandwidth 23 Hz: full rate). Both keep `1/S` large at low frequency, below the
/// band, which the bandwidth estimate must not pick up.
fn psds() -> [Vec<f64>; 2] {
    let rising = (0..N_FREQ)
        .map(|k| 1e-46 * (k.max(1) as f64 * DF / 20.0).powi(6))
        .collect();
    let white = vec![1e-46; N_FREQ];
    [rising, white]
}

#[test]
fn coarse_series_is_the_naive_snr_at_every_dth_sample() {
    // Fill, fold and decimate: the inverse FFT of length N / D of the folded
    // product equals z at samples 0, D, 2D, ... (up to a phase e^(-2 pi i k_lo j / N)).
    let (h, t) = template(1.4, 1.3);
    let s = &psds()[0];
    let d = data(s, &h, t.f_high, 12.0, 9000.25, 7);
    let seg = Prepared::new(&d, s, DF).unwrap();
    let (k_lo, k_hi) = band(F_LOW, Some(t.f_high), DF, N_FREQ);
    let (dec, _) = seg.decimation(&t.model, k_lo, k_hi);
    let m_len = N / dec;
    assert!(dec >= 4 && k_hi - k_lo > m_len, "the case must decimate and fold (D={dec})");
    let inv_h = 1.0 / t.model.amplitude(k_lo as f64 * DF);
    let mut buf = vec![Complex32::new(0.0, 0.0); m_len];
    let norm = product::fill_product(&seg, &t.model, k_lo, k_hi, inv_h, &mut buf);
    fft::inverse::<f32>(m_len).process(&mut buf);
    let naive = Naive::new(&d, s, &h, t.f_high);
    let to_snr = seg.q_scale() / (4.0 * DF * norm * seg.w_scale()).sqrt();
    let peak = (0..m_len).map(|j| naive.z((j * dec) as f64).norm()).fold(0.0, f64::max);
    for (j, b) in buf.iter().enumerate() {
        let z = naive.z((j * dec) as f64).norm();
        let got = b.norm() as f64 * to_snr;
        assert!((got - z).abs() < 2e-5 * peak, "sample {}: {got} vs {z}", j * dec);
    }
}

#[test]
fn triggers_match_the_naive_evaluator() {
    for (which, s) in psds().iter().enumerate() {
        let (h, t) = template(1.6, 1.2);
        let t_c = 10000.4;
        let d = data(s, &h, t.f_high, 15.0, t_c, 11 + which as u64);
        let seg = Prepared::new(&d, s, DF).unwrap();
        let (k_lo, k_hi) = band(F_LOW, Some(t.f_high), DF, N_FREQ);
        let (dec, _) = seg.decimation(&t.model, k_lo, k_hi);
        assert_eq!(dec, [4, 1][which], "rising noise decimates by 4, white noise not at all");
        let bank = Bank::new(vec![t.model.clone()], Some(&[t.f_high]), F_LOW).unwrap();
        let settings = Settings {
            min_snr: 8.0,
            cluster_samples: N,
            chi2_bands: 4,
            valid_start: 200,
            valid_stop: N - 200,
        };
        let found = filter_segment(&seg, &bank, &settings).unwrap();
        assert_eq!(found.len(), 1, "one loud peak in the segment");
        let tr = found[0];
        let naive = Naive::new(&d, s, &h, t.f_high);
        // The peak sample is the naive series' maximum (around the injection; the
        // window clusters the whole segment to its loudest peak).
        let best = (10000 - 32..10000 + 32)
            .max_by(|&a, &b| naive.z(a as f64).norm().total_cmp(&naive.z(b as f64).norm()))
            .unwrap();
        assert_eq!(tr.index, best, "PSD {which}");
        assert!((tr.position - best as f64).abs() <= 0.5);
        assert!((tr.position - t_c).abs() < 1.0, "PSD {which}: {} vs {t_c}", tr.position);
        let z = naive.z(tr.position);
        assert!((tr.snr / z.norm() - 1.0).abs() < 1e-5, "{} vs {}", tr.snr, z.norm());
        let dphase = (tr.phase - z.arg() + PI).rem_euclid(2.0 * PI) - PI;
        assert!(dphase.abs() < 1e-4);
        assert!((tr.sigma / naive.sigma - 1.0).abs() < 1e-6);
        let chi2 = naive.chi2(tr.position, 4);
        assert!((tr.chi2 - chi2).abs() < 1e-3 * chi2.max(1.0), "{} vs {chi2}", tr.chi2);
        assert_eq!(tr.chi2_dof, 6);
    }
}

#[test]
fn bank_refuses_f_high_at_or_below_f_low() {
    let (_, t) = template(1.4, 1.4);
    let err = Bank::new(vec![t.model], Some(&[F_LOW]), F_LOW).unwrap_err();
    assert_eq!(err.argument, "f_high");
}

#[test]
fn general_weight_shape_agrees_with_the_newtonian_table() {
    // The path a family with another amplitude takes (|h~(f_c)|^2 per chunk) gives
    // the same variance for TaylorF2, whose |h~|^2 is A^2 f^(-7/3).
    let (_, t) = template(1.4, 1.3);
    let s = &psds()[1];
    let seg = Prepared::new(&vec![Complex64::new(0.0, 0.0); N_FREQ], s, DF).unwrap();
    let (k_lo, k_hi) = band(F_LOW, Some(t.f_high), DF, N_FREQ);
    let newtonian = seg.moments.sums_as(WeightShape::Newtonian, &t.model, k_lo, k_hi, DF);
    let general = seg.moments.sums_as(WeightShape::General, &t.model, k_lo, k_hi, DF);
    let var = |m: [f64; 3]| m[2] / m[0] - (m[1] / m[0]).powi(2);
    assert!((var(newtonian) / var(general) - 1.0).abs() < 1e-9);
}

#[test]
fn estimated_preparation_equals_the_chain_then_the_preparation() {
    // Consistency: the one-call path (chain and data transform side by side) against
    // the chain's PSDs handed to the preparation, bit for bit; a blank block's error
    // comes back.
    use crate::spectrum::SegmentChain;
    let (fs, len) = (256.0, 4096usize);
    let mut state = 11u64;
    let x: Vec<f64> = (0..3 * len).map(|_| 1e-21 * gaussian(&mut state)).collect();
    let window: Vec<f64> = (0..256)
        .map(|i| 0.5 - 0.5 * (2.0 * std::f64::consts::PI * i as f64 / 256.0).cos())
        .collect();
    let chain = SegmentChain { sample_rate: fs, window: &window, step: 128, n_freq: len / 2 + 1, max_len: 256, f_low: 15.0 };
    let (starts, blocks) = ([0usize, len, 2 * len], [0usize, len / 2, 2 * len]);
    let one = Prepared::from_strain_estimated(&x, &starts, len, &x, &blocks, len, &chain).unwrap();
    let psds = chain.psds(&x, &blocks, len).unwrap();
    let two = Prepared::from_strain_segments(&x, &starts, len, &psds, fs).unwrap();
    for (a, b) in one.iter().zip(&two) {
        assert_eq!(a.weighted_data(), b.weighted_data());
        assert_eq!(a.inv_psd(), b.inv_psd());
        assert_eq!((a.q_scale(), a.w_scale()), (b.q_scale(), b.w_scale()));
    }
    let mut blank = x.clone();
    blank[len..].iter_mut().for_each(|v| *v = 0.0);
    let err = Prepared::from_strain_estimated(&x, &starts, len, &blank, &[2 * len, len, 0], len, &chain)
        .err()
        .expect("blank blocks have no PSD");
    assert!(err.to_string().contains("median PSD estimate is zero"), "{err}");
    let err = Prepared::from_strain_estimated(&x, &starts, len, &x, &[0, 0], len, &chain).err().unwrap();
    assert!(err.to_string().starts_with("block_starts"), "{err}");
}

#[test]
fn prepared_outputs_are_the_definitions_bin_by_bin() {
    // q = 4 df d~ / S and 1/S in f64 per bin (the definitions), at strain scale,
    // with an excluded band and a grid that is not a whole number of tasks or
    // moment chunks; from strain, d~ = rfft(x) / fs (numpy's convention), and the
    // path that scales d~ inside the preparation equals, bit for bit, the
    // preparation of d~ scaled first (consistency).
    const LEN: usize = 6000;
    let (n_freq, df) = (LEN / 2 + 1, FS / LEN as f64);
    let mut state = 99u64;
    for round in 0..3 {
        let x: Vec<f64> = (0..LEN).map(|_| gaussian(&mut state) * 1e-21).collect();
        let s: Vec<f64> = (0..n_freq)
            .map(|k| {
                if (100 * round..300 + 100 * round).contains(&k) {
                    f64::INFINITY
                } else {
                    1e-47 * (1.0 + 1e-3 * (round + 1) as f64 * k as f64)
                }
            })
            .collect();
        let mut fft = fft::RealScratch::<f64>::new(LEN);
        fft.time.copy_from_slice(&x);
        fft.rfft();
        let d: Vec<Complex64> = fft.spectrum.iter().map(|c| c / FS).collect();
        let seg = Prepared::from_strain(&x, &s, FS).unwrap();
        let plain = Prepared::new(&d, &s, df).unwrap();
        assert_eq!(seg.weighted_data(), plain.weighted_data());
        assert_eq!(seg.inv_psd(), plain.inv_psd());
        assert_eq!((seg.q_scale(), seg.w_scale()), (plain.q_scale(), plain.w_scale()));
        let q: Vec<Complex64> = d.iter().zip(&s).map(|(d, s)| d * 4.0 * df / s).collect();
        let w: Vec<f64> = s.iter().map(|s| 1.0 / s).collect();
        let q_max = q.iter().map(|q| q.norm()).fold(0.0, f64::max);
        let w_max = w.iter().copied().fold(0.0, f64::max);
        assert!((seg.q_scale() / q_max - 1.0).abs() < 1e-12);
        assert!((seg.w_scale() / w_max - 1.0).abs() < 1e-12);
        for k in 0..n_freq {
            let got = seg.weighted_data()[k];
            let got = Complex64::new(got.re as f64, got.im as f64) * seg.q_scale();
            assert!((got - q[k]).norm() <= 1e-6 * q_max, "q at bin {k}");
            let got = seg.inv_psd()[k] as f64 * seg.w_scale();
            assert!((got - w[k]).abs() <= 1e-6 * w_max, "1/S at bin {k}");
        }
    }
}
