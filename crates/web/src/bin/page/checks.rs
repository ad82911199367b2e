//! Step 2's checks computed from the records: whenever the outcome, predictors, group or
//! weight change, the worker builds the design and runs the same warnings a judged run
//! gets (`spinney_core::validate::warnings`: a predictor that alone separates the classes,
//! identifier-like predictors, events per predictor and the Riley et al. (2020) sample size,
//! class imbalance, repeated records), and they are shown under the roles summary before any
//! model is grown, with the class every figure treats as the event when the outcome has
//! two. The roles summary itself (page.rs) says what it can from the column
//! summaries alone.

use spinney_web::protocol::{FitDesign, Request, PROTOCOL_VERSION};

use wasm_bindgen::JsCast;

use super::{by_id, design_of, esc, send, set_html, Shared};

#[derive(Default)]
pub struct Checks {
    /// The request in flight and the design it is for.
    asked: Option<(u32, FitDesign)>,
    /// The design whose checks are shown.
    shown: Option<FitDesign>,
}

/// Asks for the checks of the current design when it differs from the one shown or asked.
pub fn refresh(page: &Shared) {
    let request = {
        let mut p = page.borrow_mut();
        let design = design_of(&p).map(|(d, _)| d);
        let Some(design) = design else {
            p.checks = Checks::default();
            set_html(&p.doc, "roles-checks", "");
            return;
        };
        let same = |d: &Option<FitDesign>| d.as_ref() == Some(&design);
        if same(&p.checks.shown) || same(&p.checks.asked.as_ref().map(|(_, d)| d.clone())) {
            return;
        }
        p.next_id += 1;
        let id = p.next_id;
        p.checks.asked = Some((id, design.clone()));
        Request::Warnings {
            v: PROTOCOL_VERSION,
            id,
            design,
        }
    };
    send(page, request, None);
}

/// The worker's checks for request `id`: shown if they are for the current design.
pub fn arrived(
    page: &Shared,
    id: u32,
    warnings: Vec<String>,
    refused: Option<String>,
    classes: Option<[String; 2]>,
) {
    let mut p = page.borrow_mut();
    let Some((asked, design)) = p.checks.asked.take() else {
        return;
    };
    if asked != id {
        p.checks.asked = Some((asked, design));
        return;
    }
    // A class called positive that this outcome does not have (its kind or values changed):
    // forget it and ask again with the default event.
    if refused.is_some() && design.positive.is_some() {
        p.positive = None;
        drop(p);
        return refresh(page);
    }
    let mut html = String::new();
    if let Some(why) = refused {
        html += &format!(
            "<p class=\"message error\">No model can be grown on these choices yet: {}.</p>",
            esc(&why)
        );
    } else if warnings.is_empty() {
        html += "<p class=\"checks-clear\">Checked on the records: no predictor alone gives the outcome away, no identifier-like predictor, and enough records for the number of predictors.</p>";
    } else {
        html += "<p><strong>Checked on the records</strong> (the same checks every judged run repeats):</p><ul class=\"warnings\">";
        for w in &warnings {
            html += &format!("<li>{}</li>", esc(w));
        }
        html += "</ul>";
    }
    if let Some([other, event]) = &classes {
        let option = |label: &str, selected: bool| {
            format!(
                "<option value=\"{}\"{}>{}</option>",
                esc(label),
                if selected { " selected" } else { "" },
                esc(label)
            )
        };
        html += &format!(
            "<p class=\"event-note\" data-event=\"{e}\"><label class=\"field-inline\">Class called positive (the event) <select id=\"positive-class\">{}{}</select></label> Every figure for this outcome is about the probability of <strong>{e}</strong>: AUC, calibration and decision curves, the threshold step, the report and the scores.</p>",
            option(event, true),
            option(other, false),
            e = esc(event)
        );
    }
    set_html(&p.doc, "roles-checks", &html);
    p.checks.shown = Some(design);
}

/// A new table or a restarted worker: what was shown or asked no longer holds.
pub fn forget(page: &Shared) {
    page.borrow_mut().checks = Checks::default();
}

/// The class called positive was changed: later runs use it, earlier ones are marked.
pub fn listen(page: &Shared) {
    let doc = page.borrow().doc.clone();
    let pg = page.clone();
    super::on(
        &by_id(&doc, "roles-checks"),
        "change",
        move |e: web_sys::Event| {
            let Some(select) = e
                .target()
                .and_then(|t| t.dyn_into::<web_sys::HtmlSelectElement>().ok())
                .filter(|s| s.id() == "positive-class")
            else {
                return;
            };
            {
                let mut p = pg.borrow_mut();
                p.positive = Some(select.value());
                p.fits.mark_stale();
                super::render_columns(&p);
            }
            super::runs_changed(&pg);
            super::study::autosave(&pg);
        },
    );
}
