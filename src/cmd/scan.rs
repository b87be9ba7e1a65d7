//! `brink scan`: its arguments, what it measures (the help under `brink scan --help`), their
//! layering over the configuration files, and the run over each file.

use std::io::{self, Write};
use std::path::PathBuf;

use super::common::{configured, plan_from, ScanPlan};
use crate::config::{ConfigFile, MeasureSection, ScanSection};
use crate::parse::parse_duration;

/// What `brink scan` measures; shown under `brink scan --help`.
pub const SCAN_AFTER_HELP: &str = "\
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

/// Arguments of `brink scan`. Options left out take their value from the configuration files
/// (`--config FILE` over the user file `$XDG_CONFIG_HOME/brink/config.toml`), then from the
/// built-in defaults shown here.
#[derive(Debug, clap::Args)]
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
    #[arg(long, value_parser = parse_duration)]
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
    #[arg(long, value_parser = parse_duration)]
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
    #[arg(long, value_parser = parse_duration)]
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
        let merged = configured(self.config.as_deref())?.merge(self.as_config());
        let mut plan = plan_from(&merged)?;
        plan.settings.channel.imd = self.imd.map(crate::dsp::imd::ImdSettings::with_method);
        Ok(plan)
    }
}

/// `brink scan`: each file is measured and reported on its own; a bad file is reported on
/// `err` and the rest go on.
pub fn run<W: Write, E: Write>(args: &ScanArgs, out: &mut W, err: &mut E) -> u8 {
    let plan = match args.plan() {
        Ok(p) => p,
        Err(msg) => {
            let _ = writeln!(err, "brink scan: {msg}");
            return crate::EXIT_USAGE;
        }
    };
    let mut settings = plan.settings;
    // `--svg`: one figure per input, named after it when there are several, drawn from the
    // samples the scan read.
    settings.keep_spans = args.svg.is_some();
    let svg = args.svg.as_deref();
    let figures = match svg.map(|s| crate::plot::per_file_paths(s, &args.files)) {
        Some(Err(msg)) => {
            let _ = writeln!(err, "brink scan: {msg}");
            return crate::EXIT_USAGE;
        }
        Some(Ok(paths)) => paths,
        None => Vec::new(),
    };
    let mut code = crate::EXIT_OK;
    for (i, path) in args.files.iter().enumerate() {
        let written = match crate::scan::scan_file_keeping_spans(path, &settings) {
            Ok((report, spans)) => {
                let r = if plan.json {
                    crate::sink::json::write_line(out, &report)
                } else {
                    crate::sink::text::write_scan(out, &report)
                };
                if let Some(fig) = figures.get(i) {
                    let channel = args.channel.map(usize::from);
                    if let Err(e) =
                        crate::plot::scan_spectrum_svg(path, &report, &spans, channel, fig)
                    {
                        let _ = writeln!(err, "brink scan: {}: {e}", path.display());
                        code = crate::EXIT_FILE_ERROR;
                    }
                }
                r.and_then(|()| out.flush())
            }
            Err(e) => {
                let _ = writeln!(err, "brink scan: {}: {e}", path.display());
                code = crate::EXIT_FILE_ERROR;
                Ok(())
            }
        };
        match written {
            Ok(()) => {}
            // The reader went away (`| head`): stop quietly.
            Err(e) if e.kind() == io::ErrorKind::BrokenPipe => return code,
            Err(e) => {
                let _ = writeln!(err, "brink scan: cannot write output: {e}");
                return crate::EXIT_FILE_ERROR;
            }
        }
    }
    code
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::builtin_defaults;

    #[test]
    fn builtin_defaults_match_the_scan_command_line() {
        use clap::Parser;
        // With no options and no files, a scan runs on exactly the engine's own defaults.
        let cli = crate::cmd::Cli::try_parse_from(["brink", "scan", "a.wav"]).unwrap();
        let crate::cmd::Command::Scan(a) = cli.command else {
            panic!("not scan");
        };
        assert_eq!(a.as_config(), ConfigFile::default());
        let plan = plan_from(&builtin_defaults()).unwrap();
        assert_eq!(plan.settings, crate::scan::ScanSettings::default());
        assert!(!plan.json);
    }
}
