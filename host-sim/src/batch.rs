//! The reference batch fit: weighted least squares of the logistic
//! y = K / (1 + e^(−r (t − `t_m`))) over all readings at once, in `f64`, with
//! Levenberg–Marquardt; and the Cramér–Rao bound for the same model.
//!
//! The online estimator is judged against this fit; it is not meant to run on
//! the device.
//!
//! Units: times in hours, values in signal units (OD), rate per hour.

use levenberg_marquardt::{LeastSquaresProblem, LevenbergMarquardt};
use nalgebra::{DMatrix, DVector, Dyn, Matrix3, OMatrix, OVector, Owned, U3, Vector3};
use plateau::{Logistic, OnlineFamily};

/// Why a fit could not be made.
#[derive(Debug, thiserror::Error, PartialEq)]
#[non_exhaustive]
pub enum FitError {
    /// Fewer points than needed (at least 4 for 3 parameters and a residual).
    #[error("need at least 4 usable points, got {0}")]
    TooFewPoints(usize),
    /// Times, values or weights differ in length.
    #[error("times, values and weights must have the same length")]
    LengthMismatch,
    /// A time or value is NaN or infinite.
    #[error("point {0} is not finite")]
    NotFinite(usize),
    /// A weight is negative, NaN or infinite.
    #[error("weight {0} must be finite and at least 0")]
    BadWeight(usize),
    /// The noise sd given to the Cramér–Rao bound is not positive.
    #[error("noise sd must be finite and positive")]
    BadNoise,
    /// The minimiser failed from every starting point.
    #[error("the fit did not converge: {0}")]
    NoConvergence(String),
    /// JᵀWJ cannot be inverted: the data do not pin down all three parameters.
    #[error("the parameters are not identifiable from these points (singular JᵀWJ)")]
    Singular,
}

/// Result of [`fit_logistic`].
///
/// Units: `capacity` in signal units; `rate_per_h` per hour; `midpoint_h`
/// hours; `b` dimensionless; `sse` in (weighted) squared signal units;
/// `residual_sd` in signal units when unweighted.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LogisticFit {
    /// Capacity K, signal units.
    #[doc(alias = "K")]
    pub capacity: f64,
    /// Rate r, per hour.
    #[doc(alias = "r")]
    pub rate_per_h: f64,
    /// Midpoint (inflection) time `t_m`, hours.
    pub midpoint_h: f64,
    /// B = e^(r `t_m`), so that y = K / (1 + B e^(−r t)).
    #[doc(alias = "B")]
    pub b: f64,
    /// Standard deviation of the capacity, signal units.
    pub capacity_sd: f64,
    /// Standard deviation of the rate, per hour.
    pub rate_sd_per_h: f64,
    /// Standard deviation of the midpoint, hours.
    pub midpoint_sd_h: f64,
    /// Standard deviation of B (delta method).
    pub b_sd: f64,
    /// Covariance σ̂² (JᵀWJ)⁻¹ of (K, r, `t_m`), in their units.
    pub covariance: [[f64; 3]; 3],
    /// Weighted sum of squared residuals Σ wᵢ (yᵢ − f(tᵢ))².
    #[doc(alias = "SSE")]
    pub sse: f64,
    /// σ̂ = √(SSE / (n − 3)).
    pub residual_sd: f64,
    /// Number of points used (weight > 0).
    pub points: usize,
}

impl LogisticFit {
    /// The fitted curve.
    ///
    /// # Panics
    ///
    /// Never for a fit returned by [`fit_logistic`], which checks that K and r
    /// are positive.
    #[must_use]
    pub fn curve(&self) -> Logistic<f64> {
        Logistic::from_midpoint(self.capacity, self.rate_per_h, self.midpoint_h)
            .expect("fit returns positive K and r")
    }

    /// Standard deviation of any smooth function g(K, r, `t_m`) from its
    /// gradient, by the delta method: √(∇gᵀ Σ ∇g).
    #[must_use]
    pub fn sd_of(&self, gradient: [f64; 3]) -> f64 {
        let mut v = 0.0;
        for (i, gi) in gradient.iter().enumerate() {
            for (j, gj) in gradient.iter().enumerate() {
                v += gi * self.covariance[i][j] * gj;
            }
        }
        v.max(0.0).sqrt()
    }

    /// Standard deviation of the fitted curve's value at `t_h` hours, signal
    /// units.
    #[must_use]
    pub fn value_sd(&self, t_h: f64) -> f64 {
        self.sd_of(gradient(
            self.capacity,
            self.rate_per_h,
            self.midpoint_h,
            t_h,
        ))
    }
}

/// The logistic value and its gradient with respect to (K, r, `t_m`).
fn value_and_gradient(k: f64, r: f64, tm: f64, t: f64) -> (f64, [f64; 3]) {
    let e = (-r * (t - tm)).exp();
    let d = 1.0 + e;
    // REFERENCES.md (Fisher information of the logistic): ∂f/∂K = 1/(1+e),
    // ∂f/∂r = K (t − t_m) e / (1+e)², ∂f/∂t_m = −K r e / (1+e)².
    (
        k / d,
        [1.0 / d, k * (t - tm) * e / (d * d), -k * r * e / (d * d)],
    )
}

fn gradient(k: f64, r: f64, tm: f64, t: f64) -> [f64; 3] {
    value_and_gradient(k, r, tm, t).1
}

struct Problem<'a> {
    times: &'a [f64],
    values: &'a [f64],
    sqrt_w: Vec<f64>,
    p: Vector3<f64>,
}

impl LeastSquaresProblem<f64, Dyn, U3> for Problem<'_> {
    type ResidualStorage = Owned<f64, Dyn>;
    type JacobianStorage = Owned<f64, Dyn, U3>;
    type ParameterStorage = Owned<f64, U3>;

    fn set_params(&mut self, x: &Vector3<f64>) {
        self.p.copy_from(x);
    }

    fn params(&self) -> Vector3<f64> {
        self.p
    }

    fn residuals(&self) -> Option<OVector<f64, Dyn>> {
        let (k, r, tm) = (self.p[0], self.p[1], self.p[2]);
        let res = OVector::<f64, Dyn>::from_iterator(
            self.times.len(),
            self.times
                .iter()
                .zip(self.values)
                .zip(&self.sqrt_w)
                .map(|((&t, &y), &s)| s * (value_and_gradient(k, r, tm, t).0 - y)),
        );
        res.iter().all(|x| x.is_finite()).then_some(res)
    }

    fn jacobian(&self) -> Option<OMatrix<f64, Dyn, U3>> {
        let (k, r, tm) = (self.p[0], self.p[1], self.p[2]);
        let mut j = OMatrix::<f64, Dyn, U3>::zeros(self.times.len());
        for (i, (&t, &s)) in self.times.iter().zip(&self.sqrt_w).enumerate() {
            let g = gradient(k, r, tm, t);
            for c in 0..3 {
                j[(i, c)] = s * g[c];
            }
        }
        j.iter().all(|x| x.is_finite()).then_some(j)
    }
}

/// Starting values (K, r, `t_m`) for the logistic from the data alone.
///
/// K starts a little above a high quantile of the values (robust to a few
/// high spikes); r and `t_m` come from a straight-line fit of
/// ln(y / (K − y)) = r (t − `t_m`) over the points between 5 % and 95 % of K,
/// falling back to the time span and the point nearest K/2.
fn starts(times: &[f64], values: &[f64], k_factor: f64) -> Vector3<f64> {
    let mut sorted: Vec<f64> = values.to_vec();
    sorted.sort_by(f64::total_cmp);
    #[allow(
        clippy::cast_possible_truncation,
        clippy::cast_sign_loss,
        clippy::cast_precision_loss
    )]
    let q = sorted[((sorted.len() - 1) as f64 * 0.97).round() as usize];
    let k = q.abs().max(f64::MIN_POSITIVE) * k_factor;
    let (mut n, mut st, mut sz, mut stt, mut stz) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for (&t, &y) in times.iter().zip(values) {
        if y > 0.05 * k && y < 0.95 * k {
            let z = (y / (k - y)).ln();
            n += 1.0;
            st += t;
            sz += z;
            stt += t * t;
            stz += t * z;
        }
    }
    let span = times.iter().copied().fold(f64::NEG_INFINITY, f64::max)
        - times.iter().copied().fold(f64::INFINITY, f64::min);
    let denom = n * stt - st * st;
    if n >= 2.0 && denom > 0.0 {
        let slope = (n * stz - st * sz) / denom;
        let intercept = (sz - slope * st) / n;
        if slope > 0.0 && slope.is_finite() {
            return Vector3::new(k, slope, -intercept / slope);
        }
    }
    let mid = times
        .iter()
        .zip(values)
        .min_by(|a, b| (a.1 - k / 2.0).abs().total_cmp(&(b.1 - k / 2.0).abs()))
        .map_or(0.0, |p| *p.0);
    Vector3::new(k, 8.0 / span.max(f64::MIN_POSITIVE), mid)
}

/// Fits y = K / (1 + e^(−r (t − `t_m`))) by (weighted) least squares.
///
/// `weights`, if given, multiply the squared residuals (use 1/sd² for known
/// noise; a weight of 0 drops a point). Standard deviations are
/// σ̂² (JᵀWJ)⁻¹ with σ̂² = SSE / (n − 3), n the number of points with
/// positive weight. Several starting values are tried and the lowest SSE
/// kept.
///
/// Units: `times` in hours, `values` in signal units.
///
/// # Errors
///
/// See [`FitError`].
pub fn fit_logistic(
    times: &[f64],
    values: &[f64],
    weights: Option<&[f64]>,
) -> Result<LogisticFit, FitError> {
    if times.len() != values.len() || weights.is_some_and(|w| w.len() != times.len()) {
        return Err(FitError::LengthMismatch);
    }
    let mut t = Vec::with_capacity(times.len());
    let mut y = Vec::with_capacity(times.len());
    let mut sw = Vec::with_capacity(times.len());
    for i in 0..times.len() {
        let w = weights.map_or(1.0, |w| w[i]);
        if !(w.is_finite() && w >= 0.0) {
            return Err(FitError::BadWeight(i));
        }
        if !(times[i].is_finite() && values[i].is_finite()) {
            return Err(FitError::NotFinite(i));
        }
        if w > 0.0 {
            t.push(times[i]);
            y.push(values[i]);
            sw.push(w.sqrt());
        }
    }
    let n = t.len();
    if n < 4 {
        return Err(FitError::TooFewPoints(n));
    }
    let mut best: Option<(f64, Vector3<f64>)> = None;
    let mut last_failure = String::from("no start");
    for k_factor in [1.02, 1.1, 1.4] {
        let problem = Problem {
            times: &t,
            values: &y,
            sqrt_w: sw.clone(),
            p: starts(&t, &y, k_factor),
        };
        let (problem, report) = LevenbergMarquardt::new()
            .with_patience(200)
            .minimize(problem);
        let p = problem.p;
        if !report.termination.was_successful() {
            last_failure = termination_words(&report.termination);
            continue;
        }
        if !(p[0] > 0.0 && p[1] > 0.0 && p.iter().all(|x| x.is_finite())) {
            last_failure = format!(
                "the fit ran to a capacity or rate that is not positive (capacity {:.4}, rate {:.4} per h)",
                p[0], p[1]
            );
            continue;
        }
        let sse = 2.0 * report.objective_function;
        if best.is_none_or(|(s, _)| sse < s) {
            best = Some((sse, p));
        }
    }
    let (sse, p) = best.ok_or(FitError::NoConvergence(last_failure))?;
    let (k, r, tm) = (p[0], p[1], p[2]);
    // JᵀWJ at the optimum.
    let mut jtj = Matrix3::<f64>::zeros();
    for (&ti, &s) in t.iter().zip(&sw) {
        let g = Vector3::from(gradient(k, r, tm, ti)) * s;
        jtj += g * g.transpose();
    }
    let inv = jtj.try_inverse().ok_or(FitError::Singular)?;
    #[allow(clippy::cast_precision_loss)]
    let sigma2 = sse / (n - 3) as f64;
    let cov = inv * sigma2;
    let covariance: [[f64; 3]; 3] = cov.into();
    let b = (r * tm).exp();
    let mut fit = LogisticFit {
        capacity: k,
        rate_per_h: r,
        midpoint_h: tm,
        b,
        capacity_sd: cov[(0, 0)].sqrt(),
        rate_sd_per_h: cov[(1, 1)].sqrt(),
        midpoint_sd_h: cov[(2, 2)].sqrt(),
        b_sd: 0.0,
        covariance,
        sse,
        residual_sd: sigma2.sqrt(),
        points: n,
    };
    // B = e^(r t_m): ∂B/∂r = t_m B, ∂B/∂t_m = r B.
    fit.b_sd = fit.sd_of([0.0, tm * b, r * b]);
    Ok(fit)
}

/// A fit that sets aside outliers: fit, drop points whose standardised
/// residual √w·|y − f| exceeds `cutoff` robust standard deviations
/// (1.4826 × the median absolute standardised residual), refit, and repeat
/// until the set stops changing (at most 5 rounds).
///
/// Returns the final fit and, per point, whether it was set aside.
///
/// # Errors
///
/// As [`fit_logistic`].
pub fn fit_logistic_trimmed(
    times: &[f64],
    values: &[f64],
    weights: Option<&[f64]>,
    cutoff: f64,
) -> Result<(LogisticFit, Vec<bool>), FitError> {
    let base: Vec<f64> = weights.map_or_else(|| vec![1.0; times.len()], <[f64]>::to_vec);
    if base.len() != times.len() || times.len() != values.len() {
        return Err(FitError::LengthMismatch);
    }
    let mut rejected = vec![false; times.len()];
    let mut fit = fit_logistic(times, values, Some(&base))?;
    for _ in 0..5 {
        let curve = fit.curve();
        let z: Vec<f64> = (0..times.len())
            .map(|i| {
                base[i].sqrt() * (values[i] - plateau::GrowthCurve::value(&curve, times[i])).abs()
            })
            .collect();
        let mut kept: Vec<f64> = z
            .iter()
            .zip(&rejected)
            .filter(|(_, r)| !**r)
            .map(|(z, _)| *z)
            .collect();
        kept.sort_by(f64::total_cmp);
        let scale = 1.4826 * kept[kept.len() / 2];
        let next: Vec<bool> = z
            .iter()
            .zip(&base)
            .map(|(z, w)| *w > 0.0 && *z > cutoff * scale)
            .collect();
        if next == rejected {
            break;
        }
        rejected = next;
        let w: Vec<f64> = base
            .iter()
            .zip(&rejected)
            .map(|(w, r)| if *r { 0.0 } else { *w })
            .collect();
        fit = fit_logistic(times, values, Some(&w))?;
    }
    Ok((fit, rejected))
}

/// Cramér–Rao standard deviations of (K, r, `t_m`) for the logistic sampled at
/// `times` with independent Gaussian noise of sd `noise_sd`: the square roots
/// of the diagonal of (JᵀJ / σ²)⁻¹.
///
/// Units: `capacity` and `noise_sd` in signal units, `rate_per_h` per hour,
/// `midpoint_h` and `times` in hours; the result is in the units of
/// (K, r, `t_m`).
///
/// # Errors
///
/// [`FitError::BadNoise`] for a non-positive sd, [`FitError::Singular`] when
/// the grid cannot pin down the three parameters.
pub fn fisher(
    capacity: f64,
    rate_per_h: f64,
    midpoint_h: f64,
    times: &[f64],
    noise_sd: f64,
) -> Result<[f64; 3], FitError> {
    if !(noise_sd.is_finite() && noise_sd > 0.0) {
        return Err(FitError::BadNoise);
    }
    let sds = vec![noise_sd; times.len()];
    fisher_heteroscedastic(capacity, rate_per_h, midpoint_h, times, &sds)
}

/// As [`fisher`], with its own noise sd for every time (noise that grows with
/// the signal): the Fisher information is Σ gᵢ gᵢᵀ / σᵢ².
///
/// # Errors
///
/// [`FitError::LengthMismatch`] if `noise_sd` and `times` differ in length,
/// [`FitError::BadNoise`] for a non-positive sd, [`FitError::Singular`] when
/// the grid cannot pin down the three parameters.
pub fn fisher_heteroscedastic(
    capacity: f64,
    rate_per_h: f64,
    midpoint_h: f64,
    times: &[f64],
    noise_sd: &[f64],
) -> Result<[f64; 3], FitError> {
    if noise_sd.len() != times.len() {
        return Err(FitError::LengthMismatch);
    }
    if noise_sd.iter().any(|s| !(s.is_finite() && *s > 0.0)) {
        return Err(FitError::BadNoise);
    }
    let mut info = Matrix3::<f64>::zeros();
    for (&t, &sd) in times.iter().zip(noise_sd) {
        let g = Vector3::from(gradient(capacity, rate_per_h, midpoint_h, t));
        info += g * g.transpose() / (sd * sd);
    }
    let inv = info.try_inverse().ok_or(FitError::Singular)?;
    if (0..3).any(|i| inv[(i, i)].is_nan() || inv[(i, i)] <= 0.0) {
        return Err(FitError::Singular);
    }
    Ok([inv[(0, 0)].sqrt(), inv[(1, 1)].sqrt(), inv[(2, 2)].sqrt()])
}

/// Why the least-squares solver stopped, in words for a person.
fn termination_words(reason: &levenberg_marquardt::TerminationReason) -> String {
    use levenberg_marquardt::TerminationReason as T;
    match reason {
        T::LostPatience => "the fit did not settle within its iteration limit".into(),
        T::NoImprovementPossible(what) => format!("the fit could not improve further ({what})"),
        T::Numerical(what) => format!("the fit met a numerical problem ({what})"),
        T::Orthogonal | T::Converged { .. } | T::ResidualsZero => "the fit stopped early".into(),
        _ => "the fit could not be computed for these readings".into(),
    }
}

/// A curve family the batch fitter can fit: its value and gradient in its
/// own parameters θ, starting points, and the two figures the fleet judges
/// (capacity and maximum specific growth rate) as functions of θ with their
/// gradients, so [`fit_family`] can give their sds by the delta method.
///
/// The fleet fits the same family the online estimator uses through this
/// trait, so no formula is written a second time here.
///
/// Units: times in hours, values in signal units, rates per hour; θ in the
/// family's own units.
pub trait BatchFamily<const P: usize> {
    /// Short name of the family, for reports.
    fn name(&self) -> &'static str;

    /// The curve's value at `t_h` hours and its gradient in θ.
    fn value_and_gradient(&self, theta: &[f64; P], t_h: f64) -> (f64, [f64; P]);

    /// Starting points for the minimiser from the data alone (at least one).
    fn starts(&self, times: &[f64], values: &[f64]) -> Vec<[f64; P]>;

    /// Whether θ is an admissible optimum (positive capacity and rate, ...).
    fn admissible(&self, theta: &[f64; P]) -> bool;

    /// Capacity above the curve's lower asymptote, signal units, and its
    /// gradient in θ.
    fn capacity(&self, theta: &[f64; P]) -> (f64, [f64; P]);

    /// Maximum specific growth rate, per hour, and its gradient in θ.
    fn max_specific_rate(&self, theta: &[f64; P]) -> (f64, [f64; P]);

    /// A prior on θ from the data: for each parameter its mean and its
    /// information (1 / variance; 0 for none), added to the weighted sum of
    /// squares as (θᵢ − meanᵢ)² · informationᵢ. `None` (the default): plain
    /// least squares.
    fn prior(&self, _times: &[f64], _values: &[f64]) -> Option<([f64; P], [f64; P])> {
        None
    }
}

/// Any [`OnlineFamily`] the estimator fits, as a [`BatchFamily`]: the
/// family's own value, gradient, capacity, μmax and priors (so the batch fit
/// is the online model fitted to all readings at once, and no formula is
/// written twice). θ is the family's; times are hours since the first
/// reading, the family's origin, as in the estimator. Starting points: the
/// family's own start through the reading nearest half the largest one, at
/// three rates.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Online<F> {
    origin_h: f64,
    family: core::marker::PhantomData<F>,
}

impl<F> Online<F> {
    /// The family with its time origin at `origin_h` hours (the first
    /// reading's time).
    #[must_use]
    pub const fn new(origin_h: f64) -> Self {
        Self {
            origin_h,
            family: core::marker::PhantomData,
        }
    }
}

/// The family's curve at θ, after the family's own clamp.
fn online_curve<F: OnlineFamily<f64, P>, const P: usize>(theta: &[f64; P]) -> F {
    let mut t = *theta;
    F::clamp(&mut t, f64::INFINITY);
    F::from_theta(&t)
}

impl<F: OnlineFamily<f64, P>, const P: usize> BatchFamily<P> for Online<F> {
    fn name(&self) -> &'static str {
        F::NAME
    }
    fn value_and_gradient(&self, theta: &[f64; P], t_h: f64) -> (f64, [f64; P]) {
        let (f, g, _) = online_curve::<F, P>(theta).eval(t_h - self.origin_h);
        (f, g)
    }
    fn starts(&self, times: &[f64], values: &[f64]) -> Vec<[f64; P]> {
        let y_max = values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let Some((&t_half, &y_half)) =
            times
                .iter()
                .zip(values)
                .filter(|(_, y)| **y > 0.0)
                .min_by(|a, b| {
                    (a.1 - y_max / 2.0)
                        .abs()
                        .total_cmp(&(b.1 - y_max / 2.0).abs())
                })
        else {
            return Vec::new();
        };
        [0.3, 0.7, 1.5]
            .iter()
            .map(|&rate| F::start(1.05 * y_max, rate, t_half - self.origin_h, y_half))
            .collect()
    }
    fn admissible(&self, theta: &[f64; P]) -> bool {
        let mut t = *theta;
        F::clamp(&mut t, f64::INFINITY);
        t == *theta && theta.iter().all(|x| x.is_finite())
    }
    fn capacity(&self, theta: &[f64; P]) -> (f64, [f64; P]) {
        // θ₀ = ln K (the trait's convention).
        let k = online_curve::<F, P>(theta).capacity();
        (k, core::array::from_fn(|i| if i == 0 { k } else { 0.0 }))
    }
    fn max_specific_rate(&self, theta: &[f64; P]) -> (f64, [f64; P]) {
        let (mu, g, _) = online_curve::<F, P>(theta).max_specific_rate(theta);
        (mu, g)
    }
    fn prior(&self, _times: &[f64], values: &[f64]) -> Option<([f64; P], [f64; P])> {
        let y_max = values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        Some(F::prior(y_max))
    }
}

/// The plain logistic as a [`BatchFamily`]: θ = (K, r, `t_m`), the same
/// model and starts as [`fit_logistic`].
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct LogisticFamily;

impl BatchFamily<3> for LogisticFamily {
    fn name(&self) -> &'static str {
        "logistic"
    }
    fn value_and_gradient(&self, theta: &[f64; 3], t_h: f64) -> (f64, [f64; 3]) {
        value_and_gradient(theta[0], theta[1], theta[2], t_h)
    }
    fn starts(&self, times: &[f64], values: &[f64]) -> Vec<[f64; 3]> {
        [1.02, 1.1, 1.4]
            .iter()
            .map(|&k| starts(times, values, k).into())
            .collect()
    }
    fn admissible(&self, theta: &[f64; 3]) -> bool {
        theta[0] > 0.0 && theta[1] > 0.0 && theta.iter().all(|x| x.is_finite())
    }
    fn capacity(&self, theta: &[f64; 3]) -> (f64, [f64; 3]) {
        (theta[0], [1.0, 0.0, 0.0])
    }
    fn max_specific_rate(&self, theta: &[f64; 3]) -> (f64, [f64; 3]) {
        (theta[1], [0.0, 1.0, 0.0])
    }
}

/// A value with its standard deviation (delta method), in the value's units.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct ValueSd {
    /// The value.
    pub value: f64,
    /// Its standard deviation.
    pub sd: f64,
}

/// Result of [`fit_family`].
///
/// Units: θ in the family's units; `sse` in weighted squared signal units.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FamilyFit<const P: usize> {
    /// Parameters at the optimum.
    pub theta: [f64; P],
    /// Covariance σ̂² (JᵀWJ)⁻¹ of θ.
    pub covariance: [[f64; P]; P],
    /// Capacity above the lower asymptote, signal units.
    pub capacity: ValueSd,
    /// Maximum specific growth rate, per hour.
    pub max_specific_rate_per_h: ValueSd,
    /// Weighted sum of squared residuals.
    pub sse: f64,
    /// Points used (weight > 0).
    pub points: usize,
}

impl<const P: usize> FamilyFit<P> {
    /// √(∇gᵀ Σ ∇g) for a function g of θ with gradient `gradient`.
    #[must_use]
    pub fn sd_of(&self, gradient: &[f64; P]) -> f64 {
        let mut v = 0.0;
        for i in 0..P {
            for j in 0..P {
                v += gradient[i] * self.covariance[i][j] * gradient[j];
            }
        }
        v.max(0.0).sqrt()
    }
}

struct FamilyProblem<'a, F, const P: usize> {
    family: &'a F,
    times: &'a [f64],
    values: &'a [f64],
    sqrt_w: &'a [f64],
    /// Prior means and √information, appended as P extra residuals.
    prior: Option<([f64; P], [f64; P])>,
    p: DVector<f64>,
}

impl<F, const P: usize> FamilyProblem<'_, F, P> {
    fn theta(&self) -> [f64; P] {
        core::array::from_fn(|i| self.p[i])
    }
}

impl<F: BatchFamily<P>, const P: usize> LeastSquaresProblem<f64, Dyn, Dyn>
    for FamilyProblem<'_, F, P>
{
    type ResidualStorage = Owned<f64, Dyn>;
    type JacobianStorage = Owned<f64, Dyn, Dyn>;
    type ParameterStorage = Owned<f64, Dyn>;

    fn set_params(&mut self, x: &DVector<f64>) {
        self.p.copy_from(x);
    }

    fn params(&self) -> DVector<f64> {
        self.p.clone()
    }

    fn residuals(&self) -> Option<DVector<f64>> {
        let theta = self.theta();
        let n = self.times.len();
        let extra = if self.prior.is_some() { P } else { 0 };
        let mut res = DVector::<f64>::zeros(n + extra);
        for (i, ((&t, &y), &s)) in self
            .times
            .iter()
            .zip(self.values)
            .zip(self.sqrt_w)
            .enumerate()
        {
            res[i] = s * (self.family.value_and_gradient(&theta, t).0 - y);
        }
        if let Some((mean, root_info)) = &self.prior {
            for k in 0..P {
                res[n + k] = root_info[k] * (theta[k] - mean[k]);
            }
        }
        res.iter().all(|x| x.is_finite()).then_some(res)
    }

    fn jacobian(&self) -> Option<DMatrix<f64>> {
        let theta = self.theta();
        let n = self.times.len();
        let extra = if self.prior.is_some() { P } else { 0 };
        let mut j = DMatrix::<f64>::zeros(n + extra, P);
        for (i, (&t, &s)) in self.times.iter().zip(self.sqrt_w).enumerate() {
            let g = self.family.value_and_gradient(&theta, t).1;
            for c in 0..P {
                j[(i, c)] = s * g[c];
            }
        }
        if let Some((_, root_info)) = &self.prior {
            for k in 0..P {
                j[(n + k, k)] = root_info[k];
            }
        }
        j.iter().all(|x| x.is_finite()).then_some(j)
    }
}

/// Fits any [`BatchFamily`] by (weighted) least squares with
/// Levenberg–Marquardt from each of the family's starting points, keeping
/// the lowest objective; covariance σ̂² (JᵀWJ + Λ)⁻¹ with
/// σ̂² = SSE / (n − P), SSE over the readings only, and Λ the family's prior
/// information (none for plain least squares). With a prior, give weights
/// 1/sd² from a noise model, so that the readings' and the prior's terms are
/// both in units of variance (σ̂ ≈ 1 then).
///
/// `weights` as in [`fit_logistic`] (1/sd² for known noise; 0 drops a point).
///
/// Units: `times` in hours, `values` in signal units.
///
/// # Errors
///
/// See [`FitError`]; at least P + 1 usable points are needed.
pub fn fit_family<F: BatchFamily<P>, const P: usize>(
    family: &F,
    times: &[f64],
    values: &[f64],
    weights: Option<&[f64]>,
) -> Result<FamilyFit<P>, FitError> {
    if times.len() != values.len() || weights.is_some_and(|w| w.len() != times.len()) {
        return Err(FitError::LengthMismatch);
    }
    let mut t = Vec::with_capacity(times.len());
    let mut y = Vec::with_capacity(times.len());
    let mut sw = Vec::with_capacity(times.len());
    for i in 0..times.len() {
        let w = weights.map_or(1.0, |w| w[i]);
        if !(w.is_finite() && w >= 0.0) {
            return Err(FitError::BadWeight(i));
        }
        if !(times[i].is_finite() && values[i].is_finite()) {
            return Err(FitError::NotFinite(i));
        }
        if w > 0.0 {
            t.push(times[i]);
            y.push(values[i]);
            sw.push(w.sqrt());
        }
    }
    let n = t.len();
    if n <= P {
        return Err(FitError::TooFewPoints(n));
    }
    let prior = family
        .prior(&t, &y)
        .map(|(mean, info)| (mean, info.map(|x| x.max(0.0).sqrt())));
    let mut best: Option<(f64, [f64; P])> = None;
    let mut last_failure = String::from("no start");
    for start in family.starts(&t, &y) {
        let problem = FamilyProblem {
            family,
            times: &t,
            values: &y,
            sqrt_w: &sw,
            prior,
            p: DVector::from_row_slice(&start),
        };
        let (problem, report) = LevenbergMarquardt::new()
            .with_patience(300)
            .minimize(problem);
        let theta = problem.theta();
        if !report.termination.was_successful() {
            last_failure = format!("{:?}", report.termination);
            continue;
        }
        if !family.admissible(&theta) {
            last_failure = format!("inadmissible optimum {theta:?}");
            continue;
        }
        let objective = 2.0 * report.objective_function;
        if best.is_none_or(|(s, _)| objective < s) {
            best = Some((objective, theta));
        }
    }
    let (_, theta) = best.ok_or(FitError::NoConvergence(last_failure))?;
    let mut sse = 0.0;
    let mut jtj = DMatrix::<f64>::zeros(P, P);
    for ((&ti, &yi), &s) in t.iter().zip(&y).zip(&sw) {
        let (f, g) = family.value_and_gradient(&theta, ti);
        sse += (s * (f - yi)).powi(2);
        let g = DVector::from_row_slice(&g) * s;
        jtj += &g * g.transpose();
    }
    if let Some((_, root_info)) = &prior {
        for k in 0..P {
            jtj[(k, k)] += root_info[k] * root_info[k];
        }
    }
    let inv = jtj.try_inverse().ok_or(FitError::Singular)?;
    #[allow(clippy::cast_precision_loss)]
    let sigma2 = sse / (n - P) as f64;
    let covariance: [[f64; P]; P] =
        core::array::from_fn(|i| core::array::from_fn(|j| sigma2 * inv[(i, j)]));
    let mut fit = FamilyFit {
        theta,
        covariance,
        capacity: ValueSd {
            value: 0.0,
            sd: 0.0,
        },
        max_specific_rate_per_h: ValueSd {
            value: 0.0,
            sd: 0.0,
        },
        sse,
        points: n,
    };
    let (k, gk) = family.capacity(&theta);
    let (mu, gmu) = family.max_specific_rate(&theta);
    fit.capacity = ValueSd {
        value: k,
        sd: fit.sd_of(&gk),
    };
    fit.max_specific_rate_per_h = ValueSd {
        value: mu,
        sd: fit.sd_of(&gmu),
    };
    Ok(fit)
}

#[cfg(test)]
mod tests {
    #[test]
    fn solver_stops_are_told_in_words() {
        use levenberg_marquardt::TerminationReason as T;
        for reason in [
            T::LostPatience,
            T::NoImprovementPossible("gtol"),
            T::Numerical("jacobian"),
            T::Orthogonal,
            T::ResidualsZero,
            T::NoParameters,
        ] {
            let words = super::termination_words(&reason);
            let debug = format!("{reason:?}");
            let name = debug.split(['(', ' ', '{']).next().unwrap();
            assert!(!words.contains(name), "{words:?} names {name}");
            assert!(words.starts_with("the fit"), "{words}");
        }
    }

    use super::*;

    /// Carlson (1913) yeast culture, amount of yeast at t = 0..18 h
    /// (T. Carlson, Biochem. Z. 57:313–334, 1913; tabulated in R. Pearl,
    /// Q. Rev. Biol. 2:532–548, 1927), as given in REFERENCES.md.
    const CARLSON: [f64; 19] = [
        9.6, 18.3, 29.0, 47.2, 71.1, 119.1, 174.6, 257.3, 350.7, 441.0, 513.3, 559.7, 594.8, 629.4,
        640.8, 651.1, 655.9, 659.6, 661.8,
    ];

    fn hours() -> Vec<f64> {
        (0..19).map(f64::from).collect()
    }

    fn close(x: f64, want: f64, tol: f64) -> bool {
        (x - want).abs() <= tol
    }

    #[test]
    fn carlson_yeast_least_squares() {
        let fit = fit_logistic(&hours(), &CARLSON, None).unwrap();
        // Reference: unweighted least squares of the Carlson data with a
        // general-purpose fitter, REFERENCES.md: K = 663.02 ± 1.70,
        // r = 0.54699 ± 0.00558, B = 71.58 ± 2.93, midpoint 7.808 h,
        // SSE 194.33, residual sd 3.485. Tolerances: half a unit in the last
        // quoted digit.
        assert!(close(fit.capacity, 663.02, 0.005), "K {}", fit.capacity);
        assert!(
            close(fit.capacity_sd, 1.70, 0.005),
            "sd K {}",
            fit.capacity_sd
        );
        assert!(
            close(fit.rate_per_h, 0.54699, 0.000005),
            "r {}",
            fit.rate_per_h
        );
        assert!(
            close(fit.rate_sd_per_h, 0.00558, 0.000005),
            "sd r {}",
            fit.rate_sd_per_h
        );
        assert!(close(fit.b, 71.58, 0.005), "B {}", fit.b);
        assert!(close(fit.b_sd, 2.93, 0.005), "sd B {}", fit.b_sd);
        assert!(
            close(fit.midpoint_h, 7.808, 0.0005),
            "t_m {}",
            fit.midpoint_h
        );
        assert!(close(fit.sse, 194.33, 0.005), "SSE {}", fit.sse);
        assert!(
            close(fit.residual_sd, 3.485, 0.0005),
            "sd {}",
            fit.residual_sd
        );
        assert_eq!(fit.points, 19);
    }

    #[test]
    fn carlson_fit_beats_pearls_published_curve() {
        // Pearl's published logistic y = 665 / (1 + e^(4.1896 − 0.5355 t))
        // (REFERENCES.md, [memory]): a least-squares fit must not have a larger
        // SSE than any other curve of the family.
        let fit = fit_logistic(&hours(), &CARLSON, None).unwrap();
        let pearl: f64 = hours()
            .iter()
            .zip(CARLSON)
            .map(|(t, y)| (665.0 / (1.0 + (4.1896 - 0.5355 * t).exp()) - y).powi(2))
            .sum();
        assert!(fit.sse < pearl, "{} vs {pearl}", fit.sse);
        // And Pearl's parameters lie within a few percent of the fit.
        assert!((fit.rate_per_h / 0.5355 - 1.0).abs() < 0.05);
        assert!((fit.midpoint_h / (4.1896 / 0.5355) - 1.0).abs() < 0.05);
    }

    #[test]
    fn carlson_cramer_rao() {
        // REFERENCES.md: Cramér–Rao sds on the Carlson grid at the fitted curve
        // with noise sd 3.485: K 1.706, r 0.00559, midpoint 0.0224 h. Those
        // quoted figures sit about 0.2 % above the same document's
        // least-squares sds (K 1.70, r 0.00558), which are mathematically the
        // same quantity at this σ, so the tolerance is 0.5 % relative.
        let sd = fisher(663.02, 0.54699, 7.808, &hours(), 3.485).unwrap();
        for (got, want, name) in [
            (sd[0], 1.706, "K"),
            (sd[1], 0.00559, "r"),
            (sd[2], 0.0224, "t_m"),
        ] {
            assert!((got / want - 1.0).abs() < 0.005, "{name}: {got} vs {want}");
        }
    }

    #[test]
    fn cramer_rao_at_the_fit_equals_the_fit_covariance() {
        // With σ = σ̂ and the same Jacobian, (JᵀJ/σ̂²)⁻¹ is σ̂² (JᵀJ)⁻¹: the two
        // code paths (fit covariance and Fisher bound) must agree.
        let fit = fit_logistic(&hours(), &CARLSON, None).unwrap();
        let sd = fisher(
            fit.capacity,
            fit.rate_per_h,
            fit.midpoint_h,
            &hours(),
            fit.residual_sd,
        )
        .unwrap();
        assert!((sd[0] / fit.capacity_sd - 1.0).abs() < 1e-9);
        assert!((sd[1] / fit.rate_sd_per_h - 1.0).abs() < 1e-9);
        assert!((sd[2] / fit.midpoint_sd_h - 1.0).abs() < 1e-9);
    }

    #[test]
    fn fisher_scales_with_noise_and_rejects_bad_input() {
        let a = fisher(1.0, 0.5, 5.0, &hours(), 0.01).unwrap();
        let b = fisher(1.0, 0.5, 5.0, &hours(), 0.02).unwrap();
        for i in 0..3 {
            assert!((b[i] / a[i] - 2.0).abs() < 1e-9);
        }
        assert_eq!(
            fisher(1.0, 0.5, 5.0, &hours(), 0.0),
            Err(FitError::BadNoise)
        );
        // All points at one time cannot separate three parameters.
        assert_eq!(
            fisher(1.0, 0.5, 5.0, &[3.0; 10], 0.01),
            Err(FitError::Singular)
        );
    }

    #[test]
    fn weights_scale_consistently() {
        // Doubling every weight leaves the estimates and sds unchanged
        // (σ̂² doubles, (JᵀWJ)⁻¹ halves) and doubles the SSE.
        let w1 = vec![1.0; 19];
        let w2 = vec![2.0; 19];
        let a = fit_logistic(&hours(), &CARLSON, Some(&w1)).unwrap();
        let b = fit_logistic(&hours(), &CARLSON, Some(&w2)).unwrap();
        assert!((a.capacity - b.capacity).abs() < 1e-6);
        assert!((a.capacity_sd - b.capacity_sd).abs() < 1e-6);
        assert!((b.sse / a.sse - 2.0).abs() < 1e-6);
        // A zero weight drops the point: same as leaving it out.
        let mut w = vec![1.0; 19];
        w[5] = 0.0;
        let c = fit_logistic(&hours(), &CARLSON, Some(&w)).unwrap();
        let mut t = hours();
        let mut y = CARLSON.to_vec();
        t.remove(5);
        y.remove(5);
        let d = fit_logistic(&t, &y, None).unwrap();
        assert_eq!(c.points, 18);
        assert!((c.capacity - d.capacity).abs() < 1e-6);
        assert!((c.rate_sd_per_h - d.rate_sd_per_h).abs() < 1e-9);
    }

    #[test]
    fn trimmed_fit_sets_aside_a_spike() {
        let mut y = CARLSON.to_vec();
        y[12] += 150.0; // an invented outlier
        let (fit, rejected) = fit_logistic_trimmed(&hours(), &y, None, 5.0).unwrap();
        assert!(rejected[12]);
        assert_eq!(rejected.iter().filter(|r| **r).count(), 1);
        assert!((fit.capacity - 663.02).abs() < 5.0, "{}", fit.capacity);
    }

    #[test]
    fn bad_input() {
        assert_eq!(
            fit_logistic(&[1.0, 2.0], &[1.0], None),
            Err(FitError::LengthMismatch)
        );
        assert_eq!(
            fit_logistic(&[1.0, 2.0, 3.0], &[1.0, 2.0, 3.0], None),
            Err(FitError::TooFewPoints(3))
        );
        let mut y = CARLSON.to_vec();
        y[3] = f64::NAN;
        assert_eq!(
            fit_logistic(&hours(), &y, None),
            Err(FitError::NotFinite(3))
        );
        let mut w = vec![1.0; 19];
        w[2] = -1.0;
        assert_eq!(
            fit_logistic(&hours(), &CARLSON, Some(&w)),
            Err(FitError::BadWeight(2))
        );
    }
}
