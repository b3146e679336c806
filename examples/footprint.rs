//! Prints the memory footprint of plateau's device-side types, one
//! `name_bytes: N` line each, for size reports and CI logs.
//!
//! Run with `cargo run --example footprint` (add `--release`, sizes are the same).
//! Sizes are for the host's layout; `f32` fields and `u32`-sized enums lay
//! out the same on the Cortex-M4 (thumbv7em), except that `usize` is 8 bytes
//! here and 4 there.

use core::mem::size_of;

use plateau::{
    Estimate, Estimator, EstimatorConfig, Linearity, OpticalDensity, Outcome, Photometer,
    PhotometerConfig, Reading, SamplerConfig,
};

/// One line per type the device keeps. The estimator holds no `usize`, so its
/// sizes are the Cortex-M4's too; the monitor's event queue keeps two `usize`
/// indices (8 bytes more here than on the Cortex-M4).
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
        // The running state, for the default 16 history slots and for 16 and 24.
        ("estimator_state_bytes", size_of::<Estimator<f32>>()),
        (
            "estimator_state_16_slots_bytes",
            size_of::<Estimator<f32, 16>>(),
        ),
        (
            "estimator_state_24_slots_bytes",
            size_of::<Estimator<f32, 24>>(),
        ),
        // Included in the state above; listed for a config kept apart.
        ("estimator_config_bytes", size_of::<EstimatorConfig<f32>>()),
        ("estimate_bytes", size_of::<Estimate<f32>>()),
        ("outcome_bytes", size_of::<Outcome>()),
        // Default monitor: 4 targets, 8 queued events.
        ("monitor_bytes", size_of::<plateau::Monitor<f32>>()),
        (
            "monitor_2_targets_4_events_bytes",
            size_of::<plateau::Monitor<f32, 2, 4>>(),
        ),
        (
            "monitor_config_bytes",
            size_of::<plateau::MonitorConfig<f32>>(),
        ),
        ("watch_bytes", size_of::<plateau::Watch<f32>>()),
    ]
}

fn main() {
    for (name, bytes) in footprint() {
        println!("{name}: {bytes}");
    }
}
