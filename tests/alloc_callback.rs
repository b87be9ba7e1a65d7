//! The capture data callback never touches the heap.
//!
//! This file is a test binary of its own, so that its counting global allocator affects no other
//! test. The allocator counts an allocation (or a free or a reallocation) only on a thread whose
//! flag is set, and only while it is set; the flag is set around the exact functions the data
//! callback runs ([`callback_body_f32`], [`callback_body_i16`], [`callback_body`]) and, for a
//! whole stream, around each data-callback call made by a synthetic cpal device
//! (`brink::live::capture::synthetic`, through its `Script::around_callback` hook).

// A `GlobalAlloc` impl is unsafe by nature; this one only forwards to `System` and counts.
#![allow(unsafe_code)]

use std::alloc::{GlobalAlloc, Layout, System};
use std::cell::Cell;
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

use brink::live::capture::synthetic::{Script, SynthDevice};
use brink::live::capture::{callback_body, callback_body_f32, callback_body_i16, open_input};
use brink::live::ring::{ring, Read};
use cpal::{SampleFormat, I24};

struct Counting;

thread_local! {
    // Const-initialised and without destructors: reading them never allocates.
    static COUNTING: Cell<bool> = const { Cell::new(false) };
    static COUNT: Cell<u64> = const { Cell::new(0) };
}

fn note() {
    let on = COUNTING.try_with(Cell::get).unwrap_or(false);
    if on {
        let _ = COUNT.try_with(|c| c.set(c.get() + 1));
    }
}

unsafe impl GlobalAlloc for Counting {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        note();
        // SAFETY: forwarded unchanged; the caller upholds `GlobalAlloc::alloc`'s contract.
        unsafe { System.alloc(layout) }
    }

    unsafe fn alloc_zeroed(&self, layout: Layout) -> *mut u8 {
        note();
        // SAFETY: as above.
        unsafe { System.alloc_zeroed(layout) }
    }

    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        note();
        // SAFETY: `ptr` came from `System` through this allocator with this layout.
        unsafe { System.dealloc(ptr, layout) }
    }

    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        note();
        // SAFETY: as above.
        unsafe { System.realloc(ptr, layout, new_size) }
    }
}

#[global_allocator]
static GLOBAL: Counting = Counting;

/// Run `f` with counting on for this thread; return its result and the heap operations it made.
fn counted<R>(f: impl FnOnce() -> R) -> (R, u64) {
    let before = COUNT.with(Cell::get);
    COUNTING.with(|c| c.set(true));
    let r = f();
    COUNTING.with(|c| c.set(false));
    (r, COUNT.with(Cell::get) - before)
}

/// Callback sizes seen in practice (frames): small JACK periods to large ALSA/Pulse buffers,
/// including sizes that are not powers of two and more than the converter's stack chunk.
const PERIODS: [usize; 11] = [16, 32, 64, 128, 256, 441, 480, 512, 1024, 2048, 4096];

#[test]
fn the_counter_sees_allocations() {
    let (v, n) = counted(|| vec![0u8; 100]);
    assert!(n >= 1, "counted {n}");
    let ((), n) = counted(|| drop(v));
    assert_eq!(n, 1);
    let (s, n) = counted(|| format!("{}", 12_345));
    assert!(n >= 1 && s == "12345");
}

#[test]
fn the_f32_callback_body_never_allocates_even_with_the_ring_full() {
    for channels in [1usize, 2, 8] {
        let (mut w, mut r) = ring(channels, 4096);
        let buffers: Vec<Vec<f32>> = PERIODS
            .iter()
            .map(|&p| {
                (0..p * channels)
                    .map(|i| (i % 100) as f32 / 100.0)
                    .collect()
            })
            .collect();
        let mut out = vec![0.0f32; 1024 * channels];
        for round in 0..20 {
            for b in &buffers {
                let ((), n) = counted(|| callback_body_f32(&mut w, b));
                assert_eq!(n, 0, "{channels} channels, {} frames", b.len() / channels);
            }
            // Drain only every other round: half the calls meet a full ring.
            if round % 2 == 0 {
                while let Read::Frames(_) | Read::Gap { .. } = r.read_block(&mut out) {}
            }
        }
        let c = r.counters();
        assert!(
            c.dropped.load(Ordering::Relaxed) > 0,
            "the full-ring path ran"
        );
        assert!(c.written.load(Ordering::Relaxed) > 0);
    }
}

#[test]
fn integer_callback_bodies_never_allocate_even_with_the_ring_full() {
    let channels = 2;
    let (mut w, mut r) = ring(channels, 4096);
    let mut out = vec![0.0f32; 1024 * channels];
    for round in 0..10 {
        for &p in &PERIODS {
            let n = p * channels;
            let i16s: Vec<i16> = (0..n).map(|i| (i as i16).wrapping_mul(97)).collect();
            let i24s: Vec<I24> = (0..n)
                .map(|i| I24::new(i as i32 * 1_000 - 4_000_000).unwrap_or_default())
                .collect();
            let i32s: Vec<i32> = (0..n).map(|i| (i as i32).wrapping_mul(1 << 20)).collect();
            let u8s: Vec<u8> = (0..n).map(|i| i as u8).collect();
            let u16s: Vec<u16> = (0..n).map(|i| i as u16).collect();
            let f64s: Vec<f64> = (0..n).map(|i| i as f64 / n as f64).collect();
            let ((), k) = counted(|| {
                callback_body_i16(&mut w, &i16s);
                callback_body::<i16>(&mut w, &i16s);
                callback_body::<I24>(&mut w, &i24s);
                callback_body::<i32>(&mut w, &i32s);
                callback_body::<u8>(&mut w, &u8s);
                callback_body::<u16>(&mut w, &u16s);
                callback_body::<f64>(&mut w, &f64s);
            });
            assert_eq!(k, 0, "{p} frames");
        }
        if round % 2 == 0 {
            while let Read::Frames(_) | Read::Gap { .. } = r.read_block(&mut out) {}
        }
    }
    assert!(
        r.counters().dropped.load(Ordering::Relaxed) > 0,
        "the full-ring path ran"
    );
}

fn run_stream(format: SampleFormat, expect: &str) {
    let callbacks = 200;
    // The synthetic stream's thread calls the data callback with counting switched on around
    // each call, and nowhere else.
    let allocations = Arc::new(AtomicU64::new(0));
    let wrapped = Arc::new(AtomicU64::new(0));
    let (tally, calls) = (Arc::clone(&allocations), Arc::clone(&wrapped));
    let script = Script::new(480, Some(callbacks), Duration::from_micros(200)).around_callback(
        move |call| {
            let ((), n) = counted(call);
            tally.fetch_add(n, Ordering::Relaxed);
            calls.fetch_add(1, Ordering::Relaxed);
        },
    );
    let dev = SynthDevice::input("Counting", 2, (48_000, 48_000), &[format], script);
    let script = Arc::clone(&dev.script);
    let device = dev.into_cpal();
    // A ring of 8 callbacks and a reader that drains it only now and then: callbacks meet a full
    // ring as well as an empty one.
    let (w, mut r) = ring(2, 480 * 8);
    let (tx, _rx) = crossbeam_channel::bounded(4);
    let (cap, info) = open_input(&device, None, w, tx).expect("open");
    assert_eq!(info.sample_format, expect);
    cap.play().expect("play");
    let mut out = vec![0.0f32; 2 * 480];
    let start = Instant::now();
    while script.done() < callbacks {
        assert!(start.elapsed() < Duration::from_secs(30), "stream stalled");
        std::thread::sleep(Duration::from_millis(5));
        // Not a frame is read until 20 callbacks have come (the ring holds 8), then the reader
        // drains what is there every 5 ms.
        if script.done() >= 20 {
            while let Read::Frames(_) | Read::Gap { .. } = r.read_block(&mut out) {}
        }
    }
    drop(cap);
    let c = r.counters();
    assert_eq!(c.callbacks.load(Ordering::Relaxed), callbacks);
    assert_eq!(c.delivered.load(Ordering::Relaxed), callbacks * 480);
    assert!(
        c.dropped.load(Ordering::Relaxed) > 0,
        "the full-ring path ran"
    );
    // Every callback ran inside the counting wrapper.
    assert_eq!(wrapped.load(Ordering::Relaxed), callbacks);
    assert_eq!(allocations.load(Ordering::Relaxed), 0);
}

#[test]
fn a_running_f32_stream_allocates_nothing_in_its_callback() {
    run_stream(SampleFormat::F32, "f32");
}

#[test]
fn a_running_i16_stream_allocates_nothing_in_its_callback() {
    run_stream(SampleFormat::I16, "i16");
}
