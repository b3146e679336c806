//! The exact one-step transitions: composition, agreement with the closed
//! forms, agreement with the differential equations they solve, and their
//! analytic partial derivatives against central finite differences.
//!
//! Sources: the logistic reciprocal recursion u(t+Δ) = a u(t) + (1 − a)/K,
//! a = e^(−rΔ) (REFERENCES.md); Zwietering et al. 1990 (Appl. Environ. Microbiol.
//! 56:1875–1881) for the Gompertz and Richards forms the steps must follow;
//! Baranyi & Roberts 1994 (Int. J. Food Microbiol. 23:277–294) for the Baranyi
//! system. An exact solution of an autonomous equation composes (the flow
//! property, common practice): n steps of Δ/n equal one step of Δ.

mod common;

use common::{assert_close, derivative};
use core::f64::consts::E;
use plateau::model::step::{self, Transition};
use plateau::{Baranyi, Gompertz, GrowthCurve, Logistic, Richards};

/// Invented (y, K, r) sets in signal units and per hour.
const STATES: [(f64, f64, f64); 4] = [
    (0.01, 1.5, 0.7),
    (0.4, 2.0, 0.25),
    (1.9, 2.0, 1.3),
    (3.0, 2.0, 0.5), // above capacity: the curve decays towards K
];
const SHAPES: [f64; 4] = [0.1, 0.5, 1.0, 3.0];

/// Applies `f` n times over `total / n` hours each.
fn compose(mut y: f64, total_h: f64, n: u32, f: impl Fn(f64, f64) -> f64) -> f64 {
    let dt = total_h / f64::from(n);
    for _ in 0..n {
        y = f(y, dt);
    }
    y
}

#[test]
fn many_small_steps_equal_one_big_step() {
    // Flow property of an exact solution (common practice).
    for &(y, k, r) in &STATES {
        for &total in &[0.5, 4.0, 15.0] {
            let one = step::logistic(y, total, k, r).value;
            let many = compose(y, total, 1000, |y, dt| step::logistic(y, dt, k, r).value);
            assert_close(many, one, 1e-11, 0.0, "logistic");
            let one = step::gompertz(y, total, k, r).value;
            let many = compose(y, total, 1000, |y, dt| step::gompertz(y, dt, k, r).value);
            assert_close(many, one, 1e-11, 0.0, "Gompertz");
            for &nu in &SHAPES {
                let one = step::richards(y, total, k, r, nu).value;
                let many = compose(y, total, 1000, |y, dt| {
                    step::richards(y, dt, k, r, nu).value
                });
                assert_close(many, one, 1e-11, 0.0, "Richards");
            }
        }
    }
}

#[test]
fn baranyi_many_small_steps_equal_one_big_step() {
    for &(x, k, mu) in &STATES {
        for &q in &[1e-3, 0.05, 2.0] {
            let (one, q_one) = step::baranyi(x, 12.0, k, mu, q);
            let (mut xs, mut qs) = (x, q);
            for _ in 0..1000 {
                let (s, q2) = step::baranyi(xs, 0.012, k, mu, qs);
                xs = s.value;
                qs = q2;
            }
            assert_close(xs, one.value, 1e-11, 0.0, "Baranyi x");
            assert_close(qs, q_one, 1e-11, 0.0, "Baranyi q");
            // dq/dt = μ q (Baranyi & Roberts 1994): q' = q e^(μΔ).
            assert_close(q_one, q * (mu * 12.0).exp(), 1e-13, 0.0, "q growth");
        }
    }
}

#[test]
fn steps_follow_the_closed_forms() {
    // Logistic (REFERENCES.md), Zwietering's Gompertz and Richards (their ln-scale
    // curves obey dy/dt = b y ln(A/y), b = μm e / A, and
    // dy/dt = (c/ν) y (1 − (y/A)^ν), c = μm (1+ν)^(1+1/ν)/A — differentiate the
    // written-out forms), and Baranyi (x = e^y, q = q0 e^(μ t)).
    let (a, mu, lag) = (5.0, 1.2, 2.0); // invented
    let logistic = Logistic::from_initial(1.5, 0.7, 0.01).unwrap();
    let gompertz = Gompertz::new(a, mu, lag).unwrap();
    let b = mu * E / a;
    let baranyi = Baranyi::from_q0(a, mu, 0.05).unwrap();
    for i in 0..40 {
        let t = f64::from(i) * 0.4;
        for &dt in &[0.05, 1.0, 7.5] {
            let s = step::logistic(logistic.value(t), dt, 1.5, 0.7).value;
            assert_close(s, logistic.value(t + dt), 1e-12, 0.0, "logistic");
            let s = step::gompertz(gompertz.value(t), dt, a, b).value;
            assert_close(s, gompertz.value(t + dt), 1e-11, 1e-300, "Gompertz");
            let q = 0.05 * (mu * t).exp();
            let (s, q2) = step::baranyi(baranyi.value(t).exp(), dt, a.exp(), mu, q);
            assert_close(s.value.ln(), baranyi.value(t + dt), 0.0, 1e-12, "Baranyi");
            assert_close(q2, 0.05 * (mu * (t + dt)).exp(), 1e-13, 0.0, "Baranyi q");
            for &nu in &SHAPES {
                let richards = Richards::new(a, mu, lag, nu).unwrap();
                let c = mu * (1.0 + nu).powf(1.0 + 1.0 / nu) / a;
                let s = step::richards(richards.value(t), dt, a, c, nu).value;
                assert_close(s, richards.value(t + dt), 1e-11, 1e-300, "Richards");
            }
        }
    }
}

#[test]
fn steps_solve_their_differential_equations() {
    // d y'/dΔ must equal the right-hand side of the law at y' (the table in
    // step.rs; logistic and reciprocal form from REFERENCES.md; Gompertz and
    // Richards laws as derived from Zwietering's forms above).
    for &(y, k, r) in &STATES {
        let dt = 1.3;
        let h = 1e-3;
        let check = |f: &dyn Fn(f64) -> f64, rhs: &dyn Fn(f64) -> f64, what: &str| {
            let numeric = derivative(f, dt, h);
            assert_close(numeric, rhs(f(dt)), 1e-8, 1e-12, what);
        };
        check(
            &|d| step::logistic(y, d, k, r).value,
            &|v| r * v * (1.0 - v / k),
            "logistic ODE",
        );
        check(
            &|d| step::gompertz(y, d, k, r).value,
            &|v| r * v * (k / v).ln(),
            "Gompertz ODE",
        );
        for &nu in &SHAPES {
            check(
                &|d| step::richards(y, d, k, r, nu).value,
                &|v| r / nu * v * (1.0 - (v / k).powf(nu)),
                "Richards ODE",
            );
        }
        // Baranyi: dx/dt = μ q/(1+q) (1 − x/xmax) x with q at the end of the step.
        let q0 = 0.05;
        let f = |d: f64| step::baranyi(y, d, k, r, q0).0.value;
        let x = f(dt);
        let q = q0 * (r * dt).exp();
        let expected = r * q / (1.0 + q) * (1.0 - x / k) * x;
        assert_close(derivative(f, dt, h), expected, 1e-8, 1e-12, "Baranyi ODE");
    }
}

/// Checks the four partial derivatives of a transition against central
/// differences of its value in (y, K, r, shape).
fn check_partials(
    what: &str,
    t: Transition<f64>,
    (y, k, r, shape): (f64, f64, f64, f64),
    f: impl Fn(f64, f64, f64, f64) -> f64,
) {
    let rel = 1e-3; // finite-difference step, relative to each argument
    let fd = [
        derivative(|v| f(v, k, r, shape), y, rel * y),
        derivative(|v| f(y, v, r, shape), k, rel * k),
        derivative(|v| f(y, k, v, shape), r, rel * r),
        derivative(|v| f(y, k, r, v), shape, rel * shape),
    ];
    let analytic = [t.d_value, t.d_capacity, t.d_rate, t.d_shape];
    let names = ["d_value", "d_capacity", "d_rate", "d_shape"];
    let scale = fd.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
    for ((a, n), name) in analytic.iter().zip(fd).zip(names) {
        assert_close(*a, n, 1e-7, 1e-10 * scale, &format!("{what} {name}"));
    }
}

#[test]
fn partial_derivatives_match_central_differences() {
    // Definition of the partial derivative (common practice); the finite
    // differences use only the transitions' values.
    for &(y, k, r) in &STATES {
        for &dt in &[0.1, 2.0, 9.0] {
            // The logistic and Gompertz steps have no shape: d_shape must be 0,
            // which the finite difference in an unused argument confirms.
            check_partials(
                "logistic",
                step::logistic(y, dt, k, r),
                (y, k, r, 1.0),
                |y, k, r, _| step::logistic(y, dt, k, r).value,
            );
            check_partials(
                "Gompertz",
                step::gompertz(y, dt, k, r),
                (y, k, r, 1.0),
                |y, k, r, _| step::gompertz(y, dt, k, r).value,
            );
            for &nu in &SHAPES {
                check_partials(
                    &format!("Richards nu={nu}"),
                    step::richards(y, dt, k, r, nu),
                    (y, k, r, nu),
                    |y, k, r, nu| step::richards(y, dt, k, r, nu).value,
                );
            }
            for &q in &[1e-3, 0.05, 2.0] {
                check_partials(
                    &format!("Baranyi y={y} K={k} mu={r} q={q} dt={dt}"),
                    step::baranyi(y, dt, k, r, q).0,
                    (y, k, r, q),
                    |y, k, r, q| step::baranyi(y, dt, k, r, q).0.value,
                );
            }
        }
    }
}
