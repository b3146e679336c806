//! Replays the saved `reading_path` fuzz corpus (`fuzz/corpus/reading_path/`)
//! and the crash inputs kept as regressions (`fuzz/regressions/reading_path/`)
//! through the fuzz target's own decoder and checks, on stable Rust: CI keeps
//! every input the fuzzer ever found without needing nightly or libFuzzer.

mod fuzz_files;
mod hardening;

use std::path::Path;

#[test]
fn reading_path_corpus_and_regressions_pass_the_checks() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("fuzz");
    let count = fuzz_files::replay(&root, "reading_path", hardening::check_bytes);
    // The committed seeds alone are three files.
    assert!(count >= 3, "only {count} corpus files found");
}
