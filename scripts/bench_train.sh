#!/usr/bin/env bash
# Times a training step of each reference architecture in pipit
# (BenchmarkTrainStep) and in PyTorch CPU (Debian python3-torch) with the
# same number of threads, side by side, and prints the ratio.
# Usage: scripts/bench_train.sh [THREADS]   (default 2)
set -euo pipefail
cd "$(dirname "$0")/.."
threads=${1:-2}
go_out=$(GOMAXPROCS=$threads go test -run '^$' -bench 'BenchmarkTrainStep' -benchtime 20x -count 3 ./nn | grep '^BenchmarkTrainStep')
py_out=$(env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE /usr/bin/python3 scripts/bench_train.py "$threads")
echo "$go_out"
echo "$py_out"
for arch in pooled separable strided; do
  pipit_ms=$(echo "$go_out" | awk -v a="$arch" '$1 ~ "/"a"(-[0-9]+)?$" {print $3/1e6}' | sort -n | awk '{t[NR]=$1} END {print t[int((NR+1)/2)]}')
  torch_ms=$(echo "$py_out" | awk -v a="$arch:" '$4 == a {print $5}')
  awk -v a="$arch" -v p="$pipit_ms" -v t="$torch_ms" -v n="$threads" \
    'BEGIN {printf "%-10s threads=%s  pipit %7.1f ms/step  torch %7.1f ms/step  pipit/torch %.2f\n", a, n, p, t, p/t}'
done
