"""Check trueset_loader's reader of the packed layout against the folder layout.

    python3 test_packed.py FOLDER [PACKED]

FOLDER is a dataset in the folder layout; PACKED, if given, is trueset's
packed twin of it (same recipe and seed, --layout packed).

The references: the folder loader (TruesetDataset) on FOLDER, the POSIX pax
tar format as Python's tarfile writes and reads it (IEEE Std 1003.1, pax),
hashlib's SHA-256, and the packed layout as the README's "On disk" section
describes it. First a pack writer here (tarfile, PAX_FORMAT) builds a packed
set from FOLDER by that description, with small packs; then, on it and on
PACKED:
- iter_packed gives, split by split in index order, samples equal to the
  folder loader's (arrays, records, targets, everything), from a folder,
  from pack paths, from open files and from a pipe (nothing sought), and the
  PNG bytes themselves with decode=False;
- PackedIterableDataset in a DataLoader with 2 workers, and over 2 ranks,
  gives every sample of the split exactly once; its shuffle is the same for
  the same seed;
- a flipped byte (in a member's data, in a header) and a pack cut short (in
  data, in a header, between samples, before the end marker) are refused,
  naming the pack (and the member where there is one);
- without PyTorch, iter_packed works and PackedIterableDataset is absent;
- streaming 2,000 samples of one pack peaks at no more heap than 200.
Only on packs written here (trueset never writes them): members out of
order, a missing member, names that are not the record's paths, a missing
or wrong pax SHA-256, a directory member. Only on PACKED: dataset.json is
the folder's plus "layout", manifest.jsonl is byte-identical, every
member's header (mode 0644, owner 0, no names, mtime 0, pax SHA-256), the
pack sizes and SHA-256 in dataset.json, and packs/index.jsonl's offsets
against where tarfile finds each member.

Prints one line per failure and ends with "N passed, M failed"; exits 1 if
anything failed.
"""

import hashlib
import io
import json
import os
import shutil
import subprocess
import sys
import tarfile
import tempfile
import tracemalloc
import traceback

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
if os.path.exists(os.path.join(HERE, "trueset_loader.py")):
    sys.path.insert(0, HERE)
import trueset_loader as tl  # noqa: E402

try:
    import torch
    import torch.utils.data
except ImportError:
    torch = None

passed = 0
failed = 0
KEYS = ("image", "mask", "instances")


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


# ---- a pack writer, from the layout's description -------------------------

def write_pack(path, members, comment=None):
    """A pax tar of members, each (name, bytes, pax records or None for
    none) or a ready tarfile.TarInfo with its bytes, after a pax global
    header with the layout's comment (comment=False: none)."""
    if comment is None:
        comment = "trueset packed layout: packs/" + os.path.basename(path)
    glob = {"comment": comment} if comment else None
    with tarfile.open(path, "w", format=tarfile.PAX_FORMAT, pax_headers=glob) as tf:
        for m in members:
            if isinstance(m[0], tarfile.TarInfo):
                tf.addfile(m[0], io.BytesIO(m[1]) if m[1] is not None else None)
                continue
            name, data, pax = m
            ti = tarfile.TarInfo(name)
            ti.size, ti.mode, ti.mtime, ti.uid, ti.gid, ti.uname, ti.gname = len(data), 0o644, 0, 0, 0, "", ""
            ti.pax_headers = pax or {}
            tf.addfile(ti, io.BytesIO(data))


def manifest_lines(folder):
    """(line bytes without newline, record) of each manifest line, in order."""
    with open(os.path.join(folder, "manifest.jsonl"), "rb") as f:
        return [(l, json.loads(l)) for l in f.read().split(b"\n") if l.strip()]


def sample_members(folder, line, rec):
    out = [("records/%s.json" % rec["id"], line, None)]
    for k in KEYS:
        with open(os.path.join(folder, rec[k]), "rb") as f:
            out.append((rec[k], f.read(), None))
    return out


def write_packed(folder, out, pack_bytes):
    """A packed twin of folder: packs of whole samples of at most
    pack_bytes (estimated per member: its header and its data),
    dataset.json with "layout" (no index.jsonl: the reader does not use it)."""
    with open(os.path.join(folder, "dataset.json"), encoding="utf-8") as f:
        info = json.load(f)
    lines = manifest_lines(folder)
    os.makedirs(os.path.join(out, "packs"))
    shutil.copy(os.path.join(folder, "manifest.jsonl"), out)
    packs = []
    for split in info["splits"]["names"]:
        groups, size = [], 0
        for line, rec in lines:
            if rec["split"] != split:
                continue
            ms = sample_members(folder, line, rec)
            n = sum(512 + -(-len(d) // 512) * 512 for _, d, _ in ms)
            if not groups or size + n > pack_bytes:
                groups.append([])
                size = 0
            groups[-1].append(ms)
            size += n
        for i, g in enumerate(groups):
            name = "packs/%s-%05d.tar" % (split, i)
            p = os.path.join(out, name)
            write_pack(p, [m for ms in g for m in ms])
            with open(p, "rb") as f:
                data = f.read()
            packs.append({"name": name, "split": split, "samples": len(g), "bytes": len(data),
                          "sha256": hashlib.sha256(data).hexdigest()})
    info["layout"] = {"kind": "packed", "pack_bytes": pack_bytes, "packs": packs}
    with open(os.path.join(out, "dataset.json"), "w", encoding="utf-8") as f:
        json.dump(info, f, indent=2)
    return out


def read_members(path):
    """[(TarInfo, bytes)] of a pack, read by tarfile itself."""
    out = []
    with tarfile.open(path, "r|") as tf:
        for ti in tf:
            out.append((ti, tf.extractfile(ti).read() if ti.isreg() else None))
    return out


# ---- comparisons -----------------------------------------------------------

def same_sample(a, b, what):
    assert set(a) == set(b), "%s: keys %s, the folder loader's %s" % (what, sorted(a), sorted(b))
    for k in a:
        x, y = a[k], b[k]
        if isinstance(y, np.ndarray):
            assert isinstance(x, np.ndarray) and x.dtype == y.dtype and x.shape == y.shape, \
                "%s: %s is %s %s, the folder's %s %s" % (what, k, getattr(x, "dtype", type(x)),
                                                         getattr(x, "shape", ""), y.dtype, y.shape)
            assert (x == y).all(), "%s: %s differs from the folder's" % (what, k)
        else:
            assert x == y, "%s: %s is %r, the folder's %r" % (what, k, x, y)


def expect_refusal(fn, *named):
    """fn must raise ValueError whose message holds every string in named."""
    try:
        for _ in fn():
            pass
    except ValueError as e:
        msg = str(e)
        for n in named:
            assert n in msg, "refusal %r does not name %r" % (msg, n)
        return msg
    raise AssertionError("not refused (wanted an error naming %s)" % ", ".join(map(repr, named)))


def split_ids(folder):
    with open(os.path.join(folder, "dataset.json"), encoding="utf-8") as f:
        names = json.load(f)["splits"]["names"]
    return {s: [r["id"] for _, r in manifest_lines(folder) if r["split"] == s] for s in names}


def check_against_folder(tag, packed, folder):
    ids = split_ids(folder)
    with open(os.path.join(packed, "dataset.json"), encoding="utf-8") as f:
        packs = json.load(f)["layout"]["packs"]

    for split, want in ids.items():
        def same(split=split, want=want):
            ref = tl.TruesetDataset(folder, split=split)
            got = list(tl.iter_packed(packed, split=split, check_pack_sha256=True))
            assert [s["id"] for s in got] == want, "%s: ids %s, index order %s" % (
                split, [s["id"] for s in got][:8], want[:8])
            for s, r in zip(got, ref):
                same_sample(s, r, "%s sample %s" % (split, r["id"]))
        check("%s: split %s equals the folder loader's, in index order" % (tag, split), same)

    def every():
        got = [s["id"] for s in tl.iter_packed(packed, decode=False)]
        allids = [i for v in ids.values() for i in v]
        assert sorted(got) == sorted(allids) and len(got) == len(set(got)), \
            "split=None: %d samples, %d distinct, manifest %d" % (len(got), len(set(got)), len(allids))
    check(tag + ": split=None gives every sample once", every)

    def raw():
        for s in tl.iter_packed(packed, decode=False):
            for k in KEYS:
                with open(os.path.join(folder, s["record"][k]), "rb") as f:
                    assert s[k] == f.read(), "%s %s: bytes differ from the folder's file" % (s["id"], k)
    check(tag + ": decode=False gives the folder's PNG bytes", raw)

    first_split = next(iter(ids))
    paths = [os.path.join(packed, p["name"]) for p in packs if p["split"] == first_split]
    ref = list(tl.TruesetDataset(folder, split=first_split))

    def from_paths():
        got = list(tl.iter_packed(paths, info=tl.pack_list(packed)[1]))
        assert len(got) == len(ref), "%d samples from pack paths, %d in the split" % (len(got), len(ref))
        for s, r in zip(got, ref):
            same_sample(s, r, "pack paths, sample %s" % r["id"])
    check(tag + ": explicit pack paths", from_paths)

    def from_files_and_pipe():
        files = [open(p, "rb") for p in paths[:1]]
        procs = [subprocess.Popen(["cat", p], stdout=subprocess.PIPE) for p in paths[1:]]
        try:
            for p in procs:
                assert not p.stdout.seekable(), "the pipe is seekable; the check would prove nothing"
            got = [s["id"] for s in tl.iter_packed(files + [p.stdout for p in procs])]
        finally:
            for f in files:
                f.close()
            for p in procs:
                p.stdout.close()
                p.wait()
        assert got == [r["id"] for r in ref], "ids from open files and pipes differ from the split's"
        alone = list(tl.iter_packed(paths[0]))
        assert alone and alone[0]["class_table"] is None, "a pack alone: class_table should be None"
    check(tag + ": file objects and pipes (%d packs in split %s)" % (len(paths), first_split), from_files_and_pipe)

    def layouts_refused():
        try:
            tl.TruesetDataset(packed)
        except ValueError as e:
            assert "packed" in str(e) and "iter_packed" in str(e), str(e)
        else:
            raise AssertionError("TruesetDataset took a packed set")
        expect_refusal(lambda: tl.iter_packed(folder), "dataset.json", "not a packed dataset")
    check(tag + ": each layout's reader refuses the other's", layouts_refused)

    check_torch(tag, packed, ids, first_split)
    check_damage(tag, packed, packs, paths[0])


def check_torch(tag, packed, ids, split):
    want = ids[split]

    def workers():
        assert torch is not None, "PyTorch is not installed (apt-get install python3-torch)"
        ds = tl.PackedIterableDataset(packed, split=split)
        assert len(ds) == len(want), "len %d, split %d" % (len(ds), len(want))
        dl = torch.utils.data.DataLoader(ds, batch_size=3, num_workers=2, collate_fn=tl.torch_collate)
        got = [i for b in dl for i in b["id"]]
        assert sorted(got) == sorted(want) and len(got) == len(want), \
            "2 workers: %d samples (%d distinct), split %d" % (len(got), len(set(got)), len(want))
    check(tag + ": DataLoader, 2 workers: the split, each sample once", workers)

    def ranks():
        assert torch is not None, "PyTorch is not installed (apt-get install python3-torch)"
        got, n = [], 0
        for r in range(2):
            ds = tl.PackedIterableDataset(packed, split=split, rank=r, world_size=2, shuffle=True, seed=5)
            ds.set_epoch(1)
            n += len(ds)
            got += [s["id"] for s in torch.utils.data.DataLoader(ds, batch_size=None, num_workers=2)]
        assert sorted(got) == sorted(want) and len(got) == len(want), \
            "2 ranks x 2 workers: %d samples (%d distinct), split %d" % (len(got), len(set(got)), len(want))
        assert n == len(want), "lengths of the 2 ranks add to %d, split %d" % (n, len(want))
    check(tag + ": 2 ranks x 2 workers: the split, each sample once", ranks)

    def shuffled():
        assert torch is not None, "PyTorch is not installed (apt-get install python3-torch)"
        def order(seed, epoch):
            ds = tl.PackedIterableDataset(packed, split=split, shuffle=True, buffer_size=8, seed=seed, decode=False)
            ds.set_epoch(epoch)
            return [s["id"] for s in torch.utils.data.DataLoader(ds, batch_size=None, num_workers=2)]
        a, b, c = order(7, 0), order(7, 0), order(7, 1)
        assert a == b, "seed 7 epoch 0 gave two orders"
        assert sorted(a) == sorted(want) and sorted(c) == sorted(want), "a shuffle lost or repeated samples"
        assert a != want, "the shuffle left index order"
        assert a != c, "epochs 0 and 1 gave one order"
    check(tag + ": shuffle (packs and buffer) is the same for the same seed and epoch", shuffled)


def check_damage(tag, packed, packs, path):
    """A copy of the pack at path, with one byte flipped or cut short, is refused."""
    members = []
    with tarfile.open(path, "r|") as tf:
        for ti in tf:
            members.append((ti.name, ti.offset, ti.offset_data, ti.size))
    with open(path, "rb") as f:
        data = f.read()
    end = members[-1][2] + -(-members[-1][3] // 512) * 512
    tmp = tempfile.mkdtemp(prefix="trueset-damage-")
    try:
        def refused_copy(name, new, *named):
            p = os.path.join(tmp, name)
            with open(p, "wb") as f:
                f.write(new)
            return expect_refusal(lambda: tl.iter_packed(p, decode=False), p, *named)

        img = members[5]  # the second sample's image
        def flip_data():
            b = bytearray(data)
            b[img[2] + img[3] // 2] ^= 0x01
            refused_copy("flip-data.tar", bytes(b), img[0], "SHA-256")
        check(tag + ": a flipped byte in %s is refused naming it" % img[0], flip_data)

        def flip_header():
            b = bytearray(data)
            b[members[6][2] - 512 + 3] ^= 0x01  # the name in the header of the second mask
            refused_copy("flip-header.tar", bytes(b), "truncated or damaged")
        check(tag + ": a flipped byte in a header is refused", flip_header)

        cuts = {"in a member's data": img[2] + 10, "in a header": members[6][1] + 100,
                "between two samples": members[4][1], "before the end marker": end,
                "in the end marker": end + 512}
        for what, at in cuts.items():
            check("%s: cut %s (at byte %d) is refused" % (tag, what, at),
                  lambda at=at: refused_copy("cut.tar", data[:at], "truncated"))

        def cut_listed():
            t = os.path.join(tmp, "listed")
            shutil.copytree(packed, t)
            entry = [e for e in packs if os.path.join(packed, e["name"]) == path][0]
            p = os.path.join(t, entry["name"])
            with open(p, "wb") as f:
                f.write(data[:members[4][1]] + b"\0" * 1024)  # whole, but with only its first sample
            expect_refusal(lambda: tl.iter_packed(t), p, "1 samples, dataset.json says %d" % entry["samples"])
            with open(p, "wb") as f:
                f.write(data + b"\0" * 512)
            expect_refusal(lambda: tl.iter_packed(t), p, "%d bytes, dataset.json says %d" % (len(data) + 512, len(data)))
        check(tag + ": a pack that is whole but not dataset.json's is refused", cut_listed)
    finally:
        shutil.rmtree(tmp)


def check_crafted(folder, tmp):
    """Packs trueset never writes: each refused, naming the pack and member."""
    lines = manifest_lines(folder)[:2]
    a = sample_members(folder, *lines[0])
    b = sample_members(folder, *lines[1])
    ida, idb = lines[0][1]["id"], lines[1][1]["id"]

    def refused(name, members, *named):
        p = os.path.join(tmp, name + ".tar")
        write_pack(p, members)
        return lambda: expect_refusal(lambda: tl.iter_packed(p, decode=False), p, *named)

    def good():
        p = os.path.join(tmp, "good.tar")
        write_pack(p, a + b)
        assert [s["id"] for s in tl.iter_packed(p)] == [ida, idb]
    check("crafted: two samples in order are read", good)
    check("crafted: mask before image is refused",
          refused("order", a + [b[0], b[2], b[1], b[3]], b[2][0], "should be"))
    check("crafted: a missing last member is refused",
          refused("missing-last", a + b[:3], b[3][0], "missing"))
    check("crafted: a missing middle member is refused",
          refused("missing-mid", a[:3] + b, b[0][0], a[3][0]))
    check("crafted: a sample not starting with its record is refused",
          refused("no-record", a[1:] + b, a[1][0], "records/ID.json"))
    check("crafted: records/../x.json is refused",
          refused("dotdot", [("records/../%s.json" % ida, a[0][1], None)] + a[1:], "records/../"))
    check("crafted: a record named for another id is refused",
          refused("other-id", [("records/%s.json" % idb, a[0][1], None)] + a[1:], "records/%s.json" % idb))
    rec = json.loads(a[0][1])
    rec["image"] = "../" + rec["image"]
    bad = json.dumps(rec).encode()
    check("crafted: a record whose image path leaves the folder is refused",
          refused("leaves", [(a[0][0], bad, None)] + a[1:], a[0][0], "leaves the dataset folder"))
    check("crafted: an image named otherwise than its record says is refused",
          refused("renamed", [a[0], ("images/other.png", a[1][1], None)] + a[2:], "images/other.png", a[1][0]))
    flipped = bytearray(a[2][1])
    flipped[len(flipped) // 2] ^= 0xFF
    check("crafted: a mask whose bytes are not the record's SHA-256 is refused",
          refused("bad-sha", a[:2] + [(a[2][0], bytes(flipped), None)] + a[3:], a[2][0], "SHA-256"))
    def no_global():
        p = os.path.join(tmp, "crafted-no-global.tar")
        write_pack(p, a, comment=False)
        try:
            list(tl.iter_packed(p))
        except ValueError as e:
            assert "global header" in str(e), str(e)
            return
        raise AssertionError("a pack without the layout's global header was read")
    check("crafted: a pack without the layout's pax global header is refused", no_global)
    d = tarfile.TarInfo("images/dir")
    d.type = tarfile.DIRTYPE
    check("crafted: a directory member is refused",
          refused("dir", a[:1] + [(d, None)] + a[1:], "images/dir", "not a regular file"))
    other = os.path.join(tmp, "other")
    write_packed(folder, other, 1 << 30)
    with open(os.path.join(other, "dataset.json"), encoding="utf-8") as f:
        info = json.load(f)
    first, second = info["layout"]["packs"][:2]
    os.replace(os.path.join(other, second["name"]), os.path.join(other, first["name"]))
    first.update({k: second[k] for k in ("samples", "bytes", "sha256")})
    with open(os.path.join(other, "dataset.json"), "w", encoding="utf-8") as f:
        json.dump(info, f)
    check("crafted: a %s sample in a pack listed for %s is refused" % (second["split"], first["split"]),
          lambda: expect_refusal(lambda: tl.iter_packed(other, split=first["split"]), first["name"],
                                 "in a pack of split %r" % first["split"]))


def check_flat_memory(tmp):
    """Streaming holds one sample at a time: the peak Python heap (tracemalloc)
    over 2,000 samples of one pack is within 1.5x of that over the first 200.
    (tarfile keeps every header it reads in stream mode unless told not to.)"""
    def run():
        members = []
        for i in range(2000):
            sid = "%06d" % i
            rec = {"id": sid, "split": "train", "group": sid, "width": 1, "height": 1, "objects": [],
                   "targets": {}, "image": "images/%s.png" % sid, "mask": "masks/%s.png" % sid,
                   "instances": "instances/%s.png" % sid}
            files = {k: (k + sid).encode() * 20 for k in KEYS}
            rec["sha256"] = {k: hashlib.sha256(b).hexdigest() for k, b in files.items()}
            members.append(("records/%s.json" % sid, json.dumps(rec).encode(), None))
            members += [(rec[k], files[k], None) for k in KEYS]
        p = os.path.join(tmp, "many.tar")
        write_pack(p, members)
        del members
        peaks = []
        tracemalloc.start()
        try:
            for n in (200, 2000):
                tracemalloc.reset_peak()
                base = tracemalloc.get_traced_memory()[0]
                got = sum(1 for _, _ in zip(range(n), tl.iter_packed(p, decode=False)))
                assert got == n, "%d samples of %d" % (got, n)
                peaks.append(tracemalloc.get_traced_memory()[1] - base)
        finally:
            tracemalloc.stop()
        assert peaks[1] <= 1.5 * peaks[0], "peak heap %d bytes over 2,000 samples, %d over 200" % (peaks[1], peaks[0])
    check("streaming 2,000 samples takes no more heap than 200 (within 1.5x)", run)


def check_helpers():
    """shard_packs and shuffle_buffer on plain lists."""
    packs = list(range(23))

    def shards():
        for world in (1, 2, 3):
            for workers in (1, 2, 4):
                for shuffle in (False, True):
                    got = [p for r in range(world) for w in range(workers)
                           for p in tl.shard_packs(packs, r, world, w, workers, shuffle=shuffle, seed=3, epoch=2)]
                    assert sorted(got) == packs, "world %d, workers %d: packs %s" % (world, workers, sorted(got))
        assert tl.shard_packs(packs, 1, 2, 1, 2) == [3, 7, 11, 15, 19], tl.shard_packs(packs, 1, 2, 1, 2)
        assert tl.shard_packs(packs, shuffle=True, seed=1) == tl.shard_packs(packs, shuffle=True, seed=1)
        assert tl.shard_packs(packs, shuffle=True, seed=1) != tl.shard_packs(packs, shuffle=True, seed=1, epoch=1)
    check("shard_packs: every pack once over ranks and workers", shards)

    def buffer():
        a = list(tl.shuffle_buffer(range(100), 10, "s"))
        assert sorted(a) == list(range(100)) and a != list(range(100)), "buffer of 10 over 100"
        assert a == list(tl.shuffle_buffer(range(100), 10, "s")), "same seed, two orders"
        assert list(tl.shuffle_buffer(range(5), 1, "s")) == list(range(5)), "size 1 changed the order"
    check("shuffle_buffer: a permutation, the same for the same seed", buffer)


NO_TORCH = '''
import sys
sys.modules["torch"] = None  # import torch raises ImportError
import trueset_loader as tl
assert not hasattr(tl, "PackedIterableDataset"), "PackedIterableDataset defined without torch"
n = sum(1 for _ in tl.iter_packed(sys.argv[1]))
assert n > 0, n
print("ok", n)
'''


def check_no_torch(packed):
    def run():
        env = dict(os.environ)
        if os.path.exists(os.path.join(HERE, "trueset_loader.py")):
            env["PYTHONPATH"] = os.pathsep.join(p for p in (HERE, env.get("PYTHONPATH")) if p)
        p = subprocess.run([sys.executable, "-c", NO_TORCH, packed], env=env, stdout=subprocess.PIPE,
                           stderr=subprocess.STDOUT, universal_newlines=True)
        assert p.returncode == 0 and p.stdout.startswith("ok"), p.stdout.strip()[-500:]
    check("without PyTorch: iter_packed works, PackedIterableDataset is absent", run)


def check_trueset_packed(packed, folder):
    """What only trueset's own packs are checked for."""
    def dataset_json():
        with open(os.path.join(packed, "dataset.json"), encoding="utf-8") as f:
            p = json.load(f)
        with open(os.path.join(folder, "dataset.json"), encoding="utf-8") as f:
            q = json.load(f)
        assert p.pop("layout")["kind"] == "packed", "layout kind"
        diff = sorted(k for k in set(p) | set(q) if p.get(k) != q.get(k))
        assert not diff, "dataset.json differs from the folder's beyond \"layout\": %s" % diff
        with open(os.path.join(packed, "manifest.jsonl"), "rb") as f, \
                open(os.path.join(folder, "manifest.jsonl"), "rb") as g:
            assert f.read() == g.read(), "manifest.jsonl is not byte-identical to the folder's"
    check("trueset packed: dataset.json and manifest.jsonl are the folder's", dataset_json)

    with open(os.path.join(packed, "dataset.json"), encoding="utf-8") as f:
        layout = json.load(f)["layout"]
    members = {}

    def packs():
        seen = {}
        for p in layout["packs"]:
            n = seen.get(p["split"], 0)
            seen[p["split"]] = n + 1
            assert p["name"] == "packs/%s-%05d.tar" % (p["split"], n), "pack %s, want number %d" % (p["name"], n)
            with open(os.path.join(packed, p["name"]), "rb") as f:
                data = f.read()
            assert len(data) == p["bytes"], "%s: %d bytes, dataset.json %d" % (p["name"], len(data), p["bytes"])
            assert hashlib.sha256(data).hexdigest() == p["sha256"], "%s: SHA-256 differs" % p["name"]
            assert data.endswith(b"\0" * 1024), "%s does not end with two zero blocks" % p["name"]
            ms = read_members(os.path.join(packed, p["name"]))
            members[p["name"]] = ms
            assert len(ms) == 4 * p["samples"], "%s: %d members for %d samples" % (p["name"], len(ms), p["samples"])
            if p["samples"] > 1:
                assert p["bytes"] <= layout["pack_bytes"], "%s: %d bytes, over pack_bytes" % (p["name"], p["bytes"])
            for ti, b in ms:
                got = (ti.type, ti.mode, ti.uid, ti.gid, ti.uname, ti.gname, ti.mtime)
                assert got == (tarfile.REGTYPE, 0o644, 0, 0, "", "", 0), "%s %s: header %s" % (p["name"], ti.name, got)
                assert ti.pax_headers == {"comment": "trueset packed layout: " + p["name"]}, \
                    "%s %s: pax %s (want only the pack's global comment)" % (p["name"], ti.name, ti.pax_headers)
    check("trueset packed: pack names, sizes, SHA-256 and member headers", packs)

    def index():
        p = os.path.join(packed, "packs", "index.jsonl")
        with open(p, "rb") as f:
            raw = f.read()
        assert hashlib.sha256(raw).hexdigest() == layout["index_sha256"], "index.jsonl SHA-256 differs"
        lines = [json.loads(l) for l in raw.split(b"\n") if l.strip()]
        recs = [r for _, r in manifest_lines(folder)]
        assert [l["id"] for l in lines] == [r["id"] for r in recs], "index.jsonl is not in manifest order"
        at = {}
        for name, ms in members.items():
            for k in range(0, len(ms), 4):
                four = ms[k:k + 4]
                last = four[-1][0]
                at[four[0][0].name[len("records/"):-len(".json")]] = (
                    name, [four[0][0].offset, last.offset_data + -(-last.size // 512) * 512],
                    [[ti.name, ti.offset_data, ti.size] for ti, _ in four])
        for l in lines:
            assert list(l) == ["id", "split", "pack", "at", "files"], "index keys %s" % list(l)
            want = at.get(l["id"])
            assert want is not None, "index.jsonl names %s, no pack holds it" % l["id"]
            got = (l["pack"], l["at"], l["files"])
            assert got == want, "%s: index %s, tarfile finds %s" % (l["id"], got, want)
    check("trueset packed: index.jsonl offsets are where tarfile finds each member", index)


def main(args):
    if len(args) not in (1, 2):
        print("usage: test_packed.py FOLDER [PACKED]", file=sys.stderr)
        return 2
    folder = args[0]
    tmp = tempfile.mkdtemp(prefix="trueset-packed-")
    try:
        check_helpers()
        check_flat_memory(tmp)
        fixture = os.path.join(tmp, "fixture")
        write_packed(folder, fixture, 48 << 10)  # 48 KiB: several packs per split
        check_against_folder("packs written here", fixture, folder)
        check_crafted(folder, tmp)
        check_no_torch(fixture)
        if len(args) == 2:
            check_trueset_packed(args[1], folder)
            check_against_folder("trueset packed", args[1], folder)
    finally:
        shutil.rmtree(tmp)
    print("%d passed, %d failed" % (passed, failed))
    return 1 if failed or passed == 0 else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
