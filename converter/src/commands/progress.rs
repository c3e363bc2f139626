//! Progress on a terminal: a bar over rows (vetting, calibration) and a spinner while a large
//! file of rows is read. Drawn on stderr, and only when stderr is a terminal.
use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use std::io::IsTerminal;
use std::path::Path;
use std::time::Duration;

/// Rows from which a progress bar is worth drawing.
pub const FROM_ROWS: usize = 5_000;

/// Bytes of a file from which its reading is shown (about 50,000 CSV rows of 16 features).
pub const FROM_BYTES: u64 = 8 << 20;

/// A bar over `rows` rows, prefixed `what` (hidden unless stderr is a terminal and there are at
/// least [`FROM_ROWS`] rows).
pub fn rows_bar(what: &str, rows: usize) -> ProgressBar {
    if !std::io::stderr().is_terminal() || rows < FROM_ROWS {
        return ProgressBar::hidden();
    }
    let b = ProgressBar::with_draw_target(Some(rows as u64), ProgressDrawTarget::stderr());
    if let Ok(style) =
        ProgressStyle::with_template("{prefix} [{bar:40}] {pos}/{len} rows, {eta} left")
    {
        b.set_style(style.progress_chars("=> "));
    }
    b.set_prefix(what.to_string());
    b
}

/// A spinner with the elapsed time while `path` is read (hidden unless stderr is a terminal
/// and the file has at least [`FROM_BYTES`] bytes). Clear it with `finish_and_clear`.
pub fn loading(path: &Path) -> ProgressBar {
    let big = std::fs::metadata(path).is_ok_and(|m| m.len() >= FROM_BYTES);
    if !std::io::stderr().is_terminal() || !big {
        return ProgressBar::hidden();
    }
    let b = ProgressBar::with_draw_target(None, ProgressDrawTarget::stderr());
    if let Ok(style) = ProgressStyle::with_template("{spinner} reading {msg} ({elapsed})") {
        b.set_style(style);
    }
    b.set_message(path.display().to_string());
    b.enable_steady_tick(Duration::from_millis(120));
    b
}

/// A spinner counting finished steps of unknown number, `what` before the count and the
/// current step's name after it (hidden unless stderr is a terminal).
pub fn counter(what: &str) -> ProgressBar {
    if !std::io::stderr().is_terminal() {
        return ProgressBar::hidden();
    }
    let b = ProgressBar::with_draw_target(None, ProgressDrawTarget::stderr());
    if let Ok(style) =
        ProgressStyle::with_template("{spinner} {prefix}: {pos} done, last {msg} ({elapsed})")
    {
        b.set_style(style);
    }
    b.set_prefix(what.to_string());
    b.enable_steady_tick(Duration::from_millis(120));
    b
}
