//! The truth the fleet's shape streams are judged against, checked against
//! closed forms from the published sources named beside each check. Every
//! culture here is INVENTED.

use host_sim::fleet::shapes::{
    Family, ShapeCulture, TRUTH_GRID_H, first_time_at, max_specific_rate_on_grid,
};
use plateau::{Baranyi, Blanked, Gompertz, GrowthCurve, Logistic, Population, Richards};

fn rel(x: f64, want: f64) -> f64 {
    (x / want - 1.0).abs()
}

#[test]
fn logistic_max_specific_rate_is_r() {
    // Verhulst's logistic dy/dt = r y (1 − y/K) (textbook identity): the
    // specific rate d ln y/dt = r (1 − y/K) tends to r far before the
    // midpoint and is largest at the first time of the run.
    let (k, r, tm) = (1.7, 0.83, 9.0);
    let c = Logistic::from_midpoint(k, r, tm).unwrap();
    let far = max_specific_rate_on_grid(&c, 0.0, tm - 30.0 / r, tm + 10.0, TRUTH_GRID_H);
    assert!(rel(far, r) < 1e-6, "{far} vs {r}");
    // From t = 0 the largest is r (1 − y(0)/K), not r.
    let from_zero = max_specific_rate_on_grid(&c, 0.0, 0.0, tm + 10.0, TRUTH_GRID_H);
    let want = r * (1.0 - c.value(0.0) / k);
    assert!(rel(from_zero, want) < 1e-5, "{from_zero} vs {want}");
    assert!(from_zero < r);
}

#[test]
fn logistic_t90_is_midpoint_plus_ln9_over_r() {
    // Logistic identity (textbook): y = 0.9 K at t = t_m + ln 9 / r.
    let (k, r, tm) = (2.2, 0.47, 11.5);
    let c = Logistic::from_midpoint(k, r, tm).unwrap();
    let t90 = first_time_at(&c, 0.9 * k, 0.0, 40.0, 0.01).unwrap();
    let want = tm + 9.0_f64.ln() / r;
    assert!((t90 - want).abs() < 1e-8, "{t90} vs {want}");
}

#[test]
fn blank_is_taken_off_before_the_logarithm() {
    // A logistic read on a blank b: d ln(y − b)/dt is the logistic's
    // r (1 − (y − b)/K) (Verhulst, as above); without taking b off, the
    // specific rate looks smaller, which is the trap an unknown blank sets.
    let (k, r, y0, b) = (1.1, 0.9, 0.015, 0.06);
    let l = Logistic::from_initial(k, r, y0).unwrap();
    let c = Blanked::new(l, b).unwrap();
    let end = l.midpoint_h() + 10.0;
    let with = max_specific_rate_on_grid(&c, b, 0.0, end, TRUTH_GRID_H);
    let want = r * (1.0 - y0 / k);
    assert!(rel(with, want) < 1e-5, "{with} vs {want}");
    let without = max_specific_rate_on_grid(&c, 0.0, 0.0, end, TRUTH_GRID_H);
    assert!(without < 0.9 * want, "{without}");
    // t90 above the blank: t_m + ln 9 / r with t_m = ln((K − y0)/y0) / r.
    let t90 = first_time_at(&c, b + 0.9 * k, 0.0, end, 0.01).unwrap();
    let t_m = ((k - y0) / y0).ln() / r;
    assert!((t90 - (t_m + 9.0_f64.ln() / r)).abs() < 1e-8);
}

#[test]
fn zwietering_gompertz_max_slope_of_ln_is_mu_m() {
    // Zwietering et al. (1990), Appl. Environ. Microbiol. 56:1875: the
    // modified Gompertz y = A exp(−exp(μm e (λ − t)/A + 1)) on y = ln(N/N0)
    // has maximum slope μm by construction, and y reaches a level L at
    // t = λ + A (1 − ln(−ln(L/A))) / (μm e).
    let (n0, a, mu, lag): (f64, f64, f64, f64) = (0.02, (1.5_f64 / 0.02).ln(), 0.74, 2.1);
    let c = Population::new(Gompertz::new(a, mu, lag).unwrap(), n0).unwrap();
    let got = max_specific_rate_on_grid(&c, 0.0, 0.0, 40.0, TRUTH_GRID_H);
    assert!(rel(got, mu) < 1e-6, "{got} vs {mu}");
    // 90 % of capacity N0 e^A on the OD scale is the level A + ln 0.9 of y.
    let level = a + 0.9_f64.ln();
    let want = lag + a * (1.0 - (-(level / a).ln()).ln()) / (mu * std::f64::consts::E);
    let t90 = first_time_at(&c, 0.9 * n0 * a.exp(), 0.0, 40.0, 0.01).unwrap();
    assert!((t90 - want).abs() < 1e-8, "{t90} vs {want}");
}

#[test]
fn zwietering_richards_max_slope_of_ln_is_mu_m_for_both_shoulders() {
    // Zwietering et al. (1990): the reparameterised Richards (1959) curve
    // on ln(N/N0) has maximum slope μm for every shape ν.
    for nu in [0.15, 0.4, 0.6, 1.6, 2.5, 4.0] {
        let (n0, a, mu) = (0.015, (2.0_f64 / 0.015).ln(), 1.1);
        let c = Population::new(Richards::new(a, mu, 0.0, nu).unwrap(), n0).unwrap();
        let got = max_specific_rate_on_grid(&c, 0.0, 0.0, 30.0, TRUTH_GRID_H);
        assert!(rel(got, mu) < 1e-6, "ν {nu}: {got} vs {mu}");
    }
}

#[test]
fn baranyi_specific_rate_matches_the_model_equations() {
    // Baranyi & Roberts (1994), Int. J. Food Microbiol. 23:277: the specific
    // rate is d ln x/dt = μmax · q/(1+q) · (1 − x/xmax), q = q0 e^(μmax t),
    // q0 = 1/(e^h0 − 1), h0 = μmax λ. Its largest value over the run, taken
    // from the model equations, must equal the finite-difference maximum of
    // the closed-form solution; it stays below μmax (both factors < 1).
    let (x0, xmax, mu, lag): (f64, f64, f64, f64) = (0.02, 1.2, 0.9, 3.0);
    let a = (xmax / x0).ln();
    let b = Baranyi::new(a, mu, lag).unwrap();
    let c = Population::new(b, x0).unwrap();
    let grid = max_specific_rate_on_grid(&c, 0.0, 0.0, 30.0, TRUTH_GRID_H);
    let q0 = 1.0 / ((mu * lag).exp() - 1.0);
    let from_model = (0..=30_000)
        .map(|i| {
            let t = f64::from(i) * 1e-3;
            let q = q0 * (mu * t).exp();
            mu * q / (1.0 + q) * (1.0 - c.value(t) / xmax)
        })
        .fold(f64::NEG_INFINITY, f64::max);
    assert!(rel(grid, from_model) < 1e-5, "{grid} vs {from_model}");
    assert!(grid < mu);
    // With a vast capacity the largest specific rate approaches μmax.
    let big = Population::new(Baranyi::new(40.0, mu, lag).unwrap(), x0).unwrap();
    let far = max_specific_rate_on_grid(&big, 0.0, 0.0, 30.0, TRUTH_GRID_H);
    assert!(rel(far, mu) < 1e-4, "{far} vs {mu}");
}

#[test]
fn cultures_start_where_drawn_and_stay_in_their_ranges() {
    for family in Family::ALL {
        for i in 0..6 {
            let c = ShapeCulture::draw(11, family, i);
            assert_eq!(c, ShapeCulture::draw(11, family, i));
            assert!((0.8..2.5).contains(&c.capacity_od));
            assert!((0.4..1.2).contains(&c.mu_max_per_h));
            let curve = c.truth_curve();
            // OD above the blank at the first reading is the drawn start.
            assert!(
                rel(curve.value(0.0) - c.blank_od, c.start_od) < 1e-9,
                "{c:?}"
            );
            let t = c.truth();
            assert!(rel(t.capacity_od, c.capacity_od) < 1e-12, "{c:?}");
            // The run reaches 99 % of capacity and goes on for the tail.
            assert!(curve.value(t.end_h) - c.blank_od > 0.99 * c.capacity_od);
            assert!(t.t90_h > 0.0 && t.t90_h < t.end_h);
            match family {
                Family::RichardsSlow => assert!((0.15..0.6).contains(&c.shape)),
                Family::RichardsSharp => assert!((1.6..4.0).contains(&c.shape)),
                Family::Gompertz => assert!((0.5..3.0).contains(&c.lag_h)),
                Family::Baranyi => assert!((1.5..4.0).contains(&c.lag_h)),
                Family::BlankedLogistic => assert!((0.03..0.08).contains(&c.blank_od)),
            }
            // Zwietering's forms: the largest specific rate is μm (their
            // inflection on ln lies inside the run); the logistic's is
            // r (1 − y0/K) from t = 0 (Verhulst, as above).
            match family {
                Family::RichardsSlow | Family::RichardsSharp | Family::Gompertz => {
                    assert!(rel(t.mu_max_per_h, c.mu_max_per_h) < 1e-6, "{c:?} {t:?}");
                    assert_eq!(t.lag_h, Some(c.lag_h));
                }
                Family::Baranyi => {
                    assert!(t.mu_max_per_h < c.mu_max_per_h);
                    assert!(t.mu_max_per_h > 0.6 * c.mu_max_per_h, "{t:?}");
                    assert!((t.lag_h.unwrap() - c.lag_h).abs() < 1e-12);
                }
                Family::BlankedLogistic => {
                    let want = c.mu_max_per_h * (1.0 - c.start_od / c.capacity_od);
                    assert!(rel(t.mu_max_per_h, want) < 1e-5, "{t:?}");
                    assert_eq!(t.lag_h, None);
                    let b = (c.capacity_od - c.start_od) / c.start_od;
                    let t90 = (9.0 * b).ln() / c.mu_max_per_h;
                    assert!((t.t90_h - t90).abs() < 1e-8, "{} vs {t90}", t.t90_h);
                }
            }
        }
    }
}

#[test]
fn readings_are_reproducible_every_five_minutes_with_the_stated_noise() {
    let c = ShapeCulture::draw(5, Family::Gompertz, 2);
    let a = c.readings();
    assert_eq!(a, c.readings());
    let curve = c.truth_curve();
    let end = c.truth().end_h;
    assert!(a.len() > (end / (5.0 / 60.0)) as usize - 2);
    for w in a.windows(2) {
        let dt = w[1].0 - w[0].0;
        assert!((dt - 5.0 / 60.0).abs() <= 0.0041, "{dt}");
    }
    // Standardised residuals against the truth: mean ≈ 0, sd ≈ 1 for
    // sd = 0.003 OD + 1 % of the true reading.
    let z: Vec<f64> = a
        .iter()
        .map(|&(t, y)| {
            let truth = curve.value(t);
            (y - truth) / (0.003 + 0.01 * truth)
        })
        .collect();
    let n = z.len() as f64;
    let mean = z.iter().sum::<f64>() / n;
    let sd = (z.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
    assert!(mean.abs() < 4.0 / n.sqrt(), "mean {mean}");
    assert!((sd - 1.0).abs() < 0.12, "sd {sd}");
}
