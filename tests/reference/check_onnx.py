#!/usr/bin/env python3
"""ONNX export against onnxruntime (PyPI): `spinney export-onnx` writes a saved model as ONNX;
onnxruntime scores the same records, written into the input as the model's metadata entry
`spinney.predictors` says, and must give `spinney predict`'s probabilities or numbers.

References (versions printed below):
- onnx.checker.check_model: the file is a valid ONNX model (ONNX IR and operator specs);
- onnxruntime.InferenceSession: probabilities and numbers equal `spinney predict`'s to 1e-12
  (both compute in double precision; the tolerance only allows a different order of the
  last additions or of exp), and class_index equals the predicted class.

Data: invented on the spot (seeded), with number, yes/no, category and date predictors,
missing values in each, a rare category level (pooled in training) and labels the training
file never had in the scored file. Every method and loss is covered: single tree, bagging,
random forest, AdaBoost (two and three classes), gradient boosting with the logistic,
softmax, squared-error, absolute-error and Poisson losses.

Prints "PASS name" / "FAIL name: reason" per check and "N passed, N failed" last.
"""
import csv
import datetime
import json
import math
import os
import random
import subprocess
import tempfile

import numpy as np
import onnx
import onnxruntime as ort

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


def run(args):
    out = subprocess.run([BIN] + args, capture_output=True, text=True, timeout=300)
    if out.returncode != 0:
        raise RuntimeError(out.stderr.strip())
    return out.stdout


def make_rows(n, seed, unseen=False):
    """Invented records: outcome columns for every kind of fit, and mixed predictors."""
    rnd = random.Random(seed)
    wards = ["Ash", "Birch", "Cedar", "Elm", "Fir"] + (["Oak", "Yew"] if unseen else [])
    rows = []
    for i in range(n):
        age = rnd.uniform(20, 90)
        dose = rnd.gauss(5, 2)
        ward = rnd.choice(wards) if rnd.random() > 0.02 else "Larch"  # Larch: rare, pooled
        smoker = rnd.choice(["yes", "no"])
        day = datetime.date(2020, 1, 1) + datetime.timedelta(days=rnd.randrange(0, 1500))
        risk = 0.04 * (age - 55) + 0.5 * (dose - 5) + (0.8 if ward in ("Cedar", "Elm") else 0) + (0.7 if smoker == "yes" else 0)
        two = "sick" if risk + rnd.gauss(0, 1) > 0.3 else "well"
        three = ["low", "mid", "high"][min(2, max(0, int((risk + rnd.gauss(0, 1) + 1.5) / 1.3)))]
        number = 10 + 3 * risk + rnd.gauss(0, 1)
        count = np.random.default_rng(seed * 100003 + i).poisson(math.exp(0.3 * risk + 0.5))
        cells = {"age": "%.3f" % age, "dose": "%.4f" % dose, "ward": ward, "smoker": smoker,
                 "admitted": day.isoformat()}
        # Missing values in every predictor.
        for name in cells:
            if rnd.random() < 0.06:
                cells[name] = ""
        cells.update({"two": two, "three": three, "number": "%.4f" % number, "count": str(count)})
        rows.append(cells)
    return rows


def write(path, rows):
    with open(path, "w", newline="") as f:
        w = csv.DictWriter(f, fieldnames=list(rows[0].keys()))
        w.writeheader()
        w.writerows(rows)


def encode(rows, predictors):
    """The input tensor as the metadata entry spinney.predictors describes it."""
    X = np.full((len(rows), len(predictors)), np.nan)
    for j, p in enumerate(predictors):
        for i, row in enumerate(rows):
            text = row[p["name"]]
            if text == "":
                continue
            if "levels" in p:
                X[i, j] = p["levels"].index(text) if text in p["levels"] else -1
            elif "labels" in p:
                X[i, j] = [l.lower() for l in p["labels"]].index(text.lower())
            elif p["kind"] == "date":
                X[i, j] = (datetime.date.fromisoformat(text) - datetime.date(1970, 1, 1)).days
            else:
                X[i, j] = float(text)
    return X


def check(tmp, name, outcome, fit_args, train, new):
    model, onnx_path = os.path.join(tmp, name + ".json"), os.path.join(tmp, name + ".onnx")
    run(["fit", train, "--outcome", outcome, "--predictors", "age,dose,ward,smoker,admitted",
         "--save-model", model] + fit_args)
    run(["export-onnx", model, onnx_path])
    proto = onnx.load(onnx_path)
    try:
        onnx.checker.check_model(proto)
    except Exception as e:  # noqa: BLE001 (any checker complaint is a failure)
        return report(name, "onnx.checker: %s" % e)
    meta = {p.key: p.value for p in proto.metadata_props}
    predictors = json.loads(meta["spinney.predictors"])
    rows = list(csv.DictReader(open(new)))
    session = ort.InferenceSession(onnx_path, providers=["CPUExecutionProvider"])
    outputs = session.run(None, {"predictors": encode(rows, predictors)})
    got = dict(zip([o.name for o in session.get_outputs()], outputs))
    expected = list(csv.DictReader(run(["predict", model, new]).splitlines()))
    if "spinney.classes" in meta:
        classes = json.loads(meta["spinney.classes"])
        want = np.array([[float(r["probability_" + c]) for c in classes] for r in expected])
        diff = np.abs(got["probabilities"] - want).max()
        labels = [classes[k] for k in got["class_index"]]
        wrong = sum(a != r["predicted_" + outcome] for a, r in zip(labels, expected))
        if diff > 1e-12 or wrong:
            return report(name, "largest probability difference %.3g, %d classes differ" % (diff, wrong))
    else:
        want = np.array([float(r["predicted_" + outcome]) for r in expected])
        diff = np.abs(got["prediction"][:, 0] - want).max() / max(1.0, np.abs(want).max())
        if diff > 1e-12:
            return report(name, "largest relative difference %.3g" % diff)
    report("%s: %d records, onnxruntime equals spinney predict to 1e-12" % (name, len(rows)), None)


def main():
    print("onnx %s, onnxruntime %s" % (onnx.__version__, ort.__version__))
    with tempfile.TemporaryDirectory() as tmp:
        train, new = os.path.join(tmp, "train.csv"), os.path.join(tmp, "new.csv")
        write(train, make_rows(600, 1))
        write(new, make_rows(400, 2, unseen=True))
        cases = [
            ("tree, two classes", "two", ["--method", "tree", "--set", "depth=6"]),
            ("forest, two classes", "two", ["--method", "forest", "--set", "trees=30"]),
            ("forest, three classes", "three", ["--method", "forest", "--set", "trees=20"]),
            ("bagging, number", "number", ["--method", "bagging", "--set", "trees=15"]),
            ("tree, number", "number", ["--method", "tree", "--set", "leaves=20"]),
            ("AdaBoost, two classes", "two", ["--method", "adaboost", "--set", "rounds=40"]),
            ("AdaBoost, three classes, depth 2", "three", ["--method", "adaboost", "--set", "rounds=30", "--set", "depth=2"]),
            ("boosting, logistic", "two", ["--method", "boosting", "--set", "rounds=40"]),
            ("boosting, softmax", "three", ["--method", "boosting", "--set", "rounds=25"]),
            ("boosting, squared error", "number", ["--method", "boosting", "--set", "rounds=30"]),
            ("boosting, absolute error", "number", ["--method", "boosting", "--set", "rounds=20", "--set", "loss=absolute_error"]),
            ("boosting, Poisson", "count", ["--method", "boosting", "--set", "rounds=30", "--set", "loss=poisson"]),
        ]
        for name, outcome, args in cases:
            try:
                check(tmp, name, outcome, args, train, new)
            except Exception as e:  # noqa: BLE001 (report and go on)
                report(name, str(e)[-600:])
    print("%d passed, %d failed" % (passed, failed))


if __name__ == "__main__":
    main()
