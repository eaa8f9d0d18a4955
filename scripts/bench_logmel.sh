#!/usr/bin/env bash
# Times pipit's log-mel (BenchmarkLogMel, one core) beside the numpy/scipy
# script doing the same work on one thread, in one run. Needs Debian's
# python3-numpy and python3-scipy.
set -euo pipefail
cd "$(dirname "$0")/.."
echo "== pipit (GOMAXPROCS=1)"
GOMAXPROCS=1 taskset -c 0 go test -run '^$' -bench 'BenchmarkLogMel$' -benchtime 10x -count 15 ./features |
  awk '/^BenchmarkLogMel/ {print $3 / 1e6}' | sort -n |
  awk '{t[NR] = $1} END {printf "pipit: median of %d: %.2f ms, best: %.2f ms\n", NR, t[int((NR+1)/2)], t[1]}'
echo "== numpy (1 thread)"
# OPENBLAS_CORETYPE / OPENBLAS_L2_SIZE are unset for this command only (they
# slow a current numpy on this machine); threads are pinned to one.
env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE OMP_NUM_THREADS=1 OPENBLAS_NUM_THREADS=1 MKL_NUM_THREADS=1 \
  taskset -c 0 /usr/bin/python3 scripts/bench_logmel.py
