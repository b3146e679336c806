//! Recorded logs in, output files out.
//!
//! [`read_log`] reads a CSV log with a header row and picks two columns by
//! name (time in hours and the sensor value); other columns are ignored. A row
//! that cannot be parsed is an error naming its line (1-based; the header is
//! line 1), unless [`LogOptions::skip_bad_rows`] is set, in which case it is
//! skipped and reported. A row with more fields than the header is such a
//! row (a comma used as the decimal separator would otherwise shift the
//! columns silently). Values that parse but make no physical sense (NaN,
//! infinity, negative, time running backwards) are kept: judging them is the
//! estimator's job.
//!
//! [`write_atomically`] writes an output file through a temporary file in the
//! same folder and renames it into place, so an error never leaves a
//! half-written file behind.

use std::io::{Read, Write};
use std::path::{Path, PathBuf};

/// How to read a log.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct LogOptions {
    /// Header name of the time column (hours). Default `time_h`.
    pub time_col: String,
    /// Header name of the value column (OD units). Default `od`.
    pub value_col: String,
    /// Skip rows that cannot be parsed (and report them) instead of failing.
    pub skip_bad_rows: bool,
}

impl Default for LogOptions {
    fn default() -> Self {
        Self {
            time_col: "time_h".into(),
            value_col: "od".into(),
            skip_bad_rows: false,
        }
    }
}

/// One row of a log.
///
/// Units: `time_h` hours; `value` in the log's signal units (OD).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LogRow {
    /// Line of the file the row came from (1-based; the header is line 1).
    pub line: u64,
    /// Time, hours, as written (may be NaN, infinite or out of order).
    pub time_h: f64,
    /// Sensor value, as written (may be NaN, infinite or negative).
    pub value: f64,
}

/// A row that could not be parsed.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct BadRow {
    /// Line of the file (1-based; the header is line 1).
    pub line: u64,
    /// What was wrong with it.
    pub reason: String,
}

/// A log that was read.
#[derive(Clone, Debug, PartialEq, Default)]
pub struct Log {
    /// The parsed rows, in file order.
    pub rows: Vec<LogRow>,
    /// Rows skipped because they could not be parsed (empty unless
    /// [`LogOptions::skip_bad_rows`]).
    pub skipped: Vec<BadRow>,
}

/// Why a log could not be read.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum LogError {
    /// The file could not be opened or read.
    #[error("cannot read {path}: {source}")]
    Io {
        /// The file.
        path: PathBuf,
        /// The cause.
        source: std::io::Error,
    },
    /// The file has no header row.
    #[error("the log is empty: no header row")]
    NoHeader,
    /// A requested column is not in the header.
    #[error("column {name:?} not found; the header has {available:?}")]
    MissingColumn {
        /// The column asked for.
        name: String,
        /// The columns the header has.
        available: Vec<String>,
    },
    /// Rows that cannot be parsed.
    #[error("{}", describe_bad_rows(.0))]
    BadRows(Vec<BadRow>),
    /// The CSV itself is malformed (for example invalid UTF-8 or a broken
    /// quote) at the given line.
    #[error("line {line}: {message}")]
    Csv {
        /// Line of the file (1-based).
        line: u64,
        /// The parser's message.
        message: String,
    },
}

fn describe_bad_rows(rows: &[BadRow]) -> String {
    const SHOWN: usize = 10;
    let lines: Vec<String> = rows
        .iter()
        .take(SHOWN)
        .map(|r| r.line.to_string())
        .collect();
    let mut s = format!(
        "{} row{} cannot be parsed, line{} {}",
        rows.len(),
        if rows.len() == 1 { "" } else { "s" },
        if rows.len() == 1 { "" } else { "s" },
        lines.join(", ")
    );
    if rows.len() > SHOWN {
        s.push_str(&format!(" and {} more", rows.len() - SHOWN));
    }
    if let Some(first) = rows.first() {
        s.push_str(&format!(" (line {}: {})", first.line, first.reason));
    }
    s
}

/// Reads a log file. See [`read_log`].
///
/// # Errors
///
/// [`LogError::Io`] if the file cannot be read, otherwise as [`read_log`].
pub fn read_log_file(path: &Path, options: &LogOptions) -> Result<Log, LogError> {
    let file = std::fs::File::open(path).map_err(|source| LogError::Io {
        path: path.to_owned(),
        source,
    })?;
    read_log(std::io::BufReader::new(file), options)
}

/// Reads a CSV log with a header row from `input`.
///
/// Accepts a UTF-8 byte-order mark, CRLF line ends, quoted fields and
/// whitespace around names and numbers. Blank lines are ignored.
///
/// # Errors
///
/// [`LogError::NoHeader`], [`LogError::MissingColumn`] naming the column,
/// [`LogError::BadRows`] naming every unparseable line (unless skipping), or
/// [`LogError::Csv`] for malformed CSV.
pub fn read_log<R: Read>(mut input: R, options: &LogOptions) -> Result<Log, LogError> {
    let mut bytes = Vec::new();
    input
        .read_to_end(&mut bytes)
        .map_err(|source| LogError::Io {
            path: PathBuf::from("<input>"),
            source,
        })?;
    let text = bytes.strip_prefix(b"\xef\xbb\xbf").unwrap_or(&bytes);
    // The csv crate's own line counter drifts with CRLF and blank lines, so
    // line numbers come from byte offsets: the line of the first byte of a
    // record that is not a line break. A line ends at "\n", "\r\n" or a lone
    // "\r", as the csv parser ends records (counting only "\n" numbered every
    // row of a file with lone-CR line ends "line 1"; found by fuzzing).
    let newlines: Vec<usize> = text
        .iter()
        .enumerate()
        .filter(|&(i, b)| *b == b'\n' || (*b == b'\r' && text.get(i + 1) != Some(&b'\n')))
        .map(|(i, _)| i)
        .collect();
    let line_of = |pos: Option<&csv::Position>| -> u64 {
        let Some(pos) = pos else { return 0 };
        let mut at = usize::try_from(pos.byte()).unwrap_or(usize::MAX);
        while at < text.len() && (text[at] == b'\r' || text[at] == b'\n') {
            at += 1;
        }
        (newlines.partition_point(|&n| n < at) + 1) as u64
    };
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .from_reader(text);
    let mut records = reader.records();
    let csv_error = |e: csv::Error| LogError::Csv {
        line: line_of(e.position()),
        message: e.to_string(),
    };
    let header = match records.next() {
        Some(r) => r.map_err(csv_error)?,
        None => return Err(LogError::NoHeader),
    };
    let names: Vec<String> = header.iter().map(|h| clean(h).to_owned()).collect();
    let find = |name: &str| {
        names
            .iter()
            .position(|n| n == name.trim())
            .ok_or_else(|| LogError::MissingColumn {
                name: name.to_owned(),
                available: names.clone(),
            })
    };
    let time_idx = find(&options.time_col)?;
    let value_idx = find(&options.value_col)?;
    let mut log = Log::default();
    let mut bad = Vec::new();
    for record in records {
        let record = record.map_err(csv_error)?;
        let line = line_of(record.position());
        if record.iter().all(|f| f.trim().is_empty()) {
            continue;
        }
        // More fields than the header names is ambiguous, and typically a
        // comma used as the decimal separator ("0,123" read as two fields):
        // picking columns by position would take a wrong number silently.
        if record.len() > names.len() {
            bad.push(BadRow {
                line,
                reason: format!(
                    "the row has {} fields but the header has {} (a comma used as decimal separator?)",
                    record.len(),
                    names.len()
                ),
            });
            continue;
        }
        let field = |idx: usize, name: &str| -> Result<f64, String> {
            let text = record
                .get(idx)
                .ok_or_else(|| format!("no {name} field (the row has {} fields)", record.len()))?;
            clean(text)
                .parse::<f64>()
                .map_err(|_| format!("{name} {:?} is not a number", text.trim()))
        };
        match (
            field(time_idx, &options.time_col),
            field(value_idx, &options.value_col),
        ) {
            (Ok(time_h), Ok(value)) => log.rows.push(LogRow {
                line,
                time_h,
                value,
            }),
            (Err(reason), _) | (_, Err(reason)) => bad.push(BadRow { line, reason }),
        }
    }
    if options.skip_bad_rows {
        log.skipped = bad;
    } else if !bad.is_empty() {
        return Err(LogError::BadRows(bad));
    }
    Ok(log)
}

/// A field without surrounding whitespace, and without quotes that the CSV
/// parser left because whitespace stood before them (`a, "0.1" ,b`).
fn clean(field: &str) -> &str {
    let t = field.trim();
    match t.strip_prefix('"').and_then(|t| t.strip_suffix('"')) {
        Some(inner) => inner.trim(),
        None => t,
    }
}

/// Writes `path` atomically: `write` fills a temporary file in the same
/// folder, which is flushed, synced and renamed over `path` only if `write`
/// succeeds. On any error the temporary file is removed and `path` is left as
/// it was (absent or with its old content).
///
/// # Errors
///
/// The error of `write`, or an I/O error creating, writing or renaming the
/// temporary file (with the path in its context).
pub fn write_atomically<F>(path: &Path, write: F) -> anyhow::Result<()>
where
    F: FnOnce(&mut dyn Write) -> anyhow::Result<()>,
{
    use anyhow::Context;
    let dir = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    let mut builder = tempfile::Builder::new();
    builder.prefix(".host-sim-").suffix(".tmp");
    // A temporary file is private (0600); the output keeps the mode of the
    // file it replaces, or gets the usual 0644.
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        let mode = std::fs::metadata(path).map_or(0o644, |m| m.permissions().mode() & 0o7777);
        builder.permissions(std::fs::Permissions::from_mode(mode));
    }
    let mut tmp = builder
        .tempfile_in(dir)
        .with_context(|| format!("cannot create a temporary file in {}", dir.display()))?;
    {
        let mut buffered = std::io::BufWriter::new(tmp.as_file_mut());
        write(&mut buffered)?;
        buffered
            .flush()
            .with_context(|| format!("cannot write {}", path.display()))?;
    }
    tmp.as_file()
        .sync_all()
        .with_context(|| format!("cannot write {}", path.display()))?;
    tmp.persist(path)
        .with_context(|| format!("cannot write {}", path.display()))?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn read(text: &str) -> Result<Log, LogError> {
        read_log(text.as_bytes(), &LogOptions::default())
    }

    #[test]
    fn plain_log() {
        let log = read("time_h,od\n0,0.05\n0.5,0.07\n").unwrap();
        assert_eq!(log.rows.len(), 2);
        assert_eq!(
            log.rows[1],
            LogRow {
                line: 3,
                time_h: 0.5,
                value: 0.07
            }
        );
        assert!(log.skipped.is_empty());
    }

    #[test]
    fn bom_crlf_quotes_whitespace_and_other_columns() {
        let text = "\u{feff}sample, od ,temp_c, time_h \r\n\
                    a, \"0.10\" ,37, 1.5\r\n\
                    \"b,c\",\" 0.2 \",37,\"2.0\"\r\n";
        let log = read(text).unwrap();
        assert_eq!(log.rows.len(), 2);
        assert_eq!((log.rows[0].time_h, log.rows[0].value), (1.5, 0.10));
        assert_eq!((log.rows[1].time_h, log.rows[1].value), (2.0, 0.2));
        assert_eq!(log.rows[1].line, 3);
    }

    #[test]
    fn custom_column_names() {
        let opts = LogOptions {
            time_col: "hours".into(),
            value_col: "OD600".into(),
            ..LogOptions::default()
        };
        let log = read_log("OD600,hours\n0.3,4\n".as_bytes(), &opts).unwrap();
        assert_eq!((log.rows[0].time_h, log.rows[0].value), (4.0, 0.3));
    }

    #[test]
    fn missing_column_is_named() {
        let err = read("time,od\n0,1\n").unwrap_err();
        match &err {
            LogError::MissingColumn { name, available } => {
                assert_eq!(name, "time_h");
                assert_eq!(available, &["time", "od"]);
            }
            other => panic!("{other:?}"),
        }
        assert!(err.to_string().contains("\"time_h\""));
        assert!(matches!(read(""), Err(LogError::NoHeader)));
    }

    #[test]
    fn bad_rows_name_their_lines() {
        let text = "time_h,od\n0,0.1\n1,abc\n2,0.3\n,0.4\n4\n5,0.6\n";
        let err = read(text).unwrap_err();
        let LogError::BadRows(rows) = &err else {
            panic!("{err:?}")
        };
        let lines: Vec<u64> = rows.iter().map(|r| r.line).collect();
        assert_eq!(lines, [3, 5, 6]);
        let msg = err.to_string();
        assert!(msg.contains("lines 3, 5, 6"), "{msg}");
        assert!(msg.contains("\"abc\""), "{msg}");

        let opts = LogOptions {
            skip_bad_rows: true,
            ..LogOptions::default()
        };
        let log = read_log(text.as_bytes(), &opts).unwrap();
        let kept: Vec<u64> = log.rows.iter().map(|r| r.line).collect();
        assert_eq!(kept, [2, 4, 7]);
        assert_eq!(log.skipped.len(), 3);
        assert_eq!(log.skipped[2].line, 6);
    }

    #[test]
    fn parseable_but_invalid_values_are_kept() {
        let text = "time_h,od\n0,NaN\n1,inf\n2,-0.5\n1.5,0.2\n";
        let log = read(text).unwrap();
        assert_eq!(log.rows.len(), 4);
        assert!(log.rows[0].value.is_nan());
        assert_eq!(log.rows[1].value, f64::INFINITY);
        assert_eq!(log.rows[2].value, -0.5);
        assert!(log.rows[3].time_h < log.rows[2].time_h);
    }

    #[test]
    fn blank_lines_are_ignored_and_line_numbers_stay_true() {
        let log = read("time_h,od\n\n0,0.1\n\n1,0.2\n").unwrap();
        let lines: Vec<u64> = log.rows.iter().map(|r| r.line).collect();
        assert_eq!(lines, [3, 5]);
    }

    #[test]
    fn atomic_write_replaces_only_on_success() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("out.csv");
        write_atomically(&path, |w| Ok(w.write_all(b"first\n")?)).unwrap();
        assert_eq!(std::fs::read_to_string(&path).unwrap(), "first\n");
        let err = write_atomically(&path, |w| {
            w.write_all(b"half of a ")?;
            anyhow::bail!("generator failed")
        })
        .unwrap_err();
        assert_eq!(err.to_string(), "generator failed");
        assert_eq!(std::fs::read_to_string(&path).unwrap(), "first\n");
        let new = dir.path().join("new.csv");
        assert!(write_atomically(&new, |_| anyhow::bail!("no")).is_err());
        assert!(!new.exists());
        // No temporary files are left behind.
        let names: Vec<_> = std::fs::read_dir(dir.path())
            .unwrap()
            .map(|e| e.unwrap().file_name())
            .collect();
        assert_eq!(names, ["out.csv"]);
    }

    #[cfg(unix)]
    #[test]
    fn atomic_write_gives_readable_files_and_keeps_modes() {
        use std::os::unix::fs::PermissionsExt;
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("out.csv");
        write_atomically(&path, |w| Ok(w.write_all(b"x")?)).unwrap();
        let mode = |p: &Path| std::fs::metadata(p).unwrap().permissions().mode() & 0o777;
        assert_eq!(mode(&path), 0o644);
        std::fs::set_permissions(&path, std::fs::Permissions::from_mode(0o600)).unwrap();
        write_atomically(&path, |w| Ok(w.write_all(b"y")?)).unwrap();
        assert_eq!(mode(&path), 0o600);
        assert_eq!(std::fs::read_to_string(&path).unwrap(), "y");
    }

    #[test]
    fn crlf_bad_row_lines_are_true() {
        let text = "time_h,od\r\n0,0.1\r\n\r\n1,x\r\n2,0.3\r\n";
        let LogError::BadRows(rows) = read(text).unwrap_err() else {
            panic!()
        };
        assert_eq!(rows[0].line, 4);
    }

    #[test]
    fn lone_cr_line_ends_number_lines_truly() {
        // Old-style CR-only line ends: rows are lines 2 and 3, the bad one 3.
        let log = read("time_h,od\r0,0.1\r1,0.2\r").unwrap();
        let lines: Vec<u64> = log.rows.iter().map(|r| r.line).collect();
        assert_eq!(lines, [2, 3]);
        let LogError::BadRows(rows) = read("time_h,od\r0,0.1\r1,x\r").unwrap_err() else {
            panic!()
        };
        assert_eq!(rows[0].line, 3);
    }

    #[test]
    fn atomic_write_into_a_missing_folder_fails_cleanly() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("no/such/folder/out.csv");
        let err = write_atomically(&path, |_| Ok(())).unwrap_err();
        assert!(format!("{err:#}").contains("temporary file"));
    }
}
