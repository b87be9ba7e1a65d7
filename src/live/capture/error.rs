//! The capture error types: [`CaptureError`] for a host, device or stream that could not be had,
//! [`CaptureFault`] for trouble a running stream reports.

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
