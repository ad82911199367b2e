#!/usr/bin/env python3
"""spinney-core's metrics and baseline models against scikit-learn (PyPI), on data shipped
inside scikit-learn: breast cancer (2 classes), wine (3 classes), diabetes (regression).

Runs the Rust helper crates/core/examples/metrics_check.rs (path in SPINNEY_METRICS_BIN,
default target/debug/examples/metrics_check; build it with
`cargo build -p spinney-core --example metrics_check`) on JSON tasks and compares:
roc_auc_score, average_precision_score, log_loss, brier_score_loss, confusion_matrix,
roc_curve (drop_intermediate=False); the calibration slope and its intercept against
LogisticRegression(penalty=None, newton-cg, tol 1e-12) on logit(p) and
calibration-in-the-large against scipy's brentq root of the offset model's score equation
sum w (y - expit(a + logit p)) = 0, both to 1e-6, logits of p clipped to [1e-10, 1 - 1e-10]
as crates/core/src/metrics/binary.rs does; accuracy / balanced accuracy / one-vs-rest macro AUC
(multi-class), r2_score, mean_absolute_error, root_mean_squared_error to 1e-9; and the
baseline coefficients against LogisticRegression(C, solver newton-cg, tol 1e-12) and
Ridge(alpha) on the same prepared columns (standardised with StandardScaler, i.e. the
population sd; for the case with missing values and categories the preparation rule of
crates/core/src/baseline.rs is written out again here in numpy) to 1e-6. Multinomial
intercepts are compared centred (they are fixed only up to a common shift).
Prints "PASS"/"FAIL" lines and "N passed, N failed".
"""
import json
import os
import subprocess
import sys
import tempfile
import warnings

import numpy as np
import sklearn
from scipy.optimize import brentq
from scipy.special import expit
from sklearn.datasets import load_breast_cancer, load_diabetes, load_wine
from sklearn.linear_model import LogisticRegression, Ridge
from sklearn.metrics import (accuracy_score, average_precision_score, balanced_accuracy_score,
                             brier_score_loss, confusion_matrix, log_loss, mean_absolute_error,
                             r2_score, roc_auc_score, roc_curve, root_mean_squared_error)
from sklearn.model_selection import cross_val_predict
from sklearn.preprocessing import StandardScaler

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..")
BIN = os.environ.get("SPINNEY_METRICS_BIN", os.path.join(ROOT, "target", "debug", "examples", "metrics_check"))
METRIC_TOL = 1e-9
COEF_TOL = 1e-6

passed = failed = 0


def check(name, ok, detail=""):
    global passed, failed
    if ok:
        passed += 1
        print("PASS %s%s" % (name, (": " + detail) if detail else ""))
    else:
        failed += 1
        print("FAIL %s%s" % (name, (": " + detail) if detail else ""))


def compare(name, ours, ref, tol):
    ours = np.asarray(ours, dtype=float)
    ref = np.asarray(ref, dtype=float)
    if ours.shape != ref.shape:
        check(name, False, "shape %s vs scikit-learn %s" % (ours.shape, ref.shape))
        return
    diff = float(np.max(np.abs(ours - ref))) if ours.size else 0.0
    check(name, diff <= tol, "largest difference %.2e (tolerance %.0e)" % (diff, tol))


def as_list(a):
    return [None if (isinstance(v, float) and np.isnan(v)) else v for v in np.asarray(a, dtype=float).tolist()]


def logistic_reference(X, y, C, w=None):
    model = LogisticRegression(C=C, solver="newton-cg", tol=1e-12, max_iter=10000)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        model.fit(X, y, sample_weight=w)
    coef, icpt = model.coef_, model.intercept_.copy()
    if coef.shape[0] > 1:
        icpt -= icpt.mean()
    return coef, icpt


def prepare(numbers, categories):
    """The documented preparation of baseline.rs, written out again: median fill, population
    standardisation, a missing column after each number column with missing values; one 0/1
    column per level, most frequent level (lowest code on ties) for missing, then a missing
    column."""
    cols = []
    for v in numbers:
        v = np.asarray(v, dtype=float)
        miss = np.isnan(v)
        filled = np.where(miss, np.median(v[~miss]), v)
        sd = filled.std()
        cols.append((filled - filled.mean()) / (sd if sd > 0 else 1.0))
        if miss.any():
            cols.append(miss.astype(float))
    for codes, levels in categories:
        codes = np.asarray(codes, dtype=float)
        miss = np.isnan(codes)
        counts = np.bincount(codes[~miss].astype(int), minlength=levels)
        fill = int(np.argmax(counts))
        filled = np.where(miss, fill, codes).astype(int)
        for level in range(levels):
            cols.append((filled == level).astype(float))
        if miss.any():
            cols.append(miss.astype(float))
    return np.column_stack(cols)


def main():
    print("reference: scikit-learn %s, numpy %s" % (sklearn.__version__, np.__version__))
    if not os.path.exists(BIN):
        print("FAIL the helper %s is missing: cargo build -p spinney-core --example metrics_check" % BIN)
        print("0 passed, 1 failed")
        return 1
    rng = np.random.default_rng(2026)
    cancer, wine, diabetes = load_breast_cancer(), load_wine(), load_diabetes()
    Xc = StandardScaler().fit_transform(cancer.data)
    yc = cancer.target
    # Out-of-fold probabilities of a weak model (3 predictors) so the figures are not trivial.
    pc = cross_val_predict(LogisticRegression(C=0.05), Xc[:, [0, 1, 4]], yc, cv=5, method="predict_proba")[:, 1]
    pc_ties = np.round(pc, 2)  # many ties
    wc = rng.integers(0, 4, size=len(yc)).astype(float)
    Xw = StandardScaler().fit_transform(wine.data)
    pw = cross_val_predict(LogisticRegression(C=0.02), Xw[:, [0, 3, 5]], wine.target, cv=5, method="predict_proba")
    Xd, yd = diabetes.data, diabetes.target
    fd = cross_val_predict(Ridge(alpha=1.0), Xd, yd, cv=5)

    # Missing values and a category, for the preparation rule.
    num_missing = cancer.data[:, [0, 1, 2]].copy()
    num_missing[rng.random(num_missing.shape) < 0.1] = np.nan
    category = (cancer.data[:, 3] > np.median(cancer.data[:, 3])).astype(float) + (cancer.data[:, 4] > 0.1)
    category[rng.random(len(category)) < 0.08] = np.nan
    cat_levels = 3

    binary_cases = [("breast cancer", yc, pc, None), ("breast cancer, tied scores", yc, pc_ties, None),
                    ("breast cancer, weighted", yc, pc_ties, wc)]
    tasks = []
    for _, y, p, w in binary_cases:
        tasks.append({"task": "binary", "y": y.tolist(), "p": p.tolist(), "w": None if w is None else w.tolist(),
                      "threshold": 0.5})
    tasks.append({"task": "multiclass", "y": wine.target.tolist(), "p": pw.ravel().tolist(), "classes": 3})
    tasks.append({"task": "regression", "y": yd.tolist(), "pred": fd.tolist()})
    wd = rng.integers(1, 4, size=len(yd)).astype(float)
    tasks.append({"task": "regression", "y": yd.tolist(), "pred": fd.tolist(), "w": wd.tolist()})
    logistic_cases = [("breast cancer, C=1", cancer.data, yc, 2, 1.0, None),
                      ("breast cancer, C=0.1, weighted", cancer.data, yc, 2, 0.1, wc + 1.0),
                      ("wine (multinomial), C=1", wine.data, wine.target, 3, 1.0, None),
                      ("wine (multinomial), C=0.05", wine.data, wine.target, 3, 0.05, None)]
    for _, X, y, k, C, w in logistic_cases:
        tasks.append({"task": "logistic", "columns": [{"numbers": X[:, j].tolist()} for j in range(X.shape[1])],
                      "y": y.tolist(), "classes": k, "c": C, "w": None if w is None else w.tolist()})
    mixed_columns = [{"numbers": as_list(num_missing[:, j])} for j in range(3)] + \
                    [{"codes": as_list(category), "levels": cat_levels}]
    tasks.append({"task": "logistic", "columns": mixed_columns, "y": yc.tolist(), "classes": 2, "c": 0.5})
    ridge_cases = [("diabetes, alpha=1", 1.0, None), ("diabetes, alpha=10, weighted", 10.0, wd)]
    for _, a, w in ridge_cases:
        tasks.append({"task": "ridge", "columns": [{"numbers": Xd[:, j].tolist()} for j in range(Xd.shape[1])],
                      "y": yd.tolist(), "alpha": a, "w": None if w is None else w.tolist()})
    tasks.append({"task": "ridge", "columns": mixed_columns, "y": cancer.data[:, 5].tolist(), "alpha": 2.0})

    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "tasks.json")
        with open(path, "w") as f:
            json.dump(tasks, f)
        out = subprocess.run([BIN, path], capture_output=True, text=True, timeout=600)
    if out.returncode != 0:
        print("FAIL the helper failed: %s" % out.stderr.strip()[-2000:])
        print("%d passed, %d failed" % (passed, failed + 1))
        return 1
    results = iter(json.loads(out.stdout))

    for name, y, p, w in binary_cases:
        r = next(results)
        if "error" in r:
            check(name, False, r["error"])
            continue
        compare("%s: AUC vs roc_auc_score" % name, r["auc"], roc_auc_score(y, p, sample_weight=w), METRIC_TOL)
        compare("%s: average precision vs average_precision_score" % name, r["average_precision"],
                average_precision_score(y, p, sample_weight=w), METRIC_TOL)
        logit = np.log(np.clip(p, 1e-10, 1 - 1e-10) / (1 - np.clip(p, 1e-10, 1 - 1e-10)))
        recal = LogisticRegression(penalty=None, solver="newton-cg", tol=1e-12, max_iter=1000).fit(
            logit.reshape(-1, 1), y, sample_weight=w)
        compare("%s: calibration slope vs LogisticRegression on logit(p)" % name, r["calibration_slope"],
                recal.coef_[0][0], 1e-6)
        compare("%s: calibration slope's intercept vs LogisticRegression" % name,
                r["calibration_slope_intercept"], recal.intercept_[0], 1e-6)
        ww = np.ones(len(y)) if w is None else w
        score = lambda a: float(np.sum(ww * (y - expit(a + logit))))  # noqa: E731
        compare("%s: calibration-in-the-large vs brentq on the offset model" % name,
                r["calibration_in_the_large"], brentq(score, -20, 20, xtol=1e-14), 1e-6)
        compare("%s: log loss vs log_loss" % name, r["log_loss"], log_loss(y, p, sample_weight=w), METRIC_TOL)
        compare("%s: Brier vs brier_score_loss" % name, r["brier"], brier_score_loss(y, p, sample_weight=w), METRIC_TOL)
        compare("%s: confusion at p >= 0.5 vs confusion_matrix" % name, r["confusion"],
                confusion_matrix(y, (p >= 0.5).astype(int), sample_weight=w), METRIC_TOL)
        fpr, tpr, _ = roc_curve(y, p, sample_weight=w, drop_intermediate=False)
        compare("%s: ROC points vs roc_curve" % name, [r["roc_fpr"], r["roc_tpr"]], [fpr, tpr], METRIC_TOL)

    r = next(results)
    name = "wine (3 classes)"
    if "error" in r:
        check(name, False, r["error"])
    else:
        pred = pw.argmax(axis=1)
        compare("%s: accuracy vs accuracy_score" % name, r["accuracy"], accuracy_score(wine.target, pred), METRIC_TOL)
        compare("%s: balanced accuracy vs balanced_accuracy_score" % name, r["balanced_accuracy"],
                balanced_accuracy_score(wine.target, pred), METRIC_TOL)
        compare("%s: log loss vs log_loss" % name, r["log_loss"], log_loss(wine.target, pw), METRIC_TOL)
        compare("%s: one-vs-rest macro AUC vs roc_auc_score(multi_class='ovr')" % name, r["ovr_macro_auc"],
                roc_auc_score(wine.target, pw, multi_class="ovr", average="macro"), METRIC_TOL)
        compare("%s: confusion matrix vs confusion_matrix" % name, r["confusion"],
                confusion_matrix(wine.target, pred), METRIC_TOL)

    for name, w in [("diabetes", None), ("diabetes, weighted", wd)]:
        r = next(results)
        if "error" in r:
            check(name, False, r["error"])
            continue
        compare("%s: R² vs r2_score" % name, r["r2"], r2_score(yd, fd, sample_weight=w), METRIC_TOL)
        compare("%s: MAE vs mean_absolute_error" % name, r["mae"], mean_absolute_error(yd, fd, sample_weight=w), METRIC_TOL)
        compare("%s: RMSE vs root_mean_squared_error" % name, r["rmse"],
                root_mean_squared_error(yd, fd, sample_weight=w), METRIC_TOL)

    for name, X, y, k, C, w in logistic_cases:
        r = next(results)
        if "error" in r:
            check(name, False, r["error"])
            continue
        coef, icpt = logistic_reference(StandardScaler().fit_transform(X), y, C, w)
        compare("logistic %s: coefficients vs LogisticRegression" % name, r["coefficients"], coef, COEF_TOL)
        compare("logistic %s: intercepts vs LogisticRegression" % name, r["intercepts"], icpt, COEF_TOL)

    r = next(results)
    name = "breast cancer with 10% missing and a 3-level category, C=0.5"
    Xm = prepare([num_missing[:, j] for j in range(3)], [(category, cat_levels)])
    if "error" in r:
        check(name, False, r["error"])
    else:
        check("logistic %s: %d prepared columns" % (name, Xm.shape[1]), len(r["features"]) == Xm.shape[1],
              ", ".join(r["features"]))
        coef, icpt = logistic_reference(Xm, yc, 0.5)
        compare("logistic %s: coefficients vs LogisticRegression" % name, r["coefficients"], coef, COEF_TOL)
        compare("logistic %s: intercept vs LogisticRegression" % name, r["intercepts"], icpt, COEF_TOL)

    for name, a, w in ridge_cases:
        r = next(results)
        if "error" in r:
            check(name, False, r["error"])
            continue
        ref = Ridge(alpha=a).fit(StandardScaler().fit_transform(Xd), yd, sample_weight=w)
        compare("ridge %s: coefficients vs Ridge" % name, r["coefficients"], ref.coef_, COEF_TOL)
        compare("ridge %s: intercept vs Ridge" % name, r["intercept"], ref.intercept_, COEF_TOL)
    r = next(results)
    name = "breast cancer column 6 on the missing/category columns, alpha=2"
    if "error" in r:
        check(name, False, r["error"])
    else:
        ref = Ridge(alpha=2.0).fit(Xm, cancer.data[:, 5])
        compare("ridge %s: coefficients vs Ridge" % name, r["coefficients"], ref.coef_, COEF_TOL)
        compare("ridge %s: intercept vs Ridge" % name, r["intercept"], ref.intercept_, COEF_TOL)

    print("%d passed, %d failed" % (passed, failed))
    return 0 if failed == 0 else 1


if __name__ == "__main__":
    sys.exit(main())
