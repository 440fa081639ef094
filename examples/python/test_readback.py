"""Check `trueset readback` against the planted-bug corpus.

    python3 test_readback.py TRUESET DIR CORPUS

CORPUS is what readback_corpus.py wrote over DIR. For every batch it runs
`TRUESET readback DIR batch.npz --json` with the batch's flags and checks
that each expected finding kind is reported on exactly the expected samples
(a kind expected with no samples is about the batch as a whole), that the
exit code is 1 when an error is expected and 0 for the correct pipelines,
and that the correct pipelines report no error at all.
"""

import json
import os
import subprocess
import sys


def main(trueset, root, corpus):
    with open(os.path.join(corpus, "expected.json")) as f:
        cases = json.load(f)
    failures = []
    errors_expected = 0
    for case in cases:
        path = os.path.join(corpus, case["file"])
        cmd = [trueset, "readback", root, path, "--json"] + case["args"]
        p = subprocess.run(cmd, capture_output=True, text=True)
        try:
            out = json.loads(p.stdout)
        except ValueError:
            failures.append("%s: no JSON (exit %d): %s" % (case["file"], p.returncode, p.stderr.strip()))
            continue
        found = {}
        for f in out["findings"]:
            found.setdefault(f["kind"], []).append(f)
        errs = [f for f in out["findings"] if f["severity"] == "error"]
        for e in case["expect"]:
            got = found.get(e["kind"])
            if not got:
                failures.append("%s: no %s finding; found %s" % (case["file"], e["kind"], sorted(found)))
                continue
            samples = sorted(set(got[0]["samples"]))
            if samples != e["samples"]:
                failures.append("%s: %s on %s, expected %s" % (case["file"], e["kind"], samples, e["samples"]))
            if got[0]["severity"] == "error":
                errors_expected += 1
        want_exit = 1 if errs else 0
        if p.returncode != want_exit:
            failures.append("%s: exit %d with %d error findings" % (case["file"], p.returncode, len(errs)))
        if case["no_errors"] and errs:
            failures.append("%s: a correct pipeline, but: %s" % (case["file"], "; ".join(f["kind"] + ": " + f["message"] for f in errs)))
        status = "FAIL" if any(x.startswith(case["file"] + ":") for x in failures) else "ok"
        kinds = ", ".join("%s(%s)" % (f["kind"], f["severity"]) for f in out["findings"] if f["kind"] not in ("layout", "batch-mix"))
        print("%-4s %-36s exit %d  %s" % (status, case["file"], p.returncode, kinds))
    bugs = sum(1 for c in cases if not c["no_errors"])
    good = sum(1 for c in cases if c["no_errors"])
    if bugs < 12 or good < 3:
        failures.append("the corpus has %d planted bugs and %d correct pipelines; want at least 12 and 3" % (bugs, good))
    if failures:
        print("\n".join(["FAILED:"] + failures))
        sys.exit(1)
    print("readback: %d planted bugs named on the right samples, %d correct pipelines without error" % (bugs, good))


if __name__ == "__main__":
    if len(sys.argv) != 4:
        sys.exit("usage: test_readback.py TRUESET DIR CORPUS")
    main(*sys.argv[1:])
