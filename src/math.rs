//! The math backend: every transcendental call in the crate goes through [`Real`].
//!
//! Inside `cargo test` the standard library is linked, so a bare `x.exp()` on an
//! `f32` would silently call std's version on the host and a different one on the
//! device. To keep host and device identical, every call here names its backend by
//! path:
//!
//! * `f64` always uses [`libm`] (`libm::exp`, `libm::log`, ...).
//! * `f32` uses [`libm`] (`libm::expf`, ...) by default. With the `fast-math`
//!   feature it uses `micromath`'s approximations instead. `fast-math` takes
//!   precedence for `f32` whenever it is enabled; there is no other backend switch,
//!   so every feature combination compiles.
//!
//! # Accuracy cost of `fast-math`
//!
//! Measured by `tests/math_backends.rs` against `libm` in `f64` on the model
//! functions (logistic, Gompertz, Baranyi value and inverse), see the README's
//! results table. micromath trades accuracy for speed: its `exp` is good to a
//! few tenths of a percent, its `ln` to about 1e-4 absolute (on (0, 1) only
//! through the reflection ln x = −ln(1/x) done here; micromath's own `ln` is
//! off by up to 0.12 there) and its `sqrt` to a few percent. Keep it opt-in.

use core::fmt::Debug;
use core::ops::{Add, AddAssign, Div, DivAssign, Mul, MulAssign, Neg, Sub, SubAssign};

/// A floating-point type the model math is written over: `f32` on the device,
/// `f64` for host references.
///
/// Every method that calls a transcendental function goes to the backend chosen
/// by the crate features: `libm` for `f64` always and for `f32` by default;
/// `micromath` for `f32` when the `fast-math` feature is on (it takes precedence).
///
/// # Examples
///
/// ```
/// use plateau::Real;
/// let x: f64 = Real::exp(1.0_f64);
/// assert!((x - core::f64::consts::E).abs() < 1e-15);
/// let y: f32 = Real::ln(core::f32::consts::E);
/// assert!((y - 1.0).abs() < 1e-3);
/// ```
pub trait Real:
    Copy
    + Debug
    + Default
    + PartialOrd
    + Add<Output = Self>
    + Sub<Output = Self>
    + Mul<Output = Self>
    + Div<Output = Self>
    + Neg<Output = Self>
    + AddAssign
    + SubAssign
    + MulAssign
    + DivAssign
{
    /// 0.
    const ZERO: Self;
    /// 1.
    const ONE: Self;
    /// 2.
    const TWO: Self;
    /// 0.5.
    const HALF: Self;
    /// ln 2.
    const LN_2: Self;
    /// Euler's number e.
    const E: Self;
    /// Machine epsilon.
    const EPSILON: Self;
    /// The largest finite value.
    const MAX: Self;
    /// Positive infinity.
    const INFINITY: Self;

    /// Converts an `f64` constant (rounding to nearest for `f32`).
    fn from_f64(x: f64) -> Self;
    /// Widens to `f64` (exact).
    fn to_f64(self) -> f64;
    /// Converts a count.
    fn from_u32(n: u32) -> Self;
    /// e^x.
    fn exp(self) -> Self;
    /// Natural logarithm.
    fn ln(self) -> Self;
    /// Base-10 logarithm.
    fn log10(self) -> Self;
    /// self^e.
    fn powf(self, e: Self) -> Self;
    /// Square root.
    fn sqrt(self) -> Self;
    /// ln(1 + x), accurate near zero with `libm`.
    fn ln_1p(self) -> Self;
    /// e^x − 1, accurate near zero with `libm`.
    fn exp_m1(self) -> Self;
    /// Absolute value.
    fn abs(self) -> Self;
    /// True unless NaN or infinite.
    fn is_finite(self) -> bool;
    /// True for NaN.
    fn is_nan(self) -> bool;

    /// The smaller of two values, ignoring NaN in `other`.
    #[inline]
    fn min(self, other: Self) -> Self {
        if other < self { other } else { self }
    }
    /// The larger of two values, ignoring NaN in `other`.
    #[inline]
    fn max(self, other: Self) -> Self {
        if other > self { other } else { self }
    }
    /// Clamps into `[lo, hi]`; NaN goes to `lo`.
    #[inline]
    fn clamp_to(self, lo: Self, hi: Self) -> Self {
        if self > hi {
            hi
        } else if self >= lo {
            self
        } else {
            lo
        }
    }
    /// x².
    #[inline]
    fn squared(self) -> Self {
        self * self
    }
}

impl Real for f64 {
    const ZERO: Self = 0.0;
    const ONE: Self = 1.0;
    const TWO: Self = 2.0;
    const HALF: Self = 0.5;
    const LN_2: Self = core::f64::consts::LN_2;
    const E: Self = core::f64::consts::E;
    const EPSILON: Self = Self::EPSILON;
    const MAX: Self = Self::MAX;
    const INFINITY: Self = Self::INFINITY;

    #[inline]
    fn from_f64(x: f64) -> Self {
        x
    }
    #[inline]
    fn to_f64(self) -> f64 {
        self
    }
    #[inline]
    fn from_u32(n: u32) -> Self {
        Self::from(n)
    }
    #[inline]
    fn exp(self) -> Self {
        libm::exp(self)
    }
    #[inline]
    fn ln(self) -> Self {
        libm::log(self)
    }
    #[inline]
    fn log10(self) -> Self {
        libm::log10(self)
    }
    #[inline]
    fn powf(self, e: Self) -> Self {
        libm::pow(self, e)
    }
    #[inline]
    fn sqrt(self) -> Self {
        libm::sqrt(self)
    }
    #[inline]
    fn ln_1p(self) -> Self {
        libm::log1p(self)
    }
    #[inline]
    fn exp_m1(self) -> Self {
        libm::expm1(self)
    }
    #[inline]
    fn abs(self) -> Self {
        libm::fabs(self)
    }
    #[inline]
    fn is_finite(self) -> bool {
        Self::is_finite(self)
    }
    #[inline]
    fn is_nan(self) -> bool {
        Self::is_nan(self)
    }
}

impl Real for f32 {
    const ZERO: Self = 0.0;
    const ONE: Self = 1.0;
    const TWO: Self = 2.0;
    const HALF: Self = 0.5;
    const LN_2: Self = core::f32::consts::LN_2;
    const E: Self = core::f32::consts::E;
    const EPSILON: Self = Self::EPSILON;
    const MAX: Self = Self::MAX;
    const INFINITY: Self = Self::INFINITY;

    #[inline]
    #[allow(
        clippy::cast_possible_truncation,
        reason = "narrowing an f64 constant to the device type is the point"
    )]
    fn from_f64(x: f64) -> Self {
        x as Self
    }
    #[inline]
    fn to_f64(self) -> f64 {
        f64::from(self)
    }
    #[inline]
    #[allow(
        clippy::cast_precision_loss,
        reason = "counts above 2^24 round, which is harmless for weights"
    )]
    fn from_u32(n: u32) -> Self {
        n as Self
    }
    #[inline]
    fn exp(self) -> Self {
        f32_backend::exp(self)
    }
    #[inline]
    fn ln(self) -> Self {
        f32_backend::ln(self)
    }
    #[inline]
    fn log10(self) -> Self {
        f32_backend::log10(self)
    }
    #[inline]
    fn powf(self, e: Self) -> Self {
        f32_backend::powf(self, e)
    }
    #[inline]
    fn sqrt(self) -> Self {
        f32_backend::sqrt(self)
    }
    #[inline]
    fn ln_1p(self) -> Self {
        f32_backend::ln_1p(self)
    }
    #[inline]
    fn exp_m1(self) -> Self {
        f32_backend::exp_m1(self)
    }
    #[inline]
    fn abs(self) -> Self {
        libm::fabsf(self)
    }
    #[inline]
    fn is_finite(self) -> bool {
        Self::is_finite(self)
    }
    #[inline]
    fn is_nan(self) -> bool {
        Self::is_nan(self)
    }
}

/// The exact f32 path: libm.
#[cfg(not(feature = "fast-math"))]
mod f32_backend {
    #[inline]
    pub(super) fn exp(x: f32) -> f32 {
        libm::expf(x)
    }
    #[inline]
    pub(super) fn ln(x: f32) -> f32 {
        libm::logf(x)
    }
    #[inline]
    pub(super) fn log10(x: f32) -> f32 {
        libm::log10f(x)
    }
    #[inline]
    pub(super) fn powf(x: f32, e: f32) -> f32 {
        libm::powf(x, e)
    }
    #[inline]
    pub(super) fn sqrt(x: f32) -> f32 {
        libm::sqrtf(x)
    }
    #[inline]
    pub(super) fn ln_1p(x: f32) -> f32 {
        libm::log1pf(x)
    }
    #[inline]
    pub(super) fn exp_m1(x: f32) -> f32 {
        libm::expm1f(x)
    }
}

/// The fast f32 path: micromath's approximations, called by path.
///
/// micromath has no `ln_1p` or `exp_m1`; they are formed from `ln` and `exp`
/// with a short series near zero, so small arguments keep their precision.
/// Non-finite and out-of-domain inputs are passed through the same rules as
/// libm (NaN for ln of a negative, +inf for exp of a large number) so the
/// callers' guards behave the same with either backend.
#[cfg(feature = "fast-math")]
mod f32_backend {
    use micromath::F32Ext;

    #[inline]
    pub(super) fn exp(x: f32) -> f32 {
        if x.is_nan() {
            return f32::NAN;
        }
        if x > 88.7 {
            return f32::INFINITY;
        }
        if x < -103.0 {
            return 0.0;
        }
        F32Ext::exp(x)
    }
    #[inline]
    pub(super) fn ln(x: f32) -> f32 {
        if x.is_nan() || x < 0.0 {
            return f32::NAN;
        }
        if x == 0.0 {
            return f32::NEG_INFINITY;
        }
        if x == f32::INFINITY {
            return f32::INFINITY;
        }
        // micromath's ln is off by up to 0.12 absolute on (0, 1) but good to
        // about 1e-4 at and above 1 (measured by `tests/math_backends.rs`), so
        // take ln x = −ln(1/x) below 1 (unless 1/x overflows).
        if x < 1.0 {
            let inverse = 1.0 / x;
            if inverse.is_finite() {
                return -F32Ext::ln(inverse);
            }
        }
        F32Ext::ln(x)
    }
    #[inline]
    pub(super) fn log10(x: f32) -> f32 {
        ln(x) * core::f32::consts::LOG10_E
    }
    #[inline]
    pub(super) fn powf(x: f32, e: f32) -> f32 {
        if x == 0.0 && e > 0.0 {
            return 0.0;
        }
        #[allow(clippy::float_cmp, reason = "exact special cases, as libm treats them")]
        if x == 1.0 || e == 0.0 {
            return 1.0;
        }
        if x < 0.0 {
            return F32Ext::powf(x, e);
        }
        exp(e * ln(x))
    }
    #[inline]
    pub(super) fn sqrt(x: f32) -> f32 {
        if x.is_nan() || x < 0.0 {
            return f32::NAN;
        }
        if x == 0.0 || x == f32::INFINITY {
            return x;
        }
        // micromath's sqrt is off by up to 6 %; one Newton step
        // y ← (y + x/y)/2 squares the relative error (to about 0.2 %).
        let y = F32Ext::sqrt(x);
        0.5 * (y + x / y)
    }
    #[inline]
    pub(super) fn ln_1p(x: f32) -> f32 {
        if libm::fabsf(x) < 1e-3 {
            // ln(1+x) = x − x²/2 + x³/3 − ...
            x * (1.0 - x * (0.5 - x / 3.0))
        } else {
            ln(1.0 + x)
        }
    }
    #[inline]
    pub(super) fn exp_m1(x: f32) -> f32 {
        if libm::fabsf(x) < 1e-3 {
            // e^x − 1 = x + x²/2 + x³/6 + ...
            x * (1.0 + x * (0.5 + x / 6.0))
        } else {
            exp(x) - 1.0
        }
    }
}

/// The median of three values.
pub(crate) fn median3<T: Real>([a, b, c]: [T; 3]) -> T {
    a.max(b).min(a.min(b).max(c))
}

/// Sorts a short slice in place, ascending: insertion sort, at most n²/2
/// compares on the caller's (stack) slice, no allocation.
pub(crate) fn sort_small<T: Real>(values: &mut [T]) {
    for i in 1..values.len() {
        let mut j = i;
        while j > 0 && values[j - 1] > values[j] {
            values.swap(j - 1, j);
            j -= 1;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::Real;

    // Values of e, ln 10 and sqrt 2 are standard constants (any handbook,
    // e.g. Abramowitz & Stegun, Handbook of Mathematical Functions, ch. 4).
    #[test]
    fn f64_backend_matches_known_constants() {
        assert!((Real::exp(1.0_f64) - core::f64::consts::E).abs() < 1e-15);
        assert!((Real::ln(10.0_f64) - core::f64::consts::LN_10).abs() < 1e-15);
        assert!((Real::sqrt(2.0_f64) - core::f64::consts::SQRT_2).abs() < 1e-15);
        assert!((Real::log10(1000.0_f64) - 3.0).abs() < 1e-15);
        assert!((Real::powf(2.0_f64, 10.0) - 1024.0).abs() < 1e-12);
        // Taylor series: ln(1+x) = x - x²/2 + ..., e^x - 1 = x + x²/2 + ...
        // (second-order terms are 5e-25 here, far below what 1 + x can hold).
        assert!((Real::ln_1p(1e-12_f64) - (1e-12 - 5e-25)).abs() < 1e-27);
        assert!((Real::exp_m1(1e-12_f64) - (1e-12 + 5e-25)).abs() < 1e-27);
    }

    #[test]
    fn f32_backend_agrees_with_f64_within_its_tolerance() {
        // libm is correctly rounded to within an ulp or two; micromath is looser
        // (measured against std for micromath 2.1 [memory of the project's
        // first-round measurement]: exp 0.24 %, sqrt up to 6 %).
        let tol = if cfg!(feature = "fast-math") {
            0.07
        } else {
            1e-6
        };
        for &x in &[0.05_f32, 0.5, 1.0, 2.0, 7.5, 30.0] {
            let x64 = f64::from(x);
            let rel = |a: f32, b: f64| ((f64::from(a) - b) / b).abs();
            assert!(rel(Real::exp(x), libm::exp(x64)) < tol, "exp {x}");
            assert!(rel(Real::sqrt(x), libm::sqrt(x64)) < tol, "sqrt {x}");
            assert!(
                rel(Real::exp_m1(x), libm::expm1(x64)) < tol.max(3e-3),
                "expm1 {x}"
            );
            assert!((f64::from(Real::ln(x)) - libm::log(x64)).abs() < tol.max(2e-6) * 2.0);
        }
    }

    #[test]
    fn out_of_domain_inputs_follow_ieee_rules_on_both_backends() {
        assert!(Real::ln(-1.0_f32).is_nan());
        assert!(Real::ln(f32::NAN).is_nan());
        let ln0: f32 = Real::ln(0.0_f32);
        assert!(ln0.is_infinite() && ln0 < 0.0);
        let big: f32 = Real::exp(1000.0_f32);
        assert!(big.is_infinite() && big > 0.0);
        assert!(Real::exp(-1000.0_f32).abs() < 1e-30);
        assert!(Real::sqrt(-1.0_f32).is_nan());
    }

    #[test]
    fn min_max_clamp_ignore_nan_in_the_right_places() {
        assert!((Real::clamp_to(f64::NAN, 1.0, 2.0) - 1.0).abs() < 1e-15);
        assert!((Real::clamp_to(5.0_f64, 1.0, 2.0) - 2.0).abs() < 1e-15);
        assert!((Real::max(1.0_f64, f64::NAN) - 1.0).abs() < 1e-15);
    }
}
