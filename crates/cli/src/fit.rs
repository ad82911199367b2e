//! `spinney fit FILE --outcome COL`: fits a model on all rows and reports it. This first
//! version fits a single tree (`--method tree`); the ensembles of issue 3 come next.
//! `--json` prints the tree node by node (predictor, threshold, where missing values go,
//! children, values), which tests/reference/check_tree.py compares with scikit-learn.

use anyhow::{bail, Context};
use spinney_core::binning::{bin_design, BinSettings};
use spinney_core::data::{read_table, ReadOptions};
use spinney_core::design::{build_design, DesignSpec, Outcome};
use spinney_core::progress::Silent;
use spinney_core::tree::criterion::Criterion;
use spinney_core::tree::grower::{grow, GrowSettings};
use spinney_core::tree::missing_goes_left;

/// Settings of `fit`, with their defaults (listed in README.md).
pub struct FitArgs {
    pub file: std::path::PathBuf,
    pub outcome: String,
    pub predictors: Option<Vec<String>>,
    pub method: String,
    pub sets: Vec<String>,
    pub json: bool,
}

fn parse_sets(
    sets: &[String],
    settings: &mut GrowSettings,
    bins: &mut BinSettings,
    regression: bool,
) -> anyhow::Result<()> {
    settings.criterion = if regression {
        Criterion::SquaredError
    } else {
        Criterion::Gini
    };
    for s in sets {
        let (name, value) = s
            .split_once('=')
            .with_context(|| format!("--set {s:?}: write NAME=VALUE"))?;
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
            other => bail!(
                "--set {other}: unknown setting; a tree takes depth, leaf_size, split_size, bins, criterion, min_gain"
            ),
        }
    }
    Ok(())
}

pub fn fit(args: FitArgs) -> anyhow::Result<()> {
    if args.method != "tree" {
        bail!("--method {}: this version fits single trees only (--method tree); ensembles are being built", args.method);
    }
    let bytes = std::fs::read(&args.file)
        .with_context(|| format!("cannot read {}", args.file.display()))?;
    let options = ReadOptions {
        file_name: args
            .file
            .file_name()
            .map(|n| n.to_string_lossy().into_owned()),
        ..ReadOptions::default()
    };
    let loaded = read_table(&bytes, &options, &mut Silent)
        .map_err(|e| anyhow::anyhow!("{}: {e}", args.file.display()))?;
    // By default every other column, except free text and identifiers.
    let predictors = args.predictors.unwrap_or_else(|| {
        loaded
            .table
            .columns
            .iter()
            .filter(|c| c.name != args.outcome && c.kind != spinney_core::data::Kind::Text)
            .map(|c| c.name.clone())
            .collect()
    });
    let spec = DesignSpec {
        outcome: args.outcome.clone(),
        predictors,
        ..DesignSpec::default()
    };
    let design = build_design(&loaded.table, &spec)?;
    let regression = matches!(design.outcome, Outcome::Numbers(_));
    let mut settings = GrowSettings::default();
    let mut bins = BinSettings::default();
    parse_sets(&args.sets, &mut settings, &mut bins, regression)?;
    let binned = bin_design(&design, bins)?;
    let (stats, width) = match &design.outcome {
        Outcome::Classes { codes, labels } => {
            let k = labels.len();
            let mut s = vec![0.0; codes.len() * k];
            for (r, &c) in codes.iter().enumerate() {
                s[r * k + c as usize] = 1.0;
            }
            (s, k)
        }
        Outcome::Numbers(v) => (v.iter().flat_map(|&y| [1.0, y]).collect(), 2),
    };
    let rows: Vec<u32> = (0..binned.rows as u32).collect();
    let tree = grow(&binned, &stats, width, &rows, &settings, None);

    // Training fit (apparent performance, not validation).
    let training = match &design.outcome {
        Outcome::Classes { codes, .. } => {
            let right = (0..binned.rows)
                .filter(|&r| {
                    let p = tree.predict_row(&binned, r);
                    let best = (0..p.len()).fold(0, |b, k| if p[k] > p[b] { k } else { b });
                    best == codes[r] as usize
                })
                .count();
            ("accuracy", right as f64 / binned.rows as f64)
        }
        Outcome::Numbers(v) => {
            let sse: f64 = (0..binned.rows)
                .map(|r| (tree.predict_row(&binned, r)[0] - v[r]).powi(2))
                .sum();
            ("rmse", (sse / binned.rows as f64).sqrt())
        }
    };
    let nodes: Vec<serde_json::Value> = tree
        .nodes
        .iter()
        .map(|n| {
            let values = &tree.values[n.value as usize..n.value as usize + tree.outputs];
            if n.is_leaf() {
                return serde_json::json!({ "leaf": true, "weight": n.weight, "values": values });
            }
            let col = &binned.columns[n.feature as usize];
            let threshold = n.threshold;
            let left_bins: Vec<u8> = (0..=254u8).filter(|&b| n.left_bins.contains(b)).collect();
            serde_json::json!({
                "leaf": false, "predictor": col.name, "feature": n.feature, "threshold": threshold,
                "left_bins": left_bins, "missing_left": missing_goes_left(n),
                "left": n.left, "right": n.right, "weight": n.weight, "gain": n.gain, "values": values,
            })
        })
        .collect();
    let classes = match &design.outcome {
        Outcome::Classes { labels, .. } => Some(labels.clone()),
        Outcome::Numbers(_) => None,
    };
    if args.json {
        let out = serde_json::json!({
            "format": "spinney-fit", "version": 1, "method": "tree",
            "outcome": design.outcome_name, "classes": classes, "rows": binned.rows,
            "predictors": binned.columns.iter().map(|c| c.name.clone()).collect::<Vec<_>>(),
            "training": { training.0: training.1 },
            "depth": tree.depth(), "leaves": tree.leaves(), "nodes": nodes,
            "notices": design.notices,
        });
        println!("{}", serde_json::to_string_pretty(&out)?);
    } else {
        println!(
            "single tree for '{}' on {} rows and {} predictors: depth {}, {} leaves",
            design.outcome_name,
            binned.rows,
            binned.columns.len(),
            tree.depth(),
            tree.leaves()
        );
        println!(
            "training {} {:.4} (apparent fit on the same rows, not a validation)",
            training.0, training.1
        );
        for n in &design.notices {
            println!("  - {n}");
        }
    }
    Ok(())
}
