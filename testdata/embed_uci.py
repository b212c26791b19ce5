#!/usr/bin/python3
"""Does `convtag embed` help `convtag train`? Stratified k-fold comparison on
the UCI Sentiment Labelled Sentences (Kotzias, Denil, de Freitas and Smyth,
KDD 2015; CC BY 4.0), all three sources joined (3,000 sentences).

For each fold, vectors are learnt by `convtag embed` from the text of the
training portion only (no labels, no test text), then `convtag train` runs
twice on the same training portion with the same seed: once with random
initial vectors and once with --vectors (plus --freeze-vectors with
--static). Each model tags the test fold with `convtag tag`; accuracy is the
share of test sentences whose tag equals the label.

Usage (the data are fetched into testdata/cache/uci by the UCI tests, from
the npm package sentiment@5.0.2):

    go build -o /tmp/convtag ./cmd/convtag
    /usr/bin/python3 testdata/embed_uci.py --convtag /tmp/convtag \
        --data testdata/cache/uci --work /tmp/embed-uci [--folds 10] \
        [--embed-args "--passes 20 --thin-above 1e-4"] [--static]

About 20 s per fold on 2 cores.

Measured here (10 folds, seed 1, d=128, embed --min-seen 2 --passes 20, the
training portion's ~27k tokens of text, train defaults otherwise):
    --thin-above 1e-4 (default)  random 0.7937, vectors 0.7847, -0.9 +- 3.2 points, 4/10 folds better
    --thin-above 1e-3            random 0.7937, vectors 0.8157, +2.2 +- 2.4 points, 9/10 folds better
    --thin-above 1e-3 --static   random 0.7937, vectors 0.6883, -10.5 +- 3.0 points, 0/10 folds better
(+- is the sd of the paired fold differences.) On so little text the
default threshold discards most frequent words and the vectors collapse
towards one direction (mean pairwise cosine 0.999; gensim's Word2Vec with the
same settings gives 0.997), so 1e-3 suits small inputs; frozen vectors from
this little text are far worse than learnt ones.
"""
import argparse
import json
import os
import random
import shlex
import statistics
import subprocess
import sys
import time


def run(cmd):
    p = subprocess.run(cmd, capture_output=True, text=True)
    if p.returncode != 0:
        sys.exit("%s: exit %d\n%s" % (" ".join(cmd), p.returncode, p.stderr))
    return p


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--convtag", required=True)
    ap.add_argument("--data", required=True)
    ap.add_argument("--work", required=True)
    ap.add_argument("--folds", type=int, default=10)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--vector-size", type=int, default=128)
    ap.add_argument("--embed-args", default="--passes 20")
    ap.add_argument("--static", action="store_true", help="freeze the vectors in training")
    a = ap.parse_args()
    os.makedirs(a.work, exist_ok=True)

    recs = []
    for src in ("amazon", "imdb", "yelp"):
        with open(os.path.join(a.data, src + ".jsonl")) as f:
            recs += [json.loads(l) for l in f if l.strip()]
    # Stratified folds: shuffle each label's records, deal them round-robin.
    rng = random.Random(a.seed)
    fold = [0] * len(recs)
    for label in sorted({r["label"] for r in recs}):
        idx = [i for i, r in enumerate(recs) if r["label"] == label]
        rng.shuffle(idx)
        for j, i in enumerate(idx):
            fold[i] = j % a.folds

    def write(path, rows):
        with open(path, "w") as f:
            for r in rows:
                f.write(json.dumps({"text": r["text"], "label": r["label"]}) + "\n")

    def accuracy(model, test_path, test):
        out = run([a.convtag, "tag", "-m", model, test_path]).stdout.splitlines()
        assert len(out) == len(test), (len(out), len(test))
        return sum(json.loads(o)["tag"] == r["label"] for o, r in zip(out, test)) / len(test)

    rand_acc, vec_acc = [], []
    start = time.time()
    for k in range(a.folds):
        train = [r for r, f in zip(recs, fold) if f != k]
        test = [r for r, f in zip(recs, fold) if f == k]
        tr, te = os.path.join(a.work, "train%d.jsonl" % k), os.path.join(a.work, "test%d.jsonl" % k)
        write(tr, train)
        write(te, test)
        vec = os.path.join(a.work, "vec%d.txt" % k)
        run([a.convtag, "embed", "-o", vec, "--text-key", "text", "--vector-size", str(a.dim), "--min-seen", "2",
             "-j", "1", "--seed", str(a.seed), "-q"] + shlex.split(a.embed_args) + [tr])
        common = ["--seed", str(a.seed), "-j", "2", "-q", "--vector-size", str(a.dim)]
        m_rand, m_vec = os.path.join(a.work, "rand%d.st" % k), os.path.join(a.work, "vec%d.st" % k)
        run([a.convtag, "train", "-o", m_rand] + common + [tr])
        vflags = ["--vectors", vec] + (["--freeze-vectors"] if a.static else [])
        run([a.convtag, "train", "-o", m_vec] + ["--seed", str(a.seed), "-j", "2", "-q"] + vflags + [tr])
        ra, va = accuracy(m_rand, te, test), accuracy(m_vec, te, test)
        rand_acc.append(ra)
        vec_acc.append(va)
        print("fold %2d: random %.4f  embed vectors %.4f  difference %+.4f" % (k + 1, ra, va, va - ra), flush=True)
    diffs = [v - r for v, r in zip(vec_acc, rand_acc)]
    sd = lambda x: statistics.stdev(x) if len(x) > 1 else 0.0
    print("%d-fold mean: random %.4f +- %.4f, embed vectors %.4f +- %.4f, difference %+.4f +- %.4f (paired, sd of the fold differences); %d of %d folds better; %.0f s"
          % (a.folds, statistics.mean(rand_acc), sd(rand_acc), statistics.mean(vec_acc), sd(vec_acc),
             statistics.mean(diffs), sd(diffs), sum(d > 0 for d in diffs), a.folds, time.time() - start))


if __name__ == "__main__":
    main()
