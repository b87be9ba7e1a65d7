//! symphonia's decoded packets as interleaved f32 at digital full scale ±1 (integer n-bit:
//! code / 2^(n-1), unsigned codes centred first; float as stored, f64 narrowed).

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
    let buf = decoder
        .decode(&packet)
        .map_err(|e| WavError::Decode(sym_message(&e)))?;
    Ok(Some(append_interleaved(&buf, dst)))
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
