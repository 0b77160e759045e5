//! chirpsift core: matched-filter kernels for compact-binary inspiral searches.
//!
//! Plain Rust: nothing here knows about Python; `python.rs` (feature `python`) is
//! the only bindings module.

pub mod error;
pub mod fft;
pub mod filter;
pub mod scratch;
pub mod search;
pub mod spectrum;
pub mod threads;
pub mod waveform;
pub mod yardstick;

#[cfg(feature = "python")]
mod python;
