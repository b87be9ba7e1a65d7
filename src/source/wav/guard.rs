//! The header guard, run before symphonia sees a file: it walks the chunk headers up to `data`,
//! checks the `fmt ` fields, and refuses what symphonia 0.5 would panic or over-allocate on
//! (each case is listed on [`guard`]); then it decides the few header bytes symphonia is shown
//! replaced ([`present`], read through [`PatchedFile`]), so files it cannot take as they are
//! (27–64 channels, channel masks it cannot name, a data size beyond the file, a RIFF size too
//! small) still read.

use std::fs::File;
use std::io::{self, BufReader, Read, Seek, SeekFrom};

use symphonia::core::io::MediaSource;

#[cfg(doc)]
use super::WavInfo;
use super::{WavError, MAX_CHANNELS, MAX_SAMPLE_RATE, MIN_SAMPLE_RATE};

/// Most channels symphonia 0.5 can represent: its `Channels` bit set names 26 positions, and
/// both the plain and the extensible `fmt ` paths fail beyond that.
const SYMPHONIA_MAX_CHANNELS: usize = 26;

/// The `fmt ` fields the guard checked.
#[derive(Debug, Clone)]
pub(super) struct FmtFields {
    pub(super) channels: u16,
    pub(super) sample_rate: u32,
    pub(super) block_align: u16,
    /// Bits per sample as stored.
    pub(super) container_bits: u16,
    /// Valid bits (= container bits except for extensible integer PCM).
    pub(super) valid_bits: u16,
    pub(super) float: bool,
    /// Channel mask, for WAVE_FORMAT_EXTENSIBLE.
    channel_mask: Option<u32>,
    pub(super) encoding: &'static str,
}

/// Where things are, as far as the guard looked.
#[derive(Debug, Clone)]
pub(super) struct Layout {
    riff_size: u32,
    pub(super) fmt: FmtFields,
    /// Offset of the `fmt ` payload.
    fmt_payload: u64,
    /// Offset of the audio data (just past the `data` chunk header).
    pub(super) data_payload: u64,
    /// Declared `data` size.
    pub(super) data_size: u32,
}

pub(super) const WAVE_FORMAT_PCM: u16 = 0x0001;
pub(super) const WAVE_FORMAT_IEEE_FLOAT: u16 = 0x0003;
pub(super) const WAVE_FORMAT_EXTENSIBLE: u16 = 0xFFFE;

/// Header guard, run before symphonia sees the file.
///
/// It reads the 12-byte RIFF/WAVE header, then walks the top-level chunk headers (4-byte id +
/// 4-byte size) up to the `data` chunk, and reads the fixed fields of the `fmt ` chunk. It
/// interprets nothing else; symphonia parses the header again and does all the reading.
/// What symphonia 0.5.5 does without it (each case was run):
///
/// * a chunk before `data` whose size exceeds the file: with a RIFF size of 0xFFFFFFFF a LIST
///   INFO entry is allocated at its declared size (`vec![0u8; len]`, up to 4 GiB) before the
///   read fails. The guard refuses any non-data chunk larger than the rest of the file, which
///   also bounds every allocation symphonia makes for metadata by the file size.
/// * sample rate 0: `TimeBase::new(1, 0)` panics (in every build).
/// * WAVE_FORMAT_EXTENSIBLE integer PCM with 0 bits per sample: `unreachable!()` panics.
/// * WAVE_FORMAT_EXTENSIBLE channel masks with fewer bits than channels and bit 31 set
///   (SPEAKER_ALL, 0x80000000, is common), or more than 32 channels: shift overflow panics in
///   debug builds, and an error in release builds. brink ignores speaker positions, so a mask
///   symphonia cannot take is presented to it as 0 ("unassigned", which symphonia fills in).
/// * IMA/MS ADPCM with a small block align: u16 underflow panics in debug builds. The guard
///   refuses every encoding except integer PCM and IEEE float before symphonia parses it.
/// * block align inconsistent with channels × sample size: 0 makes every read fail; too small
///   delivers a wrong frame count; 65535 makes each packet allocate 75 MB. The guard requires
///   block align = channels × bytes per sample, which bounds packets to 1152 × 512 bytes.
/// * more than 26 channels: refused ("invalid channel count"), its channel set cannot name
///   them. Files with 27–64 channels are presented to symphonia as mono with a one-sample
///   block align; interleaved samples come out in the same order and brink regroups them.
/// * 0 channels, unsupported bit depths, missing fmt or data chunk: symphonia errors, but
///   without the value; the guard says it with the value.
///
/// Not refused here: a data chunk larger than the file (truncation, reported by `read_frames`
/// once the held frames are out) and a data chunk of size 0 (a valid, empty recording: a
/// 44-byte file with a header only reads as 0 frames, which is what the header says).
pub(super) fn guard(file: &File, file_len: u64) -> Result<Layout, WavError> {
    let mut r = BufReader::with_capacity(4096, file);
    let mut head = [0u8; 12];
    if file_len < 12 || r.read_exact(&mut head).is_err() {
        return Err(WavError::NotWav);
    }
    match (&head[0..4], &head[8..12]) {
        (b"RIFF", b"WAVE") => {}
        (b"RF64", _) | (b"BW64", _) => {
            return Err(WavError::UnsupportedContainer("RF64/BW64 (64-bit WAV)"))
        }
        (b"RIFX", b"WAVE") => return Err(WavError::UnsupportedContainer("big-endian RIFX WAV")),
        _ => return Err(WavError::NotWav),
    }
    let riff_size = le_u32(&head[4..8]);

    let mut pos: u64 = 12;
    let mut fmt: Option<(FmtFields, u64)> = None;
    loop {
        let mut ch = [0u8; 8];
        if pos + 8 > file_len || r.read_exact(&mut ch).is_err() {
            return Err(if fmt.is_some() {
                WavError::NoData
            } else {
                WavError::NoFmt
            });
        }
        let id = [ch[0], ch[1], ch[2], ch[3]];
        let size = le_u32(&ch[4..8]);
        let payload = pos + 8;
        let remaining = file_len - payload;
        // symphonia counts header bytes in a u32; past 4 GiB of chunks it would overflow.
        if payload > u64::from(u32::MAX) - 64 {
            return Err(WavError::Header(
                "chunks before the audio data exceed the 4 GiB RIFF limit".to_string(),
            ));
        }
        if &id == b"data" {
            let Some((fmt, fmt_payload)) = fmt else {
                return Err(WavError::NoFmt);
            };
            return Ok(Layout {
                riff_size,
                fmt,
                fmt_payload,
                data_payload: payload,
                data_size: size,
            });
        }
        if u64::from(size) > remaining {
            return Err(WavError::ChunkTooLarge {
                id: String::from_utf8_lossy(&id).into_owned(),
                size,
                remaining,
            });
        }
        let mut skip = u64::from(size);
        if &id == b"fmt " {
            if fmt.is_some() {
                return Err(WavError::DuplicateFmt);
            }
            let mut body = [0u8; 40];
            let n = (size as usize).min(body.len());
            r.read_exact(&mut body[..n]).map_err(WavError::Read)?;
            skip -= n as u64;
            fmt = Some((check_fmt(&body[..n], size)?, payload));
        }
        // Chunks are padded to an even length.
        skip += u64::from(size & 1);
        pos = payload + u64::from(size) + u64::from(size & 1);
        r.seek_relative(skip as i64).map_err(WavError::Read)?;
    }
}

/// What symphonia is shown of a guarded file: header bytes replaced, and the channel count that
/// makes it see.
#[derive(Debug, Clone)]
pub(super) struct Presented {
    /// (absolute offset, replacement byte); a handful at most, all in the header.
    pub(super) patches: Vec<(u64, u8)>,
    /// Channels symphonia is told about: the file's, or 1 when the file has more channels than
    /// symphonia 0.5 can represent; symphonia then decodes the interleaved samples as one long
    /// mono stream, which is the same sample order.
    pub(super) sym_channels: usize,
}

/// The header bytes to replace for symphonia in a file of `file_len` bytes the guard laid out
/// (see [`guard`] for why each is needed).
pub(super) fn present(layout: &Layout, file_len: u64) -> Presented {
    let fmt = &layout.fmt;
    let channels = usize::from(fmt.channels);
    let mut patches: Vec<(u64, u8)> = Vec::new();
    let mut patch = |at: u64, bytes: &[u8]| {
        for (i, b) in bytes.iter().enumerate() {
            patches.push((at + i as u64, *b));
        }
    };
    let sym_channels = if channels > SYMPHONIA_MAX_CHANNELS {
        let bytes = fmt.container_bits / 8;
        patch(layout.fmt_payload + 2, &1u16.to_le_bytes());
        patch(layout.fmt_payload + 12, &bytes.to_le_bytes());
        1
    } else {
        channels
    };
    if let Some(mask) = fmt.channel_mask {
        if mask.count_ones() as usize != sym_channels || mask >> SYMPHONIA_MAX_CHANNELS != 0 {
            patch(layout.fmt_payload + 20, &0u32.to_le_bytes());
        }
    }
    // A data size beyond the end of the file (truncated file, or a streaming writer's
    // 0xFFFFFFFF) is presented to symphonia as the bytes the file holds: symphonia refuses a
    // data chunk longer than the RIFF size leaves (short of both being 0xFFFFFFFF), and
    // would otherwise report a bogus frame count. The reader keeps the declared size, so
    // truncation is still detected and reported by `read_frames`.
    let bytes_after_header = file_len - layout.data_payload;
    let sym_data_size = if u64::from(layout.data_size) > bytes_after_header {
        // bytes_after_header < data_size <= u32::MAX here.
        let held = u32::try_from(bytes_after_header).unwrap_or(u32::MAX);
        patch(layout.data_payload - 4, &held.to_le_bytes());
        held
    } else {
        layout.data_size
    };
    // The RIFF size is often wrong in otherwise fine files and carries nothing brink needs;
    // when it is too small for symphonia to accept the data chunk it is presented as
    // 0xFFFFFFFF. The guard has already bounded every chunk by the real file length.
    let riff_needed = (layout.data_payload - 12) + u64::from(sym_data_size);
    if u64::from(layout.riff_size) < riff_needed {
        patch(4, &u32::MAX.to_le_bytes());
    }
    Presented {
        patches,
        sym_channels,
    }
}

/// The file as symphonia sees it: the real bytes with a few header bytes replaced.
pub(super) struct PatchedFile {
    inner: File,
    pos: u64,
    len: u64,
    /// (absolute offset, replacement byte); a handful at most, all in the header.
    patches: Vec<(u64, u8)>,
}

impl PatchedFile {
    /// `inner` (of `len` bytes, read from its start) with `patches` applied.
    pub(super) fn new(inner: File, len: u64, patches: Vec<(u64, u8)>) -> PatchedFile {
        PatchedFile {
            inner,
            pos: 0,
            len,
            patches,
        }
    }
}

impl Read for PatchedFile {
    fn read(&mut self, buf: &mut [u8]) -> io::Result<usize> {
        let n = self.inner.read(buf)?;
        let end = self.pos + n as u64;
        for &(at, byte) in &self.patches {
            if at >= self.pos && at < end {
                buf[(at - self.pos) as usize] = byte;
            }
        }
        self.pos = end;
        Ok(n)
    }
}

impl Seek for PatchedFile {
    fn seek(&mut self, pos: SeekFrom) -> io::Result<u64> {
        self.pos = self.inner.seek(pos)?;
        Ok(self.pos)
    }
}

impl MediaSource for PatchedFile {
    fn is_seekable(&self) -> bool {
        true
    }

    fn byte_len(&self) -> Option<u64> {
        Some(self.len)
    }
}

/// Check the `fmt ` fields (`body` is the first ≤ 40 bytes of a chunk of `size` bytes).
fn check_fmt(body: &[u8], size: u32) -> Result<FmtFields, WavError> {
    if body.len() < 16 {
        return Err(WavError::FmtTooShort { size, needed: 16 });
    }
    let tag = le_u16(&body[0..2]);
    let channels = le_u16(&body[2..4]);
    let sample_rate = le_u32(&body[4..8]);
    let block_align = le_u16(&body[12..14]);
    let container_bits = le_u16(&body[14..16]);

    let (code, valid_bits, channel_mask) = if tag == WAVE_FORMAT_EXTENSIBLE {
        if body.len() < 40 {
            return Err(WavError::FmtTooShort { size, needed: 40 });
        }
        // cbSize (16..18) and the GUID's remaining 14 bytes are checked by symphonia.
        let valid = le_u16(&body[18..20]);
        let mask = le_u32(&body[20..24]);
        let code = le_u16(&body[24..26]);
        (code, valid, Some(mask))
    } else {
        (tag, container_bits, None)
    };
    let float = match code {
        WAVE_FORMAT_PCM => false,
        WAVE_FORMAT_IEEE_FLOAT => true,
        other => return Err(WavError::UnsupportedEncoding { code: other }),
    };
    if channels == 0 {
        return Err(WavError::NoChannels);
    }
    if usize::from(channels) > MAX_CHANNELS {
        return Err(WavError::TooManyChannels(channels));
    }
    if !(MIN_SAMPLE_RATE..=MAX_SAMPLE_RATE).contains(&sample_rate) {
        return Err(WavError::SampleRate(sample_rate));
    }
    let width_ok = if float {
        matches!(container_bits, 32 | 64)
    } else {
        matches!(container_bits, 8 | 16 | 24 | 32)
    };
    if !width_ok {
        return Err(WavError::UnsupportedBits {
            bits: container_bits,
            float,
        });
    }
    // Extensible: valid bits 0 is read as "all of them"; float must use all of them.
    let valid_bits = if valid_bits == 0 && !float {
        container_bits
    } else {
        valid_bits
    };
    if valid_bits > container_bits || (float && valid_bits != container_bits) {
        return Err(WavError::ValidBits {
            valid: valid_bits,
            container: container_bits,
        });
    }
    let bytes = container_bits / 8;
    let needed = u32::from(channels) * u32::from(bytes);
    if u32::from(block_align) != needed {
        return Err(WavError::BlockAlign {
            align: block_align,
            channels,
            bytes,
            needed,
        });
    }
    Ok(FmtFields {
        channels,
        sample_rate,
        block_align,
        container_bits,
        valid_bits,
        float,
        channel_mask,
        encoding: encoding_label(float, container_bits, valid_bits),
    })
}

/// Label for [`WavInfo::encoding`].
fn encoding_label(float: bool, container: u16, valid: u16) -> &'static str {
    match (float, container, valid) {
        (true, 32, _) => "32-bit float",
        (true, _, _) => "64-bit float",
        (false, 8, 8) => "8-bit unsigned integer PCM",
        (false, 16, 16) => "16-bit integer PCM",
        (false, 24, 24) => "24-bit integer PCM",
        (false, 32, 32) => "32-bit integer PCM",
        (false, 24, 20) => "20-bit integer PCM in 24-bit words",
        (false, 32, 24) => "24-bit integer PCM in 32-bit words",
        (false, 32, 20) => "20-bit integer PCM in 32-bit words",
        (false, 8, _) => "integer PCM in 8-bit words (fewer valid bits)",
        (false, 16, _) => "integer PCM in 16-bit words (fewer valid bits)",
        (false, 24, _) => "integer PCM in 24-bit words (fewer valid bits)",
        (false, _, _) => "integer PCM in 32-bit words (fewer valid bits)",
    }
}

fn le_u16(b: &[u8]) -> u16 {
    u16::from_le_bytes([b[0], b[1]])
}

fn le_u32(b: &[u8]) -> u32 {
    u32::from_le_bytes([b[0], b[1], b[2], b[3]])
}

#[cfg(test)]
mod tests {
    use super::super::testfiles::*;
    use super::*;
    use crate::source::wav::WavSource;

    #[test]
    fn more_channels_than_symphonia_names_are_regrouped() {
        // symphonia 0.5 names 26 channel positions; 27..=64 go through the mono regrouping.
        for channels in [26usize, 27, 40, 64] {
            let dir = tempfile::tempdir().unwrap();
            let frames = 1000;
            let samples = numbered(frames, channels);
            let path = hound_file(&dir, int_spec(channels as u16, 16), &samples);
            let expect: Vec<f32> = samples.iter().map(|&c| f32::from(c) / 32_768.0).collect();
            for max in [7, 4096] {
                let (info, s) = read_all_with(&path, max).unwrap();
                assert_eq!(info.channels, channels);
                assert_eq!(info.frames, Some(frames as u64));
                assert_eq!(s, expect, "{channels} channels, max_frames {max}");
            }
        }
    }

    #[test]
    fn speaker_all_channel_mask_is_read() {
        // 0x80000000 (SPEAKER_ALL) panics inside symphonia 0.5 debug builds without the guard.
        let dir = tempfile::tempdir().unwrap();
        let data: Vec<u8> = [16_384i16, -16_384]
            .iter()
            .flat_map(|c| c.to_le_bytes())
            .collect();
        let f = extensible(2, 16, 16, 0x8000_0000, WAVE_FORMAT_PCM);
        let path = write_file(&dir, "spk.wav", &wav_bytes(&f, &data));
        let (info, s) = read_all(&path).unwrap();
        assert_eq!(info.channels, 2);
        assert_eq!(s, [0.5, -0.5]);
    }

    #[test]
    fn streaming_data_size_reads_to_end_of_file() {
        // ffmpeg writing to a pipe leaves RIFF and data sizes at 0xFFFFFFFF.
        let dir = tempfile::tempdir().unwrap();
        let codes: Vec<i16> = (0..2501).map(|i| i as i16).collect();
        let data: Vec<u8> = codes.iter().flat_map(|c| c.to_le_bytes()).collect();
        let f = plain(WAVE_FORMAT_PCM, 1, 48_000, 16);
        let expect: Vec<f32> = codes.iter().map(|&c| f32::from(c) / 32_768.0).collect();
        for riff_size in [Some(u32::MAX), None] {
            let bytes = riff(riff_size, &[fmt_chunk(&f), chunk(b"data", u32::MAX, &data)]);
            // `chunk` padded nothing (even payload), so the file ends with the samples.
            let path = write_file(&dir, "stream.wav", &bytes);
            let (info, s) = read_all(&path).unwrap();
            assert_eq!(info.frames, Some(2501));
            assert_eq!(s, expect);
        }
    }

    #[test]
    fn wrong_riff_size_is_tolerated() {
        let dir = tempfile::tempdir().unwrap();
        let data: Vec<u8> = [1000i16, -1000]
            .iter()
            .flat_map(|c| c.to_le_bytes())
            .collect();
        let f = plain(WAVE_FORMAT_PCM, 2, 48_000, 16);
        for riff_size in [0, 4, 20] {
            let bytes = riff(Some(riff_size), &[fmt_chunk(&f), data_chunk(&data)]);
            let path = write_file(&dir, "r.wav", &bytes);
            let (_, s) = read_all(&path).unwrap();
            assert_eq!(s, [1000.0 / 32_768.0, -1000.0 / 32_768.0]);
        }
    }

    #[test]
    fn chunks_around_the_data_are_skipped() {
        let dir = tempfile::tempdir().unwrap();
        let data: Vec<u8> = [8192i16, -8192, 4096]
            .iter()
            .flat_map(|c| c.to_le_bytes())
            .collect();
        let f = plain(WAVE_FORMAT_PCM, 1, 48_000, 16);
        let mut info_list = b"INFO".to_vec();
        info_list.extend(chunk(b"INAM", 5, b"tone\0"));
        let bytes = riff(
            None,
            &[
                chunk(b"JUNK", 3, b"abc"),
                fmt_chunk(&f),
                chunk(b"LIST", info_list.len() as u32, &info_list),
                data_chunk(&data),
                chunk(b"id3 ", 4, b"tail"),
            ],
        );
        let path = write_file(&dir, "c.wav", &bytes);
        let (info, s) = read_all(&path).unwrap();
        assert_eq!(info.frames, Some(3));
        assert_eq!(s, [0.25, -0.25, 0.125]);
    }

    // ---- hostile input: an error naming the problem, never a panic or a huge allocation ----

    #[test]
    fn fmt_chunk_claiming_4_gib() {
        let mut fmt = fmt_chunk(&plain(WAVE_FORMAT_PCM, 2, 48_000, 16));
        fmt[4..8].copy_from_slice(&0xFFFF_FFF0u32.to_le_bytes());
        for riff_size in [None, Some(u32::MAX)] {
            let msg = error_of(&riff(riff_size, &[fmt.clone(), data_chunk(&[0; 40])]));
            assert_contains(&msg, &["'fmt ' chunk declares 4294967280 bytes", "remain"]);
        }
    }

    #[test]
    fn list_chunk_claiming_4_gib() {
        // With a RIFF size of 0xFFFFFFFF symphonia would allocate the INFO entry's 4 GiB.
        let mut list = b"INFO".to_vec();
        list.extend(b"INAM");
        list.extend(0xFFFF_F000u32.to_le_bytes());
        list.extend(b"abcd");
        let f = plain(WAVE_FORMAT_PCM, 2, 48_000, 16);
        for riff_size in [None, Some(u32::MAX)] {
            let bytes = riff(
                riff_size,
                &[fmt_chunk(&f), chunk(b"LIST", 0xFFFF_FF00, &list)],
            );
            let msg = error_of(&bytes);
            assert_contains(&msg, &["'LIST' chunk declares 4294967040 bytes"]);
        }
    }

    #[test]
    fn data_claiming_4_gib_in_a_100_byte_file() {
        let dir = tempfile::tempdir().unwrap();
        let f = plain(WAVE_FORMAT_PCM, 1, 48_000, 16);
        let bytes = riff(
            None,
            &[fmt_chunk(&f), chunk(b"data", 0xFFFF_FFF0, &[0; 56])],
        );
        assert_eq!(bytes.len(), 100);
        let path = write_file(&dir, "d.wav", &bytes);
        let mut src = WavSource::open(&path).unwrap();
        assert_eq!(src.frames_in_file(), 28);
        let mut buf = Vec::new();
        assert_eq!(src.read_frames(&mut buf, 1000).unwrap(), 28);
        let msg = src.read_frames(&mut buf, 1000).unwrap_err().to_string();
        assert_eq!(
            msg,
            "truncated: header declares 2147483640 frames, file holds 28"
        );
        // Through the helper too.
        assert_contains(&error_of(&bytes), &["truncated", "2147483640", "28"]);
    }

    #[test]
    fn zero_channels() {
        let mut f = plain(WAVE_FORMAT_PCM, 0, 48_000, 16);
        f.block_align = 0;
        assert_eq!(
            error_of(&wav_bytes(&f, &[0; 8])),
            "header declares 0 channels"
        );
    }

    #[test]
    fn too_many_channels() {
        let f = plain(WAVE_FORMAT_PCM, 96, 48_000, 16);
        assert_eq!(
            error_of(&wav_bytes(&f, &[0; 192])),
            "96 channels: brink handles 1 to 64"
        );
        let f = extensible(65, 16, 16, 0, WAVE_FORMAT_PCM);
        assert_contains(&error_of(&wav_bytes(&f, &[0; 130])), &["65 channels"]);
    }

    #[test]
    fn zero_and_absurd_sample_rates() {
        // Rate 0 panics inside symphonia (TimeBase::new(1, 0)) without the guard.
        let f = plain(WAVE_FORMAT_PCM, 2, 0, 16);
        assert_eq!(
            error_of(&wav_bytes(&f, &[0; 8])),
            "sample rate 0 Hz is outside 8000–384000 Hz"
        );
        for rate in [7_999, 384_001, u32::MAX] {
            let f = plain(WAVE_FORMAT_PCM, 2, rate, 16);
            assert_contains(&error_of(&wav_bytes(&f, &[0; 8])), &[&format!("{rate} Hz")]);
        }
    }

    #[test]
    fn block_align_zero_or_inconsistent() {
        for align in [0u16, 1, 3, 65_535] {
            let mut f = plain(WAVE_FORMAT_PCM, 2, 48_000, 16);
            f.block_align = align;
            let msg = error_of(&wav_bytes(&f, &[0; 400]));
            assert_contains(
                &msg,
                &[&format!("{align}-byte frames"), "block align", "need 4"],
            );
        }
    }

    #[test]
    fn unsupported_bits_per_sample() {
        for bits in [0u16, 7, 12, 65] {
            let mut f = plain(WAVE_FORMAT_PCM, 1, 48_000, 16);
            f.bits = bits;
            let msg = error_of(&wav_bytes(&f, &[0; 8]));
            assert_contains(
                &msg,
                &[&format!("{bits}-bit integer samples are not supported")],
            );
        }
        // Extensible with 0 bits hits an unreachable!() in symphonia without the guard.
        let mut f = extensible(2, 16, 16, 3, WAVE_FORMAT_PCM);
        f.bits = 0;
        assert_contains(&error_of(&wav_bytes(&f, &[0; 8])), &["0-bit integer"]);
        let f = plain(WAVE_FORMAT_IEEE_FLOAT, 1, 48_000, 16);
        assert_contains(&error_of(&wav_bytes(&f, &[0; 8])), &["16-bit float"]);
    }

    #[test]
    fn extensible_valid_bits_beyond_container() {
        let f = extensible(1, 24, 32, 4, WAVE_FORMAT_PCM);
        assert_eq!(
            error_of(&wav_bytes(&f, &[0; 6])),
            "header declares 32 valid bits in 24-bit samples"
        );
    }

    #[test]
    fn companded_and_compressed_encodings_are_refused_by_name() {
        let mut mulaw = plain(7, 1, 8_000, 8);
        mulaw.block_align = 1;
        assert_eq!(
            error_of(&wav_bytes(&mulaw, &[0; 8])),
            "µ-law encoding is not supported: brink measures linear PCM or float WAV"
        );
        let alaw = extensible(1, 8, 8, 4, 6);
        assert_contains(&error_of(&wav_bytes(&alaw, &[0; 8])), &["A-law encoding"]);
        // IMA ADPCM with block align 2 underflows inside symphonia (debug) without the guard.
        let mut ima = plain(0x11, 2, 48_000, 4);
        ima.block_align = 2;
        assert_contains(
            &error_of(&wav_bytes(&ima, &[0; 8])),
            &["IMA ADPCM encoding"],
        );
        let mp3 = plain(0x55, 2, 48_000, 0);
        assert_contains(&error_of(&wav_bytes(&mp3, &[0; 8])), &["MP3 encoding"]);
        let odd = plain(0x1234, 2, 48_000, 16);
        assert_contains(
            &error_of(&wav_bytes(&odd, &[0; 8])),
            &["format code 0x1234"],
        );
    }

    #[test]
    fn garbage_after_riff() {
        let msg = error_of(b"RIFF\x10\x00\x00\x00garbage garbage garbage!");
        assert_eq!(msg, "not a WAV file (no RIFF/WAVE header)");
        assert_eq!(error_of(b"RIFF"), "not a WAV file (no RIFF/WAVE header)");
        assert_eq!(
            error_of(b"ID3\x04 an mp3"),
            "not a WAV file (no RIFF/WAVE header)"
        );
        assert_contains(&error_of(b"RF64\xff\xff\xff\xffWAVEds64"), &["RF64"]);
    }

    #[test]
    fn missing_fmt_or_data_chunk() {
        let f = plain(WAVE_FORMAT_PCM, 1, 48_000, 16);
        assert_contains(
            &error_of(&riff(None, &[data_chunk(&[0; 8])])),
            &["no fmt chunk"],
        );
        assert_contains(&error_of(&riff(None, &[fmt_chunk(&f)])), &["no data chunk"]);
        assert_contains(&error_of(&riff(None, &[])), &["no fmt chunk"]);
        let short = chunk(b"fmt ", 12, &[1, 0, 1, 0, 0x80, 0xbb, 0, 0, 0, 0, 0, 0]);
        assert_contains(
            &error_of(&riff(None, &[short, data_chunk(&[0; 8])])),
            &["fmt chunk is 12 bytes"],
        );
    }
}
