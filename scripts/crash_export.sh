#!/usr/bin/env bash
# Kill `pipit export` at random moments over an existing export and check
# what is left, as the robustness issue asks: after every kill -9 the
# export folder is, file for file, either the complete old export or the
# complete new one (byte-identical to a reference export of that model,
# which export itself read back and imported); after a later export that finishes, no
# leftover folder of the killed ones remains beside it.
#
#   scripts/crash_export.sh [KILLS]      (default 50)
#
# Run from anywhere; needs Go. Prints one summary line and exits non-zero
# on any failure.
set -euo pipefail
cd "$(dirname "$0")/.."
kills=${1:-50}
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
go build -o "$work/pipit" ./cmd/pipit
p=$work/pipit
"$p" synth --out "$work/yard" --clips-per-class 6 --folds 3 >/dev/null 2>&1
data=$work/yard/manifest.csv
for s in 1 2; do
	"$p" train --data "$data" --epochs 1 --seed "$s" --cache "$work/cache" --out "$work/m$s.pnet" >/dev/null 2>&1
	"$p" quantize --model "$work/m$s.pnet" --calib "$data" --cache "$work/cache" --out "$work/m$s.pq8" >/dev/null 2>&1
	"$p" export --model "$work/m$s.pq8" --out "$work/ref$s" >/dev/null 2>&1
done
sum() { (cd "$1" && find . -type f | LC_ALL=C sort | xargs sha256sum); }
sum "$work/ref1" >"$work/ref1.sum"
sum "$work/ref2" >"$work/ref2.sum"
cmp -s "$work/ref1.sum" "$work/ref2.sum" && { echo "the two models export the same files" >&2; exit 1; }
"$p" export --model "$work/m1.pq8" --out "$work/out" >/dev/null 2>&1
t0=$(date +%s.%N)
"$p" export --model "$work/m2.pq8" --out "$work/probe" >/dev/null 2>&1
t1=$(date +%s.%N)
span=$(awk -v a="$t0" -v b="$t1" 'BEGIN { printf "%.3f", b - a }')

old=0 new=0 fail=0
for i in $(seq "$kills"); do
	m=$(( i % 2 + 1 )) # alternate the model, so each run goes over the other
	delay=$(awk -v s="$span" -v r="$RANDOM" 'BEGIN { printf "%.3f", 1.2 * s * r / 32767 }')
	"$p" export --model "$work/m$m.pq8" --out "$work/out" >/dev/null 2>&1 &
	pid=$!
	sleep "$delay"
	kill -9 "$pid" 2>/dev/null || true
	wait "$pid" 2>/dev/null || true
	if [ ! -d "$work/out" ]; then
		# a two-rename swap killed half-way; the next export puts it back
		got=missing
	else
		sum "$work/out" >"$work/out.sum"
		if cmp -s "$work/out.sum" "$work/ref1.sum"; then got=1
		elif cmp -s "$work/out.sum" "$work/ref2.sum"; then got=2
		else got=mixed; fi
	fi
	case $got in
	1 | 2)
		if [ "$got" = "$m" ]; then new=$((new + 1)); else old=$((old + 1)); fi
		;;
	*)
		fail=$((fail + 1))
		echo "kill $i after ${delay}s: export folder is $got" >&2
		;;
	esac
done
# A finished export cleans every leftover of the killed ones.
"$p" export --model "$work/m1.pq8" --out "$work/out" >/dev/null
sum "$work/out" >"$work/out.sum"
cmp -s "$work/out.sum" "$work/ref1.sum" || { echo "final export differs from a fresh one" >&2; fail=$((fail + 1)); }
left=$(find "$work" -maxdepth 1 -name '.out.pipit-*' | wc -l)
[ "$left" = 0 ] || { echo "$left leftover folders beside the export" >&2; fail=$((fail + 1)); }
echo "crash_export: $kills kills over ${span}s exports: $old left the old export, $new the new one, $fail failures; leftovers after a finished export: $left"
[ "$fail" = 0 ]
