//! Fuzz target: bytes → `host_sim::log::read_log` with several option sets.
//! It must return `Ok` or an error, never panic; errors must name a line
//! within the input. The check is `host-sim/tests/log_check/mod.rs`, which
//! `host-sim/tests/fuzz_corpus.rs` also runs over the saved corpus.
#![no_main]

#[path = "../../host-sim/tests/log_check/mod.rs"]
mod log_check;

libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    log_check::check_log_bytes(data);
});
