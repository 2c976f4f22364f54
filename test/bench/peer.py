"""The PyTorch peer: what an engineer would write in PyTorch for the same questions, on the
same ResNet-18 weights and input as the ONNX model (made by make_models.py).

Usage: peer.py <cache dir> <group>[:<arch>] <repeats> [chunks]   (arch resnet18, the default, or resnet50)
Groups (each run in its own process so its peak RSS is its own):
  basic    forward; first map at every stage (forward + backward with hooks + Grad-CAM contrast)
  batched  exact mismatch at stage2 via torch.autograd.grad(..., is_grads_batched=True)
  vmap     exact mismatch at stage2 via functorch.vmap over functorch.vjp
  loop     exact mismatch at stage2 as a loop of 1000 torch.autograd.grad calls
Prints one JSON object: times in ms per repeat, peak RSS in MiB, and the final map.
"""
import json
import os
import resource
import sys
import time

import numpy as np
import torch
import torchvision

torch.set_num_threads(2)


def load(cache, arch="resnet18"):
    net = getattr(torchvision.models, arch)(weights=None, num_classes=1000)
    net.load_state_dict(torch.load(os.path.join(cache, f"{arch}.pt")))
    net.eval()
    x = torch.from_numpy(np.load(os.path.join(cache, "input.npy")))
    return net, x


def to_stage2(n, x):
    return n.layer2(n.layer1(n.maxpool(n.relu(n.bn1(n.conv1(x))))))


def from_stage2(n, a):
    return n.fc(torch.flatten(n.avgpool(n.layer4(n.layer3(a))), 1))


def timed(fn, repeats):
    times, out = [], None
    for _ in range(repeats):
        t = time.perf_counter()
        out = fn()
        times.append((time.perf_counter() - t) * 1e3)
    return times, out


def peak_rss_mib():
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024  # Linux: KiB


def final_map(a, p, jt_sum, sum_sq, jt_p):
    """DESIGN §4, weighted variant: G_r = Jᵀ(p − e_r); μ = mean_r G_r = Jᵀp − Jᵀ1/R;
    σ² = (1/R)Σ_r (Jᵀe_r)² − ((1/R)Jᵀ1)² (population); map = Σ_k |μ σ² A|."""
    R = 1000.0
    mu = jt_p - jt_sum / R
    var = sum_sq / R - (jt_sum / R) ** 2
    return (mu * var * a).abs().sum(1)[0]


def basic(net, x, repeats):
    with torch.no_grad():
        net(x)
        fwd, _ = timed(lambda: net(x), repeats)
    stages = [net.layer1, net.layer2, net.layer3, net.layer4]

    def first_map():
        acts = []

        def keep(o):
            # Frozen weights: the first stage output becomes the leaf, so the backward stops there.
            if o.requires_grad:
                o.retain_grad()
            else:
                o.requires_grad_(True)
            acts.append(o)

        hooks = [m.register_forward_hook(lambda _m, _i, o: keep(o)) for m in stages]
        z = net(x)
        top = torch.topk(z[0], 2).indices
        (z[0, top[0]] - z[0, top[1]]).backward()  # contrast, margin variant (DESIGN §4)
        maps = []
        for a in acts:
            alpha = a.grad.mean(dim=(2, 3), keepdim=True)  # Grad-CAM (Selvaraju et al., ICCV 2017)
            maps.append(torch.relu((alpha * a).sum(1))[0])
        for h in hooks:
            h.remove()
        net.zero_grad(set_to_none=True)
        return maps

    first_map()
    fm, maps = timed(first_map, repeats)
    return {"forward": fwd, "first_map_all_stages": fm}


def exact_batched(net, x, chunk, limit=1000):
    a = to_stage2(net, x).detach().requires_grad_(True)
    z = from_stage2(net, a)
    p = torch.softmax(z, 1).detach()
    eye = torch.eye(1000)
    sum_sq = torch.zeros_like(a)
    jt_sum = torch.zeros_like(a)
    for s in range(0, limit, chunk):
        v = eye[s:min(s + chunk, limit)].unsqueeze(1)  # [c,1,1000]
        (g,) = torch.autograd.grad(z, a, grad_outputs=v, is_grads_batched=True, retain_graph=True)
        g = g.squeeze(1)
        sum_sq += (g * g).sum(0, keepdim=True)
        jt_sum += g.sum(0, keepdim=True)
    (jt_p,) = torch.autograd.grad(z, a, grad_outputs=p)
    return final_map(a.detach(), p, jt_sum, sum_sq, jt_p)


def exact_vmap(net, x, chunk, limit=1000):
    import functorch
    with torch.no_grad():
        a = to_stage2(net, x)
    z, vjp_fn = functorch.vjp(lambda t: from_stage2(net, t), a)
    p = torch.softmax(z, 1).detach()
    batched = functorch.vmap(vjp_fn)
    eye = torch.eye(1000)
    sum_sq = torch.zeros_like(a)
    jt_sum = torch.zeros_like(a)
    for s in range(0, limit, chunk):
        v = eye[s:min(s + chunk, limit)].unsqueeze(1)
        (g,) = batched(v)
        g = g.squeeze(1)
        sum_sq += (g * g).sum(0, keepdim=True)
        jt_sum += g.sum(0, keepdim=True)
    (jt_p,) = vjp_fn(p)
    return final_map(a, p, jt_sum, sum_sq, jt_p)


def exact_loop(net, x, chunk=None, limit=1000):
    a = to_stage2(net, x).detach().requires_grad_(True)
    z = from_stage2(net, a)
    p = torch.softmax(z, 1).detach()
    sum_sq = torch.zeros_like(a)
    jt_sum = torch.zeros_like(a)
    for r in range(limit):
        (g,) = torch.autograd.grad(z[0, r], a, retain_graph=True)
        sum_sq += g * g
        jt_sum += g
    (jt_p,) = torch.autograd.grad(z, a, grad_outputs=p)
    return final_map(a.detach(), p, jt_sum, sum_sq, jt_p)


def sweep_group(fn, net, x, repeats, chunks):
    """Pick the best chunk size on a 200-class partial sweep, then time full sweeps with it."""
    tried = {}
    best = None
    if len(chunks) > 1:
        for c in chunks:
            try:
                fn(net, x, c, limit=200)
                t = time.perf_counter()
                fn(net, x, c, limit=200)
                tried[c] = (time.perf_counter() - t) * 1e3 * 5
            except Exception as e:  # an unsupported batching rule or out of memory
                tried[c] = None
                print(f"chunk {c}: {type(e).__name__}: {str(e).splitlines()[0][:200]}", file=sys.stderr)
        ok = {c: t for c, t in tried.items() if t is not None}
        best = min(ok, key=ok.get) if ok else None
    else:
        best = chunks[0]
    if best is None:
        return {"error": "no chunk size ran", "chunk_trials_ms": tried}
    times, m = timed(lambda: fn(net, x, best), repeats)
    return {"times": times, "chunk": best, "chunk_trials_ms_est": tried, "map": m.detach().flatten().tolist()}


def main():
    cache, repeats = sys.argv[1], int(sys.argv[3])
    group, _, arch = sys.argv[2].partition(":")
    chunks = [int(c) for c in sys.argv[4].split(",")] if len(sys.argv) > 4 else [50]
    net, x = load(cache, arch or "resnet18")
    for prm in net.parameters():
        prm.requires_grad_(False)  # only activation gradients are asked for
    if group == "basic":
        # Weights stay frozen: only activation gradients are needed (the faster peer; a script
        # that leaves requires_grad on also pays for weight gradients).
        res = basic(net, x, repeats)
    elif group == "batched":
        res = sweep_group(exact_batched, net, x, repeats, chunks)
    elif group == "vmap":
        res = sweep_group(exact_vmap, net, x, repeats, chunks)
    elif group == "loop":
        res = sweep_group(exact_loop, net, x, repeats, [1])
    else:
        raise SystemExit(f"unknown group {group}")
    res["peak_rss_mib"] = peak_rss_mib()
    res["torch"] = torch.__version__
    print(json.dumps(res))


if __name__ == "__main__":
    main()
