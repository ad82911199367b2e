//! Judging out-of-sample predictions: every figure of [`crate::metrics`] for the outcome's
//! kind, each with a 95% interval where one exists (DeLong for the AUC, Wilson for
//! proportions, otherwise a seeded percentile bootstrap of the predictions), and the curves
//! (ROC, precision-recall, calibration, decision curve, calibration of the mean).
//! [`figures`] gives the point values alone, cheaply, for each fold.

use std::collections::BTreeMap;

use crate::design::Outcome;
use crate::metrics::binary::{self, Proportion};
use crate::metrics::{bootstrap_many, curves, multiclass, regression};
use crate::spread::Spread;

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

/// Figures with a bootstrap interval: their names and one function filling all of them for
/// a resample (given as row weights), so shared work (a calibration fit, a confusion
/// table) is done once per resample.
type Filler<'a> = Box<dyn Fn(&[f64], &mut [Option<f64>]) + Sync + 'a>;

/// Point values and, with resamples, percentile intervals of the figures `fill` computes.
fn bootstrapped(
    names: &[&str],
    fill: Filler<'_>,
    rows: usize,
    settings: &JudgeSettings,
    spread: Option<Spread<'_>>,
    metrics: &mut BTreeMap<String, Estimate>,
) {
    let mut values = vec![None; names.len()];
    fill(&vec![1.0; rows], &mut values);
    let intervals = (settings.resamples >= 2)
        .then(|| {
            bootstrap_many(
                rows,
                settings.resamples,
                0.95,
                settings.seed,
                names.len(),
                spread,
                fill,
            )
            .ok()
        })
        .flatten();
    for (i, name) in names.iter().enumerate() {
        let Some(value) = values[i].filter(|v| v.is_finite()) else {
            continue;
        };
        let (low, high) = match intervals.as_ref().and_then(|v| v[i].as_ref().ok()) {
            Some(b) => (Some(b.low), Some(b.high)),
            None => (None, None),
        };
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
}

/// Balanced accuracy from a two-class confusion table.
fn balanced(c: &binary::Confusion) -> Option<f64> {
    let pos = c.true_positives + c.false_negatives;
    let neg = c.true_negatives + c.false_positives;
    (pos > 0.0 && neg > 0.0).then(|| 0.5 * (c.true_positives / pos + c.true_negatives / neg))
}

/// F1 from a two-class confusion table.
fn f1(c: &binary::Confusion) -> Option<f64> {
    let d = 2.0 * c.true_positives + c.false_positives + c.false_negatives;
    (d > 0.0).then(|| 2.0 * c.true_positives / d)
}

/// Every figure of `predictions` with its interval, and the curves. `spread` runs the
/// bootstrap resamples on a caller's threads (the same figures either way).
pub fn judge(
    outcome: &Outcome,
    predictions: &[f64],
    settings: &JudgeSettings,
    spread: Option<Spread<'_>>,
) -> Judged {
    let rows = outcome.len();
    let mut metrics = BTreeMap::new();
    let mut judged = Judged {
        rows,
        metrics: BTreeMap::new(),
        curves: Curves::default(),
        confusion_matrix: None,
        youden: None,
        class_auc: None,
        residuals: None,
    };
    match outcome {
        Outcome::Classes { codes, labels } if labels.len() == 2 => {
            let p = event_probabilities(predictions, 2);
            let t = settings.threshold;
            let (c, p) = (&codes[..], &p[..]);
            // Checked, sorted and grouped once for every resample.
            let weighted = binary::WeightedFigures::new(c, p, t);
            bootstrapped(
                &[
                    "average_precision",
                    "log_loss",
                    "brier",
                    "scaled_brier",
                    "calibration_intercept",
                    "calibration_slope",
                    "observed_expected",
                    "balanced_accuracy",
                    "f1",
                ],
                Box::new(move |w, out| {
                    let Some(f) = weighted.as_ref().map(|f| f.of(w)) else {
                        return;
                    };
                    out[0] = f.average_precision;
                    out[1] = f.log_loss;
                    if let Some(b) = f.brier {
                        out[2] = Some(b.score);
                        out[3] = Some(b.scaled);
                    }
                    if let Some(k) = f.calibration {
                        out[4] = Some(k.in_the_large);
                        out[5] = Some(k.slope);
                        out[6] = Some(k.observed_expected);
                    }
                    if let Some(k) = f.confusion {
                        out[7] = balanced(&k);
                        out[8] = f1(&k);
                    }
                }),
                rows,
                settings,
                spread,
                &mut metrics,
            );
            if let Ok(at) = binary::at_threshold(c, p, t) {
                for (name, prop) in [
                    ("sensitivity", at.sensitivity),
                    ("specificity", at.specificity),
                    ("ppv", at.ppv),
                    ("npv", at.npv),
                    ("accuracy", Some(at.accuracy)),
                ] {
                    if let Some(prop) = prop {
                        metrics.insert(name.to_string(), Estimate::wilson(&prop));
                    }
                }
                let m = &at.confusion;
                // Observed class by row, called class by column (event at or above t).
                judged.confusion_matrix = Some(vec![
                    vec![m.true_negatives, m.false_positives],
                    vec![m.false_negatives, m.true_positives],
                ]);
            }
            if let Ok(a) = binary::auc(c, p) {
                metrics.insert(
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
                );
            }
            judged.youden = binary::youden(c, p).ok();
            let cv = &mut judged.curves;
            cv.roc = curves::roc_points(c, p, None).unwrap_or_default();
            cv.precision_recall = curves::precision_recall_points(c, p, None).unwrap_or_default();
            cv.calibration = curves::calibration_groups(c, p, 10).unwrap_or_default();
            cv.smoothed_calibration = curves::smoothed_calibration(c, p, 50).unwrap_or_default();
            let thresholds: Vec<f64> = (1..100).map(|i| i as f64 / 100.0).collect();
            cv.decision = curves::decision_curve(c, p, &thresholds).unwrap_or_default();
        }
        Outcome::Classes { codes, labels } => {
            let k = labels.len();
            let (c, pr) = (&codes[..], predictions);
            // Checked, and each class sorted, once for every resample.
            let weighted = multiclass::WeightedClasses::new(c, pr, k);
            bootstrapped(
                &["balanced_accuracy", "macro_auc", "log_loss"],
                Box::new(move |w, out| {
                    if let Some((balanced, auc, loss)) = weighted.as_ref().map(|f| f.of(w)) {
                        out[0] = Some(balanced);
                        out[1] = auc.map(|o| o.macro_mean);
                        out[2] = Some(loss);
                    }
                }),
                rows,
                settings,
                spread,
                &mut metrics,
            );
            if let Ok(acc) = multiclass::accuracy(c, pr, k, None) {
                let right = (acc * rows as f64).round() as u64;
                if let Some(p) = Proportion::wilson95(right, rows as u64) {
                    metrics.insert("accuracy".into(), Estimate::wilson(&p));
                }
            }
            judged.class_auc = multiclass::one_vs_rest_auc(c, pr, k, None)
                .ok()
                .map(|o| o.per_class);
            judged.confusion_matrix = multiclass::confusion_matrix(c, pr, k, None)
                .ok()
                .map(|m| m.chunks(k).map(<[f64]>::to_vec).collect());
        }
        Outcome::Numbers(y) => {
            bootstrapped(
                &["rmse", "mae", "r_squared"],
                Box::new(move |w, out| {
                    if let Ok(f) = regression::fit(y, predictions, Some(w)) {
                        out[0] = Some(f.rmse);
                        out[1] = Some(f.mae);
                        out[2] = f.r_squared;
                    }
                }),
                rows,
                settings,
                spread,
                &mut metrics,
            );
            judged.residuals = regression::residuals(y, predictions).ok();
            judged.curves.mean_calibration =
                regression::mean_calibration(y, predictions, 10).unwrap_or_default();
        }
    }
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
        let j = judge(&outcome, &probs, &s, None);
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
