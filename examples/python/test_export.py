"""Check `trueset export` against the published descriptions of its two
formats, with decoders written here in numpy (nothing of trueset's).

    python3 test_export.py TRUESET DIR [DIR ...]

For every DIR it runs `TRUESET export DIR --format objects-json` and
`--format center-boxes` into a temporary folder, then reads the dataset
itself (dataset.json, manifest.jsonl and the 16-bit instance PNGs with
Pillow) and checks:

objects-json, per the JSON interchange format for detection and instance
segmentation: "images", "annotations" and "categories" lists; image ids
unique, file_name an image of the dataset with its width and height;
categories every class but background 0 and ignore 255; each annotation's
segmentation in the uncompressed run-length form {"size": [h, w], "counts":
[...]} decoded here: counts alternate between runs of 0 and 1, starting
with 0, over the pixels in column-major (Fortran) order, and sum to h*w;
the decoded mask equals (instances == instance_id) pixel for pixel; bbox is
[x, y, width, height] of those pixels; area their count; iscrowd 0;
category_id the object's class; every instance of every mask exported once.

center-boxes, per the one-text-file-per-image format: labels/<stem>.txt for
every image, one "class cx cy w h" line per object; class a 0-based line of
classes.txt naming the object's class; cx, cy, w, h in [0, 1], and
(cx -+ w/2) * width, (cy -+ h/2) * height give back the mask's box edges.

Prints "N passed, M failed" and exits 1 if anything failed.
"""

import json
import os
import subprocess
import sys
import tempfile

import numpy as np
from PIL import Image

passed = 0
failed = 0


def fail(msg):
    global failed
    failed += 1
    print("FAIL " + msg)


def ok():
    global passed
    passed += 1


def rle_decode(counts, h, w):
    """The uncompressed run-length form: runs alternate 0, 1, 0, ... from
    the first pixel in column-major order."""
    flat = np.zeros(h * w, dtype=bool)
    p = 0
    for k, n in enumerate(counts):
        if not isinstance(n, int) or n < 0:
            raise ValueError("count %r" % (n,))
        if k % 2 == 1:
            flat[p:p + n] = True
        p += n
    if p != h * w:
        raise ValueError("counts sum to %d, not %d" % (p, h * w))
    return flat.reshape((h, w), order="F")


def instances(root, rel):
    im = Image.open(os.path.join(root, rel))
    a = np.array(im)
    if im.mode == "I;16B":
        a = a.astype(">u2")
    return a.astype(np.int64)


def box_of(m):
    ys, xs = np.nonzero(m)
    return int(xs.min()), int(ys.min()), int(xs.max()) + 1, int(ys.max()) + 1


def read_dataset(root):
    with open(os.path.join(root, "dataset.json")) as f:
        info = json.load(f)
    with open(os.path.join(root, "manifest.jsonl")) as f:
        recs = [json.loads(l) for l in f if l.strip()]
    return info, recs


def check_objects_json(root, path):
    info, recs = read_dataset(root)
    with open(path) as f:
        doc = json.load(f)
    for key in ("images", "annotations", "categories"):
        if not isinstance(doc.get(key), list):
            fail("%s: no %r list" % (path, key))
            return
    names = {c["id"]: c["name"] for c in info["classes"]}
    want_cats = sorted(i for i in names if i not in (0, 255))
    got_cats = [c["id"] for c in doc["categories"]]
    if got_cats != want_cats or any(c["name"] != names[c["id"]] for c in doc["categories"]):
        fail("%s: categories %r, classes %r" % (path, doc["categories"], names))
    else:
        ok()
    ids = [im["id"] for im in doc["images"]]
    if len(set(ids)) != len(ids) or len(ids) != len(recs):
        fail("%s: %d images, %d unique ids, %d records" % (path, len(ids), len(set(ids)), len(recs)))
        return
    by_image = {}
    ann_ids = set()
    for a in doc["annotations"]:
        by_image.setdefault(a["image_id"], []).append(a)
        ann_ids.add(a["id"])
    if len(ann_ids) != len(doc["annotations"]):
        fail("%s: annotation ids repeat" % path)
    n = 0
    for im, rec in zip(doc["images"], recs):
        if im["file_name"] != rec["image"] or (im["width"], im["height"]) != (rec["width"], rec["height"]) \
                or not os.path.isfile(os.path.join(root, im["file_name"])):
            fail("%s: image %r for record %s" % (path, im, rec["id"]))
            continue
        inst = instances(root, rec["instances"])
        h, w = inst.shape
        klass = {o["instance"]: o["class"] for o in rec["objects"]}
        seen = set()
        for a in by_image.get(im["id"], []):
            where = "%s: record %s instance %s" % (path, rec["id"], a.get("instance_id"))
            seg = a["segmentation"]
            if seg.get("size") != [h, w]:
                fail("%s: size %r, want [%d, %d]" % (where, seg.get("size"), h, w))
                continue
            try:
                m = rle_decode(seg["counts"], h, w)
            except ValueError as e:
                fail("%s: %s" % (where, e))
                continue
            truth = inst == a["instance_id"]
            if not np.array_equal(m, truth):
                fail("%s: decoded mask differs from the instance mask at %d pixels" % (where, int((m != truth).sum())))
                continue
            x0, y0, x1, y1 = box_of(truth)
            if a["bbox"] != [x0, y0, x1 - x0, y1 - y0] or a["area"] != int(truth.sum()) or a["iscrowd"] != 0 \
                    or a["category_id"] != klass.get(a["instance_id"]):
                fail("%s: bbox %r area %r iscrowd %r category %r; mask box %r area %d class %r" % (
                    where, a["bbox"], a["area"], a["iscrowd"], a["category_id"], (x0, y0, x1, y1),
                    int(truth.sum()), klass.get(a["instance_id"])))
                continue
            seen.add(a["instance_id"])
            n += 1
            ok()
        present = set(int(v) for v in np.unique(inst)) - {0}
        if seen != present:
            fail("%s: record %s: exported instances %s, the mask holds %s" % (path, rec["id"], sorted(seen), sorted(present)))
    if n == 0:
        fail("%s: no annotation checked" % path)


def check_center_boxes(root, out):
    info, recs = read_dataset(root)
    with open(os.path.join(out, "classes.txt")) as f:
        lines = f.read().split("\n")
    if lines[-1] != "":
        fail("%s: classes.txt does not end in a newline" % out)
    class_names = lines[:-1]
    names = {c["id"]: c["name"] for c in info["classes"]}
    if class_names != [names[i] for i in sorted(names) if i not in (0, 255)]:
        fail("%s: classes.txt %r" % (out, class_names))
    files = set(os.listdir(os.path.join(out, "labels")))
    if len(files) != len(recs):
        fail("%s: %d label files for %d records" % (out, len(files), len(recs)))
    for rec in recs:
        stem = os.path.splitext(os.path.basename(rec["image"]))[0]
        with open(os.path.join(out, "labels", stem + ".txt")) as f:
            rows = [l.split(" ") for l in f.read().splitlines()]
        inst = instances(root, rec["instances"])
        h, w = inst.shape
        objs = [o for o in rec["objects"] if (inst == o["instance"]).any()]
        present = set(int(v) for v in np.unique(inst)) - {0}
        if len(rows) != len(objs) or len(objs) != len(present):
            fail("%s %s: %d lines, %d objects, %d instances" % (out, stem, len(rows), len(objs), len(present)))
            continue
        for row, o in zip(rows, objs):
            where = "%s %s instance %d" % (out, stem, o["instance"])
            if len(row) != 5:
                fail("%s: line %r" % (where, row))
                continue
            k = int(row[0])
            cx, cy, bw, bh = (float(v) for v in row[1:])
            if not (0 <= k < len(class_names)) or class_names[k] != o["class_name"]:
                fail("%s: class %d for a %s" % (where, k, o["class_name"]))
                continue
            if not all(0 <= v <= 1 for v in (cx, cy, bw, bh)):
                fail("%s: %r outside [0, 1]" % (where, row))
                continue
            got = np.array([(cx - bw / 2) * w, (cy - bh / 2) * h, (cx + bw / 2) * w, (cy + bh / 2) * h])
            want = np.array(box_of(inst == o["instance"]), dtype=float)
            if np.abs(got - want).max() > 1e-6:
                fail("%s: box %r, the mask's %r" % (where, got.tolist(), want.tolist()))
                continue
            ok()


def main(trueset, dirs):
    if not dirs:
        print("usage: test_export.py TRUESET DIR [DIR ...]", file=sys.stderr)
        return 2
    with tempfile.TemporaryDirectory() as tmp:
        for i, root in enumerate(dirs):
            js = os.path.join(tmp, "objects-%d.json" % i)
            boxes = os.path.join(tmp, "boxes-%d" % i)
            for fmt, out in (("objects-json", js), ("center-boxes", boxes)):
                p = subprocess.run([trueset, "export", root, "--format", fmt, "--out", out, "--quiet"],
                                   capture_output=True, text=True)
                if p.returncode != 0:
                    fail("export %s %s: exit %d: %s" % (root, fmt, p.returncode, p.stderr.strip()))
            if os.path.isfile(js):
                check_objects_json(root, js)
            if os.path.isdir(boxes):
                check_center_boxes(root, boxes)
    print("%d passed, %d failed" % (passed, failed))
    return 1 if failed or passed == 0 else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1], sys.argv[2:]))
