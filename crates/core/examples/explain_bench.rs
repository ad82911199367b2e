//! Benchmark (figures printed, never asserted) of the explanations on one core: TreeSHAP
//! contributions for every row of a 300-tree, depth-8 random forest on 50,000 × 30 (target
//! under 30 s), and permutation importance with 5 shuffles of each of the 30 predictors on
//! 10,000 rows with the same forest (target under 10 s); also partial dependence on a
//! 20-value grid over 1,000 rows and Friedman's H for 4 predictors on 100 rows. Run on an
//! idle machine: `scripts/bench explain` or
//! `cargo run --release -p spinney-core --example explain_bench [ROWS] [TREES] [PART]`, PART
//! one of `all` (the default), `shap`, `importance` or `fit` (only the forest; for counting
//! one part's instructions under callgrind, less the `fit` run's).

use std::time::Instant;

use rand_chacha::rand_core::RngCore;
use spinney_core::binning::{bin_design, records_from_table, BinSettings};
use spinney_core::data::{read_table, ReadOptions};
use spinney_core::design::{build_design, DesignSpec};
use spinney_core::ensemble::forest::{fit_forest, ForestSettings};
use spinney_core::explain::dependence::{grid, interactions, partial_dependence};
use spinney_core::explain::importance::{permutation, Metric, Shuffles};
use spinney_core::explain::shap::contributions;
use spinney_core::model::{predictors_of, Ensemble, Method, Model};
use spinney_core::progress::Silent;
use spinney_core::random::{stream, Purpose};

const PREDICTORS: usize = 30;

/// Seconds this process has run on a CPU (Linux `/proc/self/schedstat`; NaN elsewhere): on a
/// shared machine the wall-clock figures also count other programs' turns.
fn cpu_seconds() -> f64 {
    std::fs::read_to_string("/proc/self/schedstat")
        .ok()
        .and_then(|s| s.split_whitespace().next()?.parse::<f64>().ok())
        .map_or(f64::NAN, |ns| ns / 1e9)
}

/// Wall-clock and CPU seconds since `start`.
fn took(start: (Instant, f64)) -> String {
    format!(
        "{:.1} s wall, {:.1} s CPU",
        start.0.elapsed().as_secs_f64(),
        cpu_seconds() - start.1
    )
}

fn now() -> (Instant, f64) {
    (Instant::now(), cpu_seconds())
}

fn main() {
    let mut args = std::env::args().skip(1);
    let rows: usize = args.next().and_then(|a| a.parse().ok()).unwrap_or(50_000);
    let trees: usize = args.next().and_then(|a| a.parse().ok()).unwrap_or(300);
    let part = args.next().unwrap_or_else(|| "all".into());
    let run = |what: &str| part == "all" || part == what;
    // Invented data: 30 uniform predictors, a two-class outcome drawn from a logistic model
    // of the first six (with an interaction), seeded.
    let mut rng = stream(7, Purpose::ExplainSample, u64::MAX);
    let mut unit = || (rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64;
    let mut text = String::from("y");
    for j in 0..PREDICTORS {
        text += &format!(",x{j}");
    }
    text.push('\n');
    for _ in 0..rows {
        let x: Vec<f64> = (0..PREDICTORS).map(|_| unit()).collect();
        let eta = 3.0 * (x[0] - 0.5) + 2.0 * (x[1] - 0.5) + 4.0 * (x[2] - 0.5) * (x[3] - 0.5) * 4.0
            - 2.0 * (x[4] - 0.5)
            + (x[5] > 0.7) as u8 as f64;
        let y = unit() < 1.0 / (1.0 + (-eta).exp());
        text += if y { "yes" } else { "no" };
        for v in &x {
            text += &format!(",{v:.5}");
        }
        text.push('\n');
    }
    let table = read_table(text.as_bytes(), &ReadOptions::default(), &mut Silent)
        .expect("read")
        .table;
    let names: Vec<String> = (0..PREDICTORS).map(|j| format!("x{j}")).collect();
    let design = build_design(
        &table,
        &DesignSpec {
            outcome: "y".into(),
            predictors: names,
            ..DesignSpec::default()
        },
    )
    .expect("design");
    let binned = bin_design(&design, BinSettings::default()).expect("bins");
    let (stats, width) = design.row_statistics(false);
    let mut settings = ForestSettings::random_forest(PREDICTORS, false, 1);
    settings.trees = trees;
    settings.grow.max_depth = Some(8);
    let start = Instant::now();
    let forest = fit_forest(
        &binned,
        &stats,
        width,
        &design.outcome,
        &settings,
        &mut Silent,
    );
    let leaves: usize = forest.trees.iter().map(|t| t.leaves()).sum();
    println!(
        "fit: {trees} trees of depth 8 on {rows} x {PREDICTORS}: {:.1} s (mean {:.0} leaves a tree)",
        start.elapsed().as_secs_f64(),
        leaves as f64 / trees as f64
    );
    let model = Model {
        method: Method::Forest,
        outcome: "y".into(),
        classes: Some(vec!["no".into(), "yes".into()]),
        predictors: predictors_of(&design, &binned),
        ensemble: Ensemble::Forest(forest),
        settings: Default::default(),
        seed: 1,
        training_fingerprint: None,
        training_rows: rows,
        partial: false,
    };
    let records = records_from_table(&binned.columns, &table).expect("records");

    if run("shap") {
        let start = now();
        let c = contributions(&model, &records, None, &mut Silent).expect("shap");
        let cpu = cpu_seconds() - start.1;
        println!(
            "TreeSHAP, every row: {rows} rows x {trees} trees: {} ({:.2} µs CPU per row and tree; target < 30 s; sum of |contributions| {:.12e})",
            took(start),
            cpu * 1e6 / (rows * trees) as f64,
            c.values.iter().map(|v| v.abs()).sum::<f64>()
        );
    }

    if run("importance") {
        let held: Vec<usize> = (0..rows.min(10_000)).collect();
        let held_out = records.select_rows(&held);
        let spinney_core::design::Outcome::Classes { codes, labels } = &design.outcome else {
            unreachable!()
        };
        let outcome = spinney_core::design::Outcome::Classes {
            codes: held.iter().map(|&r| codes[r]).collect(),
            labels: labels.clone(),
        };
        let groups: Vec<Vec<usize>> = (0..PREDICTORS).map(|j| vec![j]).collect();
        let start = now();
        let p = permutation(
            &model,
            &held_out,
            &outcome,
            &groups,
            Shuffles {
                metric: Metric::Auc,
                repeats: 5,
                seed: 1,
            },
            &mut Silent,
        )
        .expect("permutation");
        println!(
            "permutation importance, 5 shuffles x {PREDICTORS} predictors on {} rows, {trees} trees: {} (AUC {:.4}, x0 loses {:.4}; target < 10 s; sum of mean losses {:.15e})",
            held_out.rows,
            took(start),
            p.baseline,
            p.mean[0],
            p.mean.iter().sum::<f64>()
        );
    }
    if part != "all" {
        return;
    }

    let sample = records.select_rows(&(0..rows.min(1_000)).collect::<Vec<_>>());
    let start = now();
    let g = grid(&model, &sample, 0, 20).expect("grid");
    partial_dependence(&model, &sample, &[g], &[0, 1, 2], &mut Silent).expect("pd");
    println!(
        "partial dependence, 20 values x {} rows: {}",
        sample.rows,
        took(start)
    );
    let small = records.select_rows(&(0..rows.min(100)).collect::<Vec<_>>());
    let start = now();
    interactions(&model, &small, &[0, 1, 2, 3], &mut Silent).expect("h");
    println!(
        "Friedman's H, 6 pairs of 4 predictors on {} rows: {}",
        small.rows,
        took(start)
    );
}
