//! Replays the saved `replay_log` fuzz corpus (`fuzz/corpus/replay_log/`)
//! and the crash inputs kept as regressions (`fuzz/regressions/replay_log/`)
//! through the fuzz target's own check, on stable Rust: CI keeps every input
//! the fuzzer ever found without needing nightly or libFuzzer.

#[path = "../../tests/fuzz_files/mod.rs"]
mod fuzz_files;
mod log_check;

use std::path::Path;

#[test]
fn replay_log_corpus_and_regressions_pass_the_check() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("../fuzz");
    let count = fuzz_files::replay(&root, "replay_log", log_check::check_log_bytes);
    // The committed seeds alone are three files.
    assert!(count >= 3, "only {count} corpus files found");
}
