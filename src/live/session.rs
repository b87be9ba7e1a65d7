//! A live session: a source (an input device, a WAV file, or samples in memory) feeding the
//! capture ring, the analysis thread behind it, and for a device its supervision (heartbeat,
//! "input lost", reopening with growing pauses, "input restored"). `brink log` and the dashboard
//! both run one; they differ only in what they do with the findings.

use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::Arc;
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

use crossbeam_channel::{Receiver, Sender};

use super::capture::{open_input, probe_input, Capture, CaptureFault};
use super::devices::{find_host, find_input};
use super::engine::{Engine, EngineSettings, LiveEvent};
use super::ring::{ring, AnalysisReader, CaptureWriter, Counters};
use super::run::{spawn_analysis, spawn_analysis_with, Analysis, Feed, Published, Totals};
use super::source::{FileSource, MemorySource, Pace};
use crate::parse::parse_channels;
use crate::source::wav::WavError;

/// How long callbacks may stop arriving before the input counts as lost.
pub const HEARTBEAT: Duration = Duration::from_millis(1500);
/// First and longest wait between attempts to reopen a lost input.
pub const RETRY_FIRST: Duration = Duration::from_millis(250);
/// Longest wait between attempts to reopen a lost input.
pub const RETRY_MAX: Duration = Duration::from_secs(4);

/// What the session measures, for start records and status lines.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct SourceMeta {
    /// Host name (`alsa`, `jack`, `file`, `demo`).
    pub host: String,
    /// Device name, file path or demo scene.
    pub device: String,
    /// Sample rate (Hz).
    pub sample_rate_hz: u32,
    /// Channels measured, numbered from 1.
    pub channels: Vec<usize>,
}

/// What supervision noticed.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Notice {
    /// The input went away (the reason in words).
    Lost(String),
    /// The input is back.
    Restored,
    /// A stream error that did not end the input.
    Trouble(String),
}

/// What [`Session::drive`] hands its caller.
#[derive(Debug)]
pub enum Step {
    /// A finding of the analysis.
    Event(LiveEvent),
    /// Something supervision noticed (none once the stop was asked for).
    Notice(Notice),
    /// Nothing arrived for a while (this comes at least every 50 ms): a chance to look at
    /// counters or the clock.
    Idle,
}

/// Where to take the audio from.
#[derive(Debug, Clone)]
pub enum SourceSpec {
    /// An input device: host and device selectors as `brink devices` lists them, and a rate.
    Device {
        /// Host name, or the platform's default.
        host: Option<String>,
        /// Device name, part of it, or number; or the host's default input.
        input: Option<String>,
        /// Sample rate to ask for.
        rate: Option<u32>,
    },
    /// A WAV file played at real speed (or unpaced).
    File {
        /// The file.
        path: std::path::PathBuf,
        /// Play again and again.
        looping: bool,
        /// How fast.
        pace: Pace,
    },
    /// Samples in memory, played at real speed, looping (the demo).
    Memory {
        /// A name for the status line.
        name: String,
        /// Sample rate (Hz).
        rate: u32,
        /// Channels per frame.
        channels: usize,
        /// Interleaved samples, full scale = 1.
        samples: Arc<Vec<f32>>,
    },
}

enum InputState {
    Running {
        /// Held to keep the stream alive: dropping it stops the stream.
        _stream: Capture,
        counters: Arc<Counters>,
        callbacks: u64,
        since: Instant,
    },
    Lost {
        next_try: Instant,
        wait: Duration,
    },
}

struct DeviceSupervision {
    host: Option<String>,
    input: Option<String>,
    rate: Option<u32>,
    ring_frames: usize,
    channels: usize,
    fault_tx: Sender<CaptureFault>,
    fault_rx: Receiver<CaptureFault>,
    replace_tx: Sender<AnalysisReader>,
    state: Option<InputState>,
    /// Xruns of the streams before the current one (each reopened stream counts from zero).
    xruns_before: u64,
}

enum Driver {
    Player(JoinHandle<Result<(), WavError>>),
    Device(Box<DeviceSupervision>),
}

/// A running session.
pub struct Session {
    /// The analysis thread (its findings arrive on `analysis.events`).
    pub analysis: Analysis,
    /// What is measured.
    pub meta: SourceMeta,
    /// Stream time reached by the analysis, in frames.
    position: Arc<AtomicU64>,
    /// Raised when the source is done (or on our own shutdown).
    done: Arc<AtomicBool>,
    /// Asks a file or memory player to stop.
    player_stop: Arc<AtomicBool>,
    /// `None` once finishing.
    driver: Option<Driver>,
}

impl std::fmt::Debug for Session {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Session").field("meta", &self.meta).finish()
    }
}

/// The channels `spec` names (numbered from 1), or all of them.
pub fn selected_channels(spec: Option<&str>, available: usize) -> Result<Vec<usize>, String> {
    match spec {
        Some(spec) => parse_channels(spec, available).map_err(|e| e.to_string()),
        None => Ok((1..=available).collect()),
    }
}

/// Full scale for over detection from the device's sample format ("i16", "i24", "u8", "f32"...).
fn format_bits(format: &str) -> Option<u32> {
    let digits = format
        .strip_prefix('i')
        .or_else(|| format.strip_prefix('u'))?;
    digits.parse().ok()
}

fn open_stream(
    device: &cpal::Device,
    rate: Option<u32>,
    channels: usize,
    ring_frames: usize,
    fault_tx: &Sender<CaptureFault>,
) -> Result<(Capture, AnalysisReader), String> {
    let (writer, reader) = ring(channels, ring_frames);
    let (capture, _) =
        open_input(device, rate, writer, fault_tx.clone()).map_err(|e| e.to_string())?;
    capture.play().map_err(|e| e.to_string())?;
    Ok((capture, reader))
}

/// A source played into the ring by a thread of ours (a file or samples in memory).
struct Played {
    host: &'static str,
    device: String,
    rate: u32,
    channels: usize,
    bits: Option<u32>,
}

impl Played {
    /// Ring, engine and analysis thread, then the player (`spawn`) writing into the ring.
    fn start(
        self,
        channels: Option<&str>,
        settings: EngineSettings,
        event_capacity: usize,
        spawn: impl FnOnce(
            CaptureWriter,
            Arc<AtomicBool>,
            Arc<AtomicBool>,
        ) -> std::io::Result<JoinHandle<Result<(), WavError>>>,
    ) -> Result<Session, String> {
        let selected = selected_channels(channels, self.channels)?;
        let (writer, reader) = ring(self.channels, self.rate as usize * 2);
        let engine = Engine::new(self.rate, self.channels, self.bits, settings).select(&selected);
        let done = Arc::new(AtomicBool::new(false));
        let player_stop = Arc::new(AtomicBool::new(false));
        let analysis = spawn_analysis(reader, engine, Arc::clone(&done), event_capacity)
            .map_err(|e| format!("cannot start the analysis thread: {e}"))?;
        let player = spawn(writer, Arc::clone(&player_stop), Arc::clone(&done))
            .map_err(|e| format!("cannot start the {} source: {e}", self.host))?;
        Ok(Session {
            position: analysis.position(),
            analysis,
            meta: SourceMeta {
                host: self.host.to_string(),
                device: self.device,
                sample_rate_hz: self.rate,
                channels: selected,
            },
            done,
            player_stop,
            driver: Some(Driver::Player(player)),
        })
    }
}

impl Session {
    /// Start measuring `spec`, analysing the channels `channels` names (all when `None`).
    pub fn start(
        spec: &SourceSpec,
        channels: Option<&str>,
        settings: EngineSettings,
        event_capacity: usize,
    ) -> Result<Session, String> {
        let player_stop = Arc::new(AtomicBool::new(false));
        let done = Arc::new(AtomicBool::new(false));
        match spec {
            SourceSpec::File {
                path,
                looping,
                pace,
            } => {
                let shown = path.display().to_string();
                let source =
                    FileSource::open(path, *looping, *pace).map_err(|e| format!("{shown}: {e}"))?;
                let info = source.info().clone();
                let played = Played {
                    host: "file",
                    device: shown,
                    rate: info.sample_rate,
                    channels: info.channels,
                    bits: info.integer_bits(),
                };
                played.start(channels, settings, event_capacity, |w, stop, done| {
                    source.spawn(w, stop, done)
                })
            }
            SourceSpec::Memory {
                name,
                rate,
                channels: count,
                samples,
            } => {
                let source = MemorySource::new(*rate, *count, Arc::clone(samples), true);
                let played = Played {
                    host: "demo",
                    device: name.clone(),
                    rate: *rate,
                    channels: *count,
                    bits: None,
                };
                played.start(channels, settings, event_capacity, |w, stop, done| {
                    source.spawn(w, stop, done)
                })
            }
            SourceSpec::Device { host, input, rate } => {
                let h = find_host(host.as_deref()).map_err(|e| e.to_string())?;
                let host_name = h.id().name().to_lowercase();
                let device = find_input(&h, input.as_deref()).map_err(|e| e.to_string())?;
                let info = probe_input(&device, *rate).map_err(|e| e.to_string())?;
                let selected = selected_channels(channels, info.channels)?;
                let ring_frames = info.sample_rate as usize * 2;
                let (fault_tx, fault_rx) = crossbeam_channel::bounded(64);
                // Ask for the rate the probe settled on, so a reopened stream matches.
                let want_rate = Some(info.sample_rate);
                let (capture, reader) =
                    open_stream(&device, want_rate, info.channels, ring_frames, &fault_tx)?;
                let counters = Arc::clone(reader.counters());
                let engine = Engine::new(
                    info.sample_rate,
                    info.channels,
                    format_bits(&info.sample_format),
                    settings,
                )
                .select(&selected);
                let position = Arc::new(AtomicU64::new(0));
                let (replace_tx, replace_rx) = crossbeam_channel::bounded(1);
                let analysis = spawn_analysis_with(
                    reader,
                    engine,
                    Feed {
                        source_done: Arc::clone(&done),
                        replacements: replace_rx,
                        position: Arc::clone(&position),
                    },
                    event_capacity,
                )
                .map_err(|e| format!("cannot start the analysis thread: {e}"))?;
                Ok(Session {
                    analysis,
                    meta: SourceMeta {
                        host: host_name,
                        device: info.device.clone(),
                        sample_rate_hz: info.sample_rate,
                        channels: selected,
                    },
                    position,
                    done,
                    player_stop,
                    driver: Some(Driver::Device(Box::new(DeviceSupervision {
                        host: host.clone(),
                        input: input.clone(),
                        rate: want_rate,
                        ring_frames,
                        channels: info.channels,
                        fault_tx,
                        fault_rx,
                        replace_tx,
                        xruns_before: 0,
                        state: Some(InputState::Running {
                            _stream: capture,
                            counters,
                            callbacks: 0,
                            since: Instant::now(),
                        }),
                    }))),
                })
            }
        }
    }

    /// Stream time the analysis has reached (s).
    pub fn t_s(&self) -> f64 {
        self.position.load(Ordering::Relaxed) as f64 / f64::from(self.meta.sample_rate_hz.max(1))
    }

    /// Host overruns counted over the whole session, across input losses and reopened streams.
    pub fn xruns(&self) -> u64 {
        match &self.driver {
            Some(Driver::Device(d)) => {
                d.xruns_before
                    + match &d.state {
                        Some(InputState::Running { counters, .. }) => {
                            counters.xruns.load(Ordering::Relaxed)
                        }
                        _ => 0,
                    }
            }
            _ => 0,
        }
    }

    /// Ask the source to stop; the analysis then drains the ring and ends with its totals.
    /// Whatever the device reports from here on is our own doing and not a loss.
    pub fn stop(&mut self) {
        // A player raises `done` itself once it has written its last block.
        self.player_stop.store(true, Ordering::Relaxed);
        if let Some(Driver::Device(d)) = &mut self.driver {
            // Dropping the stream joins its callback thread: nothing is written after this.
            d.state = None;
            while d.fault_rx.try_recv().is_ok() {}
            self.done.store(true, Ordering::Release);
        }
    }

    /// Supervise a device input (call it a few times a second): faults and silence of the
    /// callbacks become [`Notice::Lost`], reopening with growing pauses [`Notice::Restored`].
    /// Files and memory need none and report nothing.
    pub fn supervise(&mut self) -> Vec<Notice> {
        let t_now = Instant::now();
        let Some(Driver::Device(d)) = &mut self.driver else {
            return Vec::new();
        };
        let mut notices = Vec::new();
        let mut lost: Option<String> = None;
        while let Ok(fault) = d.fault_rx.try_recv() {
            match fault {
                CaptureFault::DeviceLost(reason) => lost = Some(reason),
                CaptureFault::Other(msg) => notices.push(Notice::Trouble(msg)),
            }
        }
        match &mut d.state {
            Some(InputState::Running {
                counters,
                callbacks,
                since,
                ..
            }) => {
                let seen = counters.callbacks.load(Ordering::Relaxed);
                if seen != *callbacks {
                    *callbacks = seen;
                    *since = t_now;
                } else if lost.is_none() && t_now.duration_since(*since) > HEARTBEAT {
                    lost = Some("callbacks stopped arriving".to_string());
                }
                if let Some(reason) = lost {
                    notices.push(Notice::Lost(reason));
                    d.xruns_before += counters.xruns.load(Ordering::Relaxed);
                    // Dropping the capture stops (what is left of) the stream.
                    d.state = Some(InputState::Lost {
                        next_try: t_now + RETRY_FIRST,
                        wait: RETRY_FIRST,
                    });
                }
            }
            Some(InputState::Lost { next_try, wait }) if t_now >= *next_try => {
                let reopened = find_host(d.host.as_deref())
                    .and_then(|h| find_input(&h, d.input.as_deref()))
                    .map_err(|e| e.to_string())
                    .and_then(|dev| {
                        open_stream(&dev, d.rate, d.channels, d.ring_frames, &d.fault_tx)
                    });
                match reopened {
                    Ok((capture, reader)) => {
                        let counters = Arc::clone(reader.counters());
                        if d.replace_tx.send(reader).is_ok() {
                            notices.push(Notice::Restored);
                            d.state = Some(InputState::Running {
                                _stream: capture,
                                counters,
                                callbacks: 0,
                                since: t_now,
                            });
                        }
                    }
                    Err(_) => {
                        let next = (*wait * 2).min(RETRY_MAX);
                        *wait = next;
                        *next_try = t_now + next;
                    }
                }
            }
            _ => {}
        }
        notices
    }

    /// Run until the analysis ends, handing every finding and supervision notice to `on` (with
    /// the session, for its clock and counters) and supervising the input between waits. When
    /// `stop` is raised or `on` returns `false`, the source is stopped; the analysis then drains
    /// the ring and ends. Returns its totals (`None` if it vanished without them).
    pub fn drive(
        &mut self,
        stop: &AtomicBool,
        mut on: impl FnMut(&Session, Step) -> bool,
    ) -> Option<Totals> {
        let mut stopping = false;
        let mut go_on = true;
        loop {
            if !stopping && (!go_on || stop.load(Ordering::Relaxed)) {
                stopping = true;
                self.stop();
            }
            if !stopping {
                for n in self.supervise() {
                    go_on &= on(self, Step::Notice(n));
                }
            }
            let step = match self.analysis.events.recv_timeout(Duration::from_millis(50)) {
                Ok(Published::Event(ev)) => Step::Event(ev),
                Ok(Published::End(t)) => return Some(t),
                Err(crossbeam_channel::RecvTimeoutError::Timeout) => Step::Idle,
                Err(crossbeam_channel::RecvTimeoutError::Disconnected) => return None,
            };
            go_on &= on(self, step);
        }
    }

    /// Wait for the source and the analysis thread to end; returns the analysis totals (taken
    /// from its end marker when the caller has it, else from the thread) and a file source's
    /// read error, if any.
    pub fn finish(mut self, totals: Option<Totals>) -> (Totals, Option<String>) {
        self.stop();
        let source_error = match self.driver.take() {
            Some(Driver::Player(h)) => match h.join() {
                Ok(Err(e)) => Some(format!("{}: {e}", self.meta.device)),
                _ => None,
            },
            Some(Driver::Device(_)) | None => None,
        };
        // The analysis drains the ring, then sends its totals last.
        let totals = totals.or_else(|| {
            let deadline = Instant::now() + Duration::from_secs(10);
            loop {
                let left = deadline.saturating_duration_since(Instant::now());
                match self.analysis.events.recv_timeout(left) {
                    Ok(Published::End(t)) => break Some(t),
                    Ok(_) => {}
                    Err(_) => break None,
                }
            }
        });
        let joined = self.analysis.join();
        (totals.unwrap_or(joined), source_error)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn format_bits_reads_integer_formats_only() {
        assert_eq!(format_bits("i16"), Some(16));
        assert_eq!(format_bits("i24"), Some(24));
        assert_eq!(format_bits("u8"), Some(8));
        assert_eq!(format_bits("f32"), None);
    }

    #[test]
    fn memory_session_plays_and_finishes() {
        let rate = 8_000u32;
        let samples: Vec<f32> = (0..rate as usize * 2)
            .flat_map(|i| {
                let v =
                    (0.5 * (2.0 * std::f64::consts::PI * 500.0 * i as f64 / 8000.0).sin()) as f32;
                [v, -v]
            })
            .collect();
        let spec = SourceSpec::Memory {
            name: "test".into(),
            rate,
            channels: 2,
            samples: Arc::new(samples),
        };
        let session =
            Session::start(&spec, Some("2"), EngineSettings::default(), 64).expect("starts");
        assert_eq!(session.meta.channels, vec![2]);
        assert_eq!(session.meta.host, "demo");
        std::thread::sleep(Duration::from_millis(150));
        let (totals, err) = session.finish(None);
        assert!(err.is_none());
        assert!(totals.delivered > 0, "{totals:?}");
        assert_eq!(totals.delivered, totals.analysed + totals.dropped_frames);
    }
}
