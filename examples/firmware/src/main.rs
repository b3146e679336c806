//! plateau firmware demo for a Cortex-M4 (runs under QEMU's mps2-an386).
//!
//! Streams an INVENTED culture log (`culture_log.rs`) through the same code a
//! real instrument would run (`pipeline.rs`): a stand-in PLT-PD24 front end on
//! a pretend I2C bus → [`plateau::Sampler`] (4 conversions averaged) →
//! [`plateau::Photometer`] (Beer–Lambert, dark and blank, linearity table,
//! 1 cm normalisation) → [`plateau::Estimator`] (capacity, rate, lag). The
//! invented truth the log was made from is printed beside each reading for
//! comparison; the estimator never sees it.
//!
//! Output goes over semihosting; the program exits 0 through semihosting when
//! every reading was processed, the tallies are as the log was built, the
//! estimator rejected the invented bubble and its final estimate is near the
//! invented truth, and 1 otherwise (a panic also exits 1 via
//! `panic-semihosting`). The last lines include `final: …` (see
//! `pipeline::FinalLine`), which CI compares with the host's replay of the
//! same log.
//!
//! Four quiet passes come first, each between a call of `plateau_mark_begin`
//! and one of `plateau_mark_end` (for `.ci/count-instructions`, which counts
//! the instructions in each stretch from a QEMU trace): sampler + photometer,
//! the photometer alone, the estimator alone over the whole log, and the
//! estimator alone at steady state (full history). The firmware prints how
//! many readings each stretch holds. Then the printing pass.
#![no_std]
#![no_main]

mod culture_log;
mod pipeline;
mod replay;

use core::hint::black_box;

use cortex_m as _; // links cortex-m's single-core critical-section implementation
use cortex_m_rt::entry;
use cortex_m_semihosting::{debug, hprintln};
use panic_semihosting as _;
use plateau::{
    Estimator, GrowthCurve, Logistic, Outcome, Photometer, Reading, Real, Rejection, Sampler,
};

use culture_log::{BUBBLE_TIME_MIN, DARK_TIME_MIN, FULL_SCALE_TIME_MIN};
use pipeline::{COUNTS, FinalLine, READINGS, Step};
use replay::{CONVERSIONS_PER_READING, ReplayFrontEnd, VirtualDelay};

/// Accepted readings the steady-state stretch lets pass unmarked first, so
/// that the history (32 slots) is full and the fit has converged.
const WARM_UP_READINGS: usize = 64;

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

/// What the estimator made of the printing pass.
#[derive(Default)]
struct Verdicts {
    accepted: u32,
    restarted: u32,
    rejected: u32,
    bubble_rejected_as_spike: bool,
    /// The photometer flagged the invented events at their logged times.
    events_at_logged_times: u32,
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

/// Tells `.ci/count-instructions` how many readings marked stretch `index`
/// (1-based, in the order they run) holds.
fn announce_stretch(index: u32, name: &str, readings: usize) {
    hprintln!(
        "plateau-fw: stretch {} {} readings={}",
        index,
        name,
        readings
    );
}

fn photometer() -> Photometer<f32, 5> {
    match pipeline::photometer() {
        Ok(p) => p,
        Err(e) => {
            hprintln!("plateau-fw: bad photometer setting: {}", e);
            exit(debug::EXIT_FAILURE)
        }
    }
}

fn sampler(counts: &[u32]) -> Sampler<ReplayFrontEnd<'_>, VirtualDelay> {
    match pipeline::sampler(counts) {
        Ok(s) => s,
        Err(e) => {
            hprintln!("plateau-fw: bad sampler setting: {}", e);
            exit(debug::EXIT_FAILURE)
        }
    }
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

/// Every (time, OD) the photometer makes of the log, in order; `len` of them.
struct OdSeries {
    time_h: [f32; READINGS],
    od: [f32; READINGS],
    len: usize,
}

fn od_series(photometer: &Photometer<f32, 5>) -> OdSeries {
    let mut s = OdSeries {
        time_h: [0.0; READINGS],
        od: [0.0; READINGS],
        len: 0,
    };
    for (entry, &c) in culture_log::CULTURE_LOG.iter().zip(&COUNTS) {
        #[allow(clippy::cast_precision_loss, reason = "24-bit counts are exact in f32")]
        if let Reading::Od(v) = photometer.convert(c as f32) {
            s.time_h[s.len] = f32::from(entry.time_min) / 60.0;
            s.od[s.len] = v.od;
            s.len += 1;
        }
    }
    s
}

/// The estimator alone on `series[from..]`, after feeding `series[..from]`
/// unmarked (the third and fourth marked stretches). Returns the number of
/// accepted readings (a checksum the optimiser cannot drop).
fn estimator_pass(series: &OdSeries, from: usize) -> u32 {
    let mut estimator: Estimator<f32> = black_box(pipeline::estimator());
    let times = black_box(&series.time_h[..series.len]);
    let ods = black_box(&series.od[..series.len]);
    let mut accepted = 0;
    for (&t, &od) in times.iter().zip(ods).take(from) {
        accepted += u32::from(estimator.update(t, od).is_accepted());
    }
    plateau_mark_begin();
    for (&t, &od) in times.iter().zip(ods).skip(from) {
        accepted += u32::from(estimator.update(t, od).is_accepted());
    }
    plateau_mark_end();
    black_box(accepted)
}

/// The fitted OD at the latest reading, or `-` before there is a fit.
struct FittedOd(Option<f32>);

impl core::fmt::Display for FittedOd {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self.0 {
            Some(od) => write!(f, "{od:9.4}"),
            None => f.write_str("        -"),
        }
    }
}

fn outcome_text(outcome: Option<Outcome>) -> &'static str {
    match outcome {
        None => "-",
        Some(Outcome::Accepted) => "accepted",
        Some(Outcome::Restarted) => "restarted",
        Some(Outcome::Rejected(r)) => r.as_str(),
    }
}

#[entry]
fn main() -> ! {
    let photometer = photometer();
    hprintln!(
        "plateau-fw: invented culture log, {} readings, PLT-PD24 replay, {} conversions each",
        READINGS,
        CONVERSIONS_PER_READING
    );

    hprintln!(
        "plateau-fw: estimator_state_bytes={} (Estimator<f32>, 32 slots, on this target)",
        core::mem::size_of::<Estimator<f32>>()
    );

    let (quiet, checksum) = quiet_pass(&photometer);
    let (direct, _) = photometer_pass(&photometer);
    let series = od_series(&photometer);
    let whole = estimator_pass(&series, 0);
    let steady = estimator_pass(&series, WARM_UP_READINGS);
    announce_stretch(1, "sampler_and_photometer", READINGS);
    announce_stretch(2, "photometer_only", READINGS);
    announce_stretch(3, "estimator_whole_log", series.len);
    announce_stretch(
        4,
        "estimator_steady_state",
        series.len.saturating_sub(WARM_UP_READINGS),
    );

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
    let mut estimator = pipeline::estimator();
    let mut t = Tally::default();
    let mut v = Verdicts::default();
    let mut worst_error_od = 0.0_f32;
    hprintln!("time_h     od_1cm  reference  estimator  fitted_od");
    let run = pipeline::run(&mut sampler, &photometer, &mut estimator, |step: &Step| {
        let reference = truth.value(step.time_h);
        let reading = match step.reading {
            Ok(r) => r,
            Err(e) => {
                t.bus_errors += 1;
                hprintln!("{:6.2}  bus error: {}", step.time_h, e);
                return;
            }
        };
        match step.outcome {
            Some(Outcome::Accepted) => v.accepted += 1,
            Some(Outcome::Restarted) => v.restarted += 1,
            Some(Outcome::Rejected(r)) => {
                v.rejected += 1;
                if step.time_min == BUBBLE_TIME_MIN && r == Rejection::Spike {
                    v.bubble_rejected_as_spike = true;
                }
            }
            None => {}
        }
        let at_event = match reading {
            Reading::FullScale => step.time_min == FULL_SCALE_TIME_MIN,
            Reading::AtOrBelowDark => step.time_min == DARK_TIME_MIN,
            _ => false,
        };
        v.events_at_logged_times += u32::from(at_event);
        let verdict = outcome_text(step.outcome);
        match tally(&mut t, reading) {
            Some(od) => {
                worst_error_od = worst_error_od.max(Real::abs(od - reference));
                let fitted = FittedOd(step.estimate.map(|e| e.fitted_value.value));
                let flag = if matches!(reading, Reading::Od(v) if v.beyond_calibration) {
                    " (beyond calibration)"
                } else {
                    ""
                };
                hprintln!(
                    "{:6.2} {:10.4} {:10.4}  {:>9}  {}{}",
                    step.time_h,
                    od,
                    reference,
                    verdict,
                    fitted,
                    flag
                );
            }
            None => hprintln!(
                "{:6.2}          - {:10.4}  {:>9}  {:?}",
                step.time_h,
                reference,
                verdict,
                reading
            ),
        }
    });
    if let Err(e) = run {
        hprintln!("plateau-fw: front end init failed: {}", e);
        exit(debug::EXIT_FAILURE);
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
        "plateau-fw: estimator accepted={} restarted={} rejected={} bubble_rejected_as_spike={}",
        v.accepted,
        v.restarted,
        v.rejected,
        v.bubble_rejected_as_spike
    );
    hprintln!(
        "plateau-fw: largest |od - reference| = {:.4} OD (includes the invented bubble); quiet-pass checksum {:.3}; marked estimator passes accepted {} and {}",
        worst_error_od,
        checksum,
        whole,
        steady
    );
    hprintln!(
        "plateau-fw: invented truth: capacity {} OD, rate {} per h, doubling time {:.3} h, inflection {} h, lag 0 h (a logistic grows from its first reading)",
        culture_log::CAPACITY_OD,
        culture_log::RATE_PER_H,
        truth.doubling_time_h(),
        culture_log::MIDPOINT_H
    );
    let estimate = estimator.estimate();
    hprintln!("{}", FinalLine(estimate.as_ref()));

    // The log was built with one full-scale and one dark event; both passes
    // must agree with that and with each other.
    let as_built = t.full_scale == 1
        && t.dark == 1
        && t.invalid == 0
        && t.bus_errors == 0
        && usize::try_from(t.od).is_ok_and(|n| n == READINGS - 2)
        && quiet.od == t.od
        && direct.od == t.od
        && quiet.bus_errors == 0
        && v.events_at_logged_times == 2;
    // The estimator must hold back the invented bubble, take the rest, and
    // land near the invented truth. Bounds: capacity within 5 % and rate
    // within 10 % of the values the log was generated from, a margin for the
    // log's invented noise and the stray-light correction (set here, not
    // from a source).
    let near_truth = estimate.is_some_and(|e| {
        e.capacity
            .is_some_and(|k| Real::abs(k.value / culture_log::CAPACITY_OD - 1.0) < 0.05)
            && Real::abs(e.rate_per_h.value / culture_log::RATE_PER_H - 1.0) < 0.10
    });
    let estimator_ok = v.bubble_rejected_as_spike && v.restarted == 0 && near_truth;
    if !as_built {
        hprintln!("plateau-fw: tallies differ from the log as built, exit 1");
        exit(debug::EXIT_FAILURE)
    }
    if !estimator_ok {
        hprintln!(
            "plateau-fw: estimator self-check failed (bubble rejected: {}, restarts: {}, near the invented truth: {}), exit 1",
            v.bubble_rejected_as_spike,
            v.restarted,
            near_truth
        );
        exit(debug::EXIT_FAILURE)
    }
    hprintln!("plateau-fw: done, exit 0");
    exit(debug::EXIT_SUCCESS)
}
