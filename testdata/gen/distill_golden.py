#!/usr/bin/python3
"""Reference loss and logit gradients for nn/recipe_test.go, computed with
PyTorch (Debian python3-torch, CPU) autograd in float64:

  soft:    F.cross_entropy(z, q, label_smoothing=eps) with soft targets q
           (mixup-style rows summing to 1), mean over the batch;
  distill: (1-a)*F.cross_entropy(z, q) + a*T*T*F.kl_div(
               F.log_softmax(z/T), F.softmax(v/T), reduction="batchmean")
           (Hinton, Vinyals & Dean 2015, arXiv:1503.02531, the soft-target
           term scaled by T^2).

Writes nn/testdata/distill_golden.json. Run from the repository root.
"""
import json
import torch
import torch.nn.functional as F

g = torch.Generator().manual_seed(16)
N, L = 6, 5
z = (torch.randn(N, L, generator=g, dtype=torch.float64) * 2).float().double()
v = (torch.randn(N, L, generator=g, dtype=torch.float64) * 3).float().double()
lab = torch.randint(0, L, (N,), generator=g)
perm = torch.randperm(N, generator=g)
lam = 0.3
q = lam * F.one_hot(lab, L).double() + (1 - lam) * F.one_hot(lab[perm], L).double()
q = q.float().double()
eps, T, a = 0.1, 3.0, 0.7

zs = z.clone().requires_grad_(True)
soft = F.cross_entropy(zs, q, label_smoothing=eps)
soft.backward()

zd = z.clone().requires_grad_(True)
dist = (1 - a) * F.cross_entropy(zd, q) + a * T * T * F.kl_div(
    F.log_softmax(zd / T, dim=1), F.softmax(v / T, dim=1), reduction="batchmean")
dist.backward()

doc = {
    "torch": torch.__version__, "classes": L, "smoothing": eps, "temperature": T, "weight": a,
    "logits": z.flatten().tolist(), "teacher": v.flatten().tolist(), "targets": q.flatten().tolist(),
    "soft_loss": soft.item(), "soft_grad": zs.grad.flatten().tolist(),
    "distill_loss": dist.item(), "distill_grad": zd.grad.flatten().tolist(),
}
with open("nn/testdata/distill_golden.json", "w") as f:
    json.dump(doc, f, indent=1)
print("soft", doc["soft_loss"], "distill", doc["distill_loss"])
