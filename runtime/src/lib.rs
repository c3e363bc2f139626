//! Kinglet runtime (work in progress).
#![cfg_attr(not(test), no_std)]
#![forbid(unsafe_code)]
#![deny(missing_docs)]
pub mod format;
