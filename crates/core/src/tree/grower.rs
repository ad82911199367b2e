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

use super::criterion::Criterion;
use super::{BinSet, Node, Tree};
use crate::binning::{BinRule, BinnedMatrix, MISSING_BIN};

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
}

impl Default for GrowSettings {
    fn default() -> Self {
        GrowSettings {
            criterion: Criterion::Gini,
            max_depth: None,
            min_rows_leaf: 1,
            min_rows_split: 2,
            min_gain: 0.0,
        }
    }
}

/// Chooses which predictors a node may split on (random forests draw a subset). It gets the
/// list of all predictors and keeps the ones to try, in the order to try them.
pub type PredictorChooser<'a> = &'a mut dyn FnMut(&mut Vec<usize>);

struct Best {
    gain: f64,
    feature: usize,
    left_bins: BinSet,
    threshold_bin: Option<u8>,
    /// The first non-empty bin on the right of a number split.
    next_bin: Option<u8>,
}

/// Grows a tree on `rows` of `binned`. `stats` holds `width` numbers per row of `binned`.
pub fn grow(
    binned: &BinnedMatrix,
    stats: &[f64],
    width: usize,
    rows: &[u32],
    settings: &GrowSettings,
    mut choose: Option<PredictorChooser<'_>>,
) -> Tree {
    let criterion = settings.criterion;
    let outputs = match criterion {
        Criterion::SquaredError => 1,
        _ => width,
    };
    let mut work: Vec<u32> = rows.to_vec();
    let mut scratch: Vec<u32> = Vec::with_capacity(rows.len());
    let mut tree = Tree {
        nodes: Vec::new(),
        values: Vec::new(),
        outputs,
    };
    // (node index, start, end, depth)
    let mut stack: Vec<(usize, usize, usize, usize)> = vec![(0, 0, work.len(), 0)];
    tree.nodes.push(empty_node());
    // Kept zeroed between uses: only the bins a node touches are filled and cleared again,
    // so small nodes deep in a tree cost in proportion to their rows, not to 256 bins.
    let mut hist = vec![0.0f64; 256 * (width + 1)];
    let mut touched: Vec<u8> = Vec::with_capacity(256);
    // Reused by every node and predictor: the bins in scan order, and the scan's sums.
    let mut order: Vec<u8> = Vec::with_capacity(256);
    let mut sums = ScanSums::new(width);
    let mut totals = vec![0.0f64; width];
    let mut candidates: Vec<usize> = Vec::new();
    while let Some((id, start, end, depth)) = stack.pop() {
        let node_rows = &work[start..end];
        totals.iter_mut().for_each(|t| *t = 0.0);
        let (mut y_min, mut y_max) = (f64::INFINITY, f64::NEG_INFINITY);
        for &r in node_rows {
            let s = &stats[r as usize * width..(r as usize + 1) * width];
            for (t, v) in totals.iter_mut().zip(s) {
                *t += v;
            }
            if criterion == Criterion::SquaredError && s[0] > 0.0 {
                let y = s[1] / s[0];
                y_min = y_min.min(y);
                y_max = y_max.max(y);
            }
        }
        tree.nodes[id].value = tree.values.len() as u32;
        tree.nodes[id].weight = criterion.weight(&totals);
        criterion.values(&totals, &mut tree.values);
        let n = node_rows.len();
        let parent_cost = criterion.cost(&totals);
        let pure = match criterion {
            Criterion::SquaredError => y_max <= y_min,
            _ => parent_cost <= 1e-12 * tree.nodes[id].weight.max(1.0),
        };
        if pure
            || n < settings.min_rows_split
            || n < 2 * settings.min_rows_leaf.max(1)
            || settings.max_depth.is_some_and(|d| depth >= d)
        {
            continue;
        }
        candidates.clear();
        candidates.extend(0..binned.columns.len());
        if let Some(choose) = choose.as_mut() {
            choose(&mut candidates);
        }
        let mut best: Option<Best> = None;
        for &j in &candidates {
            fill_histogram(
                &mut hist,
                &mut touched,
                binned.column(j),
                node_rows,
                stats,
                width,
            );
            let col = &binned.columns[j];
            order.clear();
            order.extend(touched.iter().copied().filter(|&b| b != MISSING_BIN));
            match col.rule {
                BinRule::Numbers { .. } => order.sort_unstable(),
                BinRule::Levels { .. } => sort_levels(&hist, &mut order, width, criterion),
            }
            scan(
                &hist,
                &order,
                &mut sums,
                j,
                matches!(col.rule, BinRule::Numbers { .. }),
                parent_cost,
                settings,
                &mut best,
            );
            let stride = width + 1;
            for &b in &touched {
                hist[b as usize * stride..(b as usize + 1) * stride]
                    .iter_mut()
                    .for_each(|h| *h = 0.0);
            }
        }
        // Like CART as usually implemented, a split that gains nothing is still made when no
        // better one exists (so XOR-like patterns can be found a level down); `min_gain`
        // raises the bar.
        let Some(best) = best else { continue };
        if best.gain < settings.min_gain - 1e-12 * tree.nodes[id].weight.max(1.0) {
            continue;
        }
        // Partition the node's rows: left first, both sides keeping their order.
        let column = binned.column(best.feature);
        scratch.clear();
        let mut k = start;
        for i in start..end {
            let r = work[i];
            if best.left_bins.contains(column[r as usize]) {
                work[k] = r;
                k += 1;
            } else {
                scratch.push(r);
            }
        }
        work[k..end].copy_from_slice(&scratch);
        let (left, right) = (tree.nodes.len(), tree.nodes.len() + 1);
        tree.nodes.push(empty_node());
        tree.nodes.push(empty_node());
        let node = &mut tree.nodes[id];
        node.feature = best.feature as u32;
        node.left_bins = best.left_bins;
        node.threshold_bin = best.threshold_bin;
        node.threshold = match (
            &binned.columns[best.feature].rule,
            best.threshold_bin,
            best.next_bin,
        ) {
            (BinRule::Numbers { low, high, .. }, Some(l), Some(r)) => {
                let (a, b) = (high[l as usize], low[r as usize]);
                let t = a / 2.0 + b / 2.0;
                Some(if t == b || t.is_infinite() { a } else { t })
            }
            _ => None,
        };
        node.left = left as u32;
        node.right = right as u32;
        node.gain = best.gain;
        // Right pushed first so the left subtree is grown first (depth-first, left to right).
        stack.push((right, k, end, depth + 1));
        stack.push((left, start, k, depth + 1));
    }
    tree
}

fn empty_node() -> Node {
    Node {
        feature: 0,
        left_bins: BinSet::default(),
        threshold_bin: None,
        threshold: None,
        left: 0,
        right: 0,
        weight: 0.0,
        gain: 0.0,
        value: 0,
    }
}

/// Sums statistics (and a row count) per bin of one predictor over the node's rows.
/// `hist` must be all zero on entry; `touched` receives the bins filled.
fn fill_histogram(
    hist: &mut [f64],
    touched: &mut Vec<u8>,
    column: &[u8],
    rows: &[u32],
    stats: &[f64],
    width: usize,
) {
    touched.clear();
    let stride = width + 1;
    for &r in rows {
        let b = column[r as usize] as usize;
        let h = &mut hist[b * stride..(b + 1) * stride];
        if h[width] == 0.0 {
            touched.push(b as u8);
        }
        let s = &stats[r as usize * width..(r as usize + 1) * width];
        for (a, v) in h.iter_mut().zip(s) {
            *a += v;
        }
        h[width] += 1.0;
    }
}

/// Sorts category bins into the order their splits are scanned: by mean response where it
/// is defined (two classes, regression), otherwise by bin.
fn sort_levels(hist: &[f64], bins: &mut [u8], width: usize, criterion: Criterion) {
    let stride = width + 1;
    let key = |b: u8| criterion.order_key(&hist[b as usize * stride..b as usize * stride + width]);
    bins.sort_by(|&a, &b| match (key(a), key(b)) {
        (Some(x), Some(y)) => x.total_cmp(&y).then(a.cmp(&b)),
        _ => a.cmp(&b),
    });
}

/// Running sums of one scan (statistics and a row count each), allocated once per tree.
struct ScanSums {
    present: Vec<f64>,
    left: Vec<f64>,
    right: Vec<f64>,
    l_miss: Vec<f64>,
    r_miss: Vec<f64>,
}

impl ScanSums {
    fn new(width: usize) -> Self {
        let z = vec![0.0; width + 1];
        ScanSums {
            present: z.clone(),
            left: z.clone(),
            right: z.clone(),
            l_miss: z.clone(),
            r_miss: z,
        }
    }
}

/// Scans the split points of one predictor, bins in `order`, updating `best`.
#[allow(clippy::too_many_arguments)]
fn scan(
    hist: &[f64],
    order: &[u8],
    sums: &mut ScanSums,
    feature: usize,
    numeric: bool,
    parent_cost: f64,
    settings: &GrowSettings,
    best: &mut Option<Best>,
) {
    let stride = sums.present.len();
    let width = stride - 1;
    let criterion = settings.criterion;
    let missing = &hist[MISSING_BIN as usize * stride..MISSING_BIN as usize * stride + stride];
    let ScanSums {
        present,
        left,
        right,
        l_miss,
        r_miss,
    } = sums;
    present.iter_mut().for_each(|p| *p = 0.0);
    left.iter_mut().for_each(|l| *l = 0.0);
    for &b in order {
        for (p, h) in present
            .iter_mut()
            .zip(&hist[b as usize * stride..(b as usize + 1) * stride])
        {
            *p += h;
        }
    }
    let min_leaf = settings.min_rows_leaf.max(1) as f64;
    for (i, &b) in order.iter().enumerate() {
        for (l, h) in left
            .iter_mut()
            .zip(&hist[b as usize * stride..(b as usize + 1) * stride])
        {
            *l += h;
        }
        for k in 0..stride {
            right[k] = present[k] - left[k];
        }
        // Missing values to the left, then to the right (tried once when there are none).
        for missing_left in [true, false] {
            for k in 0..stride {
                l_miss[k] = left[k] + if missing_left { missing[k] } else { 0.0 };
                r_miss[k] = right[k] + if missing_left { 0.0 } else { missing[k] };
            }
            if l_miss[width] < min_leaf || r_miss[width] < min_leaf {
                continue;
            }
            let gain =
                parent_cost - criterion.cost(&l_miss[..width]) - criterion.cost(&r_miss[..width]);
            if best.as_ref().is_none_or(|b| gain > b.gain) {
                // Numbers: every bin up to this one, including bins this node has no rows in,
                // so new values fall on the side their size says. Categories: the bins scanned.
                let mut left_bins = if numeric {
                    BinSet::up_to(b)
                } else {
                    BinSet::default()
                };
                if !numeric {
                    for &lb in &order[..=i] {
                        left_bins.insert(lb);
                    }
                }
                if missing_left {
                    left_bins.insert(MISSING_BIN);
                }
                *best = Some(Best {
                    gain,
                    feature,
                    left_bins,
                    threshold_bin: numeric.then_some(b),
                    next_bin: order[i + 1..]
                        .iter()
                        .copied()
                        .find(|&nb| hist[nb as usize * stride + width] > 0.0),
                });
            }
            if missing[width] == 0.0 {
                break;
            }
        }
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
        let mut state = 0x2545_F491_4F6C_DD1Du64;
        let mut next = || {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            state
        };
        let mut text = String::from("y,x1,x2,x3,c\n");
        for _ in 0..400 {
            let (a, b, c) = (next() % 1000, next() % 1000, next() % 1000);
            let cat = ["p", "q", "r", "s"][(next() % 4) as usize];
            let y = ["u", "v", "w"][(next() % 3) as usize];
            let x3 = if next() % 10 == 0 {
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
        assert_eq!(root.threshold, Some(19.0), "split midway between 18 and 20");
        assert!(
            !super::super::missing_goes_left(root),
            "missing rows look like the high side"
        );
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
        let left: Vec<u8> = (0..4).filter(|&b| root.left_bins.contains(b)).collect();
        assert!(left == [1, 3] || left == [0, 2], "left bins {left:?}");
        assert!(
            (root.gain - 20.0).abs() < 1e-9,
            "Gini cost 40·0.5 = 20 falls to 0: {}",
            root.gain
        );
    }
}
