//! Honest validation: how a model would do on rows it has not seen. A scheme ([`Scheme`])
//! splits the design's rows ([`folds`]); each split's model is fitted by
//! [`crate::fit::fit_design`] on its training rows only (so the bins, too, are learnt from
//! them) and predicts its held-out rows. The out-of-sample predictions of every row are
//! pooled and judged ([`judge`]), each split's own figures kept, and the error by ensemble
//! size averaged over the splits. [`warnings`] says what the figures cannot show; [`tune`]
//! searches settings by the same schemes, nested if asked.
//!
//! Out-of-bag (bagging, forests) fits once and takes each row's prediction from the trees
//! that did not see it. Bootstrap validation reports the optimism-corrected figures of
//! Harrell, Lee & Mark (Stat Med 1996;15:361–387): the apparent figure of a fit on all rows
//! minus the mean optimism, where a resample's optimism is its model's figure on its own
//! resample minus that on the original rows. Its curves come from each row's predictions by
//! the models whose resample left it out.
//!
//! The splits are fitted one after another here (the core has no threads); a caller with
//! threads passes a [`FoldRunner`] that runs the independent jobs as it likes and gets the
//! same result (each job depends only on its split and the seed).

pub mod folds;
pub mod judge;
pub mod tune;
pub mod warnings;

pub use folds::{splits, Scheme, Split};
pub use judge::{figures, judge, Estimate, Figures, JudgeSettings, Judged};

use crate::baseline;
use crate::binning::{sort_columns, BinnedColumn, Presorted, Records};
use crate::design::{Design, Outcome, PredictorValues};
use crate::error::{Error, ErrorKind, Result};
use crate::fit::{fit_design, FitOptions, Fitted};
use crate::model::{Ensemble, Method, Model};
use crate::progress::{Flow, Progress};
use crate::settings::FitSettings;
use crate::spread::Spread;
use crate::tree::Rows;

/// What to validate, and how to judge it.
#[derive(Debug, Clone, PartialEq)]
pub struct Plan {
    pub scheme: Scheme,
    /// Seeds the splits (the model's own seed is in its settings).
    pub seed: u64,
    /// Two classes: a row is called an event at or above this probability.
    pub threshold: f64,
    /// Bootstrap resamples of the pooled predictions for intervals (0: none).
    pub resamples: usize,
    /// Fit the baseline (L2 logistic or ridge regression) on the same splits.
    pub baseline: bool,
}

/// What one split's fit gave (serialisable: the page's extra workers send theirs back).
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct FoldRun {
    /// Predictions of the split's test rows, `outputs` per row, in its order.
    pub predictions: Vec<f64>,
    pub baseline: Option<Vec<f64>>,
    /// Error after each member on the out-of-sample test rows (error rate, or mean squared
    /// error); None for a single tree.
    pub error_by_size: Option<Vec<f64>>,
    /// The same on the split's training rows (apparent, not a validation).
    pub training_error_by_size: Option<Vec<f64>>,
    /// Figures on the test rows.
    pub figures: Figures,
    pub baseline_figures: Option<Figures>,
    /// Bootstrap: figures of the resample's model on its own resample (apparent).
    pub apparent: Option<Figures>,
    pub baseline_apparent: Option<Figures>,
    /// Trees or rounds fitted.
    pub members: usize,
}

/// One split's figures, as reported.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct FoldFigures {
    pub repeat: usize,
    pub fold: usize,
    pub train_rows: usize,
    pub test_rows: usize,
    pub members: usize,
    pub figures: Figures,
    pub baseline: Option<Figures>,
}

/// The result of a validation.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Validation {
    pub scheme: String,
    pub seed: u64,
    pub rows: usize,
    /// Rows with an out-of-sample prediction (all but holdout's training rows and, out of
    /// bag, rows every tree saw).
    pub judged_rows: usize,
    /// The model's out-of-sample figures with intervals, and curves. For bootstrap
    /// validation the figures are optimism-corrected, their out-of-sample intervals shifted
    /// along.
    pub model: Judged,
    pub baseline: Option<Judged>,
    /// Bootstrap validation: the apparent figures (a fit on all rows judged on those same
    /// rows; NOT a validation) and the mean optimism subtracted from them.
    pub apparent: Option<Figures>,
    pub optimism: Option<Figures>,
    /// Bootstrap validation: the figures of the pooled predictions of the rows each refit left
    /// out, with their intervals, before the correction (Efron & Tibshirani's leave-one-out
    /// bootstrap, JASA 1997;92:548–560, from memory: pessimistic, as each refit sees about
    /// 63% of the distinct rows). Far below the corrected figures when the model fits its
    /// training rows closely ([`warnings::judged_warnings`]).
    pub left_out: Option<std::collections::BTreeMap<String, Estimate>>,
    pub baseline_apparent: Option<Figures>,
    pub baseline_optimism: Option<Figures>,
    /// Each split's figures on its test rows.
    pub folds: Vec<FoldFigures>,
    /// Out-of-sample error after 1, 2, ... members (mean over the splits weighted by their
    /// rows; out-of-bag error for oob).
    pub error_by_size: Option<Vec<f64>>,
    /// Training error after 1, 2, ... members (apparent; for comparison only).
    pub training_error_by_size: Option<Vec<f64>>,
    /// What was done that the figures depend on.
    pub notes: Vec<String>,
    /// Every row's out-of-sample prediction (`outputs` per row; the mean over repeats or
    /// resamples; NaN where there is none).
    #[serde(skip)]
    pub predictions: Vec<f64>,
    #[serde(skip)]
    pub baseline_predictions: Option<Vec<f64>>,
    /// Every row's fold (0-based) in the first repeat; None where it was never held out.
    #[serde(skip)]
    pub fold_of_row: Vec<Option<u32>>,
    pub outputs: usize,
}

/// A split's fitting job: `(split index, fit options, progress)`.
pub type FoldJob<'a> =
    dyn Fn(usize, FitOptions<'_>, &mut dyn Progress) -> Result<FoldRun> + Sync + 'a;

/// Runs `count` jobs and returns their results in index order; [`run_in_order`] runs them
/// one after another, the command line on threads.
pub type FoldRunner<'a> =
    &'a dyn Fn(usize, &FoldJob<'_>, &mut dyn Progress) -> Result<Vec<FoldRun>>;

/// Reports a split's own progress as "fit i/n: stage" and passes a stop on.
pub struct InSplit<'a> {
    pub outer: &'a mut dyn Progress,
    pub index: usize,
    pub count: usize,
}

impl Progress for InSplit<'_> {
    fn step(&mut self, stage: &str, done: u64, total: u64) -> Flow {
        let label = format!("fit {}/{}: {stage}", self.index + 1, self.count);
        self.outer.step(&label, done, total)
    }
}

fn cancelled() -> Error {
    Error::new(ErrorKind::Cancelled)
}

/// Runs the jobs one after another, stopping when `progress` asks.
pub fn run_in_order(
    count: usize,
    job: &FoldJob<'_>,
    progress: &mut dyn Progress,
) -> Result<Vec<FoldRun>> {
    let mut out = Vec::with_capacity(count);
    for i in 0..count {
        if progress.step("fits", i as u64, count as u64) == Flow::Stop {
            return Err(cancelled());
        }
        let mut inner = InSplit {
            outer: &mut *progress,
            index: i,
            count,
        };
        out.push(job(i, FitOptions::default(), &mut inner)?);
    }
    progress.step("fits", count as u64, count as u64);
    Ok(out)
}

/// The baseline's view of a design's predictors.
pub fn baseline_columns(design: &Design) -> Vec<baseline::Column<'_>> {
    design
        .predictors
        .iter()
        .map(|p| baseline::Column {
            name: &p.name,
            values: match &p.values {
                PredictorValues::Numbers(v) => baseline::ColumnValues::Numbers(v),
                PredictorValues::Levels { codes, levels } => baseline::ColumnValues::Categories {
                    codes,
                    labels: levels,
                },
            },
        })
        .collect()
}

/// Penalty of the baseline judged beside a run: 1, so C = 1 for logistic regression and
/// α = 1 for ridge, the defaults of scikit-learn's LogisticRegression and Ridge (common
/// practice, no source).
pub const BASELINE_PENALTY: f64 = 1.0;

/// A baseline fitted on a design: L2-penalised logistic regression (classes) or ridge
/// regression (numbers), as [`crate::baseline`] fits them.
#[derive(Debug, Clone, PartialEq)]
pub enum BaselineModel {
    Logistic(baseline::Logistic),
    Ridge(baseline::Linear),
}

/// Refuses a baseline penalty that is not a finite number above 0.
pub fn check_penalty(penalty: f64) -> Result<()> {
    if penalty > 0.0 && penalty.is_finite() {
        return Ok(());
    }
    Err(Error::new(ErrorKind::BadSetting {
        setting: "penalty".into(),
        reason: format!(
            "{penalty} is not a number above 0; give the penalty's strength, e.g. 1 (larger: \
             coefficients pulled closer to 0)"
        ),
    }))
}

/// Fits the baseline on every row of `design` with penalty strength `penalty` (> 0): the
/// logistic regression's C is 1 / `penalty`, ridge's α is `penalty`.
pub fn fit_baseline_model(design: &Design, penalty: f64) -> Result<BaselineModel> {
    check_penalty(penalty)?;
    let cols = baseline_columns(design);
    let weights = design.weights.as_deref();
    Ok(match &design.outcome {
        Outcome::Classes { codes, labels } => BaselineModel::Logistic(baseline::fit_logistic(
            &cols,
            codes,
            labels.len(),
            weights,
            1.0 / penalty,
        )?),
        Outcome::Numbers(y) => {
            BaselineModel::Ridge(baseline::fit_ridge(&cols, y, weights, penalty)?)
        }
    })
}

impl BaselineModel {
    /// Predictions for the rows of `design` (class probabilities, or the number), in the
    /// layout of [`Model::predict`]: `outputs` per row.
    pub fn predict(&self, design: &Design) -> Result<Vec<f64>> {
        self.predict_columns(&baseline_columns(design))
    }

    /// The same for predictor columns given one by one (in the fitted order).
    pub fn predict_columns(&self, columns: &[baseline::Column]) -> Result<Vec<f64>> {
        match self {
            BaselineModel::Logistic(m) => m.predict(columns),
            BaselineModel::Ridge(m) => m.predict(columns),
        }
    }

    pub fn preparation(&self) -> &baseline::Preparation {
        match self {
            BaselineModel::Logistic(m) => &m.preparation,
            BaselineModel::Ridge(m) => &m.preparation,
        }
    }

    /// The coefficient rows on the prepared (standardised) columns and their intercepts:
    /// one row for two classes (log-odds of the second) or a number, one per class otherwise.
    pub fn rows(&self) -> (Vec<&[f64]>, Vec<f64>) {
        match self {
            BaselineModel::Logistic(m) => (
                m.coefficients.iter().map(Vec::as_slice).collect(),
                m.intercepts.clone(),
            ),
            BaselineModel::Ridge(m) => (vec![m.coefficients.as_slice()], vec![m.intercept]),
        }
    }
}

/// Each predictor's contribution to a baseline's linear predictor, for every row of a
/// design: the sum over the predictor's model columns of β·(x − m), with m the column's mean
/// over the training rows, so `base` plus a row's contributions is its linear predictor (the
/// log-odds of the second class for two classes, the class's score for several, the number
/// for ridge). For a linear model these are its exact SHAP values when predictors are taken
/// as independent (Lundberg & Lee, NeurIPS 2017, "linear SHAP", from memory).
#[derive(Debug, Clone, PartialEq)]
pub struct BaselineContributions {
    /// One per coefficient row (see [`BaselineModel::rows`]).
    pub base: Vec<f64>,
    pub predictors: usize,
    /// Row-major: rows × predictors × coefficient rows.
    pub values: Vec<f64>,
}

impl BaselineModel {
    /// The contributions of every row of `columns` (the predictors in the fitted order),
    /// against the means of `train` (the rows it was fitted on).
    pub fn contributions(
        &self,
        train: &Design,
        columns: &[baseline::Column],
    ) -> Result<BaselineContributions> {
        let prep = self.preparation();
        let width = prep.width();
        let train_x = prep.apply(&baseline_columns(train))?;
        let rows = train_x.len().checked_div(width).unwrap_or(0).max(1);
        let mut means = vec![0.0; width];
        for row in train_x.chunks_exact(width.max(1)) {
            for (m, x) in means.iter_mut().zip(row) {
                *m += x;
            }
        }
        means.iter_mut().for_each(|m| *m /= rows as f64);
        let (coefficients, intercepts) = self.rows();
        let k = coefficients.len();
        let base: Vec<f64> = coefficients
            .iter()
            .zip(&intercepts)
            .map(|(b, c)| c + b.iter().zip(&means).map(|(b, m)| b * m).sum::<f64>())
            .collect();
        let widths = prep.widths();
        let x = prep.apply(columns)?;
        let mut values = Vec::with_capacity(x.len() / width.max(1) * widths.len() * k);
        for row in x.chunks_exact(width.max(1)) {
            let mut at = 0;
            for w in &widths {
                let cols = at..at + w;
                for b in &coefficients {
                    values.push(cols.clone().map(|j| b[j] * (row[j] - means[j])).sum());
                }
                at += w;
            }
        }
        Ok(BaselineContributions {
            base,
            predictors: widths.len(),
            values,
        })
    }
}

/// Fits the baseline on `train` and predicts `test` and `train`.
fn fit_baseline(train: &Design, test: &Design, penalty: f64) -> Result<(Vec<f64>, Vec<f64>)> {
    let m = fit_baseline_model(train, penalty)?;
    Ok((m.predict(test)?, m.predict(train)?))
}

/// New records of `design`'s rows read by the bins of a model fitted on other rows:
/// numbers as they are, categories by their training bin (levels the training rows never
/// had go to the pooled bin), as [`crate::model::read_records`] reads a new file.
pub fn records_of(design: &Design, columns: &[BinnedColumn]) -> Records {
    let n = design.outcome.len();
    let mut values = Vec::with_capacity(n * columns.len());
    for (p, c) in design.predictors.iter().zip(columns) {
        match &p.values {
            PredictorValues::Numbers(v) => values.extend_from_slice(v),
            PredictorValues::Levels { codes, .. } => values.extend(
                codes
                    .iter()
                    .map(|&code| c.rule.bin_of_level(code).map_or(f64::NAN, |b| b as f64)),
            ),
        }
    }
    Records::from_columns(n, values)
}

fn predict_all(model: &Model, rows: Rows<'_>) -> Vec<f64> {
    let mut out = vec![0.0; rows.len() * model.outputs()];
    model.predict_rows(rows, 0..rows.len(), &mut out);
    out
}

/// Fits a split's training rows `train` as judging does (bins learnt from them alone) and
/// reads its test rows `test` by that fit's bins; a cancelled (partial) fit is an error.
/// [`run_split`] (through [`fit_part`]) and held-out permutation importance
/// ([`crate::explain::held_out`]) both refit this way, so they fit the same models.
pub fn fit_training_part(
    train: Design,
    test: &Design,
    settings: &FitSettings,
    options: FitOptions<'_>,
    progress: &mut dyn Progress,
) -> Result<(Fitted, Records)> {
    let fitted = fit_part(train, settings, options, progress)?;
    let records = records_of(test, &fitted.binned.columns);
    Ok((fitted, records))
}

/// [`fit_training_part`]'s fit alone, for a caller that reads the test rows only when it
/// needs them ([`run_split`]: not when a forest judged them as it was fitted).
fn fit_part(
    train: Design,
    settings: &FitSettings,
    options: FitOptions<'_>,
    progress: &mut dyn Progress,
) -> Result<Fitted> {
    let fitted = fit_design(train, settings, None, options, progress)?;
    if fitted.model.partial {
        return Err(cancelled());
    }
    Ok(fitted)
}

/// Fits `split`'s training rows and predicts its test rows.
pub fn run_split(
    design: &Design,
    settings: &FitSettings,
    plan: &Plan,
    split: &Split,
    options: FitOptions<'_>,
    progress: &mut dyn Progress,
) -> Result<FoldRun> {
    let train = design.select_rows(&split.train);
    let test = design.select_rows(&split.test);
    let bootstrap = matches!(plan.scheme, Scheme::Bootstrap { .. });
    let (baseline, baseline_train) = if plan.baseline {
        let (t, a) = fit_baseline(&train, &test, BASELINE_PENALTY)?;
        (Some(t), Some(a))
    } else {
        (None, None)
    };
    // Every test row out of sample (not a bootstrap resample, whose apparent figures need
    // the trees): a forest judges them tree by tree as it is fitted and keeps no trees.
    let all_out = split.out_of_sample.iter().all(|&o| o);
    let options = FitOptions {
        held_out: (all_out && !bootstrap).then_some(&test),
        judged_only: true,
        ..options
    };
    let fitted = fit_part(train, settings, options, progress)?;
    let model = &fitted.model;
    let judged = match &model.ensemble {
        Ensemble::Forest(f) => f.judged.as_ref(),
        _ => None,
    };
    // The out-of-sample test rows (all but a bootstrap resample's own rows); when they are
    // every test row, a forest's predictions come from the same walk as its error by size.
    let (error_by_size, predictions) = match judged {
        // Judged as the trees were tallied (the fit read the test rows itself).
        Some(j) => (Some(j.curve.clone()), j.predictions()),
        None => {
            // Walked by every member: most rows decided from half the bytes
            // (`Records::narrow`).
            let records = records_of(&test, &fitted.binned.columns).with_narrow_copy();
            let (curve, staged) = if all_out {
                model.staged_errors_and_predictions(Rows::Records(&records), &test.outcome)
            } else {
                let keep: Vec<usize> = (0..split.test.len())
                    .filter(|&i| split.out_of_sample[i])
                    .collect();
                let held = test.select_rows(&keep);
                let rows = Rows::Records(&records.select_rows(&keep));
                (model.staged_errors(rows, &held.outcome), None)
            };
            let all = staged.unwrap_or_else(|| predict_all(model, Rows::Records(&records)));
            (curve, all)
        }
    };
    let training_error_by_size = match (&model.ensemble, judged) {
        // No trees kept: the error tallied as they were added.
        (Ensemble::Forest(f), Some(_)) => Some(f.training_error.clone()),
        _ => model.training_errors(&fitted.binned, &fitted.design.outcome),
    };
    let apparent = bootstrap.then(|| {
        let p = predict_all(model, Rows::Binned(&fitted.binned));
        figures(&fitted.design.outcome, &p, plan.threshold)
    });
    Ok(FoldRun {
        figures: figures(&test.outcome, &predictions, plan.threshold),
        baseline_figures: baseline
            .as_ref()
            .map(|b| figures(&test.outcome, b, plan.threshold)),
        baseline_apparent: baseline_train
            .as_ref()
            .filter(|_| bootstrap)
            .map(|b| figures(&fitted.design.outcome, b, plan.threshold)),
        apparent,
        predictions,
        baseline,
        error_by_size,
        training_error_by_size,
        members: judged.map_or_else(|| model.members(), |j| j.curve.len()),
    })
}

/// Mean of curves of different lengths, each weighted; a shorter curve (a boosting run that
/// stopped early) keeps its last value.
fn mean_curve(curves: &[(Vec<f64>, f64)]) -> Option<Vec<f64>> {
    let len = curves.iter().map(|(c, _)| c.len()).max()?;
    let total: f64 = curves.iter().map(|(_, w)| w).sum();
    if len == 0 || total <= 0.0 {
        return None;
    }
    Some(
        (0..len)
            .map(|i| {
                curves
                    .iter()
                    .map(|(c, w)| w * c.get(i).or(c.last()).copied().unwrap_or(f64::NAN))
                    .sum::<f64>()
                    / total
            })
            .collect(),
    )
}

/// Pools per-split predictions into each row's mean out-of-sample prediction.
fn pool(
    n: usize,
    outputs: usize,
    splits: &[Split],
    predictions: impl Fn(usize) -> Option<Vec<f64>>,
) -> Option<Vec<f64>> {
    let mut sums = vec![0.0; n * outputs];
    let mut counts = vec![0u32; n];
    for (i, split) in splits.iter().enumerate() {
        let p = predictions(i)?;
        for (pos, &r) in split.test.iter().enumerate() {
            if split.out_of_sample[pos] {
                counts[r] += 1;
                for k in 0..outputs {
                    sums[r * outputs + k] += p[pos * outputs + k];
                }
            }
        }
    }
    for (r, &c) in counts.iter().enumerate() {
        for k in 0..outputs {
            let s = &mut sums[r * outputs + k];
            *s = if c == 0 { f64::NAN } else { *s / c as f64 };
        }
    }
    Some(sums)
}

/// Judges the rows that have a prediction.
fn judge_pooled(
    design: &Design,
    pooled: &[f64],
    outputs: usize,
    plan: &Plan,
    spread: Option<Spread<'_>>,
) -> Judged {
    let keep: Vec<usize> = (0..design.outcome.len())
        .filter(|&r| !pooled[r * outputs].is_nan())
        .collect();
    let sub = design.outcome.select(&keep);
    let p: Vec<f64> = keep
        .iter()
        .flat_map(|&r| pooled[r * outputs..(r + 1) * outputs].iter().copied())
        .collect();
    judge(
        &sub,
        &p,
        &JudgeSettings {
            threshold: plan.threshold,
            resamples: plan.resamples,
            seed: plan.seed,
        },
        spread,
    )
}

/// Harrell's optimism: mean over resamples of (apparent on the resample − on all rows).
fn optimism(pairs: &[(&Figures, &Figures)]) -> Figures {
    let mut out = Figures::new();
    if let Some((first, _)) = pairs.first() {
        for name in first.keys() {
            let d: Vec<f64> = pairs
                .iter()
                .filter_map(|(a, t)| Some(a.get(name)? - t.get(name)?))
                .collect();
            if !d.is_empty() {
                out.insert(name.clone(), d.iter().sum::<f64>() / d.len() as f64);
            }
        }
    }
    out
}

/// Figures that live in [0, 1], whose shifted intervals are cut to it.
fn in_unit_range(name: &str) -> bool {
    matches!(
        name,
        "auc"
            | "macro_auc"
            | "average_precision"
            | "accuracy"
            | "balanced_accuracy"
            | "sensitivity"
            | "specificity"
            | "ppv"
            | "npv"
            | "f1"
            | "brier"
    )
}

/// Replaces each figure of `judged` (the pooled out-of-resample predictions, judged with
/// their intervals) by apparent − optimism, and moves its interval along with it: the
/// out-of-sample interval (DeLong, Wilson or bootstrap) shifted by (corrected − pooled
/// value), cut to [0, 1] for figures that live there. A location shift in the spirit of Noma
/// et al. (Stat Med 2021;40:5691–5701, from memory), who shift the percentile interval of the
/// resamples' apparent figures by the optimism; that interval has no width for fully grown
/// trees (every resample's apparent AUC is 1), so the spread here comes from the rows left
/// out instead (common practice, no source). A figure without an out-of-sample interval
/// gets none. Returns the pooled figures replaced.
fn correct(
    judged: &mut Judged,
    apparent: &Figures,
    optimism: &Figures,
) -> std::collections::BTreeMap<String, Estimate> {
    let pooled = std::mem::take(&mut judged.metrics);
    judged.metrics = apparent
        .iter()
        .filter_map(|(name, a)| {
            let o = optimism.get(name)?;
            let mut e = Estimate::bare(a - o);
            if let Some(p) = pooled.get(name) {
                if let (Some(low), Some(high)) = (p.low, p.high) {
                    let shift = e.value - p.value;
                    let (mut low, mut high) = (low + shift, high + shift);
                    if in_unit_range(name) {
                        (low, high) = (low.clamp(0.0, 1.0), high.clamp(0.0, 1.0));
                    }
                    e.low = Some(low);
                    e.high = Some(high);
                    e.interval = match p.interval {
                        "DeLong" => "shifted DeLong",
                        "Wilson" => "shifted Wilson",
                        _ => "shifted bootstrap",
                    };
                }
            }
            Some((name.clone(), e))
        })
        .collect();
    pooled
}

/// Judges a bagged ensemble or forest already fitted on every row of `design` by its
/// out-of-bag predictions (the `oob` scheme without fitting again), with the baseline on
/// 10 stratified folds when the plan asks for it.
pub fn out_of_bag(design: &Design, fitted: &Fitted, plan: &Plan) -> Result<Validation> {
    out_of_bag_spread(design, fitted, plan, None)
}

/// [`out_of_bag`] with the bootstrap resamples of the intervals run by `spread`.
pub fn out_of_bag_spread(
    design: &Design,
    fitted: &Fitted,
    plan: &Plan,
    spread: Option<Spread<'_>>,
) -> Result<Validation> {
    let n = design.outcome.len();
    let outputs = design.outcome.outputs();
    let mut notes = Vec::new();
    if fitted.model.partial {
        return Err(cancelled());
    }
    let Ensemble::Forest(forest) = &fitted.model.ensemble else {
        return Err(Error::new(ErrorKind::BadSetting {
            setting: "validate".into(),
            reason: "oob: only bagging and forests leave rows out of each tree; use folds:10"
                .into(),
        }));
    };
    let model = judge_pooled(design, &forest.oob_prediction, outputs, plan, spread);
    let judged_rows = model.rows;
    notes.push(format!(
        "each row judged by the trees whose bootstrap left it out ({:.1}% of (tree, row) \
         pairs)",
        100.0 * forest.oob_share
    ));
    let (baseline, baseline_predictions) = if plan.baseline {
        // A logistic or ridge model has no out-of-bag rows: 10 stratified folds.
        let scheme = Scheme::Folds { k: 10, repeats: 1 };
        let s = splits(design, &scheme, plan.seed)?;
        let mut pooled = vec![f64::NAN; n * outputs];
        for split in &s {
            let (p, _) = fit_baseline(
                &design.select_rows(&split.train),
                &design.select_rows(&split.test),
                BASELINE_PENALTY,
            )?;
            for (pos, &r) in split.test.iter().enumerate() {
                pooled[r * outputs..(r + 1) * outputs]
                    .copy_from_slice(&p[pos * outputs..(pos + 1) * outputs]);
            }
        }
        notes.push(
            "the baseline, having no out-of-bag rows, is judged by 10 stratified folds".into(),
        );
        (
            Some(judge_pooled(design, &pooled, outputs, plan, spread)),
            Some(pooled),
        )
    } else {
        (None, None)
    };
    Ok(Validation {
        scheme: plan.scheme.words(),
        seed: plan.seed,
        rows: n,
        judged_rows,
        model,
        baseline,
        apparent: None,
        optimism: None,
        left_out: None,
        baseline_apparent: None,
        baseline_optimism: None,
        folds: Vec::new(),
        error_by_size: Some(forest.oob_error.clone()),
        training_error_by_size: fitted
            .model
            .staged_errors(Rows::Binned(&fitted.binned), &fitted.design.outcome),
        notes,
        predictions: forest.oob_prediction.clone(),
        baseline_predictions,
        fold_of_row: vec![None; n],
        outputs,
    })
}

/// Validates `settings` on `design` by `plan`. `options` serve the fits on every row
/// (out-of-bag, bootstrap's apparent fit); `runner` runs the splits (default: in order).
pub fn validate(
    design: &Design,
    settings: &FitSettings,
    plan: &Plan,
    options: FitOptions<'_>,
    runner: Option<FoldRunner<'_>>,
    progress: &mut dyn Progress,
) -> Result<Validation> {
    check_threshold(plan)?;
    // Each split's bins read from one sort of every number predictor, not sorted again (not
    // for out-of-bag, one fit, nor bootstrap resamples, whose repeated rows are binned alone).
    let sorted = matches!(
        plan.scheme,
        Scheme::Holdout { .. } | Scheme::Folds { .. } | Scheme::Groups { .. }
    )
    .then(|| sort_columns(design));
    let run_splits = |splits: &[Split], plan: &Plan, progress: &mut dyn Progress| {
        let job = |i: usize, options: FitOptions<'_>, progress: &mut dyn Progress| {
            let presorted = sorted.as_ref().map(|sorted| Presorted {
                sorted,
                rows: &splits[i].train,
            });
            let options = FitOptions {
                presorted,
                ..options
            };
            run_split(design, settings, plan, &splits[i], options, progress)
        };
        match runner {
            Some(r) => r(splits.len(), &job, progress),
            None => run_in_order(splits.len(), &job, progress),
        }
    };
    if plan.scheme == Scheme::OutOfBag {
        if !matches!(settings.method, Method::Bagging | Method::Forest) {
            return Err(Error::new(ErrorKind::BadSetting {
                setting: "validate".into(),
                reason: format!(
                    "oob: only bagging and forests leave rows out of each tree; {} does not. \
                     Use folds:10",
                    settings.method.word()
                ),
            }));
        }
        let fitted = fit_design(design.clone(), settings, None, options, progress)?;
        return out_of_bag_spread(design, &fitted, plan, options.spread);
    }

    let s = splits(design, &plan.scheme, plan.seed)?;
    let runs = run_splits(&s, plan, progress)?;
    // Bootstrap's apparent fit: every row, judged on those rows.
    let mut apparent = || -> Result<Vec<f64>> {
        let fitted = fit_design(design.clone(), settings, None, options, &mut *progress)?;
        if fitted.model.partial {
            return Err(cancelled());
        }
        Ok(predict_all(&fitted.model, Rows::Binned(&fitted.binned)))
    };
    pooled(design, plan, &s, runs, options.spread, &mut apparent)
}

/// Refuses a two-class threshold outside (0, 1).
fn check_threshold(plan: &Plan) -> Result<()> {
    if plan.threshold > 0.0 && plan.threshold < 1.0 {
        return Ok(());
    }
    Err(Error::new(ErrorKind::BadSetting {
        setting: "threshold".into(),
        reason: format!(
            "{} is outside (0, 1); give the probability from which a row is called an \
             event, e.g. 0.5",
            plan.threshold
        ),
    }))
}

/// Validates the baseline itself (not beside a run): [`fit_baseline_model`] with `penalty`
/// fitted on each split's training rows and judged on its test rows, pooled and judged as
/// [`validate`] judges a run (so its figures equal the baseline judged beside a run on the
/// same splits with the same penalty). Out-of-bag is refused: a baseline is not grown from
/// resamples.
pub fn validate_baseline(
    design: &Design,
    penalty: f64,
    plan: &Plan,
    progress: &mut dyn Progress,
) -> Result<Validation> {
    check_threshold(plan)?;
    if plan.scheme == Scheme::OutOfBag {
        return Err(Error::new(ErrorKind::BadSetting {
            setting: "validate".into(),
            reason: "oob: the baseline is not grown from resamples, so it has no out-of-bag \
                     records; use folds:5"
                .into(),
        }));
    }
    let s = splits(design, &plan.scheme, plan.seed)?;
    let bootstrap = matches!(plan.scheme, Scheme::Bootstrap { .. });
    let mut runs = Vec::with_capacity(s.len());
    for (i, split) in s.iter().enumerate() {
        if progress.step("fits", i as u64, s.len() as u64) == Flow::Stop {
            return Err(cancelled());
        }
        let train = design.select_rows(&split.train);
        let test = design.select_rows(&split.test);
        let (on_test, on_train) = fit_baseline(&train, &test, penalty)?;
        runs.push(FoldRun {
            figures: figures(&test.outcome, &on_test, plan.threshold),
            apparent: bootstrap.then(|| figures(&train.outcome, &on_train, plan.threshold)),
            predictions: on_test,
            baseline: None,
            error_by_size: None,
            training_error_by_size: None,
            baseline_figures: None,
            baseline_apparent: None,
            members: 1,
        });
    }
    progress.step("fits", s.len() as u64, s.len() as u64);
    let plan = Plan {
        baseline: false,
        ..plan.clone()
    };
    let mut apparent = || fit_baseline_model(design, penalty)?.predict(design);
    pooled(design, &plan, &s, runs, None, &mut apparent)
}

/// Pools the splits' fits `runs` (of splits `s`) into each row's out-of-sample prediction
/// and judges them as `plan` says; `fit_all` gives the predictions on every row of a fit
/// on every row (asked for bootstrap's optimism correction only).
fn pooled(
    design: &Design,
    plan: &Plan,
    s: &[Split],
    runs: Vec<FoldRun>,
    spread: Option<Spread<'_>>,
    fit_all: &mut dyn FnMut() -> Result<Vec<f64>>,
) -> Result<Validation> {
    let n = design.outcome.len();
    let outputs = design.outcome.outputs();
    let mut notes = Vec::new();
    let predictions =
        pool(n, outputs, s, |i| Some(runs[i].predictions.clone())).unwrap_or_default();
    let baseline_predictions = pool(n, outputs, s, |i| runs[i].baseline.clone());
    let mut model = judge_pooled(design, &predictions, outputs, plan, spread);
    let mut baseline = baseline_predictions
        .as_ref()
        .map(|p| judge_pooled(design, p, outputs, plan, spread));
    let judged_rows = model.rows;
    let mut fold_of_row = vec![None; n];
    for split in s.iter().filter(|x| x.repeat == 0) {
        for &r in &split.test {
            fold_of_row[r] = Some(split.fold as u32);
        }
    }
    let weights = |i: usize| s[i].out_of_sample.iter().filter(|&&o| o).count() as f64;
    let curve = |f: &dyn Fn(&FoldRun) -> Option<Vec<f64>>, w: &dyn Fn(usize) -> f64| {
        let c: Option<Vec<(Vec<f64>, f64)>> = runs
            .iter()
            .enumerate()
            .map(|(i, r)| Some((f(r)?, w(i))))
            .collect();
        c.and_then(|c| mean_curve(&c))
    };
    let error_by_size = curve(&|r| r.error_by_size.clone(), &weights);
    let training_error_by_size = curve(&|r| r.training_error_by_size.clone(), &|i| {
        s[i].train.len() as f64
    });
    let (mut apparent, mut optimism_of, mut baseline_apparent, mut baseline_optimism) =
        (None, None, None, None);
    let mut left_out = None;
    match &plan.scheme {
        Scheme::Bootstrap { resamples } => {
            // The apparent fit: every row, judged on those rows.
            let p = fit_all()?;
            let a = figures(&design.outcome, &p, plan.threshold);
            let pairs: Vec<(&Figures, &Figures)> = runs
                .iter()
                .filter_map(|r| Some((r.apparent.as_ref()?, &r.figures)))
                .collect();
            let o = optimism(&pairs);
            left_out = Some(correct(&mut model, &a, &o));
            if plan.baseline {
                let (_, train_pred) = fit_baseline(design, design, BASELINE_PENALTY)?;
                let ba = figures(&design.outcome, &train_pred, plan.threshold);
                let pairs: Vec<(&Figures, &Figures)> = runs
                    .iter()
                    .filter_map(|r| {
                        Some((r.baseline_apparent.as_ref()?, r.baseline_figures.as_ref()?))
                    })
                    .collect();
                let bo = optimism(&pairs);
                if let Some(b) = baseline.as_mut() {
                    correct(b, &ba, &bo);
                }
                baseline_apparent = Some(ba);
                baseline_optimism = Some(bo);
            }
            apparent = Some(a);
            optimism_of = Some(o);
            notes.push(format!(
                "figures are optimism-corrected (Harrell, Lee & Mark 1996): apparent minus the \
                 mean optimism over {resamples} bootstrap refits; each interval is the \
                 out-of-sample interval of the rows' left-out predictions moved to the \
                 corrected figure (a location shift); curves and the per-row predictions come \
                 from the refits whose resample left the row out"
            ));
        }
        Scheme::Holdout { fraction } => notes.push(format!(
            "one stratified split: {} rows held out ({:.0}%), {} trained on; a single split \
             varies with the seed, k-fold is steadier",
            s[0].test.len(),
            100.0 * fraction,
            s[0].train.len()
        )),
        Scheme::Folds { k, repeats } if *repeats > 1 => notes.push(format!(
            "{k} stratified folds repeated {repeats} times; each row's prediction is the mean \
             of its {repeats} out-of-sample predictions"
        )),
        Scheme::Folds { k, .. } => notes.push(format!("{k} stratified folds")),
        Scheme::Groups { k, column } => notes.push(format!(
            "{k} grouped folds: all rows of a '{column}' value in one fold"
        )),
        Scheme::OutOfBag => {}
    }
    let folds = s
        .iter()
        .zip(&runs)
        .map(|(split, run)| FoldFigures {
            repeat: split.repeat,
            fold: split.fold,
            train_rows: split.train.len(),
            test_rows: split.test.len(),
            members: run.members,
            figures: run.figures.clone(),
            baseline: run.baseline_figures.clone(),
        })
        .collect();
    Ok(Validation {
        scheme: plan.scheme.words(),
        seed: plan.seed,
        rows: n,
        judged_rows,
        model,
        baseline,
        apparent,
        optimism: optimism_of,
        left_out,
        baseline_apparent,
        baseline_optimism,
        folds,
        error_by_size,
        training_error_by_size,
        notes,
        predictions,
        baseline_predictions,
        fold_of_row,
        outputs,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::design::design_from_csv;
    use crate::progress::{Silent, StopAfter};
    use crate::random::{below, stream, Purpose};

    /// 400 rows: y depends on a + b (10% flipped), c is noise, w a category.
    pub(super) fn problem() -> Design {
        let mut rng = stream(5, Purpose::TreeRows, 0);
        let mut text = String::from("y,a,b,c,w\n");
        for _ in 0..400 {
            let x: Vec<f64> = (0..3)
                .map(|_| below(&mut rng, 1000) as f64 / 1000.0)
                .collect();
            let flip = below(&mut rng, 10) == 0;
            let y = (x[0] + x[1] > 1.0) != flip;
            let w = ["k", "l", "m"][below(&mut rng, 3)];
            text += &format!("{},{},{},{},{w}\n", u8::from(y), x[0], x[1], x[2]);
        }
        design_from_csv(&text, "y", &["a", "b", "c", "w"])
    }

    fn plan(scheme: &str) -> Plan {
        Plan {
            scheme: Scheme::parse(scheme).unwrap(),
            seed: 3,
            threshold: 0.5,
            resamples: 100,
            baseline: true,
        }
    }

    fn forest(trees: usize) -> FitSettings {
        FitSettings::build(
            Method::Forest,
            4,
            false,
            "y",
            &[("trees".into(), trees.to_string())],
        )
        .unwrap()
    }

    #[test]
    fn the_baseline_judged_alone_equals_the_baseline_judged_beside_a_run() {
        // Our own consistency rule (common practice, no source): a baseline run on a scheme is
        // the baseline `spinney evaluate --baseline` judges beside a run on the same splits,
        // to the bit, bootstrap optimism correction included. (Its coefficients are checked
        // against scikit-learn in tests/reference/check_metrics.py.)
        let d = problem();
        for scheme in ["folds:5", "holdout:0.25", "bootstrap:8", "folds:4:2"] {
            let beside = validate(
                &d,
                &forest(5),
                &plan(scheme),
                FitOptions::default(),
                None,
                &mut Silent,
            )
            .unwrap();
            let alone =
                validate_baseline(&d, BASELINE_PENALTY, &plan(scheme), &mut Silent).unwrap();
            assert_eq!(Some(&alone.model), beside.baseline.as_ref(), "{scheme}");
            // Bit for bit (holdout leaves NaN for rows never held out).
            let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
            assert_eq!(
                bits(&alone.predictions),
                bits(beside.baseline_predictions.as_deref().unwrap())
            );
            assert_eq!(alone.apparent, beside.baseline_apparent, "{scheme}");
            assert!(alone.baseline.is_none() && alone.error_by_size.is_none());
            assert_eq!(alone.notes, beside.notes, "{scheme}");
        }
        // A stronger penalty gives another model; out-of-bag and a bad penalty are refused.
        let strong = validate_baseline(&d, 100.0, &plan("folds:5"), &mut Silent).unwrap();
        let usual = validate_baseline(&d, 1.0, &plan("folds:5"), &mut Silent).unwrap();
        assert_ne!(strong.predictions, usual.predictions);
        let oob = validate_baseline(&d, 1.0, &plan("oob"), &mut Silent).unwrap_err();
        assert!(oob.to_string().contains("no out-of-bag"), "{oob}");
        let zero = validate_baseline(&d, 0.0, &plan("folds:5"), &mut Silent).unwrap_err();
        assert!(zero.to_string().contains("penalty"), "{zero}");
        // Stopped between splits.
        assert!(validate_baseline(&d, 1.0, &plan("folds:5"), &mut StopAfter(2)).is_err());
    }

    #[test]
    fn baseline_contributions_add_up_to_its_prediction() {
        // Local accuracy (Lundberg & Lee 2017, property 1): base + Σ contributions is the
        // linear predictor, whose logistic function is the predicted probability.
        let d = problem();
        let m = fit_baseline_model(&d, 1.0).unwrap();
        let c = m.contributions(&d, &baseline_columns(&d)).unwrap();
        let p = m.predict(&d).unwrap();
        assert_eq!(c.predictors, 4);
        for r in [0, 7, 399] {
            let sum = c.base[0] + c.values[r * 4..(r + 1) * 4].iter().sum::<f64>();
            let prob = 1.0 / (1.0 + (-sum).exp());
            assert!(
                (prob - p[r * 2 + 1]).abs() < 1e-12,
                "row {r}: {prob} vs {}",
                p[r * 2 + 1]
            );
        }
        // Averaged over the training rows each predictor's contribution is 0.
        for j in 0..4 {
            let mean: f64 = (0..400).map(|r| c.values[r * 4 + j]).sum::<f64>() / 400.0;
            assert!(mean.abs() < 1e-12, "predictor {j}: mean {mean}");
        }
    }

    #[test]
    fn k_fold_predicts_every_row_once_and_any_runner_gives_the_same_result() {
        let d = problem();
        let s = forest(30);
        let p = plan("folds:5");
        let v = validate(&d, &s, &p, FitOptions::default(), None, &mut Silent).unwrap();
        assert_eq!((v.rows, v.judged_rows, v.folds.len()), (400, 400, 5));
        assert!(v.predictions.iter().all(|x| x.is_finite()));
        let auc = &v.model.metrics["auc"];
        // 10% of labels flipped: a sound model lands well above chance, below perfect.
        assert!(auc.value > 0.8 && auc.value < 0.99, "{auc:?}");
        let base = &v.baseline.as_ref().unwrap().metrics["auc"];
        assert!(base.value > 0.8, "{base:?}");
        assert_eq!(v.error_by_size.as_ref().unwrap().len(), 30);
        // Training error falls below the out-of-sample error (apparent fit is optimistic).
        let last = |c: &Option<Vec<f64>>| *c.as_ref().unwrap().last().unwrap();
        assert!(last(&v.training_error_by_size) < last(&v.error_by_size));
        // A runner that runs the jobs backwards (as threads might finish) changes nothing.
        let backwards = |count: usize, job: &FoldJob<'_>, _: &mut dyn Progress| {
            let mut out: Vec<FoldRun> = (0..count)
                .rev()
                .map(|i| job(i, FitOptions::default(), &mut Silent))
                .collect::<Result<_>>()?;
            out.reverse();
            Ok(out)
        };
        let w = validate(
            &d,
            &s,
            &p,
            FitOptions::default(),
            Some(&backwards),
            &mut Silent,
        )
        .unwrap();
        assert_eq!(v, w);
        assert!(v.fold_of_row.iter().all(Option::is_some));
    }

    #[test]
    fn out_of_bag_holdout_and_bootstrap() {
        let d = problem();
        let s = forest(40);
        let oob = validate(
            &d,
            &s,
            &plan("oob"),
            FitOptions::default(),
            None,
            &mut Silent,
        )
        .unwrap();
        assert!(oob.judged_rows > 390, "{}", oob.judged_rows);
        assert!(oob.model.metrics["auc"].value > 0.8);
        assert!(oob.baseline.is_some());
        let hold = validate(
            &d,
            &s,
            &plan("holdout:0.25"),
            FitOptions::default(),
            None,
            &mut Silent,
        )
        .unwrap();
        assert_eq!(hold.judged_rows, 100);
        let mut p = plan("bootstrap:8");
        p.baseline = false;
        let tree = FitSettings::build(Method::Tree, 4, false, "y", &[]).unwrap();
        let boot = validate(&d, &tree, &p, FitOptions::default(), None, &mut Silent).unwrap();
        let apparent = boot.apparent.as_ref().unwrap()["auc"];
        let corrected = boot.model.metrics["auc"].value;
        // A fully grown tree fits its rows almost perfectly; its optimism is large.
        assert!(
            apparent > 0.97 && corrected < apparent - 0.05,
            "{apparent} {corrected}"
        );
        // The corrected AUC carries its out-of-sample (DeLong) interval, shifted along.
        let auc = &boot.model.metrics["auc"];
        assert_eq!(auc.interval, "shifted DeLong");
        assert!(
            auc.low.unwrap() <= corrected && corrected <= auc.high.unwrap(),
            "{auc:?}"
        );
        let tree_oob = validate(
            &d,
            &tree,
            &plan("oob"),
            FitOptions::default(),
            None,
            &mut Silent,
        );
        assert!(tree_oob.unwrap_err().to_string().contains("Use folds:10"));
    }

    #[test]
    fn a_bootstrap_correction_far_above_the_left_out_rows_is_called_into_doubt() {
        // Harrell's optimism bootstrap understates the optimism of models that fit their
        // training rows almost perfectly (Efron & Tibshirani 1997, from memory): a forest's
        // corrected AUC lies far above its left-out rows' own AUC, which the 10-fold figure
        // confirms, and the judged warning says so. A tree of depth two does not fit its
        // rows closely: no warning. (Margins common practice, no source.)
        let d = problem();
        let mut p = plan("bootstrap:8");
        p.baseline = false;
        let run = |s: &FitSettings, p: &Plan| {
            validate(&d, s, p, FitOptions::default(), None, &mut Silent).unwrap()
        };
        let boot = run(&forest(40), &p);
        let corrected = boot.model.metrics["auc"].value;
        let left_out = &boot.left_out.as_ref().unwrap()["auc"];
        let folds = run(&forest(40), &plan("folds:10")).model.metrics["auc"].value;
        assert!(
            corrected > left_out.value + 0.05 && corrected > folds + 0.03,
            "corrected {corrected}, left out {left_out:?}, 10 folds {folds}"
        );
        let said = warnings::judged_warnings(&boot);
        assert_eq!(said.len(), 1, "{said:?}");
        assert_eq!(said[0].kind, "optimism_understated");
        assert!(
            said[0].message.contains(&format!("{corrected:.3}")),
            "{said:?}"
        );
        let shallow =
            FitSettings::build(Method::Tree, 4, false, "y", &[("depth".into(), "2".into())])
                .unwrap();
        let boot = run(&shallow, &p);
        assert!(boot.left_out.is_some());
        assert_eq!(warnings::judged_warnings(&boot), Vec::new());
        // Other schemes keep no left-out figures and give no such warning.
        let folds = run(&shallow, &plan("folds:5"));
        assert!(folds.left_out.is_none() && warnings::judged_warnings(&folds).is_empty());
    }

    #[test]
    fn optimism_corrected_intervals_are_shifted_out_of_sample_intervals() {
        // Worked by hand (common practice, no source): pooled out-of-sample AUC 0.80 with
        // DeLong interval 0.75–0.85; apparent 0.95, optimism 0.10 → corrected 0.85, interval
        // shifted by +0.05 to 0.80–0.90. Near 1, the shifted interval is cut at 1. RMSE is
        // not cut. A figure without an out-of-sample interval gets none.
        let est = |value: f64, low: f64, high: f64, interval: &'static str| Estimate {
            value,
            low: Some(low),
            high: Some(high),
            interval,
        };
        let mut j = judge(
            &Outcome::Numbers(vec![1.0, 2.0, 3.0]),
            &[1.0, 2.0, 3.0],
            &JudgeSettings {
                threshold: 0.5,
                resamples: 0,
                seed: 1,
            },
            None,
        );
        j.metrics = std::collections::BTreeMap::from([
            ("auc".to_string(), est(0.80, 0.75, 0.85, "DeLong")),
            ("sensitivity".to_string(), est(0.90, 0.85, 0.94, "Wilson")),
            ("rmse".to_string(), est(2.0, 1.5, 2.5, "bootstrap")),
            ("mae".to_string(), Estimate::bare(1.0)),
        ]);
        let fig = |pairs: &[(&str, f64)]| -> Figures {
            pairs.iter().map(|(k, v)| (k.to_string(), *v)).collect()
        };
        let apparent = fig(&[
            ("auc", 0.95),
            ("sensitivity", 1.0),
            ("rmse", 0.5),
            ("mae", 0.4),
        ]);
        let optimism = fig(&[
            ("auc", 0.10),
            ("sensitivity", 0.02),
            ("rmse", -1.0),
            ("mae", -0.5),
        ]);
        correct(&mut j, &apparent, &optimism);
        let m = &j.metrics;
        let near = |a: Option<f64>, b: f64| (a.unwrap() - b).abs() < 1e-12;
        assert!(near(Some(m["auc"].value), 0.85));
        assert!(
            near(m["auc"].low, 0.80) && near(m["auc"].high, 0.90),
            "{m:?}"
        );
        assert_eq!(m["auc"].interval, "shifted DeLong");
        assert!(near(m["sensitivity"].low, 0.93) && near(m["sensitivity"].high, 1.0));
        assert_eq!(m["sensitivity"].interval, "shifted Wilson");
        assert!(
            near(m["rmse"].low, 1.0) && near(m["rmse"].high, 2.0),
            "{m:?}"
        );
        assert_eq!(m["rmse"].interval, "shifted bootstrap");
        assert_eq!((m["mae"].low, m["mae"].interval), (None, "none"));
    }

    #[test]
    fn a_stop_cancels_and_a_bad_threshold_is_refused() {
        let d = problem();
        let s = forest(20);
        let e = validate(
            &d,
            &s,
            &plan("folds:5"),
            FitOptions::default(),
            None,
            &mut StopAfter(3),
        );
        assert!(matches!(e.unwrap_err().kind(), ErrorKind::Cancelled));
        let mut p = plan("folds:5");
        p.threshold = 1.2;
        let e = validate(&d, &s, &p, FitOptions::default(), None, &mut Silent).unwrap_err();
        assert!(e.to_string().contains("outside (0, 1)"), "{e}");
    }

    #[test]
    fn each_fold_bins_its_own_training_rows() {
        // A category level only in the test fold reads as the pooled bin, never a panic.
        let d = problem();
        let split = Split {
            repeat: 0,
            fold: 0,
            train: (0..300).collect(),
            test: (300..400).collect(),
            out_of_sample: vec![true; 100],
        };
        let run = run_split(
            &d,
            &forest(5),
            &plan("folds:4"),
            &split,
            FitOptions::default(),
            &mut Silent,
        )
        .unwrap();
        assert_eq!(run.predictions.len(), 200);
        assert!(run.figures.contains_key("auc"));
    }
}
