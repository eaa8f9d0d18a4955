#!/usr/bin/python3
"""PyTorch side of the BenchmarkTrainStep comparison (scripts/bench_train.sh).

Times one training step (forward, cross-entropy, backward, Adam) of the three
reference architectures at batch 32 on 40x61x1 inputs, 8 classes, with the
models of testdata/gen/arch_forward.py. Thread count from argv[1].
Prints ms per step (median of 20 after 3 warm-up steps) and samples/s.
"""
import os
import sys
import time
import torch
import torch.nn.functional as F

sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", "testdata", "gen"))
import arch_forward  # noqa: E402

threads = int(sys.argv[1]) if len(sys.argv) > 1 else 1
torch.set_num_threads(threads)
for name in ["pooled", "separable", "strided"]:
    torch.manual_seed(0)
    model = arch_forward.build(name)
    model.train()
    opt = torch.optim.Adam(model.parameters(), lr=1e-3)
    x = torch.randn(32, 1, 40, 61)
    y = torch.arange(32) % 8
    times = []
    for i in range(23):
        t0 = time.perf_counter()
        opt.zero_grad()
        loss = F.cross_entropy(model(x), y)
        loss.backward()
        opt.step()
        if i >= 3:
            times.append(time.perf_counter() - t0)
    times.sort()
    med = times[len(times) // 2]
    print(f"torch {torch.__version__} threads={threads} {name}: {med * 1e3:.1f} ms/step, {32 / med:.0f} samples/s")
