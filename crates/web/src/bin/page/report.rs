//! Step 8, the printable report, and saving any chart on the page as a PNG image.
//!
//! The report is composed in the page's own `#report` element (web/index.html), which only
//! the print stylesheet shows (web/style.css hides the notebook when printing): the data's
//! description and missing values, its SHA-256 fingerprint as the study file holds it, every
//! kept run's method, settings in effect, seed and validation with its figures and 95%
//! intervals, the comparison table, the warnings, the threshold step's current figures, every
//! chart on the page as an image (its canvas's pixels) with its numbers table, the cautions,
//! the date and the software version. Printing to PDF writes it on this machine only. The
//! report is composed again just before any print (the button, or the browser's own menu).
//!
//! Every `figure.curve` canvas on the page, including ones drawn after start-up by any step,
//! gets a "Save as PNG" button (placed by one observer of the page), and one delegated click
//! handler saves the canvas as it is drawn (device pixels) through a Blob download.

use spinney_core::settings::FitSettings;
use spinney_web::protocol::Figure;
use wasm_bindgen::prelude::*;
use wasm_bindgen_futures::{spawn_local, JsFuture};
use web_sys::{Document, Element, Event, HtmlCanvasElement, HtmlSelectElement};

use super::runs::{fmt_seconds, method_label, Grown, RunView};
use super::{
    by_id, data_facts, esc, fmt_value, offer_blob, on, show, summary_cell, Page, Role, Shared,
};

/// Marks a canvas that already has its save button.
const HAS_BUTTON: &str = "data-png-button";

/// The step shows once there is a table to report on.
pub fn refresh(p: &Page) {
    show(&p.doc, "step-report", p.report.is_some());
}

// ---------------------------------------------------------------------------- composing

/// Writes the report into `#report` from the page's state, and says what it holds in the
/// step's status line.
fn compose(p: &Page) {
    let doc = &p.doc;
    let now = js_sys::Date::new_0();
    let iso = String::from(now.to_iso_string());
    let mut html = format!(
        "<header class=\"report-head\"><h1>Spinney report</h1><p>Made {} with Spinney <span data-report=\"version\">{}</span>, inside a browser tab on this computer. Nothing in it was sent anywhere.</p></header>",
        esc(&when(&now)),
        esc(spinney_core::VERSION)
    );
    let caution = by_id(doc, "caution").inner_html();
    html += &format!("<p class=\"report-caution\" data-report=\"caution\">{caution}</p>");
    html += &data_section(p);
    let runs = &p.fits.runs;
    html += &runs_section(runs);
    html += &comparison_section(doc);
    html += &warnings_section(doc, runs);
    html += &threshold_section(doc);
    let (charts_html, charts) = charts_section(doc);
    html += &charts_html;
    html += &format!(
        "<footer class=\"report-foot\"><p>{caution}</p><p>Spinney {} · composed {} · data fingerprint <code>{}</code></p></footer>",
        esc(spinney_core::VERSION),
        esc(&iso),
        p.report
            .as_ref()
            .map_or("none".into(), |r| esc(&r.fingerprint_sha256))
    );
    let report = by_id(doc, "report");
    report.set_inner_html(&html);
    let _ = report.set_attribute("data-composed", &iso);
    let _ = report.set_attribute("data-runs", &runs.len().to_string());
    let _ = report.set_attribute("data-charts", &charts.to_string());
    by_id(doc, "report-status").set_text_content(Some(&format!(
        "Report made at {} UTC: {} run(s), {} chart(s). Choose “Save as PDF” as the printer to keep it as a file.",
        iso.get(11..16).unwrap_or(&iso),
        runs.len(),
        charts
    )));
}

/// "on 2 December 2026 at 11:50 UTC".
fn when(d: &js_sys::Date) -> String {
    const MONTHS: [&str; 12] = [
        "January",
        "February",
        "March",
        "April",
        "May",
        "June",
        "July",
        "August",
        "September",
        "October",
        "November",
        "December",
    ];
    format!(
        "on {} {} {} at {:02}:{:02} UTC",
        d.get_utc_date(),
        MONTHS[(d.get_utc_month() as usize).min(11)],
        d.get_utc_full_year(),
        d.get_utc_hours(),
        d.get_utc_minutes()
    )
}

/// The file, its fingerprint, how it was read, its missing values and every column.
fn data_section(p: &Page) -> String {
    let Some(r) = &p.report else {
        return "<section class=\"report-section\"><h2>The data</h2><p>No records are loaded.</p></section>".into();
    };
    let mut html =
        String::from("<section class=\"report-section\" data-report=\"data\"><h2>The data</h2>");
    html += &format!("<p>{}</p>", data_facts(r));
    html += &format!(
        "<p>Fingerprint (SHA-256 of the file's bytes, as the study file holds it): <code data-report=\"fingerprint\">{}</code>. The same file gives the same fingerprint; any change to it gives another.</p>",
        esc(&r.fingerprint_sha256)
    );
    let mut read = Vec::new();
    if let Some(sheet) = &r.source.sheet {
        read.push(format!("sheet {}", esc(sheet)));
    }
    if !p.settings.missing.is_empty() {
        read.push(format!(
            "also read as missing: {}",
            esc(&p.settings.missing.join(", "))
        ));
    }
    for (column, kind) in &p.settings.kinds {
        read.push(format!("{} read as {}", esc(column), esc(kind)));
    }
    if !read.is_empty() {
        html += &format!("<p>Reading settings: {}.</p>", read.join("; "));
    }
    if !r.notices.is_empty() {
        html += "<ul>";
        for n in &r.notices {
            html += &format!("<li>{}</li>", esc(n));
        }
        html += "</ul>";
    }
    let cells = r.rows * r.columns.len();
    let missing: usize = r.columns.iter().map(|c| c.missing).sum();
    let gappy = r.columns.iter().filter(|c| c.missing > 0).count();
    html += &format!(
        "<p data-report=\"missing\" data-missing-cells=\"{missing}\"><strong>Missing values:</strong> {missing} of {cells} cells ({:.1}%); {gappy} of {} columns have any.</p>",
        100.0 * missing as f64 / cells.max(1) as f64,
        r.columns.len()
    );
    html += "<table class=\"report-columns\"><caption>The columns, how they were read and what each is used for</caption><thead><tr><th scope=\"col\">Column</th><th scope=\"col\">Kind</th><th scope=\"col\">Used as</th><th scope=\"col\">Missing</th><th scope=\"col\">Distinct</th><th scope=\"col\">Lowest · middle · highest, or most frequent</th><th scope=\"col\">Look out</th></tr></thead><tbody>";
    for (i, c) in r.columns.iter().enumerate() {
        let role = p.roles.get(i).copied().unwrap_or(Role::Ignore);
        let flags: Vec<&str> = c.flags.iter().map(|f| f.label()).collect();
        html += &format!(
            "<tr><th scope=\"row\">{}</th><td>{}</td><td>{}</td><td class=\"num\">{} <span class=\"unit\">({:.1}%)</span></td><td class=\"num\">{}</td><td>{}</td><td>{}</td></tr>",
            esc(&c.name),
            c.kind.label(),
            role.label(),
            c.missing,
            100.0 * c.missing_share,
            c.distinct,
            summary_cell(c),
            flags.join(", ")
        );
    }
    html += "</tbody></table>";
    // The outcome's range or classes, as the roles step words it.
    if let Some(o) = r
        .columns
        .iter()
        .zip(&p.roles)
        .find(|(_, r)| **r == Role::Outcome)
    {
        let c = o.0;
        if c.top.is_empty() {
            if let (Some(lo), Some(hi)) = (c.min, c.max) {
                html += &format!(
                    "<p>Outcome {}: a number from {} to {}.</p>",
                    esc(&c.name),
                    fmt_value(c, lo),
                    fmt_value(c, hi)
                );
            }
        }
    }
    html + "</section>"
}

/// A figure's plain name.
fn figure_label(name: &str) -> String {
    match name {
        "auc" => "AUC (area under the ROC curve)".into(),
        "macro_auc" => "AUC, mean of one-vs-rest".into(),
        "log_loss" => "log loss".into(),
        "brier" => "Brier score".into(),
        "scaled_brier" => "scaled Brier score".into(),
        "calibration_intercept" => "calibration in the large".into(),
        "observed_expected" => "observed / expected events".into(),
        "ppv" => "positive predictive value".into(),
        "npv" => "negative predictive value".into(),
        "f1" => "F1 score".into(),
        "rmse" => "RMSE (root mean squared error)".into(),
        "mae" => "MAE (mean absolute error)".into(),
        "r_squared" => "R²".into(),
        other => other.replace('_', " "),
    }
}

fn number(x: f64) -> String {
    if !x.is_finite() {
        "—".into()
    } else if x.abs() >= 100.0 {
        format!("{x:.1}")
    } else {
        format!("{x:.3}")
    }
}

fn interval(f: &Figure) -> String {
    match (f.low, f.high) {
        (Some(l), Some(h)) => format!("{} to {}", number(l), number(h)),
        _ => "—".into(),
    }
}

/// Settings by name, and the seed (`None` for the baseline, which draws nothing at random).
type InEffect = (Vec<(String, String)>, Option<u64>);

/// Every setting in effect for a run (the method's defaults with the given ones applied),
/// by name, and the seed its model records; `None` if the settings no longer apply (they
/// did when it was grown).
fn in_effect(run: &RunView) -> Option<InEffect> {
    let a = &run.ask;
    let regression = run.result.error_name == "mean squared error";
    let Grown::Trees(method) = a.method else {
        // The baseline's one setting; it has no random draws, so no seed.
        let penalty = a.settings.iter().find(|(n, _)| n == "penalty").map_or_else(
            || spinney_core::validate::BASELINE_PENALTY.to_string(),
            |(_, v)| v.clone(),
        );
        return Some((vec![("penalty".into(), penalty)], None));
    };
    let mut s = FitSettings::defaults(
        method,
        a.design.predictors.len(),
        regression,
        &a.design.outcome,
    )
    .ok()?;
    for (name, value) in &a.settings {
        s.apply(name, value).ok()?;
    }
    Some((s.describe().into_iter().collect(), Some(s.seed())))
}

/// Each kept run: what it was grown on and how, how it was judged and its figures.
fn runs_section(runs: &[RunView]) -> String {
    let mut html =
        String::from("<section class=\"report-section\" data-report=\"runs\"><h2>The runs</h2>");
    if runs.is_empty() {
        return html + "<p>No runs were kept.</p></section>";
    }
    html += "<p>Each run's settings are the method's defaults with those marked ⁎ set by hand; the same data, settings and seed grow the same model again. Figures judged on records the model did not learn from carry a 95% interval: DeLong's for the AUC, Wilson's for proportions, otherwise a seeded percentile bootstrap of the judged predictions.</p>";
    for (i, run) in runs.iter().enumerate() {
        html += &run_html(i, run);
    }
    html + "</section>"
}

fn run_html(i: usize, run: &RunView) -> String {
    let (a, res) = (&run.ask, &run.result);
    let mut html = format!(
        "<section class=\"report-run\" data-run=\"{}\"><h3>Run {}: {}{}</h3><dl class=\"report-facts\">",
        i + 1,
        i + 1,
        method_label(a.method),
        if run.stale {
            " <span class=\"flag\">earlier data or roles: these figures describe the choice before</span>"
        } else {
            ""
        }
    );
    let fact = |term: &str, what: String| format!("<dt>{term}</dt><dd>{what}</dd>");
    html += &fact("Outcome", esc(&a.design.outcome));
    html += &fact(
        "Predictors",
        format!(
            "{} column(s): <span data-report=\"predictors\">{}</span>",
            a.design.predictors.len(),
            esc(&a.design.predictors.join(", "))
        ),
    );
    if let Some(w) = &a.design.weight {
        html += &fact("Row weight", esc(w));
    }
    if let Some(g) = &a.design.group {
        html += &fact(
            "Group / record id",
            format!("<span data-report=\"group\">{}</span>", esc(g)),
        );
    }
    match in_effect(run) {
        Some((settings, seed)) => {
            let given: Vec<String> = settings
                .iter()
                .map(|(name, value)| {
                    let set = a.settings.iter().any(|(n, _)| n == name);
                    format!(
                        "<span class=\"report-setting\" data-setting=\"{}\" data-value=\"{}\">{}{} = {}</span>",
                        esc(name),
                        esc(value),
                        if set { "⁎" } else { "" },
                        esc(name),
                        esc(value)
                    )
                })
                .collect();
            html += &fact("Settings in effect", given.join(" · "));
            if let Some(seed) = seed {
                html += &fact("Seed", format!("<span data-report=\"seed\">{seed}</span>"));
            }
        }
        None => html += &fact("Settings", esc(&a.summary)),
    }
    html += &fact(
        "Grown on",
        format!(
            "{} rows, {} predictors; {} {} in {}",
            res.rows,
            res.predictors,
            res.members,
            esc(&res.member_name),
            fmt_seconds(res.fit_seconds)
        ),
    );
    let mut errors = format!(
        "training (apparent, the same rows: not a validation) {:.4}",
        res.training_error
    );
    if let Some(oob) = res.oob_error {
        errors += &format!("; out-of-bag {oob:.4}");
    }
    html += &fact(&capitalised(&res.error_name), errors);
    match (&a.judging, &res.validation) {
        (Some(j), Some(v)) => html += &fact(
            "Judged by",
            format!(
                "<span data-report=\"scheme\">{}</span> ({}), {} records; splits seed {}, figures at threshold {}{}",
                esc(&v.scheme),
                esc(&j.scheme),
                v.judged_rows,
                j.seed,
                j.threshold,
                if j.baseline {
                    format!("; baseline: {} on the same splits", esc(&v.baseline_name))
                } else {
                    String::new()
                }
            ),
        ),
        (Some(j), None) => {
            html += &fact(
                "Judged by",
                format!(
                    "{}: could not be judged{}",
                    esc(&j.scheme),
                    res.validation_refused
                        .as_deref()
                        .map_or(String::new(), |e| format!(" ({})", esc(e)))
                ),
            )
        }
        (None, _) => {
            html += &fact(
                "Judged by",
                "not judged: its figures are training figures, not a validation".into(),
            )
        }
    }
    html += "</dl>";
    if let Some(v) = &res.validation {
        html += &format!(
            "<table class=\"report-figures\"><caption>Run {}: figures on records it did not learn from ({})</caption><thead><tr><th scope=\"col\">Figure</th><th scope=\"col\">Value</th><th scope=\"col\">95% interval</th>{}</tr></thead><tbody>",
            i + 1,
            esc(&v.scheme),
            if v.baseline.is_some() {
                format!(
                    "<th scope=\"col\">Baseline ({})</th><th scope=\"col\">its 95% interval</th>",
                    esc(&v.baseline_name)
                )
            } else {
                String::new()
            }
        );
        for f in &v.figures {
            html += &format!(
                "<tr data-figure=\"{}\" data-value=\"{}\" data-low=\"{}\" data-high=\"{}\"><th scope=\"row\">{}</th><td class=\"num\">{}</td><td class=\"num\">{}</td>",
                esc(&f.name),
                f.value,
                f.low.map_or(String::new(), |x| x.to_string()),
                f.high.map_or(String::new(), |x| x.to_string()),
                esc(&figure_label(&f.name)),
                number(f.value),
                interval(f)
            );
            if let Some(b) = &v.baseline {
                match b.iter().find(|g| g.name == f.name) {
                    Some(g) => {
                        html += &format!(
                            "<td class=\"num\">{}</td><td class=\"num\">{}</td>",
                            number(g.value),
                            interval(g)
                        )
                    }
                    None => html += "<td class=\"num\">—</td><td></td>",
                }
            }
            html += "</tr>";
        }
        html += "</tbody></table>";
        if !v.notes.is_empty() {
            html += &list(&v.notes);
        }
    }
    if !res.notices.is_empty() {
        html += &list(&res.notices);
    }
    if let Some(stop) = &res.stop {
        html += &format!("<p>Stopped: {}.</p>", esc(stop));
    }
    html + "</section>"
}

fn capitalised(text: &str) -> String {
    let mut chars = text.chars();
    chars.next().map_or(String::new(), |c| {
        esc(&(c.to_uppercase().collect::<String>() + chars.as_str()))
    })
}

fn list(items: &[String]) -> String {
    list_items(items, "")
}

fn list_items(items: &[String], class: &str) -> String {
    let items: String = items
        .iter()
        .map(|t| format!("<li>{}</li>", esc(t)))
        .collect();
    format!("<ul class=\"{class}\">{items}</ul>")
}

/// The comparison step's table as the page shows it.
fn comparison_section(doc: &Document) -> String {
    if hidden(&by_id(doc, "step-compare")) {
        return String::new();
    }
    format!(
        "<section class=\"report-section\" data-report=\"comparison\"><h2>The runs side by side</h2><p>Out-of-sample figures with their 95% intervals; the baseline judged on the same splits in grey.</p>{}</section>",
        by_id(doc, "compare-table").inner_html()
    )
}

/// The roles step's warnings, the computed validation warnings and the runs' notices, once
/// each.
fn warnings_section(doc: &Document, runs: &[RunView]) -> String {
    let mut all: Vec<String> = Vec::new();
    let mut add = |w: String| {
        if !w.is_empty() && !all.contains(&w) {
            all.push(w);
        }
    };
    if let Ok(items) =
        doc.query_selector_all("#roles-summary .warnings li, #roles-checks .warnings li")
    {
        for k in 0..items.length() {
            if let Some(text) = items.item(k).and_then(|n| n.text_content()) {
                add(text);
            }
        }
    }
    for run in runs {
        if let Some(v) = &run.result.validation {
            v.warnings.iter().cloned().for_each(&mut add);
        }
    }
    let body = if all.is_empty() {
        "<p>None were raised.</p>".to_string()
    } else {
        list_items(&all, "warnings")
    };
    format!("<section class=\"report-section\" data-report=\"warnings\" data-count=\"{}\"><h2>Warnings</h2>{body}</section>", all.len())
}

/// The threshold step's figures at the threshold now chosen, as the page shows them.
fn threshold_section(doc: &Document) -> String {
    let step = by_id(doc, "step-threshold");
    let result = by_id(doc, "threshold-result");
    let has_figures = result
        .query_selector(".threshold-tables")
        .ok()
        .flatten()
        .is_some();
    if hidden(&step) || !has_figures {
        return String::new();
    }
    let chosen = |id: &str| -> String {
        doc.get_element_by_id(id)
            .and_then(|e| e.dyn_into::<HtmlSelectElement>().ok())
            .and_then(|s| s.selected_options().item(0))
            .and_then(|o| o.text_content())
            .unwrap_or_default()
    };
    format!(
        "<section class=\"report-section\" data-report=\"threshold\"><h2>At a decision threshold</h2><p>{}; class called positive: {}.</p>{}</section>",
        esc(&chosen("threshold-run")),
        esc(&chosen("threshold-positive")),
        result.inner_html()
    )
}

/// Every chart drawn on the page now, as an image with its numbers; and how many.
fn charts_section(doc: &Document) -> (String, usize) {
    let mut html = String::new();
    let mut count = 0;
    for canvas in chart_canvases(doc) {
        if hidden(&canvas) || canvas.width() == 0 || canvas.height() == 0 {
            continue;
        }
        let Ok(url) = canvas.to_data_url() else {
            continue;
        };
        let figure = canvas.closest("figure").ok().flatten();
        let caption = figure
            .as_ref()
            .and_then(|f| f.query_selector("figcaption").ok().flatten())
            .and_then(|c| c.text_content())
            .unwrap_or_default();
        let alt = canvas
            .get_attribute("aria-label")
            .unwrap_or_else(|| caption.clone());
        let mut notes = String::new();
        let mut numbers = String::new();
        if let Some(f) = &figure {
            if let Ok(hints) = f.query_selector_all("p.hint") {
                for k in 0..hints.length() {
                    if let Some(t) = hints.item(k).and_then(|n| n.text_content()) {
                        notes += &format!("<p class=\"hint\">{}</p>", esc(&t));
                    }
                }
            }
            if let Ok(tables) = f.query_selector_all("details.numbers table") {
                for k in 0..tables.length() {
                    if let Some(t) = tables.item(k).and_then(|n| n.dyn_into::<Element>().ok()) {
                        numbers += &t.outer_html();
                    }
                }
            }
        }
        // Printed as wide as it shows on screen, so its text keeps its size.
        let css_width = match canvas.client_width() {
            w if w > 0 => w as u32,
            _ => canvas.width(),
        };
        count += 1;
        html += &format!(
            "<figure class=\"report-figure\" data-chart=\"{}\"><figcaption>{}</figcaption><img class=\"report-chart\" src=\"{url}\" alt=\"{}\" width=\"{css_width}\" data-width=\"{}\" data-height=\"{}\">{notes}</figure>{}",
            esc(&chart_name(&canvas)),
            esc(&caption),
            esc(&alt),
            canvas.width(),
            canvas.height(),
            if numbers.is_empty() {
                String::new()
            } else {
                format!("<div class=\"report-numbers\"><p class=\"report-numbers-title\">The numbers behind “{}”</p>{numbers}</div>", esc(&caption))
            }
        );
    }
    if count == 0 {
        return (String::new(), 0);
    }
    (
        format!("<section class=\"report-section\" data-report=\"charts\"><h2>Charts</h2><p>Each chart as drawn on the page, then its numbers.</p>{html}</section>"),
        count,
    )
}

/// Whether `el` or anything around it is hidden.
fn hidden(el: &Element) -> bool {
    el.closest("[hidden]").ok().flatten().is_some()
}

/// Every canvas in a chart figure of the notebook, in page order.
fn chart_canvases(doc: &Document) -> Vec<HtmlCanvasElement> {
    let mut out = Vec::new();
    if let Ok(list) = doc.query_selector_all(".notebook figure.curve canvas") {
        for k in 0..list.length() {
            if let Some(c) = list.item(k).and_then(|n| n.dyn_into().ok()) {
                out.push(c);
            }
        }
    }
    out
}

// ---------------------------------------------------------------------------- saving charts

/// Lowercase letters and digits, words joined by '-', at most `max` characters.
fn slug(text: &str, max: usize) -> String {
    let mut s = String::new();
    for c in text.chars().flat_map(char::to_lowercase) {
        if c.is_ascii_alphanumeric() {
            s.push(c);
        } else if !s.is_empty() && !s.ends_with('-') {
            s.push('-');
        }
    }
    let mut s: String = s.chars().take(max).collect();
    while s.ends_with('-') {
        s.pop();
    }
    s
}

/// The chart's short name: its figure's `data-chart`, else its caption.
fn chart_name(canvas: &HtmlCanvasElement) -> String {
    let figure = canvas.closest("figure").ok().flatten();
    let named = figure.as_ref().and_then(|f| f.get_attribute("data-chart"));
    let caption = figure
        .as_ref()
        .and_then(|f| f.query_selector("figcaption").ok().flatten())
        .and_then(|c| c.text_content())
        .unwrap_or_default();
    let from_caption = named.is_none();
    let name = slug(&named.unwrap_or_else(|| caption.clone()), 48);
    // The runs drawn: the canvas's or figure's `data-runs` ("1-3"), else "Run N" in the
    // caption (unless the name is the caption already).
    let runs = canvas
        .get_attribute("data-runs")
        .or_else(|| figure.as_ref().and_then(|f| f.get_attribute("data-runs")))
        .or_else(|| {
            if from_caption {
                return None;
            }
            let lower = caption.to_lowercase();
            let at = lower.find("run ")? + 4;
            let digits: String = lower[at..]
                .chars()
                .take_while(char::is_ascii_digit)
                .collect();
            (!digits.is_empty()).then_some(digits)
        });
    match runs.map(|r| slug(&r, 40)).filter(|r| !r.is_empty()) {
        Some(r) if r.contains('-') => {
            format!("{}-runs-{r}", if name.is_empty() { "chart" } else { &name })
        }
        Some(r) => format!("{}-run-{r}", if name.is_empty() { "chart" } else { &name }),
        None if name.is_empty() => "chart".into(),
        None => name,
    }
}

/// Gives every chart canvas without one its save button, just after it.
fn add_buttons(doc: &Document) {
    for canvas in chart_canvases(doc) {
        if canvas.has_attribute(HAS_BUTTON) {
            continue;
        }
        let _ = canvas.set_attribute(HAS_BUTTON, "");
        let _ = canvas.insert_adjacent_html(
            "afterend",
            "<p class=\"chart-actions\"><button type=\"button\" class=\"button quiet save-png\" data-save-png title=\"Saves the chart as drawn, as a PNG image file made on this computer\">Save this chart as PNG</button></p>",
        );
    }
}

/// Saves the chart beside `button` as `spinney-CHART[-run-N].png`.
fn save_png(doc: &Document, button: &Element) {
    let canvas = button.closest("figure").ok().flatten().and_then(|f| {
        // The canvas whose button this is: the nearest one before it in the figure.
        let list = f.query_selector_all("canvas").ok()?;
        let mut found = None;
        for k in 0..list.length() {
            let c: HtmlCanvasElement = list.item(k)?.dyn_into().ok()?;
            if c.compare_document_position(button) & web_sys::Node::DOCUMENT_POSITION_FOLLOWING != 0
            {
                found = Some(c);
            }
        }
        found
    });
    let Some(canvas) = canvas else { return };
    let name = format!("spinney-{}.png", chart_name(&canvas));
    let doc = doc.clone();
    let take = Closure::once_into_js(move |blob: JsValue| {
        if let Some(blob) = blob.dyn_ref::<web_sys::Blob>() {
            offer_blob(&doc, &name, blob);
        }
    });
    if let Err(e) = canvas.to_blob(take.unchecked_ref()) {
        web_sys::console::error_2(&"the chart could not be saved".into(), &e);
    }
}

// ---------------------------------------------------------------------------- events

/// Composes the report, waits for its images, then opens the print dialog.
fn print(page: &Shared) {
    let doc = {
        let p = page.borrow();
        compose(&p);
        p.doc.clone()
    };
    spawn_local(async move {
        // Images from data: URLs decode quickly, but must be decoded before the print layout.
        if let Ok(images) = doc.query_selector_all("#report img") {
            for k in 0..images.length() {
                if let Some(img) = images
                    .item(k)
                    .and_then(|n| n.dyn_into::<web_sys::HtmlImageElement>().ok())
                {
                    let _ = JsFuture::from(img.decode()).await;
                }
            }
        }
        let report = by_id(&doc, "report");
        let _ = report.set_attribute("data-printing", "");
        if let Some(w) = web_sys::window() {
            let _ = w.print();
        }
        let _ = report.remove_attribute("data-printing");
    });
}

pub fn listen(page: &Shared) {
    let doc = page.borrow().doc.clone();
    let pg = page.clone();
    on(&by_id(&doc, "report-print"), "click", move |_: Event| {
        print(&pg)
    });
    // The browser's own print command: the report as the page is now.
    let pg = page.clone();
    let before = Closure::<dyn FnMut(Event)>::new(move |_: Event| {
        let p = pg.borrow();
        if !by_id(&p.doc, "report").has_attribute("data-printing") {
            compose(&p);
        }
    });
    if let Some(w) = web_sys::window() {
        let _ = w.add_event_listener_with_callback("beforeprint", before.as_ref().unchecked_ref());
    }
    before.forget();
    // Save buttons for the charts there are, and for any drawn later.
    add_buttons(&doc);
    let d = doc.clone();
    let observe = Closure::<dyn FnMut()>::new(move || add_buttons(&d));
    if let Ok(observer) = web_sys::MutationObserver::new(observe.as_ref().unchecked_ref()) {
        let options = web_sys::MutationObserverInit::new();
        options.set_child_list(true);
        options.set_subtree(true);
        let _ = observer.observe_with_options(&by_id(&doc, "app"), &options);
    }
    observe.forget();
    let d = doc.clone();
    on(&by_id(&doc, "app"), "click", move |e: Event| {
        let button = e
            .target()
            .and_then(|t| t.dyn_into::<Element>().ok())
            .and_then(|t| t.closest("[data-save-png]").ok().flatten());
        if let Some(b) = button {
            save_png(&d, &b);
        }
    });
}
