//! The plain JSON model description (in progress).
