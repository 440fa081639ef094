"""Write the batches the `trueset readback` help examples read.

    trueset generate --preset tabletop-dice --count 40 --seed 7 --out dice7
    python3 testdata/batches/make_batches.py dice7 testdata/batches

dice7-ok.npz: 8 train samples as a correct loader gives them (N x 3 x H x W
float32 in 0..1, uint8 masks, the dice count). dice7-flip-image-only.npz:
the same with every other image mirrored left-right and its mask not.
They match the bytes of that dataset; a change to the renderer means
running this again.
"""
import os
import sys

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..", "examples", "python"))
from trueset_loader import TruesetDataset, dump_batch  # noqa: E402

root, out = sys.argv[1], sys.argv[2]
train = TruesetDataset(root, split="train")
batch = [train[i] for i in range(8)]
ids = [s["id"] for s in batch]
x = np.stack([s["image"] for s in batch]).astype(np.float32) / 255
y = np.stack([s["mask"] for s in batch])
dice = np.array([s["targets"]["dice"] for s in batch], dtype=np.float32)
dump_batch(os.path.join(out, "dice7-ok.npz"), ids, x.transpose(0, 3, 1, 2), y, compress=True, dice=dice)
x[::2] = x[::2, :, ::-1]
dump_batch(os.path.join(out, "dice7-flip-image-only.npz"), ids, x.transpose(0, 3, 1, 2), y, compress=True, dice=dice)
