#!/usr/bin/env bash
# bench/run.sh: the figures of the speed issues, each as a ratio against a
# comparator measured in the same run (absolute times on shared machines
# drift; ratios hold), with its goal and the command that reproduces it.
# Figures 1-5 are issue 9's; 6-10 are issue 15's. Run by hand, not by CI:
#
#   bash bench/run.sh                  # every figure at the issues' counts (long: see README, Performance)
#   QUICK=1 bash bench/run.sh          # every figure at small counts, one round (a few minutes)
#   FIGURES="7 8" bash bench/run.sh    # only some figures (numbers as printed)
#   REPEATS=1 BIG=0 bash bench/run.sh  # quicker: one round, no 200,000 run
#   TRUESET=/path/to/trueset bash bench/run.sh   # time another build
#
# 1  generate vs the encode floor (bench/cmd/encodefloor), 64x64
# 2  2 workers vs 1
# 3  peak RSS at COUNT and BIG samples, 64x64
# 4  augmentation kernels (bench/cmd/kernels; Go benchmarks in augment/)
# 5  augment end to end, 64x64, beside figure 1
# 6  generate vs merely writing the same files, already encoded (bench/cmd/writefloor), 64x64
# 7  generate vs a hand-written Python generator (numpy + OpenCV, 2 processes;
#    bench/python/gen_opencv.py) at 64x64, 512x512 and 1024x1024
#    (bench/recipes/canvas-512.yaml, canvas-1024.yaml)
# 8  augment vs an OpenCV pipeline doing the same steps (bench/python/augment_opencv.py)
#    at 64x64 (bench/plans/kernels.yaml) and 512x512 (kernels-512.yaml)
# 9  peak RSS of generate flat in the sample count at 64x64, 512x512, 1024x1024
# 10 packed output (generate --layout packed) vs rendering and encoding the same
#    samples in memory with no I/O (bench/cmd/inmemory), beside the folder layout
#
# Every end-to-end figure is the median wall time of whole processes
# (bench/cmd/peakrss, which also reads the child's peak RSS from its rusage)
# over REPEATS rounds, trueset and its comparator interleaved in each round,
# except the encode and write floors, which time themselves after loading
# their input into memory (a stricter floor). The Python comparators run
# with /usr/bin/python3 and Debian's python3-opencv, python3-numpy and
# python3-pil (installed here if missing, as pngcheck is). Each run writes a
# new folder; all are removed at the end (about 3 GB for figures 1-5, an
# estimated 8-10 GB with every figure). Work folder: $BENCH_DIR (default: a new one in
# /tmp; it is removed at the end unless KEEP=1).
set -euo pipefail
cd "$(dirname "${BASH_SOURCE[0]}")/.."

if [ "${QUICK:-0}" = 1 ]; then
	: "${REPEATS:=1}" "${COUNT:=2000}" "${BIG:=0}" "${AUG_SOURCES:=200}" "${AUG_COPIES:=5}"
	: "${PY512:=200}" "${PY1024:=40}" "${AUG512_SOURCES:=40}" "${AUG512_COPIES:=2}"
	: "${MEM64:=500 5000}" "${MEM512:=100 1000}" "${MEM1024:=20 200}" "${SETTLE:=2}"
fi
REPEATS=${REPEATS:-3}
COUNT=${COUNT:-20000}               # figures 1, 2, 3, 6, 10 and 7 at 64x64
BIG=${BIG:-200000}                  # figure 3
AUG_SOURCES=${AUG_SOURCES:-2000}    # figures 5 and 8 at 64x64
AUG_COPIES=${AUG_COPIES:-5}
PY512=${PY512:-5000}                # figure 7 at 512x512
PY1024=${PY1024:-1000}              # figure 7 at 1024x1024
AUG512_SOURCES=${AUG512_SOURCES:-500} # figure 8 at 512x512
AUG512_COPIES=${AUG512_COPIES:-2}
MEM64=${MEM64:-1000 100000}         # figure 9: the two sample counts at each size
MEM512=${MEM512:-1000 10000}
MEM1024=${MEM1024:-500 5000}
PACK_SIZE=${PACK_SIZE:-256MiB}      # figure 10
SETTLE=${SETTLE:-6}
FIGURES=" ${FIGURES:-1 2 3 4 5 6 7 8 9 10} "
FIGURES=${FIGURES//,/ }
PY=${PYTHON:-/usr/bin/python3}
WORK=${BENCH_DIR:-$(mktemp -d /tmp/trueset-bench.XXXXXX)}
BIN=$WORK/bin
mkdir -p "$BIN"
if [ "${KEEP:-0}" != 1 ]; then
	trap 'rm -rf "$WORK"' EXIT
fi

want() { [[ $FIGURES == *" $1 "* ]]; }
apt_install() {
	echo "installing $* (Debian packages)" >&2
	if [ "$(id -u)" = 0 ]; then
		{ apt-get update -qq && apt-get install -y -qq "$@"; } >/dev/null
	else
		{ sudo apt-get update -qq && sudo apt-get install -y -qq "$@"; } >/dev/null
	fi
}
if ! command -v pngcheck >/dev/null; then
	apt_install pngcheck
fi
if { want 7 || want 8; } && ! "$PY" -c 'import cv2, numpy, PIL' 2>/dev/null; then
	apt_install python3-opencv python3-numpy python3-pil
fi

if [ -n "${TRUESET:-}" ]; then
	cp "$TRUESET" "$BIN/trueset" # another build (e.g. an older version) against the same comparators
else
	go build -o "$BIN/trueset" ./cmd/trueset
fi
for c in encodefloor peakrss samepixels kernels inmemory writefloor; do
	go build -o "$BIN/$c" "./bench/cmd/$c"
done

# settle: write out the file system's dirty blocks and wait SETTLE s (6)
# before a timed run. Nothing is deleted until the end (every run writes a new
# folder): on ext4 without a journal, as here, the inode allocator skips
# inodes freed in the last 5 s, or 300 s while their inode table block is
# still dirty (fs/ext4/ialloc.c, recently_deleted), and that scan, not our
# code, then takes most of the time of every file created. Other programs'
# deletions still do this; see README, Performance.
settle() { sync; sleep "$SETTLE"; }

# timed CMD...: runs CMD under peakrss; sets SECONDS_, CPU_ and RSS_KB
# (CMD's standard output is left in $WORK/timed.out).
timed() {
	"$BIN/peakrss" "$@" 2>"$WORK/peakrss.err" >"$WORK/timed.out" || { cat "$WORK/peakrss.err" >&2; exit 1; }
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

# field NAME LINE: the number after NAME= in a self-timed command's line.
field() { sed -E "s/(^|.* )$1=([0-9.]+).*/\\2/" <<<"$2"; }
# ratio_line LABEL RATIO GOAL: GOAL is an awk condition on r (e.g. "r <= 0.5") or "" for none.
ratio_line() {
	if [ -n "$3" ]; then
		printf '  %-18s %s   goal %s: %s\n' "$1" "$2" "${3#r }" "$(goal "${3//r/$2}")"
	else
		printf '  %-18s %s   (no numeric goal in the issue)\n' "$1" "$2"
	fi
}
# pycheck DIR N: the Python comparator wrote N samples (records, and three files each).
pycheck() {
	local lines files
	lines=$(wc -l <"$1/manifest.jsonl")
	files=$(find "$1/images" "$1/masks" "$1/instances" -type f | wc -l)
	if [ "$lines" != "$2" ] || [ "$files" != $((3 * $2)) ]; then
		echo "$1: $lines records and $files files; want $2 and $((3 * $2))" >&2
		exit 1
	fi
}
# pystart: the whole-process time of a Python that only imports the
# comparators' modules, printed beside figures 7 and 8 (at small counts it
# is much of the comparator's time).
pystart() {
	timed "$PY" -c 'import cv2, numpy, PIL.Image'
	echo "  Python startup     $(calc "$SECONDS_" 1) s of each Python run is starting Python and importing cv2, numpy and PIL"
}
# recipe_json SIZE: a one-sample trueset folder whose dataset.json holds the
# normalized recipe the Python generator reads (not timed).
recipe_json() {
	local d=$WORK/recipe$1
	if [ ! -e "$d/dataset.json" ]; then
		if [ "$1" = 64 ]; then
			"$BIN/trueset" generate -q --count 1 --out "$d"
		else
			"$BIN/trueset" generate -q --count 1 --recipe "bench/recipes/canvas-$1.yaml" --out "$d"
		fi
	fi
	echo "$d/dataset.json"
}

echo "machine: $(nproc) CPUs, $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2- | sed 's/^ //'), $(go version | cut -d' ' -f3-)"
echo "load average before: $(cut -d' ' -f1-3 /proc/loadavg)"
echo "figures: $(xargs <<<"$FIGURES"); REPEATS=$REPEATS rounds, trueset and each comparator interleaved in every round"
echo

ours2=() floor=() ours1=() rss=() cpu2=() cpuf=() cpu1=() wfloor=() py64=()
if want 1 || want 2 || want 3 || want 6 || want 7; then
	if want 7; then
		rj64=$(recipe_json 64)
	fi
	for r in $(seq 1 "$REPEATS"); do
		echo "round $r/$REPEATS ..." >&2
		settle
		timed "$BIN/trueset" generate -q --count "$COUNT" --workers 2 --out "$WORK/ours$r"
		ours2+=("$SECONDS_") rss+=("$RSS_KB") cpu2+=("$CPU_")
		if want 1; then
			settle
			line=$("$BIN/encodefloor" --count "$COUNT" --workers 2 --out "$WORK/floor$r")
			floor+=("$(sed -E 's/^seconds=([0-9.]+).*/\1/' <<<"$line")")
			cpuf+=("$(sed -E 's/.*cpu_seconds=([0-9.]+).*/\1/' <<<"$line")")
			floor_bytes=$(sed -E 's/.*[^_]bytes=([0-9]+).*/\1/' <<<"$line")
			floor_manifest=$(sed -E 's/.*manifest_bytes=([0-9]+).*/\1/' <<<"$line")
		fi
		if want 6; then
			settle
			line=$("$BIN/writefloor" --from "$WORK/ours$r" --workers 2 --out "$WORK/wfloor$r")
			wfloor+=("$(field seconds "$line")")
			wfloor_bytes=$(field bytes "$line")
		fi
		if want 7; then
			settle
			timed "$PY" bench/python/gen_opencv.py --recipe-json "$rj64" --count "$COUNT" --workers 2 --out "$WORK/py64-$r"
			py64+=("$SECONDS_")
			pycheck "$WORK/py64-$r" "$COUNT"
		fi
		if want 2; then
			settle
			timed "$BIN/trueset" generate -q --count "$COUNT" --workers 1 --out "$WORK/one$r"
			ours1+=("$SECONDS_") cpu1+=("$CPU_")
		fi
	done
	t2=$(median "${ours2[@]}")
	ours_bytes=$(($(filebytes "$WORK/ours1") + $(stat -c %s "$WORK/ours1/manifest.jsonl")))
fi

if want 1; then
	tf=$(median "${floor[@]}")
	all_floor=$((floor_bytes + floor_manifest))
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
fi

if want 2; then
	t1=$(median "${ours1[@]}")
	r2=$(calc "$t1/$t2")
	echo "figure 2: scaling, 2 workers vs 1 (same $COUNT samples)"
	echo "  1 worker           median $(calc "$t1" 1) s   runs: ${ours1[*]}   cpu s: ${cpu1[*]}"
	echo "  2 workers          median $(calc "$t2" 1) s"
	echo "  speed-up           $r2   goal >= 1.8: $(goal "$r2 >= 1.8")"
	echo "  reproduce          trueset generate -q --count $COUNT --workers 1 --out DIR   (and --workers 2)"
	echo
fi

if want 3; then
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
	if [ "$BIG" -gt 0 ]; then
		echo "  reproduce          bench/cmd/peakrss trueset generate -q --count $COUNT --workers 2 --out DIR   (and --count $BIG)"
	else
		echo "  reproduce          bench/cmd/peakrss trueset generate -q --count $COUNT --workers 2 --out DIR"
	fi
	echo
fi

if want 4; then
	echo "figure 4: augmentation kernels (flip + rotate + crop-and-resize + gaussian noise, image and both masks)"
	settle
	"$BIN/kernels"
	echo "  reproduce          go build -o kernels ./bench/cmd/kernels && ./kernels   (benchmarks: go test -run '^$' -bench Kernels ./augment/)"
	echo
fi

aug=() pyaug=()
if want 5 || want 8; then
	"$BIN/trueset" generate -q --count "$AUG_SOURCES" --workers 2 --out "$WORK/src"
	for r in $(seq 1 "$REPEATS"); do
		settle
		timed "$BIN/trueset" augment -q --in "$WORK/src" --out "$WORK/aug$r" --plan bench/plans/kernels.yaml \
			--copies "$AUG_COPIES" --split train,val,test --workers 2
		aug+=("$SECONDS_")
		if want 8; then
			settle
			timed "$PY" bench/python/augment_opencv.py --in "$WORK/src" --out "$WORK/pyaug$r" \
				--copies "$AUG_COPIES" --split train,val,test --workers 2
			pyaug+=("$SECONDS_")
			pycheck "$WORK/pyaug$r" $((AUG_SOURCES * (AUG_COPIES + 1)))
		fi
	done
	ta=$(median "${aug[@]}")
	copies=$((AUG_SOURCES * AUG_COPIES))
fi
if want 5; then
	echo "figure 5: augmentation end to end ($AUG_SOURCES sources x $AUG_COPIES copies, 64x64, bench/plans/kernels.yaml, 2 workers)"
	echo "  trueset augment    median $(calc "$ta" 1) s   runs: ${aug[*]}   $(calc "$copies/$ta" 0) copies/s ($copies copies + $AUG_SOURCES originals carried over)"
	if [ -n "${t2:-}" ]; then
		echo "  beside figure 1    trueset generate $(calc "$COUNT/$t2" 0) samples/s; augment/generate = $(calc "($copies/$ta)/($COUNT/$t2)")"
	fi
	echo "  reproduce          trueset generate -q --count $AUG_SOURCES --out SRC"
	echo "                     trueset augment -q --in SRC --out DIR --plan bench/plans/kernels.yaml --copies $AUG_COPIES --split train,val,test --workers 2"
	echo
fi

if want 6; then
	tw=$(median "${wfloor[@]}")
	r6=$(calc "$t2/$tw")
	echo "figure 6: generation vs. merely writing the same files, already encoded ($COUNT samples, default preset, 2 workers)"
	echo "  trueset generate   median $(calc "$t2" 1) s   runs: ${ours2[*]}   (figure 1's runs)"
	echo "  write floor        median $(calc "$tw" 1) s   runs: ${wfloor[*]}   (the same $((3 * COUNT)) files and manifest, $wfloor_bytes bytes, read into memory first, then os.WriteFile; self-timed)"
	ratio_line "time ratio" "$r6" ""
	echo "  reproduce          trueset generate -q --count $COUNT --workers 2 --out DIR"
	echo "                     go run ./bench/cmd/writefloor --from DIR --workers 2 --out DIR2"
	echo
fi

if want 7; then
	echo "figure 7: generation vs. a hand-written Python generator (numpy + OpenCV, 2 processes; bench/python/gen_opencv.py), 2 workers each"
	tp=$(median "${py64[@]}")
	r7=$(calc "$t2/$tp")
	py_bytes=$(($(filebytes "$WORK/py64-1") + $(stat -c %s "$WORK/py64-1/manifest.jsonl")))
	echo "  64x64, $COUNT samples, default preset (figure 1's trueset runs)"
	echo "  trueset generate   median $(calc "$t2" 1) s   runs: ${ours2[*]}   $ours_bytes bytes"
	echo "  Python + OpenCV    median $(calc "$tp" 1) s   runs: ${py64[*]}   $py_bytes bytes"
	ratio_line "time ratio" "$r7" ""
	pystart
	for size in 512 1024; do
		n=$PY512
		[ "$size" = 1024 ] && n=$PY1024
		rj=$(recipe_json "$size")
		ours=() theirs=()
		for r in $(seq 1 "$REPEATS"); do
			echo "figure 7, ${size}x$size, round $r/$REPEATS ..." >&2
			settle
			timed "$BIN/trueset" generate -q --recipe "bench/recipes/canvas-$size.yaml" --count "$n" --workers 2 --out "$WORK/gen$size-$r"
			ours+=("$SECONDS_")
			settle
			timed "$PY" bench/python/gen_opencv.py --recipe-json "$rj" --count "$n" --workers 2 --out "$WORK/py$size-$r"
			theirs+=("$SECONDS_")
			pycheck "$WORK/py$size-$r" "$n"
		done
		to=$(median "${ours[@]}") tp=$(median "${theirs[@]}")
		r7=$(calc "$to/$tp")
		echo "  ${size}x$size, $n samples, bench/recipes/canvas-$size.yaml"
		echo "  trueset generate   median $(calc "$to" 1) s   runs: ${ours[*]}   $(($(filebytes "$WORK/gen$size-1") + $(stat -c %s "$WORK/gen$size-1/manifest.jsonl"))) bytes"
		echo "  Python + OpenCV    median $(calc "$tp" 1) s   runs: ${theirs[*]}   $(($(filebytes "$WORK/py$size-1") + $(stat -c %s "$WORK/py$size-1/manifest.jsonl"))) bytes"
		if [ "$size" = 512 ]; then
			ratio_line "time ratio" "$r7" "r <= 0.5"
		else
			ratio_line "time ratio" "$r7" ""
		fi
	done
	echo "  reproduce          trueset generate -q [--recipe bench/recipes/canvas-SIZE.yaml] --count N --workers 2 --out DIR"
	echo "                     trueset generate -q --count 1 [--recipe ...] --out ONE"
	echo "                     /usr/bin/python3 bench/python/gen_opencv.py --recipe-json ONE/dataset.json --count N --workers 2 --out DIR2"
	echo
fi

if want 8; then
	echo "figure 8: augmentation vs. an OpenCV pipeline doing the same steps (bench/python/augment_opencv.py), 2 workers each"
	tp=$(median "${pyaug[@]}")
	r8=$(calc "$ta/$tp")
	echo "  64x64, $AUG_SOURCES sources x $AUG_COPIES copies, bench/plans/kernels.yaml (figure 5's trueset runs)"
	echo "  trueset augment    median $(calc "$ta" 1) s   runs: ${aug[*]}"
	echo "  Python + OpenCV    median $(calc "$tp" 1) s   runs: ${pyaug[*]}"
	ratio_line "time ratio" "$r8" ""
	pystart
	"$BIN/trueset" generate -q --recipe bench/recipes/canvas-512.yaml --count "$AUG512_SOURCES" --workers 2 --out "$WORK/src512"
	ours=() theirs=()
	for r in $(seq 1 "$REPEATS"); do
		echo "figure 8, 512x512, round $r/$REPEATS ..." >&2
		settle
		timed "$BIN/trueset" augment -q --in "$WORK/src512" --out "$WORK/aug512-$r" --plan bench/plans/kernels-512.yaml \
			--copies "$AUG512_COPIES" --split train,val,test --workers 2
		ours+=("$SECONDS_")
		settle
		timed "$PY" bench/python/augment_opencv.py --in "$WORK/src512" --out "$WORK/pyaug512-$r" --to 512 \
			--copies "$AUG512_COPIES" --split train,val,test --workers 2
		theirs+=("$SECONDS_")
		pycheck "$WORK/pyaug512-$r" $((AUG512_SOURCES * (AUG512_COPIES + 1)))
	done
	to=$(median "${ours[@]}") tp=$(median "${theirs[@]}")
	r8=$(calc "$to/$tp")
	echo "  512x512, $AUG512_SOURCES sources x $AUG512_COPIES copies, bench/plans/kernels-512.yaml"
	echo "  trueset augment    median $(calc "$to" 1) s   runs: ${ours[*]}"
	echo "  Python + OpenCV    median $(calc "$tp" 1) s   runs: ${theirs[*]}"
	ratio_line "time ratio" "$r8" "r <= 0.5"
	echo "  reproduce          trueset generate -q [--recipe bench/recipes/canvas-512.yaml] --count N --out SRC"
	echo "                     trueset augment -q --in SRC --out DIR --plan bench/plans/kernels[-512].yaml --copies K --split train,val,test --workers 2"
	echo "                     /usr/bin/python3 bench/python/augment_opencv.py --in SRC --out DIR2 [--to 512] --copies K --split train,val,test --workers 2"
	echo
fi

if want 9; then
	echo "figure 9: peak RSS of generate (ru_maxrss) against the sample count, 2 workers, one run each"
	for size in 64 512 1024; do
		case $size in
		64) counts=$MEM64 src=() ;;
		512) counts=$MEM512 src=(--recipe bench/recipes/canvas-512.yaml) ;;
		1024) counts=$MEM1024 src=(--recipe bench/recipes/canvas-1024.yaml) ;;
		esac
		read -r lo hi <<<"$counts"
		settle
		timed "$BIN/trueset" generate -q "${src[@]}" --count "$lo" --workers 2 --out "$WORK/mem$size-$lo"
		rlo=$RSS_KB slo=$SECONDS_
		settle
		timed "$BIN/trueset" generate -q "${src[@]}" --count "$hi" --workers 2 --out "$WORK/mem$size-$hi"
		rhi=$RSS_KB shi=$SECONDS_
		r9=$(calc "$rhi/$rlo")
		echo "  ${size}x$size: $lo samples $(calc "$rlo/1024" 1) MB ($(calc "$slo" 1) s), $hi samples $(calc "$rhi/1024" 1) MB ($(calc "$shi" 1) s)"
		ratio_line "ratio" "$r9" "r <= 1.10"
		if [ "$hi" -lt 100000 ]; then
			echo "  counts             issue 15 asks for 1,000 and 100,000; 100,000 at this run's rate would take $(calc "$shi/$hi*100000/60" 0) min and $(calc "$(filebytes "$WORK/mem$size-$hi")/$hi*100000/1e9" 1) GB (MEM$size sets the counts)"
		fi
	done
	echo "  reproduce          bench/cmd/peakrss trueset generate -q [--recipe bench/recipes/canvas-SIZE.yaml] --count N --workers 2 --out DIR"
	echo
fi

if want 10; then
	echo "figure 10: packed output vs. rendering and encoding the same samples in memory, no I/O ($COUNT samples, default preset, 2 workers)"
	packed=0
	# grep reads all of the help (grep -q would stop early, and the writer's
	# SIGPIPE would fail the pipeline under pipefail).
	if "$BIN/trueset" generate --help | grep -- --layout >/dev/null; then
		packed=1
	fi
	pk=() mem=() fold=()
	for r in $(seq 1 "$REPEATS"); do
		echo "figure 10, round $r/$REPEATS ..." >&2
		if [ "$packed" = 1 ]; then
			settle
			timed "$BIN/trueset" generate -q --count "$COUNT" --workers 2 --layout packed --pack-size "$PACK_SIZE" --out "$WORK/packed$r"
			pk+=("$SECONDS_")
		fi
		settle
		timed "$BIN/inmemory" --count "$COUNT" --workers 2
		mem+=("$SECONDS_")
		mem_bytes=$(field bytes "$(cat "$WORK/timed.out")")
		settle
		timed "$BIN/trueset" generate -q --count "$COUNT" --workers 2 --out "$WORK/folder$r"
		fold+=("$SECONDS_")
	done
	tm=$(median "${mem[@]}") tfo=$(median "${fold[@]}")
	echo "  in memory          median $(calc "$tm" 1) s   runs: ${mem[*]}   (plan, render, encode, SHA-256 and record of every sample; bytes discarded)"
	if [ "$packed" = 1 ]; then
		tpk=$(median "${pk[@]}")
		echo "  packed             median $(calc "$tpk" 1) s   runs: ${pk[*]}   (--layout packed --pack-size $PACK_SIZE)"
		ratio_line "packed / memory" "$(calc "$tpk/$tm")" "r <= 1.3"
	else
		echo "  packed             not available in this build (trueset generate has no --layout)"
	fi
	echo "  folder             median $(calc "$tfo" 1) s   runs: ${fold[*]}"
	ratio_line "folder / memory" "$(calc "$tfo/$tm")" ""
	fb=$(filebytes "$WORK/folder1")
	if [ "$fb" != "$mem_bytes" ]; then
		echo "figure 10: the in-memory run encoded $mem_bytes bytes of PNG, the folder run wrote $fb" >&2
		exit 1
	fi
	echo "  checks             the in-memory run encodes the same $fb bytes of PNG the folder run writes"
	if [ "$packed" = 1 ]; then
		"$BIN/trueset" verify "$WORK/packed1" >"$WORK/verify.out" 2>&1 || { cat "$WORK/verify.out"; echo "figure 10: trueset verify FAILED on the packed run" >&2; exit 1; }
		echo "                     trueset verify accepts the first packed run"
	fi
	echo "  reproduce          trueset generate -q --count $COUNT --workers 2 --layout packed --pack-size $PACK_SIZE --out DIR"
	echo "                     go run ./bench/cmd/inmemory --count $COUNT --workers 2"
	echo "                     trueset generate -q --count $COUNT --workers 2 --out DIR2"
	echo
fi

echo "load average after: $(cut -d' ' -f1-3 /proc/loadavg)"
