//! Calibration: observed share of events against predicted probability, by groups of
//! predictions (a dot per group with its 95% Wilson interval), a smoothed curve, the ideal
//! diagonal, and below it a histogram of the predictions (where the data lie).

use plotters::coord::Shift;
use plotters::prelude::*;

use crate::{
    begin, cell, draw_count_strip, fail, legend, message, rgb, style_mesh, thin, Corner, Drawn,
    Look, Mark, Table, REFERENCE,
};

/// One group of predictions (as `spinney_core::metrics::curves::calibration_groups` gives).
#[derive(Debug, Clone, PartialEq)]
pub struct CalibrationBin {
    pub lowest_predicted: f64,
    pub highest_predicted: f64,
    pub mean_predicted: f64,
    /// Share of events in the group and its 95% Wilson interval.
    pub observed: f64,
    pub low: f64,
    pub high: f64,
    pub rows: u64,
}

/// One run's calibration.
#[derive(Debug, Clone, PartialEq)]
pub struct CalibrationRun {
    pub name: String,
    pub colour: (u8, u8, u8),
    pub bins: Vec<CalibrationBin>,
    /// (predicted, smoothed observed share), as `smoothed_calibration` gives; may be empty.
    pub smoothed: Vec<(f64, f64)>,
    /// Counts of predictions in equal-width bins over 0–1 ([`probability_histogram`]).
    pub histogram: Vec<u64>,
}

/// What the calibration chart shows.
#[derive(Debug, Clone, PartialEq)]
pub struct CalibrationChart {
    /// Drawn above the chart; empty for none.
    pub title: String,
    pub runs: Vec<CalibrationRun>,
}

const X_LABEL: &str = "predicted probability of the event (0–1)";
const Y_LABEL: &str = "observed share with the event (0–1)";

/// Counts of `probabilities` in `bins` equal-width bins over 0–1 (1 counts in the last);
/// values that are not finite or outside 0–1 are not counted.
pub fn probability_histogram(probabilities: &[f64], bins: usize) -> Vec<u64> {
    let mut counts = vec![0u64; bins];
    if bins == 0 {
        return counts;
    }
    for &p in probabilities {
        if (0.0..=1.0).contains(&p) {
            counts[((p * bins as f64) as usize).min(bins - 1)] += 1;
        }
    }
    counts
}

fn finite_bin(b: &CalibrationBin) -> bool {
    b.mean_predicted.is_finite() && b.observed.is_finite()
}

/// Draws the calibration chart; `scale` is the device pixel ratio. Groups whose mean or
/// share is not finite are skipped, as are interval ends that are not.
pub fn draw_calibration<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    chart: &CalibrationChart,
    scale: f64,
) -> Drawn {
    let look = Look::new(scale);
    let area = begin(area, &chart.title, &look)?;
    let shown = |r: &CalibrationRun| {
        r.bins.iter().any(finite_bin)
            || r.smoothed
                .iter()
                .filter(|(x, y)| x.is_finite() && y.is_finite())
                .count()
                >= 2
    };
    if !chart.runs.iter().any(shown) {
        return message(
            &area,
            "No calibration to draw: no group of predictions has a finite share.",
            &look,
        );
    }
    let (_, h) = area.dim_in_pixel();
    let (upper, lower) = area.split_vertically((h as f64 * 0.72) as i32);
    let mut c = ChartBuilder::on(&upper)
        .margin_top(look.px(12.0))
        .margin_left(look.px(12.0))
        .margin_right(look.px(12.0))
        .x_label_area_size(look.px(22.0))
        .y_label_area_size(look.px(60.0))
        .build_cartesian_2d(0f64..1f64, 0f64..1f64)
        .map_err(fail)?;
    let no_label = |_: &f64| String::new();
    style_mesh(&mut c.configure_mesh(), &look, "", Y_LABEL)
        .x_labels(6)
        .x_label_formatter(&no_label)
        .draw()
        .map_err(fail)?;
    c.draw_series(DashedLineSeries::new(
        [(0.0, 0.0), (1.0, 1.0)],
        look.px(6.0) as u32,
        look.px(4.0) as u32,
        look.line(REFERENCE, 1.5),
    ))
    .map_err(fail)?;
    let mut entries = Vec::new();
    // Several runs: one legend entry each (their colour), and one saying what dots and
    // lines are, so the legend leaves the curves in sight.
    let several = chart.runs.iter().filter(|r| shown(r)).count() > 1;
    let cap = f64::from(look.px(4.0)) / f64::from(c.plotting_area().dim_in_pixel().0.max(1));
    for run in chart.runs.iter().filter(|r| shown(r)) {
        let colour = rgb(run.colour);
        let smooth = thin(
            &c,
            run.smoothed.iter().map(|&(x, y)| (x, y.clamp(0.0, 1.0))),
        );
        let smooth_drawn = smooth.len() >= 2;
        if smooth_drawn {
            c.draw_series(LineSeries::new(smooth, look.line(colour, 2.0)))
                .map_err(fail)?;
            entries.push((
                match several {
                    true => run.name.clone(),
                    false => format!("{}: smoothed", run.name),
                },
                Mark::Line {
                    colour,
                    dashed: false,
                },
            ));
        }
        let bins: Vec<&CalibrationBin> = run.bins.iter().filter(|b| finite_bin(b)).collect();
        for b in &bins {
            let (lo, hi) = (b.low.clamp(0.0, 1.0), b.high.clamp(0.0, 1.0));
            if b.low.is_finite() && b.high.is_finite() {
                let x = b.mean_predicted;
                let whisker = look.line(colour, 1.2);
                c.draw_series([
                    PathElement::new(vec![(x, lo), (x, hi)], whisker),
                    PathElement::new(vec![(x - cap, lo), (x + cap, lo)], whisker),
                    PathElement::new(vec![(x - cap, hi), (x + cap, hi)], whisker),
                ])
                .map_err(fail)?;
            }
        }
        c.draw_series(bins.iter().map(|b| {
            Circle::new(
                (b.mean_predicted.clamp(0.0, 1.0), b.observed.clamp(0.0, 1.0)),
                look.px(4.0) as u32,
                colour.filled(),
            )
        }))
        .map_err(fail)?;
        if !bins.is_empty() && (!several || !smooth_drawn) {
            entries.push((
                format!("{}: groups, 95% interval", run.name),
                Mark::Dot(colour),
            ));
        }
    }
    if several {
        entries.push((
            "dots: tenths of the predictions, 95% interval; lines: smoothed".into(),
            Mark::Dot(REFERENCE),
        ));
    }
    entries.push((
        "ideal (observed = predicted)".into(),
        Mark::Line {
            colour: REFERENCE,
            dashed: true,
        },
    ));
    legend(
        &upper,
        c.plotting_area().get_pixel_range(),
        &entries,
        Corner::TopLeft,
        &look,
    )?;
    // The predictions' histogram: grouped bars, one per run within each bin.
    let runs: Vec<&CalibrationRun> = chart
        .runs
        .iter()
        .filter(|r| !r.histogram.is_empty())
        .collect();
    let part = 1.0 / runs.len().max(1) as f64;
    let mut bars = Vec::new();
    for (k, run) in runs.iter().enumerate() {
        let n = run.histogram.len() as f64;
        for (i, &count) in run.histogram.iter().enumerate() {
            let from = (i as f64 + k as f64 * part) / n;
            bars.push((from, from + part / n, count, rgb(run.colour)));
        }
    }
    draw_count_strip(&lower, (0.0, 1.0), &bars, X_LABEL, true, &look)?;
    area.present().map_err(fail)
}

/// The smoothed curve's value at `x` (straight between its points), None outside it.
fn smoothed_at(points: &[(f64, f64)], x: f64) -> Option<f64> {
    points.windows(2).find_map(|w| {
        let ((x0, y0), (x1, y1)) = (w[0], w[1]);
        if !(x0 <= x && x <= x1) {
            None
        } else if x1 > x0 {
            Some(y0 + (y1 - y0) * (x - x0) / (x1 - x0))
        } else {
            Some(y0)
        }
    })
}

/// The chart's numbers: one row per run and group (predictions from–to, rows, mean
/// predicted, observed share, its 95% interval, the smoothed curve at the group's mean
/// prediction), then each run's histogram as counts per range of prediction.
pub fn calibration_table(chart: &CalibrationChart) -> Table {
    let columns = [
        "run",
        "predictions from–to",
        "rows",
        "mean predicted",
        "observed share",
        "95% interval",
        "smoothed curve",
    ]
    .map(String::from)
    .to_vec();
    let mut rows = Vec::new();
    for run in &chart.runs {
        for b in &run.bins {
            rows.push(vec![
                run.name.clone(),
                format!(
                    "{}–{}",
                    cell(b.lowest_predicted, 3),
                    cell(b.highest_predicted, 3)
                ),
                b.rows.to_string(),
                cell(b.mean_predicted, 3),
                cell(b.observed, 3),
                format!("{}–{}", cell(b.low, 3), cell(b.high, 3)),
                smoothed_at(&run.smoothed, b.mean_predicted).map_or("—".into(), |v| cell(v, 3)),
            ]);
        }
        let n = run.histogram.len();
        for (i, &count) in run.histogram.iter().enumerate() {
            let (from, to) = (i as f64 / n as f64, (i + 1) as f64 / n as f64);
            rows.push(vec![
                run.name.clone(),
                format!("{from:.2}–{to:.2} (histogram)"),
                count.to_string(),
                "—".into(),
                "—".into(),
                "—".into(),
                "—".into(),
            ]);
        }
    }
    Table {
        caption: "Calibration: observed against predicted by group of predictions".into(),
        columns,
        rows,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::run_colour;
    use crate::testing::{filled_rects, stroked, svg};

    /// Wilson's 95% interval (Wilson 1927; Newcombe, Stat Med 1998;17:857–872, method 3).
    fn wilson(events: u64, n: u64) -> (f64, f64) {
        let (p, n, z) = (events as f64 / n as f64, n as f64, 1.959963984540054);
        let centre = (p + z * z / (2.0 * n)) / (1.0 + z * z / n);
        let half = z / (1.0 + z * z / n) * (p * (1.0 - p) / n + z * z / (4.0 * n * n)).sqrt();
        (centre - half, centre + half)
    }

    fn run(name: &str, colour: (u8, u8, u8), bend: f64) -> CalibrationRun {
        let bins = (0..10)
            .map(|g| {
                let mean = 0.05 + 0.1 * g as f64;
                let events = ((mean.powf(bend)) * 100.0).round() as u64;
                let (low, high) = wilson(events, 100);
                CalibrationBin {
                    lowest_predicted: mean - 0.05,
                    highest_predicted: mean + 0.05,
                    mean_predicted: mean,
                    observed: events as f64 / 100.0,
                    low,
                    high,
                    rows: 100,
                }
            })
            .collect();
        let smoothed = (0..50)
            .map(|i| {
                let x = 0.05 + 0.9 * i as f64 / 49.0;
                (x, x.powf(bend))
            })
            .collect();
        let probabilities: Vec<f64> = (0..1000).map(|i| i as f64 / 999.0).collect();
        CalibrationRun {
            name: name.into(),
            colour,
            bins,
            smoothed,
            histogram: probability_histogram(&probabilities, 20),
        }
    }

    #[test]
    fn histogram_counts_every_probability_once() {
        let h = probability_histogram(&[0.0, 0.05, 0.1, 0.999, 1.0, f64::NAN, -0.1, 1.5], 10);
        assert_eq!(h, vec![2, 1, 0, 0, 0, 0, 0, 0, 0, 2]);
        assert!(probability_histogram(&[0.5], 0).is_empty());
    }

    #[test]
    fn calibration_chart_has_whiskers_dots_curve_and_histogram() {
        let chart = CalibrationChart {
            title: "Calibration".into(),
            runs: vec![run("forest", run_colour(0), 1.3)],
        };
        let out = svg("calibration-1", (600, 400), 1.0, |a, s| {
            draw_calibration(a, &chart, s)
        });
        for text in [
            "Calibration",
            "predicted probability of the event (0–1)",
            "observed share with the event",
            "forest: smoothed",
            "forest: groups, 95% interval",
            "ideal (observed = predicted)",
            "rows",
        ] {
            assert!(out.contains(text), "no '{text}' in the chart");
        }
        // Ten dots (and one legend dot).
        assert_eq!(out.matches("<circle").count(), 11);
        // Per group: a whisker and two caps (2-point lines); the smoothed curve of 50 points;
        // two legend marks.
        let lines = stroked(&out, run_colour(0));
        assert_eq!(lines.iter().filter(|&&n| n == 2).count(), 30 + 1);
        assert!(lines.contains(&50));
        // Twenty histogram bars (all counts non-zero) plus the legend's none.
        assert_eq!(filled_rects(&out, run_colour(0)), 20);
    }

    #[test]
    fn several_runs_share_the_histogram_bins() {
        let chart = CalibrationChart {
            title: String::new(),
            runs: vec![
                run("forest", run_colour(0), 1.3),
                run("boosting", run_colour(1), 0.8),
            ],
        };
        let out = svg("calibration-2", (600, 400), 1.0, |a, s| {
            draw_calibration(a, &chart, s)
        });
        assert_eq!(filled_rects(&out, run_colour(0)), 20);
        assert_eq!(filled_rects(&out, run_colour(1)), 20);
        // One legend entry a run, and one for what dots and lines are.
        assert!(out.contains("boosting") && !out.contains("boosting: smoothed"));
        assert!(out.contains("dots: tenths of the predictions"));
        let table = calibration_table(&chart);
        assert_eq!(table.rows.len(), 2 * (10 + 20));
        // Group 3 of the forest: mean 0.25, 0.25^1.3 of 100 rows = 16 events.
        assert_eq!(
            table.rows[2][3..6],
            [
                "0.250".to_string(),
                "0.160".into(),
                format!("{:.3}–{:.3}", wilson(16, 100).0, wilson(16, 100).1)
            ]
        );
        assert_eq!(table.rows[2][6], format!("{:.3}", 0.25f64.powf(1.3)));
        assert_eq!(table.rows[10][1], "0.00–0.05 (histogram)");
    }

    #[test]
    fn degenerate_calibration_input_gives_a_message() {
        let mut nan = run("nan", run_colour(0), 1.0);
        for b in &mut nan.bins {
            b.observed = f64::NAN;
        }
        nan.smoothed.truncate(1);
        for runs in [vec![], vec![nan]] {
            let out = svg("calibration-empty", (600, 400), 1.0, |a, s| {
                draw_calibration(
                    a,
                    &CalibrationChart {
                        title: String::new(),
                        runs,
                    },
                    s,
                )
            });
            assert!(out.contains("No calibration to draw"));
        }
        // One group, no curve, no histogram: a dot with its whisker, no panic.
        let mut one = run("one", run_colour(2), 1.0);
        one.bins.truncate(1);
        one.smoothed.clear();
        one.histogram.clear();
        one.bins[0].low = f64::NAN;
        let out = svg("calibration-one", (600, 400), 1.0, |a, s| {
            draw_calibration(
                a,
                &CalibrationChart {
                    title: String::new(),
                    runs: vec![one],
                },
                s,
            )
        });
        assert_eq!(out.matches("<circle").count(), 2);
    }
}
