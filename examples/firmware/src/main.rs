//! plateau firmware demo for a Cortex-M4 (runs under QEMU's mps2-an386).
//!
//! Streams an INVENTED culture log (`culture_log.rs`) through the same code a
//! real instrument would run: a stand-in PLT-PD24 front end on a pretend I2C
//! bus → [`plateau::Sampler`] (4 conversions averaged) → [`plateau::Photometer`]
//! (Beer–Lambert, dark and blank, linearity table, 1 cm normalisation) → for
//! now a reference logistic from `plateau::model` (the invented truth), and
//! the one marked place where the estimator and monitor will go.
//!
//! Output goes over semihosting; the program exits 0 through semihosting when
//! every reading was processed and the tallies are as the log was built, and
//! 1 otherwise (a panic also exits 1 via `panic-semihosting`).
//!
//! Three passes over the log: two quiet ones, each between a call of
//! `plateau_mark_begin` and one of `plateau_mark_end` (for
//! `.ci/count-instructions`, which counts the instructions in each stretch from
//! a QEMU trace) — first sampler + photometer, then the photometer alone — and
//! then a printing one.
#![no_std]
#![no_main]

mod culture_log;
mod replay;

use core::hint::black_box;

use cortex_m as _; // links cortex-m's single-core critical-section implementation
use cortex_m_rt::entry;
use cortex_m_semihosting::{debug, hprintln};
use panic_semihosting as _;
use plateau::sampler::DEFAULT_ADDRESS;
use plateau::{
    GrowthCurve, Linearity, Logistic, Photometer, PhotometerConfig, Reading, Sampler, SamplerConfig,
};

use culture_log::{CULTURE_LOG, LINEARITY};
use replay::{CONVERSIONS_PER_READING, ReplayFrontEnd, VirtualDelay};

const READINGS: usize = CULTURE_LOG.len();

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
static COUNTS: [u32; READINGS] = log_counts();

/// What a pass over the log saw.
#[derive(Default)]
struct Tally {
    od: u32,
    full_scale: u32,
    dark: u32,
    invalid: u32,
    bus_errors: u32,
    beyond_calibration: u32,
}

/// Ends the program through semihosting with `code` (QEMU exits with it).
fn exit(code: debug::ExitStatus) -> ! {
    debug::exit(code);
    loop {
        cortex_m::asm::wfi();
    }
}

/// Marks the start of the measured stretch in an instruction trace.
#[inline(never)]
fn plateau_mark_begin() -> u32 {
    black_box(0xB1)
}

/// Marks the end of the measured stretch in an instruction trace.
#[inline(never)]
fn plateau_mark_end() -> u32 {
    black_box(0xE2)
}

fn photometer() -> Photometer<f32, 5> {
    let config = PhotometerConfig::new(
        culture_log::DARK_COUNTS,
        culture_log::BLANK_COUNTS,
        culture_log::FULL_SCALE_COUNTS,
        culture_log::PATH_LENGTH_CM,
    );
    let linearity = Linearity::new(&LINEARITY);
    match (config, linearity) {
        (Ok(c), Ok(l)) => Photometer::with_linearity(c, l),
        (Err(e), _) | (_, Err(e)) => {
            hprintln!("plateau-fw: bad photometer setting: {}", e);
            exit(debug::EXIT_FAILURE)
        }
    }
}

fn sampler(counts: &[u32]) -> Sampler<ReplayFrontEnd<'_>, VirtualDelay> {
    let Ok(config) = SamplerConfig::new(CONVERSIONS_PER_READING, 250, 40, 20) else {
        hprintln!("plateau-fw: bad sampler setting");
        exit(debug::EXIT_FAILURE)
    };
    let bus = ReplayFrontEnd::new(DEFAULT_ADDRESS, counts);
    Sampler::new(bus, VirtualDelay::default(), DEFAULT_ADDRESS, config)
}

/// Counts a reading into the tally; returns the OD if there is one.
fn tally(t: &mut Tally, reading: Reading<f32>) -> Option<f32> {
    match reading {
        Reading::Od(v) => {
            t.od += 1;
            t.beyond_calibration += u32::from(v.beyond_calibration);
            Some(v.od)
        }
        Reading::FullScale => {
            t.full_scale += 1;
            None
        }
        Reading::AtOrBelowDark => {
            t.dark += 1;
            None
        }
        Reading::Invalid => {
            t.invalid += 1;
            None
        }
    }
}

/// The photometer alone on every logged mean, nothing printed (the second
/// marked stretch: the per-reading cost of the conversion itself).
fn photometer_pass(photometer: &Photometer<f32, 5>) -> (Tally, f32) {
    let counts = black_box(&COUNTS);
    let mut t = Tally::default();
    let mut checksum = 0.0_f32;
    plateau_mark_begin();
    for &c in counts {
        #[allow(clippy::cast_precision_loss, reason = "24-bit counts are exact in f32")]
        let reading = photometer.convert(c as f32);
        checksum += tally(&mut t, reading).unwrap_or(0.0);
    }
    plateau_mark_end();
    (t, black_box(checksum))
}

/// The quiet pass: sampler + photometer on every reading, nothing printed
/// (the first marked stretch).
fn quiet_pass(photometer: &Photometer<f32, 5>) -> (Tally, f32) {
    let mut sampler = sampler(black_box(&COUNTS));
    let mut t = Tally::default();
    let mut checksum = 0.0_f32;
    plateau_mark_begin();
    for _ in 0..READINGS {
        match sampler.measure(photometer) {
            Ok(reading) => checksum += tally(&mut t, reading).unwrap_or(0.0),
            Err(_) => t.bus_errors += 1,
        }
    }
    plateau_mark_end();
    (t, black_box(checksum))
}

#[entry]
fn main() -> ! {
    let photometer = photometer();
    hprintln!(
        "plateau-fw: invented culture log, {} readings, PLT-PD24 replay, {} conversions each",
        READINGS,
        CONVERSIONS_PER_READING
    );

    let (quiet, checksum) = quiet_pass(&photometer);
    let (direct, _) = photometer_pass(&photometer);

    // Reference curve: the invented truth the log was generated from.
    let Ok(truth) = Logistic::<f32>::from_midpoint(
        culture_log::CAPACITY_OD,
        culture_log::RATE_PER_H,
        culture_log::MIDPOINT_H,
    ) else {
        hprintln!("plateau-fw: bad reference curve");
        exit(debug::EXIT_FAILURE)
    };

    let mut sampler = sampler(&COUNTS);
    if let Err(e) = sampler.init() {
        hprintln!("plateau-fw: front end init failed: {}", e);
        exit(debug::EXIT_FAILURE);
    }
    let mut t = Tally::default();
    let mut worst_error_od = 0.0_f32;
    hprintln!("time_h     od_1cm  reference  outcome");
    for entry in &CULTURE_LOG {
        let time_h = f32::from(entry.time_min) / 60.0;
        let reading = match sampler.measure(&photometer) {
            Ok(r) => r,
            Err(e) => {
                t.bus_errors += 1;
                hprintln!("{:6.2}  bus error: {}", time_h, e);
                continue;
            }
        };
        let reference = truth.value(time_h);
        match tally(&mut t, reading) {
            Some(od) => {
                // ===== ESTIMATOR HOOK (the one place) ==============================
                // When `plateau::estimator` and `plateau::monitor` land, feed the
                // accepted reading here:
                //     let outcome = estimator.update(time_h, od);
                //     let status = monitor.update(&estimator, outcome);
                // and print the estimate (capacity, rate, lag, phase, alerts).
                // Until then the reference curve stands in for the estimate.
                // ===================================================================
                let flag = if matches!(reading, Reading::Od(v) if v.beyond_calibration) {
                    "od (beyond calibration)"
                } else {
                    "od"
                };
                worst_error_od = worst_error_od.max(plateau::Real::abs(od - reference));
                hprintln!("{:6.2} {:10.4} {:10.4}  {}", time_h, od, reference, flag);
            }
            None => hprintln!(
                "{:6.2}          - {:10.4}  {:?}",
                time_h,
                reference,
                reading
            ),
        }
    }

    hprintln!(
        "plateau-fw: readings={} od={} full_scale={} dark={} invalid={} bus_errors={} beyond_calibration={}",
        READINGS,
        t.od,
        t.full_scale,
        t.dark,
        t.invalid,
        t.bus_errors,
        t.beyond_calibration
    );
    hprintln!(
        "plateau-fw: largest |od - reference| = {:.4} OD (includes the invented bubble); quiet-pass checksum {:.3}",
        worst_error_od,
        checksum
    );
    hprintln!(
        "plateau-fw: reference doubling time {:.3} h",
        truth.doubling_time_h()
    );

    // The log was built with one full-scale and one dark event; both passes
    // must agree with that and with each other.
    let as_built = t.full_scale == 1
        && t.dark == 1
        && t.invalid == 0
        && t.bus_errors == 0
        && usize::try_from(t.od).is_ok_and(|n| n == READINGS - 2)
        && quiet.od == t.od
        && direct.od == t.od
        && quiet.bus_errors == 0;
    if as_built {
        hprintln!("plateau-fw: done, exit 0");
        exit(debug::EXIT_SUCCESS)
    }
    hprintln!("plateau-fw: tallies differ from the log as built, exit 1");
    exit(debug::EXIT_FAILURE)
}
