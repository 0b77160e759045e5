//! Timing probes, for benchmarks only: a bare transform of a given length and kind
//! (the yardstick a kernel's cost is divided by), and template generation alone as
//! the fused kernel performs it. Each runs on the calling thread, outside the pool.

use crate::error::{ensure, Result};
use crate::fused::Bank;
use crate::grid::band;
use num_complex::{Complex, Complex32};
use std::time::Instant;

/// Which transform a probe times.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Transform {
    /// Unnormalised complex64 inverse FFT, in place (the SNR series and fused kernels).
    Complex64Inverse,
    /// Complex-to-real float64 inverse FFT (the spectrum chain and `correlate`).
    RealFloat64Inverse,
    /// Unnormalised complex128 inverse FFT, in place (the match kernel, `overlap`).
    Complex128Inverse,
}

/// Seconds per transform of length `n`, planned once, with buffers and scratch
/// reused, averaged over `repeats` after one warm-up call.
///
/// # Errors
/// Names `n` or `repeats` when zero.
pub fn transform_seconds(n: usize, kind: Transform, repeats: usize) -> Result<f64> {
    ensure(n > 0, "n", || "must be positive".into())?;
    ensure(repeats > 0, "repeats", || "must be positive".into())?;
    Ok(match kind {
        Transform::Complex64Inverse => {
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
        Transform::Complex128Inverse => {
            let plan = crate::fft::inverse::<f64>(n);
            let mut buf = vec![Complex::<f64>::new(1.0, 0.5); n];
            let mut scratch = vec![Complex::<f64>::new(0.0, 0.0); plan.get_inplace_scratch_len()];
            plan.process_with_scratch(&mut buf, &mut scratch);
            let start = Instant::now();
            for _ in 0..repeats {
                plan.process_with_scratch(&mut buf, &mut scratch);
            }
            start.elapsed().as_secs_f64() / repeats as f64
        }
        Transform::RealFloat64Inverse => {
            let plan = crate::fft::inverse_real::<f64>(n);
            let mut spectrum = plan.make_input_vec();
            let mut time = plan.make_output_vec();
            let mut scratch = plan.make_scratch_vec();
            let fill = |s: &mut [Complex<f64>]| {
                s.iter_mut().for_each(|c| *c = Complex::new(1.0, 0.0));
            };
            fill(&mut spectrum);
            // The transform overwrites its input; refilling is part of every real use.
            let _ = plan.process_with_scratch(&mut spectrum, &mut time, &mut scratch);
            let start = Instant::now();
            for _ in 0..repeats {
                fill(&mut spectrum);
                let _ = plan.process_with_scratch(&mut spectrum, &mut time, &mut scratch);
            }
            std::hint::black_box(&time);
            start.elapsed().as_secs_f64() / repeats as f64
        }
    })
}

/// Seconds per template to generate every template of `bank` on `n_freq` bins of
/// spacing `df` into one reused complex64 buffer, as the fused kernel does.
///
/// # Errors
/// Names `repeats` when zero, `bank` when empty.
pub fn generation_seconds(bank: &Bank, df: f64, n_freq: usize, repeats: usize) -> Result<f64> {
    ensure(repeats > 0, "repeats", || "must be positive".into())?;
    ensure(!bank.is_empty(), "bank", || "holds no template".into())?;
    let mut buf = vec![Complex32::new(0.0, 0.0); n_freq];
    let start = Instant::now();
    for _ in 0..repeats {
        for t in bank.templates() {
            let (lo, hi) = band(bank.f_low(), Some(t.f_high), df, n_freq);
            t.model.for_each_block(lo, hi, df, |k0, block| {
                for (o, h) in buf[k0..k0 + block.len()].iter_mut().zip(block) {
                    *o = Complex32::new(h.re as f32, h.im as f32);
                }
            });
        }
    }
    std::hint::black_box(&buf);
    Ok(start.elapsed().as_secs_f64() / (repeats * bank.len()) as f64)
}
