#!/usr/bin/env bash
# Whole-epoch comparison: pipit train against a PyTorch + numpy script
# (scripts/bench_epoch.py) doing the same augmentation, front end, network
# and optimiser, on one synthetic corpus, with the same thread count,
# alternating the two for ROUNDS rounds; then pipit's training windows/s
# as a fraction of its own step benchmark (BenchmarkTrainStep).
# Usage: scripts/bench_epoch.sh [THREADS] [ARCH] [CLIPS_PER_CLASS] [ROUNDS]
#        (defaults 2, separable, 1250 (10,000 clips), 3)
# The corpus is kept in ${PIPIT_BENCH_DIR:-/tmp/pipit-bench-epoch}.
set -euo pipefail
cd "$(dirname "$0")/.."
threads=${1:-2}
arch=${2:-separable}
per=${3:-1250}
rounds=${4:-3}
dir=${PIPIT_BENCH_DIR:-/tmp/pipit-bench-epoch}
go build -o "$dir/pipit" ./cmd/pipit
if [ ! -f "$dir/corpus-$per/manifest.csv" ]; then
  "$dir/pipit" synth --out "$dir/corpus-$per" --clips-per-class "$per" >/dev/null 2>&1
fi
corpus="$dir/corpus-$per/manifest.csv"
epochs=2 # the second epoch is timed (the first warms caches and the feature cache)
for r in $(seq "$rounds"); do
  rm -f "$dir/model.pnet"*
  GOMAXPROCS=$threads "$dir/pipit" train --data "$corpus" --arch "$arch" --epochs $epochs --test-fold 0 --val-fold 1 \
    --cache "$dir/cache" --out "$dir/model.pnet" >/dev/null 2>&1
  awk -F, -v t="$threads" -v a="$arch" 'NR == 3 {printf "pipit threads=%s %s epoch 2: train %.2f s (%.0f windows/s), validation %.2f s\n", t, a, $7, $8, $9}' "$dir/model.pnet.log.csv"
  env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE /usr/bin/python3 scripts/bench_epoch.py "$corpus" "$threads" "$arch" $epochs | grep 'epoch 2'
done | tee "$dir/epochs.txt"
step=$(GOMAXPROCS=$threads go test -run '^$' -bench "BenchmarkTrainStep/$arch\$" -benchtime 40x -count 3 ./nn | awk '/samples\/s/ {for (i=1;i<=NF;i++) if ($(i+1)=="samples/s") print $i}' | sort -n | awk '{v[NR]=$1} END {print v[int((NR+1)/2)]}')
awk -v step="$step" '
  /^pipit/ {gsub(/[(]/, "", $9); p[++np] = $7 + $12; w[np] = $9}
  /^torch/ {t[++nt] = $8 + $13}
  function med(a, n,   i, j, x) { for (i = 1; i <= n; i++) for (j = i + 1; j <= n; j++) if (a[j] < a[i]) {x = a[i]; a[i] = a[j]; a[j] = x}; return a[int((n + 1) / 2)] }
  END {
    pe = med(p, np); te = med(t, nt); pw = med(w, np)
    printf "median epoch (train + validation): pipit %.2f s, torch %.2f s, pipit faster by %.2fx\n", pe, te, te / pe
    printf "pipit training windows/s %.0f = %.0f %% of BenchmarkTrainStep (%.0f samples/s)\n", pw, 100 * pw / step, step
  }' "$dir/epochs.txt"
