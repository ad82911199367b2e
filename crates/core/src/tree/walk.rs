//! Walking many rows down one tree at once.
//!
//! [`Tree::leaf`] walks one row through the tree's full nodes ([`super::Node`], over a hundred
//! bytes each, so a deep forest tree of ten thousand nodes does not fit the cache) and
//! branches on each side taken (often mispredicted on noisy data). A [`Walk`] is the same tree as
//! sixteen-byte steps (a node's children stored next to each other: right = left + 1), and
//! routes the rows down it node by node, as a grower partitions its rows: each node splits its
//! rows in one pass over one column, without a branch on the side, and hands each child its
//! share. (Common practice for tree ensembles, no source.) Same leaves as [`Tree::leaf`],
//! tested; `grow_bench` times both. Until 3 December a walk took eight rows side by side from
//! the root, each step choosing a child without a branch: routing does 22% fewer instructions
//! on `grow_bench`'s forest (85 against 110 M for 4 trees × 40,000 rows) and takes about 35
//! against 60 ns a row and tree.
//!
//! Records with a single-precision copy ([`crate::binning::Records::with_narrow_copy`]) are
//! routed from the copy, half the bytes: a copy below the threshold's own rounding is of a
//! number below the threshold, one above it of a number above (rounding keeps order), and
//! only a row whose copy equals it is read in full. The same leaves to the bit, tested on
//! numbers at and around every threshold. Validation's held-out rows, walked by every tree of
//! every fold, go further ([`crate::binning::bin_records`]): the rows whose every number lies
//! within its bin's training values are walked by their bins (a byte a value; 10,000 rows ×
//! 30 numbers are 2.4 MB, beyond a core's 2 MB second-level cache), the others (about one in
//! six) from such a copy, each part laid out on its own.

use super::{BinSet, Rows, Tree};
use crate::binning::{Bin, Cells};

/// One node for the walk: numbers up to `threshold` go left (a bin number for binned rows, a
/// value for records; leaves are marked [`LEAF`]). For a category split,
/// `threshold` is the index of its bins in `Walk::sets`.
#[derive(Debug, Clone, Copy)]
struct Step {
    threshold: f64,
    /// The predictor, and the flags [`MISSING_LEFT`], [`CATEGORY`] and [`LEAF`].
    feature: u32,
    left: u32,
}

const MISSING_LEFT: u32 = 1 << 31;
const CATEGORY: u32 = 1 << 30;
const LEAF: u32 = 1 << 29;
const FEATURE: u32 = LEAF - 1;

/// A tree laid out for walking rows of one kind (binned or records).
pub struct Walk {
    steps: Vec<Step>,
    sets: Vec<BinSet>,
    /// Binned, without category splits: a step that sends missing values left holds its
    /// threshold bin plus one, and a row's bin plus one (the missing bin, the largest,
    /// wrapping round to 0) is compared with it, so one comparison decides every bin.
    shifted: bool,
}

impl Walk {
    /// The walk of `tree` for binned rows (`binned`) or records. `None` when the tree does
    /// not have the layout a walk needs (children side by side, under 2²⁹ predictors); the
    /// caller then walks [`Tree::leaf`].
    pub fn new(tree: &Tree, binned: bool) -> Option<Walk> {
        let mut steps = Vec::with_capacity(tree.nodes.len());
        let mut sets = Vec::new();
        for (i, n) in tree.nodes.iter().enumerate() {
            if n.is_leaf() {
                steps.push(Step {
                    threshold: f64::INFINITY,
                    feature: LEAF | MISSING_LEFT,
                    left: i as u32,
                });
                continue;
            }
            if n.right != n.left + 1 || n.feature >= FEATURE {
                return None;
            }
            let mut feature = n.feature | if n.missing_left { MISSING_LEFT } else { 0 };
            let threshold = if !n.numeric {
                feature |= CATEGORY;
                sets.push(*n.left_bins());
                (sets.len() - 1) as f64
            } else if binned {
                f64::from(n.threshold_bin)
            } else {
                n.threshold
            };
            steps.push(Step {
                threshold,
                feature,
                left: n.left,
            });
        }
        let shifted = binned && sets.is_empty();
        if shifted {
            for s in steps
                .iter_mut()
                .filter(|s| s.feature & (LEAF | MISSING_LEFT) == MISSING_LEFT)
            {
                s.threshold += 1.0;
            }
        }
        Some(Walk {
            steps,
            sets,
            shifted,
        })
    }

    /// The leaf of each row `row(i)` for `i` in `0..out.len()`, into `out[i]`. (Kept out of
    /// line: one call walks many rows, and a profile then shows the walk by name.)
    #[inline(never)]
    pub fn leaves(&self, rows: Rows<'_>, row: impl Fn(usize) -> usize, out: &mut [u32]) {
        // Each way of reading a row's number gives, for a step, a test of a row owning what
        // it reads (the step's column and threshold by value, so they stay in registers), and
        // trees without category splits take a test without theirs.
        macro_rules! route {
            ($value:expr) => {{
                let value = $value;
                match self.sets.is_empty() {
                    true => self.route(out, &row, |s| {
                        let j = (s.feature & FEATURE) as usize;
                        move |r| self.goes_left::<false>(s, value(j, r))
                    }),
                    false => self.route(out, &row, |s| {
                        let j = (s.feature & FEATURE) as usize;
                        move |r| self.goes_left::<true>(s, value(j, r))
                    }),
                }
            }};
        }
        match rows {
            Rows::Binned(b) if self.shifted => match &b.cells {
                Cells::Narrow(c) => self.route_shifted(out, &row, c, b.rows),
                Cells::Wide(c) => self.route_shifted(out, &row, c, b.rows),
            },
            Rows::Binned(b) => match &b.cells {
                Cells::Narrow(c) => {
                    // A bin's number by table (missing: NaN), not by a test a step.
                    let number: [f64; 256] = std::array::from_fn(|v| cell(&[v as u8], 1, 0, 0));
                    let (number, cells, n) = (&number, &c[..], b.rows);
                    route!(move |j, r| number[usize::from(cells[j * n + r])])
                }
                Cells::Wide(c) => {
                    let (cells, n) = (&c[..], b.rows);
                    route!(move |j, r| cell(cells, n, j, r))
                }
            },
            Rows::Records(records) if self.sets.is_empty() && records.narrow().is_some() => {
                // Numbers only, with a single-precision copy: most rows are decided from the
                // copy (half the bytes), a row near the threshold from its full value.
                let (values, n) = (records.values(), records.rows);
                let narrow = records.narrow().unwrap_or_default();
                self.route(out, &row, |s| {
                    let j = (s.feature & FEATURE) as usize;
                    let (near, column) = (&narrow[j * n..(j + 1) * n], &values[j * n..(j + 1) * n]);
                    let (t, missing_left) = (s.threshold, s.feature & MISSING_LEFT != 0);
                    // Rounding never turns a larger number into a smaller one, so a copy
                    // below the threshold's own rounding is of a number below it, one above
                    // of a number above it; only a copy equal to it needs the number itself.
                    let pivot = t as f32;
                    #[allow(clippy::neg_cmp_op_on_partial_ord)]
                    move |r| {
                        let x = near[r];
                        // NaN: missing. Tested without a branch (rows go either way at
                        // random); the rare row whose copy equals the pivot (never NaN) is
                        // read in full, through a branch on a value kept whole
                        // (`black_box`: left to itself, the compiler branched on the side).
                        let side = match missing_left {
                            true => !(x >= pivot),
                            false => x < pivot,
                        };
                        if std::hint::black_box(x == pivot) {
                            match missing_left {
                                true => !(column[r] > t),
                                false => column[r] <= t,
                            }
                        } else {
                            side
                        }
                    }
                })
            }
            Rows::Records(records) if self.sets.is_empty() => {
                // Numbers only: a step's column read as a slice, and one comparison a row
                // (NaN is never above a threshold, nor at most one).
                let (values, n) = (records.values(), records.rows);
                self.route(out, &row, |s| {
                    let j = (s.feature & FEATURE) as usize;
                    let column = &values[j * n..(j + 1) * n];
                    let (t, missing_left) = (s.threshold, s.feature & MISSING_LEFT != 0);
                    #[allow(clippy::neg_cmp_op_on_partial_ord)]
                    move |r| match missing_left {
                        true => !(column[r] > t),
                        false => column[r] <= t,
                    }
                })
            }
            Rows::Records(records) => {
                let (values, n) = (records.values(), records.rows);
                route!(move |j, r| values[j * n + r])
            }
        }
    }

    /// [`Walk::route`] of binned rows (`rows` a column in `cells`) down shifted steps
    /// ([`Walk::shifted`]): a row goes left when its bin plus one if the step sends missing
    /// values left (the missing bin, the largest, wrapping round to 0), its bin otherwise, is
    /// at most the step's threshold: one integer comparison.
    #[inline(always)]
    fn route_shifted<B: Bin>(
        &self,
        out: &mut [u32],
        row: &impl Fn(usize) -> usize,
        cells: &[B],
        rows: usize,
    ) {
        // The missing bin is the largest a cell holds: all ones, a mask for the wrap.
        let wrap = B::MISSING.index();
        self.route(out, row, |s| {
            let j = (s.feature & FEATURE) as usize;
            let column = &cells[j * rows..(j + 1) * rows];
            // The top bit (a shift, not a test).
            let missing_left = (s.feature / MISSING_LEFT) as usize;
            let last = s.threshold as usize;
            move |r| (column[r].index() + missing_left) & wrap <= last
        })
    }

    /// Whether step `s` (not a leaf) sends a row whose number is `x` (NaN: missing) left.
    #[inline(always)]
    fn goes_left<const CATEGORIES: bool>(&self, s: Step, x: f64) -> bool {
        if CATEGORIES && s.feature & CATEGORY != 0 {
            match x.is_nan() || !(0.0..256.0).contains(&x) {
                true => s.feature & MISSING_LEFT != 0 && x.is_nan(),
                false => self.sets[s.threshold as usize].contains(x as u8),
            }
        } else {
            (x <= s.threshold) | (x.is_nan() & (s.feature & MISSING_LEFT != 0))
        }
    }

    /// Routes the rows down the tree node by node, as a grower partitions its rows rather
    /// than walking each row from the root: a node's rows (each kept as `row << 32 | i`; row
    /// numbers fit 32 bits) are split into those its step sends left and the others, so the
    /// node reads one column for all of them, in a run through the rows (a left child's rows
    /// in the order they came, a right child's in reverse); the rows reaching a leaf get it.
    /// `side(s)` is step `s`'s test of a row number (true: left). A node's rows are split
    /// from one buffer into the other, the left ones from the front and the right ones from
    /// the back, each row written to both places and one end moved, so the loop has no
    /// branch on the side and nothing is copied back.
    #[inline(always)]
    fn route<G: Fn(usize) -> bool>(
        &self,
        out: &mut [u32],
        row: &impl Fn(usize) -> usize,
        side: impl Fn(Step) -> G,
    ) {
        let n = out.len();
        let mut buffers: [Vec<u64>; 2] = [
            (0..n).map(|i| ((row(i) as u64) << 32) | i as u64).collect(),
            vec![0; n],
        ];
        // Nodes still to route, with their rows `buffers[b][start..end]` (never empty).
        let mut pending = Vec::with_capacity(64);
        if n > 0 {
            pending.push((0u32, 0usize, n, 0usize));
        }
        while let Some((node, start, end, b)) = pending.pop() {
            let s = self.steps[node as usize];
            let [first, second] = &mut buffers;
            let (from, to) = match b {
                0 => (&first[start..end], &mut second[start..end]),
                _ => (&second[start..end], &mut first[start..end]),
            };
            if s.feature & LEAF != 0 {
                for &v in from {
                    out[v as u32 as usize] = node;
                }
                continue;
            }
            let goes_left = side(s);
            let (mut low, mut high) = (0, to.len() - 1);
            for &v in from {
                let left = goes_left((v >> 32) as usize);
                // Both free places (the same one at the last row).
                to[low] = v;
                to[high] = v;
                low += usize::from(left);
                high = high.wrapping_sub(usize::from(!left));
            }
            let k = start + low;
            if k < end {
                pending.push((s.left + 1, k, end, 1 - b));
            }
            if start < k {
                pending.push((s.left, start, k, 1 - b));
            }
        }
    }
}

/// The leaf of each row `row(i)` of `tree` into `out[i]`: by a [`Walk`] where the tree allows
/// one, else row by row ([`Tree::leaf`]).
pub fn leaves(tree: &Tree, rows: Rows<'_>, row: impl Fn(usize) -> usize, out: &mut [u32]) {
    let walk = Walk::new(tree, matches!(rows, Rows::Binned(_)));
    leaves_by(walk.as_ref(), tree, rows, row, out);
}

/// [`leaves`] by `walk`, the tree's [`Walk`] for rows of the kind of `rows` built beforehand
/// (so callers predicting many blocks of rows build each tree's walk once), or row by row
/// when the tree has none.
pub fn leaves_by(
    walk: Option<&Walk>,
    tree: &Tree,
    rows: Rows<'_>,
    row: impl Fn(usize) -> usize,
    out: &mut [u32],
) {
    match walk {
        Some(walk) => walk.leaves(rows, row, out),
        None => {
            for (i, o) in out.iter_mut().enumerate() {
                *o = tree.leaf(rows, row(i)) as u32;
            }
        }
    }
}

/// A binned row's bin as a number (NaN: missing).
#[inline(always)]
fn cell<B: Bin>(cells: &[B], rows: usize, j: usize, r: usize) -> f64 {
    let b = cells[j * rows + r];
    if b == B::MISSING {
        f64::NAN
    } else {
        b.index() as f64
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::binning::Records;
    use crate::fit::forest_from_csv_with;
    use crate::model::Ensemble;

    #[test]
    fn a_walk_reaches_the_leaves_a_row_by_row_walk_reaches() {
        // Two ways of walking the same tree (our own consistency rule, no source needed), on
        // numbers, categories and missing values, binned rows and records; and on numbers
        // alone, whose binned walk is shifted (`Walk::shifted`); small cells and, with the
        // exact split search, wide ones.
        let (mut categories, mut shifted_left, mut wide_shifted_left) = (0, 0, 0);
        let kinds = [false, true].map(|n| [false, true].map(move |e| (n, e)));
        for (numbers_only, exact) in kinds.into_iter().flatten() {
            let mut text = String::from("y,a,b,c\n");
            for i in 0..500u64 {
                let (a, b) = ((i * 37) % 101, (i * 53) % 89);
                let y = ["p", "q"][((a + b + i % 7) % 2) as usize];
                let b = if i % 9 == 0 {
                    "NA".to_string()
                } else {
                    b.to_string()
                };
                let c = match numbers_only {
                    true => (i % 4).to_string(),
                    false => ["k", "l", "m", "n"][(i % 4) as usize].to_string(),
                };
                text += &format!("{y},{a},{b},{c}\n");
            }
            let mut sets = vec![("trees".to_string(), "20".to_string())];
            if exact {
                sets.push(("split_search".to_string(), "exact".to_string()));
            }
            let (table, fitted) = forest_from_csv_with(&text, &sets);
            assert_eq!(matches!(fitted.binned.cells, Cells::Wide(_)), exact);
            let (records, _) = fitted.model.records(&table).unwrap();
            let Ensemble::Forest(forest) = &fitted.model.ensemble else {
                unreachable!("a forest")
            };
            for tree in &forest.trees {
                let splits = || tree.nodes.iter().filter(|n| !n.is_leaf());
                categories += splits().filter(|n| !n.numeric).count();
                if numbers_only {
                    let left = splits().filter(|n| n.missing_left).count();
                    shifted_left += left;
                    wide_shifted_left += if exact { left } else { 0 };
                }
                for (rows, binned) in [
                    (Rows::Binned(&fitted.binned), true),
                    (Rows::Records(&records), false),
                ] {
                    let walk = Walk::new(tree, binned).expect("children side by side");
                    assert_eq!(walk.shifted, binned && numbers_only);
                    let n = rows.len();
                    let mut out = vec![0; n];
                    walk.leaves(rows, |i| i, &mut out);
                    let each: Vec<u32> = (0..n).map(|r| tree.leaf(rows, r) as u32).collect();
                    assert_eq!(out, each);
                    // Any list of rows, in any order.
                    let some: Vec<usize> = (0..n).rev().step_by(3).collect();
                    let mut out = vec![0; some.len()];
                    walk.leaves(rows, |i| some[i], &mut out);
                    assert!(some.iter().zip(&out).all(|(&r, &l)| each[r] == l));
                    // No row, one, a few (a node's last row written to both places at once).
                    for len in [0, 1, 5, 8, 9] {
                        let mut out = vec![0; len];
                        walk.leaves(rows, |i| some[i], &mut out);
                        assert!(some.iter().zip(&out).all(|(&r, &l)| each[r] == l));
                    }
                }
            }
        }
        assert!(categories > 0, "the check covers category splits");
        assert!(
            shifted_left > wide_shifted_left && wide_shifted_left > 0,
            "the check covers shifted steps sending missing values left, small and wide cells"
        );
    }

    #[test]
    fn records_with_a_single_precision_copy_reach_the_leaves_their_full_values_reach() {
        // The walk deciding rows from `Records::narrow` against row-by-row walks of the full
        // values (our own consistency rule, no source needed), on numbers placed at and
        // around every threshold of a forest: the threshold, its rounding to single precision
        // and that rounding's neighbours, the doubles beside each, the numbers halfway to the
        // neighbours (where rounding turns) and beside them, zeros of both signs,
        // infinities, numbers beyond single precision's range, subnormals and missing
        // values. Thresholds of fractional values (mostly not single-precision numbers) and
        // of integers (exactly so). Mutation-checked: a pivot rounded up, no full read of the
        // rows whose copy equals it, or missing values sent right all fail.
        let mut close = 0;
        for fractional in [true, false] {
            let mut text = String::from("y,a,b,c\n");
            for i in 0..400u64 {
                let a = match fractional {
                    true => ((i * 7919) % 1000) as f64 / 7.0 - 60.0,
                    false => ((i * 31) % 97) as f64 - 40.0,
                };
                let b = if i % 11 == 0 {
                    "NA".to_string()
                } else {
                    format!("{}", ((i * 13) % 83) as f64 / 3.0)
                };
                let c = ((i * 17) % 50) as f64 / 9.0;
                let y = ["p", "q"][((i * 7 + (i % 5)) % 3 % 2) as usize];
                text += &format!("{y},{a},{b},{c}\n");
            }
            let sets = [("trees".to_string(), "10".to_string())];
            let (_, fitted) = forest_from_csv_with(&text, &sets);
            let Ensemble::Forest(forest) = &fitted.model.ensemble else {
                unreachable!("a forest")
            };
            let mut near = vec![
                0.0,
                -0.0,
                f64::NAN,
                f64::INFINITY,
                f64::NEG_INFINITY,
                1e300,
                -1e300,
                1e-310,
                -1e-310,
            ];
            for tree in &forest.trees {
                for n in tree.nodes.iter().filter(|n| !n.is_leaf()) {
                    let t = n.threshold;
                    let pivot = t as f32;
                    let (low, high) = (pivot.next_down(), pivot.next_up());
                    for x in [t, pivot.into(), low.into(), high.into()] {
                        near.extend([x, x.next_up(), x.next_down(), -x]);
                    }
                    // Halfway to the single-precision neighbours: where rounding turns.
                    let (p, low, high) = (f64::from(pivot), f64::from(low), f64::from(high));
                    for x in [p / 2.0 + low / 2.0, p / 2.0 + high / 2.0] {
                        near.extend([x, x.next_up(), x.next_down()]);
                    }
                }
            }
            // Each value in every predictor, the others missing or not.
            let rows = near.len() * 2;
            let mut values = Vec::with_capacity(rows * 3);
            values.extend(near.iter().flat_map(|&x| [x, x]));
            values.extend(near.iter().flat_map(|&x| [f64::NAN, x]));
            values.extend(near.iter().flat_map(|&x| [x, f64::NAN]));
            let full = Records::from_columns(rows, values);
            let narrow = full.clone().with_narrow_copy();
            for tree in &forest.trees {
                let walk = Walk::new(tree, false).expect("children side by side");
                let mut out = vec![0; rows];
                walk.leaves(Rows::Records(&narrow), |i| i, &mut out);
                for (r, &leaf) in out.iter().enumerate() {
                    assert_eq!(leaf as usize, tree.leaf(Rows::Records(&full), r), "row {r}");
                }
            }
            // The rows the copy cannot decide were met (each then read in full).
            for n in forest
                .trees
                .iter()
                .flat_map(|t| &t.nodes)
                .filter(|n| !n.is_leaf())
            {
                let pivot = n.threshold as f32;
                close += near.iter().filter(|&&x| x as f32 == pivot).count();
            }
        }
        assert!(
            close > 1000,
            "{close} rows within a rounding of a threshold"
        );
    }
}
