//! Test-signal synthesis (`brink gen`).
//!
//! Each output channel is described by one *recipe* string, `KIND[:FREQ][@LEVEL][,key=value...]`,
//! in a small language of our own ([`recipe`]); [`synth::render`] turns a recipe into f64 samples
//! (full scale ±1) and [`wav_out::write_wav`] writes them as 16/24/32-bit integer or 32-bit float
//! WAV. [`RECIPE_HELP`] is the user-facing summary of the language; [`run`] is the whole command.
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
use std::path::PathBuf;
use std::time::Duration;

pub mod recipe;
mod rng;
pub mod synth;
pub mod wav_out;

pub use recipe::{parse_recipe, Recipe};
pub use synth::render;
pub use wav_out::{write_wav, SampleFormat, WriteOptions, WriteStats};

/// User-facing summary of the recipe language (source of `brink gen --help`).
pub const RECIPE_HELP: &str = "\
Each channel is one recipe: KIND[:FREQ][@LEVEL][,key=value...]
LEVEL is the peak of the finished waveform in dBFS (default -20), before noise= and dc=.
FREQ defaults to 997 Hz (twin: 19000+20000, smpte: 60+7000). Numbers are plain decimals.
Kinds:
  sine:997@-20      sine. LEVEL may sweep over the active span:
                    @-40..-6 ramps (in dB), @-40..-6/8 steps in 8 equal steps
  harmonics:1000@-20,h2=-40,h3=-60
                    fundamental plus harmonic N at hN dBc (N = 2..40), built as a
                    Chebyshev sum, so every harmonic is in cosine phase with the
                    fundamental (which starts at its crest). LEVEL = fundamental peak
  square:100@-6  triangle:100@-6  saw:100@-6
                    Fourier series with every harmonic below 98 % of Nyquist,
                    or below limit=HZ; scaled so the band-limited peak is LEVEL
  clip:997@-6,drive=6
                    sine driven DRIVE dB (default 6) past a hard clipper; the
                    plateau sits exactly at LEVEL; drive=0 is a clean sine
  soft:997@-6,drive=6,bias=0.3
                    y = tanh(g(x+bias)) - tanh(g*bias) on a unit sine x,
                    g = 10^(drive/20), bias -1..1; bias=0 gives odd harmonics only
  twin:19000+20000@-6,ratio=1
                    two sines, amplitudes ratio:1 (first over second), sum of
                    amplitudes = LEVEL: the twin-tone intermodulation stimulus
  smpte:60+7000@-6,ratio=4
                    twin with the SMPTE RP120 defaults, 60 Hz + 7 kHz at 4:1
                    (smpte:250+8000 for the DIN pair); shown in the twin form
  noise@-60         Gaussian white noise; LEVEL is RMS after AES17,
                    20*log10(sqrt(2)*rms), so it matches a sine of that peak
  silence           nothing (add dc= or noise=)
Keys for every kind (noise takes no phase= or noise=, silence no phase=):
  noise=DB          add Gaussian noise at this AES17 RMS level
  dc=X              add a DC offset (linear, full scale = 1)
  phase=DEG         start phase of the fundamental at start= (0 = rising zero
                    crossing; harmonics: 0 = crest; twin: both tones)
  start=S stop=S    everything (noise=, dc= too) is silent outside [start, stop),
                    in seconds from the file start
  fade=MS           raised-cosine fade in and out at start and stop
drive (clip, soft) may sweep too: drive=0..12 ramps, drive=0..12/5 steps 0,3,6,9,12.
Noise is seeded (--seed): the same seed gives the same file.";

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
    /// A duration that does not parse or is not positive.
    #[error("bad duration '{value}': {reason}")]
    BadDuration {
        /// The text given.
        value: String,
        /// Why it was refused.
        reason: &'static str,
    },
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

/// Parse a short duration: a plain decimal number with a unit `ms`, `s` or `m`, e.g. `500ms`,
/// `2s`, `1.5s`, `1m`. Zero, negative values, exponents and anything else are refused.
pub fn parse_duration(s: &str) -> Result<Duration, GenError> {
    let bad = |reason| GenError::BadDuration {
        value: s.to_string(),
        reason,
    };
    let t = s.trim();
    let (num, unit_secs) = if let Some(n) = t.strip_suffix("ms") {
        (n, 0.001)
    } else if let Some(n) = t.strip_suffix('s') {
        (n, 1.0)
    } else if let Some(n) = t.strip_suffix('m') {
        (n, 60.0)
    } else {
        return Err(bad(
            "expected a number with a unit ms, s or m, e.g. 500ms, 2s, 1.5s, 1m",
        ));
    };
    let num = num.trim_end();
    if num.starts_with('-') {
        return Err(bad("must be above zero"));
    }
    let digits_ok = !num.is_empty()
        && num.bytes().all(|b| b.is_ascii_digit() || b == b'.')
        && num.bytes().filter(|&b| b == b'.').count() <= 1
        && num.bytes().any(|b| b.is_ascii_digit());
    if !digits_ok {
        return Err(bad(
            "expected a number with a unit ms, s or m, e.g. 500ms, 2s, 1.5s, 1m",
        ));
    }
    let v: f64 = num
        .parse()
        .map_err(|_| bad("expected a number with a unit ms, s or m, e.g. 500ms, 2s, 1.5s, 1m"))?;
    let d = Duration::try_from_secs_f64(v * unit_secs).map_err(|_| bad("too long"))?;
    if d.is_zero() {
        return Err(bad("must be above zero"));
    }
    Ok(d)
}

/// Arguments of `brink gen`.
#[derive(Debug, Clone, clap::Args)]
pub struct GenArgs {
    /// Output WAV file.
    pub out: PathBuf,
    /// One recipe per channel (see RECIPE_HELP), e.g. `sine:997@-20`.
    #[arg(required = true)]
    pub recipes: Vec<String>,
    /// Sample rate in Hz (8000 to 384000).
    #[arg(long, default_value_t = 48000)]
    pub rate: u32,
    /// Sample format: 16, 24, 32 (integer) or f32 (float).
    #[arg(long, default_value = "24")]
    pub bits: SampleFormat,
    /// Length with a unit: 500ms, 2s, 1.5s, 1m (at most 1 hour).
    #[arg(long, default_value = "2s", value_parser = parse_duration)]
    pub length: Duration,
    /// Add TPDF dither (±1 LSB peak) before rounding to integer samples.
    #[arg(long)]
    pub dither: bool,
    /// Seed for noise and dither; the same seed gives the same file.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
}

/// Most samples (all channels) rendered at once: 2 GiB of f64.
const MAX_RENDERED_SAMPLES: usize = 1 << 28;

/// Stream numbers for [`rng::derive_seed`]: channel `i` renders with stream `i`, dither uses its own.
const DITHER_STREAM: u64 = 0xD1_7E_E5;

/// Render every recipe of `args` (one per channel) in f64, full scale ±1, checking the rate and
/// length limits first. Returns the recipes parsed and the channels.
fn render_checked(args: &GenArgs) -> Result<(Vec<Recipe>, Vec<Vec<f64>>), GenError> {
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
pub fn render_channels(args: &GenArgs) -> Result<Vec<Vec<f64>>, GenError> {
    render_checked(args).map(|(_, channels)| channels)
}

/// `brink gen`: render every recipe, write the WAV file, print one summary line per channel.
pub fn run(args: &GenArgs, out: &mut dyn Write) -> Result<(), GenError> {
    let (recipes, channels) = render_checked(args)?;
    let opts = WriteOptions {
        format: args.bits,
        dither: args.dither,
        seed: rng::derive_seed(args.seed, DITHER_STREAM),
    };
    let stats = write_wav(&args.out, args.rate, &channels, &opts)?;
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
        writeln!(out, "ch{}  {r}  peak {peak_txt}{clamp_txt}", i + 1).map_err(GenError::Output)?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::Parser;

    #[test]
    fn durations_parse() {
        assert_eq!(parse_duration("500ms").unwrap(), Duration::from_millis(500));
        assert_eq!(parse_duration("2s").unwrap(), Duration::from_secs(2));
        assert_eq!(parse_duration("1.5s").unwrap(), Duration::from_millis(1500));
        assert_eq!(parse_duration("1m").unwrap(), Duration::from_secs(60));
        assert_eq!(parse_duration(" 0.25m ").unwrap(), Duration::from_secs(15));
        assert_eq!(parse_duration(".5s").unwrap(), Duration::from_millis(500));
    }

    #[test]
    fn durations_refused_with_reason() {
        let e = |s: &str| parse_duration(s).unwrap_err().to_string();
        assert_eq!(e("0s"), "bad duration '0s': must be above zero");
        assert_eq!(e("0.0ms"), "bad duration '0.0ms': must be above zero");
        assert_eq!(e("-1s"), "bad duration '-1s': must be above zero");
        let garbage = "expected a number with a unit ms, s or m, e.g. 500ms, 2s, 1.5s, 1m";
        for s in [
            "2", "abc", "s", "1e3s", "1.2.3s", "2h", ".s", "inf s", "1 2s", "",
        ] {
            assert_eq!(e(s), format!("bad duration '{s}': {garbage}"), "for {s:?}");
        }
    }

    #[test]
    fn help_is_compact_and_names_every_kind_and_key() {
        assert!(RECIPE_HELP.lines().count() <= 40);
        for k in recipe::Kind::ALL {
            assert!(RECIPE_HELP.contains(k.name()), "{}", k.name());
        }
        for key in [
            "noise=", "dc=", "phase=", "start=", "stop=", "fade=", "limit=", "drive=", "bias=",
            "ratio=", "h2=",
        ] {
            assert!(RECIPE_HELP.contains(key), "{key}");
        }
    }

    #[derive(Debug, clap::Parser)]
    struct Cli {
        #[command(flatten)]
        gen: GenArgs,
    }

    #[test]
    fn clap_arguments_parse_with_defaults() {
        let cli = Cli::try_parse_from(["gen", "out.wav", "sine:997@-20", "noise@-60"]).unwrap();
        let a = cli.gen;
        assert_eq!(a.recipes, ["sine:997@-20", "noise@-60"]);
        assert_eq!(a.rate, 48000);
        assert_eq!(a.bits, SampleFormat::Int24);
        assert_eq!(a.length, Duration::from_secs(2));
        assert!(!a.dither);
        assert_eq!(a.seed, 1);
        let cli = Cli::try_parse_from([
            "gen", "o.wav", "sine", "--bits", "f32", "--length", "500ms", "--rate", "96000",
            "--dither", "--seed", "9",
        ])
        .unwrap();
        assert_eq!(cli.gen.bits, SampleFormat::Float32);
        assert_eq!(cli.gen.length, Duration::from_millis(500));
        let e = Cli::try_parse_from(["gen", "o.wav", "sine", "--bits", "12"]).unwrap_err();
        assert!(e.to_string().contains("unknown sample format '12'"), "{e}");
        let e = Cli::try_parse_from(["gen", "o.wav", "sine", "--length", "2"]).unwrap_err();
        assert!(e.to_string().contains("bad duration '2'"), "{e}");
        assert!(Cli::try_parse_from(["gen", "o.wav"]).is_err());
    }

    fn args(out: PathBuf, recipes: &[&str]) -> GenArgs {
        GenArgs {
            out,
            recipes: recipes.iter().map(|s| s.to_string()).collect(),
            rate: 48000,
            bits: SampleFormat::Int16,
            length: Duration::from_millis(100),
            dither: false,
            seed: 1,
        }
    }

    #[test]
    fn run_writes_file_and_summary() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("t.wav");
        let mut a = args(
            path.clone(),
            &["sine:1000@-6", "clip:997@3,drive=6", "silence"],
        );
        a.bits = SampleFormat::Int16;
        let mut text = Vec::new();
        run(&a, &mut text).unwrap();
        let text = String::from_utf8(text).unwrap();
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(lines.len(), 3, "{text}");
        assert_eq!(lines[0], "ch1  sine:1000@-6  peak -6.00 dBFS");
        // +3 dBFS plateau in a 16-bit file: the plateau samples are clamped and reported.
        assert!(
            lines[1].starts_with("ch2  clip:997@3,drive=6  peak 3.00 dBFS, "),
            "{text}"
        );
        assert!(
            lines[1].ends_with("samples clamped to full scale"),
            "{text}"
        );
        assert_eq!(lines[2], "ch3  silence  peak -inf dBFS");
        let r = hound::WavReader::open(&path).unwrap();
        assert_eq!(r.spec().channels, 3);
        assert_eq!(r.spec().sample_rate, 48000);
        assert_eq!(r.duration(), 4800);
    }

    #[test]
    fn run_channels_get_different_noise() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("n.wav");
        let mut a = args(path.clone(), &["noise@-20", "noise@-20"]);
        a.bits = SampleFormat::Float32;
        run(&a, &mut Vec::new()).unwrap();
        let mut r = hound::WavReader::open(&path).unwrap();
        let s: Vec<f32> = r.samples::<f32>().map(|v| v.unwrap()).collect();
        let differ = s.chunks(2).filter(|p| p[0] != p[1]).count();
        assert_eq!(differ, s.len() / 2);
    }

    #[test]
    fn run_refuses_bad_settings() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("x.wav");
        let mut a = args(path.clone(), &["sine"]);
        a.rate = 4000;
        assert_eq!(
            run(&a, &mut Vec::new()).unwrap_err().to_string(),
            "sample rate 4000 Hz is out of range (8000 to 384000 Hz)"
        );
        a.rate = 48000;
        a.length = Duration::from_secs(3601);
        assert_eq!(
            run(&a, &mut Vec::new()).unwrap_err().to_string(),
            "length 3601.000 s is over the limit of 1 hour"
        );
        let a = args(path.clone(), &["sine", "sqare:100"]);
        assert!(run(&a, &mut Vec::new())
            .unwrap_err()
            .to_string()
            .starts_with("channel 2: unknown signal kind 'sqare'"));
        let a = args(path.clone(), &["sine:30000"]);
        assert_eq!(
            run(&a, &mut Vec::new()).unwrap_err().to_string(),
            "channel 1: frequency 30000 Hz is at or above Nyquist (24000 Hz): 'sine:30000@-20'"
        );
        assert!(!path.exists());
    }
}
