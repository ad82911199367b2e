//! Insight into a fitted model, outside the model code: what drives it overall and why one
//! record scored as it did. Every function here is pure: it takes the [`Model`] and the rows
//! to explain ([`Records`] or [`Rows`]), draws any randomness from seeded streams and reports
//! through [`crate::progress::Progress`] (which may cancel).
//!
//! - [`shap`]: exact per-record contributions by TreeSHAP (Lundberg et al. 2020, the
//!   path-dependent form), for one record or all rows;
//! - [`importance`]: impurity importance, permutation importance on given rows (repeated,
//!   grouped, groups suggested from correlation) and out-of-bag permutation importance per
//!   tree for bagging and forests (Breiman 2001);
//! - [`held_out`]: permutation importance on held-out records, refitting the judging's
//!   splits (holdout, k-fold, grouped folds);
//! - [`dependence`]: partial dependence for one predictor or a pair (Friedman 2001), ICE
//!   curves (Goldstein et al. 2015), counts per grid cell, Friedman's H statistic.
//!
//! Here: [`Additive`], every model written as a sum of trees on a stated scale (what
//! TreeSHAP explains), and reading a table's outcome in the model's terms.

pub mod dependence;
pub mod held_out;
pub mod importance;
pub mod shap;

use std::borrow::Cow;

use crate::data::{Table, Values};
use crate::design::Outcome;
use crate::ensemble::boosting::Boosting;
use crate::ensemble::forest::argmax;
use crate::ensemble::loss::Loss;
use crate::error::{Error, ErrorKind, Result};
use crate::model::{samme_probabilities, Ensemble, Model};
use crate::tree::{Rows, Tree};

/// The words shown beside every result that is meant for people.
pub const CAUTION: &str = "Research use only: these explanations describe the model, not the \
    patients or the causes of their outcomes; the model needs external validation and is not a \
    substitute for clinical judgement.";

/// One tree of a model's additive form: it adds `scale` × its leaf values to the sums, to
/// output `output` (its single value) or, when `None`, to every output (one value each).
#[derive(Debug, Clone)]
pub struct Member<'a> {
    pub tree: Cow<'a, Tree>,
    pub scale: f64,
    pub output: Option<usize>,
}

/// A model written as `offset + Σ members`, one sum per output, on the scale that
/// [`Additive::scale`] states; [`Additive::finish`] turns the sums into the model's
/// prediction. TreeSHAP contributions add up to these sums.
///
/// - single tree: its leaf values (class probabilities, or the number);
/// - bagging and forests: the mean of the trees (class probabilities, or the number);
/// - AdaBoost: for each class, the share of the total round weight α whose rounds vote for
///   it (a vote share in 0..1; the model's probabilities are a softmax of it, see
///   [`samme_probabilities`]);
/// - gradient boosting: the scores before the link, starting score included (log-odds of
///   the second class for two classes, one score per class for several, the number or the
///   log of the mean count).
#[derive(Debug, Clone)]
pub struct Additive<'a> {
    pub members: Vec<Member<'a>>,
    pub offset: Vec<f64>,
    /// What each sum means, one entry per output.
    pub outputs: Vec<String>,
    /// The scale, in a sentence.
    pub scale: String,
    finish: Finish<'a>,
}

#[derive(Debug, Clone, Copy)]
enum Finish<'a> {
    Same,
    Votes,
    Boosting(&'a Boosting),
}

impl<'a> Additive<'a> {
    /// The additive form of `model`.
    pub fn of(model: &'a Model) -> Additive<'a> {
        let k = model.outputs();
        let class_names = |what: &str| -> Vec<String> {
            match &model.classes {
                Some(c) => c.iter().map(|c| format!("{what} '{c}'")).collect(),
                None => vec![model.outcome.clone()],
            }
        };
        let borrowed = |scale: f64| {
            move |t: &'a Tree| Member {
                tree: Cow::Borrowed(t),
                scale,
                output: None,
            }
        };
        match &model.ensemble {
            Ensemble::Tree(t) => Additive {
                members: vec![borrowed(1.0)(t)],
                offset: vec![0.0; k],
                outputs: class_names("probability of"),
                scale: if model.classes.is_some() {
                    "class probability (the tree's leaf shares)".into()
                } else {
                    format!("predicted '{}' (the tree's leaf means)", model.outcome)
                },
                finish: Finish::Same,
            },
            Ensemble::Forest(f) => Additive {
                members: f
                    .trees
                    .iter()
                    .map(borrowed(1.0 / f.trees.len().max(1) as f64))
                    .collect(),
                offset: vec![0.0; k],
                outputs: class_names("probability of"),
                scale: if model.classes.is_some() {
                    "class probability (mean of the trees)".into()
                } else {
                    format!("predicted '{}' (mean of the trees)", model.outcome)
                },
                finish: Finish::Same,
            },
            Ensemble::AdaBoost(a) => {
                let total: f64 = a.alphas.iter().sum();
                let members = a
                    .trees
                    .iter()
                    .zip(&a.alphas)
                    .map(|(t, &alpha)| {
                        // Each node's value becomes 1 for the class its leaf votes for.
                        let mut votes = t.clone();
                        for chunk in votes.values.chunks_exact_mut(t.outputs.max(1)) {
                            let winner = argmax(chunk);
                            for (c, v) in chunk.iter_mut().enumerate() {
                                *v = (c == winner) as u8 as f64;
                            }
                        }
                        Member {
                            tree: Cow::Owned(votes),
                            scale: if total > 0.0 { alpha / total } else { 0.0 },
                            output: None,
                        }
                    })
                    .collect();
                Additive {
                    members,
                    offset: vec![0.0; k],
                    outputs: class_names("vote share of"),
                    scale: "AdaBoost vote share: the share of the total round weight whose \
                            rounds vote for each class (the probabilities are a softmax of it)"
                        .into(),
                    finish: Finish::Votes,
                }
            }
            Ensemble::Boosting(b) => {
                let m = b.outputs.max(1);
                let members = b
                    .trees
                    .iter()
                    .enumerate()
                    .map(|(i, t)| Member {
                        tree: Cow::Borrowed(t),
                        scale: 1.0,
                        output: Some(i % m),
                    })
                    .collect();
                let (outputs, scale) = match (b.loss, &model.classes) {
                    (Loss::Logistic, Some(c)) => (
                        vec![format!(
                            "log-odds of '{}'",
                            c.get(1).map_or("", String::as_str)
                        )],
                        "log-odds (boosting's score before the logistic link, starting score \
                         in the base value)"
                            .to_string(),
                    ),
                    (Loss::Softmax, Some(c)) => (
                        c.iter().map(|c| format!("score of '{c}'")).collect(),
                        "class scores before the softmax (log-probabilities up to a constant \
                         per record), starting scores in the base value"
                            .to_string(),
                    ),
                    (Loss::Poisson, _) => (
                        vec![format!("log of the mean '{}'", model.outcome)],
                        "log of the predicted mean count (the score before the log link)"
                            .to_string(),
                    ),
                    _ => (
                        vec![model.outcome.clone()],
                        format!(
                            "predicted '{}' (sum of the rounds and the starting value)",
                            model.outcome
                        ),
                    ),
                };
                Additive {
                    members,
                    offset: b.initial.clone(),
                    outputs,
                    scale,
                    finish: Finish::Boosting(b),
                }
            }
        }
    }

    /// Sums per record.
    pub fn width(&self) -> usize {
        self.offset.len()
    }

    /// Adds `factor` × member `m`'s leaf `leaf` to `sums`.
    #[inline]
    pub fn add_leaf(&self, m: usize, leaf: usize, factor: f64, sums: &mut [f64]) {
        let member = &self.members[m];
        let values = member.tree.node_values(leaf);
        let scale = factor * member.scale;
        match member.output {
            Some(k) => sums[k] += scale * values[0],
            None => {
                for (s, v) in sums.iter_mut().zip(values) {
                    *s += scale * v;
                }
            }
        }
    }

    /// The sums for row `row` (offset included).
    pub fn sums(&self, rows: Rows<'_>, row: usize, out: &mut [f64]) {
        out.copy_from_slice(&self.offset);
        for (m, member) in self.members.iter().enumerate() {
            self.add_leaf(m, member.tree.leaf(rows, row), 1.0, out);
        }
    }

    /// The model's predictions (`outputs` per row, as [`Model::predict`]) from the sums of
    /// many rows (`width()` per row).
    pub fn finish_all(&self, sums: &[f64], outputs: usize) -> Vec<f64> {
        let rows = sums.len() / self.width().max(1);
        let mut out = vec![0.0; rows * outputs];
        for (s, o) in sums
            .chunks_exact(self.width().max(1))
            .zip(out.chunks_exact_mut(outputs.max(1)))
        {
            self.finish(s, o);
        }
        out
    }

    /// The model's prediction (as [`Model::predict`]) from one record's sums.
    pub fn finish(&self, sums: &[f64], out: &mut [f64]) {
        match self.finish {
            Finish::Same => out.copy_from_slice(sums),
            Finish::Votes => samme_probabilities(sums, 1.0, out),
            Finish::Boosting(b) => {
                let mut p = Vec::with_capacity(out.len());
                b.predict(sums, &mut p);
                out.copy_from_slice(&p);
            }
        }
    }
}

/// The leaf of `tree` reached by a record whose predictor `j` has the value `value(j)`.
#[inline]
pub fn leaf_by(tree: &Tree, value: impl Fn(usize) -> f64) -> usize {
    let mut i = 0usize;
    loop {
        let n = &tree.nodes[i];
        if n.is_leaf() {
            return i;
        }
        i = if n.value_goes_left(value(n.feature as usize)) {
            n.left
        } else {
            n.right
        } as usize;
    }
}

/// Reads the outcome column of `table` in the model's terms: the rows that have a value
/// (table row numbers) and the outcome of each, class codes in the model's class order.
/// Classes the model does not know, or an outcome of the wrong kind, are refused by name.
pub fn model_outcome(model: &Model, table: &Table) -> Result<(Vec<usize>, Outcome)> {
    let bad = |reason: String| {
        Error::new(ErrorKind::BadSetting {
            setting: "outcome".into(),
            reason,
        })
    };
    let Some(col) = table.column(&model.outcome) else {
        return Err(Error::new(ErrorKind::NoSuchColumn {
            name: model.outcome.clone(),
            available: table.columns.iter().map(|c| c.name.clone()).collect(),
        }));
    };
    let rows: Vec<usize> = (0..table.rows)
        .filter(|&r| !col.values.is_missing(r))
        .collect();
    if rows.is_empty() {
        return Err(bad(format!(
            "the outcome '{}' has no values in this file; importance needs the outcome of the \
             rows it scores",
            model.outcome
        )));
    }
    match &model.classes {
        None => match &col.values {
            Values::Numbers(v) => Ok((
                rows.clone(),
                Outcome::Numbers(rows.iter().map(|&r| v[r]).collect()),
            )),
            Values::Levels { .. } => Err(bad(format!(
                "the model predicts the number '{}', but this file holds {} in it",
                model.outcome,
                col.kind.label()
            ))),
        },
        Some(classes) => {
            let mut codes = Vec::with_capacity(rows.len());
            let mut unknown: Vec<String> = Vec::new();
            for &r in &rows {
                let label = col.display(r).unwrap_or_default();
                match classes.iter().position(|c| *c == label) {
                    Some(k) => codes.push(k as u32),
                    None => {
                        if !unknown.contains(&label) {
                            unknown.push(label);
                        }
                    }
                }
            }
            if !unknown.is_empty() {
                unknown.truncate(5);
                return Err(bad(format!(
                    "the outcome '{}' holds classes the model does not know ({}); the model's \
                     classes are {}. Use a file with the same outcome labels",
                    model.outcome,
                    unknown.join(", "),
                    classes.join(", ")
                )));
            }
            Ok((
                rows,
                Outcome::Classes {
                    codes,
                    labels: classes.clone(),
                },
            ))
        }
    }
}

/// Every tree's nodes' left share of training weight (cover), used for records whose
/// predictor is unknown: left weight over left plus right weight; ½ and ½ under a node
/// training never reached with any weight (so the shares always add up to 1).
pub fn left_share(tree: &Tree, node: usize) -> f64 {
    let n = &tree.nodes[node];
    let (l, r) = (
        tree.nodes[n.left as usize].weight,
        tree.nodes[n.right as usize].weight,
    );
    if l + r > 0.0 && (l + r).is_finite() && l >= 0.0 && r >= 0.0 {
        l / (l + r)
    } else {
        0.5
    }
}

#[cfg(test)]
pub(crate) mod testing {
    //! Small fitted models of every kind for the explain tests.
    use crate::binning::{bin_design, BinSettings, Records};
    use crate::design::{design_from_csv, Outcome};
    use crate::ensemble::adaboost::{fit_adaboost, BoostSettings};
    use crate::ensemble::boosting::{fit_boosting, BoostingSettings};
    use crate::ensemble::forest::{fit_forest, ForestSettings};
    use crate::ensemble::loss::Loss;
    use crate::model::{predictors_of, Ensemble, Method, Model};
    use crate::progress::Silent;
    use crate::random::{below, stream, Purpose};
    use crate::tree::criterion::Criterion;
    use crate::tree::grower::{grow, GrowSettings};
    use std::collections::BTreeMap;

    /// CSV text: `rows` records of predictors a..e (e a category, some a missing) and three
    /// outcomes: `y` two classes, `z` three classes, `v` a number.
    pub fn csv(rows: usize, seed: u64) -> String {
        let mut rng = stream(seed, Purpose::TreeRows, 0);
        let mut u = move || below(&mut rng, 1_000_000) as f64 / 1_000_000.0;
        let mut text = String::from("y,z,v,a,b,c,d,e\n");
        for _ in 0..rows {
            let x: Vec<f64> = (0..4).map(|_| u()).collect();
            let cat = ["red", "green", "blue", "grey"][(u() * 4.0) as usize];
            let v = 3.0 * x[0]
                + 2.0 * (x[1] > 0.5) as u8 as f64 * x[2]
                + (cat == "red") as u8 as f64
                + 0.3 * u();
            let y = if v + 0.5 * u() > 2.6 { "yes" } else { "no" };
            let z = ["low", "mid", "high"][((v / 2.2).floor() as usize).min(2)];
            let a = if u() < 0.1 {
                String::new()
            } else {
                format!("{:.4}", x[0])
            };
            text += &format!(
                "{y},{z},{v:.4},{a},{:.4},{:.4},{:.4},{cat}\n",
                x[1], x[2], x[3]
            );
        }
        text
    }

    /// A fitted model of `method` on outcome `outcome` (y, z or v), and the training rows as
    /// records.
    pub fn model(method: Method, outcome: &str, loss: Option<Loss>) -> (Model, Records, Outcome) {
        let text = csv(300, 4);
        let design = design_from_csv(&text, outcome, &["a", "b", "c", "d", "e"]);
        let binned = bin_design(&design, BinSettings::default()).unwrap();
        let regression = matches!(design.outcome, Outcome::Numbers(_));
        let (stats, width) = design.row_statistics(false);
        let grow_settings = GrowSettings {
            criterion: if regression {
                Criterion::SquaredError
            } else {
                Criterion::Gini
            },
            max_depth: Some(5),
            ..GrowSettings::default()
        };
        let ensemble = match method {
            Method::Tree => {
                let rows: Vec<u32> = (0..binned.rows as u32).collect();
                Ensemble::Tree(grow(&binned, &stats, width, &rows, &grow_settings, None))
            }
            Method::Bagging | Method::Forest => {
                let mut s = ForestSettings::random_forest(5, regression, 3);
                s.trees = 12;
                s.grow = grow_settings;
                if method == Method::Bagging {
                    s.predictors_per_split = None;
                }
                Ensemble::Forest(fit_forest(
                    &binned,
                    &stats,
                    width,
                    &design.outcome,
                    &s,
                    &mut Silent,
                ))
            }
            Method::AdaBoost => {
                let Outcome::Classes { codes, labels } = &design.outcome else {
                    panic!()
                };
                let s = BoostSettings {
                    rounds: 15,
                    grow: GrowSettings {
                        max_depth: Some(2),
                        ..grow_settings
                    },
                    ..BoostSettings::default()
                };
                Ensemble::AdaBoost(fit_adaboost(
                    &binned,
                    codes,
                    labels.len(),
                    None,
                    &s,
                    &mut Silent,
                ))
            }
            Method::Boosting => {
                let mut s = BoostingSettings {
                    loss,
                    rounds: 20,
                    ..BoostingSettings::default()
                };
                s.grow.max_leaves = Some(8);
                s.grow.min_weight_leaf = 0.0;
                Ensemble::Boosting(fit_boosting(&binned, &design, None, &s, &mut Silent).unwrap())
            }
        };
        let records = crate::binning::records_from_table(
            &binned.columns,
            &crate::data::read_table(text.as_bytes(), &Default::default(), &mut Silent)
                .unwrap()
                .table,
        )
        .unwrap();
        let classes = match &design.outcome {
            Outcome::Classes { labels, .. } => Some(labels.clone()),
            Outcome::Numbers(_) => None,
        };
        let model = Model {
            method,
            outcome: outcome.into(),
            classes,
            predictors: predictors_of(&design, &binned),
            ensemble,
            settings: BTreeMap::new(),
            seed: 3,
            training_fingerprint: None,
            training_rows: binned.rows,
            partial: false,
        };
        (model, records, design.outcome)
    }

    /// One model of every kind and outcome.
    pub fn every_kind() -> Vec<(String, Model, Records, Outcome)> {
        let mut out = Vec::new();
        for (method, outcome, loss) in [
            (Method::Tree, "y", None),
            (Method::Tree, "v", None),
            (Method::Bagging, "z", None),
            (Method::Forest, "y", None),
            (Method::Forest, "v", None),
            (Method::AdaBoost, "y", None),
            (Method::AdaBoost, "z", None),
            (Method::Boosting, "y", Some(Loss::Logistic)),
            (Method::Boosting, "z", Some(Loss::Softmax)),
            (Method::Boosting, "v", Some(Loss::SquaredError)),
            (Method::Boosting, "v", Some(Loss::AbsoluteError)),
        ] {
            let (m, r, o) = model(method, outcome, loss);
            out.push((
                format!("{} on {outcome} ({loss:?})", method.word()),
                m,
                r,
                o,
            ));
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_additive_form_gives_the_models_own_predictions() {
        for (name, model, records, _) in testing::every_kind() {
            let add = Additive::of(&model);
            let rows = Rows::Records(&records);
            let (mut s, mut p, mut q) = (
                vec![0.0; add.width()],
                vec![0.0; model.outputs()],
                vec![0.0; model.outputs()],
            );
            for r in 0..records.rows {
                add.sums(rows, r, &mut s);
                add.finish(&s, &mut p);
                model.predict(rows, r, &mut q);
                for (a, b) in p.iter().zip(&q) {
                    assert!((a - b).abs() < 1e-12, "{name} row {r}: {a} vs {b}");
                }
            }
        }
    }
}
