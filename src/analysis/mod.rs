//! Stateful analysers built on `dsp`: the one per-channel analyser every mode drives, and the
//! reading and report types it gives.

pub mod channel;
pub mod character;
pub mod episode;
pub mod fingerprint;
pub mod reading;
pub mod report;

pub use channel::{ChannelAnalyzer, ChannelSettings, ClipNotice};
pub use reading::IntervalReading;
