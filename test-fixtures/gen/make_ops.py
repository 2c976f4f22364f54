"""Per-op finite-difference fixtures -> test-fixtures/ops/<case>/.

Each case is a tiny ONNX graph (opset 17, IR 8, float32) with input `x` and
output `y`, plus an independent float64 implementation of the same graph in
torch, written from the ONNX operator specification
(https://github.com/onnx/onnx/blob/main/docs/Operators.md, opset 17 versions).
For s = sum(seed * y) we write:
  grad_fd.npy    central finite differences of the float64 implementation
  grad_torch.npy torch float64 autograd of the same implementation
and assert they agree (rel L2 < 1e-6). y.npy is the float64 forward, so
check_with_ort.mjs can compare onnxruntime's float32 run of model.onnx
against it (that is the check that our implementation follows the spec).
"""
import os
import shutil
import sys

import numpy as np
import onnx
import torch
import torch.nn.functional as F
from onnx import TensorProto, helper, numpy_helper

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from common import FIXTURES_ROOT, central_fd, rel_l2, rng_for, save_json, save_npy  # noqa: E402

OPS_DIR = os.path.join(FIXTURES_ROOT, "ops")
FD_EPS = 1e-6
INT64_MAX = 9223372036854775807

CASES = []


def case(name, op, notes, spec, x, nodes, inits, fwd, fd_eps=FD_EPS):
    CASES.append(dict(name=name, op=op, notes=notes, spec=spec, x=x, nodes=nodes,
                      inits=inits, fwd=fwd, fd_eps=fd_eps))


# ---------------------------------------------------------------- input makers
def normal(name, shape, scale=1.0):
    return (rng_for(name).standard_normal(shape) * scale).astype(np.float32)


def away_from(x, kinks, margin=0.02):
    """Move every value at least `margin` away from each kink (so central FD with
    eps=1e-6 never straddles a kink)."""
    x = np.array(x, dtype=np.float64)
    for k in kinks:
        d = x - k
        close = np.abs(d) < margin
        x[close] = k + np.where(d[close] >= 0, margin, -margin)
    for k in kinks:  # kinks are far apart in every case, one pass suffices; check it
        assert np.all(np.abs(x - k) >= margin * 0.999), "kinks too close together"
    return x.astype(np.float32)


def distinct(name, shape, spacing=0.05):
    """All values distinct and >= spacing apart (no ties in max-type ops)."""
    n = int(np.prod(shape))
    perm = rng_for(name).permutation(n).astype(np.float64)
    return ((perm - (n - 1) / 2) * spacing).reshape(shape).astype(np.float32)


def positive(name, shape, lo=0.2):
    return (np.abs(normal(name, shape)) + lo).astype(np.float32)


def const(name, shape, scale=1.0, salt="c"):
    return (rng_for(name + "/" + salt).standard_normal(shape) * scale).astype(np.float32)


def i64(values):
    return np.array(values, dtype=np.int64)


N = helper.make_node


# ---------------------------------------------------------------- conv family
# Conv (opset 11 spec): pads = [x1_begin, x2_begin, x1_end, x2_end]; group splits C.
def conv_ref(x, w, b=None, strides=(1, 1), pads=(0, 0, 0, 0), dilations=(1, 1), group=1):
    xp = F.pad(x, (pads[1], pads[3], pads[0], pads[2]))
    return F.conv2d(xp, w, b, stride=strides, dilation=dilations, groups=group)


def add_conv_cases():
    nm = "conv_s1_p1_bias"
    w, b = const(nm, [4, 3, 3, 3], 0.4, "w"), const(nm, [4], 0.3, "b")
    case(nm, "Conv", "3x3 stride 1, pads 1, bias", "Conv-11", normal(nm, [1, 3, 6, 6]),
         [N("Conv", ["x", "w", "b"], ["y"], kernel_shape=[3, 3], pads=[1, 1, 1, 1])],
         {"w": w, "b": b}, lambda x, c: conv_ref(x, c["w"], c["b"], pads=(1, 1, 1, 1)))

    nm = "conv_s2_asym_pads"
    w = const(nm, [4, 3, 3, 3], 0.4, "w")
    case(nm, "Conv", "3x3 stride 2, asymmetric pads [0,1,1,0] (top 0, left 1, bottom 1, right 0), no bias",
         "Conv-11", normal(nm, [1, 3, 6, 6]),
         [N("Conv", ["x", "w"], ["y"], kernel_shape=[3, 3], strides=[2, 2], pads=[0, 1, 1, 0])],
         {"w": w}, lambda x, c: conv_ref(x, c["w"], strides=(2, 2), pads=(0, 1, 1, 0)))

    nm = "conv_dilation2"
    w, b = const(nm, [2, 3, 3, 3], 0.4, "w"), const(nm, [2], 0.3, "b")
    case(nm, "Conv", "3x3 dilation 2, pads 2, bias", "Conv-11", normal(nm, [1, 3, 7, 7]),
         [N("Conv", ["x", "w", "b"], ["y"], kernel_shape=[3, 3], dilations=[2, 2], pads=[2, 2, 2, 2])],
         {"w": w, "b": b}, lambda x, c: conv_ref(x, c["w"], c["b"], dilations=(2, 2), pads=(2, 2, 2, 2)))

    nm = "conv_group3"
    w, b = const(nm, [6, 2, 3, 3], 0.4, "w"), const(nm, [6], 0.3, "b")
    case(nm, "Conv", "group 3 (6 in, 6 out channels), pads 1, bias", "Conv-11", normal(nm, [1, 6, 5, 5]),
         [N("Conv", ["x", "w", "b"], ["y"], kernel_shape=[3, 3], pads=[1, 1, 1, 1], group=3)],
         {"w": w, "b": b}, lambda x, c: conv_ref(x, c["w"], c["b"], pads=(1, 1, 1, 1), group=3))

    nm = "conv_depthwise_s2"
    w, b = const(nm, [4, 1, 3, 3], 0.4, "w"), const(nm, [4], 0.3, "b")
    case(nm, "Conv", "depthwise (group = C = 4), stride 2, pads 1, bias", "Conv-11", normal(nm, [1, 4, 6, 6]),
         [N("Conv", ["x", "w", "b"], ["y"], kernel_shape=[3, 3], strides=[2, 2], pads=[1, 1, 1, 1], group=4)],
         {"w": w, "b": b}, lambda x, c: conv_ref(x, c["w"], c["b"], strides=(2, 2), pads=(1, 1, 1, 1), group=4))

    nm = "conv_1x1"
    w, b = const(nm, [5, 3, 1, 1], 0.4, "w"), const(nm, [5], 0.3, "b")
    case(nm, "Conv", "1x1 pointwise, bias", "Conv-11", normal(nm, [1, 3, 4, 4]),
         [N("Conv", ["x", "w", "b"], ["y"], kernel_shape=[1, 1])],
         {"w": w, "b": b}, lambda x, c: conv_ref(x, c["w"], c["b"]))

    nm = "conv_rect_kernel"
    w = const(nm, [2, 3, 2, 3], 0.4, "w")
    case(nm, "Conv", "2x3 kernel, strides [2,1], pads [1,0,0,1]; kernel_shape attribute omitted (inferred from W)",
         "Conv-11", normal(nm, [1, 3, 6, 5]),
         [N("Conv", ["x", "w"], ["y"], strides=[2, 1], pads=[1, 0, 0, 1])],
         {"w": w}, lambda x, c: conv_ref(x, c["w"], strides=(2, 1), pads=(1, 0, 0, 1)))

    # Strided geometries the Conv input gradient must get right at every output phase: odd
    # strides with dilation, sizes the stride does not divide, a stride larger than the kernel
    # (a phase no tap reaches), auto_pad SAME_UPPER/SAME_LOWER, groups and channel multipliers,
    # 1-D and 3-D. The float64 reference pads explicitly (F.pad) and convolves with torch.
    def same_pads(size, kernel, stride, dil, upper):
        # ONNX Conv auto_pad: output ceil(in/stride), total pad split in half, the odd one at the
        # end for SAME_UPPER and at the beginning for SAME_LOWER (Conv-11 spec text).
        begin, end = [], []
        for n, k, s, d in zip(size, kernel, stride, dil):
            total = max(0, (-(-n // s) - 1) * s + (k - 1) * d + 1 - n)
            small = total // 2
            begin.append(small if upper else total - small)
            end.append(total - small if upper else small)
        return begin + end

    def conv_nd_case(nm, notes, xshape, wshape, strides, pads, dilations=None, group=1, auto_pad=None):
        nd = len(xshape) - 2
        dilations = dilations or [1] * nd
        w = const(nm, wshape, 0.4, "w")
        attrs = dict(kernel_shape=wshape[2:], strides=strides, dilations=dilations, group=group)
        if auto_pad:
            attrs["auto_pad"] = auto_pad
            pads = same_pads(xshape[2:], wshape[2:], strides, dilations, auto_pad == "SAME_UPPER")
        else:
            attrs["pads"] = pads
        torch_pad = []
        for a in reversed(range(nd)):  # F.pad lists the last axis first
            torch_pad += [pads[a], pads[a + nd]]
        conv = {1: F.conv1d, 2: F.conv2d, 3: F.conv3d}[nd]
        case(nm, "Conv", notes, "Conv-11", normal(nm, xshape), [N("Conv", ["x", "w"], ["y"], **attrs)], {"w": w},
             lambda x, c: conv(F.pad(x, torch_pad), c["w"], stride=strides, dilation=dilations, groups=group))

    conv_nd_case("conv_s3_d2_asym_pads", "3x3 stride 3, dilation 2, pads [1,2,2,0], 11x10 (stride divides neither side)",
                 [1, 2, 11, 10], [3, 2, 3, 3], [3, 3], [1, 2, 2, 0], dilations=[2, 2])
    conv_nd_case("conv_s2_k4_group2", "4x4 stride 2, group 2 (4 in, 6 out), pads [1,2,2,1], 7x9",
                 [1, 4, 7, 9], [6, 2, 4, 4], [2, 2], [1, 2, 2, 1], group=2)
    conv_nd_case("conv_s3_k2_no_tap_phase", "2x2 stride 3, no pads, 8x7 (the third phase of each axis gets no tap)",
                 [1, 2, 8, 7], [3, 2, 2, 2], [3, 3], [0, 0, 0, 0])
    conv_nd_case("conv_s2_same_upper", "3x3 stride 2, auto_pad SAME_UPPER, 7x8",
                 [1, 3, 7, 8], [4, 3, 3, 3], [2, 2], None, auto_pad="SAME_UPPER")
    conv_nd_case("conv_s2_same_lower_k4", "4x4 stride 2, auto_pad SAME_LOWER, 6x7",
                 [1, 2, 6, 7], [3, 2, 4, 4], [2, 2], None, auto_pad="SAME_LOWER")
    conv_nd_case("conv_dw_mult2_s2_d2", "depthwise with channel multiplier 2 (group 3, 6 out), stride 2, dilation 2, pads 2, 9x9",
                 [1, 3, 9, 9], [6, 1, 3, 3], [2, 2], [2, 2, 2, 2], dilations=[2, 2], group=3)
    conv_nd_case("conv1d_s2_d3", "1-D kernel 3, stride 2, dilation 3, pads [4,1], length 15",
                 [1, 2, 15], [2, 2, 3], [2], [4, 1], dilations=[3])
    conv_nd_case("conv3d_s2", "3-D kernel 3, stride 2, pads [1,0,1,1,1,0], 5x6x7",
                 [1, 2, 5, 6, 7], [3, 2, 3, 3, 3], [2, 2, 2], [1, 0, 1, 1, 1, 0])
    conv_nd_case("conv_strides_3_1_pads_beyond", "3x3 strides [3,1], pads 3 (wider than the kernel reaches), 8x6",
                 [1, 2, 8, 6], [3, 2, 3, 3], [3, 1], [3, 3, 3, 3])

    # ConvTranspose (opset 11 spec): output = stride*(in-1) + output_padding + ((k-1)*d+1) - pad_begin - pad_end;
    # W is [C_in, C_out/group, kH, kW]. Same semantics as torch conv_transpose2d.
    nm = "convtranspose_s2"
    w, b = const(nm, [3, 2, 3, 3], 0.4, "w"), const(nm, [2], 0.3, "b")
    case(nm, "ConvTranspose", "3x3 stride 2, pads 1, output_padding 1, bias", "ConvTranspose-11",
         normal(nm, [1, 3, 4, 4]),
         [N("ConvTranspose", ["x", "w", "b"], ["y"], kernel_shape=[3, 3], strides=[2, 2], pads=[1, 1, 1, 1],
            output_padding=[1, 1])],
         {"w": w, "b": b},
         lambda x, c: F.conv_transpose2d(x, c["w"], c["b"], stride=2, padding=1, output_padding=1))

    nm = "convtranspose_group2"
    w = const(nm, [4, 1, 2, 2], 0.4, "w")
    case(nm, "ConvTranspose", "2x2 stride 2, group 2, no pads", "ConvTranspose-11", normal(nm, [1, 4, 3, 3]),
         [N("ConvTranspose", ["x", "w"], ["y"], kernel_shape=[2, 2], strides=[2, 2], group=2)],
         {"w": w}, lambda x, c: F.conv_transpose2d(x, c["w"], stride=2, groups=2))


# ---------------------------------------------------------------- gemm / matmul
def add_matmul_cases():
    # Gemm-13: Y = alpha * A' * B' + beta * C, A' = transpose(A) if transA, C unidirectionally broadcast.
    nm = "gemm_transB1_alpha_beta"
    bm, cc = const(nm, [3, 4], 0.5, "b"), const(nm, [3], 0.5, "c")
    case(nm, "Gemm", "transB=1, alpha 0.5, beta 2, C [3] broadcast", "Gemm-13", normal(nm, [2, 4]),
         [N("Gemm", ["x", "B", "C"], ["y"], transB=1, alpha=0.5, beta=2.0)], {"B": bm, "C": cc},
         lambda x, c: 0.5 * x @ c["B"].T + 2.0 * c["C"])

    nm = "gemm_transB0"
    bm, cc = const(nm, [4, 3], 0.5, "b"), const(nm, [1, 3], 0.5, "c")
    case(nm, "Gemm", "transB=0, default alpha/beta, C [1,3]", "Gemm-13", normal(nm, [2, 4]),
         [N("Gemm", ["x", "B", "C"], ["y"])], {"B": bm, "C": cc},
         lambda x, c: x @ c["B"] + c["C"])

    nm = "gemm_transA1_noC"
    bm = const(nm, [4, 3], 0.5, "b")
    case(nm, "Gemm", "transA=1 (x is [K,M]), no C", "Gemm-13", normal(nm, [4, 2]),
         [N("Gemm", ["x", "B"], ["y"], transA=1)], {"B": bm}, lambda x, c: x.T @ c["B"])

    # MatMul-13: numpy.matmul semantics (batch dims broadcast).
    nm = "matmul_x_xT"
    case(nm, "MatMul", "both operands from x: x @ transpose(x) (attention-score pattern)", "MatMul-13, Transpose-13",
         normal(nm, [2, 3, 4]),
         [N("Transpose", ["x"], ["xt"], perm=[0, 2, 1]), N("MatMul", ["x", "xt"], ["y"])], {},
         lambda x, c: x @ x.transpose(1, 2))

    nm = "matmul_broadcast_batch"
    wm = const(nm, [3, 4, 2], 0.5, "w")
    case(nm, "MatMul", "x [2,1,3,4] @ W [3,4,2] -> [2,3,3,2] (batch broadcast both sides)", "MatMul-13",
         normal(nm, [2, 1, 3, 4]), [N("MatMul", ["x", "W"], ["y"])], {"W": wm}, lambda x, c: x @ c["W"])

    nm = "matmul_const_left"
    wm = const(nm, [5, 3], 0.5, "w")
    case(nm, "MatMul", "W [5,3] @ x [2,3,4] -> [2,5,4] (constant on the left)", "MatMul-13",
         normal(nm, [2, 3, 4]), [N("MatMul", ["W", "x"], ["y"])], {"W": wm}, lambda x, c: c["W"] @ x)

    nm = "matmul_linear_3d"
    wm, bb = const(nm, [4, 6], 0.5, "w"), const(nm, [6], 0.3, "b")
    case(nm, "MatMul+Add", "token-linear pattern: x [1,5,4] @ W [4,6] + b", "MatMul-13, Add-14",
         normal(nm, [1, 5, 4]), [N("MatMul", ["x", "W"], ["t"]), N("Add", ["t", "b"], ["y"])],
         {"W": wm, "b": bb}, lambda x, c: x @ c["W"] + c["b"])


# ---------------------------------------------------------------- unary activations
def add_unary_cases():
    S = [1, 3, 4, 4]

    def unary(nm, op, notes, spec, x, fwd, attrs=None, extra_inputs=None, inits=None):
        attrs = attrs or {}
        ins = ["x"] + (extra_inputs or [])
        case(nm, op, notes, spec, x, [N(op, ins, ["y"], **attrs)], inits or {}, fwd)

    unary("relu", "Relu", "inputs >= 0.02 from the kink at 0", "Relu-14",
          away_from(normal("relu", S), [0.0]), lambda x, c: torch.clamp(x, min=0))
    unary("leakyrelu", "LeakyRelu", "alpha 0.1", "LeakyRelu-16",
          away_from(normal("leakyrelu", S), [0.0]), lambda x, c: torch.where(x >= 0, x, 0.1 * x),
          attrs=dict(alpha=0.1))
    slope = const("prelu", [3, 1, 1], 0.3, "slope")
    unary("prelu", "PRelu", "per-channel slope [3,1,1] (unidirectional broadcast)", "PRelu-16",
          away_from(normal("prelu", S), [0.0]), lambda x, c: torch.where(x >= 0, x, c["slope"] * x),
          extra_inputs=["slope"], inits={"slope": slope})
    unary("elu", "Elu", "alpha 0.7", "Elu-6", away_from(normal("elu", S), [0.0]),
          lambda x, c: torch.where(x >= 0, x, 0.7 * (torch.exp(x) - 1)), attrs=dict(alpha=0.7))
    unary("clip_min_max", "Clip", "min -0.5 and max 0.6 as inputs", "Clip-13",
          away_from(normal("clip_min_max", S), [-0.5, 0.6]),
          lambda x, c: torch.clamp(x, -0.5, 0.6), extra_inputs=["lo", "hi"],
          inits={"lo": np.array(-0.5, np.float32), "hi": np.array(0.6, np.float32)})
    unary("clip_min_only", "Clip", "min 0.1, max omitted (empty input name)", "Clip-13",
          away_from(normal("clip_min_only", S), [0.1]), lambda x, c: torch.clamp(x, min=0.1),
          extra_inputs=["lo"], inits={"lo": np.array(0.1, np.float32)})
    unary("clip_relu6", "Clip", "min 0, max 6 (ReLU6 as exported); inputs scaled x4", "Clip-13",
          away_from(normal("clip_relu6", S, 4.0), [0.0, 6.0]), lambda x, c: torch.clamp(x, 0.0, 6.0),
          extra_inputs=["lo", "hi"], inits={"lo": np.array(0.0, np.float32), "hi": np.array(6.0, np.float32)})
    # HardSigmoid-6: max(0, min(1, alpha*x + beta)); defaults alpha 0.2, beta 0.5 -> kinks at +-2.5.
    unary("hardsigmoid_default", "HardSigmoid", "default alpha 0.2 beta 0.5; inputs x3 to hit both flat parts",
          "HardSigmoid-6", away_from(normal("hardsigmoid_default", S, 3.0), [-2.5, 2.5]),
          lambda x, c: torch.clamp(0.2 * x + 0.5, 0, 1))
    unary("hardsigmoid_one_sixth", "HardSigmoid", "alpha 1/6 beta 0.5 (as exported from torch Hardsigmoid)",
          "HardSigmoid-6", away_from(normal("hardsigmoid_one_sixth", S, 4.0), [-3.0, 3.0]),
          lambda x, c: torch.clamp(x / 6.0 + 0.5, 0, 1), attrs=dict(alpha=1.0 / 6.0, beta=0.5))
    # HardSwish-14: x * max(0, min(1, x/6 + 0.5)).
    unary("hardswish", "HardSwish", "inputs x4 to hit both kinks (+-3)", "HardSwish-14",
          away_from(normal("hardswish", S, 4.0), [-3.0, 3.0]),
          lambda x, c: x * torch.clamp(x / 6.0 + 0.5, 0, 1))
    unary("sigmoid", "Sigmoid", "", "Sigmoid-13", normal("sigmoid", S, 2.0), lambda x, c: torch.sigmoid(x))
    unary("tanh", "Tanh", "", "Tanh-13", normal("tanh", S, 1.5), lambda x, c: torch.tanh(x))
    unary("softplus", "Softplus", "ln(exp(x)+1)", "Softplus-1", normal("softplus", S, 2.0),
          lambda x, c: torch.log(torch.exp(x) + 1))
    unary("erf", "Erf", "", "Erf-13", normal("erf", S), lambda x, c: torch.erf(x))
    unary("exp", "Exp", "", "Exp-13", normal("exp", S), lambda x, c: torch.exp(x))
    unary("log", "Log", "positive inputs (|n|+0.2)", "Log-13", positive("log", S), lambda x, c: torch.log(x))
    unary("neg", "Neg", "", "Neg-13", normal("neg", S), lambda x, c: -x)
    unary("abs", "Abs", "inputs >= 0.02 from 0", "Abs-13", away_from(normal("abs", S), [0.0]),
          lambda x, c: torch.abs(x))
    xr = normal("reciprocal", S)
    xr = (np.sign(xr) * (np.abs(xr) + 0.3)).astype(np.float32)
    unary("reciprocal", "Reciprocal", "inputs >= 0.3 from 0", "Reciprocal-13", xr, lambda x, c: 1.0 / x)
    unary("sqrt", "Sqrt", "positive inputs", "Sqrt-13", positive("sqrt", S), lambda x, c: torch.sqrt(x))
    unary("pow_2", "Pow", "exponent constant 2 (scalar initializer)", "Pow-15", normal("pow_2", S),
          lambda x, c: x ** 2, extra_inputs=["e"], inits={"e": np.array(2.0, np.float32)})
    unary("pow_half", "Pow", "exponent constant 0.5, positive base", "Pow-15", positive("pow_half", S),
          lambda x, c: x ** 0.5, extra_inputs=["e"], inits={"e": np.array(0.5, np.float32)})
    unary("identity", "Identity", "", "Identity-16", normal("identity", S), lambda x, c: x)
    unary("dropout_inference", "Dropout", "no ratio / training_mode inputs: inference, output = input",
          "Dropout-13", normal("dropout_inference", S), lambda x, c: x)
    unary("cast_float_to_float", "Cast", "to=FLOAT on a float input (no-op cast)", "Cast-13",
          normal("cast_float_to_float", S), lambda x, c: x, attrs=dict(to=TensorProto.FLOAT))

    nm = "silu_sigmoid_mul"
    case(nm, "Sigmoid+Mul", "x * sigmoid(x): x feeds both Mul operands (SiLU as exported)", "Sigmoid-13, Mul-14",
         normal(nm, S, 2.0), [N("Sigmoid", ["x"], ["s"]), N("Mul", ["x", "s"], ["y"])], {},
         lambda x, c: x * torch.sigmoid(x))
    nm = "gelu_erf"
    case(nm, "Div+Erf+Add+Mul", "GELU as exported by torch: x*0.5*(1+erf(x/sqrt2))", "Erf-13, Div-14, Add-14, Mul-14",
         normal(nm, S, 2.0),
         [N("Div", ["x", "sqrt2"], ["d"]), N("Erf", ["d"], ["e"]), N("Add", ["e", "one"], ["a"]),
          N("Mul", ["x", "a"], ["m"]), N("Mul", ["m", "half"], ["y"])],
         {"sqrt2": np.array(np.sqrt(2.0), np.float32), "one": np.array(1.0, np.float32),
          "half": np.array(0.5, np.float32)},
         lambda x, c: x * 0.5 * (1 + torch.erf(x / c["sqrt2"])))


# ---------------------------------------------------------------- softmax
def add_softmax_cases():
    # Softmax-13 / LogSoftmax-13: normalise along the single `axis` (default -1).
    nm = "softmax_axis_last"
    case(nm, "Softmax", "axis -1 on [2,5]", "Softmax-13", normal(nm, [2, 5], 1.5),
         [N("Softmax", ["x"], ["y"], axis=-1)], {}, lambda x, c: torch.softmax(x, -1))
    nm = "softmax_axis1"
    case(nm, "Softmax", "axis 1 on [1,4,3,3] (channel softmax)", "Softmax-13", normal(nm, [1, 4, 3, 3], 1.5),
         [N("Softmax", ["x"], ["y"], axis=1)], {}, lambda x, c: torch.softmax(x, 1))
    nm = "logsoftmax_axis_last"
    case(nm, "LogSoftmax", "axis -1 on [2,5]", "LogSoftmax-13", normal(nm, [2, 5], 1.5),
         [N("LogSoftmax", ["x"], ["y"], axis=-1)], {}, lambda x, c: torch.log_softmax(x, -1))
    nm = "logsoftmax_axis1"
    case(nm, "LogSoftmax", "axis 1 on [1,4,3,3]", "LogSoftmax-13", normal(nm, [1, 4, 3, 3], 1.5),
         [N("LogSoftmax", ["x"], ["y"], axis=1)], {}, lambda x, c: torch.log_softmax(x, 1))


# ---------------------------------------------------------------- binary broadcasting
def add_binary_cases():
    # Add/Sub/Mul/Div-14: multidirectional (numpy) broadcasting.
    S = [1, 3, 4, 4]
    ops = {"Add": lambda a, b: a + b, "Sub": lambda a, b: a - b, "Mul": lambda a, b: a * b,
           "Div": lambda a, b: a / b}
    for op, f in ops.items():
        lo = op.lower()
        spec = f"{op}-14"
        # x op const: const [3,1,1] broadcast over H,W.
        nm = f"{lo}_x_const"
        k = const(nm, [3, 1, 1], 1.0, "k")
        if op == "Div":
            k = (np.sign(k) * (np.abs(k) + 0.5)).astype(np.float32)
        case(nm, op, "x [1,3,4,4] op const [3,1,1]", spec, normal(nm, S),
             [N(op, ["x", "k"], ["y"])], {"k": k}, lambda x, c, f=f: f(x, c["k"]))
        # const op x: const [4] (last axis) first, x second.
        nm = f"{lo}_const_x"
        k = const(nm, [4], 1.0, "k")
        xx = normal(nm, S)
        if op == "Div":
            xx = (np.sign(xx) * (np.abs(xx) + 0.4)).astype(np.float32)
        case(nm, op, "const [4] op x [1,3,4,4] (const is the first operand)", spec, xx,
             [N(op, ["k", "x"], ["y"])], {"k": k}, lambda x, c, f=f: f(c["k"], x))
        # x op derived(x) where derived is broadcast: ReduceMean over channels -> [1,1,4,4].
        nm = f"{lo}_x_xderived_broadcast"
        xx = normal(nm, S)
        if op == "Div":
            # denominator sqrt(mean_c(x^2)+0.1), a normalisation pattern; strictly positive.
            case(nm, op, "x / sqrt(ReduceMean_c(x*x) + 0.1): both operands from x, denominator [1,1,4,4]",
                 "Div-14, Mul-14, ReduceMean-13, Add-14, Sqrt-13", xx,
                 [N("Mul", ["x", "x"], ["sq"]), N("ReduceMean", ["sq"], ["m"], axes=[1], keepdims=1),
                  N("Add", ["m", "eps"], ["me"]), N("Sqrt", ["me"], ["d"]), N("Div", ["x", "d"], ["y"])],
                 {"eps": np.array(0.1, np.float32)},
                 lambda x, c: x / torch.sqrt((x * x).mean(1, keepdim=True) + c["eps"]))
        else:
            case(nm, op, "x op ReduceMean_c(x): both operands from x, second broadcast [1,1,4,4]",
                 f"{spec}, ReduceMean-13", xx,
                 [N("ReduceMean", ["x"], ["m"], axes=[1], keepdims=1), N(op, ["x", "m"], ["y"])], {},
                 lambda x, c, f=f: f(x, x.mean(1, keepdim=True)))
    nm = "mul_x_x"
    case(nm, "Mul", "x * x (same tensor both operands)", "Mul-14", normal(nm, S),
         [N("Mul", ["x", "x"], ["y"])], {}, lambda x, c: x * x)
    nm = "mul_squeeze_excite"
    case(nm, "GlobalAveragePool+Sigmoid+Mul", "x * sigmoid(GAP(x)): channel gate [1,3,1,1] from x",
         "GlobalAveragePool-1, Sigmoid-13, Mul-14", normal(nm, S),
         [N("GlobalAveragePool", ["x"], ["g"]), N("Sigmoid", ["g"], ["s"]), N("Mul", ["x", "s"], ["y"])], {},
         lambda x, c: x * torch.sigmoid(x.mean((2, 3), keepdim=True)))
    nm = "sub_gap_center"
    case(nm, "Sub", "x - GlobalAveragePool(x)", "Sub-14, GlobalAveragePool-1", normal(nm, S),
         [N("GlobalAveragePool", ["x"], ["g"]), N("Sub", ["x", "g"], ["y"])], {},
         lambda x, c: x - x.mean((2, 3), keepdim=True))
    # Max/Min-13: elementwise, variadic, multidirectional broadcast.
    nm = "max_x_const"
    k = const(nm, [3, 1, 1], 0.5, "k")
    xx = normal(nm, S)
    xx = np.where(np.abs(xx - k) < 0.02, k + 0.02 * np.sign(xx - k + 1e-9), xx).astype(np.float32)
    assert np.all(np.abs(xx - k) >= 0.0199)
    case(nm, "Max", "Max(x, const [3,1,1]); inputs >= 0.02 from the const", "Max-13", xx,
         [N("Max", ["x", "k"], ["y"])], {"k": k}, lambda x, c: torch.maximum(x, c["k"]))
    nm = "min_x_xderived"
    case(nm, "Min", "Min(x, -0.5*x): x where x < 0, -0.5x where x > 0; inputs >= 0.02 from 0", "Min-13, Mul-14",
         away_from(normal(nm, S), [0.0]),
         [N("Mul", ["x", "mh"], ["h"]), N("Min", ["x", "h"], ["y"])], {"mh": np.array(-0.5, np.float32)},
         lambda x, c: torch.minimum(x, -0.5 * x))
    nm = "where_const_cond"
    cond = rng_for(nm + "/cond").random([1, 1, 4, 4]) > 0.5
    case(nm, "Where", "Where(cond [1,1,4,4] const bool, x, 3*x): both branches from x", "Where-16, Mul-14",
         normal(nm, S), [N("Mul", ["x", "three"], ["t"]), N("Where", ["cond", "x", "t"], ["y"])],
         {"cond": cond, "three": np.array(3.0, np.float32)},
         lambda x, c: torch.where(torch.from_numpy(cond), x, 3.0 * x))


# ---------------------------------------------------------------- pooling
def add_pool_cases():
    # MaxPool-12 / AveragePool-11: pads [top,left,bottom,right]; MaxPool pads with -inf;
    # AveragePool count_include_pad 0 divides by the number of non-pad elements.
    # Output size floor/ceil((in + pads - k)/s + 1). Cases with ceil_mode keep the last window
    # starting inside the input, where all runtimes agree.
    def mp(nm, notes, x, k, s, p, ceil=0):
        case(nm, "MaxPool", notes, "MaxPool-12", x,
             [N("MaxPool", ["x"], ["y"], kernel_shape=[k, k], strides=[s, s], pads=[p] * 4, ceil_mode=ceil)], {},
             lambda x, c: F.max_pool2d(x, k, s, p, ceil_mode=bool(ceil)))
    mp("maxpool_k3s2p1", "kernel 3 stride 2 pads 1 (overlapping windows); distinct inputs, no ties",
       distinct("maxpool_k3s2p1", [1, 2, 6, 6]), 3, 2, 1)
    mp("maxpool_k3s2_ceil", "kernel 3 stride 2, ceil_mode 1 (last window partial)",
       distinct("maxpool_k3s2_ceil", [1, 2, 6, 6]), 3, 2, 0, 1)
    mp("maxpool_k2s2", "kernel 2 stride 2 (non-overlapping)", distinct("maxpool_k2s2", [1, 2, 6, 6]), 2, 2, 0)
    mp("maxpool_k3s1_overlap", "kernel 3 stride 1 (heavy overlap: one element is the max of many windows)",
       distinct("maxpool_k3s1_overlap", [1, 2, 5, 5]), 3, 1, 0)

    def ap(nm, notes, k, s, p, cip, ceil=0, shape=(1, 2, 6, 6)):
        case(nm, "AveragePool", notes, "AveragePool-11", normal(nm, list(shape)),
             [N("AveragePool", ["x"], ["y"], kernel_shape=[k, k], strides=[s, s], pads=[p] * 4,
                count_include_pad=cip, ceil_mode=ceil)], {},
             lambda x, c: F.avg_pool2d(x, k, s, p, ceil_mode=bool(ceil), count_include_pad=bool(cip)))
    ap("avgpool_k3s2p1_exclude_pad", "kernel 3 stride 2 pads 1, count_include_pad 0", 3, 2, 1, 0)
    ap("avgpool_k3s2p1_include_pad", "kernel 3 stride 2 pads 1, count_include_pad 1", 3, 2, 1, 1)
    ap("avgpool_k3s2_ceil", "kernel 3 stride 2, ceil_mode 1, no pads (last window averages the valid part)",
       3, 2, 0, 0, 1)
    ap("avgpool_k2s2", "kernel 2 stride 2", 2, 2, 0, 0)
    nm = "globalaveragepool"
    case(nm, "GlobalAveragePool", "", "GlobalAveragePool-1", normal(nm, [1, 3, 4, 4]),
         [N("GlobalAveragePool", ["x"], ["y"])], {}, lambda x, c: x.mean((2, 3), keepdim=True))
    nm = "globalmaxpool"
    case(nm, "GlobalMaxPool", "distinct inputs", "GlobalMaxPool-1", distinct(nm, [1, 3, 4, 4]),
         [N("GlobalMaxPool", ["x"], ["y"])], {}, lambda x, c: x.amax((2, 3), keepdim=True))


# ---------------------------------------------------------------- reductions
def add_reduce_cases():
    # ReduceMean-13 / ReduceMax-13: axes attribute. ReduceSum-13: axes as second input.
    S = [1, 3, 4, 4]
    nm = "reducemean_axes23_keep1"
    case(nm, "ReduceMean", "axes [2,3] keepdims 1", "ReduceMean-13", normal(nm, S),
         [N("ReduceMean", ["x"], ["y"], axes=[2, 3], keepdims=1)], {}, lambda x, c: x.mean((2, 3), keepdim=True))
    nm = "reducemean_axis1_keep0"
    case(nm, "ReduceMean", "axes [1] keepdims 0", "ReduceMean-13", normal(nm, S),
         [N("ReduceMean", ["x"], ["y"], axes=[1], keepdims=0)], {}, lambda x, c: x.mean(1))
    nm = "reducemean_negative_axis"
    case(nm, "ReduceMean", "axes [-1] keepdims 1 on [2,3,5]", "ReduceMean-13", normal(nm, [2, 3, 5]),
         [N("ReduceMean", ["x"], ["y"], axes=[-1], keepdims=1)], {}, lambda x, c: x.mean(-1, keepdim=True))
    nm = "reducesum_axis1_keep1"
    case(nm, "ReduceSum", "axes input [1], keepdims 1", "ReduceSum-13", normal(nm, S),
         [N("ReduceSum", ["x", "axes"], ["y"], keepdims=1)], {"axes": i64([1])}, lambda x, c: x.sum(1, keepdim=True))
    nm = "reducesum_axes23_keep0"
    case(nm, "ReduceSum", "axes input [2,3], keepdims 0", "ReduceSum-13", normal(nm, S),
         [N("ReduceSum", ["x", "axes"], ["y"], keepdims=0)], {"axes": i64([2, 3])}, lambda x, c: x.sum((2, 3)))
    nm = "reducesum_all_keep1"
    case(nm, "ReduceSum", "no axes input (reduce all), keepdims 1", "ReduceSum-13", normal(nm, S),
         [N("ReduceSum", ["x"], ["y"], keepdims=1)], {}, lambda x, c: x.sum((0, 1, 2, 3), keepdim=True))
    nm = "reducemax_axis1_keep1"
    case(nm, "ReduceMax", "axes [1] keepdims 1; distinct inputs", "ReduceMax-13", distinct(nm, S),
         [N("ReduceMax", ["x"], ["y"], axes=[1], keepdims=1)], {}, lambda x, c: x.amax(1, keepdim=True))
    nm = "reducemax_axes23_keep0"
    case(nm, "ReduceMax", "axes [2,3] keepdims 0; distinct inputs", "ReduceMax-13", distinct(nm, S),
         [N("ReduceMax", ["x"], ["y"], axes=[2, 3], keepdims=0)], {}, lambda x, c: x.amax((2, 3)))


# ---------------------------------------------------------------- normalisation
def add_norm_cases():
    # BatchNormalization-15 (training_mode 0): y = scale*(x-mean)/sqrt(var+eps) + B.
    nm = "batchnorm_inference"
    sc, bb = (1 + const(nm, [3], 0.3, "s")), const(nm, [3], 0.3, "b")
    mu, var = const(nm, [3], 0.3, "m"), (np.abs(const(nm, [3], 0.5, "v")) + 0.5).astype(np.float32)
    case(nm, "BatchNormalization", "inference, epsilon 1e-3, non-trivial stats", "BatchNormalization-15",
         normal(nm, [1, 3, 4, 4]),
         [N("BatchNormalization", ["x", "sc", "bb", "mu", "var"], ["y"], epsilon=1e-3)],
         {"sc": sc, "bb": bb, "mu": mu, "var": var},
         lambda x, c: (x - c["mu"].view(1, 3, 1, 1)) / torch.sqrt(c["var"].view(1, 3, 1, 1) + 1e-3)
         * c["sc"].view(1, 3, 1, 1) + c["bb"].view(1, 3, 1, 1))
    # LayerNormalization-17: normalise over axes [axis..rank-1], population variance, eps inside sqrt.
    nm = "layernorm_last_axis"
    sc, bb = (1 + const(nm, [5], 0.3, "s")), const(nm, [5], 0.3, "b")

    def ln(x, c):
        m = x.mean(-1, keepdim=True)
        v = ((x - m) ** 2).mean(-1, keepdim=True)
        return (x - m) / torch.sqrt(v + 1e-5) * c["sc"] + c["bb"]
    case(nm, "LayerNormalization", "axis -1 on [2,3,5], scale and bias, epsilon 1e-5", "LayerNormalization-17",
         normal(nm, [2, 3, 5]), [N("LayerNormalization", ["x", "sc", "bb"], ["y"], axis=-1, epsilon=1e-5)],
         {"sc": sc, "bb": bb}, ln)
    # InstanceNormalization-6: per (n, c) over spatial axes, population variance.
    nm = "instancenorm"
    sc, bb = (1 + const(nm, [3], 0.3, "s")), const(nm, [3], 0.3, "b")

    def inorm(x, c):
        m = x.mean((2, 3), keepdim=True)
        v = ((x - m) ** 2).mean((2, 3), keepdim=True)
        return (x - m) / torch.sqrt(v + 1e-5) * c["sc"].view(1, 3, 1, 1) + c["bb"].view(1, 3, 1, 1)
    case(nm, "InstanceNormalization", "epsilon 1e-5", "InstanceNormalization-6", normal(nm, [1, 3, 4, 4]),
         [N("InstanceNormalization", ["x", "sc", "bb"], ["y"], epsilon=1e-5)], {"sc": sc, "bb": bb}, inorm)


# ---------------------------------------------------------------- shape / data movement
def add_shape_cases():
    nm = "concat_axis1"
    k = const(nm, [1, 2, 4, 4], 1.0, "k")
    m = const(nm, [1, 3, 1, 1], 1.0, "m")
    case(nm, "Concat", "Concat(x, x*m, const) on axis 1 (x reaches two inputs, one input constant)",
         "Concat-13, Mul-14", normal(nm, [1, 3, 4, 4]),
         [N("Mul", ["x", "m"], ["xm"]), N("Concat", ["x", "xm", "k"], ["y"], axis=1)], {"k": k, "m": m},
         lambda x, c: torch.cat([x, x * c["m"], c["k"]], 1))
    nm = "concat_axis_last"
    case(nm, "Concat", "Concat(x, x) on axis -1 of [2,3]", "Concat-13", normal(nm, [2, 3]),
         [N("Concat", ["x", "x"], ["y"], axis=-1)], {}, lambda x, c: torch.cat([x, x], -1))
    # Split-13: `split` sizes as an optional second input.
    nm = "split_sizes"
    case(nm, "Split", "split input [1,2,3] on axis 1; y = Concat(c, -1.5*a, b)", "Split-13, Concat-13, Mul-14",
         normal(nm, [1, 6, 3, 3]),
         [N("Split", ["x", "sizes"], ["a", "b", "cc"], axis=1), N("Mul", ["a", "k"], ["ak"]),
          N("Concat", ["cc", "ak", "b"], ["y"], axis=1)],
         {"sizes": i64([1, 2, 3]), "k": np.array(-1.5, np.float32)},
         lambda x, c: torch.cat([x[:, 3:6], -1.5 * x[:, 0:1], x[:, 1:3]], 1))
    nm = "split_equal"
    case(nm, "Split", "no split input: two equal halves on axis 1; y = a - b*b", "Split-13, Mul-14, Sub-14",
         normal(nm, [1, 4, 3, 3]),
         [N("Split", ["x"], ["a", "b"], axis=1), N("Mul", ["b", "b"], ["bb"]), N("Sub", ["a", "bb"], ["y"])], {},
         lambda x, c: x[:, 0:2] - x[:, 2:4] * x[:, 2:4])
    # Slice-13: starts/ends/axes/steps inputs; negative indices count from the end; clamping as in the spec.
    nm = "slice_steps_negative_end"
    case(nm, "Slice", "axes [2,3], starts [1,0], ends [-1,6], steps [2,3]", "Slice-13", normal(nm, [1, 3, 6, 6]),
         [N("Slice", ["x", "st", "en", "ax", "sp"], ["y"])],
         {"st": i64([1, 0]), "en": i64([-1, 6]), "ax": i64([2, 3]), "sp": i64([2, 3])},
         lambda x, c: x[:, :, 1:5:2, 0:6:3])
    nm = "slice_negative_steps"
    case(nm, "Slice", "axes [1,3], starts [2,-1], ends [0,-INT64_MAX], steps [-1,-2] (reversal)", "Slice-13",
         normal(nm, [1, 3, 4, 6]),
         [N("Slice", ["x", "st", "en", "ax", "sp"], ["y"])],
         {"st": i64([2, -1]), "en": i64([0, -INT64_MAX]), "ax": i64([1, 3]), "sp": i64([-1, -2])},
         lambda x, c: x[:, [2, 1]][:, :, :, [5, 3, 1]])
    nm = "slice_no_axes"
    case(nm, "Slice", "starts/ends only (axes default 0..), end beyond the dim is clamped", "Slice-13",
         normal(nm, [2, 5]), [N("Slice", ["x", "st", "en"], ["y"])],
         {"st": i64([1, 1]), "en": i64([100, 4])}, lambda x, c: x[1:, 1:4])
    # Gather-13: out = data indexed along axis; negative indices allowed; duplicates accumulate in the gradient.
    nm = "gather_scalar_index"
    case(nm, "Gather", "scalar index 2 on axis 1 (rank drops)", "Gather-13", normal(nm, [1, 4, 3, 3]),
         [N("Gather", ["x", "idx"], ["y"], axis=1)], {"idx": np.array(2, np.int64)}, lambda x, c: x[:, 2])
    nm = "gather_index_vector_dup"
    case(nm, "Gather", "indices [3,0,-1,0] on axis 1 (a negative and a duplicate index)", "Gather-13",
         normal(nm, [1, 4, 3, 3]),
         [N("Gather", ["x", "idx"], ["y"], axis=1)], {"idx": i64([3, 0, -1, 0])}, lambda x, c: x[:, [3, 0, 3, 0]])
    nm = "gather_class_token"
    case(nm, "Gather", "index 0 on axis 1 of tokens [1,5,4] (class-token pick)", "Gather-13",
         normal(nm, [1, 5, 4]), [N("Gather", ["x", "idx"], ["y"], axis=1)], {"idx": np.array(0, np.int64)},
         lambda x, c: x[:, 0])
    nm = "reshape_zero_minus1"
    case(nm, "Reshape", "shape [0,4,-1] (0 copies the dim, -1 inferred)", "Reshape-14", normal(nm, [1, 3, 4, 4]),
         [N("Reshape", ["x", "shape"], ["y"])], {"shape": i64([0, 4, -1])}, lambda x, c: x.reshape(1, 4, 12))
    nm = "reshape_channel_shuffle"
    case(nm, "Reshape+Transpose+Reshape", "channel shuffle: [1,6,2,2] -> [1,2,3,2,2] -> swap -> [1,6,2,2]",
         "Reshape-14, Transpose-13", normal(nm, [1, 6, 2, 2]),
         [N("Reshape", ["x", "s1"], ["r"]), N("Transpose", ["r"], ["t"], perm=[0, 2, 1, 3, 4]),
          N("Reshape", ["t", "s2"], ["y"])],
         {"s1": i64([1, 2, 3, 2, 2]), "s2": i64([1, 6, 2, 2])},
         lambda x, c: x.reshape(1, 2, 3, 2, 2).transpose(1, 2).reshape(1, 6, 2, 2))
    nm = "flatten_axis1"
    case(nm, "Flatten", "axis 1", "Flatten-13", normal(nm, [1, 3, 2, 4]),
         [N("Flatten", ["x"], ["y"], axis=1)], {}, lambda x, c: x.reshape(1, -1))
    nm = "transpose_nhwc"
    case(nm, "Transpose", "perm [0,2,3,1]", "Transpose-13", normal(nm, [1, 3, 2, 4]),
         [N("Transpose", ["x"], ["y"], perm=[0, 2, 3, 1])], {}, lambda x, c: x.permute(0, 2, 3, 1))
    nm = "transpose_default_perm"
    case(nm, "Transpose", "no perm (reverse all axes)", "Transpose-13", normal(nm, [2, 3, 4]),
         [N("Transpose", ["x"], ["y"])], {}, lambda x, c: x.permute(2, 1, 0))
    nm = "squeeze_axes"
    case(nm, "Squeeze", "axes input [0,2] on [1,3,1,4]", "Squeeze-13", normal(nm, [1, 3, 1, 4]),
         [N("Squeeze", ["x", "axes"], ["y"])], {"axes": i64([0, 2])}, lambda x, c: x.reshape(3, 4))
    nm = "unsqueeze_axes"
    case(nm, "Unsqueeze", "axes input [0,-1] on [3,4] -> [1,3,4,1]", "Unsqueeze-13", normal(nm, [3, 4]),
         [N("Unsqueeze", ["x", "axes"], ["y"])], {"axes": i64([0, -1])}, lambda x, c: x.reshape(1, 3, 4, 1))
    nm = "expand_broadcast"
    case(nm, "Expand", "[1,3,1,4] expanded to shape [2,3,5,4]", "Expand-13", normal(nm, [1, 3, 1, 4]),
         [N("Expand", ["x", "shape"], ["y"])], {"shape": i64([2, 3, 5, 4])}, lambda x, c: x.expand(2, 3, 5, 4))
    nm = "expand_class_token"
    case(nm, "Expand", "[1,1,4] expanded to its own shape [1,1,4] (the class-token expand at batch 1)",
         "Expand-13", normal(nm, [1, 1, 4]),
         [N("Expand", ["x", "shape"], ["y"])], {"shape": i64([1, 1, 4])}, lambda x, c: x.expand(1, 1, 4))
    nm = "tile"
    case(nm, "Tile", "repeats [1,2,1,3] on [1,2,3,2]", "Tile-13", normal(nm, [1, 2, 3, 2]),
         [N("Tile", ["x", "reps"], ["y"])], {"reps": i64([1, 2, 1, 3])}, lambda x, c: x.repeat(1, 2, 1, 3))
    # Pad-13: pads [x1_begin, x2_begin, ..., x1_end, x2_end, ...]; constant_value input; reflect/edge modes.
    pads = i64([0, 0, 1, 2, 0, 0, 2, 1])
    nm = "pad_constant"
    case(nm, "Pad", "constant 0.5, pads H (1,2) W (2,1)", "Pad-13", normal(nm, [1, 2, 4, 4]),
         [N("Pad", ["x", "pads", "cv"], ["y"], mode="constant")], {"pads": pads, "cv": np.array(0.5, np.float32)},
         lambda x, c: F.pad(x, (2, 1, 1, 2), mode="constant", value=0.5))
    nm = "pad_reflect"
    case(nm, "Pad", "reflect, pads H (1,2) W (2,1)", "Pad-13", normal(nm, [1, 2, 4, 4]),
         [N("Pad", ["x", "pads"], ["y"], mode="reflect")], {"pads": pads},
         lambda x, c: F.pad(x, (2, 1, 1, 2), mode="reflect"))
    nm = "pad_edge"
    case(nm, "Pad", "edge, pads H (1,2) W (2,1)", "Pad-13", normal(nm, [1, 2, 4, 4]),
         [N("Pad", ["x", "pads"], ["y"], mode="edge")], {"pads": pads},
         lambda x, c: F.pad(x, (2, 1, 1, 2), mode="replicate"))


# ---------------------------------------------------------------- resize
def nearest_asym_floor(x, scale):
    # Resize-13, nearest + asymmetric: x_original = x_resized / scale; nearest_mode floor.
    H, W = x.shape[2], x.shape[3]
    hi = torch.floor(torch.arange(H * scale, dtype=torch.float64) / scale).long().clamp(max=H - 1)
    wi = torch.floor(torch.arange(W * scale, dtype=torch.float64) / scale).long().clamp(max=W - 1)
    return x[:, :, hi][:, :, :, wi]


def linear_resize(x, scale, mode):
    """Resize-13 linear (bilinear on H,W), written out from the spec's coordinate transforms:
    half_pixel: x_orig = (x_res + 0.5)/scale - 0.5; pytorch_half_pixel: same when out > 1;
    align_corners: x_orig = x_res * (in - 1)/(out - 1). Samples outside are clamped to the edge."""
    def axis_weights(n_in, n_out):
        o = torch.arange(n_out, dtype=torch.float64)
        if mode in ("half_pixel", "pytorch_half_pixel"):
            src = (o + 0.5) / scale - 0.5
        else:
            src = o * (n_in - 1) / (n_out - 1)
        src = src.clamp(0, n_in - 1)
        lo = torch.floor(src).long().clamp(max=n_in - 1)
        hi = (lo + 1).clamp(max=n_in - 1)
        frac = src - lo.double()
        M = torch.zeros(n_out, n_in, dtype=torch.float64)
        M[torch.arange(n_out), lo] += 1 - frac
        M[torch.arange(n_out), hi] += frac
        return M
    H, W = x.shape[2], x.shape[3]
    Mh, Mw = axis_weights(H, H * scale), axis_weights(W, W * scale)
    return torch.einsum("oh,nchw,pw->ncop", Mh, x, Mw)


def add_resize_cases():
    sc = np.array([1, 1, 2, 2], np.float32)
    nm = "resize_nearest_asym_floor"
    case(nm, "Resize", "nearest, asymmetric, floor, scales [1,1,2,2] (torch nearest upsample as exported)",
         "Resize-13", normal(nm, [1, 2, 3, 3]),
         [N("Resize", ["x", "", "scales"], ["y"], mode="nearest", coordinate_transformation_mode="asymmetric",
            nearest_mode="floor")], {"scales": sc}, lambda x, c: nearest_asym_floor(x, 2))
    for ctm in ("half_pixel", "pytorch_half_pixel", "align_corners"):
        nm = f"resize_linear_{ctm}"
        case(nm, "Resize", f"linear, {ctm}, scales [1,1,2,2]", "Resize-13", normal(nm, [1, 2, 3, 4]),
             [N("Resize", ["x", "", "scales"], ["y"], mode="linear", coordinate_transformation_mode=ctm)],
             {"scales": sc}, lambda x, c, ctm=ctm: linear_resize(x, 2, ctm))
    # cross-check the hand-written linear resize against torch's own bilinear (align_corners False/True)
    t = torch.randn(1, 2, 3, 4, dtype=torch.float64, generator=torch.Generator().manual_seed(1))
    assert torch.allclose(linear_resize(t, 2, "half_pixel"),
                          F.interpolate(t, scale_factor=2, mode="bilinear", align_corners=False), atol=1e-12)
    assert torch.allclose(linear_resize(t, 2, "align_corners"),
                          F.interpolate(t, scale_factor=2, mode="bilinear", align_corners=True), atol=1e-12)
    assert torch.allclose(nearest_asym_floor(t, 2), F.interpolate(t, scale_factor=2, mode="nearest"))


# ---------------------------------------------------------------- build & write
def np_dtype_to_onnx(a):
    return {np.dtype(np.float32): TensorProto.FLOAT, np.dtype(np.int64): TensorProto.INT64,
            np.dtype(bool): TensorProto.BOOL}[a.dtype]


def build_model(c, y_shape):
    inits = [numpy_helper.from_array(np.asarray(v), k) for k, v in c["inits"].items()]
    graph = helper.make_graph(
        c["nodes"], c["name"],
        [helper.make_tensor_value_info("x", TensorProto.FLOAT, list(c["x"].shape))],
        [helper.make_tensor_value_info("y", TensorProto.FLOAT, list(y_shape))],
        initializer=inits)
    model = helper.make_model(graph, opset_imports=[helper.make_opsetid("", 17)],
                              producer_name="factfoil-fixtures")
    model.ir_version = 8
    onnx.checker.check_model(model, full_check=True)
    inferred = onnx.shape_inference.infer_shapes(model, strict_mode=True)
    out = inferred.graph.output[0].type.tensor_type.shape
    got = [d.dim_value for d in out.dim]
    assert got == list(y_shape), f"{c['name']}: onnx infers {got}, torch gives {list(y_shape)}"
    return model


def torch_consts(inits):
    out = {}
    for k, v in inits.items():
        v = np.asarray(v)
        out[k] = torch.from_numpy(v.astype(np.float64)) if v.dtype == np.float32 else torch.from_numpy(v)
    return out


def write_case(c):
    name = c["name"]
    consts = torch_consts(c["inits"])
    x32 = c["x"]
    x64 = torch.from_numpy(x32.astype(np.float64))
    with torch.no_grad():
        y = c["fwd"](x64, consts)
    seed = rng_for(name + "/seed").standard_normal(tuple(y.shape)).astype(np.float32)
    seed64 = torch.from_numpy(seed.astype(np.float64))

    def s_of(xnp):
        with torch.no_grad():
            return float((seed64 * c["fwd"](torch.from_numpy(xnp), consts)).sum())
    g_fd = central_fd(s_of, x32.astype(np.float64), c["fd_eps"])
    xg = x64.clone().requires_grad_(True)
    s = (seed64 * c["fwd"](xg, consts)).sum()
    (g_t,) = torch.autograd.grad(s, xg)
    g_t = g_t.numpy()
    err = rel_l2(g_fd, g_t)
    assert err < 1e-6, f"{name}: FD vs autograd rel L2 {err:.3g}"
    assert np.linalg.norm(g_t) > 0, f"{name}: zero gradient"

    model = build_model(c, y.shape)
    d = os.path.join(OPS_DIR, name)
    os.makedirs(d, exist_ok=True)
    onnx.save(model, os.path.join(d, "model.onnx"))
    save_npy(os.path.join(d, "x.npy"), x32)
    save_npy(os.path.join(d, "seed.npy"), seed)
    save_npy(os.path.join(d, "y.npy"), y.numpy().astype(np.float64))
    save_npy(os.path.join(d, "grad_fd.npy"), g_fd)
    save_npy(os.path.join(d, "grad_torch.npy"), g_t)
    save_json(os.path.join(d, "case.json"), {
        "op": c["op"], "ops": [n.op_type for n in c["nodes"]], "notes": c["notes"], "spec": c["spec"],
        "opset": 17, "x_shape": list(x32.shape), "y_shape": list(y.shape), "fd_eps": c["fd_eps"],
        "loss": "sum(seed * y)", "fd_vs_autograd_rel_l2": err,
        "files": {"model": "model.onnx", "x": "x.npy", "seed": "seed.npy", "y": "y.npy",
                  "grad_fd": "grad_fd.npy", "grad_torch": "grad_torch.npy"},
    })
    return err


def main():
    torch.set_default_dtype(torch.float64)
    for add in (add_conv_cases, add_matmul_cases, add_unary_cases, add_softmax_cases, add_binary_cases,
                add_pool_cases, add_reduce_cases, add_norm_cases, add_shape_cases, add_resize_cases):
        add()
    names = [c["name"] for c in CASES]
    assert len(names) == len(set(names)), "duplicate case names"
    if os.path.isdir(OPS_DIR):
        shutil.rmtree(OPS_DIR)
    os.makedirs(OPS_DIR)
    worst = 0.0
    for c in CASES:
        worst = max(worst, write_case(c))
    print(f"ops: wrote {len(CASES)} cases to {OPS_DIR}; worst FD-vs-autograd rel L2 {worst:.2e}")


if __name__ == "__main__":
    main()
