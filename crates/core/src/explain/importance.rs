//! Which predictors the model leans on, three ways:
//!
//! - [`impurity`]: the total weighted impurity decrease (gain) of the splits on each
//!   predictor, over every tree (AdaBoost's trees weighted by their round weight α),
//!   normalised to sum 1. Cheap, but it favours predictors with many distinct values, which
//!   offer more split points ([`IMPURITY_CAUTION`]).
//! - [`permutation`]: how much a chosen figure (AUC, log loss, Brier score, accuracy, RMSE)
//!   worsens on given rows when one predictor, or a group of predictors together, is
//!   shuffled across the rows; repeated with seeded shuffles, mean and spread (Breiman 2001;
//!   the model-agnostic form of Fisher, Rudin & Dominici 2019, from memory). Groups shuffle
//!   their predictors with one row order, so related measurements move together;
//!   [`suggest_groups`] proposes them from correlation.
//! - [`out_of_bag`]: Breiman's (Mach Learn 2001;45:5–32) original for bagging and forests:
//!   per tree, its error on its own out-of-bag rows before and after shuffling a predictor
//!   among them; the mean increase over trees and its standard error. The out-of-bag rows are
//!   drawn again from the model's seed ([`crate::ensemble::forest::tree_rows`]).
//!
//! Permutation importance walks each tree once per row and re-walks only the rows whose path
//! meets a shuffled predictor, from the first node on the path that uses it, all such rows
//! a level at a time (no row waits on another's branch), tree by tree, adding the changes in
//! fixed point (exact, so rows with the same leaves keep equal sums).

use crate::binning::Records;
use crate::design::Outcome;
use crate::ensemble::forest::{argmax, class_rows, tree_rows, ForestSettings};
use crate::error::{Error, ErrorKind, Result};
use crate::explain::{leaf_by, Additive};
use crate::metrics::{binary, multiclass, regression};
use crate::model::{Ensemble, Model, Reading};
use crate::progress::{Flow, Progress};
use crate::random::{below, stream, Purpose};
use crate::tree::Tree;

/// Shown with impurity importance.
pub const IMPURITY_CAUTION: &str = "Impurity importance is measured on the training rows and \
    favours predictors with many distinct values (numbers, categories with many levels), \
    which offer more places to split; prefer permutation importance on held-out rows.";

/// Impurity importance per predictor (sums to 1; all zeros for a model with no split).
pub fn impurity(model: &Model) -> Vec<f64> {
    let mut total = vec![0.0; model.predictors.len()];
    let weights: Vec<f64> = match &model.ensemble {
        Ensemble::AdaBoost(a) => a.alphas.clone(),
        e => vec![1.0; e.trees().len()],
    };
    for (tree, w) in model.ensemble.trees().iter().zip(weights) {
        for n in tree.nodes.iter().filter(|n| !n.is_leaf()) {
            if let Some(t) = total.get_mut(n.feature as usize) {
                *t += w * n.gain.max(0.0);
            }
        }
    }
    let sum: f64 = total.iter().sum();
    if sum > 0.0 {
        total.iter_mut().for_each(|t| *t /= sum);
    }
    total
}

/// The figure permutation importance watches.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Metric {
    /// Area under the ROC curve (one-vs-rest macro mean for several classes).
    Auc,
    LogLoss,
    /// Brier score: two classes, the mean squared difference from the event's probability;
    /// several, Brier's (1950) original sum over the classes.
    Brier,
    Accuracy,
    Rmse,
}

impl Metric {
    pub const ALL: [Metric; 5] = [
        Metric::Auc,
        Metric::LogLoss,
        Metric::Brier,
        Metric::Accuracy,
        Metric::Rmse,
    ];

    pub fn word(self) -> &'static str {
        match self {
            Metric::Auc => "auc",
            Metric::LogLoss => "log_loss",
            Metric::Brier => "brier",
            Metric::Accuracy => "accuracy",
            Metric::Rmse => "rmse",
        }
    }

    pub fn from_word(word: &str) -> Option<Metric> {
        Metric::ALL.into_iter().find(|m| m.word() == word)
    }

    /// AUC for two classes, log loss for several, RMSE for numbers.
    pub fn default_for(model: &Model) -> Metric {
        match &model.classes {
            Some(c) if c.len() == 2 => Metric::Auc,
            Some(_) => Metric::LogLoss,
            None => Metric::Rmse,
        }
    }

    pub fn higher_is_better(self) -> bool {
        matches!(self, Metric::Auc | Metric::Accuracy)
    }

    /// Refuses a figure for classes on numbers and the other way round.
    pub fn check(self, classes: bool) -> Result<()> {
        let reason = match (classes, self) {
            (false, Metric::Rmse)
            | (true, Metric::Auc | Metric::LogLoss | Metric::Brier | Metric::Accuracy) => {
                return Ok(())
            }
            (false, m) => format!(
                "{} is for classes; this model predicts a number: use rmse",
                m.word()
            ),
            (true, _) => "rmse is for numbers; this model predicts classes: use auc, log_loss, \
                          brier or accuracy"
                .into(),
        };
        Err(Error::new(ErrorKind::BadSetting {
            setting: "metric".into(),
            reason,
        }))
    }

    /// The figure for `predictions` (`outputs` per row, as [`Model::predict`] gives them).
    pub fn score(self, outcome: &Outcome, predictions: &[f64], outputs: usize) -> Result<f64> {
        self.check(matches!(outcome, Outcome::Classes { .. }))?;
        match (outcome, self) {
            (Outcome::Numbers(y), _) => Ok(regression::fit(y, predictions, None)?.rmse),
            (Outcome::Classes { codes, .. }, m) => {
                let k = outputs;
                let event: Vec<f64> = predictions.chunks_exact(k).map(|p| p[k - 1]).collect();
                match (m, k) {
                    (Metric::Auc, 2) => binary::auc_weighted(codes, &event, None),
                    (Metric::Auc, _) => {
                        Ok(multiclass::one_vs_rest_auc(codes, predictions, k, None)?.macro_mean)
                    }
                    (Metric::LogLoss, 2) => binary::log_loss(codes, &event, None),
                    (Metric::LogLoss, _) => multiclass::log_loss(codes, predictions, k, None),
                    (Metric::Brier, 2) => Ok(binary::brier(codes, &event, None)?.score),
                    (Metric::Brier, _) => {
                        let sum: f64 = predictions
                            .chunks_exact(k)
                            .zip(codes)
                            .map(|(p, &c)| {
                                p.iter()
                                    .enumerate()
                                    .map(|(j, q)| (q - (j == c as usize) as u8 as f64).powi(2))
                                    .sum::<f64>()
                            })
                            .sum();
                        Ok(sum / codes.len().max(1) as f64)
                    }
                    _ => multiclass::accuracy(codes, predictions, k, None),
                }
            }
        }
    }
}

/// Permutation importance of some predictors or groups of predictors.
#[derive(Debug, Clone)]
pub struct Permutation {
    pub metric: Metric,
    /// The figure on the rows as they are.
    pub baseline: f64,
    /// The predictors of each entry (one, or a group shuffled together).
    pub groups: Vec<Vec<usize>>,
    /// Per entry: the loss of the figure in each repeat (positive: shuffling hurt), i.e.
    /// baseline − shuffled for AUC and accuracy, shuffled − baseline for the others.
    pub losses: Vec<Vec<f64>>,
    /// Per entry: mean and standard deviation of `losses`.
    pub mean: Vec<f64>,
    pub spread: Vec<f64>,
}

/// Mean and sample standard deviation (0 for fewer than two values).
pub fn mean_and_sd(values: &[f64]) -> (f64, f64) {
    let n = values.len() as f64;
    if values.is_empty() {
        return (f64::NAN, f64::NAN);
    }
    let mean = values.iter().sum::<f64>() / n;
    if values.len() < 2 {
        return (mean, 0.0);
    }
    let var = values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0);
    (mean, var.sqrt())
}

fn check_groups(model: &Model, groups: &[Vec<usize>]) -> Result<()> {
    let p = model.predictors.len();
    if let Some(g) = groups
        .iter()
        .find(|g| g.is_empty() || g.iter().any(|&j| j >= p))
    {
        return Err(Error::new(ErrorKind::BadSetting {
            setting: "groups".into(),
            reason: format!(
                "a group ({g:?}) is empty or names a predictor beyond the model's {p}; give \
                 each group one or more of the model's predictors"
            ),
        }));
    }
    Ok(())
}

/// A node for walking many rows at once: a leaf leads to itself, so every row takes the
/// same number of steps with no test for having arrived.
#[derive(Debug, Clone, Copy)]
struct Step {
    threshold: f64,
    feature: u32,
    left: u32,
    right: u32,
    missing_left: bool,
    /// A split on categories (the node decides); otherwise on a number.
    categories: bool,
}

/// `tree`'s nodes as [`Step`]s and each node's depth; returns the deepest.
fn steps_of(tree: &Tree, steps: &mut Vec<Step>, depth: &mut Vec<usize>) -> usize {
    steps.clear();
    depth.clear();
    depth.resize(tree.nodes.len(), 0);
    let mut deepest = 0;
    for (i, n) in tree.nodes.iter().enumerate() {
        // Children come after their parents (Model::check).
        deepest = deepest.max(depth[i]);
        steps.push(if n.is_leaf() {
            Step {
                threshold: 0.0,
                feature: 0,
                left: i as u32,
                right: i as u32,
                missing_left: false,
                categories: false,
            }
        } else {
            depth[n.left as usize] = depth[i] + 1;
            depth[n.right as usize] = depth[i] + 1;
            Step {
                threshold: n.threshold,
                feature: n.feature,
                left: n.left,
                right: n.right,
                missing_left: n.missing_left,
                categories: !n.numeric,
            }
        });
    }
    deepest
}

/// How permutation importance shuffles and what it watches.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Shuffles {
    pub metric: Metric,
    /// Shuffles per entry (at least 1).
    pub repeats: usize,
    pub seed: u64,
}

/// Permutation importance of each entry of `groups` (predictor indices; one predictor per
/// entry for the usual form) on `records`, whose outcome is `outcome` (class codes in the
/// model's order), with `shuffles.repeats` seeded shuffles each. Progress per tree; may
/// cancel.
pub fn permutation(
    model: &Model,
    records: &Records,
    outcome: &Outcome,
    groups: &[Vec<usize>],
    shuffles: Shuffles,
    progress: &mut dyn Progress,
) -> Result<Permutation> {
    let Shuffles {
        metric,
        repeats,
        seed,
    } = shuffles;
    check_groups(model, groups)?;
    metric.check(model.classes.is_some())?;
    let n = records.rows;
    if outcome.len() != n {
        return Err(Error::new(ErrorKind::BadSetting {
            setting: "outcome".into(),
            reason: format!("{} outcomes for {n} rows", outcome.len()),
        }));
    }
    let repeats = repeats.max(1);
    let add = Additive::of(model);
    let width = add.width();
    let outputs = model.outputs();
    let p = model.predictors.len();
    // One shuffle (a row order) per group and repeat, each from its own stream.
    let orders: Vec<Vec<u32>> = (0..groups.len() * repeats)
        .map(|i| {
            let mut rng = stream(seed, Purpose::Permutation, i as u64);
            let mut order: Vec<u32> = (0..n as u32).collect();
            for k in (1..n).rev() {
                order.swap(k, below(&mut rng, k + 1));
            }
            order
        })
        .collect();
    let masks: Vec<Vec<bool>> = groups
        .iter()
        .map(|g| {
            let mut member = vec![false; p];
            for &j in g {
                member[j] = true;
            }
            member
        })
        .collect();
    // Sums in fixed point: a shuffle's changed leaves are added and taken away exactly, so
    // rows that reach the same leaves keep the same bits (ties between rows stay ties,
    // which AUC counts) while only the rows whose path meets the shuffled group are
    // walked again. The unit keeps the largest possible sum (and change) under 2^60.
    let bound: f64 = add.offset.iter().map(|o| o.abs()).sum::<f64>()
        + add
            .members
            .iter()
            .map(|m| m.scale.abs() * m.tree.values.iter().fold(0.0f64, |a, v| a.max(v.abs())))
            .sum::<f64>();
    let unit = (2.0f64).powi(60 - bound.max(1e-300).log2().ceil().clamp(-900.0, 59.0) as i32);
    let fixed = |x: f64| (x * unit).round() as i64;
    let slots = groups.len() * repeats;
    let mut base: Vec<i64> = (0..n)
        .flat_map(|_| add.offset.iter().map(|&o| fixed(o)))
        .collect();
    let mut deltas = vec![0i64; slots * n * width];
    let mut leaves = vec![0u32; n];
    // Per tree: each leaf's values in fixed point (`width` per node), and per predictor the
    // rows whose path meets it with the first node there (nodes come after their parents,
    // so the smallest index is the first on the path). A shuffle leaves the path above that
    // node as it was, so the walk again starts there.
    let mut leaf_fixed: Vec<i64> = Vec::new();
    let mut meets: Vec<Vec<(u32, u32)>> = vec![Vec::new(); p];
    let mut seen = vec![0u32; p];
    let mut first = vec![u32::MAX; n];
    let mut merged: Vec<(u32, u32)> = Vec::with_capacity(n);
    let (mut steps, mut depth, mut at) = (Vec::new(), Vec::new(), Vec::with_capacity(n));
    let total = add.members.len() as u64;
    for (m, member) in add.members.iter().enumerate() {
        let tree: &Tree = &member.tree;
        leaf_fixed.clear();
        leaf_fixed.resize(tree.nodes.len() * width, 0);
        for (i, to) in leaf_fixed.chunks_exact_mut(width.max(1)).enumerate() {
            if !tree.nodes[i].is_leaf() {
                continue;
            }
            let values = tree.node_values(i);
            match member.output {
                Some(k) => to[k] = fixed(member.scale * values[0]),
                None => {
                    for (t, v) in to.iter_mut().zip(values) {
                        *t = fixed(member.scale * v);
                    }
                }
            }
        }
        let deepest = steps_of(tree, &mut steps, &mut depth);
        meets.iter_mut().for_each(Vec::clear);
        seen.iter_mut().for_each(|s| *s = 0);
        for r in 0..n {
            // `seen[f] == r + 1`: predictor f already met on this row's path.
            let stamp = r as u32 + 1;
            let mut i = 0usize;
            let leaf = loop {
                let node = &tree.nodes[i];
                if node.is_leaf() {
                    break i;
                }
                let f = node.feature as usize;
                if seen[f] != stamp {
                    seen[f] = stamp;
                    meets[f].push((r as u32, i as u32));
                }
                i = if node.value_goes_left(records.value(f, r)) {
                    node.left
                } else {
                    node.right
                } as usize;
            };
            leaves[r] = leaf as u32;
            for (b, v) in base[r * width..(r + 1) * width]
                .iter_mut()
                .zip(&leaf_fixed[leaf * width..(leaf + 1) * width])
            {
                *b += v;
            }
        }
        for (g, (group, member_of)) in groups.iter().zip(&masks).enumerate() {
            // The rows whose path meets the group (the only ones a shuffle can move) and
            // the first node of the group on each path.
            let met: &[(u32, u32)] = if let [j] = group[..] {
                &meets[j]
            } else {
                merged.clear();
                for &j in group {
                    for &(r, i) in &meets[j] {
                        let at = &mut first[r as usize];
                        if *at == u32::MAX {
                            merged.push((r, 0));
                        }
                        *at = (*at).min(i);
                    }
                }
                for (r, i) in merged.iter_mut() {
                    *i = std::mem::replace(&mut first[*r as usize], u32::MAX);
                }
                &merged
            };
            // All of these rows walk down together, a level at a time (no row waits on
            // another's branch); those at a leaf stay there.
            let levels = deepest
                - met
                    .iter()
                    .map(|&(_, i)| depth[i as usize])
                    .min()
                    .unwrap_or(0);
            for rep in 0..repeats {
                let s = g * repeats + rep;
                let order = &orders[s];
                let delta = &mut deltas[s * n * width..(s + 1) * n * width];
                at.clear();
                at.extend(met.iter().map(|&(_, i)| i));
                for _ in 0..levels {
                    for (c, &(r, _)) in at.iter_mut().zip(met) {
                        let step = &steps[*c as usize];
                        let f = step.feature as usize;
                        let row = if member_of[f] { order[r as usize] } else { r };
                        let x = records.value(f, row as usize);
                        let left = if step.categories {
                            tree.nodes[*c as usize].value_goes_left(x)
                        } else {
                            (x <= step.threshold) | (x.is_nan() & step.missing_left)
                        };
                        *c = if left { step.left } else { step.right };
                    }
                }
                for (&leaf, &(r, _)) in at.iter().zip(met) {
                    let (r, leaf) = (r as usize, leaf as usize);
                    let old = leaves[r] as usize;
                    if leaf != old {
                        let d = &mut delta[r * width..(r + 1) * width];
                        let (new, old) = (
                            &leaf_fixed[leaf * width..(leaf + 1) * width],
                            &leaf_fixed[old * width..(old + 1) * width],
                        );
                        for ((d, a), b) in d.iter_mut().zip(new).zip(old) {
                            *d += a - b;
                        }
                    }
                }
            }
        }
        if progress.step("trees", m as u64 + 1, total) == Flow::Stop {
            return Err(Error::new(ErrorKind::Cancelled));
        }
    }
    let mut sums = vec![0.0; n * width];
    let mut score = |s: Option<usize>| {
        for (i, o) in sums.iter_mut().enumerate() {
            let d = s.map_or(0, |s| deltas[s * n * width + i]);
            *o = (base[i] + d) as f64 / unit;
        }
        metric.score(outcome, &add.finish_all(&sums, outputs), outputs)
    };
    let baseline = score(None)?;
    let mut losses = Vec::with_capacity(groups.len());
    for g in 0..groups.len() {
        let mut each = Vec::with_capacity(repeats);
        for rep in 0..repeats {
            let value = score(Some(g * repeats + rep))?;
            each.push(if metric.higher_is_better() {
                baseline - value
            } else {
                value - baseline
            });
        }
        losses.push(each);
    }
    let (mean, spread) = losses.iter().map(|l| mean_and_sd(l)).unzip();
    Ok(Permutation {
        metric,
        baseline,
        groups: groups.to_vec(),
        losses,
        mean,
        spread,
    })
}

/// Groups of numeric predictors (numbers, dates, yes/no) whose pairwise Pearson correlation
/// over the rows where both are known reaches `threshold` in absolute value, joined by
/// single linkage (a chain of strong correlations makes one group); only groups of two or
/// more. A common way to keep correlated measurements from masking each other in
/// permutation importance (common practice, no source for the threshold).
pub fn suggest_groups(model: &Model, records: &Records, threshold: f64) -> Vec<Vec<usize>> {
    let p = model.predictors.len();
    let numeric: Vec<usize> = (0..p)
        .filter(|&j| !matches!(model.predictors[j].reading, Reading::Category { .. }))
        .collect();
    let mut parent: Vec<usize> = (0..p).collect();
    fn root(parent: &mut [usize], mut i: usize) -> usize {
        while parent[i] != i {
            parent[i] = parent[parent[i]];
            i = parent[i];
        }
        i
    }
    for (a, &i) in numeric.iter().enumerate() {
        for &j in &numeric[a + 1..] {
            if correlation(records, i, j).is_some_and(|c| c.abs() >= threshold) {
                let (ri, rj) = (root(&mut parent, i), root(&mut parent, j));
                parent[ri.max(rj)] = ri.min(rj);
            }
        }
    }
    let mut groups: Vec<Vec<usize>> = vec![Vec::new(); p];
    for j in 0..p {
        let r = root(&mut parent, j);
        groups[r].push(j);
    }
    groups.retain(|g| g.len() > 1);
    groups
}

/// Pearson correlation of predictors `i` and `j` over the rows where both are known; `None`
/// with fewer than three such rows or no spread.
pub fn correlation(records: &Records, i: usize, j: usize) -> Option<f64> {
    let (mut n, mut sx, mut sy) = (0.0, 0.0, 0.0);
    for r in 0..records.rows {
        let (x, y) = (records.value(i, r), records.value(j, r));
        if !x.is_nan() && !y.is_nan() {
            n += 1.0;
            sx += x;
            sy += y;
        }
    }
    if n < 3.0 {
        return None;
    }
    let (mx, my) = (sx / n, sy / n);
    let (mut sxy, mut sxx, mut syy) = (0.0, 0.0, 0.0);
    for r in 0..records.rows {
        let (x, y) = (records.value(i, r), records.value(j, r));
        if !x.is_nan() && !y.is_nan() {
            sxy += (x - mx) * (y - my);
            sxx += (x - mx).powi(2);
            syy += (y - my).powi(2);
        }
    }
    (sxx > 0.0 && syy > 0.0).then(|| sxy / (sxx * syy).sqrt())
}

/// Out-of-bag permutation importance (Breiman 2001) of every predictor.
#[derive(Debug, Clone)]
pub struct OutOfBag {
    /// "error rate" for classes, "mean squared error" for numbers.
    pub error: &'static str,
    /// Per predictor: mean over trees of the increase in the tree's out-of-bag error when
    /// the predictor is shuffled among its out-of-bag rows, and its standard error.
    pub mean: Vec<f64>,
    pub standard_error: Vec<f64>,
    /// Trees that had out-of-bag rows.
    pub trees: usize,
}

/// The forest settings that drew each tree's rows, read back from the model's settings.
fn sampling_of(model: &Model) -> Result<ForestSettings> {
    let bad = |reason: String| {
        Error::new(ErrorKind::BadSetting {
            setting: "out-of-bag importance".into(),
            reason,
        })
    };
    let get = |key: &str| {
        model
            .settings
            .get(key)
            .ok_or_else(|| bad(format!("the model file does not record '{key}'")))
    };
    let mut s = ForestSettings::random_forest(model.predictors.len(), model.classes.is_none(), 0);
    s.row_fraction = get("row_fraction")?
        .parse()
        .map_err(|_| bad("its row_fraction is not a number".into()))?;
    s.seed = get("seed")?
        .parse()
        .map_err(|_| bad("its seed is not a whole number".into()))?;
    match get("sampling")?.as_str() {
        "with_replacement" => s.replace = true,
        "without_replacement" => s.replace = false,
        "balanced" => s.balanced = true,
        other => return Err(bad(format!("unknown sampling '{other}'"))),
    }
    Ok(s)
}

/// Out-of-bag permutation importance of a bagging or forest model, on its training rows
/// (`records` and `outcome` in the training design's row order, `model.training_rows` of
/// them). Progress per tree; may cancel.
pub fn out_of_bag(
    model: &Model,
    records: &Records,
    outcome: &Outcome,
    seed: u64,
    progress: &mut dyn Progress,
) -> Result<OutOfBag> {
    let bad = |reason: String| {
        Error::new(ErrorKind::BadSetting {
            setting: "out-of-bag importance".into(),
            reason,
        })
    };
    let Ensemble::Forest(forest) = &model.ensemble else {
        return Err(bad(format!(
            "only bagging and forests have out-of-bag rows; this is a {} model: use \
             permutation importance on held-out rows",
            model.method.word()
        )));
    };
    let n = records.rows;
    if n != model.training_rows || outcome.len() != n {
        return Err(bad(format!(
            "it needs the model's own {} training rows in their order; {n} were given",
            model.training_rows
        )));
    }
    let settings = sampling_of(model)?;
    let by_class = match (outcome, settings.balanced) {
        (Outcome::Classes { codes, labels }, true) => class_rows(codes, labels.len()),
        _ => Vec::new(),
    };
    let p = model.predictors.len();
    let error_of = |tree: &Tree, leaf: usize, r: usize| -> f64 {
        let v = tree.node_values(leaf);
        match outcome {
            Outcome::Classes { codes, .. } => (argmax(v) != codes[r] as usize) as u8 as f64,
            Outcome::Numbers(y) => (v[0] - y[r]).powi(2),
        }
    };
    let mut increases: Vec<Vec<f64>> = vec![Vec::new(); p];
    let total = forest.trees.len() as u64;
    let mut used = vec![false; p];
    for (t, tree) in forest.trees.iter().enumerate() {
        let mut in_bag = vec![false; n];
        for r in tree_rows(&settings, n, &by_class, t) {
            in_bag[r as usize] = true;
        }
        let oob: Vec<usize> = (0..n).filter(|&r| !in_bag[r]).collect();
        if !oob.is_empty() {
            let before: f64 = oob
                .iter()
                .map(|&r| error_of(tree, leaf_by(tree, |j| records.value(j, r)), r))
                .sum::<f64>()
                / oob.len() as f64;
            used.iter_mut().for_each(|u| *u = false);
            for node in tree.nodes.iter().filter(|n| !n.is_leaf()) {
                used[node.feature as usize] = true;
            }
            for (j, inc) in increases.iter_mut().enumerate() {
                if !used[j] {
                    // A predictor the tree never splits on cannot change its error.
                    inc.push(0.0);
                    continue;
                }
                let mut rng = stream(seed, Purpose::OutOfBagPermutation, (t * p + j) as u64);
                let mut order = oob.clone();
                for k in (1..order.len()).rev() {
                    order.swap(k, below(&mut rng, k + 1));
                }
                let after: f64 = oob
                    .iter()
                    .zip(&order)
                    .map(|(&r, &from)| {
                        let leaf =
                            leaf_by(tree, |f| records.value(f, if f == j { from } else { r }));
                        error_of(tree, leaf, r)
                    })
                    .sum::<f64>()
                    / oob.len() as f64;
                inc.push(after - before);
            }
        }
        if progress.step("trees", t as u64 + 1, total) == Flow::Stop {
            return Err(Error::new(ErrorKind::Cancelled));
        }
    }
    let trees = increases.first().map_or(0, Vec::len);
    let (mean, standard_error) = increases
        .iter()
        .map(|inc| {
            let (m, sd) = mean_and_sd(inc);
            (m, sd / (inc.len().max(1) as f64).sqrt())
        })
        .unzip();
    Ok(OutOfBag {
        error: if model.classes.is_some() {
            "error rate"
        } else {
            "mean squared error"
        },
        mean,
        standard_error,
        trees,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::explain::testing;
    use crate::model::Method;
    use crate::progress::Silent;
    use crate::tree::Rows;

    fn singles(p: usize) -> Vec<Vec<usize>> {
        (0..p).map(|j| vec![j]).collect()
    }

    #[test]
    fn permutation_importance_equals_shuffling_by_hand() {
        // The shortcut (re-walking only rows whose path meets the group) against shuffling a
        // copy of the records and predicting every row afresh.
        for (name, model, records, outcome) in testing::every_kind() {
            let metric = Metric::default_for(&model);
            let groups = vec![vec![0], vec![2, 4]];
            let got = permutation(
                &model,
                &records,
                &outcome,
                &groups,
                Shuffles {
                    metric,
                    repeats: 2,
                    seed: 9,
                },
                &mut Silent,
            )
            .unwrap();
            let k = model.outputs();
            let n = records.rows;
            // Predictions through the additive form (the same sums, bit for bit, as the
            // model's own predictions up to rounding; see explain::tests).
            let add = Additive::of(&model);
            let predict_all = |rec: &Records| {
                let mut sums = vec![0.0; n * add.width()];
                for r in 0..n {
                    add.sums(
                        Rows::Records(rec),
                        r,
                        &mut sums[r * add.width()..(r + 1) * add.width()],
                    );
                }
                add.finish_all(&sums, k)
            };
            let base = metric.score(&outcome, &predict_all(&records), k).unwrap();
            assert!((base - got.baseline).abs() < 1e-12, "{name}");
            for (g, group) in groups.iter().enumerate() {
                for rep in 0..2 {
                    let mut rng = stream(9, Purpose::Permutation, (g * 2 + rep) as u64);
                    let mut order: Vec<usize> = (0..n).collect();
                    for i in (1..n).rev() {
                        order.swap(i, below(&mut rng, i + 1));
                    }
                    let mut values = Vec::new();
                    for j in 0..model.predictors.len() {
                        values.extend((0..n).map(|r| {
                            records.value(j, if group.contains(&j) { order[r] } else { r })
                        }));
                    }
                    let shuffled = Records::from_columns(n, values);
                    let v = metric.score(&outcome, &predict_all(&shuffled), k).unwrap();
                    let loss = if metric.higher_is_better() {
                        base - v
                    } else {
                        v - base
                    };
                    assert!(
                        (loss - got.losses[g][rep]).abs() < 1e-9,
                        "{name} group {g}: {loss} vs {}",
                        got.losses[g][rep]
                    );
                }
            }
        }
    }

    #[test]
    fn the_drivers_outrank_the_noise_predictor() {
        // In testing::csv, d is pure noise; a and e drive every outcome.
        let (model, records, outcome) = testing::model(Method::Forest, "v", None);
        let imp = impurity(&model);
        assert!((imp.iter().sum::<f64>() - 1.0).abs() < 1e-12);
        assert!(imp[0] > imp[3] && imp[4] > imp[3], "{imp:?}");
        let perm = permutation(
            &model,
            &records,
            &outcome,
            &singles(5),
            Shuffles {
                metric: Metric::Rmse,
                repeats: 3,
                seed: 1,
            },
            &mut Silent,
        )
        .unwrap();
        assert!(perm.mean[0] > 5.0 * perm.mean[3].abs(), "{:?}", perm.mean);
        let oob = out_of_bag(&model, &records, &outcome, 1, &mut Silent);
        // The test model has no settings recorded: refused by name.
        assert!(oob.is_err());
    }

    #[test]
    fn out_of_bag_rows_are_found_again_from_the_seed() {
        let (mut model, records, outcome) = testing::model(Method::Forest, "y", None);
        // testing::model fits with seed 3, bootstrap of every row.
        for (k, v) in [
            ("row_fraction", "1"),
            ("seed", "3"),
            ("sampling", "with_replacement"),
        ] {
            model.settings.insert(k.into(), v.into());
        }
        let Ensemble::Forest(f) = &model.ensemble else {
            panic!()
        };
        // Fit the same trees again and compare their in-bag rows with the redrawn ones.
        let design =
            crate::design::design_from_csv(&testing::csv(300, 4), "y", &["a", "b", "c", "d", "e"]);
        let binned = crate::binning::bin_design(&design, Default::default()).unwrap();
        let (stats, width) = design.row_statistics(false);
        let mut fs = ForestSettings::random_forest(5, false, 3);
        fs.trees = f.trees.len();
        fs.grow.max_depth = Some(5);
        let fitted = crate::ensemble::forest::fit_trees(
            &binned,
            &stats,
            width,
            &fs,
            0..fs.trees,
            &mut Silent,
        );
        let s = sampling_of(&model).unwrap();
        for (t, ft) in fitted.iter().enumerate() {
            assert_eq!(ft.tree, f.trees[t]);
            let mut in_bag = vec![false; records.rows];
            for r in tree_rows(&s, records.rows, &[], t) {
                in_bag[r as usize] = true;
            }
            assert!(
                (0..records.rows).all(|r| in_bag[r] == ft.in_bag(r)),
                "tree {t}"
            );
        }
        let oob = out_of_bag(&model, &records, &outcome, 1, &mut Silent).unwrap();
        assert_eq!(oob.trees, f.trees.len());
        assert!(
            oob.mean[0] > oob.mean[3] && oob.mean[4] > oob.mean[3],
            "{:?}",
            oob.mean
        );
    }

    #[test]
    fn correlated_predictors_are_suggested_as_a_group() {
        // b2 is b plus a little noise; c is independent.
        let (model, records, _) = testing::model(Method::Tree, "y", None);
        let n = records.rows;
        let mut values = Vec::new();
        for j in 0..5 {
            values.extend((0..n).map(|r| records.value(j, r)));
        }
        // Replace d (index 3) by a copy of b (index 1) shifted slightly.
        for r in 0..n {
            values[3 * n + r] = records.value(1, r) + 0.01 * (r % 7) as f64;
        }
        let rec = Records::from_columns(n, values);
        assert_eq!(suggest_groups(&model, &rec, 0.9), vec![vec![1, 3]]);
        assert!(suggest_groups(&model, &records, 0.9).is_empty());
    }
}
