#!/usr/bin/env bash
# bench/verify_memory.sh: trueset verify's peak memory against the number of
# records (issue 11: "memory flat in the number of records"). It writes two
# synthetic datasets with bench/cmd/verifyset — SMALL (10,000) and BIG
# (1,000,000) records, all pointing at one real 16×16 sample's three files,
# ids, groups, splits, strata table and checksums consistent so that verify
# finds nothing wrong and does its full work for every record (line decode,
# three files opened, hashed, header-checked and decoded, labels compared,
# group and split checks, the seeded allocation recomputed) — and runs
# `trueset verify` on each under bench/cmd/peakrss, which reads the child's
# peak RSS (ru_maxrss) from its rusage. It prints both and their ratio.
#
# Measured (2 CPUs, load average 4–5 from other work): 20.9 MB at 10,000 and
# 34.8 MB at 1,000,000 records, ratio 1.66; a second run 21.2 and 37.2 MB,
# 1.76 (a lone 1,000,000 run, traced, peaked at 44.5 MB).
# Before verify decoded through internal/pngread it was 27–34 MB and 83 MB
# (2.6–3.1): image/png allocates a new inflater (32 KiB window, Huffman
# tables, a bufio.Reader) and palette for every file, ~165 kB of garbage per
# record; pngread reuses them, ~15 kB. The garbage mattered because a GC
# cycle whose mark phase waits for a CPU (86 ms of wall clock for 0.2 ms of
# CPU in one trace) counts everything allocated meanwhile as live and then
# doubles that for its next goal: `10->41->36 MB, 11 MB goal` then a 73 MB
# goal. What grows with the records is the per-group state, 5 bytes a group
# (its stratum and split, kept to recompute the seeded allocation), 9 more
# while the allocation is recomputed at the end; at GOGC=100 the collector's
# goal is twice the live heap, so 1,000,000 groups add ~10 MB of heap
# (steady 11–13 MB against 3–4 MB at 10,000), and a GC cycle delayed by a busy
# machine still adds a few MB (the spread between runs). GOGC=25 (run as
# `GOGC=25 bash …`) shows the retained state alone. Run by hand, not by CI
# (the 1,000,000-record run takes about two minutes):
#
#   bash bench/verify_memory.sh
#   SMALL=10000 BIG=200000 bash bench/verify_memory.sh   # quicker
#
# Work folder: $BENCH_DIR (default: a new one in /tmp, removed at the end
# unless KEEP=1). The 1,000,000-record manifest takes about 1 GB.
set -euo pipefail
cd "$(dirname "${BASH_SOURCE[0]}")/.."

SMALL=${SMALL:-10000}
BIG=${BIG:-1000000}
WORK=${BENCH_DIR:-$(mktemp -d /tmp/trueset-verify-bench.XXXXXX)}
if [ "${KEEP:-0}" != 1 ]; then
	trap 'rm -rf "$WORK"' EXIT
fi
mkdir -p "$WORK/bin"
go build -o "$WORK/bin/trueset" ./cmd/trueset
go build -o "$WORK/bin/peakrss" ./bench/cmd/peakrss
go build -o "$WORK/bin/verifyset" ./bench/cmd/verifyset

declare -A rss secs
for n in "$SMALL" "$BIG"; do
	dir="$WORK/set-$n"
	"$WORK/bin/verifyset" -n "$n" -out "$dir"
	line=$("$WORK/bin/peakrss" "$WORK/bin/trueset" verify "$dir" 2>&1 >/dev/null | tail -1)
	rss[$n]=$(sed -n 's/.*maxrss_kb=\([0-9]*\).*/\1/p' <<<"$line")
	secs[$n]=$(sed -n 's/^seconds=\([0-9.]*\).*/\1/p' <<<"$line")
	echo "verify of $n records: peak RSS ${rss[$n]} kB, ${secs[$n]} s"
	rm -rf "$dir"
done
awk -v a="${rss[$SMALL]}" -v b="${rss[$BIG]}" -v s="$SMALL" -v n="$BIG" \
	'BEGIN { printf "peak RSS ratio %d / %d records: %.2f (records ×%d)\n", n, s, b / a, n / s }'
