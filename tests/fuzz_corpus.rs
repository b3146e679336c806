//! Replays the saved `reading_path` fuzz corpus (`fuzz/corpus/reading_path/`)
//! and the crash inputs kept as regressions (`fuzz/regressions/reading_path/`)
//! through the fuzz target's own decoder and checks, on stable Rust: CI keeps
//! every input the fuzzer ever found without needing nightly or libFuzzer.

mod hardening;

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
fn reading_path_corpus_and_regressions_pass_the_checks() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("fuzz");
    let mut count = 0;
    for dir in ["corpus/reading_path", "regressions/reading_path"] {
        for file in files(&root.join(dir)) {
            let data = std::fs::read(&file).unwrap();
            eprintln!("{}", file.display());
            hardening::check_bytes(&data);
            count += 1;
        }
    }
    // The committed seeds alone are three files.
    assert!(count >= 3, "only {count} corpus files found");
}
