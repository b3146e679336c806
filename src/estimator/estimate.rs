//! What the estimator publishes: outcomes of readings and the current estimate.

use super::fit::{Sym, saturate};
use crate::Real;
use crate::model::{LagRichards, OnlineFamily};

/// A value with its standard deviation, in the units of the field it sits in.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Measured<T = f32> {
    /// The estimate.
    pub value: T,
    /// Its standard deviation (same unit).
    #[doc(alias = "sigma")]
    pub sd: T,
}

impl<T: Real> Measured<T> {
    /// The 95 % interval `value ± 1.96 sd` (normal approximation).
    ///
    /// # Examples
    /// ```
    /// let m = plateau::Measured { value: 1.0_f32, sd: 0.1 };
    /// let (lo, hi) = m.interval95();
    /// assert!((lo - 0.804).abs() < 1e-6 && (hi - 1.196).abs() < 1e-6);
    /// ```
    #[must_use]
    pub fn interval95(&self) -> (T, T) {
        let half = T::from_f64(1.96) * self.sd;
        (self.value - half, self.value + half)
    }

    /// The relative standard deviation `sd / |value|`.
    #[must_use]
    pub fn relative_sd(&self) -> T {
        self.sd / self.value.abs()
    }
}

/// Why a reading was not taken into the estimate. Nothing is lost silently:
/// the caller gets the reason with every rejected reading.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum Rejection {
    /// Time or value is NaN or infinite.
    NotFinite,
    /// The value lies below the blank by more than noise explains
    /// (`gate_sigma` × `noise_floor`): a negative or otherwise impossible
    /// reading.
    Negative,
    /// The value is at or above the configured sensor ceiling (saturated).
    AtCeiling,
    /// The time is earlier than an accepted reading's.
    TimeBackwards,
    /// Too far from the prediction (innovation gate): a likely bubble or glitch.
    Spike,
}

impl Rejection {
    /// A short lower-case name, for logs and CSV cells.
    #[must_use]
    pub const fn as_str(&self) -> &'static str {
        match self {
            Self::NotFinite => "not_finite",
            Self::Negative => "negative",
            Self::AtCeiling => "at_ceiling",
            Self::TimeBackwards => "time_backwards",
            Self::Spike => "spike",
        }
    }
}

impl core::fmt::Display for Rejection {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// The result of feeding one reading.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Outcome {
    /// Taken into the estimate.
    Accepted,
    /// A run of readings far below the prediction: the culture was diluted
    /// (or the vessel changed). The estimator dropped its history and
    /// restarted from those readings.
    Restarted,
    /// Not taken, with the reason.
    Rejected(Rejection),
}

impl Outcome {
    /// True for `Accepted` and `Restarted`.
    #[must_use]
    pub const fn is_accepted(&self) -> bool {
        !matches!(self, Self::Rejected(_))
    }
}

/// Where the blank the estimator subtracts comes from.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum BlankSource {
    /// Configured ([`EstimatorConfig::blank`](crate::EstimatorConfig::blank)), taken as exact.
    Configured,
    /// Measured in a blank phase ([`Estimator::blank_reading`](crate::Estimator::blank_reading)),
    /// with its standard error.
    Measured,
    /// Not given: 0 is subtracted and the standard deviations include the
    /// spread of an unknown blank
    /// ([`EstimatorConfig::unknown_blank_sd`](crate::EstimatorConfig::unknown_blank_sd)).
    Unknown,
}

impl BlankSource {
    /// A short lower-case name, for logs and CSV cells.
    #[must_use]
    pub const fn as_str(&self) -> &'static str {
        match self {
            Self::Configured => "configured",
            Self::Measured => "measured",
            Self::Unknown => "unknown",
        }
    }
}

/// The current estimate of the growth curve, with standard deviations.
///
/// Units: signal units (OD units for a photometer) for capacity and values,
/// hours for times, per hour for rates. The fitted model is
/// y = blank + f(t), f the estimator's family (by default [`LagRichards`]);
/// standard deviations are by the delta method from the covariance of the
/// family's parameters, which includes the blank's uncertainty.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Estimate<T: Real = f32, const P: usize = 5, F: OnlineFamily<T, P> = LagRichards<T>> {
    /// Carrying capacity above the blank, signal units. `None` while the data
    /// cannot place it (relative sd above the configured limit), typically
    /// during clean exponential growth.
    #[doc(alias = "K")]
    pub capacity: Option<Measured<T>>,
    /// Maximum specific growth rate μmax, per hour: the largest
    /// d ln(y − blank)/dt of the fitted curve from the first reading on (for
    /// the plain logistic, its rate r, approached at low density).
    #[doc(alias = "mu_max")]
    pub rate_per_h: Measured<T>,
    /// Doubling time ln 2 / μmax during exponential growth, hours.
    pub doubling_time_h: Measured<T>,
    /// Inflection time (where the fitted curve is steepest), hours on the
    /// caller's clock; `None` while the capacity is.
    pub inflection_time_h: Option<Measured<T>>,
    /// Lag λ by the tangent construction on ln y (Zwietering et al. 1990;
    /// Baranyi & Roberts 1994): from the first reading since the last
    /// restart to where the tangent to ln(y − blank) at the point of maximum
    /// specific growth rate meets the fitted starting level, hours. A
    /// culture that grows from its first reading has a lag near zero. `None`
    /// while the capacity is, and for a family without a lag (the plain
    /// logistic).
    #[doc(alias = "lambda")]
    pub lag_h: Option<Measured<T>>,
    /// The fitted shape, Richards' ν (unitless): 1 for a symmetric logistic,
    /// towards 0 for a slow, Gompertz-like shoulder, above 1 for a sharp one.
    /// `None` for a family without one.
    #[doc(alias = "nu")]
    pub shape: Option<Measured<T>>,
    /// The fitted signal (blank included) at the latest accepted reading.
    pub fitted_value: Measured<T>,
    /// Time of the latest accepted reading, hours.
    pub latest_time_h: T,
    /// Noise scale learnt from the innovations, relative to the noise model
    /// in use (≈ 1 when the model is right).
    pub noise_scale: T,
    /// The noise model in use, learnt from the data unless
    /// [`learn_noise`](crate::EstimatorConfig::learn_noise) is off: a
    /// reading's sd is `noise_floor + noise_fraction × (y − blank)`
    /// (before the noise scale). Signal units.
    pub noise_floor: T,
    /// See [`noise_floor`](Self::noise_floor); unitless.
    pub noise_fraction: T,
    /// Readings accepted since the last restart.
    pub readings: u32,
    pub(crate) theta: [T; P],
    pub(crate) covariance: Sym<T, P>,
    pub(crate) origin_h: T,
    pub(crate) blank: T,
    pub(crate) blank_sd: T,
    pub(crate) blank_source: BlankSource,
    pub(crate) curve: F,
}

impl<T: Real, const P: usize, F: OnlineFamily<T, P>> Estimate<T, P, F> {
    /// Covariance of the fitted parameters θ (the family's, see
    /// [`OnlineFamily`]; ln K first, then the ln rate), blank uncertainty
    /// included.
    #[doc(alias = "P")]
    #[must_use]
    pub fn covariance(&self) -> [[T; P]; P] {
        self.covariance.0
    }

    /// The fitted parameters θ (the family's; times in hours since
    /// [`origin_h`](Self::origin_h)).
    #[must_use]
    pub fn parameters(&self) -> [T; P] {
        self.theta
    }

    /// The caller's clock value (hours) of the first reading since the last
    /// restart: the family's time origin.
    #[must_use]
    pub fn origin_h(&self) -> T {
        self.origin_h
    }

    /// The blank the estimator subtracts, signal units.
    #[must_use]
    pub fn blank(&self) -> T {
        self.blank
    }

    /// The blank with its standard deviation (0 when configured).
    #[must_use]
    pub fn blank_measured(&self) -> Measured<T> {
        Measured {
            value: self.blank,
            sd: self.blank_sd,
        }
    }

    /// Where the blank comes from.
    #[must_use]
    pub fn blank_source(&self) -> BlankSource {
        self.blank_source
    }

    /// The family's name ([`OnlineFamily::NAME`]).
    #[must_use]
    pub fn family(&self) -> &'static str {
        F::NAME
    }

    /// Capacity as fitted, even when too uncertain to publish, with its sd.
    #[must_use]
    pub fn capacity_unchecked(&self) -> Measured<T> {
        let k = self.curve.capacity();
        Measured {
            value: k,
            sd: saturate(k * self.covariance.get(0, 0).max(T::ZERO).sqrt()),
        }
    }

    /// The fitted curve above blank, with times in hours since
    /// [`origin_h`](Self::origin_h).
    #[must_use]
    pub fn curve(&self) -> F {
        self.curve
    }

    /// The fitted signal (blank included) at `time_h` with its standard
    /// deviation by the delta method.
    ///
    /// # Examples
    /// See [`Estimator`](crate::Estimator).
    #[must_use]
    pub fn value_at(&self, time_h: T) -> Measured<T> {
        let (f, g, _) = self.curve.eval(time_h - self.origin_h);
        Measured {
            value: f + self.blank,
            sd: saturate(self.covariance.sd_along(&g)),
        }
    }

    /// The time (hours, caller's clock) at which the fitted curve reaches
    /// `level` (signal units, blank included), with its standard deviation by
    /// the delta method. `None` when the level is not between the blank and
    /// the capacity.
    ///
    /// The gradient comes from the implicit function theorem: f(t; θ) = L
    /// gives ∂t/∂θ = −(∂f/∂θ) / (∂f/∂t), with ∂f/∂t = f · d ln f/dt.
    #[must_use]
    pub fn time_to_reach(&self, level: T) -> Option<Measured<T>> {
        self.time_to(level - self.blank, false)
    }

    /// Time (hours, caller's clock) at which the fitted curve reaches the
    /// fraction `fraction` of the capacity above blank, with its standard
    /// deviation. The level moves with the capacity, so
    /// ∂t/∂θ = −(∂f/∂θ − p K e₀) / (∂f/∂t), e₀ the ln K direction. `None`
    /// unless 0 < fraction < 1.
    #[must_use]
    pub fn time_to_fraction(&self, fraction: T) -> Option<Measured<T>> {
        if !(fraction > T::ZERO && fraction < T::ONE) {
            return None;
        }
        self.time_to(fraction * self.curve.capacity(), true)
    }

    fn time_to(&self, level: T, moves_with_capacity: bool) -> Option<Measured<T>> {
        let t = self.curve.time_to_level(level)?;
        let (f, mut g, _) = self.curve.eval(t);
        if moves_with_capacity {
            g[0] -= level;
        }
        let slope = f * self.curve.specific_rate_per_h(t);
        if !(slope > T::ZERO) {
            return None;
        }
        for v in &mut g {
            *v = -*v / slope;
        }
        let value = t + self.origin_h;
        let sd = self.covariance.sd_along(&g);
        (value.is_finite() && sd.is_finite()).then_some(Measured { value, sd })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// An estimate at the edge of the parameter box (ln K = 80, the clamp)
    /// with a huge spread: K · sd(ln K) = 5.5e34 · 1e4 overflows f32. Found
    /// by the `reading_path` fuzzer as capacity sd = +∞.
    #[test]
    fn huge_spreads_stay_finite() {
        let e = Estimate::<f32, 3, crate::Logistic<f32>> {
            capacity: None,
            rate_per_h: Measured {
                value: 1.0,
                sd: 1.0,
            },
            doubling_time_h: Measured {
                value: 1.0,
                sd: 1.0,
            },
            inflection_time_h: None,
            lag_h: None,
            shape: None,
            fitted_value: Measured {
                value: 1.0,
                sd: 1.0,
            },
            latest_time_h: 0.0,
            noise_scale: 1.0,
            noise_floor: 0.003,
            noise_fraction: 0.01,
            readings: 10,
            theta: [80.0, 0.0, 0.0],
            covariance: Sym([[1e8, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 1e30]]),
            origin_h: 0.0,
            blank: 0.0,
            blank_sd: 0.0,
            blank_source: BlankSource::Configured,
            curve: crate::Logistic::from_theta(&[80.0, 0.0, 0.0]),
        };
        let k = e.capacity_unchecked();
        assert!(
            k.value.is_finite() && k.sd.is_finite() && k.sd > 1e38,
            "{k:?}"
        );
        let v = e.value_at(1.0);
        assert!(v.value.is_finite() && v.sd.is_finite(), "{v:?}");
    }
}
