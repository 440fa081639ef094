#!/usr/bin/env bash
# CI for the Python loader (examples/python): installs Debian's numpy,
# Pillow and PyTorch if they are missing, builds trueset, generates a small
# set of every preset, an augmented set, an augmented plain folder and
# packed twins of four of them, and checks the loader against all of them.
# Runs the same locally (`bash .ci/python.sh`) and in CI (root on Debian).
set -euo pipefail

cd "$(dirname "${BASH_SOURCE[0]}")/.."

# Debian's own python3: a python3 earlier on PATH (pyenv, a venv) may lack
# the packages apt installs.
PY=/usr/bin/python3
COUNT=${COUNT:-30}

# PyTorch (Debian's python3-torch, as .ci/instruments.sh installs it): the
# packed reader's IterableDataset is tested in a real DataLoader with workers.
echo "== numpy, Pillow and PyTorch for $PY"
if ! "$PY" -c 'import numpy, PIL, torch' 2>/dev/null; then
	if [ "$(id -u)" -ne 0 ]; then
		echo "$PY lacks numpy, Pillow or PyTorch; as root run: apt-get install python3-numpy python3-pil python3-torch" >&2
		exit 1
	fi
	apt-get update
	DEBIAN_FRONTEND=noninteractive apt-get install -y --no-install-recommends python3-numpy python3-pil python3-torch
fi
"$PY" -c 'import numpy, PIL, torch; print("numpy", numpy.__version__, "Pillow", PIL.__version__, "torch", torch.__version__)'

work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT

echo "== go build ./cmd/trueset"
go build -o "$work/trueset" ./cmd/trueset

# Preset names from `trueset presets`: the name, then WIDTHxHEIGHT (the
# default preset's line starts with "*").
presets="$("$work/trueset" presets | awk '{ if ($1 == "*") { n = $2; s = $3 } else { n = $1; s = $2 } } s ~ /^[0-9]+x[0-9]+$/ { print n }')"
if [ -z "$presets" ]; then
	echo "no presets listed by trueset presets" >&2
	exit 1
fi

dirs=()
for p in $presets; do
	echo "== generate $p ($COUNT samples)"
	"$work/trueset" generate --preset "$p" --count "$COUNT" --seed 1 --out "$work/$p" --quiet
	dirs+=("$work/$p")
done
# every-step flips and turns, which glyph classes refuse; dice take it.
aug=tabletop-dice
if [ -d "$work/$aug" ]; then
	echo "== augment $aug (every-step plan, 1 copy per training sample)"
	"$work/trueset" augment --in "$work/$aug" --out "$work/$aug-aug" --plan testdata/plans/every-step.yaml --copies 1 --quiet
	dirs+=("$work/$aug-aug")
fi

echo "== augment testdata/plain (a plain labeled folder; upright plan, 2 copies)"
"$work/trueset" augment --in testdata/plain --out "$work/plain-aug" --plan testdata/plans/upright.yaml --copies 2 \
	--ratios train=0.5,val=0.25,test=0.25 --quiet
dirs+=("$work/plain-aug")

echo "== $PY examples/python/test_loader.py"
"$PY" examples/python/test_loader.py "${dirs[@]}"

# The packed layout (issue 15): packed twins (64KiB packs: several per
# split) of an rgb and a gray preset (generate, same count and seed) and of
# two augmented sets (convert), streamed by iter_packed and
# PackedIterableDataset and compared with the folder loader sample for
# sample; test_packed.py also writes packs of its own with tarfile to read,
# and damages copies of both to be refused.
for p in tabletop-dice workshop-parts; do
	echo "== generate $p --layout packed ($COUNT samples), then $PY examples/python/test_packed.py"
	"$work/trueset" generate --preset "$p" --count "$COUNT" --seed 1 --out "$work/$p-packed" \
		--layout packed --pack-size 64KiB --quiet
	"$PY" examples/python/test_packed.py "$work/$p" "$work/$p-packed"
done
# and packed by trueset convert: the augmented dice set (ignore pixels,
# lineage) and the augmented plain folder (gray and color images, mode mixed)
for d in "$aug-aug" plain-aug; do
	echo "== convert $d --layout packed, then $PY examples/python/test_packed.py"
	"$work/trueset" convert --in "$work/$d" --out "$work/$d-packed" --layout packed --pack-size 64KiB --quiet
	"$PY" examples/python/test_packed.py "$work/$d" "$work/$d-packed"
done

# trueset readback (issue 13): planted pipeline bugs over an augmented dice
# set (its copies hold ignore pixels), each to be named on the right samples,
# and correct pipelines that must give no error.
echo "== readback: planted-bug corpus"
"$work/trueset" generate --preset tabletop-dice --count 60 --seed 3 --out "$work/rb-dice" --quiet
"$work/trueset" augment --in "$work/rb-dice" --out "$work/rb-dice-aug" --plan examples/plans/light.yaml --copies 1 --quiet
"$PY" examples/python/readback_corpus.py "$work/rb-dice-aug" "$work/rb-corpus"
"$PY" examples/python/test_readback.py "$work/trueset" "$work/rb-dice-aug" "$work/rb-corpus"

# The loader as an installed package (examples/python/pyproject.toml):
# installed offline with Debian's pip and setuptools into a venv that sees the
# system's numpy and Pillow, then the same tests run against the installed
# module. The package folder and the tests are copied out first, so the
# build leaves nothing in the tree and the tests cannot import the
# trueset_loader.py beside them.
echo "== pip install examples/python into a venv (offline)"
# (each in its own interpreter: importing pip before setuptools trips
# setuptools' distutils check on Debian.)
if ! { "$PY" -c 'import setuptools' && "$PY" -c 'import pip' && "$PY" -c 'import venv, ensurepip'; } 2>/dev/null; then
	if [ "$(id -u)" -ne 0 ]; then
		echo "$PY lacks pip, setuptools or venv; as root run: apt-get install python3-pip python3-setuptools python3-venv" >&2
		exit 1
	fi
	apt-get update
	DEBIAN_FRONTEND=noninteractive apt-get install -y python3-pip python3-setuptools python3-venv
fi
"$PY" -m venv --system-site-packages "$work/venv"
VPY="$work/venv/bin/python"
cp -r examples/python "$work/pkg"
rm -rf "$work/pkg/build" "$work/pkg"/*.egg-info
"$VPY" -m pip install --quiet --no-build-isolation --no-index "$work/pkg"
mkdir "$work/pytests"
cp examples/python/test_loader.py examples/python/test_readback.py examples/python/readback_corpus.py \
	examples/python/test_packed.py "$work/pytests/"
(cd "$work" && "$VPY" -c '
import os, sys, trueset_loader
where = os.path.realpath(trueset_loader.__file__)
venv = os.path.realpath(sys.argv[1])
assert where.startswith(venv + os.sep), "trueset_loader imported from %s, not the venv %s" % (where, venv)
print("installed:", where)
' "$work/venv")
echo "== installed package: test_loader.py"
"$VPY" "$work/pytests/test_loader.py" "${dirs[@]}"
echo "== installed package: test_packed.py tabletop-dice"
"$VPY" "$work/pytests/test_packed.py" "$work/tabletop-dice" "$work/tabletop-dice-packed"
echo "== installed package: readback corpus"
"$VPY" "$work/pytests/readback_corpus.py" "$work/rb-dice-aug" "$work/rb-corpus-venv"
"$VPY" "$work/pytests/test_readback.py" "$work/trueset" "$work/rb-dice-aug" "$work/rb-corpus-venv"

# trueset export (issue 15): both interchange formats of every set above,
# read back by test_export.py's own numpy decoders (run-length counts
# expanded column-major and compared with the instance masks pixel for
# pixel; center boxes back to the masks' boxes).
echo "== $PY examples/python/test_export.py"
"$PY" examples/python/test_export.py "$work/trueset" "${dirs[@]}"
