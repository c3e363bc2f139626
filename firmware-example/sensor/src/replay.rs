//! A [`WindowSource`] that plays back windows recorded in flash.
//!
//! The recording is a flat byte slice of `n · 3 · 128` little-endian `i16`, window after window,
//! each window axis-major (all x samples, then y, then z) — the C-order layout of an
//! `int16 [n, 3, 128]` array. The firmware embeds it with `include_bytes!`, so it stays in
//! flash and costs no RAM beyond the one window being filled.
use crate::{Window, WindowSource};
use kinglet_vibration_features::{window_from_le_bytes, AXES, WINDOW};

/// Bytes of one recorded window.
pub const WINDOW_BYTES: usize = AXES * WINDOW * 2;

/// Why a replay could not produce a window.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ReplayError {
    /// Every recorded window has been played.
    End,
}

/// Plays back recorded windows, in order, once.
#[derive(Debug, Clone)]
pub struct ReplaySource<'a> {
    windows: core::slice::ChunksExact<'a, u8>,
}

impl<'a> ReplaySource<'a> {
    /// A source over `recording`; a trailing partial window is ignored.
    pub fn new(recording: &'a [u8]) -> Self {
        ReplaySource {
            windows: recording.chunks_exact(WINDOW_BYTES),
        }
    }

    /// Windows not yet played.
    pub fn remaining(&self) -> usize {
        self.windows.len()
    }
}

impl WindowSource for ReplaySource<'_> {
    type Error = ReplayError;

    fn next_window(&mut self, window: &mut Window) -> Result<(), ReplayError> {
        let bytes = self.windows.next().ok_or(ReplayError::End)?;
        *window = window_from_le_bytes(bytes).ok_or(ReplayError::End)?;
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn plays_windows_in_order_then_ends() {
        let mut rec = [0u8; 2 * WINDOW_BYTES + 3];
        rec[0] = 7; // window 0, x[0] = 7
        rec[WINDOW_BYTES + 2 * WINDOW * 2 + 2] = 0xFF; // window 1, z[1] low byte
        rec[WINDOW_BYTES + 2 * WINDOW * 2 + 3] = 0xFF; // → z[1] = -1
        let mut src = ReplaySource::new(&rec);
        assert_eq!(src.remaining(), 2);
        let mut w = [[0i16; WINDOW]; AXES];
        src.next_window(&mut w).unwrap();
        assert_eq!((w[0][0], w[2][1]), (7, 0));
        src.next_window(&mut w).unwrap();
        assert_eq!((w[0][0], w[2][1]), (0, -1));
        assert_eq!(src.next_window(&mut w), Err(ReplayError::End));
        assert_eq!(src.remaining(), 0);
    }
}
