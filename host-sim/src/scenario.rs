//! Synthetic sensor streams: a TOML scenario file and the seeded generator.
//!
//! A scenario describes a culture (a growth-curve family with its parameters
//! in OD units and hours) and what the sensor does to it: sampling with jitter,
//! gaps, noise that grows with the signal, a blank offset, spikes (bubbles
//! reading high or low), a ceiling where readings clip, stuck periods,
//! a slow decline after the plateau and dilution events. [`generate`] turns it
//! into readings, the same ones for the same seed.
//!
//! # File format
//!
//! ```toml
//! name = "an invented culture"
//! seed = 7
//!
//! [model]                 # family = logistic | gompertz | richards | baranyi
//! family = "gompertz"
//! initial_od = 0.02       # all but logistic: OD at the start of growth
//! capacity_od = 1.2       # OD the culture tends to (without blank)
//! mu_max_per_h = 0.8      # maximum specific growth rate, per hour
//! lag_h = 2.0             # lag by the tangent construction, hours
//! # shape = 0.5           # richards only (ν > 0)
//! # logistic instead takes capacity_od, rate_per_h and midpoint_h
//!
//! [sampling]
//! start_h = 0.0
//! duration_h = 24.0
//! interval_h = 0.0833     # one reading every 5 minutes
//! jitter_h = 0.002        # each time moves by up to ± this much
//!
//! [noise]                 # sd = floor_od + fraction · truth_od
//! floor_od = 0.003
//! fraction = 0.01
//!
//! [sensor]
//! blank_od = 0.04         # added to the culture's OD
//! ceiling_od = 2.0        # optional: readings clip here
//!
//! [spikes]                # optional
//! probability = 0.02      # per reading
//! size_od = 0.15          # typical size; each spike is 0.5–1.5 × this
//! high_fraction = 0.8     # share of spikes that read high
//!
//! [decline]               # optional
//! rate_per_h = 0.02       # OD falls as e^(−rate · time since plateau)
//! after_fraction = 0.98   # plateau = this fraction of the rise done
//!
//! [[gap]]                 # optional, any number: no readings
//! start_h = 10.0
//! length_h = 0.5
//!
//! [[stuck]]               # optional, any number: the sensor repeats a value
//! start_h = 14.0
//! length_h = 0.75
//!
//! [[dilution]]            # optional, any number: OD divided by factor
//! time_h = 12.0
//! factor = 4.0
//! ```
//!
//! Units: times and lengths in hours, OD in OD units, rates per hour.

use std::path::Path;

use anyhow::{Context, Result, bail, ensure};
use plateau::{Baranyi, Gompertz, GrowthCurve, Logistic, Population, Richards};
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use serde::{Deserialize, Serialize};

/// A whole scenario file.
#[derive(Clone, Debug, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct Scenario {
    /// A short human name, shown in summaries.
    #[serde(default)]
    pub name: String,
    /// Seed of the random source; the same seed gives the same stream.
    pub seed: u64,
    /// The culture's growth curve.
    pub model: Model,
    /// When the sensor reads.
    pub sampling: Sampling,
    /// Measurement noise.
    #[serde(default)]
    pub noise: Noise,
    /// Blank offset and ceiling.
    #[serde(default)]
    pub sensor: Sensor,
    /// Spikes such as bubbles.
    #[serde(default)]
    pub spikes: Option<Spikes>,
    /// Decline after the plateau.
    #[serde(default)]
    pub decline: Option<Decline>,
    /// Intervals without readings.
    #[serde(default, rename = "gap")]
    pub gaps: Vec<Interval>,
    /// Intervals in which the sensor repeats its last value.
    #[serde(default, rename = "stuck")]
    pub stuck: Vec<Interval>,
    /// Dilution events.
    #[serde(default, rename = "dilution")]
    pub dilutions: Vec<Dilution>,
}

/// The growth-curve family and its parameters in OD units and hours.
#[derive(Clone, Copy, Debug, Deserialize, Serialize, PartialEq)]
#[serde(tag = "family", rename_all = "lowercase", deny_unknown_fields)]
pub enum Model {
    /// Plain logistic OD(t) = K / (1 + e^(−r (t − `t_m`))).
    Logistic {
        /// Capacity K, OD units.
        capacity_od: f64,
        /// Rate r, per hour.
        rate_per_h: f64,
        /// Midpoint `t_m`, hours.
        midpoint_h: f64,
    },
    /// Zwietering's Gompertz on ln(OD / `initial_od`).
    Gompertz {
        /// OD before growth, OD units.
        initial_od: f64,
        /// OD the culture tends to, OD units.
        capacity_od: f64,
        /// Maximum specific growth rate, per hour.
        mu_max_per_h: f64,
        /// Lag, hours.
        lag_h: f64,
    },
    /// Zwietering's Richards on ln(OD / `initial_od`).
    Richards {
        /// OD before growth, OD units.
        initial_od: f64,
        /// OD the culture tends to, OD units.
        capacity_od: f64,
        /// Maximum specific growth rate, per hour.
        mu_max_per_h: f64,
        /// Lag, hours.
        lag_h: f64,
        /// Shape ν (> 0; 1 is the logistic), dimensionless.
        shape: f64,
    },
    /// Baranyi–Roberts on ln(OD / `initial_od`).
    Baranyi {
        /// OD before growth, OD units.
        initial_od: f64,
        /// OD the culture tends to, OD units.
        capacity_od: f64,
        /// Maximum specific growth rate, per hour.
        mu_max_per_h: f64,
        /// Lag parameter λ = h0 / μmax, hours.
        lag_h: f64,
    },
}

/// When the sensor reads. Units: hours.
#[derive(Clone, Copy, Debug, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct Sampling {
    /// Time of the first reading, hours.
    #[serde(default)]
    pub start_h: f64,
    /// Length of the run, hours.
    pub duration_h: f64,
    /// Nominal time between readings, hours.
    pub interval_h: f64,
    /// Each reading moves uniformly by up to ± this, hours (below half the
    /// interval, so times stay in order).
    #[serde(default)]
    pub jitter_h: f64,
}

/// Gaussian measurement noise with sd = `floor_od` + `fraction` · truth.
#[derive(Clone, Copy, Debug, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct Noise {
    /// Standard deviation at zero signal, OD units.
    #[serde(default)]
    pub floor_od: f64,
    /// Extra standard deviation per unit of true OD, dimensionless.
    #[serde(default)]
    pub fraction: f64,
}

/// The sensor's blank offset and ceiling.
#[derive(Clone, Copy, Debug, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct Sensor {
    /// Offset added to the culture's OD (medium, vessel), OD units.
    #[serde(default)]
    pub blank_od: f64,
    /// Highest value the sensor reports; readings above clip to it, OD units.
    #[serde(default)]
    pub ceiling_od: Option<f64>,
}

/// Spikes: single readings far off the curve, such as bubbles.
#[derive(Clone, Copy, Debug, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct Spikes {
    /// Chance that a reading is a spike, 0 to 1.
    pub probability: f64,
    /// Typical spike size, OD units; each spike is 0.5 to 1.5 times this.
    pub size_od: f64,
    /// Share of spikes that read high (the rest read low), 0 to 1.
    #[serde(default = "default_high_fraction")]
    pub high_fraction: f64,
}

fn default_high_fraction() -> f64 {
    0.5
}

/// Slow decline once the culture has plateaued.
#[derive(Clone, Copy, Debug, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct Decline {
    /// Relative decline rate, per hour: OD × e^(−rate · time since plateau).
    pub rate_per_h: f64,
    /// The plateau starts when the curve has risen this fraction of the way
    /// from its starting level to its capacity, between 0 and 1.
    #[serde(default = "default_after_fraction")]
    pub after_fraction: f64,
}

fn default_after_fraction() -> f64 {
    0.98
}

/// A time interval [`start_h`, `start_h` + `length_h`). Units: hours.
#[derive(Clone, Copy, Debug, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct Interval {
    /// Start, hours.
    pub start_h: f64,
    /// Length, hours.
    pub length_h: f64,
}

impl Interval {
    /// Whether `t_h` lies in the interval (start included, end excluded).
    #[must_use]
    pub fn contains(&self, t_h: f64) -> bool {
        t_h >= self.start_h && t_h < self.start_h + self.length_h
    }
}

/// A dilution: at `time_h` the culture's OD is divided by `factor`, and it
/// grows on from there along the same curve.
#[derive(Clone, Copy, Debug, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct Dilution {
    /// When, hours.
    pub time_h: f64,
    /// Dilution factor (> 1): OD after = OD before / factor.
    pub factor: f64,
}

/// What happened to a reading.
#[derive(Clone, Copy, Debug, Deserialize, Serialize, PartialEq, Eq, Hash)]
#[serde(rename_all = "lowercase")]
pub enum Kind {
    /// Truth plus ordinary noise.
    Clean,
    /// A spike (bubble) far off the curve.
    Spike,
    /// A repeated value from a stuck sensor.
    Stuck,
    /// Clipped at the sensor ceiling.
    Clipped,
}

/// One generated reading.
///
/// Units: `time_h` in hours; `od` and `truth_od` in OD units (both include
/// the blank offset).
#[derive(Clone, Copy, Debug, Deserialize, Serialize, PartialEq)]
pub struct Reading {
    /// Time of the reading, hours.
    pub time_h: f64,
    /// What the sensor reports, OD units.
    pub od: f64,
    /// The noiseless truth at that time, OD units.
    pub truth_od: f64,
    /// What happened to the reading.
    pub kind: Kind,
}

impl Scenario {
    /// Parses a scenario from TOML text and validates it.
    ///
    /// # Errors
    ///
    /// A TOML syntax or type error, or a value out of range (the message
    /// names the field).
    pub fn from_toml(text: &str) -> Result<Self> {
        let scenario: Self = toml::from_str(text).context("cannot parse the scenario")?;
        scenario.validate()?;
        Ok(scenario)
    }

    /// Reads and validates a scenario file.
    ///
    /// # Errors
    ///
    /// As [`from_toml`](Self::from_toml), or the file cannot be read.
    pub fn load(path: &Path) -> Result<Self> {
        let text = std::fs::read_to_string(path)
            .with_context(|| format!("cannot read scenario {}", path.display()))?;
        Self::from_toml(&text).with_context(|| format!("in scenario {}", path.display()))
    }

    /// Checks every value; the error names the first bad field.
    ///
    /// # Errors
    ///
    /// A message naming the field and the allowed range.
    pub fn validate(&self) -> Result<()> {
        self.truth()?;
        let s = &self.sampling;
        finite(s.start_h, "sampling.start_h")?;
        positive(s.duration_h, "sampling.duration_h")?;
        positive(s.interval_h, "sampling.interval_h")?;
        ensure!(
            s.jitter_h.is_finite() && s.jitter_h >= 0.0 && s.jitter_h < s.interval_h / 2.0,
            "sampling.jitter_h must be at least 0 and below half of sampling.interval_h"
        );
        ensure!(
            s.duration_h / s.interval_h <= 10_000_000.0,
            "sampling: more than ten million readings"
        );
        non_negative(self.noise.floor_od, "noise.floor_od")?;
        non_negative(self.noise.fraction, "noise.fraction")?;
        finite(self.sensor.blank_od, "sensor.blank_od")?;
        if let Some(c) = self.sensor.ceiling_od {
            finite(c, "sensor.ceiling_od")?;
        }
        if let Some(sp) = &self.spikes {
            fraction(sp.probability, "spikes.probability")?;
            non_negative(sp.size_od, "spikes.size_od")?;
            fraction(sp.high_fraction, "spikes.high_fraction")?;
        }
        if let Some(d) = &self.decline {
            non_negative(d.rate_per_h, "decline.rate_per_h")?;
            ensure!(
                d.after_fraction > 0.0 && d.after_fraction < 1.0,
                "decline.after_fraction must lie strictly between 0 and 1"
            );
        }
        for (i, g) in self.gaps.iter().enumerate() {
            finite(g.start_h, &format!("gap[{i}].start_h"))?;
            positive(g.length_h, &format!("gap[{i}].length_h"))?;
        }
        for (i, g) in self.stuck.iter().enumerate() {
            finite(g.start_h, &format!("stuck[{i}].start_h"))?;
            positive(g.length_h, &format!("stuck[{i}].length_h"))?;
        }
        for (i, d) in self.dilutions.iter().enumerate() {
            finite(d.time_h, &format!("dilution[{i}].time_h"))?;
            ensure!(
                d.factor.is_finite() && d.factor > 1.0,
                "dilution[{i}].factor must be finite and above 1"
            );
        }
        // Dilutions must leave the culture above the model's starting level.
        Truth::new(self)?;
        Ok(())
    }

    /// The closed-form curve of the model, without blank, decline or
    /// dilutions. Units: OD units against hours.
    ///
    /// # Errors
    ///
    /// A message naming the model parameter that is out of range.
    pub fn truth(&self) -> Result<Box<dyn GrowthCurve<f64>>> {
        let named = |e: plateau::Error| {
            anyhow::anyhow!(
                "model.{}: {e}",
                e.parameter()
                    .unwrap_or("parameters")
                    .replace("asymptote", "capacity_od")
            )
        };
        Ok(match self.model {
            Model::Logistic {
                capacity_od,
                rate_per_h,
                midpoint_h,
            } => Box::new(
                Logistic::from_midpoint(capacity_od, rate_per_h, midpoint_h).map_err(named)?,
            ),
            Model::Gompertz {
                initial_od,
                capacity_od,
                mu_max_per_h,
                lag_h,
            } => {
                let a = log_ratio(initial_od, capacity_od)?;
                Box::new(
                    Population::new(
                        Gompertz::new(a, mu_max_per_h, lag_h).map_err(named)?,
                        initial_od,
                    )
                    .map_err(named)?,
                )
            }
            Model::Richards {
                initial_od,
                capacity_od,
                mu_max_per_h,
                lag_h,
                shape,
            } => {
                let a = log_ratio(initial_od, capacity_od)?;
                Box::new(
                    Population::new(
                        Richards::new(a, mu_max_per_h, lag_h, shape).map_err(named)?,
                        initial_od,
                    )
                    .map_err(named)?,
                )
            }
            Model::Baranyi {
                initial_od,
                capacity_od,
                mu_max_per_h,
                lag_h,
            } => {
                let a = log_ratio(initial_od, capacity_od)?;
                Box::new(
                    Population::new(
                        Baranyi::new(a, mu_max_per_h, lag_h).map_err(named)?,
                        initial_od,
                    )
                    .map_err(named)?,
                )
            }
        })
    }
}

fn log_ratio(initial_od: f64, capacity_od: f64) -> Result<f64> {
    positive(initial_od, "model.initial_od")?;
    positive(capacity_od, "model.capacity_od")?;
    ensure!(
        capacity_od > initial_od,
        "model.capacity_od must be above model.initial_od"
    );
    Ok((capacity_od / initial_od).ln())
}

fn finite(x: f64, name: &str) -> Result<()> {
    ensure!(x.is_finite(), "{name} must be finite, got {x}");
    Ok(())
}

fn positive(x: f64, name: &str) -> Result<()> {
    ensure!(
        x.is_finite() && x > 0.0,
        "{name} must be finite and positive, got {x}"
    );
    Ok(())
}

fn non_negative(x: f64, name: &str) -> Result<()> {
    ensure!(
        x.is_finite() && x >= 0.0,
        "{name} must be finite and at least 0, got {x}"
    );
    Ok(())
}

fn fraction(x: f64, name: &str) -> Result<()> {
    ensure!(
        (0.0..=1.0).contains(&x),
        "{name} must lie between 0 and 1, got {x}"
    );
    Ok(())
}

/// The noiseless culture of a scenario: the model curve, with dilutions and
/// decline, plus the blank.
pub struct Truth {
    curve: Box<dyn GrowthCurve<f64>>,
    blank_od: f64,
    decline: Option<(f64, f64)>,
    /// (from time in hours, curve-time shift in hours), in time order.
    segments: Vec<(f64, f64)>,
}

impl Truth {
    /// Builds the truth of `scenario`.
    ///
    /// # Errors
    ///
    /// A bad model parameter, or a dilution that brings the culture to or
    /// below the model's starting level (names the dilution).
    pub fn new(scenario: &Scenario) -> Result<Self> {
        let curve = scenario.truth()?;
        let decline = match scenario.decline {
            Some(d) => {
                let lo = curve.lower_asymptote();
                let level = lo + d.after_fraction * (curve.upper_asymptote() - lo);
                let start = curve
                    .time_to_reach(level)
                    .map_err(|e| anyhow::anyhow!("decline.after_fraction: {e}"))?;
                Some((d.rate_per_h, start))
            }
            None => None,
        };
        let mut truth = Self {
            curve,
            blank_od: scenario.sensor.blank_od,
            decline,
            segments: vec![(f64::NEG_INFINITY, 0.0)],
        };
        let mut dilutions = scenario.dilutions.clone();
        dilutions.sort_by(|a, b| a.time_h.total_cmp(&b.time_h));
        for (i, d) in dilutions.iter().enumerate() {
            let level = truth.culture_od(d.time_h) / d.factor;
            if level <= truth.curve.lower_asymptote() {
                bail!(
                    "dilution at {} h: the diluted culture ({level:.4} OD) is at or below the \
                     model's starting level",
                    d.time_h
                );
            }
            let tau = truth
                .curve
                .time_to_reach(level)
                .map_err(|e| anyhow::anyhow!("dilution[{i}]: {e}"))?;
            truth.segments.push((d.time_h, d.time_h - tau));
        }
        Ok(truth)
    }

    /// The culture's OD without blank at `t_h` hours.
    #[must_use]
    pub fn culture_od(&self, t_h: f64) -> f64 {
        let shift = self
            .segments
            .iter()
            .rev()
            .find(|(from, _)| t_h >= *from)
            .map_or(0.0, |s| s.1);
        let tau = t_h - shift;
        let mut y = self.curve.value(tau);
        if let Some((rate, start)) = self.decline
            && tau > start
        {
            y *= (-rate * (tau - start)).exp();
        }
        y
    }

    /// What a perfect sensor reads at `t_h` hours: blank + culture, OD units.
    #[must_use]
    pub fn od(&self, t_h: f64) -> f64 {
        self.blank_od + self.culture_od(t_h)
    }
}

/// Generates the readings of `scenario`, reproducibly from its seed.
///
/// Each reading draws the same number of random values whatever the
/// scenario turns on, so adding spikes does not move the noise of the other
/// readings. Order of effects: truth, noise, spike, ceiling, stuck.
///
/// # Errors
///
/// The scenario does not validate.
pub fn generate(scenario: &Scenario) -> Result<Vec<Reading>> {
    scenario.validate()?;
    let truth = Truth::new(scenario)?;
    let s = scenario.sampling;
    let mut rng = ChaCha8Rng::seed_from_u64(scenario.seed);
    let end_h = s.start_h + s.duration_h;
    let mut out = Vec::new();
    let mut held: Option<f64> = None;
    for i in 0u64.. {
        #[allow(clippy::cast_precision_loss)] // fewer than 1e7 readings (validated)
        let nominal = s.start_h + i as f64 * s.interval_h;
        if nominal > end_h + 1e-9 * s.interval_h {
            break;
        }
        let jitter: f64 = rng.random_range(-1.0..=1.0);
        let noise: f64 = StandardNormal.sample(&mut rng);
        let spike_roll: f64 = rng.random();
        let spike_sign: f64 = rng.random();
        let spike_size: f64 = rng.random_range(0.5..1.5);
        let t = nominal + jitter * s.jitter_h;
        if scenario.gaps.iter().any(|g| g.contains(t)) {
            continue;
        }
        let truth_od = truth.od(t);
        let sd = scenario.noise.floor_od + scenario.noise.fraction * truth_od.abs();
        let mut od = truth_od + sd * noise;
        let mut kind = Kind::Clean;
        if let Some(sp) = &scenario.spikes
            && spike_roll < sp.probability
        {
            let sign = if spike_sign < sp.high_fraction {
                1.0
            } else {
                -1.0
            };
            od += sign * sp.size_od * spike_size;
            kind = Kind::Spike;
        }
        if let Some(ceiling) = scenario.sensor.ceiling_od
            && od > ceiling
        {
            od = ceiling;
            kind = Kind::Clipped;
        }
        if scenario.stuck.iter().any(|g| g.contains(t)) {
            let value = *held.get_or_insert(od);
            od = value;
            kind = Kind::Stuck;
        } else {
            held = Some(od);
        }
        out.push(Reading {
            time_h: t,
            od,
            truth_od,
            kind,
        });
    }
    Ok(out)
}

/// Writes readings as CSV with the header `time_h,od,truth_od,kind`.
///
/// # Errors
///
/// The writer fails.
pub fn write_csv<W: std::io::Write>(readings: &[Reading], writer: W) -> Result<()> {
    let mut w = csv::Writer::from_writer(writer);
    for r in readings {
        w.serialize(r)?;
    }
    w.flush()?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn base() -> Scenario {
        Scenario::from_toml(
            r#"
            name = "test culture (invented)"
            seed = 42
            [model]
            family = "logistic"
            capacity_od = 1.5
            rate_per_h = 0.7
            midpoint_h = 8.0
            [sampling]
            duration_h = 20.0
            interval_h = 0.25
            jitter_h = 0.01
            [noise]
            floor_od = 0.003
            fraction = 0.01
            "#,
        )
        .unwrap()
    }

    #[test]
    fn same_seed_same_stream_other_seed_other_stream() {
        let s = base();
        let a = generate(&s).unwrap();
        let b = generate(&s).unwrap();
        assert_eq!(a, b);
        let mut s2 = s.clone();
        s2.seed = 43;
        let c = generate(&s2).unwrap();
        assert_ne!(a, c);
    }

    #[test]
    fn clean_stream_follows_the_closed_form_with_the_stated_noise() {
        let s = base();
        let r = generate(&s).unwrap();
        // 0, 0.25, ..., 20 h: 81 readings.
        assert_eq!(r.len(), 81);
        let curve = Logistic::from_midpoint(1.5, 0.7, 8.0).unwrap();
        let mut z2 = 0.0;
        for (i, x) in r.iter().enumerate() {
            assert_eq!(x.kind, Kind::Clean);
            assert!((x.time_h - 0.25 * i as f64).abs() <= 0.01 + 1e-12);
            assert!((x.truth_od - curve.value(x.time_h)).abs() < 1e-12);
            let sd = 0.003 + 0.01 * x.truth_od;
            z2 += ((x.od - x.truth_od) / sd).powi(2);
        }
        // Standardised residuals: mean square near 1 (chi-square with 81 dof,
        // mean 1, sd sqrt(2/81) ≈ 0.16).
        let ms = z2 / r.len() as f64;
        assert!((0.5..1.5).contains(&ms), "mean square {ms}");
    }

    #[test]
    fn gaps_spikes_ceiling_and_stuck() {
        let mut s = base();
        s.gaps.push(Interval {
            start_h: 5.0,
            length_h: 1.0,
        });
        s.stuck.push(Interval {
            start_h: 10.0,
            length_h: 1.0,
        });
        s.spikes = Some(Spikes {
            probability: 0.2,
            size_od: 0.3,
            high_fraction: 0.5,
        });
        s.sensor.ceiling_od = Some(1.2);
        let r = generate(&s).unwrap();
        assert!(r.iter().all(|x| !(5.0..6.0).contains(&x.time_h)));
        let stuck: Vec<_> = r.iter().filter(|x| x.kind == Kind::Stuck).collect();
        assert!(stuck.len() >= 3);
        assert!(stuck.iter().all(|x| x.od == stuck[0].od));
        let before = r.iter().rev().find(|x| x.time_h < 10.0).unwrap();
        assert_eq!(stuck[0].od, before.od);
        assert!(r.iter().all(|x| x.od <= 1.2));
        assert!(r.iter().any(|x| x.kind == Kind::Clipped));
        let spikes: Vec<_> = r.iter().filter(|x| x.kind == Kind::Spike).collect();
        assert!(!spikes.is_empty());
        // Spikes are at least half their size off the truth, well beyond noise.
        assert!(spikes.iter().all(|x| (x.od - x.truth_od).abs() > 0.1));
        assert!(spikes.iter().any(|x| x.od > x.truth_od));
        assert!(spikes.iter().any(|x| x.od < x.truth_od));
    }

    #[test]
    fn dilution_divides_the_culture_and_growth_resumes() {
        let mut s = base();
        s.noise = Noise::default();
        s.sensor.blank_od = 0.05;
        s.dilutions.push(Dilution {
            time_h: 12.0,
            factor: 4.0,
        });
        let t = Truth::new(&s).unwrap();
        let before = t.culture_od(12.0 - 1e-9);
        let after = t.culture_od(12.0);
        assert!((after - before / 4.0).abs() < 1e-6);
        assert!((t.od(12.0) - after - 0.05).abs() < 1e-12);
        // Logistic: after the dilution it grows at r·y·(1 − y/K) again.
        let h = 1e-5;
        let slope = (t.culture_od(12.5 + h) - t.culture_od(12.5 - h)) / (2.0 * h);
        let y = t.culture_od(12.5);
        assert!((slope - 0.7 * y * (1.0 - y / 1.5)).abs() < 1e-6);
    }

    #[test]
    fn decline_after_plateau() {
        let mut s = base();
        s.decline = Some(Decline {
            rate_per_h: 0.1,
            after_fraction: 0.9,
        });
        let t = Truth::new(&s).unwrap();
        let curve = Logistic::from_midpoint(1.5, 0.7, 8.0).unwrap();
        let start = curve.time_to_reach(1.35).unwrap();
        assert!((t.culture_od(start - 0.1) - curve.value(start - 0.1)).abs() < 1e-12);
        let later = start + 2.0;
        assert!((t.culture_od(later) - curve.value(later) * (-0.2_f64).exp()).abs() < 1e-12);
    }

    #[test]
    fn bad_values_are_named() {
        let text = r#"
            seed = 1
            [model]
            family = "gompertz"
            initial_od = 0.02
            capacity_od = 1.0
            mu_max_per_h = -0.5
            lag_h = 1.0
            [sampling]
            duration_h = 10.0
            interval_h = 0.1
        "#;
        let err = format!("{:#}", Scenario::from_toml(text).unwrap_err());
        assert!(err.contains("mu_max_per_h"), "{err}");
        let text = text
            .replace("-0.5", "0.5")
            .replace("interval_h = 0.1", "interval_h = 0.1\njitter_h = 0.06");
        let err = format!("{:#}", Scenario::from_toml(&text).unwrap_err());
        assert!(err.contains("jitter_h"), "{err}");
        let text = text.replace("jitter_h = 0.06", "jiter_h = 0.01");
        let err = format!("{:#}", Scenario::from_toml(&text).unwrap_err());
        assert!(err.contains("jiter_h"), "{err}");
    }

    #[test]
    fn shipped_scenarios_load_and_generate() {
        let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios");
        let mut n = 0;
        for entry in std::fs::read_dir(dir).unwrap() {
            let path = entry.unwrap().path();
            if path.extension().is_some_and(|e| e == "toml") {
                let text = std::fs::read_to_string(&path).unwrap();
                assert!(
                    text.contains("INVENTED"),
                    "{} must say INVENTED",
                    path.display()
                );
                let s = Scenario::load(&path).unwrap();
                let r = generate(&s).unwrap();
                assert!(r.len() > 50, "{}", path.display());
                assert!(r.windows(2).all(|w| w[0].time_h < w[1].time_h));
                n += 1;
            }
        }
        assert!(n >= 4);
    }

    #[test]
    fn csv_has_the_documented_columns() {
        let r = generate(&base()).unwrap();
        let mut buf = Vec::new();
        write_csv(&r[..2], &mut buf).unwrap();
        let text = String::from_utf8(buf).unwrap();
        let mut lines = text.lines();
        assert_eq!(lines.next(), Some("time_h,od,truth_od,kind"));
        assert!(lines.next().unwrap().ends_with(",clean"));
    }
}
