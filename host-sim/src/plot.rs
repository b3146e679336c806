//! SVG plots of a run: readings (rejected ones drawn as crosses), the
//! closed-form truth, an estimated curve with a shaded ±2 sd band, vertical
//! markers (alert, forecast) and shaded growth phases.
//!
//! The plot takes plain data ([`PlotData`]) so anything — the batch fit now,
//! the online estimator later — can be drawn without this module knowing it.
//! SVG text is written as `<text>` elements, so no fonts are needed.
//!
//! Units: time in hours on x, signal (OD) on y.

use std::path::Path;

use anyhow::{Result, anyhow};
use plateau::GrowthCurve as _;
use plotters::prelude::*;

/// One reading to draw.
///
/// Units: `time_h` hours, `od` OD units.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct PlotPoint {
    /// Time, hours.
    pub time_h: f64,
    /// Reading, OD units.
    pub od: f64,
    /// Drawn as a red cross instead of a grey dot.
    pub rejected: bool,
}

/// A curve with an uncertainty band of ±2 sd around it.
///
/// Units: `time_h` hours; `value` and `sd` OD units. All three vectors have
/// the same length.
#[derive(Clone, Debug, PartialEq, Default)]
pub struct BandCurve {
    /// Legend label.
    pub label: String,
    /// Times, hours, increasing.
    pub time_h: Vec<f64>,
    /// Curve values, OD units.
    pub value: Vec<f64>,
    /// Standard deviation of each value, OD units (0 for no band).
    pub sd: Vec<f64>,
}

/// A vertical line at a time, with a label.
#[derive(Clone, Debug, PartialEq)]
pub struct Marker {
    /// Time, hours.
    pub time_h: f64,
    /// Label drawn beside the line.
    pub label: String,
}

/// A shaded time interval (a growth phase), with a label.
#[derive(Clone, Debug, PartialEq)]
pub struct Phase {
    /// Start, hours.
    pub start_h: f64,
    /// End, hours.
    pub end_h: f64,
    /// Label drawn at the top of the interval.
    pub label: String,
}

/// Everything one plot shows.
#[derive(Clone, Debug, PartialEq, Default)]
pub struct PlotData {
    /// Title at the top.
    pub title: String,
    /// The readings.
    pub readings: Vec<PlotPoint>,
    /// The closed-form truth as (time in hours, OD) points, if known.
    pub truth: Vec<(f64, f64)>,
    /// Estimated curves with their bands.
    pub estimates: Vec<BandCurve>,
    /// Vertical markers.
    pub markers: Vec<Marker>,
    /// Shaded phases.
    pub phases: Vec<Phase>,
}

const ESTIMATE_COLOURS: [RGBColor; 3] = [
    RGBColor(31, 119, 180),
    RGBColor(214, 39, 40),
    RGBColor(148, 103, 189),
];
const PHASE_COLOURS: [RGBColor; 4] = [
    RGBColor(255, 237, 160),
    RGBColor(199, 233, 192),
    RGBColor(198, 219, 239),
    RGBColor(230, 230, 230),
];

/// Renders `data` as an SVG document of `width` × `height` pixels.
///
/// # Errors
///
/// Nothing to draw (no readings, truth or estimate), a non-finite
/// coordinate, or a drawing error.
pub fn render_svg(data: &PlotData, width: u32, height: u32) -> Result<String> {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (width, height)).into_drawing_area();
        root.fill(&WHITE).map_err(draw_err)?;
        draw_main(&root, data, false)?;
        root.present().map_err(draw_err)?;
    }
    Ok(svg)
}

/// The drawing area of an SVG plot.
pub type Area<'a> = DrawingArea<SVGBackend<'a>, plotters::coord::Shift>;

/// `data` with every signal value as its base-10 logarithm (values at or
/// below zero raised to half the smallest positive one), for a log axis.
fn logged(data: &PlotData) -> PlotData {
    let positive = data
        .readings
        .iter()
        .map(|p| p.od)
        .chain(data.truth.iter().map(|p| p.1))
        .chain(data.estimates.iter().flat_map(|e| e.value.iter().copied()))
        .filter(|y| y.is_finite() && *y > 0.0)
        .fold(f64::INFINITY, f64::min);
    let floor = if positive.is_finite() {
        positive / 2.0
    } else {
        1e-3
    };
    let lg = |y: f64| y.max(floor).log10();
    let mut out = data.clone();
    for p in &mut out.readings {
        p.od = lg(p.od);
    }
    for p in &mut out.truth {
        p.1 = lg(p.1);
    }
    for e in &mut out.estimates {
        // The band keeps its edges: sd becomes half the width in log units.
        for (v, sd) in e.value.iter_mut().zip(&mut e.sd) {
            let (hi, lo) = (lg(*v + 2.0 * *sd), lg(*v - 2.0 * *sd));
            *v = lg(*v);
            *sd = (hi - lo) / 4.0;
        }
    }
    out
}

/// Draws `data` as one chart filling `root`; with `log_scale` the signal
/// axis is logarithmic (base 10).
///
/// # Errors
///
/// Nothing to draw, a non-finite coordinate, or a drawing error.
pub fn draw_main(root: &Area<'_>, data: &PlotData, log_scale: bool) -> Result<()> {
    let transformed;
    let data = if log_scale {
        transformed = logged(data);
        &transformed
    } else {
        data
    };
    let (x_range, y_range) = ranges(data, !log_scale)?;
    {
        let mut chart = ChartBuilder::on(root)
            .caption(&data.title, ("sans-serif", 20))
            .margin(12)
            .x_label_area_size(40)
            .y_label_area_size(55)
            .build_cartesian_2d(x_range.clone(), y_range.clone())
            .map_err(draw_err)?;
        let y_label = |v: &f64| {
            if log_scale {
                format!("{:.3}", 10_f64.powf(*v))
            } else {
                format!("{v:.1}")
            }
        };
        chart
            .configure_mesh()
            .x_desc("time (h)")
            .y_desc(if log_scale {
                "signal (OD, log scale)"
            } else {
                "signal (OD)"
            })
            .y_label_formatter(&y_label)
            .light_line_style(WHITE.mix(0.0))
            .label_style(("sans-serif", 14))
            .axis_desc_style(("sans-serif", 16))
            .draw()
            .map_err(draw_err)?;

        for (i, p) in data.phases.iter().enumerate() {
            let colour = PHASE_COLOURS[i % PHASE_COLOURS.len()];
            let (a, b) = (p.start_h.max(x_range.start), p.end_h.min(x_range.end));
            if a >= b {
                continue;
            }
            chart
                .draw_series(std::iter::once(Rectangle::new(
                    [(a, y_range.start), (b, y_range.end)],
                    colour.mix(0.45).filled(),
                )))
                .map_err(draw_err)?;
            let top = y_range.end - 0.03 * (y_range.end - y_range.start);
            chart
                .draw_series(std::iter::once(Text::new(
                    p.label.clone(),
                    (a + 0.01 * (x_range.end - x_range.start), top),
                    ("sans-serif", 13).into_font().color(&BLACK.mix(0.7)),
                )))
                .map_err(draw_err)?;
        }

        // The first estimate is drawn last, on top.
        for (i, est) in data.estimates.iter().enumerate().rev() {
            let colour = ESTIMATE_COLOURS[i % ESTIMATE_COLOURS.len()];
            if est.sd.iter().any(|s| *s > 0.0) {
                let upper = est
                    .time_h
                    .iter()
                    .zip(&est.value)
                    .zip(&est.sd)
                    .map(|((t, v), s)| (*t, v + 2.0 * s));
                let lower = est
                    .time_h
                    .iter()
                    .zip(&est.value)
                    .zip(&est.sd)
                    .rev()
                    .map(|((t, v), s)| (*t, v - 2.0 * s));
                let outline: Vec<(f64, f64)> = upper.chain(lower).collect();
                chart
                    .draw_series(std::iter::once(Polygon::new(
                        outline,
                        colour.mix(0.25).filled(),
                    )))
                    .map_err(draw_err)?;
            }
            chart
                .draw_series(LineSeries::new(
                    est.time_h.iter().copied().zip(est.value.iter().copied()),
                    colour.stroke_width(2),
                ))
                .map_err(draw_err)?
                .label(format!("{} (±2 sd)", est.label))
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 20, y)], colour.stroke_width(2))
                });
        }

        if !data.truth.is_empty() {
            chart
                .draw_series(DashedLineSeries::new(
                    data.truth.iter().copied(),
                    6,
                    4,
                    BLACK.stroke_width(1),
                ))
                .map_err(draw_err)?
                .label("truth (closed form)")
                .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], BLACK));
        }

        let grey = RGBColor(90, 90, 90);
        let accepted = data.readings.iter().filter(|p| !p.rejected);
        chart
            .draw_series(accepted.map(|p| Circle::new((p.time_h, p.od), 2, grey.filled())))
            .map_err(draw_err)?
            .label("reading")
            .legend(move |(x, y)| Circle::new((x + 10, y), 3, grey.filled()));
        if data.readings.iter().any(|p| p.rejected) {
            let red = RGBColor(200, 30, 30);
            chart
                .draw_series(
                    data.readings
                        .iter()
                        .filter(|p| p.rejected)
                        .map(|p| Cross::new((p.time_h, p.od), 4, red.stroke_width(2))),
                )
                .map_err(draw_err)?
                .label("rejected reading")
                .legend(move |(x, y)| Cross::new((x + 10, y), 4, red.stroke_width(2)));
        }

        for (i, m) in data.markers.iter().enumerate() {
            let colour = RGBColor(230, 85, 13);
            chart
                .draw_series(DashedLineSeries::new(
                    [(m.time_h, y_range.start), (m.time_h, y_range.end)],
                    4,
                    3,
                    colour.stroke_width(2),
                ))
                .map_err(draw_err)?;
            // Labels step up one line per marker so neighbours do not overlap.
            #[allow(clippy::cast_precision_loss)] // a handful of markers
            let y = y_range.start + (0.08 + 0.05 * i as f64) * (y_range.end - y_range.start);
            chart
                .draw_series(std::iter::once(Text::new(
                    m.label.clone(),
                    (m.time_h + 0.01 * (x_range.end - x_range.start), y),
                    ("sans-serif", 13).into_font().color(&colour),
                )))
                .map_err(draw_err)?;
        }

        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::LowerRight)
            .background_style(WHITE.mix(0.85))
            .border_style(BLACK.mix(0.3))
            .label_font(("sans-serif", 14))
            .draw()
            .map_err(draw_err)?;
    }
    Ok(())
}

/// Renders `data` (1000 × 600 pixels) and writes it to `path` atomically.
///
/// # Errors
///
/// As [`render_svg`], or the file cannot be written.
pub fn write_svg(path: &Path, data: &PlotData) -> Result<()> {
    let svg = render_svg(data, 1000, 600)?;
    crate::log::write_atomically(path, |w| Ok(w.write_all(svg.as_bytes())?))
}

fn draw_err<E: std::fmt::Debug>(e: E) -> anyhow::Error {
    anyhow!("drawing failed: {e:?}")
}

type Ranges = (std::ops::Range<f64>, std::ops::Range<f64>);

/// Axis ranges covering every finite point, with a margin; y starts at 0
/// unless data go below it.
fn ranges(data: &PlotData, from_zero: bool) -> Result<Ranges> {
    let mut xs = Vec::new();
    let mut ys = Vec::new();
    for p in &data.readings {
        xs.push(p.time_h);
        ys.push(p.od);
    }
    for (t, y) in &data.truth {
        xs.push(*t);
        ys.push(*y);
    }
    for e in &data.estimates {
        xs.extend(&e.time_h);
        ys.extend(e.value.iter().zip(&e.sd).map(|(v, s)| v + 2.0 * s));
        ys.extend(e.value.iter().zip(&e.sd).map(|(v, s)| v - 2.0 * s));
    }
    xs.retain(|x| x.is_finite());
    ys.retain(|y| y.is_finite());
    if xs.is_empty() || ys.is_empty() {
        return Err(anyhow!("nothing to plot"));
    }
    let (x0, x1) = min_max(&xs);
    let (y0, y1) = min_max(&ys);
    let y0 = if from_zero { y0.min(0.0) } else { y0 };
    let xpad = ((x1 - x0) * 0.02).max(1e-3);
    let ypad = ((y1 - y0) * 0.08).max(1e-3);
    Ok((x0 - xpad..x1 + xpad, y0 - 0.2 * ypad..y1 + ypad))
}

fn min_max(v: &[f64]) -> (f64, f64) {
    v.iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), x| {
            (a.min(*x), b.max(*x))
        })
}

/// Renders a replay as SVG: for one series the readings with the final
/// online estimate, the batch fit, the monitor's phases and alert, above two
/// panels that show how the capacity and μmax estimates and their 95 %
/// bands moved reading by reading; for several series one small panel per
/// series on shared axes, with its capacity, rate and alert.
///
/// # Errors
///
/// Nothing to draw, or a drawing error.
pub fn replay_svg(
    replay: &crate::replay::Replay,
    style: &crate::replay::PlotStyle,
) -> Result<String> {
    if let [only] = &replay.series[..] {
        one_series_svg(replay, only, style.log_scale)
    } else {
        small_multiples_svg(replay, style.log_scale)
    }
}

/// z of a two-sided 95 % normal interval.
const Z95: f64 = 1.96;

/// Times from `from` to `to` in `n` steps.
fn grid(from: f64, to: f64, n: u32) -> Vec<f64> {
    (0..=n)
        .map(|i| from + (to - from) * f64::from(i) / f64::from(n))
        .collect()
}

fn one_series_svg(
    replay: &crate::replay::Replay,
    s: &crate::replay::Series,
    log_scale: bool,
) -> Result<String> {
    let trace = s.trace.items();
    let times: Vec<f64> = trace.iter().map(|p| p.time_h).collect();
    let (t0, t1) = min_max(&times);
    if !(t0.is_finite() && t1.is_finite()) {
        return Err(anyhow!("nothing to plot: no reading with a finite time"));
    }
    let from = s.last_restart_h.unwrap_or(t0).max(t0);
    let curve_grid = grid(from, t1.max(from + 1e-3), 300);
    let mut estimates = Vec::new();
    if let Some(e) = s.last_estimate() {
        let at: Vec<_> = curve_grid
            .iter()
            .map(|&x| e.value_at(crate::online::to_device(x)))
            .collect();
        estimates.push(BandCurve {
            label: "online f32, after the last reading".into(),
            time_h: curve_grid.clone(),
            value: at.iter().map(|m| f64::from(m.value)).collect(),
            sd: at.iter().map(|m| f64::from(m.sd)).collect(),
        });
    }
    if let Some(Ok(fit)) = s.batch.as_ref().map(|b| &b.fit) {
        let curve = fit.curve();
        estimates.push(BandCurve {
            label: "batch fit".into(),
            time_h: curve_grid.clone(),
            value: curve_grid.iter().map(|&x| curve.value(x)).collect(),
            sd: curve_grid.iter().map(|&x| fit.value_sd(x)).collect(),
        });
    }
    let markers = s
        .first_alert_h
        .map(|t| Marker {
            time_h: t,
            label: "saturation alert".into(),
        })
        .into_iter()
        .collect();
    // Phases are labelled only while there are few enough to read.
    let phases = if s.phase_spans.len() <= 12 {
        s.phase_spans
            .iter()
            .map(|&(start_h, end_h, name)| Phase {
                start_h,
                end_h,
                label: name.to_owned(),
            })
            .collect()
    } else {
        Vec::new()
    };
    let data = PlotData {
        title: format!("{} — {}: readings and estimates", replay.source, s.name),
        readings: trace
            .iter()
            .map(|p| PlotPoint {
                time_h: p.time_h,
                od: p.value,
                rejected: p.rejected,
            })
            .collect(),
        truth: Vec::new(),
        estimates,
        markers,
        phases,
    };
    let batch = s.batch.as_ref().and_then(|b| b.fit.as_ref().ok());
    let history: Vec<HistoryPoint> = trace
        .iter()
        .map(|p| HistoryPoint {
            time_h: p.time_h,
            capacity: p.capacity,
            rate: p.rate,
        })
        .collect();
    render_with_history(
        &data,
        &history,
        [
            (batch.map(|f| f.capacity), "batch fit of the whole log"),
            (batch.map(|f| f.rate_per_h), "batch fit of the whole log"),
        ],
        log_scale,
    )
}

/// The online estimate after one reading, for the history panels.
///
/// Units: `time_h` hours; capacity (value, sd) OD units; rate (value, sd)
/// per hour.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct HistoryPoint {
    /// Time of the reading, hours.
    pub time_h: f64,
    /// Capacity estimate and sd, OD units, once placed.
    pub capacity: Option<(f32, f32)>,
    /// μmax estimate and sd, per hour, once there is an estimate.
    pub rate: Option<(f32, f32)>,
}

/// `data` as the main chart (1000 × 540 pixels) above two panels that show
/// how the capacity and μmax estimates and their 95 % bands moved reading
/// by reading, each with a dashed reference line (value, legend label).
///
/// # Errors
///
/// Nothing to draw, or a drawing error.
pub fn render_with_history(
    data: &PlotData,
    history: &[HistoryPoint],
    references: [(Option<f64>, &str); 2],
    log_scale: bool,
) -> Result<String> {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (1000, 900)).into_drawing_area();
        root.fill(&WHITE).map_err(draw_err)?;
        let (top, bottom) = root.split_vertically(540);
        draw_main(&top, data, log_scale)?;
        let (left, right) = bottom.split_horizontally(500);
        let capacity: Vec<(f64, Option<(f32, f32)>)> =
            history.iter().map(|p| (p.time_h, p.capacity)).collect();
        let rate: Vec<(f64, Option<(f32, f32)>)> =
            history.iter().map(|p| (p.time_h, p.rate)).collect();
        draw_history(
            &left,
            "capacity estimate, reading by reading",
            "capacity (OD)",
            &capacity,
            references[0],
        )?;
        draw_history(
            &right,
            "μmax estimate, reading by reading",
            "μmax (per h)",
            &rate,
            references[1],
        )?;
        root.present().map_err(draw_err)?;
    }
    Ok(svg)
}

/// An estimate after every reading, with its 95 % band (gaps where there
/// was none), and the batch fit of the whole log as a dashed line.
fn draw_history(
    area: &Area<'_>,
    title: &str,
    y_desc: &str,
    points: &[(f64, Option<(f32, f32)>)],
    (reference, reference_label): (Option<f64>, &str),
) -> Result<()> {
    let blue = ESTIMATE_COLOURS[0];
    let mut segments: Vec<Vec<(f64, f64, f64)>> = vec![Vec::new()];
    for &(t, m) in points {
        match m {
            Some((v, sd)) if v.is_finite() && sd.is_finite() && t.is_finite() => {
                if let Some(last) = segments.last_mut() {
                    last.push((t, f64::from(v), f64::from(sd)));
                }
            }
            _ => {
                if segments.last().is_some_and(|l| !l.is_empty()) {
                    segments.push(Vec::new());
                }
            }
        }
    }
    segments.retain(|s| !s.is_empty());
    let times: Vec<f64> = points
        .iter()
        .map(|p| p.0)
        .filter(|t| t.is_finite())
        .collect();
    let (x0, x1) = min_max(&times);
    if !(x0.is_finite() && x1.is_finite()) {
        return Ok(());
    }
    // The y axis shows the estimates, their bands clipped to three times
    // the spread of the estimates themselves (early bands are enormous).
    let values: Vec<f64> = segments
        .iter()
        .flatten()
        .map(|p| p.1)
        .chain(reference)
        .collect();
    let (v0, v1) = if values.is_empty() {
        (0.0, 1.0)
    } else {
        min_max(&values)
    };
    let spread = (v1 - v0).max(0.05 * v1.abs()).max(1e-3);
    let (y0, y1) = ((v0 - spread).max(0.0), v1 + spread);
    let xpad = ((x1 - x0) * 0.02).max(1e-3);
    let mut chart = ChartBuilder::on(area)
        .caption(title, ("sans-serif", 16))
        .margin(10)
        .x_label_area_size(35)
        .y_label_area_size(55)
        .build_cartesian_2d(x0 - xpad..x1 + xpad, y0..y1)
        .map_err(draw_err)?;
    chart
        .configure_mesh()
        .x_desc("time (h)")
        .y_desc(y_desc)
        .light_line_style(WHITE.mix(0.0))
        .label_style(("sans-serif", 12))
        .axis_desc_style(("sans-serif", 14))
        .draw()
        .map_err(draw_err)?;
    if segments.is_empty() {
        chart
            .draw_series(std::iter::once(Text::new(
                "no estimate yet",
                (x0, (y0 + y1) / 2.0),
                ("sans-serif", 14).into_font(),
            )))
            .map_err(draw_err)?;
    }
    let clip = |y: f64| y.clamp(y0, y1);
    for (i, seg) in segments.iter().enumerate() {
        let outline: Vec<(f64, f64)> = seg
            .iter()
            .map(|&(t, v, sd)| (t, clip(v + Z95 * sd)))
            .chain(seg.iter().rev().map(|&(t, v, sd)| (t, clip(v - Z95 * sd))))
            .collect();
        chart
            .draw_series(std::iter::once(Polygon::new(
                outline,
                blue.mix(0.25).filled(),
            )))
            .map_err(draw_err)?;
        let line = chart
            .draw_series(LineSeries::new(
                seg.iter().map(|&(t, v, _)| (t, clip(v))),
                blue.stroke_width(2),
            ))
            .map_err(draw_err)?;
        if i == 0 {
            line.label("online estimate (95 % band)")
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 20, y)], blue.stroke_width(2))
                });
        }
    }
    if let Some(r) = reference.filter(|r| r.is_finite()) {
        chart
            .draw_series(DashedLineSeries::new(
                [(x0, clip(r)), (x1, clip(r))],
                6,
                4,
                BLACK.stroke_width(1),
            ))
            .map_err(draw_err)?
            .label(reference_label)
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], BLACK));
    }
    chart
        .configure_series_labels()
        .position(SeriesLabelPosition::LowerRight)
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK.mix(0.3))
        .label_font(("sans-serif", 12))
        .draw()
        .map_err(draw_err)?;
    Ok(())
}

/// Panel width and height of a small-multiples plot, pixels.
const PANEL: (u32, u32) = (190, 150);
/// Narrowest small-multiples plot, pixels (room for the title).
const MIN_WIDTH: u32 = 1000;

fn small_multiples_svg(replay: &crate::replay::Replay, log_scale: bool) -> Result<String> {
    let n = replay.series.len();
    #[allow(
        clippy::cast_possible_truncation,
        clippy::cast_sign_loss,
        clippy::cast_precision_loss
    )] // a plate has at most a few thousand wells
    let cols = ((n as f64 * 1.5).sqrt().ceil() as usize).clamp(1, n.max(1));
    let rows = n.div_ceil(cols);
    let lg = |y: f64| if log_scale { y.log10() } else { y };
    let (mut xs, mut ys) = (Vec::new(), Vec::new());
    for s in &replay.series {
        for p in s.trace.items() {
            if p.time_h.is_finite() && p.value.is_finite() && (!log_scale || p.value > 0.0) {
                xs.push(p.time_h);
                ys.push(lg(p.value));
            }
        }
    }
    if xs.is_empty() {
        return Err(anyhow!("nothing to plot: no finite reading"));
    }
    let (x0, x1) = min_max(&xs);
    let (y0, y1) = min_max(&ys);
    let y0 = if log_scale { y0 } else { y0.min(0.0) };
    let (xpad, ypad) = (((x1 - x0) * 0.03).max(1e-3), ((y1 - y0) * 0.08).max(1e-3));
    let (x_range, y_range) = (x0 - xpad..x1 + xpad, y0 - ypad..y1 + ypad);
    #[allow(clippy::cast_possible_truncation)] // small counts
    let (width, height) = (
        (PANEL.0 * cols as u32 + 20).max(MIN_WIDTH),
        PANEL.1 * rows as u32 + 70,
    );
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (width, height)).into_drawing_area();
        root.fill(&WHITE).map_err(draw_err)?;
        let title = format!(
            "{}: {n} series — final online estimate (blue), rejected (red ×), saturation alert (orange); hours, OD{}",
            replay.source,
            if log_scale { " (log scale)" } else { "" }
        );
        let root = root.titled(&title, ("sans-serif", 15)).map_err(draw_err)?;
        let panels = root.margin(4, 4, 10, 10).split_evenly((rows, cols));
        let grey = RGBColor(90, 90, 90);
        let red = RGBColor(200, 30, 30);
        let orange = RGBColor(230, 85, 13);
        for (s, panel) in replay.series.iter().zip(&panels) {
            let e = s.last_estimate();
            let cap = e
                .and_then(|e| e.capacity)
                .map_or_else(|| "K —".to_owned(), |c| format!("K {:.2}", c.value));
            let rate = e.map_or_else(
                || "μ —".to_owned(),
                |e| format!("μ {:.2}/h", e.rate_per_h.value),
            );
            let alert = s
                .first_alert_h
                .map_or_else(String::new, |t| format!(" ⚑{t:.1}h"));
            let caption = format!("{} {cap} {rate}{alert}", s.name);
            let mut chart = ChartBuilder::on(panel)
                .caption(caption, ("sans-serif", 12))
                .margin(3)
                .x_label_area_size(16)
                .y_label_area_size(28)
                .build_cartesian_2d(x_range.clone(), y_range.clone())
                .map_err(draw_err)?;
            let y_label = |v: &f64| {
                if log_scale {
                    format!("{:.2}", 10_f64.powf(*v))
                } else {
                    format!("{v:.1}")
                }
            };
            chart
                .configure_mesh()
                .x_labels(4)
                .y_labels(4)
                .y_label_formatter(&y_label)
                .x_label_formatter(&|v| format!("{v:.0}"))
                .light_line_style(WHITE.mix(0.0))
                .label_style(("sans-serif", 9))
                .draw()
                .map_err(draw_err)?;
            let visible = |p: &&crate::replay::TracePoint| {
                p.time_h.is_finite() && p.value.is_finite() && (!log_scale || p.value > 0.0)
            };
            chart
                .draw_series(
                    s.trace
                        .items()
                        .iter()
                        .filter(|p| !p.rejected)
                        .filter(visible)
                        .map(|p| Circle::new((p.time_h, lg(p.value)), 1, grey.filled())),
                )
                .map_err(draw_err)?;
            chart
                .draw_series(
                    s.trace
                        .items()
                        .iter()
                        .filter(|p| p.rejected)
                        .filter(visible)
                        .map(|p| Cross::new((p.time_h, lg(p.value)), 2, red.stroke_width(1))),
                )
                .map_err(draw_err)?;
            if let Some(e) = e {
                let from = s.last_restart_h.unwrap_or(x0).max(x0);
                let curve: Vec<(f64, f64)> = grid(from, x1.max(from + 1e-3), 120)
                    .into_iter()
                    .map(|t| (t, f64::from(e.value_at(crate::online::to_device(t)).value)))
                    .filter(|(_, y)| y.is_finite() && (!log_scale || *y > 0.0))
                    .map(|(t, y)| (t, lg(y).clamp(y_range.start, y_range.end)))
                    .collect();
                chart
                    .draw_series(LineSeries::new(curve, ESTIMATE_COLOURS[0].stroke_width(2)))
                    .map_err(draw_err)?;
            }
            if let Some(t) = s.first_alert_h {
                chart
                    .draw_series(DashedLineSeries::new(
                        [(t, y_range.start), (t, y_range.end)],
                        3,
                        2,
                        orange.stroke_width(1),
                    ))
                    .map_err(draw_err)?;
            }
        }
        root.present().map_err(draw_err)?;
    }
    Ok(svg)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sample() -> PlotData {
        // An invented logistic, K = 1.2 OD, r = 0.6 per hour, midpoint 6 h.
        let f = |t: f64| 1.2 / (1.0 + (-0.6 * (t - 6.0)).exp());
        let times: Vec<f64> = (0..=24).map(|i| f64::from(i) * 0.5).collect();
        PlotData {
            title: "test plot (invented)".into(),
            readings: times
                .iter()
                .enumerate()
                .map(|(i, &t)| PlotPoint {
                    time_h: t,
                    od: f(t) + if i == 7 { 0.3 } else { 0.0 },
                    rejected: i == 7,
                })
                .collect(),
            truth: times.iter().map(|&t| (t, f(t))).collect(),
            estimates: vec![BandCurve {
                label: "estimate".into(),
                time_h: times.clone(),
                value: times.iter().map(|&t| f(t) * 1.01).collect(),
                sd: vec![0.02; times.len()],
            }],
            markers: vec![Marker {
                time_h: 9.5,
                label: "alert".into(),
            }],
            phases: vec![
                Phase {
                    start_h: 0.0,
                    end_h: 2.6,
                    label: "lag".into(),
                },
                Phase {
                    start_h: 2.6,
                    end_h: 9.7,
                    label: "growth".into(),
                },
            ],
        }
    }

    #[test]
    fn svg_has_every_element() {
        let svg = render_svg(&sample(), 800, 500).unwrap();
        assert!(svg.starts_with("<svg"), "{}", &svg[..80]);
        assert!(svg.trim_end().ends_with("</svg>"));
        // 24 accepted readings as circles (plus one legend circle).
        assert_eq!(svg.matches("<circle").count(), 25);
        // Labels are SVG text, readable without fonts.
        for label in [
            "test plot (invented)",
            "lag",
            "growth",
            "alert",
            "estimate (±2 sd)",
            "truth (closed form)",
            "rejected reading",
            "time (h)",
        ] {
            assert!(
                svg.contains(&format!("\n{label}\n</text>")),
                "missing {label}"
            );
        }
        // The band is a filled polygon with both edges: 2 × 25 vertices.
        let polygon = svg
            .split("<polygon")
            .nth(1)
            .expect("a band polygon")
            .split("points=\"")
            .nth(1)
            .unwrap()
            .split('"')
            .next()
            .unwrap();
        assert_eq!(polygon.split_whitespace().count(), 50);
        assert!(svg.len() > 10_000);
    }

    #[test]
    fn writes_a_file_and_refuses_empty_data() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("p.svg");
        write_svg(&path, &sample()).unwrap();
        let text = std::fs::read_to_string(&path).unwrap();
        assert!(text.contains("</svg>"));
        let err = write_svg(&dir.path().join("empty.svg"), &PlotData::default());
        assert!(err.is_err());
        assert!(!dir.path().join("empty.svg").exists());
    }
}
