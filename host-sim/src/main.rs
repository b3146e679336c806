//! host-sim: runs the plateau core on the host.
//!
//! For now `demo` prints the closed-form curve of an invented culture; the
//! full simulator (estimator replay, plots, fleets) replaces it.

use plateau::{GrowthCurve, Logistic};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let command = std::env::args().nth(1).unwrap_or_default();
    if command != "demo" {
        eprintln!("usage: host-sim demo");
        std::process::exit(2);
    }
    // Invented culture: capacity 1.5 OD, rate 0.7 per hour, midpoint 8 h.
    let curve = Logistic::<f64>::from_midpoint(1.5, 0.7, 8.0)?;
    println!("invented culture: K = 1.5 OD, r = 0.7 /h, midpoint 8 h (closed form)");
    println!("{:>8} {:>10}", "time_h", "od");
    for hour in 0..=20 {
        let t = f64::from(hour);
        println!("{t:>8.1} {:>10.4}", curve.value(t));
    }
    println!(
        "doubling time {:.3} h, lag (tangent) {:.3} h",
        curve.doubling_time_h(),
        curve.lag_h()
    );
    println!(
        "reaches 90 % of capacity at {:.3} h",
        curve.time_to_reach(1.35)?
    );
    Ok(())
}
