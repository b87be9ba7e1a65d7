//! WAV files written by hand for the tests: `fmt ` descriptions, chunks with sizes that may lie,
//! RIFF wrappers, hound-written files, and reading a file back whole or to its error.

use std::fs::File;
use std::io::Write;
use std::path::Path;

use super::guard::WAVE_FORMAT_EXTENSIBLE;
use super::{WavError, WavInfo, WavSource};

/// A `fmt ` description for hand-written fixtures.
#[derive(Clone, Copy)]
pub(super) struct Fmt {
    pub(super) tag: u16,
    pub(super) channels: u16,
    pub(super) rate: u32,
    pub(super) block_align: u16,
    pub(super) bits: u16,
    /// (valid bits, channel mask, sub-format code) for WAVE_FORMAT_EXTENSIBLE.
    pub(super) ext: Option<(u16, u32, u16)>,
}

pub(super) fn plain(tag: u16, channels: u16, rate: u32, bits: u16) -> Fmt {
    Fmt {
        tag,
        channels,
        rate,
        block_align: channels * (bits / 8),
        bits,
        ext: None,
    }
}

pub(super) fn extensible(channels: u16, bits: u16, valid: u16, mask: u32, sub: u16) -> Fmt {
    Fmt {
        tag: WAVE_FORMAT_EXTENSIBLE,
        channels,
        rate: 48_000,
        block_align: channels * (bits / 8),
        bits,
        ext: Some((valid, mask, sub)),
    }
}

pub(super) fn fmt_payload(f: &Fmt) -> Vec<u8> {
    let mut p = Vec::new();
    p.extend(f.tag.to_le_bytes());
    p.extend(f.channels.to_le_bytes());
    p.extend(f.rate.to_le_bytes());
    p.extend((f.rate.wrapping_mul(u32::from(f.block_align))).to_le_bytes());
    p.extend(f.block_align.to_le_bytes());
    p.extend(f.bits.to_le_bytes());
    if let Some((valid, mask, sub)) = f.ext {
        p.extend(22u16.to_le_bytes());
        p.extend(valid.to_le_bytes());
        p.extend(mask.to_le_bytes());
        p.extend(sub.to_le_bytes());
        p.extend([
            0x00, 0x00, 0x00, 0x00, 0x10, 0x00, 0x80, 0x00, 0x00, 0xaa, 0x00, 0x38, 0x9b, 0x71,
        ]);
    }
    p
}

/// A chunk with a declared size (which may lie) and a payload (padded to even length).
pub(super) fn chunk(id: &[u8; 4], declared: u32, payload: &[u8]) -> Vec<u8> {
    let mut c = id.to_vec();
    c.extend(declared.to_le_bytes());
    c.extend(payload);
    if payload.len() % 2 == 1 {
        c.push(0);
    }
    c
}

pub(super) fn fmt_chunk(f: &Fmt) -> Vec<u8> {
    let p = fmt_payload(f);
    chunk(b"fmt ", p.len() as u32, &p)
}

pub(super) fn data_chunk(payload: &[u8]) -> Vec<u8> {
    chunk(b"data", payload.len() as u32, payload)
}

/// RIFF/WAVE around `chunks`; `riff_size` None = the true size.
pub(super) fn riff(riff_size: Option<u32>, chunks: &[Vec<u8>]) -> Vec<u8> {
    let body = chunks.concat();
    let mut v = b"RIFF".to_vec();
    v.extend(riff_size.unwrap_or(4 + body.len() as u32).to_le_bytes());
    v.extend(b"WAVE");
    v.extend(body);
    v
}

pub(super) fn wav_bytes(f: &Fmt, data: &[u8]) -> Vec<u8> {
    riff(None, &[fmt_chunk(f), data_chunk(data)])
}

pub(super) fn write_file(dir: &tempfile::TempDir, name: &str, bytes: &[u8]) -> std::path::PathBuf {
    let path = dir.path().join(name);
    let mut f = File::create(&path).unwrap();
    f.write_all(bytes).unwrap();
    path
}

pub(super) fn hound_file<S: hound::Sample + Copy>(
    dir: &tempfile::TempDir,
    spec: hound::WavSpec,
    samples: &[S],
) -> std::path::PathBuf {
    let path = dir.path().join("h.wav");
    let mut w = hound::WavWriter::create(&path, spec).unwrap();
    for &s in samples {
        w.write_sample(s).unwrap();
    }
    w.finalize().unwrap();
    path
}

pub(super) fn int_spec(channels: u16, bits: u16) -> hound::WavSpec {
    hound::WavSpec {
        channels,
        sample_rate: 48_000,
        bits_per_sample: bits,
        sample_format: hound::SampleFormat::Int,
    }
}

/// Read everything with `max_frames` per call, checking each call's count.
pub(super) fn read_all_with(
    path: &Path,
    max_frames: usize,
) -> Result<(WavInfo, Vec<f32>), WavError> {
    let mut src = WavSource::open(path)?;
    let info = src.info().clone();
    let mut all = Vec::new();
    let mut buf = Vec::new();
    loop {
        let n = src.read_frames(&mut buf, max_frames)?;
        assert_eq!(
            buf.len(),
            n * info.channels,
            "returned count matches buffer"
        );
        assert!(n <= max_frames, "max_frames honoured: {n} > {max_frames}");
        if n == 0 {
            break;
        }
        all.extend_from_slice(&buf);
    }
    Ok((info, all))
}

pub(super) fn read_all(path: &Path) -> Result<(WavInfo, Vec<f32>), WavError> {
    read_all_with(path, 4096)
}

/// The error from opening and reading `bytes`; fails the test if there is none.
pub(super) fn error_of(bytes: &[u8]) -> String {
    let dir = tempfile::tempdir().unwrap();
    let path = write_file(&dir, "x.wav", bytes);
    match read_all(&path) {
        Ok((info, s)) => panic!("expected an error, got {info:?} with {} samples", s.len()),
        Err(e) => {
            let msg = e.to_string();
            assert!(!msg.contains('\n'), "one line: {msg}");
            msg
        }
    }
}

pub(super) fn assert_contains(msg: &str, words: &[&str]) {
    for w in words {
        assert!(msg.contains(w), "{msg:?} should contain {w:?}");
    }
}

/// Codes that tell every (frame, channel) apart, for order checks.
pub(super) fn numbered(frames: usize, channels: usize) -> Vec<i16> {
    (0..frames * channels)
        .map(|k| (k % 65_536) as u16 as i16)
        .collect()
}
