//! One way to fit any method: [`fit_design`] bins a design, fits the method its
//! [`FitSettings`] name and hands back the [`Model`] with the binned rows it was fitted on.
//! The command line, the page's worker and validation (which fits once per fold) all come
//! through here, so a method is dispatched in one place.
//!
//! The core has no threads: a caller that has them (the command line) passes a
//! [`ForestFitter`] that spreads a forest's trees over them, and gets the same forest bit for
//! bit (each tree draws only from its own seeded streams).

use crate::binning::{bin_design, BinnedMatrix};
use crate::design::{Design, Outcome};
use crate::ensemble::adaboost::fit_adaboost;
use crate::ensemble::boosting::fit_boosting;
use crate::ensemble::forest::{fit_forest, Forest, ForestSettings};
use crate::error::{Error, ErrorKind, Result};
use crate::model::{is_partial, predictors_of, Ensemble, Method, Model};
use crate::progress::Progress;
use crate::settings::FitSettings;
use crate::tree::grower::grow;
use crate::tree::prune::{prune, pruning_path, PruneStep};

/// Fits a forest's trees: `(binned, row statistics, statistics per row, outcome, settings,
/// progress)`. [`fit_forest`] fits them one after another; the command line passes one that
/// uses threads.
pub type ForestFitter<'a> = &'a dyn Fn(
    &BinnedMatrix,
    &[f64],
    usize,
    &Outcome,
    &ForestSettings,
    &mut dyn Progress,
) -> Result<Forest>;

/// What else to keep from a fit.
#[derive(Default, Clone, Copy)]
pub struct FitOptions<'a> {
    /// Fits the trees of bagging and forests (default: one after another).
    pub forest_fitter: Option<ForestFitter<'a>>,
    /// Keep a single tree's cost-complexity pruning path (time quadratic in its nodes).
    pub pruning_path: bool,
}

/// A fitted model with what it was fitted on.
pub struct Fitted {
    pub model: Model,
    /// The training rows' bins (the design's predictors, binned; freed from the design).
    pub binned: BinnedMatrix,
    /// The design without its predictors' values (outcome, weights, groups, rows, notices).
    pub design: Design,
    /// A single tree's pruning path, when asked for.
    pub pruning_path: Option<Vec<PruneStep>>,
}

/// Bins `design` and fits `settings.method` on it. `fingerprint` is the training file's, for
/// the model to carry. Monotone constraints are matched to the predictors by name here.
pub fn fit_design(
    mut design: Design,
    settings: &FitSettings,
    fingerprint: Option<String>,
    options: FitOptions<'_>,
    progress: &mut dyn Progress,
) -> Result<Fitted> {
    let bad = |setting: &str, reason: String| {
        Error::new(ErrorKind::BadSetting {
            setting: setting.into(),
            reason,
        })
    };
    let regression = matches!(design.outcome, Outcome::Numbers(_));
    if regression != settings.regression {
        return Err(bad(
            "outcome",
            format!(
                "the settings were made for a {} outcome, but '{}' holds {}",
                if settings.regression {
                    "number"
                } else {
                    "class"
                },
                design.outcome_name,
                if regression { "numbers" } else { "classes" }
            ),
        ));
    }
    let mut boosting = settings.boosting.clone();
    if !settings.monotone.is_empty() {
        boosting.monotone = vec![0; design.predictors.len()];
        for (name, sign) in &settings.monotone {
            let Some(j) = design.predictors.iter().position(|p| &p.name == name) else {
                let names: Vec<&str> = design.predictors.iter().map(|p| p.name.as_str()).collect();
                return Err(bad(
                    "monotone",
                    format!(
                        "'{name}' is not among the predictors ({}); check the spelling or add it \
                         to the predictors",
                        names.join(", ")
                    ),
                ));
            };
            boosting.monotone[j] = *sign;
        }
    }
    let binned = bin_design(&design, settings.bins)?;
    // How a saved model reads each predictor from a new table.
    let predictors = predictors_of(&design, &binned);
    // From here on the learners read the bins only: free the predictors' values.
    design.predictors = Vec::new();
    let (stats, width) = design.row_statistics(settings.balanced_classes);
    let mut path = None;
    let ensemble = match settings.method {
        Method::Tree => {
            progress.step("tree", 0, 1);
            let rows: Vec<u32> = (0..binned.rows as u32).collect();
            let full = grow(&binned, &stats, width, &rows, &settings.grow, None);
            if options.pruning_path {
                path = Some(pruning_path(&full));
            }
            progress.step("tree", 1, 1);
            Ensemble::Tree(prune(full, settings.pruning))
        }
        Method::Bagging | Method::Forest => Ensemble::Forest(match options.forest_fitter {
            Some(fitter) => fitter(
                &binned,
                &stats,
                width,
                &design.outcome,
                &settings.forest,
                progress,
            )?,
            None => fit_forest(
                &binned,
                &stats,
                width,
                &design.outcome,
                &settings.forest,
                progress,
            ),
        }),
        Method::AdaBoost => {
            let Outcome::Classes { codes, labels } = &design.outcome else {
                return Err(bad(
                    "method",
                    format!(
                        "this AdaBoost (SAMME) predicts classes; the outcome '{}' is a number",
                        design.outcome_name
                    ),
                ));
            };
            // Initial AdaBoost row weights: the row weights times the class weights.
            let initial: Vec<f64> = (0..codes.len())
                .map(|r| stats[r * width + codes[r] as usize])
                .collect();
            Ensemble::AdaBoost(fit_adaboost(
                &binned,
                codes,
                labels.len(),
                Some(&initial),
                &settings.boost,
                progress,
            ))
        }
        Method::Boosting => {
            // Row weights times class weights (with class_weight=balanced).
            let weights: Option<Vec<f64>> = match (&design.outcome, settings.balanced_classes) {
                (Outcome::Classes { codes, .. }, true) => Some(
                    (0..codes.len())
                        .map(|r| stats[r * width + codes[r] as usize])
                        .collect(),
                ),
                _ => design.weights.clone(),
            };
            Ensemble::Boosting(fit_boosting(
                &binned,
                &design,
                weights.as_deref(),
                &boosting,
                progress,
            )?)
        }
    };
    let classes = match &design.outcome {
        Outcome::Classes { labels, .. } => Some(labels.clone()),
        Outcome::Numbers(_) => None,
    };
    let mut described = settings.describe();
    if let Ensemble::Boosting(b) = &ensemble {
        // The loss in effect (the default follows the outcome).
        described.insert("loss".into(), b.loss.word().into());
        if let crate::ensemble::loss::Loss::Huber { quantile } = b.loss {
            described.insert("huber_quantile".into(), quantile.to_string());
        }
    }
    let model = Model {
        method: settings.method,
        outcome: design.outcome_name.clone(),
        classes,
        predictors,
        partial: is_partial(&ensemble),
        ensemble,
        settings: described,
        seed: settings.seed(),
        training_fingerprint: fingerprint,
        training_rows: binned.rows,
    };
    Ok(Fitted {
        model,
        binned,
        design,
        pruning_path: path,
    })
}
