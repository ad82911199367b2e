//! Gradient boosting (Friedman, Ann Stat 2001;29:1189–1232) on the one tree grower: each
//! round computes every row's gradient and hessian of the loss ([`super::loss`]) at the
//! current scores, grows a tree on them with the [`Criterion::Gradient`] criterion (leaf value
//! `−G/(H + λ)`, a Newton step with an L2 penalty: Chen & Guestrin 2016), replaces the leaf
//! values by the median-type update for absolute error and Huber, shrinks the tree by the
//! learning rate and adds it to the scores. Softmax grows one tree per class per round, all on
//! the gradients at the start of the round.
//!
//! Options: a random share of the rows per round, drawn without replacement (stochastic
//! gradient boosting, Friedman, Comput Stat Data Anal 2002;38:367–378); a random share of the
//! predictors per tree; monotone constraints per predictor (bounds carried by the grower);
//! early stopping on a held-out share of the rows (stratified by class), with a patience in
//! rounds, keeping the rounds up to the best validation loss. All draws come from
//! `random::stream(seed, purpose, index)`; the progress observer sees one step per round and
//! may cancel, which leaves the rounds fitted so far, marked partial.

use std::ops::Range;

use crate::binning::{BinRule, BinnedMatrix};
use crate::design::{Design, Outcome};
use crate::ensemble::forest::argmax;
use crate::ensemble::loss::{logistic_gradients, softmax_gradients, Loss};
use crate::error::{Error, ErrorKind, Result};
use crate::progress::{Flow, Progress};
use crate::random::{below, stream, Purpose};
use crate::tree::criterion::Criterion;
use crate::tree::grower::{grow_rows, Constraints, GrowSettings, Grown};
use crate::tree::{walk, Rows, Tree};

/// Settings of gradient boosting. `grow.criterion` is set to [`Criterion::Gradient`] with
/// `l2` by [`fit_boosting`].
#[derive(Debug, Clone, PartialEq)]
pub struct BoostingSettings {
    /// `None`: logistic for two classes, softmax for more, squared error for numbers.
    pub loss: Option<Loss>,
    pub rounds: usize,
    pub learning_rate: f64,
    /// L2 penalty λ on leaf values.
    pub l2: f64,
    /// Rows drawn (without replacement) for each round, as a share of the training rows.
    pub row_fraction: f64,
    /// Predictors drawn for each tree, as a share (at least one).
    pub predictor_fraction: f64,
    /// Stop after this many rounds without a better validation loss (`None`: no early stop).
    pub patience: Option<usize>,
    /// Share of the rows held out for early stopping.
    pub validation_share: f64,
    /// Per predictor (binned column order): +1 rising, −1 falling, 0 free; empty: none.
    pub monotone: Vec<i8>,
    pub seed: u64,
    pub grow: GrowSettings,
}

impl Default for BoostingSettings {
    fn default() -> Self {
        BoostingSettings {
            loss: None,
            rounds: 100,
            learning_rate: 0.1,
            l2: 0.0,
            row_fraction: 1.0,
            predictor_fraction: 1.0,
            patience: None,
            validation_share: 0.1,
            monotone: Vec::new(),
            seed: 1,
            // 31 leaves grown best-first, at least 20 rows and 0.001 hessian per leaf: the
            // defaults of LightGBM and of scikit-learn's HistGradientBoosting (from memory).
            grow: GrowSettings {
                criterion: Criterion::Gradient { l2: 0.0 },
                max_leaves: Some(31),
                min_rows_leaf: 20,
                min_weight_leaf: 1e-3,
                ..GrowSettings::default()
            },
        }
    }
}

/// Why boosting stopped.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Stopping {
    AllRounds,
    /// The validation loss did not improve for `patience` rounds after round `best` (1-based).
    Early {
        best: usize,
        last: usize,
    },
    Cancelled,
}

/// A fitted gradient-boosting model.
#[derive(Debug, Clone)]
pub struct Boosting {
    pub loss: Loss,
    /// Classes of the outcome (0 for numbers).
    pub classes: usize,
    /// Scores per row.
    pub outputs: usize,
    /// The starting scores (the loss's best constant).
    pub initial: Vec<f64>,
    /// Round `r`'s tree for output `k` is `trees[r * outputs + k]`; the learning rate is
    /// already in its values.
    pub trees: Vec<Tree>,
    /// Mean training loss (rows not held out) at the start and after each fitted round.
    pub training_loss: Vec<f64>,
    /// Mean loss of the held-out rows at the start and after each fitted round (empty
    /// without early stopping).
    pub validation_loss: Vec<f64>,
    /// Rows held out for early stopping (design row order).
    pub held_out: Vec<u32>,
    /// Error on every training row (held-out ones too) after each round kept, as
    /// [`crate::model::Model::staged_errors`] gives it (to the last digit), tallied from the
    /// fit's own scores as the rounds were fitted; empty when not known (a model read from a
    /// file).
    pub training_error: Vec<f64>,
    pub stopping: Stopping,
    /// Cancelled before the last round.
    pub partial: bool,
}

impl Boosting {
    /// Why it stopped, in words for people.
    pub fn stopping_words(&self) -> String {
        match self.stopping {
            Stopping::AllRounds => "ran every round".into(),
            Stopping::Early { best, last } => format!(
                "stopped early at round {last}: the held-out loss was lowest after round {best}, \
                 and the model keeps rounds 1 to {best}"
            ),
            Stopping::Cancelled => "cancelled before the last round (partial model)".into(),
        }
    }

    /// Rounds kept in the model.
    pub fn rounds(&self) -> usize {
        self.trees.len() / self.outputs.max(1)
    }

    /// Adds round `round`'s trees to `scores` (`outputs` per row of `rows`).
    pub fn add_round(&self, rows: Rows<'_>, round: usize, scores: &mut [f64]) {
        let mut at = vec![0; rows.len()];
        self.add_round_of(rows, |i| i, round, scores, &mut at);
    }

    /// [`Boosting::add_round`] for rows `row(i)`, `i` in `0..at.len()` (`scores`: `outputs`
    /// per row, in that order; `at`, room for their leaves). The rows are routed down each
    /// tree together ([`walk::leaves`]: the leaves [`Tree::leaf`] finds row by row), each
    /// row's scores added to in the order a row alone adds them.
    fn add_round_of(
        &self,
        rows: Rows<'_>,
        row: impl Fn(usize) -> usize + Copy,
        round: usize,
        scores: &mut [f64],
        at: &mut [u32],
    ) {
        let m = self.outputs;
        for k in 0..m {
            let tree = &self.trees[round * m + k];
            walk::leaves(tree, rows, row, at);
            for (s, &leaf) in scores.chunks_exact_mut(m).zip(&*at) {
                s[k] += tree.node_values(leaf as usize)[0];
            }
        }
    }

    /// Scores of every row of `rows` after `rounds` rounds (staged scores).
    pub fn scores(&self, rows: Rows<'_>, rounds: usize) -> Vec<f64> {
        self.scores_of(rows, 0..rows.len(), rounds)
    }

    /// Scores of rows `range` of `rows` after `rounds` rounds, row after row: the numbers a
    /// row alone gets, to the last digit.
    pub fn scores_of(&self, rows: Rows<'_>, range: Range<usize>, rounds: usize) -> Vec<f64> {
        let mut s: Vec<f64> = range
            .clone()
            .flat_map(|_| self.initial.iter().copied())
            .collect();
        let mut at = vec![0; range.len()];
        for round in 0..rounds.min(self.rounds()) {
            self.add_round_of(rows, |i| range.start + i, round, &mut s, &mut at);
        }
        s
    }

    /// One row's prediction from its scores: class probabilities, or the predicted number.
    pub fn predict(&self, scores: &[f64], out: &mut Vec<f64>) {
        self.loss.predict(scores, out);
    }
}

/// The error of rows whose scores after a round are `scores` (`outputs` a row, in row
/// order) against `outcome`: the share misclassified, or the mean squared error of the
/// predictions. The one sum behind [`Boosting::training_error`] and the staged errors of
/// [`crate::model::Model::staged_errors`], so both give the same numbers. `p`: room for one
/// row's predictions.
pub fn staged_error(
    loss: Loss,
    scores: &[f64],
    outputs: usize,
    outcome: &Outcome,
    p: &mut Vec<f64>,
) -> f64 {
    let mut err = 0.0;
    let mut n = 0usize;
    for (r, s) in scores.chunks_exact(outputs.max(1)).enumerate() {
        loss.predict(s, p);
        err += match outcome {
            Outcome::Classes { codes, .. } => (argmax(p) != codes[r] as usize) as u8 as f64,
            Outcome::Numbers(y) => (p[0] - y[r]).powi(2),
        };
        n += 1;
    }
    err / n as f64
}

/// The loss, outcome and constraints checked together; every refusal says what to change.
fn check(
    design: &Design,
    binned: &BinnedMatrix,
    settings: &BoostingSettings,
) -> Result<(Loss, Vec<f64>, usize)> {
    let bad = |setting: &str, reason: String| {
        Error::new(ErrorKind::BadSetting {
            setting: setting.into(),
            reason,
        })
    };
    let name = &design.outcome_name;
    let (y, classes): (Vec<f64>, usize) = match &design.outcome {
        Outcome::Classes { codes, labels } => {
            (codes.iter().map(|&c| c as f64).collect(), labels.len())
        }
        Outcome::Numbers(v) => (v.clone(), 0),
    };
    let loss = match settings.loss {
        Some(l) => l,
        None if classes == 2 => Loss::Logistic,
        None if classes > 2 => Loss::Softmax,
        None => Loss::SquaredError,
    };
    if classes > 0 && !loss.for_classes() {
        return Err(bad(
            "loss",
            format!(
                "the {} loss is for number outcomes, but '{name}' holds classes; use logistic \
                 (two classes) or softmax",
                loss.word()
            ),
        ));
    }
    if classes == 0 && loss.for_classes() {
        return Err(bad(
            "loss",
            format!(
                "the {} loss is for class outcomes, but '{name}' holds numbers; use \
                 squared_error, absolute_error, huber or poisson (or make '{name}' a category)",
                loss.word()
            ),
        ));
    }
    if loss == Loss::Logistic && classes != 2 {
        return Err(bad(
            "loss",
            format!("logistic is for two classes and '{name}' has {classes}; use softmax"),
        ));
    }
    if loss == Loss::Poisson {
        if let Some(i) = y.iter().position(|&v| v < 0.0) {
            return Err(bad(
                "loss",
                format!(
                    "poisson needs counts (zero or more), but '{name}' is {} in data row {}; \
                     use squared_error or huber, or correct the value",
                    y[i],
                    design.rows[i] + 1
                ),
            ));
        }
        if y.iter().all(|&v| v == 0.0) {
            return Err(bad(
                "loss",
                format!("poisson needs some counts above zero, and '{name}' is zero in every row"),
            ));
        }
    }
    if let Loss::Huber { quantile } = loss {
        if !(quantile > 0.0 && quantile < 1.0) {
            return Err(bad(
                "huber_quantile",
                format!("{quantile} must lie strictly between 0 and 1 (0.9 is usual)"),
            ));
        }
    }
    for (j, &sign) in settings.monotone.iter().enumerate() {
        if sign == 0 {
            continue;
        }
        let Some(col) = binned.columns.get(j) else {
            continue;
        };
        if matches!(col.rule, BinRule::Levels { .. }) {
            return Err(bad(
                "monotone",
                format!(
                    "'{}' is a category, and a category has no order to rise or fall with; \
                     constrain only number predictors, or give the column an ordered numeric code",
                    col.name
                ),
            ));
        }
        if loss == Loss::Softmax {
            return Err(bad(
                "monotone",
                format!(
                    "monotone constraints need one score per record (two classes or a number); \
                     '{name}' has {classes} classes, and with one score per class the class \
                     probabilities could still fall against the constraint. Merge the classes \
                     into two, or leave the constraint out"
                ),
            ));
        }
        if matches!(loss, Loss::AbsoluteError | Loss::Huber { .. }) {
            return Err(bad(
                "monotone",
                format!(
                    "monotone constraints work with the logistic, squared_error and poisson \
                     losses, not with {} (its leaf values are medians, not held within the \
                     constraint's bounds)",
                    loss.word()
                ),
            ));
        }
    }
    Ok((loss, y, classes))
}

/// Splits the rows into (fitting, held out) for early stopping: the share from every class
/// (numbers: from all rows), drawn from the `BoostHoldout` stream.
fn hold_out(
    y: &[f64],
    design: &Design,
    settings: &BoostingSettings,
) -> Result<(Vec<u32>, Vec<u32>)> {
    let n = y.len();
    let outcome = &design.outcome_name;
    // Groups drawn from separately: each class (with its label), or all rows.
    let groups: Vec<(String, Vec<u32>)> = match &design.outcome {
        Outcome::Classes { labels, .. } => {
            let mut g: Vec<(String, Vec<u32>)> =
                labels.iter().map(|l| (l.clone(), Vec::new())).collect();
            for (r, &c) in y.iter().enumerate() {
                g[c as usize].1.push(r as u32);
            }
            g.retain(|g| !g.1.is_empty());
            g
        }
        Outcome::Numbers(_) => vec![(String::new(), (0..n as u32).collect())],
    };
    let too_few = |reason: String| {
        Error::new(ErrorKind::BadSetting {
            setting: "patience".into(),
            reason,
        })
    };
    let share = settings.validation_share;
    let mut rng = stream(settings.seed, Purpose::BoostHoldout, 0);
    let mut held = Vec::new();
    for (label, mut g) in groups {
        let take = (share * g.len() as f64).round() as usize;
        // A class absent from either part can be neither judged nor learnt.
        if take == 0 || take >= g.len() {
            return Err(too_few(format!(
                "early stopping holds out {:.0}% of each class of '{outcome}', but class \
                 '{label}' has {} row(s), too few to be on both sides. Change validation_share, \
                 add records of that class, or leave patience unset to fit every round",
                share * 100.0,
                g.len()
            )));
        }
        for k in 0..take {
            let j = k + below(&mut rng, g.len() - k);
            g.swap(k, j);
        }
        held.extend_from_slice(&g[..take]);
    }
    // Fewer than 10 held-out rows judge a stopping round by noise (common practice, no
    // source).
    if held.len() < 10 {
        return Err(too_few(format!(
            "early stopping holds out {:.0}% of the {n} rows of '{outcome}', which gives {} \
             row(s); at least 10 are needed. Raise validation_share, or leave patience unset \
             to fit every round",
            share * 100.0,
            held.len()
        )));
    }
    held.sort_unstable();
    let mut is_held = vec![false; n];
    for &r in &held {
        is_held[r as usize] = true;
    }
    let fit = (0..n as u32).filter(|&r| !is_held[r as usize]).collect();
    Ok((fit, held))
}

/// Fits gradient boosting on `binned` (the design's predictors) with row weights `weights`.
pub fn fit_boosting(
    binned: &BinnedMatrix,
    design: &Design,
    weights: Option<&[f64]>,
    settings: &BoostingSettings,
    progress: &mut dyn Progress,
) -> Result<Boosting> {
    fit_boosting_with(binned, design, weights, settings, true, progress)
}

/// [`fit_boosting`]; with `training_loss` false (a fit judged and then dropped, a validation
/// split's) the training loss by round, which only a kept model shows, is left empty, and
/// no round takes a logarithm a row for it (about 7% of a two-class 5-fold CV). Everything
/// else is the same to the bit: the trees, the training error and the validation loss.
pub fn fit_boosting_with(
    binned: &BinnedMatrix,
    design: &Design,
    weights: Option<&[f64]>,
    settings: &BoostingSettings,
    training_loss: bool,
    progress: &mut dyn Progress,
) -> Result<Boosting> {
    let (loss, y, classes) = check(design, binned, settings)?;
    let n = binned.rows;
    let m = loss.outputs(classes);
    let p = binned.columns.len();
    let (fit_rows, held) = match settings.patience {
        Some(_) => hold_out(&y, design, settings)?,
        None => ((0..n as u32).collect(), Vec::new()),
    };
    let mut grow_settings = settings.grow;
    grow_settings.criterion = Criterion::Gradient { l2: settings.l2 };
    let initial = loss.initial(&y, weights, &fit_rows, classes);
    let mut scores: Vec<f64> = (0..n).flat_map(|_| initial.iter().copied()).collect();
    let mut model = Boosting {
        loss,
        classes,
        outputs: m,
        initial,
        trees: Vec::with_capacity(settings.rounds * m),
        training_loss: Vec::with_capacity(settings.rounds + 1),
        validation_loss: Vec::new(),
        held_out: held.clone(),
        training_error: Vec::with_capacity(settings.rounds),
        stopping: Stopping::AllRounds,
        partial: false,
    };
    // Huber's δ for the curves: the one of the last round (at the start, of the first).
    let mut delta = loss.huber_delta(&y, &scores, weights, &fit_rows);
    let value = |s: &[f64], rows: &[u32], d: Option<f64>| loss.value(&y, s, weights, m, d, rows);
    // Class losses: the training loss, error and next gradients from one pass (see
    // `Loss::logistic_pass`, `Loss::softmax_pass`), each row's probabilities kept between.
    let classed = matches!(loss, Loss::Logistic | Loss::Softmax);
    let mut probs = vec![0.0; if classed { n * m } else { 0 }];
    // The rows whose mean loss is taken: none when the training loss is not kept.
    let loss_rows: &[u32] = if training_loss { &fit_rows } else { &[] };
    let class_pass = |scores: &[f64], probs: &mut [f64]| match loss {
        Loss::Logistic => Loss::logistic_pass(&y, scores, weights, loss_rows, probs),
        _ => Loss::softmax_pass(&y, scores, m, weights, loss_rows, probs),
    };
    let first = match classed {
        true => class_pass(&scores, &mut probs).0,
        false if training_loss => value(&scores, &fit_rows, delta),
        false => f64::NAN,
    };
    if training_loss {
        model.training_loss.push(first);
    }
    if !held.is_empty() {
        model.validation_loss.push(value(&scores, &held, delta));
    }
    let take =
        ((settings.row_fraction * fit_rows.len() as f64).round() as usize).clamp(1, fit_rows.len());
    let keep_predictors =
        ((settings.predictor_fraction * p as f64).round() as usize).clamp(1, p.max(1));
    let mut stats = vec![0.0; 2 * n * m];
    let mut sample = fit_rows.clone();
    let mut in_sample = vec![false; if take < n { n } else { 0 }];
    let mut predicted = Vec::with_capacity(m.max(2));
    // The lowest validation loss so far and its round (0: the starting constant).
    let mut best = (
        model.validation_loss.first().copied().unwrap_or(0.0),
        0usize,
    );
    let constraints = Constraints {
        monotone: &settings.monotone,
    };
    for round in 0..settings.rounds {
        // Rows of this round: all, or a share drawn without replacement, in row order (which
        // keeps the histogram's memory reads in order).
        if take < fit_rows.len() {
            sample.clone_from(&fit_rows);
            let mut rng = stream(settings.seed, Purpose::BoostRows, round as u64);
            for k in 0..take {
                let j = k + below(&mut rng, sample.len() - k);
                sample.swap(k, j);
            }
            sample.truncate(take);
            sample.sort_unstable();
        }
        delta = loss.huber_delta(&y, &scores, weights, &sample);
        for k in 0..m {
            let out = &mut stats[2 * n * k..2 * n * (k + 1)];
            match loss {
                Loss::Logistic => logistic_gradients(&y, &probs, weights, &sample, out),
                Loss::Softmax => softmax_gradients(&y, &probs, (k, m), weights, &sample, out),
                _ => loss.gradients(&y, &scores, weights, k, m, delta, &sample, out),
            }
        }
        for k in 0..m {
            let index = (round * m + k) as u64;
            let mut chosen = vec![keep_predictors >= p; p];
            if keep_predictors < p {
                let mut rng = stream(settings.seed, Purpose::BoostPredictors, index);
                let mut all: Vec<usize> = (0..p).collect();
                for i in 0..keep_predictors {
                    let j = i + below(&mut rng, p - i);
                    all.swap(i, j);
                    chosen[all[i]] = true;
                }
            }
            let mut choose = |c: &mut Vec<usize>| c.retain(|&j| chosen[j]);
            let Grown {
                mut tree,
                rows: placed,
                spans,
            } = grow_rows(
                binned,
                &stats[2 * n * k..2 * n * (k + 1)],
                2,
                &sample,
                &grow_settings,
                Some(&mut choose),
                constraints,
            );
            // The leaves of the tree and the round's rows in each (the grower's partition).
            let leaves: Vec<(usize, &[u32])> = (0..tree.nodes.len())
                .filter(|&i| tree.nodes[i].is_leaf())
                .map(|i| (i, &placed[spans[i].0..spans[i].1]))
                .collect();
            if matches!(loss, Loss::AbsoluteError | Loss::Huber { .. }) {
                // Median-type leaf values from the residuals of the round's rows per leaf.
                let mut res = Vec::new();
                for &(i, rows) in &leaves {
                    res.clear();
                    res.extend(rows.iter().map(|&r| {
                        let r = r as usize;
                        (y[r] - scores[r], weights.map_or(1.0, |w| w[r]))
                    }));
                    if !res.is_empty() {
                        if let Some(v) = loss.leaf_value(&mut res, delta) {
                            tree.values[tree.nodes[i].value as usize] = v;
                        }
                    }
                }
            }
            tree.values
                .iter_mut()
                .for_each(|v| *v *= settings.learning_rate);
            // Scores: the round's rows from their leaves, the others down the tree.
            for &(i, rows) in &leaves {
                let v = tree.values[tree.nodes[i].value as usize];
                for &r in rows {
                    scores[r as usize * m + k] += v;
                }
            }
            if sample.len() < n {
                in_sample.iter_mut().for_each(|s| *s = false);
                for &r in &sample {
                    in_sample[r as usize] = true;
                }
                // Routed down the tree together (the leaves `Tree::leaf` finds row by row).
                let outside: Vec<u32> = (0..n as u32).filter(|&r| !in_sample[r as usize]).collect();
                let mut at = vec![0; outside.len()];
                walk::leaves(
                    &tree,
                    Rows::Binned(binned),
                    |i| outside[i] as usize,
                    &mut at,
                );
                for (&r, &leaf) in outside.iter().zip(&at) {
                    scores[r as usize * m + k] += tree.node_values(leaf as usize)[0];
                }
            }
            model.trees.push(tree);
        }
        let (training, error) = match classed {
            true => class_pass(&scores, &mut probs),
            false => (
                match training_loss {
                    true => value(&scores, &fit_rows, delta),
                    false => f64::NAN,
                },
                staged_error(loss, &scores, m, &design.outcome, &mut predicted),
            ),
        };
        if training_loss {
            model.training_loss.push(training);
        }
        model.training_error.push(error);
        if !held.is_empty() {
            let v = value(&scores, &held, delta);
            model.validation_loss.push(v);
            if v < best.0 - 1e-12 * best.0.abs() {
                best = (v, round + 1);
            }
            if let Some(patience) = settings.patience {
                if round + 1 - best.1 >= patience && round + 1 < settings.rounds {
                    model.stopping = Stopping::Early {
                        best: best.1,
                        last: round + 1,
                    };
                    model.trees.truncate(best.1 * m);
                    model.training_error.truncate(best.1);
                    break;
                }
            }
        }
        if progress.step("rounds", round as u64 + 1, settings.rounds as u64) == Flow::Stop {
            model.stopping = Stopping::Cancelled;
            model.partial = round + 1 < settings.rounds;
            break;
        }
    }
    Ok(model)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::binning::{bin_design, BinSettings, Records};
    use crate::design::design_from_csv;
    use crate::progress::{Silent, StopAfter};

    /// Seeded data: y depends on a and b (plus noise), c is noise, d a category.
    fn data(rows: usize, kind: &str, seed: u64) -> String {
        let mut rng = stream(seed, Purpose::TreeRows, 0);
        let mut u = || below(&mut rng, 1_000_000) as f64 / 1_000_000.0;
        let mut text = String::from("y,a,b,c,d\n");
        for _ in 0..rows {
            let (a, b, c, noise) = (u(), u(), u(), u());
            let d = ["p", "q", "r"][(u() * 3.0) as usize];
            let signal = 3.0 * a + (6.0 * b).sin() + if d == "q" { 1.0 } else { 0.0 };
            let y = match kind {
                "binary" => ((signal + noise > 2.2) as u8).to_string(),
                "classes" => {
                    ["u", "v", "w"][((signal + noise) / 1.7).clamp(0.0, 2.0) as usize].to_string()
                }
                "counts" => ((signal + 1.0 + 2.0 * noise).max(0.0).floor()).to_string(),
                _ => format!("{}", signal + noise),
            };
            text += &format!("{y},{a},{b},{c},{d}\n");
        }
        text
    }

    fn setup(text: &str) -> (BinnedMatrix, Design) {
        let design = design_from_csv(text, "y", &["a", "b", "c", "d"]);
        (bin_design(&design, BinSettings::default()).unwrap(), design)
    }

    #[test]
    fn a_fit_without_its_training_loss_is_otherwise_the_same() {
        // Our own consistency rule (no source needed): leaving the training loss out (a
        // validation split's fit) changes nothing else, to the bit: the trees, the tallied
        // training error, the validation loss and where early stopping ends.
        for (kind, loss) in [
            ("binary", Loss::Logistic),
            ("classes", Loss::Softmax),
            ("numbers", Loss::SquaredError),
            ("numbers", Loss::Huber { quantile: 0.9 }),
        ] {
            let (m, design) = setup(&data(400, kind, 3));
            for (row_fraction, patience) in [(1.0, None), (0.6, Some(3))] {
                let settings = BoostingSettings {
                    loss: Some(loss),
                    rounds: 30,
                    learning_rate: 0.5,
                    row_fraction,
                    patience,
                    ..BoostingSettings::default()
                };
                let kept = fit_boosting(&m, &design, None, &settings, &mut Silent).unwrap();
                let left =
                    fit_boosting_with(&m, &design, None, &settings, false, &mut Silent).unwrap();
                let what = format!("{loss:?}, rows {row_fraction}, patience {patience:?}");
                // Kept: the start and every round fitted (early stopping keeps fewer trees).
                assert!(
                    kept.training_loss.len() > kept.training_error.len(),
                    "{what}"
                );
                assert!(left.training_loss.is_empty(), "{what}");
                assert_eq!(left.trees, kept.trees, "{what}");
                let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
                assert_eq!(
                    bits(&left.training_error),
                    bits(&kept.training_error),
                    "{what}"
                );
                assert_eq!(
                    bits(&left.validation_loss),
                    bits(&kept.validation_loss),
                    "{what}"
                );
                assert_eq!(left.stopping, kept.stopping, "{what}");
            }
        }
    }

    #[test]
    fn training_loss_never_rises_without_subsampling() {
        // Property (issue 4; common practice, no source): with learning rate ≤ 1 and every row
        // each round, a Newton step on a convex loss does not raise the training loss. Absolute
        // error and Huber are left out: their δ and median leaves are not Newton steps on the
        // reported loss. Four seeds, each loss, two learning rates.
        for seed in 1..=4u64 {
            for (kind, loss) in [
                ("numbers", Loss::SquaredError),
                ("counts", Loss::Poisson),
                ("binary", Loss::Logistic),
                ("classes", Loss::Softmax),
            ] {
                let (m, design) = setup(&data(300, kind, seed));
                for lr in [0.3, 1.0] {
                    let settings = BoostingSettings {
                        loss: Some(loss),
                        rounds: 25,
                        learning_rate: lr,
                        l2: 1.0,
                        ..BoostingSettings::default()
                    };
                    let b = fit_boosting(&m, &design, None, &settings, &mut Silent).unwrap();
                    assert_eq!(b.training_loss.len(), 26);
                    for w in b.training_loss.windows(2) {
                        assert!(
                            w[1] <= w[0] + 1e-12,
                            "{loss:?} seed {seed} lr {lr}: {} then {}",
                            w[0],
                            w[1]
                        );
                    }
                    assert!(b.training_loss[25] < b.training_loss[0]);
                }
            }
        }
    }

    #[test]
    fn the_logistic_pass_gives_the_loss_error_and_gradients_each_alone_gives() {
        // Our own consistency rule (no source needed): `Loss::logistic_pass` and
        // `logistic_gradients` against `Loss::value`, `staged_error` and `Loss::gradients`, to
        // the bit, on scores of both signs including ±0, ties at one half, tiny and huge ones
        // (whose exponential underflows), with and without weights, the loss over a subset.
        let mut rng = stream(4, Purpose::TreeRows, 0);
        let mut scores = vec![
            0.0, -0.0, 1e-300, -1e-300, 1e-17, -1e-17, 800.0, -800.0, 36.0,
        ];
        while scores.len() < 400 {
            let u = below(&mut rng, 2_000_001) as f64 / 100_000.0 - 10.0;
            scores.push(u);
        }
        let n = scores.len();
        let codes: Vec<u32> = (0..n).map(|_| below(&mut rng, 2) as u32).collect();
        let y: Vec<f64> = codes.iter().map(|&c| c as f64).collect();
        let outcome = Outcome::Classes {
            codes,
            labels: vec!["no".into(), "yes".into()],
        };
        let weights: Vec<f64> = (0..n).map(|i| (i % 7) as f64 * 0.37).collect();
        let some: Vec<u32> = (0..n as u32).filter(|r| r % 3 != 1).collect();
        let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
        for w in [None, Some(&weights[..])] {
            let mut probs = vec![0.0; n];
            let (loss, error) = Loss::logistic_pass(&y, &scores, w, &some, &mut probs);
            let want = Loss::Logistic.value(&y, &scores, w, 1, None, &some);
            assert_eq!(
                loss.to_bits(),
                want.to_bits(),
                "loss, weights {}",
                w.is_some()
            );
            let want = staged_error(Loss::Logistic, &scores, 1, &outcome, &mut Vec::new());
            assert_eq!(error.to_bits(), want.to_bits());
            let (mut a, mut b) = (vec![0.0; 2 * n], vec![0.0; 2 * n]);
            Loss::Logistic.gradients(&y, &scores, w, 0, 1, None, &some, &mut a);
            logistic_gradients(&y, &probs, w, &some, &mut b);
            assert_eq!(bits(&a), bits(&b), "gradients, weights {}", w.is_some());
        }
    }

    #[test]
    fn the_softmax_pass_gives_the_loss_error_and_gradients_each_alone_gives() {
        // `Loss::softmax_pass` and `softmax_gradients` against `Loss::value`, `staged_error`
        // and `Loss::gradients` (our own consistency rule, no source needed), to the bit, for
        // three and five classes: scores with ties, equal rows, huge gaps (shares that
        // underflow), with and without weights, the loss over a subset.
        let mut rng = stream(6, Purpose::TreeRows, 0);
        let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
        for m in [3usize, 5] {
            let n = 300;
            let mut scores: Vec<f64> = (0..n * m)
                .map(|_| below(&mut rng, 2_000_001) as f64 / 100_000.0 - 10.0)
                .collect();
            scores[..m].fill(0.0);
            scores[m..2 * m].fill(-3.5);
            scores[2 * m] = 900.0;
            scores[3 * m + 1] = -900.0;
            scores[4 * m] = scores[4 * m + 1];
            let codes: Vec<u32> = (0..n).map(|_| below(&mut rng, m) as u32).collect();
            let y: Vec<f64> = codes.iter().map(|&c| c as f64).collect();
            let outcome = Outcome::Classes {
                codes,
                labels: (0..m).map(|k| format!("c{k}")).collect(),
            };
            let weights: Vec<f64> = (0..n).map(|i| (i % 5) as f64 * 0.61).collect();
            let some: Vec<u32> = (0..n as u32).filter(|r| r % 4 != 2).collect();
            for w in [None, Some(&weights[..])] {
                let mut shares = vec![0.0; n * m];
                let (loss, error) = Loss::softmax_pass(&y, &scores, m, w, &some, &mut shares);
                let want = Loss::Softmax.value(&y, &scores, w, m, None, &some);
                assert_eq!(loss.to_bits(), want.to_bits(), "{m} classes");
                let want = staged_error(Loss::Softmax, &scores, m, &outcome, &mut Vec::new());
                assert_eq!(error.to_bits(), want.to_bits(), "{m} classes");
                for k in 0..m {
                    let (mut a, mut b) = (vec![0.0; 2 * n], vec![0.0; 2 * n]);
                    Loss::Softmax.gradients(&y, &scores, w, k, m, None, &some, &mut a);
                    softmax_gradients(&y, &shares, (k, m), w, &some, &mut b);
                    assert_eq!(bits(&a), bits(&b), "{m} classes, output {k}");
                }
            }
        }
    }

    #[test]
    fn median_losses_also_learn() {
        for loss in [Loss::AbsoluteError, Loss::Huber { quantile: 0.9 }] {
            let (m, design) = setup(&data(300, "numbers", 3));
            let settings = BoostingSettings {
                loss: Some(loss),
                rounds: 40,
                ..BoostingSettings::default()
            };
            let b = fit_boosting(&m, &design, None, &settings, &mut Silent).unwrap();
            let Outcome::Numbers(y) = &design.outcome else {
                unreachable!()
            };
            let s = b.scores(Rows::Binned(&m), b.rounds());
            let mae: f64 = y.iter().zip(&s).map(|(a, b)| (a - b).abs()).sum::<f64>() / 300.0;
            let s0 = b.scores(Rows::Binned(&m), 0);
            let mae0: f64 = y.iter().zip(&s0).map(|(a, b)| (a - b).abs()).sum::<f64>() / 300.0;
            assert!(mae < 0.6 * mae0, "{loss:?}: {mae} vs start {mae0}");
        }
    }

    #[test]
    fn the_seed_fixes_the_model_and_subsampling_changes_it() {
        let (m, design) = setup(&data(300, "binary", 2));
        let settings = BoostingSettings {
            rounds: 10,
            row_fraction: 0.5,
            predictor_fraction: 0.5,
            seed: 9,
            ..BoostingSettings::default()
        };
        let a = fit_boosting(&m, &design, None, &settings, &mut Silent).unwrap();
        let b = fit_boosting(&m, &design, None, &settings, &mut Silent).unwrap();
        assert_eq!(a.trees, b.trees);
        // The scores kept while fitting give the reported training loss; the staged scores
        // rebuilt from the model must give the same to the bit.
        let Outcome::Classes { codes, .. } = &design.outcome else {
            unreachable!()
        };
        let y: Vec<f64> = codes.iter().map(|&c| c as f64).collect();
        let all: Vec<u32> = (0..m.rows as u32).collect();
        let staged = a.scores(Rows::Binned(&m), a.rounds());
        let loss = a.loss.value(&y, &staged, None, 1, None, &all);
        assert_eq!(loss, *a.training_loss.last().unwrap());
        let other = BoostingSettings {
            seed: 10,
            ..settings.clone()
        };
        let c = fit_boosting(&m, &design, None, &other, &mut Silent).unwrap();
        assert_ne!(a.trees, c.trees);
    }

    #[test]
    fn early_stopping_keeps_the_best_round_and_cancel_leaves_a_partial_model() {
        let (m, design) = setup(&data(400, "binary", 5));
        let settings = BoostingSettings {
            rounds: 500,
            learning_rate: 0.5,
            patience: Some(5),
            validation_share: 0.2,
            grow: GrowSettings {
                max_depth: Some(6),
                min_rows_leaf: 1,
                ..BoostingSettings::default().grow
            },
            ..BoostingSettings::default()
        };
        let b = fit_boosting(&m, &design, None, &settings, &mut Silent).unwrap();
        let Stopping::Early { best, last } = b.stopping else {
            panic!("{:?}", b.stopping)
        };
        assert_eq!(last, best + 5);
        assert_eq!(b.rounds(), best);
        assert_eq!(b.validation_loss.len(), last + 1);
        let lowest = b
            .validation_loss
            .iter()
            .copied()
            .fold(f64::INFINITY, f64::min);
        assert_eq!(b.validation_loss[best], lowest);
        // 20% of each class held out: 80 of 400.
        assert_eq!(b.held_out.len(), 80);

        let plain = BoostingSettings {
            rounds: 50,
            ..BoostingSettings::default()
        };
        let c = fit_boosting(&m, &design, None, &plain, &mut StopAfter(7)).unwrap();
        assert!(c.partial && c.stopping == Stopping::Cancelled);
        assert_eq!(c.rounds(), 7);
    }

    #[test]
    fn bad_choices_are_refused_with_what_to_do() {
        let err = |text: &str, s: BoostingSettings| {
            let (m, design) = setup(text);
            fit_boosting(&m, &design, None, &s, &mut Silent)
                .unwrap_err()
                .to_string()
        };
        let with = |loss| BoostingSettings {
            loss: Some(loss),
            ..BoostingSettings::default()
        };
        let mut negative = data(50, "numbers", 1);
        negative = negative.replacen("\n", "\n-3,0.5,0.5,0.5,p\n", 1);
        let e = err(&negative, with(Loss::Poisson));
        assert!(e.contains("data row 1") && e.contains("counts"), "{e}");
        let e = err(&data(50, "binary", 1), with(Loss::AbsoluteError));
        assert!(e.contains("holds classes") && e.contains("logistic"), "{e}");
        let e = err(&data(60, "classes", 1), with(Loss::Logistic));
        assert!(e.contains("softmax"), "{e}");
        let e = err(
            &data(50, "binary", 1),
            BoostingSettings {
                monotone: vec![0, 0, 0, 1],
                ..BoostingSettings::default()
            },
        );
        assert!(e.contains("'d' is a category"), "{e}");
        let e = err(
            &data(60, "classes", 1),
            BoostingSettings {
                monotone: vec![1, 0, 0, 0],
                ..BoostingSettings::default()
            },
        );
        assert!(e.contains("3 classes") && e.contains("two"), "{e}");
        let e = err(
            &data(40, "binary", 1),
            BoostingSettings {
                patience: Some(3),
                ..BoostingSettings::default()
            },
        );
        assert!(
            e.contains("at least 10") && e.contains("validation_share"),
            "{e}"
        );
    }

    #[test]
    fn monotone_constraints_hold_on_a_dense_grid() {
        // Property (issue 4): with a constraint, the fitted score never falls (or rises) along
        // that predictor, whatever the others are. Random data whose truth goes against the
        // constraint in places; every (a, b, c) cell of a grid over the bins, each loss.
        for seed in 1..=3u64 {
            for (kind, loss) in [
                ("numbers", Loss::SquaredError),
                ("binary", Loss::Logistic),
                ("counts", Loss::Poisson),
            ] {
                let (m, design) = setup(&data(300, kind, seed));
                let settings = BoostingSettings {
                    loss: Some(loss),
                    rounds: 30,
                    learning_rate: 0.3,
                    monotone: vec![1, -1, 0, 0],
                    grow: GrowSettings {
                        max_depth: Some(4),
                        min_rows_leaf: 3,
                        ..BoostingSettings::default().grow
                    },
                    ..BoostingSettings::default()
                };
                let b = fit_boosting(&m, &design, None, &settings, &mut Silent).unwrap();
                for (j, sign) in [(0usize, 1.0), (1, -1.0)] {
                    // Every bin of predictor j (fastest), 6 levels of the other two numbers,
                    // every category.
                    let (g, bins) = grid(&m, j, 6);
                    let s = b.scores(Rows::Records(&g), b.rounds());
                    for r in 0..g.rows {
                        if (r + 1) % bins != 0 {
                            assert!(
                                sign * (s[r + 1] - s[r]) >= -1e-12,
                                "{loss:?} seed {seed}: predictor {j} falls against its \
                                 constraint at grid row {r}: {} then {}",
                                s[r],
                                s[r + 1]
                            );
                        }
                    }
                }
            }
        }
    }

    /// A grid of records: for number predictor `j` (fastest-varying) the smallest and largest
    /// training value of every bin and a value beyond each end; `levels` spread values of the
    /// other number predictors; every category of `d`. Returns it and the length of `j`'s run.
    fn grid(m: &BinnedMatrix, j: usize, levels: usize) -> (Records, usize) {
        let values = |c: usize| -> Vec<f64> {
            let BinRule::Numbers { low, high, .. } = &m.columns[c].rule else {
                unreachable!()
            };
            let mut v: Vec<f64> = low
                .iter()
                .chain(high)
                .copied()
                .filter(|x| x.is_finite())
                .collect();
            v.sort_by(f64::total_cmp);
            v.dedup();
            if c == j {
                let (first, last) = (v[0] - 1.0, v[v.len() - 1] + 1.0);
                v.insert(0, first);
                v.push(last);
                v
            } else {
                (0..levels)
                    .map(|i| v[i * (v.len() - 1) / (levels - 1)])
                    .collect()
            }
        };
        let (a, b, c) = (values(0), values(1), values(2));
        let (fast, slow) = if j == 0 { (&a, &b) } else { (&b, &a) };
        let mut cols: Vec<Vec<f64>> = vec![Vec::new(); 4];
        for d in 0..m.columns[3].bins {
            for &z in &c {
                for &y in slow {
                    for &x in fast {
                        let (va, vb) = if j == 0 { (x, y) } else { (y, x) };
                        for (col, v) in cols.iter_mut().zip([va, vb, z, d as f64]) {
                            col.push(v);
                        }
                    }
                }
            }
        }
        let rows = cols[0].len();
        (Records::from_columns(rows, cols.concat()), fast.len())
    }
}
