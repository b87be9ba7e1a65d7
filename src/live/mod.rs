//! The live pipeline: a capture side feeding a lock-free ring, an analysis thread cutting blocks
//! from it and publishing results over a bounded channel.

pub mod capture;
pub mod devices;
pub mod engine;
pub mod onset;
pub mod ring;
pub mod run;
pub mod session;
pub mod source;
