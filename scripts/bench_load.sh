#!/usr/bin/env bash
# Clips per second of datasets.Load (what pipit train, eval and quantize
# call) on a synthetic corpus of one-second 16 kHz 16-bit clips, with
# GOMAXPROCS=2: cold (empty feature cache; the WAV files are in the page
# cache) and warm (every matrix from the cache). BenchmarkLoadClips
# writes the corpus itself (8 classes, CLIPS in all).
#
#   ./scripts/bench_load.sh [CLIPS]       (default 4000)
set -euo pipefail
cd "$(dirname "$0")/.."
clips=${1:-4000}
PIPIT_BENCH_CLIPS=$clips GOMAXPROCS=2 go test -run '^$' -bench 'BenchmarkLoadClips' -benchtime 3x -count 3 ./datasets |
  awk '/^BenchmarkLoadClips/ {split($1, n, "/"); sub(/-[0-9]+$/, "", n[2]); r[n[2]] = r[n[2]] " " $5; print}
       END {for (k in r) print k ": clips/s of each run:" r[k]}'
