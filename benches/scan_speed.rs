//! Scan speed: `brink scan` (every measurement on) against a general-purpose statistics pass
//! over the same file (`sox FILE -n stats`, which measures far less), on two files:
//! - a 10-minute stereo 48 kHz 24-bit programme;
//! - a 1-minute 32-channel 48 kHz 24-bit multitrack.
//!
//! Run with `cargo bench --bench scan_speed` (`SCAN_SPEED_RUNS=N` for fewer or more runs;
//! `SCAN_SPEED_BASELINE=PATH` adds another brink binary, an earlier build, to each round). All
//! programs run as child processes, alternating so that drifts in machine speed hit both alike;
//! each run's wall time, CPU time (user + system) and peak resident memory come from the
//! kernel's accounting of the child (`wait4`). Prints best and median figures and brink's ratio
//! to sox. Not a test: nothing is asserted.

// `wait4` is the only way to read one child's resource use; it is a plain libc call.
#![allow(unsafe_code)]

use std::f64::consts::PI;
use std::path::Path;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

const RATE: u32 = 48_000;

/// One run of a child: wall time, CPU time, peak resident memory (KiB).
#[derive(Debug, Clone, Copy)]
struct Run {
    wall: Duration,
    cpu: Duration,
    rss_kib: u64,
}

fn run_child(cmd: &mut Command) -> Result<Run, Box<dyn std::error::Error>> {
    let t0 = Instant::now();
    let child = cmd
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .stdin(Stdio::null())
        .spawn()?;
    let pid = child.id() as libc::pid_t;
    let mut status = 0;
    // SAFETY: a zeroed rusage is a valid value of this plain C struct.
    let mut usage: libc::rusage = unsafe { std::mem::zeroed() };
    // SAFETY: `pid` is our own child, not yet waited for; both pointers are to live locals.
    let r = unsafe { libc::wait4(pid, &mut status, 0, &mut usage) };
    let wall = t0.elapsed();
    if r != pid || !libc::WIFEXITED(status) || libc::WEXITSTATUS(status) != 0 {
        return Err(format!("{cmd:?} failed (status {status})").into());
    }
    let tv = |t: libc::timeval| Duration::new(t.tv_sec as u64, t.tv_usec as u32 * 1000);
    Ok(Run {
        wall,
        cpu: tv(usage.ru_utime) + tv(usage.ru_stime),
        rss_kib: usage.ru_maxrss as u64,
    })
}

fn hiss(state: &mut u64) -> f64 {
    *state ^= *state << 13;
    *state ^= *state >> 7;
    *state ^= *state << 17;
    ((*state >> 40) as f64 / (1u64 << 24) as f64 - 0.5) * 1e-3
}

/// Ten minutes of stereo: a tone swelling into flat tops every 20 s, and a chord with overs
/// once a minute.
fn write_stereo(path: &Path, seconds: u32) -> Result<(), Box<dyn std::error::Error>> {
    write(path, 2, seconds, |c, t, noise| match c {
        0 => {
            let swell = 0.4 + 0.5 * (2.0 * PI * t / 20.0).sin().max(0.0);
            (swell * (2.0 * PI * 997.0 * t).sin()).clamp(-0.7, 0.7) + hiss(noise)
        }
        _ => {
            let mut v = 0.3 * (2.0 * PI * 220.0 * t).sin()
                + 0.25 * (2.0 * PI * 277.2 * t).sin()
                + 0.2 * (2.0 * PI * 329.6 * t).sin()
                + hiss(noise);
            if (t % 60.0) < 0.5 {
                v *= 2.0;
            }
            v
        }
    })
}

/// A 32-channel multitrack: each input its own tone and level, every fourth one flat-topping in
/// bursts, every eighth one driven into overs, the rest clean with hiss.
fn write_multitrack(path: &Path, seconds: u32) -> Result<(), Box<dyn std::error::Error>> {
    write(path, 32, seconds, |c, t, noise| {
        let f = 55.0 * 2f64.powf(c as f64 / 5.0);
        let level = 0.1 + 0.02 * (c % 10) as f64;
        let mut v = level * (2.0 * PI * f * t).sin() + hiss(noise);
        if c % 4 == 1 && (t % 10.0) < 2.0 {
            v = (3.0 * v).clamp(-0.3, 0.3);
        }
        if c % 8 == 3 && (t % 15.0) < 1.0 {
            v *= 8.0;
        }
        v
    })
}

fn write(
    path: &Path,
    channels: u16,
    seconds: u32,
    sample: impl Fn(usize, f64, &mut u64) -> f64,
) -> Result<(), Box<dyn std::error::Error>> {
    let spec = hound::WavSpec {
        channels,
        sample_rate: RATE,
        bits_per_sample: 24,
        sample_format: hound::SampleFormat::Int,
    };
    let mut w = hound::WavWriter::create(path, spec)?;
    let full = (1 << 23) as f64;
    let mut noise = 0x2545_F491_4F6C_DD1Du64;
    for n in 0..(RATE * seconds) as u64 {
        let t = n as f64 / RATE as f64;
        for c in 0..channels as usize {
            let v = sample(c, t, &mut noise);
            w.write_sample((v * full).round().clamp(-full, full - 1.0) as i32)?;
        }
    }
    w.finalize()?;
    Ok(())
}

fn sorted<T: Ord + Copy>(mut v: Vec<T>) -> (T, T) {
    v.sort();
    (v[0], v[v.len() / 2])
}

fn bench_file(
    label: &str,
    path: &Path,
    seconds: u32,
    runs: usize,
    sox_ok: bool,
) -> Result<(), Box<dyn std::error::Error>> {
    let brink = env!("CARGO_BIN_EXE_brink");
    let baseline = std::env::var_os("SCAN_SPEED_BASELINE");
    let mut b = Vec::new();
    let mut base = Vec::new();
    let mut s = Vec::new();
    for _ in 0..runs {
        b.push(run_child(
            Command::new(brink).arg("scan").arg("--json").arg(path),
        )?);
        if let Some(other) = &baseline {
            base.push(run_child(
                Command::new(other).arg("scan").arg("--json").arg(path),
            )?);
        }
        if sox_ok {
            s.push(run_child(
                Command::new("sox").arg(path).args(["-n", "stats"]),
            )?);
        }
    }
    let mb = std::fs::metadata(path)?.len() as f64 / 1e6;
    println!("\n{label}: {seconds} s at 48 kHz, 24-bit, {mb:.0} MB, {runs} runs each");
    let show = |name: &str, r: &[Run]| -> (f64, f64) {
        let (wb, wm) = sorted(r.iter().map(|x| x.wall).collect());
        let (_, cm) = sorted(r.iter().map(|x| x.cpu).collect());
        let rss = r.iter().map(|x| x.rss_kib).max().unwrap_or(0);
        println!(
            "  {name:<6} wall best {:.3} s, median {:.3} s ({:.0}x real time); CPU median {:.3} s; peak memory {:.1} MB",
            wb.as_secs_f64(),
            wm.as_secs_f64(),
            f64::from(seconds) / wm.as_secs_f64(),
            cm.as_secs_f64(),
            rss as f64 / 1024.0
        );
        (wm.as_secs_f64(), cm.as_secs_f64())
    };
    let (bw, bc) = show("brink", &b);
    if !base.is_empty() {
        let (ow, oc) = show("before", &base);
        println!(
            "  brink / before: wall {:.2}, CPU {:.2} (medians)",
            bw / ow,
            bc / oc
        );
    }
    if sox_ok {
        let (sw, sc) = show("sox", &s);
        println!(
            "  brink / sox: wall {:.2}, CPU {:.2} (medians; below 1 = brink cheaper)",
            bw / sw,
            bc / sc
        );
    }
    Ok(())
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let runs = std::env::var("SCAN_SPEED_RUNS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(9usize)
        .max(1);
    let sox_ok = Command::new("sox").arg("--version").output().is_ok();
    if !sox_ok {
        println!("sox not installed: the comparison is skipped (apt-get install sox)");
    }
    let dir = tempfile::tempdir()?;
    let stereo = dir.path().join("ten-minutes-stereo-48k-24bit.wav");
    eprintln!("writing the test files ...");
    write_stereo(&stereo, 600)?;
    bench_file("stereo programme", &stereo, 600, runs, sox_ok)?;
    std::fs::remove_file(&stereo)?;
    let multi = dir.path().join("one-minute-32ch-48k-24bit.wav");
    write_multitrack(&multi, 60)?;
    bench_file("32-channel multitrack", &multi, 60, runs, sox_ok)?;
    Ok(())
}
