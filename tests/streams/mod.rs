//! Invented synthetic OD streams for the estimator tests, seeded and
//! reproducible. The truth is always a closed-form curve from `plateau::model`
//! evaluated in f64; noise is normal with sd = floor + fraction × y (a floor
//! plus a proportional part: common practice for photometers).
#![allow(dead_code, clippy::cast_possible_truncation)]

use plateau::{GrowthCurve, Logistic};
use rand::SeedableRng;
use rand::rngs::StdRng;
use rand_distr::{Distribution, Normal};

/// One reading of a synthetic stream.
#[derive(Clone, Copy, Debug)]
pub struct Reading {
    pub time_h: f64,
    pub value: f64,
    pub truth: f64,
    pub spike: bool,
}

/// The invented reference culture: capacity 1.5 OD, rate 0.7 per hour,
/// midpoint 8 h (start near 0.0055 OD).
pub fn reference_culture() -> Logistic<f64> {
    Logistic::from_midpoint(1.5, 0.7, 8.0).unwrap()
}

/// Settings of a synthetic stream.
#[derive(Clone, Copy, Debug)]
pub struct Stream {
    pub start_h: f64,
    pub end_h: f64,
    pub interval_h: f64,
    pub jitter_h: f64,
    pub floor: f64,
    pub fraction: f64,
    pub blank: f64,
    pub spike_probability: f64,
    pub spike_od: f64,
    pub gap: Option<(f64, f64)>,
}

impl Default for Stream {
    fn default() -> Self {
        Self {
            start_h: 0.0,
            end_h: 20.0,
            interval_h: 5.0 / 60.0,
            jitter_h: 0.0,
            floor: 0.003,
            fraction: 0.01,
            blank: 0.0,
            spike_probability: 0.0,
            spike_od: 0.3,
            gap: None,
        }
    }
}

impl Stream {
    pub fn generate(&self, curve: &impl GrowthCurve<f64>, seed: u64) -> Vec<Reading> {
        let mut rng = StdRng::seed_from_u64(seed);
        let unit = Normal::<f64>::new(0.0, 1.0).unwrap();
        let mut out = Vec::new();
        let mut i = 0_u32;
        loop {
            let mut t = self.start_h + f64::from(i) * self.interval_h;
            i += 1;
            if t > self.end_h {
                break;
            }
            if self.jitter_h > 0.0 {
                t += self.jitter_h * f64::clamp(unit.sample(&mut rng), -2.0, 2.0) / 2.0;
            }
            if self.gap.is_some_and(|(from, to)| t >= from && t < to) {
                continue;
            }
            let truth = curve.value(t);
            let sd = self.floor + self.fraction * truth;
            let mut value = truth + sd * unit.sample(&mut rng) + self.blank;
            let u: f64 = unit.sample(&mut rng);
            let spike = self.spike_probability > 0.0
                && (0.5 * (1.0 + libm::erf(u / core::f64::consts::SQRT_2)))
                    < self.spike_probability;
            if spike {
                value += self.spike_od;
            }
            out.push(Reading {
                time_h: t,
                value: value.max(0.0),
                truth: truth + self.blank,
                spike,
            });
        }
        out
    }
}

/// Feeds a stream to an f32 estimator; returns the estimator.
pub fn run_f32<const N: usize>(
    config: plateau::EstimatorConfig<f32>,
    readings: &[Reading],
) -> plateau::Estimator<f32, N> {
    let mut estimator = plateau::Estimator::<f32, N>::new(config);
    for r in readings {
        estimator.update(r.time_h as f32, r.value as f32);
    }
    estimator
}

/// Feeds a stream to an f32 estimator of the plain logistic; returns it.
pub fn run_logistic_f32<const N: usize>(
    config: plateau::EstimatorConfig<f32>,
    readings: &[Reading],
) -> plateau::LogisticEstimator<f32, N> {
    let mut estimator = plateau::LogisticEstimator::<f32, N>::new(config);
    for r in readings {
        estimator.update(r.time_h as f32, r.value as f32);
    }
    estimator
}

/// The maximum specific growth rate of a logistic read from `t0_h` on: the
/// largest d ln y/dt = r (1 − y/K) over the run, at its first reading
/// (REFERENCES.md: the per-capita rate of the logistic is r (1 − y/K)).
pub fn logistic_mu_max(curve: &Logistic<f64>, t0_h: f64) -> f64 {
    curve.rate_per_h() * (1.0 - curve.value(t0_h) / curve.capacity())
}

/// Cramér–Rao standard deviations of capacity, rate and midpoint for the
/// logistic on the given times with per-reading sd = floor + fraction × y:
/// the inverse of the Fisher information `JᵀWJ`, with the partial derivatives
/// of the logistic listed in the project's REFERENCES.md (Cramér–Rao bound for
/// nonlinear regression with Gaussian noise). Inverted by 3×3 cofactors.
pub fn cramer_rao_sd(curve: &Logistic<f64>, times: &[f64], floor: f64, fraction: f64) -> [f64; 3] {
    let (k, r, tm) = (curve.capacity(), curve.rate_per_h(), curve.midpoint_h());
    let mut a = [[0.0_f64; 3]; 3];
    for &t in times {
        let e = (-r * (t - tm)).exp();
        let f = k / (1.0 + e);
        let sd = floor + fraction * f;
        let g = [
            1.0 / (1.0 + e),
            k * (t - tm) * e / (1.0 + e).powi(2),
            -k * r * e / (1.0 + e).powi(2),
        ];
        for i in 0..3 {
            for j in 0..3 {
                a[i][j] += g[i] * g[j] / (sd * sd);
            }
        }
    }
    let det = a[0][0] * (a[1][1] * a[2][2] - a[1][2] * a[2][1])
        - a[0][1] * (a[1][0] * a[2][2] - a[1][2] * a[2][0])
        + a[0][2] * (a[1][0] * a[2][1] - a[1][1] * a[2][0]);
    let inv00 = (a[1][1] * a[2][2] - a[1][2] * a[2][1]) / det;
    let inv11 = (a[0][0] * a[2][2] - a[0][2] * a[2][0]) / det;
    let inv22 = (a[0][0] * a[1][1] - a[0][1] * a[1][0]) / det;
    [inv00.sqrt(), inv11.sqrt(), inv22.sqrt()]
}
