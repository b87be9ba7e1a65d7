//! The hand-over from the capture side to the analysis thread: a preallocated lock-free SPSC ring
//! of interleaved f32 frames, plus counters the two sides share through atomics.
//!
//! The capture side ([`CaptureWriter`]) runs inside an audio callback: it copies whole frames
//! into the ring, counts what did not fit, and does nothing else: no allocation, no lock, no
//! print, no channel send. The analysis side ([`AnalysisReader`]) cuts fixed-size blocks from the
//! ring (never from callback boundaries) and learns where frames were lost, so that state which
//! spans samples (interpolator history, plateau runs, tone windows) can be reset at the gap.

use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::Arc;

use ringbuf::traits::{Consumer, Observer, Producer, Split};
use ringbuf::{HeapCons, HeapProd, HeapRb};

/// Counters shared by both sides.
#[derive(Debug, Default)]
pub struct Counters {
    /// Frames the source offered.
    pub delivered: AtomicU64,
    /// Frames that went into the ring.
    pub written: AtomicU64,
    /// Frames that did not fit and were lost.
    pub dropped: AtomicU64,
    /// Host-reported overruns/underruns (counted, not treated as failures).
    pub xruns: AtomicU64,
    /// Index (in written frames) just after which the most recent loss happened.
    pub gap_at: AtomicU64,
    /// Callbacks seen; a heartbeat for supervision.
    pub callbacks: AtomicU64,
}

/// Create a ring holding `capacity_frames` frames of `channels` channels.
pub fn ring(channels: usize, capacity_frames: usize) -> (CaptureWriter, AnalysisReader) {
    let channels = channels.max(1);
    let rb = HeapRb::<f32>::new(channels * capacity_frames.max(1));
    let (prod, cons) = rb.split();
    let counters = Arc::new(Counters::default());
    (
        CaptureWriter {
            prod,
            channels,
            counters: Arc::clone(&counters),
        },
        AnalysisReader {
            cons,
            channels,
            counters,
            seen_dropped: 0,
            read: 0,
            pending_gap: None,
        },
    )
}

/// Samples converted per step when the source delivers integers (a stack buffer; no heap).
const CONVERT_CHUNK: usize = 1024;

/// The capture side. Every method is safe to call from a real-time audio callback.
pub struct CaptureWriter {
    prod: HeapProd<f32>,
    channels: usize,
    counters: Arc<Counters>,
}

impl std::fmt::Debug for CaptureWriter {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("CaptureWriter")
            .field("channels", &self.channels)
            .finish()
    }
}

impl CaptureWriter {
    /// The shared counters.
    pub fn counters(&self) -> &Arc<Counters> {
        &self.counters
    }

    /// Channels per frame.
    pub fn channels(&self) -> usize {
        self.channels
    }

    /// Whole frames the ring has room for now.
    pub fn room_frames(&self) -> usize {
        self.prod.vacant_len() / self.channels
    }

    /// Copy the whole frames of `interleaved` that fit; count the rest as dropped.
    pub fn write(&mut self, interleaved: &[f32]) {
        let c = &self.counters;
        c.callbacks.fetch_add(1, Ordering::Relaxed);
        self.push_frames(interleaved);
    }

    fn push_frames(&mut self, interleaved: &[f32]) {
        let ch = self.channels;
        let frames = interleaved.len() / ch;
        let room = self.prod.vacant_len() / ch;
        let n = frames.min(room);
        if n > 0 {
            self.prod.push_slice(&interleaved[..n * ch]);
        }
        let c = &self.counters;
        c.delivered.fetch_add(frames as u64, Ordering::Relaxed);
        let written = c.written.fetch_add(n as u64, Ordering::Release) + n as u64;
        if n < frames {
            c.gap_at.store(written, Ordering::Relaxed);
            c.dropped.fetch_add((frames - n) as u64, Ordering::Release);
        }
    }

    /// Convert integer (or other) samples to f32 through a fixed stack buffer, then write.
    pub fn write_converted<T: Copy>(&mut self, interleaved: &[T], convert: impl Fn(T) -> f32) {
        self.counters.callbacks.fetch_add(1, Ordering::Relaxed);
        let step = (CONVERT_CHUNK / self.channels).max(1) * self.channels;
        let mut buf = [0.0f32; CONVERT_CHUNK];
        for chunk in interleaved.chunks(step.min(CONVERT_CHUNK)) {
            let out = &mut buf[..chunk.len()];
            for (o, &v) in out.iter_mut().zip(chunk) {
                *o = convert(v);
            }
            self.push_frames(out);
        }
    }

    /// Count a host-reported overrun or underrun.
    pub fn note_xrun(&self) {
        self.counters.xruns.fetch_add(1, Ordering::Relaxed);
    }
}

/// What [`AnalysisReader::read_block`] found.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Read {
    /// Not enough frames yet; nothing was taken.
    Waiting,
    /// `frames` frames were taken (a whole block, or fewer when a gap follows them).
    Frames(usize),
    /// Frames were lost here: `dropped` frames since the previous gap report. State spanning
    /// samples must be reset before the next frames.
    Gap {
        /// Frames lost.
        dropped: u64,
    },
}

/// The analysis side.
pub struct AnalysisReader {
    cons: HeapCons<f32>,
    channels: usize,
    counters: Arc<Counters>,
    seen_dropped: u64,
    read: u64,
    /// (position in written frames, frames lost) of a loss not yet reached.
    pending_gap: Option<(u64, u64)>,
}

impl std::fmt::Debug for AnalysisReader {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("AnalysisReader")
            .field("channels", &self.channels)
            .field("read", &self.read)
            .finish()
    }
}

impl AnalysisReader {
    /// The shared counters.
    pub fn counters(&self) -> &Arc<Counters> {
        &self.counters
    }

    /// Channels per frame.
    pub fn channels(&self) -> usize {
        self.channels
    }

    /// Frames taken so far.
    pub fn frames_read(&self) -> u64 {
        self.read
    }

    /// Frames waiting in the ring.
    pub fn available(&self) -> usize {
        self.cons.occupied_len() / self.channels
    }

    /// Take one block of `out.len() / channels` frames when that many are waiting, stopping
    /// short at a gap; or report the gap once it is reached.
    pub fn read_block(&mut self, out: &mut [f32]) -> Read {
        let ch = self.channels;
        let want = out.len() / ch;
        if self.pending_gap.is_none() {
            let dropped = self.counters.dropped.load(Ordering::Acquire);
            if dropped > self.seen_dropped {
                let at = self.counters.gap_at.load(Ordering::Relaxed);
                self.pending_gap = Some((at.max(self.read), dropped - self.seen_dropped));
                self.seen_dropped = dropped;
            }
        }
        let limit = match self.pending_gap {
            Some((at, dropped)) if at <= self.read => {
                self.pending_gap = None;
                return Read::Gap { dropped };
            }
            Some((at, _)) => ((at - self.read) as usize).min(want),
            None => want,
        };
        let avail = self.available();
        let take = if limit < want { limit.min(avail) } else { want };
        if take == 0 || avail < take {
            return Read::Waiting;
        }
        let got = self.cons.pop_slice(&mut out[..take * ch]) / ch;
        self.read += got as u64;
        Read::Frames(got)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn blocks_are_cut_from_the_ring_not_from_writes() {
        let (mut w, mut r) = ring(2, 64);
        w.write(&[1.0, -1.0, 2.0, -2.0, 3.0]); // the half frame is not taken
        w.write(&[3.0, -3.0]);
        let mut out = [0.0; 4];
        assert_eq!(r.read_block(&mut out), Read::Frames(2));
        assert_eq!(out, [1.0, -1.0, 2.0, -2.0]);
        assert_eq!(r.read_block(&mut out), Read::Waiting);
        w.write(&[4.0, -4.0]);
        assert_eq!(r.read_block(&mut out), Read::Frames(2));
        assert_eq!(out, [3.0, -3.0, 4.0, -4.0]);
    }

    #[test]
    fn a_stalled_reader_loses_frames_and_learns_where() {
        let (mut w, mut r) = ring(1, 8);
        let data: Vec<f32> = (0..6).map(|v| v as f32).collect();
        w.write(&data); // 6 of 8
        w.write(&[6.0, 7.0, 8.0, 9.0]); // 2 fit, 2 lost after written frame 8
        let c = Arc::clone(r.counters());
        assert_eq!(c.delivered.load(Ordering::Relaxed), 10);
        assert_eq!(c.written.load(Ordering::Relaxed), 8);
        assert_eq!(c.dropped.load(Ordering::Relaxed), 2);
        let mut out = [0.0; 5];
        assert_eq!(r.read_block(&mut out), Read::Frames(5));
        assert_eq!(r.read_block(&mut out), Read::Frames(3)); // stops at the gap
        assert_eq!(&out[..3], &[5.0, 6.0, 7.0]);
        assert_eq!(r.read_block(&mut out), Read::Gap { dropped: 2 });
        w.write(&[20.0; 5]);
        assert_eq!(r.read_block(&mut out), Read::Frames(5));
        // Accounting: delivered = read + dropped (nothing left in the ring).
        let read = r.frames_read();
        assert_eq!(
            c.delivered.load(Ordering::Relaxed),
            read + c.dropped.load(Ordering::Relaxed)
        );
    }

    #[test]
    fn integer_samples_are_converted_in_whole_frames() {
        let (mut w, mut r) = ring(3, 4096);
        let data: Vec<i16> = (0..3000).map(|i| (i % 3) as i16 * 8192).collect();
        w.write_converted(&data, |v| v as f32 / 32768.0);
        let mut out = vec![0.0; 3000];
        assert_eq!(r.read_block(&mut out), Read::Frames(1000));
        assert!(out.chunks(3).all(|f| f == [0.0, 0.25, 0.5]));
    }
}
