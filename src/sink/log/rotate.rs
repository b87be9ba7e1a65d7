//! The rotating log file: appended to, reopened after write failures or when its path comes to
//! name another file (moved away by logrotate, removed), and rotated by size to numbered files
//! `FILE.1` (newest) .. `FILE.keep`. Every write is one whole line; a failed write is taken back
//! so the file holds complete lines only.

use std::fs::{self, File, OpenOptions};
use std::io::{self, Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};

/// Size rotation of a log file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Rotation {
    /// A line that would take the file past this size (bytes) goes to a fresh file instead (a
    /// file always takes at least one line, however long).
    pub max_bytes: u64,
    /// Rotated files kept: `FILE.1` (newest) .. `FILE.keep` (oldest); 0 keeps none.
    pub keep: usize,
}

/// `path` with `.k` appended to its file name.
pub(super) fn numbered(path: &Path, k: usize) -> PathBuf {
    let mut s = path.as_os_str().to_owned();
    s.push(format!(".{k}"));
    PathBuf::from(s)
}

/// Identity of a file, to notice that its path now names another file (or none).
#[cfg(unix)]
fn file_id(m: &fs::Metadata) -> Option<(u64, u64)> {
    use std::os::unix::fs::MetadataExt;
    Some((m.dev(), m.ino()))
}

#[cfg(not(unix))]
fn file_id(_: &fs::Metadata) -> Option<(u64, u64)> {
    None
}

fn ends_with_newline(path: &Path) -> io::Result<bool> {
    let mut f = File::open(path)?;
    f.seek(SeekFrom::End(-1))?;
    let mut b = [0u8; 1];
    f.read_exact(&mut b)?;
    Ok(b[0] == b'\n')
}

/// A log file: reopened after failures or when its path comes to name another file, rotated by
/// size.
pub(super) struct FileSink {
    path: PathBuf,
    rotation: Option<Rotation>,
    /// The CSV header, written at the top of every new file.
    header: Option<&'static str>,
    file: Option<File>,
    id: Option<(u64, u64)>,
    /// Bytes in the file (regular files).
    size: u64,
    /// A regular file (rotation and truncation of partial lines apply only to those).
    regular: bool,
    opened_before: bool,
    needs_header: bool,
    /// The file ends in a partial line (an earlier crash): end it before writing.
    needs_newline: bool,
    /// A rotation that failed during the last record (the record went to the current file).
    rotation_error: Option<io::Error>,
}

impl FileSink {
    /// Open (or create) the file at `path`, to be rotated by `rotation`; `header` goes at the
    /// top of every new file.
    pub(super) fn open(
        path: PathBuf,
        rotation: Option<Rotation>,
        header: Option<&'static str>,
    ) -> Result<FileSink, (PathBuf, io::Error)> {
        let mut f = FileSink {
            path,
            rotation,
            header,
            file: None,
            id: None,
            size: 0,
            regular: false,
            opened_before: false,
            needs_header: false,
            needs_newline: false,
            rotation_error: None,
        };
        match f.open_handle() {
            Ok(()) => Ok(f),
            Err(e) => Err((f.path, e)),
        }
    }

    /// The file's path.
    pub(super) fn path(&self) -> &Path {
        &self.path
    }

    /// A rotation that failed during the last record, if any (taken: reported once).
    pub(super) fn take_rotation_error(&mut self) -> Option<io::Error> {
        self.rotation_error.take()
    }

    /// Ask the system to put the file on disk (best effort; devices may refuse).
    pub(super) fn sync(&mut self) {
        if let (Some(f), true) = (&self.file, self.regular) {
            let _ = f.sync_data();
        }
    }

    fn open_handle(&mut self) -> io::Result<()> {
        self.file = None;
        let file = OpenOptions::new()
            .create(true)
            .append(true)
            .open(&self.path)?;
        let m = file.metadata()?;
        self.regular = m.is_file();
        self.size = if self.regular { m.len() } else { 0 };
        self.id = file_id(&m);
        self.needs_header = if self.regular {
            self.size == 0
        } else {
            !self.opened_before
        };
        self.needs_newline =
            self.regular && self.size > 0 && !ends_with_newline(&self.path).unwrap_or(true);
        self.opened_before = true;
        self.file = Some(file);
        Ok(())
    }

    /// Open the file unless the handle held still is the file at the path.
    fn ensure_open(&mut self) -> io::Result<()> {
        if self.file.is_some() {
            let same = match fs::metadata(&self.path) {
                Ok(m) => match (file_id(&m), self.id) {
                    (Some(a), Some(b)) => a == b,
                    _ => true,
                },
                Err(_) => false,
            };
            if same {
                return Ok(());
            }
        }
        self.open_handle()
    }

    fn should_rotate(&self, len: usize) -> bool {
        match self.rotation {
            Some(r) if self.regular => {
                let pending = len as u64 + u64::from(self.needs_newline);
                self.size > 0 && self.size + pending > r.max_bytes
            }
            _ => false,
        }
    }

    /// FILE.(k) → FILE.(k+1) down to FILE → FILE.1 (FILE.keep is replaced), then a new FILE.
    fn rotate(&mut self) -> io::Result<()> {
        let Some(r) = self.rotation else {
            return Ok(());
        };
        // Closed before renaming: some systems refuse to rename open files.
        self.file = None;
        if r.keep == 0 {
            fs::remove_file(&self.path)?;
        } else {
            for k in (1..r.keep).rev() {
                match fs::rename(numbered(&self.path, k), numbered(&self.path, k + 1)) {
                    Ok(()) => {}
                    Err(e) if e.kind() == io::ErrorKind::NotFound => {}
                    Err(e) => return Err(e),
                }
            }
            fs::rename(&self.path, numbered(&self.path, 1))?;
        }
        self.open_handle()
    }

    fn write_raw(&mut self, bytes: &[u8]) -> io::Result<()> {
        let Some(f) = self.file.as_mut() else {
            return Err(io::Error::other("the log file is not open"));
        };
        // One write of a whole line on an unbuffered file: written through at once.
        match f.write_all(bytes) {
            Ok(()) => {
                self.size += bytes.len() as u64;
                Ok(())
            }
            Err(e) => {
                // Take back a partial line so the file holds complete lines only.
                if self.regular {
                    let _ = f.set_len(self.size);
                }
                self.file = None;
                Err(e)
            }
        }
    }

    /// Write one whole line (newline included), rotating first if it would take the file past
    /// its size; the CSV header goes first in a new file.
    pub(super) fn write_line(&mut self, line: &str) -> io::Result<()> {
        self.ensure_open()?;
        if self.should_rotate(line.len()) {
            if let Err(e) = self.rotate() {
                // Better a file past its size than a lost record: write on where we are.
                self.rotation_error = Some(e);
                self.ensure_open()?;
            }
        }
        if self.needs_newline {
            self.write_raw(b"\n")?;
            self.needs_newline = false;
        }
        if self.needs_header {
            if let Some(h) = self.header {
                self.write_raw(h.as_bytes())?;
            }
            self.needs_header = false;
        }
        self.write_raw(line.as_bytes())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    use crate::live::engine::LiveEvent;
    use crate::sink::log::csv::CSV_HEADER;
    use crate::sink::log::testkit::*;
    use crate::sink::log::LogFormat;

    #[test]
    fn rotation_keeps_keep_files_of_complete_lines_in_order() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("log.ndjson");
        let diag = Shared::default();
        let rot = Rotation {
            max_bytes: 2000,
            keep: 3,
        };
        let mut w = open_file(&path, LogFormat::Ndjson, Some(rot), &diag);
        let n = 200;
        for i in 0..n {
            w.event(&summary(i as f64, 1));
        }
        w.stop(n as f64, 0);
        assert!(!w.had_write_error(), "{}", diag.text());

        let files = rotated_in_order(&path, 3);
        for f in &files {
            let len = fs::metadata(f).unwrap().len();
            assert!(len > 0 && len <= rot.max_bytes, "{}: {len}", f.display());
        }
        assert!(!numbered(&path, 4).exists());
        assert_eq!(fs::read_dir(dir.path()).unwrap().count(), 4);

        let mut t = Vec::new();
        for f in &files {
            let text = fs::read_to_string(f).unwrap();
            assert!(text.ends_with('\n'));
            for l in json_lines(&text) {
                t.push(l["t_s"].as_f64().unwrap());
            }
        }
        // Oldest records were dropped with the oldest file; the rest are all there, in order.
        assert!(t.len() > 10);
        assert_eq!(*t.last().unwrap(), n as f64);
        for pair in t.windows(2) {
            assert_eq!(pair[1], pair[0] + 1.0, "{t:?}");
        }
    }

    #[test]
    fn csv_rotation_starts_every_file_with_the_header() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("log.csv");
        let diag = Shared::default();
        let rot = Rotation {
            max_bytes: 600,
            keep: 2,
        };
        let mut w = open_file(&path, LogFormat::Csv, Some(rot), &diag);
        for i in 0..50 {
            w.event(&LiveEvent::Gap {
                t_s: i as f64,
                frames: 1,
            });
        }
        let mut t = Vec::new();
        for f in rotated_in_order(&path, 2) {
            let text = fs::read_to_string(&f).unwrap();
            assert!(text.len() as u64 <= rot.max_bytes);
            let mut lines = text.lines();
            assert_eq!(lines.next(), Some(CSV_HEADER.trim_end()));
            for l in lines {
                let cells = split_csv(l);
                assert_eq!(cells[0], "dropped");
                t.push(cells[2].parse::<f64>().unwrap());
            }
        }
        assert!(!numbered(&path, 3).exists());
        assert_eq!(*t.last().unwrap(), 49.0);
        for pair in t.windows(2) {
            assert_eq!(pair[1], pair[0] + 1.0, "{t:?}");
        }
    }

    #[test]
    fn a_line_longer_than_the_limit_gets_a_file_of_its_own() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("log.ndjson");
        let diag = Shared::default();
        let rot = Rotation {
            max_bytes: 10,
            keep: 1,
        };
        let mut w = open_file(&path, LogFormat::Ndjson, Some(rot), &diag);
        w.event(&summary(1.0, 1));
        w.stop(2.0, 0);
        assert_eq!(
            json_lines(&fs::read_to_string(&path).unwrap())[0]["kind"],
            "stop"
        );
        let rotated = json_lines(&fs::read_to_string(numbered(&path, 1)).unwrap());
        assert_eq!(rotated.len(), 1);
        assert_eq!(rotated[0]["kind"], "summary");
    }

    #[test]
    fn keep_zero_keeps_no_rotated_file() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("log.ndjson");
        let diag = Shared::default();
        let rot = Rotation {
            max_bytes: 500,
            keep: 0,
        };
        let mut w = open_file(&path, LogFormat::Ndjson, Some(rot), &diag);
        for i in 0..20 {
            w.input_restored(i as f64);
        }
        assert_eq!(fs::read_dir(dir.path()).unwrap().count(), 1);
        let lines = json_lines(&fs::read_to_string(&path).unwrap());
        assert_eq!(lines.last().unwrap()["t_s"], 19.0);
    }

    #[test]
    fn an_existing_file_is_appended_to_after_its_partial_line() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("log.ndjson");
        fs::write(&path, "{\"kind\":\"stop\"}\n{\"kind\":\"summ").unwrap();
        let diag = Shared::default();
        let mut w = open_file(&path, LogFormat::Ndjson, None, &diag);
        w.stop(1.0, 0);
        let text = fs::read_to_string(&path).unwrap();
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(lines.len(), 4);
        assert_eq!(lines[1], "{\"kind\":\"summ");
        assert!(lines[2].starts_with("{\"kind\":\"start\""));
        assert!(lines[3].starts_with("{\"kind\":\"stop\""));
    }

    #[test]
    fn a_replaced_file_is_followed_to_its_path() {
        // logrotate-style: the file is moved away; the next record starts a new one at the path.
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("log.ndjson");
        let diag = Shared::default();
        let mut w = open_file(&path, LogFormat::Ndjson, None, &diag);
        fs::rename(&path, dir.path().join("old.ndjson")).unwrap();
        w.input_restored(1.0);
        assert!(!w.had_write_error());
        let lines = json_lines(&fs::read_to_string(&path).unwrap());
        assert_eq!(lines.len(), 1);
        assert_eq!(lines[0]["kind"], "input-restored");
    }
}
