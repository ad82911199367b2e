//! Binning: each predictor's values mapped once to at most 255 bins (a `u8` per cell, stored
//! column by column), with bin 255 reserved for missing values. Every tree learner works on
//! these bins. In *exact* mode every distinct value gets a bin of its own (`u16` cells, bin
//! 65535 for missing), so the histogram search visits every split point a sort-based search
//! would: this is the mode for small data and for comparisons with sort-based CART.
//!
//! New records (to score) are not binned: [`Records`] keeps numbers as they are, and trees
//! compare them with their split thresholds; categories are mapped to their training bins
//! by label.
//!
//! Numbers: when a predictor has at most `max_bins` distinct values, the thresholds are the
//! midpoints between neighbouring distinct values (so every split a sort-based search could
//! make is available); otherwise they are quantiles of the values with midpoint interpolation,
//! duplicates removed (the rule of scikit-learn's histogram gradient boosting binner, from
//! memory). Bin `b` holds the values in `(t[b-1], t[b]]`.
//!
//! Categories: each level seen in at least `min_level_rows` rows gets a bin of its own; rarer
//! levels share one pooled bin. Levels never seen in training follow the pooled bin.

use crate::design::{Design, PredictorValues};
use crate::error::{Error, ErrorKind, Result};

/// The bin of missing values in the default (`u8`) cells.
pub const MISSING_BIN: u8 = 255;

/// Most distinct values per predictor in exact mode (`u16` cells, one value kept for missing).
pub const MAX_EXACT_BINS: usize = 65_535;

/// A cell type of a binned matrix: `u8` (histogram mode) or `u16` (exact mode).
pub trait Bin: Copy + Eq + Ord + Send + Sync + 'static {
    /// The bin of missing values.
    const MISSING: Self;
    fn index(self) -> usize;
    /// The cell for a bin number (`None`: missing). The caller keeps `bin` in range.
    fn from_bin(bin: Option<usize>) -> Self;
}

impl Bin for u8 {
    const MISSING: u8 = MISSING_BIN;
    #[inline(always)]
    fn index(self) -> usize {
        self as usize
    }
    fn from_bin(bin: Option<usize>) -> u8 {
        bin.map_or(MISSING_BIN, |b| b as u8)
    }
}

impl Bin for u16 {
    const MISSING: u16 = u16::MAX;
    #[inline(always)]
    fn index(self) -> usize {
        self as usize
    }
    fn from_bin(bin: Option<usize>) -> u16 {
        bin.map_or(u16::MAX, |b| b as u16)
    }
}

/// Binning settings.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BinSettings {
    /// Bins for values that are present, 2..=255.
    pub max_bins: usize,
    /// Category levels seen in fewer rows share one pooled bin.
    pub min_level_rows: usize,
    /// Every distinct number its own bin (`u16` cells; `max_bins` then applies to
    /// categories only).
    pub exact: bool,
}

impl Default for BinSettings {
    fn default() -> Self {
        BinSettings {
            max_bins: 255,
            min_level_rows: 1,
            exact: false,
        }
    }
}

/// How one predictor's values map to bins.
#[derive(Debug, Clone, PartialEq)]
pub enum BinRule {
    /// Bin = the number of thresholds below the value. `low[b]` and `high[b]` are the
    /// smallest and largest training values in bin `b` (a tree's threshold between two bins
    /// is placed midway between the node's values on either side, as sort-based CART does,
    /// or in the nearest gap between bins' values when that point lies inside one).
    Numbers {
        thresholds: Vec<f64>,
        low: Vec<f64>,
        high: Vec<f64>,
    },
    /// `bin_of_level[code]` for each level of the column; unseen levels go to `pooled_bin`.
    Levels {
        bin_of_level: Vec<u8>,
        pooled_bin: u8,
    },
}

impl BinRule {
    /// The bin of a number (`None`: missing, NaN).
    pub fn bin_of_number(&self, x: f64) -> Option<usize> {
        match self {
            _ if x.is_nan() => None,
            BinRule::Numbers { thresholds, .. } => Some(thresholds.partition_point(|&t| t < x)),
            BinRule::Levels { .. } => None,
        }
    }

    /// The bin of a category code (`None` for [`crate::data::MISSING_CODE`]).
    pub fn bin_of_level(&self, code: u32) -> Option<usize> {
        match self {
            BinRule::Levels {
                bin_of_level,
                pooled_bin,
            } => {
                if code == crate::data::MISSING_CODE {
                    None
                } else {
                    Some(
                        bin_of_level
                            .get(code as usize)
                            .copied()
                            .unwrap_or(*pooled_bin) as usize,
                    )
                }
            }
            BinRule::Numbers { .. } => None,
        }
    }

    pub fn is_numeric(&self) -> bool {
        matches!(self, BinRule::Numbers { .. })
    }
}

/// One binned predictor.
#[derive(Debug, Clone, PartialEq)]
pub struct BinnedColumn {
    pub name: String,
    pub rule: BinRule,
    /// Bins in use for present values (`0..bins`).
    pub bins: usize,
    /// Rows whose value is missing (in [`MISSING_BIN`]).
    pub missing: usize,
    /// For categories: the training labels, by level code (new data is matched by label).
    pub levels: Vec<String>,
}

/// The cells of a binned matrix: `rows` per column, column after column.
#[derive(Debug, Clone, PartialEq)]
pub enum Cells {
    /// Histogram mode: at most 255 bins per predictor.
    Narrow(Vec<u8>),
    /// Exact mode: every distinct value a bin.
    Wide(Vec<u16>),
}

/// All predictors binned: `rows` cells per column, column after column.
#[derive(Debug, Clone, PartialEq)]
pub struct BinnedMatrix {
    pub rows: usize,
    pub columns: Vec<BinnedColumn>,
    pub cells: Cells,
}

impl BinnedMatrix {
    /// The bin of row `row` in column `j` (`None`: missing).
    #[inline]
    pub fn bin(&self, j: usize, row: usize) -> Option<usize> {
        let i = j * self.rows + row;
        match &self.cells {
            Cells::Narrow(c) => Some(c[i]).filter(|&b| b != u8::MISSING).map(usize::from),
            Cells::Wide(c) => Some(c[i]).filter(|&b| b != u16::MISSING).map(usize::from),
        }
    }

    /// The bins of column `j` in the narrow (`u8`) form, for tests and tools; `None` in
    /// exact mode.
    pub fn narrow_column(&self, j: usize) -> Option<&[u8]> {
        match &self.cells {
            Cells::Narrow(c) => Some(&c[j * self.rows..(j + 1) * self.rows]),
            Cells::Wide(_) => None,
        }
    }
}

/// Sorts `values` in the order of [`f64::total_cmp`], the same numbers in the same places
/// (values equal under that order have the same bits), by sorting them as integers: the
/// bits of a number, with the other bits of a negative one flipped, order as that order
/// does (the mapping `f64::total_cmp` itself compares by). Binning five folds of 40,000 rows
/// × 30 numbers took 1.67 -> 1.19 G instructions (callgrind) against sorting with
/// `f64::total_cmp`.
pub fn sort_numbers(values: &mut [f64]) {
    let mut keys: Vec<i64> = values.iter().map(|&x| order_key(x)).collect();
    keys.sort_unstable();
    for (v, k) in values.iter_mut().zip(keys) {
        // Its own inverse: the sign bit is kept, so the same bits are flipped back.
        *v = f64::from_bits(order_key(f64::from_bits(k as u64)) as u64);
    }
}

/// An integer that orders as [`f64::total_cmp`] orders `x`: its bits, with the other bits of
/// a negative number flipped (the mapping `total_cmp` itself compares by).
#[inline(always)]
pub fn order_key(x: f64) -> i64 {
    let bits = x.to_bits();
    (bits ^ ((((bits as i64) >> 63) as u64) >> 1)) as i64
}

/// Thresholds for numbers, by the rule in this module's header.
pub fn number_thresholds(values: &[f64], max_bins: usize) -> Vec<f64> {
    let mut sorted: Vec<f64> = values.iter().copied().filter(|x| !x.is_nan()).collect();
    sort_numbers(&mut sorted);
    thresholds_of_sorted(&sorted, max_bins)
}

/// [`number_thresholds`] of numbers already in [`sort_numbers`]' order, NaN left out.
fn thresholds_of_sorted(sorted: &[f64], max_bins: usize) -> Vec<f64> {
    // The distinct values (as `==` tells them), while there are few enough to be bins.
    let mut distinct: Vec<f64> = Vec::with_capacity(max_bins + 1);
    for &x in sorted {
        if distinct.last() != Some(&x) {
            distinct.push(x);
            if distinct.len() > max_bins {
                break;
            }
        }
    }
    if distinct.len() <= max_bins {
        return distinct
            .windows(2)
            .map(|w| w[0] + (w[1] - w[0]) * 0.5)
            .collect();
    }
    // Quantiles k / max_bins, k = 1 .. max_bins - 1, midway between the two order
    // statistics around the quantile's position (numpy's "midpoint" method).
    let n = sorted.len();
    let mut thresholds: Vec<f64> = (1..max_bins)
        .map(|k| {
            let pos = k as f64 / max_bins as f64 * (n - 1) as f64;
            let (lo, hi) = (pos.floor() as usize, pos.ceil() as usize);
            0.5 * (sorted[lo] + sorted[hi])
        })
        .collect();
    thresholds.dedup();
    thresholds
}

/// Each number predictor's rows with a value (NaN left out) in [`sort_numbers`]' order of
/// their values; `None` for categories. Sorted once for a design and shared by every
/// validation fit on some of its rows ([`bin_design_presorted`]), whose own sorts and
/// searches of the thresholds it replaces (a fold's sort of 40,000 numbers a predictor,
/// then a binary search a number, were a quarter of a one-tree 5-fold CV). Four bytes a
/// number, for as long as the validation runs.
pub struct SortedColumns {
    /// The rows of the design sorted.
    rows: usize,
    orders: Vec<Option<Vec<u32>>>,
}

/// [`SortedColumns`] of `design`'s predictors.
pub fn sort_columns(design: &Design) -> SortedColumns {
    let orders = design
        .predictors
        .iter()
        .map(|p| match &p.values {
            PredictorValues::Numbers(v) => {
                let mut keyed: Vec<(i64, u32)> = (v.iter().enumerate())
                    .filter(|(_, x)| !x.is_nan())
                    .map(|(r, &x)| (order_key(x), r as u32))
                    .collect();
                keyed.sort_unstable();
                Some(keyed.into_iter().map(|(_, r)| r).collect())
            }
            PredictorValues::Levels { .. } => None,
        })
        .collect();
    SortedColumns {
        rows: design.rows.len(),
        orders,
    }
}

/// A design's [`SortedColumns`] and the rows (indices into that design, each at most once) of
/// the design to bin, which [`crate::design::Design::select_rows`] took from it.
#[derive(Clone, Copy)]
pub struct Presorted<'a> {
    pub sorted: &'a SortedColumns,
    pub rows: &'a [usize],
}

/// Not a row of the design being binned.
const ABSENT: u32 = u32::MAX;

/// [`bin_design`] of `design`, the rows `presorted.rows` of the design `presorted.sorted`
/// was sorted from: the same bins, thresholds and bounds, each number predictor's values
/// read in order from the shared sort and given their bins by one walk along the thresholds.
/// Falls back to [`bin_design`] when the rows repeat (a bootstrap resample) or do not fit.
pub fn bin_design_presorted(
    design: &Design,
    settings: BinSettings,
    presorted: Presorted<'_>,
) -> Result<BinnedMatrix> {
    let Presorted { sorted, rows } = presorted;
    let fits = rows.len() == design.rows.len()
        && sorted.orders.len() == design.predictors.len()
        && sorted.rows < ABSENT as usize
        && rows.iter().all(|&r| r < sorted.rows);
    let mut at = vec![ABSENT; if fits { sorted.rows } else { 0 }];
    let mut repeats = false;
    for (i, &r) in rows.iter().enumerate().filter(|_| fits) {
        repeats |= at[r] != ABSENT;
        at[r] = i as u32;
    }
    if !fits || repeats {
        return bin_design(design, settings);
    }
    bin_design_with(design, settings, Some((sorted, &at)))
}

/// Bins every predictor of `design`.
pub fn bin_design(design: &Design, settings: BinSettings) -> Result<BinnedMatrix> {
    bin_design_with(design, settings, None)
}

/// [`bin_design`], number predictors read in order from `presorted` (a parent design's sort
/// and, by its rows, each one's place in `design` or [`ABSENT`]) when given.
fn bin_design_with(
    design: &Design,
    settings: BinSettings,
    presorted: Option<(&SortedColumns, &[u32])>,
) -> Result<BinnedMatrix> {
    if !(2..=255).contains(&settings.max_bins) {
        return Err(Error::new(ErrorKind::BadSetting {
            setting: "bins".into(),
            reason: format!(
                "{} is outside the allowed range 2 to 255",
                settings.max_bins
            ),
        }));
    }
    if settings.exact {
        let mut cells = vec![0u16; design.rows.len() * design.predictors.len()];
        let columns = bin_columns(design, settings, &mut cells, presorted)?;
        return Ok(BinnedMatrix {
            rows: design.rows.len(),
            columns,
            cells: Cells::Wide(cells),
        });
    }
    let mut cells = vec![0u8; design.rows.len() * design.predictors.len()];
    let columns = bin_columns(design, settings, &mut cells, presorted)?;
    Ok(BinnedMatrix {
        rows: design.rows.len(),
        columns,
        cells: Cells::Narrow(cells),
    })
}

/// Bins every predictor into `cells` (`rows` per column) and returns the columns' rules.
fn bin_columns<B: Bin>(
    design: &Design,
    settings: BinSettings,
    cells: &mut [B],
    presorted: Option<(&SortedColumns, &[u32])>,
) -> Result<Vec<BinnedColumn>> {
    let rows = design.rows.len();
    let mut columns = Vec::with_capacity(design.predictors.len());
    for (j, p) in design.predictors.iter().enumerate() {
        let out = &mut cells[j * rows..(j + 1) * rows];
        // This design's rows with a value and their values, in the order of their values, from
        // the shared sort.
        let in_order: Option<(Vec<u32>, Vec<f64>)> = match (&p.values, presorted) {
            (PredictorValues::Numbers(v), Some((sorted, at))) => {
                sorted.orders[j].as_ref().map(|order| {
                    let places: Vec<u32> = (order.iter().map(|&r| at[r as usize]))
                        .filter(|&i| i != ABSENT)
                        .collect();
                    let values = places.iter().map(|&i| v[i as usize]).collect();
                    (places, values)
                })
            }
            _ => None,
        };
        let rule = match &p.values {
            PredictorValues::Numbers(v) => {
                let limit = if settings.exact {
                    MAX_EXACT_BINS - 1
                } else {
                    settings.max_bins
                };
                let thresholds = match &in_order {
                    Some((_, sorted)) => thresholds_of_sorted(sorted, limit),
                    None => number_thresholds(v, limit),
                };
                if settings.exact && thresholds.len() + 1 >= limit {
                    return Err(Error::new(ErrorKind::BadSetting {
                        setting: "split_search".into(),
                        reason: format!(
                            "exact search gives each distinct value a bin, at most {} per predictor; '{}' has more. Use the histogram search (the default) for data this large",
                            MAX_EXACT_BINS - 1,
                            p.name
                        ),
                    }));
                }
                BinRule::Numbers {
                    thresholds,
                    low: Vec::new(),
                    high: Vec::new(),
                }
            }
            PredictorValues::Levels { codes, levels } => level_rule(codes, levels.len(), settings),
        };
        let mut missing = 0;
        let mut rule = rule;
        match &p.values {
            PredictorValues::Numbers(v) => {
                match (&in_order, &rule) {
                    (Some((places, values)), BinRule::Numbers { thresholds, .. }) => {
                        // The values rise along the order, so a value's bin (the thresholds
                        // below it, as `bin_of_number` counts them) only moves up; NaN rows,
                        // left out of the order, stay missing.
                        out.fill(B::from_bin(None));
                        let mut k = 0;
                        for (&i, &x) in places.iter().zip(values) {
                            while k < thresholds.len() && thresholds[k] < x {
                                k += 1;
                            }
                            out[i as usize] = B::from_bin(Some(k));
                        }
                    }
                    _ => {
                        for (o, &x) in out.iter_mut().zip(v) {
                            *o = B::from_bin(rule.bin_of_number(x));
                        }
                    }
                }
                if let BinRule::Numbers {
                    thresholds,
                    low,
                    high,
                } = &mut rule
                {
                    *low = vec![f64::INFINITY; thresholds.len() + 1];
                    *high = vec![f64::NEG_INFINITY; thresholds.len() + 1];
                    for (&b, &x) in out.iter().zip(v) {
                        if b != B::MISSING {
                            low[b.index()] = low[b.index()].min(x);
                            high[b.index()] = high[b.index()].max(x);
                        }
                    }
                }
            }
            PredictorValues::Levels { codes, .. } => {
                for (o, &c) in out.iter_mut().zip(codes) {
                    *o = B::from_bin(rule.bin_of_level(c));
                }
            }
        }
        let mut top = 0usize;
        for &b in out.iter() {
            if b == B::MISSING {
                missing += 1;
            } else {
                top = top.max(b.index() + 1);
            }
        }
        let levels = match &p.values {
            PredictorValues::Levels { levels, .. } => levels.clone(),
            PredictorValues::Numbers(_) => Vec::new(),
        };
        columns.push(BinnedColumn {
            name: p.name.clone(),
            rule,
            bins: top,
            missing,
            levels,
        });
    }
    Ok(columns)
}

/// Rows read by the bins of a fit on other rows ([`bin_records`]): validation's held-out
/// rows, walked down every tree of a fold's forest, split in two, each part laid out on its
/// own (so a walk of either reads only its own rows' bytes).
pub struct BinnedRows {
    /// The rows each of whose numbers lies within its bin's training values (or is missing),
    /// binned: every tree sends them where their bins say, as it would their values.
    pub within: BinnedMatrix,
    /// Their places among the rows given.
    pub within_rows: Vec<u32>,
    /// The other rows (a number between two bins' training values), to walk by value, with
    /// a single-precision copy ([`Records::with_narrow_copy`]).
    pub beyond: Records,
    pub beyond_rows: Vec<u32>,
}

/// `records` (new rows read by a fit's bins, [`crate::validate::records_of`]) binned by
/// that fit's `columns` (`wide` for an exact-mode matrix) where that is exact: numbers by the
/// training thresholds, categories (which records hold as their bin) as they are, missing
/// values to the missing bin.
///
/// A number split's threshold lies at or above every training value of its bin and the bins
/// below, and below every training value of the bins above (the grower places it so), so a
/// number within its bin's training values goes the side its bin goes. A number between two
/// bins' training values may not: its row is kept as a record. With 256 bins of 40,000
/// rows a new value falls between two bins' values about one time in 160, so about one row
/// in six of 30 predictors is walked by value.
pub fn bin_records(records: &Records, columns: &[BinnedColumn], wide: bool) -> BinnedRows {
    fn split<B: Bin>(records: &Records, columns: &[BinnedColumn]) -> (Vec<B>, Vec<u32>, Vec<u32>) {
        let n = records.rows;
        // Every row's bins (column after column), and whether each number lies within its
        // bin's training values, in one pass.
        let mut cells = Vec::with_capacity(n * columns.len());
        let mut within = vec![true; n];
        for (j, c) in columns.iter().enumerate() {
            let values = &records.values[j * n..(j + 1) * n];
            match &c.rule {
                BinRule::Numbers { low, high, .. } => {
                    for (w, &x) in within.iter_mut().zip(values) {
                        let b = c.rule.bin_of_number(x);
                        if let Some(b) = b {
                            // (A rule without its bins' values, as a model file holds it:
                            // every row by value.)
                            let inside = matches!((low.get(b), high.get(b)),
                                (Some(&l), Some(&h)) if l <= x && x <= h);
                            *w &= inside;
                        }
                        cells.push(B::from_bin(b));
                    }
                }
                BinRule::Levels { .. } => cells.extend(
                    values
                        .iter()
                        .map(|&v| B::from_bin((!v.is_nan()).then_some(v as usize))),
                ),
            }
        }
        let (mut inside, mut beyond) = (Vec::new(), Vec::new());
        for (r, &w) in within.iter().enumerate() {
            match w {
                true => inside.push(r as u32),
                false => beyond.push(r as u32),
            }
        }
        // The rows within, each column's cells of them side by side.
        let (cells, inside_rows) = (&cells, &inside);
        let kept = (0..columns.len())
            .flat_map(|j| inside_rows.iter().map(move |&r| cells[j * n + r as usize]))
            .collect();
        (kept, inside, beyond)
    }
    let (cells, within_rows, beyond_rows) = match wide {
        true => {
            let (c, w, b) = split::<u16>(records, columns);
            (Cells::Wide(c), w, b)
        }
        false => {
            let (c, w, b) = split::<u8>(records, columns);
            (Cells::Narrow(c), w, b)
        }
    };
    let beyond: Vec<usize> = beyond_rows.iter().map(|&r| r as usize).collect();
    BinnedRows {
        within: BinnedMatrix {
            rows: within_rows.len(),
            columns: columns.to_vec(),
            cells,
        },
        within_rows,
        beyond: records.select_rows(&beyond).with_narrow_copy(),
        beyond_rows,
    }
}

/// Records to score with a fitted model, column by column in the model's predictor order:
/// numbers as they are (NaN for missing), categories as their training bin (by label; labels
/// never seen in training take the pooled bin), NaN for missing. Trees compare numbers with
/// their thresholds, so a model scores new values without the training bins.
#[derive(Debug, Clone, PartialEq)]
pub struct Records {
    pub rows: usize,
    values: Vec<f64>,
    /// Each value rounded to single precision, or empty ([`Records::with_narrow_copy`]).
    narrow: Vec<f32>,
}

impl Records {
    /// The value of row `row` in predictor `j`.
    #[inline]
    pub fn value(&self, j: usize, row: usize) -> f64 {
        self.values[j * self.rows + row]
    }

    /// Every value, predictor after predictor (`rows` values each): predictor `j`'s value of
    /// row `row` is at `j * rows + row`.
    pub fn values(&self) -> &[f64] {
        &self.values
    }

    /// The values rounded to single precision, laid out as [`Records::values`], when kept
    /// ([`Records::with_narrow_copy`]).
    pub fn narrow(&self) -> Option<&[f32]> {
        (self.narrow.len() == self.values.len() && !self.values.is_empty()).then_some(&self.narrow)
    }

    /// The same records with a single-precision copy of every value (each rounded to the
    /// nearest), for walking many trees: a walk decides most rows from the copy, half the
    /// bytes to fetch, and reads the full value only for a row within a rounding of the
    /// threshold (see [`crate::tree::walk`]). Held-out rows of 30 predictors: 2.4 MB of
    /// numbers for 10,000 rows, beyond a core's 2 MB second-level cache; 1.2 MB copied.
    pub fn with_narrow_copy(mut self) -> Records {
        self.narrow = self.values.iter().map(|&v| v as f32).collect();
        self
    }

    /// Records holding only `rows` (in that order), with a single-precision copy if these
    /// have one.
    pub fn select_rows(&self, rows: &[usize]) -> Records {
        let columns = self.values.len() / self.rows.max(1);
        let mut values = Vec::with_capacity(rows.len() * columns);
        for j in 0..columns {
            values.extend(rows.iter().map(|&r| self.value(j, r)));
        }
        let selected = Records::from_columns(rows.len(), values);
        match self.narrow() {
            Some(_) => selected.with_narrow_copy(),
            None => selected,
        }
    }

    /// Records from column-major values (`rows` per predictor), for tests and tools.
    pub fn from_columns(rows: usize, values: Vec<f64>) -> Records {
        Records {
            rows,
            values,
            narrow: Vec::new(),
        }
    }
}

/// Reads the predictors of `columns` (a fitted model's) from a table: columns matched by
/// name, category values by label (the one path of [`crate::model::read_records`]).
pub fn records_from_table(columns: &[BinnedColumn], table: &crate::data::Table) -> Result<Records> {
    use crate::model::{Predictor, Reading};
    let predictors: Vec<Predictor> = columns
        .iter()
        .map(|c| Predictor {
            name: c.name.clone(),
            kind: match c.rule {
                BinRule::Numbers { .. } => crate::data::Kind::Number,
                BinRule::Levels { .. } => crate::data::Kind::Category,
            },
            reading: match &c.rule {
                BinRule::Numbers { .. } => Reading::Number,
                BinRule::Levels {
                    bin_of_level,
                    pooled_bin,
                } => Reading::Category {
                    levels: c.levels.clone(),
                    bin_of_level: bin_of_level.clone(),
                    pooled_bin: *pooled_bin,
                },
            },
        })
        .collect();
    crate::model::read_records(&predictors, &vec![true; predictors.len()], table)
        .map(|(records, _)| records)
}

fn level_rule(codes: &[u32], levels: usize, settings: BinSettings) -> BinRule {
    let mut counts = vec![0usize; levels];
    for &c in codes {
        if let Some(n) = counts.get_mut(c as usize) {
            *n += 1;
        }
    }
    // Levels by frequency (then code); those beyond the bin budget or too rare are pooled.
    let mut order: Vec<usize> = (0..levels).filter(|&l| counts[l] > 0).collect();
    order.sort_by(|&a, &b| counts[b].cmp(&counts[a]).then(a.cmp(&b)));
    let budget = settings.max_bins - 1; // one bin kept for the pool
    let mut own: Vec<usize> = order
        .iter()
        .copied()
        .filter(|&l| counts[l] >= settings.min_level_rows)
        .take(budget)
        .collect();
    own.sort_unstable();
    let pooled_bin = own.len() as u8;
    let mut bin_of_level = vec![pooled_bin; levels];
    for (b, &l) in own.iter().enumerate() {
        bin_of_level[l] = b as u8;
    }
    BinRule::Levels {
        bin_of_level,
        pooled_bin,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::design::design_from_csv;

    #[test]
    fn numbers_sorted_as_integers_sort_as_total_cmp_does() {
        // Against the standard library's `sort_by(f64::total_cmp)`, bit for bit: both zeros,
        // both infinities, NaNs of either sign and other payloads, tiny and huge numbers,
        // repeats.
        let special = [
            0.0,
            -0.0,
            f64::INFINITY,
            f64::NEG_INFINITY,
            f64::NAN,
            -f64::NAN,
            f64::from_bits(0x7FF0_0000_0000_0001),
            f64::from_bits(0xFFF8_0000_0000_0003),
            f64::MIN_POSITIVE / 4.0,
            -f64::MIN_POSITIVE / 4.0,
            f64::MAX,
            f64::MIN,
            1.5,
            -1.5,
        ];
        let mut state = 0x2545_F491_4F6C_DD1Du64;
        for n in [0, 1, 2, 7, 100, 1023, 1024, 5000, 50_000] {
            let values: Vec<f64> = (0..n)
                .map(|_| {
                    state ^= state << 13;
                    state ^= state >> 7;
                    state ^= state << 17;
                    match state % 3 {
                        0 => special[(state >> 8) as usize % special.len()],
                        1 => f64::from_bits(state),
                        _ => ((state >> 11) % 50) as f64 - 25.0,
                    }
                })
                .collect();
            let mut want = values.clone();
            want.sort_by(f64::total_cmp);
            let mut got = values;
            sort_numbers(&mut got);
            let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
            assert_eq!(bits(&got), bits(&want), "{n} numbers");
        }
    }

    #[test]
    fn few_distinct_values_get_midpoints() {
        assert_eq!(
            number_thresholds(&[2.0, 1.0, 2.0, 3.0, f64::NAN], 255),
            [1.5, 2.5]
        );
        let rule = BinRule::Numbers {
            thresholds: vec![1.5, 2.5],
            low: vec![],
            high: vec![],
        };
        let bins: Vec<Option<usize>> = [1.0, 1.5, 2.0, 3.0, f64::NAN]
            .iter()
            .map(|&x| rule.bin_of_number(x))
            .collect();
        assert_eq!(bins, [Some(0), Some(0), Some(1), Some(2), None]);
    }

    #[test]
    fn many_distinct_values_get_equal_count_bins() {
        let values: Vec<f64> = (0..1000).map(|i| ((i * 7919) % 1000) as f64).collect();
        let t = number_thresholds(&values, 4);
        // numpy.percentile(range(1000), [25, 50, 75], method="midpoint") = 249.5, 499.5, 749.5
        assert_eq!(t, [249.5, 499.5, 749.5]);
        let rule = BinRule::Numbers {
            thresholds: t,
            low: vec![],
            high: vec![],
        };
        let mut counts = [0usize; 4];
        for &x in &values {
            counts[rule.bin_of_number(x).unwrap()] += 1;
        }
        assert_eq!(counts, [250, 250, 250, 250]);
    }

    #[test]
    fn a_design_binned_column_by_column() {
        let text = "y,x,ward\n1,0.5,Cedar\n0,NA,Birch\n1,2.5,Cedar\n0,1.0,Rare\n1,2.5,Birch\n";
        let design = design_from_csv(text, "y", &["x", "ward"]);
        let m = bin_design(
            &design,
            BinSettings {
                min_level_rows: 2,
                ..BinSettings::default()
            },
        )
        .unwrap();
        assert_eq!(m.narrow_column(0).unwrap(), [0, MISSING_BIN, 2, 1, 2]);
        assert_eq!((m.columns[0].bins, m.columns[0].missing), (3, 1));
        // Levels in file order: Cedar 0, Birch 1, Rare 2. Rare (1 row) is pooled.
        assert_eq!(m.narrow_column(1).unwrap(), [0, 1, 0, 2, 1]);
        assert_eq!(
            m.columns[1].rule.bin_of_level(99),
            Some(2),
            "unseen levels go to the pool"
        );
        assert!(bin_design(
            &design,
            BinSettings {
                max_bins: 300,
                ..BinSettings::default()
            }
        )
        .is_err());
    }

    #[test]
    fn folds_binned_from_one_sort_get_the_bins_of_their_own_sort() {
        // Our own consistency rule (no outside source): a fold binned from its parent's
        // sort must equal the fold binned alone, thresholds and bounds to the bit, in both
        // modes; numbers with NaN, -0 and 0, ties, few and many distinct values, a category.
        let mut state = 0x2545_f491_4f6c_dd1du64;
        let mut next = move || {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            state
        };
        let mut text = String::from("y,many,few,zeros,ward\n");
        for i in 0..3000 {
            let many = match next() % 50 {
                0 => "NA".to_string(),
                _ => format!("{:.3}", (next() % 100_000) as f64 / 7.0 - 5000.0),
            };
            let few = ["1", "2", "2.5", "NA", "7"][(next() % 5) as usize];
            let zeros = ["-0", "0", "0.0", "-0.0", "1e-300", "-1e-300"][(next() % 6) as usize];
            let ward = ["Cedar", "Birch", "Rare"][(next() % 3) as usize];
            text += &format!("{},{many},{few},{zeros},{ward}\n", i % 2);
        }
        let design = design_from_csv(&text, "y", &["many", "few", "zeros", "ward"]);
        let sorted = sort_columns(&design);
        let bits = |m: &BinnedMatrix| -> Vec<Vec<u64>> {
            (m.columns.iter())
                .map(|c| match &c.rule {
                    BinRule::Numbers {
                        thresholds,
                        low,
                        high,
                    } => (thresholds.iter().chain(low).chain(high))
                        .map(|x| x.to_bits())
                        .collect(),
                    BinRule::Levels { .. } => Vec::new(),
                })
                .collect()
        };
        for take in [3000, 2400, 600, 7, 1] {
            // Distinct rows in a shuffled order.
            let mut rows: Vec<usize> = (0..3000).collect();
            for k in (1..rows.len()).rev() {
                rows.swap(k, (next() % (k as u64 + 1)) as usize);
            }
            rows.truncate(take);
            let fold = design.select_rows(&rows);
            for exact in [false, true] {
                let settings = BinSettings {
                    exact,
                    ..BinSettings::default()
                };
                let alone = bin_design(&fold, settings).unwrap();
                let presorted = Presorted {
                    sorted: &sorted,
                    rows: &rows,
                };
                let shared = bin_design_presorted(&fold, settings, presorted).unwrap();
                assert_eq!(shared, alone, "{take} rows, exact {exact}");
                assert_eq!(bits(&shared), bits(&alone));
            }
        }
        // Repeated rows (a bootstrap resample) are binned alone.
        let rows = [5, 5, 9, 0];
        let fold = design.select_rows(&rows);
        let presorted = Presorted {
            sorted: &sorted,
            rows: &rows,
        };
        let settings = BinSettings::default();
        assert_eq!(
            bin_design_presorted(&fold, settings, presorted).unwrap(),
            bin_design(&fold, settings).unwrap()
        );
    }
}
