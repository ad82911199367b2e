//! The baseline as a run of its own in the worker: an L2-penalised logistic (classes) or
//! ridge (numbers) regression fitted on every row of the page's design and judged by
//! `spinney_core::validate::validate_baseline` (the same splits, pooling and intervals as a
//! tree run, and the same figures as the baseline judged beside one); its step 5 answer (the
//! coefficients on the standardised columns, a record's contributions as coefficient ×
//! standardised value, centred on the training rows) and its scoring of a new file (the same
//! CSV columns as a tree run's, read with the training columns' kinds and levels).

use spinney_core::baseline::{Column as BaselineColumn, ColumnValues};
use spinney_core::data::{read_table, Kind, Loaded, ReadOptions, Table, Values, MISSING_CODE};
use spinney_core::design::{Design, Outcome, PredictorValues};
use spinney_core::ensemble::forest::argmax;
use spinney_core::error::{Error, ErrorKind};
use spinney_core::scoring::PredictionRows;
use spinney_core::validate::{
    self, baseline_columns, fit_baseline_model, BaselineContributions, BaselineModel,
};
use spinney_web::protocol::{
    Contribution, FitDesign, Insight, InsightCoefficients, InsightContributions, Judging,
    RunResult, ScoreResult, MAX_FILE_BYTES,
};

use super::{
    judging_plan, run_validation, scheme_words, table_design, wasm_memory_bytes, Held, Kept,
    Reporter, Run,
};

/// The method word of a baseline run (the study file's too).
pub const METHOD: &str = spinney_core::study::BASELINE;

/// A kept baseline run: the model, its penalty, the data it was fitted on, and how to read
/// its predictors from a new file (each one's kind in the training table; categories' levels
/// in the training design's codes).
pub struct BaselineRun {
    pub model: BaselineModel,
    pub penalty: f64,
    pub fingerprint: String,
    pub outcome: String,
    pub classes: Option<Vec<String>>,
    pub reading: Vec<(String, Kind, Option<Vec<String>>)>,
}

/// The penalty of the page's settings (1 when not given).
fn penalty(sets: &[(String, String)]) -> Result<f64, String> {
    match sets.iter().find(|(n, _)| n == "penalty") {
        None => Ok(validate::BASELINE_PENALTY),
        Some((_, v)) => v.trim().parse::<f64>().map_err(|_| {
            format!("penalty: '{v}' is not a number; give the penalty's strength, e.g. 1")
        }),
    }
}

/// The error rate (classes, the most probable one predicted) or mean squared error of
/// `predictions` on the design's own rows.
fn training_error(d: &Design, predictions: &[f64]) -> f64 {
    match &d.outcome {
        Outcome::Classes { codes, labels } => {
            let k = labels.len();
            let wrong = codes
                .iter()
                .enumerate()
                .filter(|(i, &y)| argmax(&predictions[i * k..(i + 1) * k]) != y as usize)
                .count();
            wrong as f64 / codes.len().max(1) as f64
        }
        Outcome::Numbers(y) => {
            y.iter()
                .zip(predictions)
                .map(|(a, b)| (a - b) * (a - b))
                .sum::<f64>()
                / y.len().max(1) as f64
        }
    }
}

/// Fits a baseline run on the held table and keeps it; judged as `judging` asks.
pub fn fit(
    held: &mut Held,
    id: u32,
    design: FitDesign,
    sets: Vec<(String, String)>,
    judging: Option<Judging>,
) -> Result<RunResult, String> {
    let loaded: &Loaded = held
        .loaded
        .as_ref()
        .ok_or("no table is loaded yet; choose a file first")?;
    let d = table_design(loaded, &design)?;
    let penalty = penalty(&sets)?;
    let start = js_sys::Date::now();
    let model = fit_baseline_model(&d, penalty).map_err(|e| e.to_string())?;
    let fitted_on_all = model.predict(&d).map_err(|e| e.to_string())?;
    let fit_seconds = (js_sys::Date::now() - start) / 1000.0;
    let mut progress = Reporter::new(id);
    let (validation, validation_refused, judged) = match &judging {
        None => (None, None, None),
        Some(j) => {
            let judged = judging_plan(j).and_then(|plan| {
                let v = validate::validate_baseline(&d, penalty, &plan, &mut progress)
                    .map_err(|e| e.to_string())?;
                let warnings = validate::warnings::warnings(&d, &plan.scheme, Some(&loaded.table))
                    .into_iter()
                    .map(|w| w.message)
                    .collect();
                let rows = (v.outputs == 2).then(|| {
                    let second: Vec<f64> = v.predictions.chunks_exact(2).map(|p| p[1]).collect();
                    (scheme_words(&plan.scheme), second)
                });
                Ok((run_validation(&v, &plan.scheme, warnings), rows))
            });
            match judged {
                Ok((v, rows)) => (Some(v), None, rows),
                Err(e) => (None, Some(e), None),
            }
        }
    };
    let classes = match &d.outcome {
        Outcome::Classes { labels, .. } => Some(labels.clone()),
        Outcome::Numbers(_) => None,
    };
    let reading = d
        .predictors
        .iter()
        .map(|p| {
            let kind = loaded
                .table
                .column(&p.name)
                .map_or(Kind::Number, |c| c.kind);
            let levels = match &p.values {
                PredictorValues::Levels { levels, .. } => Some(levels.clone()),
                PredictorValues::Numbers(_) => None,
            };
            (p.name.clone(), kind, levels)
        })
        .collect();
    let result = RunResult {
        run: held.runs.len() as u32,
        method: METHOD.into(),
        outcome: d.outcome_name.clone(),
        rows: d.outcome.len(),
        predictors: d.predictors.len(),
        error_name: if classes.is_some() {
            "error rate"
        } else {
            "mean squared error"
        }
        .into(),
        members: 1,
        member_name: "model".into(),
        training_error: training_error(&d, &fitted_on_all),
        training_curve: Vec::new(),
        oob_error: None,
        oob_curve: Vec::new(),
        round_errors: Vec::new(),
        stop: None,
        tree_shape: None,
        fit_seconds,
        worker_memory_bytes: wasm_memory_bytes(),
        validation,
        validation_refused,
        notices: d.notices.clone(),
    };
    let fingerprint = loaded.fingerprint.clone();
    held.runs.push(Some(Run {
        design,
        kept: Kept::Baseline(BaselineRun {
            model,
            penalty,
            fingerprint,
            outcome: d.outcome_name.clone(),
            classes,
            reading,
        }),
        judged,
        judging,
    }));
    Ok(result)
}

/// What the coefficient rows and contributions are on, in words: (one name per row, the
/// scale in a sentence).
fn outputs(b: &BaselineRun) -> (Vec<String>, String) {
    match &b.classes {
        Some(c) if c.len() == 2 => (
            vec![format!("log-odds of '{}'", c[1])],
            format!(
                "log-odds of '{}' per standard deviation of a number predictor (or for a category level, or a missing value, against none)",
                c[1]
            ),
        ),
        Some(c) => (
            c.iter().map(|c| format!("score of '{c}'")).collect(),
            "each class's score (softmax: the probabilities are proportional to e to the score) per standard deviation of a number predictor (or for a category level, or a missing value)".into(),
        ),
        None => (
            vec![b.outcome.clone()],
            format!(
                "'{}' in its own units per standard deviation of a number predictor (or for a category level, or a missing value)",
                b.outcome
            ),
        ),
    }
}

/// Step 5 for a baseline run: its coefficients when `importance` is asked, a record's
/// contributions when `record` is; what does not apply to it said in the notes.
#[allow(clippy::too_many_arguments)]
pub fn explain(
    loaded: &Loaded,
    run: &Run,
    b: &BaselineRun,
    number: u32,
    importance: bool,
    predictor: Option<&str>,
    record: Option<usize>,
    tree: bool,
) -> Result<Insight, String> {
    let d = table_design(loaded, &run.design)?;
    let mut notes = Vec::new();
    if importance || tree || predictor.is_some() {
        notes.push("a baseline is a regression, not trees: shuffling importance, partial dependence and tree pictures are not shown for it; its coefficients below say how it weighs each predictor".into());
    }
    let (names, scale) = outputs(b);
    let coefficients = importance.then(|| {
        let (rows, intercepts) = b.model.rows();
        let features = &b.model.preparation().features;
        let mut terms: Vec<(String, Vec<f64>)> = features
            .iter()
            .enumerate()
            .map(|(j, f)| (f.clone(), rows.iter().map(|r| r[j]).collect()))
            .collect();
        terms.sort_by(|a, b| b.1[0].abs().total_cmp(&a.1[0].abs()));
        InsightCoefficients {
            scale: scale.clone(),
            outputs: names.clone(),
            intercepts,
            terms,
            penalty: b.penalty,
        }
    });
    let contributions = match record {
        None => None,
        Some(row) => {
            // Table row `row` is design row `at` (rows without an outcome are left out).
            let Some(at) = d.rows.iter().position(|&r| r == row) else {
                return Err(format!(
                    "record {} has no outcome, so the baseline was not fitted on it; give another number from 1 to {}",
                    row + 1,
                    loaded.table.rows
                ));
            };
            let one = d.select_rows(&[at]);
            let c = b
                .model
                .contributions(&d, &baseline_columns(&one))
                .map_err(|e| e.to_string())?;
            let p = b.model.predict(&one).map_err(|e| e.to_string())?;
            if c.base.len() != 1 {
                notes.push("contributions per record are not available for a baseline of several classes (each class has its own score); its coefficients are shown".into());
                None
            } else {
                Some(record_contributions(
                    b,
                    &d,
                    &loaded.table,
                    &c,
                    row,
                    &p,
                    &names[0],
                ))
            }
        }
    };
    Ok(Insight {
        run: number,
        predictors: d.predictors.iter().map(|p| p.name.clone()).collect(),
        rows: loaded.table.rows,
        importance: None,
        dependence: None,
        contributions,
        tree: None,
        coefficients,
        notes,
    })
}

/// A record's contributions in the insight step's shape.
#[allow(clippy::too_many_arguments)]
fn record_contributions(
    b: &BaselineRun,
    d: &Design,
    table: &Table,
    c: &BaselineContributions,
    row: usize,
    p: &[f64],
    output: &str,
) -> InsightContributions {
    let mut list: Vec<Contribution> = d
        .predictors
        .iter()
        .enumerate()
        .map(|(j, p)| Contribution {
            predictor: p.name.clone(),
            // As the table shows it (a date as a date, yes/no as its word).
            value: table
                .column(&p.name)
                .and_then(|col| col.display(row))
                .unwrap_or_else(|| "missing".into()),
            amount: c.values[j],
        })
        .filter(|x| x.amount != 0.0)
        .collect();
    list.sort_by(|a, b| b.amount.abs().total_cmp(&a.amount.abs()));
    let sum = c.base[0] + c.values.iter().sum::<f64>();
    let (prediction, predicted_class) = super::prediction_words(b.classes.as_deref(), p);
    InsightContributions {
        record: row,
        scale: "coefficient × the record's standardised value, less the training records' mean (a regression's contributions)".into(),
        output: output.to_string(),
        base: c.base[0],
        contributions: list,
        sum,
        prediction,
        predicted_class,
        predicted: p.to_vec(),
    }
}

/// The baseline's predictor columns read from a new `table`: numbers as they are,
/// categories by their training level (a label training never had matches none); a missing
/// column or another kind refused in the core's words. Also the count of unseen labels per
/// predictor.
fn columns_of(b: &BaselineRun, table: &Table) -> Result<Vec<(String, PredictorValues)>, String> {
    let (mut missing, mut wrong_kind) = (Vec::new(), Vec::new());
    let mut out = Vec::new();
    for (name, kind, levels) in &b.reading {
        let Some(c) = table.column(name) else {
            missing.push(name.clone());
            continue;
        };
        let values = match (levels, &c.values) {
            (None, Values::Numbers(v)) => Some(PredictorValues::Numbers(v.clone())),
            (Some(train), Values::Levels { codes, levels }) => {
                let map: Vec<u32> = levels
                    .iter()
                    .map(|l| {
                        train
                            .iter()
                            .position(|t| t == l)
                            .map_or(train.len() as u32, |i| i as u32)
                    })
                    .collect();
                Some(PredictorValues::Levels {
                    codes: codes
                        .iter()
                        .map(|&k| {
                            if k == MISSING_CODE {
                                MISSING_CODE
                            } else {
                                map[k as usize]
                            }
                        })
                        .collect(),
                    levels: train.clone(),
                })
            }
            _ => None,
        };
        match values {
            Some(v) => out.push((name.clone(), v)),
            None => wrong_kind.push(format!(
                "'{name}' holds {} here but was {} in training",
                c.kind.label(),
                kind.label()
            )),
        }
    }
    if !missing.is_empty() || !wrong_kind.is_empty() {
        return Err(Error::new(ErrorKind::ColumnsForModel {
            missing,
            wrong_kind,
            available: table.columns.iter().map(|c| c.name.clone()).collect(),
        })
        .to_string());
    }
    Ok(out)
}

/// How many of a scored column's rows hold a label the training rows never had.
fn unseen_notes(b: &BaselineRun, cols: &[(String, PredictorValues)]) -> Vec<String> {
    cols.iter()
        .filter_map(|(name, v)| match v {
            PredictorValues::Levels { codes, levels } => {
                let n = codes
                    .iter()
                    .filter(|&&k| k != MISSING_CODE && k as usize >= levels.len())
                    .count();
                (n > 0).then(|| {
                    format!("column '{name}': {n} row(s) hold labels not seen in training; the baseline gives them no level's term (as if none of the training levels)")
                })
            }
            PredictorValues::Numbers(_) => None,
        })
        .chain(std::iter::once(format!(
            "scored by the baseline ({}, penalty {})",
            if b.classes.is_some() {
                "logistic regression"
            } else {
                "ridge regression"
            },
            b.penalty
        )))
        .collect()
}

/// Scores a new file with a baseline run: the predictions in a tree run's columns, then each
/// row's three largest contributions (coefficient × standardised value, centred), or a note
/// where they are not available.
#[allow(clippy::too_many_arguments)]
pub fn score(
    loaded: &Loaded,
    run: &Run,
    b: &BaselineRun,
    id: u32,
    number: u32,
    name: &str,
    bytes: &[u8],
    keep: &[String],
    top: usize,
    preview_rows: usize,
) -> Result<ScoreResult, String> {
    let options = ReadOptions {
        file_name: Some(name.to_string()),
        kinds: b.reading.iter().map(|(n, k, _)| (n.clone(), *k)).collect(),
        max_bytes: Some(MAX_FILE_BYTES),
        ..ReadOptions::default()
    };
    let new =
        read_table(bytes, &options, &mut Reporter::new(id)).map_err(|e| format!("{name}: {e}"))?;
    let cols = columns_of(b, &new.table).map_err(|e| format!("{name}: {e}"))?;
    let as_baseline: Vec<BaselineColumn> = cols
        .iter()
        .map(|(n, v)| BaselineColumn {
            name: n,
            values: match v {
                PredictorValues::Numbers(x) => ColumnValues::Numbers(x),
                PredictorValues::Levels { codes, levels } => ColumnValues::Categories {
                    codes,
                    labels: levels,
                },
            },
        })
        .collect();
    let predictions = b
        .model
        .predict_columns(&as_baseline)
        .map_err(|e| format!("{name}: {e}"))?;
    let train = table_design(loaded, &run.design)?;
    let c = b
        .model
        .contributions(&train, &as_baseline)
        .map_err(|e| format!("{name}: {e}"))?;
    let one_row = c.base.len() == 1;
    let mut notes: Vec<String> = new.notices.iter().map(|n| format!("{name}: {n}")).collect();
    notes.extend(unseen_notes(b, &cols));
    if !one_row {
        notes.push("contributions per row are not available for a baseline of several classes (each class has its own score)".into());
    }
    let (output_names, scale) = outputs(b);
    let mut rows = PredictionRows::given(
        &b.outcome,
        b.classes.as_deref(),
        &predictions,
        &new.table,
        keep,
    );
    let mut header = rows.header();
    for t in 1..=top {
        header.push(format!("top_{t}_predictor"));
        header.push(format!("top_{t}_amount"));
    }
    header.push("amount_scale".into());
    let mut csv = PredictionRows::csv_line(&header);
    csv.push('\n');
    let mut preview = Vec::new();
    let p = c.predictors;
    for row in 0..rows.rows() {
        let mut fields = rows.fields(row);
        let mut order: Vec<usize> = if one_row {
            (0..p).filter(|&j| c.values[row * p + j] != 0.0).collect()
        } else {
            Vec::new()
        };
        order.sort_by(|&a, &b| {
            c.values[row * p + b]
                .abs()
                .total_cmp(&c.values[row * p + a].abs())
        });
        for t in 0..top {
            match order.get(t) {
                Some(&j) => {
                    fields.push(cols[j].0.clone());
                    fields.push(c.values[row * p + j].to_string());
                }
                None => fields.extend([String::new(), String::new()]),
            }
        }
        fields.push(if one_row {
            output_names[0].clone()
        } else {
            String::new()
        });
        csv += &PredictionRows::csv_line(&fields);
        csv.push('\n');
        if row < preview_rows {
            preview.push(fields);
        }
    }
    Ok(ScoreResult {
        run: number,
        file: name.to_string(),
        rows: rows.rows(),
        csv,
        header,
        preview,
        notes,
        contribution_scale: if one_row {
            format!("the baseline's {scale} (coefficient × standardised value, centred on the training records)")
        } else {
            "not available for a baseline of several classes".into()
        },
    })
}
