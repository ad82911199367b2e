//! `spinney fit FILE --outcome COL`: fits a single tree, bagging, a random forest, AdaBoost
//! or gradient boosting on all rows and reports it (training fit, out-of-bag error, error by
//! ensemble size, boosting's loss curves and stopping round, and optionally the fit on
//! another file). `--json` prints a tree node by node (predictor,
//! threshold, where missing values go, children, values), which the checks in
//! tests/reference compare with scikit-learn.

use anyhow::{bail, Context};
use spinney_core::binning::BinnedMatrix;
use spinney_core::data::{read_table, Loaded, ReadOptions};
use spinney_core::design::{build_design, DesignSpec, Outcome};
use spinney_core::ensemble::boosting::Stopping;
use spinney_core::ensemble::forest::{fit_forest_judging, Forest, ForestSettings, HeldOut};
use spinney_core::fit::{fit_design, FitOptions, Fitted};
use spinney_core::model::{Ensemble, Method, Model};
use spinney_core::progress::{Progress, Silent};
use spinney_core::settings::FitSettings;
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
    /// Two classes: the class called positive (the event), whose probability the figures
    /// are about (default: "yes" of a yes/no column, else the later label in order).
    #[arg(long, value_name = "LABEL")]
    pub positive: Option<String>,
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

/// A one-line progress bar on stderr, drawn only when stderr is a terminal.
pub struct Bar {
    tty: bool,
    start: std::time::Instant,
}

impl Bar {
    pub fn new() -> Self {
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
                (0..=254u8).filter(|&b| n.left_bins().contains(b)).collect()
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

/// What `fit`, `evaluate` and `tune` make from a file and the column and method options.
pub struct Prepared {
    pub table: spinney_core::data::Table,
    pub fingerprint: String,
    pub design: spinney_core::design::Design,
    pub settings: FitSettings,
    pub method: Method,
}

/// The columns and method options, as each command takes them.
pub struct Choice<'a> {
    pub file: &'a std::path::Path,
    pub outcome: &'a str,
    pub predictors: Option<&'a [String]>,
    pub weight: Option<&'a str>,
    pub positive: Option<&'a str>,
    pub group: Option<&'a str>,
    pub method: &'a str,
    /// NAME=VALUE settings, applied after `defaults` (NAME, VALUE) and the method's own.
    pub sets: &'a [String],
    pub defaults: &'a [(String, String)],
}

/// Reads the file, builds the design (by default every other column but text, the weight
/// and the group column) and the settings (the method's defaults, then `--set`).
pub fn prepare(choice: &Choice<'_>) -> anyhow::Result<Prepared> {
    let Loaded {
        table, fingerprint, ..
    } = read(choice.file, Vec::new())?;
    let predictors: Vec<String> = match choice.predictors {
        Some(p) => p.to_vec(),
        None => table
            .columns
            .iter()
            .filter(|c| c.name != choice.outcome && c.kind != spinney_core::data::Kind::Text)
            .map(|c| c.name.clone())
            .filter(|c| Some(c.as_str()) != choice.group)
            .collect(),
    };
    let spec = DesignSpec {
        outcome: choice.outcome.to_string(),
        predictors: predictors
            .into_iter()
            .filter(|p| Some(p.as_str()) != choice.weight)
            .collect(),
        weight: choice.weight.map(str::to_string),
        group: choice.group.map(str::to_string),
        positive: choice.positive.map(str::to_string),
    };
    let design = build_design(&table, &spec)?;
    let regression = matches!(design.outcome, Outcome::Numbers(_));
    let method = Method::from_word(choice.method).with_context(|| {
        format!(
            "--method {}: choose tree, bagging, forest, adaboost or boosting",
            choice.method
        )
    })?;
    // Defaults first (the method's own), then the user's --set choices on top.
    let mut sets = choice.defaults.to_vec();
    for s in choice.sets {
        let (name, value) = s
            .split_once('=')
            .with_context(|| format!("--set {s:?}: write NAME=VALUE"))?;
        sets.push((name.to_string(), value.to_string()));
    }
    let settings = FitSettings::build(
        method,
        design.predictors.len(),
        regression,
        &design.outcome_name,
        &sets,
    )
    .map_err(|e| {
        if e.contains("predicts classes") {
            anyhow::anyhow!("--method {}: {e}", choice.method)
        } else {
            anyhow::anyhow!("--set {e}")
        }
    })?;
    Ok(Prepared {
        table,
        fingerprint,
        design,
        settings,
        method,
    })
}

/// A forest fitter for [`fit_design`] spreading the trees over `threads` threads.
#[allow(clippy::type_complexity)] // the signature of `spinney_core::fit::ForestFitter`
pub fn threaded_forests(
    threads: Option<usize>,
) -> impl Fn(
    &BinnedMatrix,
    &[f64],
    usize,
    &Outcome,
    &ForestSettings,
    Option<HeldOut<'_>>,
    &mut dyn Progress,
) -> spinney_core::error::Result<Forest> {
    move |binned, stats, width, outcome, forest, held, progress| {
        let on = (threads, held);
        fit_forest_on_threads(binned, stats, width, outcome, forest, on, progress)
    }
}

pub fn fit(args: FitArgs) -> anyhow::Result<()> {
    let Prepared {
        table,
        fingerprint,
        design,
        settings,
        method,
    } = prepare(&Choice {
        file: &args.file,
        outcome: &args.outcome,
        predictors: args.predictors.as_deref(),
        weight: args.weight.as_deref(),
        positive: args.positive.as_deref(),
        group: None,
        method: &args.method,
        sets: &args.sets,
        defaults: &[],
    })?;
    // The design holds its own copy of the predictors; the table is no longer needed.
    drop(table);
    let regression = settings.regression;
    if args.staged && method != Method::Boosting {
        bail!("--staged: only for --method boosting (predictions after every round)");
    }
    // Fit time counts binning and fitting, not reading the file.
    let fit_start = std::time::Instant::now();
    let fitter = threaded_forests(args.threads);
    let Fitted {
        model,
        binned,
        design,
        pruning_path,
    } = fit_design(
        design,
        &settings,
        Some(fingerprint),
        FitOptions {
            forest_fitter: Some(&fitter),
            // The path costs time quadratic in the nodes (weakest links one by one): only
            // for the JSON output, its one reader.
            pruning_path: args.json && method == Method::Tree,
            ..FitOptions::default()
        },
        &mut Bar::new(),
    )?;
    let fit_seconds = fit_start.elapsed().as_secs_f64();
    let classes = model.classes.clone();
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
                    positive: args.positive.clone(),
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
    if args.json {
        let mut out = serde_json::json!({
            "format": "spinney-fit", "version": 1, "method": args.method, "fit_seconds": fit_seconds,
            "outcome": design.outcome_name, "classes": classes, "rows": binned.rows,
            "predictors": binned.columns.iter().map(|c| c.name.clone()).collect::<Vec<_>>(),
            "training": { training.0: training.1 },
            "notices": design.notices,
        });
        out["training_error_by_size"] =
            serde_json::json!(model.training_errors(&binned, &design.outcome));
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
                out["stopped"] = b.stopping_words().into();
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
                out["stopped"] = a.stop.words().into();
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
                    b.stopping_words()
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
                a.stop.words()
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
/// forest is the same bit for bit whatever the number of threads. Cancelling (through
/// `progress`) keeps the trees of the batches done. `held` rows (validation's test rows) are
/// judged as the trees are tallied, which are then not kept.
#[cfg(feature = "parallel")]
fn fit_forest_on_threads(
    binned: &BinnedMatrix,
    stats: &[f64],
    width: usize,
    outcome: &Outcome,
    settings: &ForestSettings,
    (threads, held): (Option<usize>, Option<HeldOut<'_>>),
    progress: &mut dyn Progress,
) -> spinney_core::error::Result<Forest> {
    let threads = threads.unwrap_or_else(rayon::current_num_threads).max(1);
    if threads == 1 {
        return Ok(fit_forest_judging(
            binned, stats, width, outcome, settings, held, progress,
        ));
    }
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .map_err(|e| {
            spinney_core::Error::new(spinney_core::ErrorKind::BadSetting {
                setting: "threads".into(),
                reason: format!("cannot start {threads} worker threads ({e}); try --threads 1"),
            })
        })?;
    Ok(fit_forest_batches(
        binned,
        stats,
        width,
        outcome,
        settings,
        (threads, held),
        Some(&pool),
        progress,
    ))
}

/// A forest fitter for fits that already run on a rayon pool (validation folds side by
/// side): the trees go to that same pool in batches, so a thread with no fold of its own
/// left helps with another fold's trees. The forest is the same bit for bit.
#[cfg(feature = "parallel")]
#[allow(clippy::type_complexity)] // the signature of `spinney_core::fit::ForestFitter`
pub fn forests_on_current_pool() -> impl Fn(
    &BinnedMatrix,
    &[f64],
    usize,
    &Outcome,
    &ForestSettings,
    Option<HeldOut<'_>>,
    &mut dyn Progress,
) -> spinney_core::error::Result<Forest>
       + Sync {
    |binned, stats, width, outcome, forest, held, progress| {
        let on = (rayon::current_num_threads().max(1), held);
        Ok(fit_forest_batches(
            binned, stats, width, outcome, forest, on, None, progress,
        ))
    }
}

/// The trees of a forest in batches of `threads · 4` on `pool` (None: the pool the caller
/// runs on), tallied in tree order (judging `held` rows as they are, if given).
#[cfg(feature = "parallel")]
#[allow(clippy::too_many_arguments)]
fn fit_forest_batches(
    binned: &BinnedMatrix,
    stats: &[f64],
    width: usize,
    outcome: &Outcome,
    settings: &ForestSettings,
    (threads, held): (usize, Option<HeldOut<'_>>),
    pool: Option<&rayon::ThreadPool>,
    progress: &mut dyn Progress,
) -> Forest {
    use rayon::prelude::*;
    use spinney_core::ensemble::forest::{fit_trees, tree_outputs, OobTally};
    use spinney_core::progress::Flow;
    let mut tally = OobTally::new(binned.rows, tree_outputs(settings, width));
    // Batches bound the memory of trees waiting to be tallied (one in-bag count per row each).
    let batch = threads * 4;
    let mut start = 0;
    while start < settings.trees {
        let end = (start + batch).min(settings.trees);
        let batch = || -> Vec<_> {
            (start..end)
                .into_par_iter()
                .flat_map_iter(|i| fit_trees(binned, stats, width, settings, i..i + 1, &mut Silent))
                .collect()
        };
        let fitted = match pool {
            Some(pool) => pool.install(batch),
            None => batch(),
        };
        for f in fitted {
            tally.add_judging(f, binned, outcome, held);
        }
        let flow = progress.step("trees", end as u64, settings.trees as u64);
        start = end;
        if flow == Flow::Stop && start < settings.trees {
            return tally.finish(true);
        }
    }
    tally.finish(false)
}

#[cfg(not(feature = "parallel"))]
fn fit_forest_on_threads(
    binned: &BinnedMatrix,
    stats: &[f64],
    width: usize,
    outcome: &Outcome,
    settings: &ForestSettings,
    (_, held): (Option<usize>, Option<HeldOut<'_>>),
    progress: &mut dyn Progress,
) -> spinney_core::error::Result<Forest> {
    Ok(fit_forest_judging(
        binned, stats, width, outcome, settings, held, progress,
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
