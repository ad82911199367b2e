//! Minimal cost-complexity pruning of a single tree (Breiman, Friedman, Olshen & Stone 1984,
//! ch. 3): the cost of a subtree is its leaves' total impurity plus α per leaf. Repeatedly
//! collapsing the weakest link, the split whose removal raises the impurity least per leaf
//! removed, gives the nested sequence of best subtrees and the α at which each takes over
//! (the pruning path); pruning at α keeps the largest subtree of that sequence whose
//! weakest link is stronger than α.
//!
//! α is stated per leaf as a share of the root's weight (impurity × weight / total weight),
//! the unit scikit-learn's `ccp_alpha` uses, so one value means the same on any data size.
//! Impurity increases are computed from the stored split gains: collapsing a node raises the
//! total impurity by the sum of the gains of the splits below it.

use super::{Node, Tree};

/// One step of the pruning path.
#[derive(Debug, Clone, PartialEq)]
pub struct PruneStep {
    /// The α from which this subtree is the best (0 for the full tree).
    pub alpha: f64,
    pub leaves: usize,
    /// Total leaf impurity minus the full tree's, as a share of the root's weight.
    pub impurity_increase: f64,
}

/// Per internal node: the summed gains of the splits in its subtree, and its leaves, over
/// the tree in which the nodes marked `collapsed` are leaves.
fn branch_totals(tree: &Tree, collapsed: &[bool]) -> (Vec<f64>, Vec<usize>) {
    let n = tree.nodes.len();
    let (mut gain, mut leaves) = (vec![0.0; n], vec![1usize; n]);
    // Children always come after their parent, so a reverse pass sees children first.
    for i in (0..n).rev() {
        let node = &tree.nodes[i];
        if node.is_leaf() || collapsed[i] {
            continue;
        }
        let (l, r) = (node.left as usize, node.right as usize);
        gain[i] = node.gain + gain[l] + gain[r];
        leaves[i] = leaves[l] + leaves[r];
    }
    (gain, leaves)
}

/// The nodes still reachable without passing through a collapsed node.
fn reachable(tree: &Tree, collapsed: &[bool]) -> Vec<bool> {
    let mut seen = vec![false; tree.nodes.len()];
    let mut stack = vec![0usize];
    while let Some(i) = stack.pop() {
        seen[i] = true;
        let node = &tree.nodes[i];
        if !node.is_leaf() && !collapsed[i] {
            stack.push(node.left as usize);
            stack.push(node.right as usize);
        }
    }
    seen
}

/// Weakest-link collapses from the full tree down to the root, stopping before the first
/// whose α exceeds `limit`. Returns the path and which nodes were collapsed.
fn weakest_links(tree: &Tree, limit: f64) -> (Vec<PruneStep>, Vec<bool>) {
    let total = tree
        .nodes
        .first()
        .map_or(1.0, |n| n.weight)
        .max(f64::MIN_POSITIVE);
    let mut collapsed = vec![false; tree.nodes.len()];
    let mut path = vec![PruneStep {
        alpha: 0.0,
        leaves: tree.leaves(),
        impurity_increase: 0.0,
    }];
    let mut increase = 0.0;
    loop {
        let (gain, leaves) = branch_totals(tree, &collapsed);
        let live = reachable(tree, &collapsed);
        // The weakest link: smallest gain per leaf removed; the first node on ties.
        let mut weakest: Option<(usize, f64)> = None;
        for i in 0..tree.nodes.len() {
            if !live[i] || tree.nodes[i].is_leaf() || collapsed[i] {
                continue;
            }
            let g = gain[i] / total / (leaves[i] - 1) as f64;
            if weakest.is_none_or(|(_, w)| g < w) {
                weakest = Some((i, g));
            }
        }
        let Some((i, alpha)) = weakest else { break };
        if alpha > limit {
            break;
        }
        collapsed[i] = true;
        increase += gain[i] / total;
        let remaining = leaves[0] - (leaves[i] - 1);
        // Several links as weak as each other are collapsed at one α: one step.
        let steps = path.len();
        match path.last_mut() {
            Some(last) if last.alpha == alpha.max(0.0) && steps > 1 => {
                last.leaves = remaining;
                last.impurity_increase = increase;
            }
            _ => path.push(PruneStep {
                alpha: alpha.max(0.0),
                leaves: remaining,
                impurity_increase: increase,
            }),
        }
        if i == 0 {
            break;
        }
    }
    (path, collapsed)
}

/// The pruning path of `tree`: each subtree of the weakest-link sequence, from the full tree
/// (α = 0) to the root alone.
pub fn pruning_path(tree: &Tree) -> Vec<PruneStep> {
    weakest_links(tree, f64::INFINITY).0
}

/// `tree` pruned at `alpha` (the share-of-weight units of [`PruneStep::alpha`]): every
/// weakest link with α ≤ `alpha` collapsed. Nodes keep their order; a collapsed node keeps
/// its training values and becomes a leaf.
pub fn prune(tree: Tree, alpha: f64) -> Tree {
    if alpha <= 0.0 {
        // As in scikit-learn's ccp_alpha = 0: no pruning, even of splits that gained nothing.
        return tree;
    }
    let (_, collapsed) = weakest_links(&tree, alpha);
    let keep = reachable(&tree, &collapsed);
    let mut new_index = vec![0u32; tree.nodes.len()];
    let mut next = 0u32;
    for (i, k) in keep.iter().enumerate() {
        if *k {
            new_index[i] = next;
            next += 1;
        }
    }
    let mut out = Tree {
        nodes: Vec::with_capacity(next as usize),
        values: Vec::with_capacity(next as usize * tree.outputs),
        outputs: tree.outputs,
    };
    for (i, node) in tree.nodes.iter().enumerate() {
        if !keep[i] {
            continue;
        }
        let value = out.values.len() as u32;
        out.values.extend_from_slice(tree.node_values(i));
        let mut n = if node.is_leaf() || collapsed[i] {
            Node {
                weight: node.weight,
                ..Node::leaf()
            }
        } else {
            Node {
                left: new_index[node.left as usize],
                right: new_index[node.right as usize],
                ..node.clone()
            }
        };
        n.value = value;
        out.nodes.push(n);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::binning::{bin_design, BinSettings};
    use crate::design::design_from_csv;
    use crate::tree::grower::{grow, GrowSettings};

    fn noisy_tree() -> (Tree, crate::binning::BinnedMatrix) {
        let mut state = 0x1234_5678_9ABC_DEF1u64;
        let mut next = || {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            (state % 10_000) as f64 / 10_000.0
        };
        let mut text = String::from("y,a,b\n");
        for _ in 0..400 {
            let (a, b) = (next(), next());
            let y = ((a > 0.5) != (next() < 0.2)) as u8;
            text += &format!("{y},{a},{b}\n");
        }
        let design = design_from_csv(&text, "y", &["a", "b"]);
        let (stats, k) = design.row_statistics(false);
        let m = bin_design(&design, BinSettings::default()).unwrap();
        let rows: Vec<u32> = (0..m.rows as u32).collect();
        (
            grow(&m, &stats, k, &rows, &GrowSettings::default(), None),
            m,
        )
    }

    #[test]
    fn the_path_runs_from_the_full_tree_to_the_root_with_rising_alpha() {
        let (tree, _) = noisy_tree();
        let path = pruning_path(&tree);
        assert_eq!(path[0].leaves, tree.leaves());
        assert_eq!(path.last().unwrap().leaves, 1);
        for w in path.windows(2) {
            assert!(
                w[1].alpha >= w[0].alpha && w[1].leaves < w[0].leaves,
                "{w:?}"
            );
            assert!(w[1].impurity_increase >= w[0].impurity_increase - 1e-12);
        }
        // The root alone: the impurity rises by every split's gain.
        let all: f64 = tree.nodes.iter().map(|n| n.gain).sum::<f64>() / tree.nodes[0].weight;
        assert!((path.last().unwrap().impurity_increase - all).abs() < 1e-9);
    }

    #[test]
    fn pruning_at_a_path_alpha_gives_that_subtree() {
        let (tree, m) = noisy_tree();
        let path = pruning_path(&tree);
        for step in path.iter().filter(|s| s.alpha > 0.0) {
            let pruned = prune(tree.clone(), step.alpha);
            assert_eq!(pruned.leaves(), step.leaves, "alpha {}", step.alpha);
        }
        // Pruned trees still predict: each row lands on a leaf whose values sum to one.
        let small = prune(tree.clone(), path[path.len() / 2].alpha);
        for r in 0..m.rows {
            let p = small.predict_row(&m, r);
            assert!((p.iter().sum::<f64>() - 1.0).abs() < 1e-12);
        }
        assert_eq!(prune(tree.clone(), 0.0).leaves(), path[0].leaves);
        assert_eq!(prune(tree, f64::INFINITY).nodes.len(), 1);
    }
}
