"""Shared helpers for the fixture generators (seeded RNG, .npy/.json writing, FD)."""
import json
import os
import zlib

import numpy as np
import torch

FIXTURES_ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def rng_for(name: str, base: int = 20260) -> np.random.Generator:
    """A generator seeded from the case name, so a case's data does not depend on
    the order or number of other cases."""
    return np.random.default_rng(base + zlib.crc32(name.encode()))


def torch_seed_for(name: str, base: int = 20260) -> int:
    return (base + zlib.crc32(name.encode())) % (2**31)


def save_npy(path: str, array: np.ndarray) -> None:
    # np.save writes format version 1.0 for these small arrays (the version the project reads).
    np.save(path, np.ascontiguousarray(array), allow_pickle=False)


def save_json(path: str, obj) -> None:
    with open(path, "w") as f:
        json.dump(obj, f, indent=1)
        f.write("\n")


def rel_l2(a: np.ndarray, b: np.ndarray) -> float:
    a = np.asarray(a, dtype=np.float64)
    b = np.asarray(b, dtype=np.float64)
    den = max(np.linalg.norm(b.ravel()), 1e-300)
    return float(np.linalg.norm((a - b).ravel()) / den)


def central_fd(scalar_fn, x: np.ndarray, eps: float) -> np.ndarray:
    """Central finite differences of scalar_fn at every element of x (float64)."""
    x = np.array(x, dtype=np.float64)
    g = np.zeros_like(x)
    flat = x.reshape(-1)
    gflat = g.reshape(-1)
    for i in range(flat.size):
        orig = flat[i]
        flat[i] = orig + eps
        fp = scalar_fn(x)
        flat[i] = orig - eps
        fm = scalar_fn(x)
        flat[i] = orig
        gflat[i] = (fp - fm) / (2 * eps)
    return g


def torch_version() -> str:
    return torch.__version__
