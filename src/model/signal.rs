//! Mapping curves to what a sensor measures.

use super::{GrowthCurve, Inflection, maximise_slope};
use crate::error::{finite, positive};
use crate::{Error, Real};

/// An ln-scale curve y = ln(N/N0) mapped to the population N = N0 e^y.
///
/// Units: `initial` and values in population or signal units (OD, counts);
/// times in hours.
///
/// # Examples
///
/// ```
/// use plateau::{Gompertz, GrowthCurve, Population};
/// // Invented: start at 0.02 OD, grow e^4-fold (to about 1.09 OD).
/// let c = Population::new(Gompertz::<f64>::new(4.0, 0.8, 1.5)?, 0.02)?;
/// assert!((c.upper_asymptote() - 0.02 * 4.0_f64.exp()).abs() < 1e-12);
/// let t = c.time_to_reach(0.5)?;
/// assert!((c.value(t) - 0.5).abs() < 1e-12);
/// # Ok::<(), plateau::Error>(())
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Population<C, T> {
    curve: C,
    initial: T,
}

impl<T: Real, C: GrowthCurve<T>> Population<C, T> {
    /// Maps `curve` to a population that starts at `initial` (N0 > 0).
    ///
    /// # Errors
    ///
    /// `initial` must be finite and positive.
    pub fn new(curve: C, initial: T) -> Result<Self, Error> {
        Ok(Self {
            curve,
            initial: positive(initial, "initial")?,
        })
    }
    /// The underlying ln-scale curve.
    pub fn curve(&self) -> &C {
        &self.curve
    }
    /// N0, population units.
    pub fn initial(&self) -> T {
        self.initial
    }
}

impl<T: Real, C: GrowthCurve<T>> GrowthCurve<T> for Population<C, T> {
    fn value(&self, t_h: T) -> T {
        self.initial * self.curve.value(t_h).exp()
    }
    fn slope(&self, t_h: T) -> T {
        self.value(t_h) * self.curve.slope(t_h)
    }
    fn lower_asymptote(&self) -> T {
        self.initial * self.curve.lower_asymptote().exp()
    }
    fn upper_asymptote(&self) -> T {
        self.initial * self.curve.upper_asymptote().exp()
    }
    /// Numerical: the population curve bends later than its logarithm, so the
    /// search runs from the ln-scale inflection to well into the plateau.
    fn inflection(&self) -> Inflection<T> {
        let inner = self.curve.inflection();
        let rise =
            (self.curve.upper_asymptote() - self.curve.lower_asymptote()) / self.curve.max_slope();
        let t = maximise_slope(self, inner.time_h, inner.time_h + T::TWO * rise + T::ONE);
        Inflection {
            time_h: t,
            value: self.value(t),
        }
    }
    fn max_specific_rate_per_h(&self) -> T {
        self.curve.max_specific_rate_per_h()
    }
    fn early_exponential(&self, t_h: T) -> T {
        self.initial * self.curve.early_exponential(t_h).exp()
    }
    fn early_exponential_relative_error(&self, t_h: T) -> T {
        self.curve.early_exponential_relative_error(t_h)
    }
    fn time_to_reach(&self, level: T) -> Result<T, Error> {
        let level = finite(level, "level")?;
        if level <= T::ZERO {
            return Err(Error::LevelNotReached);
        }
        self.curve.time_to_reach((level / self.initial).ln())
    }
}

/// A curve plus a constant blank (baseline) offset, as a photometer reads a
/// culture over its medium: signal = blank + curve.
///
/// Units: `blank` in the curve's units.
///
/// # Examples
///
/// ```
/// use plateau::{Blanked, GrowthCurve, Logistic};
/// let c = Blanked::new(Logistic::<f64>::from_midpoint(1.2, 0.6, 9.0)?, 0.05)?;
/// assert!((c.value(9.0) - 0.65).abs() < 1e-12);
/// assert!((c.time_to_reach(0.65)? - 9.0).abs() < 1e-12);
/// # Ok::<(), plateau::Error>(())
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Blanked<C, T> {
    curve: C,
    blank: T,
}

impl<T: Real, C: GrowthCurve<T>> Blanked<C, T> {
    /// Adds `blank` (finite, any sign) to `curve`.
    ///
    /// # Errors
    ///
    /// `blank` must be finite.
    pub fn new(curve: C, blank: T) -> Result<Self, Error> {
        Ok(Self {
            curve,
            blank: finite(blank, "blank")?,
        })
    }
    /// The curve without its blank.
    pub fn curve(&self) -> &C {
        &self.curve
    }
    /// The blank offset, signal units.
    pub fn blank(&self) -> T {
        self.blank
    }
}

impl<T: Real, C: GrowthCurve<T>> GrowthCurve<T> for Blanked<C, T> {
    fn value(&self, t_h: T) -> T {
        self.blank + self.curve.value(t_h)
    }
    fn slope(&self, t_h: T) -> T {
        self.curve.slope(t_h)
    }
    fn lower_asymptote(&self) -> T {
        self.blank + self.curve.lower_asymptote()
    }
    fn upper_asymptote(&self) -> T {
        self.blank + self.curve.upper_asymptote()
    }
    fn inflection(&self) -> Inflection<T> {
        let i = self.curve.inflection();
        Inflection {
            time_h: i.time_h,
            value: i.value + self.blank,
        }
    }
    fn max_specific_rate_per_h(&self) -> T {
        self.curve.max_specific_rate_per_h()
    }
    fn early_exponential(&self, t_h: T) -> T {
        self.blank + self.curve.early_exponential(t_h)
    }
    fn early_exponential_relative_error(&self, t_h: T) -> T {
        self.curve.early_exponential_relative_error(t_h)
    }
    fn max_slope(&self) -> T {
        self.curve.max_slope()
    }
    fn lag_h(&self) -> T {
        self.curve.lag_h()
    }
    fn time_to_reach(&self, level: T) -> Result<T, Error> {
        let level = finite(level, "level")?;
        self.curve.time_to_reach(level - self.blank)
    }
}
