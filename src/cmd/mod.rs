//! The command line: the root parser (`Cli`, the `Command` enum) and one module per command, each
//! owning its arguments, their validation into settings and its `run`. The libraries below never
//! see these types; [`crate::run`] parses once and dispatches here.

use clap::{Parser, Subcommand};

pub mod common;
pub mod compare;
pub mod demo;
pub mod devices;
pub mod gen;
pub mod log;
pub mod scan;
pub mod sweep;
pub mod watch;

/// Top-level help text shown under the usage line.
const ABOUT: &str = "brink: measures clipping, true peak and harmonic distortion in audio.";

/// brink command line.
#[derive(Debug, Parser)]
#[command(name = "brink", version, about = ABOUT, propagate_version = true)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// The modes of brink.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Measure WAV files: levels, true peak, overs, flat tops and harmonic distortion.
    #[command(after_help = scan::SCAN_AFTER_HELP)]
    Scan(scan::ScanArgs),
    /// Write test signals to a WAV file, one recipe per channel.
    #[command(after_help = gen::RECIPE_HELP)]
    Gen(gen::GenArgs),
    /// Measure live, headless: summaries every interval and clip events as they happen,
    /// as NDJSON or CSV lines (to standard output or a rotating file).
    Log(log::LogArgs),
    /// The terminal dashboard on a live input, a WAV file (--input file:PATH) or a log being
    /// written (--follow FILE): meters, clip lamps, harmonic bars, odd/even balance.
    Watch(watch::WatchArgs),
    /// The dashboard on the bundled demo tones, looping; no audio hardware needed.
    Demo(demo::DemoArgs),
    /// Drive a stage under test from an output and measure its return: THD and harmonics
    /// against drive (or frequency), the clipping onset and knee.
    Sweep(sweep::SweepArgs),
    /// List the audio hosts and devices this machine offers.
    Devices(devices::DevicesArgs),
    /// Compare two harmonic fingerprints (WAV captures, snapshots, scan reports) or two sweeps
    /// side by side, with the differences in plain words.
    #[command(after_help = compare::COMPARE_AFTER_HELP)]
    Compare(compare::CompareArgs),
}
