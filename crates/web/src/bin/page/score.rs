//! The scoring step: a second file of records, dropped or chosen, scored by a kept run in the
//! worker exactly as `spinney predict` scores it (spinney_core::scoring: the same columns,
//! the same refusals for missing or mistyped predictors, the same notes). The first rows are
//! shown, each with its three largest contributions (TreeSHAP, on the scale stated); all of
//! them download as CSV through a Blob, never the network. The training data's
//! group / record-id column, if the file has it, is carried in front of the predictions.

use js_sys::Uint8Array;
use spinney_web::protocol::{Request, ScoreResult, PROTOCOL_VERSION};
use wasm_bindgen::JsCast;
use wasm_bindgen_futures::spawn_local;
use web_sys::{Event, File, HtmlSelectElement};

use super::{
    by_id, download, esc, fetch_origin, on, on_file_chosen, on_file_dropped, send, set_html, show,
    target_element, Origin, Page, Role, Shared,
};

#[derive(Default)]
pub struct Scoring {
    /// The request in flight.
    pub asked: Option<u32>,
    /// The chosen run (index in the runs table).
    chosen: Option<usize>,
    result: Option<ScoreResult>,
}

impl Scoring {
    /// Run `gone` (index) was removed: later indices close up; its predictions go (true:
    /// the step showed them).
    pub fn run_removed(&mut self, gone: usize) -> bool {
        let shown = self.chosen == Some(gone);
        if shown {
            self.asked = None;
            self.result = None;
        }
        self.chosen = super::runs::shifted(self.chosen, gone);
        shown
    }
}

/// Runs the worker still holds.
fn held(p: &Page) -> Vec<usize> {
    p.fits
        .runs
        .iter()
        .enumerate()
        .filter(|(_, r)| r.held)
        .map(|(i, _)| i)
        .collect()
}

/// Redraws the run choice after the runs changed.
pub fn refresh(p: &mut Page) {
    let runs = held(p);
    show(&p.doc, "step-score", !runs.is_empty());
    if runs.is_empty() {
        p.scoring.chosen = None;
        return;
    }
    let chosen = p
        .scoring
        .chosen
        .filter(|c| runs.contains(c))
        .or(runs.last().copied());
    p.scoring.chosen = chosen;
    let html = super::runs::run_select(p, "score-run", "Score with", &runs, chosen);
    set_html(&p.doc, "score-choice", &html);
}

fn message(doc: &web_sys::Document, text: &str) {
    let el = by_id(doc, "score-message");
    el.set_text_content(Some(text));
    show(doc, "score-message", !text.is_empty());
}

/// Sends `file` to the worker to be scored by the chosen run.
fn take(page: &Shared, file: File) {
    let page = page.clone();
    spawn_local(async move {
        let doc = page.borrow().doc.clone();
        let (name, bytes): (String, Uint8Array) = match fetch_origin(&Origin::File(file)).await {
            Ok(b) => b,
            Err(e) => return message(&doc, &e),
        };
        let request = {
            let mut p = page.borrow_mut();
            let Some(run) = p
                .scoring
                .chosen
                .and_then(|i| p.fits.runs.get(i))
                .map(|r| r.result.run)
            else {
                return message(
                    &doc,
                    "Grow a model in step 3 first; its run scores the records.",
                );
            };
            // The training data's record id, if the file has one of that name.
            let keep = p
                .report
                .as_ref()
                .and_then(|r| {
                    r.columns
                        .iter()
                        .zip(&p.roles)
                        .find(|(_, role)| **role == Role::Group)
                        .map(|(c, _)| vec![c.name.clone()])
                })
                .unwrap_or_default();
            p.next_id += 1;
            let id = p.next_id;
            p.scoring.asked = Some(id);
            message(&doc, "");
            set_html(
                &doc,
                "score-result",
                &format!("<p class=\"hint\">Scoring {}…</p>", esc(&name)),
            );
            Request::Score {
                v: PROTOCOL_VERSION,
                id,
                run,
                name,
                keep,
            }
        };
        send(&page, request, Some(bytes));
    });
}

/// The worker's predictions.
pub fn scored(page: &Shared, id: u32, result: ScoreResult) {
    let mut p = page.borrow_mut();
    if p.scoring.asked != Some(id) {
        return;
    }
    p.scoring.asked = None;
    let mut html = format!(
        "<p class=\"facts\" data-rows=\"{}\"><strong>{}</strong>: {} record(s) scored by run {}.</p>",
        result.rows,
        esc(&result.file),
        result.rows,
        p.scoring.chosen.map_or(0, |i| i + 1)
    );
    if !result.notes.is_empty() {
        html += "<ul class=\"notices\" id=\"score-notes\">";
        for n in &result.notes {
            html += &format!("<li>{}</li>", esc(n));
        }
        html += "</ul>";
    }
    html += &format!(
        "<p class=\"hint\" id=\"score-scale\">Beside each prediction, the three predictors that moved it most (TreeSHAP contributions, Lundberg et al. 2020), each with its signed amount on the scale of {}; the <code>amount_scale</code> column names the output they explain.</p>",
        esc(&result.contribution_scale)
    );
    html += "<p><button type=\"button\" id=\"score-download\" class=\"button primary\">Download the predictions (CSV)</button> <span class=\"hint\">Saved by your browser on this computer; nothing is sent anywhere.</span></p>";
    html += &format!(
        "<div class=\"scroll\"><table class=\"grid predictions\"><caption>The first {} of {} rows</caption><thead><tr><th scope=\"col\">Row</th>",
        result.preview.len(),
        result.rows
    );
    for h in &result.header {
        html += &format!("<th scope=\"col\">{}</th>", esc(h));
    }
    html += "</tr></thead><tbody>";
    // The model's numbers read to four decimals here (unrounded in `data-value` and in the
    // downloaded file); the file's own columns as they are.
    let rounded: Vec<bool> = result
        .header
        .iter()
        .map(|h| {
            h.starts_with("probability_") || h.ends_with("_amount") || h.starts_with("predicted_")
        })
        .collect();
    for (r, row) in result.preview.iter().enumerate() {
        html += &format!("<tr><th scope=\"row\">{}</th>", r + 1);
        for (f, &round) in row.iter().zip(&rounded) {
            match f.parse::<f64>() {
                Ok(x) if round && x.is_finite() => {
                    html += &format!("<td class=\"num\" data-value=\"{}\">{x:.4}</td>", esc(f))
                }
                _ => html += &format!("<td>{}</td>", esc(f)),
            }
        }
        html += "</tr>";
    }
    html += "</tbody></table></div><p class=\"hint\">Research use only: these predictions need external validation before they inform anyone's care, and they are no substitute for clinical judgement.</p>";
    set_html(&p.doc, "score-result", &html);
    p.scoring.result = Some(result);
}

/// The worker refused the file (its message names the file and what is wrong).
pub fn refused(page: &Shared, text: &str) {
    let mut p = page.borrow_mut();
    p.scoring.asked = None;
    set_html(&p.doc, "score-result", "");
    message(&p.doc, &format!("{text}. Nothing was scored."));
}

fn save(p: &Page) {
    let Some(r) = &p.scoring.result else { return };
    let stem = r.file.rsplit_once('.').map_or(r.file.as_str(), |(s, _)| s);
    download(
        &p.doc,
        &format!("{stem}.predictions.csv"),
        r.csv.as_bytes(),
        "text/csv",
    );
}

pub fn listen(page: &Shared) {
    let doc = page.borrow().doc.clone();
    let step = by_id(&doc, "step-score");
    let pg = page.clone();
    on(&step, "change", move |e: Event| {
        let Some(target) = target_element(&e) else {
            return;
        };
        if target.id() == "score-run" {
            let value = target.unchecked_ref::<HtmlSelectElement>().value();
            pg.borrow_mut().scoring.chosen = value.parse().ok();
        }
    });
    let pg = page.clone();
    on(&step, "click", move |e: Event| {
        let id = target_element(&e).map(|t| t.id()).unwrap_or_default();
        if id == "score-download" {
            save(&pg.borrow());
        }
    });
    let pg = page.clone();
    on_file_chosen(&by_id(&doc, "score-input"), move |file| take(&pg, file));
    let pg = page.clone();
    on_file_dropped(&by_id(&doc, "score-drop"), move |file| take(&pg, file));
}
