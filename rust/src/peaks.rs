//! Peaks of an SNR series: local maxima above a threshold, clustering to the
//! loudest within a window, and sub-sample refinement by a parabola.
//!
//! The same clustering rule, in seconds and across segments, is
//! `chirpsift.cluster_in_time`; here it runs in samples inside one segment.

use num_complex::Complex32;

/// Local maxima of `|z|^2 >= threshold2` in `[start, stop)`: strictly above the
/// previous sample and at least the next one.
///
/// # Panics
/// If `start == 0` or `stop >= z.len()` (every candidate needs both neighbours).
pub fn find_peaks(z: &[Complex32], start: usize, stop: usize, threshold2: f32) -> Vec<(usize, f32)> {
    assert!(start >= 1 && stop < z.len().max(1), "peak range needs both neighbours");
    let mut out = Vec::new();
    for j in start..stop {
        let p = z[j].norm_sqr();
        if p >= threshold2 && p > z[j - 1].norm_sqr() && p >= z[j + 1].norm_sqr() {
            out.push((j, p));
        }
    }
    out
}

/// Positions in `peaks` of the peaks with no louder one within `window` samples
/// (ties: the earlier peak wins). `peaks` is sorted by sample index.
pub fn cluster_peaks(peaks: &[(usize, f32)], window: usize) -> Vec<usize> {
    let mut kept = Vec::new();
    let mut lo = 0usize;
    for (i, &(j, p)) in peaks.iter().enumerate() {
        while peaks[lo].0 + window < j {
            lo += 1;
        }
        let mut best = true;
        let mut m = lo;
        while m < peaks.len() && peaks[m].0 <= j + window {
            let (jm, pm) = peaks[m];
            if m != i && (pm > p || (pm == p && jm < j)) {
                best = false;
                break;
            }
            m += 1;
        }
        if best {
            kept.push(i);
        }
    }
    kept
}

/// Offset in `[-0.5, 0.5]` of the vertex of the parabola through `(-1, a)`,
/// `(0, b)`, `(1, c)`; zero unless the parabola opens downwards.
#[inline]
pub fn vertex(a: f64, b: f64, c: f64) -> f64 {
    let den = a - 2.0 * b + c;
    if den < 0.0 {
        (0.5 * (a - c) / den).clamp(-0.5, 0.5)
    } else {
        0.0
    }
}

/// [`vertex`] of `|z|` at `j - 1, j, j + 1`.
///
/// # Panics
/// If `j == 0` or `j + 1 >= z.len()`.
pub fn parabolic_offset(z: &[Complex32], j: usize) -> f64 {
    vertex(
        z[j - 1].norm() as f64,
        z[j].norm() as f64,
        z[j + 1].norm() as f64,
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn clustering_keeps_loudest_in_window() {
        let peaks = vec![(10, 1.0), (12, 3.0), (20, 2.0), (40, 2.0), (44, 2.0)];
        assert_eq!(cluster_peaks(&peaks, 5), vec![1, 2, 3]);
        assert_eq!(cluster_peaks(&peaks, 100), vec![1]);
        assert_eq!(cluster_peaks(&peaks, 0), vec![0, 1, 2, 3, 4]);
    }

    #[test]
    fn vertex_of_a_sampled_parabola_is_exact() {
        // y = 5 - 2 (x - x0)^2 sampled at -1, 0, 1 has its vertex at x0 (algebra).
        for x0 in [-0.4, -0.1, 0.0, 0.25, 0.5] {
            let y = |x: f64| 5.0 - 2.0 * (x - x0) * (x - x0);
            assert!((vertex(y(-1.0), y(0.0), y(1.0)) - x0).abs() < 1e-12);
        }
        assert_eq!(vertex(1.0, 0.0, 1.0), 0.0);
    }

    #[test]
    fn peaks_need_strict_rise_and_threshold() {
        let z: Vec<Complex32> = [0.0, 2.0, 2.0, 1.0, 3.0, 0.5, 0.0]
            .iter()
            .map(|&x| Complex32::new(x, 0.0))
            .collect();
        assert_eq!(find_peaks(&z, 1, 6, 1.5 * 1.5), vec![(1, 4.0), (4, 9.0)]);
    }
}
