//! `spinney fit` refuses what cannot make a model, with a message that says what to change,
//! and never panics (exit status 1, "error: ..." on stderr). Wording is ours; the checks look
//! for the facts each message must carry (common practice, no source).

use std::path::PathBuf;
use std::process::Command;

fn spinney() -> Command {
    Command::new(env!("CARGO_BIN_EXE_spinney"))
}

fn write(name: &str, text: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("spinney-fit-tests-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join(name);
    std::fs::write(&path, text).unwrap();
    path
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
fn bad_designs_and_settings_are_refused_clearly() {
    let one_class = write("one_class.csv", "y,a\nyes,1\nyes,2\nyes,3\n");
    let f = one_class.to_str().unwrap();
    fails_with(&["fit", f, "--outcome", "y"], &["only one class", "'y'"]);
    let ok = write(
        "ok.csv",
        "y,a,b,w\nyes,1,5,1\nno,2,6,1\nyes,3,7,-2\nno,4,8,1\n",
    );
    let f = ok.to_str().unwrap();
    fails_with(
        &["fit", f, "--outcome", "nope"],
        &["no column named 'nope'"],
    );
    fails_with(
        &["fit", f, "--outcome", "y", "--set", "depth=0"],
        &["depth", "1 to 1000"],
    );
    fails_with(
        &["fit", f, "--outcome", "y", "--set", "colour=blue"],
        &["unknown setting"],
    );
    fails_with(
        &["fit", f, "--outcome", "y", "--method", "magic"],
        &["choose tree, bagging, forest, adaboost or boosting"],
    );
    fails_with(
        &["fit", f, "--outcome", "y", "--weight", "w"],
        &["negative", "data row 3"],
    );
    fails_with(
        &["fit", f, "--outcome", "a", "--method", "adaboost"],
        &["predicts classes"],
    );
    fails_with(
        &["fit", f, "--outcome", "y", "--set", "row_fraction=1.5"],
        &["row_fraction", "(0, 1]"],
    );
    let ragged = write("ragged.csv", "y,a\nyes,1\nno\n");
    fails_with(
        &["fit", ragged.to_str().unwrap(), "--outcome", "y"],
        &["line 3"],
    );
}

#[test]
fn a_forest_reports_its_out_of_bag_error() {
    let mut text = String::from("y,a,b\n");
    for i in 0..200 {
        text += &format!(
            "{},{},{}\n",
            if i % 3 == 0 { "yes" } else { "no" },
            i % 3,
            (i * 7) % 11
        );
    }
    let path = write("forest.csv", &text);
    let out = spinney()
        .args([
            "fit",
            path.to_str().unwrap(),
            "--outcome",
            "y",
            "--method",
            "forest",
            "--set",
            "trees=20",
            "--json",
        ])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["trees"], 20);
    assert_eq!(v["out_of_bag_error_by_trees"].as_array().unwrap().len(), 20);
    // The outcome is a function of a: the forest must find it out of bag.
    assert_eq!(v["out_of_bag_error_by_trees"][19].as_f64().unwrap(), 0.0);
}
