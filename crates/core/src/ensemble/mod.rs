//! Ensembles built on the one tree grower: bagging and random forests, AdaBoost.
pub mod adaboost;
pub mod forest;
