//! Partial dependence with ICE (individual conditional expectation): the model's prediction
//! as one predictor is set to each value of a grid, a thin line per record and their
//! average thick, and below it the data's counts along the same axis. For a category
//! predictor, points per level instead of lines.

use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::{
    begin, cell, draw_count_strip, fail, fit_text, message, padded, rgb, span, spread_indices,
    style_mesh, thin, Drawn, Look, Table, INK,
};

/// The predictor's axis.
#[derive(Debug, Clone, PartialEq)]
pub enum DependenceAxis {
    /// A number predictor: the values the predictions were made at (rising) and the
    /// predictor's values in the data (for the counts below the chart).
    Numbers { grid: Vec<f64>, data: Vec<f64> },
    /// A category predictor: its levels and the data's rows at each.
    Levels {
        names: Vec<String>,
        counts: Vec<u64>,
    },
}

/// What the partial-dependence chart shows.
#[derive(Debug, Clone, PartialEq)]
pub struct DependenceChart {
    /// Drawn above the chart; empty for none.
    pub title: String,
    /// The x axis: the predictor's name with its unit, e.g. "age (years)".
    pub predictor: String,
    /// The y axis with its unit, e.g. "predicted probability of the event (0–1)".
    pub value_label: String,
    pub axis: DependenceAxis,
    /// The average prediction at each grid value or level (the partial dependence).
    pub average: Vec<f64>,
    /// One line per record (a sample of records is enough: 100–200), each as long as the
    /// grid or the levels; lines of another length are skipped.
    pub ice: Vec<Vec<f64>>,
    pub colour: (u8, u8, u8),
}

impl DependenceChart {
    fn positions(&self) -> usize {
        match &self.axis {
            DependenceAxis::Numbers { grid, .. } => grid.len(),
            DependenceAxis::Levels { names, .. } => names.len(),
        }
    }
    fn lines(&self) -> impl Iterator<Item = &Vec<f64>> {
        let n = self.positions();
        self.ice.iter().filter(move |l| l.len() == n)
    }
}

/// Bins of the count strip under a number predictor.
const STRIP_BINS: usize = 40;

/// Draws the chart; `scale` is the device pixel ratio.
pub fn draw_dependence<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    chart: &DependenceChart,
    scale: f64,
) -> Drawn {
    let look = Look::new(scale);
    let area = begin(area, &chart.title, &look)?;
    let n = chart.positions();
    let x = match &chart.axis {
        DependenceAxis::Numbers { grid, .. } => span(grid.iter().copied()).filter(|(a, b)| b > a),
        DependenceAxis::Levels { .. } if n > 0 => Some((-0.5, n as f64 - 0.5)),
        DependenceAxis::Levels { .. } => None,
    };
    let y = span(
        chart
            .lines()
            .flatten()
            .chain(chart.average.iter().take(n))
            .copied(),
    );
    let (Some(x), Some(y)) = (x, y) else {
        return message(
            &area,
            "No partial dependence to draw: it needs two grid values or a level with a finite prediction.",
            &look,
        );
    };
    let (lo, hi) = padded(y);
    let (_, h) = area.dim_in_pixel();
    let (upper, lower) = area.split_vertically((h as f64 * 0.74) as i32);
    let mut c = ChartBuilder::on(&upper)
        .margin_top(look.px(12.0))
        .margin_left(look.px(12.0))
        .margin_right(look.px(12.0))
        .x_label_area_size(look.px(22.0))
        .y_label_area_size(look.px(60.0))
        .build_cartesian_2d(x.0..x.1, lo..hi)
        .map_err(fail)?;
    let no_label = |_: &f64| String::new();
    let mut mesh = c.configure_mesh();
    style_mesh(&mut mesh, &look, "", &chart.value_label).x_label_formatter(&no_label);
    if matches!(chart.axis, DependenceAxis::Levels { .. }) {
        mesh.disable_x_mesh();
    }
    mesh.draw().map_err(fail)?;
    let colour = rgb(chart.colour);
    let strip: Vec<(f64, f64, u64, RGBColor)> = match &chart.axis {
        DependenceAxis::Numbers { grid, data } => {
            for line in chart.lines() {
                let points = thin(&c, grid.iter().copied().zip(line.iter().copied()));
                c.draw_series(LineSeries::new(
                    points,
                    colour.mix(0.3).stroke_width(look.px(1.0).max(1) as u32),
                ))
                .map_err(fail)?;
            }
            let average = thin(&c, grid.iter().copied().zip(chart.average.iter().copied()));
            if average.len() == 1 {
                c.draw_series([Circle::new(average[0], look.px(4.0) as u32, INK.filled())])
                    .map_err(fail)?;
            }
            c.draw_series(LineSeries::new(average, look.line(INK, 3.0)))
                .map_err(fail)?;
            let width = (x.1 - x.0) / STRIP_BINS as f64;
            let mut counts = [0u64; STRIP_BINS];
            for &v in data.iter().filter(|v| (x.0..=x.1).contains(*v)) {
                counts[(((v - x.0) / width) as usize).min(STRIP_BINS - 1)] += 1;
            }
            counts
                .iter()
                .enumerate()
                .map(|(i, &k)| {
                    (
                        x.0 + width * i as f64,
                        x.0 + width * (i + 1) as f64,
                        k,
                        colour,
                    )
                })
                .collect()
        }
        DependenceAxis::Levels { names, counts } => {
            let dot = look.px(2.5).max(1) as u32;
            for (r, line) in chart.lines().enumerate() {
                // A fixed spread of each record's points around its level, so they do not
                // sit on one another (common practice, no source).
                let jitter = ((r * 37 % 21) as f64 - 10.0) / 10.0 * 0.18;
                c.draw_series(line.iter().enumerate().filter(|(_, v)| v.is_finite()).map(
                    |(i, &v)| Circle::new((i as f64 + jitter, v), dot, colour.mix(0.35).filled()),
                ))
                .map_err(fail)?;
            }
            // The average: a thick bar across its level.
            c.draw_series(
                chart
                    .average
                    .iter()
                    .take(n)
                    .enumerate()
                    .filter(|(_, v)| v.is_finite())
                    .map(|(i, &v)| {
                        let i = i as f64;
                        PathElement::new(vec![(i - 0.3, v), (i + 0.3, v)], look.line(INK, 3.0))
                    }),
            )
            .map_err(fail)?;
            let label = look.text(12.0);
            let (bx, by) = upper.get_base_pixel();
            let slot = c.plotting_area().dim_in_pixel().0 as i32 / n as i32;
            for (i, name) in names.iter().enumerate() {
                let (px, py) = c.backend_coord(&(i as f64, lo));
                upper
                    .draw(&Text::new(
                        fit_text(&upper, name, &label, slot - look.px(4.0)),
                        (px - bx, py - by + look.px(6.0)),
                        label.clone().pos(Pos::new(HPos::Center, VPos::Top)),
                    ))
                    .map_err(fail)?;
            }
            counts
                .iter()
                .take(n)
                .enumerate()
                .map(|(i, &k)| (i as f64 - 0.35, i as f64 + 0.35, k, colour))
                .collect()
        }
    };
    let numbers = matches!(chart.axis, DependenceAxis::Numbers { .. });
    draw_count_strip(&lower, x, &strip, &chart.predictor, numbers, &look)?;
    area.present().map_err(fail)
}

/// Type-7 quantile of the finite values (None when there are none).
fn quantile(mut values: Vec<f64>, q: f64) -> Option<f64> {
    values.retain(|v| v.is_finite());
    values.sort_by(f64::total_cmp);
    let last = values.len().checked_sub(1)?;
    let h = q * last as f64;
    let (i, frac) = (h.floor() as usize, h - h.floor());
    Some(values[i] + frac * (values[(i + 1).min(last)] - values[i]))
}

/// The chart's numbers: at each level, or up to 25 grid values spread evenly, the average
/// prediction and the 10th and 90th percentiles of the records' predictions (type 7); for
/// levels also the data's rows.
pub fn dependence_table(chart: &DependenceChart) -> Table {
    let n = chart.positions();
    let spread = |i: usize| {
        let at: Vec<f64> = chart.lines().map(|l| l[i]).collect();
        [0.1, 0.9].map(|q| quantile(at.clone(), q).map_or("—".into(), |v| cell(v, 4)))
    };
    let average = |i: usize| chart.average.get(i).map_or("—".into(), |&v| cell(v, 4));
    let (columns, rows): (Vec<&str>, Vec<Vec<String>>) = match &chart.axis {
        DependenceAxis::Numbers { grid, .. } => (
            vec![
                &chart.predictor,
                "average prediction",
                "records' 10th percentile",
                "records' 90th percentile",
            ],
            spread_indices(n, 25)
                .into_iter()
                .map(|i| {
                    let [p10, p90] = spread(i);
                    vec![cell(grid[i], 4), average(i), p10, p90]
                })
                .collect(),
        ),
        DependenceAxis::Levels { names, counts } => (
            vec![
                &chart.predictor,
                "rows in the data",
                "average prediction",
                "records' 10th percentile",
                "records' 90th percentile",
            ],
            (0..n)
                .map(|i| {
                    let [p10, p90] = spread(i);
                    let rows = counts.get(i).map_or("—".into(), |c| c.to_string());
                    vec![names[i].clone(), rows, average(i), p10, p90]
                })
                .collect(),
        ),
    };
    Table {
        caption: format!(
            "Partial dependence of {} on {}",
            chart.value_label, chart.predictor
        ),
        columns: columns.into_iter().map(String::from).collect(),
        rows,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::run_colour;
    use crate::testing::{filled_rects, polylines, stroked, svg, texts};

    fn numbers() -> DependenceChart {
        let grid: Vec<f64> = (0..30).map(|i| 20.0 + 2.0 * i as f64).collect();
        let ice: Vec<Vec<f64>> = (0..12)
            .map(|r| {
                grid.iter()
                    .map(|&g| 0.1 + 0.01 * r as f64 + 0.004 * (g - 20.0))
                    .collect()
            })
            .collect();
        let average = (0..30)
            .map(|i| ice.iter().map(|l| l[i]).sum::<f64>() / 12.0)
            .collect();
        DependenceChart {
            title: "Partial dependence on age".into(),
            predictor: "age (years)".into(),
            value_label: "predicted probability (0–1)".into(),
            axis: DependenceAxis::Numbers {
                grid,
                data: (0..500).map(|i| 20.0 + (i % 59) as f64).collect(),
            },
            average,
            ice,
            colour: run_colour(4),
        }
    }

    #[test]
    fn dependence_draws_a_line_per_record_the_average_and_the_counts() {
        let chart = numbers();
        let out = svg("dependence-numbers", (600, 400), 1.0, |a, s| {
            draw_dependence(a, &chart, s)
        });
        for text in [
            "Partial dependence on age",
            "age (years)",
            "predicted probability (0–1)",
            "rows",
        ] {
            assert!(
                texts(&out).iter().any(|t| t == text),
                "no '{text}' in the chart"
            );
        }
        // Twelve thin lines and the thick average, 30 points each.
        assert_eq!(stroked(&out, run_colour(4)), vec![30; 12]);
        assert!(stroked(&out, (30, 42, 53)).contains(&30));
        // The count strip: 40 bins over 20–78, all holding data.
        assert_eq!(filled_rects(&out, run_colour(4)), 40);
        let table = dependence_table(&chart);
        assert_eq!(table.rows.len(), 25);
        // At age 20 the records run 0.10..0.21: type-7 10th percentile 0.1 + 0.011.
        assert_eq!(table.rows[0], ["20.0000", "0.1550", "0.1110", "0.1990"]);
    }

    #[test]
    fn a_category_predictor_gets_points_per_level() {
        let chart = DependenceChart {
            title: String::new(),
            predictor: "smoking (category)".into(),
            value_label: "predicted probability (0–1)".into(),
            axis: DependenceAxis::Levels {
                names: vec!["never".into(), "former".into(), "current".into()],
                counts: vec![300, 120, 0],
            },
            average: vec![0.1, 0.15, 0.3],
            ice: (0..10)
                .map(|r| vec![0.05 + 0.01 * r as f64, 0.1 + 0.01 * r as f64, f64::NAN])
                .collect(),
            colour: run_colour(0),
        };
        let out = svg("dependence-levels", (600, 400), 1.0, |a, s| {
            draw_dependence(a, &chart, s)
        });
        let drawn = texts(&out);
        for text in ["never", "former", "current", "smoking (category)"] {
            assert!(drawn.iter().any(|t| t == text), "no '{text}' in the chart");
        }
        // 20 finite ICE points, three averages (thick bars), two levels with rows.
        assert_eq!(out.matches("<circle").count(), 20);
        assert!(
            stroked(&out, (30, 42, 53))
                .iter()
                .filter(|&&n| n == 2)
                .count()
                >= 3
        );
        assert_eq!(filled_rects(&out, run_colour(0)), 2);
        assert!(
            polylines(&out).iter().all(|&n| n <= 5),
            "no lines between levels"
        );
        let table = dependence_table(&chart);
        assert_eq!(table.rows[2], ["current", "0", "0.3000", "—", "—"]);
    }

    #[test]
    fn degenerate_dependence_gives_a_message() {
        let mut one = numbers();
        if let DependenceAxis::Numbers { grid, .. } = &mut one.axis {
            grid.truncate(1);
        }
        let mut nan = numbers();
        nan.ice.clear();
        nan.average = vec![f64::NAN; 30];
        let none = DependenceChart {
            axis: DependenceAxis::Levels {
                names: vec![],
                counts: vec![],
            },
            ..numbers()
        };
        for chart in [one, nan, none] {
            let out = svg("dependence-empty", (600, 400), 1.0, |a, s| {
                draw_dependence(a, &chart, s)
            });
            assert!(out.contains("No partial dependence to draw"));
        }
        // ICE lines of the wrong length are skipped, not indexed.
        let mut short = numbers();
        short.ice.push(vec![0.5]);
        let out = svg("dependence-short", (600, 400), 1.0, |a, s| {
            draw_dependence(a, &short, s)
        });
        assert_eq!(stroked(&out, run_colour(4)).len(), 12);
        assert_eq!(dependence_table(&short).rows.len(), 25);
    }
}
