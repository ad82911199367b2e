//! spinney-charts: Spinney's charts, drawn with plotters and generic over the backend (canvas
//! in the page, SVG natively so chart code is tested outside the browser).
//!
//! Deliberately empty so far: the first charts (error by ensemble size, ROC, calibration)
//! arrive with the validation and notebook issues. The crate exists now so the workspace
//! layout, its dependency on plotters and its place in the build are settled.
