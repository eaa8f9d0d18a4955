#!/usr/bin/python3
"""Reference classification metrics for nn/metrics_test.go, computed with
numpy (Debian python3-numpy 1.24.2) from their definitions: confusion matrix
C[t, p]; precision = diag / column sum, recall = diag / row sum, zero when
the denominator is zero; F1 = 2PR/(P+R) (0 when P+R = 0); accuracy =
trace / total; balanced accuracy = mean recall over classes that occur in the truth;
macro F1 = mean F1. Writes nn/testdata/metrics_golden.json.
Run from the repository root.
"""
import json
import numpy as np

rng = np.random.default_rng(7)
L, N = 5, 200
labels = rng.integers(0, L, N)
# predictions right 60 % of the time, else uniform; class 4 never predicted
preds = np.where(rng.random(N) < 0.6, labels, rng.integers(0, L, N))
preds = np.where(preds == 4, 3, preds)
C = np.zeros((L, L), dtype=np.int64)
np.add.at(C, (labels, preds), 1)
diag = np.diag(C).astype(float)
col, row = C.sum(axis=0), C.sum(axis=1)
with np.errstate(divide="ignore", invalid="ignore"):
    precision = np.where(col > 0, diag / col, 0.0)
    recall = np.where(row > 0, diag / row, 0.0)
    f1 = np.where(precision + recall > 0, 2 * precision * recall / (precision + recall), 0.0)
doc = {
    "numpy": np.__version__, "classes": L, "labels": labels.tolist(), "preds": preds.tolist(),
    "confusion": C.tolist(), "accuracy": float(diag.sum() / N),
    "balanced_accuracy": float(recall[row > 0].mean()), "macro_f1": float(f1.mean()),
    "precision": precision.tolist(), "recall": recall.tolist(), "f1": f1.tolist(),
}
with open("nn/testdata/metrics_golden.json", "w") as f:
    json.dump(doc, f, indent=1)
print("accuracy", doc["accuracy"], "balanced", doc["balanced_accuracy"], "macro F1", doc["macro_f1"])
