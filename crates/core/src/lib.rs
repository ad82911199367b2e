//! spinney-core: every computation Spinney does, with no I/O beyond byte slices, no wasm and
//! no threads (see ARCHITECTURE.md, invariant 1). The page (crates/web) and the command line
//! (crates/cli) are thin shells around this crate.
//!
//! Today it holds the data layer: reading delimited text and spreadsheets into a typed
//! [`data::Table`], summarising its columns and fingerprinting the file.

pub mod binning;
pub mod data;
pub mod design;
pub mod ensemble;
pub mod error;
pub mod progress;
pub mod random;
pub mod tree;

pub use error::{Error, ErrorKind, Where};

/// The version written into every file Spinney produces and shown in reports.
pub const VERSION: &str = env!("CARGO_PKG_VERSION");
