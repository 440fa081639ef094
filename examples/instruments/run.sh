#!/usr/bin/env bash
# The three instrument examples end to end: build trueset, generate each
# scenario, verify it, print the instruments' stats, train a small PyTorch
# network on the CPU and print what it measured.
#   bash examples/instruments/run.sh                # the README's numbers
#   COUNT=120 EPOCHS=2 bash examples/instruments/run.sh   # the short form CI runs
set -euo pipefail
cd "$(dirname "${BASH_SOURCE[0]}")/../.."
PY=${PY:-/usr/bin/python3}
COUNT=${COUNT:-}
EPOCHS=${EPOCHS:-}
OUT=${OUT:-$(mktemp -d)}
go build -o "$OUT/trueset" ./cmd/trueset
ts="$OUT/trueset"
ex=examples/instruments

gen() { # recipe out count
	"$ts" generate --recipe "$ex/$1.yaml" --count "$3" --seed 1 --out "$OUT/$2" -q
	"$ts" verify "$OUT/$2"
}
ep() { [ -n "$EPOCHS" ] && echo --epochs "$EPOCHS" || true; }

echo "== planted label noise"
gen noisy-sorting noise "${COUNT:-1000}"
"$ts" stats "$OUT/noise" | sed -n '/^planted label noise/,/^$/p'
"$PY" "$ex/noise.py" "$OUT/noise" $(ep)

echo "== held-out combinations"
gen unseen-paint paint "${COUNT:-3000}"
"$ts" stats "$OUT/paint" | sed -n '/^held-out combinations/,/^$/p'
"$PY" "$ex/held_out.py" "$OUT/paint" $(ep)

echo "== shortcut bait"
gen bead-bait bait-reversed "${COUNT:-2000}"
sed 's/elsewhere: reversed /elsewhere: independent/' "$ex/bead-bait.yaml" > "$OUT/bead-bait-independent.yaml"
"$ts" generate --recipe "$OUT/bead-bait-independent.yaml" --count "${COUNT:-2000}" --seed 1 --out "$OUT/bait-independent" -q
"$ts" verify "$OUT/bait-independent"
"$ts" stats "$OUT/bait-reversed" | sed -n '/^bait:/,/^$/p'
"$ts" stats "$OUT/bait-independent" | sed -n '/^bait:/,/^$/p'
"$PY" "$ex/bait.py" "$OUT/bait-reversed" "$OUT/bait-independent" $(ep)
