//! Decision curves (Vickers & Elkin, Med Decis Making 2006;26:565–574): the net benefit of
//! acting on each run's predictions over a range of threshold probabilities, beside acting
//! on everyone (treat all) and on no one (treat none, 0).

use plotters::coord::Shift;
use plotters::prelude::*;

use crate::{
    begin, cell, clip_y, fail, legend, message, rgb, span, spread_indices, style_mesh, thin,
    Corner, Drawn, Look, Mark, Table, INK, REFERENCE,
};

/// One run's decision curve: (threshold probability, net benefit), thresholds rising, as
/// `spinney_core::metrics::curves::decision_curve` gives (`threshold`, `model`).
#[derive(Debug, Clone, PartialEq)]
pub struct DecisionRun {
    pub name: String,
    pub colour: (u8, u8, u8),
    pub points: Vec<(f64, f64)>,
}

/// What the decision-curve chart shows.
#[derive(Debug, Clone, PartialEq)]
pub struct DecisionChart {
    /// Drawn above the chart; empty for none.
    pub title: String,
    /// (threshold, net benefit of treating everyone), the same data for every run
    /// (`DecisionPoint::treat_all`).
    pub treat_all: Vec<(f64, f64)>,
    pub runs: Vec<DecisionRun>,
}

const X_LABEL: &str = "threshold probability (0–1)";
const Y_LABEL: &str = "net benefit (true positives per person)";

fn finite(points: &[(f64, f64)]) -> usize {
    points
        .iter()
        .filter(|(x, y)| x.is_finite() && y.is_finite())
        .count()
}

/// Draws the decision curves; `scale` is the device pixel ratio. The y axis runs from a
/// little below 0 to a little above the largest net benefit: treat-all falls steeply below
/// 0 at high thresholds and is cut at the axis (common practice in published decision
/// curves, no source for the exact cut: we take a quarter of the top below 0).
pub fn draw_decision<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    chart: &DecisionChart,
    scale: f64,
) -> Drawn {
    let look = Look::new(scale);
    let area = begin(area, &chart.title, &look)?;
    let all = chart
        .runs
        .iter()
        .flat_map(|r| r.points.iter())
        .chain(chart.treat_all.iter())
        .filter(|(x, y)| x.is_finite() && y.is_finite());
    let xs = span(all.clone().map(|p| p.0));
    let top = span(all.map(|p| p.1)).map(|(_, hi)| hi);
    let (Some((x0, x1)), Some(top)) = (xs, top) else {
        return message(
            &area,
            "No decision curve to draw: no finite net benefit.",
            &look,
        );
    };
    if x1 <= x0 || !chart.runs.iter().any(|r| finite(&r.points) >= 2) {
        return message(
            &area,
            "No decision curve to draw: a curve needs at least two thresholds.",
            &look,
        );
    }
    let top = if top > 0.0 { top * 1.1 } else { 0.05 };
    let bottom = -top / 4.0;
    let mut c = ChartBuilder::on(&area)
        .margin(look.px(12.0))
        .x_label_area_size(look.px(44.0))
        .y_label_area_size(look.px(64.0))
        .build_cartesian_2d(x0..x1, bottom..top)
        .map_err(fail)?;
    style_mesh(&mut c.configure_mesh(), &look, X_LABEL, Y_LABEL)
        .draw()
        .map_err(fail)?;
    let mut entries = Vec::new();
    // Treat none: net benefit 0 at every threshold.
    c.draw_series(LineSeries::new([(x0, 0.0), (x1, 0.0)], look.line(INK, 1.5)))
        .map_err(fail)?;
    entries.push((
        "treat none".to_string(),
        Mark::Line {
            colour: INK,
            dashed: false,
        },
    ));
    if finite(&chart.treat_all) >= 2 {
        for piece in clip_y(&thin(&c, chart.treat_all.iter().copied()), bottom, top) {
            c.draw_series(DashedLineSeries::new(
                piece,
                look.px(6.0) as u32,
                look.px(4.0) as u32,
                look.line(REFERENCE, 2.0),
            ))
            .map_err(fail)?;
        }
        entries.push((
            "treat all".to_string(),
            Mark::Line {
                colour: REFERENCE,
                dashed: true,
            },
        ));
    }
    for run in &chart.runs {
        let colour = rgb(run.colour);
        if finite(&run.points) < 2 {
            entries.push((format!("{}: no curve", run.name), Mark::Block(colour)));
            continue;
        }
        for piece in clip_y(&thin(&c, run.points.iter().copied()), bottom, top) {
            c.draw_series(LineSeries::new(piece, look.line(colour, 2.0)))
                .map_err(fail)?;
        }
        entries.push((
            run.name.clone(),
            Mark::Line {
                colour,
                dashed: false,
            },
        ));
    }
    legend(
        &area,
        c.plotting_area().get_pixel_range(),
        &entries,
        Corner::TopRight,
        &look,
    )?;
    area.present().map_err(fail)
}

/// The chart's numbers: at up to 25 thresholds spread evenly over the first run's (or
/// treat-all's) thresholds, the net benefit of treat all, treat none and each run (4
/// decimals). Runs are read at the same index, as `decision_curve` gives every run the
/// same thresholds.
pub fn decision_table(chart: &DecisionChart) -> Table {
    let axis: &[(f64, f64)] = chart.runs.first().map_or(&chart.treat_all, |r| &r.points);
    let mut columns = vec![
        "threshold probability".to_string(),
        "treat all".into(),
        "treat none".into(),
    ];
    columns.extend(chart.runs.iter().map(|r| r.name.clone()));
    let at = |points: &[(f64, f64)], t: f64| {
        points
            .iter()
            .find(|p| p.0 == t)
            .map_or("—".to_string(), |p| cell(p.1, 4))
    };
    let rows = spread_indices(axis.len(), 25)
        .into_iter()
        .map(|i| {
            let t = axis[i].0;
            let mut row = vec![cell(t, 3), at(&chart.treat_all, t), "0.0000".into()];
            row.extend(chart.runs.iter().map(|r| at(&r.points, t)));
            row
        })
        .collect();
    Table {
        caption: "Decision curves: net benefit by threshold probability".into(),
        columns,
        rows,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::run_colour;
    use crate::testing::{stroked, svg};

    /// Net benefit = TP/n − FP/n · t/(1 − t) (Vickers & Elkin 2006, eq. in "Methods"); for
    /// treat all, prevalence − (1 − prevalence) · t/(1 − t).
    fn example() -> DecisionChart {
        let thresholds: Vec<f64> = (1..=99).map(|i| i as f64 / 100.0).collect();
        let prevalence = 0.2;
        let odds = |t: f64| t / (1.0 - t);
        DecisionChart {
            title: "Decision curves".into(),
            treat_all: thresholds
                .iter()
                .map(|&t| (t, prevalence - (1.0 - prevalence) * odds(t)))
                .collect(),
            runs: vec![
                DecisionRun {
                    name: "forest".into(),
                    colour: run_colour(0),
                    // A model catching 80% of events while flagging 20% of the rest at every
                    // threshold below 0.6, nobody above.
                    points: thresholds
                        .iter()
                        .map(|&t| (t, if t < 0.6 { 0.16 - 0.16 * odds(t) } else { 0.0 }))
                        .collect(),
                },
                DecisionRun {
                    name: "boosting".into(),
                    colour: run_colour(1),
                    points: thresholds
                        .iter()
                        .map(|&t| (t, 0.18 - 0.1 * odds(t)))
                        .collect(),
                },
            ],
        }
    }

    #[test]
    fn decision_chart_has_both_references_and_every_run() {
        let out = svg("decision-1", (600, 400), 1.0, |a, s| {
            draw_decision(a, &example(), s)
        });
        for text in [
            "Decision curves",
            "threshold probability (0–1)",
            "net benefit (true positives per person)",
            "treat all",
            "treat none",
            "forest",
            "boosting",
        ] {
            assert!(out.contains(text), "no '{text}' in the chart");
        }
        // Boosting falls below the axis and is cut there: one piece (and a legend mark);
        // the forest dips below and comes back at 0.6: two pieces.
        assert_eq!(stroked(&out, run_colour(1)).len(), 2);
        assert_eq!(stroked(&out, run_colour(0)).len(), 3);
        // Treat none: the 0 line in ink.
        assert!(stroked(&out, (30, 42, 53)).contains(&2));
    }

    #[test]
    fn decision_lines_stay_inside_the_plot() {
        let out = svg("decision-1", (600, 400), 1.0, |a, s| {
            draw_decision(a, &example(), s)
        });
        // No point of a curve below the plot's bottom edge (x axis at 400 − 12 margin − 44
        // labels).
        let curves = [run_colour(0), run_colour(1), (150, 146, 136)]
            .map(|(r, g, b)| format!("stroke=\"#{r:02X}{g:02X}{b:02X}\""));
        let lowest = out
            .split("<polyline")
            .skip(1)
            .filter(|p| {
                curves
                    .iter()
                    .any(|c| p.split("/>").next().unwrap_or("").contains(c.as_str()))
            })
            .flat_map(|p| {
                p.split("points=\"")
                    .nth(1)
                    .unwrap_or("")
                    .split('"')
                    .next()
                    .unwrap_or("")
                    .split_whitespace()
                    .map(|xy| {
                        xy.split(',')
                            .nth(1)
                            .unwrap_or("0")
                            .parse::<f64>()
                            .unwrap_or(0.0)
                    })
                    .collect::<Vec<_>>()
            })
            .fold(0.0f64, f64::max);
        assert!(
            lowest <= 400.0 - 12.0 - 44.0 + 1.0,
            "a line below the axis at y={lowest}"
        );
    }

    #[test]
    fn decision_table_lists_the_net_benefits() {
        let t = decision_table(&example());
        assert_eq!(
            t.columns,
            [
                "threshold probability",
                "treat all",
                "treat none",
                "forest",
                "boosting"
            ]
        );
        assert_eq!(t.rows.len(), 25);
        // First threshold 0.01: treat all = 0.2 − 0.8·(1/99).
        assert_eq!(
            t.rows[0][..3],
            [
                "0.010".to_string(),
                format!("{:.4}", 0.2 - 0.8 / 99.0),
                "0.0000".into()
            ]
        );
        assert_eq!(t.rows[24][0], "0.990");
    }

    #[test]
    fn degenerate_decision_input_gives_a_message() {
        let mut one = example();
        for r in &mut one.runs {
            r.points.truncate(1);
        }
        one.treat_all.truncate(1);
        let mut nan = example();
        for r in &mut nan.runs {
            r.points.iter_mut().for_each(|p| p.1 = f64::NAN);
        }
        nan.treat_all.clear();
        for chart in [
            DecisionChart {
                title: String::new(),
                treat_all: vec![],
                runs: vec![],
            },
            one,
            nan,
        ] {
            let out = svg("decision-empty", (600, 400), 1.0, |a, s| {
                draw_decision(a, &chart, s)
            });
            assert!(out.contains("No decision curve to draw"), "{chart:?}");
        }
        assert!(decision_table(&DecisionChart {
            title: String::new(),
            treat_all: vec![],
            runs: vec![]
        })
        .rows
        .is_empty());
    }
}
