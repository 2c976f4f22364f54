"""Map-level PyTorch references -> test-fixtures/arch/<family>/maps/.

Every map kind of DESIGN §4 computed end to end in float64 with torch autograd on the same
seeded architecture fixture that make_arch.py exported (rebuilt here from the same seeds; the
rebuild is checked against the committed float64 gradient references before anything is
written). Written per layer: the raw map at layer resolution and the map upsampled to the input
with torch's bilinear interpolation (align_corners=False, which is ONNX Resize linear half_pixel
for upsampling). The formulas are restated beside each computation.

Run: /usr/bin/python3 test-fixtures/gen/make_maps.py
"""
import copy
import os
import sys

import numpy as np
import torch
import torch.nn as nn
import torch.nn.functional as F

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from common import FIXTURES_ROOT, rel_l2, rng_for, save_json, save_npy, torch_seed_for, torch_version  # noqa: E402
import make_arch  # noqa: E402

FAMILIES = {"resnet": make_arch.resnet_spec, "mobilenet_v2": make_arch.mobilenet_v2_spec}
LAYERS = {"resnet": ["stage2", "stage4"], "mobilenet_v2": None}  # None: the family's last two stages


class GuidedRelu(torch.autograd.Function):
    """Guided backpropagation (Springenberg et al., 2015): the ReLU's backward is g·[a>0]·[g>0]."""

    @staticmethod
    def forward(ctx, a):
        ctx.save_for_backward(a)
        return a.clamp(min=0)

    @staticmethod
    def backward(ctx, g):
        (a,) = ctx.saved_tensors
        return g * (a > 0) * (g > 0)


class GuidedReluModule(nn.Module):
    def forward(self, a):
        return GuidedRelu.apply(a)


def guided_copy(model):
    m = copy.deepcopy(model)
    for name, mod in list(m.named_modules()):
        for child_name, child in list(mod.named_children()):
            if isinstance(child, nn.ReLU):
                setattr(mod, child_name, GuidedReluModule())
    return m


def has_only_plain_relu(model):
    return not any(isinstance(m, (nn.ReLU6, nn.Hardswish, nn.SiLU, nn.GELU)) for m in model.modules())


def rebuild(family):
    """The model and input exactly as make_arch.make_family seeds them."""
    torch.manual_seed(torch_seed_for(family))
    torch.manual_seed(torch_seed_for(family))
    spec = FAMILIES[family]()
    make_arch.randomise(spec.model, family)
    spec.model.eval()
    S = spec.size
    x32 = torch.from_numpy(rng_for(family + "/input").standard_normal((1, 3, S, S)).astype(np.float32))
    return spec, x32


def acts_and_scores(model, taps, x):
    cap = make_arch.Capture(model, taps)
    z = model(x)
    acts = dict(cap.values)
    cap.remove()
    return z, acts


def grad_cam(g, a):
    # Grad-CAM (Selvaraju et al., ICCV 2017): α_k = GAP(∂s/∂A_k); map = ReLU(Σ_k α_k A_k).
    alpha = g.mean(dim=(2, 3), keepdim=True)
    return F.relu((alpha * a).sum(dim=1))[0]


def up(m, S):
    return F.interpolate(m[None, None], size=(S, S), mode="bilinear", align_corners=False)[0, 0]


def make(family):
    spec, x32 = rebuild(family)
    d = os.path.join(FIXTURES_ROOT, "arch", family)
    committed_x = np.load(os.path.join(d, "input.npy"))
    assert np.array_equal(committed_x, x32.numpy()[0]) or np.array_equal(committed_x, x32.numpy()), "input differs"
    S = spec.size
    layers = LAYERS[family] or spec.stages[-2:]
    taps = [t for t in spec.taps if t[0] in layers]
    m64 = copy.deepcopy(spec.model).double().eval()
    x64 = x32.double().requires_grad_(True)
    z, acts = acts_and_scores(m64, taps, x64)
    R = z.shape[1]
    order = np.argsort(-z.detach().numpy()[0])
    fact, foil = int(order[0]), int(order[1])

    # The rebuild must be the committed model: its gradient equals the committed reference.
    probe = layers[0]
    ref = np.load(os.path.join(d, f"grad_{probe}_logit_{fact}.npy"))
    (g,) = torch.autograd.grad(z[0, fact], acts[probe], retain_graph=True)
    err = rel_l2(g.detach().numpy()[0], ref)
    assert err < 1e-9, f"{family}: rebuilt model differs from the committed one (rel L2 {err:.3g})"

    out = os.path.join(d, "maps")
    os.makedirs(out, exist_ok=True)
    entries = []

    def put(kind, variant, layer, raw):
        raw = raw.detach()
        stem = f"{kind}{'_' + variant if variant else ''}_{layer}"
        save_npy(os.path.join(out, f"{stem}.raw.npy"), raw.numpy())
        if layer != "input":
            save_npy(os.path.join(out, f"{stem}.up.npy"), up(raw, S).numpy())
        entries.append({"kind": kind, "variant": variant, "layer": layer, "stem": stem})

    evidence = {}
    for layer in layers:
        A = acts[layer]
        gr = lambda s: torch.autograd.grad(s, A, retain_graph=True)[0]  # noqa: E731
        evidence[layer] = grad_cam(gr(z[0, fact]), A)
        put("evidence", None, layer, evidence[layer])
        # contrast, margin: s = z_fact − z_foil; loss: s = CE(z, foil) (DESIGN §4).
        put("contrast", "margin", layer, grad_cam(gr(z[0, fact] - z[0, foil]), A))
        put("contrast", "loss", layer, grad_cam(gr(F.cross_entropy(z, torch.tensor([foil]))), A))
        # mismatch (DESIGN §4): G_r = ∂CE(z,r)/∂A for every class r, μ and σ² (population) over r.
        G = torch.stack([gr(F.cross_entropy(z, torch.tensor([r])))[0] for r in range(R)])
        mu, var = G.mean(dim=0), G.var(dim=0, unbiased=False)
        put("mismatch", "weighted", layer, (mu * var * A[0]).abs().sum(dim=0))
        put("mismatch", "gradient", layer, (mu.abs() * var).sum(dim=0))
        # expectancy (DESIGN §4): |mean_k A| · var_k A, over channels.
        a = A[0]
        put("expectancy", None, layer, a.mean(dim=0).abs() * a.var(dim=0, unbiased=False))

    # detail: guided backpropagation of z_fact to the input, max over channels of the positive part.
    # Only where every activation is a plain ReLU (guided backpropagation is defined for ReLU).
    if not has_only_plain_relu(m64):
        return finish(family, out, entries, R, fact, foil, layers, S, err)
    mg = guided_copy(m64)
    xg = x32.double().requires_grad_(True)
    zg = mg(xg)
    (gx,) = torch.autograd.grad(zg[0, fact], xg)
    detail = gx[0].clamp(min=0).max(dim=0).values
    put("detail", None, "input", detail)
    # guided-evidence (guided Grad-CAM): detail ⊙ evidence upsampled to the input.
    for layer in layers:
        ge = detail * up(evidence[layer], S)
        save_npy(os.path.join(out, f"guided-evidence_{layer}.raw.npy"), ge.detach().numpy())
        entries.append({"kind": "guided-evidence", "variant": None, "layer": layer, "stem": f"guided-evidence_{layer}"})

    finish(family, out, entries, R, fact, foil, layers, S, err)


def finish(family, out, entries, R, fact, foil, layers, S, err):
    save_json(os.path.join(out, "maps.json"), {
        "family": family, "torch": torch_version(), "dtype": "float64", "classes": R,
        "fact": fact, "foil": foil, "layers": layers, "size": S, "entries": entries,
        "rebuild_rel_l2_vs_committed_grad": err,
    })
    print(f"{family}: {len(entries)} maps, fact {fact}, foil {foil}, layers {layers}")


if __name__ == "__main__":
    for fam in sys.argv[1:] or FAMILIES:
        make(fam)
