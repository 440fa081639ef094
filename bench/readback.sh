#!/usr/bin/env bash
# The readback figure: `trueset readback` on a batch of 256 samples of
# 128x128 RGB (float32 N x 3 x H x W in 0..1, uint8 masks, the dice count),
# as dump_batch writes it (np.savez), against a 320-sample tabletop-dice set
# rendered at 128x128. Needs Debian's python3-numpy and python3-pil.
# Prints the wall time of REPEATS runs (default 5). The Go benchmark of the
# same work is `go test ./readback -run XXX -bench Readback256`.
set -euo pipefail
cd "$(dirname "${BASH_SOURCE[0]}")/.."
PY=/usr/bin/python3
REPEATS=${REPEATS:-5}
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
go build -o "$work/trueset" ./cmd/trueset
"$work/trueset" presets show tabletop-dice | sed 's/^  width: 64$/  width: 128/; s/^  height: 64$/  height: 128/' > "$work/dice128.yaml"
"$work/trueset" generate --recipe "$work/dice128.yaml" --count 320 --seed 5 --out "$work/set" --quiet
"$PY" - "$work/set" "$work/batch.npz" <<'PYEOF'
import sys
sys.path.insert(0, "examples/python")
import numpy as np
from trueset_loader import TruesetDataset, dump_batch
train = TruesetDataset(sys.argv[1], split="train")
b = [train[i] for i in range(256)]
x = np.stack([s["image"] for s in b]).astype(np.float32).transpose(0, 3, 1, 2) / 255
y = np.stack([s["mask"] for s in b])
dump_batch(sys.argv[2], [s["id"] for s in b], x, y, dice=np.array([s["targets"]["dice"] for s in b], dtype=np.float32))
PYEOF
ls -l "$work/batch.npz"
echo "trueset readback SET batch.npz --split train, $REPEATS runs (nproc $(nproc)):"
for i in $(seq "$REPEATS"); do
	/usr/bin/time -f "  %e s wall, %U s user, %M KB peak RSS" "$work/trueset" readback "$work/set" "$work/batch.npz" --split train > /dev/null
done
