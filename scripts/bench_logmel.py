#!/usr/bin/python3
"""Python side of the BenchmarkLogMel comparison (see scripts/bench_logmel.sh).

Computes the same log-mel as pipit's DefaultConfig (60 s at 16 kHz, n_fft 512,
hop 256, 40 HTK bands, power, dB with per-frame 80 dB clip) in the fastest
Python forms we could write, each on one thread:

  numpy   strided frames, one batched float64 rfft, one matrix product;
  scipy   float32 throughout: frames in chunks of 1,024, scipy.fft.rfft
          (workers=1), power, float32 matrix product, log10;
  torch   torch.stft on chunks of 1,024 frames (float32, center=False),
          power, matrix product, log10, torch.set_num_threads(1).

Every form is checked against the float64 numpy result first (the largest
difference is printed; a form more than 0.05 dB away is an error). Then
--rounds rounds run every form --runs times each, alternating, and one line
per form and round is printed: "form ms ms ms ...". The .sh collects them.
"""
import argparse
import sys
import time

import numpy as np
import scipy.fft
import scipy.signal
import torch

RATE, WIN, HOP, BANDS, FLOOR_BELOW_PEAK_DB, CHUNK = 16000, 512, 256, 40, 80.0, 1024


def htk(f):
    return 2595.0 * np.log10(1.0 + f / 700.0)


def htk_inv(m):
    return 700.0 * (10.0 ** (m / 2595.0) - 1.0)


def filterbank():
    """(BANDS, WIN/2+1) HTK triangles, as pipit's MelFilterbank (no area norm)."""
    freqs = np.arange(WIN // 2 + 1) * RATE / WIN
    edges = htk_inv(np.linspace(htk(0.0), htk(RATE / 2), BANDS + 2))
    lo, ce, hi = edges[:-2, None], edges[1:-1, None], edges[2:, None]
    return np.maximum(0.0, np.minimum((freqs - lo) / (ce - lo), (hi - freqs) / (hi - ce)))


def logmel_numpy(x, win, fb):
    frames = np.lib.stride_tricks.sliding_window_view(x, WIN)[::HOP]
    spec = np.abs(np.fft.rfft(frames * win, axis=1)) ** 2
    v = 10.0 * np.log10(np.maximum(spec @ fb.T, 1e-10))
    return np.maximum(v, v.max(axis=1, keepdims=True) - FLOOR_BELOW_PEAK_DB)


def logmel_scipy(x, win32, fbt32):
    frames = np.lib.stride_tricks.sliding_window_view(x, WIN)[::HOP]
    out = np.empty((frames.shape[0], BANDS), dtype=np.float32)
    for s in range(0, frames.shape[0], CHUNK):
        c = scipy.fft.rfft(frames[s:s + CHUNK] * win32, axis=1, workers=1)
        p = c.real * c.real + c.imag * c.imag
        v = np.log10(np.maximum(p @ fbt32, np.float32(1e-10)))
        v *= np.float32(10.0)
        np.maximum(v, v.max(axis=1, keepdims=True) - np.float32(FLOOR_BELOW_PEAK_DB), out=out[s:s + CHUNK])
    return out


def logmel_torch(xt, wint, fbtt):
    n = 1 + (xt.shape[0] - WIN) // HOP
    out = torch.empty((n, BANDS), dtype=torch.float32)
    span = (CHUNK - 1) * HOP + WIN
    with torch.no_grad():
        for s in range(0, n, CHUNK):
            seg = xt[s * HOP:s * HOP + span]
            c = torch.stft(seg, n_fft=WIN, hop_length=HOP, window=wint, center=False, return_complex=True)
            p = torch.view_as_real(c).square().sum(-1)  # (bins, frames)
            v = torch.log10(torch.clamp(p.t() @ fbtt, min=1e-10)).mul_(10.0)
            torch.maximum(v, v.amax(dim=1, keepdim=True) - FLOOR_BELOW_PEAK_DB, out=out[s:s + v.shape[0]])
    return out


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--rounds", type=int, default=1)
    ap.add_argument("--runs", type=int, default=10)
    args = ap.parse_args()
    torch.set_num_threads(1)

    rng = np.random.default_rng(5)
    x = (rng.standard_normal(60 * RATE) * 0.1).astype(np.float32)
    win = scipy.signal.get_window("hann", WIN, fftbins=True)
    fb = filterbank()
    win32, fbt32 = win.astype(np.float32), np.ascontiguousarray(fb.T.astype(np.float32))
    xt, wint, fbtt = torch.from_numpy(x), torch.from_numpy(win32), torch.from_numpy(fbt32)

    forms = {
        "numpy": lambda: logmel_numpy(x, win, fb),
        "scipy": lambda: logmel_scipy(x, win32, fbt32),
        "torch": lambda: logmel_torch(xt, wint, fbtt),
    }
    ref = forms["numpy"]()
    for name, f in forms.items():
        m = np.asarray(f(), dtype=np.float64)
        d = float(np.max(np.abs(m - ref)))
        print(f"# {name}: {m.shape[0]} frames x {m.shape[1]} bands, max difference from numpy float64 {d:.2g} dB")
        if m.shape != ref.shape or d > 0.05:
            sys.exit(f"bench_logmel.py: {name} disagrees with numpy ({d} dB)")
    print(f"# numpy {np.__version__}, scipy {scipy.__version__}, torch {torch.__version__}, threads {torch.get_num_threads()}")
    for _ in range(args.rounds):
        for name, f in forms.items():
            times = []
            for _ in range(args.runs):
                t0 = time.perf_counter()
                f()
                times.append((time.perf_counter() - t0) * 1e3)
            print(name, " ".join(f"{t:.3f}" for t in times), flush=True)


if __name__ == "__main__":
    main()
