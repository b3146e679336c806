//! Long-run stability on an invented turbidostat: the culture grows to 80 %
//! of its capacity, is diluted 2× (to 40 %), and grows again, over and over,
//! read every 5 minutes with noise. After every cycle the estimator must have
//! re-converged before the next dilution, and at every reading the estimate
//! must be finite with a symmetric positive definite covariance (the checks
//! of `tests/hardening/mod.rs`).
//!
//! `cargo test --release --test long_run -- --ignored --nocapture` runs the
//! 10⁶-reading version; the small version runs in CI.
#![allow(clippy::cast_possible_truncation)]

mod hardening;
mod streams;

use plateau::{EstimatorConfig, Logistic, MonitorConfig, Outcome, Watch};
use rand::SeedableRng;
use rand::rngs::StdRng;
use rand_distr::{Distribution, Normal};

/// The invented culture: capacity 1.5 OD, rate 0.7 per hour.
const CAPACITY_OD: f64 = 1.5;
const RATE_PER_H: f64 = 0.7;
/// Turbidostat set point and dilution: grow to 80 % of capacity, dilute 2×.
const DILUTE_AT: f64 = 0.8;
const DILUTION: f64 = 2.0;
/// Noise sd = floor + fraction × OD (common practice for photometers; the
/// estimator's default noise model).
const NOISE_FLOOR: f64 = 0.003;
const NOISE_FRACTION: f64 = 0.01;
const INTERVAL_H: f64 = 5.0 / 60.0;

/// Tolerances on the estimate at the last reading before each dilution.
/// One cycle only sees 40 % → 80 % of capacity (about 31 readings), so the
/// capacity is an extrapolation. The relative tolerances are at least five
/// Cramér–Rao sds of one cycle's readings (checked by
/// `tolerances_are_at_least_five_cramer_rao_sds` below). The miss is also
/// bounded in the estimator's own reported sds (`Z_TOL`).
///
/// Measured on the ignored 10⁶-reading run (seed 7, 32 258 cycles): worst
/// capacity miss 25.4 % (6.7 own sds), worst rate miss 25.6 % (5.2 own sds).
/// The estimator is less efficient than the bound here (one cycle reported
/// a capacity sd of 6.8 %, twice the Cramér–Rao 3.3 %; likely causes: the
/// prior, the four readings held after each dilution, the fit's start), and
/// its tails are wider than its sds say (6.7 sd in 64 000 draws, where a
/// normal gives about 4.4).
///
/// After merging main (EKF steps between refits) the run takes 2.1–2.4 s and
/// FAILS this bound once: reading 409 014 reports capacity 1.382 ± 0.014
/// (a 1.0 % sd, a third of the Cramér–Rao 3.3 % for one cycle's readings:
/// overconfident), 8.2 of its own sds from the truth; worst rate miss 7.3
/// sds. Left failing on purpose for the estimator's owner: the tolerance
/// was stated before that code was measured.
const CAPACITY_REL_TOL: f64 = 0.30;
const RATE_REL_TOL: f64 = 0.30;
const Z_TOL: f64 = 8.0;

#[derive(Debug, Default)]
struct Stats {
    readings: u64,
    cycles: u64,
    restarts: u64,
    worst_capacity_rel: f64,
    worst_rate_rel: f64,
    worst_capacity_z: f64,
    worst_rate_z: f64,
}

/// Runs `cycles` growth–dilution cycles and checks every reading and every
/// cycle; returns what it saw.
fn run_cycles(cycles: u64, max_readings: u64, seed: u64) -> Stats {
    let config = EstimatorConfig::<f32>::new()
        // One cycle grows 2× at most; growth of 1.3× starts the fit.
        .min_growth_ratio(1.3)
        .unwrap()
        // A turbidostat's photometer is blanked on the medium.
        .blank(0.0)
        .unwrap();
    // A turbidostat sees a short stretch of the curve per cycle, from which
    // the five-parameter shape-aware family cannot place the capacity: the
    // plain logistic is the family for it (README, "Choosing a family").
    let mut watch: Watch<f32, 16, 4, 8, 3, Logistic<f32>> =
        Watch::new(config, MonitorConfig::new());
    let mut rng = StdRng::seed_from_u64(seed);
    let unit = Normal::<f64>::new(0.0, 1.0).unwrap();
    let mut stats = Stats::default();
    let mut taken = 0_u64;
    let mut od = DILUTE_AT * CAPACITY_OD / DILUTION;
    let mut t_h = 0.0_f64;
    // The first cycle starts cold; later cycles start from a restart.
    while stats.cycles < cycles && stats.readings < max_readings {
        // Exact logistic step over one interval (closed form).
        let e = (-RATE_PER_H * INTERVAL_H).exp();
        od = CAPACITY_OD / (1.0 + (CAPACITY_OD / od - 1.0) * e);
        t_h += INTERVAL_H;
        let sd = NOISE_FLOOR + NOISE_FRACTION * od;
        let reading = od + sd * unit.sample(&mut rng);
        let report = watch.update(t_h as f32, reading as f32);
        stats.readings += 1;
        if report.outcome == Outcome::Restarted {
            stats.restarts += 1;
        }
        let context = format!("reading {} at {t_h:.3} h", stats.readings);
        let estimate = watch.estimate();
        if let Some(e) = &estimate {
            hardening::check_estimate(e, &context);
        }
        while watch.next_event().is_some() {
            taken += 1;
        }
        hardening::check_events(&watch, taken, &context);
        if od >= DILUTE_AT * CAPACITY_OD {
            // The last reading before this dilution: re-converged?
            let e = estimate.unwrap_or_else(|| panic!("{context}: no estimate before dilution"));
            let k = e
                .capacity
                .unwrap_or_else(|| panic!("{context}: capacity not published {e:?}"));
            let k_rel = (f64::from(k.value) / CAPACITY_OD - 1.0).abs();
            let r_rel = (f64::from(e.rate_per_h.value) / RATE_PER_H - 1.0).abs();
            // Misses in units of the estimator's own sds: its uncertainty
            // must be honest, not only its value close.
            let k_z = (f64::from(k.value) - CAPACITY_OD).abs() / f64::from(k.sd);
            let r_z =
                (f64::from(e.rate_per_h.value) - RATE_PER_H).abs() / f64::from(e.rate_per_h.sd);
            assert!(
                k_rel < CAPACITY_REL_TOL && k_z < Z_TOL,
                "{context}: capacity {k:?} off by {k_rel} ({k_z} sd)"
            );
            assert!(
                r_rel < RATE_REL_TOL && r_z < Z_TOL,
                "{context}: rate {:?} off by {r_rel} ({r_z} sd)",
                e.rate_per_h
            );
            stats.worst_capacity_rel = stats.worst_capacity_rel.max(k_rel);
            stats.worst_rate_rel = stats.worst_rate_rel.max(r_rel);
            stats.worst_capacity_z = stats.worst_capacity_z.max(k_z);
            stats.worst_rate_z = stats.worst_rate_z.max(r_z);
            stats.cycles += 1;
            od /= DILUTION;
        }
    }
    // Every dilution after the first cycle was recognised as a restart.
    assert!(
        stats.restarts + 1 >= stats.cycles,
        "{} restarts for {} cycles",
        stats.restarts,
        stats.cycles
    );
    stats
}

#[test]
fn tolerances_are_at_least_five_cramer_rao_sds() {
    // One cycle: from 40 % of capacity (midpoint ln(1.5)/r hours later) for
    // 31 readings, 5 minutes apart.
    let y0 = DILUTE_AT * CAPACITY_OD / DILUTION;
    let midpoint_h = (CAPACITY_OD / y0 - 1.0).ln() / RATE_PER_H;
    let curve = plateau::Logistic::from_midpoint(CAPACITY_OD, RATE_PER_H, midpoint_h).unwrap();
    let times: Vec<f64> = (1..=31).map(|i| f64::from(i) * INTERVAL_H).collect();
    let sd = streams::cramer_rao_sd(&curve, &times, NOISE_FLOOR, NOISE_FRACTION);
    let (k_rel, r_rel) = (sd[0] / CAPACITY_OD, sd[1] / RATE_PER_H);
    eprintln!("Cramér–Rao relative sds: capacity {k_rel:.4}, rate {r_rel:.4}");
    assert!(CAPACITY_REL_TOL >= 5.0 * k_rel, "{k_rel}");
    assert!(RATE_REL_TOL >= 5.0 * r_rel, "{r_rel}");
}

#[test]
fn twenty_turbidostat_cycles_reconverge_every_time() {
    let stats = run_cycles(20, u64::MAX, 1);
    eprintln!("{stats:?}");
    assert_eq!(stats.cycles, 20);
}

#[test]
#[ignore = "10^6 readings: a few seconds in release, run by hand"]
fn a_million_readings_over_turbidostat_cycles() {
    let start = std::time::Instant::now();
    let stats = run_cycles(u64::MAX, 1_000_000, 7);
    eprintln!("{stats:?} in {:.1} s", start.elapsed().as_secs_f64());
    assert_eq!(stats.readings, 1_000_000);
    assert!(stats.cycles > 30_000, "{stats:?}");
}
