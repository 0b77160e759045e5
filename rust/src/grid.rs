//! The frequency grid `f_k = k df` every kernel shares: which bins a band holds,
//! and the inverse PSD on it.
//!
//! One rule decides the first bin at or above a frequency, so the filter, the
//! fused kernel, the spectrum chain and the Python checks never disagree by a bin.

/// Relative tolerance under which a frequency counts as lying on a bin: `f` within
/// `BIN_TOLERANCE * f` below `k df` selects bin `k`. Far below any physical
/// resolution, far above double-precision round-off of `f / df`.
pub const BIN_TOLERANCE: f64 = 1e-9;

/// First bin index `k` with `k df >= f` on a grid of spacing `df` (0 for `f <= 0`),
/// where `f` a hair below a bin (relative [`BIN_TOLERANCE`]) selects that bin.
///
/// `ceil(f / df)` alone puts exact multiples one bin high whenever the division
/// rounds up (`f = 0.1`, `df = 1/70`: `7 df = f` exactly, yet `ceil` gives 8), and
/// so does comparing the rounded `k df` with `f`; the tolerance makes the rule
/// agree with exact rational arithmetic on the values the user typed.
pub fn bin_at_or_above(f: f64, df: f64) -> usize {
    let x = f / df;
    let k = (x - BIN_TOLERANCE * x.abs().max(1.0)).ceil();
    if k > 0.0 {
        k as usize
    } else {
        0
    }
}

/// Bins `k_lo <= k < k_hi` with `f_low <= k df < f_high` (`f_high = None`: to the
/// last bin), clipped to `n_freq`; `k_hi >= k_lo` always.
pub fn band(f_low: f64, f_high: Option<f64>, df: f64, n_freq: usize) -> (usize, usize) {
    let k_lo = bin_at_or_above(f_low, df).min(n_freq);
    let k_hi = f_high.map_or(n_freq, |f| bin_at_or_above(f, df).min(n_freq));
    (k_lo, k_hi.max(k_lo))
}

/// `1/S` of one bin, zero where `S` is infinite (an excluded bin).
#[inline]
pub fn inverse_psd_bin(s: f64) -> f64 {
    if s.is_finite() && s > 0.0 {
        1.0 / s
    } else {
        0.0
    }
}

/// `1/S` per bin, zero where `S` is infinite.
pub fn inverse_psd(psd: &[f64]) -> Vec<f64> {
    psd.iter().map(|&s| inverse_psd_bin(s)).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn first_bin_agrees_with_exact_rational_arithmetic() {
        // f = a / 10 and df = 1 / d exactly in rationals: the first k with
        // k / d >= a / 10 is ceil(a d / 10), computed in integers.
        for a in 1..400u64 {
            for d in 1..300u64 {
                let exact = (a * d).div_ceil(10) as usize;
                let got = bin_at_or_above(a as f64 / 10.0, 1.0 / d as f64);
                assert_eq!(got, exact, "f_low={} df=1/{d}", a as f64 / 10.0);
            }
        }
    }

    #[test]
    fn band_is_clipped_and_never_inverted() {
        assert_eq!(band(1.0, Some(3.0), 0.5, 100), (2, 6));
        assert_eq!(band(1.0, None, 0.5, 100), (2, 100));
        assert_eq!(band(80.0, Some(90.0), 0.5, 100), (100, 100));
        assert_eq!(band(3.0, Some(1.0), 0.5, 100), (6, 6));
    }
}
