//! Step 2's checks computed from the records: whenever the outcome, predictors, group or
//! weight change, the worker builds the design and runs the same warnings a judged run
//! gets (`spinney_core::validate::warnings`: a predictor that alone separates the classes,
//! identifier-like predictors, events per predictor and the Riley et al. (2020) sample size,
//! class imbalance, repeated records), and they are shown under the roles summary before any
//! model is grown, with the class every figure treats as the event when the outcome has
//! two. The roles summary itself (page.rs) says what it can from the column
//! summaries alone.

use spinney_web::protocol::{FitDesign, Request, PROTOCOL_VERSION};

use super::{design_of, esc, send, set_html, Shared};

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
    event: Option<String>,
) {
    let mut p = page.borrow_mut();
    let Some((asked, design)) = p.checks.asked.take() else {
        return;
    };
    if asked != id {
        p.checks.asked = Some((asked, design));
        return;
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
    if let Some(e) = &event {
        html += &format!(
            "<p class=\"event-note\" data-event=\"{e}\">Every figure for this outcome treats <strong>{e}</strong> as the event: AUC, calibration and decision curves, the report and the scores are about the probability of {e}. The threshold step (6) can call the other class positive for its counts.</p>",
            e = esc(e)
        );
    }
    set_html(&p.doc, "roles-checks", &html);
    p.checks.shown = Some(design);
}

/// A new table or a restarted worker: what was shown or asked no longer holds.
pub fn forget(page: &Shared) {
    page.borrow_mut().checks = Checks::default();
}
