#!/usr/bin/python3
"""PyTorch reference outputs of a quantised convolution and linear layer,
for quant/torch_test.go. Run from the repository root:
    /usr/bin/python3 testdata/gen/quant_ops.py
Needs Debian's python3-torch (torch 1.13, CPU, quantized engine printed).
Writes quant/testdata/qops.json: int8 inputs, int8 per-channel symmetric
weights, float biases, scales and zero points given to both sides, and
PyTorch's int8 outputs. PyTorch's activations are quint8, so inputs and
outputs are shifted by 128 (q_uint8 = q_int8 + 128, zero points likewise);
this is exact.
"""
import json
import torch
import torch.nn.quantized.functional as qF

torch.manual_seed(5)
engine = torch.backends.quantized.engine


def conv_case():
    n, cin, h, w, cout, k = 2, 3, 9, 11, 5, 3
    in_s, in_zp = 0.05, -10  # int8 zero point
    x_i8 = torch.randint(-128, 128, (n, cin, h, w), dtype=torch.int32)
    xq = torch._make_per_tensor_quantized_tensor((x_i8 + 128).to(torch.uint8), in_s, in_zp + 128)
    wf = torch.randn(cout, cin, k, k) * 0.3
    w_s = wf.abs().amax(dim=(1, 2, 3)) / 127
    wq = torch.quantize_per_channel(wf, w_s.double(), torch.zeros(cout, dtype=torch.long), 0, torch.qint8)
    bias = torch.randn(cout) * 0.5
    out_s, out_zp = 0.08, 3
    y = qF.conv2d(xq, wq, bias, stride=(2, 1), padding=(1, 1), scale=out_s, zero_point=out_zp + 128)
    return {
        "n": n, "in_c": cin, "h": h, "width": w, "out_c": cout, "k": k, "stride": [2, 1], "pad": [1, 1],
        "in_scale": in_s, "in_zp": in_zp, "out_scale": out_s, "out_zp": out_zp,
        "x": x_i8.permute(0, 2, 3, 1).reshape(-1).tolist(),  # NHWC
        "weights": wq.int_repr().permute(0, 2, 3, 1).reshape(-1).tolist(),  # (OutC, KH, KW, InC)
        "w_scale": wq.q_per_channel_scales().tolist(), "bias": bias.tolist(),
        "y": (y.int_repr().to(torch.int32) - 128).permute(0, 2, 3, 1).reshape(-1).tolist(),
        "oh": y.shape[2], "ow": y.shape[3],
    }


def linear_case():
    n, fin, fout = 16, 40, 7
    in_s, in_zp = 0.03, 20
    x_i8 = torch.randint(-128, 128, (n, fin), dtype=torch.int32)
    xq = torch._make_per_tensor_quantized_tensor((x_i8 + 128).to(torch.uint8), in_s, in_zp + 128)
    wf = torch.randn(fout, fin) * 0.2
    w_s = wf.abs().amax(dim=1) / 127
    wq = torch.quantize_per_channel(wf, w_s.double(), torch.zeros(fout, dtype=torch.long), 0, torch.qint8)
    bias = torch.randn(fout)
    out_s, out_zp = 0.05, -7
    y = qF.linear(xq, wq, bias, scale=out_s, zero_point=out_zp + 128)
    return {
        "n": n, "in": fin, "out": fout, "in_scale": in_s, "in_zp": in_zp, "out_scale": out_s, "out_zp": out_zp,
        "x": x_i8.reshape(-1).tolist(), "weights": wq.int_repr().reshape(-1).tolist(),
        "w_scale": wq.q_per_channel_scales().tolist(), "bias": bias.tolist(),
        "y": (y.int_repr().to(torch.int32) - 128).reshape(-1).tolist(),
    }


doc = {"torch": torch.__version__, "engine": engine, "conv": conv_case(), "linear": linear_case()}
with open("quant/testdata/qops.json", "w") as f:
    json.dump(doc, f)
print("torch", torch.__version__, "engine", engine)
