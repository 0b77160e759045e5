//! Template families and what the rest of the core may ask of them.
//!
//! A template is a [`Model`]: an enum over families, so the fused kernel's hot loop
//! is statically dispatched (one `match` per template, not per bin) and one bank can
//! mix families. Each family answers, for its own waveform:
//! - the spectrum, block by block ([`Model::for_each_block`]);
//! - its default upper frequency ([`Model::default_f_high`]);
//! - how long it lasts from a frequency ([`Model::duration`]), which sizes the
//!   corrupted start of every segment;
//! - the shape of `|h~(f)|^2` ([`Model::weight_shape`]), from which the fused kernel
//!   bounds the SNR lost to decimation.
//!
//! Adding a family means adding a variant and answering each `match` below; the
//! compiler finds every place that must learn about it.

mod batch;
mod binary;
pub mod blocks;
mod taylorf2;
mod duration;

pub use batch::{durations, isco_frequencies, models, spectra};
pub use binary::{isco_frequency, Binary};
pub use taylorf2::TaylorF2;
pub use duration::time_to_coalescence;

use num_complex::Complex64;

/// How `|h~(f)|^2` varies over a template's band, up to a constant factor.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum WeightShape {
    /// `f^(-7/3)` over the whole band: the Newtonian stationary-phase amplitude,
    /// which stops at the template's `f_high` (TaylorF2).
    Newtonian,
    /// Anything else (e.g. merger and ringdown power above ISCO): the fused kernel
    /// integrates [`Model::amplitude`] squared over its band.
    General,
}

/// One template of any family.
#[derive(Clone, Debug)]
pub enum Model {
    TaylorF2(TaylorF2),
}

impl Model {
    /// A TaylorF2 template of `binary` at `distance` Mpc, phase to `v^phase_order`.
    ///
    /// # Errors
    /// As [`TaylorF2::new`].
    pub fn taylorf2(binary: &Binary, distance: f64, phase_order: usize) -> crate::Result<Self> {
        Ok(Model::TaylorF2(TaylorF2::new(binary, distance, phase_order)?))
    }

    /// The source the template describes.
    pub fn binary(&self) -> &Binary {
        match self {
            Model::TaylorF2(t) => t.binary(),
        }
    }

    /// `|h~(f)|`, strain per Hz.
    #[inline]
    pub fn amplitude(&self, f: f64) -> f64 {
        match self {
            Model::TaylorF2(t) => t.amplitude(f),
        }
    }

    /// Call `emit(k0, block)` with consecutive runs `block[j] = h~_{k0 + j}` covering
    /// `k_lo <= k < k_hi` (`k_lo >= 1`) in ascending order.
    #[inline]
    pub fn for_each_block<F: FnMut(usize, &[Complex64])>(
        &self,
        k_lo: usize,
        k_hi: usize,
        df: f64,
        emit: F,
    ) {
        match self {
            Model::TaylorF2(t) => blocks::for_each_block(t, k_lo, k_hi, df, emit),
        }
    }

    /// Call `emit(k, h~_k)` for every bin `k_lo <= k < k_hi` (`k_lo >= 1`).
    #[inline]
    pub fn for_each_bin<F: FnMut(usize, Complex64)>(
        &self,
        k_lo: usize,
        k_hi: usize,
        df: f64,
        emit: F,
    ) {
        match self {
            Model::TaylorF2(t) => blocks::for_each_bin(t, k_lo, k_hi, df, emit),
        }
    }

    /// Upper frequency (Hz, exclusive) when the caller gives none: for TaylorF2 the
    /// Schwarzschild ISCO frequency of the total mass, where the inspiral
    /// approximation ends.
    pub fn default_f_high(&self) -> f64 {
        match self {
            Model::TaylorF2(t) => isco_frequency(t.binary().total()),
        }
    }

    /// Seconds from frequency `f` to the end of the waveform: for TaylorF2 the
    /// non-spinning 3.5PN TaylorT2 time to coalescence.
    pub fn duration(&self, f: f64) -> f64 {
        match self {
            Model::TaylorF2(t) => time_to_coalescence(&t.binary().without_spins(), f, 7),
        }
    }

    /// The shape of `|h~(f)|^2` over the band.
    pub fn weight_shape(&self) -> WeightShape {
        match self {
            Model::TaylorF2(_) => WeightShape::Newtonian,
        }
    }
}
