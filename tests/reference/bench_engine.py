#!/usr/bin/env python3
"""Engine benchmark (prints, asserts nothing): random forest (100 fully grown trees, sqrt(p)
predictors per split) and AdaBoost (500 stumps), Spinney against scikit-learn at one
thread, on the same seeded synthetic data: ROWS x 28 numbers, a binary outcome from a
known non-linear rule with 10% label noise, 80/20 split. Spinney's time is its own fit time
(binning included, reading the CSV excluded), as printed by `spinney fit --json`.
    python3 tests/reference/bench_engine.py [ROWS]      (scripts/bench engine)
"""
import json
import os
import subprocess
import sys
import tempfile
import time

import numpy as np
import sklearn
from sklearn.ensemble import AdaBoostClassifier, RandomForestClassifier
from sklearn.tree import DecisionTreeClassifier

BIN = os.environ.get("SPINNEY_BIN", "target/release/spinney")
rows = int(sys.argv[1]) if len(sys.argv) > 1 else 100_000
rng = np.random.default_rng(20261202)
X = rng.normal(size=(rows, 28)).astype(np.float32)
signal = X[:, 0] * X[:, 1] + np.sin(2 * X[:, 2]) + (X[:, 3] > 0.5) - 0.5 * X[:, 4] ** 2
y = (signal + rng.normal(scale=0.5, size=rows) > 0).astype(int)
cut = int(rows * 0.8)


def write(path, X, y):
    with open(path, "w") as f:
        f.write(",".join(["x%d" % j for j in range(X.shape[1])] + ["outcome"]) + "\n")
        for row, t in zip(X, y):
            f.write(",".join(["%.7g" % v for v in row] + ["k%d" % t]) + "\n")


def spinney(train, test, method, sets):
    cmd = [BIN, "fit", train, "--outcome", "outcome", "--method", method, "--score", test, "--json"]
    for s in sets:
        cmd += ["--set", s]
    out = subprocess.run(cmd, capture_output=True, text=True, check=True)
    j = json.loads(out.stdout)
    return j["fit_seconds"], j["scored"]["accuracy"]


print("scikit-learn %s; %d rows x 28, %d to fit, %d to score; 1 thread" % (sklearn.__version__, rows, cut, rows - cut))
with tempfile.TemporaryDirectory() as tmp:
    train, test = os.path.join(tmp, "train.csv"), os.path.join(tmp, "test.csv")
    write(train, X[:cut], y[:cut])
    write(test, X[cut:], y[cut:])
    # Read back what the files hold, so both libraries see the same numbers.
    Xtr = np.loadtxt(train, delimiter=",", skiprows=1, usecols=range(28), dtype=np.float32)
    Xte = np.loadtxt(test, delimiter=",", skiprows=1, usecols=range(28), dtype=np.float32)
    for label, method, sets, model in [
        ("random forest, 100 trees", "forest", ["trees=100", "seed=1"],
         RandomForestClassifier(n_estimators=100, max_features="sqrt", n_jobs=1, random_state=1)),
        ("AdaBoost, 500 stumps", "adaboost", ["rounds=500"],
         AdaBoostClassifier(DecisionTreeClassifier(max_depth=1), n_estimators=500, random_state=1)),
    ]:
        ours_t, ours_acc = spinney(train, test, method, sets)
        start = time.perf_counter()
        model.fit(Xtr, y[:cut])
        ref_t = time.perf_counter() - start
        ref_acc = model.score(Xte, y[cut:])
        print("%-26s Spinney %7.2f s, accuracy %.4f | scikit-learn %7.2f s, accuracy %.4f | time ratio %.2f" % (
            label, ours_t, ours_acc, ref_t, ref_acc, ours_t / ref_t))
