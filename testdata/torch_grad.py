"""Reference gradients for convtag's back-propagation, from PyTorch autograd.

Reads a JSON file (argv[1]) with a network's weights in convtag's tensor
names and layouts (embedding [rows, d], convs.i.weight [F, d, w] as
torch.nn.Conv1d, convs.i.bias, optional hidden.weight/bias, output.weight
[C, in], output.bias), a batch of examples (embedding rows and a label) and
optional class weights. With "multi": true each example has "tags" (label
indices) and the loss is torch.nn.BCEWithLogitsLoss(pos_weight=class
weights, reduction="mean") on the multi-hot targets instead. Builds the network of model/CONTRACT (right zero
padding of w-1 positions, ReLU, max over time, concatenation, optional ReLU
hidden layer, linear output) with torch.nn.functional in float64 on the
given float32 values, takes the weighted mean cross-entropy of
torch.nn.functional.cross_entropy (no dropout), and prints JSON with the
loss and the gradient of every tensor under the same names. The padding
row 0 gets no gradient (padding_idx=0), as in convtag.
"""
import json
import sys

import torch
import torch.nn.functional as F


def main():
    inp = json.load(open(sys.argv[1]))
    dt = torch.float64
    d, widths, nf, rows = inp["dim"], inp["widths"], inp["filters"], inp["rows"]
    params = {}

    def param(name, shape):
        t = torch.tensor(inp["tensors"][name], dtype=torch.float32).to(dt).reshape(shape)
        t.requires_grad_(True)
        params[name] = t
        return t

    emb = param("embedding", (rows, d))
    convs = []
    for i, w in enumerate(widths):
        convs.append((w, param(f"convs.{i}.weight", (nf, d, w)), param(f"convs.{i}.bias", (nf,))))
    hidden = None
    if inp.get("hidden", 0) > 0:
        h = inp["hidden"]
        hidden = (param("hidden.weight", (h, nf * len(widths))), param("hidden.bias", (h,)))
    c = len(inp["tensors"]["output.bias"])
    ow = param("output.weight", (c, -1))
    ob = param("output.bias", (c,))

    logits = []
    for ex in inp["examples"]:
        ids = torch.tensor(ex["rows"] or [0], dtype=torch.long)
        x = F.embedding(ids, emb, padding_idx=0).t().unsqueeze(0)  # [1, d, n]
        feats = []
        for w, W, B in convs:
            y = F.conv1d(F.pad(x, (0, w - 1)), W, B)  # [1, F, n]
            feats.append(F.relu(y).max(dim=2).values)
        z = torch.cat(feats, dim=1)
        if hidden is not None:
            z = F.relu(F.linear(z, hidden[0], hidden[1]))
        logits.append(F.linear(z, ow, ob))
    logits = torch.cat(logits, dim=0)
    if inp.get("multi"):
        target = torch.zeros_like(logits)
        for i, ex in enumerate(inp["examples"]):
            for t in ex.get("tags") or []:
                target[i, t] = 1
        pw = None
        if inp.get("class_weights"):
            pw = torch.tensor(inp["class_weights"], dtype=dt)
        loss = torch.nn.BCEWithLogitsLoss(pos_weight=pw)(logits, target)
        loss.backward()
        out = {"loss": loss.item(), "grads": {k: v.grad.reshape(-1).tolist() for k, v in params.items()}}
        json.dump(out, sys.stdout)
        return
    labels = torch.tensor([ex["label"] for ex in inp["examples"]], dtype=torch.long)
    weight = None
    if inp.get("class_weights"):
        weight = torch.tensor(inp["class_weights"], dtype=dt)
    loss = F.cross_entropy(logits, labels, weight=weight)
    loss.backward()
    out = {"loss": loss.item(), "grads": {k: v.grad.reshape(-1).tolist() for k, v in params.items()}}
    json.dump(out, sys.stdout)


if __name__ == "__main__":
    main()
