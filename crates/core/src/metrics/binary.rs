//! Two-class figures: AUC (with the DeLong and Hanley–McNeil standard errors), average
//! precision, log loss, Brier score, calibration-in-the-large, calibration slope and
//! observed/expected, the figures at a threshold with Wilson intervals, Youden's best
//! threshold and net benefit. Outcomes are codes 0/1; see the conventions in [`super`].

use crate::error::Result;

use super::intervals::{wilson, Interval};
use super::{
    bad, check_codes01, check_lengths, check_probabilities, check_scores, check_weights,
    class_weights, order_by, weight, Z95,
};

/// The area under the ROC curve with its uncertainty.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Auc {
    /// The probability that a random event row scores above a random non-event row, ties
    /// counting one half (Mann–Whitney form; equals the trapezoidal area under the ROC curve).
    pub value: f64,
    pub events: u64,
    pub non_events: u64,
    /// DeLong, DeLong & Clarke-Pearson (Biometrics 1988;44:837–845) standard error from the
    /// placement values. None with fewer than two rows of either class.
    pub se_delong: Option<f64>,
    /// 95% interval `value ± 1.96 · se_delong` on the AUC scale itself (not logit), cut to
    /// [0, 1]. None when `se_delong` is None.
    pub interval: Option<Interval>,
    /// Hanley & McNeil (Radiology 1982;143:29–36) standard error, from the AUC and the class
    /// counts alone (exponential-model approximation). None when `se_delong` is None.
    pub se_hanley_mcneil: Option<f64>,
}

/// AUC with DeLong and Hanley–McNeil standard errors and a 95% interval (rows unweighted).
/// Scores may be any finite numbers (only their order matters).
pub fn auc(outcomes: &[u32], scores: &[f64]) -> Result<Auc> {
    const WHAT: &str = "the AUC";
    check_lengths(WHAT, outcomes.len(), scores.len(), "predictions")?;
    check_codes01(WHAT, outcomes)?;
    check_scores(WHAT, scores)?;
    class_weights(WHAT, outcomes, None)?;
    auc_in_order(outcomes, scores, &order_by(scores))
}

/// [`auc`] of outcomes whose scores (checked) are already ordered by [`order_by`], for
/// callers that score several outcomes with the same numbers.
pub(crate) fn auc_in_order(outcomes: &[u32], scores: &[f64], order: &[usize]) -> Result<Auc> {
    const WHAT: &str = "the AUC";
    check_lengths(WHAT, outcomes.len(), scores.len(), "predictions")?;
    check_lengths(WHAT, outcomes.len(), order.len(), "places in order")?;
    check_codes01(WHAT, outcomes)?;
    class_weights(WHAT, outcomes, None)?;
    let m = outcomes.iter().filter(|&&c| c == 1).count();
    let n = outcomes.len() - m;
    // Placement values: for an event row, the share of non-events it outranks; for a
    // non-event row, the share of events that outrank it (ties one half).
    let mut v10 = Vec::with_capacity(m);
    let mut v01 = Vec::with_capacity(n);
    let (mut pos_below, mut neg_below) = (0usize, 0usize);
    let mut i = 0;
    while i < order.len() {
        let mut j = i;
        while j < order.len() && scores[order[j]] == scores[order[i]] {
            j += 1;
        }
        let pos_g = order[i..j].iter().filter(|&&r| outcomes[r] == 1).count();
        let neg_g = (j - i) - pos_g;
        let for_event = (neg_below as f64 + neg_g as f64 / 2.0) / n as f64;
        let for_non_event = ((m - pos_below - pos_g) as f64 + pos_g as f64 / 2.0) / m as f64;
        for &r in &order[i..j] {
            if outcomes[r] == 1 {
                v10.push(for_event);
            } else {
                v01.push(for_non_event);
            }
        }
        pos_below += pos_g;
        neg_below += neg_g;
        i = j;
    }
    let value = v10.iter().sum::<f64>() / m as f64;
    let (mut se_delong, mut interval, mut se_hm) = (None, None, None);
    if m >= 2 && n >= 2 {
        let s10 = v10.iter().map(|v| (v - value).powi(2)).sum::<f64>() / (m - 1) as f64;
        let s01 = v01.iter().map(|v| (v - value).powi(2)).sum::<f64>() / (n - 1) as f64;
        let se = (s10 / m as f64 + s01 / n as f64).sqrt();
        se_delong = Some(se);
        interval = Some(Interval {
            low: (value - Z95 * se).max(0.0),
            high: (value + Z95 * se).min(1.0),
        });
        let q1 = value / (2.0 - value);
        let q2 = 2.0 * value * value / (1.0 + value);
        let a2 = value * value;
        let var =
            (value * (1.0 - value) + (m as f64 - 1.0) * (q1 - a2) + (n as f64 - 1.0) * (q2 - a2))
                / (m as f64 * n as f64);
        se_hm = Some(var.max(0.0).sqrt());
    }
    Ok(Auc {
        value,
        events: m as u64,
        non_events: n as u64,
        se_delong,
        interval,
        se_hanley_mcneil: se_hm,
    })
}

/// Scores sorted once, so the (weighted) AUC of many resamples costs O(rows) each.
#[derive(Debug, Clone)]
pub struct RankedScores {
    order: Vec<usize>,
    /// End (exclusive) in `order` of each run of equal scores.
    group_ends: Vec<usize>,
    /// 1 for an event, 0 otherwise, in sorted order (so the inner loop has no branch).
    sorted_events: Vec<f64>,
    /// The same in row order.
    events: Vec<f64>,
}

impl RankedScores {
    pub fn new(outcomes: &[u32], scores: &[f64]) -> Result<Self> {
        const WHAT: &str = "the AUC";
        check_lengths(WHAT, outcomes.len(), scores.len(), "predictions")?;
        check_codes01(WHAT, outcomes)?;
        check_scores(WHAT, scores)?;
        let order = order_by(scores);
        let mut group_ends = Vec::new();
        for k in 1..order.len() {
            if scores[order[k]] != scores[order[k - 1]] {
                group_ends.push(k);
            }
        }
        group_ends.push(order.len());
        let sorted_events = order.iter().map(|&r| f64::from(outcomes[r])).collect();
        Ok(RankedScores {
            order,
            group_ends,
            sorted_events,
            events: outcomes.iter().map(|&c| f64::from(c)).collect(),
        })
    }

    /// The weighted AUC (ties one half); None when either class has zero weight. Weights
    /// must have one entry per row (not checked again: this is the bootstrap's inner loop).
    pub fn auc(&self, weights: Option<&[f64]>) -> Option<f64> {
        let (mut neg_below, mut sum, mut pos_total) = (0.0, 0.0, 0.0);
        let mut start = 0;
        for &end in &self.group_ends {
            let (mut pos_g, mut all_g) = (0.0, 0.0);
            for k in start..end {
                let w = weight(weights, self.order[k]);
                pos_g += w * self.sorted_events[k];
                all_g += w;
            }
            let neg_g = all_g - pos_g;
            sum += pos_g * (neg_below + neg_g / 2.0);
            neg_below += neg_g;
            pos_total += pos_g;
            start = end;
        }
        (pos_total > 0.0 && neg_below > 0.0).then(|| sum / (pos_total * neg_below))
    }

    /// The weighted average precision (as [`average_precision`], the same sums in the same
    /// order, so the same value); None when the events have no weight.
    pub fn average_precision(&self, weights: Option<&[f64]>) -> Option<f64> {
        // The events' weight summed in row order, as `class_weights` sums it.
        let (pos, neg): (f64, f64) = match weights {
            Some(w) => (
                w.iter().zip(&self.events).map(|(w, e)| w * e).sum(),
                w.iter().zip(&self.events).map(|(w, e)| w * (1.0 - e)).sum(),
            ),
            None => (
                self.events.iter().sum(),
                self.events.iter().map(|e| 1.0 - e).sum(),
            ),
        };
        self.average_precision_of(weights, pos, neg)
    }

    /// [`Self::average_precision`] given the events' and non-events' weights (summed in
    /// row order, as `class_weights` sums them).
    fn average_precision_of(&self, weights: Option<&[f64]>, pos: f64, neg: f64) -> Option<f64> {
        // Both classes needed, as `average_precision` requires.
        if pos <= 0.0 || neg <= 0.0 {
            return None;
        }
        let (mut tp, mut fp, mut last_recall, mut ap) = (0.0, 0.0, 0.0, 0.0);
        let mut end = self.order.len();
        for g in (0..self.group_ends.len()).rev() {
            let start = if g == 0 { 0 } else { self.group_ends[g - 1] };
            for k in (start..end).rev() {
                let w = weight(weights, self.order[k]);
                if self.sorted_events[k] == 1.0 {
                    tp += w;
                } else {
                    fp += w;
                }
            }
            if tp + fp > 0.0 {
                let recall = tp / pos;
                ap += (recall - last_recall) * tp / (tp + fp);
                last_recall = recall;
            }
            end = start;
        }
        Some(ap)
    }
}

/// The AUC with row weights (equal to scikit-learn's `roc_auc_score` with `sample_weight`).
pub fn auc_weighted(outcomes: &[u32], scores: &[f64], weights: Option<&[f64]>) -> Result<f64> {
    const WHAT: &str = "the AUC";
    check_weights(WHAT, weights, outcomes.len())?;
    let ranked = RankedScores::new(outcomes, scores)?;
    class_weights(WHAT, outcomes, weights)?;
    ranked
        .auc(weights)
        .ok_or_else(|| bad(WHAT, "both classes need a positive weight"))
}

/// Average precision: Σ (Rₖ − Rₖ₋₁) Pₖ over the distinct scores from the highest down, where
/// Pₖ and Rₖ are precision and recall when rows scoring at or above the k-th score are
/// called positive (no interpolation; the definition scikit-learn's
/// `average_precision_score` uses).
pub fn average_precision(outcomes: &[u32], scores: &[f64], weights: Option<&[f64]>) -> Result<f64> {
    const WHAT: &str = "the average precision";
    check_lengths(WHAT, outcomes.len(), scores.len(), "predictions")?;
    check_codes01(WHAT, outcomes)?;
    check_scores(WHAT, scores)?;
    check_weights(WHAT, weights, outcomes.len())?;
    let (pos, _) = class_weights(WHAT, outcomes, weights)?;
    let order = order_by(scores);
    let (mut tp, mut fp, mut last_recall, mut ap) = (0.0, 0.0, 0.0, 0.0);
    let mut k = order.len();
    while k > 0 {
        let top = scores[order[k - 1]];
        while k > 0 && scores[order[k - 1]] == top {
            let r = order[k - 1];
            if outcomes[r] == 1 {
                tp += weight(weights, r);
            } else {
                fp += weight(weights, r);
            }
            k -= 1;
        }
        if tp + fp > 0.0 {
            let recall = tp / pos;
            ap += (recall - last_recall) * tp / (tp + fp);
            last_recall = recall;
        }
    }
    Ok(ap)
}

/// The smallest distance from 0 and 1 a probability is moved to before its logarithm is
/// taken in [`log_loss`]: machine epsilon, as scikit-learn's `log_loss` does for float64.
pub const LOG_LOSS_CLIP: f64 = f64::EPSILON;

/// Mean negative log-likelihood, −Σ w [y ln p + (1 − y) ln(1 − p)] / Σ w, with p first moved
/// into [ε, 1 − ε], ε = [`LOG_LOSS_CLIP`] (so a confident wrong prediction costs about 36,
/// not infinity).
pub fn log_loss(outcomes: &[u32], probabilities: &[f64], weights: Option<&[f64]>) -> Result<f64> {
    const WHAT: &str = "the log loss";
    check_lengths(WHAT, outcomes.len(), probabilities.len(), "predictions")?;
    check_codes01(WHAT, outcomes)?;
    check_probabilities(WHAT, probabilities)?;
    check_weights(WHAT, weights, outcomes.len())?;
    let (mut sum, mut total) = (0.0, 0.0);
    for (i, (&y, &p)) in outcomes.iter().zip(probabilities).enumerate() {
        let w = weight(weights, i);
        let p = p.clamp(LOG_LOSS_CLIP, 1.0 - LOG_LOSS_CLIP);
        sum -= w * if y == 1 { p.ln() } else { (1.0 - p).ln() };
        total += w;
    }
    Ok(sum / total)
}

/// Brier score and its scaled form.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Brier {
    /// Mean squared difference between probability and outcome (Brier 1950, two-class form).
    pub score: f64,
    /// The Brier score of predicting the (weighted) prevalence φ for every row: φ(1 − φ).
    pub reference: f64,
    /// 1 − score / reference: 1 is perfect, 0 is no better than the prevalence, below 0 worse.
    pub scaled: f64,
}

/// The Brier score, the Brier score of the prevalence and the scaled Brier score. Both
/// classes must be present (otherwise the reference is 0).
pub fn brier(outcomes: &[u32], probabilities: &[f64], weights: Option<&[f64]>) -> Result<Brier> {
    const WHAT: &str = "the Brier score";
    check_lengths(WHAT, outcomes.len(), probabilities.len(), "predictions")?;
    check_codes01(WHAT, outcomes)?;
    check_probabilities(WHAT, probabilities)?;
    check_weights(WHAT, weights, outcomes.len())?;
    let (pos, neg) = class_weights(WHAT, outcomes, weights)?;
    let mut sum = 0.0;
    for (i, (&y, &p)) in outcomes.iter().zip(probabilities).enumerate() {
        sum += weight(weights, i) * (p - f64::from(y)).powi(2);
    }
    Ok(Brier::of_sums(sum, pos, neg))
}

impl Brier {
    /// From the weighted sum of squared errors and the events' and non-events' weights.
    fn of_sums(sum: f64, pos: f64, neg: f64) -> Brier {
        let score = sum / (pos + neg);
        let phi = pos / (pos + neg);
        let reference = phi * (1.0 - phi);
        Brier {
            score,
            reference,
            scaled: 1.0 - score / reference,
        }
    }
}

/// Probabilities are moved into [c, 1 − c] with this c before their logit is taken for the
/// calibration fits (common practice, no source): a prediction of exactly 0 or 1 becomes a
/// logit of about ∓23 instead of infinity.
pub const CALIBRATION_CLIP: f64 = 1e-10;

/// Calibration summaries from logistic recalibration (Cox, Biometrika 1958; Van Calster et
/// al., J Clin Epidemiol 2016;74:167–176).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Calibration {
    /// Calibration-in-the-large: a in logit P(y = 1) = a + logit(p), the logit of the
    /// prediction as an offset. 0 is ideal; above 0 the model predicts too low on average.
    pub in_the_large: f64,
    /// Calibration slope: b in logit P(y = 1) = a′ + b · logit(p). 1 is ideal; below 1 the
    /// predictions are too extreme (typical of overfitting), above 1 too modest.
    pub slope: f64,
    /// The a′ fitted together with the slope.
    pub slope_intercept: f64,
    /// Σ w y / Σ w p: observed events over expected events. 1 is ideal.
    pub observed_expected: f64,
    /// Weighted share of events.
    pub observed: f64,
    /// Weighted mean prediction.
    pub expected: f64,
}

/// Calibration-in-the-large, calibration slope (both by Newton's method on the logistic
/// log-likelihood) and the observed/expected ratio. Logits of probabilities clipped as in
/// [`CALIBRATION_CLIP`]. Refused when every prediction is the same (no slope) or when the
/// predictions separate the classes perfectly (the slope is then unbounded).
pub fn calibration(
    outcomes: &[u32],
    probabilities: &[f64],
    weights: Option<&[f64]>,
) -> Result<Calibration> {
    CalibrationGroups::new(outcomes, probabilities)?.calibration(weights)
}

/// Rows grouped once by (prediction, outcome) for [`calibration`], so that each of many
/// resamples (row weights) costs one pass adding up its weights per group and then fits on
/// the groups: a forest's probabilities are shares of votes over a few hundred trees and take
/// few distinct values, so its groups are far fewer than its rows. The fit's sums run over
/// groups in order of prediction.
#[derive(Debug, Clone)]
pub struct CalibrationGroups {
    outcomes: Vec<u32>,
    /// Each row's group.
    group_of: Vec<u32>,
    /// Per group: the prediction, its clipped logit, and the outcome (1 or 0).
    probability: Vec<f64>,
    logit: Vec<f64>,
    event: Vec<f64>,
}

impl CalibrationGroups {
    pub fn new(outcomes: &[u32], probabilities: &[f64]) -> Result<Self> {
        const WHAT: &str = "the calibration slope";
        check_lengths(WHAT, outcomes.len(), probabilities.len(), "predictions")?;
        check_codes01(WHAT, outcomes)?;
        check_probabilities(WHAT, probabilities)?;
        let mut order: Vec<usize> = (0..outcomes.len()).collect();
        order.sort_unstable_by(|&a, &b| {
            probabilities[a]
                .total_cmp(&probabilities[b])
                .then(outcomes[a].cmp(&outcomes[b]))
        });
        let mut groups = CalibrationGroups {
            outcomes: outcomes.to_vec(),
            group_of: vec![0; outcomes.len()],
            probability: Vec::new(),
            logit: Vec::new(),
            event: Vec::new(),
        };
        let mut last: Option<(u64, u32)> = None;
        for &r in &order {
            let key = (probabilities[r].to_bits(), outcomes[r]);
            if last != Some(key) {
                last = Some(key);
                let p = probabilities[r];
                let clipped = p.clamp(CALIBRATION_CLIP, 1.0 - CALIBRATION_CLIP);
                groups.probability.push(p);
                groups.logit.push((clipped / (1.0 - clipped)).ln());
                groups.event.push(f64::from(outcomes[r]));
            }
            groups.group_of[r] = (groups.probability.len() - 1) as u32;
        }
        Ok(groups)
    }

    /// The calibration figures of the rows with these weights (`None`: every row once).
    pub fn calibration(&self, weights: Option<&[f64]>) -> Result<Calibration> {
        const WHAT: &str = "the calibration slope";
        check_weights(WHAT, weights, self.outcomes.len())?;
        let (pos, neg) = class_weights(WHAT, &self.outcomes, weights)?;
        let mut w = vec![0.0; self.probability.len()];
        for (r, &g) in self.group_of.iter().enumerate() {
            w[g as usize] += weight(weights, r);
        }
        self.fit(&w, pos, neg)
    }

    /// The calibration figures from each group's weight `w` and the events' and
    /// non-events' weights (both positive).
    fn fit(&self, w: &[f64], pos: f64, neg: f64) -> Result<Calibration> {
        const WHAT: &str = "the calibration slope";
        let expected_sum: f64 = w.iter().zip(&self.probability).map(|(w, p)| w * p).sum();
        if expected_sum <= 0.0 {
            return Err(bad(
                WHAT,
                "every prediction is 0, so observed/expected is undefined. Check that these \
                 are the event probabilities",
            ));
        }
        let total = pos + neg;
        let mean_logit = w.iter().zip(&self.logit).map(|(w, l)| w * l).sum::<f64>() / total;
        let spread = w
            .iter()
            .zip(&self.logit)
            .map(|(w, l)| w * (l - mean_logit).powi(2))
            .sum::<f64>()
            / total;
        if spread <= 1e-12 {
            return Err(bad(
                WHAT,
                "every prediction is the same, so there is no slope to fit. A model that gives \
                 every row the same probability cannot be judged by calibration slope",
            ));
        }
        // Groups without weight (a resample's rows not drawn) add exactly nothing to any sum
        // of the fits (0 times a finite number is ±0), so they are left out: the same sums
        // in the same order, a third fewer terms in each of a dozen passes.
        let (mut y, mut x, mut kept) = (Vec::new(), Vec::new(), Vec::new());
        for ((&e, &l), &w) in self.event.iter().zip(&self.logit).zip(w) {
            if w > 0.0 {
                y.push(e);
                x.push(l);
                kept.push(w);
            }
        }
        let (y, x, w) = (&y[..], &x[..], &kept[..]);
        // Both fits start from a = 0, b = 1: the sums there taken once.
        let start = logistic_sums(y, x, w, 0.0, 1.0);
        let in_the_large = newton_logistic(y, x, w, start, true)
            .map(|(a, _)| a)
            .ok_or_else(|| bad(WHAT, "calibration-in-the-large did not converge"))?;
        let (slope_intercept, slope) = newton_logistic(y, x, w, start, false).ok_or_else(|| {
            bad(
                WHAT,
                "the logistic recalibration did not settle: the predictions separate events \
                 from non-events perfectly, so the slope is unbounded. Judge calibration on \
                 more (or held-out) rows",
            )
        })?;
        Ok(Calibration {
            in_the_large,
            slope,
            slope_intercept,
            observed_expected: pos / expected_sum,
            observed: pos / total,
            expected: expected_sum / total,
        })
    }
}

/// The two-class figures a bootstrap resamples (average precision, log loss, Brier score,
/// calibration, the confusion counts at a threshold) of one set of predictions, for many
/// row weightings: the predictions are checked, sorted and grouped once, each row's log-loss
/// and Brier terms computed once, and each weighting then costs one pass over the rows for
/// every sum plus the average precision's pass in score order. Every sum runs over the rows
/// in the same (row) order as in each figure's own function, so the figures are theirs to
/// the bit (tested against them): where those add a row's weight to its class or cell
/// alone, this pass adds `w · 1` there and `w · 0 = +0` to the others, which changes no
/// sum (weights are not negative).
#[derive(Debug, Clone)]
pub struct WeightedFigures {
    ranked: Option<RankedScores>,
    groups: Option<CalibrationGroups>,
    /// Per row: 1 for an event, 0 otherwise; called positive at the threshold (1 or 0);
    /// its log-loss term (the logarithm [`log_loss`] takes); its squared error.
    event: Vec<f64>,
    called: Option<Vec<f64>>,
    log_term: Vec<f64>,
    squared: Vec<f64>,
}

/// What [`WeightedFigures::of`] gives: each figure, or None where it is undefined (one
/// class without weight, say) or the predictions could not be judged.
#[derive(Debug, Clone, PartialEq)]
pub struct Weighted {
    pub average_precision: Option<f64>,
    pub log_loss: Option<f64>,
    pub brier: Option<Brier>,
    pub calibration: Option<Calibration>,
    pub confusion: Option<Confusion>,
}

impl WeightedFigures {
    /// None when the outcomes or probabilities cannot be judged (as [`log_loss`] would
    /// refuse them); the confusion counts are left out when the threshold is not in (0, 1).
    pub fn new(outcomes: &[u32], probabilities: &[f64], threshold: f64) -> Option<Self> {
        const WHAT: &str = "the resampled figures";
        check_lengths(WHAT, outcomes.len(), probabilities.len(), "predictions").ok()?;
        check_codes01(WHAT, outcomes).ok()?;
        check_probabilities(WHAT, probabilities).ok()?;
        let pairs = || outcomes.iter().zip(probabilities);
        Some(WeightedFigures {
            ranked: RankedScores::new(outcomes, probabilities).ok(),
            groups: CalibrationGroups::new(outcomes, probabilities).ok(),
            event: outcomes.iter().map(|&y| f64::from(y)).collect(),
            called: check_threshold(WHAT, threshold).ok().map(|_| {
                probabilities
                    .iter()
                    .map(|&p| f64::from(u8::from(p >= threshold)))
                    .collect()
            }),
            log_term: pairs()
                .map(|(&y, &p)| {
                    let p = p.clamp(LOG_LOSS_CLIP, 1.0 - LOG_LOSS_CLIP);
                    if y == 1 {
                        p.ln()
                    } else {
                        (1.0 - p).ln()
                    }
                })
                .collect(),
            squared: pairs().map(|(&y, &p)| (p - f64::from(y)).powi(2)).collect(),
        })
    }

    /// The figures with row weights `w` (one per row, finite, not negative, not all zero:
    /// a resample's draw counts).
    pub fn of(&self, w: &[f64]) -> Weighted {
        assert_eq!(w.len(), self.event.len(), "one weight a row");
        let (mut loss, mut total, mut squared) = (0.0, 0.0, 0.0);
        let (mut pos, mut neg) = (0.0, 0.0);
        for (((&w, &e), &l), &q) in w
            .iter()
            .zip(&self.event)
            .zip(&self.log_term)
            .zip(&self.squared)
        {
            loss -= w * l;
            total += w;
            squared += w * q;
            pos += w * e;
            neg += w * (1.0 - e);
        }
        let both = pos > 0.0 && neg > 0.0;
        let confusion = self.called.as_ref().map(|called| {
            let [mut tp, mut fp, mut tn, mut fneg] = [0.0; 4];
            for ((&w, &e), &c) in w.iter().zip(&self.event).zip(called) {
                tp += w * (e * c);
                fp += w * ((1.0 - e) * c);
                tn += w * ((1.0 - e) * (1.0 - c));
                fneg += w * (e * (1.0 - c));
            }
            Confusion {
                true_positives: tp,
                false_positives: fp,
                true_negatives: tn,
                false_negatives: fneg,
            }
        });
        let calibration = self.groups.as_ref().filter(|_| both).and_then(|g| {
            let mut gw = vec![0.0; g.probability.len()];
            for (&w, &at) in w.iter().zip(&g.group_of) {
                gw[at as usize] += w;
            }
            g.fit(&gw, pos, neg).ok()
        });
        let brier = both.then(|| Brier::of_sums(squared, pos, neg));
        Weighted {
            average_precision: self
                .ranked
                .as_ref()
                .and_then(|r| r.average_precision_of(Some(w), pos, neg)),
            log_loss: Some(loss / total),
            brier,
            calibration,
            confusion,
        }
    }
}

/// The weighted log-likelihood of logit P(y = 1) = a + b·x at one point, with its gradient
/// and Hessian (negated), summed in one pass with one exponential and one logarithm a row.
#[derive(Debug, Clone, Copy)]
struct LogisticSums {
    loglik: f64,
    g: [f64; 2],
    /// h00, h01, h11.
    h: [f64; 3],
}

fn logistic_sums(y: &[f64], x: &[f64], w: &[f64], a: f64, b: f64) -> LogisticSums {
    let mut s = LogisticSums {
        loglik: 0.0,
        g: [0.0; 2],
        h: [0.0; 3],
    };
    for i in 0..y.len() {
        let (wi, xi) = (w[i], x[i]);
        let eta = a + b * xi;
        // e^{-|eta|} gives both the sigmoid and ln(1 + e^eta) without overflow.
        let e = (-eta.abs()).exp();
        // Above 0: 1/(1 + e) and eta + ln(1 + e); otherwise e/(1 + e) and 0 + ln(1 + e),
        // the same numbers chosen without a branch (eta's sign is a coin toss row to row).
        let up = eta > 0.0;
        let mu = if up { 1.0 } else { e } / (1.0 + e);
        let softplus = if up { eta } else { 0.0 } + e.ln_1p();
        s.loglik += wi * (y[i] * eta - softplus);
        let r = wi * (y[i] - mu);
        let v = wi * mu * (1.0 - mu);
        s.g[0] += r;
        s.g[1] += r * xi;
        s.h[0] += v;
        s.h[1] += v * xi;
        s.h[2] += v * xi * xi;
    }
    s
}

/// Fits logit P(y = 1) = a + b·x with weights `w` by Newton's method with step halving; with
/// `offset_only` b is fixed at 1 and only a is fitted. Starts from a = 0, b = 1, where the
/// sums are `start` ([`logistic_sums`]). Returns (a, b), or None if it does not converge in
/// 100 steps.
fn newton_logistic(
    y: &[f64],
    x: &[f64],
    w: &[f64],
    start: LogisticSums,
    offset_only: bool,
) -> Option<(f64, f64)> {
    let (mut a, mut b) = (0.0, 1.0);
    let mut at = start;
    for _ in 0..100 {
        let ([g0, g1], [h00, h01, h11]) = (at.g, at.h);
        let (da, db) = if offset_only {
            if h00 <= 0.0 {
                return None;
            }
            (g0 / h00, 0.0)
        } else {
            let det = h00 * h11 - h01 * h01;
            if det <= 1e-300 * h00.max(h11).max(1.0) {
                return None;
            }
            ((h11 * g0 - h01 * g1) / det, (h00 * g1 - h01 * g0) / det)
        };
        let mut t = 1.0;
        let mut next = logistic_sums(y, x, w, a + da, b + db);
        while next.loglik < at.loglik - 1e-12 * at.loglik.abs() && t > 1e-6 {
            t /= 2.0;
            next = logistic_sums(y, x, w, a + t * da, b + t * db);
        }
        a += t * da;
        b += t * db;
        at = next;
        if !(a.is_finite() && b.is_finite()) || b.abs() > 1e6 {
            return None;
        }
        if (t * da).abs().max((t * db).abs()) < 1e-10 {
            return Some((a, b));
        }
    }
    None
}

pub(crate) fn sigmoid(eta: f64) -> f64 {
    if eta >= 0.0 {
        1.0 / (1.0 + (-eta).exp())
    } else {
        let e = eta.exp();
        e / (1.0 + e)
    }
}

/// ln(1 + e^eta) without overflow.
pub(crate) fn softplus(eta: f64) -> f64 {
    if eta > 0.0 {
        eta + (-eta).exp().ln_1p()
    } else {
        eta.exp().ln_1p()
    }
}

/// Counts (or summed weights) of the four cells at a threshold; a row is called positive
/// when its probability is at or above the threshold.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Confusion {
    pub true_positives: f64,
    pub false_positives: f64,
    pub true_negatives: f64,
    pub false_negatives: f64,
}

/// The confusion counts at `threshold` (rows with probability ≥ threshold are positive).
pub fn confusion(
    outcomes: &[u32],
    probabilities: &[f64],
    threshold: f64,
    weights: Option<&[f64]>,
) -> Result<Confusion> {
    const WHAT: &str = "the figures at a threshold";
    check_lengths(WHAT, outcomes.len(), probabilities.len(), "predictions")?;
    check_codes01(WHAT, outcomes)?;
    check_probabilities(WHAT, probabilities)?;
    check_weights(WHAT, weights, outcomes.len())?;
    check_threshold(WHAT, threshold)?;
    let mut c = Confusion {
        true_positives: 0.0,
        false_positives: 0.0,
        true_negatives: 0.0,
        false_negatives: 0.0,
    };
    for (i, (&y, &p)) in outcomes.iter().zip(probabilities).enumerate() {
        let w = weight(weights, i);
        match (y == 1, p >= threshold) {
            (true, true) => c.true_positives += w,
            (false, true) => c.false_positives += w,
            (false, false) => c.true_negatives += w,
            (true, false) => c.false_negatives += w,
        }
    }
    Ok(c)
}

pub(crate) fn check_threshold(what: &str, threshold: f64) -> Result<()> {
    if !(threshold > 0.0 && threshold < 1.0) {
        return Err(bad(
            what,
            format!(
                "the threshold {threshold} is not strictly between 0 and 1. Give a probability \
                 such as 0.5, or the risk above which you would act"
            ),
        ));
    }
    Ok(())
}

/// A proportion with its 95% Wilson interval.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Proportion {
    pub value: f64,
    pub successes: u64,
    pub total: u64,
    pub low: f64,
    pub high: f64,
}

impl Proportion {
    /// None when `total` is 0 (the proportion is undefined).
    pub fn wilson95(successes: u64, total: u64) -> Option<Proportion> {
        let i = wilson(successes, total, Z95)?;
        Some(Proportion {
            value: successes as f64 / total as f64,
            successes,
            total,
            low: i.low,
            high: i.high,
        })
    }
}

/// The usual figures at one threshold, rows unweighted. Each proportion carries a 95% Wilson
/// interval and is None when its denominator is empty (say, PPV when no row is called
/// positive). Balanced accuracy and F1 have no closed-form interval here: use
/// [`super::bootstrap`] with [`confusion`] for one.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct AtThreshold {
    pub threshold: f64,
    pub confusion: Confusion,
    /// TP / (TP + FN), also called recall.
    pub sensitivity: Option<Proportion>,
    /// TN / (TN + FP).
    pub specificity: Option<Proportion>,
    /// Positive predictive value, TP / (TP + FP), also called precision.
    pub ppv: Option<Proportion>,
    /// Negative predictive value, TN / (TN + FN).
    pub npv: Option<Proportion>,
    pub accuracy: Proportion,
    /// (sensitivity + specificity) / 2.
    pub balanced_accuracy: Option<f64>,
    /// 2 TP / (2 TP + FP + FN).
    pub f1: Option<f64>,
}

/// Figures at `threshold` (0 < threshold < 1) with Wilson intervals.
pub fn at_threshold(
    outcomes: &[u32],
    probabilities: &[f64],
    threshold: f64,
) -> Result<AtThreshold> {
    let c = confusion(outcomes, probabilities, threshold, None)?;
    let (tp, fp, tn, fneg) = (
        c.true_positives as u64,
        c.false_positives as u64,
        c.true_negatives as u64,
        c.false_negatives as u64,
    );
    let sensitivity = Proportion::wilson95(tp, tp + fneg);
    let specificity = Proportion::wilson95(tn, tn + fp);
    let accuracy = Proportion::wilson95(tp + tn, tp + tn + fp + fneg)
        .ok_or_else(|| bad("the figures at a threshold", "there are no rows"))?;
    let balanced_accuracy = match (&sensitivity, &specificity) {
        (Some(a), Some(b)) => Some((a.value + b.value) / 2.0),
        _ => None,
    };
    let f1 = (2 * tp + fp + fneg > 0).then(|| 2.0 * tp as f64 / (2 * tp + fp + fneg) as f64);
    Ok(AtThreshold {
        threshold,
        confusion: c,
        sensitivity,
        specificity,
        ppv: Proportion::wilson95(tp, tp + fp),
        npv: Proportion::wilson95(tn, tn + fneg),
        accuracy,
        balanced_accuracy,
        f1,
    })
}

/// The threshold that maximises Youden's J = sensitivity + specificity − 1.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Youden {
    /// Rows scoring at or above this are called positive.
    pub threshold: f64,
    pub j: f64,
    pub sensitivity: f64,
    pub specificity: f64,
}

/// Youden's best threshold over the ROC points (rows unweighted); on ties in J, the highest
/// threshold. Youden, Cancer 1950;3:32–35.
pub fn youden(outcomes: &[u32], scores: &[f64]) -> Result<Youden> {
    let points = super::curves::roc_points(outcomes, scores, None)?;
    let mut best: Option<Youden> = None;
    for p in &points {
        let Some(threshold) = p.threshold else {
            continue;
        };
        let j = p.true_positive_rate - p.false_positive_rate;
        if best.as_ref().is_none_or(|b| j > b.j) {
            best = Some(Youden {
                threshold,
                j,
                sensitivity: p.true_positive_rate,
                specificity: 1.0 - p.false_positive_rate,
            });
        }
    }
    best.ok_or_else(|| bad("Youden's threshold", "there are no rows"))
}

/// Net benefit of acting on rows called positive at threshold probability `pt`
/// (Vickers & Elkin, Med Decis Making 2006;26:565–574): TP/n − FP/n · pt/(1 − pt).
pub fn net_benefit(true_positives: f64, false_positives: f64, rows: f64, pt: f64) -> f64 {
    true_positives / rows - false_positives / rows * pt / (1.0 - pt)
}

/// Net benefit of treating everyone at prevalence φ: φ − (1 − φ) · pt/(1 − pt).
pub fn net_benefit_treat_all(prevalence: f64, pt: f64) -> f64 {
    prevalence - (1.0 - prevalence) * pt / (1.0 - pt)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Hanley & McNeil, Radiology 1982;143:29–36, Table 1: CT ratings 1–5 of 58 normal and
    /// 51 abnormal cases. Returns (outcome, rating) rows.
    pub(crate) fn hanley_mcneil_table() -> (Vec<u32>, Vec<f64>) {
        let normal = [33, 6, 6, 11, 2];
        let abnormal = [3, 2, 2, 11, 33];
        let (mut y, mut s) = (Vec::new(), Vec::new());
        for (k, (&a, &b)) in normal.iter().zip(&abnormal).enumerate() {
            for _ in 0..a {
                y.push(0);
                s.push((k + 1) as f64);
            }
            for _ in 0..b {
                y.push(1);
                s.push((k + 1) as f64);
            }
        }
        (y, s)
    }

    fn close(a: f64, b: f64, tol: f64) -> bool {
        (a - b).abs() <= tol
    }

    #[test]
    fn auc_and_standard_errors_match_hanley_mcneil_and_delong() {
        // Hanley & McNeil 1982 table: AUC 0.8932, their SE 0.0325; DeLong et al. 1988 SE
        // 0.03072, 95% CI 0.8330–0.9534 (shared/design/references.md, recomputed).
        let (y, s) = hanley_mcneil_table();
        let a = auc(&y, &s).unwrap();
        assert!(close(a.value, 0.8932, 5e-5), "{a:?}");
        assert!(close(a.se_hanley_mcneil.unwrap(), 0.0325, 5e-5), "{a:?}");
        assert!(close(a.se_delong.unwrap(), 0.03072, 5e-6), "{a:?}");
        let ci = a.interval.unwrap();
        assert!(
            close(ci.low, 0.8330, 5e-5) && close(ci.high, 0.9534, 5e-5),
            "{a:?}"
        );
        assert_eq!((a.events, a.non_events), (51, 58));
        // The sorted-once form gives the same value, with and without unit weights.
        let r = RankedScores::new(&y, &s).unwrap();
        assert!(close(r.auc(None).unwrap(), a.value, 1e-12));
        assert!(close(
            r.auc(Some(&vec![1.0; y.len()])).unwrap(),
            a.value,
            1e-12
        ));
    }

    #[test]
    fn bootstrap_interval_of_the_auc_agrees_with_delong() {
        // DeLong et al. 1988 on the Hanley & McNeil 1982 table: 95% CI 0.8330–0.9534
        // (references.md, recomputed). A 2,000-resample percentile bootstrap of the same rows
        // should land within 0.015 of each end (its Monte Carlo error is about 0.003; the
        // percentile interval of an AUC near 0.9 leans a little low: common practice, no
        // source for the tolerance).
        let (y, s) = hanley_mcneil_table();
        let ranked = RankedScores::new(&y, &s).unwrap();
        let b = super::super::bootstrap(y.len(), 2000, 0.95, 11, None, |w| ranked.auc(Some(w)))
            .unwrap();
        assert!(close(b.estimate, 0.8932, 5e-5), "{b:?}");
        assert!(
            close(b.low, 0.8330, 0.015) && close(b.high, 0.9534, 0.015),
            "{b:?}"
        );
        assert_eq!(b.undefined, 0);
    }

    /// The AUC by comparing every event with every non-event (ties one half): the
    /// Mann–Whitney definition, O(rows²), no sorting or weights.
    fn auc_by_pairs(y: &[u32], s: &[f64]) -> Option<f64> {
        let (mut wins, mut pairs) = (0.0, 0.0);
        for (i, &yi) in y.iter().enumerate() {
            for (j, &yj) in y.iter().enumerate() {
                if yi == 1 && yj == 0 {
                    pairs += 1.0;
                    wins += if s[i] > s[j] {
                        1.0
                    } else if s[i] == s[j] {
                        0.5
                    } else {
                        0.0
                    };
                }
            }
        }
        (pairs > 0.0).then(|| wins / pairs)
    }

    #[test]
    fn bootstrap_intervals_equal_resampling_the_rows_and_recomputing() {
        // The brute-force bootstrap (Efron & Tibshirani 1993, ch. 13, from memory): draw each
        // resample's rows by the documented scheme (`Quick` keyed (seed, MetricResample, b),
        // one row per `below` draw), build the resampled outcomes and scores, compute the AUC
        // and average precision from scratch (pairs; sklearn's definition of AP on the
        // repeated rows), take type-7 percentiles. The weighted, sorted-once, spread path
        // must give the same intervals. Scores with many ties test the tie handling.
        use crate::random::{Purpose, Quick};
        let n = 300;
        let y: Vec<u32> = (0..n)
            .map(|i| u32::from((i * 7 + i / 5) % 3 == 0))
            .collect();
        let s: Vec<f64> = (0..n)
            .map(|i| ((i * 13) % 17) as f64 / 17.0 * 0.6 + 0.3 * y[i] as f64)
            .collect();
        let (resamples, seed) = (400, 5);
        let (mut aucs, mut aps) = (Vec::new(), Vec::new());
        for b in 0..resamples {
            let mut rng = Quick::new(seed, Purpose::MetricResample, b as u64);
            let rows: Vec<usize> = (0..n).map(|_| rng.below(n as u64) as usize).collect();
            let yb: Vec<u32> = rows.iter().map(|&r| y[r]).collect();
            let sb: Vec<f64> = rows.iter().map(|&r| s[r]).collect();
            aucs.extend(auc_by_pairs(&yb, &sb));
            aps.extend(average_precision(&yb, &sb, None).ok());
        }
        let ranked = RankedScores::new(&y, &s).unwrap();
        // Two threads' worth of interleaving: jobs run odd first, then even.
        let shuffled = |count: usize, job: &(dyn Fn(usize) + Sync)| {
            (0..count).filter(|i| i % 2 == 1).for_each(job);
            (0..count).filter(|i| i % 2 == 0).for_each(job);
        };
        for spread in [None, Some(&shuffled as crate::spread::Spread<'_>)] {
            let got = super::super::bootstrap_many(n, resamples, 0.95, seed, 2, spread, |w, o| {
                o[0] = ranked.auc(Some(w));
                o[1] = ranked.average_precision(Some(w));
            })
            .unwrap();
            for (values, got) in [&mut aucs, &mut aps].into_iter().zip(&got) {
                values.sort_by(f64::total_cmp);
                let got = got.as_ref().unwrap();
                assert_eq!(got.used, resamples);
                let low = crate::metrics::quantile_sorted(values, 0.025);
                let high = crate::metrics::quantile_sorted(values, 0.975);
                assert!(
                    close(got.low, low, 1e-12) && close(got.high, high, 1e-12),
                    "{got:?} {low} {high}"
                );
            }
        }
        assert!(close(
            ranked.auc(None).unwrap(),
            auc_by_pairs(&y, &s).unwrap(),
            1e-12
        ));
        assert_eq!(
            ranked.average_precision(None),
            average_precision(&y, &s, None).ok()
        );
    }

    #[test]
    fn weights_equal_repeated_rows() {
        // Common practice, no source: a weight of 2 counts a row twice.
        let y = [0, 1, 1, 0, 1, 0];
        let p = [0.2, 0.7, 0.4, 0.5, 0.9, 0.1];
        let w = [1.0, 2.0, 1.0, 2.0, 1.0, 1.0];
        let y2 = [0, 1, 1, 1, 0, 0, 1, 0];
        let p2 = [0.2, 0.7, 0.7, 0.4, 0.5, 0.5, 0.9, 0.1];
        assert!(close(
            auc_weighted(&y, &p, Some(&w)).unwrap(),
            auc(&y2, &p2).unwrap().value,
            1e-12
        ));
        assert!(close(
            average_precision(&y, &p, Some(&w)).unwrap(),
            average_precision(&y2, &p2, None).unwrap(),
            1e-12
        ));
        assert!(close(
            log_loss(&y, &p, Some(&w)).unwrap(),
            log_loss(&y2, &p2, None).unwrap(),
            1e-12
        ));
        assert!(close(
            brier(&y, &p, Some(&w)).unwrap().score,
            brier(&y2, &p2, None).unwrap().score,
            1e-12
        ));
    }

    #[test]
    fn weighted_figures_are_each_figures_own_to_the_bit() {
        // The fused pass against the functions it stands in for (our own check: the same
        // sums in the same order must give the same bits), on predictions with ties, exact
        // 0 and 1 (clipped logs), rows of weight 0 and repeats, one-class weightings
        // (undefined figures) and a threshold outside (0, 1).
        let n = 300;
        let outcomes: Vec<u32> = (0..n)
            .map(|i| u32::from((i * 7 + i / 5) % 3 == 0))
            .collect();
        let p: Vec<f64> = (0..n)
            .map(|i| match i % 50 {
                0 => 0.0,
                1 => 1.0,
                k => ((k * 37 + i) % 40) as f64 / 40.0,
            })
            .collect();
        // Every row once, then 20 of the bootstrap's own resamples.
        let mut weightings: Vec<Vec<f64>> = vec![vec![1.0; n]];
        for b in 0..20 {
            let mut w = vec![0.0; n];
            crate::metrics::intervals::draw_resample(7, b, &mut w);
            weightings.push(w);
        }
        // Events only, then non-events only.
        weightings.push(outcomes.iter().map(|&y| f64::from(y)).collect());
        weightings.push(outcomes.iter().map(|&y| f64::from(1 - y)).collect());
        for threshold in [0.5, 0.3, 1.5] {
            let fused = WeightedFigures::new(&outcomes, &p, threshold).unwrap();
            let ranked = RankedScores::new(&outcomes, &p).unwrap();
            let groups = CalibrationGroups::new(&outcomes, &p).unwrap();
            for w in &weightings {
                let f = fused.of(w);
                let w = Some(&w[..]);
                assert_eq!(f.average_precision, ranked.average_precision(w));
                assert_eq!(f.log_loss, log_loss(&outcomes, &p, w).ok());
                assert_eq!(f.brier, brier(&outcomes, &p, w).ok());
                assert_eq!(f.calibration, groups.calibration(w).ok());
                assert_eq!(f.confusion, confusion(&outcomes, &p, threshold, w).ok());
            }
        }
        assert!(WeightedFigures::new(&outcomes, &vec![0.5; n - 1], 0.5).is_none());
        assert!(WeightedFigures::new(&vec![2; n], &p, 0.5).is_none());
    }

    #[test]
    fn brier_matches_the_worked_example() {
        // Brier, Mon Weather Rev 1950;78:1–3, binary form: y = [0,1,1,0], p = [.1,.9,.8,.3]
        // gives 0.0375 (references.md, recomputed). Prevalence 0.5: reference 0.25.
        let b = brier(&[0, 1, 1, 0], &[0.1, 0.9, 0.8, 0.3], None).unwrap();
        assert!(close(b.score, 0.0375, 1e-12));
        assert!(close(b.reference, 0.25, 1e-12));
        assert!(close(b.scaled, 1.0 - 0.0375 / 0.25, 1e-12));
    }

    #[test]
    fn average_precision_small_case() {
        // scikit-learn's documented example of average_precision_score:
        // y = [0, 0, 1, 1], scores [0.1, 0.4, 0.35, 0.8] → 0.8333... (from memory; also
        // checked in tests/reference/check_metrics.py against scikit-learn itself).
        let ap = average_precision(&[0, 0, 1, 1], &[0.1, 0.4, 0.35, 0.8], None).unwrap();
        assert!(close(ap, 5.0 / 6.0, 1e-12), "{ap}");
    }

    #[test]
    fn log_loss_clips_certain_mistakes() {
        let l = log_loss(&[1, 0], &[0.0, 0.0], None).unwrap();
        assert!(close(l, -(f64::EPSILON.ln()) / 2.0, 1e-9), "{l}");
        assert!(l.is_finite());
    }

    #[test]
    fn a_calibrated_model_has_slope_one_and_zero_intercept() {
        // Common practice, no source: outcomes drawn from the predictions themselves give
        // calibration-in-the-large near 0, slope near 1, O/E near 1; halving the log-odds
        // (predictions too modest) gives a slope near 2.
        use crate::random::{stream, Purpose};
        use rand_chacha::rand_core::RngCore;
        let mut rng = stream(3, Purpose::MetricResample, 0);
        let n = 20_000;
        let (mut y, mut p, mut half) = (Vec::new(), Vec::new(), Vec::new());
        for i in 0..n {
            let eta = -3.0 + 6.0 * i as f64 / n as f64;
            let prob = sigmoid(eta);
            let u = (rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64;
            y.push(u32::from(u < prob));
            p.push(prob);
            half.push(sigmoid(eta / 2.0));
        }
        let c = calibration(&y, &p, None).unwrap();
        assert!(
            close(c.in_the_large, 0.0, 0.05) && close(c.slope, 1.0, 0.05),
            "{c:?}"
        );
        assert!(close(c.observed_expected, 1.0, 0.03), "{c:?}");
        let c2 = calibration(&y, &half, None).unwrap();
        assert!(close(c2.slope, 2.0, 0.1), "{c2:?}");
    }

    #[test]
    fn grouped_calibration_with_weights_equals_the_rows_repeated() {
        // A row of weight k counts as k copies of it (the definition of a frequency weight);
        // grouping happens either way, so only the order of the sums differs.
        let p = [0.1, 0.3, 0.3, 0.6, 0.8, 0.2, 0.6, 0.9, 0.4, 0.3];
        let y = [0, 1, 0, 1, 1, 0, 0, 1, 1, 0];
        let w = [2.0, 1.0, 3.0, 0.0, 1.0, 2.0, 1.0, 1.0, 4.0, 1.0];
        let (mut yr, mut pr) = (Vec::new(), Vec::new());
        for i in 0..p.len() {
            for _ in 0..w[i] as usize {
                yr.push(y[i]);
                pr.push(p[i]);
            }
        }
        let a = CalibrationGroups::new(&y, &p)
            .unwrap()
            .calibration(Some(&w))
            .unwrap();
        let b = calibration(&yr, &pr, None).unwrap();
        for (x, z) in [
            (a.slope, b.slope),
            (a.slope_intercept, b.slope_intercept),
            (a.in_the_large, b.in_the_large),
            (a.observed_expected, b.observed_expected),
        ] {
            assert!(close(x, z, 1e-12), "{a:?} {b:?}");
        }
    }

    #[test]
    fn calibration_refuses_constant_and_separating_predictions() {
        let e = calibration(&[0, 1, 0, 1], &[0.3; 4], None).unwrap_err();
        assert!(
            e.to_string().contains("every prediction is the same"),
            "{e}"
        );
        let e = calibration(&[0, 0, 1, 1], &[0.1, 0.2, 0.8, 0.9], None).unwrap_err();
        assert!(e.to_string().contains("separate"), "{e}");
    }

    #[test]
    fn figures_at_a_threshold_with_wilson_intervals() {
        // Hanley & McNeil table with rating ≥ 4 positive: TP 44, FN 7, FP 13, TN 45. Ratings
        // mapped to probabilities r/5 and threshold 0.8. Intervals: Wilson (Newcombe 1998).
        let (y, s) = hanley_mcneil_table();
        let p: Vec<f64> = s.iter().map(|r| r / 5.0).collect();
        let t = at_threshold(&y, &p, 0.75).unwrap();
        let c = t.confusion;
        assert_eq!(
            (
                c.true_positives,
                c.false_negatives,
                c.false_positives,
                c.true_negatives
            ),
            (44.0, 7.0, 13.0, 45.0)
        );
        let sens = t.sensitivity.unwrap();
        assert!(close(sens.value, 44.0 / 51.0, 1e-12));
        let w = wilson(44, 51, Z95).unwrap();
        assert_eq!((sens.low, sens.high), (w.low, w.high));
        assert!(close(t.specificity.unwrap().value, 45.0 / 58.0, 1e-12));
        assert!(close(t.ppv.unwrap().value, 44.0 / 57.0, 1e-12));
        assert!(close(t.npv.unwrap().value, 45.0 / 52.0, 1e-12));
        assert!(close(t.accuracy.value, 89.0 / 109.0, 1e-12));
        assert!(close(t.f1.unwrap(), 88.0 / 108.0, 1e-12));
        assert!(close(
            t.balanced_accuracy.unwrap(),
            (44.0 / 51.0 + 45.0 / 58.0) / 2.0,
            1e-12
        ));
        // Nobody called positive: PPV undefined, not NaN.
        let none = at_threshold(&[0, 1], &[0.1, 0.2], 0.9).unwrap();
        assert!(none.ppv.is_none() && none.f1 == Some(0.0));
    }

    #[test]
    fn youden_picks_rating_four_on_the_hanley_mcneil_table() {
        // J at rating ≥ 4: 44/51 − 13/58 = 0.6386; at ≥ 3: 46/51 − 19/58 = 0.5744; at ≥ 5:
        // 33/51 − 2/58 = 0.6126 (computed from the table, Hanley & McNeil 1982).
        let (y, s) = hanley_mcneil_table();
        let j = youden(&y, &s).unwrap();
        assert_eq!(j.threshold, 4.0);
        assert!(close(j.j, 44.0 / 51.0 - 13.0 / 58.0, 1e-12));
    }

    #[test]
    fn net_benefit_matches_vickers_and_elkin() {
        // Vickers & Elkin 2006 formula; values in references.md (recomputed): treat-all at
        // prevalence 0.30, and the Hanley–McNeil table with rating ≥ 4 positive.
        for (pt, v) in [(0.03, 0.278), (0.20, 0.125), (0.30, 0.0), (0.50, -0.400)] {
            assert!(close(net_benefit_treat_all(0.30, pt), v, 5e-4), "{pt}");
        }
        for (pt, model, all) in [
            (0.1, 0.39042, 0.40877),
            (0.2, 0.37385, 0.33486),
            (0.3, 0.35256, 0.23984),
            (0.5, 0.28440, -0.06422),
        ] {
            assert!(
                close(net_benefit(44.0, 13.0, 109.0, pt), model, 5e-6),
                "{pt}"
            );
            assert!(
                close(net_benefit_treat_all(51.0 / 109.0, pt), all, 5e-6),
                "{pt}"
            );
        }
    }

    #[test]
    fn bad_inputs_are_errors_not_panics() {
        let cases: Vec<(Vec<u32>, Vec<f64>, &str)> = vec![
            (vec![], vec![], "no rows"),
            (vec![0, 1], vec![0.5], "2 outcome(s) but 1"),
            (vec![0, 2], vec![0.2, 0.3], "code 2"),
            (vec![0, 1], vec![f64::NAN, 0.3], "row 1"),
            (vec![0, 1], vec![0.2, 1.3], "outside [0, 1]"),
        ];
        for (y, p, msg) in cases {
            for e in [
                log_loss(&y, &p, None).err(),
                brier(&y, &p, None).err(),
                calibration(&y, &p, None).err(),
            ] {
                let e = e.expect(msg).to_string();
                assert!(e.contains(msg), "{e} / {msg}");
            }
        }
        // One class only: log loss exists, the Brier reference and calibration do not.
        assert!(log_loss(&[1, 1], &[0.2, 0.3], None).is_ok());
        for e in [
            brier(&[1, 1], &[0.2, 0.3], None).err(),
            calibration(&[1, 1], &[0.2, 0.3], None).err(),
        ] {
            assert!(e.unwrap().to_string().contains("one class"));
        }
        assert!(auc(&[0, 1], &[f64::INFINITY, 0.0]).is_err());
        assert!(auc(&[0, 0], &[0.1, 0.2]).is_err());
        assert!(log_loss(&[0, 1], &[0.1, 0.2], Some(&[1.0, -1.0])).is_err());
        assert!(log_loss(&[0, 1], &[0.1, 0.2], Some(&[0.0, 0.0])).is_err());
        assert!(confusion(&[0, 1], &[0.1, 0.2], 1.0, None).is_err());
        assert!(confusion(&[0, 1], &[0.1, 0.2], f64::NAN, None).is_err());
        // One row of each class: the AUC exists, its standard error does not.
        let a = auc(&[0, 1], &[0.1, 0.2]).unwrap();
        assert_eq!((a.value, a.se_delong), (1.0, None));
    }
}
