//! Headless logging of live events for hours (`brink log`), as NDJSON (one self-describing
//! object per line, format [`LOG_FORMAT`]) or CSV (one header line, the fixed columns of
//! [`CSV_COLUMNS`]), to standard output or to a file with optional size rotation.
//!
//! Records: `start` first, then `summary` every interval and `clip`, `onset`, `dropped`,
//! `input-lost` and `input-restored` as they happen, `stop` last. Every line is written and flushed
//! as soon as its record is made; nothing waits in a buffer.
//!
//! Write failures (disk full, directory removed, permission lost) never panic and never stop the
//! caller: the first failure of an episode is reported on the diagnostics stream (stderr), the
//! records that could not be written are counted, every later record retries (a file target is
//! reopened; a missing directory is not created), and once writing works again a `write-gap`
//! record with the number of lost records comes first. On standard output a broken pipe means the
//! reader has gone: [`LogWriter::is_closed`] turns true so the caller can stop cleanly.
//!
//! One file per job: `clock` (the time stamps), [`record`] (the record types, written and read
//! back), [`ndjson`] and `csv` (records as lines), `rotate` (the log file), `writer` (live events
//! into records, failure recovery, totals).

use std::fmt;
use std::io;
use std::path::PathBuf;
use std::str::FromStr;

mod clock;
mod csv;
pub mod ndjson;
pub mod record;
mod rotate;
#[cfg(test)]
pub(crate) mod testkit;
mod writer;

pub use clock::rfc3339_millis;
pub use csv::CSV_COLUMNS;
pub use record::{LogTotals, LOG_FORMAT};
pub use rotate::Rotation;
pub use writer::{LogMeta, LogWriter, Target};

/// Errors that keep a log from starting. Failures after the start are not errors: see
/// [`LogWriter::had_write_error`].
#[derive(Debug, thiserror::Error)]
pub enum LogError {
    /// The format name is neither `ndjson` nor `csv`.
    #[error("unknown log format {0:?} (expected \"ndjson\" or \"csv\")")]
    UnknownFormat(String),
    /// A rotation size of 0 bytes.
    #[error("the rotation size must be at least 1 byte")]
    ZeroRotationSize,
    /// The log file could not be opened (or created) at the start.
    #[error("cannot open {}: {source}", path.display())]
    Open {
        /// The file.
        path: PathBuf,
        /// Why.
        #[source]
        source: io::Error,
    },
}

/// Line format of a log.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LogFormat {
    /// One JSON object per line, every line self-describing.
    Ndjson,
    /// A header line, then rows of [`CSV_COLUMNS`] (RFC 4180 quoting).
    Csv,
}

impl FromStr for LogFormat {
    type Err = LogError;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s {
            "ndjson" => Ok(LogFormat::Ndjson),
            "csv" => Ok(LogFormat::Csv),
            other => Err(LogError::UnknownFormat(other.to_string())),
        }
    }
}

impl fmt::Display for LogFormat {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            LogFormat::Ndjson => "ndjson",
            LogFormat::Csv => "csv",
        })
    }
}

#[cfg(test)]
mod tests {
    use super::csv::CSV_HEADER;
    use super::*;

    #[test]
    fn format_names_parse_and_display() {
        for f in [LogFormat::Ndjson, LogFormat::Csv] {
            assert_eq!(f.to_string().parse::<LogFormat>().unwrap(), f);
        }
        assert_eq!("csv".parse::<LogFormat>().unwrap(), LogFormat::Csv);
        assert!(matches!(
            "json".parse::<LogFormat>(),
            Err(LogError::UnknownFormat(_))
        ));
        assert_eq!(CSV_HEADER, format!("{}\n", CSV_COLUMNS.join(",")));
    }
}
