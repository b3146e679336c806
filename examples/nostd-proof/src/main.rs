//! Links the model math, the estimator and the monitor into a bare-metal binary. If anything in `plateau`'s
//! dependency tree needed std or alloc, this would fail to build: there is no
//! std for the target and no global allocator here.
#![no_std]
#![no_main]

use core::hint::black_box;
use plateau::model::step;
use plateau::{
    Baranyi, Gompertz, GrowthCurve, Linearity, Logistic, Photometer, PhotometerConfig, Population,
    Richards, SamplerConfig, ZwieteringLogistic,
};
use plateau::{EstimatorConfig, MonitorConfig, Target, Watch};

#[panic_handler]
fn panic(_: &core::panic::PanicInfo<'_>) -> ! {
    loop {}
}

fn exercise() -> f32 {
    let k = black_box(1.5_f32);
    let mut acc = 0.0;
    if let Ok(c) = Logistic::from_midpoint(k, 0.7, 8.0) {
        acc += c.value(black_box(5.0)) + c.time_to_reach(0.9).unwrap_or(0.0) + c.lag_h();
    }
    if let Ok(c) = ZwieteringLogistic::new(k * 3.0, 1.1, 2.0) {
        acc += c.value(4.0) + c.lag_h();
    }
    if let Ok(g) = Gompertz::new(k * 3.0, 1.1, 2.0) {
        if let Ok(p) = Population::new(g, 0.01) {
            acc += p.value(4.0) + p.inflection().time_h;
        }
    }
    if let Ok(c) = Richards::new(k * 3.0, 1.1, 2.0, 0.5) {
        acc += c.time_to_reach(2.0).unwrap_or(0.0);
    }
    if let Ok(c) = Baranyi::new(k * 3.0, 1.1, 2.0) {
        acc += c.value(4.0) + c.time_to_reach(1.0).unwrap_or(0.0) + c.inflection().value;
    }
    acc += step::logistic(0.1, black_box(0.25), k, 0.7).value;
    acc += step::richards(0.1, 0.25, k, 0.7, 0.5).d_shape;
    acc += step::baranyi(0.1, 0.25, k, 0.7, 0.1).1;
    if let (Ok(c), Ok(l)) = (
        PhotometerConfig::new(100.0, black_box(10_100.0), 65_535.0, 1.0),
        Linearity::<f32, 4>::new(&[(1.0, 1.0), (2.0, 2.5)]),
    ) {
        acc += Photometer::with_linearity(c, l)
            .convert(black_box(1_100.0))
            .od()
            .unwrap_or(0.0);
    }
    if let Ok(s) = SamplerConfig::new(black_box(4), 250, 40, 20) {
        acc += f32::from(s.conversions());
    }
    // The whole reading path: estimator and monitor behind the facade.
    let mut watch: Watch = Watch::new(EstimatorConfig::new(), MonitorConfig::new());
    let _ = watch.add_target(Target::FractionOfCapacity(0.5));
    for i in 0..black_box(200_u16) {
        let t = f32::from(i) / 6.0;
        let y = 1.5 / (1.0 + 150.0 * plateau::Real::exp(-0.7 * t));
        let report = watch.update(t, black_box(y));
        acc += report.saturation_eta_h.map_or(0.0, |m| m.value);
        while let Some(e) = watch.next_event() {
            acc += e.time_h;
        }
    }
    if let Some(e) = watch.estimate() {
        acc += e.rate_per_h.value + e.capacity.map_or(0.0, |k| k.value);
    }
    acc
}

/// Entry point for the linker; never returns.
#[unsafe(no_mangle)]
pub extern "C" fn _start() -> ! {
    let _ = black_box(exercise());
    loop {}
}
