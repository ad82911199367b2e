//! A fitted [`Model`] as an ONNX model (the open standard, <https://onnx.ai>), so it can be
//! scored anywhere an ONNX runtime runs. One `TreeEnsemble` node (domain `ai.onnx.ml`,
//! version 5) holds every tree with double-precision thresholds and leaf values, so the
//! comparisons are the model's own; a few standard nodes after it turn scores into what
//! [`Model::predict`] gives.
//!
//! The graph's input `predictors` is a double tensor `[rows, P]`, one column per predictor in
//! the model's order (the metadata entry `spinney.predictors` lists them, each with how it
//! is written):
//! - numbers as they are; dates and date-times as days since 1970-01-01 (fractional with a
//!   time of day); yes/no as 0 for the first label and 1 for the second;
//! - categories as the position of the label in the listed `levels` (0-based), and −1 for a
//!   label not in the list (it follows the split side of the labels pooled in training);
//! - a missing value as NaN (it follows each split's stored side).
//!
//! Outputs: `probabilities` `[rows, classes]` and `class_index` (int64, the first largest
//! probability) for a class outcome, or `prediction` `[rows, 1]` for a number.
//!
//! How each method is written:
//! - a single tree, bagging and forests: one ensemble tree per fitted tree and class (an ONNX
//!   leaf carries one value), summed, then divided by the number of trees;
//! - AdaBoost: each tree's leaf votes its round weight α for the leaf's class; the sums A go
//!   through softmax(A · K / ((K − 1)² W)) with W the sum of α, which is the SAMME
//!   probability of [`crate::model::samme_probabilities`];
//! - gradient boosting: round r's tree for score k adds its leaf value to score k; the initial
//!   scores are added, then the loss's link: sigmoid (logistic, as [1 − p, p]), softmax,
//!   exp (Poisson) or none.
//!
//! The protobuf is written by hand below ([`Proto`]): a handful of message types, each field
//! by its number in onnx.proto3.

use crate::ensemble::forest::argmax;
use crate::ensemble::loss::Loss;
use crate::model::{Ensemble, Model, Reading};
use crate::tree::Tree;

/// The IR version and operator sets written.
const IR_VERSION: i64 = 10;
const ONNX_OPSET: i64 = 21;
const ML_OPSET: i64 = 5;

/// ONNX tensor element types (onnx.proto3 `TensorProto.DataType`).
const UINT8: i64 = 2;
const INT64: i64 = 7;
const DOUBLE: i64 = 11;

/// `TreeEnsemble` node modes.
const BRANCH_LEQ: u8 = 0;
const BRANCH_MEMBER: u8 = 6;

/// A protobuf message being written.
#[derive(Default)]
struct Proto(Vec<u8>);

impl Proto {
    fn varint(&mut self, mut v: u64) {
        while v >= 0x80 {
            self.0.push((v as u8) | 0x80);
            v >>= 7;
        }
        self.0.push(v as u8);
    }

    fn key(&mut self, field: u32, wire: u32) {
        self.varint(((field << 3) | wire) as u64);
    }

    fn int(&mut self, field: u32, v: i64) {
        self.key(field, 0);
        self.varint(v as u64);
    }

    fn bytes(&mut self, field: u32, b: &[u8]) {
        self.key(field, 2);
        self.varint(b.len() as u64);
        self.0.extend_from_slice(b);
    }

    fn text(&mut self, field: u32, s: &str) {
        self.bytes(field, s.as_bytes());
    }

    fn message(&mut self, field: u32, m: Proto) {
        self.bytes(field, &m.0);
    }

    /// Repeated int64, packed.
    fn ints(&mut self, field: u32, vs: &[i64]) {
        let mut packed = Proto::default();
        for &v in vs {
            packed.varint(v as u64);
        }
        self.bytes(field, &packed.0);
    }
}

/// A tensor of doubles or bytes, its values little-endian in `raw_data`.
fn tensor(name: &str, dims: &[i64], data_type: i64, raw: Vec<u8>) -> Proto {
    let mut t = Proto::default();
    t.ints(1, dims);
    t.int(2, data_type);
    t.text(8, name);
    t.bytes(9, &raw);
    t
}

fn doubles(name: &str, values: &[f64]) -> Proto {
    let raw = values.iter().flat_map(|v| v.to_le_bytes()).collect();
    tensor(name, &[values.len() as i64], DOUBLE, raw)
}

/// Node attributes (onnx.proto3 `AttributeProto`; type 2 INT, 3 STRING, 4 TENSOR, 7 INTS).
fn attr_int(name: &str, v: i64) -> Proto {
    let mut a = Proto::default();
    a.text(1, name);
    a.int(3, v);
    a.int(20, 2);
    a
}

fn attr_ints(name: &str, vs: &[i64]) -> Proto {
    let mut a = Proto::default();
    a.text(1, name);
    a.ints(8, vs);
    a.int(20, 7);
    a
}

fn attr_tensor(name: &str, t: Proto) -> Proto {
    let mut a = Proto::default();
    a.text(1, name);
    a.message(5, t);
    a.int(20, 4);
    a
}

fn node(op: &str, domain: &str, inputs: &[&str], outputs: &[&str], attrs: Vec<Proto>) -> Proto {
    let mut n = Proto::default();
    for i in inputs {
        n.text(1, i);
    }
    for o in outputs {
        n.text(2, o);
    }
    n.text(3, &format!("{op}_{}", outputs[0]));
    n.text(4, op);
    for a in attrs {
        n.message(5, a);
    }
    if !domain.is_empty() {
        n.text(7, domain);
    }
    n
}

/// A graph input or output: a tensor of `elem` with a first dimension named "rows".
fn value_info(name: &str, elem: i64, columns: Option<i64>) -> Proto {
    let mut shape = Proto::default();
    let mut rows = Proto::default();
    rows.text(2, "rows");
    shape.message(1, rows);
    if let Some(c) = columns {
        let mut d = Proto::default();
        d.int(1, c);
        shape.message(1, d);
    }
    let mut tensor_type = Proto::default();
    tensor_type.int(1, elem);
    tensor_type.message(2, shape);
    let mut ty = Proto::default();
    ty.message(1, tensor_type);
    let mut v = Proto::default();
    v.text(1, name);
    v.message(2, ty);
    v
}

/// The `TreeEnsemble` attributes, filled tree by tree.
#[derive(Default)]
struct Ensemble5 {
    roots: Vec<i64>,
    features: Vec<i64>,
    modes: Vec<u8>,
    splits: Vec<f64>,
    true_ids: Vec<i64>,
    true_leafs: Vec<i64>,
    false_ids: Vec<i64>,
    false_leafs: Vec<i64>,
    missing_true: Vec<i64>,
    members: Vec<f64>,
    leaf_targets: Vec<i64>,
    leaf_weights: Vec<f64>,
}

impl Ensemble5 {
    /// Adds `tree`; each leaf adds `leaf(values of the leaf)` = (target, weight) to the sums.
    /// Category splits test membership of the label positions whose bin goes left.
    fn add(&mut self, tree: &Tree, model: &Model, leaf: &dyn Fn(&[f64]) -> (usize, f64)) {
        // Interior nodes and leaves each numbered in node order.
        let mut index = vec![0i64; tree.nodes.len()];
        let (mut interior, mut leaves) =
            (self.features.len() as i64, self.leaf_weights.len() as i64);
        for (i, n) in tree.nodes.iter().enumerate() {
            if n.is_leaf() {
                index[i] = leaves;
                leaves += 1;
            } else {
                index[i] = interior;
                interior += 1;
            }
        }
        let child = |c: u32| (index[c as usize], tree.nodes[c as usize].is_leaf() as i64);
        if tree.nodes[0].is_leaf() {
            // A tree of one leaf: ONNX roots are interior nodes, so a test whose two sides
            // both end in that leaf.
            self.roots.push(self.features.len() as i64);
            self.features.push(0);
            self.modes.push(BRANCH_LEQ);
            self.splits.push(0.0);
            self.true_ids.push(index[0]);
            self.true_leafs.push(1);
            self.false_ids.push(index[0]);
            self.false_leafs.push(1);
            self.missing_true.push(0);
        } else {
            self.roots.push(index[0]);
        }
        for (i, n) in tree.nodes.iter().enumerate() {
            if n.is_leaf() {
                let (target, weight) = leaf(tree.node_values(i));
                self.leaf_targets.push(target as i64);
                self.leaf_weights.push(weight);
                continue;
            }
            self.features.push(n.feature as i64);
            if n.numeric {
                self.modes.push(BRANCH_LEQ);
                self.splits.push(n.threshold);
            } else {
                self.modes.push(BRANCH_MEMBER);
                self.splits.push(0.0);
                let start = self.members.len();
                if let Reading::Category {
                    bin_of_level,
                    pooled_bin,
                    ..
                } = &model.predictors[n.feature as usize].reading
                {
                    for (level, &bin) in bin_of_level.iter().enumerate() {
                        if n.left_bins().contains(bin) {
                            self.members.push(level as f64);
                        }
                    }
                    if n.left_bins().contains(*pooled_bin) {
                        self.members.push(-1.0);
                    }
                }
                if self.members.len() == start {
                    // No label goes left; a value no input takes keeps the set non-empty.
                    self.members.push(-2.0);
                }
                self.members.push(f64::NAN);
            }
            let (t, tl) = child(n.left);
            let (f, fl) = child(n.right);
            self.true_ids.push(t);
            self.true_leafs.push(tl);
            self.false_ids.push(f);
            self.false_leafs.push(fl);
            self.missing_true.push(n.missing_left as i64);
        }
    }

    fn node(mut self, targets: usize, output: &str) -> Proto {
        if self.roots.is_empty() {
            // No trees (boosting stopped before its first round): one that adds 0.
            self.roots.push(0);
            self.features.push(0);
            self.modes.push(BRANCH_LEQ);
            self.splits.push(0.0);
            self.true_ids.push(0);
            self.true_leafs.push(1);
            self.false_ids.push(0);
            self.false_leafs.push(1);
            self.missing_true.push(0);
            self.leaf_targets.push(0);
            self.leaf_weights.push(0.0);
        }
        // The sets are separated by NaN; none after the last.
        if self.members.last().is_some_and(|v| v.is_nan()) {
            self.members.pop();
        }
        let mut attrs = vec![
            attr_int("aggregate_function", 1), // SUM
            attr_int("n_targets", targets as i64),
            attr_int("post_transform", 0), // NONE
            attr_ints("tree_roots", &self.roots),
            attr_ints("nodes_featureids", &self.features),
            attr_tensor(
                "nodes_modes",
                tensor("", &[self.modes.len() as i64], UINT8, self.modes.clone()),
            ),
            attr_tensor("nodes_splits", doubles("", &self.splits)),
            attr_ints("nodes_truenodeids", &self.true_ids),
            attr_ints("nodes_trueleafs", &self.true_leafs),
            attr_ints("nodes_falsenodeids", &self.false_ids),
            attr_ints("nodes_falseleafs", &self.false_leafs),
            attr_ints("nodes_missing_value_tracks_true", &self.missing_true),
            attr_ints("leaf_targetids", &self.leaf_targets),
            attr_tensor("leaf_weights", doubles("", &self.leaf_weights)),
        ];
        if !self.members.is_empty() {
            attrs.push(attr_tensor("membership_values", doubles("", &self.members)));
        }
        node(
            "TreeEnsemble",
            "ai.onnx.ml",
            &["predictors"],
            &[output],
            attrs,
        )
    }
}

/// How each predictor is written into the input, as JSON for the model's metadata.
fn predictors_json(model: &Model) -> String {
    let list: Vec<serde_json::Value> = model
        .predictors
        .iter()
        .enumerate()
        .map(|(j, p)| {
            let mut v = serde_json::json!({ "column": j, "name": p.name, "kind": p.kind.label() });
            match &p.reading {
                Reading::Number => {
                    v["write"] =
                        "the number (dates: days since 1970-01-01); NaN when missing".into()
                }
                Reading::YesNo { labels } => {
                    v["labels"] = serde_json::json!(labels);
                    v["write"] = "0 for the first label, 1 for the second; NaN when missing".into()
                }
                Reading::Category { levels, .. } => {
                    v["levels"] = serde_json::json!(levels);
                    v["write"] = "the label's position in levels (0-based); -1 for a label not \
                                  listed; NaN when missing"
                        .into()
                }
            }
            v
        })
        .collect();
    serde_json::Value::Array(list).to_string()
}

/// The ONNX model of `model`, as bytes of an `.onnx` file.
pub fn write_onnx(model: &Model) -> Vec<u8> {
    let classes = model.classes.clone();
    let k = model.outputs();
    let mut nodes = Vec::new();
    let mut initializers = Vec::new();
    // The output holding the probabilities or the number.
    let last = match (&model.ensemble, &classes) {
        (Ensemble::Tree(_) | Ensemble::Forest(_), _) => {
            let trees = model.ensemble.trees();
            let mut e = Ensemble5::default();
            for target in 0..k {
                for t in trees {
                    e.add(t, model, &|v| (target, v[target]));
                }
            }
            nodes.push(e.node(k, "sums"));
            initializers.push(doubles("tree_count", &[trees.len().max(1) as f64]));
            nodes.push(node(
                "Div",
                "",
                &["sums", "tree_count"],
                &["mean"],
                Vec::new(),
            ));
            "mean"
        }
        (Ensemble::AdaBoost(a), _) => {
            let mut e = Ensemble5::default();
            for (t, &alpha) in a.trees.iter().zip(&a.alphas) {
                e.add(t, model, &|v| (argmax(v), alpha));
            }
            nodes.push(e.node(k, "votes"));
            let total: f64 = a.alphas.iter().sum();
            let kf = k as f64;
            let scale = if total > 0.0 && k >= 2 {
                kf / ((kf - 1.0) * (kf - 1.0) * total)
            } else {
                0.0
            };
            initializers.push(doubles("vote_scale", &[scale]));
            nodes.push(node(
                "Mul",
                "",
                &["votes", "vote_scale"],
                &["decision"],
                Vec::new(),
            ));
            nodes.push(node(
                "Softmax",
                "",
                &["decision"],
                &["softmax"],
                vec![attr_int("axis", 1)],
            ));
            "softmax"
        }
        (Ensemble::Boosting(b), _) => {
            let m = b.outputs.max(1);
            let mut e = Ensemble5::default();
            for (i, t) in b.trees.iter().enumerate() {
                let target = i % m;
                e.add(t, model, &|v| (target, v.first().copied().unwrap_or(0.0)));
            }
            nodes.push(e.node(m, "round_sums"));
            initializers.push(doubles("initial_scores", &b.initial));
            nodes.push(node(
                "Add",
                "",
                &["round_sums", "initial_scores"],
                &["scores"],
                Vec::new(),
            ));
            match b.loss {
                Loss::Logistic => {
                    nodes.push(node("Sigmoid", "", &["scores"], &["p"], Vec::new()));
                    initializers.push(doubles("one", &[1.0]));
                    nodes.push(node("Sub", "", &["one", "p"], &["q"], Vec::new()));
                    nodes.push(node(
                        "Concat",
                        "",
                        &["q", "p"],
                        &["two_classes"],
                        vec![attr_int("axis", 1)],
                    ));
                    "two_classes"
                }
                Loss::Softmax => {
                    nodes.push(node(
                        "Softmax",
                        "",
                        &["scores"],
                        &["softmax"],
                        vec![attr_int("axis", 1)],
                    ));
                    "softmax"
                }
                Loss::Poisson => {
                    nodes.push(node("Exp", "", &["scores"], &["rate"], Vec::new()));
                    "rate"
                }
                _ => "scores",
            }
        }
    };
    let mut outputs = Vec::new();
    if classes.is_some() {
        nodes.push(node(
            "Identity",
            "",
            &[last],
            &["probabilities"],
            Vec::new(),
        ));
        nodes.push(node(
            "ArgMax",
            "",
            &["probabilities"],
            &["class_index"],
            vec![attr_int("axis", 1), attr_int("keepdims", 0)],
        ));
        outputs.push(value_info("probabilities", DOUBLE, Some(k as i64)));
        outputs.push(value_info("class_index", INT64, None));
    } else {
        nodes.push(node("Identity", "", &[last], &["prediction"], Vec::new()));
        outputs.push(value_info("prediction", DOUBLE, Some(1)));
    }

    let mut graph = Proto::default();
    for n in nodes {
        graph.message(1, n);
    }
    graph.text(2, &format!("spinney_{}", model.method.word()));
    for i in initializers {
        graph.message(5, i);
    }
    graph.text(
        10,
        "Input 'predictors': one double column per predictor, written as the metadata entry \
         spinney.predictors says. Research use: a model needs external validation before it \
         informs care, and replaces neither clinical judgement nor local approval.",
    );
    graph.message(
        11,
        value_info("predictors", DOUBLE, Some(model.predictors.len() as i64)),
    );
    for o in outputs {
        graph.message(12, o);
    }

    let mut onnx = Proto::default();
    onnx.int(1, IR_VERSION);
    onnx.text(2, "spinney");
    onnx.text(3, crate::VERSION);
    onnx.message(7, graph);
    for (domain, version) in [("", ONNX_OPSET), ("ai.onnx.ml", ML_OPSET)] {
        let mut o = Proto::default();
        if !domain.is_empty() {
            o.text(1, domain);
        }
        o.int(2, version);
        onnx.message(8, o);
    }
    let mut meta = vec![
        ("spinney.method", model.method.word().to_string()),
        ("spinney.outcome", model.outcome.clone()),
        ("spinney.predictors", predictors_json(model)),
        (
            "spinney.settings",
            serde_json::json!(model.settings).to_string(),
        ),
        ("spinney.seed", model.seed.to_string()),
        (
            "spinney.caution",
            "Research use only. Needs external validation before it informs anyone's care; not \
             a substitute for clinical judgement, local regulations or licensed practice."
                .to_string(),
        ),
    ];
    if let Some(c) = &classes {
        meta.push(("spinney.classes", serde_json::json!(c).to_string()));
    }
    if let Some(f) = &model.training_fingerprint {
        meta.push(("spinney.training_fingerprint", f.clone()));
    }
    for (key, value) in meta {
        let mut entry = Proto::default();
        entry.text(1, key);
        entry.text(2, &value);
        onnx.message(14, entry);
    }
    onnx.0
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn varints_are_written_as_protobuf_says() {
        // The protobuf encoding guide's own examples: 1 → 01, 150 → 96 01, and a negative
        // int64 takes ten bytes (two's complement). From the Protocol Buffers encoding
        // documentation.
        let mut p = Proto::default();
        p.varint(1);
        p.varint(150);
        assert_eq!(p.0, [0x01, 0x96, 0x01]);
        let mut n = Proto::default();
        n.int(1, -1);
        assert_eq!(n.0.len(), 11);
        assert_eq!(n.0[0], 0x08);
        // "testing" in field 2: 12 07 74 65 73 74 69 6e 67 (same documentation).
        let mut s = Proto::default();
        s.text(2, "testing");
        assert_eq!(s.0, [0x12, 0x07, b't', b'e', b's', b't', b'i', b'n', b'g']);
    }
}
