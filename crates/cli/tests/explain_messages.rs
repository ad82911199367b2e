//! `spinney explain`: on the demo data, whose generator is known (demo-data/README.md), the
//! true drivers come out on top and the pure-noise columns at the bottom; contributions plus
//! the base value equal the probability `spinney predict` writes (local accuracy, Lundberg et
//! al. 2020); and bad requests are refused with messages that say what is wrong (exit status
//! 1, no panic). Wording is ours; the checks look for the facts each message must carry
//! (common practice, no source).

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

fn path(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("spinney-explain-tests-{}", std::process::id()));
    std::fs::create_dir_all(&d).unwrap();
    d.join(name)
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

/// A model of `method` fitted on the first 3,000 demo rows; the last 1,000 are held out.
fn saved(method: &str, set: &str) -> (PathBuf, PathBuf) {
    // Tests run in parallel: each model has its own files.
    let tag = format!("{method}-{}", set.replace('=', "-"));
    let text = std::fs::read_to_string(DEMO).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    let (train, test) = (
        path(&format!("train-{tag}.csv")),
        path(&format!("test-{tag}.csv")),
    );
    std::fs::write(&train, lines[..3001].join("\n") + "\n").unwrap();
    std::fs::write(
        &test,
        format!("{}\n{}\n", lines[0], lines[3001..].join("\n")),
    )
    .unwrap();
    let model = path(&format!("{tag}.json"));
    succeeds(&[
        "fit",
        s(&train),
        "--outcome",
        "complication_30d",
        "--method",
        method,
        "--set",
        set,
        "--save-model",
        s(&model),
    ]);
    (model, test)
}

fn json(out: &Output) -> serde_json::Value {
    serde_json::from_slice(&out.stdout).unwrap()
}

#[test]
fn the_true_drivers_of_the_demo_data_come_out_on_top() {
    // demo-data/README.md: drivers age, operation_minutes, fitness_grade, smoker (through an
    // interaction), albumin_g_l, ward; pure noise sex and admission_date.
    let (model, test) = saved("boosting", "rounds=150");
    let out = json(&succeeds(&[
        "explain",
        s(&model),
        s(&test),
        "--json",
        "--repeats",
        "3",
        "--contributions",
        "all",
        "--interactions",
        "0",
    ]));
    let entries = out["permutation"]["entries"].as_array().unwrap();
    let score = |name: &str| {
        entries.iter().find(|e| e["predictors"][0] == name).unwrap()["mean"]
            .as_f64()
            .unwrap()
    };
    for driver in ["age", "operation_minutes", "fitness_grade", "albumin_g_l"] {
        for noise in ["sex", "admission_date"] {
            assert!(
                score(driver) > score(noise),
                "{driver} vs {noise}: {entries:?}"
            );
        }
    }
    // The same from the mean |contribution| (log-odds scale for boosting), against sex: the
    // held-out rows are the latest admissions, beyond every training date, so the model's
    // date splits all send them one way and TreeSHAP credits the date with that (it
    // explains the model, which extrapolates there), while shuffling the date changes nothing.
    let names: Vec<String> = out["model"]["predictors"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_str().unwrap().to_string())
        .collect();
    let mean_abs = |name: &str| {
        let j = names.iter().position(|n| n == name).unwrap();
        out["contributions"]["mean_abs"][j][0].as_f64().unwrap()
    };
    for driver in ["age", "operation_minutes", "fitness_grade", "albumin_g_l"] {
        assert!(mean_abs(driver) > 3.0 * mean_abs("sex"), "{driver} vs sex");
    }
    assert!(out["contributions"]["scale"]
        .as_str()
        .unwrap()
        .contains("log-odds"));
    assert!(out["caution"]
        .as_str()
        .unwrap()
        .contains("not a substitute for clinical judgement"));
}

#[test]
fn contributions_add_up_to_the_predicted_probability() {
    let (model, test) = saved("forest", "trees=20");
    let predicted = String::from_utf8(succeeds(&["predict", s(&model), s(&test)]).stdout).unwrap();
    let out = json(&succeeds(&[
        "explain",
        s(&model),
        s(&test),
        "--json",
        "--importance",
        "impurity",
        "--contributions",
        "1-40",
        "--interactions",
        "0",
    ]));
    let c = &out["contributions"];
    assert_eq!(c["outputs"][1], "probability of 'yes'");
    let base = c["base"][1].as_f64().unwrap();
    for (i, line) in predicted.lines().skip(1).take(40).enumerate() {
        let p: f64 = line.split(',').nth(2).unwrap().parse().unwrap();
        let row = &c["rows"][i];
        assert_eq!(row["row"], i + 1);
        let total: f64 = base
            + row["contributions"]
                .as_array()
                .unwrap()
                .iter()
                .map(|v| v[1].as_f64().unwrap())
                .sum::<f64>();
        assert!((total - p).abs() < 1e-9, "row {}: {total} vs {p}", i + 1);
    }
}

#[test]
fn dependence_gives_a_grid_with_counts() {
    let (model, test) = saved("forest", "trees=20");
    let out = json(&succeeds(&[
        "explain",
        s(&model),
        s(&test),
        "--json",
        "--importance",
        "impurity",
        "--dependence",
        "age,ward",
        "--grid",
        "5",
        "--interactions",
        "3",
    ]));
    let d = &out["dependence"];
    let (a, w) = (&d["grids"][0], &d["grids"][1]);
    assert_eq!(a["values"].as_array().unwrap().len(), 5);
    let rows = d["rows"].as_u64().unwrap();
    let counted: u64 = a["counts"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c.as_u64().unwrap())
        .sum();
    assert_eq!(counted + a["missing"].as_u64().unwrap(), rows);
    let cells = 5 * w["values"].as_array().unwrap().len();
    assert_eq!(d["average"].as_array().unwrap().len(), cells * 2);
    assert_eq!(out["interactions"]["pairs"].as_array().unwrap().len(), 3);
}

#[test]
fn bad_requests_are_refused_with_what_to_do() {
    let (model, test) = saved("forest", "trees=5");
    let m = s(&model);
    let t = s(&test);
    fails_with(
        &["explain", m, t, "--dependence", "agee"],
        &["'agee' is not one of the model's predictors", "age, sex"],
    );
    fails_with(
        &["explain", m, t, "--group", "age,nope"],
        &["'nope' is not one of"],
    );
    fails_with(
        &["explain", m, t, "--importance", "gain"],
        &["use permutation or impurity"],
    );
    fails_with(
        &["explain", m, t, "--metric", "rmse"],
        &["rmse is for numbers"],
    );
    fails_with(
        &["explain", m, t, "--contributions", "0"],
        &["row numbers from 1 to 1000"],
    );
    fails_with(
        &["explain", m, t, "--dependence", "age,age"],
        &["two different"],
    );
    // A file lacking a column the model splits on: named, with the columns it has.
    let text = std::fs::read_to_string(&test).unwrap();
    let without: String = text
        .lines()
        .map(|l| {
            let mut f: Vec<&str> = l.split(',').collect();
            f.remove(10); // albumin_g_l
            f.join(",") + "\n"
        })
        .collect();
    let lacking = path("lacking.csv");
    std::fs::write(&lacking, without).unwrap();
    fails_with(
        &["explain", m, s(&lacking)],
        &[
            "does not match the model",
            "'albumin_g_l'",
            "the table lacks",
        ],
    );
    // A grid over a predictor with one value in the rows.
    let constant: String = text
        .lines()
        .enumerate()
        .map(|(i, l)| {
            let mut f: Vec<String> = l.split(',').map(String::from).collect();
            if i > 0 {
                f[1] = "50".into(); // age
            }
            f.join(",") + "\n"
        })
        .collect();
    let flat = path("constant.csv");
    std::fs::write(&flat, constant).unwrap();
    fails_with(
        &[
            "explain",
            m,
            s(&flat),
            "--importance",
            "impurity",
            "--dependence",
            "age",
        ],
        &["'age' has the single value 50", "no range"],
    );
    // Permutation importance without the outcome column: say so, and offer impurity.
    let no_outcome: String = text
        .lines()
        .map(|l| l.rsplit_once(',').unwrap().0.to_string() + "\n")
        .collect();
    let blind = path("no-outcome.csv");
    std::fs::write(&blind, no_outcome).unwrap();
    fails_with(
        &["explain", m, s(&blind)],
        &[
            "needs the outcome",
            "complication_30d",
            "--importance impurity",
        ],
    );
}

#[test]
fn held_out_importance_refits_evaluates_folds_on_any_threads_and_refuses_what_it_cannot() {
    // The training file's 3-fold importance: each fold's figure as the records are equals
    // `spinney evaluate --validate folds:3`'s per-fold AUC (the same refits: the model's
    // settings, seed 1 for the model and the splits), and threads change nothing.
    let (model, test) = saved("boosting", "rounds=30");
    let train = test.with_file_name("train-boosting-rounds-30.csv");
    let run = |threads: &str| {
        json(&succeeds(&[
            "explain",
            s(&model),
            s(&train),
            "--json",
            "--held-out",
            "folds:3",
            "--repeats",
            "2",
            "--interactions",
            "0",
            "--threads",
            threads,
        ]))
    };
    let one = run("1");
    assert_eq!(one["held_out"], run("2")["held_out"]);
    assert_eq!(one["held_out"]["basis"], "on held-out records, 3 folds");
    assert_eq!(
        one["permutation"]["basis"],
        "on training records (apparent)"
    );
    let judged = json(&succeeds(&[
        "evaluate",
        s(&train),
        "--outcome",
        "complication_30d",
        "--method",
        "boosting",
        "--set",
        "rounds=30",
        "--validate",
        "folds:3",
        "--resamples",
        "0",
        "--json",
    ]));
    let folds = judged["folds"].as_array().unwrap();
    let baselines = one["held_out"]["fold_baselines"].as_array().unwrap();
    assert_eq!(folds.len(), 3);
    for (f, b) in folds.iter().zip(baselines) {
        let (a, b) = (f["figures"]["auc"].as_f64().unwrap(), b.as_f64().unwrap());
        assert!((a - b).abs() < 1e-12, "fold AUC {a} vs {b}");
    }
    let m = s(&model);
    fails_with(
        &["explain", m, s(&test), "--held-out", "folds:3"],
        &["--held-out folds:3", "not", "training file"],
    );
    fails_with(
        &["explain", m, s(&train), "--held-out", "bootstrap:20"],
        &["bootstrap", "apparent", "folds:K"],
    );
    fails_with(
        &["explain", m, s(&train), "--held-out", "folds:1"],
        &["--held-out", "at least 2"],
    );
    fails_with(
        &[
            "explain",
            m,
            s(&train),
            "--held-out",
            "folds:3",
            "--importance",
            "impurity",
        ],
        &["permutation", "--importance impurity"],
    );
}
