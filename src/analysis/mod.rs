//! Stateful analysers built on `dsp`: per-channel measurement and its reports.

pub mod channel;
pub mod character;
pub mod episode;
pub mod report;

pub use channel::{ChannelAnalyzer, ChannelSettings};
