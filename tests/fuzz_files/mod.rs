//! Replays a fuzz target's saved corpus (`fuzz/corpus/TARGET/`) and the crash
//! inputs kept as regressions (`fuzz/regressions/TARGET/`) through a check, on
//! stable Rust. Shared by the core crate's `tests/fuzz_corpus.rs` and
//! host-sim's (which includes this file by path).

use std::path::{Path, PathBuf};

/// The files of `dir`, sorted. In `corpus/` only the committed seeds
/// (`seed-*`) unless `PLATEAU_FUZZ_CORPUS_ALL` is set: a local fuzzing run
/// leaves hundreds of files there, which would make the tests slow.
fn files(dir: &Path, seeds_only: bool) -> Vec<PathBuf> {
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

/// Runs `check` on every saved input of fuzz target `target` under the
/// `fuzz/` folder `fuzz_root`; returns how many inputs it checked.
pub fn replay(fuzz_root: &Path, target: &str, check: impl Fn(&[u8])) -> usize {
    let mut count = 0;
    for (kind, seeds_only) in [("corpus", true), ("regressions", false)] {
        for file in files(&fuzz_root.join(kind).join(target), seeds_only) {
            // A running fuzzer may remove a file it reduced: skip it.
            let Ok(data) = std::fs::read(&file) else {
                continue;
            };
            eprintln!("{}", file.display());
            check(&data);
            count += 1;
        }
    }
    count
}
