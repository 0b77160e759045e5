//! Timing probes the benchmarks divide by: a bare inverse FFT, and template
//! generation alone as the fused kernel performs it. Each runs on the calling thread.

use crate::filter::band;
use crate::waveform::TaylorF2;
use num_complex::Complex32;
use std::time::Instant;

/// Seconds per unnormalised complex64 inverse FFT of length `n`, planned once, in
/// place with reused scratch.
pub fn inverse_fft_seconds(n: usize, repeats: usize) -> f64 {
    let plan = crate::fft::inverse::<f32>(n);
    let mut buf = vec![Complex32::new(1.0, 0.5); n];
    let mut scratch = vec![Complex32::new(0.0, 0.0); plan.get_inplace_scratch_len()];
    plan.process_with_scratch(&mut buf, &mut scratch);
    let start = Instant::now();
    for _ in 0..repeats {
        plan.process_with_scratch(&mut buf, &mut scratch);
    }
    start.elapsed().as_secs_f64() / repeats as f64
}

/// Seconds per template to generate each `(model, f_high)` on `n_freq` bins into one
/// reused complex64 buffer.
pub fn generation_seconds(
    models: &[(TaylorF2, f64)],
    f_low: f64,
    df: f64,
    n_freq: usize,
    repeats: usize,
) -> f64 {
    let mut buf = vec![Complex32::new(0.0, 0.0); n_freq];
    let start = Instant::now();
    for _ in 0..repeats {
        for (model, f_high) in models {
            let (lo, hi) = band(f_low, Some(*f_high), df, n_freq);
            model.for_each_block(lo, hi, df, |k0, block| {
                for (o, h) in buf[k0..k0 + block.len()].iter_mut().zip(block) {
                    *o = Complex32::new(h.re as f32, h.im as f32);
                }
            });
        }
    }
    std::hint::black_box(&buf);
    start.elapsed().as_secs_f64() / (repeats * models.len()) as f64
}
