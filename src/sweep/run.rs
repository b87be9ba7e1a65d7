//! The sweep itself: check the loop at the lowest drive, then step, settle and measure, and stop
//! the output whatever happens. Works on any [`Rig`].

use std::collections::BTreeMap;
use std::time::{Duration, Instant};

use super::report::SweepStep;
use super::rig::{Rig, RigError};
use super::stimulus::Wave;
use crate::analysis::{ChannelAnalyzer, ChannelSettings};
use crate::dsp::imd::{ImdMethod, ImdSettings};
use crate::dsp::tone::{ToneAnalyzer, ToneSettings};

/// Highest harmonic order a step reports in `harmonics_dbc`.
pub const STEP_MAX_ORDER: usize = 10;

/// The stimulus family.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Stimulus {
    /// One sine at the step's frequency.
    Sine,
    /// An intermodulation pair (SMPTE 60 Hz + 7 kHz 4:1, or twin 19 + 20 kHz 1:1); steps carry
    /// IMD instead of THD.
    Pair {
        /// Which measurement.
        method: ImdMethod,
        /// Lower tone (Hz).
        f1: f64,
        /// Higher tone (Hz).
        f2: f64,
        /// `A1 / A2`.
        ratio: f64,
    },
}

/// What to play and how to measure it.
#[derive(Debug, Clone, PartialEq)]
pub struct SweepPlan {
    /// The stimulus family.
    pub stimulus: Stimulus,
    /// (drive dBFS, frequency Hz) of every step, in the order played; drives never fall.
    pub steps: Vec<(f64, f64)>,
    /// Settling time after each change, once the glide has ended.
    pub settle: Duration,
    /// Length of each measurement (at least 40 cycles of the lowest tone are taken).
    pub measure: Duration,
    /// How long the loop check waits for the return.
    pub wait_return: Duration,
    /// Tone analysis (the fundamental is set per step).
    pub tone: ToneSettings,
    /// The measured input channel (from 1), for messages.
    pub input_channel: usize,
    /// The onset threshold (%), for refining.
    pub onset_pct: f64,
    /// Extra steps played, once the sweep is done, evenly between the two steps around the
    /// onset (0: none). Their drive never exceeds what was already played.
    pub refine: usize,
}

/// Why a sweep stopped early. The output is stopped in every case.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum SweepError {
    /// Nothing came back during the loop check.
    #[error(
        "no signal returns on input {channel}: check the loop (played {drive_dbfs:.1} dBFS at \
         {freq_hz} Hz for {waited_s:.1} s; the output is stopped)"
    )]
    NoReturn {
        /// The input channel (from 1).
        channel: usize,
        /// The drive of the check (dBFS).
        drive_dbfs: f64,
        /// Its frequency (Hz).
        freq_hz: f64,
        /// How long it waited (s).
        waited_s: f64,
    },
    /// The return vanished during the sweep: the drive is not raised further.
    #[error(
        "the return on input {channel} vanished at {drive_dbfs:.1} dBFS: check the loop \
         (the drive was not raised further; the output is stopped)"
    )]
    ReturnLost {
        /// The input channel (from 1).
        channel: usize,
        /// The drive at which it vanished (dBFS).
        drive_dbfs: f64,
    },
    /// The devices failed, or the sweep was interrupted.
    #[error("{0} (the output is stopped)")]
    Rig(#[from] RigError),
}

/// A sweep that stopped early, with the steps measured before.
#[derive(Debug, Clone, PartialEq)]
pub struct SweepFailure {
    /// Why.
    pub error: SweepError,
    /// What was measured.
    pub steps: Vec<SweepStep>,
}

fn db(amplitude: f64) -> Option<f64> {
    (amplitude > 0.0 && amplitude.is_finite()).then(|| 20.0 * amplitude.log10())
}

/// The wave of a step.
pub(crate) fn wave_of(stimulus: Stimulus, freq: f64) -> Wave {
    match stimulus {
        Stimulus::Sine => Wave::Sine(freq),
        Stimulus::Pair { f1, f2, ratio, .. } => Wave::Pair { f1, f2, ratio },
    }
}

/// The measurer: each step's record goes through the one channel analyser every mode uses; the
/// tone analyser (FFT plans, buffers) is kept across steps.
struct Meter {
    tone: ToneAnalyzer,
    settings: ToneSettings,
    buf: Vec<f32>,
}

impl Meter {
    /// Measure `buf` as the return of a step at (drive, freq); `None` when no tone came back.
    fn step(&mut self, plan: &SweepPlan, drive: f64, freq: f64, rate: f64) -> Option<SweepStep> {
        let mut settings = ChannelSettings {
            tone: self.settings.clone(),
            ..ChannelSettings::default()
        };
        match plan.stimulus {
            Stimulus::Sine => settings.tone.fundamental_hz = Some(freq),
            Stimulus::Pair { method, f1, f2, .. } => {
                settings.imd = Some(ImdSettings {
                    tones_hz: Some((f1, f2)),
                    ..ImdSettings::with_method(method)
                });
            }
        }
        let x = &self.buf;
        let mut analyzer = ChannelAnalyzer::new(plan.input_channel, rate.round() as u32, settings)
            .keep_span(0..x.len() as u64);
        analyzer.process(x, &mut |_| {});
        analyzer.close(&mut |_| {});
        let report = analyzer.report(&mut self.tone);
        let mut step = SweepStep {
            drive_dbfs: drive,
            frequency_hz: freq,
            return_dbfs: None,
            return_hz: None,
            return_peak_dbfs: report.level.sample_peak_dbfs,
            thd_pct: None,
            thd_n_db: None,
            odd_even_db: None,
            falloff_db_per_octave: None,
            harmonics_dbc: BTreeMap::new(),
            imd_pct: None,
            imd_db: None,
            refined: false,
        };
        match plan.stimulus {
            Stimulus::Sine => {
                let t = report.distortion?;
                step.return_dbfs = t.fundamental_dbfs;
                step.return_hz = Some(t.fundamental_hz);
                step.thd_pct = t.thd_pct;
                step.thd_n_db = t.thd_n_db;
                step.odd_even_db = t.odd_even_db;
                step.falloff_db_per_octave = t.falloff_db_per_octave;
                step.harmonics_dbc = t
                    .harmonics
                    .iter()
                    .filter(|h| h.order <= STEP_MAX_ORDER)
                    .map(|h| (h.order as u32, h.level_dbc))
                    .collect();
            }
            Stimulus::Pair { .. } => {
                let r = report.imd?;
                let amplitude = |db: Option<f64>| db.map_or(0.0, |d| 10f64.powf(d / 20.0));
                step.return_dbfs = db(amplitude(r.f1_dbfs) + amplitude(r.f2_dbfs));
                step.return_hz = Some(r.f1_hz);
                step.imd_pct = Some(r.imd_pct);
                step.imd_db = r.imd_db;
            }
        }
        Some(step)
    }
}

impl Meter {
    /// Play a step at (drive, freq), let it settle and measure its return; a step that returns
    /// no tone ends the sweep there.
    fn play_and_measure(
        &mut self,
        plan: &SweepPlan,
        rig: &mut dyn Rig,
        drive: f64,
        freq: f64,
        rate: f64,
    ) -> Result<SweepStep, SweepError> {
        rig.play(wave_of(plan.stimulus, freq), amplitude(drive));
        rig.listen(plan.settle, frames_for(plan, freq, rate), &mut self.buf)?;
        self.step(plan, drive, freq, rate)
            .ok_or(SweepError::ReturnLost {
                channel: plan.input_channel,
                drive_dbfs: drive,
            })
    }
}

/// Frames to measure at `freq`: the plan's length, and at least 40 cycles of the lowest tone and
/// 4096 frames.
fn frames_for(plan: &SweepPlan, freq: f64, rate: f64) -> usize {
    let lowest = match plan.stimulus {
        Stimulus::Sine => freq,
        Stimulus::Pair { f1, f2, .. } => f1.min(f2),
    };
    let want = (plan.measure.as_secs_f64() * rate).max(40.0 * rate / lowest);
    (want.ceil() as usize).max(4096)
}

/// Run `plan` on `rig`: `on_step` sees each step as it is measured. The output is stopped
/// before this returns, in every case.
pub fn run(
    plan: &SweepPlan,
    rig: &mut dyn Rig,
    on_step: &mut dyn FnMut(&SweepStep),
) -> Result<Vec<SweepStep>, SweepFailure> {
    let mut steps = Vec::with_capacity(plan.steps.len());
    let result = run_steps(plan, rig, on_step, &mut steps);
    rig.stop();
    match result {
        Ok(()) => Ok(steps),
        Err(error) => Err(SweepFailure { error, steps }),
    }
}

fn run_steps(
    plan: &SweepPlan,
    rig: &mut dyn Rig,
    on_step: &mut dyn FnMut(&SweepStep),
    steps: &mut Vec<SweepStep>,
) -> Result<(), SweepError> {
    let Some(&(first_drive, first_freq)) = plan.steps.first() else {
        return Ok(());
    };
    let rate = f64::from(rig.rate());
    let mut meter = Meter {
        tone: ToneAnalyzer::new(),
        settings: plan.tone.clone(),
        buf: Vec::new(),
    };
    // The loop check: the lowest drive, until a tone comes back or the wait is over.
    rig.play(wave_of(plan.stimulus, first_freq), amplitude(first_drive));
    let started = Instant::now();
    let frames = frames_for(plan, first_freq, rate);
    loop {
        rig.listen(plan.settle, frames, &mut meter.buf)?;
        if meter.step(plan, first_drive, first_freq, rate).is_some() {
            break;
        }
        if started.elapsed() >= plan.wait_return {
            return Err(SweepError::NoReturn {
                channel: plan.input_channel,
                drive_dbfs: first_drive,
                freq_hz: first_freq,
                waited_s: started.elapsed().as_secs_f64(),
            });
        }
    }
    for &(drive, freq) in &plan.steps {
        let step = meter.play_and_measure(plan, rig, drive, freq, rate)?;
        on_step(&step);
        steps.push(step);
    }
    if plan.refine > 0 {
        if let Some((lo, hi)) = super::onset::bracket(steps, plan.onset_pct) {
            let freq = steps
                .iter()
                .find(|s| s.drive_dbfs == lo)
                .map_or(first_freq, |s| s.frequency_hz);
            for k in 1..=plan.refine {
                let drive = lo + (hi - lo) * k as f64 / (plan.refine + 1) as f64;
                let mut step = meter.play_and_measure(plan, rig, drive, freq, rate)?;
                step.refined = true;
                on_step(&step);
                steps.push(step);
            }
            steps.sort_by(|a, b| a.drive_dbfs.total_cmp(&b.drive_dbfs));
        }
    }
    Ok(())
}

/// Peak amplitude of a drive in dBFS.
pub fn amplitude(drive_dbfs: f64) -> f64 {
    10f64.powf(drive_dbfs / 20.0)
}

#[cfg(test)]
pub(crate) mod tests {
    use super::super::stimulus::{Control, Generator};
    use super::*;

    /// A loop in software: the real generator, a transfer curve, optional noise-free silence.
    pub(crate) struct Simulated {
        pub control: std::sync::Arc<Control>,
        pub gen: Generator,
        pub curve: Box<dyn Fn(f64) -> f64>,
        /// Whether anything comes back at all.
        pub connected: bool,
        pub stopped: bool,
        pub listens: usize,
        pub fail_after: Option<(usize, RigError)>,
        scratch: Vec<f32>,
    }

    impl Simulated {
        pub(crate) fn new(curve: Box<dyn Fn(f64) -> f64>) -> Simulated {
            Simulated {
                control: Control::new(Wave::Sine(1000.0)),
                gen: Generator::new(48_000),
                curve,
                connected: true,
                stopped: false,
                listens: 0,
                fail_after: None,
                scratch: Vec::new(),
            }
        }
    }

    impl Rig for Simulated {
        fn rate(&self) -> u32 {
            48_000
        }

        fn play(&mut self, wave: Wave, amplitude: f64) {
            assert!(!self.stopped, "played after stop");
            self.control.set_wave(wave);
            self.control.set_amplitude(amplitude);
        }

        fn listen(
            &mut self,
            settle: Duration,
            frames: usize,
            out: &mut Vec<f32>,
        ) -> Result<(), RigError> {
            self.listens += 1;
            if let Some((n, e)) = &self.fail_after {
                if self.listens > *n {
                    return Err(e.clone());
                }
            }
            let settle_frames = (settle.as_secs_f64() * 48_000.0) as usize + 4800;
            self.scratch.resize(settle_frames, 0.0);
            self.gen.fill(&self.control, &mut self.scratch, 1, 0);
            self.scratch.resize(frames, 0.0);
            self.gen.fill(&self.control, &mut self.scratch, 1, 0);
            out.clear();
            out.extend(self.scratch.iter().map(|&v| {
                if self.connected {
                    (self.curve)(f64::from(v)) as f32
                } else {
                    0.0
                }
            }));
            Ok(())
        }

        fn stop(&mut self) {
            self.control.set_amplitude(0.0);
            self.stopped = true;
        }
    }

    pub(crate) fn plan(drives: &[f64], freq: f64) -> SweepPlan {
        SweepPlan {
            stimulus: Stimulus::Sine,
            steps: drives.iter().map(|&d| (d, freq)).collect(),
            settle: Duration::from_millis(50),
            measure: Duration::from_millis(250),
            wait_return: Duration::ZERO,
            tone: ToneSettings::default(),
            input_channel: 1,
            onset_pct: 1.0,
            refine: 0,
        }
    }

    #[test]
    fn a_clean_loop_returns_every_step_with_its_gain() {
        let mut rig = Simulated::new(Box::new(|x| 0.5 * x));
        let drives = [-40.0, -30.0, -20.0];
        let mut seen = 0;
        let steps = run(&plan(&drives, 997.0), &mut rig, &mut |_| seen += 1).expect("runs");
        assert_eq!(seen, 3);
        assert!(rig.stopped);
        for (s, d) in steps.iter().zip(drives) {
            // Gain 0.5 is −6.02 dB (20·log10 0.5).
            let r = s.return_dbfs.expect("return");
            assert!((r - (d - 6.0206)).abs() < 0.01, "{s:?}");
            assert!((s.return_hz.expect("hz") - 997.0).abs() < 0.01);
            // f32 samples of a linear loop: THD far below −100 dB.
            assert!(s.thd_pct.expect("thd") < 1e-3, "{s:?}");
            assert_eq!(
                s.harmonics_dbc.keys().copied().collect::<Vec<_>>(),
                (2..=10).collect::<Vec<u32>>()
            );
        }
    }

    #[test]
    fn no_return_is_an_error_and_the_output_stops() {
        let mut rig = Simulated::new(Box::new(|x| x));
        rig.connected = false;
        let mut p = plan(&[-40.0, -30.0], 997.0);
        p.wait_return = Duration::from_millis(1);
        let err = run(&p, &mut rig, &mut |_| {}).expect_err("fails");
        assert!(
            matches!(err.error, SweepError::NoReturn { channel: 1, .. }),
            "{err:?}"
        );
        assert!(err.steps.is_empty());
        assert!(rig.stopped, "the output is stopped");
        assert_eq!(rig.control.amplitude_target(), 0.0);
        let msg = err.error.to_string();
        assert!(
            msg.starts_with("no signal returns on input 1: check the loop"),
            "{msg}"
        );
    }

    #[test]
    fn a_failing_device_stops_the_sweep_and_keeps_what_was_measured() {
        let mut rig = Simulated::new(Box::new(|x| x));
        // Listen 1 is the loop check, 2 and 3 the first two steps.
        rig.fail_after = Some((3, RigError::Interrupted));
        let err = run(
            &plan(&[-40.0, -35.0, -30.0, -25.0], 997.0),
            &mut rig,
            &mut |_| {},
        )
        .expect_err("fails");
        assert_eq!(err.error, SweepError::Rig(RigError::Interrupted));
        assert_eq!(err.steps.len(), 2);
        assert!(rig.stopped);
    }

    #[test]
    fn refining_steps_land_between_the_steps_around_the_onset() {
        let mut rig = Simulated::new(Box::new(|x| x.clamp(-0.25, 0.25)));
        let mut p = plan(&[-14.0, -13.0, -12.0, -11.0, -10.0], 997.0);
        p.refine = 4;
        let mut order = Vec::new();
        let steps = run(&p, &mut rig, &mut |s| order.push(s.drive_dbfs)).expect("runs");
        // THD of a clip at −12.04 dBFS crosses 1 % between −12 and −11 dBFS (closed form in
        // tests/integration/servers.rs): refined at −11.8, −11.6, −11.4, −11.2, played last.
        assert_eq!(order.len(), 9);
        for (got, want) in order[5..].iter().zip([-11.8, -11.6, -11.4, -11.2]) {
            assert!((got - want).abs() < 1e-9, "{order:?}");
        }
        assert!(steps.windows(2).all(|w| w[0].drive_dbfs <= w[1].drive_dbfs));
        assert_eq!(steps.iter().filter(|s| s.refined).count(), 4);
        assert!(
            order.iter().all(|&d| d <= -10.0),
            "never above the top drive"
        );
    }

    #[test]
    fn a_pair_stimulus_measures_imd_per_step() {
        // A square-law term y = x + 0.1·x² makes the 2nd-order products of the SMPTE pair:
        // sidebands f2 ± f1 of amplitude 0.1·A1·A2 each (product-to-sum identity), so
        // IMD = √2·0.1·A1·A2/A2 = √2·0.1·A1.
        let mut rig = Simulated::new(Box::new(|x| x + 0.1 * x * x));
        let mut p = plan(&[-20.0], 60.0);
        p.stimulus = Stimulus::Pair {
            method: ImdMethod::Smpte,
            f1: 60.0,
            f2: 7000.0,
            ratio: 4.0,
        };
        let steps = run(&p, &mut rig, &mut |_| {}).expect("runs");
        let a1 = amplitude(-20.0) * 0.8;
        let want = 100.0 * 2f64.sqrt() * 0.1 * a1;
        let got = steps[0].imd_pct.expect("imd");
        assert!((got / want - 1.0).abs() < 0.02, "{got} vs {want}");
        assert!(steps[0].thd_pct.is_none());
    }
}
