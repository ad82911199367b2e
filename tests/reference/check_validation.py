#!/usr/bin/env python3
"""`spinney evaluate` against outside references.

1. Fold membership, read from Spinney's own per-row fold output (--predictions-out):
   - stratified k-fold keeps the guarantee of scikit-learn's StratifiedKFold: every fold holds
     floor(n_c/k) or ceil(n_c/k) rows of each class c (within one row of the ideal), and each
     row is in exactly one fold; the per-fold class counts are compared with StratifiedKFold's.
   - grouped folds keep the guarantee of StratifiedGroupKFold: no group is split across folds;
     and the spread of the event share over the folds is no worse than StratifiedGroupKFold's
     on the same groups plus 2 percentage points (common practice, no source for the margin).
2. The metrics `evaluate` reports equal scikit-learn's on the same out-of-sample predictions
   (written with --predictions-out): roc_auc_score, average_precision_score, log_loss,
   brier_score_loss, confusion_matrix (two classes, threshold 0.5), accuracy and log_loss
   for several classes (iris), r2_score for a number (diabetes). Tolerance 1e-9.
3. Breast cancer (Wisconsin diagnostic, shipped in scikit-learn): the 10-fold cross-validated
   error of a random forest lies in the band of Breiman (2001), Machine Learning 45:5-32,
   Table 2 (breast cancer, Forest-RI about 3% error; band from memory, taken as 2% to 6%;
   Breiman used the original 699-row Wisconsin data, not this 569-row diagnostic set).

Prints "PASS"/"FAIL" lines and "N passed, N failed".
"""
import csv
import json
import os
import subprocess
import sys
import tempfile

import numpy as np
import sklearn
from sklearn.datasets import load_breast_cancer, load_diabetes, load_iris
from sklearn.metrics import (average_precision_score, brier_score_loss, confusion_matrix,
                             log_loss, r2_score, roc_auc_score, accuracy_score)
from sklearn.model_selection import StratifiedGroupKFold, StratifiedKFold

BIN = os.environ.get("SPINNEY_BIN", os.path.join(os.path.dirname(__file__), "..", "..", "target", "debug", "spinney"))
TOL = 1e-9

results = []


def check(name, ok, detail):
    results.append(ok)
    print("%s %s: %s" % ("PASS" if ok else "FAIL", name, detail))


def write(path, X, y, extra=None, labels=None):
    names = ["x%d" % j for j in range(X.shape[1])]
    with open(path, "w") as f:
        head = names + ["outcome"] + (list(extra.keys()) if extra else [])
        f.write(",".join(head) + "\n")
        for i, (row, t) in enumerate(zip(X, y)):
            cells = [repr(float(v)) for v in row]
            cells.append(labels[t] if labels is not None else repr(float(t)))
            if extra:
                cells += [str(v[i]) for v in extra.values()]
            f.write(",".join(cells) + "\n")


def evaluate(path, scheme, tmp, extra=()):
    out_csv = os.path.join(tmp, "pred.csv")
    args = [BIN, "evaluate", path, "--outcome", "outcome", "--validate", scheme, "--json",
            "--resamples", "0", "--predictions-out", out_csv] + list(extra)
    out = subprocess.run(args, capture_output=True, text=True, timeout=1200)
    if out.returncode != 0:
        raise RuntimeError(out.stderr.strip())
    with open(out_csv) as f:
        rows = list(csv.reader(f))
    return json.loads(out.stdout), rows[0], rows[1:]


def imbalanced(n=503, seed=0):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, 4))
    y = (X[:, 0] + 0.5 * X[:, 1] + rng.normal(scale=1.0, size=n) > 1.6).astype(int)
    return X, y


def fold_checks(tmp):
    X, y = imbalanced()
    path = os.path.join(tmp, "imb.csv")
    write(path, X, y, labels=["no", "yes"])
    k = 5
    report, head, rows = evaluate(path, "folds:%d" % k, tmp, ["--method", "tree", "--set", "depth=3"])
    folds = np.array([int(r[1]) for r in rows])
    outcome = np.array([1 if r[2] == "yes" else 0 for r in rows])
    ours = sorted(tuple(int(((folds == f) & (outcome == c)).sum()) for c in (0, 1)) for f in range(1, k + 1))
    within = all(
        abs(((folds == f) & (outcome == c)).sum() - (outcome == c).sum() / k) < 1
        for f in range(1, k + 1) for c in (0, 1))
    theirs = sorted(tuple(int((y[te] == c).sum()) for c in (0, 1))
                    for _, te in StratifiedKFold(n_splits=k, shuffle=True, random_state=0).split(X, y))
    check("stratified folds: each class within one row of n_c/k", within and len(folds) == len(y),
          "ours %s" % ours)
    check("stratified folds: per-fold class counts as StratifiedKFold's", ours == theirs,
          "ours %s, StratifiedKFold %s" % (ours, theirs))

    # Grouped: 120 patients with 1 to 8 rows each; the event depends on the patient.
    rng = np.random.default_rng(4)
    sizes = rng.integers(1, 9, size=120)
    groups = np.repeat(np.arange(120), sizes)
    risk = rng.normal(size=120)[groups]
    Xg = np.column_stack([risk + rng.normal(scale=0.5, size=len(groups)), rng.normal(size=len(groups))])
    yg = (risk + rng.normal(scale=0.7, size=len(groups)) > 1.0).astype(int)
    gpath = os.path.join(tmp, "grouped.csv")
    write(gpath, Xg, yg, extra={"patient": ["p%03d" % g for g in groups]}, labels=["no", "yes"])
    report, head, rows = evaluate(gpath, "groups:5:patient", tmp, ["--method", "tree", "--set", "depth=3",
                                                                   "--predictors", "x0,x1"])
    gfold = np.array([int(r[1]) for r in rows])
    split = [g for g in range(120) if len(set(gfold[groups == g])) > 1]
    check("grouped folds: no group split across folds", not split and len(gfold) == len(yg),
          "%d groups split" % len(split))

    def spread(fold_of_row):
        shares = [yg[fold_of_row == f].mean() for f in np.unique(fold_of_row)]
        return max(shares) - min(shares)

    theirs = np.zeros(len(yg), dtype=int)
    for f, (_, te) in enumerate(StratifiedGroupKFold(n_splits=5, shuffle=True, random_state=0).split(Xg, yg, groups)):
        theirs[te] = f
    check("grouped folds: event share as even as StratifiedGroupKFold's (+0.02)",
          spread(gfold) <= spread(theirs) + 0.02,
          "spread of fold event shares: ours %.4f, StratifiedGroupKFold %.4f" % (spread(gfold), spread(theirs)))


def metric_checks(tmp):
    X, y = imbalanced(seed=1)
    path = os.path.join(tmp, "bin.csv")
    write(path, X, y, labels=["no", "yes"])
    report, head, rows = evaluate(path, "folds:5", tmp, ["--method", "forest", "--set", "trees=30"])
    obs = np.array([1 if r[2] == "yes" else 0 for r in rows])
    p = np.array([float(r[4]) for r in rows])
    m = report["metrics"]
    for name, theirs in [
        ("auc", roc_auc_score(obs, p)),
        ("average_precision", average_precision_score(obs, p)),
        ("log_loss", log_loss(obs, np.column_stack([1 - p, p]), labels=[0, 1])),
        ("brier", brier_score_loss(obs, p)),
    ]:
        ours = m[name]["value"]
        check("two classes: %s as scikit-learn's" % name, abs(ours - theirs) <= TOL,
              "ours %.12f, scikit-learn %.12f" % (ours, theirs))
    cm = confusion_matrix(obs, (p >= 0.5).astype(int), labels=[0, 1]).tolist()
    check("two classes: confusion matrix at 0.5 as scikit-learn's", report["confusion_matrix"] == cm,
          "ours %s, scikit-learn %s" % (report["confusion_matrix"], cm))

    iris = load_iris()
    ipath = os.path.join(tmp, "iris.csv")
    write(ipath, iris.data, iris.target, labels=["setosa", "versicolor", "virginica"])
    report, head, rows = evaluate(ipath, "folds:5", tmp, ["--method", "forest", "--set", "trees=30"])
    labels = ["setosa", "versicolor", "virginica"]
    obs = np.array([labels.index(r[2]) for r in rows])
    P = np.array([[float(v) for v in r[3:6]] for r in rows])
    for name, ours, theirs in [
        ("accuracy", report["metrics"]["accuracy"]["value"], accuracy_score(obs, P.argmax(axis=1))),
        ("log_loss", report["metrics"]["log_loss"]["value"], log_loss(obs, P, labels=[0, 1, 2])),
    ]:
        check("several classes: %s as scikit-learn's" % name, abs(ours - theirs) <= TOL,
              "ours %.12f, scikit-learn %.12f" % (ours, theirs))
    cm = confusion_matrix(obs, P.argmax(axis=1), labels=[0, 1, 2]).tolist()
    check("several classes: confusion matrix as scikit-learn's", report["confusion_matrix"] == cm,
          "ours %s" % report["confusion_matrix"])

    dia = load_diabetes()
    dpath = os.path.join(tmp, "diabetes.csv")
    write(dpath, dia.data, dia.target)
    report, head, rows = evaluate(dpath, "folds:5", tmp, ["--method", "forest", "--set", "trees=30"])
    obs = np.array([float(r[2]) for r in rows])
    pred = np.array([float(r[3]) for r in rows])
    ours, theirs = report["metrics"]["r_squared"]["value"], r2_score(obs, pred)
    check("number: r_squared as scikit-learn's r2_score", abs(ours - theirs) <= TOL,
          "ours %.12f, scikit-learn %.12f" % (ours, theirs))


def breiman_check(tmp):
    data = load_breast_cancer()
    path = os.path.join(tmp, "breast.csv")
    write(path, data.data, data.target, labels=["malignant", "benign"])
    report, head, rows = evaluate(path, "folds:10", tmp, ["--method", "forest", "--set", "trees=300"])
    error = 1 - report["metrics"]["accuracy"]["value"]
    check("breast cancer: 10-fold CV error of a forest in Breiman (2001) Table 2's band (2% to 6%, from memory)",
          0.02 <= error <= 0.06, "error %.4f" % error)


def main():
    print("reference: scikit-learn %s" % sklearn.__version__)
    if not os.path.exists(BIN):
        print("FAIL spinney-binary: not found at %s" % BIN)
        print("0 passed, 1 failed")
        return 1
    with tempfile.TemporaryDirectory() as tmp:
        for part in (fold_checks, metric_checks, breiman_check):
            try:
                part(tmp)
            except Exception as e:  # a crash is a failure with its message, not a stop
                check(part.__name__, False, str(e))
    passed = sum(results)
    failed = len(results) - passed
    print("%d passed, %d failed" % (passed, failed))
    return 0 if failed == 0 else 1


if __name__ == "__main__":
    sys.exit(main())
