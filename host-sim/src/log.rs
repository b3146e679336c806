//! Recorded logs in, output files out.
//!
//! [`LogReader`] streams a delimited text log (CSV as spreadsheets and
//! instruments write it) line by line, holding one line at a time: memory
//! does not grow with the file. [`read_log`] collects every row, for tests
//! and small files.
//!
//! # What the reader accepts
//!
//! * **Lines above the header** (an instrument's preamble) are skipped: the
//!   header is the first line, among the first [`HEADER_SEARCH_LINES`], that
//!   holds every column asked for (time, values, blanks). Other columns are
//!   ignored.
//! * **Delimiter**: comma, semicolon or tab, detected on the header line
//!   (the first that yields every name asked for), or set.
//! * **Decimal separator**: a point, or a comma in files not delimited by
//!   commas; detected from the first number that has one, or set. A file
//!   that mixes both is refused row by row.
//! * **Time**: a number in the unit the header names (`time_h`, `Time (min)`,
//!   `t [s]`, `days` …; see [`TimeUnit::from_header`]) or that the caller
//!   gives; an ISO 8601 date-time (`2026-03-01T08:15:00`, with or without an
//!   offset), converted to hours since the first reading; or an elapsed time
//!   `[D.]HH:MM:SS[.fff]` or ISO 8601 duration (`PT1H30M`), converted to
//!   hours. A numeric time whose unit is not known is an error that says how
//!   to state it: the reader never guesses.
//! * **Saturated cells**: a value cell holding one of the caller's marker
//!   words is kept as [`Cell::Saturated`].
//! * UTF-8 byte-order mark, CRLF, LF or lone CR line ends, quoted fields,
//!   whitespace around names and numbers, blank lines.
//!
//! # Bad rows
//!
//! A row that cannot be read is a [`BadRow`] naming its line (1-based) and
//! why, quoting at most [`EXCERPT_CHARS`] characters of the offending text:
//! a value that is not a number, a missing field, more fields than the
//! header (a comma used as decimal separator would otherwise shift the
//! columns), an unbalanced quote (the row ends at its line; the rest of the
//! file is read on), bytes that are not UTF-8 in a column asked for (in other
//! columns they do not matter), a line longer than [`MAX_LINE_BYTES`].
//! Values that parse but make no physical sense (NaN, infinity, negative,
//! time running backwards) are kept: judging them is the estimator's job.
//!
//! # Output files
//!
//! [`Outputs`] stages every output of a run in temporary files and puts them
//! in place only when the whole run succeeded: a regular file (or a new
//! path) is replaced by a rename, anything else (a terminal, a pipe, a
//! device such as `/dev/stdout`, or `-` for standard output) is written in
//! place, never replaced. [`write_atomically`] does the same for one output.

use std::io::{BufRead, Read, Write};
use std::path::{Path, PathBuf};

/// Lines searched for the header before giving up.
pub const HEADER_SEARCH_LINES: u64 = 1000;
/// Longest line read, bytes; a longer one is a bad row (and is not held in
/// memory).
pub const MAX_LINE_BYTES: usize = 1 << 20;
/// Characters of a bad cell or line quoted in a message.
pub const EXCERPT_CHARS: usize = 40;
/// Header names listed in a "column not found" message.
const NAMES_SHOWN: usize = 24;
/// Delimiters tried when none is given, in order.
pub const DELIMITERS: [u8; 3] = [b',', b';', b'\t'];

/// A unit of a numeric time column.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum TimeUnit {
    /// Hours.
    Hours,
    /// Minutes.
    Minutes,
    /// Seconds.
    Seconds,
    /// Days.
    Days,
}

impl TimeUnit {
    /// Hours per unit.
    #[must_use]
    pub fn hours(self) -> f64 {
        match self {
            Self::Hours => 1.0,
            Self::Minutes => 1.0 / 60.0,
            Self::Seconds => 1.0 / 3600.0,
            Self::Days => 24.0,
        }
    }

    /// The unit's word, for messages.
    #[must_use]
    pub fn word(self) -> &'static str {
        match self {
            Self::Hours => "hours",
            Self::Minutes => "minutes",
            Self::Seconds => "seconds",
            Self::Days => "days",
        }
    }

    /// A unit's symbol or name (`h`, `hr`, `hours`, `min`, `minutes`, `s`,
    /// `sec`, `seconds`, `d`, `day`, `days`; any case).
    #[must_use]
    pub fn parse(word: &str) -> Option<Self> {
        match word.trim().to_ascii_lowercase().as_str() {
            "h" | "hr" | "hrs" | "hour" | "hours" => Some(Self::Hours),
            "m" | "min" | "mins" | "minute" | "minutes" => Some(Self::Minutes),
            "s" | "sec" | "secs" | "second" | "seconds" => Some(Self::Seconds),
            "d" | "day" | "days" => Some(Self::Days),
            _ => None,
        }
    }

    /// The unit a column name states: in brackets at its end (`Time (min)`,
    /// `t [h]`), after its last `_`, `-`, space or `/` (`time_h`,
    /// `elapsed s`, `t/min`), or the whole name (`hours`). A lone `m` counts
    /// only in brackets or as a suffix.
    #[must_use]
    pub fn from_header(name: &str) -> Option<Self> {
        let name = name.trim();
        for (open, close) in [('(', ')'), ('[', ']')] {
            if let Some(inner) = name
                .strip_suffix(close)
                .and_then(|n| n.rfind(open).map(|i| &n[i + 1..]))
            {
                return Self::parse(inner);
            }
        }
        if let Some(i) = name.rfind(['_', '-', ' ', '/']) {
            return Self::parse(&name[i + 1..]);
        }
        match Self::parse(name) {
            Some(Self::Minutes) if name.eq_ignore_ascii_case("m") => None,
            other => other,
        }
    }
}

/// The decimal separator of numbers in a log.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum Decimal {
    /// Detected from the first number that has a separator (a comma only in
    /// logs not delimited by commas).
    #[default]
    Auto,
    /// `0.5`.
    Point,
    /// `0,5`.
    Comma,
}

/// How to read a log.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct LogOptions {
    /// Header name of the time column. Default `time_h`.
    pub time_col: String,
    /// Header names of the value columns (signal, OD units), one series
    /// each; at least one. Default `od`.
    pub value_cols: Vec<String>,
    /// Every column of the header other than the time, blank and ignored
    /// columns is a value column (after [`Self::value_cols`], which may then
    /// be empty). Default off.
    pub all_value_cols: bool,
    /// Columns [`Self::all_value_cols`] leaves out. Default none.
    pub ignore_cols: Vec<String>,
    /// Header names of medium-only (blank) columns; their mean at a reading
    /// is that reading's blank. Default none.
    pub blank_cols: Vec<String>,
    /// Skip rows that cannot be parsed (and report them) instead of failing.
    pub skip_bad_rows: bool,
    /// Unit of a numeric time column; overrides the header's. `None`: the
    /// header must state it.
    pub time_unit: Option<TimeUnit>,
    /// Field delimiter; `None` detects it.
    pub delimiter: Option<u8>,
    /// Decimal separator.
    pub decimal: Decimal,
    /// Cell texts that mean "the detector saturated" (compared without
    /// surrounding whitespace, ignoring ASCII case).
    pub saturated_markers: Vec<String>,
}

impl Default for LogOptions {
    fn default() -> Self {
        Self {
            time_col: "time_h".into(),
            value_cols: vec!["od".into()],
            all_value_cols: false,
            ignore_cols: Vec::new(),
            blank_cols: Vec::new(),
            skip_bad_rows: false,
            time_unit: None,
            delimiter: None,
            decimal: Decimal::Auto,
            saturated_markers: Vec::new(),
        }
    }
}

/// One value cell of a row.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Cell {
    /// A number as written, OD units (may be NaN, infinite or negative).
    Value(f64),
    /// A saturation marker: the detector was at its ceiling.
    Saturated,
}

impl Cell {
    /// The number, or `None` for a saturated cell.
    #[must_use]
    pub fn value(self) -> Option<f64> {
        match self {
            Self::Value(v) => Some(v),
            Self::Saturated => None,
        }
    }
}

/// One row of a log.
///
/// Units: `time_h` hours; values and `blank` in the log's signal units (OD).
#[derive(Clone, Debug, PartialEq)]
pub struct LogRow {
    /// Line of the file the row came from (1-based).
    pub line: u64,
    /// Time, hours, as converted (may be NaN, infinite or out of order).
    pub time_h: f64,
    /// One cell per value column, in [`LogOptions::value_cols`] order.
    pub cells: Vec<Cell>,
    /// Mean of the blank columns at this row (`None` without blank columns).
    pub blank: Option<f64>,
}

impl LogRow {
    /// The first value column's number (NaN for a saturated cell).
    #[must_use]
    pub fn value(&self) -> f64 {
        self.cells
            .first()
            .and_then(|c| c.value())
            .unwrap_or(f64::NAN)
    }
}

/// A row that could not be parsed.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct BadRow {
    /// Line of the file (1-based).
    pub line: u64,
    /// What was wrong with it.
    pub reason: String,
}

/// A log that was read whole ([`read_log`]).
#[derive(Clone, Debug, PartialEq, Default)]
pub struct Log {
    /// The parsed rows, in file order.
    pub rows: Vec<LogRow>,
    /// Rows skipped because they could not be parsed (empty unless
    /// [`LogOptions::skip_bad_rows`]).
    pub skipped: Vec<BadRow>,
    /// What the reader inferred (layout, units), one sentence each.
    pub notes: Vec<String>,
}

/// Why a log could not be read.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum LogError {
    /// The file could not be opened or read.
    #[error("cannot read {path}")]
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
    #[error("column {name:?} not found; the header has {available:?}{}", header_where(*.line))]
    MissingColumn {
        /// The column asked for.
        name: String,
        /// The columns of the line most like a header (at most a few dozen,
        /// each shortened).
        available: Vec<String>,
        /// That line (1-based), 0 when unknown.
        line: u64,
    },
    /// A requested column name appears more than once in the header.
    #[error(
        "line {line}: the header names column {name:?} {count} times; rename them so that one can be chosen"
    )]
    DuplicateColumn {
        /// The column asked for.
        name: String,
        /// How often the header holds it.
        count: usize,
        /// The header line.
        line: u64,
    },
    /// Numbers in the time column, and no unit known for them.
    #[error(
        "line {line}: the time column {column:?} holds numbers but its unit is not known; \
         state it in the header (e.g. \"{column} (min)\" or \"time_h\") or with --time-unit h|min|s|d"
    )]
    TimeUnitUnknown {
        /// The time column.
        column: String,
        /// The first data line.
        line: u64,
    },
    /// Rows that cannot be parsed.
    #[error("{}", describe_bad_rows(.0, .0.len() as u64))]
    BadRows(Vec<BadRow>),
    /// Rows that cannot be parsed: the count and the first few.
    #[error("{}", describe_bad_rows(.first, *.total))]
    ManyBadRows {
        /// How many rows.
        total: u64,
        /// The first of them.
        first: Vec<BadRow>,
    },
}

fn header_where(line: u64) -> String {
    if line > 1 {
        format!(" (line {line})")
    } else {
        String::new()
    }
}

fn describe_bad_rows(rows: &[BadRow], total: u64) -> String {
    const SHOWN: usize = 10;
    let lines: Vec<String> = rows
        .iter()
        .take(SHOWN)
        .map(|r| r.line.to_string())
        .collect();
    let plural = if total == 1 { "" } else { "s" };
    let mut s = format!(
        "{total} row{plural} cannot be parsed, line{plural} {}",
        lines.join(", ")
    );
    let shown = lines.len() as u64;
    if total > shown {
        s.push_str(&format!(" and {} more", total - shown));
    }
    if let Some(first) = rows.first() {
        s.push_str(&format!(" (line {}: {})", first.line, first.reason));
    }
    s
}

/// At most [`EXCERPT_CHARS`] characters of `text` (trimmed), with `…` when
/// shortened.
#[must_use]
pub fn shorten(text: &str) -> String {
    let text = text.trim();
    match text.char_indices().nth(EXCERPT_CHARS) {
        Some((at, _)) => format!("{}…", &text[..at]),
        None => text.to_owned(),
    }
}

/// [`shorten`]ed `text`, quoted, for a message.
#[must_use]
pub fn excerpt(text: &str) -> String {
    format!("{:?}", shorten(text))
}

/// Lines of a byte stream: a line ends at `\n`, `\r\n` or a lone `\r`.
/// Holds at most [`MAX_LINE_BYTES`] of a line.
struct Lines<R> {
    inner: R,
    number: u64,
}

impl<R: BufRead> Lines<R> {
    /// The next line into `buf`; `Ok(None)` at the end, `Ok(Some(true))`
    /// when the line was longer than [`MAX_LINE_BYTES`] (cut).
    fn next_line(&mut self, buf: &mut Vec<u8>) -> std::io::Result<Option<bool>> {
        buf.clear();
        let mut any = false;
        let mut too_long = false;
        loop {
            let available = match self.inner.fill_buf() {
                Ok(b) => b,
                Err(e) if e.kind() == std::io::ErrorKind::Interrupted => continue,
                Err(e) => return Err(e),
            };
            if available.is_empty() {
                if any {
                    self.number += 1;
                    return Ok(Some(too_long));
                }
                return Ok(None);
            }
            any = true;
            let end = memchr::memchr2(b'\n', b'\r', available);
            let take = end.unwrap_or(available.len());
            let room = MAX_LINE_BYTES.saturating_sub(buf.len());
            if take > room {
                too_long = true;
            }
            buf.extend_from_slice(&available[..take.min(room)]);
            match end {
                None => {
                    let n = available.len();
                    self.inner.consume(n);
                }
                Some(i) => {
                    let cr = available[i] == b'\r';
                    self.inner.consume(i + 1);
                    if cr {
                        // "\r\n" is one line end.
                        loop {
                            match self.inner.fill_buf() {
                                Ok(next) => {
                                    if next.first() == Some(&b'\n') {
                                        self.inner.consume(1);
                                    }
                                    break;
                                }
                                Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
                                Err(e) => return Err(e),
                            }
                        }
                    }
                    self.number += 1;
                    return Ok(Some(too_long));
                }
            }
        }
    }
}

/// Splits one line into fields (quotes removed) with `csv_core`.
struct Splitter {
    reader: csv_core::Reader,
    out: Vec<u8>,
    ends: Vec<usize>,
    count: usize,
}

impl Splitter {
    fn new(delimiter: u8) -> Self {
        Self {
            reader: csv_core::ReaderBuilder::new().delimiter(delimiter).build(),
            out: vec![0; 1024],
            ends: vec![0; 64],
            count: 0,
        }
    }

    /// Splits `line` (no line end in it); afterwards [`Self::field`] gives
    /// field `i` of [`Self::count`]. `false` when the line's quotes are
    /// unbalanced.
    fn split(&mut self, line: &[u8]) -> bool {
        // A quote inside a quoted field is written twice, so balanced quoting
        // has an even number of them; an odd number would swallow the lines
        // that follow into one field.
        if memchr::memchr_iter(b'"', line).count() % 2 == 1 {
            self.count = 0;
            return false;
        }
        self.reader.reset();
        let (mut input, mut nout, mut nend) = (line, 0, 0);
        loop {
            let (result, nin, o, e) =
                self.reader
                    .read_record(input, &mut self.out[nout..], &mut self.ends[nend..]);
            input = &input[nin..];
            nout += o;
            nend += e;
            match result {
                csv_core::ReadRecordResult::InputEmpty => {}
                csv_core::ReadRecordResult::OutputFull => {
                    let n = self.out.len() * 2;
                    self.out.resize(n, 0);
                }
                csv_core::ReadRecordResult::OutputEndsFull => {
                    let n = self.ends.len() * 2;
                    self.ends.resize(n, 0);
                }
                csv_core::ReadRecordResult::Record | csv_core::ReadRecordResult::End => {
                    self.count = nend;
                    return true;
                }
            }
        }
    }

    fn count(&self) -> usize {
        self.count
    }

    fn field(&self, i: usize) -> &[u8] {
        let start = if i == 0 { 0 } else { self.ends[i - 1] };
        &self.out[start..self.ends[i]]
    }

    /// Every field as owned text (lossy UTF-8), cleaned; `None` for
    /// unbalanced quotes.
    fn owned(&mut self, line: &[u8]) -> Option<Vec<String>> {
        if !self.split(line) {
            return None;
        }
        Some(
            (0..self.count())
                .map(|i| clean(&String::from_utf8_lossy(self.field(i))).to_owned())
                .collect(),
        )
    }
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

/// How a log writes its times, settled by the first readable time cell.
#[derive(Clone, Copy, Debug, PartialEq)]
enum TimeFormat {
    /// Numbers in a unit.
    Number(TimeUnit),
    /// Elapsed `[D.]HH:MM:SS` or an ISO 8601 duration.
    Elapsed,
    /// ISO 8601 date-times without offset; the first one.
    Civil(jiff::civil::DateTime),
    /// ISO 8601 date-times with an offset; the first one.
    Instant(jiff::Timestamp),
}

/// Hours of an elapsed time `[D.]HH:MM:SS[.fff]` (hours may exceed 23).
fn parse_elapsed(text: &str) -> Option<f64> {
    let digits = |s: &str| !s.is_empty() && s.bytes().all(|b| b.is_ascii_digit());
    let colon = text.find(':')?;
    let (days, rest) = match text[..colon].split_once('.') {
        Some((d, _)) if digits(d) => (d.parse::<f64>().ok()?, &text[d.len() + 1..]),
        Some(_) => return None,
        None => (0.0, text),
    };
    let mut parts = rest.split(':');
    let (h, m, s) = (parts.next()?, parts.next()?, parts.next()?);
    if parts.next().is_some() || !digits(h) || m.len() != 2 || !digits(m) {
        return None;
    }
    let (whole, fraction) = match s.split_once(['.', ',']) {
        Some((w, f)) if digits(f) => (w, f),
        Some(_) => return None,
        None => (s, "0"),
    };
    if whole.len() != 2 || !digits(whole) {
        return None;
    }
    let (m, whole): (f64, f64) = (m.parse().ok()?, whole.parse().ok()?);
    if m >= 60.0 || whole >= 60.0 {
        return None;
    }
    let seconds = whole + format!("0.{fraction}").parse::<f64>().ok()?;
    Some(days * 24.0 + h.parse::<f64>().ok()? + m / 60.0 + seconds / 3600.0)
}

/// Hours of an ISO 8601 duration (`PT1H30M`).
fn parse_duration(text: &str) -> Option<f64> {
    let t = text.trim();
    if !(t.starts_with('P') || t.starts_with('p') || t.starts_with("-P")) {
        return None;
    }
    t.parse::<jiff::SignedDuration>()
        .ok()
        .map(|d| d.as_secs_f64() / 3600.0)
}

/// A streaming log reader: finds the header, then yields one row at a time.
/// See the module documentation for what it accepts.
pub struct LogReader<R> {
    lines: Lines<R>,
    buf: Vec<u8>,
    splitter: Splitter,
    options: LogOptions,
    delimiter: u8,
    delimiter_detected: bool,
    header_line: u64,
    header_len: usize,
    time_idx: usize,
    value_idx: Vec<usize>,
    blank_idx: Vec<usize>,
    header_unit: Option<TimeUnit>,
    time_format: Option<TimeFormat>,
    decimal: Decimal,
    decimal_line: u64,
}

impl<R: BufRead> LogReader<R> {
    /// Reads up to and including the header.
    ///
    /// # Errors
    ///
    /// [`LogError::Io`], [`LogError::NoHeader`] (no line with any text),
    /// [`LogError::MissingColumn`] (no line among the first
    /// [`HEADER_SEARCH_LINES`] holds every column asked for) or
    /// [`LogError::DuplicateColumn`].
    pub fn new(input: R, options: &LogOptions) -> Result<Self, LogError> {
        let mut lines = Lines {
            inner: input,
            number: 0,
        };
        let io = |source| LogError::Io {
            path: PathBuf::from("<input>"),
            source,
        };
        let wanted: Vec<&str> = std::iter::once(options.time_col.as_str())
            .chain(options.value_cols.iter().map(String::as_str))
            .chain(options.blank_cols.iter().map(String::as_str))
            .map(str::trim)
            .collect();
        let mut options = options.clone();
        let delimiters: Vec<u8> = options
            .delimiter
            .map_or_else(|| DELIMITERS.to_vec(), |d| vec![d]);
        let mut splitters: Vec<Splitter> = delimiters.iter().map(|&d| Splitter::new(d)).collect();
        let mut buf = Vec::new();
        // The line most like a header: (names found, fields, line, names).
        let mut best: Option<(usize, usize, u64, Vec<String>)> = None;
        let mut found = None;
        while lines.number < HEADER_SEARCH_LINES {
            if lines.next_line(&mut buf).map_err(io)?.is_none() {
                break;
            }
            let text = if lines.number == 1 {
                buf.strip_prefix(b"\xef\xbb\xbf").unwrap_or(&buf)
            } else {
                &buf[..]
            };
            if text.iter().all(u8::is_ascii_whitespace) {
                continue;
            }
            for (k, splitter) in splitters.iter_mut().enumerate() {
                let Some(names) = splitter.owned(text) else {
                    continue;
                };
                let hits = wanted
                    .iter()
                    .filter(|w| names.iter().any(|n| n == *w))
                    .count();
                if hits == wanted.len() {
                    found = Some((k, names));
                    break;
                }
                if best
                    .as_ref()
                    .is_none_or(|b| (hits, names.len()) > (b.0, b.1))
                {
                    best = Some((hits, names.len(), lines.number, names));
                }
            }
            if found.is_some() {
                break;
            }
        }
        let Some((k, names)) = found else {
            let Some((_, _, line, names)) = best else {
                return Err(LogError::NoHeader);
            };
            let missing = wanted
                .iter()
                .find(|w| !names.iter().any(|n| n == *w))
                .copied()
                .unwrap_or_default();
            let mut available: Vec<String> =
                names.iter().take(NAMES_SHOWN).map(|n| shorten(n)).collect();
            if names.len() > NAMES_SHOWN {
                available.push(format!("… {} more", names.len() - NAMES_SHOWN));
            }
            return Err(LogError::MissingColumn {
                name: missing.to_owned(),
                available,
                line,
            });
        };
        let header_line = lines.number;
        if options.all_value_cols {
            let taken = |n: &String| {
                n.is_empty()
                    || wanted.contains(&n.as_str())
                    || options.ignore_cols.iter().any(|i| i.trim() == n)
            };
            let mut more: Vec<String> = names.iter().filter(|n| !taken(n)).cloned().collect();
            more.dedup();
            options.value_cols.extend(more);
        }
        let wanted: Vec<&str> = std::iter::once(options.time_col.as_str())
            .chain(options.value_cols.iter().map(String::as_str))
            .chain(options.blank_cols.iter().map(String::as_str))
            .map(str::trim)
            .collect();
        for w in &wanted {
            let count = names.iter().filter(|n| n == w).count();
            if count > 1 {
                return Err(LogError::DuplicateColumn {
                    name: (*w).to_owned(),
                    count,
                    line: header_line,
                });
            }
        }
        let index = |w: &str| names.iter().position(|n| n == w.trim()).unwrap_or(0);
        let delimiter = delimiters[k];
        let decimal = match options.decimal {
            Decimal::Auto if delimiter == b',' => Decimal::Point,
            d => d,
        };
        Ok(Self {
            lines,
            buf,
            splitter: splitters.swap_remove(k),
            delimiter,
            delimiter_detected: options.delimiter.is_none(),
            header_line,
            header_len: names.len(),
            time_idx: index(&options.time_col),
            value_idx: options.value_cols.iter().map(|c| index(c)).collect(),
            blank_idx: options.blank_cols.iter().map(|c| index(c)).collect(),
            header_unit: TimeUnit::from_header(&options.time_col),
            time_format: None,
            decimal,
            decimal_line: 0,
            options,
        })
    }

    /// The value columns, in order (with [`LogOptions::all_value_cols`],
    /// as found in the header).
    #[must_use]
    pub fn value_cols(&self) -> &[String] {
        &self.options.value_cols
    }

    /// The header's line (1-based).
    #[must_use]
    pub fn header_line(&self) -> u64 {
        self.header_line
    }

    /// The field delimiter in use.
    #[must_use]
    pub fn delimiter(&self) -> u8 {
        self.delimiter
    }

    /// What was inferred about the log so far (layout, decimal separator,
    /// time), one sentence each, for the user.
    #[must_use]
    pub fn notes(&self) -> Vec<String> {
        let mut notes = Vec::new();
        if self.header_line > 1 {
            notes.push(format!(
                "header on line {}; the {} line(s) above it skipped",
                self.header_line,
                self.header_line - 1
            ));
        }
        let name = match self.delimiter {
            b',' => "comma",
            b';' => "semicolon",
            b'\t' => "tab",
            _ => "the given character",
        };
        if self.delimiter_detected {
            notes.push(format!("fields separated by {name} (detected)"));
        }
        match (self.options.decimal, self.decimal) {
            (Decimal::Auto, Decimal::Comma) => notes.push(format!(
                "decimal comma (detected on line {})",
                self.decimal_line
            )),
            (Decimal::Auto, Decimal::Point) if self.delimiter != b',' => notes.push(format!(
                "decimal point (detected on line {})",
                self.decimal_line
            )),
            _ => {}
        }
        let column = &self.options.time_col;
        match self.time_format {
            Some(TimeFormat::Number(unit)) => {
                let source = match (self.options.time_unit, self.header_unit) {
                    (Some(flag), Some(header)) if flag != header => format!(
                        "from --time-unit, over the {} its name states",
                        header.word()
                    ),
                    (Some(_), _) => "from --time-unit".to_owned(),
                    (None, _) => "from its name".to_owned(),
                };
                let conversion = if unit == TimeUnit::Hours {
                    String::new()
                } else {
                    ", converted to hours".to_owned()
                };
                notes.push(format!(
                    "time column {column:?} in {} ({source}){conversion}",
                    unit.word()
                ));
            }
            Some(TimeFormat::Elapsed) => notes.push(format!(
                "time column {column:?} holds elapsed times ([D.]HH:MM:SS or ISO 8601 durations), converted to hours"
            )),
            Some(TimeFormat::Civil(first)) => notes.push(format!(
                "time column {column:?} holds ISO 8601 date-times without a time zone; hours since the first, {first}, \
                 taken as written (no daylight-saving change applied)"
            )),
            Some(TimeFormat::Instant(first)) => notes.push(format!(
                "time column {column:?} holds ISO 8601 date-times with offsets; hours since the first, {first}"
            )),
            None => {}
        }
        if self.options.time_unit.is_some()
            && matches!(
                self.time_format,
                Some(TimeFormat::Elapsed | TimeFormat::Civil(_) | TimeFormat::Instant(_))
            )
        {
            notes.push("--time-unit ignored: the times are not plain numbers".to_owned());
        }
        notes
    }

    /// A number in the log's decimal style; settles an undetected style.
    fn number(&mut self, text: &str, line: u64) -> Option<f64> {
        let (comma, point) = (text.contains(','), text.contains('.'));
        let style = match self.decimal {
            Decimal::Auto if comma && !point => Decimal::Comma,
            Decimal::Auto if point && !comma => Decimal::Point,
            d => d,
        };
        let value = match style {
            Decimal::Point if !comma => text.parse().ok(),
            Decimal::Comma if !point => text.replace(',', ".").parse().ok(),
            Decimal::Auto if !comma && !point => text.parse().ok(),
            _ => None,
        };
        if value.is_some() && self.decimal == Decimal::Auto && style != Decimal::Auto {
            self.decimal = style;
            self.decimal_line = line;
        }
        value
    }

    fn not_a_number(&self, name: &str, text: &str) -> String {
        let hint = match self.decimal {
            Decimal::Point if text.contains(',') && self.delimiter == b',' => {
                " (a comma used as decimal separator? in a comma-separated file it cannot be)"
            }
            Decimal::Point if text.contains(',') => " (this log uses decimal points)",
            Decimal::Comma if text.contains('.') => " (this log uses decimal commas)",
            _ => "",
        };
        format!("{name} {} is not a number{hint}", excerpt(text))
    }

    /// Hours of a time cell, settling the time format on the first one.
    fn time(&mut self, text: &str, line: u64) -> Result<Result<f64, String>, LogError> {
        let format = match self.time_format {
            Some(f) => f,
            None => {
                let format = if self.number(text, line).is_some() {
                    match self.options.time_unit.or(self.header_unit) {
                        Some(unit) => TimeFormat::Number(unit),
                        None => {
                            return Err(LogError::TimeUnitUnknown {
                                column: self.options.time_col.clone(),
                                line,
                            });
                        }
                    }
                } else if parse_elapsed(text)
                    .or_else(|| parse_duration(text))
                    .is_some()
                {
                    TimeFormat::Elapsed
                } else if let Ok(t) = text.parse::<jiff::Timestamp>() {
                    TimeFormat::Instant(t)
                } else if let Ok(t) = text.parse::<jiff::civil::DateTime>() {
                    TimeFormat::Civil(t)
                } else {
                    return Ok(Err(format!(
                        "time {} is not a number, an ISO 8601 date-time or an elapsed [D.]HH:MM:SS",
                        excerpt(text)
                    )));
                };
                self.time_format = Some(format);
                format
            }
        };
        let hours = match format {
            TimeFormat::Number(unit) => self.number(text, line).map(|x| x * unit.hours()),
            TimeFormat::Elapsed => parse_elapsed(text).or_else(|| parse_duration(text)),
            TimeFormat::Civil(first) => text
                .parse::<jiff::civil::DateTime>()
                .ok()
                .map(|t| t.duration_since(first).as_secs_f64() / 3600.0),
            TimeFormat::Instant(first) => text
                .parse::<jiff::Timestamp>()
                .ok()
                .map(|t| t.duration_since(first).as_secs_f64() / 3600.0),
        };
        Ok(hours.ok_or_else(|| {
            let kind = match format {
                TimeFormat::Number(_) => return self.not_a_number("time", text),
                TimeFormat::Elapsed => "an elapsed [D.]HH:MM:SS like the first rows",
                TimeFormat::Civil(_) => "an ISO 8601 date-time without offset like the first rows",
                TimeFormat::Instant(_) => "an ISO 8601 date-time with offset like the first rows",
            };
            format!("time {} is not {kind}", excerpt(text))
        }))
    }

    /// The next row: `Ok(None)` at the end of the log, `Ok(Some(Err(bad)))`
    /// for a row that cannot be parsed.
    ///
    /// # Errors
    ///
    /// [`LogError::Io`], or [`LogError::TimeUnitUnknown`] at the first row
    /// whose time is a plain number when no unit is known.
    pub fn next_row(&mut self) -> Result<Option<Result<LogRow, BadRow>>, LogError> {
        loop {
            let too_long = match self.lines.next_line(&mut self.buf) {
                Ok(None) => return Ok(None),
                Ok(Some(t)) => t,
                Err(source) => {
                    return Err(LogError::Io {
                        path: PathBuf::from("<input>"),
                        source,
                    });
                }
            };
            let line = self.lines.number;
            let bad = |reason: String| Ok(Some(Err(BadRow { line, reason })));
            if too_long {
                return bad(format!(
                    "the line is longer than {MAX_LINE_BYTES} bytes, starting {}",
                    excerpt(&String::from_utf8_lossy(&self.buf[..EXCERPT_CHARS * 4]))
                ));
            }
            if self.buf.iter().all(u8::is_ascii_whitespace) {
                continue;
            }
            let buf = std::mem::take(&mut self.buf);
            let result = self.parse_row(&buf, line);
            self.buf = buf;
            match result {
                Ok(Some(row)) => return Ok(Some(Ok(row))),
                Ok(None) => {}
                Err(Ok(reason)) => return bad(reason),
                Err(Err(fatal)) => return Err(fatal),
            }
        }
    }

    /// One non-blank line: `Ok(None)` when every field is empty.
    #[allow(clippy::type_complexity)]
    fn parse_row(
        &mut self,
        text: &[u8],
        line: u64,
    ) -> Result<Option<LogRow>, Result<String, LogError>> {
        if !self.splitter.split(text) {
            return Err(Ok(format!(
                "unbalanced quote: the row ends at its line ({})",
                excerpt(&String::from_utf8_lossy(text))
            )));
        }
        let count = self.splitter.count();
        if (0..count).all(|i| self.splitter.field(i).iter().all(u8::is_ascii_whitespace)) {
            return Ok(None);
        }
        // More fields than the header names is ambiguous, and typically a
        // comma used as the decimal separator ("0,123" read as two fields):
        // picking columns by position would take a wrong number silently.
        if count > self.header_len {
            return Err(Ok(format!(
                "the row has {count} fields but the header has {} (a comma used as decimal separator?)",
                self.header_len
            )));
        }
        let text_of = |s: &Splitter, idx: usize, name: &str| -> Result<String, String> {
            let bytes = (idx < count)
                .then(|| s.field(idx))
                .ok_or_else(|| format!("no {name} field (the row has {count} fields)"))?;
            std::str::from_utf8(bytes)
                .map(|t| clean(t).to_owned())
                .map_err(|_| format!("{name}: bytes that are not UTF-8"))
        };
        let time_text =
            text_of(&self.splitter, self.time_idx, &self.options.time_col).map_err(Ok)?;
        let mut cells = Vec::with_capacity(self.value_idx.len());
        let mut reasons = Vec::new();
        for k in 0..self.value_idx.len() {
            let name = self.options.value_cols[k].clone();
            match text_of(&self.splitter, self.value_idx[k], &name) {
                Ok(t) => {
                    if self
                        .options
                        .saturated_markers
                        .iter()
                        .any(|m| m.trim().eq_ignore_ascii_case(&t))
                    {
                        cells.push(Cell::Saturated);
                    } else if let Some(v) = self.number(&t, line) {
                        cells.push(Cell::Value(v));
                    } else {
                        reasons.push(self.not_a_number(&name, &t));
                    }
                }
                Err(r) => reasons.push(r),
            }
        }
        let mut blank_sum = 0.0;
        for k in 0..self.blank_idx.len() {
            let name = self.options.blank_cols[k].clone();
            match text_of(&self.splitter, self.blank_idx[k], &name) {
                Ok(t) => match self.number(&t, line) {
                    Some(v) => blank_sum += v,
                    None => reasons.push(self.not_a_number(&name, &t)),
                },
                Err(r) => reasons.push(r),
            }
        }
        let time_h = match self.time(&time_text, line).map_err(Err)? {
            Ok(t) => t,
            Err(r) => {
                reasons.insert(0, r);
                f64::NAN
            }
        };
        if let Some(first) = reasons.first() {
            let more = if reasons.len() > 1 {
                format!(" (and {} more cell(s))", reasons.len() - 1)
            } else {
                String::new()
            };
            return Err(Ok(format!("{first}{more}")));
        }
        #[allow(clippy::cast_precision_loss)] // a handful of blank columns
        let blank = (!self.blank_idx.is_empty()).then(|| blank_sum / self.blank_idx.len() as f64);
        Ok(Some(LogRow {
            line,
            time_h,
            cells,
            blank,
        }))
    }
}

/// Opens a log: a file, or standard input for `-`.
///
/// # Errors
///
/// [`LogError::Io`] if the file cannot be opened, otherwise as
/// [`LogReader::new`].
pub fn open_log(
    path: &Path,
    options: &LogOptions,
) -> Result<LogReader<Box<dyn BufRead + Send>>, LogError> {
    let input: Box<dyn BufRead + Send> = if path.as_os_str() == "-" {
        Box::new(std::io::BufReader::with_capacity(1 << 16, std::io::stdin()))
    } else {
        let file = std::fs::File::open(path).map_err(|source| LogError::Io {
            path: path.to_owned(),
            source,
        })?;
        Box::new(std::io::BufReader::with_capacity(1 << 16, file))
    };
    LogReader::new(input, options).map_err(|e| match e {
        LogError::Io { source, .. } => LogError::Io {
            path: path.to_owned(),
            source,
        },
        other => other,
    })
}

/// Reads a whole log file. See [`read_log`].
///
/// # Errors
///
/// [`LogError::Io`] if the file cannot be read, otherwise as [`read_log`].
pub fn read_log_file(path: &Path, options: &LogOptions) -> Result<Log, LogError> {
    let file = std::fs::File::open(path).map_err(|source| LogError::Io {
        path: path.to_owned(),
        source,
    })?;
    read_log(file, options)
}

/// Reads a whole log from `input` into memory (see [`LogReader`] to
/// stream).
///
/// # Errors
///
/// As [`LogReader::new`] and [`LogReader::next_row`], or
/// [`LogError::BadRows`] naming every unparseable line (unless skipping).
pub fn read_log<R: Read>(input: R, options: &LogOptions) -> Result<Log, LogError> {
    let mut reader = LogReader::new(std::io::BufReader::new(input), options)?;
    let mut log = Log::default();
    let mut bad = Vec::new();
    while let Some(row) = reader.next_row()? {
        match row {
            Ok(row) => log.rows.push(row),
            Err(b) => bad.push(b),
        }
    }
    log.notes = reader.notes();
    if options.skip_bad_rows {
        log.skipped = bad;
    } else if !bad.is_empty() {
        return Err(LogError::BadRows(bad));
    }
    Ok(log)
}

/// Where an output goes.
#[derive(Clone, Debug, PartialEq, Eq)]
enum Target {
    /// Standard output (`-`).
    Stdout,
    /// A regular file or a new path: replaced by a rename.
    Replace(PathBuf),
    /// Anything else (a device, a pipe, a terminal): written in place.
    InPlace(PathBuf),
}

/// What identifies a file: its canonical path and, when it exists, its
/// device and inode (so that a hard link is recognised too).
#[derive(Clone, Debug, PartialEq, Eq)]
enum Identity {
    Stdout,
    File(PathBuf, Option<(u64, u64)>),
}

impl Identity {
    fn same(&self, other: &Self) -> bool {
        match (self, other) {
            (Self::Stdout, Self::Stdout) => true,
            (Self::File(a, ia), Self::File(b, ib)) => a == b || (ia.is_some() && ia == ib),
            _ => false,
        }
    }
}

fn identity(path: &Path) -> Identity {
    if path.as_os_str() == "-" {
        return Identity::Stdout;
    }
    let canonical = std::fs::canonicalize(path).unwrap_or_else(|_| {
        // A path that does not exist yet: its folder, canonical, and its name.
        match (path.parent(), path.file_name()) {
            (Some(dir), Some(name)) => {
                let dir = if dir.as_os_str().is_empty() {
                    Path::new(".")
                } else {
                    dir
                };
                std::fs::canonicalize(dir).map_or_else(|_| path.to_owned(), |d| d.join(name))
            }
            _ => path.to_owned(),
        }
    });
    #[cfg(unix)]
    let inode = {
        use std::os::unix::fs::MetadataExt;
        std::fs::metadata(path).ok().map(|m| (m.dev(), m.ino()))
    };
    #[cfg(not(unix))]
    let inode = None;
    Identity::File(canonical, inode)
}

enum Staging {
    Named(tempfile::NamedTempFile),
    Anonymous(std::fs::File),
}

struct Staged {
    target: Target,
    existed: bool,
    staging: Staging,
}

/// The outputs of one run, staged in temporary files and put in place
/// together by [`Outputs::commit`] (dropping them instead leaves nothing
/// behind). See the module documentation.
pub struct Outputs {
    input: Option<Identity>,
    staged: Vec<(String, Identity, Staged)>,
}

impl Outputs {
    /// Outputs of a run that reads `input` (`-` for standard input, `None`
    /// for no input file).
    #[must_use]
    pub fn new(input: Option<&Path>) -> Self {
        Self {
            input: input.filter(|p| p.as_os_str() != "-").map(identity),
            staged: Vec::new(),
        }
    }

    /// Stages an output at `path` (`-` for standard output) for the option
    /// `flag` (named in errors), and returns its index for [`Self::file`].
    ///
    /// # Errors
    ///
    /// `path` is the input or another output, a folder, or no temporary
    /// file can be created beside it.
    pub fn stage(&mut self, flag: &str, path: &Path) -> anyhow::Result<usize> {
        use anyhow::{Context, bail};
        let id = identity(path);
        if self.input.as_ref().is_some_and(|i| i.same(&id)) {
            bail!(
                "{flag} {} is the input log; an input is never overwritten",
                path.display()
            );
        }
        if let Some((other, _, _)) = self.staged.iter().find(|(_, i, _)| i.same(&id)) {
            if id == Identity::Stdout {
                bail!("{other} and {flag} both go to standard output; give one of them a file");
            }
            bail!(
                "{other} and {flag} name the same file {}; give each its own",
                path.display()
            );
        }
        let metadata = std::fs::metadata(path).ok();
        let special = path.starts_with("/dev") || path.starts_with("/proc");
        let target = match &metadata {
            _ if id == Identity::Stdout => Target::Stdout,
            Some(m) if m.is_dir() => bail!("{flag} {} is a folder", path.display()),
            Some(m) if m.is_file() && !special => {
                let Identity::File(canonical, _) = &id else {
                    unreachable!()
                };
                Target::Replace(canonical.clone())
            }
            None if !special => Target::Replace(path.to_owned()),
            _ => Target::InPlace(path.to_owned()),
        };
        let staging = match &target {
            Target::Replace(file) => {
                let dir = match file.parent() {
                    Some(p) if !p.as_os_str().is_empty() => p,
                    _ => Path::new("."),
                };
                let mut builder = tempfile::Builder::new();
                builder.prefix(".host-sim-").suffix(".tmp");
                // A temporary file is private (0600); the output keeps the
                // mode of the file it replaces, or gets the usual 0644.
                #[cfg(unix)]
                {
                    use std::os::unix::fs::PermissionsExt;
                    let mode = metadata
                        .as_ref()
                        .map_or(0o644, |m| m.permissions().mode() & 0o7777);
                    builder.permissions(std::fs::Permissions::from_mode(mode));
                }
                Staging::Named(builder.tempfile_in(dir).with_context(|| {
                    format!("cannot create a temporary file in {}", dir.display())
                })?)
            }
            Target::Stdout | Target::InPlace(_) => {
                Staging::Anonymous(tempfile::tempfile().context("cannot create a temporary file")?)
            }
        };
        self.staged.push((
            flag.to_owned(),
            id,
            Staged {
                target,
                existed: metadata.is_some(),
                staging,
            },
        ));
        Ok(self.staged.len() - 1)
    }

    /// The staging file of output `index`, to write into.
    #[must_use]
    pub fn file(&mut self, index: usize) -> &mut std::fs::File {
        match &mut self.staged[index].2.staging {
            Staging::Named(f) => f.as_file_mut(),
            Staging::Anonymous(f) => f,
        }
    }

    /// Puts every output in place: renames over regular files first, then
    /// copies to standard output and devices. If a rename fails, the files
    /// this run created are removed again.
    ///
    /// # Errors
    ///
    /// An output cannot be synced, renamed or written.
    pub fn commit(self) -> anyhow::Result<()> {
        use anyhow::Context;
        let mut renamed: Vec<PathBuf> = Vec::new();
        let mut in_place = Vec::new();
        let undo = |renamed: &[PathBuf]| {
            for p in renamed {
                let _ = std::fs::remove_file(p);
            }
        };
        for (_, _, staged) in self.staged {
            match (staged.target, staged.staging) {
                (Target::Replace(path), Staging::Named(tmp)) => {
                    let result = tmp
                        .as_file()
                        .sync_all()
                        .map_err(anyhow::Error::from)
                        .and_then(|()| tmp.persist(&path).map_err(anyhow::Error::from));
                    if let Err(e) = result {
                        undo(&renamed);
                        return Err(e).with_context(|| format!("cannot write {}", path.display()));
                    }
                    if !staged.existed {
                        renamed.push(path);
                    }
                }
                (target, Staging::Anonymous(file)) => in_place.push((target, file)),
                (target, Staging::Named(_)) => {
                    unreachable!("{target:?} staged in a named file")
                }
            }
        }
        for (target, mut file) in in_place {
            use std::io::Seek;
            file.rewind().context("cannot read back a temporary file")?;
            match target {
                Target::Stdout => {
                    let mut out = std::io::stdout().lock();
                    std::io::copy(&mut file, &mut out)
                        .and_then(|_| out.flush())
                        .context("cannot write to standard output")?;
                }
                Target::InPlace(path) => {
                    let regular = std::fs::metadata(&path).is_ok_and(|m| m.is_file());
                    let mut out = std::fs::OpenOptions::new()
                        .write(true)
                        .truncate(regular)
                        .open(&path)
                        .with_context(|| format!("cannot write {}", path.display()))?;
                    std::io::copy(&mut file, &mut out)
                        .and_then(|_| out.flush())
                        .with_context(|| format!("cannot write {}", path.display()))?;
                }
                Target::Replace(_) => unreachable!(),
            }
        }
        Ok(())
    }
}

/// Writes one output at `path` (`-` for standard output) as [`Outputs`]
/// does: `write` fills a temporary file, which replaces a regular file (or
/// becomes a new one) only if `write` succeeds; a device or pipe is written
/// in place, never replaced. On any error `path` is left as it was.
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
    let mut outputs = Outputs::new(None);
    let index = outputs.stage("the output", path)?;
    {
        let mut buffered = std::io::BufWriter::new(outputs.file(index));
        write(&mut buffered)?;
        buffered
            .flush()
            .with_context(|| format!("cannot write {}", path.display()))?;
    }
    outputs.commit()
}

/// Whether `error` (or any error in its chain) is a closed pipe: the reader
/// went away (`| head`), which ends a program quietly.
#[must_use]
pub fn is_broken_pipe(error: &anyhow::Error) -> bool {
    error.chain().any(|e| {
        e.downcast_ref::<std::io::Error>()
            .is_some_and(|io| io.kind() == std::io::ErrorKind::BrokenPipe)
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn read(text: &str) -> Result<Log, LogError> {
        read_log(text.as_bytes(), &LogOptions::default())
    }

    fn with(f: impl FnOnce(&mut LogOptions)) -> LogOptions {
        let mut o = LogOptions::default();
        f(&mut o);
        o
    }

    fn times(log: &Log) -> Vec<f64> {
        log.rows.iter().map(|r| r.time_h).collect()
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
                cells: vec![Cell::Value(0.07)],
                blank: None,
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
        assert_eq!((log.rows[0].time_h, log.rows[0].value()), (1.5, 0.10));
        assert_eq!((log.rows[1].time_h, log.rows[1].value()), (2.0, 0.2));
        assert_eq!(log.rows[1].line, 3);
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
        let log = read_log(text.as_bytes(), &with(|o| o.skip_bad_rows = true)).unwrap();
        let kept: Vec<u64> = log.rows.iter().map(|r| r.line).collect();
        assert_eq!(kept, [2, 4, 7]);
        assert_eq!(log.skipped.len(), 3);
    }

    #[test]
    fn parseable_but_invalid_values_are_kept() {
        let log = read("time_h,od\n0,NaN\n1,inf\n2,-0.5\n1.5,0.2\n").unwrap();
        assert_eq!(log.rows.len(), 4);
        assert!(log.rows[0].value().is_nan());
        assert_eq!(log.rows[1].value(), f64::INFINITY);
        assert_eq!(log.rows[2].value(), -0.5);
    }

    #[test]
    fn blank_lines_crlf_and_lone_cr_keep_line_numbers_true() {
        let lines = |log: &Log| log.rows.iter().map(|r| r.line).collect::<Vec<_>>();
        assert_eq!(
            lines(&read("time_h,od\n\n0,0.1\n\n1,0.2\n").unwrap()),
            [3, 5]
        );
        assert_eq!(lines(&read("time_h,od\r0,0.1\r1,0.2\r").unwrap()), [2, 3]);
        let LogError::BadRows(rows) = read("time_h,od\r\n0,0.1\r\n\r\n1,x\r\n").unwrap_err() else {
            panic!()
        };
        assert_eq!(rows[0].line, 4);
    }

    #[test]
    fn time_units_from_the_header() {
        use TimeUnit::*;
        for (name, unit) in [
            ("time_h", Some(Hours)),
            ("Time (min)", Some(Minutes)),
            ("t [s]", Some(Seconds)),
            ("elapsed days", Some(Days)),
            ("hours", Some(Hours)),
            ("t/min", Some(Minutes)),
            ("Time", None),
            ("t", None),
            ("m", None),
            ("time (a.u.)", None),
        ] {
            assert_eq!(TimeUnit::from_header(name), unit, "{name}");
        }
    }

    #[test]
    fn numeric_times_are_converted_and_an_unknown_unit_is_an_error() {
        let o = with(|o| o.time_col = "Time (min)".into());
        let log = read_log("Time (min),od\n0,0.1\n90,0.2\n".as_bytes(), &o).unwrap();
        assert_eq!(times(&log), [0.0, 1.5]);
        assert!(
            log.notes.iter().any(|n| n.contains("minutes")),
            "{:?}",
            log.notes
        );
        // No unit anywhere: an error that says how to give one.
        let o = with(|o| o.time_col = "t".into());
        let err = read_log("t,od\n0,0.1\n".as_bytes(), &o).unwrap_err();
        assert!(
            matches!(err, LogError::TimeUnitUnknown { line: 2, .. }),
            "{err:?}"
        );
        assert!(err.to_string().contains("--time-unit"), "{err}");
        // The flag gives it, and wins over the header.
        let o = with(|o| {
            o.time_col = "t".into();
            o.time_unit = Some(TimeUnit::Seconds);
        });
        let log = read_log("t,od\n0,0.1\n7200,0.2\n".as_bytes(), &o).unwrap();
        assert_eq!(times(&log), [0.0, 2.0]);
        let o = with(|o| o.time_unit = Some(TimeUnit::Days));
        let log = read_log("time_h,od\n0.5,0.1\n".as_bytes(), &o).unwrap();
        assert_eq!(times(&log), [12.0]);
        assert!(log.notes[1].contains("over the hours"), "{:?}", log.notes);
    }

    #[test]
    fn elapsed_times_and_iso_date_times() {
        assert_eq!(parse_elapsed("00:30:00"), Some(0.5));
        assert_eq!(parse_elapsed("1.02:00:00"), Some(26.0));
        assert_eq!(parse_elapsed("36:00:36"), Some(36.01));
        assert_eq!(parse_elapsed("00:00:01.8"), Some(0.0005));
        for bad in [
            "00:60:00",
            "1:2:3",
            "00:30",
            "a.01:00:00",
            "01:00:00:00",
            "",
        ] {
            assert_eq!(parse_elapsed(bad), None, "{bad}");
        }
        let o = with(|o| o.time_col = "Time".into());
        let log = read_log(
            "Time,od\n00:00:00,0.1\n00:15:00,0.1\n1.00:00:00,0.2\n".as_bytes(),
            &o,
        )
        .unwrap();
        assert_eq!(times(&log), [0.0, 0.25, 24.0]);
        let log = read_log("Time,od\nPT0S,0.1\nPT1H30M,0.2\n".as_bytes(), &o).unwrap();
        assert_eq!(times(&log), [0.0, 1.5]);
        // Date-times: hours since the first, across midnight and a month end.
        let text =
            "Time,od\n2026-03-31T23:45:00,0.1\n2026-04-01 00:15:00,0.1\n2026-04-01T12:45,0.2\n";
        let log = read_log(text.as_bytes(), &o).unwrap();
        assert_eq!(times(&log), [0.0, 0.5, 13.0]);
        assert!(
            log.notes.iter().any(|n| n.contains("ISO 8601")),
            "{:?}",
            log.notes
        );
        // With offsets: instants, so a change of offset is no jump.
        let text = "Time,od\n2026-03-29T00:30:00+01:00,0.1\n2026-03-29T03:30:00+02:00,0.1\n";
        let log = read_log(text.as_bytes(), &o).unwrap();
        assert_eq!(times(&log), [0.0, 2.0]);
        // A row in another style is a bad row, not a guess.
        let err = read_log(
            "Time,od\n00:00:00,0.1\n2026-04-01T00:00,0.1\n".as_bytes(),
            &o,
        )
        .unwrap_err();
        assert!(err.to_string().contains("line 3"), "{err}");
        // Day-first dates are not ISO 8601: refused, never guessed.
        let err = read_log("Time,od\n01.04.2026 00:00,0.1\n".as_bytes(), &o).unwrap_err();
        assert!(err.to_string().contains("ISO 8601"), "{err}");
    }

    #[test]
    fn preamble_lines_semicolons_and_decimal_commas() {
        let text = "Reader: bench unit 2 (invented)\nRun;42\n\nTime (min);OD;note\n0;0,100;a\n30;0,150;b\n";
        let o = with(|o| o.time_col = "Time (min)".into());
        let o = LogOptions {
            value_cols: vec!["OD".into()],
            ..o
        };
        let log = read_log(text.as_bytes(), &o).unwrap();
        assert_eq!(times(&log), [0.0, 0.5]);
        assert_eq!(log.rows[1].value(), 0.15);
        assert_eq!(log.rows[0].line, 5);
        let notes = log.notes.join(" | ");
        assert!(notes.contains("header on line 4"), "{notes}");
        assert!(notes.contains("decimal comma"), "{notes}");
        // Setting the decimal point refuses the commas.
        let o = LogOptions {
            decimal: Decimal::Point,
            ..o
        };
        assert!(read_log(text.as_bytes(), &o).is_err());
    }

    #[test]
    fn saturation_markers_and_blank_columns() {
        let o = LogOptions {
            value_cols: vec!["A1".into(), "A2".into()],
            blank_cols: vec!["H1".into(), "H2".into()],
            saturated_markers: vec!["OVER".into()],
            ..LogOptions::default()
        };
        let text = "time_h,A1,A2,H1,H2\n0,0.1,0.2,0.04,0.06\n1, over ,0.3,0.05,0.05\n";
        let log = read_log(text.as_bytes(), &o).unwrap();
        assert_eq!(log.rows[0].cells, [Cell::Value(0.1), Cell::Value(0.2)]);
        assert_eq!(log.rows[1].cells, [Cell::Saturated, Cell::Value(0.3)]);
        assert!((log.rows[0].blank.unwrap() - 0.05).abs() < 1e-12);
        // A marker is not a number elsewhere.
        let err = read_log("time_h,A1,A2,H1,H2\n0,0.1,0.2,OVER,0.06\n".as_bytes(), &o).unwrap_err();
        assert!(err.to_string().contains("H1"), "{err}");
    }

    #[test]
    fn a_too_long_line_is_a_bad_row_and_not_kept() {
        let mut text = b"time_h,od\n0,0.1\n".to_vec();
        text.extend(std::iter::repeat_n(b'9', MAX_LINE_BYTES + 10));
        text.extend_from_slice(b"\n2,0.3\n");
        let log = read_log(&text[..], &with(|o| o.skip_bad_rows = true)).unwrap();
        assert_eq!(times(&log), [0.0, 2.0]);
        assert_eq!(log.skipped[0].line, 3);
        assert!(log.skipped[0].reason.len() < 200);
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
        let names: Vec<_> = std::fs::read_dir(dir.path())
            .unwrap()
            .map(|e| e.unwrap().file_name())
            .collect();
        assert_eq!(names, ["out.csv"]);
        let err = write_atomically(&dir.path().join("no/such/out.csv"), |_| Ok(())).unwrap_err();
        assert!(format!("{err:#}").contains("temporary file"));
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
    fn outputs_refuse_the_input_and_each_other() {
        let dir = tempfile::tempdir().unwrap();
        let input = dir.path().join("log.csv");
        std::fs::write(&input, "time_h,od\n").unwrap();
        let mut outputs = Outputs::new(Some(&input));
        let err = outputs.stage("--out", &input).unwrap_err();
        assert!(err.to_string().contains("is the input"), "{err}");
        // The same file by another spelling, and by a hard link.
        let other = dir.path().join(".").join("log.csv");
        assert!(outputs.stage("--out", &other).is_err());
        let link = dir.path().join("link.csv");
        std::fs::hard_link(&input, &link).unwrap();
        assert!(outputs.stage("--out", &link).is_err());
        let a = dir.path().join("a.csv");
        outputs.stage("--out", &a).unwrap();
        let err = outputs.stage("--summary", &a).unwrap_err();
        assert!(err.to_string().contains("same file"), "{err}");
        outputs.stage("--summary", Path::new("-")).unwrap();
        assert!(outputs.stage("--plot", Path::new("-")).is_err());
        // Dropped without commit: nothing is left.
        drop(outputs);
        let mut names: Vec<_> = std::fs::read_dir(dir.path())
            .unwrap()
            .map(|e| e.unwrap().file_name().into_string().unwrap())
            .collect();
        names.sort();
        assert_eq!(names, ["link.csv", "log.csv"]);
    }

    #[cfg(unix)]
    #[test]
    fn a_pipe_is_written_in_place_not_replaced() {
        use std::os::unix::fs::FileTypeExt;
        let dir = tempfile::tempdir().unwrap();
        let fifo = dir.path().join("pipe");
        let made = std::process::Command::new("mkfifo").arg(&fifo).status();
        if !made.is_ok_and(|s| s.success()) {
            eprintln!("mkfifo not available; skipped");
            return;
        }
        let reader = {
            let fifo = fifo.clone();
            std::thread::spawn(move || std::fs::read_to_string(fifo).unwrap())
        };
        write_atomically(&fifo, |w| Ok(w.write_all(b"through the pipe\n")?)).unwrap();
        assert_eq!(reader.join().unwrap(), "through the pipe\n");
        assert!(std::fs::metadata(&fifo).unwrap().file_type().is_fifo());
    }
}
