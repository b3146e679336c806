//! Fuzz target: bytes → configuration choices and a sequence of (time, value)
//! `f32` readings → photometer → `Watch`, with every invariant checked after
//! every reading. The decoder and the checks are the property tests' own
//! (`tests/hardening/mod.rs`); `tests/fuzz_corpus.rs` replays the saved
//! corpus through them without nightly.
#![no_main]

#[path = "../../tests/hardening/mod.rs"]
mod hardening;

libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    hardening::check_bytes(data);
});
