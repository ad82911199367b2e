//! Ensembles built on the one tree grower: bagging and random forests today.
pub mod forest;
