#!/usr/bin/env python3
"""`spinney explain --held-out` (permutation importance on held-out records, the judging's
splits refitted) against outside references.

On scikit-learn's diabetes data (load_diabetes, shipped inside the scikit-learn package:
442 rows, 10 predictors; Efron et al., Ann Stat 2004), with a pure-noise column and a flag
set on three rows added, a gradient-boosting model with exact splits is explained with
--held-out folds:5. For each fold:

- Refit: `spinney fit` on that fold's training rows alone (from the JSON's held-out rows)
  predicts the held-out rows with an RMSE (sklearn.metrics.mean_squared_error) equal to the
  fold's baseline to 1e-9: the fold model shuffled is the model fitted on the training part.
- Drops: sklearn.inspection.permutation_importance (scoring neg_root_mean_squared_error,
  30 repeats) applied to that fold model's own predictions (a thin estimator calling
  `spinney predict`) on the held-out rows gives, per predictor, a mean drop within four
  standard errors (both sides' shuffles: sqrt(sd1^2/R1 + sd2^2/R2)) of Spinney's mean over
  its own shuffles of that fold (different random shuffles, so equal in expectation only).
- Definitional (Breiman 2001; Fisher, Rudin & Dominici, JMLR 2019): a predictor that no fold
  model splits on has importance exactly 0 in every shuffle, and scikit-learn's is 0 too.

On scikit-learn's breast-cancer data (load_breast_cancer, shipped inside scikit-learn; Street,
Wolberg & Mangasarian 1993), three of its predictors and two pure-noise columns, a fully grown
single tree (exact splits) is explained on its training file: the noise columns' apparent
importance (on the training records) is positive, since the tree memorised records with
them, while their held-out importance (--held-out folds:5) is within three standard errors of
0 (plus 0.005 AUC, common practice, no source).

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
from sklearn.datasets import load_breast_cancer, load_diabetes
from sklearn.inspection import permutation_importance
from sklearn.metrics import mean_squared_error

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


def write_csv(path, names, X, y=None):
    with open(path, "w") as f:
        f.write(",".join(names + (["y"] if y is not None else [])) + "\n")
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


class SpinneyPredictions(RegressorMixin, BaseEstimator):
    """A thin estimator whose predictions are a saved Spinney model's, for scikit-learn."""

    def __init__(self, model=None, names=None, workdir=None):
        self.model = model
        self.names = names
        self.workdir = workdir

    def fit(self, X, y=None):
        self.fitted_ = True
        return self

    def predict(self, X):
        path = os.path.join(self.workdir, "points.csv")
        write_csv(path, self.names, np.asarray(X, dtype=float))
        lines = run("predict", self.model, path).splitlines()[1:]
        return np.array([float(l) for l in lines])


def used_predictors(model_file):
    m = json.load(open(model_file))
    used = set()
    for t in m["trees"]:
        for left, feature in zip(t["left"], t["feature"]):
            if left != 0:
                used.add(feature)
    return used


def diabetes_checks(workdir):
    data = load_diabetes()
    rng = np.random.RandomState(0)
    n = data.data.shape[0]
    flag = np.zeros(n)
    flag[[5, 50, 500 % n]] = 1.0
    X = np.column_stack([data.data, rng.uniform(size=n), flag])
    names = list(data.feature_names) + ["noise", "flag"]
    y = data.target
    path = os.path.join(workdir, "diabetes.csv")
    write_csv(path, names, X, y)
    sets = ["--set", "rounds=40", "--set", "split_search=exact", "--set", "leaf_size=20", "--set", "seed=1"]
    model = os.path.join(workdir, "diabetes.json")
    run("fit", path, "--outcome", "y", "--method", "boosting", *sets, "--save-model", model)
    R = 30
    out = json.loads(run("explain", model, path, "--json", "--held-out", "folds:5", "--repeats", str(R),
                         "--interactions", "0"))
    held = out["held_out"]
    report("diabetes: 5 folds refitted, every row held out once",
           None if held["splits"] == 5 and sorted(r for f in held["held_out_rows"] for r in f) == list(range(1, n + 1))
           else "%d splits" % held["splits"])
    entries = {e["predictors"][0]: e for e in held["entries"]}
    worst_refit, worst_z, unused_everywhere = 0.0, 0.0, set(range(len(names)))
    for f, rows in enumerate(held["held_out_rows"]):
        test = np.array(rows) - 1
        train = np.setdiff1d(np.arange(n), test)
        train_path = os.path.join(workdir, "fold%d.csv" % f)
        write_csv(train_path, names, X[train], y[train])
        fold_model = os.path.join(workdir, "fold%d.json" % f)
        run("fit", train_path, "--outcome", "y", "--method", "boosting", *sets, "--save-model", fold_model)
        unused_everywhere -= used_predictors(fold_model)
        est = SpinneyPredictions(fold_model, names, workdir).fit(X[train], y[train])
        rmse = float(np.sqrt(mean_squared_error(y[test], est.predict(X[test]))))
        worst_refit = max(worst_refit, abs(rmse - held["fold_baselines"][f]))
        ref = permutation_importance(est, X[test], y[test], scoring="neg_root_mean_squared_error",
                                     n_repeats=R, random_state=f)
        for j, name in enumerate(names):
            ours = np.array(entries[name]["losses"][f * R:(f + 1) * R])
            theirs = ref.importances[j]
            se = np.sqrt(ours.var(ddof=1) / R + theirs.var(ddof=1) / R)
            gap = abs(ours.mean() - theirs.mean())
            if gap > 0:
                worst_z = max(worst_z, gap / se if se > 0 else np.inf)
        if f == 0:
            fold0 = ref
    report("diabetes: each fold's model is `spinney fit` on its training rows (RMSE = fold baseline, sklearn mean_squared_error)",
           None if worst_refit < 1e-9 else "largest RMSE difference %.3g" % worst_refit)
    report("diabetes: per-fold mean drops agree with sklearn.inspection.permutation_importance on the fold models (within 4 SE)",
           None if worst_z < 4 else "largest gap %.2f standard errors" % worst_z)
    unused = [names[j] for j in sorted(unused_everywhere)]
    zero = all(all(l == 0.0 for l in entries[u]["losses"]) for u in unused)
    sk_zero = all(np.all(fold0.importances[names.index(u)] == 0.0) for u in unused)
    report("diabetes: a predictor no fold model splits on (%s) has importance exactly 0, as in scikit-learn" % ", ".join(unused),
           None if "flag" in unused and zero and sk_zero else
           "unused %s; ours all zero %s, sklearn's %s" % (unused, zero, sk_zero))


def noise_checks(workdir):
    data = load_breast_cancer()
    rng = np.random.RandomState(1)
    n = data.data.shape[0]
    keep = [0, 7, 21]  # mean radius, mean concave points, worst texture
    X = np.column_stack([data.data[:, keep], rng.uniform(size=n), rng.uniform(size=n)])
    names = ["radius", "concave_points", "texture", "noise1", "noise2"]
    y = data.target
    path = os.path.join(workdir, "cancer.csv")
    write_csv(path, names, X, y)
    model = os.path.join(workdir, "cancer.json")
    run("fit", path, "--outcome", "y", "--method", "tree", "--set", "split_search=exact", "--save-model", model)
    out = json.loads(run("explain", model, path, "--json", "--held-out", "folds:5", "--repeats", "10",
                         "--interactions", "0"))
    apparent = {e["predictors"][0]: e for e in out["permutation"]["entries"]}
    held = {e["predictors"][0]: e for e in out["held_out"]["entries"]}
    problems = []
    for name in ["noise1", "noise2"]:
        a, h = apparent[name]["mean"], held[name]
        se = h["spread"] / np.sqrt(len(h["losses"]))
        if not a > 0.0:
            problems.append("%s apparent %.4f not positive" % (name, a))
        if not abs(h["mean"]) <= 3 * se + 0.005:
            problems.append("%s held out %.4f ± %.4f (se %.4f)" % (name, h["mean"], h["spread"], se))
    report("breast cancer, deep tree: noise is important on training records (apparent: %s) and not on held-out ones (%s)" % (
        ", ".join("%.4f" % apparent[n]["mean"] for n in ["noise1", "noise2"]),
        ", ".join("%.4f" % held[n]["mean"] for n in ["noise1", "noise2"])),
        "; ".join(problems))
    report("breast cancer: the training-file figure is labelled apparent",
           None if out["permutation"]["basis"] == "on training records (apparent)" else out["permutation"]["basis"])


def main():
    print("scikit-learn %s, numpy %s" % (sklearn.__version__, np.__version__))
    workdir = tempfile.mkdtemp(prefix="spinney-held-out-")
    diabetes_checks(workdir)
    noise_checks(workdir)
    print("%d passed, %d failed" % (passed, failed))
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
