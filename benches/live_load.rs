//! Live load: the live analysis against the targets of the live-monitoring issue.
//!
//! 1. CPU: `Engine::process` (levels, true peak, clip detection, tone analysis of a 1 s window
//!    every 250 ms and a summary every second, on every channel) run single-threaded over
//!    synthetic multichannel audio fed in 10 ms blocks. Reported as processing time / audio time
//!    ("% of one core"), by wall clock and by the thread's own CPU time (`/proc/thread-self/stat`
//!    utime+stime in clock ticks, and `/proc/thread-self/schedstat` in ns where present).
//!    Targets: 64 ch at 96 kHz within 50 % of one core; 2 ch at 48 kHz under 2 %.
//! 2. Latency: the real threaded pipeline (ring + `spawn_analysis`) with a writer thread playing
//!    10 ms callbacks at real time; a tone goes into flat-top clipping (at −6 dBFS) for 50 ms every
//!    500 ms. Measured from the instant the block holding the first clipped sample was written to
//!    the instant the receiving thread got the matching `ClipStarted`. Target: within 20 ms.
//! 3. Memory: the engine (the analysis thread's whole state) fed as fast as it goes for 60 minutes
//!    of 2 ch 48 kHz audio and 10 minutes of 64 ch 96 kHz audio, with VmRSS sampled along the way.
//!    Target: flat.
//!
//! Run with `cargo bench --bench live_load`: about 25 minutes on a two-core machine, most of it
//! the 10-minute 64-channel memory run, which goes no faster than the engine does.
//! `LIVE_LOAD_QUICK=1` shortens every run tenfold for a smoke test. Prints figures; asserts
//! nothing.

use std::error::Error;
use std::f64::consts::PI;
use std::process::Command;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

use brink::live::engine::{Engine, EngineSettings, LiveEvent};
use brink::live::ring::ring;
use brink::live::run::{spawn_analysis, Published};

type Res<T> = Result<T, Box<dyn Error>>;

/// Length of the pre-generated programme. Every tone has a whole number of hertz, so the loop
/// holds whole cycles and joins without a seam.
const LOOP_S: usize = 2;

/// Blocks per second (10 ms blocks, as the analysis thread cuts them).
const BLOCKS_PER_S: usize = 100;

// ---------------------------------------------------------------------------------------------
// Signals

/// `LOOP_S` seconds of interleaved audio, every channel different. By channel number modulo 4:
/// a clean tone at −6 dBFS; a tone flat-topped at −4.4 dBFS for the first 300 ms of each second;
/// a tone driven into overs (clamped at full scale) from 500 to 600 ms of each second; white
/// noise at about −25 dBFS RMS. Fundamentals run from 97 Hz upwards in steps of 71 Hz.
fn programme(rate: u32, channels: usize) -> Vec<f32> {
    let frames = rate as usize * LOOP_S;
    let mut out = vec![0.0f32; frames * channels];
    let mut noise = 0x2545_F491_4F6C_DD1Du64;
    for (i, frame) in out.chunks_exact_mut(channels).enumerate() {
        let t = i as f64 / rate as f64;
        let in_second = t.fract();
        for (c, s) in frame.iter_mut().enumerate() {
            let f = 97.0 + 71.0 * c as f64;
            let x = (2.0 * PI * f * t).sin();
            let v = match c % 4 {
                0 => 0.5 * x,
                1 if in_second < 0.3 => (0.9 * x).clamp(-0.6, 0.6),
                1 => 0.5 * x,
                2 if (0.5..0.6).contains(&in_second) => (1.2 * x).clamp(-1.0, 1.0),
                2 => 0.7 * x,
                _ => {
                    noise ^= noise << 13;
                    noise ^= noise >> 7;
                    noise ^= noise << 17;
                    0.2 * ((noise >> 40) as f64 / (1u64 << 24) as f64 - 0.5)
                }
            };
            *s = v as f32;
        }
    }
    out
}

/// Events seen, by kind (a sanity check that the engine was doing its work).
#[derive(Debug, Default, Clone, Copy)]
struct Counts {
    clip_started: u64,
    clips: u64,
    onsets: u64,
    summaries: u64,
    gaps: u64,
}

impl Counts {
    fn note(&mut self, ev: &LiveEvent) {
        match ev {
            LiveEvent::ClipStarted { .. } => self.clip_started += 1,
            LiveEvent::Clip { .. } => self.clips += 1,
            LiveEvent::Onset(_) => self.onsets += 1,
            LiveEvent::Summary { .. } => self.summaries += 1,
            LiveEvent::Gap { .. } => self.gaps += 1,
            LiveEvent::Meters { .. } | LiveEvent::Tone { .. } => {}
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Clocks and memory

/// The calling thread's CPU time so far.
#[derive(Debug, Clone, Copy)]
struct ThreadClock {
    /// utime + stime (clock ticks).
    ticks: u64,
    /// Time on a CPU (ns), from schedstat.
    run_ns: Option<u64>,
    /// Time runnable but waiting for a CPU (ns), from schedstat.
    wait_ns: Option<u64>,
}

fn thread_clock() -> Res<ThreadClock> {
    let stat = std::fs::read_to_string("/proc/thread-self/stat")?;
    // The command name (field 2) is in parentheses and may hold spaces: split after it. The
    // first field after it is field 3 (state); utime and stime are fields 14 and 15.
    let rest = stat
        .rsplit_once(')')
        .ok_or("malformed /proc/thread-self/stat")?
        .1;
    let fields: Vec<&str> = rest.split_whitespace().collect();
    let utime: u64 = fields.get(11).ok_or("no utime in stat")?.parse()?;
    let stime: u64 = fields.get(12).ok_or("no stime in stat")?.parse()?;
    let sched = std::fs::read_to_string("/proc/thread-self/schedstat").ok();
    let mut sched = sched
        .as_deref()
        .unwrap_or("")
        .split_whitespace()
        .map(|v| v.parse::<u64>().ok());
    let run_ns = sched.next().flatten();
    let wait_ns = sched.next().flatten();
    Ok(ThreadClock {
        ticks: utime + stime,
        run_ns,
        wait_ns,
    })
}

/// Clock ticks per second (`getconf CLK_TCK`; 100 when that cannot be asked).
fn clock_ticks_per_s() -> f64 {
    Command::new("getconf")
        .arg("CLK_TCK")
        .output()
        .ok()
        .and_then(|o| String::from_utf8(o.stdout).ok())
        .and_then(|s| s.trim().parse::<f64>().ok())
        .filter(|&v| v > 0.0)
        .unwrap_or(100.0)
}

/// A field of /proc/self/status in KiB.
fn status_kib(field: &str) -> Option<u64> {
    let s = std::fs::read_to_string("/proc/self/status").ok()?;
    s.lines()
        .find(|l| l.starts_with(field))?
        .split_whitespace()
        .nth(1)?
        .parse()
        .ok()
}

fn rss_kib() -> Res<u64> {
    status_kib("VmRSS:").ok_or_else(|| "no VmRSS in /proc/self/status".into())
}

// ---------------------------------------------------------------------------------------------
// Statistics

/// Nearest-rank percentile of sorted values (`q` in 0..=1).
fn pct(sorted: &[f64], q: f64) -> f64 {
    if sorted.is_empty() {
        return f64::NAN;
    }
    let rank = (q * sorted.len() as f64).ceil() as usize;
    sorted[rank.clamp(1, sorted.len()) - 1]
}

fn sorted(mut v: Vec<f64>) -> Vec<f64> {
    v.sort_by(f64::total_cmp);
    v
}

/// (best, median) of values where lower is better.
fn best_median(v: &[f64]) -> (f64, f64) {
    let s = sorted(v.to_vec());
    (pct(&s, 0.0), pct(&s, 0.5))
}

fn verdict(met: bool) -> &'static str {
    if met {
        "met"
    } else {
        "NOT met"
    }
}

// ---------------------------------------------------------------------------------------------
// 1. CPU

/// One timed run.
#[derive(Debug, Clone, Copy)]
struct CpuRun {
    /// Wall time / audio time.
    wall: f64,
    /// utime+stime / audio time.
    ticks: f64,
    /// schedstat run time / audio time.
    run: Option<f64>,
    /// schedstat wait time / audio time (time the thread was runnable but preempted).
    wait: Option<f64>,
    /// Longest single 10 ms block (s).
    longest_block_s: f64,
    /// 99th percentile block (s).
    p99_block_s: f64,
}

fn cpu_run(
    rate: u32,
    channels: usize,
    settings: &EngineSettings,
    audio_s: f64,
    bed: &[f32],
    tick_hz: f64,
    counts: &mut Counts,
) -> Res<CpuRun> {
    let mut engine = Engine::new(rate, channels, None, settings.clone());
    let block = rate as usize / BLOCKS_PER_S * channels;
    let loop_blocks = bed.len() / block;
    let mut sink = |ev: LiveEvent| counts.note(&ev);
    // Warm-up, not timed: fill the tone windows and plan the FFTs.
    for b in bed.chunks_exact(block) {
        engine.process(b, &mut sink);
    }
    let n = (audio_s * BLOCKS_PER_S as f64).round() as usize;
    let mut per_block = Vec::with_capacity(n);
    let c0 = thread_clock()?;
    let t0 = Instant::now();
    let mut last = t0;
    for k in 0..n {
        let o = (k % loop_blocks) * block;
        engine.process(&bed[o..o + block], &mut sink);
        let now = Instant::now();
        per_block.push((now - last).as_secs_f64());
        last = now;
    }
    let wall = t0.elapsed().as_secs_f64();
    let c1 = thread_clock()?;
    engine.finish(&mut sink);
    let audio = n as f64 / BLOCKS_PER_S as f64;
    let per_block = sorted(per_block);
    let ns = |a: Option<u64>, b: Option<u64>| match (a, b) {
        (Some(a), Some(b)) => Some(b.saturating_sub(a) as f64 * 1e-9 / audio),
        _ => None,
    };
    Ok(CpuRun {
        wall: wall / audio,
        ticks: (c1.ticks - c0.ticks) as f64 / tick_hz / audio,
        run: ns(c0.run_ns, c1.run_ns),
        wait: ns(c0.wait_ns, c1.wait_ns),
        longest_block_s: pct(&per_block, 1.0),
        p99_block_s: pct(&per_block, 0.99),
    })
}

/// Summary of one configuration.
#[derive(Debug, Clone)]
struct CpuResult {
    label: String,
    /// Median CPU time / audio time (schedstat where present, else ticks).
    cpu_median: f64,
    cpu_best: f64,
    wall_median: f64,
    wall_best: f64,
}

fn cpu_config(
    rate: u32,
    channels: usize,
    tone_every_s: Option<f64>,
    audio_s: f64,
    runs: usize,
    tick_hz: f64,
) -> Res<CpuResult> {
    let bed = programme(rate, channels);
    let mut settings = EngineSettings::default();
    let default_every = settings.tone_every_s;
    // None: never due (levels, true peak, clip detection and summaries only).
    settings.tone_every_s = tone_every_s.unwrap_or(1e9);
    let mut counts = Counts::default();
    let mut all = Vec::with_capacity(runs);
    for _ in 0..runs {
        all.push(cpu_run(
            rate,
            channels,
            &settings,
            audio_s,
            &bed,
            tick_hz,
            &mut counts,
        )?);
    }
    let label = format!(
        "{channels} ch @ {} kHz{}",
        rate / 1000,
        match tone_every_s {
            None => ", no tones".to_string(),
            Some(e) if e == default_every => String::new(),
            Some(e) => format!(", tones every {e} s"),
        }
    );
    let (wall_best, wall_median) = best_median(&all.iter().map(|r| r.wall).collect::<Vec<_>>());
    let (tick_best, tick_median) = best_median(&all.iter().map(|r| r.ticks).collect::<Vec<_>>());
    let runs_ns: Option<Vec<f64>> = all.iter().map(|r| r.run).collect();
    let waits: Option<Vec<f64>> = all.iter().map(|r| r.wait).collect();
    let (longest_best, longest_median) =
        best_median(&all.iter().map(|r| r.longest_block_s).collect::<Vec<_>>());
    let (_, p99_median) = best_median(&all.iter().map(|r| r.p99_block_s).collect::<Vec<_>>());
    println!(
        "  {label:<26} {audio_s:>4.0} s audio x {runs} runs  wall {:>6.2} % best, {:>6.2} % median | CPU (ticks) {:>6.2} % best, {:>6.2} % median",
        100.0 * wall_best,
        100.0 * wall_median,
        100.0 * tick_best,
        100.0 * tick_median
    );
    let (cpu_best, cpu_median) = match &runs_ns {
        Some(v) => {
            let (b, m) = best_median(v);
            let w = waits.as_deref().map(best_median).map(|(_, m)| m);
            println!(
                "  {:<26} {:>24} CPU (schedstat) {:>6.2} % best, {:>6.2} % median; waiting for a CPU {} median",
                "",
                "",
                100.0 * b,
                100.0 * m,
                w.map_or("?".to_string(), |w| format!("{:.2} %", 100.0 * w))
            );
            (b, m)
        }
        None => (tick_best, tick_median),
    };
    println!(
        "  {:<26} {:>24} 10 ms block: p99 {:.2} ms (median of runs), longest {:.2} ms best / {:.2} ms median of runs",
        "",
        "",
        1e3 * p99_median,
        1e3 * longest_best,
        1e3 * longest_median
    );
    println!(
        "  {:<26} {:>24} events over all runs: {} clip starts, {} clips, {} onsets, {} summaries",
        "", "", counts.clip_started, counts.clips, counts.onsets, counts.summaries
    );
    Ok(CpuResult {
        label,
        cpu_median,
        cpu_best,
        wall_median,
        wall_best,
    })
}

// ---------------------------------------------------------------------------------------------
// 2. Latency

#[derive(Debug, Clone)]
struct LatencyResult {
    label: String,
    /// From the write of the block holding the first clipped sample (ms), sorted.
    from_first: Vec<f64>,
    /// From the write of the block that completes the first plateau (ms), sorted.
    from_complete: Vec<f64>,
    bursts: usize,
    /// ClipStarted events on channel 1 that match no burst.
    unmatched: usize,
    /// Bursts whose first plateau straddles two callbacks.
    straddled: usize,
    dropped_frames: u64,
    dropped_events: u64,
    late_callbacks: usize,
}

/// Play `secs` of audio through the threaded pipeline at real time: channel 1 a 997 Hz tone at
/// −10.5 dBFS that goes into flat-top clipping at −6 dBFS for 50 ms every ~500 ms, the other
/// channels from [`programme`].
fn latency(rate: u32, channels: usize, secs: f64) -> Res<LatencyResult> {
    let block = rate as usize / BLOCKS_PER_S;
    let blocks = (secs * BLOCKS_PER_S as f64) as usize;
    let frames = blocks * block;
    let r = rate as f64;
    // Burst onsets drift by 1.3 ms a burst so that they fall all over the 10 ms block; each
    // starts on an upward zero crossing, so that its first plateau is a whole one (a gain step
    // into the middle of a plateau makes a truncated plateau that the detector may pass over).
    const TONE_HZ: f64 = 997.0;
    let mut bursts = Vec::new();
    for k in 0.. {
        let t = 1.0 + 0.5013 * k as f64;
        if t + 0.6 > secs {
            break;
        }
        let a = ((t * TONE_HZ).ceil() * r / TONE_HZ).ceil() as usize;
        bursts.push((a, a + (0.05 * r) as usize));
    }
    let clip = 0.5f32;
    let lead: Vec<f32> = (0..frames)
        .map(|i| {
            let x = (2.0 * PI * TONE_HZ * i as f64 / r).sin();
            if bursts.iter().any(|&(a, b)| (a..b).contains(&i)) {
                (x as f32).clamp(-clip, clip)
            } else {
                0.3 * x as f32
            }
        })
        .collect();
    // (first clipped sample, first sample after the first plateau) per burst.
    let mut marks = Vec::with_capacity(bursts.len());
    for &(a, b) in &bursts {
        let first = (a..b)
            .find(|&i| lead[i].abs() >= clip)
            .ok_or("a burst without clipping")?;
        let after = (first..b)
            .find(|&i| lead[i].abs() < clip - 1e-3)
            .ok_or("a plateau that never ends")?;
        marks.push((first, after));
    }
    let bed = programme(rate, channels);
    let loop_frames = bed.len() / channels;

    let (mut writer, reader) = ring(channels, rate as usize * 2);
    let engine = Engine::new(rate, channels, None, EngineSettings::default());
    let done = Arc::new(AtomicBool::new(false));
    let analysis = spawn_analysis(reader, engine, Arc::clone(&done), 4096)?;
    let done_w = Arc::clone(&done);
    let player = std::thread::Builder::new()
        .name("live-load-writer".into())
        .spawn(move || {
            let mut buf = vec![0.0f32; block * channels];
            let mut written_at = Vec::with_capacity(blocks);
            let mut late = 0usize;
            let t0 = Instant::now();
            for k in 0..blocks {
                // Block k leaves the callback once its 10 ms have been captured.
                let due = t0 + Duration::from_micros(10_000 * (k as u64 + 1));
                let now = Instant::now();
                if due > now {
                    std::thread::sleep(due - now);
                } else if now - due > Duration::from_millis(5) {
                    late += 1;
                }
                let start = k * block;
                for (j, frame) in buf.chunks_exact_mut(channels).enumerate() {
                    let o = ((start + j) % loop_frames) * channels;
                    frame.copy_from_slice(&bed[o..o + channels]);
                    frame[0] = lead[start + j];
                }
                writer.write(&buf);
                written_at.push(Instant::now());
            }
            done_w.store(true, Ordering::Release);
            (written_at, late)
        })?;

    let mut seen: Vec<(f64, Instant)> = Vec::new();
    let mut totals = None;
    loop {
        let got = analysis.events.recv_timeout(Duration::from_secs(10));
        let now = Instant::now();
        match got {
            Ok(Published::Event(LiveEvent::ClipStarted {
                channel: 1, t_s, ..
            })) => seen.push((t_s, now)),
            Ok(Published::Event(_)) => {}
            Ok(Published::End(t)) => {
                totals = Some(t);
                break;
            }
            Err(_) => break,
        }
    }
    let (written_at, late_callbacks) = player.join().map_err(|_| "the writer thread panicked")?;
    let dropped_events = analysis.dropped_events();
    let end = analysis.join();
    let totals = totals.unwrap_or(end);

    let mut from_first = Vec::new();
    let mut from_complete = Vec::new();
    let mut straddled = 0;
    for &(first, after) in &marks {
        let Some(&(_, got)) = seen
            .iter()
            .find(|(t_s, _)| (t_s * r - first as f64).abs() <= 2.0)
        else {
            continue;
        };
        let ms = |b: usize| {
            written_at
                .get(b)
                .and_then(|&w| got.checked_duration_since(w))
                .map(|d| d.as_secs_f64() * 1e3)
        };
        // The detector confirms a plateau on the sample that leaves it.
        let (b_first, b_done) = (first / block, after / block);
        if b_done != b_first {
            straddled += 1;
        }
        if let (Some(a), Some(b)) = (ms(b_first), ms(b_done)) {
            from_first.push(a);
            from_complete.push(b);
        }
    }
    let unmatched = seen
        .iter()
        .filter(|(t_s, _)| {
            !marks
                .iter()
                .any(|&(first, _)| (t_s * r - first as f64).abs() <= 2.0)
        })
        .count();
    Ok(LatencyResult {
        label: format!("{channels} ch @ {} kHz", rate / 1000),
        unmatched,
        from_first: sorted(from_first),
        from_complete: sorted(from_complete),
        bursts: marks.len(),
        straddled,
        dropped_frames: totals.dropped_frames,
        dropped_events: dropped_events.max(totals.dropped_events),
        late_callbacks,
    })
}

fn print_latency(l: &LatencyResult) {
    let line = |what: &str, v: &[f64]| {
        println!(
            "    {what:<44} min {:>6.2}  median {:>6.2}  p95 {:>6.2}  max {:>6.2} ms",
            pct(v, 0.0),
            pct(v, 0.5),
            pct(v, 0.95),
            pct(v, 1.0)
        );
    };
    println!(
        "  {}: {} of {} bursts matched, {} unmatched clip starts (expected only after dropped frames; {} with the first plateau straddling two callbacks); {} frames dropped, {} events dropped, {} callbacks more than 5 ms late",
        l.label,
        l.from_first.len(),
        l.bursts,
        l.unmatched,
        l.straddled,
        l.dropped_frames,
        l.dropped_events,
        l.late_callbacks
    );
    line(
        "from the callback holding the 1st clipped sample",
        &l.from_first,
    );
    line(
        "from the callback completing the 1st plateau",
        &l.from_complete,
    );
}

// ---------------------------------------------------------------------------------------------
// 3. Memory

#[derive(Debug, Clone)]
struct MemoryResult {
    label: String,
    /// (minutes of audio, VmRSS KiB).
    series: Vec<(f64, u64)>,
    /// VmRSS just before the engine was made (KiB).
    at_start: u64,
    /// CPU time / audio time over the whole run.
    cpu: f64,
}

impl MemoryResult {
    /// Growth from the first sample of the series to the last (KiB).
    fn growth(&self) -> i64 {
        match (self.series.first(), self.series.last()) {
            (Some(a), Some(b)) => b.1 as i64 - a.1 as i64,
            _ => 0,
        }
    }
}

fn memory(
    rate: u32,
    channels: usize,
    minutes: f64,
    every_min: f64,
    tick_hz: f64,
) -> Res<MemoryResult> {
    let bed = programme(rate, channels);
    let block = rate as usize / BLOCKS_PER_S * channels;
    let loop_blocks = bed.len() / block;
    let at_start = rss_kib()?;
    let mut engine = Engine::new(rate, channels, None, EngineSettings::default());
    let mut counts = Counts::default();
    let every = (every_min * 60.0 * BLOCKS_PER_S as f64).round() as usize;
    let n = (minutes * 60.0 * BLOCKS_PER_S as f64).round() as usize;
    let mut series = Vec::new();
    let c0 = thread_clock()?;
    for k in 0..n {
        let o = (k % loop_blocks) * block;
        engine.process(&bed[o..o + block], &mut |ev| counts.note(&ev));
        if (k + 1) % every == 0 {
            series.push(((k + 1) as f64 / BLOCKS_PER_S as f64 / 60.0, rss_kib()?));
        }
    }
    let c1 = thread_clock()?;
    engine.finish(&mut |ev| counts.note(&ev));
    let audio = n as f64 / BLOCKS_PER_S as f64;
    let cpu = match (c0.run_ns, c1.run_ns) {
        (Some(a), Some(b)) => (b - a) as f64 * 1e-9 / audio,
        _ => (c1.ticks - c0.ticks) as f64 / tick_hz / audio,
    };
    let label = format!("{channels} ch @ {} kHz", rate / 1000);
    let list: Vec<String> = series
        .iter()
        .map(|(m, kib)| format!("{m:.1}m {kib}"))
        .collect();
    println!(
        "  {label} for {minutes:.0} min of audio (CPU {:.2} % of a core): VmRSS KiB before the engine {at_start}; {}",
        100.0 * cpu,
        list.join(", ")
    );
    let r = MemoryResult {
        label,
        series,
        at_start,
        cpu,
    };
    println!(
        "    growth first sample -> last: {:+} KiB; events: {} clip starts, {} clips, {} summaries, {} gaps",
        r.growth(),
        counts.clip_started,
        counts.clips,
        counts.summaries,
        counts.gaps
    );
    Ok(r)
}

// ---------------------------------------------------------------------------------------------

fn main() -> Res<()> {
    let quick = std::env::var_os("LIVE_LOAD_QUICK").is_some();
    let scale = if quick { 0.1 } else { 1.0 };
    let tick_hz = clock_ticks_per_s();
    let sched = thread_clock()?.run_ns.is_some();
    println!(
        "live load{}: {} CPUs online, CLK_TCK {tick_hz}, schedstat {}",
        if quick {
            " (QUICK: runs shortened tenfold)"
        } else {
            ""
        },
        std::thread::available_parallelism().map_or(0, |n| n.get()),
        if sched { "available" } else { "not available" }
    );

    // Memory first, while the heap is fresh: freed memory from the other runs would otherwise
    // sit in the allocator's free lists and could absorb (hide) growth.
    println!();
    println!(
        "3. Memory (run first, on a fresh heap): Engine fed as fast as it goes on one thread (the"
    );
    println!("   analysis thread's whole state), VmRSS from /proc/self/status at every sample.");
    let mem2 = memory(48_000, 2, 60.0 * scale, 5.0 * scale, tick_hz)?;
    let mem64 = memory(96_000, 64, 10.0 * scale, 1.0 * scale, tick_hz)?;

    println!();
    println!("1. CPU: Engine::process on one thread, 10 ms blocks, default settings (tone analysis of a 1 s");
    println!("   window every 250 ms per channel, summaries every 1 s); after a 2 s warm-up. Channels: clean tone,");
    println!("   flat-topped tone, tone into overs, white noise, in turn. \"%\" = time / audio time = % of one core.");
    let every = Some(EngineSettings::default().tone_every_s);
    let cpu64 = cpu_config(96_000, 64, every, 20.0 * scale, 3, tick_hz)?;
    let cpu16 = cpu_config(48_000, 16, every, 20.0 * scale, 5, tick_hz)?;
    let cpu8 = cpu_config(48_000, 8, every, 20.0 * scale, 5, tick_hz)?;
    let cpu2 = cpu_config(48_000, 2, every, 60.0 * scale, 5, tick_hz)?;
    // Where the time goes: the same without tone analysis, and with it four times rarer.
    let cpu64_levels = cpu_config(96_000, 64, None, 20.0 * scale, 3, tick_hz)?;
    let cpu64_1s = cpu_config(96_000, 64, Some(1.0), 20.0 * scale, 3, tick_hz)?;
    let cpu2_levels = cpu_config(48_000, 2, None, 60.0 * scale, 5, tick_hz)?;

    println!();
    println!("2. Latency: ring + spawn_analysis (the real analysis thread), a writer thread making 10 ms callbacks");
    println!("   at real time (sleep-paced); channel 1 flat-topped at -6 dBFS for 50 ms every ~500 ms. Measured");
    println!("   from the Instant after CaptureWriter::write returned to the Instant the receiving thread's");
    println!("   recv returned the ClipStarted with the same t_s (so it includes the channel hand-over and the");
    println!("   analysis thread's idle wait: until a block is due, 1 to 10 ms).");
    let lat2 = latency(48_000, 2, (20.0 * scale).max(3.0))?;
    print_latency(&lat2);
    let lat64 = latency(96_000, 64, (10.0 * scale).max(3.0))?;
    print_latency(&lat64);
    if let Some(hwm) = status_kib("VmHWM:") {
        println!("  peak resident memory of the whole bench: {hwm} KiB");
    }

    // Flat: no more than 1 MiB over the run (allocator noise), whatever the run length.
    const FLAT_KIB: i64 = 1024;
    println!();
    println!("Summary (CPU: median thread CPU time over audio time; wall in brackets)");
    println!("  {:<58} {:<48} verdict", "target", "measured");
    let row = |target: &str, measured: String, v: &str| {
        println!("  {target:<58} {measured:<48} {v}");
    };
    let cpu_fig = |c: &CpuResult| {
        format!(
            "{:.2} % ({:.2} % wall; best {:.2} / {:.2})",
            100.0 * c.cpu_median,
            100.0 * c.wall_median,
            100.0 * c.cpu_best,
            100.0 * c.wall_best
        )
    };
    row(
        &format!("CPU {}: at most 50 % of one core", cpu64.label),
        cpu_fig(&cpu64),
        verdict(cpu64.cpu_median <= 0.5),
    );
    row(
        &format!("CPU {}: under 2 % of one core", cpu2.label),
        cpu_fig(&cpu2),
        verdict(cpu2.cpu_median < 0.02),
    );
    for c in [&cpu64_levels, &cpu64_1s, &cpu2_levels] {
        row(&format!("CPU {} (context)", c.label), cpu_fig(c), "-");
    }
    row(
        &format!("CPU {} (context)", cpu8.label),
        cpu_fig(&cpu8),
        "-",
    );
    row(
        &format!("CPU {} (context)", cpu16.label),
        cpu_fig(&cpu16),
        "-",
    );
    let lat_fig = |l: &LatencyResult| {
        format!(
            "max {:.2} ms (p95 {:.2}, median {:.2}; n={})",
            pct(&l.from_first, 1.0),
            pct(&l.from_first, 0.95),
            pct(&l.from_first, 0.5),
            l.from_first.len()
        )
    };
    let lat_ok = |l: &LatencyResult| {
        !l.from_first.is_empty()
            && l.from_first.len() == l.bursts
            && pct(&l.from_first, 1.0) <= 20.0
    };
    row(
        &format!("Clip notice {}: within 20 ms of its callback", lat2.label),
        lat_fig(&lat2),
        verdict(lat_ok(&lat2)),
    );
    row(
        &format!("Clip notice {} (context)", lat64.label),
        lat_fig(&lat64),
        verdict(lat_ok(&lat64)),
    );
    let mem_fig = |m: &MemoryResult| {
        let last = m.series.last().map_or(0, |s| s.1);
        format!(
            "{:+} KiB over {:.1}->{:.1} min ({} KiB)",
            m.growth(),
            m.series.first().map_or(0.0, |s| s.0),
            m.series.last().map_or(0.0, |s| s.0),
            last
        )
    };
    row(
        &format!(
            "Memory flat, {} for {:.0} min (growth <= 1 MiB)",
            mem2.label,
            60.0 * scale
        ),
        mem_fig(&mem2),
        verdict(!mem2.series.is_empty() && mem2.growth() <= FLAT_KIB),
    );
    row(
        &format!(
            "Memory flat, {} for {:.0} min (growth <= 1 MiB)",
            mem64.label,
            10.0 * scale
        ),
        mem_fig(&mem64),
        verdict(!mem64.series.is_empty() && mem64.growth() <= FLAT_KIB),
    );
    println!(
        "  (memory runs: CPU {:.2} % and {:.2} % of a core; VmRSS before their engines {} and {} KiB)",
        100.0 * mem2.cpu,
        100.0 * mem64.cpu,
        mem2.at_start,
        mem64.at_start
    );
    Ok(())
}
