//! Per-record contributions by TreeSHAP, path-dependent form (Lundberg, Erion, Chen et al.,
//! Nat Mach Intell 2020;2:56–67, Algorithm 2; first in Lundberg, Erion & Lee,
//! arXiv:1802.03888). For each record and predictor, the exact Shapley value of the model's
//! additive form ([`Additive`]) when a predictor left out of a coalition is averaged over
//! the tree's training weight (each split's cover) below every split on it. Missing values
//! follow each split's stored side, as in prediction. Contributions plus the base value
//! (the cover-weighted mean of the leaves) equal the record's sum exactly (local accuracy).
//!
//! Cost: Algorithm 2 takes O(leaves · depth²) per tree and record, mostly divisions. For
//! many records a tree's work is shared instead (the idea of Fast TreeSHAP v2, Yang 2021,
//! arXiv:2109.09847, from memory): each leaf's contribution factors depend only on which of
//! its path's predictors the record satisfies (2^d patterns for d distinct predictors), so
//! they are computed once per tree ([`Table`]). Leaves are further taken together in small
//! subtrees ([`Group`]: a node with at most three internal nodes below it): a record's
//! patterns at those leaves follow from its pattern at the subtree's root and the sides it
//! takes inside, so one table per subtree, indexed by both, holds the sum of its leaves'
//! factors per predictor. Each record then costs one pass over the nodes above the
//! subtrees plus one addition per subtree and predictor (about a quarter of one per leaf
//! and path predictor for a full depth-8 tree). Rows are done tree by tree in blocks, so
//! each tree's nodes and tables stay in cache. The sums run in another order than
//! Algorithm 2's; the tests hold them equal within 1e-12.

use crate::binning::Records;
use crate::error::{Error, ErrorKind, Result};
use crate::explain::{left_share, Additive};
use crate::model::Model;
use crate::progress::{Flow, Progress};
use crate::tree::Tree;

/// Contributions of every predictor to some records' sums.
#[derive(Debug, Clone)]
pub struct Contributions {
    /// The rows explained (indices into the rows given).
    pub rows: Vec<usize>,
    pub predictors: usize,
    /// Sums per record (see [`Additive`]).
    pub outputs: usize,
    /// What each output means, and the scale in a sentence.
    pub output_names: Vec<String>,
    pub scale: String,
    /// The value every record starts from, per output: the model's mean over the training
    /// weight (cover) of its trees, plus any starting score.
    pub base: Vec<f64>,
    /// `values[(i * predictors + j) * outputs + k]`: row `rows[i]`, predictor `j`, output `k`.
    pub values: Vec<f64>,
}

impl Contributions {
    /// Row `i`'s contributions (`predictors × outputs`).
    pub fn row(&self, i: usize) -> &[f64] {
        let w = self.predictors * self.outputs;
        &self.values[i * w..(i + 1) * w]
    }

    /// Mean absolute contribution per predictor and output (`predictors × outputs`), the
    /// usual overall summary.
    pub fn mean_abs(&self) -> Vec<f64> {
        let w = self.predictors * self.outputs;
        let mut out = vec![0.0; w];
        for chunk in self.values.chunks_exact(w.max(1)) {
            for (o, v) in out.iter_mut().zip(chunk) {
                *o += v.abs();
            }
        }
        let n = self.rows.len().max(1) as f64;
        out.iter_mut().for_each(|o| *o /= n);
        out
    }
}

/// TreeSHAP contributions of `which` rows of `records` (all of them when `which` is
/// `None`). Records, not training bins: a split the record does not reach is decided by its
/// value too, and only values decide every split the same way for any row. Progress is
/// reported per tree, which may cancel ([`ErrorKind::Cancelled`]).
pub fn contributions(
    model: &Model,
    records: &Records,
    which: Option<&[usize]>,
    progress: &mut dyn Progress,
) -> Result<Contributions> {
    let add = Additive::of(model);
    let p = model.predictors.len();
    let k = add.width();
    let chosen: Vec<usize> = match which {
        Some(w) => {
            if let Some(&bad) = w.iter().find(|&&r| r >= records.rows) {
                return Err(Error::new(ErrorKind::BadSetting {
                    setting: "contributions".into(),
                    reason: format!(
                        "row {} is beyond the {} rows given; rows are numbered from 1",
                        bad + 1,
                        records.rows
                    ),
                }));
            }
            w.to_vec()
        }
        None => (0..records.rows).collect(),
    };
    let mut values = vec![0.0; chosen.len() * p * k];
    let mut base = add.offset.clone();
    let total = add.members.len() as u64;
    let mut walker = Walker::default();
    let mut scratch = Scratch::default();
    let mirror = k == 2
        && model.classes.as_ref().is_some_and(|c| c.len() == 2)
        && add.members.iter().all(|m| {
            m.output.is_none()
                && (0..m.tree.nodes.len())
                    .filter(|&i| m.tree.nodes[i].is_leaf())
                    .all(|i| (m.tree.node_values(i).iter().sum::<f64>() - 1.0).abs() < 1e-12)
        });
    for (m, member) in add.members.iter().enumerate() {
        let tree: &Tree = &member.tree;
        let expected = expected_value(tree);
        let whole = Target {
            scale: member.scale,
            output: member.output,
            from: 0,
            outputs: k,
        };
        whole.add(&mut base, 0, &expected);
        // Two class probabilities (or vote shares) add up to 1 in every leaf, so the first
        // class's contributions are minus the second's: only the second is computed.
        let target = if mirror {
            Target {
                output: Some(1),
                from: 1,
                ..whole
            }
        } else {
            whole
        };
        match Table::build(tree, &target, chosen.len()) {
            Some(table) => {
                // Blocks of records, so one leaf's factors serve the whole block from cache.
                for (block, rows) in chosen.chunks(BLOCK).enumerate() {
                    let at = block * BLOCK * p * k;
                    let phi = &mut values[at..at + rows.len() * p * k];
                    table.explain_block(tree, phi, rows, records, &mut scratch);
                }
            }
            None => {
                walker.prepare(tree, p);
                for (i, &r) in chosen.iter().enumerate() {
                    let phi = &mut values[i * p * k..(i + 1) * p * k];
                    walker.explain(tree, &target, phi, |j| records.value(j, r));
                }
            }
        }
        if progress.step("trees explained", m as u64 + 1, total) == Flow::Stop {
            return Err(Error::new(ErrorKind::Cancelled));
        }
    }
    if mirror {
        for pair in values.chunks_exact_mut(2) {
            pair[0] = -pair[1];
        }
    }
    Ok(Contributions {
        rows: chosen,
        predictors: p,
        outputs: k,
        output_names: add.outputs.clone(),
        scale: add.scale.clone(),
        base,
        values,
    })
}

/// Where a member's leaf values go in the sums.
struct Target {
    scale: f64,
    /// `Some(k)`: the leaf's value `from` goes to output `k`; `None`: every value to its
    /// own output.
    output: Option<usize>,
    from: usize,
    outputs: usize,
}

impl Target {
    /// Adds `factor` × `values` (a leaf's, or a tree's mean) at predictor slot `j`.
    #[inline]
    fn add(&self, phi: &mut [f64], j: usize, values: &[f64]) {
        let at = j * self.outputs;
        match self.output {
            Some(k) => phi[at + k] += self.scale * values[self.from],
            None => {
                for (o, v) in phi[at..at + self.outputs].iter_mut().zip(values) {
                    *o += self.scale * v;
                }
            }
        }
    }
}

/// A tree's mean over its training weight: each leaf's values times the product of the
/// cover shares on its path (the value TreeSHAP's contributions start from).
pub fn expected_value(tree: &Tree) -> Vec<f64> {
    let k = tree.outputs;
    let mut reach = vec![0.0; tree.nodes.len()];
    let mut out = vec![0.0; k];
    reach[0] = 1.0;
    // Children come after their parents (Model::check), so one forward pass suffices.
    for i in 0..tree.nodes.len() {
        let n = &tree.nodes[i];
        if n.is_leaf() {
            for (o, v) in out.iter_mut().zip(tree.node_values(i)) {
                *o += reach[i] * v;
            }
        } else {
            let l = left_share(tree, i);
            reach[n.left as usize] = reach[i] * l;
            reach[n.right as usize] = reach[i] * (1.0 - l);
        }
    }
    out
}

/// Most table entries a tree may take (32 MB of factors); larger trees use Algorithm 2.
const TABLE_LIMIT: usize = 1 << 22;

/// Records explained together through a [`Table`].
const BLOCK: usize = 256;

/// Most internal nodes in one [`Group`] (its table has `2^inner` times the patterns).
const GROUP_INNER: usize = 3;

/// Reusable buffers for [`Table::explain_block`].
#[derive(Default)]
struct Scratch {
    /// Per node, per record of the block: the record's pattern there.
    patterns: Vec<u32>,
    /// The block's contributions, predictor by predictor (`predictors × per × records`).
    sums: Vec<f64>,
    /// Per record of the block: its row in the current group's table.
    index: Vec<u32>,
}

/// A small subtree whose leaves are explained together: a leaf alone, or a node with at
/// most [`GROUP_INNER`] internal nodes below it. Its table holds, for each pattern of the
/// root's path predictors and each choice of side at the internal nodes, the sum of its
/// leaves' factors per predictor, so a record costs one look-up per predictor of the
/// subtree instead of one per leaf and path predictor.
struct Group {
    root: usize,
    /// Pattern bits taken from the root (its path's distinct predictors).
    bits: u32,
    /// The subtree's internal nodes; bit `t` of a table row: the record goes left at
    /// `inner[t]`.
    inner: Vec<usize>,
    /// The predictors the table's columns add to: the root's path in slot order, then
    /// those first split on inside the subtree.
    features: Vec<usize>,
    /// Where the group's rows start in [`Table::factors`].
    start: usize,
}

/// A leaf of a [`Group`] while its table is built.
struct GroupLeaf {
    leaf: usize,
    /// The sides its path takes inside the group: (index in [`Group::inner`], left, the
    /// node's slot).
    conditions: Vec<(usize, bool, u32)>,
    /// The group column of each of its path predictors, in slot order.
    cols: Vec<usize>,
}

/// A tree's contribution factors per group of leaves and pattern (see the module notes).
struct Table {
    /// Internal nodes above the groups (parents first): records' patterns pass through them.
    upper: Vec<usize>,
    /// Internal nodes: the slot of the node's predictor on its path (its order of first
    /// appearance from the root).
    slot: Vec<u8>,
    groups: Vec<Group>,
    /// Each group's rows (`2^(bits + inner)` of `features × per` factors), every factor
    /// already times the member's scale and the leaf's value(s).
    factors: Vec<f64>,
    /// Values per factor (1, or every output) and the first output they go to.
    per: usize,
    offset: usize,
    outputs: usize,
}

impl Table {
    /// The table of `tree`, when it is cheaper for `rows` records than Algorithm 2 and fits
    /// in [`TABLE_LIMIT`].
    fn build(tree: &Tree, target: &Target, rows: usize) -> Option<Table> {
        let (per, offset) = match target.output {
            Some(k) => (1, k),
            None => (target.outputs, 0),
        };
        let n = tree.nodes.len();
        // Each node's path: predictors and zero fractions (products of cover shares).
        let mut slot = vec![0u8; n];
        // Per node, its path's distinct predictors (`count`); leaves: where they start in
        // `features` / `zeros`.
        let mut first = vec![0u32; n];
        let mut count = vec![0u8; n];
        let mut features = Vec::new();
        let mut zeros: Vec<f64> = Vec::new();
        let mut leaves = Vec::new();
        let (mut entries, mut algorithm2) = (0usize, 0usize);
        // (node, its path's predictors and zero fractions)
        let mut stack: Vec<(usize, Vec<(usize, f64)>)> = vec![(0, Vec::new())];
        while let Some((i, path)) = stack.pop() {
            let node = &tree.nodes[i];
            let d = path.len();
            if d > 24 {
                return None;
            }
            count[i] = d as u8;
            if node.is_leaf() {
                first[i] = features.len() as u32;
                for &(f, z) in &path {
                    features.push(f);
                    zeros.push(z);
                }
                entries += (1usize << d) * d * per;
                algorithm2 += (d + 1) * (d + 1);
                leaves.push(i);
                if entries > TABLE_LIMIT {
                    return None;
                }
                continue;
            }
            let f = node.feature as usize;
            let k = path.iter().position(|&(g, _)| g == f).unwrap_or(path.len());
            slot[i] = k as u8;
            let share = left_share(tree, i);
            for (child, s) in [(node.left, share), (node.right, 1.0 - share)] {
                let mut next = path.clone();
                if k == next.len() {
                    next.push((f, s));
                } else {
                    next[k].1 *= s;
                }
                stack.push((child as usize, next));
            }
        }
        // Internal nodes below each node (children come after their parents).
        let mut inner = vec![0usize; n];
        for i in (0..n).rev() {
            let node = &tree.nodes[i];
            if !node.is_leaf() {
                inner[i] = 1 + inner[node.left as usize] + inner[node.right as usize];
            }
        }
        // Groups from the root down: the largest subtrees with few internal nodes whose
        // table is at most twice their leaves' (a leaf always makes one).
        let leaf_entries = |i: usize| (1usize << count[i]) * count[i] as usize * per;
        let mut upper = Vec::new();
        let mut groups = Vec::new();
        let (mut group_entries, mut per_record) = (0usize, 0usize);
        let mut stack = vec![0usize];
        let mut below = Vec::new();
        while let Some(i) = stack.pop() {
            let node = &tree.nodes[i];
            if inner[i] <= GROUP_INNER {
                // The subtree's nodes, parents first, and its predictors.
                below.clear();
                below.push(i);
                let mut at = 0;
                while at < below.len() {
                    let m = &tree.nodes[below[at]];
                    if !m.is_leaf() {
                        below.push(m.left as usize);
                        below.push(m.right as usize);
                    }
                    at += 1;
                }
                below.sort_unstable();
                let some_leaf = below.iter().copied().find(|&j| tree.nodes[j].is_leaf());
                let a = first[some_leaf.unwrap_or(i)] as usize;
                let bits = count[i] as usize;
                let mut cols: Vec<usize> = features[a..a + bits].to_vec();
                for &j in &below {
                    let m = &tree.nodes[j];
                    if !m.is_leaf() && !cols.contains(&(m.feature as usize)) {
                        cols.push(m.feature as usize);
                    }
                }
                let inside: Vec<usize> = below
                    .iter()
                    .copied()
                    .filter(|&j| !tree.nodes[j].is_leaf())
                    .collect();
                let size = (cols.len() * per) << (bits + inside.len());
                let leaves_size: usize = below
                    .iter()
                    .filter(|&&j| tree.nodes[j].is_leaf())
                    .map(|&j| leaf_entries(j))
                    .sum();
                if node.is_leaf() || size <= 2 * leaves_size {
                    group_entries += size;
                    per_record += inside.len() + 1 + cols.len() * per;
                    groups.push(Group {
                        root: i,
                        bits: bits as u32,
                        inner: inside,
                        features: cols,
                        start: 0,
                    });
                    continue;
                }
            }
            upper.push(i);
            stack.push(node.right as usize);
            stack.push(node.left as usize);
        }
        upper.sort_unstable();
        // Shared work against per-record work (both in inner-loop steps, roughly).
        // (In f64: usize is 32 bits on wasm.)
        let rows = rows as f64;
        let per_record_table = (2 * upper.len() + per_record) as f64;
        let build = (entries + group_entries) as f64;
        if build * 4.0 + rows * per_record_table > rows * algorithm2 as f64 * 2.0
            || group_entries > TABLE_LIMIT
        {
            return None;
        }
        // Each leaf's factors per pattern of its path predictors (2^d × d × per).
        let mut start = vec![0usize; n];
        let mut leaf_factors = Vec::with_capacity(entries);
        let mut path = vec![PathElement::default(); 26];
        for &leaf in &leaves {
            start[leaf] = leaf_factors.len();
            let (a, d) = (first[leaf] as usize, count[leaf] as usize);
            let z = &zeros[a..a + d];
            for pattern in 0..1usize << d {
                extend(&mut path, 0, 1.0, 1.0, usize::MAX);
                for (k, &zk) in z.iter().enumerate() {
                    let one = (pattern >> k & 1) as f64;
                    extend(&mut path, k + 1, zk, one, k);
                }
                let values = tree.node_values(leaf);
                for k in 0..d {
                    let el = path[k + 1];
                    let w = unwound_sum(&path, d, k + 1) * (el.one - el.zero) * target.scale;
                    leaf_factors.extend(values[target.from..].iter().take(per).map(|v| w * v));
                }
            }
        }
        // Each group's rows: for every root pattern and choice of sides, every leaf's
        // pattern follows (a side not taken clears its node's slot) and its factors add up
        // in the leaf's predictors' columns.
        let mut factors = Vec::with_capacity(group_entries);
        let mut members: Vec<GroupLeaf> = Vec::new();
        for group in &mut groups {
            group.start = factors.len();
            members.clear();
            let mut walk = vec![(group.root, Vec::new())];
            while let Some((i, conditions)) = walk.pop() {
                let node = &tree.nodes[i];
                if node.is_leaf() {
                    let (a, d) = (first[i] as usize, count[i] as usize);
                    let cols = features[a..a + d]
                        .iter()
                        .map(|f| group.features.iter().position(|g| g == f).unwrap_or(0))
                        .collect();
                    members.push(GroupLeaf {
                        leaf: i,
                        conditions,
                        cols,
                    });
                    continue;
                }
                let t = group.inner.iter().position(|&j| j == i).unwrap_or(0);
                for (child, left) in [(node.left, true), (node.right, false)] {
                    let mut c = conditions.clone();
                    c.push((t, left, slot[i] as u32));
                    walk.push((child as usize, c));
                }
            }
            let width = group.features.len() * per;
            let m = group.inner.len();
            for row in 0..1usize << (group.bits as usize + m) {
                let at = factors.len();
                factors.resize(at + width, 0.0);
                let (q, sides) = (row >> m, row & ((1 << m) - 1));
                for GroupLeaf {
                    leaf,
                    conditions,
                    cols,
                } in &members
                {
                    let mut pattern = q | !((1usize << group.bits) - 1);
                    for &(t, left, s) in conditions {
                        if (sides >> t & 1 == 1) != left {
                            pattern &= !(1 << s);
                        }
                    }
                    let d = count[*leaf] as usize;
                    let pattern = pattern & ((1 << d) - 1);
                    let from = start[*leaf] + pattern * d * per;
                    for (k, &c) in cols.iter().enumerate() {
                        for o in 0..per {
                            factors[at + c * per + o] += leaf_factors[from + k * per + o];
                        }
                    }
                }
            }
        }
        Some(Table {
            upper,
            slot,
            groups,
            factors,
            per,
            offset,
            outputs: target.outputs,
        })
    }

    /// Adds the contributions of records `rows` for this tree to `phi` (one
    /// `predictors × outputs` slice per record, in order): first each record's pattern at
    /// the nodes above the groups, clearing a slot's bit on the side the record does not
    /// take (without a branch on that side, which no predictor can guess); then group by
    /// group, each record's row of the group's table and its factors.
    fn explain_block(
        &self,
        tree: &Tree,
        phi: &mut [f64],
        rows: &[usize],
        records: &Records,
        scratch: &mut Scratch,
    ) {
        let b = rows.len();
        let width = phi.len() / b.max(1);
        let Scratch {
            patterns,
            sums,
            index,
        } = scratch;
        // Node by node (children come after their parents), every record of the block at
        // once: its pattern at each node, from its parent's. Only the root's needs a
        // start; every other node read is written first.
        if patterns.len() < tree.nodes.len() * b {
            patterns.resize(tree.nodes.len() * b, 0);
        }
        patterns[..b].fill(u32::MAX);
        for &i in &self.upper {
            let n = &tree.nodes[i];
            let bit = 1u32 << self.slot[i];
            let f = n.feature as usize;
            let (done, below) = patterns.split_at_mut((i + 1) * b);
            let parent = &done[i * b..];
            let (l, r) = (n.left as usize - i - 1, n.right as usize - i - 1);
            for (k, &row) in rows.iter().enumerate() {
                let left = n.value_goes_left(records.value(f, row)) as u32;
                below[l * b + k] = parent[k] & !(bit * (1 - left));
                below[r * b + k] = parent[k] & !(bit * left);
            }
        }
        // Group by group, column by column, record by record: the records' sums for one
        // predictor lie side by side and the group's factors stay in cache.
        let per = self.per;
        let predictors = width / self.outputs.max(1);
        sums.clear();
        sums.resize(predictors * per * b, 0.0);
        index.resize(b, 0);
        for group in &self.groups {
            if group.features.is_empty() {
                continue;
            }
            let m = group.inner.len() as u32;
            let mask = ((1u64 << group.bits) - 1) as u32;
            let root = &patterns[group.root * b..(group.root + 1) * b];
            for (ix, &pattern) in index.iter_mut().zip(root) {
                *ix = (pattern & mask) << m;
            }
            for (t, &i) in group.inner.iter().enumerate() {
                let n = &tree.nodes[i];
                let f = n.feature as usize;
                for (ix, &row) in index.iter_mut().zip(rows) {
                    *ix |= (n.value_goes_left(records.value(f, row)) as u32) << t;
                }
            }
            let w = group.features.len() * per;
            let table = &self.factors[group.start..group.start + (w << (group.bits + m))];
            for (c, &f) in group.features.iter().enumerate() {
                for o in 0..per {
                    let to = &mut sums[(f * per + o) * b..][..b];
                    for (t, &ix) in to.iter_mut().zip(index.iter()) {
                        *t += table[ix as usize * w + c * per + o];
                    }
                }
            }
        }
        for (i, row) in phi.chunks_exact_mut(width).enumerate() {
            for f in 0..predictors {
                for o in 0..per {
                    row[f * self.outputs + self.offset + o] += sums[(f * per + o) * b + i];
                }
            }
        }
    }
}

/// One element of the path of unique predictors (Lundberg et al. 2020, Algorithm 2).
#[derive(Debug, Clone, Copy, Default)]
struct PathElement {
    /// Predictor index, or `usize::MAX` for the root's placeholder.
    feature: usize,
    zero: f64,
    one: f64,
    weight: f64,
}

/// Reusable buffers for one tree at a time.
#[derive(Default)]
struct Walker {
    path: Vec<PathElement>,
    /// Elements per recursion level.
    width: usize,
    shares: Vec<f64>,
}

impl Walker {
    fn prepare(&mut self, tree: &Tree, predictors: usize) {
        let depth = tree.depth();
        self.width = depth.min(predictors) + 2;
        self.path.clear();
        self.path
            .resize((depth + 2) * self.width, PathElement::default());
        self.shares.clear();
        self.shares.extend((0..tree.nodes.len()).map(|i| {
            if tree.nodes[i].is_leaf() {
                0.0
            } else {
                left_share(tree, i)
            }
        }));
    }

    fn explain(
        &mut self,
        tree: &Tree,
        target: &Target,
        phi: &mut [f64],
        value: impl Fn(usize) -> f64 + Copy,
    ) {
        self.recurse(tree, target, phi, value, 0, 0, 0, 1.0, 1.0, usize::MAX);
    }

    #[allow(clippy::too_many_arguments)]
    fn recurse(
        &mut self,
        tree: &Tree,
        target: &Target,
        phi: &mut [f64],
        value: impl Fn(usize) -> f64 + Copy,
        node: usize,
        level: usize,
        mut depth: usize,
        zero: f64,
        one: f64,
        feature: usize,
    ) {
        let w = self.width;
        let start = level * w;
        if level > 0 {
            self.path.copy_within(start - w..start - w + depth, start);
        }
        let path = &mut self.path[start..start + w];
        extend(path, depth, zero, one, feature);
        let n = &tree.nodes[node];
        if n.is_leaf() {
            let values = tree.node_values(node);
            for i in 1..=depth {
                let el = path[i];
                let factor = unwound_sum(path, depth, i) * (el.one - el.zero);
                if factor != 0.0 {
                    let at = el.feature * target.outputs;
                    match target.output {
                        Some(k) => phi[at + k] += factor * target.scale * values[target.from],
                        None => {
                            for (o, v) in phi[at..at + target.outputs].iter_mut().zip(values) {
                                *o += factor * target.scale * v;
                            }
                        }
                    }
                }
            }
            return;
        }
        let split = n.feature as usize;
        let left = n.value_goes_left(value(split));
        let share = self.shares[node];
        let (hot, cold, hot_share, cold_share) = if left {
            (n.left, n.right, share, 1.0 - share)
        } else {
            (n.right, n.left, 1.0 - share, share)
        };
        let (mut in_zero, mut in_one) = (1.0, 1.0);
        if let Some(i) = (1..=depth).find(|&i| path[i].feature == split) {
            in_zero = path[i].zero;
            in_one = path[i].one;
            unwind(path, depth, i);
            depth -= 1;
        }
        self.recurse(
            tree,
            target,
            phi,
            value,
            hot as usize,
            level + 1,
            depth + 1,
            hot_share * in_zero,
            in_one,
            split,
        );
        self.recurse(
            tree,
            target,
            phi,
            value,
            cold as usize,
            level + 1,
            depth + 1,
            cold_share * in_zero,
            0.0,
            split,
        );
    }
}

/// Adds an element to the path and updates the weights of every subset size.
#[inline]
fn extend(path: &mut [PathElement], depth: usize, zero: f64, one: f64, feature: usize) {
    path[depth] = PathElement {
        feature,
        zero,
        one,
        weight: if depth == 0 { 1.0 } else { 0.0 },
    };
    let d1 = (depth + 1) as f64;
    for i in (0..depth).rev() {
        path[i + 1].weight += one * path[i].weight * (i + 1) as f64 / d1;
        path[i].weight = zero * path[i].weight * (depth - i) as f64 / d1;
    }
}

/// Undoes [`extend`] for element `index` (a predictor split on again further down).
#[inline]
fn unwind(path: &mut [PathElement], depth: usize, index: usize) {
    let (one, zero) = (path[index].one, path[index].zero);
    let d1 = (depth + 1) as f64;
    let mut next = path[depth].weight;
    for i in (0..depth).rev() {
        if one != 0.0 {
            let tmp = path[i].weight;
            path[i].weight = next * d1 / ((i + 1) as f64 * one);
            next = tmp - path[i].weight * zero * (depth - i) as f64 / d1;
        } else {
            path[i].weight = path[i].weight * d1 / (zero * (depth - i) as f64);
        }
    }
    for i in index..depth {
        path[i].feature = path[i + 1].feature;
        path[i].zero = path[i + 1].zero;
        path[i].one = path[i + 1].one;
    }
}

/// The total weight the path would have without element `index`.
#[inline]
fn unwound_sum(path: &[PathElement], depth: usize, index: usize) -> f64 {
    let (one, zero) = (path[index].one, path[index].zero);
    let d1 = (depth + 1) as f64;
    let mut next = path[depth].weight;
    let mut total = 0.0;
    for i in (0..depth).rev() {
        if one != 0.0 {
            let tmp = next * d1 / ((i + 1) as f64 * one);
            total += tmp;
            next = path[i].weight - tmp * zero * (depth - i) as f64 / d1;
        } else if zero != 0.0 {
            total += path[i].weight / zero / ((depth - i) as f64 / d1);
        }
    }
    total
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::explain::testing;
    use crate::model::Method;
    use crate::progress::Silent;
    use crate::tree::Node;
    use crate::tree::Rows;

    /// The path-dependent value of a coalition `set` (bit j: predictor j known): known
    /// predictors follow the record, unknown ones average the children by cover share
    /// (Lundberg et al. 2020, Algorithm 1's expectation).
    fn coalition_value(
        tree: &Tree,
        node: usize,
        set: u64,
        x: &dyn Fn(usize) -> f64,
        out: &mut [f64],
        w: f64,
    ) {
        let n = &tree.nodes[node];
        if n.is_leaf() {
            for (o, v) in out.iter_mut().zip(tree.node_values(node)) {
                *o += w * v;
            }
            return;
        }
        let f = n.feature as usize;
        if set >> f & 1 == 1 {
            let next = if n.value_goes_left(x(f)) {
                n.left
            } else {
                n.right
            };
            coalition_value(tree, next as usize, set, x, out, w);
        } else {
            let l = left_share(tree, node);
            coalition_value(tree, n.left as usize, set, x, out, w * l);
            coalition_value(tree, n.right as usize, set, x, out, w * (1.0 - l));
        }
    }

    /// Shapley values by enumerating every coalition of the `p` predictors (exponential).
    fn brute_force(tree: &Tree, p: usize, x: &dyn Fn(usize) -> f64) -> Vec<f64> {
        let k = tree.outputs;
        let value = |set: u64| {
            let mut out = vec![0.0; k];
            coalition_value(tree, 0, set, x, &mut out, 1.0);
            out
        };
        let fact = |n: usize| (1..=n).map(|i| i as f64).product::<f64>();
        let mut phi = vec![0.0; p * k];
        for j in 0..p {
            for set in 0u64..(1 << p) {
                if set >> j & 1 == 1 {
                    continue;
                }
                let s = set.count_ones() as usize;
                let weight = fact(s) * fact(p - s - 1) / fact(p);
                let (with, without) = (value(set | 1 << j), value(set));
                for o in 0..k {
                    phi[j * k + o] += weight * (with[o] - without[o]);
                }
            }
        }
        phi
    }

    #[test]
    fn contributions_plus_base_equal_the_prediction_on_every_model_kind() {
        // Local accuracy (Lundberg et al. 2020, property 1), to 1e-9.
        for (name, model, records, _) in testing::every_kind() {
            let rows = Rows::Records(&records);
            let c = contributions(&model, &records, None, &mut Silent).unwrap();
            let add = Additive::of(&model);
            let mut s = vec![0.0; add.width()];
            for (i, &r) in c.rows.iter().enumerate() {
                add.sums(rows, r, &mut s);
                for (k, &sum) in s.iter().enumerate() {
                    let total: f64 = c.base[k]
                        + (0..c.predictors)
                            .map(|j| c.row(i)[j * c.outputs + k])
                            .sum::<f64>();
                    assert!(
                        (total - sum).abs() < 1e-9,
                        "{name}, row {r}, output {k}: {total} vs {sum}"
                    );
                }
            }
        }
    }

    #[test]
    fn treeshap_equals_brute_force_shapley_values_on_every_tree() {
        // Exact Shapley values by enumeration (2^5 coalitions of the 5 predictors) against
        // Algorithm 2, tree by tree, including missing values in predictor a.
        for (name, model, records, _) in testing::every_kind() {
            let add = Additive::of(&model);
            let p = model.predictors.len();
            assert!(p <= 8);
            for member in add.members.iter().take(6) {
                let tree: &Tree = &member.tree;
                let mut walker = Walker::default();
                walker.prepare(tree, p);
                let target = Target {
                    scale: 1.0,
                    output: None,
                    from: 0,
                    outputs: tree.outputs,
                };
                for r in (0..records.rows).step_by(23) {
                    let mut phi = vec![0.0; p * tree.outputs];
                    walker.explain(tree, &target, &mut phi, |j| records.value(j, r));
                    let want = brute_force(tree, p, &|j| records.value(j, r));
                    for (a, b) in phi.iter().zip(&want) {
                        assert!((a - b).abs() < 1e-9, "{name} row {r}: {phi:?} vs {want:?}");
                    }
                }
            }
        }
    }

    /// A depth-two tree on two yes/no predictors with four equally weighted cells (25 each);
    /// `cells[a][b]` is the leaf value for x1 = a, x2 = b.
    fn two_predictor_tree(cells: [[f64; 2]; 2]) -> Tree {
        let split = |feature: u32, left: u32| Node {
            feature,
            numeric: true,
            threshold: 0.5,
            left,
            right: left + 1,
            weight: if feature == 0 { 100.0 } else { 50.0 },
            ..Node::leaf()
        };
        let leaf = |value: u32| Node {
            weight: 25.0,
            value,
            ..Node::leaf()
        };
        // Node 0 splits x1 (left: x1 = 0); nodes 1, 2 split x2; leaves 3..6.
        Tree {
            nodes: vec![
                split(0, 1),
                split(1, 3),
                split(1, 5),
                leaf(0),
                leaf(1),
                leaf(2),
                leaf(3),
            ],
            values: vec![
                cells[0][0],
                cells[0][1],
                cells[1][0],
                cells[1][1],
                0.0,
                0.0,
                0.0,
            ],
            outputs: 1,
        }
    }

    fn explain_one(tree: &Tree, x: [f64; 2]) -> (f64, Vec<f64>) {
        let mut walker = Walker::default();
        walker.prepare(tree, 2);
        let target = Target {
            scale: 1.0,
            output: None,
            from: 0,
            outputs: 1,
        };
        let mut phi = vec![0.0; 2];
        let records = Records::from_columns(1, x.to_vec());
        walker.explain(tree, &target, &mut phi, |j| records.value(j, 0));
        (expected_value(tree)[0], phi)
    }

    #[test]
    fn the_two_predictor_examples_of_lundberg_erion_and_lee() {
        // Lundberg, Erion & Lee, arXiv:1802.03888: model "80 only if both" → base 20,
        // φ₁ = φ₂ = 30 for a record with both; model "90 if both, 10 if the second only" →
        // base 25, φ₁ = 30, φ₂ = 35 (four equally likely cells; recomputed, see
        // ../shared/design/references.md).
        let (base, phi) = explain_one(&two_predictor_tree([[0.0, 0.0], [0.0, 80.0]]), [1.0, 1.0]);
        assert!(
            (base - 20.0).abs() < 1e-12
                && (phi[0] - 30.0).abs() < 1e-12
                && (phi[1] - 30.0).abs() < 1e-12,
            "{base} {phi:?}"
        );
        let (base, phi) = explain_one(&two_predictor_tree([[0.0, 10.0], [0.0, 90.0]]), [1.0, 1.0]);
        assert!(
            (base - 25.0).abs() < 1e-12
                && (phi[0] - 30.0).abs() < 1e-12
                && (phi[1] - 35.0).abs() < 1e-12,
            "{base} {phi:?}"
        );
    }

    #[test]
    fn the_shared_table_gives_algorithm_2s_contributions() {
        for (name, model, records, _) in testing::every_kind() {
            let add = Additive::of(&model);
            let p = model.predictors.len();
            let mut scratch = Scratch::default();
            for member in &add.members {
                let tree: &Tree = &member.tree;
                let target = Target {
                    scale: 1.0,
                    output: None,
                    from: 0,
                    outputs: tree.outputs,
                };
                let table =
                    Table::build(tree, &target, 1 << 20).expect("a small tree takes the table");
                let mut walker = Walker::default();
                walker.prepare(tree, p);
                for r in (0..records.rows).step_by(7) {
                    let mut a = vec![0.0; p * tree.outputs];
                    let mut b = a.clone();
                    walker.explain(tree, &target, &mut a, |j| records.value(j, r));
                    table.explain_block(tree, &mut b, &[r], &records, &mut scratch);
                    for (x, y) in a.iter().zip(&b) {
                        assert!((x - y).abs() < 1e-12, "{name} row {r}: {a:?} vs {b:?}");
                    }
                }
            }
        }
    }

    #[test]
    fn cancelling_stops_with_an_error() {
        let (model, records, _) = testing::model(Method::Forest, "y", None);
        let r = contributions(&model, &records, None, &mut crate::progress::StopAfter(2));
        assert!(matches!(
            r.map_err(|e| matches!(e.kind(), ErrorKind::Cancelled)),
            Err(true)
        ));
    }
}
