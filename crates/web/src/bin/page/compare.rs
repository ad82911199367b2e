//! Step 4, comparing the runs on records they did not learn from: one table of every run's
//! out-of-sample figures with their 95% intervals and the baseline judged on the same splits
//! beside it, the computed warnings, and for two-class outcomes the ROC, calibration and
//! decision curves of the judged runs and their errors by number of trees or rounds (each
//! chart with its numbers as a table, its text alternative). Runs fitted without a validation say so and show no figures here. Each run
//! has a Remove button here (`runs::remove` drops it everywhere).

use spinney_charts::{
    calibration_table, decision_table, draw_calibration, draw_decision, draw_error_curves,
    draw_roc, error_table, roc_table, run_colour, CalibrationBin, CalibrationChart, CalibrationRun,
    Curve, DecisionChart, DecisionRun, ErrorChart, RocChart, RocRun, Table,
};
use spinney_web::protocol::{Figure, RunValidation};
use wasm_bindgen::JsCast;
use web_sys::HtmlCanvasElement;

use super::measured::{draw_on, Drawing};
use super::{by_id, esc, set_html, show, Page};

/// The figures shown for each kind of outcome, with their column headings.
const TWO_CLASSES: [(&str, &str); 5] = [
    ("auc", "AUC"),
    ("brier", "Brier score"),
    ("calibration_slope", "calibration slope"),
    ("log_loss", "log loss"),
    ("accuracy", "accuracy at 0.5"),
];
const CLASSES: [(&str, &str); 4] = [
    ("macro_auc", "AUC, mean of one-vs-rest"),
    ("accuracy", "accuracy"),
    ("balanced_accuracy", "balanced accuracy"),
    ("log_loss", "log loss"),
];
const NUMBERS: [(&str, &str); 3] = [("rmse", "RMSE"), ("mae", "MAE"), ("r_squared", "R²")];

/// A figure with its interval: "0.812 (0.790 to 0.834)".
fn cell(figures: &[Figure], name: &str) -> String {
    let Some(f) = figures.iter().find(|f| f.name == name) else {
        return "—".into();
    };
    let digits = if f.value.abs() >= 100.0 { 1 } else { 3 };
    match (f.low, f.high) {
        (Some(l), Some(h)) => format!(
            "{:.d$} <span class=\"unit\">({:.d$} to {:.d$})</span>",
            f.value,
            l,
            h,
            d = digits
        ),
        _ => format!("{:.d$}", f.value, d = digits),
    }
}

/// A chart's numbers as an HTML table.
pub(super) fn table_html(t: &Table) -> String {
    let mut html = format!(
        "<table class=\"curve-numbers\"><caption>{}</caption><thead><tr>",
        esc(&t.caption)
    );
    for c in &t.columns {
        html += &format!("<th scope=\"col\">{}</th>", esc(c));
    }
    html += "</tr></thead><tbody>";
    for row in &t.rows {
        html += "<tr>";
        for (i, v) in row.iter().enumerate() {
            if i == 0 {
                html += &format!("<th scope=\"row\">{}</th>", esc(v));
            } else {
                html += &format!("<td class=\"num\">{}</td>", esc(v));
            }
        }
        html += "</tr>";
    }
    html + "</tbody></table>"
}

/// Draws on canvas `id` at the screen's pixel density, `aspect` high per unit of width.
pub(super) fn draw_by_id(doc: &web_sys::Document, id: &str, aspect: f64, draw: Drawing<'_>) {
    if let Ok(canvas) = by_id(doc, id).dyn_into::<HtmlCanvasElement>() {
        draw_on(&canvas, aspect, draw);
    }
}

pub fn render(p: &Page) {
    let runs = super::runs::results(&p.fits);
    show(
        &p.doc,
        "step-compare",
        p.report.is_some() && !runs.is_empty(),
    );
    if runs.is_empty() {
        return;
    }
    // The figures follow the kind of the latest run's outcome.
    let kind = runs.iter().rev().find_map(|(_, _, r)| {
        r.validation.as_ref().map(|v| {
            if v.figures.iter().any(|f| f.name == "auc") {
                &TWO_CLASSES[..]
            } else if v.figures.iter().any(|f| f.name == "rmse") {
                &NUMBERS[..]
            } else {
                &CLASSES[..]
            }
        })
    });
    let columns = kind.unwrap_or(&TWO_CLASSES[..]);
    let mut html = String::from(
        "<table class=\"compare-runs\"><thead><tr><th scope=\"col\">Run</th><th scope=\"col\">Model</th><th scope=\"col\">Judged by</th>",
    );
    for (_, heading) in columns {
        html +=
            &format!("<th scope=\"col\">{heading} <span class=\"unit\">(95% interval)</span></th>");
    }
    html += "<th scope=\"col\">Fit time</th><th scope=\"col\"><span class=\"visually-hidden\">Remove</span></th></tr></thead><tbody>";
    let mut warnings: Vec<String> = Vec::new();
    for (i, label, r) in &runs {
        let blank = "<td class=\"num\">—</td>".repeat(columns.len());
        let fit = super::runs::fmt_seconds(r.fit_seconds);
        let remove = format!(
            "<td><button type=\"button\" class=\"button quiet\" data-remove=\"{i}\" aria-label=\"Remove run {} ({})\">Remove</button></td>",
            i + 1,
            esc(label)
        );
        match &r.validation {
            Some(v) => {
                html += &format!(
                    "<tr data-run=\"{}\" data-judged=\"yes\"><th scope=\"row\">{}</th><td class=\"model\">{}</td><td class=\"judged\">{} <span class=\"unit\">({} records)</span></td>",
                    i + 1,
                    i + 1,
                    esc(label),
                    esc(&v.scheme),
                    v.judged_rows
                );
                for (name, _) in columns {
                    // The figure to the last digit, for tests and the report.
                    let exact = v
                        .figures
                        .iter()
                        .find(|f| f.name == *name)
                        .map_or(String::new(), |f| f.value.to_string());
                    html += &format!(
                        "<td class=\"num\" data-figure=\"{name}\" data-value=\"{exact}\">{}</td>",
                        cell(&v.figures, name)
                    );
                }
                html += &format!("<td class=\"num\">{fit}</td>{remove}</tr>");
                if let Some(b) = &v.baseline {
                    html += &format!(
                        "<tr class=\"baseline\" data-baseline-of=\"{}\"><th scope=\"row\"></th><td>baseline: {}</td><td>the same splits</td>",
                        i + 1,
                        esc(&v.baseline_name)
                    );
                    for (name, _) in columns {
                        html += &format!("<td class=\"num\">{}</td>", cell(b, name));
                    }
                    html += "<td></td><td></td></tr>";
                }
                for w in &v.warnings {
                    if !warnings.contains(w) {
                        warnings.push(w.clone());
                    }
                }
            }
            None => {
                let why = r.validation_refused.as_deref().map_or(
                    "grown without a validation: its figures in step 3 are training figures, not a validation".to_string(),
                    |e| format!("could not be judged as asked: {e}"),
                );
                html += &format!(
                    "<tr data-run=\"{}\" data-judged=\"no\"><th scope=\"row\">{}</th><td class=\"model\">{}</td><td class=\"note\">{}</td>{blank}<td class=\"num\">{fit}</td>{remove}</tr>",
                    i + 1,
                    i + 1,
                    esc(label),
                    esc(&why)
                );
            }
        }
    }
    html += "</tbody></table>";
    set_html(&p.doc, "compare-table", &html);
    let warned = if warnings.is_empty() {
        String::new()
    } else {
        let items: String = warnings
            .iter()
            .map(|w| format!("<li>{}</li>", esc(w)))
            .collect();
        format!("<h3>Warnings</h3><ul class=\"warnings\">{items}</ul>")
    };
    set_html(&p.doc, "compare-warnings", &warned);
    render_charts(p, &runs);
}

/// The Remove buttons of the table (one listener for the container).
pub fn listen(page: &super::Shared) {
    let doc = page.borrow().doc.clone();
    let pg = page.clone();
    super::on(
        &by_id(&doc, "compare-table"),
        "click",
        move |e: web_sys::Event| {
            let Some(i) = super::target_element(&e)
                .and_then(|t| t.closest("[data-remove]").ok().flatten())
                .and_then(|b| b.get_attribute("data-remove"))
                .and_then(|v| v.parse::<usize>().ok())
            else {
                return;
            };
            super::runs::remove(&pg, i);
        },
    );
}

/// The ROC, calibration and decision charts of the judged two-class runs.
fn render_charts(p: &Page, runs: &[(usize, String, &spinney_web::protocol::RunResult)]) {
    let judged: Vec<(usize, &String, &RunValidation)> = runs
        .iter()
        .filter_map(|(i, label, r)| {
            let v = r.validation.as_ref()?;
            (!v.roc.is_empty()).then_some((*i, label, v))
        })
        .collect();
    show(&p.doc, "compare-charts", !judged.is_empty());
    if judged.is_empty() {
        return;
    }
    // The runs drawn, for the name of a saved PNG ("1-2-3").
    let numbers: Vec<String> = judged.iter().map(|(i, _, _)| (i + 1).to_string()).collect();
    for id in [
        "roc-canvas",
        "calibration-canvas",
        "decision-canvas",
        "sizes-canvas",
    ] {
        let _ = by_id(&p.doc, id).set_attribute("data-runs", &numbers.join("-"));
    }
    // The legends name each run by its number and method (its settings are in the table
    // above), so they stay short enough to leave the curves in sight.
    let name = |i: usize, label: &str| {
        let method = label.split(',').next().unwrap_or(label);
        format!("run {}: {method}", i + 1)
    };
    let auc = |v: &RunValidation| v.figures.iter().find(|f| f.name == "auc").map(|f| f.value);
    let mut roc = RocChart {
        title: String::new(),
        runs: judged
            .iter()
            .map(|(i, label, v)| RocRun {
                name: name(*i, label),
                auc: auc(v),
                points: v.roc.clone(),
                colour: run_colour(*i),
            })
            .collect(),
    };
    // The baseline of the latest judged run that has one, in grey.
    if let Some((i, _, v)) = judged
        .iter()
        .rev()
        .find(|(_, _, v)| !v.baseline_roc.is_empty())
    {
        roc.runs.push(RocRun {
            name: format!("baseline of run {}: {}", i + 1, v.baseline_name),
            auc: v
                .baseline
                .as_ref()
                .and_then(|b| b.iter().find(|f| f.name == "auc"))
                .map(|f| f.value),
            points: v.baseline_roc.clone(),
            colour: (150, 146, 136),
        });
    }
    draw_by_id(&p.doc, "roc-canvas", 0.8, &|area, s| {
        draw_roc(area, &roc, s)
    });
    set_html(&p.doc, "roc-numbers", &table_html(&roc_table(&roc)));

    let calibration = CalibrationChart {
        title: String::new(),
        runs: judged
            .iter()
            .map(|(i, label, v)| CalibrationRun {
                name: name(*i, label),
                colour: run_colour(*i),
                bins: v
                    .calibration
                    .iter()
                    .map(|g| CalibrationBin {
                        lowest_predicted: g.lowest,
                        highest_predicted: g.highest,
                        mean_predicted: g.mean_predicted,
                        observed: g.observed,
                        low: g.low,
                        high: g.high,
                        rows: g.rows,
                    })
                    .collect(),
                smoothed: v.smoothed.clone(),
                histogram: v.histogram.clone(),
            })
            .collect(),
    };
    draw_by_id(&p.doc, "calibration-canvas", 0.9, &|area, s| {
        draw_calibration(area, &calibration, s)
    });
    set_html(
        &p.doc,
        "calibration-numbers",
        &table_html(&calibration_table(&calibration)),
    );

    let decision = DecisionChart {
        title: String::new(),
        treat_all: judged[0].2.decision.iter().map(|d| (d.0, d.2)).collect(),
        runs: judged
            .iter()
            .map(|(i, label, v)| DecisionRun {
                name: name(*i, label),
                colour: run_colour(*i),
                points: v.decision.iter().map(|d| (d.0, d.1)).collect(),
            })
            .collect(),
    };
    draw_by_id(&p.doc, "decision-canvas", 0.7, &|area, s| {
        draw_decision(area, &decision, s)
    });
    set_html(
        &p.doc,
        "decision-numbers",
        &table_html(&decision_table(&decision)),
    );

    // Error by number of trees or rounds, every judged ensemble on one chart: out of sample
    // solid, training (apparent) dashed, each run in its colour, so boosting still improving
    // after its training error reaches zero, and a forest settling, show side by side.
    let sized: Vec<&(usize, String, &spinney_web::protocol::RunResult)> = runs
        .iter()
        .filter(|(_, _, r)| {
            r.members > 1 && r.validation.as_ref().is_some_and(|v| !v.roc.is_empty())
        })
        .collect();
    let error_name = sized.first().map(|(_, _, r)| r.error_name.clone());
    let mut curves = Vec::new();
    let mut members: Vec<&str> = Vec::new();
    for (i, _, r) in sized
        .iter()
        .filter(|(_, _, r)| Some(&r.error_name) == error_name.as_ref())
    {
        // Short legend words (the figure's caption and the other charts' legends say the
        // rest), so the legend leaves the curves in sight.
        let held_out = match r.oob_curve.is_empty() {
            false => Some(("out-of-bag", &r.oob_curve)),
            true => r
                .validation
                .as_ref()
                .filter(|v| !v.error_by_size.is_empty())
                .map(|v| ("held out", &v.error_by_size)),
        };
        if let Some((how, values)) = held_out {
            curves.push(Curve {
                name: format!("run {}: {how}", i + 1),
                values: values.clone(),
                colour: run_colour(*i),
                dashed: false,
            });
        }
        if !r.training_curve.is_empty() {
            curves.push(Curve {
                name: format!("run {}: training", i + 1),
                values: r.training_curve.clone(),
                colour: run_colour(*i),
                dashed: true,
            });
        }
        if !members.contains(&r.member_name.as_str()) {
            members.push(&r.member_name);
        }
    }
    show(&p.doc, "sizes-figure", !curves.is_empty());
    if let Some(error_name) = error_name.filter(|_| !curves.is_empty()) {
        let sizes = ErrorChart {
            title: String::new(),
            x_label: format!("number of {}", members.join(" or ")),
            y_label: error_name,
            curves,
        };
        draw_by_id(&p.doc, "sizes-canvas", 0.7, &|area, s| {
            draw_error_curves(area, &sizes, s)
        });
        set_html(&p.doc, "sizes-numbers", &table_html(&error_table(&sizes)));
    }
}
