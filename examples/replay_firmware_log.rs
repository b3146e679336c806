//! Replays the firmware's INVENTED culture log on the host through the very
//! files the firmware runs (`examples/firmware/src/{culture_log, replay,
//! pipeline}.rs`, included by path): stand-in front end → sampler →
//! photometer → estimator, all in `f32`, and prints the same `final:` line.
//!
//! CI (`.ci/run`) compares this line with the one the firmware prints under
//! QEMU, once with the default math backend and once with `fast-math`.
//!
//! ```sh
//! cargo run --example replay_firmware_log                       # libm
//! cargo run --example replay_firmware_log --features fast-math  # micromath
//! ```

#[allow(
    dead_code,
    reason = "the firmware uses the invented truth and event times"
)]
#[path = "firmware/src/culture_log.rs"]
mod culture_log;
#[path = "firmware/src/pipeline.rs"]
mod pipeline;
#[path = "firmware/src/replay.rs"]
mod replay;

use std::process::ExitCode;

use plateau::{Outcome, Reading};

fn main() -> ExitCode {
    let photometer = match pipeline::photometer() {
        Ok(p) => p,
        Err(e) => {
            eprintln!("bad photometer setting: {e}");
            return ExitCode::FAILURE;
        }
    };
    let mut sampler = match pipeline::sampler(&pipeline::COUNTS) {
        Ok(s) => s,
        Err(e) => {
            eprintln!("bad sampler setting: {e}");
            return ExitCode::FAILURE;
        }
    };
    let mut estimator = pipeline::estimator();
    let mut first_fit = true;
    let run = pipeline::run(&mut sampler, &photometer, &mut estimator, |step| {
        match (&step.reading, step.outcome) {
            (Ok(Reading::Od(_)), Some(Outcome::Rejected(reason))) => {
                println!("rejected: time_min={} reason={reason}", step.time_min);
            }
            (Ok(Reading::Od(_)), _) => {}
            (reading, _) => println!("no_od: time_min={} reading={reading:?}", step.time_min),
        }
        if first_fit && let Some(e) = step.estimate {
            first_fit = false;
            println!(
                "first_estimate: time_h={} rate_per_h={}",
                step.time_h, e.rate_per_h.value
            );
        }
    });
    if let Err(e) = run {
        eprintln!("front end init failed: {e:?}");
        return ExitCode::FAILURE;
    }
    println!("{}", pipeline::FinalLine(estimator.estimate().as_ref()));
    ExitCode::SUCCESS
}
