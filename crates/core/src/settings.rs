//! The fitting settings by their plain-word names (`depth`, `trees`, `learning_rate`, ...),
//! each checked against its allowed range once, with the same words wherever they are typed:
//! the page's settings form checks every value with [`FitSettings::apply`] as it is typed, and
//! the worker applies them before fitting, for the methods of [`Method`] but gradient
//! boosting. (The command line's `--set` parser in crates/cli/src/fit.rs carries the same
//! names and ranges, and boosting's; it is to move onto this module, boosting's settings with
//! it, so the ranges live in one place.)

use crate::binning::BinSettings;
use crate::ensemble::adaboost::BoostSettings;
use crate::ensemble::forest::ForestSettings;
use crate::model::Method;
use crate::tree::criterion::Criterion;
use crate::tree::grower::GrowSettings;

/// Every setting a fit can change, for all methods, with the method's defaults.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FitSettings {
    pub grow: GrowSettings,
    pub bins: BinSettings,
    pub forest: ForestSettings,
    pub boost: BoostSettings,
    /// Weigh classes by n / (K · rows of the class).
    pub balanced_classes: bool,
    /// Cost-complexity pruning of a single tree (α per leaf, share of the rows' weight).
    pub pruning: f64,
}

impl FitSettings {
    /// The defaults of `method` for `predictors` predictors and a number (`regression`) or
    /// class outcome. Refuses AdaBoost for a number outcome.
    pub fn defaults(
        method: Method,
        predictors: usize,
        regression: bool,
        outcome: &str,
    ) -> Result<FitSettings, String> {
        let mut grow = GrowSettings {
            criterion: if regression {
                Criterion::SquaredError
            } else {
                Criterion::Gini
            },
            ..GrowSettings::default()
        };
        let mut forest = ForestSettings::random_forest(predictors, regression, 1);
        match method {
            Method::Tree | Method::Forest => {}
            Method::Bagging => forest.predictors_per_split = None,
            Method::AdaBoost if regression => {
                return Err(format!(
                    "this AdaBoost (SAMME) predicts classes; the outcome '{outcome}' is a number"
                ))
            }
            Method::AdaBoost => grow.max_depth = Some(1),
            Method::Boosting => {
                return Err("gradient boosting: its settings are not here yet; fit it with                             `spinney fit --method boosting`"
                    .into())
            }
        }
        Ok(FitSettings {
            grow,
            bins: BinSettings::default(),
            forest,
            boost: BoostSettings::default(),
            balanced_classes: false,
            pruning: 0.0,
        })
    }

    /// Applies one setting `name = value`, checking it against its range. The message of an
    /// error starts with the setting's name.
    pub fn apply(&mut self, name: &str, value: &str, regression: bool) -> Result<(), String> {
        let value = value.trim();
        let whole = |lo: usize, hi: usize| -> Result<usize, String> {
            let v: usize = value
                .parse()
                .map_err(|_| format!("{name}: '{value}' is not a whole number"))?;
            if v < lo || v > hi {
                return Err(format!(
                    "{name}: {v} is outside the allowed range {lo} to {hi}"
                ));
            }
            Ok(v)
        };
        let number = || -> Result<f64, String> {
            value
                .parse::<f64>()
                .map_err(|_| format!("{name}: '{value}' is not a number"))
        };
        match name {
            "depth" => self.grow.max_depth = Some(whole(1, 1000)?),
            "leaf_size" => self.grow.min_rows_leaf = whole(1, usize::MAX)?,
            "split_size" => self.grow.min_rows_split = whole(2, usize::MAX)?,
            "bins" => self.bins.max_bins = whole(2, 255)?,
            "split_search" => {
                self.bins.exact = match value {
                    "exact" => true,
                    "histogram" => false,
                    _ => {
                        return Err(format!(
                            "split_search={value}: use histogram (the default) or exact"
                        ))
                    }
                }
            }
            "pruning" => {
                let f = number()?;
                if !(f >= 0.0 && f.is_finite()) {
                    return Err(format!(
                        "pruning: {value} must be zero (no pruning) or more"
                    ));
                }
                self.pruning = f;
            }
            "leaves" => self.grow.max_leaves = Some(whole(2, 1 << 20)?),
            "criterion" => {
                self.grow.criterion = match (value, regression) {
                    ("gini", false) => Criterion::Gini,
                    ("entropy", false) => Criterion::Entropy,
                    ("squared_error", true) => Criterion::SquaredError,
                    _ => return Err(format!(
                        "criterion={value}: use gini or entropy for classes, squared_error for numbers"
                    )),
                }
            }
            "min_gain" => {
                let f = number()?;
                if f.is_nan() || f < 0.0 {
                    return Err("min_gain: must be zero or more".into());
                }
                self.grow.min_gain = f;
            }
            "trees" => self.forest.trees = whole(1, 100_000)?,
            "rounds" => self.boost.rounds = whole(1, 100_000)?,
            "class_weight" => {
                if regression {
                    return Err("class_weight: only for class outcomes".into());
                }
                self.balanced_classes = match value {
                    "balanced" => true,
                    "none" => false,
                    _ => return Err(format!("class_weight={value}: use balanced or none")),
                };
            }
            "learning_rate" => {
                let f = number()?;
                if !(f > 0.0 && f <= 10.0) {
                    return Err(format!(
                        "learning_rate: {f} is outside the allowed range (0, 10]"
                    ));
                }
                self.boost.learning_rate = f;
            }
            "predictors_per_split" => {
                self.forest.predictors_per_split = Some(whole(1, usize::MAX)?)
            }
            "seed" => {
                self.forest.seed = value
                    .parse()
                    .map_err(|_| format!("seed: '{value}' is not a whole number"))?
            }
            "row_fraction" => {
                let f = number()?;
                if !(f > 0.0 && f <= 1.0) {
                    return Err(format!(
                        "row_fraction: {f} is outside the allowed range (0, 1]"
                    ));
                }
                self.forest.row_fraction = f;
            }
            "sampling" => {
                self.forest.replace = match value {
                    "with_replacement" => true,
                    "without_replacement" => false,
                    "balanced" if !regression => {
                        self.forest.balanced = true;
                        true
                    }
                    _ => return Err(format!(
                        "sampling={value}: use with_replacement, without_replacement or balanced (classes only)"
                    )),
                }
            }
            other => {
                return Err(format!(
                    "{other}: unknown setting; see README.md for the settings of each method \
                     (depth, leaves, leaf_size, split_size, bins, split_search, criterion, min_gain, pruning, class_weight, trees, \
                     predictors_per_split, row_fraction, sampling, seed, rounds, learning_rate)"
                ))
            }
        }
        Ok(())
    }

    /// The defaults of `method` with every `(name, value)` applied in order, and the grow
    /// settings handed to the ensembles. Refuses pruning for anything but a single tree.
    pub fn build(
        method: Method,
        predictors: usize,
        regression: bool,
        outcome: &str,
        sets: &[(String, String)],
    ) -> Result<FitSettings, String> {
        let mut s = FitSettings::defaults(method, predictors, regression, outcome)?;
        for (name, value) in sets {
            s.apply(name, value, regression)?;
        }
        if s.pruning > 0.0 && method != Method::Tree {
            return Err(
                "pruning: prunes a single tree (method tree); ensembles are not pruned".into(),
            );
        }
        s.forest.grow = s.grow;
        s.boost.grow = s.grow;
        Ok(s)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sets(pairs: &[(&str, &str)]) -> Vec<(String, String)> {
        pairs
            .iter()
            .map(|(a, b)| (a.to_string(), b.to_string()))
            .collect()
    }

    #[test]
    fn defaults_follow_the_method() {
        let forest = FitSettings::build(Method::Forest, 9, false, "y", &[]).unwrap();
        assert_eq!(forest.forest.trees, 500);
        assert_eq!(forest.forest.predictors_per_split, Some(3));
        let bagging = FitSettings::build(Method::Bagging, 9, false, "y", &[]).unwrap();
        assert_eq!(bagging.forest.predictors_per_split, None);
        let ada = FitSettings::build(Method::AdaBoost, 9, false, "y", &[]).unwrap();
        assert_eq!(ada.boost.grow.max_depth, Some(1));
        assert_eq!(ada.boost.rounds, 50);
    }

    #[test]
    fn values_are_applied_and_handed_to_the_ensembles() {
        let s = FitSettings::build(
            Method::Forest,
            9,
            false,
            "y",
            &sets(&[("trees", "50"), ("depth", "4"), ("seed", "7")]),
        )
        .unwrap();
        assert_eq!(s.forest.trees, 50);
        assert_eq!(s.forest.grow.max_depth, Some(4));
        assert_eq!(s.forest.seed, 7);
    }

    #[test]
    fn out_of_range_values_are_refused_with_the_setting_named() {
        for (name, value, says) in [
            (
                "depth",
                "0",
                "depth: 0 is outside the allowed range 1 to 1000",
            ),
            ("trees", "many", "trees: 'many' is not a whole number"),
            (
                "learning_rate",
                "0",
                "learning_rate: 0 is outside the allowed range (0, 10]",
            ),
            ("wobble", "1", "wobble: unknown setting"),
        ] {
            let err = FitSettings::build(Method::Forest, 3, false, "y", &sets(&[(name, value)]))
                .unwrap_err();
            assert!(err.starts_with(says), "{err}");
        }
        let err = FitSettings::build(Method::AdaBoost, 3, true, "weight_kg", &[]).unwrap_err();
        assert!(err.contains("'weight_kg' is a number"), "{err}");
        let err = FitSettings::build(Method::Forest, 3, false, "y", &sets(&[("pruning", "0.1")]))
            .unwrap_err();
        assert!(err.contains("single tree"), "{err}");
    }
}
