//! Choosing what to open on a device: the channel count, rate and sample format among the
//! device's input configurations ([`choose_config`]), and the [`StreamInfo`] that describes it.

use cpal::traits::DeviceTrait;
use cpal::{SampleFormat, SupportedStreamConfigRange};
use serde::Serialize;

#[cfg(doc)]
use super::open_input;
use super::CaptureError;

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

/// What to open on `device`: [`choose_config`] among its input configurations, with its
/// default config as a hint; also the format to build the stream in.
pub(super) fn plan(
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

#[cfg(test)]
mod tests {
    use super::super::synthetic;
    use super::*;

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
}
