//! Replays the saved `replay_log` fuzz corpus (`fuzz/corpus/replay_log/`)
//! and the crash inputs kept as regressions (`fuzz/regressions/replay_log/`)
//! through the fuzz target's own check, on stable Rust: CI keeps every input
//! the fuzzer ever found without needing nightly or libFuzzer.

mod log_check;

use std::path::Path;

/// The files of `dir`, sorted. In `corpus/` only the committed seeds
/// (`seed-*`) unless `PLATEAU_FUZZ_CORPUS_ALL` is set: a local fuzzing run
/// leaves hundreds of files there, which would make this test slow.
fn files(dir: &Path, seeds_only: bool) -> Vec<std::path::PathBuf> {
    let Ok(entries) = std::fs::read_dir(dir) else {
        return Vec::new();
    };
    let all = std::env::var_os("PLATEAU_FUZZ_CORPUS_ALL").is_some();
    let mut out: Vec<_> = entries
        .filter_map(Result::ok)
        .map(|e| e.path())
        .filter(|p| {
            !seeds_only
                || all
                || p.file_name()
                    .is_some_and(|n| n.to_string_lossy().starts_with("seed-"))
        })
        .collect();
    out.sort();
    out
}

#[test]
fn replay_log_corpus_and_regressions_pass_the_check() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("../fuzz");
    let mut count = 0;
    for dir in ["corpus/replay_log", "regressions/replay_log"] {
        for file in files(&root.join(dir), dir.starts_with("corpus")) {
            // A running fuzzer may remove a file it reduced: skip it.
            let Ok(data) = std::fs::read(&file) else {
                continue;
            };
            eprintln!("{}", file.display());
            log_check::check_log_bytes(&data);
            count += 1;
        }
    }
    // The committed seeds alone are three files.
    assert!(count >= 3, "only {count} corpus files found");
}
