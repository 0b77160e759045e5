//! The frequency grid `f_k = k df` every kernel shares: which bins a band holds,
//! and the inverse PSD on it.
//!
//! One rule decides the first bin at or above a frequency, so the filter, the
//! fused kernel, the spectrum chain and the Python checks never disagree by a bin.

/// First bin index `k` with `k df >= f` on a grid of spacing `df` (0 for `f <= 0`).
pub fn bin_at_or_above(f: f64, df: f64) -> usize {
    let k = (f / df).ceil();
    // Guard against round-off putting an exact multiple one bin high.
    let k = if k > 0.0 && ((k - 1.0) * df) >= f {
        k - 1.0
    } else {
        k
    };
    k.max(0.0) as usize
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
    fn band_is_clipped_and_never_inverted() {
        assert_eq!(band(1.0, Some(3.0), 0.5, 100), (2, 6));
        assert_eq!(band(1.0, None, 0.5, 100), (2, 100));
        assert_eq!(band(80.0, Some(90.0), 0.5, 100), (100, 100));
        assert_eq!(band(3.0, Some(1.0), 0.5, 100), (6, 6));
    }
}
