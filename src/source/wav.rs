//! WAV files, read through symphonia.
//!
//! Demuxing (chunk walking, `fmt ` parsing, data bounds) and sample decoding are symphonia's
//! (`WavReader` + `PcmDecoder`). Before symphonia sees a file, [`WavSource::open`] runs a small
//! *guard* over the header, because symphonia 0.5 trusts several header fields in ways that
//! panic or allocate on hostile input (each measured, see the comment on [`guard`]). The guard
//! also lets brink phrase errors for people ("sample rate 0 Hz is outside 8000–384000 Hz")
//! where symphonia only has fixed strings without the offending value.

use std::fs::File;
use std::io::{self, BufReader, Read, Seek, SeekFrom};
use std::path::Path;

use symphonia::core::audio::{AudioBuffer, AudioBufferRef, Signal};
use symphonia::core::codecs::{
    Decoder, DecoderOptions, CODEC_TYPE_PCM_F32LE, CODEC_TYPE_PCM_F64LE,
};
use symphonia::core::errors::Error as SymError;
use symphonia::core::formats::{FormatOptions, FormatReader};
use symphonia::core::io::{MediaSource, MediaSourceStream, MediaSourceStreamOptions};
use symphonia::core::sample::Sample;
use symphonia::default::codecs::PcmDecoder;
use symphonia::default::formats::WavReader;

/// Lowest sample rate brink accepts (Hz).
pub const MIN_SAMPLE_RATE: u32 = 8_000;
/// Highest sample rate brink accepts (Hz).
pub const MAX_SAMPLE_RATE: u32 = 384_000;
/// Most channels brink accepts.
pub const MAX_CHANNELS: usize = 64;

/// Most channels symphonia 0.5 can represent: its `Channels` bit set names 26 positions, and
/// both the plain and the extensible `fmt ` paths fail beyond that.
const SYMPHONIA_MAX_CHANNELS: usize = 26;

/// What the file holds.
#[derive(Debug, Clone, PartialEq)]
pub struct WavInfo {
    /// Sample rate (Hz).
    pub sample_rate: u32,
    /// Number of interleaved channels.
    pub channels: usize,
    /// Bits per sample: for integer PCM the *valid* bits (e.g. 24 for 24-bit audio stored in
    /// 32-bit words by WAVE_FORMAT_EXTENSIBLE), for float 32 or 64.
    pub bits_per_sample: u32,
    /// IEEE float samples.
    pub float: bool,
    /// Frames the header declares. For a streaming header (data size 0xFFFFFFFF, "until end of
    /// file") it is the number of whole frames the file holds instead.
    pub frames: Option<u64>,
    /// Human description of the sample encoding, e.g. "16-bit integer PCM", "32-bit float".
    pub encoding: &'static str,
}

impl WavInfo {
    /// Integer bit depth for full-scale detection: Some(bits) for integer PCM, None for float.
    pub fn integer_bits(&self) -> Option<u32> {
        if self.float {
            None
        } else {
            Some(self.bits_per_sample)
        }
    }

    /// Duration in seconds, when the frame count is known.
    pub fn duration_s(&self) -> Option<f64> {
        self.frames.map(|f| f as f64 / f64::from(self.sample_rate))
    }
}

/// Why a WAV file cannot be read. Display is one line for people; the caller adds the file name.
#[derive(Debug, thiserror::Error)]
pub enum WavError {
    /// The file could not be opened (missing, no permission, ...).
    #[error("cannot open: {0}")]
    Open(#[source] io::Error),
    /// The path names a directory.
    #[error("is a directory, not a WAV file")]
    IsDirectory,
    /// The file has no bytes at all.
    #[error("file is empty")]
    Empty,
    /// The file does not start with a RIFF/WAVE header.
    #[error("not a WAV file (no RIFF/WAVE header)")]
    NotWav,
    /// A WAV-like container brink does not read (RF64, big-endian RIFX).
    #[error("{0} is not supported: brink reads RIFF WAV files")]
    UnsupportedContainer(&'static str),
    /// A chunk before the audio claims more bytes than the file has left.
    #[error("damaged header: '{id}' chunk declares {size} bytes, but only {remaining} remain in the file")]
    ChunkTooLarge {
        /// Chunk id, e.g. "LIST".
        id: String,
        /// Declared chunk size (bytes).
        size: u32,
        /// Bytes left in the file after the chunk header.
        remaining: u64,
    },
    /// The header has no `fmt ` chunk before the audio.
    #[error("damaged header: no fmt chunk before the audio data")]
    NoFmt,
    /// The header has more than one `fmt ` chunk.
    #[error("damaged header: more than one fmt chunk")]
    DuplicateFmt,
    /// The `fmt ` chunk is too short for its format.
    #[error("damaged header: fmt chunk is {size} bytes, this format needs at least {needed}")]
    FmtTooShort {
        /// Declared `fmt ` size.
        size: u32,
        /// Minimum size for the format.
        needed: u32,
    },
    /// No `data` chunk: the file holds no audio.
    #[error("no data chunk: the file holds no audio")]
    NoData,
    /// A sample encoding other than linear PCM or IEEE float.
    #[error("{} encoding is not supported: brink measures linear PCM or float WAV", encoding_name(*.code))]
    UnsupportedEncoding {
        /// WAVE format code (the extensible sub-format's code for WAVE_FORMAT_EXTENSIBLE).
        code: u16,
    },
    /// A sample width brink does not read.
    #[error("{bits}-bit {} samples are not supported: brink reads 8, 16, 24 or 32-bit integer and 32 or 64-bit float", if *.float { "float" } else { "integer" })]
    UnsupportedBits {
        /// Declared bits per sample.
        bits: u16,
        /// IEEE float format.
        float: bool,
    },
    /// The extensible header's valid bits do not fit its sample width.
    #[error("header declares {valid} valid bits in {container}-bit samples")]
    ValidBits {
        /// Declared valid bits per sample.
        valid: u16,
        /// Declared (container) bits per sample.
        container: u16,
    },
    /// Zero channels.
    #[error("header declares 0 channels")]
    NoChannels,
    /// More channels than brink handles.
    #[error("{0} channels: brink handles 1 to 64")]
    TooManyChannels(u16),
    /// Sample rate outside the supported range.
    #[error("sample rate {0} Hz is outside 8000–384000 Hz")]
    SampleRate(u32),
    /// Frame size (block align) inconsistent with channels × sample width.
    #[error("header declares {align}-byte frames (block align), but {channels} channels of {bytes}-byte samples need {needed}")]
    BlockAlign {
        /// Declared block align.
        align: u16,
        /// Declared channels.
        channels: u16,
        /// Bytes per sample.
        bytes: u16,
        /// channels × bytes.
        needed: u32,
    },
    /// symphonia refused the header.
    #[error("damaged or unsupported header: {0}")]
    Header(String),
    /// The file ends before the data the header declares.
    #[error("truncated: header declares {declared} frames, file holds {held}")]
    Truncated {
        /// Frames the header declares.
        declared: u64,
        /// Whole frames the file holds.
        held: u64,
    },
    /// An I/O error while reading.
    #[error("read error: {0}")]
    Read(#[source] io::Error),
    /// symphonia could not decode the audio data.
    #[error("cannot decode audio: {0}")]
    Decode(String),
}

/// Name of a WAVE format code, for messages.
fn encoding_name(code: u16) -> String {
    let name = match code {
        0x0000 => "unknown (format code 0)",
        0x0002 => "Microsoft ADPCM",
        0x0006 => "A-law",
        0x0007 => "µ-law",
        0x0011 => "IMA ADPCM",
        0x0031 => "GSM 6.10",
        0x0050 => "MPEG audio",
        0x0055 => "MP3",
        0x0092 | 0x2000 => "Dolby AC-3",
        0x00FF | 0x1610 => "AAC",
        0x0160..=0x0163 => "Windows Media Audio",
        0x2001 => "DTS",
        0xF1AC => "FLAC",
        _ => return format!("format code 0x{code:04X}"),
    };
    name.to_string()
}

/// Strip symphonia's "wav: " / "riff: " prefixes from its fixed error strings.
fn sym_message(e: &SymError) -> String {
    let s = match e {
        SymError::DecodeError(s) | SymError::Unsupported(s) | SymError::LimitError(s) => {
            (*s).to_string()
        }
        other => other.to_string(),
    };
    s.trim_start_matches("wav: ")
        .trim_start_matches("riff: ")
        .to_string()
}

/// Read a WAV file as interleaved f32 frames.
pub struct WavSource {
    reader: WavReader,
    decoder: PcmDecoder,
    info: WavInfo,
    /// Channels symphonia was told about: `info.channels`, or 1 when the file has more channels
    /// than symphonia 0.5 can represent (see [`guard`]); symphonia then decodes the interleaved
    /// samples as one long mono stream, which is the same sample order.
    sym_channels: usize,
    /// Samples per symphonia packet at most.
    max_packet_samples: usize,
    /// Decoded samples not yet handed out (may end in a partial frame when `sym_channels` is 1).
    pending: Vec<f32>,
    pending_pos: usize,
    /// Samples decoded so far.
    decoded: u64,
    /// Frames the header declares; `None` for a streaming header.
    declared: Option<u64>,
    /// Whole frames the file can hold after the data chunk header (capped at `declared`).
    in_file: u64,
    state: State,
    /// Error to report once every held frame has been handed out (truncation).
    deferred: Option<WavError>,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum State {
    Running,
    Ended,
    Failed,
}

impl WavSource {
    /// Open and validate a WAV file.
    pub fn open(path: &Path) -> Result<WavSource, WavError> {
        let file = File::open(path).map_err(WavError::Open)?;
        let meta = file.metadata().map_err(WavError::Open)?;
        if meta.is_dir() {
            return Err(WavError::IsDirectory);
        }
        let file_len = meta.len();
        if file_len == 0 {
            return Err(WavError::Empty);
        }

        let layout = guard(&file, file_len)?;
        let fmt = &layout.fmt;
        let channels = usize::from(fmt.channels);
        let block = u64::from(fmt.block_align);

        // Byte patches presented to symphonia (see `guard` for why each is needed).
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
        // would otherwise report a bogus frame count. The declared size is kept here, so
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

        let mut file = file;
        file.seek(SeekFrom::Start(0)).map_err(WavError::Read)?;
        let source = PatchedFile {
            inner: file,
            pos: 0,
            len: file_len,
            patches,
        };
        // A 1 MiB read buffer (symphonia's default is 64 KiB) means far fewer read calls on long
        // files; it must be a power of two.
        let mss = MediaSourceStream::new(
            Box::new(source),
            MediaSourceStreamOptions {
                buffer_len: 1 << 20,
            },
        );
        let reader = WavReader::try_new(mss, &FormatOptions::default()).map_err(|e| match e {
            SymError::IoError(e) => WavError::Read(e),
            other => WavError::Header(sym_message(&other)),
        })?;
        let params = match reader.tracks().first() {
            Some(t) => t.codec_params.clone(),
            None => return Err(WavError::Header("no audio track".to_string())),
        };
        let sym_float =
            params.codec == CODEC_TYPE_PCM_F32LE || params.codec == CODEC_TYPE_PCM_F64LE;
        if sym_float != fmt.float {
            // Cannot happen when the guard and symphonia agree; refuse rather than guess.
            return Err(WavError::Header(format!(
                "symphonia chose codec {} for {}",
                params.codec, fmt.encoding
            )));
        }
        let decoder = PcmDecoder::try_new(&params, &DecoderOptions::default())
            .map_err(|e| WavError::Header(sym_message(&e)))?;
        let max_packet_frames = params.max_frames_per_packet.unwrap_or(1152);
        let max_packet_samples = usize::try_from(max_packet_frames)
            .unwrap_or(usize::MAX)
            .saturating_mul(sym_channels);

        // symphonia never reads past 4 GiB - 1 of data.
        let held_by_size = bytes_after_header.min(u64::from(u32::MAX)) / block;
        // A data size of 0xFFFFFFFF is what streaming writers (ffmpeg to a pipe, for one) leave
        // when they cannot go back to fill it in. symphonia 0.5 itself reads such a file to the
        // end (when the RIFF size is 0xFFFFFFFF too, as ffmpeg writes it), so it is not
        // truncated: its length is whatever the file holds. A data chunk of exactly 4 GiB - 1
        // bytes that is really complete reads the same either way.
        let streaming = layout.data_size == u32::MAX;
        let declared = if streaming {
            None
        } else {
            // Same as symphonia's n_frames (data bytes / block align), per real frame.
            Some(u64::from(layout.data_size) / block)
        };
        let frames = declared.or(Some(held_by_size));
        let in_file = declared.map_or(held_by_size, |d| d.min(held_by_size));

        let info = WavInfo {
            sample_rate: fmt.sample_rate,
            channels,
            bits_per_sample: u32::from(fmt.valid_bits),
            float: fmt.float,
            frames,
            encoding: fmt.encoding,
        };
        Ok(WavSource {
            reader,
            decoder,
            info,
            sym_channels,
            max_packet_samples,
            pending: Vec::new(),
            pending_pos: 0,
            decoded: 0,
            declared,
            in_file,
            state: State::Running,
            deferred: None,
        })
    }

    /// What the file holds.
    pub fn info(&self) -> &WavInfo {
        &self.info
    }

    /// Whole frames the file actually holds (from its length), at most what the header declares.
    /// Less than `info().frames` means the file is truncated.
    pub fn frames_in_file(&self) -> u64 {
        self.in_file
    }

    /// Clear `out`, then append up to `max_frames` interleaved frames as f32 with digital full
    /// scale = ±1 (integer n-bit: code / 2^(n-1); float: as stored, f64 narrowed to f32).
    /// Returns frames appended; 0 = end of data.
    ///
    /// When the file ends before the frames its header declares, every frame it does hold is
    /// returned first, and the next call returns [`WavError::Truncated`]; calls after any error
    /// return `Ok(0)`.
    pub fn read_frames(
        &mut self,
        out: &mut Vec<f32>,
        max_frames: usize,
    ) -> Result<usize, WavError> {
        out.clear();
        if max_frames == 0 {
            return Ok(0);
        }
        let ch = self.info.channels;
        let want = max_frames.saturating_mul(ch);
        while out.len() < want {
            // Hand out whole frames already decoded.
            let avail = self.pending.len() - self.pending_pos;
            let take = (avail - avail % ch).min(want - out.len());
            out.extend_from_slice(&self.pending[self.pending_pos..self.pending_pos + take]);
            self.pending_pos += take;
            if out.len() == want || self.state != State::Running {
                break;
            }
            if self.pending_pos > 0 {
                self.pending.drain(..self.pending_pos);
                self.pending_pos = 0;
            }
            // Decode straight into `out` when the whole packet fits and no frame is split.
            let direct = self.pending.is_empty()
                && self.sym_channels == ch
                && want - out.len() >= self.max_packet_samples;
            let target = if direct { &mut *out } else { &mut self.pending };
            match decode_packet(&mut self.reader, &mut self.decoder, target) {
                Ok(Some(n)) => self.decoded += n as u64,
                Ok(None) => {
                    self.state = State::Ended;
                    // A trailing partial frame (only possible when regrouped) is never handed
                    // out: only whole frames leave `pending`.
                    let held = self.decoded / ch as u64;
                    if let Some(declared) = self.declared {
                        if held < declared {
                            self.deferred = Some(WavError::Truncated { declared, held });
                        }
                    }
                }
                Err(e) => {
                    self.state = State::Failed;
                    self.pending.clear();
                    self.pending_pos = 0;
                    return Err(e);
                }
            }
        }
        let frames = out.len() / ch.max(1);
        if frames == 0 {
            if let Some(e) = self.deferred.take() {
                self.state = State::Failed;
                return Err(e);
            }
        }
        Ok(frames)
    }
}

/// Decode the next packet, appending its interleaved samples to `dst`.
/// `Ok(None)` at the end of the data.
fn decode_packet(
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

/// The file as symphonia sees it: the real bytes with a few header bytes replaced.
struct PatchedFile {
    inner: File,
    pos: u64,
    len: u64,
    /// (absolute offset, replacement byte); a handful at most, all in the header.
    patches: Vec<(u64, u8)>,
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

/// The `fmt ` fields the guard checked.
#[derive(Debug, Clone)]
struct FmtFields {
    channels: u16,
    sample_rate: u32,
    block_align: u16,
    /// Bits per sample as stored.
    container_bits: u16,
    /// Valid bits (= container bits except for extensible integer PCM).
    valid_bits: u16,
    float: bool,
    /// Channel mask, for WAVE_FORMAT_EXTENSIBLE.
    channel_mask: Option<u32>,
    encoding: &'static str,
}

/// Where things are, as far as the guard looked.
#[derive(Debug, Clone)]
struct Layout {
    riff_size: u32,
    fmt: FmtFields,
    /// Offset of the `fmt ` payload.
    fmt_payload: u64,
    /// Offset of the audio data (just past the `data` chunk header).
    data_payload: u64,
    /// Declared `data` size.
    data_size: u32,
}

const WAVE_FORMAT_PCM: u16 = 0x0001;
const WAVE_FORMAT_IEEE_FLOAT: u16 = 0x0003;
const WAVE_FORMAT_EXTENSIBLE: u16 = 0xFFFE;

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
fn guard(file: &File, file_len: u64) -> Result<Layout, WavError> {
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
    use super::*;
    use std::io::Write;

    // ---- fixture writers (test only) ----

    /// A `fmt ` description for hand-written fixtures.
    #[derive(Clone, Copy)]
    struct Fmt {
        tag: u16,
        channels: u16,
        rate: u32,
        block_align: u16,
        bits: u16,
        /// (valid bits, channel mask, sub-format code) for WAVE_FORMAT_EXTENSIBLE.
        ext: Option<(u16, u32, u16)>,
    }

    fn plain(tag: u16, channels: u16, rate: u32, bits: u16) -> Fmt {
        Fmt {
            tag,
            channels,
            rate,
            block_align: channels * (bits / 8),
            bits,
            ext: None,
        }
    }

    fn extensible(channels: u16, bits: u16, valid: u16, mask: u32, sub: u16) -> Fmt {
        Fmt {
            tag: WAVE_FORMAT_EXTENSIBLE,
            channels,
            rate: 48_000,
            block_align: channels * (bits / 8),
            bits,
            ext: Some((valid, mask, sub)),
        }
    }

    fn fmt_payload(f: &Fmt) -> Vec<u8> {
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
    fn chunk(id: &[u8; 4], declared: u32, payload: &[u8]) -> Vec<u8> {
        let mut c = id.to_vec();
        c.extend(declared.to_le_bytes());
        c.extend(payload);
        if payload.len() % 2 == 1 {
            c.push(0);
        }
        c
    }

    fn fmt_chunk(f: &Fmt) -> Vec<u8> {
        let p = fmt_payload(f);
        chunk(b"fmt ", p.len() as u32, &p)
    }

    fn data_chunk(payload: &[u8]) -> Vec<u8> {
        chunk(b"data", payload.len() as u32, payload)
    }

    /// RIFF/WAVE around `chunks`; `riff_size` None = the true size.
    fn riff(riff_size: Option<u32>, chunks: &[Vec<u8>]) -> Vec<u8> {
        let body = chunks.concat();
        let mut v = b"RIFF".to_vec();
        v.extend(riff_size.unwrap_or(4 + body.len() as u32).to_le_bytes());
        v.extend(b"WAVE");
        v.extend(body);
        v
    }

    fn wav_bytes(f: &Fmt, data: &[u8]) -> Vec<u8> {
        riff(None, &[fmt_chunk(f), data_chunk(data)])
    }

    fn write_file(dir: &tempfile::TempDir, name: &str, bytes: &[u8]) -> std::path::PathBuf {
        let path = dir.path().join(name);
        let mut f = File::create(&path).unwrap();
        f.write_all(bytes).unwrap();
        path
    }

    fn hound_file<S: hound::Sample + Copy>(
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

    fn int_spec(channels: u16, bits: u16) -> hound::WavSpec {
        hound::WavSpec {
            channels,
            sample_rate: 48_000,
            bits_per_sample: bits,
            sample_format: hound::SampleFormat::Int,
        }
    }

    /// Read everything with `max_frames` per call, checking each call's count.
    fn read_all_with(path: &Path, max_frames: usize) -> Result<(WavInfo, Vec<f32>), WavError> {
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

    fn read_all(path: &Path) -> Result<(WavInfo, Vec<f32>), WavError> {
        read_all_with(path, 4096)
    }

    /// The error from opening and reading `bytes`; fails the test if there is none.
    fn error_of(bytes: &[u8]) -> String {
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

    fn assert_contains(msg: &str, words: &[&str]) {
        for w in words {
            assert!(msg.contains(w), "{msg:?} should contain {w:?}");
        }
    }

    // ---- supported formats ----

    #[test]
    fn int16_round_trip_exact() {
        let dir = tempfile::tempdir().unwrap();
        let codes: [i16; 6] = [0, 16_384, -16_384, 32_767, -32_768, 1];
        let path = hound_file(&dir, int_spec(1, 16), &codes);
        let (info, s) = read_all(&path).unwrap();
        assert_eq!(
            info,
            WavInfo {
                sample_rate: 48_000,
                channels: 1,
                bits_per_sample: 16,
                float: false,
                frames: Some(6),
                encoding: "16-bit integer PCM",
            }
        );
        assert_eq!(info.integer_bits(), Some(16));
        assert_eq!(
            s,
            [0.0, 0.5, -0.5, 32_767.0 / 32_768.0, -1.0, 1.0 / 32_768.0]
        );
    }

    #[test]
    fn int24_round_trip_exact() {
        let dir = tempfile::tempdir().unwrap();
        let codes: [i32; 4] = [-8_388_608, 8_388_607, 4_194_304, 1];
        let path = hound_file(&dir, int_spec(1, 24), &codes);
        let (info, s) = read_all(&path).unwrap();
        assert_eq!(info.integer_bits(), Some(24));
        assert_eq!(info.encoding, "24-bit integer PCM");
        assert_eq!(s, [-1.0, 8_388_607.0 / 8_388_608.0, 0.5, 1.0 / 8_388_608.0]);
    }

    #[test]
    fn int32_round_trip_exact() {
        let dir = tempfile::tempdir().unwrap();
        let codes: [i32; 4] = [i32::MIN, 1 << 30, 256, -(1 << 29)];
        let path = hound_file(&dir, int_spec(1, 32), &codes);
        let (info, s) = read_all(&path).unwrap();
        assert_eq!(info.integer_bits(), Some(32));
        assert_eq!(info.encoding, "32-bit integer PCM");
        assert_eq!(s, [-1.0, 0.5, 1.0 / 8_388_608.0, -0.25]);
    }

    #[test]
    fn uint8_round_trip_exact() {
        let dir = tempfile::tempdir().unwrap();
        // hound stores 8-bit samples unsigned (code + 128).
        let codes: [i8; 4] = [-128, 127, 0, 64];
        let path = hound_file(&dir, int_spec(1, 8), &codes);
        let (info, s) = read_all(&path).unwrap();
        assert_eq!(info.integer_bits(), Some(8));
        assert_eq!(info.encoding, "8-bit unsigned integer PCM");
        assert_eq!(s, [-1.0, 127.0 / 128.0, 0.0, 0.5]);
    }

    #[test]
    fn float32_round_trip_exact() {
        let dir = tempfile::tempdir().unwrap();
        let spec = hound::WavSpec {
            channels: 1,
            sample_rate: 44_100,
            bits_per_sample: 32,
            sample_format: hound::SampleFormat::Float,
        };
        let values: [f32; 4] = [0.25, -1.5, 1e-8, 1.0];
        let path = hound_file(&dir, spec, &values);
        let (info, s) = read_all(&path).unwrap();
        assert!(info.float);
        assert_eq!(info.integer_bits(), None);
        assert_eq!(info.encoding, "32-bit float");
        assert_eq!(info.sample_rate, 44_100);
        assert_eq!(s, values);
    }

    fn f64_bytes(values: &[f64]) -> Vec<u8> {
        values.iter().flat_map(|v| v.to_le_bytes()).collect()
    }

    #[test]
    fn float64_plain_round_trip() {
        let dir = tempfile::tempdir().unwrap();
        let values = [0.1f64, -2.0, 0.5, 1.0 + 1e-12];
        let f = plain(WAVE_FORMAT_IEEE_FLOAT, 1, 96_000, 64);
        let path = write_file(&dir, "f64.wav", &wav_bytes(&f, &f64_bytes(&values)));
        let (info, s) = read_all(&path).unwrap();
        assert_eq!(info.encoding, "64-bit float");
        assert_eq!((info.bits_per_sample, info.float), (64, true));
        assert_eq!(info.frames, Some(4));
        assert_eq!(s, values.map(|v| v as f32));
    }

    #[test]
    fn float64_extensible_stereo_round_trip() {
        let dir = tempfile::tempdir().unwrap();
        let values = [0.1f64, -0.1, 0.75, -0.75, -1.0, 1.0];
        let f = extensible(2, 64, 64, 0b11, WAVE_FORMAT_IEEE_FLOAT);
        let path = write_file(&dir, "f64x.wav", &wav_bytes(&f, &f64_bytes(&values)));
        let (info, s) = read_all(&path).unwrap();
        assert_eq!((info.channels, info.frames), (2, Some(3)));
        assert_eq!(info.encoding, "64-bit float");
        assert_eq!(s, values.map(|v| v as f32));
    }

    #[test]
    fn int24_in_32_bit_words_scales_by_valid_bits() {
        let dir = tempfile::tempdir().unwrap();
        // 24 valid bits, left-justified in 32-bit words.
        let codes: [i32; 3] = [8_388_607, -8_388_608, 4_194_304];
        let data: Vec<u8> = codes.iter().flat_map(|c| (c << 8).to_le_bytes()).collect();
        let f = extensible(1, 32, 24, 0b100, WAVE_FORMAT_PCM);
        let path = write_file(&dir, "24in32.wav", &wav_bytes(&f, &data));
        let (info, s) = read_all(&path).unwrap();
        assert_eq!(info.integer_bits(), Some(24));
        assert_eq!(info.encoding, "24-bit integer PCM in 32-bit words");
        assert_eq!(s, [8_388_607.0 / 8_388_608.0, -1.0, 0.5]);
    }

    #[test]
    fn three_channels_keep_interleaving_order() {
        let dir = tempfile::tempdir().unwrap();
        let frames = 3000;
        let code = |i: usize, c: usize| (c as i16 + 1) * 1000 + (i % 997) as i16;
        let samples: Vec<i16> = (0..frames)
            .flat_map(|i| (0..3).map(move |c| code(i, c)))
            .collect();
        let path = hound_file(&dir, int_spec(3, 16), &samples);
        let (info, s) = read_all(&path).unwrap();
        assert_eq!((info.channels, info.frames), (3, Some(frames as u64)));
        let expect: Vec<f32> = samples.iter().map(|&c| f32::from(c) / 32_768.0).collect();
        assert_eq!(s, expect);
    }

    /// Codes that tell every (frame, channel) apart, for order checks.
    fn numbered(frames: usize, channels: usize) -> Vec<i16> {
        (0..frames * channels)
            .map(|k| (k % 65_536) as u16 as i16)
            .collect()
    }

    #[test]
    fn max_frames_is_honoured_across_packet_boundaries() {
        // symphonia packets hold 1152 frames; 7 does not divide it, so reads straddle packets.
        let dir = tempfile::tempdir().unwrap();
        let frames = 5000;
        let samples = numbered(frames, 2);
        let path = hound_file(&dir, int_spec(2, 16), &samples);
        let expect: Vec<f32> = samples.iter().map(|&c| f32::from(c) / 32_768.0).collect();

        let mut src = WavSource::open(&path).unwrap();
        let mut buf = Vec::new();
        let mut all = Vec::new();
        let mut calls = 0;
        loop {
            let n = src.read_frames(&mut buf, 7).unwrap();
            if n == 0 {
                break;
            }
            calls += 1;
            // Every call but the last is full.
            if all.len() + buf.len() < expect.len() {
                assert_eq!(n, 7);
            }
            all.extend_from_slice(&buf);
        }
        assert_eq!(calls, frames.div_ceil(7));
        assert_eq!(all, expect, "nothing lost or duplicated");
        // End of data stays the end.
        assert_eq!(src.read_frames(&mut buf, 7).unwrap(), 0);
        assert!(buf.is_empty());

        // Large reads give the same samples.
        let (_, big) = read_all_with(&path, 100_000).unwrap();
        assert_eq!(big, expect);
    }

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
    fn duration_and_integer_bits() {
        let info = WavInfo {
            sample_rate: 48_000,
            channels: 2,
            bits_per_sample: 24,
            float: false,
            frames: Some(96_000),
            encoding: "24-bit integer PCM",
        };
        assert_eq!(info.duration_s(), Some(2.0));
        assert_eq!(info.integer_bits(), Some(24));
        let f = WavInfo {
            float: true,
            bits_per_sample: 32,
            frames: None,
            ..info
        };
        assert_eq!((f.integer_bits(), f.duration_s()), (None, None));
    }

    // ---- truncation and odd-but-valid headers ----

    #[test]
    fn truncated_file_delivers_what_it_holds_then_errors() {
        let dir = tempfile::tempdir().unwrap();
        let samples = numbered(48_000, 1);
        let path = hound_file(&dir, int_spec(1, 16), &samples);
        // Keep the 44-byte header, 12000 frames and half a frame.
        File::options()
            .write(true)
            .open(&path)
            .unwrap()
            .set_len(44 + 12_000 * 2 + 1)
            .unwrap();
        let mut src = WavSource::open(&path).unwrap();
        assert_eq!(src.info().frames, Some(48_000));
        assert_eq!(src.frames_in_file(), 12_000);
        let mut buf = Vec::new();
        let mut got = Vec::new();
        let err = loop {
            match src.read_frames(&mut buf, 5000) {
                Ok(0) => panic!("a truncated file must not end cleanly"),
                Ok(_) => got.extend_from_slice(&buf),
                Err(e) => break e,
            }
        };
        assert_eq!(
            err.to_string(),
            "truncated: header declares 48000 frames, file holds 12000"
        );
        let expect: Vec<f32> = samples[..12_000]
            .iter()
            .map(|&c| f32::from(c) / 32_768.0)
            .collect();
        assert_eq!(got, expect, "every held frame is delivered first");
        assert_eq!(src.read_frames(&mut buf, 5000).unwrap(), 0);
    }

    #[test]
    fn truncated_mid_frame_with_regrouped_channels() {
        let dir = tempfile::tempdir().unwrap();
        let channels = 27;
        let samples = numbered(3000, channels);
        let path = hound_file(&dir, int_spec(channels as u16, 16), &samples);
        let header = File::open(&path).unwrap().metadata().unwrap().len() - 3000 * 54;
        // 2000 frames and 13 samples of the next.
        File::options()
            .write(true)
            .open(&path)
            .unwrap()
            .set_len(header + 2000 * 54 + 26)
            .unwrap();
        let mut src = WavSource::open(&path).unwrap();
        let mut buf = Vec::new();
        let mut got = Vec::new();
        let err = loop {
            match src.read_frames(&mut buf, 7) {
                Ok(0) => panic!("a truncated file must not end cleanly"),
                Ok(_) => got.extend_from_slice(&buf),
                Err(e) => break e,
            }
        };
        assert_eq!(
            err.to_string(),
            "truncated: header declares 3000 frames, file holds 2000"
        );
        let expect: Vec<f32> = samples[..2000 * channels]
            .iter()
            .map(|&c| f32::from(c) / 32_768.0)
            .collect();
        assert_eq!(got, expect);
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

    #[test]
    fn header_only_file_is_an_empty_recording() {
        let dir = tempfile::tempdir().unwrap();
        let bytes = wav_bytes(&plain(WAVE_FORMAT_PCM, 2, 48_000, 16), &[]);
        assert_eq!(bytes.len(), 44);
        let path = write_file(&dir, "h.wav", &bytes);
        let mut src = WavSource::open(&path).unwrap();
        assert_eq!(src.info().frames, Some(0));
        assert_eq!(src.info().duration_s(), Some(0.0));
        let mut buf = vec![1.0];
        assert_eq!(src.read_frames(&mut buf, 100).unwrap(), 0);
        assert!(buf.is_empty());
        assert_eq!(src.read_frames(&mut buf, 100).unwrap(), 0);
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

    #[test]
    fn empty_file() {
        assert_eq!(error_of(&[]), "file is empty");
    }

    #[test]
    fn directory_path() {
        let dir = tempfile::tempdir().unwrap();
        let e = WavSource::open(dir.path()).err().unwrap();
        assert!(matches!(e, WavError::IsDirectory), "{e:?}");
        assert_contains(&e.to_string(), &["directory"]);
    }

    #[test]
    fn missing_path() {
        let dir = tempfile::tempdir().unwrap();
        let e = WavSource::open(&dir.path().join("nope.wav")).err().unwrap();
        assert_eq!(
            e.to_string(),
            "cannot open: No such file or directory (os error 2)"
        );
    }
}
