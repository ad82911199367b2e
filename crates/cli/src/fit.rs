//! `spinney fit FILE --outcome COL`: fits a single tree, bagging, a random forest, AdaBoost
//! or gradient boosting on all rows and reports it (training fit, out-of-bag error, error by
//! ensemble size, boosting's loss curves and stopping round, and optionally the fit on
//! another file). `--json` prints a tree node by node (predictor,
//! threshold, where missing values go, children, values), which the checks in
//! tests/reference compare with scikit-learn.

use std::collections::BTreeMap;

use anyhow::{bail, Context};
use spinney_core::binning::{bin_design, BinSettings, BinnedMatrix};
use spinney_core::data::{read_table, Loaded, ReadOptions};
use spinney_core::design::{build_design, DesignSpec, Outcome};
use spinney_core::ensemble::adaboost::{fit_adaboost, BoostSettings, Stop};
use spinney_core::ensemble::boosting::{fit_boosting, Boosting, BoostingSettings, Stopping};
use spinney_core::ensemble::forest::{fit_forest, Forest, ForestSettings};
use spinney_core::ensemble::loss::Loss;
use spinney_core::model::{is_partial, predictors_of, Ensemble, Method, Model};
use spinney_core::progress::Silent;
use spinney_core::tree::criterion::Criterion;
use spinney_core::tree::grower::{grow, GrowSettings};
use spinney_core::tree::{Rows, Tree};

/// The arguments of `spinney fit` (settings and their defaults are listed in README.md).
#[derive(clap::Args)]
pub struct FitArgs {
    /// The file to read.
    pub file: std::path::PathBuf,
    /// The column to predict.
    #[arg(long)]
    pub outcome: String,
    /// Predictors, comma-separated (default: every other column but text and identifiers).
    #[arg(long, value_delimiter = ',')]
    pub predictors: Option<Vec<String>>,
    /// The kind of model: tree, bagging, forest, adaboost or boosting.
    #[arg(long, default_value = "tree")]
    pub method: String,
    /// A setting NAME=VALUE (repeatable); see README.md for each method's settings.
    #[arg(long = "set", value_name = "NAME=VALUE")]
    pub sets: Vec<String>,
    /// Print the result as JSON (a tree node by node; error curves by ensemble size).
    #[arg(long)]
    pub json: bool,
    /// Also score the fitted model on another file with the same columns.
    #[arg(long, value_name = "FILE")]
    pub score: Option<std::path::PathBuf>,
    /// A column of row weights (numbers, zero or more).
    #[arg(long, value_name = "COLUMN")]
    pub weight: Option<String>,
    /// Threads for forest and bagging trees (default: every core). The model is the same
    /// whatever the number.
    #[arg(long)]
    pub threads: Option<usize>,
    /// With --json: each row's prediction (class probabilities, AdaBoost's by the SAMME
    /// rule, or the number) for the scored file, or for the training rows without --score.
    #[arg(long)]
    pub predictions: bool,
    /// With --json and --method boosting: the same predictions after every round.
    #[arg(long)]
    pub staged: bool,
    /// Save the fitted model to this file (versioned JSON, read by `spinney predict`).
    #[arg(long, value_name = "PATH")]
    pub save_model: Option<std::path::PathBuf>,
}

/// Every setting `--set` can change, for all methods.
struct Settings {
    grow: GrowSettings,
    bins: BinSettings,
    forest: ForestSettings,
    boost: BoostSettings,
    boosting: BoostingSettings,
    /// Monotone constraints by predictor name (+1 up, −1 down), resolved after the design.
    monotone: Vec<(String, i8)>,
    /// Huber's quantile, applied once the loss is known.
    huber_quantile: Option<f64>,
    /// Weigh classes by n / (K · rows of the class).
    balanced_classes: bool,
    /// Cost-complexity pruning of a single tree (α per leaf, share of the rows' weight).
    pruning: f64,
}

/// Settings only gradient boosting reads, and the ones it does not read.
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
const NOT_FOR_BOOSTING: [&str; 4] = ["criterion", "trees", "sampling", "predictors_per_split"];

/// Applies the `--set NAME=VALUE` settings to `all`, checking each against its range.
fn parse_sets(
    sets: &[String],
    all: &mut Settings,
    regression: bool,
    method: &str,
) -> anyhow::Result<()> {
    let Settings {
        grow: settings,
        bins,
        forest,
        boost,
        boosting,
        monotone,
        huber_quantile,
        balanced_classes,
        pruning,
    } = all;
    for s in sets {
        let (name, value) = s
            .split_once('=')
            .with_context(|| format!("--set {s:?}: write NAME=VALUE"))?;
        if method == "boosting" && NOT_FOR_BOOSTING.contains(&name) {
            bail!(
                "--set {name}: not a setting of gradient boosting (its split criterion follows \
                 its loss; it fits one tree per round, or per class per round, on a share of the \
                 rows set by row_fraction and of the predictors set by predictor_fraction)"
            );
        }
        if method != "boosting" && BOOSTING_ONLY.contains(&name) {
            bail!("--set {name}: only for --method boosting");
        }
        let share = |lo_open: bool| -> anyhow::Result<f64> {
            let f: f64 = value
                .parse()
                .with_context(|| format!("--set {name}: '{value}' is not a number"))?;
            let ok = if lo_open {
                f > 0.0 && f <= 1.0
            } else {
                f > 0.0 && f < 1.0
            };
            if !ok {
                bail!(
                    "--set {name}: {f} is outside the allowed range {}",
                    if lo_open { "(0, 1]" } else { "(0, 1)" }
                );
            }
            Ok(f)
        };
        let non_negative = || -> anyhow::Result<f64> {
            let f: f64 = value
                .parse()
                .with_context(|| format!("--set {name}: '{value}' is not a number"))?;
            if !(f >= 0.0 && f.is_finite()) {
                bail!("--set {name}: must be a number zero or more");
            }
            Ok(f)
        };
        let whole = |lo: usize, hi: usize| -> anyhow::Result<usize> {
            let v: usize = value
                .parse()
                .with_context(|| format!("--set {name}: '{value}' is not a whole number"))?;
            if v < lo || v > hi {
                bail!("--set {name}: {v} is outside the allowed range {lo} to {hi}");
            }
            Ok(v)
        };
        match name {
            "depth" => settings.max_depth = Some(whole(1, 1000)?),
            "leaf_size" => settings.min_rows_leaf = whole(1, usize::MAX)?,
            "split_size" => settings.min_rows_split = whole(2, usize::MAX)?,
            "bins" => bins.max_bins = whole(2, 255)?,
            "split_search" => {
                bins.exact = match value {
                    "exact" => true,
                    "histogram" => false,
                    _ => bail!("--set split_search={value}: use histogram (the default) or exact"),
                }
            }
            "pruning" => {
                let f: f64 = value.parse().with_context(|| format!("--set pruning: '{value}' is not a number"))?;
                if !(f >= 0.0 && f.is_finite()) {
                    bail!("--set pruning: {value} must be zero (no pruning) or more");
                }
                *pruning = f;
            }
            "leaves" => settings.max_leaves = Some(whole(2, 1 << 20)?),
            "criterion" => {
                settings.criterion = match (value, regression) {
                    ("gini", false) => Criterion::Gini,
                    ("entropy", false) => Criterion::Entropy,
                    ("squared_error", true) => Criterion::SquaredError,
                    _ => bail!(
                        "--set criterion={value}: use gini or entropy for classes, squared_error for numbers"
                    ),
                }
            }
            "min_gain" => {
                settings.min_gain = value.parse().with_context(|| format!("--set min_gain: '{value}' is not a number"))?;
                if settings.min_gain.is_nan() || settings.min_gain < 0.0 {
                    bail!("--set min_gain: must be zero or more");
                }
            }
            "trees" => forest.trees = whole(1, 100_000)?,
            "rounds" => boost.rounds = whole(1, 100_000)?,
            "class_weight" => {
                if regression {
                    bail!("--set class_weight: only for class outcomes");
                }
                *balanced_classes = match value {
                    "balanced" => true,
                    "none" => false,
                    _ => bail!("--set class_weight={value}: use balanced or none"),
                };
            }
            "learning_rate" => {
                let f: f64 = value.parse().with_context(|| format!("--set learning_rate: '{value}' is not a number"))?;
                if !(f > 0.0 && f <= 10.0) {
                    bail!("--set learning_rate: {f} is outside the allowed range (0, 10]");
                }
                boost.learning_rate = f;
            }
            "predictors_per_split" => forest.predictors_per_split = Some(whole(1, usize::MAX)?),
            "seed" => forest.seed = value.parse().with_context(|| format!("--set seed: '{value}' is not a whole number"))?,
            "row_fraction" => {
                let f: f64 = value.parse().with_context(|| format!("--set row_fraction: '{value}' is not a number"))?;
                if !(f > 0.0 && f <= 1.0) {
                    bail!("--set row_fraction: {f} is outside the allowed range (0, 1]");
                }
                forest.row_fraction = f;
                boosting.row_fraction = f;
            }
            "loss" => {
                boosting.loss = Some(match value {
                    "logistic" => Loss::Logistic,
                    "softmax" => Loss::Softmax,
                    "squared_error" => Loss::SquaredError,
                    "absolute_error" => Loss::AbsoluteError,
                    "huber" => Loss::Huber { quantile: 0.9 },
                    "poisson" => Loss::Poisson,
                    _ => bail!(
                        "--set loss={value}: unknown loss; use logistic or softmax for classes, \
                         squared_error, absolute_error, huber or poisson for numbers"
                    ),
                })
            }
            "huber_quantile" => *huber_quantile = Some(share(false)?),
            "l2" => boosting.l2 = non_negative()?,
            "min_hessian" => settings.min_weight_leaf = non_negative()?,
            "patience" => boosting.patience = Some(whole(1, 100_000)?),
            "validation_share" => boosting.validation_share = share(false)?,
            "predictor_fraction" => boosting.predictor_fraction = share(true)?,
            "monotone" => {
                let (column, way) = value.rsplit_once(':').with_context(|| {
                    format!("--set monotone={value}: write COLUMN:up or COLUMN:down")
                })?;
                let sign = match way {
                    "up" => 1,
                    "down" => -1,
                    "none" => 0,
                    _ => bail!(
                        "--set monotone={value}: '{way}' is not a direction; write \
                         {column}:up (never falls as {column} rises) or {column}:down"
                    ),
                };
                monotone.push((column.to_string(), sign));
            }
            "sampling" => {
                forest.replace = match value {
                    "with_replacement" => true,
                    "without_replacement" => false,
                    "balanced" if !regression => {
                        forest.balanced = true;
                        true
                    }
                    _ => bail!(
                        "--set sampling={value}: use with_replacement, without_replacement or balanced (classes only)"
                    ),
                }
            }
            other => bail!(
                "--set {other}: unknown setting; see README.md for the settings of each method \
                 (depth, leaves, leaf_size, split_size, bins, split_search, criterion, min_gain, \
                 pruning, class_weight, trees, predictors_per_split, row_fraction, sampling, seed, \
                 rounds, learning_rate; for boosting also loss, huber_quantile, l2, min_hessian, \
                 patience, validation_share, predictor_fraction, monotone)"
            ),
        }
    }
    if let Some(q) = *huber_quantile {
        match &mut boosting.loss {
            Some(Loss::Huber { quantile }) => *quantile = q,
            _ => bail!("--set huber_quantile: only with --set loss=huber"),
        }
    }
    Ok(())
}

/// A one-line progress bar on stderr, drawn only when stderr is a terminal.
struct Bar {
    tty: bool,
    start: std::time::Instant,
}

impl Bar {
    fn new() -> Self {
        use std::io::IsTerminal;
        Bar {
            tty: std::io::stderr().is_terminal(),
            start: std::time::Instant::now(),
        }
    }
}

impl spinney_core::progress::Progress for Bar {
    fn step(&mut self, stage: &str, done: u64, total: u64) -> spinney_core::progress::Flow {
        if self.tty {
            let share = done as f64 / total.max(1) as f64;
            let filled = (share * 30.0) as usize;
            let elapsed = self.start.elapsed().as_secs_f64();
            let left = if done > 0 {
                elapsed / done as f64 * (total - done) as f64
            } else {
                0.0
            };
            eprint!(
                "\r{stage} [{}{}] {done}/{total}  {elapsed:.0} s, about {left:.0} s left ",
                "#".repeat(filled),
                ".".repeat(30 - filled)
            );
            if done == total {
                eprintln!();
            }
        }
        spinney_core::progress::Flow::Continue
    }
}

/// Reads a table, with the kinds in `kinds` chosen for those columns.
pub fn read(
    path: &std::path::Path,
    kinds: Vec<(String, spinney_core::data::Kind)>,
) -> anyhow::Result<Loaded> {
    let bytes = std::fs::read(path).with_context(|| format!("cannot read {}", path.display()))?;
    let options = ReadOptions {
        file_name: path.file_name().map(|n| n.to_string_lossy().into_owned()),
        kinds,
        ..ReadOptions::default()
    };
    read_table(&bytes, &options, &mut Silent)
        .map_err(|e| anyhow::anyhow!("{}: {e}", path.display()))
}

fn tree_json(tree: &Tree, binned: &BinnedMatrix) -> serde_json::Value {
    let nodes: Vec<serde_json::Value> = tree
        .nodes
        .iter()
        .map(|n| {
            let values = &tree.values[n.value as usize..n.value as usize + tree.outputs];
            if n.is_leaf() {
                return serde_json::json!({ "leaf": true, "weight": n.weight, "values": values });
            }
            let col = &binned.columns[n.feature as usize];
            let left_bins: Vec<u8> = if n.numeric {
                (0..=n.threshold_bin.min(254) as u8).collect()
            } else {
                (0..=254u8).filter(|&b| n.categories.contains(b)).collect()
            };
            let threshold = n.numeric.then_some(n.threshold);
            serde_json::json!({
                "leaf": false, "predictor": col.name, "feature": n.feature, "threshold": threshold,
                "left_bins": left_bins, "missing_left": n.missing_left,
                "left": n.left, "right": n.right, "weight": n.weight, "gain": n.gain, "values": values,
            })
        })
        .collect();
    serde_json::json!(nodes)
}

pub fn fit(args: FitArgs) -> anyhow::Result<()> {
    let Loaded {
        table, fingerprint, ..
    } = read(&args.file, Vec::new())?;
    // By default every other column, except free text and identifiers.
    let predictors = args.predictors.clone().unwrap_or_else(|| {
        table
            .columns
            .iter()
            .filter(|c| c.name != args.outcome && c.kind != spinney_core::data::Kind::Text)
            .map(|c| c.name.clone())
            .collect()
    });
    let spec = DesignSpec {
        outcome: args.outcome.clone(),
        predictors: predictors
            .into_iter()
            .filter(|p| Some(p) != args.weight.as_ref())
            .collect(),
        weight: args.weight.clone(),
        ..DesignSpec::default()
    };
    let mut design = build_design(&table, &spec)?;
    // The design holds its own copy of the predictors; the table is no longer needed.
    drop(table);
    let regression = matches!(design.outcome, Outcome::Numbers(_));
    // Defaults first (the method's own), then the user's --set choices on top.
    let mut grow_settings = GrowSettings {
        criterion: if regression {
            Criterion::SquaredError
        } else {
            Criterion::Gini
        },
        ..GrowSettings::default()
    };
    let mut forest = ForestSettings::random_forest(design.predictors.len(), regression, 1);
    let method = match args.method.as_str() {
        "tree" => Method::Tree,
        "forest" => Method::Forest,
        "bagging" => {
            forest.predictors_per_split = None;
            Method::Bagging
        }
        "adaboost" if regression => bail!(
            "--method adaboost: this AdaBoost (SAMME) predicts classes; the outcome '{}' is a number",
            args.outcome
        ),
        "adaboost" => {
            grow_settings.max_depth = Some(1);
            Method::AdaBoost
        }
        "boosting" => {
            grow_settings = BoostingSettings::default().grow;
            Method::Boosting
        }
        other => bail!("--method {other}: choose tree, bagging, forest, adaboost or boosting"),
    };
    let mut boost = BoostSettings::default();
    if args.method == "boosting" {
        let defaults = BoostingSettings::default();
        (boost.rounds, boost.learning_rate) = (defaults.rounds, defaults.learning_rate);
    }
    let mut all = Settings {
        grow: grow_settings,
        bins: BinSettings::default(),
        forest,
        boost,
        boosting: BoostingSettings::default(),
        monotone: Vec::new(),
        huber_quantile: None,
        balanced_classes: false,
        pruning: 0.0,
    };
    parse_sets(&args.sets, &mut all, regression, &args.method)?;
    all.forest.grow = all.grow;
    all.boost.grow = all.grow;
    all.boosting.grow = all.grow;
    all.boosting.rounds = all.boost.rounds;
    all.boosting.learning_rate = all.boost.learning_rate;
    all.boosting.seed = all.forest.seed;
    if !all.monotone.is_empty() {
        all.boosting.monotone = vec![0; design.predictors.len()];
        for (name, sign) in &all.monotone {
            let Some(j) = design.predictors.iter().position(|p| &p.name == name) else {
                bail!(
                    "--set monotone={name}:...: '{name}' is not among the predictors ({}); \
                     check the spelling or add it with --predictors",
                    design
                        .predictors
                        .iter()
                        .map(|p| p.name.as_str())
                        .collect::<Vec<_>>()
                        .join(", ")
                );
            };
            all.boosting.monotone[j] = *sign;
        }
    }
    // Fit time counts binning and fitting, not reading the file.
    let fit_start = std::time::Instant::now();
    let binned = bin_design(&design, all.bins)?;
    // How a saved model reads each predictor from a new table.
    let predictors = predictors_of(&design, &binned);
    // From here on the learners read the bins only: free the predictors' values.
    design.predictors = Vec::new();
    let (stats, width) = design.row_statistics(all.balanced_classes);
    if all.pruning > 0.0 && method != Method::Tree {
        bail!("--set pruning: prunes a single tree (--method tree); ensembles are not pruned");
    }
    let mut pruning_path = None;
    let ensemble = if method == Method::Boosting {
        // Row weights times class weights (with class_weight=balanced).
        let weights: Option<Vec<f64>> = match (&design.outcome, all.balanced_classes) {
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
            &all.boosting,
            &mut Bar::new(),
        )?)
    } else if method == Method::Tree {
        let rows: Vec<u32> = (0..binned.rows as u32).collect();
        let full = grow(&binned, &stats, width, &rows, &all.grow, None);
        // The path costs time quadratic in the nodes (weakest links one by one): only for
        // the JSON output, its one reader.
        if args.json {
            pruning_path = Some(spinney_core::tree::prune::pruning_path(&full));
        }
        Ensemble::Tree(spinney_core::tree::prune::prune(full, all.pruning))
    } else if method == Method::AdaBoost {
        let Outcome::Classes { codes, labels } = &design.outcome else {
            unreachable!("checked above")
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
            &all.boost,
            &mut Bar::new(),
        ))
    } else {
        Ensemble::Forest(fit_forest_on_threads(
            &binned,
            &stats,
            width,
            &design.outcome,
            &all.forest,
            args.threads,
        )?)
    };
    let fit_seconds = fit_start.elapsed().as_secs_f64();
    let classes = match &design.outcome {
        Outcome::Classes { labels, .. } => Some(labels.clone()),
        Outcome::Numbers(_) => None,
    };
    let mut settings = describe_settings(&all, method, regression);
    if let Ensemble::Boosting(b) = &ensemble {
        // The loss in effect (the default follows the outcome).
        settings.insert("loss".into(), b.loss.word().into());
        if let Loss::Huber { quantile } = b.loss {
            settings.insert("huber_quantile".into(), quantile.to_string());
        }
    }
    let model = Model {
        method,
        outcome: design.outcome_name.clone(),
        classes: classes.clone(),
        predictors,
        partial: is_partial(&ensemble),
        ensemble,
        settings,
        seed: all.forest.seed,
        training_fingerprint: Some(fingerprint),
        training_rows: binned.rows,
    };
    if let Some(path) = &args.save_model {
        let text = spinney_core::model_file::write_model(&model)?;
        std::fs::write(path, text)
            .with_context(|| format!("cannot write the model to {}", path.display()))?;
    }
    let training = model.performance(Rows::Binned(&binned), &design.outcome);
    let scored = match &args.score {
        None => None,
        Some(path) => {
            // Predictors are read as the model read them in training.
            let other = read(path, model.reading_kinds())?.table;
            let test_design = build_design(
                &other,
                &DesignSpec {
                    outcome: args.outcome.clone(),
                    predictors: binned.columns.iter().map(|c| c.name.clone()).collect(),
                    ..DesignSpec::default()
                },
            )?;
            let (records, unseen) = model
                .records(&other)
                .map_err(|e| anyhow::anyhow!("{}: {e}", path.display()))?;
            crate::predict::report_unseen(&unseen);
            // Keep only the rows with an outcome, as the design did.
            let kept = records.select_rows(&test_design.rows);
            let outcome = align_classes(&test_design.outcome, &design.outcome)?;
            Some((
                model.performance(Rows::Records(&kept), &outcome),
                model.staged_errors(Rows::Records(&kept), &outcome),
                kept,
            ))
        }
    };
    if args.staged && method != Method::Boosting {
        bail!("--staged: only for --method boosting (predictions after every round)");
    }
    if args.json {
        let mut out = serde_json::json!({
            "format": "spinney-fit", "version": 1, "method": args.method, "fit_seconds": fit_seconds,
            "outcome": design.outcome_name, "classes": classes, "rows": binned.rows,
            "predictors": binned.columns.iter().map(|c| c.name.clone()).collect::<Vec<_>>(),
            "training": { training.0: training.1 },
            "notices": design.notices,
        });
        out["training_error_by_size"] =
            serde_json::json!(model.staged_errors(Rows::Binned(&binned), &design.outcome));
        if let Some(((name, value), curve, _)) = &scored {
            out["scored"] = serde_json::json!({ *name: value });
            out["scored_error_by_size"] = serde_json::json!(curve);
        }
        // Predictions of the scored rows, or of the training rows without --score.
        let predicted = scored
            .as_ref()
            .map_or(Rows::Binned(&binned), |s| Rows::Records(&s.2));
        if args.predictions {
            let mut p = vec![0.0; model.outputs()];
            let rows: Vec<Vec<f64>> = (0..predicted.len())
                .map(|r| {
                    model.predict(predicted, r, &mut p);
                    p.clone()
                })
                .collect();
            out["predictions"] = serde_json::json!(rows);
        }
        if args.staged {
            out["staged_predictions"] = serde_json::json!(staged_predictions(&model, predicted));
        }
        match &model.ensemble {
            Ensemble::Tree(tree) => {
                out["depth"] = tree.depth().into();
                out["leaves"] = tree.leaves().into();
                out["nodes"] = tree_json(tree, &binned);
                if let Some(path) = &pruning_path {
                    out["pruning_path"] = path
                        .iter()
                        .map(|s| serde_json::json!({ "alpha": s.alpha, "leaves": s.leaves, "impurity_increase": s.impurity_increase }))
                        .collect();
                }
            }
            Ensemble::Forest(f) => {
                out["trees"] = f.trees.len().into();
                out["partial"] = f.partial.into();
                out["out_of_bag_error_by_trees"] = serde_json::json!(f.oob_error);
                out["out_of_bag_share"] = f.oob_share.into();
            }
            Ensemble::Boosting(b) => {
                out["loss"] = b.loss.word().into();
                out["rounds"] = b.rounds().into();
                out["initial_scores"] = serde_json::json!(b.initial);
                out["training_loss_by_round"] = serde_json::json!(b.training_loss);
                out["validation_loss_by_round"] = serde_json::json!(b.validation_loss);
                out["held_out_rows"] = b.held_out.len().into();
                out["stopped"] = stopping_words(b).into();
                out["stopping_round"] = match b.stopping {
                    Stopping::Early { last, .. } => last.into(),
                    _ => serde_json::Value::Null,
                };
                out["partial"] = b.partial.into();
            }
            Ensemble::AdaBoost(a) => {
                out["rounds"] = a.trees.len().into();
                out["round_errors"] = serde_json::json!(a.errors);
                out["round_weights"] = serde_json::json!(a.alphas);
                out["stopped"] = stop_words(a.stop).into();
            }
        }
        if let Some(path) = &args.save_model {
            out["saved_model"] = path.display().to_string().into();
        }
        println!("{}", serde_json::to_string_pretty(&out)?);
    } else {
        match &model.ensemble {
            Ensemble::Tree(tree) => println!(
                "single tree for '{}' on {} rows and {} predictors: depth {}, {} leaves",
                design.outcome_name,
                binned.rows,
                binned.columns.len(),
                tree.depth(),
                tree.leaves()
            ),
            Ensemble::Forest(f) => {
                println!(
                    "{} of {} trees for '{}' on {} rows and {} predictors",
                    args.method,
                    f.trees.len(),
                    design.outcome_name,
                    binned.rows,
                    binned.columns.len()
                );
                let name = if regression {
                    "mean squared error"
                } else {
                    "error rate"
                };
                println!(
                    "out-of-bag {name}: {:.4} (each row judged by the trees that did not see it)",
                    f.oob_error.last().copied().unwrap_or(f64::NAN)
                );
            }
            Ensemble::AdaBoost(_) => {}
            Ensemble::Boosting(b) => {
                println!(
                    "gradient boosting ({} loss): {} rounds for '{}' on {} rows and {} predictors; {}",
                    b.loss.word(),
                    b.rounds(),
                    design.outcome_name,
                    binned.rows,
                    binned.columns.len(),
                    stopping_words(b)
                );
                if let (Some(first), Some(kept)) =
                    (b.validation_loss.first(), b.validation_loss.get(b.rounds()))
                {
                    println!(
                        "held-out loss ({} rows, not used for fitting): {first:.4} at the start, \
                         {kept:.4} after round {}",
                        b.held_out.len(),
                        b.rounds()
                    );
                }
            }
        }
        if let Ensemble::AdaBoost(a) = &model.ensemble {
            println!(
                "adaboost: {} rounds for '{}' on {} rows; {}",
                a.trees.len(),
                design.outcome_name,
                binned.rows,
                stop_words(a.stop)
            );
        }
        println!(
            "training {} {:.4} (apparent fit on the same rows, not a validation)",
            training.0, training.1
        );
        if let Some(((name, value), _, _)) = scored {
            println!(
                "{name} on {}: {value:.4}",
                args.score
                    .as_ref()
                    .map_or(String::new(), |p| p.display().to_string())
            );
        }
        if let Some(path) = &args.save_model {
            println!(
                "model saved to {} (score new records with: spinney predict {} FILE)",
                path.display(),
                path.display()
            );
        }
        for n in &design.notices {
            println!("  - {n}");
        }
    }
    Ok(())
}

/// Fits a forest's trees on `threads` threads (all cores by default), a batch at a time,
/// and tallies them in tree order: each tree draws only from its own seeded streams, so the
/// forest is the same bit for bit whatever the number of threads.
#[cfg(feature = "parallel")]
fn fit_forest_on_threads(
    binned: &BinnedMatrix,
    stats: &[f64],
    width: usize,
    outcome: &Outcome,
    settings: &ForestSettings,
    threads: Option<usize>,
) -> anyhow::Result<Forest> {
    use rayon::prelude::*;
    use spinney_core::ensemble::forest::{fit_trees, tree_outputs, OobTally};
    use spinney_core::progress::Progress;
    let threads = threads.unwrap_or_else(rayon::current_num_threads).max(1);
    if threads == 1 {
        return Ok(fit_forest(
            binned,
            stats,
            width,
            outcome,
            settings,
            &mut Bar::new(),
        ));
    }
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .context("cannot start the worker threads")?;
    let mut tally = OobTally::new(binned.rows, tree_outputs(settings, width));
    let mut bar = Bar::new();
    // Batches bound the memory of trees waiting to be tallied (one in-bag count per row each).
    let batch = threads * 4;
    let mut start = 0;
    while start < settings.trees {
        let end = (start + batch).min(settings.trees);
        let fitted: Vec<_> = pool.install(|| {
            (start..end)
                .into_par_iter()
                .flat_map_iter(|i| fit_trees(binned, stats, width, settings, i..i + 1, &mut Silent))
                .collect()
        });
        for f in fitted {
            tally.add(f, binned, outcome);
        }
        bar.step("trees", end as u64, settings.trees as u64);
        start = end;
    }
    Ok(tally.finish(false))
}

#[cfg(not(feature = "parallel"))]
fn fit_forest_on_threads(
    binned: &BinnedMatrix,
    stats: &[f64],
    width: usize,
    outcome: &Outcome,
    settings: &ForestSettings,
    _threads: Option<usize>,
) -> anyhow::Result<Forest> {
    Ok(fit_forest(
        binned,
        stats,
        width,
        outcome,
        settings,
        &mut Bar::new(),
    ))
}

/// Every row's prediction after each round 1, 2, ... (`[round][row][value]`).
fn staged_predictions(model: &Model, rows: Rows<'_>) -> Vec<Vec<Vec<f64>>> {
    let k = model.outputs();
    let mut out = vec![Vec::with_capacity(rows.len()); model.members()];
    for r in 0..rows.len() {
        let staged = model.staged_predict(rows, r);
        for (round, p) in staged.chunks_exact(k).enumerate() {
            out[round].push(p.to_vec());
        }
    }
    out
}

fn stopping_words(b: &Boosting) -> String {
    match b.stopping {
        Stopping::AllRounds => "ran every round".into(),
        Stopping::Early { best, last } => format!(
            "stopped early at round {last}: the held-out loss was lowest after round {best}, \
             and the model keeps rounds 1 to {best}"
        ),
        Stopping::Cancelled => "cancelled before the last round (partial model)".into(),
    }
}

fn stop_words(stop: Stop) -> &'static str {
    match stop {
        Stop::AllRounds => "ran every round",
        Stop::Perfect => "stopped early: a round classified every training row correctly",
        Stop::NoBetterThanChance => "stopped early: a round was no better than chance",
        Stop::Cancelled => "cancelled before the last round",
    }
}

/// Every setting in effect for `method`, by its `--set` name, as the model file records it.
fn describe_settings(all: &Settings, method: Method, regression: bool) -> BTreeMap<String, String> {
    let g = &all.grow;
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
    put("bins", all.bins.max_bins.to_string());
    put(
        "split_search",
        if all.bins.exact { "exact" } else { "histogram" }.into(),
    );
    if !regression {
        put(
            "class_weight",
            if all.balanced_classes {
                "balanced"
            } else {
                "none"
            }
            .into(),
        );
    }
    if method != Method::Boosting {
        put(
            "criterion",
            match g.criterion {
                Criterion::Gini => "gini",
                Criterion::Entropy => "entropy",
                Criterion::SquaredError => "squared_error",
                Criterion::Gradient { .. } => "gradient",
            }
            .into(),
        );
    }
    match method {
        Method::Tree => put("pruning", all.pruning.to_string()),
        Method::Bagging | Method::Forest => {
            let f = &all.forest;
            put("trees", f.trees.to_string());
            put(
                "predictors_per_split",
                f.predictors_per_split
                    .map_or("all".to_string(), |m| m.to_string()),
            );
            put("row_fraction", f.row_fraction.to_string());
            put(
                "sampling",
                if f.balanced {
                    "balanced"
                } else if f.replace {
                    "with_replacement"
                } else {
                    "without_replacement"
                }
                .into(),
            );
            put("seed", f.seed.to_string());
        }
        Method::AdaBoost => {
            put("rounds", all.boost.rounds.to_string());
            put("learning_rate", all.boost.learning_rate.to_string());
        }
        Method::Boosting => {
            let b = &all.boosting;
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
            if !all.monotone.is_empty() {
                let ways: Vec<String> = all
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

/// Re-expresses a scored file's classes in the training labels' codes.
fn align_classes(test: &Outcome, train: &Outcome) -> anyhow::Result<Outcome> {
    match (test, train) {
        (
            Outcome::Classes { codes, labels },
            Outcome::Classes {
                labels: train_labels,
                ..
            },
        ) => {
            let map: Vec<u32> = labels
                .iter()
                .map(|l| {
                    train_labels
                        .iter()
                        .position(|t| t == l)
                        .map_or(u32::MAX, |p| p as u32)
                })
                .collect();
            Ok(Outcome::Classes {
                codes: codes.iter().map(|&c| map[c as usize]).collect(),
                labels: train_labels.clone(),
            })
        }
        (Outcome::Numbers(v), Outcome::Numbers(_)) => Ok(Outcome::Numbers(v.clone())),
        _ => {
            bail!("the outcome in the scored file is not of the same kind as in the training file")
        }
    }
}
