//! Scan speed: a 10-minute stereo 48 kHz 24-bit WAV with every measurement on, against a
//! general-purpose statistics pass over the same file (`sox FILE -n stats`, where installed).
//!
//! Run with `cargo bench --bench scan_speed`. Prints wall times (best and median of several runs),
//! the real-time factor, and the process's peak resident memory. Not a test: nothing is asserted.

use std::f64::consts::PI;
use std::path::Path;
use std::process::Command;
use std::time::{Duration, Instant};

use brink::scan::{scan_file, ScanSettings};

const RATE: u32 = 48_000;
const SECONDS: u32 = 600;
const RUNS: usize = 9;

fn write_programme(path: &Path) -> Result<(), Box<dyn std::error::Error>> {
    let spec = hound::WavSpec {
        channels: 2,
        sample_rate: RATE,
        bits_per_sample: 24,
        sample_format: hound::SampleFormat::Int,
    };
    let mut w = hound::WavWriter::create(path, spec)?;
    let full = (1 << 23) as f64;
    let mut noise = 0x2545_F491_4F6C_DD1Du64;
    for n in 0..(RATE * SECONDS) as u64 {
        let t = n as f64 / RATE as f64;
        noise ^= noise << 13;
        noise ^= noise >> 7;
        noise ^= noise << 17;
        let hiss = ((noise >> 40) as f64 / (1u64 << 24) as f64 - 0.5) * 1e-3;
        // Left: a 997 Hz tone whose drive swells every 20 s into flat-topped clipping.
        let swell = 0.4 + 0.5 * (2.0 * PI * t / 20.0).sin().max(0.0);
        let left = (swell * (2.0 * PI * 997.0 * t).sin()).clamp(-0.7, 0.7) + hiss;
        // Right: a three-partial chord with overs once a minute.
        let mut right = 0.3 * (2.0 * PI * 220.0 * t).sin()
            + 0.25 * (2.0 * PI * 277.2 * t).sin()
            + 0.2 * (2.0 * PI * 329.6 * t).sin()
            + hiss;
        if (t % 60.0) < 0.5 {
            right *= 2.0;
        }
        for v in [left, right] {
            w.write_sample((v * full).round().clamp(-full, full - 1.0) as i32)?;
        }
    }
    w.finalize()?;
    Ok(())
}

fn summarise(mut times: Vec<Duration>) -> (Duration, Duration) {
    times.sort();
    (times[0], times[times.len() / 2])
}

fn peak_rss_kib() -> Option<u64> {
    let s = std::fs::read_to_string("/proc/self/status").ok()?;
    s.lines()
        .find(|l| l.starts_with("VmHWM:"))?
        .split_whitespace()
        .nth(1)?
        .parse()
        .ok()
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let dir = tempfile::tempdir()?;
    let path = dir.path().join("ten-minutes-stereo-48k-24bit.wav");
    eprintln!("writing {SECONDS} s stereo test programme ...");
    write_programme(&path)?;
    let bytes = std::fs::metadata(&path)?.len();
    let audio = Duration::from_secs(SECONDS as u64);
    let rss_before = peak_rss_kib();

    let settings = ScanSettings::default();
    let sox_ok = Command::new("sox").arg("--version").output().is_ok();
    // Runs alternate between brink and sox so that drifts in machine speed hit both alike.
    let mut times = Vec::new();
    let mut sox_times = Vec::new();
    let mut report = None;
    for _ in 0..RUNS {
        let t0 = Instant::now();
        report = Some(scan_file(&path, &settings)?);
        times.push(t0.elapsed());
        if sox_ok {
            let t0 = Instant::now();
            let out = Command::new("sox")
                .arg(&path)
                .args(["-n", "stats"])
                .output()?;
            sox_times.push(t0.elapsed());
            if !out.status.success() {
                return Err("sox stats failed".into());
            }
        }
    }
    let (best, median) = summarise(times);
    let rss_after = peak_rss_kib();
    println!(
        "file: {SECONDS} s, 2 ch, 48 kHz, 24-bit ({:.1} MB), {RUNS} runs each",
        bytes as f64 / 1e6
    );
    println!(
        "brink scan (levels, true peak x4, overs, flat tops, harmonics, THD+N): best {:.3} s, median {:.3} s  => {:.0}x real time (best), {:.0}x (median)",
        best.as_secs_f64(),
        median.as_secs_f64(),
        audio.as_secs_f64() / best.as_secs_f64(),
        audio.as_secs_f64() / median.as_secs_f64()
    );
    if let (Some(a), Some(b)) = (rss_before, rss_after) {
        println!("peak resident memory: {a} KiB before scanning, {b} KiB after");
    }
    if let Some(r) = &report {
        for c in &r.channels {
            println!(
                "  ch {}: overs {}, flat tops {}, THD {:?} %",
                c.channel,
                c.clipping.overs,
                c.clipping.flat_tops,
                c.distortion
                    .as_ref()
                    .and_then(|d| d.thd_pct)
                    .map(|t| (t * 1e3).round() / 1e3)
            );
        }
    }
    if sox_ok {
        let (sbest, smedian) = summarise(sox_times);
        println!(
            "sox FILE -n stats (peak, RMS, DC, ... no true peak, no harmonics): best {:.3} s, median {:.3} s  => {:.0}x real time",
            sbest.as_secs_f64(),
            smedian.as_secs_f64(),
            audio.as_secs_f64() / sbest.as_secs_f64()
        );
        println!(
            "brink / sox time: best {:.2}, median {:.2} (below 1 = brink faster)",
            best.as_secs_f64() / sbest.as_secs_f64(),
            median.as_secs_f64() / smedian.as_secs_f64()
        );
    } else {
        println!("sox not installed: the comparison is skipped (apt-get install sox)");
    }
    Ok(())
}
