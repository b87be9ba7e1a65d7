//! Audio hosts and their devices: a listing for people (`brink devices`) and scripts
//! (`brink devices --json`), and the helpers that pick a host, an input device and channels from
//! what was typed on the command line.
//!
//! Devices are numbered from 1 in the order the host lists them; that number (`3` or `#3`) is one
//! way to pick a device, besides its exact name or id and a unique piece of its name or id.

use std::io::{self, Write};

use cpal::traits::{DeviceTrait, HostTrait};
use cpal::{HostId, SupportedStreamConfigRange};
use serde::Serialize;

use super::capture::{device_name, CaptureError};

/// One host and its devices.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct HostReport {
    /// The host's name ("alsa", "jack", ...): what `find_host` takes.
    pub host: String,
    /// Whether it is the platform's default host.
    pub default: bool,
    /// Why the host or its device list could not be had.
    pub error: Option<String>,
    /// Its devices, in the host's order.
    pub devices: Vec<DeviceReport>,
}

/// One device.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct DeviceReport {
    /// Its number in the listing, from 1 (`#N` picks it).
    pub index: usize,
    /// Its name.
    pub name: String,
    /// The host's identifier for it (on ALSA the PCM name, e.g. `hw:CARD=PCH,DEV=0`), when the
    /// host gives one. Unlike names, ids are unique.
    pub id: Option<String>,
    /// The host's default input device.
    pub default_input: bool,
    /// The host's default output device.
    pub default_output: bool,
    /// Most input channels (0: no input); the same as `input.channels`, at the top for scripts.
    pub input_channels: usize,
    /// Most output channels (0: no output).
    pub output_channels: usize,
    /// What it captures.
    pub input: Capabilities,
    /// What it plays.
    pub output: Capabilities,
}

/// What a device offers in one direction.
#[derive(Debug, Clone, Default, PartialEq, Eq, Serialize)]
pub struct Capabilities {
    /// The most channels offered; 0 when the device has none in this direction.
    pub channels: u16,
    /// Every channel count offered, ascending.
    pub channel_counts: Vec<u16>,
    /// Sample rates offered (Hz), as merged ranges, ascending.
    pub sample_rates: Vec<RateRange>,
    /// Sample formats offered ("f32", "i16", ...), in cpal's order.
    pub sample_formats: Vec<String>,
    /// Why the configurations could not be read.
    pub error: Option<String>,
}

/// A range of sample rates, both ends included.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct RateRange {
    /// Lowest rate (Hz).
    pub min: u32,
    /// Highest rate (Hz).
    pub max: u32,
}

/// Every available host with its devices. Hosts that fail still appear, with their error.
pub fn list() -> Vec<HostReport> {
    let default_id = cpal::default_host().id();
    cpal::available_hosts()
        .into_iter()
        .map(|id| match cpal::host_from_id(id) {
            Ok(host) => report_host(&host, id == default_id),
            Err(e) => HostReport {
                host: id.to_string(),
                default: id == default_id,
                error: Some(e.to_string()),
                devices: Vec::new(),
            },
        })
        .collect()
}

/// The report of one host.
pub fn report_host(host: &cpal::Host, is_default: bool) -> HostReport {
    let mut report = HostReport {
        host: host.id().to_string(),
        default: is_default,
        error: None,
        devices: Vec::new(),
    };
    let devices = match host.devices() {
        Ok(d) => d,
        Err(e) => {
            report.error = Some(e.to_string());
            return report;
        }
    };
    let default_in = host.default_input_device();
    let default_out = host.default_output_device();
    let is = |d: &cpal::Device, other: &Option<cpal::Device>| {
        other.as_ref().is_some_and(|o| same_device(d, o))
    };
    report.devices = devices
        .enumerate()
        .map(|(i, d)| DeviceReport {
            index: i + 1,
            name: device_name(&d),
            id: d.id().ok().map(|id| id.id().to_owned()),
            default_input: is(&d, &default_in),
            default_output: is(&d, &default_out),
            input: if d.supports_input() {
                capabilities(d.supported_input_configs())
            } else {
                Capabilities::default()
            },
            output: if d.supports_output() {
                capabilities(d.supported_output_configs())
            } else {
                Capabilities::default()
            },
            input_channels: 0,
            output_channels: 0,
        })
        .map(|mut d| {
            d.input_channels = usize::from(d.input.channels);
            d.output_channels = usize::from(d.output.channels);
            d
        })
        .collect();
    report
}

fn same_device(a: &cpal::Device, b: &cpal::Device) -> bool {
    match (a.id(), b.id()) {
        (Ok(x), Ok(y)) => x == y,
        _ => device_name(a) == device_name(b),
    }
}

fn capabilities<I>(configs: Result<I, cpal::Error>) -> Capabilities
where
    I: Iterator<Item = SupportedStreamConfigRange>,
{
    let ranges: Vec<SupportedStreamConfigRange> = match configs {
        Ok(c) => c.filter(|r| r.channels() > 0).collect(),
        Err(e) => {
            return Capabilities {
                error: Some(e.to_string()),
                ..Capabilities::default()
            }
        }
    };
    let mut counts: Vec<u16> = ranges.iter().map(|r| r.channels()).collect();
    counts.sort_unstable();
    counts.dedup();
    let mut formats: Vec<cpal::SampleFormat> = ranges.iter().map(|r| r.sample_format()).collect();
    formats.sort_unstable();
    formats.dedup();
    let mut rates: Vec<RateRange> = ranges
        .iter()
        .map(|r| RateRange {
            min: r.min_sample_rate(),
            max: r.max_sample_rate(),
        })
        .collect();
    rates.sort_unstable_by_key(|r| (r.min, r.max));
    let mut merged: Vec<RateRange> = Vec::with_capacity(rates.len());
    for r in rates {
        match merged.last_mut() {
            Some(last) if r.min <= last.max.saturating_add(1) => last.max = last.max.max(r.max),
            _ => merged.push(r),
        }
    }
    Capabilities {
        channels: counts.last().copied().unwrap_or(0),
        channel_counts: counts,
        sample_rates: merged,
        sample_formats: formats.iter().map(ToString::to_string).collect(),
        error: None,
    }
}

fn rates_text(rates: &[RateRange]) -> String {
    if rates.is_empty() {
        return "-".into();
    }
    let parts: Vec<String> = rates
        .iter()
        .map(|r| match (r.min, r.max) {
            (lo, hi) if lo == hi => lo.to_string(),
            (lo, u32::MAX) => format!("{lo}+"),
            (lo, hi) => format!("{lo}-{hi}"),
        })
        .collect();
    parts.join(", ")
}

/// Write the listing as a table: per host, one line per device with its number, default marks,
/// input and output channels, and the sample rates and formats of its input (of its output when
/// it has no input).
pub fn write_table<W: Write>(mut w: W, hosts: &[HostReport]) -> io::Result<()> {
    if hosts.is_empty() {
        writeln!(w, "no audio hosts available")?;
    }
    for (h, host) in hosts.iter().enumerate() {
        if h > 0 {
            writeln!(w)?;
        }
        let mark = if host.default { " (default host)" } else { "" };
        writeln!(w, "host {}{mark}", host.host)?;
        if let Some(e) = &host.error {
            writeln!(w, "  unavailable: {e}")?;
            continue;
        }
        if host.devices.is_empty() {
            writeln!(w, "  no devices")?;
            continue;
        }
        let label = |d: &DeviceReport| match &d.id {
            Some(id) if id != &d.name => format!("{} [{id}]", d.name),
            _ => d.name.clone(),
        };
        let width = host
            .devices
            .iter()
            .map(|d| label(d).chars().count())
            .max()
            .unwrap_or(0)
            .max("device".len());
        let num_width = host.devices.len().to_string().len() + 1;
        writeln!(
            w,
            "  {:>num_width$}  {:<width$}  {:<7}  {:>3}  {:>3}  {:<24}  formats",
            "#", "device", "default", "in", "out", "sample rates (Hz)"
        )?;
        for d in &host.devices {
            let default = match (d.default_input, d.default_output) {
                (true, true) => "in out",
                (true, false) => "in",
                (false, true) => "out",
                (false, false) => "",
            };
            let caps = if d.input.channels > 0 || d.output.channels == 0 {
                &d.input
            } else {
                &d.output
            };
            let formats = if caps.sample_formats.is_empty() {
                "-".to_owned()
            } else {
                caps.sample_formats.join(" ")
            };
            writeln!(
                w,
                "  {:>num_width$}  {:<width$}  {:<7}  {:>3}  {:>3}  {:<24}  {formats}",
                format!("#{}", d.index),
                label(d),
                default,
                d.input.channels,
                d.output.channels,
                rates_text(&caps.sample_rates),
            )?;
            for (dir, c) in [("input", &d.input), ("output", &d.output)] {
                if let Some(e) = &c.error {
                    writeln!(w, "  {:>num_width$}  ({dir}: {e})", "")?;
                }
            }
        }
    }
    Ok(())
}

/// The host named `name` ("alsa", "jack", ..., any case), or the platform's default host.
pub fn find_host(name: Option<&str>) -> Result<cpal::Host, CaptureError> {
    let Some(name) = name.map(str::trim).filter(|n| !n.is_empty()) else {
        return Ok(cpal::default_host());
    };
    let known = cpal::ALL_HOSTS
        .iter()
        .copied()
        .filter(|&id| id != HostId::Custom);
    let found = known.clone().find(|id| {
        id.name().eq_ignore_ascii_case(name) || id.to_string().eq_ignore_ascii_case(name)
    });
    match found {
        Some(id) => cpal::host_from_id(id).map_err(|e| CaptureError::HostUnavailable {
            name: id.to_string(),
            reason: e.to_string(),
        }),
        None if !cfg!(feature = "jack") && name.eq_ignore_ascii_case("jack") => {
            Err(CaptureError::HostNotBuilt {
                name: "jack".into(),
            })
        }
        None => {
            let names: Vec<String> = known.map(|id| id.to_string()).collect();
            Err(CaptureError::NoHost {
                name: name.to_owned(),
                available: names.join(", "),
            })
        }
    }
}

/// The input device `sel` names on `host`: its exact name or id, its number in the listing (`3`
/// or `#3`), or a case-insensitive piece of its name or id that only one input device has. With
/// no selector, the host's default input.
pub fn find_input(host: &cpal::Host, sel: Option<&str>) -> Result<cpal::Device, CaptureError> {
    find_device(host, sel, Direction::Input)
}

/// The output device `sel` names on `host`, chosen as [`find_input`] chooses inputs.
pub fn find_output(host: &cpal::Host, sel: Option<&str>) -> Result<cpal::Device, CaptureError> {
    find_device(host, sel, Direction::Output)
}

/// Which way a device is used.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Direction {
    Input,
    Output,
}

impl Direction {
    fn name(self) -> &'static str {
        match self {
            Direction::Input => "input",
            Direction::Output => "output",
        }
    }

    fn supported_by(self, d: &cpal::Device) -> bool {
        match self {
            Direction::Input => d.supports_input(),
            Direction::Output => d.supports_output(),
        }
    }
}

fn find_device(
    host: &cpal::Host,
    sel: Option<&str>,
    dir: Direction,
) -> Result<cpal::Device, CaptureError> {
    let host_name = host.id().to_string();
    let Some(sel) = sel.map(str::trim).filter(|s| !s.is_empty()) else {
        let default = match dir {
            Direction::Input => host.default_input_device(),
            Direction::Output => host.default_output_device(),
        };
        return default.ok_or(CaptureError::NoDefaultInput {
            dir: dir.name(),
            host: host_name,
        });
    };
    let devices: Vec<cpal::Device> = host
        .devices()
        .map_err(|e| CaptureError::Enumerate {
            host: host_name.clone(),
            reason: e.to_string(),
        })?
        .collect();
    let named: Vec<Named> = devices
        .iter()
        .enumerate()
        .map(|(i, d)| Named {
            index: i + 1,
            name: device_name(d),
            id: d.id().ok().map(|id| id.to_string()),
            short_id: d.id().ok().map(|id| id.id().to_owned()),
        })
        .collect();
    let pick = |i: usize| -> Result<cpal::Device, CaptureError> {
        let d = &devices[i];
        if dir.supported_by(d) {
            Ok(d.clone())
        } else {
            Err(CaptureError::NotInput {
                dir: dir.name(),
                device: named[i].name.clone(),
            })
        }
    };
    let choose = |hits: Vec<usize>| -> Result<cpal::Device, CaptureError> {
        let inputs: Vec<usize> = hits
            .iter()
            .copied()
            .filter(|&i| dir.supported_by(&devices[i]))
            .collect();
        match (inputs.as_slice(), hits.first()) {
            ([one], _) => pick(*one),
            ([], Some(&first)) => pick(first),
            ([], None) => Err(CaptureError::NoInput {
                dir: dir.name(),
                sel: sel.to_owned(),
                host: host_name.clone(),
            }),
            (many, _) => {
                let list: Vec<String> = many.iter().map(|&i| named[i].label()).collect();
                Err(CaptureError::Ambiguous {
                    dir: dir.name(),
                    sel: sel.to_owned(),
                    host: host_name.clone(),
                    candidates: list.join(", "),
                })
            }
        }
    };
    // Exact id, then exact name.
    let exact_id: Vec<usize> = (0..named.len())
        .filter(|&i| {
            named[i].id.as_deref() == Some(sel) || named[i].short_id.as_deref() == Some(sel)
        })
        .collect();
    if !exact_id.is_empty() {
        return choose(exact_id);
    }
    let exact_name: Vec<usize> = (0..named.len()).filter(|&i| named[i].name == sel).collect();
    if !exact_name.is_empty() {
        return choose(exact_name);
    }
    // A number in the listing.
    let digits = sel.strip_prefix('#').unwrap_or(sel).trim();
    if !digits.is_empty() && digits.bytes().all(|b| b.is_ascii_digit()) {
        let index: usize = digits.parse().unwrap_or(usize::MAX);
        return match index.checked_sub(1).filter(|&i| i < devices.len()) {
            Some(i) => pick(i),
            None => Err(CaptureError::NoIndex {
                index,
                host: host_name,
                count: devices.len(),
            }),
        };
    }
    // A piece of the name or id.
    let needle = sel.to_lowercase();
    let hits: Vec<usize> = (0..named.len())
        .filter(|&i| {
            named[i].name.to_lowercase().contains(&needle)
                || named[i]
                    .short_id
                    .as_ref()
                    .is_some_and(|id| id.to_lowercase().contains(&needle))
        })
        .collect();
    choose(hits)
}

struct Named {
    index: usize,
    name: String,
    /// `host:id`
    id: Option<String>,
    /// `id`
    short_id: Option<String>,
}

impl Named {
    fn label(&self) -> String {
        match &self.short_id {
            Some(id) if id != &self.name => format!("#{} {} ({id})", self.index, self.name),
            _ => format!("#{} {}", self.index, self.name),
        }
    }
}

#[cfg(test)]
mod tests {
    use std::time::Duration;

    use cpal::SampleFormat;

    use super::*;
    use crate::live::capture::synthetic::{range, Script, SynthDevice, SynthHost};

    fn input(name: &str, channels: u16) -> SynthDevice {
        SynthDevice::input(
            name,
            channels,
            (44_100, 48_000),
            &[SampleFormat::I16, SampleFormat::F32],
            Script::new(64, Some(0), Duration::ZERO),
        )
    }

    fn host() -> cpal::Host {
        let mut scarlett = input("Scarlett 18i20 USB", 18);
        scarlett
            .inputs
            .push(range(18, 96_000, 96_000, SampleFormat::I32));
        scarlett
            .inputs
            .push(range(2, 8_000, 44_100, SampleFormat::I32));
        SynthHost {
            devices: vec![
                input("Built-in Microphone", 2),
                SynthDevice::output("HDMI Output", 8),
                scarlett,
                input("USB Audio Device", 1),
                input("USB Audio Device 2", 2),
            ],
            default_input: Some(0),
            default_output: Some(1),
        }
        .into_cpal()
    }

    fn name_of(r: Result<cpal::Device, CaptureError>) -> Result<String, String> {
        r.map(|d| device_name(&d)).map_err(|e| e.to_string())
    }

    #[test]
    fn devices_are_found_by_name_number_piece_or_default() {
        let h = host();
        let find = |sel| name_of(find_input(&h, sel));
        let ok = |s: &str| Ok(s.to_owned());
        assert_eq!(find(None), ok("Built-in Microphone"));
        assert_eq!(find(Some("  ")), ok("Built-in Microphone"));
        assert_eq!(find(Some("USB Audio Device")), ok("USB Audio Device"));
        assert_eq!(
            find(Some("synth:USB Audio Device 2")),
            ok("USB Audio Device 2")
        );
        assert_eq!(
            find(Some("custom:synth:USB Audio Device 2")),
            ok("USB Audio Device 2")
        );
        assert_eq!(find(Some("scarlett")), ok("Scarlett 18i20 USB"));
        assert_eq!(find(Some("MICRO")), ok("Built-in Microphone"));
        assert_eq!(find(Some("#3")), ok("Scarlett 18i20 USB"));
        assert_eq!(find(Some("4")), ok("USB Audio Device"));
        assert_eq!(find(Some("# 5")), ok("USB Audio Device 2"));
        // "Output" names only an output device.
        assert_eq!(
            find(Some("hdmi")),
            Err(
                "device 'HDMI Output' has no input channels; `brink devices` lists the inputs"
                    .into()
            )
        );
        assert_eq!(
            find(Some("#2")),
            Err(
                "device 'HDMI Output' has no input channels; `brink devices` lists the inputs"
                    .into()
            )
        );
        assert_eq!(
            find(Some("Scarlet 2i2")),
            Err(
                "no input device matches 'Scarlet 2i2' on host custom; `brink devices` lists them"
                    .into()
            )
        );
        assert_eq!(
            find(Some("#9")),
            Err(
                "there is no device #9 on host custom (it lists 5); `brink devices` lists them"
                    .into()
            )
        );
        assert_eq!(
            find(Some("#0")),
            Err(
                "there is no device #0 on host custom (it lists 5); `brink devices` lists them"
                    .into()
            )
        );
        assert_eq!(
            find(Some("usb audio")),
            Err("'usb audio' matches several input devices on host custom: \
                 #4 USB Audio Device (synth:USB Audio Device), \
                 #5 USB Audio Device 2 (synth:USB Audio Device 2); \
                 give its number or id from `brink devices`"
                .into())
        );
    }

    #[test]
    fn outputs_are_found_the_same_way() {
        let h = host();
        let find = |sel| name_of(find_output(&h, sel));
        assert_eq!(find(None), Ok("HDMI Output".to_owned()));
        assert_eq!(find(Some("hdmi")), Ok("HDMI Output".to_owned()));
        assert_eq!(find(Some("#2")), Ok("HDMI Output".to_owned()));
        assert_eq!(
            find(Some("scarlett")),
            Err(
                "device 'Scarlett 18i20 USB' has no output channels; `brink devices` lists the \
                 outputs"
                    .into()
            )
        );
        assert_eq!(
            find(Some("Monitor Out")),
            Err(
                "no output device matches 'Monitor Out' on host custom; `brink devices` lists \
                 them"
                    .into()
            )
        );
        let none = SynthHost {
            devices: vec![input("Mic", 1)],
            default_input: Some(0),
            default_output: None,
        }
        .into_cpal();
        assert_eq!(
            name_of(find_output(&none, None)),
            Err(
                "host custom has no default output device; name one (`brink devices` lists them)"
                    .into()
            )
        );
    }

    #[test]
    fn a_host_without_default_input_says_so() {
        let h = SynthHost {
            devices: vec![input("Mic", 1)],
            default_input: None,
            default_output: None,
        }
        .into_cpal();
        assert_eq!(
            name_of(find_input(&h, None)),
            Err(
                "host custom has no default input device; name one (`brink devices` lists them)"
                    .into()
            )
        );
    }

    #[test]
    fn hosts_are_found_by_name_in_any_case() {
        let e = |n| {
            find_host(Some(n))
                .map(|h| h.id().to_string())
                .map_err(|e| e.to_string())
        };
        assert_eq!(e("ALSA"), Ok("alsa".into()));
        assert_eq!(e("alsa"), Ok("alsa".into()));
        let nope = e("asio").expect_err("no such host here");
        assert!(
            nope.starts_with("no audio host named 'asio'; hosts here: "),
            "{nope}"
        );
        assert!(nope.contains("alsa"), "{nope}");
        assert!(!nope.contains("custom"), "{nope}");
        assert!(e("custom").is_err());
        if cfg!(feature = "jack") {
            // Built in; available or not depending on a running server.
            let _ = e("Jack");
        } else {
            assert_eq!(
                e("Jack"),
                Err("audio host 'jack' is not built into this brink; rebuild with `--features jack`"
                    .into())
            );
        }
        assert!(find_host(None).is_ok());
    }

    #[test]
    fn the_report_lists_every_device_with_its_capabilities() {
        let report = report_host(&host(), true);
        assert_eq!(report.host, "custom");
        assert!(report.default);
        assert_eq!(report.error, None);
        let names: Vec<&str> = report.devices.iter().map(|d| d.name.as_str()).collect();
        assert_eq!(
            names,
            [
                "Built-in Microphone",
                "HDMI Output",
                "Scarlett 18i20 USB",
                "USB Audio Device",
                "USB Audio Device 2"
            ]
        );
        let mic = &report.devices[0];
        assert_eq!(mic.index, 1);
        assert!(mic.default_input && !mic.default_output);
        assert_eq!(mic.id.as_deref(), Some("synth:Built-in Microphone"));
        assert_eq!(mic.output, Capabilities::default());
        let hdmi = &report.devices[1];
        assert!(hdmi.default_output && !hdmi.default_input);
        assert_eq!((hdmi.input.channels, hdmi.output.channels), (0, 8));
        let scarlett = &report.devices[2];
        assert_eq!(
            scarlett.input,
            Capabilities {
                channels: 18,
                channel_counts: vec![2, 18],
                sample_rates: vec![
                    RateRange {
                        min: 8_000,
                        max: 48_000
                    },
                    RateRange {
                        min: 96_000,
                        max: 96_000
                    }
                ],
                sample_formats: vec!["i16".into(), "i32".into(), "f32".into()],
                error: None,
            }
        );
        let json = serde_json::to_value(&report).expect("json");
        assert_eq!(json["devices"][2]["input"]["channels"], 18);
        assert_eq!(
            json["devices"][2]["input"]["sample_rates"][1]["min"],
            96_000
        );
        assert_eq!(json["devices"][0]["default_input"], true);

        let mut table = Vec::new();
        write_table(&mut table, &[report]).expect("write");
        let table = String::from_utf8(table).expect("utf8");
        let lines: Vec<&str> = table.lines().collect();
        assert_eq!(lines[0], "host custom (default host)");
        assert!(lines[1].contains("device") && lines[1].contains("sample rates (Hz)"));
        assert!(lines[2].starts_with("  #1  Built-in Microphone [synth:Built-in Microphone]"));
        assert!(lines[2].contains(" in "), "{}", lines[2]);
        assert!(lines[3].contains("HDMI Output") && lines[3].contains("out"));
        assert!(lines[4].contains("8000-48000, 96000") && lines[4].ends_with("i16 i32 f32"));
        assert_eq!(lines.len(), 7, "{table}");
    }

    #[test]
    fn the_table_shows_hosts_that_failed() {
        let hosts = [HostReport {
            host: "jack".into(),
            default: false,
            error: Some("JACK server is not running".into()),
            devices: vec![],
        }];
        let mut out = Vec::new();
        write_table(&mut out, &hosts).expect("write");
        assert_eq!(
            String::from_utf8(out).expect("utf8"),
            "host jack\n  unavailable: JACK server is not running\n"
        );
    }

    #[test]
    fn listing_the_real_hosts_does_not_fail_without_a_sound_card() {
        let hosts = list();
        assert!(
            hosts.iter().any(|h| h.host == "alsa" && h.default),
            "{hosts:?}"
        );
        let mut out = Vec::new();
        write_table(&mut out, &hosts).expect("write");
    }
}
