//! Baranyi & Roberts (1994) closed form against a numerical integration of the
//! published equations.
//!
//! Source: J. Baranyi and T. A. Roberts, "A dynamic approach to predicting
//! bacterial growth in food", Int. J. Food Microbiol. 23:277–294 (1994), as
//! quoted in REFERENCES.md: dx/dt = μmax · q/(1+q) · (1 − x/xmax) · x,
//! dq/dt = μmax q, with h0 = μmax λ = ln(1 + 1/q0). The reference integrator is
//! the classical fourth-order Runge–Kutta method (common practice), written
//! here in f64 and run on x and q exactly as published (not on logarithms).

mod common;

use common::assert_close;
use plateau::{Baranyi, GrowthCurve};

/// Right-hand side of the published system, state (x, q).
fn rhs(mu: f64, x_max: f64, x: f64, q: f64) -> (f64, f64) {
    (mu * q / (1.0 + q) * (1.0 - x / x_max) * x, mu * q)
}

/// Classical RK4 from (x0, q0) at t = 0, recording ln x at every whole
/// multiple of `record_every_h`, with `substeps` steps per record interval.
fn rk4_ln_x(
    mu: f64,
    x_max: f64,
    (x0, q0): (f64, f64),
    record_every_h: f64,
    records: usize,
    substeps: u32,
) -> Vec<f64> {
    let h = record_every_h / f64::from(substeps);
    let (mut x, mut q) = (x0, q0);
    let mut out = vec![x.ln()];
    for _ in 0..records {
        for _ in 0..substeps {
            let (k1x, k1q) = rhs(mu, x_max, x, q);
            let (k2x, k2q) = rhs(mu, x_max, x + 0.5 * h * k1x, q + 0.5 * h * k1q);
            let (k3x, k3q) = rhs(mu, x_max, x + 0.5 * h * k2x, q + 0.5 * h * k2q);
            let (k4x, k4q) = rhs(mu, x_max, x + h * k3x, q + h * k3q);
            x += h / 6.0 * (k1x + 2.0 * k2x + 2.0 * k3x + k4x);
            q += h / 6.0 * (k1q + 2.0 * k2q + 2.0 * k3q + k4q);
        }
        out.push(x.ln());
    }
    out
}

/// Steps per record interval so that μmax h ≤ 1e-3.
fn substeps_for(every_h: f64, mu: f64) -> u32 {
    let mut n = 1_u32;
    while every_h * mu / f64::from(n) > 1e-3 {
        n += 1;
    }
    n
}

/// Invented (q0, μmax per hour, ymax − y0) sets: long lag, short lag, almost
/// no lag, a slow culture with little growth, a fast culture with much growth.
const CASES: [(f64, f64, f64); 5] = [
    (0.05, 0.8, 6.0),
    (1e-3, 1.5, 10.0),
    (2.0, 0.3, 3.0),
    (10.0, 2.5, 12.0),
    (0.2, 0.1, 1.5),
];

/// Records over the lag, the exponential phase and well into the plateau.
fn horizon_h(q0: f64, mu: f64, amax: f64) -> f64 {
    let lag = (1.0 + 1.0 / q0).ln() / mu;
    lag + 2.0 * amax / mu + 5.0 / mu
}

#[test]
fn closed_form_matches_rk4_integration_of_the_published_odes() {
    for &(q0, mu, amax) in &CASES {
        let curve = Baranyi::from_q0(amax, mu, q0).unwrap();
        let records = 200;
        let every = horizon_h(q0, mu, amax) / 200.0;
        // The step is chosen so that μmax h ≤ 1e-3; halving it must not move
        // the reference (shows the reference itself is converged).
        let substeps = substeps_for(every, mu);
        let fine = rk4_ln_x(mu, amax.exp(), (1.0, q0), every, records, substeps);
        let finer = rk4_ln_x(mu, amax.exp(), (1.0, q0), every, records, 2 * substeps);
        for (i, (&a, &b)) in fine.iter().zip(&finer).enumerate() {
            assert_close(
                a,
                b,
                0.0,
                1e-11,
                &format!("RK4 self-convergence, record {i}"),
            );
        }
        for (i, &ln_x) in finer.iter().enumerate() {
            let t = every * i as f64;
            // y = ln(x/x0) with x0 = 1.
            assert_close(
                curve.value(t),
                ln_x,
                0.0,
                1e-9,
                &format!("q0 {q0} mu {mu} A {amax}: ln x at t = {t}"),
            );
        }
    }
}

#[test]
fn slope_matches_the_published_right_hand_side() {
    // d ln x / dt = μmax q/(1+q) (1 − x/xmax), q = q0 e^(μmax t); x from the
    // RK4 reference, so nothing here comes from the crate's closed form.
    for &(q0, mu, amax) in &CASES {
        let curve = Baranyi::from_q0(amax, mu, q0).unwrap();
        let every = horizon_h(q0, mu, amax) / 100.0;
        let substeps = substeps_for(every, mu);
        let ln_x = rk4_ln_x(mu, amax.exp(), (1.0, q0), every, 100, substeps);
        for (i, &lx) in ln_x.iter().enumerate() {
            let t = every * i as f64;
            let q = q0 * (mu * t).exp();
            let (dx, _) = rhs(mu, amax.exp(), lx.exp(), q);
            let expected = dx / lx.exp();
            assert_close(curve.slope(t), expected, 1e-8, 1e-12 * mu, "slope");
        }
    }
}

#[test]
fn lag_and_q0_parameterisations_agree() {
    // h0 = μmax λ = ln(1 + 1/q0) (Baranyi & Roberts 1994, REFERENCES.md).
    for &(q0, mu, amax) in &CASES {
        let h0 = (1.0 + 1.0 / q0).ln();
        let by_q0 = Baranyi::from_q0(amax, mu, q0).unwrap();
        let by_lag = Baranyi::new(amax, mu, h0 / mu).unwrap();
        let by_h0 = Baranyi::from_h0(amax, mu, h0).unwrap();
        assert_close(by_q0.h0(), h0, 1e-14, 0.0, "h0");
        assert_close(by_q0.q0(), q0, 1e-12, 0.0, "q0 round trip");
        assert_close(by_q0.lag_param_h(), h0 / mu, 1e-14, 0.0, "lambda");
        for i in 0..=50 {
            let t = f64::from(i) * horizon_h(q0, mu, amax) / 50.0;
            assert_close(by_lag.value(t), by_q0.value(t), 1e-12, 1e-14, "lag vs q0");
            assert_close(by_h0.value(t), by_q0.value(t), 1e-12, 1e-14, "h0 vs q0");
        }
    }
}

#[test]
fn without_lag_the_model_is_the_logistic_in_x() {
    // h0 = 0 (q0 → ∞) makes q/(1+q) = 1, so x follows the plain logistic
    // dx/dt = μmax (1 − x/xmax) x (Baranyi & Roberts 1994 with q0 → ∞); its
    // solution is x = xmax / (1 + (xmax/x0 − 1) e^(−μmax t)) (REFERENCES.md, logistic).
    for &(_, mu, amax) in &CASES {
        let curve = Baranyi::from_h0(amax, mu, 0.0).unwrap();
        let x_max = amax.exp();
        for i in 0..=60 {
            let t = f64::from(i) * 0.25 / mu;
            let x = x_max / (1.0 + (x_max - 1.0) * (-mu * t).exp());
            assert_close(curve.value(t), x.ln(), 1e-12, 1e-14, "h0 = 0");
        }
    }
}

#[test]
fn exponential_phase_is_the_line_mu_t_minus_h0() {
    // From the explicit solution (REFERENCES.md): for μmax t ≫ h0 and before the
    // plateau, μmax A(t) → μmax t − h0, so y → μmax t − h0. Large ymax − y0
    // keeps the plateau term negligible; the remaining error is e^(h0 − μmax t).
    for &(q0, mu, _) in &CASES {
        let h0 = (1.0 + 1.0 / q0).ln();
        let curve = Baranyi::from_q0(40.0, mu, q0).unwrap();
        let t = (h0 + 15.0) / mu;
        assert_close(curve.value(t), mu * t - h0, 0.0, 1e-6, "exponential line");
        assert_close(
            curve.early_exponential(t),
            mu * t - h0,
            1e-14,
            0.0,
            "early line",
        );
        // And the slope there is μmax (Baranyi & Roberts 1994: μmax is the
        // maximum specific rate of the exponential phase).
        assert_close(curve.slope(t), mu, 1e-6, 0.0, "slope in exp. phase");
    }
}
