//! Clipping episodes: clipped runs of one kind closer together than a merge gap, reported as one
//! event (a clipping burst is one event, not one per run or per sample).

use crate::dsp::clip::{ClipKind, ClipRun};
use crate::dsp::level::amplitude_db;

use super::report::ClipEvent;

/// One episode, in stream sample indices.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Episode {
    /// Over or flat top.
    pub kind: ClipKind,
    /// First clipped sample.
    pub start: u64,
    /// One past the last clipped sample.
    pub end: u64,
    /// Highest run level (magnitude, full scale = 1).
    pub level: f32,
    /// Clipped runs.
    pub runs: u64,
    /// Clipped samples.
    pub samples: u64,
}

impl Episode {
    /// The report form, with times in seconds at `rate`.
    pub fn to_event(&self, rate: f64) -> ClipEvent {
        ClipEvent {
            kind: self.kind,
            start_s: self.start as f64 / rate,
            end_s: self.end as f64 / rate,
            level_dbfs: amplitude_db(self.level as f64),
            runs: self.runs,
            samples: self.samples,
        }
    }
}

/// Gathers clip runs into episodes.
#[derive(Debug, Clone, Default)]
pub struct EpisodeTracker {
    gap: u64,
    open: Option<Episode>,
}

impl EpisodeTracker {
    /// Runs of one kind whose start is at most `gap` samples after the episode's end join it.
    pub fn new(gap: u64) -> Self {
        EpisodeTracker { gap, open: None }
    }

    /// The episode still open, if any.
    pub fn open(&self) -> Option<&Episode> {
        self.open.as_ref()
    }

    /// Add a run; returns the episode it closed, if it started a new one.
    pub fn add(&mut self, run: &ClipRun) -> Option<Episode> {
        if let Some(ep) = &mut self.open {
            if ep.kind == run.kind && run.start <= ep.end + self.gap {
                ep.end = ep.end.max(run.start + run.len);
                ep.level = ep.level.max(run.level.abs());
                ep.runs += 1;
                ep.samples += run.len;
                return None;
            }
        }
        self.open.replace(Episode {
            kind: run.kind,
            start: run.start,
            end: run.start + run.len,
            level: run.level.abs(),
            runs: 1,
            samples: run.len,
        })
    }

    /// Close the open episode once the stream at `pos` is past its merge window (live use: an
    /// episode ends when no run has joined it for a gap).
    pub fn poll(&mut self, pos: u64) -> Option<Episode> {
        match &self.open {
            Some(ep) if pos > ep.end + self.gap => self.open.take(),
            _ => None,
        }
    }

    /// Close whatever is open (end of stream, or a gap in the input).
    pub fn flush(&mut self) -> Option<Episode> {
        self.open.take()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn run(kind: ClipKind, start: u64, len: u64) -> ClipRun {
        ClipRun {
            kind,
            start,
            len,
            level: 0.5,
        }
    }

    #[test]
    fn runs_within_the_gap_join_and_others_split() {
        let mut t = EpisodeTracker::new(100);
        assert!(t.add(&run(ClipKind::FlatTop, 0, 10)).is_none());
        assert!(t.add(&run(ClipKind::FlatTop, 110, 10)).is_none());
        // A different kind closes the episode at once.
        let closed = t.add(&run(ClipKind::Over, 125, 3)).unwrap();
        assert_eq!(
            (closed.start, closed.end, closed.runs, closed.samples),
            (0, 120, 2, 20)
        );
        // Too far apart: a new episode.
        let closed = t.add(&run(ClipKind::Over, 300, 3)).unwrap();
        assert_eq!(
            (closed.kind, closed.start, closed.runs),
            (ClipKind::Over, 125, 1)
        );
        assert!(t.poll(400).is_none());
        assert_eq!(t.poll(404).unwrap().start, 300);
        assert!(t.flush().is_none());
    }
}
