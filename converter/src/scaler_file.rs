//! Separately saved input scalers (in progress).
