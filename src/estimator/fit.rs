//! Weighted Levenberg–Marquardt refit of an online family
//! ([`OnlineFamily`]) to the history buffer: the pieces the estimator's
//! refit is made of. The family supplies the curve, its gradient and its
//! slot averages; this module only knows linear algebra and weights.
//!
//! Parameters in logs (ln K, ln rate, …) keep capacity and rate positive and
//! make the problem better conditioned (Bastin & Dochain 1990 recommend
//! well-scaled parameters for on-line bioprocess estimation [memory]).
//!
//! The P×P normal equations are Jacobi-scaled (unit diagonal) before an
//! `LDLᵀ` solve, which keeps f32 accurate when the parameters' scales differ
//! by orders of magnitude, and makes the damping λ·diag(A) of Marquardt (1963)
//! scale-free.

use super::config::NoiseModel;
use super::history::History;
use crate::Real;
use crate::model::OnlineFamily;
use crate::math::sort_small;

/// A symmetric P×P matrix (the information matrix or the covariance of θ),
/// stored whole; only symmetric updates are made to it.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub(crate) struct Sym<T, const P: usize>(pub(crate) [[T; P]; P]);

impl<T: Real, const P: usize> Sym<T, P> {
    pub(crate) const fn zero() -> Self {
        Self([[T::ZERO; P]; P])
    }

    pub(crate) fn get(&self, i: usize, j: usize) -> T {
        self.0[i][j]
    }

    /// Adds w·g·gᵀ.
    fn add_outer(&mut self, g: &[T; P], w: T) {
        for i in 0..P {
            let wg = w * g[i];
            for j in 0..P {
                self.0[i][j] += wg * g[j];
            }
        }
    }

    /// gᵀ·A·g, never below zero. Computed on g / max|gᵢ| and scaled back,
    /// so a huge g (a fit to absurdly large readings) gives +∞ rather than
    /// ∞ − ∞ = NaN.
    pub(crate) fn quadratic(&self, g: &[T; P]) -> T {
        let (scale, q) = self.scaled_quadratic(g);
        scale * scale * q
    }

    /// The standard deviation along g, √(gᵀ·A·g), finite whenever the
    /// result is: the square root is taken before scaling back, so a huge g
    /// does not overflow the intermediate square (the fuzzer found a fitted
    /// value of 1.3e19 OD whose sd came out NaN).
    pub(crate) fn sd_along(&self, g: &[T; P]) -> T {
        let (scale, q) = self.scaled_quadratic(g);
        scale * q.sqrt()
    }

    /// (s, q) with s = max|gᵢ| and q = (g/s)ᵀ·A·(g/s) clamped at 0.
    fn scaled_quadratic(&self, g: &[T; P]) -> (T, T) {
        let mut scale = T::ZERO;
        for v in g {
            scale = scale.max(v.abs());
        }
        if g.iter().any(|v| v.is_nan()) || !scale.is_finite() {
            // Unknown direction: an infinite spread, which callers filter.
            return (T::INFINITY, T::ONE);
        }
        if !(scale > T::ZERO) {
            return (T::ZERO, T::ZERO);
        }
        let mut u = *g;
        for v in &mut u {
            *v /= scale;
        }
        let au = self.times(&u);
        let mut q = T::ZERO;
        for i in 0..P {
            q += u[i] * au[i];
        }
        (scale, q.max(T::ZERO))
    }

    pub(crate) fn scaled(&self, s: T) -> Self {
        let mut out = *self;
        for row in &mut out.0 {
            for a in row {
                *a *= s;
            }
        }
        out
    }

    /// `self − w·v·vᵀ`.
    pub(crate) fn minus_outer(&self, v: &[T; P], w: T) -> Self {
        let mut out = *self;
        out.add_outer(v, -w);
        out
    }

    /// `self + w·v·vᵀ`.
    pub(crate) fn plus_outer(&self, v: &[T; P], w: T) -> Self {
        let mut out = *self;
        out.add_outer(v, w);
        out
    }

    /// True when finite and safely positive definite: every pivot of the
    /// `LDLᵀ` factorisation of the Jacobi-scaled (unit-diagonal) matrix is
    /// above 64 ε. A pivot there is 1 − R², the share of a parameter's
    /// variance the others do not explain; rounding the entries to `T` moves
    /// it by a few ε, so a smaller pivot may be negative in exact arithmetic
    /// (found by the property tests: an f32 covariance whose pivots were
    /// positive in f32 was indefinite in f64). Sylvester's criterion on the
    /// unscaled minors is cheaper but not robust in f32: the cofactor
    /// determinant cancels catastrophically.
    ///
    /// Diagonal entries must also stay clear of the subnormal range (above
    /// 1 / (MAX · ε), about 2.5e−32 for f32): subnormals carry few
    /// significant bits, and the fuzzer found a covariance of ~1e−40 entries
    /// (a near-noiseless stream with a 1e−6 noise floor) that passed the
    /// pivots but is indefinite in f64.
    pub(crate) fn is_positive_definite(&self) -> bool {
        let margin = T::EPSILON * T::from_f64(64.0);
        let tiny = T::ONE / T::MAX / T::EPSILON;
        self.is_finite()
            && (0..P).all(|i| self.0[i][i] > tiny)
            && self.ldl(T::ZERO).is_some_and(|(_, pivots)| {
                // The Jacobi-scaled matrix's pivots are these divided by the
                // diagonal: the same margin, without square roots.
                (0..P).all(|i| pivots[i] > margin * self.0[i][i])
            })
    }

    /// A·v.
    pub(crate) fn times(&self, v: &[T; P]) -> [T; P] {
        let mut out = [T::ZERO; P];
        for i in 0..P {
            let mut s = T::ZERO;
            for j in 0..P {
                s += self.0[i][j] * v[j];
            }
            out[i] = s;
        }
        out
    }

    pub(crate) fn is_finite(&self) -> bool {
        self.0.iter().all(|row| row.iter().all(|a| a.is_finite()))
    }

    /// `LDLᵀ` factors of `self + damping·I`: unit lower-triangular L (row-major)
    /// and the diagonal D, or `None` when not positive definite. No square
    /// roots, so an approximate `sqrt` (the `fast-math` backend) cannot
    /// spoil the solve.
    fn ldl(&self, damping: T) -> Option<([[T; P]; P], [T; P])> {
        let mut l = [[T::ZERO; P]; P];
        let mut d = [T::ZERO; P];
        for j in 0..P {
            let mut dj = self.get(j, j) + damping;
            for k in 0..j {
                dj -= l[j][k] * l[j][k] * d[k];
            }
            if !(dj > T::ZERO) || !dj.is_finite() {
                return None;
            }
            d[j] = dj;
            l[j][j] = T::ONE;
            for i in j + 1..P {
                let mut v = self.get(i, j);
                for k in 0..j {
                    v -= l[i][k] * l[j][k] * d[k];
                }
                l[i][j] = v / dj;
            }
        }
        Some((l, d))
    }

    /// Solves `(self + damping·D²)·x = b`, D² = diag(self): Marquardt's
    /// scale-free damping, computed on the Jacobi-scaled system.
    pub(crate) fn solve(&self, b: &[T; P], damping: T) -> Option<[T; P]> {
        let d = self.jacobi()?;
        let scaled = self.jacobi_scaled(&d);
        let factors = scaled.ldl(damping)?;
        let mut rhs = *b;
        for i in 0..P {
            rhs[i] /= d[i];
        }
        let mut x = ldl_solve(&factors, &rhs);
        for i in 0..P {
            x[i] /= d[i];
        }
        x.iter().all(|v| v.is_finite()).then_some(x)
    }

    /// The inverse, or `None` when not positive definite.
    pub(crate) fn inverse(&self) -> Option<Self> {
        let d = self.jacobi()?;
        let factors = self.jacobi_scaled(&d).ldl(T::ZERO)?;
        let mut cols = [[T::ZERO; P]; P];
        for (k, col) in cols.iter_mut().enumerate() {
            let mut e = [T::ZERO; P];
            e[k] = T::ONE;
            *col = ldl_solve(&factors, &e);
        }
        let mut out = Self::zero();
        for i in 0..P {
            for j in i..P {
                // Symmetrise against rounding.
                let v = (cols[j][i] + cols[i][j]) * T::HALF / (d[i] * d[j]);
                out.0[i][j] = v;
                out.0[j][i] = v;
            }
        }
        (out.is_finite() && (0..P).all(|i| out.0[i][i] > T::ZERO)).then_some(out)
    }

    fn jacobi(&self) -> Option<[T; P]> {
        let mut d = [T::ZERO; P];
        for i in 0..P {
            let x = self.0[i][i];
            if !(x > T::ZERO && x.is_finite()) {
                return None;
            }
            d[i] = x.sqrt();
        }
        Some(d)
    }

    fn jacobi_scaled(&self, d: &[T; P]) -> Self {
        let mut out = Self::zero();
        for i in 0..P {
            for j in 0..P {
                out.0[i][j] = self.get(i, j) / (d[i] * d[j]);
            }
        }
        out
    }
}

fn ldl_solve<T: Real, const P: usize>((l, d): &([[T; P]; P], [T; P]), b: &[T; P]) -> [T; P] {
    let mut y = [T::ZERO; P];
    for i in 0..P {
        let mut s = b[i];
        for k in 0..i {
            s -= l[i][k] * y[k];
        }
        y[i] = s;
    }
    let mut x = [T::ZERO; P];
    for i in (0..P).rev() {
        let mut s = y[i] / d[i];
        for k in i + 1..P {
            s -= l[k][i] * x[k];
        }
        x[i] = s;
    }
    x
}

/// A standard deviation too large for `T` (a fit to absurd readings, with
/// capacity up to e⁸⁰) reported as `T::MAX`: finite, and plainly "unknown",
/// where the product `K · sd(ln K)` overflowed to +∞ (found by fuzzing).
pub(crate) fn saturate<T: Real>(sd: T) -> T {
    sd.min(T::MAX)
}

/// The result of accumulating the normal equations at θ.
pub(crate) struct Normal<T, const P: usize> {
    /// `JᵀWJ` plus the prior's information.
    pub(crate) info: Sym<T, P>,
    /// `JᵀW`·residual plus the prior's pull.
    pub(crate) gradient: [T; P],
    /// `JᵀW`·1: how θ would move if every reading rose by one signal unit
    /// (through `info⁻¹ · JᵀW·1`), for the unknown-blank spread.
    pub(crate) shift: [T; P],
    /// The objective at θ: weighted sum of squares with these weights, prior
    /// included.
    pub(crate) objective: T,
}

/// A Gaussian prior on θ: mean and information (1 / variance, zero for none)
/// per parameter, from the family ([`OnlineFamily::prior`]).
pub(crate) struct Prior<T, const P: usize> {
    pub(crate) mean: [T; P],
    pub(crate) info: [T; P],
}

impl<T: Real, const P: usize> Prior<T, P> {
    /// Σ infoᵢ (meanᵢ − θᵢ)².
    fn penalty(&self, theta: &[T; P]) -> T {
        let mut sum = T::ZERO;
        for i in 0..P {
            let d = self.mean[i] - theta[i];
            sum += self.info[i] * d * d;
        }
        sum
    }
}

/// Weights and residuals for one pass over the slots. `scale` is the
/// current noise scale, used for the Huber down-weighting of residuals
/// beyond 3 standard deviations (Huber 1964), so a spike that slipped into
/// the buffer cannot drag the fit. Fills `z2` with the squared standardised
/// residuals (before Huber) for [`robust_sse`].
pub(crate) fn accumulate<T: Real, F: OnlineFamily<T, P>, const P: usize, const N: usize>(
    history: &History<T, N>,
    noise: &NoiseModel<T>,
    theta: &[T; P],
    prior: &Prior<T, P>,
    scale: T,
    offset: T,
    panels: &[u8; N],
    weights: &mut [T; N],
    z2: &mut [T; N],
) -> Normal<T, P> {
    let huber = T::from_f64(3.0);
    let cut2 = huber * huber * scale * scale;
    let curve = F::from_theta(theta);
    let mut info = Sym::zero();
    let mut gradient = [T::ZERO; P];
    let mut shift = [T::ZERO; P];
    let mut sse = T::ZERO;
    let n = history.len();
    for (i, weight) in weights.iter_mut().enumerate().take(n) {
        let (mean, y, c) = history.slot(i);
        let (first, last) = history.span(i);
        let (f, g) = curve.slot(mean, first, last, c, panels[i]);
        let sd = noise.sd(f);
        let mut w = T::from_u32(u32::from(c)) / (sd * sd);
        let e = y - offset - f;
        z2[i] = e * e * w;
        if z2[i] > cut2 {
            // Huber: weight × 3 / z; the square root only for outliers.
            w *= huber * scale / z2[i].sqrt();
        }
        *weight = w;
        info.add_outer(&g, w);
        for k in 0..P {
            gradient[k] += w * g[k] * e;
            shift[k] += w * g[k];
        }
        sse += w * e * e;
    }
    for k in 0..P {
        info.0[k][k] += prior.info[k];
        gradient[k] += prior.info[k] * (prior.mean[k] - theta[k]);
    }
    Normal {
        info,
        gradient,
        shift,
        objective: sse + prior.penalty(theta),
    }
}

/// A robust residual sum of squares from the squared standardised residuals
/// `z2` (reordered in place): each share is capped at 9 × s₀², where
/// s₀² = median(z2) / 0.4549 is the median-based scale (0.4549 is the median
/// of a χ² with one degree of freedom, so s₀² ≈ 1 for a right noise model).
/// Spikes in the buffer then cannot inflate the noise scale — and with it the
/// gate for the next spike — and the cap costs under 1 % of efficiency on
/// clean data (E[min(Z², 9)] = 0.995 for normal Z).
pub(crate) fn robust_sse<T: Real>(z2: &mut [T]) -> T {
    let n = z2.len();
    if n == 0 {
        return T::ZERO;
    }
    sort_small(z2);
    let median = if n % 2 == 1 {
        z2[n / 2]
    } else {
        (z2[n / 2 - 1] + z2[n / 2]) * T::HALF
    };
    let cap = T::from_f64(9.0 / 0.4549) * median;
    let mut sse = T::ZERO;
    for &v in z2.iter() {
        sse += v.min(cap);
    }
    sse / T::from_f64(0.995)
}

/// How many panels each slot's average takes at θ (see
/// [`OnlineFamily::panels`]), counted once per refit.
pub(crate) fn panels<T: Real, F: OnlineFamily<T, P>, const P: usize, const N: usize>(
    history: &History<T, N>,
    curve: &F,
) -> [u8; N] {
    let mut out = [1; N];
    for (i, p) in out.iter_mut().enumerate().take(history.len()) {
        let (mean, _, c) = history.slot(i);
        let (first, last) = history.span(i);
        *p = curve.panels(mean, first, last, c);
    }
    out
}

/// Weighted sum of squares at θ with fixed weights, prior included.
pub(crate) fn objective<T: Real, F: OnlineFamily<T, P>, const P: usize, const N: usize>(
    history: &History<T, N>,
    theta: &[T; P],
    prior: &Prior<T, P>,
    offset: T,
    panels: &[u8; N],
    weights: &[T; N],
) -> T {
    let curve = F::from_theta(theta);
    let mut sse = T::ZERO;
    for (i, &w) in weights.iter().enumerate().take(history.len()) {
        let (mean, y, c) = history.slot(i);
        let (first, last) = history.span(i);
        let e = y - offset - curve.slot(mean, first, last, c, panels[i]).0;
        sse += w * e * e;
    }
    sse + prior.penalty(theta)
}

#[cfg(test)]
mod tests {
    use super::Sym;

    // A symmetric positive definite matrix and its inverse, checked by
    // multiplying back (A·A⁻¹ = I, the definition of the inverse).
    #[test]
    fn inverse_and_solve_agree_with_the_definition() {
        let a = Sym([[4.0_f64, 1.0, 0.5], [1.0, 3.0, -0.2], [0.5, -0.2, 2.0]]);
        let inv = a.inverse().unwrap();
        for i in 0..3 {
            for j in 0..3 {
                let mut s = 0.0;
                for k in 0..3 {
                    s += a.get(i, k) * inv.get(k, j);
                }
                let want = if i == j { 1.0 } else { 0.0 };
                assert!((s - want).abs() < 1e-12, "({i},{j}) = {s}");
            }
        }
        let b = [1.0, -2.0, 0.5];
        let x = a.solve(&b, 0.0).unwrap();
        for i in 0..3 {
            let s: f64 = (0..3).map(|k| a.get(i, k) * x[k]).sum();
            assert!((s - b[i]).abs() < 1e-12);
        }
        // Not positive definite: refused, not a NaN.
        let indefinite = Sym([[1.0_f64, 2.0, 0.0], [2.0, 1.0, 0.0], [0.0, 0.0, 1.0]]);
        assert!(indefinite.inverse().is_none());
        assert!(!indefinite.is_positive_definite() && a.is_positive_definite());
    }
}
