"""Read a trueset dataset folder in Python.

Needs numpy and Pillow. If PyTorch is importable, TorchDataset (a
torch.utils.data.Dataset), torch_collate and PackedIterableDataset (a
torch.utils.data.IterableDataset over tar packs) are defined as well.

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

A dataset in the packed layout (dataset.json's "layout" kind "packed": each
split as tar packs) is streamed with iter_packed, which yields the same
sample dicts:

    from trueset_loader import iter_packed
    for s in iter_packed("dice-packed", split="train"):
        ...
"""

import hashlib
import io
import json
import os
import random
import tarfile

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
           "collate", "read_mask", "read_instances", "read_image", "safe_path", "dump_batch",
           "iter_packed", "pack_list", "shard_packs", "shuffle_buffer", "SHA256_PAX_KEY"]


def _clean_parts(rel):
    """The parts of a clean relative path with forward slashes and no "."
    or ".." part; ValueError for anything else."""
    if not isinstance(rel, str) or rel == "" or "\\" in rel or rel.startswith("/") or os.path.isabs(rel):
        raise ValueError("path %r leaves the dataset folder" % (rel,))
    parts = rel.split("/")
    if any(p in ("", ".", "..") for p in parts):
        raise ValueError("path %r leaves the dataset folder (or is not clean)" % (rel,))
    return parts


def safe_path(root, rel):
    """Return root/rel, refusing a record path that leaves root.

    Like the Go side (manifest.SafeRel and ResolveInside): rel must be a
    clean relative path with forward slashes and no ".." part, and after
    resolving symbolic links it must still be inside root.
    """
    parts = _clean_parts(rel)
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
        return image_array(img, mode)


def image_array(img, mode=None):
    """read_image of an opened Pillow image."""
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
        if "layout" in self.info:
            raise ValueError("%s: the dataset is in the %r layout (tar packs); read it with iter_packed or "
                             "PackedIterableDataset" % (dpath, (self.info["layout"] or {}).get("kind")))
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
        return _sample(rec, image, mask, instances, self.class_table)


def _sample(rec, image, mask, instances, class_table, check_shape=True):
    """The sample dict both layouts yield, from a record and its arrays."""
    if check_shape:
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
        "class_table": class_table,
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


# The packed layout: each split as tar packs (POSIX pax), each starting with a
# pax global header whose comment names it ("trueset packed layout: packs/
# SPLIT-NNNNN.tar"), each sample's four members consecutive and in index
# order: records/ID.json (its manifest line), then its image, mask and
# instances PNGs under the record's own paths, each checked against the
# record's sha256.

PACK_COMMENT = "trueset packed layout: "
_FILE_KEYS = ("image", "mask", "instances")
_BLOCK = 512


class _Tail(object):
    """A read-only stream that counts the bytes read through it, hashes them
    if asked, and keeps the last ones: enough to check, once tarfile has read
    the last member, what follows it (the end-of-archive marker)."""

    KEEP = 1 << 16  # more than tarfile's read-ahead (tarfile.RECORDSIZE)

    def __init__(self, f, hashed):
        self.f = f
        self.n = 0
        self.h = hashlib.sha256() if hashed else None
        self.kept = bytearray()

    def read(self, size=-1):
        b = self.f.read(size)
        if b:
            self.n += len(b)
            if self.h is not None:
                self.h.update(b)
            self.kept += b
            if len(self.kept) > 2 * self.KEEP:
                del self.kept[:-self.KEEP]
        return b

    def rest(self, pos):
        """Every byte from pos to the end of the stream (reading the rest)."""
        start = self.n - len(self.kept)
        if pos < start:
            raise ValueError("internal: end-of-archive check lost its bytes")
        out = bytes(self.kept[pos - start:])
        while True:
            b = self.read(1 << 16)
            if not b:
                return out
            out += b
            if len(out) > 2 * self.KEEP:  # far past an end marker and its padding: enough to judge
                return out


def _member_bytes(tf, ti, where):
    """The member's bytes (a regular file's, read in full)."""
    if not ti.isreg():
        raise ValueError("%s: member %s is not a regular file" % (where, ti.name))
    try:
        data = tf.extractfile(ti).read()
    except (tarfile.TarError, EOFError, OSError) as e:
        raise ValueError("%s: member %s: %s (the pack is truncated or damaged)" % (where, ti.name, e))
    if len(data) != ti.size:
        raise ValueError("%s: member %s: %d of its %d bytes (the pack is truncated)" % (where, ti.name, len(data), ti.size))
    return data


def _pack_record(name, data, where):
    """The record that starts a sample: member records/ID.json, its manifest line."""
    parts = name.split("/")
    if len(parts) != 2 or parts[0] != "records" or not parts[1].endswith(".json"):
        raise ValueError("%s: member %s where a sample's first member, records/ID.json, should be"
                         % (where, name))
    try:
        rec = json.loads(data.decode("utf-8"))
    except ValueError as e:
        raise ValueError("%s: member %s: %s" % (where, name, e))
    if not isinstance(rec, dict) or not isinstance(rec.get("id"), str):
        raise ValueError("%s: member %s is not a record with an \"id\"" % (where, name))
    if parts[1] != rec["id"] + ".json":
        raise ValueError("%s: member %s holds record %r" % (where, name, rec["id"]))
    for key in _FILE_KEYS:
        try:
            _clean_parts(rec.get(key))
        except ValueError as e:
            raise ValueError("%s: member %s: %s: %s" % (where, name, key, e))
    return rec


def _decoded(rec, files, info, where):
    def decode(key, fn):
        try:
            with Image.open(io.BytesIO(files[key])) as img:
                return fn(img)
        except (ValueError, OSError) as e:
            raise ValueError("%s: member %s: %s" % (where, rec[key], e))
    mode = info.get("mode") if info else None
    image = decode("image", lambda img: image_array(img, mode))
    mask = decode("mask", mask_ids)
    instances = decode("instances", instance_ids)
    try:
        return _sample(rec, image, mask, instances, info.get("classes") if info else None)
    except ValueError as e:
        raise ValueError("%s: %s" % (where, e))


def _iter_pack(f, where, split, decode, info, want=None, check_pack_sha256=False):
    """Yield the samples of one pack, read from the binary stream f in one
    pass. want: the pack's dataset.json entry (its split, samples, bytes and
    sha256), when known."""
    tail = _Tail(f, check_pack_sha256 and want is not None)
    try:
        tf = tarfile.open(fileobj=tail, mode="r|")
    except tarfile.TarError as e:
        raise ValueError("%s: not a tar archive: %s" % (where, e))
    end, last, count = 0, None, 0
    rec, files = None, {}
    while True:
        try:
            ti = tf.next()
        except tarfile.TarError as e:
            raise ValueError("%s: after member %s: %s (truncated or damaged)" % (where, last, e))
        if ti is None:
            break
        tf.members = []  # tarfile keeps every header read; a pack's can be many
        if last is None and not str(tf.pax_headers.get("comment", "")).startswith(PACK_COMMENT):
            raise ValueError("%s: no pax global header with the comment %r...: not a pack of trueset's packed layout"
                             % (where, PACK_COMMENT))
        data = _member_bytes(tf, ti, where)
        last, end = ti.name, ti.offset_data + -(-ti.size // _BLOCK) * _BLOCK
        if rec is None:
            rec = _pack_record(ti.name, data, where)
            if want is not None and rec.get("split") != want["split"]:
                raise ValueError("%s: member %s is a sample of split %r in a pack of split %r"
                                 % (where, ti.name, rec.get("split"), want["split"]))
            continue
        key = _FILE_KEYS[len(files)]
        if ti.name != rec[key]:
            raise ValueError("%s: member %s where record %s's %s, %s, should be (a sample's members: "
                             "records/ID.json, image, mask, instances, in that order)"
                             % (where, ti.name, rec["id"], key, rec[key]))
        sha = (rec.get("sha256") or {}).get(key)
        got = hashlib.sha256(data).hexdigest()
        if got != sha:
            raise ValueError("%s: member %s has SHA-256 %s, record %s says %s (the pack is damaged)"
                             % (where, ti.name, got, rec["id"], sha))
        files[key] = data
        if len(files) < len(_FILE_KEYS):
            continue
        count += 1
        if split is None or rec.get("split") == split:
            if decode:
                yield _decoded(rec, files, info, where)
            else:
                yield _sample(rec, files["image"], files["mask"], files["instances"],
                              info.get("classes") if info else None, check_shape=False)
        rec, files = None, {}
    if rec is not None:
        raise ValueError("%s: the pack ends inside sample %s: member %s is missing after %s "
                         "(truncated or damaged)" % (where, rec["id"], rec[_FILE_KEYS[len(files)]], last))
    # tarfile stops quietly at a header it cannot read after the first one:
    # the pack must go on with the end-of-archive marker, two zero blocks
    # (then only zeros), right after its last member.
    rest = tail.rest(end)
    if len(rest) < 2 * _BLOCK or rest.count(0) != len(rest):
        what = "ends" if len(rest) < 2 * _BLOCK else "has bytes that are not a tar header"
        raise ValueError("%s: the pack %s at byte %d, after member %s, where the end-of-archive marker "
                         "should be (truncated or damaged)" % (where, what, end, last))
    if want is not None:
        if count != want["samples"]:
            raise ValueError("%s: %d samples, dataset.json says %d" % (where, count, want["samples"]))
        if tail.n != want["bytes"]:
            raise ValueError("%s: %d bytes, dataset.json says %d" % (where, tail.n, want["bytes"]))
        if tail.h is not None and tail.h.hexdigest() != want["sha256"]:
            raise ValueError("%s: SHA-256 %s, dataset.json says %s" % (where, tail.h.hexdigest(), want["sha256"]))


def pack_list(source, split=None):
    """(packs, info): the packs to read and dataset.json (or None).

    source: a packed dataset folder (its dataset.json's layout.packs, those
    of split if one is given, in that order), or one pack, or a list of
    packs, each a path or a binary file object open for reading. Each pack
    is a dict: "name", "open" (the path or file object) and, from
    dataset.json, "split", "samples", "bytes" and "sha256".
    """
    if isinstance(source, (str, os.PathLike)) and os.path.isdir(source):
        dpath = os.path.join(source, "dataset.json")
        if not os.path.exists(dpath):
            raise FileNotFoundError("%s: missing: the dataset is incomplete or not a trueset dataset" % dpath)
        with open(dpath, encoding="utf-8") as f:
            info = json.load(f)
        check_format(info, dpath)
        layout = info.get("layout")
        if not isinstance(layout, dict) or layout.get("kind") != "packed":
            raise ValueError("%s: not a packed dataset (no packed \"layout\"); read it with TruesetDataset" % dpath)
        names = list(info["splits"]["names"])
        if split is not None and split not in names:
            raise ValueError("no split %r in %s; it has %s" % (split, source, ", ".join(names)))
        packs = []
        for p in layout["packs"]:
            if split is None or p["split"] == split:
                packs.append(dict(p, open=safe_path(source, p["name"])))
        return packs, info
    if isinstance(source, (str, os.PathLike)) or hasattr(source, "read"):
        source = [source]
    packs = []
    for s in source:
        name = os.fspath(s) if isinstance(s, (str, os.PathLike)) else getattr(s, "name", repr(s))
        packs.append({"name": name, "open": s})
    return packs, None


def _iter_packs(packs, info, split, decode, check_pack_sha256=False):
    for p in packs:
        where = p["name"] if not isinstance(p["open"], (str, os.PathLike)) else os.fspath(p["open"])
        want = p if "samples" in p else None
        if hasattr(p["open"], "read"):
            yield from _iter_pack(p["open"], where, split, decode, info, want, check_pack_sha256)
        else:
            with open(p["open"], "rb") as f:
                yield from _iter_pack(f, where, split, decode, info, want, check_pack_sha256)


def iter_packed(source, split=None, decode=True, check_pack_sha256=False, info=None):
    """Yield the sample dicts of a packed dataset, streaming its packs.

    source: a packed dataset folder, or one or more packs (paths or binary
    file objects: a pipe or an object-storage stream will do, nothing is
    sought). split: only this split's samples (from a folder, only its
    packs are opened). The samples come pack by pack in dataset.json's
    order, so a split's come in index order. decode=False leaves image,
    mask and instances as the PNG bytes. check_pack_sha256: compare each
    pack with dataset.json's SHA-256, at its end. info: a dataset.json dict
    for class_table and the image mode when source is packs alone.

    Every member is checked against its pax SHA-256 and its place in the
    sample; a damaged, truncated or misordered pack raises ValueError naming
    the pack and member when the stream reaches the damage (the samples
    before it have been yielded).
    """
    packs, found = pack_list(source, split)
    return _iter_packs(packs, found or info, split, decode, check_pack_sha256)


def shard_packs(packs, rank=0, world_size=1, worker=0, num_workers=1, shuffle=False, seed=0, epoch=0):
    """The packs one reader takes: with shuffle, the list in the order of a
    permutation drawn from (seed, epoch); then every world_size-th from
    rank, and of those every num_workers-th from worker."""
    packs = list(packs)
    if shuffle:
        random.Random("%d:%d" % (seed, epoch)).shuffle(packs)
    return packs[rank::world_size][worker::num_workers]


def shuffle_buffer(samples, size, seed):
    """Yield samples in an order mixed through a buffer of size items: each
    item out is drawn at random from the buffer (random.Random(seed)), then
    replaced by the next one in. size <= 1: unchanged."""
    if size <= 1:
        yield from samples
        return
    rng = random.Random(seed)
    buf = []
    for s in samples:
        if len(buf) < size:
            buf.append(s)
            continue
        i = rng.randrange(size)
        buf[i], s = s, buf[i]
        yield s
    rng.shuffle(buf)
    yield from buf


if torch is not None:
    __all__ += ["TorchDataset", "torch_collate", "PackedIterableDataset"]

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

    class PackedIterableDataset(torch.utils.data.IterableDataset):
        """A torch.utils.data.IterableDataset streaming a packed dataset.

        source and split as for iter_packed (give paths, not file objects,
        with num_workers > 0). The packs are shared out, whole: rank r of
        world_size takes every world_size-th pack from r, and DataLoader
        worker k of W (torch.utils.data.get_worker_info) every W-th of
        those from k; a reader with no pack yields nothing. shuffle: a new
        pack order each epoch (call set_epoch(e) before each, as with
        DistributedSampler); buffer_size > 1 mixes samples through a buffer
        of that many in each worker. Both draw from seed (and the epoch), so
        the order is the same for the same seed, epoch, world and workers.
        Items are the sample dicts, passed through transform if one is given.
        """

        def __init__(self, source, split=None, rank=0, world_size=1, shuffle=False, buffer_size=0, seed=0,
                     transform=None, decode=True, check_pack_sha256=False):
            if not 0 <= rank < world_size:
                raise ValueError("rank %r is not in 0..%d" % (rank, world_size - 1))
            self.packs, self.info = pack_list(source, split)
            self.split, self.rank, self.world_size = split, rank, world_size
            self.shuffle, self.buffer_size, self.seed, self.epoch = shuffle, buffer_size, seed, 0
            self.transform, self.decode, self.check_pack_sha256 = transform, decode, check_pack_sha256

        def set_epoch(self, epoch):
            self.epoch = epoch

        def __len__(self):
            """This rank's sample count (needs dataset.json's pack entries)."""
            mine = shard_packs(self.packs, self.rank, self.world_size, shuffle=self.shuffle, seed=self.seed,
                               epoch=self.epoch)
            if any("samples" not in p for p in mine):
                raise TypeError("packs given without dataset.json have no known length")
            return sum(p["samples"] for p in mine)

        def __iter__(self):
            w = torch.utils.data.get_worker_info()
            worker, workers = (w.id, w.num_workers) if w is not None else (0, 1)
            mine = shard_packs(self.packs, self.rank, self.world_size, worker, workers,
                               shuffle=self.shuffle, seed=self.seed, epoch=self.epoch)
            it = _iter_packs(mine, self.info, self.split, self.decode, self.check_pack_sha256)
            if self.buffer_size > 1:
                it = shuffle_buffer(it, self.buffer_size,
                                    "%d:%d:%d:%d" % (self.seed, self.epoch, self.rank, worker))
            for s in it:
                yield self.transform(s) if self.transform is not None else s
