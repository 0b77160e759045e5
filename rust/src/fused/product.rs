//! The frequency-domain product `q_k (h~_k / h_ref)*` of one template, generated
//! block by block straight into the buffer the inverse FFT will transform.
//!
//! The product is stored shifted down by `k_lo`: `|z|` is unchanged. With a
//! transform of length `M = N / D`, bins `m >= M` fold onto `m mod M`, which makes
//! the coarse series exactly `z` at every `D`-th sample (sampling in time is
//! aliasing in frequency).

use super::Prepared;
use crate::waveform::Model;
use num_complex::{Complex32, Complex64};

/// Whether a run of products replaces or adds to the buffer.
#[derive(Clone, Copy, PartialEq)]
enum Fill {
    Overwrite,
    Accumulate,
}

/// Fill `buf` (length `M`, a divisor of the segment length) with the folded
/// product of `model` over `[k_lo, k_hi)`, the template scaled by `inv_h`, and
/// return the template norm `sum |h~_k / h_ref|^2 w_k`.
///
/// # Panics
/// If `k_hi` exceeds the segment's bins, `k_lo > k_hi`, or `buf` is empty.
pub fn fill_product(
    seg: &Prepared,
    model: &Model,
    k_lo: usize,
    k_hi: usize,
    inv_h: f64,
    buf: &mut [Complex32],
) -> f64 {
    let m_len = buf.len();
    let width = k_hi - k_lo;
    let zero = Complex32::new(0.0, 0.0);
    let folded = width > m_len;
    if folded {
        buf.fill(zero);
    } else {
        buf[width..].fill(zero);
    }
    let (q_all, w_all) = (seg.weighted_data(), seg.inv_psd());
    // Four partial sums (fixed assignment by bin) so the additions do not serialise.
    let mut partial = [0.0f64; 4];
    model.for_each_block(k_lo, k_hi, seg.df(), |k0, block| {
        let n = block.len();
        let (q, w) = (&q_all[k0..k0 + n], &w_all[k0..k0 + n]);
        let m0 = k0 - k_lo;
        if !folded {
            fill_run(&mut buf[m0..m0 + n], block, q, w, inv_h, &mut partial, Fill::Overwrite);
        } else {
            // One contiguous run per wrap.
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
                    Fill::Accumulate,
                );
                done += take;
            }
        }
    });
    (partial[0] + partial[1]) + (partial[2] + partial[3])
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
    fill: Fill,
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
        if fill == Fill::Accumulate {
            out[j] += v;
        } else {
            out[j] = v;
        }
    }
    for (p, a) in partial.iter_mut().zip(acc) {
        *p += a;
    }
}
