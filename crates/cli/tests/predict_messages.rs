//! `spinney fit --save-model` and `spinney predict`: a saved model scores a file exactly as
//! the model did in memory when it was fitted (the same numbers, to the bit, as
//! `fit --score FILE --json --predictions`), and bad model files and tables are refused with
//! messages that say what is wrong (exit status 1, no panic). Wording is ours; the checks
//! look for the facts each message must carry (common practice, no source).

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

const DEMO: &str = concat!(
    env!("CARGO_MANIFEST_DIR"),
    "/../../demo-data/surgery-complications.csv"
);

fn spinney(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_spinney"))
        .args(args)
        .output()
        .unwrap()
}

fn dir() -> PathBuf {
    let d = std::env::temp_dir().join(format!("spinney-predict-tests-{}", std::process::id()));
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn path(name: &str) -> PathBuf {
    dir().join(name)
}

fn s(p: &Path) -> &str {
    p.to_str().unwrap()
}

fn succeeds(args: &[&str]) -> Output {
    let out = spinney(args);
    assert!(
        out.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    out
}

fn fails_with(args: &[&str], needles: &[&str]) {
    let out = spinney(args);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(1), "{args:?}: {err}");
    assert!(!err.contains("panicked"), "{args:?}: {err}");
    for n in needles {
        assert!(err.contains(n), "{args:?}: message lacks {n:?}: {err}");
    }
}

/// A tree of `depth` for the demo outcome, saved as `name`.
fn saved_tree(name: &str, depth: usize) -> PathBuf {
    let model = path(name);
    let depth = format!("depth={depth}");
    succeeds(&[
        "fit",
        DEMO,
        "--outcome",
        "complication_30d",
        "--set",
        &depth,
        "--save-model",
        s(&model),
    ]);
    model
}

#[test]
fn a_saved_model_predicts_as_the_fitted_one() {
    for (name, method) in [
        ("tree", &["--method", "tree", "--set", "depth=6"][..]),
        ("forest", &["--method", "forest", "--set", "trees=15"][..]),
        (
            "adaboost",
            &["--method", "adaboost", "--set", "rounds=20"][..],
        ),
        (
            "boosting",
            &["--method", "boosting", "--set", "rounds=20"][..],
        ),
    ] {
        let model = path(&format!("{name}.json"));
        let saved = path(&format!("{name}-predict.csv"));
        // Fitting and scoring in one go: the model in memory predicts the scored rows.
        let mut args = vec!["fit", DEMO, "--outcome", "complication_30d"];
        args.extend_from_slice(method);
        args.extend_from_slice(&[
            "--save-model",
            s(&model),
            "--score",
            DEMO,
            "--json",
            "--predictions",
        ]);
        let fitted: serde_json::Value = serde_json::from_slice(&succeeds(&args).stdout).unwrap();
        let in_memory: Vec<Vec<f64>> =
            serde_json::from_value(fitted["predictions"].clone()).unwrap();
        succeeds(&["predict", s(&model), DEMO, "--output", s(&saved)]);
        let text = std::fs::read_to_string(&saved).unwrap();
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(
            lines[0],
            "predicted_complication_30d,probability_no,probability_yes"
        );
        assert_eq!(lines.len(), 4001, "{name}: one line per record");
        assert_eq!(in_memory.len(), 4000, "{name}");
        for (line, expected) in lines[1..].iter().zip(&in_memory) {
            let cells: Vec<&str> = line.split(',').collect();
            let p: Vec<f64> = cells[1..].iter().map(|c| c.parse().unwrap()).collect();
            // The same numbers to the last bit, whether the model was saved or not.
            assert_eq!(&p, expected, "{name}: {line}");
            assert!((p[0] + p[1] - 1.0).abs() < 1e-12, "{name}: {line}");
            let class = if p[1] > p[0] { "yes" } else { "no" };
            assert_eq!(cells[0], class, "{name}: {line}");
        }
    }
}

#[test]
fn predict_keeps_identifiers_and_scores_incomplete_rows() {
    let model = saved_tree("keep.json", 4);
    // No outcome column; missing values; a ward never seen in training; a quoted id.
    let file = path("new.csv");
    std::fs::write(
        &file,
        "patient_id,age,sex,bmi,smoker,fitness_grade,operation_minutes,blood_loss_ml,\
         haemoglobin_g_dl,creatinine_umol_l,albumin_g_l,ward,admission_date\n\
         \"Q,1\",70,female,,yes,3,,200,11.0,90,35,Elm,2024-05-01\n\
         Q2,,,,,,,,,,,,\n",
    )
    .unwrap();
    let out = succeeds(&["predict", s(&model), s(&file), "--keep", "patient_id"]);
    let text = String::from_utf8(out.stdout).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(lines.len(), 3, "{text}");
    assert!(lines[0].starts_with("patient_id,predicted_complication_30d,"));
    assert!(lines[1].starts_with("\"Q,1\","), "{text}");
    assert!(lines[2].starts_with("Q2,"), "{text}");
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("'ward'") && err.contains("1 row(s)") && err.contains("'Elm'"),
        "{err}"
    );
}

#[test]
fn bad_models_and_tables_are_refused_clearly() {
    let model = saved_tree("bad-inputs.json", 3);
    let text = std::fs::read_to_string(&model).unwrap();
    fails_with(
        &["predict", s(&path("nowhere.json")), DEMO],
        &["cannot read the model file"],
    );
    // A data file given as the model.
    fails_with(&["predict", DEMO, DEMO], &["not valid JSON", "line 1"]);
    let cut = path("cut.json");
    std::fs::write(&cut, &text[..text.len() / 2]).unwrap();
    fails_with(
        &["predict", s(&cut), DEMO],
        &["cut.json", "ends before the model is complete"],
    );
    let newer = path("newer.json");
    std::fs::write(&newer, text.replacen("\"major\": 1", "\"major\": 3", 1)).unwrap();
    fails_with(
        &["predict", s(&newer), DEMO],
        &["format version 3.0", "Update Spinney"],
    );
    let other = path("other.json");
    std::fs::write(&other, "{\"format\": \"spinney-inspect\"}").unwrap();
    fails_with(&["predict", s(&other), DEMO], &["not a Spinney model file"]);
    // The predictor of the first split is surely needed.
    let saved: serde_json::Value = serde_json::from_str(&text).unwrap();
    let first = saved["trees"][0]["feature"][0].as_u64().unwrap() as usize;
    let needed = format!("'{}'", saved["predictors"][first]["name"].as_str().unwrap());
    let lacking = path("lacking.csv");
    std::fs::write(&lacking, "patient_id,height\nP1,170\n").unwrap();
    fails_with(
        &["predict", s(&model), s(&lacking)],
        &["lacking.csv", "the model needs", &needed],
    );
    fails_with(
        &["predict", s(&model), DEMO, "--keep", "nhs_number"],
        &["--keep nhs_number", "no column named 'nhs_number'"],
    );
}

#[test]
fn export_onnx_writes_a_file_and_refuses_bad_models() {
    let model = saved_tree("to-onnx.json", 3);
    let out = path("to-onnx.onnx");
    let said = succeeds(&["export-onnx", s(&model), s(&out)]);
    assert!(String::from_utf8_lossy(&said.stdout).contains("spinney.predictors"));
    // An ONNX model is a protobuf ModelProto: field 1 (ir_version) comes first, as a varint
    // (key byte 0x08), and the operator set names ai.onnx.ml (onnx.proto3; the values
    // themselves are checked with onnxruntime in tests/reference/check_onnx.py).
    let bytes = std::fs::read(&out).unwrap();
    assert_eq!(bytes[0], 0x08);
    assert!(bytes.windows(10).any(|w| w == b"ai.onnx.ml"));
    let cut = path("to-onnx-cut.json");
    let text = std::fs::read_to_string(&model).unwrap();
    std::fs::write(&cut, &text[..text.len() / 3]).unwrap();
    fails_with(
        &["export-onnx", s(&cut), s(&out)],
        &["to-onnx-cut.json", "ends before the model is complete"],
    );
    fails_with(
        &["export-onnx", s(&model), s(&path("no-such-dir/x.onnx"))],
        &["cannot write", "x.onnx"],
    );
}
