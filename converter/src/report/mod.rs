//! Reports on packed blobs: [`inspect::BlobReport`] as data (and JSON), [`table`] for people.
pub mod calibration;
pub mod cycles;
pub mod inspect;
pub mod table;

pub use inspect::BlobReport;
