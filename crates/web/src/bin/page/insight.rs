//! Step 5, insight into one chosen run (the worker computes, see worker/explain.rs): which
//! predictors it leans on (out-of-bag permutation importance for bagging and forests,
//! permutation on held-out records for other runs judged by holdout or folds, permutation
//! on the training rows, marked apparent, impurity importance with its caution), how its
//! prediction moves with one chosen predictor (partial dependence, ICE curves and the data's
//! counts), why one chosen record scored as it did (TreeSHAP contributions from the base
//! value to the prediction), and a picture of its first tree (a big one summarised). Each
//! chart has its numbers as a table beside it, its text alternative.
//!
//! Nothing is computed until the user asks to look inside a run (so a fit after a fit does
//! not wait behind it). Then the parts come separately: importance, the chosen record and the
//! tree, then the dependence on the most important predictor; afterwards only the part the
//! user changes. Replies for a run no longer chosen are dropped.

use spinney_charts::{
    contributions_table, dependence_table, draw_contributions, draw_dependence, draw_importance,
    draw_tree, importance_table, tree_table, Contribution, ContributionChart, DependenceAxis,
    DependenceChart, Importance, ImportanceChart, TreeChart, TreeNode, PALETTE,
};
use spinney_web::protocol::{self, Request, PROTOCOL_VERSION};
use wasm_bindgen::JsCast;
use web_sys::{Event, HtmlInputElement, HtmlSelectElement};

use super::compare::{draw_by_id, table_html};
use super::{by_id, esc, on, send, set_html, show, target_element, Page, Shared};

/// Records of the table offered to click.
const OFFERED: usize = 8;
/// Trees with more nodes than this are summarised in words (the most used predictors).
const READABLE_NODES: usize = 31;
/// Trees with more nodes than this get no table of every node (it would be too long to use).
const LISTED_NODES: usize = 255;

#[derive(Default)]
pub struct Insight {
    /// Requests in flight.
    pub asked: Vec<u32>,
    /// The chosen run (index in the runs table).
    chosen: Option<usize>,
    predictor: Option<String>,
    /// The chosen record (table row from 0).
    record: usize,
    /// What has arrived for the chosen run, part by part.
    data: Option<protocol::Insight>,
}

impl Insight {
    /// Run `gone` (index) was removed: later indices close up; what was shown for it goes
    /// (at the next refresh), and what the worker computes for it is stopped where it can be.
    pub fn run_removed(&mut self, gone: usize) {
        if self.chosen == Some(gone) {
            for &id in &self.asked {
                super::stop_request(id);
            }
        }
        self.chosen = super::runs::shifted(self.chosen, gone);
    }
}

/// Runs the step can use: held by the worker and grown on the current data.
fn eligible(p: &Page) -> Vec<usize> {
    p.fits
        .runs
        .iter()
        .enumerate()
        .filter(|(_, r)| r.held && !r.stale)
        .map(|(i, _)| i)
        .collect()
}

/// Whether request `id` is one of this step's.
pub fn owns(page: &Shared, id: u32) -> bool {
    page.borrow().insight.asked.contains(&id)
}

/// Redraws the run choice after the runs changed. Nothing is computed until the user asks
/// (the button), so the worker stays free for the next fit; what is shown for a run that is
/// gone (cancelled, or the data changed) is cleared.
pub fn refresh(page: &Shared) {
    let mut p = page.borrow_mut();
    let runs = eligible(&p);
    show(&p.doc, "step-insight", !runs.is_empty());
    if p.insight.asked.is_empty() {
        // Nothing in flight (a cancel restarts the worker and forgets what was asked).
        show(&p.doc, "insight-status", false);
    }
    let keep = p.insight.chosen.filter(|c| runs.contains(c));
    if keep.is_none() {
        let record = p.insight.record;
        p.insight = Insight {
            record,
            ..Insight::default()
        };
        show(&p.doc, "insight-body", false);
        show(&p.doc, "insight-status", false);
    }
    if runs.is_empty() {
        return;
    }
    let mut html = super::runs::run_select(
        &p,
        "insight-run",
        "Run to look into",
        &runs,
        keep.or(runs.last().copied()),
    );
    html += " <button type=\"button\" id=\"insight-go\" class=\"button primary\">Look inside this run</button>";
    set_html(&p.doc, "insight-choice", &html);
}

/// Starts over with run `i`: importance, the first record and the tree.
fn choose(page: &Shared, i: usize) {
    {
        let mut p = page.borrow_mut();
        let record = p.insight.record;
        p.insight = Insight {
            chosen: Some(i),
            record,
            ..Insight::default()
        };
        for id in [
            "importance-numbers",
            "dependence-numbers",
            "contributions-numbers",
            "tree-numbers",
            "insight-dependence-choice",
            "insight-record-facts",
            "insight-tree-facts",
            "insight-importance-facts",
        ] {
            set_html(&p.doc, id, "");
        }
        message(&p.doc, "");
    }
    let record = page.borrow().insight.record;
    ask(page, true, None, Some(record), true);
}

/// Sends one request about the chosen run.
fn ask(
    page: &Shared,
    importance: bool,
    predictor: Option<String>,
    record: Option<usize>,
    tree: bool,
) {
    let request = {
        let mut p = page.borrow_mut();
        let Some(run) = p
            .insight
            .chosen
            .and_then(|i| p.fits.runs.get(i))
            .map(|r| r.result.run)
        else {
            return;
        };
        p.next_id += 1;
        let id = p.next_id;
        p.insight.asked.push(id);
        let what = if importance {
            "Measuring how much each predictor matters…"
        } else if predictor.is_some() {
            "Following the prediction along the predictor…"
        } else {
            "Explaining the record…"
        };
        by_id(&p.doc, "insight-what").set_text_content(Some(what));
        let _ = by_id(&p.doc, "insight-progress").set_attribute("value", "0");
        show(&p.doc, "insight-status", true);
        Request::Explain {
            v: PROTOCOL_VERSION,
            id,
            run,
            importance,
            predictor,
            record,
            tree,
        }
    };
    send(page, request, None);
}

fn message(doc: &web_sys::Document, text: &str) {
    let el = by_id(doc, "insight-message");
    el.set_class_name("message error");
    let _ = el.remove_attribute("data-cancelled");
    el.set_text_content(Some(text));
    show(doc, "insight-message", !text.is_empty());
}

/// Stops what the step asked for. Where the page has shared memory (see `stop_request` in
/// page.rs) the worker stops between two trees and keeps every run; what is shown stays.
/// Otherwise only restarting the worker stops it, as a fit's cancel does: the runs' figures
/// stay, but the worker no longer holds their models.
fn cancel(page: &Shared) {
    let asked = std::mem::take(&mut page.borrow_mut().insight.asked);
    if asked.is_empty() {
        return;
    }
    let in_place = asked.iter().all(|&id| super::stop_request(id));
    if !in_place {
        super::cancel(page, "");
    }
    let p = page.borrow();
    show(&p.doc, "insight-status", false);
    let el = by_id(&p.doc, "insight-message");
    el.set_class_name("message");
    el.set_text_content(Some(if in_place {
        "Cancelled: the computation was stopped. The runs and everything shown here are kept; ask again when you like."
    } else {
        "Cancelled by restarting the worker (this page is not cross-origin isolated, as when opened from a file, so the computation could not be stopped in place). The runs' figures are kept; grow a run again to look inside it."
    }));
    let _ = el.set_attribute(
        "data-cancelled",
        if in_place { "in-place" } else { "restart" },
    );
    show(&p.doc, "insight-message", true);
}

/// Progress of the request in flight.
pub fn progress(p: &Page, stage: &str, done: u64, total: u64) {
    let share = if total == 0 {
        0.0
    } else {
        done as f64 / total as f64
    };
    let _ = by_id(&p.doc, "insight-progress").set_attribute("value", &format!("{share:.3}"));
    by_id(&p.doc, "insight-stage").set_text_content(Some(&format!("{stage}: {done} of {total}")));
}

fn settle(p: &mut Page, id: u32) -> bool {
    let Some(at) = p.insight.asked.iter().position(|&a| a == id) else {
        return false;
    };
    p.insight.asked.remove(at);
    if p.insight.asked.is_empty() {
        show(&p.doc, "insight-status", false);
    }
    true
}

/// The worker's answer: its parts replace the ones shown.
pub fn arrived(page: &Shared, id: u32, result: protocol::Insight) {
    let follow = {
        let mut p = page.borrow_mut();
        if !settle(&mut p, id) {
            return;
        }
        let run = p
            .insight
            .chosen
            .and_then(|i| p.fits.runs.get(i))
            .map(|r| r.result.run);
        if run != Some(result.run) {
            return;
        }
        let data = p.insight.data.get_or_insert_with(|| protocol::Insight {
            importance: None,
            dependence: None,
            contributions: None,
            tree: None,
            coefficients: None,
            notes: Vec::new(),
            ..result.clone()
        });
        data.notes = result.notes.clone();
        let fresh = Fresh {
            importance: result.importance.is_some(),
            dependence: result.dependence.is_some(),
            contributions: result.contributions.is_some(),
            tree: result.tree.is_some(),
            coefficients: result.coefficients.is_some(),
        };
        if fresh.importance {
            data.importance = result.importance;
        }
        if fresh.dependence {
            data.dependence = result.dependence;
        }
        if fresh.contributions {
            data.contributions = result.contributions;
        }
        if fresh.tree {
            data.tree = result.tree;
        }
        if fresh.coefficients {
            data.coefficients = result.coefficients;
        }
        show(&p.doc, "insight-body", true);
        // The tree in a task of its own, so no single task holds the page for long.
        render(
            &p,
            Fresh {
                tree: false,
                ..fresh
            },
        );
        if fresh.tree {
            later(page, |p| {
                render(
                    p,
                    Fresh {
                        importance: false,
                        dependence: false,
                        contributions: false,
                        tree: true,
                        coefficients: false,
                    },
                )
            });
        }
        // After the importance: the dependence on the most important predictor.
        if p.insight.predictor.is_none() {
            let top = p.insight.data.as_ref().and_then(top_predictor);
            p.insight.predictor = top.clone();
            render_predictor_choice(&p);
            top
        } else {
            None
        }
    };
    if let Some(name) = follow {
        ask(page, false, Some(name), None, false);
    }
}

/// Runs `f` on the page in a later task of the browser's event loop.
fn later(page: &Shared, f: impl FnOnce(&Page) + 'static) {
    let weak = std::rc::Rc::downgrade(page);
    let callback = wasm_bindgen::closure::Closure::once_into_js(move || {
        if let Some(page) = weak.upgrade() {
            f(&page.borrow());
        }
    });
    if let Some(w) = web_sys::window() {
        let _ =
            w.set_timeout_with_callback_and_timeout_and_arguments_0(callback.unchecked_ref(), 0);
    }
}

/// The worker refused (its message says why); what is shown stays.
pub fn refused(page: &Shared, id: u32, text: &str) {
    let mut p = page.borrow_mut();
    settle(&mut p, id);
    message(&p.doc, &format!("{text}."));
}

/// The predictor with the largest out-of-bag (or else held-out, or else training-record)
/// permutation importance.
fn top_predictor(d: &protocol::Insight) -> Option<String> {
    let imp = d.importance.as_ref()?;
    let values = match (&imp.out_of_bag, &imp.held_out) {
        (Some(o), _) => &o.mean,
        (None, Some(h)) => &h.mean,
        (None, None) => &imp.mean,
    };
    let best = (0..values.len()).max_by(|&a, &b| values[a].total_cmp(&values[b]))?;
    d.predictors.get(best).cloned()
}

fn render_predictor_choice(p: &Page) {
    let Some(d) = &p.insight.data else { return };
    let mut html = String::from(
        "<label class=\"field-inline\">Predictor to follow <select id=\"insight-predictor\">",
    );
    for name in &d.predictors {
        let sel = if p.insight.predictor.as_deref() == Some(name.as_str()) {
            " selected"
        } else {
            ""
        };
        html += &format!("<option{sel}>{}</option>", esc(name));
    }
    html += "</select></label>";
    set_html(&p.doc, "insight-dependence-choice", &html);
}

/// Which parts a reply brought.
#[derive(Clone, Copy)]
struct Fresh {
    importance: bool,
    dependence: bool,
    contributions: bool,
    tree: bool,
    coefficients: bool,
}

/// Draws the parts a reply brought (each chart is drawn once per answer, so the page's
/// main thread does no more than it must).
fn render(p: &Page, fresh: Fresh) {
    let Some(d) = &p.insight.data else { return };
    let doc = &p.doc;
    let notes: String = d
        .notes
        .iter()
        .map(|n| format!("<li>{}</li>", esc(n)))
        .collect();
    set_html(
        doc,
        "insight-notes",
        &if notes.is_empty() {
            String::new()
        } else {
            format!("<ul class=\"notices\">{notes}</ul>")
        },
    );
    // A baseline run: its coefficients instead of the trees' charts.
    let linear = d.coefficients.is_some();
    for id in [
        "insight-importance",
        "insight-impurity",
        "insight-dependence",
        "insight-tree",
    ] {
        show(doc, id, !linear);
    }
    show(doc, "insight-coefficients", linear);
    match &d.coefficients {
        Some(c) if fresh.coefficients => render_coefficients(p, c),
        _ => {}
    }
    match &d.importance {
        Some(imp) if fresh.importance => render_importance(p, d, imp),
        _ => {}
    }
    match &d.dependence {
        Some(dep) if fresh.dependence => render_dependence(p, dep),
        _ => {}
    }
    match &d.contributions {
        Some(c) if fresh.contributions => {
            render_records(p, d);
            render_contributions(p, c);
        }
        _ => {}
    }
    match &d.tree {
        Some(t) if fresh.tree => render_tree(p, t),
        _ => {}
    }
}

/// A baseline's coefficients as a table, largest first.
fn render_coefficients(p: &Page, c: &protocol::InsightCoefficients) {
    set_html(
        &p.doc,
        "coefficients-facts",
        &format!(
            "<p class=\"facts\" data-penalty=\"{}\">Penalty {}. Each coefficient is in {}. The predictors are on one scale, so the sizes compare; a coefficient describes the model, not a cause.</p>",
            c.penalty,
            c.penalty,
            esc(&c.scale)
        ),
    );
    let mut html = String::from("<table class=\"curve-numbers coefficients\"><caption>Coefficients on the standardised predictors, largest first</caption><thead><tr><th scope=\"col\">model column</th>");
    for o in &c.outputs {
        html += &format!("<th scope=\"col\">{}</th>", esc(o));
    }
    html += "</tr></thead><tbody><tr><th scope=\"row\">intercept</th>";
    for b in &c.intercepts {
        html += &format!("<td class=\"num\" data-value=\"{b:e}\">{b:.4}</td>");
    }
    html += "</tr>";
    for (name, values) in &c.terms {
        html += &format!("<tr><th scope=\"row\">{}</th>", esc(name));
        for v in values {
            html += &format!("<td class=\"num\" data-value=\"{v:e}\">{v:.4}</td>");
        }
        html += "</tr>";
    }
    html += "</tbody></table>";
    set_html(&p.doc, "coefficients-numbers", &html);
}

fn render_importance(p: &Page, d: &protocol::Insight, imp: &protocol::InsightImportance) {
    let doc = &p.doc;
    let bars = |values: &[f64], spread: Option<&[f64]>| -> Vec<Importance> {
        d.predictors
            .iter()
            .enumerate()
            .map(|(j, name)| Importance {
                name: name.clone(),
                value: values[j],
                spread: spread.map(|s| s[j]),
            })
            .collect()
    };
    // Which records each figure comes from, in words and as `data-basis` (for the tests).
    let basis = |kind: &str, words: &str| {
        format!(
            "<span class=\"basis\" data-basis=\"{kind}\">{}</span>",
            esc(words)
        )
    };
    let (chart, facts) = match (&imp.out_of_bag, &imp.held_out) {
        (None, Some(h)) => (
            ImportanceChart {
                title: String::new(),
                value_label: format!("loss of {} when the predictor is shuffled", imp.metric),
                bars: bars(&h.mean, Some(h.spread.as_slice())),
                caption: format!(
                    "{}. Whiskers: ± one standard deviation over {} splits × {} shuffles.",
                    capitalised(&h.words),
                    h.splits,
                    h.repeats
                ),
                colour: PALETTE[0],
            },
            format!(
                "<strong>Shuffling on held-out records</strong> ({}): the run's settings refitted on the training part of each of the {} splits its judging used, then how much the {} ({:.4} on average as the held-out records are) worsens when one predictor's values are shuffled among the records that split's model did not learn from; mean ± standard deviation over splits × {} shuffles (seed {}). The training-record figure (apparent) is in the second table.",
                basis("held-out", &h.words), h.splits, esc(&imp.metric), h.baseline, h.repeats, h.seed
            ),
        ),
        (Some(o), _) => (
            ImportanceChart {
                title: String::new(),
                value_label: format!("rise in each tree's {} on its out-of-bag records", o.error),
                bars: bars(&o.mean, Some(o.standard_error.as_slice())),
                caption: "Whiskers: ± one standard error over the trees.".into(),
                colour: PALETTE[0],
            },
            format!(
                "<strong>Out-of-bag shuffling</strong> (Breiman 2001): for each of the {} trees, its {} on the records it did not learn from, before and after one predictor's values are shuffled among them; the mean rise over the trees, ± its standard error. These records are out-of-sample for each tree.",
                o.trees, esc(&o.error)
            ),
        ),
        (None, None) => (
            ImportanceChart {
                title: String::new(),
                value_label: format!("loss of {} when the predictor is shuffled", imp.metric),
                bars: bars(&imp.mean, Some(imp.spread.as_slice())),
                caption: format!(
                    "On training records (apparent). Whiskers: ± one standard deviation over {} shuffles.",
                    imp.repeats
                ),
                colour: PALETTE[0],
            },
            format!(
                "<strong>Shuffling {}</strong>: how much the {} ({:.4} as the records are) worsens when one predictor's values are shuffled across {}; mean ± standard deviation over {} shuffles (seed {}). <span class=\"apparent-note\">No records were held out from this run ({}); the figure comes from records it learnt from.</span>",
                basis("apparent", "on training records (apparent)"),
                esc(&imp.metric), imp.baseline, esc(&imp.rows_words), imp.repeats, imp.seed,
                esc(imp.held_out_missing.as_deref().unwrap_or("only bagging and forests keep out-of-bag records"))
            ),
        ),
    };
    set_html(doc, "insight-importance-facts", &format!("<p>{facts}</p>"));
    draw_by_id(doc, "importance-canvas", 0.6, &|area, s| {
        draw_importance(area, &chart, s)
    });
    let impurity = ImportanceChart {
        title: String::new(),
        value_label: "share of the trees' total split gain".into(),
        bars: bars(&imp.impurity, None),
        caption: imp.impurity_caution.clone(),
        colour: PALETTE[1],
    };
    draw_by_id(doc, "impurity-canvas", 0.6, &|area, s| {
        draw_importance(area, &impurity, s)
    });
    // Shuffling on the training records too, when the chart shows out-of-bag or held-out
    // figures.
    let mut html = table_html(&importance_table(&chart));
    if imp.out_of_bag.is_some() || imp.held_out.is_some() {
        let training = ImportanceChart {
            title: String::new(),
            value_label: String::new(),
            bars: bars(&imp.mean, Some(imp.spread.as_slice())),
            caption: format!(
                "Loss of {} when shuffled on {} (baseline {:.4}); mean ± standard deviation over {} shuffles, seed {}",
                imp.metric, imp.rows_words, imp.baseline, imp.repeats, imp.seed
            ),
            colour: PALETTE[0],
        };
        html += &table_html(&importance_table(&training));
    }
    set_html(doc, "importance-numbers", &html);
    set_html(
        doc,
        "impurity-numbers",
        &table_html(&importance_table(&impurity)),
    );
}

/// `text` with its first letter in capitals.
fn capitalised(text: &str) -> String {
    let mut c = text.chars();
    c.next()
        .map(|f| f.to_uppercase().chain(c).collect())
        .unwrap_or_default()
}

fn render_dependence(p: &Page, dep: &protocol::InsightDependence) {
    let axis = if dep.numbers {
        DependenceAxis::Numbers {
            grid: dep.values.clone(),
            data: dep.data.clone(),
        }
    } else {
        DependenceAxis::Levels {
            names: dep.labels.clone(),
            counts: dep.counts.clone(),
        }
    };
    let chart = DependenceChart {
        title: String::new(),
        predictor: dep.predictor.clone(),
        value_label: dep.output.clone(),
        axis,
        average: dep.average.clone(),
        ice: dep.ice.clone(),
        colour: PALETTE[0],
    };
    draw_by_id(&p.doc, "dependence-canvas", 0.7, &|area, s| {
        draw_dependence(area, &chart, s)
    });
    let mut t = dependence_table(&chart);
    t.caption = format!(
        "{} On {} records drawn at random (seed {}); thin lines follow {} single records.",
        t.caption,
        dep.sample,
        dep.seed,
        dep.ice.len()
    );
    let mut html = table_html(&t);
    // Every grid value with the records nearest it: where the curve rests on few records.
    html += "<table class=\"curve-numbers\"><caption>Records of the sample nearest each value</caption><thead><tr><th scope=\"col\">value</th><th scope=\"col\">records</th></tr></thead><tbody>";
    for (l, c) in dep.labels.iter().zip(&dep.counts) {
        html += &format!(
            "<tr><th scope=\"row\">{}</th><td class=\"num\">{c}</td></tr>",
            esc(l)
        );
    }
    if dep.missing > 0 {
        html += &format!(
            "<tr><th scope=\"row\">missing</th><td class=\"num\">{}</td></tr>",
            dep.missing
        );
    }
    html += "</tbody></table>";
    set_html(&p.doc, "dependence-numbers", &html);
    let _ = by_id(&p.doc, "insight-dependence").set_attribute("data-predictor", &dep.predictor);
}

fn render_contributions(p: &Page, c: &protocol::InsightContributions) {
    let doc = &p.doc;
    let linear = p
        .insight
        .data
        .as_ref()
        .is_some_and(|d| d.coefficients.is_some());
    let total: f64 = c.base + c.contributions.iter().map(|x| x.amount).sum::<f64>();
    let chart = ContributionChart {
        title: String::new(),
        value_label: c.output.clone(),
        base: c.base,
        prediction: c.sum,
        contributions: c
            .contributions
            .iter()
            .map(|x| Contribution {
                name: format!("{} = {}", x.predictor, x.value),
                value: x.amount,
            })
            .collect(),
        top: 8,
        caption: String::new(),
    };
    draw_by_id(doc, "contributions-canvas", 0.6, &|area, s| {
        draw_contributions(area, &chart, s)
    });
    set_html(
        doc,
        "insight-record-facts",
        &format!(
            "<p class=\"facts\" data-record=\"{}\" data-base=\"{:e}\" data-sum=\"{:e}\" data-total=\"{:e}\" data-predicted=\"{}\">Record {}: the model predicts <strong>{}</strong>. On the scale of {} — {} — the record starts from the base value {:.4} ({}) and its predictors' contributions ({}) take it to {:.4}.</p>",
            c.record + 1,
            c.base,
            c.sum,
            total,
            c.predicted
                .iter()
                .map(|v| format!("{v:e}"))
                .collect::<Vec<_>>()
                .join(" "),
            c.record + 1,
            esc(&c.prediction),
            esc(&c.output),
            esc(&c.scale),
            c.base,
            if linear {
                "the baseline at the training records' mean values"
            } else {
                "the model's average over its training records"
            },
            if linear {
                "coefficient × standardised value"
            } else {
                "TreeSHAP"
            },
            c.sum
        ),
    );
    let mut html = table_html(&contributions_table(&chart));
    html += &format!(
        "<table class=\"curve-numbers contributions-all\"><caption>Every contribution of record {}, unrounded</caption><thead><tr><th scope=\"col\">predictor</th><th scope=\"col\">the record's value</th><th scope=\"col\">contribution</th></tr></thead><tbody>",
        c.record + 1
    );
    for x in &c.contributions {
        html += &format!(
            "<tr><th scope=\"row\">{}</th><td>{}</td><td class=\"num\">{}</td></tr>",
            esc(&x.predictor),
            esc(&x.value),
            x.amount
        );
    }
    html += "</tbody></table>";
    set_html(doc, "contributions-numbers", &html);
    if let Ok(input) = by_id(doc, "insight-row").dyn_into::<HtmlInputElement>() {
        input.set_value(&(c.record + 1).to_string());
    }
}

/// A few of the table's records (the data step's first rows) to click.
fn render_records(p: &Page, d: &protocol::Insight) {
    let doc = &p.doc;
    if let Ok(input) = by_id(doc, "insight-row").dyn_into::<HtmlInputElement>() {
        let _ = input.set_attribute("max", &d.rows.to_string());
    }
    let (Some(report), Some(preview)) = (&p.report, &p.preview) else {
        return;
    };
    let shown: Vec<usize> = d
        .predictors
        .iter()
        .filter_map(|n| report.columns.iter().position(|c| c.name == *n))
        .collect();
    let mut html = String::from(
        "<table class=\"grid records\"><caption>The first records; choose one to explain it</caption><thead><tr><th scope=\"col\">Record</th>",
    );
    for &i in &shown {
        html += &format!("<th scope=\"col\">{}</th>", esc(&report.columns[i].name));
    }
    html += "</tr></thead><tbody>";
    for (r, row) in preview.rows.iter().take(OFFERED).enumerate() {
        let current = if r == p.insight.record {
            " aria-current=\"true\""
        } else {
            ""
        };
        html += &format!(
            "<tr><th scope=\"row\"><button type=\"button\" class=\"button quiet\" data-record=\"{r}\"{current}>Explain record {}</button></th>",
            r + 1
        );
        for &i in &shown {
            match row.get(i).cloned().flatten() {
                Some(v) => html += &format!("<td>{}</td>", esc(&v)),
                None => html += "<td class=\"gap\" title=\"missing\">·</td>",
            }
        }
        html += "</tr>";
    }
    html += "</tbody></table>";
    set_html(doc, "insight-records", &html);
}

fn render_tree(p: &Page, t: &protocol::InsightTree) {
    let chart = TreeChart {
        title: String::new(),
        nodes: t
            .nodes
            .iter()
            .map(|n| TreeNode {
                feature: n.feature.clone(),
                threshold: n.threshold.clone(),
                left: n.left,
                right: n.right,
                value: n.value.clone(),
            })
            .collect(),
    };
    draw_by_id(&p.doc, "tree-canvas", 0.55, &|area, s| {
        draw_tree(area, &chart, s)
    });
    let used: Vec<String> = t
        .most_used
        .iter()
        .map(|(n, c)| format!("{} ({c})", esc(n)))
        .collect();
    let mut facts = format!(
        "<p>This is {}: {} nodes, {} leaves, {} levels deep. A record goes left (“yes”) when it meets a box's rule.",
        esc(&t.which),
        t.nodes.len(),
        t.leaves,
        t.depth
    );
    if t.nodes.len() > READABLE_NODES {
        facts += &format!(
            " Too big to read whole: the picture stops after a few levels, and the predictors it splits on most are {}.",
            used.join(", ")
        );
    }
    facts += "</p>";
    set_html(&p.doc, "insight-tree-facts", &facts);
    let numbers = if t.nodes.len() <= LISTED_NODES {
        table_html(&tree_table(&chart))
    } else {
        format!("<p class=\"hint\">A table of this tree's {} nodes would be too long to use; the summary above lists the predictors it splits on most.</p>", t.nodes.len())
    };
    set_html(&p.doc, "tree-numbers", &numbers);
}

/// The record number typed, checked: a whole number from 1 to the table's rows.
fn typed_record(p: &Page) -> Result<usize, String> {
    // The run's table is the one loaded (the step offers only runs on it), also before any
    // answer came (or after one was cancelled).
    let rows = p
        .insight
        .data
        .as_ref()
        .map(|d| d.rows)
        .or(p.report.as_ref().map(|r| r.rows))
        .unwrap_or(0);
    let input: HtmlInputElement = by_id(&p.doc, "insight-row").unchecked_into();
    let text = input.value();
    match text.trim().parse::<usize>() {
        Ok(n) if n >= 1 && n <= rows => Ok(n - 1),
        _ => Err(format!(
            "Record “{}”: give a whole number from 1 to {rows} (the row of the table, the header not counted).",
            text.trim()
        )),
    }
}

fn explain_record(page: &Shared, record: usize) {
    {
        let mut p = page.borrow_mut();
        p.insight.record = record;
        message(&p.doc, "");
    }
    ask(page, false, None, Some(record), false);
}

pub fn listen(page: &Shared) {
    let doc = page.borrow().doc.clone();
    let step = by_id(&doc, "step-insight");
    let pg = page.clone();
    on(&step, "change", move |e: Event| {
        let Some(target) = target_element(&e) else {
            return;
        };
        match target.id().as_str() {
            "insight-run" => {
                // Chosen only: the button asks (arrow keys in the list would ask at each step).
                let value = target.unchecked_ref::<HtmlSelectElement>().value();
                pg.borrow_mut().insight.chosen = value.parse().ok();
            }
            "insight-predictor" => {
                let name = target.unchecked_ref::<HtmlSelectElement>().value();
                pg.borrow_mut().insight.predictor = Some(name.clone());
                ask(&pg, false, Some(name), None, false);
            }
            _ => {}
        }
    });
    let pg = page.clone();
    on(&step, "click", move |e: Event| {
        let Some(target) = target_element(&e) else {
            return;
        };
        if let Some(r) = target
            .get_attribute("data-record")
            .and_then(|r| r.parse::<usize>().ok())
        {
            return explain_record(&pg, r);
        }
        if target.id() == "insight-cancel" {
            return cancel(&pg);
        }
        if target.id() == "insight-go" {
            let chosen = pg
                .borrow()
                .insight
                .chosen
                .or_else(|| eligible(&pg.borrow()).last().copied());
            if let Some(i) = chosen {
                choose(&pg, i);
            }
            return;
        }
        if target.id() == "insight-row-go" {
            let typed = typed_record(&pg.borrow());
            match typed {
                Ok(r) => explain_record(&pg, r),
                Err(m) => message(&pg.borrow().doc, &m),
            }
        }
    });
    // Enter in the number box explains the record too.
    let pg = page.clone();
    on(
        &by_id(&doc, "insight-row"),
        "keydown",
        move |e: web_sys::KeyboardEvent| {
            if e.key() == "Enter" {
                e.prevent_default();
                let typed = typed_record(&pg.borrow());
                match typed {
                    Ok(r) => explain_record(&pg, r),
                    Err(m) => message(&pg.borrow().doc, &m),
                }
            }
        },
    );
}
