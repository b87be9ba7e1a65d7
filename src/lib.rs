//! brink: clipping, true peak and harmonic distortion measurement, live or from files.
#![warn(missing_docs)]

pub mod analysis;
pub mod dsp;
pub mod gen;
pub mod sink;
pub mod source;
