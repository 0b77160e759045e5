//! Blockwise generation of a smooth frequency-domain chirp: the exact phase and
//! amplitude are evaluated at four nodes per block and a cubic through them is
//! stepped bin by bin with complex rotation recurrences (four interleaved chains per
//! block), so the per-bin cost is a few multiplies instead of a cube root, a
//! logarithm and a sine/cosine. Block widths come from the model, which bounds the
//! interpolation error by `PHASE_TOLERANCE` radians.

use num_complex::Complex64;

/// Largest phase error of the block interpolation, radians (a mismatch of order
/// 1e-12, far below any bank's minimal-match loss).
pub const PHASE_TOLERANCE: f64 = 1e-6;
/// Longest block (bins); the stack buffer holds one block. Generating 1.4+1.4 Msun
/// from 20 Hz to ISCO at df = 1/256 Hz (390,000 bins) on one thread
/// (`cargo bench --features bench -- "block generation"`, one run of a shared 2-core
/// AMD EPYC): 512 bins 1.22 ms, 2048 bins 0.94 ms, 8192 bins 0.83 ms. Longer blocks
/// keep gaining a little alone, but inside the fused kernel the block competes for
/// cache with the data it multiplies; 8192 has not been compared there yet.
pub const MAX_BLOCK: usize = 2048;
/// Blocks shorter than this are evaluated bin by bin with the exact formula (the
/// cubic would need four exact evaluations for a handful of bins).
const MIN_BLOCK: usize = 16;
/// Independent recurrence chains per block, so consecutive complex multiplies do not
/// wait on each other. On the same bench under heavier load (separate runs): 1 lane
/// 13.4 ms, 2 lanes 2.9 ms, 4 lanes 1.93 ms.
const LANES: usize = 4;

/// A model the block generator can step: exact phase and amplitude at a frequency,
/// and the widest block (bins) starting at `f` whose cubic interpolation error stays
/// below `PHASE_TOLERANCE`.
pub trait Smooth {
    /// `(Psi(f), |h~(f)|)`, radians and strain per Hz.
    fn phase_amplitude(&self, f: f64) -> (f64, f64);
    /// Block length in bins at `f` on a grid of spacing `df`.
    fn block_len(&self, f: f64, df: f64) -> usize;
}

/// Call `emit(k, h~_k)` for every bin `k_lo <= k < k_hi` of spacing `df` (`k_lo >= 1`).
#[inline]
pub fn for_each_bin<S: Smooth, F: FnMut(usize, Complex64)>(
    model: &S,
    k_lo: usize,
    k_hi: usize,
    df: f64,
    mut emit: F,
) {
    for_each_block(model, k_lo, k_hi, df, |k0, block| {
        for (j, &h) in block.iter().enumerate() {
            emit(k0 + j, h);
        }
    });
}


/// Call `emit(k0, block)` with consecutive runs `block[j] = h~_{k0 + j}` covering
/// `k_lo <= k < k_hi` in ascending order (at most `MAX_BLOCK` bins each).
#[inline]
pub fn for_each_block<S: Smooth, F: FnMut(usize, &[Complex64])>(
    model: &S,
    k_lo: usize,
    k_hi: usize,
    df: f64,
    mut emit: F,
) {
    let mut out = [Complex64::new(0.0, 0.0); MAX_BLOCK + LANES];
    let mut k = k_lo.max(1);
    while k < k_hi {
        let f0 = k as f64 * df;
        let len = model.block_len(f0, df).min(k_hi - k);
        if len < MIN_BLOCK {
            let len = len.max(1);
            for (j, o) in out[..len].iter_mut().enumerate() {
                let (phase, amp) = model.phase_amplitude((k + j) as f64 * df);
                let (s, c) = phase.sin_cos();
                *o = Complex64::new(c, -s) * amp;
            }
            emit(k, &out[..len]);
            k += len;
            continue;
        }
        // Nodes at j = 0, s, 2s, 3s with s = len / 3; the cubic through them is
        // stepped by LANES interleaved chains over contiguous quarters of the block.
        let s = len as f64 / 3.0;
        let mut ph = [0.0; 4];
        let mut am = [0.0; 4];
        for i in 0..4 {
            let (p, a) = model.phase_amplitude((k as f64 + i as f64 * s) * df);
            ph[i] = p;
            am[i] = a;
        }
        let (pc, ac) = (Cubic::through(&ph, s), Cubic::through(&am, s));
        let sub = len.div_ceil(LANES);
        let mut st = Lanes::default();
        for l in 0..LANES {
            let j0 = (l * sub) as f64;
            let (p0, d1, d2, d3) = pc.at(j0);
            for (x, (re, im)) in [p0, d1, d2, d3].into_iter().zip([
                (&mut st.wr, &mut st.wi),
                (&mut st.r1r, &mut st.r1i),
                (&mut st.r2r, &mut st.r2i),
                (&mut st.r3r, &mut st.r3i),
            ]) {
                let (sn, cs) = x.sin_cos();
                re[l] = cs;
                im[l] = -sn;
            }
            (st.a[l], st.b1[l], st.b2[l], st.b3[l]) = ac.at(j0);
        }
        st.run(&mut out, sub);
        emit(k, &out[..len]);
        k += len;
    }
}


/// Recurrence state of the block's chains, structure-of-arrays so the lane loop
/// vectorises: `w` (the rotating phasor), `r1..r3` (its rotation and the rotation's
/// first and second differences), `a, b1..b3` (amplitude and its differences).
#[derive(Default)]
struct Lanes {
    wr: [f64; LANES],
    wi: [f64; LANES],
    r1r: [f64; LANES],
    r1i: [f64; LANES],
    r2r: [f64; LANES],
    r2i: [f64; LANES],
    r3r: [f64; LANES],
    r3i: [f64; LANES],
    a: [f64; LANES],
    b1: [f64; LANES],
    b2: [f64; LANES],
    b3: [f64; LANES],
}

impl Lanes {
    /// Step every lane `sub` times, lane `l` writing `out[l * sub + i]`.
    fn run(&mut self, out: &mut [Complex64], sub: usize) {
        #[cfg(target_arch = "x86_64")]
        {
            if std::is_x86_feature_detected!("avx2") && std::is_x86_feature_detected!("fma") {
                // SAFETY: the CPU supports the features the function is compiled for.
                unsafe { self.run_avx2(out, sub) };
                return;
            }
        }
        self.run_portable(out, sub);
    }

    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx2,fma")]
    unsafe fn run_avx2(&mut self, out: &mut [Complex64], sub: usize) {
        self.run_portable(out, sub);
    }

    #[inline(always)]
    fn run_portable(&mut self, out: &mut [Complex64], sub: usize) {
        let mut v = [Complex64::new(0.0, 0.0); LANES];
        for i in 0..sub {
            for l in 0..LANES {
                let (wr, wi) = (self.wr[l], self.wi[l]);
                v[l] = Complex64::new(wr * self.a[l], wi * self.a[l]);
                let (r1r, r1i) = (self.r1r[l], self.r1i[l]);
                self.wr[l] = wr * r1r - wi * r1i;
                self.wi[l] = wr * r1i + wi * r1r;
                let (r2r, r2i) = (self.r2r[l], self.r2i[l]);
                self.r1r[l] = r1r * r2r - r1i * r2i;
                self.r1i[l] = r1r * r2i + r1i * r2r;
                let (r3r, r3i) = (self.r3r[l], self.r3i[l]);
                self.r2r[l] = r2r * r3r - r2i * r3i;
                self.r2i[l] = r2r * r3i + r2i * r3r;
                self.a[l] += self.b1[l];
                self.b1[l] += self.b2[l];
                self.b2[l] += self.b3[l];
            }
            for l in 0..LANES {
                out[l * sub + i] = v[l];
            }
        }
    }
}

/// The cubic `c0 + c1 j + c2 j^2 + c3 j^3` through values at `j = 0, s, 2s, 3s`.
struct Cubic {
    c: [f64; 4],
}

impl Cubic {
    fn through(y: &[f64; 4], s: f64) -> Self {
        // Newton forward differences, then monomial coefficients in u = j / s, then in j.
        let d1 = y[1] - y[0];
        let d2 = y[2] - 2.0 * y[1] + y[0];
        let d3 = y[3] - 3.0 * y[2] + 3.0 * y[1] - y[0];
        let (u1, u2, u3) = (d1 - d2 / 2.0 + d3 / 3.0, d2 / 2.0 - d3 / 2.0, d3 / 6.0);
        Cubic {
            c: [y[0], u1 / s, u2 / (s * s), u3 / (s * s * s)],
        }
    }

    /// Value and unit-step forward differences at `j0`, in closed form (no cancellation).
    fn at(&self, j0: f64) -> (f64, f64, f64, f64) {
        let [c0, c1, c2, c3] = self.c;
        let value = c0 + j0 * (c1 + j0 * (c2 + j0 * c3));
        let d1 = c1 + c2 * (2.0 * j0 + 1.0) + c3 * (3.0 * j0 * j0 + 3.0 * j0 + 1.0);
        let d2 = 2.0 * c2 + c3 * (6.0 * j0 + 6.0);
        (value, d1, d2, 6.0 * c3)
    }
}

