#!/bin/sh
# The recipe ablation on the hard synthetic corpus: every recipe element
# alone and in combination, for the separable network, 5 folds x 3 seeds,
# float and int8 (post-training quantisation with pipit quantize's
# defaults), then the table (scripts/recipe/ablation_table.py).
#
#   scripts/recipe/ablation.sh OUTDIR [CONFIG ...]     (default: all configs)
#
# Run from the repository root. Every job runs under nice -n 19 with
# GOMAXPROCS=1, one at a time; finished runs are kept, so a stopped
# ablation resumes where it stopped.
set -eu
out=${1:?usage: scripts/recipe/ablation.sh OUTDIR [CONFIG ...]}
shift
mkdir -p "$out"
echo "cpu: $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2- | sed 's/^ *//'), $(nproc) cores; $(date -u +%F)"
go build -o "$out/pipit" ./cmd/pipit
run() { GOMAXPROCS=1 nice -n 19 "$out/pipit" "$@"; }
data=$out/hard
[ -f "$data/manifest.csv" ] || run synth --hard --clips-per-class 120 --seed 7 --out "$data" >/dev/null
cache=$out/cache
seeds=${SEEDS:-1 2 3}

# name|flags of pipit train. "today" pins the recipe before this ablation
# (40 epochs, patience 10, cosine, no mixup or smoothing); its single
# elements follow; "long-*" train 120 epochs without early stopping;
# "new-default" is pipit train's default recipe since (no flags).
T='--epochs 40 --patience 10 --schedule cosine --mixup 0 --label-smoothing 0'
L='--epochs 120 --patience 0 --mixup 0 --label-smoothing 0'
configs="today|$T
mixup|$T --mixup 0.3
smooth|$T --label-smoothing 0.1
wd1e-3|$T --weight-decay 1e-3
constant-lr|$T --schedule constant
balanced|$T --balanced
long-cosine|$L --schedule cosine
long-constant|$L --schedule constant
long-constant+mixup|$L --schedule constant --mixup 0.3
long-constant+smooth|$L --schedule constant --label-smoothing 0.1
long-constant+balanced|$L --schedule constant --balanced
new-default|
new-default+wd1e-3|--weight-decay 1e-3
new-default+distill|--teacher TEACHER"

want() { [ $# -eq 0 ] && return 0; for w in "$@"; do [ "$w" = "$name" ] && return 0; done; return 1; }
echo "$configs" | while IFS='|' read -r name flags; do
	want "$@" || continue
	for s in $seeds; do
		d=$out/runs/$name/seed$s
		[ -f "$d/done" ] && continue
		f=$flags
		case $f in *TEACHER*)
			# a folder corpus gets its folds from --seed, so the teacher
			# (pooled, 9.5 times the student's MACs, default recipe) is
			# trained per seed, on exactly the student's folds
			t=$out/teacher/seed$s
			if [ ! -f "$t/cv.json" ]; then
				mkdir -p "$t"
				echo "$(date -u +%T) teacher (pooled) seed $s"
				run train --data "$data" --arch pooled --cross-validate --seed "$s" --cache "$cache" --out "$t/pooled.pnet" --json >"$t/cv.json.tmp" 2>"$t/stderr.txt"
				mv "$t/cv.json.tmp" "$t/cv.json"
			fi
			f=$(echo "$f" | sed "s|TEACHER|$t/pooled.pnet|");;
		esac
		mkdir -p "$d"
		echo "$(date -u +%T) $name seed $s: train $f"
		# shellcheck disable=SC2086 # flags are words
		run train --data "$data" --arch separable --cross-validate --seed "$s" --cache "$cache" --out "$d/m.pnet" --json $f >"$d/cv.json" 2>"$d/stderr.txt"
		for k in 0 1 2 3 4; do
			run quantize --model "$d/m.pnet.fold$k" --calib "$data" --cache "$cache" --out "$d/m.fold$k.pq8" --json >"$d/q$k.json" 2>>"$d/stderr.txt"
		done
		touch "$d/done"
	done
done
# the fold models of one cross-validation as an ensemble, on a fresh hard
# corpus (another synth seed) that no fold model has seen
fresh=$out/fresh
[ -f "$fresh/manifest.csv" ] || run synth --hard --clips-per-class 120 --seed 8 --out "$fresh" >/dev/null
for name in ${ENSEMBLE:-today new-default}; do
	m=$out/runs/$name/seed1/m.pnet
	[ -f "$m.fold4" ] || continue
	for k in 0 1 2 3 4; do
		run eval --model "$m.fold$k" --data "$fresh" --fold all --cache "$cache" --png "$out/x.png" --json >"$out/runs/$name/fresh$k.json" 2>/dev/null
	done
	run eval --model "$m.fold0" --with "$m.fold1" --with "$m.fold2" --with "$m.fold3" --with "$m.fold4" \
		--data "$fresh" --fold all --cache "$cache" --png "$out/x.png" --json >"$out/runs/$name/fresh-ensemble.json" 2>/dev/null
done
python3 scripts/recipe/ablation_table.py "$out"
