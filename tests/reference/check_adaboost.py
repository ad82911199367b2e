#!/usr/bin/env python3
"""AdaBoost (SAMME) with stumps against scikit-learn's AdaBoostClassifier (PyPI): the
per-round weighted errors and round weights over 50 rounds must agree to 1e-9.

Data shipped inside scikit-learn: wine (3 classes) and iris without petal length (whose tie
with petal width scikit-learn breaks at random), where every predictor has at most 255
distinct values so the default histogram search visits every split point; breast cancer
(2 classes, the case the issue names) with `split_search=exact`. Values are written as their float32
form, which scikit-learn's trees use. scikit-learn draws a random predictor order for each
round's stump; where two stumps gain exactly the same the orders may pick differently, so
the check tries random_state 0..29 and passes when one gives Spinney's sequence, naming it.
Prints "PASS"/"FAIL" lines and "N passed, N failed".
"""
import json
import os
import subprocess
import sys
import tempfile

import numpy as np
import sklearn
from sklearn.datasets import load_breast_cancer, load_iris, load_wine
from sklearn.ensemble import AdaBoostClassifier
from sklearn.tree import DecisionTreeClassifier

BIN = os.environ.get("SPINNEY_BIN", os.path.join(os.path.dirname(__file__), "..", "..", "target", "debug", "spinney"))
ROUNDS = 50


def main():
    print("reference: scikit-learn %s" % sklearn.__version__)
    passed = failed = 0
    cases = [("wine", load_wine(), None, []), ("iris without petal length", load_iris(), [0, 1, 3], []),
             ("breast cancer, exact", load_breast_cancer(), None, ["--set", "split_search=exact"])]
    with tempfile.TemporaryDirectory() as tmp:
        for name, data, cols, extra in cases:
            X = data.data.astype(np.float32)
            if cols:
                X = X[:, cols]
            y = data.target
            path = os.path.join(tmp, "d.csv")
            with open(path, "w") as f:
                f.write(",".join(["x%d" % j for j in range(X.shape[1])] + ["outcome"]) + "\n")
                for row, t in zip(X, y):
                    f.write(",".join([repr(float(v)) for v in row] + ["k%d" % t]) + "\n")
            out = subprocess.run([BIN, "fit", path, "--outcome", "outcome", "--method", "adaboost",
                                  "--set", "rounds=%d" % ROUNDS, "--json"] + extra, capture_output=True, text=True, timeout=300)
            if out.returncode != 0:
                failed += 1
                print("FAIL %s: %s" % (name, out.stderr.strip()))
                continue
            ours = json.loads(out.stdout)
            e_ours, a_ours = np.array(ours["round_errors"]), np.array(ours["round_weights"])
            best = None
            for seed in range(30):
                model = AdaBoostClassifier(DecisionTreeClassifier(max_depth=1), n_estimators=ROUNDS,
                                           random_state=seed).fit(X, y)
                k = len(model.estimators_)
                e_ref, a_ref = model.estimator_errors_[:k], model.estimator_weights_[:k]
                if len(e_ref) == len(e_ours) and np.allclose(e_ref, e_ours, rtol=0, atol=1e-9) \
                        and np.allclose(a_ref, a_ours, rtol=0, atol=1e-9):
                    best = seed
                    break
                if seed == 0:
                    diverge = next((i for i in range(min(len(e_ref), len(e_ours)))
                                    if abs(e_ref[i] - e_ours[i]) > 1e-9), None)
                    first = "rounds %d vs %d; first differing round %s" % (len(e_ref), len(e_ours), diverge)
            if best is None:
                failed += 1
                print("FAIL %s: no random_state gives Spinney's sequence (%s)" % (name, first))
            else:
                passed += 1
                print("PASS %s: %d rounds of errors and weights equal to 1e-9%s" % (
                    name, len(e_ours), "" if best == 0 else " (ties broken as with random_state=%d)" % best))
    print("%d passed, %d failed" % (passed, failed))
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
