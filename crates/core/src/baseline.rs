//! Baseline models to set beside the ensembles on the same rows: L2-penalised logistic
//! regression (two classes, or several by a multinomial softmax), ridge linear regression,
//! and the "no information" model (class shares / mean). Pure functions over plain columns
//! ([`Column`]), so they depend on nothing in the tree code.
//!
//! Preparing the predictors ([`Preparation`], fitted on the training rows, then applied to
//! any rows):
//! - numbers: a missing value (NaN) is filled with the median of the present values; then
//!   the column is standardised with the mean and the population standard deviation
//!   (n in the denominator, as scikit-learn's StandardScaler) of the filled column; a column
//!   with no spread becomes all zeros;
//! - categories: one 0/1 column per level (all levels, none dropped: the penalty makes the
//!   fit unique); a missing code ([`MISSING_CODE`]) is filled with the most frequent level
//!   (lowest code on ties); at scoring time a code the training rows did not have gives all
//!   zeros;
//! - every predictor that had missing values in the training rows gets one more 0/1 column,
//!   "missing", so the model can learn that missingness itself says something.
//!   One-hot and missing columns are not standardised.
//!
//! Penalties, stated as scikit-learn states them, so its coefficients match ours on the
//! prepared (standardised) columns:
//! - logistic: minimise Σᵢ wᵢ · log lossᵢ + ½‖W‖² / C (LogisticRegression(C=…)), intercepts
//!   not penalised. Several classes: one coefficient row per class (softmax), all penalised;
//!   the intercepts, fixed only up to a common shift, are reported centred (summing to 0).
//! - ridge: minimise Σᵢ wᵢ (yᵢ − b − xᵢ·w)² + α‖w‖² (Ridge(alpha=…)), intercept not penalised.
//!
//! Fitting is Newton's method with step halving (for the logistic loss this is IRLS) solved
//! by Cholesky factorisation; ridge is one solve.

// Numerical kernels index several arrays in step; index loops read clearest there.
#![allow(clippy::needless_range_loop)]

use crate::data::MISSING_CODE;
use crate::error::{Error, ErrorKind, Result};
use crate::metrics::binary::{sigmoid, softplus};

/// One predictor's values over the rows.
#[derive(Debug, Clone, Copy)]
pub enum ColumnValues<'a> {
    /// Numbers, NaN for missing.
    Numbers(&'a [f64]),
    /// Codes into `labels`, [`MISSING_CODE`] for missing.
    Categories {
        codes: &'a [u32],
        labels: &'a [String],
    },
}

/// A named predictor column.
#[derive(Debug, Clone, Copy)]
pub struct Column<'a> {
    pub name: &'a str,
    pub values: ColumnValues<'a>,
}

impl Column<'_> {
    fn len(&self) -> usize {
        match self.values {
            ColumnValues::Numbers(v) => v.len(),
            ColumnValues::Categories { codes, .. } => codes.len(),
        }
    }
}

/// How one predictor becomes model columns.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub enum Prepared {
    Number {
        name: String,
        /// The median of the training rows' present values.
        fill: f64,
        mean: f64,
        /// 1 when the filled training column had no spread.
        sd: f64,
        missing_column: bool,
    },
    Category {
        name: String,
        levels: usize,
        /// The most frequent level in the training rows.
        fill: u32,
        missing_column: bool,
    },
}

/// The fitted preparation of all predictors, kept with a model to score new rows.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Preparation {
    pub columns: Vec<Prepared>,
    /// The name of every model column, in order: "age", "sex: female", "age: missing".
    pub features: Vec<String>,
}

fn bad(what: &str, reason: impl Into<String>) -> Error {
    Error::new(ErrorKind::BadScores {
        what: what.to_string(),
        reason: reason.into(),
    })
}

const PREPARE: &str = "the baseline model";

fn check_rows(columns: &[Column], rows: usize) -> Result<()> {
    for c in columns {
        if c.len() != rows {
            return Err(bad(
                PREPARE,
                format!(
                    "predictor '{}' has {} value(s) but there are {rows} row(s)",
                    c.name,
                    c.len()
                ),
            ));
        }
    }
    Ok(())
}

impl Preparation {
    /// Learns fills, means, standard deviations and levels from the training rows.
    pub fn fit(columns: &[Column]) -> Result<Preparation> {
        if columns.is_empty() {
            return Err(bad(PREPARE, "there are no predictors; choose at least one"));
        }
        let rows = columns[0].len();
        check_rows(columns, rows)?;
        let mut prepared = Vec::with_capacity(columns.len());
        let mut features = Vec::new();
        for c in columns {
            match c.values {
                ColumnValues::Numbers(v) => {
                    if let Some(i) = v.iter().position(|x| x.is_infinite()) {
                        return Err(bad(
                            PREPARE,
                            format!("predictor '{}' is {} in row {}; use finite numbers or leave the cell empty", c.name, v[i], i + 1),
                        ));
                    }
                    let mut present: Vec<f64> = v.iter().copied().filter(|x| !x.is_nan()).collect();
                    if present.is_empty() {
                        return Err(bad(
                            PREPARE,
                            format!("predictor '{}' has no values at all; leave it out", c.name),
                        ));
                    }
                    present.sort_by(f64::total_cmp);
                    let m = present.len();
                    let fill = if m % 2 == 1 {
                        present[m / 2]
                    } else {
                        (present[m / 2 - 1] + present[m / 2]) / 2.0
                    };
                    let filled = || v.iter().map(|&x| if x.is_nan() { fill } else { x });
                    let mean = filled().sum::<f64>() / rows as f64;
                    let var = filled().map(|x| (x - mean).powi(2)).sum::<f64>() / rows as f64;
                    let sd = if var > 0.0 { var.sqrt() } else { 1.0 };
                    let missing_column = m < rows;
                    features.push(c.name.to_string());
                    if missing_column {
                        features.push(format!("{}: missing", c.name));
                    }
                    prepared.push(Prepared::Number {
                        name: c.name.to_string(),
                        fill,
                        mean,
                        sd,
                        missing_column,
                    });
                }
                ColumnValues::Categories { codes, labels } => {
                    let mut counts = vec![0usize; labels.len()];
                    let mut missing = 0;
                    for (i, &k) in codes.iter().enumerate() {
                        if k == MISSING_CODE {
                            missing += 1;
                        } else if (k as usize) < labels.len() {
                            counts[k as usize] += 1;
                        } else {
                            return Err(bad(
                                PREPARE,
                                format!(
                                    "predictor '{}' has code {k} in row {} but only {} level(s)",
                                    c.name,
                                    i + 1,
                                    labels.len()
                                ),
                            ));
                        }
                    }
                    let fill = (0..counts.len()).max_by_key(|&k| (counts[k], std::cmp::Reverse(k)));
                    let Some(fill) = fill.filter(|&k| counts[k] > 0) else {
                        return Err(bad(
                            PREPARE,
                            format!("predictor '{}' has no values at all; leave it out", c.name),
                        ));
                    };
                    let missing_column = missing > 0;
                    features.extend(labels.iter().map(|l| format!("{}: {l}", c.name)));
                    if missing_column {
                        features.push(format!("{}: missing", c.name));
                    }
                    prepared.push(Prepared::Category {
                        name: c.name.to_string(),
                        levels: labels.len(),
                        fill: fill as u32,
                        missing_column,
                    });
                }
            }
        }
        Ok(Preparation {
            columns: prepared,
            features,
        })
    }

    /// The number of model columns.
    pub fn width(&self) -> usize {
        self.features.len()
    }

    /// How many model columns each predictor became, in order (they are contiguous).
    pub fn widths(&self) -> Vec<usize> {
        self.columns
            .iter()
            .map(|p| match p {
                Prepared::Number { missing_column, .. } => 1 + usize::from(*missing_column),
                Prepared::Category {
                    levels,
                    missing_column,
                    ..
                } => levels + usize::from(*missing_column),
            })
            .collect()
    }

    /// The model columns of `columns` (the same predictors, in the same order, as at fit),
    /// row-major: rows × [`Preparation::width`].
    pub fn apply(&self, columns: &[Column]) -> Result<Vec<f64>> {
        if columns.len() != self.columns.len() {
            return Err(bad(
                PREPARE,
                format!(
                    "the model was fitted on {} predictor(s) but {} were given",
                    self.columns.len(),
                    columns.len()
                ),
            ));
        }
        let rows = columns.first().map_or(0, Column::len);
        check_rows(columns, rows)?;
        let width = self.width();
        let mut x = vec![0.0; rows * width];
        let mut at = 0;
        for (p, c) in self.columns.iter().zip(columns) {
            match (p, c.values) {
                (
                    Prepared::Number {
                        name,
                        fill,
                        mean,
                        sd,
                        missing_column,
                    },
                    ColumnValues::Numbers(v),
                ) => {
                    for (i, &value) in v.iter().enumerate() {
                        if value.is_infinite() {
                            return Err(bad(
                                PREPARE,
                                format!("predictor '{name}' is {value} in row {}", i + 1),
                            ));
                        }
                        let row = &mut x[i * width + at..];
                        row[0] = ((if value.is_nan() { *fill } else { value }) - mean) / sd;
                        if *missing_column && value.is_nan() {
                            row[1] = 1.0;
                        }
                    }
                    at += 1 + usize::from(*missing_column);
                }
                (
                    Prepared::Category {
                        levels,
                        fill,
                        missing_column,
                        ..
                    },
                    ColumnValues::Categories { codes, .. },
                ) => {
                    for (i, &k) in codes.iter().enumerate() {
                        let row = &mut x[i * width + at..];
                        if k == MISSING_CODE {
                            row[*fill as usize] = 1.0;
                            if *missing_column {
                                row[*levels] = 1.0;
                            }
                        } else if (k as usize) < *levels {
                            row[k as usize] = 1.0;
                        }
                    }
                    at += levels + usize::from(*missing_column);
                }
                (p, _) => {
                    let name = match p {
                        Prepared::Number { name, .. } | Prepared::Category { name, .. } => name,
                    };
                    return Err(bad(PREPARE, format!("predictor '{name}' changed between numbers and categories since the fit")));
                }
            }
        }
        Ok(x)
    }
}

/// A fitted L2-penalised logistic regression.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Logistic {
    pub preparation: Preparation,
    pub classes: usize,
    /// Two classes: one row (the log-odds of class 1). Several: one row per class. Each row
    /// has [`Preparation::width`] coefficients on the prepared (standardised) columns.
    pub coefficients: Vec<Vec<f64>>,
    /// One per coefficient row; for several classes centred to sum 0.
    pub intercepts: Vec<f64>,
    /// The inverse penalty strength C.
    pub c: f64,
    /// Newton steps taken.
    pub steps: usize,
}

/// Fits a logistic regression of class codes `0..classes` on `columns` with inverse penalty
/// `c` (see the module docs for the exact objective). Every class must have rows.
pub fn fit_logistic(
    columns: &[Column],
    outcomes: &[u32],
    classes: usize,
    weights: Option<&[f64]>,
    c: f64,
) -> Result<Logistic> {
    const WHAT: &str = "the baseline logistic regression";
    if !(c > 0.0 && c.is_finite()) {
        return Err(bad(
            WHAT,
            format!("C = {c}; use a positive finite number (1 is usual)"),
        ));
    }
    if classes < 2 {
        return Err(bad(WHAT, "the outcome has fewer than two classes"));
    }
    check_outcome_rows(WHAT, columns, outcomes.len(), weights)?;
    let mut class_weight = vec![0.0; classes];
    for (i, &k) in outcomes.iter().enumerate() {
        if k as usize >= classes {
            return Err(bad(
                WHAT,
                format!(
                    "row {} has class code {k}, but there are {classes} classes",
                    i + 1
                ),
            ));
        }
        class_weight[k as usize] += weights.map_or(1.0, |w| w[i]);
    }
    if let Some(k) = class_weight.iter().position(|&w| w <= 0.0) {
        return Err(bad(
            WHAT,
            format!("class {k} has no rows (with positive weight); every class needs rows. Merge or drop that class"),
        ));
    }
    let preparation = Preparation::fit(columns)?;
    let x = preparation.apply(columns)?;
    let d = preparation.width();
    let n = outcomes.len();
    let w = |i: usize| weights.map_or(1.0, |w| w[i]);
    // Parameters: per output k, [intercept, coefficients...] in a block of d + 1.
    let outputs = if classes == 2 { 1 } else { classes };
    let block = d + 1;
    let size = outputs * block;
    // For several classes the last intercept is held at 0 (the softmax ignores a common shift).
    let fixed = (outputs > 1).then_some((outputs - 1) * block);
    let objective = |theta: &[f64]| -> f64 {
        let mut f = 0.0;
        let mut eta = vec![0.0; outputs];
        for i in 0..n {
            linear(theta, &x[i * d..(i + 1) * d], &mut eta);
            f += w(i)
                * if outputs == 1 {
                    softplus(eta[0]) - f64::from(outcomes[i]) * eta[0]
                } else {
                    log_sum_exp(&eta) - eta[outcomes[i] as usize]
                };
        }
        f + penalty(theta, block) / (2.0 * c)
    };
    let derivatives = |theta: &[f64], g: &mut [f64], h: &mut [f64]| {
        g.iter_mut().for_each(|v| *v = 0.0);
        h.iter_mut().for_each(|v| *v = 0.0);
        let mut eta = vec![0.0; outputs];
        let mut prob = vec![0.0; outputs];
        let mut xt = vec![1.0; block];
        // Each row adds v_kl · (w·x_a)·x_b to entry (k, a; l, b) for outputs k ≤ l (v_kl
        // from the row's probabilities). Entry (a, b) and entry (b, a) of one block get the
        // same products, (w·x_min)·x_max, in the same order, so only b ≥ a is summed here (a
        // row of the block at a time, which vectorises); the rest is copied from it below.
        for i in 0..n {
            xt[1..].copy_from_slice(&x[i * d..(i + 1) * d]);
            linear(theta, &xt[1..], &mut eta);
            if outputs == 1 {
                prob[0] = sigmoid(eta[0]);
            } else {
                softmax(&eta, &mut prob);
            }
            let wi = w(i);
            for k in 0..outputs {
                let target = if outputs == 1 {
                    f64::from(outcomes[i])
                } else {
                    f64::from(outcomes[i] as usize == k)
                };
                let r = wi * (prob[k] - target);
                for (g, &xa) in g[k * block..(k + 1) * block].iter_mut().zip(&xt) {
                    *g += r * xa;
                }
                for l in k..outputs {
                    let v = if k == l {
                        prob[k] * (1.0 - prob[k])
                    } else {
                        -prob[k] * prob[l]
                    };
                    for a in 0..block {
                        let wa = wi * xt[a];
                        let at = (k * block + a) * size + l * block;
                        for (h, &xb) in h[at + a..at + block].iter_mut().zip(&xt[a..]) {
                            *h += v * (wa * xb);
                        }
                    }
                }
            }
        }
        // Blocks off the diagonal: entry (a, b) below the block's own diagonal from (b, a).
        for k in 0..outputs {
            for l in k + 1..outputs {
                for a in 0..block {
                    for b in 0..a {
                        h[(k * block + a) * size + l * block + b] =
                            h[(k * block + b) * size + l * block + a];
                    }
                }
            }
        }
        // Mirror the blocks above the diagonal, then add the penalty (not on intercepts).
        for r in 0..size {
            for s in 0..r {
                if h[s * size + r] != 0.0 && h[r * size + s] == 0.0 {
                    h[r * size + s] = h[s * size + r];
                }
            }
        }
        for k in 0..outputs {
            for a in 1..block {
                let p = k * block + a;
                g[p] += theta[p] / c;
                h[p * size + p] += 1.0 / c;
            }
        }
    };
    let mut theta = vec![0.0; size];
    let steps = newton(&mut theta, fixed, objective, derivatives).ok_or_else(|| {
        bad(
            WHAT,
            "Newton's method did not settle in 200 steps. Use a smaller C (a stronger penalty), \
             or look for a predictor that separates the classes perfectly",
        )
    })?;
    let mut coefficients = Vec::with_capacity(outputs);
    let mut intercepts = Vec::with_capacity(outputs);
    for k in 0..outputs {
        intercepts.push(theta[k * block]);
        coefficients.push(theta[k * block + 1..(k + 1) * block].to_vec());
    }
    if outputs > 1 {
        let mean = intercepts.iter().sum::<f64>() / outputs as f64;
        intercepts.iter_mut().for_each(|b| *b -= mean);
    }
    Ok(Logistic {
        preparation,
        classes,
        coefficients,
        intercepts,
        c,
        steps,
    })
}

impl Logistic {
    /// Class probabilities of new rows, row-major: rows × classes (two classes: P(0), P(1)).
    pub fn predict(&self, columns: &[Column]) -> Result<Vec<f64>> {
        let x = self.preparation.apply(columns)?;
        let d = self.preparation.width();
        let rows = x.len().checked_div(d).unwrap_or(0);
        let outputs = self.coefficients.len();
        let mut out = Vec::with_capacity(rows * self.classes);
        let mut eta = vec![0.0; outputs];
        let mut prob = vec![0.0; outputs];
        for i in 0..rows {
            let row = &x[i * d..(i + 1) * d];
            for k in 0..outputs {
                eta[k] = self.intercepts[k] + dot(&self.coefficients[k], row);
            }
            if outputs == 1 {
                let p = sigmoid(eta[0]);
                out.extend([1.0 - p, p]);
            } else {
                softmax(&eta, &mut prob);
                out.extend_from_slice(&prob);
            }
        }
        Ok(out)
    }
}

/// A fitted ridge linear regression.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Linear {
    pub preparation: Preparation,
    /// On the prepared (standardised) columns.
    pub coefficients: Vec<f64>,
    pub intercept: f64,
    pub alpha: f64,
}

/// Fits a ridge regression of `outcome` on `columns` with penalty `alpha` (≥ 0; see the
/// module docs for the exact objective).
pub fn fit_ridge(
    columns: &[Column],
    outcome: &[f64],
    weights: Option<&[f64]>,
    alpha: f64,
) -> Result<Linear> {
    const WHAT: &str = "the baseline ridge regression";
    if !(alpha >= 0.0 && alpha.is_finite()) {
        return Err(bad(
            WHAT,
            format!("alpha = {alpha}; use a finite number ≥ 0 (1 is usual)"),
        ));
    }
    check_outcome_rows(WHAT, columns, outcome.len(), weights)?;
    if let Some(i) = outcome.iter().position(|y| !y.is_finite()) {
        return Err(bad(
            WHAT,
            format!(
                "the outcome of row {} is {}; leave out rows without an outcome",
                i + 1,
                outcome[i]
            ),
        ));
    }
    let preparation = Preparation::fit(columns)?;
    let x = preparation.apply(columns)?;
    let d = preparation.width();
    let n = outcome.len();
    let w = |i: usize| weights.map_or(1.0, |w| w[i]);
    let total: f64 = (0..n).map(w).sum();
    let mut xm = vec![0.0; d];
    let mut ym = 0.0;
    for i in 0..n {
        for j in 0..d {
            xm[j] += w(i) * x[i * d + j];
        }
        ym += w(i) * outcome[i];
    }
    xm.iter_mut().for_each(|v| *v /= total);
    ym /= total;
    let mut a = vec![0.0; d * d];
    let mut rhs = vec![0.0; d];
    let mut xc = vec![0.0; d];
    for i in 0..n {
        for j in 0..d {
            xc[j] = x[i * d + j] - xm[j];
        }
        let yc = outcome[i] - ym;
        for j in 0..d {
            rhs[j] += w(i) * xc[j] * yc;
            for k in j..d {
                a[j * d + k] += w(i) * xc[j] * xc[k];
            }
        }
    }
    for j in 0..d {
        a[j * d + j] += alpha;
        for k in 0..j {
            a[j * d + k] = a[k * d + j];
        }
    }
    let coefficients = cholesky_solve(&mut a, &rhs, d).ok_or_else(|| {
        bad(
            WHAT,
            "the predictors are collinear (one is a combination of others); use alpha > 0",
        )
    })?;
    let intercept = ym - dot(&xm, &coefficients);
    Ok(Linear {
        preparation,
        coefficients,
        intercept,
        alpha,
    })
}

impl Linear {
    /// Predicted values of new rows.
    pub fn predict(&self, columns: &[Column]) -> Result<Vec<f64>> {
        let x = self.preparation.apply(columns)?;
        let d = self.preparation.width();
        Ok(x.chunks_exact(d.max(1))
            .map(|row| self.intercept + dot(&self.coefficients, row))
            .collect())
    }
}

/// The "no information" model for classes: each class's (weighted) share of the rows, the
/// probability it gives every row.
pub fn no_information_shares(
    outcomes: &[u32],
    classes: usize,
    weights: Option<&[f64]>,
) -> Result<Vec<f64>> {
    const WHAT: &str = "the no-information model";
    crate::metrics::check_weights(WHAT, weights, outcomes.len())?;
    if outcomes.is_empty() {
        return Err(bad(WHAT, "there are no rows"));
    }
    let mut share = vec![0.0; classes];
    for (i, &k) in outcomes.iter().enumerate() {
        let Some(s) = share.get_mut(k as usize) else {
            return Err(bad(
                WHAT,
                format!(
                    "row {} has class code {k}, but there are {classes} classes",
                    i + 1
                ),
            ));
        };
        *s += weights.map_or(1.0, |w| w[i]);
    }
    let total: f64 = share.iter().sum();
    share.iter_mut().for_each(|s| *s /= total);
    Ok(share)
}

/// The "no information" model for numbers: the (weighted) mean, predicted for every row.
pub fn no_information_mean(outcome: &[f64], weights: Option<&[f64]>) -> Result<f64> {
    const WHAT: &str = "the no-information model";
    crate::metrics::check_weights(WHAT, weights, outcome.len())?;
    if outcome.is_empty() || outcome.iter().any(|y| !y.is_finite()) {
        return Err(bad(
            WHAT,
            "it needs at least one row, and a finite outcome in every row",
        ));
    }
    let w = |i: usize| weights.map_or(1.0, |w| w[i]);
    Ok(outcome
        .iter()
        .enumerate()
        .map(|(i, y)| w(i) * y)
        .sum::<f64>()
        / (0..outcome.len()).map(w).sum::<f64>())
}

fn check_outcome_rows(
    what: &str,
    columns: &[Column],
    rows: usize,
    weights: Option<&[f64]>,
) -> Result<()> {
    if rows == 0 {
        return Err(bad(what, "there are no rows"));
    }
    check_rows(columns, rows)?;
    crate::metrics::check_weights(what, weights, rows)
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

/// η_k = θ_k0 + θ_k·x for each output block.
fn linear(theta: &[f64], x: &[f64], eta: &mut [f64]) {
    let block = x.len() + 1;
    for (k, e) in eta.iter_mut().enumerate() {
        let t = &theta[k * block..(k + 1) * block];
        *e = t[0] + dot(&t[1..], x);
    }
}

/// Σ of squared coefficients, intercepts (first of each block) left out.
fn penalty(theta: &[f64], block: usize) -> f64 {
    theta
        .chunks_exact(block)
        .map(|t| t[1..].iter().map(|v| v * v).sum::<f64>())
        .sum()
}

fn log_sum_exp(eta: &[f64]) -> f64 {
    let m = eta.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    m + eta.iter().map(|e| (e - m).exp()).sum::<f64>().ln()
}

fn softmax(eta: &[f64], out: &mut [f64]) {
    let m = eta.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let mut s = 0.0;
    for (o, e) in out.iter_mut().zip(eta) {
        *o = (e - m).exp();
        s += *o;
    }
    out.iter_mut().for_each(|o| *o /= s);
}

/// Minimises `objective` by Newton steps with step halving from `theta`; parameter `fixed`
/// (if any) stays put. Stops when the largest step is below 1e-11; None after 200 steps or
/// when the Hessian is not positive definite.
fn newton<F, D>(
    theta: &mut [f64],
    fixed: Option<usize>,
    objective: F,
    derivatives: D,
) -> Option<usize>
where
    F: Fn(&[f64]) -> f64,
    D: Fn(&[f64], &mut [f64], &mut [f64]),
{
    let size = theta.len();
    let free: Vec<usize> = (0..size).filter(|&p| Some(p) != fixed).collect();
    let m = free.len();
    let mut g = vec![0.0; size];
    let mut h = vec![0.0; size * size];
    let mut current = objective(theta);
    for step in 1..=200 {
        derivatives(theta, &mut g, &mut h);
        let mut hr = vec![0.0; m * m];
        let mut gr = vec![0.0; m];
        for (a, &p) in free.iter().enumerate() {
            gr[a] = g[p];
            for (b, &q) in free.iter().enumerate() {
                hr[a * m + b] = h[p * size + q];
            }
        }
        let delta = cholesky_solve(&mut hr, &gr, m)?;
        let mut t = 1.0;
        let mut trial = theta.to_vec();
        loop {
            for (a, &p) in free.iter().enumerate() {
                trial[p] = theta[p] - t * delta[a];
            }
            let next = objective(&trial);
            if next <= current + 1e-12 * current.abs() || t < 1e-10 {
                current = next;
                break;
            }
            t /= 2.0;
        }
        theta.copy_from_slice(&trial);
        let largest = delta.iter().fold(0.0f64, |acc, v| acc.max((t * v).abs()));
        if !largest.is_finite() {
            return None;
        }
        if largest < 1e-11 {
            return Some(step);
        }
    }
    None
}

/// Solves A x = b for symmetric positive definite A (d × d, overwritten by its Cholesky
/// factor). None when A is not positive definite.
fn cholesky_solve(a: &mut [f64], b: &[f64], d: usize) -> Option<Vec<f64>> {
    let scale = (0..d)
        .map(|j| a[j * d + j].abs())
        .fold(0.0, f64::max)
        .max(f64::MIN_POSITIVE);
    for j in 0..d {
        let mut s = a[j * d + j];
        for k in 0..j {
            s -= a[j * d + k] * a[j * d + k];
        }
        if s <= 1e-13 * scale {
            return None;
        }
        let l = s.sqrt();
        a[j * d + j] = l;
        for i in j + 1..d {
            let mut s = a[i * d + j];
            for k in 0..j {
                s -= a[i * d + k] * a[j * d + k];
            }
            a[i * d + j] = s / l;
        }
    }
    let mut y = b.to_vec();
    for i in 0..d {
        for k in 0..i {
            y[i] -= a[i * d + k] * y[k];
        }
        y[i] /= a[i * d + i];
    }
    for i in (0..d).rev() {
        for k in i + 1..d {
            y[i] -= a[k * d + i] * y[k];
        }
        y[i] /= a[i * d + i];
    }
    Some(y)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: f64, b: f64, tol: f64) -> bool {
        (a - b).abs() <= tol
    }

    #[test]
    fn preparation_fills_standardises_and_adds_missing_columns() {
        // The documented rule (common practice, no source): median fill, population sd,
        // one-hot of every level, a missing column per predictor with missing values.
        let age = [30.0, f64::NAN, 50.0, 40.0];
        let labels = vec!["a".to_string(), "b".to_string(), "c".to_string()];
        let codes = [1, 1, MISSING_CODE, 0];
        let cols = [
            Column {
                name: "age",
                values: ColumnValues::Numbers(&age),
            },
            Column {
                name: "kind",
                values: ColumnValues::Categories {
                    codes: &codes,
                    labels: &labels,
                },
            },
        ];
        let p = Preparation::fit(&cols).unwrap();
        assert_eq!(
            p.features,
            vec![
                "age",
                "age: missing",
                "kind: a",
                "kind: b",
                "kind: c",
                "kind: missing"
            ]
        );
        let x = p.apply(&cols).unwrap();
        // age filled with 40: values 30, 40, 50, 40 → mean 40, sd √50.
        let sd = 50f64.sqrt();
        assert!(close(x[0], -10.0 / sd, 1e-12) && close(x[6], 0.0, 1e-12));
        assert_eq!(&x[6..12], &[0.0, 1.0, 0.0, 1.0, 0.0, 0.0]);
        // Missing kind filled with the most frequent level, b.
        assert_eq!(&x[12 + 2..18], &[0.0, 1.0, 0.0, 1.0]);
        // An unseen code at scoring time: all zeros.
        let codes2 = [7, 0, 0, 0];
        let cols2 = [
            cols[0],
            Column {
                name: "kind",
                values: ColumnValues::Categories {
                    codes: &codes2,
                    labels: &labels,
                },
            },
        ];
        assert_eq!(&p.apply(&cols2).unwrap()[2..6], &[0.0, 0.0, 0.0, 0.0]);
        // Unusable columns.
        let empty = [f64::NAN, f64::NAN];
        assert!(Preparation::fit(&[Column {
            name: "e",
            values: ColumnValues::Numbers(&empty)
        }])
        .is_err());
        assert!(Preparation::fit(&[]).is_err());
    }

    #[test]
    fn logistic_gradient_is_zero_at_the_fit() {
        // Optimality conditions of the stated objective (common practice, no source): for each
        // output, Σ wᵢ (pᵢ − yᵢ) = 0 and Σ wᵢ (pᵢ − yᵢ) xᵢⱼ + wⱼ / C = 0. scikit-learn's own
        // coefficients are compared in tests/reference/check_metrics.py.
        let x1: Vec<f64> = (0..60).map(|i| (i as f64 * 0.37).sin() * 3.0).collect();
        let x2: Vec<f64> = (0..60).map(|i| (i as f64 * 0.11).cos()).collect();
        for classes in [2usize, 3] {
            let y: Vec<u32> = (0..60)
                .map(|i| {
                    ((x1[i] + x2[i] * 2.0 + (i % 5) as f64 * 0.4) as i64).rem_euclid(classes as i64)
                        as u32
                })
                .collect();
            let cols = [
                Column {
                    name: "x1",
                    values: ColumnValues::Numbers(&x1),
                },
                Column {
                    name: "x2",
                    values: ColumnValues::Numbers(&x2),
                },
            ];
            let c = 0.7;
            let m = fit_logistic(&cols, &y, classes, None, c).unwrap();
            let p = m.predict(&cols).unwrap();
            let x = m.preparation.apply(&cols).unwrap();
            let outputs = m.coefficients.len();
            for k in 0..outputs {
                let class = if outputs == 1 { 1 } else { k };
                let mut g = [0.0; 3];
                for i in 0..60 {
                    let r = p[i * classes + class] - f64::from(y[i] as usize == class);
                    g[0] += r;
                    g[1] += r * x[i * 2];
                    g[2] += r * x[i * 2 + 1];
                }
                assert!(close(g[0], 0.0, 1e-9), "{g:?}");
                assert!(close(g[1] + m.coefficients[k][0] / c, 0.0, 1e-9), "{g:?}");
                assert!(close(g[2] + m.coefficients[k][1] / c, 0.0, 1e-9), "{g:?}");
            }
            assert!(p
                .chunks(classes)
                .all(|r| close(r.iter().sum::<f64>(), 1.0, 1e-12)));
        }
    }

    #[test]
    fn ridge_solves_its_normal_equations() {
        // With alpha = 0 and an exact line, ridge returns the line (common practice, no source).
        let x: Vec<f64> = (0..10).map(f64::from).collect();
        let y: Vec<f64> = x.iter().map(|v| 3.0 + 2.0 * v).collect();
        let cols = [Column {
            name: "x",
            values: ColumnValues::Numbers(&x),
        }];
        let m = fit_ridge(&cols, &y, None, 0.0).unwrap();
        let sd = (x.iter().map(|v| (v - 4.5).powi(2)).sum::<f64>() / 10.0).sqrt();
        assert!(close(m.coefficients[0], 2.0 * sd, 1e-9));
        assert!(close(m.intercept, 3.0 + 2.0 * 4.5, 1e-9));
        let pred = m.predict(&cols).unwrap();
        assert!(pred.iter().zip(&y).all(|(a, b)| close(*a, *b, 1e-9)));
        // Two copies of one column are collinear: refused without a penalty, fine with one.
        let cols2 = [
            cols[0],
            Column {
                name: "x again",
                values: ColumnValues::Numbers(&x),
            },
        ];
        assert!(fit_ridge(&cols2, &y, None, 0.0).is_err());
        let m2 = fit_ridge(&cols2, &y, None, 1.0).unwrap();
        assert!(close(m2.coefficients[0], m2.coefficients[1], 1e-12));
    }

    #[test]
    fn baseline_refuses_bad_inputs() {
        let x = [1.0, 2.0, 3.0];
        let cols = [Column {
            name: "x",
            values: ColumnValues::Numbers(&x),
        }];
        assert!(fit_logistic(&cols, &[0, 0, 0], 2, None, 1.0)
            .unwrap_err()
            .to_string()
            .contains("class 1 has no rows"));
        assert!(fit_logistic(&cols, &[0, 1], 2, None, 1.0).is_err());
        assert!(fit_logistic(&cols, &[0, 1, 0], 2, None, 0.0).is_err());
        assert!(fit_logistic(&cols, &[0, 1, 2], 2, None, 1.0).is_err());
        assert!(fit_ridge(&cols, &[1.0, f64::NAN, 2.0], None, 1.0).is_err());
        assert!(fit_ridge(&cols, &[1.0, 2.0, 2.0], Some(&[1.0, -1.0, 1.0]), 1.0).is_err());
        assert_eq!(
            no_information_shares(&[0, 1, 1, 1], 2, None).unwrap(),
            vec![0.25, 0.75]
        );
        assert_eq!(no_information_mean(&[1.0, 2.0, 6.0], None).unwrap(), 3.0);
        assert!(no_information_mean(&[], None).is_err());
    }
}
