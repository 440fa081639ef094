"""Shared by the instrument examples: read one split of a trueset dataset
(format trueset-dataset/2) into tensors, and a small CNN for 32x32 images.

Only the standard library, numpy, Pillow and PyTorch (Debian's python3-torch
1.13 runs them on a CPU).
"""
import json
import os

import numpy as np
import torch
from PIL import Image


def records(folder, split):
    """The records of one split, in manifest order."""
    with open(os.path.join(folder, "dataset.json")) as f:
        fmt = json.load(f).get("format")
    if fmt != "trueset-dataset/2":
        raise SystemExit(f"{folder}: format {fmt!r}; these examples read trueset-dataset/2")
    out = []
    with open(os.path.join(folder, "manifest.jsonl")) as f:
        for line in f:
            r = json.loads(line)
            if r["split"] == split:
                out.append(r)
    return out


def images(folder, recs):
    """N x C x H x W float tensor in 0..1."""
    arr = []
    for r in recs:
        a = np.asarray(Image.open(os.path.join(folder, r["image"])), dtype=np.float32) / 255.0
        arr.append(a[None] if a.ndim == 2 else a.transpose(2, 0, 1))
    return torch.from_numpy(np.stack(arr))


def noisy_targets(r):
    """A record's targets as a network trained on its labels sees them: the
    true targets with the planted noise (the mislabel block) laid over."""
    t = dict(r["targets"])
    for name, v in r.get("mislabel", {}).get("targets", {}).items():
        t[name] = v["noisy"]
    return t


class SmallNet(torch.nn.Module):
    """Two 3x3 convolutions with pooling and a wide hidden layer: enough
    capacity to memorise a few hundred labels."""

    def __init__(self, channels, outputs, width=256):
        super().__init__()
        self.features = torch.nn.Sequential(
            torch.nn.Conv2d(channels, 16, 3, padding=1), torch.nn.ReLU(), torch.nn.MaxPool2d(2),
            torch.nn.Conv2d(16, 32, 3, padding=1), torch.nn.ReLU(), torch.nn.MaxPool2d(2),
        )
        self.head = torch.nn.Sequential(
            torch.nn.Flatten(), torch.nn.Linear(32 * 8 * 8, width), torch.nn.ReLU(), torch.nn.Linear(width, outputs)
        )

    def forward(self, x):
        return self.head(self.features(x))


def train(model, x, y, epochs, report=None, lr=1e-3, batch=32, seed=0):
    """Adam on a multi-label (sigmoid) loss; report(epoch) after each epoch."""
    g = torch.Generator().manual_seed(seed)
    opt = torch.optim.Adam(model.parameters(), lr=lr)
    loss_fn = torch.nn.BCEWithLogitsLoss()
    for epoch in range(1, epochs + 1):
        model.train()
        order = torch.randperm(len(x), generator=g)
        for i in range(0, len(x), batch):
            idx = order[i:i + batch]
            opt.zero_grad()
            loss_fn(model(x[idx]), y[idx]).backward()
            opt.step()
        if report:
            model.eval()
            with torch.no_grad():
                report(epoch)


def predict(model, x):
    model.eval()
    with torch.no_grad():
        return (model(x) > 0).float()


def accuracy(pred, y):
    """Share of samples whose every label is right."""
    if len(y) == 0:
        return float("nan")
    return (pred == y).all(dim=1).float().mean().item()
