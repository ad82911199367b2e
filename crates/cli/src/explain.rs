//! `spinney explain MODEL FILE`: what drives a saved model and why single records scored as
//! they did, on the rows of FILE: importance (permutation on the file's rows with its
//! outcome, or impurity from the trees; out-of-bag permutation importance too for bagging
//! and forests when FILE is the training file; with `--held-out SCHEME`, permutation
//! importance on held-out records, refitting the model's settings on each training part of
//! the training file, see `spinney_core::explain::held_out`), per-record contributions (TreeSHAP),
//! partial dependence and ICE curves for one predictor or a pair, and the strongest pairwise
//! interactions (Friedman's H). A readable report, or JSON with `--json`. All of it comes
//! from `spinney_core::explain`.

use std::path::PathBuf;

use anyhow::{bail, Context};
use serde_json::{json, Value};
use spinney_core::binning::Records;
use spinney_core::design::{build_design, DesignSpec, Outcome};
use spinney_core::explain::dependence::{
    grid, interactions, label_of, partial_dependence, predictor_index, sample_rows, Dependence,
};
use spinney_core::explain::held_out::{held_out_permutation, why_not_held_out, HeldOut, APPARENT};
use spinney_core::explain::importance::{
    impurity, out_of_bag, permutation, suggest_groups, Metric, OutOfBag, Permutation, Shuffles,
    IMPURITY_CAUTION,
};
use spinney_core::explain::shap::{contributions, Contributions};
use spinney_core::explain::{model_outcome, CAUTION};
use spinney_core::model::{Ensemble, Model};
use spinney_core::model_file::read_model;
use spinney_core::progress::Silent;
use spinney_core::settings::FitSettings;
use spinney_core::validate::Scheme;

/// The arguments of `spinney explain`.
#[derive(clap::Args)]
pub struct ExplainArgs {
    /// The model file, written by `spinney fit ... --save-model PATH`.
    pub model: PathBuf,
    /// The rows to explain (CSV, TSV, xlsx, ods), with the model's predictors; with the
    /// outcome too for permutation importance. Held-out rows, ideally.
    pub file: PathBuf,
    /// permutation (how much shuffling each predictor on the file's rows worsens the
    /// figure; needs the outcome) or impurity (gain in the trees; cheap, biased).
    #[arg(long, default_value = "permutation", value_name = "KIND")]
    pub importance: String,
    /// Shuffles per predictor for permutation importance.
    #[arg(long, default_value_t = 5, value_name = "R")]
    pub repeats: usize,
    /// The figure permutation importance watches: auc, log_loss, brier, accuracy or rmse
    /// (default: auc for two classes, log_loss for several, rmse for numbers).
    #[arg(long, value_name = "NAME")]
    pub metric: Option<String>,
    /// Shuffle these predictors together as one (repeatable), e.g. --group sbp,dbp.
    #[arg(long = "group", value_name = "COL,COL")]
    pub groups: Vec<String>,
    /// Partial dependence and ICE curves for one predictor or a pair.
    #[arg(long, value_name = "COL[,COL]")]
    pub dependence: Option<String>,
    /// Grid values per number predictor for --dependence (quantiles 5%..95%).
    #[arg(long, default_value_t = 20, value_name = "N")]
    pub grid: usize,
    /// Records whose ICE curves --dependence gives (a seeded sample).
    #[arg(long, default_value_t = 10, value_name = "N")]
    pub ice: usize,
    /// Rows (a seeded sample) for --dependence; 0: every row.
    #[arg(long, default_value_t = 1000, value_name = "N")]
    pub sample: usize,
    /// Per-record contributions (TreeSHAP): row numbers of the file (from 1, e.g. 3,10-12)
    /// or all (then a summary; every value with --json).
    #[arg(long, value_name = "ROWS|all")]
    pub contributions: Option<String>,
    /// Friedman's H for the pairs of this many top predictors (0: none), on 100 sampled rows.
    #[arg(long, default_value_t = 4, value_name = "N")]
    pub interactions: usize,
    /// Seed of the shuffles and samples.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Permutation importance on held-out records too: the model's settings refitted on each
    /// training part of SCHEME (holdout:FRACTION, folds:K[:REPEATS] or groups:K:COLUMN, as
    /// `spinney evaluate --validate`) of FILE, which must be the file the model was trained
    /// on, each predictor shuffled within the part held out.
    #[arg(long = "held-out", value_name = "SCHEME")]
    pub held_out: Option<String>,
    /// Seed of --held-out's splits (default: the model's seed, as `spinney evaluate --seed`
    /// sets both).
    #[arg(long, value_name = "N")]
    pub split_seed: Option<u64>,
    /// The column of row weights the model was fitted with, for --held-out's refits.
    #[arg(long, value_name = "COLUMN")]
    pub weight: Option<String>,
    /// Threads for --held-out's folds (default: every core); the figures are the same.
    #[arg(long)]
    pub threads: Option<usize>,
    /// Print machine-readable JSON instead of a report.
    #[arg(long)]
    pub json: bool,
}

/// Rows for the H statistic (its cost grows with the square).
const H_ROWS: usize = 100;

pub fn explain(args: ExplainArgs) -> anyhow::Result<()> {
    let bytes = std::fs::read(&args.model)
        .with_context(|| format!("cannot read the model file {}", args.model.display()))?;
    let model = read_model(&bytes).map_err(|e| anyhow::anyhow!("{}: {e}", args.model.display()))?;
    let file = args.file.display().to_string();
    let loaded = crate::fit::read(&args.file, model.reading_kinds())?;
    let table = &loaded.table;
    let (records, unseen) = model
        .records(table)
        .map_err(|e| anyhow::anyhow!("{file}: the file does not match the model: {e}"))?;
    let mut notes: Vec<String> = loaded.notices.clone();
    for u in &unseen {
        notes.push(format!(
            "column '{}': {} row(s) hold labels not seen in training (the first: '{}'); they \
             follow {}",
            u.predictor, u.rows, u.example, u.follows
        ));
    }
    if model.partial {
        notes.push(format!(
            "this model is partial (fitting was cancelled after {} member(s))",
            model.members()
        ));
    }
    let training_file = model.training_fingerprint.as_deref() == Some(loaded.fingerprint.as_str());
    if training_file {
        notes.push(
            "this is the file the model was trained on: importance and dependence on it \
             describe the model on rows it has seen (optimistic); explain held-out rows too"
                .into(),
        );
    }
    // Every option checked before any long work.
    let importance_kind = args.importance.as_str();
    if !matches!(importance_kind, "permutation" | "impurity") {
        bail!("--importance {importance_kind}: use permutation or impurity");
    }
    let metric = match &args.metric {
        None => Metric::default_for(&model),
        Some(w) => Metric::from_word(w).with_context(|| {
            let all: Vec<&str> = Metric::ALL.iter().map(|m| m.word()).collect();
            format!("--metric {w}: use one of {}", all.join(", "))
        })?,
    };
    metric
        .check(model.classes.is_some())
        .map_err(|e| anyhow::anyhow!("--metric: {e}"))?;
    if args.repeats == 0 {
        bail!("--repeats 0: give 1 or more shuffles per predictor");
    }
    let named = |text: &str, option: &str| -> anyhow::Result<Vec<usize>> {
        text.split(',')
            .map(|n| {
                predictor_index(&model, n.trim())
                    .map_err(|e| anyhow::anyhow!("{option} {text}: {e}"))
            })
            .collect()
    };
    let mut groups: Vec<Vec<usize>> = Vec::new();
    for g in &args.groups {
        let members = named(g, "--group")?;
        if let Some(j) = members
            .iter()
            .find(|j| groups.iter().any(|g| g.contains(j)))
        {
            bail!(
                "--group {g}: '{}' is already in another group; each predictor can be in one \
                 group only",
                model.predictors[*j].name
            );
        }
        groups.push(members);
    }
    for j in 0..model.predictors.len() {
        if !groups.iter().any(|g| g.contains(&j)) {
            groups.push(vec![j]);
        }
    }
    let dependence_on = match &args.dependence {
        Some(text) => {
            let js = named(text, "--dependence")?;
            if js.len() > 2 || (js.len() == 2 && js[0] == js[1]) {
                bail!("--dependence {text}: give one predictor or a pair of two different ones");
            }
            js
        }
        None => Vec::new(),
    };
    let held_out = match &args.held_out {
        None => None,
        Some(text) => Some(held_out_design(&args, &model, table, text, training_file)?),
    };
    let contribution_rows = match args.contributions.as_deref() {
        None => None,
        Some("all") => Some(None),
        Some(text) => Some(Some(parse_rows(text, records.rows)?)),
    };

    let mut out = json!({
        "format": "spinney-explain", "version": 1,
        "model": { "method": model.method.word(), "outcome": model.outcome, "classes": model.classes,
                   "predictors": model.predictors.iter().map(|p| p.name.clone()).collect::<Vec<_>>() },
        "file": file, "rows": records.rows, "training_file": training_file,
        "caution": CAUTION,
    });
    let names: Vec<String> = model.predictors.iter().map(|p| p.name.clone()).collect();
    let imp = impurity(&model);
    out["impurity"] = json!({ "caution": IMPURITY_CAUTION, "importance": imp });
    let mut ranking: Vec<usize> = (0..names.len()).collect();
    ranking.sort_by(|&a, &b| imp[b].total_cmp(&imp[a]));

    let mut perm: Option<Permutation> = None;
    let mut oob: Option<OutOfBag> = None;
    if importance_kind == "permutation" {
        let (rows, outcome) = model_outcome(&model, table).map_err(|e| {
            anyhow::anyhow!(
                "{file}: permutation importance needs the outcome of the rows: {e}. Or use \
                 --importance impurity"
            )
        })?;
        let kept = records.select_rows(&rows);
        let p = permutation(
            &model,
            &kept,
            &outcome,
            &groups,
            Shuffles {
                metric,
                repeats: args.repeats,
                seed: args.seed,
            },
            &mut Silent,
        )
        .map_err(|e| anyhow::anyhow!("{file}: {e}"))?;
        if training_file && matches!(model.ensemble, Ensemble::Forest(_)) {
            match out_of_bag(&model, &kept, &outcome, args.seed, &mut Silent) {
                Ok(o) => oob = Some(o),
                Err(e) => notes.push(format!("no out-of-bag importance: {e}")),
            }
        }
        let suggested = suggest_groups(&model, &kept, 0.7);
        out["suggested_groups"] = json!(suggested
            .iter()
            .map(|g| g.iter().map(|&j| names[j].clone()).collect::<Vec<_>>())
            .collect::<Vec<_>>());
        out["permutation"] = json!({
            "basis": if training_file { APPARENT } else { "on the file's records" },
            "metric": metric.word(), "baseline": p.baseline, "repeats": args.repeats, "seed": args.seed,
            "rows": kept.rows,
            "entries": p.groups.iter().enumerate().map(|(i, g)| json!({
                "predictors": g.iter().map(|&j| names[j].clone()).collect::<Vec<_>>(),
                "mean": p.mean[i], "spread": p.spread[i], "losses": p.losses[i],
            })).collect::<Vec<_>>(),
        });
        if let Some(o) = &oob {
            out["out_of_bag"] = json!({ "error": o.error, "trees": o.trees, "mean": o.mean, "standard_error": o.standard_error });
        }
        perm = Some(p);
    }
    let mut held: Option<HeldOut> = None;
    if let Some((design, settings, scheme, split_seed)) = &held_out {
        let spread = |count: usize, job: &(dyn Fn(usize) + Sync)| {
            crate::evaluate::spread_jobs(args.threads, count, job)
        };
        let h = held_out_permutation(
            design,
            settings,
            scheme,
            *split_seed,
            &groups,
            Shuffles {
                metric,
                repeats: args.repeats,
                seed: args.seed,
            },
            Some(&spread),
            &mut Silent,
        )
        .map_err(|e| anyhow::anyhow!("--held-out {}: {file}: {e}", scheme.words()))?;
        out["held_out"] = json!({
            "basis": h.words(), "scheme": h.scheme, "split_seed": h.split_seed,
            "metric": metric.word(), "repeats": h.repeats, "seed": h.seed,
            "splits": h.splits(), "baseline": h.baseline(), "fold_baselines": h.baselines,
            // Each split's held-out records as the file's row numbers (from 1).
            "held_out_rows": h.held_out_rows.iter().map(|rows| rows.iter().map(|&r| design.rows[r] + 1).collect::<Vec<_>>()).collect::<Vec<_>>(),
            "entries": h.groups.iter().enumerate().map(|(i, g)| json!({
                "predictors": g.iter().map(|&j| names[j].clone()).collect::<Vec<_>>(),
                "mean": h.mean[i], "spread": h.spread[i], "losses": h.losses[i],
            })).collect::<Vec<_>>(),
        });
        held = Some(h);
    }

    let contrib = match contribution_rows {
        None => None,
        Some(which) => {
            let c = contributions(&model, &records, which.as_deref(), &mut Silent)
                .map_err(|e| anyhow::anyhow!("{file}: {e}"))?;
            out["contributions"] = contributions_json(&c, &records, &model, which.is_none());
            Some(c)
        }
    };

    let mut dependence: Option<Dependence> = None;
    if !dependence_on.is_empty() {
        let rows = if args.sample == 0 {
            (0..records.rows).collect()
        } else {
            sample_rows(records.rows, args.sample, args.seed)
        };
        let sample = records.select_rows(&rows);
        let grids = dependence_on
            .iter()
            .map(|&j| grid(&model, &sample, j, args.grid))
            .collect::<Result<Vec<_>, _>>()
            .map_err(|e| anyhow::anyhow!("--dependence: {file}: {e}"))?;
        let ice: Vec<usize> = sample_rows(sample.rows, args.ice, args.seed);
        let d = partial_dependence(&model, &sample, &grids, &ice, &mut Silent)
            .map_err(|e| anyhow::anyhow!("--dependence: {e}"))?;
        out["dependence"] = json!({
            "predictors": dependence_on.iter().map(|&j| names[j].clone()).collect::<Vec<_>>(),
            "scale": "the model's prediction", "outputs": d.outputs, "rows": sample.rows,
            "grids": d.grids.iter().map(|g| json!({ "values": g.values, "labels": g.labels, "counts": g.counts, "missing": g.missing })).collect::<Vec<_>>(),
            "average": d.average,
            "ice": { "rows": d.ice_rows.iter().map(|&i| rows[i] + 1).collect::<Vec<_>>(), "values": d.ice },
        });
        dependence = Some(d);
    }

    let mut pairs = Vec::new();
    if args.interactions >= 2 {
        let top: Vec<usize> = ranking
            .iter()
            .copied()
            .filter(|&j| imp[j] > 0.0)
            .take(args.interactions)
            .collect();
        if top.len() >= 2 {
            let sample = records.select_rows(&sample_rows(records.rows, H_ROWS, args.seed));
            pairs = interactions(&model, &sample, &top, &mut Silent)
                .map_err(|e| anyhow::anyhow!("{file}: {e}"))?;
            out["interactions"] = json!({
                "rows": sample.rows,
                "pairs": pairs.iter().map(|h| json!({
                    "predictors": [names[h.pair.0].clone(), names[h.pair.1].clone()],
                    "h_squared": h.h_squared, "h": h.h_squared.sqrt(),
                })).collect::<Vec<_>>(),
            });
        }
    }
    out["notes"] = json!(notes);

    if args.json {
        println!("{}", serde_json::to_string_pretty(&out)?);
        return Ok(());
    }
    // The readable report.
    println!(
        "{} model for '{}' ({} predictors) explained on {} rows of {file}",
        model.method.word(),
        model.outcome,
        names.len(),
        records.rows
    );
    println!("{CAUTION}");
    for n in &notes {
        println!("note: {n}");
    }
    println!("\nImpurity importance (share of the trees' total gain):");
    for &j in ranking.iter().take(30) {
        println!("  {:<28} {:>7.4}", names[j], imp[j]);
    }
    println!("  caution: {IMPURITY_CAUTION}");
    if let Some(p) = &perm {
        println!(
            "\nPermutation importance {} ({} rows): loss of {} when shuffled (baseline {:.4}; \
             mean ± sd over {} shuffles, seed {}):",
            out["permutation"]["basis"].as_str().unwrap_or_default(),
            out["permutation"]["rows"],
            p.metric.word(),
            p.baseline,
            args.repeats,
            args.seed
        );
        print_entries(&p.groups, &p.mean, &p.spread, &names);
        if let Some(g) = out["suggested_groups"].as_array().filter(|g| !g.is_empty()) {
            let shown: Vec<String> = g
                .iter()
                .map(|g| {
                    g.as_array()
                        .into_iter()
                        .flatten()
                        .filter_map(Value::as_str)
                        .collect::<Vec<_>>()
                        .join(",")
                })
                .collect();
            println!(
                "  correlated (|r| ≥ 0.7), worth shuffling together: --group {}",
                shown.join(" --group ")
            );
        }
    }
    if let Some(h) = &held {
        println!(
            "\nPermutation importance {} (--held-out {}, split seed {}): the model's settings \
             refitted on each training part, loss of {} when shuffled within the part held out \
             (mean baseline {:.4}); mean ± sd over {} splits × {} shuffles, seed {}:",
            h.words(),
            h.scheme,
            h.split_seed,
            h.metric.word(),
            h.baseline(),
            h.splits(),
            h.repeats,
            h.seed
        );
        print_entries(&h.groups, &h.mean, &h.spread, &names);
    }
    if let Some(o) = &oob {
        println!(
            "\nOut-of-bag permutation importance (Breiman 2001): increase in each tree's {} on \
             its out-of-bag rows, mean ± standard error over {} trees:",
            o.error, o.trees
        );
        let mut order: Vec<usize> = (0..names.len()).collect();
        order.sort_by(|&a, &b| o.mean[b].total_cmp(&o.mean[a]));
        for j in order {
            println!(
                "  {:<28} {:>9.4} ± {:.4}",
                names[j], o.mean[j], o.standard_error[j]
            );
        }
    }
    if let Some(c) = &contrib {
        print_contributions(c, &model, &records);
    }
    if let Some(d) = &dependence {
        print_dependence(d, &model, &names);
    }
    if !pairs.is_empty() {
        println!(
            "\nInteractions, Friedman's H (0: effects add up; near 1: mostly interaction), on {} \
             sampled rows:",
            out["interactions"]["rows"]
        );
        for h in &pairs {
            println!(
                "  {:<40} H = {:.3}",
                format!("{} × {}", names[h.pair.0], names[h.pair.1]),
                h.h_squared.sqrt()
            );
        }
    }
    Ok(())
}

/// Permutation importance entries, largest mean loss first: the predictors (joined by " + "
/// for a group), mean ± sd.
fn print_entries(groups: &[Vec<usize>], mean: &[f64], spread: &[f64], names: &[String]) {
    let mut order: Vec<usize> = (0..groups.len()).collect();
    order.sort_by(|&a, &b| mean[b].total_cmp(&mean[a]));
    for i in order {
        let label: Vec<&str> = groups[i].iter().map(|&j| names[j].as_str()).collect();
        println!(
            "  {:<28} {:>9.4} ± {:.4}",
            label.join(" + "),
            mean[i],
            spread[i]
        );
    }
}

/// What `--held-out SCHEME` refits: the model's design read again from FILE (its
/// predictors, outcome classes in the model's order, `--weight`, the scheme's group column),
/// its settings as the model file records them, the scheme and the seed of its splits. All
/// checked before any long work.
fn held_out_design(
    args: &ExplainArgs,
    model: &Model,
    table: &spinney_core::data::Table,
    text: &str,
    training_file: bool,
) -> anyhow::Result<(spinney_core::design::Design, FitSettings, Scheme, u64)> {
    let scheme = Scheme::parse(text).map_err(|e| anyhow::anyhow!("--held-out {e}"))?;
    if let Some(reason) = why_not_held_out(&scheme) {
        bail!("--held-out {text}: {reason}; use holdout:FRACTION, folds:K[:REPEATS] or groups:K:COLUMN");
    }
    if args.importance != "permutation" {
        bail!(
            "--held-out {text} measures permutation importance; drop --importance {}",
            args.importance
        );
    }
    if !training_file {
        bail!(
            "--held-out {text} refits the model on the file it was trained on, and {} is not \
             that file (its SHA-256 differs from the model's); give the training file, or drop \
             --held-out: importance on new records is already held out",
            args.file.display()
        );
    }
    if model.partial {
        bail!("--held-out {text}: this model is partial (fitting was cancelled), so its settings would refit a different model; fit it again in full");
    }
    let positive = match &model.classes {
        Some(c) if c.len() == 2 => Some(c[1].clone()),
        _ => None,
    };
    let spec = DesignSpec {
        outcome: model.outcome.clone(),
        predictors: model.predictors.iter().map(|p| p.name.clone()).collect(),
        weight: args.weight.clone(),
        group: match &scheme {
            Scheme::Groups { column, .. } => Some(column.clone()),
            _ => None,
        },
        positive,
    };
    let design =
        build_design(table, &spec).map_err(|e| anyhow::anyhow!("--held-out {text}: {e}"))?;
    let classes = match &design.outcome {
        Outcome::Classes { labels, .. } => Some(labels.clone()),
        Outcome::Numbers(_) => None,
    };
    if classes != model.classes || design.predictors.len() != model.predictors.len() {
        bail!("--held-out {text}: the file's outcome or predictors no longer match the model's; refit it");
    }
    let settings = FitSettings::from_described(
        model.method,
        design.predictors.len(),
        classes.is_none(),
        &model.outcome,
        &model.settings,
    )
    .map_err(|e| anyhow::anyhow!("--held-out {text}: the model file's settings: {e}"))?;
    Ok((
        design,
        settings,
        scheme,
        args.split_seed.unwrap_or(model.seed),
    ))
}

/// Row numbers from 1 ("3,10-12") as 0-based indices, checked against `rows`.
fn parse_rows(text: &str, rows: usize) -> anyhow::Result<Vec<usize>> {
    let mut out = Vec::new();
    let bad = || {
        anyhow::anyhow!(
            "--contributions {text}: give row numbers from 1 to {rows} (e.g. 3,10-12) or all"
        )
    };
    for part in text.split(',') {
        let (a, b) = match part.trim().split_once('-') {
            Some((a, b)) => (a.trim(), b.trim()),
            None => (part.trim(), part.trim()),
        };
        let (a, b): (usize, usize) = (a.parse().map_err(|_| bad())?, b.parse().map_err(|_| bad())?);
        if a == 0 || b < a || b > rows {
            return Err(bad());
        }
        out.extend(a - 1..b);
    }
    Ok(out)
}

fn contributions_json(c: &Contributions, records: &Records, model: &Model, all: bool) -> Value {
    let k = c.outputs;
    let mean_abs = c.mean_abs();
    let rows: Vec<Value> = c
        .rows
        .iter()
        .enumerate()
        .map(|(i, &r)| {
            let v = c.row(i);
            json!({
                "row": r + 1,
                "values": (0..c.predictors).map(|j| records.value(j, r)).map(|x| if x.is_nan() { Value::Null } else { json!(x) }).collect::<Vec<_>>(),
                "labels": (0..c.predictors).map(|j| { let x = records.value(j, r); if x.is_nan() { String::new() } else { label_of(model, j, x) } }).collect::<Vec<_>>(),
                "contributions": (0..c.predictors).map(|j| v[j * k..(j + 1) * k].to_vec()).collect::<Vec<_>>(),
            })
        })
        .collect();
    json!({
        "method": "TreeSHAP, path-dependent (Lundberg et al. 2020)",
        "scale": c.scale, "outputs": c.output_names, "base": c.base,
        "all_rows": all,
        "mean_abs": (0..c.predictors).map(|j| mean_abs[j * k..(j + 1) * k].to_vec()).collect::<Vec<_>>(),
        "rows": rows,
    })
}

fn print_contributions(c: &Contributions, model: &Model, records: &Records) {
    let k = c.outputs;
    // For two class probabilities the second is the first's mirror image: show the last.
    let shown: Vec<usize> = if k == 2 && model.classes.is_some() {
        vec![1]
    } else {
        (0..k).collect()
    };
    let names: Vec<&str> = model.predictors.iter().map(|p| p.name.as_str()).collect();
    println!(
        "\nContributions (TreeSHAP, path-dependent; Lundberg et al. 2020) on the scale: {}",
        c.scale
    );
    let mean_abs = c.mean_abs();
    println!("  mean |contribution| over {} rows:", c.rows.len());
    for &o in &shown {
        let mut order: Vec<usize> = (0..c.predictors).collect();
        order.sort_by(|&a, &b| mean_abs[b * k + o].total_cmp(&mean_abs[a * k + o]));
        println!("  {}:", c.output_names[o]);
        for j in order.into_iter().take(30) {
            println!("    {:<28} {:>9.4}", names[j], mean_abs[j * k + o]);
        }
    }
    if c.rows.len() > 20 {
        return;
    }
    for (i, &r) in c.rows.iter().enumerate() {
        let v = c.row(i);
        for &o in &shown {
            let total: f64 = c.base[o] + (0..c.predictors).map(|j| v[j * k + o]).sum::<f64>();
            println!(
                "  row {}, {}: base {:.4} + contributions = {:.4}",
                r + 1,
                c.output_names[o],
                c.base[o],
                total
            );
            let mut order: Vec<usize> = (0..c.predictors).collect();
            order.sort_by(|&a, &b| v[b * k + o].abs().total_cmp(&v[a * k + o].abs()));
            for j in order.into_iter().filter(|&j| v[j * k + o] != 0.0).take(10) {
                let x = records.value(j, r);
                let value = if x.is_nan() {
                    "missing".to_string()
                } else {
                    label_of(model, j, x)
                };
                println!(
                    "    {:<28} = {:<14} {:>+9.4}",
                    names[j],
                    value,
                    v[j * k + o]
                );
            }
        }
    }
}

fn print_dependence(d: &Dependence, model: &Model, names: &[String]) {
    let k = model.outputs();
    let shown: Vec<usize> = if k == 2 { vec![1] } else { (0..k).collect() };
    let on: Vec<&str> = d
        .grids
        .iter()
        .map(|g| names[g.predictor].as_str())
        .collect();
    println!(
        "\nPartial dependence on {} (mean prediction with the value set in every row; rows \
         nearest each value alongside):",
        on.join(" and ")
    );
    let header: Vec<&str> = shown.iter().map(|&o| d.outputs[o].as_str()).collect();
    match d.grids.as_slice() {
        [g] => {
            println!("  {:<20} {:>7}  {}", on[0], "rows", header.join("  "));
            for (c, label) in g.labels.iter().enumerate() {
                let values: Vec<String> = shown
                    .iter()
                    .map(|&o| format!("{:.4}", d.average[c * k + o]))
                    .collect();
                println!("  {:<20} {:>7}  {}", label, g.counts[c], values.join("  "));
            }
            if g.missing > 0 {
                println!("  ({} rows have no value)", g.missing);
            }
        }
        [a, b] => {
            for &o in &shown {
                println!("  {} (rows: {}, columns: {}):", d.outputs[o], on[0], on[1]);
                println!(
                    "  {:<16} {}",
                    "",
                    b.labels
                        .iter()
                        .map(|l| format!("{l:>10.10}"))
                        .collect::<String>()
                );
                for (i, label) in a.labels.iter().enumerate() {
                    let row: String = (0..b.values.len())
                        .map(|j| format!("{:>10.4}", d.average[(i * b.values.len() + j) * k + o]))
                        .collect();
                    println!("  {label:<16.16} {row}");
                }
            }
        }
        _ => {}
    }
}
