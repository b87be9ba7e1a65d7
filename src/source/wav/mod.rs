//! WAV files, read through symphonia.
//!
//! Demuxing (chunk walking, `fmt ` parsing, data bounds) and sample decoding are symphonia's
//! (`WavReader` + `PcmDecoder`). Before symphonia sees a file, [`WavSource::open`] runs a small
//! *guard* over the header, because symphonia 0.5 trusts several header fields in ways that
//! panic or allocate on hostile input (each measured, see the comment on [`guard`]). The guard
//! also lets brink phrase errors for people ("sample rate 0 Hz is outside 8000–384000 Hz")
//! where symphonia only has fixed strings without the offending value.
//!
//! This module is the reader ([`WavSource`], [`WavInfo`]); `guard` checks and presents the
//! header, `decode` turns symphonia's buffers into interleaved f32, `error` holds [`WavError`].

use std::fs::File;
use std::io::{Seek, SeekFrom};
use std::path::Path;

use symphonia::core::codecs::{
    Decoder, DecoderOptions, CODEC_TYPE_PCM_F32LE, CODEC_TYPE_PCM_F64LE,
};
use symphonia::core::errors::Error as SymError;
use symphonia::core::formats::{FormatOptions, FormatReader};
use symphonia::core::io::{MediaSourceStream, MediaSourceStreamOptions};
use symphonia::default::codecs::PcmDecoder;
use symphonia::default::formats::WavReader;

mod decode;
mod error;
mod guard;
#[cfg(test)]
mod testfiles;

use decode::{decode_packet, Direct};
use error::sym_message;
pub use error::WavError;
use guard::{guard, present, PatchedFile};

/// Lowest sample rate brink accepts (Hz).
pub const MIN_SAMPLE_RATE: u32 = 8_000;
/// Highest sample rate brink accepts (Hz).
pub const MAX_SAMPLE_RATE: u32 = 384_000;
/// Most channels brink accepts.
pub const MAX_CHANNELS: usize = 64;

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

/// Read a WAV file as interleaved f32 frames.
pub struct WavSource {
    reader: WavReader,
    decoder: PcmDecoder,
    info: WavInfo,
    /// Channels symphonia was told about: `info.channels`, or 1 when the file has more channels
    /// than symphonia 0.5 can represent (see `guard`); symphonia then decodes the
    /// interleaved samples as one long mono stream, which is the same sample order.
    sym_channels: usize,
    /// Samples per symphonia packet at most.
    max_packet_samples: usize,
    /// Converted from the packets' bytes directly, when the layout allows.
    direct: Option<Direct>,
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
        let shown = present(&layout, file_len);
        let sym_channels = shown.sym_channels;
        let bytes_after_header = file_len - layout.data_payload;

        let mut file = file;
        file.seek(SeekFrom::Start(0)).map_err(WavError::Read)?;
        let source = PatchedFile::new(file, file_len, shown.patches);
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
        let direct = Direct::for_format(fmt.container_bits, fmt.valid_bits, fmt.float);
        Ok(WavSource {
            reader,
            decoder,
            direct,
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
            match decode_packet(&mut self.reader, &mut self.decoder, self.direct, target) {
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

#[cfg(test)]
mod tests {
    use std::fs::File;

    use super::guard::{WAVE_FORMAT_IEEE_FLOAT, WAVE_FORMAT_PCM};
    use super::testfiles::*;
    use super::*;

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
