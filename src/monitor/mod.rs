//! The culture monitor: growth phase, time-to-target forecasts, the
//! saturation alert and sensor-fault flags, in fixed memory.
//!
//! The monitor turns each reading's estimator outcome and the current
//! [`Estimate`] into what the person at the bench and the firmware act on.
//! [`Watch`] bundles an estimator and a monitor behind one call per reading.
//!
//! # Decision rules
//!
//! * **Phase** from the fitted signal as a fraction p of the capacity: the
//!   logistic's per-capita rate is r(1 − p), so p = 0.3 is where it has fallen
//!   to 70 % of its maximum (deceleration) and p = 0.95 where it is below 5 %
//!   (stationary); thresholds are configurable. Lag until the estimator has
//!   seen growth; exponential while the capacity is not yet in sight.
//!   Decline when the median of the last three readings falls by the decline
//!   fraction below the highest median seen while stationary. Phases only
//!   move forward (a batch culture does not grow backwards), and a new phase
//!   must hold for `confirm_readings` readings in a row: noise cannot make
//!   them flicker. A dilution (estimator restart) starts over.
//! * **Forecasts** of the time to a level use the delta method on the
//!   estimate's covariance (see [`Estimate::time_to_reach`]); the 95 %
//!   interval is ± 1.96 sd.
//! * **Saturation alert** fires once when the capacity's relative sd is at
//!   most `alert_max_rel_sd` and either the early end of the 95 % interval of
//!   the forecast time to the alert fraction is within the lead time, or the
//!   readings' median has already reached the alert level. It re-arms when
//!   the readings fall below `rearm_fraction` of capacity or the estimator
//!   restarts (a dilution).
//! * **Targets** fire "due" when the forecast is informative (its sd at most
//!   the lead time) and the early end of its 95 % interval is within the
//!   lead time, and "reached" when the readings' median reaches them.

mod config;
mod event;
mod watch;

pub use config::MonitorConfig;
pub use event::{Event, Fault, Faults, Phase, Target, TimedEvent};
pub use watch::Watch;

use crate::math::median3;
use crate::model::OnlineFamily;
use crate::{Error, Estimate, Measured, Outcome, Real, Rejection};
use heapless::{Deque, Vec};

/// What the monitor says about one reading.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Report<T = f32> {
    /// The estimator's verdict on the reading.
    pub outcome: Outcome,
    /// The growth phase after this reading.
    pub phase: Phase,
    /// Faults this reading raised.
    pub faults: Faults,
    /// Forecast time (hours, caller's clock) of reaching the alert fraction
    /// of capacity, when the capacity is known.
    pub saturation_eta_h: Option<Measured<T>>,
    /// True from the saturation alert until it re-arms.
    pub alert_active: bool,
}

#[derive(Clone, Copy, Debug)]
struct TargetState<T> {
    target: Target<T>,
    due: bool,
    reached: bool,
}

/// The culture monitor. `TARGETS` user targets (default 4) and an event
/// queue of `EVENTS` (default 8); when the queue is full the oldest event is
/// dropped and counted in [`Monitor::events_lost`].
///
/// # Examples
///
/// ```
/// use plateau::{Estimator, EstimatorConfig, GrowthCurve, Logistic, Monitor, MonitorConfig, Phase};
/// // Invented culture: capacity 1.5 OD, 0.7 per hour, midpoint 8 h.
/// let truth = Logistic::<f64>::from_midpoint(1.5, 0.7, 8.0)?;
/// let mut estimator = Estimator::<f32>::new(EstimatorConfig::new());
/// let mut monitor: Monitor = Monitor::new(MonitorConfig::new());
/// let mut phase = Phase::Lag;
/// for i in 0..=120 {
///     let t = f64::from(i) / 6.0;
///     let (t, y) = (t as f32, truth.value(t) as f32);
///     let outcome = estimator.update(t, y);
///     phase = monitor.observe(t, y, outcome, estimator.estimate().as_ref()).phase;
/// }
/// assert_eq!(phase, Phase::Stationary);
/// assert!(monitor.saturation_alert_h().is_some());
/// # Ok::<(), plateau::Error>(())
/// ```
#[derive(Clone, Debug)]
pub struct Monitor<T: Real = f32, const TARGETS: usize = 4, const EVENTS: usize = 8> {
    config: MonitorConfig<T>,
    phase: Phase,
    pending: Phase,
    pending_count: u8,
    last_time_h: T,
    has_time: bool,
    last_value: T,
    same_count: u8,
    recent: [T; 3],
    recent_next: u8,
    recent_count: u8,
    stationary_peak: T,
    alert_h: Option<T>,
    alert_active: bool,
    spikes: u32,
    targets: Vec<TargetState<T>, TARGETS>,
    events: Deque<TimedEvent<T>, EVENTS>,
    lost: u32,
    raised: u32,
}

impl<T: Real, const TARGETS: usize, const EVENTS: usize> Monitor<T, TARGETS, EVENTS> {
    /// A new monitor with no readings and no targets.
    #[must_use]
    pub fn new(config: MonitorConfig<T>) -> Self {
        Self {
            config,
            phase: Phase::Lag,
            pending: Phase::Lag,
            pending_count: 0,
            last_time_h: T::ZERO,
            has_time: false,
            last_value: T::ZERO,
            same_count: 0,
            recent: [T::ZERO; 3],
            recent_next: 0,
            recent_count: 0,
            stationary_peak: T::ZERO,
            alert_h: None,
            alert_active: false,
            spikes: 0,
            targets: Vec::new(),
            events: Deque::new(),
            lost: 0,
            raised: 0,
        }
    }

    /// The configuration.
    #[must_use]
    pub fn config(&self) -> &MonitorConfig<T> {
        &self.config
    }

    /// Adds a user target; returns its index (used in target events).
    ///
    /// # Errors
    /// `Error::OutOfRange { parameter: "target" }` for a level that is not
    /// finite and positive or a fraction outside (0, 1);
    /// `Error::OutOfRange { parameter: "targets" }` when all `TARGETS` slots
    /// are taken.
    pub fn add_target(&mut self, target: Target<T>) -> Result<u8, Error> {
        if !target.is_valid() {
            return Err(Error::OutOfRange {
                parameter: "target",
            });
        }
        let index = u8::try_from(self.targets.len()).map_err(|_| Error::OutOfRange {
            parameter: "targets",
        })?;
        self.targets
            .push(TargetState {
                target,
                due: false,
                reached: false,
            })
            .map_err(|_| Error::OutOfRange {
                parameter: "targets",
            })?;
        Ok(index)
    }

    /// The current growth phase.
    #[must_use]
    pub fn phase(&self) -> Phase {
        self.phase
    }

    /// Time (hours) of the reading that raised the saturation alert, if it
    /// has fired since the last re-arm.
    #[must_use]
    pub fn saturation_alert_h(&self) -> Option<T> {
        self.alert_h
    }

    /// Spikes rejected so far.
    #[must_use]
    pub fn spikes(&self) -> u32 {
        self.spikes
    }

    /// Takes the oldest pending event.
    pub fn next_event(&mut self) -> Option<TimedEvent<T>> {
        self.events.pop_front()
    }

    /// Events waiting in the queue.
    #[must_use]
    pub fn pending_events(&self) -> usize {
        self.events.len()
    }

    /// Events dropped because the queue was full (oldest first).
    #[must_use]
    pub fn events_lost(&self) -> u32 {
        self.lost
    }

    /// Forecast time (hours, caller's clock) at which the culture reaches
    /// target `index`, with its sd; `None` if unknown or out of reach.
    #[must_use]
    pub fn forecast<const P: usize, F: OnlineFamily<T, P>>(
        &self,
        index: u8,
        estimate: &Estimate<T, P, F>,
    ) -> Option<Measured<T>> {
        let state = self.targets.get(usize::from(index))?;
        forecast(state.target, estimate)
    }

    /// Events raised so far: always `taken + pending_events() + events_lost()`.
    #[must_use]
    pub fn events_raised(&self) -> u32 {
        self.raised
    }

    fn push(&mut self, time_h: T, event: Event<T>) {
        self.raised = self.raised.saturating_add(1);
        if self.events.is_full() {
            let _ = self.events.pop_front();
            self.lost = self.lost.saturating_add(1);
        }
        let _ = self.events.push_back(TimedEvent { time_h, event });
    }

    fn fault(&mut self, faults: &mut Faults, time_h: T, fault: Fault, value: T) {
        faults.insert(fault);
        self.push(time_h, Event::Fault { fault, value });
    }

    /// Takes one reading with the estimator's outcome for it and the
    /// estimate after it. Never panics, never allocates.
    pub fn observe<const P: usize, F: OnlineFamily<T, P>>(
        &mut self,
        time_h: T,
        value: T,
        outcome: Outcome,
        estimate: Option<&Estimate<T, P, F>>,
    ) -> Report<T> {
        let mut faults = Faults::NONE;
        self.sensor_faults(&mut faults, time_h, value, outcome);
        if outcome == Outcome::Restarted {
            self.restart(time_h);
        }
        // Readings the estimator accepted or gated as spikes are real sensor
        // values: the median of the last three of them (robust to a single
        // spike) decides "reached" and "decline", which the growth model
        // cannot see when the culture stops following it.
        let valid = matches!(
            outcome,
            Outcome::Accepted | Outcome::Restarted | Outcome::Rejected(Rejection::Spike)
        );
        if valid {
            self.recent[usize::from(self.recent_next)] = value;
            self.recent_next = (self.recent_next + 1) % 3;
            self.recent_count = (self.recent_count + 1).min(3);
            self.update_phase(&mut faults, time_h, value, estimate);
        }
        let saturation_eta_h = estimate
            .filter(|e| e.capacity.is_some())
            .and_then(|e| e.time_to_fraction(self.config.alert_fraction));
        if valid && let Some(e) = estimate {
            self.saturation(time_h, e, saturation_eta_h);
            self.targets_due(time_h, e);
        }
        Report {
            outcome,
            phase: self.phase,
            faults,
            saturation_eta_h,
            alert_active: self.alert_active,
        }
    }

    fn sensor_faults(&mut self, faults: &mut Faults, time_h: T, value: T, outcome: Outcome) {
        match outcome {
            Outcome::Rejected(Rejection::NotFinite | Rejection::Negative) => {
                self.fault(faults, time_h, Fault::Invalid, value);
            }
            Outcome::Rejected(Rejection::AtCeiling) => {
                self.fault(faults, time_h, Fault::Saturated, value);
            }
            Outcome::Rejected(Rejection::Spike) => {
                self.spikes = self.spikes.saturating_add(1);
                self.fault(faults, time_h, Fault::Spike, value);
            }
            Outcome::Rejected(Rejection::TimeBackwards) => {
                self.fault(faults, time_h, Fault::TimeBackwards, value);
            }
            _ => {}
        }
        if value.is_finite() && (value < self.config.sensor_min || value > self.config.sensor_max) {
            self.fault(faults, time_h, Fault::OutOfRange, value);
        }
        if !time_h.is_finite() {
            return;
        }
        if self.has_time {
            let dt = time_h - self.last_time_h;
            if dt > self.config.gap_h {
                self.fault(faults, time_h, Fault::Gap, value);
            }
            #[allow(clippy::float_cmp, reason = "a repeated timestamp is an exact repeat")]
            if dt == T::ZERO {
                self.fault(faults, time_h, Fault::TimeRepeated, value);
            }
        }
        if !self.has_time || time_h > self.last_time_h {
            self.last_time_h = time_h;
            self.has_time = true;
        }
        // Stuck sensor: bitwise-identical readings in a row (readings at the
        // ceiling are flagged as saturated instead).
        let at_ceiling = outcome == Outcome::Rejected(Rejection::AtCeiling);
        #[allow(clippy::float_cmp, reason = "a stuck sensor repeats the exact value")]
        let same = value.is_finite() && value == self.last_value && !at_ceiling;
        if same {
            self.same_count = self.same_count.saturating_add(1);
            if self.same_count.saturating_add(1) == self.config.stuck_readings {
                self.fault(faults, time_h, Fault::Stuck, value);
            }
        } else {
            self.same_count = 0;
            self.last_value = value;
        }
    }

    fn restart(&mut self, time_h: T) {
        self.push(time_h, Event::Restarted);
        // The estimator also restarts on a clock reset: gaps count from here.
        self.last_time_h = time_h;
        self.has_time = true;
        if self.alert_active {
            self.alert_active = false;
            self.alert_h = None;
            self.push(time_h, Event::SaturationRearmed);
        }
        for t in &mut self.targets {
            t.due = false;
            t.reached = false;
        }
        self.recent_count = 0;
        self.stationary_peak = T::ZERO;
        let from = self.phase;
        self.phase = Phase::Lag;
        self.pending = Phase::Lag;
        self.pending_count = 0;
        if from != Phase::Lag {
            self.push(
                time_h,
                Event::Phase {
                    from,
                    to: Phase::Lag,
                },
            );
        }
    }

    fn median_recent(&self) -> Option<T> {
        (self.recent_count >= 3).then(|| median3(self.recent))
    }

    fn candidate<const P: usize, F: OnlineFamily<T, P>>(
        &self,
        estimate: Option<&Estimate<T, P, F>>,
    ) -> Phase {
        let Some(e) = estimate else {
            return Phase::Lag;
        };
        // Past exponential only once the estimator publishes a capacity (its
        // precision and signal-to-noise bars): phases never step back.
        let Some(capacity) = e.capacity else {
            return Phase::Exponential;
        };
        if self.phase >= Phase::Stationary
            && let Some(m) = self.median_recent()
        {
            let level = m - e.blank();
            if level < (T::ONE - self.config.decline_fraction) * self.stationary_peak {
                return Phase::Decline;
            }
        }
        let p = (e.fitted_value.value - e.blank()) / capacity.value;
        if p >= self.config.stationary_fraction {
            Phase::Stationary
        } else if p >= self.config.deceleration_fraction {
            Phase::Deceleration
        } else {
            Phase::Exponential
        }
    }

    fn update_phase<const P: usize, F: OnlineFamily<T, P>>(
        &mut self,
        faults: &mut Faults,
        time_h: T,
        value: T,
        estimate: Option<&Estimate<T, P, F>>,
    ) {
        let candidate = self.candidate(estimate);
        if candidate > self.phase {
            if candidate == self.pending {
                self.pending_count = self.pending_count.saturating_add(1);
            } else {
                self.pending = candidate;
                self.pending_count = 1;
            }
            if self.pending_count >= self.config.confirm_readings {
                let from = self.phase;
                self.phase = candidate;
                self.pending_count = 0;
                self.push(
                    time_h,
                    Event::Phase {
                        from,
                        to: candidate,
                    },
                );
                if candidate == Phase::Decline {
                    self.fault(faults, time_h, Fault::Decline, value);
                }
            }
        } else {
            self.pending = self.phase;
            self.pending_count = 0;
        }
        if self.phase == Phase::Stationary
            && let (Some(m), Some(e)) = (self.median_recent(), estimate)
        {
            self.stationary_peak = self.stationary_peak.max(m - e.blank());
        }
    }

    fn saturation<const P: usize, F: OnlineFamily<T, P>>(
        &mut self,
        time_h: T,
        e: &Estimate<T, P, F>,
        eta: Option<Measured<T>>,
    ) {
        let Some(capacity) = e.capacity else {
            return;
        };
        let level_now = self.median_recent().map(|m| m - e.blank());
        if self.alert_active {
            if level_now.is_some_and(|l| l < self.config.rearm_fraction * capacity.value) {
                self.alert_active = false;
                self.alert_h = None;
                self.push(time_h, Event::SaturationRearmed);
            }
            return;
        }
        if capacity.relative_sd() > self.config.alert_max_rel_sd {
            return;
        }
        let alert_level = self.config.alert_fraction * capacity.value;
        let reached = level_now.is_some_and(|l| l >= alert_level);
        // A forecast time already in the past while the readings are below
        // the alert level means the estimate is stale (a dilution the
        // estimator has not yet restarted on): wait for the readings.
        let due = eta.is_some_and(|eta| {
            eta.value >= time_h
                && eta.value - T::from_f64(1.96) * eta.sd - time_h <= self.config.alert_lead_h
        });
        if reached || due {
            self.alert_active = true;
            self.alert_h = Some(time_h);
            let eta_h = eta.map_or(time_h, |m| m.value);
            self.push(
                time_h,
                Event::SaturationAlert {
                    eta_h,
                    capacity: capacity.value,
                },
            );
        }
    }

    fn targets_due<const P: usize, F: OnlineFamily<T, P>>(&mut self, time_h: T, e: &Estimate<T, P, F>) {
        let level_now = self.median_recent();
        let lead = self.config.alert_lead_h;
        let mut fired: [(bool, bool, T); TARGETS] = [(false, false, T::ZERO); TARGETS];
        for (i, state) in self.targets.iter_mut().enumerate() {
            let level = match state.target {
                Target::Level(v) => Some(v),
                Target::FractionOfCapacity(p) => e.capacity.map(|k| e.blank() + p * k.value),
            };
            if !state.reached
                && let (Some(level), Some(now)) = (level, level_now)
                && now >= level
            {
                state.reached = true;
                fired[i].1 = true;
            }
            if !state.due
                && !state.reached
                && let Some(eta) = forecast(state.target, e)
                && eta.sd <= lead
                && eta.value - T::from_f64(1.96) * eta.sd - time_h <= lead
            {
                state.due = true;
                fired[i].0 = true;
                fired[i].2 = eta.value;
            }
        }
        for (i, &(due, reached, eta_h)) in fired.iter().enumerate() {
            let target = u8::try_from(i).unwrap_or(u8::MAX);
            if due {
                self.push(time_h, Event::TargetDue { target, eta_h });
            }
            if reached {
                self.push(time_h, Event::TargetReached { target });
            }
        }
    }
}

fn forecast<T: Real, const P: usize, F: OnlineFamily<T, P>>(
    target: Target<T>,
    e: &Estimate<T, P, F>,
) -> Option<Measured<T>> {
    match target {
        Target::Level(v) => e.time_to_reach(v),
        Target::FractionOfCapacity(p) => {
            e.capacity?;
            e.time_to_fraction(p)
        }
    }
}
