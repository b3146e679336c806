//! Property tests of the whole reading path (photometer counts → OD →
//! `Watch::update`) under hostile input: arbitrary `f32` times and values —
//! NaN, ±∞, subnormals, zeros, negatives, huge values, repeated and backwards
//! times — mixed with stretches of plausible growth of an invented culture.
//! The invariants are listed in `tests/hardening/mod.rs`: no panic, nothing
//! non-finite published, covariance symmetric positive definite, capacity
//! and rate positive, the event ledger balanced and the queue bounded.
//!
//! Case counts are modest: the whole file runs in a few seconds in debug.

mod hardening;

use hardening::{Setup, Step, run};
use proptest::prelude::*;

/// `f32`s a sensor path should survive: the special values, the edges of the
/// representable range, subnormals, and any bit pattern at all.
fn hostile_f32() -> impl Strategy<Value = f32> {
    prop_oneof![
        Just(f32::NAN),
        Just(-f32::NAN),
        Just(f32::INFINITY),
        Just(f32::NEG_INFINITY),
        Just(0.0_f32),
        Just(-0.0_f32),
        Just(f32::MAX),
        Just(-f32::MAX),
        Just(f32::MIN_POSITIVE),
        Just(f32::EPSILON),
        (1_u32..0x007f_ffff).prop_map(f32::from_bits), // positive subnormals
        (0x8000_0001_u32..0x807f_ffff).prop_map(f32::from_bits), // negative subnormals
        any::<u32>().prop_map(f32::from_bits),
        -1e3_f32..1e3,
        0.0_f32..5.0,
        1e20_f32..1e38,
    ]
}

fn step() -> impl Strategy<Value = Step> {
    prop_oneof![
        4 => (1_u8..40, prop::array::uniform4(-0.05_f32..0.05), any::<bool>())
            .prop_map(|(count, noise, counts)| Step::Growth { count, noise, counts }),
        3 => (hostile_f32(), hostile_f32(), any::<bool>())
            .prop_map(|(time_h, value, counts)| Step::Raw { time_h, value, counts }),
        2 => (hostile_f32(), any::<bool>())
            .prop_map(|(value, counts)| Step::AtClock { value, counts }),
        1 => prop_oneof![hostile_f32(), -3.0_f32..3.0]
            .prop_map(|delta_h| Step::Jump { delta_h }),
        1 => Just(Step::Drain),
    ]
}

/// Configuration choices: mostly valid, some refused by the setters.
fn setup() -> impl Strategy<Value = Setup> {
    (
        any::<bool>(),
        prop_oneof![Just(0.003_f32), 0.0_f32..0.05, hostile_f32()],
        prop_oneof![Just(0.01_f32), 0.0_f32..0.1],
        prop_oneof![Just(0.0_f32), 0.0_f32..0.2, hostile_f32()],
        prop_oneof![Just(f32::INFINITY), 0.5_f32..4.0, hostile_f32()],
        prop_oneof![Just(4.0_f32), 2.0_f32..10.0, hostile_f32()],
        0_u8..10,
        0_u8..10,
        0_u8..40,
        (0.05_f32..1.0, 1.05_f32..5.0, 0.05_f32..10.0),
        prop::array::uniform3((any::<bool>(), prop_oneof![0.0_f32..1.0, hostile_f32()])),
        (0.1_f32..3.5, 0.1_f32..2.0, 2.0_f32..15.0),
    )
        .prop_map(
            |(
                small,
                noise_floor,
                noise_fraction,
                blank,
                ceiling,
                gate_sigma,
                max_consecutive_rejections,
                refit_iterations,
                min_readings,
                (dilution_ratio, min_growth_ratio, max_rate_per_h),
                targets,
                (capacity_od, rate_per_h, midpoint_h),
            )| Setup {
                small,
                noise_floor,
                noise_fraction,
                blank,
                ceiling,
                gate_sigma,
                max_consecutive_rejections,
                refit_iterations,
                min_readings,
                dilution_ratio,
                min_growth_ratio,
                max_rate_per_h,
                targets,
                capacity_od,
                rate_per_h,
                midpoint_h,
            },
        )
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 96, ..ProptestConfig::default() })]

    /// Hostile readings mixed with growth, on any configuration.
    #[test]
    fn reading_path_keeps_its_invariants(setup in setup(), steps in prop::collection::vec(step(), 1..40)) {
        run(&setup, &steps);
    }

    /// The default configuration with growth first, so hostile readings land
    /// on a fitted estimator with a published capacity.
    #[test]
    fn hostile_readings_after_a_fit_keep_the_invariants(
        small in any::<bool>(),
        steps in prop::collection::vec(step(), 1..30),
    ) {
        let setup = Setup { small, ..Setup::default() };
        let mut all = vec![
            Step::Growth { count: 100, noise: [0.01, -0.01, 0.0, 0.005], counts: false },
            Step::Growth { count: 60, noise: [0.0, 0.01, -0.005, 0.0], counts: true },
        ];
        all.extend(steps);
        let summary = run(&setup, &all);
        // The growth stretch alone gives a fit, so the checks above ran on
        // published estimates, not on `None`.
        prop_assert!(summary.estimates >= 100, "{summary:?}");
    }
}

/// The fixed growth stretch reaches a published capacity, so the property
/// tests above check fitted states (a test of the test).
#[test]
fn growth_stretch_alone_publishes_a_capacity() {
    use plateau::{MonitorConfig, Watch};
    let setup = Setup::default();
    let mut watch: Watch = Watch::new(setup.estimator_config(), MonitorConfig::new());
    for i in 1..=160 {
        let t = i as f32 * hardening::INTERVAL_H;
        watch.update(t, setup.truth_od(t));
    }
    let e = watch.estimate().expect("an estimate after 13 h of growth");
    let k = e.capacity.expect("a published capacity");
    // The invented culture's capacity is 1.5 OD.
    assert!((k.value - 1.5).abs() < 0.05, "{k:?}");
}

/// Regression cases the property tests found (kept in
/// `hardening_props.proptest-regressions` too, but named here so they run
/// whatever proptest's configuration).
mod regressions {
    use super::hardening::{Setup, Step, run};

    fn growth(count: u8, noise: [f32; 4]) -> Step {
        Step::Growth {
            count,
            noise,
            counts: false,
        }
    }

    /// A huge first reading dwarfs the growth after it: the first fit's
    /// information matrix cannot be inverted, and the estimate used to be
    /// published with an all-zero covariance.
    #[test]
    fn huge_first_reading_gives_no_estimate_without_a_covariance() {
        let setup = Setup {
            noise_floor: 0.0,
            noise_fraction: 0.028_608_324,
            blank: 0.090_159_4,
            max_consecutive_rejections: 2,
            dilution_ratio: 0.05,
            min_growth_ratio: 1.05,
            max_rate_per_h: 0.05,
            capacity_od: 0.1,
            rate_per_h: 0.1,
            midpoint_h: 2.0,
            ..Setup::default()
        };
        let steps = [
            Step::AtClock {
                value: 9.816_789e37,
                counts: false,
            },
            growth(24, [0.0; 4]),
            growth(11, [0.0; 4]),
            growth(1, [0.0; 4]),
        ];
        run(&setup, &steps);
    }

    /// A reading at t = `f32::MAX` hours: the model's gradient was ∞ · 0 = NaN
    /// there, and the published fitted value had a NaN sd.
    #[test]
    fn reading_at_the_end_of_time_keeps_the_estimate_finite() {
        let setup = Setup {
            dilution_ratio: 0.05,
            min_growth_ratio: 1.05,
            max_rate_per_h: 0.05,
            capacity_od: 0.1,
            rate_per_h: 1.070_051_7,
            midpoint_h: 2.0,
            ..Setup::default()
        };
        let steps = [
            growth(15, [0.0; 4]),
            Step::Raw {
                time_h: f32::MAX,
                value: f32::MIN_POSITIVE,
                counts: false,
            },
        ];
        run(&setup, &steps);
    }

    /// A covariance whose f32 pivots were positive but which is indefinite in
    /// f64 (parameters almost perfectly correlated): no longer stored.
    #[test]
    fn nearly_singular_covariance_is_not_published() {
        let setup = Setup {
            noise_fraction: 0.0,
            max_consecutive_rejections: 2,
            dilution_ratio: 0.05,
            min_growth_ratio: 1.05,
            max_rate_per_h: 0.05,
            capacity_od: 0.1,
            rate_per_h: 0.494_025_53,
            midpoint_h: 2.0,
            ..Setup::default()
        };
        let steps = [
            Step::AtClock {
                value: 4.818_063_3e36,
                counts: false,
            },
            growth(32, [0.038_042_13, 0.0, 0.035_418_592, -0.038_828_95]),
            growth(1, [0.0; 4]),
            growth(1, [0.0; 4]),
        ];
        run(&setup, &steps);
    }
}

/// One reading stamped far in the future (a corrupt clock value) used to
/// lock the estimator out for good: every later reading was "time
/// backwards". Now `max_consecutive_rejections` (default 4) readings behind
/// it restart the estimator, which then fits the invented culture.
#[test]
fn a_corrupt_future_timestamp_does_not_lock_the_estimator_out() {
    use plateau::{Estimator, EstimatorConfig, Outcome, Rejection};
    let setup = Setup::default();
    let mut estimator = Estimator::<f32>::new(EstimatorConfig::new());
    for i in 0..5 {
        let t = i as f32 * hardening::INTERVAL_H;
        estimator.update(t, setup.truth_od(t));
    }
    assert_eq!(
        estimator.update(1.0e30, setup.truth_od(0.5)),
        Outcome::Accepted
    );
    let mut outcomes = Vec::new();
    for i in 6..=200 {
        let t = i as f32 * hardening::INTERVAL_H;
        outcomes.push(estimator.update(t, setup.truth_od(t)));
    }
    let backwards = Outcome::Rejected(Rejection::TimeBackwards);
    assert_eq!(
        outcomes[..4],
        [backwards, backwards, backwards, Outcome::Restarted]
    );
    assert!(!outcomes[4..].contains(&backwards));
    let k = estimator
        .estimate()
        .and_then(|e| e.capacity)
        .expect("a capacity");
    // The invented culture's capacity is 1.5 OD.
    assert!((k.value - 1.5).abs() < 0.05, "{k:?}");
}
