#!/usr/bin/env bash
# crash_export.sh: kill `pipit export` at random moments and check that
# the output directory always holds one complete export.
#
# It builds pipit and scripts/checkexport, makes a small synthetic corpus
# of the timber-yard monitor, trains and quantises two tiny models (A and
# B, one epoch each), and exports each into a reference directory. It
# exports A to OUT, then KILLS times (default 50) starts `pipit export` of
# the model OUT does not hold over OUT and kills it with SIGKILL after a
# random delay spread over the command's measured run time. After every
# kill OUT must be file for file (cmp) one of the two reference exports,
# its blob's sha256sum must be the one its scheme records, its headers
# must record its scheme's seal, and checkexport (pipit.OpenExport) must
# accept it. Finally one export runs to completion, after which nothing
# but OUT may be left in its parent (no .OUT.tmp-N or .OUT.old-N).
#
# Prints one summary line and exits 1 on any failure.
#
# usage: scripts/crash_export.sh [KILLS]
set -euo pipefail

kills=${1:-50}
repo=$(cd "$(dirname "$0")/.." && pwd)
work=$(mktemp -d "${TMPDIR:-/tmp}/pipit-crash.XXXXXX")
trap 'rm -rf "$work"' EXIT
t0=$(date +%s%N)

cd "$repo"
go build -o "$work/pipit" ./cmd/pipit
go build -o "$work/checkexport" ./scripts/checkexport
cd "$work"

./pipit synth --out corpus --clips-per-class 5 --seed 3 >/dev/null 2>&1
for m in a b; do
	seed=1
	[ "$m" = b ] && seed=2
	./pipit train --data corpus/manifest.csv --out "$m.pnet" --epochs 1 --seed "$seed" --cache cache >/dev/null 2>&1
	./pipit quantize --model "$m.pnet" --calib corpus/manifest.csv --out "$m.pq8" --method minmax --cache cache >/dev/null 2>&1
	./pipit export --model "$m.pq8" --out "ref/$m" >/dev/null
done

seal_of() { sed -n 's/^  "seal": "\([0-9a-f]*\)"$/\1/p' "$1/model.scheme.json"; }
seal_a=$(seal_of ref/a)
seal_b=$(seal_of ref/b)
if [ -z "$seal_a" ] || [ "$seal_a" = "$seal_b" ]; then
	echo "crash_export: the two reference exports are not told apart (seals '$seal_a', '$seal_b')" >&2
	exit 1
fi

# same_dir D R: D holds exactly R's files with R's bytes.
same_dir() {
	[ "$(ls -A "$1")" = "$(ls -A "$2")" ] || return 1
	local f
	for f in $(ls -A "$2"); do
		cmp -s "$1/$f" "$2/$f" || return 1
	done
}

# which_export D: prints a or b if D is one complete export, else why not.
which_export() {
	local d=$1 m
	if [ ! -d "$d" ]; then
		echo "missing"
		return
	fi
	for m in a b; do
		if same_dir "$d" "ref/$m"; then
			local blob_sum seal
			blob_sum=$(sha256sum "$d/model.blob" | cut -d' ' -f1)
			seal=$(seal_of "$d")
			if ! grep -q "\"sha256\": \"$blob_sum\"" "$d/model.scheme.json"; then
				echo "blob sha256 $blob_sum not in the scheme"
			elif ! grep -q "^#define PIPIT_NET_SEAL \"$seal\"" "$d/pipit_net.h" || ! grep -q "^#define PIPIT_NET_FE_SEAL \"$seal\"" "$d/pipit_net_fe.h"; then
				echo "headers do not record the seal $seal"
			elif ! ./checkexport "$d" >/dev/null 2>checkexport.err; then
				echo "checkexport: $(cat checkexport.err)"
			else
				echo "$m"
			fi
			return
		fi
	done
	echo "neither reference export: $(ls -A "$d" | tr '\n' ' ')"
}

mkdir yard
out=yard/export
./pipit export --model a.pq8 --out "$out" >/dev/null
holds=$(which_export "$out")
[ "$holds" = a ] || { echo "crash_export: first export: $holds" >&2; exit 1; }

# Run time of one export over an existing one, in microseconds (mean of 5).
total=0
for i in 1 2 3 4 5; do
	m=b
	[ $((i % 2)) = 0 ] && m=a
	s=$(date +%s%N)
	./pipit export --model "$m.pq8" --out "$out" >/dev/null
	e=$(date +%s%N)
	total=$((total + (e - s) / 1000))
done
run_us=$((total / 5))
holds=$(which_export "$out") # a after the five

killed=0 finished=0 old=0 new=0 failures=0 midway=0
for ((k = 0; k < kills; k++)); do
	next=b
	[ "$holds" = b ] && next=a
	delay_us=$(((RANDOM * 32768 + RANDOM) % run_us))
	./pipit export --model "$next.pq8" --out "$out" >/dev/null 2>&1 &
	pid=$!
	sleep "$(printf '%d.%06d' $((delay_us / 1000000)) $((delay_us % 1000000)))"
	if kill -9 "$pid" 2>/dev/null; then
		killed=$((killed + 1))
	else
		finished=$((finished + 1))
	fi
	wait "$pid" 2>/dev/null || true
	if compgen -G "yard/.export.tmp-*" >/dev/null; then
		midway=$((midway + 1)) # killed while its new (or, after the exchange, old) set was on disk beside OUT
	fi
	now=$(which_export "$out")
	case $now in
	"$holds") old=$((old + 1)) ;;
	"$next") new=$((new + 1)) holds=$next ;;
	*)
		failures=$((failures + 1))
		echo "crash_export: after a kill at ${delay_us} µs: $out: $now" >&2
		# start the next round from a known state
		rm -rf "$out" "yard/.export".*
		./pipit export --model a.pq8 --out "$out" >/dev/null
		holds=a
		;;
	esac
done

# One export to completion: it must clean what the killed runs left.
next=b
[ "$holds" = b ] && next=a
./pipit export --model "$next.pq8" --out "$out" >/dev/null
left=$(ls -A yard | tr '\n' ' ')
if [ "$left" != "export " ]; then
	failures=$((failures + 1))
	echo "crash_export: after a completed export the parent holds: $left" >&2
fi
now=$(which_export "$out")
if [ "$now" != "$next" ]; then
	failures=$((failures + 1))
	echo "crash_export: the completed export holds: $now" >&2
fi

secs=$((($(date +%s%N) - t0) / 1000000))
printf 'crash_export: %d runs, %d killed (%d with a temporary set beside OUT), %d finished first; OUT held the old export %d times, the new %d times; %d failures; export takes %d ms; %d.%03d s in all\n' \
	"$kills" "$killed" "$midway" "$finished" "$old" "$new" "$failures" $((run_us / 1000)) $((secs / 1000)) $((secs % 1000))
[ "$failures" = 0 ]
