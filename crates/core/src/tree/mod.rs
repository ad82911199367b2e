//! Decision trees on binned predictors.
//!
//! - [`criterion`]: how good a node is (Gini, entropy, squared error) from summed row
//!   statistics;
//! - [`grower`]: grows a tree from a [`crate::binning::BinnedMatrix`], per-row statistics and
//!   settings, by histogram split search; it never knows which ensemble asks (invariant 3);
//! - [`Tree`] (here): the flat, prediction-time form: an array of nodes, each split sending a
//!   set of bins left (numbers: the bins up to a threshold; categories: any set), with the
//!   missing-value bin in that set or not.

pub mod criterion;
pub mod grower;

use crate::binning::{BinnedMatrix, MISSING_BIN};

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
    /// Bins sent left (the missing bin included when missing values go left).
    pub left_bins: BinSet,
    /// For number splits: the highest bin sent left.
    pub threshold_bin: Option<u8>,
    /// For number splits: values up to this go left. Midway between the largest training
    /// value on the left and the smallest on the right, computed as `a/2 + b/2` (the rule of
    /// scikit-learn's sort-based splitter, so exact-mode trees agree to the last digit).
    pub threshold: Option<f64>,
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
    /// The leaf reached by row `row` of `binned`.
    pub fn leaf_of(&self, binned: &BinnedMatrix, row: usize) -> usize {
        let mut i = 0usize;
        loop {
            let n = &self.nodes[i];
            if n.is_leaf() {
                return i;
            }
            let bin = binned.column(n.feature as usize)[row];
            i = if n.left_bins.contains(bin) {
                n.left
            } else {
                n.right
            } as usize;
        }
    }

    /// The output values of the leaf reached by `row`.
    pub fn predict_row(&self, binned: &BinnedMatrix, row: usize) -> &[f64] {
        let n = &self.nodes[self.leaf_of(binned, row)];
        &self.values[n.value as usize..n.value as usize + self.outputs]
    }

    pub fn leaves(&self) -> usize {
        self.nodes.iter().filter(|n| n.is_leaf()).count()
    }

    pub fn depth(&self) -> usize {
        fn depth(t: &Tree, i: usize) -> usize {
            let n = &t.nodes[i];
            if n.is_leaf() {
                0
            } else {
                1 + depth(t, n.left as usize).max(depth(t, n.right as usize))
            }
        }
        depth(self, 0)
    }
}

/// Whether missing values go left at a node.
pub fn missing_goes_left(node: &Node) -> bool {
    node.left_bins.contains(MISSING_BIN)
}
