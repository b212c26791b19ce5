#!/usr/bin/python3
"""Reference for model/linear: scikit-learn's tf-idf and linear models.

Reads one JSON request on stdin and writes one JSON answer on stdout.
Texts arrive as token lists (the tokens the Go side sees); the vectorizer
joins adjacent tokens into bigrams itself, with its own separator (a space).

Request keys:
  docs, y          the fitting set (vocabulary, idf and classifier)
  eval             texts to transform and predict
  max_features     optional, TfidfVectorizer's max_features
  C                optional: fit LogisticRegression(C, multinomial, lbfgs,
                   tol 1e-8, max_iter 10000) and return "probs" on eval
  grid, dev, dev_y optional: fit one such model per C, return
                   "dev_accuracy", the chosen C ("chosen", highest dev
                   accuracy, ties to the smaller C) and its predictions on
                   eval ("chosen_pred")
  baselines        optional: predictions on eval of LinearSVC() and
                   LogisticRegression() with their defaults ("svc_pred",
                   "lr_pred")
"""
import json
import sys

import numpy as np
from sklearn.feature_extraction.text import TfidfVectorizer
from sklearn.linear_model import LogisticRegression
from sklearn.svm import LinearSVC


def identity(x):
    return x


def rows(m):
    m = m.tocsr()
    m.sort_indices()
    out = []
    for i in range(m.shape[0]):
        a, b = m.indptr[i], m.indptr[i + 1]
        out.append([[int(j), float(v)] for j, v in zip(m.indices[a:b], m.data[a:b])])
    return out


def multinomial(c):
    return LogisticRegression(C=c, solver="lbfgs", tol=1e-8, max_iter=10000,
                              multi_class="multinomial")


def main():
    req = json.load(sys.stdin)
    vec = TfidfVectorizer(analyzer="word", tokenizer=identity, preprocessor=identity,
                          lowercase=False, token_pattern=None, ngram_range=(1, 2),
                          max_features=req.get("max_features"))
    x = vec.fit_transform(req["docs"])
    y = np.array(req["y"])
    ev = vec.transform(req["eval"])
    out = {
        "features": [str(f) for f in vec.get_feature_names_out()],
        "idf": [float(v) for v in vec.idf_],
        "docs_tfidf": rows(x),
        "eval_tfidf": rows(ev),
    }
    if req.get("C") is not None:
        m = multinomial(req["C"]).fit(x, y)
        out["probs"] = m.predict_proba(ev).tolist()
        out["classes"] = m.classes_.tolist()
    if req.get("grid"):
        dev = vec.transform(req["dev"])
        dev_y = np.array(req["dev_y"])
        accs, models = [], []
        for c in req["grid"]:
            m = multinomial(c).fit(x, y)
            accs.append(float(np.mean(m.predict(dev) == dev_y)))
            models.append(m)
        best = 0
        for k, c in enumerate(req["grid"]):
            if accs[k] > accs[best] or (accs[k] == accs[best] and c < req["grid"][best]):
                best = k
        out["dev_accuracy"] = accs
        out["chosen"] = req["grid"][best]
        out["chosen_pred"] = models[best].predict(ev).tolist()
    if req.get("baselines"):
        out["svc_pred"] = LinearSVC().fit(x, y).predict(ev).tolist()
        out["lr_pred"] = LogisticRegression().fit(x, y).predict(ev).tolist()
    json.dump(out, sys.stdout)


if __name__ == "__main__":
    main()
