#!/usr/bin/python3
"""augment_opencv.py: bench/run.sh's hand-written Python/OpenCV comparator for `trueset augment`.

What a competent engineer would write with numpy and OpenCV (Debian's
python3-numpy and python3-opencv; python3-pil reads the indexed masks) to do
the steps of bench/plans/kernels.yaml (or kernels-512.yaml) on a trueset
folder, as 2 processes (multiprocessing, fork). Usage:

    /usr/bin/python3 bench/python/augment_opencv.py --in SRC --out DIR \
        --copies 5 --split train,val,test --workers 2 [--to 512]

The same work as `trueset augment --plan bench/plans/kernels.yaml`:
  - every source's three PNGs are decoded (image with cv2.imread, the
    indexed class mask's indices with PIL, the 16-bit instance mask with
    cv2.imread) and the source is carried over: its three files copied
    byte for byte, its record kept;
  - each of --copies copies of the sources in --split draws a horizontal
    flip, a turn uniform in [-15, 15] degrees about the center, and a crop
    of area share [0.7, 1.0] and aspect [0.8, 1.25] placed uniformly and
    resized to --to x --to (default: the source's size); the three compose
    into one 2x3 matrix (pixel centers at x + 0.5, as trueset's) applied once
    with cv2.warpAffine: bilinear for the image, nearest neighbour for both
    masks; outside the source: tone 0 and background;
  - cuts: the instance mask is warped first and every object's kept share
    (warped area / (source area x |det|)) measured; a draw leaving any object
    under 0.5 is drawn again, up to 20 tries; after that, the last draw is
    used and the objects under 0.5 are erased from the masks;
  - Gaussian noise of sigma uniform in [2, 6] added to the warped image
    (rounded, clipped to 0..255);
  - labels measured again from the warped instance mask (box, area, shown
    share, centroid and second-moment size); center, size and angle carried
    through the matrix; count targets recomputed; a lineage (the drawn
    parameters and the matrix) in the record;
  - three PNG files per copy (cv2.imencode at OpenCV's defaults, the encoder
    and settings cv2.imwrite uses; encoded to memory so the file's SHA-256 is
    taken without reading it back), and one JSON line per sample in
    manifest.jsonl, sources and their copies in order, then a dataset.json.

Not the same (each makes this comparator's job lighter, or no heavier):
  - the written class mask is plain 8-bit gray (OpenCV writes no palette),
    not an indexed PNG with the class colors;
  - files are written in place, not to a temporary name renamed into place;
    no run marker, lock or resume, no input bounds or checksum checks of the
    input files, no invariance check of the plan;
  - numpy's PCG64 per (seed, source, copy, try) instead of trueset's
    streams; OpenCV's bilinear weights are fixed-point (1/32 of a pixel),
    trueset's are not;
  - the plan is built in (the steps above), not read from the YAML file.
"""

import argparse
import hashlib
import json
import math
import multiprocessing
import os
import re
import shutil
import sys

import cv2
import numpy as np
from PIL import Image

LEAST_SHOWN = 0.5  # kernels.yaml: cuts.least_shown (trueset's default)
TRIES = 20  # cuts.tries (trueset's default)

SRC = OUT = None
TO = None
COPIES = 0
SEED = 1
DEFS = []  # count targets: (name, classes or None)
INDEX = re.compile(r'"index":\d+,')


def mat(a):
    """3x3 from a 2x3 affine."""
    return np.vstack([np.asarray(a, float).reshape(2, 3), [0, 0, 1]])


def draw(rng, w, h, ow, oh):
    """One copy's moves, composed into the matrix that maps source to copy (continuous coordinates)."""
    flip = mat([-1, 0, w, 0, 1, 0])
    deg = -15 + 30 * rng.random()
    s, c = math.sin(math.radians(deg)), math.cos(math.radians(deg))
    rot = mat([c, -s, w / 2 - c * w / 2 + s * h / 2, s, c, h / 2 - s * w / 2 - c * h / 2])
    aspect = 0.8 + 0.45 * rng.random()
    area = 0.7 + 0.3 * rng.random()
    cw = math.sqrt(area * w * h * aspect)
    ch = cw / aspect
    cw, ch = min(cw, w), min(ch, h)
    x0, y0 = rng.random() * (w - cw), rng.random() * (h - ch)
    crop = mat([ow / cw, 0, -x0 * ow / cw, 0, oh / ch, -y0 * oh / ch])
    m = crop @ rot @ flip
    lineage = {"geometry": [{"do": "flip", "axis": "horizontal"}, {"do": "rotate", "angle": deg},
                            {"do": "crop", "x": x0, "y": y0, "width": cw, "height": ch, "to": [ow, oh]}]}
    return m, lineage


def to_cv(m):
    """The same map between OpenCV's pixel coordinates (centers on integers)."""
    return (mat([1, 0, -0.5, 0, 1, -0.5]) @ m @ mat([1, 0, 0.5, 0, 1, 0.5]))[:2]


def measure(inst, n):
    """Area, box and moments of instances 1..n, one pass over the mask's foreground."""
    ys, xs = np.nonzero(inst)
    ids = inst[ys, xs].astype(np.intp)
    area = np.bincount(ids, minlength=n + 1)
    xs = xs.astype(np.float64)
    ys = ys.astype(np.float64)
    sx, sy = np.bincount(ids, xs, n + 1), np.bincount(ids, ys, n + 1)
    sxx, syy, sxy = np.bincount(ids, xs * xs, n + 1), np.bincount(ids, ys * ys, n + 1), np.bincount(ids, xs * ys, n + 1)
    out = {}
    for i in range(1, n + 1):
        a = int(area[i])
        if a == 0:
            continue
        sel = inst == i
        cols, rows = np.flatnonzero(sel.any(0)), np.flatnonzero(sel.any(1))
        mx, my = sx[i] / a, sy[i] / a
        vxx, vyy, vxy = sxx[i] / a - mx * mx + 1 / 12, syy[i] / a - my * my + 1 / 12, sxy[i] / a - mx * my
        tr, d = vxx + vyy, math.hypot(vxx - vyy, 2 * vxy)
        out[i] = {"area": a, "box": [int(cols[0]), int(rows[0]), int(cols[-1]) + 1, int(rows[-1]) + 1],
                  "center": [round(mx + 0.5, 3), round(my + 0.5, 3)],
                  "size": [round(4 * math.sqrt((tr + d) / 2), 3), round(4 * math.sqrt(max((tr - d) / 2, 0)), 3)]}
    return out


def write_png(rel, m):
    ok, buf = cv2.imencode(".png", m)
    if not ok:
        raise RuntimeError("encode " + rel)
    b = buf.tobytes()
    with open(os.path.join(OUT, rel), "wb") as f:
        f.write(b)
    return hashlib.sha256(b).hexdigest()


def source(args):
    """Carries source number s over and makes its copies; returns their manifest lines."""
    s, line, copies = args
    rec = json.loads(line)
    for k in ("image", "mask", "instances"):
        shutil.copyfile(os.path.join(SRC, rec[k]), os.path.join(OUT, rec[k]))
    lines = [line]
    if not copies:
        return lines
    img = cv2.imread(os.path.join(SRC, rec["image"]), cv2.IMREAD_UNCHANGED)
    with Image.open(os.path.join(SRC, rec["mask"])) as im:
        cls = np.asarray(im)  # palette indices = class ids
    inst = cv2.imread(os.path.join(SRC, rec["instances"]), cv2.IMREAD_UNCHANGED)
    h, w = inst.shape
    ow, oh = (TO, TO) if TO else (w, h)
    objs = {o["instance"]: o for o in rec["objects"]}
    n = max(objs, default=0)
    for k in range(1, COPIES + 1):
        for t in range(TRIES):
            rng = np.random.default_rng([SEED, s, k, t])
            m, lineage = draw(rng, w, h, ow, oh)
            mc = to_cv(m)
            det = abs(np.linalg.det(m[:2, :2]))
            winst = cv2.warpAffine(inst, mc, (ow, oh), flags=cv2.INTER_NEAREST, borderValue=0)
            area = np.bincount(winst.ravel(), minlength=n + 1)
            kept = {i: area[i] / (o["area"] * det) for i, o in objs.items()}
            if min(kept.values(), default=1) >= LEAST_SHOWN:
                break
        wimg = cv2.warpAffine(img, mc, (ow, oh), flags=cv2.INTER_LINEAR, borderValue=0)
        wcls = cv2.warpAffine(cls, mc, (ow, oh), flags=cv2.INTER_NEAREST, borderValue=0)
        for i, f in kept.items():
            if f < LEAST_SHOWN and area[i]:
                gone = winst == i
                winst[gone] = 0
                wcls[gone] = 0
        sigma = 2 + 4 * rng.random()
        noise = rng.standard_normal(wimg.shape, dtype=np.float32)
        noise *= sigma
        wimg = cv2.add(wimg, noise, dtype=cv2.CV_8U)  # rounded and saturated to 0..255
        lineage["pixels"] = [{"do": "gaussian-noise", "sigma": sigma}]
        lineage["matrix"] = m[:2].ravel().tolist()
        lineage["source"] = rec["id"]
        meas = measure(winst, n)
        sc = math.sqrt(det)
        mirrored = np.linalg.det(m[:2, :2]) < 0
        turn = math.degrees(math.atan2(-m[1, 0], -m[0, 0]) if mirrored else math.atan2(m[1, 0], m[0, 0]))
        out = []
        for i, st in sorted(meas.items()):
            o = dict(objs[i])
            cx, cy = o["center"]
            o.update({"box_x0y0x1y1": st["box"], "area": st["area"], "shown": round(min(kept[i], 1), 4),
                      "center": [round(m[0, 0] * cx + m[0, 1] * cy + m[0, 2], 3), round(m[1, 0] * cx + m[1, 1] * cy + m[1, 2], 3)],
                      "size": round(o["size"] * sc, 3), "angle": round((turn - o.get("angle", 0) if mirrored else turn + o.get("angle", 0)) % 360, 3),
                      "measured_center": st["center"], "measured_size": st["size"]})
            out.append(o)
        cid = "%s-c%02d" % (rec["id"], k)
        crec = {"id": cid, "index": 0, "split": rec["split"], "group": rec["group"], "stratum": rec.get("stratum", ""),
                "width": ow, "height": oh, "image": "images/%s.png" % cid, "mask": "masks/%s.png" % cid,
                "instances": "instances/%s.png" % cid, "sha256": {}}
        for key, arr in (("image", wimg), ("mask", wcls), ("instances", winst)):
            crec["sha256"][key] = write_png(crec[key], arr)
        crec["objects"] = out
        crec["targets"] = dict(sorted((name, sum(1 for o in out if not cl or o["class_name"] in cl)) for name, cl in DEFS))
        crec["lineage"] = lineage
        lines.append(json.dumps(crec, separators=(",", ":")))
    return lines


def main():
    global SRC, OUT, TO, COPIES, SEED, DEFS
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--in", dest="src", required=True, help="a trueset dataset folder")
    ap.add_argument("--out", required=True)
    ap.add_argument("--copies", type=int, default=1)
    ap.add_argument("--split", default="train", help="splits whose sources get copies, comma-separated")
    ap.add_argument("--to", type=int, default=0, help="the crop's output side (default: the source's size)")
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--seed", type=int, default=1)
    a = ap.parse_args()
    SRC, OUT, TO, COPIES, SEED = a.src, a.out, a.to, a.copies, a.seed
    with open(os.path.join(SRC, "dataset.json")) as f:
        ds = json.load(f)
    for t in ds.get("target_defs") or []:
        if t.get("kind") != "count":
            print("augment_opencv.py: target %r: only count targets are implemented" % t.get("name"), file=sys.stderr)
            sys.exit(2)
        DEFS.append((t["name"], t.get("classes")))
    os.makedirs(OUT)
    for d in ("images", "masks", "instances"):
        os.mkdir(os.path.join(OUT, d))
    cv2.setNumThreads(1)  # one process per core; no thread pool inside each
    want = set(a.split.split(","))
    with open(os.path.join(SRC, "manifest.jsonl")) as f:
        jobs = [(s, line.rstrip("\n"), json.loads(line)["split"] in want) for s, line in enumerate(f)]
    index = 0
    with multiprocessing.get_context("fork").Pool(a.workers) as pool, \
            open(os.path.join(OUT, "manifest.jsonl"), "w") as mf:
        for lines in pool.imap(source, jobs, chunksize=4):
            for line in lines:
                line = INDEX.sub('"index":%d,' % index, line, count=1)  # its position in the manifest
                mf.write(line)
                mf.write("\n")
                index += 1
    with open(os.path.join(OUT, "dataset.json"), "w") as f:
        json.dump({"writer": "bench/python/augment_opencv.py", "source": os.path.abspath(SRC), "seed": a.seed,
                   "copies": a.copies, "split": sorted(want), "count": index, "classes": ds.get("classes")}, f, indent=1)


if __name__ == "__main__":
    main()
