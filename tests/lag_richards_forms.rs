//! The estimator's default family, `LagRichards`, against the published
//! forms it joins: Baranyi & Roberts (1994) — with ν = 1 it is their model
//! with the logistic's deceleration (curvature m = 1), the closed form
//! checked against their ODE in `baranyi_ode.rs` — and Richards (1959),
//! whose inflection lies at K (1 + ν)^(−1/ν). Sources in REFERENCES.md.

use plateau::model::{LagRichards, OnlineFamily};
use plateau::{Baranyi, GrowthCurve, Population};

/// Invented: start 0.02 OD, capacity 1.5 OD, μ 0.7 per h, lag λ = h0/μ.
fn pair(lag_h: f64) -> (LagRichards<f64>, Population<Baranyi<f64>, f64>) {
    let (y0, k, mu) = (0.02_f64, 1.5_f64, 0.7_f64);
    let h0 = mu * lag_h;
    let baranyi = Population::new(Baranyi::new((k / y0).ln(), mu, lag_h).unwrap(), y0).unwrap();
    // ν = 1: f(0) = K s(−μτ) = y0 gives τ = ln(K/y0 − 1)/μ.
    let tau = (k / y0 - 1.0).ln() / mu;
    (LagRichards::new(k, mu, tau, 1.0, h0).unwrap(), baranyi)
}

/// With ν = 1 the family is Baranyi & Roberts' explicit solution (on the
/// population, N = N0 e^y) to rounding, lag or no lag.
#[test]
fn shape_one_is_the_baranyi_roberts_model() {
    for lag_h in [0.01, 1.5, 4.0] {
        let (ours, theirs) = pair(lag_h);
        for i in 0..=300 {
            let t = f64::from(i) * 0.1;
            let (a, b) = (ours.value(t), theirs.value(t));
            assert!((a / b - 1.0).abs() < 1e-9, "λ {lag_h}, t {t}: {a} vs {b}");
        }
    }
}

/// The largest specific rate and the tangent lag (Zwietering et al. 1990's
/// construction on ln N) found by the family's searches agree with the same
/// constructions done numerically on Baranyi & Roberts' curve: a fine grid
/// for the largest d ln N/dt, the tangent there back to ln N0. (It is not
/// their λ = h0/μmax: when the end of the lag overlaps the crowding, as with
/// K/N0 = 75 here, the largest rate stays below μmax and its tangent meets
/// ln N0 earlier — 2.27 h for a 3 h λ.)
#[test]
fn tangent_lag_and_max_rate_match_baranyi() {
    for lag_h in [0.5, 1.5, 3.0, 4.0] {
        let (ours, theirs) = pair(lag_h);
        let theta = ours.theta();
        let ln = |t: f64| theirs.value(t).ln();
        let h = 1e-4;
        let (mut best, mut t_best) = (0.0, 0.0);
        for i in 0..=30_000 {
            let t = f64::from(i) * 1e-3;
            let rate = (ln(t + h) - ln((t - h).max(0.0))) / (t + h - (t - h).max(0.0));
            if rate > best {
                (best, t_best) = (rate, t);
            }
        }
        let (rate, _, t_star) = ours.max_specific_rate(&theta);
        assert!(
            (rate / best - 1.0).abs() < 1e-5,
            "λ {lag_h}: μmax {rate} vs {best}"
        );
        assert!(
            (t_star - t_best).abs() < 0.02,
            "λ {lag_h}: at {t_star} vs {t_best}"
        );
        assert!(rate <= theirs.max_specific_rate_per_h() + 1e-12);
        let tangent = t_best - (ln(t_best) - ln(0.0)) / best;
        let (lag, _) = ours.tangent_lag(&theta).unwrap();
        assert!(
            (lag - tangent).abs() < 1e-3,
            "λ {lag_h}: tangent {lag} vs {tangent}"
        );
    }
}

/// Richards (1959): f^ν follows a logistic, so the inflection of f lies at
/// f = K (1 + ν)^(−1/ν) for every shape (K/2 for the logistic, K/e in the
/// Gompertz limit ν → 0).
#[test]
fn inflection_is_at_richards_level() {
    for nu in [0.2, 0.5, 1.0, 2.0, 4.0] {
        let curve = LagRichards::<f64>::new(1.5, 0.7, 10.0, nu, 1e-6).unwrap();
        let (t, _) = curve.inflection(&curve.theta());
        let want = 1.5 * (1.0 + nu).powf(-1.0 / nu);
        let got = curve.value(t);
        assert!((got / want - 1.0).abs() < 1e-6, "ν {nu}: {got} vs {want}");
    }
}

/// The family's gradient in θ against central differences of its value
/// (the definition of the derivative), and its time to a level against
/// its value (an inverse), on a lagged, asymmetric curve.
#[test]
fn gradient_and_inverse_are_consistent() {
    let curve = LagRichards::<f64>::new(2.0, 0.9, 9.0, 0.4, 2.5).unwrap();
    let theta = curve.theta();
    for i in 0..=40 {
        let t = f64::from(i) * 0.5;
        let (f, g, _) = curve.eval(t);
        for (j, gj) in g.iter().enumerate() {
            let h = 1e-6;
            let (mut up, mut down) = (theta, theta);
            up[j] += h;
            down[j] -= h;
            let d = (LagRichards::from_theta(&up).value(t)
                - LagRichards::from_theta(&down).value(t))
                / (2.0 * h);
            assert!(
                (d - gj).abs() < 1e-6 * (1.0 + f),
                "t {t}, θ{j}: {d} vs {gj}"
            );
        }
        if f > 1e-6 && f < 1.999 {
            let back = curve.time_to_level(f).unwrap();
            assert!((back - t).abs() < 1e-7, "t {t}: {back}");
        }
    }
}
