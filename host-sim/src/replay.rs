//! `host-sim replay`: a recorded log through the device's `f32` estimator
//! and culture monitor ([`plateau::Watch`]), reading by reading, with a per-reading CSV and a JSON summary that puts
//! the batch fit of the same log beside the online estimate.
//!
//! Every parsed row goes to the estimator, including NaN, negative and
//! out-of-order readings: the estimator judges them, and the output keeps
//! them with their status. Rows that cannot be parsed are the log reader's
//! business ([`crate::log`]).
//!
//! # Output columns (one row per reading)
//!
//! `line, time_h, od, status, capacity, capacity_sd, rate_per_h, rate_sd,
//! doubling_time_h, lag_h, inflection_time_h, phase, saturation_eta_h,
//! saturation_eta_sd_h, alert, alert_active, events, shape, shape_sd, blank,
//! blank_sd, blank_source`
//!
//! * `status`: `accepted`, `restarted`, `blank_reading` (a reading of the
//!   blank phase, `--blank-until`) or the rejection reason.
//! * `rate_per_h`, `rate_sd`: the maximum specific growth rate μmax.
//! * `shape`, `shape_sd`: the fitted Richards shape ν (1 for a symmetric
//!   logistic).
//! * `blank`, `blank_sd`, `blank_source`: the blank the estimator subtracts
//!   and where it comes from (`configured`, `measured` in the blank phase,
//!   or `unknown`: then 0 is subtracted and the sds include the spread an
//!   unknown blank leaves).
//! * `capacity`, `capacity_sd`: published capacity above the blank (empty
//!   while the estimator cannot place it).
//! * `lag_h`: the estimator's lag, hours from the first reading (since the
//!   last restart): the tangent construction on ln OD.
//! * `inflection_time_h`, `saturation_eta_h`: hours on the log's clock;
//!   `saturation_eta_h` is the monitor's forecast of when the culture reaches
//!   the alert fraction of its capacity, given only while a capacity is
//!   published.
//! * `phase`: the monitor's growth phase after the reading.
//! * `alert`: `saturation_alert` on the reading that raised the saturation
//!   alert, `saturation_rearmed` where it re-armed, else empty;
//!   `alert_active` is `true` from the alert until it re-arms.
//! * `events`: every event the monitor raised at the reading (phase changes,
//!   faults, targets), separated by `;`.
//!
//! An empty cell means nothing is known. Units: hours, OD units, per hour.

//! # Several series (plates, many channels)
//!
//! With more than one value column every column is a series, replayed by
//! its own estimator, all in parallel. The per-reading CSV then starts with
//! a `series` column (the value column's name) and holds, for every line of
//! the log, one row per series in the order the columns were given; the
//! summary holds the file-level keys (`readings` — rows read —,
//! `skipped_lines`, `alert_fraction`, `alert_lead_h`) and `"series":
//! {column: <the one-series summary object>}`. One value column gives
//! exactly the one-series outputs above.
//!
//! With blank columns, their mean at each reading is subtracted from every
//! series' reading before the estimator sees it (`od` keeps the reading as
//! written; a reading at or above the ceiling is passed unchanged, so that
//! it stays saturated); the summary gains `blank_cols`. A saturation marker
//! cell is a reading at the ceiling (`od` is the ceiling, `status`
//! `at_ceiling`); the summary then gains `saturated_cells`.
//!
//! # Memory
//!
//! The log is streamed in chunks of [`CHUNK_ROWS`] rows; what grows with the
//! log is the batch fit's input (16 bytes per reading since the last
//! restart, per series), the line numbers of skipped rows (8 bytes each) and
//! the list of phase changes and alerts. A plot keeps at most
//! [`PLOT_POINTS`] readings per series.

use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::io::{BufRead, Write};
use std::path::PathBuf;

use anyhow::{Context, Result, bail, ensure};
use plateau::{Estimate, EstimatorConfig, Event, MonitorConfig, Outcome, TimedEvent, Watch};
use rayon::prelude::*;
use serde_json::{Value as Json, json};

use crate::batch::{LogisticFit, fit_logistic_trimmed};
use crate::log::{BadRow, Cell, LogError, LogOptions, LogReader, LogRow, Outputs, open_log};
use crate::online::{self, Settings, Step};

/// The header of the per-reading CSV.
pub const COLUMNS: [&str; 22] = [
    "line",
    "time_h",
    "od",
    "status",
    "capacity",
    "capacity_sd",
    "rate_per_h",
    "rate_sd",
    "doubling_time_h",
    "lag_h",
    "inflection_time_h",
    "phase",
    "saturation_eta_h",
    "saturation_eta_sd_h",
    "alert",
    "alert_active",
    "events",
    "shape",
    "shape_sd",
    "blank",
    "blank_sd",
    "blank_source",
];

/// Rows read before they go through the estimators (in parallel).
pub const CHUNK_ROWS: usize = 2048;
/// Readings per series a plot keeps at most (every k-th when there are more).
pub const PLOT_POINTS: usize = 4000;
/// Skipped lines reported one by one (with their reason) on stderr.
pub const SKIPPED_SHOWN: usize = 50;

/// How to replay.
#[derive(Clone, Debug, PartialEq)]
pub struct ReplayOptions {
    /// How to read the log.
    pub log: LogOptions,
    /// Estimator settings.
    pub settings: Settings,
    /// Fraction of the capacity that counts as saturation (0 to 1).
    pub alert_fraction: f64,
    /// How long before saturation the alert should come, hours.
    pub alert_lead_h: f64,
    /// Readings before this time (hours on the log's clock, after unit
    /// conversion) are blank readings: the medium before inoculation.
    pub blank_until_h: Option<f64>,
}

impl Default for ReplayOptions {
    fn default() -> Self {
        Self {
            log: LogOptions::default(),
            settings: Settings::default(),
            alert_fraction: 0.9,
            alert_lead_h: 1.0,
            blank_until_h: None,
        }
    }
}

/// The batch fit of the same log, for comparison.
#[derive(Clone, Debug, PartialEq)]
pub struct BatchResult {
    /// The fit, or why there is none.
    pub fit: Result<LogisticFit, String>,
    /// Readings the fit used (after its outlier trimming).
    pub used: usize,
}

/// One reading kept for a plot.
///
/// Units: hours, OD units (blank subtracted when blank columns are used),
/// per hour.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TracePoint {
    /// Time, hours.
    pub time_h: f64,
    /// The reading the estimator saw, OD units.
    pub value: f64,
    /// Whether the estimator rejected it.
    pub rejected: bool,
    /// Capacity estimate and sd after the reading, OD units.
    pub capacity: Option<(f32, f32)>,
    /// Rate estimate and sd after the reading, per hour.
    pub rate: Option<(f32, f32)>,
}

/// A bounded list that keeps every k-th item, doubling k when full.
#[derive(Clone, Debug)]
pub struct Thinned<T> {
    items: Vec<T>,
    stride: u64,
    seen: u64,
}

impl<T> Default for Thinned<T> {
    fn default() -> Self {
        Self {
            items: Vec::new(),
            stride: 1,
            seen: 0,
        }
    }
}

impl<T> Thinned<T> {
    fn push(&mut self, item: T) {
        let stride = self.stride.max(1);
        if self.seen.is_multiple_of(stride) {
            self.items.push(item);
            if self.items.len() >= PLOT_POINTS {
                let mut i = 0;
                self.items.retain(|_| {
                    i += 1;
                    i % 2 == 1
                });
                self.stride = stride * 2;
            }
        }
        self.seen += 1;
    }

    /// The kept items, in order.
    #[must_use]
    pub fn items(&self) -> &[T] {
        &self.items
    }
}

/// One series replayed: its estimator, monitor and running summary.
pub struct Series {
    /// The value column.
    pub name: String,
    watch: Watch,
    ceiling: f64,
    /// Readings fed.
    pub readings: usize,
    /// Readings the estimator rejected.
    pub rejected: usize,
    /// Restarts (dilutions) the estimator detected.
    pub restarts: usize,
    /// Saturation-marker cells fed as readings at the ceiling.
    pub saturated_cells: u64,
    /// Readings taken as blank readings (`--blank-until`).
    pub blank_readings: u64,
    /// Readings before this time are blank readings, hours.
    blank_until_h: Option<f64>,
    /// The blank measured so far in the blank phase, OD units.
    measured_blank: Option<f64>,
    rejections: BTreeMap<&'static str, u64>,
    faults: BTreeMap<&'static str, u64>,
    /// Saturation alerts and re-arms, as the monitor raised them.
    alerts: Vec<TimedEvent<f32>>,
    /// Phase changes, as the monitor raised them.
    phases: Vec<TimedEvent<f32>>,
    /// Time of the first saturation alert, hours.
    pub first_alert_h: Option<f64>,
    /// The last step.
    pub last: Option<Step>,
    since_restart: Vec<(f64, f64)>,
    /// Readings kept for a plot (empty unless asked for).
    pub trace: Thinned<TracePoint>,
    /// The monitor's phases as (start, end, name), for a plot.
    pub phase_spans: Vec<(f64, f64, &'static str)>,
    /// Time of the last restart (dilution), hours.
    pub last_restart_h: Option<f64>,
    keep_trace: bool,
    csv: Vec<u8>,
    row_ends: Vec<usize>,
    /// The batch fit, once the log is read.
    pub batch: Option<BatchResult>,
}

impl Series {
    fn new(
        name: &str,
        config: EstimatorConfig<f32>,
        monitor: MonitorConfig<f32>,
        keep_trace: bool,
    ) -> Self {
        Self {
            name: name.to_owned(),
            watch: Watch::new(config, monitor),
            ceiling: f64::from(config.ceiling_value()),
            readings: 0,
            rejected: 0,
            restarts: 0,
            saturated_cells: 0,
            blank_readings: 0,
            blank_until_h: None,
            measured_blank: None,
            rejections: BTreeMap::new(),
            faults: BTreeMap::new(),
            alerts: Vec::new(),
            phases: Vec::new(),
            first_alert_h: None,
            last: None,
            since_restart: Vec::new(),
            trace: Thinned::default(),
            phase_spans: Vec::new(),
            last_restart_h: None,
            keep_trace,
            csv: Vec::new(),
            row_ends: Vec::new(),
            batch: None,
        }
    }

    /// Feeds one row's cell `k`; writes its CSV row when `csv` is set.
    fn feed(&mut self, row: &LogRow, k: usize, csv: bool, series_column: bool, blank: f64) {
        if self.blank_until_h.is_some_and(|h| row.time_h < h) {
            self.feed_blank(row, k, csv, series_column);
            return;
        }
        let blank = self.measured_blank.unwrap_or(blank);
        let (raw, value) = match row.cells[k] {
            Cell::Saturated => {
                self.saturated_cells += 1;
                (self.ceiling, self.ceiling)
            }
            Cell::Value(v) => {
                let b = row.blank.unwrap_or(0.0);
                (v, if v >= self.ceiling { v } else { v - b })
            }
        };
        let step = online::step(&mut self.watch, row.time_h, value);
        self.readings += 1;
        if !step.outcome.is_accepted() {
            self.rejected += 1;
        }
        match step.outcome {
            Outcome::Restarted => {
                self.restarts += 1;
                self.last_restart_h = Some(step.time_h);
                self.since_restart.clear();
            }
            Outcome::Rejected(r) => {
                *self.rejections.entry(r.as_str()).or_insert(0) += 1;
            }
            _ => {}
        }
        if step.time_h.is_finite() && step.value.is_finite() && step.value >= 0.0 {
            self.since_restart.push((step.time_h, step.value - blank));
        }
        for te in &step.events {
            match te.event {
                Event::SaturationAlert { .. } => {
                    if self.first_alert_h.is_none() {
                        self.first_alert_h = Some(step.time_h);
                    }
                    self.alerts.push(*te);
                }
                Event::SaturationRearmed => self.alerts.push(*te),
                Event::Phase { .. } => self.phases.push(*te),
                Event::Fault { fault, .. } => {
                    *self.faults.entry(fault.as_str()).or_insert(0) += 1;
                }
                _ => {}
            }
        }
        if self.keep_trace && step.time_h.is_finite() {
            let e = step.estimate.as_ref();
            self.trace.push(TracePoint {
                time_h: step.time_h,
                value: step.value,
                rejected: !step.outcome.is_accepted(),
                capacity: e.and_then(|e| e.capacity).map(|c| (c.value, c.sd)),
                rate: e.map(|e| (e.rate_per_h.value, e.rate_per_h.sd)),
            });
            let name = step.phase.as_str();
            match self.phase_spans.last_mut() {
                Some(last) if last.2 == name => last.1 = step.time_h,
                Some(last) => {
                    last.1 = step.time_h;
                    self.phase_spans.push((step.time_h, step.time_h, name));
                }
                None => self.phase_spans.push((step.time_h, step.time_h, name)),
            }
        }
        if csv {
            if series_column {
                self.csv.extend_from_slice(self.name.as_bytes());
                self.csv.push(b',');
            }
            write_csv_row(&mut self.csv, row.line, &step, raw);
            self.row_ends.push(self.csv.len());
        }
        self.last = Some(step);
    }

    /// A reading of the blank phase: the medium before inoculation, given
    /// to the estimator as a blank reading (a saturated cell or a value it
    /// refuses is counted as a rejected reading).
    fn feed_blank(&mut self, row: &LogRow, k: usize, csv: bool, series_column: bool) {
        self.readings += 1;
        let raw = match row.cells[k] {
            Cell::Saturated => self.ceiling,
            Cell::Value(v) => v,
        };
        #[allow(clippy::cast_possible_truncation)] // the device holds f32
        let taken = match row.cells[k] {
            Cell::Value(v) if v < self.ceiling => self.watch.blank_reading(v as f32).ok(),
            _ => None,
        };
        let status = match taken {
            Some(b) => {
                self.blank_readings += 1;
                self.measured_blank = Some(f64::from(b.value));
                "blank_reading"
            }
            None => {
                self.rejected += 1;
                *self.rejections.entry("blank_reading_refused").or_insert(0) += 1;
                "blank_reading_refused"
            }
        };
        if csv {
            if series_column {
                self.csv.extend_from_slice(self.name.as_bytes());
                self.csv.push(b',');
            }
            let mut cells = vec![String::new(); COLUMNS.len()];
            cells[0] = row.line.to_string();
            cells[1] = row.time_h.to_string();
            cells[2] = raw.to_string();
            cells[3] = status.to_owned();
            if let Some(b) = taken {
                let n = COLUMNS.len();
                cells[n - 3] = b.value.to_string();
                cells[n - 2] = b.sd.to_string();
                cells[n - 1] = "measured".to_owned();
            }
            let _ = writeln!(self.csv, "{}", cells.join(","));
            self.row_ends.push(self.csv.len());
        }
    }

    /// The estimate after the last reading.
    #[must_use]
    pub fn last_estimate(&self) -> Option<Estimate<f32>> {
        self.last.as_ref().and_then(|s| s.estimate)
    }

    /// Fits the batch logistic to the readings since the last restart and
    /// frees them.
    fn finish(&mut self) {
        let points = std::mem::take(&mut self.since_restart);
        let (t, y): (Vec<f64>, Vec<f64>) = points.into_iter().unzip();
        self.batch = Some(match fit_logistic_trimmed(&t, &y, None, 4.0) {
            Ok((fit, rejected)) => BatchResult {
                used: rejected.iter().filter(|r| !**r).count(),
                fit: Ok(fit),
            },
            Err(e) => BatchResult {
                fit: Err(e.to_string()),
                used: 0,
            },
        });
    }
}

fn cell(x: Option<f32>) -> String {
    x.filter(|v| v.is_finite())
        .map_or_else(String::new, |v| v.to_string())
}

fn alert_word(step: &Step) -> &'static str {
    let mut word = "";
    for e in &step.events {
        match e.event {
            Event::SaturationAlert { .. } => word = "saturation_alert",
            Event::SaturationRearmed => word = "saturation_rearmed",
            _ => {}
        }
    }
    word
}

/// One per-reading CSV row (the [`COLUMNS`]), `od` as written.
fn write_csv_row(out: &mut Vec<u8>, line: u64, step: &Step, od: f64) {
    let e = step.estimate.as_ref();
    let cap = e.and_then(|e| e.capacity);
    let cells = [
        line.to_string(),
        step.time_h.to_string(),
        od.to_string(),
        online::status(step.outcome).to_owned(),
        cell(cap.map(|c| c.value)),
        cell(cap.map(|c| c.sd)),
        cell(e.map(|e| e.rate_per_h.value)),
        cell(e.map(|e| e.rate_per_h.sd)),
        cell(e.map(|e| e.doubling_time_h.value)),
        cell(e.and_then(|e| e.lag_h).map(|m| m.value)),
        cell(e.and_then(|e| e.inflection_time_h).map(|m| m.value)),
        step.phase.as_str().to_owned(),
        cell(step.saturation_eta_h.map(|m| m.value)),
        cell(step.saturation_eta_h.map(|m| m.sd)),
        alert_word(step).to_owned(),
        step.alert_active.to_string(),
        step.events
            .iter()
            .map(|e| online::event_name(&e.event))
            .collect::<Vec<_>>()
            .join(";"),
        cell(e.and_then(|e| e.shape).map(|m| m.value)),
        cell(e.and_then(|e| e.shape).map(|m| m.sd)),
        cell(e.map(|e| e.blank_measured().value)),
        cell(e.map(|e| e.blank_measured().sd)),
        e.map_or("", |e| e.blank_source().as_str()).to_owned(),
    ];
    let _ = writeln!(out, "{}", cells.join(","));
}

fn num(x: Option<f32>) -> Json {
    x.filter(|v| v.is_finite())
        .map_or(Json::Null, |v| json!(f64::from(v)))
}

fn num64(x: f64) -> Json {
    if x.is_finite() { json!(x) } else { Json::Null }
}

/// A replayed log: every series, and what the reader saw.
pub struct Replay {
    /// The series, in the order of the value columns.
    pub series: Vec<Series>,
    /// Rows read (each fed to every series).
    pub rows: u64,
    /// Lines skipped as unparseable.
    pub skipped_lines: Vec<u64>,
    /// The first skipped lines with their reasons (at most
    /// [`SKIPPED_SHOWN`]).
    pub skipped: Vec<BadRow>,
    /// What the reader inferred, one sentence each.
    pub notes: Vec<String>,
    /// The log's file name, for titles.
    pub source: String,
    /// Options used.
    pub options: ReplayOptions,
}

/// Checks the options and builds the estimator and monitor configurations.
fn configs(options: &ReplayOptions) -> Result<(EstimatorConfig<f32>, MonitorConfig<f32>)> {
    ensure!(
        options.alert_fraction > 0.0 && options.alert_fraction < 1.0,
        "--alert-fraction must lie strictly between 0 and 1, got {}",
        options.alert_fraction
    );
    ensure!(
        options.alert_lead_h.is_finite() && options.alert_lead_h >= 0.0,
        "--alert-lead-h must be finite and at least 0, got {}",
        options.alert_lead_h
    );
    let log = &options.log;
    ensure!(
        log.all_value_cols || !log.value_cols.is_empty(),
        "no value column given"
    );
    let mut names: Vec<&str> = log
        .value_cols
        .iter()
        .chain(&log.blank_cols)
        .map(|s| s.trim())
        .collect();
    names.push(log.time_col.trim());
    names.sort_unstable();
    if let Some(w) = names.windows(2).find(|w| w[0] == w[1]) {
        bail!(
            "column {:?} is given twice (as time, value or blank column)",
            w[0]
        );
    }
    let mut config = options.settings.config()?;
    if !log.blank_cols.is_empty() {
        // The blank wells' mean is subtracted before the estimator sees the
        // readings: the blank is measured, so the estimator's is a known 0.
        config = config
            .blank(0.0)
            .map_err(|e| anyhow::anyhow!("blank: {e}"))?;
    }
    if let Some(h) = options.blank_until_h {
        ensure!(
            h.is_finite(),
            "--blank-until must be a finite time in hours, got {h}"
        );
        ensure!(
            log.blank_cols.is_empty() && options.settings.blank_od.is_none(),
            "give the blank one way: --blank, --blank-col or --blank-until"
        );
    }
    if !log.blank_cols.is_empty() && options.settings.blank_od.is_some() {
        bail!(
            "give the blank either as a number (--blank) or as blank columns (--blank-col), not both"
        );
    }
    if !log.saturated_markers.is_empty() && !config.ceiling_value().is_finite() {
        bail!(
            "--saturated-marker needs the detector's ceiling (--ceiling, OD units): a marked cell is a reading at the ceiling"
        );
    }
    let monitor = online::monitor_config(options.alert_fraction, options.alert_lead_h)?;
    Ok((config, monitor))
}

/// Replays a log from `reader`, writing the per-reading CSV to `csv` when
/// given and keeping plot traces when `plot` is set.
///
/// # Errors
///
/// Bad options, a log that cannot be read, rows that cannot be parsed
/// (unless skipping; the message names their lines), `--skip-bad-rows` that
/// leaves no row, or the CSV cannot be written.
pub fn replay<R: BufRead>(
    mut reader: LogReader<R>,
    options: &ReplayOptions,
    mut csv: Option<&mut dyn Write>,
    plot: bool,
) -> Result<Replay> {
    let (config, monitor) = configs(options)?;
    let columns = reader.value_cols().to_vec();
    ensure!(
        !columns.is_empty(),
        "the header has no value column besides the time and blank columns"
    );
    let several = columns.len() > 1;
    let blank = f64::from(config.blank_value());
    let mut series: Vec<Series> = columns
        .iter()
        .map(|name| {
            let mut s = Series::new(name.trim(), config, monitor, plot);
            s.blank_until_h = options.blank_until_h;
            s
        })
        .collect();
    if let Some(out) = csv.as_mut() {
        let mut header = String::new();
        if several {
            header.push_str("series,");
        }
        header.push_str(&COLUMNS.join(","));
        header.push('\n');
        out.write_all(header.as_bytes())?;
    }
    let want_csv = csv.is_some();
    let mut rows = 0_u64;
    let mut skipped_lines = Vec::new();
    let mut skipped = Vec::new();
    let mut chunk: Vec<LogRow> = Vec::with_capacity(CHUNK_ROWS);
    let mut done = false;
    while !done {
        chunk.clear();
        while chunk.len() < CHUNK_ROWS {
            match reader.next_row()? {
                None => {
                    done = true;
                    break;
                }
                Some(Ok(row)) => chunk.push(row),
                Some(Err(bad)) => {
                    skipped_lines.push(bad.line);
                    if skipped.len() < SKIPPED_SHOWN {
                        skipped.push(bad);
                    }
                }
            }
        }
        // A strict run that met a bad row only reads on to name the others.
        if !options.log.skip_bad_rows && !skipped_lines.is_empty() {
            continue;
        }
        rows += chunk.len() as u64;
        let feed = |(k, s): (usize, &mut Series)| {
            s.csv.clear();
            s.row_ends.clear();
            for row in &chunk {
                s.feed(row, k, want_csv, several, blank);
            }
        };
        if several {
            series.par_iter_mut().enumerate().for_each(feed);
        } else {
            series.iter_mut().enumerate().for_each(feed);
        }
        if let Some(out) = csv.as_mut() {
            let mut starts = vec![0; series.len()];
            for j in 0..chunk.len() {
                for (s, start) in series.iter().zip(starts.iter_mut()) {
                    let end = s.row_ends[j];
                    out.write_all(&s.csv[*start..end])?;
                    *start = end;
                }
            }
        }
    }
    let notes = reader.notes();
    if !skipped_lines.is_empty() && !options.log.skip_bad_rows {
        return Err(LogError::ManyBadRows {
            total: skipped_lines.len() as u64,
            first: skipped,
        }
        .into());
    }
    if options.log.skip_bad_rows && rows == 0 && !skipped_lines.is_empty() {
        bail!(
            "{}; with --skip-bad-rows nothing usable is left",
            LogError::ManyBadRows {
                total: skipped_lines.len() as u64,
                first: skipped,
            }
        );
    }
    series.par_iter_mut().for_each(Series::finish);
    Ok(Replay {
        series,
        rows,
        skipped_lines,
        skipped,
        notes,
        source: String::new(),
        options: options.clone(),
    })
}

/// The JSON summary of one series: the final online estimate (null where
/// unknown), the monitor's phase and alerts, and the batch fit.
#[must_use]
pub fn series_summary(replay: &Replay, s: &Series) -> Json {
    serde_json::to_value(SeriesDoc(replay, s)).unwrap_or(Json::Null)
}

/// The one-series summary's keys but `alerts` and `phases`, which
/// [`SeriesDoc`] writes one element at a time.
fn series_base(replay: &Replay, s: &Series) -> serde_json::Map<String, Json> {
    let e = s.last_estimate();
    let e = e.as_ref();
    let last = s.last.as_ref();
    let cap = e.and_then(|e| e.capacity);
    let batch = match s.batch.as_ref().map(|b| (&b.fit, b.used)) {
        Some((Ok(f), used)) => json!({
            "method": "unweighted least squares of the logistic, readings beyond 4 robust sd set aside, since the last restart",
            "readings_used": used,
            "capacity": num64(f.capacity),
            "capacity_sd": num64(f.capacity_sd),
            "rate_per_h": num64(f.rate_per_h),
            "rate_sd": num64(f.rate_sd_per_h),
            "inflection_time_h": num64(f.midpoint_h),
            "inflection_time_sd_h": num64(f.midpoint_sd_h),
            "lag_h": num64(f.midpoint_h - 2.0 / f.rate_per_h),
            "doubling_time_h": num64(std::f64::consts::LN_2 / f.rate_per_h),
            "residual_sd": num64(f.residual_sd),
            "error": Json::Null,
        }),
        Some((Err(msg), _)) => json!({ "error": msg }),
        None => json!({ "error": "not fitted" }),
    };
    let counts = |m: &BTreeMap<&'static str, u64>| -> Json {
        Json::Object(m.iter().map(|(k, v)| ((*k).to_owned(), json!(v))).collect())
    };
    let object = json!({
        "readings": s.readings,
        "rejected": s.rejected,
        "restarts": s.restarts,
        "rejections": counts(&s.rejections),
        "skipped_lines": replay.skipped_lines,
        "capacity": num(cap.map(|c| c.value)),
        "capacity_sd": num(cap.map(|c| c.sd)),
        "rate_per_h": num(e.map(|e| e.rate_per_h.value)),
        "rate_sd": num(e.map(|e| e.rate_per_h.sd)),
        "lag_h": num(e.and_then(|e| e.lag_h).map(|m| m.value)),
        "lag_sd_h": num(e.and_then(|e| e.lag_h).map(|m| m.sd)),
        "doubling_time_h": num(e.map(|e| e.doubling_time_h.value)),
        "doubling_time_sd_h": num(e.map(|e| e.doubling_time_h.sd)),
        "inflection_time_h": num(e.and_then(|e| e.inflection_time_h).map(|m| m.value)),
        "inflection_time_sd_h": num(e.and_then(|e| e.inflection_time_h).map(|m| m.sd)),
        "saturation_eta_h": num(last.and_then(|s| s.saturation_eta_h).map(|m| m.value)),
        "saturation_eta_sd_h": num(last.and_then(|s| s.saturation_eta_h).map(|m| m.sd)),
        "noise_scale": num(e.map(|e| e.noise_scale)),
        "noise_floor_od": num(e.map(|e| e.noise_floor)),
        "noise_fraction": num(e.map(|e| e.noise_fraction)),
        "family": e.map_or(Json::Null, |e| json!(e.family())),
        "shape": num(e.and_then(|e| e.shape).map(|m| m.value)),
        "shape_sd": num(e.and_then(|e| e.shape).map(|m| m.sd)),
        "blank": num(e.map(|e| e.blank_measured().value)),
        "blank_sd": num(e.map(|e| e.blank_measured().sd)),
        "blank_source": e.map_or(Json::Null, |e| json!(e.blank_source().as_str())),
        "blank_readings": s.blank_readings,
        "alert_fraction": replay.options.alert_fraction,
        "alert_lead_h": replay.options.alert_lead_h,
        "phase": last.map_or(Json::Null, |s| json!(s.phase.as_str())),
        "alert_active": last.is_some_and(|s| s.alert_active),
        "first_saturation_alert_h": s
            .alerts
            .iter()
            .find(|te| matches!(te.event, Event::SaturationAlert { .. }))
            .map_or(Json::Null, |te| num(Some(te.time_h))),
        "faults": counts(&s.faults),
        "batch_fit": batch,
    });
    let Json::Object(mut map) = object else {
        unreachable!("json!({{..}}) is an object")
    };
    if !replay.options.log.saturated_markers.is_empty() {
        map.insert("saturated_cells".into(), json!(s.saturated_cells));
    }
    if !replay.options.log.blank_cols.is_empty() {
        map.insert("blank_cols".into(), json!(replay.options.log.blank_cols));
    }
    map
}

/// The alerts or the phase changes of a series, written as JSON one element
/// at a time (a long log has hundreds of thousands).
struct EventList<'a>(&'a [TimedEvent<f32>]);

impl serde::Serialize for EventList<'_> {
    fn serialize<S: serde::Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        serializer.collect_seq(self.0.iter().filter_map(|te| {
            let time_h = num(Some(te.time_h));
            match te.event {
                Event::SaturationAlert { eta_h, capacity } => Some(json!({
                    "kind": "saturation_alert",
                    "time_h": time_h,
                    "eta_h": num(Some(eta_h)),
                    "capacity": num(Some(capacity)),
                })),
                Event::SaturationRearmed => Some(json!({
                    "kind": "saturation_rearmed",
                    "time_h": time_h,
                })),
                Event::Phase { from, to } => Some(json!({
                    "time_h": time_h,
                    "from": from.as_str(),
                    "to": to.as_str(),
                })),
                _ => None,
            }
        }))
    }
}

/// One series' summary object, keys in sorted order as `serde_json` writes
/// them.
struct SeriesDoc<'a>(&'a Replay, &'a Series);

impl serde::Serialize for SeriesDoc<'_> {
    fn serialize<S: serde::Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        use serde::ser::SerializeMap;
        let base = series_base(self.0, self.1);
        let mut keys: Vec<&str> = base.keys().map(String::as_str).collect();
        keys.extend(["alerts", "phases"]);
        keys.sort_unstable();
        let mut map = serializer.serialize_map(Some(keys.len()))?;
        for key in keys {
            match key {
                "alerts" => map.serialize_entry(key, &EventList(&self.1.alerts))?,
                "phases" => map.serialize_entry(key, &EventList(&self.1.phases))?,
                _ => map.serialize_entry(key, &base[key])?,
            }
        }
        map.end()
    }
}

/// The whole summary (see [`summary`]), written without building it first.
struct SummaryDoc<'a>(&'a Replay);

impl serde::Serialize for SummaryDoc<'_> {
    fn serialize<S: serde::Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        use serde::ser::SerializeMap;
        let replay = self.0;
        if let [only] = &replay.series[..] {
            return SeriesDoc(replay, only).serialize(serializer);
        }
        let mut base = json!({
            "readings": replay.rows,
            "skipped_lines": replay.skipped_lines,
            "alert_fraction": replay.options.alert_fraction,
            "alert_lead_h": replay.options.alert_lead_h,
            "series_order": replay.series.iter().map(|s| s.name.clone()).collect::<Vec<_>>(),
        });
        if let Some(map) = base.as_object_mut()
            && !replay.options.log.blank_cols.is_empty()
        {
            map.insert("blank_cols".into(), json!(replay.options.log.blank_cols));
        }
        let base = base.as_object().cloned().unwrap_or_default();
        let mut keys: Vec<&str> = base.keys().map(String::as_str).collect();
        keys.push("series");
        keys.sort_unstable();
        let mut map = serializer.serialize_map(Some(keys.len()))?;
        for key in keys {
            if key == "series" {
                let mut named: Vec<&Series> = replay.series.iter().collect();
                named.sort_by(|a, b| a.name.cmp(&b.name));
                let docs: Vec<(&str, SeriesDoc<'_>)> = named
                    .into_iter()
                    .map(|s| (s.name.as_str(), SeriesDoc(replay, s)))
                    .collect();
                map.serialize_entry(key, &SeriesMap(docs))?;
            } else {
                map.serialize_entry(key, &base[key])?;
            }
        }
        map.end()
    }
}

struct SeriesMap<'a>(Vec<(&'a str, SeriesDoc<'a>)>);

impl serde::Serialize for SeriesMap<'_> {
    fn serialize<S: serde::Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        serializer.collect_map(self.0.iter().map(|(k, v)| (k, v)))
    }
}

/// Writes the JSON summary (pretty, with a final newline) to `out`, one
/// alert or phase change at a time.
///
/// # Errors
///
/// The writer fails.
pub fn write_summary(replay: &Replay, out: &mut dyn Write) -> Result<()> {
    let mut out = std::io::BufWriter::new(out);
    serde_json::to_writer_pretty(&mut out, &SummaryDoc(replay))?;
    out.write_all(b"\n")?;
    out.flush()?;
    Ok(())
}

/// The JSON summary: the one-series object for one value column, else the
/// file-level keys and `"series": {column: <one-series object>}`.
#[must_use]
pub fn summary(replay: &Replay) -> Json {
    serde_json::to_value(SummaryDoc(replay)).unwrap_or(Json::Null)
}

/// Where a replay reads and writes (`-` is standard input / output).
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct Paths {
    /// The log.
    pub input: PathBuf,
    /// Per-reading CSV.
    pub out: Option<PathBuf>,
    /// JSON summary.
    pub summary: Option<PathBuf>,
    /// SVG plot.
    pub plot: Option<PathBuf>,
}

/// Reads `paths.input`, replays it and writes the outputs asked for. Every
/// output is staged and put in place only when all succeeded
/// ([`Outputs`]): an error leaves no output behind.
///
/// # Errors
///
/// An output that is the input or another output, the log cannot be read or
/// has unparseable rows (the message names their lines), bad settings, or an
/// output cannot be written.
pub fn run_files(paths: &Paths, options: &ReplayOptions, plot: &PlotStyle) -> Result<Replay> {
    configs(options)?;
    let mut outputs = Outputs::new(Some(&paths.input));
    let out = paths
        .out
        .as_deref()
        .map(|p| outputs.stage("--out", p))
        .transpose()?;
    let summary_index = paths
        .summary
        .as_deref()
        .map(|p| outputs.stage("--summary", p))
        .transpose()?;
    let plot_index = paths
        .plot
        .as_deref()
        .map(|p| outputs.stage("--plot", p))
        .transpose()?;
    let input = paths.input.as_path();
    let reader = open_log(input, &options.log)
        .with_context(|| format!("cannot replay {}", input.display()))?;
    let result = {
        let mut writer = out.map(|i| std::io::BufWriter::with_capacity(1 << 16, outputs.file(i)));
        let result = replay(
            reader,
            options,
            writer.as_mut().map(|w| w as &mut dyn Write),
            plot_index.is_some(),
        )
        .with_context(|| format!("cannot replay {}", input.display()))?;
        let mut result = result;
        result.source = if input.as_os_str() == "-" {
            "standard input".to_owned()
        } else {
            input.file_name().map_or_else(
                || input.display().to_string(),
                |n| n.to_string_lossy().into_owned(),
            )
        };
        if let Some(mut w) = writer {
            w.flush().context("cannot write the per-reading CSV")?;
        }
        result
    };
    if let Some(i) = summary_index {
        write_summary(&result, outputs.file(i)).context("cannot write the summary")?;
    }
    if let Some(i) = plot_index {
        let svg = crate::plot::replay_svg(&result, plot)?;
        outputs.file(i).write_all(svg.as_bytes())?;
    }
    outputs.commit()?;
    Ok(result)
}

/// How to draw a replay.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct PlotStyle {
    /// Readings on a logarithmic axis.
    pub log_scale: bool,
}

fn pm(m: Option<(f32, f32)>, digits: usize) -> String {
    match m {
        Some((v, sd)) if v.is_finite() && sd.is_finite() => format!("{v:.digits$} ± {sd:.digits$}"),
        Some((v, _)) if v.is_finite() => format!("{v:.digits$}"),
        _ => "—".to_owned(),
    }
}

/// The per-series table: capacity, μmax, doubling time, lag, phase and
/// first alert time, with sds and units.
#[must_use]
pub fn table(replay: &Replay) -> String {
    let header = [
        "series",
        "readings",
        "rejected",
        "capacity (OD)",
        "μmax (per h)",
        "doubling (h)",
        "lag (h)",
        "phase",
        "alert (h)",
    ];
    let mut rows: Vec<Vec<String>> = vec![header.iter().map(|h| (*h).to_owned()).collect()];
    for s in &replay.series {
        let e = s.last_estimate();
        let e = e.as_ref();
        rows.push(vec![
            s.name.clone(),
            s.readings.to_string(),
            s.rejected.to_string(),
            pm(e.and_then(|e| e.capacity).map(|c| (c.value, c.sd)), 3),
            pm(e.map(|e| (e.rate_per_h.value, e.rate_per_h.sd)), 3),
            pm(
                e.map(|e| (e.doubling_time_h.value, e.doubling_time_h.sd)),
                2,
            ),
            pm(e.and_then(|e| e.lag_h).map(|m| (m.value, m.sd)), 2),
            s.last
                .as_ref()
                .map_or("—", |st| st.phase.as_str())
                .to_owned(),
            s.first_alert_h
                .map_or_else(|| "—".to_owned(), |t| format!("{t:.2}")),
        ]);
    }
    let widths: Vec<usize> = (0..header.len())
        .map(|c| rows.iter().map(|r| r[c].chars().count()).max().unwrap_or(0))
        .collect();
    let mut out = String::new();
    for r in &rows {
        let cells: Vec<String> = r
            .iter()
            .zip(&widths)
            .map(|(c, w)| format!("{c}{}", " ".repeat(w - c.chars().count())))
            .collect();
        let _ = writeln!(out, "{}", cells.join("  ").trim_end());
    }
    out
}

/// A short text report for the terminal: counts, then for one series the
/// online and batch estimates, then the per-series table.
#[must_use]
pub fn describe(replay: &Replay) -> String {
    let mut s = String::new();
    if let [only] = &replay.series[..] {
        let _ = writeln!(
            s,
            "{} readings, {} rejected, {} restart(s), {} unparseable line(s) skipped",
            only.readings,
            only.rejected,
            only.restarts,
            replay.skipped_lines.len()
        );
        match only.last_estimate() {
            Some(e) => {
                let _ = writeln!(
                    s,
                    "online: rate {:.4} ± {:.4} per h, capacity {}",
                    e.rate_per_h.value,
                    e.rate_per_h.sd,
                    e.capacity.map_or_else(
                        || "not yet placed".to_owned(),
                        |c| format!("{:.4} ± {:.4} OD", c.value, c.sd)
                    )
                );
            }
            None => s.push_str("online: no estimate (not enough growth seen)\n"),
        }
        match only.batch.as_ref().map(|b| &b.fit) {
            Some(Ok(f)) => {
                let _ = writeln!(
                    s,
                    "batch:  rate {:.4} ± {:.4} per h, capacity {:.4} ± {:.4} OD",
                    f.rate_per_h, f.rate_sd_per_h, f.capacity, f.capacity_sd
                );
            }
            Some(Err(e)) => {
                let _ = writeln!(s, "batch:  no fit ({e})");
            }
            None => {}
        }
    } else {
        let _ = writeln!(
            s,
            "{} rows, {} series, {} unparseable line(s) skipped",
            replay.rows,
            replay.series.len(),
            replay.skipped_lines.len()
        );
    }
    s.push_str(&table(replay));
    s
}
