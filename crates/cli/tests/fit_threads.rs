//! Invariant 2 (ARCHITECTURE.md) through the command line: a forest fitted on one thread and
//! on several is the same model, bit for bit (each tree draws from its own seeded streams).

use std::process::Command;

fn fit_json(threads: &str) -> serde_json::Value {
    let demo = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../../demo-data/surgery-complications.csv"
    );
    let out = Command::new(env!("CARGO_BIN_EXE_spinney"))
        .args([
            "fit",
            demo,
            "--outcome",
            "complication_30d",
            "--method",
            "forest",
            "--set",
            "trees=24",
            "--set",
            "seed=5",
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
    v["fit_seconds"] = serde_json::Value::Null;
    v
}

#[test]
fn one_thread_and_three_threads_give_the_same_forest() {
    let one = fit_json("1");
    let three = fit_json("3");
    assert_eq!(
        one["out_of_bag_error_by_trees"],
        three["out_of_bag_error_by_trees"]
    );
    assert_eq!(one, three);
}
