"""Architecture-family fixtures -> test-fixtures/arch/<family>/.

Each family is a torchvision architecture (or one built from torchvision's own blocks) at
small width and input size, with seeded random weights (BatchNorm statistics and affine
parameters randomised too, so BN is not the identity), in eval mode. The ONNX export names
chosen intermediate tensors (stage/block outputs and one inner tensor) by exporting them as
extra graph outputs, which are then removed again, so the committed model has exactly one
output while the tensors keep their names inside the graph.

Reference gradients are computed in float64 with torch autograd on a float64 copy of the
model, fed the float32 input cast up, for s = z[target] ("logit") or s = CE(z, target) ("ce"),
z the scores (the model output, or the input of a trailing Softmax).
"""
import copy
import os
import re
import shutil
import sys

import numpy as np
import onnx
import torch
import torch.nn as nn
import torch.nn.functional as F
import torchvision
from torchvision.models import resnet as tv_resnet

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from common import FIXTURES_ROOT, rel_l2, rng_for, save_json, save_npy, torch_seed_for  # noqa: E402

ARCH_DIR = os.path.join(FIXTURES_ROOT, "arch")
# Not committed: the export before the extra outputs are removed, plus the torch float32 tap
# values, so check_with_ort.mjs can confirm each named tensor holds the tensor torch hooked.
CHECK_DIR = os.environ.get("FACTFOIL_FIXTURE_CHECK_DIR", "/tmp/factfoil-fixture-check")
NUM_CLASSES = 10


# ---------------------------------------------------------------- family specs
class Spec:
    """model: nn.Module; size: input side S; taps: [(tensor name, module path, 'out'|'in')];
    stages: tap names we believe are cut points (every input->scores path passes through them)."""

    def __init__(self, model, size, taps, stages, softmax=False, notes=""):
        self.model, self.size, self.taps, self.stages = model, size, taps, stages
        self.softmax, self.notes = softmax, notes


class SmallResNet(tv_resnet.ResNet):
    """torchvision's ResNet (its blocks, _make_layer and forward) with chosen stage widths.
    torchvision hard-codes widths 64..512; this only changes those numbers."""

    def __init__(self, block, layers, widths, groups=1, width_per_group=64, num_classes=NUM_CLASSES):
        nn.Module.__init__(self)
        self._norm_layer = nn.BatchNorm2d
        self.inplanes = widths[0]
        self.dilation = 1
        self.groups = groups
        self.base_width = width_per_group
        self.conv1 = nn.Conv2d(3, self.inplanes, kernel_size=7, stride=2, padding=3, bias=False)
        self.bn1 = nn.BatchNorm2d(self.inplanes)
        self.relu = nn.ReLU(inplace=False)
        self.maxpool = nn.MaxPool2d(kernel_size=3, stride=2, padding=1)
        self.layer1 = self._make_layer(block, widths[0], layers[0])
        self.layer2 = self._make_layer(block, widths[1], layers[1], stride=2)
        self.layer3 = self._make_layer(block, widths[2], layers[2], stride=2)
        self.layer4 = self._make_layer(block, widths[3], layers[3], stride=2)
        self.avgpool = nn.AdaptiveAvgPool2d((1, 1))
        self.fc = nn.Linear(widths[3] * block.expansion, num_classes)
        for m in self.modules():
            if isinstance(m, nn.Conv2d):
                nn.init.kaiming_normal_(m.weight, mode="fan_out", nonlinearity="relu")


def resnet_spec(softmax=False):
    m = SmallResNet(tv_resnet.BasicBlock, [2, 2, 2, 2], [8, 16, 32, 64])
    taps = [("stem", "maxpool", "out"), ("stage1", "layer1", "out"), ("stage2", "layer2", "out"),
            ("stage3", "layer3", "out"), ("stage4", "layer4", "out"),
            ("stage3_block0_inner", "layer3.0.conv2", "in")]
    return Spec(m, 64, taps, ["stem", "stage1", "stage2", "stage3", "stage4"], softmax=softmax,
                notes="torchvision ResNet, BasicBlock [2,2,2,2] (resnet18 layout) at 1/8 width")


def resnext_spec():
    m = SmallResNet(tv_resnet.Bottleneck, [1, 1, 1, 1], [8, 16, 32, 64], groups=4, width_per_group=16)
    taps = [("stem", "maxpool", "out"), ("stage1", "layer1", "out"), ("stage2", "layer2", "out"),
            ("stage3", "layer3", "out"), ("stage4", "layer4", "out"),
            ("stage2_block0_grouped_inner", "layer2.0.conv3", "in")]
    return Spec(m, 64, taps, ["stem", "stage1", "stage2", "stage3", "stage4"],
                notes="torchvision ResNet with Bottleneck, groups 4 (ResNeXt), layers [1,1,1,1], small widths")


def mobilenet_v2_spec():
    m = torchvision.models.MobileNetV2(num_classes=NUM_CLASSES, width_mult=0.25)
    taps = [("stage1", "features.1", "out"), ("stage2", "features.3", "out"), ("stage3", "features.6", "out"),
            ("stage4", "features.13", "out"), ("stage5", "features.17", "out"), ("last_conv", "features.18", "out"),
            ("block14_expand_inner", "features.14.conv.0", "out")]
    return Spec(m, 64, taps, ["stage1", "stage2", "stage3", "stage4", "stage5", "last_conv"],
                notes="torchvision MobileNetV2, width_mult 0.25 (ReLU6 exports as Clip)")


def mobilenet_v3_spec():
    from torchvision.models.mobilenetv3 import MobileNetV3, _mobilenet_v3_conf
    setting, last = _mobilenet_v3_conf("mobilenet_v3_small", width_mult=0.5)
    m = MobileNetV3(setting, last, num_classes=NUM_CLASSES)
    taps = [("stage1", "features.1", "out"), ("stage2", "features.3", "out"), ("stage3", "features.8", "out"),
            ("stage4", "features.11", "out"), ("last_conv", "features.12", "out"),
            ("block4_expand_inner", "features.4.block.0", "out")]
    return Spec(m, 64, taps, ["stage1", "stage2", "stage3", "stage4", "last_conv"],
                notes="torchvision MobileNetV3-small, width_mult 0.5 (HardSwish, HardSigmoid in squeeze-excite)")


def efficientnet_spec():
    from torchvision.models.efficientnet import EfficientNet, _efficientnet_conf
    setting, last = _efficientnet_conf("efficientnet_b0", width_mult=0.25, depth_mult=0.34)
    m = EfficientNet(setting, dropout=0.2, stochastic_depth_prob=0.0, num_classes=NUM_CLASSES, last_channel=last)
    taps = [("stage1", "features.1", "out"), ("stage2", "features.2", "out"), ("stage3", "features.3", "out"),
            ("stage5", "features.5", "out"), ("stage7", "features.7", "out"), ("last_conv", "features.8", "out"),
            ("stage4_block0_depthwise_inner", "features.4.0.block.1", "out")]
    return Spec(m, 64, taps, ["stage1", "stage2", "stage3", "stage5", "stage7", "last_conv"],
                notes="torchvision EfficientNet-b0 layout, width 0.25, depth 0.34 (SiLU = Sigmoid*Mul, squeeze-excite)")


def densenet_spec():
    m = torchvision.models.DenseNet(growth_rate=8, block_config=(2, 2, 2, 2), num_init_features=16, bn_size=2,
                                    num_classes=NUM_CLASSES)
    taps = [("stem", "features.pool0", "out"), ("dense1", "features.denseblock1", "out"),
            ("transition1", "features.transition1", "out"), ("transition2", "features.transition2", "out"),
            ("transition3", "features.transition3", "out"), ("dense4", "features.denseblock4", "out"),
            ("dense2_layer1_inner", "features.denseblock2.denselayer1", "out")]
    return Spec(m, 64, taps, ["stem", "dense1", "transition1", "transition2", "transition3", "dense4"],
                notes="torchvision DenseNet, growth 8, blocks (2,2,2,2) (Concat, BatchNormalization before Conv, AveragePool)")


def squeezenet_spec():
    from torchvision.models.squeezenet import Fire
    m = torchvision.models.SqueezeNet(version="1_1", num_classes=NUM_CLASSES)
    # squeezenet1_1 layout at 1/4 width
    m.features = nn.Sequential(
        nn.Conv2d(3, 16, kernel_size=3, stride=2), nn.ReLU(),
        nn.MaxPool2d(kernel_size=3, stride=2, ceil_mode=True),
        Fire(16, 4, 16, 16), Fire(32, 4, 16, 16),
        nn.MaxPool2d(kernel_size=3, stride=2, ceil_mode=True),
        Fire(32, 8, 32, 32), Fire(64, 8, 32, 32),
        nn.MaxPool2d(kernel_size=3, stride=2, ceil_mode=True),
        Fire(64, 12, 48, 48), Fire(96, 12, 48, 48), Fire(96, 16, 64, 64), Fire(128, 16, 64, 64))
    final = nn.Conv2d(128, NUM_CLASSES, kernel_size=1)
    m.classifier[1] = final
    for mod in m.features.modules():
        if isinstance(mod, nn.Conv2d):
            nn.init.kaiming_uniform_(mod.weight)
            nn.init.uniform_(mod.bias, -0.1, 0.1)
    nn.init.normal_(final.weight, 0, 0.2)
    taps = [("stem", "features.2", "out"), ("stage1", "features.4", "out"), ("stage2", "features.7", "out"),
            ("stage3", "features.12", "out"), ("fire9_expand3x3_inner", "features.9.expand3x3_activation", "out")]
    # S = 66 so every ceil_mode MaxPool has a partial last window (32->16, 16->8, 8->4).
    return Spec(m, 66, taps, ["stem", "stage1", "stage2", "stage3"],
                notes="torchvision SqueezeNet 1.1 layout from its Fire module at 1/4 width; MaxPool ceil_mode with partial windows")


def shufflenet_v2_spec():
    m = torchvision.models.ShuffleNetV2([2, 2, 2], [8, 16, 32, 64, 128], num_classes=NUM_CLASSES)
    taps = [("stem", "maxpool", "out"), ("stage2", "stage2", "out"), ("stage3", "stage3", "out"),
            ("stage4", "stage4", "out"), ("last_conv", "conv5", "out"),
            ("stage3_unit1_branch_inner", "stage3.1.branch2", "out")]
    return Spec(m, 64, taps, ["stem", "stage2", "stage3", "stage4", "last_conv"],
                notes="torchvision ShuffleNetV2, repeats [2,2,2], channels [8,16,32,64,128] (chunk -> Split, channel shuffle)")


def regnet_spec():
    from torchvision.models.regnet import BlockParams, RegNet
    bp = BlockParams.from_init_params(depth=6, w_0=8, w_a=8.0, w_m=2.0, group_width=8, se_ratio=0.25)
    m = RegNet(bp, num_classes=NUM_CLASSES, stem_width=16)
    names = [n for n, _ in m.trunk_output.named_children()]
    taps = [("stem", "stem", "out")] + [(f"stage{i + 1}", f"trunk_output.{n}", "out") for i, n in enumerate(names)]
    taps.append(("stage2_block0_grouped_inner", f"trunk_output.{names[1]}.{names[1]}-0.f.b", "out"))
    return Spec(m, 64, taps, ["stem"] + [f"stage{i + 1}" for i in range(len(names))],
                notes="torchvision RegNet-Y style (squeeze-excite 0.25, group width 8), small widths, depth 6")


def googlenet_spec():
    from torchvision.models.googlenet import BasicConv2d, GoogLeNet, Inception

    def small_conv(c_in, c_out, **kw):  # 1/8 of torchvision's widths (the RGB input stays 3)
        return BasicConv2d(c_in if c_in == 3 else c_in // 8, c_out // 8, **kw)

    def small_inception(*ch, conv_block=None):
        return Inception(*[c // 8 for c in ch])
    m = GoogLeNet(num_classes=NUM_CLASSES, aux_logits=False, transform_input=False, init_weights=True,
                  blocks=[small_conv, small_inception, None])
    m.fc = nn.Linear(128, NUM_CLASSES)
    taps = [("stem", "maxpool2", "out"), ("inception3b", "inception3b", "out"), ("inception4e", "inception4e", "out"),
            ("inception5b", "inception5b", "out"), ("inception4a_branch3x3_inner", "inception4a.branch2", "out")]
    return Spec(m, 64, taps, ["stem", "inception3b", "inception4e", "inception5b"],
                notes="torchvision GoogLeNet at 1/8 width, aux_logits off, transform_input False; ceil_mode MaxPool with partial windows")


def mnasnet_spec():
    m = torchvision.models.MNASNet(alpha=0.25, num_classes=NUM_CLASSES)
    taps = [("stem", "layers.7", "out"), ("stage1", "layers.8", "out"), ("stage2", "layers.9", "out"),
            ("stage4", "layers.11", "out"), ("stage6", "layers.13", "out"), ("last_conv", "layers.16", "out"),
            ("stage3_block0_expand_inner", "layers.10.0.layers.2", "out")]
    return Spec(m, 64, taps, ["stem", "stage1", "stage2", "stage4", "stage6", "last_conv"],
                notes="torchvision MNASNet, alpha 0.25")


def vgg_spec():
    from torchvision.models.vgg import VGG, make_layers
    cfg = [8, "M", 16, "M", 32, 32, "M", 64, 64, "M", 64, 64, "M"]  # VGG-11 ("A") layout at 1/8 width
    m = VGG(make_layers(cfg, batch_norm=False), num_classes=NUM_CLASSES, init_weights=True)
    m.avgpool = nn.Identity()  # input 64 leaves 2x2; flatten it as VGG flattens its 7x7
    m.classifier = nn.Sequential(nn.Linear(64 * 2 * 2, 64), nn.ReLU(), nn.Dropout(), nn.Linear(64, 64), nn.ReLU(),
                                 nn.Dropout(), nn.Linear(64, NUM_CLASSES))
    taps = [("pool1", "features.2", "out"), ("pool2", "features.5", "out"), ("pool3", "features.10", "out"),
            ("pool4", "features.15", "out"), ("pool5", "features.20", "out"), ("conv4_1_relu", "features.12", "out")]
    return Spec(m, 64, taps, ["pool1", "pool2", "pool3", "conv4_1_relu", "pool4", "pool5"],
                notes="torchvision VGG-11 layout at 1/8 width, no BN, MaxPool; a plain chain, so every tap is a cut point")


def convnext_spec():
    from torchvision.models.convnext import CNBlock, CNBlockConfig, ConvNeXt
    setting = [CNBlockConfig(8, 16, 1), CNBlockConfig(16, 32, 1), CNBlockConfig(32, 64, 2), CNBlockConfig(64, None, 1)]
    m = ConvNeXt(setting, stochastic_depth_prob=0.0, layer_scale=0.5, num_classes=NUM_CLASSES)
    g = torch.Generator().manual_seed(torch_seed_for("convnext/layer_scale"))
    for mod in m.modules():
        if isinstance(mod, CNBlock):  # layer_scale 1e-6 by default would hide the residual branch
            with torch.no_grad():
                mod.layer_scale.copy_(torch.rand(mod.layer_scale.shape, generator=g) * 0.5 + 0.5)
    taps = [("stage1", "features.1", "out"), ("stage2", "features.3", "out"), ("stage3", "features.5", "out"),
            ("stage4", "features.7", "out"), ("stage2_block0_dwconv_inner", "features.3.0.block.0", "out")]
    return Spec(m, 64, taps, ["stage1", "stage2", "stage3", "stage4"],
                notes="torchvision ConvNeXt from CNBlock, depths [1,1,2,1], widths [8,16,32,64] "
                      "(LayerNormalization, GELU via Erf, MatMul on NHWC, Transpose)")


def vit_spec():
    from torchvision.models.vision_transformer import VisionTransformer
    # 3 heads: torch 1.13's MultiheadAttention takes a fused fast path without an ONNX export
    # for an even head count under no_grad; an odd count keeps the plain ops.
    m = VisionTransformer(image_size=32, patch_size=8, num_layers=3, num_heads=3, hidden_dim=36, mlp_dim=72,
                          num_classes=NUM_CLASSES)
    with torch.no_grad():  # class token and position embedding start at zeros / small; randomise
        g = torch.Generator().manual_seed(torch_seed_for("vit/tokens"))
        m.class_token.copy_(torch.randn(m.class_token.shape, generator=g) * 0.5)
        m.encoder.pos_embedding.copy_(torch.randn(m.encoder.pos_embedding.shape, generator=g) * 0.2)
    taps = [("patch_embed", "conv_proj", "out"), ("block1", "encoder.layers.encoder_layer_0", "out"),
            ("block2", "encoder.layers.encoder_layer_1", "out"), ("block3", "encoder.layers.encoder_layer_2", "out"),
            ("encoder_out", "encoder.ln", "out"), ("block2_mlp_inner", "encoder.layers.encoder_layer_1.mlp", "out")]
    return Spec(m, 32, taps, ["patch_embed", "block1", "block2", "block3", "encoder_out"],
                notes="torchvision VisionTransformer, image 32, patch 8 (16 patches + class token), 3 layers, "
                      "3 heads, hidden 36")


class ExtrasNet(nn.Module):
    """Our own small net covering ops the other families do not reach."""

    def __init__(self):
        super().__init__()
        self.conv1 = nn.Conv2d(3, 8, 3, padding=1)
        self.act1 = nn.LeakyReLU(0.1)
        self.pad = nn.ReflectionPad2d(1)
        self.conv2 = nn.Conv2d(8, 8, 3, stride=2)
        self.act2 = nn.PReLU(8, init=0.2)
        self.zpad = nn.ConstantPad2d((1, 1, 1, 1), 0.0)
        self.conv3 = nn.Conv2d(8, 12, 3)
        self.act3 = nn.ELU(0.7)
        self.up_nearest = nn.Upsample(scale_factor=2, mode="nearest")
        self.conv4 = nn.Conv2d(12, 12, 3, stride=2, padding=1)
        self.act4 = nn.Tanh()
        self.conv5 = nn.Conv2d(12, 16, 3, stride=2, padding=1)
        self.act5 = nn.Softplus()
        self.up_linear = nn.Upsample(scale_factor=2, mode="bilinear", align_corners=False)
        self.drop = nn.Dropout(0.3)
        self.ident = nn.Identity()
        self.fc = nn.Linear(16, NUM_CLASSES)

    def normalise(self, t):
        # Sub, Pow, ReduceMean, Add, Sqrt, Div
        m = t.mean(dim=(2, 3), keepdim=True)
        d = t - m
        v = d.pow(2).mean(dim=(2, 3), keepdim=True)
        return d / torch.sqrt(v + 1e-3)

    def forward(self, x):
        t = self.act1(self.conv1(x))                  # 32
        t = self.act2(self.conv2(self.pad(t)))        # 16
        t = self.act3(self.conv3(self.zpad(t)))       # 16
        t = self.up_nearest(t)                        # 32
        t = self.act4(self.conv4(t))                  # 16
        t = self.act5(self.conv5(t))                  # 8
        t = self.up_linear(t)                         # 16
        t = self.normalise(t)
        gate = (t > 0).to(t.dtype)                    # Greater + Cast (no gradient through the mask)
        t = t * gate + 0.1 * t
        t = self.ident(self.drop(t))
        pooled = t.sum(dim=(2, 3)) / float(t.shape[2] * t.shape[3])   # ReduceSum + Div
        pooled = pooled.unsqueeze(-1).unsqueeze(-1).squeeze(-1).squeeze(-1)  # Unsqueeze/Squeeze
        return self.fc(pooled)


def extras_spec():
    m = ExtrasNet()
    taps = [("stage1_prelu", "act2", "out"), ("stage2_elu", "act3", "out"), ("stage3_tanh", "act4", "out"),
            ("stage4_softplus", "act5", "out"), ("stage5_upsampled", "up_linear", "out")]
    return Spec(m, 32, taps, ["stage1_prelu", "stage2_elu", "stage3_tanh", "stage4_softplus", "stage5_upsampled"],
                notes="own design: LeakyRelu, reflect/constant Pad, PRelu, Elu, nearest and bilinear Resize, Tanh, "
                      "Softplus, Sub/Pow/ReduceMean/Sqrt/Div normalisation, Greater+Cast mask, ReduceSum, Squeeze/Unsqueeze")


FAMILIES = {
    "resnet": resnet_spec,
    "resnet_softmax": lambda: resnet_spec(softmax=True),
    "resnext": resnext_spec,
    "mobilenet_v2": mobilenet_v2_spec,
    "mobilenet_v3": mobilenet_v3_spec,
    "efficientnet": efficientnet_spec,
    "densenet": densenet_spec,
    "squeezenet": squeezenet_spec,
    "shufflenet_v2": shufflenet_v2_spec,
    "regnet": regnet_spec,
    "googlenet": googlenet_spec,
    "mnasnet": mnasnet_spec,
    "vgg": vgg_spec,
    "convnext": convnext_spec,
    "vit": vit_spec,
    "extras": extras_spec,
}


# ---------------------------------------------------------------- weights
def randomise(model, name):
    """Seeded: BN running stats and affine params away from identity; the classifier
    re-drawn at a scale that gives logits of order 1 (torchvision inits some heads near 0)."""
    g = torch.Generator().manual_seed(torch_seed_for(name + "/bn"))
    with torch.no_grad():
        for m in model.modules():
            if isinstance(m, (nn.BatchNorm2d, nn.BatchNorm1d)):
                n = m.num_features
                m.running_mean.copy_(torch.randn(n, generator=g) * 0.2)
                m.running_var.copy_(torch.rand(n, generator=g) * 1.5 + 0.5)
                m.weight.copy_(torch.rand(n, generator=g) + 0.5)
                m.bias.copy_(torch.randn(n, generator=g) * 0.2)
            if isinstance(m, nn.LayerNorm):
                m.weight.copy_(torch.rand(m.weight.shape, generator=g) + 0.5)
                m.bias.copy_(torch.randn(m.bias.shape, generator=g) * 0.2)
            if isinstance(m, nn.Linear) and m.out_features == NUM_CLASSES:
                m.weight.copy_(torch.randn(m.weight.shape, generator=g) * (2.0 / m.in_features) ** 0.5)
                m.bias.copy_(torch.randn(m.bias.shape, generator=g) * 0.1)
            if hasattr(m, "inplace"):
                m.inplace = False  # hooks must see tensors nobody overwrites


# ---------------------------------------------------------------- capture
class Capture:
    """Forward hooks that record each tap once per forward pass."""

    def __init__(self, model, taps):
        self.values = {}
        self.handles = []
        for tname, path, where in taps:
            mod = model.get_submodule(path)
            if where == "out":
                h = mod.register_forward_hook(lambda m, i, o, n=tname: self._put(n, o))
            else:
                h = mod.register_forward_pre_hook(lambda m, i, n=tname: self._put(n, i[0]))
            self.handles.append(h)

    def _put(self, name, value):
        assert name not in self.values, f"tap {name} fired twice (shared module?)"
        assert isinstance(value, torch.Tensor), f"tap {name} is not a tensor"
        self.values[name] = value

    def reset(self):
        self.values = {}

    def remove(self):
        for h in self.handles:
            h.remove()


class ExportWrapper(nn.Module):
    def __init__(self, model, taps, softmax):
        super().__init__()
        self.model, self.tap_names, self.softmax = model, [t[0] for t in taps], softmax
        self.capture = Capture(model, taps)

    def forward(self, x):
        self.capture.reset()
        z = self.model(x)
        extras = [self.capture.values[n] for n in self.tap_names]
        if self.softmax:
            return (torch.softmax(z, dim=1), z, *extras)
        return (z, *extras)


def export_onnx(spec, x32, path):
    wrapper = ExportWrapper(spec.model, spec.taps, spec.softmax).eval()
    tap_names = [t[0] for t in spec.taps]
    out_names = (["probs", "logits"] if spec.softmax else ["logits"]) + tap_names
    with torch.no_grad():
        torch.onnx.export(wrapper, (x32,), path, input_names=["input"], output_names=out_names,
                          opset_version=17, do_constant_folding=True)
    with torch.no_grad():
        outs = wrapper(x32)
    wrapper.capture.remove()
    model = onnx.load(path)
    check_dir = os.path.join(CHECK_DIR, os.path.basename(os.path.dirname(path)))
    os.makedirs(check_dir, exist_ok=True)
    onnx.save(model, os.path.join(check_dir, "full.onnx"))
    for n, v in zip(out_names, outs):
        save_npy(os.path.join(check_dir, f"{n}.npy"), v.numpy())
    save_json(os.path.join(check_dir, "outputs.json"), out_names)
    keep = out_names[0]
    extra = [o for o in model.graph.output if o.name != keep]
    for o in extra:
        model.graph.output.remove(o)
    assert [o.name for o in model.graph.output] == [keep]
    onnx.checker.check_model(model)
    onnx.save(model, path)
    return model


def verify_graph(model, layers):
    """Every named layer tensor exists, is produced by a node, is consumed by a node (so it lies
    on a path to the scores), and, where ONNX static shape inference can resolve it, has the torch
    shape. Some exports compute shapes at run time (Shape -> ... -> Reshape/Pad), which static
    inference cannot follow; those tensors are returned (check_with_ort.mjs checks their run-time
    shapes)."""
    inferred = onnx.shape_inference.infer_shapes(model, data_prop=True)
    shapes = {}
    for vi in list(inferred.graph.value_info) + list(inferred.graph.input) + list(inferred.graph.output):
        shapes[vi.name] = [d.dim_value if d.HasField("dim_value") else None for d in vi.type.tensor_type.shape.dim]
    produced = {o for n in model.graph.node for o in n.output} | {i.name for i in model.graph.input}
    consumed = {i for n in model.graph.node for i in n.input}
    unresolved = []
    for layer in layers:
        t = layer["tensor"]
        assert t in produced, f"tensor {t} not in graph"
        assert t in consumed, f"tensor {t} has no consumer (dangling)"
        want = [1] + layer["shape"]
        got = shapes.get(t)
        if got is None or len(got) != len(want) or any(g in (None, 0) for g in got):
            unresolved.append(t)
            continue
        assert got == want, f"tensor {t}: onnx shape {got} vs torch {want}"
    return sorted({n.op_type for n in model.graph.node}), unresolved


def fd_spot_check(m64, x64, target, grad, family, n=4, eps=1e-6):
    """Central FD of z[target] at a few input pixels of the float64 model, against autograd:
    guards against hook or capture mistakes (an independent path to the same numbers)."""
    idx = rng_for(family + "/fd").choice(x64.numel(), n, replace=False)
    flat = x64.clone().reshape(-1)
    with torch.no_grad():
        for i in idx:
            xp, xm = flat.clone(), flat.clone()
            xp[i] += eps
            xm[i] -= eps
            fd = (m64(xp.reshape(x64.shape))[0, target] - m64(xm.reshape(x64.shape))[0, target]) / (2 * eps)
            ad = grad.reshape(-1)[i]
            assert abs(fd - ad) <= 1e-6 * max(1.0, abs(ad)) + 1e-7, f"{family}: FD {fd} vs autograd {ad} at {i}"


def safe(name):
    return re.sub(r"[^A-Za-z0-9_.-]", "_", name)


def make_family(family, build):
    # resnet_softmax is the resnet (same weights, same input) with a trailing Softmax
    base = "resnet" if family == "resnet_softmax" else family
    torch.manual_seed(torch_seed_for(base))
    spec = build()
    randomise(spec.model, base)
    spec.model.eval()
    S = spec.size
    x32 = torch.from_numpy(rng_for(base + "/input").standard_normal((1, 3, S, S)).astype(np.float32))

    d = os.path.join(ARCH_DIR, family)
    os.makedirs(d, exist_ok=True)
    model_path = os.path.join(d, "model.onnx")

    # float32 torch reference run (also records tap shapes)
    cap = Capture(spec.model, spec.taps)
    with torch.no_grad():
        z32 = spec.model(x32)
    shapes = {n: list(v.shape[1:]) for n, v in cap.values.items()}
    cap.remove()
    onnx_model = export_onnx(spec, x32, model_path)

    # float64 gradients
    m64 = copy.deepcopy(spec.model).double().eval()
    cap = Capture(m64, spec.taps)
    x64 = x32.double().requires_grad_(True)
    z64 = m64(x64)
    acts = dict(cap.values)
    cap.remove()
    acts["input"] = x64
    shapes["input"] = [3, S, S]
    err32 = rel_l2(z32.numpy(), z64.detach().numpy())
    assert err32 < 1e-4, f"{family}: float32 vs float64 logits rel L2 {err32:.3g}"
    zs = z64.detach().numpy()[0]
    order = np.argsort(-zs)
    t_top, t_other = int(order[0]), int(order[1])

    layers = [{"tensor": "input", "shape": shapes["input"]}] + [
        {"tensor": n, "shape": shapes[n]} for n, _, _ in spec.taps]
    op_types, unresolved = verify_graph(onnx_model, layers)

    checks = [("input", "logit", t_top)]
    for n, _, _ in spec.taps:
        checks += [(n, "logit", t_top), (n, "ce", t_other)]
    # PyTorch's own float32 gradients, to measure how well-conditioned each reference is: near-ties
    # in max pooling can flip the arg-max between float32 and float64 (seen on googlenet).
    m32 = copy.deepcopy(spec.model).float().eval()
    cap32 = Capture(m32, spec.taps)
    x32g = x32.clone().requires_grad_(True)
    z32g = m32(x32g)
    acts32 = dict(cap32.values)
    cap32.remove()
    acts32["input"] = x32g
    check_rows = []
    for layer, loss, target in checks:
        s32 = z32g[0, target] if loss == "logit" else F.cross_entropy(z32g, torch.tensor([target]))
        (g32,) = torch.autograd.grad(s32, acts32[layer], retain_graph=True)
        s = z64[0, target] if loss == "logit" else F.cross_entropy(z64, torch.tensor([target]))
        (g,) = torch.autograd.grad(s, acts[layer], retain_graph=True)
        g = g.detach().numpy()[0].astype(np.float64)
        assert np.linalg.norm(g) > 0, f"{family}: zero gradient at {layer}"
        if layer == "input":
            fd_spot_check(m64, x64.detach(), target, g, family)
        fname = f"grad_{safe(layer)}_{loss}_{target}.npy"
        save_npy(os.path.join(d, fname), g)
        torch32 = rel_l2(g32.detach().numpy()[0].astype(np.float64), g)
        check_rows.append({"layer": layer, "loss": loss, "target": target, "grad": fname, "torch_float32_rel_l2": torch32})

    save_npy(os.path.join(d, "input.npy"), x32.numpy())
    with torch.no_grad():
        out32 = torch.softmax(z32, 1) if spec.softmax else z32
    save_json(os.path.join(d, "refs.json"), {
        "family": family,
        "notes": spec.notes,
        "model": "model.onnx",
        "input": "input.npy",
        "input_name": "input",
        "input_shape": [1, 3, S, S],
        "output": "probs" if spec.softmax else "logits",
        "output_values": [float(v) for v in out32.numpy()[0]],
        "scores": "logits",
        "num_classes": NUM_CLASSES,
        "logits": [float(v) for v in zs],
        "logits_float32_vs_float64_rel_l2": err32,
        "layers": layers,
        "checks": check_rows,
        "stages_expected": spec.stages,
        "static_shape_unresolved": unresolved,
        "op_types": op_types,
        "opset": 17,
        "torch_version": torch.__version__,
        "torchvision_version": torchvision.__version__,
    })
    size = sum(os.path.getsize(os.path.join(d, f)) for f in os.listdir(d))
    print(f"arch/{family}: S={S} ops={len(op_types)} layers={len(layers)} checks={len(check_rows)} "
          f"f32/f64 logits rel {err32:.1e} size {size / 1024:.0f} KiB")


def main(only):
    torch.set_default_dtype(torch.float32)
    names = only or list(FAMILIES)
    for n in names:
        if n not in FAMILIES:
            raise SystemExit(f"unknown family {n}; known: {', '.join(FAMILIES)}")
    if not only and os.path.isdir(ARCH_DIR):
        shutil.rmtree(ARCH_DIR)
    for n in names:
        d = os.path.join(ARCH_DIR, n)
        if os.path.isdir(d):
            shutil.rmtree(d)
        make_family(n, FAMILIES[n])


if __name__ == "__main__":
    main(sys.argv[1:])
