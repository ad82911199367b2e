//! Judging out-of-sample predictions: every figure of [`crate::metrics`] for the outcome's
//! kind, each with a 95% interval where one exists (DeLong for the AUC, Wilson for
//! proportions, otherwise a seeded percentile bootstrap of the predictions), and the curves
//! (ROC, precision-recall, calibration, decision curve, calibration of the mean).
//! [`figures`] gives the point values alone, cheaply, for each fold.

use std::collections::BTreeMap;

use crate::design::Outcome;
use crate::metrics::binary::{self, Proportion};
use crate::metrics::{bootstrap, curves, multiclass, regression};

/// Point figures by metric name.
pub type Figures = BTreeMap<String, f64>;

/// One metric with its 95% interval.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Estimate {
    pub value: f64,
    pub low: Option<f64>,
    pub high: Option<f64>,
    /// How the interval was found: "DeLong", "Wilson", "bootstrap", or "none".
    pub interval: &'static str,
}

impl Estimate {
    pub fn bare(value: f64) -> Estimate {
        Estimate {
            value,
            low: None,
            high: None,
            interval: "none",
        }
    }
    fn wilson(p: &Proportion) -> Estimate {
        Estimate {
            value: p.value,
            low: Some(p.low),
            high: Some(p.high),
            interval: "Wilson",
        }
    }
}

/// The curves drawn from out-of-sample predictions (empty where they do not apply).
#[derive(Debug, Clone, Default, PartialEq, serde::Serialize)]
pub struct Curves {
    pub roc: Vec<curves::RocPoint>,
    pub precision_recall: Vec<curves::PrecisionRecallPoint>,
    /// By tenths of the prediction, with Wilson intervals per group.
    pub calibration: Vec<curves::CalibrationGroup>,
    pub smoothed_calibration: Vec<curves::SmoothPoint>,
    /// Net benefit at thresholds 0.01, 0.02, ..., 0.99.
    pub decision: Vec<curves::DecisionPoint>,
    /// Numbers: observed and predicted means by tenths of the prediction.
    pub mean_calibration: Vec<regression::MeanGroup>,
}

/// Everything said about one set of predictions.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Judged {
    /// Rows judged.
    pub rows: usize,
    pub metrics: BTreeMap<String, Estimate>,
    pub curves: Curves,
    /// Counts, observed class by row and predicted class by column (the most probable
    /// class; two classes: probability at or above the threshold).
    pub confusion_matrix: Option<Vec<Vec<f64>>>,
    /// Two classes: the threshold maximising Youden's J.
    pub youden: Option<binary::Youden>,
    /// Several classes: one-vs-rest AUC per class.
    pub class_auc: Option<Vec<Option<f64>>>,
    pub residuals: Option<regression::Residuals>,
}

/// How to judge: the two-class threshold, bootstrap resamples for intervals (0: none) and
/// their seed.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct JudgeSettings {
    pub threshold: f64,
    pub resamples: usize,
    pub seed: u64,
}

/// Class codes and the event probability (two classes), or all probabilities.
fn event_probabilities(predictions: &[f64], classes: usize) -> Vec<f64> {
    predictions
        .chunks_exact(classes)
        .map(|p| p[1].clamp(0.0, 1.0))
        .collect()
}

/// The point figures of `predictions` (`outputs` per row) against `outcome`; a figure that
/// is undefined on these rows (one class only, say) is left out.
pub fn figures(outcome: &Outcome, predictions: &[f64], threshold: f64) -> Figures {
    let mut f = Figures::new();
    let mut put = |name: &str, v: Option<f64>| {
        if let Some(v) = v.filter(|v| v.is_finite()) {
            f.insert(name.to_string(), v);
        }
    };
    match outcome {
        Outcome::Classes { codes, labels } if labels.len() == 2 => {
            let p = event_probabilities(predictions, 2);
            put("auc", binary::auc(codes, &p).ok().map(|a| a.value));
            put(
                "average_precision",
                binary::average_precision(codes, &p, None).ok(),
            );
            put("log_loss", binary::log_loss(codes, &p, None).ok());
            let brier = binary::brier(codes, &p, None).ok();
            put("brier", brier.as_ref().map(|b| b.score));
            put("scaled_brier", brier.as_ref().map(|b| b.scaled));
            if let Ok(c) = binary::calibration(codes, &p, None) {
                put("calibration_intercept", Some(c.in_the_large));
                put("calibration_slope", Some(c.slope));
                put("observed_expected", Some(c.observed_expected));
            }
            if let Ok(t) = binary::at_threshold(codes, &p, threshold) {
                put("sensitivity", t.sensitivity.map(|x| x.value));
                put("specificity", t.specificity.map(|x| x.value));
                put("ppv", t.ppv.map(|x| x.value));
                put("npv", t.npv.map(|x| x.value));
                put("accuracy", Some(t.accuracy.value));
                put("balanced_accuracy", t.balanced_accuracy);
                put("f1", t.f1);
            }
        }
        Outcome::Classes { codes, labels } => {
            let k = labels.len();
            put(
                "accuracy",
                multiclass::accuracy(codes, predictions, k, None).ok(),
            );
            put(
                "balanced_accuracy",
                multiclass::balanced_accuracy(codes, predictions, k, None).ok(),
            );
            put(
                "macro_auc",
                multiclass::one_vs_rest_auc(codes, predictions, k, None)
                    .ok()
                    .map(|a| a.macro_mean),
            );
            put(
                "log_loss",
                multiclass::log_loss(codes, predictions, k, None).ok(),
            );
        }
        Outcome::Numbers(y) => {
            if let Ok(fit) = regression::fit(y, predictions, None) {
                put("rmse", Some(fit.rmse));
                put("mae", Some(fit.mae));
                put("r_squared", fit.r_squared);
            }
        }
    }
    f
}

/// Every figure of `predictions` with its interval, and the curves.
pub fn judge(outcome: &Outcome, predictions: &[f64], settings: &JudgeSettings) -> Judged {
    let rows = outcome.len();
    let mut metrics = BTreeMap::new();
    // Figures with closed-form intervals, added after the bootstrapped ones.
    let mut later: Vec<(String, Estimate)> = Vec::new();
    let boot = |f: &mut dyn FnMut(&[f64]) -> Option<f64>| -> (Option<f64>, Option<f64>) {
        if settings.resamples < 2 {
            return (None, None);
        }
        match bootstrap(rows, settings.resamples, 0.95, settings.seed, f) {
            Ok(b) => (Some(b.low), Some(b.high)),
            Err(_) => (None, None),
        }
    };
    let mut put_boot =
        |name: &str, value: Option<f64>, f: &mut dyn FnMut(&[f64]) -> Option<f64>| {
            if let Some(value) = value.filter(|v| v.is_finite()) {
                let (low, high) = boot(f);
                metrics.insert(
                    name.to_string(),
                    Estimate {
                        value,
                        low,
                        high,
                        interval: if low.is_some() { "bootstrap" } else { "none" },
                    },
                );
            }
        };
    let mut judged = Judged {
        rows,
        metrics: BTreeMap::new(),
        curves: Curves::default(),
        confusion_matrix: None,
        youden: None,
        class_auc: None,
        residuals: None,
    };
    let matrix = |codes: &[u32], probs: &[f64], k: usize| {
        multiclass::confusion_matrix(codes, probs, k, None)
            .ok()
            .map(|m| m.chunks(k).map(<[f64]>::to_vec).collect())
    };
    match outcome {
        Outcome::Classes { codes, labels } if labels.len() == 2 => {
            let p = event_probabilities(predictions, 2);
            let t = settings.threshold;
            put_boot(
                "average_precision",
                binary::average_precision(codes, &p, None).ok(),
                &mut |w| binary::average_precision(codes, &p, Some(w)).ok(),
            );
            put_boot(
                "log_loss",
                binary::log_loss(codes, &p, None).ok(),
                &mut |w| binary::log_loss(codes, &p, Some(w)).ok(),
            );
            let brier = binary::brier(codes, &p, None).ok();
            put_boot("brier", brier.as_ref().map(|b| b.score), &mut |w| {
                binary::brier(codes, &p, Some(w)).ok().map(|b| b.score)
            });
            put_boot("scaled_brier", brier.as_ref().map(|b| b.scaled), &mut |w| {
                binary::brier(codes, &p, Some(w)).ok().map(|b| b.scaled)
            });
            let cal = binary::calibration(codes, &p, None).ok();
            put_boot(
                "calibration_intercept",
                cal.as_ref().map(|c| c.in_the_large),
                &mut |w| {
                    binary::calibration(codes, &p, Some(w))
                        .ok()
                        .map(|c| c.in_the_large)
                },
            );
            put_boot(
                "calibration_slope",
                cal.as_ref().map(|c| c.slope),
                &mut |w| {
                    binary::calibration(codes, &p, Some(w))
                        .ok()
                        .map(|c| c.slope)
                },
            );
            put_boot(
                "observed_expected",
                cal.as_ref().map(|c| c.observed_expected),
                &mut |w| {
                    binary::calibration(codes, &p, Some(w))
                        .ok()
                        .map(|c| c.observed_expected)
                },
            );
            let from_confusion = |w: &[f64], f: fn(&binary::Confusion) -> Option<f64>| {
                binary::confusion(codes, &p, t, Some(w))
                    .ok()
                    .and_then(|c| f(&c))
            };
            fn balanced(c: &binary::Confusion) -> Option<f64> {
                let pos = c.true_positives + c.false_negatives;
                let neg = c.true_negatives + c.false_positives;
                (pos > 0.0 && neg > 0.0)
                    .then(|| 0.5 * (c.true_positives / pos + c.true_negatives / neg))
            }
            fn f1(c: &binary::Confusion) -> Option<f64> {
                let d = 2.0 * c.true_positives + c.false_positives + c.false_negatives;
                (d > 0.0).then(|| 2.0 * c.true_positives / d)
            }
            if let Ok(at) = binary::at_threshold(codes, &p, t) {
                put_boot("balanced_accuracy", at.balanced_accuracy, &mut |w| {
                    from_confusion(w, balanced)
                });
                put_boot("f1", at.f1, &mut |w| from_confusion(w, f1));
                for (name, prop) in [
                    ("sensitivity", at.sensitivity),
                    ("specificity", at.specificity),
                    ("ppv", at.ppv),
                    ("npv", at.npv),
                    ("accuracy", Some(at.accuracy)),
                ] {
                    if let Some(prop) = prop {
                        later.push((name.to_string(), Estimate::wilson(&prop)));
                    }
                }
            }
            if let Ok(a) = binary::auc(codes, &p) {
                later.push((
                    "auc".into(),
                    Estimate {
                        value: a.value,
                        low: a.interval.map(|i| i.low),
                        high: a.interval.map(|i| i.high),
                        interval: if a.interval.is_some() {
                            "DeLong"
                        } else {
                            "none"
                        },
                    },
                ));
            }
            judged.youden = binary::youden(codes, &p).ok();
            judged.confusion_matrix = {
                // Two classes: called positive at or above the threshold.
                binary::confusion(codes, &p, t, None).ok().map(|c| {
                    vec![
                        vec![c.true_negatives, c.false_positives],
                        vec![c.false_negatives, c.true_positives],
                    ]
                })
            };
            let c = &mut judged.curves;
            c.roc = curves::roc_points(codes, &p, None).unwrap_or_default();
            c.precision_recall =
                curves::precision_recall_points(codes, &p, None).unwrap_or_default();
            c.calibration = curves::calibration_groups(codes, &p, 10).unwrap_or_default();
            c.smoothed_calibration =
                curves::smoothed_calibration(codes, &p, 50).unwrap_or_default();
            let thresholds: Vec<f64> = (1..100).map(|i| i as f64 / 100.0).collect();
            c.decision = curves::decision_curve(codes, &p, &thresholds).unwrap_or_default();
        }
        Outcome::Classes { codes, labels } => {
            let k = labels.len();
            let pr = predictions;
            if let Ok(acc) = multiclass::accuracy(codes, pr, k, None) {
                let right = (acc * rows as f64).round() as u64;
                if let Some(p) = Proportion::wilson95(right, rows as u64) {
                    later.push(("accuracy".into(), Estimate::wilson(&p)));
                }
            }
            put_boot(
                "balanced_accuracy",
                multiclass::balanced_accuracy(codes, pr, k, None).ok(),
                &mut |w| multiclass::balanced_accuracy(codes, pr, k, Some(w)).ok(),
            );
            let ovr = multiclass::one_vs_rest_auc(codes, pr, k, None).ok();
            put_boot("macro_auc", ovr.as_ref().map(|o| o.macro_mean), &mut |w| {
                multiclass::one_vs_rest_auc(codes, pr, k, Some(w))
                    .ok()
                    .map(|o| o.macro_mean)
            });
            put_boot(
                "log_loss",
                multiclass::log_loss(codes, pr, k, None).ok(),
                &mut |w| multiclass::log_loss(codes, pr, k, Some(w)).ok(),
            );
            judged.class_auc = ovr.map(|o| o.per_class);
            judged.confusion_matrix = matrix(codes, pr, k);
        }
        Outcome::Numbers(y) => {
            let fit = regression::fit(y, predictions, None).ok();
            put_boot("rmse", fit.as_ref().map(|f| f.rmse), &mut |w| {
                regression::fit(y, predictions, Some(w))
                    .ok()
                    .map(|f| f.rmse)
            });
            put_boot("mae", fit.as_ref().map(|f| f.mae), &mut |w| {
                regression::fit(y, predictions, Some(w)).ok().map(|f| f.mae)
            });
            put_boot(
                "r_squared",
                fit.as_ref().and_then(|f| f.r_squared),
                &mut |w| {
                    regression::fit(y, predictions, Some(w))
                        .ok()
                        .and_then(|f| f.r_squared)
                },
            );
            judged.residuals = regression::residuals(y, predictions).ok();
            judged.curves.mean_calibration =
                regression::mean_calibration(y, predictions, 10).unwrap_or_default();
        }
    }
    metrics.extend(later);
    judged.metrics = metrics;
    judged
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn two_class_figures_match_the_metrics_and_carry_intervals() {
        let codes: Vec<u32> = (0..200).map(|i| u32::from(i % 3 == 0)).collect();
        let probs: Vec<f64> = (0..200)
            .flat_map(|i| {
                let p = if i % 3 == 0 { 0.42 } else { 0.3 } + (i % 7) as f64 * 0.03;
                [1.0 - p, p]
            })
            .collect();
        let outcome = Outcome::Classes {
            codes: codes.clone(),
            labels: vec!["no".into(), "yes".into()],
        };
        let s = JudgeSettings {
            threshold: 0.5,
            resamples: 200,
            seed: 1,
        };
        let j = judge(&outcome, &probs, &s);
        let f = figures(&outcome, &probs, 0.5);
        for (name, e) in &j.metrics {
            assert_eq!(Some(&e.value), f.get(name), "{name}");
        }
        let auc = &j.metrics["auc"];
        assert_eq!(auc.interval, "DeLong");
        assert!(auc.low.unwrap() < auc.value && auc.value < auc.high.unwrap());
        let brier = &j.metrics["brier"];
        assert_eq!(brier.interval, "bootstrap");
        assert!(brier.low.unwrap() <= brier.value && brier.value <= brier.high.unwrap());
        assert_eq!(j.metrics["sensitivity"].interval, "Wilson");
        let m = j.confusion_matrix.unwrap();
        assert_eq!(m.iter().flatten().sum::<f64>(), 200.0);
        assert_eq!(j.curves.decision.len(), 99);
    }
}
