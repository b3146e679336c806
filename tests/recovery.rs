//! Recovery after a burst of garbage in the middle of growth: how many good
//! readings the estimator needs to track the culture again.
//!
//! Invented stream: the reference culture (capacity 1.5 OD, 0.7 per hour,
//! midpoint 8 h) read every 5 minutes with noise sd 0.003 + 1 % (common
//! practice for photometers). At 6 h a faulty sensor sends 50 readings in
//! 5 minutes: NaN, ±∞, negatives, huge values and random values anywhere in
//! 0–5 OD. Then good readings resume.
//!
//! "Tracking" means the fitted value is within 3 sds of the truth, where the
//! sd combines the estimate's own sd and one reading's noise sd (the scatter
//! the estimate is judged against), and the rate within 10 % of the truth —
//! and both stay so for the rest of the run; at the end the capacity is
//! within 2 % of the truth.
#![allow(clippy::cast_possible_truncation)]

mod streams;

use plateau::{EstimatorConfig, MonitorConfig, Watch};
use rand::rngs::StdRng;
use rand::{RngExt, SeedableRng};
use streams::{Stream, reference_culture};

const BURST_AT_H: f64 = 6.0;
const BURST_LEN: usize = 50;

/// Garbage reading `i` of the burst.
fn garbage(i: usize, rng: &mut StdRng) -> f32 {
    match i % 7 {
        0 => f32::NAN,
        1 => f32::INFINITY,
        2 => f32::NEG_INFINITY,
        3 => -rng.random_range(0.0_f32..2.0),
        4 => rng.random_range(1e10_f32..1e30),
        _ => rng.random_range(0.0_f32..5.0),
    }
}

/// Good readings after the burst until the estimate tracks the culture for
/// good, or `None` if it never does; and the final capacity's relative error.
fn recovery(seed: u64, with_burst: bool) -> (Option<usize>, f64) {
    let truth = reference_culture();
    let readings = Stream::default().generate(&truth, seed);
    let mut watch: Watch = Watch::new(EstimatorConfig::new(), MonitorConfig::new());
    let mut rng = StdRng::seed_from_u64(seed ^ 0x5eed);
    let mut after = 0_usize;
    let mut tracking_since: Option<usize> = None;
    let mut burst_done = !with_burst;
    for r in &readings {
        if !burst_done && r.time_h >= BURST_AT_H {
            for i in 0..BURST_LEN {
                // Fifty readings in the five minutes before this one.
                let t = r.time_h - 5.0 / 60.0 + (i as f64 + 0.5) * (5.0 / 60.0) / BURST_LEN as f64;
                watch.update(t as f32, garbage(i, &mut rng));
            }
            burst_done = true;
        }
        watch.update(r.time_h as f32, r.value as f32);
        if r.time_h < BURST_AT_H {
            continue;
        }
        after += 1;
        let tracks = watch.estimate().is_some_and(|e| {
            let noise_sd = 0.003 + 0.01 * r.truth;
            let sd = f64::from(e.fitted_value.sd).hypot(noise_sd);
            let rate = f64::from(e.rate_per_h.value);
            (f64::from(e.fitted_value.value) - r.truth).abs() <= 3.0 * sd
                && (rate / truth.rate_per_h() - 1.0).abs() <= 0.1
        });
        match (tracks, tracking_since) {
            (true, None) => tracking_since = Some(after),
            (false, Some(_)) => tracking_since = None,
            _ => {}
        }
    }
    let capacity = watch
        .estimate()
        .and_then(|e| e.capacity)
        .map_or(f64::INFINITY, |k| {
            (f64::from(k.value) / truth.capacity() - 1.0).abs()
        });
    (tracking_since, capacity)
}

#[test]
fn recovers_within_a_bounded_number_of_good_readings() {
    let mut worst = 0;
    for seed in 1..=8 {
        let (control, k_control) = recovery(seed, false);
        let (burst, k_burst) = recovery(seed, true);
        eprintln!(
            "seed {seed}: tracking after {control:?} (no burst) / {burst:?} (burst) good readings; \
             final capacity error {k_control:.4} / {k_burst:.4}"
        );
        let n = burst.expect("never tracked the culture again");
        worst = worst.max(n);
        // Back on the culture within 3 good readings (15 minutes). Measured:
        // 1 on every seed, as without the burst; before the gate checked a
        // held run for consistency it never came back (capacity withheld to
        // the end, noise scale ×100).
        assert!(n <= 3, "seed {seed}: {n} readings");
        // The capacity at the end is as good as without the burst: within 2 %.
        assert!(k_burst < 0.02, "seed {seed}: capacity off by {k_burst}");
    }
    eprintln!("worst recovery: {worst} good readings");
}
