#!/usr/bin/env bash
# Times a training step of each reference architecture in pipit
# (BenchmarkTrainStep) and in PyTorch CPU (Debian python3-torch) with the
# same number of threads, side by side: ROUNDS rounds alternating the two,
# then the median of each and their ratio.
# Usage: scripts/bench_train.sh [THREADS] [ROUNDS]   (defaults 2 and 5)
set -euo pipefail
cd "$(dirname "$0")/.."
threads=${1:-2}
rounds=${2:-5}
go test -c -o /tmp/pipit-nn-bench.test ./nn
all=""
for r in $(seq "$rounds"); do
  all+=$(GOMAXPROCS=$threads /tmp/pipit-nn-bench.test -test.run '^$' -test.bench 'BenchmarkTrainStep' -test.benchtime 20x | grep '^BenchmarkTrainStep')$'\n'
  all+=$(env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE /usr/bin/python3 scripts/bench_train.py "$threads")$'\n'
done
med() { sort -n | awk '{v[NR]=$1} END {print v[int((NR+1)/2)]}'; }
echo "$all" | grep -v '^$' > /tmp/pipit-bench-train.txt
for arch in pooled separable strided; do
  pipit_ms=$(awk -v a="$arch" '$1 ~ "/"a"(-[0-9]+)?$" {print $3/1e6}' /tmp/pipit-bench-train.txt | med)
  torch_ms=$(awk -v a="$arch:" '$4 == a {print $5}' /tmp/pipit-bench-train.txt | med)
  awk -v a="$arch" -v p="$pipit_ms" -v t="$torch_ms" -v n="$threads" -v r="$rounds" \
    'BEGIN {printf "%-10s threads=%s  median of %d rounds: pipit %6.2f ms/step  torch %6.2f ms/step  torch/pipit %.2f\n", a, n, r, p, t, t/p}'
done
