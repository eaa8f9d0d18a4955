#!/usr/bin/env bash
# Kill `pipit train` at random moments over an existing good model and
# check what is left, as the robustness issue asks:
#
#   - after every kill -9 the model file is byte for byte either the old
#     model or the finished new one (never a half-written file, never an
#     epoch of the unfinished run);
#   - every run is started with --replace --carry-on, so the interrupted
#     runs continue one another; the chain, once it finishes, must give a
#     model byte-identical to the same run never interrupted.
#
#   scripts/crash_train.sh [KILLS]      (default 50)
#
# Run from anywhere; needs Go. Prints one summary line and exits non-zero
# on any failure. About a minute and a half on a 2-core machine.
set -euo pipefail
cd "$(dirname "$0")/.."
kills=${1:-50}
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
go build -o "$work/pipit" ./cmd/pipit
p=$work/pipit
"$p" synth --out "$work/yard" --clips-per-class 16 --folds 3 >/dev/null 2>&1
data=$work/yard/manifest.csv
new=(--data "$data" --epochs 60 --batch 16 --cache "$work/cache")

# The old good model, and the new run never interrupted (the reference).
"$p" train "${new[@]}" --epochs 2 --out "$work/old.pnet" >/dev/null 2>&1
t0=$(date +%s.%N)
"$p" train "${new[@]}" --out "$work/straight.pnet" >/dev/null 2>&1
t1=$(date +%s.%N)
span=$(awk -v a="$t0" -v b="$t1" 'BEGIN { printf "%.3f", b - a }')
cp "$work/old.pnet" "$work/model.pnet"

old=0 newer=0 fail=0 finished=0 carried=0
for i in $(seq "$kills"); do
	delay=$(awk -v s="$span" -v r="$RANDOM" 'BEGIN { printf "%.3f", s * r / 32767 }')
	"$p" train "${new[@]}" --out "$work/model.pnet" --replace --carry-on >"$work/out.txt" 2>&1 &
	pid=$!
	sleep "$delay"
	if kill -9 "$pid" 2>/dev/null; then :; else finished=$((finished + 1)); fi
	wait "$pid" 2>/dev/null || true
	if grep -q "carrying on" "$work/out.txt"; then carried=$((carried + 1)); fi
	if cmp -s "$work/model.pnet" "$work/old.pnet"; then
		old=$((old + 1))
	elif cmp -s "$work/model.pnet" "$work/straight.pnet"; then
		newer=$((newer + 1))
		# The new model is in place; put the old one back so that the
		# next kills again land on a run over an old model.
		cp "$work/old.pnet" "$work/model.pnet.tmp" && mv "$work/model.pnet.tmp" "$work/model.pnet"
	else
		fail=$((fail + 1))
		echo "kill $i after ${delay}s: model.pnet is neither the old nor the new model" >&2
		tail -3 "$work/out.txt" >&2
		cp "$work/old.pnet" "$work/model.pnet"
	fi
done

# Finish the interrupted chain and compare with the uninterrupted run.
"$p" train "${new[@]}" --out "$work/model.pnet" --replace --carry-on >"$work/out.txt" 2>&1 || { cat "$work/out.txt" >&2; fail=$((fail + 1)); }
if ! cmp -s "$work/model.pnet" "$work/straight.pnet"; then
	echo "the carried-on run ended with a model different from the uninterrupted one" >&2
	fail=$((fail + 1))
fi
if grep -q "carrying on" "$work/out.txt"; then carried=$((carried + 1)); fi
echo "crash_train: $kills kills over ${span}s runs ($finished runs had already ended): $old left the old model, $newer the new one, $fail failures; $carried runs carried on an interrupted one; the chain ended byte-identical to the uninterrupted run: $([ "$fail" = 0 ] && echo yes || echo NO)"
[ "$fail" = 0 ]
