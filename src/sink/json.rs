//! JSON output: one object per line.

use std::io::{self, Write};

use serde::Serialize;

/// Write `value` as one line of JSON.
pub fn write_line<W: Write, T: Serialize>(w: &mut W, value: &T) -> io::Result<()> {
    serde_json::to_writer(&mut *w, value).map_err(io::Error::other)?;
    w.write_all(b"\n")
}
