#!/usr/bin/python3
"""torch_bench.py: inference speed of the benchmark network in PyTorch.

The route a user would otherwise take: the same network as convtag's
(embedding -> conv1d over right-zero-padded input -> ReLU -> max over time
-> linear -> softmax; see the "Network" section of the internal contract),
run by PyTorch on ids that are already tokenized, so the figure leaves out
JSON parsing and tokenizing and is generous to PyTorch.

Run with Debian's python (python3-torch):

    /usr/bin/python3 testdata/bench/torch_bench.py            # 1,000,000 sentences
    /usr/bin/python3 testdata/bench/torch_bench.py --quick    # 100,000

Weights are random (speed does not depend on them). Sentence lengths are
uniform in 5..40 tokens, as in testdata/bench/genlog.go; ids are uniform
over the vocabulary. Batches of 64 are padded on the right to the longest
sentence in the batch plus (width - 1) zeros, as a PyTorch user would do;
the batches are built before the clock starts. cpu_seconds (user + system
of this process) shows how much of the wall time the shared machine really
gave to it. Prints one line of
"key=value" pairs; run.sh reads sentences_per_s from it.
"""

import argparse
import sys
import time

import torch
import torch.nn as nn
import torch.nn.functional as F


class Net(nn.Module):
    """Embedding, one Conv1d per width, ReLU, max over time, linear, softmax."""

    def __init__(self, rows, dim, widths, filters, classes):
        super().__init__()
        self.widths = widths
        self.embedding = nn.Embedding(rows, dim, padding_idx=0)
        self.convs = nn.ModuleList(nn.Conv1d(dim, filters, w) for w in widths)
        self.output = nn.Linear(filters * len(widths), classes)

    def forward(self, ids):
        x = self.embedding(ids).transpose(1, 2)  # [batch, d, n]
        feats = []
        for w, conv in zip(self.widths, self.convs):
            pre = conv(F.pad(x, (0, w - 1)))  # n windows, right zero padding
            feats.append(F.relu(pre).amax(dim=2))
        return F.softmax(self.output(torch.cat(feats, dim=1)), dim=1)


def main(argv):
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("-n", type=int, default=1_000_000, help="sentences to score")
    ap.add_argument("--quick", action="store_true", help="score 100,000 sentences")
    ap.add_argument("--dim", type=int, default=300)
    ap.add_argument("--widths", default="3,4,5")
    ap.add_argument("--filters", type=int, default=100)
    ap.add_argument("--vocab", type=int, default=50_000, help="known words")
    ap.add_argument("--buckets", type=int, default=10_000, help="rows for unknown words")
    ap.add_argument("--classes", type=int, default=5)
    ap.add_argument("--batch", type=int, default=64)
    ap.add_argument("--threads", type=int, default=2)
    ap.add_argument("--min-len", type=int, default=5)
    ap.add_argument("--max-len", type=int, default=40)
    ap.add_argument("--seed", type=int, default=1)
    a = ap.parse_args(argv)
    if a.quick:
        a.n = 100_000
    widths = [int(w) for w in a.widths.split(",")]
    if a.n < 1 or a.batch < 1 or not 1 <= a.min_len <= a.max_len:
        ap.error("need -n >= 1, --batch >= 1 and 1 <= --min-len <= --max-len")

    torch.set_num_threads(a.threads)
    torch.manual_seed(a.seed)
    rows = 1 + a.vocab + a.buckets  # row 0 is padding
    net = Net(rows, a.dim, widths, a.filters, a.classes).eval()

    g = torch.Generator().manual_seed(a.seed)
    lens = torch.randint(a.min_len, a.max_len + 1, (a.n,), generator=g)
    batches = []
    for start in range(0, a.n, a.batch):
        bl = lens[start:start + a.batch]
        ids = torch.randint(1, 1 + a.vocab, (len(bl), int(bl.max())), generator=g)
        ids[torch.arange(ids.shape[1]) >= bl[:, None]] = 0
        batches.append(ids)
    tokens = int(lens.sum())

    with torch.inference_mode():
        for ids in batches[:20]:  # warm-up: allocator, thread pool
            net(ids)
        t0, c0 = time.perf_counter(), time.process_time()
        checksum = 0.0
        for ids in batches:
            checksum += float(net(ids)[:, 0].sum())
        dt, cpu = time.perf_counter() - t0, time.process_time() - c0

    print(f"torch={torch.__version__} threads={a.threads} dim={a.dim} widths={a.widths} "
          f"filters={a.filters} rows={rows} batch={a.batch} sentences={a.n} tokens={tokens} "
          f"seconds={dt:.3f} cpu_seconds={cpu:.3f} sentences_per_s={a.n / dt:.0f} tokens_per_s={tokens / dt:.0f} "
          f"checksum={checksum:.3f}")


if __name__ == "__main__":
    main(sys.argv[1:])
