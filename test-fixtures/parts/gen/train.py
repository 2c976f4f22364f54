"""The parts-sorter CNN: definition, training on CPU, evaluation and ONNX export.

A small residual net (stem conv, four residual stages with BatchNorm + ReLU and stride 2
between stages, global average pool, one Linear layer to the 8 class scores). Stage
outputs get readable ONNX tensor names (stem, stage1..stage4) so the explainer can
list them as layers.
"""

import time

import numpy as np
import torch
import torch.nn as nn
import torch.nn.functional as F

STAGE_NAMES = ["stem", "stage1", "stage2", "stage3", "stage4"]
WIDTHS = [16, 16, 32, 64, 96]


class ResidualBlock(nn.Module):
    """Two 3x3 conv + BN, a projection shortcut when the shape changes, ReLU after the sum."""

    def __init__(self, c_in, c_out, stride):
        super().__init__()
        self.conv1 = nn.Conv2d(c_in, c_out, 3, stride, 1, bias=False)
        self.bn1 = nn.BatchNorm2d(c_out)
        self.conv2 = nn.Conv2d(c_out, c_out, 3, 1, 1, bias=False)
        self.bn2 = nn.BatchNorm2d(c_out)
        self.shortcut = None
        if stride != 1 or c_in != c_out:
            self.shortcut = nn.Sequential(nn.Conv2d(c_in, c_out, 1, stride, bias=False), nn.BatchNorm2d(c_out))

    def forward(self, x):
        y = F.relu(self.bn1(self.conv1(x)))
        y = self.bn2(self.conv2(y))
        s = x if self.shortcut is None else self.shortcut(x)
        return F.relu(y + s)


class PartsSorter(nn.Module):
    def __init__(self, n_classes=8):
        super().__init__()
        w = WIDTHS
        self.stem = nn.Sequential(nn.Conv2d(3, w[0], 3, 2, 1, bias=False), nn.BatchNorm2d(w[0]), nn.ReLU())
        self.stages = nn.ModuleList([
            ResidualBlock(w[0], w[1], 1),   # 56 x 56
            ResidualBlock(w[1], w[2], 2),   # 28 x 28
            ResidualBlock(w[2], w[3], 2),   # 14 x 14
            ResidualBlock(w[3], w[4], 2),   # 7 x 7
        ])
        self.head = nn.Linear(w[4], n_classes)
        self.return_stages = False

    def forward(self, x):
        feats = [self.stem(x)]
        for stage in self.stages:
            feats.append(stage(feats[-1]))
        logits = self.head(torch.flatten(F.adaptive_avg_pool2d(feats[-1], 1), 1))
        if self.return_stages:
            return (logits, *feats)
        return logits


def to_tensor(images_u8, mean, std):
    """uint8 [N,H,W,3] -> float32 [N,3,H,W]: v/255 then (v - mean)/std per channel (the sidecar's preprocessing)."""
    x = torch.from_numpy(images_u8).permute(0, 3, 1, 2).float() * (1.0 / 255.0)
    m = torch.tensor(mean, dtype=torch.float32).view(1, 3, 1, 1)
    s = torch.tensor(std, dtype=torch.float32).view(1, 3, 1, 1)
    return (x - m) / s


def train(model, x_train, y_train, epochs, seed, batch=64, lr=3e-3, log=print):
    """Adam with a one-cycle schedule (common practice, no source); returns wall seconds."""
    torch.manual_seed(seed)
    gen = torch.Generator().manual_seed(seed)
    opt = torch.optim.Adam(model.parameters(), lr=lr, weight_decay=1e-4)
    steps = epochs * ((len(x_train) + batch - 1) // batch)
    sched = torch.optim.lr_scheduler.OneCycleLR(opt, max_lr=lr, total_steps=steps)
    t0 = time.time()
    for epoch in range(epochs):
        model.train()
        order = torch.randperm(len(x_train), generator=gen)
        total, correct, loss_sum = 0, 0, 0.0
        for i in range(0, len(order), batch):
            idx = order[i:i + batch]
            xb, yb = x_train[idx], y_train[idx]
            if torch.rand(1, generator=gen).item() < 0.5:  # mirror: parts have no handedness that matters here
                xb = torch.flip(xb, dims=[3])
            out = model(xb)
            loss = F.cross_entropy(out, yb)
            opt.zero_grad()
            loss.backward()
            opt.step()
            sched.step()
            loss_sum += loss.item() * len(idx)
            correct += (out.argmax(1) == yb).sum().item()
            total += len(idx)
        log(f"epoch {epoch + 1}/{epochs}: loss {loss_sum / total:.3f}, train acc {correct / total:.3f}, {time.time() - t0:.0f} s")
    return time.time() - t0


@torch.no_grad()
def predict(model, x, batch=200):
    """Class probabilities (float32 softmax of the logits)."""
    model.eval()
    out = [F.softmax(model(x[i:i + batch]), dim=1) for i in range(0, len(x), batch)]
    return torch.cat(out).numpy()


def confusion(y_true, y_pred, n):
    m = np.zeros((n, n), dtype=int)
    for t, p in zip(y_true, y_pred):
        m[t, p] += 1
    return m


def export_onnx(model, path, size):
    """Export with named stage tensors: return them as extra outputs, then drop them from graph.output."""
    import onnx

    model.eval()
    model.return_stages = True
    dummy = torch.zeros(1, 3, size, size)
    torch.onnx.export(model, dummy, path, opset_version=17, input_names=["image"],
                      output_names=["logits"] + STAGE_NAMES, do_constant_folding=True)
    model.return_stages = False
    m = onnx.load(path)
    keep = [o for o in m.graph.output if o.name == "logits"]
    del m.graph.output[:]
    m.graph.output.extend(keep)
    m.producer_name = "factfoil-test-fixtures"
    m.doc_string = "parts-sorter: invented conveyor-belt demo classifier (test-fixtures/parts)"
    onnx.checker.check_model(m)
    onnx.save(m, path)
    return m
