//! Why a WAV file cannot be read ([`WavError`]), in words for people, and symphonia's own
//! messages without their prefixes.

use std::io;

use symphonia::core::errors::Error as SymError;

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
pub(super) fn sym_message(e: &SymError) -> String {
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
