//! `spinney fit --method boosting`: bad choices refused with messages that say what and where
//! and what to do (exit status 1, no panic), and the JSON report of a boosted model (rounds,
//! loss curves, stopping round, staged predictions). Wording is ours; the checks look for the
//! facts each message must carry (common practice, no source).

use std::path::PathBuf;
use std::process::{Command, Output};

fn spinney(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_spinney"))
        .args(args)
        .output()
        .unwrap()
}

fn write(name: &str, text: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("spinney-boost-tests-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join(name);
    std::fs::write(&path, text).unwrap();
    path
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

/// 60 rows: a class outcome, a count (with one negative in data row 4), a number, a category.
fn table() -> PathBuf {
    let mut text = String::from("y,count,bad_count,x,ward\n");
    for i in 0..60 {
        let bad = if i == 3 { -2 } else { (i % 5) as i64 };
        text += &format!(
            "{},{},{},{},{}\n",
            if (i * 7) % 11 < 5 { "yes" } else { "no" },
            i % 4,
            bad,
            i,
            ["Cedar", "Birch"][i % 2]
        );
    }
    write("boost.csv", &text)
}

#[test]
fn boosting_refuses_bad_choices_clearly() {
    let path = table();
    let f = path.to_str().unwrap();
    let boost = |extra: &[&'static str], outcome: &'static str| -> Vec<String> {
        let mut a = vec!["fit", f, "--outcome", outcome, "--method", "boosting"];
        a.extend_from_slice(extra);
        a.into_iter().map(String::from).collect()
    };
    let run = |args: Vec<String>, needles: &[&str]| {
        let refs: Vec<&str> = args.iter().map(String::as_str).collect();
        fails_with(&refs, needles);
    };
    run(
        boost(
            &["--set", "loss=poisson", "--predictors", "x,ward"],
            "bad_count",
        ),
        &["poisson", "counts", "data row 4", "'bad_count'"],
    );
    run(
        boost(&["--set", "loss=absolute_error"], "y"),
        &["absolute_error", "holds classes", "logistic"],
    );
    run(
        boost(&["--set", "loss=huber"], "y"),
        &["huber", "holds classes"],
    );
    run(
        boost(&["--set", "monotone=ward:up"], "y"),
        &["'ward' is a category", "number predictors"],
    );
    run(
        boost(&["--set", "monotone=nope:up"], "y"),
        &["'nope' is not among the predictors"],
    );
    run(
        boost(&["--set", "monotone=x:sideways"], "y"),
        &["'sideways' is not a direction", "x:up"],
    );
    run(
        boost(&["--set", "patience=5"], "y"),
        &["early stopping", "at least 10", "validation_share"],
    );
    run(
        boost(&["--set", "loss=magic"], "y"),
        &["unknown loss", "logistic", "squared_error"],
    );
    run(
        boost(&["--set", "loss=logistic"], "x"),
        &["for class outcomes", "'x' holds numbers"],
    );
    run(
        boost(&["--set", "criterion=gini"], "y"),
        &["not a setting of gradient boosting"],
    );
    run(
        boost(&["--set", "huber_quantile=0.5"], "x"),
        &["only with loss=huber"],
    );
    run(
        boost(&["--set", "validation_share=1"], "y"),
        &["validation_share", "(0, 1)"],
    );
    fails_with(
        &["fit", f, "--outcome", "y", "--set", "l2=1"],
        &["only for gradient boosting"],
    );
    fails_with(
        &["fit", f, "--outcome", "y", "--staged", "--json"],
        &["--staged", "only for --method boosting"],
    );
}

#[test]
fn a_boosted_model_reports_rounds_curves_and_staged_predictions() {
    let mut text = String::from("y,a,b\n");
    for i in 0..300 {
        let (a, b) = ((i * 37) % 101, (i * 53) % 97);
        text += &format!("{},{a},{b}\n", if a + b > 100 { "high" } else { "low" });
    }
    let path = write("learnable.csv", &text);
    let out = spinney(&[
        "fit",
        path.to_str().unwrap(),
        "--outcome",
        "y",
        "--method",
        "boosting",
        "--set",
        "rounds=30",
        "--set",
        "patience=3",
        "--set",
        "validation_share=0.2",
        "--set",
        "leaf_size=5",
        "--json",
        "--staged",
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["loss"], "logistic");
    let rounds = v["rounds"].as_u64().unwrap() as usize;
    assert!(rounds >= 1);
    assert_eq!(v["held_out_rows"], 60);
    let validation = v["validation_loss_by_round"].as_array().unwrap();
    let fitted = match v["stopping_round"].as_u64() {
        Some(last) => last as usize,
        None => 30,
    };
    assert_eq!(validation.len(), fitted + 1);
    let staged = v["staged_predictions"].as_array().unwrap();
    assert_eq!(staged.len(), rounds);
    assert_eq!(staged[0].as_array().unwrap().len(), 300);
    // Each staged prediction is a pair of class probabilities summing to one.
    let p = staged[rounds - 1][0].as_array().unwrap();
    let sum: f64 = p.iter().map(|x| x.as_f64().unwrap()).sum();
    assert!((sum - 1.0).abs() < 1e-12);
    // The rule a + b > 100 is learnable: the training error falls well below the 50% start.
    let errors = v["training_error_by_size"].as_array().unwrap();
    assert!(errors[rounds - 1].as_f64().unwrap() < 0.1, "{errors:?}");
}
