//! The Web Worker: holds the current file's bytes and table and the models fitted on it (the
//! list of runs), and answers the page's requests (see spinney_web::protocol): reading,
//! re-reading and fitting. It posts `Ready` first; messages sent before its wasm loaded
//! would be lost, so the page waits for it.

use std::cell::RefCell;
use std::rc::Rc;

use js_sys::{Object, Reflect, Uint8Array};
use spinney_core::binning::BinnedMatrix;
use spinney_core::data::{self, read_table, Kind, Loaded, ReadOptions};
use spinney_core::design::Design;
use spinney_core::design::{build_design, DesignSpec, Outcome};
use spinney_core::ensemble::forest::{ForestSettings, HeldOut};
use spinney_core::ensemble::tree_bytes::{encode_trees, tally_trees};
use spinney_core::explain::shap::contributions;
use spinney_core::fit::{fit_design, fit_forest_part, FitOptions, Fitted, ForestFitter};
use spinney_core::model::{Ensemble, Method, Model};
use spinney_core::model_file::write_model;
use spinney_core::progress::{Flow, Progress};
use spinney_core::scoring::{partial_note, unseen_note, PredictionRows};
use spinney_core::settings::FitSettings;
use spinney_core::tree::Rows;
use spinney_core::validate::{
    self, judge::Judged, run_in_order, run_split, FoldJob, FoldRun, Plan, Scheme, Validation,
};
use spinney_web::protocol::{
    CalibrationGroup, Figure, FitDesign, Judging, Preview, ReadSettings, Reply, Request,
    RunPredictions, RunResult, RunValidation, ScoreResult, MAX_FILE_BYTES, PREVIEW_ROWS,
    PROTOCOL_VERSION,
};
use wasm_bindgen::prelude::*;
use web_sys::{DedicatedWorkerGlobalScope, MessageEvent};
// The baseline as a run of its own (fit, insight, scoring), beside this file.
#[path = "worker/baseline.rs"]
mod baseline;
// Insight into a kept run (importance, dependence, contributions, a tree), beside this file.
#[path = "worker/explain.rs"]
mod explain;

#[derive(Default)]
struct Held {
    name: String,
    bytes: Vec<u8>,
    loaded: Option<Loaded>,
    /// The splits' fits of a judging done by extra workers, for the fit of this id.
    fold_runs: Option<(u32, Vec<FoldRun>)>,
    /// Every model fitted since the worker started, by run number (for the later steps:
    /// insight, threshold, scoring); `None` once the user removed it (the numbers of the
    /// others stay). A cancel restarts the worker, so the list starts again.
    runs: Vec<Option<Run>>,
}

impl Held {
    /// Kept run `run`, unless it was removed (or never fitted by this worker).
    fn kept(&self, run: u32) -> Option<&Run> {
        self.runs.get(run as usize)?.as_ref()
    }
}

/// Why a run asked for is not there.
const GONE: &str = "the worker no longer holds this run (it was removed, or the worker was restarted after a cancel); grow the run again";

/// One kept run: the columns asked for and the model.
struct Run {
    design: FitDesign,
    kept: Kept,
    /// Its out-of-sample predictions when it was judged: the scheme in words and, per row
    /// of the fitted design, the probability of the second class (NaN where the row has
    /// none). Two-class outcomes only.
    judged: Option<JudgedRows>,
    /// How it was judged (held-out importance refits the same splits).
    judging: Option<Judging>,
}

/// A kept run's model: a tree model (its method and settings inside), or the baseline.
enum Kept {
    Trees(Model),
    Baseline(baseline::BaselineRun),
}

impl Kept {
    /// The fingerprint of the data it was fitted on.
    fn fingerprint(&self) -> Option<&str> {
        match self {
            Kept::Trees(m) => m.training_fingerprint.as_deref(),
            Kept::Baseline(b) => Some(&b.fingerprint),
        }
    }

    fn classes(&self) -> Option<&[String]> {
        match self {
            Kept::Trees(m) => m.classes.as_deref(),
            Kept::Baseline(b) => b.classes.as_deref(),
        }
    }
}

/// A judged run's scheme in words and, per row of its design, its out-of-sample probability
/// of the second class (NaN where the row has none).
type JudgedRows = (String, Vec<f64>);

/// A record's prediction in words for step 5: the most probable class with every class's
/// probability to four decimals, or the number; and the class.
fn prediction_words(classes: Option<&[String]>, p: &[f64]) -> (String, Option<String>) {
    match classes {
        Some(classes) => {
            let best = spinney_core::ensemble::forest::argmax(p);
            let shares: Vec<String> = classes
                .iter()
                .zip(p)
                .map(|(c, p)| format!("probability of '{c}' {p:.4}"))
                .collect();
            (
                format!("'{}' ({})", classes[best], shares.join(", ")),
                Some(classes[best].clone()),
            )
        }
        None => (format!("{:.6}", p[0]), None),
    }
}

fn scope() -> DedicatedWorkerGlobalScope {
    js_sys::global().unchecked_into()
}

fn post(reply: &Reply) {
    post_with_bytes(reply, None);
}

/// Posts `reply` with `bytes` beside it, transferred (not copied) to the page.
fn post_with_bytes(reply: &Reply, bytes: Option<&[u8]>) {
    let msg = match serde_wasm_bindgen::to_value(reply) {
        Ok(m) => m,
        Err(e) => JsValue::from_str(&format!("internal error: {e}")),
    };
    let envelope = Object::new();
    let _ = Reflect::set(&envelope, &"msg".into(), &msg);
    let transfer = js_sys::Array::new();
    if let Some(b) = bytes {
        let array = Uint8Array::from(b);
        let _ = Reflect::set(&envelope, &"bytes".into(), &array);
        transfer.push(&array.buffer());
    }
    let _ = scope().post_message_with_transfer(&envelope, &transfer);
}

/// Reports progress to the page, at most about ten times a second (and always the last
/// step), so thousands of small trees do not flood the page with messages.
struct Reporter {
    id: u32,
    last: f64,
}

impl Reporter {
    fn new(id: u32) -> Self {
        Reporter { id, last: 0.0 }
    }
}

thread_local! {
    /// The page's stop list (see [`stopped`]), once it sent one.
    static STOP: std::cell::RefCell<Option<js_sys::Int32Array>> = const { std::cell::RefCell::new(None) };
}

/// Whether the page asked to stop request `id`: its number is in the shared stop list the
/// page sends with its messages (a SharedArrayBuffer, read while this worker computes; only
/// where the page is cross-origin isolated). The page writes the ids of the insight requests
/// it cancels there.
pub fn stopped(id: u32) -> bool {
    STOP.with(|s| {
        s.borrow().as_ref().is_some_and(|list| {
            (0..list.length()).any(|i| js_sys::Atomics::load(list, i).ok() == Some(id as i32))
        })
    })
}

impl Progress for Reporter {
    fn step(&mut self, stage: &str, done: u64, total: u64) -> Flow {
        if stopped(self.id) {
            return Flow::Stop;
        }
        let now = js_sys::Date::now();
        if done == total || now - self.last >= 100.0 {
            self.last = now;
            post(&Reply::Progress {
                id: self.id,
                stage: stage.to_string(),
                done,
                total,
            });
        }
        Flow::Continue
    }
}

fn options(name: &str, settings: &ReadSettings) -> Result<ReadOptions, String> {
    let mut kinds = Vec::new();
    for (column, label) in &settings.kinds {
        let kind = Kind::from_label(label)
            .ok_or_else(|| format!("unknown kind '{label}' for column '{column}'"))?;
        kinds.push((column.clone(), kind));
    }
    Ok(ReadOptions {
        file_name: Some(name.to_string()),
        sheet: settings.sheet.clone(),
        missing_tokens: settings
            .missing
            .iter()
            .filter(|t| !t.trim().is_empty())
            .cloned()
            .collect(),
        kinds,
        max_bytes: Some(MAX_FILE_BYTES),
        fingerprint: None,
    })
}

fn preview(loaded: &Loaded) -> Preview {
    let table = &loaded.table;
    let rows = (0..table.rows.min(PREVIEW_ROWS))
        .map(|r| table.columns.iter().map(|c| c.display(r)).collect())
        .collect();
    Preview { rows }
}

/// SHA-256 by the browser's Web Crypto (native speed); `None` where it is unavailable (pages
/// served over plain http from another machine are not a secure context), and the core then
/// computes it itself.
async fn browser_sha256(bytes: &Uint8Array) -> Option<String> {
    let scope: web_sys::WorkerGlobalScope = js_sys::global().unchecked_into();
    let subtle = scope.crypto().ok()?.subtle();
    let promise = subtle
        .digest_with_str_and_buffer_source("SHA-256", bytes)
        .ok()?;
    let digest = wasm_bindgen_futures::JsFuture::from(promise).await.ok()?;
    let digest = Uint8Array::new(&digest).to_vec();
    Some(digest.iter().map(|b| format!("{b:02x}")).collect())
}

/// Posts a request's result, or its failure (the worker keeps what it held).
fn answer<T>(held: &Held, id: u32, result: Result<T, String>, reply: impl FnOnce(Box<T>) -> Reply) {
    post(&match result {
        Ok(r) => reply(Box::new(r)),
        Err(message) => Reply::Failed {
            id,
            message,
            kept_previous: held.loaded.is_some(),
        },
    });
}

fn handle(held: &mut Held, request: Request, bytes: Option<Vec<u8>>, fingerprint: Option<String>) {
    let (id, name, settings, new_bytes) = match request {
        Request::Read {
            id, name, settings, ..
        } => (id, name, settings, bytes),
        Request::Reread { id, settings, .. } => (id, held.name.clone(), settings, None),
        Request::Score {
            id,
            run,
            name,
            keep,
            ..
        } => {
            let bytes = bytes.as_deref().unwrap_or_default();
            let result = score(held, id, run, &name, bytes, &keep);
            return answer(held, id, result, |result| Reply::Scored { id, result });
        }
        Request::ModelFiles { id, runs, .. } => {
            let files = runs
                .iter()
                .map(|r| {
                    match &held.kept((*r)?)?.kept {
                        Kept::Trees(model) => write_model(model).ok(),
                        // Model files hold tree models; a study keeps a baseline's settings.
                        Kept::Baseline(_) => None,
                    }
                })
                .collect();
            return post(&Reply::ModelFiles { id, files });
        }
        Request::Explain {
            id,
            run,
            importance,
            predictor,
            record,
            tree,
            ..
        } => {
            if let Some((loaded, r, b)) = baseline_on_table(held, run) {
                let result = baseline::explain(
                    loaded,
                    r,
                    b,
                    run,
                    importance,
                    predictor.as_deref(),
                    record,
                    tree,
                );
                return answer(held, id, result, |result| Reply::Explained { id, result });
            }
            let result = explain::explain(
                held,
                id,
                run,
                importance,
                predictor.as_deref(),
                record,
                tree,
            );
            return answer(held, id, result, |result| Reply::Explained { id, result });
        }
        Request::Forget { run, .. } => {
            // Dropping the run frees its model and judged predictions.
            if let Some(r) = held.runs.get_mut(run as usize) {
                *r = None;
            }
            return;
        }
        Request::Predictions { id, run, .. } => {
            let result = predictions(held, run);
            return answer(held, id, result, |result| Reply::Predictions { id, result });
        }
        Request::Fit {
            id,
            design,
            method,
            settings,
            judging,
            ..
        } => {
            let kept_previous = held.loaded.is_some();
            let fitted = if method == baseline::METHOD {
                baseline::fit(held, id, design, settings, judging)
            } else {
                fit(held, id, design, &method, settings, judging, None)
            };
            match fitted {
                Ok(result) => post(&Reply::Fitted {
                    id,
                    result: Box::new(result),
                }),
                Err(message) => post(&Reply::Failed {
                    id,
                    message,
                    kept_previous,
                }),
            }
            return;
        }
        Request::Assemble {
            id,
            design,
            method,
            settings,
            judging,
            ..
        } => {
            let kept_previous = held.loaded.is_some();
            let parts = bytes.unwrap_or_default();
            match fit(held, id, design, &method, settings, judging, Some(parts)) {
                Ok(result) => post(&Reply::Fitted {
                    id,
                    result: Box::new(result),
                }),
                Err(message) => post(&Reply::Failed {
                    id,
                    message,
                    kept_previous,
                }),
            }
            return;
        }
        Request::Warnings { id, design, .. } => {
            let (warnings, refused, classes) = match design_warnings(held, &design) {
                Ok((w, classes)) => (w, None, classes),
                Err(e) => (Vec::new(), Some(e), None),
            };
            return post(&Reply::Warnings {
                id,
                warnings,
                refused,
                classes,
            });
        }
        Request::FoldRuns { id, runs, .. } => {
            held.fold_runs = Some((id, runs));
            return;
        }
        Request::FoldPart {
            id,
            design,
            method,
            settings,
            judging,
            share,
            of,
            ..
        } => {
            match fold_part(held, id, &design, &method, &settings, &judging, share, of) {
                Ok((count, runs)) => post(&Reply::Folds {
                    id,
                    share,
                    count,
                    runs,
                }),
                Err(message) => post(&Reply::Failed {
                    id,
                    message,
                    kept_previous: held.loaded.is_some(),
                }),
            }
            return;
        }
        Request::FitPart {
            id,
            design,
            method,
            settings,
            first,
            count,
            ..
        } => {
            match fit_part(held, id, &design, &method, &settings, first..first + count) {
                Ok(bytes) => post_with_bytes(&Reply::Part { id, first, count }, Some(&bytes)),
                Err(message) => post(&Reply::Failed {
                    id,
                    message,
                    kept_previous: held.loaded.is_some(),
                }),
            }
            return;
        }
    };
    let fail = |held: &Held, message: String| {
        post(&Reply::Failed {
            id,
            message,
            kept_previous: held.loaded.is_some(),
        });
    };
    let options = match options(&name, &settings) {
        Ok(mut o) => {
            o.fingerprint = match &new_bytes {
                Some(_) => fingerprint,
                None => held.loaded.as_ref().map(|l| l.fingerprint.clone()),
            };
            o
        }
        Err(message) => return fail(held, message),
    };
    let source: &[u8] = match &new_bytes {
        Some(b) => b,
        None if held.loaded.is_some() => &held.bytes,
        None => return fail(held, "no file is loaded yet; choose a file first".into()),
    };
    let start = js_sys::Date::now();
    match read_table(source, &options, &mut Reporter::new(id)) {
        Ok(loaded) => {
            let read_seconds = (js_sys::Date::now() - start) / 1000.0;
            let worker_memory_bytes = wasm_memory_bytes();
            let report = data::report(&loaded, &name);
            let preview = preview(&loaded);
            if let Some(b) = new_bytes {
                held.bytes = b;
                held.name = name.clone();
            }
            held.loaded = Some(loaded);
            post(&Reply::Table {
                id,
                name,
                report: Box::new(report),
                read_seconds,
                worker_memory_bytes,
                preview,
                settings,
            });
        }
        Err(e) => fail(held, format!("{name}: {e}")),
    }
}

/// The design and settings of a fit request, on the held table.
fn design_and_settings(
    held: &Held,
    design: &FitDesign,
    method: &str,
    sets: &[(String, String)],
) -> Result<(Design, FitSettings), String> {
    let loaded = held
        .loaded
        .as_ref()
        .ok_or("no table is loaded yet; choose a file first")?;
    let method_kind = Method::from_word(method)
        .ok_or_else(|| format!("{method}: choose tree, bagging, forest, adaboost or boosting"))?;
    let d = table_design(loaded, design)?;
    let regression = matches!(d.outcome, Outcome::Numbers(_));
    let settings = FitSettings::build(
        method_kind,
        d.predictors.len(),
        regression,
        &d.outcome_name,
        sets,
    )?;
    Ok((d, settings))
}

/// The design of the page's column choice on the held table (every fit, judging, check and
/// prediction of a run builds it the same way, so their rows agree).
fn table_design(loaded: &Loaded, design: &FitDesign) -> Result<Design, String> {
    let spec = DesignSpec {
        outcome: design.outcome.clone(),
        predictors: design.predictors.clone(),
        weight: design.weight.clone(),
        group: design.group.clone(),
        positive: design.positive.clone(),
    };
    build_design(&loaded.table, &spec).map_err(|e| e.to_string())
}

/// Fits one share of a forest's trees and returns them as bytes.
fn fit_part(
    held: &Held,
    id: u32,
    design: &FitDesign,
    method: &str,
    sets: &[(String, String)],
    range: std::ops::Range<usize>,
) -> Result<Vec<u8>, String> {
    let (d, settings) = design_and_settings(held, design, method, sets)?;
    let trees =
        fit_forest_part(d, &settings, range, &mut Reporter::new(id)).map_err(|e| e.to_string())?;
    Ok(encode_trees(&trees))
}

/// Fits `method` on the held table and keeps the model as a new run. With `parts` (the
/// bytes of trees fitted by several workers), a forest is tallied from them instead.
fn fit(
    held: &mut Held,
    id: u32,
    design: FitDesign,
    method: &str,
    sets: Vec<(String, String)>,
    judging: Option<Judging>,
    parts: Option<Vec<u8>>,
) -> Result<RunResult, String> {
    let (d, settings) = design_and_settings(held, &design, method, &sets)?;
    let method_kind = settings.method;
    let fingerprint = held.loaded.as_ref().map(|l| l.fingerprint.clone());
    // Fit time counts binning and fitting, as the command line's does.
    let start = js_sys::Date::now();
    let mut progress = Reporter::new(id);
    // Trees fitted elsewhere, tallied in tree order into the same forest as one worker's.
    let tally = |binned: &BinnedMatrix,
                 _: &[f64],
                 width: usize,
                 outcome: &Outcome,
                 forest: &ForestSettings,
                 held: Option<HeldOut<'_>>,
                 _: &mut dyn Progress| {
        tally_trees(
            parts.as_deref().unwrap_or_default(),
            binned,
            width,
            outcome,
            forest,
            held,
        )
    };
    let options = FitOptions {
        forest_fitter: parts.is_some().then_some(&tally as ForestFitter<'_>),
        ..FitOptions::default()
    };
    let mut fitted =
        fit_design(d, &settings, fingerprint, options, &mut progress).map_err(|e| e.to_string())?;
    let fit_seconds = (js_sys::Date::now() - start) / 1000.0;
    // Splits fitted by extra workers for this run, if the page sent them.
    let fold_runs = match held.fold_runs.take() {
        Some((for_id, runs)) if for_id == id => Some(runs),
        _ => None,
    };
    let (validation, validation_refused, judged) = match &judging {
        None => (None, None, None),
        Some(j) => match judge_run(
            held,
            &design,
            method,
            &sets,
            &settings,
            &fitted,
            j,
            fold_runs,
            &mut progress,
        ) {
            Ok((v, judged)) => (Some(v), None, judged),
            Err(e) => (None, Some(e), None),
        },
    };
    let Fitted {
        ref mut model,
        ref binned,
        design: ref d,
        ..
    } = fitted;
    // The settings the page sent; every other one is the method's default.
    model.settings = sets.iter().cloned().collect();
    let rows = Rows::Binned(binned);
    let training_curve = model
        .training_errors(binned, &d.outcome)
        .unwrap_or_default();
    let training_error = match training_curve.last() {
        Some(&e) => e,
        // A single tree: its error from its accuracy or RMSE.
        None => match model.performance(rows, &d.outcome) {
            ("accuracy", a) => 1.0 - a,
            (_, rmse) => rmse * rmse,
        },
    };
    let (oob_error, oob_curve, round_errors, stop, tree_shape) = match &model.ensemble {
        Ensemble::Tree(t) => (
            None,
            Vec::new(),
            Vec::new(),
            None,
            Some((t.depth(), t.leaves())),
        ),
        Ensemble::Forest(f) => (
            f.oob_error.last().copied().filter(|e| e.is_finite()),
            f.oob_error.clone(),
            Vec::new(),
            None,
            None,
        ),
        Ensemble::AdaBoost(a) => (
            None,
            Vec::new(),
            a.errors.clone(),
            Some(a.stop.words().to_string()),
            None,
        ),
        Ensemble::Boosting(b) => (None, Vec::new(), Vec::new(), Some(b.stopping_words()), None),
    };
    let result = RunResult {
        run: held.runs.len() as u32,
        method: method.to_string(),
        outcome: d.outcome_name.clone(),
        rows: binned.rows,
        predictors: binned.columns.len(),
        error_name: if settings.regression {
            "mean squared error"
        } else {
            "error rate"
        }
        .into(),
        members: model.members(),
        member_name: if matches!(method_kind, Method::AdaBoost | Method::Boosting) {
            "rounds"
        } else {
            "trees"
        }
        .into(),
        training_error,
        training_curve,
        oob_error,
        oob_curve,
        round_errors,
        stop,
        tree_shape,
        fit_seconds,
        worker_memory_bytes: wasm_memory_bytes(),
        validation,
        validation_refused,
        notices: d.notices.clone(),
    };
    held.runs.push(Some(Run {
        design,
        kept: Kept::Trees(fitted.model),
        judged,
        judging,
    }));
    Ok(result)
}

/// Judges a fitted run out of sample as `judging` asks: a forest by its out-of-bag rows
/// (no second fit), any other scheme by refitting on its splits; with the computed warnings.
/// Also gives, for two classes, the scheme in words and each row's out-of-sample
/// probability of the second class (for the threshold step).
#[allow(clippy::too_many_arguments)]
fn judge_run(
    held: &Held,
    design: &FitDesign,
    method: &str,
    sets: &[(String, String)],
    settings: &FitSettings,
    fitted: &Fitted,
    judging: &Judging,
    fold_runs: Option<Vec<FoldRun>>,
    progress: &mut dyn Progress,
) -> Result<(RunValidation, Option<JudgedRows>), String> {
    // The splits need the predictors' values, which the fitted design no longer holds.
    let (full, _) = design_and_settings(held, design, method, sets)?;
    let plan = judging_plan(judging)?;
    let scheme = plan.scheme.clone();
    // The splits' fits from extra workers when every one came; fitted here otherwise.
    let runner = |count: usize, job: &FoldJob<'_>, progress: &mut dyn Progress| match &fold_runs {
        Some(runs) if runs.len() == count => Ok(runs.clone()),
        _ => run_in_order(count, job, progress),
    };
    let v = if scheme == Scheme::OutOfBag {
        validate::out_of_bag(&full, fitted, &plan)
    } else {
        validate::validate(
            &full,
            settings,
            &plan,
            FitOptions::default(),
            Some(&runner),
            progress,
        )
    }
    .map_err(|e| e.to_string())?;
    let table = held.loaded.as_ref().map(|l| &l.table);
    let warnings = validate::warnings::warnings(&full, &scheme, table)
        .into_iter()
        .map(|w| w.message)
        .collect();
    let judged = (v.outputs == 2).then(|| {
        let second: Vec<f64> = v.predictions.chunks_exact(2).map(|p| p[1]).collect();
        (scheme_words(&scheme), second)
    });
    Ok((run_validation(&v, &scheme, warnings), judged))
}

/// The checks of `design` on the held table before any fit, as a judged run with 5-fold
/// cross-validation would get them (the scheme only matters for the repeated-records
/// warning, which then advises grouped folds); and, for two classes, the labels, the second
/// being the class every figure treats as the event (the one called positive, else "yes" or
/// the later label in order).
fn design_warnings(
    held: &Held,
    design: &FitDesign,
) -> Result<(Vec<String>, Option<[String; 2]>), String> {
    let loaded = held
        .loaded
        .as_ref()
        .ok_or("no table is loaded yet; choose a file first")?;
    let d = table_design(loaded, design)?;
    let scheme = Scheme::Folds { k: 5, repeats: 1 };
    let classes = match &d.outcome {
        Outcome::Classes { labels, .. } if labels.len() == 2 => {
            Some([labels[0].clone(), labels[1].clone()])
        }
        _ => None,
    };
    let warnings = validate::warnings::warnings(&d, &scheme, Some(&loaded.table))
        .into_iter()
        .map(|w| w.message)
        .collect();
    Ok((warnings, classes))
}

/// The validation plan of the page's judging choice.
fn judging_plan(judging: &Judging) -> Result<Plan, String> {
    Ok(Plan {
        scheme: Scheme::parse(&judging.scheme).map_err(|e| e.to_string())?,
        seed: judging.seed,
        threshold: judging.threshold,
        resamples: JUDGING_RESAMPLES,
        baseline: judging.baseline,
    })
}

/// One extra worker's share of a judging: fits splits `share`, `share + of`, … of the
/// scheme's splits (the same splits, seeds and fits as [`validate::validate`] makes), and
/// tells how many splits there are in all.
#[allow(clippy::too_many_arguments)]
fn fold_part(
    held: &Held,
    id: u32,
    design: &FitDesign,
    method: &str,
    sets: &[(String, String)],
    judging: &Judging,
    share: usize,
    of: usize,
) -> Result<(usize, Vec<(usize, FoldRun)>), String> {
    let (full, settings) = design_and_settings(held, design, method, sets)?;
    let plan = judging_plan(judging)?;
    let splits = validate::splits(&full, &plan.scheme, plan.seed).map_err(|e| e.to_string())?;
    let mine: Vec<usize> = (share..splits.len()).step_by(of.max(1)).collect();
    let mut progress = ShareProgress {
        outer: Reporter::new(id),
        index: 0,
        count: mine.len(),
    };
    let mut runs = Vec::with_capacity(mine.len());
    for (k, &i) in mine.iter().enumerate() {
        progress.index = k;
        let run = run_split(
            &full,
            &settings,
            &plan,
            &splits[i],
            FitOptions::default(),
            &mut progress,
        )
        .map_err(|e| e.to_string())?;
        runs.push((i, run));
    }
    Ok((splits.len(), runs))
}

/// Progress of one worker's share of splits as a whole: split `index` of `count`, each
/// split's own steps a thousandth of it.
struct ShareProgress {
    outer: Reporter,
    index: usize,
    count: usize,
}

impl Progress for ShareProgress {
    fn step(&mut self, stage: &str, done: u64, total: u64) -> Flow {
        let within = (1000 * done.min(total)).checked_div(total).unwrap_or(0);
        let label = format!("fit {}/{}: {stage}", self.index + 1, self.count);
        self.outer.step(
            &label,
            1000 * self.index as u64 + within,
            1000 * self.count.max(1) as u64,
        )
    }
}

/// A validation scheme in plain words, for the page.
fn scheme_words(scheme: &Scheme) -> String {
    match scheme {
        Scheme::OutOfBag => "out-of-bag records".into(),
        Scheme::Holdout { fraction } => format!("{:.0}% held out", 100.0 * fraction),
        Scheme::Folds { k, repeats: 1 } => format!("{k}-fold cross-validation"),
        Scheme::Folds { k, repeats } => format!("{k}-fold cross-validation, {repeats} times"),
        Scheme::Groups { k, column } => format!("{k} folds keeping each {column} together"),
        Scheme::Bootstrap { resamples } => {
            format!("bootstrap optimism correction, {resamples} refits")
        }
    }
}

/// Bootstrap resamples for the intervals of figures without a closed form.
const JUDGING_RESAMPLES: usize = 500;

/// The page's view of a validation.
/// `warnings`, those about the data, are followed by those only the results can give.
fn run_validation(v: &Validation, scheme: &Scheme, mut warnings: Vec<String>) -> RunValidation {
    warnings.extend(
        validate::warnings::judged_warnings(v)
            .into_iter()
            .map(|w| w.message),
    );
    let figures = |j: &Judged| -> Vec<Figure> {
        j.metrics
            .iter()
            .map(|(name, e)| Figure {
                name: name.clone(),
                value: e.value,
                low: e.low,
                high: e.high,
            })
            .collect()
    };
    let roc = |j: &Judged| -> Vec<(f64, f64)> {
        j.curves
            .roc
            .iter()
            .map(|p| (p.false_positive_rate, p.true_positive_rate))
            .collect()
    };
    let m = &v.model;
    // Event probabilities (the second class) of the rows judged, for the histogram.
    let mut histogram = vec![0u64; 20];
    if v.outputs == 2 {
        for p in v
            .predictions
            .chunks_exact(2)
            .map(|p| p[1])
            .filter(|p| p.is_finite())
        {
            histogram[((p * 20.0) as usize).min(19)] += 1;
        }
    }
    RunValidation {
        scheme: scheme_words(scheme),
        judged_rows: v.judged_rows,
        figures: figures(m),
        baseline_name: if v.outputs == 1 {
            "ridge regression".into()
        } else {
            "logistic regression".into()
        },
        baseline: v.baseline.as_ref().map(figures),
        roc: roc(m),
        baseline_roc: v.baseline.as_ref().map(roc).unwrap_or_default(),
        calibration: m
            .curves
            .calibration
            .iter()
            .map(|g| CalibrationGroup {
                lowest: g.lowest_prediction,
                highest: g.highest_prediction,
                mean_predicted: g.mean_prediction,
                observed: g.observed.value,
                low: g.observed.low,
                high: g.observed.high,
                rows: g.observed.total,
            })
            .collect(),
        smoothed: m
            .curves
            .smoothed_calibration
            .iter()
            .map(|p| (p.predicted, p.observed))
            .collect(),
        histogram,
        decision: m
            .curves
            .decision
            .iter()
            .map(|d| (d.threshold, d.model, d.treat_all))
            .collect(),
        error_by_size: v.error_by_size.clone().unwrap_or_default(),
        warnings,
        notes: v.notes.clone(),
    }
}

/// Rows of predictions shown in the page; the download has them all.
const SCORE_PREVIEW_ROWS: usize = 100;

/// Scores a file of new records with kept run `run`, as `spinney predict` does: the file's
/// predictor columns read as the kinds they had in training, missing or mistyped ones
/// refused in the core's words, labels never seen in training noted.
fn score(
    held: &Held,
    id: u32,
    run: u32,
    name: &str,
    bytes: &[u8],
    keep: &[String],
) -> Result<ScoreResult, String> {
    let r = held.kept(run).ok_or(GONE)?;
    let model = match &r.kept {
        Kept::Trees(model) => model,
        Kept::Baseline(b) => {
            let (loaded, _) = run_on_table(held, run)?;
            return baseline::score(
                loaded,
                r,
                b,
                id,
                run,
                name,
                bytes,
                keep,
                explain::TOP,
                SCORE_PREVIEW_ROWS,
            );
        }
    };
    let options = ReadOptions {
        file_name: Some(name.to_string()),
        kinds: model.reading_kinds(),
        max_bytes: Some(MAX_FILE_BYTES),
        ..ReadOptions::default()
    };
    let loaded =
        read_table(bytes, &options, &mut Reporter::new(id)).map_err(|e| format!("{name}: {e}"))?;
    let (records, unseen) = model
        .records(&loaded.table)
        .map_err(|e| format!("{name}: {e}"))?;
    let mut notes: Vec<String> = loaded
        .notices
        .iter()
        .map(|n| format!("{name}: {n}"))
        .collect();
    notes.extend(unseen.iter().map(unseen_note));
    notes.extend(partial_note(model));
    let mut rows = PredictionRows::new(model, &loaded.table, &records, keep);
    // Each row's largest contributions (TreeSHAP) after its predictions.
    let c = contributions(model, &records, None, &mut Reporter::new(id))
        .map_err(|e| format!("{name}: {e}"))?;
    let mut header = rows.header();
    for t in 1..=explain::TOP {
        header.push(format!("top_{t}_predictor"));
        header.push(format!("top_{t}_amount"));
    }
    header.push("amount_scale".into());
    let mut prediction = vec![0.0; model.outputs()];
    let mut csv = PredictionRows::csv_line(&header);
    csv.push('\n');
    let mut preview = Vec::new();
    for row in 0..rows.rows() {
        let mut fields = rows.fields(row);
        model.predict(Rows::Records(&records), row, &mut prediction);
        let o = explain::explained_output(model, c.outputs, &prediction);
        let top = explain::ranked(model, &records, &c, row, o);
        for t in 0..explain::TOP {
            match top.get(t) {
                Some(x) => {
                    fields.push(x.predictor.clone());
                    fields.push(x.amount.to_string());
                }
                None => fields.extend([String::new(), String::new()]),
            }
        }
        fields.push(c.output_names[o].clone());
        csv += &PredictionRows::csv_line(&fields);
        csv.push('\n');
        if row < SCORE_PREVIEW_ROWS {
            preview.push(fields);
        }
    }
    Ok(ScoreResult {
        run,
        file: name.to_string(),
        rows: rows.rows(),
        csv,
        header,
        preview,
        notes,
        contribution_scale: c.scale.clone(),
    })
}

/// The held table and kept run `run`, which must have been fitted on that table.
fn run_on_table(held: &Held, run: u32) -> Result<(&Loaded, &Run), String> {
    let loaded = held
        .loaded
        .as_ref()
        .ok_or("no table is loaded yet; choose a file first")?;
    let r = held.kept(run).ok_or(GONE)?;
    if r.kept.fingerprint() != Some(loaded.fingerprint.as_str()) {
        return Err("the data changed after this run was grown; grow it again on this data".into());
    }
    Ok((loaded, r))
}

/// The held table and kept tree run `run` (see [`run_on_table`]).
fn trees_on_table(held: &Held, run: u32) -> Result<(&Loaded, &Run, &Model), String> {
    let (loaded, r) = run_on_table(held, run)?;
    match &r.kept {
        Kept::Trees(model) => Ok((loaded, r, model)),
        Kept::Baseline(_) => Err("this is a baseline run, not a tree model".into()),
    }
}

/// The held table and kept run `run` when it is a baseline fitted on that table.
fn baseline_on_table(held: &Held, run: u32) -> Option<(&Loaded, &Run, &baseline::BaselineRun)> {
    let (loaded, r) = run_on_table(held, run).ok()?;
    match &r.kept {
        Kept::Baseline(b) => Some((loaded, r, b)),
        Kept::Trees(_) => None,
    }
}

/// The per-row predictions of kept run `run` on the table it was fitted on: its judged
/// out-of-sample predictions when it was judged, out-of-bag for bagging and forests (rows
/// every tree saw left out), the training rows' own otherwise (apparent).
fn predictions(held: &Held, run: u32) -> Result<RunPredictions, String> {
    let (loaded, r) = run_on_table(held, run)?;
    let classes = match r.kept.classes() {
        Some([a, b]) => [a.clone(), b.clone()],
        Some(c) => {
            return Err(format!(
                "a decision threshold needs an outcome with two classes; this run's has {}",
                c.len()
            ))
        }
        None => return Err(
            "a decision threshold needs an outcome with two classes; this run predicts a number"
                .into(),
        ),
    };
    // The rows of the fitted (and judged) design.
    let d = table_design(loaded, &r.design)?;
    let Outcome::Classes { codes, .. } = &d.outcome else {
        return Err("the outcome is read as a number now; grow the run again".into());
    };
    let mut outcomes = Vec::with_capacity(codes.len());
    let mut probabilities = Vec::with_capacity(codes.len());
    let mut left_out = 0;
    let mut keep = |y: u32, p: f64| {
        if p.is_finite() {
            outcomes.push(y);
            probabilities.push(p.clamp(0.0, 1.0));
        } else {
            left_out += 1;
        }
    };
    // Out-of-sample where the run was judged (or is a forest, judged by its out-of-bag
    // rows); the training rows' own predictions otherwise, labelled as apparent.
    let judged_by = match (&r.judged, &r.kept) {
        (Some((words, second)), _) if second.len() == codes.len() => {
            for (&y, &p) in codes.iter().zip(second) {
                keep(y, p);
            }
            Some(words.clone())
        }
        (
            _,
            Kept::Trees(Model {
                ensemble: Ensemble::Forest(f),
                ..
            }),
        ) if f.oob_prediction.len() == 2 * codes.len() => {
            for (i, &y) in codes.iter().enumerate() {
                keep(y, f.oob_prediction[2 * i + 1]);
            }
            Some("out-of-bag records".to_string())
        }
        (_, Kept::Baseline(b)) => {
            let p = b.model.predict(&d).map_err(|e| e.to_string())?;
            for (i, &y) in codes.iter().enumerate() {
                keep(y, p[2 * i + 1]);
            }
            None
        }
        (_, Kept::Trees(model)) => {
            let (records, _) = model.records(&loaded.table).map_err(|e| e.to_string())?;
            let mut out = vec![0.0; model.outputs()];
            for (i, &y) in codes.iter().enumerate() {
                model.predict(Rows::Records(&records), d.rows[i], &mut out);
                keep(y, out[1]);
            }
            None
        }
    };
    Ok(RunPredictions {
        run,
        classes,
        outcomes,
        probabilities,
        judged_by,
        left_out,
    })
}

/// The size of this worker's wasm memory (it only grows, so this is the peak so far).
fn wasm_memory_bytes() -> u64 {
    wasm_bindgen::memory()
        .unchecked_into::<js_sys::WebAssembly::Memory>()
        .buffer()
        .unchecked_into::<js_sys::ArrayBuffer>()
        .byte_length() as u64
}

fn main() {
    let held = Rc::new(RefCell::new(Held::default()));
    let on_message = Closure::<dyn FnMut(MessageEvent)>::new(move |event: MessageEvent| {
        let data = event.data();
        let msg = Reflect::get(&data, &"msg".into()).unwrap_or(JsValue::UNDEFINED);
        let bytes = Reflect::get(&data, &"bytes".into())
            .ok()
            .filter(|b| b.is_instance_of::<Uint8Array>())
            .map(|b| b.unchecked_into::<Uint8Array>());
        if let Some(list) = Reflect::get(&data, &"stop".into())
            .ok()
            .filter(|s| s.is_instance_of::<js_sys::Int32Array>())
        {
            STOP.with(|s| *s.borrow_mut() = Some(list.unchecked_into()));
        }
        match serde_wasm_bindgen::from_value::<Request>(msg) {
            Ok(request) if request.version() > PROTOCOL_VERSION => post(&Reply::Failed {
                id: 0,
                message: format!(
                    "the page speaks protocol version {} but this worker only knows {PROTOCOL_VERSION}; reload the page",
                    request.version()
                ),
                kept_previous: true,
            }),
            Ok(request) => {
                let held = held.clone();
                wasm_bindgen_futures::spawn_local(async move {
                    // Only a file being read has a fingerprint (not trees between workers).
                    let fingerprint = match (&request, &bytes) {
                        (Request::Read { .. }, Some(b)) => browser_sha256(b).await,
                        _ => None,
                    };
                    let bytes = bytes.map(|b| b.to_vec());
                    // Borrowed only after the await: no two requests overlap.
                    handle(&mut held.borrow_mut(), request, bytes, fingerprint);
                });
            }
            Err(e) => post(&Reply::Failed {
                id: 0,
                message: format!("the worker could not understand a message ({e}); reload the page"),
                kept_previous: true,
            }),
        }
    });
    scope().set_onmessage(Some(on_message.as_ref().unchecked_ref()));
    on_message.forget();
    post(&Reply::Ready {
        v: PROTOCOL_VERSION,
    });
    warm_up();
}

/// Reads a small generated table a few times right after start. Browsers first run wasm
/// in quickly compiled, slow code and optimise a function only once it has run for a while;
/// without this, the user's first big file is read about three times slower than later ones.
fn warm_up() {
    let mut text = String::from("n,w,c,d,y\n");
    for i in 0..4000 {
        let c = ["alder", "birch", "cedar"][i % 3];
        let y = if i % 2 == 0 { "yes" } else { "no" };
        text += &format!(
            "{}.{},{},{c},2024-01-{:02},{y}\n",
            i % 97,
            i % 10,
            i * 7,
            1 + i % 28
        );
    }
    for _ in 0..4 {
        let _ = read_table(
            text.as_bytes(),
            &ReadOptions::default(),
            &mut spinney_core::progress::Silent,
        );
    }
}
