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
//! saturation_eta_sd_h, alert, alert_active, events`
//!
//! * `status`: `accepted`, `restarted` or the rejection reason.
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

use std::fmt::Write as _;
use std::path::Path;

use anyhow::{Context, Result, ensure};
use plateau::{Estimate, EstimatorConfig, Event, Outcome};
use serde_json::{Value as Json, json};

use crate::batch::{LogisticFit, fit_logistic_trimmed};
use crate::log::{Log, LogOptions, read_log_file, write_atomically};
use crate::online::{self, Settings, Step};

/// The header of the per-reading CSV.
pub const COLUMNS: [&str; 17] = [
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
];

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
}

impl Default for ReplayOptions {
    fn default() -> Self {
        Self {
            log: LogOptions::default(),
            settings: Settings::default(),
            alert_fraction: 0.9,
            alert_lead_h: 1.0,
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

/// A replayed log.
#[derive(Clone, Debug)]
pub struct Replay {
    /// Line in the log of each step.
    pub lines: Vec<u64>,
    /// The estimator's steps, one per parsed row.
    pub steps: Vec<Step>,
    /// Lines skipped as unparseable.
    pub skipped_lines: Vec<u64>,
    /// The configuration used.
    pub config: EstimatorConfig<f32>,
    /// Options used.
    pub options: ReplayOptions,
    /// The batch fit of the readings since the last restart.
    pub batch: BatchResult,
}

impl Replay {
    /// The estimate after the last reading.
    #[must_use]
    pub fn last_estimate(&self) -> Option<Estimate<f32>> {
        self.steps.last().and_then(|s| s.estimate)
    }

    /// Readings the estimator rejected.
    #[must_use]
    pub fn rejected(&self) -> usize {
        self.steps
            .iter()
            .filter(|s| !s.outcome.is_accepted())
            .count()
    }

    /// Restarts (dilutions) the estimator detected.
    #[must_use]
    pub fn restarts(&self) -> usize {
        self.steps
            .iter()
            .filter(|s| s.outcome == Outcome::Restarted)
            .count()
    }
}

/// Replays a parsed log.
///
/// # Errors
///
/// Bad settings (the message names the setting) or an alert fraction outside
/// (0, 1) or a negative lead.
pub fn replay(log: &Log, options: &ReplayOptions) -> Result<Replay> {
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
    let config = options.settings.config()?;
    let monitor = online::monitor_config(options.alert_fraction, options.alert_lead_h)?;
    let readings: Vec<(f64, f64)> = log.rows.iter().map(|r| (r.time_h, r.value)).collect();
    let steps = online::run(config, monitor, &readings);
    let batch = batch_of(&steps, f64::from(config.blank_value()));
    Ok(Replay {
        lines: log.rows.iter().map(|r| r.line).collect(),
        steps,
        skipped_lines: log.skipped.iter().map(|b| b.line).collect(),
        config,
        options: options.clone(),
        batch,
    })
}

/// The analyst's fit: unweighted least squares of the logistic on the
/// finite, non-negative readings since the estimator's last restart (blank
/// subtracted), setting aside readings beyond 4 robust sds.
fn batch_of(steps: &[Step], blank: f64) -> BatchResult {
    let from = steps
        .iter()
        .rposition(|s| s.outcome == Outcome::Restarted)
        .unwrap_or(0);
    let (t, y): (Vec<f64>, Vec<f64>) = steps[from..]
        .iter()
        .filter(|s| s.time_h.is_finite() && s.value.is_finite() && s.value >= 0.0)
        .map(|s| (s.time_h, s.value - blank))
        .unzip();
    match fit_logistic_trimmed(&t, &y, None, 4.0) {
        Ok((fit, rejected)) => BatchResult {
            used: rejected.iter().filter(|r| !**r).count(),
            fit: Ok(fit),
        },
        Err(e) => BatchResult {
            fit: Err(e.to_string()),
            used: 0,
        },
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

/// Writes the per-reading CSV.
///
/// # Errors
///
/// The writer fails.
pub fn write_csv(replay: &Replay, out: &mut dyn std::io::Write) -> Result<()> {
    let mut text = COLUMNS.join(",");
    text.push('\n');
    for (step, line) in replay.steps.iter().zip(&replay.lines) {
        let e = step.estimate.as_ref();
        let cap = e.and_then(|e| e.capacity);
        let cells = [
            line.to_string(),
            step.time_h.to_string(),
            step.value.to_string(),
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
        ];
        let _ = writeln!(text, "{}", cells.join(","));
    }
    out.write_all(text.as_bytes())?;
    Ok(())
}

fn num(x: Option<f32>) -> Json {
    x.filter(|v| v.is_finite())
        .map_or(Json::Null, |v| json!(f64::from(v)))
}

fn num64(x: f64) -> Json {
    if x.is_finite() { json!(x) } else { Json::Null }
}

/// The JSON summary: the final online estimate (null where unknown), the
/// monitor's phase and alerts, and the batch fit of the same log.
#[must_use]
pub fn summary(replay: &Replay) -> Json {
    let e = replay.last_estimate();
    let e = e.as_ref();
    let last = replay.steps.last();
    let cap = e.and_then(|e| e.capacity);
    let mut alerts = Vec::new();
    let mut phases = Vec::new();
    let mut faults = serde_json::Map::new();
    for step in &replay.steps {
        for te in &step.events {
            let time_h = num(Some(te.time_h));
            match te.event {
                Event::SaturationAlert { eta_h, capacity } => alerts.push(json!({
                    "kind": "saturation_alert",
                    "time_h": time_h,
                    "eta_h": num(Some(eta_h)),
                    "capacity": num(Some(capacity)),
                })),
                Event::SaturationRearmed => alerts.push(json!({
                    "kind": "saturation_rearmed",
                    "time_h": time_h,
                })),
                Event::Phase { from, to } => phases.push(json!({
                    "time_h": time_h,
                    "from": from.as_str(),
                    "to": to.as_str(),
                })),
                Event::Fault { fault, .. } => {
                    let n = faults
                        .get(fault.as_str())
                        .and_then(Json::as_u64)
                        .unwrap_or(0);
                    faults.insert(fault.as_str().to_owned(), json!(n + 1));
                }
                _ => {}
            }
        }
    }
    let batch = match &replay.batch.fit {
        Ok(f) => json!({
            "method": "unweighted least squares of the logistic, readings beyond 4 robust sd set aside, since the last restart",
            "readings_used": replay.batch.used,
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
        Err(msg) => json!({ "error": msg }),
    };
    json!({
        "readings": replay.steps.len(),
        "rejected": replay.rejected(),
        "restarts": replay.restarts(),
        "rejections": rejection_counts(replay),
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
        "alert_fraction": replay.options.alert_fraction,
        "alert_lead_h": replay.options.alert_lead_h,
        "phase": last.map_or(Json::Null, |s| json!(s.phase.as_str())),
        "alert_active": last.is_some_and(|s| s.alert_active),
        "first_saturation_alert_h": alerts
            .iter()
            .find(|a| a["kind"] == "saturation_alert")
            .map_or(Json::Null, |a| a["time_h"].clone()),
        "alerts": alerts,
        "phases": phases,
        "faults": faults,
        "batch_fit": batch,
    })
}

fn rejection_counts(replay: &Replay) -> Json {
    let mut counts = serde_json::Map::new();
    for s in &replay.steps {
        if let Outcome::Rejected(r) = s.outcome {
            let n = counts.get(r.as_str()).and_then(Json::as_u64).unwrap_or(0);
            counts.insert(r.as_str().to_owned(), json!(n + 1));
        }
    }
    Json::Object(counts)
}

/// Reads `input`, replays it and writes the outputs asked for. Both outputs
/// are prepared in memory first and each is written atomically, so an error
/// in the log leaves no file behind.
///
/// # Errors
///
/// The log cannot be read or has unparseable rows (the message names their
/// lines), bad settings, or an output cannot be written.
pub fn run_files(
    input: &Path,
    out: Option<&Path>,
    summary_path: Option<&Path>,
    options: &ReplayOptions,
) -> Result<Replay> {
    let log = read_log_file(input, &options.log)
        .with_context(|| format!("cannot replay {}", input.display()))?;
    let replay = replay(&log, options)?;
    let mut csv = Vec::new();
    write_csv(&replay, &mut csv)?;
    let json = serde_json::to_string_pretty(&summary(&replay))? + "\n";
    if let Some(out) = out {
        write_atomically(out, |w| Ok(w.write_all(&csv)?))?;
    }
    if let Some(path) = summary_path {
        write_atomically(path, |w| Ok(w.write_all(json.as_bytes())?))?;
    }
    Ok(replay)
}

/// A short text report for the terminal.
#[must_use]
pub fn describe(replay: &Replay) -> String {
    let mut s = format!(
        "{} readings, {} rejected, {} restart(s), {} unparseable line(s) skipped\n",
        replay.steps.len(),
        replay.rejected(),
        replay.restarts(),
        replay.skipped_lines.len()
    );
    match replay.last_estimate() {
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
    match &replay.batch.fit {
        Ok(f) => {
            let _ = writeln!(
                s,
                "batch:  rate {:.4} ± {:.4} per h, capacity {:.4} ± {:.4} OD",
                f.rate_per_h, f.rate_sd_per_h, f.capacity, f.capacity_sd
            );
        }
        Err(e) => {
            let _ = writeln!(s, "batch:  no fit ({e})");
        }
    }
    s
}
