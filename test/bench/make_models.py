"""Bench models, written to a git-ignored cache folder (argument 1, e.g. .cache/bench):

- resnet18.onnx, resnet50.onnx: torchvision ResNet-18 and ResNet-50 (random weights from
  torch.manual_seed(0), 224x224, 1000 classes, eval mode, opset 17), with their state dicts for
  the peer (.pt). The residual stage outputs are named stage1..stage4 by exporting them as extra
  graph outputs and then removing them from graph.output with the onnx API, so the tensors keep
  their names inside the graph. ResNet-50 (about 100 MB) is made here at bench time, never committed.
- input.npy: the seeded input, float32 [1,3,224,224] (torch.manual_seed(1), standard normal).
- matmul.onnx: one dense float32 MatMul [N,N]x[N,N] with both operands as inputs, to measure the
  machine's dense-MatMul rate through onnxruntime.
- meta.json: multiply-accumulate counts per part of each network (from the ONNX shapes), used to
  turn sweep times into GFLOP/s.
"""
import json
import os
import sys

import numpy as np
import onnx
import torch
import torchvision
from onnx import helper, TensorProto

MATMUL_N = 2048


class WithStages(torch.nn.Module):
    def __init__(self, net):
        super().__init__()
        self.net = net

    def forward(self, x):
        n = self.net
        x = n.maxpool(n.relu(n.bn1(n.conv1(x))))
        s1 = n.layer1(x)
        s2 = n.layer2(s1)
        s3 = n.layer3(s2)
        s4 = n.layer4(s3)
        z = n.fc(torch.flatten(n.avgpool(s4), 1))
        return z, s1, s2, s3, s4


def make_resnet(out, arch="resnet18"):
    torch.manual_seed(0)
    net = getattr(torchvision.models, arch)(weights=None, num_classes=1000).eval()
    torch.manual_seed(1)
    x = torch.randn(1, 3, 224, 224)
    names = ["logits", "stage1", "stage2", "stage3", "stage4"]
    path = os.path.join(out, f"{arch}.onnx")
    with torch.no_grad():
        torch.onnx.export(WithStages(net), (x,), path, input_names=["input"], output_names=names,
                          opset_version=17, do_constant_folding=True)
    model = onnx.load(path)
    for o in [o for o in model.graph.output if o.name != "logits"]:
        model.graph.output.remove(o)
    onnx.checker.check_model(model)
    onnx.save(model, path)
    np.save(os.path.join(out, "input.npy"), x.numpy().astype(np.float32))
    torch.save(net.state_dict(), os.path.join(out, f"{arch}.pt"))
    return model


def conv_macs(model):
    """MACs of each Conv/Gemm node: output elements x (C_in/groups x kernel area) for Conv,
    M x N x K for Gemm (standard counting, one multiply-add per weight use)."""
    inferred = onnx.shape_inference.infer_shapes(model)
    shapes = {}
    for vi in list(inferred.graph.value_info) + list(inferred.graph.input) + list(inferred.graph.output):
        shapes[vi.name] = [d.dim_value for d in vi.type.tensor_type.shape.dim]
    inits = {t.name: list(t.dims) for t in model.graph.initializer}
    rows = []
    for n in model.graph.node:
        if n.op_type == "Conv":
            w = inits[n.input[1]]
            out = shapes[n.output[0]]
            macs = int(np.prod(out)) * int(np.prod(w[1:]))
        elif n.op_type == "Gemm":
            w = inits[n.input[1]]
            macs = int(np.prod(w))
        else:
            continue
        rows.append({"node": n.name, "input": n.input[0], "output": n.output[0], "macs": macs})
    return rows


def macs_above(model, rows, layer):
    """MACs of the Conv/Gemm nodes that lie downstream of `layer` (between it and the scores)."""
    down = {layer}
    for n in model.graph.node:  # ONNX nodes are topologically sorted
        if any(i in down for i in n.input):
            down.update(n.output)
    names = {n.name for n in model.graph.node if any(i in down for i in n.input)}
    return sum(r["macs"] for r in rows if r["node"] in names)


def make_matmul(out):
    a = helper.make_tensor_value_info("a", TensorProto.FLOAT, [MATMUL_N, MATMUL_N])
    b = helper.make_tensor_value_info("b", TensorProto.FLOAT, [MATMUL_N, MATMUL_N])
    c = helper.make_tensor_value_info("c", TensorProto.FLOAT, [MATMUL_N, MATMUL_N])
    g = helper.make_graph([helper.make_node("MatMul", ["a", "b"], ["c"])], "dense_matmul", [a, b], [c])
    m = helper.make_model(g, opset_imports=[helper.make_opsetid("", 17)])
    m.ir_version = 8
    onnx.checker.check_model(m)
    onnx.save(m, os.path.join(out, "matmul.onnx"))


def main():
    out = sys.argv[1]
    os.makedirs(out, exist_ok=True)
    model = make_resnet(out)
    model50 = make_resnet(out, "resnet50")
    make_matmul(out)
    rows, rows50 = conv_macs(model), conv_macs(model50)
    stages = ["stage1", "stage2", "stage3", "stage4"]
    meta = {
        "torch": torch.__version__, "torchvision": torchvision.__version__, "onnx": onnx.__version__,
        "forward_macs": sum(r["macs"] for r in rows),
        "macs_above": {s: macs_above(model, rows, s) for s in stages},
        "resnet50": {"forward_macs": sum(r["macs"] for r in rows50), "macs_above": {s: macs_above(model50, rows50, s) for s in stages}},
        "matmul_n": MATMUL_N,
    }
    with open(os.path.join(out, "meta.json"), "w") as f:
        json.dump(meta, f, indent=1)
    print(json.dumps(meta))


if __name__ == "__main__":
    main()
