//! Benchmark (figures printed, never asserted): a 2,000-resample percentile bootstrap of the
//! AUC on 50,000 rows (one thread, then every core through a `Spread` of scoped threads, as
//! the command line's rayon spread does), the other two-class figures on the same rows, and
//! judging (every two-class figure with its bootstrap interval, 1,000 resamples, one thread)
//! of predictions that take a value a row (as the baseline's do: each row its own calibration
//! group) and of a 300-tree forest's vote shares.
//! Run on an idle machine:
//! `cargo run --release -p spinney-core --example metrics_bench [ROWS] [RESAMPLES]`.

use std::sync::atomic::{AtomicUsize, Ordering};
use std::time::Instant;

use rand_chacha::rand_core::RngCore;
use spinney_core::design::Outcome;
use spinney_core::metrics::{binary, bootstrap, curves};
use spinney_core::random::{stream, Purpose};
use spinney_core::spread::Spread;
use spinney_core::validate::{judge, JudgeSettings};

fn main() {
    let mut args = std::env::args().skip(1);
    let rows: usize = args.next().and_then(|a| a.parse().ok()).unwrap_or(50_000);
    let resamples: usize = args.next().and_then(|a| a.parse().ok()).unwrap_or(2_000);
    // Invented predictions: a risk score with outcomes drawn from it (seeded).
    let mut rng = stream(1, Purpose::MetricResample, u64::MAX);
    let mut unit = || (rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64;
    let p: Vec<f64> = (0..rows).map(|_| unit().powi(2)).collect();
    let y: Vec<u32> = p.iter().map(|&q| u32::from(unit() < q)).collect();

    let start = Instant::now();
    let a = binary::auc(&y, &p).expect("auc");
    println!(
        "AUC with DeLong SE, {rows} rows: {:.1} ms (AUC {:.4}, SE {:.4})",
        ms(start),
        a.value,
        a.se_delong.unwrap_or(f64::NAN)
    );

    let ranked = binary::RankedScores::new(&y, &p).expect("ranked");
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    // Every core: each thread takes the next job until none is left.
    let on_threads = |count: usize, job: &(dyn Fn(usize) + Sync)| {
        let next = AtomicUsize::new(0);
        std::thread::scope(|s| {
            for _ in 0..cores {
                s.spawn(|| loop {
                    let i = next.fetch_add(1, Ordering::Relaxed);
                    if i >= count {
                        break;
                    }
                    job(i);
                });
            }
        });
    };
    let mut intervals = Vec::new();
    for (threads, spread) in [(1, None), (cores, Some(&on_threads as Spread<'_>))] {
        let start = Instant::now();
        let b = bootstrap(rows, resamples, 0.95, 42, spread, |w| ranked.auc(Some(w)))
            .expect("bootstrap");
        println!(
            "bootstrap AUC, {resamples} resamples of {rows} rows, {threads} thread(s): {:.1} ms \
             (95% {:.4}–{:.4}; DeLong {:.4}–{:.4})",
            ms(start),
            b.low,
            b.high,
            a.interval.map_or(f64::NAN, |i| i.low),
            a.interval.map_or(f64::NAN, |i| i.high)
        );
        intervals.push(b);
        let start = Instant::now();
        bootstrap(rows, resamples, 0.95, 42, spread, |_| Some(0.0)).expect("bootstrap");
        println!(
            "  of which drawing the resamples (metric doing nothing): {:.1} ms",
            ms(start)
        );
    }
    println!(
        "  the same interval on 1 and {cores} thread(s): {}",
        intervals.windows(2).all(|w| w[0] == w[1])
    );

    let start = Instant::now();
    let c = binary::calibration(&y, &p, None).expect("calibration");
    println!(
        "calibration intercept and slope: {:.1} ms (slope {:.3})",
        ms(start),
        c.slope
    );
    let start = Instant::now();
    curves::smoothed_calibration(&y, &p, 50).expect("smooth");
    println!("smoothed calibration curve, 50 points: {:.1} ms", ms(start));
    let start = Instant::now();
    let thresholds: Vec<f64> = (1..100).map(|t| t as f64 / 100.0).collect();
    curves::decision_curve(&y, &p, &thresholds).expect("decision curve");
    println!("decision curve, 99 thresholds: {:.1} ms", ms(start));

    let outcome = Outcome::Classes {
        codes: y.clone(),
        labels: vec!["no".into(), "yes".into()],
    };
    let settings = JudgeSettings {
        threshold: 0.5,
        resamples: 1_000,
        seed: 42,
    };
    let votes = |q: f64| (q * 300.0).round() / 300.0;
    for (what, shares) in [
        ("a value a row", p.clone()),
        (
            "300 trees' vote shares",
            p.iter().map(|&q| votes(q)).collect(),
        ),
    ] {
        let predictions: Vec<f64> = shares.iter().flat_map(|&q| [1.0 - q, q]).collect();
        let start = Instant::now();
        let judged = judge(&outcome, &predictions, &settings, None);
        let slope = &judged.metrics["calibration_slope"];
        println!(
            "judging {rows} rows ({what}), every figure with its interval, 1,000 resamples, \
             1 thread: {:.1} ms (calibration slope {:.3}, 95% {:.3}–{:.3})",
            ms(start),
            slope.value,
            slope.low.unwrap_or(f64::NAN),
            slope.high.unwrap_or(f64::NAN)
        );
    }
}

fn ms(start: Instant) -> f64 {
    start.elapsed().as_secs_f64() * 1000.0
}
