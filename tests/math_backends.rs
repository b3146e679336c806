//! How far the device type `f32` strays from the `f64` reference on the model
//! functions, for whichever `f32` backend is compiled in: `libm` by default,
//! `micromath` with the `fast-math` feature (see `src/math.rs`).
//!
//! Measured: the largest relative error of the logistic, Gompertz and
//! Baranyi `value` and `time_to_reach` over a grid of invented parameter sets
//! and levels from 2 % to 98 % of the range. The `f64` reference is evaluated
//! at the exact `f32` inputs (widened), so only the evaluation error is
//! measured, not the rounding of the parameters. The `f64` path is checked
//! against outside references in the other test files.
//!
//! * value error: |y32 − y64| / |y64|.
//! * inverse error: |t32 − t64| divided by the curve's rise time
//!   (range / maximum slope: 4/r for the logistic, A/μm for the ln-scale
//!   forms), because a time has no natural zero.
//!
//! Print the table the README quotes with
//! `cargo test -p plateau --test math_backends -- --ignored --nocapture`
//! (add `--features fast-math` for the micromath figures).

use plateau::{Baranyi, Gompertz, GrowthCurve, Logistic, Real};

/// Largest errors found, in the order of [`NAMES`].
type Errors = [f64; 6];

const NAMES: [&str; 6] = [
    "logistic value",
    "logistic time_to_reach",
    "Gompertz value",
    "Gompertz time_to_reach",
    "Baranyi value",
    "Baranyi time_to_reach",
];

/// Bounds asserted below: about twice the largest error measured on this grid
/// (see the README table), so a regression in either backend shows.
fn bounds() -> Errors {
    if cfg!(feature = "fast-math") {
        [1e-3, 4e-5, 6e-3, 8e-4, 1.5e-2, 3e-3]
    } else {
        [1e-6, 1e-6, 1e-6, 1e-6, 2e-5, 4e-6]
    }
}

/// Levels as fractions of the curve's range.
const FRACTIONS: [f64; 11] = [0.02, 0.05, 0.1, 0.2, 0.35, 0.5, 0.65, 0.8, 0.9, 0.95, 0.98];

fn narrow(x: f64) -> f32 {
    <f32 as Real>::from_f64(x)
}

/// Folds the value and inverse errors of one curve (in both precisions) into
/// `max[slot]` and `max[slot + 1]`.
fn measure_curve<C32: GrowthCurve<f32>, C64: GrowthCurve<f64>>(
    c32: &C32,
    c64: &C64,
    max: &mut Errors,
    slot: usize,
) {
    let rise_h = (c64.upper_asymptote() - c64.lower_asymptote()) / c64.max_slope();
    for &p in &FRACTIONS {
        // Value, at the time the f64 curve reaches the level (rounded to f32).
        let level64 = c64.lower_asymptote() + p * (c64.upper_asymptote() - c64.lower_asymptote());
        let t = narrow(c64.time_to_reach(level64).unwrap());
        let y32 = f64::from(c32.value(t));
        let y64 = c64.value(f64::from(t));
        max[slot] = max[slot].max(((y32 - y64) / y64).abs());
        // Inverse, at a level representable in f32.
        let level = narrow(level64);
        let t32 = f64::from(c32.time_to_reach(level).unwrap());
        let t64 = c64.time_to_reach(f64::from(level)).unwrap();
        max[slot + 1] = max[slot + 1].max((t32 - t64).abs() / rise_h);
    }
}

/// Runs the whole grid (invented parameter sets) and returns the maxima.
fn measure() -> Errors {
    let mut max = [0.0; 6];
    // Logistic: capacity OD, rate per hour, midpoint hours.
    for &k in &[0.5, 1.5, 3.0] {
        for &r in &[0.2, 0.7, 2.0] {
            for &m in &[3.0, 8.0, 20.0] {
                let (k, r, m) = (narrow(k), narrow(r), narrow(m));
                let c32 = Logistic::from_midpoint(k, r, m).unwrap();
                let c64 =
                    Logistic::from_midpoint(f64::from(k), f64::from(r), f64::from(m)).unwrap();
                measure_curve(&c32, &c64, &mut max, 0);
            }
        }
    }
    // Gompertz and Baranyi: asymptote ln units, μm per hour, lag hours.
    for &a in &[2.0, 5.0, 9.0] {
        for &mu in &[0.3, 1.2, 2.5] {
            for &lag in &[0.0, 2.0, 6.0] {
                let (a, mu, lag) = (narrow(a), narrow(mu), narrow(lag));
                let (a64, mu64, lag64) = (f64::from(a), f64::from(mu), f64::from(lag));
                let g32 = Gompertz::new(a, mu, lag).unwrap();
                let g64 = Gompertz::new(a64, mu64, lag64).unwrap();
                measure_curve(&g32, &g64, &mut max, 2);
                // Baranyi's h0 = μ λ is formed inside the constructor; build
                // the f64 reference from the same f32 h0.
                let b32 = Baranyi::new(a, mu, lag).unwrap();
                let b64 = Baranyi::from_h0(a64, mu64, f64::from(b32.h0())).unwrap();
                measure_curve(&b32, &b64, &mut max, 4);
            }
        }
    }
    max
}

fn backend() -> &'static str {
    if cfg!(feature = "fast-math") {
        "micromath (fast-math)"
    } else {
        "libm"
    }
}

#[test]
fn f32_agrees_with_f64_within_the_backend_bound() {
    let measured = measure();
    for ((name, got), bound) in NAMES.iter().zip(measured).zip(bounds()) {
        assert!(
            got <= bound,
            "{} backend, {name}: max error {got:.3e} above the bound {bound:.3e}",
            backend()
        );
    }
}

#[test]
fn the_measurement_can_see_an_error() {
    // Guard against a measurement that always reads zero: an f32 curve whose
    // capacity is off by one part in 1e4 must register at least that much.
    let c64 = Logistic::from_midpoint(1.5_f64, 0.7, 8.0).unwrap();
    let c32 =
        Logistic::from_midpoint(narrow(1.5 * (1.0 + 1e-4)), narrow(0.7), narrow(8.0)).unwrap();
    let mut max = [0.0; 6];
    measure_curve(&c32, &c64, &mut max, 0);
    assert!(max[0] > 0.9e-4, "value error {:.3e}", max[0]);
}

#[test]
fn ln_below_one_is_as_accurate_as_above() {
    // The model inverses take logarithms of ratios below 1 all the time.
    // micromath's own ln is off by up to 0.12 absolute on (0, 1) (the
    // project's measurement of micromath 2.1, reproduced here before the
    // backend reflected it; README, "Accuracy of the math backends"); libm is
    // within an ulp or two of the result. Reference: std's f64 ln.
    let bound = if cfg!(feature = "fast-math") {
        1e-4
    } else {
        1e-6
    };
    let mut worst = 0.0_f64;
    for i in 0..=4000 {
        // 1e-30 ..= 1e3, logarithmically spaced.
        let x = narrow(10.0_f64.powf(-30.0 + 33.0 * f64::from(i) / 4000.0));
        let exact = f64::from(x).ln();
        // Absolute error, less the few f32 ulps of the result any f32 ln has.
        let err =
            (f64::from(Real::ln(x)) - exact).abs() - 4.0 * f64::from(f32::EPSILON) * exact.abs();
        worst = worst.max(err);
    }
    assert!(worst <= bound, "{}: ln abs error {worst:.3e}", backend());
}

#[test]
#[ignore = "prints the figures for the README table"]
fn print_max_errors() {
    println!("backend: {}", backend());
    for (name, got) in NAMES.iter().zip(measure()) {
        println!("| {name} | {got:.2e} |");
    }
}
