//! `spinney evaluate FILE --outcome COL --validate SCHEME`: how a model would do on rows it
//! has not seen, by out-of-bag rows, a stratified holdout, (repeated) stratified k-fold,
//! grouped folds or bootstrap optimism correction (spinney_core::validate). Prints the
//! metrics with 95% intervals beside the baseline's, the warnings and notes; `--json` gives
//! everything (metrics, curves, per-fold figures); `--predictions-out` writes each row's
//! out-of-sample prediction as CSV. Folds run on threads (feature `parallel`) with the same
//! result as one after another.

use anyhow::Context;
use spinney_core::design::Outcome;
use spinney_core::fit::FitOptions;
use spinney_core::progress::Progress;
use spinney_core::validate::{
    self,
    warnings::{judged_warnings, warnings},
    FoldJob, FoldRun, Plan, Scheme, Validation,
};

use crate::fit::{prepare, threaded_forests, Bar, Choice, Prepared};

/// The caution every report meant for people carries.
pub const CAUTION: &str = "Research use only: these figures need external validation on \
                           other patients and are not a substitute for clinical judgement.";

/// The arguments of `spinney evaluate`.
#[derive(clap::Args)]
pub struct EvaluateArgs {
    /// The file to read.
    pub file: std::path::PathBuf,
    /// The column to predict.
    #[arg(long)]
    pub outcome: String,
    /// Predictors, comma-separated (default: every other column but text, identifiers, the
    /// weight and the group column).
    #[arg(long, value_delimiter = ',')]
    pub predictors: Option<Vec<String>>,
    /// The kind of model: tree, bagging, forest, adaboost or boosting.
    #[arg(long, default_value = "forest")]
    pub method: String,
    /// A setting NAME=VALUE (repeatable), as for `spinney fit`.
    #[arg(long = "set", value_name = "NAME=VALUE")]
    pub sets: Vec<String>,
    /// oob, holdout:FRACTION, folds:K[:REPEATS], groups:K:COLUMN or bootstrap:B (Harrell's
    /// optimism correction; it understates the optimism of forests, bagging and fully grown
    /// trees, and a warning says so when the figures show it).
    #[arg(long, default_value = "folds:10")]
    pub validate: String,
    /// Also fit the baseline (L2 logistic or ridge regression) on the same folds.
    #[arg(long)]
    pub baseline: bool,
    /// Seed of the folds, the resamples and (unless --set seed=) the model.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Two classes: the probability from which a row is called an event.
    #[arg(long, default_value_t = 0.5)]
    pub threshold: f64,
    /// Bootstrap resamples of the predictions for the intervals of figures without a
    /// closed form (0: none; each resample refits the calibration slope, so 1,000 keeps
    /// large files quick).
    #[arg(long, default_value_t = 1000)]
    pub resamples: usize,
    /// Two classes: the class called positive (the event), whose probability the figures
    /// are about (default: "yes" of a yes/no column, else the later label in order).
    #[arg(long, value_name = "LABEL")]
    pub positive: Option<String>,
    /// A column of row weights.
    #[arg(long, value_name = "COLUMN")]
    pub weight: Option<String>,
    /// A column naming each row's patient, site or record, for warnings with plain folds
    /// (groups:K:COLUMN sets it too).
    #[arg(long, value_name = "COLUMN")]
    pub group: Option<String>,
    /// Threads (default: every core). The result is the same whatever the number.
    #[arg(long)]
    pub threads: Option<usize>,
    /// Print everything as JSON.
    #[arg(long)]
    pub json: bool,
    /// Write each row's out-of-sample prediction (and fold) to this CSV file.
    #[arg(long, value_name = "PATH")]
    pub predictions_out: Option<std::path::PathBuf>,
}

/// The threads `--threads` asks for (default: every core; 1 without the `parallel` feature).
pub fn available_threads(threads: Option<usize>) -> usize {
    #[cfg(feature = "parallel")]
    {
        threads.unwrap_or_else(rayon::current_num_threads).max(1)
    }
    #[cfg(not(feature = "parallel"))]
    {
        let _ = threads;
        1
    }
}

/// Runs independent jobs on `threads` threads (default: every core) with rayon, or one
/// after another without the `parallel` feature or with one thread. Each job depends only
/// on its index (and seeded streams keyed by it), so the results are the same either way.
pub fn spread_jobs(threads: Option<usize>, count: usize, job: &(dyn Fn(usize) + Sync)) {
    #[cfg(feature = "parallel")]
    {
        use rayon::prelude::*;
        let n = threads.unwrap_or_else(rayon::current_num_threads).max(1);
        if n > 1 && count > 1 {
            if let Ok(pool) = rayon::ThreadPoolBuilder::new().num_threads(n).build() {
                pool.install(|| (0..count).into_par_iter().for_each(job));
                return;
            }
        }
    }
    let _ = threads;
    (0..count).for_each(job);
}

/// Runs the fits of a validation: several at once on threads when there are at least as
/// many fits as threads, otherwise one after another with each forest's trees on threads.
/// Each fit depends only on its split and the seed, so the result is the same either way.
pub fn run_fits(
    threads: Option<usize>,
    count: usize,
    job: &FoldJob<'_>,
    progress: &mut dyn Progress,
) -> spinney_core::error::Result<Vec<FoldRun>> {
    #[cfg(feature = "parallel")]
    {
        use rayon::prelude::*;
        let n = threads.unwrap_or_else(rayon::current_num_threads).max(1);
        if n > 1 && count >= n {
            let pool = rayon::ThreadPoolBuilder::new()
                .num_threads(n)
                .build()
                .map_err(|e| {
                    spinney_core::Error::new(spinney_core::ErrorKind::BadSetting {
                        setting: "threads".into(),
                        reason: format!("cannot start {n} worker threads ({e}); try --threads 1"),
                    })
                })?;
            let done = std::sync::atomic::AtomicU64::new(0);
            let bar = std::sync::Mutex::new(Bar::new());
            // Each fold's trees go to the same pool, so a thread whose folds are done helps
            // with the others' trees (5 folds on 2 threads leave none idle at the end).
            let fitter = crate::fit::forests_on_current_pool();
            return pool.install(|| {
                (0..count)
                    .into_par_iter()
                    .map(|i| {
                        let options = FitOptions {
                            forest_fitter: Some(&fitter),
                            ..FitOptions::default()
                        };
                        let run = job(i, options, &mut spinney_core::progress::Silent);
                        let d = done.fetch_add(1, std::sync::atomic::Ordering::Relaxed) + 1;
                        if let Ok(mut b) = bar.lock() {
                            b.step("fits", d, count as u64);
                        }
                        run
                    })
                    .collect()
            });
        }
    }
    let fitter = threaded_forests(threads);
    let mut out = Vec::with_capacity(count);
    for i in 0..count {
        progress.step("fits", i as u64, count as u64);
        let options = FitOptions {
            forest_fitter: Some(&fitter),
            ..FitOptions::default()
        };
        let mut inner = validate::InSplit {
            outer: &mut *progress,
            index: i,
            count,
        };
        out.push(job(i, options, &mut inner)?);
    }
    progress.step("fits", count as u64, count as u64);
    Ok(out)
}

/// Reads, validates and returns the validation with what it was made from.
pub struct Evaluated {
    pub prepared: Prepared,
    pub validation: Validation,
    pub warnings: Vec<validate::warnings::Warning>,
    pub seconds: f64,
}

/// Validates a prepared design by `plan` (the command's and tune's common path).
pub fn evaluate_prepared(
    prepared: &Prepared,
    plan: &Plan,
    threads: Option<usize>,
) -> anyhow::Result<Validation> {
    let fitter = threaded_forests(threads);
    let runner = |count: usize, job: &FoldJob<'_>, progress: &mut dyn Progress| {
        run_fits(threads, count, job, progress)
    };
    let spread = |count: usize, job: &(dyn Fn(usize) + Sync)| spread_jobs(threads, count, job);
    Ok(validate::validate(
        &prepared.design,
        &prepared.settings,
        plan,
        FitOptions {
            forest_fitter: Some(&fitter),
            spread: Some(&spread),
            ..FitOptions::default()
        },
        Some(&runner),
        &mut Bar::new(),
    )?)
}

/// The scheme from `--validate`, and the group column it (or `--group`) names.
pub fn scheme_and_group(
    validate: &str,
    group: Option<&str>,
) -> anyhow::Result<(Scheme, Option<String>)> {
    // Named by the option typed, not again as a setting.
    let scheme = Scheme::parse(validate).map_err(|e| match e.kind() {
        spinney_core::ErrorKind::BadSetting { reason, .. } => {
            anyhow::anyhow!("--validate: {reason}")
        }
        _ => anyhow::anyhow!("--validate: {e}"),
    })?;
    let group = match (&scheme, group) {
        (Scheme::Groups { column, .. }, Some(g)) if g != column => anyhow::bail!(
            "--group {g} and --validate {validate} name different group columns; give one"
        ),
        (Scheme::Groups { column, .. }, _) => Some(column.clone()),
        (_, g) => g.map(str::to_string),
    };
    Ok((scheme, group))
}

fn run_evaluation(args: &EvaluateArgs) -> anyhow::Result<Evaluated> {
    if !(args.threshold > 0.0 && args.threshold < 1.0) {
        anyhow::bail!(
            "--threshold {}: outside (0, 1); give the probability from which a row is called \
             an event, e.g. 0.5",
            args.threshold
        );
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
    let plan = Plan {
        scheme,
        seed: args.seed,
        threshold: args.threshold,
        resamples: args.resamples,
        baseline: args.baseline,
    };
    let mut warnings = warnings(&prepared.design, &plan.scheme, Some(&prepared.table));
    let start = std::time::Instant::now();
    let validation = evaluate_prepared(&prepared, &plan, args.threads)?;
    warnings.extend(judged_warnings(&validation));
    Ok(Evaluated {
        prepared,
        validation,
        warnings,
        seconds: start.elapsed().as_secs_f64(),
    })
}

pub fn evaluate(args: EvaluateArgs) -> anyhow::Result<()> {
    let e = run_evaluation(&args)?;
    if let Some(path) = &args.predictions_out {
        write_predictions(path, &e)?;
    }
    if args.json {
        println!("{}", serde_json::to_string_pretty(&report_json(&args, &e))?);
    } else {
        print_report(&args, &e);
    }
    Ok(())
}

fn classes(outcome: &Outcome) -> Option<&[String]> {
    match outcome {
        Outcome::Classes { labels, .. } => Some(labels),
        Outcome::Numbers(_) => None,
    }
}

fn baseline_name(outcome: &Outcome) -> &'static str {
    match outcome {
        Outcome::Classes { .. } => "L2 logistic regression (C = 1)",
        Outcome::Numbers(_) => "ridge regression (alpha = 1)",
    }
}

/// The JSON report: metrics keyed by name, curves, per-fold figures, warnings.
pub fn report_json(args: &EvaluateArgs, e: &Evaluated) -> serde_json::Value {
    let v = &e.validation;
    let d = &e.prepared.design;
    let labels = classes(&d.outcome);
    let mut curves = serde_json::to_value(&v.model.curves).unwrap_or_default();
    curves["error_by_size"] = serde_json::json!({
        "out_of_sample": v.error_by_size,
        "training": v.training_error_by_size,
        "measure": if labels.is_some() { "error rate" } else { "mean squared error" },
    });
    serde_json::json!({
        "format": "spinney-evaluate", "version": 1,
        "file": args.file.display().to_string(),
        "fingerprint_sha256": e.prepared.fingerprint,
        "outcome": d.outcome_name,
        "classes": labels,
        "event_class": labels.filter(|l| l.len() == 2).map(|l| l[1].clone()),
        "method": e.prepared.method.word(),
        "settings": e.prepared.settings.describe(),
        "predictors": d.predictors.iter().map(|p| p.name.clone()).collect::<Vec<_>>(),
        "validation": v.scheme, "seed": v.seed, "threshold": args.threshold,
        "rows": v.rows, "judged_rows": v.judged_rows,
        "metrics": v.model.metrics,
        "confusion_matrix": v.model.confusion_matrix,
        "youden": v.model.youden,
        "class_auc": v.model.class_auc,
        "residuals": v.model.residuals,
        "curves": curves,
        "apparent": v.apparent.as_ref().map(|a| serde_json::json!({
            "figures": a, "optimism": v.optimism, "left_out": v.left_out,
            "note": "apparent: a fit on all rows judged on those same rows; not a validation",
        })),
        "baseline": v.baseline.as_ref().map(|b| serde_json::json!({
            "model": baseline_name(&d.outcome),
            "metrics": b.metrics,
            "confusion_matrix": b.confusion_matrix,
            "curves": b.curves,
            "apparent": v.baseline_apparent, "optimism": v.baseline_optimism,
        })),
        "folds": v.folds,
        "warnings": e.warnings,
        "notes": v.notes,
        "notices": d.notices,
        "caution": CAUTION,
        "seconds": e.seconds,
    })
}

/// A CSV field, quoted when it must be.
fn field(text: &str) -> String {
    if text.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", text.replace('"', "\"\""))
    } else {
        text.to_string()
    }
}

fn number(x: f64) -> String {
    if x.is_finite() {
        format!("{x}")
    } else {
        String::new()
    }
}

/// One line per row: its data row, fold, outcome, out-of-sample prediction(s) (empty when it
/// has none) and the baseline's.
fn write_predictions(path: &std::path::Path, e: &Evaluated) -> anyhow::Result<()> {
    let v = &e.validation;
    let d = &e.prepared.design;
    let k = v.outputs;
    let names: Vec<String> = match classes(&d.outcome) {
        Some(l) => l.iter().map(|c| format!("probability {c}")).collect(),
        None => vec!["predicted".into()],
    };
    let mut head = vec!["row".to_string(), "fold".into(), field(&d.outcome_name)];
    head.extend(names.iter().map(|n| field(n)));
    if v.baseline_predictions.is_some() {
        head.extend(names.iter().map(|n| field(&format!("baseline {n}"))));
    }
    let mut out = head.join(",") + "\n";
    for r in 0..v.rows {
        let outcome = match &d.outcome {
            Outcome::Classes { codes, labels } => field(&labels[codes[r] as usize]),
            Outcome::Numbers(y) => number(y[r]),
        };
        let mut line = vec![
            (d.rows[r] + 1).to_string(),
            v.fold_of_row[r].map_or(String::new(), |f| (f + 1).to_string()),
            outcome,
        ];
        line.extend(v.predictions[r * k..(r + 1) * k].iter().map(|&x| number(x)));
        if let Some(b) = &v.baseline_predictions {
            line.extend(b[r * k..(r + 1) * k].iter().map(|&x| number(x)));
        }
        out += &line.join(",");
        out.push('\n');
    }
    std::fs::write(path, out)
        .with_context(|| format!("cannot write the predictions to {}", path.display()))
}

fn interval(e: &validate::Estimate) -> String {
    match (e.low, e.high) {
        (Some(l), Some(h)) => format!("{l:.3} to {h:.3} ({})", e.interval),
        _ => String::new(),
    }
}

fn print_report(args: &EvaluateArgs, e: &Evaluated) {
    let v = &e.validation;
    let d = &e.prepared.design;
    let what = match classes(&d.outcome) {
        Some(l) if l.len() == 2 => format!("'{}' (event: '{}')", d.outcome_name, l[1]),
        Some(l) => format!("'{}' ({} classes)", d.outcome_name, l.len()),
        None => format!("'{}' (a number)", d.outcome_name),
    };
    println!(
        "{} for {what} on {} rows and {} predictors; validation {} (seed {}), {} rows judged \
         out of sample, {:.1} s",
        e.prepared.method.word(),
        v.rows,
        d.predictors.len(),
        v.scheme,
        v.seed,
        v.judged_rows,
        e.seconds
    );
    let base = v.baseline.as_ref();
    let mut lines = vec![[
        "metric".to_string(),
        "value".into(),
        "95% interval".into(),
        if base.is_some() {
            "baseline".into()
        } else {
            String::new()
        },
    ]];
    for (name, m) in &v.model.metrics {
        let b = base
            .and_then(|b| b.metrics.get(name))
            .map_or(String::new(), |b| format!("{:.3}", b.value));
        lines.push([name.clone(), format!("{:.3}", m.value), interval(m), b]);
    }
    let widths: Vec<usize> = (0..4)
        .map(|i| {
            lines
                .iter()
                .map(|l| l[i].chars().count())
                .max()
                .unwrap_or(0)
        })
        .collect();
    println!();
    for l in &lines {
        let cells: Vec<String> = l
            .iter()
            .zip(&widths)
            .map(|(c, w)| format!("{c:<w$}"))
            .collect();
        println!("  {}", cells.join("  ").trim_end());
    }
    if let Some(y) = &v.model.youden {
        println!(
            "\n  Youden's J is highest ({:.3}) at threshold {:.3}; figures above use {}",
            y.j, y.threshold, args.threshold
        );
    }
    // A few headline figures of a bootstrap's side results, on one line.
    let headline = |figures: Vec<(&String, f64)>| -> String {
        let shown: Vec<String> = figures
            .into_iter()
            .filter(|(n, _)| matches!(n.as_str(), "auc" | "brier" | "rmse" | "accuracy"))
            .map(|(n, x)| format!("{n} {x:.3}"))
            .collect();
        shown.join(", ")
    };
    if let Some(a) = &v.apparent {
        let figures = a.iter().map(|(n, &x)| (n, x)).collect();
        println!(
            "  apparent (training rows, not a validation): {}",
            headline(figures)
        );
    }
    if let Some(l) = &v.left_out {
        let figures = l.iter().map(|(n, e)| (n, e.value)).collect();
        println!(
            "  rows each refit left out, before the correction: {}",
            headline(figures)
        );
    }
    if let (Some(o), Some(t)) = (&v.error_by_size, &v.training_error_by_size) {
        let at = |c: &[f64], i: usize| c.get(i).or(c.last()).copied().unwrap_or(f64::NAN);
        let n = o.len();
        let marks: Vec<usize> = [1, 10, 50, 100, 300, 1000]
            .into_iter()
            .filter(|&m| m < n)
            .chain([n])
            .collect();
        let cells: Vec<String> = marks
            .iter()
            .map(|&m| format!("{m}: {:.3} ({:.3})", at(o, m - 1), at(t, m - 1)))
            .collect();
        println!(
            "  error by ensemble size, out of sample (training): {}",
            cells.join(", ")
        );
    }
    if v.folds.len() > 1 {
        let main = ["auc", "accuracy", "rmse"]
            .into_iter()
            .find(|m| v.folds.iter().all(|f| f.figures.contains_key(*m)));
        if let Some(m) = main {
            let vals: Vec<f64> = v.folds.iter().map(|f| f.figures[m]).collect();
            let lo = vals.iter().copied().fold(f64::INFINITY, f64::min);
            let hi = vals.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            println!(
                "  {m} per fit: {lo:.3} to {hi:.3} over {} fits (--json lists each)",
                vals.len()
            );
        }
    }
    if !e.warnings.is_empty() {
        println!("\nwarnings:");
        for w in &e.warnings {
            println!("  ! {}", w.message);
        }
    }
    println!("\nnotes:");
    for n in v.notes.iter().chain(&d.notices) {
        println!("  - {n}");
    }
    if base.is_some() {
        println!(
            "  - baseline: {} on the same folds",
            baseline_name(&d.outcome)
        );
    }
    println!("\n{CAUTION}");
}
