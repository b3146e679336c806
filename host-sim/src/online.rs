//! The online estimator on the host: the device's `f32` estimator and
//! culture monitor (the [`Watch`] facade) fed reading by reading, exactly as
//! the firmware feeds them, with the estimator's settings taken from flags or
//! a TOML file.
//!
//! Readings arrive here as `f64` (as read from a log or generated) and are
//! narrowed to `f32` before they reach the estimator, as the device holds
//! them.
//!
//! # Settings file
//!
//! ```toml
//! # every key optional; the estimator's defaults apply to the rest
//! noise_floor_od = 0.003   # sd of a reading at zero signal, OD units
//! noise_fraction = 0.01    # extra sd per unit of signal
//! blank_od = 0.04          # medium-only reading subtracted before the fit
//! ceiling_od = 3.5         # readings at or above are saturated
//! gate_sigma = 4.0         # innovation gate, standard deviations
//! ```
//!
//! Units: times in hours, signal in OD units, rates per hour.

use std::path::Path;

use anyhow::{Context, Result, anyhow};
use plateau::{
    Estimate, EstimatorConfig, Event, Measured, MonitorConfig, Outcome, Phase, TimedEvent, Watch,
};
use serde::{Deserialize, Serialize};

/// Estimator settings as a user gives them; `None` keeps the default.
///
/// Units: `noise_floor_od`, `blank_od`, `ceiling_od` in OD units;
/// `noise_fraction` dimensionless; `gate_sigma` in standard deviations.
#[derive(Clone, Copy, Debug, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct Settings {
    /// Noise floor (sd at zero signal), OD units.
    pub noise_floor_od: Option<f64>,
    /// Proportional noise (sd per unit of signal), dimensionless.
    pub noise_fraction: Option<f64>,
    /// Blank subtracted from every reading, OD units.
    pub blank_od: Option<f64>,
    /// Sensor ceiling, OD units.
    pub ceiling_od: Option<f64>,
    /// Innovation gate, standard deviations.
    pub gate_sigma: Option<f64>,
}

impl Settings {
    /// Reads settings from a TOML file (keys as in the module docs).
    ///
    /// # Errors
    ///
    /// The file cannot be read, or a key is unknown or of the wrong type.
    pub fn load(path: &Path) -> Result<Self> {
        let text = std::fs::read_to_string(path)
            .with_context(|| format!("cannot read estimator settings {}", path.display()))?;
        toml::from_str(&text).with_context(|| format!("in estimator settings {}", path.display()))
    }

    /// `self` with every value that `other` sets replaced by `other`'s
    /// (flags over a file).
    #[must_use]
    pub fn overridden_by(self, other: Self) -> Self {
        Self {
            noise_floor_od: other.noise_floor_od.or(self.noise_floor_od),
            noise_fraction: other.noise_fraction.or(self.noise_fraction),
            blank_od: other.blank_od.or(self.blank_od),
            ceiling_od: other.ceiling_od.or(self.ceiling_od),
            gate_sigma: other.gate_sigma.or(self.gate_sigma),
        }
    }

    /// The device configuration (`f32`).
    ///
    /// # Errors
    ///
    /// A value the estimator refuses; the message names the setting.
    #[allow(clippy::cast_possible_truncation)] // the device holds f32
    pub fn config(&self) -> Result<EstimatorConfig<f32>> {
        let named = |key: &'static str| move |e: plateau::Error| anyhow!("{key}: {e}");
        let mut c = EstimatorConfig::<f32>::new();
        if self.noise_floor_od.is_some() || self.noise_fraction.is_some() {
            c = c
                .noise(
                    self.noise_floor_od.unwrap_or(0.003) as f32,
                    self.noise_fraction.unwrap_or(0.01) as f32,
                )
                .map_err(named("noise_floor_od / noise_fraction"))?;
        }
        if let Some(b) = self.blank_od {
            c = c.blank(b as f32).map_err(named("blank_od"))?;
        }
        if let Some(x) = self.ceiling_od {
            c = c.ceiling(x as f32).map_err(named("ceiling_od"))?;
        }
        if let Some(g) = self.gate_sigma {
            c = c.gate_sigma(g as f32).map_err(named("gate_sigma"))?;
        }
        Ok(c)
    }
}

/// What happened at one reading.
///
/// Units: `time_h` hours, `value` OD units (as given, before narrowing).
#[derive(Clone, Debug, PartialEq)]
pub struct Step {
    /// Time of the reading, hours.
    pub time_h: f64,
    /// The reading, OD units.
    pub value: f64,
    /// What the estimator did with it.
    pub outcome: Outcome,
    /// The estimate after the reading (`None` before the first fit).
    pub estimate: Option<Estimate<f32>>,
    /// The monitor's growth phase after the reading.
    pub phase: Phase,
    /// The monitor's forecast time of reaching the alert fraction of the
    /// capacity (hours, caller's clock), while a capacity is published.
    pub saturation_eta_h: Option<Measured<f32>>,
    /// Whether the saturation alert is active (from the alert until it
    /// re-arms).
    pub alert_active: bool,
    /// Events the monitor raised at this reading, in order.
    pub events: Vec<TimedEvent<f32>>,
}

/// A status word for an outcome: `accepted`, `restarted` or the rejection
/// reason ([`plateau::Rejection::as_str`]).
#[must_use]
pub fn status(outcome: Outcome) -> &'static str {
    match outcome {
        Outcome::Accepted => "accepted",
        Outcome::Restarted => "restarted",
        Outcome::Rejected(r) => r.as_str(),
    }
}

/// Narrows a host value to the device's `f32`.
#[must_use]
#[allow(clippy::cast_possible_truncation)]
pub fn to_device(x: f64) -> f32 {
    x as f32
}

/// The monitor configuration for a saturation alert at `fraction` of the
/// capacity, `lead_h` hours ahead (other settings at their defaults).
///
/// # Errors
///
/// `fraction` outside (0, 1) or a negative or non-finite lead.
pub fn monitor_config(fraction: f64, lead_h: f64) -> Result<MonitorConfig<f32>> {
    MonitorConfig::new()
        .saturation_alert(to_device(fraction), to_device(lead_h))
        .map_err(|e| anyhow!("alert fraction / lead: {e}"))
}

/// Feeds `readings` (time in hours, value in OD units) through a fresh `f32`
/// [`Watch`] (estimator and monitor), one by one, and records every step.
#[must_use]
pub fn run(
    config: EstimatorConfig<f32>,
    monitor: MonitorConfig<f32>,
    readings: &[(f64, f64)],
) -> Vec<Step> {
    let mut watch: Watch = Watch::new(config, monitor);
    readings
        .iter()
        .map(|&(time_h, value)| step(&mut watch, time_h, value))
        .collect()
}

/// Feeds one reading (time in hours, value in OD units) to `watch` and
/// records what happened, taking every event it raised.
pub fn step(watch: &mut Watch, time_h: f64, value: f64) -> Step {
    let report = watch.update(to_device(time_h), to_device(value));
    let mut events = Vec::new();
    while let Some(e) = watch.next_event() {
        events.push(e);
    }
    Step {
        time_h,
        value,
        outcome: report.outcome,
        estimate: watch.estimate(),
        phase: report.phase,
        saturation_eta_h: report.saturation_eta_h,
        alert_active: report.alert_active,
        events,
    }
}

/// A short name of an event, for CSV cells and JSON.
#[must_use]
pub fn event_name(event: &Event<f32>) -> String {
    match event {
        Event::Phase { to, .. } => format!("phase_{}", to.as_str()),
        Event::SaturationAlert { .. } => "saturation_alert".into(),
        Event::SaturationRearmed => "saturation_rearmed".into(),
        Event::TargetDue { target, .. } => format!("target_{target}_due"),
        Event::TargetReached { target } => format!("target_{target}_reached"),
        Event::Fault { fault, .. } => format!("fault_{}", fault.as_str()),
        Event::Restarted => "restarted".into(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn flags_override_the_file_and_bad_values_are_named() {
        let file: Settings = toml::from_str("noise_floor_od = 0.01\ngate_sigma = 5.0\n").unwrap();
        let flags = Settings {
            gate_sigma: Some(6.0),
            ..Settings::default()
        };
        let s = file.overridden_by(flags);
        assert_eq!(s.noise_floor_od, Some(0.01));
        assert_eq!(s.gate_sigma, Some(6.0));
        assert!(s.config().is_ok());
        let bad = Settings {
            gate_sigma: Some(1.0),
            ..Settings::default()
        };
        assert!(format!("{:#}", bad.config().unwrap_err()).contains("gate_sigma"));
        assert!(toml::from_str::<Settings>("noise = 1\n").is_err());
    }

    #[test]
    fn statuses_name_the_outcome() {
        let steps = run(
            EstimatorConfig::new(),
            MonitorConfig::new(),
            &[
                (0.0, 0.1),
                (1.0, f64::NAN),
                (2.0, -0.1),
                (3.0, 0.2),
                (2.5, 0.2),
            ],
        );
        let words: Vec<_> = steps.iter().map(|s| status(s.outcome)).collect();
        assert_eq!(
            words,
            [
                "accepted",
                "not_finite",
                "negative",
                "accepted",
                "time_backwards"
            ]
        );
    }
}
