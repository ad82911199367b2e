//! Benchmark (figures printed, never asserted) of the explanations on one core: TreeSHAP
//! contributions for every row of a 300-tree, depth-8 random forest on 50,000 × 30 (target
//! under 30 s), and permutation importance with 5 shuffles of each of the 30 predictors on
//! 10,000 rows with the same forest (target under 10 s); also partial dependence on a
//! 20-value grid over 1,000 rows and Friedman's H for 4 predictors on 100 rows; and
//! permutation importance on held-out records of a 100-round gradient boosting run judged by
//! 5 folds (5 refits, 5 shuffles of each predictor in each fold), on one thread and on every
//! core (std threads as the `Spread`). Run on an idle machine: `scripts/bench explain` or
//! `cargo run --release -p spinney-core --example explain_bench [ROWS] [TREES] [PART]`, PART
//! one of `all` (the default), `shap`, `importance`, `held_out` or `fit` (only the forest;
//! for counting one part's instructions under callgrind, less the `fit` run's).

#[path = "common/explain_workload.rs"]
mod workload;

use std::time::Instant;

use spinney_core::explain::dependence::{grid, interactions, partial_dependence};
use spinney_core::explain::held_out::held_out_permutation;
use spinney_core::explain::importance::{Metric, Shuffles};
use spinney_core::model::Method;
use spinney_core::progress::Silent;
use spinney_core::settings::FitSettings;
use spinney_core::validate::Scheme;
use workload::PREDICTORS;

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

/// Seconds every thread of this process has run on a CPU (Linux `/proc/self/stat` user and
/// system time, in USER_HZ ticks, 100 a second on Linux; NaN elsewhere).
fn process_cpu_seconds() -> f64 {
    std::fs::read_to_string("/proc/self/stat")
        .ok()
        .and_then(|s| {
            // Fields after the command name (which ends at the last ')'): utime is the 12th.
            let rest = &s[s.rfind(')')? + 2..];
            let f: Vec<&str> = rest.split_whitespace().collect();
            Some((f.get(11)?.parse::<f64>().ok()? + f.get(12)?.parse::<f64>().ok()?) / 100.0)
        })
        .unwrap_or(f64::NAN)
}

/// The machine's load averages (Linux `/proc/loadavg`), printed beside the figures.
fn load() -> String {
    std::fs::read_to_string("/proc/loadavg")
        .map(|l| l.split_whitespace().take(3).collect::<Vec<_>>().join(" "))
        .unwrap_or_else(|_| "unknown".into())
}

/// Runs jobs `0..count` on `threads` std threads, each taking the next index.
fn on_threads(threads: usize, count: usize, job: &(dyn Fn(usize) + Sync)) {
    let next = std::sync::atomic::AtomicUsize::new(0);
    std::thread::scope(|s| {
        for _ in 0..threads {
            s.spawn(|| loop {
                let i = next.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
                if i >= count {
                    break;
                }
                job(i);
            });
        }
    });
}

/// Held-out permutation importance of a 100-round boosting run judged by 5 folds, on one
/// thread and on every core.
fn held_out(data: &workload::Data) {
    let settings = FitSettings::build(
        Method::Boosting,
        PREDICTORS,
        false,
        "y",
        &[("rounds".into(), "100".into())],
    )
    .expect("settings");
    let scheme = Scheme::Folds { k: 5, repeats: 1 };
    let groups: Vec<Vec<usize>> = (0..PREDICTORS).map(|j| vec![j]).collect();
    let shuffles = Shuffles {
        metric: Metric::Auc,
        repeats: 5,
        seed: 1,
    };
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    let mut first = None;
    for threads in [1, cores] {
        let spread = |count: usize, job: &(dyn Fn(usize) + Sync)| on_threads(threads, count, job);
        let (wall, cpu) = (Instant::now(), process_cpu_seconds());
        let load_before = load();
        let h = held_out_permutation(
            &data.design,
            &settings,
            &scheme,
            1,
            &groups,
            shuffles,
            Some(&spread),
            &mut Silent,
        )
        .expect("held-out importance");
        println!(
            "held-out permutation importance, boosting 100 rounds, 5 folds x 5 shuffles x {PREDICTORS} predictors on {} x {PREDICTORS}, {threads} thread(s): {:.1} s wall, {:.1} s CPU (all threads) (load before {load_before}, after {}; mean AUC {:.4}, x0 loses {:.4}; sum of mean losses {:.15e})",
            data.rows,
            wall.elapsed().as_secs_f64(),
            process_cpu_seconds() - cpu,
            load(),
            h.baseline(),
            h.mean[0],
            h.mean.iter().sum::<f64>()
        );
        match &first {
            None => first = Some(h),
            Some(f) => assert_eq!(f, &h, "threads changed the figures"),
        }
    }
}

fn main() {
    let mut args = std::env::args().skip(1);
    let rows: usize = args.next().and_then(|a| a.parse().ok()).unwrap_or(50_000);
    let trees: usize = args.next().and_then(|a| a.parse().ok()).unwrap_or(300);
    let part = args.next().unwrap_or_else(|| "all".into());
    let run = |what: &str| part == "all" || part == what;
    let data = workload::data(rows);
    if part == "held_out" {
        return held_out(&data);
    }
    let start = Instant::now();
    let fitted = workload::fit(&data, trees);
    println!(
        "fit: {trees} trees of depth 8 on {rows} x {PREDICTORS}: {:.1} s (mean {:.0} leaves a tree)",
        start.elapsed().as_secs_f64(),
        fitted.leaves
    );
    let (model, records) = (&fitted.model, &fitted.records);

    if run("shap") {
        let start = now();
        let total = workload::shap(&fitted);
        let cpu = cpu_seconds() - start.1;
        println!(
            "TreeSHAP, every row: {rows} rows x {trees} trees: {} ({:.2} µs CPU per row and tree; target < 30 s; sum of |contributions| {total:.12e})",
            took(start),
            cpu * 1e6 / (rows * trees) as f64,
        );
    }

    if run("importance") {
        let start = now();
        let (p, held) = workload::importance(&fitted);
        println!(
            "permutation importance, 5 shuffles x {PREDICTORS} predictors on {held} rows, {trees} trees: {} (AUC {:.4}, x0 loses {:.4}; target < 10 s; sum of mean losses {:.15e})",
            took(start),
            p.baseline,
            p.mean[0],
            p.mean.iter().sum::<f64>()
        );
    }
    if part != "all" {
        return;
    }
    held_out(&data);

    let sample = records.select_rows(&(0..rows.min(1_000)).collect::<Vec<_>>());
    let start = now();
    let g = grid(model, &sample, 0, 20).expect("grid");
    partial_dependence(model, &sample, &[g], &[0, 1, 2], &mut Silent).expect("pd");
    println!(
        "partial dependence, 20 values x {} rows: {}",
        sample.rows,
        took(start)
    );
    let small = records.select_rows(&(0..rows.min(100)).collect::<Vec<_>>());
    let start = now();
    interactions(model, &small, &[0, 1, 2, 3], &mut Silent).expect("h");
    println!(
        "Friedman's H, 6 pairs of 4 predictors on {} rows: {}",
        small.rows,
        took(start)
    );
}
