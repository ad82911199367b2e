//! `spinney evaluate`: folds on one thread and on several give the same report; the
//! out-of-sample predictions file holds every row once with its fold; bad validation
//! requests are refused with a message saying what to change, never a panic. Wording is
//! ours; the checks look for the facts each message must carry (common practice, no source).

use std::path::PathBuf;
use std::process::Command;

fn spinney() -> Command {
    Command::new(env!("CARGO_BIN_EXE_spinney"))
}

fn demo() -> &'static str {
    concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../../demo-data/surgery-complications.csv"
    )
}

fn write(name: &str, text: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("spinney-evaluate-tests-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join(name);
    std::fs::write(&path, text).unwrap();
    path
}

fn evaluate_json(extra: &[&str]) -> serde_json::Value {
    evaluate_json_on("age,bmi,fitness_grade,albumin_g_l,ward", extra)
}

fn evaluate_json_on(predictors: &str, extra: &[&str]) -> serde_json::Value {
    let mut args = vec![
        "evaluate",
        demo(),
        "--outcome",
        "complication_30d",
        "--predictors",
        predictors,
        "--method",
        "forest",
        "--set",
        "trees=15",
        "--resamples",
        "50",
        "--json",
    ];
    args.extend_from_slice(extra);
    let out = spinney().args(&args).output().unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let mut v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    v["seconds"] = serde_json::Value::Null;
    v
}

#[test]
fn folds_on_one_thread_and_on_three_give_the_same_report() {
    let one = evaluate_json(&["--validate", "folds:4", "--baseline", "--threads", "1"]);
    let three = evaluate_json(&["--validate", "folds:4", "--baseline", "--threads", "3"]);
    assert_eq!(one, three);
    assert_eq!(one["folds"].as_array().unwrap().len(), 4);
    let auc = &one["metrics"]["auc"];
    assert!(auc["low"].as_f64() < auc["value"].as_f64());
    assert!(one["baseline"]["metrics"]["auc"]["value"].is_number());
    assert_eq!(
        one["curves"]["error_by_size"]["out_of_sample"]
            .as_array()
            .unwrap()
            .len(),
        15
    );
    assert!(one["caution"]
        .as_str()
        .unwrap()
        .contains("external validation"));
}

#[test]
fn calling_the_other_class_positive_mirrors_the_figures() {
    // AUC is the chance a random event scores above a random non-event, so swapping which
    // class is the event and using 1 - p keeps it (Hanley & McNeil 1982); the Brier score
    // of 1 - p against the swapped outcome is the same sum of squares (Brier 1950). With
    // number predictors only, the forest's splits mirror exactly and so do its out-of-bag
    // predictions. (A category's levels are ordered by their event share, where ties may
    // fall the other way once the event is swapped, so categories are left out here.)
    let run = |positive: &str| {
        evaluate_json_on(
            "age,bmi,fitness_grade",
            &["--validate", "oob", "--positive", positive],
        )
    };
    let (yes, no) = (run("yes"), run("no"));
    for name in ["auc", "brier"] {
        let (a, b) = (
            yes["metrics"][name]["value"].as_f64().unwrap(),
            no["metrics"][name]["value"].as_f64().unwrap(),
        );
        assert!(
            (a - b).abs() < 1e-9,
            "{name}: {a} with 'yes', {b} with 'no'"
        );
    }
    fails_with(
        &[
            "evaluate",
            demo(),
            "--outcome",
            "complication_30d",
            "--validate",
            "folds:4",
            "--positive",
            "maybe",
        ],
        &["'maybe'", "no, yes"],
    );
}

#[test]
fn the_predictions_file_holds_every_row_once_with_its_fold() {
    let path = write("predictions.csv", "");
    let v = evaluate_json(&[
        "--validate",
        "folds:5",
        "--predictions-out",
        path.to_str().unwrap(),
    ]);
    let text = std::fs::read_to_string(&path).unwrap();
    let mut lines = text.lines();
    assert_eq!(
        lines.next().unwrap(),
        "row,fold,complication_30d,probability no,probability yes"
    );
    let rows: Vec<Vec<&str>> = lines.map(|l| l.split(',').collect()).collect();
    assert_eq!(rows.len() as u64, v["rows"].as_u64().unwrap());
    let mut folds: Vec<&str> = rows.iter().map(|r| r[1]).collect();
    folds.sort_unstable();
    folds.dedup();
    assert_eq!(folds, ["1", "2", "3", "4", "5"]);
    for r in &rows {
        let p: f64 = r[3].parse::<f64>().unwrap() + r[4].parse::<f64>().unwrap();
        assert!((p - 1.0).abs() < 1e-9, "{r:?}");
    }
}

fn fails_with(args: &[&str], needles: &[&str]) {
    let out = spinney().args(args).output().unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(1), "{args:?}: {err}");
    assert!(!err.contains("panicked"), "{args:?}: {err}");
    for n in needles {
        assert!(err.contains(n), "{args:?}: message lacks {n:?}: {err}");
    }
}

#[test]
fn bad_validation_requests_are_refused_clearly() {
    // 3 events in 40 rows; a patient column with one value.
    let mut text = String::from("y,a,b,patient,site\n");
    for i in 0..40 {
        let y = if i % 13 == 0 { "yes" } else { "no" };
        text += &format!("{y},{i},{},P1,S{}\n", i % 7, i % 3);
    }
    let file = write("few_events.csv", &text);
    let f = file.to_str().unwrap();
    let base = ["evaluate", f, "--outcome", "y", "--predictors", "a,b"];
    let with = |extra: &[&'static str]| -> Vec<&str> {
        base.iter().copied().chain(extra.iter().copied()).collect()
    };
    fails_with(
        &with(&["--validate", "folds:5"]),
        &["class 'yes' has 4 row(s)", "fewer than 5 folds", "folds:4"],
    );
    fails_with(&with(&["--validate", "folds:50"]), &["40 rows", "50 folds"]);
    fails_with(
        &with(&["--validate", "holdout:1.5"]),
        &["--validate", "outside (0, 1)"],
    );
    fails_with(
        &with(&["--threshold", "1.2"]),
        &["--threshold", "outside (0, 1)"],
    );
    fails_with(
        &with(&["--validate", "groups:3:patient"]),
        &["'patient'", "single group"],
    );
    fails_with(
        &with(&["--validate", "groups:5:site"]),
        &["3 groups", "groups:3:site"],
    );
    fails_with(
        &with(&["--validate", "oob", "--method", "tree"]),
        &["oob", "folds:10"],
    );
    fails_with(&with(&["--validate", "jackknife"]), &["not a scheme"]);
    fails_with(
        &with(&["--validate", "groups:5"]),
        &["--validate: ", "no group column", "groups:K:COLUMN"],
    );
}

#[test]
fn tune_keeps_the_table_and_nesting_gives_each_outer_choice() {
    let run = |threads: &str| {
        let out = spinney()
            .args([
                "tune",
                demo(),
                "--outcome",
                "complication_30d",
                "--method",
                "tree",
                "--try",
                "depth=1,4",
                "--try",
                "leaf_size=1,30",
                "--validate",
                "folds:3",
                "--nested",
                "3",
                "--threads",
                threads,
                "--json",
            ])
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        let mut v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
        v["seconds"] = serde_json::Value::Null;
        v
    };
    let v = run("1");
    assert_eq!(v["table"].as_array().unwrap().len(), 4);
    assert_eq!(v["metric"], "auc");
    assert_eq!(v["nested"].as_array().unwrap().len(), 3);
    assert!(v["nested_score"].as_f64().unwrap() > 0.6);
    assert_eq!(v, run("2"));
    fails_with(
        &[
            "tune",
            demo(),
            "--outcome",
            "complication_30d",
            "--try",
            "depth",
        ],
        &["--try", "NAME=V1,V2"],
    );
}
