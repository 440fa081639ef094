"""Planted label noise: does the network fit it?

Trains on the train split of an examples/instruments/noisy-sorting.yaml set,
labels "is there a washer? a nut?" taken from the records *with the planted
noise* (each record's mislabel block), and prints per epoch: accuracy against
the labels it was given, and on the corrupted train samples alone accuracy
against their noisy labels and against their true labels; then validation
accuracy (true labels). Memorisation shows as the corrupted samples' noisy
accuracy rising while their true accuracy and validation accuracy fall.

    python3 examples/instruments/noise.py DIR [--epochs N]
"""
import argparse
import sys

import torch

sys.path.insert(0, __import__("os").path.dirname(__file__))
from common import SmallNet, accuracy, images, noisy_targets, predict, records, train  # noqa: E402


def labels(targets):
    return [float(targets["washers"] > 0), float(targets["nuts"] > 0)]


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("dir")
    ap.add_argument("--epochs", type=int, default=40)
    a = ap.parse_args()
    torch.manual_seed(0)
    torch.set_num_threads(1)
    tr, va = records(a.dir, "train"), records(a.dir, "val")
    x, xv = images(a.dir, tr), images(a.dir, va)
    y_noisy = torch.tensor([labels(noisy_targets(r)) for r in tr])
    y_true = torch.tensor([labels(r["targets"]) for r in tr])
    yv = torch.tensor([labels(r["targets"]) for r in va])
    hit = torch.tensor([(y_noisy[i] != y_true[i]).any().item() for i in range(len(tr))])
    print(f"train {len(tr)} samples, {int(hit.sum())} with noisy labels that differ from the true ones "
          f"({sum('mislabel' in r for r in tr)} carry a mislabel block); val {len(va)}")
    print("epoch  train-acc(given)  corrupted: acc(noisy)  acc(true)  val-acc(true)")
    model = SmallNet(1, 2)

    def report(epoch):
        p = predict(model, x)
        print(f"{epoch:5d}  {accuracy(p, y_noisy):16.3f}  {accuracy(p[hit], y_noisy[hit]):21.3f}"
              f"  {accuracy(p[hit], y_true[hit]):9.3f}  {accuracy(predict(model, xv), yv):13.3f}")

    train(model, x, y_noisy, a.epochs, report)


if __name__ == "__main__":
    main()
