//! Zwietering's reparameterised logistic, Gompertz and Richards curves on
//! y = ln(N/N0), with asymptote A, maximum specific growth rate μm and lag λ.
//!
//! Source: M. H. Zwietering, I. Jongenburger, F. M. Rombouts and K. van 't Riet,
//! "Modeling of the bacterial growth curve", Appl. Environ. Microbiol.
//! 56:1875–1881 (1990). Each form tends to A, its maximum slope is μm and the
//! tangent at its inflection crosses y = 0 at t = λ.

use super::{GrowthCurve, Inflection};
use crate::error::{finite, non_negative, positive};
use crate::{Error, Real};

/// The parameters shared by the three forms, validated.
fn validate<T: Real>(asymptote: T, mu_max_per_h: T, lag_h: T) -> Result<(T, T, T), Error> {
    Ok((
        positive(asymptote, "asymptote")?,
        positive(mu_max_per_h, "mu_max_per_h")?,
        non_negative(lag_h, "lag_h")?,
    ))
}

/// The exponential-phase line μm (t − λ), floored at zero, and its relative
/// error on the population scale, e^(line − y) − 1.
fn exponential_line<T: Real>(mu: T, lag: T, t_h: T) -> T {
    (mu * (t_h - lag)).max(T::ZERO)
}

macro_rules! zwietering_common {
    () => {
        fn lower_asymptote(&self) -> T {
            T::ZERO
        }
        fn upper_asymptote(&self) -> T {
            self.asymptote
        }
        fn max_specific_rate_per_h(&self) -> T {
            self.mu_max_per_h
        }
        fn early_exponential(&self, t_h: T) -> T {
            exponential_line(self.mu_max_per_h, self.lag_h, t_h)
        }
        fn early_exponential_relative_error(&self, t_h: T) -> T {
            (self.early_exponential(t_h) - self.value(t_h)).exp_m1()
        }
    };
}

macro_rules! zwietering_accessors {
    () => {
        /// Asymptote A = ln(N∞/N0), dimensionless.
        #[doc(alias = "A")]
        pub fn asymptote(&self) -> T {
            self.asymptote
        }
        /// Maximum specific growth rate μm, per hour.
        #[doc(alias = "mu_m")]
        pub fn mu_max_per_h(&self) -> T {
            self.mu_max_per_h
        }
        /// Lag λ as defined by the tangent construction, hours.
        #[doc(alias = "lambda")]
        pub fn lag_param_h(&self) -> T {
            self.lag_h
        }
    };
}

/// Zwietering's logistic: y = A / (1 + exp(4 μm (λ − t) / A + 2)).
///
/// Units: y and A dimensionless (natural log of a ratio); μm per hour; λ and t
/// in hours.
///
/// # Examples
///
/// ```
/// use plateau::{GrowthCurve, ZwieteringLogistic};
/// // Invented: A = 5 (about 150-fold growth), μm = 1.2 per hour, λ = 2 h.
/// let c = ZwieteringLogistic::<f64>::new(5.0, 1.2, 2.0)?;
/// assert!((c.max_slope() - 1.2).abs() < 1e-12);
/// assert!((c.lag_h() - 2.0).abs() < 1e-12);
/// # Ok::<(), plateau::Error>(())
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ZwieteringLogistic<T> {
    asymptote: T,
    mu_max_per_h: T,
    lag_h: T,
}

impl<T: Real> ZwieteringLogistic<T> {
    /// From asymptote A (> 0), μm (per hour, > 0) and lag λ (hours, ≥ 0).
    ///
    /// # Errors
    ///
    /// Names the first parameter that is non-finite or out of range.
    pub fn new(asymptote: T, mu_max_per_h: T, lag_h: T) -> Result<Self, Error> {
        let (asymptote, mu_max_per_h, lag_h) = validate(asymptote, mu_max_per_h, lag_h)?;
        Ok(Self {
            asymptote,
            mu_max_per_h,
            lag_h,
        })
    }
    zwietering_accessors!();

    /// The equivalent plain-logistic rate r = 4 μm / A, per hour.
    fn g(&self) -> T {
        T::from_f64(4.0) * self.mu_max_per_h / self.asymptote
    }
}

impl<T: Real> GrowthCurve<T> for ZwieteringLogistic<T> {
    fn value(&self, t_h: T) -> T {
        self.asymptote / (T::ONE + (self.g() * (self.lag_h - t_h) + T::TWO).exp())
    }
    fn slope(&self, t_h: T) -> T {
        let y = self.value(t_h);
        self.g() * y * (T::ONE - y / self.asymptote)
    }
    fn inflection(&self) -> Inflection<T> {
        Inflection {
            time_h: self.lag_h + self.asymptote / (T::TWO * self.mu_max_per_h),
            value: self.asymptote * T::HALF,
        }
    }
    fn time_to_reach(&self, level: T) -> Result<T, Error> {
        let level = finite(level, "level")?;
        if level <= T::ZERO || level >= self.asymptote {
            return Err(Error::LevelNotReached);
        }
        let ratio = self.asymptote / level;
        // ln(A/y − 1); for a subnormal level A/y overflows, and then
        // ln(A/y − 1) = ln A − ln y to within rounding.
        let ln_odds = if ratio.is_finite() {
            (ratio - T::ONE).ln()
        } else {
            self.asymptote.ln() - level.ln()
        };
        Ok(self.lag_h + (T::TWO - ln_odds) / self.g())
    }
    zwietering_common!();
}

/// Zwietering's Gompertz: y = A exp(−exp(μm e (λ − t) / A + 1)).
///
/// Units: as [`ZwieteringLogistic`].
///
/// # Examples
///
/// ```
/// use plateau::{GrowthCurve, Gompertz};
/// let c = Gompertz::<f64>::new(5.0, 1.2, 2.0)?; // invented
/// let i = c.inflection();
/// assert!((i.value - 5.0 / core::f64::consts::E).abs() < 1e-12);
/// assert!((c.max_slope() - 1.2).abs() < 1e-12);
/// # Ok::<(), plateau::Error>(())
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Gompertz<T> {
    asymptote: T,
    mu_max_per_h: T,
    lag_h: T,
}

impl<T: Real> Gompertz<T> {
    /// From asymptote A (> 0), μm (per hour, > 0) and lag λ (hours, ≥ 0).
    ///
    /// # Errors
    ///
    /// Names the first parameter that is non-finite or out of range.
    pub fn new(asymptote: T, mu_max_per_h: T, lag_h: T) -> Result<Self, Error> {
        let (asymptote, mu_max_per_h, lag_h) = validate(asymptote, mu_max_per_h, lag_h)?;
        Ok(Self {
            asymptote,
            mu_max_per_h,
            lag_h,
        })
    }
    zwietering_accessors!();

    /// b = μm e / A, per hour.
    fn b(&self) -> T {
        self.mu_max_per_h * T::E / self.asymptote
    }
}

impl<T: Real> GrowthCurve<T> for Gompertz<T> {
    fn value(&self, t_h: T) -> T {
        let z = (self.b() * (self.lag_h - t_h) + T::ONE).exp();
        self.asymptote * (-z).exp()
    }
    fn slope(&self, t_h: T) -> T {
        let z = (self.b() * (self.lag_h - t_h) + T::ONE).exp();
        self.asymptote * (-z).exp() * z * self.b()
    }
    fn inflection(&self) -> Inflection<T> {
        Inflection {
            time_h: self.lag_h + T::ONE / self.b(),
            value: self.asymptote / T::E,
        }
    }
    fn time_to_reach(&self, level: T) -> Result<T, Error> {
        let level = finite(level, "level")?;
        if level <= T::ZERO || level >= self.asymptote {
            return Err(Error::LevelNotReached);
        }
        let inner = -(level / self.asymptote).ln();
        Ok(self.lag_h + (T::ONE - inner.ln()) / self.b())
    }
    zwietering_common!();
}

/// Zwietering's Richards: y = A (1 + ν e^(1+ν) exp(μm (1+ν)^(1+1/ν) (λ − t) / A))^(−1/ν).
///
/// The shape ν > 0 moves the inflection: ν = 1 is the logistic, ν → 0 tends to
/// the Gompertz.
///
/// Units: as [`ZwieteringLogistic`]; ν dimensionless.
///
/// # Examples
///
/// ```
/// use plateau::{GrowthCurve, Richards, ZwieteringLogistic};
/// let r = Richards::<f64>::new(5.0, 1.2, 2.0, 1.0)?; // ν = 1: the logistic
/// let l = ZwieteringLogistic::new(5.0, 1.2, 2.0)?;
/// assert!((r.value(4.0) - l.value(4.0)).abs() < 1e-12);
/// # Ok::<(), plateau::Error>(())
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Richards<T> {
    asymptote: T,
    mu_max_per_h: T,
    lag_h: T,
    shape: T,
}

impl<T: Real> Richards<T> {
    /// From asymptote A (> 0), μm (per hour, > 0), lag λ (hours, ≥ 0) and
    /// shape ν (> 0).
    ///
    /// # Errors
    ///
    /// Names the first parameter that is non-finite or out of range.
    pub fn new(asymptote: T, mu_max_per_h: T, lag_h: T, shape: T) -> Result<Self, Error> {
        let (asymptote, mu_max_per_h, lag_h) = validate(asymptote, mu_max_per_h, lag_h)?;
        let shape = positive(shape, "shape")?;
        Ok(Self {
            asymptote,
            mu_max_per_h,
            lag_h,
            shape,
        })
    }
    zwietering_accessors!();

    /// Shape ν, dimensionless.
    #[doc(alias = "nu")]
    pub fn shape(&self) -> T {
        self.shape
    }

    /// c = μm (1+ν)^(1+1/ν) / A, per hour.
    fn c(&self) -> T {
        let nu = self.shape;
        self.mu_max_per_h * (T::ONE + nu).powf(T::ONE + T::ONE / nu) / self.asymptote
    }

    /// w = ν e^(1+ν) exp(c (λ − t)), computed in the log domain.
    fn w(&self, t_h: T) -> T {
        let nu = self.shape;
        (nu.ln() + T::ONE + nu + self.c() * (self.lag_h - t_h)).exp()
    }
}

impl<T: Real> GrowthCurve<T> for Richards<T> {
    fn value(&self, t_h: T) -> T {
        // A (1 + w)^(−1/ν) = A exp(−ln(1 + w) / ν)
        self.asymptote * (-self.w(t_h).ln_1p() / self.shape).exp()
    }
    fn slope(&self, t_h: T) -> T {
        let w = self.w(t_h);
        self.c() / self.shape * self.value(t_h) * w / (T::ONE + w)
    }
    fn inflection(&self) -> Inflection<T> {
        let nu = self.shape;
        Inflection {
            time_h: self.lag_h + (T::ONE + nu) / self.c(),
            value: self.asymptote * (-(nu.ln_1p()) / nu).exp(),
        }
    }
    fn time_to_reach(&self, level: T) -> Result<T, Error> {
        let level = finite(level, "level")?;
        if level <= T::ZERO || level >= self.asymptote {
            return Err(Error::LevelNotReached);
        }
        let nu = self.shape;
        // (y/A)^(−ν) − 1 = ν e^(1+ν) e^(c (λ − t)). With m = −ν ln(y/A) > 0 the
        // left side is e^m − 1, whose log is m + ln(1 − e^(−m)): formed that
        // way for m > 1 so a tiny level cannot overflow e^m.
        let m = -nu * (level / self.asymptote).ln();
        let ln_lhs = if m > T::ONE {
            m + (-(-m).exp()).ln_1p()
        } else {
            m.exp_m1().ln()
        };
        Ok(self.lag_h - (ln_lhs - nu.ln() - T::ONE - nu) / self.c())
    }
    zwietering_common!();
}
