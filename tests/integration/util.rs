//! Shared helpers: signal synthesis in f64 and the real analysis path.

use std::f64::consts::PI;

use brink::analysis::report::ChannelReport;
use brink::analysis::{ChannelAnalyzer, ChannelSettings};
use brink::dsp::tone::ToneAnalyzer;

/// Run the per-channel analyser exactly as `scan` does, with the tone span covering everything.
pub fn analyze(x: &[f32], rate: u32, settings: ChannelSettings) -> ChannelReport {
    let mut a = ChannelAnalyzer::new(1, rate, settings)
        .keep_span(0..x.len() as u64)
        .keep_details();
    // Feed in uneven blocks, as a real source would.
    let mut rest = x;
    let mut k = 0;
    while !rest.is_empty() {
        let n = [4096, 1000, 333, 8192][k % 4].min(rest.len());
        a.process(&rest[..n], &mut |_| {});
        rest = &rest[n..];
        k += 1;
    }
    a.close(&mut |_| {});
    a.report(&mut ToneAnalyzer::new())
}

/// `Σ amp·sin(2π·f·n/rate + phase)` over the components, as f64.
pub fn tones(rate: u32, frames: usize, parts: &[(f64, f64, f64)]) -> Vec<f64> {
    (0..frames)
        .map(|n| {
            let t = n as f64 / rate as f64;
            parts
                .iter()
                .map(|&(f, a, ph)| a * (2.0 * PI * f * t + ph).sin())
                .sum()
        })
        .collect()
}

/// Narrow to f32 samples.
pub fn to_f32(x: &[f64]) -> Vec<f32> {
    x.iter().map(|&v| v as f32).collect()
}

/// Round to an n-bit integer grid (no dither), returned as normalised f32.
pub fn quantise(x: &[f64], bits: u32) -> Vec<f32> {
    let half = 2f64.powi(bits as i32 - 1);
    x.iter()
        .map(|&v| ((v * half).round().clamp(-half, half - 1.0) / half) as f32)
        .collect()
}

/// Deterministic Gaussian noise (Box-Muller over a small xorshift generator), RMS `rms`.
pub fn gaussian(frames: usize, rms: f64, seed: u64) -> Vec<f64> {
    let mut s = seed.wrapping_mul(0x9E37_79B9_7F4A_7C15) | 1;
    let mut uniform = move || {
        s ^= s << 13;
        s ^= s >> 7;
        s ^= s << 17;
        ((s >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    };
    (0..frames)
        .map(|_| {
            let (u1, u2) = (uniform(), uniform());
            rms * (-2.0 * u1.ln()).sqrt() * (2.0 * PI * u2).cos()
        })
        .collect()
}

/// dB of a linear ratio.
pub fn db(x: f64) -> f64 {
    20.0 * x.log10()
}

/// Linear amplitude of a dB value.
pub fn lin(d: f64) -> f64 {
    10f64.powf(d / 20.0)
}

/// The `brink` binary under test.
pub fn brink() -> assert_cmd::Command {
    assert_cmd::Command::cargo_bin("brink").unwrap()
}

/// `brink gen DIR/NAME ARGS...`: a test file made by the real generator.
pub fn gen(dir: &std::path::Path, name: &str, args: &[&str]) -> std::path::PathBuf {
    let f = dir.join(name);
    brink().arg("gen").arg(&f).args(args).assert().success();
    f
}

/// Lines of NDJSON, each parsed.
pub fn records(text: &str) -> Vec<serde_json::Value> {
    text.lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect()
}

/// `brink scan --json EXTRA... PATH`: its one report line, parsed.
pub fn scan_json(path: &std::path::Path, extra: &[&str]) -> serde_json::Value {
    let out = brink()
        .arg("scan")
        .arg("--json")
        .args(extra)
        .arg(path)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8(out.stdout).unwrap();
    assert_eq!(text.lines().count(), 1, "one object per file, one per line");
    serde_json::from_str(text.trim()).unwrap()
}

/// Bytes of a canonical 44-byte-header WAV (`fmt ` of 16 bytes), with the declared data length
/// and format fields taken as given, so tests can also build broken files.
pub fn wav_bytes(
    format_tag: u16,
    channels: u16,
    rate: u32,
    bits: u16,
    declared: u32,
    data: &[u8],
) -> Vec<u8> {
    let block = channels.wrapping_mul(bits / 8);
    let mut v = Vec::new();
    v.extend_from_slice(b"RIFF");
    v.extend_from_slice(&(36 + data.len() as u32).to_le_bytes());
    v.extend_from_slice(b"WAVEfmt ");
    v.extend_from_slice(&16u32.to_le_bytes());
    v.extend_from_slice(&format_tag.to_le_bytes());
    v.extend_from_slice(&channels.to_le_bytes());
    v.extend_from_slice(&rate.to_le_bytes());
    v.extend_from_slice(&(rate.wrapping_mul(block as u32)).to_le_bytes());
    v.extend_from_slice(&block.to_le_bytes());
    v.extend_from_slice(&bits.to_le_bytes());
    v.extend_from_slice(b"data");
    v.extend_from_slice(&declared.to_le_bytes());
    v.extend_from_slice(data);
    v
}

/// A 64-bit float WAV (format tag 3) of interleaved frames.
pub fn f64_wav(channels: u16, rate: u32, interleaved: &[f64]) -> Vec<u8> {
    let data: Vec<u8> = interleaved.iter().flat_map(|v| v.to_le_bytes()).collect();
    wav_bytes(3, channels, rate, 64, data.len() as u32, &data)
}

/// Write 24-bit integer WAV with hound.
pub fn write_i24(path: &std::path::Path, rate: u32, channels: &[Vec<f64>]) {
    let spec = hound::WavSpec {
        channels: channels.len() as u16,
        sample_rate: rate,
        bits_per_sample: 24,
        sample_format: hound::SampleFormat::Int,
    };
    let mut w = hound::WavWriter::create(path, spec).unwrap();
    let full = (1 << 23) as f64;
    for i in 0..channels[0].len() {
        for c in channels {
            w.write_sample((c[i] * full).round().clamp(-full, full - 1.0) as i32)
                .unwrap();
        }
    }
    w.finalize().unwrap();
}
