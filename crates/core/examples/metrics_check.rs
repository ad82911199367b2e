//! Test helper for tests/reference/check_metrics.py (not a user command): reads a JSON list
//! of tasks (file named by the first argument), runs spinney-core's metrics and baseline
//! models on each, and prints a JSON list of results for the script to compare with
//! scikit-learn. In JSON, null stands for a missing value (NaN, or a missing category).
//!
//! Tasks: {"task": "binary", "y", "p", "w"?, "threshold"}, {"task": "multiclass", "y",
//! "p" (flat, row-major), "classes"}, {"task": "regression", "y", "pred", "w"?},
//! {"task": "logistic", "columns", "y", "classes", "c", "w"?}, {"task": "ridge", "columns",
//! "y", "alpha", "w"?}; a column is {"numbers": [...]} or {"codes": [...], "levels": k}.

use serde_json::{json, Value};
use spinney_core::baseline::{fit_logistic, fit_ridge, Column, ColumnValues};
use spinney_core::data::MISSING_CODE;
use spinney_core::metrics::{binary, curves, multiclass, regression};

fn numbers(v: &Value) -> Vec<f64> {
    v.as_array()
        .expect("an array")
        .iter()
        .map(|x| x.as_f64().unwrap_or(f64::NAN))
        .collect()
}

fn codes(v: &Value) -> Vec<u32> {
    v.as_array()
        .expect("an array")
        .iter()
        .map(|x| x.as_f64().map_or(MISSING_CODE, |c| c as u32))
        .collect()
}

fn weights(task: &Value) -> Option<Vec<f64>> {
    task.get("w").filter(|w| !w.is_null()).map(numbers)
}

fn run(task: &Value) -> Result<Value, String> {
    let e = |e: spinney_core::Error| e.to_string();
    let w = weights(task);
    let w = w.as_deref();
    match task["task"].as_str().unwrap_or("") {
        "binary" => {
            let y = codes(&task["y"]);
            let p = numbers(&task["p"]);
            let t = task["threshold"].as_f64().unwrap_or(0.5);
            let c = binary::confusion(&y, &p, t, w).map_err(e)?;
            let roc = curves::roc_points(&y, &p, w).map_err(e)?;
            let delong = binary::auc(&y, &p).map_err(e)?;
            let k = binary::calibration(&y, &p, w).map_err(e)?;
            Ok(json!({
                "auc": binary::auc_weighted(&y, &p, w).map_err(e)?,
                "auc_unweighted": delong.value,
                "average_precision": binary::average_precision(&y, &p, w).map_err(e)?,
                "log_loss": binary::log_loss(&y, &p, w).map_err(e)?,
                "brier": binary::brier(&y, &p, w).map_err(e)?.score,
                "confusion": [[c.true_negatives, c.false_positives], [c.false_negatives, c.true_positives]],
                "roc_fpr": roc.iter().map(|r| r.false_positive_rate).collect::<Vec<_>>(),
                "roc_tpr": roc.iter().map(|r| r.true_positive_rate).collect::<Vec<_>>(),
                "calibration_in_the_large": k.in_the_large,
                "calibration_slope": k.slope,
                "calibration_slope_intercept": k.slope_intercept,
            }))
        }
        "multiclass" => {
            let y = codes(&task["y"]);
            let p = numbers(&task["p"]);
            let k = task["classes"].as_u64().unwrap_or(0) as usize;
            let m = multiclass::confusion_matrix(&y, &p, k, w).map_err(e)?;
            Ok(json!({
                "accuracy": multiclass::accuracy(&y, &p, k, w).map_err(e)?,
                "balanced_accuracy": multiclass::balanced_accuracy(&y, &p, k, w).map_err(e)?,
                "log_loss": multiclass::log_loss(&y, &p, k, w).map_err(e)?,
                "ovr_macro_auc": multiclass::one_vs_rest_auc(&y, &p, k, w).map_err(e)?.macro_mean,
                "confusion": m.chunks(k).map(|r| r.to_vec()).collect::<Vec<_>>(),
            }))
        }
        "regression" => {
            let y = numbers(&task["y"]);
            let f = numbers(&task["pred"]);
            let s = regression::fit(&y, &f, w).map_err(e)?;
            Ok(json!({"rmse": s.rmse, "mae": s.mae, "r2": s.r_squared}))
        }
        kind @ ("logistic" | "ridge") => {
            let specs = task["columns"].as_array().ok_or("columns")?;
            let mut nums = Vec::new();
            let mut cats = Vec::new();
            for s in specs {
                if s.get("numbers").is_some() {
                    nums.push(numbers(&s["numbers"]));
                    cats.push(None);
                } else {
                    let levels = s["levels"].as_u64().unwrap_or(0) as usize;
                    let labels: Vec<String> = (0..levels).map(|l| format!("L{l}")).collect();
                    nums.push(Vec::new());
                    cats.push(Some((codes(&s["codes"]), labels)));
                }
            }
            let names: Vec<String> = (0..specs.len()).map(|j| format!("x{j}")).collect();
            let cols: Vec<Column> = (0..specs.len())
                .map(|j| Column {
                    name: &names[j],
                    values: match &cats[j] {
                        None => ColumnValues::Numbers(&nums[j]),
                        Some((c, l)) => ColumnValues::Categories {
                            codes: c,
                            labels: l,
                        },
                    },
                })
                .collect();
            if kind == "logistic" {
                let y = codes(&task["y"]);
                let k = task["classes"].as_u64().unwrap_or(0) as usize;
                let m =
                    fit_logistic(&cols, &y, k, w, task["c"].as_f64().unwrap_or(1.0)).map_err(e)?;
                Ok(
                    json!({"coefficients": m.coefficients, "intercepts": m.intercepts,
                          "features": m.preparation.features, "steps": m.steps}),
                )
            } else {
                let y = numbers(&task["y"]);
                let m =
                    fit_ridge(&cols, &y, w, task["alpha"].as_f64().unwrap_or(1.0)).map_err(e)?;
                Ok(
                    json!({"coefficients": m.coefficients, "intercept": m.intercept,
                          "features": m.preparation.features}),
                )
            }
        }
        other => Err(format!("unknown task '{other}'")),
    }
}

fn main() {
    let path = std::env::args()
        .nth(1)
        .expect("usage: metrics_check TASKS.json");
    let text = std::fs::read_to_string(&path).expect("readable task file");
    let tasks: Vec<Value> = serde_json::from_str(&text).expect("a JSON list of tasks");
    let out: Vec<Value> = tasks
        .iter()
        .map(|t| run(t).unwrap_or_else(|msg| json!({ "error": msg })))
        .collect();
    println!("{}", serde_json::to_string(&out).expect("JSON"));
}
