//! The fitting settings by their plain-word names (`depth`, `trees`, `learning_rate`, ...),
//! each checked against its allowed range once, with the same words wherever they are typed:
//! the command line's `--set NAME=VALUE`, the page's settings form (checked with
//! [`FitSettings::apply`] as it is typed) and the worker, for every method of [`Method`].
//! [`FitSettings::describe`] writes every setting in effect back as text, for the model file.

use std::collections::BTreeMap;

use crate::binning::BinSettings;
use crate::ensemble::adaboost::BoostSettings;
use crate::ensemble::boosting::BoostingSettings;
use crate::ensemble::forest::ForestSettings;
use crate::ensemble::loss::Loss;
use crate::model::Method;
use crate::tree::criterion::Criterion;
use crate::tree::grower::GrowSettings;

/// Settings only gradient boosting reads.
const BOOSTING_ONLY: [&str; 8] = [
    "loss",
    "huber_quantile",
    "l2",
    "patience",
    "validation_share",
    "min_hessian",
    "monotone",
    "predictor_fraction",
];
/// Settings gradient boosting does not read.
const NOT_FOR_BOOSTING: [&str; 4] = ["criterion", "trees", "sampling", "predictors_per_split"];

/// Every setting a fit can change, for all methods, with the method's defaults.
#[derive(Debug, Clone, PartialEq)]
pub struct FitSettings {
    /// The method these settings are for (some settings belong to one method only).
    pub method: Method,
    /// The outcome is a number (else classes).
    pub regression: bool,
    pub grow: GrowSettings,
    pub bins: BinSettings,
    pub forest: ForestSettings,
    /// AdaBoost's rounds and learning rate.
    pub boost: BoostSettings,
    /// Gradient boosting's own settings (its `grow` is filled in by [`FitSettings::build`],
    /// its `monotone` by the fit, from [`FitSettings::monotone`]).
    pub boosting: BoostingSettings,
    /// Monotone constraints by predictor name (+1 up, −1 down, 0 none), in the order given.
    pub monotone: Vec<(String, i8)>,
    /// Huber's quantile, applied once the loss is known.
    pub huber_quantile: Option<f64>,
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
        let mut boost = BoostSettings::default();
        let boosting = BoostingSettings::default();
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
                grow = boosting.grow;
                (boost.rounds, boost.learning_rate) = (boosting.rounds, boosting.learning_rate);
            }
        }
        Ok(FitSettings {
            method,
            regression,
            grow,
            bins: BinSettings::default(),
            forest,
            boost,
            boosting,
            monotone: Vec::new(),
            huber_quantile: None,
            balanced_classes: false,
            pruning: 0.0,
        })
    }

    /// Applies one setting `name = value`, checking it against its range and against the
    /// method. The message of an error starts with the setting's name.
    pub fn apply(&mut self, name: &str, value: &str) -> Result<(), String> {
        let value = value.trim();
        let regression = self.regression;
        let boosting = self.method == Method::Boosting;
        if boosting && NOT_FOR_BOOSTING.contains(&name) {
            return Err(format!(
                "{name}: not a setting of gradient boosting (its split criterion follows its \
                 loss; it fits one tree per round, or per class per round, on a share of the \
                 rows set by row_fraction and of the predictors set by predictor_fraction)"
            ));
        }
        if !boosting && BOOSTING_ONLY.contains(&name) {
            return Err(format!(
                "{name}: only for gradient boosting (method boosting)"
            ));
        }
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
        let non_negative = || -> Result<f64, String> {
            let f = number()?;
            if !(f >= 0.0 && f.is_finite()) {
                return Err(format!("{name}: {value} must be a number zero or more"));
            }
            Ok(f)
        };
        // A share in (0, 1] (`closed`) or (0, 1).
        let share = |closed: bool| -> Result<f64, String> {
            let f = number()?;
            let ok = f > 0.0 && (f < 1.0 || (closed && f == 1.0));
            if !ok {
                let range = if closed { "(0, 1]" } else { "(0, 1)" };
                return Err(format!("{name}: {f} is outside the allowed range {range}"));
            }
            Ok(f)
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
            "rounds" => {
                self.boost.rounds = whole(1, 100_000)?;
                self.boosting.rounds = self.boost.rounds;
            }
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
                self.boosting.learning_rate = f;
            }
            "predictors_per_split" => {
                self.forest.predictors_per_split = Some(whole(1, usize::MAX)?)
            }
            "seed" => {
                self.forest.seed = value
                    .parse()
                    .map_err(|_| format!("seed: '{value}' is not a whole number"))?;
                self.boosting.seed = self.forest.seed;
            }
            "row_fraction" => {
                let f = share(true)?;
                self.forest.row_fraction = f;
                self.boosting.row_fraction = f;
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
            "loss" => {
                self.boosting.loss = Some(match value {
                    "logistic" => Loss::Logistic,
                    "softmax" => Loss::Softmax,
                    "squared_error" => Loss::SquaredError,
                    "absolute_error" => Loss::AbsoluteError,
                    "huber" => Loss::Huber { quantile: 0.9 },
                    "poisson" => Loss::Poisson,
                    _ => {
                        return Err(format!(
                            "loss={value}: unknown loss; use logistic or softmax for classes, \
                             squared_error, absolute_error, huber or poisson for numbers"
                        ))
                    }
                })
            }
            "huber_quantile" => self.huber_quantile = Some(share(false)?),
            "l2" => self.boosting.l2 = non_negative()?,
            "min_hessian" => self.grow.min_weight_leaf = non_negative()?,
            "patience" => self.boosting.patience = Some(whole(1, 100_000)?),
            "validation_share" => self.boosting.validation_share = share(false)?,
            "predictor_fraction" => self.boosting.predictor_fraction = share(true)?,
            "monotone" => {
                // One or more COLUMN:way, separated by commas; a later one for the same
                // column replaces the earlier.
                for part in value.split(',').map(str::trim).filter(|p| !p.is_empty()) {
                    let (column, way) = part.rsplit_once(':').ok_or_else(|| {
                        format!("monotone={part}: write COLUMN:up or COLUMN:down")
                    })?;
                    let sign = match way {
                        "up" => 1,
                        "down" => -1,
                        "none" => 0,
                        _ => {
                            return Err(format!(
                                "monotone={part}: '{way}' is not a direction; write \
                                 {column}:up (never falls as {column} rises) or {column}:down"
                            ))
                        }
                    };
                    self.monotone.retain(|(c, _)| c != column);
                    self.monotone.push((column.to_string(), sign));
                }
            }
            other => {
                return Err(format!(
                    "{other}: unknown setting; see README.md for the settings of each method \
                     (depth, leaves, leaf_size, split_size, bins, split_search, criterion, \
                     min_gain, pruning, class_weight, trees, predictors_per_split, row_fraction, \
                     sampling, seed, rounds, learning_rate; for boosting also loss, \
                     huber_quantile, l2, min_hessian, patience, validation_share, \
                     predictor_fraction, monotone)"
                ))
            }
        }
        Ok(())
    }

    /// The defaults of `method` with every `(name, value)` applied in order, and the grow
    /// settings handed to the ensembles. Refuses pruning for anything but a single tree, and
    /// a Huber quantile without the Huber loss.
    pub fn build(
        method: Method,
        predictors: usize,
        regression: bool,
        outcome: &str,
        sets: &[(String, String)],
    ) -> Result<FitSettings, String> {
        let mut s = FitSettings::defaults(method, predictors, regression, outcome)?;
        for (name, value) in sets {
            s.apply(name, value)?;
        }
        if s.pruning > 0.0 && method != Method::Tree {
            return Err(
                "pruning: prunes a single tree (method tree); ensembles are not pruned".into(),
            );
        }
        if let Some(q) = s.huber_quantile {
            match &mut s.boosting.loss {
                Some(Loss::Huber { quantile }) => *quantile = q,
                _ => return Err("huber_quantile: only with loss=huber".into()),
            }
        }
        s.forest.grow = s.grow;
        s.boost.grow = s.grow;
        s.boosting.grow = s.grow;
        Ok(s)
    }

    /// The settings a model file records ([`FitSettings::describe`]'s words, as a fit
    /// wrote them) read back, so a saved model can be fitted again with the same settings
    /// (held-out importance refits them). The words only `describe` writes ("unlimited",
    /// "all", "none") return to the defaults' open values.
    pub fn from_described(
        method: Method,
        predictors: usize,
        regression: bool,
        outcome: &str,
        described: &BTreeMap<String, String>,
    ) -> Result<FitSettings, String> {
        let mut sets = Vec::new();
        let mut open = Vec::new();
        for (name, value) in described {
            match (name.as_str(), value.as_str()) {
                ("depth" | "leaves" | "predictors_per_split" | "patience", "unlimited")
                | ("predictors_per_split", "all")
                | ("patience", "none") => open.push(name.as_str()),
                ("criterion", "gradient") => {}
                _ => sets.push((name.clone(), value.clone())),
            }
        }
        let mut s = FitSettings::build(method, predictors, regression, outcome, &sets)?;
        for name in open {
            match name {
                "depth" => s.grow.max_depth = None,
                "leaves" => s.grow.max_leaves = None,
                "predictors_per_split" => s.forest.predictors_per_split = None,
                _ => s.boosting.patience = None,
            }
        }
        s.forest.grow = s.grow;
        s.boost.grow = s.grow;
        s.boosting.grow = s.grow;
        Ok(s)
    }

    /// Every setting in effect for the method, by its name, as text (what a model file
    /// records). The loss of gradient boosting is the one asked for; the fit adds the one in
    /// effect when it follows the outcome.
    pub fn describe(&self) -> BTreeMap<String, String> {
        let g = &self.grow;
        let or_unlimited = |v: Option<usize>| v.map_or("unlimited".to_string(), |v| v.to_string());
        let mut s = BTreeMap::new();
        let mut put = |name: &str, value: String| {
            s.insert(name.to_string(), value);
        };
        put("depth", or_unlimited(g.max_depth));
        put("leaves", or_unlimited(g.max_leaves));
        put("leaf_size", g.min_rows_leaf.to_string());
        put("split_size", g.min_rows_split.to_string());
        put("min_gain", g.min_gain.to_string());
        put("bins", self.bins.max_bins.to_string());
        put(
            "split_search",
            if self.bins.exact {
                "exact"
            } else {
                "histogram"
            }
            .into(),
        );
        if !self.regression {
            let weighting = if self.balanced_classes {
                "balanced"
            } else {
                "none"
            };
            put("class_weight", weighting.into());
        }
        if self.method != Method::Boosting {
            let criterion = match g.criterion {
                Criterion::Gini => "gini",
                Criterion::Entropy => "entropy",
                Criterion::SquaredError => "squared_error",
                Criterion::Gradient { .. } => "gradient",
            };
            put("criterion", criterion.into());
        }
        match self.method {
            Method::Tree => put("pruning", self.pruning.to_string()),
            Method::Bagging | Method::Forest => {
                let f = &self.forest;
                put("trees", f.trees.to_string());
                put(
                    "predictors_per_split",
                    f.predictors_per_split
                        .map_or("all".to_string(), |m| m.to_string()),
                );
                put("row_fraction", f.row_fraction.to_string());
                let sampling = if f.balanced {
                    "balanced"
                } else if f.replace {
                    "with_replacement"
                } else {
                    "without_replacement"
                };
                put("sampling", sampling.into());
                put("seed", f.seed.to_string());
            }
            Method::AdaBoost => {
                put("rounds", self.boost.rounds.to_string());
                put("learning_rate", self.boost.learning_rate.to_string());
            }
            Method::Boosting => {
                let b = &self.boosting;
                put("rounds", b.rounds.to_string());
                put("learning_rate", b.learning_rate.to_string());
                put("l2", b.l2.to_string());
                put("row_fraction", b.row_fraction.to_string());
                put("predictor_fraction", b.predictor_fraction.to_string());
                put(
                    "patience",
                    b.patience.map_or("none".to_string(), |p| p.to_string()),
                );
                put("validation_share", b.validation_share.to_string());
                put("min_hessian", g.min_weight_leaf.to_string());
                if !self.monotone.is_empty() {
                    let ways: Vec<String> = self
                        .monotone
                        .iter()
                        .map(|(name, sign)| {
                            let way = match sign {
                                1 => "up",
                                -1 => "down",
                                _ => "none",
                            };
                            format!("{name}:{way}")
                        })
                        .collect();
                    put("monotone", ways.join(","));
                }
                put("seed", b.seed.to_string());
            }
        }
        s
    }

    /// The seed of the method's random draws.
    pub fn seed(&self) -> u64 {
        match self.method {
            Method::Boosting => self.boosting.seed,
            _ => self.forest.seed,
        }
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

    #[test]
    fn settings_of_one_method_are_refused_for_another() {
        let err =
            FitSettings::build(Method::Forest, 3, false, "y", &sets(&[("l2", "1")])).unwrap_err();
        assert!(err.starts_with("l2: only for gradient boosting"), "{err}");
        let err = FitSettings::build(Method::Boosting, 3, false, "y", &sets(&[("trees", "9")]))
            .unwrap_err();
        assert!(
            err.starts_with("trees: not a setting of gradient boosting"),
            "{err}"
        );
        let err = FitSettings::build(
            Method::Boosting,
            3,
            true,
            "y",
            &sets(&[("huber_quantile", "0.5")]),
        )
        .unwrap_err();
        assert!(err.contains("only with loss=huber"), "{err}");
    }

    #[test]
    fn every_methods_described_settings_read_back_the_same() {
        for method in [
            Method::Tree,
            Method::Bagging,
            Method::Forest,
            Method::AdaBoost,
            Method::Boosting,
        ] {
            for regression in [false, true] {
                let Ok(s) = FitSettings::build(method, 6, regression, "y", &[]) else {
                    continue;
                };
                let d = s.describe();
                let back = FitSettings::from_described(method, 6, regression, "y", &d).unwrap();
                // Every setting in effect (fields of other methods may differ unseen).
                assert_eq!(back.describe(), d, "{method:?} {regression}");
                assert_eq!(
                    (back.grow, back.bins, back.method),
                    (s.grow, s.bins, s.method)
                );
            }
        }
    }

    #[test]
    fn boosting_settings_reach_boosting() {
        let s = FitSettings::build(
            Method::Boosting,
            4,
            true,
            "y",
            &sets(&[
                ("rounds", "40"),
                ("learning_rate", "0.05"),
                ("loss", "huber"),
                ("huber_quantile", "0.8"),
                ("monotone", "age:up, dose:down"),
                ("monotone", "age:none"),
                ("seed", "9"),
                ("leaves", "15"),
            ]),
        )
        .unwrap();
        assert_eq!(s.boosting.rounds, 40);
        assert_eq!(s.boosting.learning_rate, 0.05);
        assert_eq!(s.boosting.loss, Some(Loss::Huber { quantile: 0.8 }));
        assert_eq!(s.boosting.seed, 9);
        assert_eq!(s.boosting.grow.max_leaves, Some(15));
        assert_eq!(
            s.monotone,
            vec![("dose".to_string(), -1), ("age".to_string(), 0)]
        );
        let d = s.describe();
        // Read back from the words a model file keeps, the same settings.
        let back = FitSettings::from_described(Method::Boosting, 2, true, "y", &d).unwrap();
        assert_eq!(back.describe(), d);
        assert_eq!(d["rounds"], "40");
        assert_eq!(d["monotone"], "dose:down,age:none");
        assert!(!d.contains_key("trees"));
    }
}
