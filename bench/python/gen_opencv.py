#!/usr/bin/python3
"""gen_opencv.py: bench/run.sh's hand-written Python comparator for `trueset generate`.

What a competent engineer would write in an afternoon with numpy and OpenCV
(Debian's python3-numpy and python3-opencv) to render the same scenes, run as
2 processes (multiprocessing, fork). Usage:

    trueset generate -q --count 1 [--recipe FILE] --out ONE     # only for ONE/dataset.json
    /usr/bin/python3 bench/python/gen_opencv.py --recipe-json ONE/dataset.json \
        --count 20000 --workers 2 --out DIR

It reads the recipe as trueset normalized it (dataset.json's "recipe": every
default filled in), so it draws the same scene the recipe describes; it
refuses, naming it, any part of a recipe it does not implement.

The same work as trueset generate:
  - the same canvas (gray), the same classes and per-class object counts
    (uniform in the recipe's count range), sizes, aspects, angles, tones,
    ring inner ratios, polygon sides and cross thicknesses, each uniform in
    the recipe's range; the same outlines (ring, polygon, cross, bar,
    circle/ellipse, rectangle, triangle, star) about the object's center,
    rotated clockwise by its angle;
  - the scatter layout: positions uniform inside the region, every object's
    rotated box kept apart from the others' by min_gap (separating-axis
    test), up to 200 tries an object and 40 attempts a sample;
  - background value noise as the recipe's: a lattice of uniform values
    every `cell` pixels (cell drawn per sample), smoothstep-blended in x and y,
    mapped onto the intensity range;
  - each object filled once with antialiasing (cv2.fillPoly, LINE_AA, 4 bits
    of subpixel precision) into a coverage buffer that is both its alpha for
    compositing and, where coverage >= 0.5, its claim on the masks (topmost
    wins): an 8-bit class mask and a 16-bit instance mask;
  - an attempt whose object keeps fewer than least_pixels pixels or less than
    least_shown of its own coverage is drawn again;
  - labels measured from the instance mask: box [x0, y0, x1, y1), area,
    shown share, centroid and second-moment size; count targets per class and
    in total, from the measured objects;
  - a split dealt per stratum (the recipe's stratify target) by a seeded
    shuffle, the stratum known from the content draw before rendering;
  - three PNG files per sample (cv2.imencode at OpenCV's defaults, the encoder
    and settings cv2.imwrite uses; encoded to memory so the file's SHA-256 is
    taken without reading it back), a SHA-256 of each, and one JSON line per
    sample in index order in manifest.jsonl, then a dataset.json.

Not the same (each makes this comparator's job lighter, or no heavier):
  - curves are polygons (about one vertex per 2 pixels of outline, at least
    16), not Bezier curves flattened by a vector rasterizer; OpenCV's
    antialiasing is its own (its fill grows a shape by about half a pixel,
    so outlines are first moved half a pixel inward), so edge pixels and
    areas differ slightly;
  - the semantic mask is plain 8-bit gray (OpenCV writes no palette), not an
    indexed PNG with the class colors;
  - files are written in place (open, write, close), not to a temporary
    name renamed into place; no run marker, lock or resume;
  - numpy's PCG64 per (seed, index) instead of trueset's streams, so the
    scenes are alike in distribution, not pixel for pixel;
  - the split is rounded per stratum by largest remainder, not by controlled
    rounding of the strata x splits table; dataset.json is a short summary;
  - only what these benchmark recipes use: gray canvases, noise or solid
    backgrounds, scatter layouts with max_overlap 0, count targets; no
    glyphs, parts, other layouts or instruments.
"""

import argparse
import hashlib
import json
import math
import multiprocessing
import os
import sys

import cv2
import numpy as np

MAX_ATTEMPTS = 40  # as gen.MaxAttempts
MAX_TRIES = 200  # as gen.MaxTries
SHAPES = {"ring", "polygon", "cross", "bar", "circle", "ellipse", "rectangle", "triangle", "star"}


def die(msg):
    print("gen_opencv.py: " + msg, file=sys.stderr)
    sys.exit(2)


def check_recipe(r):
    """Refuses what this comparator does not implement."""
    if r["canvas"].get("mode", "gray") != "gray":
        die("recipe canvas.mode %r: only gray is implemented" % r["canvas"]["mode"])
    bg = r["background"]
    if bg["kind"] not in ("noise", "solid") or "color" in bg:
        die("recipe background %r: only gray noise or solid is implemented" % bg["kind"])
    for li, layer in enumerate(r["layers"]):
        lay = layer["layout"]
        if lay["kind"] != "scatter" or lay.get("max_overlap", 0) != 0:
            die("recipe layers[%d].layout: only scatter with max_overlap 0 is implemented" % li)
        for oi, o in enumerate(layer["objects"]):
            if o.get("shape") not in SHAPES or o.get("parts") or "color" in o or "value" in o:
                die("recipe layers[%d].objects[%d]: shape %r (or parts, color, value) not implemented" % (li, oi, o.get("shape")))
    for t in r.get("targets", []):
        if t["kind"] != "count":
            die("recipe target %r: only count targets are implemented" % t["name"])
    for k in ("instruments", "bait", "held_out", "label_noise"):
        if r.get(k):
            die("recipe %s: not implemented" % k)


def uni(rng, rg):
    return rg[0] + rng.random() * (rg[1] - rg[0])


def content(r, rng):
    """What a sample contains, before any geometry: one dict per object."""
    objs = []
    names = [c["name"] for c in r["classes"]]
    for li, layer in enumerate(r["layers"]):
        lay = layer["layout"]
        for spec in layer["objects"]:
            lo, hi = spec["count"]
            for _ in range(int(rng.integers(lo, hi + 1))):
                o = {"spec": spec, "layer": li, "class": names.index(spec["class"]) + 1,
                     "class_name": spec["class"], "shape": spec["shape"],
                     "tone": int(round(uni(rng, spec["intensity"]))),
                     "least_shown": lay.get("least_shown", 0), "least_pixels": lay.get("least_pixels", 1)}
                if "sides" in spec:
                    o["sides"] = int(rng.integers(spec["sides"][0], spec["sides"][1] + 1))
                if "inner" in spec:
                    o["inner"] = uni(rng, spec["inner"])
                if "thickness" in spec:
                    o["thickness"] = uni(rng, spec["thickness"])
                if "corner" in spec:
                    o["corner"] = uni(rng, spec["corner"])
                objs.append(o)
    return objs


def stratum_of(r, objs):
    key = (r.get("split") or {}).get("stratify", "")
    if not key:
        return ""
    for t in r["targets"]:
        if t["name"] == key:
            cls = t.get("classes")
            return "%s=%d" % (key, sum(1 for o in objs if not cls or o["class_name"] in cls))
    die("split.stratify %r: only a count target is implemented" % key)


def separated(a, b, gap):
    """Separating-axis test of two oriented boxes (cx, cy, ux, uy, hw, hh), each grown by gap/2."""
    dx, dy = b[0] - a[0], b[1] - a[1]
    for ax, ay in ((a[2], a[3]), (-a[3], a[2]), (b[2], b[3]), (-b[3], b[2])):
        ra = abs(a[4] * (a[2] * ax + a[3] * ay)) + abs(a[5] * (-a[3] * ax + a[2] * ay))
        rb = abs(b[4] * (b[2] * ax + b[3] * ay)) + abs(b[5] * (-b[3] * ax + b[2] * ay))
        if abs(dx * ax + dy * ay) > ra + rb + gap:
            return True
    return False


def place(r, rng, objs):
    """Scatter every object of each layer; False when some object finds no place."""
    for li, layer in enumerate(r["layers"]):
        lay = layer["layout"]
        x0, y0, x1, y1 = lay.get("region") or [0, 0, r["canvas"]["width"], r["canvas"]["height"]]
        gap = lay.get("min_gap", 0)
        placed = []
        for o in objs:
            if o["layer"] != li:
                continue
            spec = o["spec"]
            ok = False
            for _ in range(MAX_TRIES):
                o["size"] = uni(rng, spec["size"])
                o["aspect"] = 1.0 if o["shape"] == "circle" else uni(rng, spec.get("aspect", [1, 1]))
                o["angle"] = uni(rng, spec.get("angle", [0, 0]))
                hw, hh = o["size"] * o["aspect"] / 2, o["size"] / 2
                s, c = math.sin(math.radians(o["angle"])), math.cos(math.radians(o["angle"]))
                ex, ey = abs(c) * hw + abs(s) * hh, abs(s) * hw + abs(c) * hh
                if x1 - x0 < 2 * ex or y1 - y0 < 2 * ey:
                    continue
                cx = x0 + ex + rng.random() * (x1 - x0 - 2 * ex)
                cy = y0 + ey + rng.random() * (y1 - y0 - 2 * ey)
                bx = (cx, cy, c, s, hw, hh)
                if all(separated(bx, q, gap) for q in placed):
                    o["cx"], o["cy"] = cx, cy
                    placed.append(bx)
                    ok = True
                    break
            if not ok:
                return False
    return True


def ellipse_pts(rx, ry):
    n = max(16, int(math.ceil(math.pi * (rx + ry) / 2)))
    a = np.arange(n) * (2 * math.pi / n)
    return np.stack([rx * np.cos(a), ry * np.sin(a)], axis=1)


def round_rect_pts(hw, hh, rad):
    if rad <= 0:
        return np.array([[-hw, -hh], [hw, -hh], [hw, hh], [-hw, hh]], float)
    n = max(4, int(math.ceil(math.pi * rad / 4)))
    pts = []
    for (cx, cy, a0) in ((hw - rad, -hh + rad, -90), (hw - rad, hh - rad, 0), (-hw + rad, hh - rad, 90), (-hw + rad, -hh + rad, 180)):
        a = np.radians(a0 + np.arange(n + 1) * (90 / n))
        pts.append(np.stack([cx + rad * np.cos(a), cy + rad * np.sin(a)], axis=1))
    p = np.concatenate(pts)
    keep = np.ones(len(p), bool)
    keep[:-1] = np.hypot(*(p[1:] - p[:-1]).T) > 1e-9  # a side of length 0 (a bar's ends)
    return p[keep]


def regular_pts(n, hw, hh, odd):
    a = -math.pi / 2 + 2 * math.pi * np.arange(n) / n
    f = np.where(np.arange(n) % 2 == 1, odd, 1.0)
    return np.stack([hw * f * np.cos(a), hh * f * np.sin(a)], axis=1)


def inset(p, d):
    """Moves every edge of a contour d pixels toward its inside (miter joins). Contours run
    clockwise on screen (y down), holes the other way, so (ey, -ex) is each edge's outward normal."""
    e = np.empty_like(p)
    e[:-1] = p[1:] - p[:-1]
    e[-1] = p[0] - p[-1]
    n = e[:, ::-1] / np.hypot(e[:, 0], e[:, 1])[:, None]
    n[:, 1] = -n[:, 1]
    prev = np.empty_like(n)
    prev[1:] = n[:-1]
    prev[0] = n[-1]
    m = prev + n
    m /= (1 + (prev * n).sum(axis=1))[:, None]
    return p - d * m


def outline(o):
    """The object's contours in its own frame (centered, before rotation); the second of a ring is its hole."""
    hw, hh = o["size"] * o["aspect"] / 2, o["size"] / 2
    k = o["shape"]
    if k in ("circle", "ellipse"):
        return [ellipse_pts(hw, hh)]
    if k == "rectangle":
        return [round_rect_pts(hw, hh, 0)]
    if k == "bar":
        return [round_rect_pts(hw, hh, min(hw, hh))]
    if k == "triangle":
        return [np.array([[0, -hh], [hw, hh], [-hw, hh]], float)]
    if k == "polygon":
        return [regular_pts(o["sides"], hw, hh, 1.0)]
    if k == "star":
        return [regular_pts(2 * o["sides"], hw, hh, o["inner"])]
    if k == "ring":
        return [ellipse_pts(hw, hh), ellipse_pts(hw * o["inner"], hh * o["inner"])[::-1]]
    if k == "cross":
        tw, th = hw * o["thickness"], hh * o["thickness"]
        return [np.array([[-tw, -hh], [tw, -hh], [tw, -th], [hw, -th], [hw, th], [tw, th],
                          [tw, hh], [-tw, hh], [-tw, th], [-hw, th], [-hw, -th], [-tw, -th]], float)]
    raise AssertionError(k)


def smooth(u):
    return u * u * (3 - 2 * u)


def background(r, rng, W, H):
    bg = r["background"]
    a, b = round(bg["intensity"][0]), round(bg["intensity"][1])
    if bg["kind"] == "solid":
        return np.full((H, W), a, np.uint8)
    cell = uni(rng, bg["cell"])
    gw, gh = int(math.ceil(W / cell)) + 2, int(math.ceil(H / cell)) + 2
    lat = rng.random((gh, gw)).astype(np.float32)
    # Blending the lattice in x and then in y is a product of two small
    # matrices with two weights a row: t = Wy · lattice · Wxᵀ.
    wx, wy = np.zeros((W, gw), np.float32), np.zeros((H, gh), np.float32)
    for wm, n in ((wx, W), (wy, H)):
        f = (np.arange(n) + 0.5) / cell
        i = f.astype(np.intp)
        u = smooth(f - i)
        wm[np.arange(n), i] = 1 - u
        wm[np.arange(n), i + 1] = u
    t = wy @ (lat @ wx.T)
    return cv2.convertScaleAbs(t, alpha=b - a, beta=a)  # a + t·(b − a), rounded to uint8


def render(r, rng, objs):
    """Background, then each object composited and claimed once; None when an object shows too little."""
    W, H = r["canvas"]["width"], r["canvas"]["height"]
    aa = r["canvas"].get("antialias", True)
    img = background(r, rng, W, H)
    inst = np.zeros((H, W), np.uint16)
    cls = np.zeros((H, W), np.uint8)
    boxes = []
    for i, o in enumerate(objs):
        s, c = math.sin(math.radians(o["angle"])), math.cos(math.radians(o["angle"]))
        rot = np.array([[c, s], [-s, c]])  # row vectors: x' = c·x − s·y, y' = s·x + c·y
        cons = [p @ rot + (o["cx"], o["cy"]) for p in outline(o)]
        if aa:
            # OpenCV's antialiased fill covers pixels whose center is on an
            # edge fully and blends the next ones out: the shape grows by
            # about half a pixel, so it is drawn from an outline half a
            # pixel inside.
            cons = [inset(p, 0.5) for p in cons]
        allp = np.concatenate(cons)
        bx0, by0 = int(math.floor(allp[:, 0].min())), int(math.floor(allp[:, 1].min()))
        bx1, by1 = int(math.ceil(allp[:, 0].max())), int(math.ceil(allp[:, 1].max()))
        cov = np.zeros((by1 - by0, bx1 - bx0), np.uint8)
        # OpenCV's pixel (x, y) is centered on (x, y); ours on (x + 0.5, y + 0.5).
        fixed = [np.rint((p - (bx0 + 0.5, by0 + 0.5)) * 16).astype(np.int32) for p in cons]
        cv2.fillPoly(cov, fixed, 255, lineType=cv2.LINE_AA if aa else cv2.LINE_8, shift=4)
        claim = cov >= 128
        alone = int(np.count_nonzero(claim))
        # Clip to the canvas.
        cx0, cy0, cx1, cy1 = max(bx0, 0), max(by0, 0), min(bx1, W), min(by1, H)
        boxes.append((cx0, cy0, cx1, cy1, alone))
        if cx1 <= cx0 or cy1 <= cy0:
            continue
        cv = cov[cy0 - by0:cy1 - by0, cx0 - bx0:cx1 - bx0]
        cl = claim[cy0 - by0:cy1 - by0, cx0 - bx0:cx1 - bx0]
        if not aa:
            cv = np.where(cl, 255, 0).astype(np.uint8)
        a = cv.astype(np.float32) * (1 / 255)
        sub = img[cy0:cy1, cx0:cx1]
        sub[...] = np.rint(sub * (1 - a) + o["tone"] * a).astype(np.uint8)
        inst[cy0:cy1, cx0:cx1][cl] = i + 1
        cls[cy0:cy1, cx0:cx1][cl] = o["class"]
    # Labels from the instance mask: each object can only be inside its own raster box.
    out = []
    for i, o in enumerate(objs):
        x0, y0, x1, y1, alone = boxes[i]
        area = 0
        if x1 > x0 and y1 > y0:
            ys, xs = np.nonzero(inst[y0:y1, x0:x1] == i + 1)
            area = len(xs)
        shown = area / alone if alone else 0.0
        if area == 0 or area < o["least_pixels"] or shown < o["least_shown"]:
            return None
        xs = xs.astype(np.float64) + x0
        ys = ys.astype(np.float64) + y0
        mx, my = xs.mean(), ys.mean()
        vxx = ((xs - mx) ** 2).mean() + 1 / 12
        vyy = ((ys - my) ** 2).mean() + 1 / 12
        vxy = ((xs - mx) * (ys - my)).mean()
        tr, d = vxx + vyy, math.hypot(vxx - vyy, 2 * vxy)
        l1, l2 = (tr + d) / 2, max((tr - d) / 2, 0)
        ob = {"instance": i + 1, "class": o["class"], "class_name": o["class_name"],
              "box_x0y0x1y1": [int(xs.min()), int(ys.min()), int(xs.max()) + 1, int(ys.max()) + 1],
              "area": area, "shown": round(shown, 4), "shape": o["shape"],
              "center": [round(o["cx"], 3), round(o["cy"], 3)], "size": round(o["size"], 3),
              "aspect": round(o["aspect"], 3), "angle": round(o["angle"], 3), "intensity": o["tone"],
              "measured_center": [round(mx + 0.5, 3), round(my + 0.5, 3)],
              "measured_size": [round(4 * math.sqrt(l1), 3), round(4 * math.sqrt(l2), 3)]}
        for k in ("inner", "thickness", "corner"):
            if k in o:
                ob[k] = round(o[k], 3)
        if "sides" in o:
            ob["sides"] = o["sides"]
        out.append(ob)
    return img, cls, inst, out


R = None  # the recipe, set before the workers fork
OUT = None
SEED = 1


def stratum_at(index):
    return stratum_of(R, content(R, np.random.default_rng([SEED, index, 0])))


def sample(job):
    """Render, encode and write sample index; returns its manifest line."""
    index, split = job
    r = R
    objs = content(r, np.random.default_rng([SEED, index, 0]))
    stratum = stratum_of(r, objs)
    for attempt in range(MAX_ATTEMPTS):
        rng = np.random.default_rng([SEED, index, 1, attempt])
        bgrng = np.random.default_rng([SEED, index, 2, attempt])
        if not place(r, rng, objs):
            continue
        got = render(r, bgrng, objs)
        if got is not None:
            break
    else:
        raise RuntimeError("sample %d: no layout in %d attempts" % (index, MAX_ATTEMPTS))
    img, cls, inst, labels = got
    sid = "%06d" % index
    rec = {"id": sid, "index": index, "split": split, "group": sid, "stratum": stratum,
           "width": img.shape[1], "height": img.shape[0],
           "image": "images/%s.png" % sid, "mask": "masks/%s.png" % sid, "instances": "instances/%s.png" % sid,
           "sha256": {}}
    for key, m in (("image", img), ("mask", cls), ("instances", inst)):
        ok, buf = cv2.imencode(".png", m)
        if not ok:
            raise RuntimeError("encode %s of %s" % (key, sid))
        b = buf.tobytes()
        rec["sha256"][key] = hashlib.sha256(b).hexdigest()
        with open(os.path.join(OUT, rec[key]), "wb") as f:
            f.write(b)
    rec["objects"] = labels
    targets = {}
    for t in r.get("targets", []):
        cl = t.get("classes")
        targets[t["name"]] = sum(1 for ob in labels if not cl or ob["class_name"] in cl)
    rec["targets"] = dict(sorted(targets.items()))
    return json.dumps(rec, separators=(",", ":"))


def allocate(r, keys, seed):
    """Deals the samples to splits per stratum (keys: each sample's; largest remainder, seeded shuffle)."""
    spec = (r.get("split") or {}).get("ratios") or "train=0.8,val=0.1,test=0.1"
    names, ratios = [], []
    for part in spec.split(","):
        n, v = part.split("=")
        names.append(n)
        ratios.append(float(v))
    strata = {}
    for i, k in enumerate(keys):
        strata.setdefault(k, []).append(i)
    out = [None] * len(keys)
    for k in sorted(strata):
        members = strata[k]
        np.random.default_rng([seed, 0x5011, len(members)]).shuffle(members)
        exact = [len(members) * q for q in ratios]
        got = [int(e) for e in exact]
        for j in sorted(range(len(names)), key=lambda j: got[j] - exact[j])[:len(members) - sum(got)]:
            got[j] += 1
        at = 0
        for j, n in enumerate(got):
            for i in members[at:at + n]:
                out[i] = names[j]
            at += n
    return out, names


def main():
    global R, OUT, SEED
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--recipe-json", required=True, help="a trueset dataset.json (its normalized recipe) or a recipe as JSON")
    ap.add_argument("--count", type=int, default=20000)
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--out", required=True)
    a = ap.parse_args()
    with open(a.recipe_json) as f:
        doc = json.load(f)
    R = doc.get("recipe", doc)
    check_recipe(R)
    OUT, SEED = a.out, a.seed
    os.makedirs(OUT)
    for d in ("images", "masks", "instances"):
        os.mkdir(os.path.join(OUT, d))
    cv2.setNumThreads(1)  # one process per core; no thread pool inside each
    with multiprocessing.get_context("fork").Pool(a.workers) as pool:
        # The split first, from every sample's content draw (as trueset does).
        splits, names = allocate(R, pool.map(stratum_at, range(a.count), chunksize=256), a.seed)
        with open(os.path.join(OUT, "manifest.jsonl"), "w") as mf:
            for line in pool.imap(sample, zip(range(a.count), splits), chunksize=16):
                mf.write(line)
                mf.write("\n")
    counts = {n: splits.count(n) for n in names}
    with open(os.path.join(OUT, "dataset.json"), "w") as f:
        json.dump({"writer": "bench/python/gen_opencv.py", "recipe": R, "seed": a.seed, "count": a.count,
                   "width": R["canvas"]["width"], "height": R["canvas"]["height"], "mode": "gray",
                   "classes": [{"id": 0, "name": "background"}] + [{"id": i + 1, "name": c["name"]} for i, c in enumerate(R["classes"])],
                   "splits": counts}, f, indent=1)


if __name__ == "__main__":
    main()
