#!/usr/bin/env python3
"""Engine benchmark (prints, asserts nothing), at one thread, on the same seeded synthetic
data: ROWS x 28 numbers, a binary outcome from a known non-linear rule with label noise,
80/20 split.
- forest: random forest (100 fully grown trees, sqrt(p) predictors per split) and AdaBoost
  (500 stumps), Spinney against scikit-learn;
- boosting: gradient boosting, logistic loss, 255 bins, depth 6 (no other leaf limit),
  200 rounds, learning rate 0.1, L2 1, at least 20 rows per leaf, least hessian 0.001:
  Spinney against LightGBM, XGBoost (hist) and scikit-learn's HistGradientBoostingClassifier;
  time per round, total time, test AUC and the time ratio to the fastest peer.
Spinney's time is its own fit time (binning included, reading the CSV excluded), as printed
by `spinney fit --json`; the peers' is their fit() call on arrays (their binning included).
    python3 tests/reference/bench_engine.py [ROWS] [forest|boosting|all]
    (scripts/bench engine [ROWS]; scripts/bench boosting [ROWS])
"""
import json
import os

# One thread everywhere: set before the peers load their OpenMP runtimes (they also get n_jobs=1).
os.environ.setdefault("OMP_NUM_THREADS", "1")
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
which = sys.argv[2] if len(sys.argv) > 2 else "all"
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


def spinney(train, test, method, sets, extra=()):
    cmd = [BIN, "fit", train, "--outcome", "outcome", "--method", method, "--score", test, "--json"]
    cmd += list(extra)
    for s in sets:
        cmd += ["--set", s]
    out = subprocess.run(cmd, capture_output=True, text=True, check=True)
    return json.loads(out.stdout)


def forest_and_adaboost(train, test, Xtr, Xte):
    for label, method, sets, model in [
        ("random forest, 100 trees", "forest", ["trees=100", "seed=1"],
         RandomForestClassifier(n_estimators=100, max_features="sqrt", n_jobs=1, random_state=1)),
        ("AdaBoost, 500 stumps", "adaboost", ["rounds=500"],
         AdaBoostClassifier(DecisionTreeClassifier(max_depth=1), n_estimators=500, random_state=1)),
    ]:
        j = spinney(train, test, method, sets)
        ours_t, ours_acc = j["fit_seconds"], j["scored"]["accuracy"]
        start = time.perf_counter()
        model.fit(Xtr, y[:cut])
        ref_t = time.perf_counter() - start
        ref_acc = model.score(Xte, y[cut:])
        print("%-26s Spinney %7.2f s, accuracy %.4f | scikit-learn %7.2f s, accuracy %.4f | time ratio %.2f" % (
            label, ours_t, ours_acc, ref_t, ref_acc, ours_t / ref_t))


ROUNDS = 200


def boosting(train, test, Xtr, Xte):
    import lightgbm
    import xgboost
    from sklearn.ensemble import HistGradientBoostingClassifier
    from sklearn.metrics import roc_auc_score

    j = spinney(train, test, "boosting", ["loss=logistic", "depth=6", "leaf_size=20", "min_hessian=0.001", "l2=1",
                                          "rounds=%d" % ROUNDS, "learning_rate=0.1", "bins=255"], ["--predictions"])
    ours = (j["fit_seconds"], roc_auc_score(y[cut:], np.array(j["predictions"])[:, 1]))
    peers = {
        "LightGBM %s" % lightgbm.__version__: lightgbm.LGBMClassifier(
            n_estimators=ROUNDS, learning_rate=0.1, max_depth=6, num_leaves=64, reg_lambda=1.0,
            min_child_samples=20, min_child_weight=1e-3, max_bin=255, n_jobs=1, verbose=-1),
        "XGBoost %s (hist)" % xgboost.__version__: xgboost.XGBClassifier(
            n_estimators=ROUNDS, learning_rate=0.1, max_depth=6, reg_lambda=1.0, min_child_weight=1e-3,
            tree_method="hist", max_bin=255, n_jobs=1),
        "scikit-learn %s HistGradientBoosting" % sklearn.__version__: HistGradientBoostingClassifier(
            max_iter=ROUNDS, learning_rate=0.1, max_depth=6, max_leaf_nodes=None, l2_regularization=1.0,
            min_samples_leaf=20, max_bins=255, early_stopping=False),
    }
    results = {}
    for name, model in peers.items():
        start = time.perf_counter()
        model.fit(Xtr, y[:cut])
        results[name] = (time.perf_counter() - start, roc_auc_score(y[cut:], model.predict_proba(Xte)[:, 1]))
    fastest = min(t for t, _ in results.values())
    print("gradient boosting, logistic, depth 6, 255 bins, %d rounds, learning rate 0.1, 1 thread:" % ROUNDS)
    for name, (t, auc) in [("Spinney", ours)] + list(results.items()):
        print("  %-44s %8.1f ms/round %8.2f s total  test AUC %.4f  time / fastest peer %.2f" % (
            name, 1000 * t / ROUNDS, t, auc, t / fastest))


print("scikit-learn %s; %d rows x 28, %d to fit, %d to score; 1 thread" % (sklearn.__version__, rows, cut, rows - cut))
with tempfile.TemporaryDirectory() as tmp:
    train, test = os.path.join(tmp, "train.csv"), os.path.join(tmp, "test.csv")
    write(train, X[:cut], y[:cut])
    write(test, X[cut:], y[cut:])
    # Read back what the files hold, so both libraries see the same numbers.
    Xtr = np.loadtxt(train, delimiter=",", skiprows=1, usecols=range(28), dtype=np.float32)
    Xte = np.loadtxt(test, delimiter=",", skiprows=1, usecols=range(28), dtype=np.float32)
    if which in ("forest", "all"):
        forest_and_adaboost(train, test, Xtr, Xte)
    if which in ("boosting", "all"):
        boosting(train, test, Xtr, Xte)
