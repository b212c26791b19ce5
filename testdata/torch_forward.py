#!/usr/bin/python3
"""Reference forward pass for convtag's network, built from torch.nn layers.

  torch_forward.py IN.json

IN.json is a list of jobs {"model": PATH, "inputs": [[row, ...], ...]}: a
convtag model file and texts given as embedding row ids. The model file is a safetensors
container, read here by following the format's published specification
(8-byte little-endian header length, JSON header with dtype, shape and
data_offsets per tensor, then the data buffer) with the standard library and
numpy's frombuffer, independently of the Go reader.

The network is the one convtag documents: nn.Embedding, then for each window
width w an nn.Conv1d(d, F, w) applied to F.pad(x, (0, w-1)) (right zero
padding, so every token starts a window), ReLU, max over time, the widths'
features concatenated in order, an optional nn.Linear + ReLU hidden layer,
and an nn.Linear output layer.

Prints a JSON list with one {"logits": [[...], ...], "fold_max_abs_diff":
[...]} per job: one logit row per input, and for each width the largest absolute difference between
the file's fold.{i} table and the same table computed here with torch
(T[r][k][f] = sum_j W[f][j][k] E[r][j]), or no entries if the file has no
fold tables.
"""

import json
import struct
import sys

import numpy as np
import torch
import torch.nn as nn
import torch.nn.functional as F

DTYPES = {"F32": "<f4", "F16": "<f2", "I32": "<i4", "I64": "<i8", "U8": "u1"}


def read_safetensors(path):
    with open(path, "rb") as f:
        raw = f.read()
    (n,) = struct.unpack("<Q", raw[:8])
    header = json.loads(raw[8:8 + n].decode("utf-8"))
    data = memoryview(raw)[8 + n:]
    meta = header.pop("__metadata__", {})
    tensors = {}
    for name, e in header.items():
        begin, end = e["data_offsets"]
        a = np.frombuffer(data[begin:end], dtype=DTYPES[e["dtype"]])
        tensors[name] = a.reshape(e["shape"])
    return meta, tensors


class Net(nn.Module):
    def __init__(self, cfg, labels, t):
        super().__init__()
        d, fs, widths, hidden = cfg["dim"], cfg["filters"], cfg["widths"], cfg["hidden"]
        emb = t["embedding"]
        self.widths = widths
        self.embedding = nn.Embedding(emb.shape[0], d, padding_idx=0)
        self.convs = nn.ModuleList(nn.Conv1d(d, fs, w) for w in widths)
        feat = len(widths) * fs
        self.hidden = nn.Linear(feat, hidden) if hidden > 0 else None
        self.output = nn.Linear(hidden if hidden > 0 else feat, labels)
        with torch.no_grad():
            self.embedding.weight.copy_(torch.from_numpy(emb.copy()))
            for i, conv in enumerate(self.convs):
                conv.weight.copy_(torch.from_numpy(t[f"convs.{i}.weight"].copy()))
                conv.bias.copy_(torch.from_numpy(t[f"convs.{i}.bias"].copy()))
            if self.hidden is not None:
                self.hidden.weight.copy_(torch.from_numpy(t["hidden.weight"].copy()))
                self.hidden.bias.copy_(torch.from_numpy(t["hidden.bias"].copy()))
            self.output.weight.copy_(torch.from_numpy(t["output.weight"].copy()))
            self.output.bias.copy_(torch.from_numpy(t["output.bias"].copy()))

    def forward(self, rows):
        x = self.embedding(rows).transpose(1, 2)  # [batch, d, n]
        feats = []
        for w, conv in zip(self.widths, self.convs):
            y = torch.relu(conv(F.pad(x, (0, w - 1))))  # [batch, F, n]
            feats.append(y.max(dim=2).values)
        h = torch.cat(feats, dim=1)
        if self.hidden is not None:
            h = torch.relu(self.hidden(h))
        return self.output(h)


def run(job):
    meta, t = read_safetensors(job["model"])
    cfg = json.loads(meta["config"])
    labels = json.loads(meta["labels"])
    torch.manual_seed(0)
    net = Net(cfg, len(labels), t).eval()
    logits = []
    with torch.no_grad():
        for rows in job["inputs"]:
            out = net(torch.tensor([rows], dtype=torch.long))
            logits.append([float(v) for v in out[0]])
        fold_diff = []
        emb = net.embedding.weight
        for i, conv in enumerate(net.convs):
            name = f"fold.{i}"
            if name not in t:
                continue
            ours = torch.einsum("fjk,rj->rkf", conv.weight, emb)
            theirs = torch.from_numpy(t[name].astype(np.float32))
            fold_diff.append(float((ours - theirs).abs().max()))
    return {"logits": logits, "fold_max_abs_diff": fold_diff}


def main():
    with open(sys.argv[1]) as f:
        jobs = json.load(f)
    json.dump([run(job) for job in jobs], sys.stdout)


if __name__ == "__main__":
    main()
