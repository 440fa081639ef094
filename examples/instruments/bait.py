"""Shortcut bait: does the network learn the corner mark instead of the beads?

Trains on the train split of an examples/instruments/bead-bait.yaml set (the
answer: more than one bead?), where a corner mark agrees with the answer in
95% of images, then prints accuracy in train and on the test split of each
set given: one generated with the bait reversed outside train and one with it
independent (same seed, so the train split is the same bytes).

    python3 examples/instruments/bait.py REVERSED_DIR INDEPENDENT_DIR [--epochs N]
"""
import argparse
import os
import sys

import torch

sys.path.insert(0, os.path.dirname(__file__))
from common import SmallNet, accuracy, images, predict, records, train  # noqa: E402


def data(folder, split):
    recs = records(folder, split)
    y = torch.tensor([[float(r["targets"]["beads"] > 1)] for r in recs])
    cue = torch.tensor([[float(r["bait"]["cue"])] for r in recs])
    return images(folder, recs), y, cue


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("reversed")
    ap.add_argument("independent")
    ap.add_argument("--epochs", type=int, default=20)
    a = ap.parse_args()
    torch.manual_seed(0)
    torch.set_num_threads(1)
    x, y, cue = data(a.reversed, "train")
    print(f"train {len(x)}: the mark agrees with the answer in {(cue == y).float().mean().item():.3f}")
    model = SmallNet(1, 1)
    train(model, x, y, a.epochs)
    print(f"train accuracy {accuracy(predict(model, x), y):.3f}")
    for name, folder in [("reversed", a.reversed), ("independent", a.independent)]:
        xt, yt, ct = data(folder, "test")
        p = predict(model, xt)
        print(f"test, bait {name}: accuracy {accuracy(p, yt):.3f}; predictions that follow the mark {accuracy(p, ct):.3f} ({len(xt)} samples)")


if __name__ == "__main__":
    main()
