#!/usr/bin/env python3
"""`spinney explain` against outside references, on Friedman #1 data (scikit-learn's
make_friedman1: y = 10 sin(pi x1 x2) + 20 (x3 - 1/2)^2 + 10 x4 + 5 x5 + N(0, 1), ten uniform
inputs of which x6..x10 are pure noise; Friedman, Ann Stat 1991 / 2001). A forest and a
gradient-boosting model are fitted on 1,000 rows and explained on 1,000 others.

- Permutation importance and mean |contribution| rank every one of x1..x5 above every noise
  input (the generating formula).
- Partial dependence on x4 is close to linear (R^2 of a line above 0.95) with slope ~10
  (the formula's coefficient; a tolerance band 7..13, since trees flatten the ends).
- Partial dependence equals scikit-learn's sklearn.inspection.partial_dependence
  (method="brute", custom_values = Spinney's grid) computed on Spinney's own predictions
  through a thin estimator that calls `spinney predict`, to 1e-9; and the grid equals
  numpy's quantiles (linear interpolation, Hyndman & Fan type 7) from 5% to 95%.
- Contributions plus the base value equal `spinney predict`'s predictions to 1e-9 (local
  accuracy, Lundberg et al. 2020).
- When the `shap` package (PyPI) is installed: TreeSHAP contributions and base value equal
  shap.TreeExplainer(feature_perturbation="tree_path_dependent") on the same trees (read from
  the model file into shap's dictionary form) to 1e-9; skipped (and said so) otherwise.

Prints "PASS name" / "FAIL name: reason" per check and "N passed, N failed" last.
"""
import json
import os
import subprocess
import sys
import tempfile

import numpy as np
import sklearn
from sklearn.base import BaseEstimator, RegressorMixin
from sklearn.datasets import make_friedman1
from sklearn.inspection import partial_dependence

BIN = os.environ.get("SPINNEY_BIN", os.path.join(os.path.dirname(__file__), "..", "..", "target", "debug", "spinney"))
NAMES = ["x%d" % (j + 1) for j in range(10)]
passed = failed = 0


def report(name, problem):
    global passed, failed
    if problem:
        failed += 1
        print("FAIL %s: %s" % (name, problem))
    else:
        passed += 1
        print("PASS %s" % name)


def write_csv(path, X, y=None):
    with open(path, "w") as f:
        f.write(",".join(NAMES + (["y"] if y is not None else [])) + "\n")
        for i, row in enumerate(X):
            cells = [repr(float(v)) for v in row]
            if y is not None:
                cells.append(repr(float(y[i])))
            f.write(",".join(cells) + "\n")


def run(*args):
    out = subprocess.run([BIN, *args], capture_output=True, text=True)
    if out.returncode != 0:
        raise RuntimeError("spinney %s: %s" % (" ".join(args), out.stderr))
    return out.stdout


def predict(model, X, workdir):
    path = os.path.join(workdir, "points.csv")
    write_csv(path, X)
    lines = run("predict", model, path).splitlines()[1:]
    return np.array([float(l) for l in lines])


class SpinneyPredictions(RegressorMixin, BaseEstimator):
    """A thin estimator whose predictions are Spinney's, for scikit-learn's inspection."""

    def __init__(self, model=None, workdir=None):
        self.model = model
        self.workdir = workdir

    def fit(self, X, y=None):
        self.fitted_ = True
        return self

    def predict(self, X):
        return predict(self.model, np.asarray(X, dtype=float), self.workdir)


def shap_dictionary(model_file):
    """The model file's trees in shap's dictionary form (per tree: children, default child
    for missing values, features, thresholds, values, cover), with the forest's 1/T or
    boosting's starting score."""
    m = json.load(open(model_file))
    trees = m["trees"]
    scale = 1.0 / len(trees) if m["method"] in ("forest", "bagging") else 1.0
    out = []
    for t in trees:
        left = np.array(t["left"], dtype=np.int32)
        right = np.array(t["right"], dtype=np.int32)
        leaf = left == 0
        left[leaf] = -1
        right[leaf] = -1
        default = np.where(np.array(t["missing_left"]), left, right).astype(np.int32)
        features = np.array(t["feature"], dtype=np.int32)
        features[leaf] = -2
        values = np.array(t["values"], dtype=float).reshape(len(left), t["outputs"]) * scale
        out.append({
            "children_left": left, "children_right": right, "children_default": default,
            "features": features, "thresholds": np.array(t["threshold"], dtype=float),
            "values": values, "node_sample_weight": np.array(t["weight"], dtype=float),
        })
    base = m["boosting"]["initial_scores"][0] if m["method"] == "boosting" else 0.0
    # Inputs and sums in float64, as Spinney reads and adds them.
    return {"trees": out, "base_offset": base, "input_dtype": np.float64, "internal_dtype": np.float64}


def main():
    print("scikit-learn %s, numpy %s" % (sklearn.__version__, np.__version__))
    X, y = make_friedman1(n_samples=2000, n_features=10, noise=1.0, random_state=0)
    workdir = tempfile.mkdtemp(prefix="spinney-explain-")
    train, test = os.path.join(workdir, "train.csv"), os.path.join(workdir, "test.csv")
    write_csv(train, X[:1000], y[:1000])
    write_csv(test, X[1000:], y[1000:])
    Xt = X[1000:]
    for method, settings in [("forest", ["--set", "trees=100"]),
                             ("boosting", ["--set", "rounds=200", "--set", "learning_rate=0.1"])]:
        model = os.path.join(workdir, method + ".json")
        run("fit", train, "--outcome", "y", "--method", method, *settings, "--save-model", model)
        out = json.loads(run("explain", model, test, "--json", "--repeats", "5", "--contributions", "all",
                             "--dependence", "x4", "--grid", "20", "--sample", "0", "--interactions", "0"))
        names = out["model"]["predictors"]
        perm = {e["predictors"][0]: e["mean"] for e in out["permutation"]["entries"]}
        drivers, noise = NAMES[:5], NAMES[5:]
        weakest = min(drivers, key=lambda n: perm[n])
        strongest_noise = max(noise, key=lambda n: perm[n])
        report("%s: permutation importance ranks x1..x5 above every noise input (Friedman #1)" % method,
               None if perm[weakest] > perm[strongest_noise] else
               "%s %.4f <= %s %.4f" % (weakest, perm[weakest], strongest_noise, perm[strongest_noise]))
        c = out["contributions"]
        mean_abs = {names[j]: c["mean_abs"][j][0] for j in range(len(names))}
        weakest = min(drivers, key=lambda n: mean_abs[n])
        strongest_noise = max(noise, key=lambda n: mean_abs[n])
        report("%s: mean |contribution| ranks x1..x5 above every noise input (Friedman #1)" % method,
               None if mean_abs[weakest] > mean_abs[strongest_noise] else
               "%s %.4f <= %s %.4f" % (weakest, mean_abs[weakest], strongest_noise, mean_abs[strongest_noise]))
        # Local accuracy against spinney predict.
        predicted = predict(model, Xt, workdir)
        contrib = np.array([[v[0] for v in r["contributions"]] for r in c["rows"]])
        totals = c["base"][0] + contrib.sum(axis=1)
        worst = np.max(np.abs(totals - predicted))
        report("%s: contributions + base = spinney predict (Lundberg et al. 2020 local accuracy)" % method,
               None if worst < 1e-9 else "largest difference %.3g" % worst)
        # Partial dependence on x4.
        d = out["dependence"]
        grid = np.array(d["grids"][0]["values"])
        pd = np.array(d["average"])
        want_grid = np.quantile(Xt[:, 3], np.linspace(0.05, 0.95, 20))
        report("%s: the grid is numpy's 5%%..95%% quantiles (type 7)" % method,
               None if np.allclose(grid, want_grid, rtol=0, atol=1e-12) else "%s vs %s" % (grid, want_grid))
        slope, intercept = np.polyfit(grid, pd, 1)
        fitted = slope * grid + intercept
        r2 = 1 - np.sum((pd - fitted) ** 2) / np.sum((pd - pd.mean()) ** 2)
        report("%s: partial dependence on x4 near-linear, slope ~10 (Friedman #1 formula)" % method,
               None if (7 <= slope <= 13 and r2 > 0.95) else "slope %.3f, R^2 %.4f" % (slope, r2))
        wrapper = SpinneyPredictions(model, workdir).fit(Xt)
        ref = partial_dependence(wrapper, Xt, [3], method="brute", custom_values={3: grid}, kind="average")
        worst = np.max(np.abs(ref["average"][0] - pd))
        report("%s: partial dependence = sklearn.inspection.partial_dependence(brute) on Spinney's predictions" % method,
               None if worst < 1e-9 else "largest difference %.3g" % worst)
        try:
            import shap
        except ImportError:
            print("SKIP %s: TreeSHAP against the shap package (not installed)" % method)
            continue
        explainer = shap.TreeExplainer(shap_dictionary(model), feature_perturbation="tree_path_dependent")
        values = np.asarray(explainer.shap_values(Xt))
        worst = np.max(np.abs(values - contrib))
        base_diff = abs(float(np.ravel(explainer.expected_value)[0]) - c["base"][0])
        report("%s: contributions = shap %s TreeExplainer (tree_path_dependent)" % (method, shap.__version__),
               None if worst < 1e-9 and base_diff < 1e-9 else
               "largest difference %.3g, base difference %.3g" % (worst, base_diff))
    print("%d passed, %d failed" % (passed, failed))
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
