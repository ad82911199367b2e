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
    let (mut sum, mut present) = (0.0, 0);
    for k in 0..classes {
        let row: f64 = m[k * classes..(k + 1) * classes].iter().sum();
        if row > 0.0 {
            sum += m[k * classes + k] / row;
            present += 1;
        }
    }
    Ok(sum / present as f64)
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
        sum -= w * row[outcomes[i] as usize]
            .clamp(LOG_LOSS_CLIP, 1.0 - LOG_LOSS_CLIP)
            .ln();
        total += w;
    }
    Ok(sum / total)
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
    fn bad_multiclass_inputs() {
        assert!(accuracy(&[0, 1], &[0.5, 0.5, 0.5], 2, None).is_err());
        assert!(accuracy(&[0, 3], &[0.5, 0.5, 0.5, 0.5], 2, None).is_err());
        let e = log_loss(&[0, 1], &[0.5, 0.6, 0.5, 0.5], 2, None).unwrap_err();
        assert!(e.to_string().contains("add up to"), "{e}");
        assert!(accuracy(&[], &[], 3, None).is_err());
        assert!(accuracy(&[0], &[1.0], 1, None).is_err());
    }
}
