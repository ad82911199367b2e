//! A fitted model of any method as one value ([`Model`]): the method, the outcome and its
//! classes, how to read each predictor from a new table, the ensemble itself, the settings and
//! seed it was fitted with, the training file's fingerprint and whether fitting was cancelled.
//! Everything that predicts with a fitted model (the command line, the page, later the
//! explanations) goes through here: class probabilities or the number for one row, staged
//! predictions after 1, 2, ... members, the error by ensemble size and the overall fit.
//! [`Model::check`] validates every index, so a model read from a file (see
//! [`crate::model_file`]) can never make prediction panic.

use std::collections::BTreeMap;

use crate::binning::{BinRule, BinnedMatrix, Records};
use crate::data::values::yes_no_word;
use crate::data::{Kind, Table, Values, MISSING_CODE};
use crate::design::{Design, Outcome, PredictorValues};
use crate::ensemble::adaboost::{AdaBoost, Stop};
use crate::ensemble::boosting::{staged_error, Boosting};
use crate::ensemble::forest::{argmax, Forest};
use crate::error::{Error, ErrorKind, Result};
use crate::tree::walk::{self, Walk};
use crate::tree::{Rows, Tree};

/// How the model was fitted.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method {
    Tree,
    Bagging,
    Forest,
    AdaBoost,
    /// Gradient boosting.
    Boosting,
}

impl Method {
    pub const ALL: [Method; 5] = [
        Method::Tree,
        Method::Bagging,
        Method::Forest,
        Method::AdaBoost,
        Method::Boosting,
    ];

    /// The word used on the command line and in model files.
    pub fn word(self) -> &'static str {
        match self {
            Method::Tree => "tree",
            Method::Bagging => "bagging",
            Method::Forest => "forest",
            Method::AdaBoost => "adaboost",
            Method::Boosting => "boosting",
        }
    }

    pub fn from_word(word: &str) -> Option<Method> {
        Method::ALL.into_iter().find(|m| m.word() == word)
    }
}

/// How a model reads one predictor from a new table.
#[derive(Debug, Clone, PartialEq)]
pub enum Reading {
    /// A number (number, whole number, date, date-time), compared with split thresholds.
    Number,
    /// Yes/no, stored as 0 (`labels[0]`) and 1 (`labels[1]`). New values are matched by
    /// label (ignoring case), then as yes/no words; anything else counts as missing.
    YesNo { labels: [String; 2] },
    /// A category: the training labels, the training bin of each, and the pooled bin that
    /// rare labels shared and that labels never seen in training follow.
    Category {
        levels: Vec<String>,
        bin_of_level: Vec<u8>,
        pooled_bin: u8,
    },
}

/// One predictor as the model needs it.
#[derive(Debug, Clone, PartialEq)]
pub struct Predictor {
    pub name: String,
    /// The column's kind in the training table.
    pub kind: Kind,
    pub reading: Reading,
}

impl Predictor {
    /// Whether splits on this predictor compare numbers (numbers, dates, yes/no).
    pub fn is_numeric(&self) -> bool {
        !matches!(self.reading, Reading::Category { .. })
    }

    /// The kind to read this predictor's column as in a new file, so that a few rows (say a
    /// category whose labels look like numbers) are not read differently from training.
    pub fn reading_kind(&self) -> Kind {
        match (&self.reading, self.kind) {
            (Reading::Number, Kind::Date | Kind::DateTime) => self.kind,
            (Reading::Number, _) => Kind::Number,
            _ => Kind::Category,
        }
    }
}

/// The predictors of a fitted design, in the model's order (the binned matrix's columns).
pub fn predictors_of(design: &Design, binned: &BinnedMatrix) -> Vec<Predictor> {
    design
        .predictors
        .iter()
        .zip(&binned.columns)
        .map(|(p, col)| {
            let reading = match (&p.values, &col.rule) {
                (PredictorValues::Numbers(_), _) if p.kind == Kind::YesNo => Reading::YesNo {
                    labels: p
                        .yes_no_labels
                        .clone()
                        .unwrap_or_else(|| ["0".into(), "1".into()]),
                },
                (
                    PredictorValues::Levels { .. },
                    BinRule::Levels {
                        bin_of_level,
                        pooled_bin,
                    },
                ) => Reading::Category {
                    levels: col.levels.clone(),
                    bin_of_level: bin_of_level.clone(),
                    pooled_bin: *pooled_bin,
                },
                _ => Reading::Number,
            };
            Predictor {
                name: p.name.clone(),
                kind: p.kind,
                reading,
            }
        })
        .collect()
}

/// The fitted members.
#[derive(Debug, Clone)]
pub enum Ensemble {
    Tree(Tree),
    /// Bagging and random forests.
    Forest(Forest),
    AdaBoost(AdaBoost),
    /// Gradient boosting: round `r`'s tree for score `k` is `trees[r * outputs + k]`.
    Boosting(Boosting),
    // A new method: a variant here, with its arms in `Model::predict`, `Model::raw_scores`,
    // `Model::staged_predict`, `Model::staged_errors`, `Ensemble::trees`, `Model::check`,
    // `is_partial` and in model_file.rs (a block beside `forest`, `adaboost`, `boosting`).
}

impl Ensemble {
    /// Every tree of the ensemble, in order.
    pub fn trees(&self) -> &[Tree] {
        match self {
            Ensemble::Tree(t) => std::slice::from_ref(t),
            Ensemble::Forest(f) => &f.trees,
            Ensemble::AdaBoost(a) => &a.trees,
            Ensemble::Boosting(b) => &b.trees,
        }
    }
}

/// A fitted model of any method.
#[derive(Debug, Clone)]
pub struct Model {
    pub method: Method,
    pub outcome: String,
    /// Class labels (prediction gives one probability per class), or `None` for a number.
    pub classes: Option<Vec<String>>,
    pub predictors: Vec<Predictor>,
    pub ensemble: Ensemble,
    /// Every setting in effect, by the names `spinney fit --set` uses, as text.
    pub settings: BTreeMap<String, String>,
    pub seed: u64,
    /// SHA-256 of the training file, when known.
    pub training_fingerprint: Option<String>,
    /// Rows the model was fitted on.
    pub training_rows: usize,
    /// Fitting was cancelled: fewer trees or rounds than asked for.
    pub partial: bool,
}

/// Labels of one predictor that training never saw, in a table being scored.
#[derive(Debug, Clone, PartialEq)]
pub struct Unseen {
    pub predictor: String,
    /// Rows holding such a label.
    pub rows: usize,
    /// The first such label.
    pub example: String,
    /// Where these rows go: "the pooled bin" (categories) or "the missing side" (yes/no).
    pub follows: &'static str,
}

impl Model {
    /// Values per prediction: the number of classes, or 1.
    pub fn outputs(&self) -> usize {
        self.classes.as_ref().map_or(1, Vec::len)
    }

    /// Trees (bagging, forest) or rounds (AdaBoost, boosting); 1 for a single tree.
    pub fn members(&self) -> usize {
        match &self.ensemble {
            Ensemble::Boosting(b) => b.rounds(),
            e => e.trees().len(),
        }
    }

    /// The prediction for row `row` into `out` (`outputs()` values): class probabilities,
    /// or the predicted number. AdaBoost's probabilities follow [`samme_probabilities`];
    /// gradient boosting's come from its scores through its loss's link.
    pub fn predict(&self, rows: Rows<'_>, row: usize, out: &mut [f64]) {
        match &self.ensemble {
            Ensemble::Tree(t) => {
                for (o, v) in out.iter_mut().zip(t.predict(rows, row)) {
                    *o = *v;
                }
            }
            Ensemble::Forest(f) => f.predict(rows, row, out),
            Ensemble::AdaBoost(a) => {
                let scores = a.scores(rows, row, a.trees.len());
                let total: f64 = a.alphas.iter().sum();
                samme_probabilities(&scores, total, out);
            }
            Ensemble::Boosting(b) => {
                let scores = boosting_scores(b, rows, row, b.rounds());
                let mut p = Vec::with_capacity(out.len());
                b.predict(&scores, &mut p);
                for (o, v) in out.iter_mut().zip(&p) {
                    *o = *v;
                }
            }
        }
    }

    /// The scores behind the prediction of row `row`: AdaBoost's votes (Σ α of the rounds
    /// voting for each class) or gradient boosting's scores before the link (log-odds,
    /// class scores, or the number's scale); `None` for trees, bagging and forests.
    pub fn raw_scores(&self, rows: Rows<'_>, row: usize) -> Option<Vec<f64>> {
        match &self.ensemble {
            Ensemble::AdaBoost(a) => Some(a.scores(rows, row, a.trees.len())),
            Ensemble::Boosting(b) => Some(boosting_scores(b, rows, row, b.rounds())),
            _ => None,
        }
    }

    /// Predictions for row `row` after 1, 2, ... members: `members() × outputs()` values,
    /// member after member, each as [`Model::predict`] gives it for that many members.
    pub fn staged_predict(&self, rows: Rows<'_>, row: usize) -> Vec<f64> {
        let k = self.outputs();
        if let Ensemble::Boosting(b) = &self.ensemble {
            let mut scores = b.initial.clone();
            let mut out = Vec::with_capacity(b.rounds() * k);
            let mut p = Vec::with_capacity(k);
            for round in 0..b.rounds() {
                add_boosting_round(b, rows, row, round, &mut scores);
                b.predict(&scores, &mut p);
                out.extend_from_slice(&p);
            }
            return out;
        }
        let trees = self.ensemble.trees();
        let mut out = vec![0.0; trees.len() * k];
        let mut sums = vec![0.0; k];
        let mut total = 0.0;
        for (t, tree) in trees.iter().enumerate() {
            let p = tree.predict(rows, row);
            let stage = &mut out[t * k..(t + 1) * k];
            match &self.ensemble {
                Ensemble::Tree(_) => stage.iter_mut().zip(p).for_each(|(o, v)| *o = *v),
                Ensemble::Forest(_) => {
                    for ((s, v), o) in sums.iter_mut().zip(p).zip(stage.iter_mut()) {
                        *s += v;
                        *o = *s / (t + 1) as f64;
                    }
                }
                Ensemble::AdaBoost(a) => {
                    let alpha = a.alphas.get(t).copied().unwrap_or(0.0);
                    if let Some(s) = sums.get_mut(argmax(p)) {
                        *s += alpha;
                    }
                    total += alpha;
                    samme_probabilities(&sums, total, stage);
                }
                Ensemble::Boosting(_) => {} // above
            }
        }
        out
    }

    /// Error after 1, 2, ... members (trees or rounds), in one pass over the members: error
    /// rate for classes, mean squared error for numbers. `None` for a single tree.
    pub fn staged_errors(&self, rows: Rows<'_>, outcome: &Outcome) -> Option<Vec<f64>> {
        self.staged_sums(rows, outcome).map(|(curve, _)| curve)
    }

    /// [`Model::staged_errors`] and, for bagging, forests, AdaBoost and gradient boosting,
    /// the predictions [`Model::predict_rows`] gives (a forest's staged sums divided by the
    /// number of trees, AdaBoost's last staged votes as probabilities, boosting's last staged
    /// predictions: the same additions in the same order, so the same numbers to the last
    /// digit), from one walk of every row down every tree instead of two.
    pub fn staged_errors_and_predictions(
        &self,
        rows: Rows<'_>,
        outcome: &Outcome,
    ) -> (Option<Vec<f64>>, Option<Vec<f64>>) {
        match &self.ensemble {
            Ensemble::Boosting(b) => {
                let (curve, predictions) = boosting_staged(b, rows, outcome, self.outputs());
                return (Some(curve), Some(predictions));
            }
            Ensemble::AdaBoost(a) => {
                // The staged votes after the last tree are the votes `predict` sums, in the
                // same order; its SAMME probabilities from them.
                let Some((curve, votes)) = self.staged_sums(rows, outcome) else {
                    return (None, None);
                };
                let mut out = vec![0.0; votes.len()];
                samme_rows(a, &votes, self.outputs(), &mut out);
                return (Some(curve), Some(out));
            }
            _ => {}
        }
        let Ensemble::Forest(f) = &self.ensemble else {
            return (self.staged_errors(rows, outcome), None);
        };
        match self.staged_sums(rows, outcome) {
            Some((curve, mut sums)) => {
                let trees = f.trees.len().max(1) as f64;
                sums.iter_mut().for_each(|s| *s /= trees);
                (Some(curve), Some(sums))
            }
            None => (None, None),
        }
    }

    /// The staged error curve and the final sums of the members' outputs (votes for AdaBoost).
    fn staged_sums(&self, rows: Rows<'_>, outcome: &Outcome) -> Option<(Vec<f64>, Vec<f64>)> {
        // The same loops, with the number of outputs a constant where it is one or two.
        match self.outputs() {
            1 => self.staged_sums_with::<1>(rows, outcome),
            2 => self.staged_sums_with::<2>(rows, outcome),
            _ => self.staged_sums_with::<0>(rows, outcome),
        }
    }

    /// [`Model::staged_sums`] for `K` outputs a row (0: as many as `self.outputs()`).
    fn staged_sums_with<const K: usize>(
        &self,
        rows: Rows<'_>,
        outcome: &Outcome,
    ) -> Option<(Vec<f64>, Vec<f64>)> {
        let n = rows.len();
        let outputs = if K > 0 { K } else { self.outputs() };
        if let Ensemble::Boosting(b) = &self.ensemble {
            return Some((boosting_staged(b, rows, outcome, outputs).0, Vec::new()));
        }
        let (members, voting): (Vec<(&Tree, f64)>, bool) = match &self.ensemble {
            Ensemble::Tree(_) | Ensemble::Boosting(_) => return None,
            Ensemble::Forest(f) => (f.trees.iter().map(|t| (t, 1.0)).collect(), false),
            Ensemble::AdaBoost(a) => (a.trees.iter().zip(a.alphas.iter().copied()).collect(), true),
        };
        let mut sums = vec![0.0; n * outputs];
        let mut curve = Vec::with_capacity(members.len());
        let mut at = vec![0; n];
        for (t, (tree, alpha)) in members.iter().enumerate() {
            let mut err = 0.0;
            walk::leaves(tree, rows, |i| i, &mut at);
            for r in 0..n {
                let p = &tree.node_values(at[r] as usize)[..outputs];
                let s = &mut sums[r * outputs..(r + 1) * outputs];
                if voting {
                    if let Some(v) = s.get_mut(argmax(p)) {
                        *v += alpha;
                    }
                } else {
                    for (a, b) in s.iter_mut().zip(p) {
                        *a += b;
                    }
                }
                err += match outcome {
                    Outcome::Classes { codes, .. } => (argmax(s) != codes[r] as usize) as u8 as f64,
                    Outcome::Numbers(y) => (s[0] / (t + 1) as f64 - y[r]).powi(2),
                };
            }
            curve.push(err / n.max(1) as f64);
        }
        Some((curve, sums))
    }

    /// The predictions for rows `range` into `out` (`outputs()` values a row, row after row):
    /// the numbers [`Model::predict`] gives row by row, to the last digit. Bagging and forests
    /// go a tree at a time over the rows, so the tree stays in the cache while every row
    /// walks it (row by row, each of hundreds of deep trees is fetched from memory again).
    pub fn predict_rows(&self, rows: Rows<'_>, range: std::ops::Range<usize>, out: &mut [f64]) {
        // No walks built beforehand: each tree's is built as it is walked and dropped, so one
        // call never holds more than one (callers of many blocks keep them: `walks`).
        let none = Walks {
            binned: matches!(rows, Rows::Binned(_)),
            each: Vec::new(),
        };
        self.predict_rows_by(&none, rows, range, out);
    }

    /// Every tree's [`Walk`] for rows of the kind of `rows` (binned or records), for
    /// [`Model::predict_rows_by`]; bagging and forests only (other models walk row by row).
    /// They take 16 bytes a node, about a fifth of the trees' own size, for as long as they
    /// are kept.
    pub fn walks(&self, rows: Rows<'_>) -> Walks {
        let binned = matches!(rows, Rows::Binned(_));
        let each = match &self.ensemble {
            Ensemble::Forest(f) => f.trees.iter().map(|t| Walk::new(t, binned)).collect(),
            _ => Vec::new(),
        };
        Walks { binned, each }
    }

    /// [`Model::predict_rows`] with the trees' walks built beforehand ([`Model::walks`]), so
    /// that predicting block after block of rows builds them once, not once a block (a walk
    /// is the tree laid out anew: for the training rows of a 60-tree forest on 50,000 rows in
    /// blocks of 4,096, 9% of `spinney fit`'s time). Walks of the other kind of rows, or
    /// missing, are built here.
    pub fn predict_rows_by(
        &self,
        walks: &Walks,
        rows: Rows<'_>,
        range: std::ops::Range<usize>,
        out: &mut [f64],
    ) {
        let k = self.outputs();
        match &self.ensemble {
            Ensemble::Forest(f) => {
                out.iter_mut().for_each(|o| *o = 0.0);
                let mut at = vec![0; range.len()];
                let kind = walks.binned == matches!(rows, Rows::Binned(_));
                for (at_tree, t) in f.trees.iter().enumerate() {
                    let built;
                    let walk = match walks.each.get(at_tree).filter(|_| kind) {
                        Some(w) => w.as_ref(),
                        None => {
                            built = Walk::new(t, matches!(rows, Rows::Binned(_)));
                            built.as_ref()
                        }
                    };
                    walk::leaves_by(walk, t, rows, |i| range.start + i, &mut at);
                    for (&leaf, o) in at.iter().zip(out.chunks_exact_mut(k)) {
                        for (a, v) in o.iter_mut().zip(t.node_values(leaf as usize)) {
                            *a += v;
                        }
                    }
                }
                let trees = f.trees.len().max(1) as f64;
                out.iter_mut().for_each(|o| *o /= trees);
            }
            Ensemble::AdaBoost(a) => {
                // Every row's votes, a tree at a time (its rows routed together), in the
                // order `predict` adds them, then each row's SAMME probabilities.
                let mut votes = vec![0.0; range.len() * k];
                let mut at = vec![0; range.len()];
                for (t, alpha) in a.trees.iter().zip(&a.alphas) {
                    walk::leaves(t, rows, |i| range.start + i, &mut at);
                    for (&leaf, v) in at.iter().zip(votes.chunks_exact_mut(k)) {
                        if let Some(v) = v.get_mut(argmax(t.node_values(leaf as usize))) {
                            *v += alpha;
                        }
                    }
                }
                samme_rows(a, &votes, k, out);
            }
            Ensemble::Boosting(b) => {
                // Every row's scores, a round at a time (each tree's rows routed together),
                // then each row's prediction as `predict` makes it.
                boosting_rows(b, &b.scores_of(rows, range, b.rounds()), k, out);
            }
            _ => {
                for (r, o) in range.zip(out.chunks_exact_mut(k)) {
                    self.predict(rows, r, o);
                }
            }
        }
    }

    /// [`Model::staged_errors`] on the rows the model was fitted on (`binned`, `outcome`): a
    /// forest's curve as tallied while its trees were added (the same numbers, without a walk
    /// down every tree for every row) when it has one.
    pub fn training_errors(&self, binned: &BinnedMatrix, outcome: &Outcome) -> Option<Vec<f64>> {
        match &self.ensemble {
            Ensemble::Forest(f)
                if f.training_error.len() == f.trees.len() && !f.trees.is_empty() =>
            {
                Some(f.training_error.clone())
            }
            Ensemble::Boosting(b)
                if b.training_error.len() == b.rounds() && !b.trees.is_empty() =>
            {
                Some(b.training_error.clone())
            }
            _ => self.staged_errors(Rows::Binned(binned), outcome),
        }
    }

    /// Accuracy (classes) or root mean squared error (numbers) on `rows`, whose outcome is
    /// `outcome` (class codes in the model's classes' order).
    pub fn performance(&self, rows: Rows<'_>, outcome: &Outcome) -> (&'static str, f64) {
        const BLOCK: usize = 4096;
        let k = self.outputs();
        let n = rows.len();
        let mut p = vec![0.0; BLOCK * k];
        let (mut right, mut sse) = (0usize, 0.0);
        let walks = self.walks(rows);
        for start in (0..n).step_by(BLOCK) {
            let end = (start + BLOCK).min(n);
            let p = &mut p[..(end - start) * k];
            self.predict_rows_by(&walks, rows, start..end, p);
            for (r, p) in (start..end).zip(p.chunks_exact(k)) {
                match outcome {
                    Outcome::Classes { codes, .. } => {
                        right += (argmax(p) == codes[r] as usize) as usize
                    }
                    Outcome::Numbers(v) => sse += (p[0] - v[r]).powi(2),
                }
            }
        }
        match outcome {
            Outcome::Classes { .. } => ("accuracy", right as f64 / n as f64),
            Outcome::Numbers(_) => ("rmse", (sse / n as f64).sqrt()),
        }
    }

    /// The kinds to read a new file's predictor columns as (see [`Predictor::reading_kind`]),
    /// for [`crate::data::ReadOptions::kinds`].
    pub fn reading_kinds(&self) -> Vec<(String, Kind)> {
        self.predictors
            .iter()
            .map(|p| (p.name.clone(), p.reading_kind()))
            .collect()
    }

    /// Reads the model's predictors from `table` (see [`read_records`]).
    /// A column the model's splits never use may be absent (it is read as missing).
    pub fn records(&self, table: &Table) -> Result<(Records, Vec<Unseen>)> {
        read_records(&self.predictors, &self.used_predictors(), table)
    }

    /// Whether some split of some tree uses each predictor.
    pub fn used_predictors(&self) -> Vec<bool> {
        let mut used = vec![false; self.predictors.len()];
        for tree in self.ensemble.trees() {
            for node in tree.nodes.iter().filter(|n| !n.is_leaf()) {
                if let Some(u) = used.get_mut(node.feature as usize) {
                    *u = true;
                }
            }
        }
        used
    }

    /// Checks that every index in the model is in range and every tree is a tree (each node
    /// below the root reached exactly once, children after their parent), so prediction
    /// cannot panic or loop. Models read from files are checked before use.
    pub fn check(&self) -> std::result::Result<(), String> {
        let outputs = self.outputs();
        if let Some(classes) = &self.classes {
            if classes.len() < 2 {
                return Err(format!(
                    "it lists {} class(es); a class model needs at least 2",
                    classes.len()
                ));
            }
        }
        if self.predictors.is_empty() {
            return Err("it lists no predictors".into());
        }
        for (j, p) in self.predictors.iter().enumerate() {
            if let Reading::Category {
                levels,
                bin_of_level,
                pooled_bin,
            } = &p.reading
            {
                if bin_of_level.len() != levels.len() {
                    return Err(format!(
                        "predictor {} ('{}') has {} labels but {} bins for them",
                        j + 1,
                        p.name,
                        levels.len(),
                        bin_of_level.len()
                    ));
                }
                if *pooled_bin == u8::MAX {
                    return Err(format!(
                        "predictor {} ('{}') has pooled bin 255, which is kept for missing values",
                        j + 1,
                        p.name
                    ));
                }
                if let Some(b) = bin_of_level.iter().find(|&&b| b > *pooled_bin) {
                    return Err(format!(
                        "predictor {} ('{}') puts a label in bin {b}, beyond its {} bins",
                        j + 1,
                        p.name,
                        *pooled_bin as usize + 1
                    ));
                }
            }
        }
        match (&self.method, &self.ensemble) {
            (Method::Tree, Ensemble::Tree(_))
            | (Method::Bagging | Method::Forest, Ensemble::Forest(_))
            | (Method::AdaBoost, Ensemble::AdaBoost(_))
            | (Method::Boosting, Ensemble::Boosting(_)) => {}
            _ => {
                return Err(format!(
                    "its members do not match its method '{}'",
                    self.method.word()
                ))
            }
        }
        match &self.ensemble {
            Ensemble::Tree(_) => {}
            Ensemble::Forest(f) => {
                if f.outputs != outputs {
                    return Err(format!(
                        "the forest gives {} value(s) per row but the outcome needs {outputs}",
                        f.outputs
                    ));
                }
            }
            Ensemble::AdaBoost(a) => {
                if self.classes.is_none() || a.classes != outputs {
                    return Err("AdaBoost's classes do not match the outcome's classes".into());
                }
                let total: f64 = a.alphas.iter().sum();
                if !total.is_finite() || a.alphas.iter().any(|&w| w < 0.0) {
                    return Err(
                        "AdaBoost's round weights must be zero or more, with a finite sum".into(),
                    );
                }
                if a.alphas.len() != a.trees.len() || a.errors.len() != a.trees.len() {
                    return Err(format!(
                        "AdaBoost has {} rounds but {} round weights and {} round errors",
                        a.trees.len(),
                        a.alphas.len(),
                        a.errors.len()
                    ));
                }
            }
            Ensemble::Boosting(b) => {
                let classes = self.classes.as_ref().map_or(0, Vec::len);
                if b.loss.for_classes() != self.classes.is_some() || b.classes != classes {
                    return Err(format!(
                        "the {} loss does not fit the outcome's {}",
                        b.loss.word(),
                        if classes == 0 {
                            "numbers".to_string()
                        } else {
                            format!("{classes} classes")
                        }
                    ));
                }
                if b.outputs != b.loss.outputs(classes)
                    || (b.loss.for_classes() && b.loss.outputs(classes) == 1 && classes != 2)
                {
                    return Err(format!(
                        "the {} loss gives {} score(s) per row for {classes} classes",
                        b.loss.word(),
                        b.outputs
                    ));
                }
                if b.initial.len() != b.outputs {
                    return Err(format!(
                        "boosting has {} starting score(s) but {} score(s) per row",
                        b.initial.len(),
                        b.outputs
                    ));
                }
                if b.trees.len() % b.outputs.max(1) != 0 {
                    return Err(format!(
                        "boosting has {} trees, not a whole number of rounds of {}",
                        b.trees.len(),
                        b.outputs
                    ));
                }
            }
        }
        // Boosting's trees each give one score; the others' trees give the prediction.
        let tree_outputs = match &self.ensemble {
            Ensemble::Boosting(_) => 1,
            _ => outputs,
        };
        for (t, tree) in self.ensemble.trees().iter().enumerate() {
            self.check_tree(tree, tree_outputs)
                .map_err(|e| format!("tree {}: {e}", t + 1))?;
        }
        Ok(())
    }

    fn check_tree(&self, tree: &Tree, outputs: usize) -> std::result::Result<(), String> {
        let n = tree.nodes.len();
        if n == 0 {
            return Err("it has no nodes".into());
        }
        if tree.outputs != outputs {
            return Err(format!(
                "it gives {} value(s) per node but should give {outputs}",
                tree.outputs
            ));
        }
        let mut parents = vec![0u32; n];
        for (i, node) in tree.nodes.iter().enumerate() {
            let end = (node.value as usize).checked_add(tree.outputs);
            if end.is_none_or(|e| e > tree.values.len()) {
                return Err(format!(
                    "node {i}'s values start at {}, beyond the {} values stored",
                    node.value,
                    tree.values.len()
                ));
            }
            if node.threshold.is_nan() {
                return Err(format!("node {i} has no threshold"));
            }
            if node.is_leaf() {
                continue;
            }
            let (l, r) = (node.left as usize, node.right as usize);
            for child in [l, r] {
                if child <= i || child >= n {
                    return Err(format!(
                        "node {i} has child {child}; children must come after their parent and \
                         within the tree's {n} nodes"
                    ));
                }
            }
            if l == r {
                return Err(format!("node {i} has the same node {l} on both sides"));
            }
            parents[l] += 1;
            parents[r] += 1;
            let Some(p) = self.predictors.get(node.feature as usize) else {
                return Err(format!(
                    "node {i} splits on predictor {}, but the model has {}",
                    node.feature as usize + 1,
                    self.predictors.len()
                ));
            };
            if node.numeric != p.is_numeric() {
                return Err(format!(
                    "node {i} splits '{}' as a {}, but it is a {}",
                    p.name,
                    if node.numeric { "number" } else { "category" },
                    if p.is_numeric() { "number" } else { "category" }
                ));
            }
            if let Reading::Category { pooled_bin, .. } = &p.reading {
                if let Some(b) =
                    (*pooled_bin as usize + 1..256).find(|&b| node.left_bins().contains(b as u8))
                {
                    return Err(format!(
                        "node {i} sends bin {b} of '{}' left, beyond its {} bins",
                        p.name,
                        *pooled_bin as usize + 1
                    ));
                }
            }
        }
        if let Some(i) = (1..n).find(|&i| parents[i] != 1) {
            return Err(format!(
                "node {i} is reached from {} parents; each node below the root needs exactly one",
                parents[i]
            ));
        }
        Ok(())
    }
}

/// Reads `predictors` from `table` (columns by name, categories by label) as [`Records`] to
/// score, and counts labels training never saw. A predictor that is not `needed` may be
/// absent: its values are then missing. Every absent needed column and every column of the
/// wrong kind is named in one error.
pub fn read_records(
    predictors: &[Predictor],
    needed: &[bool],
    table: &Table,
) -> Result<(Records, Vec<Unseen>)> {
    let (mut missing, mut wrong_kind) = (Vec::new(), Vec::new());
    let mut sources = Vec::with_capacity(predictors.len());
    for (j, p) in predictors.iter().enumerate() {
        let Some(c) = table.column(&p.name) else {
            if needed.get(j).copied().unwrap_or(true) {
                missing.push(p.name.clone());
            }
            sources.push(None);
            continue;
        };
        let fits = match (&p.reading, &c.values) {
            (Reading::Number, Values::Numbers(_)) => true,
            (Reading::YesNo { .. }, Values::Levels { .. }) => true,
            (Reading::YesNo { .. }, Values::Numbers(_)) => c.kind == Kind::YesNo,
            (Reading::Category { .. }, Values::Levels { .. }) => true,
            _ => false,
        };
        if !fits {
            wrong_kind.push(format!(
                "'{}' holds {} here but was {} in training",
                p.name,
                c.kind.label(),
                p.kind.label()
            ));
        }
        sources.push(Some(c));
    }
    if !missing.is_empty() || !wrong_kind.is_empty() {
        return Err(Error::new(ErrorKind::ColumnsForModel {
            missing,
            wrong_kind,
            available: table.columns.iter().map(|c| c.name.clone()).collect(),
        }));
    }
    let rows = table.rows;
    let mut values = vec![f64::NAN; rows * predictors.len()];
    let mut unseen = Vec::new();
    for (j, (p, c)) in predictors.iter().zip(sources).enumerate() {
        let Some(c) = c else { continue };
        let out = &mut values[j * rows..(j + 1) * rows];
        let mut count = 0usize;
        let mut example = None;
        // The value (training bin or 0/1) of each of the column's labels; None: unseen.
        let label_values: Option<(Vec<Option<f64>>, &[u32])> = match (&p.reading, &c.values) {
            (Reading::Number, Values::Numbers(v)) => {
                for (o, &x) in out.iter_mut().zip(v) {
                    *o = x;
                }
                None
            }
            (Reading::YesNo { labels }, Values::Numbers(v)) => {
                // A yes/no column read as such: map each side through its label.
                let sides: Vec<f64> = match &c.yes_no_labels {
                    Some(own) => own
                        .iter()
                        .map(|l| yes_no_side(labels, l).unwrap_or(f64::NAN))
                        .collect(),
                    None => vec![0.0, 1.0],
                };
                for (o, &x) in out.iter_mut().zip(v) {
                    if !x.is_nan() {
                        *o = sides[(x != 0.0) as usize];
                    }
                }
                None
            }
            (Reading::YesNo { labels }, Values::Levels { codes, levels }) => Some((
                levels.iter().map(|l| yes_no_side(labels, l)).collect(),
                codes,
            )),
            (
                Reading::Category {
                    levels: trained,
                    bin_of_level,
                    ..
                },
                Values::Levels { codes, levels },
            ) => {
                let index: std::collections::HashMap<&str, usize> = trained
                    .iter()
                    .enumerate()
                    .map(|(i, l)| (l.as_str(), i))
                    .collect();
                Some((
                    levels
                        .iter()
                        .map(|l| {
                            index
                                .get(l.as_str())
                                .and_then(|&i| bin_of_level.get(i))
                                .map(|&b| b as f64)
                        })
                        .collect(),
                    codes,
                ))
            }
            _ => None, // refused above
        };
        // Unseen labels: a category's pooled bin, or missing for yes/no.
        let (fallback, follows) = match &p.reading {
            Reading::Category { pooled_bin, .. } => (*pooled_bin as f64, "the pooled bin"),
            _ => (f64::NAN, "the missing side"),
        };
        if let Some((map, codes)) = label_values {
            for (o, &code) in out.iter_mut().zip(codes) {
                if code == MISSING_CODE {
                    continue;
                }
                match map.get(code as usize).copied().flatten() {
                    Some(x) => *o = x,
                    None => {
                        count += 1;
                        if example.is_none() {
                            if let Values::Levels { levels, .. } = &c.values {
                                example = levels.get(code as usize).cloned();
                            }
                        }
                        *o = fallback;
                    }
                }
            }
        }
        if count > 0 {
            unseen.push(Unseen {
                predictor: p.name.clone(),
                rows: count,
                example: example.unwrap_or_default(),
                follows,
            });
        }
    }
    Ok((Records::from_columns(rows, values), unseen))
}

/// The 0/1 value of a yes/no label: the training labels first (ignoring case), then yes/no
/// words; `None` for anything else.
fn yes_no_side(labels: &[String; 2], label: &str) -> Option<f64> {
    let t = label.trim();
    if t.eq_ignore_ascii_case(labels[1].trim()) {
        Some(1.0)
    } else if t.eq_ignore_ascii_case(labels[0].trim()) {
        Some(0.0)
    } else {
        yes_no_word(t).map(|yes| yes as u8 as f64)
    }
}

/// Class probabilities from AdaBoost SAMME votes, as scikit-learn's
/// `AdaBoostClassifier.predict_proba` gives them (its SAMME path, from memory): the decision
/// for class k is d_k = (A_k − (W − A_k)/(K − 1)) / W, where A_k is the summed round weight
/// α of the rounds voting for k and W the sum of all α; the probabilities are the softmax of
/// d / (K − 1). (For two classes scikit-learn writes it as a softmax of ±(d_1 − d_0)/2, which
/// is the same.) With no rounds (W = 0) every class gets 1/K.
pub fn samme_probabilities(votes: &[f64], total: f64, out: &mut [f64]) {
    let k = votes.len() as f64;
    if total.is_nan() || total <= 0.0 || votes.len() < 2 {
        out.iter_mut().for_each(|o| *o = 1.0 / k.max(1.0));
        return;
    }
    let decision = |a: f64| (a - (total - a) / (k - 1.0)) / total / (k - 1.0);
    let top = votes
        .iter()
        .map(|&a| decision(a))
        .fold(f64::NEG_INFINITY, f64::max);
    let mut sum = 0.0;
    for (o, &a) in out.iter_mut().zip(votes) {
        *o = (decision(a) - top).exp();
        sum += *o;
    }
    out.iter_mut().for_each(|o| *o /= sum);
}

/// Whether the model stopped early because it was cancelled.
pub fn is_partial(ensemble: &Ensemble) -> bool {
    match ensemble {
        Ensemble::Tree(_) => false,
        Ensemble::Forest(f) => f.partial,
        Ensemble::AdaBoost(a) => a.stop == Stop::Cancelled,
        Ensemble::Boosting(b) => b.partial,
    }
}

/// Adds round `round`'s trees of `b` to the scores of one row.
fn add_boosting_round(b: &Boosting, rows: Rows<'_>, row: usize, round: usize, scores: &mut [f64]) {
    let m = b.outputs;
    for (k, s) in scores.iter_mut().enumerate().take(m) {
        if let Some(tree) = b.trees.get(round * m + k) {
            *s += tree.predict(rows, row).first().copied().unwrap_or(0.0);
        }
    }
}

/// Gradient boosting's scores for one row after `rounds` rounds.
fn boosting_scores(b: &Boosting, rows: Rows<'_>, row: usize, rounds: usize) -> Vec<f64> {
    let mut scores = b.initial.clone();
    for round in 0..rounds {
        add_boosting_round(b, rows, row, round, &mut scores);
    }
    scores
}

/// Gradient boosting's error after each round (error rate, or mean squared error of the
/// predicted number), one pass over the rounds, and the predictions after the last round
/// (`outputs` a row, as [`Model::predict`] gives them).
fn boosting_staged(
    b: &Boosting,
    rows: Rows<'_>,
    outcome: &Outcome,
    outputs: usize,
) -> (Vec<f64>, Vec<f64>) {
    let n = rows.len();
    let mut scores = b.scores(rows, 0);
    let mut p = Vec::new();
    let mut curve = Vec::with_capacity(b.rounds());
    for round in 0..b.rounds() {
        b.add_round(rows, round, &mut scores);
        curve.push(staged_error(b.loss, &scores, b.outputs, outcome, &mut p));
    }
    let mut predictions = vec![0.0; n * outputs.max(1)];
    boosting_rows(b, &scores, outputs, &mut predictions);
    (curve, predictions)
}

/// Each row's predictions from its gradient-boosting scores (`b.outputs` a row), `k` a row
/// into `out`, as [`Model::predict`] makes them.
fn boosting_rows(b: &Boosting, scores: &[f64], k: usize, out: &mut [f64]) {
    let mut p = Vec::with_capacity(k);
    for (s, o) in scores
        .chunks_exact(b.outputs.max(1))
        .zip(out.chunks_exact_mut(k.max(1)))
    {
        b.predict(s, &mut p);
        for (o, v) in o.iter_mut().zip(&p) {
            *o = *v;
        }
    }
}

/// Each row's AdaBoost SAMME probabilities from its summed votes (`k` a row), into `out`, as
/// [`Model::predict`] makes them.
fn samme_rows(a: &AdaBoost, votes: &[f64], k: usize, out: &mut [f64]) {
    let total = a.alphas.iter().sum();
    for (v, o) in votes.chunks_exact(k).zip(out.chunks_exact_mut(k)) {
        samme_probabilities(v, total, o);
    }
}

/// The trees' walks of a model for rows of one kind ([`Model::walks`]).
pub struct Walks {
    binned: bool,
    each: Vec<Option<Walk>>,
}

#[cfg(test)]
mod tests {
    use crate::fit::forest_from_csv;
    use crate::tree::Rows;

    #[test]
    fn one_walk_gives_a_forests_error_by_size_and_its_predictions_to_the_bit() {
        // Two ways of computing the same sums (our own consistency rule, no source needed).
        let mut text = String::from("y,a,b,c\n");
        for i in 0..300u64 {
            let (a, b) = ((i * 37) % 101, (i * 53) % 89);
            let y = ["p", "q", "r"][((a + b + i % 7) % 3) as usize];
            text += &format!("{y},{a},{b},{}\n", ["k", "l", "m"][(i % 3) as usize]);
        }
        let (table, fitted) = forest_from_csv(&text, 25);
        let (model, outcome) = (&fitted.model, &fitted.design.outcome);
        let (records, _) = model.records(&table).unwrap();
        let rows = Rows::Records(&records);
        let (curve, predictions) = model.staged_errors_and_predictions(rows, outcome);
        let mut direct = vec![0.0; records.rows * model.outputs()];
        model.predict_rows(rows, 0..records.rows, &mut direct);
        let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
        assert_eq!(bits(&predictions.unwrap()), bits(&direct));
        assert_eq!(curve, model.staged_errors(rows, outcome));
        assert_eq!(curve.map(|c| c.len()), Some(25));
    }

    /// Every row's predictions, each row on its own (`Model::predict`).
    fn row_by_row(model: &super::Model, rows: Rows<'_>) -> Vec<f64> {
        let k = model.outputs();
        let mut out = vec![0.0; rows.len() * k];
        for (r, o) in out.chunks_exact_mut(k).enumerate() {
            model.predict(rows, r, o);
        }
        out
    }

    /// Every row's predictions, in blocks of 64 rows (`Model::predict_rows`).
    fn in_blocks(model: &super::Model, rows: Rows<'_>) -> Vec<f64> {
        let (k, n) = (model.outputs(), rows.len());
        let mut out = vec![0.0; n * k];
        for start in (0..n).step_by(64) {
            let end = (start + 64).min(n);
            model.predict_rows(rows, start..end, &mut out[start * k..end * k]);
        }
        out
    }

    #[test]
    fn boosting_predicts_blocks_and_staged_rows_as_a_row_alone_does() {
        // Gradient boosting's rows routed down each round's trees together, against a row
        // alone walking them (our own consistency rule, no source needed): predictions of
        // blocks, the last staged predictions and the staged errors, to the bit, for two
        // and three classes and a number, on records and on the training bins; the training
        // error the fit tallied from its own scores (with every row a round, half of them,
        // and early stopping) is the staged error on the training bins, to the bit.
        use crate::design::Outcome;
        use crate::ensemble::boosting::Stopping;
        use crate::fit::model_from_csv;
        use crate::model::{Ensemble, Method};
        let set = |pairs: &[(&str, &str)]| -> Vec<(String, String)> {
            pairs.iter().map(|&(k, v)| (k.into(), v.into())).collect()
        };
        let variants = [
            set(&[("rounds", "12")]),
            set(&[("rounds", "12"), ("row_fraction", "0.6")]),
            set(&[
                ("rounds", "60"),
                ("learning_rate", "0.8"),
                ("patience", "2"),
            ]),
        ];
        for (outcome, sets) in ["two", "three", "number"]
            .into_iter()
            .flat_map(|o| variants.iter().map(move |s| (o, s)))
        {
            let mut text = String::from("y,a,b,c\n");
            for i in 0..300u64 {
                let (a, b) = ((i * 37) % 101, (i * 53) % 89);
                let y = match outcome {
                    "two" => ["p", "q"][((a + 2 * b + i % 5) % 2) as usize].to_string(),
                    "three" => ["p", "q", "r"][((a + b + i % 7) % 3) as usize].to_string(),
                    _ => format!("{}", a as f64 * 0.3 - b as f64 / 7.0 + (i % 5) as f64),
                };
                let c = match i % 9 {
                    0 => String::new(),
                    _ => ["k", "l", "m"][(i % 3) as usize].to_string(),
                };
                let (a, b) = (a as f64 / 8.0 + 3.0, 1000.0 - 2.5 * b as f64);
                text += &format!("{y},{a},{b},{c}\n");
            }
            let (table, fitted) = model_from_csv(&text, Method::Boosting, sets);
            let model = &fitted.model;
            let (records, _) = model.records(&table).unwrap();
            let k = model.outputs();
            let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
            for rows in [Rows::Records(&records), Rows::Binned(&fitted.binned)] {
                let n = rows.len();
                let want = row_by_row(model, rows);
                assert_eq!(bits(&in_blocks(model, rows)), bits(&want), "{outcome}");
                let y = &fitted.design.outcome;
                let (curve, staged) = model.staged_errors_and_predictions(rows, y);
                assert_eq!(staged.map(|p| bits(&p)), Some(bits(&want)), "{outcome}");
                // The curve from each row's staged predictions, one by one.
                let rounds = model.members();
                let mut err = vec![0.0; rounds];
                for r in 0..n {
                    let p = model.staged_predict(rows, r);
                    for (t, e) in err.iter_mut().enumerate() {
                        let p = &p[t * k..(t + 1) * k];
                        *e += match y {
                            Outcome::Classes { codes, .. } => {
                                (crate::ensemble::forest::argmax(p) != codes[r] as usize) as u8
                                    as f64
                            }
                            Outcome::Numbers(v) => (p[0] - v[r]).powi(2),
                        };
                    }
                }
                let want_curve: Vec<f64> = err.iter().map(|e| e / n as f64).collect();
                assert_eq!(
                    curve.map(|c| bits(&c)),
                    Some(bits(&want_curve)),
                    "{outcome}"
                );
                if let Rows::Binned(binned) = rows {
                    let Ensemble::Boosting(b) = &model.ensemble else {
                        unreachable!()
                    };
                    assert_eq!(
                        b.training_error.len(),
                        rounds,
                        "{outcome} {sets:?}: tallied"
                    );
                    let tallied = model.training_errors(binned, y).map(|c| bits(&c));
                    assert_eq!(tallied, Some(bits(&want_curve)), "{outcome} {sets:?}");
                }
            }
            if sets.iter().any(|(k, _)| k == "patience") {
                let Ensemble::Boosting(b) = &model.ensemble else {
                    unreachable!()
                };
                assert!(
                    matches!(b.stopping, Stopping::Early { .. }),
                    "{outcome}: {:?} after {} rounds",
                    b.stopping,
                    b.rounds()
                );
            }
        }
    }

    #[test]
    fn adaboost_staged_votes_and_blocks_give_the_predictions_a_row_alone_gets() {
        // (Our own consistency rule, no source needed.) Two and three classes.
        use crate::fit::model_from_csv;
        use crate::model::Method;
        for labels in [&["p", "q"][..], &["p", "q", "r"][..]] {
            let mut text = String::from("y,a,b,c\n");
            for i in 0..300u64 {
                let (a, b) = ((i * 37) % 101, (i * 53) % 89);
                let y = labels[((a + 2 * b + i % 5) % labels.len() as u64) as usize];
                text += &format!("{y},{a},{b},{}\n", ["k", "l", "m"][(i % 3) as usize]);
            }
            let sets = [("trees".to_string(), "15".to_string())];
            let (table, fitted) = model_from_csv(&text, Method::AdaBoost, &sets);
            let model = &fitted.model;
            let (records, _) = model.records(&table).unwrap();
            let rows = Rows::Records(&records);
            let want = row_by_row(model, rows);
            let (curve, staged) = model.staged_errors_and_predictions(rows, &fitted.design.outcome);
            let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
            assert_eq!(staged.map(|p| bits(&p)), Some(bits(&want)));
            assert_eq!(curve, model.staged_errors(rows, &fitted.design.outcome));
            assert_eq!(bits(&in_blocks(model, rows)), bits(&want));
        }
    }

    #[test]
    fn walks_built_once_predict_blocks_as_fresh_walks_do() {
        // Predictions of blocks of rows by walks built beforehand, of the same kind of rows
        // or of the other kind (binned; so built again), against `predict`, row by row (our
        // own consistency rule, no source needed).
        let mut text = String::from("y,a,b,c\n");
        for i in 0..300u64 {
            let (a, b) = ((i * 37) % 101, (i * 53) % 89);
            let y = ["p", "q"][((a + 2 * b + i % 5) % 2) as usize];
            let c = match i % 9 {
                0 => String::new(),
                _ => ["k", "l", "m"][(i % 3) as usize].to_string(),
            };
            // Values unlike their bins' numbers, so walks of the other kind would go astray.
            let (a, b) = (a as f64 / 8.0 + 3.0, 1000.0 - 2.5 * b as f64);
            text += &format!("{y},{a},{b},{c}\n");
        }
        let (table, fitted) = forest_from_csv(&text, 15);
        let model = &fitted.model;
        let (records, _) = model.records(&table).unwrap();
        let rows = Rows::Records(&records);
        let k = model.outputs();
        let want = row_by_row(model, rows);
        let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
        for walks in [model.walks(rows), model.walks(Rows::Binned(&fitted.binned))] {
            let mut got = vec![0.0; records.rows * k];
            for start in (0..records.rows).step_by(64) {
                let end = (start + 64).min(records.rows);
                model.predict_rows_by(&walks, rows, start..end, &mut got[start * k..end * k]);
            }
            assert_eq!(bits(&got), bits(&want));
        }
    }
}
