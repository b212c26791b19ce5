"""Reference multi-label figures from scikit-learn (Debian's python3-sklearn)
for the Go package's differential test. Reads a JSON object {"gold":
[[0/1,...],...], "probs": [[...],...], "thresholds": [...]} on stdin; a
label is predicted when its probability is >= its threshold. Prints, as
JSON: accuracy_score (subset accuracy), hamming_loss,
precision_recall_fscore_support with average micro, macro and None
(zero_division=0), and per label precision_recall_curve and
average_precision_score (null for a label without positives), and the
threshold with the best F1 among the curve's thresholds.
"""
import json
import sys

import numpy as np
from sklearn.metrics import (accuracy_score, average_precision_score,
                             hamming_loss, precision_recall_curve,
                             precision_recall_fscore_support)

d = json.load(sys.stdin)
y = np.array(d["gold"], dtype=int)
probs = np.array(d["probs"], dtype=np.float64)
th = np.array(d["thresholds"], dtype=np.float64)
pred = (probs >= th).astype(int)

out = {"subset_accuracy": accuracy_score(y, pred), "hamming_loss": hamming_loss(y, pred)}
for avg in ("micro", "macro"):
    p, r, f, _ = precision_recall_fscore_support(y, pred, average=avg, zero_division=0)
    out[avg] = {"precision": p, "recall": r, "f1": f}
p, r, f, s = precision_recall_fscore_support(y, pred, average=None, zero_division=0)
out["per_label"] = {"precision": p.tolist(), "recall": r.tolist(), "f1": f.tolist(), "support": s.tolist()}
pr = []
for c in range(y.shape[1]):
    if y[:, c].sum() == 0:
        pr.append(None)
        continue
    prec, rec, thr = precision_recall_curve(y[:, c], probs[:, c])
    f1 = np.where(prec + rec > 0, 2 * prec * rec / np.maximum(prec + rec, 1e-300), 0)[:-1]
    best = int(np.argmax(f1[::-1]))  # ties: the highest threshold
    best = len(f1) - 1 - best
    pr.append({"precision": prec.tolist(), "recall": rec.tolist(), "thresholds": thr.tolist(),
               "ap": average_precision_score(y[:, c], probs[:, c]),
               "best_f1": float(f1[best]), "best_f1_threshold": float(thr[best])})
out["pr"] = pr
json.dump(out, sys.stdout)
