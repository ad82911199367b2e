//! The threshold step: for a chosen two-class run, a slider and a number box over the
//! decision threshold, with the confusion matrix, sensitivity, specificity, PPV and NPV with
//! 95% Wilson intervals, and net benefit beside treating everyone or no one, all from
//! `spinney_core::metrics` as the threshold moves.
//!
//! The rows' predictions come from the worker once per run: the judged scheme's
//! out-of-sample predictions when the run was judged (cross-validation, holdout, bootstrap
//! refits, out-of-bag), out-of-bag for an unjudged forest, and the training rows' own
//! otherwise, labelled as training (apparent) and never as a validation.

use spinney_core::metrics::binary::{at_threshold, net_benefit, net_benefit_treat_all, Proportion};
use spinney_core::study::StudyThreshold;
use spinney_web::protocol::{Request, RunPredictions, PROTOCOL_VERSION};
use wasm_bindgen::JsCast;
use web_sys::{Event, HtmlInputElement, HtmlSelectElement};

use super::{by_id, esc, on, send, set_html, show, Page, Shared};

#[derive(Default)]
pub struct Threshold {
    /// The request in flight, and which run (index in the runs table) it is for.
    pub asked: Option<u32>,
    /// The chosen run (index in the runs table).
    chosen: Option<usize>,
    /// Its predictions, once they came.
    data: Option<RunPredictions>,
    /// The code of the class called positive (1 until the user picks the other).
    positive: u32,
    value: f64,
    /// A study's choice waiting for its run to be grown again: (run index, label of the
    /// class called positive).
    wanted: Option<(usize, String)>,
}

impl Threshold {
    /// Run `gone` (index) was removed: later indices close up; its predictions go.
    pub fn run_removed(&mut self, gone: usize) {
        if self.chosen == Some(gone) {
            self.asked = None;
            self.data = None;
        }
        self.chosen = super::runs::shifted(self.chosen, gone);
        self.wanted = self
            .wanted
            .take()
            .and_then(|(i, label)| Some((super::runs::shifted(Some(i), gone)?, label)));
    }
}

/// The step's choice as a study keeps it (`None` before a run is chosen).
pub fn choice(p: &Page) -> Option<StudyThreshold> {
    let t = &p.threshold;
    if let Some((run, positive)) = &t.wanted {
        return Some(StudyThreshold {
            run: run + 1,
            positive: positive.clone(),
            value: t.value,
        });
    }
    let d = t.data.as_ref()?;
    Some(StudyThreshold {
        run: t.chosen? + 1,
        positive: d.classes.get(t.positive as usize)?.clone(),
        value: t.value,
    })
}

/// Takes a study's choice: the threshold now, the run and positive class once that run is
/// grown again.
pub fn restore(p: &mut Page, choice: Option<&StudyThreshold>) {
    let Some(c) = choice else {
        p.threshold.wanted = None;
        return;
    };
    p.threshold.value = c.value;
    p.threshold.wanted = Some((c.run.saturating_sub(1), c.positive.clone()));
}

/// Runs the step can use: held by the worker, on the current data, two classes.
fn eligible(p: &Page) -> Vec<usize> {
    p.fits
        .runs
        .iter()
        .enumerate()
        .filter(|(_, r)| r.held && !r.stale && r.result.error_name == "error rate")
        .map(|(i, _)| i)
        .collect()
}

/// Redraws the step after the runs changed; asks for the newest run's predictions when
/// none is chosen (or the chosen one is gone).
pub fn refresh(page: &Shared) {
    let ask = {
        let mut p = page.borrow_mut();
        let runs = eligible(&p);
        show(&p.doc, "step-threshold", !runs.is_empty());
        if runs.is_empty() {
            p.threshold.chosen = None;
            p.threshold.data = None;
            return;
        }
        if p.threshold.value <= 0.0 {
            p.threshold.value = 0.5;
            p.threshold.positive = 1;
        }
        // A study's run, once grown again, wins over the one shown meanwhile.
        let wanted = p
            .threshold
            .wanted
            .as_ref()
            .map(|w| w.0)
            .filter(|w| runs.contains(w));
        let keep = p
            .threshold
            .chosen
            .filter(|c| runs.contains(c) && wanted.is_none_or(|w| w == *c));
        render_choice(&p, &runs, keep.or(wanted).or(runs.last().copied()));
        match keep {
            Some(_) => None,
            None => wanted.or(runs.last().copied()),
        }
    };
    if let Some(i) = ask {
        choose(page, i);
    }
}

fn render_choice(p: &Page, runs: &[usize], chosen: Option<usize>) {
    let mut html = super::runs::run_select(p, "threshold-run", "Run", runs, chosen);
    if let Some(d) = &p.threshold.data {
        html += " <label class=\"field-inline\">Class called positive <select id=\"threshold-positive\">";
        for (code, label) in d.classes.iter().enumerate() {
            html += &format!(
                "<option value=\"{code}\"{}>{}</option>",
                if code as u32 == p.threshold.positive {
                    " selected"
                } else {
                    ""
                },
                esc(label)
            );
        }
        html += "</select></label>";
    }
    set_html(&p.doc, "threshold-choice", &html);
}

/// Asks the worker for run `i`'s predictions.
fn choose(page: &Shared, i: usize) {
    let request = {
        let mut p = page.borrow_mut();
        let Some(run) = p.fits.runs.get(i).map(|r| r.result.run) else {
            return;
        };
        p.next_id += 1;
        let id = p.next_id;
        p.threshold.asked = Some(id);
        p.threshold.chosen = Some(i);
        p.threshold.data = None;
        p.threshold.positive = 1;
        set_html(
            &p.doc,
            "threshold-result",
            "<p class=\"hint\">Collecting the run's predictions…</p>",
        );
        Request::Predictions {
            v: PROTOCOL_VERSION,
            id,
            run,
        }
    };
    send(page, request, None);
}

/// The worker's answer.
pub fn arrived(page: &Shared, id: u32, data: RunPredictions) {
    let mut p = page.borrow_mut();
    if p.threshold.asked != Some(id) {
        return;
    }
    p.threshold.asked = None;
    // The study's class called positive, when this is the study's run.
    if let Some((run, label)) = p.threshold.wanted.clone() {
        if p.threshold.chosen == Some(run) {
            if let Some(code) = data.classes.iter().position(|c| *c == label) {
                p.threshold.positive = code as u32;
            }
            p.threshold.wanted = None;
        }
    }
    p.threshold.data = Some(data);
    let runs = eligible(&p);
    let chosen = p.threshold.chosen;
    render_choice(&p, &runs, chosen);
    render_figures(&p);
}

/// The worker refused (the run is not two-class, or no longer held).
pub fn refused(page: &Shared, message: &str) {
    let mut p = page.borrow_mut();
    p.threshold.asked = None;
    set_html(
        &p.doc,
        "threshold-result",
        &format!("<p class=\"message error\">{}.</p>", esc(message)),
    );
}

fn interval(x: &Option<Proportion>) -> String {
    match x {
        Some(x) => format!(
            "<td class=\"num\">{:.3}</td><td class=\"num\">{:.3} to {:.3}</td><td class=\"num\">{} of {}</td>",
            x.value, x.low, x.high, x.successes, x.total
        ),
        None => "<td class=\"num\">—</td><td>no records to count</td><td></td>".into(),
    }
}

/// The figures at the current threshold.
fn render_figures(p: &Page) {
    let t = &p.threshold;
    let Some(d) = &t.data else { return };
    let doc = &p.doc;
    for id in ["threshold-range", "threshold-number"] {
        if let Ok(input) = by_id(doc, id).dyn_into::<HtmlInputElement>() {
            if input.value().parse::<f64>().ok() != Some(t.value) {
                input.set_value(&format!("{}", t.value));
            }
        }
    }
    let flip = t.positive == 0;
    let outcomes: Vec<u32> = d
        .outcomes
        .iter()
        .map(|&y| if flip { 1 - y.min(1) } else { y })
        .collect();
    let probabilities: Vec<f64> = d
        .probabilities
        .iter()
        .map(|&q| if flip { 1.0 - q } else { q })
        .collect();
    let pos = esc(&d.classes[t.positive as usize]);
    let neg = esc(&d.classes[1 - t.positive as usize]);
    let left_out = if d.left_out > 0 {
        format!(
            "; {} left out because no model that missed them judged them",
            d.left_out
        )
    } else {
        String::new()
    };
    let source = match &d.judged_by {
        Some(scheme) => format!(
            "<p class=\"source\"><strong>Out-of-sample predictions ({})</strong>: each record is judged only by a model that did not learn from it, so these figures are out-of-sample. {} records{left_out}.</p>",
            esc(scheme),
            outcomes.len(),
        ),
        None => format!(
            "<p class=\"source apparent-note\"><strong>Training predictions (apparent)</strong>: the {} records this model learnt from. These figures flatter the model; they are not a validation. Judge the run in step 3 for figures from records it did not learn from.</p>",
            outcomes.len()
        ),
    };
    let figures = match at_threshold(&outcomes, &probabilities, t.value) {
        Ok(f) => f,
        Err(e) => {
            set_html(
                doc,
                "threshold-result",
                &format!(
                    "{source}<p class=\"message error\">{}.</p>",
                    esc(&e.to_string())
                ),
            );
            return;
        }
    };
    let c = &figures.confusion;
    let n = outcomes.len() as f64;
    let prevalence = (c.true_positives + c.false_negatives) / n;
    let nb = net_benefit(c.true_positives, c.false_positives, n, t.value);
    let nb_all = net_benefit_treat_all(prevalence, t.value);
    let mut html = source;
    html += &format!(
        "<div class=\"threshold-tables\" data-threshold=\"{}\" data-tp=\"{}\" data-fp=\"{}\" data-tn=\"{}\" data-fn=\"{}\" data-net-benefit=\"{nb}\" data-out-of-sample=\"{}\">",
        t.value, c.true_positives, c.false_positives, c.true_negatives, c.false_negatives, d.judged_by.is_some()
    );
    html += &format!(
        "<table class=\"confusion\"><caption>Records at threshold {:.2}</caption><thead><tr><td></td><th scope=\"col\">called {pos}</th><th scope=\"col\">called {neg}</th></tr></thead><tbody><tr><th scope=\"row\">truly {pos}</th><td class=\"num hit\">{}</td><td class=\"num miss\">{}</td></tr><tr><th scope=\"row\">truly {neg}</th><td class=\"num miss\">{}</td><td class=\"num hit\">{}</td></tr></tbody></table>",
        t.value, c.true_positives, c.false_negatives, c.false_positives, c.true_negatives
    );
    html += "<table class=\"figures\"><caption>What the threshold gives</caption><thead><tr><th scope=\"col\">Figure</th><th scope=\"col\">Value</th><th scope=\"col\">95% interval (Wilson)</th><th scope=\"col\">Counted</th></tr></thead><tbody>";
    for (name, what, x) in [
        (
            "Sensitivity",
            format!("share of {pos} records called {pos}"),
            &figures.sensitivity,
        ),
        (
            "Specificity",
            format!("share of {neg} records called {neg}"),
            &figures.specificity,
        ),
        (
            "Positive predictive value",
            format!("share of records called {pos} that are {pos}"),
            &figures.ppv,
        ),
        (
            "Negative predictive value",
            format!("share of records called {neg} that are {neg}"),
            &figures.npv,
        ),
    ] {
        html += &format!(
            "<tr><th scope=\"row\">{name}<br><span class=\"unit\">{what}</span></th>{}</tr>",
            interval(x)
        );
    }
    html += &format!(
        "<tr><th scope=\"row\">Accuracy</th>{}</tr></tbody></table>",
        interval(&Some(figures.accuracy))
    );
    html += &format!(
        "<p class=\"net-benefit\"><strong>Net benefit</strong> at this threshold: <span class=\"num\">{nb:.4}</span> (acting on everyone: {nb_all:.4}; on no one: 0). It counts true positives per record, less false positives weighted by the odds of the threshold, {:.2}:{:.2} (Vickers &amp; Elkin 2006).</p>",
        t.value,
        1.0 - t.value
    );
    html += "<p class=\"hint\">Research use only: a threshold chosen here needs external validation before it guides anyone's care, and it is no substitute for clinical judgement.</p></div>";
    set_html(doc, "threshold-result", &html);
}

fn on_change(page: &Shared, event: Event) {
    let Some(target) = event
        .target()
        .and_then(|t| t.dyn_into::<web_sys::Element>().ok())
    else {
        return;
    };
    let typed = event.type_() == "input";
    match target.id().as_str() {
        "threshold-run" if !typed => {
            let value = target.unchecked_ref::<HtmlSelectElement>().value();
            if let Ok(i) = value.parse::<usize>() {
                choose(page, i);
            }
        }
        "threshold-positive" if !typed => {
            let value = target.unchecked_ref::<HtmlSelectElement>().value();
            let mut p = page.borrow_mut();
            p.threshold.positive = if value == "0" { 0 } else { 1 };
            render_figures(&p);
            drop(p);
            super::study::autosave(page);
        }
        id @ ("threshold-range" | "threshold-number") if typed || id == "threshold-number" => {
            let input = target.unchecked_ref::<HtmlInputElement>();
            let mut p = page.borrow_mut();
            let error = by_id(&p.doc, "threshold-error");
            match input.value().trim().parse::<f64>() {
                Ok(x) if x > 0.0 && x < 1.0 => {
                    show(&p.doc, "threshold-error", false);
                    let _ = input.remove_attribute("aria-invalid");
                    p.threshold.value = x;
                    // Keep the other control in step.
                    let other = if id == "threshold-range" {
                        "threshold-number"
                    } else {
                        "threshold-range"
                    };
                    if let Ok(o) = by_id(&p.doc, other).dyn_into::<HtmlInputElement>() {
                        o.set_value(&format!("{x}"));
                    }
                    render_figures(&p);
                    drop(p);
                    super::study::autosave(page);
                }
                _ => {
                    error.set_text_content(Some(
                        "The threshold is a probability above 0 and below 1, such as 0.5 or 0.2.",
                    ));
                    show(&p.doc, "threshold-error", true);
                    let _ = input.set_attribute("aria-invalid", "true");
                }
            }
        }
        _ => {}
    }
}

pub fn listen(page: &Shared) {
    let doc = page.borrow().doc.clone();
    let step = by_id(&doc, "step-threshold");
    for kind in ["change", "input"] {
        let pg = page.clone();
        on(&step, kind, move |e: Event| on_change(&pg, e));
    }
}
