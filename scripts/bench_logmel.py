#!/usr/bin/python3
"""numpy/scipy side of the BenchmarkLogMel comparison (see scripts/bench_logmel.sh).

Computes the same log-mel as pipit's DefaultConfig (60 s at 16 kHz, n_fft 512,
hop 256, 40 HTK bands, power, dB with per-frame 80 dB clip) the fast numpy way:
strided frames, one batched rfft, one matrix product. Prints the median and
the best of 30 runs in ms. Run with one thread (the .sh sets the *_NUM_THREADS variables).
"""
import time
import numpy as np
import scipy.signal

RATE, WIN, HOP, BANDS = 16000, 512, 256, 40


def htk(f):
    return 2595.0 * np.log10(1.0 + f / 700.0)


def htk_inv(m):
    return 700.0 * (10.0 ** (m / 2595.0) - 1.0)


def filterbank():
    freqs = np.arange(WIN // 2 + 1) * RATE / WIN
    edges = htk_inv(np.linspace(htk(0.0), htk(RATE / 2), BANDS + 2))
    lo, ce, hi = edges[:-2, None], edges[1:-1, None], edges[2:, None]
    return np.maximum(0.0, np.minimum((freqs - lo) / (ce - lo), (hi - freqs) / (hi - ce)))


def logmel(x, win, fb):
    frames = np.lib.stride_tricks.sliding_window_view(x, WIN)[::HOP]
    spec = np.abs(np.fft.rfft(frames * win, axis=1)) ** 2
    v = 10.0 * np.log10(np.maximum(spec @ fb.T, 1e-10))
    return np.maximum(v, v.max(axis=1, keepdims=True) - 80.0)


def main():
    rng = np.random.default_rng(5)
    x = (rng.standard_normal(60 * RATE) * 0.1).astype(np.float32)
    win = scipy.signal.get_window("hann", WIN, fftbins=True)
    fb = filterbank()
    times = []
    for _ in range(30):
        t0 = time.perf_counter()
        m = logmel(x, win, fb)
        times.append(time.perf_counter() - t0)
    times.sort()
    print(f"numpy {np.__version__} scipy {scipy.__version__}: {m.shape[0]} frames x {m.shape[1]} bands, "
          f"median of 30: {times[15] * 1e3:.2f} ms, best: {times[0] * 1e3:.2f} ms")


if __name__ == "__main__":
    main()
