#!/usr/bin/python3
"""PyTorch reference outputs of pipit's three reference architectures.

Run from the repository root:  /usr/bin/python3 testdata/gen/arch_forward.py
Needs Debian's python3-torch (written against torch 1.13, CPU). Writes
nn/testdata/arch_<name>.json with, for 8 classes:
  params  - every trainable parameter in pipit's table order and layout
            (conv weight (OutC, KH, KW, InC), depthwise (KH, KW, C), dense (Out, In)),
  state   - batch-norm running mean and variance, in table order,
  input   - 3 samples, NHWC (3, 40, 61, 1),
  eval    - logits in inference mode (running statistics),
  train   - logits in training mode (batch statistics),
  loss, grad - cross-entropy of the training-mode logits with labels
            [0, 3, 7] and its gradient for every parameter (pipit order).
The models are written here in PyTorch's own layers (NCHW); "same" padding
is TensorFlow's rule (out = ceil(in/stride), odd pixel at the end), applied
with F.pad before an unpadded convolution. Shares no code with pipit.
"""
import json
import numpy as np
import torch
import torch.nn as tnn
import torch.nn.functional as F

torch.set_num_threads(1)
CLASSES, N, H, W = 8, 3, 40, 61


def same_pad(size, k, s):
    out = -(-size // s)
    total = max((out - 1) * s + k - size, 0)
    return total // 2, total - total // 2


class SameConv(tnn.Module):
    def __init__(self, cin, cout, k, s, groups=1):
        super().__init__()
        self.k, self.s = k, s
        self.conv = tnn.Conv2d(cin, cout, k, s, padding=0, groups=groups, bias=False)

    def forward(self, x):
        t, b = same_pad(x.shape[2], self.k, self.s)
        l, r = same_pad(x.shape[3], self.k, self.s)
        return self.conv(F.pad(x, (l, r, t, b)))


def block(cin, cout, k, s, groups=1):
    return [SameConv(cin, cout, k, s, groups), tnn.BatchNorm2d(cout), tnn.ReLU()]


class GAP(tnn.Module):
    def forward(self, x):
        return x.mean(dim=(2, 3))


def build(name):
    if name == "pooled":
        layers = block(1, 16, 3, 1) + [tnn.MaxPool2d(2)] + block(16, 32, 3, 1) + [tnn.MaxPool2d(2)] + block(32, 32, 3, 1)
        layers += [GAP(), tnn.Linear(32, 32), tnn.ReLU(), tnn.Linear(32, CLASSES)]
    elif name == "strided":
        layers = block(1, 16, 3, 2) + block(16, 32, 3, 2) + block(32, 32, 3, 1)
        layers += [GAP(), tnn.Linear(32, 32), tnn.ReLU(), tnn.Linear(32, CLASSES)]
    else:
        layers = block(1, 16, 3, 2)
        for cin, cout, s in [(16, 32, 2), (32, 64, 2), (64, 64, 1)]:
            layers += block(cin, cin, 3, s, groups=cin) + block(cin, cout, 1, 1)
        layers += [GAP(), tnn.Linear(64, CLASSES)]
    return tnn.Sequential(*layers)


def pipit_order(model, grad=False):
    """Parameters (or their gradients) and state flattened in pipit's table
    order and layout."""
    params, state = [], []
    val = (lambda p: p.grad.detach()) if grad else (lambda p: p.detach())
    for m in model:
        if isinstance(m, SameConv):
            w = val(m.conv.weight)
            if m.conv.groups > 1:  # depthwise (C, 1, KH, KW) -> (KH, KW, C)
                w = w[:, 0].permute(1, 2, 0)
            else:  # (OutC, InC, KH, KW) -> (OutC, KH, KW, InC)
                w = w.permute(0, 2, 3, 1)
            params.append(w.reshape(-1))
        elif isinstance(m, tnn.BatchNorm2d):
            params += [val(m.weight), val(m.bias)]
            state += [m.running_mean.detach(), m.running_var.detach()]
        elif isinstance(m, tnn.Linear):
            params += [val(m.weight).reshape(-1), val(m.bias)]
    return torch.cat(params), torch.cat(state)


def min_relu_input(model, x):
    """Smallest |input| of any ReLU in training mode, for input x."""
    smallest = [float("inf")]
    hooks = [m.register_forward_hook(lambda m, i, o: smallest.__setitem__(0, min(smallest[0], i[0].abs().min().item())))
             for m in model if isinstance(m, tnn.ReLU)]
    state = {k: v.clone() for k, v in model.state_dict().items()}
    model.train()
    with torch.no_grad():
        model(x)
    model.load_state_dict(state)  # undo the running-statistics update
    for h in hooks:
        h.remove()
    return smallest[0]


def main():
    for seed, name in enumerate(["pooled", "strided", "separable"]):
        torch.manual_seed(100 + seed)
        model = build(name)
        gen = np.random.default_rng(200 + seed)
        with torch.no_grad():
            for m in model:  # non-trivial batch-norm parameters and statistics
                if isinstance(m, tnn.BatchNorm2d):
                    c = m.num_features
                    m.weight.copy_(torch.tensor(gen.uniform(0.5, 1.5, c), dtype=torch.float32))
                    m.bias.copy_(torch.tensor(gen.uniform(-0.2, 0.2, c), dtype=torch.float32))
                    m.running_mean.copy_(torch.tensor(gen.uniform(-0.3, 0.3, c), dtype=torch.float32))
                    m.running_var.copy_(torch.tensor(gen.uniform(0.5, 2.0, c), dtype=torch.float32))
        # Draw inputs until no ReLU input lies within 1e-5 of the kink, so
        # float32 rounding cannot flip a gradient mask between frameworks.
        while True:
            x_nhwc = torch.tensor(gen.standard_normal((N, H, W, 1)), dtype=torch.float32)
            x = x_nhwc.permute(0, 3, 1, 2).contiguous()
            if min_relu_input(model, x) > 1e-5:
                break
        params, state = pipit_order(model)
        model.eval()
        with torch.no_grad():
            out_eval = model(x)
        model.train()
        out_train = model(x)
        labels = torch.tensor([0, 3, 7])
        loss = F.cross_entropy(out_train, labels)
        loss.backward()
        grads, _ = pipit_order(model, grad=True)
        doc = {
            "arch": name, "classes": CLASSES, "torch": torch.__version__,
            "params": params.tolist(), "state": state.tolist(),
            "input": x_nhwc.reshape(-1).tolist(),
            "eval": out_eval.reshape(-1).tolist(), "train": out_train.detach().reshape(-1).tolist(),
            "labels": labels.tolist(), "loss": loss.item(), "grad": grads.tolist(),
        }
        with open(f"nn/testdata/arch_{name}.json", "w") as f:
            json.dump(doc, f)
        print(name, params.numel(), "params", state.numel(), "state")


if __name__ == "__main__":
    main()
