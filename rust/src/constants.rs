//! Physical constants shared by every kernel (SI units, IAU nominal values).

/// G M_sun / c^3 in seconds, from the IAU 2015 nominal solar mass parameter
/// (Resolution B3, 1.3271244e20 m^3 s^-2).
pub const T_SUN: f64 = 1.3271244e20 / (C_SI * C_SI * C_SI);
/// One megaparsec in metres (IAU 2012 au, IAU 2015 parsec).
pub const MPC: f64 = 3.0856775814913673e22;
/// Speed of light, m/s (exact by the SI definition of the metre).
pub const C_SI: f64 = 299792458.0;
/// Euler's constant, which enters the 3PN phase and time coefficients.
pub const EULER_GAMMA: f64 = 0.577_215_664_901_532_9;
