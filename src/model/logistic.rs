//! The plain logistic curve on the measured signal.

use super::online::{sigmoid, slot_width, softplus};
use super::{GrowthCurve, Inflection, OnlineFamily};
use crate::error::{finite, positive};
use crate::{Error, Real};

/// The logistic curve y(t) = K / (1 + e^(−r (t − `t_m`))) = K / (1 + B e^(−r t)).
///
/// Stored as capacity K, rate r and midpoint `t_m`; the other common forms
/// (K, r, initial value y0 at t = 0) and (K, r, B) convert losslessly:
/// B = e^(r `t_m`) = (K − y0) / y0.
///
/// Units: capacity and values in signal units (OD, counts, ...); rate per hour;
/// times in hours.
///
/// # Examples
///
/// ```
/// use plateau::{GrowthCurve, Logistic};
/// // Invented culture: K = 2 OD, r = 0.8 per hour, starting at 0.02 OD.
/// let c = Logistic::<f64>::from_initial(2.0, 0.8, 0.02)?;
/// assert!((c.b() - 99.0).abs() < 1e-12);
/// assert!((c.value(0.0) - 0.02).abs() < 1e-12);
/// assert!((c.inflection().value - 1.0).abs() < 1e-12);
/// assert!((c.max_slope() - 0.8 * 2.0 / 4.0).abs() < 1e-12);
/// # Ok::<(), plateau::Error>(())
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Logistic<T> {
    capacity: T,
    rate_per_h: T,
    midpoint_h: T,
}

impl<T: Real> Logistic<T> {
    /// From capacity K (signal units), rate r (per hour) and midpoint `t_m` (hours).
    ///
    /// # Errors
    ///
    /// `capacity` and `rate_per_h` must be finite and positive, `midpoint_h`
    /// finite.
    #[doc(alias = "K")]
    pub fn from_midpoint(capacity: T, rate_per_h: T, midpoint_h: T) -> Result<Self, Error> {
        Ok(Self {
            capacity: positive(capacity, "capacity")?,
            rate_per_h: positive(rate_per_h, "rate_per_h")?,
            midpoint_h: finite(midpoint_h, "midpoint_h")?,
        })
    }

    /// From capacity K, rate r and the value y0 at t = 0 (0 < y0 < K).
    ///
    /// # Errors
    ///
    /// As [`from_midpoint`](Self::from_midpoint); `initial` must be positive
    /// and below `capacity` ([`Error::OutOfRange`]).
    pub fn from_initial(capacity: T, rate_per_h: T, initial: T) -> Result<Self, Error> {
        let capacity = positive(capacity, "capacity")?;
        let initial = positive(initial, "initial")?;
        if initial >= capacity {
            return Err(Error::OutOfRange {
                parameter: "initial",
            });
        }
        let b = (capacity - initial) / initial;
        Self::from_b(capacity, rate_per_h, b)
    }

    /// From capacity K, rate r and the shape constant B = (K − y0) / y0.
    ///
    /// # Errors
    ///
    /// As [`from_midpoint`](Self::from_midpoint); `b` must be finite and
    /// positive.
    pub fn from_b(capacity: T, rate_per_h: T, b: T) -> Result<Self, Error> {
        let rate_per_h = positive(rate_per_h, "rate_per_h")?;
        let b = positive(b, "b")?;
        Self::from_midpoint(capacity, rate_per_h, b.ln() / rate_per_h)
    }

    /// Capacity K, signal units.
    #[doc(alias = "K")]
    pub fn capacity(&self) -> T {
        self.capacity
    }

    /// Rate r, per hour.
    #[doc(alias = "r")]
    pub fn rate_per_h(&self) -> T {
        self.rate_per_h
    }

    /// Midpoint (inflection) time `t_m`, hours.
    pub fn midpoint_h(&self) -> T {
        self.midpoint_h
    }

    /// The constant B = e^(r `t_m`).
    #[doc(alias = "B")]
    pub fn b(&self) -> T {
        (self.rate_per_h * self.midpoint_h).exp()
    }

    /// The value at t = 0, K / (1 + B).
    #[doc(alias = "y0")]
    pub fn initial_value(&self) -> T {
        self.value(T::ZERO)
    }

    /// The time, hours, from 10 % to 90 % of capacity: ln 81 / r.
    pub fn rise_time_10_90_h(&self) -> T {
        T::from_f64(81.0).ln() / self.rate_per_h
    }
}

impl<T: Real> GrowthCurve<T> for Logistic<T> {
    fn value(&self, t_h: T) -> T {
        let e = (-self.rate_per_h * (t_h - self.midpoint_h)).exp();
        self.capacity / (T::ONE + e)
    }

    fn slope(&self, t_h: T) -> T {
        let y = self.value(t_h);
        self.rate_per_h * y * (T::ONE - y / self.capacity)
    }

    fn lower_asymptote(&self) -> T {
        T::ZERO
    }

    fn upper_asymptote(&self) -> T {
        self.capacity
    }

    fn inflection(&self) -> Inflection<T> {
        Inflection {
            time_h: self.midpoint_h,
            value: self.capacity * T::HALF,
        }
    }

    fn max_specific_rate_per_h(&self) -> T {
        self.rate_per_h
    }

    fn early_exponential(&self, t_h: T) -> T {
        self.capacity * (self.rate_per_h * (t_h - self.midpoint_h)).exp()
    }

    fn early_exponential_relative_error(&self, t_h: T) -> T {
        // (K e^x) / (K / (1 + e^-x)) − 1 = e^x, x = r (t − t_m).
        (self.rate_per_h * (t_h - self.midpoint_h)).exp()
    }

    fn max_slope(&self) -> T {
        self.rate_per_h * self.capacity / T::from_f64(4.0)
    }

    fn lag_h(&self) -> T {
        self.midpoint_h - T::TWO / self.rate_per_h
    }

    /// Closed form: `t_m` + ln(level / (K − level)) / r.
    fn time_to_reach(&self, level: T) -> Result<T, Error> {
        let level = finite(level, "level")?;
        if level <= T::ZERO || level >= self.capacity {
            return Err(Error::LevelNotReached);
        }
        Ok(self.midpoint_h + (level / (self.capacity - level)).ln() / self.rate_per_h)
    }
}

/// The logistic as an online family: θ = (ln K, ln r, `t_m`), y = K·s(r (t − `t_m`))
/// with s the logistic sigmoid. Its slot average is exact (softplus closed
/// form), and its rate r is the maximum per-capita rate, reached at low
/// density. This is the family of the estimator's Cramér–Rao comparisons.
impl<T: Real> OnlineFamily<T, 3> for Logistic<T> {
    const NAME: &'static str = "logistic";

    fn from_theta(theta: &[T; 3]) -> Self {
        Self {
            capacity: theta[0].exp(),
            rate_per_h: theta[1].exp(),
            midpoint_h: theta[2],
        }
    }

    /// Gradient: ∂f/∂ln K = f, ∂f/∂ln r = K s(1 − s) x, ∂f/∂`t_m` = −K r s(1 − s),
    /// x = r (t − `t_m`); curvature f'' = r² f (1 − s)(1 − 2s).
    fn eval(&self, t_h: T) -> (T, [T; 3], T) {
        // Beyond |x| = 100 the sigmoid is saturated to far below f64
        // precision (e^−100 ≈ 4e−44), so clamping changes no value; it keeps
        // x finite for a time far from the midpoint (e.g. a reading at
        // t = 3e38 h), where x·s(1 − s) was ∞·0 = NaN in the gradient.
        let (k, r) = (self.capacity, self.rate_per_h);
        let x = (r * (t_h - self.midpoint_h)).clamp_to(T::from_f64(-100.0), T::from_f64(100.0));
        let s = sigmoid(x);
        let q = s * (T::ONE - s);
        let f = k * s;
        let curvature = r * r * f * (T::ONE - s) * (T::ONE - T::TWO * s);
        (f, [f, k * q * x, -k * r * q], curvature)
    }

    fn specific_rate_per_h(&self, t_h: T) -> T {
        let x = self.rate_per_h * (t_h - self.midpoint_h);
        self.rate_per_h * (T::ONE - sigmoid(x))
    }

    fn time_scale_h(&self) -> T {
        T::ONE / self.rate_per_h
    }

    fn capacity(&self) -> T {
        self.capacity
    }

    fn time_to_level(&self, level: T) -> Option<T> {
        (level > T::ZERO && level < self.capacity)
            .then(|| self.midpoint_h + (level / (self.capacity - level)).ln() / self.rate_per_h)
    }

    /// r, the supremum of the per-capita rate r (1 − y/K) (approached at low
    /// density; reported at t = 0).
    fn max_specific_rate(&self, _theta: &[T; 3]) -> (T, [T; 3], T) {
        let r = self.rate_per_h;
        (r, [T::ZERO, r, T::ZERO], T::ZERO)
    }

    /// The logistic has no lag of its own.
    fn tangent_lag(&self, _theta: &[T; 3]) -> Option<(T, [T; 3])> {
        None
    }

    fn inflection(&self, _theta: &[T; 3]) -> (T, [T; 3]) {
        (self.midpoint_h, [T::ZERO, T::ZERO, T::ONE])
    }

    fn start(capacity: T, rate_per_h: T, time_h: T, value: T) -> [T; 3] {
        [
            capacity.ln(),
            rate_per_h.ln(),
            time_h + (capacity / value - T::ONE).ln() / rate_per_h,
        ]
    }

    /// ln K ~ N(ln(2 y_max), 2²): a factor of e² ≈ 7.4 either way. It only
    /// matters while the data cannot place the capacity (before the
    /// inflection), where it keeps the fit off the ridge K → ∞.
    fn prior(y_max: T) -> ([T; 3], [T; 3]) {
        (
            [(T::TWO * y_max).ln(), T::ZERO, T::ZERO],
            [T::from_f64(0.25), T::ZERO, T::ZERO],
        )
    }

    /// ln K within ±80 (any unit a user may pick), r between 1e-4 per hour
    /// and `exp(ln_rate_max)` (at most 1e3 per hour), midpoint within
    /// ±1e6 h of the origin.
    fn clamp(theta: &mut [T; 3], ln_rate_max: T) {
        let big = T::from_f64(80.0);
        theta[0] = theta[0].clamp_to(-big, big);
        theta[1] = theta[1].clamp_to(T::from_f64(-9.2), ln_rate_max.min(T::from_f64(6.9)));
        let span = T::from_f64(1.0e6);
        theta[2] = theta[2].clamp_to(-span, span);
    }

    /// ln K and ln r by at most 1, `t_m` by at most 3 / r.
    fn limit_step(step: &mut [T; 3], theta: &[T; 3]) {
        let one = T::ONE;
        step[0] = step[0].clamp_to(-one, one);
        step[1] = step[1].clamp_to(-one, one);
        let tm_limit = T::from_f64(3.0) / theta[1].exp();
        step[2] = step[2].clamp_to(-tm_limit, tm_limit);
    }

    /// Exact however wide the slot. With x = r (t − `t_m`) and the softplus
    /// L(x) = ln(1 + eˣ), whose derivative is the sigmoid s(x):
    /// `f̄ = K (L(xb) − L(xa)) / (xb − xa)`,
    /// `∂f̄/∂ln K = f̄`, `∂f̄/∂t_m = K r (sa − sb) / (xb − xa)`,
    /// `∂f̄/∂ln r = K (sb xb − sa xa − (L(xb) − L(xa))) / (xb − xa)`.
    /// Slots narrower than 1 in x use the second-order expansion about their
    /// mean time instead (one `exp`, and no loss of precision to the
    /// difference of two softplus values).
    /// Always 1: the slot average below is exact.
    fn panels(&self, _mean_h: T, _first_h: T, _last_h: T, _count: u16) -> u8 {
        1
    }

    fn slot(&self, mean_h: T, first_h: T, last_h: T, count: u16, _panels: u8) -> (T, [T; 3]) {
        let width = slot_width(first_h, last_h, count);
        let (k, r) = (self.capacity, self.rate_per_h);
        let xa = r * (mean_h - width * T::HALF - self.midpoint_h);
        let xb = r * (mean_h + width * T::HALF - self.midpoint_h);
        let width_x = xb - xa;
        if !(width_x > T::ONE) {
            let (f, g, curvature) = self.eval(mean_h);
            let var_t = width * width / T::from_f64(12.0);
            return (f + T::HALF * curvature * var_t, g);
        }
        let (la, sa) = softplus(xa);
        let (lb, sb) = softplus(xb);
        let d = lb - la;
        let f = k * d / width_x;
        let d_tm = k * r * (sa - sb) / width_x;
        let d_ln_r = k * (sb * xb - sa * xa - d) / width_x;
        (f, [f, d_ln_r, d_tm])
    }
}
