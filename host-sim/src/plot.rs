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
    let (x_range, y_range) = ranges(data)?;
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (width, height)).into_drawing_area();
        root.fill(&WHITE).map_err(draw_err)?;
        let mut chart = ChartBuilder::on(&root)
            .caption(&data.title, ("sans-serif", 20))
            .margin(12)
            .x_label_area_size(40)
            .y_label_area_size(55)
            .build_cartesian_2d(x_range.clone(), y_range.clone())
            .map_err(draw_err)?;
        chart
            .configure_mesh()
            .x_desc("time (h)")
            .y_desc("signal (OD)")
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

        for (i, est) in data.estimates.iter().enumerate() {
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
        root.present().map_err(draw_err)?;
    }
    Ok(svg)
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
fn ranges(data: &PlotData) -> Result<Ranges> {
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
    let y0 = y0.min(0.0);
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
