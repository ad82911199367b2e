//! Extra Web Workers that grow shares of a forest's trees at the same time. Each holds its own
//! copy of the table (read from the same file with the same settings as the main worker),
//! fits trees `first .. first + count` ([`Request::FitPart`]) and sends them back as bytes;
//! when every share is in, the page hands them, joined in tree order, to the main worker
//! ([`Request::Assemble`]), which tallies them into the same forest one worker would have
//! grown (each tree draws only from its own seeded streams) and keeps it as a run.
//!
//! A run judged by refitting on splits (cross-validation, holdout, bootstrap) first spreads
//! its splits over the same workers ([`Request::FoldPart`]): each fits every n-th split and
//! sends the fits back; the page hands them all to the main worker ([`Request::FoldRuns`])
//! before the run's own fit, whose judging then uses them instead of fitting the splits
//! one after another. Each split draws only from its own seeded streams, so the figures
//! equal one worker's.
//!
//! The main worker stays free meanwhile; a cancel stops these workers with it.

use js_sys::{Reflect, Uint8Array};
use spinney_core::validate::FoldRun;
use spinney_web::protocol::{FitDesign, Judging, Reply, Request, PROTOCOL_VERSION};
use wasm_bindgen::prelude::*;
use web_sys::{MessageEvent, Worker};

use super::{fetch_origin, post_now, runs, send, Shared};

/// One extra worker.
struct Helper {
    worker: Worker,
    ready: bool,
    /// Sent once the worker says it is ready.
    queued: Vec<(Request, Option<Uint8Array>)>,
    /// The table it holds: the main table's fingerprint and reading settings.
    table: Option<String>,
}

/// A forest being grown in shares.
struct Job {
    id: u32,
    design: FitDesign,
    method: String,
    settings: Vec<(String, String)>,
    judging: Option<Judging>,
    /// (first tree, count) of each helper's share.
    shares: Vec<(usize, usize)>,
    parts: Vec<Option<Uint8Array>>,
    done: Vec<u64>,
    trees: usize,
    /// `performance.now()` when the shares were sent, and when the last came back.
    started: f64,
    finished: Option<f64>,
}

/// One helper's reply to a `FoldPart`: the splits in all, and its (split, fit) pairs.
type FoldShare = (usize, Vec<(usize, FoldRun)>);

/// A judging's splits being fitted in shares, before the run's own fit (`then`).
struct Folds {
    then: runs::Grow,
    /// Each helper's reply.
    replies: Vec<Option<FoldShare>>,
    /// Progress of each helper, in thousandths of its share.
    done: Vec<(u64, u64)>,
}

#[derive(Default)]
pub struct Pool {
    helpers: Vec<Helper>,
    job: Option<Job>,
    folds: Option<Folds>,
}

impl Pool {
    /// Stops every extra worker (a cancel); they are started afresh for the next forest.
    pub fn stop(&mut self) {
        for h in self.helpers.drain(..) {
            h.worker.terminate();
        }
        self.job = None;
        self.folds = None;
    }

    /// Wall-clock seconds the shares of fit `id` took, once all are in.
    pub fn seconds(&self, id: u32) -> Option<f64> {
        let job = self.job.as_ref().filter(|j| j.id == id)?;
        Some((job.finished? - job.started) / 1000.0)
    }
}

fn spawn(page: &Shared, index: usize) -> Worker {
    let worker = match Worker::new(&super::worker_url()) {
        Ok(w) => w,
        Err(e) => {
            web_sys::console::error_2(&"cannot start an extra worker".into(), &e);
            panic!("this browser cannot start another Web Worker");
        }
    };
    let weak = std::rc::Rc::downgrade(page);
    let on_message = Closure::<dyn FnMut(MessageEvent)>::new(move |event: MessageEvent| {
        let Some(page) = weak.upgrade() else { return };
        let data = event.data();
        let msg = Reflect::get(&data, &"msg".into()).unwrap_or(JsValue::UNDEFINED);
        let bytes = Reflect::get(&data, &"bytes".into())
            .ok()
            .filter(|b| b.is_instance_of::<Uint8Array>())
            .map(|b| b.unchecked_into::<Uint8Array>());
        match serde_wasm_bindgen::from_value::<Reply>(msg) {
            Ok(reply) => on_reply(&page, index, reply, bytes),
            Err(e) => runs::failed(&page, &format!("An extra worker sent a message the page does not understand ({e}); reload the page")),
        }
    });
    worker.set_onmessage(Some(on_message.as_ref().unchecked_ref()));
    on_message.forget();
    worker
}

fn post(page: &Shared, index: usize, request: Request, bytes: Option<Uint8Array>) {
    let mut p = page.borrow_mut();
    let h = &mut p.pool.helpers[index];
    if h.ready {
        post_now(&h.worker, &request, bytes.as_ref());
    } else {
        h.queued.push((request, bytes));
    }
}

/// Grows the forest of `Fit { id, design, method, settings, judging }` (of `trees` trees)
/// on `workers` extra workers, loading the table into those that do not hold it yet.
#[allow(clippy::too_many_arguments)]
pub fn start(
    page: &Shared,
    id: u32,
    design: FitDesign,
    method: String,
    settings: Vec<(String, String)>,
    judging: Option<Judging>,
    trees: usize,
    workers: usize,
) {
    let n = workers.min(trees).max(1);
    {
        let mut p = page.borrow_mut();
        // Shares as equal as can be, in tree order.
        let shares: Vec<(usize, usize)> = (0..n)
            .map(|k| {
                let first = trees * k / n;
                (first, trees * (k + 1) / n - first)
            })
            .collect();
        p.pool.job = Some(Job {
            id,
            design,
            method,
            settings,
            judging,
            parts: vec![None; n],
            done: vec![0; n],
            shares,
            trees,
            started: super::runs::now(),
            finished: None,
        });
    }
    dispatch(page, id, n);
}

/// Fits the splits of `then`'s judging on its `workers` extra workers, then grows `then`
/// with their fits handed to the main worker.
pub fn start_folds(page: &Shared, then: runs::Grow) {
    let (id, n) = (then.id, then.workers.max(1));
    page.borrow_mut().pool.folds = Some(Folds {
        then,
        replies: vec![None; n],
        done: vec![(0, 1); n],
    });
    dispatch(page, id, n);
}

/// Makes sure `n` extra workers exist and hold the main table, and sends each its share of
/// the job in hand (at once, or once it has read the table).
fn dispatch(page: &Shared, id: u32, n: usize) {
    let (key, origin, read_settings) = {
        let p = page.borrow();
        let Some(report) = &p.report else { return };
        (
            format!("{} {:?}", report.fingerprint_sha256, p.settings),
            p.good_origin.clone(),
            p.settings.clone(),
        )
    };
    while page.borrow().pool.helpers.len() < n {
        let index = page.borrow().pool.helpers.len();
        let worker = spawn(page, index);
        page.borrow_mut().pool.helpers.push(Helper {
            worker,
            ready: false,
            queued: Vec::new(),
            table: None,
        });
    }
    let stale: Vec<usize> = (0..n)
        .filter(|&i| page.borrow().pool.helpers[i].table.as_deref() != Some(key.as_str()))
        .collect();
    for i in (0..n).filter(|i| !stale.contains(i)) {
        send_work(page, i);
    }
    if stale.is_empty() {
        return;
    }
    // The others first read the table (the same bytes and settings as the main worker).
    let Some(origin) = origin else {
        runs::failed(
            page,
            "The table's file is not at hand any more; load it again",
        );
        return;
    };
    let page = page.clone();
    wasm_bindgen_futures::spawn_local(async move {
        let (name, bytes) = match fetch_origin(&origin).await {
            Ok(x) => x,
            Err(message) => return runs::failed(&page, &message),
        };
        for i in stale {
            page.borrow_mut().pool.helpers[i].table = Some(key.clone());
            let copy = Uint8Array::new(&bytes.buffer().slice(0));
            post(
                &page,
                i,
                Request::Read {
                    v: PROTOCOL_VERSION,
                    id,
                    name: name.clone(),
                    settings: read_settings.clone(),
                },
                Some(copy),
            );
        }
    });
}

/// Sends helper `i` its share of the splits when a judging is being spread, else of the
/// forest's trees.
fn send_work(page: &Shared, i: usize) {
    let request = {
        let p = page.borrow();
        match &p.pool.folds {
            Some(f) => {
                let g = &f.then;
                let Some(judging) = g.judging.clone() else {
                    return;
                };
                Some(Request::FoldPart {
                    v: PROTOCOL_VERSION,
                    id: g.id,
                    design: g.design.clone(),
                    method: g.method.clone(),
                    settings: g.settings.clone(),
                    judging,
                    share: i,
                    of: f.replies.len(),
                })
            }
            None => None,
        }
    };
    match request {
        Some(r) => post(page, i, r, None),
        None => send_share(page, i),
    }
}

/// Sends helper `i` its share of the job.
fn send_share(page: &Shared, i: usize) {
    let request = {
        let p = page.borrow();
        let Some(job) = &p.pool.job else { return };
        let (first, count) = job.shares[i];
        Request::FitPart {
            v: PROTOCOL_VERSION,
            id: job.id,
            design: job.design.clone(),
            method: job.method.clone(),
            settings: job.settings.clone(),
            first,
            count,
        }
    };
    post(page, i, request, None);
}

fn on_reply(page: &Shared, index: usize, reply: Reply, bytes: Option<Uint8Array>) {
    let folds_id = page.borrow().pool.folds.as_ref().map(|f| f.then.id);
    let job_id = folds_id.or(page.borrow().pool.job.as_ref().map(|j| j.id));
    match reply {
        Reply::Ready { v } => {
            let mut p = page.borrow_mut();
            if v != PROTOCOL_VERSION {
                drop(p);
                return runs::failed(
                    page,
                    "An extra worker is from another version; reload the page",
                );
            }
            let h = &mut p.pool.helpers[index];
            h.ready = true;
            for (request, bytes) in std::mem::take(&mut h.queued) {
                post_now(&h.worker, &request, bytes.as_ref());
            }
        }
        // The table is in: now its share.
        Reply::Table { id, .. } if Some(id) == job_id => send_work(page, index),
        Reply::Progress {
            id, done, total, ..
        } if folds_id == Some(id) => {
            let mut p = page.borrow_mut();
            let Some(f) = p.pool.folds.as_mut() else {
                return;
            };
            f.done[index] = (done, total.max(1));
            let share: f64 = f
                .done
                .iter()
                .map(|&(d, t)| d as f64 / t as f64)
                .sum::<f64>()
                / f.done.len() as f64;
            runs::progress(&p, (share * 1000.0) as u64, 1000);
        }
        Reply::Folds {
            id, count, runs, ..
        } if folds_id == Some(id) => folds_in(page, index, count, runs),
        Reply::Progress { id, done, .. } if Some(id) == job_id => {
            let mut p = page.borrow_mut();
            let Some(job) = p.pool.job.as_mut() else {
                return;
            };
            job.done[index] = done;
            let (sum, total) = (job.done.iter().sum(), job.trees as u64);
            runs::progress(&p, sum, total);
        }
        Reply::Part { id, first, .. } if Some(id) == job_id => {
            let assemble = {
                let mut p = page.borrow_mut();
                let Some(job) = p.pool.job.as_mut() else {
                    return;
                };
                if let (Some(k), Some(b)) = (job.shares.iter().position(|s| s.0 == first), bytes) {
                    job.parts[k] = Some(b);
                }
                if job.parts.iter().all(Option::is_some) {
                    job.finished = Some(super::runs::now());
                    // Every share, joined in tree order.
                    let total: u32 = job.parts.iter().flatten().map(|b| b.length()).sum();
                    let joined = Uint8Array::new_with_length(total);
                    let mut at = 0;
                    for b in job.parts.iter_mut().filter_map(Option::take) {
                        joined.set(&b, at);
                        at += b.length();
                    }
                    Some((
                        Request::Assemble {
                            v: PROTOCOL_VERSION,
                            id,
                            design: job.design.clone(),
                            method: job.method.clone(),
                            settings: job.settings.clone(),
                            judging: job.judging.clone(),
                        },
                        joined,
                    ))
                } else {
                    None
                }
            };
            if let Some((request, joined)) = assemble {
                send(page, request, Some(joined));
            }
        }
        Reply::Failed { id, message, .. } if Some(id) == job_id || id == 0 => {
            page.borrow_mut().pool.job = None;
            page.borrow_mut().pool.folds = None;
            // The helper may not hold the table it was asked to read.
            if let Some(h) = page.borrow_mut().pool.helpers.get_mut(index) {
                h.table = None;
            }
            runs::failed(page, &message);
        }
        _ => {}
    }
}

/// Helper `index`'s splits are in; once every helper's are, they go to the main worker in
/// split order and the run's own fit starts.
fn folds_in(page: &Shared, index: usize, count: usize, runs: Vec<(usize, FoldRun)>) {
    let done = {
        let mut p = page.borrow_mut();
        let Some(f) = p.pool.folds.as_mut() else {
            return;
        };
        f.replies[index] = Some((count, runs));
        if f.replies.iter().any(Option::is_none) {
            return;
        }
        p.pool.folds.take()
    };
    let Some(f) = done else { return };
    let mut all: Vec<(usize, FoldRun)> = Vec::new();
    for (n, runs) in f.replies.into_iter().flatten() {
        if n != count {
            return runs::failed(
                page,
                "The extra workers disagreed on the number of splits; reload the page",
            );
        }
        all.extend(runs);
    }
    all.sort_by_key(|(i, _)| *i);
    let complete = all.len() == count && all.iter().enumerate().all(|(k, (i, _))| k == *i);
    if complete {
        send(
            page,
            Request::FoldRuns {
                v: PROTOCOL_VERSION,
                id: f.then.id,
                runs: all.into_iter().map(|(_, r)| r).collect(),
            },
            None,
        );
    }
    // Without every split the main worker fits them itself: slower, same figures.
    runs::grow(page, f.then);
}
