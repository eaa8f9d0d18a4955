#!/usr/bin/env bash
# Times the whole synth → train → eval path on the default synthetic corpus
# (8 classes × 40 clips × 1 s, separable network) from a cold feature cache.
set -euo pipefail
cd "$(dirname "$0")/.."
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
go build -o "$work/pipit" ./cmd/pipit
start=$(date +%s.%N)
"$work/pipit" synth --out "$work/corpus" 2>/dev/null
"$work/pipit" train --data "$work/corpus/manifest.csv" --arch separable --out "$work/model.pnet" --cache "$work/cache" 2>/dev/null
"$work/pipit" eval --model "$work/model.pnet" --data "$work/corpus/manifest.csv" --cache "$work/cache" 2>/dev/null | head -4
end=$(date +%s.%N)
awk -v a="$start" -v b="$end" 'BEGIN {printf "synth → train → eval: %.1f s wall clock\n", b - a}'
