//! The reading path under hostile input, shared by the property tests
//! (`tests/hardening_props.rs`), the fuzz target `reading_path`
//! (`fuzz/fuzz_targets/reading_path.rs`, which includes this file by path)
//! and the corpus replay (`tests/fuzz_corpus.rs`).
//!
//! A run is a [`Setup`] (configuration choices, an invented culture) and a
//! list of [`Step`]s: plausible readings of the culture, arbitrary `f32`
//! times and values (straight into the estimator as OD, or through the
//! photometer as counts), clock jumps and event draining. [`run`] feeds them
//! through photometer → `Watch::update` and checks after every reading:
//!
//! * every published number is finite (all fields of the estimate, its
//!   parameters and `covariance()`, the report's forecast);
//! * the covariance is symmetric and positive definite (Cholesky in f64);
//! * capacity and rate are positive;
//! * the event queue stays within its capacity and
//!   `events_raised == taken + pending + lost`.
//!
//! Everything here is invented test input.
#![allow(
    dead_code,
    clippy::cast_possible_truncation,
    reason = "each test file is its own crate and uses a subset of the helpers"
)]

use plateau::{
    Estimate, EstimatorConfig, Measured, MonitorConfig, Photometer, PhotometerConfig, Reading,
    Report, Target, Watch,
};

/// Readings every 5 minutes, in hours.
pub const INTERVAL_H: f32 = 5.0 / 60.0;

/// The invented photometer channel: dark 100 counts, blank 10 100 counts,
/// 16-bit full scale, 1 cm path.
pub fn photometer() -> Photometer<f32> {
    Photometer::new(PhotometerConfig::new(100.0, 10_100.0, 65_535.0, 1.0).expect("valid channel"))
}

/// Counts that the invented channel turns into `od` (Beer–Lambert inverted:
/// I = I0 · 10^(−OD)).
pub fn counts_for_od(od: f32) -> f32 {
    100.0 + 10_000.0 * libm::powf(10.0, -od)
}

/// Configuration choices and the invented culture behind plausible steps.
#[derive(Clone, Copy, Debug)]
pub struct Setup {
    /// Small sizes (8 slots, 2 targets, 4 queued events) instead of defaults.
    pub small: bool,
    /// Raw setter arguments; setters that refuse them keep the default, so a
    /// refused argument is itself part of the test.
    pub noise_floor: f32,
    pub noise_fraction: f32,
    pub blank: f32,
    pub ceiling: f32,
    pub gate_sigma: f32,
    pub max_consecutive_rejections: u8,
    pub refit_iterations: u8,
    pub min_readings: u8,
    pub dilution_ratio: f32,
    pub min_growth_ratio: f32,
    pub max_rate_per_h: f32,
    /// Targets as (`is_fraction`, level or fraction).
    pub targets: [(bool, f32); 3],
    /// Invented culture: capacity (OD), rate (per hour), midpoint (hours).
    pub capacity_od: f32,
    pub rate_per_h: f32,
    pub midpoint_h: f32,
}

impl Default for Setup {
    fn default() -> Self {
        Self {
            small: false,
            noise_floor: 0.003,
            noise_fraction: 0.01,
            blank: 0.0,
            ceiling: f32::INFINITY,
            gate_sigma: 4.0,
            max_consecutive_rejections: 4,
            refit_iterations: 2,
            min_readings: 6,
            dilution_ratio: 0.8,
            min_growth_ratio: 2.0,
            max_rate_per_h: 3.0,
            targets: [(false, 0.6), (true, 0.5), (true, 0.9)],
            capacity_od: 1.5,
            rate_per_h: 0.7,
            midpoint_h: 8.0,
        }
    }
}

impl Setup {
    /// The estimator configuration: every setter applied, refusals ignored.
    pub fn estimator_config(&self) -> EstimatorConfig<f32> {
        let mut c = EstimatorConfig::<f32>::new();
        c = c.noise(self.noise_floor, self.noise_fraction).unwrap_or(c);
        c = c.blank(self.blank).unwrap_or(c);
        c = c.ceiling(self.ceiling).unwrap_or(c);
        c = c.gate_sigma(self.gate_sigma).unwrap_or(c);
        c = c
            .max_consecutive_rejections(self.max_consecutive_rejections)
            .unwrap_or(c);
        c = c.refit_iterations(self.refit_iterations).unwrap_or(c);
        c = c.min_readings(self.min_readings).unwrap_or(c);
        c = c.dilution_ratio(self.dilution_ratio).unwrap_or(c);
        c = c.min_growth_ratio(self.min_growth_ratio).unwrap_or(c);
        c.max_rate_per_h(self.max_rate_per_h).unwrap_or(c)
    }

    /// The invented culture's OD (blank included) at `t_h`, a logistic.
    pub fn truth_od(&self, t_h: f32) -> f32 {
        let k = self.capacity_od.abs().clamp(0.05, 4.0);
        let r = self.rate_per_h.abs().clamp(0.05, 3.0);
        let tm = if self.midpoint_h.is_finite() {
            self.midpoint_h.clamp(-100.0, 100.0)
        } else {
            8.0
        };
        let blank = if self.blank.is_finite() && self.blank >= 0.0 {
            self.blank.min(1.0)
        } else {
            0.0
        };
        blank + k / (1.0 + libm::expf(-r * (t_h - tm)))
    }
}

/// One thing that happens to the watch.
#[derive(Clone, Copy, Debug)]
pub enum Step {
    /// `count` plausible readings of the culture, 5 minutes apart, with
    /// relative noise `noise[i % 4]` (clamped to ±5 %), through the photometer
    /// when `counts`.
    Growth {
        count: u8,
        noise: [f32; 4],
        counts: bool,
    },
    /// An arbitrary reading at an arbitrary time, as OD or as counts.
    Raw {
        time_h: f32,
        value: f32,
        counts: bool,
    },
    /// An arbitrary value at the culture clock's current time (repeated time
    /// when it follows another step at the same time).
    AtClock { value: f32, counts: bool },
    /// Moves the culture clock by `delta_h` (backwards, huge, NaN: anything;
    /// a non-finite result leaves the clock where it was).
    Jump { delta_h: f32 },
    /// Takes every pending event.
    Drain,
}

/// What a run saw, for tests that want more than "no invariant broke".
#[derive(Clone, Copy, Debug, Default)]
pub struct Summary {
    pub readings: u32,
    pub accepted: u32,
    pub estimates: u32,
    pub taken: u64,
}

/// Feeds `steps` through the reading path and checks every invariant after
/// every reading. Panics (with the step) on the first broken invariant.
pub fn run(setup: &Setup, steps: &[Step]) -> Summary {
    if setup.small {
        run_sized::<8, 2, 4>(setup, steps)
    } else {
        run_sized::<32, 4, 16>(setup, steps)
    }
}

fn run_sized<const N: usize, const TARGETS: usize, const EVENTS: usize>(
    setup: &Setup,
    steps: &[Step],
) -> Summary {
    let mut watch: Watch<f32, N, TARGETS, EVENTS> =
        Watch::new(setup.estimator_config(), MonitorConfig::new());
    for &(fraction, x) in &setup.targets {
        let target = if fraction {
            Target::FractionOfCapacity(x)
        } else {
            Target::Level(x)
        };
        // Invalid or surplus targets are refused with an error, never a panic.
        let _ = watch.add_target(target);
    }
    let photometer = photometer();
    let mut clock_h = 0.0_f32;
    let mut summary = Summary::default();
    let feed = |watch: &mut Watch<f32, N, TARGETS, EVENTS>,
                time_h: f32,
                value: f32,
                counts: bool,
                summary: &mut Summary| {
        let od = if counts {
            match photometer.convert(value) {
                Reading::Od(v) => v.od,
                // The reading path's mapping of readings without an OD:
                // saturated or dark detector → +∞, invalid counts → NaN.
                Reading::FullScale | Reading::AtOrBelowDark => f32::INFINITY,
                Reading::Invalid => f32::NAN,
            }
        } else {
            value
        };
        let report = watch.update(time_h, od);
        summary.readings += 1;
        if report.outcome.is_accepted() {
            summary.accepted += 1;
        }
        let context = format!(
            "reading {} (t = {time_h:e} h, od = {od:e})",
            summary.readings
        );
        check_report(&report, &context);
        if let Some(e) = watch.estimate() {
            summary.estimates += 1;
            check_estimate(&e, &context);
        }
        check_events(watch, summary.taken, &context);
    };
    for step in steps {
        match *step {
            Step::Growth {
                count,
                noise,
                counts,
            } => {
                for i in 0..count {
                    clock_h += INTERVAL_H;
                    let n = noise[usize::from(i % 4)];
                    let n = if n.is_finite() {
                        n.clamp(-0.05, 0.05)
                    } else {
                        0.0
                    };
                    let od = setup.truth_od(clock_h) * (1.0 + n);
                    let value = if counts { counts_for_od(od) } else { od };
                    feed(&mut watch, clock_h, value, counts, &mut summary);
                }
            }
            Step::Raw {
                time_h,
                value,
                counts,
            } => feed(&mut watch, time_h, value, counts, &mut summary),
            Step::AtClock { value, counts } => {
                feed(&mut watch, clock_h, value, counts, &mut summary);
            }
            Step::Jump { delta_h } => {
                let next = clock_h + delta_h;
                if next.is_finite() {
                    clock_h = next;
                }
            }
            Step::Drain => {
                while watch.next_event().is_some() {
                    summary.taken += 1;
                }
            }
        }
    }
    summary
}

/// A finite value with a finite, non-negative sd.
#[track_caller]
pub fn check_measured(m: &Measured<f32>, what: &str, context: &str) {
    assert!(
        m.value.is_finite() && m.sd.is_finite() && m.sd >= 0.0,
        "{context}: {what} = {m:?}"
    );
}

/// The report's numbers are finite.
#[track_caller]
pub fn check_report(report: &Report<f32>, context: &str) {
    if let Some(eta) = &report.saturation_eta_h {
        check_measured(eta, "saturation_eta_h", context);
    }
}

/// Every field of the estimate finite, capacity and rate positive, the
/// covariance symmetric positive definite.
#[track_caller]
pub fn check_estimate(e: &Estimate<f32>, context: &str) {
    check_measured(&e.rate_per_h, "rate_per_h", context);
    check_measured(&e.doubling_time_h, "doubling_time_h", context);
    check_measured(&e.fitted_value, "fitted_value", context);
    check_measured(&e.capacity_unchecked(), "capacity_unchecked", context);
    assert!(e.rate_per_h.value > 0.0, "{context}: rate {e:?}");
    assert!(
        e.capacity_unchecked().value > 0.0,
        "{context}: capacity {e:?}"
    );
    if let Some(k) = &e.capacity {
        check_measured(k, "capacity", context);
        assert!(k.value > 0.0, "{context}: capacity {e:?}");
    }
    if let Some(m) = &e.inflection_time_h {
        check_measured(m, "inflection_time_h", context);
    }
    if let Some(m) = &e.lag_h {
        check_measured(m, "lag_h", context);
    }
    assert!(
        e.latest_time_h.is_finite() && e.noise_scale.is_finite() && e.noise_scale > 0.0,
        "{context}: {e:?}"
    );
    assert!(
        e.parameters().iter().all(|p| p.is_finite()),
        "{context}: parameters {:?}",
        e.parameters()
    );
    let cov = e.covariance();
    assert!(
        cov.iter().flatten().all(|c| c.is_finite()),
        "{context}: covariance {cov:?}"
    );
    for i in 0..cov.len() {
        for j in 0..cov.len() {
            assert!(
                cov[i][j].to_bits() == cov[j][i].to_bits(),
                "{context}: covariance not symmetric {cov:?}"
            );
        }
    }
    assert!(
        cholesky_f64(&cov).is_some(),
        "{context}: covariance not positive definite {cov:?}"
    );
}

/// The Cholesky factor of a symmetric P×P matrix computed in f64, or `None`
/// if a pivot is not positive: the matrix is positive definite exactly when
/// every pivot is (common practice; Golub & Van Loan, "Matrix Computations",
/// Cholesky factorisation [memory]).
pub fn cholesky_f64<const P: usize>(a: &[[f32; P]; P]) -> Option<[[f64; P]; P]> {
    let mut l = [[0.0_f64; P]; P];
    for j in 0..P {
        let mut d = f64::from(a[j][j]);
        for k in 0..j {
            d -= l[j][k] * l[j][k];
        }
        if !(d > 0.0) || !d.is_finite() {
            return None;
        }
        l[j][j] = d.sqrt();
        for i in j + 1..P {
            let mut v = f64::from(a[i][j]);
            for k in 0..j {
                v -= l[i][k] * l[j][k];
            }
            l[i][j] = v / l[j][j];
        }
    }
    Some(l)
}

/// The queue within its capacity and the ledger balanced.
#[track_caller]
pub fn check_events<const N: usize, const TARGETS: usize, const EVENTS: usize>(
    watch: &Watch<f32, N, TARGETS, EVENTS>,
    taken: u64,
    context: &str,
) {
    let monitor = watch.monitor();
    let pending = monitor.pending_events();
    assert!(pending <= EVENTS, "{context}: {pending} pending > {EVENTS}");
    let raised = u64::from(monitor.events_raised());
    let lost = u64::from(watch.events_lost());
    assert_eq!(
        raised,
        taken + pending as u64 + lost,
        "{context}: raised {raised} != taken {taken} + pending {pending} + lost {lost}"
    );
}

/// Decodes fuzzer bytes into a setup and steps: 24 bytes of setup, then
/// 9-byte steps (a tag byte and two little-endian `f32`s).
pub fn decode(data: &[u8]) -> (Setup, Vec<Step>) {
    let mut bytes = Bytes(data);
    let mut setup = Setup::default();
    let flags = bytes.u8();
    setup.small = flags & 1 != 0;
    // Config choices come from small menus (valid and invalid values), so the
    // fuzzer reaches fitted states instead of refused configs only.
    let pick = |b: u8, menu: &[f32]| menu[usize::from(b) % menu.len()];
    setup.noise_floor = pick(bytes.u8(), &[0.003, 0.0, 0.01, 1e-6, -1.0, f32::NAN, 0.3]);
    setup.noise_fraction = pick(bytes.u8(), &[0.01, 0.0, 0.05, 1e-7, f32::INFINITY]);
    setup.blank = pick(bytes.u8(), &[0.0, 0.04, 0.5, -0.1, f32::MAX]);
    setup.ceiling = pick(bytes.u8(), &[f32::INFINITY, 3.0, 0.5, 1e-30, 0.0, f32::NAN]);
    setup.gate_sigma = pick(bytes.u8(), &[4.0, 2.0, 3.0, 10.0, 1.0, f32::INFINITY]);
    setup.max_consecutive_rejections = bytes.u8() % 10;
    setup.refit_iterations = bytes.u8() % 10;
    setup.min_readings = bytes.u8() % 40;
    setup.dilution_ratio = pick(bytes.u8(), &[0.8, 0.5, 0.99, 1.0, 0.0]);
    setup.min_growth_ratio = pick(bytes.u8(), &[2.0, 1.1, 10.0, 1.0]);
    setup.max_rate_per_h = pick(bytes.u8(), &[3.0, 0.1, 30.0, 0.0]);
    for target in &mut setup.targets {
        let b = bytes.u8();
        *target = (
            b & 1 != 0,
            pick(b >> 1, &[0.6, 0.5, 0.9, 1.2, 0.0, -1.0, f32::NAN, 1e30]),
        );
    }
    setup.capacity_od = pick(bytes.u8(), &[1.5, 0.3, 3.0, 0.05, 4.0]);
    setup.rate_per_h = pick(bytes.u8(), &[0.7, 0.2, 1.5, 3.0]);
    setup.midpoint_h = pick(bytes.u8(), &[8.0, 3.0, 15.0, 0.0]);
    let _reserved = bytes.take::<4>();
    let mut steps = Vec::new();
    while !bytes.0.is_empty() {
        let tag = bytes.u8();
        let a = f32::from_le_bytes(bytes.take());
        let b = f32::from_le_bytes(bytes.take());
        let counts = tag & 0x80 != 0;
        steps.push(match tag & 0x7f {
            0..=47 => Step::Growth {
                count: (tag & 0x0f) + 1,
                noise: [a * 1e-3, b * 1e-3, -a * 1e-3, -b * 1e-3],
                counts,
            },
            48..=79 => Step::Raw {
                time_h: a,
                value: b,
                counts,
            },
            80..=103 => Step::AtClock { value: b, counts },
            104..=119 => Step::Jump { delta_h: a },
            _ => Step::Drain,
        });
    }
    (setup, steps)
}

struct Bytes<'a>(&'a [u8]);

impl Bytes<'_> {
    fn take<const K: usize>(&mut self) -> [u8; K] {
        let mut out = [0_u8; K];
        let n = K.min(self.0.len());
        out[..n].copy_from_slice(&self.0[..n]);
        self.0 = &self.0[n..];
        out
    }

    fn u8(&mut self) -> u8 {
        self.take::<1>()[0]
    }
}

/// The fuzz target's body: decode, run, check.
pub fn check_bytes(data: &[u8]) {
    let (setup, steps) = decode(data);
    run(&setup, &steps);
}
