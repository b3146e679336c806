//! Prints the memory footprint of plateau's device-side types, one
//! `name_bytes: N` line each, for size reports and CI logs.
//!
//! Run with `cargo run --example footprint` (add `--release`, sizes are the same).
//! Sizes are for the host's layout; `f32` fields and `u32`-sized enums lay
//! out the same on the Cortex-M4 (thumbv7em), except that `usize` is 8 bytes
//! here and 4 there.

use core::mem::size_of;

use plateau::{Linearity, OpticalDensity, Photometer, PhotometerConfig, Reading, SamplerConfig};

/// One line per type the device keeps. Add the estimator and monitor here
/// when they land, in the same `name_bytes` form.
fn footprint() -> Vec<(&'static str, usize)> {
    vec![
        (
            "photometer_config_bytes",
            size_of::<PhotometerConfig<f32>>(),
        ),
        ("photometer_bytes", size_of::<Photometer<f32>>()),
        ("linearity_table_8_bytes", size_of::<Linearity<f32, 8>>()),
        (
            "photometer_with_linearity_8_bytes",
            size_of::<Photometer<f32, 8>>(),
        ),
        ("optical_density_bytes", size_of::<OpticalDensity<f32>>()),
        ("reading_bytes", size_of::<Reading<f32>>()),
        ("sampler_config_bytes", size_of::<SamplerConfig>()),
        // ("estimator_bytes", size_of::<plateau::Estimator<f32>>()),
        // ("monitor_bytes", size_of::<plateau::Monitor<f32>>()),
    ]
}

fn main() {
    for (name, bytes) in footprint() {
        println!("{name}: {bytes}");
    }
}
