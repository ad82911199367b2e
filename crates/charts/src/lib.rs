//! spinney-charts: Spinney's charts, drawn with plotters and generic over the backend (canvas
//! in the page, SVG natively so chart code is tested outside the browser).
//!
//! So far one chart: [`draw_error_curves`], the error of an ensemble against its number of
//! trees or rounds (out-of-bag and training curves). ROC, calibration and decision curves
//! follow with the validation work.

use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

/// One line of a chart: the value after 1, 2, ... members.
#[derive(Debug, Clone, PartialEq)]
pub struct Curve {
    pub name: String,
    /// `values[i]` belongs to `i + 1` members; values that are not finite are skipped.
    pub values: Vec<f64>,
    pub colour: (u8, u8, u8),
    /// Dashed lines for figures that are not validation (training fit).
    pub dashed: bool,
}

/// What an error-by-size chart shows.
#[derive(Debug, Clone, PartialEq)]
pub struct ErrorChart {
    pub x_label: String,
    pub y_label: String,
    pub curves: Vec<Curve>,
}

/// The chart's colours (Spinney's own: moss, rust, ink), for curves in order.
pub const COLOURS: [(u8, u8, u8); 3] = [(77, 124, 85), (164, 72, 31), (30, 42, 53)];

fn rgb((r, g, b): (u8, u8, u8)) -> RGBColor {
    RGBColor(r, g, b)
}

/// Draws `chart` on `area`. `scale` multiplies text sizes and line widths (the device pixel
/// ratio in the page, so the chart is sharp and its text readable on any screen).
pub fn draw_error_curves<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    chart: &ErrorChart,
    scale: f64,
) -> Result<(), String> {
    let err = |e: DrawingAreaErrorKind<DB::ErrorType>| e.to_string();
    area.fill(&WHITE).map_err(err)?;
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
    let px = |x: f64| (x * scale).round() as i32;
    let font = |size: f64| ("sans-serif", size * scale).into_font();
    let mut c = ChartBuilder::on(area)
        .margin(px(12.0))
        .x_label_area_size(px(44.0))
        .y_label_area_size(px(60.0))
        .build_cartesian_2d(1i32..members as i32, 0f64..top)
        .map_err(err)?;
    c.configure_mesh()
        .x_desc(chart.x_label.as_str())
        .y_desc(chart.y_label.as_str())
        .label_style(font(12.0))
        .axis_desc_style(font(13.0))
        .light_line_style(RGBColor(236, 233, 225))
        .bold_line_style(RGBColor(220, 216, 204))
        .x_labels(8)
        .y_labels(6)
        .draw()
        .map_err(err)?;
    for curve in &chart.curves {
        let points: Vec<(i32, f64)> = curve
            .values
            .iter()
            .enumerate()
            .filter(|(_, v)| v.is_finite())
            .map(|(i, &v)| (i as i32 + 1, v))
            .collect();
        let style = ShapeStyle::from(rgb(curve.colour)).stroke_width((2.0 * scale).round() as u32);
        if curve.dashed {
            c.draw_series(DashedLineSeries::new(
                points,
                px(6.0) as u32,
                px(4.0) as u32,
                style,
            ))
            .map_err(err)?;
        } else {
            c.draw_series(LineSeries::new(points, style)).map_err(err)?;
        }
    }
    // The legend is drawn here rather than by plotters' series labels, which measure text
    // with the font directly; this measures through the backend (the page's canvas backend
    // measures with the canvas, see crates/web/src/bin/page/measured.rs).
    let (xs, ys) = c.plotting_area().get_pixel_range();
    let (bx, by) = area.get_base_pixel();
    let label = TextStyle::from(font(12.0)).color(&RGBColor(30, 42, 53));
    let widths: Vec<u32> = chart
        .curves
        .iter()
        .map(|c| area.estimate_text_size(&c.name, &label).map_or(0, |s| s.0))
        .collect();
    if let Some(&widest) = widths.iter().max() {
        let (pad, mark, gap, row) = (px(8.0), px(24.0), px(6.0), px(18.0));
        let w = pad * 2 + mark + gap + widest as i32;
        let h = pad * 2 + row * chart.curves.len() as i32;
        let x0 = xs.end - bx - w - px(8.0);
        let y0 = ys.start - by + px(8.0);
        area.draw(&Rectangle::new(
            [(x0, y0), (x0 + w, y0 + h)],
            WHITE.mix(0.9).filled(),
        ))
        .map_err(err)?;
        area.draw(&Rectangle::new(
            [(x0, y0), (x0 + w, y0 + h)],
            RGBColor(220, 216, 204),
        ))
        .map_err(err)?;
        for (i, curve) in chart.curves.iter().enumerate() {
            let y = y0 + pad + row * i as i32 + row / 2;
            let x = x0 + pad;
            let style =
                ShapeStyle::from(rgb(curve.colour)).stroke_width((2.0 * scale).round() as u32);
            let segments = if curve.dashed {
                vec![(x, x + mark * 2 / 5), (x + mark * 3 / 5, x + mark)]
            } else {
                vec![(x, x + mark)]
            };
            for (a, b) in segments {
                area.draw(&PathElement::new(vec![(a, y), (b, y)], style))
                    .map_err(err)?;
            }
            area.draw(&Text::new(
                curve.name.as_str(),
                (x + mark + gap, y),
                label.pos(Pos::new(HPos::Left, VPos::Center)),
            ))
            .map_err(err)?;
        }
    }
    area.present().map_err(err)?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn svg(chart: &ErrorChart) -> String {
        let mut out = String::new();
        {
            let root = SVGBackend::with_string(&mut out, (640, 360)).into_drawing_area();
            draw_error_curves(&root, chart, 1.0).unwrap();
        }
        out
    }

    fn example() -> ErrorChart {
        ErrorChart {
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
        let out = svg(&example());
        assert!(out.starts_with("<svg"), "{}", &out[..60.min(out.len())]);
        for text in ["trees", "error rate", "out-of-bag", "training (apparent)"] {
            assert!(out.contains(text), "no '{text}' in the chart");
        }
        // The solid curve is one polyline of 50 points.
        let solid = out
            .split("<polyline")
            .skip(1)
            .map(|p| {
                p.split("points=\"")
                    .nth(1)
                    .unwrap_or("")
                    .split('"')
                    .next()
                    .unwrap_or("")
            })
            .map(|pts| pts.split_whitespace().count())
            .max()
            .unwrap_or(0);
        assert_eq!(solid, 50);
        assert!(out.contains("stroke=\"#4D7C55\""), "moss curve missing");
    }

    #[test]
    fn curves_with_gaps_or_one_point_still_draw() {
        let chart = ErrorChart {
            x_label: "rounds".into(),
            y_label: "error rate".into(),
            curves: vec![Curve {
                name: "training (apparent)".into(),
                values: vec![f64::NAN, 0.0],
                colour: COLOURS[2],
                dashed: false,
            }],
        };
        assert!(svg(&chart).contains("rounds"));
        let empty = ErrorChart {
            curves: Vec::new(),
            ..chart
        };
        assert!(svg(&empty).contains("<svg"));
    }
}
