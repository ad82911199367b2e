//! Scoring new records with a fitted model, in the words and columns `spinney predict` and
//! the page's scoring step share: the predictions as CSV rows (RFC 4180 quoting), and the
//! notes about the scored file (labels training never saw, a model cut short by a cancel).
//!
//! Columns: the `keep` columns as the file shows them, then `predicted_<outcome>` and, for
//! classes, one `probability_<class>` per class. Numbers are written in the shortest form
//! that reads back to the same bits.

use crate::binning::Records;
use crate::data::{Column, Table};
use crate::ensemble::forest::argmax;
use crate::model::{Model, Unseen, Walks};
use crate::tree::Rows;

/// One CSV field, quoted when it holds a comma, quote or line break (RFC 4180).
pub fn csv_field(text: &str) -> String {
    if text.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", text.replace('"', "\"\""))
    } else {
        text.to_string()
    }
}

/// Writes the predictions of `model` for the rows of `table` (read as `records`), a line at
/// a time; or predictions made elsewhere ([`PredictionRows::given`], the page's baseline).
pub struct PredictionRows<'a> {
    source: Source<'a>,
    outcome: &'a str,
    classes: Option<&'a [String]>,
    rows: usize,
    kept: Vec<&'a Column>,
    /// Values a row: class probabilities, or the number.
    outputs: usize,
    /// A model's predictions of rows `block_start..` (`outputs` a row), computed a block at a time
    /// ([`Model::predict_rows`]) as the rows are asked for.
    block: Vec<f64>,
    block_start: usize,
    /// The model's trees' walks, built at the first block ([`Model::walks`]).
    walks: Option<Walks>,
}

/// Rows predicted together when scoring: their predictions and one tree fit in the cache.
const SCORING_BLOCK: usize = 4096;

enum Source<'a> {
    Model(&'a Model, &'a Records),
    /// `outputs` values per row.
    Given(&'a [f64]),
}

impl<'a> PredictionRows<'a> {
    /// `keep`: columns of `table` to copy in front (names not in the table are skipped;
    /// callers check them first).
    pub fn new(model: &'a Model, table: &'a Table, records: &'a Records, keep: &[String]) -> Self {
        PredictionRows {
            source: Source::Model(model, records),
            outcome: &model.outcome,
            classes: model.classes.as_deref(),
            rows: records.rows,
            kept: keep.iter().filter_map(|k| table.column(k)).collect(),
            outputs: model.outputs(),
            block: Vec::new(),
            block_start: 0,
            walks: None,
        }
    }

    /// The same lines for `predictions` of every row of `table` made by another model:
    /// class probabilities (one per class) or the number.
    pub fn given(
        outcome: &'a str,
        classes: Option<&'a [String]>,
        predictions: &'a [f64],
        table: &'a Table,
        keep: &[String],
    ) -> Self {
        let outputs = classes.map_or(1, <[String]>::len);
        PredictionRows {
            source: Source::Given(predictions),
            outcome,
            classes,
            rows: predictions.len() / outputs.max(1),
            kept: keep.iter().filter_map(|k| table.column(k)).collect(),
            outputs,
            block: Vec::new(),
            block_start: 0,
            walks: None,
        }
    }

    pub fn rows(&self) -> usize {
        self.rows
    }

    /// The header line's fields.
    pub fn header(&self) -> Vec<String> {
        let mut header: Vec<String> = self.kept.iter().map(|c| c.name.clone()).collect();
        header.push(format!("predicted_{}", self.outcome));
        if let Some(classes) = self.classes {
            header.extend(classes.iter().map(|c| format!("probability_{c}")));
        }
        header
    }

    /// Row `row`'s fields, unquoted: kept values, the prediction, the class probabilities.
    pub fn fields(&mut self, row: usize) -> Vec<String> {
        let mut line: Vec<String> = self
            .kept
            .iter()
            .map(|c| c.display(row).unwrap_or_default())
            .collect();
        let k = self.outputs;
        let out = match self.source {
            Source::Model(model, records) => {
                let held = self.block.len() / k.max(1);
                if row < self.block_start || row >= self.block_start + held {
                    let end = (row + SCORING_BLOCK).min(records.rows);
                    self.block.resize((end - row) * k, 0.0);
                    let rows = Rows::Records(records);
                    let walks = self.walks.get_or_insert_with(|| model.walks(rows));
                    model.predict_rows_by(walks, rows, row..end, &mut self.block);
                    self.block_start = row;
                }
                let at = (row - self.block_start) * k;
                &self.block[at..at + k]
            }
            Source::Given(p) => &p[row * k..(row + 1) * k],
        };
        match self.classes {
            Some(classes) => {
                line.push(classes.get(argmax(out)).cloned().unwrap_or_default());
                line.extend(out.iter().map(|x| x.to_string()));
            }
            None => line.push(out[0].to_string()),
        }
        line
    }

    /// A line of CSV (no line break).
    pub fn csv_line(fields: &[String]) -> String {
        fields
            .iter()
            .map(|f| csv_field(f))
            .collect::<Vec<_>>()
            .join(",")
    }
}

/// How many rows of a scored file hold labels training never saw, for one predictor.
pub fn unseen_note(u: &Unseen) -> String {
    format!(
        "column '{}': {} row(s) hold labels not seen in training (the first: '{}'); they \
         follow {}",
        u.predictor, u.rows, u.example, u.follows
    )
}

/// A note for a model whose fitting was cancelled part way.
pub fn partial_note(model: &Model) -> Option<String> {
    model.partial.then(|| {
        format!(
            "this model is partial (fitting was cancelled after {} member(s))",
            model.members()
        )
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn given_predictions_write_the_same_lines_as_the_model() {
        // Our own consistency rule (common practice, no source): the page's baseline writes
        // its predictions through `given`, in the very columns and numbers `spinney predict`
        // writes for a model.
        use crate::data::{read_table, ReadOptions};
        use crate::design::{build_design, DesignSpec};
        use crate::fit::{fit_design, FitOptions};
        use crate::model::Method;
        use crate::progress::Silent;
        use crate::settings::FitSettings;
        let mut text = String::from("y,a,c\n");
        for i in 0..40 {
            let y = if (i * 7) % 10 < 4 { "yes" } else { "no" };
            text += &format!("{y},{},{}\n", i % 9, ["k", "\"l, m\""][i % 2]);
        }
        let table = read_table(text.as_bytes(), &ReadOptions::default(), &mut Silent)
            .unwrap()
            .table;
        let spec = DesignSpec {
            outcome: "y".into(),
            predictors: vec!["a".into(), "c".into()],
            weight: None,
            group: None,
            positive: None,
        };
        let design = build_design(&table, &spec).unwrap();
        let settings = FitSettings::build(Method::Tree, 2, false, "y", &[]).unwrap();
        let model = fit_design(design, &settings, None, FitOptions::default(), &mut Silent)
            .unwrap()
            .model;
        let (records, _) = model.records(&table).unwrap();
        let keep = ["c".to_string()];
        let mut p = Vec::new();
        let mut out = vec![0.0; model.outputs()];
        for r in 0..records.rows {
            model.predict(Rows::Records(&records), r, &mut out);
            p.extend_from_slice(&out);
        }
        let mut by_model = PredictionRows::new(&model, &table, &records, &keep);
        let mut given =
            PredictionRows::given(&model.outcome, model.classes.as_deref(), &p, &table, &keep);
        assert_eq!(by_model.header(), given.header());
        assert_eq!(by_model.rows(), given.rows());
        for r in 0..records.rows {
            assert_eq!(by_model.fields(r), given.fields(r), "row {r}");
        }
    }

    #[test]
    fn fields_are_quoted_as_rfc_4180_asks() {
        // RFC 4180, section 2, rules 6 and 7.
        assert_eq!(csv_field("plain"), "plain");
        assert_eq!(csv_field("a,b"), "\"a,b\"");
        assert_eq!(csv_field("say \"hi\""), "\"say \"\"hi\"\"\"");
        assert_eq!(csv_field("two\nlines"), "\"two\nlines\"");
    }
}
