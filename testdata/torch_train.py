"""Reference trainer: convtag's network and training recipe in PyTorch.

Reads a JSON file (argv[1]) with the recipe (dim, widths, filters, epochs,
patience, batch, dropout, max_norm, optimizer "adadelta" or "adam", lr,
seed, labels, threads) and folds, each with "rows" (embedding rows) and
"train", "dev", "test" lists of {"rows": [...], "label": k} (the token rows
are computed by convtag, so both sides see the same tokens and vocabulary).
For each fold it trains from PyTorch's own seeded initialisation (embedding
uniform in [-0.25, 0.25] with row 0 as padding, torch's default Conv1d and
Linear initialisation), shuffling each epoch, in mini-batches, with dropout
on the pooled features, max-norm on the output weight rows after each step,
and early stopping on dev accuracy (keeping the best epoch; patience < 0
means never stop early), then scores the test list. The embedding is
updated lazily (only rows in the batch): torch.optim.SparseAdam for Adam,
and the same Adadelta arithmetic as torch.optim.Adadelta restricted to the
batch's rows for Adadelta; every other tensor uses torch.optim.Adadelta or
torch.optim.Adam. Prints JSON: per-fold test accuracy, epochs run, and the
training wall time in seconds.
"""
import copy
import json
import sys
import time

import torch
import torch.nn as nn
import torch.nn.functional as F


class Net(nn.Module):
    def __init__(self, rows, d, widths, nf, classes, sparse):
        super().__init__()
        self.widths = widths
        self.emb = nn.Embedding(rows, d, padding_idx=0, sparse=sparse)
        with torch.no_grad():
            nn.init.uniform_(self.emb.weight, -0.25, 0.25)
            self.emb.weight[0].zero_()
        self.convs = nn.ModuleList(nn.Conv1d(d, nf, w) for w in widths)
        self.out = nn.Linear(nf * len(widths), classes)

    def forward(self, ids, lens, dropout):
        x = self.emb(ids).transpose(1, 2)  # [B, d, L]
        length = ids.shape[1]
        pad = torch.arange(length)[None, :] >= lens[:, None]  # windows past the text
        feats = []
        for w, conv in zip(self.widths, self.convs):
            y = F.relu(conv(F.pad(x, (0, w - 1))))  # [B, F, L]: every token starts a window
            feats.append(y.masked_fill(pad[:, None, :], 0).max(dim=2).values)
        h = torch.cat(feats, dim=1)
        if dropout > 0:
            h = F.dropout(h, p=dropout, training=True)
        return self.out(h)


def batch(examples):
    lens = [max(1, len(e["rows"])) for e in examples]
    ids = torch.zeros(len(examples), max(lens), dtype=torch.long)
    for i, e in enumerate(examples):
        if e["rows"]:
            ids[i, : len(e["rows"])] = torch.tensor(e["rows"], dtype=torch.long)
    labels = torch.tensor([e["label"] for e in examples], dtype=torch.long)
    return ids, torch.tensor(lens), labels


def accuracy(net, examples, size=500):
    if not examples:
        return 0.0
    right = 0
    with torch.no_grad():
        for i in range(0, len(examples), size):
            ids, lens, labels = batch(examples[i : i + size])
            right += (net(ids, lens, 0).argmax(dim=1) == labels).sum().item()
    return right / len(examples)


def train_fold(r, fold, seed):
    torch.manual_seed(seed)
    adam = r["optimizer"] == "adam"
    net = Net(fold["rows"], r["dim"], r["widths"], r["filters"], r["labels"], sparse=adam)
    dense = [p for n, p in net.named_parameters() if not n.startswith("emb.")]
    if adam:
        opt = torch.optim.Adam(dense, lr=r["lr"])
        emb_opt = torch.optim.SparseAdam([net.emb.weight], lr=r["lr"])
    else:
        opt = torch.optim.Adadelta(dense, lr=r["lr"], rho=0.95, eps=1e-6)
        sq = torch.zeros_like(net.emb.weight)
        acc = torch.zeros_like(net.emb.weight)
    train = fold["train"]
    best, best_state, since, epochs = -1.0, None, 0, 0
    gen = torch.Generator().manual_seed(seed)
    for epoch in range(r["epochs"]):
        epochs += 1
        net.train()
        order = torch.randperm(len(train), generator=gen).tolist()
        for b in range(0, len(order), r["batch"]):
            ids, lens, labels = batch([train[i] for i in order[b : b + r["batch"]]])
            opt.zero_grad()
            net.emb.weight.grad = None
            loss = F.cross_entropy(net(ids, lens, r["dropout"]), labels)
            loss.backward()
            opt.step()
            if adam:
                emb_opt.step()
            else:
                with torch.no_grad():
                    rows = torch.unique(ids[ids > 0])
                    g = net.emb.weight.grad[rows]
                    s = sq[rows].mul_(0.95).addcmul_(g, g, value=0.05)
                    delta = (acc[rows] + 1e-6).sqrt_().div_((s + 1e-6).sqrt_()).mul_(g)
                    acc[rows] = acc[rows].mul_(0.95).addcmul_(delta, delta, value=0.05)
                    sq[rows] = s
                    net.emb.weight[rows] -= r["lr"] * delta
            if r["max_norm"] > 0:
                with torch.no_grad():
                    net.out.weight.copy_(torch.renorm(net.out.weight, 2, 0, r["max_norm"]))
        dev = accuracy(net, fold["dev"]) if fold["dev"] else 0.0
        if not fold["dev"] or dev > best:
            best, best_state, since = dev, copy.deepcopy(net.state_dict()), 0
        else:
            since += 1
        if r["patience"] > 0 and since >= r["patience"]:
            break
    net.load_state_dict(best_state)
    return accuracy(net, fold["test"]), epochs


def main():
    r = json.load(open(sys.argv[1]))
    torch.set_num_threads(r.get("threads", 2))
    accs, epochs = [], []
    start = time.perf_counter()
    for k, fold in enumerate(r["folds"]):
        a, e = train_fold(r, fold, r["seed"] + k)
        accs.append(a)
        epochs.append(e)
        print(f"fold {k + 1}: accuracy {a:.4f} after {e} epochs", file=sys.stderr)
    json.dump({"accuracy": accs, "epochs": epochs, "seconds": time.perf_counter() - start}, sys.stdout)


if __name__ == "__main__":
    main()
