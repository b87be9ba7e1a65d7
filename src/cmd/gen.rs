//! `brink gen`: its arguments, the recipe help shown under `brink gen --help`, and the run that
//! writes the WAV file and prints one summary line per channel. The synthesis is in [`crate::gen`].

use std::io::Write;
use std::path::PathBuf;
use std::time::Duration;

use crate::gen::{write_file, GenError, SampleFormat, Signal};
use crate::parse::parse_duration;

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

impl GenArgs {
    /// What to render.
    pub fn signal(&self) -> Signal {
        Signal {
            recipes: self.recipes.clone(),
            rate: self.rate,
            length: self.length,
            seed: self.seed,
        }
    }
}

/// `brink gen`: render every recipe, write the WAV file, print one summary line per channel.
pub fn run(args: &GenArgs, out: &mut dyn Write) -> Result<(), GenError> {
    write_file(&args.signal(), &args.out, args.bits, args.dither, out)
}

#[cfg(test)]
mod tests {
    use std::path::PathBuf;
    use std::time::Duration;

    use clap::Parser;

    use super::*;
    use crate::gen::{recipe, SampleFormat};

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
