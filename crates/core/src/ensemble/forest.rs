//! Bagging and random forests (Breiman 1996, 2001): each tree grows on a bootstrap sample of
//! the rows (or a subsample without replacement), a random forest also draws the predictors
//! tried at each split. Rows a tree did not see give the out-of-bag predictions and the
//! out-of-bag error after each added tree. Tree `i` draws only from its own seeded streams,
//! so [`fit_trees`] can fit any range of trees anywhere and the results merge bit for bit.

use std::ops::Range;

use crate::binning::{BinnedMatrix, BinnedRows};
use crate::design::Outcome;
use crate::progress::{Flow, Progress, Silent};
use crate::random::{below, stream, Purpose};
use crate::tree::criterion::Criterion;
use crate::tree::grower::{grow_rows, Constraints, GrowSettings};
use crate::tree::{rows_where, walk, Rows, Tree};

/// Settings of a bagged ensemble.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ForestSettings {
    pub trees: usize,
    /// Predictors drawn at each split (`None`: all of them, which is bagging).
    pub predictors_per_split: Option<usize>,
    /// Rows per tree as a share of all rows.
    pub row_fraction: f64,
    /// Draw rows with replacement (bootstrap) or without.
    pub replace: bool,
    /// Class-balanced bootstrap (classes only): each tree draws the same number of rows
    /// (the sample size over the number of classes), with replacement, from every class;
    /// after the "balanced random forest" of Chen, Liaw & Breiman 2004 (UC Berkeley
    /// technical report 666; from memory).
    pub balanced: bool,
    pub seed: u64,
    pub grow: GrowSettings,
}

impl ForestSettings {
    /// Breiman's defaults: 500 fully grown trees on bootstrap samples, √p predictors per split
    /// for classes and p/3 for numbers (at least 1).
    pub fn random_forest(predictors: usize, regression: bool, seed: u64) -> Self {
        let m = if regression {
            predictors / 3
        } else {
            (predictors as f64).sqrt().floor() as usize
        };
        ForestSettings {
            trees: 500,
            predictors_per_split: Some(m.max(1)),
            row_fraction: 1.0,
            replace: true,
            balanced: false,
            seed,
            grow: GrowSettings {
                criterion: if regression {
                    Criterion::SquaredError
                } else {
                    Criterion::Gini
                },
                ..GrowSettings::default()
            },
        }
    }
}

/// One fitted tree and, for every row, where it stood: out of the tree's sample
/// ([`OUT_OF_BAG`]), in it and ended in leaf `leaves[r]` when the tree was grown (so the
/// training error needs no walk down the tree for it), or in it with its leaf not known
/// ([`IN_BAG`]: a tree read from bytes; the row is walked). One number a row, whatever the
/// number of times the row was drawn.
pub struct FittedTree {
    pub tree: Tree,
    pub leaves: Vec<u32>,
}

/// [`FittedTree::leaves`]: a row the tree did not see.
pub const OUT_OF_BAG: u32 = u32::MAX;
/// [`FittedTree::leaves`]: a row in the tree's sample whose leaf is not known.
pub const IN_BAG: u32 = u32::MAX - 1;

impl FittedTree {
    pub fn in_bag(&self, row: usize) -> bool {
        self.leaves[row] != OUT_OF_BAG
    }
}

/// Fits trees `range` of the ensemble (each from its own streams).
pub fn fit_trees(
    binned: &BinnedMatrix,
    stats: &[f64],
    width: usize,
    settings: &ForestSettings,
    range: Range<usize>,
    progress: &mut dyn Progress,
) -> Vec<FittedTree> {
    let n = binned.rows;
    let p = binned.columns.len();
    let total = range.len() as u64;
    let by_class = if settings.balanced && settings.grow.criterion != Criterion::SquaredError {
        // A row's class is where its statistics put its weight.
        let classes: Vec<u32> = (0..n)
            .map(|r| argmax(&stats[r * width..(r + 1) * width]) as u32)
            .collect();
        class_rows(&classes, width)
    } else {
        Vec::new()
    };
    let mut out = Vec::with_capacity(range.len());
    for i in range {
        let rows = tree_rows(settings, n, &by_class, i);
        let mut pred_rng = stream(settings.seed, Purpose::TreePredictors, i as u64);
        // The predictors tried at each split, in a random order: a random subset for a
        // forest, all of them for bagging. The order matters when two splits gain exactly the
        // same (the first tried wins): drawing it per tree keeps bagged trees diverse, as
        // scikit-learn's random predictor order does.
        let m = settings.predictors_per_split.unwrap_or(p).min(p);
        let mut choose = |candidates: &mut Vec<usize>| {
            for k in 0..m {
                let j = k + below(&mut pred_rng, candidates.len() - k);
                candidates.swap(k, j);
            }
            candidates.truncate(m);
        };
        let grown = grow_rows(
            binned,
            stats,
            width,
            &rows,
            &settings.grow,
            Some(&mut choose),
            Constraints::default(),
        );
        let mut leaves = vec![OUT_OF_BAG; n];
        for (id, node) in grown.tree.nodes.iter().enumerate() {
            if node.is_leaf() {
                let (start, end) = grown.spans[id];
                for &r in &grown.rows[start..end] {
                    leaves[r as usize] = id as u32;
                }
            }
        }
        out.push(FittedTree {
            tree: grown.tree,
            leaves,
        });
        if progress.step("trees", out.len() as u64, total) == Flow::Stop {
            break;
        }
    }
    out
}

/// The rows of each class (classes `0..classes`, empty classes left out), for a
/// class-balanced bootstrap.
pub fn class_rows(classes: &[u32], count: usize) -> Vec<Vec<u32>> {
    let mut groups = vec![Vec::new(); count];
    for (r, &c) in classes.iter().enumerate() {
        if let Some(g) = groups.get_mut(c as usize) {
            g.push(r as u32);
        }
    }
    groups.retain(|g| !g.is_empty());
    groups
}

/// The rows tree `i` of an ensemble on `n` rows grows on (with repeats), drawn from its own
/// stream alone, so the out-of-bag rows of any tree can be found again from the settings:
/// a class-balanced bootstrap when `by_class` is not empty (see [`class_rows`]), else a
/// bootstrap or a subsample without replacement of `row_fraction · n` rows.
pub fn tree_rows(settings: &ForestSettings, n: usize, by_class: &[Vec<u32>], i: usize) -> Vec<u32> {
    let take = ((settings.row_fraction * n as f64).round() as usize).clamp(1, n);
    let mut rows_rng = stream(settings.seed, Purpose::TreeRows, i as u64);
    if !by_class.is_empty() {
        let each = (take / by_class.len()).max(1);
        by_class
            .iter()
            .flat_map(|g| {
                (0..each)
                    .map(|_| g[below(&mut rows_rng, g.len())])
                    .collect::<Vec<_>>()
            })
            .collect()
    } else if settings.replace {
        (0..take).map(|_| below(&mut rows_rng, n) as u32).collect()
    } else {
        let mut all: Vec<u32> = (0..n as u32).collect();
        for k in 0..take {
            let j = k + below(&mut rows_rng, n - k);
            all.swap(k, j);
        }
        all.truncate(take);
        all
    }
}

/// A fitted bagged ensemble with its out-of-bag record.
#[derive(Debug, Clone)]
pub struct Forest {
    pub trees: Vec<Tree>,
    pub outputs: usize,
    /// Out-of-bag error after 1, 2, ... trees: misclassified share, or mean squared error.
    pub oob_error: Vec<f64>,
    /// Out-of-bag prediction per row (`outputs` values each; NaN for rows every tree saw).
    pub oob_prediction: Vec<f64>,
    /// Share of (tree, row) pairs that were out of bag (about 1/e ≈ 0.368 for bootstraps).
    pub oob_share: f64,
    /// Error on every training row after 1, 2, ... trees (as
    /// [`crate::model::Model::staged_errors`] gives it, to the last digit), tallied as the
    /// trees were added; empty when not known (a forest read from a model file).
    pub training_error: Vec<f64>,
    /// Stopped before all trees were fitted (cancelled).
    pub partial: bool,
    /// Held-out rows judged tree by tree as the trees were tallied ([`HeldOut`]); the trees
    /// themselves were then not kept (`trees` is empty).
    pub judged: Option<Judged>,
}

/// Rows held out of a forest's fit (validation's test rows, read by the fit's bins) and
/// their outcome, judged tree by tree as each tree is tallied ([`OobTally::add_judging`]),
/// so validation need not keep a fold's trees (a 300-tree forest on 40,000 rows holds about
/// 170 MB) nor walk them again from memory afterwards.
#[derive(Clone, Copy)]
pub struct HeldOut<'a> {
    pub rows: Rows<'a>,
    pub outcome: &'a Outcome,
    /// The same rows read by the fit's bins ([`crate::binning::bin_records`]), when made:
    /// those within their bins' training values walked by their bins (a byte a value, and
    /// the walk the out-of-bag rows take), the others by value; the same leaves as `rows`.
    pub bins: Option<&'a BinnedRows>,
}

/// What judging held-out rows tree by tree gives: the numbers
/// [`crate::model::Model::staged_errors_and_predictions`] gives for the whole forest, to the
/// last digit (the same walks, additions and order).
#[derive(Debug, Clone, PartialEq)]
pub struct Judged {
    /// Error after 1, 2, ... trees: misclassified share, or mean squared error.
    pub curve: Vec<f64>,
    /// Each row's summed tree outputs (`outputs` a row).
    pub sums: Vec<f64>,
}

impl Judged {
    /// Each row's prediction: its sums over the number of trees.
    pub fn predictions(&self) -> Vec<f64> {
        let trees = self.curve.len().max(1) as f64;
        self.sums.iter().map(|s| s / trees).collect()
    }
}

impl Forest {
    /// The ensemble's prediction for row `row`: mean of the trees' outputs.
    pub fn predict(&self, rows: Rows<'_>, row: usize, out: &mut [f64]) {
        out.iter_mut().for_each(|o| *o = 0.0);
        for t in &self.trees {
            for (o, v) in out.iter_mut().zip(t.predict(rows, row)) {
                *o += v;
            }
        }
        let k = self.trees.len().max(1) as f64;
        out.iter_mut().for_each(|o| *o /= k);
    }
}

/// Index of the largest value (the first on ties).
pub fn argmax(values: &[f64]) -> usize {
    (0..values.len()).fold(0, |b, k| if values[k] > values[b] { k } else { b })
}

/// The out-of-bag record built tree by tree, in tree order: each tree's predictions for the
/// rows it did not see are added to those rows' sums, and the error over every row judged so
/// far is noted. Holds O(rows) numbers whatever the number of trees, so trees can be fitted
/// anywhere (in ranges, on threads or workers) and tallied here in order.
pub struct OobTally {
    outputs: usize,
    sums: Vec<f64>,
    /// Every row's summed predictions over the trees so far (in bag or not).
    training_sums: Vec<f64>,
    training_error: Vec<f64>,
    votes: Vec<u32>,
    /// Rows out of bag at least once so far, and (classes) whether each such row's summed
    /// out-of-bag votes misclassify it, with the number that do.
    judged: usize,
    wrong: Vec<bool>,
    oob_wrong: usize,
    out_of_bag: usize,
    trees: Vec<Tree>,
    oob_error: Vec<f64>,
    /// Held-out rows judged so far ([`OobTally::add_judging`]), whose trees are not kept.
    held_out: Option<Judged>,
}

impl OobTally {
    pub fn new(rows: usize, outputs: usize) -> Self {
        OobTally {
            outputs,
            sums: vec![0.0; rows * outputs],
            training_sums: vec![0.0; rows * outputs],
            training_error: Vec::new(),
            votes: vec![0; rows],
            judged: 0,
            wrong: vec![false; rows],
            oob_wrong: 0,
            out_of_bag: 0,
            trees: Vec::new(),
            oob_error: Vec::new(),
            held_out: None,
        }
    }

    /// Adds the next tree (trees must come in index order).
    pub fn add(&mut self, fitted: FittedTree, binned: &BinnedMatrix, outcome: &Outcome) {
        self.add_judging(fitted, binned, outcome, None);
    }

    /// [`OobTally::add`], and with `held` (the same rows and outcome for every tree) the
    /// held-out rows judged by the tree, which is then not kept: the forest finished carries
    /// their [`Judged`] figures and no trees.
    pub fn add_judging(
        &mut self,
        fitted: FittedTree,
        binned: &BinnedMatrix,
        outcome: &Outcome,
        held: Option<HeldOut<'_>>,
    ) {
        // The same loops, with the number of outputs a constant where it is one or two (a
        // number outcome, two classes), so their sums and choices compile without loops.
        match self.outputs {
            1 => self.add_with::<1>(fitted, binned, outcome, held),
            2 => self.add_with::<2>(fitted, binned, outcome, held),
            _ => self.add_with::<0>(fitted, binned, outcome, held),
        }
    }

    /// [`OobTally::add`] for `K` outputs a row (0: as many as `self.outputs`).
    fn add_with<const K: usize>(
        &mut self,
        fitted: FittedTree,
        binned: &BinnedMatrix,
        outcome: &Outcome,
        held: Option<HeldOut<'_>>,
    ) {
        let n = binned.rows;
        let outputs = if K > 0 { K } else { self.outputs };
        let FittedTree { tree, mut leaves } = fitted;
        // Every node's values side by side by node id (a leaf's are read for every row
        // reaching it, and a node of the tree itself is much larger).
        let mut values = Vec::with_capacity(tree.nodes.len() * outputs);
        for i in 0..tree.nodes.len() {
            values.extend_from_slice(&tree.node_values(i)[..outputs]);
        }
        let value = |leaf: u32| &values[leaf as usize * outputs..][..outputs];
        // The rows whose leaves are not known, walked down the tree together.
        // Listed without a branch a row (about one in three, at random, is out of bag).
        let unknown = rows_where(n, |r| matches!(leaves[r], OUT_OF_BAG | IN_BAG));
        let mut walked = vec![0; unknown.len()];
        // Built once for the out-of-bag rows and held-out rows walked by their bins.
        let by_bins = walk::Walk::new(&tree, true);
        walk::leaves_by(
            by_bins.as_ref(),
            &tree,
            Rows::Binned(binned),
            |i| unknown[i] as usize,
            &mut walked,
        );
        // The out-of-bag rows' sums, and (classes) whether each is now misclassified: only
        // these rows' judgements change, so the count of wrong ones is kept, not recounted.
        for (&r, &leaf) in unknown.iter().zip(&walked) {
            let r = r as usize;
            if leaves[r] == OUT_OF_BAG {
                self.out_of_bag += 1;
                self.judged += usize::from(self.votes[r] == 0);
                self.votes[r] += 1;
                let s = &mut self.sums[r * outputs..(r + 1) * outputs];
                for (s, v) in s.iter_mut().zip(value(leaf)) {
                    *s += v;
                }
                if let Outcome::Classes { codes, .. } = outcome {
                    let wrong = argmax(s) != codes[r] as usize;
                    self.oob_wrong += usize::from(wrong);
                    self.oob_wrong -= usize::from(self.wrong[r]);
                    self.wrong[r] = wrong;
                }
            }
            leaves[r] = leaf;
        }
        // The training error as `Model::staged_errors` sums it, row by row.
        let (mut wrong, mut squares) = (0.0, 0.0);
        let trees_so_far = (self.oob_error.len() + 1) as f64;
        for (r, &leaf) in leaves.iter().enumerate() {
            let s = &mut self.training_sums[r * outputs..(r + 1) * outputs];
            for (a, b) in s.iter_mut().zip(value(leaf)) {
                *a += b;
            }
            match outcome {
                Outcome::Classes { codes, .. } => {
                    wrong += (argmax(s) != codes[r] as usize) as u8 as f64
                }
                Outcome::Numbers(y) => squares += (s[0] / trees_so_far - y[r]).powi(2),
            }
        }
        self.training_error.push(
            match outcome {
                Outcome::Classes { .. } => wrong,
                Outcome::Numbers(_) => squares,
            } / n.max(1) as f64,
        );
        // Misclassified rows count whole, so their number is the sum a recount would give;
        // squared errors are summed again in row order.
        let err = match outcome {
            Outcome::Classes { .. } => self.oob_wrong as f64,
            Outcome::Numbers(y) => (0..n)
                .filter(|&r| self.votes[r] > 0)
                .map(|r| (self.sums[r * outputs] / self.votes[r] as f64 - y[r]).powi(2))
                .fold(0.0, |a, e| a + e),
        };
        self.oob_error.push(match self.judged {
            0 => f64::NAN,
            judged => err / judged as f64,
        });
        match held {
            Some(held) => self.judge::<K>(&tree, by_bins.as_ref(), &values, held),
            None => self.trees.push(tree),
        }
    }

    /// The held-out rows' sums and error after this tree (the `t`-th, from 0), as
    /// [`crate::model::Model::staged_errors_and_predictions`] makes them: each row's leaf
    /// values (`values`, by node) added to its sums, the error summed in row order.
    fn judge<const K: usize>(
        &mut self,
        tree: &Tree,
        by_bins: Option<&walk::Walk>,
        values: &[f64],
        held: HeldOut<'_>,
    ) {
        let outputs = if K > 0 { K } else { self.outputs };
        let n = held.rows.len();
        let t = self.oob_error.len() - 1;
        let judged = self.held_out.get_or_insert_with(|| Judged {
            curve: Vec::new(),
            sums: vec![0.0; n * outputs],
        });
        let mut at = vec![0; n];
        match held.bins {
            Some(bins) => {
                let mut part = vec![0; bins.within_rows.len().max(bins.beyond_rows.len())];
                let within = &mut part[..bins.within_rows.len()];
                walk::leaves_by(by_bins, tree, Rows::Binned(&bins.within), |i| i, within);
                for (&r, &leaf) in bins.within_rows.iter().zip(&*within) {
                    at[r as usize] = leaf;
                }
                let beyond = &mut part[..bins.beyond_rows.len()];
                walk::leaves(tree, Rows::Records(&bins.beyond), |i| i, beyond);
                for (&r, &leaf) in bins.beyond_rows.iter().zip(&*beyond) {
                    at[r as usize] = leaf;
                }
            }
            None => walk::leaves(tree, held.rows, |i| i, &mut at),
        }
        let mut err = 0.0;
        for (r, &leaf) in at.iter().enumerate() {
            let p = &values[leaf as usize * outputs..][..outputs];
            let s = &mut judged.sums[r * outputs..(r + 1) * outputs];
            for (a, b) in s.iter_mut().zip(p) {
                *a += b;
            }
            err += match held.outcome {
                Outcome::Classes { codes, .. } => (argmax(s) != codes[r] as usize) as u8 as f64,
                Outcome::Numbers(y) => (s[0] / (t + 1) as f64 - y[r]).powi(2),
            };
        }
        judged.curve.push(err / n.max(1) as f64);
    }

    /// Trees added so far.
    pub fn trees(&self) -> usize {
        self.oob_error.len()
    }

    /// The forest of the trees added, `partial` when fewer than asked for were fitted.
    pub fn finish(self, partial: bool) -> Forest {
        let outputs = self.outputs;
        let rows = self.votes.len();
        let oob_prediction = (0..rows * outputs)
            .map(|i| {
                let v = self.votes[i / outputs];
                if v == 0 {
                    f64::NAN
                } else {
                    self.sums[i] / v as f64
                }
            })
            .collect();
        let added = self.oob_error.len();
        let oob_share = self.out_of_bag as f64 / (added.max(1) * rows.max(1)) as f64;
        Forest {
            trees: self.trees,
            outputs,
            oob_error: self.oob_error,
            oob_prediction,
            oob_share,
            training_error: self.training_error,
            partial,
            judged: self.held_out,
        }
    }
}

/// The number of values each tree predicts per row.
pub fn tree_outputs(settings: &ForestSettings, width: usize) -> usize {
    match settings.grow.criterion {
        Criterion::SquaredError => 1,
        _ => width,
    }
}

/// Fits a whole ensemble, one tree after another, and its out-of-bag record.
pub fn fit_forest(
    binned: &BinnedMatrix,
    stats: &[f64],
    width: usize,
    outcome: &Outcome,
    settings: &ForestSettings,
    progress: &mut dyn Progress,
) -> Forest {
    fit_forest_judging(binned, stats, width, outcome, settings, None, progress)
}

/// [`fit_forest`], judging `held` rows tree by tree instead of keeping the trees (see
/// [`HeldOut`]) when given.
pub fn fit_forest_judging(
    binned: &BinnedMatrix,
    stats: &[f64],
    width: usize,
    outcome: &Outcome,
    settings: &ForestSettings,
    held: Option<HeldOut<'_>>,
    progress: &mut dyn Progress,
) -> Forest {
    let mut tally = OobTally::new(binned.rows, tree_outputs(settings, width));
    for i in 0..settings.trees {
        for fitted in fit_trees(binned, stats, width, settings, i..i + 1, &mut Silent) {
            tally.add_judging(fitted, binned, outcome, held);
        }
        if progress.step("trees", i as u64 + 1, settings.trees as u64) == Flow::Stop {
            break;
        }
    }
    let partial = tally.trees() < settings.trees;
    tally.finish(partial)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::binning::{bin_design, BinSettings};
    use crate::design::design_from_csv;
    use crate::progress::StopAfter;

    /// `rows` rows of four numbers in [0, 1) in steps of `1 / steps`, the outcome "yes" when
    /// the first two add up to more than 1, flipped one time in `flip`.
    fn noisy_design(rows: usize, steps: usize, flip: usize) -> crate::design::Design {
        let mut rng = stream(99, Purpose::TreeRows, 0);
        let mut text = String::from("y,a,b,c,d\n");
        for _ in 0..rows {
            let x: Vec<f64> = (0..4)
                .map(|_| below(&mut rng, steps) as f64 / steps as f64)
                .collect();
            let signal = x[0] + x[1] > 1.0;
            let flip = below(&mut rng, flip) == 0;
            let y = if signal != flip { "yes" } else { "no" };
            text += &format!("{y},{},{},{},{}\n", x[0], x[1], x[2], x[3]);
        }
        design_from_csv(&text, "y", &["a", "b", "c", "d"])
    }

    fn noisy_problem() -> (BinnedMatrix, Outcome, Vec<f64>) {
        let design = noisy_design(600, 10_000, 10);
        let (stats, _) = design.row_statistics(false);
        (
            bin_design(&design, BinSettings::default()).unwrap(),
            design.outcome,
            stats,
        )
    }

    #[test]
    fn about_a_third_of_rows_are_out_of_bag_and_oob_error_beats_chance() {
        let (m, y, stats) = noisy_problem();
        let mut s = ForestSettings::random_forest(4, false, 7);
        s.trees = 60;
        let forest = fit_forest(&m, &stats, 2, &y, &s, &mut Silent);
        // (1 − 1/n)^n → 1/e ≈ 0.368 (common practice, no source beyond the limit).
        assert!(
            (forest.oob_share - (-1.0f64).exp()).abs() < 0.01,
            "{}",
            forest.oob_share
        );
        let last = *forest.oob_error.last().unwrap();
        // 10% of labels are flipped, so about 0.10 is the best possible; chance is 0.5.
        assert!(last < 0.2, "oob error {last}");
        assert!(!forest.partial);
    }

    #[test]
    fn held_out_rows_judged_tree_by_tree_get_the_kept_forests_staged_figures() {
        // Judging held-out rows as each tree is tallied, keeping no trees, against the
        // forest kept whole and judged afterwards (our own consistency rule, no source
        // needed): the same error by size and predictions to the bit, the same out-of-bag
        // and training records; two classes and a number outcome, records with a
        // single-precision copy and without, and walked by their bins where they lie
        // within a bin's training values.
        use crate::binning::Records;
        use crate::model::{Ensemble, Method, Model};
        let (m, y, stats) = noisy_problem();
        let numbers = Outcome::Numbers(
            (0..m.rows)
                .map(|r| stats[2 * r + 1] * 3.0 + (r % 7) as f64)
                .collect(),
        );
        // A number outcome's statistics: a unit weight and the value.
        let number_stats: Vec<f64> = match &numbers {
            Outcome::Numbers(v) => v.iter().flat_map(|&y| [1.0, y]).collect(),
            Outcome::Classes { .. } => unreachable!(),
        };
        // Held-out rows: each training row's bins read back as numbers across the training
        // values' range (0 to 1), shifted so that they fall between the training values, a
        // few missing.
        let values: Vec<f64> = (0..m.columns.len())
            .flat_map(|j| (0..m.rows).map(move |r| (j, r)))
            .map(|(j, r)| match (r % 13, m.bin(j, r)) {
                (0, _) | (_, None) => f64::NAN,
                (_, Some(b)) => (b as f64 + 0.37) / 256.0,
            })
            .collect();
        let records = Records::from_columns(m.rows, values);
        let narrow = records.clone().with_narrow_copy();
        let bins = crate::binning::bin_records(&narrow, &m.columns, false);
        // Both kinds of rows are there: within their bins' training values, and not.
        assert!(bins.within_rows.len() > 100 && bins.beyond_rows.len() > 100);
        let cases = [(false, &y, &stats[..]), (true, &numbers, &number_stats[..])];
        for (regression, outcome, stats) in cases {
            let width = 2;
            let mut s = ForestSettings::random_forest(4, regression, 5);
            if regression {
                s.grow.criterion = Criterion::SquaredError;
            }
            s.trees = 12;
            let kept = fit_forest(&m, stats, width, outcome, &s, &mut Silent);
            assert!(kept.judged.is_none() && kept.trees.len() == 12);
            for (rows, bins) in [(&records, None), (&narrow, None), (&narrow, Some(&bins))] {
                let held = HeldOut {
                    rows: Rows::Records(rows),
                    outcome,
                    bins,
                };
                let judging =
                    fit_forest_judging(&m, stats, width, outcome, &s, Some(held), &mut Silent);
                assert!(judging.trees.is_empty(), "no tree kept");
                assert!(!judging.partial);
                // Bits, so that NaN (rows every tree saw) compare equal.
                let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
                assert_eq!(bits(&judging.oob_error), bits(&kept.oob_error));
                assert!(bits(&judging.oob_prediction) == bits(&kept.oob_prediction));
                assert_eq!(bits(&judging.training_error), bits(&kept.training_error));
                let model = Model {
                    method: Method::Forest,
                    outcome: "y".into(),
                    classes: (!regression).then(|| vec!["no".into(), "yes".into()]),
                    predictors: Vec::new(),
                    ensemble: Ensemble::Forest(kept.clone()),
                    settings: Default::default(),
                    seed: 5,
                    training_fingerprint: None,
                    training_rows: m.rows,
                    partial: false,
                };
                let (curve, predictions) =
                    model.staged_errors_and_predictions(Rows::Records(rows), outcome);
                let judged = judging.judged.expect("judged rows");
                assert_eq!(judged.curve.len(), 12);
                // The rows reach many leaves, not one side of every split (two classes: at
                // most 13 shares of 12 trees).
                let p = judged.predictions();
                let distinct: std::collections::BTreeSet<u64> =
                    p.iter().map(|x| x.to_bits()).collect();
                assert!(distinct.len() > 8, "{} distinct", distinct.len());
                assert_eq!(Some(bits(&judged.curve)), curve.map(|c| bits(&c)));
                let want = predictions.map(|p| bits(&p));
                assert!(
                    Some(bits(&judged.predictions())) == want,
                    "regression {regression}"
                );
            }
        }
    }

    #[test]
    fn the_tallied_training_error_is_the_staged_error_whether_leaves_are_known_or_walked() {
        use crate::model::{Ensemble, Method, Model};
        let (m, y, stats) = noisy_problem();
        let mut s = ForestSettings::random_forest(4, false, 3);
        s.trees = 15;
        // Bytes lose the leaves the grower saw, so the second tally walks every row.
        let mut walked = OobTally::new(m.rows, 2);
        for (i, mut f) in fit_trees(&m, &stats, 2, &s, 0..15, &mut Silent)
            .into_iter()
            .enumerate()
        {
            let drawn = tree_rows(&s, m.rows, &[], i);
            for r in 0..m.rows {
                assert_eq!(f.in_bag(r), drawn.contains(&(r as u32)), "tree {i} row {r}");
                // Every row drawn ended in a leaf, which the walk finds again.
                if f.in_bag(r) {
                    assert_eq!(f.leaves[r] as usize, f.tree.leaf(Rows::Binned(&m), r));
                    f.leaves[r] = IN_BAG;
                }
            }
            walked.add(f, &m, &y);
        }
        let walked = walked.finish(false);
        let forest = fit_forest(&m, &stats, 2, &y, &s, &mut Silent);
        assert_eq!(forest.training_error, walked.training_error);
        let model = Model {
            method: Method::Forest,
            outcome: "y".into(),
            classes: Some(vec!["no".into(), "yes".into()]),
            predictors: Vec::new(),
            ensemble: Ensemble::Forest(forest),
            settings: Default::default(),
            seed: 3,
            training_fingerprint: None,
            training_rows: m.rows,
            partial: false,
        };
        let staged = model.staged_errors(Rows::Binned(&m), &y).unwrap();
        assert_eq!(staged.len(), 15);
        // A tree at a time over the rows, or row by row: the same predictions to the bit.
        let mut by_tree = vec![0.0; 2 * (m.rows - 7)];
        model.predict_rows(Rows::Binned(&m), 7..m.rows, &mut by_tree);
        let mut one = [0.0; 2];
        for (i, r) in (7..m.rows).enumerate() {
            model.predict(Rows::Binned(&m), r, &mut one);
            assert_eq!(&by_tree[2 * i..2 * i + 2], &one[..], "row {r}");
        }
        assert_eq!(model.training_errors(&m, &y).unwrap(), staged);
        // Numbers: the mean squared error, summed the same way.
        let mut text = String::from("y,a,b\n");
        let mut rng = stream(5, Purpose::TreeRows, 0);
        for _ in 0..300 {
            let (a, b) = (below(&mut rng, 1000) as f64, below(&mut rng, 1000) as f64);
            text += &format!("{},{a},{b}\n", a / 100.0 + (b % 7.0) / 3.0);
        }
        let design = design_from_csv(&text, "y", &["a", "b"]);
        let (stats, width) = design.row_statistics(false);
        let binned = bin_design(&design, BinSettings::default()).unwrap();
        let mut s = ForestSettings::random_forest(2, true, 4);
        s.trees = 9;
        let forest = fit_forest(&binned, &stats, width, &design.outcome, &s, &mut Silent);
        let curve = forest.training_error.clone();
        let model = Model {
            ensemble: Ensemble::Forest(forest),
            classes: None,
            ..model
        };
        assert_eq!(
            model
                .staged_errors(Rows::Binned(&binned), &design.outcome)
                .unwrap(),
            curve
        );
    }

    #[test]
    fn the_seed_alone_fixes_the_forest_and_ranges_merge() {
        let (m, y, stats) = noisy_problem();
        let mut s = ForestSettings::random_forest(4, false, 11);
        s.trees = 12;
        let a = fit_forest(&m, &stats, 2, &y, &s, &mut Silent);
        let b = fit_forest(&m, &stats, 2, &y, &s, &mut Silent);
        assert_eq!(a.trees, b.trees);
        let mut parts = fit_trees(&m, &stats, 2, &s, 0..5, &mut Silent);
        parts.extend(fit_trees(&m, &stats, 2, &s, 5..12, &mut Silent));
        let merged: Vec<Tree> = parts.into_iter().map(|f| f.tree).collect();
        assert_eq!(merged, a.trees, "trees fitted in two ranges equal one run");
        s.seed = 12;
        assert_ne!(
            fit_forest(&m, &stats, 2, &y, &s, &mut Silent).trees,
            a.trees
        );
    }

    #[test]
    fn a_balanced_bootstrap_draws_each_class_equally() {
        // 90 rows of one class, 10 of the other.
        let mut text = String::from("y,a\n");
        for i in 0..100 {
            text += &format!("{},{}\n", if i < 10 { "rare" } else { "common" }, i);
        }
        let design = design_from_csv(&text, "y", &["a"]);
        let (stats, k) = design.row_statistics(false);
        let m = bin_design(&design, BinSettings::default()).unwrap();
        let mut s = ForestSettings::random_forest(1, false, 3);
        s.trees = 1;
        s.balanced = true;
        let t = fit_trees(&m, &stats, k, &s, 0..1, &mut Silent).remove(0);
        let classes: Vec<u32> = (0..100)
            .map(|r| argmax(&stats[r * k..(r + 1) * k]) as u32)
            .collect();
        let drawn = tree_rows(&s, 100, &class_rows(&classes, k), 0);
        let rare = drawn.iter().filter(|&&r| r < 10).count();
        assert_eq!((rare, drawn.len() - rare), (50, 50));
        // The rows the tree saw are the rows drawn.
        assert!((0..100).all(|r| t.in_bag(r) == drawn.contains(&(r as u32))));
    }

    #[test]
    fn cancelling_leaves_a_partial_forest() {
        let (m, y, stats) = noisy_problem();
        let mut s = ForestSettings::random_forest(4, false, 1);
        s.trees = 50;
        let f = fit_forest(&m, &stats, 2, &y, &s, &mut StopAfter(3));
        assert!(f.partial);
        assert_eq!((f.trees.len(), f.oob_error.len()), (3, 3));
    }

    #[test]
    fn out_of_bag_rows_walked_by_their_bins_reach_the_leaves_their_values_reach() {
        // Out-of-bag figures and the tally walk training rows by their bins, a fitted model
        // reads values: each split's value threshold must send every training row where its
        // bin goes. Numbers of six decimals in 256 bins of several values each, so thresholds
        // midway between a node's values often fall inside a bin the node left empty. (Our
        // own consistency rule, no source; before the rule moved such thresholds, 501 of
        // these 60,000 row walks ended in another leaf.)
        let design = noisy_design(3000, 1_000_000, 4);
        let (stats, _) = design.row_statistics(false);
        let m = bin_design(&design, BinSettings::default()).unwrap();
        let values = crate::validate::records_of(&design, &m.columns);
        let mut s = ForestSettings::random_forest(4, false, 7);
        s.trees = 20;
        let forest = fit_forest(&m, &stats, 2, &design.outcome, &s, &mut Silent);
        for (i, t) in forest.trees.iter().enumerate() {
            for r in 0..m.rows {
                let (by_bin, by_value) = (
                    t.leaf(Rows::Binned(&m), r),
                    t.leaf(Rows::Records(&values), r),
                );
                assert_eq!(by_bin, by_value, "tree {i}, row {r}");
            }
        }
    }
}
