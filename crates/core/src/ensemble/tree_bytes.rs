//! Fitted forest trees as bytes, so trees fitted in one place (another Web Worker of the page)
//! can be tallied in another ([`super::forest::OobTally`]) and give the same forest bit for
//! bit. A plain little-endian layout, not a file format: both ends are the same build.
//!
//! Layout: `b"SPTB"`, the tree count (u32), then per tree: outputs, nodes, values and rows
//! (u32 each); per node feature (u32), numeric (u8), threshold bin (u16), threshold (f64),
//! category set (4 × u64), missing-left (u8), left and right (u32), weight and gain (f64),
//! value index (u32); the leaf values (f64 each); and one bit per row, set when the row was
//! in the tree's sample (the out-of-bag tally needs no more than that).

use super::forest::{
    tree_outputs, FittedTree, Forest, ForestSettings, HeldOut, OobTally, IN_BAG, OUT_OF_BAG,
};
use crate::binning::BinnedMatrix;
use crate::design::Outcome;
use crate::error::{Error, ErrorKind, Result};
use crate::tree::{BinSet, Node, Tree};

const MAGIC: &[u8; 4] = b"SPTB";

/// Writes `trees` (with their in-bag rows) as bytes.
pub fn encode_trees(trees: &[FittedTree]) -> Vec<u8> {
    let mut out = Vec::new();
    out.extend_from_slice(MAGIC);
    let u32s = |out: &mut Vec<u8>, v: u32| out.extend_from_slice(&v.to_le_bytes());
    u32s(&mut out, trees.len() as u32);
    for f in trees {
        let t = &f.tree;
        u32s(&mut out, t.outputs as u32);
        u32s(&mut out, t.nodes.len() as u32);
        u32s(&mut out, t.values.len() as u32);
        u32s(&mut out, f.leaves.len() as u32);
        for n in &t.nodes {
            u32s(&mut out, n.feature);
            out.push(n.numeric as u8);
            out.extend_from_slice(&n.threshold_bin.to_le_bytes());
            out.extend_from_slice(&n.threshold.to_le_bytes());
            for w in n.left_bins().0 {
                out.extend_from_slice(&w.to_le_bytes());
            }
            out.push(n.missing_left as u8);
            u32s(&mut out, n.left);
            u32s(&mut out, n.right);
            out.extend_from_slice(&n.weight.to_le_bytes());
            out.extend_from_slice(&n.gain.to_le_bytes());
            u32s(&mut out, n.value);
        }
        for v in &t.values {
            out.extend_from_slice(&v.to_le_bytes());
        }
        let mut bits = vec![0u8; f.leaves.len().div_ceil(8)];
        for r in 0..f.leaves.len() {
            if f.in_bag(r) {
                bits[r / 8] |= 1 << (r % 8);
            }
        }
        out.extend_from_slice(&bits);
    }
    out
}

/// The forest of trees fitted elsewhere (`bytes`: every share in tree order, joined),
/// tallied here into the same forest, out-of-bag record and all, that one fit would give;
/// partial when fewer trees came than `settings` asks for; `held` rows judged tree by tree
/// as [`OobTally::add_judging`] does. It has the shape of a [`crate::fit::ForestFitter`]
/// once `bytes` is bound.
pub fn tally_trees(
    bytes: &[u8],
    binned: &BinnedMatrix,
    width: usize,
    outcome: &Outcome,
    settings: &ForestSettings,
    held: Option<HeldOut<'_>>,
) -> Result<Forest> {
    let trees = decode_trees(bytes, binned.rows, binned.columns.len()).map_err(|e| {
        Error::new(ErrorKind::BadDesign {
            reason: format!("the workers' trees could not be joined ({e}); run it again"),
        })
    })?;
    let mut tally = OobTally::new(binned.rows, tree_outputs(settings, width));
    let partial = trees.len() < settings.trees;
    for f in trees {
        tally.add_judging(f, binned, outcome, held);
    }
    Ok(tally.finish(partial))
}

/// A reader over the bytes that fails instead of running past the end.
struct Reader<'a> {
    bytes: &'a [u8],
    at: usize,
}

impl Reader<'_> {
    fn take(&mut self, n: usize) -> std::result::Result<&[u8], String> {
        let end = self.at.checked_add(n).filter(|&e| e <= self.bytes.len());
        let end = end.ok_or_else(|| format!("the trees' bytes end early (at byte {})", self.at))?;
        let s = &self.bytes[self.at..end];
        self.at = end;
        Ok(s)
    }
    fn u8(&mut self) -> std::result::Result<u8, String> {
        Ok(self.take(1)?[0])
    }
    fn u16(&mut self) -> std::result::Result<u16, String> {
        Ok(u16::from_le_bytes(
            self.take(2)?.try_into().unwrap_or_default(),
        ))
    }
    fn u32(&mut self) -> std::result::Result<u32, String> {
        Ok(u32::from_le_bytes(
            self.take(4)?.try_into().unwrap_or_default(),
        ))
    }
    fn u64(&mut self) -> std::result::Result<u64, String> {
        Ok(u64::from_le_bytes(
            self.take(8)?.try_into().unwrap_or_default(),
        ))
    }
    fn f64(&mut self) -> std::result::Result<f64, String> {
        Ok(f64::from_bits(self.u64()?))
    }
}

/// Reads trees written by [`encode_trees`] for a table of `rows` rows and `columns`
/// predictors; several such writings one after another (ranges of trees from several
/// workers, in tree order) read as one list. Every index is checked (children after their parent and inside the tree, leaf
/// values inside the values, predictors inside the table), so a damaged message can neither
/// loop nor panic later.
pub fn decode_trees(
    bytes: &[u8],
    rows: usize,
    columns: usize,
) -> std::result::Result<Vec<FittedTree>, String> {
    let mut r = Reader { bytes, at: 0 };
    let mut trees = Vec::new();
    while r.at < bytes.len() {
        read_block(&mut r, rows, columns, &mut trees)?;
    }
    Ok(trees)
}

/// Reads one writing of [`encode_trees`] into `trees`.
fn read_block(
    r: &mut Reader<'_>,
    rows: usize,
    columns: usize,
    trees: &mut Vec<FittedTree>,
) -> std::result::Result<(), String> {
    if r.take(4)? != MAGIC {
        return Err("these bytes are not fitted trees".into());
    }
    let count = r.u32()? as usize;
    for t in 0..count {
        let bad = |what: String| format!("tree {} of the message: {what}", t + 1);
        let outputs = r.u32()? as usize;
        let n = r.u32()? as usize;
        let n_values = r.u32()? as usize;
        let n_rows = r.u32()? as usize;
        if n_rows != rows {
            return Err(bad(format!("fitted on {n_rows} rows, not {rows}")));
        }
        if n == 0 {
            return Err(bad("no nodes".into()));
        }
        let mut nodes = Vec::with_capacity(n.min(1 << 24));
        for i in 0..n {
            let feature = r.u32()?;
            let numeric = r.u8()? == 1;
            let threshold_bin = r.u16()?;
            let threshold = r.f64()?;
            let mut categories = BinSet::default();
            for w in &mut categories.0 {
                *w = r.u64()?;
            }
            let missing_left = r.u8()? == 1;
            let left = r.u32()?;
            let right = r.u32()?;
            let weight = r.f64()?;
            let gain = r.f64()?;
            let value = r.u32()?;
            let node = Node {
                feature,
                numeric,
                threshold_bin,
                threshold,
                categories: Node::boxed_bins(categories),
                missing_left,
                left,
                right,
                weight,
                gain,
                value,
            };
            if value as usize + outputs > n_values {
                return Err(bad(format!("node {i} points past the leaf values")));
            }
            if !node.is_leaf() {
                let child_ok = |c: u32| (c as usize) > i && (c as usize) < n;
                if !child_ok(left) || !child_ok(right) || feature as usize >= columns {
                    return Err(bad(format!(
                        "node {i} has a child or predictor out of range"
                    )));
                }
            }
            nodes.push(node);
        }
        let mut values = Vec::with_capacity(n_values.min(1 << 24));
        for _ in 0..n_values {
            values.push(r.f64()?);
        }
        let bits = r.take(rows.div_ceil(8))?;
        // The leaves the sender's grower saw do not travel: in-bag rows are walked again.
        let leaves = (0..rows)
            .map(|row| match (bits[row / 8] >> (row % 8)) & 1 {
                1 => IN_BAG,
                _ => OUT_OF_BAG,
            })
            .collect();
        trees.push(FittedTree {
            tree: Tree {
                nodes,
                values,
                outputs,
            },
            leaves,
        });
    }
    Ok(())
}
