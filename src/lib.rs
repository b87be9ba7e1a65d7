//! brink: clipping, true peak and harmonic distortion measurement, live or from files.
#![warn(missing_docs)]

pub mod dsp;
pub mod gen;
pub mod source;
