//! Property tests: `time_to_reach` inverts `value` across the valid parameter
//! space (f64), and answers every level — inside the range, outside it, or not
//! a number — without panicking, with an error for levels it cannot reach.
//!
//! Property: a strictly increasing curve y(t) has an inverse, so
//! `time_to_reach(value(t)) = t` up to the rounding of `value(t)` divided by the
//! slope (the condition number of the inverse; common practice). Ranges are
//! invented to cover what a culture can plausibly show and beyond.

mod common;

use common::inverse_time_tolerance;
use plateau::{Baranyi, Error, Gompertz, GrowthCurve, Logistic, Richards, ZwieteringLogistic};
use proptest::prelude::*;

/// At most 256 cases per property keeps the suite quick on two cores.
fn config() -> ProptestConfig {
    ProptestConfig::with_cases(256)
}

/// A positive number spread evenly in log scale over [lo, hi].
fn log_uniform(lo: f64, hi: f64) -> impl Strategy<Value = f64> {
    (lo.ln()..=hi.ln()).prop_map(f64::exp)
}

/// Checks `time_to_reach(value(t)) ≈ t` with the conditioning-aware tolerance.
fn check_round_trip<C: GrowthCurve<f64>>(
    curve: &C,
    t_h: f64,
    time_scale_h: f64,
    value_scale: f64,
) -> Result<(), TestCaseError> {
    let level = curve.value(t_h);
    // Levels that rounded onto an asymptote have no unique time; the
    // strategies below keep these rare.
    prop_assume!(level > curve.lower_asymptote() && level < curve.upper_asymptote());
    // The crate's slope only scales the tolerance; it is checked against
    // central differences in the other test files.
    let slope = curve.slope(t_h);
    prop_assume!(slope > 0.0);
    let tol = inverse_time_tolerance(t_h, time_scale_h, level, value_scale, slope);
    let back = curve.time_to_reach(level);
    prop_assert!(back.is_ok(), "level {level:e} at t = {t_h}: {back:?}");
    let back = back.unwrap();
    prop_assert!(
        (back - t_h).abs() <= tol,
        "t = {t_h}, level {level:e}, back {back}, |diff| {:e} > tol {tol:e}",
        (back - t_h).abs()
    );
    Ok(())
}

/// Any level: outside the open range → the right error; inside → a time at
/// which the curve is at that level (or, for a numerical search only,
/// `NoConvergence`); never a panic.
///
/// `value_scale(t)` is the size of the intermediate terms the value at t is
/// formed from by subtraction (see `inverse_time_tolerance`); the value is
/// only meaningful to a few ulps of it.
fn check_any_level<C: GrowthCurve<f64> + core::fmt::Debug>(
    curve: &C,
    level: f64,
    closed_form: bool,
    value_scale: impl Fn(f64) -> f64,
) -> Result<(), TestCaseError> {
    let (lo, hi) = (curve.lower_asymptote(), curve.upper_asymptote());
    let got = curve.time_to_reach(level);
    if !level.is_finite() {
        prop_assert_eq!(got, Err(Error::NotFinite { parameter: "level" }));
    } else if level <= lo || level >= hi {
        prop_assert_eq!(got, Err(Error::LevelNotReached));
    } else {
        match got {
            Ok(t) => {
                prop_assert!(t.is_finite(), "{curve:?}, level {level:e}: t = {t}");
                let y = curve.value(t);
                prop_assert!(
                    (y - level).abs()
                        <= 1e-9 * level.abs() + 64.0 * f64::EPSILON * (hi + value_scale(t)),
                    "{curve:?}, level {level:e}: value({t}) = {y:e}"
                );
            }
            Err(Error::NoConvergence) if !closed_form => {}
            Err(e) => prop_assert!(false, "level {level:e} in range: {e:?}"),
        }
    }
    Ok(())
}

/// Levels anywhere: far out, at and near the asymptotes, inside, non-finite.
fn any_level(hi: f64) -> impl Strategy<Value = f64> {
    prop_oneof![
        any::<f64>(),
        Just(0.0),
        Just(hi),
        Just(f64::NAN),
        Just(f64::INFINITY),
        Just(f64::NEG_INFINITY),
        (0.0..=1.0_f64).prop_map(move |p| p * hi),
        (0.0..=1e-6_f64).prop_map(move |p| hi * (1.0 - p)),
        (0.0..=1e-6_f64).prop_map(move |p| hi * (1.0 + p)),
        log_uniform(1e-300, 1e-3),
        Just(1e-310), // subnormal
        (-1e6..0.0_f64),
    ]
}

proptest! {
    #![proptest_config(config())]

    #[test]
    fn logistic_inverts_its_value(
        k in log_uniform(1e-3, 1e3),
        r in log_uniform(1e-2, 10.0),
        midpoint in -50.0..50.0_f64,
        s in -15.0..15.0_f64,
    ) {
        // REFERENCES.md logistic; t in ±15/r around the midpoint (y/K from 3e-7 to 1 − 3e-7).
        let c = Logistic::from_midpoint(k, r, midpoint).unwrap();
        let t = midpoint + s / r;
        check_round_trip(&c, t, midpoint.abs() + (1.0 + s.abs()) / r, 0.0)?;
    }

    #[test]
    fn zwietering_logistic_inverts_its_value(
        a in log_uniform(0.1, 20.0),
        mu in log_uniform(1e-2, 5.0),
        lag in 0.0..50.0_f64,
        s in -0.5..4.0_f64,
    ) {
        // Zwietering et al. 1990 logistic; t from λ − A/(2μm) to λ + 4 A/μm.
        let c = ZwieteringLogistic::new(a, mu, lag).unwrap();
        let t = lag + s * a / mu;
        check_round_trip(&c, t, lag + (1.0 + s.abs()) * a / mu, 0.0)?;
    }

    #[test]
    fn gompertz_inverts_its_value(
        a in log_uniform(0.1, 20.0),
        mu in log_uniform(1e-2, 5.0),
        lag in 0.0..50.0_f64,
        s in -0.5..4.0_f64,
    ) {
        // Zwietering et al. 1990 Gompertz.
        let c = Gompertz::new(a, mu, lag).unwrap();
        let t = lag + s * a / mu;
        check_round_trip(&c, t, lag + (1.0 + s.abs()) * a / mu, 0.0)?;
    }

    #[test]
    fn richards_inverts_its_value(
        a in log_uniform(0.1, 20.0),
        mu in log_uniform(1e-2, 5.0),
        lag in 0.0..50.0_f64,
        nu in log_uniform(0.1, 5.0),
        s in -0.5..2.0_f64,
    ) {
        // Zwietering et al. 1990 Richards.
        let c = Richards::new(a, mu, lag, nu).unwrap();
        let t = lag + s * a / mu;
        check_round_trip(&c, t, lag + (1.0 + s.abs()) * a / mu, 0.0)?;
    }

    #[test]
    fn baranyi_inverts_its_value(
        a in log_uniform(0.5, 20.0),
        mu in log_uniform(5e-2, 5.0),
        h0 in 0.0..10.0_f64,
        frac in log_uniform(1e-3, 1.0),
    ) {
        // Baranyi & Roberts 1994; t from just after 0 to past the plateau
        // (the numerical search, not a closed form, inverts it).
        let c = Baranyi::from_h0(a, mu, h0).unwrap();
        let end = (h0 + 2.0 * a + 5.0) / mu;
        let t = frac * end;
        // The value is μ t plus a logarithm near −μ t (the lag adjustment),
        // so its rounding is a few ulps of μ t + h0, not of the level.
        check_round_trip(&c, t, end, mu * t + h0)?;
    }

    #[test]
    fn every_level_is_answered_without_panic(
        a in log_uniform(0.1, 20.0),
        mu in log_uniform(1e-2, 5.0),
        lag in 0.0..50.0_f64,
        nu in log_uniform(0.1, 5.0),
        level_fraction in any_level(1.0),
    ) {
        let level = level_fraction * a;
        let none = |_: f64| 0.0;
        check_any_level(&Logistic::from_midpoint(a, mu, lag).unwrap(), level, true, none)?;
        check_any_level(&ZwieteringLogistic::new(a, mu, lag).unwrap(), level, true, none)?;
        check_any_level(&Gompertz::new(a, mu, lag).unwrap(), level, true, none)?;
        check_any_level(&Richards::new(a, mu, lag, nu).unwrap(), level, true, none)?;
        // Baranyi's value is μ t plus a logarithm near −μ t in the lag phase
        // (h0 = μ λ), so it resolves levels only down to a few ulps of μ t + h0.
        let baranyi = Baranyi::new(a, mu, lag).unwrap();
        check_any_level(&baranyi, level, false, |t| mu * t.abs() + baranyi.h0())?;
    }
}

#[test]
fn out_of_range_levels_are_errors() {
    // Plain cases, independent of the random search: at, beyond and below the
    // asymptotes, and non-finite, for every family.
    let curves: [Box<dyn GrowthCurve<f64>>; 5] = [
        Box::new(Logistic::from_midpoint(2.0, 0.5, 6.0).unwrap()),
        Box::new(ZwieteringLogistic::new(5.0, 1.2, 2.0).unwrap()),
        Box::new(Gompertz::new(5.0, 1.2, 2.0).unwrap()),
        Box::new(Richards::new(5.0, 1.2, 2.0, 0.7).unwrap()),
        Box::new(Baranyi::new(5.0, 1.2, 2.0).unwrap()),
    ];
    for c in &curves {
        let top = c.upper_asymptote();
        for level in [0.0, -1.0, top, top * 1.5, f64::MAX] {
            assert_eq!(
                c.time_to_reach(level),
                Err(Error::LevelNotReached),
                "{level}"
            );
        }
        for level in [f64::NAN, f64::INFINITY, f64::NEG_INFINITY] {
            assert_eq!(
                c.time_to_reach(level),
                Err(Error::NotFinite { parameter: "level" })
            );
        }
    }
}
