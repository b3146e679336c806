//! Shared tolerances and numerical helpers for the integration tests.
//!
//! Every comparison in `tests/` goes through [`assert_close`], so a failure
//! always prints the two values, their difference and the bound it broke.
//! The numerical derivative and the maximiser here are written from the
//! textbook definitions (central differences with one Richardson step;
//! golden-section search), independently of the crate's own code.

#![allow(
    dead_code,
    reason = "each test file is its own crate and uses a subset of the helpers"
)]

/// Machine epsilon of the reference type.
pub const EPS: f64 = f64::EPSILON;

/// Asserts |actual − expected| ≤ abs + rel · |expected|, and that `actual` is
/// finite.
#[track_caller]
pub fn assert_close(actual: f64, expected: f64, rel: f64, abs: f64, what: &str) {
    let diff = (actual - expected).abs();
    let bound = abs + rel * expected.abs();
    assert!(
        actual.is_finite() && diff <= bound,
        "{what}: got {actual:.17e}, expected {expected:.17e}, |diff| {diff:.3e} > bound {bound:.3e}"
    );
}

/// |a − b| / |b| (b ≠ 0).
pub fn rel_diff(a: f64, b: f64) -> f64 {
    ((a - b) / b).abs()
}

/// f'(x) by central differences with one Richardson extrapolation step:
/// D(h) = (f(x+h) − f(x−h)) / 2h, f' ≈ (4 D(h/2) − D(h)) / 3, truncation
/// error O(h⁴) (common practice; any numerical-analysis text, e.g. Burden &
/// Faires, "Numerical Analysis", section on Richardson extrapolation [memory]).
pub fn derivative(f: impl Fn(f64) -> f64, x: f64, h: f64) -> f64 {
    let d = |h: f64| (f(x + h) - f(x - h)) / (2.0 * h);
    (4.0 * d(h / 2.0) - d(h)) / 3.0
}

/// The argument of the maximum of a unimodal `f` on `[lo, hi]` by
/// golden-section search, to within `tol` in x (common practice).
pub fn argmax(f: impl Fn(f64) -> f64, mut lo: f64, mut hi: f64, tol: f64) -> f64 {
    let inv_phi = (5.0_f64.sqrt() - 1.0) / 2.0;
    let mut a = hi - (hi - lo) * inv_phi;
    let mut b = lo + (hi - lo) * inv_phi;
    let (mut fa, mut fb) = (f(a), f(b));
    while hi - lo > tol {
        if fa >= fb {
            hi = b;
            b = a;
            fb = fa;
            a = hi - (hi - lo) * inv_phi;
            fa = f(a);
        } else {
            lo = a;
            a = b;
            fa = fb;
            b = lo + (hi - lo) * inv_phi;
            fb = f(b);
        }
    }
    0.5 * (lo + hi)
}

/// Tolerance on a time recovered by inverting a curve at a level it reached at
/// `t_h`: the rounding in the forward value divided by the slope there, plus a
/// few ulps of the time itself.
///
/// The forward value carries a few ulps of the level itself, plus a few ulps
/// of `value_scale`, the size of the intermediate terms it is formed from when
/// the formula subtracts them (zero when it does not). `time_scale_h` is the
/// size of the times inside exponents (midpoint, lag, t). `slope` only scales
/// the bound.
pub fn inverse_time_tolerance(
    t_h: f64,
    time_scale_h: f64,
    level: f64,
    value_scale: f64,
    slope: f64,
) -> f64 {
    let ulps = 256.0 * EPS;
    ulps * (t_h.abs() + time_scale_h) + ulps * (level.abs() + value_scale) / slope.abs()
}
