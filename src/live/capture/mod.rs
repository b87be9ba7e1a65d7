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
//!
//! The parts: `error` (the error types), `negotiate` (what to open on a device), `convert`
//! (sample formats to f32), `stream` (opening the stream, its callbacks) and `synthetic` (a
//! scripted cpal host for tests).

mod convert;
mod error;
mod negotiate;
mod stream;
#[doc(hidden)]
pub mod synthetic;

pub use convert::UnitSample;
pub use error::{CaptureError, CaptureFault};
pub use negotiate::{choose_config, device_name, probe_input, StreamInfo};
pub use stream::{
    callback_body, callback_body_f32, callback_body_i16, fault_of, open_input, Capture,
};

#[cfg(doc)]
use crate::live::ring::CaptureWriter;
