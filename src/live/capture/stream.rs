//! Opening an input stream and its real-time data callback: [`open_input`] builds a paused cpal
//! stream in the device's format whose callback does exactly one thing, the ring write
//! ([`callback_body_f32`], [`callback_body_i16`], [`callback_body`]); cpal's error callback counts
//! xruns and sends the other faults with `try_send`. [`Capture`] is the running stream.

use std::fmt;
use std::sync::atomic::Ordering;
use std::sync::Arc;
use std::time::Duration;

use cpal::traits::{DeviceTrait, StreamTrait};
use cpal::{ErrorKind, SampleFormat, SizedSample, I24, U24};
use crossbeam_channel::Sender;

use super::negotiate::plan;
#[cfg(doc)]
use super::probe_input;
use super::{CaptureError, CaptureFault, StreamInfo, UnitSample};
use crate::live::ring::{CaptureWriter, Counters};

/// A running (or paused) input stream. Dropping it stops the stream.
pub struct Capture {
    stream: cpal::Stream,
    info: StreamInfo,
}

impl fmt::Debug for Capture {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("Capture").field("info", &self.info).finish()
    }
}

impl Capture {
    /// Start (or resume) delivering frames. Streams are built paused.
    pub fn play(&self) -> Result<(), CaptureError> {
        self.stream
            .play()
            .map_err(|e| self.control_error("start", &e))
    }

    /// Stop delivering frames for now (some hosts cannot pause; that is an error).
    pub fn pause(&self) -> Result<(), CaptureError> {
        self.stream
            .pause()
            .map_err(|e| self.control_error("pause", &e))
    }

    /// What was opened.
    pub fn info(&self) -> &StreamInfo {
        &self.info
    }

    fn control_error(&self, action: &'static str, e: &cpal::Error) -> CaptureError {
        CaptureError::Control {
            action,
            device: self.info.device.clone(),
            reason: e.to_string(),
        }
    }
}

/// How long cpal may wait on the backend (stream start-up; on ALSA, the poll timeout after which
/// the device state is checked, so a silent disconnect is still noticed).
const STREAM_TIMEOUT: Duration = Duration::from_secs(2);

/// Open `device` for capture into `writer` (whose channel count the stream must match; see
/// [`probe_input`]). The stream is built paused: call [`Capture::play`]. Faults are sent on
/// `errors` with `try_send` (give it room for a few: a full channel loses them).
pub fn open_input(
    device: &cpal::Device,
    want_rate: Option<u32>,
    writer: CaptureWriter,
    errors: Sender<CaptureFault>,
) -> Result<(Capture, StreamInfo), CaptureError> {
    let (info, format) = plan(device, want_rate, Some(writer.channels()))?;
    let channels = u16::try_from(info.channels).map_err(|_| CaptureError::ChannelCount {
        device: info.device.clone(),
        channels: info.channels,
        offered: format!("at most {}", u16::MAX),
    })?;
    let config = cpal::StreamConfig {
        channels,
        sample_rate: info.sample_rate,
        buffer_size: cpal::BufferSize::Default,
    };
    let on_error = error_handler(Arc::clone(writer.counters()), errors, info.device.clone());
    let built = match format {
        SampleFormat::F32 => build(device, config, writer, on_error, callback_body_f32),
        SampleFormat::I16 => build(device, config, writer, on_error, callback_body_i16),
        SampleFormat::I32 => build(device, config, writer, on_error, callback_body::<i32>),
        SampleFormat::I24 => build(device, config, writer, on_error, callback_body::<I24>),
        SampleFormat::I8 => build(device, config, writer, on_error, callback_body::<i8>),
        SampleFormat::I64 => build(device, config, writer, on_error, callback_body::<i64>),
        SampleFormat::U8 => build(device, config, writer, on_error, callback_body::<u8>),
        SampleFormat::U16 => build(device, config, writer, on_error, callback_body::<u16>),
        SampleFormat::U24 => build(device, config, writer, on_error, callback_body::<U24>),
        SampleFormat::U32 => build(device, config, writer, on_error, callback_body::<u32>),
        SampleFormat::U64 => build(device, config, writer, on_error, callback_body::<u64>),
        SampleFormat::F64 => build(device, config, writer, on_error, callback_body::<f64>),
        other => {
            return Err(CaptureError::Format {
                device: info.device.clone(),
                offered: other.to_string(),
            })
        }
    };
    let stream = built.map_err(|e| CaptureError::Open {
        device: info.device.clone(),
        reason: e.to_string(),
    })?;
    Ok((
        Capture {
            stream,
            info: info.clone(),
        },
        info,
    ))
}

/// Build the stream in sample type `T`, the data callback calling `body` and nothing else.
fn build<T, B, E>(
    device: &cpal::Device,
    config: cpal::StreamConfig,
    mut writer: CaptureWriter,
    on_error: E,
    body: B,
) -> Result<cpal::Stream, cpal::Error>
where
    T: SizedSample,
    B: Fn(&mut CaptureWriter, &[T]) + Send + 'static,
    E: FnMut(cpal::Error) + Send + 'static,
{
    device.build_input_stream_raw(
        config,
        T::FORMAT,
        move |data: &cpal::Data, _: &cpal::InputCallbackInfo| {
            // A host handing over another format than it was built for breaks its contract;
            // skip the buffer rather than panic in the audio thread.
            if let Some(samples) = data.as_slice::<T>() {
                body(&mut writer, samples);
            }
        },
        on_error,
        Some(STREAM_TIMEOUT),
    )
}

/// The data callback of an `f32` stream: one ring write.
pub fn callback_body_f32(writer: &mut CaptureWriter, data: &[f32]) {
    writer.write(data);
}

/// The data callback of an `i16` stream: conversion through the writer's stack buffer.
pub fn callback_body_i16(writer: &mut CaptureWriter, data: &[i16]) {
    callback_body(writer, data);
}

/// The data callback of a stream in any other format `T`.
pub fn callback_body<T: UnitSample>(writer: &mut CaptureWriter, data: &[T]) {
    writer.write_converted(data, T::to_unit);
}

/// What a stream error means for capture: `None` for an xrun (counted, not a fault);
/// [`CaptureFault::DeviceLost`] when the device or host went away or the stream must be rebuilt
/// (`DeviceNotAvailable`, `HostUnavailable`, `StreamInvalidated`); [`CaptureFault::Other`] for
/// the rest (`DeviceChanged`, `RealtimeDenied`, `BackendError`, ...).
pub fn fault_of(err: &cpal::Error, device: &str) -> Option<CaptureFault> {
    match err.kind() {
        ErrorKind::Xrun => None,
        ErrorKind::DeviceNotAvailable
        | ErrorKind::HostUnavailable
        | ErrorKind::StreamInvalidated => {
            Some(CaptureFault::DeviceLost(format!("{device}: {err}")))
        }
        _ => Some(CaptureFault::Other(format!("{device}: {err}"))),
    }
}

/// The error callback: xruns counted (as [`CaptureWriter::note_xrun`] does), faults sent with
/// `try_send` (a full or closed channel loses them; this never blocks).
fn error_handler(
    counters: Arc<Counters>,
    errors: Sender<CaptureFault>,
    device: String,
) -> impl FnMut(cpal::Error) + Send + 'static {
    move |err: cpal::Error| match fault_of(&err, &device) {
        None => {
            counters.xruns.fetch_add(1, Ordering::Relaxed);
        }
        Some(fault) => {
            let _ = errors.try_send(fault);
        }
    }
}

#[cfg(test)]
mod tests {
    use std::time::{Duration, Instant};

    use cpal::ErrorKind;

    use super::super::probe_input;
    use super::super::synthetic::{Script, Synth, SynthDevice};
    use super::*;
    use crate::live::ring::{ring, AnalysisReader, Read};

    const RATES: (u32, u32) = (44_100, 48_000);

    fn wait_for(what: &str, mut cond: impl FnMut() -> bool) {
        let start = Instant::now();
        while !cond() {
            assert!(
                start.elapsed() < Duration::from_secs(10),
                "timed out: {what}"
            );
            std::thread::sleep(Duration::from_millis(1));
        }
    }

    /// Read `frames` frames in blocks of `block` as they arrive, while the stream runs.
    fn read_all(r: &mut AnalysisReader, frames: usize, block: usize) -> Vec<f32> {
        let ch = r.channels();
        let mut got = Vec::with_capacity(frames * ch);
        let mut out = vec![0.0; block * ch];
        let start = Instant::now();
        while got.len() < frames * ch {
            assert!(
                start.elapsed() < Duration::from_secs(10),
                "timed out reading"
            );
            match r.read_block(&mut out) {
                Read::Frames(n) => got.extend_from_slice(&out[..n * ch]),
                Read::Waiting => std::thread::sleep(Duration::from_micros(200)),
                Read::Gap { dropped } => panic!("lost {dropped} frames"),
            }
        }
        got
    }

    fn flows_in_order<T: Synth + UnitSample>(format: SampleFormat, expect_name: &str) {
        let (period, callbacks) = (96, 40u64);
        let script = Script::new(period, Some(callbacks), Duration::from_micros(500));
        let dev = SynthDevice::input("Synth", 3, RATES, &[format], script);
        let script = Arc::clone(&dev.script);
        let device = dev.into_cpal();
        let total = period * callbacks as usize;
        // Room for everything: whatever the scheduling, nothing may be lost. Blocks of 128
        // frames do not line up with the 96-frame callbacks, and divide the total.
        let (w, mut r) = ring(3, total);
        let (tx, rx) = crossbeam_channel::bounded(4);
        let (cap, info) = open_input(&device, None, w, tx).expect("open");
        assert_eq!(
            info,
            StreamInfo {
                sample_rate: 48_000,
                channels: 3,
                sample_format: expect_name.into(),
                device: "Synth".into(),
            }
        );
        assert_eq!(cap.info(), &info);
        assert_eq!(script.done(), 0, "built paused");
        cap.play().expect("play");
        let got = read_all(&mut r, total, 128);
        wait_for("all callbacks", || script.done() == callbacks);
        for (n, &v) in got.iter().enumerate() {
            assert_eq!(v, T::nth(n as u64).to_unit(), "sample {n}");
        }
        let c = r.counters();
        assert_eq!(c.delivered.load(Ordering::Relaxed), total as u64);
        assert_eq!(c.dropped.load(Ordering::Relaxed), 0);
        assert_eq!(c.callbacks.load(Ordering::Relaxed), callbacks);
        assert_eq!(c.xruns.load(Ordering::Relaxed), 0);
        assert!(rx.try_recv().is_err(), "no faults");
    }

    #[test]
    fn f32_frames_reach_the_reader_intact_and_in_order() {
        flows_in_order::<f32>(SampleFormat::F32, "f32");
    }

    #[test]
    fn i16_frames_arrive_converted_to_full_scale() {
        flows_in_order::<i16>(SampleFormat::I16, "i16");
        // The conversion itself, at the extremes.
        assert_eq!(i16::MIN.to_unit(), -1.0);
        assert_eq!(i16::MAX.to_unit(), 32_767.0 / 32_768.0);
        assert_eq!(16_384i16.to_unit(), 0.5);
    }

    #[test]
    fn i24_frames_arrive_converted_to_full_scale() {
        flows_in_order::<I24>(SampleFormat::I24, "i24");
    }

    #[test]
    fn a_stalled_reader_loses_frames_but_never_holds_up_the_stream() {
        let (period, callbacks, capacity) = (256, 40u64, 1000);
        let pace = Duration::from_millis(2);
        let script = Script::new(period, Some(callbacks), pace);
        let dev = SynthDevice::input("Synth", 2, RATES, &[SampleFormat::F32], script);
        let script = Arc::clone(&dev.script);
        let (w, mut r) = ring(2, capacity);
        let (tx, _rx) = crossbeam_channel::bounded(4);
        let (cap, _) = open_input(&dev.into_cpal(), Some(48_000), w, tx).expect("open");
        let start = Instant::now();
        cap.play().expect("play");
        // The reader does nothing until the stream has delivered everything.
        wait_for("all callbacks", || script.done() == callbacks);
        let elapsed = start.elapsed();
        let delivered = period as u64 * callbacks;
        let c = Arc::clone(r.counters());
        assert_eq!(c.delivered.load(Ordering::Relaxed), delivered);
        assert_eq!(c.written.load(Ordering::Relaxed), capacity as u64);
        assert_eq!(
            c.dropped.load(Ordering::Relaxed),
            delivered - capacity as u64
        );
        // A callback that waited for the reader would never have returned (the reader reads
        // nothing until the stream is done). One that did more than copy would show in these
        // times, which allow for a busy machine preempting the stream's thread.
        let longest = Duration::from_nanos(script.longest_ns.load(Ordering::Relaxed));
        let total = Duration::from_nanos(script.total_ns.load(Ordering::Relaxed));
        assert!(
            longest < Duration::from_millis(100),
            "longest callback {longest:?}"
        );
        assert!(
            total < Duration::from_millis(400),
            "time in callbacks {total:?}"
        );
        assert!(elapsed < Duration::from_secs(5), "stream took {elapsed:?}");
        // What did fit is intact and in order, then the loss is reported.
        let mut out = vec![0.0; 2 * 100];
        for b in 0..capacity / 100 {
            assert_eq!(r.read_block(&mut out), Read::Frames(100));
            for (i, &v) in out.iter().enumerate() {
                assert_eq!(v, f32::nth((b * 200 + i) as u64));
            }
        }
        assert_eq!(
            r.read_block(&mut out),
            Read::Gap {
                dropped: delivered - capacity as u64
            }
        );
    }

    #[test]
    fn a_vanished_device_arrives_as_device_lost_and_xruns_are_counted() {
        let script = Script::new(64, None, Duration::from_micros(500)).with_errors(&[
            (2, ErrorKind::Xrun),
            (3, ErrorKind::Xrun),
            (3, ErrorKind::Xrun),
            (4, ErrorKind::DeviceChanged),
            (6, ErrorKind::DeviceNotAvailable),
        ]);
        let dev = SynthDevice::input("Plug", 1, RATES, &[SampleFormat::F32], script);
        let script = Arc::clone(&dev.script);
        let (w, r) = ring(1, 4096);
        let (tx, rx) = crossbeam_channel::bounded(8);
        let (cap, _) = open_input(&dev.into_cpal(), None, w, tx).expect("open");
        cap.play().expect("play");
        let first = rx.recv_timeout(Duration::from_secs(10)).expect("a fault");
        assert!(
            matches!(&first, CaptureFault::Other(m) if m.starts_with("Plug: ")),
            "{first:?}"
        );
        let lost = rx.recv_timeout(Duration::from_secs(10)).expect("a fault");
        assert!(
            matches!(&lost, CaptureFault::DeviceLost(m) if m.contains("not available")),
            "{lost:?}"
        );
        assert_eq!(r.counters().xruns.load(Ordering::Relaxed), 3);
        // The device is gone: nothing more comes.
        std::thread::sleep(Duration::from_millis(20));
        assert_eq!(script.done(), 6);
        assert_eq!(r.counters().callbacks.load(Ordering::Relaxed), 6);
        assert!(rx.try_recv().is_err());
        drop(cap);
        assert!(script.ended.load(Ordering::Acquire));
    }

    #[test]
    fn faults_are_sent_without_blocking_when_nobody_listens() {
        let script = Script::new(16, None, Duration::from_micros(200)).with_errors(&[
            (1, ErrorKind::BackendError),
            (2, ErrorKind::BackendError),
            (3, ErrorKind::BackendError),
            (4, ErrorKind::DeviceNotAvailable),
        ]);
        let dev = SynthDevice::input("Busy", 1, RATES, &[SampleFormat::F32], script);
        let script = Arc::clone(&dev.script);
        let (w, _r) = ring(1, 64);
        let (tx, rx) = crossbeam_channel::bounded(1);
        let (cap, _) = open_input(&dev.into_cpal(), None, w, tx).expect("open");
        cap.play().expect("play");
        wait_for("the stream to reach the loss", || script.done() == 4);
        // The channel held one fault; the rest were lost, and the stream went on regardless.
        assert!(matches!(rx.try_recv(), Ok(CaptureFault::Other(_))));
        assert!(rx.try_recv().is_err());
        drop(rx);
        drop(cap);
    }

    #[test]
    fn pause_stops_callbacks_and_drop_ends_the_stream() {
        let script = Script::new(32, None, Duration::from_millis(1));
        let dev = SynthDevice::input("Synth", 2, RATES, &[SampleFormat::F32], script);
        let script = Arc::clone(&dev.script);
        let (w, r) = ring(2, 1 << 16);
        let (tx, _rx) = crossbeam_channel::bounded(4);
        let (cap, _) = open_input(&dev.into_cpal(), None, w, tx).expect("open");
        cap.play().expect("play");
        wait_for("callbacks", || script.done() >= 5);
        cap.pause().expect("pause");
        std::thread::sleep(Duration::from_millis(20));
        let paused_at = script.done();
        std::thread::sleep(Duration::from_millis(30));
        assert_eq!(script.done(), paused_at, "paused");
        cap.play().expect("play");
        wait_for("callbacks again", || script.done() >= paused_at + 5);
        drop(cap);
        assert!(
            script.ended.load(Ordering::Acquire),
            "dropping stops the stream"
        );
        let stopped_at = r.counters().callbacks.load(Ordering::Relaxed);
        std::thread::sleep(Duration::from_millis(10));
        assert_eq!(r.counters().callbacks.load(Ordering::Relaxed), stopped_at);
    }

    #[test]
    fn a_ring_of_the_wrong_width_is_refused() {
        let script = Script::new(32, Some(1), Duration::ZERO);
        let dev = SynthDevice::input("Stereo", 2, RATES, &[SampleFormat::F32], script);
        let device = dev.into_cpal();
        let probed = probe_input(&device, None).expect("probe");
        assert_eq!(probed.channels, 2);
        let (w, _r) = ring(4, 64);
        let (tx, _rx) = crossbeam_channel::bounded(1);
        let err = open_input(&device, Some(48_000), w, tx).map(|_| ());
        assert!(matches!(
            err,
            Err(CaptureError::ChannelCount { channels: 4, .. })
        ));
    }

    /// The real ALSA backend, through alsa-lib's `null` PCM (no sound card needed): it captures
    /// silence.
    #[cfg(target_os = "linux")]
    #[test]
    fn alsa_null_device_captures_silence() {
        use crate::live::devices::{find_host, find_input};
        let host = find_host(Some("alsa")).expect("alsa host");
        let device = match find_input(&host, Some("null")) {
            Ok(d) => d,
            Err(e) => {
                eprintln!("skipped: alsa-lib offers no null PCM here: {e}");
                return;
            }
        };
        let (w, mut r) = ring(2, 48_000);
        let (tx, rx) = crossbeam_channel::bounded(4);
        let (cap, info) = open_input(&device, Some(48_000), w, tx).expect("open null");
        assert_eq!((info.sample_rate, info.channels), (48_000, 2));
        assert_eq!(info.sample_format, "f32");
        cap.play().expect("play");
        let got = read_all(&mut r, 4_800, 480);
        assert!(got.iter().all(|&v| v == 0.0));
        drop(cap);
        assert!(rx.try_recv().is_err(), "no faults");
    }

    #[test]
    fn stream_errors_map_to_faults() {
        let f = |k| fault_of(&cpal::Error::new(k), "dev");
        assert_eq!(f(ErrorKind::Xrun), None);
        assert!(matches!(
            f(ErrorKind::DeviceNotAvailable),
            Some(CaptureFault::DeviceLost(_))
        ));
        assert!(matches!(
            f(ErrorKind::HostUnavailable),
            Some(CaptureFault::DeviceLost(_))
        ));
        assert!(matches!(
            f(ErrorKind::StreamInvalidated),
            Some(CaptureFault::DeviceLost(_))
        ));
        assert!(matches!(
            f(ErrorKind::DeviceChanged),
            Some(CaptureFault::Other(_))
        ));
        assert!(matches!(
            f(ErrorKind::BackendError),
            Some(CaptureFault::Other(_))
        ));
        let msg = fault_of(
            &cpal::Error::with_message(ErrorKind::DeviceNotAvailable, "unplugged"),
            "USB",
        );
        assert_eq!(msg, Some(CaptureFault::DeviceLost("USB: unplugged".into())));
    }
}
