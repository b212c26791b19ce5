"""Reference figures from scikit-learn (Debian's python3-sklearn) for the
Go package's differential test. Reads a JSON object {"labels": k, "gold":
[...], "probs": [[...], ...]} on stdin and prints the same figures, computed
by scikit-learn, as JSON on stdout.
"""
import json
import sys

import numpy as np
from sklearn.calibration import calibration_curve
from sklearn.metrics import (accuracy_score, average_precision_score,
                             confusion_matrix, f1_score,
                             precision_recall_curve,
                             precision_recall_fscore_support)

d = json.load(sys.stdin)
k = d["labels"]
gold = np.array(d["gold"])
probs = np.array(d["probs"], dtype=np.float64)
# Ties go to the lowest index, as numpy's argmax does.
pred = probs.argmax(axis=1)
conf = probs.max(axis=1)
labels = list(range(k))

p, r, f, s = precision_recall_fscore_support(gold, pred, labels=labels, zero_division=0)
out = {
    "accuracy": accuracy_score(gold, pred),
    "macro_f1": f1_score(gold, pred, average="macro", zero_division=0),
    "precision": p.tolist(),
    "recall": r.tolist(),
    "f1": f.tolist(),
    "support": s.tolist(),
    "confusion": confusion_matrix(gold, pred, labels=labels).tolist(),
}

correct = (pred == gold).astype(int)
prob_true, prob_pred = calibration_curve(correct, conf, n_bins=10, strategy="uniform")
out["bin_accuracy"] = prob_true.tolist()
out["bin_confidence"] = prob_pred.tolist()

pr = []
for c in labels:
    y = (gold == c).astype(int)
    if y.sum() == 0:
        pr.append(None)
        continue
    prec, rec, thr = precision_recall_curve(y, probs[:, c])
    pr.append({
        "precision": prec.tolist(),
        "recall": rec.tolist(),
        "thresholds": thr.tolist(),
        "ap": average_precision_score(y, probs[:, c]),
    })
out["pr"] = pr
json.dump(out, sys.stdout)
