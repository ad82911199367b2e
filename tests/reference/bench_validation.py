#!/usr/bin/env python3
"""Benchmark (figures printed, nothing asserted): `spinney evaluate` with 5-fold
cross-validation of a 300-tree random forest on generated data (ROWS x 30 numbers, a
two-class outcome from a logistic model of 6 of them), on one thread and on every core,
without and with bootstrap intervals of the metrics, and the largest run's peak resident
memory; then a 60-tree forest's 5-fold CV of a number outcome, and 5-fold CVs of the other
methods (bagging, AdaBoost, gradient boosting, one tree) on the two-class data, one thread
each (no targets: tracked, since a method no benchmark times can slow down unseen). Target (tracker
issue 5): under 10 s on one core for 50,000 rows. Usage: bench_validation.py [ROWS] [RUNS]:
each setting is run RUNS times (default 1), alternating, and the best and the median are
printed, since one run on a shared machine can be 20% off either way."""
import json
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time

import numpy as np

BIN = os.environ.get("SPINNEY_BIN", os.path.join(os.path.dirname(__file__), "..", "..", "target", "release", "spinney"))


def main():
    rows = int(sys.argv[1]) if len(sys.argv) > 1 else 50_000
    runs = int(sys.argv[2]) if len(sys.argv) > 2 else 1
    rng = np.random.default_rng(0)
    X = rng.normal(size=(rows, 30))
    eta = X[:, :6] @ np.array([1.0, -0.8, 0.6, 0.5, -0.4, 0.3]) - 1.0
    y = (rng.random(rows) < 1 / (1 + np.exp(-eta))).astype(int)
    cores = os.cpu_count() or 1
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "bench.csv")
        with open(path, "w") as f:
            f.write(",".join(["x%d" % j for j in range(30)] + ["y"]) + "\n")
            for row, t in zip(X, y):
                f.write(",".join("%.6g" % v for v in row) + ",%d\n" % t)
        print("5-fold CV, 300-tree forest, %d x 30, %d core(s) on this machine" % (rows, cores))
        settings = [(1, 0), (cores, 0), (cores, 1000)]
        seconds = {s: [] for s in settings}
        walls = {s: [] for s in settings}
        auc = {}
        for _ in range(runs):
            for threads, resamples in settings:
                start = time.perf_counter()
                out = subprocess.run([BIN, "evaluate", path, "--outcome", "y", "--method", "forest",
                                      "--set", "trees=300", "--validate", "folds:5", "--threads", str(threads),
                                      "--resamples", str(resamples), "--json"],
                                     capture_output=True, text=True, check=True)
                walls[(threads, resamples)].append(time.perf_counter() - start)
                report = json.loads(out.stdout)
                seconds[(threads, resamples)].append(report["seconds"])
                auc[(threads, resamples)] = report["metrics"]["auc"]["value"]
        for threads, resamples in settings:
            s, w = seconds[(threads, resamples)], walls[(threads, resamples)]
            spread = "" if runs == 1 else " (best of %d; median %.2f s)" % (runs, statistics.median(s))
            print("  threads %d, interval resamples %4d: validation %.2f s%s, wall with reading %.2f s; AUC %.4f"
                  % (threads, resamples, min(s), spread, min(w), auc[(threads, resamples)]))
        # ru_maxrss of children: the largest peak of any run so far, in KB on Linux.
        peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024
        print("  peak resident memory of the largest run: %.0f MB" % peak)
        # A number outcome (the same linear part plus noise): trees grown to single values are
        # several times a two-class tree, so 60 trees, one thread (no target; tracked).
        numbers = os.path.join(tmp, "numbers.csv")
        noisy = eta + rng.normal(size=rows)
        with open(numbers, "w") as f:
            f.write(",".join(["x%d" % j for j in range(30)] + ["y"]) + "\n")
            for row, t in zip(X, noisy):
                f.write(",".join("%.6g" % v for v in row) + ",%.6g\n" % t)
        taken, rmse = [], None
        for _ in range(runs):
            out = subprocess.run([BIN, "evaluate", numbers, "--outcome", "y", "--method", "forest",
                                  "--set", "trees=60", "--validate", "folds:5", "--threads", "1",
                                  "--resamples", "0", "--json"],
                                 capture_output=True, text=True, check=True)
            report = json.loads(out.stdout)
            taken.append(report["seconds"])
            rmse = report["metrics"]["rmse"]["value"]
        spread = "" if runs == 1 else " (best of %d; median %.2f s)" % (runs, statistics.median(taken))
        print("number outcome, 5-fold CV, 60-tree forest, 1 thread: validation %.2f s%s; RMSE %.4f"
              % (min(taken), spread, rmse))
        print("other methods, 5-fold CV, 1 thread, the two-class data:")
        for method, sets in [("bagging", ["trees=30"]), ("adaboost", []), ("boosting", []), ("tree", [])]:
            taken, auc = [], None
            for _ in range(runs):
                args = [BIN, "evaluate", path, "--outcome", "y", "--method", method,
                        "--validate", "folds:5", "--threads", "1", "--resamples", "0", "--json"]
                for s in sets:
                    args += ["--set", s]
                report = json.loads(subprocess.run(args, capture_output=True, text=True, check=True).stdout)
                taken.append(report["seconds"])
                auc = report["metrics"]["auc"]["value"]
            spread = "" if runs == 1 else " (best of %d; median %.2f s)" % (runs, statistics.median(taken))
            label = method + ("" if not sets else " (" + ", ".join(sets) + ")")
            print("  %-20s validation %.2f s%s; AUC %.4f" % (label, min(taken), spread, auc))


if __name__ == "__main__":
    main()
