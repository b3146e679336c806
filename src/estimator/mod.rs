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
//! 1. **History**: at most `N` slots (default 16) of (mean time, first and
//!    last time, mean value, count). When full, a pair of adjacent slots on
//!    the plateau (means within 2 % of the highest, agreeing within noise) is
//!    merged if there is one, else the pair tightest in time. A slot's mean
//!    carries its noise variance divided by its count, and the fit models it
//!    as the curve averaged over its span, so a plateau of days collects in
//!    one slot without washing out the growth phase or biasing the capacity.
//! 2. **Refit**: the logistic y = K / (1 + e^(−r (t − `t_m`))) in
//!    θ = (ln K, ln r, `t_m`), by Levenberg–Marquardt (Levenberg 1944,
//!    Marquardt 1963) on the normal equations, weights count / sd², with
//!    sd = floor + fraction × fitted value (see [`EstimatorConfig`]). Each
//!    accepted reading runs `refit_iterations` iterations from the last
//!    solution. Residuals beyond 3 sd get Huber weights.
//! 3. **Uncertainty**: covariance s²·(JᵀWJ)⁻¹, where s² is the noise scale
//!    learnt from the data — the running mean of the squared standardised
//!    innovations of the last ~64 accepted readings (before that, the
//!    robust residual sum of squares of the slots over slots − 3) — so a
//!    wrong noise floor distorts weights, not the width of the intervals.
//!    The covariance uses the larger of that and the slots' own residual
//!    scale, which grows when the culture is not quite a logistic (merged
//!    slots average noise away but keep systematic misfit): on invented
//!    Gompertz- and Richards-shaped cultures this took the capacity's 95 %
//!    coverage from 0 of 20 to 20 of 20, while clean logistic cultures stay at
//!    93–97 %.
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
//! 6. **Lag** by the tangent construction on the log scale: where the fitted
//!    curve's exponential-phase line meets the starting level (see
//!    [`Estimate::lag_h`]). The logistic has no lag of its own; a lag phase in
//!    the data shows as a later midpoint than the start level implies.
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

mod noise;

pub use config::{DEFAULT_UNKNOWN_BLANK_SD, EstimatorConfig};
pub use estimate::{BlankSource, Estimate, Measured, Outcome, Rejection};

use estimate::widen_by as widen;

use config::{MAX_HELD, NoiseModel};
use fit::{Prior, Sym, panels, robust_sse, saturate};
use history::History;
use noise::NoiseLearner;

use crate::math::{median3, sort_small};
use crate::model::{LagRichards, OnlineFamily};
use crate::{Error, Logistic, Real};

/// Most extra Levenberg–Marquardt iterations per reading while the fit is
/// still moving (see `refit`).
const EXTRA_ITERATIONS: u8 = 6;

/// Readings the innovation-based noise scale averages over (exponential
/// weighting), and the count it needs before it is used.
const INNOVATION_MEMORY: u32 = 64;

/// Accepted readings between two shadow fits (unknown blank).
const SHADOW_EVERY: u32 = 8;
const MIN_INNOVATIONS: u32 = 16;

/// The online growth-curve estimator. `T` is the float type (`f32` on the
/// device), `N` the number of history slots (8 to 255, default 16: with slots modelled as span averages, 16 slots matched the Cramér–Rao bound as well as 32 or 48 in our measurements, see the README),
/// `F` the growth-curve family it fits and `P` that family's parameter count:
/// by default [`LagRichards`] (P = 5: logistic, Richards asymmetry and a
/// Baranyi-type lag); [`LogisticEstimator`] fits the plain logistic (P = 3).
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
/// let config = EstimatorConfig::new().blank(0.0)?;
/// let mut estimator = Estimator::<f32>::new(config);
/// for i in 0..=120 {
///     let t = f64::from(i) / 6.0;
///     let outcome = estimator.update(t as f32, truth.value(t) as f32);
///     assert_eq!(outcome, Outcome::Accepted);
/// }
/// let estimate = estimator.estimate().expect("growth seen");
/// let capacity = estimate.capacity.expect("plateau in sight");
/// assert!((capacity.value - 1.5).abs() < 0.01);
/// // μmax: the largest d ln y/dt of the fitted curve, r (1 − y0/K) for a
/// // logistic read from t = 0.
/// assert!((estimate.rate_per_h.value - 0.7).abs() < 0.02);
/// // Time to 90 % of capacity: 8 + ln 9 / 0.7 = 11.139 h.
/// let t90 = estimate.time_to_fraction(0.9).unwrap();
/// assert!((t90.value - 11.139).abs() < 0.05);
/// # Ok::<(), plateau::Error>(())
/// ```
#[derive(Clone, Debug)]
pub struct Estimator<
    T: Real = f32,
    const N: usize = 16,
    const P: usize = 5,
    F: OnlineFamily<T, P> = LagRichards<T>,
> {
    config: EstimatorConfig<T>,
    history: History<T, N>,
    /// Clock value (hours) of the first reading since the last restart.
    origin_h: T,
    /// Latest accepted time, hours since origin.
    latest_h: T,
    /// Smallest and largest accepted value above blank since the restart.
    low: T,
    high: T,
    theta: [T; P],
    covariance: Sym<T, P>,
    /// How θ moves per signal unit of a measured blank's error
    /// (`info⁻¹ · JᵀW·1`).
    blank_shift: [T; P],
    /// The shadow fit's θ (unknown blank), and whether it has one.
    shadow_theta: [T; P],
    shadow_ready: bool,
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
    /// Running mean of squared standardised innovations, and how many.
    innovation_z2: T,
    innovations: u32,
    /// Accepted readings since the last full refit.
    since_refit: u8,
    /// The curve at θ, kept in step with `theta`.
    curve: F,
    /// The noise model in use (learnt from the innovations when
    /// `learn_noise` is on).
    noise: NoiseModel<T>,
    learner: NoiseLearner<T>,
    /// The blank in use, its sd, and the blank phase's running sums.
    blank: T,
    blank_sd: T,
    blank_source: BlankSource,
    blank_count: u32,
    blank_mean: T,
    blank_m2: T,
}

/// The estimator fitting the plain logistic (3 parameters): the family of
/// the Cramér–Rao comparisons, and the cheapest.
pub type LogisticEstimator<T = f32, const N: usize = 16> = Estimator<T, N, 3, Logistic<T>>;

impl<T: Real, const N: usize, const P: usize, F: OnlineFamily<T, P>> Estimator<T, N, P, F> {
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
            theta: [T::ZERO; P],
            covariance: Sym::zero(),
            blank_shift: [T::ZERO; P],
            shadow_theta: [T::ZERO; P],
            shadow_ready: false,
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
            innovation_z2: T::ZERO,
            innovations: 0,
            since_refit: 0,
            curve: F::from_theta(&[T::ZERO; P]),
            noise: config.noise_model(),
            learner: NoiseLearner::new(),
            blank: config.blank,
            blank_sd: config.blank_sd,
            blank_source: if config.blank_known {
                BlankSource::Configured
            } else {
                BlankSource::Unknown
            },
            blank_count: 0,
            blank_mean: T::ZERO,
            blank_m2: T::ZERO,
        }
    }

    /// The configuration.
    #[must_use]
    pub fn config(&self) -> &EstimatorConfig<T> {
        &self.config
    }

    /// Forgets every reading (for a new culture), the blank phase's too;
    /// keeps the configuration.
    pub fn reset(&mut self) {
        *self = Self::new(self.config);
    }

    /// A restart (dilution, clock reset): a new culture in the same vessel,
    /// so the blank (configured or measured) and the learnt noise model stay.
    fn restart(&mut self) {
        let old = core::mem::replace(self, Self::new(self.config));
        self.blank = old.blank;
        self.blank_sd = old.blank_sd;
        self.blank_source = old.blank_source;
        self.blank_count = old.blank_count;
        self.blank_mean = old.blank_mean;
        self.blank_m2 = old.blank_m2;
        self.noise = old.noise;
        self.learner = old.learner;
    }

    /// Feeds one blank reading: the medium alone, read before inoculation
    /// (signal units). The blank in use becomes the mean of the blank
    /// readings, with its standard error; it replaces a configured blank.
    /// Returns the blank so far.
    ///
    /// # Errors
    /// [`Error::NotFinite`] for a NaN or infinite value;
    /// [`Error::OutOfRange`] (parameter `blank_reading`) once culture
    /// readings have started: a blank phase comes before the culture.
    pub fn blank_reading(&mut self, value: T) -> Result<Measured<T>, Error> {
        let value = crate::error::finite(value, "blank_reading")?;
        if self.accepted > 0 || self.history.len() > 0 {
            return Err(Error::OutOfRange {
                parameter: "blank_reading",
            });
        }
        // Welford's running mean and sum of squares (Welford 1962).
        self.blank_count = self.blank_count.saturating_add(1);
        let n = T::from_u32(self.blank_count);
        let delta = value - self.blank_mean;
        self.blank_mean += delta / n;
        self.blank_m2 += delta * (value - self.blank_mean);
        // The standard error of the mean: from the readings' own spread once
        // there are three, never below the noise model's floor over √n.
        let floor = self.noise.sd(T::ZERO);
        let spread = if self.blank_count >= 3 {
            (self.blank_m2 / (n - T::ONE)).max(T::ZERO).sqrt()
        } else {
            T::ZERO
        };
        self.blank = self.blank_mean;
        self.blank_sd = spread.max(floor) / n.sqrt();
        self.blank_source = BlankSource::Measured;
        Ok(Measured {
            value: self.blank,
            sd: self.blank_sd,
        })
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
        // Near the blank, noise legitimately reads a little below it; only a
        // value further below than the gate allows for noise is invalid.
        let below = self.config.gate_sigma * self.noise.sd(T::ZERO);
        if value < self.blank - below {
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
            self.restart();
            self.origin_h = time_h;
            self.accept(T::ZERO, value - self.blank, None);
            return Outcome::Restarted;
        }
        self.behind = 0;
        let y = value - self.blank;

        // With a fit, the model is evaluated once here and shared by the gate,
        // the noise trackers and the recursive step.
        let fitted = self.fitted.then(|| {
            let (f, g, _) = self.curve.eval(t);
            (f, g, self.covariance.quadratic(&g).max(T::ZERO))
        });
        let prediction = match fitted {
            Some((f, _, fit_var)) => {
                let noise = self.noise.sd(f) * self.noise_scale2.max(T::ONE).sqrt();
                Some((f, noise * noise + fit_var))
            }
            None => self.early_prediction(t),
        };
        if let Some((predicted, var)) = prediction {
            let innovation = y - predicted;
            if innovation * innovation > self.config.gate_sigma * self.config.gate_sigma * var {
                return self.hold(t, y, innovation, predicted);
            }
        }
        self.held_len = 0;
        if let Some((f, _, fit_var)) = fitted {
            let sd = self.noise.sd(f);
            self.track_innovation(y - f, fit_var, sd);
            // Only a fit that has placed the capacity: before that the
            // innovations carry the fit's own misfit.
            if self.config.learn_noise && self.capacity_published() {
                let e = y - f;
                let cap = T::from_f64(9.0) * self.noise_scale2.max(T::ONE) * sd * sd;
                self.learner
                    .observe(f, (e * e - fit_var).max(T::ZERO), sd * sd, cap);
            }
        }
        self.accept(t, y, fitted.map(|(f, g, _)| (f, g)));
        Outcome::Accepted
    }

    /// Running mean of squared standardised innovations of accepted readings:
    /// (e² − gᵀPg) / sd², whose expectation is the noise scale² (the fit's
    /// own variance gᵀPg removed), each capped as explained below. Exponentially weighted over about the last
    /// 64 readings, it estimates the noise scale from many more readings
    /// than the history has slots.
    fn track_innovation(&mut self, e: T, fit_var: T, sd: T) {
        let z2 = (e * e - fit_var).max(T::ZERO) / (sd * sd);
        if !z2.is_finite() {
            return;
        }
        // Each reading's share is capped at 9 × the current scale² (a
        // 3-sd residual), so a few odd readings that pass the gate cannot
        // inflate the scale and widen the gate for more: with a fraction p
        // of such readings the scale² settles at (1 − p)/(1 − 9p), not ∞ for
        // p < 1/9. Cost on clean data: E[min(Z², 9)] = 0.995.
        let z2 = z2.min(T::from_f64(9.0) * self.noise_scale2.max(T::from_f64(0.01)));
        self.innovations = self.innovations.saturating_add(1);
        let n = T::from_u32(self.innovations.min(INNOVATION_MEMORY));
        self.innovation_z2 += (z2 - self.innovation_z2) / n;
    }

    /// Before the first fit: the predicted value above blank at `t` (hours
    /// since origin) — the median of the last three accepted values — and
    /// the variance of a reading about it, allowing growth (or decay) at up
    /// to `max_rate_per_h` since the latest accepted reading; `None` before
    /// three readings. (With a fit, `update` predicts from the fitted curve,
    /// with the noise model scaled by the learnt noise scale — never below
    /// the configured one — plus the fit's own uncertainty.)
    fn early_prediction(&self, t: T) -> Option<(T, T)> {
        if self.accepted < 3 {
            return None;
        }
        let median = median3(self.recent);
        let noise = self.noise.sd(median);
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
            self.restart();
            self.origin_h = origin;
            for k in 0..run {
                self.accept(times[k] - first, values[k], None);
            }
            return Outcome::Restarted;
        }
        // Consistent readings the model did not expect: the model must move.
        for k in 0..run {
            let (ht, hv) = (self.held_time_h[k], self.held_value[k]);
            self.accept(ht, hv, None);
        }
        self.damping = T::from_f64(1e-3);
        // A young fit (no capacity yet) that the culture ran away from is
        // started again from the data, as the first fit was.
        if self.fitted && !self.capacity_published() {
            self.fitted = false;
            self.try_first_fit();
        }
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
        sort_small(values);
        let median = values[run / 2];
        let span_h = self.held_time_h[run - 1] - self.held_time_h[0];
        let growth = (self.config.max_rate_per_h * span_h.max(T::ZERO)).exp();
        let band = self.config.gate_sigma * self.noise.sd(median);
        values
            .iter()
            .all(|&v| v >= median / growth - band && v <= median * growth + band)
    }

    /// Takes a reading into the history and updates the fit. `model_at_t`
    /// is the fitted value and gradient at `t` when the caller has them.
    fn accept(&mut self, t: T, y: T, model_at_t: Option<(T, [T; P])>) {
        let noise = self.noise;
        self.history.push(t, y, |v| noise.sd(v));
        self.latest_h = self.latest_h.max(t);
        let slot = usize::try_from(self.accepted % 3).unwrap_or(0);
        self.recent[slot] = y;
        self.accepted = self.accepted.saturating_add(1);
        if self.accepted == 3 {
            self.first_median = median3(self.recent);
        }
        if y > T::ZERO {
            self.low = self.low.min(y);
        }
        self.high = self.high.max(y);
        if self.config.learn_noise && self.fitted {
            self.noise = self.learner.model(&self.config.noise_model(), self.high);
        }
        if !self.fitted {
            self.try_first_fit();
        } else if self.since_refit.saturating_add(1) >= self.config.refit_every
            || !self.capacity_published()
            || !self.recursive_step(t, y, model_at_t)
        {
            self.since_refit = 0;
            self.refit(self.config.refit_iterations);
        } else {
            self.since_refit = self.since_refit.saturating_add(1);
        }
    }

    /// Between refits (when `refit_every` > 1): one extended-Kalman-filter
    /// measurement update of the static parameters with this reading —
    /// K = P g / (gᵀ P g + R), θ ← θ + K e, P ← P − K gᵀ P (Kalman 1960;
    /// the parameters do not move between readings, so there is no predict
    /// step). The next refit re-linearises over the whole history. Returns
    /// false, leaving the state unchanged, if the reading is surprising
    /// (innovation beyond 3 sd) or the update is not numerically sound; the
    /// caller then refits at once.
    fn recursive_step(&mut self, t: T, y: T, model_at_t: Option<(T, [T; P])>) -> bool {
        let (f, g) = model_at_t.unwrap_or_else(|| {
            let (f, g, _) = self.curve.eval(t);
            (f, g)
        });
        let noise = self.noise.sd(f);
        let r = noise * noise * self.noise_scale2;
        let pg = self.covariance.times(&g);
        let mut innovation_var = r;
        for i in 0..P {
            innovation_var += g[i] * pg[i];
        }
        if !(innovation_var > T::ZERO) || !innovation_var.is_finite() {
            return false;
        }
        let e = y - f;
        // A surprising reading (beyond 3 sd) may mean the linearisation is
        // off — after a gap, a lag ending, a spike the gate let through:
        // leave it to a full, robust refit.
        if e * e > T::from_f64(9.0) * innovation_var {
            return false;
        }
        let mut step = [T::ZERO; P];
        for i in 0..P {
            step[i] = pg[i] * e / innovation_var;
        }
        F::limit_step(&mut step, &self.theta);
        let mut theta = self.theta;
        for i in 0..P {
            theta[i] += step[i];
        }
        F::clamp(&mut theta, self.ln_rate_max());
        let covariance = self.covariance.minus_outer(&pg, T::ONE / innovation_var);
        if !covariance.is_positive_definite() {
            return false;
        }
        self.theta = theta;
        self.curve = F::from_theta(&theta);
        self.covariance = covariance;
        true
    }

    fn prior(&self) -> Prior<T, P> {
        let (mean, info) = F::prior(self.high.max(T::EPSILON));
        Prior { mean, info }
    }

    /// Upper bound of the fitted ln rate: four times `max_rate_per_h`. Without
    /// it a first fit to a lag phase and a couple of rising readings can
    /// settle on a near-step (r in the hundreds per hour), where the
    /// gradients vanish and no refit can leave.
    fn ln_rate_max(&self) -> T {
        (T::from_f64(4.0) * self.config.max_rate_per_h).ln()
    }

    fn try_first_fit(&mut self) {
        let n = self.history.len();
        // Growth seen: the median of the latest three readings over the
        // median of the first three (medians, so one spike cannot fake it),
        // or over the noise floor when the culture started below it.
        // The growth must also stand out of the noise: five noise sds above
        // the start, so a noisy start near the floor cannot fake it.
        let floor = self.noise.sd(T::ZERO);
        let start = self.first_median.max(floor);
        let now = median3(self.recent);
        if n < usize::from(self.config.min_readings)
            || !(now > self.config.min_growth_ratio * start)
            || !(now - start > T::from_f64(5.0) * self.noise.sd(start))
        {
            return;
        }
        // Starting values: slope of ln y against t over the slots clearly
        // above the noise (three noise sds of the slot mean; a logarithm of
        // noise around zero would make any slope), count-weighted least
        // squares, at most `max_rate_per_h`; capacity 4 × the largest reading.
        let (mut sw, mut st, mut sy, mut stt, mut sty) =
            (T::ZERO, T::ZERO, T::ZERO, T::ZERO, T::ZERO);
        for i in 0..n {
            let (t, y, c) = self.history.slot(i);
            let w = T::from_u32(u32::from(c));
            if y > T::from_f64(3.0) * self.noise.sd(y) / w.sqrt() {
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
        rate = rate.min(self.config.max_rate_per_h);
        let k = T::from_f64(4.0) * self.high;
        let (t_last, y_last, _) = self.history.slot(n - 1);
        let y_last = y_last.max(self.low).min(k * T::HALF);
        self.theta = F::start(k, rate, t_last, y_last);
        let ln_rate_max = self.ln_rate_max();
        F::clamp(&mut self.theta, ln_rate_max);
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

    /// Levenberg–Marquardt from `theta` on the history with every slot
    /// value lowered by `offset` (signal units; 0 for the fit itself, the
    /// blank's plausible height for the shadow fit): `iterations` steps,
    /// then up to `EXTRA_ITERATIONS` more while a step still cuts the
    /// objective by over 1 % (after a long gap or a run of surprising
    /// readings): bounded, and cheap once converged. Returns θ, the damping
    /// to start from next time, the normal equations at θ and the squared
    /// standardised slot residuals.
    fn solve(
        &self,
        mut theta: [T; P],
        mut damping: T,
        iterations: u8,
        offset: T,
    ) -> ([T; P], T, fit::Normal<T, P>, [T; N]) {
        let mut weights = [T::ZERO; N];
        let mut z2 = [T::ZERO; N];
        // Each reading starts from a moderate damping: a damping left high by
        // earlier failed trials would otherwise shrink every step below what
        // the objective can resolve, and the fit would freeze.
        damping = damping.min(T::ONE);
        let pass = fit::Pass {
            history: &self.history,
            noise: self.noise,
            prior: self.prior(),
            scale: self.noise_scale2.max(T::from_f64(0.01)).sqrt(),
            offset,
            // Panels are counted once, at the starting θ, for every pass.
            panels: panels::<T, F, P, N>(&self.history, &F::from_theta(&theta)),
        };
        let normal_at = |theta: &[T; P], weights: &mut [T; N], z2: &mut [T; N]| {
            pass.normal::<F>(theta, weights, z2)
        };
        let mut normal = normal_at(&theta, &mut weights, &mut z2);
        let ln_rate_max = self.ln_rate_max();
        let mut moving = true;
        for iteration in 0..iterations.saturating_add(EXTRA_ITERATIONS) {
            if iteration >= 1 && !moving {
                break;
            }
            let current = normal.objective;
            let mut improved = false;
            for _ in 0..4 {
                let Some(mut step) = normal.info.solve(&normal.gradient, damping) else {
                    damping *= T::from_f64(10.0);
                    continue;
                };
                F::limit_step(&mut step, &theta);
                let mut trial = theta;
                for i in 0..P {
                    trial[i] += step[i];
                }
                F::clamp(&mut trial, ln_rate_max);
                let value = pass.objective::<F>(&trial, &weights);
                if value <= current {
                    // Still moving: the step cut the objective by over 1 %
                    // (0.01 % within the configured iterations, which stop
                    // early only once a step changes nothing that matters).
                    let threshold = if iteration < iterations { 1e-4 } else { 0.01 };
                    moving = current - value > T::from_f64(threshold) * current;
                    theta = trial;
                    damping = (damping * T::from_f64(0.3)).max(T::from_f64(1e-6));
                    improved = true;
                    break;
                }
                damping = (damping * T::from_f64(4.0)).min(T::from_f64(1e6));
            }
            if !improved {
                break;
            }
            normal = normal_at(&theta, &mut weights, &mut z2);
        }
        (theta, damping, normal, z2)
    }

    fn refit(&mut self, iterations: u8) {
        let n = self.history.len();
        let (theta, damping, normal, mut z2) =
            self.solve(self.theta, self.damping, iterations, T::ZERO);
        self.theta = theta;
        self.damping = damping;
        // The shadow fit gives a spread, which moves slowly: every
        // SHADOW_EVERY accepted readings is enough, and keeps its cost to a
        // fraction of a refit.
        if !self.shadow_ready || self.accepted.is_multiple_of(SHADOW_EVERY) {
            self.shadow_fit(iterations);
        }
        self.curve = F::from_theta(&self.theta);
        // The slots' own residual scale (robust, over slots − P degrees of
        // freedom), when there are enough slots.
        let slot_s2 = (n > P + 2)
            .then(|| robust_sse(&mut z2[..n]) / T::from_u32(u32::try_from(n - P).unwrap_or(1)))
            .filter(|s2| s2.is_finite());
        // Noise scale: from the innovations once there are enough of them,
        // otherwise from the slot residuals.
        if self.innovations >= MIN_INNOVATIONS && self.innovation_z2 > T::ZERO {
            self.noise_scale2 = self.innovation_z2;
        } else if let Some(s2) = slot_s2.filter(|&s2| s2 > T::ZERO) {
            self.noise_scale2 = s2;
        }
        // The covariance takes the larger of the noise scale and the slots'
        // own residual scale. With the right model they agree; when the curve
        // is not quite the family's shape, the merged slots average the
        // noise away but keep the systematic misfit, and their residual
        // scale grows: the intervals widen honestly.
        let cov_scale2 = slot_s2.map_or(self.noise_scale2, |s2| self.noise_scale2.max(s2));
        if let Some(inverse) = normal.info.inverse() {
            let cov = inverse.scaled(cov_scale2);
            // Keep the last good covariance rather than store one that f32
            // rounding left indefinite.
            if cov.is_positive_definite() {
                self.covariance = cov;
                // A measured blank's error b shifts every reading by b, which
                // moves the fit by b · info⁻¹ · JᵀW·1 (to first order).
                if self.blank_source != BlankSource::Unknown {
                    let shift = inverse.times(&normal.shift);
                    if shift.iter().all(|v| v.is_finite()) {
                        self.blank_shift = shift;
                    }
                }
            }
        }
    }

    /// The shadow fit, when the blank is unknown: the same family fitted to
    /// the readings lowered by the blank's plausible height (see
    /// `blank_height`). How far each published quantity of the shadow curve
    /// lands from the fit's — the secant, not the tangent, because a blank
    /// of the size of the starting level changes the early curve far beyond
    /// first order, and the lag and shape it moves are not linear in it —
    /// is taken as one more standard deviation of that quantity (see
    /// [`Estimate`]). Warm-started from its last solution.
    fn shadow_fit(&mut self, iterations: u8) {
        let height = self.blank_height();
        if self.blank_source != BlankSource::Unknown || !(height > T::ZERO) {
            self.shadow_ready = false;
            return;
        }
        let (start, its) = if self.shadow_ready {
            (self.shadow_theta, iterations)
        } else {
            (self.theta, 16)
        };
        let (theta, _, _, _) = self.solve(start, T::from_f64(1e-3), its, height);
        if theta.iter().all(|v| v.is_finite()) {
            self.shadow_theta = theta;
            self.shadow_ready = true;
        }
    }

    /// The blank's plausible height when it is unknown (signal units):
    /// `unknown_blank_sd`, but at most three quarters of the starting level
    /// (a blank cannot lie above the readings).
    fn blank_height(&self) -> T {
        let start = if self.accepted >= 3 {
            self.first_median
        } else {
            self.low
        };
        if start.is_finite() && start > T::ZERO {
            self.blank_sd.min(T::from_f64(0.75) * start)
        } else {
            T::ZERO
        }
    }

    /// The covariance of θ including a measured blank's uncertainty,
    /// P + `blank_sd`² d dᵀ, d the fit's shift per signal unit of blank
    /// (first order: the blank phase's standard error is small). An unknown
    /// blank is carried by the shadow fit instead.
    fn total_covariance(&self) -> Sym<T, P> {
        if self.blank_source != BlankSource::Measured {
            return self.covariance;
        }
        let weight = self.blank_sd * self.blank_sd;
        let total = self.covariance.plus_outer(&self.blank_shift, weight);
        if total.is_finite() {
            total
        } else {
            self.covariance
        }
    }

    /// Whether the capacity is known well enough to publish: precise enough
    /// (relative sd below `capacity_max_rel_sd`) and with a rise from the
    /// starting level that stands out of the noise (ten noise sds) — a
    /// "plateau" within a few sds of the start is a fit to noise. Until then
    /// the estimator also refits at every reading, whatever `refit_every`
    /// says: the recursive step between refits is only trusted once the
    /// curve is pinned down (before that it is the textbook extended Kalman
    /// filter that runs away).
    fn capacity_published(&self) -> bool {
        if !self.fitted {
            return false;
        }
        // Compared as variances: no square root on the reading path.
        let limit = self.config.capacity_max_rel_sd;
        if !(self.covariance.get(0, 0) < limit * limit) {
            return false;
        }
        let k = self.curve.capacity();
        let start = self.first_median.max(self.noise.sd(T::ZERO));
        k - start > T::from_f64(10.0) * self.noise.sd(k)
    }

    /// The current estimate, or `None` before the readings show growth.
    #[must_use]
    pub fn estimate(&self) -> Option<Estimate<T, P, F>> {
        if !self.fitted {
            return None;
        }
        let theta = self.theta;
        let cov = self.total_covariance();
        let curve = self.curve;
        let shadow = self
            .shadow_ready
            .then(|| (F::from_theta(&self.shadow_theta), self.blank_height()));
        let measured = |value: T, g: &[T; P]| Measured {
            value,
            sd: saturate(cov.sd_along(g)),
        };
        let k = curve.capacity();
        let mut g_k = [T::ZERO; P];
        g_k[0] = k;
        let capacity = widen(measured(k, &g_k), shadow.map(|(c, _)| c.capacity() - k));
        let published = self.capacity_published();
        let (rate, g_rate, _) = curve.max_specific_rate(&theta);
        let rate = if rate > T::ZERO { rate } else { T::EPSILON };
        let statistical = widen(
            measured(rate, &g_rate),
            shadow.map(|(c, _)| c.max_specific_rate(&self.shadow_theta).0 - rate),
        );
        let form = T::from_f64(F::RATE_FORM_REL_SD) * rate;
        let rate_per_h = Measured {
            value: rate,
            sd: saturate((statistical.sd * statistical.sd + form * form).sqrt()),
        };
        let doubling = T::LN_2 / rate;
        let doubling_time_h = Measured {
            value: doubling,
            sd: saturate(doubling / rate * rate_per_h.sd),
        };
        let (t_infl, g_infl) = curve.inflection(&theta);
        let inflection = widen(
            measured(t_infl + self.origin_h, &g_infl),
            shadow.map(|(c, _)| c.inflection(&self.shadow_theta).0 - t_infl),
        );
        let lag = curve
            .tangent_lag(&theta)
            .map(|(value, g)| {
                let spread = shadow
                    .and_then(|(c, _)| c.tangent_lag(&self.shadow_theta).map(|(l, _)| l - value));
                let lag = widen(measured(value, &g), spread);
                // One sd along the lag parameter, re-solved (see
                // `OnlineFamily::LAG_INDEX`), when that says more.
                let along = F::LAG_INDEX.and_then(|i| {
                    let mut moved = theta;
                    moved[i] += cov.get(i, i).max(T::ZERO).sqrt();
                    F::from_theta(&moved)
                        .tangent_lag(&moved)
                        .map(|(l, _)| (l - value).abs())
                        .filter(|d| d.is_finite())
                });
                match along {
                    Some(d) if d > lag.sd => Measured {
                        value: lag.value,
                        sd: d,
                    },
                    _ => lag,
                }
            })
            .filter(|m| published && m.value.is_finite());
        let shape = curve.shape().map(|(index, nu)| {
            let mut g = [T::ZERO; P];
            g[index] = nu;
            let spread = shadow.and_then(|(c, _)| c.shape().map(|(_, s)| s - nu));
            widen(measured(nu, &g), spread)
        });
        let (f, g, _) = curve.eval(self.latest_h);
        Some(Estimate {
            capacity: published.then_some(capacity),
            rate_per_h,
            doubling_time_h,
            inflection_time_h: published.then_some(inflection),
            lag_h: lag,
            shape,
            fitted_value: Measured {
                value: f + self.blank,
                sd: saturate(cov.sd_along(&g)),
            },
            latest_time_h: self.latest_h + self.origin_h,
            noise_scale: self.noise_scale2.sqrt(),
            noise_floor: self.noise.floor,
            noise_fraction: self.noise.fraction,
            readings: self.accepted,
            theta,
            covariance: cov,
            origin_h: self.origin_h,
            blank: self.blank,
            blank_sd: self.blank_sd,
            blank_source: self.blank_source,
            curve,
            shadow,
        })
    }
}
