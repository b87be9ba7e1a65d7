//! Where samples come from.

pub mod wav;

pub use wav::{WavError, WavInfo, WavSource};
