#!/usr/bin/env bash
# Peak memory of `pipit timeline` and `pipit melspec` on a long recording.
#
# Writes a synthetic day at the invented timber yard (`pipit synth --day`,
# streamed to disk) of RSS_SECONDS seconds (default 7200: two hours, 16 kHz
# mono 16-bit, 230 MB), trains a small model for 2 epochs on a small
# synthetic corpus, then runs both commands under /usr/bin/time -v and
# prints the peak resident set size ("Maximum resident set size") and the
# wall time of each, with the date and the CPU.
#
# PIPIT_BIN=path uses that binary instead of building ./cmd/pipit (to
# measure an older build); KEEP_WORK=1 keeps the work directory;
# RSS_LIMIT_MB (default 200) is the peak each command must stay under:
# the script prints "over" and exits 1 when one does not.
#
# Needs GNU time at /usr/bin/time (Debian package "time").
set -euo pipefail
cd "$(dirname "$0")/.."
seconds=${RSS_SECONDS:-7200}
limit=${RSS_LIMIT_MB:-200}
if ! /usr/bin/time -v true >/dev/null 2>&1; then
	echo "rss_long.sh: needs GNU time at /usr/bin/time (apt-get install time)" >&2
	exit 1
fi
work=$(mktemp -d)
if [ "${KEEP_WORK:-0}" != 1 ]; then
	trap 'rm -rf "$work"' EXIT
else
	echo "work directory: $work"
fi
bin=${PIPIT_BIN:-}
if [ -z "$bin" ]; then
	bin="$work/pipit"
	go build -o "$bin" ./cmd/pipit
fi
"$bin" synth --out "$work/corpus" --clips-per-class 10 >/dev/null 2>&1
"$bin" train --data "$work/corpus/manifest.csv" --out "$work/model.pnet" --epochs 2 --cache "" >/dev/null 2>&1
"$bin" synth --out "$work/day" --day "$seconds" >/dev/null 2>&1
wav="$work/day/yard-day.wav"

# measure NAME CMD... runs CMD under /usr/bin/time -v and prints its figures.
measure() {
	local name=$1
	shift
	local log="$work/$name.time"
	if ! /usr/bin/time -v "$@" >"$work/$name.out" 2>"$log"; then
		echo "$name failed:" >&2
		tail -20 "$log" >&2
		exit 1
	fi
	awk -v name="$name" -v limit="$limit" -F': ' '
		/Maximum resident set size/ {rss = $2}
		/Elapsed \(wall clock\) time/ {wall = $2}
		/User time \(seconds\)/ {cpu += $2}
		/System time \(seconds\)/ {cpu += $2}
		END {
			mb = rss * 1024 / 1e6
			printf "%-9s peak RSS %7.1f MB (%s %d MB)   wall %s   CPU %.1f s\n", name, mb, mb < limit ? "under" : "over", limit, wall, cpu
			exit mb < limit ? 0 : 1
		}' "$log" || over=1
}
over=0

echo "date:  $(date -u '+%Y-%m-%d %H:%M UTC')"
echo "build: $(git rev-parse --short HEAD 2>/dev/null || echo unknown)$(git diff --quiet 2>/dev/null || echo ' (with uncommitted changes)'), $(go version | cut -d' ' -f3)"
echo "cpu:   $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2- | sed 's/^ *//'), $(nproc) cores"
echo "input: $(awk -v b="$(stat -c %s "$wav")" 'BEGIN {printf "%.1f", b / 1e6}') MB, $seconds s at 16 kHz mono 16-bit"
measure timeline "$bin" timeline --model "$work/model.pnet" --out "$work/tl" "$wav"
measure melspec "$bin" melspec --out "$work/mel" "$wav"
echo "outputs: timeline CSV $(stat -c %s "$work/tl.timeline.csv") bytes, melspec CSV $(stat -c %s "$work/mel.csv") bytes"
exit "$over"
