//! A WAV file as a live source: played into the capture ring at real speed (or unpaced, for
//! tests), optionally looping. It stands where an audio callback stands, so everything after the
//! ring is the real pipeline.

use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

use crate::source::wav::{WavError, WavInfo, WavSource};

use super::ring::CaptureWriter;

/// How fast the file plays.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Pace {
    /// Real time: one second of audio per second.
    RealTime,
    /// As fast as it can be written; frames that do not fit in the ring are dropped.
    Unpaced,
    /// As fast as the analysis takes it: each write waits for room in the ring, so nothing is
    /// dropped (a file through the live pipeline in less than its length).
    Lossless,
}

/// A file source, opened and checked, ready to play.
#[derive(Debug)]
pub struct FileSource {
    path: PathBuf,
    info: WavInfo,
    looping: bool,
    pace: Pace,
}

impl FileSource {
    /// Open `path` and read its format.
    pub fn open(path: &Path, looping: bool, pace: Pace) -> Result<Self, WavError> {
        let src = WavSource::open(path)?;
        Ok(FileSource {
            path: path.to_path_buf(),
            info: src.info().clone(),
            looping,
            pace,
        })
    }

    /// The file's format.
    pub fn info(&self) -> &WavInfo {
        &self.info
    }

    /// Play on a new thread into `writer` until the end (or forever when looping) or until
    /// `stop` is set; `done` is raised when the thread finishes, however it finishes. The
    /// thread's result is the first read error, if any.
    pub fn spawn(
        self,
        writer: CaptureWriter,
        stop: Arc<AtomicBool>,
        done: Arc<AtomicBool>,
    ) -> std::io::Result<JoinHandle<Result<(), WavError>>> {
        spawn_player("brink-file-source", writer, stop, done, move |w, s| {
            self.play(w, s)
        })
    }

    fn play(&self, writer: &mut CaptureWriter, stop: &AtomicBool) -> Result<(), WavError> {
        let mut clock = Pacer::new(self.info.sample_rate, self.pace);
        let mut buf = Vec::with_capacity(clock.block * self.info.channels);
        loop {
            let mut src = WavSource::open(&self.path)?;
            loop {
                if stop.load(Ordering::Relaxed) {
                    return Ok(());
                }
                let got = src.read_frames(&mut buf, clock.block)?;
                if got == 0 {
                    break;
                }
                clock.wait();
                if self.pace == Pace::Lossless {
                    while writer.room_frames() < got {
                        if stop.load(Ordering::Relaxed) {
                            return Ok(());
                        }
                        std::thread::sleep(Duration::from_millis(1));
                    }
                }
                writer.write(&buf);
                clock.played(got);
            }
            if !self.looping {
                return Ok(());
            }
        }
    }
}

/// Real-time pacing in 10 ms writes, like a typical callback.
struct Pacer {
    rate: f64,
    pace: Pace,
    block: usize,
    started: Instant,
    played: u64,
}

impl Pacer {
    fn new(rate: u32, pace: Pace) -> Self {
        let rate = f64::from(rate.max(1));
        Pacer {
            rate,
            pace,
            block: ((rate / 100.0).round() as usize).max(1),
            started: Instant::now(),
            played: 0,
        }
    }

    /// Sleep until the next write is due (real time only).
    fn wait(&self) {
        if self.pace == Pace::RealTime {
            let due = self.started + Duration::from_secs_f64(self.played as f64 / self.rate);
            let now = Instant::now();
            if due > now {
                std::thread::sleep(due - now);
            }
        }
    }

    fn played(&mut self, frames: usize) {
        self.played += frames as u64;
    }
}

/// Interleaved samples in memory as a live source (the demo): played at real speed, looping or
/// once, into the ring.
#[derive(Debug, Clone)]
pub struct MemorySource {
    rate: u32,
    channels: usize,
    samples: Arc<Vec<f32>>,
    looping: bool,
}

impl MemorySource {
    /// `samples` interleaved with `channels` per frame at `rate`.
    pub fn new(rate: u32, channels: usize, samples: Arc<Vec<f32>>, looping: bool) -> Self {
        MemorySource {
            rate,
            channels: channels.max(1),
            samples,
            looping,
        }
    }

    /// Play on a new thread into `writer` until the end (or forever when looping) or until
    /// `stop` is set; `done` is raised when the thread finishes.
    pub fn spawn(
        self,
        writer: CaptureWriter,
        stop: Arc<AtomicBool>,
        done: Arc<AtomicBool>,
    ) -> std::io::Result<JoinHandle<Result<(), WavError>>> {
        spawn_player("brink-memory-source", writer, stop, done, move |w, s| {
            self.play(w, s);
            Ok(())
        })
    }

    fn play(&self, writer: &mut CaptureWriter, stop: &AtomicBool) {
        let mut clock = Pacer::new(self.rate, Pace::RealTime);
        let step = clock.block * self.channels;
        loop {
            for chunk in self.samples.chunks(step) {
                if stop.load(Ordering::Relaxed) {
                    return;
                }
                clock.wait();
                writer.write(chunk);
                clock.played(chunk.len() / self.channels);
            }
            if !self.looping || self.samples.is_empty() {
                return;
            }
        }
    }
}

/// Run `play` on a new thread named `name`; `done` is raised when it returns, however it
/// returns, so the analysis knows nothing more will come.
fn spawn_player(
    name: &str,
    mut writer: CaptureWriter,
    stop: Arc<AtomicBool>,
    done: Arc<AtomicBool>,
    play: impl FnOnce(&mut CaptureWriter, &AtomicBool) -> Result<(), WavError> + Send + 'static,
) -> std::io::Result<JoinHandle<Result<(), WavError>>> {
    std::thread::Builder::new()
        .name(name.into())
        .spawn(move || {
            let result = play(&mut writer, &stop);
            done.store(true, Ordering::Release);
            result
        })
}
