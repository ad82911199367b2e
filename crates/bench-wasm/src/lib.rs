//! The explain benchmark in wasm (benchmark only; the page never loads it): the same
//! workload as `crates/core/examples/explain_bench.rs` (shared source, see
//! `explain_workload.rs`), built with the page's wasm settings (SIMD128, release profile) and
//! timed from JavaScript by `run.mjs` under Node, whose engine (V8) is the one in Chromium.
//! One thread, as in the page's worker. `scripts/bench explain` builds and runs it.

#[path = "../../core/examples/common/explain_workload.rs"]
mod workload;

use std::cell::RefCell;

use wasm_bindgen::prelude::*;

thread_local! {
    static FITTED: RefCell<Option<workload::Fitted>> = const { RefCell::new(None) };
}

/// Generates `rows` records and fits a `trees`-tree forest, kept for [`shap`] and
/// [`importance`]; returns the mean leaves a tree.
#[wasm_bindgen]
pub fn fit(rows: usize, trees: usize) -> f64 {
    let fitted = workload::fit(&workload::data(rows), trees);
    let leaves = fitted.leaves;
    FITTED.with(|f| *f.borrow_mut() = Some(fitted));
    leaves
}

/// TreeSHAP on every row; the sum of the absolute contributions (NaN before [`fit`]).
#[wasm_bindgen]
pub fn shap() -> f64 {
    FITTED.with(|f| f.borrow().as_ref().map_or(f64::NAN, workload::shap))
}

/// Permutation importance (5 shuffles of each predictor on 10,000 rows); the sum of the mean
/// losses (NaN before [`fit`]).
#[wasm_bindgen]
pub fn importance() -> f64 {
    FITTED.with(|f| {
        f.borrow()
            .as_ref()
            .map_or(f64::NAN, |f| workload::importance(f).0.mean.iter().sum())
    })
}
