//! Regression figures: RMSE, MAE, R², calibration of the mean by deciles of prediction and a
//! summary of the residuals (observed − predicted).

use crate::error::Result;

use super::curves::quantile_groups;
use super::{bad, check_lengths, check_scores, check_weights, order_by, quantile_sorted, weight};

fn check(what: &str, observed: &[f64], predicted: &[f64], weights: Option<&[f64]>) -> Result<()> {
    check_lengths(what, observed.len(), predicted.len(), "predictions")?;
    if let Some(i) = observed.iter().position(|v| !v.is_finite()) {
        return Err(bad(
            what,
            format!(
                "the outcome of row {} is {}; leave out rows without an outcome",
                i + 1,
                observed[i]
            ),
        ));
    }
    check_scores(what, predicted)?;
    check_weights(what, weights, observed.len())
}

/// Goodness of fit of predicted numbers.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Fit {
    /// √(Σ w (y − ŷ)² / Σ w).
    pub rmse: f64,
    /// Σ w |y − ŷ| / Σ w.
    pub mae: f64,
    /// 1 − Σ w (y − ŷ)² / Σ w (y − ȳ)², ȳ the weighted mean; None when every outcome is the
    /// same (scikit-learn's `r2_score` gives 1 or 0 there).
    pub r_squared: Option<f64>,
}

/// RMSE, MAE and R².
pub fn fit(observed: &[f64], predicted: &[f64], weights: Option<&[f64]>) -> Result<Fit> {
    check("the regression figures", observed, predicted, weights)?;
    let total: f64 = (0..observed.len()).map(|i| weight(weights, i)).sum();
    let mean = observed
        .iter()
        .enumerate()
        .map(|(i, y)| weight(weights, i) * y)
        .sum::<f64>()
        / total;
    let (mut sse, mut sae, mut sst) = (0.0, 0.0, 0.0);
    for (i, (&y, &f)) in observed.iter().zip(predicted).enumerate() {
        let w = weight(weights, i);
        sse += w * (y - f).powi(2);
        sae += w * (y - f).abs();
        sst += w * (y - mean).powi(2);
    }
    Ok(Fit {
        rmse: (sse / total).sqrt(),
        mae: sae / total,
        r_squared: (sst > 0.0).then(|| 1.0 - sse / sst),
    })
}

/// One group of the calibration-of-the-mean table.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct MeanGroup {
    pub rows: usize,
    pub lowest_prediction: f64,
    pub highest_prediction: f64,
    pub mean_predicted: f64,
    pub mean_observed: f64,
}

/// Calibration of the mean: rows cut into `groups` groups by quantiles of the prediction
/// (deciles for 10; equal predictions kept together, as in
/// [`super::curves::calibration_groups`]), mean observed against mean predicted per group.
pub fn mean_calibration(
    observed: &[f64],
    predicted: &[f64],
    groups: usize,
) -> Result<Vec<MeanGroup>> {
    const WHAT: &str = "the calibration of the mean";
    check(WHAT, observed, predicted, None)?;
    if groups == 0 {
        return Err(bad(WHAT, "0 groups asked for; use 10 (deciles)"));
    }
    let order = order_by(predicted);
    Ok(quantile_groups(&order, predicted, groups)
        .into_iter()
        .map(|range| {
            let rows = &order[range];
            let n = rows.len() as f64;
            MeanGroup {
                rows: rows.len(),
                lowest_prediction: predicted[rows[0]],
                highest_prediction: predicted[rows[rows.len() - 1]],
                mean_predicted: rows.iter().map(|&r| predicted[r]).sum::<f64>() / n,
                mean_observed: rows.iter().map(|&r| observed[r]).sum::<f64>() / n,
            }
        })
        .collect())
}

/// The residuals (observed − predicted) summarised.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Residuals {
    pub mean: f64,
    /// Standard deviation with n − 1 in the denominator (0 for one row).
    pub sd: f64,
    /// The quantiles at [`RESIDUAL_QUANTILES`] (type 7 interpolation, numpy's default).
    pub quantiles: Vec<f64>,
}

/// Minimum, 5%, 25%, median, 75%, 95%, maximum.
pub const RESIDUAL_QUANTILES: [f64; 7] = [0.0, 0.05, 0.25, 0.5, 0.75, 0.95, 1.0];

/// Mean, sd and quantiles of observed − predicted (rows unweighted).
pub fn residuals(observed: &[f64], predicted: &[f64]) -> Result<Residuals> {
    check("the residual summary", observed, predicted, None)?;
    let mut r: Vec<f64> = observed.iter().zip(predicted).map(|(y, f)| y - f).collect();
    let n = r.len() as f64;
    let mean = r.iter().sum::<f64>() / n;
    let sd = if r.len() > 1 {
        (r.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt()
    } else {
        0.0
    };
    r.sort_by(f64::total_cmp);
    Ok(Residuals {
        mean,
        sd,
        quantiles: RESIDUAL_QUANTILES
            .iter()
            .map(|&q| quantile_sorted(&r, q))
            .collect(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn regression_figures_by_hand() {
        // Worked by hand (common practice, no source): y = 3, −0.5, 2, 7 and ŷ = 2.5, 0, 2, 8
        // (scikit-learn's documented r2_score example gives 0.9486..., from memory).
        let y = [3.0, -0.5, 2.0, 7.0];
        let f = [2.5, 0.0, 2.0, 8.0];
        let s = fit(&y, &f, None).unwrap();
        assert!((s.mae - 0.5).abs() < 1e-12);
        assert!((s.rmse - (1.5f64 / 4.0).sqrt()).abs() < 1e-12);
        let sst = [3.0f64, -0.5, 2.0, 7.0]
            .iter()
            .map(|v| (v - 2.875).powi(2))
            .sum::<f64>();
        assert!((s.r_squared.unwrap() - (1.0 - 1.5 / sst)).abs() < 1e-12);
        assert!((s.r_squared.unwrap() - 0.948_608_137).abs() < 1e-8);
        let r = residuals(&y, &f).unwrap();
        assert_eq!(r.quantiles[0], -1.0);
        assert_eq!(r.quantiles[6], 0.5);
        assert_eq!(r.quantiles[3], -0.25); // residuals −1, −0.5, 0, 0.5
        assert!(fit(&[1.0, 1.0], &[1.0, 2.0], None)
            .unwrap()
            .r_squared
            .is_none());
        assert!(fit(&[1.0, f64::NAN], &[1.0, 2.0], None).is_err());
        assert!(fit(&[], &[], None).is_err());
        let g = mean_calibration(&[1.0, 2.0, 3.0, 4.0], &[1.5, 1.5, 3.5, 3.5], 2).unwrap();
        assert_eq!(g.len(), 2);
        assert_eq!((g[0].mean_observed, g[1].mean_observed), (1.5, 3.5));
    }
}
