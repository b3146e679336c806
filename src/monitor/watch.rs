//! One call per reading: an estimator and a monitor together.

use super::{Monitor, MonitorConfig, Report, Target, TimedEvent};
use crate::model::{LagRichards, OnlineFamily};
use crate::{Error, Estimate, Estimator, EstimatorConfig, Measured, Real};

/// The firmware facade: feed a reading, get a [`Report`], drain events.
///
/// Owns an [`Estimator`] (`N` history slots) and a [`Monitor`] (`TARGETS`
/// targets, `EVENTS` queued events). Fixed memory, no heap; `update` never
/// panics.
///
/// # Examples
///
/// ```
/// use plateau::{Event, EstimatorConfig, GrowthCurve, Logistic, MonitorConfig, Target, Watch};
/// // Invented culture: capacity 1.5 OD, 0.7 per hour, midpoint 8 h, read
/// // every 10 minutes; induce at 0.6 OD.
/// let truth = Logistic::<f64>::from_midpoint(1.5, 0.7, 8.0)?;
/// let mut watch: Watch = Watch::new(EstimatorConfig::new(), MonitorConfig::new());
/// let induction = watch.add_target(Target::Level(0.6))?;
/// let mut alert_at = None;
/// for i in 0..=120 {
///     let t = f64::from(i) / 6.0;
///     let report = watch.update(t as f32, truth.value(t) as f32);
///     while let Some(event) = watch.next_event() {
///         if let Event::SaturationAlert { .. } = event.event {
///             alert_at = Some(event.time_h);
///         }
///     }
/// }
/// // 90 % of capacity is reached at 8 + ln 9 / 0.7 = 11.14 h; the alert
/// // comes about an hour before.
/// let alert_at = alert_at.expect("alert");
/// assert!(alert_at < 11.14 && alert_at > 9.0, "{alert_at}");
/// # Ok::<(), plateau::Error>(())
/// ```
#[derive(Clone, Debug)]
pub struct Watch<
    T: Real = f32,
    const N: usize = 16,
    const TARGETS: usize = 4,
    const EVENTS: usize = 8,
    const P: usize = 5,
    F: OnlineFamily<T, P> = LagRichards<T>,
> {
    estimator: Estimator<T, N, P, F>,
    monitor: Monitor<T, TARGETS, EVENTS>,
}

impl<
    T: Real,
    const N: usize,
    const TARGETS: usize,
    const EVENTS: usize,
    const P: usize,
    F: OnlineFamily<T, P>,
> Watch<T, N, TARGETS, EVENTS, P, F>
{
    /// A new watch over a new culture.
    #[must_use]
    pub fn new(estimator: EstimatorConfig<T>, monitor: MonitorConfig<T>) -> Self {
        Self {
            estimator: Estimator::new(estimator),
            monitor: Monitor::new(monitor),
        }
    }

    /// Feeds one reading (`time_h` hours, `value` signal units).
    pub fn update(&mut self, time_h: T, value: T) -> Report<T> {
        let outcome = self.estimator.update(time_h, value);
        let estimate = self.estimator.estimate();
        self.monitor
            .observe(time_h, value, outcome, estimate.as_ref())
    }

    /// A blank reading (medium alone, before inoculation), signal units:
    /// see [`Estimator::blank_reading`]. Returns the blank so far.
    ///
    /// # Errors
    /// As [`Estimator::blank_reading`]: not finite, or after the culture
    /// readings started.
    pub fn blank_reading(&mut self, value: T) -> Result<Measured<T>, Error> {
        self.estimator.blank_reading(value)
    }

    /// Adds a user target (see [`Monitor::add_target`]).
    ///
    /// # Errors
    /// As [`Monitor::add_target`].
    pub fn add_target(&mut self, target: Target<T>) -> Result<u8, Error> {
        self.monitor.add_target(target)
    }

    /// The current estimate, if any.
    #[must_use]
    pub fn estimate(&self) -> Option<Estimate<T, P, F>> {
        self.estimator.estimate()
    }

    /// Forecast time to target `index` (hours, caller's clock) with its sd.
    #[must_use]
    pub fn forecast(&self, index: u8) -> Option<Measured<T>> {
        self.monitor.forecast(index, &self.estimator.estimate()?)
    }

    /// Takes the oldest pending event.
    pub fn next_event(&mut self) -> Option<TimedEvent<T>> {
        self.monitor.next_event()
    }

    /// Events dropped because the queue was full.
    #[must_use]
    pub fn events_lost(&self) -> u32 {
        self.monitor.events_lost()
    }

    /// The estimator.
    #[must_use]
    pub fn estimator(&self) -> &Estimator<T, N, P, F> {
        &self.estimator
    }

    /// The monitor.
    #[must_use]
    pub fn monitor(&self) -> &Monitor<T, TARGETS, EVENTS> {
        &self.monitor
    }
}
