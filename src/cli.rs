//! Command-line arguments (raw values) and their validation into settings.

use std::path::PathBuf;

use clap::{Args, Parser, Subcommand};

use crate::analysis::ChannelSettings;
use crate::config::{self, ConfigFile, MeasureSection, ScanSection};
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
                  over harmonics at least 10 dB above the noise floor, taken from the odd orders
                  alone when the even ones are 20 dB down (and the reverse); square wave -6.02
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
    /// Measure live, headless: summaries every interval and clip events as they happen,
    /// as NDJSON or CSV lines (to standard output or a rotating file).
    Log(crate::logcmd::LogArgs),
    /// The terminal dashboard on a live input, a WAV file (--input file:PATH) or a log being
    /// written (--follow FILE): meters, clip lamps, harmonic bars, odd/even balance.
    Watch(crate::watch::WatchArgs),
    /// The dashboard on the bundled demo tones, looping; no audio hardware needed.
    Demo(crate::watch::DemoArgs),
    /// Drive a stage under test from an output and measure its return: THD and harmonics
    /// against drive (or frequency), the clipping onset and knee.
    Sweep(crate::sweep::SweepArgs),
    /// List the audio hosts and devices this machine offers.
    Devices(DevicesArgs),
    /// Compare two harmonic fingerprints (WAV captures, snapshots, scan reports) or two sweeps
    /// side by side, with the differences in plain words.
    #[command(after_help = crate::compare::COMPARE_AFTER_HELP)]
    Compare(crate::compare::CompareArgs),
}

/// Arguments of `brink devices`.
#[derive(Debug, Args)]
pub struct DevicesArgs {
    /// Only this host (e.g. alsa, jack).
    #[arg(long)]
    pub host: Option<String>,
    /// Print JSON instead of a table.
    #[arg(long)]
    pub json: bool,
}

/// Arguments of `brink scan`. Options left out take their value from the configuration files
/// (`--config FILE` over the user file `$XDG_CONFIG_HOME/brink/config.toml`), then from the
/// built-in defaults shown here.
#[derive(Debug, Args)]
pub struct ScanArgs {
    /// WAV files to measure (16/24/32-bit integer or 32/64-bit float PCM).
    #[arg(required = true)]
    pub files: Vec<PathBuf>,
    /// Read settings from this TOML file (see config/default.toml for every key).
    #[arg(long, value_name = "FILE")]
    pub config: Option<PathBuf>,
    /// Print one JSON object per file, one per line (format "brink-scan-1").
    #[arg(long, conflicts_with = "text")]
    pub json: bool,
    /// Print the readable report even if a configuration file asks for JSON.
    #[arg(long)]
    pub text: bool,
    /// Add a time line with levels and THD per slice of this length (e.g. 100ms, 1s).
    #[arg(long, value_parser = crate::gen::parse_duration)]
    pub every: Option<std::time::Duration>,
    /// Measure this fundamental (Hz) instead of the strongest tone.
    #[arg(long)]
    pub fundamental: Option<f64>,
    /// Lower edge of the THD+N band (Hz) [default: 20].
    #[arg(long)]
    pub band_low: Option<f64>,
    /// Upper edge of the band (Hz); harmonics above it are not reported [default: 20000].
    #[arg(long)]
    pub band_high: Option<f64>,
    /// Highest harmonic order reported [default: 20].
    #[arg(long, value_parser = clap::value_parser!(u16).range(2..=40))]
    pub max_order: Option<u16>,
    /// Length of the span at the centre of each file used for distortion [default: 4s].
    #[arg(long, value_parser = crate::gen::parse_duration)]
    pub tone_span: Option<std::time::Duration>,
    /// Shortest run of full-scale samples counted as an over [default: 3].
    #[arg(long, value_parser = clap::value_parser!(u16).range(1..))]
    pub over_length: Option<u16>,
    /// Width of the band a flat top must stay in (fraction of full scale) [default: 0.001].
    #[arg(long)]
    pub flat_tolerance: Option<f64>,
    /// Lowest level a flat top may sit at (dBFS) [default: -40].
    #[arg(long, allow_negative_numbers = true)]
    pub flat_min_level: Option<f64>,
    /// Clipped runs of one kind closer than this join one episode [default: 100ms].
    #[arg(long, value_parser = crate::gen::parse_duration)]
    pub merge_gap: Option<std::time::Duration>,
    /// Measure intermodulation distortion over the tone span: smpte (sidebands f2 ± n·f1 of a
    /// low and a high tone, re the high tone), twin (f2−f1, 2f1−f2, 2f2−f1 of two close tones,
    /// re the sum of both tones) or auto (twin when f2 < 2·f1).
    #[arg(long, value_name = "METHOD")]
    pub imd: Option<crate::dsp::imd::ImdMethod>,
    /// Also draw the spectrum of one channel's tone span (dBFS against log frequency, the
    /// fundamental and harmonics marked by order) as SVG into FILE. With several input files,
    /// each figure is FILE's name plus the input's (spectrum-take1.svg); two inputs with the
    /// same name are refused.
    #[arg(long, value_name = "FILE")]
    pub svg: Option<PathBuf>,
    /// Channel the --svg figure shows (from 1) [default: the first channel with a tone].
    #[arg(long, value_name = "N", requires = "svg", value_parser = clap::value_parser!(u16).range(1..))]
    pub channel: Option<u16>,
}

/// Validated settings of a scan run.
#[derive(Debug, Clone, PartialEq)]
pub struct ScanPlan {
    /// Measurement settings.
    pub settings: ScanSettings,
    /// JSON lines instead of the readable report.
    pub json: bool,
}

impl ScanArgs {
    /// The options given on the command line, as a configuration layer.
    pub fn as_config(&self) -> ConfigFile {
        ConfigFile {
            scan: ScanSection {
                every: self.every,
                tone_span: self.tone_span,
                merge_gap: self.merge_gap,
                json: if self.json {
                    Some(true)
                } else if self.text {
                    Some(false)
                } else {
                    None
                },
            },
            measure: MeasureSection {
                band_low_hz: self.band_low,
                band_high_hz: self.band_high,
                max_order: self.max_order,
                fundamental_hz: self.fundamental,
                over_length: self.over_length,
                flat_tolerance: self.flat_tolerance,
                flat_min_level_dbfs: self.flat_min_level,
            },
            watch: Default::default(),
        }
    }

    /// Built-in defaults, then the configuration files, then the command line; validated.
    pub fn plan(&self) -> Result<ScanPlan, String> {
        let files = config::layered(self.config.as_deref()).map_err(|e| e.to_string())?;
        let merged = config::builtin_defaults()
            .merge(files)
            .merge(self.as_config());
        let mut plan = plan_from(&merged)?;
        plan.settings.channel.imd = self.imd.map(crate::dsp::imd::ImdSettings::with_method);
        Ok(plan)
    }
}

/// Validate a merged configuration into scan settings.
pub fn plan_from(c: &ConfigFile) -> Result<ScanPlan, String> {
    let d = config::builtin_defaults();
    let m = &c.measure;
    let pick = |v: Option<f64>, def: Option<f64>| v.or(def).unwrap_or(f64::NAN);
    let band_low = pick(m.band_low_hz, d.measure.band_low_hz);
    let band_high = pick(m.band_high_hz, d.measure.band_high_hz);
    if !(band_low >= 0.0 && band_high > band_low) {
        return Err(format!(
            "band {band_low} Hz to {band_high} Hz is empty: --band-high must exceed --band-low"
        ));
    }
    if let Some(f) = m.fundamental_hz {
        if !(f > 0.0 && f.is_finite()) {
            return Err(format!("--fundamental {f} Hz must be a positive frequency"));
        }
    }
    let flat_tolerance = pick(m.flat_tolerance, d.measure.flat_tolerance);
    if !(flat_tolerance > 0.0 && flat_tolerance < 0.5) {
        return Err(format!(
            "--flat-tolerance {flat_tolerance} must be between 0 and 0.5 of full scale"
        ));
    }
    let flat_min_level = pick(m.flat_min_level_dbfs, d.measure.flat_min_level_dbfs);
    if flat_min_level.is_nan() || flat_min_level >= 0.0 {
        return Err(format!(
            "--flat-min-level {flat_min_level} dBFS must be below full scale (negative)"
        ));
    }
    let secs = |v: Option<std::time::Duration>, def: Option<std::time::Duration>| {
        v.or(def).unwrap_or_default().as_secs_f64()
    };
    let max_order = m.max_order.or(d.measure.max_order).unwrap_or(20);
    let over_length = m.over_length.or(d.measure.over_length).unwrap_or(3);
    Ok(ScanPlan {
        settings: ScanSettings {
            channel: ChannelSettings {
                clip: ClipSettings {
                    min_over_run: over_length as usize,
                    flat_tolerance: flat_tolerance as f32,
                    flat_min_level: 10f64.powf(flat_min_level / 20.0) as f32,
                    ..ClipSettings::default()
                },
                tone: ToneSettings {
                    band_low_hz: band_low,
                    band_high_hz: band_high,
                    max_order: max_order as usize,
                    fundamental_hz: m.fundamental_hz,
                    ..ToneSettings::default()
                },
                merge_gap_s: secs(c.scan.merge_gap, d.scan.merge_gap),
                ..ChannelSettings::default()
            },
            tone_span_s: secs(c.scan.tone_span, d.scan.tone_span),
            every_s: c.scan.every.map(|e| e.as_secs_f64()),
        },
        json: c.scan.json.or(d.scan.json).unwrap_or(false),
    })
}
