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
        mut writer: CaptureWriter,
        stop: Arc<AtomicBool>,
        done: Arc<AtomicBool>,
    ) -> std::io::Result<JoinHandle<Result<(), WavError>>> {
        std::thread::Builder::new()
            .name("brink-file-source".into())
            .spawn(move || {
                let result = self.play(&mut writer, &stop);
                done.store(true, Ordering::Release);
                result
            })
    }

    fn play(&self, writer: &mut CaptureWriter, stop: &AtomicBool) -> Result<(), WavError> {
        let rate = self.info.sample_rate as f64;
        // 10 ms per write, like a typical callback.
        let block = ((rate / 100.0).round() as usize).max(1);
        let mut buf = Vec::with_capacity(block * self.info.channels);
        let started = Instant::now();
        let mut played: u64 = 0;
        loop {
            let mut src = WavSource::open(&self.path)?;
            loop {
                if stop.load(Ordering::Relaxed) {
                    return Ok(());
                }
                let got = src.read_frames(&mut buf, block)?;
                if got == 0 {
                    break;
                }
                if self.pace == Pace::RealTime {
                    let due = started + Duration::from_secs_f64(played as f64 / rate);
                    let now = Instant::now();
                    if due > now {
                        std::thread::sleep(due - now);
                    }
                }
                writer.write(&buf);
                played += got as u64;
            }
            if !self.looping {
                return Ok(());
            }
        }
    }
}
