//! Ensembles built on the one tree grower: bagging and random forests, AdaBoost, gradient
//! boosting (with its losses in `loss`).
pub mod adaboost;
pub mod boosting;
pub mod forest;
pub mod loss;
