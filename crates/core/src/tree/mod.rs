//! Decision trees on binned predictors.
//!
//! - [`criterion`]: how good a node is (Gini, entropy, squared error) from summed row
//!   statistics;
//! - [`grower`]: grows a tree from a [`crate::binning::BinnedMatrix`], per-row statistics and
//!   settings, by histogram split search; it never knows which ensemble asks (invariant 3);
//! - [`prune`]: minimal cost-complexity pruning of a single tree and its pruning path;
//! - [`Tree`] (here): the flat, prediction-time form: an array of nodes, each split a number
//!   threshold (training bins up to `threshold_bin`; new values up to `threshold`) or a set of
//!   category bins, with the side missing values take.

pub mod criterion;
pub mod grower;
pub mod prune;
pub mod walk;

use crate::binning::{BinnedMatrix, Records};

/// The bins that go to the left child: 256 bits, bin `b` is bit `b`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct BinSet(pub [u64; 4]);

impl BinSet {
    pub fn contains(&self, bin: u8) -> bool {
        (self.0[(bin >> 6) as usize] >> (bin & 63)) & 1 == 1
    }
    pub fn insert(&mut self, bin: u8) {
        self.0[(bin >> 6) as usize] |= 1 << (bin & 63);
    }
    /// Bins `0..=last`.
    pub fn up_to(last: u8) -> BinSet {
        let mut s = BinSet::default();
        for b in 0..=last {
            s.insert(b);
        }
        s
    }
}

/// One node of a fitted tree. A leaf has `left == 0` (the root is never a child).
#[derive(Debug, Clone, PartialEq)]
pub struct Node {
    pub feature: u32,
    /// A split on a number (`threshold`) or on categories (`categories`).
    pub numeric: bool,
    /// Number splits: the highest training bin sent left.
    pub threshold_bin: u16,
    /// Number splits: values up to this go left. Midway between the largest training value
    /// on the left and the smallest on the right, computed as `a/2 + b/2` (the rule of
    /// scikit-learn's sort-based splitter, so exact-mode trees agree to the last digit).
    /// 0 (unused) for category splits and leaves.
    pub threshold: f64,
    /// Category splits: the bins sent left ([`Node::left_bins`]), boxed and `None` when
    /// empty, so the number splits and leaves that make up most trees do not each carry 32
    /// bytes (a node: 80 -> 56 bytes; a 300-tree forest on 50,000 rows holds millions).
    pub categories: Option<Box<BinSet>>,
    /// Where missing values go: chosen in training by gain when the node's rows had some,
    /// otherwise the side that got more rows. Also taken by category values the training
    /// rows of this node never had.
    pub missing_left: bool,
    pub left: u32,
    pub right: u32,
    /// Rows (weighted) that reached the node in training.
    pub weight: f64,
    /// Impurity decrease of this node's split, weighted (0 for leaves).
    pub gain: f64,
    /// Offset of this node's values in [`Tree::values`] (`outputs` values per node).
    pub value: u32,
}

impl Node {
    pub fn is_leaf(&self) -> bool {
        self.left == 0
    }

    /// Whether a row with this training bin (`None`: missing) goes left.
    #[inline]
    pub fn bin_goes_left(&self, bin: Option<usize>) -> bool {
        match bin {
            None => self.missing_left,
            Some(b) if self.numeric => b <= self.threshold_bin as usize,
            Some(b) => b < 256 && self.left_bins().contains(b as u8),
        }
    }

    /// Whether a record's value goes left: a number compared with the threshold, or a
    /// category's training bin (see [`crate::binning::Records`]); NaN is missing.
    #[inline]
    pub fn value_goes_left(&self, x: f64) -> bool {
        if x.is_nan() {
            self.missing_left
        } else if self.numeric {
            x <= self.threshold
        } else {
            (0.0..256.0).contains(&x) && self.left_bins().contains(x as u8)
        }
    }

    /// The category bins sent left (empty for number splits and leaves).
    pub fn left_bins(&self) -> &BinSet {
        const EMPTY: &BinSet = &BinSet([0; 4]);
        self.categories.as_deref().unwrap_or(EMPTY)
    }

    /// [`Node::categories`] holding `bins`: `None` when empty, so equal sets compare equal.
    pub fn boxed_bins(bins: BinSet) -> Option<Box<BinSet>> {
        (bins != BinSet::default()).then(|| Box::new(bins))
    }

    /// A leaf (children and split fields unset).
    pub fn leaf() -> Node {
        Node {
            feature: 0,
            numeric: false,
            threshold_bin: 0,
            threshold: 0.0,
            categories: None,
            missing_left: false,
            left: 0,
            right: 0,
            weight: 0.0,
            gain: 0.0,
            value: 0,
        }
    }
}

/// The rows a model predicts: training rows by their bins, or new records by their values.
#[derive(Debug, Clone, Copy)]
pub enum Rows<'a> {
    Binned(&'a BinnedMatrix),
    Records(&'a Records),
}

impl Rows<'_> {
    pub fn len(&self) -> usize {
        match self {
            Rows::Binned(b) => b.rows,
            Rows::Records(r) => r.rows,
        }
    }

    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Whether row `row` goes to the left child of split node `node`.
    #[inline]
    pub fn goes_left(&self, node: &Node, row: usize) -> bool {
        match self {
            Rows::Binned(b) => node.bin_goes_left(b.bin(node.feature as usize, row)),
            Rows::Records(r) => node.value_goes_left(r.value(node.feature as usize, row)),
        }
    }
}

/// A fitted tree in its flat prediction-time form.
#[derive(Debug, Clone, PartialEq)]
pub struct Tree {
    pub nodes: Vec<Node>,
    /// `outputs` values per node: class probabilities, or the mean outcome.
    pub values: Vec<f64>,
    pub outputs: usize,
}

impl Tree {
    /// The leaf reached by row `row`.
    pub fn leaf(&self, rows: Rows<'_>, row: usize) -> usize {
        let mut i = 0usize;
        loop {
            let n = &self.nodes[i];
            if n.is_leaf() {
                return i;
            }
            i = if rows.goes_left(n, row) {
                n.left
            } else {
                n.right
            } as usize;
        }
    }

    /// The output values of node `i`.
    pub fn node_values(&self, i: usize) -> &[f64] {
        let v = self.nodes[i].value as usize;
        &self.values[v..v + self.outputs]
    }

    /// The output values of the leaf reached by row `row`.
    pub fn predict(&self, rows: Rows<'_>, row: usize) -> &[f64] {
        self.node_values(self.leaf(rows, row))
    }

    /// The output values of the leaf reached by training row `row` of `binned`.
    pub fn predict_row(&self, binned: &BinnedMatrix, row: usize) -> &[f64] {
        self.predict(Rows::Binned(binned), row)
    }

    pub fn leaves(&self) -> usize {
        self.nodes.iter().filter(|n| n.is_leaf()).count()
    }

    /// Levels of splits on the longest path from the root; iterative, so a very deep tree
    /// cannot overflow the stack.
    pub fn depth(&self) -> usize {
        let mut deepest = 0;
        let mut stack = vec![(0usize, 0usize)];
        while let Some((i, d)) = stack.pop() {
            let Some(n) = self.nodes.get(i) else { continue };
            if n.is_leaf() {
                deepest = deepest.max(d);
            } else {
                stack.push((n.left as usize, d + 1));
                stack.push((n.right as usize, d + 1));
            }
        }
        deepest
    }
}

/// The numbers `0..n` for which `keep` holds, in order. Every number is written and the next
/// place taken only by a kept one, so there is no branch on `keep`, which is random where it
/// is used (the rows a bootstrap drew, the rows a tree left out of its bag).
pub(crate) fn rows_where(n: usize, keep: impl Fn(usize) -> bool) -> Vec<u32> {
    let mut kept = vec![0u32; n + 1];
    let mut k = 0;
    for r in 0..n {
        kept[k] = r as u32;
        k += usize::from(keep(r));
    }
    kept.truncate(k);
    kept
}
