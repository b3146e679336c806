//! One-step state transitions: the signal after a time step, with partial
//! derivatives, for the growth laws that are autonomous in the signal.
//!
//! Each law is an ordinary differential equation in the (blank-free) signal y
//! with capacity K and rate r, solved exactly over the step Δ so that many
//! small steps compose to one big step:
//!
//! | law | equation | exact step, a = e^(−r Δ) |
//! |---|---|---|
//! | logistic | dy/dt = r y (1 − y/K) | 1/y' = a/y + (1 − a)/K |
//! | Gompertz | dy/dt = r y ln(K/y) | ln(y'/K) = a ln(y/K) |
//! | Richards | dy/dt = (r/ν) y (1 − (y/K)^ν) | (y'/K)^(−ν) − 1 = a ((y/K)^(−ν) − 1) |
//!
//! The logistic reciprocal form is the one in FACTS-style handbooks: u = 1/y
//! obeys du/dt = −r u + r/K. Baranyi's model adds the physiological state q
//! (dq/dt = μ q); its step is the logistic step over the effective growth
//! τ = ln((1 + q e^(μΔ)) / (1 + q)), see [`baranyi`].
//!
//! Domain: y > 0, K > 0, r > 0, Δ ≥ 0, all finite. The functions do not check
//! (they sit on the estimator's hot path); the estimator guarantees it.
//!
//! Units: y and K in signal units, r per hour, Δ in hours.

use crate::Real;

/// The signal after one step and its partial derivatives.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Transition<T> {
    /// y', signal units.
    pub value: T,
    /// ∂y'/∂y, dimensionless.
    pub d_value: T,
    /// ∂y'/∂K, dimensionless.
    pub d_capacity: T,
    /// ∂y'/∂r, signal units × hours.
    pub d_rate: T,
    /// ∂y'/∂(shape): ∂y'/∂ν for Richards, ∂y'/∂q for Baranyi, zero otherwise.
    pub d_shape: T,
}

/// The exact logistic step y' = K / (1 + (K/y − 1) e^(−r Δ)).
///
/// # Examples
///
/// ```
/// use plateau::model::step::logistic;
/// use plateau::{GrowthCurve, Logistic};
/// let c = Logistic::<f64>::from_midpoint(1.5, 0.7, 6.0)?; // invented
/// let s = logistic(c.value(2.0), 3.0, 1.5, 0.7);
/// assert!((s.value - c.value(5.0)).abs() < 1e-12);
/// # Ok::<(), plateau::Error>(())
/// ```
#[must_use]
pub fn logistic<T: Real>(y: T, dt_h: T, capacity: T, rate_per_h: T) -> Transition<T> {
    let a = (-rate_per_h * dt_h).exp();
    let one_minus_a = -(-rate_per_h * dt_h).exp_m1();
    let u = a / y + one_minus_a / capacity;
    let value = T::ONE / u;
    // D = 1 + (K/y − 1) a = K u.
    let d = capacity * u;
    let d2 = d * d;
    Transition {
        value,
        d_value: a * (value / y).squared(),
        d_capacity: one_minus_a / d2,
        d_rate: capacity * (capacity / y - T::ONE) * dt_h * a / d2,
        d_shape: T::ZERO,
    }
}

/// The exact Gompertz step y' = K (y/K)^(e^(−r Δ)).
///
/// # Examples
///
/// ```
/// use plateau::model::step::gompertz;
/// let one = gompertz(0.1_f64, 4.0, 2.0, 0.5);
/// let two = gompertz(gompertz(0.1_f64, 1.5, 2.0, 0.5).value, 2.5, 2.0, 0.5);
/// assert!((one.value - two.value).abs() < 1e-12);
/// ```
#[must_use]
pub fn gompertz<T: Real>(y: T, dt_h: T, capacity: T, rate_per_h: T) -> Transition<T> {
    let a = (-rate_per_h * dt_h).exp();
    let l = (y / capacity).ln();
    let value = capacity * (l * a).exp();
    Transition {
        value,
        d_value: value * a / y,
        d_capacity: value / capacity * (T::ONE - a),
        d_rate: -value * l * dt_h * a,
        d_shape: T::ZERO,
    }
}

/// The exact Richards step y' = K (1 + a ((y/K)^(−ν) − 1))^(−1/ν).
///
/// ν = 1 is the logistic step.
///
/// # Examples
///
/// ```
/// use plateau::model::step::{logistic, richards};
/// let r = richards(0.2_f64, 2.0, 1.5, 0.6, 1.0);
/// let l = logistic(0.2_f64, 2.0, 1.5, 0.6);
/// assert!((r.value - l.value).abs() < 1e-12);
/// ```
#[must_use]
pub fn richards<T: Real>(y: T, dt_h: T, capacity: T, rate_per_h: T, shape: T) -> Transition<T> {
    let nu = shape;
    let a = (-rate_per_h * dt_h).exp();
    let ln_ratio = (y / capacity).ln();
    let p = (-nu * ln_ratio).exp(); // (y/K)^(−ν)
    let u = (-nu * ln_ratio).exp_m1(); // p − 1
    let s = T::ONE + u * a;
    let value = capacity * (-s.ln() / nu).exp();
    Transition {
        value,
        d_value: value * a * p / (s * y),
        d_capacity: value / capacity * (T::ONE - a * p / s),
        d_rate: value * u * dt_h * a / (nu * s),
        d_shape: value * (s.ln() / (nu * nu) + a * p * ln_ratio / (nu * s)),
    }
}

/// The exact Baranyi step for the signal x and the physiological state q over
/// Δ hours, with maximum rate μ.
///
/// q' = q e^(μΔ); x' is the logistic step taken over the effective growth
/// τ = ln((1 + q e^(μΔ)) / (1 + q)) instead of μΔ. Returns the transition of
/// x (`d_shape` is ∂x'/∂q) and q'.
///
/// # Examples
///
/// ```
/// use plateau::model::step::baranyi;
/// // Many small steps equal one big one (invented values).
/// let (big, q_big) = baranyi(0.01_f64, 6.0, 1.0, 0.8, 0.05);
/// let (mut x, mut q) = (0.01_f64, 0.05);
/// for _ in 0..60 {
///     let (s, q2) = baranyi(x, 0.1, 1.0, 0.8, q);
///     x = s.value;
///     q = q2;
/// }
/// assert!((x - big.value).abs() < 1e-12 && (q - q_big).abs() < 1e-12);
/// ```
#[must_use]
pub fn baranyi<T: Real>(x: T, dt_h: T, capacity: T, mu_max_per_h: T, q: T) -> (Transition<T>, T) {
    let ln_q = q.ln();
    let z = ln_q + mu_max_per_h * dt_h;
    let tau = softplus(z) - softplus(ln_q);
    // ∂τ/∂μ = Δ q e^(μΔ) / (1 + q e^(μΔ)) = Δ σ(z);
    // ∂τ/∂q = e^(μΔ)/(1 + q e^(μΔ)) − 1/(1 + q) = (σ(z) − σ(ln q)) / q.
    let sig_z = sigmoid(z);
    let d_tau_d_mu = dt_h * sig_z;
    let d_tau_d_q = (sig_z - sigmoid(ln_q)) / q;
    // The logistic step depends on rate and step only through their product,
    // so a step of 1 h at rate τ is the step over τ and its `d_rate` is ∂x'/∂τ.
    // (With rate 1 over τ hours, `d_rate` would be τ ∂x'/∂τ instead.)
    let s = logistic(x, T::ONE, capacity, tau);
    let transition = Transition {
        value: s.value,
        d_value: s.d_value,
        d_capacity: s.d_capacity,
        d_rate: s.d_rate * d_tau_d_mu,
        d_shape: s.d_rate * d_tau_d_q,
    };
    (transition, z.exp())
}

/// ln(1 + e^z) without overflow.
fn softplus<T: Real>(z: T) -> T {
    if z > T::ZERO {
        z + (-z).exp().ln_1p()
    } else {
        z.exp().ln_1p()
    }
}

/// 1 / (1 + e^(−z)) without overflow.
fn sigmoid<T: Real>(z: T) -> T {
    if z >= T::ZERO {
        T::ONE / (T::ONE + (-z).exp())
    } else {
        let e = z.exp();
        e / (T::ONE + e)
    }
}
