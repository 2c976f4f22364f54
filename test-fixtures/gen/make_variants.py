"""Export-variant fixtures -> test-fixtures/variants/<variant>/.

One small seeded CNN (Conv, BatchNormalization, MaxPool, explicit Pad, nearest Upsample,
AveragePool, Slice, ReduceMean, Reshape, Gemm), exported the ways users' models arrive: several
opsets, initializers listed as graph inputs, dynamic batch/H/W, external data. Every variant
is the same function of the same weights, so one set of float64 PyTorch autograd reference
gradients (two layers, logit and cross-entropy seeds) checks them all.

    /usr/bin/python3 test-fixtures/gen/make_variants.py
"""
import copy
import os
import shutil
import sys

import numpy as np
import onnx
import onnx.numpy_helper
import onnx.version_converter
import torch
import torch.nn as nn
import torch.nn.functional as F

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from common import FIXTURES_ROOT, rel_l2, rng_for, save_json, save_npy, torch_seed_for  # noqa: E402
from make_arch import NUM_CLASSES, Capture, randomise  # noqa: E402
from make_variants_windowed import make_windowed  # noqa: E402

OUT = os.path.join(FIXTURES_ROOT, "variants")
S = 16


class VariantNet(nn.Module):
    """Ops whose ONNX interface changed across opsets 7-17 (ONNX Changelog.md): BatchNormalization
    (7, 9, 14, 15), Pad (pads attribute -> input at 11), Upsample -> Resize (10), Slice (starts/ends
    attributes -> inputs at 10), ReduceMean, Unsqueeze/Squeeze (axes -> input at 13)."""

    def __init__(self):
        super().__init__()
        self.conv1 = nn.Conv2d(3, 8, 3, padding=1, bias=False)
        self.bn1 = nn.BatchNorm2d(8)
        self.pool = nn.MaxPool2d(2)
        self.block1 = nn.Identity()
        self.conv2 = nn.Conv2d(8, 8, 3)
        self.bn2 = nn.BatchNorm2d(8)
        self.block2 = nn.Identity()
        self.fc = nn.Linear(8, NUM_CLASSES)

        # q(name, t): where a quantized export rounds a tensor to int8 (identity in the float net)
        self.q = lambda name, t: t

    def forward(self, x):
        q = self.q
        x = q("input", x)
        a = self.block1(q("pool", self.pool(F.relu(self.bn1(self.conv1(x))))))  # [1,8,8,8]
        h = q("relu2", F.relu(self.bn2(self.conv2(F.pad(a, (1, 1, 1, 1))))))     # [1,8,8,8]
        h = F.avg_pool2d(F.interpolate(h, scale_factor=2.0, mode="nearest"), 2)
        b = self.block2(q("slice", h[:, :, 1:, 1:]))                            # [1,8,7,7]
        f = b.mean(dim=(2, 3), keepdim=True)
        return self.fc(f.reshape(f.shape[0], -1))


def int8_scales(net, x):
    """Symmetric per-tensor int8 scales, max|t|/127 over this input (so nothing saturates)."""
    seen = {}
    net.q = lambda name, t: seen.setdefault(name, float(t.detach().abs().max()) / 127.0) and t
    with torch.no_grad():
        net(x)
    net.q = lambda name, t: t
    return seen


def export_fake_quant(scales):
    """The exported form: PyTorch writes fake_quantize as QuantizeLinear -> DequantizeLinear."""
    return lambda name, t: torch.fake_quantize_per_tensor_affine(t, scales[name], 0, -128, 127)


def ste_fake_quant(scales):
    """Reference form, any dtype: the forward rounds like ONNX QuantizeLinear (half to even,
    saturate to int8) and dequantizes; the backward is the straight-through estimator (Bengio,
    Leonard & Courville 2013, "Estimating or propagating gradients through stochastic neurons"),
    in its clipped form: gradient 1 where the value lies inside the int8 range, 0 outside."""
    def fq(name, t):
        u = t / scales[name]
        inside = ((u.detach() >= -128.5) & (u.detach() <= 127.5)).to(t.dtype)
        y = torch.clamp(torch.round(u.detach()), -128, 127) * scales[name]
        return y + (t - t.detach()) * inside
    return fq


TAPS = [("block1", "block1", "out"), ("block2", "block2", "out")]


class Tapped(nn.Module):
    """Exports the taps as extra outputs so they get our names; they are removed afterwards.
    head: None (logits out), 'softmax' (probabilities out, logits inside), 'nhwc' (an NHWC input
    transposed inside the graph), 'two_outputs' (an embedding output first, then the logits)."""

    def __init__(self, model, taps, head=None):
        super().__init__()
        self.model, self.names, self.head = model, [t[0] for t in taps], head
        self.capture = Capture(model, taps)

    def forward(self, x):
        self.capture.reset()
        if self.head == "nhwc":
            x = x.permute(0, 3, 1, 2)
        z = self.model(x)
        taps = [self.capture.values[n] for n in self.names]
        if self.head == "softmax":
            return (torch.softmax(z, dim=1), z, *taps)
        if self.head == "two_outputs":
            return (taps[-1].mean(dim=(2, 3)), z, *taps)
        return (z, *taps)


OUTPUTS = {None: ["logits"], "nhwc": ["logits"], "softmax": ["probs", "logits"], "two_outputs": ["embedding", "logits"]}
KEEP = {None: ["logits"], "nhwc": ["logits"], "softmax": ["probs"], "two_outputs": ["embedding", "logits"]}


def export(model, x, path, opset, keep_inputs=False, dynamic=False, head=None):
    w = Tapped(model, TAPS, head).eval()
    names = OUTPUTS[head] + [t[0] for t in TAPS]
    axes = {"input": {0: "batch", 2: "height", 3: "width"}, "logits": {0: "batch"}} if dynamic else None
    if head == "nhwc":
        x = x.permute(0, 2, 3, 1).contiguous()
    with torch.no_grad():
        torch.onnx.export(w, (x,), path, input_names=["input"], output_names=names, opset_version=opset,
                          do_constant_folding=True, keep_initializers_as_inputs=keep_inputs, dynamic_axes=axes)
    w.capture.remove()
    m = onnx.load(path)
    for o in [o for o in m.graph.output if o.name not in KEEP[head]]:
        m.graph.output.remove(o)
    onnx.checker.check_model(m)
    return m


def quantize_conv_weights(net):
    """Per-output-channel symmetric int8 weights, as QDQ exports store them: the nets' weights are
    rounded to the int8 grid in place; returns {param name: (int8 values, scales)}."""
    out = {}
    with torch.no_grad():
        for name in ("conv1", "conv2"):
            w = getattr(net, name).weight
            s = w.abs().amax(dim=(1, 2, 3)) / 127.0
            q = torch.clamp(torch.round(w / s[:, None, None, None]), -128, 127)
            w.copy_(q * s[:, None, None, None])
            out[name] = (q.numpy().astype(np.int8), s.numpy().astype(np.float32))
    return out


def weights_as_dequantize(m, qweights, net):
    """Replaces each Conv weight initializer that equals a quantized weight by an int8 initializer
    and a per-channel DequantizeLinear (axis 0), the layout of QDQ exports."""
    from onnx import helper, numpy_helper
    inits = {i.name: i for i in m.graph.initializer}
    nodes = []
    for n in m.graph.node:
        if n.op_type == "Conv" and n.input[1] in inits:
            w = numpy_helper.to_array(inits[n.input[1]])
            for name, (q, s) in qweights.items():
                if w.shape == q.shape and np.allclose(w, q * s[:, None, None, None], atol=1e-6):
                    base = n.input[1]
                    m.graph.initializer.remove(inits[base])
                    m.graph.initializer.extend([numpy_helper.from_array(q, base + "_int8"),
                                                numpy_helper.from_array(s, base + "_scale"),
                                                numpy_helper.from_array(np.zeros(len(s), np.int8), base + "_zero")])
                    nodes.append(helper.make_node("DequantizeLinear", [base + "_int8", base + "_scale", base + "_zero"], [base],
                                                  name=base + "_dequantize", axis=0))
        nodes.append(n)
    del m.graph.node[:]
    m.graph.node.extend(nodes)
    onnx.checker.check_model(m)
    return m


def make_int8_qdq(net, x32):
    """int8 QDQ export of the same net: int8 per-channel Conv weights behind DequantizeLinear, and
    QuantizeLinear -> DequantizeLinear on the input and three activations. The reference is the
    same quantized net in PyTorch float64 with straight-through gradients (ste_fake_quant)."""
    qnet = copy.deepcopy(net).eval()
    # BatchNormalization folded into the Conv first (as the export does), so the int8 weights are the folded ones
    from torch.nn.utils.fusion import fuse_conv_bn_eval
    qnet.conv1, qnet.bn1 = fuse_conv_bn_eval(qnet.conv1, qnet.bn1), nn.Identity()
    qnet.conv2, qnet.bn2 = fuse_conv_bn_eval(qnet.conv2, qnet.bn2), nn.Identity()
    qweights = quantize_conv_weights(qnet)
    scales = int8_scales(qnet, x32)
    d = os.path.join(OUT, "int8_qdq")
    os.makedirs(d)
    qnet.q = export_fake_quant(scales)
    m = export(qnet, x32, os.path.join(d, "model.onnx"), 13)
    m = weights_as_dequantize(m, qweights, qnet)
    onnx.save(m, os.path.join(d, "model.onnx"))
    dq = sum(n.op_type == "DequantizeLinear" for n in m.graph.node)
    assert dq >= 6, f"expected DequantizeLinear on weights and activations, found {dq}"

    def run(dtype):
        r = copy.deepcopy(qnet).to(dtype).eval()
        r.q = ste_fake_quant(scales)
        cap = Capture(r, TAPS)
        x = x32.to(dtype).requires_grad_(True)
        z = r(x)
        acts = dict(cap.values)
        cap.remove()
        return z, acts

    z64, acts64 = run(torch.float64)
    z32, acts32 = run(torch.float32)
    zs = z64.detach().numpy()[0]
    order = np.argsort(-zs)
    checks = []
    for layer in [t[0] for t in TAPS]:
        for loss, target in (("logit", int(order[0])), ("ce", int(order[1]))):
            grads = []
            for z, acts in ((z64, acts64), (z32, acts32)):
                s = z[0, target] if loss == "logit" else F.cross_entropy(z, torch.tensor([target]))
                (g,) = torch.autograd.grad(s, acts[layer], retain_graph=True)
                grads.append(g.detach().double().numpy()[0])
            fname = f"grad_{layer}_{loss}_{target}.npy"
            save_npy(os.path.join(d, fname), grads[0])
            checks.append({"layer": layer, "loss": loss, "target": target, "grad": f"int8_qdq/{fname}",
                           "torch_float32_rel_l2": rel_l2(grads[1], grads[0])})
    return m, {"logits": [float(v) for v in zs], "checks": checks, "scales": scales}


def to_float16(m):
    """The float16 form an fp16 export has: every float tensor (weights, Constants, Cast targets,
    input and output) in float16, except the inputs ONNX requires in float32 (Resize roi/scales)."""
    from onnx import TensorProto, numpy_helper
    keep32 = {n.input[i] for n in m.graph.node if n.op_type == "Resize" for i in (1, 2) if len(n.input) > i}
    for i, t in enumerate(m.graph.initializer):
        if t.data_type == TensorProto.FLOAT and t.name not in keep32:
            m.graph.initializer[i].CopyFrom(numpy_helper.from_array(numpy_helper.to_array(t).astype(np.float16), t.name))
    for n in m.graph.node:
        for a in n.attribute:
            if n.op_type == "Constant" and a.name == "value" and a.t.data_type == TensorProto.FLOAT and n.output[0] not in keep32:
                a.t.CopyFrom(numpy_helper.from_array(numpy_helper.to_array(a.t).astype(np.float16)))
            if n.op_type == "Cast" and a.name == "to" and a.i == TensorProto.FLOAT and n.output[0] not in keep32:
                a.i = TensorProto.FLOAT16
    for v in list(m.graph.input) + list(m.graph.output):
        if v.type.tensor_type.elem_type == TensorProto.FLOAT:
            v.type.tensor_type.elem_type = TensorProto.FLOAT16
    del m.graph.value_info[:]
    onnx.checker.check_model(m)
    return m


def make_float16(net, x32):
    """float16 export of the net (BatchNormalization folded into the Conv first, as the export does,
    so the float16 weights are the folded ones). Reference: the same float16-rounded weights in
    PyTorch float64 (widening float16 to float32 is exact), fed the float32 input."""
    from torch.nn.utils.fusion import fuse_conv_bn_eval
    hnet = copy.deepcopy(net).eval()
    hnet.conv1, hnet.bn1 = fuse_conv_bn_eval(hnet.conv1, hnet.bn1), nn.Identity()
    hnet.conv2, hnet.bn2 = fuse_conv_bn_eval(hnet.conv2, hnet.bn2), nn.Identity()
    with torch.no_grad():
        for p in hnet.parameters():
            p.copy_(p.half().float())
    d = os.path.join(OUT, "float16")
    os.makedirs(d)
    m = to_float16(export(hnet, x32, os.path.join(d, "model.onnx"), 13))
    onnx.save(m, os.path.join(d, "model.onnx"))
    r = copy.deepcopy(hnet).double().eval()
    cap = Capture(r, TAPS)
    x = x32.double().requires_grad_(True)
    z = r(x)
    acts = dict(cap.values)
    cap.remove()
    zs = z.detach().numpy()[0]
    order = np.argsort(-zs)
    checks = []
    for layer in [t[0] for t in TAPS]:
        for loss, target in (("logit", int(order[0])), ("ce", int(order[1]))):
            s = z[0, target] if loss == "logit" else F.cross_entropy(z, torch.tensor([target]))
            (g,) = torch.autograd.grad(s, acts[layer], retain_graph=True)
            fname = f"grad_{layer}_{loss}_{target}.npy"
            save_npy(os.path.join(d, fname), g.detach().numpy()[0])
            checks.append({"layer": layer, "loss": loss, "target": target, "grad": f"float16/{fname}"})
    return m, {"logits": [float(v) for v in zs], "checks": checks}


MEAN, STD = [0.485, 0.456, 0.406], [0.229, 0.224, 0.225]


class RawPixels(nn.Module):
    """The preprocessing inside the graph, as deployment exports have it: uint8 NHWC pixels in,
    Cast -> Div 255 -> Sub mean -> Div std -> Transpose to NCHW, then the net."""

    def __init__(self, net):
        super().__init__()
        self.net = net
        self.register_buffer("mean", torch.tensor(MEAN).reshape(1, 1, 1, 3))
        self.register_buffer("std", torch.tensor(STD).reshape(1, 1, 1, 3))

    def forward(self, u8):
        x = (u8.to(self.mean.dtype) / 255.0 - self.mean) / self.std
        return self.net(x.permute(0, 3, 1, 2))


def make_uint8_nhwc(net):
    """uint8 NHWC variant: fed raw 0-255 pixels. Reference: the same function in float64, with the
    gradients at the two layers and at the raw pixels (through the preprocessing)."""
    d = os.path.join(OUT, "uint8_nhwc")
    os.makedirs(d)
    u8 = torch.from_numpy(rng_for("variants/uint8_input").integers(0, 256, (1, S, S, 3)).astype(np.uint8))
    w = RawPixels(net).eval()
    t = Tapped(w, [("block1", "net.block1", "out"), ("block2", "net.block2", "out")])
    path = os.path.join(d, "model.onnx")
    with torch.no_grad():
        torch.onnx.export(t, (u8,), path, input_names=["input"], output_names=["logits", "block1", "block2"], opset_version=13,
                          do_constant_folding=True)
    t.capture.remove()
    m = onnx.load(path)
    for o in [o for o in m.graph.output if o.name != "logits"]:
        m.graph.output.remove(o)
    onnx.checker.check_model(m)
    assert m.graph.input[0].type.tensor_type.elem_type == onnx.TensorProto.UINT8
    assert m.graph.node[0].op_type == "Cast", [n.op_type for n in m.graph.node[:4]]
    onnx.save(m, path)
    save_npy(os.path.join(d, "input.npy"), u8.numpy())
    r = copy.deepcopy(w).double().eval()
    taps = [("block1", "net.block1", "out"), ("block2", "net.block2", "out")]
    cap = Capture(r, taps)
    raw = u8.double().requires_grad_(True)  # the raw pixel values as float64: what the engine differentiates
    z = r(raw)
    acts = dict(cap.values)
    cap.remove()
    acts["input"] = raw
    zs = z.detach().numpy()[0]
    order = np.argsort(-zs)
    checks = []
    for layer, loss, target in [("block1", "logit", int(order[0])), ("block1", "ce", int(order[1])), ("block2", "logit", int(order[0])),
                                ("block2", "ce", int(order[1])), ("input", "logit", int(order[0]))]:
        s = z[0, target] if loss == "logit" else F.cross_entropy(z, torch.tensor([target]))
        (g,) = torch.autograd.grad(s, acts[layer], retain_graph=True)
        fname = f"grad_{layer}_{loss}_{target}.npy"
        save_npy(os.path.join(d, fname), g.detach().numpy()[0])
        checks.append({"layer": layer, "loss": loss, "target": target, "grad": f"uint8_nhwc/{fname}"})
    return m, {"logits": [float(v) for v in zs], "checks": checks, "input": "uint8_nhwc/input.npy"}


def raise_opset(m, opset):
    """PyTorch 1.13 and onnx 1.12 stop at opset 17; later opsets are written by hand. Of this
    net's ops only ReduceMean changed (18: axes attribute -> input; ONNX Changelog.md); 19-21 changed
    none of them but type lists. Checked by running in onnxruntime (the test compares logits)."""
    for n in m.graph.node:
        if n.op_type == "ReduceMean":
            a = next(a for a in n.attribute if a.name == "axes")
            axes_name = n.name + "_axes"
            m.graph.initializer.append(onnx.numpy_helper.from_array(np.array(list(a.ints), dtype=np.int64), axes_name))
            n.input.append(axes_name)
            n.attribute.remove(a)
    m.opset_import[0].version = opset
    m.ir_version = 10 if opset >= 21 else 9
    return m


VARIANTS = {
    # name: (opset, export options, note)
    "opset7": (7, {"down_from": 9}, "opset 7 (PyTorch cannot export this Upsample at 7; the opset-9 export down-converted by onnx.version_converter): Upsample with scales attribute, Slice/Pad attributes"),
    "opset8": (8, {"down_from": 9}, "opset 8 (down-converted from the opset-9 export)"),
    "opset9": (9, {}, "opset 9: Upsample with scales input"),
    "opset10": (10, {}, "opset 10: Resize (scales only), Slice inputs, Pad attribute"),
    "opset11": (11, {}, "opset 11: Pad pads input, Resize with roi"),
    "opset13": (13, {}, "opset 13: Squeeze/Unsqueeze axes inputs"),
    "opset17": (17, {}, "opset 17"),
    "opset18": (18, {"up_from": 17}, "opset 18 (the opset-17 export with ReduceMean's axes moved to an input by hand)"),
    "opset21": (21, {"up_from": 17}, "opset 21, IR 10 (as opset 18; no op of this net changed in 19-21)"),
    "trailing_softmax": (13, {"head": "softmax"}, "ends in Softmax: the scores are its input"),
    "nhwc_input": (13, {"head": "nhwc"}, "NHWC float input, Transpose to NCHW inside the graph"),
    "two_outputs": (13, {"head": "two_outputs", "scores": "logits"}, "two outputs (an embedding first): the scores are chosen by name"),
    "initializers_as_inputs": (11, {"keep_inputs": True}, "every initializer also listed as a graph input (older exporters)"),
    "dynamic_axes": (13, {"dynamic": True}, "batch, height and width named dynamic axes"),
    "external_data": (13, {"external": True}, "weights in a separate file beside the model"),
}


def main():
    torch.manual_seed(torch_seed_for("variants"))
    net = VariantNet()
    randomise(net, "variants")
    net.eval()
    x32 = torch.from_numpy(rng_for("variants/input").standard_normal((1, 3, S, S)).astype(np.float32))
    if os.path.isdir(OUT):
        shutil.rmtree(OUT)
    os.makedirs(OUT)

    # float64 references, shared by every variant (same weights, same input)
    m64 = copy.deepcopy(net).double().eval()
    cap = Capture(m64, TAPS)
    x64 = x32.double().requires_grad_(True)
    z64 = m64(x64)
    acts = dict(cap.values)
    cap.remove()
    with torch.no_grad():
        z32 = net(x32)
    assert rel_l2(z32.numpy(), z64.detach().numpy()) < 1e-5
    zs = z64.detach().numpy()[0]
    order = np.argsort(-zs)
    checks = []
    for layer in [t[0] for t in TAPS]:
        for loss, target in (("logit", int(order[0])), ("ce", int(order[1]))):
            s = z64[0, target] if loss == "logit" else F.cross_entropy(z64, torch.tensor([target]))
            (g,) = torch.autograd.grad(s, acts[layer], retain_graph=True)
            fname = f"grad_{layer}_{loss}_{target}.npy"
            save_npy(os.path.join(OUT, fname), g.detach().numpy()[0])
            checks.append({"layer": layer, "loss": loss, "target": target, "grad": fname,
                           "shape": list(g.shape[1:])})
    save_npy(os.path.join(OUT, "input.npy"), x32.numpy())
    save_npy(os.path.join(OUT, "input_nhwc.npy"), x32.permute(0, 2, 3, 1).contiguous().numpy())

    variants = []
    for name, (opset, opts, note) in VARIANTS.items():
        d = os.path.join(OUT, name)
        os.makedirs(d)
        path = os.path.join(d, "model.onnx")
        m = export(net, x32, path, opts.get("down_from", opts.get("up_from", opset)), keep_inputs=opts.get("keep_inputs", False),
                   dynamic=opts.get("dynamic", False), head=opts.get("head"))
        if "up_from" in opts:
            m = raise_opset(m, opset)
        if "down_from" in opts:
            m = onnx.version_converter.convert_version(m, opset)
            onnx.checker.check_model(m)
        if opts.get("external"):
            onnx.save_model(m, path, save_as_external_data=True, all_tensors_to_one_file=True,
                            location="model.weights", size_threshold=0)
        else:
            onnx.save(m, path)
        ops = sorted({n.op_type for n in m.graph.node})
        row = {"name": name, "model": f"{name}/model.onnx", "opset": opset, "note": note, "op_types": ops}
        if opts.get("head") == "nhwc":
            row["input"] = "input_nhwc.npy"
        if "scores" in opts:
            row["scores_option"] = opts["scores"]
        variants.append(row)
        print(f"variants/{name}: opset {opset} ops {' '.join(ops)}")

    m, own = make_float16(net, x32)
    ops = sorted({n.op_type for n in m.graph.node})
    variants.append({"name": "float16", "model": "float16/model.onnx", "opset": 13, "op_types": ops,
                     "note": "float16 weights, input and output; run in float32 (widened exactly); reference: the "
                             "float16-rounded weights in PyTorch float64", **own})
    print(f"variants/float16: opset 13 ops {' '.join(ops)}")

    m, own = make_int8_qdq(net, x32)
    ops = sorted({n.op_type for n in m.graph.node})
    variants.append({"name": "int8_qdq", "model": "int8_qdq/model.onnx", "opset": 13, "op_types": ops,
                     "note": "int8 QDQ: per-channel int8 Conv weights and QuantizeLinear/DequantizeLinear on four activations; "
                             "reference: the same quantized net in PyTorch float64 with straight-through gradients", **own})
    print(f"variants/int8_qdq: opset 13 ops {' '.join(ops)}")

    m, own = make_uint8_nhwc(net)
    ops = sorted({n.op_type for n in m.graph.node})
    variants.append({"name": "uint8_nhwc", "model": "uint8_nhwc/model.onnx", "opset": 13, "op_types": ops,
                     "note": "uint8 NHWC raw pixels in, Cast/Div/Sub/Div/Transpose inside the graph; fed the 0-255 values as "
                             "float32 (exact); reference: the same function in PyTorch float64, gradients also at the raw pixels", **own})
    print(f"variants/uint8_nhwc: opset 13 ops {' '.join(ops)}")

    variants += make_windowed(OUT)

    save_json(os.path.join(OUT, "refs.json"), {
        "input": "input.npy", "input_shape": [1, 3, S, S], "scores": "logits", "num_classes": NUM_CLASSES,
        "logits": [float(v) for v in zs], "checks": checks, "variants": variants,
        "torch_version": torch.__version__, "onnx_version": onnx.__version__,
    })


if __name__ == "__main__":
    main()
