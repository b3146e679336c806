//! The plain logistic curve on the measured signal.

use super::{GrowthCurve, Inflection};
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
