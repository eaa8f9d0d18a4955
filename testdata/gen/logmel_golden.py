#!/usr/bin/python3
"""Independent log-mel reference for features/logmel_test.go.

Run from the repository root:  /usr/bin/python3 testdata/gen/logmel_golden.py
Needs Debian's python3-numpy and python3-scipy (written against numpy 1.24.2,
scipy 1.10.1). Reads testdata/wav/sweep_s16_16k.wav with scipy.io.wavfile and
writes features/testdata/logmel_<name>.csv: a '#' header line with the
settings, then one row per frame, one column per band.

This follows the definition in features/config.go (Config doc comment) with
numpy and scipy primitives only; it shares no code with pipit.
"""
import json
import numpy as np
import scipy.io.wavfile
import scipy.signal

CASES = {
    # pipit's DefaultConfig
    "default": dict(sample_rate_hz=16000, window_samples=512, hop_samples=256, fft_size=512,
                    window="hann", symmetric_window=False, pad_ends=False, bands=40,
                    fmin_hz=0.0, fmax_hz=8000.0, mel_scale="htk", mel_norm="none",
                    spectrum="power", log="db", log_floor=1e-10, floor_below_peak_db=80.0),
    # every other option flipped
    "variant": dict(sample_rate_hz=16000, window_samples=400, hop_samples=160, fft_size=512,
                    window="hamming", symmetric_window=True, pad_ends=True, bands=32,
                    fmin_hz=125.0, fmax_hz=7000.0, mel_scale="slaney", mel_norm="area",
                    spectrum="magnitude", log="ln", log_floor=1e-6, floor_below_peak_db=0.0),
}


def hz_to_mel(scale, f):
    f = np.asarray(f, dtype=np.float64)
    if scale == "htk":
        return 2595.0 * np.log10(1.0 + f / 700.0)
    # Slaney, continuous form (Ellis, hz2mel.m)
    lin = f / (200.0 / 3.0)
    log = 15.0 + np.log(np.maximum(f, 1e-300) / 1000.0) / (np.log(6.4) / 27.0)
    return np.where(f < 1000.0, lin, log)


def mel_to_hz(scale, m):
    m = np.asarray(m, dtype=np.float64)
    if scale == "htk":
        return 700.0 * (10.0 ** (m / 2595.0) - 1.0)
    return np.where(m < 15.0, m * (200.0 / 3.0), 1000.0 * np.exp((np.log(6.4) / 27.0) * (m - 15.0)))


def filterbank(c):
    n_bins = c["fft_size"] // 2 + 1
    freqs = np.arange(n_bins) * c["sample_rate_hz"] / c["fft_size"]
    mels = np.linspace(hz_to_mel(c["mel_scale"], c["fmin_hz"]), hz_to_mel(c["mel_scale"], c["fmax_hz"]), c["bands"] + 2)
    edges = mel_to_hz(c["mel_scale"], mels)
    fb = np.zeros((c["bands"], n_bins))
    for m in range(c["bands"]):
        lo, ce, hi = edges[m], edges[m + 1], edges[m + 2]
        tri = np.minimum((freqs - lo) / (ce - lo), (hi - freqs) / (hi - ce))
        fb[m] = np.maximum(tri, 0.0)
        if c["mel_norm"] == "area":
            fb[m] *= 2.0 / (hi - lo)
    return fb


def logmel(x, c):
    win = scipy.signal.get_window(c["window"], c["window_samples"], fftbins=not c["symmetric_window"])
    pad = c["window_samples"] // 2 if c["pad_ends"] else 0
    x = np.concatenate([np.zeros(pad), x, np.zeros(pad)])
    n_frames = 1 + (len(x) - c["window_samples"]) // c["hop_samples"]
    off = (c["fft_size"] - c["window_samples"]) // 2
    fb = filterbank(c)
    rows = []
    for t in range(n_frames):
        seg = np.zeros(c["fft_size"])
        seg[off:off + c["window_samples"]] = x[t * c["hop_samples"]: t * c["hop_samples"] + c["window_samples"]] * win
        spec = np.abs(np.fft.rfft(seg))
        if c["spectrum"] == "power":
            spec = spec ** 2
        v = np.maximum(fb @ spec, c["log_floor"])
        if c["log"] == "db":
            v = 10.0 * np.log10(v)
            if c["floor_below_peak_db"] > 0:
                v = np.maximum(v, v.max() - c["floor_below_peak_db"])
        else:
            v = np.log(v)
        rows.append(v)
    return np.array(rows)


def main():
    rate, pcm = scipy.io.wavfile.read("testdata/wav/sweep_s16_16k.wav")
    assert rate == 16000 and pcm.dtype == np.int16
    x = pcm.astype(np.float64) / 32768.0
    for name, c in CASES.items():
        m = logmel(x, c)
        with open(f"features/testdata/logmel_{name}.csv", "w") as f:
            f.write("# " + json.dumps(c, sort_keys=True) + "\n")
            for row in m:
                f.write(",".join(f"{v:.6f}" for v in row) + "\n")
        print(name, m.shape)


if __name__ == "__main__":
    main()
