#!/usr/bin/python3
"""PyTorch + numpy side of the whole-epoch comparison (scripts/bench_epoch.sh).

Trains the same network on the same corpus with the same recipe as
`pipit train`: for every training window each epoch a random shift (up to
±0.1 s, zero-filled), a gain of ±6 dB, pink noise at 5-30 dB SNR with
probability 0.5 (a random stretch of a 2^18-sample pink-noise bank made
once, as pipit does), the log-mel front end (periodic Hann 512, hop 256,
40 HTK bands, power, 10·log10 with floor 1e-10, each frame clipped 80 dB
below its peak), per-band normalisation from the training windows, one time
mask of up to 6 frames and one frequency mask of up to 4 bands; then a
training step (AdamW, weight decay 1e-4, gradient clipping at norm 5,
lr 0.005 with warm-up and cosine decay) and a validation pass over the
validation fold. The front end runs batched on torch.stft (the fastest
Python form of scripts/bench_logmel.py); augmentation is numpy over the
whole batch at once (gathers and broadcasts, no per-window loop). The data path and the step alternate in one process (a
DataLoader with worker processes would add a third busy thread on a
two-core machine).

Usage: bench_epoch.py MANIFEST THREADS ARCH EPOCHS
Prints, per epoch, training seconds, windows/s and validation seconds.
"""
import csv
import math
import os
import sys
import time
import wave

import numpy as np
import torch
import torch.nn.functional as F

sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", "testdata", "gen"))
import arch_forward  # noqa: E402

manifest, threads, arch, epochs = sys.argv[1], int(sys.argv[2]), sys.argv[3], int(sys.argv[4])
torch.set_num_threads(threads)
RATE, N_FFT, HOP, BANDS, FRAMES = 16000, 512, 256, 40, 61
WIN = (FRAMES - 1) * HOP + N_FFT  # 15872 samples: 61 frames
BATCH = 32


def read_wav(path):
    with wave.open(path, "rb") as w:
        assert w.getsampwidth() == 2 and w.getnchannels() == 1 and w.getframerate() == RATE, path
        return np.frombuffer(w.readframes(w.getnframes()), dtype="<i2").astype(np.float32) / 32768


def htk_mel_matrix():
    mel = lambda f: 2595 * np.log10(1 + f / 700)
    imel = lambda m: 700 * (10 ** (m / 2595) - 1)
    edges = imel(np.linspace(mel(0), mel(RATE / 2), BANDS + 2))
    freqs = np.arange(N_FFT // 2 + 1) * RATE / N_FFT
    m = np.zeros((BANDS, len(freqs)), dtype=np.float32)
    for b in range(BANDS):
        lo, c, hi = edges[b], edges[b + 1], edges[b + 2]
        m[b] = np.maximum(0, np.minimum((freqs - lo) / (c - lo), (hi - freqs) / (hi - c)))
    return torch.from_numpy(m)


MEL = htk_mel_matrix()
HANN = torch.hann_window(N_FFT, periodic=True)


def logmel(batch):  # (B, WIN) float32 -> (B, BANDS, FRAMES)
    spec = torch.stft(torch.from_numpy(batch), N_FFT, HOP, window=HANN, center=False, return_complex=True)
    p = spec.real ** 2 + spec.imag ** 2
    db = 10 * torch.log10(torch.clamp(MEL @ p, min=1e-10))
    return torch.maximum(db, db.amax(dim=1, keepdim=True) - 80)


def pink(n, rng):  # Voss-McCartney, 16 rows, as pipit's synthesiser
    rows = rng.standard_normal(16)
    out = np.empty(n)
    total = rows.sum()
    for i in range(n):
        if i > 0:
            k = min((i & -i).bit_length() - 1, 15)
            total += -rows[k] + (r := rng.standard_normal())
            rows[k] = r
        out[i] = total + rng.standard_normal()
    return out


rows = list(csv.DictReader(open(manifest)))
base = os.path.dirname(manifest)
classes = sorted({r["label"] for r in rows})
train = [r for r in rows if r["fold"] not in ("0", "1")]
val = [r for r in rows if r["fold"] == "1"]
t0 = time.perf_counter()
M = int(0.1 * RATE)  # the largest shift


def pad(x, margin):  # the first WIN samples, zero-padded, with margin zeros either side
    x = np.pad(x, (0, max(0, WIN + margin - len(x))))[:WIN + margin]
    return np.pad(x, (margin, 0))


train_audio = np.stack([pad(read_wav(os.path.join(base, r["path"])), M) for r in train])
val_audio = np.stack([pad(read_wav(os.path.join(base, r["path"])), 0)[:WIN] for r in val])
train_y = torch.tensor([classes.index(r["label"]) for r in train])
val_y = torch.tensor([classes.index(r["label"]) for r in val])
print(f"loaded {len(train)} + {len(val)} clips in {time.perf_counter() - t0:.1f} s", flush=True)

rng = np.random.default_rng(1)
bank = pink(1 << 18, rng)
cum = np.concatenate([[0], np.cumsum(bank * bank)])
with torch.no_grad():
    feats = torch.cat([logmel(np.ascontiguousarray(train_audio[i:i + 256, M:M + WIN])) for i in range(0, len(train_audio), 256)])
    mean, std = feats.mean(dim=(0, 2), keepdim=True)[0], feats.std(dim=(0, 2), keepdim=True)[0] + 1e-5
    val_x = ((torch.cat([logmel(val_audio[i:i + 256]) for i in range(0, len(val_audio), 256)]) - mean) / std).unsqueeze(1)

model = arch_forward.build(arch)
steps = epochs * math.ceil(len(train) / BATCH)
opt = torch.optim.AdamW(model.parameters(), lr=0.005, weight_decay=1e-4)
warm = min(steps // 10, 100)
sched = torch.optim.lr_scheduler.LambdaLR(opt, lambda s: (s + 1) / warm if s < warm else
                                          0.02 + 0.98 * 0.5 * (1 + math.cos(math.pi * (s - warm) / max(1, steps - warm))))


BANK32 = bank.astype(np.float32)
SPAN = np.arange(WIN)
FR, BD = np.arange(FRAMES), np.arange(BANDS)


def augment(idx):  # the whole batch at once: gathers, broadcasts, no per-window loop
    b = len(idx)
    shift = rng.integers(-M, M + 1, size=b)  # zeros beyond the clip, as pipit
    x = train_audio[idx[:, None], (M + shift)[:, None] + SPAN]
    x *= (10 ** (rng.uniform(-1, 1, b) * 6 / 20)).astype(np.float32)[:, None]
    p = np.einsum("ij,ij->i", x, x, dtype=np.float64)
    o = rng.integers(0, len(bank) - WIN + 1, size=b)
    pn = (cum[o + WIN] - cum[o]) / WIN
    snr = rng.uniform(5, 30, b)
    use = (rng.random(b) < 0.5) & (p > 0)
    k = np.where(use, np.sqrt(np.maximum(p, 1e-30) / WIN / pn / 10 ** (snr / 10)), 0).astype(np.float32)
    x += k[:, None] * BANK32[o[:, None] + SPAN]
    return x


def masks(b):  # one time mask of up to 6 frames, one frequency mask of up to 4 bands per window
    w = rng.integers(0, 7, b)
    t = rng.integers(0, FRAMES - w + 1)
    tm = (FR >= t[:, None]) & (FR < (t + w)[:, None])
    w = rng.integers(0, 5, b)
    f = rng.integers(0, BANDS - w + 1)
    fm = (BD >= f[:, None]) & (BD < (f + w)[:, None])
    return torch.from_numpy(tm[:, None, :] | fm[:, :, None])


for ep in range(1, epochs + 1):
    model.train()
    order = rng.permutation(len(train))
    t0 = time.perf_counter()
    for s in range(0, len(order), BATCH):
        idx = order[s:s + BATCH]
        with torch.no_grad():
            x = ((logmel(augment(idx)) - mean) / std).masked_fill_(masks(len(idx)), 0)
        opt.zero_grad()
        loss = F.cross_entropy(model(x.unsqueeze(1)), train_y[idx])
        loss.backward()
        torch.nn.utils.clip_grad_norm_(model.parameters(), 5)
        opt.step()
        sched.step()
    train_s = time.perf_counter() - t0
    model.eval()
    t1 = time.perf_counter()
    with torch.no_grad():
        acc = sum((model(val_x[i:i + 256]).argmax(1) == val_y[i:i + 256]).sum().item() for i in range(0, len(val_x), 256)) / len(val_x)
    val_s = time.perf_counter() - t1
    print(f"torch {torch.__version__} threads={threads} {arch} epoch {ep}: train {train_s:.2f} s "
          f"({len(train) / train_s:.0f} windows/s), validation {val_s:.2f} s, val accuracy {acc:.3f}", flush=True)
