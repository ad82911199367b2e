//! Benchmark (figures printed, never asserted) of one fold's worth of random-forest work on
//! one core, the unit that 5-fold cross-validation repeats five times: growing fully grown
//! trees (√p predictors per split) on a bootstrap of 40,000 of the rows of the validation
//! benchmark's table (`tests/reference/bench_validation.py`: 30 normal predictors, a
//! two-class outcome from a logistic model of six), then walking rows through them.
//! `cargo run --release -p spinney-core --example grow_bench [ROWS] [TREES]`; under
//! callgrind, pass few trees.

use std::time::Instant;

use rand_chacha::rand_core::RngCore;
use spinney_core::binning::{bin_design, BinSettings};
use spinney_core::data::{read_table, ReadOptions};
use spinney_core::design::{build_design, DesignSpec};
use spinney_core::ensemble::forest::{fit_forest, ForestSettings};
use spinney_core::progress::Silent;
use spinney_core::random::{stream, Purpose};
use spinney_core::tree::walk::Walk;
use spinney_core::tree::Rows;

const PREDICTORS: usize = 30;

/// A standard normal draw (Box–Muller) from a seeded stream.
fn normal(rng: &mut impl RngCore) -> f64 {
    let u = ((rng.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64;
    let v = (rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64;
    (-2.0 * u.ln()).sqrt() * (std::f64::consts::TAU * v).cos()
}

fn main() {
    let mut args = std::env::args().skip(1);
    let rows: usize = args.next().and_then(|a| a.parse().ok()).unwrap_or(40_000);
    let trees: usize = args.next().and_then(|a| a.parse().ok()).unwrap_or(60);
    // "numbers": a number outcome (the logistic model's linear part plus noise) instead;
    // "mixed": the last five predictors as categories and a tenth of x6..x11 missing.
    let kind = args.next().unwrap_or_default();
    // "gaps": a tenth of x6..x11 missing, every predictor a number.
    let (numbers, mixed, gaps) = (kind == "numbers", kind == "mixed", kind == "gaps");
    let mut rng = stream(5, Purpose::ExplainSample, u64::MAX);
    let beta = [1.0, -0.8, 0.6, 0.5, -0.4, 0.3];
    let mut text = String::from("y");
    for j in 0..PREDICTORS {
        text += &format!(",x{j}");
    }
    text.push('\n');
    for _ in 0..rows {
        let x: Vec<f64> = (0..PREDICTORS).map(|_| normal(&mut rng)).collect();
        let eta: f64 = x.iter().zip(beta).map(|(a, b)| a * b).sum::<f64>() - 1.0;
        let u = (rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64;
        if numbers {
            text += &format!("{:.6}", eta + normal(&mut rng));
        } else if u < 1.0 / (1.0 + (-eta).exp()) {
            text += "1";
        } else {
            text += "0";
        }
        for (j, v) in x.iter().enumerate() {
            if mixed && j >= PREDICTORS - 5 {
                text += ["a", "b", "c", "d", "e", "f"][((v + 3.0).clamp(0.0, 5.9)) as usize];
                text.insert(text.len() - 1, ',');
            } else if (mixed || gaps) && (6..12).contains(&j) && rng.next_u64().is_multiple_of(10) {
                text += ",NA";
            } else {
                text += &format!(",{v:.6}");
            }
        }
        text.push('\n');
    }
    let table = read_table(text.as_bytes(), &ReadOptions::default(), &mut Silent)
        .expect("read")
        .table;
    let design = build_design(
        &table,
        &DesignSpec {
            outcome: "y".into(),
            predictors: (0..PREDICTORS).map(|j| format!("x{j}")).collect(),
            ..DesignSpec::default()
        },
    )
    .expect("design");
    let binned = bin_design(&design, BinSettings::default()).expect("bins");
    let (stats, width) = design.row_statistics(false);
    let mut settings = ForestSettings::random_forest(PREDICTORS, numbers, 1);
    settings.trees = trees;

    let start = Instant::now();
    let forest = fit_forest(
        &binned,
        &stats,
        width,
        &design.outcome,
        &settings,
        &mut Silent,
    );
    let fit = start.elapsed().as_secs_f64();
    // A fingerprint of every split and value, so a change meant only to be faster can be
    // seen to grow the same trees (FNV-1a over the fields' bits).
    let mut print = 0xcbf2_9ce4_8422_2325u64;
    let mut mix = |x: u64| {
        for byte in x.to_le_bytes() {
            print = (print ^ u64::from(byte)).wrapping_mul(0x0100_0000_01b3);
        }
    };
    for t in &forest.trees {
        for n in &t.nodes {
            mix(u64::from(n.feature) << 32 | u64::from(n.threshold_bin) << 16 | u64::from(n.left));
            mix(n.threshold.to_bits() ^ n.gain.to_bits().rotate_left(7) ^ n.weight.to_bits());
        }
        t.values.iter().for_each(|v| mix(v.to_bits()));
    }
    let nodes: usize = forest.trees.iter().map(|t| t.nodes.len()).sum();
    let depth: usize = forest.trees.iter().map(|t| t.depth()).sum();
    println!(
        "forest: {trees} trees on {rows} x {PREDICTORS}: {fit:.2} s, {:.1} ms a tree (out-of-bag tally included); mean {:.0} nodes, depth {:.1}; OOB error {:.4}; fingerprint {print:016x}",
        fit * 1e3 / trees as f64,
        nodes as f64 / trees as f64,
        depth as f64 / trees as f64,
        forest.oob_error.last().copied().unwrap_or(f64::NAN),
    );

    let start = Instant::now();
    let mut leaves = 0usize;
    for t in &forest.trees {
        for r in 0..rows {
            leaves += t.leaf(Rows::Binned(&binned), r);
        }
    }
    let walk = start.elapsed().as_secs_f64();
    println!(
        "walking every row through every tree: {walk:.2} s, {:.1} ns a row and tree (checksum {leaves})",
        walk * 1e9 / (rows * trees) as f64
    );

    let start = Instant::now();
    let mut leaves = 0usize;
    let mut out = vec![0u32; rows];
    for t in &forest.trees {
        let walk = Walk::new(t, true).expect("children side by side");
        walk.leaves(Rows::Binned(&binned), |i| i, &mut out);
        leaves += out.iter().map(|&l| l as usize).sum::<usize>();
    }
    let walk = start.elapsed().as_secs_f64();
    println!(
        "the same, routed node by node (tree::walk): {walk:.2} s, {:.1} ns a row and tree (checksum {leaves})",
        walk * 1e9 / (rows * trees) as f64
    );
}
