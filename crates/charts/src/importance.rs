//! Importance bars: predictors sorted from most to least important, horizontal bars with
//! spread whiskers (mean ± spread, e.g. over permutation repeats), and a caption line for
//! cautions (e.g. impurity importance favours predictors with many distinct values).

use plotters::coord::Shift;
use plotters::prelude::*;

use crate::{
    begin, cell, fail, footnote, message, names_width, padded, rgb, row_names, span, style_mesh,
    Drawn, Look, Table, INK,
};

/// One predictor's importance.
#[derive(Debug, Clone, PartialEq)]
pub struct Importance {
    pub name: String,
    /// Not finite: listed in the table, not drawn.
    pub value: f64,
    /// Half-width of the whisker (e.g. the standard deviation over permutation repeats);
    /// None for no whisker.
    pub spread: Option<f64>,
}

/// What the importance chart shows.
#[derive(Debug, Clone, PartialEq)]
pub struct ImportanceChart {
    /// Drawn above the chart; empty for none.
    pub title: String,
    /// The x axis with its unit, e.g. "drop in AUC when the predictor is shuffled".
    pub value_label: String,
    /// In any order; the chart and table sort them.
    pub bars: Vec<Importance>,
    /// Cautions under the chart, wrapped to its width; empty for none.
    pub caption: String,
    pub colour: (u8, u8, u8),
}

/// The bars sorted from the largest value down, values that are not finite last.
fn sorted(bars: &[Importance]) -> Vec<&Importance> {
    let mut out: Vec<&Importance> = bars.iter().collect();
    out.sort_by(|a, b| match (a.value.is_finite(), b.value.is_finite()) {
        (true, true) => b.value.total_cmp(&a.value),
        (x, y) => y.cmp(&x),
    });
    out
}

/// Draws the importance bars; `scale` is the device pixel ratio. As many predictors as fit
/// at 16 CSS pixels a row are drawn, the most important first; a line under the chart says
/// how many are left out (the table has them all).
pub fn draw_importance<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    chart: &ImportanceChart,
    scale: f64,
) -> Drawn {
    let look = Look::new(scale);
    let area = begin(area, &chart.title, &look)?;
    let all: Vec<&Importance> = sorted(&chart.bars)
        .into_iter()
        .filter(|b| b.value.is_finite())
        .collect();
    if all.is_empty() {
        return message(
            &area,
            "No importance to draw: no predictor has a finite value.",
            &look,
        );
    }
    let (_, h) = area.dim_in_pixel();
    let room = (h as i32 - look.px(90.0)).max(look.px(16.0));
    let fits = (room / look.px(16.0)).max(1) as usize;
    let shown = &all[..all.len().min(fits)];
    let mut caption = chart.caption.clone();
    if shown.len() < chart.bars.len() {
        let left_out = chart.bars.len() - shown.len();
        caption = format!(
            "{} of {} predictors drawn; the other {left_out} are in the table. {caption}",
            shown.len(),
            chart.bars.len()
        );
    }
    let area = footnote(&area, &caption, &look)?;
    let ends = shown.iter().flat_map(|b| {
        let s = b.spread.filter(|s| s.is_finite()).unwrap_or(0.0).abs();
        [b.value - s, b.value + s, 0.0]
    });
    let Some((lo, hi)) = span(ends) else {
        return message(&area, "No importance to draw.", &look);
    };
    let (lo, hi) = padded((lo, hi));
    let (lo, hi) = (if lo > 0.0 { 0.0 } else { lo }, hi);
    let names_width = names_width(&area, shown.iter().map(|b| b.name.as_str()), &look);
    let n = shown.len() as f64;
    let mut c = ChartBuilder::on(&area)
        .margin(look.px(12.0))
        .x_label_area_size(look.px(44.0))
        .y_label_area_size(names_width)
        .build_cartesian_2d(lo..hi, 0f64..n)
        .map_err(fail)?;
    style_mesh(&mut c.configure_mesh(), &look, &chart.value_label, "")
        .y_labels(0)
        .disable_y_mesh()
        .draw()
        .map_err(fail)?;
    let colour = rgb(chart.colour);
    let row = |i: usize| n - i as f64 - 0.5;
    c.draw_series(shown.iter().enumerate().map(|(i, b)| {
        Rectangle::new(
            [(0.0, row(i) - 0.32), (b.value, row(i) + 0.32)],
            colour.mix(0.8).filled(),
        )
    }))
    .map_err(fail)?;
    let cap = 0.18;
    let whisker = look.line(INK, 1.2);
    for (i, b) in shown.iter().enumerate() {
        if let Some(s) = b.spread.filter(|s| s.is_finite() && *s > 0.0) {
            let (a, z, y) = (b.value - s, b.value + s, row(i));
            c.draw_series([
                PathElement::new(vec![(a, y), (z, y)], whisker),
                PathElement::new(vec![(a, y - cap), (a, y + cap)], whisker),
                PathElement::new(vec![(z, y - cap), (z, y + cap)], whisker),
            ])
            .map_err(fail)?;
        }
    }
    c.draw_series(LineSeries::new([(0.0, 0.0), (0.0, n)], look.line(INK, 1.0)))
        .map_err(fail)?;
    let names: Vec<&str> = shown.iter().map(|b| b.name.as_str()).collect();
    row_names(&area, &c, &names, lo, row, names_width, &look)?;
    area.present().map_err(fail)
}

/// The chart's numbers: every predictor, most important first (rank, name, value, spread;
/// 4 decimals), and the caption as the table's caption.
pub fn importance_table(chart: &ImportanceChart) -> Table {
    let rows = sorted(&chart.bars)
        .into_iter()
        .enumerate()
        .map(|(i, b)| {
            vec![
                (i + 1).to_string(),
                b.name.clone(),
                cell(b.value, 4),
                b.spread.map_or("—".into(), |s| cell(s, 4)),
            ]
        })
        .collect();
    Table {
        caption: format!("{} by predictor. {}", chart.value_label, chart.caption)
            .trim()
            .to_string(),
        columns: ["rank", "predictor", "importance", "spread (±)"]
            .map(String::from)
            .to_vec(),
        rows,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testing::{filled_rects, stroked, svg, texts};
    use crate::PALETTE;

    fn bars(n: usize) -> Vec<Importance> {
        (0..n)
            .map(|i| Importance {
                name: format!("predictor {i}"),
                value: 0.01 * (i % 7) as f64 - 0.005,
                spread: if i % 2 == 0 { Some(0.004) } else { None },
            })
            .collect()
    }

    fn chart(bars: Vec<Importance>) -> ImportanceChart {
        ImportanceChart {
            title: "Importance by shuffling".into(),
            value_label: "drop in AUC when the predictor is shuffled".into(),
            bars,
            caption: "Research use: importance describes this model, not causes.".into(),
            colour: PALETTE[4],
        }
    }

    #[test]
    fn importance_bars_are_sorted_with_whiskers_and_caption() {
        let c = chart(bars(6));
        let out = svg("importance-6", (600, 400), 1.0, |a, s| {
            draw_importance(a, &c, s)
        });
        for text in [
            "Importance by shuffling",
            "drop in AUC when the predictor is shuffled",
            "predictor 5",
            "predictor 0",
            "Research use: importance describes",
        ] {
            assert!(out.contains(text), "no '{text}' in the chart");
        }
        // One bar per predictor.
        assert_eq!(filled_rects(&out, PALETTE[4]), 6);
        // Three predictors with a spread: a whisker and two caps each.
        assert_eq!(
            stroked(&out, (30, 42, 53))
                .iter()
                .filter(|&&n| n == 2)
                .count(),
            9 + 1
        );
        // Sorted: predictor 5 (0.045) is drawn above predictor 0 (−0.005).
        let drawn = texts(&out);
        let at = |name: &str| drawn.iter().position(|t| t == name).unwrap();
        assert!(at("predictor 5") < at("predictor 4") && at("predictor 4") < at("predictor 0"));
    }

    #[test]
    fn many_predictors_are_cut_to_what_fits_and_the_rest_named() {
        let c = chart(bars(60));
        let out = svg("importance-60", (600, 400), 1.0, |a, s| {
            draw_importance(a, &c, s)
        });
        assert!(
            out.contains("of 60 predictors drawn; the other"),
            "no note of the left-out predictors"
        );
        let drawn = texts(&out)
            .iter()
            .filter(|t| t.starts_with("predictor "))
            .count();
        assert!((10..60).contains(&drawn), "{drawn} names drawn");
        let table = importance_table(&c);
        assert_eq!(table.rows.len(), 60);
        assert_eq!(table.rows[0][2], "0.0550");
    }

    #[test]
    fn degenerate_importance_gives_a_message_and_nan_goes_last() {
        for b in [
            vec![],
            vec![Importance {
                name: "x".into(),
                value: f64::NAN,
                spread: None,
            }],
        ] {
            let out = svg("importance-empty", (600, 400), 1.0, |a, s| {
                draw_importance(a, &chart(b), s)
            });
            assert!(out.contains("No importance to draw"));
        }
        let mut b = bars(3);
        b[2].value = f64::NAN;
        b[0].spread = Some(f64::NAN);
        let out = svg("importance-nan", (600, 400), 1.0, |a, s| {
            draw_importance(a, &chart(b.clone()), s)
        });
        let drawn = texts(&out);
        assert!(drawn.contains(&"predictor 1".into()) && !drawn.contains(&"predictor 2".into()));
        let t = importance_table(&chart(b));
        assert_eq!(t.rows[2][1..3], ["predictor 2".to_string(), "—".into()]);
        // One predictor, value 0: a zero-width bar, no panic.
        let one = vec![Importance {
            name: "only".into(),
            value: 0.0,
            spread: None,
        }];
        let out = svg("importance-one", (600, 400), 1.0, |a, s| {
            draw_importance(a, &chart(one), s)
        });
        assert!(texts(&out).contains(&"only".into()));
    }
}
