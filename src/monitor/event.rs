//! What the monitor reports: growth phases, sensor and culture faults, and
//! timed events.

use crate::Real;

/// Growth phase of the culture (common practice names for a batch culture).
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Phase {
    /// Not yet known: the readings have not yet shown growth (less than the
    /// estimator's `min_growth_ratio` since the start), so nothing can be
    /// said of the phase — in particular not that it is a lag.
    Unknown,
    /// A lag the fitted curve shows (its tangent lag clear of its
    /// uncertainty) and that has not ended yet.
    Lag,
    /// Growth near the maximum specific rate: below the deceleration
    /// fraction of capacity, or capacity not yet in sight.
    Exponential,
    /// The specific rate is falling: between the deceleration and the
    /// stationary fraction of capacity.
    Deceleration,
    /// At the plateau: above the stationary fraction of capacity.
    Stationary,
    /// The readings fell by the decline fraction below the stationary level
    /// (possible lysis or contamination: a cue for a person to look).
    Decline,
}

impl Phase {
    /// A short lower-case name, for logs and CSV cells.
    #[must_use]
    pub const fn as_str(&self) -> &'static str {
        match self {
            Self::Unknown => "not_yet_known",
            Self::Lag => "lag",
            Self::Exponential => "exponential",
            Self::Deceleration => "deceleration",
            Self::Stationary => "stationary",
            Self::Decline => "decline",
        }
    }
}

impl core::fmt::Display for Phase {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// A sensor or culture fault, raised by one reading.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[repr(u8)]
pub enum Fault {
    /// Time or value not finite, or a negative value.
    Invalid = 0,
    /// Outside the configured sensor range.
    OutOfRange = 1,
    /// At or above the sensor ceiling (a saturated detector).
    Saturated = 2,
    /// A run of identical readings (stuck sensor).
    Stuck = 3,
    /// Rejected by the estimator's innovation gate (bubble or glitch).
    Spike = 4,
    /// A pause in the stream longer than the configured gap.
    Gap = 5,
    /// Time earlier than the previous reading.
    TimeBackwards = 6,
    /// Time equal to the previous reading.
    TimeRepeated = 7,
    /// The signal is falling after the plateau.
    Decline = 8,
}

impl Fault {
    /// A short lower-case name, for logs and CSV cells.
    #[must_use]
    pub const fn as_str(&self) -> &'static str {
        match self {
            Self::Invalid => "invalid",
            Self::OutOfRange => "out_of_range",
            Self::Saturated => "saturated",
            Self::Stuck => "stuck",
            Self::Spike => "spike",
            Self::Gap => "gap",
            Self::TimeBackwards => "time_backwards",
            Self::TimeRepeated => "time_repeated",
            Self::Decline => "decline",
        }
    }

    /// Every fault, in flag order.
    pub const ALL: [Self; 9] = [
        Self::Invalid,
        Self::OutOfRange,
        Self::Saturated,
        Self::Stuck,
        Self::Spike,
        Self::Gap,
        Self::TimeBackwards,
        Self::TimeRepeated,
        Self::Decline,
    ];
}

/// The set of faults one reading raised (a bit set).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Faults(u16);

impl Faults {
    /// No fault.
    pub const NONE: Self = Self(0);

    /// True if `fault` is in the set.
    #[must_use]
    pub const fn contains(&self, fault: Fault) -> bool {
        self.0 & (1 << fault as u8) != 0
    }

    /// True if no fault is in the set.
    #[must_use]
    pub const fn is_empty(&self) -> bool {
        self.0 == 0
    }

    pub(crate) fn insert(&mut self, fault: Fault) {
        self.0 |= 1 << fault as u8;
    }

    /// The faults in the set, in flag order.
    pub fn iter(&self) -> impl Iterator<Item = Fault> + '_ {
        Fault::ALL.into_iter().filter(|f| self.contains(*f))
    }
}

/// Something the person at the bench or the firmware may act on.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Event<T = f32> {
    /// The growth phase changed.
    Phase {
        /// The phase before.
        from: Phase,
        /// The phase now.
        to: Phase,
    },
    /// The culture will reach the alert fraction of capacity within the lead
    /// time, or has reached it.
    SaturationAlert {
        /// Forecast time of reaching the alert level, hours (caller's clock).
        eta_h: T,
        /// Capacity above blank at the time of the alert, signal units.
        capacity: T,
    },
    /// The saturation alert re-armed (the culture was diluted).
    SaturationRearmed,
    /// A user target is forecast within the lead time.
    TargetDue {
        /// Index of the target, in the order added.
        target: u8,
        /// Forecast time of reaching it, hours (caller's clock).
        eta_h: T,
    },
    /// A user target level was reached (median of the last three readings).
    TargetReached {
        /// Index of the target, in the order added.
        target: u8,
    },
    /// A fault raised by a reading, with that reading's value.
    Fault {
        /// Which fault.
        fault: Fault,
        /// The reading's value, signal units (may be NaN for an invalid one).
        value: T,
    },
    /// The estimator restarted after a dilution.
    Restarted,
}

/// An event with the time of the reading that raised it.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TimedEvent<T = f32> {
    /// Time of the reading, hours (caller's clock; may be non-finite for an
    /// invalid reading).
    pub time_h: T,
    /// What happened.
    pub event: Event<T>,
}

/// A user target: a level the culture will reach.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Target<T = f32> {
    /// An absolute signal level, blank included (signal units).
    Level(T),
    /// A fraction of the carrying capacity above blank (0 to 1).
    FractionOfCapacity(T),
}

impl<T: Real> Target<T> {
    pub(crate) fn is_valid(&self) -> bool {
        match *self {
            Self::Level(v) => v.is_finite() && v > T::ZERO,
            Self::FractionOfCapacity(p) => p > T::ZERO && p < T::ONE,
        }
    }
}
