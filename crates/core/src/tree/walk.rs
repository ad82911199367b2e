//! Walking many rows down one tree at once.
//!
//! [`Tree::leaf`] walks one row through the tree's full nodes ([`super::Node`], over a hundred
//! bytes each, so a deep forest tree of ten thousand nodes does not fit the cache) and
//! branches on each side taken (often mispredicted on noisy data). A [`Walk`] is the same tree as
//! sixteen-byte steps, and walks eight rows side by side: each step picks the child without a
//! branch (a node's children are stored next to each other: right = left + 1; a leaf leads to
//! itself), and the eight rows' memory reads overlap instead of waiting on one another.
//! (Common practice for tree ensembles, no source.) Same leaves as [`Tree::leaf`], tested;
//! `grow_bench` times both (140 and 60 ns a row and tree on its forest).

use super::{BinSet, Rows, Tree};
use crate::binning::{Bin, Cells};

/// One node for the walk: numbers up to `threshold` go left (a bin number for binned rows, a
/// value for records; +∞ for leaves, which lead to themselves). For a category split,
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

/// Rows walked side by side.
const LANES: usize = 8;

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
                sets.push(n.categories);
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
        // Each way of reading a row's number is a closure owning what it reads (slices and
        // sizes by value, so they stay in registers rather than being read again at every
        // step), and trees without category splits take a walk without their test.
        macro_rules! walk {
            ($value:expr) => {
                match self.sets.is_empty() {
                    true => self.walk::<false>(out, &row, $value),
                    false => self.walk::<true>(out, &row, $value),
                }
            };
        }
        // A shifted step ([`Walk::shifted`]) of bin `b`: left when `(b + 1) mod 2^bits` is at
        // most its threshold if missing values go left, `b` otherwise.
        macro_rules! shifted {
            ($cells:expr, $n:expr, $key:expr) => {{
                let (cells, n) = ($cells, $n);
                self.walk_with(out, &row, move |s: Step, r: usize| {
                    let b = usize::from(cells[(s.feature & FEATURE) as usize * n + r]);
                    // The top bit (a shift, not a test).
                    let missing_left = (s.feature / MISSING_LEFT) as usize;
                    // Right when not at most (neither side is ever NaN; written so, it
                    // compiles to one instruction fewer than "above", measured).
                    #[allow(clippy::neg_cmp_op_on_partial_ord)]
                    let right = !($key(b + missing_left) <= s.threshold);
                    s.left + u32::from(right)
                })
            }};
        }
        match rows {
            Rows::Binned(b) if self.shifted => match &b.cells {
                Cells::Narrow(c) => {
                    let key: [f64; 256] = std::array::from_fn(|v| v as f64);
                    shifted!(&c[..], b.rows, |v: usize| key[v & 255])
                }
                Cells::Wide(c) => shifted!(&c[..], b.rows, |v: usize| (v & 0xFFFF) as f64),
            },
            Rows::Binned(b) => match &b.cells {
                Cells::Narrow(c) => {
                    // A bin's number by table (missing: NaN), not by a test a step.
                    let number: [f64; 256] = std::array::from_fn(|v| cell(&[v as u8], 1, 0, 0));
                    let (number, cells, n) = (&number, &c[..], b.rows);
                    walk!(move |j, r| number[usize::from(cells[j * n + r])])
                }
                Cells::Wide(c) => {
                    let (cells, n) = (&c[..], b.rows);
                    walk!(move |j, r| cell(cells, n, j, r))
                }
            },
            Rows::Records(records) => {
                let (values, n) = (records.values(), records.rows);
                walk!(move |j, r| values[j * n + r])
            }
        }
    }

    /// Walks the rows eight at a time, a lane taking the next row as soon as its row reaches
    /// a leaf, every lane busy until the rows run out; then the last rows each to its leaf.
    /// `value(j, r)` is row `r`'s number in predictor `j` (NaN: missing).
    #[inline(always)]
    fn walk<const CATEGORIES: bool>(
        &self,
        out: &mut [u32],
        row: &impl Fn(usize) -> usize,
        value: impl Fn(usize, usize) -> f64,
    ) {
        // The node after `s` for row `r`.
        let child = |s: Step, r: usize| -> u32 {
            let x = value((s.feature & FEATURE) as usize, r);
            let left = if CATEGORIES && s.feature & CATEGORY != 0 {
                match x.is_nan() || !(0.0..256.0).contains(&x) {
                    true => s.feature & MISSING_LEFT != 0 && x.is_nan(),
                    false => self.sets[s.threshold as usize].contains(x as u8),
                }
            } else {
                (x <= s.threshold) | (x.is_nan() & (s.feature & MISSING_LEFT != 0))
            };
            s.left + u32::from(!left)
        };
        self.walk_with(out, row, child)
    }

    /// The lanes of [`Walk::walk`]; `child(s, r)` is the node after step `s` for row `r`.
    #[inline(always)]
    fn walk_with(
        &self,
        out: &mut [u32],
        row: &impl Fn(usize) -> usize,
        child: impl Fn(Step, usize) -> u32,
    ) {
        let steps = &self.steps[..];
        let n = out.len();
        let lanes = LANES.min(n);
        // Lane k walks row `of[k]` (output `slot[k]`; `usize::MAX`: done), now at node `at[k]`.
        let mut at = [0u32; LANES];
        let mut of = [0usize; LANES];
        let mut slot = [usize::MAX; LANES];
        for k in 0..lanes {
            (slot[k], of[k]) = (k, row(k));
        }
        let mut next = lanes;
        if lanes == LANES {
            'busy: loop {
                for k in 0..LANES {
                    let s = steps[at[k] as usize];
                    if s.feature & LEAF != 0 {
                        out[slot[k]] = at[k];
                        if next == n {
                            slot[k] = usize::MAX;
                            break 'busy;
                        }
                        (at[k], slot[k], of[k]) = (0, next, row(next));
                        next += 1;
                        continue;
                    }
                    at[k] = child(s, of[k]);
                }
            }
        }
        for k in (0..lanes).filter(|&k| slot[k] != usize::MAX) {
            let mut a = at[k];
            loop {
                let s = steps[a as usize];
                if s.feature & LEAF != 0 {
                    break;
                }
                a = child(s, of[k]);
            }
            out[slot[k]] = a;
        }
    }
}

/// The leaf of each row `row(i)` of `tree` into `out[i]`: by a [`Walk`] where the tree allows
/// one, else row by row ([`Tree::leaf`]).
pub fn leaves(tree: &Tree, rows: Rows<'_>, row: impl Fn(usize) -> usize, out: &mut [u32]) {
    match Walk::new(tree, matches!(rows, Rows::Binned(_))) {
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
    use crate::fit::forest_from_csv;
    use crate::model::Ensemble;

    #[test]
    fn a_walk_reaches_the_leaves_a_row_by_row_walk_reaches() {
        // Two ways of walking the same tree (our own consistency rule, no source needed), on
        // numbers, categories and missing values, binned rows and records; and on numbers
        // alone, whose binned walk is shifted (`Walk::shifted`).
        let (mut categories, mut shifted_left) = (0, 0);
        for numbers_only in [false, true] {
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
            let (table, fitted) = forest_from_csv(&text, 20);
            let (records, _) = fitted.model.records(&table).unwrap();
            let Ensemble::Forest(forest) = &fitted.model.ensemble else {
                unreachable!("a forest")
            };
            for tree in &forest.trees {
                let splits = || tree.nodes.iter().filter(|n| !n.is_leaf());
                categories += splits().filter(|n| !n.numeric).count();
                if numbers_only {
                    shifted_left += splits().filter(|n| n.missing_left).count();
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
                    // Fewer rows than lanes, as many, one more (the busy lanes and the last rows).
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
            shifted_left > 0,
            "the check covers shifted steps sending missing values left"
        );
    }
}
