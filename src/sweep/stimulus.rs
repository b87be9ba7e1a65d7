//! The stimulus: a sine (or a tone pair for intermodulation) whose level glides to each new
//! target, so a change of drive never clicks; and the cpal output stream that plays it.
//!
//! The generator is plain arithmetic ([`Generator`]); the stream's data callback calls it and
//! nothing else (no allocation, no lock, no print). The sweep talks to the callback through
//! atomics only ([`Control`]).

use std::f64::consts::TAU;
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::Arc;
use std::time::Duration;

use cpal::traits::{DeviceTrait, StreamTrait};
use cpal::{FromSample, SampleFormat, SizedSample};
use crossbeam_channel::Sender;

/// Time a level change takes (a linear glide of the amplitude): long enough that a step of
/// drive adds no click (a 1 dB step over 50 ms moves the amplitude by 0.02 % per millisecond),
/// short against the settling time. Common practice for click-free gain changes.
pub const GLIDE: Duration = Duration::from_millis(50);

/// What to play.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Wave {
    /// A sine of this frequency (Hz).
    Sine(f64),
    /// Two sines `A1·sin(ω1 t) + A2·sin(ω2 t)` with `A1:A2 = ratio:1` and `A1 + A2` the peak:
    /// the SMPTE RP120 pair (60 Hz + 7 kHz, 4:1) or the twin tone (19 + 20 kHz, 1:1).
    Pair {
        /// Lower tone (Hz).
        f1: f64,
        /// Higher tone (Hz).
        f2: f64,
        /// `A1 / A2`.
        ratio: f64,
    },
}

impl Wave {
    /// The shares of the peak amplitude each tone gets (they add to 1).
    fn shares(self) -> (f64, f64) {
        match self {
            Wave::Sine(_) => (1.0, 0.0),
            Wave::Pair { ratio, .. } => (ratio / (ratio + 1.0), 1.0 / (ratio + 1.0)),
        }
    }

    fn freqs(self) -> (f64, f64) {
        match self {
            Wave::Sine(f) => (f, 0.0),
            Wave::Pair { f1, f2, .. } => (f1, f2),
        }
    }
}

/// The settings the player follows, shared between the sweep and the audio callback.
#[derive(Debug)]
pub struct Control {
    /// Target peak amplitude (f64 bits; full scale = 1).
    target: AtomicU64,
    /// First and second frequency (f64 bits, Hz).
    f1: AtomicU64,
    f2: AtomicU64,
    /// Share of the peak the first tone gets (f64 bits).
    share1: AtomicU64,
    /// Peak amplitude now (f64 bits), as the glide has got.
    now: AtomicU64,
    /// Frames played.
    frames: AtomicU64,
    /// Xruns the output stream reported (a glitch in the stimulus, not an end).
    xruns: AtomicU64,
}

impl Control {
    /// Silence, at `wave`.
    pub fn new(wave: Wave) -> Arc<Control> {
        let c = Control {
            target: AtomicU64::new(0f64.to_bits()),
            f1: AtomicU64::new(0),
            f2: AtomicU64::new(0),
            share1: AtomicU64::new(0),
            now: AtomicU64::new(0f64.to_bits()),
            frames: AtomicU64::new(0),
            xruns: AtomicU64::new(0),
        };
        c.set_wave(wave);
        Arc::new(c)
    }

    /// Glide to peak amplitude `amplitude` (full scale = 1).
    pub fn set_amplitude(&self, amplitude: f64) {
        self.target.store(amplitude.to_bits(), Ordering::Release);
    }

    /// Play `wave` from now on, phase-continuous (a frequency change makes no jump).
    pub fn set_wave(&self, wave: Wave) {
        let (f1, f2) = wave.freqs();
        let (s1, _) = wave.shares();
        self.f1.store(f1.to_bits(), Ordering::Release);
        self.f2.store(f2.to_bits(), Ordering::Release);
        self.share1.store(s1.to_bits(), Ordering::Release);
    }

    /// The peak amplitude being played now.
    pub fn amplitude_now(&self) -> f64 {
        f64::from_bits(self.now.load(Ordering::Acquire))
    }

    /// The target peak amplitude.
    pub fn amplitude_target(&self) -> f64 {
        f64::from_bits(self.target.load(Ordering::Acquire))
    }

    /// Frames played so far.
    pub fn frames(&self) -> u64 {
        self.frames.load(Ordering::Acquire)
    }

    /// Xruns the output reported so far.
    pub fn xruns(&self) -> u64 {
        self.xruns.load(Ordering::Acquire)
    }
}

/// The sample generator run by the callback: phase accumulators in f64 (a sine's own
/// distortion stays below −140 dB), an amplitude glide, and the settings read once per buffer.
#[derive(Debug, Clone)]
pub struct Generator {
    rate: f64,
    phase1: f64,
    phase2: f64,
    amplitude: f64,
    target: f64,
    /// Amplitude change per sample while gliding.
    delta: f64,
    glide_samples: f64,
}

impl Generator {
    /// A silent generator at `rate` Hz.
    pub fn new(rate: u32) -> Generator {
        let rate = f64::from(rate);
        Generator {
            rate,
            phase1: 0.0,
            phase2: 0.0,
            amplitude: 0.0,
            target: 0.0,
            delta: 0.0,
            glide_samples: (GLIDE.as_secs_f64() * rate).max(1.0),
        }
    }

    /// Fill `out` (interleaved, `channels` per frame) with the stimulus on channel `channel`
    /// (from 0) and silence on the others, following `control`.
    pub fn fill<T: SizedSample + FromSample<f32>>(
        &mut self,
        control: &Control,
        out: &mut [T],
        channels: usize,
        channel: usize,
    ) {
        let target = f64::from_bits(control.target.load(Ordering::Acquire));
        if target != self.target {
            self.target = target;
            self.delta = (target - self.amplitude) / self.glide_samples;
        }
        let f1 = f64::from_bits(control.f1.load(Ordering::Acquire));
        let f2 = f64::from_bits(control.f2.load(Ordering::Acquire));
        let s1 = f64::from_bits(control.share1.load(Ordering::Acquire));
        let (inc1, inc2) = (f1 / self.rate, f2 / self.rate);
        let channels = channels.max(1);
        let mut frames = 0u64;
        for frame in out.chunks_mut(channels) {
            let v = self.next(inc1, inc2, s1);
            for (c, s) in frame.iter_mut().enumerate() {
                *s = if c == channel {
                    T::from_sample(v as f32)
                } else {
                    T::EQUILIBRIUM
                };
            }
            frames += 1;
        }
        control
            .now
            .store(self.amplitude.to_bits(), Ordering::Release);
        control.frames.fetch_add(frames, Ordering::AcqRel);
    }

    /// One sample: phases in cycles (wrapped to [0, 1)), amplitude one glide step nearer.
    fn next(&mut self, inc1: f64, inc2: f64, share1: f64) -> f64 {
        if self.amplitude != self.target {
            let next = self.amplitude + self.delta;
            let passed = (self.delta > 0.0 && next >= self.target)
                || (self.delta < 0.0 && next <= self.target)
                || self.delta == 0.0;
            self.amplitude = if passed { self.target } else { next };
        }
        let v = self.amplitude
            * (share1 * (TAU * self.phase1).sin() + (1.0 - share1) * (TAU * self.phase2).sin());
        self.phase1 = (self.phase1 + inc1).fract();
        self.phase2 = (self.phase2 + inc2).fract();
        v
    }
}

/// An output stream playing the stimulus. Dropping it stops the stream.
pub struct Player {
    stream: cpal::Stream,
    /// Frames per second.
    pub rate: u32,
    /// Channels per frame.
    pub channels: usize,
    /// The device's name.
    pub device: String,
}

impl std::fmt::Debug for Player {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Player")
            .field("rate", &self.rate)
            .field("channels", &self.channels)
            .field("device", &self.device)
            .finish()
    }
}

/// Why the output could not be opened or run.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum OutputError {
    /// The device offers nothing usable at the rate.
    #[error("'{device}' cannot play at {rate} Hz: {reason}")]
    Config {
        /// The device's name.
        device: String,
        /// The rate wanted.
        rate: u32,
        /// What it offers, or what went wrong.
        reason: String,
    },
    /// The channel is not on the device.
    #[error("output channel {channel} is not on '{device}' (it has {channels})")]
    Channel {
        /// The device's name.
        device: String,
        /// The channel asked for (from 1).
        channel: usize,
        /// Channels the device offers.
        channels: usize,
    },
    /// cpal refused to build or start the stream.
    #[error("cannot open '{device}' for output: {reason}")]
    Open {
        /// The device's name.
        device: String,
        /// What cpal said.
        reason: String,
    },
}

impl Player {
    /// Open `device` at `rate` (its preferred channel count, f32 first, else the widest integer
    /// format) playing `control`'s stimulus on `channel` (from 1), silent until told otherwise.
    /// Stream errors go to `faults` (with `try_send`). The stream is started.
    pub fn open(
        device: &cpal::Device,
        rate: u32,
        channel: usize,
        control: Arc<Control>,
        faults: Sender<String>,
    ) -> Result<Player, OutputError> {
        let name = crate::live::capture::device_name(device);
        let config_err = |reason: String| OutputError::Config {
            device: name.clone(),
            rate,
            reason,
        };
        let ranges: Vec<cpal::SupportedStreamConfigRange> = device
            .supported_output_configs()
            .map_err(|e| config_err(e.to_string()))?
            .filter(|r| r.channels() > 0)
            .collect();
        let preferred = device.default_output_config().ok().map(|c| c.channels());
        let rank = |f: SampleFormat| match f {
            SampleFormat::F32 => Some(0),
            SampleFormat::I32 => Some(1),
            SampleFormat::I16 => Some(2),
            _ => None,
        };
        let at_rate: Vec<&cpal::SupportedStreamConfigRange> = ranges
            .iter()
            .filter(|r| r.contains_rate(rate) && rank(r.sample_format()).is_some())
            .collect();
        let best = at_rate.iter().min_by_key(|r| {
            (
                Some(r.channels()) != preferred,
                rank(r.sample_format()),
                std::cmp::Reverse(r.channels()),
            )
        });
        let Some(range) = best else {
            let offered: Vec<String> = ranges
                .iter()
                .map(|r| {
                    format!(
                        "{} ch {}..{} Hz {}",
                        r.channels(),
                        r.min_sample_rate(),
                        r.max_sample_rate(),
                        r.sample_format()
                    )
                })
                .collect();
            return Err(config_err(if offered.is_empty() {
                "it has no output".to_string()
            } else {
                format!("it offers {}", offered.join(", "))
            }));
        };
        let channels = usize::from(range.channels());
        if channel == 0 || channel > channels {
            return Err(OutputError::Channel {
                device: name,
                channel,
                channels,
            });
        }
        let config = cpal::StreamConfig {
            channels: range.channels(),
            sample_rate: rate,
            buffer_size: cpal::BufferSize::Default,
        };
        let built = match range.sample_format() {
            SampleFormat::F32 => build::<f32>(device, config, channel - 1, control, faults),
            SampleFormat::I32 => build::<i32>(device, config, channel - 1, control, faults),
            _ => build::<i16>(device, config, channel - 1, control, faults),
        };
        let open_err = |e: String| OutputError::Open {
            device: name.clone(),
            reason: e,
        };
        let stream = built.map_err(|e| open_err(e.to_string()))?;
        stream.play().map_err(|e| open_err(e.to_string()))?;
        Ok(Player {
            stream,
            rate,
            channels,
            device: name,
        })
    }

    /// Stop the stream now (it is also stopped when dropped).
    pub fn pause(&self) {
        let _ = self.stream.pause();
    }
}

fn build<T: SizedSample + FromSample<f32>>(
    device: &cpal::Device,
    config: cpal::StreamConfig,
    channel: usize,
    control: Arc<Control>,
    faults: Sender<String>,
) -> Result<cpal::Stream, cpal::Error> {
    let channels = usize::from(config.channels);
    let mut gen = Generator::new(config.sample_rate);
    let failed = AtomicBool::new(false);
    let on_error = Arc::clone(&control);
    device.build_output_stream(
        config,
        move |out: &mut [T], _: &cpal::OutputCallbackInfo| {
            gen.fill(&control, out, channels, channel);
        },
        move |e: cpal::Error| {
            if e.kind() == cpal::ErrorKind::Xrun {
                // A glitch: the sweep measures that step again.
                on_error.xruns.fetch_add(1, Ordering::AcqRel);
            } else if !failed.swap(true, Ordering::AcqRel) {
                // Any other error stops the sweep (the first is reported).
                let _ = faults.try_send(e.to_string());
            }
        },
        Some(Duration::from_secs(2)),
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    fn play(gen: &mut Generator, control: &Control, frames: usize) -> Vec<f32> {
        let mut out = vec![0f32; frames * 2];
        gen.fill(control, &mut out, 2, 1);
        out
    }

    #[test]
    fn the_sine_lands_on_its_channel_with_the_target_amplitude_after_the_glide() {
        let control = Control::new(Wave::Sine(1000.0));
        let mut gen = Generator::new(48_000);
        control.set_amplitude(0.5);
        // 50 ms glide = 2400 samples (a few more for rounding); then 100 whole cycles of 1 kHz.
        let _ = play(&mut gen, &control, 2410);
        assert_eq!(control.amplitude_now(), 0.5);
        let out = play(&mut gen, &control, 4800);
        assert!(out.chunks(2).all(|f| f[0] == 0.0), "channel 1 stays silent");
        let right: Vec<f64> = out.chunks(2).map(|f| f64::from(f[1])).collect();
        let peak = right.iter().fold(0f64, |m, v| m.max(v.abs()));
        // Peak of a 1 kHz sine sampled at 48 kHz: every 12th sample is a crest (exact).
        assert!((peak - 0.5).abs() < 1e-6, "peak {peak}");
        let rms = (right.iter().map(|v| v * v).sum::<f64>() / right.len() as f64).sqrt();
        // RMS of a sine = peak/√2 (textbook identity).
        assert!((rms - 0.5 / 2f64.sqrt()).abs() < 1e-6, "rms {rms}");
        assert_eq!(control.frames(), 7210);
    }

    #[test]
    fn a_level_change_glides_without_a_jump() {
        let control = Control::new(Wave::Sine(997.0));
        let mut gen = Generator::new(48_000);
        control.set_amplitude(0.1);
        let mut all = play(&mut gen, &control, 4800);
        control.set_amplitude(0.4);
        all.extend(play(&mut gen, &control, 4800));
        control.set_amplitude(0.0);
        all.extend(play(&mut gen, &control, 4800));
        // The largest sample-to-sample move of a sine of peak A at f is at most 2π·f/rate·A
        // (its slope bound); the glide adds at most the per-sample amplitude step.
        let bound = TAU * 997.0 / 48_000.0 * 0.4 + 0.4 / 2400.0 + 1e-6;
        let ch: Vec<f64> = all.chunks(2).map(|f| f64::from(f[1])).collect();
        let worst = ch
            .windows(2)
            .map(|w| (w[1] - w[0]).abs())
            .fold(0f64, f64::max);
        assert!(worst <= bound, "jump {worst} > {bound}");
        assert_eq!(control.amplitude_now(), 0.0);
        assert!(
            ch[ch.len() - 100..].iter().all(|&v| v == 0.0),
            "ends silent"
        );
    }

    #[test]
    fn a_pair_splits_the_peak_by_its_ratio() {
        let control = Control::new(Wave::Pair {
            f1: 60.0,
            f2: 7000.0,
            ratio: 4.0,
        });
        let mut gen = Generator::new(48_000);
        control.set_amplitude(0.5);
        let _ = play(&mut gen, &control, 2410);
        let out = play(&mut gen, &control, 48_000);
        let x: Vec<f64> = out.chunks(2).map(|f| f64::from(f[1])).collect();
        // Correlate with each tone over whole cycles of both (1 s): amplitude = 2/N·|Σ x·e^{-iωt}|.
        let amp = |f: f64| {
            let (mut re, mut im) = (0.0, 0.0);
            for (n, v) in x.iter().enumerate() {
                let p = TAU * f * n as f64 / 48_000.0;
                re += v * p.cos();
                im += v * p.sin();
            }
            2.0 * (re * re + im * im).sqrt() / x.len() as f64
        };
        // SMPTE RP120 4:1 with A1 + A2 = 0.5: A1 = 0.4, A2 = 0.1.
        assert!((amp(60.0) - 0.4).abs() < 1e-6, "{}", amp(60.0));
        assert!((amp(7000.0) - 0.1).abs() < 1e-6, "{}", amp(7000.0));
    }

    #[test]
    fn integer_outputs_get_the_same_wave() {
        let control = Control::new(Wave::Sine(1000.0));
        let mut gen = Generator::new(48_000);
        control.set_amplitude(0.5);
        let mut out = vec![0i16; 4800];
        gen.fill(&control, &mut out, 1, 0);
        let peak = out.iter().map(|v| v.unsigned_abs()).max().unwrap_or(0);
        // 0.5 of full scale in 16 bits is 16384 (cpal: f32 → i16 scales by 32768).
        assert!((i32::from(peak) - 16_384).abs() <= 1, "{peak}");
    }
}
