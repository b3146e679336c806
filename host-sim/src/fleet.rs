//! `host-sim fleet`: the Monte Carlo accuracy benchmark of the online
//! estimator.
//!
//! Each run draws one INVENTED culture (capacity, rate, midpoint, start time
//! and noise uniformly within the ranges of [`draw_culture`]) and reads it as
//! several kinds of sensor stream ([`Stream`]). Every stream goes through the
//! device's `f32` estimator reading by reading. At the true inflection time
//! and at the end of the run the online estimate is compared with
//!
//! * the truth;
//! * the batch fit an analyst would make on the same readings up to that
//!   time: unweighted least squares of the logistic (`f64`,
//!   Levenberg–Marquardt), and, beside it, a weighted fit (weights from the
//!   true noise model at an unweighted fit's curve, readings beyond 4 robust
//!   sds set aside);
//! * the Cramér–Rao standard deviations from the Fisher information of the
//!   logistic at the truth on the same times with the true per-reading noise
//!   ([`crate::batch::fisher_heteroscedastic`]).
//!
//! Errors are relative (estimate / truth − 1), so cultures of different size
//! weigh the same. Capacity figures use the runs where the estimator
//! published a capacity (and the batch fit converged): the same runs for
//! both. Rate figures use the runs with any online estimate.
//!
//! Units: hours, OD units, per hour.

use std::fmt::Write as _;

use anyhow::Result;
use indicatif::{ProgressBar, ProgressStyle};
use plateau::{
    Baranyi, EstimatorConfig, GrowthCurve, Logistic, MonitorConfig, Outcome, Population, Rejection,
};
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Exp, StandardNormal};
use rayon::prelude::*;
use serde::Serialize;

pub mod shapes;

use crate::batch::{LogisticFit, fisher_heteroscedastic, fit_logistic, fit_logistic_trimmed};
use crate::online;

/// Kinds of sensor stream every culture is read as.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Stream {
    /// Logistic truth, a reading every 5 minutes, ordinary noise.
    Clean,
    /// As clean, plus bubbles: 3 % of readings off by 0.1–0.3 OD, 80 % high.
    Spikes,
    /// Baranyi–Roberts truth: the clean culture held back by a lag of
    /// 1.5–4 h (the logistic does not describe it exactly), every 5 minutes,
    /// the run longer by the lag.
    Lag,
    /// As clean, with two gaps of 2–4 h: one ending near the inflection,
    /// one after it.
    Gaps,
    /// As clean, with random sampling: exponential intervals, mean 10 min.
    Uneven,
}

impl Stream {
    /// Every stream, in table order.
    pub const ALL: [Self; 5] = [
        Self::Clean,
        Self::Spikes,
        Self::Lag,
        Self::Gaps,
        Self::Uneven,
    ];

    /// Short name.
    #[must_use]
    pub const fn name(self) -> &'static str {
        match self {
            Self::Clean => "clean",
            Self::Spikes => "spikes",
            Self::Lag => "lag",
            Self::Gaps => "gaps",
            Self::Uneven => "uneven",
        }
    }
}

/// How to run the fleet.
#[derive(Clone, Debug, PartialEq)]
pub struct FleetOptions {
    /// Number of cultures.
    pub runs: usize,
    /// Seed of the whole fleet.
    pub seed: u64,
    /// Show a progress bar on standard error.
    pub progress: bool,
    /// Streams to run (default all).
    pub streams: Vec<Stream>,
}

impl FleetOptions {
    /// `runs` cultures from `seed`, all streams, no progress bar.
    #[must_use]
    pub fn new(runs: usize, seed: u64) -> Self {
        Self {
            runs,
            seed,
            progress: false,
            streams: Stream::ALL.to_vec(),
        }
    }
}

/// One invented culture.
///
/// Units: `capacity_od`, `noise_floor_od` OD; `rate_per_h` per hour;
/// `midpoint_h`, `start_h`, `lag_h` hours; `noise_fraction` dimensionless.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Culture {
    /// Capacity, OD units: 0.8 to 2.5.
    pub capacity_od: f64,
    /// Logistic rate (μmax for the lag stream), per hour: 0.4 to 1.2.
    pub rate_per_h: f64,
    /// Inflection time, hours: 6 to 11.
    pub midpoint_h: f64,
    /// Time of the first reading, hours: 0 to 0.5.
    pub start_h: f64,
    /// Lag of the lag stream, hours: 1.5 to 4.
    pub lag_h: f64,
    /// Noise floor, OD units: 0.002 to 0.005.
    pub noise_floor_od: f64,
    /// Proportional noise: 0.005 to 0.02.
    pub noise_fraction: f64,
}

/// Length of every run, hours (the lag stream's is longer by its lag).
pub const DURATION_H: f64 = 24.0;

/// Draws the culture of run `run` (INVENTED ranges, see [`Culture`]).
#[must_use]
pub fn draw_culture(seed: u64, run: u64) -> Culture {
    let mut rng = ChaCha8Rng::seed_from_u64(mix(seed, run, 0));
    Culture {
        capacity_od: rng.random_range(0.8..2.5),
        rate_per_h: rng.random_range(0.4..1.2),
        midpoint_h: rng.random_range(6.0..11.0),
        start_h: rng.random_range(0.0..0.5),
        lag_h: rng.random_range(1.5..4.0),
        noise_floor_od: rng.random_range(0.002..0.005),
        noise_fraction: rng.random_range(0.005..0.02),
    }
}

fn mix(seed: u64, run: u64, stream: u64) -> u64 {
    // SplitMix64 finaliser over the three numbers: distinct seeds per
    // (fleet seed, run, stream).
    let mut z = seed
        .wrapping_mul(0x9E37_79B9_7F4A_7C15)
        .wrapping_add(run.wrapping_mul(0xBF58_476D_1CE4_E5B9))
        .wrapping_add(stream.wrapping_mul(0x94D0_49BB_1331_11EB));
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// The truth of a stream: a curve in OD units against hours.
fn truth_of(c: &Culture, stream: Stream) -> Box<dyn GrowthCurve<f64>> {
    match stream {
        Stream::Lag => {
            // Baranyi–Roberts with μmax = r from the clean logistic's
            // starting level: the clean culture delayed by about `lag_h`
            // (its run is `lag_h` longer).
            let y0 = c.capacity_od / (1.0 + (c.rate_per_h * c.midpoint_h).exp());
            let a = (c.capacity_od / y0).ln();
            let b = Baranyi::new(a, c.rate_per_h, c.lag_h).expect("valid invented ranges");
            Box::new(Population::new(b, y0).expect("valid invented ranges"))
        }
        _ => Box::new(
            Logistic::from_midpoint(c.capacity_od, c.rate_per_h, c.midpoint_h)
                .expect("valid invented ranges"),
        ),
    }
}

/// A generated stream. Units: hours, OD units.
#[derive(Clone, Debug, Default)]
pub struct Generated {
    /// Reading times, hours, increasing.
    pub time_h: Vec<f64>,
    /// Readings, OD units.
    pub od: Vec<f64>,
    /// Noise sd of each reading, OD units.
    pub sd: Vec<f64>,
    /// Whether each reading is a spike.
    pub spike: Vec<bool>,
}

/// Generates the readings of `stream` for culture `c`, reproducibly.
#[must_use]
pub fn generate(c: &Culture, stream: Stream, seed: u64, run: u64) -> Generated {
    let index = Stream::ALL.iter().position(|s| *s == stream).unwrap_or(0) as u64;
    let mut rng = ChaCha8Rng::seed_from_u64(mix(seed, run, index + 1));
    let truth = truth_of(c, stream);
    let end = c.start_h + DURATION_H + if stream == Stream::Lag { c.lag_h } else { 0.0 };
    let step = 5.0 / 60.0;
    let mut times = Vec::new();
    if stream == Stream::Uneven {
        let gap = Exp::new(1.0 / (10.0 / 60.0)).expect("positive rate");
        let mut t = c.start_h;
        while t <= end {
            times.push(t);
            let dt: f64 = gap.sample(&mut rng);
            t += dt.max(0.5 / 60.0);
        }
    } else {
        let mut i = 0.0;
        while c.start_h + i * step <= end {
            let jitter: f64 = rng.random_range(-0.002..0.002);
            times.push(c.start_h + i * step + jitter);
            i += 1.0;
        }
    }
    if stream == Stream::Gaps {
        let first_len: f64 = rng.random_range(2.0..4.0);
        let first_end = c.midpoint_h + rng.random_range(-1.0..0.5);
        let second_start = c.midpoint_h + rng.random_range(2.0..5.0);
        let second_len: f64 = rng.random_range(2.0..4.0);
        times.retain(|&t| {
            !((t >= first_end - first_len && t < first_end)
                || (t >= second_start && t < second_start + second_len))
        });
    }
    let mut g = Generated::default();
    for t in times {
        let y = truth.value(t);
        let sd = c.noise_floor_od + c.noise_fraction * y;
        let z: f64 = StandardNormal.sample(&mut rng);
        let mut od = y + sd * z;
        let mut spike = false;
        if stream == Stream::Spikes && rng.random::<f64>() < 0.03 {
            let size: f64 = rng.random_range(0.1..0.3);
            let sign = if rng.random::<f64>() < 0.8 { 1.0 } else { -1.0 };
            od += sign * size;
            spike = true;
        }
        g.time_h.push(t);
        g.od.push(od);
        g.sd.push(sd);
        g.spike.push(spike);
    }
    g
}

/// A value with a standard deviation.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Est {
    /// Value.
    pub value: f64,
    /// Standard deviation.
    pub sd: f64,
}

/// Everything measured at one checkpoint of one stream of one run.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Checkpoint {
    /// True capacity, OD units.
    pub true_capacity: f64,
    /// True maximum specific rate, per hour.
    pub true_rate: f64,
    /// Whether the online estimator had any estimate.
    pub online_any: bool,
    /// Published online capacity.
    pub online_capacity: Option<Est>,
    /// Online capacity, published or not.
    pub online_capacity_unchecked: Option<Est>,
    /// Online rate.
    pub online_rate: Option<Est>,
    /// Unweighted batch fit (capacity, rate).
    pub batch: Option<(Est, Est)>,
    /// Weighted, trimmed batch fit (capacity, rate).
    pub weighted: Option<(Est, Est)>,
    /// Cramér–Rao sds of (capacity, rate).
    pub crb: Option<(f64, f64)>,
    /// True lag on ln OD, hours from the first reading.
    pub true_lag_h: f64,
    /// The estimator's lag, hours from the first reading.
    pub online_lag: Option<Est>,
}

/// One stream of one run.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct StreamRun {
    /// The stream.
    pub stream: Stream,
    /// At the true inflection time.
    pub inflection: Checkpoint,
    /// At the end of the run.
    pub end: Checkpoint,
    /// Spikes generated.
    pub spikes: usize,
    /// Spikes the estimator rejected as spikes.
    pub spikes_rejected: usize,
    /// Ordinary readings the estimator rejected (any reason: negative
    /// readings near zero OD are rejected too).
    pub clean_rejected: usize,
    /// Ordinary readings the innovation gate rejected as spikes.
    pub clean_gated: usize,
    /// Ordinary (not spike) readings.
    pub clean_readings: usize,
    /// Restarts (none are expected).
    pub restarts: usize,
}

fn est(fit: &LogisticFit) -> (Est, Est) {
    (
        Est {
            value: fit.capacity,
            sd: fit.capacity_sd,
        },
        Est {
            value: fit.rate_per_h,
            sd: fit.rate_sd_per_h,
        },
    )
}

fn weighted_fit(t: &[f64], y: &[f64], c: &Culture) -> Option<LogisticFit> {
    let first = fit_logistic(t, y, None).ok()?;
    let curve = first.curve();
    let w: Vec<f64> = t
        .iter()
        .map(|&x| {
            let sd = c.noise_floor_od + c.noise_fraction * curve.value(x).max(0.0);
            1.0 / (sd * sd)
        })
        .collect();
    fit_logistic_trimmed(t, y, Some(&w), 4.0).ok().map(|f| f.0)
}

/// Runs one stream of one culture.
#[must_use]
pub fn run_stream(c: &Culture, stream: Stream, seed: u64, run: u64) -> StreamRun {
    let g = generate(c, stream, seed, run);
    let truth = truth_of(c, stream);
    let t_infl = truth.inflection().time_h;
    let true_capacity = truth.upper_asymptote();
    let true_rate = truth.max_specific_rate_per_h();
    let first_h = g.time_h.first().copied().unwrap_or(c.start_h);
    // Lag on ln OD from the first reading: Baranyi's λ (Baranyi & Roberts
    // 1994, REFERENCES.md) for the lag stream; for the logistic the line
    // ln K − r (t_m − t) meets the starting level at
    // t0 − ln(1 + e^(−r (t_m − t0))) / r, just before the first reading.
    let true_lag_h = match stream {
        Stream::Lag => c.lag_h - first_h,
        _ => -(-c.rate_per_h * (c.midpoint_h - first_h)).exp().ln_1p() / c.rate_per_h,
    };
    let readings: Vec<(f64, f64)> = g.time_h.iter().copied().zip(g.od.iter().copied()).collect();
    let steps = online::run(EstimatorConfig::new(), MonitorConfig::new(), &readings);
    let checkpoint = |upto: usize| -> Checkpoint {
        let e = upto.checked_sub(1).and_then(|i| steps[i].estimate);
        let m = |m: plateau::Measured<f32>| Est {
            value: f64::from(m.value),
            sd: f64::from(m.sd),
        };
        let (t, y) = (&g.time_h[..upto], &g.od[..upto]);
        let crb = fisher_heteroscedastic(true_capacity, true_rate, t_infl, t, &g.sd[..upto])
            .ok()
            .map(|s| (s[0], s[1]));
        Checkpoint {
            true_capacity,
            true_rate,
            online_any: e.is_some(),
            online_capacity: e.and_then(|e| e.capacity).map(m),
            online_capacity_unchecked: e.map(|e| m(e.capacity_unchecked())),
            online_rate: e.map(|e| m(e.rate_per_h)),
            batch: fit_logistic(t, y, None).ok().map(|f| est(&f)),
            weighted: weighted_fit(t, y, c).map(|f| est(&f)),
            crb,
            true_lag_h,
            online_lag: e.and_then(|e| e.lag_h).map(m),
        }
    };
    let at_infl = g.time_h.partition_point(|&t| t <= t_infl);
    let inflection = checkpoint(at_infl);
    let end = checkpoint(g.time_h.len());
    let mut out = StreamRun {
        stream,
        inflection,
        end,
        spikes: 0,
        spikes_rejected: 0,
        clean_rejected: 0,
        clean_gated: 0,
        clean_readings: 0,
        restarts: 0,
    };
    for (s, &spike) in steps.iter().zip(&g.spike) {
        out.spikes += usize::from(spike);
        out.clean_readings += usize::from(!spike);
        match s.outcome {
            Outcome::Rejected(Rejection::Spike) if spike => out.spikes_rejected += 1,
            Outcome::Rejected(Rejection::Spike) => {
                out.clean_rejected += 1;
                out.clean_gated += 1;
            }
            Outcome::Rejected(_) if !spike => out.clean_rejected += 1,
            Outcome::Restarted => out.restarts += 1,
            _ => {}
        }
    }
    out
}

/// Aggregate figures of one stream at one checkpoint. Errors are relative
/// (estimate / truth − 1); "/CRB" figures are the root mean square of
/// (estimate − truth) / Cramér–Rao sd; coverage is the share of runs whose
/// 95 % interval (± 1.96 sd) holds the truth.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Figures {
    /// Runs.
    pub runs: usize,
    /// Share of runs with no online estimate at all.
    pub no_estimate: f64,
    /// Share of runs with no published online capacity.
    pub no_capacity: f64,
    /// Runs in the capacity figures (capacity published, batch converged).
    pub capacity_runs: usize,
    /// Relative RMSE of the online capacity.
    pub capacity_rmse_online: f64,
    /// Relative RMSE of the unweighted batch capacity (same runs).
    pub capacity_rmse_batch: f64,
    /// Relative RMSE of the weighted batch capacity (same runs).
    pub capacity_rmse_weighted: f64,
    /// Online over unweighted batch capacity RMSE.
    pub capacity_ratio: f64,
    /// Relative RMSE of the online capacity, published or not, over all
    /// runs with an estimate.
    pub capacity_rmse_online_unchecked: f64,
    /// Runs in the rate figures (online estimate, batch converged).
    pub rate_runs: usize,
    /// Relative RMSE of the online rate.
    pub rate_rmse_online: f64,
    /// Relative RMSE of the unweighted batch rate.
    pub rate_rmse_batch: f64,
    /// Relative RMSE of the weighted batch rate.
    pub rate_rmse_weighted: f64,
    /// Online over unweighted batch rate RMSE.
    pub rate_ratio: f64,
    /// Online capacity error over the CRB (RMS).
    pub capacity_crb_online: f64,
    /// Unweighted batch capacity error over the CRB (RMS).
    pub capacity_crb_batch: f64,
    /// Online rate error over the CRB (RMS).
    pub rate_crb_online: f64,
    /// Unweighted batch rate error over the CRB (RMS).
    pub rate_crb_batch: f64,
    /// Coverage of the online capacity interval (published capacities).
    pub capacity_coverage_online: f64,
    /// Coverage of the online rate interval.
    pub rate_coverage_online: f64,
    /// Coverage of the unweighted batch capacity interval (same runs).
    pub capacity_coverage_batch: f64,
    /// Coverage of the unweighted batch rate interval (same runs).
    pub rate_coverage_batch: f64,
    /// Runs with an online lag.
    pub lag_runs: usize,
    /// RMSE of the online lag, hours (absolute: a lag can be zero).
    pub lag_rmse_online_h: f64,
    /// Coverage of the online lag's 95 % interval.
    pub lag_coverage_online: f64,
}

fn rms(v: &[f64]) -> f64 {
    if v.is_empty() {
        return f64::NAN;
    }
    (v.iter().map(|x| x * x).sum::<f64>() / v.len() as f64).sqrt()
}

/// RMS over the values that exist (a weighted fit that did not converge is
/// left out of its own column).
fn rms_finite(v: &[f64]) -> f64 {
    let kept: Vec<f64> = v.iter().copied().filter(|x| x.is_finite()).collect();
    rms(&kept)
}

fn share(count: usize, of: usize) -> f64 {
    if of == 0 {
        f64::NAN
    } else {
        count as f64 / of as f64
    }
}

fn covers(e: Est, truth: f64) -> bool {
    (e.value - truth).abs() <= 1.96 * e.sd
}

/// Aggregates checkpoints.
#[must_use]
pub fn figures(points: &[Checkpoint]) -> Figures {
    let n = points.len();
    let mut cap = (vec![], vec![], vec![], vec![], vec![], 0, 0);
    let mut rate = (vec![], vec![], vec![], vec![], vec![], 0, 0);
    let mut unchecked = vec![];
    for p in points {
        if let Some(u) = p.online_capacity_unchecked {
            unchecked.push(u.value / p.true_capacity - 1.0);
        }
        let (Some((bk, br)), Some(crb)) = (p.batch, p.crb) else {
            continue;
        };
        let weighted = p.weighted;
        if let Some(k) = p.online_capacity {
            let t = p.true_capacity;
            cap.0.push(k.value / t - 1.0);
            cap.1.push(bk.value / t - 1.0);
            cap.2
                .push(weighted.map_or(f64::NAN, |w| w.0.value / t - 1.0));
            cap.3.push((k.value - t) / crb.0);
            cap.4.push((bk.value - t) / crb.0);
            cap.5 += usize::from(covers(k, t));
            cap.6 += usize::from(covers(bk, t));
        }
        if let Some(r) = p.online_rate {
            let t = p.true_rate;
            rate.0.push(r.value / t - 1.0);
            rate.1.push(br.value / t - 1.0);
            rate.2
                .push(weighted.map_or(f64::NAN, |w| w.1.value / t - 1.0));
            rate.3.push((r.value - t) / crb.1);
            rate.4.push((br.value - t) / crb.1);
            rate.5 += usize::from(covers(r, t));
            rate.6 += usize::from(covers(br, t));
        }
    }
    let (cn, rn) = (cap.0.len(), rate.0.len());
    let lags: Vec<(f64, bool)> = points
        .iter()
        .filter_map(|p| {
            p.online_lag
                .map(|l| (l.value - p.true_lag_h, covers(l, p.true_lag_h)))
        })
        .collect();
    let lag_errors: Vec<f64> = lags.iter().map(|l| l.0).collect();
    Figures {
        runs: n,
        no_estimate: share(points.iter().filter(|p| !p.online_any).count(), n),
        no_capacity: share(
            points
                .iter()
                .filter(|p| p.online_capacity.is_none())
                .count(),
            n,
        ),
        capacity_runs: cn,
        capacity_rmse_online: rms(&cap.0),
        capacity_rmse_batch: rms(&cap.1),
        capacity_rmse_weighted: rms_finite(&cap.2),
        capacity_ratio: rms(&cap.0) / rms(&cap.1),
        capacity_rmse_online_unchecked: rms(&unchecked),
        rate_runs: rn,
        rate_rmse_online: rms(&rate.0),
        rate_rmse_batch: rms(&rate.1),
        rate_rmse_weighted: rms_finite(&rate.2),
        rate_ratio: rms(&rate.0) / rms(&rate.1),
        capacity_crb_online: rms(&cap.3),
        capacity_crb_batch: rms(&cap.4),
        rate_crb_online: rms(&rate.3),
        rate_crb_batch: rms(&rate.4),
        capacity_coverage_online: share(cap.5, cn),
        rate_coverage_online: share(rate.5, rn),
        capacity_coverage_batch: share(cap.6, cn),
        rate_coverage_batch: share(rate.6, rn),
        lag_runs: lags.len(),
        lag_rmse_online_h: rms(&lag_errors),
        lag_coverage_online: share(lags.iter().filter(|l| l.1).count(), lags.len()),
    }
}

/// Figures of one stream.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct StreamFigures {
    /// The stream.
    pub stream: Stream,
    /// At the true inflection time.
    pub inflection: Figures,
    /// At the end of the run.
    pub end: Figures,
    /// Spikes generated over all runs.
    pub spikes: usize,
    /// Spikes rejected by the estimator's gate.
    pub spikes_rejected: usize,
    /// Ordinary readings rejected (any reason).
    pub clean_rejected: usize,
    /// Ordinary readings rejected by the gate as spikes.
    pub clean_gated: usize,
    /// Ordinary readings.
    pub clean_readings: usize,
    /// Restarts over all runs (no dilutions happen, so all are false).
    pub restarts: usize,
}

/// The whole fleet's result.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct FleetReport {
    /// Cultures run.
    pub runs: usize,
    /// Fleet seed.
    pub seed: u64,
    /// Per stream.
    pub streams: Vec<StreamFigures>,
    /// Every run, every stream (for the JSON output).
    #[serde(skip)]
    pub raw: Vec<Vec<StreamRun>>,
}

/// Runs the fleet in parallel.
///
/// # Errors
///
/// No runs asked for.
pub fn run(options: &FleetOptions) -> Result<FleetReport> {
    anyhow::ensure!(options.runs > 0, "--runs must be at least 1");
    let bar = if options.progress {
        let b = ProgressBar::new(options.runs as u64);
        if let Ok(style) = ProgressStyle::with_template("{bar:40} {pos}/{len} cultures {eta}") {
            b.set_style(style);
        }
        b
    } else {
        ProgressBar::hidden()
    };
    let raw: Vec<Vec<StreamRun>> = (0..options.runs as u64)
        .into_par_iter()
        .map(|run| {
            let c = draw_culture(options.seed, run);
            let out = options
                .streams
                .iter()
                .map(|&s| run_stream(&c, s, options.seed, run))
                .collect();
            bar.inc(1);
            out
        })
        .collect();
    bar.finish_and_clear();
    let streams = options
        .streams
        .iter()
        .enumerate()
        .map(|(i, &stream)| {
            let runs: Vec<&StreamRun> = raw.iter().map(|r| &r[i]).collect();
            let infl: Vec<Checkpoint> = runs.iter().map(|r| r.inflection).collect();
            let end: Vec<Checkpoint> = runs.iter().map(|r| r.end).collect();
            let spikes = runs.iter().map(|r| r.spikes).sum();
            StreamFigures {
                stream,
                inflection: figures(&infl),
                end: figures(&end),
                spikes,
                spikes_rejected: runs.iter().map(|r| r.spikes_rejected).sum(),
                clean_rejected: runs.iter().map(|r| r.clean_rejected).sum(),
                clean_gated: runs.iter().map(|r| r.clean_gated).sum(),
                clean_readings: runs.iter().map(|r| r.clean_readings).sum(),
                restarts: runs.iter().map(|r| r.restarts).sum(),
            }
        })
        .collect();
    Ok(FleetReport {
        runs: options.runs,
        seed: options.seed,
        streams,
        raw,
    })
}

/// The machine-readable report.
#[must_use]
pub fn to_json(report: &FleetReport) -> serde_json::Value {
    let mut v = serde_json::to_value(report).unwrap_or(serde_json::Value::Null);
    if let Some(o) = v.as_object_mut() {
        o.insert(
            "data".into(),
            "INVENTED cultures; relative errors; see host-sim/src/fleet.rs".into(),
        );
        o.insert(
            "targets".into(),
            serde_json::json!({
                "rmse_ratio_end_max": 1.1,
                "rmse_ratio_inflection_max": 1.3,
                "coverage_min": 0.90,
                "coverage_max": 0.98,
            }),
        );
    }
    v
}

fn pct(x: f64) -> String {
    if x.is_finite() {
        format!("{:.1}", 100.0 * x)
    } else {
        "-".into()
    }
}

fn pct2(x: f64) -> String {
    if x.is_finite() {
        format!("{:.2}", 100.0 * x)
    } else {
        "-".into()
    }
}

fn f2(x: f64) -> String {
    if x.is_finite() {
        format!("{x:.2}")
    } else {
        "-".into()
    }
}

/// The text tables the command prints.
#[must_use]
pub fn render(report: &FleetReport) -> String {
    let mut s = format!(
        "plateau fleet: {} INVENTED cultures (seed {}), online f32 estimator vs truth, \
         batch fit and Cramér–Rao bound\nrelative RMSE in %; ratio = online / unweighted batch \
         (target ≤ 1.10 at end, ≤ 1.30 at inflection); coverage of 95 % intervals (target 90–98 %)\n\n",
        report.runs, report.seed
    );
    let _ = writeln!(
        s,
        "{:<8}{:<6}{:>7}{:>7} | {:>7}{:>7}{:>7}{:>6} | {:>7}{:>7}{:>7}{:>6} | {:>6}{:>6}{:>6}{:>6}",
        "stream",
        "at",
        "no est",
        "no K",
        "K onl",
        "K bat",
        "K wtd",
        "ratio",
        "r onl",
        "r bat",
        "r wtd",
        "ratio",
        "K/CRB",
        "bat",
        "r/CRB",
        "bat"
    );
    for sf in &report.streams {
        for (at, f) in [("infl", &sf.inflection), ("end", &sf.end)] {
            let _ = writeln!(
                s,
                "{:<8}{:<6}{:>7}{:>7} | {:>7}{:>7}{:>7}{:>6} | {:>7}{:>7}{:>7}{:>6} | {:>6}{:>6}{:>6}{:>6}",
                sf.stream.name(),
                at,
                pct(f.no_estimate),
                pct(f.no_capacity),
                pct2(f.capacity_rmse_online),
                pct2(f.capacity_rmse_batch),
                pct2(f.capacity_rmse_weighted),
                f2(f.capacity_ratio),
                pct2(f.rate_rmse_online),
                pct2(f.rate_rmse_batch),
                pct2(f.rate_rmse_weighted),
                f2(f.rate_ratio),
                f2(f.capacity_crb_online),
                f2(f.capacity_crb_batch),
                f2(f.rate_crb_online),
                f2(f.rate_crb_batch),
            );
        }
    }
    let _ = writeln!(
        s,
        "\ncoverage of 95 % intervals, %   (K over runs with a published capacity; \
         λ: the estimator's lag on ln OD from the first reading)"
    );
    let _ = writeln!(
        s,
        "{:<8}{:<6}{:>8}{:>8}{:>8}{:>8}{:>8}{:>8} | {:>8}{:>10}{:>8}",
        "stream",
        "at",
        "K runs",
        "K onl",
        "K bat",
        "r runs",
        "r onl",
        "r bat",
        "λ runs",
        "λ RMSE h",
        "λ onl"
    );
    for sf in &report.streams {
        for (at, f) in [("infl", &sf.inflection), ("end", &sf.end)] {
            let _ = writeln!(
                s,
                "{:<8}{:<6}{:>8}{:>8}{:>8}{:>8}{:>8}{:>8} | {:>8}{:>10}{:>8}",
                sf.stream.name(),
                at,
                f.capacity_runs,
                pct(f.capacity_coverage_online),
                pct(f.capacity_coverage_batch),
                f.rate_runs,
                pct(f.rate_coverage_online),
                pct(f.rate_coverage_batch),
                f.lag_runs,
                f2(f.lag_rmse_online_h),
                pct(f.lag_coverage_online),
            );
        }
    }
    s.push('\n');
    for sf in &report.streams {
        let _ = writeln!(
            s,
            "{:<8} spikes rejected {}/{} ({} %); ordinary readings rejected {}/{} ({} %), \
             of them by the gate {} ({} %); restarts {}",
            sf.stream.name(),
            sf.spikes_rejected,
            sf.spikes,
            pct(share(sf.spikes_rejected, sf.spikes)),
            sf.clean_rejected,
            sf.clean_readings,
            pct(share(sf.clean_rejected, sf.clean_readings)),
            sf.clean_gated,
            pct(share(sf.clean_gated, sf.clean_readings)),
            sf.restarts
        );
    }
    s
}
