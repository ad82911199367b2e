//! Several classes: accuracy, balanced accuracy, one-vs-rest AUCs and their macro mean, log
//! loss and the confusion matrix. Outcomes are codes `0..classes`; probabilities one flat
//! row-major slice with `classes` numbers per row, each row summing to 1 (within 1e-6).
//! The predicted class is the most probable one (the lowest code on ties).

use crate::error::Result;

use super::binary::{RankedScores, LOG_LOSS_CLIP};
use super::{bad, check_lengths, check_probabilities, check_weights, weight};

/// Checks outcomes, probabilities and weights; returns the number of rows.
fn check(
    what: &str,
    outcomes: &[u32],
    probabilities: &[f64],
    classes: usize,
    weights: Option<&[f64]>,
) -> Result<usize> {
    if classes < 2 {
        return Err(bad(
            what,
            format!("{classes} class(es) given; several classes means at least 2"),
        ));
    }
    if !probabilities.len().is_multiple_of(classes) {
        return Err(bad(
            what,
            format!(
                "{} probabilities is not a whole number of rows of {classes} classes. Give one \
                 probability per class per row",
                probabilities.len()
            ),
        ));
    }
    let rows = outcomes.len();
    check_lengths(
        what,
        rows,
        probabilities.len() / classes,
        "rows of probabilities",
    )?;
    check_probabilities(what, probabilities)?;
    check_weights(what, weights, rows)?;
    if let Some(i) = outcomes.iter().position(|&c| c as usize >= classes) {
        return Err(bad(
            what,
            format!(
                "row {} has outcome code {}, but there are {classes} classes (codes 0..{})",
                i + 1,
                outcomes[i],
                classes - 1
            ),
        ));
    }
    for (i, row) in probabilities.chunks_exact(classes).enumerate() {
        let s: f64 = row.iter().sum();
        if (s - 1.0).abs() > 1e-6 {
            return Err(bad(
                what,
                format!("the probabilities of row {} add up to {s}, not 1. Pass class probabilities, one per class", i + 1),
            ));
        }
    }
    Ok(rows)
}

fn predicted(row: &[f64]) -> usize {
    let mut best = 0;
    for (k, &p) in row.iter().enumerate() {
        if p > row[best] {
            best = k;
        }
    }
    best
}

/// The confusion matrix, `classes × classes` row-major: entry [true class][predicted class],
/// summed weights (counts when unweighted).
pub fn confusion_matrix(
    outcomes: &[u32],
    probabilities: &[f64],
    classes: usize,
    weights: Option<&[f64]>,
) -> Result<Vec<f64>> {
    check(
        "the confusion matrix",
        outcomes,
        probabilities,
        classes,
        weights,
    )?;
    let mut m = vec![0.0; classes * classes];
    for (i, row) in probabilities.chunks_exact(classes).enumerate() {
        m[outcomes[i] as usize * classes + predicted(row)] += weight(weights, i);
    }
    Ok(m)
}

/// Share of (weighted) rows whose most probable class is their class.
pub fn accuracy(
    outcomes: &[u32],
    probabilities: &[f64],
    classes: usize,
    weights: Option<&[f64]>,
) -> Result<f64> {
    let m = confusion_matrix(outcomes, probabilities, classes, weights)?;
    let total: f64 = m.iter().sum();
    Ok((0..classes).map(|k| m[k * classes + k]).sum::<f64>() / total)
}

/// Mean over the classes present in the outcomes of each class's recall (the definition of
/// scikit-learn's `balanced_accuracy_score`).
pub fn balanced_accuracy(
    outcomes: &[u32],
    probabilities: &[f64],
    classes: usize,
    weights: Option<&[f64]>,
) -> Result<f64> {
    let m = confusion_matrix(outcomes, probabilities, classes, weights)?;
    Ok(balanced_of(&m, classes))
}

/// Balanced accuracy from a confusion matrix ([`confusion_matrix`]).
fn balanced_of(m: &[f64], classes: usize) -> f64 {
    let (mut sum, mut present) = (0.0, 0);
    for k in 0..classes {
        let row: f64 = m[k * classes..(k + 1) * classes].iter().sum();
        if row > 0.0 {
            sum += m[k * classes + k] / row;
            present += 1;
        }
    }
    sum / present as f64
}

/// Mean negative log of the probability given to the true class, clipped to
/// [ε, 1 − ε] as in [`super::binary::log_loss`].
pub fn log_loss(
    outcomes: &[u32],
    probabilities: &[f64],
    classes: usize,
    weights: Option<&[f64]>,
) -> Result<f64> {
    check("the log loss", outcomes, probabilities, classes, weights)?;
    let (mut sum, mut total) = (0.0, 0.0);
    for (i, row) in probabilities.chunks_exact(classes).enumerate() {
        let w = weight(weights, i);
        sum -= w * log_term(row, outcomes[i]);
        total += w;
    }
    Ok(sum / total)
}

/// The logarithm a row adds to the log loss: of the probability of its class, clipped.
fn log_term(row: &[f64], outcome: u32) -> f64 {
    row[outcome as usize]
        .clamp(LOG_LOSS_CLIP, 1.0 - LOG_LOSS_CLIP)
        .ln()
}

/// The figures a bootstrap resamples for several classes (balanced accuracy, one-vs-rest
/// AUCs, log loss) of one set of predictions, for many row weightings: checked, sorted and
/// each row's cell and log-loss term found once, then one pass a weighting (plus the AUCs'
/// passes in score order). The same sums in the same order as [`balanced_accuracy`],
/// [`RankedClasses::auc`] and [`log_loss`], so the same figures to the bit (tested).
#[derive(Debug, Clone)]
pub struct WeightedClasses {
    classes: usize,
    /// Per row: its cell of the confusion matrix, and its log-loss term.
    cell: Vec<usize>,
    log_term: Vec<f64>,
    ranked: Option<RankedClasses>,
}

impl WeightedClasses {
    /// None when the outcomes or probabilities cannot be judged (as [`log_loss`] would
    /// refuse them).
    pub fn new(outcomes: &[u32], probabilities: &[f64], classes: usize) -> Option<Self> {
        check(
            "the resampled figures",
            outcomes,
            probabilities,
            classes,
            None,
        )
        .ok()?;
        let rows = || probabilities.chunks_exact(classes).zip(outcomes);
        Some(WeightedClasses {
            classes,
            cell: rows()
                .map(|(row, &y)| y as usize * classes + predicted(row))
                .collect(),
            log_term: rows().map(|(row, &y)| log_term(row, y)).collect(),
            ranked: RankedClasses::new(outcomes, probabilities, classes).ok(),
        })
    }

    /// Balanced accuracy, the one-vs-rest AUCs and the log loss with row weights `w` (one
    /// per row, finite, not negative, not all zero: a resample's draw counts).
    pub fn of(&self, w: &[f64]) -> (f64, Option<OneVsRest>, f64) {
        assert_eq!(w.len(), self.cell.len(), "one weight a row");
        let mut m = vec![0.0; self.classes * self.classes];
        let (mut sum, mut total) = (0.0, 0.0);
        for ((&w, &cell), &l) in w.iter().zip(&self.cell).zip(&self.log_term) {
            m[cell] += w;
            sum -= w * l;
            total += w;
        }
        let auc = self.ranked.as_ref().and_then(|r| r.auc(Some(w)));
        (balanced_of(&m, self.classes), auc, sum / total)
    }
}

/// One-vs-rest AUCs.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct OneVsRest {
    /// Per class: the AUC of that class's probability for telling the class from all the
    /// others; None for a class absent from the outcomes (or present in every row).
    pub per_class: Vec<Option<f64>>,
    /// Unweighted mean over the classes that have an AUC (scikit-learn's
    /// `roc_auc_score(multi_class="ovr", average="macro")` when every class is present).
    pub macro_mean: f64,
}

/// One-vs-rest AUCs and their macro mean (row weights allowed).
pub fn one_vs_rest_auc(
    outcomes: &[u32],
    probabilities: &[f64],
    classes: usize,
    weights: Option<&[f64]>,
) -> Result<OneVsRest> {
    const WHAT: &str = "the one-vs-rest AUCs";
    check(WHAT, outcomes, probabilities, classes, weights)?;
    RankedClasses::new(outcomes, probabilities, classes)?
        .auc(weights)
        .ok_or_else(|| {
            bad(
                WHAT,
                "no class has both its own rows and others' rows; at least two classes must be \
                 present",
            )
        })
}

/// Each class's probabilities sorted once, so the one-vs-rest AUCs of many resamples cost
/// O(rows × classes) each.
#[derive(Debug, Clone)]
pub struct RankedClasses(Vec<RankedScores>);

impl RankedClasses {
    pub fn new(outcomes: &[u32], probabilities: &[f64], classes: usize) -> Result<Self> {
        let rows = check(
            "the one-vs-rest AUCs",
            outcomes,
            probabilities,
            classes,
            None,
        )?;
        let mut ranked = Vec::with_capacity(classes);
        let mut column = vec![0.0; rows];
        let mut is_class = vec![0u32; rows];
        for k in 0..classes {
            for i in 0..rows {
                column[i] = probabilities[i * classes + k];
                is_class[i] = u32::from(outcomes[i] as usize == k);
            }
            ranked.push(RankedScores::new(&is_class, &column)?);
        }
        Ok(RankedClasses(ranked))
    }

    /// The one-vs-rest AUCs with these weights (one per row, not checked again); None when
    /// no class has both its own and others' weight.
    pub fn auc(&self, weights: Option<&[f64]>) -> Option<OneVsRest> {
        let per_class: Vec<Option<f64>> = self.0.iter().map(|r| r.auc(weights)).collect();
        let found: Vec<f64> = per_class.iter().flatten().copied().collect();
        (!found.is_empty()).then(|| OneVsRest {
            macro_mean: found.iter().sum::<f64>() / found.len() as f64,
            per_class,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn three_classes_by_hand() {
        // Worked by hand (common practice, no source).
        let y = [0, 1, 2, 2, 1, 0];
        let p = [
            0.7, 0.2, 0.1, //
            0.3, 0.4, 0.3, //
            0.1, 0.2, 0.7, //
            0.5, 0.1, 0.4, //
            0.2, 0.5, 0.3, //
            0.4, 0.5, 0.1,
        ];
        let m = confusion_matrix(&y, &p, 3, None).unwrap();
        assert_eq!(m, vec![1.0, 1.0, 0.0, 0.0, 2.0, 0.0, 1.0, 0.0, 1.0]);
        assert_eq!(accuracy(&y, &p, 3, None).unwrap(), 4.0 / 6.0);
        assert!(
            (balanced_accuracy(&y, &p, 3, None).unwrap() - (0.5 + 1.0 + 0.5) / 3.0).abs() < 1e-12
        );
        let l = log_loss(&y, &p, 3, None).unwrap();
        let want =
            -(0.7f64.ln() + 0.4f64.ln() + 0.7f64.ln() + 0.4f64.ln() + 0.5f64.ln() + 0.4f64.ln())
                / 6.0;
        assert!((l - want).abs() < 1e-12);
        let o = one_vs_rest_auc(&y, &p, 3, None).unwrap();
        // Class 0: scores of its rows 0.7, 0.4 against 0.3, 0.1, 0.5, 0.2 → (4 + 3)/8.
        assert_eq!(o.per_class[0], Some(0.875));
        assert_eq!(o.per_class.len(), 3);
    }

    #[test]
    fn weighted_classes_are_each_figures_own_to_the_bit() {
        // The fused pass against the functions it stands in for (our own check: the same
        // sums in the same order give the same bits), on four classes with ties, a class
        // weighted out and a probability of exactly 0 (clipped log).
        let (n, k) = (240, 4);
        let outcomes: Vec<u32> = (0..n).map(|i| ((i * 5 + i / 7) % k) as u32).collect();
        let probabilities: Vec<f64> = (0..n)
            .flat_map(|i| {
                let raw: Vec<f64> = (0..k).map(|c| ((i * 3 + c * 11) % 9) as f64).collect();
                let total: f64 = raw.iter().sum();
                raw.into_iter().map(move |r| r / total)
            })
            .collect();
        let fused = WeightedClasses::new(&outcomes, &probabilities, k).unwrap();
        let ranked = RankedClasses::new(&outcomes, &probabilities, k).unwrap();
        // Every row once, then 20 of the bootstrap's own resamples.
        let mut weightings: Vec<Vec<f64>> = vec![vec![1.0; n]];
        for b in 0..20 {
            let mut w = vec![0.0; n];
            crate::metrics::intervals::draw_resample(99, b, &mut w);
            weightings.push(w);
        }
        weightings.push(
            outcomes
                .iter()
                .map(|&y| f64::from(u8::from(y != 2)))
                .collect(),
        );
        for w in &weightings {
            let (balanced, auc, loss) = fused.of(w);
            let w = Some(&w[..]);
            let p = &probabilities;
            assert_eq!(Some(balanced), balanced_accuracy(&outcomes, p, k, w).ok());
            assert_eq!(auc, ranked.auc(w));
            assert_eq!(Some(loss), log_loss(&outcomes, p, k, w).ok());
        }
        assert!(WeightedClasses::new(&outcomes, &probabilities[1..], k).is_none());
    }

    #[test]
    fn bad_multiclass_inputs() {
        assert!(accuracy(&[0, 1], &[0.5, 0.5, 0.5], 2, None).is_err());
        assert!(accuracy(&[0, 3], &[0.5, 0.5, 0.5, 0.5], 2, None).is_err());
        let e = log_loss(&[0, 1], &[0.5, 0.6, 0.5, 0.5], 2, None).unwrap_err();
        assert!(e.to_string().contains("add up to"), "{e}");
        assert!(accuracy(&[], &[], 3, None).is_err());
        assert!(accuracy(&[0], &[1.0], 1, None).is_err());
    }
}
