//! One record's contributions (e.g. TreeSHAP values) as a horizontal waterfall: from the
//! base value (the model's average) through the largest contributions, the rest summed as
//! "other predictors", to the record's prediction.

use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::{
    begin, cell, fail, footnote, message, names_width, padded, row_names, span, style_mesh, Drawn,
    Look, Table, INK, PALETTE, REFERENCE,
};

/// One predictor's contribution to the record's prediction.
#[derive(Debug, Clone, PartialEq)]
pub struct Contribution {
    /// The predictor and the record's value, e.g. "age = 63".
    pub name: String,
    /// On the chart's scale (the same as `base` and `prediction`); not finite: left out
    /// and counted in the note.
    pub value: f64,
}

/// What the waterfall shows.
#[derive(Debug, Clone, PartialEq)]
pub struct ContributionChart {
    /// Drawn above the chart; empty for none.
    pub title: String,
    /// The x axis with its unit, e.g. "log-odds of the event".
    pub value_label: String,
    /// Where the contributions start: the model's average on this scale.
    pub base: f64,
    /// The record's prediction on this scale (base + the contributions).
    pub prediction: f64,
    /// Every predictor's contribution, in any order.
    pub contributions: Vec<Contribution>,
    /// How many of the largest (by size) get a bar of their own; the rest are summed.
    pub top: usize,
    /// Cautions under the chart; empty for none.
    pub caption: String,
}

/// Raising the prediction: rust; lowering it: slate.
const RAISES: (u8, u8, u8) = PALETTE[1];
const LOWERS: (u8, u8, u8) = PALETTE[4];

/// The finite contributions from the largest in size down.
fn by_size(chart: &ContributionChart) -> Vec<&Contribution> {
    let mut out: Vec<&Contribution> = chart
        .contributions
        .iter()
        .filter(|c| c.value.is_finite())
        .collect();
    out.sort_by(|a, b| b.value.abs().total_cmp(&a.value.abs()));
    out
}

/// The waterfall's steps: (name, contribution), the top ones then "other N predictors".
fn steps(chart: &ContributionChart) -> Vec<(String, f64)> {
    let all = by_size(chart);
    let top = chart.top.min(all.len());
    let mut out: Vec<(String, f64)> = all[..top]
        .iter()
        .map(|c| (c.name.clone(), c.value))
        .collect();
    let rest = &all[top..];
    if !rest.is_empty() {
        let s = if rest.len() == 1 { "" } else { "s" };
        out.push((
            format!("other {} predictor{s}", rest.len()),
            rest.iter().map(|c| c.value).sum(),
        ));
    }
    out
}

fn signed(v: f64) -> String {
    if v >= 0.0 {
        format!("+{v:.3}")
    } else {
        format!("−{:.3}", -v)
    }
}

/// Draws the waterfall; `scale` is the device pixel ratio. A note under the chart says when
/// contributions were left out or do not add up to the prediction.
pub fn draw_contributions<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    chart: &ContributionChart,
    scale: f64,
) -> Drawn {
    let look = Look::new(scale);
    let area = begin(area, &chart.title, &look)?;
    if !chart.base.is_finite() || !chart.prediction.is_finite() {
        return message(
            &area,
            "No contributions to draw: the base value or the prediction is not a number.",
            &look,
        );
    }
    let steps = steps(chart);
    let mut note = Vec::new();
    let skipped = chart
        .contributions
        .iter()
        .filter(|c| !c.value.is_finite())
        .count();
    if skipped > 0 {
        note.push(if skipped == 1 {
            "1 contribution is not a number and is left out.".to_string()
        } else {
            format!("{skipped} contributions are not numbers and are left out.")
        });
    }
    let total = chart.base + steps.iter().map(|s| s.1).sum::<f64>();
    if (total - chart.prediction).abs() > 1e-6 * (1.0 + chart.prediction.abs()) {
        note.push(format!(
            "The contributions add up to {:.4}, not the prediction {:.4}.",
            total, chart.prediction
        ));
    }
    note.push(chart.caption.clone());
    let area = footnote(&area, &note.join(" "), &look)?;
    // Rows from the top: base, the steps, the prediction.
    let mut names = vec!["base value".to_string()];
    names.extend(steps.iter().map(|s| s.0.clone()));
    names.push("prediction".into());
    let mut ends = vec![chart.base, chart.prediction];
    let mut running = chart.base;
    for s in &steps {
        running += s.1;
        ends.push(running);
    }
    let Some(range) = span(ends) else {
        return message(&area, "No contributions to draw.", &look);
    };
    let (lo, hi) = padded(range);
    let room = (hi - lo) * 0.12;
    let (lo, hi) = (lo - room, hi + room);
    let name_width = names_width(&area, names.iter().map(String::as_str), &look);
    let n = names.len() as f64;
    let mut c = ChartBuilder::on(&area)
        .margin(look.px(12.0))
        .x_label_area_size(look.px(44.0))
        .y_label_area_size(name_width)
        .build_cartesian_2d(lo..hi, 0f64..n)
        .map_err(fail)?;
    style_mesh(&mut c.configure_mesh(), &look, &chart.value_label, "")
        .y_labels(0)
        .disable_y_mesh()
        .draw()
        .map_err(fail)?;
    let row = |i: usize| n - i as f64 - 0.5;
    let guide = look.line(REFERENCE, 1.0);
    for v in [chart.base, chart.prediction] {
        c.draw_series(DashedLineSeries::new(
            [(v, 0.0), (v, n)],
            look.px(4.0) as u32,
            look.px(4.0) as u32,
            guide,
        ))
        .map_err(fail)?;
    }
    let label = look.text(11.0);
    let (bx, by) = area.get_base_pixel();
    let mut at = chart.base;
    for (k, (_, v)) in steps.iter().enumerate() {
        let y = row(k + 1);
        let colour = crate::rgb(if *v >= 0.0 { RAISES } else { LOWERS });
        c.draw_series([Rectangle::new(
            [(at, y - 0.3), (at + v, y + 0.3)],
            colour.filled(),
        )])
        .map_err(fail)?;
        // A thin link to where the next bar starts.
        c.draw_series([PathElement::new(
            vec![(at + v, y - 0.3), (at + v, y - 0.7)],
            look.line(INK, 1.0),
        )])
        .map_err(fail)?;
        let (end, hpos, gap) = if *v >= 0.0 {
            (at.max(at + v), HPos::Left, look.px(4.0))
        } else {
            (at.min(at + v), HPos::Right, -look.px(4.0))
        };
        let (px, py) = c.backend_coord(&(end, y));
        area.draw(&Text::new(
            signed(*v),
            (px - bx + gap, py - by),
            label.clone().pos(Pos::new(hpos, VPos::Center)),
        ))
        .map_err(fail)?;
        at += v;
    }
    // Base and prediction: a thick ink mark with the value beside it.
    for (i, v) in [(0, chart.base), (names.len() - 1, chart.prediction)] {
        let y = row(i);
        c.draw_series([PathElement::new(
            vec![(v, y - 0.32), (v, y + 0.32)],
            look.line(INK, 3.0),
        )])
        .map_err(fail)?;
        let (px, py) = c.backend_coord(&(v, y));
        area.draw(&Text::new(
            format!("{v:.3}").replace('-', "−"),
            (px - bx + look.px(6.0), py - by),
            label.clone().pos(Pos::new(HPos::Left, VPos::Center)),
        ))
        .map_err(fail)?;
    }
    let names: Vec<&str> = names.iter().map(String::as_str).collect();
    row_names(&area, &c, &names, lo, row, name_width, &look)?;
    area.present().map_err(fail)
}

/// The chart's numbers: the base value, every finite contribution from the largest in size
/// down with the running total, and the prediction (4 decimals).
pub fn contributions_table(chart: &ContributionChart) -> Table {
    let mut rows = vec![vec![
        "base value".to_string(),
        "—".into(),
        cell(chart.base, 4),
    ]];
    let mut running = chart.base;
    for c in by_size(chart) {
        running += c.value;
        rows.push(vec![c.name.clone(), cell(c.value, 4), cell(running, 4)]);
    }
    rows.push(vec![
        "prediction".into(),
        "—".into(),
        cell(chart.prediction, 4),
    ]);
    Table {
        caption: format!(
            "Contributions to this record's prediction ({})",
            chart.value_label
        ),
        columns: ["step", "contribution", "running total"]
            .map(String::from)
            .to_vec(),
        rows,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testing::{filled_rects, svg, texts};

    fn example() -> ContributionChart {
        let values = [0.8, -0.5, 0.3, -0.05, 0.02, 0.01, -0.01];
        ContributionChart {
            title: "Why this record scores high".into(),
            value_label: "log-odds of the event".into(),
            base: -1.2,
            prediction: -1.2 + values.iter().sum::<f64>(),
            contributions: values
                .iter()
                .enumerate()
                .map(|(i, &v)| Contribution {
                    name: format!("predictor {i} = {i}"),
                    value: v,
                })
                .collect(),
            top: 3,
            caption:
                "Research use: needs external validation, not a substitute for clinical judgement."
                    .into(),
        }
    }

    #[test]
    fn waterfall_runs_from_base_through_top_contributions_to_prediction() {
        let chart = example();
        let out = svg("contributions", (600, 400), 1.0, |a, s| {
            draw_contributions(a, &chart, s)
        });
        let drawn = texts(&out);
        for text in [
            "Why this record scores high",
            "log-odds of the event",
            "base value",
            "predictor 0 = 0",
            "predictor 1 = 1",
            "predictor 2 = 2",
            "other 4 predictors",
            "prediction",
            "+0.800",
            "−0.500",
            "−0.030",
            "−1.200",
            "−0.630",
        ] {
            assert!(drawn.iter().any(|t| t == text), "no '{text}' in {drawn:?}");
        }
        assert!(
            !drawn.iter().any(|t| t == "predictor 3 = 3"),
            "only the top 3 get a bar"
        );
        // Two bars raise (0.8, 0.3), two lower (−0.5 and the others' −0.03).
        assert_eq!(filled_rects(&out, RAISES), 2);
        assert_eq!(filled_rects(&out, LOWERS), 2);
        assert!(!out.contains("add up to"), "the contributions add up");
    }

    #[test]
    fn a_sum_that_misses_the_prediction_is_said_and_nan_is_counted() {
        let mut chart = example();
        chart.prediction += 0.5;
        chart.contributions.push(Contribution {
            name: "broken".into(),
            value: f64::NAN,
        });
        let out = svg("contributions-off", (600, 400), 1.0, |a, s| {
            draw_contributions(a, &chart, s)
        });
        assert!(out.contains("not the prediction"));
        assert!(out.contains("1 contribution is not a number and is left out."));
        let table = contributions_table(&chart);
        assert_eq!(table.rows.len(), 1 + 7 + 1);
        assert_eq!(table.rows[1], ["predictor 0 = 0", "0.8000", "-0.4000"]);
        assert_eq!(table.rows[8][2], "-0.1300");
    }

    #[test]
    fn degenerate_contributions_give_a_message_or_a_plain_waterfall() {
        let mut nan = example();
        nan.base = f64::NAN;
        let out = svg("contributions-nan", (600, 400), 1.0, |a, s| {
            draw_contributions(a, &nan, s)
        });
        assert!(out.contains("No contributions to draw"));
        // No contributions at all, base equal to prediction: two marks, no bars, no panic.
        let none = ContributionChart {
            contributions: vec![],
            prediction: -1.2,
            ..example()
        };
        let out = svg("contributions-none", (600, 400), 1.0, |a, s| {
            draw_contributions(a, &none, s)
        });
        assert_eq!(filled_rects(&out, RAISES) + filled_rects(&out, LOWERS), 0);
        assert!(texts(&out).iter().any(|t| t == "prediction"));
        // top 0: everything is "other".
        let zero = ContributionChart {
            top: 0,
            ..example()
        };
        let out = svg("contributions-zero", (600, 400), 1.0, |a, s| {
            draw_contributions(a, &zero, s)
        });
        assert!(texts(&out).iter().any(|t| t == "other 7 predictors"));
    }
}
