//! The online estimator: capacity, growth rate and lag from a stream of
//! readings, in fixed memory, with honest uncertainty.
//!
//! # Method
//!
//! A fixed-memory history of the run plus a warm-started weighted
//! least-squares refit at every accepted reading — a moving-horizon estimator
//! whose horizon is the whole run at decreasing resolution (moving-horizon
//! estimation for bioprocesses: Bastin & Dochain, *On-line Estimation and
//! Adaptive Control of Bioreactors*, 1990 [memory]).
//!
//! 1. **History**: at most `N` slots (default 32) of (time, mean value,
//!    count). When full, the adjacent pair with the smallest combined count is
//!    merged. A slot's mean carries its noise variance divided by its count.
//! 2. **Refit**: the logistic y = K / (1 + e^(−r (t − `t_m`))) in
//!    θ = (ln K, ln r, `t_m`), by Levenberg–Marquardt (Levenberg 1944,
//!    Marquardt 1963) on the normal equations, weights count / sd², with
//!    sd = floor + fraction × fitted value (see [`EstimatorConfig`]). Each
//!    accepted reading runs `refit_iterations` iterations from the last
//!    solution. Residuals beyond 3 sd get Huber weights.
//! 3. **Uncertainty**: covariance s²·(JᵀWJ)⁻¹, where s² is the weighted
//!    residual sum of squares over (slots − 3): the noise scale is learnt, so a
//!    wrong noise floor distorts weights, not the width of the intervals.
//! 4. **Gate**: once a fit exists, a reading whose innovation exceeds
//!    `gate_sigma` standard deviations (noise and fit uncertainty together) is
//!    rejected as a spike. The gate never starves the estimator: after
//!    `max_consecutive_rejections` gated readings in a row, they are accepted —
//!    or, if they all sit well below the prediction, taken as a dilution and
//!    the estimator restarts from them.
//! 5. **Before the data can tell**: no fit until the readings show
//!    `min_growth_ratio` (default a doubling) of growth; until then
//!    [`Estimator::estimate`] is `None`. A weak prior on ln K (centred on
//!    twice the largest reading, sd 2 in ln units) keeps the fit off the
//!    K → ∞ ridge during exponential growth, and the capacity is published
//!    only once its relative sd is below `capacity_max_rel_sd`.
//!
//! Why not an extended Kalman filter: on this problem a textbook EKF on
//! (ln y, r, ln K) lets the capacity run away before the inflection, when it
//! is not observable, and its gate then starves it; a refit over the history
//! re-linearises at every reading and reaches the accuracy of a batch fit
//! (the project's planning measurements, recorded in DEVELOPERS.md).
//!
//! # Scale invariance
//!
//! Capacity is fitted in logs and the noise scale is learnt, so any unit
//! works; set the noise floor in the readings' unit (the fraction is unitless).

mod config;
mod estimate;
pub(crate) mod fit;
mod history;

pub use config::EstimatorConfig;
pub use estimate::{Estimate, Measured, Outcome, Rejection};

use config::MAX_HELD;
use fit::{Prior, Sym3, accumulate, clamp_theta, limit_step, model, objective, saturate};
use history::History;

use crate::Real;

/// Most extra Levenberg–Marquardt iterations per reading while the fit is
/// still moving (see `refit`).
const EXTRA_ITERATIONS: u8 = 6;

/// The online growth-curve estimator. `T` is the float type (`f32` on the
/// device), `N` the number of history slots (8 to 255, default 32).
///
/// Memory: fixed, `core::mem::size_of::<Estimator>()` bytes (see the README's
/// footprint table); nothing is allocated.
///
/// # Examples
///
/// ```
/// use plateau::{Estimator, EstimatorConfig, GrowthCurve, Logistic, Outcome};
/// // An invented culture: capacity 1.5 OD, 0.7 per hour, midpoint at 8 h,
/// // read every 10 minutes (noise-free here to keep the example short).
/// let truth = Logistic::<f64>::from_midpoint(1.5, 0.7, 8.0)?;
/// let mut estimator = Estimator::<f32>::new(EstimatorConfig::new());
/// for i in 0..=120 {
///     let t = f64::from(i) / 6.0;
///     let outcome = estimator.update(t as f32, truth.value(t) as f32);
///     assert_eq!(outcome, Outcome::Accepted);
/// }
/// let estimate = estimator.estimate().expect("growth seen");
/// let capacity = estimate.capacity.expect("plateau in sight");
/// assert!((capacity.value - 1.5).abs() < 0.01);
/// assert!((estimate.rate_per_h.value - 0.7).abs() < 0.01);
/// // Time to 90 % of capacity: 8 + ln 9 / 0.7 = 11.139 h.
/// let t90 = estimate.time_to_fraction(0.9).unwrap();
/// assert!((t90.value - 11.139).abs() < 0.05);
/// # Ok::<(), plateau::Error>(())
/// ```
#[derive(Clone, Debug)]
pub struct Estimator<T: Real = f32, const N: usize = 32> {
    config: EstimatorConfig<T>,
    history: History<T, N>,
    /// Clock value (hours) of the first reading since the last restart.
    origin_h: T,
    /// Latest accepted time, hours since origin.
    latest_h: T,
    /// Smallest and largest accepted value above blank since the restart.
    low: T,
    high: T,
    theta: [T; 3],
    covariance: Sym3<T>,
    noise_scale2: T,
    damping: T,
    fitted: bool,
    held_time_h: [T; MAX_HELD],
    held_value: [T; MAX_HELD],
    held_len: u8,
    held_sign: i8,
    accepted: u32,
    /// Readings in a row whose time was behind the latest accepted one.
    behind: u8,
    /// The last three accepted values above blank (ring), for the gate
    /// before the first fit.
    recent: [T; 3],
    /// Median of the first three accepted values above blank.
    first_median: T,
}

impl<T: Real, const N: usize> Estimator<T, N> {
    /// A new estimator with no readings.
    #[must_use]
    pub fn new(config: EstimatorConfig<T>) -> Self {
        Self {
            config,
            history: History::new(),
            origin_h: T::ZERO,
            latest_h: T::ZERO,
            low: T::INFINITY,
            high: T::ZERO,
            theta: [T::ZERO; 3],
            covariance: Sym3::zero(),
            noise_scale2: T::ONE,
            damping: T::from_f64(1e-3),
            fitted: false,
            held_time_h: [T::ZERO; MAX_HELD],
            held_value: [T::ZERO; MAX_HELD],
            held_len: 0,
            held_sign: 0,
            accepted: 0,
            behind: 0,
            recent: [T::ZERO; 3],
            first_median: T::ZERO,
        }
    }

    /// The configuration.
    #[must_use]
    pub fn config(&self) -> &EstimatorConfig<T> {
        &self.config
    }

    /// Forgets every reading (for a new culture); keeps the configuration.
    pub fn reset(&mut self) {
        *self = Self::new(self.config);
    }

    /// Feeds one reading: `time_h` in hours on any clock that does not run
    /// backwards, `value` in signal units (OD units for a photometer).
    ///
    /// A reading earlier than the latest accepted one is rejected
    /// ([`Rejection::TimeBackwards`]); after `max_consecutive_rejections` of
    /// them in a row the clock is taken as reset and the estimator restarts
    /// from the last one ([`Outcome::Restarted`]).
    ///
    /// Never panics, never allocates, takes bounded time, and leaves no NaN in
    /// the state whatever the input.
    pub fn update(&mut self, time_h: T, value: T) -> Outcome {
        if !time_h.is_finite() || !value.is_finite() {
            return Outcome::Rejected(Rejection::NotFinite);
        }
        if value < T::ZERO {
            return Outcome::Rejected(Rejection::Negative);
        }
        if value >= self.config.ceiling {
            return Outcome::Rejected(Rejection::AtCeiling);
        }
        if self.history.len() == 0 {
            self.origin_h = time_h;
        }
        let t = time_h - self.origin_h;
        if t < self.latest_h || !t.is_finite() {
            // A clock that stays behind the latest accepted reading for
            // `max_consecutive_rejections` readings in a row was reset, or
            // that latest time was corrupt (one reading stamped 1e30 h locked
            // the estimator out for good, found by the hardening tests):
            // restart from this reading, as after a dilution.
            self.behind = self.behind.saturating_add(1);
            if self.behind < self.config.max_consecutive_rejections {
                return Outcome::Rejected(Rejection::TimeBackwards);
            }
            *self = Self::new(self.config);
            self.origin_h = time_h;
            self.accept(T::ZERO, value - self.config.blank);
            return Outcome::Restarted;
        }
        self.behind = 0;
        let y = value - self.config.blank;

        if let Some((predicted, var)) = self.prediction(t) {
            let innovation = y - predicted;
            if innovation * innovation > self.config.gate_sigma * self.config.gate_sigma * var {
                return self.hold(t, y, innovation, predicted);
            }
        }
        self.held_len = 0;
        self.accept(t, y);
        Outcome::Accepted
    }

    /// The predicted value above blank at `t` (hours since origin) and the
    /// variance of a reading about it, or `None` when too little is known.
    ///
    /// With a fit: the fitted curve, with the noise model (scaled by the
    /// learnt noise scale, never below the configured one) plus the fit's own
    /// uncertainty. Before the first fit: the median of the last three
    /// accepted values, allowing growth (or decay) at up to `max_rate_per_h`
    /// since the latest accepted reading.
    fn prediction(&self, t: T) -> Option<(T, T)> {
        if self.fitted {
            let (f, g) = model(&self.theta, t);
            let noise = self.config.noise_sd(f) * self.noise_scale2.max(T::ONE).sqrt();
            return Some((
                f,
                noise * noise + self.covariance.quadratic(&g).max(T::ZERO),
            ));
        }
        if self.accepted < 3 {
            return None;
        }
        let median = median3(self.recent);
        let noise = self.config.noise_sd(median);
        let growth = median * ((self.config.max_rate_per_h * (t - self.latest_h)).exp() - T::ONE);
        Some((median, noise * noise + growth * growth))
    }

    /// A gated reading: held back, unless it completes a run.
    fn hold(&mut self, t: T, y: T, innovation: T, predicted: T) -> Outcome {
        let sign: i8 = if innovation > T::ZERO { 1 } else { -1 };
        if self.held_len > 0 && sign != self.held_sign {
            self.held_len = 0;
        }
        self.held_sign = sign;
        let i = usize::from(self.held_len).min(MAX_HELD - 1);
        self.held_time_h[i] = t;
        self.held_value[i] = y;
        self.held_len = u8::try_from(i + 1).unwrap_or(u8::MAX);
        if self.held_len < self.config.max_consecutive_rejections {
            return Outcome::Rejected(Rejection::Spike);
        }
        let run = usize::from(self.held_len);
        if !self.held_consistent(run) {
            // Readings that disagree with each other are not a level the
            // culture moved to but a faulty sensor: drop the oldest and keep
            // holding. Without this a burst of garbage (random and huge
            // values between NaNs) entered the history four at a time and
            // spoilt the fit for the rest of the culture (found by the
            // recovery test, tests/recovery.rs).
            self.held_time_h.copy_within(1..run, 0);
            self.held_value.copy_within(1..run, 0);
            self.held_len = u8::try_from(run - 1).unwrap_or(0);
            return Outcome::Rejected(Rejection::Spike);
        }
        self.held_len = 0;
        // A dilution drops the signal below both the prediction and the last
        // accepted readings; a long gap or a slow decline does neither.
        let level_before = median3(self.recent);
        let diluted = sign < 0
            && y < self.config.dilution_ratio * predicted
            && y < self.config.dilution_ratio * level_before;
        if diluted {
            let (times, values) = (self.held_time_h, self.held_value);
            let first = times[0];
            let origin = self.origin_h + first;
            *self = Self::new(self.config);
            self.origin_h = origin;
            for k in 0..run {
                self.accept(times[k] - first, values[k]);
            }
            return Outcome::Restarted;
        }
        // Consistent readings the model did not expect: the model must move.
        for k in 0..run {
            let (ht, hv) = (self.held_time_h[k], self.held_value[k]);
            self.accept(ht, hv);
        }
        self.damping = T::from_f64(1e-3);
        Outcome::Accepted
    }

    /// True when the first `run` held readings agree with each other: every
    /// one within `gate_sigma` noise sds of their median, after allowing
    /// growth or decay at up to `max_rate_per_h` over the run's time span.
    /// A real shift of level (a dilution, faster growth than the model
    /// expected) passes; a run of random values does not.
    fn held_consistent(&self, run: usize) -> bool {
        let mut sorted = self.held_value;
        let values = &mut sorted[..run];
        for i in 1..run {
            let mut j = i;
            while j > 0 && values[j - 1] > values[j] {
                values.swap(j - 1, j);
                j -= 1;
            }
        }
        let median = values[run / 2];
        let span_h = self.held_time_h[run - 1] - self.held_time_h[0];
        let growth = (self.config.max_rate_per_h * span_h.max(T::ZERO)).exp();
        let band = self.config.gate_sigma * self.config.noise_sd(median);
        values
            .iter()
            .all(|&v| v >= median / growth - band && v <= median * growth + band)
    }

    fn accept(&mut self, t: T, y: T) {
        self.history.push(t, y);
        self.latest_h = self.latest_h.max(t);
        self.recent[usize::try_from(self.accepted % 3).unwrap_or(0)] = y;
        self.accepted = self.accepted.saturating_add(1);
        if self.accepted == 3 {
            self.first_median = median3(self.recent);
        }
        if y > T::ZERO {
            self.low = self.low.min(y);
        }
        self.high = self.high.max(y);
        if self.fitted {
            self.refit(self.config.refit_iterations);
        } else {
            self.try_first_fit();
        }
    }

    fn prior(&self) -> Prior<T> {
        let y_max = self.high.max(T::EPSILON);
        Prior {
            ln_k_mean: (T::TWO * y_max).ln(),
            ln_k_info: T::from_f64(0.25),
        }
    }

    fn try_first_fit(&mut self) {
        let n = self.history.len();
        // Growth seen: the median of the latest three readings over the
        // median of the first three (medians, so one spike cannot fake it),
        // or over the noise floor when the culture started below it.
        // The growth must also stand out of the noise: five noise sds above
        // the start, so a noisy start near the floor cannot fake it.
        let start = self.first_median.max(self.config.noise_floor);
        let now = median3(self.recent);
        if n < usize::from(self.config.min_readings)
            || !(now > self.config.min_growth_ratio * start)
            || !(now - start > T::from_f64(5.0) * self.config.noise_sd(start))
        {
            return;
        }
        // Starting values: slope of ln y against t over the positive slots
        // (count-weighted least squares), capacity 4 × the largest reading.
        let (mut sw, mut st, mut sy, mut stt, mut sty) =
            (T::ZERO, T::ZERO, T::ZERO, T::ZERO, T::ZERO);
        for i in 0..n {
            let (t, y, c) = self.history.slot(i);
            if y > T::ZERO {
                let w = T::from_u32(u32::from(c));
                let ly = y.ln();
                sw += w;
                st += w * t;
                sy += w * ly;
                stt += w * t * t;
                sty += w * t * ly;
            }
        }
        let denom = sw * stt - st * st;
        let mut rate = if denom > T::ZERO {
            (sw * sty - st * sy) / denom
        } else {
            T::ZERO
        };
        if !(rate > T::from_f64(0.05)) {
            rate = T::from_f64(0.05);
        }
        let k = T::from_f64(4.0) * self.high;
        let (t_last, y_last, _) = self.history.slot(n - 1);
        let y_last = y_last.max(self.low);
        let midpoint = t_last + (k / y_last - T::ONE).ln() / rate;
        self.theta = [k.ln(), rate.ln(), midpoint];
        clamp_theta(&mut self.theta);
        self.damping = T::from_f64(1e-2);
        self.fitted = true;
        self.refit(16);
        // No estimate without its uncertainty: if the information matrix
        // could not be inverted (the readings cannot place the curve yet,
        // for example when a huge first reading dwarfs the rest), the first
        // fit did not take and the next reading tries again. Before this
        // check an estimate was published with an all-zero covariance.
        if !self.covariance.is_positive_definite() {
            self.fitted = false;
        }
    }

    fn refit(&mut self, iterations: u8) {
        let prior = self.prior();
        let mut weights = [T::ZERO; N];
        let mut z2 = [T::ZERO; N];
        let n = self.history.len();
        let scale = self.noise_scale2.max(T::from_f64(0.01)).sqrt();
        let mut normal = accumulate(
            &self.history,
            &self.config,
            &self.theta,
            &prior,
            scale,
            &mut weights,
            &mut z2,
        );
        // `iterations` steps, then up to EXTRA_ITERATIONS more while a step
        // still cuts the objective by over 1 % (after a long gap or a run of
        // surprising readings): bounded, and cheap once converged.
        let mut moving = true;
        for iteration in 0..iterations.saturating_add(EXTRA_ITERATIONS) {
            if iteration >= iterations && !moving {
                break;
            }
            let current = objective(&self.history, &self.theta, &prior, &weights);
            let mut improved = false;
            for _ in 0..4 {
                let Some(mut step) = normal.info.solve(&normal.gradient, self.damping) else {
                    self.damping *= T::from_f64(10.0);
                    continue;
                };
                limit_step(&mut step, &self.theta);
                let mut trial = [
                    self.theta[0] + step[0],
                    self.theta[1] + step[1],
                    self.theta[2] + step[2],
                ];
                clamp_theta(&mut trial);
                let value = objective(&self.history, &trial, &prior, &weights);
                if value <= current {
                    moving = current - value > T::from_f64(0.01) * current;
                    self.theta = trial;
                    self.damping = (self.damping * T::from_f64(0.3)).max(T::from_f64(1e-6));
                    improved = true;
                    break;
                }
                self.damping = (self.damping * T::from_f64(4.0)).min(T::from_f64(1e6));
            }
            normal = accumulate(
                &self.history,
                &self.config,
                &self.theta,
                &prior,
                scale,
                &mut weights,
                &mut z2,
            );
            if !improved {
                break;
            }
        }
        // Noise scale from the residuals (slots − 3 degrees of freedom).
        if n > 5 {
            let dof = T::from_u32(u32::try_from(n - 3).unwrap_or(1));
            let s2 = normal.sse / dof;
            if s2.is_finite() && s2 > T::ZERO {
                self.noise_scale2 = s2;
            }
        }
        if let Some(inverse) = normal.info.inverse() {
            let cov = inverse.scaled(self.noise_scale2);
            // Keep the last good covariance rather than store one that f32
            // rounding left indefinite.
            if cov.is_positive_definite() {
                self.covariance = cov;
            }
        }
    }

    /// The current estimate, or `None` before the readings show growth.
    #[must_use]
    pub fn estimate(&self) -> Option<Estimate<T>> {
        if !self.fitted {
            return None;
        }
        let theta = self.theta;
        let cov = self.covariance;
        let k = theta[0].exp();
        let r = theta[1].exp();
        let sd_ln_k = cov.get(0, 0).max(T::ZERO).sqrt();
        let sd_ln_r = cov.get(1, 1).max(T::ZERO).sqrt();
        let capacity = Measured {
            value: k,
            sd: saturate(k * sd_ln_k),
        };
        // Published only when precise enough and when the rise from the
        // starting level to it stands out of the noise (ten noise sds): a
        // "plateau" within a few sds of the start is a fit to noise.
        let start = self.first_median.max(self.config.noise_floor);
        let published = sd_ln_k < self.config.capacity_max_rel_sd
            && k - start > T::from_f64(10.0) * self.config.noise_sd(k);
        let inflection = Measured {
            value: theta[2] + self.origin_h,
            sd: cov.get(2, 2).max(T::ZERO).sqrt(),
        };
        // lag = `t_m` − 2/r: ∂/∂`t_m` = 1, ∂/∂ln r = 2/r.
        let two_over_r = T::TWO / r;
        let lag_sd = cov.sd_along(&[T::ZERO, two_over_r, T::ONE]);
        let lag = Measured {
            value: inflection.value - two_over_r,
            sd: saturate(lag_sd),
        };
        let (f, g) = model(&theta, self.latest_h);
        Some(Estimate {
            capacity: published.then_some(capacity),
            rate_per_h: Measured {
                value: r,
                sd: saturate(r * sd_ln_r),
            },
            doubling_time_h: Measured {
                value: T::LN_2 / r,
                sd: saturate(T::LN_2 / r * sd_ln_r),
            },
            inflection_time_h: published.then_some(inflection),
            lag_end_h: published.then_some(lag),
            fitted_value: Measured {
                value: f + self.config.blank,
                sd: saturate(cov.sd_along(&g)),
            },
            latest_time_h: self.latest_h + self.origin_h,
            noise_scale: self.noise_scale2.sqrt(),
            readings: self.accepted,
            theta,
            covariance: cov,
            origin_h: self.origin_h,
            blank: self.config.blank,
        })
    }
}

/// The median of three values.
fn median3<T: Real>([a, b, c]: [T; 3]) -> T {
    a.max(b).min(a.min(b).max(c))
}
