//! The model file: a [`Model`] as versioned JSON. The structs here are the file's own
//! (format version 1), converted by hand from and to the model, so the model's types can
//! change without changing files people keep (ARCHITECTURE.md, invariant 5).
//!
//! The file is one JSON object:
//!
//! - `format` (`"spinney-model"`), `version` (`{"major": 1, "minor": 0}`), `written_by`
//!   (`"spinney 0.1.0"`);
//! - `method`, `outcome`, `classes` (labels, or null for a number), `predictors` (name,
//!   kind, and for categories the training labels, the bin of each and the pooled bin; for
//!   yes/no the two labels), `settings` (every setting by its `--set` name, as text), `seed`,
//!   `training_fingerprint` (SHA-256 of the training file, or null), `training_rows`,
//!   `partial` (fitting was cancelled);
//! - `forest` (out-of-bag error after each tree, null where no row was out of bag; share of
//!   rows out of bag), `adaboost` (round weights, round errors, why it stopped) or `boosting`
//!   (loss, starting scores, training and held-out loss by round, the held-out rows'
//!   numbers, why it stopped; its trees are round by round, one per score);
//! - `trees`: each tree as parallel arrays, one entry per node (`feature`, `numeric`,
//!   `threshold`, `threshold_bin`, `categories_left`, `missing_left`, `left`, `right`,
//!   `weight`, `gain`, `value`), plus its `values` (`outputs` per node). A leaf has
//!   `left` 0. **A `threshold` of null means +infinity: every number goes left** (JSON has
//!   no infinity). Other numbers are written so they read back to the same bits.
//!
//! A reader accepts any 1.x file (fields it does not know are skipped) and refuses a newer
//! major version, a file that is not JSON or not a model, and contents whose indices do not
//! hold together (checked by [`Model::check`]), each with a message naming the problem.
//! Training rows are never written: out-of-bag predictions per row are left out.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use crate::data::Kind;
use crate::ensemble::adaboost::{AdaBoost, Stop};
use crate::ensemble::boosting::{Boosting, Stopping};
use crate::ensemble::forest::Forest;
use crate::ensemble::loss::Loss;
use crate::envelope::Refusal;
use crate::error::{Error, ErrorKind, Result, Where};
use crate::model::{Ensemble, Method, Model, Predictor, Reading};
use crate::tree::{BinSet, Node, Tree};

/// The `format` of every model file.
pub const FORMAT: &str = "spinney-model";
/// The major version written and the newest read; a new major version means older readers
/// cannot use the file.
pub const MAJOR: u64 = 1;
/// The minor version written: additions older 1.x readers can skip.
pub const MINOR: u64 = 0;

#[derive(Serialize, Deserialize)]
struct VersionV1 {
    major: u64,
    minor: u64,
}

#[derive(Serialize, Deserialize)]
struct FileV1 {
    format: String,
    version: VersionV1,
    written_by: String,
    method: String,
    outcome: String,
    classes: Option<Vec<String>>,
    predictors: Vec<PredictorV1>,
    settings: BTreeMap<String, String>,
    seed: u64,
    training_fingerprint: Option<String>,
    training_rows: u64,
    partial: bool,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    forest: Option<ForestV1>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    adaboost: Option<AdaBoostV1>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    boosting: Option<BoostingV1>,
    trees: Vec<TreeV1>,
}

#[derive(Serialize, Deserialize)]
struct PredictorV1 {
    name: String,
    /// A column kind as users see it: number, whole number, date, date-time, yes/no,
    /// category.
    kind: String,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    yes_no_labels: Option<[String; 2]>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    levels: Option<Vec<String>>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    bin_of_level: Option<Vec<u8>>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pooled_bin: Option<u8>,
}

#[derive(Serialize, Deserialize)]
struct ForestV1 {
    /// null where no row had been out of bag yet.
    out_of_bag_error: Vec<Option<f64>>,
    out_of_bag_share: f64,
}

#[derive(Serialize, Deserialize)]
struct AdaBoostV1 {
    round_weights: Vec<f64>,
    round_errors: Vec<f64>,
    /// all_rounds, perfect, no_better_than_chance or cancelled.
    stopped: String,
}

#[derive(Serialize, Deserialize)]
struct BoostingV1 {
    /// logistic, softmax, squared_error, absolute_error, huber or poisson.
    loss: String,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    huber_quantile: Option<f64>,
    /// Scores per row (1, or one per class for softmax).
    outputs: usize,
    initial_scores: Vec<f64>,
    /// null where the loss was not a finite number.
    training_loss: Vec<Option<f64>>,
    validation_loss: Vec<Option<f64>>,
    /// Training rows (0-based, in the order used) held out for early stopping.
    held_out_rows: Vec<u32>,
    /// all_rounds, early or cancelled.
    stopped: String,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    best_round: Option<usize>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    last_round: Option<usize>,
}

#[derive(Serialize, Deserialize)]
struct TreeV1 {
    outputs: usize,
    feature: Vec<u32>,
    numeric: Vec<bool>,
    /// null: +infinity (every number goes left).
    threshold: Vec<Option<f64>>,
    threshold_bin: Vec<u16>,
    categories_left: Vec<Vec<u8>>,
    missing_left: Vec<bool>,
    left: Vec<u32>,
    right: Vec<u32>,
    weight: Vec<f64>,
    gain: Vec<f64>,
    value: Vec<u32>,
    values: Vec<f64>,
}

fn stop_word(stop: Stop) -> &'static str {
    match stop {
        Stop::AllRounds => "all_rounds",
        Stop::Perfect => "perfect",
        Stop::NoBetterThanChance => "no_better_than_chance",
        Stop::Cancelled => "cancelled",
    }
}

fn not_saved(reason: String) -> Error {
    Error::new(ErrorKind::ModelNotSaved { reason })
}

/// Writes `model` as a model file (pretty-printed JSON).
pub fn write_model(model: &Model) -> Result<String> {
    let finite = |what: &str, values: &[f64]| -> Result<()> {
        match values.iter().position(|x| !x.is_finite()) {
            Some(i) => Err(not_saved(format!("{what}[{i}] is {}", values[i]))),
            None => Ok(()),
        }
    };
    let mut trees = Vec::with_capacity(model.members());
    for (t, tree) in model.ensemble.trees().iter().enumerate() {
        let nodes = &tree.nodes;
        let weight: Vec<f64> = nodes.iter().map(|n| n.weight).collect();
        let gain: Vec<f64> = nodes.iter().map(|n| n.gain).collect();
        finite(&format!("tree {} weight", t + 1), &weight)?;
        finite(&format!("tree {} gain", t + 1), &gain)?;
        finite(&format!("tree {} values", t + 1), &tree.values)?;
        let mut threshold = Vec::with_capacity(nodes.len());
        for (i, n) in nodes.iter().enumerate() {
            threshold.push(if n.threshold == f64::INFINITY {
                None
            } else if n.threshold.is_finite() {
                Some(n.threshold)
            } else {
                return Err(not_saved(format!(
                    "tree {} node {i} has threshold {}",
                    t + 1,
                    n.threshold
                )));
            });
        }
        trees.push(TreeV1 {
            outputs: tree.outputs,
            feature: nodes.iter().map(|n| n.feature).collect(),
            numeric: nodes.iter().map(|n| n.numeric).collect(),
            threshold,
            threshold_bin: nodes.iter().map(|n| n.threshold_bin).collect(),
            categories_left: nodes
                .iter()
                .map(|n| (0..=255u8).filter(|&b| n.left_bins().contains(b)).collect())
                .collect(),
            missing_left: nodes.iter().map(|n| n.missing_left).collect(),
            left: nodes.iter().map(|n| n.left).collect(),
            right: nodes.iter().map(|n| n.right).collect(),
            weight,
            gain,
            value: nodes.iter().map(|n| n.value).collect(),
            values: tree.values.clone(),
        });
    }
    let nullable =
        |v: &[f64]| -> Vec<Option<f64>> { v.iter().map(|&x| x.is_finite().then_some(x)).collect() };
    let boosting = match &model.ensemble {
        Ensemble::Boosting(b) => {
            finite("starting scores", &b.initial)?;
            let (stopped, best_round, last_round) = match b.stopping {
                Stopping::AllRounds => ("all_rounds", None, None),
                Stopping::Early { best, last } => ("early", Some(best), Some(last)),
                Stopping::Cancelled => ("cancelled", None, None),
            };
            Some(BoostingV1 {
                loss: b.loss.word().into(),
                huber_quantile: match b.loss {
                    Loss::Huber { quantile } => Some(quantile),
                    _ => None,
                },
                outputs: b.outputs,
                initial_scores: b.initial.clone(),
                training_loss: nullable(&b.training_loss),
                validation_loss: nullable(&b.validation_loss),
                held_out_rows: b.held_out.clone(),
                stopped: stopped.into(),
                best_round,
                last_round,
            })
        }
        _ => None,
    };
    let (forest, adaboost) = match &model.ensemble {
        Ensemble::Tree(_) | Ensemble::Boosting(_) => (None, None),
        Ensemble::Forest(f) => {
            finite("out-of-bag share", &[f.oob_share])?;
            let out_of_bag_error = f
                .oob_error
                .iter()
                .map(|&e| e.is_finite().then_some(e))
                .collect();
            (
                Some(ForestV1 {
                    out_of_bag_error,
                    out_of_bag_share: f.oob_share,
                }),
                None,
            )
        }
        Ensemble::AdaBoost(a) => {
            finite("round weights", &a.alphas)?;
            finite("round errors", &a.errors)?;
            (
                None,
                Some(AdaBoostV1 {
                    round_weights: a.alphas.clone(),
                    round_errors: a.errors.clone(),
                    stopped: stop_word(a.stop).into(),
                }),
            )
        }
    };
    let predictors = model
        .predictors
        .iter()
        .map(|p| {
            let mut out = PredictorV1 {
                name: p.name.clone(),
                kind: p.kind.label().into(),
                yes_no_labels: None,
                levels: None,
                bin_of_level: None,
                pooled_bin: None,
            };
            match &p.reading {
                Reading::Number => {}
                Reading::YesNo { labels } => out.yes_no_labels = Some(labels.clone()),
                Reading::Category {
                    levels,
                    bin_of_level,
                    pooled_bin,
                } => {
                    out.levels = Some(levels.clone());
                    out.bin_of_level = Some(bin_of_level.clone());
                    out.pooled_bin = Some(*pooled_bin);
                }
            }
            out
        })
        .collect();
    let file = FileV1 {
        format: FORMAT.into(),
        version: VersionV1 {
            major: MAJOR,
            minor: MINOR,
        },
        written_by: format!("spinney {}", crate::VERSION),
        method: model.method.word().into(),
        outcome: model.outcome.clone(),
        classes: model.classes.clone(),
        predictors,
        settings: model.settings.clone(),
        seed: model.seed,
        training_fingerprint: model.training_fingerprint.clone(),
        training_rows: model.training_rows as u64,
        partial: model.partial,
        forest,
        adaboost,
        boosting,
        trees,
    };
    let mut bytes = Vec::new();
    let mut writer = serde_json::Serializer::with_formatter(&mut bytes, Layout::default());
    file.serialize(&mut writer)
        .map_err(|e| not_saved(format!("JSON writing failed: {e}")))?;
    bytes.push(b'\n');
    String::from_utf8(bytes).map_err(|e| not_saved(format!("JSON writing failed: {e}")))
}

/// The file's layout: objects indented two spaces a level, one field a line; arrays
/// directly inside the top object (classes, predictors, trees) one item a line; deeper
/// arrays (a tree's node fields, a category's labels) on one line, so that a tree takes
/// a dozen lines, not one per number.
#[derive(Default)]
struct Layout {
    depth: usize,
    /// The depth of the array being written on one line.
    inline_from: Option<usize>,
    has_value: bool,
}

impl Layout {
    /// Before an array item or object field: a comma after the first, then a new line
    /// unless on one line.
    fn separate(&self, w: &mut (impl std::io::Write + ?Sized), first: bool) -> std::io::Result<()> {
        if !first {
            w.write_all(b",")?;
        }
        if self.inline_from.is_none() {
            self.newline(w, self.depth)?;
        }
        Ok(())
    }

    fn newline(&self, w: &mut (impl std::io::Write + ?Sized), depth: usize) -> std::io::Result<()> {
        w.write_all(b"\n")?;
        for _ in 0..depth {
            w.write_all(b"  ")?;
        }
        Ok(())
    }
}

impl serde_json::ser::Formatter for Layout {
    fn begin_array<W: ?Sized + std::io::Write>(&mut self, w: &mut W) -> std::io::Result<()> {
        self.depth += 1;
        if self.inline_from.is_none() && self.depth >= 3 {
            self.inline_from = Some(self.depth);
        }
        self.has_value = false;
        w.write_all(b"[")
    }
    fn end_array<W: ?Sized + std::io::Write>(&mut self, w: &mut W) -> std::io::Result<()> {
        if self.inline_from.is_none() && self.has_value {
            self.newline(w, self.depth - 1)?;
        }
        if self.inline_from == Some(self.depth) {
            self.inline_from = None;
        }
        self.depth -= 1;
        w.write_all(b"]")
    }
    fn begin_array_value<W: ?Sized + std::io::Write>(
        &mut self,
        w: &mut W,
        first: bool,
    ) -> std::io::Result<()> {
        self.separate(w, first)
    }
    fn end_array_value<W: ?Sized + std::io::Write>(&mut self, _: &mut W) -> std::io::Result<()> {
        self.has_value = true;
        Ok(())
    }
    fn begin_object<W: ?Sized + std::io::Write>(&mut self, w: &mut W) -> std::io::Result<()> {
        self.depth += 1;
        self.has_value = false;
        w.write_all(b"{")
    }
    fn end_object<W: ?Sized + std::io::Write>(&mut self, w: &mut W) -> std::io::Result<()> {
        if self.inline_from.is_none() && self.has_value {
            self.newline(w, self.depth - 1)?;
        }
        self.depth -= 1;
        w.write_all(b"}")
    }
    fn begin_object_key<W: ?Sized + std::io::Write>(
        &mut self,
        w: &mut W,
        first: bool,
    ) -> std::io::Result<()> {
        self.separate(w, first)
    }
    fn begin_object_value<W: ?Sized + std::io::Write>(&mut self, w: &mut W) -> std::io::Result<()> {
        w.write_all(if self.inline_from.is_none() {
            b": "
        } else {
            b":"
        })
    }
    fn end_object_value<W: ?Sized + std::io::Write>(&mut self, _: &mut W) -> std::io::Result<()> {
        self.has_value = true;
        Ok(())
    }
}

/// A refusal naming the problem, with the JSON position when serde_json knows it.
fn bad(reason: impl Into<String>) -> Error {
    Error::new(ErrorKind::BadModelFile {
        at: Where::default(),
        reason: reason.into(),
    })
}

fn bad_json(e: &serde_json::Error, what: &str) -> Error {
    let text = e.to_string();
    let suffix = format!(" at line {} column {}", e.line(), e.column());
    let message = text.strip_suffix(&suffix).unwrap_or(&text);
    let reason = match e.classify() {
        serde_json::error::Category::Eof => {
            "the file ends before the model is complete (was it cut short while copying?)"
                .to_string()
        }
        serde_json::error::Category::Io => format!("it could not be read ({message})"),
        serde_json::error::Category::Syntax => format!("it is not valid JSON ({message})"),
        serde_json::error::Category::Data => format!("{what} ({message})"),
    };
    Error::new(ErrorKind::BadModelFile {
        at: Where {
            line: (e.line() > 0).then_some(e.line() as u64),
            column: (e.line() > 0).then(|| e.column().to_string()),
            ..Where::default()
        },
        reason,
    })
}

/// Reads a model file, refusing (never panicking on) anything that is not a whole, consistent
/// model of a version this Spinney reads.
pub fn read_model(bytes: &[u8]) -> Result<Model> {
    if bytes.iter().all(u8::is_ascii_whitespace) {
        return Err(bad("the file is empty"));
    }
    // First the envelope: is it JSON, a model, a version we read?
    let value: serde_json::Value =
        serde_json::from_slice(bytes).map_err(|e| bad_json(&e, "it is not a model"))?;
    crate::envelope::check(&value, FORMAT, "model file", MAJOR, &[]).map_err(|r| match r {
        Refusal::Bad(reason) => bad(reason),
        Refusal::Newer {
            major,
            minor,
            written_by,
        } => Error::new(ErrorKind::NewerModelFile {
            major,
            minor,
            written_by,
            reads: MAJOR,
        }),
    })?;
    drop(value);
    // Then the contents, with serde_json's line and column for any field of the wrong type.
    let file: FileV1 = serde_json::from_slice(bytes)
        .map_err(|e| bad_json(&e, "its contents do not fit model format version 1"))?;
    let model = from_file(file)?;
    model.check().map_err(bad)?;
    Ok(model)
}

fn from_file(file: FileV1) -> Result<Model> {
    let method = Method::from_word(&file.method).ok_or_else(|| {
        bad(format!(
            "its method '{}' is not one of tree, bagging, forest, adaboost, boosting",
            file.method
        ))
    })?;
    let mut predictors = Vec::with_capacity(file.predictors.len());
    for (j, p) in file.predictors.into_iter().enumerate() {
        let kind = Kind::from_label(&p.kind).ok_or_else(|| {
            bad(format!(
                "predictor {} ('{}') has the unknown kind '{}'",
                j + 1,
                p.name,
                p.kind
            ))
        })?;
        let reading = match kind {
            Kind::Number | Kind::WholeNumber | Kind::Date | Kind::DateTime => Reading::Number,
            Kind::YesNo => Reading::YesNo {
                labels: p.yes_no_labels.ok_or_else(|| {
                    bad(format!(
                        "predictor {} ('{}') is yes/no but has no yes_no_labels",
                        j + 1,
                        p.name
                    ))
                })?,
            },
            Kind::Category => match (p.levels, p.bin_of_level, p.pooled_bin) {
                (Some(levels), Some(bin_of_level), Some(pooled_bin)) => Reading::Category {
                    levels,
                    bin_of_level,
                    pooled_bin,
                },
                _ => {
                    return Err(bad(format!(
                        "predictor {} ('{}') is a category but lacks levels, bin_of_level or \
                         pooled_bin",
                        j + 1,
                        p.name
                    )))
                }
            },
            Kind::Text => {
                return Err(bad(format!(
                    "predictor {} ('{}') is free text, which no model uses",
                    j + 1,
                    p.name
                )))
            }
        };
        predictors.push(Predictor {
            name: p.name,
            kind,
            reading,
        });
    }
    let mut trees = Vec::with_capacity(file.trees.len());
    for (t, tree) in file.trees.into_iter().enumerate() {
        trees.push(tree_from_file(tree).map_err(|e| bad(format!("tree {}: {e}", t + 1)))?);
    }
    let outputs = file.classes.as_ref().map_or(1, Vec::len);
    let ensemble = match method {
        Method::Tree => {
            if trees.len() != 1 {
                return Err(bad(format!(
                    "a single-tree model holds {} trees",
                    trees.len()
                )));
            }
            Ensemble::Tree(trees.remove(0))
        }
        Method::Bagging | Method::Forest => {
            let f = file
                .forest
                .ok_or_else(|| bad("a bagging or forest model lacks its \"forest\" block"))?;
            Ensemble::Forest(Forest {
                trees,
                outputs,
                oob_error: f
                    .out_of_bag_error
                    .iter()
                    .map(|e| e.unwrap_or(f64::NAN))
                    .collect(),
                oob_prediction: Vec::new(),
                oob_share: f.out_of_bag_share,
                training_error: Vec::new(),
                partial: file.partial,
                judged: None,
            })
        }
        Method::AdaBoost => {
            let a = file
                .adaboost
                .ok_or_else(|| bad("an AdaBoost model lacks its \"adaboost\" block"))?;
            let stop = [
                Stop::AllRounds,
                Stop::Perfect,
                Stop::NoBetterThanChance,
                Stop::Cancelled,
            ]
            .into_iter()
            .find(|&s| stop_word(s) == a.stopped)
            .ok_or_else(|| {
                bad(format!(
                    "AdaBoost's \"stopped\" is '{}', not one of all_rounds, perfect, \
                     no_better_than_chance, cancelled",
                    a.stopped
                ))
            })?;
            Ensemble::AdaBoost(AdaBoost {
                trees,
                alphas: a.round_weights,
                errors: a.round_errors,
                classes: outputs,
                stop,
            })
        }
        Method::Boosting => {
            let b = file
                .boosting
                .ok_or_else(|| bad("a gradient-boosting model lacks its \"boosting\" block"))?;
            let loss = match (b.loss.as_str(), b.huber_quantile) {
                ("logistic", _) => Loss::Logistic,
                ("softmax", _) => Loss::Softmax,
                ("squared_error", _) => Loss::SquaredError,
                ("absolute_error", _) => Loss::AbsoluteError,
                ("poisson", _) => Loss::Poisson,
                ("huber", Some(quantile)) => Loss::Huber { quantile },
                (other, _) => {
                    return Err(bad(format!(
                        "boosting's loss '{other}' is not one of logistic, softmax, \
                         squared_error, absolute_error, huber (with huber_quantile), poisson"
                    )))
                }
            };
            let stopping = match (b.stopped.as_str(), b.best_round, b.last_round) {
                ("all_rounds", _, _) => Stopping::AllRounds,
                ("cancelled", _, _) => Stopping::Cancelled,
                ("early", Some(best), Some(last)) => Stopping::Early { best, last },
                (other, _, _) => {
                    return Err(bad(format!(
                        "boosting's \"stopped\" is '{other}', not all_rounds, cancelled, or \
                         early with best_round and last_round"
                    )))
                }
            };
            let nan = |v: Vec<Option<f64>>| v.into_iter().map(|x| x.unwrap_or(f64::NAN)).collect();
            Ensemble::Boosting(Boosting {
                loss,
                classes: file.classes.as_ref().map_or(0, Vec::len),
                outputs: b.outputs,
                initial: b.initial_scores,
                trees,
                training_loss: nan(b.training_loss),
                validation_loss: nan(b.validation_loss),
                held_out: b.held_out_rows,
                training_error: Vec::new(),
                stopping,
                partial: file.partial,
            })
        }
    };
    Ok(Model {
        method,
        outcome: file.outcome,
        classes: file.classes,
        predictors,
        ensemble,
        settings: file.settings,
        seed: file.seed,
        training_fingerprint: file.training_fingerprint,
        training_rows: usize::try_from(file.training_rows).unwrap_or(usize::MAX),
        partial: file.partial,
    })
}

fn tree_from_file(t: TreeV1) -> std::result::Result<Tree, String> {
    let n = t.feature.len();
    let lengths = [
        ("numeric", t.numeric.len()),
        ("threshold", t.threshold.len()),
        ("threshold_bin", t.threshold_bin.len()),
        ("categories_left", t.categories_left.len()),
        ("missing_left", t.missing_left.len()),
        ("left", t.left.len()),
        ("right", t.right.len()),
        ("weight", t.weight.len()),
        ("gain", t.gain.len()),
        ("value", t.value.len()),
    ];
    if let Some((name, len)) = lengths.iter().find(|(_, len)| *len != n) {
        return Err(format!(
            "'{name}' has {len} entries but 'feature' has {n}; every node needs one of each"
        ));
    }
    let nodes = (0..n)
        .map(|i| {
            let mut categories = BinSet::default();
            for &b in &t.categories_left[i] {
                categories.insert(b);
            }
            Node {
                feature: t.feature[i],
                numeric: t.numeric[i],
                threshold_bin: t.threshold_bin[i],
                threshold: t.threshold[i].unwrap_or(f64::INFINITY),
                categories: Node::boxed_bins(categories),
                missing_left: t.missing_left[i],
                left: t.left[i],
                right: t.right[i],
                weight: t.weight[i],
                gain: t.gain[i],
                value: t.value[i],
            }
        })
        .collect();
    Ok(Tree {
        nodes,
        values: t.values,
        outputs: t.outputs,
    })
}
