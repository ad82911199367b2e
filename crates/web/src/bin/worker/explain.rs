//! The worker's answers about one kept run (the page's insight step, and the contributions
//! beside scored records), all from `spinney_core::explain` and called as `spinney explain`
//! calls it (crates/cli/src/explain.rs), with the same defaults, so the page and the command
//! line give the same numbers on the same data: impurity importance with its caution;
//! permutation importance on the rows with an outcome (5 shuffles, seed 1; apparent) and,
//! for bagging and forests, Breiman's out-of-bag importance, for other runs judged by
//! holdout, k-fold or grouped folds, permutation importance on held-out records (the
//! judging's splits refitted, as `spinney explain --held-out`); partial dependence and ICE curves on a
//! sample of 1,000 rows (20 grid values, 50 curves); one record's TreeSHAP contributions;
//! the first tree as boxes.

use spinney_core::binning::Records;
use spinney_core::ensemble::forest::argmax;
use spinney_core::explain::dependence::{
    grid, label_of, partial_dependence, predictor_index, sample_rows,
};
use spinney_core::explain::held_out::{held_out_permutation, why_not_held_out, APPARENT};
use spinney_core::explain::importance::{
    impurity, out_of_bag, permutation, Metric, Shuffles, IMPURITY_CAUTION,
};
use spinney_core::explain::shap::{contributions, Contributions};
use spinney_core::explain::{model_outcome, Additive};
use spinney_core::model::{Ensemble, Model, Reading};
use spinney_core::progress::Silent;
use spinney_core::settings::FitSettings;
use spinney_core::tree::{Rows, Tree};
use spinney_core::validate::Scheme;
use spinney_web::protocol::{
    Contribution, HeldOutImportance, Insight, InsightContributions, InsightDependence,
    InsightImportance, InsightTree, OutOfBagImportance, TreeNodeView,
};

use super::{trees_on_table, Held, Reporter};

/// The seed of the shuffles and samples (the command line's default).
pub const SEED: u64 = 1;
/// Shuffles per predictor (the command line's default).
const REPEATS: usize = 5;
/// Partial dependence: rows sampled, grid values, ICE curves.
const SAMPLE: usize = 1000;
const GRID: usize = 20;
const ICE: usize = 50;
/// Contributions shown beside each scored record.
pub const TOP: usize = 3;

/// Which of the additive form's sums a record's contributions explain: the only one, the
/// second class's for two classes (the first's is its mirror image), or else the predicted
/// class's.
pub fn explained_output(model: &Model, width: usize, prediction: &[f64]) -> usize {
    if width == 1 {
        0
    } else if width == 2 && model.classes.as_ref().is_some_and(|c| c.len() == 2) {
        1
    } else {
        argmax(prediction).min(width - 1)
    }
}

/// Row `i` of `c` (record `r` of `records`): the contributions to output `o` as named
/// amounts, largest in size first, zeros left out.
pub fn ranked(
    model: &Model,
    records: &Records,
    c: &Contributions,
    i: usize,
    o: usize,
) -> Vec<Contribution> {
    let r = c.rows[i];
    let v = c.row(i);
    let k = c.outputs;
    let mut order: Vec<usize> = (0..c.predictors).filter(|&j| v[j * k + o] != 0.0).collect();
    order.sort_by(|&a, &b| v[b * k + o].abs().total_cmp(&v[a * k + o].abs()));
    order
        .into_iter()
        .map(|j| {
            let x = records.value(j, r);
            Contribution {
                predictor: model.predictors[j].name.clone(),
                value: if x.is_nan() {
                    "missing".into()
                } else {
                    label_of(model, j, x)
                },
                amount: v[j * k + o],
            }
        })
        .collect()
}

/// The model with every fitting setting written out (the worker keeps only those the page
/// sent), which out-of-bag importance reads to draw each tree's rows again.
fn with_all_settings(model: &Model) -> Result<Model, String> {
    let sets: Vec<(String, String)> = model
        .settings
        .iter()
        .map(|(k, v)| (k.clone(), v.clone()))
        .collect();
    let settings = FitSettings::build(
        model.method,
        model.predictors.len(),
        model.classes.is_none(),
        &model.outcome,
        &sets,
    )?;
    let mut m = model.clone();
    m.settings = settings.describe();
    Ok(m)
}

pub fn explain(
    held: &Held,
    id: u32,
    run: u32,
    importance: bool,
    predictor: Option<&str>,
    record: Option<usize>,
    tree: bool,
) -> Result<Insight, String> {
    let (loaded, r, model) = trees_on_table(held, run)?;
    let table = &loaded.table;
    let (records, _) = model.records(table).map_err(|e| e.to_string())?;
    let names: Vec<String> = model.predictors.iter().map(|p| p.name.clone()).collect();
    let mut notes = Vec::new();
    if model.partial {
        notes.push(format!(
            "this run is partial (fitting was cancelled after {} member(s))",
            model.members()
        ));
    }
    let mut insight = Insight {
        run,
        predictors: names.clone(),
        rows: records.rows,
        importance: None,
        dependence: None,
        contributions: None,
        tree: None,
        coefficients: None,
        notes,
    };

    if importance {
        let (rows, outcome) = model_outcome(model, table).map_err(|e| e.to_string())?;
        let kept = records.select_rows(&rows);
        let metric = Metric::default_for(model);
        let groups: Vec<Vec<usize>> = (0..names.len()).map(|j| vec![j]).collect();
        let p = permutation(
            model,
            &kept,
            &outcome,
            &groups,
            Shuffles {
                metric,
                repeats: REPEATS,
                seed: SEED,
            },
            &mut Reporter::new(id),
        )
        .map_err(|e| e.to_string())?;
        // Held out: the run's judging's splits refitted (its scheme, seed and settings).
        let (mut held_out, mut held_out_missing) = (None, None);
        if !matches!(model.ensemble, Ensemble::Forest(_)) {
            let judging = r.judging.as_ref();
            let scheme = judging
                .map(|j| Scheme::parse(&j.scheme))
                .transpose()
                .map_err(|e| e.to_string())?;
            match (judging, scheme) {
                (Some(j), Some(scheme)) if why_not_held_out(&scheme).is_none() => {
                    let sets: Vec<(String, String)> = model
                        .settings
                        .iter()
                        .map(|(k, v)| (k.clone(), v.clone()))
                        .collect();
                    let (design, settings) =
                        super::design_and_settings(held, &r.design, model.method.word(), &sets)?;
                    let h = held_out_permutation(
                        &design,
                        &settings,
                        &scheme,
                        j.seed,
                        &groups,
                        Shuffles {
                            metric,
                            repeats: REPEATS,
                            seed: SEED,
                        },
                        None,
                        &mut Reporter::new(id),
                    );
                    // A judging the splits refused (its refusal is shown with the run) leaves
                    // the training-record figure, with the reason.
                    match h {
                        Ok(h) => {
                            held_out = Some(HeldOutImportance {
                                words: h.words(),
                                splits: h.splits(),
                                repeats: h.repeats,
                                seed: h.seed,
                                baseline: h.baseline(),
                                mean: h.mean,
                                spread: h.spread,
                            })
                        }
                        Err(e) => {
                            held_out_missing =
                                Some(format!("its judging's splits could not be refitted: {e}"))
                        }
                    }
                }
                (_, Some(scheme)) => {
                    held_out_missing = why_not_held_out(&scheme).map(str::to_string);
                }
                _ => {
                    held_out_missing = Some(
                        "this run was not judged, so no records were held out from it; \
                         judge it by folds for a held-out figure"
                            .into(),
                    );
                }
            }
        }
        let out_of_bag = match &model.ensemble {
            Ensemble::Forest(_) => {
                let m = with_all_settings(model)?;
                match out_of_bag(&m, &kept, &outcome, SEED, &mut Reporter::new(id)) {
                    Ok(o) => Some(OutOfBagImportance {
                        error: o.error.to_string(),
                        trees: o.trees,
                        mean: o.mean,
                        standard_error: o.standard_error,
                    }),
                    Err(e) if super::stopped(id) => return Err(e.to_string()),
                    Err(e) => {
                        insight.notes.push(format!("no out-of-bag importance: {e}"));
                        None
                    }
                }
            }
            _ => None,
        };
        insight.importance = Some(InsightImportance {
            impurity: impurity(model),
            impurity_caution: IMPURITY_CAUTION.into(),
            metric: metric.word().into(),
            baseline: p.baseline,
            repeats: REPEATS,
            seed: SEED,
            rows: kept.rows,
            rows_words: format!(
                "the {} training records that have an outcome ({APPARENT}): rows the model \
                 learnt from, so this flatters predictors it may have memorised",
                kept.rows
            ),
            mean: p.mean,
            spread: p.spread,
            out_of_bag,
            held_out,
            held_out_missing,
        });
    }

    if let Some(name) = predictor {
        let j = predictor_index(model, name).map_err(|e| e.to_string())?;
        let rows = sample_rows(records.rows, SAMPLE, SEED);
        let sample = records.select_rows(&rows);
        let g = grid(model, &sample, j, GRID).map_err(|e| e.to_string())?;
        let ice = sample_rows(sample.rows, ICE, SEED);
        let d = partial_dependence(model, &sample, &[g], &ice, &mut Reporter::new(id))
            .map_err(|e| e.to_string())?;
        let k = model.outputs();
        let cells = d.cells();
        // Two classes: the second; several: the class with the highest mean curve.
        let o = if k == 2 {
            1
        } else {
            let mut means = vec![0.0; k];
            for c in 0..cells {
                for (o, m) in means.iter_mut().enumerate() {
                    *m += d.average[c * k + o];
                }
            }
            argmax(&means)
        };
        let g = &d.grids[0];
        insight.dependence = Some(InsightDependence {
            predictor: name.to_string(),
            output: d.outputs[o].clone(),
            numbers: matches!(model.predictors[j].reading, Reading::Number),
            values: g.values.clone(),
            labels: g.labels.clone(),
            counts: g.counts.iter().map(|&c| c as u64).collect(),
            missing: g.missing as u64,
            data: (0..sample.rows)
                .map(|r| sample.value(j, r))
                .filter(|x| !x.is_nan())
                .collect(),
            average: (0..cells).map(|c| d.average[c * k + o]).collect(),
            ice_rows: d.ice_rows.iter().map(|&i| rows[i]).collect(),
            ice: (0..d.ice_rows.len())
                .map(|i| (0..cells).map(|c| d.ice[(i * cells + c) * k + o]).collect())
                .collect(),
            sample: sample.rows,
            seed: SEED,
        });
    }

    if let Some(row) = record {
        if row >= records.rows {
            return Err(format!(
                "record {} is beyond the table's {} rows; give a number from 1 to {}",
                row + 1,
                records.rows,
                records.rows
            ));
        }
        let c = contributions(model, &records, Some(&[row][..]), &mut Silent)
            .map_err(|e| e.to_string())?;
        let mut prediction = vec![0.0; model.outputs()];
        model.predict(Rows::Records(&records), row, &mut prediction);
        let add = Additive::of(model);
        let mut sums = vec![0.0; add.width()];
        add.sums(Rows::Records(&records), row, &mut sums);
        let o = explained_output(model, c.outputs, &prediction);
        let (words, class) = super::prediction_words(model.classes.as_deref(), &prediction);
        insight.contributions = Some(InsightContributions {
            record: row,
            scale: c.scale.clone(),
            output: c.output_names[o].clone(),
            base: c.base[o],
            contributions: ranked(model, &records, &c, 0, o),
            sum: sums[o],
            prediction: words,
            predicted_class: class,
            predicted: prediction.clone(),
        });
    }

    if tree {
        insight.tree = model.ensemble.trees().first().map(|t| {
            let count = model.ensemble.trees().len();
            let which = match (&model.ensemble, count) {
                (Ensemble::Tree(_), _) => "the run's single tree".to_string(),
                (_, 1) => "its only tree".to_string(),
                (Ensemble::AdaBoost(_) | Ensemble::Boosting(_), n) => {
                    format!("the first of {n} rounds' trees")
                }
                (_, n) => format!("the first of {n} trees"),
            };
            tree_view(model, t, which)
        });
    }
    Ok(insight)
}

/// A tree's nodes in words: each split's rule (records meeting it go left) and each node's
/// value.
fn tree_view(model: &Model, tree: &Tree, which: String) -> InsightTree {
    let boosting = matches!(model.ensemble, Ensemble::Boosting(_));
    let mut used = vec![0usize; model.predictors.len()];
    let nodes = tree
        .nodes
        .iter()
        .enumerate()
        .map(|(i, n)| {
            let values = tree.node_values(i);
            let rows = format!("{:.0} rows", n.weight);
            let value = if boosting {
                format!("adds {:+.3} · {rows}", values[0])
            } else {
                match &model.classes {
                    Some(c) if c.len() == 2 => format!("'{}' {:.2} · {rows}", c[1], values[1]),
                    Some(c) => {
                        let best = argmax(values);
                        format!("'{}' {:.2} · {rows}", c[best], values[best])
                    }
                    None => format!("{:.3} · {rows}", values[0]),
                }
            };
            if n.is_leaf() {
                return TreeNodeView {
                    feature: String::new(),
                    threshold: String::new(),
                    left: None,
                    right: None,
                    value,
                };
            }
            let j = n.feature as usize;
            if let Some(u) = used.get_mut(j) {
                *u += 1;
            }
            let missing = if n.missing_left { " or missing" } else { "" };
            let rule = match &model.predictors[j].reading {
                Reading::YesNo { labels } if n.numeric => {
                    format!("is {}", labels[(n.threshold >= 1.0) as usize])
                }
                _ if n.numeric => format!("≤ {}", label_of(model, j, n.threshold)),
                _ => {
                    let mut levels: Vec<String> = (0..=255u8)
                        .filter(|&b| n.left_bins().contains(b))
                        .map(|b| label_of(model, j, b as f64))
                        .filter(|l| !l.starts_with('('))
                        .collect();
                    levels.dedup();
                    format!("in {{{}}}", levels.join(", "))
                }
            };
            TreeNodeView {
                feature: model.predictors[j].name.clone(),
                threshold: format!("{rule}{missing}"),
                left: Some(n.left as usize),
                right: Some(n.right as usize),
                value,
            }
        })
        .collect();
    let mut most_used: Vec<(String, usize)> = used
        .iter()
        .enumerate()
        .filter(|(_, &u)| u > 0)
        .map(|(j, &u)| (model.predictors[j].name.clone(), u))
        .collect();
    most_used.sort_by_key(|u| std::cmp::Reverse(u.1));
    most_used.truncate(5);
    InsightTree {
        which,
        nodes,
        depth: tree.depth(),
        leaves: tree.leaves(),
        most_used,
    }
}
