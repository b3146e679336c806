//! The firmware's processing chain, written once and shared word for word with
//! the host replay (`examples/replay_firmware_log.rs` in the core crate
//! includes this file, `replay.rs` and `culture_log.rs` by path): stand-in
//! front end → [`Sampler`] → [`Photometer`] → [`Estimator`], and the
//! `final:` line both print, so CI can compare the device's estimate with the
//! host's for the same log through the same `f32` code.
//!
//! Everything here is `no_std` and allocation-free.

use core::fmt;

use embedded_hal::i2c::ErrorKind;
use plateau::sampler::DEFAULT_ADDRESS;
use plateau::{
    Error, Estimate, Estimator, EstimatorConfig, Linearity, Measured, Outcome, Photometer,
    PhotometerConfig, Reading, Sampler, SamplerConfig, SamplerError,
};

use crate::culture_log::{self, CULTURE_LOG, LINEARITY};
use crate::replay::{CONVERSIONS_PER_READING, ReplayFrontEnd, VirtualDelay};

/// Readings in the invented log.
pub const READINGS: usize = CULTURE_LOG.len();

/// The logged counts, in order.
const fn log_counts() -> [u32; READINGS] {
    let mut out = [0; READINGS];
    let mut i = 0;
    while i < READINGS {
        out[i] = CULTURE_LOG[i].counts;
        i += 1;
    }
    out
}

/// The logged mean counts, in order (what the stand-in front end serves).
pub static COUNTS: [u32; READINGS] = log_counts();

/// The firmware's photometer: the invented channel's dark, blank, full scale,
/// path length and linearity table.
///
/// # Errors
/// If a logged setting is out of range (it is not).
pub fn photometer() -> Result<Photometer<f32, 5>, Error> {
    let config = PhotometerConfig::new(
        culture_log::DARK_COUNTS,
        culture_log::BLANK_COUNTS,
        culture_log::FULL_SCALE_COUNTS,
        culture_log::PATH_LENGTH_CM,
    )?;
    Ok(Photometer::with_linearity(
        config,
        Linearity::new(&LINEARITY)?,
    ))
}

/// The sampler over the stand-in front end serving `counts`.
///
/// # Errors
/// If the sampler settings are out of range (they are not).
pub fn sampler(counts: &[u32]) -> Result<Sampler<ReplayFrontEnd<'_>, VirtualDelay>, Error> {
    let config = SamplerConfig::new(CONVERSIONS_PER_READING, 250, 40, 20)?;
    let bus = ReplayFrontEnd::new(DEFAULT_ADDRESS, counts);
    Ok(Sampler::new(
        bus,
        VirtualDelay::default(),
        DEFAULT_ADDRESS,
        config,
    ))
}

/// The estimator the firmware runs: the library defaults (an OD photometer
/// with 0.003 OD floor and 1 % proportional noise, no blank: the photometer
/// already removes it), 16 history slots. Building with the environment
/// variable `PLATEAU_REFIT_EVERY=K` (1 to 64) sets `refit_every(K)`, for the
/// cost measurements in the README.
#[must_use]
pub fn estimator() -> Estimator<f32> {
    let every = option_env!("PLATEAU_REFIT_EVERY")
        .and_then(|v| v.parse::<u8>().ok())
        .unwrap_or(1);
    let config = EstimatorConfig::new();
    Estimator::new(config.refit_every(every).unwrap_or(config))
}

/// What happened to one logged reading.
pub struct Step {
    /// Minutes since inoculation, as logged.
    pub time_min: u16,
    /// Hours since inoculation, as fed to the estimator.
    pub time_h: f32,
    /// What the sampler and photometer made of it.
    pub reading: Result<Reading<f32>, SamplerError<ErrorKind>>,
    /// What the estimator made of it (`None` when there was no OD to feed).
    pub outcome: Option<Outcome>,
    /// The estimate after it (`None` before the readings show growth).
    pub estimate: Option<Estimate<f32>>,
}

/// Runs the whole log through `sampler` (fresh, from [`sampler`]) →
/// `photometer` → `estimator`, calling `each` after every reading.
///
/// # Errors
/// If the front end does not answer its identity check.
pub fn run(
    sampler: &mut Sampler<ReplayFrontEnd<'_>, VirtualDelay>,
    photometer: &Photometer<f32, 5>,
    estimator: &mut Estimator<f32>,
    mut each: impl FnMut(&Step),
) -> Result<(), SamplerError<ErrorKind>> {
    sampler.init()?;
    for entry in &CULTURE_LOG {
        let time_h = f32::from(entry.time_min) / 60.0;
        let reading = sampler.measure(photometer);
        let outcome = match reading {
            // ===== ESTIMATOR HOOK (the one place) ===========================
            // Every OD the photometer produces goes to the estimator; full
            // scale, dark and invalid readings never reach it. The monitor
            // joins here when it lands: `monitor.update(&estimator, outcome)`.
            Ok(Reading::Od(v)) => Some(estimator.update(time_h, v.od)),
            // ================================================================
            _ => None,
        };
        each(&Step {
            time_min: entry.time_min,
            time_h,
            reading,
            outcome,
            estimate: estimator.estimate(),
        });
    }
    Ok(())
}

/// The final estimate as one `key=value` line, starting `final:`. Values are
/// printed with `f32`'s shortest round-trip form, so two runs that agree to
/// the bit print the same text; a field the estimator does not publish (yet)
/// prints `none`.
///
/// Units: OD (1 cm) for capacity, per hour for the rate, hours for times.
pub struct FinalLine<'a>(pub Option<&'a Estimate<f32>>);

impl fmt::Display for FinalLine<'_> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        fn pair(f: &mut fmt::Formatter<'_>, name: &str, m: Option<Measured<f32>>) -> fmt::Result {
            match m {
                Some(m) => write!(f, " {name}={} {name}_sd={}", m.value, m.sd),
                None => write!(f, " {name}=none {name}_sd=none"),
            }
        }
        f.write_str("final:")?;
        let Some(e) = self.0 else {
            return f.write_str(" estimate=none");
        };
        pair(f, "capacity", e.capacity)?;
        pair(f, "rate_per_h", Some(e.rate_per_h))?;
        pair(f, "doubling_h", Some(e.doubling_time_h))?;
        pair(f, "inflection_h", e.inflection_time_h)?;
        pair(f, "lag_h", e.lag_h)?;
        write!(f, " noise_scale={} readings={}", e.noise_scale, e.readings)
    }
}
