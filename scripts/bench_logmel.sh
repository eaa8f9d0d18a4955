#!/usr/bin/env bash
# Times pipit's log-mel (BenchmarkLogMel, GOMAXPROCS=1) beside the fastest
# Python forms we could write (scripts/bench_logmel.py: numpy float64,
# scipy float32 on chunks of 1,024 frames, torch.stft on chunks), all on
# one pinned core, in alternating rounds; prints the median and best of
# every form over all rounds and pipit's ratio to each. Needs Debian's
# python3-numpy, python3-scipy and python3-torch.
#
#   ./scripts/bench_logmel.sh [ROUNDS]      (default 5 rounds)
set -euo pipefail
cd "$(dirname "$0")/.."
rounds=${1:-5}
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
go test -c -o "$tmp/features.test" ./features
# OPENBLAS_CORETYPE / OPENBLAS_L2_SIZE are unset for Python only (they
# slow a current numpy on this machine); every library gets one thread.
py() {
  env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE OMP_NUM_THREADS=1 OPENBLAS_NUM_THREADS=1 MKL_NUM_THREADS=1 \
    taskset -c 0 /usr/bin/python3 scripts/bench_logmel.py "$@"
}
py --rounds 0 | tee "$tmp/head" # the agreement check and versions
for r in $(seq "$rounds"); do
  echo "round $r/$rounds" >&2
  (cd features && GOMAXPROCS=1 taskset -c 0 "$tmp/features.test" -test.run '^$' -test.bench 'BenchmarkLogMel$' \
    -test.benchtime 10x -test.count 5) |
    awk '/^BenchmarkLogMel/ {printf "pipit %.3f\n", $3 / 1e6}' >>"$tmp/times"
  py --rounds 1 --runs 5 | awk '!/^#/ {for (i = 2; i <= NF; i++) print $1, $i}' >>"$tmp/times"
done
echo "== log-mel of 60 s at 16 kHz (512/256/40, power, dB), one thread, $rounds alternating rounds"
sort -k1,1 -k2,2n "$tmp/times" | awk '
  {t[$1, ++n[$1]] = $2}
  END {
    p = t["pipit", int((n["pipit"] + 1) / 2)]
    printf "%-6s %6s %9s %9s %s\n", "form", "runs", "median", "best", "pipit faster by"
    split("pipit numpy scipy torch", forms)
    for (i = 1; i <= 4; i++) {
      f = forms[i]; m = t[f, int((n[f] + 1) / 2)]
      printf "%-6s %6d %7.2f ms %6.2f ms", f, n[f], m, t[f, 1]
      if (f != "pipit") printf " %.2fx", m / p
      printf "\n"
    }
  }'
