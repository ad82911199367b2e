//! The study in the page: saving the notebook as a study file (spinney_core::study), opening
//! one and growing its runs again on the same data (checked against the saved figures to the
//! bit), refusing other data with the reason unless the user asks to run it as new data, and
//! the autosave to this browser's storage (see `store`) with its clear button.
//!
//! Opening a study and restoring the browser's copy take one path: the study waits
//! (`pending`) until its data is read, then its roles are applied and its runs queued.

use spinney_core::settings::FitSettings;
use spinney_core::study::{
    include_data, read_study, write_study, Study, StudyColumn, StudyData, StudyReading, StudyRun,
    BASELINE,
};
use spinney_web::protocol::{FitDesign, ReadSettings, Request, RunResult, PROTOCOL_VERSION};
use wasm_bindgen::JsCast;
use wasm_bindgen_futures::spawn_local;
use web_sys::{Event, HtmlInputElement};

use super::runs::{self, figures_of, FitAsk, RunView};
use super::store::{self, KeptData};
use super::{
    by_id, default_role, download, esc, fetch_origin, load_origin, on, on_file_chosen, reread,
    send, show, Origin, Page, Role, Shared,
};

/// Where a waiting study came from.
#[derive(Clone, Copy, PartialEq)]
enum Source {
    Opened,
    Restored,
}

struct Pending {
    study: Study,
    source: Source,
    /// The user asked to grow the study's runs on a file that is not its data.
    as_new_data: bool,
}

#[derive(Default)]
pub struct StudyState {
    pending: Option<Pending>,
    /// Runs being grown again from a study: how many, and what was opened.
    regrowing: Option<(usize, &'static str)>,
    /// Autosave waits while the browser's copy is being restored.
    restoring: bool,
    /// The fingerprint of the data last written to the browser's storage.
    kept_fingerprint: Option<String>,
    /// Autosaves done since the page opened (for the browser test).
    saves: u32,
    /// A save waiting for the worker's model files: request id, the study, with data.
    saving: Option<(u32, Study, bool)>,
}

impl StudyState {
    /// A cancel restarted the worker: no study re-run is under way any more, and a save
    /// waiting for models will get none.
    pub fn cancelled(&mut self) {
        self.regrowing = None;
        self.saving = None;
    }

    /// A read failed: if it was the kept copy's data, autosave goes on without it.
    pub fn read_failed(&mut self) {
        self.restoring = false;
    }
}

fn status(doc: &web_sys::Document, text: &str, is_error: bool) {
    let el = by_id(doc, "study-status");
    el.set_text_content(Some(text));
    el.set_class_name(if is_error { "message error" } else { "message" });
    show(doc, "study-status", !text.is_empty());
}

fn reading_of(settings: &ReadSettings) -> StudyReading {
    StudyReading {
        sheet: settings.sheet.clone(),
        missing: settings.missing.clone(),
        kinds: settings.kinds.clone(),
    }
}

fn settings_of(reading: &StudyReading) -> ReadSettings {
    ReadSettings {
        sheet: reading.sheet.clone(),
        missing: reading.missing.clone(),
        kinds: reading.kinds.clone(),
    }
}

/// The seed a run used: the one given, or its method's default.
fn seed_of(run: &RunView) -> u64 {
    if let Some((_, v)) = run.ask.settings.iter().find(|(n, _)| n == "seed") {
        if let Ok(seed) = v.parse() {
            return seed;
        }
    }
    let regression = run.result.error_name == "mean squared error";
    // A baseline has no random draws; its judging's splits have their own seed (1).
    let runs::Grown::Trees(method) = run.ask.method else {
        return 1;
    };
    FitSettings::defaults(
        method,
        run.result.predictors,
        regression,
        &run.ask.design.outcome,
    )
    .map_or(1, |s| s.forest.seed)
}

/// The notebook as a study (without the data; [`save`] adds it when asked).
fn build(p: &Page) -> Option<Study> {
    let report = p.report.as_ref()?;
    let columns = report
        .columns
        .iter()
        .zip(&p.roles)
        .map(|(c, r)| StudyColumn {
            name: c.name.clone(),
            kind: c.kind.label().to_string(),
            role: r.key().to_string(),
        })
        .collect();
    let runs = p
        .fits
        .runs
        .iter()
        .map(|r| StudyRun {
            method: r.ask.method.word().to_string(),
            outcome: r.ask.design.outcome.clone(),
            predictors: r.ask.design.predictors.clone(),
            weight: r.ask.design.weight.clone(),
            group: r.ask.design.group.clone(),
            positive: r.ask.design.positive.clone(),
            validation: r.ask.judging.as_ref().map(|j| j.scheme.clone()),
            baseline: r.ask.judging.as_ref().is_some_and(|j| j.baseline),
            settings: r.ask.settings.iter().cloned().collect(),
            seed: seed_of(r),
            earlier_data: r.stale,
            result: figures_of(&r.result),
            model: None,
        })
        .collect();
    let mut study = Study::new(
        StudyData {
            file: report.file.clone(),
            fingerprint: report.fingerprint_sha256.clone(),
            rows: report.rows as u64,
            reading: reading_of(&p.settings),
            columns,
            included: None,
        },
        runs,
    );
    study.threshold = super::threshold::choice(p);
    Some(study)
}

/// Saves the study as a download, with the data if the box is ticked.
fn save(page: &Shared) {
    let (study, doc, checked) = {
        let p = page.borrow();
        let checked = |id: &str| {
            by_id(&p.doc, id)
                .unchecked_into::<HtmlInputElement>()
                .checked()
        };
        (
            build(&p),
            p.doc.clone(),
            (
                checked("study-include-data"),
                checked("study-include-models"),
            ),
        )
    };
    let Some(study) = study else {
        status(
            &doc,
            "Load a data file first: a study describes work on one.",
            true,
        );
        return;
    };
    let (with_data, with_models) = checked;
    if !with_models {
        return finish_save(page, study, with_data, 0);
    }
    // The models are the worker's: ask for them, and finish when they come.
    let request = {
        let mut p = page.borrow_mut();
        let runs = p
            .fits
            .runs
            .iter()
            .map(|r| r.held.then_some(r.result.run))
            .collect();
        p.next_id += 1;
        let id = p.next_id;
        p.study.saving = Some((id, study, with_data));
        Request::ModelFiles {
            v: PROTOCOL_VERSION,
            id,
            runs,
        }
    };
    send(page, request, None);
}

/// The worker's model files (one per run of the table, `None` where it no longer holds the
/// model): into the study being saved.
pub fn models_arrived(page: &Shared, id: u32, files: Vec<Option<String>>) {
    let Some((_, mut study, with_data)) = page
        .borrow_mut()
        .study
        .saving
        .take_if(|(asked, _, _)| *asked == id)
    else {
        return;
    };
    let mut missing = 0;
    for (run, file) in study.runs.iter_mut().zip(files) {
        run.model = file.and_then(|f| serde_json::from_str(&f).ok());
        // A baseline has no model file; its penalty regrows it exactly.
        missing += usize::from(run.model.is_none() && run.method != BASELINE);
    }
    finish_save(page, study, with_data, missing);
}

/// Whether a reply is the answer to a save in progress.
pub fn saving(page: &Shared, id: u32) -> bool {
    page.borrow()
        .study
        .saving
        .as_ref()
        .is_some_and(|(asked, _, _)| *asked == id)
}

/// The worker could not write the models: the study is saved without them.
pub fn models_refused(page: &Shared, message: &str) {
    let Some((_, study, with_data)) = page.borrow_mut().study.saving.take() else {
        return;
    };
    let doc = page.borrow().doc.clone();
    status(
        &doc,
        &format!("The models could not be written ({message})."),
        true,
    );
    let runs = study.runs.len();
    finish_save(page, study, with_data, runs);
}

/// Adds the data if asked, writes the study and offers it as a download.
fn finish_save(page: &Shared, mut study: Study, with_data: bool, missing_models: usize) {
    let (origin, doc) = {
        let p = page.borrow();
        (p.good_origin.clone(), p.doc.clone())
    };
    spawn_local(async move {
        if with_data {
            let Some(origin) = origin else { return };
            match fetch_origin(&origin).await {
                Ok((_, bytes)) => study.data.included = Some(include_data(&bytes.to_vec())),
                Err(e) => return status(&doc, &e, true),
            }
        }
        match write_study(&study) {
            Ok(text) => {
                let stem = study
                    .data
                    .file
                    .rsplit_once('.')
                    .map_or(study.data.file.as_str(), |(s, _)| s);
                let name = format!("{stem}.spinney-study.json");
                download(&doc, &name, text.as_bytes(), "application/json");
                let models = study.runs.iter().filter(|r| r.model.is_some()).count();
                status(
                    &doc,
                    &format!(
                        "Saved {name}: {} run(s){}{}. It stays wherever your browser puts downloads.",
                        study.runs.len(),
                        if with_data {
                            ", with the data itself inside: keep it as carefully as the data"
                        } else {
                            "; the data is not in it, only its fingerprint"
                        },
                        match (models, missing_models) {
                            (0, 0) => String::new(),
                            (m, 0) => format!("; {m} fitted model(s) inside (a leaf can describe a single record: keep them with the same care)"),
                            (m, n) => format!("; {m} fitted model(s) inside, {n} not (the worker no longer holds them after a cancel; grow them again to include them)"),
                        }
                    ),
                    false,
                );
            }
            Err(e) => status(&doc, &format!("The study could not be saved: {e}."), true),
        }
    });
}

/// Opens a study file chosen by the user.
fn open(page: &Shared, file: web_sys::File) {
    let page = page.clone();
    spawn_local(async move {
        let doc = page.borrow().doc.clone();
        let name = file.name();
        let bytes = match fetch_origin(&Origin::File(file)).await {
            Ok((_, b)) => b.to_vec(),
            Err(e) => return status(&doc, &e, true),
        };
        match read_study(&bytes) {
            Ok(study) => take(&page, study, Source::Opened),
            Err(e) => status(
                &doc,
                &format!("{name}: {e}. The notebook is unchanged."),
                true,
            ),
        }
    });
}

/// A study to apply once its data is read: read the included data, or the data already
/// loaded if it is the study's, or wait for the user to choose the file.
fn take(page: &Shared, study: Study, source: Source) {
    let doc = page.borrow().doc.clone();
    show(&doc, "study-mismatch", false);
    let _ = by_id(&doc, "study-status").remove_attribute("data-regrown");
    let settings = settings_of(&study.data.reading);
    let included = study.included_bytes();
    let loaded = page
        .borrow()
        .report
        .as_ref()
        .map(|r| r.fingerprint_sha256 == study.data.fingerprint);
    let file = study.data.file.clone();
    let runs = study.runs.len();
    page.borrow_mut().study.pending = Some(Pending {
        study,
        source,
        as_new_data: false,
    });
    if let Some(bytes) = included {
        status(
            &doc,
            &format!("Opening the study: reading its own copy of {file}…"),
            false,
        );
        let data = js_sys::Uint8Array::from(bytes.as_slice());
        load_origin(page, Origin::Bytes(file, data), settings, false);
    } else if loaded == Some(true) {
        status(&doc, "Opening the study on the data already loaded…", false);
        reread(page, settings);
    } else {
        if loaded == Some(false) {
            show_mismatch(page);
        }
        status(
            &doc,
            &format!(
                "Study opened: {runs} run(s) on {file}. Now choose or drop that same data file in step 1; its runs are grown again and checked against the saved figures."
            ),
            false,
        );
    }
}

/// The reading settings a newly chosen data file is read with: a waiting study's.
pub fn reading_for_new_file(p: &Page) -> ReadSettings {
    p.study
        .pending
        .as_ref()
        .map_or_else(ReadSettings::default, |w| {
            settings_of(&w.study.data.reading)
        })
}

/// Says why the loaded table is not the waiting study's data, with the choice to use it
/// as new data.
fn show_mismatch(page: &Shared) {
    let p = page.borrow();
    let (Some(w), Some(report)) = (&p.study.pending, &p.report) else {
        return;
    };
    let d = &w.study.data;
    let fingerprint = &report.fingerprint_sha256;
    let html = format!(
        "<p><strong>This file is not the study's data.</strong> The study was made on {} ({} rows, fingerprint <code>{}…</code>); the file loaded is {} ({} rows, fingerprint <code>{}…</code>). The study's runs would not give its saved figures here. Choose the study's own file in step 1, or grow the study's runs on this file as new data (their figures are then new, not a check).</p><p><button type=\"button\" id=\"study-as-new\" class=\"button\">Grow the study's runs on this file as new data</button> <button type=\"button\" id=\"study-drop\" class=\"button quiet\">Put the study aside</button></p>",
        esc(&d.file),
        d.rows,
        d.fingerprint.get(..12).unwrap_or(&d.fingerprint),
        esc(&report.file),
        report.rows,
        fingerprint.get(..12).unwrap_or(fingerprint)
    );
    by_id(&p.doc, "study-mismatch").set_inner_html(&html);
    show(&p.doc, "study-mismatch", true);
}

/// A table was read: apply the waiting study if the data is its own (or the user said to
/// use it as new data); otherwise say why not.
pub fn table_read(page: &Shared) {
    let (doc, fingerprint) = {
        let p = page.borrow();
        let Some(report) = &p.report else { return };
        (p.doc.clone(), report.fingerprint_sha256.clone())
    };
    let matches = {
        let p = page.borrow();
        let Some(w) = &p.study.pending else {
            drop(p);
            return autosave(page);
        };
        w.study.data.fingerprint == fingerprint || w.as_new_data
    };
    if !matches {
        show_mismatch(page);
        status(&doc, "", false);
        return;
    }
    apply(page);
}

/// Applies the waiting study to the table just read: roles by column name, then its runs
/// grown again in order (those fitted on earlier data are listed with their saved figures).
fn apply(page: &Shared) {
    let (asks, what) = {
        let mut p = page.borrow_mut();
        let Some(w) = p.study.pending.take() else {
            return;
        };
        show(&p.doc, "study-mismatch", false);
        let Some(report) = p.report.clone() else {
            return;
        };
        p.roles = report
            .columns
            .iter()
            .map(
                |c| match w.study.role_of(&c.name).and_then(Role::from_key) {
                    Some(r) => r,
                    None => default_role(c),
                },
            )
            .collect();
        p.fits.runs.clear();
        p.fits.charted = None;
        super::threshold::restore(&mut p, w.study.threshold.as_ref());
        p.positive = w.study.runs.iter().rev().find_map(|r| r.positive.clone());
        let mut asks = Vec::new();
        for run in &w.study.runs {
            let Some(method) = runs::Grown::from_word(&run.method) else {
                continue;
            };
            let settings: Vec<(String, String)> = run
                .settings
                .iter()
                .map(|(n, v)| (n.clone(), v.clone()))
                .collect();
            let ask = FitAsk {
                method,
                design: FitDesign {
                    outcome: run.outcome.clone(),
                    predictors: run.predictors.clone(),
                    weight: run.weight.clone(),
                    group: run.group.clone(),
                    positive: run.positive.clone(),
                },
                judging: run
                    .validation
                    .clone()
                    .map(|scheme| runs::judging(scheme, run.baseline)),
                summary: runs::summary_of(method, &settings),
                settings,
                expected: (!w.as_new_data).then(|| run.result.clone()),
            };
            if run.earlier_data {
                // Listed with its saved figures; not grown again.
                p.fits.runs.push(RunView {
                    result: result_of(run),
                    ask,
                    stale: true,
                    held: false,
                    same_as_study: None,
                });
            } else {
                asks.push(ask);
            }
        }
        let what = match (w.source, w.as_new_data) {
            (Source::Restored, _) => "Restored the notebook kept in this browser",
            (Source::Opened, false) => "Study opened on its own data",
            (Source::Opened, true) => "Study opened on new data",
        };
        p.study.regrowing = Some((asks.len(), what)).filter(|(n, _)| *n > 0);
        p.study.restoring = false;
        (asks, what)
    };
    {
        let p = page.borrow();
        super::render_columns(&p);
        let n = asks.len();
        status(
            &p.doc,
            &if n == 0 {
                format!("{what}.")
            } else {
                format!("{what}: growing its {n} run(s) again…")
            },
            false,
        );
    }
    if asks.is_empty() {
        autosave(page);
    }
    for ask in asks {
        runs::start_fit(page, ask);
    }
}

/// A saved run's figures in the shape the runs table shows.
fn result_of(run: &StudyRun) -> RunResult {
    let r = &run.result;
    RunResult {
        run: u32::MAX,
        method: run.method.clone(),
        outcome: run.outcome.clone(),
        rows: r.rows as usize,
        predictors: r.predictors as usize,
        error_name: r.error_name.clone(),
        members: r.members as usize,
        member_name: match run.method.as_str() {
            "adaboost" | "boosting" => "rounds",
            "baseline" => "model",
            _ => "trees",
        }
        .into(),
        training_error: r.training_error,
        training_curve: Vec::new(),
        oob_error: r.out_of_bag_error,
        oob_curve: Vec::new(),
        round_errors: Vec::new(),
        stop: None,
        tree_shape: None,
        fit_seconds: r.fit_seconds,
        notices: Vec::new(),
        worker_memory_bytes: 0,
        validation: None,
        validation_refused: None,
    }
}

/// No fit is waiting any more: report a study's re-run, then autosave.
pub fn runs_settled(page: &Shared) {
    {
        let mut p = page.borrow_mut();
        if let Some((n, what)) = p.study.regrowing.take() {
            let grown: Vec<Option<bool>> = p
                .fits
                .runs
                .iter()
                .filter(|r| !r.stale)
                .map(|r| r.same_as_study)
                .collect();
            let differ = grown.iter().filter(|s| **s == Some(false)).count();
            let checked = grown.iter().filter(|s| s.is_some()).count();
            let text = if checked == 0 {
                format!("{what}. Grown: {n} run(s) of the study on this data.")
            } else if differ == 0 {
                format!("{what}. Grown again: {checked} run(s), every figure the same as in the study, to the last digit.")
            } else {
                format!("{what}. Grown again: {differ} of {checked} run(s) differ from the study's saved figures (marked in the table).")
            };
            let _ = by_id(&p.doc, "study-status")
                .set_attribute("data-regrown", if differ == 0 { "same" } else { "differs" });
            status(&p.doc, &text, differ > 0);
        }
    }
    super::runs_changed(page);
    autosave(page);
}

/// Writes the notebook to this browser's storage (not while a copy is being restored).
pub fn autosave(page: &Shared) {
    let (study, origin, kept, doc) = {
        let p = page.borrow();
        if p.study.restoring {
            return;
        }
        let Some(study) = build(&p) else { return };
        (
            study,
            p.good_origin.clone(),
            p.study.kept_fingerprint.clone(),
            p.doc.clone(),
        )
    };
    let page = page.clone();
    spawn_local(async move {
        let Ok(text) = write_study(&study) else {
            return;
        };
        let mut data = None;
        if kept.as_deref() != Some(study.data.fingerprint.as_str()) {
            if let Some(origin) = origin {
                if let Ok((name, bytes)) = fetch_origin(&origin).await {
                    data = Some(KeptData {
                        name,
                        fingerprint: study.data.fingerprint.clone(),
                        bytes,
                    });
                }
            }
        }
        let note = by_id(&doc, "autosave-status");
        match store::save(&text, data.as_ref()).await {
            Ok(()) => {
                let mut p = page.borrow_mut();
                if data.is_some() {
                    p.study.kept_fingerprint = Some(study.data.fingerprint.clone());
                }
                p.study.saves += 1;
                let _ = note.set_attribute("data-saves", &p.study.saves.to_string());
                let time = js_sys::Date::new_0().to_locale_time_string("en-GB");
                note.set_text_content(Some(&format!(
                    "Kept in this browser's own storage on this computer at {}; a closed tab or a crash loses nothing.",
                    String::from(time)
                )));
            }
            Err(_) => note.set_text_content(Some(
                "This browser does not let the page keep a copy; save the study to keep your work.",
            )),
        }
    });
}

/// At start: restore the browser's copy, if there is one.
fn restore(page: &Shared) {
    let page = page.clone();
    spawn_local(async move {
        let doc = page.borrow().doc.clone();
        let Ok(Some((text, data))) = store::load().await else {
            return;
        };
        let study = match read_study(text.as_bytes()) {
            Ok(s) => s,
            Err(e) => {
                return status(
                    &doc,
                    &format!(
                    "The copy kept in this browser could not be used ({e}); it was left as it is."
                ),
                    true,
                )
            }
        };
        let Some(data) = data.filter(|d| d.fingerprint == study.data.fingerprint) else {
            return;
        };
        if page.borrow().report.is_some() {
            return; // the user loaded something meanwhile
        }
        {
            let mut p = page.borrow_mut();
            p.study.restoring = true;
            p.study.kept_fingerprint = Some(data.fingerprint.clone());
            p.study.pending = Some(Pending {
                study: study.clone(),
                source: Source::Restored,
                as_new_data: false,
            });
        }
        status(
            &doc,
            &format!(
                "Restoring the notebook kept in this browser ({}, {} run(s))…",
                data.name,
                study.runs.len()
            ),
            false,
        );
        load_origin(
            &page,
            Origin::Bytes(data.name, data.bytes),
            settings_of(&study.data.reading),
            false,
        );
    });
}

/// The study bar's controls, and the restore at start.
pub fn listen(page: &Shared) {
    let doc = page.borrow().doc.clone();
    let pg = page.clone();
    on(&by_id(&doc, "study-save"), "click", move |_: Event| {
        save(&pg)
    });
    let pg = page.clone();
    on_file_chosen(&by_id(&doc, "study-input"), move |file| open(&pg, file));
    let pg = page.clone();
    on(&by_id(&doc, "study-mismatch"), "click", move |e: Event| {
        let id = e
            .target()
            .and_then(|t| t.dyn_into::<web_sys::Element>().ok())
            .map(|t| t.id())
            .unwrap_or_default();
        match id.as_str() {
            "study-as-new" => {
                if let Some(w) = pg.borrow_mut().study.pending.as_mut() {
                    w.as_new_data = true;
                }
                apply(&pg);
            }
            "study-drop" => {
                let doc = {
                    let mut p = pg.borrow_mut();
                    p.study.pending = None;
                    p.study.restoring = false;
                    p.doc.clone()
                };
                show(&doc, "study-mismatch", false);
                status(
                    &doc,
                    "The study is put aside; the notebook goes on with this file.",
                    false,
                );
                autosave(&pg);
            }
            _ => {}
        }
    });
    let pg = page.clone();
    on(&by_id(&doc, "study-forget"), "click", move |_: Event| {
        let pg = pg.clone();
        spawn_local(async move {
            let doc = pg.borrow().doc.clone();
            let note = by_id(&doc, "autosave-status");
            match store::forget().await {
                Ok(()) => {
                    pg.borrow_mut().study.kept_fingerprint = None;
                    let _ = note.set_attribute("data-saves", "cleared");
                    note.set_text_content(Some("The copy kept in this browser is cleared. It is written again at your next change; close the tab without changing anything to leave none."));
                }
                Err(_) => note.set_text_content(Some("The browser's storage could not be cleared; clear this site's data in the browser's settings.")),
            }
        });
    });
    restore(page);
}
