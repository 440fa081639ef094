#!/usr/bin/env bash
# bench/run.sh: the five figures of the speed issue, each as a ratio against a
# comparator measured in the same run (absolute times on shared machines
# drift; ratios hold), with the command that reproduces it. Figure 4
# (augmentation kernels against x/image/draw and imaging) comes from
# bench/cmd/kernels, which also has Go benchmarks in augment/. Run by hand,
# not by CI:
#
#   bash bench/run.sh                  # REPEATS=3 COUNT=20000 BIG=200000
#   REPEATS=1 BIG=0 bash bench/run.sh  # quicker: one round, no 200,000 run
#   TRUESET=/path/to/trueset bash bench/run.sh   # time another build
#
# Every end-to-end figure is the wall time of a whole process (bench/cmd/
# peakrss, which also reads the child's peak RSS from its rusage), except the
# comparator, which times itself after pre-rendering its samples into memory
# (bench/cmd/encodefloor). Each run writes a new folder; all are removed at
# the end (about 3 GB at the defaults). Work folder: $BENCH_DIR (default: a new one in
# /tmp; it is removed at the end unless KEEP=1).
set -euo pipefail
cd "$(dirname "${BASH_SOURCE[0]}")/.."

REPEATS=${REPEATS:-3}
COUNT=${COUNT:-20000}
BIG=${BIG:-200000}
AUG_SOURCES=${AUG_SOURCES:-2000}
AUG_COPIES=${AUG_COPIES:-5}
WORK=${BENCH_DIR:-$(mktemp -d /tmp/trueset-bench.XXXXXX)}
BIN=$WORK/bin
mkdir -p "$BIN"
if [ "${KEEP:-0}" != 1 ]; then
	trap 'rm -rf "$WORK"' EXIT
fi

if ! command -v pngcheck >/dev/null; then
	echo "installing pngcheck (Debian package)" >&2
	if [ "$(id -u)" = 0 ]; then
		{ apt-get update -qq && apt-get install -y -qq pngcheck; } >/dev/null
	else
		{ sudo apt-get update -qq && sudo apt-get install -y -qq pngcheck; } >/dev/null
	fi
fi

if [ -n "${TRUESET:-}" ]; then
	cp "$TRUESET" "$BIN/trueset" # another build (e.g. an older version) against the same comparators
else
	go build -o "$BIN/trueset" ./cmd/trueset
fi
for c in encodefloor peakrss samepixels kernels; do
	go build -o "$BIN/$c" "./bench/cmd/$c"
done

# settle: write out the file system's dirty blocks and wait 6 s before a
# timed run. Nothing is deleted until the end (every run writes a new
# folder): on ext4 without a journal, as here, the inode allocator skips
# inodes freed in the last 5 s, or 300 s while their inode table block is
# still dirty (fs/ext4/ialloc.c, recently_deleted), and that scan, not our
# code, then takes most of the time of every file created. Other programs'
# deletions still do this; see README, Performance.
settle() { sync; sleep 6; }

# timed CMD...: runs CMD under peakrss; sets SECONDS_, CPU_ and RSS_KB.
timed() {
	"$BIN/peakrss" "$@" 2>"$WORK/peakrss.err" >/dev/null || { cat "$WORK/peakrss.err" >&2; exit 1; }
	local line
	line=$(tail -n 1 "$WORK/peakrss.err")
	SECONDS_=$(sed -E 's/^seconds=([0-9.]+).*/\1/' <<<"$line")
	CPU_=$(sed -E 's/.*cpu_seconds=([0-9.]+).*/\1/' <<<"$line")
	RSS_KB=$(sed -E 's/.*maxrss_kb=([0-9]+).*/\1/' <<<"$line")
}

median() { printf '%s\n' "$@" | sort -g | awk '{v[NR]=$1} END {print (NR%2 ? v[(NR+1)/2] : (v[NR/2]+v[NR/2+1])/2)}'; }
maxof() { printf '%s\n' "$@" | sort -g | tail -n 1; }
calc() { awk "BEGIN {printf \"%.${2:-2}f\", $1}"; }
goal() { if awk "BEGIN {exit !($1)}"; then echo met; else echo MISSED; fi; }
filebytes() { find "$1/images" "$1/masks" "$1/instances" -type f -printf '%s\n' | awk '{s+=$1} END {print s+0}'; }

echo "machine: $(nproc) CPUs, $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2- | sed 's/^ //'), $(go version | cut -d' ' -f3-)"
echo "load average before: $(cut -d' ' -f1-3 /proc/loadavg)"
echo

ours2=() floor=() ours1=() rss=() cpu2=() cpuf=() cpu1=()
for r in $(seq 1 "$REPEATS"); do
	echo "round $r/$REPEATS ..." >&2
	settle
	timed "$BIN/trueset" generate -q --count "$COUNT" --workers 2 --out "$WORK/ours$r"
	ours2+=("$SECONDS_") rss+=("$RSS_KB") cpu2+=("$CPU_")
	settle
	line=$("$BIN/encodefloor" --count "$COUNT" --workers 2 --out "$WORK/floor$r")
	floor+=("$(sed -E 's/^seconds=([0-9.]+).*/\1/' <<<"$line")")
	cpuf+=("$(sed -E 's/.*cpu_seconds=([0-9.]+).*/\1/' <<<"$line")")
	floor_bytes=$(sed -E 's/.*[^_]bytes=([0-9]+).*/\1/' <<<"$line")
	floor_manifest=$(sed -E 's/.*manifest_bytes=([0-9]+).*/\1/' <<<"$line")
	settle
	timed "$BIN/trueset" generate -q --count "$COUNT" --workers 1 --out "$WORK/one$r"
	ours1+=("$SECONDS_") cpu1+=("$CPU_")
done

t2=$(median "${ours2[@]}")
tf=$(median "${floor[@]}")
t1=$(median "${ours1[@]}")
ours_bytes=$(( $(filebytes "$WORK/ours1") + $(stat -c %s "$WORK/ours1/manifest.jsonl") ))
all_floor=$(( floor_bytes + floor_manifest ))
same=$("$BIN/samepixels" --count "$COUNT" --step 97 "$WORK/ours1" "$WORK/floor1")
mapfile -t sample < <(for d in images masks instances; do ls "$WORK/ours1/$d" | awk -v d="$WORK/ours1/$d" 'NR%97==1 {print d "/" $0}'; done)
pngcheck -q "${sample[@]}" >"$WORK/pngcheck.out" 2>&1 || { cat "$WORK/pngcheck.out"; echo "pngcheck FAILED"; exit 1; }

r1=$(calc "$t2/$tf")
rb=$(calc "$ours_bytes/$all_floor")
echo "figure 1: generation vs. the encode floor ($COUNT samples, default preset, 2 workers)"
echo "  trueset generate   median $(calc "$t2" 1) s   runs: ${ours2[*]}   $(calc "$COUNT/$t2" 0) samples/s   cpu s: ${cpu2[*]}"
echo "  encode floor       median $(calc "$tf" 1) s   runs: ${floor[*]}   (image/png defaults + os.WriteFile)   cpu s: ${cpuf[*]}"
echo "  time ratio         $r1   goal <= 0.75: $(goal "$r1 <= 0.75")"
echo "  bytes              $ours_bytes / $all_floor = $rb   goal <= 1.25: $(goal "$rb <= 1.25")   (manifest.jsonl $(stat -c %s "$WORK/ours1/manifest.jsonl") vs $floor_manifest)"
echo "  checks             $(cut -d= -f2 <<<"$same") files decode with image/png to the comparator's pixels; pngcheck accepts ${#sample[@]} files"
echo "  reproduce          trueset generate -q --count $COUNT --workers 2 --out DIR"
echo "                     go run ./bench/cmd/encodefloor --count $COUNT --workers 2 --out DIR"
echo

r2=$(calc "$t1/$t2")
echo "figure 2: scaling, 2 workers vs 1 (same $COUNT samples)"
echo "  1 worker           median $(calc "$t1" 1) s   runs: ${ours1[*]}   cpu s: ${cpu1[*]}"
echo "  2 workers          median $(calc "$t2" 1) s"
echo "  speed-up           $r2   goal >= 1.8: $(goal "$r2 >= 1.8")"
echo "  reproduce          trueset generate -q --count $COUNT --workers 1 --out DIR   (and --workers 2)"
echo

small=$(maxof "${rss[@]}")
echo "figure 3: peak RSS (VmHWM via rusage ru_maxrss), 2 workers"
echo "  $COUNT samples     $(calc "$small/1024" 1) MB   goal <= 100 MB: $(goal "$small <= 102400")"
if [ "$BIG" -gt 0 ]; then
	settle
	timed "$BIN/trueset" generate -q --count "$BIG" --workers 2 --out "$WORK/big"
	big=$RSS_KB
	r3=$(calc "$big/$small")
	echo "  $BIG samples    $(calc "$big/1024" 1) MB   goal <= 100 MB: $(goal "$big <= 102400")   ($(calc "$SECONDS_" 1) s, $(calc "$BIG/$SECONDS_" 0) samples/s)"
	echo "  ratio              $r3   goal <= 1.10: $(goal "$r3 <= 1.10")"
fi
echo "  reproduce          bench/cmd/peakrss trueset generate -q --count $COUNT --workers 2 --out DIR   (and --count $BIG)"
echo

echo "figure 4: augmentation kernels (flip + rotate + crop-and-resize + gaussian noise, image and both masks)"
settle
"$BIN/kernels"
echo "  reproduce          go build -o kernels ./bench/cmd/kernels && ./kernels   (benchmarks: go test -run '^$' -bench Kernels ./augment/)"
echo

"$BIN/trueset" generate -q --count "$AUG_SOURCES" --workers 2 --out "$WORK/src"
aug=()
for r in $(seq 1 "$REPEATS"); do
	settle
	timed "$BIN/trueset" augment -q --in "$WORK/src" --out "$WORK/aug$r" --plan bench/plans/kernels.yaml \
		--copies "$AUG_COPIES" --split train,val,test --workers 2
	aug+=("$SECONDS_")
done
ta=$(median "${aug[@]}")
copies=$((AUG_SOURCES * AUG_COPIES))
echo "figure 5: augmentation end to end ($AUG_SOURCES sources x $AUG_COPIES copies, 64x64, bench/plans/kernels.yaml, 2 workers)"
echo "  trueset augment    median $(calc "$ta" 1) s   runs: ${aug[*]}   $(calc "$copies/$ta" 0) copies/s ($copies copies + $AUG_SOURCES originals carried over)"
echo "  beside figure 1    trueset generate $(calc "$COUNT/$t2" 0) samples/s; augment/generate = $(calc "($copies/$ta)/($COUNT/$t2)")"
echo "  reproduce          trueset generate -q --count $AUG_SOURCES --out SRC"
echo "                     trueset augment -q --in SRC --out DIR --plan bench/plans/kernels.yaml --copies $AUG_COPIES --split train,val,test --workers 2"
echo
echo "load average after: $(cut -d' ' -f1-3 /proc/loadavg)"
