//! The plain logistic y = K / (1 + B e^(−r t)) against its textbook identities.
//!
//! Source for every identity here unless a check says otherwise: the logistic
//! entry of `/work/shared/REFERENCES.md` (inflection at K/2 at t* = ln(B)/r, maximum
//! slope rK/4, symmetry about (t*, K/2), time to a fraction p of K
//! t* + ln(p/(1−p))/r, 10 % → 90 % in ln 81 / r, early phase (K/B) e^(r t) with
//! relative error about y/K, per-capita rate r(1 − y/K), and the exact
//! reciprocal recursion). Reference values are computed in the tests with
//! `std`'s `f64` functions, not with the crate's math backend.

mod common;

use common::{argmax, assert_close, derivative};
use plateau::{Error, GrowthCurve, Logistic};

/// Invented cultures (capacity in OD or counts, rate per hour, y0 at t = 0),
/// plus the Carlson (1913) least-squares fit quoted in REFERENCES.md.
const CASES: [(f64, f64, f64); 5] = [
    (1.5, 0.7, 0.01),
    (2.0, 0.8, 0.02),
    (0.35, 2.4, 0.001),
    (40.0, 0.05, 30.0),
    // Carlson yeast fit: K = 663.02, r = 0.54699, B = 71.58 (REFERENCES.md).
    (663.02, 0.54699, 663.02 / (1.0 + 71.58)),
];

fn curves() -> impl Iterator<Item = (f64, f64, f64, Logistic<f64>)> {
    CASES.iter().map(|&(k, r, y0)| {
        let b = (k - y0) / y0;
        (k, r, b, Logistic::from_b(k, r, b).unwrap())
    })
}

/// The published form written out with std's exp, as an independent reference.
fn reference(k: f64, r: f64, b: f64, t: f64) -> f64 {
    k / (1.0 + b * (-r * t).exp())
}

#[test]
fn values_match_the_published_form() {
    // REFERENCES.md: y = K / (1 + B e^(−r t)).
    for (k, r, b, c) in curves() {
        for i in -40..=80 {
            let t = f64::from(i) * 0.5 / r;
            assert_close(c.value(t), reference(k, r, b, t), 1e-13, 0.0, "value");
        }
    }
}

#[test]
fn inflection_is_half_capacity_at_ln_b_over_r() {
    // REFERENCES.md: inflection at y = K/2, t* = ln(B)/r.
    for (k, r, b, c) in curves() {
        let t_star = b.ln() / r;
        let i = c.inflection();
        assert_close(i.time_h, t_star, 1e-12, 1e-12, "inflection time");
        assert_close(i.value, k / 2.0, 1e-15, 0.0, "inflection value");
        assert_close(c.value(t_star), k / 2.0, 1e-13, 0.0, "value at t*");
        // Numerically: the steepest point of the reference curve is at t*.
        let h = 1e-3 / r;
        let t_num = argmax(
            |t| derivative(|s| reference(k, r, b, s), t, h),
            t_star - 5.0 / r,
            t_star + 5.0 / r,
            1e-9 / r,
        );
        assert_close(t_num, t_star, 0.0, 1e-4 / r, "numerical inflection");
    }
}

#[test]
fn carlson_fit_midpoint_matches_ln_b_over_r() {
    // REFERENCES.md quotes K = 663.02, r = 0.54699, B = 71.58 and, separately, the
    // midpoint 7.808 h. t* = ln(B)/r must reproduce it to the published digits.
    let c = Logistic::from_b(663.02, 0.54699, 71.58).unwrap();
    assert_close(c.midpoint_h(), 7.808, 0.0, 6e-4, "Carlson midpoint");
}

#[test]
fn carlson_fit_reproduces_the_published_residual_sum_of_squares() {
    // Carlson (1913) yeast data and the unweighted least-squares fit with
    // SSE 194.33 (REFERENCES.md). The quoted parameters are rounded, so the SSE at
    // them may exceed the minimum by a hair, never fall below it by more than
    // the rounding of "194.33".
    let data = [
        9.6, 18.3, 29.0, 47.2, 71.1, 119.1, 174.6, 257.3, 350.7, 441.0, 513.3, 559.7, 594.8, 629.4,
        640.8, 651.1, 655.9, 659.6, 661.8,
    ];
    let c = Logistic::from_b(663.02, 0.54699, 71.58).unwrap();
    let sse: f64 = data
        .iter()
        .zip(0_u32..)
        .map(|(&y, hour)| (y - c.value(f64::from(hour))).powi(2))
        .sum();
    assert!((194.325..194.6).contains(&sse), "SSE {sse}");
    // Residual sd sqrt(SSE / 16) = 3.485 (REFERENCES.md).
    assert_close((sse / 16.0).sqrt(), 3.485, 0.0, 2e-3, "residual sd");
}

#[test]
fn pearl_logistic_for_carlson_data_is_a_from_b_curve() {
    // Pearl's logistic for the Carlson data, y = 665 / (1 + e^(4.1896 − 0.5355 t))
    // (REFERENCES.md, [memory]): B = e^4.1896, r = 0.5355, and its midpoint
    // 4.1896 / 0.5355 h. Written out by hand against the crate's form.
    let c = Logistic::from_b(665.0, 0.5355, 4.1896_f64.exp()).unwrap();
    assert_close(
        c.midpoint_h(),
        4.1896 / 0.5355,
        1e-14,
        0.0,
        "Pearl midpoint",
    );
    for hour in 0..=18 {
        let t = f64::from(hour);
        let pearl = 665.0 / (1.0 + (4.1896 - 0.5355 * t).exp());
        assert_close(c.value(t), pearl, 1e-13, 0.0, "Pearl curve");
    }
}

#[test]
fn maximum_slope_is_r_k_over_four() {
    // REFERENCES.md: maximum slope rK/4. Checked numerically (central differences
    // of the reference) as well as through the crate's `slope`.
    for (k, r, b, c) in curves() {
        let expected = r * k / 4.0;
        assert_close(c.max_slope(), expected, 1e-14, 0.0, "max_slope");
        let t_star = b.ln() / r;
        let h = 1e-3 / r;
        assert_close(
            derivative(|s| reference(k, r, b, s), t_star, h),
            expected,
            1e-9,
            0.0,
            "numerical slope at t*",
        );
        for i in -60..=60 {
            let t = t_star + f64::from(i) * 0.2 / r;
            let numeric = derivative(|s| reference(k, r, b, s), t, h);
            assert!(
                numeric <= expected * (1.0 + 1e-9),
                "slope above rK/4 at {t}"
            );
            assert_close(c.slope(t), numeric, 1e-8, 1e-12 * expected, "slope");
        }
    }
}

#[test]
fn curve_is_point_symmetric_about_the_inflection() {
    // REFERENCES.md: symmetric about (t*, K/2): y(t* + s) + y(t* − s) = K.
    for (k, r, b, c) in curves() {
        let t_star = b.ln() / r;
        for i in 1..=50 {
            let s = f64::from(i) * 0.3 / r;
            assert_close(
                c.value(t_star + s) + c.value(t_star - s),
                k,
                1e-13,
                0.0,
                "symmetry",
            );
            assert_close(
                c.slope(t_star + s),
                c.slope(t_star - s),
                1e-9,
                0.0,
                "slope symmetry",
            );
        }
    }
}

#[test]
fn time_to_a_fraction_and_the_10_to_90_rise() {
    // REFERENCES.md: time to p·K is t* + ln(p/(1−p))/r; 10 % → 90 % takes ln 81 / r.
    for (k, r, b, c) in curves() {
        let t_star = b.ln() / r;
        for &p in &[1e-6_f64, 0.01, 0.1, 0.25, 0.5, 0.75, 0.9, 0.99, 0.999_999] {
            let expected = t_star + (p / (1.0 - p)).ln() / r;
            let got = c.time_to_reach(p * k).unwrap();
            assert_close(got, expected, 1e-12, 1e-9 / r, "time to fraction");
            assert_close(
                reference(k, r, b, expected),
                p * k,
                1e-9,
                0.0,
                "value there",
            );
        }
        let rise = c.time_to_reach(0.9 * k).unwrap() - c.time_to_reach(0.1 * k).unwrap();
        assert_close(rise, 81.0_f64.ln() / r, 1e-12, 0.0, "10-90 rise");
        assert_close(
            c.rise_time_10_90_h(),
            81.0_f64.ln() / r,
            1e-14,
            0.0,
            "rise_time_10_90_h",
        );
    }
}

#[test]
fn early_phase_is_exponential_with_relative_error_about_y_over_k() {
    // REFERENCES.md: early phase y ≈ (K/B) e^(r t), relative error about y/K.
    for (k, r, b, c) in curves() {
        for &frac in &[1e-6_f64, 1e-4, 1e-3, 1e-2, 0.05, 0.1] {
            // The time at which the reference reaches frac·K.
            let t = (b * frac / (1.0 - frac)).ln() / r;
            let approx = k / b * (r * t).exp();
            assert_close(
                c.early_exponential(t),
                approx,
                1e-12,
                0.0,
                "early_exponential",
            );
            let truth = reference(k, r, b, t);
            let rel = approx / truth - 1.0;
            // "About y/K": y/K to first order, within (y/K)² (exactly y/(K − y)).
            assert!(
                (rel - truth / k).abs() <= 2.0 * (truth / k).powi(2) + 1e-12,
                "relative error {rel} vs y/K {}",
                truth / k
            );
            assert_close(
                c.early_exponential_relative_error(t),
                rel,
                1e-9,
                1e-15,
                "early_exponential_relative_error",
            );
        }
    }
}

#[test]
fn per_capita_rate_and_doubling_time() {
    // REFERENCES.md: per-capita rate r(1 − y/K); doubling time ln 2 / r for the
    // early exponential phase (common practice).
    for (k, r, b, c) in curves() {
        for i in -20..=20 {
            let t = b.ln() / r + f64::from(i) * 0.4 / r;
            let y = reference(k, r, b, t);
            let numeric = derivative(|s| reference(k, r, b, s), t, 1e-3 / r) / y;
            assert_close(
                numeric,
                r * (1.0 - y / k),
                1e-8,
                1e-12 * r,
                "per-capita rate",
            );
        }
        assert_close(
            c.doubling_time_h(),
            2.0_f64.ln() / r,
            1e-15,
            0.0,
            "doubling time",
        );
    }
}

#[test]
fn reciprocal_obeys_the_exact_linear_recursion() {
    // REFERENCES.md: u = 1/y gives u(t+Δ) = a u(t) + (1 − a)/K, a = e^(−rΔ), exactly.
    for (k, r, _, c) in curves() {
        for &dt in &[0.01, 0.5, 3.0, 20.0] {
            let a = (-r * dt).exp();
            for i in -10..=20 {
                let t = f64::from(i) / r;
                let u_next = a / c.value(t) + (1.0 - a) / k;
                assert_close(1.0 / u_next, c.value(t + dt), 1e-12, 0.0, "recursion");
            }
        }
    }
}

#[test]
fn tangent_lag_is_where_the_tangent_at_t_star_meets_zero() {
    // Tangent construction (common practice; Zwietering et al. 1990 define λ
    // this way): t* − (K/2)/(rK/4) = t* − 2/r.
    for (_, r, b, c) in curves() {
        assert_close(c.lag_h(), b.ln() / r - 2.0 / r, 1e-12, 1e-12, "lag");
    }
}

#[test]
fn parameterisations_convert_losslessly() {
    // REFERENCES.md: B = (K − y0)/y0 and t* = ln(B)/r; round trips through the
    // three constructors must agree to rounding.
    for &(k, r, y0) in &CASES {
        let b = (k - y0) / y0;
        let from_initial = Logistic::from_initial(k, r, y0).unwrap();
        let from_b = Logistic::from_b(k, r, b).unwrap();
        let from_mid = Logistic::from_midpoint(k, r, b.ln() / r).unwrap();
        for c in [from_initial, from_b, from_mid] {
            assert_close(c.initial_value(), y0, 1e-13, 0.0, "y0");
            assert_close(c.b(), b, 1e-13, 0.0, "B");
            assert_close(c.midpoint_h(), b.ln() / r, 1e-14, 1e-15, "midpoint");
            assert_close(c.capacity(), k, 0.0, 0.0, "capacity");
            assert_close(c.rate_per_h(), r, 0.0, 0.0, "rate");
        }
        // Second round trip: midpoint → B → initial → midpoint.
        let again = Logistic::from_initial(k, r, from_mid.initial_value()).unwrap();
        let again = Logistic::from_b(k, r, again.b()).unwrap();
        assert_close(
            again.midpoint_h(),
            from_mid.midpoint_h(),
            1e-13,
            1e-14,
            "round trip",
        );
    }
}

#[test]
fn constructors_name_the_bad_parameter() {
    assert_eq!(
        Logistic::from_initial(1.0, 0.5, 1.0),
        Err(Error::OutOfRange {
            parameter: "initial"
        })
    );
    assert_eq!(
        Logistic::from_midpoint(1.0, -0.5, 1.0),
        Err(Error::NotPositive {
            parameter: "rate_per_h"
        })
    );
    assert_eq!(
        Logistic::from_b(1.0, 0.5, f64::NAN),
        Err(Error::NotFinite { parameter: "b" })
    );
}
