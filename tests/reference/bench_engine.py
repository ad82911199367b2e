#!/usr/bin/env python3
"""Engine benchmark (prints, asserts nothing), at one thread, on the same seeded synthetic
data: ROWS x 28 numbers, a binary outcome from a known non-linear rule with label noise,
80/20 split.
- forest: random forest (100 fully grown trees, sqrt(p) predictors per split; at one thread
  and at all cores) and AdaBoost (500 stumps), Spinney against scikit-learn, with Spinney's
  peak memory beyond reading the file (per cell), the forest's time growth with rows (fitted
  exponent over three sizes) and the breast-cancer data;
- boosting: gradient boosting, logistic loss, 255 bins, 31 leaves best-first and then depth 6
  (no other leaf limit), 200 rounds, learning rate 0.1, L2 1, at least 20 rows per leaf,
  least hessian 0.001: Spinney against LightGBM, XGBoost (hist) and scikit-learn's
  HistGradientBoostingClassifier, each peer in a process of its own, at one thread and at
  all cores (Spinney's boosting runs on one thread either way); time per round, total time,
  test AUC, memory (peak growth beyond holding the data: Spinney's peak minus reading the
  file, a peer's peak after fit() minus before) and the time ratio to the fastest peer at
  the same thread count. Issue 4's size: `scripts/bench boosting 500000`.
Spinney's time is its own fit time (binning included, reading the CSV excluded), as printed
by `spinney fit --json`; the peers' is their fit() call on arrays (their binning included);
peak memory from /usr/bin/time.
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
from sklearn.datasets import load_breast_cancer
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


def spinney(train, test, method, sets, extra=(), threads=1):
    """`spinney fit --json`'s output, with its peak memory in KB as "peak_kb" (NaN unknown)."""
    cmd = [BIN, "fit", train, "--outcome", "outcome", "--method", method, "--score", test, "--json",
           "--threads", str(threads)]
    cmd += list(extra)
    for s in sets:
        cmd += ["--set", s]
    if os.path.exists("/usr/bin/time"):
        cmd = ["/usr/bin/time", "-f", "peak-kb %M"] + cmd
    out = subprocess.run(cmd, capture_output=True, text=True, check=True)
    j = json.loads(out.stdout)
    peak = [int(l.split()[1]) for l in out.stderr.splitlines() if l.startswith("peak-kb")]
    j["peak_kb"] = peak[0] if peak else float("nan")
    return j


def peak_of_reading(path):
    """Peak memory (KB) of reading and summarising the file alone: the raw data's cost."""
    if not os.path.exists("/usr/bin/time"):
        return float("nan")
    out = subprocess.run(["/usr/bin/time", "-f", "peak-kb %M", BIN, "inspect", path], capture_output=True, text=True, check=True)
    return [int(l.split()[1]) for l in out.stderr.splitlines() if l.startswith("peak-kb")][0]


def forest_and_adaboost(train, test, Xtr, Xte, tmp):
    cores = os.cpu_count() or 1
    reading = peak_of_reading(train)
    for label, method, sets, make in [
        ("random forest, 100 trees", "forest", ["trees=100", "seed=1"],
         lambda jobs: RandomForestClassifier(n_estimators=100, max_features="sqrt", n_jobs=jobs, random_state=1)),
        ("AdaBoost, 500 stumps", "adaboost", ["rounds=500"],
         lambda jobs: AdaBoostClassifier(DecisionTreeClassifier(max_depth=1), n_estimators=500, random_state=1)),
    ]:
        for threads in ([1, cores] if method == "forest" and cores > 1 else [1]):
            j = spinney(train, test, method, sets, threads=threads)
            ours_t, ours_acc = j["fit_seconds"], j["scored"]["accuracy"]
            model = make(threads)
            start = time.perf_counter()
            model.fit(Xtr, y[:cut])
            ref_t = time.perf_counter() - start
            ref_acc = model.score(Xte, y[cut:])
            beyond = (j["peak_kb"] - reading) * 1024 / (cut * 28)
            print("%-26s %d thread(s): Spinney %7.2f s, accuracy %.4f | scikit-learn %7.2f s, accuracy %.4f | "
                  "time ratio %.2f | peak %.0f MB, %.2f bytes per cell beyond reading the file" % (
                      label, threads, ours_t, ours_acc, ref_t, ref_acc, ours_t / ref_t, j["peak_kb"] / 1024, beyond))
    # Working memory apart from the model: a one-tree forest holds almost no model.
    one = spinney(train, test, "forest", ["trees=1", "seed=1"])
    print("working memory (a 1-tree forest): peak %.0f MB, %.2f bytes per cell beyond reading the file "
          "(the 100-tree peaks above also hold the fitted trees)" % (
              one["peak_kb"] / 1024, (one["peak_kb"] - reading) * 1024 / (cut * 28)))
    # Time against rows: the exponent b of time = a * rows^b over three sizes (1 = linear).
    sizes = [cut // 4, cut // 2, cut]
    times = []
    for n in sizes:
        part = os.path.join(tmp, "part.csv")
        write(part, X[:n], y[:n])
        times.append(spinney(part, test, "forest", ["trees=20", "seed=1"])["fit_seconds"])
    b = np.polyfit(np.log(sizes), np.log(times), 1)[0]
    print("forest time by rows (20 trees, 1 thread): %s -> exponent %.2f" % (
        ", ".join("%d: %.2f s" % (n, t) for n, t in zip(sizes, times)), b))
    # The breast-cancer data shipped inside scikit-learn, a seeded 80/20 split.
    data = load_breast_cancer()
    Xb, yb = data.data.astype(np.float32), data.target
    tr, te = os.path.join(tmp, "tr.csv"), os.path.join(tmp, "te.csv")
    idx = np.random.default_rng(1).permutation(len(yb))
    a, b_ = idx[:455], idx[455:]
    write(tr, Xb[a], yb[a])
    write(te, Xb[b_], yb[b_])
    j = spinney(tr, te, "forest", ["trees=100", "seed=1"])
    model = RandomForestClassifier(n_estimators=100, max_features="sqrt", n_jobs=1, random_state=1)
    start = time.perf_counter()
    model.fit(Xb[a], yb[a])
    ref_t = time.perf_counter() - start
    print("breast cancer, forest 100 trees, 1 thread: Spinney %.3f s, accuracy %.4f | scikit-learn %.3f s, accuracy %.4f | ratio %.2f" % (
        j["fit_seconds"], j["scored"]["accuracy"], ref_t, model.score(Xb[b_], yb[b_]), j["fit_seconds"] / ref_t))


ROUNDS = 200

# One peer fit in a process of its own (one thread), so its peak memory is its own: prints
# JSON with the fit time, the test AUC, and the peak resident memory before and after fit().
PEER = r"""
import json, resource, sys, time
import numpy as np
from sklearn.metrics import roc_auc_score
name, folder, shape, rounds, threads = sys.argv[1], sys.argv[2], sys.argv[3], int(sys.argv[4]), int(sys.argv[5])
Xtr, ytr, Xte, yte = (np.load("%s/%s.npy" % (folder, k)) for k in ("Xtr", "ytr", "Xte", "yte"))
leaves, depth = (31, None) if shape == "leaves" else (64, 6)
common = dict(learning_rate=0.1, n_jobs=threads)
if name == "lightgbm":
    import lightgbm as lib
    model = lib.LGBMClassifier(n_estimators=rounds, num_leaves=leaves, max_depth=depth or -1, reg_lambda=1.0,
                               min_child_samples=20, min_child_weight=1e-3, max_bin=255, verbose=-1, **common)
elif name == "xgboost":
    import xgboost as lib
    shape_args = dict(grow_policy="lossguide", max_leaves=31, max_depth=0) if depth is None else dict(max_depth=6)
    model = lib.XGBClassifier(n_estimators=rounds, reg_lambda=1.0, min_child_weight=1e-3, tree_method="hist",
                              max_bin=255, **shape_args, **common)
else:
    import sklearn as lib
    from sklearn.ensemble import HistGradientBoostingClassifier
    model = HistGradientBoostingClassifier(max_iter=rounds, learning_rate=0.1, max_leaf_nodes=leaves if depth is None else None,
                                           max_depth=depth, l2_regularization=1.0, min_samples_leaf=20, max_bins=255,
                                           early_stopping=False)
before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
start = time.perf_counter()
model.fit(Xtr, ytr)
seconds = time.perf_counter() - start
after = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
print(json.dumps({"version": lib.__version__, "seconds": seconds, "before_kb": before, "after_kb": after,
                  "auc": roc_auc_score(yte, model.predict_proba(Xte)[:, 1])}))
"""


def boosting(train, test, Xtr, Xte, tmp):
    from sklearn.metrics import roc_auc_score

    for k, v in (("Xtr", Xtr), ("ytr", y[:cut]), ("Xte", Xte), ("yte", y[cut:])):
        np.save(os.path.join(tmp, k + ".npy"), v)
    reading = peak_of_reading(train)
    cores = os.cpu_count() or 1
    for threads in [1, cores] if cores > 1 else [1]:
        for shape, words, ours_shape in [("leaves", "31 leaves (best-first)", ["leaves=31"]),
                                         ("depth", "depth 6 (no other leaf limit)", ["depth=6", "leaves=64"])]:
            j = spinney(train, test, "boosting", ["loss=logistic", "leaf_size=20", "min_hessian=0.001", "l2=1",
                                                  "rounds=%d" % ROUNDS, "learning_rate=0.1", "bins=255"] + ours_shape,
                        ["--predictions"], threads=threads)
            rows_ = [("Spinney", j["fit_seconds"], roc_auc_score(y[cut:], np.array(j["predictions"])[:, 1]),
                      (j["peak_kb"] - reading) / 1024)]
            for name, label in (("lightgbm", "LightGBM"), ("xgboost", "XGBoost (hist)"),
                                ("sklearn", "scikit-learn HistGradientBoosting")):
                out = subprocess.run([sys.executable, "-c", PEER, name, tmp, shape, str(ROUNDS), str(threads)],
                                     capture_output=True, text=True, check=True,
                                     env=dict(os.environ, OMP_NUM_THREADS=str(threads)))
                r = json.loads(out.stdout.strip().splitlines()[-1])
                rows_.append(("%s %s" % (label, r["version"]), r["seconds"], r["auc"],
                              (r["after_kb"] - r["before_kb"]) / 1024))
            fastest = min(t for _, t, _, _ in rows_[1:])
            print("gradient boosting, logistic, %s, 255 bins, %d rounds, learning rate 0.1, %d thread(s)%s "
                  "(memory: peak growth beyond holding the data; load %s):" % (
                      words, ROUNDS, threads, " (Spinney: one)" if threads > 1 else "",
                      " ".join(open("/proc/loadavg").read().split()[:3]) if os.path.exists("/proc/loadavg") else "?"))
            for name, t, auc, mb in rows_:
                print("  %-40s %8.1f ms/round %8.2f s total  test AUC %.4f  memory %6.0f MB  time / fastest peer %.2f" % (
                    name, 1000 * t / ROUNDS, t, auc, mb, t / fastest), flush=True)


print("scikit-learn %s; %d rows x 28, %d to fit, %d to score; %d cores" % (sklearn.__version__, rows, cut, rows - cut, os.cpu_count() or 1))
with tempfile.TemporaryDirectory() as tmp:
    train, test = os.path.join(tmp, "train.csv"), os.path.join(tmp, "test.csv")
    write(train, X[:cut], y[:cut])
    write(test, X[cut:], y[cut:])
    # Read back what the files hold, so both libraries see the same numbers.
    Xtr = np.loadtxt(train, delimiter=",", skiprows=1, usecols=range(28), dtype=np.float32)
    Xte = np.loadtxt(test, delimiter=",", skiprows=1, usecols=range(28), dtype=np.float32)
    if which in ("forest", "all"):
        forest_and_adaboost(train, test, Xtr, Xte, tmp)
    if which in ("boosting", "all"):
        boosting(train, test, Xtr, Xte, tmp)
