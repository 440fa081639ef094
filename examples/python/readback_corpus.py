"""Planted pipeline bugs for `trueset readback`, and correct pipelines.

    python3 readback_corpus.py DIR OUT

DIR is a tabletop-dice dataset with ignore pixels (an augmented one: see
.ci/python.sh). Each pipeline below is a few lines of numpy over the
dataset, as a data loader would be; it writes OUT/<name>.npz with
dump_batch and OUT/expected.json, which says for each file the flags to run
readback with, the finding kinds it must report with exactly which
samples, and whether it must report no error at all (the correct ones).
test_readback.py runs trueset on them and checks.
"""

import json
import os
import sys

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from trueset_loader import IGNORE_ID, TruesetDataset, dump_batch  # noqa: E402

BATCH = 16


def resize_bilinear(a, h, w):
    """Bilinear resize sampling at pixel centers, (x + 0.5) * w0 / w - 0.5
    clamped to the edge, no antialiasing (PyTorch's bilinear with
    align_corners=False)."""
    a = a.astype(np.float64)
    h0, w0 = a.shape[:2]

    def axis(n, n0):
        s = np.maximum((np.arange(n) + 0.5) * n0 / n - 0.5, 0)
        i0 = np.minimum(np.floor(s).astype(int), n0 - 1)
        i1 = np.minimum(i0 + 1, n0 - 1)
        return i0, i1, s - i0

    y0, y1, wy = axis(h, h0)
    x0, x1, wx = axis(w, w0)
    if a.ndim == 3:
        wy, wx = wy[:, None, None], wx[None, :, None]
    else:
        wy, wx = wy[:, None], wx[None, :]
    top = a[y0][:, x0] * (1 - wx) + a[y0][:, x1] * wx
    bot = a[y1][:, x0] * (1 - wx) + a[y1][:, x1] * wx
    return top * (1 - wy) + bot * wy


def stats(train):
    """Per-channel mean and population std of the train images, 0..1 units."""
    x = np.stack([s["image"] for s in train]).reshape(-1, 3).astype(np.float64)
    return x.mean(0) / 255, x.std(0) / 255


def main(root, out):
    os.makedirs(out, exist_ok=True)
    train = TruesetDataset(root, split="train")
    test = TruesetDataset(root, split="test")
    everything = TruesetDataset(root)
    by_index = {r["index"]: i for i, r in enumerate(everything.records)}
    mean, std = stats(train)
    rng = np.random.default_rng(13)
    pick = sorted(rng.choice(len(train), BATCH, replace=False))
    batch = [train[i] for i in pick]
    ids = [s["id"] for s in batch]
    images = np.stack([s["image"] for s in batch])          # N x H x W x 3 uint8
    masks = np.stack([s["mask"] for s in batch])            # N x H x W uint8
    dice = np.array([s["targets"]["dice"] for s in batch], dtype=np.float32)
    pips = np.array([s["targets"]["pip_total"] for s in batch], dtype=np.float32)
    half = list(range(0, BATCH, 2))                         # samples a per-sample bug hits
    expected = []

    def scaled(x):
        return x.astype(np.float32) / 255

    def nchw(x):
        return np.ascontiguousarray(x.transpose(0, 3, 1, 2))

    def write(name, ids_, imgs, msks=None, expect=(), args=("--split", "train"), no_errors=False, **targets):
        dump_batch(os.path.join(out, name + ".npz"), ids_, imgs, msks, **targets)
        expected.append({"file": name + ".npz", "args": list(args), "expect": [dict(kind=k, samples=sorted(set(s)))
                                                                                for k, s in expect],
                         "no_errors": no_errors})

    # -- correct pipelines ---------------------------------------------------
    write("ok-scaled-nchw", ids, nchw(scaled(images)), masks.astype(np.int64), no_errors=True,
          expect=[("values-scaled", [])], dice=dice, pip_total=pips)
    norm = ((scaled(images) - mean) / std).astype(np.float32)
    write("ok-normalized-nhwc", [s["record"]["index"] for s in batch], norm, masks, no_errors=True,
          expect=[("values-normalized", [])], dice=dice)
    # Random flips, quarter turns and crops, the same for image, mask and
    # instances; the count is recounted from the cropped instance mask.
    imgs, msks, counts = [], [], []
    for s in batch:
        k, flip = rng.integers(4), rng.integers(2)
        y0, x0 = rng.integers(0, 17, size=2)
        planes = [s["image"], s["mask"], s["instances"]]
        planes = [np.rot90(p, k) for p in planes]
        if flip:
            planes = [p[:, ::-1] for p in planes]
        planes = [p[y0:y0 + 48, x0:x0 + 48] for p in planes]
        imgs.append(scaled(planes[0]))
        msks.append(planes[1])
        dies = [o["instance"] for o in s["record"]["objects"] if o["class_name"] == "die"]
        counts.append(sum(1 for i in dies if (planes[2] == i).any()))
    write("ok-random-flips-turns-crops", ids, nchw(np.stack(imgs)), np.stack(msks).astype(np.int64), no_errors=True,
          dice=np.array(counts, dtype=np.float32))

    # -- planted bugs ----------------------------------------------------------
    x = scaled(images).copy()
    for i in half:
        x[i] = x[i][:, ::-1]                                # image mirrored, mask not
    write("flip-image-only", ids, nchw(x), masks, expect=[("geometry-mismatch", [ids[i] for i in half])])

    m = masks.copy()
    for i in half:
        m[i] = np.roll(m[i], 1, axis=1)
        m[i][:, 0] = 0                                      # mask one pixel right
    write("mask-shifted-1px", ids, nchw(scaled(images)), m, expect=[("geometry-mismatch", [ids[i] for i in half])])

    x = np.stack([resize_bilinear(a, 96, 96) for a in images]).astype(np.float32) / 255
    m = np.stack([resize_bilinear(a, 96, 96) for a in masks]).astype(np.float32)
    write("mask-resized-bilinear", ids, nchw(x), m, expect=[("mask-interpolated", ids)])

    write("bgr-as-rgb", ids, nchw(scaled(images[..., ::-1])), masks, expect=[("channels-swapped", ids)])

    once = (scaled(images) - mean) / std
    write("normalized-twice", ids, nchw(((once - mean) / std).astype(np.float32)), masks,
          expect=[("values-normalized-twice", [])])

    write("not-normalized", ids, nchw(images.astype(np.float32)), masks, expect=[("values-raw", [])])

    inet = (scaled(images) - np.array([0.485, 0.456, 0.406])) / np.array([0.229, 0.224, 0.225])
    write("imagenet-constants", ids, nchw(inet.astype(np.float32)), masks, expect=[("values-other-constants", [])])

    # ids off by one: the image of record index k+1 beside the id of k.
    ks = sorted(rng.choice(len(everything) - 1, BATCH, replace=False))
    nxt = [everything[by_index[everything.records[k]["index"] + 1]] for k in ks]
    write("ids-off-by-one", [everything.records[k]["id"] for k in ks], nchw(scaled(np.stack([s["image"] for s in nxt]))),
          np.stack([s["mask"] for s in nxt]), args=(), expect=[("ids-mismatch", [everything.records[k]["id"] for k in ks])])

    perm = np.roll(np.arange(BATCH), 5)
    sh = dice[perm]
    write("shuffled-targets", ids, nchw(scaled(images)), masks, dice=sh,
          expect=[("targets-shuffled", [ids[i] for i in range(BATCH) if sh[i] != dice[i]])])

    # A 32x32 crop of image and mask that keeps the record's count.
    imgs, msks, bad = [], [], []
    for i, s in enumerate(batch):
        y0, x0 = rng.integers(0, 33, size=2)
        crop = (slice(y0, y0 + 32), slice(x0, x0 + 32))
        imgs.append(scaled(s["image"][crop]))
        msks.append(s["mask"][crop])
        inst = s["instances"]
        full = partly = 0
        for o in s["record"]["objects"]:
            if o["class_name"] != "die":
                continue
            inside = (inst[crop] == o["instance"]).sum()
            partly += inside > 0
            full += inside == (inst == o["instance"]).sum()
        if not (full <= dice[i] <= partly):
            bad.append(ids[i])
    write("crop-kept-count", ids, nchw(np.stack(imgs)), np.stack(msks), dice=dice, expect=[("counts-vs-mask", bad)])

    rep = ids[:4] * 2 + ids[4:12]
    write("repeated-samples", rep, nchw(scaled(np.stack([train[pick[ids.index(i)]]["image"] for i in rep]))),
          expect=[("batch-repeats", ids[:4])])

    tb = batch[:12] + [test[i] for i in range(4)]
    write("test-split-drawn", [s["id"] for s in tb], nchw(scaled(np.stack([s["image"] for s in tb]))),
          np.stack([s["mask"] for s in tb]), expect=[("wrong-split", [s["id"] for s in tb[12:]])])

    m = masks.copy()
    m[m == IGNORE_ID] = 0                                   # ignore becomes background
    write("ignore-mapped-to-background", ids, nchw(scaled(images)), m,
          expect=[("mask-ignore-mapped", [ids[i] for i in range(BATCH) if (masks[i] == IGNORE_ID).any()])])

    m = masks.astype(np.int64)
    m = np.where(m == IGNORE_ID, IGNORE_ID, m - 1)          # ids shifted down by one
    write("mask-ids-minus-one", ids, nchw(scaled(images)), m, expect=[("mask-ids-shifted", ids)])

    with open(os.path.join(out, "expected.json"), "w") as f:
        json.dump(expected, f, indent=1)
    print("wrote %d batches to %s" % (len(expected), out))


if __name__ == "__main__":
    if len(sys.argv) != 3:
        sys.exit("usage: readback_corpus.py DIR OUT")
    main(sys.argv[1], sys.argv[2])
