//! `spinney tune FILE --outcome COL --try NAME=V1,V2,...`: scores every combination (or
//! `--random N` of them) by a validation scheme, prints the table of settings and scores
//! and, with `--nested K`, the nested cross-validated figure to report instead of the best
//! one (spinney_core::validate::tune).

use spinney_core::progress::Progress;
use spinney_core::validate::tune::{
    default_metric, grid, random_candidates, tune, Axis, Runners, Scored, Space,
};
use spinney_core::validate::{FoldJob, Plan};

use crate::evaluate::{available_threads, run_fits, scheme_and_group, spread_jobs, CAUTION};
use crate::fit::{prepare, Bar, Choice};

/// The arguments of `spinney tune`.
#[derive(clap::Args)]
pub struct TuneArgs {
    /// The file to read.
    pub file: std::path::PathBuf,
    /// The column to predict.
    #[arg(long)]
    pub outcome: String,
    /// Predictors, comma-separated (default: every other column but text, the weight and the
    /// group column).
    #[arg(long, value_delimiter = ',')]
    pub predictors: Option<Vec<String>>,
    /// The kind of model: tree, bagging, forest, adaboost or boosting.
    #[arg(long, default_value = "forest")]
    pub method: String,
    /// A fixed setting NAME=VALUE (repeatable).
    #[arg(long = "set", value_name = "NAME=VALUE")]
    pub sets: Vec<String>,
    /// A setting and the values to try, NAME=V1,V2,... (repeatable; every combination).
    #[arg(long = "try", value_name = "NAME=V1,V2,...", required = true)]
    pub tries: Vec<String>,
    /// Try only this many combinations, drawn at random (seeded).
    #[arg(long, value_name = "N")]
    pub random: Option<usize>,
    /// oob, holdout:FRACTION, folds:K[:REPEATS], groups:K:COLUMN or bootstrap:B (Harrell's
    /// optimism correction; it understates the optimism of forests, bagging and fully grown
    /// trees, and a warning says so when the figures show it).
    #[arg(long, default_value = "folds:5")]
    pub validate: String,
    /// Also estimate the tuned model honestly by nested cross-validation with K outer folds.
    #[arg(long, value_name = "K")]
    pub nested: Option<usize>,
    /// The figure to choose by (default: auc for two classes, log_loss for several, rmse
    /// for numbers).
    #[arg(long)]
    pub metric: Option<String>,
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    #[arg(long, default_value_t = 0.5)]
    pub threshold: f64,
    /// Two classes: the class called positive (the event), whose probability the figures
    /// are about (default: "yes" of a yes/no column, else the later label in order).
    #[arg(long, value_name = "LABEL")]
    pub positive: Option<String>,
    #[arg(long, value_name = "COLUMN")]
    pub weight: Option<String>,
    #[arg(long, value_name = "COLUMN")]
    pub group: Option<String>,
    /// Threads (default: every core). The result is the same whatever the number.
    #[arg(long)]
    pub threads: Option<usize>,
    /// Print the table as JSON.
    #[arg(long)]
    pub json: bool,
}

fn axes(tries: &[String]) -> anyhow::Result<Vec<Axis>> {
    tries
        .iter()
        .map(|t| {
            let (name, values) = t.split_once('=').ok_or_else(|| {
                anyhow::anyhow!("--try {t:?}: write NAME=V1,V2,..., e.g. --try depth=4,8,16")
            })?;
            let values: Vec<String> = values
                .split(',')
                .map(|v| v.trim().to_string())
                .filter(|v| !v.is_empty())
                .collect();
            if values.is_empty() {
                anyhow::bail!("--try {t:?}: give at least one value after '='");
            }
            Ok((name.trim().to_string(), values))
        })
        .collect()
}

pub fn tune_command(args: TuneArgs) -> anyhow::Result<()> {
    if !(args.threshold > 0.0 && args.threshold < 1.0) {
        anyhow::bail!("--threshold {}: outside (0, 1); e.g. 0.5", args.threshold);
    }
    if args.nested.is_some_and(|k| k < 2) {
        anyhow::bail!("--nested: at least 2 outer folds (5 is usual)");
    }
    let (scheme, group) = scheme_and_group(&args.validate, args.group.as_deref())?;
    let prepared = prepare(&Choice {
        file: &args.file,
        outcome: &args.outcome,
        predictors: args.predictors.as_deref(),
        weight: args.weight.as_deref(),
        positive: args.positive.as_deref(),
        group: group.as_deref(),
        method: &args.method,
        sets: &args.sets,
        defaults: &[("seed".to_string(), args.seed.to_string())],
    })?;
    let axes = axes(&args.tries)?;
    let candidates = match args.random {
        Some(n) => random_candidates(&axes, n, args.seed),
        None => grid(&axes),
    };
    let metric = args
        .metric
        .clone()
        .unwrap_or_else(|| default_metric(&prepared.design.outcome).to_string());
    let plan = Plan {
        scheme,
        seed: args.seed,
        threshold: args.threshold,
        resamples: 0,
        baseline: false,
    };
    let mut base: Vec<(String, String)> = vec![("seed".into(), args.seed.to_string())];
    for s in &args.sets {
        let (n, v) = s
            .split_once('=')
            .ok_or_else(|| anyhow::anyhow!("--set {s:?}: write NAME=VALUE"))?;
        base.push((n.to_string(), v.to_string()));
    }
    let threads = args.threads;
    let runner = |count: usize, job: &FoldJob<'_>, progress: &mut dyn Progress| {
        run_fits(threads, count, job, progress)
    };
    // As many candidates as threads or more: the candidates on threads, each validated in
    // order on its own; fewer: one after another, each one's folds on threads. The table is
    // the same either way (each candidate's fits depend on its settings and the seeds only).
    let spread = |count: usize, job: &(dyn Fn(usize) + Sync)| spread_jobs(threads, count, job);
    let runners = if candidates.len() >= available_threads(threads) && candidates.len() > 1 {
        Runners {
            runner: None,
            spread: Some(&spread),
        }
    } else {
        Runners {
            runner: Some(&runner),
            spread: None,
        }
    };
    let start = std::time::Instant::now();
    let tuned = tune(
        &prepared.design,
        &Space {
            method: prepared.method,
            base: &base,
            candidates: &candidates,
            metric: &metric,
        },
        &plan,
        args.nested,
        runners,
        &mut Bar::new(),
    )
    .map_err(|e| anyhow::anyhow!("{e}"))?;
    let seconds = start.elapsed().as_secs_f64();
    if args.json {
        let mut v = serde_json::to_value(&tuned)?;
        v["format"] = "spinney-tune".into();
        v["version"] = 1.into();
        v["method"] = prepared.method.word().into();
        v["note"] = "the best candidate's score is optimistic (chosen on these same splits); \
                     report the nested score"
            .into();
        v["caution"] = CAUTION.into();
        v["seconds"] = seconds.into();
        println!("{}", serde_json::to_string_pretty(&v)?);
        return Ok(());
    }
    println!(
        "{} candidates of {} scored by {} ({}, {}), {:.1} s",
        tuned.table.len(),
        prepared.method.word(),
        tuned.scheme,
        metric,
        if tuned.lower_is_better {
            "lower is better"
        } else {
            "higher is better"
        },
        seconds
    );
    for (i, row) in tuned.table.iter().enumerate() {
        let s: Vec<String> = row
            .settings
            .iter()
            .map(|(n, v)| format!("{n}={v}"))
            .collect();
        println!(
            "  {}{} {:.4}  {}",
            if i == tuned.best { "*" } else { " " },
            if row.warnings.is_empty() { " " } else { "!" },
            row.score,
            s.join(" ")
        );
    }
    let doubted: Vec<&Scored> = tuned
        .table
        .iter()
        .filter(|r| !r.warnings.is_empty())
        .collect();
    if let Some(first) = doubted.first() {
        println!(
            "  (! {} of {} candidates' scores in doubt, ranking models that overfit first; \
             the first: {})",
            doubted.len(),
            tuned.table.len(),
            first.warnings[0].message
        );
    }
    println!(
        "  (* best; its score is optimistic, chosen on these same splits{})",
        if tuned.nested.is_some() {
            ""
        } else {
            ": add --nested 5 for an honest figure"
        }
    );
    if let (Some(folds), Some(score)) = (&tuned.nested, tuned.nested_score) {
        println!(
            "nested cross-validation ({} outer folds): {metric} {score:.4}",
            folds.len()
        );
        for f in folds {
            let s: Vec<String> = f.chosen.iter().map(|(n, v)| format!("{n}={v}")).collect();
            println!(
                "  outer fold {}: chose {} (inner {:.4}), outer {:.4}",
                f.fold + 1,
                s.join(" "),
                f.inner_score,
                f.outer_score
            );
        }
    }
    println!("\n{CAUTION}");
    Ok(())
}
