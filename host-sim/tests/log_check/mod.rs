//! The check the `replay_log` fuzz target runs on every input
//! (`fuzz/fuzz_targets/replay_log.rs` includes this file by path), and that
//! `tests/fuzz_corpus.rs` runs over the saved corpus without nightly.
//!
//! `read_log` must return `Ok` or an error — never panic — and:
//! * every line number it reports (rows, bad rows, header errors) lies within
//!   the input (1 ..= number of lines), rows after the header, in order;
//! * skipping bad rows is consistent with failing on them: the strict read
//!   fails with `BadRows(b)` exactly when the skipping read succeeds with
//!   `skipped == b`, and both keep the same rows otherwise.
#![allow(dead_code, reason = "each test file uses a subset")]

use host_sim::log::{LogError, LogOptions, read_log};

/// Lines in `data`: a line ends at `\n`, `\r\n` or a lone `\r` (the line
/// ends CSV readers accept, common practice).
pub fn line_count(data: &[u8]) -> u64 {
    let ends = data
        .iter()
        .enumerate()
        .filter(|&(i, &b)| b == b'\n' || (b == b'\r' && data.get(i + 1) != Some(&b'\n')))
        .count();
    ends as u64 + 1
}

/// Runs the reader over `data` with default and custom options and checks
/// the contract above. Panics on a broken contract.
pub fn check_log_bytes(data: &[u8]) {
    let lines = line_count(data);
    for (time_col, value_col) in [("time_h", "od"), ("a", "b")] {
        let strict = LogOptions {
            time_col: time_col.into(),
            value_cols: vec![value_col.into()],
            skip_bad_rows: false,
            ..LogOptions::default()
        };
        let skipping = LogOptions {
            skip_bad_rows: true,
            ..strict.clone()
        };
        let a = read_log(data, &strict);
        let b = read_log(data, &skipping);
        check_one(&a, lines);
        check_one(&b, lines);
        match (&a, &b) {
            (Ok(x), Ok(y)) => {
                // Bitwise, so NaN values compare equal to themselves.
                assert_eq!(bits(&x.rows), bits(&y.rows), "same rows either way");
                assert!(y.skipped.is_empty(), "{:?}", y.skipped);
            }
            (Err(LogError::BadRows(bad)), Ok(y)) => assert_eq!(bad, &y.skipped),
            (Err(_), Err(_)) => {}
            (x, y) => panic!("strict {x:?} but skipping {y:?}"),
        }
    }
}

fn bits(rows: &[host_sim::log::LogRow]) -> Vec<(u64, u64, u64)> {
    rows.iter()
        .map(|r| (r.line, r.time_h.to_bits(), r.value().to_bits()))
        .collect()
}

fn check_one(result: &Result<host_sim::log::Log, LogError>, lines: u64) {
    match result {
        Ok(log) => {
            let mut previous = 1;
            for row in &log.rows {
                assert!(
                    row.line > previous && row.line <= lines,
                    "row line {} after {previous}, input has {lines} lines",
                    row.line
                );
                previous = row.line;
            }
            for bad in &log.skipped {
                assert!(bad.line >= 2 && bad.line <= lines, "{bad:?} of {lines}");
            }
        }
        Err(e) => {
            let message = e.to_string();
            assert!(!message.is_empty());
            // Messages quote excerpts, never whole lines.
            assert!(message.len() < 4096, "{} bytes of message", message.len());
            match e {
                LogError::MissingColumn { line, .. }
                | LogError::DuplicateColumn { line, .. }
                | LogError::TimeUnitUnknown { line, .. } => {
                    assert!(*line >= 1 && *line <= lines, "{e:?} of {lines} lines");
                }
                LogError::BadRows(rows) => {
                    assert!(!rows.is_empty());
                    for bad in rows {
                        assert!(bad.line >= 2 && bad.line <= lines, "{bad:?} of {lines}");
                        assert!(message.contains(&format!("{}", rows[0].line)), "{message}");
                    }
                }
                _ => {}
            }
        }
    }
}
