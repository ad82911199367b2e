//! The model-runs step of the page: the method (a tree method, or the baseline as a run of
//! its own) and its settings form (checked as typed by the core's own settings rules, so the
//! page refuses what the command line refuses, in the same words), the Run button, the
//! progress bar with elapsed and remaining time and Cancel, the table of runs kept so far,
//! the error chart by number of trees or rounds (drawn by spinney-charts on a canvas, with
//! its numbers as a table beside it), and removing a kept run (`remove`, from step 4).
//!
//! All fitting happens in the worker; this module only sends the request and shows replies.
//! Cancel restarts the worker (see `cancel` in page.rs); the runs table is the page's own and
//! survives it.

use std::collections::{HashMap, VecDeque};

use spinney_charts::{draw_error_curves, Curve, ErrorChart, COLOURS};
use spinney_core::model::Method as FitMethod;
use spinney_core::settings::FitSettings;
use spinney_core::study::RunFigures;
use spinney_core::validate::check_penalty;
use spinney_web::protocol::{FitDesign, Judging, Request, RunResult, PROTOCOL_VERSION};
use wasm_bindgen::JsCast;
use web_sys::{Document, Element, Event, HtmlCanvasElement, HtmlInputElement};

use super::measured::draw_on;
use super::{by_id, cancel, design_of, esc, on, send, set_html, show, Page, Shared};

/// What the form grows: one of the core's tree methods, or the baseline (a penalised
/// logistic or ridge regression, `spinney evaluate --baseline`'s, grown as a run of its own).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Grown {
    Trees(FitMethod),
    Baseline,
}

impl Grown {
    /// The word the worker and the study file use.
    pub fn word(self) -> &'static str {
        match self {
            Grown::Trees(m) => m.word(),
            Grown::Baseline => "baseline",
        }
    }

    pub fn from_word(word: &str) -> Option<Grown> {
        match word {
            "baseline" => Some(Grown::Baseline),
            w => FitMethod::from_word(w).map(Grown::Trees),
        }
    }

    fn bagged(self) -> bool {
        matches!(
            self,
            Grown::Trees(FitMethod::Forest) | Grown::Trees(FitMethod::Bagging)
        )
    }
}

/// A fit to send: what the form (or a study being re-run) asks for.
#[derive(Clone)]
pub struct FitAsk {
    pub method: Grown,
    pub design: FitDesign,
    /// The settings given, by their `--set` names; the rest are the method's defaults.
    pub settings: Vec<(String, String)>,
    pub summary: String,
    /// How to judge it out of sample (`None`: not judged).
    pub judging: Option<Judging>,
    /// A study's saved figures this fit should give again.
    pub expected: Option<RunFigures>,
}

/// Judging by `scheme` (the command line's words) at threshold 0.5 with the splits' seed 1,
/// the baseline beside it when `baseline`.
pub fn judging(scheme: String, baseline: bool) -> Judging {
    Judging {
        scheme,
        threshold: 0.5,
        baseline,
        seed: 1,
    }
}

/// The fit the worker is working on.
pub struct InFlight {
    pub id: u32,
    /// `performance.now()` when it was sent, in ms.
    started: f64,
    ask: FitAsk,
}

/// One finished run as the page shows it.
pub struct RunView {
    pub result: RunResult,
    pub ask: FitAsk,
    /// The data or the roles changed after this run.
    pub stale: bool,
    /// The worker still holds the fitted model (as run `result.run`); a cancel restarts the
    /// worker, which forgets its models, while the page keeps their figures.
    pub held: bool,
    /// Re-run from a study: whether every figure came out the same to the bit.
    pub same_as_study: Option<bool>,
}

/// The step's state.
#[derive(Default)]
pub struct Fits {
    pub in_flight: Option<InFlight>,
    pub runs: Vec<RunView>,
    /// Fits waiting for the one in flight (a study's runs being grown again).
    pub queue: VecDeque<FitAsk>,
    /// The method chosen in the form (a random forest until the user picks another).
    method: Option<Grown>,
    /// What the user typed, by (method, setting); untouched settings show their defaults.
    typed: HashMap<(&'static str, &'static str), String>,
    /// The run whose curves the chart shows.
    pub charted: Option<usize>,
    /// Workers to grow a forest's trees on (`None`: the default for this machine).
    workers: Option<usize>,
    /// How to judge the next run, in the command line's words (`None`: the method's
    /// default: out-of-bag rows for bagging and forests, 5 folds otherwise; "none": not).
    scheme: Option<String>,
    /// Judge the baseline on the same splits (on unless the user unticks it).
    no_baseline: bool,
    /// Run was pressed while the table was being read again after a cancel: the run starts
    /// as soon as the table is in ([`table_in`]).
    pub after_read: bool,
}

impl Fits {
    /// The data or the roles changed: the runs so far describe the earlier choice.
    pub fn mark_stale(&mut self) {
        for r in &mut self.runs {
            r.stale = true;
        }
    }

    /// The worker was restarted: it holds none of the models any more, and fits waiting
    /// for it are dropped.
    pub fn forget_models(&mut self) {
        for r in &mut self.runs {
            r.held = false;
        }
        self.queue.clear();
    }

    fn method(&self) -> Grown {
        self.method.unwrap_or(Grown::Trees(FitMethod::Forest))
    }

    /// The validation scheme for `method`: the user's choice where it applies, else the
    /// method's default.
    fn scheme(&self, method: Grown) -> String {
        let bagged = method.bagged();
        match self.scheme.as_deref() {
            Some("oob") if !bagged => "folds:5".into(),
            Some(s) => s.into(),
            None if bagged => "oob".into(),
            None => "folds:5".into(),
        }
    }

    /// Workers for bagging and forests: the user's choice, else up to 4 of the machine's
    /// threads.
    fn workers(&self) -> usize {
        self.workers.unwrap_or_else(|| max_workers().min(4))
    }
}

/// The machine's threads as the browser reports them (at most 8 are offered).
fn max_workers() -> usize {
    web_sys::window()
        .map_or(1.0_f64, |w| w.navigator().hardware_concurrency())
        .clamp(1.0, 8.0) as usize
}

/// A setting in the form.
struct Field {
    name: &'static str,
    label: &'static str,
    help: &'static str,
    /// Empty means "no limit".
    optional: bool,
}

const TREES: Field = Field {
    name: "trees",
    label: "Trees",
    help: "How many trees vote together. More trees give a steadier answer and take longer (1 to 100,000).",
    optional: false,
};
const DEPTH: Field = Field {
    name: "depth",
    label: "Depth",
    help: "Most questions on the way from the top of a tree to an answer (1 to 1,000). Empty: no limit.",
    optional: true,
};
const LEAF_SIZE: Field = Field {
    name: "leaf_size",
    label: "Leaf size",
    help: "Fewest records that may end in one answer; larger values give simpler, smoother trees.",
    optional: false,
};
const SEED: Field = Field {
    name: "seed",
    label: "Seed",
    help: "Fixes every random draw: the same seed on the same data gives the same model.",
    optional: false,
};

/// The methods the page offers.
const METHODS: [Grown; 6] = [
    Grown::Trees(FitMethod::Tree),
    Grown::Trees(FitMethod::Bagging),
    Grown::Trees(FitMethod::Forest),
    Grown::Trees(FitMethod::AdaBoost),
    Grown::Trees(FitMethod::Boosting),
    Grown::Baseline,
];

fn fields(method: Grown) -> Vec<Field> {
    let method = match method {
        Grown::Baseline => {
            return vec![Field {
                name: "penalty",
                label: "Penalty",
                help: "How strongly the coefficients are pulled towards zero (an L2 penalty on the standardised predictors), above 0. 1 is usual (the command line's baseline); larger values give a more cautious model, smaller ones follow the records more closely.",
                optional: false,
            }]
        }
        Grown::Trees(m) => m,
    };
    match method {
        FitMethod::Boosting => vec![
            Field {
                name: "rounds",
                label: "Rounds",
                help: "Trees added one after another, each correcting what the sum of the earlier ones still gets wrong (1 to 100,000).",
                optional: false,
            },
            Field {
                name: "learning_rate",
                label: "Learning rate",
                help: "The share of each new tree that is added, above 0 and at most 10; smaller values need more rounds and usually generalise better.",
                optional: false,
            },
            Field {
                name: "leaves",
                label: "Leaves",
                help: "Most answers (end groups) in each round's tree, best splits first (2 or more). Empty: no limit.",
                optional: true,
            },
            DEPTH,
            LEAF_SIZE,
            Field {
                name: "row_fraction",
                label: "Row share",
                help: "Share of the records drawn afresh for each round, above 0 and at most 1; below 1 adds randomness that often helps.",
                optional: false,
            },
            Field {
                name: "l2",
                label: "Leaf shrinkage",
                help: "Pulls each answer towards zero (an L2 penalty), 0 or more; larger values give more cautious trees.",
                optional: false,
            },
            Field {
                name: "monotone",
                label: "Fixed directions",
                help: "Predictors whose effect may only go one way, as COLUMN:up or COLUMN:down separated by commas (age:up: the prediction never falls as age rises, the others held). Number predictors only. Empty: every predictor free.",
                optional: true,
            },
            SEED,
        ],
        FitMethod::Tree => vec![
            DEPTH,
            Field {
                name: "leaves",
                label: "Leaves",
                help: "Most answers (end groups) in the tree, best splits first (2 or more). Empty: no limit.",
                optional: true,
            },
            LEAF_SIZE,
            Field {
                name: "pruning",
                label: "Pruning",
                help: "Cuts back branches that add little; 0 keeps the whole tree, 0.001 to 0.02 trims it.",
                optional: false,
            },
        ],
        FitMethod::Bagging => vec![TREES, DEPTH, LEAF_SIZE, SEED],
        FitMethod::Forest => vec![
            TREES,
            Field {
                name: "predictors_per_split",
                label: "Predictors per split",
                help: "Columns drawn afresh for each split to choose from; fewer make the trees differ more.",
                optional: false,
            },
            DEPTH,
            LEAF_SIZE,
            SEED,
        ],
        FitMethod::AdaBoost => vec![
            Field {
                name: "rounds",
                label: "Rounds",
                help: "Small trees added one after another, each leaning on the records the earlier ones got wrong.",
                optional: false,
            },
            Field {
                name: "learning_rate",
                label: "Learning rate",
                help: "How much each round counts, above 0 and at most 10; below 1 learns more slowly, often more steadily.",
                optional: false,
            },
            Field {
                name: "depth",
                label: "Depth",
                help: "Depth of each round's tree; 1 is a single question (a stump).",
                optional: true,
            },
        ],
    }
}

pub fn method_label(m: Grown) -> &'static str {
    match m {
        Grown::Trees(FitMethod::Tree) => "Single tree",
        Grown::Trees(FitMethod::Bagging) => "Bagging",
        Grown::Trees(FitMethod::Forest) => "Random forest",
        Grown::Trees(FitMethod::AdaBoost) => "AdaBoost",
        Grown::Trees(FitMethod::Boosting) => "Gradient boosting",
        Grown::Baseline => "Baseline",
    }
}

fn method_help(m: Grown) -> &'static str {
    let m = match m {
        Grown::Baseline => return "a penalised logistic regression (ridge regression for a number outcome) on the standardised predictors, gaps filled with the median or most frequent value and flagged: what a simple model achieves, to set the trees against",
        Grown::Trees(m) => m,
    };
    match m {
        FitMethod::Tree => "one set of yes/no questions; easy to read, but sways with the sample",
        FitMethod::Bagging => "many trees, each grown on a resample of the records, averaged",
        FitMethod::Forest => "bagging where every split may look at only a few columns drawn at random; judged on the records each tree did not see (out-of-bag)",
        FitMethod::AdaBoost => "small trees in sequence, each giving more weight to past mistakes (classes only)",
        FitMethod::Boosting => "small trees in sequence, each fitted to what the sum of the earlier ones still gets wrong (gradient boosting)",
    }
}

/// A setting's default as text ("" for no limit).
fn default_text(s: &FitSettings, name: &str) -> String {
    let opt = |v: Option<usize>| v.map_or(String::new(), |v| v.to_string());
    match name {
        "trees" => s.forest.trees.to_string(),
        "rounds" => s.boost.rounds.to_string(),
        "learning_rate" => s.boost.learning_rate.to_string(),
        "depth" => opt(s.grow.max_depth),
        "leaves" => opt(s.grow.max_leaves),
        "leaf_size" => s.grow.min_rows_leaf.to_string(),
        "predictors_per_split" => opt(s.forest.predictors_per_split),
        "seed" => s.forest.seed.to_string(),
        "pruning" => s.pruning.to_string(),
        "row_fraction" => s.boosting.row_fraction.to_string(),
        "l2" => s.boosting.l2.to_string(),
        _ => String::new(),
    }
}

/// The method's defaults for the current design (`None` until an outcome is chosen, or with
/// the reason the method cannot fit it).
fn defaults(p: &Page, method: Grown) -> Option<Result<FitSettings, String>> {
    let (design, regression) = design_of(p)?;
    let Grown::Trees(method) = method else {
        return None;
    };
    Some(FitSettings::defaults(
        method,
        design.predictors.len(),
        regression,
        &design.outcome,
    ))
}

/// The value of each field of the chosen method: typed, or the default.
fn values(p: &Page, method: Grown, defaults: Option<&FitSettings>) -> Vec<(Field, String)> {
    fields(method)
        .into_iter()
        .map(|f| {
            let v = p
                .fits
                .typed
                .get(&(method.word(), f.name))
                .cloned()
                .or_else(|| match method {
                    Grown::Baseline => Some(spinney_core::validate::BASELINE_PENALTY.to_string()),
                    Grown::Trees(_) => defaults.map(|d| default_text(d, f.name)),
                })
                .unwrap_or_default();
            (f, v)
        })
        .collect()
}

/// Checks each value as the worker will (the core's rules); errors by setting.
fn check(p: &Page, method: Grown) -> (Vec<(&'static str, String)>, Option<String>) {
    if method == Grown::Baseline {
        if design_of(p).is_none() {
            return (
                Vec::new(),
                Some("Choose an outcome in step 2 first.".into()),
            );
        }
        let errors = values(p, method, None)
            .into_iter()
            .filter_map(|(f, v)| {
                let e = match v.trim().parse::<f64>() {
                    Ok(x) => check_penalty(x).err()?.to_string(),
                    Err(_) => format!(
                        "penalty: '{}' is not a number; give the penalty's strength, e.g. 1",
                        v.trim()
                    ),
                };
                Some((f.name, e))
            })
            .collect();
        return (errors, None);
    }
    let base = match defaults(p, method) {
        None => {
            return (
                Vec::new(),
                Some("Choose an outcome in step 2 first.".into()),
            )
        }
        Some(Err(e)) => return (Vec::new(), Some(format!("{e}."))),
        Some(Ok(s)) => s,
    };
    let mut errors = Vec::new();
    for (f, v) in values(p, method, Some(&base)) {
        if v.trim().is_empty() {
            if !f.optional {
                errors.push((f.name, format!("{}: give a value", f.name)));
            }
            continue;
        }
        if let Err(e) = base.clone().apply(f.name, &v) {
            errors.push((f.name, e));
        } else if f.name == "monotone" {
            if let Some(e) = directions_problem(p, &v) {
                errors.push((f.name, e));
            }
        }
    }
    (errors, None)
}

/// What is wrong with a fixed-directions value for the current roles: a column that is not
/// a number predictor (the grower keeps directions on number splits only).
fn directions_problem(p: &Page, value: &str) -> Option<String> {
    let report = p.report.as_ref()?;
    let (design, _) = design_of(p)?;
    for part in value.split(',').map(str::trim).filter(|x| !x.is_empty()) {
        let column = part.rsplit_once(':').map_or(part, |(c, _)| c);
        if !design.predictors.iter().any(|x| x == column) {
            return Some(format!("{column} is not among the predictors (step 2)"));
        }
        let numeric = report
            .columns
            .iter()
            .any(|c| c.name == column && c.kind.is_numeric());
        if !numeric {
            return Some(format!(
                "{column} is not a number; a direction needs a number predictor"
            ));
        }
    }
    None
}

/// The (name, value) pairs to send, and their plain summary.
fn chosen(p: &Page, method: Grown) -> (Vec<(String, String)>, String) {
    let base = defaults(p, method).and_then(Result::ok);
    let mut sets = Vec::new();
    let mut summary = Vec::new();
    for (f, v) in values(p, method, base.as_ref()) {
        let v = v.trim().to_string();
        if v.is_empty() && f.name == "monotone" {
            continue;
        }
        if v.is_empty() {
            summary.push(format!("{} no limit", f.label.to_lowercase()));
        } else {
            summary.push(format!("{} {v}", f.label.to_lowercase()));
            sets.push((f.name.to_string(), v));
        }
    }
    (sets, summary.join(" · "))
}

// ---------------------------------------------------------------------------- rendering

/// Draws the whole step (form, runs, chart), or hides it until a table is loaded.
pub fn render(p: &Page) {
    show(&p.doc, "step-runs", p.report.is_some());
    if p.report.is_none() {
        return;
    }
    render_form(p);
    render_runs(p);
    render_chart(p);
    super::compare::render(p);
}

fn render_form(p: &Page) {
    let method = p.fits.method();
    let mut html = String::from("<fieldset class=\"methods\"><legend>Method</legend>");
    for m in METHODS {
        html += &format!(
            "<label class=\"method\"><input type=\"radio\" name=\"method\" value=\"{}\"{}> <strong>{}</strong> <span class=\"help\">{}</span></label>",
            m.word(),
            if m == method { " checked" } else { "" },
            method_label(m),
            method_help(m)
        );
    }
    html += "</fieldset><div class=\"fields\">";
    let base = defaults(p, method).and_then(Result::ok);
    for (f, v) in values(p, method, base.as_ref()) {
        html += &format!(
            "<label class=\"field\"><span class=\"name\">{}</span><input id=\"set-{n}\" data-setting=\"{n}\" type=\"text\"{} value=\"{}\"{} aria-describedby=\"help-{n} err-{n}\"><span class=\"help\" id=\"help-{n}\">{}</span><span class=\"field-error\" id=\"err-{n}\" hidden></span></label>",
            f.label,
            if f.name == "monotone" {
                " spellcheck=\"false\""
            } else {
                " inputmode=\"decimal\""
            },
            esc(&v),
            match (f.optional, f.name) {
                (true, "monotone") => " placeholder=\"e.g. age:up\"",
                (true, _) => " placeholder=\"no limit\"",
                _ => "",
            },
            f.help,
            n = f.name
        );
    }
    {
        let chosen = p.fits.workers();
        let options: String = (1..=max_workers())
            .map(|n| {
                format!(
                    "<option value=\"{n}\"{}>{n}</option>",
                    if n == chosen { " selected" } else { "" }
                )
            })
            .collect();
        html += &format!(
            "<label class=\"field\"><span class=\"name\">Workers</span><select id=\"workers\" aria-describedby=\"help-workers\">{options}</select><span class=\"help\" id=\"help-workers\">Browser threads working at the same time: they share a forest's trees, and the refits of cross-validation, a holdout or the bootstrap. Each holds its own copy of the table. The results are the same whatever the number.</span></label>"
        );
    }
    html += &judging_controls(p, method);
    html += "</div><p class=\"run-line\"><button type=\"button\" id=\"run-start\" class=\"button primary\">Grow this model</button> <span id=\"run-hint\" class=\"hint\"></span></p>";
    set_html(&p.doc, "run-form", &html);
    check_form(p);
}

/// The validation choice and the baseline tick box.
fn judging_controls(p: &Page, method: Grown) -> String {
    let chosen = p.fits.scheme(method);
    let mut options: Vec<(String, String)> = Vec::new();
    if method.bagged() {
        options.push(("oob".into(), "its out-of-bag records (no refitting)".into()));
    }
    for (value, words) in [
        ("folds:5", "5-fold cross-validation, stratified"),
        ("folds:10", "10-fold cross-validation, stratified"),
        ("folds:10:5", "10 folds, repeated 5 times"),
        ("holdout:0.25", "a quarter of the records held out"),
        ("bootstrap:100", "bootstrap optimism correction, 100 refits"),
    ] {
        options.push((value.into(), words.into()));
    }
    if let Some((design, _)) = design_of(p) {
        if let Some(g) = design.group {
            options.push((
                format!("groups:5:{g}"),
                format!("5 folds keeping each {g} together"),
            ));
        }
    }
    options.push(("none".into(), "not judged (training figures only)".into()));
    let list: String = options
        .iter()
        .map(|(v, w)| {
            format!(
                "<option value=\"{}\"{}>{}</option>",
                esc(v),
                if *v == chosen { " selected" } else { "" },
                esc(w)
            )
        })
        .collect();
    let scheme = format!(
        "<label class=\"field\"><span class=\"name\">Judge it on</span><select id=\"judging\" aria-describedby=\"help-judging\">{list}</select><span class=\"help\" id=\"help-judging\">Records the model did not learn from give honest figures; step 4 compares the runs on them. The bootstrap correction understates the optimism of a model that fits its training records closely (a forest, bagging, a fully grown tree): judge those by cross-validation or out-of-bag records; step 4 warns when the figures show it.</span></label>"
    );
    if method == Grown::Baseline {
        return scheme;
    }
    format!(
        "{scheme}<label class=\"field tick\"><input type=\"checkbox\" id=\"baseline\"{}> <span class=\"name\">Judge a baseline beside it</span><span class=\"help\">A penalised logistic (or linear) regression on the same splits, to show what the trees add.</span></label>",
        if p.fits.no_baseline { "" } else { " checked" }
    )
}

/// Shows each field's problem beside it and enables Run only when all is well.
fn check_form(p: &Page) {
    let method = p.fits.method();
    let (errors, blocked) = check(p, method);
    for f in fields(method) {
        let el = by_id(&p.doc, &format!("err-{}", f.name));
        let input = by_id(&p.doc, &format!("set-{}", f.name));
        match errors.iter().find(|(n, _)| *n == f.name) {
            Some((_, e)) => {
                el.set_text_content(Some(e));
                let _ = el.remove_attribute("hidden");
                let _ = input.set_attribute("aria-invalid", "true");
            }
            None => {
                let _ = el.set_attribute("hidden", "");
                let _ = input.remove_attribute("aria-invalid");
            }
        }
    }
    let hint = match (&blocked, errors.is_empty(), &p.fits.in_flight) {
        (Some(why), _, _) => why.clone(),
        (None, false, _) => "Correct the settings marked above first.".into(),
        (None, true, Some(_)) => "A model is being grown; wait for it or cancel it.".into(),
        (None, true, None) => String::new(),
    };
    by_id(&p.doc, "run-hint").set_text_content(Some(&hint));
    let button = by_id(&p.doc, "run-start");
    if hint.is_empty() {
        let _ = button.remove_attribute("disabled");
    } else {
        let _ = button.set_attribute("disabled", "");
    }
}

fn fmt_error(x: f64) -> String {
    if x.is_finite() {
        format!("{x:.4}")
    } else {
        "—".into()
    }
}

pub fn fmt_seconds(s: f64) -> String {
    if s < 0.1 {
        format!("{:.0} ms", s * 1000.0)
    } else if s < 10.0 {
        format!("{s:.1} s")
    } else if s < 120.0 {
        format!("{s:.0} s")
    } else {
        let whole = s.round() as u64;
        format!("{} min {} s", whole / 60, whole % 60)
    }
}

fn render_runs(p: &Page) {
    let runs = &p.fits.runs;
    show(&p.doc, "runs-stale", runs.iter().any(|r| r.stale));
    if runs.is_empty() {
        set_html(&p.doc, "runs", "<p class=\"empty\">No runs yet. Each model you grow is kept here, so you can compare them.</p>");
        return;
    }
    let mut html = String::from("<div class=\"scroll\"><table class=\"runs\"><caption>Runs kept so far</caption><thead><tr><th scope=\"col\">Run</th><th scope=\"col\">Method</th><th scope=\"col\">Settings</th><th scope=\"col\">Rows</th><th scope=\"col\">Out-of-bag error</th><th scope=\"col\">Training error<br><span class=\"apparent\">apparent: the same rows, not a validation</span></th><th scope=\"col\">Fit time</th><th scope=\"col\">Curve</th></tr></thead><tbody>");
    for (i, r) in runs.iter().enumerate() {
        let res = &r.result;
        let oob = match res.oob_error {
            Some(e) => format!(
                "{} <span class=\"unit\">{}</span>",
                fmt_error(e),
                esc(&res.error_name)
            ),
            None => "none (training fit only)".into(),
        };
        let mut extra = String::new();
        if let Some((depth, leaves)) = res.tree_shape {
            extra = format!("<br><span class=\"unit\">depth {depth}, {leaves} leaves</span>");
        }
        if let Some(stop) = &res.stop {
            extra = format!(
                "<br><span class=\"unit\">{} rounds; {}</span>",
                res.members,
                esc(stop)
            );
        }
        let classes = [
            if r.stale { "stale" } else { "" },
            if p.fits.charted == Some(i) {
                "charted"
            } else {
                ""
            },
        ]
        .join(" ");
        html += &format!(
            "<tr class=\"{}\" data-same=\"{}\" data-oob=\"{}\" data-training=\"{}\" data-fit-seconds=\"{}\" data-worker-memory=\"{}\"><th scope=\"row\">{}{}</th><td>{}{extra}</td><td class=\"settings\">{}</td><td class=\"num\">{}</td><td class=\"num\">{oob}</td><td class=\"num\">{} <span class=\"unit\">{}</span></td><td class=\"num\">{}</td><td>{}</td></tr>",
            classes.trim(),
            match r.same_as_study {
                Some(true) => "yes",
                Some(false) => "no",
                None => "",
            },
            res.oob_error.map_or(String::new(), |e| e.to_string()),
            res.training_error,
            res.fit_seconds,
            res.worker_memory_bytes,
            i + 1,
            match (r.stale, r.same_as_study) {
                (true, _) => " <span class=\"flag\" title=\"fitted before the data or roles changed\">earlier data</span>",
                (false, Some(true)) => " <span class=\"same\" title=\"grown again from the study: every figure equal to the saved one\">same as the study</span>",
                (false, Some(false)) => " <span class=\"flag\" title=\"grown again from the study: the figures differ from the saved ones\">differs from the study</span>",
                (false, None) => "",
            },
            method_label(r.ask.method),
            esc(&r.ask.summary),
            res.rows,
            fmt_error(res.training_error),
            esc(&res.error_name),
            fmt_seconds(res.fit_seconds),
            if res.members > 1 || !res.oob_curve.is_empty() {
                format!("<button type=\"button\" class=\"button quiet\" data-run=\"{i}\">show</button>")
            } else {
                "—".into()
            }
        );
    }
    html += "</tbody></table></div>";
    set_html(&p.doc, "runs", &html);
}

/// The curves of run `r`, as the chart draws them.
fn chart_of(r: &RunView) -> ErrorChart {
    let res = &r.result;
    let mut curves = Vec::new();
    if !res.oob_curve.is_empty() {
        curves.push(Curve {
            name: "out-of-bag".into(),
            values: res.oob_curve.clone(),
            colour: COLOURS[0],
            dashed: false,
        });
    }
    if let Some(v) = res.validation.as_ref().filter(|_| res.oob_curve.is_empty()) {
        if !v.error_by_size.is_empty() {
            curves.push(Curve {
                name: format!("out-of-sample ({})", v.scheme),
                values: v.error_by_size.clone(),
                colour: COLOURS[0],
                dashed: false,
            });
        }
    }
    if !res.training_curve.is_empty() {
        curves.push(Curve {
            name: "training (apparent)".into(),
            values: res.training_curve.clone(),
            colour: COLOURS[1],
            dashed: true,
        });
    }
    if !res.round_errors.is_empty() {
        curves.push(Curve {
            name: "the round's own weighted error".into(),
            values: res.round_errors.clone(),
            colour: COLOURS[2],
            dashed: false,
        });
    }
    ErrorChart {
        // The page's own heading names the chart.
        title: String::new(),
        x_label: format!("number of {}", res.member_name),
        y_label: res.error_name.clone(),
        curves,
    }
}

fn render_chart(p: &Page) {
    let run = p
        .fits
        .charted
        .and_then(|i| p.fits.runs.get(i).map(|r| (i, r)));
    let Some((i, run)) = run.filter(|(_, r)| r.result.members > 1) else {
        show(&p.doc, "curve", false);
        return;
    };
    show(&p.doc, "curve", true);
    let chart = chart_of(run);
    by_id(&p.doc, "curve-title").set_text_content(Some(&format!(
        "Run {}: {} by number of {}",
        i + 1,
        run.result.error_name,
        run.result.member_name
    )));
    let canvas: HtmlCanvasElement = match by_id(&p.doc, "curve-canvas").dyn_into() {
        Ok(c) => c,
        Err(_) => return,
    };
    let _ = canvas.set_attribute(
        "aria-label",
        &format!(
            "Chart of {} against the number of {} for run {}; the numbers are in the table below it.",
            run.result.error_name,
            run.result.member_name,
            i + 1
        ),
    );
    draw_on(&canvas, 0.5, &|area, ratio| {
        draw_error_curves(area, &chart, ratio)
    });
    set_html(&p.doc, "curve-numbers", &numbers_table(&chart, &run.result));
}

/// The chart's numbers as a table (its text alternative): every size up to 25, else 25
/// sizes spread evenly, the last always included.
fn numbers_table(chart: &ErrorChart, res: &RunResult) -> String {
    let n = chart
        .curves
        .iter()
        .map(|c| c.values.len())
        .max()
        .unwrap_or(0);
    let steps = 25usize;
    let mut sizes: Vec<usize> = if n <= steps {
        (1..=n).collect()
    } else {
        (0..steps).map(|k| 1 + k * (n - 1) / (steps - 1)).collect()
    };
    sizes.dedup();
    let mut html = format!(
        "<table class=\"curve-numbers\"><thead><tr><th scope=\"col\">{}</th>",
        esc(&res.member_name)
    );
    for c in &chart.curves {
        html += &format!("<th scope=\"col\">{}</th>", esc(&c.name));
    }
    html += "</tr></thead><tbody>";
    for s in sizes {
        html += &format!("<tr><th scope=\"row\">{s}</th>");
        for c in &chart.curves {
            html += &format!(
                "<td class=\"num\">{}</td>",
                c.values.get(s - 1).map_or("—".into(), |v| fmt_error(*v))
            );
        }
        html += "</tr>";
    }
    html + "</tbody></table>"
}

// ---------------------------------------------------------------------------- fitting

pub fn now() -> f64 {
    web_sys::window()
        .and_then(|w| w.performance())
        .map_or(0.0, |p| p.now())
}

fn start(page: &Shared) {
    let ask = {
        let p = page.borrow();
        let method = p.fits.method();
        let (errors, blocked) = check(&p, method);
        if p.fits.in_flight.is_some() || blocked.is_some() || !errors.is_empty() {
            check_form(&p);
            return;
        }
        if p.busy.is_some() {
            // After a cancel the same table is read again, unseen: the click is kept.
            let restoring = p.restoring;
            by_id(&p.doc, "run-hint").set_text_content(Some(match restoring {
                true => "The table is being read again after the cancel; this run starts as soon as it is in.",
                false => "The table is being read; try again in a moment.",
            }));
            drop(p);
            page.borrow_mut().fits.after_read = restoring;
            return;
        }
        let Some((design, _)) = design_of(&p) else {
            return;
        };
        let (settings, summary) = chosen(&p, method);
        let scheme = p.fits.scheme(method);
        FitAsk {
            method,
            design,
            settings,
            summary,
            judging: (scheme != "none")
                .then(|| judging(scheme, !p.fits.no_baseline && method != Grown::Baseline)),
            expected: None,
        }
    };
    start_fit(page, ask);
}

/// The table is in. After a cancel (`restoring`: the same table read again), a run asked
/// for while it was being read starts now.
pub fn table_in(page: &Shared, restoring: bool) {
    let asked = std::mem::take(&mut page.borrow_mut().fits.after_read);
    if asked && restoring {
        start(page);
    }
}

/// Sends one fit to the worker, or queues it behind the one in flight.
pub fn start_fit(page: &Shared, ask: FitAsk) {
    let grow = {
        let mut p = page.borrow_mut();
        if p.fits.in_flight.is_some() {
            p.fits.queue.push_back(ask);
            return;
        }
        p.next_id += 1;
        let id = p.next_id;
        show(&p.doc, "fit-message", false);
        by_id(&p.doc, "fit-what").set_text_content(Some(&format!(
            "Growing a {}{}…",
            method_label(ask.method).to_lowercase(),
            if p.fits.queue.is_empty() {
                String::new()
            } else {
                format!(" ({} more waiting)", p.fits.queue.len())
            }
        )));
        let _ = by_id(&p.doc, "fit-progress").set_attribute("value", "0");
        by_id(&p.doc, "fit-time").set_text_content(Some("starting"));
        show(&p.doc, "fit-status", true);
        p.fits.in_flight = Some(InFlight {
            id,
            started: now(),
            ask: ask.clone(),
        });
        check_form(&p);
        let FitAsk {
            method,
            design,
            settings,
            judging,
            ..
        } = ask;
        let trees = defaults(&p, method)
            .and_then(Result::ok)
            .and_then(|mut d| {
                settings
                    .iter()
                    .try_for_each(|(n, v)| d.apply(n, v))
                    .ok()
                    .map(|_| d.forest.trees)
            })
            .unwrap_or(0);
        let workers = p.fits.workers();
        Grow {
            id,
            design,
            method: method.word().to_string(),
            settings,
            judging,
            trees: if method.bagged() { trees } else { 0 },
            workers,
        }
    };
    // A judging that refits on splits spreads its splits over extra workers first.
    // (A baseline's splits are quick: its own worker fits them.)
    let splits = grow.method != Grown::Baseline.word()
        && grow
            .judging
            .as_ref()
            .is_some_and(|j| j.scheme != "oob" && j.scheme != "none");
    if grow.workers > 1 && splits {
        super::pool::start_folds(page, grow);
    } else {
        self::grow(page, grow);
    }
}

/// A fit ready to go: its request's fields, the trees of a forest or bagging (0 for the
/// other methods) and the workers the user allows.
#[derive(Clone)]
pub struct Grow {
    pub id: u32,
    pub design: FitDesign,
    pub method: String,
    pub settings: Vec<(String, String)>,
    pub judging: Option<Judging>,
    pub trees: usize,
    pub workers: usize,
}

/// Grows the model of `g`: a forest's trees over extra workers, anything else in the main
/// worker.
pub fn grow(page: &Shared, g: Grow) {
    if g.trees > 1 && g.workers > 1 {
        super::pool::start(
            page, g.id, g.design, g.method, g.settings, g.judging, g.trees, g.workers,
        );
    } else {
        send(
            page,
            Request::Fit {
                v: PROTOCOL_VERSION,
                id: g.id,
                design: g.design,
                method: g.method,
                settings: g.settings,
                judging: g.judging,
            },
            None,
        );
    }
}

/// A finished run's figures as a study keeps them.
pub fn figures_of(res: &RunResult) -> RunFigures {
    RunFigures {
        error_name: res.error_name.clone(),
        rows: res.rows as u64,
        predictors: res.predictors as u64,
        members: res.members as u64,
        training_error: res.training_error,
        out_of_bag_error: res.oob_error,
        fit_seconds: res.fit_seconds,
    }
}

/// Progress of the fit in flight: the bar, members done, elapsed and remaining time.
pub fn progress(p: &Page, done: u64, total: u64) {
    let Some(f) = &p.fits.in_flight else { return };
    let share = done as f64 / total.max(1) as f64;
    let _ = by_id(&p.doc, "fit-progress").set_attribute("value", &format!("{share:.3}"));
    let elapsed = (now() - f.started) / 1000.0;
    let unit = match f.ask.method {
        Grown::Trees(FitMethod::AdaBoost | FitMethod::Boosting) => "rounds",
        Grown::Trees(_) => "trees",
        Grown::Baseline => "fits",
    };
    let left = if done > 0 {
        format!(
            ", about {} left",
            fmt_seconds(elapsed / done as f64 * (total - done) as f64)
        )
    } else {
        String::new()
    };
    by_id(&p.doc, "fit-time").set_text_content(Some(&format!(
        "{done} of {total} {unit} · {} so far{left}",
        fmt_seconds(elapsed)
    )));
}

pub fn fit_done(doc: &Document) {
    show(doc, "fit-status", false);
}

/// A fit finished: keep it as a run and chart it, then send the next waiting fit.
pub fn fitted(page: &Shared, id: u32, mut result: RunResult) {
    let next = {
        let mut p = page.borrow_mut();
        let Some(f) = p.fits.in_flight.take_if(|f| f.id == id) else {
            return;
        };
        // Grown by several workers: the time from the shares sent to the last one back, plus
        // the main worker's tally.
        if let Some(shares) = p.pool.seconds(id) {
            result.fit_seconds += shares;
        }
        fit_done(&p.doc);
        let same_as_study = f
            .ask
            .expected
            .as_ref()
            .map(|e| e.same_as(&figures_of(&result)));
        p.fits.runs.push(RunView {
            result,
            ask: f.ask,
            stale: false,
            held: true,
            same_as_study,
        });
        p.fits.charted = Some(p.fits.runs.len() - 1);
        let _ =
            by_id(&p.doc, "step-runs").set_attribute("data-runs", &p.fits.runs.len().to_string());
        render_runs(&p);
        render_chart(&p);
        check_form(&p);
        super::compare::render(&p);
        p.fits.queue.pop_front()
    };
    match next {
        Some(ask) => start_fit(page, ask),
        None => super::study::runs_settled(page),
    }
}

/// Every run with its plain label (method and settings) and result, in order.
pub fn results(fits: &Fits) -> Vec<(usize, String, &RunResult)> {
    fits.runs
        .iter()
        .enumerate()
        .map(|(i, r)| {
            (
                i,
                format!("{}, {}", method_label(r.ask.method), r.ask.summary),
                &r.result,
            )
        })
        .collect()
}

/// Where a run at index `at` of the runs table stands after run `gone` was removed: one
/// place up when it came after it, `None` when it was that run.
pub fn shifted(at: Option<usize>, gone: usize) -> Option<usize> {
    match at {
        Some(i) if i == gone => None,
        Some(i) if i > gone => Some(i - 1),
        other => other,
    }
}

/// Removes run `i` (the comparison step's Remove button): the worker drops its model and
/// judged predictions, every step that shows runs redraws without it, and the notebook is
/// saved again. The other runs keep their models (the worker numbers runs for good); their
/// numbers in the tables close up.
pub fn remove(page: &Shared, i: usize) {
    let forget = {
        let mut p = page.borrow_mut();
        if i >= p.fits.runs.len() {
            return;
        }
        let gone = p.fits.runs.remove(i);
        let last = p.fits.runs.len().checked_sub(1);
        p.fits.charted = shifted(p.fits.charted, i).or(last);
        p.threshold.run_removed(i);
        p.insight.run_removed(i);
        if p.scoring.run_removed(i) {
            set_html(&p.doc, "score-result", "");
        }
        let _ =
            by_id(&p.doc, "step-runs").set_attribute("data-runs", &p.fits.runs.len().to_string());
        render_runs(&p);
        render_chart(&p);
        super::compare::render(&p);
        let text = format!(
            "Run {} ({}) removed; the other runs are unchanged.",
            i + 1,
            method_label(gone.ask.method).to_lowercase()
        );
        let said = by_id(&p.doc, "compare-message");
        said.set_text_content(Some(&text));
        show(&p.doc, "compare-message", true);
        gone.held.then_some(gone.result.run)
    };
    if let Some(run) = forget {
        let id = {
            let mut p = page.borrow_mut();
            p.next_id += 1;
            p.next_id
        };
        send(
            page,
            Request::Forget {
                v: PROTOCOL_VERSION,
                id,
                run,
            },
            None,
        );
    }
    super::runs_changed(page);
    super::study::autosave(page);
}

/// The fit failed: its message in the step, the runs as they were.
pub fn failed(page: &Shared, message: &str) {
    let mut p = page.borrow_mut();
    p.fits.in_flight = None;
    p.fits.queue.clear();
    fit_done(&p.doc);
    note(
        &p.doc,
        &format!("{message}. The runs kept so far are unchanged."),
        true,
    );
    check_form(&p);
}

/// A message in the step itself.
fn note(doc: &Document, text: &str, is_error: bool) {
    let el = by_id(doc, "fit-message");
    el.set_text_content(Some(text));
    el.set_class_name(if is_error { "message error" } else { "message" });
    show(doc, "fit-message", true);
}

// ---------------------------------------------------------------------------- events

fn on_form(page: &Shared, event: Event) {
    let Some(target) = event.target().and_then(|t| t.dyn_into::<Element>().ok()) else {
        return;
    };
    match event.type_().as_str() {
        "change" if target.get_attribute("name").as_deref() == Some("method") => {
            let value = target.unchecked_ref::<HtmlInputElement>().value();
            let mut p = page.borrow_mut();
            p.fits.method = Grown::from_word(&value).filter(|m| METHODS.contains(m));
            render_form(&p);
        }
        "input" => {
            let Some(name) = target.get_attribute("data-setting") else {
                return;
            };
            let mut p = page.borrow_mut();
            let method = p.fits.method();
            let Some(f) = fields(method).into_iter().find(|f| f.name == name) else {
                return;
            };
            let value = target.unchecked_ref::<HtmlInputElement>().value();
            p.fits.typed.insert((method.word(), f.name), value);
            check_form(&p);
        }
        "change" if target.id() == "judging" => {
            let value = target.unchecked_ref::<web_sys::HtmlSelectElement>().value();
            page.borrow_mut().fits.scheme = Some(value);
        }
        "change" if target.id() == "baseline" => {
            let ticked = target.unchecked_ref::<HtmlInputElement>().checked();
            page.borrow_mut().fits.no_baseline = !ticked;
        }
        "change" if target.id() == "workers" => {
            let value = target.unchecked_ref::<web_sys::HtmlSelectElement>().value();
            page.borrow_mut().fits.workers = value.parse().ok();
        }
        "click" if target.id() == "run-start" => start(page),
        _ => {}
    }
}

fn on_runs(page: &Shared, event: Event) {
    let Some(i) = event
        .target()
        .and_then(|t| t.dyn_into::<Element>().ok())
        .and_then(|t| t.get_attribute("data-run"))
        .and_then(|r| r.parse::<usize>().ok())
    else {
        return;
    };
    let mut p = page.borrow_mut();
    p.fits.charted = Some(i);
    render_runs(&p);
    render_chart(&p);
}

/// One listener per container of the step.
pub fn listen(page: &Shared) {
    let doc = page.borrow().doc.clone();
    let form = by_id(&doc, "run-form");
    for kind in ["change", "input", "click"] {
        let pg = page.clone();
        on(&form, kind, move |e: Event| on_form(&pg, e));
    }
    let pg = page.clone();
    on(&by_id(&doc, "runs"), "click", move |e: Event| {
        on_runs(&pg, e)
    });
    let pg = page.clone();
    on(&by_id(&doc, "cancel-fit"), "click", move |_: Event| {
        cancel(&pg, "");
        let p = pg.borrow();
        note(
            &p.doc,
            "Cancelled. The runs kept so far are unchanged; the table is read again in the background.",
            false,
        );
    });
}

/// The plain summary of a run's settings, in the form's words (for runs from a study).
pub fn summary_of(method: Grown, settings: &[(String, String)]) -> String {
    let fields = fields(method);
    let parts: Vec<String> = settings
        .iter()
        .map(|(n, v)| {
            let label = fields
                .iter()
                .find(|f| f.name == n)
                .map_or_else(|| n.replace('_', " "), |f| f.label.to_lowercase());
            format!("{label} {v}")
        })
        .collect();
    if parts.is_empty() {
        "the method's defaults".into()
    } else {
        parts.join(" · ")
    }
}

/// A labelled choice among the runs numbered `runs` (indices in the runs table), for the
/// steps that use one run.
pub fn run_select(
    p: &Page,
    id: &str,
    label: &str,
    runs: &[usize],
    chosen: Option<usize>,
) -> String {
    let mut html = format!("<label class=\"field-inline\">{label} <select id=\"{id}\">");
    for &i in runs {
        let Some(r) = p.fits.runs.get(i) else {
            continue;
        };
        html += &format!(
            "<option value=\"{i}\"{}>Run {}: {} of {} ({})</option>",
            if Some(i) == chosen { " selected" } else { "" },
            i + 1,
            method_label(r.ask.method),
            esc(&r.result.outcome),
            esc(&r.ask.summary)
        );
    }
    html + "</select></label>"
}
