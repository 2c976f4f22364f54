"""Regenerate the whole parts demo fixture: render, train, export, pick demo images, write files.

    /usr/bin/python3 test-fixtures/parts/gen/make.py

Writes, beside this folder (test-fixtures/parts/):
  parts-sorter.onnx, parts-sorter.factfoil.json, labels.txt, training.json,
  demo/<label>/*.png, demo-masks/<label>/*.png, demo/manifest.json,
  eval/<label>/*.png, eval-masks/<label>/*.png
Everything is determined by SEED; rendering runs in two worker processes.
"""

import argparse
import json
import os
import shutil
import sys
import time
from multiprocessing import Pool

import numpy as np
import torch
from PIL import Image

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import render  # noqa: E402
import train as trainer  # noqa: E402

SEED = 20240611
ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
N_CLASSES = len(render.LABELS)

# The confusions the demo wants to show, as unordered pairs of labels.
WANTED_CONFUSIONS = [("washer", "bearing"), ("hex-nut", "washer"), ("bolt", "spring")]


def _render_one(job):
    split, index = job
    label = index % N_CLASSES
    rgb, mask = render.render_sample(render.sample_seed(SEED, split, index), label)
    return rgb, mask, label


def render_split(pool, split, start, count):
    jobs = [(split, i) for i in range(start, start + count)]
    out = pool.map(_render_one, jobs, chunksize=16)
    rgb = np.stack([o[0] for o in out])
    mask = np.stack([o[1] for o in out])
    labels = np.array([o[2] for o in out], dtype=np.int64)
    return rgb, mask, labels, list(range(start, start + count))


def save_png(path, array):
    os.makedirs(os.path.dirname(path), exist_ok=True)
    Image.fromarray(array).save(path, optimize=True)


def reset_dir(path):
    if os.path.isdir(path):
        shutil.rmtree(path)


def pick_demo(model, pool, mean, std, log):
    """Render demo candidates until each wanted confusion has a misclassified example; add correct ones per class."""
    wanted = {frozenset(p): None for p in WANTED_CONFUSIONS}
    correct_by_class = {}
    other_wrong = []
    start, chunk = 0, 256
    while start < 4096 and (any(v is None for v in wanted.values()) or len(correct_by_class) < N_CLASSES):
        rgb, mask, labels, idx = render_split(pool, "demo", start, chunk)
        probs = trainer.predict(model, trainer.to_tensor(rgb, mean, std))
        for k in range(len(idx)):
            true, pred = int(labels[k]), int(probs[k].argmax())
            item = (rgb[k], mask[k], true, probs[k], idx[k])
            if pred == true:
                if true not in correct_by_class and probs[k][true] > 0.8:
                    correct_by_class[true] = item
                continue
            pair = frozenset((render.LABELS[true], render.LABELS[pred]))
            if pair in wanted and wanted[pair] is None:
                wanted[pair] = item
            else:
                other_wrong.append(item)
        start += chunk
    chosen = [v for v in wanted.values() if v is not None]
    missing = [tuple(p) for p, v in wanted.items() if v is None]
    if missing:
        log(f"warning: no misclassified demo image found for {missing}; using other mistakes")
        chosen += other_wrong[:len(missing)]
    chosen += [correct_by_class[c] for c in sorted(correct_by_class)]
    log(f"demo: {len(chosen)} images from {start} candidates")
    return chosen


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--train", type=int, default=4000, help="training images")
    ap.add_argument("--test", type=int, default=400, help="held-out test images")
    ap.add_argument("--epochs", type=int, default=6)
    ap.add_argument("--eval", type=int, default=64, help="evaluation images with masks (balanced)")
    args = ap.parse_args()
    log = lambda s: print(s, flush=True)  # noqa: E731
    torch.set_num_threads(2)
    t_start = time.time()

    with Pool(2) as pool:
        t0 = time.time()
        x_tr, _, y_tr, _ = render_split(pool, "train", 0, args.train)
        x_te, _, y_te, _ = render_split(pool, "test", 0, args.test)
        render_s = time.time() - t0
        log(f"rendered {args.train} train + {args.test} test images in {render_s:.0f} s")

        # Per-channel statistics of the training pixels after the 1/255 scale, rounded so the sidecar is exact.
        px = x_tr.reshape(-1, 3).astype(np.float64) / 255.0
        mean = [round(float(v), 3) for v in px.mean(0)]
        std = [round(float(v), 3) for v in px.std(0)]

        model = trainer.PartsSorter(N_CLASSES)
        xt, yt = trainer.to_tensor(x_tr, mean, std), torch.from_numpy(y_tr)
        train_s = trainer.train(model, xt, yt, args.epochs, SEED, log=log)
        p_tr = trainer.predict(model, xt).argmax(1)
        p_te = trainer.predict(model, trainer.to_tensor(x_te, mean, std)).argmax(1)
        acc_tr, acc_te = float((p_tr == y_tr).mean()), float((p_te == y_te).mean())
        conf = trainer.confusion(y_te, p_te, N_CLASSES)
        log(f"train acc {acc_tr:.4f}, test acc {acc_te:.4f}, training {train_s:.0f} s")

        onnx_path = os.path.join(ROOT, "parts-sorter.onnx")
        trainer.export_onnx(model, onnx_path, render.SIZE)
        with open(os.path.join(ROOT, "labels.txt"), "w") as f:
            f.write("\n".join(render.LABELS) + "\n")
        sidecar = {
            "format": "factfoil-model/1",
            "labels": "labels.txt",
            "preprocess": {"size": [render.SIZE, render.SIZE], "resize": "stretch", "channels": "RGB",
                           "layout": "NCHW", "scale": 1.0 / 255.0, "mean": mean, "std": std},
        }
        with open(os.path.join(ROOT, "parts-sorter.factfoil.json"), "w") as f:
            json.dump(sidecar, f, indent=2)
            f.write("\n")

        demo = pick_demo(model, pool, mean, std, log)
        x_ev, m_ev, y_ev, i_ev = render_split(pool, "eval", 0, args.eval)

    for d in ("demo", "demo-masks", "eval", "eval-masks"):
        reset_dir(os.path.join(ROOT, d))
    manifest = []
    for rgb, mask, true, probs, index in demo:
        label = render.LABELS[true]
        name = f"{label}-{index:04d}.png"
        save_png(os.path.join(ROOT, "demo", label, name), rgb)
        save_png(os.path.join(ROOT, "demo-masks", label, name), (mask * 255).astype(np.uint8))
        top = np.argsort(-probs)[:3]
        pred = render.LABELS[int(top[0])]
        manifest.append({
            "image": f"{label}/{name}", "mask": f"../demo-masks/{label}/{name}",
            "expected": label, "predicted": pred, "misclassified": pred != label,
            "top3": [{"label": render.LABELS[int(c)], "p": round(float(probs[c]), 6)} for c in top],
        })
    with open(os.path.join(ROOT, "demo", "manifest.json"), "w") as f:
        json.dump({"format": "factfoil-parts-demo/1", "model": "../parts-sorter.onnx",
                   "probabilities": "PyTorch float32 softmax of the logits", "images": manifest}, f, indent=2)
        f.write("\n")
    for k in range(len(i_ev)):
        label = render.LABELS[int(y_ev[k])]
        name = f"{label}-{i_ev[k]:04d}.png"
        save_png(os.path.join(ROOT, "eval", label, name), x_ev[k])
        save_png(os.path.join(ROOT, "eval-masks", label, name), (m_ev[k] * 255).astype(np.uint8))

    report = {
        "seed": SEED, "labels": render.LABELS, "image_size": render.SIZE,
        "images": {"train": args.train, "test": args.test, "eval": args.eval, "demo": len(demo)},
        "epochs": args.epochs, "optimizer": "Adam, one-cycle lr 3e-3, batch 64, weight decay 1e-4, random mirror",
        "train_accuracy": round(acc_tr, 4), "test_accuracy": round(acc_te, 4),
        "confusion_matrix": {"rows": "expected", "cols": "predicted", "matrix": conf.tolist()},
        "torch_version": torch.__version__, "threads": torch.get_num_threads(),
        "render_seconds": round(render_s, 1), "training_seconds": round(train_s, 1),
        "total_seconds": round(time.time() - t_start, 1),
        "parameters": int(sum(p.numel() for p in model.parameters())),
    }
    with open(os.path.join(ROOT, "training.json"), "w") as f:
        json.dump(report, f, indent=2)
        f.write("\n")
    log(json.dumps({k: report[k] for k in ("test_accuracy", "training_seconds", "total_seconds")}))
    for r, row in enumerate(conf):
        log(f"{render.LABELS[r]:>8}: {' '.join(f'{v:3d}' for v in row)}")


if __name__ == "__main__":
    main()
