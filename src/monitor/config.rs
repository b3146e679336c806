//! The monitor's validated configuration.

use crate::error::{finite, positive};
use crate::{Error, Real};

/// Settings of a [`Monitor`](crate::Monitor): a validated `Copy` value kept
/// apart from the running state. Every setter returns [`Error`] naming the
/// bad parameter.
///
/// Units: signal units (OD units for a photometer) for levels, hours for
/// times, fractions are of the carrying capacity above blank.
///
/// # Examples
///
/// ```
/// use plateau::MonitorConfig;
/// // Alert 2 h before the culture reaches 80 % of its capacity.
/// let config = MonitorConfig::<f32>::new().saturation_alert(0.8, 2.0)?;
/// assert!(MonitorConfig::<f32>::new().saturation_alert(1.2, 1.0).is_err());
/// # Ok::<(), plateau::Error>(())
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct MonitorConfig<T = f32> {
    pub(crate) alert_fraction: T,
    pub(crate) alert_lead_h: T,
    pub(crate) alert_max_rel_sd: T,
    pub(crate) alert_sds: T,
    pub(crate) alert_max_eta_sd_h: T,
    pub(crate) rearm_fraction: T,
    pub(crate) sensor_min: T,
    pub(crate) sensor_max: T,
    pub(crate) gap_h: T,
    pub(crate) decline_fraction: T,
    pub(crate) deceleration_fraction: T,
    pub(crate) stationary_fraction: T,
    pub(crate) stuck_readings: u8,
    pub(crate) confirm_readings: u8,
}

/// Default of [`MonitorConfig::alert_sds`]: the alert fires when the
/// forecast time minus one standard deviation is within the lead time.
pub const DEFAULT_ALERT_SDS: f64 = 1.0;

/// Default of [`MonitorConfig::alert_max_eta_sd_h`], hours.
pub const DEFAULT_ALERT_MAX_ETA_SD_H: f64 = 1.5;

impl<T: Real> Default for MonitorConfig<T> {
    fn default() -> Self {
        Self::new()
    }
}

impl<T: Real> MonitorConfig<T> {
    /// The defaults (see each setter).
    #[must_use]
    pub fn new() -> Self {
        Self {
            alert_fraction: T::from_f64(0.9),
            alert_lead_h: T::ONE,
            alert_max_rel_sd: T::from_f64(0.1),
            alert_sds: T::from_f64(DEFAULT_ALERT_SDS),
            alert_max_eta_sd_h: T::from_f64(DEFAULT_ALERT_MAX_ETA_SD_H),
            rearm_fraction: T::from_f64(0.6),
            sensor_min: -T::INFINITY,
            sensor_max: T::INFINITY,
            gap_h: T::ONE,
            decline_fraction: T::from_f64(0.1),
            deceleration_fraction: T::from_f64(0.3),
            stationary_fraction: T::from_f64(0.95),
            stuck_readings: 8,
            confirm_readings: 3,
        }
    }

    /// Saturation alert: fires when the forecast says the culture reaches
    /// `fraction` of its capacity within `lead_h` hours (or has reached it).
    /// Defaults 0.9 and 1 h.
    ///
    /// # Errors
    /// `fraction` must lie in (0, 1) and above the re-arm fraction (set
    /// [`rearm_fraction`](Self::rearm_fraction) first to lower it: an alert
    /// level at or below its re-arm level would raise and re-arm the alert
    /// on every wobble of the readings); `lead_h` must be finite and ≥ 0.
    pub fn saturation_alert(mut self, fraction: T, lead_h: T) -> Result<Self, Error> {
        if !(fraction > T::ZERO && fraction < T::ONE) {
            return Err(Error::OutOfRange {
                parameter: "alert_fraction",
            });
        }
        if !(fraction > self.rearm_fraction) {
            return Err(Error::Conflict {
                parameter: "alert_fraction",
                other: "rearm_fraction",
            });
        }
        let lead_h = finite(lead_h, "alert_lead_h")?;
        if lead_h < T::ZERO {
            return Err(Error::OutOfRange {
                parameter: "alert_lead_h",
            });
        }
        self.alert_fraction = fraction;
        self.alert_lead_h = lead_h;
        Ok(self)
    }

    /// Largest relative standard deviation of the capacity at which the
    /// saturation alert may fire (default 0.1): no alert on a plateau that is
    /// not yet in sight.
    ///
    /// # Errors
    /// Must be finite and > 0.
    pub fn alert_max_rel_sd(mut self, rel_sd: T) -> Result<Self, Error> {
        self.alert_max_rel_sd = positive(rel_sd, "alert_max_rel_sd")?;
        Ok(self)
    }

    /// How early the alert comes: it fires once the forecast time minus
    /// `sds` of its standard deviations is within the lead time (default
    /// [`DEFAULT_ALERT_SDS`]; 0 trusts the forecast's centre, 1.96 its 95 %
    /// interval's early end). Larger values make a late alert rarer and an
    /// early one more likely when the forecast is uncertain.
    ///
    /// # Errors
    /// Must be finite and ≥ 0.
    pub fn alert_sds(mut self, sds: T) -> Result<Self, Error> {
        let sds = finite(sds, "alert_sds")?;
        if sds < T::ZERO {
            return Err(Error::OutOfRange {
                parameter: "alert_sds",
            });
        }
        self.alert_sds = sds;
        Ok(self)
    }

    /// The largest standard deviation (hours) of the forecast time to the
    /// alert fraction for the forecast to raise the alert (default
    /// [`DEFAULT_ALERT_MAX_ETA_SD_H`]); until the forecast is that precise,
    /// only the readings reaching the alert level raise it.
    ///
    /// # Errors
    /// Must be finite and > 0.
    pub fn alert_max_eta_sd_h(mut self, sd_h: T) -> Result<Self, Error> {
        self.alert_max_eta_sd_h = positive(sd_h, "alert_max_eta_sd_h")?;
        Ok(self)
    }

    /// After an alert, it re-arms once the readings fall below this fraction
    /// of the capacity (a dilution), default 0.6; the gap to the alert
    /// fraction is the hysteresis.
    ///
    /// # Errors
    /// Must lie in (0, 1) and below the alert fraction.
    pub fn rearm_fraction(mut self, fraction: T) -> Result<Self, Error> {
        if !(fraction > T::ZERO && fraction < T::ONE) {
            return Err(Error::OutOfRange {
                parameter: "rearm_fraction",
            });
        }
        if !(fraction < self.alert_fraction) {
            return Err(Error::Conflict {
                parameter: "rearm_fraction",
                other: "alert_fraction",
            });
        }
        self.rearm_fraction = fraction;
        Ok(self)
    }

    /// The sensor's valid range in signal units; readings outside raise an
    /// out-of-range fault. Default: no range (−∞ to ∞); readings the
    /// estimator finds impossible raise an invalid fault anyway.
    ///
    /// # Errors
    /// `min` must be finite, `max` > `min` (infinity allowed).
    pub fn sensor_range(mut self, min: T, max: T) -> Result<Self, Error> {
        let min = finite(min, "sensor_min")?;
        if max.is_nan() || max <= min {
            return Err(Error::OutOfRange {
                parameter: "sensor_max",
            });
        }
        self.sensor_min = min;
        self.sensor_max = max;
        Ok(self)
    }

    /// A pause between readings longer than this (hours) raises a gap fault.
    /// Default 1 h.
    ///
    /// # Errors
    /// Must be finite and > 0.
    pub fn gap_h(mut self, gap_h: T) -> Result<Self, Error> {
        self.gap_h = positive(gap_h, "gap_h")?;
        Ok(self)
    }

    /// This many identical readings in a row raise a stuck-sensor fault
    /// (2 to 255, default 8).
    ///
    /// # Errors
    /// Below 2.
    pub fn stuck_readings(mut self, count: u8) -> Result<Self, Error> {
        if count < 2 {
            return Err(Error::OutOfRange {
                parameter: "stuck_readings",
            });
        }
        self.stuck_readings = count;
        Ok(self)
    }

    /// A fall of the readings by this fraction below the stationary level
    /// raises a decline (default 0.1).
    ///
    /// # Errors
    /// Must lie in (0, 1).
    pub fn decline_fraction(mut self, fraction: T) -> Result<Self, Error> {
        if !(fraction > T::ZERO && fraction < T::ONE) {
            return Err(Error::OutOfRange {
                parameter: "decline_fraction",
            });
        }
        self.decline_fraction = fraction;
        Ok(self)
    }

    /// Phase thresholds as fractions of capacity: deceleration from
    /// `deceleration` (default 0.3, where the per-capita rate r(1 − y/K) has
    /// fallen to 70 % of its maximum), stationary from `stationary` (default
    /// 0.95, per-capita rate below 5 % of its maximum).
    ///
    /// # Errors
    /// Both in (0, 1) and `deceleration` < `stationary`.
    pub fn phase_fractions(mut self, deceleration: T, stationary: T) -> Result<Self, Error> {
        if !(deceleration > T::ZERO && deceleration < stationary && stationary < T::ONE) {
            return Err(Error::OutOfRange {
                parameter: "phase_fractions",
            });
        }
        self.deceleration_fraction = deceleration;
        self.stationary_fraction = stationary;
        Ok(self)
    }

    /// Consecutive readings a phase change must hold before it is declared
    /// (1 to 32, default 3): the hysteresis that stops flicker.
    ///
    /// # Errors
    /// Out of 1..=32.
    pub fn confirm_readings(mut self, count: u8) -> Result<Self, Error> {
        if !(1..=32).contains(&count) {
            return Err(Error::OutOfRange {
                parameter: "confirm_readings",
            });
        }
        self.confirm_readings = count;
        Ok(self)
    }

    /// The alert fraction of capacity.
    #[must_use]
    pub fn alert_fraction(&self) -> T {
        self.alert_fraction
    }

    /// The alert lead time, hours.
    #[must_use]
    pub fn alert_lead_h(&self) -> T {
        self.alert_lead_h
    }
}
