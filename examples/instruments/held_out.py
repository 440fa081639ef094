"""Held-out combinations: does the network find triangles in a color it never
saw them in?

Trains on the train split of an examples/instruments/unseen-paint.yaml set
(labels: is there a circle, a triangle, a square?), where red triangles never
appear, and prints on the test split the triangle accuracy of samples showing
the held-out combination (record key held_out) against samples with a triangle
of a seen color, and the accuracy of every label on both.

    python3 examples/instruments/held_out.py DIR [--epochs N]
"""
import argparse
import os
import sys

import torch

sys.path.insert(0, os.path.dirname(__file__))
from common import SmallNet, accuracy, images, predict, records, train  # noqa: E402

NAMES = ["circles", "triangles", "squares"]


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("dir")
    ap.add_argument("--epochs", type=int, default=30)
    a = ap.parse_args()
    torch.manual_seed(0)
    torch.set_num_threads(1)
    tr, te = records(a.dir, "train"), records(a.dir, "test")
    lab = lambda recs: torch.tensor([[float(r["targets"][n] > 0) for n in NAMES] for r in recs])
    x, y = images(a.dir, tr), lab(tr)
    xt, yt = images(a.dir, te), lab(te)
    held = torch.tensor([bool(r.get("held_out")) for r in te])
    seen = torch.tensor([not r.get("held_out") and r["targets"]["triangles"] > 0 for r in te])
    assert not any(r.get("held_out") for r in tr), "a held-out combination in train"
    print(f"train {len(tr)}; test {len(te)}: {int(held.sum())} with a held-out red triangle, "
          f"{int(seen.sum())} with a triangle of a seen color")
    model = SmallNet(3, 3)
    train(model, x, y, a.epochs)
    p = predict(model, xt)
    tri = lambda m: (p[m][:, 1] == yt[m][:, 1]).float().mean().item()
    print(f"triangle found: held-out red {tri(held):.3f}, seen colors {tri(seen):.3f}")
    print(f"all labels right: held-out red {accuracy(p[held], yt[held]):.3f}, seen colors {accuracy(p[seen], yt[seen]):.3f}, "
          f"train {accuracy(predict(model, x), y):.3f}")


if __name__ == "__main__":
    main()
