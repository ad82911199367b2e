//! One way to fit any method: [`fit_design`] bins a design, fits the method its
//! [`FitSettings`] name and hands back the [`Model`] with the binned rows it was fitted on.
//! The command line, the page's worker and validation (which fits once per fold) all come
//! through here, so a method is dispatched in one place.
//!
//! The core has no threads: a caller that has them (the command line) passes a
//! [`ForestFitter`] that spreads a forest's trees over them, and gets the same forest bit for
//! bit (each tree draws only from its own seeded streams).

use std::ops::Range;

use crate::binning::{bin_design, bin_design_presorted, BinnedMatrix, Presorted};
use crate::design::{Design, Outcome};
use crate::ensemble::adaboost::fit_adaboost;
use crate::ensemble::boosting::fit_boosting_with;
use crate::ensemble::forest::{
    fit_forest_judging, fit_trees, FittedTree, Forest, ForestSettings, HeldOut,
};
use crate::error::{Error, ErrorKind, Result};
use crate::model::{is_partial, predictors_of, Ensemble, Method, Model, Predictor};
use crate::progress::Progress;
use crate::settings::FitSettings;
use crate::tree::grower::grow;
use crate::tree::prune::{prune, pruning_path, PruneStep};
use crate::tree::Rows;

/// Fits a forest's trees: `(binned, row statistics, statistics per row, outcome, settings,
/// held-out rows, progress)`. [`fit_forest_judging`] fits them one after another; the
/// command line passes one that uses threads. With held-out rows (validation), a fitter
/// should tally its trees with [`crate::ensemble::forest::OobTally::add_judging`]; one that
/// ignores them keeps its trees, and the rows are judged from those afterwards.
pub type ForestFitter<'a> = &'a dyn Fn(
    &BinnedMatrix,
    &[f64],
    usize,
    &Outcome,
    &ForestSettings,
    Option<HeldOut<'_>>,
    &mut dyn Progress,
) -> Result<Forest>;

/// What else to keep from a fit.
#[derive(Default, Clone, Copy)]
pub struct FitOptions<'a> {
    /// Fits the trees of bagging and forests (default: one after another).
    pub forest_fitter: Option<ForestFitter<'a>>,
    /// Keep a single tree's cost-complexity pruning path (time quadratic in its nodes).
    pub pruning_path: bool,
    /// Runs independent jobs on the caller's threads (validation's bootstrap resamples of
    /// the metrics); default: one after another.
    pub spread: Option<crate::spread::Spread<'a>>,
    /// Rows held out of this fit (a validation split's test rows): bagging and forests judge
    /// them tree by tree and keep no trees ([`Forest::judged`]); other methods ignore them.
    pub held_out: Option<&'a Design>,
    /// The design fitted is some rows of a design sorted beforehand: bins read from that sort
    /// (validation sorts once for all its folds; the same bins as binning alone).
    pub presorted: Option<Presorted<'a>>,
    /// The model is judged and then dropped (a validation split's fit): gradient boosting
    /// leaves out its training loss by round, which only a kept model shows.
    pub judged_only: bool,
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

/// A design made ready for the learners.
struct Prepared {
    binned: BinnedMatrix,
    /// How a saved model reads each predictor from a new table.
    predictors: Vec<Predictor>,
    /// Per-row statistics for the grower, `width` per row.
    stats: Vec<f64>,
    width: usize,
}

/// Checks the outcome against the settings, bins the predictors and frees their values
/// (from here on the learners read the bins only), and computes the rows' statistics.
fn prepare(
    design: &mut Design,
    settings: &FitSettings,
    presorted: Option<Presorted<'_>>,
) -> Result<Prepared> {
    let regression = matches!(design.outcome, Outcome::Numbers(_));
    if regression != settings.regression {
        return Err(Error::new(ErrorKind::BadSetting {
            setting: "outcome".into(),
            reason: format!(
                "the settings were made for a {} outcome, but '{}' holds {}",
                if settings.regression {
                    "number"
                } else {
                    "class"
                },
                design.outcome_name,
                if regression { "numbers" } else { "classes" }
            ),
        }));
    }
    let binned = match presorted {
        Some(presorted) => bin_design_presorted(design, settings.bins, presorted)?,
        None => bin_design(design, settings.bins)?,
    };
    let predictors = predictors_of(design, &binned);
    design.predictors = Vec::new();
    let (stats, width) = design.row_statistics(settings.balanced_classes);
    Ok(Prepared {
        binned,
        predictors,
        stats,
        width,
    })
}

/// Fits trees `range` of a bagged ensemble or forest on `design`, as [`fit_design`] would fit
/// them (the same bins, statistics and seeded streams): one worker's share of a forest whose
/// trees are tallied elsewhere (see [`crate::ensemble::tree_bytes`]).
pub fn fit_forest_part(
    mut design: Design,
    settings: &FitSettings,
    range: Range<usize>,
    progress: &mut dyn Progress,
) -> Result<Vec<FittedTree>> {
    if !matches!(settings.method, Method::Bagging | Method::Forest) {
        return Err(Error::new(ErrorKind::BadSetting {
            setting: "method".into(),
            reason: format!(
                "only bagging and forests are fitted in parts, not {}",
                settings.method.word()
            ),
        }));
    }
    let p = prepare(&mut design, settings, None)?;
    Ok(fit_trees(
        &p.binned,
        &p.stats,
        p.width,
        &settings.forest,
        range,
        progress,
    ))
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
    let Prepared {
        binned,
        predictors,
        stats,
        width,
    } = prepare(&mut design, settings, options.presorted)?;
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
        Method::Bagging | Method::Forest => {
            // Held-out rows read by this fit's bins, walked by their bins where that is
            // exact, else by value (`binning::bin_records`).
            let wide = matches!(binned.cells, crate::binning::Cells::Wide(_));
            let records = options.held_out.map(|d| {
                let r = crate::validate::records_of(d, &binned.columns);
                let b = crate::binning::bin_records(&r, &binned.columns, wide);
                (r, b, d)
            });
            let held = records.as_ref().map(|(r, b, d)| HeldOut {
                rows: Rows::Records(r),
                outcome: &d.outcome,
                bins: Some(b),
            });
            let (outcome, forest) = (&design.outcome, &settings.forest);
            Ensemble::Forest(match options.forest_fitter {
                Some(fitter) => fitter(&binned, &stats, width, outcome, forest, held, progress)?,
                None => fit_forest_judging(&binned, &stats, width, outcome, forest, held, progress),
            })
        }
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
            Ensemble::Boosting(fit_boosting_with(
                &binned,
                &design,
                weights.as_deref(),
                &boosting,
                !options.judged_only,
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

/// For tests across the crate: the table read from CSV `text` and a forest of `trees` trees
/// fitted on it, outcome `y`, predictors `a`, `b` and `c`.
#[cfg(test)]
pub(crate) fn forest_from_csv(text: &str, trees: usize) -> (crate::data::Table, Fitted) {
    forest_from_csv_with(text, &[("trees".to_string(), trees.to_string())])
}

/// [`forest_from_csv`] with the forest's settings `sets` (`NAME`, `VALUE`).
#[cfg(test)]
pub(crate) fn forest_from_csv_with(
    text: &str,
    sets: &[(String, String)],
) -> (crate::data::Table, Fitted) {
    model_from_csv(text, Method::Forest, sets)
}

/// [`forest_from_csv_with`] for any method.
#[cfg(test)]
pub(crate) fn model_from_csv(
    text: &str,
    method: Method,
    sets: &[(String, String)],
) -> (crate::data::Table, Fitted) {
    use crate::data::{read_table, ReadOptions};
    use crate::design::{build_design, DesignSpec};
    let table = read_table(
        text.as_bytes(),
        &ReadOptions::default(),
        &mut crate::progress::Silent,
    )
    .unwrap()
    .table;
    let spec = DesignSpec {
        outcome: "y".into(),
        predictors: vec!["a".into(), "b".into(), "c".into()],
        ..DesignSpec::default()
    };
    let design = build_design(&table, &spec).unwrap();
    let regression = !matches!(design.outcome, crate::design::Outcome::Classes { .. });
    let settings = FitSettings::build(method, 3, regression, "y", sets).unwrap();
    let fitted = fit_design(
        design,
        &settings,
        None,
        FitOptions::default(),
        &mut crate::progress::Silent,
    )
    .unwrap();
    (table, fitted)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::design::design_from_csv;
    use crate::ensemble::tree_bytes::{decode_trees, encode_trees, tally_trees};
    use crate::progress::Silent;
    use crate::tree::Tree;

    fn table() -> String {
        let mut text = String::from("y,a,b,c\n");
        for i in 0..300u32 {
            let a = (i * 37 % 101) as f64 / 10.0;
            let b = ["red", "green", "blue", "grey"][(i * 7 % 4) as usize];
            let c = if i % 11 == 0 {
                String::new()
            } else {
                ((i * 13) % 17).to_string()
            };
            let y = if a + (i % 3) as f64 > 6.0 {
                "yes"
            } else {
                "no"
            };
            text += &format!("{y},{a},{b},{c}\n");
        }
        text
    }

    #[test]
    fn a_forest_fitted_in_parts_and_tallied_elsewhere_is_the_same_forest() {
        let text = table();
        let design = || design_from_csv(&text, "y", &["a", "b", "c"]);
        let sets = [("trees".to_string(), "23".to_string())];
        let settings = FitSettings::build(Method::Forest, 3, false, "y", &sets).unwrap();
        let whole = fit_design(
            design(),
            &settings,
            None,
            FitOptions::default(),
            &mut Silent,
        )
        .unwrap();
        // Three workers' shares, as bytes, joined in tree order.
        let mut bytes = Vec::new();
        for range in [0..8, 8..9, 9..23] {
            let part = fit_forest_part(design(), &settings, range, &mut Silent).unwrap();
            bytes.extend(encode_trees(&part));
        }
        let tally = |binned: &BinnedMatrix,
                     _: &[f64],
                     width: usize,
                     outcome: &Outcome,
                     forest: &ForestSettings,
                     held: Option<HeldOut<'_>>,
                     _: &mut dyn Progress| {
            tally_trees(&bytes, binned, width, outcome, forest, held)
        };
        let options = FitOptions {
            forest_fitter: Some(&tally),
            ..FitOptions::default()
        };
        let parts = fit_design(design(), &settings, None, options, &mut Silent).unwrap();
        let (Ensemble::Forest(a), Ensemble::Forest(b)) =
            (&whole.model.ensemble, &parts.model.ensemble)
        else {
            panic!("not forests")
        };
        assert_eq!(a.trees, b.trees);
        assert_eq!(a.oob_error, b.oob_error);
        assert_eq!(a.oob_share, b.oob_share);
        // Damaged bytes are refused, not read.
        assert!(decode_trees(&bytes[..bytes.len() - 3], 300, 3).is_err());
        assert!(decode_trees(&bytes, 299, 3).is_err());
        let beyond_first = |t: &Tree| t.nodes.iter().any(|n| !n.is_leaf() && n.feature > 0);
        assert!(a.trees.iter().any(beyond_first));
        assert!(decode_trees(&bytes, 300, 1).is_err());
    }
}
