//! The shared interface of every growth-curve family and its numerical helpers.

use crate::{Error, Real};

/// Where a curve bends: the time and value of its steepest point.
///
/// Units: `time_h` in hours; `value` in the curve's own units.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Inflection<T> {
    /// Time of the inflection point, hours.
    pub time_h: T,
    /// Value of the curve there, in the curve's units.
    pub value: T,
}

/// What every growth-curve family can answer.
///
/// Times are in hours; values are in the curve's own units (a measured signal
/// such as OD for [`Logistic`](crate::Logistic), the log ratio ln(N/N0) for the
/// Zwietering and Baranyi forms); rates are per hour.
///
/// Curves are increasing in time between a lower and an upper asymptote.
pub trait GrowthCurve<T: Real> {
    /// The curve's value at `t_h` hours.
    fn value(&self, t_h: T) -> T;

    /// The slope dy/dt at `t_h` hours, in value units per hour.
    fn slope(&self, t_h: T) -> T;

    /// The value the curve starts from (its limit as t → −∞ or its value in
    /// the lag phase).
    fn lower_asymptote(&self) -> T;

    /// The value the curve tends to (the plateau).
    fn upper_asymptote(&self) -> T;

    /// The steepest point of the curve.
    fn inflection(&self) -> Inflection<T>;

    /// The largest specific growth rate the family allows, per hour: r for the
    /// logistic on a signal, μm for the forms on ln(N/N0).
    fn max_specific_rate_per_h(&self) -> T;

    /// The early-phase exponential approximation at `t_h`, in the curve's units.
    ///
    /// For the logistic this is (K/B) e^(r t); for the ln-scale forms it is the
    /// exponential-phase line μm (t − λ) (zero before λ), which is exponential
    /// growth of the population.
    fn early_exponential(&self, t_h: T) -> T;

    /// Relative error of [`early_exponential`](Self::early_exponential) in the
    /// population: approximation / truth − 1 (on the population N for the
    /// ln-scale forms).
    fn early_exponential_relative_error(&self, t_h: T) -> T;

    /// The maximum slope, value units per hour: the slope at the inflection.
    fn max_slope(&self) -> T {
        self.slope(self.inflection().time_h)
    }

    /// Lag by the tangent construction, hours: where the tangent at the
    /// inflection point crosses the lower asymptote.
    #[doc(alias = "lambda")]
    fn lag_h(&self) -> T {
        let i = self.inflection();
        i.time_h - (i.value - self.lower_asymptote()) / self.max_slope()
    }

    /// Doubling time in the exponential phase, hours: ln 2 divided by the
    /// maximum specific growth rate.
    fn doubling_time_h(&self) -> T {
        T::LN_2 / self.max_specific_rate_per_h()
    }

    /// The time, in hours, at which the curve reaches `level`.
    ///
    /// The default is a bracketed, bounded-iteration root search; families
    /// with a closed form override it.
    ///
    /// # Errors
    ///
    /// [`Error::NotFinite`] for a non-finite level, [`Error::LevelNotReached`]
    /// when `level` is at or beyond an asymptote, [`Error::NoConvergence`] if
    /// the search cannot bracket the level.
    fn time_to_reach(&self, level: T) -> Result<T, Error> {
        solve_increasing(self, level)
    }
}

/// Finds t with `curve.value(t) == level` for an increasing curve.
///
/// Brackets outward from the inflection in steps of the curve's rise time,
/// doubling each time (at most 64 expansions), then runs a safeguarded
/// Newton–bisection for at most 100 iterations.
pub(crate) fn solve_increasing<T: Real, C: GrowthCurve<T> + ?Sized>(
    curve: &C,
    level: T,
) -> Result<T, Error> {
    let level = crate::error::finite(level, "level")?;
    let lower = curve.lower_asymptote();
    let upper = curve.upper_asymptote();
    if level <= lower || level >= upper {
        return Err(Error::LevelNotReached);
    }
    let infl = curve.inflection();
    let max_slope = curve.max_slope();
    let mut step = (upper - lower) / max_slope;
    if !(step.is_finite() && step > T::ZERO) {
        return Err(Error::NoConvergence);
    }
    let (mut lo, mut hi) = (infl.time_h, infl.time_h);
    let mut found = false;
    for _ in 0..64 {
        let f_lo = curve.value(lo) - level;
        let f_hi = curve.value(hi) - level;
        if f_lo <= T::ZERO && f_hi >= T::ZERO {
            found = true;
            break;
        }
        if f_lo > T::ZERO {
            lo -= step;
        }
        if f_hi < T::ZERO {
            hi += step;
        }
        step *= T::TWO;
    }
    if !found {
        return Err(Error::NoConvergence);
    }
    let mut t = lo + (hi - lo) * T::HALF;
    for _ in 0..100 {
        let f = curve.value(t) - level;
        if f == T::ZERO {
            return Ok(t);
        }
        if f < T::ZERO {
            lo = t;
        } else {
            hi = t;
        }
        let d = curve.slope(t);
        let newton = t - f / d;
        t = if d > T::ZERO && newton > lo && newton < hi {
            newton
        } else {
            lo + (hi - lo) * T::HALF
        };
        let width = hi - lo;
        if width <= T::EPSILON * T::from_f64(4.0) * (t.abs() + T::ONE) {
            return Ok(t);
        }
        let f_new = curve.value(t) - level;
        if f_new.abs() <= T::EPSILON * level.abs() {
            return Ok(t);
        }
    }
    Ok(t)
}

/// Golden-section search for the time of maximum slope in `[lo, hi]`
/// (at most 100 iterations), for curves without a closed-form inflection.
pub(crate) fn maximise_slope<T: Real, C: GrowthCurve<T> + ?Sized>(
    curve: &C,
    mut lo: T,
    mut hi: T,
) -> T {
    let inv_phi = T::from_f64(0.618_033_988_749_894_8);
    let mut a = hi - (hi - lo) * inv_phi;
    let mut b = lo + (hi - lo) * inv_phi;
    let mut fa = curve.slope(a);
    let mut fb = curve.slope(b);
    for _ in 0..100 {
        if hi - lo <= T::EPSILON * T::from_f64(8.0) * (lo.abs() + hi.abs() + T::ONE) {
            break;
        }
        if fa >= fb {
            hi = b;
            b = a;
            fb = fa;
            a = hi - (hi - lo) * inv_phi;
            fa = curve.slope(a);
        } else {
            lo = a;
            a = b;
            fa = fb;
            b = lo + (hi - lo) * inv_phi;
            fb = curve.slope(b);
        }
    }
    (lo + hi) * T::HALF
}
