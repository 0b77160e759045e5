//! Exact sums of the band-limited series and its first two derivatives at any time,
//! for the peak refinement of [`super::peak_modulus`]:
//! `z(t) = sum_k p_k exp(i w_k t)`, `z'(t)` and `z''(t)`, with `w_k = 2 pi (k - c) / L`
//! (rad per sample), `c` the band's centre (a phase that leaves `|z|` unchanged and
//! keeps the derivative weights small) and `t` in samples of the `L`-point transform.
//!
//! The products are held as split real and imaginary arrays and summed in four lanes
//! (bin `k` in lane `k mod 4`), each lane turned by the rotation `exp(4 i w t)` per
//! step and restarted from `exp(i w_k t)` every [`RESTART`] bins so round-off stays
//! near 1e-13. Where the processor has AVX2 and FMA (checked at run time: the
//! portable x86-64 target does not assume them) the lanes are one 256-bit register;
//! otherwise the portable loop does the same arithmetic without fused multiply-adds.
//! The two paths agree to round-off (a test checks 1e-12).

use num_complex::Complex64;
use std::f64::consts::PI;

/// Bins between restarts of the rotation recurrence (a multiple of the 4 lanes).
const RESTART: usize = 1024;

/// Whether this processor runs the AVX2+FMA lanes (detected once by std, then cached).
#[cfg(target_arch = "x86_64")]
fn avx2_fma() -> bool {
    std::arch::is_x86_feature_detected!("avx2") && std::arch::is_x86_feature_detected!("fma")
}

/// `(z, z', z'')` at `t` samples for products `re + i im` (equal lengths) summed over
/// an `l`-point period.
pub fn direct_sums(re: &[f64], im: &[f64], l: usize, t: f64) -> (Complex64, Complex64, Complex64) {
    assert_eq!(re.len(), im.len(), "split products of unequal lengths");
    #[cfg(target_arch = "x86_64")]
    {
        if avx2_fma() {
            // SAFETY: the features the function enables were detected by avx2_fma.
            return unsafe { avx2::sums(re, im, l, t) };
        }
    }
    portable(re, im, l, t)
}

/// `z` alone at `t` samples (the probes of a flat peak): the lanes of
/// [`direct_sums`] without the derivative sums.
pub fn value(re: &[f64], im: &[f64], l: usize, t: f64) -> Complex64 {
    assert_eq!(re.len(), im.len(), "split products of unequal lengths");
    #[cfg(target_arch = "x86_64")]
    {
        if avx2_fma() {
            // SAFETY: the features the function enables were detected by avx2_fma.
            return unsafe { avx2::value(re, im, l, t) };
        }
    }
    portable_value(re, im, l, t)
}

/// The portable path of [`value`].
pub fn portable_value(re: &[f64], im: &[f64], l: usize, t: f64) -> Complex64 {
    let m = re.len();
    let mut z = [Complex64::new(0.0, 0.0); 4];
    let mut start = 0;
    while start < m {
        let end = (start + RESTART).min(m);
        let Block { mut rot, step, .. } = block(start, m, l, t);
        let mut i = start;
        while i + 4 <= end {
            for j in 0..4 {
                z[j] += Complex64::new(re[i + j], im[i + j]) * rot[j];
                rot[j] *= step;
            }
            i += 4;
        }
        for j in 0..end - i {
            z[j] += Complex64::new(re[i + j], im[i + j]) * rot[j];
        }
        start = end;
    }
    (z[0] + z[1]) + (z[2] + z[3])
}

fn centre(m: usize) -> f64 {
    (m / 2) as f64
}

/// Shared set-up of one restart block: `w`, the lanes' first rotations and bin
/// offsets `k - c`, and the four-bin rotation.
struct Block {
    w: f64,
    rot: [Complex64; 4],
    k: [f64; 4],
    step: Complex64,
}

fn block(start: usize, m: usize, l: usize, t: f64) -> Block {
    let w = 2.0 * PI / l as f64;
    let k0 = start as f64 - centre(m);
    let k = [k0, k0 + 1.0, k0 + 2.0, k0 + 3.0];
    // one sine and cosine per block: the other lanes are a bin's rotation further on
    let one = Complex64::from_polar(1.0, w * t);
    let r0 = Complex64::from_polar(1.0, w * k0 * t);
    let (r1, r2) = (r0 * one, r0 * (one * one));
    let rot = [r0, r1, r2, r1 * (one * one)];
    Block { w, rot, k, step: (one * one) * (one * one) }
}

/// Adds the lanes in a fixed order and turns the sums of `x q` and `x q^2` into
/// the derivatives (`i` and `-1` factors).
fn finish(z: [Complex64; 4], d1: [Complex64; 4], d2: [Complex64; 4]) -> (Complex64, Complex64, Complex64) {
    let add = |v: [Complex64; 4]| (v[0] + v[1]) + (v[2] + v[3]);
    let i = Complex64::new(0.0, 1.0);
    (add(z), add(d1) * i, -add(d2))
}

/// The portable path: the same lanes in plain arrays, no fused multiply-adds.
pub fn portable(re: &[f64], im: &[f64], l: usize, t: f64) -> (Complex64, Complex64, Complex64) {
    let m = re.len();
    let zero = Complex64::new(0.0, 0.0);
    let (mut z, mut d1, mut d2) = ([zero; 4], [zero; 4], [zero; 4]);
    let mut start = 0;
    while start < m {
        let end = (start + RESTART).min(m);
        let Block { w, mut rot, mut k, step } = block(start, m, l, t);
        let mut i = start;
        while i + 4 <= end {
            for j in 0..4 {
                let x = Complex64::new(re[i + j], im[i + j]) * rot[j];
                let q = w * k[j];
                z[j] += x;
                d1[j] += x * q;
                d2[j] += x * (q * q);
                rot[j] *= step;
                k[j] += 4.0;
            }
            i += 4;
        }
        for j in 0..end - i {
            let x = Complex64::new(re[i + j], im[i + j]) * rot[j];
            let q = w * k[j];
            z[j] += x;
            d1[j] += x * q;
            d2[j] += x * (q * q);
        }
        start = end;
    }
    finish(z, d1, d2)
}

#[cfg(target_arch = "x86_64")]
mod avx2 {
    use super::{block, finish, Block, RESTART};
    use num_complex::Complex64;
    use std::arch::x86_64::*;

    /// [`super::value`]'s lanes in 256-bit registers, with fused multiply-adds.
    ///
    /// # Safety
    /// The processor must have AVX2 and FMA.
    #[target_feature(enable = "avx2,fma")]
    pub unsafe fn value(re: &[f64], im: &[f64], l: usize, t: f64) -> Complex64 {
        let m = re.len();
        let (mut zr, mut zi) = (_mm256_setzero_pd(), _mm256_setzero_pd());
        let mut tail = [Complex64::new(0.0, 0.0); 4];
        let lanes = |v: [f64; 4]| _mm256_loadu_pd(v.as_ptr());
        let mut start = 0;
        while start < m {
            let end = (start + RESTART).min(m);
            let Block { rot, step, .. } = block(start, m, l, t);
            let (mut rr, mut ri) = (lanes(rot.map(|r| r.re)), lanes(rot.map(|r| r.im)));
            let (sr, si) = (_mm256_set1_pd(step.re), _mm256_set1_pd(step.im));
            let mut i = start;
            while i + 4 <= end {
                let pr = _mm256_loadu_pd(re.as_ptr().add(i));
                let pi = _mm256_loadu_pd(im.as_ptr().add(i));
                zr = _mm256_add_pd(zr, _mm256_fmsub_pd(pr, rr, _mm256_mul_pd(pi, ri)));
                zi = _mm256_add_pd(zi, _mm256_fmadd_pd(pr, ri, _mm256_mul_pd(pi, rr)));
                let nr = _mm256_fmsub_pd(rr, sr, _mm256_mul_pd(ri, si));
                ri = _mm256_fmadd_pd(rr, si, _mm256_mul_pd(ri, sr));
                rr = nr;
                i += 4;
            }
            if i < end {
                let (mut r, mut s) = ([0.0; 4], [0.0; 4]);
                _mm256_storeu_pd(r.as_mut_ptr(), rr);
                _mm256_storeu_pd(s.as_mut_ptr(), ri);
                for j in 0..end - i {
                    tail[j] += Complex64::new(re[i + j], im[i + j]) * Complex64::new(r[j], s[j]);
                }
            }
            start = end;
        }
        let (mut r, mut s) = ([0.0; 4], [0.0; 4]);
        _mm256_storeu_pd(r.as_mut_ptr(), zr);
        _mm256_storeu_pd(s.as_mut_ptr(), zi);
        let z = [0, 1, 2, 3].map(|j| Complex64::new(r[j], s[j]) + tail[j]);
        (z[0] + z[1]) + (z[2] + z[3])
    }

    /// The four lanes in 256-bit registers, with fused multiply-adds.
    ///
    /// # Safety
    /// The processor must have AVX2 and FMA.
    #[target_feature(enable = "avx2,fma")]
    pub unsafe fn sums(re: &[f64], im: &[f64], l: usize, t: f64) -> (Complex64, Complex64, Complex64) {
        let m = re.len();
        let zero = _mm256_setzero_pd();
        let (mut zr, mut zi, mut ar, mut ai, mut br, mut bi) = (zero, zero, zero, zero, zero, zero);
        let (mut tail_z, mut tail_d1, mut tail_d2) = ([Complex64::new(0.0, 0.0); 4], [Complex64::new(0.0, 0.0); 4], [Complex64::new(0.0, 0.0); 4]);
        let lanes = |v: [f64; 4]| _mm256_loadu_pd(v.as_ptr());
        let mut start = 0;
        while start < m {
            let end = (start + RESTART).min(m);
            let Block { w, rot, k, step } = block(start, m, l, t);
            let (mut rr, mut ri) = (lanes(rot.map(|r| r.re)), lanes(rot.map(|r| r.im)));
            let mut kv = lanes(k);
            let (sr, si) = (_mm256_set1_pd(step.re), _mm256_set1_pd(step.im));
            let (wv, four) = (_mm256_set1_pd(w), _mm256_set1_pd(4.0));
            let mut i = start;
            while i + 4 <= end {
                let pr = _mm256_loadu_pd(re.as_ptr().add(i));
                let pi = _mm256_loadu_pd(im.as_ptr().add(i));
                let xr = _mm256_fmsub_pd(pr, rr, _mm256_mul_pd(pi, ri));
                let xi = _mm256_fmadd_pd(pr, ri, _mm256_mul_pd(pi, rr));
                let q = _mm256_mul_pd(wv, kv);
                zr = _mm256_add_pd(zr, xr);
                zi = _mm256_add_pd(zi, xi);
                ar = _mm256_fmadd_pd(xr, q, ar);
                ai = _mm256_fmadd_pd(xi, q, ai);
                let q2 = _mm256_mul_pd(q, q);
                br = _mm256_fmadd_pd(xr, q2, br);
                bi = _mm256_fmadd_pd(xi, q2, bi);
                let nr = _mm256_fmsub_pd(rr, sr, _mm256_mul_pd(ri, si));
                ri = _mm256_fmadd_pd(rr, si, _mm256_mul_pd(ri, sr));
                rr = nr;
                kv = _mm256_add_pd(kv, four);
                i += 4;
            }
            if i < end {
                // the last block's tail, one bin per lane, in the portable arithmetic
                let (mut r, mut s, mut kk) = ([0.0; 4], [0.0; 4], [0.0; 4]);
                _mm256_storeu_pd(r.as_mut_ptr(), rr);
                _mm256_storeu_pd(s.as_mut_ptr(), ri);
                _mm256_storeu_pd(kk.as_mut_ptr(), kv);
                for j in 0..end - i {
                    let x = Complex64::new(re[i + j], im[i + j]) * Complex64::new(r[j], s[j]);
                    let q = w * kk[j];
                    tail_z[j] += x;
                    tail_d1[j] += x * q;
                    tail_d2[j] += x * (q * q);
                }
            }
            start = end;
        }
        let unpack = |vr: __m256d, vi: __m256d, tail: [Complex64; 4]| {
            let (mut r, mut s) = ([0.0; 4], [0.0; 4]);
            _mm256_storeu_pd(r.as_mut_ptr(), vr);
            _mm256_storeu_pd(s.as_mut_ptr(), vi);
            [0, 1, 2, 3].map(|j| Complex64::new(r[j], s[j]) + tail[j])
        };
        finish(unpack(zr, zi, tail_z), unpack(ar, ai, tail_d1), unpack(br, bi, tail_d2))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Direct evaluation, one bin at a time with its own exponential.
    fn naive(re: &[f64], im: &[f64], l: usize, t: f64) -> (Complex64, Complex64, Complex64) {
        let c = centre(re.len());
        let i = Complex64::new(0.0, 1.0);
        let (mut z, mut d1, mut d2) = (Complex64::new(0.0, 0.0), Complex64::new(0.0, 0.0), Complex64::new(0.0, 0.0));
        for k in 0..re.len() {
            let wk = 2.0 * PI * (k as f64 - c) / l as f64;
            let x = Complex64::new(re[k], im[k]) * Complex64::from_polar(1.0, wk * t);
            z += x;
            d1 += x * i * wk;
            d2 -= x * wk * wk;
        }
        (z, d1, d2)
    }

    fn products(m: usize) -> (Vec<f64>, Vec<f64>) {
        // a chirp-like product: falling amplitude, quadratic phase
        (0..m)
            .map(|k| {
                let x = k as f64 / m as f64;
                let v = Complex64::from_polar((1.0 + 3.0 * x).powf(-7.0 / 3.0), 40.0 * x * x + 3.0 * x);
                (v.re, v.im)
            })
            .unzip()
    }

    #[test]
    fn vectorised_and_portable_sums_agree_with_a_direct_evaluation() {
        // lengths with every tail (m mod 4) and more than one restart block
        for m in [1usize, 2, 3, 5, 7, 1023, 1024, 1521, 2050, 3001] {
            let (re, im) = products(m);
            let l = crate::fft::fast_length(m);
            for t in [0.0, 0.37, -5.25, 731.6] {
                let (a, b) = (direct_sums(&re, &im, l, t), portable(&re, &im, l, t));
                let c = naive(&re, &im, l, t);
                let scale = re.iter().zip(&im).map(|(x, y)| x.hypot(*y)).sum::<f64>();
                let w = 2.0 * PI / l as f64 * centre(m).max(1.0);
                for (u, v, s) in [(a.0, b.0, scale), (a.1, b.1, scale * w), (a.2, b.2, scale * w * w)] {
                    assert!((u - v).norm() <= 1e-12 * s, "m {m} t {t}: dispatched {u} portable {v}");
                }
                let (v, u) = (value(&re, &im, l, t), portable_value(&re, &im, l, t));
                assert!((v - c.0).norm() <= 1e-11 * scale && (u - c.0).norm() <= 1e-11 * scale, "m {m} t {t}: value {v} {u} direct {}", c.0);
                for (u, v, s) in [(a.0, c.0, scale), (a.1, c.1, scale * w), (a.2, c.2, scale * w * w)] {
                    assert!((u - v).norm() <= 1e-11 * s, "m {m} t {t}: sums {u} direct {v}");
                }
            }
        }
    }
}
