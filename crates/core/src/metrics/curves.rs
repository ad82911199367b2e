//! Curves for two-class predictions: ROC and precision-recall points, the binned calibration
//! curve (groups by deciles of prediction, Wilson intervals per group), a smoothed
//! calibration curve (local linear regression with tricube weights) and the decision curve
//! (net benefit over a range of thresholds). Outcomes are codes 0/1; see [`super`].

use crate::error::Result;

use super::binary::{check_threshold, net_benefit, net_benefit_treat_all, Proportion};
use super::{
    bad, check_codes01, check_lengths, check_probabilities, check_scores, check_weights,
    class_weights, order_by, weight,
};

/// One point of the ROC curve.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct RocPoint {
    /// Rows scoring at or above this are called positive; None for the first point
    /// (nobody positive).
    pub threshold: Option<f64>,
    pub false_positive_rate: f64,
    pub true_positive_rate: f64,
}

/// The ROC curve: one point per distinct score, from the highest score down, after a first
/// point (0, 0). Every point is kept (none dropped as collinear), so a chart may thin them.
pub fn roc_points(
    outcomes: &[u32],
    scores: &[f64],
    weights: Option<&[f64]>,
) -> Result<Vec<RocPoint>> {
    const WHAT: &str = "the ROC curve";
    check_lengths(WHAT, outcomes.len(), scores.len(), "predictions")?;
    check_codes01(WHAT, outcomes)?;
    check_scores(WHAT, scores)?;
    check_weights(WHAT, weights, outcomes.len())?;
    let (pos, neg) = class_weights(WHAT, outcomes, weights)?;
    let mut points = vec![RocPoint {
        threshold: None,
        false_positive_rate: 0.0,
        true_positive_rate: 0.0,
    }];
    for (threshold, tp, fp) in descending_counts(outcomes, scores, weights) {
        points.push(RocPoint {
            threshold: Some(threshold),
            false_positive_rate: fp / neg,
            true_positive_rate: tp / pos,
        });
    }
    Ok(points)
}

/// One point of the precision-recall curve.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct PrecisionRecallPoint {
    /// Rows scoring at or above this are called positive.
    pub threshold: f64,
    pub recall: f64,
    pub precision: f64,
}

/// Precision and recall at each distinct score, from the highest score down.
pub fn precision_recall_points(
    outcomes: &[u32],
    scores: &[f64],
    weights: Option<&[f64]>,
) -> Result<Vec<PrecisionRecallPoint>> {
    const WHAT: &str = "the precision-recall curve";
    check_lengths(WHAT, outcomes.len(), scores.len(), "predictions")?;
    check_codes01(WHAT, outcomes)?;
    check_scores(WHAT, scores)?;
    check_weights(WHAT, weights, outcomes.len())?;
    let (pos, _) = class_weights(WHAT, outcomes, weights)?;
    Ok(descending_counts(outcomes, scores, weights)
        .into_iter()
        .filter(|(_, tp, fp)| tp + fp > 0.0)
        .map(|(threshold, tp, fp)| PrecisionRecallPoint {
            threshold,
            recall: tp / pos,
            precision: tp / (tp + fp),
        })
        .collect())
}

/// (score, cumulative true-positive weight, cumulative false-positive weight) at each
/// distinct score from the highest down. Scores held only by rows of weight 0 give no point
/// (those rows are not in the data; scikit-learn's roc_curve drops them too).
fn descending_counts(
    outcomes: &[u32],
    scores: &[f64],
    weights: Option<&[f64]>,
) -> Vec<(f64, f64, f64)> {
    let order = order_by(scores);
    let mut out = Vec::new();
    let (mut tp, mut fp) = (0.0, 0.0);
    let mut k = order.len();
    while k > 0 {
        let top = scores[order[k - 1]];
        let mut group = 0.0;
        while k > 0 && scores[order[k - 1]] == top {
            let r = order[k - 1];
            let w = weight(weights, r);
            group += w;
            if outcomes[r] == 1 {
                tp += w;
            } else {
                fp += w;
            }
            k -= 1;
        }
        if group > 0.0 {
            out.push((top, tp, fp));
        }
    }
    out
}

/// One group of the binned calibration curve.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct CalibrationGroup {
    pub lowest_prediction: f64,
    pub highest_prediction: f64,
    pub mean_prediction: f64,
    /// Share of events in the group, with its 95% Wilson interval.
    pub observed: Proportion,
}

/// The binned calibration curve: rows sorted by prediction and cut into `groups` groups of
/// (nearly) equal size, i.e. by quantiles of the prediction (deciles for 10); a cut never
/// separates equal predictions, so with many ties there are fewer, unequal groups. Rows
/// unweighted. Each group: its mean prediction and its share of events with a 95% Wilson
/// interval.
pub fn calibration_groups(
    outcomes: &[u32],
    probabilities: &[f64],
    groups: usize,
) -> Result<Vec<CalibrationGroup>> {
    const WHAT: &str = "the calibration curve";
    check_lengths(WHAT, outcomes.len(), probabilities.len(), "predictions")?;
    check_codes01(WHAT, outcomes)?;
    check_probabilities(WHAT, probabilities)?;
    if groups == 0 {
        return Err(bad(
            WHAT,
            "0 groups asked for; use 10 (deciles) or another positive number",
        ));
    }
    let order = order_by(probabilities);
    let mut out = Vec::new();
    for range in quantile_groups(&order, probabilities, groups) {
        let rows = &order[range];
        let events = rows.iter().filter(|&&r| outcomes[r] == 1).count() as u64;
        let mean = rows.iter().map(|&r| probabilities[r]).sum::<f64>() / rows.len() as f64;
        out.push(CalibrationGroup {
            lowest_prediction: probabilities[rows[0]],
            highest_prediction: probabilities[rows[rows.len() - 1]],
            mean_prediction: mean,
            observed: Proportion::wilson95(events, rows.len() as u64)
                .ok_or_else(|| bad(WHAT, "an empty group"))?,
        });
    }
    Ok(out)
}

/// Ranges of `order` (rows sorted by `values`) cut at ranks k·n/groups, each cut moved
/// forward past equal values. Every range is non-empty.
pub(crate) fn quantile_groups(
    order: &[usize],
    values: &[f64],
    groups: usize,
) -> Vec<std::ops::Range<usize>> {
    let n = order.len();
    let mut out = Vec::new();
    let mut start = 0;
    for k in 1..=groups {
        let mut end = (k * n / groups).max(start);
        if k == groups {
            end = n;
        }
        while end > start && end < n && values[order[end]] == values[order[end - 1]] {
            end += 1;
        }
        if end > start {
            out.push(start..end);
            start = end;
        }
    }
    out
}

/// One point of the smoothed calibration curve.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct SmoothPoint {
    pub predicted: f64,
    /// The smoothed share of events among rows predicted near `predicted`, cut to [0, 1].
    pub observed: f64,
}

/// Share of the rows in each local fit of [`smoothed_calibration`].
pub const SMOOTHING_SPAN: f64 = 0.75;

/// A smoothed calibration curve: at `points` evenly spaced predictions from the lowest to
/// the highest, a local linear regression of the outcome (0/1) on the prediction over the
/// nearest [`SMOOTHING_SPAN`] of the rows, with tricube weights (1 − (d/h)³)³, h the distance
/// to the farthest of them; no robustness iterations. This is Cleveland's lowess
/// (JASA 1979;74:829–836) with degree 1 and no reweighting, the kind of flexible curve Austin
/// & Steyerberg (Stat Med 2014;33:517–535) and Van Calster et al. (2016) advise for
/// calibration (span and the absence of reweighting: their advice as we recall it, from
/// memory). Rows unweighted.
pub fn smoothed_calibration(
    outcomes: &[u32],
    probabilities: &[f64],
    points: usize,
) -> Result<Vec<SmoothPoint>> {
    const WHAT: &str = "the smoothed calibration curve";
    check_lengths(WHAT, outcomes.len(), probabilities.len(), "predictions")?;
    check_codes01(WHAT, outcomes)?;
    check_probabilities(WHAT, probabilities)?;
    class_weights(WHAT, outcomes, None)?;
    if points < 2 {
        return Err(bad(WHAT, "fewer than 2 points asked for; use 50 or so"));
    }
    let order = order_by(probabilities);
    let x: Vec<f64> = order.iter().map(|&r| probabilities[r]).collect();
    let y: Vec<f64> = order.iter().map(|&r| f64::from(outcomes[r])).collect();
    let n = x.len();
    let k = ((SMOOTHING_SPAN * n as f64).ceil() as usize).clamp(2.min(n), n);
    let (lo, hi) = (x[0], x[n - 1]);
    let mut out = Vec::with_capacity(points);
    for g in 0..points {
        let at = if hi > lo {
            lo + (hi - lo) * g as f64 / (points - 1) as f64
        } else {
            lo
        };
        // The k nearest rows form a contiguous window of the sorted predictions.
        let mut left = x.partition_point(|&v| v < at);
        let mut right = left;
        while right - left < k {
            let take_left = left > 0 && (right == n || at - x[left - 1] <= x[right] - at);
            if take_left {
                left -= 1;
            } else {
                right += 1;
            }
        }
        let h = (at - x[left]).max(x[right - 1] - at);
        let (mut sw, mut sx, mut sy, mut sxx, mut sxy) = (0.0, 0.0, 0.0, 0.0, 0.0);
        for i in left..right {
            let w = if h > 0.0 {
                let d = ((x[i] - at).abs() / h).min(1.0);
                (1.0 - d * d * d).powi(3)
            } else {
                1.0
            };
            sw += w;
            sx += w * x[i];
            sy += w * y[i];
            sxx += w * x[i] * x[i];
            sxy += w * x[i] * y[i];
        }
        let fitted = if sw <= 0.0 {
            y[left..right].iter().sum::<f64>() / (right - left) as f64
        } else {
            let (mx, my) = (sx / sw, sy / sw);
            let vxx = sxx / sw - mx * mx;
            if vxx > 1e-14 * (1.0 + mx * mx) {
                my + (sxy / sw - mx * my) / vxx * (at - mx)
            } else {
                my
            }
        };
        out.push(SmoothPoint {
            predicted: at,
            observed: fitted.clamp(0.0, 1.0),
        });
    }
    Ok(out)
}

/// One threshold of the decision curve.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct DecisionPoint {
    pub threshold: f64,
    /// Net benefit of acting on rows with probability ≥ threshold.
    pub model: f64,
    pub treat_all: f64,
    /// Always 0: acting on nobody.
    pub treat_none: f64,
}

/// The decision curve (Vickers & Elkin, Med Decis Making 2006;26:565–574) at each of
/// `thresholds` (each strictly between 0 and 1), rows unweighted.
pub fn decision_curve(
    outcomes: &[u32],
    probabilities: &[f64],
    thresholds: &[f64],
) -> Result<Vec<DecisionPoint>> {
    const WHAT: &str = "the decision curve";
    check_lengths(WHAT, outcomes.len(), probabilities.len(), "predictions")?;
    check_codes01(WHAT, outcomes)?;
    check_probabilities(WHAT, probabilities)?;
    let n = outcomes.len() as f64;
    let prevalence = outcomes.iter().filter(|&&c| c == 1).count() as f64 / n;
    let mut out = Vec::with_capacity(thresholds.len());
    for &t in thresholds {
        check_threshold(WHAT, t)?;
        let (mut tp, mut fp) = (0.0, 0.0);
        for (&y, &p) in outcomes.iter().zip(probabilities) {
            if p >= t {
                if y == 1 {
                    tp += 1.0;
                } else {
                    fp += 1.0;
                }
            }
        }
        out.push(DecisionPoint {
            threshold: t,
            model: net_benefit(tp, fp, n, t),
            treat_all: net_benefit_treat_all(prevalence, t),
            treat_none: 0.0,
        });
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: f64, b: f64, tol: f64) -> bool {
        (a - b).abs() <= tol
    }

    #[test]
    fn roc_and_precision_recall_points_on_a_small_case() {
        // Worked by hand (common practice, no source): scores 0.8 (event), 0.4 (non-event),
        // 0.35 (event), 0.1 (non-event).
        let y = [0, 0, 1, 1];
        let s = [0.1, 0.4, 0.35, 0.8];
        let roc = roc_points(&y, &s, None).unwrap();
        let pts: Vec<(f64, f64)> = roc
            .iter()
            .map(|p| (p.false_positive_rate, p.true_positive_rate))
            .collect();
        assert_eq!(
            pts,
            vec![(0.0, 0.0), (0.0, 0.5), (0.5, 0.5), (0.5, 1.0), (1.0, 1.0)]
        );
        assert_eq!(roc[1].threshold, Some(0.8));
        let pr = precision_recall_points(&y, &s, None).unwrap();
        let pts: Vec<(f64, f64)> = pr.iter().map(|p| (p.recall, p.precision)).collect();
        assert_eq!(
            pts,
            vec![(0.5, 1.0), (0.5, 0.5), (1.0, 2.0 / 3.0), (1.0, 0.5)]
        );
    }

    #[test]
    fn decision_curve_matches_vickers_and_elkin() {
        // Hanley & McNeil table (1982) with ratings 1–5 as probabilities 0.01, 0.02, 0.05,
        // 0.6, 0.9, so at every pt in 0.1…0.5 exactly ratings ≥ 4 are positive (TP 44,
        // FP 13, n 109). Values: references.md (Vickers & Elkin 2006 formula, recomputed).
        let normal = [33, 6, 6, 11, 2];
        let abnormal = [3, 2, 2, 11, 33];
        let as_p = [0.01, 0.02, 0.05, 0.6, 0.9];
        let (mut y, mut p) = (Vec::new(), Vec::new());
        for k in 0..5 {
            for _ in 0..normal[k] {
                y.push(0);
                p.push(as_p[k]);
            }
            for _ in 0..abnormal[k] {
                y.push(1);
                p.push(as_p[k]);
            }
        }
        let curve = decision_curve(&y, &p, &[0.1, 0.2, 0.3, 0.5]).unwrap();
        let model = [0.39042, 0.37385, 0.35256, 0.28440];
        let all = [0.40877, 0.33486, 0.23984, -0.06422];
        for (k, d) in curve.iter().enumerate() {
            assert!(close(d.model, model[k], 5e-6), "{d:?}");
            assert!(close(d.treat_all, all[k], 5e-6), "{d:?}");
            assert_eq!(d.treat_none, 0.0);
        }
        assert!(decision_curve(&y, &p, &[0.0]).is_err());
        assert!(decision_curve(&y, &p, &[1.0]).is_err());
    }

    #[test]
    fn calibration_groups_are_deciles_and_keep_ties_together() {
        let p: Vec<f64> = (0..100).map(|i| i as f64 / 100.0).collect();
        let y: Vec<u32> = (0..100).map(|i| u32::from(i % 3 == 0)).collect();
        let g = calibration_groups(&y, &p, 10).unwrap();
        assert_eq!(g.len(), 10);
        assert!(g.iter().all(|b| b.observed.total == 10));
        assert!(close(g[0].mean_prediction, 0.045, 1e-12));
        assert_eq!(g[0].observed.successes, 4); // rows 0, 3, 6, 9
                                                // Heavy ties: only two distinct predictions give two groups.
        let p2: Vec<f64> = (0..100).map(|i| if i < 30 { 0.2 } else { 0.6 }).collect();
        let g2 = calibration_groups(&y, &p2, 10).unwrap();
        assert_eq!(
            g2.iter().map(|b| b.observed.total).collect::<Vec<_>>(),
            vec![30, 70]
        );
    }

    #[test]
    fn smoothed_curve_follows_a_calibrated_model() {
        // Common practice, no source: outcomes drawn from the predictions lie near the
        // diagonal (within 0.05 over the middle of the range with 20,000 rows).
        use crate::random::{stream, Purpose};
        use rand_chacha::rand_core::RngCore;
        let mut rng = stream(5, Purpose::MetricResample, 1);
        let n = 20_000;
        let p: Vec<f64> = (0..n).map(|i| 0.05 + 0.9 * i as f64 / n as f64).collect();
        let y: Vec<u32> = p
            .iter()
            .map(|&q| u32::from(((rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64) < q))
            .collect();
        let curve = smoothed_calibration(&y, &p, 21).unwrap();
        assert_eq!(curve.len(), 21);
        for pt in &curve[4..17] {
            assert!(close(pt.observed, pt.predicted, 0.05), "{pt:?}");
        }
        // A curve of a model that is too extreme lies below the diagonal at the top.
        let extreme: Vec<f64> = p
            .iter()
            .map(|&q| if q > 0.5 { (q + 0.3).min(1.0) } else { q })
            .collect();
        let c2 = smoothed_calibration(&y, &extreme, 21).unwrap();
        assert!(c2[18].observed < c2[18].predicted - 0.1, "{:?}", c2[18]);
    }
}
