//! The running pipeline: a source thread writing into the ring, the analysis thread cutting
//! blocks from it, and a bounded channel carrying what the analysis found to whoever shows or
//! writes it. Sending uses `try_send`: a slow reader never stalls analysis; what it misses is
//! counted.

use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::Arc;
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

use crossbeam_channel::{Receiver, Sender, TrySendError};

use super::engine::{Engine, LiveEvent};
use super::ring::{AnalysisReader, Read};

/// Totals when the analysis thread ends.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Totals {
    /// Frames the source offered.
    pub delivered: u64,
    /// Frames analysed.
    pub analysed: u64,
    /// Frames lost in the ring.
    pub dropped_frames: u64,
    /// Host xruns.
    pub xruns: u64,
    /// Events the receiver missed because its channel was full.
    pub dropped_events: u64,
}

/// What the analysis thread publishes.
#[derive(Debug, Clone, PartialEq)]
pub enum Published {
    /// A finding.
    Event(LiveEvent),
    /// The input has ended (source finished or stop requested); nothing follows.
    End(Totals),
}

/// Handle on a running analysis thread.
#[derive(Debug)]
pub struct Analysis {
    /// Findings, in order.
    pub events: Receiver<Published>,
    stop: Arc<AtomicBool>,
    handle: Option<JoinHandle<Totals>>,
    dropped_events: Arc<AtomicU64>,
    load: Arc<AtomicU64>,
    position: Arc<AtomicU64>,
}

impl Analysis {
    /// Ask the analysis thread to finish (it drains nothing further and reports its totals).
    pub fn stop(&self) {
        self.stop.store(true, Ordering::Relaxed);
    }

    /// Events missed so far because the receiver was slow.
    pub fn dropped_events(&self) -> u64 {
        self.dropped_events.load(Ordering::Relaxed)
    }

    /// Where the analysis has got to, in frames of stream time.
    pub fn position(&self) -> Arc<AtomicU64> {
        Arc::clone(&self.position)
    }

    /// The share of the last second of wall time the analysis thread spent analysing (0..1).
    pub fn load(&self) -> f64 {
        f64::from_bits(self.load.load(Ordering::Relaxed))
    }

    /// Wait for the thread and return its totals.
    pub fn join(mut self) -> Totals {
        self.stop();
        self.handle
            .take()
            .and_then(|h| h.join().ok())
            .unwrap_or_default()
    }
}

/// Start the analysis thread. `source_done` tells it the source has finished, so that once the
/// ring is empty it can end; `capacity` bounds the event channel.
pub fn spawn_analysis(
    reader: AnalysisReader,
    engine: Engine,
    source_done: Arc<AtomicBool>,
    capacity: usize,
) -> std::io::Result<Analysis> {
    let (_keep, replacements) = crossbeam_channel::bounded(1);
    spawn_analysis_with(
        reader,
        engine,
        Feed {
            source_done,
            replacements,
            position: Arc::new(AtomicU64::new(0)),
        },
        capacity,
    )
}

/// How the analysis thread learns about its input beyond the ring itself.
#[derive(Debug)]
pub struct Feed {
    /// Raised when the source has finished for good.
    pub source_done: Arc<AtomicBool>,
    /// A new ring's reader, after the input was reopened: the rest of the current ring is
    /// analysed, then the new one is taken and state spanning samples starts over.
    pub replacements: Receiver<AnalysisReader>,
    /// Where the analysis has got to, in frames of stream time (for timestamps elsewhere).
    pub position: Arc<AtomicU64>,
}

/// [`spawn_analysis`] with a [`Feed`] that can hand over new rings.
pub fn spawn_analysis_with(
    mut reader: AnalysisReader,
    mut engine: Engine,
    feed: Feed,
    capacity: usize,
) -> std::io::Result<Analysis> {
    let (tx, rx) = crossbeam_channel::bounded(capacity.max(1));
    let stop = Arc::new(AtomicBool::new(false));
    let dropped_events = Arc::new(AtomicU64::new(0));
    let load = Arc::new(AtomicU64::new(0f64.to_bits()));
    let position = Arc::clone(&feed.position);
    let (stop2, dropped2, load2) = (
        Arc::clone(&stop),
        Arc::clone(&dropped_events),
        Arc::clone(&load),
    );
    let handle = std::thread::Builder::new()
        .name("brink-analysis".into())
        .spawn(move || {
            let shared = Shared {
                stop: &stop2,
                tx: &tx,
                dropped_events: &dropped2,
                load: &load2,
            };
            analysis_loop(&mut reader, &mut engine, &feed, &shared)
        })?;
    Ok(Analysis {
        events: rx,
        stop,
        handle: Some(handle),
        dropped_events,
        load,
        position,
    })
}

fn publish(tx: &Sender<Published>, dropped: &AtomicU64, p: Published) {
    match tx.try_send(p) {
        Ok(()) | Err(TrySendError::Disconnected(_)) => {}
        Err(TrySendError::Full(_)) => {
            dropped.fetch_add(1, Ordering::Relaxed);
        }
    }
}

/// What the analysis thread shares with its handle.
struct Shared<'a> {
    stop: &'a AtomicBool,
    tx: &'a Sender<Published>,
    dropped_events: &'a AtomicU64,
    /// f64 bits: busy share of the last second.
    load: &'a AtomicU64,
}

/// Busy time over wall time, published once a second.
struct LoadMeter<'a> {
    out: &'a AtomicU64,
    since: Instant,
    busy: Duration,
}

impl LoadMeter<'_> {
    fn add(&mut self, busy: Duration) {
        self.busy += busy;
        let wall = self.since.elapsed();
        if wall >= Duration::from_secs(1) {
            let share = self.busy.as_secs_f64() / wall.as_secs_f64();
            self.out.store(share.to_bits(), Ordering::Relaxed);
            self.since = Instant::now();
            self.busy = Duration::ZERO;
        }
    }
}

fn analysis_loop(
    reader: &mut AnalysisReader,
    engine: &mut Engine,
    feed: &Feed,
    shared: &Shared<'_>,
) -> Totals {
    let Shared {
        stop,
        tx,
        dropped_events,
        load,
    } = *shared;
    let mut meter = LoadMeter {
        out: load,
        since: Instant::now(),
        busy: Duration::ZERO,
    };
    // Blocks of 10 ms, cut from the ring whatever the source's write sizes.
    let block = ((engine.rate() as usize) / 100).max(1);
    let ch = engine.channels().max(1);
    let mut buf = vec![0.0f32; block * ch];
    let mut emit = |ev: LiveEvent| publish(tx, dropped_events, Published::Event(ev));
    // Counts of rings already retired.
    let mut retired = Totals::default();
    loop {
        if stop.load(Ordering::Relaxed) {
            break;
        }
        match reader.read_block(&mut buf) {
            Read::Frames(n) => {
                let t0 = Instant::now();
                engine.process(&buf[..n * ch], &mut emit);
                feed.position.store(engine.position(), Ordering::Relaxed);
                meter.add(t0.elapsed());
            }
            Read::Gap { dropped } => engine.gap(dropped, &mut emit),
            Read::Waiting => {
                let done = feed.source_done.load(Ordering::Acquire);
                let replacement = if done {
                    None
                } else {
                    feed.replacements.try_recv().ok()
                };
                if done || replacement.is_some() {
                    // Take what is left of this ring (less than a block).
                    let left = reader.available();
                    if left > 0 {
                        if let Read::Frames(n) = reader.read_block(&mut buf[..left * ch]) {
                            engine.process(&buf[..n * ch], &mut emit);
                        }
                        if let Some(r) = replacement {
                            // Keep it for the next turn; nothing else can arrive meanwhile.
                            retire(&mut retired, reader);
                            *reader = r;
                            engine.restart(&mut emit);
                        }
                        continue;
                    }
                    // A loss right at the end still counts.
                    if let Read::Gap { dropped } = reader.read_block(&mut buf[..0]) {
                        engine.gap(dropped, &mut emit);
                    }
                    match replacement {
                        Some(r) => {
                            retire(&mut retired, reader);
                            *reader = r;
                            engine.restart(&mut emit);
                            continue;
                        }
                        None => break,
                    }
                }
                // Sleep until the block should be complete (within 1..10 ms, one block): each
                // wake-up costs a context switch, and polling every 2 ms cost more than drawing
                // a 2-channel dashboard. A clip notice waits at most one block longer.
                let missing = block.saturating_sub(reader.available());
                let due = Duration::from_secs_f64(missing as f64 / f64::from(engine.rate().max(1)));
                std::thread::sleep(due.clamp(Duration::from_millis(1), Duration::from_millis(10)));
                meter.add(Duration::ZERO);
            }
        }
    }
    engine.finish(&mut emit);
    let mut totals = retired;
    retire(&mut totals, reader);
    totals.dropped_events = dropped_events.load(Ordering::Relaxed);
    // The end marker must arrive: wait for room rather than drop it.
    let _ = tx.send_timeout(Published::End(totals), Duration::from_secs(5));
    totals
}

/// Add a ring's counts to the totals.
fn retire(totals: &mut Totals, reader: &AnalysisReader) {
    let c = reader.counters();
    totals.delivered += c.delivered.load(Ordering::Acquire);
    totals.analysed += reader.frames_read();
    totals.dropped_frames += c.dropped.load(Ordering::Acquire);
    totals.xruns += c.xruns.load(Ordering::Relaxed);
}
