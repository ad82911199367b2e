//! ROC curves of several runs overlaid, each named with its AUC, and the chance diagonal.

use plotters::coord::Shift;
use plotters::prelude::*;

use crate::{
    begin, cell, fail, legend, message, rgb, style_mesh, thin, Corner, Drawn, Look, Mark, Table,
    REFERENCE,
};

/// One run's ROC curve.
#[derive(Debug, Clone, PartialEq)]
pub struct RocRun {
    pub name: String,
    /// Its area under the curve, shown in the legend; None or not finite: left out.
    pub auc: Option<f64>,
    /// (false-positive rate, true-positive rate) from (0, 0) up, in the order of
    /// `spinney_core::metrics::curves::roc_points`; points that are not finite are skipped.
    pub points: Vec<(f64, f64)>,
    pub colour: (u8, u8, u8),
}

/// What the ROC chart shows.
#[derive(Debug, Clone, PartialEq)]
pub struct RocChart {
    /// Drawn above the chart; empty for none.
    pub title: String,
    pub runs: Vec<RocRun>,
}

const X_LABEL: &str = "false-positive rate, 1 − specificity (share of non-events)";
const Y_LABEL: &str = "true-positive rate, sensitivity (share of events)";

fn label(run: &RocRun) -> String {
    match run.auc.filter(|a| a.is_finite()) {
        Some(auc) => format!("{} (AUC {auc:.3})", run.name),
        None => run.name.clone(),
    }
}

fn drawable(run: &RocRun) -> bool {
    run.points
        .iter()
        .filter(|(x, y)| x.is_finite() && y.is_finite())
        .count()
        >= 2
}

/// Draws the ROC curves on `area`; `scale` is the device pixel ratio. Runs with fewer than
/// two finite points are left out and marked "no curve" in the legend.
pub fn draw_roc<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    chart: &RocChart,
    scale: f64,
) -> Drawn {
    let look = Look::new(scale);
    let area = begin(area, &chart.title, &look)?;
    if !chart.runs.iter().any(drawable) {
        return message(
            &area,
            "No ROC curve to draw: a curve needs at least two points.",
            &look,
        );
    }
    let mut c = ChartBuilder::on(&area)
        .margin(look.px(12.0))
        .x_label_area_size(look.px(44.0))
        .y_label_area_size(look.px(60.0))
        .build_cartesian_2d(0f64..1f64, 0f64..1f64)
        .map_err(fail)?;
    style_mesh(&mut c.configure_mesh(), &look, X_LABEL, Y_LABEL)
        .x_labels(6)
        .draw()
        .map_err(fail)?;
    let reference = look.line(REFERENCE, 1.5);
    c.draw_series(DashedLineSeries::new(
        [(0.0, 0.0), (1.0, 1.0)],
        look.px(6.0) as u32,
        look.px(4.0) as u32,
        reference,
    ))
    .map_err(fail)?;
    let mut entries = Vec::new();
    for run in &chart.runs {
        let colour = rgb(run.colour);
        if drawable(run) {
            let points = thin(
                &c,
                run.points
                    .iter()
                    .map(|&(x, y)| (x.clamp(0.0, 1.0), y.clamp(0.0, 1.0))),
            );
            c.draw_series(LineSeries::new(points, look.line(colour, 2.0)))
                .map_err(fail)?;
            entries.push((
                label(run),
                Mark::Line {
                    colour,
                    dashed: false,
                },
            ));
        } else {
            entries.push((format!("{}: no curve", run.name), Mark::Block(colour)));
        }
    }
    entries.push((
        "chance (AUC 0.5)".to_string(),
        Mark::Line {
            colour: REFERENCE,
            dashed: true,
        },
    ));
    legend(
        &area,
        c.plotting_area().get_pixel_range(),
        &entries,
        Corner::BottomRight,
        &look,
    )?;
    area.present().map_err(fail)
}

/// The true-positive rate where the curve (straight between its points) crosses the
/// false-positive rate `at`; on a vertical stretch, its top. None outside the points.
fn rate_at(points: &[(f64, f64)], at: f64) -> Option<f64> {
    let finite: Vec<(f64, f64)> = points
        .iter()
        .copied()
        .filter(|(x, y)| x.is_finite() && y.is_finite())
        .collect();
    if finite.len() == 1 && finite[0].0 == at {
        return Some(finite[0].1);
    }
    finite
        .windows(2)
        .filter_map(|w| {
            let ((x0, y0), (x1, y1)) = (w[0], w[1]);
            let (lo, hi) = (x0.min(x1), x0.max(x1));
            if at < lo || at > hi {
                None
            } else if hi == lo {
                Some(y0.max(y1))
            } else {
                Some(y0 + (y1 - y0) * (at - x0) / (x1 - x0))
            }
        })
        .reduce(f64::max)
}

/// The false-positive rates the table reads the curves at.
const TABLE_RATES: [f64; 12] = [0.0, 0.05, 0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 1.0];

/// The chart's numbers: each run's true-positive rate at false-positive rates 0, 0.05, 0.1,
/// 0.2, …, 1 (read off the curve, straight between its points), then each run's AUC.
pub fn roc_table(chart: &RocChart) -> Table {
    let mut columns = vec!["false-positive rate".to_string()];
    columns.extend(
        chart
            .runs
            .iter()
            .map(|r| format!("true-positive rate, {}", r.name)),
    );
    let mut rows: Vec<Vec<String>> = TABLE_RATES
        .iter()
        .map(|&at| {
            let mut row = vec![format!("{at:.2}")];
            row.extend(
                chart
                    .runs
                    .iter()
                    .map(|r| rate_at(&r.points, at).map_or("—".into(), |v| cell(v, 3))),
            );
            row
        })
        .collect();
    let mut auc = vec!["area under the curve (AUC)".to_string()];
    auc.extend(
        chart
            .runs
            .iter()
            .map(|r| r.auc.map_or("—".into(), |a| cell(a, 3))),
    );
    rows.push(auc);
    Table {
        caption: "ROC curves: true-positive rate at chosen false-positive rates".into(),
        columns,
        rows,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::run_colour;
    use crate::testing::{stroked, svg};

    /// The ROC curve of the worked example in Fawcett, "An introduction to ROC analysis",
    /// Pattern Recognition Letters 27 (2006) 861–874, figure 3: 20 instances, 10 positive;
    /// its AUC is 0.68 (the classes in score order as we recall the figure: from memory;
    /// `fawcetts_curve_has_the_published_area` checks them against the published AUC).
    fn fawcett() -> Vec<(f64, f64)> {
        let labels = "ppnpppnnpnpnpnnnpnpn"; // highest score first
        let (mut tp, mut fp) = (0.0, 0.0);
        let mut out = vec![(0.0, 0.0)];
        for l in labels.chars() {
            if l == 'p' {
                tp += 1.0
            } else {
                fp += 1.0
            }
            out.push((fp / 10.0, tp / 10.0));
        }
        out
    }

    fn example() -> RocChart {
        RocChart {
            title: "ROC curves".into(),
            runs: vec![
                RocRun {
                    name: "forest".into(),
                    auc: Some(0.68),
                    points: fawcett(),
                    colour: run_colour(0),
                },
                RocRun {
                    name: "boosting".into(),
                    auc: Some(0.9),
                    points: (0..=1000)
                        .map(|i| {
                            let x = i as f64 / 1000.0;
                            (x, x.powf(0.2))
                        })
                        .collect(),
                    colour: run_colour(1),
                },
            ],
        }
    }

    #[test]
    fn roc_chart_has_labels_legend_with_auc_and_one_line_per_run() {
        let out = svg("roc-1", (600, 400), 1.0, |a, s| draw_roc(a, &example(), s));
        for text in [
            "ROC curves",
            "false-positive rate",
            "sensitivity",
            "forest (AUC 0.680)",
            "boosting (AUC 0.900)",
            "chance (AUC 0.5)",
        ] {
            assert!(out.contains(text), "no '{text}' in the chart");
        }
        // The curve and its 2-point mark in the legend.
        assert_eq!(
            stroked(&out, run_colour(0)),
            vec![21, 2],
            "every one of Fawcett's 21 points"
        );
        let boosting = stroked(&out, run_colour(1));
        assert_eq!(boosting.len(), 2);
        assert!(
            boosting[0] < 1001,
            "1,001 points thinned to the pixels they cover"
        );
        assert!(
            !stroked(&out, (150, 146, 136)).is_empty(),
            "the chance diagonal"
        );
    }

    #[test]
    fn a_narrow_chart_shortens_long_legend_words_and_keeps_the_box_inside() {
        let mut runs = example();
        runs.runs[0].name =
            "run 3: random forest, 500 trees, judged by 10-fold cross-validation".into();
        let out = svg("roc-narrow", (300, 300), 1.0, |a, s| draw_roc(a, &runs, s));
        assert!(
            !out.contains("judged by 10-fold"),
            "the long name is shortened"
        );
        assert!(out.contains("run 3: random"), "its start is kept");
        assert!(out.contains('…'));
        // Every rectangle (the legend's box among them) starts inside the picture.
        for rect in out.split("<rect").skip(1) {
            let x: f64 = rect
                .split("x=\"")
                .nth(1)
                .and_then(|t| t.split('"').next()?.parse().ok())
                .unwrap_or(0.0);
            assert!(x >= 0.0, "a box starts at x = {x}");
        }
        // A wide chart keeps the words whole.
        let wide = svg("roc-wide", (1400, 600), 1.0, |a, s| draw_roc(a, &runs, s));
        assert!(wide.contains("judged by 10-fold cross-validation (AUC 0.680)"));
    }

    #[test]
    fn roc_chart_scales_with_the_pixel_ratio() {
        let one = svg("roc-2", (600, 400), 1.0, |a, s| draw_roc(a, &example(), s));
        let two = svg("roc-3", (1200, 800), 2.0, |a, s| draw_roc(a, &example(), s));
        assert!(one.contains("stroke-width=\"2\"") && two.contains("stroke-width=\"4\""));
        // Every text twice the size (the SVG backend writes sizes in its own unit, the ratio
        // holds).
        let sizes = |svg: &str| -> Vec<f64> {
            let mut v: Vec<f64> = svg
                .split("font-size=\"")
                .skip(1)
                .filter_map(|t| t.split('"').next()?.parse().ok())
                .collect();
            v.sort_by(f64::total_cmp);
            v.dedup();
            v
        };
        let (a, b) = (sizes(&one), sizes(&two));
        assert_eq!(a.len(), b.len());
        assert!(
            a.iter().zip(&b).all(|(x, y)| (y / x - 2.0).abs() < 1e-9),
            "{a:?} {b:?}"
        );
    }

    #[test]
    fn degenerate_roc_input_gives_a_message_or_skips_the_run() {
        for runs in [
            vec![],
            vec![RocRun {
                name: "one point".into(),
                auc: None,
                points: vec![(0.0, 0.0)],
                colour: run_colour(0),
            }],
            vec![RocRun {
                name: "nan".into(),
                auc: Some(f64::NAN),
                points: vec![(f64::NAN, 0.5), (0.5, f64::NAN)],
                colour: run_colour(0),
            }],
        ] {
            let out = svg("roc-4", (600, 400), 1.0, |a, s| {
                draw_roc(
                    a,
                    &RocChart {
                        title: String::new(),
                        runs,
                    },
                    s,
                )
            });
            assert!(out.contains("No ROC curve to draw"), "{out}");
        }
        let mut mixed = example();
        mixed.runs[1].points.truncate(1);
        let out = svg("roc-5", (600, 400), 1.0, |a, s| draw_roc(a, &mixed, s));
        assert!(out.contains("boosting: no curve") && out.contains("forest (AUC 0.680)"));
        assert!(
            stroked(&out, run_colour(1)).is_empty(),
            "no line for a one-point run"
        );
    }

    #[test]
    fn fawcetts_curve_has_the_published_area() {
        let area: f64 = fawcett()
            .windows(2)
            .map(|w| (w[1].0 - w[0].0) * (w[0].1 + w[1].1) / 2.0)
            .sum();
        assert!((area - 0.68).abs() < 1e-12, "{area}");
    }

    #[test]
    fn roc_table_reads_the_curve_at_fixed_rates() {
        let table = roc_table(&example());
        assert_eq!(
            table.columns,
            [
                "false-positive rate",
                "true-positive rate, forest",
                "true-positive rate, boosting"
            ]
        );
        // Fawcett's curve at FPR 0: the vertical start reaches TPR 0.2 (two positives first).
        assert_eq!(table.rows[0][1], "0.200");
        // At FPR 0.1 the curve is vertical from 0.2 up to 0.5 (three positives after the
        // first negative).
        assert_eq!(table.rows[2][1], "0.500");
        assert_eq!(table.rows[11][1], "1.000");
        assert_eq!(
            table.rows[12],
            ["area under the curve (AUC)", "0.680", "0.900"]
        );
    }
}
