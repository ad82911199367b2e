//! Binning: each predictor's values mapped once to at most 255 bins (a `u8` per cell, stored
//! column by column), with bin 255 reserved for missing values. Every tree learner works on
//! these bins; the thresholds map new records to the same bins at prediction time.
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

/// The bin of missing values, in every column.
pub const MISSING_BIN: u8 = 255;

/// Binning settings.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BinSettings {
    /// Bins for values that are present, 2..=255.
    pub max_bins: usize,
    /// Category levels seen in fewer rows share one pooled bin.
    pub min_level_rows: usize,
}

impl Default for BinSettings {
    fn default() -> Self {
        BinSettings {
            max_bins: 255,
            min_level_rows: 1,
        }
    }
}

/// How one predictor's values map to bins.
#[derive(Debug, Clone, PartialEq)]
pub enum BinRule {
    /// Bin = the number of thresholds below the value. `low[b]` and `high[b]` are the
    /// smallest and largest training values in bin `b` (a tree's threshold between two bins
    /// is placed midway between the values on either side, as sort-based CART does).
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
    /// The bin of a number (NaN = missing).
    pub fn bin_of_number(&self, x: f64) -> u8 {
        match self {
            _ if x.is_nan() => MISSING_BIN,
            BinRule::Numbers { thresholds, .. } => thresholds.partition_point(|&t| t < x) as u8,
            BinRule::Levels { .. } => MISSING_BIN,
        }
    }

    /// The bin of a category code ([`crate::data::MISSING_CODE`] = missing).
    pub fn bin_of_level(&self, code: u32) -> u8 {
        match self {
            BinRule::Levels {
                bin_of_level,
                pooled_bin,
            } => {
                if code == crate::data::MISSING_CODE {
                    MISSING_BIN
                } else {
                    bin_of_level
                        .get(code as usize)
                        .copied()
                        .unwrap_or(*pooled_bin)
                }
            }
            BinRule::Numbers { .. } => MISSING_BIN,
        }
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

/// All predictors binned: `rows` cells per column, column after column.
#[derive(Debug, Clone, PartialEq)]
pub struct BinnedMatrix {
    pub rows: usize,
    pub columns: Vec<BinnedColumn>,
    cells: Vec<u8>,
}

impl BinnedMatrix {
    /// A matrix holding only `rows` (in that order).
    pub fn select_rows(&self, rows: &[usize]) -> BinnedMatrix {
        let mut cells = Vec::with_capacity(rows.len() * self.columns.len());
        for j in 0..self.columns.len() {
            let col = self.column(j);
            cells.extend(rows.iter().map(|&r| col[r]));
        }
        BinnedMatrix {
            rows: rows.len(),
            columns: self.columns.clone(),
            cells,
        }
    }

    /// The bins of column `j`, one per row.
    pub fn column(&self, j: usize) -> &[u8] {
        &self.cells[j * self.rows..(j + 1) * self.rows]
    }
}

/// Thresholds for numbers, by the rule in this module's header.
pub fn number_thresholds(values: &[f64], max_bins: usize) -> Vec<f64> {
    let mut sorted: Vec<f64> = values.iter().copied().filter(|x| !x.is_nan()).collect();
    sorted.sort_unstable_by(f64::total_cmp);
    let mut distinct = sorted.clone();
    distinct.dedup();
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

/// Bins every predictor of `design`.
pub fn bin_design(design: &Design, settings: BinSettings) -> Result<BinnedMatrix> {
    if !(2..=255).contains(&settings.max_bins) {
        return Err(Error::new(ErrorKind::BadSetting {
            setting: "bins".into(),
            reason: format!(
                "{} is outside the allowed range 2 to 255",
                settings.max_bins
            ),
        }));
    }
    let rows = design.rows.len();
    let mut cells = vec![0u8; rows * design.predictors.len()];
    let mut columns = Vec::with_capacity(design.predictors.len());
    for (j, p) in design.predictors.iter().enumerate() {
        let out = &mut cells[j * rows..(j + 1) * rows];
        let rule = match &p.values {
            PredictorValues::Numbers(v) => BinRule::Numbers {
                thresholds: number_thresholds(v, settings.max_bins),
                low: Vec::new(),
                high: Vec::new(),
            },
            PredictorValues::Levels { codes, levels } => level_rule(codes, levels.len(), settings),
        };
        let mut missing = 0;
        let mut rule = rule;
        match &p.values {
            PredictorValues::Numbers(v) => {
                for (o, &x) in out.iter_mut().zip(v) {
                    *o = rule.bin_of_number(x);
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
                        if b != MISSING_BIN {
                            low[b as usize] = low[b as usize].min(x);
                            high[b as usize] = high[b as usize].max(x);
                        }
                    }
                }
            }
            PredictorValues::Levels { codes, .. } => {
                for (o, &c) in out.iter_mut().zip(codes) {
                    *o = rule.bin_of_level(c);
                }
            }
        }
        let mut top = 0usize;
        for &b in out.iter() {
            if b == MISSING_BIN {
                missing += 1;
            } else {
                top = top.max(b as usize + 1);
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
    Ok(BinnedMatrix {
        rows,
        columns,
        cells,
    })
}

/// Bins the rows of a new table (records to score, a test file) with the rules learnt on
/// the training rows: columns matched by name, category values by label (labels never seen
/// in training go to the pooled bin).
pub fn bin_new_table(columns: &[BinnedColumn], table: &crate::data::Table) -> Result<BinnedMatrix> {
    use crate::data::Values;
    let rows = table.rows;
    let mut cells = vec![0u8; rows * columns.len()];
    for (j, col) in columns.iter().enumerate() {
        let source = table.column(&col.name).ok_or_else(|| {
            Error::new(ErrorKind::NoSuchColumn {
                name: col.name.clone(),
                available: table.columns.iter().map(|c| c.name.clone()).collect(),
            })
        })?;
        let out = &mut cells[j * rows..(j + 1) * rows];
        match (&col.rule, &source.values) {
            (BinRule::Numbers { .. }, Values::Numbers(v)) => {
                for (o, &x) in out.iter_mut().zip(v) {
                    *o = col.rule.bin_of_number(x);
                }
            }
            (BinRule::Levels { .. }, Values::Levels { codes, levels }) => {
                let index: std::collections::HashMap<&str, u32> =
                    col.levels.iter().enumerate().map(|(i, l)| (l.as_str(), i as u32)).collect();
                let map: Vec<u32> =
                    levels.iter().map(|l| index.get(l.as_str()).copied().unwrap_or(u32::MAX - 1)).collect();
                for (o, &c) in out.iter_mut().zip(codes) {
                    *o = if c == crate::data::MISSING_CODE {
                        MISSING_BIN
                    } else {
                        col.rule.bin_of_level(map[c as usize])
                    };
                }
            }
            _ => {
                return Err(Error::new(ErrorKind::BadDesign {
                    reason: format!(
                        "column '{}' holds {} here but was {} when the model was fitted; set its kind to match",
                        col.name,
                        source.kind.label(),
                        if matches!(col.rule, BinRule::Numbers { .. }) { "a number" } else { "a category" }
                    ),
                }))
            }
        }
    }
    Ok(BinnedMatrix {
        rows,
        columns: columns.to_vec(),
        cells,
    })
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
        let bins: Vec<u8> = [1.0, 1.5, 2.0, 3.0, f64::NAN]
            .iter()
            .map(|&x| rule.bin_of_number(x))
            .collect();
        assert_eq!(bins, [0, 0, 1, 2, MISSING_BIN]);
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
            counts[rule.bin_of_number(x) as usize] += 1;
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
                max_bins: 255,
                min_level_rows: 2,
            },
        )
        .unwrap();
        assert_eq!(m.column(0), [0, MISSING_BIN, 2, 1, 2]);
        assert_eq!((m.columns[0].bins, m.columns[0].missing), (3, 1));
        // Levels in file order: Cedar 0, Birch 1, Rare 2. Rare (1 row) is pooled.
        assert_eq!(m.column(1), [0, 1, 0, 2, 1]);
        assert_eq!(
            m.columns[1].rule.bin_of_level(99),
            2,
            "unseen levels go to the pool"
        );
        assert!(bin_design(
            &design,
            BinSettings {
                max_bins: 300,
                min_level_rows: 1
            }
        )
        .is_err());
    }
}
