//! `host-sim demo`: the built-in invented culture, its batch fit and a
//! side-by-side summary.
//!
//! The culture is invented (see `scenarios/demo.toml`): logistic growth to
//! 1.5 OD at 0.7 per hour with its midpoint at 8 h, read every 5 minutes for
//! 20 h with noise 0.003 OD + 1 % and a few bubbles. The summary is a table of
//! quantities against sources — the closed-form truth, the batch fit and the
//! online estimate the device's `f32` estimator holds after the last reading
//! — followed by the culture monitor's phases and saturation alert.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use anyhow::{Context, Result};
use plateau::GrowthCurve;

use plateau::{Estimate, Event, Measured, Outcome};

use crate::batch::{LogisticFit, fit_logistic, fit_logistic_trimmed};
use crate::online::{self, Settings, Step};
use crate::plot::{BandCurve, Marker, Phase, PlotData, PlotPoint};
use crate::scenario::{Kind, Reading, Scenario, generate};

/// The demo scenario file, built in.
pub const DEMO_SCENARIO: &str = include_str!("../scenarios/demo.toml");

/// The fraction of capacity whose crossing time the summary reports.
pub const TARGET_FRACTION: f64 = 0.9;

/// A value with an optional standard deviation, in the unit of its row.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Value {
    /// The value.
    pub value: f64,
    /// Its standard deviation, if the source gives one.
    pub sd: Option<f64>,
}

impl Value {
    fn exact(value: f64) -> Self {
        Self { value, sd: None }
    }
}

/// What the summary reports about one growth curve.
///
/// Units: capacity OD; rate per hour; times hours.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct CurveSummary {
    /// Capacity (plateau), OD units.
    pub capacity_od: Value,
    /// Maximum specific growth rate, per hour.
    pub rate_per_h: Value,
    /// Doubling time ln 2 / rate, hours.
    pub doubling_time_h: Value,
    /// Lag by the tangent construction on ln OD, hours from the first
    /// reading: where the exponential-phase line through the inflection,
    /// ln y = ln K − r (`t_m` − t), meets the starting level (the estimator's
    /// definition; exact for the logistic).
    pub lag_h: Value,
    /// Time to reach [`TARGET_FRACTION`] of the capacity, hours.
    pub time_to_target_h: Value,
}

impl CurveSummary {
    /// Exact values of a closed-form curve (no sds); the lag from its value
    /// at `start_h`, the first reading.
    ///
    /// # Errors
    ///
    /// The curve never reaches the target level.
    pub fn of_curve(curve: &dyn GrowthCurve<f64>, start_h: f64) -> Result<Self> {
        let capacity = curve.upper_asymptote();
        let rate = curve.max_specific_rate_per_h();
        let y0 = curve.value(start_h);
        Ok(Self {
            capacity_od: Value::exact(capacity),
            rate_per_h: Value::exact(rate),
            doubling_time_h: Value::exact(curve.doubling_time_h()),
            lag_h: Value::exact(curve.inflection().time_h - (capacity / y0).ln() / rate - start_h),
            time_to_target_h: Value::exact(
                curve
                    .time_to_reach(TARGET_FRACTION * capacity)
                    .map_err(|e| anyhow::anyhow!("time to target: {e}"))?,
            ),
        })
    }

    /// The batch fit's values with delta-method sds. The lag takes the
    /// starting level as the device does, `start_od` (the median of the
    /// first three readings, whose sd is `start_sd_od`), from `start_h`; its
    /// sd includes the starting level's (the median of three normal readings
    /// has variance (π/2)·sd²/3, a textbook result).
    ///
    /// # Errors
    ///
    /// Never in practice (the fitted curve always reaches 90 % of its own
    /// capacity); kept fallible like [`of_curve`](Self::of_curve).
    pub fn of_fit(
        fit: &LogisticFit,
        start_h: f64,
        start_od: f64,
        start_sd_od: f64,
    ) -> Result<Self> {
        let exact = Self::of_curve(&fit.curve(), start_h)?;
        let (k, r, tm) = (fit.capacity, fit.rate_per_h, fit.midpoint_h);
        let ln_target = (TARGET_FRACTION / (1.0 - TARGET_FRACTION)).ln();
        let with = |v: Value, gradient: [f64; 3]| Value {
            value: v.value,
            sd: Some(fit.sd_of(gradient)),
        };
        // λ = t_m − ln(K / y0) / r − start: ∂/∂K = −1/(rK),
        // ∂/∂r = ln(K/y0)/r², ∂/∂t_m = 1, ∂/∂ln y0 = 1/r.
        let log_ratio = (k / start_od).ln();
        let var_ln_y0 = std::f64::consts::FRAC_PI_2 / 3.0 * (start_sd_od / start_od).powi(2);
        let lag_fit_sd = fit.sd_of([-1.0 / (r * k), log_ratio / (r * r), 1.0]);
        let lag = Value {
            value: tm - log_ratio / r - start_h,
            sd: Some((lag_fit_sd.powi(2) + var_ln_y0 / (r * r)).sqrt()),
        };
        Ok(Self {
            capacity_od: with(exact.capacity_od, [1.0, 0.0, 0.0]),
            rate_per_h: with(exact.rate_per_h, [0.0, 1.0, 0.0]),
            // ln 2 / r
            doubling_time_h: with(
                exact.doubling_time_h,
                [0.0, -std::f64::consts::LN_2 / (r * r), 0.0],
            ),
            lag_h: lag,
            // t_m + ln(p / (1 − p)) / r
            time_to_target_h: with(exact.time_to_target_h, [0.0, -ln_target / (r * r), 1.0]),
        })
    }

    /// The online estimate's values with their sds. The capacity is the
    /// fitted one even when the estimator would not yet publish it; the lag
    /// is NaN while the estimator gives none.
    #[must_use]
    pub fn of_estimate(e: &Estimate<f32>) -> Self {
        let m = |m: Measured<f32>| Value {
            value: f64::from(m.value),
            sd: Some(f64::from(m.sd)),
        };
        let nan = Value {
            value: f64::NAN,
            sd: None,
        };
        Self {
            capacity_od: m(e.capacity.unwrap_or_else(|| e.capacity_unchecked())),
            rate_per_h: m(e.rate_per_h),
            doubling_time_h: m(e.doubling_time_h),
            lag_h: e.lag_h.map_or(nan, m),
            time_to_target_h: e
                .time_to_fraction(crate::online::to_device(TARGET_FRACTION))
                .map_or(nan, m),
        }
    }

    fn rows(&self) -> [(&'static str, Value, usize); 5] {
        [
            ("capacity (OD)", self.capacity_od, 4),
            ("growth rate (per h)", self.rate_per_h, 4),
            ("doubling time (h)", self.doubling_time_h, 3),
            ("lag, tangent on ln OD (h)", self.lag_h, 2),
            ("time to 90 % of capacity (h)", self.time_to_target_h, 2),
        ]
    }
}

/// One source in the summary table.
#[derive(Clone, Debug, PartialEq)]
pub struct Column {
    /// Header, such as "truth" or "batch fit".
    pub name: String,
    /// Its values.
    pub summary: CurveSummary,
}

/// The summary table: quantities down, sources across.
#[derive(Clone, Debug, PartialEq, Default)]
pub struct Summary {
    /// The sources, left to right.
    pub columns: Vec<Column>,
}

impl Summary {
    /// The table as aligned text.
    #[must_use]
    pub fn render(&self) -> String {
        const FIRST: usize = 30;
        const WIDTH: usize = 22;
        let mut out = format!("{:<FIRST$}", "");
        for c in &self.columns {
            let _ = write!(out, "{:>WIDTH$}", c.name);
        }
        out.push('\n');
        let _ = writeln!(out, "{}", "-".repeat(FIRST + WIDTH * self.columns.len()));
        let rows: Vec<_> = self.columns.iter().map(|c| c.summary.rows()).collect();
        if let Some(first) = rows.first() {
            for (i, (label, _, _)) in first.iter().enumerate() {
                let _ = write!(out, "{label:<FIRST$}");
                for r in &rows {
                    let (_, v, digits) = r[i];
                    let cell = match v.sd {
                        Some(sd) => format!("{:.digits$} ± {:.digits$}", v.value, sd),
                        None => format!("{:.digits$}", v.value),
                    };
                    let _ = write!(out, "{cell:>WIDTH$}");
                }
                out.push('\n');
            }
        }
        out
    }
}

/// Where the demo writes.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct DemoPaths {
    /// The readings as CSV.
    pub csv: PathBuf,
    /// The plot as SVG.
    pub svg: PathBuf,
}

impl DemoPaths {
    /// `demo.csv` and `demo.svg` inside `dir`.
    #[must_use]
    pub fn in_dir(dir: &Path) -> Self {
        Self {
            csv: dir.join("demo.csv"),
            svg: dir.join("demo.svg"),
        }
    }
}

/// Everything the demo computed.
#[derive(Clone, Debug)]
pub struct DemoReport {
    /// The scenario that was run.
    pub scenario: Scenario,
    /// The generated readings.
    pub readings: Vec<Reading>,
    /// The batch fit.
    pub fit: LogisticFit,
    /// Per reading: set aside by the batch fit as an outlier.
    pub rejected: Vec<bool>,
    /// The device's estimator and monitor, reading by reading.
    pub steps: Vec<Step>,
    /// Truth, batch fit and online estimate side by side.
    pub summary: Summary,
    /// The plot that was written.
    pub plot: PlotData,
}

/// Fits the logistic to readings the way the demo does: an unweighted fit
/// gives predicted values ŷ, weights 1 / (floor + fraction · ŷ)² follow the
/// scenario's noise model, and the weighted fit sets aside readings more than
/// 4 robust sds off the curve.
///
/// Units: times hours, OD units; `floor_od` OD units, `fraction`
/// dimensionless.
///
/// # Errors
///
/// The fit fails (see [`crate::batch::FitError`]).
pub fn batch_fit(
    readings: &[Reading],
    floor_od: f64,
    fraction: f64,
) -> Result<(LogisticFit, Vec<bool>)> {
    let t: Vec<f64> = readings.iter().map(|r| r.time_h).collect();
    let y: Vec<f64> = readings.iter().map(|r| r.od).collect();
    let first = fit_logistic(&t, &y, None)?;
    let curve = first.curve();
    let w: Vec<f64> = t
        .iter()
        .map(|&ti| {
            let sd = floor_od + fraction * curve.value(ti);
            if sd > 0.0 { 1.0 / (sd * sd) } else { 1.0 }
        })
        .collect();
    Ok(fit_logistic_trimmed(&t, &y, Some(&w), 4.0)?)
}

/// Runs `scenario` (whose model must be the logistic for the comparison to
/// be like with like), fits it, writes the CSV and SVG atomically, and
/// returns the report.
///
/// # Errors
///
/// The scenario is invalid, the fit fails, or a file cannot be written.
pub fn run(scenario: &Scenario, paths: &DemoPaths) -> Result<DemoReport> {
    let readings = generate(scenario)?;
    let (fit, rejected) = batch_fit(&readings, scenario.noise.floor_od, scenario.noise.fraction)
        .context("batch fit of the demo stream")?;
    let truth = crate::scenario::Truth::new(scenario)?;
    let curve = scenario.truth()?;
    // The device, configured with the scenario's noise model and blank.
    let settings = Settings {
        noise_floor_od: Some(scenario.noise.floor_od),
        noise_fraction: Some(scenario.noise.fraction),
        blank_od: Some(scenario.sensor.blank_od.max(0.0)),
        ceiling_od: scenario.sensor.ceiling_od,
        gate_sigma: None,
    };
    let stream: Vec<(f64, f64)> = readings.iter().map(|r| (r.time_h, r.od)).collect();
    let steps = online::run(
        settings.config()?,
        online::monitor_config(TARGET_FRACTION, 1.0)?,
        &stream,
    );
    // The starting level as the device takes it: the median of the first
    // three readings above the blank.
    let start_h = readings.first().map_or(0.0, |r| r.time_h);
    let mut first: Vec<f64> = readings
        .iter()
        .take(3)
        .map(|r| r.od - scenario.sensor.blank_od)
        .collect();
    first.sort_by(f64::total_cmp);
    let y0 = first.get(first.len() / 2).copied().unwrap_or(f64::NAN);
    let start_sd = scenario.noise.floor_od + scenario.noise.fraction * y0.max(0.0);
    let mut columns = vec![
        Column {
            name: "truth".into(),
            summary: CurveSummary::of_curve(curve.as_ref(), start_h)?,
        },
        Column {
            name: "batch fit (± sd)".into(),
            summary: CurveSummary::of_fit(&fit, start_h, y0, start_sd)?,
        },
    ];
    if let Some(e) = steps.last().and_then(|s| s.estimate) {
        columns.push(Column {
            name: "online f32 (± sd)".into(),
            summary: CurveSummary::of_estimate(&e),
        });
    }
    let summary = Summary { columns };
    let plot = plot_data(scenario, &steps, &fit, &truth, &summary);
    crate::log::write_atomically(&paths.csv, |w| crate::scenario::write_csv(&readings, w))?;
    let history: Vec<crate::plot::HistoryPoint> = steps
        .iter()
        .filter(|st| st.time_h.is_finite())
        .map(|st| {
            let e = st.estimate.as_ref();
            crate::plot::HistoryPoint {
                time_h: st.time_h,
                capacity: e.and_then(|e| e.capacity).map(|c| (c.value, c.sd)),
                rate: e.map(|e| (e.rate_per_h.value, e.rate_per_h.sd)),
            }
        })
        .collect();
    let svg = crate::plot::render_with_history(
        &plot,
        &history,
        [
            (Some(summary.columns[0].summary.capacity_od.value), "truth"),
            (Some(summary.columns[0].summary.rate_per_h.value), "truth"),
        ],
        false,
    )?;
    crate::log::write_atomically(&paths.svg, |w| Ok(w.write_all(svg.as_bytes())?))?;
    Ok(DemoReport {
        scenario: scenario.clone(),
        readings,
        fit,
        rejected,
        steps,
        summary,
        plot,
    })
}

/// The monitor's phases as (start, end, phase name) intervals.
#[must_use]
pub fn phase_intervals(steps: &[Step], end_h: f64) -> Vec<(f64, f64, &'static str)> {
    let mut out: Vec<(f64, f64, &'static str)> = Vec::new();
    for s in steps.iter().filter(|s| s.time_h.is_finite()) {
        let name = s.phase.as_str();
        match out.last_mut() {
            Some(last) if last.2 == name => last.1 = s.time_h,
            Some(last) => {
                last.1 = s.time_h;
                out.push((s.time_h, s.time_h, name));
            }
            None => out.push((s.time_h, s.time_h, name)),
        }
    }
    if let Some(last) = out.last_mut() {
        last.1 = last.1.max(end_h);
    }
    out
}

/// Time of the first saturation alert the monitor raised, hours.
#[must_use]
pub fn first_alert_h(steps: &[Step]) -> Option<f64> {
    steps.iter().find_map(|s| {
        s.events
            .iter()
            .any(|e| matches!(e.event, Event::SaturationAlert { .. }))
            .then_some(s.time_h)
    })
}

fn plot_data(
    scenario: &Scenario,
    steps: &[Step],
    fit: &LogisticFit,
    truth: &crate::scenario::Truth,
    summary: &Summary,
) -> PlotData {
    let s = scenario.sampling;
    let end_h = s.start_h + s.duration_h;
    let grid: Vec<f64> = (0..=400)
        .map(|i| s.start_h + s.duration_h * f64::from(i) / 400.0)
        .collect();
    let curve = fit.curve();
    let fit_target = summary.columns[1].summary.time_to_target_h.value;
    let mut estimates = vec![BandCurve {
        label: "batch fit".into(),
        time_h: grid.clone(),
        value: grid.iter().map(|&x| curve.value(x)).collect(),
        sd: grid.iter().map(|&x| fit.value_sd(x)).collect(),
    }];
    if let Some(e) = steps.last().and_then(|s| s.estimate) {
        let at: Vec<_> = grid
            .iter()
            .map(|&x| e.value_at(online::to_device(x)))
            .collect();
        estimates.push(BandCurve {
            label: "online f32 (final)".into(),
            time_h: grid.clone(),
            value: at.iter().map(|m| f64::from(m.value)).collect(),
            sd: at.iter().map(|m| f64::from(m.sd)).collect(),
        });
    }
    let mut markers = vec![Marker {
        time_h: fit_target,
        label: "90 % of capacity (fit)".into(),
    }];
    if let Some(t) = first_alert_h(steps) {
        markers.push(Marker {
            time_h: t,
            label: "saturation alert (monitor)".into(),
        });
    }
    PlotData {
        title: format!("{} — batch fit and online estimate", scenario.name),
        readings: steps
            .iter()
            .map(|st| PlotPoint {
                time_h: st.time_h,
                od: st.value,
                rejected: !st.outcome.is_accepted(),
            })
            .collect(),
        truth: grid.iter().map(|&x| (x, truth.od(x))).collect(),
        estimates,
        markers,
        phases: phase_intervals(steps, end_h)
            .into_iter()
            .map(|(start_h, end_h, name)| Phase {
                start_h,
                end_h,
                label: format!("{name} (monitor)"),
            })
            .collect(),
    }
}

/// The text the `demo` command prints.
#[must_use]
pub fn describe(report: &DemoReport, paths: &DemoPaths) -> String {
    let s = &report.scenario;
    let spikes = report
        .readings
        .iter()
        .filter(|r| r.kind == Kind::Spike)
        .count();
    let set_aside = report.rejected.iter().filter(|r| **r).count();
    let caught = report
        .readings
        .iter()
        .zip(&report.rejected)
        .filter(|(r, rej)| **rej && r.kind == Kind::Spike)
        .count();
    let mut out = String::new();
    let _ = writeln!(out, "plateau host-sim demo: {}", s.name);
    let _ = writeln!(
        out,
        "  INVENTED data, not a measurement. {} readings over {} h, noise {} OD + {} %.",
        report.readings.len(),
        s.sampling.duration_h,
        s.noise.floor_od,
        100.0 * s.noise.fraction
    );
    let _ = writeln!(
        out,
        "  {spikes} bubbles generated; the batch fit set aside {set_aside} reading(s), \
         {caught} of them bubbles.\n"
    );
    out.push_str(&report.summary.render());
    let _ = writeln!(
        out,
        "\n  batch fit: weighted least squares over all readings at once, residual sd {:.2} \
         (in noise sds), {} points.",
        report.fit.residual_sd, report.fit.points
    );
    let online_rejected = report
        .steps
        .iter()
        .filter(|s| !s.outcome.is_accepted())
        .count();
    let online_caught = report
        .steps
        .iter()
        .zip(&report.readings)
        .filter(|(s, r)| r.kind == Kind::Spike && !s.outcome.is_accepted())
        .count();
    let restarts = report
        .steps
        .iter()
        .filter(|s| s.outcome == Outcome::Restarted)
        .count();
    let _ = writeln!(
        out,
        "  online: the device's f32 estimator fed reading by reading; it rejected \
         {online_rejected} reading(s), {online_caught} of them bubbles; {restarts} restart(s)."
    );
    let phases: Vec<String> =
        phase_intervals(&report.steps, s.sampling.start_h + s.sampling.duration_h)
            .iter()
            .map(|(a, _, name)| format!("{name} from {a:.2} h"))
            .collect();
    let _ = writeln!(out, "  monitor phases: {}", phases.join(", "));
    let truth_target = report.summary.columns[0].summary.time_to_target_h.value;
    match first_alert_h(&report.steps) {
        Some(t) => {
            let _ = writeln!(
                out,
                "  saturation alert at {t:.2} h; the truth reaches 90 % of capacity at \
                 {truth_target:.2} h ({:.2} h of warning).",
                truth_target - t
            );
        }
        None => {
            let _ = writeln!(out, "  no saturation alert was raised.");
        }
    }
    let _ = writeln!(
        out,
        "\n  wrote {} (readings) and {} (plot)",
        paths.csv.display(),
        paths.svg.display()
    );
    let _ = writeln!(
        out,
        "  Advisory only: not a validated safety or process control."
    );
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn demo_runs_writes_files_and_the_fit_covers_the_truth() {
        let scenario = Scenario::from_toml(DEMO_SCENARIO).unwrap();
        assert!(DEMO_SCENARIO.contains("INVENTED"));
        let dir = tempfile::tempdir().unwrap();
        let paths = DemoPaths::in_dir(dir.path());
        let report = run(&scenario, &paths).unwrap();
        // 5-minute readings over 20 h: 241.
        assert_eq!(report.readings.len(), 241);
        let truth = &report.summary.columns[0].summary;
        // Closed forms of the invented logistic K = 1.5, r = 0.7, t_m = 8
        // (REFERENCES.md, logistic definitions): doubling ln 2 / r, time to 90 %
        // t_m + ln 9 / r. Lag on ln OD from the first reading t0 (≈ 0):
        // t_m − ln(K / y(t0)) / r − t0 = −ln(1 + e^(−r (t_m − t0))) / r,
        // about −0.0053 h: a logistic has (almost) no lag.
        assert!((truth.capacity_od.value - 1.5).abs() < 1e-12);
        assert!((truth.doubling_time_h.value - 2f64.ln() / 0.7).abs() < 1e-12);
        assert!((truth.lag_h.value + (1.0 + (-5.6f64).exp()).ln() / 0.7).abs() < 1e-4);
        assert!((truth.time_to_target_h.value - (8.0 + 9f64.ln() / 0.7)).abs() < 1e-9);
        // The batch fit lies within 4 of its own sds of the truth.
        let fit = &report.summary.columns[1].summary;
        for (t, f) in [
            (truth.capacity_od, fit.capacity_od),
            (truth.rate_per_h, fit.rate_per_h),
            (truth.lag_h, fit.lag_h),
            (truth.time_to_target_h, fit.time_to_target_h),
        ] {
            let sd = f.sd.unwrap();
            assert!(sd > 0.0);
            assert!((f.value - t.value).abs() < 4.0 * sd, "{f:?} vs {t:?}");
        }
        // The online f32 estimate, third column, also lies within 4 of its
        // own sds of the closed-form truth, and the monitor alerted before
        // the truth reached 90 % of its capacity.
        let online = &report.summary.columns[2].summary;
        for (t, f) in [
            (truth.capacity_od, online.capacity_od),
            (truth.rate_per_h, online.rate_per_h),
            (truth.time_to_target_h, online.time_to_target_h),
        ] {
            let sd = f.sd.unwrap();
            assert!(sd > 0.0);
            assert!((f.value - t.value).abs() < 4.0 * sd, "{f:?} vs {t:?}");
        }
        let alert = first_alert_h(&report.steps).unwrap();
        assert!(alert < truth.time_to_target_h.value, "{alert}");
        assert_eq!(
            phase_intervals(&report.steps, 20.0).last().unwrap().2,
            "stationary"
        );
        // Weighted by the true noise model, σ̂ is near 1 noise sd.
        assert!(
            (0.7..1.3).contains(&report.fit.residual_sd),
            "{}",
            report.fit.residual_sd
        );
        let csv = std::fs::read_to_string(&paths.csv).unwrap();
        assert_eq!(csv.lines().count(), 242);
        let svg = std::fs::read_to_string(&paths.svg).unwrap();
        assert!(svg.contains("</svg>") && svg.len() > 20_000);
        let text = describe(&report, &paths);
        assert!(text.contains("INVENTED"));
        assert!(text.contains("time to 90 % of capacity (h)"));
    }

    #[test]
    fn summary_takes_more_columns() {
        let curve = plateau::Logistic::from_midpoint(1.0, 0.5, 6.0).unwrap();
        let c = CurveSummary::of_curve(&curve, 0.0).unwrap();
        let mut s = Summary::default();
        for name in ["truth", "batch fit", "online"] {
            s.columns.push(Column {
                name: name.into(),
                summary: c,
            });
        }
        let text = s.render();
        let header = text.lines().next().unwrap();
        assert!(header.contains("truth") && header.contains("online"));
        // Every row has one cell per column.
        let row = text.lines().find(|l| l.starts_with("capacity")).unwrap();
        assert_eq!(row.matches("1.0000").count(), 3);
    }

    #[test]
    fn delta_method_sd_matches_finite_differences() {
        // The doubling-time sd from the analytic gradient equals the one from
        // a numerical gradient of ln 2 / r.
        let t: Vec<f64> = (0..30).map(|i| f64::from(i) * 0.5).collect();
        let y: Vec<f64> = t
            .iter()
            .enumerate()
            .map(|(i, &x)| {
                // Invented data: a logistic plus a fixed alternating wiggle.
                1.2 / (1.0 + (-0.6 * (x - 7.0)).exp()) + if i % 2 == 0 { 0.01 } else { -0.01 }
            })
            .collect();
        let fit = fit_logistic(&t, &y, None).unwrap();
        let s = CurveSummary::of_fit(&fit, 0.0, y[0], 0.01).unwrap();
        let h = 1e-6;
        let d = (2f64.ln() / (fit.rate_per_h + h) - 2f64.ln() / (fit.rate_per_h - h)) / (2.0 * h);
        let numeric = d.abs() * fit.rate_sd_per_h;
        let analytic = s.doubling_time_h.sd.unwrap();
        assert!(
            (numeric / analytic - 1.0).abs() < 1e-5,
            "{numeric} {analytic}"
        );
    }
}
