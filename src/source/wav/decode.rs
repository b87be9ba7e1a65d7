//! symphonia's packets as interleaved f32 at digital full scale ±1 (integer n-bit:
//! code / 2^(n-1), unsigned codes centred first; float as stored, f64 narrowed).
//!
//! symphonia parses the container and cuts the data into packets of whole frames. For the
//! layouts nearly every file uses (8-bit unsigned, 16-, 24- and 32-bit signed integers whose
//! valid bits fill their container, 32-bit float) the packet's bytes are converted here in one
//! pass, straight into the caller's buffer: the same values symphonia's decoder gives (the
//! round-trip tests check every layout code for code), without its planar buffer and the second
//! pass that interleaves it, which were a fifth of a scan's time. Every other layout, and any
//! packet that does not hold whole samples, goes through symphonia's decoder.

use std::io;

use symphonia::core::audio::{AudioBuffer, AudioBufferRef, Signal};
use symphonia::core::codecs::Decoder;
use symphonia::core::errors::Error as SymError;
use symphonia::core::formats::FormatReader;
use symphonia::core::sample::Sample;
use symphonia::default::codecs::PcmDecoder;
use symphonia::default::formats::WavReader;

use super::{sym_message, WavError};

/// Decode the next packet, appending its interleaved samples to `dst`.
/// `Ok(None)` at the end of the data.
pub(super) fn decode_packet(
    reader: &mut WavReader,
    decoder: &mut PcmDecoder,
    direct: Option<Direct>,
    dst: &mut Vec<f32>,
) -> Result<Option<usize>, WavError> {
    let packet = match reader.next_packet() {
        Ok(p) => p,
        // symphonia signals the end of the data chunk, and also the end of a file shorter than
        // its data chunk, with an UnexpectedEof I/O error; read_frames tells them apart by
        // counting frames.
        Err(SymError::IoError(e)) if e.kind() == io::ErrorKind::UnexpectedEof => return Ok(None),
        Err(SymError::IoError(e)) => return Err(WavError::Read(e)),
        Err(e) => return Err(WavError::Decode(sym_message(&e))),
    };
    if let Some(d) = direct {
        if let Some(n) = d.convert(packet.buf(), dst) {
            return Ok(Some(n));
        }
    }
    let buf = decoder
        .decode(&packet)
        .map_err(|e| WavError::Decode(sym_message(&e)))?;
    Ok(Some(append_interleaved(&buf, dst)))
}

/// A sample layout converted from the packet's bytes without symphonia's decoder.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Direct {
    U8,
    S16,
    S24,
    S32,
    F32,
}

impl Direct {
    /// The direct layout for a `fmt ` chunk, if it has one.
    pub(super) fn for_format(container_bits: u16, valid_bits: u16, float: bool) -> Option<Self> {
        match (float, container_bits, valid_bits) {
            (true, 32, 32) => Some(Direct::F32),
            (false, 8, 8) => Some(Direct::U8),
            (false, 16, 16) => Some(Direct::S16),
            (false, 24, 24) => Some(Direct::S24),
            (false, 32, 32) => Some(Direct::S32),
            _ => None,
        }
    }

    fn bytes(self) -> usize {
        match self {
            Direct::U8 => 1,
            Direct::S16 => 2,
            Direct::S24 => 3,
            Direct::S32 | Direct::F32 => 4,
        }
    }

    /// Append the samples of `bytes` to `dst`; `None` (nothing appended) when `bytes` does not
    /// hold whole samples.
    fn convert(self, bytes: &[u8], dst: &mut Vec<f32>) -> Option<usize> {
        const S8: f32 = 1.0 / 128.0;
        const S16: f32 = 1.0 / 32_768.0;
        const S24: f32 = 1.0 / 8_388_608.0;
        const S32: f32 = 1.0 / 2_147_483_648.0;
        let w = self.bytes();
        if bytes.len() % w != 0 {
            return None;
        }
        let n = bytes.len() / w;
        let start = dst.len();
        dst.resize(start + n, 0.0);
        let out = &mut dst[start..];
        match self {
            Direct::U8 => {
                for (o, &b) in out.iter_mut().zip(bytes) {
                    *o = (f32::from(b) - 128.0) * S8;
                }
            }
            Direct::S16 => {
                for (o, b) in out.iter_mut().zip(bytes.chunks_exact(2)) {
                    *o = f32::from(i16::from_le_bytes([b[0], b[1]])) * S16;
                }
            }
            Direct::S24 => {
                for (o, b) in out.iter_mut().zip(bytes.chunks_exact(3)) {
                    // Sign-extend the 24-bit code through the top of an i32.
                    let v = i32::from_le_bytes([0, b[0], b[1], b[2]]) >> 8;
                    *o = v as f32 * S24;
                }
            }
            Direct::S32 => {
                for (o, b) in out.iter_mut().zip(bytes.chunks_exact(4)) {
                    // `as f32` rounds to nearest; scaling by a power of two is then exact.
                    *o = i32::from_le_bytes([b[0], b[1], b[2], b[3]]) as f32 * S32;
                }
            }
            Direct::F32 => {
                for (o, b) in out.iter_mut().zip(bytes.chunks_exact(4)) {
                    *o = f32::from_le_bytes([b[0], b[1], b[2], b[3]]);
                }
            }
        }
        Some(n)
    }
}

/// Append a decoded buffer to `dst` as interleaved f32 at digital full scale ±1.
/// Returns the number of samples appended.
fn append_interleaved(buf: &AudioBufferRef<'_>, dst: &mut Vec<f32>) -> usize {
    const S8: f32 = 1.0 / 128.0;
    const S16: f32 = 1.0 / 32_768.0;
    const S24: f32 = 1.0 / 8_388_608.0;
    const S32: f32 = 1.0 / 2_147_483_648.0;
    match buf {
        AudioBufferRef::U8(b) => interleave(b, dst, |s| (f32::from(s) - 128.0) * S8),
        AudioBufferRef::S8(b) => interleave(b, dst, |s| f32::from(s) * S8),
        AudioBufferRef::U16(b) => interleave(b, dst, |s| (f32::from(s) - 32_768.0) * S16),
        AudioBufferRef::S16(b) => interleave(b, dst, |s| f32::from(s) * S16),
        AudioBufferRef::U24(b) => interleave(b, dst, |s| (s.inner() as f32 - 8_388_608.0) * S24),
        AudioBufferRef::S24(b) => interleave(b, dst, |s| s.inner() as f32 * S24),
        AudioBufferRef::U32(b) => {
            interleave(b, dst, |s| ((f64::from(s) - 2_147_483_648.0) as f32) * S32)
        }
        // `as f32` rounds to nearest; scaling by a power of two is then exact.
        AudioBufferRef::S32(b) => interleave(b, dst, |s| s as f32 * S32),
        AudioBufferRef::F32(b) => interleave(b, dst, |s| s),
        AudioBufferRef::F64(b) => interleave(b, dst, |s| s as f32),
    }
}

/// Interleave the planes of `buf` into `dst`, converting each sample with `f`.
#[inline]
fn interleave<S: Sample, F: Fn(S) -> f32>(buf: &AudioBuffer<S>, dst: &mut Vec<f32>, f: F) -> usize {
    let ch = buf.spec().channels.count();
    let frames = buf.frames();
    let start = dst.len();
    match ch {
        1 => dst.extend(buf.chan(0).iter().map(|&s| f(s))),
        2 => {
            let (l, r) = (buf.chan(0), buf.chan(1));
            dst.resize(start + 2 * frames, 0.0);
            for ((o, &a), &b) in dst[start..].chunks_exact_mut(2).zip(l).zip(r) {
                o[0] = f(a);
                o[1] = f(b);
            }
        }
        _ => {
            dst.resize(start + ch * frames, 0.0);
            let out = &mut dst[start..];
            for c in 0..ch {
                for (o, &s) in out[c..].iter_mut().step_by(ch).zip(buf.chan(c)) {
                    *o = f(s);
                }
            }
        }
    }
    dst.len() - start
}
