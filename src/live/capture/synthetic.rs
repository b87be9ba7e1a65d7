//! A synthetic cpal host (cpal's `custom` host): devices with scripted input streams whose
//! thread calls the data callback with deterministic samples and injects errors.
//!
//! Test support, not part of brink's interface: it serves the crate's own unit tests and the
//! allocation test binary (`tests/alloc_callback.rs`), which wraps each data-callback call in
//! its counting allocator through [`Script::around_callback`]. It is public (hidden from the docs)
//! only so that test binary can use it.

use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::Arc;
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

use cpal::traits::{DeviceTrait, HostTrait, StreamTrait};
use cpal::{
    Data, DeviceDescription, DeviceDescriptionBuilder, DeviceId, Error, ErrorKind, FrameCount,
    HostId, InputCallbackInfo, InputStreamTimestamp, OutputCallbackInfo, SampleFormat, SizedSample,
    StreamConfig, StreamInstant, SupportedBufferSize, SupportedStreamConfig,
    SupportedStreamConfigRange, I24,
};

/// Hand `buf` to `f` as cpal's type-erased buffer. The one unsafe call of the module.
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
    /// The callback (1-based) after which the error is raised.
    pub after: u64,
    /// The error raised.
    pub kind: ErrorKind,
}

/// What a stream's thread calls around each data-callback invocation, handing it the
/// invocation to make: it must call it exactly once. The allocation test counts heap operations
/// inside it; nothing else of the stream's thread runs inside it.
#[derive(Clone)]
pub struct Around(Arc<AroundFn>);

/// The wrapper's type: it gets the invocation to make.
type AroundFn = dyn Fn(&mut dyn FnMut()) + Send + Sync;

impl Around {
    /// Wrap `f`, which gets the data-callback invocation to make.
    pub fn new(f: impl Fn(&mut dyn FnMut()) + Send + Sync + 'static) -> Around {
        Around(Arc::new(f))
    }

    /// Make the invocation `call` through the wrapper.
    fn call(&self, call: &mut dyn FnMut()) {
        (self.0)(call);
    }
}

impl std::fmt::Debug for Around {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("Around")
    }
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
    /// Errors raised through the error callback.
    pub errors: Vec<Inject>,
    /// Called around each data-callback invocation (`None`: the callback is called directly).
    pub around: Option<Around>,
    /// Callbacks made.
    pub done: AtomicU64,
    /// Longest time spent inside the data callback (ns).
    pub longest_ns: AtomicU64,
    /// Total time spent inside the data callback (ns).
    pub total_ns: AtomicU64,
    /// Set when the stream's thread has ended.
    pub ended: AtomicBool,
}

impl Script {
    /// Streams of `period` frames a callback, `callbacks` of them (`None`: no end), one every
    /// `pace`, without errors.
    pub fn new(period: usize, callbacks: Option<u64>, pace: Duration) -> Script {
        Script {
            period,
            callbacks,
            pace,
            errors: Vec::new(),
            around: None,
            done: AtomicU64::new(0),
            longest_ns: AtomicU64::new(0),
            total_ns: AtomicU64::new(0),
            ended: AtomicBool::new(false),
        }
    }

    /// Raise each `(after, kind)` after callback `after`.
    pub fn with_errors(mut self, errors: &[(u64, ErrorKind)]) -> Script {
        self.errors = errors
            .iter()
            .map(|&(after, kind)| Inject { after, kind })
            .collect();
        self
    }

    /// Call `f` around each data-callback invocation, handing it the invocation to make.
    pub fn around_callback(
        mut self,
        f: impl Fn(&mut dyn FnMut()) + Send + Sync + 'static,
    ) -> Script {
        self.around = Some(Around::new(f));
        self
    }

    /// Callbacks made so far.
    pub fn done(&self) -> u64 {
        self.done.load(Ordering::Acquire)
    }
}

/// A device of the synthetic host; devices are equal when their names are.
#[derive(Clone)]
pub struct SynthDevice {
    /// Its name (and, prefixed `synth:`, its id).
    pub name: String,
    /// Its input configurations.
    pub inputs: Vec<SupportedStreamConfigRange>,
    /// Its output configurations (no output stream can be built).
    pub outputs: Vec<SupportedStreamConfigRange>,
    /// The default input config's (channels, rate) (`None`: the first input range's channels
    /// at its highest rate).
    pub default_input: Option<(u16, u32)>,
    /// How its input streams behave, shared by all of them.
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

    /// An output-only device of `channels` channels at 48 kHz.
    pub fn output(name: &str, channels: u16) -> SynthDevice {
        SynthDevice {
            name: name.to_owned(),
            inputs: Vec::new(),
            outputs: vec![range(channels, 48_000, 48_000, SampleFormat::F32)],
            default_input: None,
            script: Arc::new(Script::new(64, Some(0), Duration::ZERO)),
        }
    }

    /// The device as cpal's.
    pub fn into_cpal(self) -> cpal::Device {
        cpal::Device::from(cpal::platform::CustomDevice::from_device(self))
    }
}

/// An input or output range of `channels` channels at `lo`..=`hi` Hz in format `f`.
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

/// The synthetic host: its devices and which are the defaults.
#[derive(Clone)]
pub struct SynthHost {
    /// Its devices, in listing order.
    pub devices: Vec<SynthDevice>,
    /// The index of the default input device.
    pub default_input: Option<usize>,
    /// The index of the default output device.
    pub default_output: Option<usize>,
}

impl SynthHost {
    /// The host as cpal's.
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

/// A stream of a synthetic device: a thread calling the data callback while playing.
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
            with_data(&buf, |d| match &s.around {
                Some(around) => around.call(&mut || data_callback(d, &info)),
                None => data_callback(d, &info),
            });
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
