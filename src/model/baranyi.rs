//! Baranyi & Roberts (1994) growth with lag, in closed form.

use super::{GrowthCurve, Inflection, maximise_slope};
use crate::error::{non_negative, positive};
use crate::{Error, Real};

/// The Baranyi–Roberts model on y = ln(x/x0).
///
/// The model (J. Baranyi and T. A. Roberts, "A dynamic approach to predicting
/// bacterial growth in food", Int. J. Food Microbiol. 23:277–294, 1994) is the
/// pair of equations dx/dt = μmax · q/(1+q) · (1 − x/xmax) · x and
/// dq/dt = μmax q, where q is the physiological state of the cells. Its
/// explicit solution is
///
/// y(t) = μmax A(t) − ln(1 + (e^(μmax A(t)) − 1) / e^(Amax)),
/// A(t) = t + ln(e^(−μmax t) + e^(−h0) − e^(−μmax t − h0)) / μmax,
///
/// with Amax = ln(xmax/x0) (called the asymptote here, as in Zwietering's
/// forms), h0 = μmax λ = ln(1 + 1/q0).
///
/// Units: y and the asymptote dimensionless; μmax per hour; λ and t in hours;
/// h0 and q0 dimensionless.
///
/// # Examples
///
/// ```
/// use plateau::{Baranyi, GrowthCurve};
/// // Invented: 6 natural-log units of growth, μmax 0.9 per hour, 3 h lag.
/// let c = Baranyi::<f64>::new(6.0, 0.9, 3.0)?;
/// assert!(c.value(0.0).abs() < 1e-12);
/// assert!((c.value(200.0) - 6.0).abs() < 1e-9);
/// assert!((c.h0() - 2.7).abs() < 1e-12);
/// # Ok::<(), plateau::Error>(())
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Baranyi<T> {
    asymptote: T,
    mu_max_per_h: T,
    h0: T,
}

impl<T: Real> Baranyi<T> {
    /// From the asymptote ln(xmax/x0) (> 0), μmax (per hour, > 0) and lag λ
    /// (hours, ≥ 0); h0 = μmax λ.
    ///
    /// # Errors
    ///
    /// Names the first parameter that is non-finite or out of range.
    pub fn new(asymptote: T, mu_max_per_h: T, lag_h: T) -> Result<Self, Error> {
        let mu = positive(mu_max_per_h, "mu_max_per_h")?;
        let lag_h = non_negative(lag_h, "lag_h")?;
        Self::from_h0(asymptote, mu, mu * lag_h)
    }

    /// From the asymptote, μmax and h0 = μmax λ (≥ 0).
    ///
    /// # Errors
    ///
    /// Names the first parameter that is non-finite or out of range.
    pub fn from_h0(asymptote: T, mu_max_per_h: T, h0: T) -> Result<Self, Error> {
        Ok(Self {
            asymptote: positive(asymptote, "asymptote")?,
            mu_max_per_h: positive(mu_max_per_h, "mu_max_per_h")?,
            h0: non_negative(h0, "h0")?,
        })
    }

    /// From the asymptote, μmax and the initial physiological state q0 (> 0);
    /// h0 = ln(1 + 1/q0).
    ///
    /// # Errors
    ///
    /// Names the first parameter that is non-finite or out of range.
    pub fn from_q0(asymptote: T, mu_max_per_h: T, q0: T) -> Result<Self, Error> {
        let q0 = positive(q0, "q0")?;
        Self::from_h0(asymptote, mu_max_per_h, (T::ONE / q0).ln_1p())
    }

    /// Asymptote ln(xmax/x0), dimensionless.
    pub fn asymptote(&self) -> T {
        self.asymptote
    }
    /// μmax, per hour.
    #[doc(alias = "mu_max")]
    pub fn mu_max_per_h(&self) -> T {
        self.mu_max_per_h
    }
    /// h0 = μmax λ, dimensionless.
    pub fn h0(&self) -> T {
        self.h0
    }
    /// q0 = 1 / (e^h0 − 1), dimensionless (infinite when h0 = 0).
    pub fn q0(&self) -> T {
        T::ONE / self.h0.exp_m1()
    }
    /// The lag parameter λ = h0 / μmax, hours.
    #[doc(alias = "lambda")]
    pub fn lag_param_h(&self) -> T {
        self.h0 / self.mu_max_per_h
    }

    /// μmax A(t): the adjusted time in units of growth, dimensionless.
    fn mu_a(&self, t_h: T) -> T {
        let mt = self.mu_max_per_h * t_h;
        let e_mt = (-mt).exp();
        let e_h0 = (-self.h0).exp();
        mt + (e_mt + e_h0 - e_mt * e_h0).ln()
    }

    /// The adjustment function A(t), hours.
    pub fn adjusted_time_h(&self, t_h: T) -> T {
        self.mu_a(t_h) / self.mu_max_per_h
    }
}

impl<T: Real> GrowthCurve<T> for Baranyi<T> {
    fn value(&self, t_h: T) -> T {
        let m = self.mu_a(t_h);
        let s = m - self.asymptote;
        // m − ln(1 + e^s − e^(−Amax)), rearranged so nothing overflows.
        if s > T::ZERO {
            self.asymptote - ((-s).exp() - (-m).exp()).ln_1p()
        } else {
            m - (s.exp() - (-self.asymptote).exp()).ln_1p()
        }
    }

    fn slope(&self, t_h: T) -> T {
        // μmax · q/(1+q) · (1 − x/xmax), q(t) = q0 e^(μmax t).
        let mt = self.mu_max_per_h * t_h;
        let alpha = T::ONE / (T::ONE + (self.h0 - mt).exp() - (-mt).exp());
        let y = self.value(t_h);
        -self.mu_max_per_h * alpha * (y - self.asymptote).exp_m1()
    }

    fn lower_asymptote(&self) -> T {
        T::ZERO
    }

    fn upper_asymptote(&self) -> T {
        self.asymptote
    }

    /// Found numerically (golden-section search on the slope, bounded).
    fn inflection(&self) -> Inflection<T> {
        let hi = self.lag_param_h() + (self.asymptote + T::from_f64(10.0)) / self.mu_max_per_h;
        let t = maximise_slope(self, T::ZERO, hi);
        Inflection {
            time_h: t,
            value: self.value(t),
        }
    }

    fn max_specific_rate_per_h(&self) -> T {
        self.mu_max_per_h
    }

    fn early_exponential(&self, t_h: T) -> T {
        (self.mu_max_per_h * t_h - self.h0).max(T::ZERO)
    }

    fn early_exponential_relative_error(&self, t_h: T) -> T {
        (self.early_exponential(t_h) - self.value(t_h)).exp_m1()
    }
}
