#!/usr/bin/env bash
# Browser check of `trueset report`: build trueset, generate a small dataset,
# write its report, and load the page in headless Chromium twice: a
# screenshot (which must not be blank) and --dump-dom (whose data-stat cells
# must equal `trueset stats --json`). The checks are the Go tests in
# cmd/trueset/report_browser_test.go (build tag "browser").
#
# Installs Debian's chromium with apt-get when it is missing (CI runs as root
# on Debian bookworm). TRUESET_BROWSER_OUT=DIR keeps the files in DIR.
set -euo pipefail

cd "$(dirname "${BASH_SOURCE[0]}")/.."
t0=$SECONDS

if ! command -v chromium >/dev/null 2>&1; then
	echo "== installing chromium (apt-get)"
	apt-get update
	DEBIAN_FRONTEND=noninteractive apt-get install -y chromium
fi
t1=$SECONDS
chromium --version 2>/dev/null

if [ -n "${TRUESET_BROWSER_OUT:-}" ]; then
	work="$TRUESET_BROWSER_OUT"
	mkdir -p "$work"
	work="$(cd "$work" && pwd)"
else
	work="$(mktemp -d)"
	trap 'rm -rf "$work"' EXIT
fi

step() { echo "== $* (at $((SECONDS - t0)) s)"; }

step build
go build -o "$work/trueset" ./cmd/trueset
go vet -tags browser ./cmd/trueset/

step dataset, report, stats --json
rm -rf "$work/set"
"$work/trueset" generate --out "$work/set" --count 200 --seed 1 --quiet
"$work/trueset" report "$work/set" --out "$work/report.html"
"$work/trueset" stats "$work/set" --json >"$work/stats.json"

# Headless, no network, no first-run or background work, a fresh profile
# each time; root needs --no-sandbox.
chrome() {
	local profile
	profile="$(mktemp -d "$work/profile.XXXXXX")"
	timeout 180 chromium --headless --no-sandbox --disable-gpu --disable-quic --no-first-run \
		--disable-background-networking --disable-component-update --disable-sync \
		--user-data-dir="$profile" "$@" 2>>"$work/chromium.log"
	rm -rf "$profile"
}
url="file://$work/report.html"

step chromium --screenshot
rm -f "$work/shot.png"
chrome --screenshot="$work/shot.png" --window-size=1280,2000 "$url" >/dev/null ||
	{ cat "$work/chromium.log" >&2; exit 1; }
[ -s "$work/shot.png" ] || { echo "chromium wrote no screenshot" >&2; cat "$work/chromium.log" >&2; exit 1; }

step chromium --dump-dom
chrome --dump-dom "$url" >"$work/dom.html" ||
	{ cat "$work/chromium.log" >&2; exit 1; }
[ -s "$work/dom.html" ] || { echo "chromium dumped no DOM" >&2; cat "$work/chromium.log" >&2; exit 1; }

step go test -tags browser -run Browser ./cmd/trueset/
TRUESET_BROWSER_REPORT="$work/report.html" \
	TRUESET_BROWSER_STATS="$work/stats.json" \
	TRUESET_BROWSER_SHOT="$work/shot.png" \
	TRUESET_BROWSER_DOM="$work/dom.html" \
	go test -count=1 -tags browser -run Browser -v ./cmd/trueset/ | grep -v '^=== RUN'

echo "== browser check passed in $((SECONDS - t0)) s ($((SECONDS - t1)) s after the chromium check)"
if [ -n "${TRUESET_BROWSER_OUT:-}" ]; then echo "files in $work"; fi
