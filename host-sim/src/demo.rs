//! The demo (in progress).
