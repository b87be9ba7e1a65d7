//! The loop under test as the sweep sees it: set the stimulus, then listen to what comes back.
//! [`CpalRig`] is the real one (an output stream and an input stream on an audio host);
//! tests drive the same sweep through a simulated loop.

use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

use crossbeam_channel::{Receiver, TryRecvError};

use super::stimulus::{Control, Player, Wave, GLIDE};
use crate::live::capture::{Capture, CaptureFault};
use crate::live::ring::{AnalysisReader, Read};

/// Why listening failed.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum RigError {
    /// Ctrl-C, SIGTERM or SIGHUP.
    #[error("interrupted")]
    Interrupted,
    /// The input device went away or failed.
    #[error("{0}")]
    Input(String),
    /// The output stream failed.
    #[error("output stream error: {0}")]
    Output(String),
    /// No frames arrived for a long while.
    #[error("the input delivered no frames for {0:?}")]
    Stalled(Duration),
}

/// A stimulus out, a return in.
pub trait Rig {
    /// Frames per second of both directions.
    fn rate(&self) -> u32;
    /// Glide to `wave` at peak amplitude `amplitude` (full scale = 1).
    fn play(&mut self, wave: Wave, amplitude: f64);
    /// Let the loop settle for `settle` (counted from when the glide has ended), discard what
    /// came back meanwhile, then return the next `frames` frames of the measured input channel
    /// in `out` (replaced).
    fn listen(
        &mut self,
        settle: Duration,
        frames: usize,
        out: &mut Vec<f32>,
    ) -> Result<(), RigError>;
    /// Glide to silence and stop the output. Safe to call more than once.
    fn stop(&mut self);
}

/// The real loop: a [`Player`] on an output device, a capture ring on an input device.
pub struct CpalRig {
    /// Stream errors of the output.
    pub output_faults: Receiver<String>,
    /// Stream errors of the input.
    pub input_faults: Receiver<CaptureFault>,
    /// The output (dropped, i.e. stopped, by [`Rig::stop`]).
    pub player: Option<Player>,
    /// The stimulus's settings.
    pub control: Arc<Control>,
    /// The input stream (kept alive here).
    pub capture: Capture,
    /// The input's ring.
    pub reader: AnalysisReader,
    /// The measured input channel (from 0).
    pub input_channel: usize,
    /// Set by the signal handler.
    pub interrupt: Arc<AtomicBool>,
    /// Frame scratch.
    pub block: Vec<f32>,
}

/// How long the input may stay silent (no frames at all) before the sweep gives up.
const STALL: Duration = Duration::from_secs(3);

impl CpalRig {
    fn check(&self) -> Result<(), RigError> {
        if self.interrupt.load(Ordering::Acquire) {
            return Err(RigError::Interrupted);
        }
        match self.output_faults.try_recv() {
            Ok(e) => return Err(RigError::Output(e)),
            Err(TryRecvError::Empty | TryRecvError::Disconnected) => {}
        }
        match self.input_faults.try_recv() {
            Ok(e) => Err(RigError::Input(e.to_string())),
            Err(TryRecvError::Empty | TryRecvError::Disconnected) => Ok(()),
        }
    }

    /// Take every frame waiting; returns frames taken.
    fn drain(&mut self) -> usize {
        let ch = self.reader.channels();
        self.block.resize(ch * 1024, 0.0);
        let mut taken = 0;
        loop {
            let avail = self.reader.available().min(1024);
            if avail == 0 {
                // A gap waiting at the read position is consumed too.
                if let Read::Gap { .. } = self.reader.read_block(&mut self.block[..ch]) {
                    continue;
                }
                return taken;
            }
            match self.reader.read_block(&mut self.block[..avail * ch]) {
                Read::Frames(n) => taken += n,
                Read::Gap { .. } => {}
                Read::Waiting => return taken,
            }
        }
    }

    /// Sleep `d` in short naps, watching for faults and interrupts.
    fn nap(&self, d: Duration) -> Result<(), RigError> {
        let end = Instant::now() + d;
        loop {
            self.check()?;
            let now = Instant::now();
            if now >= end {
                return Ok(());
            }
            std::thread::sleep((end - now).min(Duration::from_millis(10)));
        }
    }
}

/// Records taken again when a stream glitched during one, before the last is kept anyway.
const MEASURE_TRIES: usize = 4;

impl CpalRig {
    /// Xruns of both streams so far.
    fn xruns(&self) -> u64 {
        self.control.xruns() + self.reader.counters().xruns.load(Ordering::Acquire)
    }

    /// Drop what is waiting, then take the next `frames` frames of the measured channel.
    fn capture_frames(&mut self, frames: usize, out: &mut Vec<f32>) -> Result<(), RigError> {
        self.drain();
        out.clear();
        let ch = self.reader.channels();
        let chan = self.input_channel;
        let chunk = 1024;
        self.block.resize(ch * chunk, 0.0);
        let mut last_frames = Instant::now();
        while out.len() < frames {
            let want = (frames - out.len()).min(chunk);
            match self.reader.read_block(&mut self.block[..want * ch]) {
                Read::Frames(n) => {
                    out.extend(self.block[..n * ch].chunks(ch).map(|f| f[chan]));
                    last_frames = Instant::now();
                }
                // Frames were lost: what came before no longer joins what comes after.
                Read::Gap { .. } => out.clear(),
                Read::Waiting => {
                    if last_frames.elapsed() > STALL {
                        return Err(RigError::Stalled(STALL));
                    }
                    self.nap(Duration::from_millis(2))?;
                }
            }
        }
        Ok(())
    }
}

impl Rig for CpalRig {
    fn rate(&self) -> u32 {
        self.capture.info().sample_rate
    }

    fn play(&mut self, wave: Wave, amplitude: f64) {
        self.control.set_wave(wave);
        self.control.set_amplitude(amplitude);
    }

    fn listen(
        &mut self,
        settle: Duration,
        frames: usize,
        out: &mut Vec<f32>,
    ) -> Result<(), RigError> {
        // The glide runs in the callback: wait until it has got there (or GLIDE and a margin
        // have passed, should the output have stalled).
        let glide_end = Instant::now() + GLIDE * 4;
        while self.control.amplitude_now() != self.control.amplitude_target()
            && Instant::now() < glide_end
        {
            self.nap(Duration::from_millis(5))?;
        }
        self.nap(settle)?;
        for attempt in 1..=MEASURE_TRIES {
            let xruns = self.xruns();
            self.capture_frames(frames, out)?;
            // A glitch in either stream during the record: take it again.
            if self.xruns() == xruns || attempt == MEASURE_TRIES {
                break;
            }
        }
        Ok(())
    }

    fn stop(&mut self) {
        if let Some(player) = self.player.take() {
            self.control.set_amplitude(0.0);
            let end = Instant::now() + GLIDE * 4;
            while self.control.amplitude_now() != 0.0 && Instant::now() < end {
                std::thread::sleep(Duration::from_millis(5));
            }
            // One more buffer's worth so the last glided samples reach the device.
            std::thread::sleep(Duration::from_millis(20));
            player.pause();
            drop(player);
        }
    }
}

impl Drop for CpalRig {
    fn drop(&mut self) {
        self.stop();
    }
}
