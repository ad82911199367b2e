#!/usr/bin/env python3
"""Saved models against scikit-learn (PyPI): `spinney fit --save-model` then `spinney predict`
must give scikit-learn's predictions for the same model, on the training rows and on new
points drawn inside the predictors' ranges.

References (version printed below):
- DecisionTreeClassifier.predict_proba, single exact trees (`--set split_search=exact`), on
  wine (3 classes, depth 3, gini) to 1e-12;
- DecisionTreeRegressor.predict on the first 250 rows of diabetes (depth 3) to 1e-12;
- AdaBoostClassifier.predict_proba (SAMME, 50 stumps) on breast cancer, exact search, to
  1e-12. scikit-learn draws a random predictor order per stump and may break an exact tie in
  gain differently, so random_state 0..29 are tried and the first whose round weights equal
  Spinney's (as in check_adaboost.py) is compared;
- GradientBoostingRegressor.predict (squared error, 100 rounds of depth-3 trees, learning
  rate 0.1, at least 15 rows a leaf) on diabetes, exact search, to 1e-9; random_state 0..9
  tried, the first that agrees on the training rows compared on the new points. With leaves
  of one row (check_boosting.py's setting) two predictors can part a node's few rows alike,
  scikit-learn may pick the other one, and the models then agree on the training rows only.
Data shipped inside scikit-learn (no download), written as float32 values, which is what
scikit-learn's trees compare; the same depths as check_tree.py, chosen so that no tie
arises. Missing values at splits that saw none in training go to the child with more
training rows in both (checked on wine).

Prints "PASS name" / "FAIL name: reason" per check and "N passed, N failed" last.
"""
import csv
import json
import os
import subprocess
import sys
import tempfile

import numpy as np
import sklearn
from sklearn.datasets import load_breast_cancer, load_diabetes, load_wine
from sklearn.ensemble import AdaBoostClassifier, GradientBoostingRegressor
from sklearn.tree import DecisionTreeClassifier, DecisionTreeRegressor

BIN = os.environ.get("SPINNEY_BIN", os.path.join(os.path.dirname(__file__), "..", "..", "target", "debug", "spinney"))
passed = failed = 0


def report(name, problem):
    global passed, failed
    if problem:
        failed += 1
        print("FAIL %s: %s" % (name, problem))
    else:
        passed += 1
        print("PASS %s" % name)


def write_csv(path, X, y, is_class):
    with open(path, "w") as f:
        f.write(",".join(["x%d" % j for j in range(X.shape[1])] + ["outcome"]) + "\n")
        for row, target in zip(X, y):
            cells = [repr(float(v)) for v in row]
            cells.append(("k%d" % target) if is_class else repr(float(target)))
            f.write(",".join(cells) + "\n")


def run(args):
    out = subprocess.run([BIN] + args, capture_output=True, text=True, timeout=300)
    if out.returncode != 0:
        raise RuntimeError(out.stderr.strip())
    return out.stdout


def spinney_predictions(tmp, X, y, is_class, new_X, fit_args):
    """Fits on (X, y), saves the model, and predicts new_X with `spinney predict`."""
    train, model, new = (os.path.join(tmp, n) for n in ("train.csv", "model.json", "new.csv"))
    write_csv(train, X, y, is_class)
    # The new points get a placeholder outcome; predict does not read it.
    write_csv(new, new_X, np.zeros(len(new_X), dtype=int) if is_class else np.zeros(len(new_X)), is_class)
    run(["fit", train, "--outcome", "outcome", "--save-model", model] + fit_args)
    rows = list(csv.DictReader(run(["predict", model, new]).splitlines()))
    return rows


def new_points(X, seed):
    """The training rows and 300 points drawn uniformly inside each predictor's range."""
    rng = np.random.default_rng(seed)
    drawn = rng.uniform(X.min(axis=0), X.max(axis=0), size=(300, X.shape[1])).astype(np.float32)
    return np.vstack([X, drawn])


def largest_gap(ours, ref):
    return float(np.max(np.abs(np.asarray(ours) - np.asarray(ref))))


def main():
    print("reference: scikit-learn %s, numpy %s" % (sklearn.__version__, np.__version__))
    if not os.path.exists(BIN):
        report("spinney-binary", "not found at %s (build it: cargo build -p spinney-cli)" % BIN)
        print("%d passed, %d failed" % (passed, failed))
        return 1
    with tempfile.TemporaryDirectory() as tmp:
        # A single exact tree on wine: probabilities per class; then the same tree scoring
        # points with missing cells, none of which training had: scikit-learn sends a missing
        # value at such a split to the child with more training samples (its user guide,
        # "Missing Values Support" for decision trees), and so does Spinney.
        data = load_wine()
        X, y = data.data.astype(np.float32), data.target
        with_holes = new_points(X, 4)
        with_holes[np.random.default_rng(4).random(with_holes.shape) < 0.3] = np.nan
        for name, new_X in [("wine tree depth 3: predict_proba", new_points(X, 1)),
                            ("wine tree depth 3: predict_proba with missing values unseen in training", with_holes)]:
            try:
                rows = spinney_predictions(tmp, X, y, True, new_X,
                                           ["--method", "tree", "--set", "depth=3", "--set", "split_search=exact"])
                ref = DecisionTreeClassifier(max_depth=3, random_state=0).fit(X, y).predict_proba(new_X)
                ours = [[float(r["probability_k%d" % k]) for k in range(3)] for r in rows]
                gap = largest_gap(ours, ref)
                report(name, None if len(ours) == len(new_X) and gap <= 1e-12 else
                       "%d rows, largest difference %g" % (len(ours), gap))
            except Exception as e:  # noqa: BLE001 - report any failure of the binary
                report(name, str(e))

        # A single exact regression tree on diabetes.
        name = "diabetes[:250] tree depth 3: predict"
        try:
            data = load_diabetes()
            X, y = data.data.astype(np.float32)[:250], data.target[:250].astype(np.float64)
            new_X = new_points(X, 2)
            rows = spinney_predictions(tmp, X, y, False, new_X,
                                       ["--method", "tree", "--set", "depth=3", "--set", "split_search=exact",
                                        "--set", "criterion=squared_error"])
            ref = DecisionTreeRegressor(max_depth=3, random_state=0).fit(X, y).predict(new_X)
            ours = [float(r["predicted_outcome"]) for r in rows]
            gap = largest_gap(ours, ref)
            report(name, None if len(ours) == len(new_X) and gap <= 1e-12 * max(1.0, np.abs(ref).max()) else
                   "%d rows, largest difference %g" % (len(ours), gap))
        except Exception as e:  # noqa: BLE001
            report(name, str(e))

        # AdaBoost SAMME with stumps on breast cancer: probabilities by the SAMME rule.
        name = "breast cancer AdaBoost 50 stumps: predict_proba"
        try:
            data = load_breast_cancer()
            X, y = data.data.astype(np.float32), data.target
            new_X = new_points(X, 3)
            model = os.path.join(tmp, "model.json")  # written by spinney_predictions
            rows = spinney_predictions(tmp, X, y, True, new_X,
                                       ["--method", "adaboost", "--set", "rounds=50", "--set", "split_search=exact"])
            ours = [[float(r["probability_k%d" % k]) for k in range(2)] for r in rows]
            with open(model) as f:
                weights = np.array(json.load(f)["adaboost"]["round_weights"])
            match = None
            for seed in range(30):
                ref_model = AdaBoostClassifier(DecisionTreeClassifier(max_depth=1), n_estimators=50,
                                               random_state=seed).fit(X, y)
                w = ref_model.estimator_weights_[:len(ref_model.estimators_)]
                if len(w) == len(weights) and np.allclose(w, weights, rtol=0, atol=1e-9):
                    match = (seed, ref_model)
                    break
            if match is None:
                report(name, "no random_state 0..29 gives Spinney's round weights")
            else:
                gap = largest_gap(ours, match[1].predict_proba(new_X))
                report(name + " (random_state=%d)" % match[0],
                       None if len(ours) == len(new_X) and gap <= 1e-12 else
                       "%d rows, largest difference %g" % (len(ours), gap))
        except Exception as e:  # noqa: BLE001
            report(name, str(e))
        # Gradient boosting, squared error, on diabetes.
        name = "diabetes gradient boosting 100 rounds: predict"
        try:
            data = load_diabetes()
            X, y = data.data.astype(np.float32), data.target.astype(np.float64)
            new_X = new_points(X, 4)
            rows = spinney_predictions(tmp, X, y, False, new_X,
                                       ["--method", "boosting", "--set", "loss=squared_error", "--set", "depth=3",
                                        "--set", "leaf_size=15", "--set", "min_hessian=0", "--set", "l2=0",
                                        "--set", "rounds=100", "--set", "learning_rate=0.1",
                                        "--set", "split_search=exact"])
            ours = np.array([float(r["predicted_outcome"]) for r in rows])
            old = tuple(int(p) for p in sklearn.__version__.split(".")[:2]) < (1, 9)
            problem = "no random_state 0..9 agrees on the training rows"
            for seed in range(10):
                ref = GradientBoostingRegressor(loss="squared_error", max_depth=3, n_estimators=100,
                                                learning_rate=0.1, subsample=1.0, random_state=seed,
                                                min_samples_leaf=15,
                                                **({"criterion": "squared_error"} if old else {})).fit(X, y)
                expected = ref.predict(new_X)
                if len(ours) == len(new_X) and largest_gap(ours[:len(X)], expected[:len(X)]) <= 1e-9:
                    gap = largest_gap(ours, expected)
                    problem = None if gap <= 1e-9 else "largest difference %g (random_state=%d)" % (gap, seed)
                    break
            report(name, problem)
        except Exception as e:  # noqa: BLE001
            report(name, str(e))
    print("%d passed, %d failed" % (passed, failed))
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
