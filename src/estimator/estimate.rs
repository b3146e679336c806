//! What the estimator publishes: outcomes of readings and the current estimate.

use super::fit::{Sym3, model, saturate};
use crate::{Error, Logistic, Real};

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

/// The current estimate of the growth curve, with standard deviations.
///
/// Units: signal units (OD units for a photometer) for capacity and values,
/// hours for times, per hour for rates. The fitted model is the logistic
/// y = blank + K / (1 + e^(−r (t − `t_m`))).
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Estimate<T = f32> {
    /// Carrying capacity above the blank, signal units. `None` while the data
    /// cannot place it (relative sd above the configured limit), typically
    /// during clean exponential growth.
    #[doc(alias = "K")]
    pub capacity: Option<Measured<T>>,
    /// Specific growth rate r of the logistic, per hour (the maximum
    /// per-capita rate, reached at low density).
    #[doc(alias = "mu_max")]
    pub rate_per_h: Measured<T>,
    /// Doubling time ln 2 / r during early growth, hours.
    pub doubling_time_h: Measured<T>,
    /// Inflection (midpoint) time `t_m`, hours on the caller's clock; `None`
    /// while the capacity is.
    pub inflection_time_h: Option<Measured<T>>,
    /// Lag, hours: from the starting reading (the median of the first three
    /// since the last restart, level y₀ at time t₀) to the time λ at which
    /// the exponential-phase line of the fitted curve on the log scale,
    /// ln y = ln K − r (`t_m` − t), reaches y₀: λ − t₀ with
    /// λ = `t_m` − ln(K / y₀) / r. This is the tangent construction on ln y
    /// used by Zwietering et al. (1990) and by Baranyi & Roberts (1994); a
    /// culture that grows from its first reading has a lag near zero. `None`
    /// while the capacity is, or when the starting level is not clear of the
    /// noise (its relative sd above 0.2). Its sd includes the uncertainty of
    /// y₀.
    #[doc(alias = "lambda")]
    pub lag_h: Option<Measured<T>>,
    /// The fitted signal (blank included) at the latest accepted reading.
    pub fitted_value: Measured<T>,
    /// Time of the latest accepted reading, hours.
    pub latest_time_h: T,
    /// Noise scale learnt from the residuals, relative to the configured
    /// noise model (≈ 1 when the model is right).
    pub noise_scale: T,
    /// Readings accepted since the last restart.
    pub readings: u32,
    pub(crate) theta: [T; 3],
    pub(crate) covariance: Sym3<T>,
    pub(crate) origin_h: T,
    pub(crate) blank: T,
}

impl<T: Real> Estimate<T> {
    /// Covariance of the fitted parameters (ln K, ln r, `t_m`), row-major.
    /// ln K is the log of capacity in signal units, ln r the log of the rate
    /// per hour, `t_m` in hours.
    #[doc(alias = "P")]
    #[must_use]
    pub fn covariance(&self) -> [[T; 3]; 3] {
        let mut out = [[T::ZERO; 3]; 3];
        for (i, row) in out.iter_mut().enumerate() {
            for (j, cell) in row.iter_mut().enumerate() {
                *cell = self.covariance.get(i, j);
            }
        }
        out
    }

    /// The fitted parameters (ln K, ln r, `t_m` in hours on the caller's clock).
    #[must_use]
    pub fn parameters(&self) -> [T; 3] {
        [self.theta[0], self.theta[1], self.theta[2] + self.origin_h]
    }

    /// The blank the estimator subtracts, signal units.
    #[must_use]
    pub fn blank(&self) -> T {
        self.blank
    }

    /// Capacity as fitted, even when too uncertain to publish, with its sd.
    #[must_use]
    pub fn capacity_unchecked(&self) -> Measured<T> {
        let k = self.theta[0].exp();
        Measured {
            value: k,
            sd: saturate(k * self.covariance.get(0, 0).max(T::ZERO).sqrt()),
        }
    }

    /// The fitted logistic (above blank) on the caller's clock.
    ///
    /// # Errors
    /// Only if the fitted parameters are not representable as a `Logistic`.
    pub fn curve(&self) -> Result<Logistic<T>, Error> {
        Logistic::from_midpoint(
            self.theta[0].exp(),
            self.theta[1].exp(),
            self.theta[2] + self.origin_h,
        )
    }

    /// The fitted signal (blank included) at `time_h` with its standard
    /// deviation by the delta method.
    ///
    /// # Examples
    /// See [`Estimator`](crate::Estimator).
    #[must_use]
    pub fn value_at(&self, time_h: T) -> Measured<T> {
        let (f, g) = model(&self.theta, time_h - self.origin_h);
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
    /// t = `t_m` + ln(L / (K − L)) / r, so ∂t/∂ln K = −K / (r (K − L)),
    /// ∂t/∂ln r = −(t − `t_m`), ∂t/∂`t_m` = 1.
    #[must_use]
    pub fn time_to_reach(&self, level: T) -> Option<Measured<T>> {
        let l = level - self.blank;
        let k = self.theta[0].exp();
        let r = self.theta[1].exp();
        if !(l > T::ZERO && l < k) {
            return None;
        }
        let dt = (l / (k - l)).ln() / r;
        let g = [-k / (r * (k - l)), -dt, T::ONE];
        let value = self.theta[2] + dt + self.origin_h;
        let sd = self.covariance.sd_along(&g);
        (value.is_finite() && sd.is_finite()).then_some(Measured { value, sd })
    }

    /// Time (hours, caller's clock) at which the fitted curve reaches the
    /// fraction `fraction` of the capacity above blank, with its standard
    /// deviation: `t_m` + ln(p / (1 − p)) / r, so only r and `t_m` carry
    /// uncertainty. `None` unless 0 < fraction < 1.
    #[must_use]
    pub fn time_to_fraction(&self, fraction: T) -> Option<Measured<T>> {
        if !(fraction > T::ZERO && fraction < T::ONE) {
            return None;
        }
        let r = self.theta[1].exp();
        let dt = (fraction / (T::ONE - fraction)).ln() / r;
        let g = [T::ZERO, -dt, T::ONE];
        let value = self.theta[2] + dt + self.origin_h;
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
        let e = Estimate::<f32> {
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
            fitted_value: Measured {
                value: 1.0,
                sd: 1.0,
            },
            latest_time_h: 0.0,
            noise_scale: 1.0,
            readings: 10,
            theta: [80.0, 0.0, 0.0],
            covariance: Sym3([1e8, 0.0, 0.0, 1.0, 0.0, 1e30]),
            origin_h: 0.0,
            blank: 0.0,
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
