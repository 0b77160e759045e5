//! The source a template describes: component masses and aligned spins, with the
//! validity checks every kernel shares, and the Schwarzschild ISCO frequency.

use crate::constants::T_SUN;
use crate::error::{ensure, Result};
use std::f64::consts::PI;

/// Schwarzschild innermost-stable-circular-orbit gravitational-wave frequency of
/// total mass `m_total` (solar masses), Hz: `1 / (6^(3/2) pi M T_sun)`.
pub fn isco_frequency(m_total: f64) -> f64 {
    1.0 / (6f64.powf(1.5) * PI * m_total * T_SUN)
}

/// Component masses (solar masses) and dimensionless spins along the orbital
/// angular momentum.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Binary {
    pub m1: f64,
    pub m2: f64,
    pub chi1: f64,
    pub chi2: f64,
}

impl Binary {
    /// A checked binary.
    ///
    /// # Errors
    /// Names `m1`/`m2` unless both masses are positive and finite, `chi1`/`chi2`
    /// unless `|chi| < 1` (NaN fails too).
    pub fn new(m1: f64, m2: f64, chi1: f64, chi2: f64) -> Result<Self> {
        ensure(m1.is_finite() && m1 > 0.0, "m1", || {
            format!("masses must be positive and finite, got {m1}")
        })?;
        ensure(m2.is_finite() && m2 > 0.0, "m2", || {
            format!("masses must be positive and finite, got {m2}")
        })?;
        ensure(chi1.abs() < 1.0, "chi1", || {
            format!("spins must satisfy |chi| < 1, got {chi1}")
        })?;
        ensure(chi2.abs() < 1.0, "chi2", || {
            format!("spins must satisfy |chi| < 1, got {chi2}")
        })?;
        Ok(Binary { m1, m2, chi1, chi2 })
    }

    /// Total mass `M = m1 + m2`, solar masses.
    pub fn total(&self) -> f64 {
        self.m1 + self.m2
    }

    /// Symmetric mass ratio `eta = m1 m2 / M^2`.
    pub fn eta(&self) -> f64 {
        self.m1 * self.m2 / (self.total() * self.total())
    }

    /// Chirp mass `eta^(3/5) M`, solar masses.
    pub fn chirp_mass(&self) -> f64 {
        self.eta().powf(0.6) * self.total()
    }

    /// The same masses without spins (the TaylorT2 durations are non-spinning).
    pub fn without_spins(&self) -> Self {
        Binary {
            chi1: 0.0,
            chi2: 0.0,
            ..*self
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn isco_matches_textbook_values() {
        // REFERENCES item 4: 1 Msun -> 4397.2 Hz, 2.8 -> 1570.4, 20 -> 219.86.
        assert!((isco_frequency(1.0) - 4397.2).abs() < 0.1);
        assert!((isco_frequency(2.8) - 1570.4).abs() < 0.1);
        assert!((isco_frequency(20.0) - 219.86).abs() < 0.01);
    }

    #[test]
    fn rejects_bad_parameters() {
        assert_eq!(Binary::new(-1.0, 1.0, 0.0, 0.0).unwrap_err().argument, "m1");
        assert_eq!(Binary::new(1.0, f64::NAN, 0.0, 0.0).unwrap_err().argument, "m2");
        assert_eq!(Binary::new(1.0, 1.0, 0.0, 1.0).unwrap_err().argument, "chi2");
    }
}
