//! Learning the noise model's split between floor and proportional part
//! from the innovations, so the weights fit any instrument and unit.
//!
//! The variance of a reading at fitted level f is modelled for learning as
//! α + β f² (a floor and a part proportional to the signal, combined in
//! quadrature, common practice for photometers). Each accepted reading with
//! a fit gives e² − gᵀPg, whose expectation is that variance; α and β are
//! found by exponentially forgetting least squares of e²/V on (1/V, f²/V),
//! V the variance the current model predicts (so each reading counts by its
//! precision), with a small ridge towards the configured split so that a
//! direction the data do not inform (all readings on a plateau) stays
//! there. Only the split is taken from the fit — the ratio √α : √β, scaled
//! so that the model gives the configured sd at the largest reading — and
//! the overall level stays with the noise scale, which is learnt from the
//! innovations anyway: a learner that also set the level fed back into the
//! gate and ran away on misfit (found on invented sharp-shouldered
//! cultures, where it learnt a 13 % proportional noise against a true 1 %).

use super::config::NoiseModel;
use crate::Real;

/// Readings the learner remembers (exponential forgetting).
const MEMORY: u32 = 256;
/// Readings before the learnt split is used.
const MIN_READINGS: u32 = 8;
/// Strength of the ridge, in readings of average leverage.
const RIDGE_READINGS: f64 = 2.0;

#[derive(Clone, Copy, Debug)]
pub(crate) struct NoiseLearner<T> {
    /// Σ x xᵀ (upper triangle) and Σ x z, x = (1/V, f²/V), z = e²/V.
    s00: T,
    s01: T,
    s11: T,
    r0: T,
    r1: T,
    count: u32,
}

impl<T: Real> NoiseLearner<T> {
    pub(crate) const fn new() -> Self {
        Self {
            s00: T::ZERO,
            s01: T::ZERO,
            s11: T::ZERO,
            r0: T::ZERO,
            r1: T::ZERO,
            count: 0,
        }
    }

    /// One accepted reading at fitted level `f`: `e2` = e² − gᵀPg (≥ 0),
    /// `var` the variance the current model gives there, `cap` the largest
    /// e² counted (a few odd readings the gate let through must not move the
    /// model far).
    pub(crate) fn observe(&mut self, f: T, e2: T, var: T, cap: T) {
        if !(var > T::ZERO) || !e2.is_finite() || !f.is_finite() {
            return;
        }
        let x0 = T::ONE / var;
        let x1 = f * f / var;
        let z = e2.min(cap) / var;
        if !(x0.is_finite() && x1.is_finite() && z.is_finite()) {
            return;
        }
        self.count = self.count.saturating_add(1);
        let keep = T::ONE - T::ONE / T::from_u32(self.count.min(MEMORY));
        self.s00 = self.s00 * keep + x0 * x0;
        self.s01 = self.s01 * keep + x0 * x1;
        self.s11 = self.s11 * keep + x1 * x1;
        self.r0 = self.r0 * keep + x0 * z;
        self.r1 = self.r1 * keep + x1 * z;
    }

    /// The noise model to use: `config` until enough readings, then the
    /// learnt split, scaled to give `config`'s sd at `y_ref` (the largest
    /// reading above blank, signal units).
    pub(crate) fn model(&self, config: &NoiseModel<T>, y_ref: T) -> NoiseModel<T> {
        if self.count < MIN_READINGS {
            return *config;
        }
        let n = T::from_u32(self.count.min(MEMORY));
        let ridge = T::from_f64(RIDGE_READINGS) / n;
        let (l0, l1) = (ridge * self.s00, ridge * self.s11);
        // Ridge target: the configured split at the data's own level.
        let level = self.r0 / self.s00.max(T::EPSILON);
        let config_var_ref = config.floor * config.floor
            + config.fraction * config.fraction * y_ref * y_ref;
        let c = if config_var_ref > T::ZERO {
            (level / config_var_ref).max(T::ZERO)
        } else {
            T::ONE
        };
        let (a_t, b_t) = (
            c * config.floor * config.floor,
            c * config.fraction * config.fraction,
        );
        let (a00, a01, a11) = (self.s00 + l0, self.s01, self.s11 + l1);
        let (b0, b1) = (self.r0 + l0 * a_t, self.r1 + l1 * b_t);
        let det = a00 * a11 - a01 * a01;
        if !(det > T::ZERO) || !det.is_finite() {
            return *config;
        }
        let mut alpha = (b0 * a11 - b1 * a01) / det;
        let mut beta = (a00 * b1 - a01 * b0) / det;
        // Non-negative variances: a negative one goes to zero and the other
        // is refitted alone.
        if !(beta > T::ZERO) {
            beta = T::ZERO;
            alpha = b0 / a00;
        } else if !(alpha > T::ZERO) {
            alpha = T::ZERO;
            beta = b1 / a11;
        }
        let (floor, fraction) = (alpha.max(T::ZERO).sqrt(), beta.max(T::ZERO).sqrt());
        // Scale to the configured sd at the reference level; keep a floor
        // of 2 % of it (weights must stay finite near zero signal).
        let sd_ref = config.sd(y_ref);
        let learnt_ref = floor + fraction * y_ref.max(T::ZERO);
        if !(learnt_ref > T::ZERO) || !learnt_ref.is_finite() || !(sd_ref > T::ZERO) {
            return *config;
        }
        let k = sd_ref / learnt_ref;
        let model = NoiseModel {
            floor: (k * floor).max(T::from_f64(0.02) * sd_ref),
            fraction: k * fraction,
        };
        if model.floor.is_finite() && model.fraction.is_finite() {
            model
        } else {
            *config
        }
    }
}
