#!/usr/bin/env bash
# Regenerates the level fixtures testdata/levels/level_*.wav with SoX (Debian
# package "sox") and records SoX's own RMS figures of them in
# testdata/levels/level_sox_stats.txt, the outside reference of the meter tests
# (features/meter_test.go). All files are mono, 16 kHz, undithered (-D).
#   level_sine1k_full_f32.wav  1 s, 1 kHz sine at amplitude 1, 32-bit float
#                              (a full-scale sine: -3.01 dB re full scale)
#   level_sine1k_m20.wav       1 s, 1 kHz sine at amplitude 0.1, 16-bit (-23.01 dB)
#   level_cal1k_m9.wav         2 s, 1 kHz sine at amplitude 0.5, 16-bit: a stand-in
#                              for a recorded acoustic calibrator tone (-9.03 dB)
#   level_noise_a.wav          2 s of SoX white noise at vol 0.25, 16-bit
#   level_noise_b.wav          level_noise_a.wav reversed in time (uncorrelated with it)
#   level_noise_ab.wav         a + b mixed at unit gain each (-v 1), so it is
#                              3.01 dB above either
set -euo pipefail
cd "$(dirname "$0")/../levels"
s16="-b 16 -e signed-integer -t wavpcm"
sox -D -r 16000 -c 1 -n -b 32 -e floating-point -t wavpcm level_sine1k_full_f32.wav synth 1 sine 1000
sox -D -r 16000 -c 1 -n $s16 level_sine1k_m20.wav synth 1 sine 1000 vol 0.1
sox -D -r 16000 -c 1 -n $s16 level_cal1k_m9.wav synth 2 sine 1000 vol 0.5
sox -D -r 16000 -c 1 -n $s16 level_noise_a.wav synth 2 whitenoise vol 0.25
sox -D level_noise_a.wav $s16 level_noise_b.wav reverse
sox -D -m -v 1 level_noise_a.wav -v 1 level_noise_b.wav $s16 level_noise_ab.wav
{
  echo "# RMS level of each file in dB re full scale (a full-scale square wave = 0 dB),"
  echo "# as printed by 'sox FILE -n stats' (\"RMS lev dB\"), $(sox --version | head -1 | sed 's/^sox: *//')"
  for f in level_*.wav; do
    printf '%s %s\n' "$f" "$(sox "$f" -n stats 2>&1 | awk '/^RMS lev dB/ {print $4}')"
  done
} > level_sox_stats.txt
cat level_sox_stats.txt
