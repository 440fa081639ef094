#!/usr/bin/env bash
# CI for the instrument examples (examples/instruments): installs Debian's
# python3-torch (with numpy and Pillow) if it is missing, then runs the three
# worked examples end to end in a short form — few samples, few epochs — so
# the scripts cannot rot. The README's numbers come from the long form:
# `bash examples/instruments/run.sh`.
# Runs the same locally (`bash .ci/instruments.sh`) and in CI (root on Debian).
set -euo pipefail

cd "$(dirname "${BASH_SOURCE[0]}")/.."

PY=/usr/bin/python3
echo "== PyTorch, numpy and Pillow for $PY"
if ! "$PY" -c 'import torch, numpy, PIL' 2>/dev/null; then
	if [ "$(id -u)" -ne 0 ]; then
		echo "python3-torch, python3-numpy and python3-pil are missing; run as root or: sudo apt-get install python3-torch python3-numpy python3-pil" >&2
		exit 1
	fi
	apt-get update -q
	DEBIAN_FRONTEND=noninteractive apt-get install -y -q --no-install-recommends python3-torch python3-numpy python3-pil
fi
"$PY" -c 'import torch; print("torch", torch.__version__)'

OUT="$(mktemp -d)"
trap 'rm -rf "$OUT"' EXIT
PY="$PY" OUT="$OUT" COUNT=${COUNT:-150} EPOCHS=${EPOCHS:-2} bash examples/instruments/run.sh
