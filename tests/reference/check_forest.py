#!/usr/bin/env python3
"""Random forests and bagging against scikit-learn (PyPI): 5-fold stratified cross-validated
accuracy, averaged over 5 seeds, on data shipped inside scikit-learn (wine, iris, breast
cancer, digits: 1797 x 64, 10 classes). Passes when Spinney's mean accuracy is within 1 percentage point of scikit-learn's
RandomForestClassifier(max_features="sqrt") / BaggingClassifier(DecisionTreeClassifier())
with 100 trees. The folds are scikit-learn's StratifiedKFold(shuffle=True, random_state=0),
the same for both. Prints "PASS"/"FAIL" lines with both figures and "N passed, N failed".
"""
import json
import os
import subprocess
import sys
import tempfile

import numpy as np
import sklearn
from sklearn.datasets import load_breast_cancer, load_digits, load_iris, load_wine
from sklearn.ensemble import BaggingClassifier, RandomForestClassifier
from sklearn.model_selection import StratifiedKFold
from sklearn.tree import DecisionTreeClassifier

BIN = os.environ.get("SPINNEY_BIN", os.path.join(os.path.dirname(__file__), "..", "..", "target", "debug", "spinney"))
TREES, SEEDS, FOLDS, TOLERANCE = 100, 5, 5, 0.01


def write(path, X, y):
    with open(path, "w") as f:
        f.write(",".join(["x%d" % j for j in range(X.shape[1])] + ["outcome"]) + "\n")
        for row, t in zip(X, y):
            f.write(",".join([repr(float(v)) for v in row] + ["k%02d" % t]) + "\n")


def ours(train, test, method, seed):
    out = subprocess.run([BIN, "fit", train, "--outcome", "outcome", "--method", method,
                          "--set", "trees=%d" % TREES, "--set", "seed=%d" % seed, "--score", test, "--json"],
                         capture_output=True, text=True, timeout=600)
    if out.returncode != 0:
        raise RuntimeError(out.stderr.strip())
    return json.loads(out.stdout)["scored"]["accuracy"]


def main():
    print("reference: scikit-learn %s" % sklearn.__version__)
    passed = failed = 0
    if not os.path.exists(BIN):
        print("FAIL spinney-binary: not found at %s" % BIN)
        print("0 passed, 1 failed")
        return 1
    with tempfile.TemporaryDirectory() as tmp:
        for name, loader in [("wine", load_wine), ("iris", load_iris), ("breast cancer", load_breast_cancer), ("digits", load_digits)]:
            data = loader()
            X, y = data.data, data.target
            folds = list(StratifiedKFold(n_splits=FOLDS, shuffle=True, random_state=0).split(X, y))
            for method in ("forest", "bagging"):
                mine, theirs = [], []
                try:
                    for k, (tr, te) in enumerate(folds):
                        train, test = os.path.join(tmp, "train.csv"), os.path.join(tmp, "test.csv")
                        write(train, X[tr], y[tr])
                        write(test, X[te], y[te])
                        for seed in range(SEEDS):
                            mine.append(ours(train, test, method, seed))
                            if method == "forest":
                                model = RandomForestClassifier(n_estimators=TREES, max_features="sqrt", random_state=seed)
                            else:
                                model = BaggingClassifier(DecisionTreeClassifier(), n_estimators=TREES, random_state=seed)
                            theirs.append(model.fit(X[tr], y[tr]).score(X[te], y[te]))
                except Exception as e:  # noqa: BLE001 - any failure of the binary is a FAIL
                    failed += 1
                    print("FAIL %s %s: %s" % (name, method, e))
                    continue
                a, b = float(np.mean(mine)), float(np.mean(theirs))
                line = "%s %s: Spinney %.4f, scikit-learn %.4f (difference %+.4f, allowed %.2f)" % (name, method, a, b, a - b, TOLERANCE)
                if abs(a - b) <= TOLERANCE:
                    passed += 1
                    print("PASS " + line)
                else:
                    failed += 1
                    print("FAIL " + line)
    print("%d passed, %d failed" % (passed, failed))
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
