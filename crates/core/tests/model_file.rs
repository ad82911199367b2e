//! Model files: every method written and read back gives identical trees and bit-identical
//! predictions; a corpus of broken files (cut short, bytes flipped, indices out of range,
//! newer versions, other JSON) is refused with a message naming the problem and never
//! panics, and whatever a damaged file still reads as predicts without panicking.

use std::collections::BTreeMap;

use spinney_core::binning::{bin_design, BinSettings, Records};
use spinney_core::data::{read_table, ReadOptions, Table};
use spinney_core::design::{build_design, DesignSpec, Outcome};
use spinney_core::ensemble::adaboost::{fit_adaboost, BoostSettings};
use spinney_core::ensemble::boosting::{fit_boosting, BoostingSettings};
use spinney_core::ensemble::forest::{fit_forest, ForestSettings};
use spinney_core::ensemble::loss::Loss;
use spinney_core::model::{
    is_partial, predictors_of, samme_probabilities, Ensemble, Method, Model,
};
use spinney_core::model_file::{read_model, write_model};
use spinney_core::progress::Silent;
use spinney_core::tree::criterion::Criterion;
use spinney_core::tree::grower::{grow, GrowSettings};
use spinney_core::tree::Rows;

/// Invented records: a number with awkward decimals, a date, a yes/no column, a category
/// with a rare (pooled) label, missing values everywhere, three classes (`y`) and two
/// (`ok`).
fn training_text() -> String {
    let wards = ["Cedar", "Birch", "Rowan", "Alder"];
    let mut text = String::from("y,ok,level,dose,seen,smoker,ward\n");
    for i in 0..240u64 {
        let h = i.wrapping_mul(2654435761) % 1000;
        let level = (h as f64) / 7.0 + 0.1;
        let dose = ((i * 37) % 101) as f64 * 0.3;
        let smoker = if (h / 3) % 2 == 0 { "yes" } else { "no" };
        let ward = if i == 17 {
            "Oak"
        } else {
            wards[(h % 4) as usize]
        };
        let y = if level > 90.0 && smoker == "yes" {
            "high"
        } else if dose > 15.0 || ward == "Cedar" {
            "mid"
        } else {
            "low"
        };
        let level = if i % 11 == 0 {
            String::new()
        } else {
            level.to_string()
        };
        let ward = if i % 13 == 0 { "" } else { ward };
        let day = 1 + (i % 28);
        let ok = if (h + i) % 3 == 0 || y == "low" {
            "ok"
        } else {
            "not_ok"
        };
        text += &format!("{y},{ok},{level},{dose},2024-02-{day:02},{smoker},{ward}\n");
    }
    text
}

fn table(text: &str) -> Table {
    read_table(text.as_bytes(), &ReadOptions::default(), &mut Silent)
        .unwrap()
        .table
}

/// A model of `method` on the training records: `y` (three classes) by default, `dose`
/// (numbers) when `numbers`.
fn fitted(method: Method, numbers: bool) -> Model {
    fitted_with(method, if numbers { "dose" } else { "y" }, None)
}

/// A model of `method` for `outcome` (`y`, `ok` or `dose`), with a boosting loss if given.
fn fitted_with(method: Method, outcome: &str, loss: Option<Loss>) -> Model {
    let t = table(&training_text());
    let numbers = outcome == "dose";
    let predictors: &[&str] = if numbers {
        &["level", "seen", "smoker", "ward"]
    } else {
        &["level", "dose", "seen", "smoker", "ward"]
    };
    let spec = DesignSpec {
        outcome: outcome.into(),
        predictors: predictors.iter().map(|s| s.to_string()).collect(),
        ..DesignSpec::default()
    };
    let design = build_design(&t, &spec).unwrap();
    let binned = bin_design(
        &design,
        BinSettings {
            max_bins: 16,
            min_level_rows: 2,
            exact: false,
        },
    )
    .unwrap();
    let (stats, width) = design.row_statistics(false);
    let grow_settings = GrowSettings {
        criterion: if numbers {
            Criterion::SquaredError
        } else {
            Criterion::Entropy
        },
        max_depth: Some(6),
        ..GrowSettings::default()
    };
    let ensemble = match method {
        Method::Tree => {
            let rows: Vec<u32> = (0..binned.rows as u32).collect();
            Ensemble::Tree(grow(&binned, &stats, width, &rows, &grow_settings, None))
        }
        Method::Bagging | Method::Forest => {
            let mut s = ForestSettings::random_forest(design.predictors.len(), numbers, 3);
            s.trees = 7;
            s.grow = grow_settings;
            if method == Method::Bagging {
                s.predictors_per_split = None;
            }
            Ensemble::Forest(fit_forest(
                &binned,
                &stats,
                width,
                &design.outcome,
                &s,
                &mut Silent,
            ))
        }
        Method::AdaBoost => {
            let Outcome::Classes { codes, labels } = &design.outcome else {
                panic!("AdaBoost needs classes")
            };
            let s = BoostSettings {
                rounds: 12,
                ..BoostSettings::default()
            };
            Ensemble::AdaBoost(fit_adaboost(
                &binned,
                codes,
                labels.len(),
                None,
                &s,
                &mut Silent,
            ))
        }
        Method::Boosting => {
            let s = BoostingSettings {
                loss,
                rounds: 8,
                // Early stopping on held-out rows for the two-class model.
                patience: (outcome == "ok").then_some(2),
                ..BoostingSettings::default()
            };
            Ensemble::Boosting(fit_boosting(&binned, &design, None, &s, &mut Silent).unwrap())
        }
    };
    let classes = match &design.outcome {
        Outcome::Classes { labels, .. } => Some(labels.clone()),
        Outcome::Numbers(_) => None,
    };
    Model {
        method,
        outcome: design.outcome_name.clone(),
        classes,
        predictors: predictors_of(&design, &binned),
        partial: is_partial(&ensemble),
        ensemble,
        settings: BTreeMap::from([("depth".to_string(), "6".to_string())]),
        seed: 3,
        training_fingerprint: Some("ab".repeat(32)),
        training_rows: binned.rows,
    }
}

/// New records: the training rows plus unseen labels, missing values everywhere and numbers
/// beyond the training range, read as `model` reads its predictors.
fn scoring_table(model: &Model) -> Table {
    let mut text = training_text();
    text += "low,ok,,,,,\nmid,ok,1e9,-5,1999-12-31,no,Elm\nhigh,,NA,3.3,2030-01-01,yes,Oak\n";
    let options = ReadOptions {
        kinds: model.reading_kinds(),
        ..ReadOptions::default()
    };
    read_table(text.as_bytes(), &options, &mut Silent)
        .unwrap()
        .table
}

fn scoring_records(model: &Model) -> Records {
    let (records, unseen) = model.records(&scoring_table(model)).unwrap();
    assert!(
        unseen
            .iter()
            .any(|u| u.predictor == "ward" && u.example == "Elm"),
        "{unseen:?}"
    );
    records
}

fn predictions(model: &Model, records: &Records) -> Vec<u64> {
    let mut out = Vec::new();
    let mut p = vec![0.0; model.outputs()];
    for r in 0..records.rows {
        model.predict(Rows::Records(records), r, &mut p);
        out.extend(p.iter().map(|x| x.to_bits()));
        out.extend(
            model
                .staged_predict(Rows::Records(records), r)
                .iter()
                .map(|x| x.to_bits()),
        );
    }
    out
}

fn all_models() -> Vec<Model> {
    let mut models: Vec<Model> = Method::ALL.iter().map(|&m| fitted(m, false)).collect();
    models.push(fitted(Method::Tree, true));
    models.push(fitted(Method::Forest, true));
    models.push(fitted(Method::Boosting, true));
    models.push(fitted_with(Method::Boosting, "ok", None));
    models.push(fitted_with(
        Method::Boosting,
        "dose",
        Some(Loss::Huber { quantile: 0.8 }),
    ));
    models
}

#[test]
fn every_method_reads_back_identical() {
    for model in all_models() {
        let text = write_model(&model).unwrap();
        let back =
            read_model(text.as_bytes()).unwrap_or_else(|e| panic!("{}: {e}", model.method.word()));
        assert_eq!(back.ensemble.trees(), model.ensemble.trees());
        assert_eq!(back.predictors, model.predictors);
        assert_eq!(
            (&back.outcome, &back.classes, &back.settings, back.seed),
            (&model.outcome, &model.classes, &model.settings, model.seed)
        );
        assert_eq!(back.training_fingerprint, model.training_fingerprint);
        assert_eq!(
            (back.training_rows, back.partial),
            (model.training_rows, false)
        );
        let records = scoring_records(&model);
        assert_eq!(
            predictions(&back, &records),
            predictions(&model, &records),
            "{}",
            model.method.word()
        );
        match (&back.ensemble, &model.ensemble) {
            (Ensemble::AdaBoost(a), Ensemble::AdaBoost(b)) => {
                assert_eq!(
                    (&a.alphas, &a.errors, a.stop),
                    (&b.alphas, &b.errors, b.stop)
                );
            }
            (Ensemble::Boosting(a), Ensemble::Boosting(b)) => {
                let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
                assert_eq!(
                    (a.loss, a.outputs, a.classes),
                    (b.loss, b.outputs, b.classes)
                );
                assert_eq!(bits(&a.initial), bits(&b.initial));
                assert_eq!(bits(&a.training_loss), bits(&b.training_loss));
                assert_eq!(bits(&a.validation_loss), bits(&b.validation_loss));
                assert_eq!((&a.held_out, a.stopping), (&b.held_out, b.stopping));
            }
            (Ensemble::Forest(a), Ensemble::Forest(b)) => {
                let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
                assert_eq!(bits(&a.oob_error), bits(&b.oob_error));
                assert_eq!(a.oob_share.to_bits(), b.oob_share.to_bits());
            }
            _ => {}
        }
        // Writing what was read gives the same file.
        assert_eq!(write_model(&back).unwrap(), text);
    }
}

#[test]
fn an_infinite_threshold_is_written_as_null_and_read_back() {
    let mut model = fitted(Method::Tree, false);
    let Ensemble::Tree(tree) = &mut model.ensemble else {
        panic!()
    };
    let i = tree
        .nodes
        .iter()
        .position(|n| !n.is_leaf() && n.numeric)
        .unwrap();
    tree.nodes[i].threshold = f64::INFINITY;
    let text = write_model(&model).unwrap();
    assert!(text.contains("null"), "{text}");
    let back = read_model(text.as_bytes()).unwrap();
    assert_eq!(back.ensemble.trees()[0].nodes[i].threshold, f64::INFINITY);
    // Every present number goes left of it; a missing one follows the stored side.
    let n = &back.ensemble.trees()[0].nodes[i];
    assert!(n.value_goes_left(1e308));
    assert_eq!(n.value_goes_left(f64::NAN), n.missing_left);
}

#[test]
fn adaboost_probabilities_follow_the_samme_rule() {
    // scikit-learn's AdaBoostClassifier.predict_proba (SAMME), worked by hand: two classes
    // with votes 1 and 3 (W = 4) give decisions −0.5 and 0.5, so p = softmax(−0.5, 0.5).
    let mut p = [0.0; 2];
    samme_probabilities(&[1.0, 3.0], 4.0, &mut p);
    let expected = 1.0 / (1.0 + (-1.0f64).exp());
    assert!((p[1] - expected).abs() < 1e-15, "{p:?}");
    // Three classes, votes 2, 1, 0 (W = 3): d = (A − (W − A)/2) / W = 1/2, 0, −1/2, then
    // softmax of d / 2 = 1/4, 0, −1/4.
    let mut p = [0.0; 3];
    samme_probabilities(&[2.0, 1.0, 0.0], 3.0, &mut p);
    let e: Vec<f64> = [0.25f64, 0.0, -0.25].iter().map(|x| x.exp()).collect();
    let s: f64 = e.iter().sum();
    for k in 0..3 {
        assert!((p[k] - e[k] / s).abs() < 1e-15, "{p:?}");
    }
    // No rounds: every class equally likely.
    samme_probabilities(&[0.0, 0.0, 0.0], 0.0, &mut p);
    assert_eq!(p, [1.0 / 3.0; 3]);
}

/// Reads `text`; it must be refused with a message holding every one of `needles`.
fn refused(text: &str, needles: &[&str]) {
    match read_model(text.as_bytes()) {
        Ok(_) => panic!("accepted a broken file; expected {needles:?}"),
        Err(e) => {
            let message = e.to_string();
            for n in needles {
                assert!(message.contains(n), "message lacks {n:?}: {message}");
            }
        }
    }
}

/// The model file of `model` with `edit` applied to its JSON.
fn edited(model: &Model, edit: impl FnOnce(&mut serde_json::Value)) -> String {
    let mut v: serde_json::Value = serde_json::from_str(&write_model(model).unwrap()).unwrap();
    edit(&mut v);
    serde_json::to_string_pretty(&v).unwrap()
}

#[test]
fn broken_files_are_refused_by_name() {
    let tree = fitted(Method::Tree, false);
    let forest = fitted(Method::Forest, false);
    let boost = fitted(Method::AdaBoost, false);
    refused("", &["empty"]);
    refused("id,age\n1,2\n", &["not valid JSON", "line 1"]);
    refused("[1, 2]", &["not a Spinney model file"]);
    refused(
        r#"{"format": "spinney-inspect", "version": 1}"#,
        &["format 'spinney-inspect'", "not a Spinney model file"],
    );
    refused(r#"{"rows": 3}"#, &["not a Spinney model file"]);
    refused(r#"{"format": "spinney-model"}"#, &["\"version\""]);
    refused(
        &edited(&tree, |v| {
            v["version"]["major"] = 2.into();
            v["written_by"] = "spinney 9.0.0".into();
        }),
        &["format version 2.0", "spinney 9.0.0", "Update Spinney"],
    );
    // A newer minor version with a field this reader does not know is read.
    let newer_minor = edited(&tree, |v| {
        v["version"]["minor"] = 7.into();
        v["something_new"] = "later".into();
    });
    assert!(read_model(newer_minor.as_bytes()).is_ok());
    refused(
        &edited(&tree, |v| v["trees"][0]["left"][0] = 9999.into()),
        &["tree 1", "node 0 has child 9999"],
    );
    refused(
        &edited(&tree, |v| v["trees"][0]["left"][0] = 0.into()),
        &["tree 1", "node", "parent"],
    );
    refused(
        &edited(&tree, |v| {
            let right = v["trees"][0]["right"][0].clone();
            v["trees"][0]["left"][0] = right;
        }),
        &["same node"],
    );
    refused(
        &edited(&tree, |v| {
            let n = v["trees"][0]["values"].as_array().unwrap().len();
            v["trees"][0]["values"]
                .as_array_mut()
                .unwrap()
                .truncate(n - 1);
        }),
        &["values", "beyond"],
    );
    refused(
        &edited(&tree, |v| v["trees"][0]["feature"][0] = 40.into()),
        &["predictor 41", "the model has 5"],
    );
    refused(
        &edited(&tree, |v| {
            v["trees"][0]["weight"].as_array_mut().unwrap().pop();
        }),
        &["'weight' has"],
    );
    let ward = tree
        .predictors
        .iter()
        .position(|p| p.name == "ward")
        .unwrap();
    refused(
        &edited(&tree, |v| {
            v["predictors"][ward]["bin_of_level"][0] = 200.into()
        }),
        &["'ward'", "bin 200"],
    );
    refused(
        &edited(&tree, |v| {
            v["predictors"][ward]["levels"]
                .as_array_mut()
                .unwrap()
                .push("Elm".into())
        }),
        &["'ward'", "labels"],
    );
    // A category split sending a bin beyond the predictor's bins left.
    let Ensemble::Tree(t) = &tree.ensemble else {
        panic!()
    };
    if let Some(i) = t.nodes.iter().position(|n| !n.is_leaf() && !n.numeric) {
        refused(
            &edited(&tree, |v| {
                v["trees"][0]["categories_left"][i] = serde_json::json!([0, 250])
            }),
            &["bin 250", "'ward'"],
        );
    }
    refused(
        &edited(&tree, |v| {
            let numeric = v["trees"][0]["numeric"][0].as_bool().unwrap();
            v["trees"][0]["numeric"][0] = (!numeric).into();
        }),
        &["node 0 splits"],
    );
    refused(
        &edited(&tree, |v| v["method"] = "magic".into()),
        &["method 'magic'"],
    );
    refused(
        &edited(&tree, |v| v["trees"][0]["left"][0] = (-1).into()),
        &["line", "column"],
    );
    refused(
        &edited(&tree, |v| v["classes"] = serde_json::json!(["only"])),
        &["1 class(es)"],
    );
    refused(
        &edited(&forest, |v| {
            v.as_object_mut().unwrap().remove("forest");
        }),
        &["\"forest\" block"],
    );
    refused(
        &edited(&boost, |v| {
            v["adaboost"]["round_weights"].as_array_mut().unwrap().pop();
        }),
        &["round weights"],
    );
    let gradient = fitted(Method::Boosting, false);
    refused(
        &edited(&gradient, |v| {
            v["trees"].as_array_mut().unwrap().pop();
        }),
        &["not a whole number of rounds"],
    );
    refused(
        &edited(&gradient, |v| v["boosting"]["loss"] = "logistic".into()),
        &["logistic", "score(s) per row"],
    );
    refused(
        &edited(&gradient, |v| v["boosting"]["loss"] = "poisson".into()),
        &["poisson", "does not fit"],
    );
    refused(
        &edited(&gradient, |v| {
            v["boosting"]["initial_scores"]
                .as_array_mut()
                .unwrap()
                .pop();
        }),
        &["starting score"],
    );
    refused(
        &edited(&boost, |v| {
            v["adaboost"]["round_weights"][0] = 1e308.into();
            v["adaboost"]["round_weights"][1] = 1e308.into();
        }),
        &["finite sum"],
    );
    refused(
        &edited(&boost, |v| v["adaboost"]["stopped"] = "tired".into()),
        &["'tired'"],
    );
}

#[test]
fn damaged_files_never_panic() {
    for model in [
        fitted(Method::Forest, false),
        fitted(Method::AdaBoost, false),
    ] {
        let text = write_model(&model).unwrap();
        let bytes = text.as_bytes();
        let table = scoring_table(&model);
        // Cut short at many points: always refused, as incomplete.
        let step = (bytes.len() / 300).max(1);
        for cut in (0..bytes.len() - 2).step_by(step) {
            let e = read_model(&bytes[..cut]).err().unwrap_or_else(|| {
                panic!("a file cut at byte {cut} of {} was accepted", bytes.len())
            });
            assert!(e.to_string().contains("model file cannot be used"), "{e}");
        }
        // Single bytes changed: refused with a message, or (a digit changed, say) read
        // and then predicting without panicking.
        let mut damaged = bytes.to_vec();
        for i in (0..bytes.len()).step_by(step) {
            for new in [b'9', b'"', b'}', 0xff, b'-'] {
                let old = damaged[i];
                damaged[i] = new;
                match read_model(&damaged) {
                    Err(e) => assert!(!e.to_string().is_empty()),
                    Ok(m) => {
                        // A changed column name leaves the table without it: refused.
                        if let Ok((records, _)) = m.records(&table) {
                            let mut p = vec![0.0; m.outputs()];
                            for r in 0..records.rows {
                                m.predict(Rows::Records(&records), r, &mut p);
                                m.staged_predict(Rows::Records(&records), r);
                            }
                        }
                    }
                }
                damaged[i] = old;
            }
        }
    }
}

#[test]
fn tables_to_score_are_read_by_name_label_and_kind() {
    let model = fitted(Method::Tree, false);
    // The tree cut to its first split: one predictor used, the others not.
    let mut stump = model.clone();
    let Ensemble::Tree(t) = &mut stump.ensemble else {
        panic!()
    };
    let mut root = t.nodes[0].clone();
    let mut sides = [root.left, root.right].map(|i| t.nodes[i as usize].clone());
    for leaf in &mut sides {
        (leaf.left, leaf.right) = (0, 0);
    }
    (root.left, root.right) = (1, 2);
    t.nodes = vec![root, sides[0].clone(), sides[1].clone()];
    assert_eq!(stump.check(), Ok(()));
    // Absent columns the splits use are all named at once; absent unused ones are not.
    let used = stump.used_predictors();
    assert_eq!(used.iter().filter(|&&u| u).count(), 1);
    let t = table("other\n1\n2\n");
    let e = stump.records(&t).unwrap_err().to_string();
    assert!(e.contains("the model needs"), "{e}");
    for (p, &u) in stump.predictors.iter().zip(&used) {
        assert_eq!(e.contains(&format!("'{}'", p.name)), u, "{}: {e}", p.name);
    }
    // A table with only the used columns scores as the whole table does.
    let whole = scoring_table(&stump);
    let mut only_used = whole.clone();
    only_used.columns.retain(|c| {
        !stump
            .predictors
            .iter()
            .zip(&used)
            .any(|(p, &u)| p.name == c.name && !u)
    });
    assert_eq!(only_used.columns.len(), whole.columns.len() - 4);
    let (a, _) = stump.records(&whole).unwrap();
    let (b, _) = stump.records(&only_used).unwrap();
    assert_eq!(predictions(&stump, &a), predictions(&stump, &b));
    // A category given as numbers (read without the model's kinds) is the wrong kind.
    let t = table("level,dose,seen,smoker,ward\n1,2,2024-01-01,yes,3\n2,2,2024-01-02,no,4\n");
    let e = model.records(&t).unwrap_err().to_string();
    assert!(
        e.contains("'ward' holds whole number here but was category"),
        "{e}"
    );
    // Yes/no labels are matched by label whatever their case, then as yes/no words;
    // anything else is missing and counted.
    let text = "level,dose,seen,smoker,ward\n1,2,2024-01-01,YES,Birch\n1,2,2024-01-01,n,Birch\n\
                1,2,2024-01-01,maybe,Birch\n1,2,2024-01-01,,Birch\n";
    let options = ReadOptions {
        kinds: model.reading_kinds(),
        ..ReadOptions::default()
    };
    let t = read_table(text.as_bytes(), &options, &mut Silent)
        .unwrap()
        .table;
    let (records, unseen) = model.records(&t).unwrap();
    let smoker = model
        .predictors
        .iter()
        .position(|p| p.name == "smoker")
        .unwrap();
    let values: Vec<f64> = (0..4).map(|r| records.value(smoker, r)).collect();
    assert_eq!(&values[..2], &[1.0, 0.0]);
    assert!(values[2].is_nan() && values[3].is_nan());
    assert_eq!(unseen.len(), 1);
    assert_eq!(
        (
            unseen[0].predictor.as_str(),
            unseen[0].rows,
            unseen[0].example.as_str()
        ),
        ("smoker", 1, "maybe")
    );
    assert_eq!(unseen[0].follows, "the missing side");
}
