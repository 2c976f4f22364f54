"""Windowed-attention export variants -> test-fixtures/variants/shifted_window_opset*/ (called by
make_variants.py; own weights, input and references, so each row in refs.json carries them).

The net is torchvision's SwinTransformer (its blocks: window partition and reverse, torch.roll
cyclic shift, relative position bias gathered from a table by an index buffer, the shifted-window
attention mask, LayerNorm, GELU, patch merging), shrunk: 32x32 input, patch 2 (16x16 tokens),
window 4 (16 windows, then 4 after merging), shift 2, embed 12, depths [2, 2], 3 heads. Its
token tensors are [1, H, W, C] (channels last) between blocks; the two references are taken at
the two stage outputs, [1,16,16,12] and [1,8,8,24].

    /usr/bin/python3 test-fixtures/gen/make_variants.py     (writes these too)
"""
import copy
import os

import numpy as np
import onnx
import torch
import torch.nn as nn
import torch.nn.functional as F
from torchvision.models.swin_transformer import SwinTransformer

from common import rel_l2, rng_for, save_npy, torch_seed_for
from make_arch import NUM_CLASSES, Capture, randomise

S = 32
TAPS = [("stage1", "features.1", "out"), ("stage2", "features.3", "out")]
# opset 17 writes LayerNormalization; 12 writes it as ReduceMean/Sub/Pow/Sqrt/Div and its Softmax
# is the old (coerced to 2-D) form, both upgraded at load.
OPSETS = [(17, "opset 17 (LayerNormalization)"), (12, "opset 12 (LayerNorm as ReduceMean/Pow/Sqrt/Div, Softmax-1)")]


def build():
    torch.manual_seed(torch_seed_for("variants/shifted_window"))
    m = SwinTransformer(patch_size=[2, 2], embed_dim=12, depths=[2, 2], num_heads=[3, 3], window_size=[4, 4],
                        stochastic_depth_prob=0.0, num_classes=NUM_CLASSES)
    randomise(m, "variants/shifted_window")
    g = torch.Generator().manual_seed(torch_seed_for("variants/shifted_window/bias"))
    with torch.no_grad():  # the table starts at std 0.02, too small to matter; a bias of order 1 does
        for mod in m.modules():
            if hasattr(mod, "relative_position_bias_table"):
                mod.relative_position_bias_table.copy_(torch.randn(mod.relative_position_bias_table.shape, generator=g) * 0.7)
    return m.eval()


class Tapped(nn.Module):
    def __init__(self, model):
        super().__init__()
        self.model = model
        self.capture = Capture(model, TAPS)

    def forward(self, x):
        self.capture.reset()
        z = self.model(x)
        return (z, *[self.capture.values[t[0]] for t in TAPS])


def references(net, x32, d, name):
    """float64 autograd gradients at the two stage outputs (logit seed at the top class,
    cross-entropy seed at the second), and PyTorch float32's own error against them."""
    rows = []
    runs = {}
    for dtype in (torch.float64, torch.float32):
        r = copy.deepcopy(net).to(dtype).eval()
        cap = Capture(r, TAPS)
        x = x32.to(dtype).requires_grad_(True)
        z = r(x)
        runs[dtype] = (z, dict(cap.values))
        cap.remove()
    z64 = runs[torch.float64][0]
    zs = z64.detach().numpy()[0]
    order = np.argsort(-zs)
    for layer in [t[0] for t in TAPS]:
        for loss, target in (("logit", int(order[0])), ("ce", int(order[1]))):
            grads = []
            for dtype in (torch.float64, torch.float32):
                z, acts = runs[dtype]
                s = z[0, target] if loss == "logit" else F.cross_entropy(z, torch.tensor([target]))
                (g,) = torch.autograd.grad(s, acts[layer], retain_graph=True)
                grads.append(g.detach().double().numpy()[0])
            assert np.linalg.norm(grads[0]) > 0
            fname = f"grad_{layer}_{loss}_{target}.npy"
            save_npy(os.path.join(d, fname), grads[0])
            rows.append({"layer": layer, "loss": loss, "target": target, "grad": f"{name}/{fname}",
                         "shape": list(grads[0].shape), "torch_float32_rel_l2": rel_l2(grads[1], grads[0])})
    return [float(v) for v in zs], rows


def shorten_names(m, keep):
    """Renames every tensor and node but the graph's input, output and `keep` to t<i>/n<i>: the
    export's path-like names are 80% of the file (same graph, smaller fixture)."""
    keep = set(keep) | {v.name for v in m.graph.input} | {v.name for v in m.graph.output}
    names = {}
    def short(t):
        if not t or t in keep:
            return t
        return names.setdefault(t, f"t{len(names)}")
    for t in m.graph.initializer:
        t.name = short(t.name)
    for i, n in enumerate(m.graph.node):
        n.name = f"n{i}_{n.op_type}"
        for k, t in enumerate(n.input):
            n.input[k] = short(t)
        for k, t in enumerate(n.output):
            n.output[k] = short(t)
    return m


def make_windowed(out_dir):
    net = build()
    x32 = torch.from_numpy(rng_for("variants/shifted_window/input").standard_normal((1, 3, S, S)).astype(np.float32))
    rows = []
    for opset, note in OPSETS:
        name = f"shifted_window_opset{opset}"
        d = os.path.join(out_dir, name)
        os.makedirs(d)
        path = os.path.join(d, "model.onnx")
        w = Tapped(net).eval()
        with torch.no_grad():
            torch.onnx.export(w, (x32,), path, input_names=["input"], output_names=["logits"] + [t[0] for t in TAPS],
                              opset_version=opset, do_constant_folding=True)
        w.capture.remove()
        m = onnx.load(path)
        for o in [o for o in m.graph.output if o.name != "logits"]:
            m.graph.output.remove(o)
        m = shorten_names(m, [t[0] for t in TAPS])
        onnx.checker.check_model(m)
        onnx.save(m, path)
        save_npy(os.path.join(d, "input.npy"), x32.detach().numpy())
        logits, checks = references(net, x32, d, name)
        ops = sorted({n.op_type for n in m.graph.node})
        rows.append({"name": name, "model": f"{name}/model.onnx", "opset": opset, "input": f"{name}/input.npy",
                     "note": "shifted-window transformer (torchvision SwinTransformer, shrunk), " + note,
                     "op_types": ops, "logits": logits, "checks": checks,
                     "token_grids": {"stage1": [16, 16], "stage2": [8, 8]}})
        print(f"variants/{name}: opset {opset} ops {' '.join(ops)}")
    return rows
