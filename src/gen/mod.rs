//! Test-signal synthesis (`brink gen`).
//!
//! Each output channel is described by one *recipe* string, `KIND[:FREQ][@LEVEL][,key=value...]`,
//! in a small language of our own ([`recipe`]); [`synth::render`] turns a recipe into f64 samples
//! (full scale ±1) and [`wav_out::write_wav`] writes them as 16/24/32-bit integer or 32-bit float
//! WAV. [`Signal`] is what to render (recipes, rate, length, seed); [`render_channels`] renders it
//! in memory and [`write_file`] writes it with a summary per channel. The command's arguments and
//! the user-facing summary of the language are in `cmd::gen`; [`demo`] renders the bundled demo
//! tones.
//!
//! Conventions:
//! - LEVEL is the **peak** of the finished waveform in dBFS (`20·log10(peak)`), before any `noise=`
//!   or `dc=` is added. Exceptions: `harmonics` (LEVEL is the fundamental's peak) and `noise`
//!   (LEVEL is an RMS level).
//! - RMS levels (`noise@LEVEL`, `noise=DB`) follow AES17: `rms_dbfs = 20·log10(√2·rms)`, so noise
//!   at −20 dBFS has the same RMS as a sine peaking at −20 dBFS.
//! - Phase is computed from the integer sample index (`2π·f·n/fs`), never accumulated, so long files
//!   stay exact; an integer frequency repeats bit for bit every `fs/gcd(fs, f)` samples.
//! - Noise and dither come from a seeded generator of our own (xoshiro256** with Box–Muller), so a
//!   seed always gives the same file on every build.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::time::Duration;

pub mod demo;
pub mod recipe;
mod rng;
pub mod synth;
pub mod wav_out;

pub use recipe::{parse_recipe, Recipe};
pub use synth::render;
pub use wav_out::{write_wav, SampleFormat, WriteOptions, WriteStats};

/// Shortest and longest sample rates `run` accepts, Hz.
pub const RATE_RANGE: (u32, u32) = (8000, 384_000);
/// Longest file `run` writes.
pub const MAX_LENGTH: Duration = Duration::from_secs(3600);

/// Everything that can go wrong while generating a test signal. Messages are one line.
#[derive(Debug, thiserror::Error)]
pub enum GenError {
    /// The recipe names no known kind.
    #[error("unknown signal kind '{kind}' (known: {known})")]
    UnknownKind {
        /// What was written.
        kind: String,
        /// The known kinds, comma-separated.
        known: String,
    },
    /// A value that does not parse.
    #[error("bad {what} '{value}' in '{recipe}'")]
    BadValue {
        /// What the value is (level, frequency, ...).
        what: &'static str,
        /// The text that failed.
        value: String,
        /// The whole recipe.
        recipe: String,
    },
    /// A key the kind does not take.
    #[error("unknown key '{key}' for {kind} (allowed: {allowed})")]
    UnknownKey {
        /// The key.
        key: String,
        /// The recipe's kind.
        kind: &'static str,
        /// The keys that kind takes.
        allowed: String,
    },
    /// The same key twice.
    #[error("duplicate key '{key}' in '{recipe}'")]
    DuplicateKey {
        /// The key.
        key: String,
        /// The whole recipe.
        recipe: String,
    },
    /// Any other problem with a recipe.
    #[error("{message} in '{recipe}'")]
    Recipe {
        /// What is wrong.
        message: String,
        /// The whole recipe.
        recipe: String,
    },
    /// A frequency the sample rate cannot carry.
    #[error("frequency {freq} Hz is at or above Nyquist ({nyquist} Hz): {what}")]
    AboveNyquist {
        /// The offending frequency, Hz.
        freq: f64,
        /// Half the sample rate, Hz.
        nyquist: f64,
        /// Which part of which recipe.
        what: String,
    },
    /// A recipe that cannot be rendered as asked (other than Nyquist).
    #[error("{0}")]
    Render(String),
    /// A sample format other than 16, 24, 32 or f32.
    #[error("unknown sample format '{0}' (use 16, 24, 32 or f32)")]
    BadFormat(String),
    /// A sample rate outside [`RATE_RANGE`].
    #[error("sample rate {0} Hz is out of range (8000 to 384000 Hz)")]
    Rate(u32),
    /// A length over [`MAX_LENGTH`] or under one sample.
    #[error("length {0}")]
    Length(String),
    /// Channels handed to the writer do not fit together.
    #[error("{0}")]
    Channels(String),
    /// An error in one channel's recipe.
    #[error("channel {channel}: {inner}")]
    Channel {
        /// 1-based channel number.
        channel: usize,
        /// What went wrong.
        inner: Box<GenError>,
    },
    /// Creating or writing the WAV file failed.
    #[error("cannot write '{}': {cause}", path.display())]
    Wav {
        /// The file.
        path: PathBuf,
        /// hound's error.
        cause: hound::Error,
    },
    /// Writing the summary failed.
    #[error("cannot print the summary: {0}")]
    Output(std::io::Error),
}

/// What to render: one recipe per channel at a rate, for a length, with a noise seed.
#[derive(Debug, Clone, PartialEq)]
pub struct Signal {
    /// One recipe per channel, e.g. `sine:997@-20`.
    pub recipes: Vec<String>,
    /// Sample rate in Hz ([`RATE_RANGE`]).
    pub rate: u32,
    /// Length (at most [`MAX_LENGTH`]).
    pub length: Duration,
    /// Seed for noise and dither; the same seed gives the same file.
    pub seed: u64,
}

/// Most samples (all channels) rendered at once: 2 GiB of f64.
const MAX_RENDERED_SAMPLES: usize = 1 << 28;

/// Stream numbers for [`rng::derive_seed`]: channel `i` renders with stream `i`, dither uses its own.
const DITHER_STREAM: u64 = 0xD1_7E_E5;

/// Render every recipe of `args` (one per channel) in f64, full scale ±1, checking the rate and
/// length limits first. Returns the recipes parsed and the channels.
fn render_checked(args: &Signal) -> Result<(Vec<Recipe>, Vec<Vec<f64>>), GenError> {
    if !(RATE_RANGE.0..=RATE_RANGE.1).contains(&args.rate) {
        return Err(GenError::Rate(args.rate));
    }
    if args.length > MAX_LENGTH {
        return Err(GenError::Length(format!(
            "{:.3} s is over the limit of 1 hour",
            args.length.as_secs_f64()
        )));
    }
    let frames = (args.length.as_secs_f64() * f64::from(args.rate)).round() as usize;
    if frames == 0 {
        return Err(GenError::Length(format!(
            "{} s is shorter than one sample at {} Hz",
            args.length.as_secs_f64(),
            args.rate
        )));
    }
    // Every channel is rendered in f64 before writing: keep that within 2 GiB.
    let samples = frames.saturating_mul(args.recipes.len());
    if samples > MAX_RENDERED_SAMPLES {
        return Err(GenError::Length(format!(
            "{} channels of {:.3} s at {} Hz would take {:.1} GB to render (limit 2.1 GB): shorten --length or split the file",
            args.recipes.len(),
            args.length.as_secs_f64(),
            args.rate,
            samples as f64 * 8.0 / 1e9
        )));
    }
    let in_channel = |i: usize| {
        move |e: GenError| GenError::Channel {
            channel: i + 1,
            inner: Box::new(e),
        }
    };
    let recipes = args
        .recipes
        .iter()
        .enumerate()
        .map(|(i, s)| parse_recipe(s).map_err(in_channel(i)))
        .collect::<Result<Vec<_>, _>>()?;
    let channels = recipes
        .iter()
        .enumerate()
        .map(|(i, r)| {
            render(r, args.rate, frames, rng::derive_seed(args.seed, i as u64))
                .map_err(in_channel(i))
        })
        .collect::<Result<Vec<_>, _>>()?;
    Ok((recipes, channels))
}

/// Render every recipe of `args` (one per channel) in f64, full scale ±1, without writing a file
/// (the demo plays them straight into the live pipeline).
pub fn render_channels(args: &Signal) -> Result<Vec<Vec<f64>>, GenError> {
    render_checked(args).map(|(_, channels)| channels)
}

/// Render every recipe of `signal`, write the WAV file `out` in `format` (with TPDF dither if
/// asked), print one summary line per channel (recipe, peak, samples clamped) to `summary`.
pub fn write_file(
    signal: &Signal,
    out: &Path,
    format: SampleFormat,
    dither: bool,
    summary: &mut dyn Write,
) -> Result<(), GenError> {
    let (recipes, channels) = render_checked(signal)?;
    let opts = WriteOptions {
        format,
        dither,
        seed: rng::derive_seed(signal.seed, DITHER_STREAM),
    };
    let stats = write_wav(out, signal.rate, &channels, &opts)?;
    for (i, (r, x)) in recipes.iter().zip(&channels).enumerate() {
        let peak = x.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        let peak_txt = if peak > 0.0 {
            format!("{:.2} dBFS", 20.0 * peak.log10())
        } else {
            "-inf dBFS".to_string()
        };
        let clamped = stats.clamped.get(i).copied().unwrap_or(0);
        let clamp_txt = if clamped > 0 {
            format!(", {clamped} samples clamped to full scale")
        } else {
            String::new()
        };
        writeln!(summary, "ch{}  {r}  peak {peak_txt}{clamp_txt}", i + 1)
            .map_err(GenError::Output)?;
    }
    Ok(())
}
