//! Command-line arguments (raw values) and their validation into settings.

use std::path::PathBuf;

use clap::{Args, Parser, Subcommand};

use crate::analysis::ChannelSettings;
use crate::dsp::clip::ClipSettings;
use crate::dsp::tone::ToneSettings;
use crate::scan::ScanSettings;

/// Top-level help text shown under the usage line.
const ABOUT: &str = "brink: measures clipping, true peak and harmonic distortion in audio.";

const SCAN_AFTER_HELP: &str = "\
Measurements (per channel):
  sample peak     highest |sample|, dBFS (full scale = 1)
  true peak       ITU-R BS.1770-4 Annex 2: x4 oversampling below 88.2 kHz, x2 up to 176.4 kHz,
                  sample peak above; the reading includes the raw samples. dBTP
  RMS             AES17 convention: a full-scale sine reads 0 dBFS (square +3.01 dBFS)
  crest           sample peak over plain RMS, dB (sine 3.01 dB)
  DC              mean sample value, full scale = 1
  headroom        dB left between the true peak and full scale
  overs           runs of >= --over-length samples at digital full scale (largest code)
  flat tops       plateaus below full scale: runs held within --flat-tolerance, at least
                  --flat-min-level, entered and left with a kink (clipping before the converter)
  clip events     clipped runs of one kind closer than --merge-gap, joined into episodes
  fundamental     strongest tone (or --fundamental), refined by the IEEE 1057 four-parameter fit;
                  a silent or noise-only channel has none
  H2..H20         levels in dBc and phases relative to the fundamental (sine convention,
                  theta_k - k*theta_1), orders below --band-high and Nyquist
  THD             sqrt(sum H_n^2)/H1 over the reported harmonics (THD_F), % and dB
  THD+N           AES17: everything but the fundamental within --band-low..--band-high,
                  relative to the total within the band, dB
  SINAD, ENOB     IEEE 1241: fitted sine over the full-band fit residual; ENOB with range +-1
  odd/even        20*log10(sqrt(sum H_even^2)/sqrt(sum H_odd^2)); positive = even-rich
  fall-off        slope of harmonic level against log2(order), dB per octave of order,
                  over harmonics at least 10 dB above the noise floor
Distortion is measured over --tone-span at the centre of the file; --every adds a time line.";

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
    #[command(after_help = SCAN_AFTER_HELP)]
    Scan(ScanArgs),
    /// Write test signals to a WAV file, one recipe per channel.
    #[command(after_help = crate::gen::RECIPE_HELP)]
    Gen(crate::gen::GenArgs),
}

/// Arguments of `brink scan`.
#[derive(Debug, Args)]
pub struct ScanArgs {
    /// WAV files to measure (16/24/32-bit integer or 32/64-bit float PCM).
    #[arg(required = true)]
    pub files: Vec<PathBuf>,
    /// Print one JSON object per file, one per line (format "brink-scan-1").
    #[arg(long)]
    pub json: bool,
    /// Add a time line with levels and THD per slice of this length (e.g. 100ms, 1s).
    #[arg(long, value_parser = crate::gen::parse_duration)]
    pub every: Option<std::time::Duration>,
    /// Measure this fundamental (Hz) instead of the strongest tone.
    #[arg(long)]
    pub fundamental: Option<f64>,
    /// Lower edge of the THD+N band (Hz).
    #[arg(long, default_value_t = 20.0)]
    pub band_low: f64,
    /// Upper edge of the band (Hz); harmonics above it are not reported.
    #[arg(long, default_value_t = 20_000.0)]
    pub band_high: f64,
    /// Highest harmonic order reported.
    #[arg(long, default_value_t = 20, value_parser = clap::value_parser!(u16).range(2..=40))]
    pub max_order: u16,
    /// Length of the span at the centre of each file used for distortion.
    #[arg(long, default_value = "4s", value_parser = crate::gen::parse_duration)]
    pub tone_span: std::time::Duration,
    /// Shortest run of full-scale samples counted as an over.
    #[arg(long, default_value_t = 3, value_parser = clap::value_parser!(u16).range(1..))]
    pub over_length: u16,
    /// Width of the band a flat top must stay in (fraction of full scale).
    #[arg(long, default_value_t = 0.001)]
    pub flat_tolerance: f64,
    /// Lowest level a flat top may sit at (dBFS).
    #[arg(long, default_value_t = -40.0, allow_negative_numbers = true)]
    pub flat_min_level: f64,
    /// Clipped runs of one kind closer than this join one episode.
    #[arg(long, default_value = "100ms", value_parser = crate::gen::parse_duration)]
    pub merge_gap: std::time::Duration,
}

impl ScanArgs {
    /// Validate into scan settings.
    pub fn settings(&self) -> Result<ScanSettings, String> {
        if !(self.band_low >= 0.0 && self.band_high > self.band_low) {
            return Err(format!(
                "band {} Hz to {} Hz is empty: --band-high must exceed --band-low",
                self.band_low, self.band_high
            ));
        }
        if let Some(f) = self.fundamental {
            if !(f > 0.0 && f.is_finite()) {
                return Err(format!("--fundamental {f} Hz must be a positive frequency"));
            }
        }
        if !(self.flat_tolerance > 0.0 && self.flat_tolerance < 0.5) {
            return Err(format!(
                "--flat-tolerance {} must be between 0 and 0.5 of full scale",
                self.flat_tolerance
            ));
        }
        if self.flat_min_level.is_nan() || self.flat_min_level >= 0.0 {
            return Err(format!(
                "--flat-min-level {} dBFS must be below full scale (negative)",
                self.flat_min_level
            ));
        }
        Ok(ScanSettings {
            channel: ChannelSettings {
                clip: ClipSettings {
                    min_over_run: self.over_length as usize,
                    flat_tolerance: self.flat_tolerance as f32,
                    flat_min_level: 10f64.powf(self.flat_min_level / 20.0) as f32,
                    ..ClipSettings::default()
                },
                tone: ToneSettings {
                    band_low_hz: self.band_low,
                    band_high_hz: self.band_high,
                    max_order: self.max_order as usize,
                    fundamental_hz: self.fundamental,
                    ..ToneSettings::default()
                },
                merge_gap_s: self.merge_gap.as_secs_f64(),
                ..ChannelSettings::default()
            },
            tone_span_s: self.tone_span.as_secs_f64(),
            every_s: self.every.map(|d| d.as_secs_f64()),
        })
    }
}
