//! spinney-core: every computation Spinney does, with no I/O beyond byte slices, no wasm and
//! no threads (see ARCHITECTURE.md, invariant 1). The page (crates/web) and the command line
//! (crates/cli) are thin shells around this crate.
//!
//! It holds the data layer (reading delimited text and spreadsheets into a typed
//! [`data::Table`], summarising and fingerprinting it) and the learning engine: the design
//! ([`design`]), binning ([`binning`]), the tree grower and pruning ([`tree`]) and the
//! ensembles built on them ([`ensemble`]), the fitted model of any method ([`model`]) and its
//! file ([`model_file`]); and the means of judging a model: validation figures over plain
//! slices of outcomes and predictions ([`metrics`]) and the baseline models to compare
//! against ([`baseline`]), and honest validation by held-out rows ([`validate`]); and insight
//! into a fitted model: importance, per-record contributions, partial dependence ([`explain`]).

pub mod baseline;
pub mod binning;
pub mod data;
pub mod design;
pub mod ensemble;
mod envelope;
pub mod error;
pub mod explain;
pub mod fit;
pub mod metrics;
pub mod model;
pub mod model_file;
pub mod onnx;
pub mod progress;
pub mod random;
pub mod scoring;
pub mod settings;
pub mod spread;
pub mod study;
pub mod tree;
pub mod validate;

pub use error::{Error, ErrorKind, Where};

/// The version written into every file Spinney produces and shown in reports.
pub const VERSION: &str = env!("CARGO_PKG_VERSION");
