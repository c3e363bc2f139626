//! Standard output for the commands: a closed pipe (`kinglet inspect m.kgl | head -3`) ends the
//! output quietly instead of panicking, as `println!` would; any other write error is reported.
use anyhow::{Context, Result};
use std::io::{ErrorKind, Write};

/// Writes `text` to standard output.
pub fn emit(text: &str) -> Result<()> {
    let mut out = std::io::stdout().lock();
    match out.write_all(text.as_bytes()).and_then(|()| out.flush()) {
        Err(e) if e.kind() == ErrorKind::BrokenPipe => Ok(()),
        r => r.context("cannot write to standard output"),
    }
}

/// Writes `text` and a line break.
pub fn line(text: &str) -> Result<()> {
    emit(&format!("{text}\n"))
}

/// Writes `value` as indented JSON and a line break, straight to standard output (a report of a
/// million rows is not built as one string first).
pub fn json<T: serde::Serialize>(value: &T) -> Result<()> {
    let mut out = std::io::BufWriter::new(std::io::stdout().lock());
    let written = serde_json::to_writer_pretty(&mut out, value)
        .map_err(std::io::Error::from)
        .and_then(|()| out.write_all(b"\n"))
        .and_then(|()| out.flush());
    match written {
        Err(e) if e.kind() == ErrorKind::BrokenPipe => Ok(()),
        r => r.context("cannot write the JSON report to standard output"),
    }
}
