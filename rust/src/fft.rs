//! Transform planners that cache one plan per length and type.
//!
//! Plans are built through the planners (never by constructing an algorithm
//! directly) so rustfft can pick its SIMD kernels at run time.

use num_complex::Complex;
use realfft::{ComplexToReal, RealFftPlanner, RealToComplex};
use crate::scratch::Kept;
use rustfft::{Fft, FftNum, FftPlanner};
use std::sync::{Arc, Mutex, OnceLock};

/// A float type with cached complex and real transform planners.
pub trait Planned: FftNum + realfft::FftNum {
    fn complex_planner() -> &'static Mutex<FftPlanner<Self>>;
    fn real_planner() -> &'static Mutex<RealFftPlanner<Self>>;
    /// Scratches returned by [`KeptScratch`].
    fn kept() -> &'static Kept<RealScratch<Self>>;
}

macro_rules! planned {
    ($t:ty) => {
        impl Planned for $t {
            fn complex_planner() -> &'static Mutex<FftPlanner<$t>> {
                static P: OnceLock<Mutex<FftPlanner<$t>>> = OnceLock::new();
                P.get_or_init(|| Mutex::new(FftPlanner::new()))
            }
            fn real_planner() -> &'static Mutex<RealFftPlanner<$t>> {
                static P: OnceLock<Mutex<RealFftPlanner<$t>>> = OnceLock::new();
                P.get_or_init(|| Mutex::new(RealFftPlanner::new()))
            }
            fn kept() -> &'static Kept<RealScratch<$t>> {
                static K: Kept<RealScratch<$t>> = Kept::new();
                &K
            }
        }
    };
}
planned!(f32);
planned!(f64);

/// Unnormalised forward complex transform: `X_k = sum_j x_j exp(-2 pi i j k / n)`.
pub fn forward<T: Planned>(n: usize) -> Arc<dyn Fft<T>> {
    T::complex_planner()
        .lock()
        .unwrap_or_else(|e| e.into_inner())
        .plan_fft_forward(n)
}

/// Unnormalised inverse complex transform: `x_j = sum_k X_k exp(+2 pi i j k / n)`.
pub fn inverse<T: Planned>(n: usize) -> Arc<dyn Fft<T>> {
    T::complex_planner()
        .lock()
        .unwrap_or_else(|e| e.into_inner())
        .plan_fft_inverse(n)
}

/// Real-to-complex forward transform of length `n` (numpy's `rfft`, unnormalised).
pub fn forward_real<T: Planned>(n: usize) -> Arc<dyn RealToComplex<T>> {
    T::real_planner()
        .lock()
        .unwrap_or_else(|e| e.into_inner())
        .plan_fft_forward(n)
}

/// Complex-to-real inverse transform of length `n` (numpy's `irfft` times `n`).
pub fn inverse_real<T: Planned>(n: usize) -> Arc<dyn ComplexToReal<T>> {
    T::real_planner()
        .lock()
        .unwrap_or_else(|e| e.into_inner())
        .plan_fft_inverse(n)
}

/// Scratch buffers for one real transform pair, reused across calls by one thread.
pub struct RealScratch<T: Planned> {
    pub forward: Arc<dyn RealToComplex<T>>,
    pub inverse: Arc<dyn ComplexToReal<T>>,
    pub time: Vec<T>,
    pub spectrum: Vec<Complex<T>>,
    scratch: Vec<Complex<T>>,
}

impl<T: Planned> RealScratch<T> {
    pub fn new(n: usize) -> Self {
        let forward = forward_real::<T>(n);
        let inverse = inverse_real::<T>(n);
        let scratch_len = forward.get_scratch_len().max(inverse.get_scratch_len());
        RealScratch {
            time: forward.make_input_vec(),
            spectrum: forward.make_output_vec(),
            scratch: vec![Complex::new(T::zero(), T::zero()); scratch_len],
            forward,
            inverse,
        }
    }

    /// `spectrum = rfft(time)`; `time` is overwritten.
    pub fn rfft(&mut self) {
        self.forward
            .process_with_scratch(&mut self.time, &mut self.spectrum, &mut self.scratch)
            .expect("buffer lengths fixed at construction");
    }

    /// `time = n * irfft(spectrum)`; `spectrum` is overwritten. The imaginary parts of
    /// the DC and (even n) Nyquist bins are ignored, as numpy does.
    pub fn irfft(&mut self) {
        let n = self.time.len();
        self.spectrum[0].im = T::zero();
        if n % 2 == 0 {
            let last = self.spectrum.len() - 1;
            self.spectrum[last].im = T::zero();
        }
        self.inverse
            .process_with_scratch(&mut self.spectrum, &mut self.time, &mut self.scratch)
            .expect("buffer lengths fixed at construction");
    }
}

/// Full-length scratches kept between calls, per float type ([`Kept`]).
///
/// A segment's transforms (the spectrum chain's two, the data transform) need about
/// three segment-lengths of buffers each time; allocated afresh, the system hands
/// over new pages whose faults and zeroing cost as much as a third of a transform.
/// Keeping two holds about 48 MiB at 2^20 samples; a scratch of another length
/// evicts the oldest.
/// A [`RealScratch`] of length `n` taken from the kept ones (or made), and given
/// back when dropped. Its buffers hold whatever the last user left: fill before use.
pub struct KeptScratch<T: Planned>(Option<RealScratch<T>>);

impl<T: Planned> KeptScratch<T> {
    pub fn take(n: usize) -> Self {
        let found = T::kept().take(|s| s.time.len() == n);
        KeptScratch(Some(found.unwrap_or_else(|| RealScratch::new(n))))
    }
}

impl<T: Planned> std::ops::Deref for KeptScratch<T> {
    type Target = RealScratch<T>;
    fn deref(&self) -> &RealScratch<T> {
        self.0.as_ref().expect("present until drop")
    }
}

impl<T: Planned> std::ops::DerefMut for KeptScratch<T> {
    fn deref_mut(&mut self) -> &mut RealScratch<T> {
        self.0.as_mut().expect("present until drop")
    }
}

impl<T: Planned> Drop for KeptScratch<T> {
    fn drop(&mut self) {
        if let Some(s) = self.0.take() {
            T::kept().give_back(s);
        }
    }
}

/// Smallest `2^a 3^b >= n`: lengths rustfft and realfft transform fast.
pub fn fast_length(n: usize) -> usize {
    let mut best = n.next_power_of_two();
    let mut p3 = 1usize;
    while p3 < best {
        let mut m = p3;
        while m < n {
            m *= 2;
        }
        best = best.min(m);
        p3 *= 3;
    }
    best
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fast_length_is_smooth_and_minimal() {
        for n in 1..2000usize {
            let m = fast_length(n);
            assert!(m >= n);
            let mut r = m;
            while r % 2 == 0 {
                r /= 2;
            }
            while r % 3 == 0 {
                r /= 3;
            }
            assert_eq!(r, 1, "{m} is not 2^a 3^b");
            for k in n..m {
                let mut r = k;
                while r % 2 == 0 {
                    r /= 2;
                }
                while r % 3 == 0 {
                    r /= 3;
                }
                assert_ne!(r, 1, "{k} is smaller and smooth");
            }
        }
    }

    #[test]
    fn kept_scratch_is_reused_and_refilled() {
        // irfft(rfft(x)) = n x (common practice) holds on a kept scratch whatever the
        // previous user left in it.
        let n = 4099 * 2;
        for round in 0..3 {
            let mut s = KeptScratch::<f64>::take(n);
            let x: Vec<f64> = (0..n).map(|i| ((i * (round + 3)) as f64 * 0.37).sin()).collect();
            s.time.copy_from_slice(&x);
            s.rfft();
            s.irfft();
            for (a, b) in s.time.iter().zip(&x) {
                assert!((a / n as f64 - b).abs() < 1e-12);
            }
        }
        let (this_length, all) = f64::kept().count(|s| s.time.len() == n);
        assert!(this_length >= 1 && all <= crate::scratch::KEPT);
    }

    #[test]
    fn real_round_trip() {
        // irfft(rfft(x)) = n x (common practice: unnormalised DFT pair).
        for n in [7usize, 8, 30, 64] {
            let mut s = RealScratch::<f64>::new(n);
            let x: Vec<f64> = (0..n)
                .map(|i| (i as f64 * 0.7).sin() + 0.1 * i as f64)
                .collect();
            s.time.copy_from_slice(&x);
            s.rfft();
            s.irfft();
            for (a, b) in s.time.iter().zip(&x) {
                assert!((a / n as f64 - b).abs() < 1e-12);
            }
        }
    }
}
