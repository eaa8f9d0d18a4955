#!/usr/bin/env bash
# Regenerates testdata/wav/*.wav with SoX (Debian package "sox").
# Each file is a sine of known frequency and amplitude, so a decoder test
# can compare the decoded samples with the analytic signal.
#   sox -r R -c C -n ... synth D sine F  generates sin(2π F t) from phase 0
#                               directly at rate R (rate and channels are
#                               given before -n, so no resampling is added);
#   vol 0.5                     scales it to amplitude 0.5;
#   -D                          disables dither, so samples are the rounded sine.
# -t wavpcm forces a plain WAVE_FORMAT_PCM / IEEE_FLOAT header; -t wav lets
# sox choose WAVE_FORMAT_EXTENSIBLE (it does so for > 16 bits or > 2 channels).
set -euo pipefail
cd "$(dirname "$0")/../wav"
gen() { # name rate bits encoding type channels synth...
  local name=$1 rate=$2 bits=$3 enc=$4 typ=$5 ch=$6; shift 6
  sox -D -r "$rate" -c "$ch" -n -b "$bits" -e "$enc" -t "$typ" "$name" synth 0.25 "$@" vol 0.5
}
gen pcm_u8_16k.wav        16000  8 unsigned-integer wavpcm 1 sine 1000
gen pcm_s16_16k.wav       16000 16 signed-integer   wavpcm 1 sine 1000
gen pcm_s24_16k.wav       16000 24 signed-integer   wavpcm 1 sine 1000
gen pcm_s32_16k.wav       16000 32 signed-integer   wavpcm 1 sine 1000
gen float32_16k.wav       16000 32 floating-point   wavpcm 1 sine 1000
gen ext_s24_48k.wav       48000 24 signed-integer   wav    1 sine 1000
gen float32_44k1.tmp.wav 44100 32 floating-point wavpcm 1 sine 1000
# SoX never writes WAVE_FORMAT_EXTENSIBLE for float, so this one's header is
# rewritten (samples untouched) into the 40-byte extensible fmt chunk with
# the KSDATAFORMAT_SUBTYPE_IEEE_FLOAT GUID, as mmreg.h/ksmedia.h define it.
/usr/bin/python3 - float32_44k1.tmp.wav ext_float32_44k1.wav <<'PY'
import struct, sys
src = open(sys.argv[1], 'rb').read()
pos, chunks = 12, {}
while pos + 8 <= len(src):
    cid, size = src[pos:pos+4], struct.unpack('<I', src[pos+4:pos+8])[0]
    chunks[cid] = src[pos+8:pos+8+size]
    pos += 8 + size + (size & 1)
tag, ch, rate, brate, align, bits = struct.unpack('<HHIIHH', chunks[b'fmt '][:16])
guid = struct.pack('<H', 3) + bytes.fromhex('000000001000800000aa00389b71')
fmt = struct.pack('<HHIIHHHHI', 0xFFFE, ch, rate, brate, align, bits, 22, bits, 0x4) + guid
data = chunks[b'data']
body = b'WAVE' + b'fmt ' + struct.pack('<I', len(fmt)) + fmt + b'data' + struct.pack('<I', len(data)) + data
open(sys.argv[2], 'wb').write(b'RIFF' + struct.pack('<I', len(body)) + body)
PY
rm float32_44k1.tmp.wav
gen stereo_s16_22k05.wav  22050 16 signed-integer   wavpcm 2 sine 1000 sine 1500
gen quad_s16_8k.wav        8000 16 signed-integer   wav    4 sine 500 sine 1000 sine 1500 sine 2000
gen pcm_s16_11k025.wav    11025 16 signed-integer   wavpcm 1 sine 1000
gen pcm_s16_32k.wav       32000 16 signed-integer   wavpcm 1 sine 1000
for f in *.wav; do  # report the format tag sox chose
  printf '%s: format tag 0x%s\n' "$f" "$(xxd -s 20 -l 2 -e "$f" | awk '{print $2}')"
done
# A 1 s linear sweep from 100 Hz to 7 kHz (exponential sweeps: "sine 100:7000")
# mixed with white noise (synth ... mix), the input of the numpy log-mel goldens.
sox -D -r 16000 -c 1 -n -b 16 -e signed-integer -t wavpcm sweep_s16_16k.wav synth 1.0 sine 100+7000 synth 1.0 whitenoise mix vol 0.5
