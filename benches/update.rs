//! One estimator update on the host at steady state: a default
//! `Estimator::<f32>` (32 history slots) warmed up on 300 readings of an
//! INVENTED culture (history full, fit converged, on the plateau), then fed
//! the next reading. Every iteration starts from a clone of the same warmed
//! state, so each measures the same update.
//!
//! ```sh
//! cargo bench -p plateau --bench update
//! cargo bench -p plateau --bench update --features fast-math
//! ```
//!
//! Instruction counts (repeatable, unlike time on a shared machine) come from
//! `.ci/count-host-instructions` and, for the Cortex-M4, `.ci/count-instructions`.

#![allow(
    missing_docs,
    reason = "criterion_group! generates an undocumented function"
)]

use core::hint::black_box;

use criterion::{BatchSize, Criterion, criterion_group, criterion_main};
use plateau::{Estimator, EstimatorConfig, Outcome};

/// Reading `i` of an invented logistic culture (capacity 1.6 OD, rate 0.7 per
/// hour, midpoint 6 h, read every 5 minutes) with a deterministic ±0.5 %
/// wobble standing in for noise.
fn reading(i: u32) -> (f32, f32) {
    let t = f64::from(i) * 5.0 / 60.0;
    let truth = 1.6 / (1.0 + (-0.7 * (t - 6.0)).exp());
    let wobble = 0.005 * ((f64::from(i) * 2.399).sin());
    #[allow(clippy::cast_possible_truncation, reason = "the device reads f32")]
    (t as f32, (truth * (1.0 + wobble)) as f32)
}

const WARM_UP: u32 = 300;

fn warmed() -> Estimator<f32> {
    let mut estimator = Estimator::new(EstimatorConfig::new());
    for i in 0..WARM_UP {
        estimator.update(reading(i).0, reading(i).1);
    }
    estimator
}

fn update(c: &mut Criterion) {
    let state = warmed();
    let (t, od) = reading(WARM_UP);
    // The benchmarked reading must take the full path (accepted and refitted).
    assert_eq!(state.clone().update(t, od), Outcome::Accepted);
    c.bench_function("estimator_update_steady_state_32_slots", |b| {
        b.iter_batched_ref(
            || state.clone(),
            |e| e.update(black_box(t), black_box(od)),
            BatchSize::SmallInput,
        );
    });
}

criterion_group!(benches, update);
criterion_main!(benches);
