//! Growing one tree by histogram split search on binned predictors.
//!
//! The grower sees binned predictors, a list of rows (repeats allowed: a bootstrap sample),
//! and per-row statistics (class weights, or `(w, w·y)`); it never knows the ensemble or the
//! loss (invariant 3). At each node it sums the statistics per bin of every candidate
//! predictor, scans the split points in bin order (numbers) or in order of the bins' mean
//! response (categories, the classic optimal-partition ordering: Fisher 1958; Breiman et al.
//! 1984, section 9.4), tries the missing-value bin on both sides, and keeps the best gain.
//! Ties keep the first candidate found (predictor order, then bin order), so growth is
//! deterministic.
//!
//! Monotone constraints ([`grow_with`], single-output criteria): each node carries bounds
//! `[low, high]` on its value. A split on a constrained predictor is kept only when its two
//! child values (each held inside the bounds) are in the required order, and its children's
//! bounds meet at the midpoint of those values, so every leaf under the left child is on one
//! side of every leaf under the right (the bound propagation of XGBoost's and LightGBM's
//! "basic" monotone method, from memory). Category predictors ignore a constraint (callers
//! refuse it). A split gain with bounds uses the cost at the held value
//! ([`Criterion::cost_at`]).

use super::criterion::Criterion;
use super::{BinSet, Node, Tree};
use crate::binning::{Bin, BinRule, BinnedMatrix, Cells};

/// Limits and choices for one tree.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GrowSettings {
    pub criterion: Criterion,
    /// Deepest level of splits (`None`: grow until another limit stops it).
    pub max_depth: Option<usize>,
    /// Fewest rows in a leaf.
    pub min_rows_leaf: usize,
    /// Fewest rows a node needs to be split.
    pub min_rows_split: usize,
    /// Smallest weighted impurity decrease that makes a split worth keeping.
    pub min_gain: f64,
    /// Most leaves. `Some` grows best-first: the leaf whose split gains most is split next
    /// (Shi 2007; Friedman, Hastie & Tibshirani 2000), until no leaf can be split or the
    /// limit is reached. `None` grows depth-first, left before right.
    pub max_leaves: Option<usize>,
    /// Least total weight in a leaf ([`Criterion::weight`]: the summed hessian for gradients).
    pub min_weight_leaf: f64,
}

impl Default for GrowSettings {
    fn default() -> Self {
        GrowSettings {
            criterion: Criterion::Gini,
            max_depth: None,
            min_rows_leaf: 1,
            min_rows_split: 2,
            min_gain: 0.0,
            max_leaves: None,
            min_weight_leaf: 0.0,
        }
    }
}

/// Chooses which predictors a node may split on (random forests draw a subset). It gets the
/// list of all predictors and keeps the ones to try, in the order to try them.
pub type PredictorChooser<'a> = &'a mut dyn FnMut(&mut Vec<usize>);

/// The best split found for a node.
#[derive(Debug, Clone)]
struct Split {
    gain: f64,
    feature: usize,
    numeric: bool,
    /// Numbers: the highest bin sent left.
    threshold_bin: usize,
    /// Numbers: the first bin on the right holding rows of the node.
    next_bin: Option<usize>,
    /// Categories: the bins sent left.
    categories: BinSet,
    missing_left: bool,
    /// The children's values (held within the node's bounds), for monotone bounds.
    values: (f64, f64),
    /// The left child's packed counts ([`pack_counts`], or [`pack_classes3`] for three
    /// classes) when a scan of packed counts found the split, so the children's totals need
    /// no pass over their rows.
    left_counts: Option<u64>,
}

/// Extras of a grow call that most callers leave empty.
#[derive(Debug, Clone, Copy, Default)]
pub struct Constraints<'a> {
    /// Per predictor: +1 the tree's value must not fall as the predictor rises, −1 must not
    /// rise, 0 free. Empty: no constraints. Ignored for category predictors.
    pub monotone: &'a [i8],
}

/// A leaf that may be split: its node, its rows `work[start..end]`, depth, best split and
/// the bounds on its value (monotone constraints).
struct Candidate {
    id: usize,
    start: usize,
    end: usize,
    depth: usize,
    split: Split,
    bounds: (f64, f64),
    /// The node's packed counts ([`pack_counts`] or [`pack_classes3`]), when it has them.
    counts: Option<u64>,
    /// The node's dense histograms of every predictor, kept when the node is large enough
    /// that its larger child's histograms are cheaper by subtraction.
    hist: Option<Vec<f64>>,
}

/// Nodes with at least this many rows keep dense histograms of every predictor, so their
/// larger child's histograms come from the parent's minus the smaller child's (the
/// subtraction of LightGBM and scikit-learn's histogram boosting). Below it, a node sums only
/// the bins its rows touch. (Common practice, no source, for the value.)
const DENSE_MIN_ROWS: usize = 1024;

/// Candidate predictors whose histograms a forest node fills in one pass over its rows (the
/// √30 = 5 of the validation benchmark at once; five histograms of 6 KB stay in the
/// first-level cache). Measured with `grow_bench`, no source.
const BATCH: usize = 5;

/// Most classes whose slots are filled and scanned at a width fixed when compiled
/// ([`fill_rows_classes`], [`scan_classes`], [`scan_filled_classes`]); more take the general
/// loops.
const MOST_FIXED_CLASSES: usize = 8;

/// Running sums [`LeftSums`] keeps beyond its four named classes.
const MORE_CLASSES: usize = MOST_FIXED_CLASSES - 4;

/// Slots per predictor in a dense histogram: one per u8 cell value, missing (255) included.
const DENSE_SLOTS: usize = 256;

/// No bounds on a node's value.
const FREE: (f64, f64) = (f64::NEG_INFINITY, f64::INFINITY);

/// Defines `$name`, which runs `$plain` (an `#[inline(always)]` function, so each build has
/// its own copy of the loop) compiled a second time for AVX2 when on an x86-64 CPU that has
/// it, else as built. The vector loops then take four numbers a step instead of two; each lane
/// does the same IEEE operations (Rust never fuses a multiply and an add on its own), so the
/// results are the same to the bit, tested. The crate's only `unsafe`: calling the AVX2 build
/// after the check.
macro_rules! twice_for_avx2 {
    (
        $(#[$doc:meta])*
        fn $name:ident $(<$lt:lifetime>)? $(<const $c:ident: $ct:ty>)?
            ($($arg:ident: $ty:ty),* $(,)?) $(-> $ret:ty)? = $plain:ident
    ) => {
        $(#[$doc])*
        fn $name $(<$lt>)? $(<const $c: $ct>)? ($($arg: $ty),*) $(-> $ret)? {
            #[cfg(target_arch = "x86_64")]
            {
                #[target_feature(enable = "avx2")]
                fn avx2 $(<$lt>)? $(<const $c: $ct>)? ($($arg: $ty),*) $(-> $ret)? {
                    $plain($($arg),*)
                }
                if std::is_x86_feature_detected!("avx2") {
                    // SAFETY: the CPU has AVX2 (checked just above).
                    return unsafe { avx2($($arg),*) };
                }
            }
            $plain($($arg),*)
        }
    };
}

/// Grows a tree on `rows` of `binned`. `stats` holds `width` numbers per row of `binned`.
pub fn grow<'a>(
    binned: &'a BinnedMatrix,
    stats: &'a [f64],
    width: usize,
    rows: &[u32],
    settings: &'a GrowSettings,
    choose: Option<PredictorChooser<'_>>,
) -> Tree {
    grow_with(
        binned,
        stats,
        width,
        rows,
        settings,
        choose,
        Constraints::default(),
    )
}

/// [`grow`] with [`Constraints`].
pub fn grow_with<'a>(
    binned: &'a BinnedMatrix,
    stats: &'a [f64],
    width: usize,
    rows: &[u32],
    settings: &'a GrowSettings,
    choose: Option<PredictorChooser<'_>>,
    constraints: Constraints<'a>,
) -> Tree {
    grow_rows(binned, stats, width, rows, settings, choose, constraints).tree
}

/// A grown tree and where its rows went: `rows` (the rows grown on, reordered; with two
/// statistics per row, a row given several times appears once, see `collapse_repeats`)
/// holds node `i`'s rows at `rows[spans[i].0..spans[i].1]`, in their given order, so a caller
/// can update the rows of each leaf without walking them down the tree.
pub struct Grown {
    pub tree: Tree,
    pub rows: Vec<u32>,
    pub spans: Vec<(usize, usize)>,
}

/// [`grow_with`], also handing back which rows ended in which node.
pub fn grow_rows<'a>(
    binned: &'a BinnedMatrix,
    stats: &'a [f64],
    width: usize,
    rows: &[u32],
    settings: &'a GrowSettings,
    choose: Option<PredictorChooser<'_>>,
    constraints: Constraints<'a>,
) -> Grown {
    let monotone = constraints.monotone;
    match &binned.cells {
        Cells::Narrow(cells) => Grower::new(
            binned, cells, stats, width, rows, settings, choose, monotone,
        )
        .run(),
        Cells::Wide(cells) => Grower::new(
            binned, cells, stats, width, rows, settings, choose, monotone,
        )
        .run(),
    }
}

/// The state of growing one tree; buffers are allocated once per tree.
struct Grower<'a, 'c, B: Bin> {
    binned: &'a BinnedMatrix,
    cells: &'a [B],
    stats: &'a [f64],
    width: usize,
    settings: &'a GrowSettings,
    choose: Option<PredictorChooser<'c>>,
    monotone: &'a [i8],
    tree: Tree,
    /// The rows of every node: a node owns a contiguous range, left rows before right.
    work: Vec<u32>,
    scratch: Vec<u32>,
    /// Statistics and a row count per bin, kept zeroed between uses: only the bins a node
    /// touches are filled and cleared again, so small nodes deep in a tree cost in proportion
    /// to their rows, not to the number of bins.
    hist: Vec<f64>,
    /// [`BATCH`] histograms of small cells' `(s0, s1, rows)` slots, filled together (kept
    /// zeroed between uses like `hist`).
    batch_hist: Vec<f64>,
    left_sums: LeftSums,
    /// The split points of up to [`BATCH`] predictors of a node, scanned together.
    group: GroupPoints,
    touched: Vec<B>,
    /// The bins in scan order, and the scan's running sums.
    order: Vec<B>,
    sums: ScanSums,
    totals: Vec<f64>,
    candidates: Vec<usize>,
    /// Dense histograms: predictor `j`'s bins start at `dense_offsets[j]` (256 slots of
    /// `width + 1` numbers, one per cell value, so slot 255 holds missing values); `None` in
    /// exact mode, where bins are too many to keep densely.
    dense_offsets: Option<Vec<usize>>,
    /// With two statistics per row: each sampled row's statistics and its row count, by row
    /// (times the number of times the row was drawn, see [`collapse_repeats`]); a node reads
    /// those of its rows, which stay in row order, and only the row numbers move when a node
    /// is split (empty otherwise).
    pairs: Vec<[f64; 3]>,
    /// With another number of statistics (several classes): each row's number of draws, by
    /// row (0: not drawn), by which a node multiplies its statistics (see
    /// [`collapse_counts`]; empty with two statistics).
    counts: Vec<f64>,
    /// Two classes whose rows all count whole (class weights of 1): each row's class-1 count
    /// and row count packed as `(s1 << 32) | rows` by row, so one integer addition sums both
    /// ([`pack_counts`]; empty otherwise).
    packed: Vec<u64>,
    /// Two statistics whose first is each row's count (number outcomes without row weights:
    /// `s0` = rows): each row's `[s1, rows]` by row, so a fill adds two numbers a row and
    /// predictor, not three, and the scan takes `s0` from the rows, the very sums
    /// ([`units_of`]; empty otherwise, and whenever `packed` is not).
    units: Vec<[f64; 2]>,
    /// Three classes whose rows all count whole: each row's counts packed in one u64
    /// ([`pack_classes3`]; empty otherwise).
    classes3: Vec<u64>,
    /// [`BATCH`] histograms of packed counts, 256 slots each (kept zeroed between uses).
    packed_hist: Vec<u64>,
    /// The split points of one dense scan.
    points: Points,
    /// Dense histogram buffers free for reuse.
    pool: Vec<Vec<f64>>,
    /// Each node's rows, `work[start..end]`, by node id.
    spans: Vec<(usize, usize)>,
}

impl<'a, 'c, B: Bin> Grower<'a, 'c, B> {
    #[allow(clippy::too_many_arguments)]
    fn new(
        binned: &'a BinnedMatrix,
        cells: &'a [B],
        stats: &'a [f64],
        width: usize,
        rows: &[u32],
        settings: &'a GrowSettings,
        choose: Option<PredictorChooser<'c>>,
        monotone: &'a [i8],
    ) -> Self {
        let outputs = settings.criterion.outputs(width);
        let (work, pairs, counts) = match width {
            2 => {
                let (work, pairs) = collapse_repeats(rows, stats, binned.rows);
                (work, pairs, Vec::new())
            }
            _ => {
                let (work, counts) = collapse_counts(rows, binned.rows);
                (work, Vec::new(), counts)
            }
        };
        let classes3 = match width {
            3 => pack_classes3(&work, stats, &counts, settings.criterion),
            _ => Vec::new(),
        };
        let packed = pack_counts(&pairs, settings.criterion);
        Grower {
            binned,
            cells,
            stats,
            width,
            settings,
            choose,
            monotone,
            tree: Tree {
                nodes: vec![Node::leaf()],
                values: Vec::new(),
                outputs,
            },
            scratch: Vec::with_capacity(work.len()),
            work,
            hist: vec![0.0; (B::MISSING.index() + 1) * (width + 1)],
            batch_hist: Vec::new(),
            left_sums: LeftSums::new(),
            group: GroupPoints::new(),
            touched: Vec::with_capacity(256),
            order: Vec::with_capacity(256),
            sums: ScanSums::new(width),
            totals: vec![0.0; width],
            candidates: Vec::new(),
            dense_offsets: (B::MISSING.index() < DENSE_SLOTS).then(|| {
                (0..=binned.columns.len())
                    .map(|j| j * DENSE_SLOTS * (width + 1))
                    .collect()
            }),
            units: match packed.is_empty() {
                true => units_of(&pairs),
                false => Vec::new(),
            },
            packed,
            classes3,
            counts,
            packed_hist: Vec::new(),
            pairs,
            points: Points::default(),
            pool: Vec::new(),
            spans: Vec::new(),
        }
    }

    fn column(&self, j: usize) -> &'a [B] {
        let n = self.binned.rows;
        &self.cells[j * n..(j + 1) * n]
    }

    fn run(mut self) -> Grown {
        let mut frontier: Vec<Candidate> = Vec::new();
        let n = self.work.len();
        if let Some(c) = self.evaluate(0, (0, n), 0, FREE, None, None, true) {
            frontier.push(c);
        }
        let mut leaves = 1usize;
        let best_first = self.settings.max_leaves.is_some();
        let max_leaves = self.settings.max_leaves.unwrap_or(usize::MAX);
        while leaves < max_leaves {
            // Depth-first: the newest candidate (left children are pushed last). Best-first:
            // the largest gain, the earliest created on ties.
            let pick = if best_first {
                (0..frontier.len()).fold(None, |b: Option<usize>, i| match b {
                    Some(b) if frontier[b].split.gain >= frontier[i].split.gain => Some(b),
                    _ => Some(i),
                })
            } else {
                frontier.len().checked_sub(1)
            };
            let Some(pick) = pick else { break };
            // Removing the last (depth-first) costs nothing; best-first keeps the order, so
            // ties still go to the earliest created.
            let c = frontier.remove(pick);
            let k = self.apply(&c);
            leaves += 1;
            // Children at the depth limit, or made by the split that reaches the leaf limit,
            // stay leaves: their split search and histograms would go unread.
            let deeper = (self.settings.max_depth).is_none_or(|d| c.depth + 1 < d);
            let grow_on = deeper && leaves < max_leaves;
            let (left, right) = (self.tree.nodes.len(), self.tree.nodes.len() + 1);
            self.tree.nodes.push(Node::leaf());
            self.tree.nodes.push(Node::leaf());
            self.tree.nodes[c.id].left = left as u32;
            self.tree.nodes[c.id].right = right as u32;
            // Children of a constrained split meet at the midpoint of their values.
            let (low, high) = c.bounds;
            let mid = 0.5 * (c.split.values.0 + c.split.values.1);
            let sign = match c.split.numeric {
                true => self.monotone.get(c.split.feature).copied().unwrap_or(0),
                false => 0,
            };
            let (lb, rb) = match sign {
                s if s > 0 => ((low, mid), (mid, high)),
                s if s < 0 => ((mid, high), (low, mid)),
                _ => (c.bounds, c.bounds),
            };
            // Dense histograms for the children: the smaller side's summed, the larger side's
            // by subtraction from the parent's (only when the larger side may be split).
            let (mut lh, mut rh) = (None, None);
            if let Some(mut parent) = c.hist {
                let left_small = k - c.start <= c.end - k;
                let larger = if left_small { c.end - k } else { k - c.start };
                let smaller = c.end - c.start - larger;
                let splittable = (self.settings.min_rows_split)
                    .max(2 * self.settings.min_rows_leaf)
                    .max(DENSE_MIN_ROWS);
                if larger >= splittable && grow_on {
                    let small = if left_small {
                        self.dense_histograms(c.start, k)
                    } else {
                        self.dense_histograms(k, c.end)
                    };
                    for (p, s) in parent.iter_mut().zip(&small) {
                        *p -= s;
                    }
                    // A child under `DENSE_MIN_ROWS` sums only the bins its rows touch: a
                    // scan of every bin of every predictor costs it more than its rows do.
                    let small = match smaller >= DENSE_MIN_ROWS {
                        true => Some(small),
                        false => {
                            self.pool.push(small);
                            None
                        }
                    };
                    (lh, rh) = if left_small {
                        (small, Some(parent))
                    } else {
                        (Some(parent), small)
                    };
                } else {
                    self.pool.push(parent);
                }
            }
            // Packed counts of the children from the scan that chose the split, if it had them.
            let (lc, rc) = match (c.counts, c.split.left_counts) {
                (Some(t), Some(l)) => (Some(l), Some(t - l)),
                _ => (None, None),
            };
            let l = self.evaluate(left, (c.start, k), c.depth + 1, lb, lh, lc, grow_on);
            let r = self.evaluate(right, (k, c.end), c.depth + 1, rb, rh, rc, grow_on);
            // Right pushed first so depth-first growth takes the left subtree first.
            frontier.extend(r);
            frontier.extend(l);
        }
        Grown {
            tree: self.tree,
            rows: self.work,
            spans: self.spans,
        }
    }

    /// Fills node `id`'s values from its rows `work[start..end]` and finds its best split
    /// (`None`: the node stays a leaf). `bounds` hold the node's value (monotone constraints);
    /// `counts`, its rows' packed counts summed, when the parent's scan knew them;
    /// `may_split` false for a node that stays a leaf whatever it holds (its values only).
    #[allow(clippy::too_many_arguments)]
    fn evaluate(
        &mut self,
        id: usize,
        (start, end): (usize, usize),
        depth: usize,
        bounds: (f64, f64),
        mut dense: Option<Vec<f64>>,
        counts: Option<u64>,
        may_split: bool,
    ) -> Option<Candidate> {
        let settings = self.settings;
        let criterion = settings.criterion;
        let width = self.width;
        let stats = self.stats;
        if self.spans.len() <= id {
            self.spans.resize(id + 1, (0, 0));
        }
        self.spans[id] = (start, end);
        self.totals.iter_mut().for_each(|t| *t = 0.0);
        // Whether the rows alone would give different values (so the node is not pure):
        // judged until two differ, the rest then summed without a division a row.
        let mut one = Uniform::default();
        // Rows in the node, repeats counted.
        let n;
        // The value a row alone would give a node (mean, or Newton step direction).
        let alone = |s: &[f64]| match criterion {
            Criterion::SquaredError if s[0] > 0.0 => Some(s[1] / s[0]),
            Criterion::Gradient { .. } if s[1] > 0.0 => Some(s[0] / s[1]),
            _ => None,
        };
        let mut packed_sum = None;
        if !self.packed.is_empty() {
            // Whole counts: summed packed, the same numbers exactly (see `pack_counts`), or
            // known from the parent's scan (integer sums: the same in any order).
            let sum: u64 = counts.unwrap_or_else(|| {
                self.work[start..end]
                    .iter()
                    .map(|&r| self.packed[r as usize])
                    .sum()
            });
            packed_sum = Some(sum);
            let [t0, t1, tc] = unpack_counts(sum);
            self.totals.copy_from_slice(&[t0, t1]);
            n = tc as usize;
        } else if !self.classes3.is_empty() {
            // Three whole classes: the same, packed as `pack_classes3` packs them.
            let sum: u64 = counts.unwrap_or_else(|| {
                self.work[start..end]
                    .iter()
                    .map(|&r| self.classes3[r as usize])
                    .sum()
            });
            packed_sum = Some(sum);
            let [t0, t1, t2, tc] = unpack_classes3(sum);
            self.totals.copy_from_slice(&[t0, t1, t2]);
            n = tc as usize;
        } else if width == 2 {
            // The same sums in the same order, from the pairs kept beside the rows; the range
            // of values only where purity is judged by it (not for classes).
            let [mut t0, mut t1, mut tc] = [0.0; 3];
            let ranged = matches!(
                criterion,
                Criterion::SquaredError | Criterion::Gradient { .. }
            );
            for s in self.work[start..end]
                .iter()
                .map(|&r| &self.pairs[r as usize])
            {
                t0 += s[0];
                t1 += s[1];
                tc += s[2];
                if ranged && !one.mixed {
                    one.see(alone(s));
                }
            }
            self.totals.copy_from_slice(&[t0, t1]);
            n = tc as usize;
        } else {
            // Each row's statistics times its draws (whole counts: the sums of the repeats).
            let mut rows = 0.0;
            for &r in &self.work[start..end] {
                let s = &stats[r as usize * width..(r as usize + 1) * width];
                let c = self.counts[r as usize];
                for (t, v) in self.totals.iter_mut().zip(s) {
                    *t += c * v;
                }
                rows += c;
                if !one.mixed {
                    one.see(alone(s));
                }
            }
            n = rows as usize;
        }
        let weight = criterion.weight(&self.totals);
        self.tree.nodes[id].value = self.tree.values.len() as u32;
        self.tree.nodes[id].weight = weight;
        criterion.values(&self.totals, &mut self.tree.values);
        let (low, high) = bounds;
        let bounded = bounds != FREE;
        let own_value = criterion.leaf_value(&self.totals).clamp(low, high);
        if bounded && self.tree.outputs == 1 {
            let last = self.tree.values.len() - 1;
            self.tree.values[last] = own_value;
        }
        let parent_cost = if bounded {
            criterion.cost_at(&self.totals, own_value)
        } else {
            criterion.cost(&self.totals)
        };
        let pure = match criterion {
            Criterion::SquaredError | Criterion::Gradient { .. } => !one.mixed,
            _ => parent_cost <= 1e-12 * weight.max(1.0),
        };
        if pure
            || !may_split
            || n < settings.min_rows_split
            || n < 2 * settings.min_rows_leaf.max(1)
            || weight < 2.0 * settings.min_weight_leaf
            || settings.max_depth.is_some_and(|d| depth >= d)
        {
            if let Some(h) = dense {
                self.pool.push(h);
            }
            return None;
        }
        let mut candidates = std::mem::take(&mut self.candidates);
        candidates.clear();
        candidates.extend(0..self.binned.columns.len());
        if let Some(choose) = self.choose.as_mut() {
            choose(&mut candidates);
        }
        // A large node trying every predictor sums them all densely, for its children's sake.
        if dense.is_none()
            && end - start >= DENSE_MIN_ROWS
            && self.dense_offsets.is_some()
            && candidates.len() == self.binned.columns.len()
        {
            dense = Some(self.dense_histograms(start, end));
        }
        let mut best: Option<Split> = None;
        let stride = width + 1;
        // The common case of a forest (two statistics, or three classes counted whole; number
        // predictors, small cells, no bounds or dense histograms): the node's rows read once
        // per [`BATCH`] predictors.
        let numbers_only = !bounded
            && dense.is_none()
            && B::MISSING.index() < DENSE_SLOTS
            && candidates.iter().all(|&j| {
                self.binned.columns[j].rule.is_numeric()
                    && self.monotone.get(j).copied().unwrap_or(0) == 0
            });
        let batched = numbers_only && width == 2;
        let three_packed = numbers_only && width == 3 && !self.classes3.is_empty();
        if three_packed {
            if self.packed_hist.len() < BATCH * 256 {
                self.packed_hist.resize(BATCH * 256, 0);
            }
            let rows = &self.work[start..end];
            for group in candidates.chunks(BATCH) {
                let (hist, cells) = (&mut self.packed_hist[..], self.cells);
                let bits = fill_group(hist, group, cells, rows, &self.classes3);
                for ((&j, slots), bits) in group
                    .iter()
                    .zip(self.packed_hist.chunks_exact_mut(256))
                    .zip(bits)
                {
                    // Gini without missing values: gathered, and scanned packed with the
                    // group's others in flat loops.
                    if criterion == Criterion::Gini && slots[B::MISSING.index()] == 0 {
                        self.group.gather(slots, bits, j);
                        continue;
                    }
                    // The points gathered so far come first (ties go to the earlier one).
                    scan_group3(&mut self.group, parent_cost, settings, &mut best);
                    // The used slots unpacked into the general histogram, and emptied.
                    let (general, _) = self.hist.as_chunks_mut::<4>();
                    for (w, mut word) in bits.into_iter().enumerate() {
                        while word != 0 {
                            let b = w * 64 + word.trailing_zeros() as usize;
                            general[b] = unpack_classes3(std::mem::replace(&mut slots[b], 0));
                            word &= word - 1;
                        }
                    }
                    bins_in_order(bits, &mut self.order);
                    let at = (B::MISSING.index(), j, true, parent_cost);
                    scan_classes::<B, 4>(&self.hist, &self.order, at, settings, &mut best);
                    clear_slots::<4>(&mut self.hist, bits);
                }
                scan_group3(&mut self.group, parent_cost, settings, &mut best);
            }
        }
        if batched {
            let slots_len = (B::MISSING.index() + 1) * 3;
            if self.batch_hist.len() < BATCH * slots_len {
                self.batch_hist.resize(BATCH * slots_len, 0.0);
            }
            let rows = &self.work[start..end];
            let pairs = &self.pairs[..];
            if !self.packed.is_empty() {
                if self.packed_hist.len() < BATCH * 256 {
                    self.packed_hist.resize(BATCH * 256, 0);
                }
                let node_rows = n;
                for group in candidates.chunks(BATCH) {
                    let (hist, cells) = (&mut self.packed_hist[..], self.cells);
                    let bits = fill_group(hist, group, cells, rows, &self.packed);
                    for ((&j, slots), bits) in group
                        .iter()
                        .zip(self.packed_hist.chunks_exact_mut(256))
                        .zip(bits)
                    {
                        if unbeatable(&best, parent_cost, criterion, node_rows) {
                            // Nothing can beat it: the slots are only emptied.
                            for (w, mut word) in bits.into_iter().enumerate() {
                                while word != 0 {
                                    slots[w * 64 + word.trailing_zeros() as usize] = 0;
                                    word &= word - 1;
                                }
                            }
                            continue;
                        }
                        if slots[B::MISSING.index()] == 0 {
                            // No missing values: gathered, and scanned with the group's others.
                            self.group.gather(slots, bits, j);
                            continue;
                        }
                        // Missing values: the points gathered so far come first (ties go to
                        // the earlier predictor).
                        scan_group(&mut self.group, parent_cost, settings, &mut best);
                        let sums = &mut self.left_sums;
                        let at = (j, parent_cost);
                        scan_packed(slots, bits, at, settings, sums, &mut best);
                    }
                    scan_group(&mut self.group, parent_cost, settings, &mut best);
                }
            }
            for group in candidates.chunks(BATCH).filter(|_| !self.units.is_empty()) {
                let (all, _) = self.batch_hist.as_chunks_mut::<2>();
                let bits = fill_group(all, group, self.cells, rows, &self.units);
                let (all, _) = self.batch_hist.as_chunks_mut::<2>();
                for ((&j, slots), bits) in group.iter().zip(all.chunks_exact_mut(256)).zip(bits) {
                    let (sums, m) = (&mut self.left_sums, B::MISSING.index() & 255);
                    if slots[m][1] == 0.0 {
                        // No missing values: gathered, and scanned with the group's others.
                        self.group.gather_units(slots, bits, j);
                        continue;
                    }
                    // The points gathered so far come first (ties go to the earlier one).
                    scan_group_units(&mut self.group, parent_cost, settings, &mut best);
                    // Missing values: the slots used spelt out as `(s0, s1, rows)`, emptied,
                    // for the scan that tries them on both sides.
                    let (spelt, _) = self.hist.as_chunks_mut::<3>();
                    for (w, mut word) in bits.into_iter().enumerate() {
                        while word != 0 {
                            let b = w * 64 + word.trailing_zeros() as usize;
                            let [h1, hc] = std::mem::replace(&mut slots[b], [0.0; 2]);
                            spelt[b] = [hc, h1, hc];
                            word &= word - 1;
                        }
                    }
                    scan_filled_pairs::<B>(spelt, bits, j, parent_cost, settings, sums, &mut best);
                }
                scan_group_units(&mut self.group, parent_cost, settings, &mut best);
            }
            let plain = self.packed.is_empty() && self.units.is_empty();
            for group in candidates.chunks(BATCH).filter(|_| plain) {
                let (all, _) = self.batch_hist.as_chunks_mut::<3>();
                let bits = fill_group(all, group, self.cells, rows, pairs);
                let (all, _) = self.batch_hist.as_chunks_mut::<3>();
                for ((&j, slots), bits) in group.iter().zip(all.chunks_exact_mut(256)).zip(bits) {
                    if slots[B::MISSING.index() & 255][2] == 0.0 {
                        // No missing values: gathered, and scanned with the group's others.
                        self.group.gather_sums(slots, bits, j);
                        continue;
                    }
                    // The points gathered so far come first (ties go to the earlier one).
                    scan_group_sums(&mut self.group, parent_cost, settings, &mut best);
                    let sums = &mut self.left_sums;
                    scan_filled_pairs::<B>(slots, bits, j, parent_cost, settings, sums, &mut best);
                }
                scan_group_sums(&mut self.group, parent_cost, settings, &mut best);
            }
        }
        for &j in candidates.iter().filter(|_| !batched && !three_packed) {
            let numeric = self.binned.columns[j].rule.is_numeric();
            let bins = self.binned.columns[j].bins;
            let limits = Limits {
                monotone: match numeric {
                    true => self.monotone.get(j).copied().unwrap_or(0),
                    false => 0,
                },
                low,
                high,
                bounded,
            };
            if let (Some(h), Some(offsets)) = (&dense, &self.dense_offsets) {
                let h = &h[offsets[j]..offsets[j + 1]];
                if numeric && width == 2 && !bounded && limits.monotone == 0 {
                    scan_dense_numbers(
                        h,
                        bins,
                        j,
                        parent_cost,
                        settings,
                        &mut self.points,
                        &mut best,
                    );
                    continue;
                }
                self.order.clear();
                self.order.extend(
                    (0..bins)
                        .filter(|&b| h[b * stride + width] > 0.0)
                        .map(|b| B::from_bin(Some(b))),
                );
                if !numeric {
                    sort_levels(h, &mut self.order, width, criterion);
                }
                scan(
                    h,
                    &self.order,
                    B::MISSING.index(),
                    &mut self.sums,
                    j,
                    numeric,
                    parent_cost,
                    settings,
                    &limits,
                    &mut best,
                );
                continue;
            }
            let column = self.column(j);
            if width == 2
                && numeric
                && !bounded
                && limits.monotone == 0
                && B::MISSING.index() < DENSE_SLOTS
            {
                // One predictor of a node that cannot be batched (some are categories).
                let (slots, _) = self.hist.as_chunks_mut::<3>();
                let mut bits = [[0u64; 4]; 1];
                let (rows, pairs) = (&self.work[start..end], &self.pairs[..]);
                fill_rows_pairs([&mut *slots], &mut bits, [column], rows, pairs);
                let sums = &mut self.left_sums;
                scan_filled_pairs::<B>(slots, bits[0], j, parent_cost, settings, sums, &mut best);
                continue;
            }
            if numeric && (3..=MOST_FIXED_CLASSES).contains(&width) && B::MISSING.index() < 256 {
                // Several classes (three to eight statistics a row) on a number predictor: a
                // fixed-width loop marking the bins it fills in a map, read back in order.
                let (rows, counts) = (&self.work[start..end], &self.counts[..]);
                let hist = &mut self.hist;
                let bits = match width {
                    3 => fill_rows_classes::<B, 4>(hist, column, rows, stats, counts),
                    4 => fill_rows_classes::<B, 5>(hist, column, rows, stats, counts),
                    5 => fill_rows_classes::<B, 6>(hist, column, rows, stats, counts),
                    6 => fill_rows_classes::<B, 7>(hist, column, rows, stats, counts),
                    7 => fill_rows_classes::<B, 8>(hist, column, rows, stats, counts),
                    _ => fill_rows_classes::<B, 9>(hist, column, rows, stats, counts),
                };
                let m = B::MISSING.index();
                if criterion == Criterion::Gini && !bounded && self.hist[m * stride + width] == 0.0
                {
                    // Gini without missing values: in flat loops.
                    let (hist, sums) = (&mut self.hist[..], &mut self.left_sums);
                    let at = (width, j, parent_cost);
                    scan_filled_classes_of(hist, bits, at, settings, sums, &mut best);
                    continue;
                }
                bins_in_order(bits, &mut self.order);
                let (hist, order, sums) = (&mut self.hist[..], &self.order[..], &mut self.sums);
                let at = (B::MISSING.index(), j, numeric, parent_cost);
                scan(
                    hist, order, at.0, sums, at.1, at.2, at.3, settings, &limits, &mut best,
                );
                clear_class_slots(hist, width, bits);
                continue;
            }
            fill_histogram(
                &mut self.hist,
                &mut self.touched,
                column,
                &self.work[start..end],
                (width == 2).then_some(&self.pairs[..]),
                (stats, &self.counts[..]),
                width,
            );
            self.order.clear();
            if numeric && self.touched.len() * 8 > bins {
                // Most bins in use: walking them in order is cheaper than sorting.
                let hist = &self.hist;
                self.order.extend(
                    (0..bins)
                        .filter(|&b| hist[b * stride + width] > 0.0)
                        .map(|b| B::from_bin(Some(b))),
                );
            } else if numeric && B::MISSING.index() < 256 {
                // Few bins in use: marked in a 256-bit map and read back in order, which
                // costs a few instructions a bin where sorting them cost a few dozen.
                let mut bits = [0u64; 4];
                for &b in &self.touched {
                    let i = b.index() & 255;
                    bits[i >> 6] |= 1 << (i & 63);
                }
                let m = B::MISSING.index() & 255;
                bits[m >> 6] &= !(1 << (m & 63));
                for (w, mut word) in bits.into_iter().enumerate() {
                    while word != 0 {
                        let b = w * 64 + word.trailing_zeros() as usize;
                        self.order.push(B::from_bin(Some(b)));
                        word &= word - 1;
                    }
                }
            } else {
                self.order
                    .extend(self.touched.iter().copied().filter(|&b| b != B::MISSING));
                if numeric {
                    self.order.sort_unstable();
                } else {
                    sort_levels(&self.hist, &mut self.order, width, criterion);
                }
            }
            scan(
                &self.hist,
                &self.order,
                B::MISSING.index(),
                &mut self.sums,
                j,
                numeric,
                parent_cost,
                settings,
                &limits,
                &mut best,
            );
            if width == 2 {
                // Three stores per bin, not a call to fill a slice of unknown length.
                for &b in &self.touched {
                    let at = b.index() * 3;
                    self.hist[at] = 0.0;
                    self.hist[at + 1] = 0.0;
                    self.hist[at + 2] = 0.0;
                }
            } else {
                for &b in &self.touched {
                    self.hist[b.index() * stride..(b.index() + 1) * stride]
                        .iter_mut()
                        .for_each(|h| *h = 0.0);
                }
            }
        }
        self.candidates = candidates;
        // Like CART as usually implemented, a split that gains nothing is still made when no
        // better one exists (so XOR-like patterns can be found a level down); `min_gain`
        // raises the bar.
        let keep = match best {
            Some(split) if split.gain >= settings.min_gain - 1e-12 * weight.max(1.0) => split,
            _ => {
                if let Some(h) = dense {
                    self.pool.push(h);
                }
                return None;
            }
        };
        Some(Candidate {
            id,
            start,
            end,
            depth,
            split: keep,
            bounds,
            counts: packed_sum,
            hist: dense,
        })
    }

    /// Dense histograms of every predictor over the rows `work[start..end]` (a buffer from
    /// the pool, laid out by `dense_offsets`). Each bin sums its rows in their order in
    /// `work`, whichever loop below fills it.
    fn dense_histograms(&mut self, start: usize, end: usize) -> Vec<f64> {
        let offsets = self.dense_offsets.as_ref().expect("dense mode");
        let len = offsets[offsets.len() - 1];
        let mut h = self.pool.pop().unwrap_or_default();
        h.clear();
        h.resize(len, 0.0);
        let (width, stats, rows) = (self.width, self.stats, &self.work[start..end]);
        let stride = width + 1;
        let n = self.binned.rows;
        if width == 2 {
            // The common case (two classes, numbers, gradients): four predictors filled per
            // pass over the node's rows and their statistics (their histograms together fit
            // in the first-level cache). The root of a tree on every row in order reads the
            // columns and statistics straight through.
            let pairs = &self.pairs[..];
            let all = rows.len() == n && rows.iter().enumerate().all(|(i, &r)| r as usize == i);
            let rows = (!all).then_some(rows);
            let mut columns = self.cells.chunks_exact(n.max(1));
            let mut hists = h.chunks_exact_mut(DENSE_SLOTS * 3).map(slots);
            let p = self.binned.columns.len();
            for _ in 0..p / 4 {
                let c = [(); 4].map(|_| columns.next().expect("a column per predictor"));
                let hs = [(); 4].map(|_| hists.next().expect("a histogram per predictor"));
                add_pairs(hs, c, rows, pairs);
            }
            for (c, hj) in columns.zip(hists).take(p % 4) {
                add_pairs([hj], [c], rows, pairs);
            }
            return h;
        }
        for j in 0..self.binned.columns.len() {
            let column = self.column(j);
            let hj = &mut h[offsets[j]..offsets[j + 1]];
            for &r in rows {
                let slot = column[r as usize].index();
                let s = &stats[r as usize * width..(r as usize + 1) * width];
                let c = self.counts[r as usize];
                let at = &mut hj[slot * stride..(slot + 1) * stride];
                for (a, v) in at.iter_mut().zip(s) {
                    *a += c * v;
                }
                at[width] += c;
            }
        }
        h
    }

    /// Makes candidate `c`'s split: writes the node's split fields and partitions its rows,
    /// left first, both sides keeping their order. Returns where the right rows start.
    fn apply(&mut self, c: &Candidate) -> usize {
        let split = &c.split;
        let column = self.column(split.feature);
        let goes_left = |b: B| -> bool {
            if b == B::MISSING {
                split.missing_left
            } else if split.numeric {
                b.index() <= split.threshold_bin
            } else {
                b.index() < 256 && split.categories.contains(b.index() as u8)
            }
        };
        let len = c.end - c.start;
        if self.scratch.len() < len {
            self.scratch.resize(len, 0);
        }
        let (work, scratch) = (&mut self.work[c.start..c.end], &mut self.scratch[..len]);
        let gaps = self.binned.columns[split.feature].missing > 0;
        let left = if B::MISSING.index() < 256 && split.numeric && !gaps {
            // Small cells on a number split of a column without missing values: one
            // comparison.
            let last = split.threshold_bin;
            partition(work, scratch, column, |b: B| b.index() <= last)
        } else if B::MISSING.index() < 256 && split.numeric {
            // Small cells on a number split: the missing bin (255) is above every threshold
            // bin, so one comparison and the missing side, without a branch.
            let (last, missing) = (split.threshold_bin, split.missing_left);
            partition(work, scratch, column, |b: B| {
                (b.index() <= last) | ((b == B::MISSING) & missing)
            })
        } else if B::MISSING.index() < 256 {
            // Small cells on a category split look their side up in a table of all 256 values.
            let mut table = [false; 256];
            for (v, t) in table.iter_mut().enumerate() {
                *t = goes_left(B::from_bin((v != B::MISSING.index()).then_some(v)));
            }
            partition(work, scratch, column, |b: B| table[b.index() & 255])
        } else {
            partition(work, scratch, column, goes_left)
        };
        work[left..].copy_from_slice(&scratch[..len - left]);
        let k = c.start + left;
        // Missing values the node's rows never had (here or anywhere in training) follow the
        // side with more rows, as scikit-learn's trees send them (from memory), rather than
        // always the right.
        let missing_seen = gaps
            && self.work[c.start..c.end]
                .iter()
                .any(|&r| column[r as usize] == B::MISSING);
        let missing_left = match missing_seen {
            true => split.missing_left,
            false => left > len - left,
        };
        let node = &mut self.tree.nodes[c.id];
        node.feature = split.feature as u32;
        node.numeric = split.numeric;
        node.missing_left = missing_left;
        node.gain = split.gain;
        node.categories = Node::boxed_bins(split.categories);
        if split.numeric {
            let BinRule::Numbers {
                thresholds,
                low,
                high,
            } = &self.binned.columns[split.feature].rule
            else {
                unreachable!("a number split is on a number column")
            };
            // The threshold on values, and the highest bin whose training values all lie at
            // or below it (bins the node's rows left empty count too), so training rows
            // outside the node (out-of-bag rows, walked by their bins) take the side their
            // values say. The threshold is midway between the node's two values around the
            // split, as sort-based CART places it; when that falls inside the range of a bin
            // the node's rows left empty (its smallest training value at or below, its
            // largest above), it moves to the nearer gap between that bin's values and its
            // neighbours', where no training value lies on the other side of it than its bin.
            // Bins hold values in order, and empty ones hold (∞, −∞).
            let (threshold, last) = match split.next_bin {
                Some(r) => {
                    let (tb, next) = (split.threshold_bin, r);
                    let highest_left = |t: f64| {
                        // Every bin below `t`'s own (by the thresholds, which put it from `tb`
                        // to `next`) lies below `t`; from there, bins while their values do
                        // (`t`'s own, empty ones after it).
                        let own = tb + thresholds[tb..next].partition_point(|&x| x < t);
                        let mut last = own.saturating_sub(1).clamp(tb, next - 1);
                        while last + 1 < next && high[last + 1] <= t {
                            last += 1;
                        }
                        last
                    };
                    let t = midway(high[tb], low[next]);
                    let last = highest_left(t);
                    let m = last + 1;
                    if m < next && low[m] <= t {
                        // The largest value below bin `m`, the smallest above it.
                        let below = (tb..m).rev().map(|k| high[k]).find(|h| h.is_finite());
                        let above = (m + 1..=next).map(|k| low[k]).find(|l| l.is_finite());
                        let (below, above) =
                            (below.unwrap_or(high[tb]), above.unwrap_or(low[next]));
                        let (down, up) = (midway(below, low[m]), midway(high[m], above));
                        let t = if t - down <= up - t { down } else { up };
                        (t, highest_left(t))
                    } else {
                        (t, last)
                    }
                }
                // No present value on the right (only missing values go there): every
                // number goes left.
                None => (
                    f64::INFINITY,
                    high.len().saturating_sub(1).max(split.threshold_bin),
                ),
            };
            node.threshold = threshold;
            node.threshold_bin = last as u16;
        }
        k
    }
}

/// Whether the values a node's rows would give alone (the mean of a number outcome, a
/// gradient step) differ: the node is pure when they do not, as when the largest is not
/// above the smallest (NaN values left out, as `f64::min` and `f64::max` leave them; 0 and
/// −0 alike). Once two differ, nothing later can make them equal, so a caller stops asking.
#[derive(Default)]
struct Uniform {
    first: Option<f64>,
    mixed: bool,
}

impl Uniform {
    #[inline(always)]
    fn see(&mut self, value: Option<f64>) {
        match (value, self.first) {
            (Some(v), _) if v.is_nan() => {}
            (Some(v), None) => self.first = Some(v),
            (Some(v), Some(f)) => self.mixed |= v != f,
            (None, _) => {}
        }
    }
}

/// A threshold between two values `a < b` taken as numbers: their midpoint, or `a` where the
/// midpoint rounds to `b` or overflows, so `a` goes left and `b` right.
fn midway(a: f64, b: f64) -> f64 {
    let t = a / 2.0 + b / 2.0;
    if t == b || t.is_infinite() {
        a
    } else {
        t
    }
}

/// The rows to grow on, and every row's statistics with a row count, `[s0, s1, rows]`, by
/// row (zero for rows not drawn). A row drawn several times (a bootstrap) is kept once with
/// its statistics times the number of draws, as scikit-learn's forests weight a bootstrap
/// (from memory), and the kept rows are in row order, so every node reads the columns in
/// order. Rows without repeats keep their order. (With whole-number statistics, class
/// weights of 1 say, every sum is exact either way, so the trees are those grown on the
/// repeats; with fractions, sums may round differently.)
fn collapse_repeats(rows: &[u32], stats: &[f64], n: usize) -> (Vec<u32>, Vec<[f64; 3]>) {
    let (kept, draws) = count_draws(rows, n);
    // Multiplied whatever the count, without a branch on it (random in a bootstrap): a
    // count of 1 leaves every number as it is, and rows not drawn are never read.
    let pairs = draws
        .iter()
        .zip(stats.chunks_exact(2))
        .map(|(&c, s)| {
            let c = f64::from(c);
            [c * s[0], c * s[1], c]
        })
        .collect();
    (kept, pairs)
}

/// The rows to grow on, each once, and every row's number of draws by row (0: not drawn):
/// [`collapse_repeats`]' rule for any number of statistics, whose nodes multiply a row's
/// statistics by its draws as they sum them (a draw of 1 leaves them exact).
fn collapse_counts(rows: &[u32], n: usize) -> (Vec<u32>, Vec<f64>) {
    let (kept, draws) = count_draws(rows, n);
    (kept, draws.into_iter().map(f64::from).collect())
}

/// The rows of `rows` (with repeats) each once in row order, and every row's number of
/// draws by row, of `n`. Rows given without repeats keep their order.
fn count_draws(rows: &[u32], n: usize) -> (Vec<u32>, Vec<u32>) {
    let mut draws = vec![0u32; n];
    let mut repeats = false;
    for &r in rows {
        let c = &mut draws[r as usize];
        repeats |= *c > 0;
        *c += 1;
    }
    let kept = match repeats {
        false => rows.to_vec(),
        true => super::rows_where(n, |r| draws[r] > 0),
    };
    (kept, draws)
}

/// Each row's class-1 count and row count packed as `(s1 << 32) | rows`, by row, when the
/// criterion is a class one and every row of `pairs` (`[s0, s1, rows]`, see
/// [`collapse_repeats`]) counts whole: `s0` and `s1` whole numbers with `s0 + s1 = rows`
/// (class weights of 1), and all rows together fewer than 2³¹ (so no count spills into
/// the other). Empty otherwise. Sums of whole numbers are exact in either form, so a scan
/// of packed counts sees the very numbers a scan of `pairs` sees.
fn pack_counts(pairs: &[[f64; 3]], criterion: Criterion) -> Vec<u64> {
    if !matches!(criterion, Criterion::Gini | Criterion::Entropy) {
        return Vec::new();
    }
    // One pass, no early exit (most rows are whole), checked at the end. Casts saturate, so
    // a count that does not fit in 32 bits fails the round trip.
    let (mut whole, mut total) = (true, 0u64);
    let packed = pairs
        .iter()
        .map(|&[s0, s1, c]| {
            let (k1, k) = (s1 as u32, c as u32);
            whole &= (f64::from(k1) == s1) & (f64::from(k) == c) & (s0 + s1 == c) & (s0 >= 0.0);
            total += u64::from(k);
            (u64::from(k1) << 32) | u64::from(k)
        })
        .collect();
    match whole && total <= i32::MAX as u64 {
        true => packed,
        false => Vec::new(),
    }
}

/// Whether `best` already gains all of a node's cost `parent_cost` under Gini (it leaves two
/// pure children, whose costs are exactly 0), so that no later predictor can beat it: a split
/// is kept only when its gain is strictly larger, and with whole counts below 2²⁶ (`rows`,
/// the node's) no Gini gain exceeds the node's cost. Each side's cost `w − (a² + b²)/w`
/// rounds to 0 or more: the sum of squares is then exact and at most `w²`, and a rounded
/// quotient never passes a representable bound. (Above 2²⁶ a square may round up; such a
/// node is scanned in full.)
fn unbeatable(best: &Option<Split>, parent_cost: f64, criterion: Criterion, rows: usize) -> bool {
    matches!(criterion, Criterion::Gini)
        && rows < 1 << 26
        && best.as_ref().is_some_and(|b| b.gain == parent_cost)
}

/// Puts the rows of `work` whose cell goes left first and the others after, both in their
/// order, and returns how many go left. Every row is written to both `work` and `scratch`
/// and only one cursor advances, so the loop has no branch on the side (rows go either way at
/// random). The right rows are left at the start of `scratch`.
fn partition<B: Bin>(
    work: &mut [u32],
    scratch: &mut [u32],
    column: &[B],
    goes_left: impl Fn(B) -> bool,
) -> usize {
    let (mut k, mut j) = (0, 0);
    for i in 0..work.len() {
        let r = work[i];
        let left = goes_left(column[r as usize]);
        // `k <= i`: the row read is never one already written.
        work[k] = r;
        scratch[j] = r;
        k += left as usize;
        j += !left as usize;
    }
    k
}

/// One predictor's dense histogram as its 256 slots of `(s0, s1, rows)`.
fn slots(h: &mut [f64]) -> &mut [[f64; 3]; DENSE_SLOTS] {
    let (slots, _) = h.as_chunks_mut::<3>();
    slots.try_into().expect("256 slots of three")
}

/// Adds the pairs and row counts `pairs[r]` of rows `r` in `rows` (`None`: every row) to the
/// slots of `K` predictors' cells of the row, in row order.
fn add_pairs<B: Bin, const K: usize>(
    mut hists: [&mut [[f64; 3]; DENSE_SLOTS]; K],
    columns: [&[B]; K],
    rows: Option<&[u32]>,
    pairs: &[[f64; 3]],
) {
    let mut add = |cells: [B; K], [g, h, c]: [f64; 3]| {
        for (hist, b) in hists.iter_mut().zip(cells) {
            let at = &mut hist[b.index() & (DENSE_SLOTS - 1)];
            at[0] += g;
            at[1] += h;
            at[2] += c;
        }
    };
    match rows {
        Some(rows) => {
            for &r in rows {
                add(columns.map(|c| c[r as usize]), pairs[r as usize]);
            }
        }
        None => {
            for (i, &pair) in pairs.iter().enumerate() {
                add(columns.map(|c| c[i]), pair);
            }
        }
    }
}

/// Sums statistics (and a row count) per bin of one predictor over the node's rows.
/// `hist` must be all zero on entry; `touched` receives the bins filled. With two
/// statistics per row, `pairs` holds row `r`'s with its row count at `pairs[r]`.
fn fill_histogram<B: Bin>(
    hist: &mut [f64],
    touched: &mut Vec<B>,
    column: &[B],
    rows: &[u32],
    pairs: Option<&[[f64; 3]]>,
    (stats, counts): (&[f64], &[f64]),
    width: usize,
) {
    touched.clear();
    let stride = width + 1;
    if let Some(pairs) = pairs.filter(|_| width == 2) {
        if rows.len() >= 1024 && B::MISSING.index() < 256 {
            // A large node: a fixed-width loop without the per-row first-touch test, the
            // bins touched found afterwards in bin order. (Profiled: this loop is most of
            // the time of boosting; common practice, no source.)
            for &r in rows {
                let [g, h, c] = pairs[r as usize];
                let b = column[r as usize].index();
                let at = &mut hist[b * 3..b * 3 + 3];
                at[0] += g;
                at[1] += h;
                at[2] += c;
            }
            touched.extend(
                (0..=B::MISSING.index())
                    .filter(|&b| hist[b * 3 + 2] > 0.0)
                    .map(|b| B::from_bin(Some(b))),
            );
            return;
        }
        for &r in rows {
            let [g, h, c] = pairs[r as usize];
            let b = column[r as usize];
            let at = &mut hist[b.index() * 3..b.index() * 3 + 3];
            if at[2] == 0.0 {
                touched.push(b);
            }
            at[0] += g;
            at[1] += h;
            at[2] += c;
        }
        return;
    }
    if width == 2 && rows.len() >= 1024 && B::MISSING.index() < 256 {
        // As above, statistics read by row.
        for &r in rows {
            let r = r as usize;
            let b = column[r].index();
            let h = &mut hist[b * 3..b * 3 + 3];
            h[0] += stats[2 * r];
            h[1] += stats[2 * r + 1];
            h[2] += 1.0;
        }
        touched.extend(
            (0..=B::MISSING.index())
                .filter(|&b| hist[b * 3 + 2] > 0.0)
                .map(|b| B::from_bin(Some(b))),
        );
        return;
    }
    // Each row's statistics times its draws ([`collapse_counts`]).
    for &r in rows {
        let b = column[r as usize];
        let h = &mut hist[b.index() * stride..(b.index() + 1) * stride];
        if h[width] == 0.0 {
            touched.push(b);
        }
        let s = &stats[r as usize * width..(r as usize + 1) * width];
        let c = counts[r as usize];
        for (a, v) in h.iter_mut().zip(s) {
            *a += c * v;
        }
        h[width] += c;
    }
}

/// [`fill_histogram`]'s loop for several classes, `S − 1` statistics a row and `S` numbers a
/// bin (small cells only): the same products and sums in the same order, each bin's in a
/// fixed-width slot, and the bins filled marked in a 256-bit map (returned) instead of listed
/// on first touch, a test a row whose outcome the branch predictor cannot know.
fn fill_rows_classes<B: Bin, const S: usize>(
    hist: &mut [f64],
    column: &[B],
    rows: &[u32],
    stats: &[f64],
    counts: &[f64],
) -> [u64; 4] {
    let width = S - 1;
    let (slots, _) = hist.as_chunks_mut::<S>();
    let mut bits = [0u64; 4];
    for &r in rows {
        let r = r as usize;
        let b = column[r].index() & 255;
        bits[b >> 6] |= 1 << (b & 63);
        let s = &stats[r * width..r * width + width];
        let c = counts[r];
        let h = &mut slots[b];
        for (a, v) in h.iter_mut().zip(s) {
            *a += c * v;
        }
        h[width] += c;
    }
    bits
}

/// The bins set in `bits` but the missing one, in order, into `order` (small cells).
fn bins_in_order<B: Bin>(mut bits: [u64; 4], order: &mut Vec<B>) {
    order.clear();
    let m = B::MISSING.index() & 255;
    bits[m >> 6] &= !(1 << (m & 63));
    for (w, mut word) in bits.into_iter().enumerate() {
        while word != 0 {
            order.push(B::from_bin(Some(w * 64 + word.trailing_zeros() as usize)));
            word &= word - 1;
        }
    }
}

/// A histogram slot that a forest node fills for several predictors in one pass over its
/// rows: packed counts ([`fill_rows_packed`]) or `(s0, s1, rows)` ([`fill_rows_pairs`]).
trait Slot: Sized {
    fn fill<B: Bin, const K: usize>(
        slots: [&mut [Self]; K],
        bits: &mut [[u64; 4]; K],
        columns: [&[B]; K],
        rows: &[u32],
        by_row: &[Self],
    );
}

impl Slot for u64 {
    fn fill<B: Bin, const K: usize>(
        slots: [&mut [u64]; K],
        bits: &mut [[u64; 4]; K],
        columns: [&[B]; K],
        rows: &[u32],
        by_row: &[u64],
    ) {
        fill_rows_packed(slots, bits, columns, rows, by_row);
    }
}

impl<const N: usize> Slot for [f64; N] {
    fn fill<B: Bin, const K: usize>(
        slots: [&mut [[f64; N]]; K],
        bits: &mut [[u64; 4]; K],
        columns: [&[B]; K],
        rows: &[u32],
        by_row: &[[f64; N]],
    ) {
        fill_rows_pairs(slots, bits, columns, rows, by_row);
    }
}

/// The histograms (256 slots each, in `hist`) of `group`'s predictors (up to [`BATCH`]) over
/// `rows`, filled in one pass from each row's slot value `by_row` (one a row of `cells`'
/// columns, so one bound check a row covers both); returns their bin maps.
fn fill_group<B: Bin, S: Slot>(
    hist: &mut [S],
    group: &[usize],
    cells: &[B],
    rows: &[u32],
    by_row: &[S],
) -> [[u64; 4]; BATCH] {
    let n = by_row.len();
    let column = |j: usize| &cells[j * n..(j + 1) * n];
    let mut parts = hist.chunks_exact_mut(256);
    let mut bits = [[0u64; 4]; BATCH];
    macro_rules! fill {
        ($k:literal) => {{
            let slots = [(); $k].map(|_| parts.next().expect("a histogram each"));
            let columns: [&[B]; $k] = std::array::from_fn(|i| column(group[i]));
            let mut some = [[0u64; 4]; $k];
            S::fill(slots, &mut some, columns, rows, by_row);
            bits[..$k].copy_from_slice(&some);
        }};
    }
    match group.len() {
        1 => fill!(1),
        2 => fill!(2),
        3 => fill!(3),
        4 => fill!(4),
        _ => fill!(5),
    }
    bits
}

/// Three classes' whole counts by row, packed as `(s2 << 42) | (s1 << 21) | rows` (21 bits
/// each), when the criterion is a class one, every kept row's statistics times its draws
/// (`counts`, see [`collapse_counts`]) are whole numbers adding up to its draws (class
/// weights of 1), and all rows together fewer than 2²¹ (so no count spills into the next).
/// Empty otherwise. Sums of whole numbers are exact in either form, so a scan of the
/// unpacked sums sees the very numbers [`fill_rows_classes`] sums.
fn pack_classes3(kept: &[u32], stats: &[f64], counts: &[f64], criterion: Criterion) -> Vec<u64> {
    if !matches!(criterion, Criterion::Gini | Criterion::Entropy) || stats.len() != 3 * counts.len()
    {
        return Vec::new();
    }
    // One pass, no early exit (most rows are whole), checked at the end. Casts saturate, so
    // a count that does not fit fails the round trip.
    let (mut whole, mut total) = (true, 0u64);
    let mut packed = vec![0u64; counts.len()];
    for &r in kept {
        let (r, c) = (r as usize, counts[r as usize]);
        let s = &stats[3 * r..3 * r + 3];
        let (s0, s1, s2) = (c * s[0], c * s[1], c * s[2]);
        let (k0, k1, k2, k) = (s0 as u32, s1 as u32, s2 as u32, c as u32);
        whole &= (f64::from(k0) == s0)
            & (f64::from(k1) == s1)
            & (f64::from(k2) == s2)
            & (f64::from(k) == c)
            & (s0 + s1 + s2 == c);
        total += u64::from(k);
        packed[r] = (u64::from(k2) << 42) | (u64::from(k1) << 21) | u64::from(k);
    }
    match whole && total < 1 << 21 {
        true => packed,
        false => Vec::new(),
    }
}

/// Packed counts of three classes ([`pack_classes3`]) as the slot they count,
/// `[s0, s1, s2, rows]`.
fn unpack_classes3(p: u64) -> [f64; 4] {
    const FIELD: u64 = (1 << 21) - 1;
    let (k2, k1, k) = (p >> 42, (p >> 21) & FIELD, p & FIELD);
    [(k - k1 - k2) as f64, k1 as f64, k2 as f64, k as f64]
}

twice_for_avx2! {
    /// [`scan_classes`] for three classes counted whole ([`pack_classes3`]) under Gini, for
    /// the predictors gathered in `points` ([`GroupPoints::gather`]: the node's rows have no
    /// missing value in them, and each predictor's running sums were added packed as its bins
    /// were read in order), then emptied: unpacked in a loop apart, every split point's gain
    /// on its own, then the first of the largest, as [`scan_group`] does for two classes.
    /// Every count is a whole number below 2²¹, so every sum, square and sum of squares is
    /// exact in any order, every predictor's totals are the node's, and each gain is
    /// [`scan_classes`]' to the bit: the same division and subtractions of the same numbers.
    /// The right side shrinks to too few rows only once, so the points [`scan_classes`]
    /// stops before fail the same test here. Compiled for AVX2 too.
    fn scan_group3(
        points: &mut GroupPoints,
        parent_cost: f64,
        settings: &GrowSettings,
        best: &mut Option<Split>,
    ) = scan_group3_plain
}

/// [`scan_group3`]'s body, inlined into each of its builds.
#[allow(clippy::neg_cmp_op_on_partial_ord)]
#[inline(always)]
fn scan_group3_plain(
    points: &mut GroupPoints,
    parent_cost: f64,
    settings: &GrowSettings,
    best: &mut Option<Split>,
) {
    let Some((used, gathered)) = points.take() else {
        return;
    };
    let GroupPoints {
        s0,
        s1,
        s2,
        rows,
        packed,
        gain,
        parts,
        ..
    } = points;
    // Each field is below 2²¹: converted as i32, which vectorises.
    const FIELD: u64 = (1 << 21) - 1;
    let lanes = packed[..used]
        .iter()
        .zip(&mut s0[..used])
        .zip(&mut s1[..used])
        .zip(&mut s2[..used])
        .zip(&mut rows[..used]);
    for ((((&p, l0), l1), l2), lc) in lanes {
        let (k2, k1, k) = (
            (p >> 42) as i32,
            ((p >> 21) & FIELD) as i32,
            (p & FIELD) as i32,
        );
        (*l0, *l1, *l2, *lc) = (
            f64::from(k - k1 - k2),
            f64::from(k1),
            f64::from(k2),
            f64::from(k),
        );
    }
    let last = parts[0].1 - 1;
    let t = [s0[last], s1[last], s2[last], rows[last]];
    let min_leaf = settings.min_rows_leaf.max(1) as f64;
    let min_weight = settings.min_weight_leaf;
    // `Criterion::cost` of Gini for three classes, computed whatever `w` is and then chosen.
    let gini = |a: f64, b: f64, c: f64| {
        let w = a + b + c;
        let v = w - (a * a + b * b + c * c) / w;
        if w <= 0.0 {
            0.0
        } else {
            v
        }
    };
    let lanes = gain[..used]
        .iter_mut()
        .zip(&s0[..used])
        .zip(&s1[..used])
        .zip(&s2[..used])
        .zip(&rows[..used]);
    for ((((out, &l0), &l1), &l2), &lc) in lanes {
        let (r0, r1, r2) = (t[0] - l0, t[1] - l1, t[2] - l2);
        let ok = !(lc < min_leaf)
            & !(t[3] - lc < min_leaf)
            & !(l0 + l1 + l2 < min_weight)
            & !(r0 + r1 + r2 < min_weight);
        let v = parent_cost - gini(l0, l1, l2) - gini(r0, r1, r2);
        *out = if ok { v } else { f64::NEG_INFINITY };
    }
    pick_group_best(points, used, gathered, true, best);
}

twice_for_avx2! {
    /// [`scan_filled_classes`] for `width` classes (three to [`MOST_FIXED_CLASSES`]; at:
    /// `(width, feature, parent_cost)`), compiled for AVX2 too.
    fn scan_filled_classes_of(
        hist: &mut [f64],
        bits: [u64; 4],
        at: (usize, usize, f64),
        settings: &GrowSettings,
        sums: &mut LeftSums,
        best: &mut Option<Split>,
    ) = scan_filled_classes_of_plain
}

/// [`scan_filled_classes_of`]'s body, inlined into each of its builds.
#[inline(always)]
fn scan_filled_classes_of_plain(
    hist: &mut [f64],
    bits: [u64; 4],
    (width, feature, parent_cost): (usize, usize, f64),
    settings: &GrowSettings,
    sums: &mut LeftSums,
    best: &mut Option<Split>,
) {
    let at = (feature, parent_cost);
    match width {
        3 => scan_filled_classes::<4>(hist, bits, at, settings, sums, best),
        4 => scan_filled_classes::<5>(hist, bits, at, settings, sums, best),
        5 => scan_filled_classes::<6>(hist, bits, at, settings, sums, best),
        6 => scan_filled_classes::<7>(hist, bits, at, settings, sums, best),
        7 => scan_filled_classes::<8>(hist, bits, at, settings, sums, best),
        _ => scan_filled_classes::<9>(hist, bits, at, settings, sums, best),
    }
}

/// [`scan_classes`] under Gini for `S − 1` classes (three to eight) from the slots
/// [`fill_rows_classes`] filled (`bits`: the bins used), when the node's rows have no missing
/// value in the predictor and its value is unbounded: the running sums after each bin in
/// order (each slot emptied as it is read), every split point's gain on its own, then the
/// first of the largest, as [`scan_filled_sums`] does for two statistics. Any weights:
/// the left sums are [`scan_classes`]' additions in its order, the total is the last of them
/// (its total adds the same bins in the same order to the empty missing slot), and each cost
/// is [`Criterion::cost`]'s sum, sum of squares and division in its order, so the same split
/// to the bit.
#[allow(clippy::neg_cmp_op_on_partial_ord)]
#[inline(always)]
fn scan_filled_classes<const S: usize>(
    hist: &mut [f64],
    mut bits: [u64; 4],
    (feature, parent_cost): (usize, f64),
    settings: &GrowSettings,
    sums: &mut LeftSums,
    best: &mut Option<Split>,
) {
    let width = S - 1;
    let m = u8::MISSING.index();
    bits[m >> 6] &= !(1 << (m & 63));
    let (slots, _) = hist.as_chunks_mut::<S>();
    let LeftSums {
        bins,
        s0,
        s1,
        s2,
        s3,
        more,
        rows,
        gain,
        ..
    } = sums;
    // Class k's running sums in `classes[k]`, the rows' in `rows`.
    let [m0, m1, m2, m3] = &mut **more;
    let classes: [&mut [f64; 256]; MOST_FIXED_CLASSES] =
        [&mut **s0, &mut **s1, &mut **s2, &mut **s3, m0, m1, m2, m3];
    let mut acc = [0.0; S];
    let mut used = 0;
    for (w, mut word) in bits.into_iter().enumerate() {
        while word != 0 {
            let b = w * 64 + word.trailing_zeros() as usize;
            let slot = std::mem::replace(&mut slots[b], [0.0; S]);
            for k in 0..width {
                acc[k] += slot[k];
                classes[k][used] = acc[k];
            }
            acc[width] += slot[width];
            rows[used] = acc[width];
            bins[used] = b as u8;
            used += 1;
            word &= word - 1;
        }
    }
    if used == 0 {
        return;
    }
    let t = acc;
    let min_leaf = settings.min_rows_leaf.max(1) as f64;
    let min_weight = settings.min_weight_leaf;
    // `Criterion::cost` of Gini and `Criterion::weight`: sums from the first class on.
    let weigh = |c: &[f64; S]| {
        let (mut w, mut q) = (c[0], c[0] * c[0]);
        for &v in &c[1..width] {
            w += v;
            q += v * v;
        }
        let cost = w - q / w;
        (w, if w <= 0.0 { 0.0 } else { cost })
    };
    for (i, out) in gain[..used].iter_mut().enumerate() {
        let left: [f64; S] = std::array::from_fn(|k| match k == width {
            true => rows[i],
            false => classes[k][i],
        });
        let right: [f64; S] = std::array::from_fn(|k| t[k] - left[k]);
        let ((wl, cl), (wr, cr)) = (weigh(&left), weigh(&right));
        let ok = !(left[width] < min_leaf)
            & !(t[width] - left[width] < min_leaf)
            & !(wl < min_weight)
            & !(wr < min_weight);
        let v = parent_cost - cl - cr;
        *out = if ok { v } else { f64::NEG_INFINITY };
    }
    let (at, g) = first_best_plain(&gain[..used]);
    if g == f64::NEG_INFINITY || best.as_ref().is_some_and(|b| !(g > b.gain)) {
        return;
    }
    *best = Some(Split {
        gain: g,
        feature,
        numeric: true,
        threshold_bin: usize::from(bins[at]),
        next_bin: (at + 1 < used).then(|| usize::from(bins[at + 1])),
        categories: BinSet::default(),
        missing_left: false,
        values: (0.0, 0.0),
        left_counts: None,
    });
}

/// Empties the slots of `S` numbers of the bins set in `bits` (fixed-width stores, not a
/// call to fill a slice of unknown length).
fn clear_slots<const S: usize>(hist: &mut [f64], bits: [u64; 4]) {
    let (slots, _) = hist.as_chunks_mut::<S>();
    for (w, mut word) in bits.into_iter().enumerate() {
        while word != 0 {
            slots[w * 64 + word.trailing_zeros() as usize] = [0.0; S];
            word &= word - 1;
        }
    }
}

/// [`clear_slots`] for `width` classes' slots (`width + 1` numbers each; three to
/// [`MOST_FIXED_CLASSES`] classes).
fn clear_class_slots(hist: &mut [f64], width: usize, bits: [u64; 4]) {
    match width {
        3 => clear_slots::<4>(hist, bits),
        4 => clear_slots::<5>(hist, bits),
        5 => clear_slots::<6>(hist, bits),
        6 => clear_slots::<7>(hist, bits),
        7 => clear_slots::<8>(hist, bits),
        _ => clear_slots::<9>(hist, bits),
    }
}

/// [`scan_general`] for several classes (`S − 1` statistics a bin and its rows) without
/// bounds or a monotone constraint (`at`: the missing values' slot, the predictor, whether
/// it is a number, the node's cost). The same additions, tests and costs in the same order,
/// on fixed-width sums the compiler keeps in registers, and the split written once at the
/// end rather than at every better point, so the same split.
fn scan_classes<B: Bin, const S: usize>(
    hist: &[f64],
    order: &[B],
    (missing_slot, feature, numeric, parent_cost): (usize, usize, bool, f64),
    settings: &GrowSettings,
    best: &mut Option<Split>,
) {
    let width = S - 1;
    let criterion = settings.criterion;
    let (slots, _) = hist.as_chunks::<S>();
    let missing = slots[missing_slot];
    let mut total = missing;
    for &b in order {
        for (t, v) in total.iter_mut().zip(&slots[b.index()]) {
            *t += v;
        }
    }
    let min_leaf = settings.min_rows_leaf.max(1) as f64;
    let sides: &[bool] = if missing[width] > 0.0 {
        &[true, false]
    } else {
        &[false]
    };
    // The best so far: its gain (to beat strictly), place and side.
    let mut bar = best.as_ref().map(|b| b.gain);
    let mut found = None;
    for &missing_left in sides {
        let mut left = if missing_left { missing } else { [0.0; S] };
        let mut right = [0.0; S];
        for (i, &b) in order.iter().enumerate() {
            for (l, v) in left.iter_mut().zip(&slots[b.index()]) {
                *l += v;
            }
            if left[width] < min_leaf {
                continue;
            }
            // The right side only shrinks from here on.
            if total[width] - left[width] < min_leaf {
                break;
            }
            for k in 0..width {
                right[k] = total[k] - left[k];
            }
            let (l, r) = (&left[..width], &right[..width]);
            if criterion.weight(l) < settings.min_weight_leaf
                || criterion.weight(r) < settings.min_weight_leaf
            {
                continue;
            }
            let gain = parent_cost - criterion.cost(l) - criterion.cost(r);
            if bar.is_none_or(|g| gain > g) {
                bar = Some(gain);
                found = Some((gain, i, missing_left));
            }
        }
    }
    if let Some((gain, i, missing_left)) = found {
        *best = Some(split_at(
            gain,
            feature,
            numeric,
            order,
            i,
            missing_left,
            (0.0, 0.0),
        ));
    }
}

/// Sorts category bins into the order their splits are scanned: by mean response where it
/// is defined (two classes, regression), otherwise by bin.
fn sort_levels<B: Bin>(hist: &[f64], bins: &mut [B], width: usize, criterion: Criterion) {
    let stride = width + 1;
    let key = |b: B| criterion.order_key(&hist[b.index() * stride..b.index() * stride + width]);
    bins.sort_by(|&a, &b| match (key(a), key(b)) {
        (Some(x), Some(y)) => x.total_cmp(&y).then(a.cmp(&b)),
        _ => a.cmp(&b),
    });
}

/// Running sums of one scan (statistics and a row count each), allocated once per tree.
struct ScanSums {
    total: Vec<f64>,
    left: Vec<f64>,
    right: Vec<f64>,
}

impl ScanSums {
    fn new(width: usize) -> Self {
        let z = vec![0.0; width + 1];
        ScanSums {
            total: z.clone(),
            left: z.clone(),
            right: z,
        }
    }
}

/// The monotone constraint of the predictor being scanned and the node's value bounds.
struct Limits {
    monotone: i8,
    low: f64,
    high: f64,
    /// Whether `low` or `high` is finite.
    bounded: bool,
}

/// Scans the split points of one predictor, bins in `order`, updating `best`. With missing
/// values, one pass sends them left and a second sends them right; without, one pass.
/// Several classes (three to eight) without bounds take [`scan_classes`], the same
/// loop at a width fixed when compiled.
#[allow(clippy::too_many_arguments)]
fn scan<B: Bin>(
    hist: &[f64],
    order: &[B],
    missing_slot: usize,
    sums: &mut ScanSums,
    feature: usize,
    numeric: bool,
    parent_cost: f64,
    settings: &GrowSettings,
    limits: &Limits,
    best: &mut Option<Split>,
) {
    if !limits.bounded && limits.monotone == 0 {
        let at = (missing_slot, feature, numeric, parent_cost);
        match sums.total.len() {
            4 => return scan_classes::<B, 4>(hist, order, at, settings, best),
            5 => return scan_classes::<B, 5>(hist, order, at, settings, best),
            6 => return scan_classes::<B, 6>(hist, order, at, settings, best),
            7 => return scan_classes::<B, 7>(hist, order, at, settings, best),
            8 => return scan_classes::<B, 8>(hist, order, at, settings, best),
            9 => return scan_classes::<B, 9>(hist, order, at, settings, best),
            _ => {}
        }
    }
    scan_general(
        hist,
        order,
        missing_slot,
        sums,
        feature,
        numeric,
        parent_cost,
        settings,
        limits,
        best,
    );
}

/// [`scan`]'s loop for any width and bounds.
#[allow(clippy::too_many_arguments)]
fn scan_general<B: Bin>(
    hist: &[f64],
    order: &[B],
    missing_slot: usize,
    sums: &mut ScanSums,
    feature: usize,
    numeric: bool,
    parent_cost: f64,
    settings: &GrowSettings,
    limits: &Limits,
    best: &mut Option<Split>,
) {
    let stride = sums.total.len();
    let width = stride - 1;
    let criterion = settings.criterion;
    let m = missing_slot;
    let missing = &hist[m * stride..(m + 1) * stride];
    let ScanSums { total, left, right } = sums;
    total.copy_from_slice(missing);
    for &b in order {
        let h = &hist[b.index() * stride..(b.index() + 1) * stride];
        for (t, v) in total.iter_mut().zip(h) {
            *t += v;
        }
    }
    let min_leaf = settings.min_rows_leaf.max(1) as f64;
    let sides: &[bool] = if missing[width] > 0.0 {
        &[true, false]
    } else {
        &[false]
    };
    if width == 2 && !limits.bounded && limits.monotone == 0 {
        // The common case (two classes, numbers, gradients; no bounds): the running sums in
        // registers, and the criterion chosen once here rather than at every split point.
        let (slots, _) = hist.as_chunks::<3>();
        let found = PairScan {
            slots,
            order,
            missing: [missing[0], missing[1], missing[2]],
            total: [total[0], total[1], total[2]],
            sides,
            parent_cost,
            min_leaf,
            min_weight: (settings.min_weight_leaf > 0.0).then_some(settings.min_weight_leaf),
        }
        .best(criterion, best.as_ref().map(|b| b.gain));
        if let Some((gain, i, missing_left)) = found {
            *best = Some(split_at(
                gain,
                feature,
                numeric,
                order,
                i,
                missing_left,
                (0.0, 0.0),
            ));
        }
        return;
    }
    for &missing_left in sides {
        if missing_left {
            left.copy_from_slice(missing);
        } else {
            left.iter_mut().for_each(|l| *l = 0.0);
        }
        for (i, &b) in order.iter().enumerate() {
            let h = &hist[b.index() * stride..(b.index() + 1) * stride];
            for (l, v) in left.iter_mut().zip(h) {
                *l += v;
            }
            if left[width] < min_leaf {
                continue;
            }
            // The right side only shrinks from here on.
            if total[width] - left[width] < min_leaf {
                break;
            }
            for k in 0..width {
                right[k] = total[k] - left[k];
            }
            let (l, r) = (&left[..width], &right[..width]);
            if criterion.weight(l) < settings.min_weight_leaf
                || criterion.weight(r) < settings.min_weight_leaf
            {
                continue;
            }
            let mut values = (0.0, 0.0);
            let gain = if limits.bounded || limits.monotone != 0 {
                values = (
                    criterion.leaf_value(l).clamp(limits.low, limits.high),
                    criterion.leaf_value(r).clamp(limits.low, limits.high),
                );
                if (limits.monotone > 0 && values.0 > values.1)
                    || (limits.monotone < 0 && values.0 < values.1)
                {
                    continue;
                }
                parent_cost - criterion.cost_at(l, values.0) - criterion.cost_at(r, values.1)
            } else {
                parent_cost - criterion.cost(l) - criterion.cost(r)
            };
            if best.as_ref().is_none_or(|b| gain > b.gain) {
                *best = Some(split_at(
                    gain,
                    feature,
                    numeric,
                    order,
                    i,
                    missing_left,
                    values,
                ));
            }
        }
    }
}

/// [`scan`]'s two-statistic loop without bounds, for one criterion's `cost` and `weight`
/// (each a constant variant, so the compiler drops the match on the criterion). The same
/// additions in the same order as the general loop, so the same splits. `slots` holds each
/// bin's `(s0, s1, rows)`.
struct PairScan<'h, B: Bin> {
    slots: &'h [[f64; 3]],
    order: &'h [B],
    missing: [f64; 3],
    total: [f64; 3],
    sides: &'h [bool],
    parent_cost: f64,
    min_leaf: f64,
    /// The least weight of a side, `None` when it is not above zero (weights are never
    /// negative, so no side is too light).
    min_weight: Option<f64>,
}

impl<B: Bin> PairScan<'_, B> {
    /// The split point that gains most, the first on ties, if it gains more than `bar`
    /// (`None`: any point will do): its gain, its place in `order` and the side of missing
    /// values.
    #[inline(always)]
    fn run(
        &self,
        cost: impl Fn(f64, f64) -> f64,
        weight: impl Fn(f64, f64) -> f64,
        bar: Option<f64>,
    ) -> Option<(f64, usize, bool)> {
        let [t0, t1, tc] = self.total;
        let (pc, min_leaf) = (self.parent_cost, self.min_leaf);
        // The gain to beat; `open`: none yet, any point will do.
        let (mut open, mut bar) = (bar.is_none(), bar.unwrap_or(0.0));
        let mut found = None;
        for &missing_left in self.sides {
            let [mut l0, mut l1, mut lc] = match missing_left {
                true => self.missing,
                false => [0.0; 3],
            };
            for (i, &b) in self.order.iter().enumerate() {
                let [h0, h1, hc] = self.slots[b.index()];
                l0 += h0;
                l1 += h1;
                lc += hc;
                if lc < min_leaf {
                    continue;
                }
                if tc - lc < min_leaf {
                    break;
                }
                let (r0, r1) = (t0 - l0, t1 - l1);
                if let Some(least) = self.min_weight {
                    if weight(l0, l1) < least || weight(r0, r1) < least {
                        continue;
                    }
                }
                let gain = pc - cost(l0, l1) - cost(r0, r1);
                if gain > bar || open {
                    (open, bar) = (false, gain);
                    found = Some((gain, i, missing_left));
                }
            }
        }
        found
    }

    /// [`PairScan::run`] with the criterion's functions.
    fn best(&self, criterion: Criterion, bar: Option<f64>) -> Option<(f64, usize, bool)> {
        match criterion {
            Criterion::Gini => self.run(
                |a, b| Criterion::Gini.cost2(a, b),
                |a, b| Criterion::Gini.weight2(a, b),
                bar,
            ),
            Criterion::Entropy => self.run(
                |a, b| Criterion::Entropy.cost2(a, b),
                |a, b| Criterion::Entropy.weight2(a, b),
                bar,
            ),
            Criterion::SquaredError => self.run(
                |a, b| Criterion::SquaredError.cost2(a, b),
                |a, b| Criterion::SquaredError.weight2(a, b),
                bar,
            ),
            Criterion::Gradient { l2 } => self.run(
                |a, b| Criterion::Gradient { l2 }.cost2(a, b),
                |a, b| Criterion::Gradient { l2 }.weight2(a, b),
                bar,
            ),
        }
    }
}

/// Sums each bin's statistics of `K` predictors (two statistics per row, small cells; row
/// `r`'s at `pairs[r]`: `(s0, s1, rows)`, or `(s1, rows)` for [`Grower::units`]) over the
/// node's rows into `slots[k]` (all zero on entry), reading each row and its statistics once
/// for all `K`, and marks the bins used in `bits[k]`: per row when the rows are few,
/// otherwise read off the counts (the last number) afterwards. Each bin sums its rows in row
/// order.
fn fill_rows_pairs<B: Bin, const K: usize, const N: usize>(
    mut slots: [&mut [[f64; N]]; K],
    bits: &mut [[u64; 4]; K],
    columns: [&[B]; K],
    rows: &[u32],
    pairs: &[[f64; N]],
) {
    *bits = [[0; 4]; K];
    if rows.len() >= 256 {
        for &r in rows {
            let p = pairs[r as usize];
            for (slots, column) in slots.iter_mut().zip(columns) {
                let at = &mut slots[column[r as usize].index() & 255];
                for (a, v) in at.iter_mut().zip(p) {
                    *a += v;
                }
            }
        }
        for (slots, bits) in slots.iter().zip(bits.iter_mut()) {
            for (b, at) in slots[..256].iter().enumerate() {
                bits[b >> 6] |= u64::from(at[N - 1] > 0.0) << (b & 63);
            }
        }
    } else {
        for &r in rows {
            let p = pairs[r as usize];
            for ((slots, bits), column) in slots.iter_mut().zip(bits.iter_mut()).zip(columns) {
                let b = column[r as usize].index() & 255;
                bits[b >> 6] |= 1 << (b & 63);
                for (a, v) in slots[b].iter_mut().zip(p) {
                    *a += v;
                }
            }
        }
    }
}

/// Each row's `[s1, rows]` of `pairs` when every row's `s0` equals its row count (number
/// outcomes without row weights, see [`Grower::units`]); empty otherwise.
fn units_of(pairs: &[[f64; 3]]) -> Vec<[f64; 2]> {
    // Checked before anything is built: gradients (a boosting round) and weighted classes
    // differ at the first row or so, and then cost neither a pass nor an allocation.
    if pairs.is_empty() || pairs.iter().any(|&[s0, _, c]| s0 != c) {
        return Vec::new();
    }
    pairs.iter().map(|&[_, s1, c]| [s1, c]).collect()
}

/// [`fill_rows_pairs`] for packed counts ([`pack_counts`]): one addition a row and
/// predictor.
fn fill_rows_packed<B: Bin, const K: usize>(
    mut slots: [&mut [u64]; K],
    bits: &mut [[u64; 4]; K],
    columns: [&[B]; K],
    rows: &[u32],
    packed: &[u64],
) {
    *bits = [[0; 4]; K];
    if rows.len() >= 256 {
        for &r in rows {
            let p = packed[r as usize];
            for (slots, column) in slots.iter_mut().zip(columns) {
                slots[column[r as usize].index() & 255] += p;
            }
        }
        for (slots, bits) in slots.iter().zip(bits.iter_mut()) {
            *bits = used_bins(slots[..256].try_into().expect("256 slots"));
        }
    } else {
        for &r in rows {
            let p = packed[r as usize];
            for ((slots, bits), column) in slots.iter_mut().zip(bits.iter_mut()).zip(columns) {
                let b = column[r as usize].index() & 255;
                bits[b >> 6] |= 1 << (b & 63);
                slots[b] += p;
            }
        }
    }
}

twice_for_avx2! {
    /// The bins of `slots` holding rows, as a 256-bit map (compiled for AVX2 too: four slots
    /// compared at once).
    fn used_bins(slots: &[u64; 256]) -> [u64; 4] = used_bins_plain
}

/// [`used_bins`]' loop, inlined into each of its builds.
#[inline(always)]
fn used_bins_plain(slots: &[u64; 256]) -> [u64; 4] {
    let (words, _) = slots.as_chunks::<64>();
    std::array::from_fn(|w| {
        words[w]
            .iter()
            .enumerate()
            .fold(0u64, |m, (i, &at)| m | (u64::from(at != 0) << i))
    })
}

twice_for_avx2! {
    /// [`scan_filled_pairs`] from packed counts (`slots`, see [`pack_counts`]; all zero again
    /// on return): the same running sums, unpacked per bin, so the same split; with missing
    /// values in the node, [`PairScan`]'s two passes (missing rows left, then right) in the
    /// same flat loops. Small cells only (missing values in slot 255).
    /// Compiled for AVX2 too as a whole, with the unpacking, the gains and the first best
    /// inlined: one choice of build a scan, not three.
    fn scan_packed(
        slots: &mut [u64],
        bits: [u64; 4],
        at: (usize, f64),
        settings: &GrowSettings,
        sums: &mut LeftSums,
        best: &mut Option<Split>,
    ) = scan_packed_plain
}

/// [`scan_packed`]'s body, inlined into each of its builds.
#[inline(always)]
fn scan_packed_plain(
    slots: &mut [u64],
    mut bits: [u64; 4],
    (feature, parent_cost): (usize, f64),
    settings: &GrowSettings,
    sums: &mut LeftSums,
    best: &mut Option<Split>,
) {
    let m = u8::MISSING.index();
    let missing = std::mem::replace(&mut slots[m], 0);
    bits[m >> 6] &= !(1 << (m & 63));
    let LeftSums {
        bins,
        s0,
        s1,
        rows,
        packed,
        ..
    } = sums;
    let mut acc = 0u64;
    let mut used = 0;
    for (w, mut word) in bits.into_iter().enumerate() {
        while word != 0 {
            let b = w * 64 + word.trailing_zeros() as usize;
            acc += std::mem::replace(&mut slots[b], 0);
            (bins[used], packed[used]) = (b as u8, acc);
            used += 1;
            word &= word - 1;
        }
    }
    let at = (feature, parent_cost);
    if missing == 0 {
        unpack_all(
            &packed[..used],
            0,
            [&mut s0[..used], &mut s1[..used], &mut rows[..used]],
        );
        if let Some(at) = present_best(sums, used, at, settings, best) {
            if let Some(split) = best {
                split.left_counts = Some(sums.packed[at]);
            }
        }
        return;
    }
    // Missing values: [`PairScan`]'s two passes, the missing rows on the left and then on the
    // right, each over every bin used; a later point must gain strictly more, as there.
    // Whole counts, so the sums are its numbers whatever their order.
    let total = used
        .checked_sub(1)
        .map_or(missing, |last| packed[last] + missing);
    let t = unpack_counts(total);
    let screens = gini_screens(settings, t[2]);
    for (missing_left, add) in [(true, missing), (false, 0)] {
        let LeftSums {
            s0,
            s1,
            rows,
            packed,
            ..
        } = &mut *sums;
        if !screens {
            unpack_all(
                &packed[..used],
                add,
                [&mut s0[..used], &mut s1[..used], &mut rows[..used]],
            );
        }
        let screened = screens.then_some(add);
        let found = points_best(sums, used, t, at, (missing_left, screened), settings, best);
        if let (Some(i), Some(split)) = (found, best.as_mut()) {
            split.left_counts = Some(sums.packed[i] + add);
        }
    }
}

/// Every packed count of `packed` plus `add` (the missing rows' packed counts, or 0)
/// unpacked ([`unpack_counts`]) into `out` (`s0`, `s1`, rows), in a loop apart, so it is
/// compiled for four at a time on AVX2 (inlined into [`scan_packed`]'s builds).
#[inline(always)]
fn unpack_all(packed: &[u64], add: u64, [s0, s1, rows]: [&mut [f64]; 3]) {
    for (((&p, l0), l1), lc) in packed.iter().zip(s0).zip(s1).zip(rows) {
        // Both halves are below 2³¹ (see `pack_counts`): converted as i32, which vectorises.
        let p = p + add;
        let (k1, k) = (f64::from((p >> 32) as i32), f64::from(p as u32 as i32));
        (*l0, *l1, *lc) = (k - k1, k1, k);
    }
}

/// Packed counts ([`pack_counts`]) as the statistics they count, `[s0, s1, rows]`.
#[inline(always)]
fn unpack_counts(p: u64) -> [f64; 3] {
    // Through i64: both halves are below 2³¹, and a signed conversion is one instruction.
    let (s1, c) = ((p >> 32) as i64 as f64, (p & 0xFFFF_FFFF) as i64 as f64);
    [c - s1, s1, c]
}

/// [`scan`] for a number predictor with two statistics per row and small cells, from its
/// bins' sums in `slots` and the bins used in `bits` ([`fill_rows_pairs`]); the slots are
/// all zero again on return. The bin map is read back in bin order, so the sums are those
/// of filling a histogram and calling [`scan`], and so is the split, without a list of
/// touched bins, a separate clearing pass or a split written at every better point.
/// (Profiled: this is most of a forest's time.)
fn scan_filled_pairs<B: Bin>(
    slots: &mut [[f64; 3]],
    mut bits: [u64; 4],
    feature: usize,
    parent_cost: f64,
    settings: &GrowSettings,
    sums: &mut LeftSums,
    best: &mut Option<Split>,
) {
    let m = B::MISSING.index() & 255;
    bits[m >> 6] &= !(1 << (m & 63));
    if slots[m][2] == 0.0 {
        scan_filled_sums(slots, bits, (m, feature, parent_cost), settings, sums, best);
        return;
    }
    let mut order = [0u8; 256];
    let mut used = 0;
    for (w, mut word) in bits.into_iter().enumerate() {
        while word != 0 {
            order[used] = (w * 64 + word.trailing_zeros() as usize) as u8;
            used += 1;
            word &= word - 1;
        }
    }
    let order = &order[..used];
    let missing = slots[m];
    let mut total = missing;
    for &b in order {
        let at = slots[b as usize];
        total[0] += at[0];
        total[1] += at[1];
        total[2] += at[2];
    }
    let sides: &[bool] = if missing[2] > 0.0 {
        &[true, false]
    } else {
        &[false]
    };
    let found = PairScan {
        slots,
        order,
        missing,
        total,
        sides,
        parent_cost,
        min_leaf: settings.min_rows_leaf.max(1) as f64,
        min_weight: (settings.min_weight_leaf > 0.0).then_some(settings.min_weight_leaf),
    }
    .best(settings.criterion, best.as_ref().map(|b| b.gain));
    for &b in order {
        slots[b as usize] = [0.0; 3];
    }
    slots[m] = [0.0; 3];
    if let Some((gain, i, missing_left)) = found {
        *best = Some(Split {
            gain,
            feature,
            numeric: true,
            threshold_bin: usize::from(order[i]),
            next_bin: order.get(i + 1).map(|&b| usize::from(b)),
            categories: BinSet::default(),
            missing_left,
            values: (0.0, 0.0),
            left_counts: None,
        });
    }
}

/// The split points of up to [`BATCH`] number predictors of one node without missing
/// values in it, side by side in flat arrays: each predictor's running sums after each bin
/// it uses, in bin order, one predictor after another (packed counts of two or three whole
/// classes, [`GroupPoints::gather`]; `(s1, rows)` of unweighted number outcomes,
/// [`GroupPoints::gather_units`]; `(s0, s1, rows)` otherwise, [`GroupPoints::gather_sums`]).
/// Their gains are then computed in one loop and the first best found in one pass
/// ([`scan_group`], [`scan_group3`], [`scan_group_units`], [`scan_group_sums`]), instead of
/// three short loops a predictor: deep in a forest's trees a node's predictor uses a few
/// dozen bins (a number outcome's about ten), and each loop's start, finish and exit branch
/// cost as much as its points. A predictor with missing values is scanned on its own after
/// the points gathered before it are, so ties still go to the earlier predictor. Allocated
/// once per tree.
struct GroupPoints {
    bins: Box<[u8; BATCH * 256]>,
    packed: Box<[u64; BATCH * 256]>,
    s0: Box<[f64; BATCH * 256]>,
    s1: Box<[f64; BATCH * 256]>,
    /// Three classes' third running sum ([`scan_group3`]).
    s2: Box<[f64; BATCH * 256]>,
    rows: Box<[f64; BATCH * 256]>,
    /// Each point's predictor's totals of `s0` ([`GroupPoints::gather_sums`]) and `s1`
    /// ([`GroupPoints::gather_units`] too), as it summed them.
    total0: Box<[f64; BATCH * 256]>,
    total1: Box<[f64; BATCH * 256]>,
    gain: Box<[f64; BATCH * 256]>,
    /// Points gathered.
    used: usize,
    /// Each predictor gathered and where its points end, in the order gathered.
    parts: [(usize, usize); BATCH],
    gathered: usize,
}

impl GroupPoints {
    fn new() -> Self {
        GroupPoints {
            bins: Box::new([0; BATCH * 256]),
            packed: Box::new([0; BATCH * 256]),
            s0: Box::new([0.0; BATCH * 256]),
            s1: Box::new([0.0; BATCH * 256]),
            s2: Box::new([0.0; BATCH * 256]),
            rows: Box::new([0.0; BATCH * 256]),
            total0: Box::new([0.0; BATCH * 256]),
            total1: Box::new([0.0; BATCH * 256]),
            gain: Box::new([0.0; BATCH * 256]),
            used: 0,
            parts: [(0, 0); BATCH],
            gathered: 0,
        }
    }

    /// The number of points gathered and of predictors they came from, the group emptied for
    /// the next (`None`: no points).
    fn take(&mut self) -> Option<(usize, usize)> {
        let taken = (self.used, self.gathered);
        (self.used, self.gathered) = (0, 0);
        (taken.0 > 0).then_some(taken)
    }

    /// Adds predictor `feature`'s points: the running packed counts after each bin of `bits`
    /// (read in bin order, each slot emptied as it is read; no missing values, so slot 255
    /// is empty). At most [`BATCH`] predictors between scans.
    fn gather(&mut self, slots: &mut [u64], bits: [u64; 4], feature: usize) {
        let mut acc = 0u64;
        let mut used = self.used;
        for (w, mut word) in bits.into_iter().enumerate() {
            while word != 0 {
                let b = w * 64 + word.trailing_zeros() as usize;
                acc += std::mem::replace(&mut slots[b], 0);
                (self.bins[used], self.packed[used]) = (b as u8, acc);
                used += 1;
                word &= word - 1;
            }
        }
        self.parts[self.gathered] = (feature, used);
        self.gathered += 1;
        self.used = used;
    }

    /// [`GroupPoints::gather`] for the `(s1, rows)` slots of rows whose weight is their count
    /// ([`Grower::units`]; no missing values): the running sums [`scan_filled_sums`] adds, in
    /// bin order, `s0` being the rows (the same additions), each slot emptied as it is read.
    fn gather_units(&mut self, slots: &mut [[f64; 2]], bits: [u64; 4], feature: usize) {
        let (mut t1, mut tc) = (0.0, 0.0);
        let (start, mut used) = (self.used, self.used);
        for (w, mut word) in bits.into_iter().enumerate() {
            while word != 0 {
                let b = w * 64 + word.trailing_zeros() as usize;
                let [h1, hc] = std::mem::replace(&mut slots[b], [0.0; 2]);
                t1 += h1;
                tc += hc;
                (self.bins[used], self.s1[used], self.rows[used]) = (b as u8, t1, tc);
                used += 1;
                word &= word - 1;
            }
        }
        self.total1[start..used].fill(t1);
        self.parts[self.gathered] = (feature, used);
        self.gathered += 1;
        self.used = used;
    }

    /// [`GroupPoints::gather`] for `(s0, s1, rows)` slots (weighted classes, weighted
    /// numbers; no missing values): the running sums [`scan_filled_sums`] adds, in bin order,
    /// each slot emptied as it is read.
    fn gather_sums(&mut self, slots: &mut [[f64; 3]], bits: [u64; 4], feature: usize) {
        let [mut t0, mut t1, mut tc] = [0.0; 3];
        let (start, mut used) = (self.used, self.used);
        for (w, mut word) in bits.into_iter().enumerate() {
            while word != 0 {
                let b = w * 64 + word.trailing_zeros() as usize;
                let [h0, h1, hc] = std::mem::replace(&mut slots[b], [0.0; 3]);
                t0 += h0;
                t1 += h1;
                tc += hc;
                self.bins[used] = b as u8;
                (self.s0[used], self.s1[used], self.rows[used]) = (t0, t1, tc);
                used += 1;
                word &= word - 1;
            }
        }
        self.total0[start..used].fill(t0);
        self.total1[start..used].fill(t1);
        self.parts[self.gathered] = (feature, used);
        self.gathered += 1;
        self.used = used;
    }
}

twice_for_avx2! {
    /// The best split among the points gathered in `points` (then emptied), if it beats
    /// `best`: [`scan_packed`]'s for each predictor in turn, to the bit. Every predictor's
    /// last running sum is the node's packed totals (whole counts, no missing values), so
    /// one loop computes every point's gain as [`present_best`] does, and the first of the
    /// largest falls in predictor order, then bin order: the tie rule of scanning them one
    /// after another, each kept only when strictly better. Compiled for AVX2 too as a whole.
    fn scan_group(
        points: &mut GroupPoints,
        parent_cost: f64,
        settings: &GrowSettings,
        best: &mut Option<Split>,
    ) = scan_group_plain
}

/// [`scan_group`]'s body, inlined into each of its builds.
#[allow(clippy::neg_cmp_op_on_partial_ord)]
#[inline(always)]
fn scan_group_plain(
    points: &mut GroupPoints,
    parent_cost: f64,
    settings: &GrowSettings,
    best: &mut Option<Split>,
) {
    let Some((used, gathered)) = points.take() else {
        return;
    };
    let GroupPoints {
        packed,
        s0,
        s1,
        rows,
        gain,
        parts,
        ..
    } = points;
    let t = unpack_counts(packed[parts[0].1 - 1]);
    if gini_screens(settings, t[2]) {
        // The forest's case: each point's gain screened with one division straight from
        // the packed counts, and the first best found among the few near the largest (see
        // `screened_gini_best`).
        gini_screen_packed(
            &mut gain[..used],
            &packed[..used],
            0,
            t,
            parent_cost,
            settings,
        );
        let left = |i: usize| unpack_counts(packed[i]);
        let (at, g) = screened_gini_best(&gain[..used], left, t, parent_cost);
        keep_group_best(points, at, g, gathered, true, best);
        return;
    }
    unpack_all(
        &packed[..used],
        0,
        [&mut s0[..used], &mut s1[..used], &mut rows[..used]],
    );
    let left = [&s0[..used], &s1[..used], &rows[..used]];
    let all = std::iter::repeat(&1.0);
    point_gains_plain(&mut gain[..used], all, left, t, parent_cost, settings);
    pick_group_best(points, used, gathered, true, best);
}

/// Whether a scan of whole counts (two classes, packed) finds its split through
/// [`gini_screen_packed`]: Gini without a least leaf weight, a node of fewer than 2²⁶ rows
/// (`rows`).
fn gini_screens(settings: &GrowSettings, rows: f64) -> bool {
    settings.criterion == Criterion::Gini
        && settings.min_weight_leaf <= 0.0
        && rows < (1 << 26) as f64
}

/// Each point's Gini gain `parent − cost(left) − cost(right)` with the two costs' divisions
/// made one, `parent − W + ((l0² + l1²)·R + (r0² + r1²)·L) / (L·R)` (`L`, `R` the sides'
/// rows, whole counts, `W = t[2]` the node's), into `gain`; −∞ where [`point_gains`] gives
/// −∞ (the same row limits; no least weight). Not the same numbers in the last places: a
/// screen for [`screened_gini_best`], never a gain kept. Straight from the points' packed
/// counts ([`pack_counts`]) plus `add` (the missing rows' when they go left), unpacked as
/// [`unpack_all`] unpacks them, in the same loop. The vector loop's two divisions a point
/// were its bound (`grow_bench 40000 60` 0.93 of the time with one), and no unpacked
/// arrays are written and read back (241.9 -> 232.5 M grower instructions for
/// `grow_bench 40000 4`). ("Not below" written `!(x < least)`, as in [`point_gains`].)
#[allow(clippy::neg_cmp_op_on_partial_ord)]
#[inline(always)]
fn gini_screen_packed(
    gain: &mut [f64],
    packed: &[u64],
    add: u64,
    t: [f64; 3],
    parent: f64,
    settings: &GrowSettings,
) {
    let min_leaf = settings.min_rows_leaf.max(1) as f64;
    for (out, &p) in gain.iter_mut().zip(packed) {
        let p = p + add;
        let (l1, lc) = (f64::from((p >> 32) as i32), f64::from(p as u32 as i32));
        let (wr, r1) = (t[2] - lc, t[1] - l1);
        let (l0, r0) = (lc - l1, wr - r1);
        let ok = !(lc < min_leaf) & !(wr < min_leaf);
        let squares = (l0 * l0 + l1 * l1) * wr + (r0 * r0 + r1 * r1) * lc;
        let v = parent - t[2] + squares / (lc * wr);
        *out = if ok { v } else { f64::NEG_INFINITY };
    }
}

/// The first of the largest Gini gains, as [`point_gains`] and [`first_best`] find it, from
/// the screened gains `screen` ([`gini_screen_packed`]; `left(i)` point `i`'s left sums):
/// only points screened within `2⁻⁴⁶·W` of the largest (`W` the node's weight, `t[2]`) have
/// their gain computed as [`point_gains`] computes it. Every input is exact (whole counts
/// below 2²⁶, so squares, their sums and `L·R` below 2⁵³), and the parent's cost, the same
/// number in both, is at most `W/2`. The gain as computed is within `4·2⁻⁵³·W` of its exact
/// value: `(l0² + l1²)/L` and the side's cost are at most `L` (two roundings a side), the
/// two subtractions at most `W`. The screen is within `6·2⁻⁵³·W`: its quotient, at most `W`,
/// takes four relative roundings (two products, their sum, the division), and each of the
/// two additions after is at most `W`. So a point screened more than `20·2⁻⁵³·W` below the
/// largest cannot have the largest gain, nor tie with it. Returns the place and gain (−∞:
/// no point).
#[inline(always)]
fn screened_gini_best(
    screen: &[f64],
    left: impl Fn(usize) -> [f64; 3],
    t: [f64; 3],
    parent: f64,
) -> (usize, f64) {
    let top = largest(screen);
    let (quads, rest) = screen.as_chunks::<4>();
    if top == f64::NEG_INFINITY {
        return (0, f64::NEG_INFINITY);
    }
    let near = top - t[2] * f64::powi(2.0, -46);
    let (mut at, mut g) = (0, f64::NEG_INFINITY);
    let mut exact = |i: usize| {
        let [l0, l1, _] = left(i);
        let (r0, r1) = (t[0] - l0, t[1] - l1);
        let v = parent - Criterion::Gini.cost2(l0, l1) - Criterion::Gini.cost2(r0, r1);
        if v > g {
            (at, g) = (i, v);
        }
    };
    // Four places compared at once (a mask of the four), most quads holding none.
    for (k, q) in quads.iter().enumerate() {
        let mut hits = u32::from(q[0] >= near)
            | (u32::from(q[1] >= near) << 1)
            | (u32::from(q[2] >= near) << 2)
            | (u32::from(q[3] >= near) << 3);
        while hits != 0 {
            exact(4 * k + hits.trailing_zeros() as usize);
            hits &= hits - 1;
        }
    }
    for (i, &v) in rest.iter().enumerate() {
        if v >= near {
            exact(4 * quads.len() + i);
        }
    }
    (at, g)
}

/// The first best of a group's `used` point gains (`points.gain`, from `gathered`
/// predictors), kept in `best` if it gains strictly more: the split after its bin, on its
/// predictor; with the left side's packed counts when `packed` ([`scan_group`]).
#[allow(clippy::neg_cmp_op_on_partial_ord)]
#[inline(always)]
fn pick_group_best(
    points: &GroupPoints,
    used: usize,
    gathered: usize,
    packed: bool,
    best: &mut Option<Split>,
) {
    let (at, g) = first_best_plain(&points.gain[..used]);
    keep_group_best(points, at, g, gathered, packed, best);
}

/// [`pick_group_best`]'s keeping of the group's first best, point `at` gaining `g`.
#[allow(clippy::neg_cmp_op_on_partial_ord)]
#[inline(always)]
fn keep_group_best(
    points: &GroupPoints,
    at: usize,
    g: f64,
    gathered: usize,
    packed: bool,
    best: &mut Option<Split>,
) {
    if g == f64::NEG_INFINITY || best.as_ref().is_some_and(|b| !(g > b.gain)) {
        return;
    }
    let &(feature, end) = points.parts[..gathered]
        .iter()
        .find(|&&(_, end)| at < end)
        .expect("every point is some predictor's");
    let bins = &points.bins;
    *best = Some(Split {
        gain: g,
        feature,
        numeric: true,
        threshold_bin: usize::from(bins[at]),
        next_bin: (at + 1 < end).then(|| usize::from(bins[at + 1])),
        categories: BinSet::default(),
        missing_left: false,
        values: (0.0, 0.0),
        left_counts: packed.then(|| points.packed[at]),
    });
}

twice_for_avx2! {
    /// [`scan_group`] for points gathered by [`GroupPoints::gather_units`]: each predictor's
    /// split as [`scan_filled_sums`] finds it, to the bit. Their totals of rows are whole
    /// numbers, the same whatever the order they were summed in; their totals of `s1` may
    /// differ in the last place, so each point's gain takes its own predictor's.
    fn scan_group_units(
        points: &mut GroupPoints,
        parent_cost: f64,
        settings: &GrowSettings,
        best: &mut Option<Split>,
    ) = scan_group_units_plain
}

/// [`scan_group_units`]' body, inlined into each of its builds.
#[allow(clippy::neg_cmp_op_on_partial_ord)]
#[inline(always)]
fn scan_group_units_plain(
    points: &mut GroupPoints,
    parent_cost: f64,
    settings: &GrowSettings,
    best: &mut Option<Split>,
) {
    let Some((used, gathered)) = points.take() else {
        return;
    };
    let GroupPoints {
        s1,
        rows,
        total1,
        gain,
        parts,
        ..
    } = points;
    let tc = rows[parts[0].1 - 1];
    let left = [&rows[..used], &s1[..used], &rows[..used]];
    let totals = (std::iter::repeat(&tc), total1[..used].iter(), tc);
    let all = std::iter::repeat(&1.0);
    point_gains_each(&mut gain[..used], all, left, totals, parent_cost, settings);
    pick_group_best(points, used, gathered, false, best);
}

twice_for_avx2! {
    /// [`scan_group`] for points gathered by [`GroupPoints::gather_sums`]: each predictor's
    /// split as [`scan_filled_sums`] finds it, to the bit, each point's gain taking its own
    /// predictor's totals of `s0` and `s1`.
    fn scan_group_sums(
        points: &mut GroupPoints,
        parent_cost: f64,
        settings: &GrowSettings,
        best: &mut Option<Split>,
    ) = scan_group_sums_plain
}

/// [`scan_group_sums`]' body, inlined into each of its builds.
#[allow(clippy::neg_cmp_op_on_partial_ord)]
#[inline(always)]
fn scan_group_sums_plain(
    points: &mut GroupPoints,
    parent_cost: f64,
    settings: &GrowSettings,
    best: &mut Option<Split>,
) {
    let Some((used, gathered)) = points.take() else {
        return;
    };
    let GroupPoints {
        s0,
        s1,
        rows,
        total0,
        total1,
        gain,
        parts,
        ..
    } = points;
    let tc = rows[parts[0].1 - 1];
    let left = [&s0[..used], &s1[..used], &rows[..used]];
    let totals = (total0[..used].iter(), total1[..used].iter(), tc);
    let all = std::iter::repeat(&1.0);
    point_gains_each(&mut gain[..used], all, left, totals, parent_cost, settings);
    pick_group_best(points, used, gathered, false, best);
}

/// The running sums of [`scan_filled_sums`], one entry per bin used (flat arrays, so its
/// gain loop vectorises), with the bins and the gains; allocated once per tree.
struct LeftSums {
    bins: Box<[u8; 256]>,
    s0: Box<[f64; 256]>,
    s1: Box<[f64; 256]>,
    /// The third and fourth classes' running sums ([`scan_filled_classes`]).
    s2: Box<[f64; 256]>,
    s3: Box<[f64; 256]>,
    /// The fifth to eighth classes' ([`scan_filled_classes`]).
    more: Box<[[f64; 256]; MORE_CLASSES]>,
    rows: Box<[f64; 256]>,
    /// The running sums as packed counts ([`pack_counts`]), before they are unpacked.
    packed: Box<[u64; 256]>,
    gain: Box<[f64; 256]>,
}

impl LeftSums {
    fn new() -> Self {
        LeftSums {
            bins: Box::new([0; 256]),
            s0: Box::new([0.0; 256]),
            s1: Box::new([0.0; 256]),
            s2: Box::new([0.0; 256]),
            s3: Box::new([0.0; 256]),
            more: Box::new([[0.0; 256]; MORE_CLASSES]),
            rows: Box::new([0.0; 256]),
            packed: Box::new([0; 256]),
            gain: Box::new([0.0; 256]),
        }
    }
}

twice_for_avx2! {
    /// [`scan_filled_pairs`] when the node's rows have no missing value in the predictor (so
    /// one side to try), in three flat loops: the left sums after each bin used (in bin
    /// order, clearing each slot as it is read); every split point's gain on its own
    /// (independent divisions the compiler can vectorise; too few rows on a side: −∞, which
    /// no real gain equals); the first of the largest. The running left sums are those
    /// [`PairScan`] adds, the total is the last of them (as [`scan`] sums it: from the empty
    /// missing slot, then the bins in order), and the right side shrinks to too few rows only
    /// once, so the split is [`PairScan`]'s to the bit ("not below" written `!(x < least)`, as
    /// the plain loop skips a point only when a sum is below its least). Slots of `N`
    /// numbers: `(s0, s1, rows)`, or `(s1, rows)` whose `s0` is the rows ([`Grower::units`]:
    /// the same sums, so the same split). `at`: the missing slot (emptied too), the predictor
    /// and the node's cost. Compiled for AVX2 too as a whole, its loops inlined, as
    /// [`scan_packed`] is (the scan of number outcomes and of weighted classes).
    fn scan_filled_sums<const N: usize>(
        slots: &mut [[f64; N]],
        bits: [u64; 4],
        at: (usize, usize, f64),
        settings: &GrowSettings,
        sums: &mut LeftSums,
        best: &mut Option<Split>,
    ) = scan_present_sums
}

/// [`scan_filled_sums`]' body, inlined into each of its builds.
#[inline(always)]
fn scan_present_sums<const N: usize>(
    slots: &mut [[f64; N]],
    bits: [u64; 4],
    (missing, feature, parent_cost): (usize, usize, f64),
    settings: &GrowSettings,
    sums: &mut LeftSums,
    best: &mut Option<Split>,
) {
    let LeftSums {
        bins, s0, s1, rows, ..
    } = sums;
    let [mut t0, mut t1, mut tc] = [0.0; 3];
    let mut used = 0;
    for (w, mut word) in bits.into_iter().enumerate() {
        while word != 0 {
            let b = w * 64 + word.trailing_zeros() as usize;
            let h = std::mem::replace(&mut slots[b], [0.0; N]);
            let (h0, h1, hc) = match N {
                3 => (h[0], h[N - 2], h[N - 1]),
                _ => (h[N - 1], h[N - 2], h[N - 1]),
            };
            t0 += h0;
            t1 += h1;
            tc += hc;
            (bins[used], s0[used], s1[used], rows[used]) = (b as u8, t0, t1, tc);
            used += 1;
            word &= word - 1;
        }
    }
    slots[missing] = [0.0; N];
    present_best(sums, used, (feature, parent_cost), settings, best);
}

/// The best split of a number predictor without missing values from its running left sums
/// after each of the `used` bins in `sums` (the last of them the node's totals), if it beats
/// `best`: every split point's gain, then the first of the largest. Its loops are inlined
/// into the caller's build (the callers are compiled for AVX2 too). Returns where the split
/// falls among the `used` bins when it beat `best`.
#[allow(clippy::neg_cmp_op_on_partial_ord)]
#[inline(always)]
fn present_best(
    sums: &mut LeftSums,
    used: usize,
    at: (usize, f64),
    settings: &GrowSettings,
    best: &mut Option<Split>,
) -> Option<usize> {
    let t = used
        .checked_sub(1)
        .map(|last| [sums.s0[last], sums.s1[last], sums.rows[last]])?;
    points_best(sums, used, t, at, (false, None), settings, best)
}

/// [`present_best`] with the node's totals `t` given and the missing values' side
/// (the left sums include them when `missing_left`). `screened`: the gains are screened
/// ([`gini_screen_packed`]) from the packed counts `sums.packed` plus the number given
/// ([`scan_packed`], when [`gini_screens`]), and the unpacked sums are not read.
#[allow(clippy::neg_cmp_op_on_partial_ord)]
#[inline(always)]
fn points_best(
    sums: &mut LeftSums,
    used: usize,
    t: [f64; 3],
    (feature, parent_cost): (usize, f64),
    (missing_left, screened): (bool, Option<u64>),
    settings: &GrowSettings,
    best: &mut Option<Split>,
) -> Option<usize> {
    if used == 0 {
        return None;
    }
    let LeftSums {
        bins,
        s0,
        s1,
        rows,
        packed,
        gain,
        ..
    } = sums;
    // Every bin used holds rows: each is a split point.
    let (at, g) = match screened {
        Some(add) => {
            let packed = &packed[..used];
            gini_screen_packed(&mut gain[..used], packed, add, t, parent_cost, settings);
            let left = |i: usize| unpack_counts(packed[i] + add);
            screened_gini_best(&gain[..used], left, t, parent_cost)
        }
        None => {
            let left = [&s0[..used], &s1[..used], &rows[..used]];
            let all = std::iter::repeat(&1.0);
            point_gains_plain(&mut gain[..used], all, left, t, parent_cost, settings);
            first_best_plain(&gain[..used])
        }
    };
    if g == f64::NEG_INFINITY || best.as_ref().is_some_and(|b| !(g > b.gain)) {
        return None;
    }
    *best = Some(Split {
        gain: g,
        feature,
        numeric: true,
        threshold_bin: usize::from(bins[at]),
        next_bin: (at + 1 < used).then(|| usize::from(bins[at + 1])),
        categories: BinSet::default(),
        missing_left,
        values: (0.0, 0.0),
        left_counts: None,
    });
    Some(at)
}

/// Scratch of [`scan_dense_numbers`], one entry per bin (flat arrays, so the gain loop
/// vectorises): the bin's rows, the running sums `s0`, `s1` and rows up to and including the
/// bin with the missing values counted on the left (`a`) and without (`b`), and the gain of
/// splitting after the bin.
#[derive(Default)]
struct Points {
    rows: Vec<f64>,
    a: [Vec<f64>; 3],
    b: [Vec<f64>; 3],
    gain: Vec<f64>,
}

/// [`scan`]'s two-statistic path for a number predictor's dense histogram (256 slots of
/// `(s0, s1, rows)`, missing in slot 255), in three flat loops: the running sums of both
/// sides of the missing values at once, bins with no rows adding nothing; every split
/// point's gain on its own (independent divisions the compiler can vectorise); the first best.
/// Row counts are whole numbers, so the running count only rises, and the points [`scan`]
/// visits before it stops (the right side too small) are exactly those with enough rows on
/// both sides. The same additions and divisions as [`scan`] (adding zero changes no sum) and
/// the same tie rule, so the same split ("not below" written `!(x < least)`, as the plain
/// loop skips a point only when a sum is below its least).
#[allow(clippy::too_many_arguments, clippy::neg_cmp_op_on_partial_ord)]
fn scan_dense_numbers(
    h: &[f64],
    bins: usize,
    feature: usize,
    parent_cost: f64,
    settings: &GrowSettings,
    points: &mut Points,
    best: &mut Option<Split>,
) {
    let (present, _) = h[..bins * 3].as_chunks::<3>();
    let m = (DENSE_SLOTS - 1) * 3;
    let missing = [h[m], h[m + 1], h[m + 2]];
    for v in std::iter::once(&mut points.rows)
        .chain(&mut points.a)
        .chain(&mut points.b)
        .chain(std::iter::once(&mut points.gain))
    {
        v.resize(bins, 0.0);
    }
    let Points { rows, a, b, gain } = points;
    // The node's totals as this predictor sums them: the missing slot, then the bins.
    let t = if missing == [0.0; 3] {
        // Nothing in the missing slot: one running sum serves as both.
        running_sums(present, [0.0; 3], rows, b)
    } else {
        running_sums(present, [0.0; 3], rows, b);
        running_sums(present, missing, rows, a)
    };
    let sides: &[bool] = if missing[2] > 0.0 {
        &[true, false]
    } else {
        &[false]
    };
    // The best split of this predictor so far: gain, last bin on the left, missing side.
    let mut found: Option<(f64, usize, bool)> = None;
    for &missing_left in sides {
        let [l0, l1, lc] = if missing_left { &*a } else { &*b };
        point_gains(gain, rows.iter(), [l0, l1, lc], t, parent_cost, settings);
        let (at, g) = first_best(gain);
        if g == f64::NEG_INFINITY {
            continue;
        }
        let beats = match (found, best.as_ref()) {
            (Some((f, _, _)), _) => g > f,
            (None, Some(bb)) => g > bb.gain,
            (None, None) => true,
        };
        if beats {
            found = Some((g, at, missing_left));
        }
    }
    if let Some((gain, b, missing_left)) = found {
        let next_bin = (b + 1..bins).find(|&nb| h[nb * 3 + 2] > 0.0);
        *best = Some(Split {
            gain,
            feature,
            numeric: true,
            threshold_bin: b,
            next_bin,
            categories: BinSet::default(),
            missing_left,
            values: (0.0, 0.0),
            left_counts: None,
        });
    }
}

twice_for_avx2! {
    /// Every split point's gain into `gain`, from the left side's sums after each bin
    /// (`left`: `s0`, `s1`, rows) and the node's totals `t`: −∞ (which no real gain equals:
    /// costs are finite) where the bin holds no rows (`present`, one number a bin) or a side has
    /// too few rows or too little weight. `&` rather than `&&`, selects rather than branches,
    /// and one loop per criterion and least-weight rule (each a constant the compiler folds into
    /// the arithmetic; forests set no least weight) keep it branch-free, so it vectorises. Costs
    /// by [`Criterion::cost2`], equal to [`Criterion::cost`] to the bit. "Not below" is written
    /// `!(x < least)`, as the plain loop skips a point only when a sum is below its least.
    ///
    /// On a CPU with AVX2 the same loop is compiled for four numbers at a time instead of two
    /// ([`twice_for_avx2`]): the same IEEE additions, multiplications and divisions on each
    /// lane (Rust never fuses a multiply and an add on its own), so the same gains to the bit.
    /// `grow_bench` fingerprints unchanged; 98.9 -> 90.0 M instructions a forest tree.
    fn point_gains<'p>(
        gain: &mut [f64],
        present: impl Iterator<Item = &'p f64>,
        left: [&[f64]; 3],
        t: [f64; 3],
        parent_cost: f64,
        settings: &GrowSettings,
    ) = point_gains_plain
}

/// [`point_gains`]' loop, inlined into each of its builds.
#[inline(always)]
fn point_gains_plain<'p>(
    gain: &mut [f64],
    present: impl Iterator<Item = &'p f64>,
    left: [&[f64]; 3],
    t: [f64; 3],
    parent_cost: f64,
    settings: &GrowSettings,
) {
    let totals = (std::iter::repeat(&t[0]), std::iter::repeat(&t[1]), t[2]);
    point_gains_each(gain, present, left, totals, parent_cost, settings);
}

/// [`point_gains_plain`] with the node's totals of `s0` and `s1` given point by point, as
/// summed by each point's predictor in its own order ([`scan_group_units`],
/// [`scan_group_sums`]); the rows' total is a whole number, the same whatever the order.
#[allow(clippy::neg_cmp_op_on_partial_ord)]
#[inline(always)]
fn point_gains_each<'p, 't>(
    gain: &mut [f64],
    present: impl Iterator<Item = &'p f64>,
    left: [&[f64]; 3],
    (t0, t1, tc): (
        impl Iterator<Item = &'t f64>,
        impl Iterator<Item = &'t f64>,
        f64,
    ),
    parent_cost: f64,
    settings: &GrowSettings,
) {
    let min_leaf = settings.min_rows_leaf.max(1) as f64;
    let min_weight = settings.min_weight_leaf;
    let lanes = gain
        .iter_mut()
        .zip(present)
        .zip(left[0])
        .zip(left[1])
        .zip(left[2])
        .zip(t0.zip(t1));
    let t = [0.0, 0.0, tc];
    macro_rules! gains {
        ($c:expr, $weigh:expr) => {
            for (((((out, &n), &l0), &l1), &lc), (&t0, &t1)) in lanes {
                let (r0, r1) = (t0 - l0, t1 - l1);
                let ok = (n > 0.0)
                    & !(lc < min_leaf)
                    & !(t[2] - lc < min_leaf)
                    & !($weigh & (($c).weight2(l0, l1) < min_weight))
                    & !($weigh & (($c).weight2(r0, r1) < min_weight));
                let v = parent_cost - ($c).cost2(l0, l1) - ($c).cost2(r0, r1);
                *out = if ok { v } else { f64::NEG_INFINITY };
            }
        };
    }
    match (settings.criterion, min_weight > 0.0) {
        (Criterion::Gini, false) => gains!(Criterion::Gini, false),
        (Criterion::Gini, true) => gains!(Criterion::Gini, true),
        (Criterion::SquaredError, false) => gains!(Criterion::SquaredError, false),
        (Criterion::SquaredError, true) => gains!(Criterion::SquaredError, true),
        (Criterion::Gradient { l2 }, false) => gains!(Criterion::Gradient { l2 }, false),
        (Criterion::Gradient { l2 }, true) => gains!(Criterion::Gradient { l2 }, true),
        (Criterion::Entropy, w) => gains!(Criterion::Entropy, w),
    }
}

/// The largest of `values` (−∞ when empty or every value is −∞ or NaN), in four running
/// maxima side by side: no chain of dependent comparisons, so the compiler vectorises it.
#[inline(always)]
fn largest(values: &[f64]) -> f64 {
    let more = |m: f64, v: f64| if v > m { v } else { m };
    let mut m = [f64::NEG_INFINITY; 4];
    let (quads, rest) = values.as_chunks::<4>();
    for q in quads {
        m = [
            more(m[0], q[0]),
            more(m[1], q[1]),
            more(m[2], q[2]),
            more(m[3], q[3]),
        ];
    }
    rest.iter()
        .fold(more(more(m[0], m[1]), more(m[2], m[3])), |m, &v| more(m, v))
}

twice_for_avx2! {
    /// The first of the largest of `gain` and where it is (−∞ when every point is −∞)
    /// (compiled for AVX2 too, like [`point_gains`]).
    fn first_best(gain: &[f64]) -> (usize, f64) = first_best_plain
}

/// [`first_best`]'s loop, inlined into each of its builds.
#[inline(always)]
fn first_best_plain(gain: &[f64]) -> (usize, f64) {
    // The largest ([`largest`]), then the first place holding it, four places compared at
    // a time: the place and value of a loop keeping the first larger one (a NaN is never
    // larger, and −0 equals 0). Finding the place four at a time: 68.9 -> 67.0 M
    // instructions a forest tree (`grow_bench 40000 4`).
    let g = largest(gain);
    let (quads, rest) = gain.as_chunks::<4>();
    if g == f64::NEG_INFINITY {
        return (0, f64::NEG_INFINITY);
    }
    // The first place holding it, four places compared at once (a mask of the four).
    let hits = |q: &[f64; 4]| {
        u32::from(q[0] == g)
            | (u32::from(q[1] == g) << 1)
            | (u32::from(q[2] == g) << 2)
            | (u32::from(q[3] == g) << 3)
    };
    let at = match quads.iter().position(|q| hits(q) != 0) {
        Some(k) => 4 * k + hits(&quads[k]).trailing_zeros() as usize,
        None => {
            let k = rest
                .iter()
                .position(|&v| v == g)
                .expect("the largest is in place");
            4 * quads.len() + k
        }
    };
    (at, gain[at])
}

/// The running sums of `present`'s slots `(s0, s1, rows)` from `start`, bins with no rows
/// adding nothing, into `sums` (three flat arrays), and each bin's rows into `rows`. Returns
/// the last sums. Scalar accumulators, and a function of its own so that they stay in
/// registers (inlined, the row count was kept on the stack: profiled).
#[inline(never)]
fn running_sums(
    present: &[[f64; 3]],
    start: [f64; 3],
    rows: &mut [f64],
    sums: &mut [Vec<f64>; 3],
) -> [f64; 3] {
    let [mut s0, mut s1, mut sc] = start;
    let [o0, o1, oc] = sums;
    let outs = rows
        .iter_mut()
        .zip(o0.iter_mut().zip(o1.iter_mut()).zip(oc.iter_mut()));
    for (at, (n, ((o0, o1), oc))) in present.iter().zip(outs) {
        let c = at[2];
        // An empty bin adds +0 (its sums may hold a subtraction's leftovers), chosen by a
        // mask, not a branch: the compiler's branch on the bin being empty was mispredicted
        // wherever empty and used bins alternate.
        let keep = 0u64.wrapping_sub(u64::from(c > 0.0));
        let pick = |x: f64| f64::from_bits(x.to_bits() & keep);
        s0 += pick(at[0]);
        s1 += pick(at[1]);
        sc += pick(c);
        *n = c;
        (*o0, *o1, *oc) = (s0, s1, sc);
    }
    [s0, s1, sc]
}

/// The split after the `i`-th bin of `order`.
fn split_at<B: Bin>(
    gain: f64,
    feature: usize,
    numeric: bool,
    order: &[B],
    i: usize,
    missing_left: bool,
    values: (f64, f64),
) -> Split {
    let mut categories = BinSet::default();
    if !numeric {
        for &lb in &order[..=i] {
            categories.insert(lb.index() as u8);
        }
    }
    Split {
        gain,
        feature,
        numeric,
        threshold_bin: order[i].index(),
        next_bin: order[i + 1..].first().map(|nb| nb.index()),
        categories,
        missing_left,
        values,
        left_counts: None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::binning::{bin_design, BinSettings};
    use crate::design::{design_from_csv, Outcome};

    /// Class statistics: one weight per class per row.
    /// Binned predictors, the outcome and the grower's row statistics of a CSV text.
    fn fixture(
        text: &str,
        outcome: &str,
        predictors: &[&str],
    ) -> (BinnedMatrix, Outcome, Vec<f64>, usize) {
        let design = design_from_csv(text, outcome, predictors);
        let (stats, width) = design.row_statistics(false);
        let m = bin_design(&design, BinSettings::default()).unwrap();
        (m, design.outcome, stats, width)
    }

    #[test]
    fn a_node_is_pure_when_its_largest_value_is_not_above_its_smallest() {
        // `Uniform` against the rule it replaced (our own rule, no source needed): the values
        // rows alone would give, NaN and missing ones left out, are pure exactly when their
        // `f64::max` is not above their `f64::min`; on sequences drawn from few values.
        let pool = [1.5, 1.5, -0.0, 0.0, f64::NAN, 2.0, f64::INFINITY];
        let mut next = xorshift(11);
        for _ in 0..5000 {
            let len = (next() % 6) as usize;
            let values: Vec<Option<f64>> = (0..len)
                .map(|_| match next() % 8 {
                    7 => None,
                    i => Some(pool[i as usize]),
                })
                .collect();
            let (mut low, mut high) = (f64::INFINITY, f64::NEG_INFINITY);
            let mut one = Uniform::default();
            for &v in &values {
                if let Some(a) = v {
                    low = low.min(a);
                    high = high.max(a);
                }
                if !one.mixed {
                    one.see(v);
                }
            }
            assert_eq!(!one.mixed, high <= low, "{values:?}");
        }
    }

    #[test]
    fn xor_needs_depth_two_and_is_then_perfect() {
        let text = "y,a,b\n0,0,0\n1,0,1\n1,1,0\n0,1,1\n0,0,0\n1,0,1\n1,1,0\n0,1,1\n";
        let (m, y, stats, k) = fixture(text, "y", &["a", "b"]);
        let rows: Vec<u32> = (0..8).collect();
        let tree = grow(&m, &stats, k, &rows, &GrowSettings::default(), None);
        let Outcome::Classes { codes, .. } = &y else {
            unreachable!()
        };
        for r in 0..8 {
            let p = tree.predict_row(&m, r);
            assert_eq!(p[codes[r] as usize], 1.0, "row {r}");
        }
        assert_eq!((tree.depth(), tree.leaves()), (2, 4));
    }

    #[test]
    fn a_fully_grown_tree_fits_distinct_rows_perfectly() {
        // Fact of the trade: with no two identical rows disagreeing, a fully grown tree has
        // zero training error (common practice, no source). Seeded xorshift data.
        let mut next = xorshift(0x2545_F491_4F6C_DD1Du64);
        let mut text = String::from("y,x1,x2,x3,c\n");
        for _ in 0..400 {
            let (a, b, c) = (next() % 1000, next() % 1000, next() % 1000);
            let cat = ["p", "q", "r", "s"][(next() % 4) as usize];
            let y = ["u", "v", "w"][(next() % 3) as usize];
            let x3 = if next().is_multiple_of(10) {
                "NA".to_string()
            } else {
                c.to_string()
            };
            text += &format!("{y},{a},{b},{x3},{cat}\n");
        }
        let (m, y, stats, k) = fixture(&text, "y", &["x1", "x2", "x3", "c"]);
        let rows: Vec<u32> = (0..m.rows as u32).collect();
        for criterion in [Criterion::Gini, Criterion::Entropy] {
            let settings = GrowSettings {
                criterion,
                ..GrowSettings::default()
            };
            let tree = grow(&m, &stats, k, &rows, &settings, None);
            let Outcome::Classes { codes, .. } = &y else {
                unreachable!()
            };
            let wrong = (0..m.rows)
                .filter(|&r| tree.predict_row(&m, r)[codes[r] as usize] != 1.0)
                .count();
            assert_eq!(wrong, 0, "{criterion:?}: {} leaves", tree.leaves());
        }
    }

    #[test]
    fn regression_finds_a_step_and_missing_values_choose_a_side() {
        let mut text = String::from("y,x\n");
        for i in 0..40 {
            let x = if i % 10 == 9 {
                "NA".to_string()
            } else {
                i.to_string()
            };
            // y steps at x = 20; the missing rows behave like the high side.
            let y = if i >= 20 || i % 10 == 9 { 5.0 } else { 1.0 };
            text += &format!("{y},{x}\n");
        }
        let (m, y, stats, _) = fixture(&text, "y", &["x"]);
        assert!(matches!(y, Outcome::Numbers(_)));
        let settings = GrowSettings {
            criterion: Criterion::SquaredError,
            max_depth: Some(1),
            ..GrowSettings::default()
        };
        let rows: Vec<u32> = (0..40).collect();
        let tree = grow(&m, &stats, 2, &rows, &settings, None);
        let root = &tree.nodes[0];
        assert_eq!(root.threshold, 19.0, "split midway between 18 and 20");
        assert!(!root.missing_left, "missing rows look like the high side");
        assert_eq!(
            tree.values[tree.nodes[root.left as usize].value as usize],
            1.0
        );
        assert_eq!(
            tree.values[tree.nodes[root.right as usize].value as usize],
            5.0
        );
    }

    #[test]
    fn categories_are_grouped_by_their_mean_response() {
        // Levels A and C have outcome 1, B and D outcome 0: one split must separate {A, C}.
        let mut text = String::from("y,ward\n");
        for i in 0..40 {
            let ward = ["A", "B", "C", "D"][i % 4];
            let y = if ward == "A" || ward == "C" { 1 } else { 0 };
            text += &format!("{y},{ward}\n");
        }
        let (m, _, stats, k) = fixture(&text, "y", &["ward"]);
        let settings = GrowSettings {
            max_depth: Some(1),
            ..GrowSettings::default()
        };
        let rows: Vec<u32> = (0..40).collect();
        let tree = grow(&m, &stats, k, &rows, &settings, None);
        assert_eq!(tree.leaves(), 2);
        let root = &tree.nodes[0];
        let left: Vec<u8> = (0..4).filter(|&b| root.left_bins().contains(b)).collect();
        assert!(left == [1, 3] || left == [0, 2], "left bins {left:?}");
        assert!(
            (root.gain - 20.0).abs() < 1e-9,
            "Gini cost 40·0.5 = 20 falls to 0: {}",
            root.gain
        );
    }

    /// Every distinct value a bin (exact search).
    fn exact_bins(design: &crate::design::Design) -> BinnedMatrix {
        let exact = BinSettings {
            exact: true,
            ..BinSettings::default()
        };
        bin_design(design, exact).unwrap()
    }

    /// Seeded data with many distinct values: y = 1 when a + b > 1 (with 10% flipped).
    /// A seeded xorshift64 stream (Marsaglia 2003) for test data: the same numbers wherever
    /// a test draws from the same seed.
    fn xorshift(mut state: u64) -> impl FnMut() -> u64 {
        move || {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            state
        }
    }

    /// A seeded bootstrap of `n` rows, and 100,000 picks of one predictor in three for a
    /// chooser that drops it (two of three tried a node).
    /// A split found on another predictor (9) with this gain, for a scan to beat.
    fn split_to_beat(gain: f64) -> Split {
        Split {
            gain,
            feature: 9,
            numeric: true,
            threshold_bin: 0,
            next_bin: None,
            categories: BinSet::default(),
            missing_left: false,
            values: (0.0, 0.0),
            left_counts: None,
        }
    }

    /// What two scans must agree on: the gain to the bit, the predictor, the place, the side
    /// of missing values, the kind of split and its categories.
    #[allow(clippy::type_complexity)]
    fn split_key(
        s: &Option<Split>,
    ) -> Option<(u64, (usize, usize, Option<usize>, bool), bool, BinSet)> {
        s.as_ref().map(|s| {
            let place = (s.feature, s.threshold_bin, s.next_bin, s.missing_left);
            (s.gain.to_bits(), place, s.numeric, s.categories)
        })
    }

    /// `fill_rows_classes` for `width` classes (three to eight).
    fn fill_classes(
        hist: &mut [f64],
        column: &[u8],
        rows: &[u32],
        stats: &[f64],
        counts: &[f64],
        width: usize,
    ) -> [u64; 4] {
        match width {
            3 => fill_rows_classes::<u8, 4>(hist, column, rows, stats, counts),
            4 => fill_rows_classes::<u8, 5>(hist, column, rows, stats, counts),
            5 => fill_rows_classes::<u8, 6>(hist, column, rows, stats, counts),
            6 => fill_rows_classes::<u8, 7>(hist, column, rows, stats, counts),
            7 => fill_rows_classes::<u8, 8>(hist, column, rows, stats, counts),
            _ => fill_rows_classes::<u8, 9>(hist, column, rows, stats, counts),
        }
    }

    fn bootstrap_and_picks(n: usize) -> (Vec<u32>, Vec<u64>) {
        let mut draw = xorshift(0x2545_F491_4F6C_DD1Du64);
        let rows = (0..n).map(|_| (draw() % n as u64) as u32).collect();
        let picks = (0..100_000).map(|_| draw() % 3).collect();
        (rows, picks)
    }

    fn many_values(rows: usize) -> String {
        let mut draw = xorshift(0x9E37_79B9_7F4A_7C15u64);
        let mut next = || (draw() % 1_000_000) as f64 / 1_000_000.0;
        let mut text = String::from("y,a,b,c\n");
        for _ in 0..rows {
            let (a, b, c) = (next(), next(), next());
            let y = ((a + b > 1.0) != (next() < 0.1)) as u8;
            let c = if c < 0.05 {
                "NA".to_string()
            } else {
                c.to_string()
            };
            text += &format!("{y},{a},{b},{c}\n");
        }
        text
    }

    #[test]
    fn best_first_growth_stops_at_the_leaf_limit_and_keeps_the_best_splits() {
        let design = design_from_csv(&many_values(2000), "y", &["a", "b", "c"]);
        let (stats, k) = design.row_statistics(false);
        let m = bin_design(&design, BinSettings::default()).unwrap();
        let rows: Vec<u32> = (0..m.rows as u32).collect();
        let full = grow(&m, &stats, k, &rows, &GrowSettings::default(), None);
        for limit in [2, 3, 8, 31] {
            let settings = GrowSettings {
                max_leaves: Some(limit),
                ..GrowSettings::default()
            };
            let t = grow(&m, &stats, k, &rows, &settings, None);
            assert_eq!(t.leaves(), limit);
            // The root split is the same whatever the growth order.
            assert_eq!(t.nodes[0].threshold, full.nodes[0].threshold);
            // Best-first: no leaf left unsplit would have gained more than a split made.
            let made = t.nodes.iter().filter(|n| !n.is_leaf()).map(|n| n.gain);
            let least = made.fold(f64::INFINITY, f64::min);
            assert!(least > 0.0, "limit {limit}");
        }
        let unlimited = GrowSettings {
            max_leaves: Some(1 << 20),
            ..GrowSettings::default()
        };
        assert_eq!(
            grow(&m, &stats, k, &rows, &unlimited, None).leaves(),
            full.leaves(),
            "without a binding limit best-first grows the same number of leaves"
        );
    }

    #[test]
    fn exact_search_visits_every_distinct_value() {
        // 2000 rows, nearly all values distinct: the histogram search has 255 bins, the exact
        // search one per value. A fully grown exact tree fits every training row.
        let design = design_from_csv(&many_values(2000), "y", &["a", "b", "c"]);
        let (stats, k) = design.row_statistics(false);
        let exact = exact_bins(&design);
        assert!(exact.columns[0].bins > 1500, "{}", exact.columns[0].bins);
        let rows: Vec<u32> = (0..exact.rows as u32).collect();
        let tree = grow(&exact, &stats, k, &rows, &GrowSettings::default(), None);
        let Outcome::Classes { codes, .. } = &design.outcome else {
            unreachable!()
        };
        let wrong = (0..exact.rows)
            .filter(|&r| tree.predict_row(&exact, r)[codes[r] as usize] != 1.0)
            .count();
        assert_eq!(wrong, 0);
    }

    #[test]
    fn records_and_training_bins_take_the_same_path() {
        // A tree fitted on half the rows must send every row (seen or not) the same way
        // whether it is read from the training bins or from its raw values.
        use crate::binning::Records;
        use crate::design::PredictorValues;
        use crate::tree::Rows;
        let design = design_from_csv(&many_values(1500), "y", &["a", "b", "c"]);
        let (stats, k) = design.row_statistics(false);
        let mut values = Vec::new();
        for p in &design.predictors {
            let PredictorValues::Numbers(v) = &p.values else {
                unreachable!()
            };
            values.extend_from_slice(v);
        }
        let records = Records::from_columns(design.rows.len(), values);
        for exact in [true, false] {
            let m = bin_design(
                &design,
                BinSettings {
                    exact,
                    ..BinSettings::default()
                },
            )
            .unwrap();
            let half: Vec<u32> = (0..m.rows as u32).step_by(2).collect();
            let tree = grow(&m, &stats, k, &half, &GrowSettings::default(), None);
            let differ = (0..m.rows)
                .filter(|&r| {
                    tree.leaf(Rows::Binned(&m), r) != tree.leaf(Rows::Records(&records), r)
                })
                .count();
            if exact {
                assert_eq!(differ, 0);
            } else {
                // Quantile bins hold several values; a threshold may fall inside a bin the
                // node's rows left empty, so a few unseen rows may differ (never seen rows).
                assert!(half.iter().all(|&r| tree.leaf(Rows::Binned(&m), r as usize)
                    == tree.leaf(Rows::Records(&records), r as usize)));
                assert!(differ < m.rows / 20, "{differ}");
            }
        }
    }

    #[test]
    fn gains_are_the_same_to_the_bit_whichever_build_computes_them() {
        // The dispatching functions (AVX2 on a CPU that has it) against the plain loops, on
        // running sums of random whole and fractional statistics, in every criterion, with
        // and without a least weight (our own consistency rule, no source needed).
        let mut draw = xorshift(0x9E37_79B9_7F4A_7C15u64);
        let mut next = || (draw() % 1000) as f64 / 100.0;
        // Points with a real gain, so the check is not all −∞ = −∞.
        let mut finite = 0;
        for n in [1, 3, 4, 7, 64, 255] {
            let (mut s0, mut s1, mut rows, mut present) = (vec![], vec![], vec![], vec![]);
            let [mut a, mut b, mut c] = [0.0; 3];
            for i in 0..n {
                let empty = i % 5 == 3;
                let here = if empty {
                    0.0
                } else {
                    1.0 + (next() * 10.0).floor()
                };
                a += if empty { 0.0 } else { next() };
                b += if empty { 0.0 } else { next() - 2.0 };
                c += here;
                s0.push(a);
                s1.push(b);
                rows.push(c);
                present.push(here);
            }
            let t = [a + next(), b + 1.0, c + 3.0];
            for criterion in [
                Criterion::Gini,
                Criterion::Entropy,
                Criterion::SquaredError,
                Criterion::Gradient { l2: 1.0 },
            ] {
                for min_weight_leaf in [0.0, 2.5] {
                    let settings = GrowSettings {
                        criterion,
                        min_weight_leaf,
                        min_rows_leaf: 2,
                        ..GrowSettings::default()
                    };
                    let (mut x, mut y) = (vec![0.0; n], vec![0.0; n]);
                    let left = [&s0[..], &s1[..], &rows[..]];
                    point_gains(&mut x, present.iter(), left, t, 7.5, &settings);
                    point_gains_plain(&mut y, present.iter(), left, t, 7.5, &settings);
                    let bits = |v: &[f64]| v.iter().map(|g| g.to_bits()).collect::<Vec<_>>();
                    assert_eq!(bits(&x), bits(&y), "{criterion:?} n {n}");
                    finite += x.iter().filter(|g| g.is_finite()).count();
                    let (i, g) = first_best(&x);
                    let (j, h) = first_best_plain(&x);
                    assert_eq!((i, g.to_bits()), (j, h.to_bits()));
                }
            }
        }
        assert!(finite > 1000, "{finite} points with a real gain");
    }

    #[test]
    fn the_first_best_point_is_the_first_of_the_largest_gains() {
        // Against the plain loop that keeps the first strictly larger gain (our own rule of
        // ties, no source): many ties, both zeros, NaN and −∞, every length up to 40 (whole
        // quads and remainders, the largest in either).
        let mut draw = xorshift(0x9E37_79B9_7F4A_7C15);
        let pool = [1.5, 2.0, 0.0, -0.0, -1.0, f64::NAN, f64::NEG_INFINITY, 2.0];
        for n in 0..=40 {
            for _ in 0..200 {
                let gain: Vec<f64> = (0..n).map(|_| pool[(draw() % 8) as usize]).collect();
                let (mut at, mut best) = (0, f64::NEG_INFINITY);
                for (i, &g) in gain.iter().enumerate() {
                    if g > best {
                        (at, best) = (i, g);
                    }
                }
                let want = (at, best.to_bits());
                for (i, g) in [first_best(&gain), first_best_plain(&gain)] {
                    assert_eq!((i, g.to_bits()), want, "{gain:?}");
                }
            }
        }
    }

    #[test]
    fn a_packed_scan_finds_the_same_split_whichever_build_runs_it() {
        // `scan_packed` (AVX2 on a CPU that has it) and its plain body against
        // `scan_filled_pairs` on the same counts unpacked, on random whole counts in random
        // bins, with and without missing values, a least leaf size and a split to beat or one
        // that ties (our own consistency rule, no source needed). All leave every slot empty.
        let mut draw = xorshift(0x2545_F491_4F6C_DD1Du64);
        let mut next = |m: u64| draw() % m;
        let (mut splits, mut missing_sides) = (0, [0; 2]);
        for round in 0..400 {
            let mut slots = vec![0u64; 256];
            let mut bits = [0u64; 4];
            // First, two bins alike and one missing row (a least leaf of two rows, so it cannot
            // stand alone): sending it left after the first bin and sending it right there
            // gain the same, and the left side, tried first, wins.
            let bins = if round == 0 { 0 } else { 1 + next(40) as usize };
            if round == 0 {
                for (b, p) in [
                    (10, (1 << 32) | 3),
                    (20, (1 << 32) | 3),
                    (255, (1 << 32) | 1),
                ] {
                    slots[b] = p;
                    bits[b >> 6] |= 1 << (b & 63);
                }
            }
            for _ in 0..bins {
                let b = match round % 3 == 0 && next(4) == 0 {
                    true => 255,
                    false => next(255) as usize,
                };
                let rows = 1 + next(6);
                slots[b] += (next(rows + 1) << 32) | rows;
                bits[b >> 6] |= 1 << (b & 63);
            }
            let settings = GrowSettings {
                min_rows_leaf: if round == 0 { 2 } else { 1 + round % 3 },
                ..GrowSettings::default()
            };
            let at = (3, 40.0);
            let reference = |best: &mut Option<Split>| {
                let mut spill = vec![[0.0; 3]; 256];
                for (b, &p) in slots.iter().enumerate() {
                    spill[b] = unpack_counts(p);
                }
                let sums = &mut LeftSums::new();
                scan_filled_pairs::<u8>(&mut spill, bits, at.0, at.1, &settings, sums, best);
                assert!(spill.iter().all(|s| *s == [0.0; 3]));
            };
            let mut alone = None;
            reference(&mut alone);
            let before = match round % 5 {
                3 => Some(next(30) as f64),
                4 => alone.as_ref().map(|s| s.gain),
                _ => None,
            }
            .map(split_to_beat);
            let mut want = before.clone();
            reference(&mut want);
            if round == 0 {
                let w = want.as_ref().expect("a split");
                assert!(w.missing_left && w.threshold_bin == 10, "{w:?}");
            }
            for plain in [false, true] {
                let mut slots = slots.clone();
                let (mut sums, mut best) = (LeftSums::new(), before.clone());
                let sums = &mut sums;
                match plain {
                    false => scan_packed(&mut slots, bits, at, &settings, sums, &mut best),
                    true => scan_packed_plain(&mut slots, bits, at, &settings, sums, &mut best),
                }
                assert!(
                    slots.iter().all(|&s| s == 0),
                    "round {round}: slots emptied"
                );
                assert_eq!(split_key(&best), split_key(&want), "round {round}");
            }
            // The left side's packed counts, which hand the children their totals.
            let mut slots_again = slots.clone();
            let (mut sums, mut best) = (LeftSums::new(), before.clone());
            scan_packed(&mut slots_again, bits, at, &settings, &mut sums, &mut best);
            if let Some(b) = best.as_ref().filter(|b| b.feature == 3) {
                let present: u64 = slots[..=b.threshold_bin].iter().sum();
                let left = present + if b.missing_left { slots[255] } else { 0 };
                assert_eq!(b.left_counts, Some(left), "round {round}");
            }
            splits += usize::from(want.as_ref().is_some_and(|s| s.feature == 3));
            if let Some(s) = want.as_ref().filter(|s| s.feature == 3) {
                missing_sides[usize::from(s.missing_left)] += 1;
            }
        }
        assert!(
            splits > 150 && missing_sides[0] > 10 && missing_sides[1] > 10,
            "{splits} rounds found a split, {missing_sides:?} missing right and left"
        );
    }

    #[test]
    fn screened_gini_gains_pick_the_point_the_exact_gains_pick() {
        // `gini_screen_packed` and `screened_gini_best` against `point_gains` and
        // `first_best` on random running sums of whole counts, with and without missing rows
        // added on the left (our own consistency rule, no source needed): the same place and
        // gain to the bit. Random counts almost never give two points the screen orders the
        // other way (none in 800,000 nodes), so each node is also tried with the winner's
        // screen moved 2⁻⁴⁸·W below another point's (a screen error four times smaller than
        // the band allows): the points recomputed must still include it.
        let mut draw = xorshift(0x5DEE_CE66_D1CE_4E5B);
        let mut next = |m: u64| draw() % m;
        let (mut found, mut moved) = (0, 0);
        for round in 0..20_000 {
            let points = 2 + next(40) as usize;
            let most = 1 + next([4, 60, 3000][round % 3]);
            let mut acc = 0u64;
            let packed: Vec<u64> = (0..points)
                .map(|_| {
                    let c = 1 + next(most);
                    acc += (next(c + 1) << 32) | c;
                    acc
                })
                .collect();
            let missing = match round % 4 {
                0 => {
                    let c = 1 + next(most);
                    (next(c + 1) << 32) | c
                }
                _ => 0,
            };
            let t = unpack_counts(acc + missing);
            let parent = Criterion::Gini.cost(&t[..2]);
            let settings = GrowSettings {
                min_rows_leaf: 1 + round % 3,
                ..GrowSettings::default()
            };
            for add in [0, missing] {
                let mut sums = [vec![0.0; points], vec![0.0; points], vec![0.0; points]];
                let [s0, s1, rows] = &mut sums;
                unpack_all(&packed, add, [s0, s1, rows]);
                let left = [&sums[0][..], &sums[1][..], &sums[2][..]];
                let mut gain = vec![0.0; points];
                let all = std::iter::repeat(&1.0);
                point_gains_plain(&mut gain, all, left, t, parent, &settings);
                let want = first_best_plain(&gain);
                let mut screen = vec![0.0; points];
                gini_screen_packed(&mut screen, &packed, add, t, parent, &settings);
                let unpacked = |i: usize| unpack_counts(packed[i] + add);
                let got = screened_gini_best(&screen, unpacked, t, parent);
                assert_eq!(
                    (got.0, got.1.to_bits()),
                    (want.0, want.1.to_bits()),
                    "round {round}, missing rows added {add}"
                );
                if want.1 == f64::NEG_INFINITY {
                    continue;
                }
                found += 1;
                let others = (0..points).filter(|&i| i != want.0).map(|i| screen[i]);
                let top = others.fold(f64::NEG_INFINITY, f64::max);
                if top > f64::NEG_INFINITY {
                    moved += 1;
                    screen[want.0] = top - t[2] * f64::powi(2.0, -48);
                    let got = screened_gini_best(&screen, unpacked, t, parent);
                    let (got, want) = ((got.0, got.1.to_bits()), (want.0, want.1.to_bits()));
                    assert_eq!(got, want, "round {round}, the winner's screen moved down");
                }
            }
        }
        assert!(
            found > 30_000 && moved > 20_000,
            "{found} splits, {moved} moved"
        );
    }

    #[test]
    fn a_group_scan_finds_what_scanning_its_predictors_one_by_one_finds() {
        // `scan_group` (AVX2 on a CPU that has it) and its plain body against `scan_packed` on
        // each predictor in turn, on random nodes: the same rows in random bins of one to five
        // predictors, some predictors copies of an earlier one (so their gains tie and the
        // earlier must win), a least leaf size, and a split to beat or one that ties (our own
        // consistency rule, no source needed). Both leave every slot empty.
        let mut draw = xorshift(0x9E6C_63D0_676A_9A99u64);
        let mut next = |m: u64| draw() % m;
        let (mut splits, mut later, mut copies_won) = (0, 0, 0);
        for round in 0..600 {
            let rows: Vec<u64> = (0..2 + next(30))
                .map(|_| {
                    let c = 1 + next(4);
                    (next(c + 1) << 32) | c
                })
                .collect();
            let places = group_places(rows.len(), &mut next);
            let predictors = places.len();
            let filled = |k: usize| {
                let (mut slots, mut bits) = (vec![0u64; 256], [0u64; 4]);
                for (&p, &b) in rows.iter().zip(&places[k]) {
                    slots[b] += p;
                    bits[b >> 6] |= 1 << (b & 63);
                }
                (slots, bits)
            };
            let settings = GrowSettings {
                min_rows_leaf: 1 + round % 3,
                ..GrowSettings::default()
            };
            let total: u64 = rows.iter().sum();
            let parent_cost = Criterion::Gini.cost(&unpack_counts(total)[..2]);
            let mut alone = None;
            for k in 0..predictors {
                let (mut slots, bits) = filled(k);
                let (sums, at) = (&mut LeftSums::new(), (20 + k, parent_cost));
                scan_packed(&mut slots, bits, at, &settings, sums, &mut alone);
            }
            let before = match round % 5 {
                3 => Some(parent_cost * next(4) as f64 / 4.0),
                4 => alone.as_ref().map(|s| s.gain),
                _ => None,
            }
            .map(split_to_beat);
            let mut want = before.clone();
            for k in 0..predictors {
                let (mut slots, bits) = filled(k);
                let (sums, at) = (&mut LeftSums::new(), (20 + k, parent_cost));
                scan_packed(&mut slots, bits, at, &settings, sums, &mut want);
            }
            for plain in [false, true] {
                let mut group = GroupPoints::new();
                let mut best = before.clone();
                for k in 0..predictors {
                    let (mut slots, bits) = filled(k);
                    group.gather(&mut slots, bits, 20 + k);
                    assert!(
                        slots.iter().all(|&s| s == 0),
                        "round {round}: slots emptied"
                    );
                }
                match plain {
                    false => scan_group(&mut group, parent_cost, &settings, &mut best),
                    true => scan_group_plain(&mut group, parent_cost, &settings, &mut best),
                }
                assert_eq!(split_key(&best), split_key(&want), "round {round}");
                let counts = |s: &Option<Split>| s.as_ref().map(|s| s.left_counts);
                assert_eq!(counts(&best), counts(&want), "round {round}");
                assert_eq!((group.used, group.gathered), (0, 0), "emptied");
            }
            if let Some(w) = want.as_ref().filter(|w| w.feature >= 20) {
                splits += 1;
                later += usize::from(w.feature > 20);
                let k = w.feature - 20;
                copies_won += usize::from(places[..k].iter().any(|p| *p == places[k]));
            }
        }
        // The rounds must exercise what they are for: splits found, some by a later
        // predictor, and never by a copy whose original came first.
        assert!(
            splits > 300 && later > 50,
            "{splits} splits, {later} by a later predictor"
        );
        assert_eq!(copies_won, 0, "a tie went to the later copy");
    }

    /// The bins of a node's `rows` rows in one to [`BATCH`] predictors of a group, drawn by
    /// `next`: each predictor's at random among a few dozen, or (one time in three after the
    /// first) a copy of an earlier predictor's, so that their gains tie.
    fn group_places(rows: usize, next: &mut impl FnMut(u64) -> u64) -> Vec<Vec<usize>> {
        let spread = 2 + next(60);
        let predictors = 1 + next(BATCH as u64) as usize;
        let mut places: Vec<Vec<usize>> = Vec::new();
        for k in 0..predictors {
            let copy = k > 0 && next(3) == 0;
            places.push(match copy {
                true => places[next(k as u64) as usize].clone(),
                false => (0..rows).map(|_| next(spread) as usize).collect(),
            });
        }
        places
    }

    /// A group scan's signature ([`scan_group`] and the others, and their plain bodies).
    type GroupScan = fn(&mut GroupPoints, f64, &GrowSettings, &mut Option<Split>);

    /// A group scan of float slots (`gather`, then `scans`: the AVX2-or-plain build and the
    /// plain body) against `scan_filled_sums` on each predictor in turn, on 600 random nodes
    /// of rows drawn by `row` (one to three draws, values whose sums round, so each
    /// predictor's totals may differ from another's in the last place; the node's cost from
    /// `cost_of` its rows), with copied predictors, a least leaf size, a split to beat or one
    /// that ties (our own consistency rule, no source needed).
    fn check_group_of_sums<const N: usize>(
        seed: u64,
        criterion: Criterion,
        row: impl Fn(&mut dyn FnMut(u64) -> u64) -> [f64; N],
        cost_of: impl Fn(&[[f64; N]]) -> f64,
        gather: fn(&mut GroupPoints, &mut [[f64; N]], [u64; 4], usize),
        scans: [GroupScan; 2],
    ) {
        let mut draw = xorshift(seed);
        let mut next = |m: u64| draw() % m;
        let (mut splits, mut later, mut totals_differ) = (0, 0, 0);
        for round in 0..600 {
            let rows: Vec<[f64; N]> = (0..2 + next(30)).map(|_| row(&mut next)).collect();
            let places = group_places(rows.len(), &mut next);
            let predictors = places.len();
            let filled = |k: usize| {
                let (mut slots, mut bits) = (vec![[0.0; N]; 256], [0u64; 4]);
                for (row, &b) in rows.iter().zip(&places[k]) {
                    for (a, v) in slots[b].iter_mut().zip(row) {
                        *a += v;
                    }
                    bits[b >> 6] |= 1 << (b & 63);
                }
                (slots, bits)
            };
            let settings = GrowSettings {
                criterion,
                min_rows_leaf: 1 + round % 3,
                ..GrowSettings::default()
            };
            let parent_cost = cost_of(&rows);
            let by_one = |best: &mut Option<Split>| {
                let mut sums = Vec::new();
                for k in 0..predictors {
                    let (mut slots, bits) = filled(k);
                    let at = (255, 20 + k, parent_cost);
                    let left = &mut LeftSums::new();
                    scan_filled_sums(&mut slots, bits, at, &settings, left, best);
                    let used = bits.iter().map(|w| w.count_ones() as usize).sum::<usize>();
                    sums.push((left.s0[used - 1].to_bits(), left.s1[used - 1].to_bits()));
                }
                sums
            };
            let mut alone = None;
            let sums = by_one(&mut alone);
            totals_differ += usize::from(sums.iter().any(|&t| t != sums[0]));
            let before = match round % 5 {
                3 => Some(parent_cost * next(4) as f64 / 4.0),
                4 => alone.as_ref().map(|s| s.gain),
                _ => None,
            }
            .map(split_to_beat);
            let mut want = before.clone();
            by_one(&mut want);
            for scan in scans {
                let mut group = GroupPoints::new();
                let mut best = before.clone();
                for k in 0..predictors {
                    let (mut slots, bits) = filled(k);
                    gather(&mut group, &mut slots, bits, 20 + k);
                    assert!(
                        slots.iter().all(|s| *s == [0.0; N]),
                        "round {round}: emptied"
                    );
                }
                scan(&mut group, parent_cost, &settings, &mut best);
                assert_eq!(split_key(&best), split_key(&want), "round {round}");
            }
            if let Some(w) = want.as_ref().filter(|w| w.feature >= 20) {
                splits += 1;
                later += usize::from(w.feature > 20);
            }
        }
        assert!(
            splits > 300 && later > 50 && totals_differ > 50,
            "{splits} splits, {later} by a later predictor, {totals_differ} rounds whose \
             predictors' totals differ"
        );
    }

    #[test]
    fn a_group_scan_of_number_outcomes_finds_what_scanning_one_by_one_finds() {
        // `scan_group_units`: a number outcome's `(s1, rows)` slots, values with many
        // decimals (see `check_group_of_sums`).
        check_group_of_sums(
            0xD1B5_4A32_D192_ED03,
            Criterion::SquaredError,
            |next| {
                let c = (1 + next(3)) as f64;
                [c * (next(1_000_000) as f64 / 7919.0 - 60.0), c]
            },
            |rows| {
                let (t1, tc) = rows
                    .iter()
                    .fold((0.0, 0.0), |(a, b), r| (a + r[0], b + r[1]));
                Criterion::SquaredError.cost(&[tc, t1])
            },
            GroupPoints::gather_units,
            [scan_group_units, scan_group_units_plain],
        );
    }

    #[test]
    fn a_group_scan_of_weighted_sums_finds_what_scanning_one_by_one_finds() {
        // `scan_group_sums`: two classes with fractional class weights, each row's
        // `(s0, s1, rows)` its weight on its class times its draws (see
        // `check_group_of_sums`).
        let weights = [0.618_033_988_7, 2.3];
        check_group_of_sums(
            0x3C6E_F372_FE94_F82B,
            Criterion::Gini,
            |next| {
                let (c, class) = ((1 + next(3)) as f64, next(2) as usize);
                let mut row = [0.0, 0.0, c];
                row[class] = c * weights[class];
                row
            },
            |rows| {
                let t = rows
                    .iter()
                    .fold([0.0; 2], |t, r| [t[0] + r[0], t[1] + r[1]]);
                Criterion::Gini.cost(&t)
            },
            GroupPoints::gather_sums,
            [scan_group_sums, scan_group_sums_plain],
        );
    }

    /// [`many_values`] with three classes: p, q, and r for every seventh row.
    fn three_classes(rows: usize) -> String {
        let text = many_values(rows);
        let mut lines = text.lines();
        let mut three = format!("{}\n", lines.next().unwrap());
        for (i, line) in lines.enumerate() {
            let (y, rest) = line.split_once(',').unwrap();
            let y = match (i % 7, y) {
                (0, _) => "r",
                (_, "0") => "p",
                _ => "q",
            };
            three += &format!("{y},{rest}\n");
        }
        three
    }

    #[test]
    fn three_classes_packed_grow_the_tree_their_numbers_grow() {
        // A forest's tree of three classes (a bootstrap with repeats, two of three predictors
        // a node, missing values in c) from whole counts packed in one u64, and again from the
        // statistics as numbers: counts are whole, so the trees must be equal to the bit, in
        // both class criteria. Our own consistency rule, no source needed.
        let design = design_from_csv(&three_classes(3000), "y", &["a", "b", "c"]);
        let (stats, _) = design.row_statistics(false);
        let m = bin_design(&design, BinSettings::default()).unwrap();
        let (rows, _) = bootstrap_and_picks(m.rows);
        packed_and_unpacked_grow_the_same_tree(&design, true);
        // Fractional class weights are not packed; whole ones come back as they went in.
        let (kept, counts) = collapse_counts(&rows, m.rows);
        let (balanced, _) = design.row_statistics(true);
        assert!(pack_classes3(&kept, &balanced, &counts, Criterion::Gini).is_empty());
        let packed = pack_classes3(&kept, &stats, &counts, Criterion::Gini);
        for &r in &kept {
            let r = r as usize;
            let want: Vec<f64> = stats[3 * r..3 * r + 3]
                .iter()
                .map(|s| counts[r] * s)
                .collect();
            let got = unpack_classes3(packed[r]);
            assert_eq!((&got[..3], got[3]), (&want[..], counts[r]));
        }
    }

    #[test]
    fn three_classes_counted_once_grow_the_tree_their_repeats_grow() {
        // Three classes (no pairs, no packing): a bootstrap with repeats, each row kept once
        // and its statistics multiplied by its draws as nodes sum them, against the same
        // rows given once with the statistics multiplied beforehand. Counts are whole, so the
        // trees must be equal to the bit: a forest's (two of three predictors a node) and a
        // bagged tree's (every predictor, so large nodes sum dense histograms). Our own
        // consistency rule, no source needed.
        let design = design_from_csv(&three_classes(3000), "y", &["a", "b", "c"]);
        let (stats, k) = design.row_statistics(false);
        assert_eq!(k, 3);
        let m = bin_design(&design, BinSettings::default()).unwrap();
        let (rows, picks) = bootstrap_and_picks(m.rows);
        let (kept, counts) = collapse_counts(&rows, m.rows);
        assert!(kept.len() < rows.len() && counts.iter().any(|&c| c > 1.0));
        let multiplied: Vec<f64> = (0..m.rows * k).map(|i| counts[i / k] * stats[i]).collect();
        for forest in [true, false] {
            let grow_one = |rows: &[u32], stats: &[f64]| {
                let mut at = picks.iter();
                let mut choose = |c: &mut Vec<usize>| {
                    c.remove(*at.next().unwrap() as usize);
                };
                let choose: Option<PredictorChooser<'_>> = forest.then_some(&mut choose);
                let settings = GrowSettings::default();
                grow_rows(
                    &m,
                    stats,
                    k,
                    rows,
                    &settings,
                    choose,
                    Constraints::default(),
                )
            };
            let (a, b) = (grow_one(&rows, &stats), grow_one(&kept, &multiplied));
            assert!(a.tree.leaves() > 100, "{} leaves", a.tree.leaves());
            assert_eq!(a.tree, b.tree, "forest {forest}");
            assert_eq!((a.rows, a.spans), (b.rows, b.spans));
        }
    }

    /// Grows a forest's tree (a bootstrap with repeats, two of three predictors a node) on
    /// `design` with its packed counts (two classes' or, `three`, three classes'), and again
    /// with them cleared, in both class criteria, and requires the same tree to the bit.
    fn packed_and_unpacked_grow_the_same_tree(design: &crate::design::Design, three: bool) {
        let (stats, k) = design.row_statistics(false);
        let m = bin_design(design, BinSettings::default()).unwrap();
        let (rows, picks) = bootstrap_and_picks(m.rows);
        let Cells::Narrow(cells) = &m.cells else {
            panic!("small cells")
        };
        for criterion in [Criterion::Gini, Criterion::Entropy] {
            let settings = GrowSettings {
                criterion,
                ..GrowSettings::default()
            };
            let grow_one = |keep: bool| {
                let mut at = picks.iter();
                let mut choose = |c: &mut Vec<usize>| {
                    c.remove(*at.next().unwrap() as usize);
                };
                let chooser: PredictorChooser<'_> = &mut choose;
                let mut g = Grower::new(&m, cells, &stats, k, &rows, &settings, Some(chooser), &[]);
                let packed = if three {
                    &mut g.classes3
                } else {
                    &mut g.packed
                };
                assert!(!packed.is_empty(), "whole counts are packed");
                if !keep {
                    packed.clear();
                }
                g.run().tree
            };
            let (a, b) = (grow_one(true), grow_one(false));
            assert!(a.leaves() > 100, "{} leaves", a.leaves());
            assert_eq!(a, b, "{criterion:?}");
        }
    }

    #[test]
    fn packed_counts_grow_the_tree_the_pairs_grow() {
        // A forest's tree (a bootstrap with repeats, two of three predictors a node, missing
        // values in c) from packed counts, and again from the statistics as numbers: counts
        // are whole, so the trees must be equal to the bit, in both class criteria.
        let design = design_from_csv(&many_values(3000), "y", &["a", "b", "c"]);
        let (stats, _) = design.row_statistics(false);
        let m = bin_design(&design, BinSettings::default()).unwrap();
        let (rows, _) = bootstrap_and_picks(m.rows);
        packed_and_unpacked_grow_the_same_tree(&design, false);
        // Fractional class weights are not packed.
        let (balanced, _) = design.row_statistics(true);
        let (_, pairs) = collapse_repeats(&rows, &balanced, m.rows);
        assert!(pack_counts(&pairs, Criterion::Gini).is_empty());
        let (_, pairs) = collapse_repeats(&rows, &stats, m.rows);
        assert_eq!(pack_counts(&pairs, Criterion::Gini).len(), m.rows);
    }

    #[test]
    fn number_outcomes_summed_as_two_numbers_grow_the_tree_three_grow() {
        // A forest's regression tree (a bootstrap with repeats, two of three predictors a
        // node, missing values in c) with each row's weight read off its count
        // (`Grower::units`), and again from all three numbers: the sums are the same, so the
        // trees must be equal to the bit (our own consistency rule, no source needed).
        let mut draw = xorshift(0x5DEE_CE66_D1CE_4E5Du64);
        let mut next = || (draw() % 1_000_000) as f64 / 1_000_000.0;
        let mut text = String::from("y,a,b,c\n");
        for _ in 0..3000 {
            let (a, b, c) = (next(), next(), next());
            let y = a + 2.0 * b + next();
            let c = match c < 0.05 {
                true => "NA".to_string(),
                false => c.to_string(),
            };
            text += &format!("{y},{a},{b},{c}\n");
        }
        let design = design_from_csv(&text, "y", &["a", "b", "c"]);
        let (stats, k) = design.row_statistics(false);
        let m = bin_design(&design, BinSettings::default()).unwrap();
        let (rows, picks) = bootstrap_and_picks(m.rows);
        let Cells::Narrow(cells) = &m.cells else {
            panic!("small cells")
        };
        let settings = GrowSettings {
            criterion: Criterion::SquaredError,
            ..GrowSettings::default()
        };
        let grow_one = |units: bool| {
            let mut at = picks.iter();
            let mut choose = |c: &mut Vec<usize>| {
                c.remove(*at.next().unwrap() as usize);
            };
            let chooser: PredictorChooser<'_> = &mut choose;
            let mut g = Grower::new(&m, cells, &stats, k, &rows, &settings, Some(chooser), &[]);
            assert!(
                !g.units.is_empty(),
                "rows without weights are summed as two numbers"
            );
            if !units {
                g.units.clear();
            }
            g.run().tree
        };
        let (a, b) = (grow_one(true), grow_one(false));
        assert!(a.leaves() > 1000, "{} leaves", a.leaves());
        assert_eq!(a, b);
        // Row weights other than 1 keep all three numbers.
        let weighted: Vec<f64> = stats
            .chunks_exact(2)
            .enumerate()
            .flat_map(|(i, s)| {
                let w = 1.0 + (i % 3) as f64;
                [w * s[0], w * s[1]]
            })
            .collect();
        let (_, pairs) = collapse_repeats(&rows, &weighted, m.rows);
        assert!(units_of(&pairs).is_empty());
    }

    #[test]
    fn several_classes_scanned_at_fixed_width_find_the_general_scans_split() {
        // `fill_rows_classes`, and `scan` at fixed width (`scan_classes`), against
        // `fill_histogram` and the general loop `scan_general` (our own consistency rule, no
        // source needed): three to eight classes, whole and fractional statistics, rows drawn
        // up to three times, missing values or none, numbers or categories, a least leaf
        // size and a least weight, and a split to beat. The same split to the bit, and every
        // slot emptied.
        let mut draw = xorshift(0x2545_F491_4F6C_DD1Du64);
        let mut next = |m: u64| draw() % m;
        let (mut found, mut missing_sides) = (0, 0);
        for round in 0..400 {
            let width = 3 + round % 6;
            let n = 1 + next(300) as usize;
            let spread = 1 + next(254);
            let column: Vec<u8> = (0..n)
                .map(|_| match round % 3 == 0 && next(5) == 0 {
                    true => u8::MISSING,
                    false => next(spread) as u8,
                })
                .collect();
            let mut stats = vec![0.0; n * width];
            for row in stats.chunks_exact_mut(width) {
                let class = next(width as u64) as usize;
                row[class] = match round % 4 == 1 {
                    true => 0.25 + next(8) as f64 / 4.0,
                    false => 1.0,
                };
            }
            let counts: Vec<f64> = (0..n).map(|_| next(4) as f64).collect();
            let rows: Vec<u32> = (0..n as u32)
                .filter(|&r| counts[r as usize] > 0.0)
                .collect();
            let settings = GrowSettings {
                criterion: if round % 5 == 2 {
                    Criterion::Entropy
                } else {
                    Criterion::Gini
                },
                min_rows_leaf: 1 + round % 3,
                min_weight_leaf: if round % 4 == 3 { 6.5 } else { 0.0 },
                ..GrowSettings::default()
            };
            let stride = width + 1;
            let parent_cost = 10.0 + next(100) as f64;
            let before = (round % 6 == 5).then(|| split_to_beat(next(5) as f64 / 4.0));
            let limits = Limits {
                monotone: 0,
                low: f64::NEG_INFINITY,
                high: f64::INFINITY,
                bounded: false,
            };
            // The general way.
            let mut hist = vec![0.0; 256 * stride];
            let mut touched = Vec::new();
            let sc = (&stats[..], &counts[..]);
            fill_histogram(&mut hist, &mut touched, &column, &rows, None, sc, width);
            let mut order: Vec<u8> = touched.iter().copied().filter(|&b| b != 255).collect();
            order.sort_unstable();
            // Numbers, or every fifth round the bins taken as categories in that order.
            let numeric = round % 5 != 4;
            let (mut sums, mut want) = (ScanSums::new(width), before.clone());
            let at = (255, 3, numeric, parent_cost);
            let sums = &mut sums;
            let (h, o) = (&hist, &order);
            scan_general(
                h, o, at.0, sums, at.1, at.2, at.3, &settings, &limits, &mut want,
            );
            // At fixed width.
            let mut fixed = vec![0.0; 256 * stride];
            let bits = fill_classes(&mut fixed, &column, &rows, &stats, &counts, width);
            assert_eq!(fixed, hist, "round {round}: the same sums in every slot");
            let mut got = before.clone();
            let (f, o) = (&fixed, &order);
            scan(
                f, o, at.0, sums, at.1, at.2, at.3, &settings, &limits, &mut got,
            );
            clear_class_slots(&mut fixed, width, bits);
            assert!(
                fixed.iter().all(|&h| h == 0.0),
                "round {round}: slots emptied"
            );
            assert_eq!(split_key(&got), split_key(&want), "round {round}");
            found += usize::from(want.as_ref().is_some_and(|s| s.feature == 3));
            missing_sides += usize::from(want.as_ref().is_some_and(|s| s.missing_left));
        }
        assert!(
            found > 200 && missing_sides > 10,
            "{found} splits, {missing_sides} missing left"
        );
    }

    #[test]
    fn several_classes_scanned_in_flat_loops_find_the_fixed_width_scans_split() {
        // `scan_filled_classes` (three to eight classes, Gini, no missing values, any weights)
        // and, for three whole classes, `scan_group3` (packed counts) against `scan_classes`
        // on the same slots (our own consistency rule, no source needed): whole and
        // fractional statistics, rows drawn up to three times, a least leaf size and a least
        // weight, a split to beat or one that ties. The same split to the bit, and every slot
        // emptied.
        let mut draw = xorshift(0xD1B5_4A32_D192_ED03u64);
        let mut next = |m: u64| draw() % m;
        let (mut found, mut kept_before, mut packed_rounds) = (0, 0, 0);
        for round in 0..900 {
            let width = 3 + round % 6;
            let n = 1 + next(300) as usize;
            let spread = 1 + next(255);
            let column: Vec<u8> = (0..n).map(|_| next(spread) as u8).collect();
            // Each choice drawn, so every width meets each of them.
            let fractional = next(3) == 0;
            let mut stats = vec![0.0; n * width];
            for row in stats.chunks_exact_mut(width) {
                row[next(width as u64) as usize] = match fractional {
                    true => 0.25 + next(8) as f64 / 3.0,
                    false => 1.0,
                };
            }
            let counts: Vec<f64> = (0..n).map(|_| next(4) as f64).collect();
            let rows: Vec<u32> = (0..n as u32)
                .filter(|&r| counts[r as usize] > 0.0)
                .collect();
            let settings = GrowSettings {
                min_rows_leaf: 1 + next(3) as usize,
                min_weight_leaf: if next(4) == 0 { 6.5 } else { 0.0 },
                ..GrowSettings::default()
            };
            let parent_cost = 10.0 + next(100) as f64;
            let mut hist = vec![0.0; 256 * (width + 1)];
            let bits = fill_classes(&mut hist, &column, &rows, &stats, &counts, width);
            let mut order = Vec::new();
            bins_in_order(bits, &mut order);
            let at = (255, 3, true, parent_cost);
            let fixed = |h: &[f64], best: &mut Option<Split>| match width {
                3 => scan_classes::<u8, 4>(h, &order, at, &settings, best),
                4 => scan_classes::<u8, 5>(h, &order, at, &settings, best),
                5 => scan_classes::<u8, 6>(h, &order, at, &settings, best),
                6 => scan_classes::<u8, 7>(h, &order, at, &settings, best),
                7 => scan_classes::<u8, 8>(h, &order, at, &settings, best),
                _ => scan_classes::<u8, 9>(h, &order, at, &settings, best),
            };
            let mut alone = None;
            fixed(&hist, &mut alone);
            let to_beat = match next(6) {
                5 => Some(next(5) as f64 / 4.0),
                4 => alone.map(|s| s.gain),
                _ => None,
            };
            let before = to_beat.map(split_to_beat);
            let mut want = before.clone();
            fixed(&hist, &mut want);
            let mut got = before.clone();
            let mut sums = LeftSums::new();
            let at = (width, 3, parent_cost);
            scan_filled_classes_of(&mut hist, bits, at, &settings, &mut sums, &mut got);
            assert!(
                hist.iter().all(|&h| h == 0.0),
                "round {round}: slots emptied"
            );
            if width == 3 && !fractional {
                // Packed: three whole classes.
                let packed = pack_classes3(&rows, &stats, &counts, Criterion::Gini);
                assert!(!packed.is_empty(), "round {round}: whole counts pack");
                let mut slots = vec![0u64; 256];
                for &r in &rows {
                    slots[column[r as usize] as usize] += packed[r as usize];
                }
                let (mut group, mut packed_best) = (GroupPoints::new(), before.clone());
                group.gather(&mut slots, bits, 3);
                scan_group3(&mut group, parent_cost, &settings, &mut packed_best);
                assert!(
                    slots.iter().all(|&s| s == 0),
                    "round {round}: packed emptied"
                );
                assert_eq!(split_key(&packed_best), split_key(&want), "round {round}");
                packed_rounds += 1;
            }
            assert_eq!(split_key(&got), split_key(&want), "round {round}");
            found += usize::from(want.as_ref().is_some_and(|s| s.feature == 3));
            kept_before +=
                usize::from(before.is_some() && want.as_ref().is_some_and(|s| s.feature == 9));
        }
        assert!(
            found > 450 && kept_before > 100 && packed_rounds > 80,
            "{found} splits, {kept_before} kept, {packed_rounds} packed"
        );
    }

    #[test]
    fn nodes_under_the_dense_size_sum_their_own_rows() {
        // A number outcome's sums are not whole: a histogram taken as the parent's minus the
        // sibling's rounds differently from one summed over the node's own rows, so a node
        // that inherited its sums by subtraction could pick another split in a near tie.
        // Nodes under `DENSE_MIN_ROWS` sum their own rows, as exact (u16) cells always do:
        // on 3,000 rows of few values (the same bins either way) the fully grown trees are
        // equal (our own rule, no source needed).
        let mut draw = xorshift(0x2545_F491_4F6C_DD1D);
        let mut next = |m: u64| draw() % m;
        let mut text = String::from("y,a,b,c\n");
        for _ in 0..3000 {
            let (a, b, c) = (next(60), next(40), next(25));
            let y = a as f64 * 0.1 + (b as f64 / 7.0).sin() + next(1000) as f64 / 997.0;
            text += &format!("{y},{a},{b},{c}\n");
        }
        let design = design_from_csv(&text, "y", &["a", "b", "c"]);
        let (stats, k) = design.row_statistics(false);
        let narrow = bin_design(&design, BinSettings::default()).unwrap();
        let wide = exact_bins(&design);
        let rows: Vec<u32> = (0..narrow.rows as u32).collect();
        let settings = GrowSettings {
            criterion: Criterion::SquaredError,
            ..GrowSettings::default()
        };
        let a = grow(&narrow, &stats, k, &rows, &settings, None);
        let b = grow(&wide, &stats, k, &rows, &settings, None);
        assert!(a.leaves() > 500, "{} leaves", a.leaves());
        assert_eq!(a, b);
    }

    #[test]
    fn dense_histograms_by_subtraction_grow_the_same_tree() {
        // 6000 rows with at most 200 distinct values per predictor: the default (u8) cells
        // use dense histograms and subtraction in nodes of 1024 rows or more; exact (u16)
        // cells never do, and with so few values their bins are the same. Class counts are
        // whole numbers, so the sums are exact either way and the trees must be equal.
        let mut draw = xorshift(0x5DEE_CE66_D1CE_4E5Bu64);
        let mut next = |m: u64| draw() % m;
        let mut text = String::from("y,a,b,c,ward\n");
        for _ in 0..6000 {
            let (a, b, c) = (next(200), next(150), next(100));
            let ward = ["east", "west", "north"][next(3) as usize];
            let y = ["p", "q", "r"][((a + 2 * b + 3 * c + next(120)) / 150 % 3) as usize];
            let c = if next(20) == 0 {
                "NA".to_string()
            } else {
                c.to_string()
            };
            text += &format!("{y},{a},{b},{c},{ward}\n");
        }
        let design = design_from_csv(&text, "y", &["a", "b", "c", "ward"]);
        let (stats, k) = design.row_statistics(false);
        let narrow = bin_design(&design, BinSettings::default()).unwrap();
        let wide = exact_bins(&design);
        let rows: Vec<u32> = (0..narrow.rows as u32).collect();
        for settings in [
            GrowSettings::default(),
            GrowSettings {
                max_leaves: Some(40),
                criterion: Criterion::Entropy,
                ..GrowSettings::default()
            },
        ] {
            let a = grow(&narrow, &stats, k, &rows, &settings, None);
            let b = grow(&wide, &stats, k, &rows, &settings, None);
            assert!(a.leaves() > 40 || settings.max_leaves.is_some());
            assert_eq!(a, b);
        }
    }
}
