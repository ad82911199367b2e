#!/usr/bin/env python3
"""Engine benchmark (prints, asserts nothing): random forest (100 fully grown trees, sqrt(p)
predictors per split) and AdaBoost (500 stumps), Spinney against scikit-learn at one
thread and (forest) at all cores, on the same seeded synthetic data: ROWS x 28 numbers, a
binary outcome from a known non-linear rule with label noise, 80/20 split; then the time's
growth with rows (fitted exponent over three sizes) and the breast-cancer data. Spinney's
time is its own fit time (binning included, reading the CSV excluded), as printed by
`spinney fit --json`; peak memory from /usr/bin/time, compared with reading the file alone.
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
from sklearn.datasets import load_breast_cancer
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


def spinney(train, test, method, sets, threads=1):
    """Spinney's fit time, scored accuracy and peak memory (KB, from /usr/bin/time)."""
    cmd = [BIN, "fit", train, "--outcome", "outcome", "--method", method, "--score", test, "--json",
           "--threads", str(threads)]
    for s in sets:
        cmd += ["--set", s]
    if os.path.exists("/usr/bin/time"):
        cmd = ["/usr/bin/time", "-f", "peak-kb %M"] + cmd
    out = subprocess.run(cmd, capture_output=True, text=True, check=True)
    j = json.loads(out.stdout)
    peak = [int(l.split()[1]) for l in out.stderr.splitlines() if l.startswith("peak-kb")]
    return j["fit_seconds"], j["scored"]["accuracy"], (peak[0] if peak else float("nan"))


def peak_of_reading(path):
    """Peak memory (KB) of reading and summarising the file alone: the raw data's cost."""
    if not os.path.exists("/usr/bin/time"):
        return float("nan")
    out = subprocess.run(["/usr/bin/time", "-f", "peak-kb %M", BIN, "inspect", path], capture_output=True, text=True, check=True)
    return [int(l.split()[1]) for l in out.stderr.splitlines() if l.startswith("peak-kb")][0]


cores = os.cpu_count() or 1
print("scikit-learn %s; %d rows x 28, %d to fit, %d to score; %d cores" % (sklearn.__version__, rows, cut, rows - cut, cores))
with tempfile.TemporaryDirectory() as tmp:
    train, test = os.path.join(tmp, "train.csv"), os.path.join(tmp, "test.csv")
    write(train, X[:cut], y[:cut])
    write(test, X[cut:], y[cut:])
    # Read back what the files hold, so both libraries see the same numbers.
    Xtr = np.loadtxt(train, delimiter=",", skiprows=1, usecols=range(28), dtype=np.float32)
    Xte = np.loadtxt(test, delimiter=",", skiprows=1, usecols=range(28), dtype=np.float32)
    reading = peak_of_reading(train)
    for label, method, sets, make in [
        ("random forest, 100 trees", "forest", ["trees=100", "seed=1"],
         lambda jobs: RandomForestClassifier(n_estimators=100, max_features="sqrt", n_jobs=jobs, random_state=1)),
        ("AdaBoost, 500 stumps", "adaboost", ["rounds=500"],
         lambda jobs: AdaBoostClassifier(DecisionTreeClassifier(max_depth=1), n_estimators=500, random_state=1)),
    ]:
        for threads in ([1, cores] if method == "forest" and cores > 1 else [1]):
            ours_t, ours_acc, peak = spinney(train, test, method, sets, threads)
            model = make(threads)
            start = time.perf_counter()
            model.fit(Xtr, y[:cut])
            ref_t = time.perf_counter() - start
            ref_acc = model.score(Xte, y[cut:])
            beyond = (peak - reading) * 1024 / (cut * 28)
            print("%-26s %d thread(s): Spinney %7.2f s, accuracy %.4f | scikit-learn %7.2f s, accuracy %.4f | "
                  "time ratio %.2f | peak %.0f MB, %.2f bytes per cell beyond reading the file" % (
                      label, threads, ours_t, ours_acc, ref_t, ref_acc, ours_t / ref_t, peak / 1024, beyond))
    # Time against rows: the exponent b of time = a * rows^b over three sizes (1 = linear).
    sizes = [cut // 4, cut // 2, cut]
    times = []
    for n in sizes:
        part = os.path.join(tmp, "part.csv")
        write(part, X[:n], y[:n])
        times.append(spinney(part, test, "forest", ["trees=20", "seed=1"])[0])
    b = np.polyfit(np.log(sizes), np.log(times), 1)[0]
    print("forest time by rows (20 trees, 1 thread): %s -> exponent %.2f" % (
        ", ".join("%d: %.2f s" % (n, t) for n, t in zip(sizes, times)), b))

# The breast-cancer data shipped inside scikit-learn, 5-fold, same settings.
data = load_breast_cancer()
Xb, yb = data.data.astype(np.float32), data.target
with tempfile.TemporaryDirectory() as tmp:
    tr, te = os.path.join(tmp, "tr.csv"), os.path.join(tmp, "te.csv")
    idx = np.random.default_rng(1).permutation(len(yb))
    a, b_ = idx[:455], idx[455:]
    write(tr, Xb[a], yb[a])
    write(te, Xb[b_], yb[b_])
    ours_t, ours_acc, _ = spinney(tr, te, "forest", ["trees=100", "seed=1"])
    model = RandomForestClassifier(n_estimators=100, max_features="sqrt", n_jobs=1, random_state=1)
    start = time.perf_counter()
    model.fit(Xb[a], yb[a])
    ref_t = time.perf_counter() - start
    print("breast cancer, forest 100 trees, 1 thread: Spinney %.3f s, accuracy %.4f | scikit-learn %.3f s, accuracy %.4f | ratio %.2f" % (
        ours_t, ours_acc, ref_t, model.score(Xb[b_], yb[b_]), ours_t / ref_t))
