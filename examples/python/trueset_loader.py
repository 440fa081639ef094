"""Read a trueset dataset folder in Python.

Needs numpy and Pillow. If PyTorch is importable, TorchDataset (a
torch.utils.data.Dataset) and torch_collate are defined as well.

    from trueset_loader import TruesetDataset
    train = TruesetDataset("dice", split="train")
    s = train[0]
    s["image"]      # H x W (gray) or H x W x 3 (rgb), uint8
    s["mask"]       # H x W uint8 class ids (0 = background, 255 = ignore)
    s["instances"]  # H x W int32 instance ids (0 = none)
    s["boxes"]      # N x 4 int64 [x0, y0, x1, y1], x1 and y1 exclusive
                    # (each object's "box_x0y0x1y1" in the manifest)
    s["classes"]    # N int64 class ids, one per box
    s["targets"]    # {"dice": 3.0, ...}

It reads format "trueset-dataset/2" only (dataset.json's "format"; any
other is refused with ValueError naming it). The format is described in
the README's "On disk" section: dataset.json,
manifest.jsonl (one JSON record per line), images/, masks/ (8-bit indexed
PNG whose palette indices are the class ids) and instances/ (16-bit gray
PNG whose values are the instance ids). Every path a record names must stay
inside the dataset folder; a path that leaves it (absolute, "..", or a
symbolic link pointing out) is refused with ValueError.
"""

import hashlib
import json
import os

import numpy as np
from PIL import Image

try:
    import torch
    import torch.utils.data
except ImportError:  # PyTorch is optional
    torch = None

FORMAT = "trueset-dataset/2"
IGNORE_ID = 255

__all__ = ["FORMAT", "IGNORE_ID", "TruesetDataset", "check_format", "load_splits", "iter_split",
           "collate", "read_mask", "read_instances", "read_image", "safe_path", "dump_batch"]


def safe_path(root, rel):
    """Return root/rel, refusing a record path that leaves root.

    Like the Go side (manifest.SafeRel and ResolveInside): rel must be a
    clean relative path with forward slashes and no ".." part, and after
    resolving symbolic links it must still be inside root.
    """
    if not isinstance(rel, str) or rel == "" or "\\" in rel or rel.startswith("/") or os.path.isabs(rel):
        raise ValueError("path %r leaves the dataset folder" % (rel,))
    parts = rel.split("/")
    if any(p in ("", ".", "..") for p in parts):
        raise ValueError("path %r leaves the dataset folder (or is not clean)" % (rel,))
    real_root = os.path.realpath(root)
    p = os.path.join(real_root, *parts)
    real = os.path.realpath(p)
    if os.path.commonpath([real_root, real]) != real_root:
        raise ValueError("path %r is a symbolic link to %s, outside the dataset folder" % (rel, real))
    return p


def read_image(path, mode=None):
    """The image as uint8: H x W for gray, H x W x 3 for rgb.

    mode is the dataset's "gray" or "rgb"; an image stored otherwise (a
    JPEG, a palette image) is converted to it. With "mixed" (a plain folder
    of gray and color images) each image stays gray or RGB as stored.
    """
    with Image.open(path) as img:
        want = {"gray": "L", "rgb": "RGB"}.get(mode, img.mode if img.mode in ("L", "RGB") else "RGB")
        if img.mode != want:
            img = img.convert(want)
        return np.array(img, dtype=np.uint8)


def mask_ids(img):
    """Class ids of an opened semantic mask: its palette indices.

    The mask is an indexed PNG (Pillow mode "P"); np.array of a "P" image
    gives the indices themselves. It is never converted to RGB, which would
    give the palette colors instead of the ids. An 8-bit gray mask ("L") is
    taken as ids as well.
    """
    if img.mode not in ("P", "L"):
        raise ValueError("semantic mask has Pillow mode %r; want an 8-bit indexed PNG (mode P)" % img.mode)
    return np.array(img, dtype=np.uint8)


def read_mask(path):
    """H x W uint8 class ids from an indexed PNG mask."""
    with Image.open(path) as img:
        try:
            return mask_ids(img)
        except ValueError as e:
            raise ValueError("%s: %s" % (path, e))


def instance_ids(img):
    """Instance ids of an opened 16-bit gray PNG, as H x W int32.

    Pillow opens 16-bit grayscale PNGs as mode "I" (32-bit ints) in some
    versions and "I;16" (or "I;16B") in others; both give the same values.
    int32 rather than uint16 so that PyTorch's default collation takes it.
    """
    if img.mode == "I" or img.mode.startswith("I;16"):
        a = np.array(img)
    else:
        raise ValueError("instance mask has Pillow mode %r; want a 16-bit grayscale PNG (mode I;16 or I)" % img.mode)
    a = a.astype(np.int32, copy=False)
    if a.size and (a.min() < 0 or a.max() > 65535):
        raise ValueError("instance ids outside 0..65535")
    return a


def read_instances(path):
    """H x W int32 instance ids from a 16-bit gray PNG (0 = none)."""
    with Image.open(path) as img:
        try:
            return instance_ids(img)
        except ValueError as e:
            raise ValueError("%s: %s" % (path, e))


def check_format(info, where="dataset.json"):
    """Refuse a dataset.json whose "format" is not FORMAT, naming it.

    Formats change the record's keys (trueset-dataset/1 had "bbox",
    "visible", "kind"; /2 has "box_x0y0x1y1", "shown", "shape"), so a
    loader must never guess: it reads exactly the format it was written for.
    """
    got = info.get("format") if isinstance(info, dict) else None
    if got != FORMAT:
        what = "no \"format\"" if got is None else "format %r" % (got,)
        raise ValueError("%s: %s; this loader reads only %r (regenerate the set with a current trueset, "
                         "or use the loader that came with the tool that wrote it)" % (where, what, FORMAT))


def _sha256(path):
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for chunk in iter(lambda: f.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def _read_manifest(path):
    records = []
    with open(path, encoding="utf-8") as f:
        for n, line in enumerate(f, 1):
            if not line.strip():
                continue
            try:
                records.append(json.loads(line))
            except ValueError as e:
                raise ValueError("%s:%d: %s" % (path, n, e))
    return records


class TruesetDataset(object):
    """The samples of one split (or all of them) of a trueset dataset.

    root: the dataset folder (it must hold dataset.json: a folder without it
    is incomplete). split: a split name such as "train", or None for every
    sample. check_sha256: compare every file with its record's checksum
    when it is read.

    Attributes: info (dataset.json as a dict), class_table (its list of
    {id, name, color}), class_names ({id: name}), split_names, records
    (the manifest records of this split, in index order).
    """

    def __init__(self, root, split=None, check_sha256=False):
        self.root = root
        self.check_sha256 = check_sha256
        dpath = os.path.join(root, "dataset.json")
        if not os.path.exists(dpath):
            raise FileNotFoundError("%s: missing: the dataset is incomplete or not a trueset dataset" % dpath)
        with open(dpath, encoding="utf-8") as f:
            self.info = json.load(f)
        check_format(self.info, dpath)
        self.class_table = self.info["classes"]
        self.class_names = {c["id"]: c["name"] for c in self.class_table}
        self.split_names = list(self.info["splits"]["names"])
        if split is not None and split not in self.split_names:
            raise ValueError("no split %r in %s; it has %s" % (split, root, ", ".join(self.split_names)))
        self.split = split
        records = _read_manifest(os.path.join(root, "manifest.jsonl"))
        for r in records:  # refuse a bad path before any file is opened
            for key in ("image", "mask", "instances"):
                safe_path(root, r[key])
        self.records = [r for r in records if split is None or r["split"] == split]

    def __len__(self):
        return len(self.records)

    def __iter__(self):
        for i in range(len(self.records)):
            yield self[i]

    def _file(self, rec, key):
        p = safe_path(self.root, rec[key])
        if self.check_sha256:
            got, want = _sha256(p), rec["sha256"][key]
            if got != want:
                raise ValueError("record %s: %s has SHA-256 %s, the record says %s" % (rec["id"], rec[key], got, want))
        return p

    def __getitem__(self, i):
        rec = self.records[i]
        image = read_image(self._file(rec, "image"), self.info.get("mode"))
        mask = read_mask(self._file(rec, "mask"))
        instances = read_instances(self._file(rec, "instances"))
        shape = (rec["height"], rec["width"])
        for name, a in (("image", image), ("mask", mask), ("instances", instances)):
            if a.shape[:2] != shape:
                raise ValueError("record %s: %s is %dx%d, the record says %dx%d"
                                 % (rec["id"], rec[name], a.shape[1], a.shape[0], shape[1], shape[0]))
        objects = rec.get("objects") or []
        return {
            "id": rec["id"],
            "split": rec["split"],
            "group": rec["group"],
            "image": image,
            "mask": mask,
            "instances": instances,
            "boxes": np.array([o["box_x0y0x1y1"] for o in objects], dtype=np.int64).reshape(-1, 4),
            "classes": np.array([o["class"] for o in objects], dtype=np.int64),
            "instance_ids": np.array([o["instance"] for o in objects], dtype=np.int64),
            "targets": dict(rec.get("targets") or {}),
            "class_table": self.class_table,
            "record": rec,
        }


def load_splits(root, **kwargs):
    """{split name: TruesetDataset} for every split in dataset.json."""
    first = TruesetDataset(root, **kwargs)
    out = {}
    for name in first.split_names:
        ds = TruesetDataset.__new__(TruesetDataset)
        ds.__dict__.update(first.__dict__)
        ds.split = name
        ds.records = [r for r in first.records if r["split"] == name]
        out[name] = ds
    return out


def iter_split(root, split, **kwargs):
    """Yield the sample dicts of one split in index order."""
    return iter(TruesetDataset(root, split=split, **kwargs))


_STACK = ("image", "mask", "instances")


def collate(samples):
    """Batch sample dicts: image, mask and instances stacked into arrays
    (when all have one size, else lists); boxes, classes and instance_ids
    as lists (their lengths differ); targets as {name: list}; ids as a list.
    """
    out = {}
    for k in _STACK:
        arrs = [s[k] for s in samples]
        same = all(a.shape == arrs[0].shape for a in arrs)
        out[k] = np.stack(arrs) if same else arrs
    for k in ("boxes", "classes", "instance_ids", "id", "split", "group"):
        out[k] = [s[k] for s in samples]
    names = sorted({n for s in samples for n in s["targets"]})
    out["targets"] = {n: [s["targets"].get(n) for s in samples] for n in names}
    return out


def dump_batch(path, ids, images, masks=None, compress=False, **targets):
    """Save one batch exactly as the model receives it, for `trueset readback`.

    ids: the samples' record ids (strings) or record indices (integers).
    images: N x C x H x W, N x H x W x C or N x H x W, any dtype. masks:
    N x H x W (optional). targets: one array of N values per target, named
    as the dataset names it (dice=..., pip_total=...). Each may be a numpy
    array, a list or a PyTorch tensor (moved to the CPU; float16 is saved
    as float32). Writes a NumPy .npz file (np.savez, or np.savez_compressed
    with compress=True).

        dump_batch("batch.npz", batch["id"], x, y, dice=batch["targets"]["dice"])
    """
    def arr(x, what):
        if hasattr(x, "detach"):  # a torch.Tensor
            x = x.detach().cpu().numpy()
        a = np.asarray(x)
        if a.dtype == np.float16:
            a = a.astype(np.float32)
        if a.dtype == object:
            raise ValueError("%s: object arrays cannot be read back; pass numbers or strings" % what)
        return a
    ids = [i.item() if hasattr(i, "item") else i for i in ids]
    if all(isinstance(i, (int, np.integer)) and not isinstance(i, bool) for i in ids):
        id_arr = np.asarray(ids, dtype=np.int64)
    else:
        id_arr = np.asarray([str(i) for i in ids], dtype=str)
    out = {"ids": id_arr, "images": arr(images, "images")}
    if masks is not None:
        out["masks"] = arr(masks, "masks")
    for name, v in targets.items():
        if name in out:
            raise ValueError("a target may not be named %r" % name)
        out[name] = arr(v, name)
    n = len(id_arr)
    for name, a in out.items():
        if a.ndim == 0 or a.shape[0] != n:
            raise ValueError("%s: first axis %s, but there are %d ids" % (name, a.shape[:1], n))
    (np.savez_compressed if compress else np.savez)(path, **out)


if torch is not None:
    __all__ += ["TorchDataset", "torch_collate"]

    class TorchDataset(torch.utils.data.Dataset):
        """A torch.utils.data.Dataset over one split; items are the sample
        dicts of TruesetDataset (numpy arrays), passed through transform if
        one is given. Use torch_collate (or your own) as the DataLoader's
        collate_fn: box counts differ between samples."""

        def __init__(self, root, split=None, transform=None, check_sha256=False):
            self.data = TruesetDataset(root, split=split, check_sha256=check_sha256)
            self.transform = transform

        def __len__(self):
            return len(self.data)

        def __getitem__(self, i):
            s = self.data[i]
            return self.transform(s) if self.transform is not None else s

    def torch_collate(samples):
        """collate, with the stacked arrays, boxes and classes as tensors
        and the numeric targets as float64 tensors."""
        b = collate(samples)
        for k in _STACK:
            if isinstance(b[k], np.ndarray):
                b[k] = torch.from_numpy(b[k])
        for k in ("boxes", "classes", "instance_ids"):
            b[k] = [torch.from_numpy(a) for a in b[k]]
        for n, vals in b["targets"].items():
            if all(isinstance(v, (int, float)) for v in vals):
                b["targets"][n] = torch.tensor(vals, dtype=torch.float64)
        return b
