//! spinney-charts: Spinney's charts, drawn with plotters and generic over the backend (canvas
//! in the page, SVG natively so chart code is tested outside the browser).
//!
//! Every chart is a plain struct of numbers (no core types) and one function
//! `draw_…(area, &chart, scale)`; `scale` is the device pixel ratio (the caller sizes the
//! area in device pixels), so text and lines keep their size on any screen. Every chart has
//! a title (left out when empty, for a page that puts it in its own heading), axis labels
//! with units, a legend drawn by [`legend`] (never plotters' series labels, whose text
//! measuring the page's Content-Security-Policy blocks; see DEVELOPERS.md), and a `…_table`
//! companion giving the numbers behind it as a [`Table`], the page's text alternative.
//! Input a chart cannot draw (no points, one point, not-a-number) gives a short message in
//! the chart's place, never a panic.
//!
//! - [`draw_error_curves`]: error by number of trees or rounds, one or several runs.
//! - [`draw_roc`]: ROC curves of several runs with their AUCs, and the chance diagonal.
//! - [`draw_calibration`]: observed against predicted by group with Wilson intervals, the
//!   smoothed curve, the ideal diagonal, and the predictions' histogram below.
//! - [`draw_decision`]: decision curves (net benefit) with treat-all and treat-none.
//! - [`draw_importance`]: predictors' importance as sorted bars with spread whiskers.
//! - [`draw_dependence`]: partial dependence with ICE lines and the data's counts below.
//! - [`draw_contributions`]: one record's contributions as a waterfall.
//! - [`draw_tree`]: a small tree as boxes; the first levels of a bigger one with a note.

mod calibration;
mod contributions;
mod decision;
mod dependence;
mod error_curves;
mod importance;
mod roc;
mod tree;

pub use calibration::{
    calibration_table, draw_calibration, probability_histogram, CalibrationBin, CalibrationChart,
    CalibrationRun,
};
pub use contributions::{contributions_table, draw_contributions, Contribution, ContributionChart};
pub use decision::{decision_table, draw_decision, DecisionChart, DecisionRun};
pub use dependence::{dependence_table, draw_dependence, DependenceAxis, DependenceChart};
pub use error_curves::{draw_error_curves, error_table, Curve, ErrorChart};
pub use importance::{draw_importance, importance_table, Importance, ImportanceChart};
pub use roc::{draw_roc, roc_table, RocChart, RocRun};
pub use tree::{draw_tree, tree_table, TreeChart, TreeNode, DRAWN_DEPTH};

use plotters::chart::MeshStyle;
use plotters::coord::types::RangedCoordf64;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

/// Spinney's own colours for runs, in order: moss, rust, ink, ochre, slate, plum, teal, clay.
pub const PALETTE: [(u8, u8, u8); 8] = [
    (77, 124, 85),
    (164, 72, 31),
    (30, 42, 53),
    (176, 128, 20),
    (64, 96, 138),
    (126, 62, 108),
    (36, 118, 116),
    (122, 110, 92),
];

/// The first three colours of [`PALETTE`] (moss, rust, ink), for curves in order.
pub const COLOURS: [(u8, u8, u8); 3] = [PALETTE[0], PALETTE[1], PALETTE[2]];

/// The colour of run `i` (0-based); after eight runs the colours repeat.
pub fn run_colour(i: usize) -> (u8, u8, u8) {
    PALETTE[i % PALETTE.len()]
}

/// The numbers behind a chart, as the page shows them in a table (its text alternative).
/// Cells are plain text, already formatted; "—" marks a value that does not exist.
#[derive(Debug, Clone, PartialEq)]
pub struct Table {
    pub caption: String,
    pub columns: Vec<String>,
    pub rows: Vec<Vec<String>>,
}

/// What a draw function returns: the backend's error as text.
pub type Drawn = Result<(), String>;

pub(crate) const INK: RGBColor = RGBColor(30, 42, 53);
pub(crate) const MUTED: RGBColor = RGBColor(112, 108, 98);
pub(crate) const REFERENCE: RGBColor = RGBColor(150, 146, 136);
pub(crate) const LIGHT_GRID: RGBColor = RGBColor(236, 233, 225);
pub(crate) const GRID: RGBColor = RGBColor(220, 216, 204);

pub(crate) fn rgb((r, g, b): (u8, u8, u8)) -> RGBColor {
    RGBColor(r, g, b)
}

pub(crate) fn fail<E: std::error::Error + Send + Sync>(e: DrawingAreaErrorKind<E>) -> String {
    e.to_string()
}

/// Sizes at the device pixel ratio.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Look {
    pub scale: f64,
}

impl Look {
    pub fn new(scale: f64) -> Look {
        Look {
            // Device pixel ratios run from about 0.5 (zoomed out) to 4; outside that (or not
            // a number) the caller made a mistake, and sizes of 0 pixels would divide by 0.
            scale: if scale.is_finite() {
                scale.clamp(0.5, 8.0)
            } else {
                1.0
            },
        }
    }
    /// CSS pixels to device pixels.
    pub fn px(&self, x: f64) -> i32 {
        (x * self.scale).round() as i32
    }
    pub fn font(&self, size: f64) -> FontDesc<'static> {
        ("sans-serif", size * self.scale).into_font()
    }
    pub fn text(&self, size: f64) -> TextStyle<'static> {
        TextStyle::from(self.font(size)).color(&INK)
    }
    pub fn line(&self, colour: RGBColor, width: f64) -> ShapeStyle {
        ShapeStyle::from(colour).stroke_width((width * self.scale).round().max(1.0) as u32)
    }
}

/// Fills the area, draws the title (if any) and returns the area below it; an area smaller
/// than 160×120 CSS pixels is refused with a message (nothing readable fits).
pub(crate) fn begin<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    title: &str,
    look: &Look,
) -> Result<DrawingArea<DB, Shift>, String> {
    let (w, h) = area.dim_in_pixel();
    let (least_w, least_h) = (look.px(160.0), look.px(120.0));
    if (w as i32) < least_w || (h as i32) < least_h {
        return Err(format!(
            "the chart's area is {w}×{h} pixels; it needs at least {least_w}×{least_h}"
        ));
    }
    area.fill(&WHITE).map_err(fail)?;
    if title.trim().is_empty() {
        return Ok(area.clone());
    }
    let style = TextStyle::from(look.font(15.0).style(FontStyle::Bold)).color(&INK);
    area.draw(&Text::new(
        title.to_string(),
        (look.px(12.0), look.px(8.0)),
        style.pos(Pos::new(HPos::Left, VPos::Top)),
    ))
    .map_err(fail)?;
    Ok(area.split_vertically(look.px(28.0)).1)
}

/// Draws a short message in the middle of the area (input the chart cannot show), wrapped
/// to its width.
pub(crate) fn message<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    text: &str,
    look: &Look,
) -> Drawn {
    let (w, h) = area.dim_in_pixel();
    let style = TextStyle::from(look.font(13.0))
        .color(&MUTED)
        .pos(Pos::new(HPos::Center, VPos::Center));
    let lines = wrap(area, text, &style, w as i32 - look.px(24.0));
    let row = look.px(18.0);
    let first = h as i32 / 2 - row * (lines.len() as i32 - 1) / 2;
    for (i, line) in lines.into_iter().enumerate() {
        area.draw(&Text::new(
            line,
            (w as i32 / 2, first + row * i as i32),
            style.clone(),
        ))
        .map_err(fail)?;
    }
    area.present().map_err(fail)
}

/// Grid, ticks and axis descriptions in Spinney's look.
pub(crate) fn style_mesh<'m, 'a, 'b, X: Ranged, Y: Ranged, DB: DrawingBackend>(
    mesh: &'m mut MeshStyle<'a, 'b, X, Y, DB>,
    look: &Look,
    x_desc: &str,
    y_desc: &str,
) -> &'m mut MeshStyle<'a, 'b, X, Y, DB> {
    mesh.x_desc(x_desc)
        .y_desc(y_desc)
        .label_style(look.font(12.0))
        .axis_desc_style(look.font(13.0))
        .light_line_style(LIGHT_GRID)
        .bold_line_style(GRID)
        .x_labels(8)
        .y_labels(6)
}

/// How a legend entry is marked.
#[derive(Debug, Clone, Copy)]
pub(crate) enum Mark {
    Line { colour: RGBColor, dashed: bool },
    Dot(RGBColor),
    Block(RGBColor),
}

/// Which corner of the plotting area the legend sits in.
#[derive(Debug, Clone, Copy)]
pub(crate) enum Corner {
    TopLeft,
    TopRight,
    BottomRight,
}

/// A legend box inside the plotting area `plot` (backend pixels, as
/// `plotting_area().get_pixel_range()` gives them). Text is measured through the backend
/// (`estimate_text_size`), which the page's canvas backend answers with the canvas.
pub(crate) fn legend<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    plot: (std::ops::Range<i32>, std::ops::Range<i32>),
    entries: &[(String, Mark)],
    corner: Corner,
    look: &Look,
) -> Drawn {
    let label = look.text(12.0);
    let (xs, ys) = plot;
    let (bx, by) = area.get_base_pixel();
    let (pad, mark, gap, row) = (look.px(8.0), look.px(24.0), look.px(6.0), look.px(18.0));
    // On a narrow chart, words too long for the plotting area are shortened with an
    // ellipsis (the table beside the chart keeps them whole).
    let room = (xs.end - xs.start) - look.px(16.0) - (pad * 2 + mark + gap);
    let width = |t: &str| area.estimate_text_size(t, &label).map_or(0, |s| s.0 as i32);
    let entries: Vec<(String, Mark)> = entries
        .iter()
        .map(|(t, m)| (shorten_to(t, room, width), *m))
        .collect();
    let widest = entries.iter().map(|(t, _)| width(t)).max();
    let Some(widest) = widest else {
        return Ok(());
    };
    let w = pad * 2 + mark + gap + widest;
    let h = pad * 2 + row * entries.len() as i32;
    let x0 = match corner {
        Corner::TopLeft => xs.start - bx + look.px(8.0),
        Corner::TopRight | Corner::BottomRight => xs.end - bx - w - look.px(8.0),
    };
    let y0 = match corner {
        Corner::TopLeft | Corner::TopRight => ys.start - by + look.px(8.0),
        Corner::BottomRight => ys.end - by - h - look.px(8.0),
    };
    let corners = [(x0, y0), (x0 + w, y0 + h)];
    area.draw(&Rectangle::new(corners, WHITE.mix(0.9).filled()))
        .map_err(fail)?;
    area.draw(&Rectangle::new(corners, GRID)).map_err(fail)?;
    for (i, (text, kind)) in entries.iter().enumerate() {
        let y = y0 + pad + row * i as i32 + row / 2;
        let x = x0 + pad;
        match *kind {
            Mark::Line { colour, dashed } => {
                let segments = if dashed {
                    vec![(x, x + mark * 2 / 5), (x + mark * 3 / 5, x + mark)]
                } else {
                    vec![(x, x + mark)]
                };
                for (a, b) in segments {
                    area.draw(&PathElement::new(
                        vec![(a, y), (b, y)],
                        look.line(colour, 2.0),
                    ))
                    .map_err(fail)?;
                }
            }
            Mark::Dot(colour) => {
                area.draw(&Circle::new(
                    (x + mark / 2, y),
                    look.px(4.0).max(1) as u32,
                    colour.filled(),
                ))
                .map_err(fail)?;
            }
            Mark::Block(colour) => {
                let r = look.px(5.0);
                area.draw(&Rectangle::new(
                    [(x + mark / 2 - r, y - r), (x + mark / 2 + r, y + r)],
                    colour.filled(),
                ))
                .map_err(fail)?;
            }
        }
        area.draw(&Text::new(
            text.clone(),
            (x + mark + gap, y),
            label.clone().pos(Pos::new(HPos::Left, VPos::Center)),
        ))
        .map_err(fail)?;
    }
    Ok(())
}

/// `text`, or as much of its start as fits in `room` pixels (by `width`) followed by "…".
fn shorten_to(text: &str, room: i32, width: impl Fn(&str) -> i32) -> String {
    if width(text) <= room {
        return text.to_string();
    }
    let ends: Vec<usize> = text.char_indices().map(|(i, _)| i).skip(1).collect();
    // The longest start that fits, found by halving (width grows with the characters kept).
    let (mut lo, mut hi) = (0usize, ends.len());
    while lo < hi {
        let mid = (lo + hi).div_ceil(2);
        if width(&format!("{}…", text[..ends[mid - 1]].trim_end())) <= room {
            lo = mid;
        } else {
            hi = mid - 1;
        }
    }
    match lo {
        0 => "…".to_string(),
        k => format!("{}…", text[..ends[k - 1]].trim_end()),
    }
}

pub(crate) type Plane<'a, DB> = ChartContext<'a, DB, Cartesian2d<RangedCoordf64, RangedCoordf64>>;

/// The finite points of a line, thinned to one per device pixel (the last always kept), so
/// a curve of 50,000 points costs what its picture costs.
pub(crate) fn thin<DB: DrawingBackend>(
    chart: &Plane<'_, DB>,
    points: impl IntoIterator<Item = (f64, f64)>,
) -> Vec<(f64, f64)> {
    let finite: Vec<(f64, f64)> = points
        .into_iter()
        .filter(|(x, y)| x.is_finite() && y.is_finite())
        .collect();
    let mut out: Vec<(f64, f64)> = Vec::with_capacity(finite.len().min(4096));
    let mut last_pixel = None;
    for (i, &p) in finite.iter().enumerate() {
        let pixel = chart.backend_coord(&p);
        if last_pixel != Some(pixel) || i + 1 == finite.len() {
            if last_pixel == Some(pixel) {
                out.pop();
            }
            out.push(p);
            last_pixel = Some(pixel);
        }
    }
    out
}

/// The parts of a line inside `low..=high` on the y axis (plotters draws outside its
/// plotting area otherwise); crossings are interpolated.
pub(crate) fn clip_y(points: &[(f64, f64)], low: f64, high: f64) -> Vec<Vec<(f64, f64)>> {
    let mut pieces: Vec<Vec<(f64, f64)>> = Vec::new();
    let mut piece: Vec<(f64, f64)> = Vec::new();
    let cut = |a: (f64, f64), b: (f64, f64), y: f64| {
        let t = (y - a.1) / (b.1 - a.1);
        (a.0 + t * (b.0 - a.0), y)
    };
    for pair in points.windows(2) {
        let (mut a, mut b) = (pair[0], pair[1]);
        if (a.1 < low && b.1 < low) || (a.1 > high && b.1 > high) {
            continue;
        }
        for bound in [low, high] {
            let outside = |p: (f64, f64)| if bound == low { p.1 < low } else { p.1 > high };
            if outside(a) {
                a = cut(a, b, bound);
            }
            if outside(b) {
                b = cut(a, b, bound);
            }
        }
        if piece.last() != Some(&a) {
            if piece.len() > 1 {
                pieces.push(std::mem::take(&mut piece));
            }
            piece.clear();
            piece.push(a);
        }
        piece.push(b);
    }
    if piece.len() > 1 {
        pieces.push(piece);
    }
    pieces
}

/// Width of `text` in device pixels, measured through the backend.
pub(crate) fn text_width<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    text: &str,
    style: &TextStyle,
) -> i32 {
    area.estimate_text_size(text, style)
        .map_or(0, |s| s.0 as i32)
}

/// `text` cut with "…" so it fits `width` device pixels (whole text when it fits).
pub(crate) fn fit_text<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    text: &str,
    style: &TextStyle,
    width: i32,
) -> String {
    if text_width(area, text, style) <= width {
        return text.to_string();
    }
    let chars: Vec<char> = text.chars().collect();
    let mut keep = chars.len();
    while keep > 0 {
        keep -= 1;
        let short: String = chars[..keep].iter().chain(['…'].iter()).collect();
        if text_width(area, &short, style) <= width {
            return short;
        }
    }
    String::new()
}

/// `text` broken into lines at spaces so each fits `width` device pixels (a single word
/// wider than that gets a line of its own).
pub(crate) fn wrap<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    text: &str,
    style: &TextStyle,
    width: i32,
) -> Vec<String> {
    let mut lines: Vec<String> = Vec::new();
    let mut line = String::new();
    for word in text.split_whitespace() {
        let longer = if line.is_empty() {
            word.to_string()
        } else {
            format!("{line} {word}")
        };
        if line.is_empty() || text_width(area, &longer, style) <= width {
            line = longer;
        } else {
            lines.push(std::mem::replace(&mut line, word.to_string()));
        }
    }
    if !line.is_empty() {
        lines.push(line);
    }
    lines
}

/// Draws `lines` of small muted text at the bottom of `area` and returns the area above.
pub(crate) fn footnote<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    text: &str,
    look: &Look,
) -> Result<DrawingArea<DB, Shift>, String> {
    if text.trim().is_empty() {
        return Ok(area.clone());
    }
    let style = TextStyle::from(look.font(12.0)).color(&MUTED);
    let (w, h) = area.dim_in_pixel();
    let lines = wrap(area, text, &style, w as i32 - look.px(24.0));
    let row = look.px(16.0);
    let top = h as i32 - row * lines.len() as i32 - look.px(6.0);
    for (i, line) in lines.iter().enumerate() {
        area.draw(&Text::new(
            line.clone(),
            (look.px(12.0), top + row * i as i32),
            style.clone().pos(Pos::new(HPos::Left, VPos::Top)),
        ))
        .map_err(fail)?;
    }
    Ok(area.split_vertically(top.max(0)).0)
}

/// Width of the name column for rows labelled `names`: the widest name and some room,
/// at most two fifths of the area.
pub(crate) fn names_width<'n, DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    names: impl IntoIterator<Item = &'n str>,
    look: &Look,
) -> i32 {
    let label = look.text(12.0);
    let widest = names
        .into_iter()
        .map(|n| text_width(area, n, &label))
        .max()
        .unwrap_or(0);
    (widest + look.px(12.0)).min(area.dim_in_pixel().0 as i32 * 2 / 5)
}

/// Draws row names left of the plot: `names[i]` at height `row(i)`, right-aligned against
/// the y axis at `x_axis`, cut to `width`.
pub(crate) fn row_names<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    chart: &Plane<'_, DB>,
    names: &[&str],
    x_axis: f64,
    row: impl Fn(usize) -> f64,
    width: i32,
    look: &Look,
) -> Drawn {
    let label = look.text(12.0);
    let (bx, by) = area.get_base_pixel();
    for (i, name) in names.iter().enumerate() {
        let (x, y) = chart.backend_coord(&(x_axis, row(i)));
        area.draw(&Text::new(
            fit_text(area, name, &label, width - look.px(8.0)),
            (x - bx - look.px(6.0), y - by),
            label.clone().pos(Pos::new(HPos::Right, VPos::Center)),
        ))
        .map_err(fail)?;
    }
    Ok(())
}

/// A number for a table cell with `digits` decimals; "—" when not finite.
pub(crate) fn cell(v: f64, digits: usize) -> String {
    if v.is_finite() {
        format!("{v:.digits$}")
    } else {
        "—".into()
    }
}

/// The smallest and largest finite value, or None.
pub(crate) fn span(values: impl IntoIterator<Item = f64>) -> Option<(f64, f64)> {
    values
        .into_iter()
        .filter(|v| v.is_finite())
        .fold(None, |acc, v| match acc {
            None => Some((v, v)),
            Some((lo, hi)) => Some((f64::min(lo, v), f64::max(hi, v))),
        })
}

/// A range around `lo..hi` with 5% room either side; a single value gets room of its own.
pub(crate) fn padded((lo, hi): (f64, f64)) -> (f64, f64) {
    let room = if hi > lo {
        (hi - lo) * 0.05
    } else {
        (lo.abs() * 0.1).max(0.05)
    };
    (lo - room, hi + room)
}

/// Up to `most` indices of `0..n` spread evenly, the first and last included.
pub(crate) fn spread_indices(n: usize, most: usize) -> Vec<usize> {
    if n <= most {
        return (0..n).collect();
    }
    let mut out: Vec<usize> = (0..most).map(|k| k * (n - 1) / (most - 1)).collect();
    out.dedup();
    out
}

/// Count bars under a chart (the data's distribution): `bars` are (from, to, count, colour)
/// on the chart's x axis `x`; the strip has the same left label width as the chart above it so the
/// axes line up.
pub(crate) fn draw_count_strip<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    x: (f64, f64),
    bars: &[(f64, f64, u64, RGBColor)],
    x_desc: &str,
    x_labels: bool,
    look: &Look,
) -> Drawn {
    let top = bars.iter().map(|b| b.2).max().unwrap_or(0).max(1) as f64;
    let mut c = ChartBuilder::on(area)
        .margin_left(look.px(12.0))
        .margin_right(look.px(12.0))
        .margin_bottom(look.px(4.0))
        .x_label_area_size(look.px(44.0))
        .y_label_area_size(look.px(60.0))
        .build_cartesian_2d(x.0..x.1, 0f64..top * 1.05)
        .map_err(fail)?;
    let int_label = |v: &f64| format!("{v:.0}");
    let no_label = |_: &f64| String::new();
    let mut mesh = c.configure_mesh();
    style_mesh(&mut mesh, look, x_desc, "rows")
        .y_labels(2)
        .y_label_formatter(&int_label)
        .disable_y_mesh();
    if !x_labels {
        mesh.x_label_formatter(&no_label).disable_x_mesh();
    }
    mesh.draw().map_err(fail)?;
    c.draw_series(bars.iter().filter(|b| b.2 > 0).map(|&(a, b, n, colour)| {
        Rectangle::new([(a, 0.0), (b, n as f64)], colour.mix(0.55).filled())
    }))
    .map_err(fail)?;
    Ok(())
}

#[cfg(test)]
pub(crate) mod testing {
    use super::*;

    /// Renders `draw` on an SVG of `size` at `scale` and returns the SVG text. With
    /// SPINNEY_CHART_DIR set, also writes it there as `name`.svg (to look at the charts).
    pub fn svg(
        name: &str,
        size: (u32, u32),
        scale: f64,
        draw: impl FnOnce(&DrawingArea<SVGBackend<'_>, Shift>, f64) -> Drawn,
    ) -> String {
        let mut out = String::new();
        {
            let root = SVGBackend::with_string(&mut out, size).into_drawing_area();
            draw(&root, scale).unwrap();
        }
        if let Some(dir) = std::env::var_os("SPINNEY_CHART_DIR") {
            let path = std::path::Path::new(&dir).join(format!("{name}.svg"));
            std::fs::write(&path, &out).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
        }
        out
    }

    /// Number of points of each polyline, in order.
    pub fn polylines(svg: &str) -> Vec<usize> {
        svg.split("<polyline")
            .skip(1)
            .map(|p| {
                p.split("points=\"")
                    .nth(1)
                    .unwrap_or("")
                    .split('"')
                    .next()
                    .unwrap_or("")
                    .split_whitespace()
                    .count()
            })
            .collect()
    }

    /// Polylines drawn in `colour` (SVG's "#RRGGBB").
    pub fn stroked(svg: &str, colour: (u8, u8, u8)) -> Vec<usize> {
        let hex = format!(
            "stroke=\"#{:02X}{:02X}{:02X}\"",
            colour.0, colour.1, colour.2
        );
        svg.split("<polyline")
            .skip(1)
            .filter(|p| p.split("/>").next().unwrap_or("").contains(&hex))
            .map(|p| polylines(&format!("<polyline{p}"))[0])
            .collect()
    }

    /// The texts drawn, in order, trimmed.
    pub fn texts(svg: &str) -> Vec<String> {
        svg.split("<text")
            .skip(1)
            .map(|t| {
                let inner = t.split_once('>').map_or("", |x| x.1);
                let raw = inner.split("</text>").next().unwrap_or("").trim();
                raw.replace("&lt;", "<")
                    .replace("&gt;", ">")
                    .replace("&quot;", "\"")
                    .replace("&apos;", "'")
                    .replace("&amp;", "&")
            })
            .collect()
    }

    /// Count of `<rect` elements filled with `colour`.
    pub fn filled_rects(svg: &str, colour: (u8, u8, u8)) -> usize {
        let hex = format!("fill=\"#{:02X}{:02X}{:02X}\"", colour.0, colour.1, colour.2);
        svg.split("<rect")
            .skip(1)
            .filter(|p| p.split("/>").next().unwrap_or("").contains(&hex))
            .count()
    }

    /// Every chart on areas too small to hold it, and at odd pixel ratios: a picture or an
    /// error, never a panic.
    #[test]
    fn tiny_areas_and_odd_ratios_do_not_panic() {
        let roc = RocChart {
            title: "t".into(),
            runs: vec![RocRun {
                name: "a".into(),
                auc: Some(0.7),
                points: vec![(0.0, 0.0), (0.5, 0.8), (1.0, 1.0)],
                colour: PALETTE[0],
            }],
        };
        let importance = ImportanceChart {
            title: "t".into(),
            value_label: "v".into(),
            bars: vec![Importance {
                name: "a".into(),
                value: 1.0,
                spread: Some(0.1),
            }],
            caption: "c".into(),
            colour: PALETTE[0],
        };
        let tree = TreeChart {
            title: "t".into(),
            nodes: vec![
                TreeNode {
                    feature: "a".into(),
                    threshold: "< 1".into(),
                    left: Some(1),
                    right: Some(2),
                    value: "v".into(),
                },
                TreeNode {
                    feature: String::new(),
                    threshold: String::new(),
                    left: None,
                    right: None,
                    value: "l".into(),
                },
                TreeNode {
                    feature: String::new(),
                    threshold: String::new(),
                    left: None,
                    right: None,
                    value: "r".into(),
                },
            ],
        };
        let calibration = CalibrationChart {
            title: "t".into(),
            runs: vec![CalibrationRun {
                name: "a".into(),
                colour: PALETTE[0],
                bins: vec![CalibrationBin {
                    lowest_predicted: 0.1,
                    highest_predicted: 0.3,
                    mean_predicted: 0.2,
                    observed: 0.25,
                    low: 0.1,
                    high: 0.4,
                    rows: 20,
                }],
                smoothed: vec![(0.1, 0.1), (0.3, 0.35)],
                histogram: vec![3, 5],
            }],
        };
        let decision = DecisionChart {
            title: "t".into(),
            treat_all: vec![(0.1, 0.1), (0.5, -0.6)],
            runs: vec![DecisionRun {
                name: "a".into(),
                colour: PALETTE[0],
                points: vec![(0.1, 0.1), (0.5, 0.02)],
            }],
        };
        let dependence = DependenceChart {
            title: "t".into(),
            predictor: "x".into(),
            value_label: "y".into(),
            axis: DependenceAxis::Numbers {
                grid: vec![0.0, 1.0],
                data: vec![0.5],
            },
            average: vec![0.2, 0.3],
            ice: vec![vec![0.1, 0.4]],
            colour: PALETTE[0],
        };
        let contributions = ContributionChart {
            title: "t".into(),
            value_label: "v".into(),
            base: 0.0,
            prediction: 1.0,
            contributions: vec![Contribution {
                name: "a".into(),
                value: 1.0,
            }],
            top: 5,
            caption: "c".into(),
        };
        let error = ErrorChart {
            title: "t".into(),
            x_label: "x".into(),
            y_label: "y".into(),
            curves: vec![Curve {
                name: "a".into(),
                values: vec![0.3, 0.2],
                colour: PALETTE[0],
                dashed: true,
            }],
        };
        for size in [(1, 1), (40, 30), (120, 80), (160, 120), (200, 150)] {
            for scale in [0.0, -1.0, f64::NAN, 0.3, 1.0, 3.0, 1e9] {
                let mut out = String::new();
                let root = SVGBackend::with_string(&mut out, size).into_drawing_area();
                let drawn = [
                    draw_roc(&root, &roc, scale),
                    draw_importance(&root, &importance, scale),
                    draw_tree(&root, &tree, scale),
                    draw_calibration(&root, &calibration, scale),
                    draw_decision(&root, &decision, scale),
                    draw_dependence(&root, &dependence, scale),
                    draw_contributions(&root, &contributions, scale),
                    draw_error_curves(&root, &error, scale),
                ];
                // Ratios are held to 0.5–8 (not a number: 1); a chart needs 160×120 at ratio 1.
                let ratio = if scale.is_finite() {
                    scale.clamp(0.5, 8.0)
                } else {
                    1.0
                };
                let fits = f64::from(size.0) >= (160.0 * ratio).round()
                    && f64::from(size.1) >= (120.0 * ratio).round();
                for d in drawn {
                    match d {
                        Ok(()) => assert!(fits, "{size:?} at {scale} drew"),
                        Err(e) => assert!(!fits && e.contains("it needs at least"), "{e}"),
                    }
                }
            }
        }
    }

    #[test]
    fn clipping_keeps_the_inside_and_cuts_at_the_bound() {
        let line = [(0.0, 1.0), (1.0, -1.0), (2.0, -3.0), (3.0, 1.0)];
        let pieces = clip_y(&line, 0.0, 2.0);
        assert_eq!(pieces.len(), 2);
        assert_eq!(pieces[0], vec![(0.0, 1.0), (0.5, 0.0)]);
        assert_eq!(pieces[1], vec![(2.75, 0.0), (3.0, 1.0)]);
        assert!(clip_y(&[(0.0, 5.0), (1.0, 6.0)], 0.0, 1.0).is_empty());
    }

    #[test]
    fn spread_indices_keep_both_ends() {
        assert_eq!(spread_indices(3, 25), vec![0, 1, 2]);
        let s = spread_indices(1000, 25);
        assert_eq!((s[0], *s.last().unwrap(), s.len()), (0, 999, 25));
    }
}
