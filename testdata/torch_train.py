"""Reference trainer: convtag's network and training recipe in PyTorch.

Reads a JSON file (argv[1]) with the recipe (dim, widths, filters, epochs,
patience, batch, dropout, max_norm, optimizer "adadelta" or "adam", lr,
seed, labels, threads) and folds, each with "rows" (embedding rows), an
optional "seed" (default: the recipe's seed plus the fold's index), and
"train", "dev", "test" lists of {"rows": [...], "label": k} (the token rows
are computed by convtag, so both sides see the same tokens and vocabulary).
For each fold it trains from PyTorch's own seeded initialisation (embedding
uniform in [-0.25, 0.25] with row 0 as padding, torch's default Conv1d and
Linear initialisation, which convtag's model.New copies), shuffling each
epoch, in mini-batches, with dropout on the pooled features, max-norm on
the output weight rows after each step, and early stopping on dev accuracy
(keeping the best epoch; patience < 0 means never stop early), then scores
the test list. The embedding is updated lazily (only rows in the batch):
torch.optim.SparseAdam for Adam, and the same Adadelta arithmetic as
torch.optim.Adadelta restricted to the batch's rows for Adadelta; every
other tensor uses torch.optim.Adadelta or torch.optim.Adam. Prints JSON:
per-fold test accuracy, epochs run, and the training wall time in seconds.

For differential tests a fold may also hold "init" (the starting weights
in convtag's tensor names and layouts, which are torch's: embedding [rows,
d], convs.i.weight [F, d, w], convs.i.bias, output.weight, output.bias, as
flat lists) and "orders" (per epoch, the order of the training examples),
and the recipe "return_weights": true, which adds every fold's final
weights under those names to the output ("weights", a list per fold).

Windows: a text of n tokens (an empty text counts as one padding token)
has exactly n windows per width w, the window at p covering tokens
p..p+w-1 with zero rows past the end (convtag's contract: conv1d over
F.pad(x, (0, w-1)), max over the n positions, ReLU). Instead of padding
every text of a batch to its longest one, the batch's texts are laid end
to end in one sequence, each followed by max(widths)-1 padding rows, and
convolved once per width; each text's n window outputs are then gathered
into a [batch, longest] grid, short texts repeating their last window
(a repeat cannot change a maximum, and its gradient reaches the same
window), so the pooled features and their gradients are those of the
contract while the convolution does about the work of the real tokens.
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

    def forward(self, b, dropout):
        x = self.emb(b.ids).t()[None]  # [1, d, T]
        feats = []
        for conv in self.convs:
            y = conv(x)[0]  # [F, T-w+1]: window outputs at every position
            y = y.index_select(1, b.gather).view(y.shape[0], b.size, -1)
            feats.append(F.relu(y.max(dim=2).values).t())  # [B, F]
        h = torch.cat(feats, dim=1)
        if dropout > 0:
            h = F.dropout(h, p=dropout, training=True)
        return self.out(h)


class Batch:
    """Texts laid end to end with gap padding rows after each."""

    def __init__(self, examples, gap):
        ids, gather = [], []
        longest = max(max(1, len(e["rows"])) for e in examples)
        for e in examples:
            rows = e["rows"] or [0]
            s = len(ids)
            ids.extend(rows)
            ids.extend([0] * gap)
            n = len(rows)
            gather.extend(s + min(p, n - 1) for p in range(longest))
        self.size = len(examples)
        self.ids = torch.tensor(ids, dtype=torch.long)
        self.gather = torch.tensor(gather, dtype=torch.long)
        self.labels = torch.tensor([e["label"] for e in examples], dtype=torch.long)


def accuracy(net, examples, gap, size=500):
    if not examples:
        return 0.0
    right = 0
    with torch.no_grad():
        for i in range(0, len(examples), size):
            b = Batch(examples[i : i + size], gap)
            right += (net(b, 0).argmax(dim=1) == b.labels).sum().item()
    return right / len(examples)


def max_norm_(w, s):
    # Rows whose L2 norm exceeds s are scaled to norm s (convtag's trMaxNorm;
    # torch.renorm would divide by norm + 1e-7).
    n = w.norm(dim=1, keepdim=True)
    w.mul_(torch.where(n > s, s / n, torch.ones_like(n)))


def named(net):
    """The network's tensors under convtag's names."""
    t = {"embedding": net.emb.weight, "output.weight": net.out.weight, "output.bias": net.out.bias}
    for i, conv in enumerate(net.convs):
        t[f"convs.{i}.weight"], t[f"convs.{i}.bias"] = conv.weight, conv.bias
    return t


def train_fold(r, fold, seed):
    torch.manual_seed(seed)
    adam = r["optimizer"] == "adam"
    gap = max(r["widths"]) - 1
    net = Net(fold["rows"], r["dim"], r["widths"], r["filters"], r["labels"], sparse=adam)
    if "init" in fold:
        with torch.no_grad():
            for name, t in named(net).items():
                t.copy_(torch.tensor(fold["init"][name], dtype=torch.float32).reshape(t.shape))
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
        if "orders" in fold:
            order = fold["orders"][epoch]
        for s in range(0, len(order), r["batch"]):
            b = Batch([train[i] for i in order[s : s + r["batch"]]], gap)
            opt.zero_grad()
            net.emb.weight.grad = None
            loss = F.cross_entropy(net(b, r["dropout"]), b.labels)
            loss.backward()
            opt.step()
            if adam:
                emb_opt.step()
            else:
                with torch.no_grad():
                    rows = torch.unique(b.ids[b.ids > 0])
                    g = net.emb.weight.grad[rows]
                    s2 = sq[rows].mul_(0.95).addcmul_(g, g, value=0.05)
                    delta = (acc[rows] + 1e-6).sqrt_().div_((s2 + 1e-6).sqrt_()).mul_(g)
                    acc[rows] = acc[rows].mul_(0.95).addcmul_(delta, delta, value=0.05)
                    sq[rows] = s2
                    net.emb.weight[rows] -= r["lr"] * delta
            if r["max_norm"] > 0:
                with torch.no_grad():
                    max_norm_(net.out.weight, r["max_norm"])
        dev = accuracy(net, fold["dev"], gap) if fold["dev"] else 0.0
        if not fold["dev"] or dev > best:
            best, best_state, since = dev, copy.deepcopy(net.state_dict()), 0
        else:
            since += 1
        if r["patience"] > 0 and since >= r["patience"]:
            break
    net.load_state_dict(best_state)
    weights = None
    if r.get("return_weights"):
        weights = {k: v.detach().reshape(-1).tolist() for k, v in named(net).items()}
    return accuracy(net, fold["test"], gap), epochs, weights


def padded_forward(net, examples):
    """The contract's formula, text by text: conv1d over F.pad(x, (0, w-1)),
    max over the n positions, ReLU. Without dropout."""
    feats = []
    for e in examples:
        x = net.emb(torch.tensor(e["rows"] or [0])).t()[None]
        f = [F.relu(conv(F.pad(x, (0, w - 1)))[0].max(dim=1).values) for w, conv in zip(net.widths, net.convs)]
        feats.append(torch.cat(f))
    return net.out(torch.stack(feats))


def check_layout():
    """Checks Batch and Net.forward against padded_forward, outputs and every
    gradient, on random texts of lengths 0 to 9 (fails loudly, never skips)."""
    g = torch.Generator().manual_seed(7)
    net = Net(40, 6, [2, 3, 5], 4, 3, sparse=False)
    ex = [{"rows": torch.randint(1, 40, (n,), generator=g).tolist(), "label": n % 3} for n in [3, 0, 9, 1, 5, 2]]
    grads = []
    for f in (lambda: net(Batch(ex, 4), 0), lambda: padded_forward(net, ex)):
        net.zero_grad()
        out = f()
        F.cross_entropy(out, torch.tensor([e["label"] for e in ex])).backward()
        grads.append((out.detach(), [p.grad.clone() for p in net.parameters()]))
    (o1, g1), (o2, g2) = grads
    assert torch.allclose(o1, o2, atol=1e-6), (o1, o2)
    for a, b in zip(g1, g2):
        assert torch.allclose(a, b, atol=1e-6), (a, b)


def main():
    r = json.load(open(sys.argv[1]))
    torch.set_num_threads(r.get("threads", 2))
    check_layout()
    accs, epochs, weights = [], [], []
    start = time.perf_counter()
    for k, fold in enumerate(r["folds"]):
        a, e, w = train_fold(r, fold, fold.get("seed", r["seed"] + k))
        accs.append(a)
        epochs.append(e)
        weights.append(w)
        print(f"fold {k + 1}: accuracy {a:.4f} after {e} epochs", file=sys.stderr)
    out = {"accuracy": accs, "epochs": epochs, "seconds": time.perf_counter() - start}
    if r.get("return_weights"):
        out["weights"] = weights
    json.dump(out, sys.stdout)


if __name__ == "__main__":
    main()
