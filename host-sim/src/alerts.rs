//! The monitor's benchmark: saturation-alert timing, false alerts, forecast
//! error and phase sequences over a Monte Carlo of seeded invented cultures.
//!
//! Every culture is INVENTED: a logistic with capacity 0.8–3 OD, rate
//! 0.3–1.5 per hour and midpoint 5–12 h, read every 5 minutes (±1 minute
//! jitter) with noise 0.003 OD + 1 % and 2 % bubbles of about +0.2 OD. The
//! truth is the closed form, so the true 90 % crossing is
//! t_m + ln 9 / r and the true inflection t_m (REFERENCES.md logistic identities).

use plateau::{EstimatorConfig, Event, GrowthCurve, Logistic, MonitorConfig, Phase, Watch};
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use serde::Serialize;

/// One invented culture of the benchmark.
#[derive(Clone, Copy, Debug)]
pub struct Culture {
    /// Capacity, OD units.
    pub capacity_od: f64,
    /// Rate, per hour.
    pub rate_per_h: f64,
    /// Midpoint, hours.
    pub midpoint_h: f64,
    /// Seed of its noise.
    pub seed: u64,
}

impl Culture {
    /// Draws culture number `index` of the fleet seeded by `seed`.
    #[must_use]
    pub fn draw(seed: u64, index: u64) -> Self {
        let mut rng = ChaCha8Rng::seed_from_u64(seed ^ (index.wrapping_mul(0x9E37_79B9_7F4A_7C15)));
        Self {
            capacity_od: rng.random_range(0.8..3.0),
            rate_per_h: rng.random_range(0.3..1.5),
            midpoint_h: rng.random_range(5.0..12.0),
            seed: rng.random(),
        }
    }

    /// The culture's closed-form curve.
    #[must_use]
    pub fn curve(&self) -> Logistic<f64> {
        Logistic::from_midpoint(self.capacity_od, self.rate_per_h, self.midpoint_h)
            .expect("drawn parameters are positive and finite")
    }

    /// True OD at `t_h` hours.
    #[must_use]
    pub fn od(&self, t_h: f64) -> f64 {
        self.curve().value(t_h)
    }

    /// Time at which the culture reaches the fraction `p` (0 < p < 1) of
    /// capacity, hours.
    #[must_use]
    pub fn time_to_fraction(&self, p: f64) -> f64 {
        self.curve()
            .time_to_reach(p * self.capacity_od)
            .expect("a fraction strictly between 0 and 1 is reached")
    }

    /// Readings (time h, OD) every 5 minutes from 0 to `end_h`, with noise,
    /// jitter and bubbles (`bubbles` = false for a clean stream).
    #[must_use]
    pub fn readings(&self, end_h: f64, bubbles: bool) -> Vec<(f64, f64)> {
        let mut rng = ChaCha8Rng::seed_from_u64(self.seed);
        let curve = self.curve();
        let mut out = Vec::new();
        let mut i = 0_u32;
        loop {
            let nominal = f64::from(i) * 5.0 / 60.0;
            i += 1;
            if nominal > end_h {
                return out;
            }
            let t = nominal + rng.random_range(-1.0..1.0) / 60.0;
            let truth = curve.value(t);
            let z: f64 = StandardNormal.sample(&mut rng);
            let mut y = truth + (0.003 + 0.01 * truth) * z;
            let bubble: f64 = rng.random();
            if bubbles && bubble < 0.02 {
                y += rng.random_range(0.1..0.3);
            }
            out.push((t.max(0.0), y.max(0.0)));
        }
    }
}

/// The figures the monitor is judged by.
#[derive(Clone, Debug, Default, Serialize)]
pub struct AlertFigures {
    /// Cultures run to their plateau.
    pub runs: usize,
    /// Runs whose first saturation alert came before the true 90 % crossing.
    pub alert_before_crossing: usize,
    /// Runs whose alert came more than lead + 2 h before the crossing.
    pub alert_too_early: usize,
    /// Runs with no alert at all.
    pub alert_missing: usize,
    /// Median of (crossing − alert), hours.
    pub median_alert_lead_h: f64,
    /// Smallest (crossing − alert), hours.
    pub min_alert_lead_h: f64,
    /// Largest (crossing − alert), hours.
    pub max_alert_lead_h: f64,
    /// Runs that ended while still exponential (at 10 % of capacity).
    pub exponential_runs: usize,
    /// Saturation alerts raised on those runs (should be 0).
    pub false_alerts: usize,
    /// Median absolute error of the forecast time to 90 % made at the true
    /// inflection, hours.
    pub forecast_90_median_abs_error_h: f64,
    /// Fraction of runs whose 95 % forecast interval covered the truth.
    pub forecast_90_coverage: f64,
    /// Runs with no forecast at the inflection (capacity not yet in sight).
    pub forecast_missing: usize,
    /// Clean runs whose phase changes were exactly lag → exponential →
    /// deceleration → stationary, each once.
    pub phase_sequence_correct: usize,
    /// Clean runs checked for the phase sequence.
    pub phase_runs: usize,
}

fn median(values: &mut [f64]) -> f64 {
    if values.is_empty() {
        return f64::NAN;
    }
    values.sort_by(f64::total_cmp);
    let n = values.len();
    if n % 2 == 1 {
        values[n / 2]
    } else {
        0.5 * (values[n / 2 - 1] + values[n / 2])
    }
}

/// Result of one culture run to its plateau.
struct PlateauRun {
    alert_lead_h: Option<f64>,
    forecast_error_h: Option<(f64, bool)>,
}

#[allow(clippy::cast_possible_truncation)]
fn run_to_plateau(culture: &Culture, lead_h: f64) -> PlateauRun {
    let crossing = culture.time_to_fraction(0.9);
    let end = culture.time_to_fraction(0.99) + 2.0;
    let config = MonitorConfig::new()
        .saturation_alert(0.9, lead_h as f32)
        .expect("valid");
    let mut watch: Watch = Watch::new(EstimatorConfig::new(), config);
    let mut alert = None;
    let mut forecast = None;
    let mut asked = false;
    for (t, y) in culture.readings(end, true) {
        watch.update(t as f32, y as f32);
        while let Some(e) = watch.next_event() {
            if alert.is_none() && matches!(e.event, Event::SaturationAlert { .. }) {
                alert = Some(f64::from(e.time_h));
            }
        }
        if !asked && t >= culture.midpoint_h {
            asked = true;
            forecast = watch
                .estimate()
                .filter(|e| e.capacity.is_some())
                .and_then(|e| e.time_to_fraction(0.9))
                .map(|m| {
                    let err = f64::from(m.value) - crossing;
                    (err, err.abs() <= 1.96 * f64::from(m.sd))
                });
        }
    }
    PlateauRun {
        alert_lead_h: alert.map(|a| crossing - a),
        forecast_error_h: forecast,
    }
}

#[allow(clippy::cast_possible_truncation)]
fn alerts_while_exponential(culture: &Culture) -> usize {
    let end = culture.time_to_fraction(0.1);
    let mut watch: Watch = Watch::new(EstimatorConfig::new(), MonitorConfig::new());
    let mut alerts = 0;
    for (t, y) in culture.readings(end, true) {
        watch.update(t as f32, y as f32);
        while let Some(e) = watch.next_event() {
            alerts += usize::from(matches!(e.event, Event::SaturationAlert { .. }));
        }
    }
    alerts
}

#[allow(clippy::cast_possible_truncation)]
fn phase_sequence_is_clean(culture: &Culture) -> bool {
    let end = culture.time_to_fraction(0.99) + 2.0;
    let mut watch: Watch = Watch::new(EstimatorConfig::new(), MonitorConfig::new());
    let mut changes = Vec::new();
    for (t, y) in culture.readings(end, false) {
        watch.update(t as f32, y as f32);
        while let Some(e) = watch.next_event() {
            if let Event::Phase { to, .. } = e.event {
                changes.push(to);
            }
        }
    }
    changes == [Phase::Exponential, Phase::Deceleration, Phase::Stationary]
}

/// Runs the benchmark over `runs` cultures seeded by `seed`, with the
/// default alert (90 % of capacity, `lead_h` hours ahead).
#[must_use]
pub fn run(runs: usize, seed: u64, lead_h: f64) -> AlertFigures {
    let cultures: Vec<Culture> = (0..runs as u64).map(|i| Culture::draw(seed, i)).collect();
    let mut figures = AlertFigures {
        runs,
        exponential_runs: runs,
        phase_runs: runs,
        ..AlertFigures::default()
    };
    let mut leads = Vec::new();
    let mut errors = Vec::new();
    let mut covered = 0;
    for culture in &cultures {
        let r = run_to_plateau(culture, lead_h);
        match r.alert_lead_h {
            None => figures.alert_missing += 1,
            Some(lead) => {
                leads.push(lead);
                if lead > 0.0 {
                    figures.alert_before_crossing += 1;
                }
                if lead > lead_h + 2.0 {
                    figures.alert_too_early += 1;
                }
            }
        }
        match r.forecast_error_h {
            None => figures.forecast_missing += 1,
            Some((err, cover)) => {
                errors.push(err.abs());
                covered += usize::from(cover);
            }
        }
        figures.false_alerts += alerts_while_exponential(culture);
        figures.phase_sequence_correct += usize::from(phase_sequence_is_clean(culture));
    }
    figures.min_alert_lead_h = leads.iter().copied().fold(f64::INFINITY, f64::min);
    figures.max_alert_lead_h = leads.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    figures.median_alert_lead_h = median(&mut leads);
    #[allow(clippy::cast_precision_loss)]
    {
        figures.forecast_90_coverage = covered as f64 / errors.len().max(1) as f64;
    }
    figures.forecast_90_median_abs_error_h = median(&mut errors);
    figures
}

/// The figures as a short text report.
#[must_use]
pub fn render(f: &AlertFigures) -> String {
    #[allow(clippy::cast_precision_loss)]
    let pct = |n: usize, of: usize| 100.0 * n as f64 / of.max(1) as f64;
    format!(
        "\nmonitor: {runs} INVENTED logistic cultures (0.8-3 OD, 0.3-1.5 per h, midpoint 5-12 h, 2 % bubbles), alert at 90 % of capacity, lead 1 h\n\
         saturation alert before the true 90 % crossing: {before}/{runs} ({before_pct:.1} %); more than lead + 2 h early: {early}; missing: {missing}\n\
         alert lead over the crossing: median {median:.2} h, min {min:.2} h, max {max:.2} h\n\
         runs ending in exponential growth (10 % of capacity): {exp_runs}, saturation alerts on them: {false_alerts}\n\
         forecast of the 90 % time made at the true inflection: median absolute error {fmed:.3} h, 95 % interval coverage {fcov:.1} %, no forecast in {fmiss} runs\n\
         phase sequence lag -> exponential -> deceleration -> stationary, each once (clean streams): {phases}/{phase_runs}\n",
        runs = f.runs,
        before = f.alert_before_crossing,
        before_pct = pct(f.alert_before_crossing, f.runs),
        early = f.alert_too_early,
        missing = f.alert_missing,
        median = f.median_alert_lead_h,
        min = f.min_alert_lead_h,
        max = f.max_alert_lead_h,
        exp_runs = f.exponential_runs,
        false_alerts = f.false_alerts,
        fmed = f.forecast_90_median_abs_error_h,
        fcov = 100.0 * f.forecast_90_coverage,
        fmiss = f.forecast_missing,
        phases = f.phase_sequence_correct,
        phase_runs = f.phase_runs,
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_small_fleet_meets_the_alert_targets() {
        let f = run(12, 7, 1.0);
        assert_eq!(f.runs, 12);
        // Targets from the monitor's specification: alert before the true
        // crossing (closed form t_m + ln 9 / r), never more than lead + 2 h
        // early, none on cultures still exponential.
        assert_eq!(f.alert_missing, 0, "{f:?}");
        assert_eq!(f.alert_before_crossing, 12, "{f:?}");
        assert_eq!(f.alert_too_early, 0, "{f:?}");
        assert_eq!(f.false_alerts, 0, "{f:?}");
        assert!(f.forecast_90_median_abs_error_h < 0.5, "{f:?}");
        assert!(f.phase_sequence_correct >= 11, "{f:?}");
    }

    #[test]
    fn cultures_are_reproducible_and_in_range() {
        let a = Culture::draw(3, 5);
        let b = Culture::draw(3, 5);
        assert_eq!(a.readings(10.0, true), b.readings(10.0, true));
        assert!((0.8..3.0).contains(&a.capacity_od));
        // The logistic identity (REFERENCES.md): the time to a fraction p of K is
        // t_m + ln(p/(1−p))/r, and the value there is p·K.
        let t = a.time_to_fraction(0.9);
        assert!((t - (a.midpoint_h + 9.0_f64.ln() / a.rate_per_h)).abs() < 1e-9);
        assert!((a.od(t) / a.capacity_od - 0.9).abs() < 1e-12);
    }
}
