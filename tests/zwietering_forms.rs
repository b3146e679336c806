//! Zwietering's logistic, Gompertz and Richards forms against the defining
//! properties of M. H. Zwietering, I. Jongenburger, F. M. Rombouts and
//! K. van 't Riet, "Modeling of the bacterial growth curve", Appl. Environ.
//! Microbiol. 56:1875–1881 (1990): on y = ln(N/N0) each form tends to A, its
//! maximum slope is μm, and the tangent at its inflection crosses y = 0 at
//! t = λ. The written-out forms below are the ones in REFERENCES.md, marked there
//! as recalled from memory; the properties are the paper's definitions, so
//! they are checked numerically (central differences, golden-section search)
//! on the crate's `value` alone, not through its own `slope` or `inflection`.

mod common;

use common::{argmax, assert_close, derivative};
use core::f64::consts::E;
use plateau::{Gompertz, GrowthCurve, Logistic, Richards, ZwieteringLogistic};

/// Invented (A, μm per hour, λ hours) sets: a modest, a slow lag-free and a
/// fast long-lag culture.
const PARAMS: [(f64, f64, f64); 4] = [
    (5.0, 1.2, 2.0),
    (2.3, 0.25, 0.0),
    (9.0, 2.5, 6.5),
    (12.0, 0.6, 30.0),
];

/// Richards shapes ν: Gompertz-like, in between, logistic, and sharper.
const SHAPES: [f64; 5] = [0.05, 0.5, 1.0, 2.0, 5.0];

// REFERENCES.md forms, written out with std's f64 functions as independent references.
fn ref_logistic(a: f64, mu: f64, lag: f64, t: f64) -> f64 {
    a / (1.0 + (4.0 * mu * (lag - t) / a + 2.0).exp())
}
fn ref_gompertz(a: f64, mu: f64, lag: f64, t: f64) -> f64 {
    a * (-(mu * E * (lag - t) / a + 1.0).exp()).exp()
}
fn ref_richards(a: f64, mu: f64, lag: f64, nu: f64, t: f64) -> f64 {
    let c = mu * (1.0 + nu).powf(1.0 + 1.0 / nu) / a;
    a * (1.0 + nu * (1.0 + nu).exp() * (c * (lag - t)).exp()).powf(-1.0 / nu)
}

/// A form behind the trait.
type Curve = Box<dyn GrowthCurve<f64>>;

/// Every form with every parameter set, boxed behind the trait, with its
/// parameters and the independent reference.
struct Case {
    name: String,
    a: f64,
    mu: f64,
    lag: f64,
    curve: Curve,
    reference: Box<dyn Fn(f64) -> f64>,
}

fn cases() -> Vec<Case> {
    let mut out = Vec::new();
    for &(a, mu, lag) in &PARAMS {
        out.push(Case {
            name: format!("logistic {a} {mu} {lag}"),
            a,
            mu,
            lag,
            curve: Box::new(ZwieteringLogistic::new(a, mu, lag).unwrap()),
            reference: Box::new(move |t| ref_logistic(a, mu, lag, t)),
        });
        out.push(Case {
            name: format!("Gompertz {a} {mu} {lag}"),
            a,
            mu,
            lag,
            curve: Box::new(Gompertz::new(a, mu, lag).unwrap()),
            reference: Box::new(move |t| ref_gompertz(a, mu, lag, t)),
        });
        for &nu in &SHAPES {
            out.push(Case {
                name: format!("Richards nu={nu} {a} {mu} {lag}"),
                a,
                mu,
                lag,
                curve: Box::new(Richards::new(a, mu, lag, nu).unwrap()),
                reference: Box::new(move |t| ref_richards(a, mu, lag, nu, t)),
            });
        }
    }
    out
}

/// Time grid from well before the lag to well into the plateau.
fn grid(c: &Case) -> impl Iterator<Item = f64> + '_ {
    let span = c.a / c.mu;
    (-40..=200).map(move |i| c.lag + f64::from(i) * 0.05 * span)
}

/// Finite-difference step: small against the curve's time scale A/μm.
fn step_h(c: &Case) -> f64 {
    1e-3 * c.a / c.mu
}

/// The numerically steepest point of `value`: (time, value, slope).
fn numeric_inflection(c: &Case) -> (f64, f64, f64) {
    let span = c.a / c.mu;
    let h = step_h(c);
    let slope = |t: f64| derivative(|s| c.curve.value(s), t, h);
    let t = argmax(slope, c.lag - span, c.lag + 4.0 * span, 1e-7 * span);
    (t, c.curve.value(t), slope(t))
}

#[test]
fn values_match_the_written_out_forms() {
    // REFERENCES.md forms (Zwietering et al. 1990 [forms from memory]).
    for c in cases() {
        for t in grid(&c) {
            let expected = (c.reference)(t);
            assert_close(c.curve.value(t), expected, 1e-12, 1e-300, &c.name);
        }
    }
}

#[test]
fn each_form_tends_to_a() {
    // Zwietering et al. 1990: y → A as t → ∞, and the curve never exceeds A.
    for c in cases() {
        let late = c.lag + 200.0 * c.a / c.mu;
        assert_close(c.curve.value(late), c.a, 1e-12, 0.0, &c.name);
        for t in grid(&c) {
            let y = c.curve.value(t);
            assert!((0.0..=c.a).contains(&y), "{}: {y} outside [0, A]", c.name);
        }
        assert_close(c.curve.upper_asymptote(), c.a, 0.0, 0.0, &c.name);
    }
}

#[test]
fn maximum_slope_is_mu_m() {
    // Zwietering et al. 1990: the maximum of dy/dt is μm. Found numerically.
    for c in cases() {
        let (_, _, max_slope) = numeric_inflection(&c);
        assert_close(max_slope, c.mu, 1e-8, 0.0, &c.name);
        assert_close(c.curve.max_slope(), c.mu, 1e-12, 0.0, &c.name);
        assert_close(c.curve.max_specific_rate_per_h(), c.mu, 0.0, 0.0, &c.name);
    }
}

#[test]
fn slope_matches_central_differences() {
    // The crate's analytic slope against central differences of its value.
    for c in cases() {
        let h = step_h(&c);
        for t in grid(&c) {
            let numeric = derivative(|s| c.curve.value(s), t, h);
            assert_close(c.curve.slope(t), numeric, 1e-7, 1e-11 * c.mu, &c.name);
        }
    }
}

#[test]
fn tangent_at_the_inflection_crosses_zero_at_lambda() {
    // Zwietering et al. 1990: λ is where the inflection tangent meets y = 0.
    // A small error in the numerical inflection time cancels to first order
    // (the tangent moves along the curve), so the bound can be tight.
    for c in cases() {
        let (t_i, y_i, s_i) = numeric_inflection(&c);
        let lag_numeric = t_i - y_i / s_i;
        let span = c.a / c.mu;
        assert_close(lag_numeric, c.lag, 0.0, 1e-7 * span, &c.name);
        assert_close(c.curve.lag_h(), c.lag, 0.0, 1e-11 * span, &c.name);
    }
}

#[test]
fn inflection_points_of_logistic_and_gompertz() {
    // REFERENCES.md (Zwietering et al. 1990): logistic inflection y = A/2 at
    // λ + A/(2 μm); Gompertz y = A/e at λ + A/(e μm).
    for &(a, mu, lag) in &PARAMS {
        let checks: [(Curve, f64, f64, &str); 2] = [
            (
                Box::new(ZwieteringLogistic::new(a, mu, lag).unwrap()),
                lag + a / (2.0 * mu),
                a / 2.0,
                "logistic",
            ),
            (
                Box::new(Gompertz::new(a, mu, lag).unwrap()),
                lag + a / (E * mu),
                a / E,
                "Gompertz",
            ),
        ];
        for (curve, t_expected, y_expected, name) in checks {
            let i = curve.inflection();
            assert_close(i.time_h, t_expected, 1e-13, 1e-13, name);
            assert_close(i.value, y_expected, 1e-13, 0.0, name);
            assert_close(curve.value(t_expected), y_expected, 1e-12, 0.0, name);
            // And numerically, from the value alone.
            let span = a / mu;
            let t_num = argmax(
                |t| derivative(|s| curve.value(s), t, 1e-3 * span),
                lag - span,
                lag + 4.0 * span,
                1e-9 * span,
            );
            assert_close(t_num, t_expected, 0.0, 1e-4 * span, name);
        }
    }
}

#[test]
fn richards_inflection_agrees_with_the_numerical_one() {
    // Not in REFERENCES.md: setting d²y/dt² = 0 in the Richards form above gives
    // y = A (1 + ν)^(−1/ν) at λ + (1 + ν)/c, c = μm (1+ν)^(1+1/ν)/A (derived
    // here from the written-out form). Checked against a numerical search.
    for c in cases()
        .into_iter()
        .filter(|c| c.name.starts_with("Richards"))
    {
        let (t_num, y_num, _) = numeric_inflection(&c);
        let i = c.curve.inflection();
        let span = c.a / c.mu;
        assert_close(i.time_h, t_num, 0.0, 1e-4 * span, &c.name);
        assert_close(i.value, y_num, 1e-4, 0.0, &c.name);
    }
    for &(a, mu, lag) in &PARAMS {
        for &nu in &SHAPES {
            let r = Richards::new(a, mu, lag, nu).unwrap();
            let cc = mu * (1.0 + nu).powf(1.0 + 1.0 / nu) / a;
            let i = r.inflection();
            assert_close(
                i.value,
                a * (1.0 + nu).powf(-1.0 / nu),
                1e-13,
                0.0,
                "Richards y_i",
            );
            assert_close(
                i.time_h,
                lag + (1.0 + nu) / cc,
                1e-13,
                1e-13,
                "Richards t_i",
            );
        }
    }
}

#[test]
fn richards_reduces_to_logistic_at_nu_one_and_gompertz_as_nu_vanishes() {
    // Substituting ν = 1 in the Richards form gives the logistic form exactly;
    // as ν → 0, (1 + ν W)^(−1/ν) → e^(−W) and (1+ν)^(1+1/ν) → e, the Gompertz
    // form (algebra on the REFERENCES.md forms; the difference is O(ν)).
    for &(a, mu, lag) in &PARAMS {
        let r1 = Richards::new(a, mu, lag, 1.0).unwrap();
        let l = ZwieteringLogistic::new(a, mu, lag).unwrap();
        let r0 = Richards::new(a, mu, lag, 1e-7).unwrap();
        let g = Gompertz::new(a, mu, lag).unwrap();
        for i in -20..=120 {
            let t = lag + f64::from(i) * 0.05 * a / mu;
            assert_close(r1.value(t), l.value(t), 1e-12, 1e-300, "nu = 1");
            assert_close(r0.value(t), g.value(t), 0.0, 1e-5 * a, "nu -> 0");
        }
    }
}

#[test]
fn zwietering_logistic_maps_to_the_plain_logistic() {
    // REFERENCES.md: r = 4 μm / A, midpoint λ + A/(2 μm).
    for &(a, mu, lag) in &PARAMS {
        let z = ZwieteringLogistic::new(a, mu, lag).unwrap();
        let p = Logistic::from_midpoint(a, 4.0 * mu / a, lag + a / (2.0 * mu)).unwrap();
        for i in -40..=200 {
            let t = lag + f64::from(i) * 0.05 * a / mu;
            assert_close(z.value(t), p.value(t), 1e-12, 1e-300, "value");
            assert_close(z.slope(t), p.slope(t), 1e-11, 1e-300, "slope");
        }
        for &frac in &[0.01, 0.3, 0.5, 0.8, 0.99] {
            assert_close(
                z.time_to_reach(frac * a).unwrap(),
                p.time_to_reach(frac * a).unwrap(),
                1e-12,
                1e-12,
                "time_to_reach",
            );
        }
        assert_close(z.lag_h(), p.lag_h(), 1e-12, 1e-12, "lag");
    }
}

#[test]
fn doubling_time_and_early_exponential_line() {
    // The exponential phase of y = ln(N/N0) is the line μm (t − λ) (the
    // tangent of Zwietering et al. 1990); doubling time ln 2 / μm (common
    // practice).
    for c in cases() {
        assert_close(
            c.curve.doubling_time_h(),
            2.0_f64.ln() / c.mu,
            1e-15,
            0.0,
            &c.name,
        );
        let t = c.lag + 0.3 * c.a / c.mu;
        assert_close(
            c.curve.early_exponential(t),
            c.mu * (t - c.lag),
            1e-14,
            0.0,
            &c.name,
        );
        assert_close(
            c.curve.early_exponential(c.lag - 1.0),
            0.0,
            0.0,
            0.0,
            &c.name,
        );
        // Relative error on the population: e^(line − y) − 1.
        let expected = (c.mu * (t - c.lag) - (c.reference)(t)).exp() - 1.0;
        assert_close(
            c.curve.early_exponential_relative_error(t),
            expected,
            1e-9,
            1e-15,
            &c.name,
        );
    }
}
