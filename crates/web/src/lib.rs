//! spinney-web: the thin wasm-bindgen layer between the page and spinney-core.
//!
//! Two binaries, built by Trunk from web/index.html:
//! - `worker` (src/bin/worker.rs): a Web Worker holding the file bytes and the table behind
//!   its message loop, so long work never freezes the page;
//! - `page` (src/bin/page.rs): the page controller, drawing the notebook steps and talking to
//!   the worker.
//!
//! They speak the versioned message protocol in [`protocol`].

pub mod protocol;
