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
# With the default GOGC=100 most of the peak is garbage awaiting collection
# (each record's three PNG decodes allocate ~100 kB, mostly the standard
# library's inflate window), and the collector lets it grow to twice the live
# heap, which holds the per-group state (5 bytes a group, 9 more while the
# allocation is recomputed); GOGC=25 (run as `GOGC=25 bash …`) shows the
# retained state alone. Run by hand, not by CI (the 1,000,000-record run takes
# a few minutes):
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
