//! Runs the default estimator (`Estimator::<f32>`, 16 slots) over a
//! deterministic, INVENTED stream of readings and prints the final estimate:
//! the workload for host instruction counts (`.ci/count-host-instructions`
//! runs it under callgrind for two lengths and divides the difference).
//!
//! The stream: a logistic culture (capacity 1.8 OD, rate 0.6 per hour,
//! midpoint 8 h, all invented) read every 5 minutes, with noise of standard
//! deviation 0.003 + 1 % of the value, made from a small linear congruential
//! generator (so no random-number crate and the same stream on every
//! machine), and every 97th reading an invented bubble (−0.15 OD).
//!
//! ```sh
//! cargo run --release --example update_loop -- 2000
//! PLATEAU_REFIT_EVERY=8 cargo run --release --example update_loop -- 2000
//! ```
//!
//! `PLATEAU_REFIT_EVERY` (1 to 64, default 1) sets the estimator's
//! `refit_every`.

use std::process::ExitCode;

use plateau::{Estimator, EstimatorConfig, Outcome};

/// Invented culture.
const CAPACITY_OD: f64 = 1.8;
const RATE_PER_H: f64 = 0.6;
const MIDPOINT_H: f64 = 8.0;
const STEP_H: f64 = 5.0 / 60.0;

/// A 32-bit linear congruential generator (Numerical Recipes' constants
/// 1664525 and 1013904223 [memory]); plenty for invented noise.
struct Lcg(u32);

impl Lcg {
    /// Uniform on [0, 1).
    fn uniform(&mut self) -> f64 {
        self.0 = self.0.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
        f64::from(self.0 >> 8) / f64::from(1_u32 << 24)
    }

    /// Roughly standard normal: the sum of 12 uniforms minus 6 (variance 1).
    fn normal(&mut self) -> f64 {
        (0..12).map(|_| self.uniform()).sum::<f64>() - 6.0
    }
}

/// Reading `i` of the invented stream: (time in hours, OD).
fn reading(i: u32, noise: &mut Lcg) -> (f32, f32) {
    let t = f64::from(i) * STEP_H;
    let truth = CAPACITY_OD / (1.0 + (-RATE_PER_H * (t - MIDPOINT_H)).exp());
    let mut od = truth + (0.003 + 0.01 * truth) * noise.normal();
    if i % 97 == 96 {
        od -= 0.15;
    }
    #[allow(
        clippy::cast_possible_truncation,
        reason = "the device reads f32; rounding to it is the point"
    )]
    (t as f32, od.max(0.0) as f32)
}

fn main() -> ExitCode {
    let readings: u32 = match std::env::args().nth(1).map(|a| a.parse()) {
        None => 1000,
        Some(Ok(n)) => n,
        Some(Err(_)) => {
            eprintln!("usage: update_loop [READINGS]");
            return ExitCode::FAILURE;
        }
    };
    let mut noise = Lcg(0x2545_F491);
    let every = std::env::var("PLATEAU_REFIT_EVERY").map_or(Ok(1), |v| v.parse::<u8>());
    let config = match every.map(|e| EstimatorConfig::new().refit_every(e)) {
        Ok(Ok(config)) => config,
        _ => {
            eprintln!("PLATEAU_REFIT_EVERY must be 1 to 64");
            return ExitCode::FAILURE;
        }
    };
    let mut estimator = Estimator::<f32>::new(config);
    let (mut accepted, mut rejected) = (0_u32, 0_u32);
    for i in 0..readings {
        let (t, od) = reading(i, &mut noise);
        match estimator.update(t, od) {
            Outcome::Rejected(_) => rejected += 1,
            _ => accepted += 1,
        }
    }
    println!("readings: {readings} accepted: {accepted} rejected: {rejected}");
    match estimator.estimate() {
        Some(e) => {
            match e.capacity {
                Some(k) => print!("capacity={} capacity_sd={}", k.value, k.sd),
                None => print!("capacity=none"),
            }
            println!(
                " rate_per_h={} rate_per_h_sd={} (invented truth: capacity {CAPACITY_OD}, rate {RATE_PER_H})",
                e.rate_per_h.value, e.rate_per_h.sd
            );
        }
        None => println!("no estimate yet"),
    }
    ExitCode::SUCCESS
}
