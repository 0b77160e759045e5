//! chirpsift core: matched-filter kernels for compact-binary inspiral searches.
//!
//! # The flow, module by module
//! ```text
//! strain --> spectrum --> (segments) --> fused: prepare --> per template: waveform --> product --> FFT --> peaks --> chisq --> triggers
//!            Welch,        chosen in      q = 4 df d~/S     on the fly      q h~*        decimated   find,     Allen's
//!            resample,     Python         moments of 1/S    (blocks)        folded       to band     cluster,  bands at
//!            truncate                                                                              refine    the peaks
//! ```
//! - [`spectrum`]: Welch PSD, design curves, resampling onto a segment's grid,
//!   inverse spectrum truncation, whitening.
//! - [`grid`]: the frequency grid every kernel shares (which bins a band holds, `1/S`).
//! - [`waveform`]: template families behind one [`waveform::Model`] enum, block
//!   generation, durations, batches of spectra.
//! - [`filter`]: matched filtering against explicit templates (sigma, SNR series)
//!   and batched real cross-correlation.
//! - [`overlap`]: the match of two templates (overlap maximised over time and phase)
//!   and fitting factors of points against a bank, for placing banks and checking them.
//! - [`fused`]: the search kernel: a prepared segment against a bank, templates
//!   generated on the fly, using [`peaks`] and [`chisq`].
//! - Infrastructure: [`error`], [`constants`], [`threads`] (the pool every kernel
//!   runs in), [`scratch`] (per-job buffers), [`fft`] (cached plans), [`timing`]
//!   (probes for the benchmarks).
//!
//! # Units and conventions
//! Seconds, Hz, solar masses, Mpc; strain dimensionless; one-sided PSD in 1/Hz.
//! Fourier: `x~ = rfft(x) dt`; inner product `<a|b> = 4 Re sum a~ b~* / S df`;
//! templates `h~ = A f^(-7/6) exp(-i Psi)` with `t_c = 0`, so matched filters peak at
//! the coalescence time.
//!
//! # Precision
//! Phases, PSDs, inverse PSDs and every square or accumulation are f64 (a PSD of
//! 1e-47/Hz is below f32's smallest normal). The fused kernel rescales data and
//! templates to O(1) before its float32 transform; SNRs are stored in f32 where the
//! caller asks.
//!
//! # Threads
//! Every kernel runs inside [`threads::install`], one cached rayon pool per thread
//! count. Work is split per template, channel or segment and reduced in a fixed
//! order, so results are bitwise identical for any thread count.
//!
//! Nothing here knows about Python; the `python` module (feature `python`) holds the
//! bindings and only converts.

pub mod error;
pub mod constants;
pub mod threads;
pub mod scratch;
pub mod fft;
pub mod grid;
pub mod spectrum;
pub mod waveform;
pub mod filter;
pub mod fused;
pub mod peaks;
pub mod chisq;
pub mod overlap;
pub mod timing;

#[cfg(feature = "python")]
mod python;

pub use error::{Error, Result};
