//! The seam between growth-curve families and the online estimator.
//!
//! A family the estimator can fit online implements [`OnlineFamily`]: its
//! value and gradient in a parameter vector θ of `P` entries, the average of
//! the curve over a history slot's time span, and the quantities the
//! estimator publishes (capacity, maximum specific growth rate, lag by the
//! tangent construction, inflection, time to a level). The estimator holds
//! only θ, its covariance and the family; adding a family is one file that
//! implements this trait, plus its tests.
//!
//! Conventions every family keeps, so the estimator can treat them alike:
//! θ₀ = ln K (capacity above blank, signal units) and θ₁ = ln of the family's
//! rate parameter (per hour); the others are the family's own. Times are
//! hours since the estimator's origin (its first reading since a restart).

use crate::Real;

/// A growth-curve family with `P` parameters that the estimator can fit
/// online. Conventions every family keeps: θ₀ = ln K (capacity above
/// blank, signal units), θ₁ = ln of the family's rate (per hour), θ₂ a
/// midpoint time (hours since the estimator's origin, its first reading).
///
/// The value implementing the trait is the curve at one θ, with whatever the
/// family precomputes from θ (exponentials) so that a pass over the history
/// slots costs as few transcendental calls as possible.
pub trait OnlineFamily<T: Real, const P: usize>: Copy + core::fmt::Debug {
    /// A short lower-case name for logs and outputs.
    const NAME: &'static str;

    /// Relative standard deviation added (in quadrature) to the published
    /// maximum specific growth rate for the family's own form: how far its
    /// μmax can sit from a culture of another published shape that it
    /// fits closely but not exactly. 0 for a family taken as exact.
    const RATE_FORM_REL_SD: f64 = 0.0;

    /// The index in θ of the parameter that sets the lag, for families
    /// with one. The estimator re-evaluates the lag one sd along it: at a
    /// fit with no lag the tangent lag sits on its boundary (0), where its
    /// first-order sd is 0 even though the data may allow a short lag.
    const LAG_INDEX: Option<usize> = None;

    /// The curve at θ. θ has passed [`clamp`](Self::clamp).
    fn from_theta(theta: &[T; P]) -> Self;

    /// Value above blank (signal units), its gradient in θ and its second
    /// time derivative d²f/dt² (signal units per h²), at `t_h` hours since
    /// the origin.
    fn eval(&self, t_h: T) -> (T, [T; P], T);

    /// The specific growth rate d ln f / dt at `t_h`, per hour.
    fn specific_rate_per_h(&self, t_h: T) -> T;

    /// A time scale of the curve, hours: the time over which it changes by
    /// a factor of about e during growth (1 / rate). Slot averages split a
    /// slot into panels no wider than this.
    fn time_scale_h(&self) -> T;

    /// Capacity above blank, signal units: e^θ₀.
    fn capacity(&self) -> T;

    /// The time (hours since origin) at which the curve reaches `level`
    /// (signal units above blank), or `None` when it never does.
    fn time_to_level(&self, level: T) -> Option<T>;

    /// The maximum specific growth rate μmax = max over t ≥ 0 of d ln f/dt,
    /// per hour, with its gradient in θ and the time it is reached (hours
    /// since origin).
    fn max_specific_rate(&self, theta: &[T; P]) -> (T, [T; P], T);

    /// The lag λ by the tangent construction on ln f (Zwietering et al.
    /// 1990; Baranyi & Roberts 1994): where the tangent to ln f at the point
    /// of maximum specific growth rate meets the starting level ln f(0);
    /// hours since origin, with its gradient in θ. `None` for families
    /// without a lag.
    fn tangent_lag(&self, theta: &[T; P]) -> Option<(T, [T; P])>;

    /// The inflection time of f (hours since origin, where d²f/dt² = 0), with
    /// its gradient in θ.
    fn inflection(&self, theta: &[T; P]) -> (T, [T; P]);

    /// The fitted shape (Richards' ν: 1 for the logistic, towards 0 for a
    /// Gompertz-like slow shoulder, above 1 for a sharp one), when the
    /// family has one, as (index in θ of ln ν, ν).
    fn shape(&self) -> Option<(usize, T)> {
        None
    }

    /// θ for a curve of capacity `capacity` and rate `rate_per_h` that
    /// passes through (`time_h`, `value`): the first fit's starting point.
    fn start(capacity: T, rate_per_h: T, time_h: T, value: T) -> [T; P];

    /// The prior: for each parameter its mean and its information
    /// (1 / variance; zero for none). `y_max` is the largest reading above
    /// blank so far; the capacity's prior is centred on it.
    fn prior(y_max: T) -> ([T; P], [T; P]);

    /// Keeps θ within physical bounds and the state finite; `ln_rate_max`
    /// bounds θ₁.
    fn clamp(theta: &mut [T; P], ln_rate_max: T);

    /// Trust region: the largest step per iteration in each parameter.
    fn limit_step(step: &mut [T; P], theta: &[T; P]);

    /// How many panels [`slot`](Self::slot) splits a slot into: 1 when the
    /// slot is no wider than [`time_scale_h`](Self::time_scale_h), else one
    /// per time scale, at most [`MAX_PANELS`] — but only 1 when the curve
    /// is already within 1e-4 × (span in time scales) of its capacity at the
    /// slot's start (a slot on the plateau, where the curve is flat to well
    /// below the noise of the readings it averages). The estimator counts
    /// panels once per refit and reuses them for every pass of it.
    fn panels(&self, mean_h: T, first_h: T, last_h: T, count: u16) -> u8 {
        let width = slot_width(first_h, last_h, count);
        let scale = self.time_scale_h();
        if !(width > scale) {
            return 1;
        }
        let spans = width / scale;
        let start = self.eval(mean_h - width * T::HALF).0;
        let k = self.capacity();
        if k - start < T::from_f64(1e-4) * spans * k {
            return 1;
        }
        let mut panels: u8 = 2;
        while panels < MAX_PANELS && spans > T::from_u32(u32::from(panels)) {
            panels += 1;
        }
        panels
    }

    /// Value and gradient of the curve averaged over a slot of `count`
    /// readings spanning [`first_h`, `last_h`] around `mean_h` (hours since
    /// origin): the average of evenly spaced readings across it, in
    /// `panels` panels (see [`panels`](Self::panels)).
    ///
    /// The default splits the span (widened by half a reading spacing at
    /// each end, the midpoint rule) into `panels` equal panels and takes
    /// each panel's centre value plus the curvature term f''·h²/24 (the
    /// average of a smooth function over a panel of width h, to second
    /// order).
    fn slot(&self, mean_h: T, first_h: T, last_h: T, count: u16, panels: u8) -> (T, [T; P]) {
        let width = slot_width(first_h, last_h, count);
        let panels = u32::from(panels.max(1));
        let h = width / T::from_u32(panels);
        let start = mean_h - width * T::HALF;
        let mut value = T::ZERO;
        let mut gradient = [T::ZERO; P];
        let curvature_weight = h * h / T::from_f64(24.0);
        for j in 0..panels {
            let centre = start + h * (T::from_u32(j) + T::HALF);
            let (f, g, f2) = self.eval(centre);
            value += f + f2 * curvature_weight;
            for k in 0..P {
                gradient[k] += g[k];
            }
        }
        let n = T::from_u32(panels);
        for g in &mut gradient {
            *g /= n;
        }
        (value / n, gradient)
    }
}

/// Most panels a slot average is split into (bounds the cost of a pass).
pub const MAX_PANELS: u8 = 12;

/// The time span `count` evenly spaced readings from `first_h` to `last_h`
/// stand for: the span widened by half a spacing at each end (the midpoint
/// rule), so two readings are not read as a continuum. Hours.
pub(crate) fn slot_width<T: Real>(first_h: T, last_h: T, count: u16) -> T {
    if count > 1 {
        (last_h - first_h) * T::from_u32(u32::from(count)) / T::from_u32(u32::from(count) - 1)
    } else {
        T::ZERO
    }
}

/// The logistic sigmoid 1/(1 + e^(−x)), without overflow for any finite x.
pub(crate) fn sigmoid<T: Real>(x: T) -> T {
    if x >= T::ZERO {
        T::ONE / (T::ONE + (-x).exp())
    } else {
        let e = x.exp();
        e / (T::ONE + e)
    }
}

/// The softplus ln(1 + eˣ) and its derivative, the sigmoid, without overflow
/// for any finite x. One `exp`, and one `ln_1p` only near x = 0: for
/// e = e^(−|x|) below 1e-4, ln(1 + e) = e − e²/2 to within e³/3 < 4e-13
/// (the Taylor series of ln(1 + e)), far below f64 rounding of the result.
pub(crate) fn softplus<T: Real>(x: T) -> (T, T) {
    let ln_1p = |e: T| {
        if e < T::from_f64(1e-4) {
            e - T::HALF * e * e
        } else {
            e.ln_1p()
        }
    };
    if x > T::ZERO {
        let e = (-x).exp();
        (x + ln_1p(e), T::ONE / (T::ONE + e))
    } else {
        let e = x.exp();
        (ln_1p(e), e / (T::ONE + e))
    }
}

/// The gradient in θ of a quantity `q` of the curve, by central differences
/// with steps ε^(1/3)·max(1, |θᵢ|) (the step that balances truncation and
/// rounding error for a central difference). Used for quantities without a
/// convenient closed-form gradient (at the optimum of a search, where the
/// envelope theorem lets the search point stay fixed).
pub(crate) fn numeric_gradient<T: Real, F: OnlineFamily<T, P>, const P: usize>(
    theta: &[T; P],
    q: impl Fn(&F) -> T,
) -> [T; P] {
    let base = T::EPSILON.powf(T::from_f64(1.0 / 3.0));
    let mut gradient = [T::ZERO; P];
    for i in 0..P {
        let h = base * theta[i].abs().max(T::ONE);
        let mut up = *theta;
        let mut down = *theta;
        up[i] += h;
        down[i] -= h;
        let g = (q(&F::from_theta(&up)) - q(&F::from_theta(&down))) / (up[i] - down[i]);
        gradient[i] = if g.is_finite() { g } else { T::ZERO };
    }
    gradient
}

/// The root of a function that decreases in t, in [`lo`, `hi`], by
/// bisection (`iterations` halvings). The caller brackets it.
pub(crate) fn bisect_decreasing<T: Real>(
    mut lo: T,
    mut hi: T,
    iterations: u32,
    phi: impl Fn(T) -> T,
) -> T {
    for _ in 0..iterations {
        let mid = (lo + hi) * T::HALF;
        if phi(mid) > T::ZERO {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    (lo + hi) * T::HALF
}
