//! The explain benchmark's workload, shared by the native benchmark
//! (`examples/explain_bench.rs`) and the wasm one (`crates/bench-wasm`), so both time the
//! same work: an invented, seeded table of 30 uniform predictors and a two-class outcome, a
//! depth-8 random forest on it, TreeSHAP on every row and permutation importance on 10,000
//! rows. Nothing here reads a clock (there is none in wasm without JavaScript).

use rand_chacha::rand_core::RngCore;
use spinney_core::binning::{bin_design, records_from_table, BinSettings, Records};
use spinney_core::data::{read_table, ReadOptions};
use spinney_core::design::{build_design, DesignSpec, Outcome};
use spinney_core::ensemble::forest::{fit_forest, ForestSettings};
use spinney_core::explain::importance::{permutation, Metric, Permutation, Shuffles};
use spinney_core::explain::shap::contributions;
use spinney_core::model::{predictors_of, Ensemble, Method, Model};
use spinney_core::progress::Silent;
use spinney_core::random::{stream, Purpose};

pub const PREDICTORS: usize = 30;

/// The generated rows, read and binned, ready to fit.
pub struct Data {
    pub rows: usize,
    pub table: spinney_core::data::Table,
    pub design: spinney_core::design::Design,
    pub binned: spinney_core::binning::BinnedMatrix,
}

/// A fitted forest and the rows it explains.
pub struct Fitted {
    pub model: Model,
    pub records: Records,
    pub outcome: Outcome,
    /// Mean leaves a tree.
    pub leaves: f64,
}

/// `rows` invented records: 30 uniform predictors, a two-class outcome drawn from a
/// logistic model of the first six (with an interaction), seeded.
pub fn data(rows: usize) -> Data {
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
    Data {
        rows,
        table,
        design,
        binned,
    }
}

/// A `trees`-tree, depth-8 random forest on `data` (one thread).
pub fn fit(data: &Data, trees: usize) -> Fitted {
    let (stats, width) = data.design.row_statistics(false);
    let mut settings = ForestSettings::random_forest(PREDICTORS, false, 1);
    settings.trees = trees;
    settings.grow.max_depth = Some(8);
    let forest = fit_forest(
        &data.binned,
        &stats,
        width,
        &data.design.outcome,
        &settings,
        &mut Silent,
    );
    let leaves: usize = forest.trees.iter().map(|t| t.leaves()).sum();
    let model = Model {
        method: Method::Forest,
        outcome: "y".into(),
        classes: Some(vec!["no".into(), "yes".into()]),
        predictors: predictors_of(&data.design, &data.binned),
        ensemble: Ensemble::Forest(forest),
        settings: Default::default(),
        seed: 1,
        training_fingerprint: None,
        training_rows: data.rows,
        partial: false,
    };
    let records = records_from_table(&data.binned.columns, &data.table).expect("records");
    Fitted {
        model,
        records,
        outcome: data.design.outcome.clone(),
        leaves: leaves as f64 / trees.max(1) as f64,
    }
}

/// TreeSHAP on every row; the sum of the absolute contributions (to compare runs).
pub fn shap(fitted: &Fitted) -> f64 {
    let c = contributions(&fitted.model, &fitted.records, None, &mut Silent).expect("shap");
    c.values.iter().map(|v| v.abs()).sum()
}

/// Permutation importance, 5 shuffles of each predictor by AUC, on the first 10,000 rows;
/// also their number.
pub fn importance(fitted: &Fitted) -> (Permutation, usize) {
    let held: Vec<usize> = (0..fitted.records.rows.min(10_000)).collect();
    let held_out = fitted.records.select_rows(&held);
    let Outcome::Classes { codes, labels } = &fitted.outcome else {
        unreachable!()
    };
    let outcome = Outcome::Classes {
        codes: held.iter().map(|&r| codes[r]).collect(),
        labels: labels.clone(),
    };
    let groups: Vec<Vec<usize>> = (0..PREDICTORS).map(|j| vec![j]).collect();
    let p = permutation(
        &fitted.model,
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
    (p, held.len())
}
