//! Richards asymmetry on Baranyi's adjusted time: the estimator's default
//! online family, flexible enough for the shapes real cultures take.

use super::OnlineFamily;
use super::online::{bisect_decreasing, numeric_gradient, sigmoid, softplus};
use crate::error::{finite, positive};
use crate::{Error, Real};

/// The logistic, Richards' asymmetry and a Baranyi-type lag in one curve:
///
/// f(t) = K · s(ν μ (A(t) − τ))^(1/ν),
/// A(t) = (L(μ t − c) − L(−c)) / μ,
///
/// with s the logistic sigmoid and L(x) = ln(1 + eˣ) the softplus.
///
/// * f^ν follows a logistic in A with rate ν μ — Richards' (1959) curve,
///   whose ν = 1 is the logistic, ν → 0 tends to a Gompertz-like slow
///   shoulder and ν > 1 gives a sharp one. Its specific growth rate is
///   d ln f/dt = μ A'(t) (1 − (f/K)^ν), never above μ.
/// * A(t) is Baranyi & Roberts' (1994) adjusted time with h₀ = L(c):
///   A(0) = 0, A'(t) = s(μ t − c) rises from e^(−h₀)-ish to 1, and
///   A(t) → t − λ with λ = h₀ / μ once the lag is over. (Their
///   A(t) = t + ln(e^(−μt) + e^(−h₀) − e^(−μt−h₀))/μ is the same function:
///   its derivative is 1 / (1 + (e^(h₀) − 1) e^(−μt)) = s(μt − c) with
///   c = ln(e^(h₀) − 1).) Times are hours since the first reading, the
///   assumed inoculation.
///
/// θ = (ln K, ln μ, τ, ln ν, c). With ν = 1 and c → −∞ the curve is the
/// logistic with rate μ and midpoint τ; the estimator's priors keep it there
/// until the data say otherwise (see [`OnlineFamily::prior`]).
///
/// Units: K in signal units above blank, μ per hour, τ in hours, ν and h₀
/// unitless.
///
/// # Examples
///
/// ```
/// use plateau::model::{LagRichards, OnlineFamily};
/// // ν = 1 and no lag: the logistic with capacity 1.5, rate 0.7 per h,
/// // midpoint 8 h.
/// let curve = LagRichards::<f64>::new(1.5, 0.7, 8.0, 1.0, 1e-9)?;
/// let (f, _, _) = curve.eval(8.0);
/// assert!((f - 0.75).abs() < 1e-6);
/// // Time to 90 %: 8 + ln 9 / 0.7.
/// let t90 = curve.time_to_level(1.35).unwrap();
/// assert!((t90 - (8.0 + 9f64.ln() / 0.7)).abs() < 1e-6);
/// # Ok::<(), plateau::Error>(())
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LagRichards<T> {
    capacity: T,
    rate_per_h: T,
    midpoint_h: T,
    shape: T,
    c: T,
    /// L(−c) and s(−c), used at every evaluation.
    softplus_neg_c: T,
    sigmoid_neg_c: T,
}

impl<T: Real> LagRichards<T> {
    /// The curve from its parameters: capacity K (signal units above blank),
    /// rate μ (per hour), midpoint τ (hours, on the adjusted time scale),
    /// shape ν and Baranyi's h₀ = μ λ (unitless, > 0).
    ///
    /// # Errors
    /// [`Error::NotPositive`]/[`Error::NotFinite`] naming the bad parameter.
    pub fn new(capacity: T, rate_per_h: T, midpoint_h: T, shape: T, h0: T) -> Result<Self, Error> {
        let capacity = positive(capacity, "capacity")?;
        let rate_per_h = positive(rate_per_h, "rate_per_h")?;
        let midpoint_h = finite(midpoint_h, "midpoint_h")?;
        let shape = positive(shape, "shape")?;
        let h0 = positive(h0, "h0")?;
        // c = ln(e^h0 − 1), the inverse softplus, without overflow.
        let c = h0 + (-(-h0).exp_m1()).ln();
        Ok(Self::from_theta(&[
            capacity.ln(),
            rate_per_h.ln(),
            midpoint_h,
            shape.ln(),
            c,
        ]))
    }

    /// Richards' shape ν (unitless).
    #[must_use]
    pub fn shape_nu(&self) -> T {
        self.shape
    }

    /// The rate parameter μ, per hour: the specific growth rate the curve
    /// approaches in its exponential phase when (f/K)^ν ≪ 1.
    #[must_use]
    pub fn rate_per_h(&self) -> T {
        self.rate_per_h
    }

    /// Baranyi's h₀ = μ λ (unitless).
    #[must_use]
    pub fn h0(&self) -> T {
        softplus(self.c).0
    }

    /// The value at `t_h` hours, signal units above blank.
    #[must_use]
    pub fn value(&self, t_h: T) -> T {
        self.ln_value(t_h).exp()
    }

    /// μ A(t) and A'(t).
    fn adjusted(&self, t_h: T) -> (T, T) {
        let (l, a) = softplus(self.rate_per_h * t_h - self.c);
        (l - self.softplus_neg_c, a)
    }

    /// x = ν (μ A − μ τ), clamped where the curve is saturated anyway.
    fn x_of(&self, mu_a: T) -> T {
        let big = T::from_f64(200.0);
        (self.shape * (mu_a - self.rate_per_h * self.midpoint_h)).clamp_to(-big, big)
    }

    /// ln f at `t_h` = ln K − L(−x)/ν: finite even where f underflows.
    fn ln_value(&self, t_h: T) -> T {
        let (mu_a, _) = self.adjusted(t_h);
        let x = self.x_of(mu_a);
        self.capacity.ln() - softplus(-x).0 / self.shape
    }

    /// A'(t) and s(x(t)).
    fn a_and_s(&self, t_h: T) -> (T, T) {
        let (mu_a, a) = self.adjusted(t_h);
        (a, sigmoid(self.x_of(mu_a)))
    }

    /// A bracket [0, hi] for the root of a decreasing φ with φ(0) > 0 (a
    /// time where φ < 0), by doubling from the end of the lag plus the
    /// midpoint; `None` when none is found within 60 doublings.
    fn bracket(&self, phi: impl Fn(T) -> T) -> Option<T> {
        let lag = self.h0() / self.rate_per_h;
        let mut hi = (lag + self.midpoint_h.max(T::ZERO)).max(T::ONE / self.rate_per_h);
        for _ in 0..60 {
            if !(phi(hi) > T::ZERO) {
                return Some(hi);
            }
            hi *= T::TWO;
        }
        None
    }

    /// The time of the maximum specific growth rate, hours since origin:
    /// where d/dt [μ A' (1 − s)] = 0, i.e. (1 − A') = ν s A' (the left side
    /// falls and the right rises with t, so the root is unique); 0 when the
    /// rate already falls at the first reading.
    fn time_of_max_rate(&self) -> T {
        let phi = |t: T| {
            let (a, s) = self.a_and_s(t);
            (T::ONE - a) - self.shape * s * a
        };
        if !(phi(T::ZERO) > T::ZERO) {
            return T::ZERO;
        }
        self.bracket(phi)
            .map_or(T::ZERO, |hi| bisect_decreasing(T::ZERO, hi, SEARCH_STEPS, phi))
    }
}

/// Bisection steps of the searches for the time of maximum rate and the
/// inflection: 2⁻³² of the bracket, below f32 resolution.
const SEARCH_STEPS: u32 = 32;

impl<T: Real> OnlineFamily<T, 5> for LagRichards<T> {
    const NAME: &'static str = "lag-richards";

    fn from_theta(theta: &[T; 5]) -> Self {
        let (softplus_neg_c, sigmoid_neg_c) = softplus(-theta[4]);
        Self {
            capacity: theta[0].exp(),
            rate_per_h: theta[1].exp(),
            midpoint_h: theta[2],
            shape: theta[3].exp(),
            c: theta[4],
            softplus_neg_c,
            sigmoid_neg_c,
        }
    }

    /// With a = A'(t), x = ν(μA − μτ), s = s(x), f = K e^(−L(−x)/ν):
    /// ∂f/∂ln K = f; ∂f/∂ln μ = f (1 − s) μ (t a − τ); ∂f/∂τ = −f (1 − s) μ;
    /// ∂f/∂ln ν = f (L(−x) + (1 − s) x)/ν; ∂f/∂c = f (1 − s)(s(−c) − a).
    /// Curvature f'' = f (ρ² + ρ'), ρ = μ a (1 − s),
    /// ρ' = μ² a (1 − s)((1 − a) − ν s a).
    fn eval(&self, t_h: T) -> (T, [T; 5], T) {
        let mu = self.rate_per_h;
        let (mu_a, a) = self.adjusted(t_h);
        let x = self.x_of(mu_a);
        let (l_neg_x, one_minus_s) = softplus(-x);
        let s = T::ONE - one_minus_s;
        let f = self.capacity * (-l_neg_x / self.shape).exp();
        let fq = f * one_minus_s;
        let gradient = [
            f,
            fq * mu * (t_h * a - self.midpoint_h),
            -fq * mu,
            f * (l_neg_x + one_minus_s * x) / self.shape,
            fq * (self.sigmoid_neg_c - a),
        ];
        let rho = mu * a * one_minus_s;
        let rho_dot = mu * mu * a * one_minus_s * ((T::ONE - a) - self.shape * s * a);
        (f, gradient, f * (rho * rho + rho_dot))
    }

    fn specific_rate_per_h(&self, t_h: T) -> T {
        let (a, s) = self.a_and_s(t_h);
        self.rate_per_h * a * (T::ONE - s)
    }

    fn time_scale_h(&self) -> T {
        T::ONE / self.rate_per_h
    }

    fn capacity(&self) -> T {
        self.capacity
    }

    /// Closed form: (f/K)^ν = s(x) gives x = ν ln(L/K) − ln(1 − (L/K)^ν),
    /// then μA = x/ν + μτ, and A is inverted through the softplus:
    /// μt − c = L⁻¹(μA + L(−c)), L⁻¹(v) = v + ln(1 − e^(−v)) for v > 0.
    fn time_to_level(&self, level: T) -> Option<T> {
        if !(level > T::ZERO && level < self.capacity) {
            return None;
        }
        let ln_ratio = (level / self.capacity).ln();
        let s = (self.shape * ln_ratio).exp();
        let x = self.shape * ln_ratio - (-s).ln_1p();
        let v = x / self.shape + self.rate_per_h * self.midpoint_h + self.softplus_neg_c;
        if !(v > T::ZERO) {
            return None;
        }
        let t = (self.c + v + (-(-v).exp_m1()).ln()) / self.rate_per_h;
        t.is_finite().then_some(t)
    }

    /// Found by bisection on the condition (1 − A') = ν s A'; the gradient
    /// holds that time fixed (envelope theorem: at an interior maximum the
    /// time's own shift changes the rate only to second order; at t = 0 the
    /// time does not move).
    fn max_specific_rate(&self, theta: &[T; 5]) -> (T, [T; 5], T) {
        let t_star = self.time_of_max_rate();
        let rate = self.specific_rate_per_h(t_star);
        let gradient = numeric_gradient::<T, Self, 5>(theta, |c| c.specific_rate_per_h(t_star));
        (rate, gradient, t_star)
    }

    /// λ = t* − (ln f(t*) − ln f(0)) / ρ(t*), t* the time of maximum
    /// specific rate ρ. Its derivative in t* vanishes where ρ' = 0, so the
    /// gradient holds t* fixed (envelope theorem).
    fn tangent_lag(&self, theta: &[T; 5]) -> Option<(T, [T; 5])> {
        let t_star = self.time_of_max_rate();
        let lag = |c: &Self| {
            t_star - (c.ln_value(t_star) - c.ln_value(T::ZERO)) / c.specific_rate_per_h(t_star)
        };
        let value = lag(self);
        value
            .is_finite()
            .then(|| (value, numeric_gradient::<T, Self, 5>(theta, lag)))
    }

    /// Where f'' = 0: f''/f = μ² a (1 − s)(1 − (1 + ν) a s), so the
    /// inflection is the root of ψ(t) = 1 − (1 + ν) A'(t) s(x(t)), which
    /// falls with t. Gradient by the implicit function theorem,
    /// ∂t/∂θ = −(∂ψ/∂θ)/(∂ψ/∂t), with
    /// ∂ψ/∂t = −(1 + ν) μ a s ((1 − a) + ν a (1 − s)).
    fn inflection(&self, theta: &[T; 5]) -> (T, [T; 5]) {
        let psi_of = |c: &Self, t: T| {
            let (a, s) = c.a_and_s(t);
            T::ONE - (T::ONE + c.shape) * a * s
        };
        let psi = |t: T| psi_of(self, t);
        if !(psi(T::ZERO) > T::ZERO) {
            return (T::ZERO, [T::ZERO; 5]);
        }
        let Some(hi) = self.bracket(psi) else {
            return (T::ZERO, [T::ZERO; 5]);
        };
        let t = bisect_decreasing(T::ZERO, hi, SEARCH_STEPS, psi);
        let (a, s) = self.a_and_s(t);
        let nu = self.shape;
        let dpsi_dt = -(T::ONE + nu)
            * self.rate_per_h
            * a
            * s
            * ((T::ONE - a) + nu * a * (T::ONE - s));
        let dpsi = numeric_gradient::<T, Self, 5>(theta, |c| psi_of(c, t));
        let mut gradient = [T::ZERO; 5];
        if dpsi_dt < T::ZERO {
            for i in 0..5 {
                gradient[i] = -dpsi[i] / dpsi_dt;
            }
        }
        (t, gradient)
    }

    fn shape(&self) -> Option<(usize, T)> {
        Some((3, self.shape))
    }

    /// A logistic (ν = 1) at the prior's lag, through the point.
    fn start(capacity: T, rate_per_h: T, time_h: T, value: T) -> [T; 5] {
        let c = T::from_f64(PRIOR_C_MEAN);
        let (l, _) = softplus(rate_per_h * time_h - c);
        let mu_a = l - softplus(-c).0;
        let x = (value / (capacity - value)).ln();
        [
            capacity.ln(),
            rate_per_h.ln(),
            (mu_a - x) / rate_per_h,
            T::ZERO,
            c,
        ]
    }

    /// Weak priors that keep the curve a logistic until the data say
    /// otherwise: ln K ~ N(ln(2 y_max), 2²) as for the logistic (it keeps
    /// the fit off the K → ∞ ridge before the inflection);
    /// ln ν ~ N(0, 0.7²) (ν within a factor of 4 either way at 2 sd);
    /// c ~ N(ln 0.05, 2.5²), c ≈ ln h₀ for small h₀: "no lag unless the data
    /// say so". The ν and h₀ priors are the ones the project's planning
    /// prototypes found to make this family safe online (recorded in
    /// DEVELOPERS.md).
    fn prior(y_max: T) -> ([T; 5], [T; 5]) {
        (
            [
                (T::TWO * y_max).ln(),
                T::ZERO,
                T::ZERO,
                T::ZERO,
                T::from_f64(PRIOR_C_MEAN),
            ],
            [
                T::from_f64(0.25),
                T::ZERO,
                T::ZERO,
                T::from_f64(1.0 / (PRIOR_LN_SHAPE_SD * PRIOR_LN_SHAPE_SD)),
                T::from_f64(1.0 / (PRIOR_C_SD * PRIOR_C_SD)),
            ],
        )
    }

    /// ln K within ±80, μ between 1e-4 per hour and `exp(ln_rate_max)`,
    /// τ within ±1e6 h, ν between 0.05 and 20, c within ±20 (h₀ up to 20).
    fn clamp(theta: &mut [T; 5], ln_rate_max: T) {
        let big = T::from_f64(80.0);
        theta[0] = theta[0].clamp_to(-big, big);
        theta[1] = theta[1].clamp_to(T::from_f64(-9.2), ln_rate_max.min(T::from_f64(6.9)));
        let span = T::from_f64(1.0e6);
        theta[2] = theta[2].clamp_to(-span, span);
        let shape = T::from_f64(20.0_f64.ln());
        theta[3] = theta[3].clamp_to(-shape, shape);
        let c = T::from_f64(20.0);
        theta[4] = theta[4].clamp_to(-c, c);
    }

    /// ln K and ln μ by at most 1, τ by at most 3/μ, ln ν by 0.5, c by 2.
    fn limit_step(step: &mut [T; 5], theta: &[T; 5]) {
        let one = T::ONE;
        step[0] = step[0].clamp_to(-one, one);
        step[1] = step[1].clamp_to(-one, one);
        let tau_limit = T::from_f64(3.0) / theta[1].exp();
        step[2] = step[2].clamp_to(-tau_limit, tau_limit);
        step[3] = step[3].clamp_to(-T::HALF, T::HALF);
        step[4] = step[4].clamp_to(-T::TWO, T::TWO);
    }
}

/// Prior mean of c ≈ ln h₀: h₀ = 0.05, a lag of 0.05 / μ (minutes).
pub const PRIOR_C_MEAN: f64 = -5.298_317_366_548_036; // ln 0.005
/// Prior sd of c, in ln units.
pub const PRIOR_C_SD: f64 = 3.0;
/// Prior sd of ln ν.
pub const PRIOR_LN_SHAPE_SD: f64 = 0.7;

#[cfg(test)]
mod tests {
    use super::*;

    /// The gradient against central differences of the value (the
    /// definition of the derivative), at points before, around and after a
    /// lag and the inflection.
    #[test]
    fn gradient_matches_finite_differences() {
        let theta = [0.4_f64, -0.3, 9.0, -0.5, 1.2];
        let curve = LagRichards::from_theta(&theta);
        for &t in &[0.0, 1.0, 4.0, 9.0, 14.0, 30.0] {
            let (f, g, f2) = curve.eval(t);
            for i in 0..5 {
                let h = 1e-6;
                let (mut up, mut down) = (theta, theta);
                up[i] += h;
                down[i] -= h;
                let d = (LagRichards::from_theta(&up).value(t)
                    - LagRichards::from_theta(&down).value(t))
                    / (2.0 * h);
                assert!((d - g[i]).abs() < 1e-6 * (1.0 + f), "t {t} i {i}: {d} vs {}", g[i]);
            }
            let h = 1e-4;
            let d2 = (curve.value(t + h) - 2.0 * f + curve.value(t - h)) / (h * h);
            assert!((d2 - f2).abs() < 1e-5 * (1.0 + f2.abs()), "t {t}: {d2} vs {f2}");
            let rate = (curve.value(t + h).ln() - curve.value(t - h).ln()) / (2.0 * h);
            if t > 0.0 {
                assert!((rate - curve.specific_rate_per_h(t)).abs() < 1e-6);
            }
        }
    }

    #[test]
    fn time_to_level_inverts_the_value() {
        let curve = LagRichards::<f64>::new(1.8, 0.6, 10.0, 0.3, 2.0).unwrap();
        for &t in &[0.5, 3.0, 8.0, 12.0, 20.0] {
            let y = curve.value(t);
            let back = curve.time_to_level(y).unwrap();
            assert!((back - t).abs() < 1e-8, "{t} -> {back}");
        }
        assert!(curve.time_to_level(2.0).is_none());
    }
}
