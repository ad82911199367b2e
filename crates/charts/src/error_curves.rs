//! Error by ensemble size: the error of one or several runs against their number of trees or
//! rounds, out-of-sample curves solid and training (apparent) curves dashed.

use plotters::coord::Shift;
use plotters::prelude::*;

use crate::{
    begin, cell, fail, legend, message, rgb, spread_indices, style_mesh, Corner, Drawn, Look, Mark,
    Table,
};

/// One line of a chart: the value after 1, 2, ... members.
#[derive(Debug, Clone, PartialEq)]
pub struct Curve {
    /// The legend's words; with several runs, name the run too ("run 2: out-of-bag").
    pub name: String,
    /// `values[i]` belongs to `i + 1` members; values that are not finite are skipped.
    pub values: Vec<f64>,
    pub colour: (u8, u8, u8),
    /// Dashed lines for figures that are not validation (training fit).
    pub dashed: bool,
}

/// What an error-by-size chart shows. Several runs: give each run one colour
/// ([`crate::run_colour`]) and two curves, out-of-sample solid and training dashed; runs of
/// different lengths share the x axis up to the longest.
#[derive(Debug, Clone, PartialEq)]
pub struct ErrorChart {
    /// Drawn above the chart; empty for none.
    pub title: String,
    /// With its unit, e.g. "number of trees".
    pub x_label: String,
    /// With its unit, e.g. "error rate (share misclassified)".
    pub y_label: String,
    pub curves: Vec<Curve>,
}

/// Draws `chart` on `area`. `scale` multiplies text sizes and line widths (the device pixel
/// ratio in the page, so the chart is sharp and its text readable on any screen).
pub fn draw_error_curves<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    chart: &ErrorChart,
    scale: f64,
) -> Drawn {
    let look = Look::new(scale);
    let area = begin(area, &chart.title, &look)?;
    let finite = |c: &Curve| c.values.iter().filter(|v| v.is_finite()).count();
    if chart.curves.iter().all(|c| finite(c) == 0) {
        return message(&area, "No error figures to draw yet.", &look);
    }
    let members = chart
        .curves
        .iter()
        .map(|c| c.values.len())
        .max()
        .unwrap_or(0)
        .max(2);
    let top = chart
        .curves
        .iter()
        .flat_map(|c| c.values.iter().copied())
        .filter(|v| v.is_finite())
        .fold(0.0f64, f64::max);
    let top = if top > 0.0 { top * 1.1 } else { 1.0 };
    let mut c = ChartBuilder::on(&area)
        .margin(look.px(12.0))
        .x_label_area_size(look.px(44.0))
        .y_label_area_size(look.px(60.0))
        .build_cartesian_2d(1i32..members as i32, 0f64..top)
        .map_err(fail)?;
    style_mesh(
        &mut c.configure_mesh(),
        &look,
        &chart.x_label,
        &chart.y_label,
    )
    .draw()
    .map_err(fail)?;
    for curve in &chart.curves {
        let points: Vec<(i32, f64)> = curve
            .values
            .iter()
            .enumerate()
            .filter(|(_, v)| v.is_finite())
            .map(|(i, &v)| (i as i32 + 1, v))
            .collect();
        let style = look.line(rgb(curve.colour), 2.0);
        if points.len() == 1 {
            // One value: a dot, since a line needs two.
            c.draw_series(
                points
                    .iter()
                    .map(|&p| Circle::new(p, look.px(3.0) as u32, style.filled())),
            )
            .map_err(fail)?;
        } else if curve.dashed {
            c.draw_series(DashedLineSeries::new(
                points,
                look.px(6.0) as u32,
                look.px(4.0) as u32,
                style,
            ))
            .map_err(fail)?;
        } else {
            c.draw_series(LineSeries::new(points, style))
                .map_err(fail)?;
        }
    }
    let entries: Vec<(String, Mark)> = chart
        .curves
        .iter()
        .map(|c| {
            let mark = Mark::Line {
                colour: rgb(c.colour),
                dashed: c.dashed,
            };
            (c.name.clone(), mark)
        })
        .collect();
    legend(
        &area,
        c.plotting_area().get_pixel_range(),
        &entries,
        Corner::TopRight,
        &look,
    )?;
    area.present().map_err(fail)
}

/// The chart's numbers: every size up to 25, else 25 sizes spread evenly, the first and
/// last included; one column per curve, 4 decimals.
pub fn error_table(chart: &ErrorChart) -> Table {
    let n = chart
        .curves
        .iter()
        .map(|c| c.values.len())
        .max()
        .unwrap_or(0);
    let mut columns = vec![chart.x_label.clone()];
    columns.extend(chart.curves.iter().map(|c| c.name.clone()));
    let rows = spread_indices(n, 25)
        .into_iter()
        .map(|i| {
            let mut row = vec![(i + 1).to_string()];
            row.extend(
                chart
                    .curves
                    .iter()
                    .map(|c| c.values.get(i).map_or("—".into(), |&v| cell(v, 4))),
            );
            row
        })
        .collect();
    Table {
        caption: format!("{} by {}", chart.y_label, chart.x_label),
        columns,
        rows,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testing::{polylines, stroked, svg};
    use crate::{run_colour, COLOURS};

    fn draw(chart: &ErrorChart) -> String {
        svg(
            &format!("error-{}", chart.curves.len()),
            (640, 360),
            1.0,
            |a, s| draw_error_curves(a, chart, s),
        )
    }

    fn example() -> ErrorChart {
        ErrorChart {
            title: String::new(),
            x_label: "trees".into(),
            y_label: "error rate".into(),
            curves: vec![
                Curve {
                    name: "out-of-bag".into(),
                    values: (1..=50).map(|t| 0.3 / (t as f64).sqrt() + 0.1).collect(),
                    colour: COLOURS[0],
                    dashed: false,
                },
                Curve {
                    name: "training (apparent)".into(),
                    values: (1..=50).map(|t| 0.1 / t as f64).collect(),
                    colour: COLOURS[1],
                    dashed: true,
                },
            ],
        }
    }

    #[test]
    fn the_error_chart_has_its_axis_labels_legend_and_lines() {
        let out = draw(&example());
        assert!(out.starts_with("<svg"), "{}", &out[..60.min(out.len())]);
        for text in ["trees", "error rate", "out-of-bag", "training (apparent)"] {
            assert!(out.contains(text), "no '{text}' in the chart");
        }
        // The solid curve is one polyline of 50 points.
        assert_eq!(polylines(&out).into_iter().max(), Some(50));
        assert!(out.contains("stroke=\"#4D7C55\""), "moss curve missing");
    }

    #[test]
    fn several_runs_share_the_axis_each_in_its_colour() {
        // A forest settling after 300 trees and boosting still improving after 1,000 rounds
        // while its training error reaches zero: the picture issue 7 asks for.
        let forest: Vec<f64> = (1..=300).map(|t| 0.2 + 0.2 / t as f64).collect();
        let boosting: Vec<f64> = (1..=1000)
            .map(|t| 0.15 + 0.25 * (-(t as f64) / 400.0).exp())
            .collect();
        let boosting_training: Vec<f64> = (1..=1000)
            .map(|t| (0.2 - t as f64 / 2000.0).max(0.0))
            .collect();
        let chart = ErrorChart {
            title: "Error by number of trees or rounds".into(),
            x_label: "number of trees or rounds".into(),
            y_label: "error rate (share misclassified)".into(),
            curves: vec![
                Curve {
                    name: "run 1 forest: out-of-bag".into(),
                    values: forest,
                    colour: run_colour(0),
                    dashed: false,
                },
                Curve {
                    name: "run 2 boosting: held out".into(),
                    values: boosting,
                    colour: run_colour(1),
                    dashed: false,
                },
                Curve {
                    name: "run 2 boosting: training".into(),
                    values: boosting_training,
                    colour: run_colour(1),
                    dashed: true,
                },
            ],
        };
        let out = draw(&chart);
        for text in [
            "Error by number of trees or rounds",
            "run 1 forest: out-of-bag",
            "run 2 boosting: training",
            "(share misclassified)",
        ] {
            assert!(out.contains(text), "no '{text}' in the chart");
        }
        assert_eq!(
            stroked(&out, run_colour(0))
                .iter()
                .filter(|&&n| n > 2)
                .count(),
            1
        );
        // Solid and dashed boosting curves (dashes are many short polylines).
        assert!(stroked(&out, run_colour(1)).len() > 2);
        let table = error_table(&chart);
        assert_eq!(table.columns.len(), 4);
        assert_eq!(table.rows.len(), 25);
        assert_eq!(table.rows[24][0], "1000");
        assert_eq!(table.rows[24][1], "—", "the forest has no 1,000th tree");
    }

    #[test]
    fn curves_with_gaps_or_one_point_still_draw() {
        let chart = ErrorChart {
            title: String::new(),
            x_label: "rounds".into(),
            y_label: "error rate".into(),
            curves: vec![Curve {
                name: "training (apparent)".into(),
                values: vec![f64::NAN, 0.0],
                colour: COLOURS[2],
                dashed: false,
            }],
        };
        let out = draw(&chart);
        assert!(out.contains("rounds") && out.contains("<circle"));
        let empty = ErrorChart {
            curves: Vec::new(),
            ..chart.clone()
        };
        assert!(draw(&empty).contains("No error figures to draw yet."));
        let all_nan = ErrorChart {
            curves: vec![Curve {
                values: vec![f64::NAN; 3],
                ..chart.curves[0].clone()
            }],
            ..chart
        };
        assert!(draw(&all_nan).contains("No error figures to draw yet."));
    }
}
