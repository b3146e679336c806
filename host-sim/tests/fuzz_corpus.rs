//! Replays the saved `replay_log` fuzz corpus (`fuzz/corpus/replay_log/`)
//! and the crash inputs kept as regressions (`fuzz/regressions/replay_log/`)
//! through the fuzz target's own check, on stable Rust: CI keeps every input
//! the fuzzer ever found without needing nightly or libFuzzer.

mod log_check;

use std::path::Path;

fn files(dir: &Path) -> Vec<std::path::PathBuf> {
    let Ok(entries) = std::fs::read_dir(dir) else {
        return Vec::new();
    };
    let mut out: Vec<_> = entries.map(|e| e.unwrap().path()).collect();
    out.sort();
    out
}

#[test]
fn replay_log_corpus_and_regressions_pass_the_check() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("../fuzz");
    let mut count = 0;
    for dir in ["corpus/replay_log", "regressions/replay_log"] {
        for file in files(&root.join(dir)) {
            let data = std::fs::read(&file).unwrap();
            eprintln!("{}", file.display());
            log_check::check_log_bytes(&data);
            count += 1;
        }
    }
    // The committed seeds alone are three files.
    assert!(count >= 3, "only {count} corpus files found");
}
