//! TaylorF2: the stationary-phase frequency-domain inspiral, non-spinning phase to
//! 3.5PN with aligned-spin corrections, Newtonian amplitude of an optimally oriented
//! source.
//!
//! Convention: `h~(f) = A f^(-7/6) exp(-i Psi(f))`, `t_c = 0`, `phi_c = 0`, so a
//! matched filter peaks at the coalescence time.
//!
//! References: Buonanno, Iyer, Ochsner, Pan & Sathyaprakash 2009, PRD 80, 084043
//! (arXiv:0907.0700); Arun, Iyer, Sathyaprakash & Sundararajan 2005, PRD 71, 084008;
//! aligned-spin terms compiled in Khan et al. 2016, PRD 93, 044007 (arXiv:1508.07253).

use super::blocks::{Smooth, MAX_BLOCK, PHASE_TOLERANCE};
use super::Binary;
use crate::constants::{C_SI, EULER_GAMMA, MPC, T_SUN};
use crate::error::{ensure, Result};
use std::f64::consts::PI;

/// Phase coefficients of one template, with the chosen PN truncation applied.
#[derive(Clone, Debug)]
pub struct TaylorF2 {
    /// The source, kept for its duration and ISCO frequency.
    binary: Binary,
    /// Total mass in seconds.
    m_sec: f64,
    /// 3 / (128 eta).
    newtonian: f64,
    /// Constant parts of psi_k, k = 0..=7 (zero above `phase_order`).
    psi: [f64; 8],
    /// Coefficients of `v^5 ln v` and `v^6 ln v`.
    psi5_log: f64,
    psi6_log: f64,
    /// A in `A f^(-7/6)`, seconds * Hz^(7/6) (strain per Hz).
    amp0: f64,
    /// `A (pi M)^(7/6)`, so that `A f^(-7/6) = amp_v v^(-7/2)`.
    amp_v: f64,
}

impl TaylorF2 {
    /// Coefficients for `b` at `distance` Mpc, keeping PN terms `v^k`, `k <= phase_order`.
    ///
    /// # Errors
    /// Names `distance` unless it is positive and finite, `phase_order` above 7.
    pub fn new(b: &Binary, distance: f64, phase_order: usize) -> Result<Self> {
        ensure(distance.is_finite() && distance > 0.0, "distance", || {
            format!("must be positive, got {distance}")
        })?;
        ensure(phase_order <= 7, "phase_order", || {
            format!("must be 0..=7 (twice the PN order), got {phase_order}")
        })?;
        let m = b.total();
        let eta = b.eta();
        let delta = (b.m1 - b.m2) / m;
        let chis = 0.5 * (b.chi1 + b.chi2);
        let chia = 0.5 * (b.chi1 - b.chi2);
        let (e2, e3) = (eta * eta, eta * eta * eta);
        let pi2 = PI * PI;

        // Spin corrections (aligned spins; spin-spin at 2PN includes the self-spin terms
        // of black holes).
        let beta = (113.0 / 12.0) * (chis + delta * chia) - (19.0 / 3.0) * eta * chis;
        let sigma_term = (-405.0 / 8.0 + 5.0 * eta / 2.0) * chis * chis
            + (-405.0 / 8.0 + 200.0 * eta) * chia * chia
            - (405.0 / 4.0) * delta * chis * chia;
        let gamma = (732985.0 / 2268.0 - 24260.0 * eta / 81.0 - 340.0 * e2 / 9.0) * chis
            + (732985.0 / 2268.0 + 140.0 * eta / 9.0) * delta * chia;
        let psi6_spin = PI * ((2270.0 / 3.0) * delta * chia + (2270.0 / 3.0 - 520.0 * eta) * chis)
            + (75515.0 / 144.0 - 8225.0 * eta / 18.0) * delta * chia * chis
            + (75515.0 / 288.0 - 263245.0 * eta / 252.0 - 480.0 * e2) * chia * chia
            + (75515.0 / 288.0 - 232415.0 * eta / 504.0 + 1255.0 * e2 / 9.0) * chis * chis;
        let psi7_spin = (-25150083775.0 / 3048192.0 + 10566655595.0 * eta / 762048.0
            - 1042165.0 * e2 / 3024.0
            + 5345.0 * e3 / 36.0)
            * chis
            + (-25150083775.0 / 3048192.0 + 26804935.0 * eta / 6048.0 - 1985.0 * e2 / 48.0)
                * delta
                * chia;

        let psi5 = PI * (38645.0 / 756.0 - 65.0 * eta / 9.0) - gamma;
        let psi6_const = 11583231236531.0 / 4694215680.0
            - 640.0 * pi2 / 3.0
            - 6848.0 * EULER_GAMMA / 21.0
            - (6848.0 / 21.0) * 4f64.ln()
            + eta * (-15737765635.0 / 3048192.0 + 2255.0 * pi2 / 12.0)
            + 76055.0 * e2 / 1728.0
            - 127825.0 * e3 / 1296.0
            + psi6_spin;
        let mut psi = [
            1.0,
            0.0,
            3715.0 / 756.0 + 55.0 * eta / 9.0,
            -16.0 * PI + 4.0 * beta,
            15293365.0 / 508032.0 + 27145.0 * eta / 504.0 + 3085.0 * e2 / 72.0 + sigma_term,
            psi5,
            psi6_const,
            PI * (77096675.0 / 254016.0 + 378515.0 * eta / 1512.0 - 74045.0 * e2 / 756.0)
                + psi7_spin,
        ];
        let mut psi5_log = 3.0 * psi5;
        let mut psi6_log = -6848.0 / 21.0;
        for (k, p) in psi.iter_mut().enumerate() {
            if k > phase_order {
                *p = 0.0;
            }
        }
        if phase_order < 5 {
            psi5_log = 0.0;
        }
        if phase_order < 6 {
            psi6_log = 0.0;
        }
        let mc_sec = b.chirp_mass() * T_SUN;
        let amp0 = (5.0f64 / 24.0).sqrt()
            * PI.powf(-2.0 / 3.0)
            * (C_SI / (distance * MPC))
            * mc_sec.powf(5.0 / 6.0);
        Ok(TaylorF2 {
            binary: *b,
            m_sec: m * T_SUN,
            newtonian: 3.0 / (128.0 * eta),
            psi,
            psi5_log,
            psi6_log,
            amp0,
            amp_v: amp0 * (PI * m * T_SUN).powf(7.0 / 6.0),
        })
    }

    /// Psi(f) in radians, evaluated directly (f64).
    #[inline]
    pub fn phase(&self, f: f64) -> f64 {
        self.phase_amplitude(f).0
    }

    /// |h~(f)|: the Newtonian stationary-phase amplitude.
    #[inline]
    pub fn amplitude(&self, f: f64) -> f64 {
        self.amp0 * f.powf(-7.0 / 6.0)
    }

    /// Leading-order phase magnitude, used to size interpolation blocks.
    fn newtonian_phase(&self, f: f64) -> f64 {
        let v = (PI * self.m_sec * f).cbrt();
        self.newtonian / (v * v * v * v * v)
    }

    /// Block length (bins) that keeps the cubic interpolation error under
    /// `PHASE_TOLERANCE` starting at `f`: the error of a cubic through four equally
    /// spaced nodes over width `h` is at most ~ |Psi''''| h^4 / 1950, and
    /// |Psi''''| ~ (5/3)(8/3)(11/3)(14/3) Psi_N / f^4 at leading order.
    pub fn block_len(&self, f: f64, df: f64) -> usize {
        let d4 = 75.9 * self.newtonian_phase(f) / (f * f * f * f);
        let h = (1950.0 * PHASE_TOLERANCE / d4).powf(0.25);
        let bins = (h / df).floor();
        if bins >= MAX_BLOCK as f64 {
            MAX_BLOCK
        } else {
            bins as usize
        }
    }

    /// Psi(f) and |h~(f)| sharing one cube root: `f^(-7/6) = v^(-7/2) (pi M)^(7/6)`.
    #[inline]
    pub fn phase_amplitude(&self, f: f64) -> (f64, f64) {
        let v = (PI * self.m_sec * f).cbrt();
        let lnv = v.ln();
        let p = &self.psi;
        // sum_k psi_k v^k + v^5 psi5 * 3 ln v + v^6 psi6_log ln v, by Horner.
        let tail = p[5] + self.psi5_log * lnv + v * (p[6] + self.psi6_log * lnv + v * p[7]);
        let series = p[0] + v * (p[1] + v * (p[2] + v * (p[3] + v * (p[4] + v * tail))));
        let v2 = v * v;
        let v3 = v2 * v;
        let phase = -PI / 4.0 + self.newtonian * series / (v3 * v2);
        let amp = self.amp_v / (v3 * v.sqrt());
        (phase, amp)
    }
}


impl TaylorF2 {
    /// The source this template describes.
    pub fn binary(&self) -> &Binary {
        &self.binary
    }
}

impl Smooth for TaylorF2 {
    #[inline]
    fn phase_amplitude(&self, f: f64) -> (f64, f64) {
        TaylorF2::phase_amplitude(self, f)
    }
    #[inline]
    fn block_len(&self, f: f64, df: f64) -> usize {
        TaylorF2::block_len(self, f, df)
    }
}

#[cfg(test)]
mod tests {
    use super::super::{blocks, isco_frequency, duration::time_to_coalescence};
    use super::*;
    use num_complex::Complex64;

    #[test]
    fn phase_derivative_is_two_pi_time() {
        // REFERENCES item 3: dPsi/df = 2 pi t(f) exactly (with t_c = 0, t(f) = -(t_c - t(f))).
        let b = Binary::new(1.6, 1.2, 0.0, 0.0).unwrap();
        let t = TaylorF2::new(&b, 1.0, 7).unwrap();
        for f in [30.0, 100.0, 400.0] {
            let h = 1e-4 * f;
            let dpsi = (t.phase(f + h) - t.phase(f - h)) / (2.0 * h);
            let expected = -2.0 * PI * time_to_coalescence(&b, f, 7);
            assert!(
                (dpsi / expected - 1.0).abs() < 1e-6,
                "f={f}: {dpsi} vs {expected}"
            );
        }
    }

    #[test]
    fn recurrence_matches_direct_evaluation() {
        for (m1, m2, chi1, chi2, df) in [
            (1.4, 1.4, 0.0, 0.0, 1.0 / 256.0),
            (10.0, 1.3, 0.7, -0.4, 1.0 / 64.0),
            (30.0, 25.0, 0.9, 0.9, 0.25),
        ] {
            let b = Binary::new(m1, m2, chi1, chi2).unwrap();
            let t = TaylorF2::new(&b, 100.0, 7).unwrap();
            let k_lo = (20.0 / df) as usize;
            let k_hi = (isco_frequency(b.total()) / df) as usize;
            let mut worst: f64 = 0.0;
            blocks::for_each_bin(&t, k_lo, k_hi, df, |k, h| {
                let f = k as f64 * df;
                let exact = Complex64::from_polar(t.amplitude(f), -t.phase(f));
                worst = worst.max((h - exact).norm() / exact.norm());
            });
            assert!(worst < 2e-6, "m1={m1} m2={m2}: relative error {worst}");
        }
    }

    #[test]
    fn rejects_bad_distance_and_order() {
        let b = Binary::new(1.4, 1.4, 0.0, 0.0).unwrap();
        assert_eq!(TaylorF2::new(&b, 0.0, 7).unwrap_err().argument, "distance");
        assert_eq!(TaylorF2::new(&b, 1.0, 8).unwrap_err().argument, "phase_order");
    }
}
