//! Ensembles built on the one tree grower: bagging and random forests, AdaBoost, gradient
//! boosting (with its losses in `loss`), and fitted forest trees as bytes between workers
//! (`tree_bytes`).
pub mod adaboost;
pub mod boosting;
pub mod forest;
pub mod loss;
pub mod tree_bytes;
