#!/usr/bin/env bash
# The Kubernetes Indexed Job example (examples/kubernetes) as far as a machine
# without a cluster allows. There is no kube-apiserver, kubelet or container
# runtime here (Debian packages none of them; CI has no registry access), so:
#
# 1. Both YAML files are parsed (Debian's python3-yaml) and checked against
#    the fields of the batch/v1 Job API that the example relies on (from the
#    Kubernetes API reference, from memory): one document each, kind Job,
#    completionMode Indexed, completions >= parallelism >= 1, --shards equal
#    to completions, restartPolicy Never (required by backoffLimitPerIndex),
#    every volumeMount naming a declared volume, both Jobs on the same claim
#    and mount path.
# 2. Each index 0..completions-1 runs the container's command exactly as the
#    kubelet would start it: `sh -c ARGS` with JOB_COMPLETION_INDEX=i in the
#    environment, the trueset binary on PATH in place of the image, and the
#    volume's mountPath (/data) replaced by a temporary folder. The indexes
#    run two at a time, in no particular order.
# 3. The merge Job's command runs the same way; the merged folder must equal
#    one `trueset generate` run byte for byte.
#
# The example renders 80,000 samples; by default the check replaces
# `--count 80000` with `--count $COUNT` (400) so that it takes seconds.
# FULL=1 runs the commands unchanged (minutes on 2 CPUs).
set -euo pipefail

cd "$(dirname "${BASH_SOURCE[0]}")/.."
repo="$(pwd)"
PY=/usr/bin/python3
COUNT=${COUNT:-400}
FULL=${FULL:-0}

if ! "$PY" -c 'import yaml' 2>/dev/null; then
	if [ "$(id -u)" -ne 0 ]; then
		echo "$PY lacks PyYAML; as root run: apt-get install python3-yaml" >&2
		exit 1
	fi
	timeout 300 apt-get update
	DEBIAN_FRONTEND=noninteractive timeout 300 apt-get install -y python3-yaml
fi

work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
mkdir -p "$work/bin" "$work/data"

echo "== go build ./cmd/trueset"
go build -o "$work/bin/trueset" ./cmd/trueset

echo "== validate examples/kubernetes/*.yaml"
# Prints: completions, then the generate command, then the merge command
# (one per line, mountPath replaced), for the shell below.
"$PY" - "$repo/examples/kubernetes/indexed-job.yaml" "$repo/examples/kubernetes/merge-job.yaml" \
	"$work/data" "$COUNT" "$FULL" >"$work/plan" <<'EOF'
import re, sys, yaml

gen_path, merge_path, data, count, full = sys.argv[1:6]
problems = []

def need(ok, what):
    if not ok:
        problems.append(what)

def load(path):
    with open(path) as f:
        docs = [d for d in yaml.safe_load_all(f) if d is not None]
    need(len(docs) == 1, "%s: %d YAML documents, want 1" % (path, len(docs)))
    return docs[0]

def pod(path, job):
    need(job.get("apiVersion") == "batch/v1", "%s: apiVersion %r, want batch/v1" % (path, job.get("apiVersion")))
    need(job.get("kind") == "Job", "%s: kind %r, want Job" % (path, job.get("kind")))
    need(bool(job.get("metadata", {}).get("name")), "%s: metadata.name missing" % path)
    spec = job["spec"]["template"]["spec"]
    need(spec.get("restartPolicy") in ("Never", "OnFailure"),
         "%s: a Job's pod restartPolicy must be Never or OnFailure, not %r" % (path, spec.get("restartPolicy")))
    volumes = {v["name"]: v for v in spec.get("volumes", [])}
    cs = spec.get("containers", [])
    need(len(cs) == 1, "%s: %d containers, want 1" % (path, len(cs)))
    c = cs[0]
    need(bool(c.get("image")), "%s: container has no image" % path)
    need(c.get("command") == ["sh", "-c"], "%s: command %r, want [sh, -c]" % (path, c.get("command")))
    need(len(c.get("args", [])) == 1, "%s: want one args string for sh -c" % path)
    mounts = c.get("volumeMounts", [])
    for m in mounts:
        need(m["name"] in volumes, "%s: volumeMount %r names no volume" % (path, m["name"]))
    need(len(mounts) == 1, "%s: want one volume mount" % path)
    v = volumes[mounts[0]["name"]]
    return spec, c, mounts[0]["mountPath"], v.get("persistentVolumeClaim", {}).get("claimName")

gen = load(gen_path)
merge = load(merge_path)
gs = gen["spec"]
need(gs.get("completionMode") == "Indexed", "indexed-job: completionMode %r, want Indexed" % gs.get("completionMode"))
n = gs.get("completions")
need(isinstance(n, int) and n >= 1, "indexed-job: completions %r" % n)
need(1 <= gs.get("parallelism", 1) <= n, "indexed-job: parallelism outside 1..completions")
gspec, gc, gmount, gclaim = pod(gen_path, gen)
if "backoffLimitPerIndex" in gs:
    need(gspec.get("restartPolicy") == "Never", "indexed-job: backoffLimitPerIndex needs restartPolicy Never")
mspec, mc, mmount, mclaim = pod(merge_path, merge)
need(gclaim and gclaim == mclaim, "the two Jobs mount different claims (%r, %r)" % (gclaim, mclaim))
need(gmount == mmount, "the two Jobs mount the claim at different paths (%r, %r)" % (gmount, mmount))
gargs, margs = gc["args"][0], mc["args"][0]
m = re.search(r"--shards (\d+)", gargs)
need(m and int(m.group(1)) == n, "indexed-job: --shards %s, want completions %s" % (m and m.group(1), n))
need("$JOB_COMPLETION_INDEX" in gargs, "indexed-job: args do not read $JOB_COMPLETION_INDEX")
need(gmount in gargs and mmount in margs, "commands do not write under the mount path")
counts = re.findall(r"--count (\d+)", gargs)
need(len(counts) == 1, "indexed-job: want one --count")
if problems:
    for p in problems:
        print("kubernetes example: " + p, file=sys.stderr)
    sys.exit(1)
if full != "1":
    gargs = gargs.replace("--count " + counts[0], "--count " + count)
gargs = gargs.replace(gmount, data)
margs = margs.replace(mmount, data)
print(n)
print(gargs)
print(margs)
EOF
{
	read -r completions
	read -r gen_cmd
	read -r merge_cmd
} <"$work/plan"
echo "Indexed Job: $completions completions"
echo "each pod runs: sh -c '$gen_cmd'"

export PATH="$work/bin:$PATH"
echo "== run every index with JOB_COMPLETION_INDEX (two at a time, as parallel pods would)"
seq 0 $((completions - 1)) | LC_ALL=C sort -r |
	xargs -P 2 -I{} env JOB_COMPLETION_INDEX={} timeout 600 sh -c "$gen_cmd"
ls "$work/data/shards"

echo "== the merge Job's command"
timeout 600 sh -c "$merge_cmd"

single_args=$(sed -E 's/.*(--preset [^ ]+).*(--count [0-9]+).*(--seed [0-9]+).*/\1 \2 \3/' <<<"$gen_cmd")
echo "== one run: trueset generate $single_args"
# shellcheck disable=SC2086 # the three flag pairs are meant to split
timeout 600 trueset generate $single_args --quiet --out "$work/single"
merged="$(grep -oE "$work/data/[^ ]+" <<<"$merge_cmd" | grep -v 'part-' | head -n 1)"
(cd "$work/single" && find . -type f | LC_ALL=C sort) >"$work/single.files"
(cd "$merged" && find . -type f | LC_ALL=C sort) >"$work/merged.files"
diff "$work/single.files" "$work/merged.files"
while IFS= read -r f; do
	cmp "$work/single/$f" "$merged/$f"
done <"$work/single.files"
echo "kubernetes.sh: ok ($completions indexes run as the kubelet would start them, merged, byte-identical to one run: $(wc -l <"$work/single.files") files)"
