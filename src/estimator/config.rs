//! The estimator's validated configuration.

use crate::error::{finite, non_negative, positive};
use crate::{Error, Real};

/// Settings of an [`Estimator`](crate::Estimator): a validated `Copy` value kept
/// apart from the running state.
///
/// Every setter checks its argument and returns [`Error`] naming the bad
/// parameter, so a config that exists is a valid config.
///
/// Units: signal units are whatever the readings are in (OD units for a
/// photometer, cells for a counter); times are hours.
///
/// # Noise model
///
/// A reading's standard deviation is taken as `noise_floor + noise_fraction × y`
/// (a floor plus a part proportional to the signal, common practice for
/// photometers, where absolute repeatability dominates at low OD and relative
/// error at high OD). Only the ratio of floor to fraction shapes the weights:
/// the overall noise scale is learnt from the residuals, so a config that is a
/// factor of two off still gives honest standard deviations.
///
/// # Examples
///
/// ```
/// use plateau::EstimatorConfig;
/// // An OD photometer with 0.003 OD repeatability and 1 % gain noise,
/// // a 0.04 OD blank (medium only) and a detector that saturates at 4 OD.
/// let config = EstimatorConfig::<f32>::new()
///     .noise(0.003, 0.01)?
///     .blank(0.04)?
///     .ceiling(4.0)?;
/// assert_eq!(config.blank_value(), 0.04);
/// assert!(EstimatorConfig::<f32>::new().noise(-1.0, 0.01).is_err());
/// # Ok::<(), plateau::Error>(())
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct EstimatorConfig<T = f32> {
    pub(crate) noise_floor: T,
    pub(crate) noise_fraction: T,
    pub(crate) blank: T,
    /// Standard deviation of the blank in use, signal units: 0 for a
    /// configured blank, the blank phase's standard error once measured,
    /// `unknown_blank_sd` when no blank was given.
    pub(crate) blank_sd: T,
    pub(crate) blank_known: bool,
    pub(crate) learn_noise: bool,
    pub(crate) ceiling: T,
    pub(crate) gate_sigma: T,
    pub(crate) dilution_ratio: T,
    pub(crate) capacity_max_rel_sd: T,
    pub(crate) min_growth_ratio: T,
    pub(crate) max_rate_per_h: T,
    pub(crate) max_consecutive_rejections: u8,
    pub(crate) refit_iterations: u8,
    pub(crate) refit_every: u8,
    pub(crate) min_readings: u8,
}

/// The longest run of held-back readings the estimator keeps (fixed memory).
pub(crate) const MAX_HELD: usize = 4;

impl<T: Real> Default for EstimatorConfig<T> {
    fn default() -> Self {
        Self::new()
    }
}

impl<T: Real> EstimatorConfig<T> {
    /// The defaults, chosen for an OD photometer (see each setter).
    #[must_use]
    pub fn new() -> Self {
        Self {
            noise_floor: T::from_f64(0.003),
            noise_fraction: T::from_f64(0.01),
            blank: T::ZERO,
            blank_sd: T::from_f64(DEFAULT_UNKNOWN_BLANK_SD),
            blank_known: false,
            learn_noise: true,
            ceiling: T::INFINITY,
            gate_sigma: T::from_f64(4.0),
            dilution_ratio: T::from_f64(0.8),
            capacity_max_rel_sd: T::from_f64(0.15),
            min_growth_ratio: T::from_f64(2.0),
            max_rate_per_h: T::from_f64(3.0),
            max_consecutive_rejections: 4,
            refit_iterations: 2,
            refit_every: 1,
            min_readings: 6,
        }
    }

    /// Noise model: standard deviation `floor + fraction × y` of one reading.
    /// Defaults 0.003 (signal units) and 0.01.
    ///
    /// # Errors
    /// `noise_floor` must be finite and ≥ 0, `noise_fraction` finite and ≥ 0,
    /// and not both zero.
    pub fn noise(mut self, floor: T, fraction: T) -> Result<Self, Error> {
        self.noise_floor = non_negative(floor, "noise_floor")?;
        self.noise_fraction = non_negative(fraction, "noise_fraction")?;
        if floor <= T::ZERO && fraction <= T::ZERO {
            return Err(Error::NotPositive {
                parameter: "noise_floor",
            });
        }
        Ok(self)
    }

    /// Blank (baseline) reading of the medium alone, in signal units, subtracted
    /// from every reading before the fit, taken as exact. Without a blank
    /// (the default) the estimator subtracts 0 and widens its intervals for
    /// a blank it does not know (see [`unknown_blank_sd`](Self::unknown_blank_sd));
    /// a blank phase ([`Estimator::blank_reading`](crate::Estimator::blank_reading))
    /// measures one.
    ///
    /// # Errors
    /// `blank` must be finite and ≥ 0.
    pub fn blank(mut self, blank: T) -> Result<Self, Error> {
        self.blank = non_negative(blank, "blank")?;
        self.blank_sd = T::ZERO;
        self.blank_known = true;
        Ok(self)
    }

    /// The spread (standard deviation, signal units) of the blank the
    /// estimator assumes when none is configured or measured; default
    /// [`DEFAULT_UNKNOWN_BLANK_SD`] OD units (a plate well or cuvette of
    /// medium reads a few hundredths of an OD unit, common practice). The
    /// estimate's standard deviations include how far such a blank would
    /// move it. A blank left free beside a lag is not identifiable from the
    /// curve alone (a flat start is either a lag or a blank under a smaller
    /// culture), so the estimator does not fit one: it says how uncertain
    /// the missing blank leaves it. Set 0 to ignore the blank altogether.
    ///
    /// # Errors
    /// `unknown_blank_sd` must be finite and ≥ 0.
    pub fn unknown_blank_sd(mut self, sd: T) -> Result<Self, Error> {
        let sd = non_negative(sd, "unknown_blank_sd")?;
        if !self.blank_known {
            self.blank_sd = sd;
        }
        Ok(self)
    }

    /// Whether the noise model's split between floor and proportional part
    /// is learnt from the residuals (default true): the configured
    /// [`noise`](Self::noise) is then only the starting point, so the weights
    /// fit any instrument and unit. With `false` the configured split is
    /// kept (the overall scale is always learnt).
    #[must_use]
    pub fn learn_noise(mut self, learn: bool) -> Self {
        self.learn_noise = learn;
        self
    }

    /// Sensor ceiling in signal units: readings at or above it are saturated
    /// and rejected. Default: none (infinity).
    ///
    /// # Errors
    /// `ceiling` must be > 0 (infinity allowed).
    pub fn ceiling(mut self, ceiling: T) -> Result<Self, Error> {
        if ceiling.is_nan() || ceiling <= T::ZERO {
            return Err(Error::NotPositive {
                parameter: "ceiling",
            });
        }
        self.ceiling = ceiling;
        Ok(self)
    }

    /// Innovation gate in standard deviations: a reading further than this
    /// from the prediction is held back as a possible spike. Default 4.
    ///
    /// # Errors
    /// `gate_sigma` must be finite and at least 2.
    pub fn gate_sigma(mut self, sigma: T) -> Result<Self, Error> {
        let sigma = finite(sigma, "gate_sigma")?;
        if sigma < T::TWO {
            return Err(Error::OutOfRange {
                parameter: "gate_sigma",
            });
        }
        self.gate_sigma = sigma;
        Ok(self)
    }

    /// How many consecutive gated readings make the estimator stop calling
    /// them spikes (1 to 4, default 4). If they all sit below
    /// `dilution_ratio` × prediction the culture was diluted and the estimator
    /// restarts from them; otherwise they are accepted if they agree with
    /// each other, so the gate can never starve the estimator. The same count
    /// of readings in a row with times behind the latest accepted one is
    /// taken as a clock reset: the estimator restarts.
    ///
    /// # Errors
    /// Out of 1..=4.
    pub fn max_consecutive_rejections(mut self, count: u8) -> Result<Self, Error> {
        if count == 0 || usize::from(count) > MAX_HELD {
            return Err(Error::OutOfRange {
                parameter: "max_consecutive_rejections",
            });
        }
        self.max_consecutive_rejections = count;
        Ok(self)
    }

    /// Ratio below the prediction that marks a dilution (default 0.8).
    ///
    /// # Errors
    /// Must lie in (0, 1).
    pub fn dilution_ratio(mut self, ratio: T) -> Result<Self, Error> {
        if !(ratio > T::ZERO && ratio < T::ONE) {
            return Err(Error::OutOfRange {
                parameter: "dilution_ratio",
            });
        }
        self.dilution_ratio = ratio;
        Ok(self)
    }

    /// Largest relative standard deviation at which a capacity is published
    /// (default 0.15); above it `Estimate::capacity` is `None`. A capacity
    /// is also withheld unless its rise above the starting level is at least
    /// ten noise sds.
    ///
    /// # Errors
    /// Must be finite and > 0.
    pub fn capacity_max_rel_sd(mut self, rel_sd: T) -> Result<Self, Error> {
        self.capacity_max_rel_sd = positive(rel_sd, "capacity_max_rel_sd")?;
        Ok(self)
    }

    /// Growth the data must show before the first fit (default 2, one
    /// doubling): the median of the latest three readings over the median of
    /// the first three (or the noise floor, if larger), and also at least
    /// five noise sds above the start. Until then the culture is in lag or
    /// too young and there is no estimate.
    ///
    /// # Errors
    /// Must be finite and > 1.
    pub fn min_growth_ratio(mut self, ratio: T) -> Result<Self, Error> {
        let ratio = finite(ratio, "min_growth_ratio")?;
        if ratio <= T::ONE {
            return Err(Error::OutOfRange {
                parameter: "min_growth_ratio",
            });
        }
        self.min_growth_ratio = ratio;
        Ok(self)
    }

    /// Fastest specific growth (or decay) rate the gate allows between
    /// readings before the first fit, per hour (default 3 per hour, a
    /// doubling every 14 minutes; E. coli in rich medium doubles in about
    /// 20 minutes, BioNumbers 104331). The fitted rate is also kept below
    /// four times it. Raise it for faster organisms.
    ///
    /// # Errors
    /// Must be finite and > 0.
    pub fn max_rate_per_h(mut self, rate: T) -> Result<Self, Error> {
        self.max_rate_per_h = positive(rate, "max_rate_per_h")?;
        Ok(self)
    }

    /// Levenberg–Marquardt iterations per accepted reading (1 to 8, default 2).
    /// More costs time per reading; the refit is warm-started so 2 suffices
    /// once the fit has settled.
    ///
    /// # Errors
    /// Out of 1..=8.
    pub fn refit_iterations(mut self, iterations: u8) -> Result<Self, Error> {
        if iterations == 0 || iterations > 8 {
            return Err(Error::OutOfRange {
                parameter: "refit_iterations",
            });
        }
        self.refit_iterations = iterations;
        Ok(self)
    }

    /// Refit over the whole history every `every` accepted readings (1 to
    /// 64, default 1: every reading). In between, each reading updates the
    /// estimate by one extended-Kalman-filter step, which costs a small
    /// fraction of a refit: the cost per reading falls roughly as 1/`every`.
    /// Accuracy first: the README's results table gives the accuracy and the
    /// cost for 1 and for larger values; choose by them.
    ///
    /// # Errors
    /// Out of 1..=64.
    pub fn refit_every(mut self, every: u8) -> Result<Self, Error> {
        if !(1..=64).contains(&every) {
            return Err(Error::OutOfRange {
                parameter: "refit_every",
            });
        }
        self.refit_every = every;
        Ok(self)
    }

    /// Accepted readings needed before the first fit (4 to 32, default 6).
    ///
    /// # Errors
    /// Out of 4..=32.
    pub fn min_readings(mut self, count: u8) -> Result<Self, Error> {
        if !(4..=32).contains(&count) {
            return Err(Error::OutOfRange {
                parameter: "min_readings",
            });
        }
        self.min_readings = count;
        Ok(self)
    }

    /// The blank in signal units.
    #[must_use]
    pub fn blank_value(&self) -> T {
        self.blank
    }

    /// The sensor ceiling in signal units (infinity when none).
    #[must_use]
    pub fn ceiling_value(&self) -> T {
        self.ceiling
    }

    /// Standard deviation of one reading at signal `y` (above blank) under the
    /// configured noise model, in signal units.
    #[must_use]
    pub fn noise_sd(&self, y: T) -> T {
        self.noise_model().sd(y)
    }

    /// Whether a blank was configured.
    #[must_use]
    pub fn blank_is_known(&self) -> bool {
        self.blank_known
    }

    /// The configured noise model.
    pub(crate) fn noise_model(&self) -> NoiseModel<T> {
        NoiseModel {
            floor: self.noise_floor,
            fraction: self.noise_fraction,
        }
    }
}

/// Default spread of an unknown blank, signal units (OD units): see
/// [`EstimatorConfig::unknown_blank_sd`].
pub const DEFAULT_UNKNOWN_BLANK_SD: f64 = 0.05;

/// A reading's standard deviation: `floor + fraction × y`, signal units.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub(crate) struct NoiseModel<T> {
    pub(crate) floor: T,
    pub(crate) fraction: T,
}

impl<T: Real> NoiseModel<T> {
    /// The sd at signal `y` above blank.
    pub(crate) fn sd(&self, y: T) -> T {
        self.floor + self.fraction * y.max(T::ZERO)
    }
}
