//! Writing rendered channels to a WAV file (via `hound`).
//!
//! Integer formats: `code = round(x·2^(b−1) + d)`, clamped to `[−2^(b−1), 2^(b−1) − 1]`, where `d`
//! is optional TPDF dither: the sum of two independent uniform values in [−0.5, 0.5) LSB, i.e. a
//! triangular density of ±1 LSB peak (common practice; it makes the mean error of the
//! quantiser zero and its noise independent of the signal, at a cost of 4.77 dB of SNR).
//! Rounding is to the nearest code, halves away from zero. Float32 is written as is: no dither, no
//! clamping (values may exceed ±1).

use std::fmt;
use std::path::Path;
use std::str::FromStr;

use super::rng::{derive_seed, Rng};
use super::GenError;

/// Sample format of the written file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SampleFormat {
    /// 16-bit integer PCM.
    Int16,
    /// 24-bit integer PCM.
    Int24,
    /// 32-bit integer PCM.
    Int32,
    /// 32-bit IEEE float.
    Float32,
}

impl SampleFormat {
    /// Bits per sample.
    pub fn bits(self) -> u16 {
        match self {
            SampleFormat::Int16 => 16,
            SampleFormat::Int24 => 24,
            SampleFormat::Int32 | SampleFormat::Float32 => 32,
        }
    }

    /// Whether samples are floating point.
    pub fn is_float(self) -> bool {
        self == SampleFormat::Float32
    }
}

impl FromStr for SampleFormat {
    type Err = GenError;

    /// `16`, `24`, `32` or `f32`.
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s.trim() {
            "16" => Ok(SampleFormat::Int16),
            "24" => Ok(SampleFormat::Int24),
            "32" => Ok(SampleFormat::Int32),
            "f32" => Ok(SampleFormat::Float32),
            other => Err(GenError::BadFormat(other.to_string())),
        }
    }
}

impl fmt::Display for SampleFormat {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            SampleFormat::Int16 => "16",
            SampleFormat::Int24 => "24",
            SampleFormat::Int32 => "32",
            SampleFormat::Float32 => "f32",
        })
    }
}

/// How to write the file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct WriteOptions {
    /// Sample format.
    pub format: SampleFormat,
    /// Add TPDF dither before rounding (integer formats only).
    pub dither: bool,
    /// Seed for the dither (each channel gets its own stream from it).
    pub seed: u64,
}

/// What happened while writing.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct WriteStats {
    /// Frames written.
    pub frames: usize,
    /// Per channel: samples whose code fell outside the integer range and were clamped
    /// (always 0 for Float32).
    pub clamped: Vec<u64>,
}

/// Rounds (and optionally dithers) one channel to integer codes.
#[derive(Debug)]
struct Quantizer {
    scale: f64,
    lo: f64,
    hi: f64,
    dither: Option<Rng>,
    clamped: u64,
}

impl Quantizer {
    fn new(bits: u16, dither: Option<Rng>) -> Self {
        let full = f64::from(1u32 << (bits - 1));
        Self {
            scale: full,
            lo: -full,
            hi: full - 1.0,
            dither,
            clamped: 0,
        }
    }

    fn code(&mut self, x: f64) -> i32 {
        let d = match &mut self.dither {
            // Two independent uniform values in [−0.5, 0.5) LSB: triangular, ±1 LSB peak.
            Some(rng) => (rng.uniform() - 0.5) + (rng.uniform() - 0.5),
            None => 0.0,
        };
        let q = (x * self.scale + d).round();
        if q < self.lo || q > self.hi {
            self.clamped += 1;
        }
        // NaN maps to 0 in the saturating cast below.
        q.clamp(self.lo, self.hi) as i32
    }
}

/// Write `channels` (equal lengths, full scale ±1) interleaved to a WAV file at `path`.
pub fn write_wav(
    path: &Path,
    sample_rate: u32,
    channels: &[Vec<f64>],
    opts: &WriteOptions,
) -> Result<WriteStats, GenError> {
    let frames = channels.first().map_or(0, Vec::len);
    if channels.is_empty() {
        return Err(GenError::Channels("no channels to write".to_string()));
    }
    let n_ch = u16::try_from(channels.len()).map_err(|_| {
        GenError::Channels(format!(
            "{} channels is more than a WAV file can hold (65535)",
            channels.len()
        ))
    })?;
    if let Some((i, c)) = channels.iter().enumerate().find(|(_, c)| c.len() != frames) {
        return Err(GenError::Channels(format!(
            "channel {} has {} samples, channel 1 has {frames}",
            i + 1,
            c.len()
        )));
    }
    let spec = hound::WavSpec {
        channels: n_ch,
        sample_rate,
        bits_per_sample: opts.format.bits(),
        sample_format: if opts.format.is_float() {
            hound::SampleFormat::Float
        } else {
            hound::SampleFormat::Int
        },
    };
    let wav_err = |cause| GenError::Wav {
        path: path.to_path_buf(),
        cause,
    };
    let mut w = hound::WavWriter::create(path, spec).map_err(wav_err)?;
    let mut clamped = vec![0u64; channels.len()];
    if opts.format.is_float() {
        for n in 0..frames {
            for c in channels {
                w.write_sample(c[n] as f32).map_err(wav_err)?;
            }
        }
    } else {
        let mut q: Vec<Quantizer> = (0..channels.len())
            .map(|i| {
                let rng = opts
                    .dither
                    .then(|| Rng::new(derive_seed(opts.seed, i as u64)));
                Quantizer::new(opts.format.bits(), rng)
            })
            .collect();
        for n in 0..frames {
            for (c, qz) in channels.iter().zip(q.iter_mut()) {
                w.write_sample(qz.code(c[n])).map_err(wav_err)?;
            }
        }
        for (slot, qz) in clamped.iter_mut().zip(&q) {
            *slot = qz.clamped;
        }
    }
    w.finalize().map_err(wav_err)?;
    Ok(WriteStats { frames, clamped })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::gen::{parse_recipe, render};

    #[test]
    fn formats_parse_and_print() {
        for (s, f) in [
            ("16", SampleFormat::Int16),
            ("24", SampleFormat::Int24),
            ("32", SampleFormat::Int32),
            ("f32", SampleFormat::Float32),
        ] {
            assert_eq!(s.parse::<SampleFormat>().unwrap(), f);
            assert_eq!(f.to_string(), s);
        }
        assert_eq!(
            "8".parse::<SampleFormat>().unwrap_err().to_string(),
            "unknown sample format '8' (use 16, 24, 32 or f32)"
        );
    }

    #[test]
    fn tpdf_dither_is_unbiased_and_bounded() {
        // A constant 0.25 LSB at 16 bits: plain rounding always gives 0 (a 0.25 LSB error);
        // with TPDF dither the mean code is 0.25 (the dither linearises the quantiser on
        // average). The spread of the mean of 100k codes is ≈ 0.5/√100000 ≈ 0.0016 LSB.
        let x = 0.25 / 32768.0;
        let mut q = Quantizer::new(16, Some(Rng::new(11)));
        let n = 100_000;
        let mut sum = 0.0;
        for _ in 0..n {
            let c = q.code(x);
            // Dither ±1 LSB plus rounding ±0.5 LSB: the error never reaches 2 LSB.
            assert!((f64::from(c) - 0.25).abs() < 2.0, "code {c}");
            sum += f64::from(c);
        }
        let mean = sum / n as f64;
        assert!((mean - 0.25).abs() < 0.02, "mean {mean}");
        assert_eq!(q.clamped, 0);

        // Without dither: deterministic round to nearest, halves away from zero.
        let mut q = Quantizer::new(16, None);
        assert!((0..1000).all(|_| q.code(x) == 0));
        assert_eq!(q.code(0.5 / 32768.0), 1);
        assert_eq!(q.code(-0.5 / 32768.0), -1);
        assert_eq!(q.code(0.49 / 32768.0), 0);
    }

    #[test]
    fn clamping_is_counted() {
        let mut q = Quantizer::new(16, None);
        assert_eq!(q.code(1.0), 32767);
        assert_eq!(q.code(-1.0), -32768);
        assert_eq!(q.code(2.0), 32767);
        assert_eq!(q.code(-2.0), -32768);
        // 1.0 → 32768 is one code over the top; −1.0 → −32768 fits.
        assert_eq!(q.clamped, 3);
        let mut q = Quantizer::new(24, None);
        assert_eq!(q.code(-1.0), -8_388_608);
        assert_eq!(q.code(0.999), (0.999f64 * 8_388_608.0).round() as i32);
    }

    fn half_scale_crest(bits: SampleFormat) -> (tempfile::TempDir, std::path::PathBuf, WriteStats) {
        // A sine at 20·log10(0.5) = −6.0206 dBFS starting at phase 90°: its first sample is 0.5.
        let level = 20.0 * 0.5f64.log10();
        let r = parse_recipe(&format!("sine:1000@{level},phase=90")).unwrap();
        let x = render(&r, 48000, 480, 1).unwrap();
        let neg: Vec<f64> = x.iter().map(|v| -2.0 * v).collect(); // ±1.0: clamps at the top
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("t.wav");
        let opts = WriteOptions {
            format: bits,
            dither: false,
            seed: 0,
        };
        let stats = write_wav(&path, 48000, &[x, neg], &opts).unwrap();
        (dir, path, stats)
    }

    #[test]
    fn integer_files_read_back_with_expected_codes() {
        // Half scale = 2^(b−2): 16384 at 16 bits, 4194304 at 24, 2^30 at 32.
        for (fmt, half) in [
            (SampleFormat::Int16, 16384i32),
            (SampleFormat::Int24, 4_194_304),
            (SampleFormat::Int32, 1 << 30),
        ] {
            let (_dir, path, stats) = half_scale_crest(fmt);
            let mut r = hound::WavReader::open(&path).unwrap();
            let spec = r.spec();
            assert_eq!(spec.bits_per_sample, fmt.bits());
            assert_eq!(spec.sample_format, hound::SampleFormat::Int);
            assert_eq!((spec.channels, spec.sample_rate), (2, 48000));
            let s: Vec<i32> = r.samples::<i32>().map(|v| v.unwrap()).collect();
            assert_eq!(s.len(), 960);
            assert_eq!(s[0], half, "{fmt}");
            assert_eq!(s.iter().step_by(2).max(), Some(&half));
            assert_eq!(s.iter().step_by(2).min(), Some(&-half));
            // Channel 2 is −2× channel 1: −1.0 → −2^(b−1) fits, +1.0 is clamped to 2^(b−1) − 1.
            let full = 2 * i64::from(half);
            assert_eq!(i64::from(s[1]), -full);
            let top = s.iter().skip(1).step_by(2).max().map(|&v| i64::from(v));
            assert_eq!(top, Some(full - 1));
            // 1 kHz at 48 kHz for 10 ms: the crest sample at 48·k + 24 is the only clamped one
            // per period on the clamped side.
            assert_eq!(stats.clamped, [0, 10]);
            assert_eq!(stats.frames, 480);
        }
    }

    #[test]
    fn float_file_reads_back_unchanged() {
        let (_dir, path, stats) = half_scale_crest(SampleFormat::Float32);
        let mut r = hound::WavReader::open(&path).unwrap();
        assert_eq!(r.spec().sample_format, hound::SampleFormat::Float);
        assert_eq!(r.spec().bits_per_sample, 32);
        let s: Vec<f32> = r.samples::<f32>().map(|v| v.unwrap()).collect();
        assert_eq!(s[0], 0.5);
        assert_eq!(s[1], -1.0);
        // Values beyond full scale survive in float.
        assert_eq!(
            s.iter().skip(1).step_by(2).fold(0f32, |m, v| m.max(*v)),
            1.0
        );
        assert_eq!(stats.clamped, [0, 0]);
    }

    #[test]
    fn float_keeps_values_over_full_scale() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("over.wav");
        let opts = WriteOptions {
            format: SampleFormat::Float32,
            dither: true,
            seed: 3,
        };
        write_wav(&path, 48000, &[vec![1.5, -2.25, 0.1]], &opts).unwrap();
        let mut r = hound::WavReader::open(&path).unwrap();
        let s: Vec<f32> = r.samples::<f32>().map(|v| v.unwrap()).collect();
        assert_eq!(s, [1.5, -2.25, 0.1f32]);
    }

    #[test]
    fn dithered_file_is_reproducible() {
        let dir = tempfile::tempdir().unwrap();
        let x = vec![vec![0.25 / 32768.0; 1000], vec![0.0; 1000]];
        let read = |seed: u64| {
            let path = dir.path().join(format!("d{seed}.wav"));
            let opts = WriteOptions {
                format: SampleFormat::Int16,
                dither: true,
                seed,
            };
            write_wav(&path, 48000, &x, &opts).unwrap();
            let mut r = hound::WavReader::open(&path).unwrap();
            r.samples::<i32>().map(|v| v.unwrap()).collect::<Vec<_>>()
        };
        assert_eq!(read(1), read(1));
        assert_ne!(read(1), read(2));
    }

    #[test]
    fn bad_channel_sets_are_refused() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("x.wav");
        let opts = WriteOptions {
            format: SampleFormat::Int16,
            dither: false,
            seed: 0,
        };
        assert_eq!(
            write_wav(&path, 48000, &[], &opts).unwrap_err().to_string(),
            "no channels to write"
        );
        assert_eq!(
            write_wav(&path, 48000, &[vec![0.0; 3], vec![0.0; 2]], &opts)
                .unwrap_err()
                .to_string(),
            "channel 2 has 2 samples, channel 1 has 3"
        );
        let missing = dir.path().join("no/such/dir/x.wav");
        let e = write_wav(&missing, 48000, &[vec![0.0]], &opts).unwrap_err();
        assert!(e.to_string().starts_with("cannot write '"), "{e}");
    }
}
