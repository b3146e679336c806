//! `host-sim fleet`'s shape streams: reproducible, judged as documented, and
//! in the text and JSON output beside the existing figures. Every culture is
//! INVENTED.

use std::process::Command;

use host_sim::batch::{BatchFamily, LogisticFamily, fit_family};
use host_sim::fleet::shapes::{self, Family, ShapeCulture, run_culture};
use plateau::{GrowthCurve, Logistic};
use serde_json::Value;

#[test]
fn the_judgement_follows_its_definition() {
    for family in Family::ALL {
        for i in 0..3 {
            let c = ShapeCulture::draw(4, family, i);
            let r = run_culture(&c);
            assert_eq!(r, run_culture(&c), "reproducible");
            assert!(r.readings > 50);
            let lead = r.alert_lead_h;
            assert_eq!(lead, r.alert_h.map(|a| r.truth.t90_h - a));
            // On time: within the 3 h before t90, never after it.
            assert_eq!(
                r.alert_on_time,
                lead.is_some_and(|l| (0.0..=3.0).contains(&l))
            );
            let k = r.online_capacity.expect("an estimate after a whole run");
            assert!(k.value > 0.0 && k.sd > 0.0);
            let b = r.batch_capacity.expect("the batch fit converges");
            // The batch logistic sees what the estimator sees: within 15 %
            // of the capacity above the blank on these shapes.
            assert!((b.value / r.truth.capacity_od - 1.0).abs() < 0.15, "{r:?}");
        }
    }
}

#[test]
fn figures_count_every_culture_once_and_are_reproducible() {
    let a = shapes::run(4, 9);
    let b = shapes::run(4, 9);
    assert_eq!(a, b, "the parallel run is deterministic");
    assert_eq!(a.cultures.len(), 20);
    assert_eq!(a.pooled.runs, 20);
    for f in &a.families {
        let x = f.figures;
        assert_eq!(x.runs, 4);
        let late_or_missing = x.alert_late + x.alert_missing;
        assert_eq!(
            x.alert_on_time + x.alert_early + late_or_missing,
            4,
            "{f:?}"
        );
        for acc in [x.capacity_online, x.mu_max_online] {
            assert!((0.0..=1.0).contains(&acc.coverage));
            assert!(acc.rms_relative >= acc.mean_relative.abs());
        }
    }
    // A different seed gives different cultures.
    assert_ne!(
        a.cultures[0].culture,
        shapes::run(1, 10).cultures[0].culture
    );
}

#[test]
fn family_fit_of_the_logistic_recovers_a_noiseless_curve() {
    // An INVENTED noiseless logistic: least squares must return it exactly,
    // and the plain logistic fitter must agree with the generic one.
    let truth = Logistic::from_midpoint(1.4, 0.65, 8.0).unwrap();
    let t: Vec<f64> = (0..200).map(|i| f64::from(i) * 0.1).collect();
    let y: Vec<f64> = t
        .iter()
        .enumerate()
        .map(|(i, &x)| truth.value(x) + 1e-4 * (f64::from(i as u32) * 1.3).sin())
        .collect();
    let fit = fit_family(&LogisticFamily, &t, &y, None).unwrap();
    assert!((fit.capacity.value / 1.4 - 1.0).abs() < 1e-3, "{fit:?}");
    assert!((fit.max_specific_rate_per_h.value / 0.65 - 1.0).abs() < 1e-3);
    let plain = host_sim::batch::fit_logistic(&t, &y, None).unwrap();
    assert!((plain.capacity - fit.capacity.value).abs() < 1e-9);
    assert!((plain.rate_sd_per_h / fit.max_specific_rate_per_h.sd - 1.0).abs() < 1e-6);
    assert_eq!(LogisticFamily.name(), "logistic");
}

#[test]
fn fleet_output_gains_the_shape_streams_and_keeps_its_keys() {
    let out = Command::new(env!("CARGO_BIN_EXE_host-sim"))
        .args([
            "fleet",
            "--runs",
            "3",
            "--seed",
            "2",
            "--shape-runs",
            "3",
            "--json",
        ])
        .output()
        .unwrap();
    assert!(out.status.success());
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    // The existing keys stay.
    for key in ["runs", "seed", "streams", "monitor", "targets", "data"] {
        assert!(v.get(key).is_some(), "{key}");
    }
    let s = &v["shape_streams"];
    assert_eq!(s["runs_per_family"], 3);
    let families: Vec<&str> = s["families"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| f["family"].as_str().unwrap())
        .collect();
    assert_eq!(
        families,
        [
            "richards_slow",
            "richards_sharp",
            "gompertz_lag",
            "baranyi_lag",
            "logistic_blank"
        ]
    );
    assert_eq!(s["cultures"].as_array().unwrap().len(), 15);
    assert_eq!(s["targets"]["capacity_rms_max_pooled"], 0.015);
    // --shape-runs 0 leaves them out; the text output names them otherwise.
    let off = Command::new(env!("CARGO_BIN_EXE_host-sim"))
        .args(["fleet", "--runs", "2", "--shape-runs", "0", "--json"])
        .output()
        .unwrap();
    let v: Value = serde_json::from_slice(&off.stdout).unwrap();
    assert!(v.get("shape_streams").is_none());
    let text = Command::new(env!("CARGO_BIN_EXE_host-sim"))
        .args(["fleet", "--runs", "2", "--shape-runs", "2"])
        .output()
        .unwrap();
    let text = String::from_utf8(text.stdout).unwrap();
    assert!(text.contains("shape streams: 2 INVENTED cultures per family"));
    assert!(text.contains("baranyi_lag"));
}

#[test]
fn json_names_are_the_table_names() {
    for f in Family::ALL {
        assert_eq!(serde_json::to_value(f).unwrap(), f.name());
    }
}

#[test]
fn the_estimators_family_fitted_in_batch_recovers_its_own_curve() {
    use host_sim::batch::Online;
    use plateau::{LagRichards, OnlineFamily};
    // An INVENTED curve of the estimator's own family (slow shoulder ν 0.5,
    // a lag near the family's prior, h0 = 0.01), read every 5 min from
    // t = 3 h (the family's origin) with a small deterministic wiggle.
    let (k, mu, tau, nu, h0) = (1.6_f64, 0.8_f64, 9.0, 0.5_f64, 0.01_f64);
    let truth = LagRichards::<f64>::new(k, mu, tau, nu, h0).unwrap();
    let c = h0.exp_m1().ln();
    let theta_true = [k.ln(), mu.ln(), tau, nu.ln(), c];
    let origin = 3.0;
    let t: Vec<f64> = (0..360).map(|i| origin + f64::from(i) / 12.0).collect();
    let y: Vec<f64> = t
        .iter()
        .enumerate()
        .map(|(i, &x)| truth.value(x - origin) * (1.0 + 5e-4 * (f64::from(i as u32) * 2.1).sin()))
        .collect();
    let w: Vec<f64> = y.iter().map(|v| (0.003 + 0.01 * v).powi(-2)).collect();
    let family = Online::<LagRichards<f64>>::new(origin);
    assert_eq!(family.name(), "lag-richards");
    // Value and gradient are the family's own, shifted to its origin.
    let (f, g) = family.value_and_gradient(&theta_true, origin + 4.0);
    let (f0, g0, _) = truth.eval(4.0);
    assert!((f - f0).abs() < 1e-12 * f0, "{f} vs {f0}");
    for i in 0..5 {
        assert!((g[i] - g0[i]).abs() < 1e-9 * (1.0 + g0[i].abs()));
    }
    let fit = fit_family(&family, &t, &y, Some(&w)).unwrap();
    // A minimiser: its objective (readings plus the family's prior) is no
    // larger than at the truth.
    let (mean, info) = family.prior(&t, &y).unwrap();
    let objective = |theta: &[f64; 5]| {
        let data: f64 = t
            .iter()
            .zip(&y)
            .zip(&w)
            .map(|((&x, &v), &wi)| wi * (family.value_and_gradient(theta, x).0 - v).powi(2))
            .sum();
        data + (0..5)
            .map(|i| info[i] * (theta[i] - mean[i]).powi(2))
            .sum::<f64>()
    };
    assert!(
        objective(&fit.theta) <= objective(&theta_true) + 1e-9,
        "{fit:?}"
    );
    // μmax: the largest specific rate of the true curve from its origin on.
    let mu_true = (0..20_000)
        .map(|i| truth.specific_rate_per_h(f64::from(i) * 1e-3))
        .fold(f64::NEG_INFINITY, f64::max);
    assert!((fit.capacity.value / k - 1.0).abs() < 2e-3, "{fit:?}");
    let mu_fit = fit.max_specific_rate_per_h.value;
    assert!(
        (mu_fit / mu_true - 1.0).abs() < 1e-2,
        "{mu_fit} vs {mu_true} {fit:?}"
    );
    assert!(fit.capacity.sd > 0.0 && fit.max_specific_rate_per_h.sd > 0.0);
}
