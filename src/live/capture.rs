//! Capture from a sound card: a cpal input stream whose data callback feeds the ring's
//! [`CaptureWriter`].
//!
//! The stream is opened in `f32` when the device offers it; otherwise in the device's integer
//! format, converted in the callback through the writer's stack buffer (full scale is ±1: an
//! n-bit code `c` becomes `c / 2^(n−1)`, unsigned codes are centred first). The data callback does
//! exactly one thing, the ring write ([`callback_body_f32`], [`callback_body_i16`],
//! [`callback_body`]): no allocation, lock, print or channel send. Stream errors arrive on cpal's
//! error callback, which is not the real-time data path: xruns are counted in the ring's
//! counters, everything else becomes a [`CaptureFault`] sent with `try_send`.

use std::fmt;
use std::sync::atomic::Ordering;
use std::sync::Arc;
use std::time::Duration;

use cpal::traits::{DeviceTrait, StreamTrait};
use cpal::{ErrorKind, SampleFormat, SizedSample, SupportedStreamConfigRange, I24, U24};
use crossbeam_channel::Sender;
use serde::Serialize;

use super::ring::{CaptureWriter, Counters};

/// Why a host, a device or a stream could not be had. Each message is one line for people.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum CaptureError {
    /// No audio host has this name on this platform.
    #[error("no audio host named '{name}'; hosts here: {available}")]
    NoHost {
        /// What was asked for.
        name: String,
        /// Hosts compiled in, comma-separated.
        available: String,
    },
    /// The host exists on this platform but this build of brink leaves it out.
    #[error("audio host '{name}' is not built into this brink; rebuild with `--features {name}`")]
    HostNotBuilt {
        /// The host's name.
        name: String,
    },
    /// The host is compiled in but cannot be reached (server not running, subsystem missing).
    #[error("audio host {name} is not available: {reason}")]
    HostUnavailable {
        /// The host's name.
        name: String,
        /// What cpal said.
        reason: String,
    },
    /// The host's devices could not be listed.
    #[error("cannot list the devices of host {host}: {reason}")]
    Enumerate {
        /// The host's name.
        host: String,
        /// What cpal said.
        reason: String,
    },
    /// Nothing matches the device selector.
    #[error("no {dir} device matches '{sel}' on host {host}; `brink devices` lists them")]
    NoInput {
        /// "input" or "output".
        dir: &'static str,
        /// The selector as given.
        sel: String,
        /// The host's name.
        host: String,
    },
    /// The selector matches more than one input device.
    #[error(
        "'{sel}' matches several {dir} devices on host {host}: {candidates}; \
         give its number or id from `brink devices`"
    )]
    Ambiguous {
        /// "input" or "output".
        dir: &'static str,
        /// The selector as given.
        sel: String,
        /// The host's name.
        host: String,
        /// The devices it matches (`#N name (id)`), comma-separated.
        candidates: String,
    },
    /// A device number beyond the listing.
    #[error(
        "there is no device #{index} on host {host} (it lists {count}); `brink devices` lists them"
    )]
    NoIndex {
        /// The number as given (1-based).
        index: usize,
        /// The host's name.
        host: String,
        /// How many devices the host lists.
        count: usize,
    },
    /// The chosen device cannot capture (or play, for an output).
    #[error("device '{device}' has no {dir} channels; `brink devices` lists the {dir}s")]
    NotInput {
        /// "input" or "output".
        dir: &'static str,
        /// The device's name.
        device: String,
    },
    /// No device was named and the host has no default input.
    #[error("host {host} has no default {dir} device; name one (`brink devices` lists them)")]
    NoDefaultInput {
        /// "input" or "output".
        dir: &'static str,
        /// The host's name.
        host: String,
    },
    /// A channel list that cannot be used.
    #[error("channel list '{spec}': {reason}")]
    Channels {
        /// The list as given.
        spec: String,
        /// What is wrong with it.
        reason: String,
    },
    /// The device's input formats could not be read.
    #[error("cannot read the input formats of '{device}': {reason}")]
    Formats {
        /// The device's name.
        device: String,
        /// What cpal said.
        reason: String,
    },
    /// The device does not capture at the rate asked for.
    #[error("'{device}' cannot capture at {rate} Hz (it offers {offered})")]
    Rate {
        /// The device's name.
        device: String,
        /// The rate asked for.
        rate: u32,
        /// The rates it offers.
        offered: String,
    },
    /// The device does not capture the number of channels the ring was made for.
    #[error("'{device}' cannot capture {channels} channels (it offers {offered})")]
    ChannelCount {
        /// The device's name.
        device: String,
        /// The count asked for.
        channels: usize,
        /// The counts it offers.
        offered: String,
    },
    /// Every input format of the device is one brink cannot read (DSD, for example).
    #[error("'{device}' offers no sample format brink can read (it offers {offered})")]
    Format {
        /// The device's name.
        device: String,
        /// The formats it offers.
        offered: String,
    },
    /// The stream could not be built.
    #[error("cannot open '{device}' for capture: {reason}")]
    Open {
        /// The device's name.
        device: String,
        /// What cpal said.
        reason: String,
    },
    /// The stream could not be started or paused.
    #[error("cannot {action} capture from '{device}': {reason}")]
    Control {
        /// "start" or "pause".
        action: &'static str,
        /// The device's name.
        device: String,
        /// What cpal said.
        reason: String,
    },
}

/// Trouble reported by a running stream (through cpal's error callback).
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum CaptureFault {
    /// The device or its host went away, or the stream must be rebuilt; no more frames will come
    /// from this stream.
    #[error("input device lost: {0}")]
    DeviceLost(String),
    /// Any other stream error; the stream may go on.
    #[error("input stream error: {0}")]
    Other(String),
}

/// What was opened.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct StreamInfo {
    /// Frames per second.
    pub sample_rate: u32,
    /// Channels per frame.
    pub channels: usize,
    /// The format the device delivers (cpal's name: "f32", "i16", "i24", ...); the ring always
    /// holds f32.
    pub sample_format: String,
    /// The device's name.
    pub device: String,
}

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

/// The device's name, or a stand-in when it cannot be read.
pub fn device_name(device: &cpal::Device) -> String {
    match device.description() {
        Ok(d) => d.name().to_owned(),
        Err(e) => format!("(unnamed device: {e})"),
    }
}

/// What [`open_input`] would open on `device` (at `want_rate`, or the device's preferred rate),
/// with the device's preferred channel count: used to size the ring before opening.
pub fn probe_input(
    device: &cpal::Device,
    want_rate: Option<u32>,
) -> Result<StreamInfo, CaptureError> {
    plan(device, want_rate, None).map(|(info, _)| info)
}

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

/// A sample type the capture path reads, with its conversion to f32 at full scale ±1.
pub trait UnitSample: Copy + Send + 'static {
    /// The value at full scale ±1: an n-bit signed code `c` is `c / 2^(n−1)`; unsigned codes are
    /// centred on `2^(n−1)` first; floats pass through.
    fn to_unit(self) -> f32;
}

impl UnitSample for f32 {
    fn to_unit(self) -> f32 {
        self
    }
}

impl UnitSample for f64 {
    fn to_unit(self) -> f32 {
        self as f32
    }
}

impl UnitSample for i8 {
    fn to_unit(self) -> f32 {
        f32::from(self) / 128.0
    }
}

impl UnitSample for i16 {
    fn to_unit(self) -> f32 {
        f32::from(self) / 32_768.0
    }
}

impl UnitSample for I24 {
    fn to_unit(self) -> f32 {
        // 24 bits fit the f32 mantissa: exact.
        self.inner() as f32 / 8_388_608.0
    }
}

impl UnitSample for i32 {
    fn to_unit(self) -> f32 {
        (f64::from(self) / 2_147_483_648.0) as f32
    }
}

impl UnitSample for i64 {
    fn to_unit(self) -> f32 {
        (self as f64 / 9_223_372_036_854_775_808.0) as f32
    }
}

impl UnitSample for u8 {
    fn to_unit(self) -> f32 {
        (f32::from(self) - 128.0) / 128.0
    }
}

impl UnitSample for u16 {
    fn to_unit(self) -> f32 {
        (f32::from(self) - 32_768.0) / 32_768.0
    }
}

impl UnitSample for U24 {
    fn to_unit(self) -> f32 {
        (self.inner() - 8_388_608) as f32 / 8_388_608.0
    }
}

impl UnitSample for u32 {
    fn to_unit(self) -> f32 {
        ((f64::from(self) - 2_147_483_648.0) / 2_147_483_648.0) as f32
    }
}

impl UnitSample for u64 {
    fn to_unit(self) -> f32 {
        // Flipping the top bit centres the code: the result read as i64 is `code - 2^63`.
        i64::from_ne_bytes((self ^ (1 << 63)).to_ne_bytes()).to_unit()
    }
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

/// Preference among formats (lower is better); `None` for those brink cannot read.
fn format_rank(f: SampleFormat) -> Option<u8> {
    Some(match f {
        SampleFormat::F32 => 0,
        SampleFormat::I32 => 1,
        SampleFormat::I24 => 2,
        SampleFormat::F64 => 3,
        SampleFormat::I16 => 4,
        SampleFormat::U32 => 5,
        SampleFormat::U24 => 6,
        SampleFormat::U16 => 7,
        SampleFormat::I64 => 8,
        SampleFormat::U64 => 9,
        SampleFormat::I8 => 10,
        SampleFormat::U8 => 11,
        _ => return None,
    })
}

/// Rates tried, in order, when none is asked for and the device's default is not offered.
const PREFERRED_RATES: [u32; 4] = [48_000, 44_100, 96_000, 88_200];

fn plan(
    device: &cpal::Device,
    want_rate: Option<u32>,
    want_channels: Option<usize>,
) -> Result<(StreamInfo, SampleFormat), CaptureError> {
    let name = device_name(device);
    let ranges: Vec<SupportedStreamConfigRange> = device
        .supported_input_configs()
        .map_err(|e| CaptureError::Formats {
            device: name.clone(),
            reason: e.to_string(),
        })?
        .collect();
    let default = device
        .default_input_config()
        .ok()
        .map(|c| (c.channels(), c.sample_rate()));
    let (channels, sample_rate, format) =
        choose_config(&name, &ranges, default, want_rate, want_channels)?;
    Ok((
        StreamInfo {
            sample_rate,
            channels,
            sample_format: format.to_string(),
            device: name,
        },
        format,
    ))
}

/// Pick (channels, rate, format) among the device's input `ranges`. Channels: `want_channels`,
/// else the default config's, else the most offered. Rate: `want_rate` (an error when not
/// offered), else the default config's, else 48 k, 44.1 k, 96 k, 88.2 k, else the highest.
/// Format: f32 first, then the widest integer.
pub fn choose_config(
    device: &str,
    ranges: &[SupportedStreamConfigRange],
    default: Option<(u16, u32)>,
    want_rate: Option<u32>,
    want_channels: Option<usize>,
) -> Result<(usize, u32, SampleFormat), CaptureError> {
    let usable: Vec<&SupportedStreamConfigRange> =
        ranges.iter().filter(|r| r.channels() > 0).collect();
    if usable.is_empty() {
        return Err(CaptureError::NotInput {
            dir: "input",
            device: device.to_owned(),
        });
    }
    let readable: Vec<&SupportedStreamConfigRange> = usable
        .iter()
        .copied()
        .filter(|r| format_rank(r.sample_format()).is_some())
        .collect();
    if readable.is_empty() {
        return Err(CaptureError::Format {
            device: device.to_owned(),
            offered: list_formats(&usable),
        });
    }
    let channels = match want_channels {
        Some(c) => c,
        None => match default {
            Some((c, _)) if readable.iter().any(|r| r.channels() == c) => usize::from(c),
            _ => readable
                .iter()
                .map(|r| usize::from(r.channels()))
                .max()
                .unwrap_or(1),
        },
    };
    let with_channels: Vec<&SupportedStreamConfigRange> = readable
        .iter()
        .copied()
        .filter(|r| usize::from(r.channels()) == channels)
        .collect();
    if with_channels.is_empty() {
        let mut counts: Vec<u16> = readable.iter().map(|r| r.channels()).collect();
        counts.sort_unstable();
        counts.dedup();
        let offered: Vec<String> = counts.iter().map(u16::to_string).collect();
        return Err(CaptureError::ChannelCount {
            device: device.to_owned(),
            channels,
            offered: offered.join(", "),
        });
    }
    let offers = |rate: u32| with_channels.iter().any(|r| r.contains_rate(rate));
    let rate = match want_rate {
        Some(rate) if offers(rate) => rate,
        Some(rate) => {
            return Err(CaptureError::Rate {
                device: device.to_owned(),
                rate,
                offered: list_rates(&with_channels),
            })
        }
        None => default
            .map(|(_, r)| r)
            .into_iter()
            .chain(PREFERRED_RATES)
            .find(|&r| offers(r))
            .or_else(|| with_channels.iter().map(|r| r.max_sample_rate()).max())
            .unwrap_or(48_000),
    };
    let format = with_channels
        .iter()
        .filter(|r| r.contains_rate(rate))
        .filter_map(|r| format_rank(r.sample_format()).map(|k| (k, r.sample_format())))
        .min()
        .map(|(_, f)| f)
        .unwrap_or(SampleFormat::F32);
    Ok((channels, rate, format))
}

fn list_formats(ranges: &[&SupportedStreamConfigRange]) -> String {
    let mut f: Vec<SampleFormat> = ranges.iter().map(|r| r.sample_format()).collect();
    f.sort_unstable();
    f.dedup();
    let names: Vec<String> = f.iter().map(SampleFormat::to_string).collect();
    names.join(", ")
}

fn list_rates(ranges: &[&SupportedStreamConfigRange]) -> String {
    let mut r: Vec<(u32, u32)> = ranges
        .iter()
        .map(|r| (r.min_sample_rate(), r.max_sample_rate()))
        .collect();
    r.sort_unstable();
    r.dedup();
    let names: Vec<String> = r
        .iter()
        .map(|&(lo, hi)| {
            if lo == hi {
                format!("{lo} Hz")
            } else {
                format!("{lo}-{hi} Hz")
            }
        })
        .collect();
    names.join(", ")
}

/// A synthetic cpal host for tests (cpal's `custom` host): devices with scripted input streams
/// whose thread calls the data callback with deterministic samples and injects errors.
#[cfg(test)]
pub(crate) mod synthetic {
    use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
    use std::sync::Arc;
    use std::thread::JoinHandle;
    use std::time::{Duration, Instant};

    use cpal::traits::{DeviceTrait, HostTrait, StreamTrait};
    use cpal::{
        Data, DeviceDescription, DeviceDescriptionBuilder, DeviceId, Error, ErrorKind, FrameCount,
        HostId, InputCallbackInfo, InputStreamTimestamp, OutputCallbackInfo, SampleFormat,
        SizedSample, StreamConfig, StreamInstant, SupportedBufferSize, SupportedStreamConfig,
        SupportedStreamConfigRange, I24,
    };

    /// Hand `buf` to `f` as cpal's type-erased buffer.
    #[allow(unsafe_code)] // cpal has no safe constructor for `Data`: a host must use from_parts.
    fn with_data<T: SizedSample>(buf: &[T], f: impl FnOnce(&Data)) {
        // SAFETY: the pointer and length describe `buf`, whose element type is the one named by
        // `T::FORMAT`; the `Data` lives only for the call to `f`, inside the borrow of `buf`, and
        // an input callback gets `&Data`, through which cpal only reads.
        let data = unsafe { Data::from_parts(buf.as_ptr() as *mut (), buf.len(), T::FORMAT) };
        f(&data);
    }

    /// A sample type the synthetic stream can produce: sample number `n` of the stream has a
    /// known value.
    pub trait Synth: SizedSample + Default + Send + 'static {
        /// The value of interleaved sample `n`.
        fn nth(n: u64) -> Self;
    }

    impl Synth for f32 {
        fn nth(n: u64) -> f32 {
            ((n % 4096) as f32 - 2048.0) / 2048.0
        }
    }

    impl Synth for i16 {
        fn nth(n: u64) -> i16 {
            // 7 is coprime with 2^16: every code, extremes included, comes round.
            i16::from_ne_bytes(((n.wrapping_mul(7) % 65_536) as u16).to_ne_bytes())
        }
    }

    impl Synth for I24 {
        fn nth(n: u64) -> I24 {
            let code = (n.wrapping_mul(7_919) % 16_777_216) as i32 - 8_388_608;
            I24::new(code).unwrap_or_default()
        }
    }

    /// A scripted error: raised after callback `after` (1-based). A `DeviceNotAvailable` also
    /// ends the stream, as ALSA's worker does.
    #[derive(Debug, Clone, Copy)]
    pub struct Inject {
        pub after: u64,
        pub kind: ErrorKind,
    }

    /// How streams of a device behave, and what they did.
    #[derive(Debug)]
    pub struct Script {
        /// Frames per callback.
        pub period: usize,
        /// Callbacks before the stream goes quiet (`None`: no end).
        pub callbacks: Option<u64>,
        /// Time between the starts of callbacks (zero: back to back).
        pub pace: Duration,
        pub errors: Vec<Inject>,
        /// Callbacks made.
        pub done: AtomicU64,
        /// Longest and total time spent inside the data callback (ns).
        pub longest_ns: AtomicU64,
        pub total_ns: AtomicU64,
        /// Set when the stream's thread has ended.
        pub ended: AtomicBool,
    }

    impl Script {
        pub fn new(period: usize, callbacks: Option<u64>, pace: Duration) -> Script {
            Script {
                period,
                callbacks,
                pace,
                errors: Vec::new(),
                done: AtomicU64::new(0),
                longest_ns: AtomicU64::new(0),
                total_ns: AtomicU64::new(0),
                ended: AtomicBool::new(false),
            }
        }

        pub fn with_errors(mut self, errors: &[(u64, ErrorKind)]) -> Script {
            self.errors = errors
                .iter()
                .map(|&(after, kind)| Inject { after, kind })
                .collect();
            self
        }

        pub fn done(&self) -> u64 {
            self.done.load(Ordering::Acquire)
        }
    }

    #[derive(Clone)]
    pub struct SynthDevice {
        pub name: String,
        pub inputs: Vec<SupportedStreamConfigRange>,
        pub outputs: Vec<SupportedStreamConfigRange>,
        pub default_input: Option<(u16, u32)>,
        pub script: Arc<Script>,
    }

    impl SynthDevice {
        /// An input device offering `formats` at `channels` channels and `rates` (min, max).
        pub fn input(
            name: &str,
            channels: u16,
            rates: (u32, u32),
            formats: &[SampleFormat],
            script: Script,
        ) -> SynthDevice {
            SynthDevice {
                name: name.to_owned(),
                inputs: formats
                    .iter()
                    .map(|&f| range(channels, rates.0, rates.1, f))
                    .collect(),
                outputs: Vec::new(),
                default_input: None,
                script: Arc::new(script),
            }
        }

        pub fn output(name: &str, channels: u16) -> SynthDevice {
            SynthDevice {
                name: name.to_owned(),
                inputs: Vec::new(),
                outputs: vec![range(channels, 48_000, 48_000, SampleFormat::F32)],
                default_input: None,
                script: Arc::new(Script::new(64, Some(0), Duration::ZERO)),
            }
        }

        pub fn into_cpal(self) -> cpal::Device {
            cpal::Device::from(cpal::platform::CustomDevice::from_device(self))
        }
    }

    pub fn range(channels: u16, lo: u32, hi: u32, f: SampleFormat) -> SupportedStreamConfigRange {
        SupportedStreamConfigRange::new(
            channels,
            lo,
            hi,
            SupportedBufferSize::Range { min: 16, max: 8192 },
            f,
        )
    }

    impl std::fmt::Debug for SynthDevice {
        fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
            f.debug_tuple("SynthDevice").field(&self.name).finish()
        }
    }

    impl std::fmt::Display for SynthDevice {
        fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
            f.write_str(&self.name)
        }
    }

    impl PartialEq for SynthDevice {
        fn eq(&self, other: &Self) -> bool {
            self.name == other.name
        }
    }

    impl Eq for SynthDevice {}

    impl std::hash::Hash for SynthDevice {
        fn hash<H: std::hash::Hasher>(&self, state: &mut H) {
            self.name.hash(state);
        }
    }

    #[derive(Clone)]
    pub struct SynthHost {
        pub devices: Vec<SynthDevice>,
        pub default_input: Option<usize>,
        pub default_output: Option<usize>,
    }

    impl SynthHost {
        pub fn into_cpal(self) -> cpal::Host {
            cpal::Host::from(cpal::platform::CustomHost::from_host(self))
        }
    }

    impl HostTrait for SynthHost {
        type Devices = std::vec::IntoIter<SynthDevice>;
        type Device = SynthDevice;

        fn is_available() -> bool {
            true
        }

        fn devices(&self) -> Result<Self::Devices, Error> {
            Ok(self.devices.clone().into_iter())
        }

        fn default_input_device(&self) -> Option<SynthDevice> {
            self.default_input
                .and_then(|i| self.devices.get(i).cloned())
        }

        fn default_output_device(&self) -> Option<SynthDevice> {
            self.default_output
                .and_then(|i| self.devices.get(i).cloned())
        }
    }

    pub struct SynthStream {
        playing: Arc<AtomicBool>,
        exit: Arc<AtomicBool>,
        start: Instant,
        period: FrameCount,
        handle: Option<JoinHandle<()>>,
    }

    impl Drop for SynthStream {
        fn drop(&mut self) {
            self.exit.store(true, Ordering::Release);
            if let Some(h) = self.handle.take() {
                let _ = h.join();
            }
        }
    }

    impl StreamTrait for SynthStream {
        fn play(&self) -> Result<(), Error> {
            self.playing.store(true, Ordering::Release);
            Ok(())
        }

        fn pause(&self) -> Result<(), Error> {
            self.playing.store(false, Ordering::Release);
            Ok(())
        }

        fn now(&self) -> StreamInstant {
            let e = self.start.elapsed();
            StreamInstant::new(e.as_secs(), e.subsec_nanos())
        }

        fn buffer_size(&self) -> Result<FrameCount, Error> {
            Ok(self.period)
        }
    }

    impl DeviceTrait for SynthDevice {
        type SupportedInputConfigs = std::vec::IntoIter<SupportedStreamConfigRange>;
        type SupportedOutputConfigs = std::vec::IntoIter<SupportedStreamConfigRange>;
        type Stream = SynthStream;

        fn description(&self) -> Result<DeviceDescription, Error> {
            Ok(DeviceDescriptionBuilder::new(&self.name).build())
        }

        fn id(&self) -> Result<DeviceId, Error> {
            Ok(DeviceId::new(
                HostId::Custom,
                format!("synth:{}", self.name),
            ))
        }

        fn supported_input_configs(&self) -> Result<Self::SupportedInputConfigs, Error> {
            Ok(self.inputs.clone().into_iter())
        }

        fn supported_output_configs(&self) -> Result<Self::SupportedOutputConfigs, Error> {
            Ok(self.outputs.clone().into_iter())
        }

        fn default_input_config(&self) -> Result<SupportedStreamConfig, Error> {
            let first = self.inputs.first().ok_or(ErrorKind::UnsupportedOperation)?;
            let (channels, rate) = self
                .default_input
                .unwrap_or((first.channels(), first.max_sample_rate()));
            Ok(SupportedStreamConfig::new(
                channels,
                rate,
                *first.buffer_size(),
                first.sample_format(),
            ))
        }

        fn default_output_config(&self) -> Result<SupportedStreamConfig, Error> {
            let first = self
                .outputs
                .first()
                .ok_or(ErrorKind::UnsupportedOperation)?;
            Ok(first.with_max_sample_rate())
        }

        fn build_input_stream_raw<D, E>(
            &self,
            config: StreamConfig,
            sample_format: SampleFormat,
            data_callback: D,
            error_callback: E,
            _timeout: Option<Duration>,
        ) -> Result<SynthStream, Error>
        where
            D: FnMut(&Data, &InputCallbackInfo) + Send + 'static,
            E: FnMut(Error) + Send + 'static,
        {
            let offered = self.inputs.iter().any(|r| {
                r.channels() == config.channels
                    && r.sample_format() == sample_format
                    && r.contains_rate(config.sample_rate)
            });
            if !offered {
                return Err(ErrorKind::UnsupportedConfig.into());
            }
            let playing = Arc::new(AtomicBool::new(false));
            let exit = Arc::new(AtomicBool::new(false));
            let start = Instant::now();
            let run = Run {
                script: Arc::clone(&self.script),
                channels: usize::from(config.channels),
                playing: Arc::clone(&playing),
                exit: Arc::clone(&exit),
                start,
            };
            let handle = match sample_format {
                SampleFormat::F32 => spawn::<f32, _, _>(run, data_callback, error_callback),
                SampleFormat::I16 => spawn::<i16, _, _>(run, data_callback, error_callback),
                SampleFormat::I24 => spawn::<I24, _, _>(run, data_callback, error_callback),
                _ => return Err(ErrorKind::UnsupportedConfig.into()),
            };
            Ok(SynthStream {
                playing,
                exit,
                start,
                period: self.script.period as FrameCount,
                handle: Some(handle),
            })
        }

        fn build_output_stream_raw<D, E>(
            &self,
            _: StreamConfig,
            _: SampleFormat,
            _: D,
            _: E,
            _: Option<Duration>,
        ) -> Result<SynthStream, Error>
        where
            D: FnMut(&mut Data, &OutputCallbackInfo) + Send + 'static,
            E: FnMut(Error) + Send + 'static,
        {
            Err(ErrorKind::UnsupportedOperation.into())
        }
    }

    struct Run {
        script: Arc<Script>,
        channels: usize,
        playing: Arc<AtomicBool>,
        exit: Arc<AtomicBool>,
        start: Instant,
    }

    fn spawn<T, D, E>(run: Run, mut data_callback: D, mut error_callback: E) -> JoinHandle<()>
    where
        T: Synth,
        D: FnMut(&Data, &InputCallbackInfo) + Send + 'static,
        E: FnMut(Error) + Send + 'static,
    {
        std::thread::spawn(move || {
            let s = &run.script;
            let mut buf = vec![T::default(); s.period * run.channels];
            let mut n = 0u64;
            let mut k = 0u64;
            let mut next = Instant::now();
            let mut lost = false;
            while !run.exit.load(Ordering::Acquire) {
                let finished = s.callbacks.is_some_and(|c| k >= c);
                if lost || finished || !run.playing.load(Ordering::Acquire) {
                    std::thread::sleep(Duration::from_millis(1));
                    next = Instant::now();
                    continue;
                }
                for v in buf.iter_mut() {
                    *v = T::nth(n);
                    n += 1;
                }
                let e = run.start.elapsed();
                let at = StreamInstant::new(e.as_secs(), e.subsec_nanos());
                let info = InputCallbackInfo::new(InputStreamTimestamp {
                    callback: at,
                    capture: at,
                });
                let t0 = Instant::now();
                with_data(&buf, |d| data_callback(d, &info));
                let took = t0.elapsed().as_nanos() as u64;
                s.longest_ns.fetch_max(took, Ordering::Relaxed);
                s.total_ns.fetch_add(took, Ordering::Relaxed);
                k += 1;
                for inject in s.errors.iter().filter(|i| i.after == k) {
                    error_callback(Error::new(inject.kind));
                    lost |= inject.kind == ErrorKind::DeviceNotAvailable;
                }
                s.done.store(k, Ordering::Release);
                next += s.pace;
                let now = Instant::now();
                if next > now {
                    std::thread::sleep(next - now);
                }
            }
            s.ended.store(true, Ordering::Release);
        })
    }
}

#[cfg(test)]
mod tests {
    use std::time::{Duration, Instant};

    use cpal::ErrorKind;

    use super::synthetic::{Script, Synth, SynthDevice};
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
    fn integer_codes_map_to_full_scale() {
        assert_eq!(i8::MIN.to_unit(), -1.0);
        assert_eq!(64i8.to_unit(), 0.5);
        assert_eq!(I24::new(-8_388_608).map(I24::to_unit), Some(-1.0));
        assert_eq!(I24::new(4_194_304).map(I24::to_unit), Some(0.5));
        assert_eq!(i32::MIN.to_unit(), -1.0);
        assert_eq!((1i32 << 30).to_unit(), 0.5);
        assert_eq!(i64::MIN.to_unit(), -1.0);
        assert_eq!((1i64 << 62).to_unit(), 0.5);
        assert_eq!(0u8.to_unit(), -1.0);
        assert_eq!(128u8.to_unit(), 0.0);
        assert_eq!(0u16.to_unit(), -1.0);
        assert_eq!(32_768u16.to_unit(), 0.0);
        assert_eq!(49_152u16.to_unit(), 0.5);
        assert_eq!(U24::new(0).map(U24::to_unit), Some(-1.0));
        assert_eq!(U24::new(8_388_608).map(U24::to_unit), Some(0.0));
        assert_eq!(0u32.to_unit(), -1.0);
        assert_eq!((3u32 << 30).to_unit(), 0.5);
        assert_eq!(0u64.to_unit(), -1.0);
        assert_eq!((1u64 << 63).to_unit(), 0.0);
        assert_eq!((3u64 << 62).to_unit(), 0.5);
        assert_eq!(0.25f64.to_unit(), 0.25);
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
    fn f32_is_preferred_then_the_widest_integer() {
        let r = |f| synthetic::range(2, 44_100, 48_000, f);
        let pick = |ranges: &[SupportedStreamConfigRange]| {
            choose_config("d", ranges, None, None, None).map(|(_, _, f)| f)
        };
        use SampleFormat::*;
        assert_eq!(pick(&[r(I16), r(F32), r(I32)]), Ok(F32));
        assert_eq!(pick(&[r(I16), r(I32), r(U8)]), Ok(I32));
        assert_eq!(pick(&[r(U16), r(I16)]), Ok(I16));
        assert_eq!(pick(&[r(U8)]), Ok(U8));
        let dsd = pick(&[r(DsdU8)]).map_err(|e| e.to_string());
        assert_eq!(
            dsd,
            Err("'d' offers no sample format brink can read (it offers dsdu8)".into())
        );
        assert_eq!(
            pick(&[]).map_err(|e| e.to_string()),
            Err("device 'd' has no input channels; `brink devices` lists the inputs".into())
        );
    }

    #[test]
    fn rate_and_channels_follow_the_request_the_default_or_the_usual_rates() {
        let ranges = [
            synthetic::range(2, 44_100, 96_000, SampleFormat::I16),
            synthetic::range(2, 44_100, 44_100, SampleFormat::F32),
            synthetic::range(8, 8_000, 192_000, SampleFormat::I32),
        ];
        let c = |default, rate, ch| choose_config("Card", &ranges, default, rate, ch);
        // Default config's channels and rate.
        assert_eq!(
            c(Some((2, 96_000)), None, None),
            Ok((2, 96_000, SampleFormat::I16))
        );
        // No default: the most channels, 48 kHz.
        assert_eq!(c(None, None, None), Ok((8, 48_000, SampleFormat::I32)));
        // f32 only where it is offered.
        assert_eq!(
            c(None, Some(44_100), Some(2)),
            Ok((2, 44_100, SampleFormat::F32))
        );
        assert_eq!(c(None, None, Some(2)), Ok((2, 48_000, SampleFormat::I16)));
        assert_eq!(
            c(None, Some(192_000), Some(2)).map_err(|e| e.to_string()),
            Err("'Card' cannot capture at 192000 Hz (it offers 44100 Hz, 44100-96000 Hz)".into())
        );
        assert_eq!(
            c(None, None, Some(4)).map_err(|e| e.to_string()),
            Err("'Card' cannot capture 4 channels (it offers 2, 8)".into())
        );
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
