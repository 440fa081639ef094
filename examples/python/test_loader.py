"""Check trueset_loader.py against trueset datasets.

    python3 test_loader.py DIR [DIR ...]

For every record of every DIR, through the loader: the arrays have the
record's width and height and the expected dtypes; every class id in the
mask is in the class table; the boxes and areas recomputed here with numpy
from the instance array equal the manifest's; every pixel's class equals its
instance's class; the boxes, classes and targets the loader returns equal
the manifest's, read here independently, line by line. Then: every split of
load_splits together holds every record once; Pillow's two modes for 16-bit
PNGs ("I" and "I;16") give the same ids; record paths that leave the folder
are refused; a dataset.json whose format is not "trueset-dataset/2" is
refused, naming the format; collate stacks a batch; and the PyTorch wrapper works (with a
minimal stand-in for torch where PyTorch is not installed).

Prints one line per failure and ends with "N passed, M failed"; exits 1 if
anything failed.
"""

import json
import os
import shutil
import subprocess
import sys
import tempfile
import traceback

import numpy as np
from PIL import Image

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)
import trueset_loader as tl  # noqa: E402

passed = 0
failed = 0


def check(name, fn):
    """Run one named check; fn raises AssertionError (or anything) on failure."""
    global passed, failed
    try:
        fn()
        passed += 1
    except Exception as e:  # report every failure, keep going
        failed += 1
        msg = str(e) if isinstance(e, AssertionError) else traceback.format_exc().strip().splitlines()[-1]
        print("FAIL %s: %s" % (name, msg))


def manifest_lines(d):
    """The records of d/manifest.jsonl, read without the loader."""
    with open(os.path.join(d, "manifest.jsonl"), encoding="utf-8") as f:
        return [json.loads(line) for line in f if line.strip()]


def boxes_from_instances(inst, ids):
    """{id: ([x0, y0, x1, y1], area)} measured from the instance array,
    x1 and y1 exclusive (pixel x covers [x, x+1))."""
    out = {}
    for i in ids:
        ys, xs = np.nonzero(inst == i)
        if len(xs) == 0:
            out[i] = (None, 0)
        else:
            out[i] = ([int(xs.min()), int(ys.min()), int(xs.max()) + 1, int(ys.max()) + 1], int(len(xs)))
    return out


def check_record(s, rec, info):
    h, w = rec["height"], rec["width"]
    img, mask, inst = s["image"], s["mask"], s["instances"]
    # "mixed": a plain folder of gray and color images, each kept as it is
    want_img = {"gray": [(h, w)], "rgb": [(h, w, 3)]}.get(info["mode"], [(h, w), (h, w, 3)])
    assert img.shape in want_img, "image shape %s, want %s" % (img.shape, " or ".join(map(str, want_img)))
    assert mask.shape == (h, w), "mask shape %s, want %s" % (mask.shape, (h, w))
    assert inst.shape == (h, w), "instances shape %s, want %s" % (inst.shape, (h, w))
    assert img.dtype == np.uint8 and mask.dtype == np.uint8, "dtypes %s %s" % (img.dtype, mask.dtype)
    assert inst.dtype == np.int32, "instances dtype %s" % inst.dtype
    assert s["id"] == rec["id"] and s["split"] == rec["split"], "id/split %s/%s" % (s["id"], s["split"])

    table = {c["id"] for c in info["classes"]}
    present = set(int(v) for v in np.unique(mask))
    unknown = present - table - {tl.IGNORE_ID}
    assert not unknown, "mask class ids %s not in the class table %s" % (sorted(unknown), sorted(table))

    objs = rec["objects"]
    ids = [o["instance"] for o in objs]
    in_array = set(int(v) for v in np.unique(inst)) - {0}
    assert in_array == set(ids), "instance ids in the PNG %s, in the record %s" % (sorted(in_array), sorted(ids))
    measured = boxes_from_instances(inst, ids)
    for o in objs:
        box, area = measured[o["instance"]]
        assert "bbox" not in o and "visible" not in o and "kind" not in o, \
            "instance %d carries a trueset-dataset/1 key: %s" % (o["instance"], sorted(o))
        assert box == o["box_x0y0x1y1"], "instance %d: box from pixels %s, manifest %s" % (o["instance"], box, o["box_x0y0x1y1"])
        assert area == o["area"], "instance %d: area from pixels %d, manifest %d" % (o["instance"], area, o["area"])

    # every pixel's class is its instance's class; no instance: background
    # (or the ignore id, which augmentation may leave out of frame)
    lut = np.zeros(max(ids + [0]) + 1, dtype=np.int64)
    for o in objs:
        lut[o["instance"]] = o["class"]
    expect = lut[inst]
    bad = (mask != expect) & ~((inst == 0) & (mask == tl.IGNORE_ID))
    if bad.any():
        y, x = [int(v[0]) for v in np.nonzero(bad)]
        raise AssertionError("%d pixels disagree; first (%d, %d): class %d, instance %d is class %d"
                             % (int(bad.sum()), x, y, mask[y, x], inst[y, x], expect[y, x]))

    assert s["boxes"].shape == (len(objs), 4), "boxes shape %s" % (s["boxes"].shape,)
    assert s["boxes"].tolist() == [o["box_x0y0x1y1"] for o in objs], "loader boxes differ from the manifest"
    assert s["classes"].tolist() == [o["class"] for o in objs], "loader classes differ from the manifest"
    assert s["targets"] == rec["targets"], "targets %s, manifest %s" % (s["targets"], rec["targets"])
    assert s["class_table"] == info["classes"], "class table differs from dataset.json"


def check_dataset(d):
    with open(os.path.join(d, "dataset.json"), encoding="utf-8") as f:
        info = json.load(f)
    recs = manifest_lines(d)
    ds = tl.TruesetDataset(d, check_sha256=True)
    def counts():
        assert len(recs) > 0, "no records"
        assert len(ds) == len(recs), "loader has %d records, manifest %d" % (len(ds), len(recs))
    check(d + " records", counts)
    for i, rec in enumerate(recs):
        check("%s record %s" % (d, rec["id"]), lambda i=i, rec=rec: check_record(ds[i], rec, info))

    def splits():
        parts = tl.load_splits(d)
        assert list(parts) == info["splits"]["names"], "splits %s" % list(parts)
        seen = []
        for name, part in parts.items():
            assert len(part) == info["splits"]["counts"][name], "split %s: %d samples, dataset.json says %d" % (
                name, len(part), info["splits"]["counts"][name])
            assert all(r["split"] == name for r in part.records), "split %s holds another split's records" % name
            seen += [r["id"] for r in part.records]
        assert sorted(seen) == sorted(r["id"] for r in recs), "splits do not hold every record once"
        first = next(tl.iter_split(d, info["splits"]["names"][0]))
        assert first["split"] == info["splits"]["names"][0]
    check(d + " splits", splits)

    def sixteen_bit_modes():
        p = os.path.join(d, recs[0]["instances"])
        with Image.open(p) as img:
            a = tl.instance_ids(img)
            b = tl.instance_ids(img.convert("I;16"))
            c = tl.instance_ids(img.convert("I"))
        assert a.dtype == b.dtype == c.dtype == np.int32
        assert (a == b).all() and (a == c).all(), "I and I;16 give different ids"
    check(d + " 16-bit modes", sixteen_bit_modes)

    def mask_is_indices():
        p = os.path.join(d, recs[0]["mask"])
        with Image.open(p) as img:
            assert img.mode == "P", "mask opens as %r, want P" % img.mode
            try:
                tl.mask_ids(img.convert("RGB"))
            except ValueError:
                return
        raise AssertionError("an RGB mask was taken as class ids")
    check(d + " mask mode", mask_is_indices)

    def batch():
        b = tl.collate([ds[0], ds[1]] if len(ds) > 1 else [ds[0]])
        n = min(2, len(ds))
        assert b["image"].shape[0] == n and b["mask"].shape == (n, recs[0]["height"], recs[0]["width"])
        assert len(b["boxes"]) == n and set(b["targets"]) == set(recs[0]["targets"])
    check(d + " collate", batch)


def check_refusals(d):
    """Paths out of the folder are refused; a good copy still loads."""
    recs = manifest_lines(d)
    outside = tempfile.mkdtemp(prefix="trueset-outside-")
    try:
        def make(edit, link_images=False):
            t = tempfile.mkdtemp(dir=outside)
            shutil.copy(os.path.join(d, "dataset.json"), t)
            rec = dict(recs[0])
            edit(rec)
            with open(os.path.join(t, "manifest.jsonl"), "w", encoding="utf-8") as f:
                f.write(json.dumps(rec) + "\n")
            for key in ("image", "mask", "instances"):
                sub = os.path.dirname(recs[0][key])
                if link_images and key == "image":
                    if not os.path.exists(os.path.join(t, sub)):
                        os.symlink(os.path.abspath(os.path.join(d, sub)), os.path.join(t, sub))
                    continue
                os.makedirs(os.path.join(t, sub), exist_ok=True)
                shutil.copy(os.path.join(d, recs[0][key]), os.path.join(t, recs[0][key]))
            return t

        def refused(t, what):
            try:
                ds = tl.TruesetDataset(t)
                ds[0]
            except ValueError:
                return
            raise AssertionError("%s was not refused" % what)

        check("refuse ..", lambda: refused(make(lambda r: r.update(image="../" + os.path.basename(d) + "/" + r["image"])), "../ path"))
        check("refuse absolute", lambda: refused(make(lambda r: r.update(mask=os.path.abspath(os.path.join(d, r["mask"])))), "absolute path"))
        check("refuse images/../..", lambda: refused(make(lambda r: r.update(instances="images/../../x.png")), "images/../.. path"))
        check("refuse symlink out", lambda: refused(make(lambda r: None, link_images=True), "symbolic link out of the folder"))

        def good_copy():
            s = tl.TruesetDataset(make(lambda r: None), check_sha256=True)[0]
            assert s["id"] == recs[0]["id"]
        check("a copy with paths inside loads", good_copy)

        # dataset.json's "format": only trueset-dataset/2 is read; any other
        # (the old /1 with its "bbox" keys, a future /3, none at all, not a
        # string) is refused with ValueError naming what was found.
        def wrong_format(fmt, named):
            t = make(lambda r: None)
            p = os.path.join(t, "dataset.json")
            with open(p, encoding="utf-8") as f:
                info = json.load(f)
            if fmt is None:
                info.pop("format", None)
            else:
                info["format"] = fmt
            with open(p, "w", encoding="utf-8") as f:
                json.dump(info, f)
            try:
                tl.TruesetDataset(t)
            except ValueError as e:
                msg = str(e)
                assert named in msg, "refusal %r does not name %r" % (msg, named)
                assert tl.FORMAT in msg, "refusal %r does not say which format the loader reads" % msg
                return
            raise AssertionError("format %r was not refused" % (fmt,))
        def reads_two():
            assert tl.FORMAT == "trueset-dataset/2", "loader FORMAT %r" % tl.FORMAT
            with open(os.path.join(d, "dataset.json"), encoding="utf-8") as f:
                got = json.load(f).get("format")
            assert got == tl.FORMAT, "trueset wrote format %r, the loader reads %r" % (got, tl.FORMAT)
        check("format is trueset-dataset/2", reads_two)
        check("refuse format /1", lambda: wrong_format("trueset-dataset/1", "'trueset-dataset/1'"))
        check("refuse format /3", lambda: wrong_format("trueset-dataset/3", "'trueset-dataset/3'"))
        check("refuse no format", lambda: wrong_format(None, 'no "format"'))
        check("refuse format 2", lambda: wrong_format(2, "format 2"))
    finally:
        shutil.rmtree(outside)


STUB = '''
import numpy as np
float64 = "float64"
class Tensor(object):
    def __init__(self, a):
        self.a = np.asarray(a)
        self.shape = self.a.shape
def from_numpy(a):
    assert isinstance(a, np.ndarray)
    return Tensor(a)
def tensor(v, dtype=None):
    return Tensor(np.asarray(v, dtype=np.float64))
'''

TORCH_CHECK = '''
import sys
import trueset_loader as tl
ds = tl.TorchDataset(sys.argv[1], split=None, transform=lambda s: dict(s, seen=True))
assert len(ds) > 1 and ds[0]["seen"]
b = tl.torch_collate([ds[0], ds[1]])
assert tuple(b["image"].shape)[0] == 2, b["image"].shape
assert len(b["boxes"]) == 2
print("ok")
'''


def check_torch(d):
    """TorchDataset and torch_collate: with PyTorch if it is installed,
    else with a minimal stand-in module (only what the wrapper touches)."""
    env = dict(os.environ)
    stub_dir = None
    try:
        import torch  # noqa: F401
        name = "torch wrapper (PyTorch)"
    except ImportError:
        stub_dir = tempfile.mkdtemp(prefix="trueset-torch-stub-")
        os.makedirs(os.path.join(stub_dir, "torch", "utils"))
        with open(os.path.join(stub_dir, "torch", "__init__.py"), "w") as f:
            f.write(STUB)
        with open(os.path.join(stub_dir, "torch", "utils", "__init__.py"), "w") as f:
            f.write("")
        with open(os.path.join(stub_dir, "torch", "utils", "data.py"), "w") as f:
            f.write("class Dataset(object):\n    pass\n")
        name = "torch wrapper (stand-in torch module; PyTorch is not installed)"
    env["PYTHONPATH"] = os.pathsep.join(p for p in (stub_dir, HERE, env.get("PYTHONPATH")) if p)

    def run():
        p = subprocess.run([sys.executable, "-c", TORCH_CHECK, d], env=env, stdout=subprocess.PIPE,
                           stderr=subprocess.STDOUT, universal_newlines=True)
        assert p.returncode == 0 and p.stdout.strip() == "ok", p.stdout.strip()[-500:]
    try:
        check(name, run)
    finally:
        if stub_dir:
            shutil.rmtree(stub_dir)

    # Without torch the wrapper is simply absent.
    if stub_dir is not None:
        def absent():
            import trueset_loader
            assert not hasattr(trueset_loader, "TorchDataset"), "TorchDataset defined without torch"
        check("no torch, no TorchDataset", absent)


def main(dirs):
    if not dirs:
        print("usage: test_loader.py DIR [DIR ...]", file=sys.stderr)
        return 2
    for d in dirs:
        check_dataset(d)
    check_refusals(dirs[0])
    check_torch(dirs[0])
    print("%d passed, %d failed" % (passed, failed))
    return 1 if failed or passed == 0 else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
