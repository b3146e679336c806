//! The shape streams of `host-sim fleet`: INVENTED cultures of the standard
//! published shapes, read as the device reads them and judged against their
//! truth and against a batch fit of the estimator's own family.
//!
//! Five families, every culture drawn at random within these INVENTED ranges
//! (capacity above blank 0.8–2.5 OD, maximum specific growth rate 0.4–1.2 per
//! hour, OD at the first reading 0.01–0.03 above blank, a reading every
//! 5 minutes with ± 7 s jitter, noise sd 0.003 OD + 1 % of the reading,
//! normal; the run lasts until the culture is at 99 % of its capacity plus
//! [`TAIL_H`] hours):
//!
//! * [`Family::RichardsSlow`]: Richards (1959) shape ν 0.15–0.6 (a slow,
//!   Gompertz-like shoulder), no lag;
//! * [`Family::RichardsSharp`]: Richards shape ν 1.6–4 (a sharp shoulder),
//!   no lag;
//! * [`Family::Gompertz`]: the Gompertz shape with a lag of 0.5–3 h;
//! * [`Family::Baranyi`]: Baranyi & Roberts (1994) with a lag of 1.5–4 h;
//! * [`Family::BlankedLogistic`]: a logistic read on top of a blank of
//!   0.03–0.08 OD that the estimator is not told.
//!
//! The Richards, Gompertz and Baranyi curves are plateau's own types in
//! Zwietering et al. (1990)'s reparameterisation on ln(OD/OD₀) (μm is the
//! largest slope of ln OD, λ the tangent lag), mapped to OD by
//! [`plateau::Population`]; the blanked logistic is [`plateau::Logistic`]
//! under [`plateau::Blanked`]. The readings come from
//! [`crate::scenario::generate`], so no curve is written out here.
//!
//! Truth of every culture ([`ShapeTruth`]): μmax is the largest
//! d ln(y − blank)/dt over the run, by central differences on a
//! [`TRUTH_GRID_H`] grid of the true curve; t90 the first time the true
//! curve is at 90 % of its capacity above the blank (grid scan, then
//! bisection); the lag is the family's own λ.
//!
//! Judged at default settings (`EstimatorConfig::new()`,
//! `MonitorConfig::new()`: saturation alert at 90 % of capacity, 1 h lead):
//! the first saturation alert is on time when it comes within the
//! [`ON_TIME_WINDOW_H`] hours before the true t90 and not after it; at the
//! end of the run the published capacity and rate are compared with the
//! truth (relative errors) and their 95 % intervals (± 1.96 sd) checked for
//! the truth. The batch fit beside it fits the estimator's family
//! ([`batch_family`]) to all readings with Levenberg–Marquardt, weighted by
//! the noise model at an unweighted fit's curve.
//!
//! Units: hours, OD units, per hour.

use std::fmt::Write as _;

use plateau::{Blanked, EstimatorConfig, Event, GrowthCurve, LagRichards, Logistic, MonitorConfig};
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;
use serde::Serialize;

use super::{mix, pct, pct2};
use crate::batch::{BatchFamily, Online, ValueSd, fit_family};
use crate::online;
use crate::scenario::{self, Model, Noise, Sampling, Scenario, Sensor};

/// Time between readings, hours (5 minutes).
pub const INTERVAL_H: f64 = 5.0 / 60.0;
/// Jitter of each reading time, ± hours (7.2 s).
pub const JITTER_H: f64 = 0.002;
/// Noise floor, OD units.
pub const NOISE_FLOOR_OD: f64 = 0.003;
/// Proportional noise, sd per unit of reading.
pub const NOISE_FRACTION: f64 = 0.01;
/// Hours the run goes on after the culture reaches 99 % of capacity.
pub const TAIL_H: f64 = 3.0;
/// Step of the grid the truth is computed on, hours.
pub const TRUTH_GRID_H: f64 = 1e-3;
/// An alert is on time within this many hours before the true t90.
pub const ON_TIME_WINDOW_H: f64 = 3.0;

/// Targets of issue 10, as fractions.
pub mod targets {
    /// Share of cultures per family whose alert is on time, at least.
    pub const ALERT_ON_TIME_MIN: f64 = 0.90;
    /// Capacity relative RMS error over all shape streams, at most.
    pub const CAPACITY_RMS_MAX: f64 = 0.015;
    /// μmax relative RMS error over all shape streams, at most.
    pub const MU_MAX_RMS_MAX: f64 = 0.06;
    /// Share of cultures per family whose 95 % interval holds the truth, at
    /// least (capacity and μmax each).
    pub const COVERAGE_MIN: f64 = 0.80;
}

/// The shape families.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Family {
    /// Richards with shape ν 0.15–0.6: slow shoulder, Gompertz-like.
    RichardsSlow,
    /// Richards with shape ν 1.6–4: sharp shoulder.
    RichardsSharp,
    /// Gompertz shape with a lag of 0.5–3 h.
    #[serde(rename = "gompertz_lag")]
    Gompertz,
    /// Baranyi–Roberts with a lag of 1.5–4 h.
    #[serde(rename = "baranyi_lag")]
    Baranyi,
    /// Logistic on an unknown blank of 0.03–0.08 OD.
    #[serde(rename = "logistic_blank")]
    BlankedLogistic,
}

impl Family {
    /// Every family, in table order.
    pub const ALL: [Self; 5] = [
        Self::RichardsSlow,
        Self::RichardsSharp,
        Self::Gompertz,
        Self::Baranyi,
        Self::BlankedLogistic,
    ];

    /// Short name.
    #[must_use]
    pub const fn name(self) -> &'static str {
        match self {
            Self::RichardsSlow => "richards_slow",
            Self::RichardsSharp => "richards_sharp",
            Self::Gompertz => "gompertz_lag",
            Self::Baranyi => "baranyi_lag",
            Self::BlankedLogistic => "logistic_blank",
        }
    }

    const fn code(self) -> u64 {
        match self {
            Self::RichardsSlow => 101,
            Self::RichardsSharp => 102,
            Self::Gompertz => 103,
            Self::Baranyi => 104,
            Self::BlankedLogistic => 105,
        }
    }
}

/// One INVENTED culture of a shape family.
///
/// Units: `capacity_od`, `start_od`, `blank_od` OD units; `mu_max_per_h` per
/// hour; `lag_h` hours; `shape` dimensionless.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct ShapeCulture {
    /// The family.
    pub family: Family,
    /// Capacity above the blank, OD units: 0.8–2.5.
    pub capacity_od: f64,
    /// The family's rate parameter (μm; r for the logistic), per hour:
    /// 0.4–1.2.
    pub mu_max_per_h: f64,
    /// OD above the blank at the first reading (t = 0), OD units: 0.01–0.03.
    pub start_od: f64,
    /// Richards shape ν (1 for the other families).
    pub shape: f64,
    /// The family's lag parameter λ, hours (0 without one).
    pub lag_h: f64,
    /// Blank under the culture, OD units (0 but for the blanked logistic).
    pub blank_od: f64,
    /// Seed of the culture's readings.
    pub noise_seed: u64,
}

impl ShapeCulture {
    /// Draws culture `index` of `family` in the fleet seeded by `seed`.
    #[must_use]
    pub fn draw(seed: u64, family: Family, index: u64) -> Self {
        let mut rng = ChaCha8Rng::seed_from_u64(mix(seed, index, family.code()));
        let capacity_od = rng.random_range(0.8..2.5);
        let mu_max_per_h = rng.random_range(0.4..1.2);
        let start_od = rng.random_range(0.01..0.03);
        let (shape, lag_h, blank_od) = match family {
            Family::RichardsSlow => (rng.random_range(0.15..0.6), 0.0, 0.0),
            Family::RichardsSharp => (rng.random_range(1.6..4.0), 0.0, 0.0),
            Family::Gompertz => (1.0, rng.random_range(0.5..3.0), 0.0),
            Family::Baranyi => (1.0, rng.random_range(1.5..4.0), 0.0),
            Family::BlankedLogistic => (1.0, 0.0, rng.random_range(0.03..0.08)),
        };
        Self {
            family,
            capacity_od,
            mu_max_per_h,
            start_od,
            shape,
            lag_h,
            blank_od,
            noise_seed: rng.random(),
        }
    }

    /// The scenario model with OD₀ = `initial_od` for the ln-scale families.
    fn model_with(&self, initial_od: f64) -> Model {
        let (capacity_od, mu_max_per_h, lag_h) = (self.capacity_od, self.mu_max_per_h, self.lag_h);
        match self.family {
            Family::RichardsSlow | Family::RichardsSharp => Model::Richards {
                initial_od,
                capacity_od,
                mu_max_per_h,
                lag_h,
                shape: self.shape,
            },
            Family::Gompertz => Model::Gompertz {
                initial_od,
                capacity_od,
                mu_max_per_h,
                lag_h,
            },
            Family::Baranyi => Model::Baranyi {
                initial_od,
                capacity_od,
                mu_max_per_h,
                lag_h,
            },
            Family::BlankedLogistic => {
                let l = Logistic::from_initial(capacity_od, mu_max_per_h, self.start_od)
                    .expect("invented ranges are valid");
                Model::Logistic {
                    capacity_od,
                    rate_per_h: mu_max_per_h,
                    midpoint_h: l.midpoint_h(),
                }
            }
        }
    }

    /// The scenario that generates this culture's readings: the model, the
    /// blank, the sampling and the noise above, over `duration_h` hours.
    fn scenario_with(&self, model: Model, duration_h: f64) -> Scenario {
        Scenario {
            name: format!("INVENTED {} culture", self.family.name()),
            seed: self.noise_seed,
            model,
            sampling: Sampling {
                start_h: 0.0,
                duration_h,
                interval_h: INTERVAL_H,
                jitter_h: JITTER_H,
            },
            noise: Noise {
                floor_od: NOISE_FLOOR_OD,
                fraction: NOISE_FRACTION,
            },
            sensor: Sensor {
                blank_od: self.blank_od,
                ceiling_od: None,
            },
            spikes: None,
            decline: None,
            gaps: Vec::new(),
            stuck: Vec::new(),
            dilutions: Vec::new(),
        }
    }

    /// The model whose culture OD at t = 0 is `start_od`: for the ln-scale
    /// families OD₀ (the level before growth) is found by fixed-point
    /// iteration OD₀ ← OD₀ · start / OD(0) on the curve itself (it contracts:
    /// the curve's value at 0 moves less than its asymptote).
    #[must_use]
    pub fn model(&self) -> Model {
        if self.family == Family::BlankedLogistic {
            return self.model_with(self.start_od);
        }
        let mut initial = self.start_od;
        for _ in 0..200 {
            let curve = self
                .scenario_with(self.model_with(initial), 1.0)
                .truth()
                .expect("invented ranges are valid");
            let next = initial * self.start_od / curve.value(0.0);
            let done = (next / initial - 1.0).abs() < 1e-13;
            initial = next;
            if done {
                break;
            }
        }
        self.model_with(initial)
    }

    /// The true culture as the sensor sees it: the model's curve plus the
    /// blank ([`Blanked`]), OD units against hours.
    #[must_use]
    pub fn truth_curve(&self) -> Blanked<ModelCurve, f64> {
        let curve = self
            .scenario_with(self.model(), 1.0)
            .truth()
            .expect("invented ranges are valid");
        Blanked::new(ModelCurve(curve), self.blank_od).expect("finite blank")
    }

    /// Length of the run, hours: 99 % of capacity plus [`TAIL_H`].
    #[must_use]
    pub fn duration_h(&self) -> f64 {
        let curve = self.truth_curve();
        let level = self.blank_od + 0.99 * (curve.upper_asymptote() - self.blank_od);
        curve.time_to_reach(level).expect("99 % is reached") + TAIL_H
    }

    /// The culture's readings as (time h, OD), reproducibly.
    #[must_use]
    pub fn readings(&self) -> Vec<(f64, f64)> {
        let s = self.scenario_with(self.model(), self.duration_h());
        scenario::generate(&s)
            .expect("invented scenario validates")
            .into_iter()
            .map(|r| (r.time_h, r.od))
            .collect()
    }
}

/// A scenario's model curve behind one type, so [`Blanked`] can wrap any
/// family. Units: OD units against hours.
pub struct ModelCurve(Box<dyn GrowthCurve<f64>>);

impl GrowthCurve<f64> for ModelCurve {
    fn value(&self, t_h: f64) -> f64 {
        self.0.value(t_h)
    }
    fn slope(&self, t_h: f64) -> f64 {
        self.0.slope(t_h)
    }
    fn lower_asymptote(&self) -> f64 {
        self.0.lower_asymptote()
    }
    fn upper_asymptote(&self) -> f64 {
        self.0.upper_asymptote()
    }
    fn inflection(&self) -> plateau::Inflection<f64> {
        self.0.inflection()
    }
    fn max_specific_rate_per_h(&self) -> f64 {
        self.0.max_specific_rate_per_h()
    }
    fn early_exponential(&self, t_h: f64) -> f64 {
        self.0.early_exponential(t_h)
    }
    fn early_exponential_relative_error(&self, t_h: f64) -> f64 {
        self.0.early_exponential_relative_error(t_h)
    }
    fn max_slope(&self) -> f64 {
        self.0.max_slope()
    }
    fn lag_h(&self) -> f64 {
        self.0.lag_h()
    }
    fn time_to_reach(&self, level: f64) -> Result<f64, plateau::Error> {
        self.0.time_to_reach(level)
    }
}

/// The truth of one culture.
///
/// Units: `capacity_od` OD units; `mu_max_per_h` per hour; times hours.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct ShapeTruth {
    /// Capacity above the blank, OD units.
    pub capacity_od: f64,
    /// Largest d ln(y − blank)/dt over the run, per hour.
    pub mu_max_per_h: f64,
    /// First time at 90 % of the capacity above the blank, hours.
    pub t90_h: f64,
    /// The family's own lag λ, hours (`None` for the logistic, which has no
    /// lag parameter).
    pub lag_h: Option<f64>,
    /// End of the run, hours.
    pub end_h: f64,
}

/// The largest d ln(y − `blank`)/dt of `curve` over [`from_h`, `to_h`], per
/// hour: central differences of ln(y − blank) on a grid of step `step_h`
/// (one-sided at the ends), so only the curve's values are used.
#[must_use]
pub fn max_specific_rate_on_grid<C: GrowthCurve<f64> + ?Sized>(
    curve: &C,
    blank: f64,
    from_h: f64,
    to_h: f64,
    step_h: f64,
) -> f64 {
    let ln = |t: f64| (curve.value(t) - blank).ln();
    #[allow(clippy::cast_possible_truncation, clippy::cast_sign_loss)]
    let n = ((to_h - from_h) / step_h).ceil().max(1.0) as usize;
    let h = (to_h - from_h) / n as f64;
    let mut best = f64::NEG_INFINITY;
    let mut prev = ln(from_h);
    let mut here = ln(from_h + h);
    // One-sided at the start.
    best = best.max((here - prev) / h);
    for i in 1..n {
        let next = ln(from_h + (i + 1) as f64 * h);
        best = best.max((next - prev) / (2.0 * h));
        prev = here;
        here = next;
    }
    best.max((here - prev) / h)
}

/// The first time in [`from_h`, `to_h`] at which `curve` reaches `level`:
/// a scan on a grid of step `step_h`, then bisection to 1e-10 h. `None` if
/// the curve stays below `level` on the grid.
#[must_use]
pub fn first_time_at<C: GrowthCurve<f64> + ?Sized>(
    curve: &C,
    level: f64,
    from_h: f64,
    to_h: f64,
    step_h: f64,
) -> Option<f64> {
    if curve.value(from_h) >= level {
        return Some(from_h);
    }
    let mut lo = from_h;
    let mut hi = None;
    let mut t = from_h;
    while t < to_h {
        let next = (t + step_h).min(to_h);
        if curve.value(next) >= level {
            lo = t;
            hi = Some(next);
            break;
        }
        t = next;
    }
    let mut hi = hi?;
    while hi - lo > 1e-10 {
        let mid = 0.5 * (lo + hi);
        if curve.value(mid) >= level {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    Some(hi)
}

impl ShapeCulture {
    /// The culture's truth (see [`ShapeTruth`]).
    #[must_use]
    pub fn truth(&self) -> ShapeTruth {
        let curve = self.truth_curve();
        let end_h = self.duration_h();
        let capacity_od = curve.upper_asymptote() - self.blank_od;
        let mu_max_per_h =
            max_specific_rate_on_grid(&curve, self.blank_od, 0.0, end_h, TRUTH_GRID_H);
        let t90_h = first_time_at(
            &curve,
            self.blank_od + 0.9 * capacity_od,
            0.0,
            end_h,
            TRUTH_GRID_H * 10.0,
        )
        .unwrap_or(f64::NAN);
        let lag_h = match self.model() {
            Model::Logistic { .. } => None,
            Model::Baranyi {
                mu_max_per_h,
                lag_h,
                ..
            } => Some(
                plateau::Baranyi::new(1.0, mu_max_per_h, lag_h).map_or(lag_h, |b| b.lag_param_h()),
            ),
            Model::Gompertz { lag_h, .. } | Model::Richards { lag_h, .. } => Some(lag_h),
        };
        ShapeTruth {
            capacity_od,
            mu_max_per_h,
            t90_h,
            lag_h,
            end_h,
        }
    }
}

/// The family the default estimator fits online (the one `Watch` uses).
pub type EstimatorFamily = LagRichards<f64>;

/// The batch family the fleet fits beside the online estimator: the
/// estimator's own family through its [`plateau::OnlineFamily`] seam, with
/// its time origin at the first reading (`origin_h`) and its priors.
#[must_use]
pub const fn batch_family(origin_h: f64) -> Online<EstimatorFamily> {
    Online::new(origin_h)
}

/// A batch fit of `family` to `readings`, weighted by the noise model
/// (sd = 0.003 OD + 1 %): first at the readings themselves, then at the
/// first fit's curve. Returns (capacity, μmax) with their sds.
#[must_use]
pub fn batch_fit<F: BatchFamily<P>, const P: usize>(
    family: &F,
    readings: &[(f64, f64)],
) -> Option<(ValueSd, ValueSd)> {
    let t: Vec<f64> = readings.iter().map(|r| r.0).collect();
    let y: Vec<f64> = readings.iter().map(|r| r.1).collect();
    let w0: Vec<f64> = y
        .iter()
        .map(|&v| {
            let sd = NOISE_FLOOR_OD + NOISE_FRACTION * v.max(0.0);
            1.0 / (sd * sd)
        })
        .collect();
    let first = fit_family(family, &t, &y, Some(&w0)).ok()?;
    let w: Vec<f64> = t
        .iter()
        .map(|&x| {
            let f = family.value_and_gradient(&first.theta, x).0.max(0.0);
            let sd = NOISE_FLOOR_OD + NOISE_FRACTION * f;
            1.0 / (sd * sd)
        })
        .collect();
    let fit = fit_family(family, &t, &y, Some(&w)).ok()?;
    Some((fit.capacity, fit.max_specific_rate_per_h))
}

/// One culture run and judged.
///
/// Units: hours, OD units, per hour.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct ShapeRun {
    /// The culture.
    pub culture: ShapeCulture,
    /// Its truth.
    pub truth: ShapeTruth,
    /// Readings fed.
    pub readings: usize,
    /// Time of the first saturation alert, hours.
    pub alert_h: Option<f64>,
    /// t90 − alert time, hours (positive: before the crossing).
    pub alert_lead_h: Option<f64>,
    /// Whether the alert came within the window before t90 and not after.
    pub alert_on_time: bool,
    /// Whether the capacity was published at the end.
    pub capacity_published: bool,
    /// Online capacity at the end (published or not), OD units.
    pub online_capacity: Option<ValueSd>,
    /// Online rate at the end, per hour.
    pub online_mu_max: Option<ValueSd>,
    /// Batch capacity, OD units.
    pub batch_capacity: Option<ValueSd>,
    /// Batch μmax, per hour.
    pub batch_mu_max: Option<ValueSd>,
}

/// Runs and judges one culture.
#[must_use]
pub fn run_culture(culture: &ShapeCulture) -> ShapeRun {
    let truth = culture.truth();
    let readings = culture.readings();
    let steps = online::run(EstimatorConfig::new(), MonitorConfig::new(), &readings);
    let alert_h = steps
        .iter()
        .flat_map(|s| s.events.iter())
        .find(|e| matches!(e.event, Event::SaturationAlert { .. }))
        .map(|e| f64::from(e.time_h));
    let alert_lead_h = alert_h.map(|a| truth.t90_h - a);
    let alert_on_time = alert_lead_h.is_some_and(|l| (0.0..=ON_TIME_WINDOW_H).contains(&l));
    let last = steps.last().and_then(|s| s.estimate);
    let vs = |m: plateau::Measured<f32>| ValueSd {
        value: f64::from(m.value),
        sd: f64::from(m.sd),
    };
    let origin_h = readings.first().map_or(0.0, |r| r.0);
    let batch = batch_fit(&batch_family(origin_h), &readings);
    ShapeRun {
        culture: *culture,
        truth,
        readings: readings.len(),
        alert_h,
        alert_lead_h,
        alert_on_time,
        capacity_published: last.is_some_and(|e| e.capacity.is_some()),
        online_capacity: last.map(|e| vs(e.capacity.unwrap_or_else(|| e.capacity_unchecked()))),
        online_mu_max: last.map(|e| vs(e.rate_per_h)),
        batch_capacity: batch.map(|b| b.0),
        batch_mu_max: batch.map(|b| b.1),
    }
}

/// Accuracy of one quantity over a set of cultures: relative RMS error and
/// 95 % interval coverage (missing estimates count as not covering).
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Accuracy {
    /// Cultures with an estimate.
    pub runs: usize,
    /// Root mean square of estimate / truth − 1.
    pub rms_relative: f64,
    /// Mean of estimate / truth − 1 (the bias).
    pub mean_relative: f64,
    /// Share of all cultures whose value ± 1.96 sd holds the truth.
    pub coverage: f64,
}

fn accuracy(pairs: &[(Option<ValueSd>, f64)]) -> Accuracy {
    let errors: Vec<f64> = pairs
        .iter()
        .filter_map(|(e, t)| e.map(|e| e.value / t - 1.0))
        .collect();
    let covered = pairs
        .iter()
        .filter(|(e, t)| e.is_some_and(|e| (e.value - t).abs() <= 1.96 * e.sd))
        .count();
    let n = errors.len();
    #[allow(clippy::cast_precision_loss)]
    Accuracy {
        runs: n,
        rms_relative: if n == 0 {
            f64::NAN
        } else {
            (errors.iter().map(|e| e * e).sum::<f64>() / n as f64).sqrt()
        },
        mean_relative: if n == 0 {
            f64::NAN
        } else {
            errors.iter().sum::<f64>() / n as f64
        },
        coverage: if pairs.is_empty() {
            f64::NAN
        } else {
            covered as f64 / pairs.len() as f64
        },
    }
}

fn median(v: &mut [f64]) -> f64 {
    if v.is_empty() {
        return f64::NAN;
    }
    v.sort_by(f64::total_cmp);
    let n = v.len();
    if n % 2 == 1 {
        v[n / 2]
    } else {
        0.5 * (v[n / 2 - 1] + v[n / 2])
    }
}

/// The figures of one family (or of all shape streams pooled).
///
/// Units: leads in hours; accuracies relative.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct FamilyFigures {
    /// Cultures.
    pub runs: usize,
    /// Alerts within the window before t90 and not after.
    pub alert_on_time: usize,
    /// Alerts more than the window before t90.
    pub alert_early: usize,
    /// Alerts after t90.
    pub alert_late: usize,
    /// Cultures with no alert.
    pub alert_missing: usize,
    /// Median of t90 − alert over the cultures with an alert, hours.
    pub alert_lead_median_h: f64,
    /// Smallest t90 − alert (the latest alert), hours.
    pub alert_lead_min_h: f64,
    /// Largest t90 − alert (the earliest alert), hours.
    pub alert_lead_max_h: f64,
    /// Cultures whose capacity was not published at the end.
    pub capacity_unpublished: usize,
    /// Online capacity at the end against the capacity above the blank.
    pub capacity_online: Accuracy,
    /// Online rate at the end against the true μmax.
    pub mu_max_online: Accuracy,
    /// Batch capacity against the capacity above the blank.
    pub capacity_batch: Accuracy,
    /// Batch μmax against the true μmax.
    pub mu_max_batch: Accuracy,
}

fn family_figures(runs: &[&ShapeRun]) -> FamilyFigures {
    let mut leads: Vec<f64> = runs.iter().filter_map(|r| r.alert_lead_h).collect();
    let pairs = |f: &dyn Fn(&ShapeRun) -> (Option<ValueSd>, f64)| -> Vec<(Option<ValueSd>, f64)> {
        runs.iter().map(|r| f(r)).collect()
    };
    FamilyFigures {
        runs: runs.len(),
        alert_on_time: runs.iter().filter(|r| r.alert_on_time).count(),
        alert_early: leads.iter().filter(|&&l| l > ON_TIME_WINDOW_H).count(),
        alert_late: leads.iter().filter(|&&l| l < 0.0).count(),
        alert_missing: runs.iter().filter(|r| r.alert_h.is_none()).count(),
        alert_lead_min_h: leads.iter().copied().fold(f64::NAN, f64::min),
        alert_lead_max_h: leads.iter().copied().fold(f64::NAN, f64::max),
        alert_lead_median_h: median(&mut leads),
        capacity_unpublished: runs.iter().filter(|r| !r.capacity_published).count(),
        capacity_online: accuracy(&pairs(&|r| (r.online_capacity, r.truth.capacity_od))),
        mu_max_online: accuracy(&pairs(&|r| (r.online_mu_max, r.truth.mu_max_per_h))),
        capacity_batch: accuracy(&pairs(&|r| (r.batch_capacity, r.truth.capacity_od))),
        mu_max_batch: accuracy(&pairs(&|r| (r.batch_mu_max, r.truth.mu_max_per_h))),
    }
}

/// The figures of one family.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct FamilyReport {
    /// The family.
    pub family: Family,
    /// Its figures.
    pub figures: FamilyFigures,
    /// Alert on time in at least 90 % of its cultures.
    pub alert_target_met: bool,
    /// Capacity and μmax 95 % coverage both at least 80 %.
    pub coverage_target_met: bool,
}

/// Whether the pooled targets are met.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
pub struct TargetsMet {
    /// Every family's alert on time in ≥ 90 % of cultures.
    pub alert_on_time_every_family: bool,
    /// Capacity RMS ≤ 1.5 % over the shape streams.
    pub capacity_rms: bool,
    /// μmax RMS ≤ 6 % over the shape streams.
    pub mu_max_rms: bool,
    /// Every family's coverage ≥ 80 % (capacity and μmax).
    pub coverage_every_family: bool,
}

/// The shape streams' result.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ShapeReport {
    /// Cultures per family.
    pub runs_per_family: usize,
    /// Fleet seed.
    pub seed: u64,
    /// The batch family fitted beside the estimator.
    pub batch_family: &'static str,
    /// Per family, in [`Family::ALL`] order.
    pub families: Vec<FamilyReport>,
    /// All shape streams pooled.
    pub pooled: FamilyFigures,
    /// The targets, met or not.
    pub targets_met: TargetsMet,
    /// Every culture.
    pub cultures: Vec<ShapeRun>,
}

/// Runs `runs_per_family` cultures of every family, in parallel.
#[must_use]
pub fn run(runs_per_family: usize, seed: u64) -> ShapeReport {
    let jobs: Vec<ShapeCulture> = Family::ALL
        .iter()
        .flat_map(|&f| (0..runs_per_family as u64).map(move |i| ShapeCulture::draw(seed, f, i)))
        .collect();
    let cultures: Vec<ShapeRun> = jobs.par_iter().map(run_culture).collect();
    let families: Vec<FamilyReport> = Family::ALL
        .iter()
        .map(|&family| {
            let runs: Vec<&ShapeRun> = cultures
                .iter()
                .filter(|r| r.culture.family == family)
                .collect();
            let figures = family_figures(&runs);
            #[allow(clippy::cast_precision_loss)]
            let on_time = figures.alert_on_time as f64 / figures.runs.max(1) as f64;
            FamilyReport {
                family,
                figures,
                alert_target_met: on_time >= targets::ALERT_ON_TIME_MIN,
                coverage_target_met: figures.capacity_online.coverage >= targets::COVERAGE_MIN
                    && figures.mu_max_online.coverage >= targets::COVERAGE_MIN,
            }
        })
        .collect();
    let all: Vec<&ShapeRun> = cultures.iter().collect();
    let pooled = family_figures(&all);
    let targets_met = TargetsMet {
        alert_on_time_every_family: families.iter().all(|f| f.alert_target_met),
        capacity_rms: pooled.capacity_online.rms_relative <= targets::CAPACITY_RMS_MAX,
        mu_max_rms: pooled.mu_max_online.rms_relative <= targets::MU_MAX_RMS_MAX,
        coverage_every_family: families.iter().all(|f| f.coverage_target_met),
    };
    ShapeReport {
        runs_per_family,
        seed,
        batch_family: batch_family(0.0).name(),
        families,
        pooled,
        targets_met,
        cultures,
    }
}

/// The shape streams as JSON (the value under `shape_streams`).
#[must_use]
pub fn to_json(report: &ShapeReport) -> serde_json::Value {
    let mut v = serde_json::to_value(report).unwrap_or(serde_json::Value::Null);
    if let Some(o) = v.as_object_mut() {
        o.insert(
            "data".into(),
            "INVENTED cultures of published shapes; see host-sim/src/fleet/shapes.rs".into(),
        );
        o.insert(
            "targets".into(),
            serde_json::json!({
                "alert_on_time_min_per_family": targets::ALERT_ON_TIME_MIN,
                "alert_window_h": ON_TIME_WINDOW_H,
                "capacity_rms_max_pooled": targets::CAPACITY_RMS_MAX,
                "mu_max_rms_max_pooled": targets::MU_MAX_RMS_MAX,
                "coverage_min_per_family": targets::COVERAGE_MIN,
            }),
        );
    }
    v
}

fn h2(x: f64) -> String {
    if x.is_finite() {
        format!("{x:.2}")
    } else {
        "-".into()
    }
}

fn mark(met: bool) -> &'static str {
    if met { "met" } else { "MISSED" }
}

/// The shape streams as text tables.
#[must_use]
pub fn render(report: &ShapeReport) -> String {
    let mut s = format!(
        "\nshape streams: {} INVENTED cultures per family (seed {}), a reading every 5 min, \
         noise 0.003 OD + 1 %, default settings (alert 90 %, lead 1 h); batch = weighted \
         least squares of the {} family on all readings\n\
         alert on time = first saturation alert within {ON_TIME_WINDOW_H} h before the true \
         t90 and not after it (target ≥ 90 % per family); lead = t90 − alert, hours\n\n",
        report.runs_per_family, report.seed, report.batch_family
    );
    let _ = writeln!(
        s,
        "{:<16}{:>5}{:>9}{:>7}{:>6}{:>6}{:>9}{:>8}{:>8}  target",
        "family", "runs", "on time", "early", "late", "none", "lead med", "min", "max"
    );
    let line = |s: &mut String, name: &str, f: &FamilyFigures, target: Option<bool>| {
        let _ = writeln!(
            s,
            "{:<16}{:>5}{:>9}{:>7}{:>6}{:>6}{:>9}{:>8}{:>8}  {}",
            name,
            f.runs,
            f.alert_on_time,
            f.alert_early,
            f.alert_late,
            f.alert_missing,
            h2(f.alert_lead_median_h),
            h2(f.alert_lead_min_h),
            h2(f.alert_lead_max_h),
            target.map_or("", mark),
        );
    };
    for fr in &report.families {
        line(
            &mut s,
            fr.family.name(),
            &fr.figures,
            Some(fr.alert_target_met),
        );
    }
    line(&mut s, "all shapes", &report.pooled, None);
    let _ = writeln!(
        s,
        "\nat the end of the run: relative RMS error in % (bias in brackets) and 95 % interval \
         coverage in %, online vs batch;\ncapacity is above the blank, μmax the largest \
         d ln(OD − blank)/dt of the true curve; the online rate is the estimator's published rate_per_h"
    );
    let _ = writeln!(
        s,
        "{:<16}{:>16}{:>8}{:>16}{:>8} | {:>7}{:>7}{:>7}{:>7}  coverage target",
        "family", "K onl", "K bat", "μmax onl", "μ bat", "Kcov o", "Kcov b", "μcov o", "μcov b",
    );
    let acc = |s: &mut String, name: &str, f: &FamilyFigures, target: Option<bool>| {
        let _ = writeln!(
            s,
            "{:<16}{:>16}{:>8}{:>16}{:>8} | {:>7}{:>7}{:>7}{:>7}  {}",
            name,
            format!(
                "{} ({})",
                pct2(f.capacity_online.rms_relative),
                pct2(f.capacity_online.mean_relative)
            ),
            pct2(f.capacity_batch.rms_relative),
            format!(
                "{} ({})",
                pct2(f.mu_max_online.rms_relative),
                pct2(f.mu_max_online.mean_relative)
            ),
            pct2(f.mu_max_batch.rms_relative),
            pct(f.capacity_online.coverage),
            pct(f.capacity_batch.coverage),
            pct(f.mu_max_online.coverage),
            pct(f.mu_max_batch.coverage),
            target.map_or("", mark),
        );
    };
    for fr in &report.families {
        acc(
            &mut s,
            fr.family.name(),
            &fr.figures,
            Some(fr.coverage_target_met),
        );
    }
    acc(&mut s, "all shapes", &report.pooled, None);
    let t = report.targets_met;
    let _ = writeln!(
        s,
        "\ntargets (issue 10): alert on time ≥ 90 % in every family: {}; capacity RMS ≤ 1.5 % \
         over the shape streams: {} ({} %); μmax RMS ≤ 6 %: {} ({} %); 95 % coverage ≥ 80 % in \
         every family: {}; capacity not published at the end: {}/{}",
        mark(t.alert_on_time_every_family),
        mark(t.capacity_rms),
        pct2(report.pooled.capacity_online.rms_relative),
        mark(t.mu_max_rms),
        pct2(report.pooled.mu_max_online.rms_relative),
        mark(t.coverage_every_family),
        report.pooled.capacity_unpublished,
        report.pooled.runs,
    );
    s
}
