//! The page controller: wires the notebook's steps in web/index.html to the worker. It keeps
//! the page's state (the current table's report, the roles the user gave the columns, the
//! file to restore after a cancel, the model runs and their results) and redraws a step when
//! its inputs change. The model-runs step (form, progress, runs table, error chart) lives in
//! the `runs` module beside this file.
//!
//! Rendering builds HTML strings with every user-supplied text escaped ([`esc`]); events on
//! generated controls are caught by one listener per container (event delegation).

use std::cell::RefCell;
use std::rc::Rc;

use js_sys::{Array, Object, Reflect, Uint8Array};
use spinney_core::data::{ColumnSummary, Flag, Kind, TableReport};
use spinney_web::protocol::{
    FitDesign, Preview, ReadSettings, Reply, Request, MAX_FILE_BYTES, PROTOCOL_VERSION,
};
use wasm_bindgen::prelude::*;
use wasm_bindgen_futures::{spawn_local, JsFuture};
// The model-runs step; kept beside this file (a directory of its own, so Cargo does not take
// it for another binary).
#[path = "page/checks.rs"]
mod checks;
#[path = "page/compare.rs"]
mod compare;
#[path = "page/insight.rs"]
mod insight;
#[path = "page/measured.rs"]
mod measured;
#[path = "page/pool.rs"]
mod pool;
#[path = "page/report.rs"]
mod report;
#[path = "page/runs.rs"]
mod runs;
#[path = "page/score.rs"]
mod score;
#[path = "page/store.rs"]
mod store;
#[path = "page/study.rs"]
mod study;
#[path = "page/threshold.rs"]
mod threshold;

use web_sys::{
    Document, DragEvent, Element, Event, File, HtmlInputElement, HtmlSelectElement, MessageEvent,
    Worker,
};

/// What a column is for in the models to come.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Role {
    Outcome,
    Predictor,
    Group,
    Weight,
    Ignore,
}

impl Role {
    const ALL: [Role; 5] = [
        Role::Outcome,
        Role::Predictor,
        Role::Group,
        Role::Weight,
        Role::Ignore,
    ];

    fn key(self) -> &'static str {
        match self {
            Role::Outcome => "outcome",
            Role::Predictor => "predictor",
            Role::Group => "group",
            Role::Weight => "weight",
            Role::Ignore => "ignore",
        }
    }

    fn label(self) -> &'static str {
        match self {
            Role::Outcome => "outcome (to predict)",
            Role::Predictor => "predictor",
            Role::Group => "group / record id",
            Role::Weight => "row weight",
            Role::Ignore => "leave out",
        }
    }

    fn from_key(key: &str) -> Option<Role> {
        Role::ALL.into_iter().find(|r| r.key() == key)
    }
}

/// Where the current table's bytes came from, so it can be read again after a cancel.
#[derive(Clone)]
enum Origin {
    File(File),
    Demo(String),
    /// Bytes the page holds itself: a study's included data or the browser's kept copy
    /// (name, bytes; copied each time, as sending to the worker hands the copy over).
    Bytes(String, Uint8Array),
}

struct Page {
    doc: Document,
    worker: Worker,
    ready: bool,
    /// Sent once the worker says it is ready.
    queued: Vec<(Request, Option<Uint8Array>)>,
    next_id: u32,
    /// The request being worked on, if any.
    busy: Option<u32>,
    /// The origin of the request in flight, and of the table last read successfully.
    pending_origin: Option<Origin>,
    good_origin: Option<Origin>,
    /// After a cancel: read the previous file again without disturbing the page.
    restoring: bool,
    report: Option<TableReport>,
    preview: Option<Preview>,
    settings: ReadSettings,
    roles: Vec<Role>,
    /// The model-runs step.
    fits: runs::Fits,
    /// The study file and the browser's kept copy.
    study: study::StudyState,
    /// The insight step.
    insight: insight::Insight,
    /// The threshold step.
    threshold: threshold::Threshold,
    /// The scoring step.
    scoring: score::Scoring,
    /// Extra workers growing shares of a forest.
    pool: pool::Pool,
    /// Step 2's checks computed from the records.
    checks: checks::Checks,
    /// The class called positive of a two-class outcome, when the user chose one.
    positive: Option<String>,
}

type Shared = Rc<RefCell<Page>>;

fn esc(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

fn by_id(doc: &Document, id: &str) -> Element {
    doc.get_element_by_id(id).unwrap_or_else(|| {
        // The ids are fixed in web/index.html; a missing one is a build defect, not user data.
        let e = doc.create_element("div").expect("create_element");
        web_sys::console::error_1(&format!("page element #{id} is missing").into());
        e
    })
}

fn set_html(doc: &Document, id: &str, html: &str) {
    by_id(doc, id).set_inner_html(html);
}

fn show(doc: &Document, id: &str, visible: bool) {
    let el = by_id(doc, id);
    if visible {
        let _ = el.remove_attribute("hidden");
    } else {
        let _ = el.set_attribute("hidden", "");
    }
}

fn fmt_value(c: &ColumnSummary, x: f64) -> String {
    spinney_core::data::format_statistic(c.kind, x)
}

fn default_role(c: &ColumnSummary) -> Role {
    if c.flags.contains(&Flag::Identifier) {
        Role::Group
    } else if c.kind == Kind::Text
        || c.flags
            .iter()
            .any(|f| matches!(f, Flag::Constant | Flag::AllMissing))
    {
        Role::Ignore
    } else {
        Role::Predictor
    }
}

// ---------------------------------------------------------------------------- worker

fn spawn_worker(page: &Shared) -> Worker {
    let worker = match Worker::new(&worker_url()) {
        Ok(w) => w,
        Err(e) => {
            web_sys::console::error_2(&"cannot start the worker".into(), &e);
            panic!("this browser cannot start a Web Worker, which Spinney needs");
        }
    };
    let weak = Rc::downgrade(page);
    let on_message = Closure::<dyn FnMut(MessageEvent)>::new(move |event: MessageEvent| {
        let Some(page) = weak.upgrade() else { return };
        let msg = Reflect::get(&event.data(), &"msg".into()).unwrap_or(JsValue::UNDEFINED);
        match serde_wasm_bindgen::from_value::<Reply>(msg) {
            Ok(reply) => on_reply(&page, reply),
            Err(e) => show_message(&page.borrow().doc, &format!("The worker sent a message the page does not understand ({e}). Reload the page."), true),
        }
    });
    worker.set_onmessage(Some(on_message.as_ref().unchecked_ref()));
    on_message.forget();
    worker
}

/// A value the single-file build's start-up script put on `window` (scripts/build-single-file):
/// `spinneyWorkerUrl`, the worker as a blob URL, and `spinneyEmbedded`, the demo files as
/// data URLs by path. `None` in the ordinary build.
fn single_file_global(path: &[&str]) -> Option<String> {
    let mut value: JsValue = web_sys::window()?.into();
    for key in path {
        value = Reflect::get(&value, &(*key).into()).ok()?;
    }
    value.as_string()
}

/// The worker's script: the built worker_loader.js, or the single file's blob URL.
fn worker_url() -> String {
    single_file_global(&["spinneyWorkerUrl"]).unwrap_or_else(|| "./worker_loader.js".into())
}

/// Registers the service worker that keeps a copy of the page for use without a network
/// (web/offline-worker.js), and says in the page what holds. Not from a file (browsers allow
/// service workers only on http(s)), where the page needs no network anyway.
fn keep_offline_copy(doc: &Document) {
    let note = by_id(doc, "offline-note");
    let Some(window) = web_sys::window() else {
        return;
    };
    if window.location().protocol().is_ok_and(|p| p == "file:") {
        note.set_text_content(Some(
            "Opened from a file on this computer: it needs no network at all.",
        ));
        let _ = note.set_attribute("data-offline", "file");
        return;
    }
    let navigator = window.navigator();
    if !Reflect::has(&navigator, &"serviceWorker".into()).unwrap_or(false) {
        note.set_text_content(Some("This browser keeps no offline copy of the page at this address (it is not a secure one); the page still sends nothing out."));
        return;
    }
    let container = navigator.service_worker();
    let registered = container.register("./offline-worker.js");
    spawn_local(async move {
        let ready = match JsFuture::from(registered).await {
            Ok(_) => container.ready().map(JsFuture::from),
            Err(e) => Err(e),
        };
        let ready = match ready {
            Ok(r) => r.await,
            Err(e) => Err(e),
        };
        match ready {
            Ok(_) => {
                note.set_text_content(Some("A copy of this page is kept in this browser, so it also opens and works with the network off."));
                let _ = note.set_attribute("data-offline", "ready");
            }
            Err(e) => {
                web_sys::console::warn_2(&"no offline copy".into(), &e);
                note.set_text_content(Some("This browser did not keep an offline copy of the page; it needs this address to open again. Your data is not affected."));
            }
        }
    });
}

fn send(page: &Shared, request: Request, bytes: Option<Uint8Array>) {
    let mut p = page.borrow_mut();
    if !p.ready {
        p.queued.push((request, bytes));
        return;
    }
    post_now(&p.worker, &request, bytes.as_ref());
}

/// Slots in the stop list: more insight requests than this are never waiting at once.
const STOP_SLOTS: u32 = 32;

thread_local! {
    /// Ids of requests the page wants stopped, shared with the workers (a SharedArrayBuffer
    /// of [`STOP_SLOTS`] numbers, read by a busy worker between trees; see `stopped` in
    /// worker.rs), and the next slot to write. `None` where the page is not cross-origin
    /// isolated (opened from a file, or served without the two headers), which browsers
    /// require for shared memory.
    static STOP_LIST: RefCell<Option<(js_sys::Int32Array, u32)>> = RefCell::new(
        web_sys::window()
            .and_then(|w| Reflect::get(&w, &"crossOriginIsolated".into()).ok())
            .and_then(|v| v.as_bool())
            .filter(|isolated| *isolated)
            .map(|_| {
                let shared = js_sys::SharedArrayBuffer::new(4 * STOP_SLOTS);
                (js_sys::Int32Array::new(&shared), 0)
            }),
    );
}

/// Asks the workers to stop request `id` where they can see it (see [`STOP_LIST`]); false
/// when the page has no shared memory and the worker cannot be told.
fn stop_request(id: u32) -> bool {
    STOP_LIST.with(|s| {
        let mut s = s.borrow_mut();
        let Some((list, next)) = s.as_mut() else {
            return false;
        };
        let _ = js_sys::Atomics::store(&*list, *next, id as i32);
        *next = (*next + 1) % STOP_SLOTS;
        true
    })
}

fn post_now(worker: &Worker, request: &Request, bytes: Option<&Uint8Array>) {
    let envelope = Object::new();
    let msg = serde_wasm_bindgen::to_value(request).unwrap_or(JsValue::NULL);
    let _ = Reflect::set(&envelope, &"msg".into(), &msg);
    STOP_LIST.with(|s| {
        if let Some((list, _)) = s.borrow().as_ref() {
            let _ = Reflect::set(&envelope, &"stop".into(), list);
        }
    });
    let transfer = Array::new();
    if let Some(b) = bytes {
        let _ = Reflect::set(&envelope, &"bytes".into(), b);
        transfer.push(&b.buffer());
    }
    if let Err(e) = worker.post_message_with_transfer(&envelope, &transfer) {
        web_sys::console::error_2(&"posting to the worker failed".into(), &e);
    }
}

fn on_reply(page: &Shared, reply: Reply) {
    match reply {
        Reply::Ready { v } => {
            let mut p = page.borrow_mut();
            if v != PROTOCOL_VERSION {
                show_message(
                    &p.doc,
                    "The page and its worker are from different versions. Reload the page.",
                    false,
                );
                return;
            }
            p.ready = true;
            let queued = std::mem::take(&mut p.queued);
            for (request, bytes) in queued {
                post_now(&p.worker, &request, bytes.as_ref());
            }
        }
        Reply::Progress {
            id,
            stage,
            done,
            total,
        } => {
            let p = page.borrow();
            if p.fits.in_flight.as_ref().is_some_and(|f| f.id == id) {
                runs::progress(&p, done, total);
            } else if p.insight.asked.contains(&id) {
                insight::progress(&p, &stage, done, total);
            } else if p.busy == Some(id) && !p.restoring {
                let bar = by_id(&p.doc, "read-progress");
                let share = if total == 0 {
                    0.0
                } else {
                    done as f64 / total as f64
                };
                let _ = bar.set_attribute("value", &format!("{share:.3}"));
                by_id(&p.doc, "read-stage")
                    .set_text_content(Some(&format!("{stage}: {:.0}%", 100.0 * share)));
            }
        }
        Reply::Table {
            id,
            name,
            read_seconds,
            worker_memory_bytes,
            report,
            preview,
            settings,
        } => {
            let mut p = page.borrow_mut();
            if p.busy != Some(id) {
                return;
            }
            p.busy = None;
            let restoring = std::mem::replace(&mut p.restoring, false);
            if let Some(origin) = p.pending_origin.take() {
                p.good_origin = Some(origin);
            }
            if !restoring {
                // New data or new reading settings: the runs describe the table before.
                p.fits.mark_stale();
            }
            // Keep the roles the user chose when the same columns come back (a re-read).
            let old: Vec<(String, Role)> = p
                .report
                .as_ref()
                .map(|r| {
                    r.columns
                        .iter()
                        .map(|c| c.name.clone())
                        .zip(p.roles.iter().copied())
                        .collect()
                })
                .unwrap_or_default();
            let same_file = p
                .report
                .as_ref()
                .is_some_and(|r| r.fingerprint_sha256 == report.fingerprint_sha256);
            p.roles = report
                .columns
                .iter()
                .map(|c| {
                    old.iter()
                        .find(|(n, _)| same_file && *n == c.name)
                        .map(|(_, r)| *r)
                        .unwrap_or_else(|| default_role(c))
                })
                .collect();
            p.report = Some(*report);
            p.preview = Some(preview);
            p.settings = settings;
            drop(p);
            let p = page.borrow();
            reading_done(&p.doc);
            if !restoring {
                show_message(&p.doc, "", false);
            }
            let _ = name;
            render_data(&p);
            // Figures for the browser benchmark (tests/e2e/bench-read.mjs) and the curious.
            let result = by_id(&p.doc, "data-result");
            let _ = result.set_attribute("data-read-seconds", &format!("{read_seconds}"));
            let _ = result.set_attribute("data-worker-memory", &format!("{worker_memory_bytes}"));
            if let Some(facts) = p.doc.query_selector(".facts").ok().flatten() {
                let _ = facts
                    .insert_adjacent_html("beforeend", &format!(" · read in {read_seconds:.2} s"));
            }
            render_columns(&p);
            drop(p);
            checks::forget(page);
            runs_changed(page);
            study::table_read(page);
            runs::table_in(page, restoring);
        }
        Reply::Fitted { id, result } => runs::fitted(page, id, *result),
        Reply::Predictions { id, result } => threshold::arrived(page, id, *result),
        Reply::Scored { id, result } => score::scored(page, id, *result),
        Reply::Explained { id, result } => insight::arrived(page, id, *result),
        Reply::ModelFiles { id, files } => study::models_arrived(page, id, files),
        Reply::Warnings {
            id,
            warnings,
            refused,
            classes,
        } => checks::arrived(page, id, warnings, refused, classes),
        // Shares of a forest or of a judging's splits come from the extra workers (see
        // pool.rs), not this one.
        Reply::Part { .. } | Reply::Folds { .. } => {}
        Reply::Failed {
            id,
            message,
            kept_previous,
        } => {
            if page.borrow().threshold.asked == Some(id) {
                threshold::refused(page, &message);
                return;
            }
            if insight::owns(page, id) {
                insight::refused(page, id, &message);
                return;
            }
            if page.borrow().scoring.asked == Some(id) {
                score::refused(page, &message);
                return;
            }
            if study::saving(page, id) {
                study::models_refused(page, &message);
                return;
            }
            if page
                .borrow()
                .fits
                .in_flight
                .as_ref()
                .is_some_and(|f| f.id == id)
            {
                runs::failed(page, &message);
                return;
            }
            let mut p = page.borrow_mut();
            if id != 0 && p.busy != Some(id) {
                return;
            }
            p.busy = None;
            p.pending_origin = None;
            p.restoring = false;
            p.fits.after_read = false;
            p.study.read_failed();
            reading_done(&p.doc);
            let tail = if kept_previous && p.report.is_some() {
                " The table below is still the one you loaded before."
            } else {
                ""
            };
            show_message(&p.doc, &format!("{message}.{tail}"), true);
        }
    }
}

fn show_message(doc: &Document, text: &str, is_error: bool) {
    let el = by_id(doc, "message");
    el.set_text_content(Some(text));
    el.set_class_name(if is_error { "message error" } else { "message" });
    show(doc, "message", !text.is_empty());
}

fn reading_started(doc: &Document, what: &str) {
    by_id(doc, "read-what").set_text_content(Some(&format!("Reading {what}…")));
    let _ = by_id(doc, "read-progress").set_attribute("value", "0");
    by_id(doc, "read-stage").set_text_content(Some(""));
    show(doc, "read-status", true);
}

fn reading_done(doc: &Document) {
    show(doc, "read-status", false);
}

// ---------------------------------------------------------------------------- loading

fn start_read(
    page: &Shared,
    origin: Origin,
    name: String,
    bytes: Uint8Array,
    settings: ReadSettings,
    restoring: bool,
) {
    let id = {
        let mut p = page.borrow_mut();
        p.next_id += 1;
        p.busy = Some(p.next_id);
        p.pending_origin = Some(origin);
        p.restoring = restoring;
        if !restoring {
            reading_started(&p.doc, &name);
        }
        p.next_id
    };
    send(
        page,
        Request::Read {
            v: PROTOCOL_VERSION,
            id,
            name,
            settings,
        },
        Some(bytes),
    );
}

/// The file's name and bytes (a fresh array the caller may hand over to a worker), from the
/// file the user chose, the demo file in this page's own folder (or embedded in the one-file
/// build) or bytes the page holds; the message to show when they cannot be had.
async fn fetch_origin(origin: &Origin) -> Result<(String, Uint8Array), String> {
    let (name, buffer) = match origin {
        Origin::File(file) => {
            // Refused before reading: a file the tab cannot hold would take it down.
            let bytes = file.size() as u64;
            if bytes > MAX_FILE_BYTES {
                let reason = spinney_core::Error::from(spinney_core::ErrorKind::TooBig {
                    bytes,
                    limit: MAX_FILE_BYTES,
                });
                return Err(format!(
                    "{} was not read: {reason}, or keep a sample of its rows. Nothing on this page changed.",
                    file.name()
                ));
            }
            (file.name(), JsFuture::from(file.array_buffer()).await)
        }
        Origin::Bytes(name, bytes) => return Ok((name.clone(), bytes.slice(0, bytes.length()))),
        Origin::Demo(path) => {
            let name = path.rsplit('/').next().unwrap_or(path).to_string();
            let window = web_sys::window().expect("window");
            let url = single_file_global(&["spinneyEmbedded", path.as_str()])
                .unwrap_or_else(|| path.clone());
            let response = match JsFuture::from(window.fetch_with_str(&url)).await {
                Ok(r) => r.unchecked_into::<web_sys::Response>(),
                Err(_) => {
                    return Err(format!(
                        "The demo file {name} could not be loaded from this page's own folder."
                    ))
                }
            };
            match response.array_buffer() {
                Ok(promise) => (name, JsFuture::from(promise).await),
                Err(e) => (name, Err(e)),
            }
        }
    };
    match buffer {
        Ok(buffer) => Ok((name, Uint8Array::new(&buffer))),
        Err(_) => Err(format!("{name} could not be opened by the browser. Check that the file still exists and you may read it.")),
    }
}

fn load_origin(page: &Shared, origin: Origin, settings: ReadSettings, restoring: bool) {
    let page = page.clone();
    spawn_local(async move {
        let doc = page.borrow().doc.clone();
        match fetch_origin(&origin).await {
            Ok((name, bytes)) => start_read(&page, origin, name, bytes, settings, restoring),
            Err(message) => show_message(&doc, &message, true),
        }
    });
}

/// Offers `bytes` to the user as a download named `name` (a Blob and an object URL: nothing
/// leaves the machine).
fn download(doc: &Document, name: &str, bytes: &[u8], mime: &str) {
    let parts = Array::of1(&Uint8Array::from(bytes));
    let options = web_sys::BlobPropertyBag::new();
    options.set_type(mime);
    if let Ok(blob) = web_sys::Blob::new_with_u8_array_sequence_and_options(&parts, &options) {
        offer_blob(doc, name, &blob);
    }
}

/// Offers `blob` as a download named `name` (an object URL and a temporary link).
fn offer_blob(doc: &Document, name: &str, blob: &web_sys::Blob) {
    let Ok(url) = web_sys::Url::create_object_url_with_blob(blob) else {
        return;
    };
    if let Ok(a) = doc.create_element("a") {
        let _ = a.set_attribute("href", &url);
        let _ = a.set_attribute("download", name);
        a.unchecked_ref::<web_sys::HtmlElement>().click();
    }
    // Revoked after the browser has taken the download.
    let revoke = Closure::once_into_js(move || {
        let _ = web_sys::Url::revoke_object_url(&url);
    });
    if let Some(w) = web_sys::window() {
        let _ =
            w.set_timeout_with_callback_and_timeout_and_arguments_0(revoke.unchecked_ref(), 60_000);
    }
}

fn reread(page: &Shared, settings: ReadSettings) {
    let id = {
        let mut p = page.borrow_mut();
        if p.report.is_none() || p.busy.is_some() {
            return;
        }
        p.next_id += 1;
        p.busy = Some(p.next_id);
        reading_started(&p.doc, "the file again");
        p.next_id
    };
    send(
        page,
        Request::Reread {
            v: PROTOCOL_VERSION,
            id,
            settings,
        },
        None,
    );
}

/// The runs changed (a fit, a cancel, new data or roles): the steps that use them redraw.
fn runs_changed(page: &Shared) {
    checks::refresh(page);
    insight::refresh(page);
    threshold::refresh(page);
    score::refresh(&mut page.borrow_mut());
    report::refresh(&page.borrow());
}

/// Stops the worker mid-read or mid-fit. The worker is replaced and the previous table read
/// again from its origin, so nothing already loaded is lost; the runs table is the page's own
/// and stays as it was.
fn cancel(page: &Shared, note: &str) {
    let worker = spawn_worker(page);
    let good = {
        let mut p = page.borrow_mut();
        p.worker.terminate();
        p.worker = worker;
        p.ready = false;
        p.queued.clear();
        p.busy = None;
        p.pending_origin = None;
        p.fits.in_flight = None;
        p.fits.after_read = false;
        p.fits.forget_models();
        p.threshold.asked = None;
        p.insight.asked.clear();
        p.scoring.asked = None;
        p.study.cancelled();
        p.pool.stop();
        p.checks = checks::Checks::default();
        reading_done(&p.doc);
        runs::fit_done(&p.doc);
        show_message(&p.doc, note, false);
        p.good_origin.clone().map(|o| (o, p.settings.clone()))
    };
    if let Some((origin, settings)) = good {
        load_origin(page, origin, settings, true);
    }
    runs::render(&page.borrow());
    runs_changed(page);
}

// ---------------------------------------------------------------------------- rendering

/// The file's name, size and how it was read, in one line (the data step and the report).
fn data_facts(report: &TableReport) -> String {
    format!(
        "<strong>{}</strong>: {} rows, {} columns · {} · {:.1} kB",
        esc(&report.file),
        report.rows,
        report.columns.len(),
        esc(&report.source.description),
        report.bytes as f64 / 1000.0
    )
}

fn render_data(p: &Page) {
    let Some(report) = &p.report else { return };
    let mut html = String::new();
    html += &format!("<p class=\"facts\">{}</p>", data_facts(report));
    html += &format!(
        "<p class=\"fingerprint\">Fingerprint (SHA-256 of the file): <code>{}</code></p>",
        esc(&report.fingerprint_sha256)
    );
    if !report.notices.is_empty() {
        html += "<ul class=\"notices\">";
        for n in &report.notices {
            html += &format!("<li>{}</li>", esc(n));
        }
        html += "</ul>";
    }
    // Reading settings: sheet and extra missing-value codes.
    html += "<div class=\"read-settings\">";
    if let Some(sheets) = report.source.sheets.as_ref().filter(|s| s.len() > 1) {
        html += "<label>Sheet <select id=\"sheet-choice\">";
        for s in sheets {
            let selected = if report.source.sheet.as_deref() == Some(s) {
                " selected"
            } else {
                ""
            };
            html += &format!("<option{selected}>{}</option>", esc(s));
        }
        html += "</select></label>";
    }
    html += &format!(
        "<label>Extra codes meaning “not recorded”, comma-separated <input id=\"missing-codes\" type=\"text\" placeholder=\"e.g. -999, unknown\" value=\"{}\"></label> <button id=\"apply-codes\" type=\"button\" class=\"button\">Read again</button>",
        esc(&p.settings.missing.join(", "))
    );
    html += "</div>";
    if let Some(preview) = &p.preview {
        html += &format!("<details class=\"preview\" open><summary>First {} rows</summary><div class=\"scroll\"><table class=\"grid\"><thead><tr>", preview.rows.len());
        for c in &report.columns {
            html += &format!("<th scope=\"col\">{}</th>", esc(&c.name));
        }
        html += "</tr></thead><tbody>";
        for row in &preview.rows {
            html += "<tr>";
            for cell in row {
                match cell {
                    Some(v) => html += &format!("<td>{}</td>", esc(v)),
                    None => html += "<td class=\"gap\" title=\"missing\">·</td>",
                }
            }
            html += "</tr>";
        }
        html += "</tbody></table></div></details>";
    }
    set_html(&p.doc, "data-result", &html);
}

fn summary_cell(c: &ColumnSummary) -> String {
    if !c.top.is_empty() {
        let shown: Vec<String> = c
            .top
            .iter()
            .map(|t| format!("{} <span class=\"count\">{}</span>", esc(&t.value), t.count))
            .collect();
        let more = if c.distinct > c.top.len() {
            format!(" … {} more", c.distinct - c.top.len())
        } else {
            String::new()
        };
        return format!("{}{more}", shown.join(", "));
    }
    match (c.min, c.median, c.max) {
        (Some(lo), Some(mid), Some(hi)) => format!(
            "{} · <span class=\"mid\">{}</span> · {}{}",
            fmt_value(c, lo),
            fmt_value(c, mid),
            fmt_value(c, hi),
            c.unit.as_deref().map_or(String::new(), |u| format!(
                " <span class=\"unit\">({})</span>",
                esc(u)
            ))
        ),
        _ => "—".to_string(),
    }
}

fn render_columns(p: &Page) {
    let Some(report) = &p.report else { return };
    show(&p.doc, "step-roles", true);
    let mut html = String::from(
        "<div class=\"scroll\"><table class=\"columns\"><thead><tr><th scope=\"col\">Column</th><th scope=\"col\">Kind</th><th scope=\"col\">Use as</th><th scope=\"col\">Missing</th><th scope=\"col\">Distinct</th><th scope=\"col\">Lowest · middle · highest, or most frequent</th><th scope=\"col\">Look out</th></tr></thead><tbody>",
    );
    for (i, c) in report.columns.iter().enumerate() {
        let role = p.roles.get(i).copied().unwrap_or(Role::Ignore);
        html += &format!(
            "<tr class=\"role-{}\"><th scope=\"row\">{}</th>",
            role.key(),
            esc(&c.name)
        );
        html += &format!(
            "<td><select data-col=\"{i}\" data-field=\"kind\" aria-label=\"kind of {}\">",
            esc(&c.name)
        );
        for k in Kind::ALL {
            let sel = if k == c.kind { " selected" } else { "" };
            html += &format!(
                "<option value=\"{}\"{sel}>{}</option>",
                k.label(),
                k.label()
            );
        }
        html += "</select></td>";
        html += &format!(
            "<td><select data-col=\"{i}\" data-field=\"role\" aria-label=\"use of {}\">",
            esc(&c.name)
        );
        for r in Role::ALL {
            let sel = if r == role { " selected" } else { "" };
            html += &format!("<option value=\"{}\"{sel}>{}</option>", r.key(), r.label());
        }
        html += "</select></td>";
        html += &format!(
            "<td class=\"num\">{} <meter min=\"0\" max=\"1\" value=\"{:.3}\" title=\"{:.1}% missing\"></meter> <span class=\"share\">{:.1}%</span></td>",
            c.missing, c.missing_share, 100.0 * c.missing_share, 100.0 * c.missing_share
        );
        html += &format!(
            "<td class=\"num\">{}</td><td>{}</td>",
            c.distinct,
            summary_cell(c)
        );
        let flags: Vec<String> = c
            .flags
            .iter()
            .map(|f| {
                format!(
                    "<span class=\"flag\" title=\"{}\">{}</span>",
                    esc(f.advice()),
                    f.label()
                )
            })
            .collect();
        html += &format!("<td>{}</td></tr>", flags.join(" "));
    }
    html += "</tbody></table></div>";
    set_html(&p.doc, "columns", &html);
    render_roles_summary(p);
    runs::render(p);
}

/// The plain-words account of the chosen roles, with what would stop or mislead a model.
fn render_roles_summary(p: &Page) {
    let Some(report) = &p.report else { return };
    let cols = &report.columns;
    let named = |role: Role| -> Vec<&ColumnSummary> {
        cols.iter()
            .zip(&p.roles)
            .filter(|(_, r)| **r == role)
            .map(|(c, _)| c)
            .collect()
    };
    let outcome = named(Role::Outcome);
    let predictors = named(Role::Predictor);
    let groups = named(Role::Group);
    let weights = named(Role::Weight);
    let mut lines: Vec<String> = Vec::new();
    let mut warnings: Vec<String> = Vec::new();
    match outcome.first() {
        None => lines.push("<strong>No outcome yet.</strong> Pick the column the models should learn to predict: set its “Use as” to outcome.".into()),
        Some(o) => {
            let what = match o.kind {
                Kind::YesNo | Kind::Category => {
                    let parts: Vec<String> = o
                        .top
                        .iter()
                        .map(|t| format!("{} {} ({:.1}%)", esc(&t.value), t.count, 100.0 * t.count as f64 / (report.rows - o.missing).max(1) as f64))
                        .collect();
                    format!("{} classes: {}", o.distinct, parts.join(", "))
                }
                _ => format!("a number from {} to {}", o.min.map_or("?".into(), |x| fmt_value(o, x)), o.max.map_or("?".into(), |x| fmt_value(o, x))),
            };
            lines.push(format!("<strong>Outcome:</strong> {} — {what}.", esc(&o.name)));
            if o.distinct < 2 {
                warnings.push(format!("The outcome {} has only one value; there is nothing to predict. Choose another column.", esc(&o.name)));
            }
            if o.kind == Kind::Text {
                warnings.push(format!("The outcome {} is free text with {} different values; set its kind to category if those are classes.", esc(&o.name), o.distinct));
            }
            if o.missing > 0 {
                warnings.push(format!("{} row(s) have no outcome; they will be left out of fitting and checking.", o.missing));
            }
            if matches!(o.kind, Kind::YesNo | Kind::Category) && o.distinct >= 2 {
                let smallest = o.top.iter().map(|t| t.count).min().unwrap_or(0);
                if !predictors.is_empty() {
                    let per = smallest as f64 / predictors.len() as f64;
                    lines.push(format!(
                        "The rarest class has {smallest} row(s): {per:.1} per predictor.{}",
                        if per < 10.0 { " That is few; expect unstable models and wide intervals (sample-size guidance for prediction models: Riley et al., BMJ 2020)." } else { "" }
                    ));
                }
            }
        }
    }
    lines.push(format!(
        "<strong>Predictors:</strong> {}.",
        if predictors.is_empty() {
            "none".to_string()
        } else {
            format!("{} column(s)", predictors.len())
        }
    ));
    if let Some(g) = groups.first() {
        let repeats = report.rows - g.missing > g.distinct;
        lines.push(format!(
            "<strong>Group / record id:</strong> {}{}.",
            esc(&g.name),
            if repeats {
                format!(
                    " — {} groups repeat over {} rows, so checks must keep each group together",
                    g.distinct,
                    report.rows - g.missing
                )
            } else {
                String::new()
            }
        ));
    }
    if groups.len() > 1 {
        warnings.push(
            "Only one column can be the group / record id; set the others to leave out.".into(),
        );
    }
    if let Some(w) = weights.first() {
        lines.push(format!("<strong>Row weight:</strong> {}.", esc(&w.name)));
        if !w.kind.is_numeric() {
            warnings.push(format!(
                "The weight column {} holds text; a weight must be a number.",
                esc(&w.name)
            ));
        } else if w.min.is_some_and(|m| m < 0.0) {
            warnings.push(format!(
                "The weight column {} has negative values; weights must be zero or more.",
                esc(&w.name)
            ));
        }
    }
    if weights.len() > 1 {
        warnings.push("Only one column can hold row weights.".into());
    }
    for c in &predictors {
        if c.flags.contains(&Flag::Identifier) {
            warnings.push(format!("{} looks like a record identifier; as a predictor it lets a model memorise records.", esc(&c.name)));
        }
        if c.kind == Kind::Text {
            warnings.push(format!("{} is free text ({} values); it cannot be used as a predictor as it is. Set its kind to category or leave it out.", esc(&c.name), c.distinct));
        }
        if c.flags.contains(&Flag::Constant) || c.flags.contains(&Flag::AllMissing) {
            warnings.push(format!(
                "{} carries no information (one value or none).",
                esc(&c.name)
            ));
        }
    }
    let mut html = String::new();
    for l in &lines {
        html += &format!("<p>{l}</p>");
    }
    if !warnings.is_empty() {
        html += "<ul class=\"warnings\">";
        for w in &warnings {
            html += &format!("<li>{w}</li>");
        }
        html += "</ul>";
    }
    set_html(&p.doc, "roles-summary", &html);
}

// ---------------------------------------------------------------------------- events

fn on<E: wasm_bindgen::convert::FromWasmAbi + 'static>(
    target: &Element,
    event: &str,
    f: impl FnMut(E) + 'static,
) {
    let closure = Closure::<dyn FnMut(E)>::new(f);
    let _ = target.add_event_listener_with_callback(event, closure.as_ref().unchecked_ref());
    closure.forget();
}

/// The element an event happened on (for listeners on a container).
fn target_element(e: &Event) -> Option<Element> {
    e.target().and_then(|t| t.dyn_into::<Element>().ok())
}

/// Calls `take` with the file chosen in the file `input`, then empties it so the same file
/// can be chosen again.
fn on_file_chosen(input: &Element, take: impl Fn(File) + 'static) {
    on(input, "change", move |e: Event| {
        let Some(input) = e
            .target()
            .and_then(|t| t.dyn_into::<HtmlInputElement>().ok())
        else {
            return;
        };
        if let Some(file) = input.files().and_then(|f| f.get(0)) {
            take(file);
        }
        input.set_value("");
    });
}

/// Makes `zone` take a dropped file (marked while a file is dragged over it).
fn on_file_dropped(zone: &Element, take: impl Fn(File) + 'static) {
    let z = zone.clone();
    on(zone, "dragover", move |e: DragEvent| {
        e.prevent_default();
        let _ = z.class_list().add_1("over");
    });
    let z = zone.clone();
    on(zone, "dragleave", move |_: DragEvent| {
        let _ = z.class_list().remove_1("over");
    });
    let z = zone.clone();
    on(zone, "drop", move |e: DragEvent| {
        e.prevent_default();
        let _ = z.class_list().remove_1("over");
        if let Some(file) = e
            .data_transfer()
            .and_then(|d| d.files())
            .and_then(|f| f.get(0))
        {
            take(file);
        }
    });
}

fn on_column_change(page: &Shared, event: Event) {
    let Some(target) = event
        .target()
        .and_then(|t| t.dyn_into::<HtmlSelectElement>().ok())
    else {
        return;
    };
    let Some(i) = target
        .get_attribute("data-col")
        .and_then(|c| c.parse::<usize>().ok())
    else {
        return;
    };
    let value = target.value();
    match target.get_attribute("data-field").as_deref() {
        Some("role") => {
            let mut p = page.borrow_mut();
            let Some(role) = Role::from_key(&value) else {
                return;
            };
            // Another outcome: its classes are not the earlier outcome's.
            if role == Role::Outcome || p.roles.get(i) == Some(&Role::Outcome) {
                p.positive = None;
            }
            // One outcome, one group column and one weight column at most: the newest wins.
            if matches!(role, Role::Outcome | Role::Group | Role::Weight) {
                for (j, r) in p.roles.iter_mut().enumerate() {
                    if j != i && *r == role {
                        *r = Role::Predictor;
                    }
                }
            }
            if let Some(r) = p.roles.get_mut(i) {
                *r = role;
            }
            p.fits.mark_stale();
            render_columns(&p);
            drop(p);
            runs_changed(page);
            study::autosave(page);
        }
        Some("kind") => {
            let settings = {
                let p = page.borrow();
                let Some(report) = &p.report else { return };
                let name = report.columns[i].name.clone();
                let mut settings = p.settings.clone();
                settings.kinds.retain(|(n, _)| *n != name);
                settings.kinds.push((name, value));
                settings
            };
            reread(page, settings);
        }
        _ => {}
    }
}

fn on_data_settings(page: &Shared, event: Event) {
    let Some(target) = event.target().and_then(|t| t.dyn_into::<Element>().ok()) else {
        return;
    };
    let doc = page.borrow().doc.clone();
    let mut settings = page.borrow().settings.clone();
    match target.id().as_str() {
        "apply-codes" => {
            let input: HtmlInputElement = by_id(&doc, "missing-codes").unchecked_into();
            settings.missing = input
                .value()
                .split(',')
                .map(|t| t.trim().to_string())
                .filter(|t| !t.is_empty())
                .collect();
        }
        "sheet-choice" if event.type_() == "change" => {
            let select: HtmlSelectElement = target.unchecked_into();
            settings.sheet = Some(select.value());
            settings.kinds.clear();
        }
        _ => return,
    }
    reread(page, settings);
}

fn take_file(page: &Shared, file: File) {
    let settings = study::reading_for_new_file(&page.borrow());
    load_origin(page, Origin::File(file), settings, false);
}

/// The model design the roles table describes: outcome, predictors and weight column, and
/// whether the outcome is a number. `None` until an outcome is chosen.
fn design_of(p: &Page) -> Option<(FitDesign, bool)> {
    let report = p.report.as_ref()?;
    let mut design = FitDesign::default();
    let mut regression = false;
    for (c, role) in report.columns.iter().zip(&p.roles) {
        match role {
            Role::Outcome => {
                design.outcome = c.name.clone();
                regression = c.kind.is_numeric() && c.kind != Kind::YesNo;
            }
            Role::Predictor => design.predictors.push(c.name.clone()),
            Role::Weight => design.weight = Some(c.name.clone()),
            // The first group column keeps records together in grouped folds.
            Role::Group if design.group.is_none() => design.group = Some(c.name.clone()),
            Role::Group | Role::Ignore => {}
        }
    }
    design.positive = p.positive.clone().filter(|_| !regression);
    (!design.outcome.is_empty()).then_some((design, regression))
}

fn main() {
    console_panic_hook();
    let window = web_sys::window().expect("a browser window");
    let doc = window.document().expect("a document");
    let page: Shared = Rc::new(RefCell::new(Page {
        doc: doc.clone(),
        worker: JsValue::NULL.unchecked_into(),
        ready: false,
        queued: Vec::new(),
        next_id: 0,
        busy: None,
        pending_origin: None,
        good_origin: None,
        restoring: false,
        report: None,
        preview: None,
        settings: ReadSettings::default(),
        roles: Vec::new(),
        fits: runs::Fits::default(),
        study: study::StudyState::default(),
        insight: insight::Insight::default(),
        threshold: threshold::Threshold::default(),
        scoring: score::Scoring::default(),
        pool: pool::Pool::default(),
        checks: checks::Checks::default(),
        positive: None,
    }));
    let worker = spawn_worker(&page);
    page.borrow_mut().worker = worker;
    by_id(&doc, "version").set_text_content(Some(spinney_core::VERSION));
    keep_offline_copy(&doc);

    let pg = page.clone();
    on_file_chosen(&by_id(&doc, "file-input"), move |file| take_file(&pg, file));
    let pg = page.clone();
    on_file_dropped(&by_id(&doc, "drop"), move |file| take_file(&pg, file));
    for (id, path) in [
        ("demo-surgery", "demo-data/surgery-complications.csv"),
        ("demo-survey", "demo-data/field-survey.csv"),
    ] {
        let pg = page.clone();
        on(&by_id(&doc, id), "click", move |_: Event| {
            load_origin(
                &pg,
                Origin::Demo(path.to_string()),
                ReadSettings::default(),
                false,
            );
        });
    }
    let pg = page.clone();
    on(&by_id(&doc, "cancel-read"), "click", move |_: Event| {
        cancel(&pg, "Reading cancelled.")
    });
    runs::listen(&page);
    compare::listen(&page);
    checks::listen(&page);
    insight::listen(&page);
    threshold::listen(&page);
    score::listen(&page);
    study::listen(&page);
    report::listen(&page);
    let pg = page.clone();
    on(&by_id(&doc, "columns"), "change", move |e: Event| {
        on_column_change(&pg, e)
    });
    let pg = page.clone();
    on(&by_id(&doc, "data-result"), "click", move |e: Event| {
        on_data_settings(&pg, e)
    });
    let pg = page.clone();
    on(&by_id(&doc, "data-result"), "change", move |e: Event| {
        on_data_settings(&pg, e)
    });
    let _ = by_id(&doc, "app").set_attribute("data-ready", "yes");
}

/// Shows Rust panics (program defects, never user data) in the console and on the page.
fn console_panic_hook() {
    std::panic::set_hook(Box::new(|info| {
        let text = format!("Spinney hit an internal error: {info}. Please reload the page; your files were not changed.");
        web_sys::console::error_1(&text.clone().into());
        if let Some(doc) = web_sys::window().and_then(|w| w.document()) {
            if let Some(el) = doc.get_element_by_id("message") {
                el.set_text_content(Some(&text));
                let _ = el.remove_attribute("hidden");
            }
        }
    }));
}
