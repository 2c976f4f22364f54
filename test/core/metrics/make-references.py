"""Reference values for the metrics tests, from general-purpose scientific libraries.

Run with Debian's interpreter (needs python3-skimage, python3-scipy):
    /usr/bin/python3 test/core/metrics/make-references.py
and paste the printed numbers into the tests that name this script. The test arrays are
defined by closed formulas, written identically in the TypeScript tests.
"""
import numpy as np
from scipy import ndimage, stats
from skimage.metrics import structural_similarity


def pattern(w, h, cx, cy, phase):
    y, x = np.mgrid[0:h, 0:w].astype(np.float64)
    return np.exp(-((x - cx) ** 2 + (y - cy) ** 2) / 18.0) + 0.3 * np.sin(0.7 * x + phase) * np.cos(0.5 * y)


def unit(a):
    return (a - a.min()) / (a.max() - a.min())


W, H = 24, 20
a = pattern(W, H, 10, 8, 0.0)
b = pattern(W, H, 13, 9, 0.4)
# skimage: Gaussian window sigma 1.5 truncated at 3.5 sigma -> 11x11, population covariances,
# data range 1, mean over the positions whose window lies inside the image.
kw = dict(gaussian_weights=True, sigma=1.5, use_sample_covariance=False, data_range=1.0)
print('ssim(a,b)     =', repr(structural_similarity(unit(a), unit(b), **kw)))
print('ssim(a,-a)    =', repr(structural_similarity(unit(a), unit(-a), **kw)))
print('spearman(a,b) =', repr(stats.spearmanr(a.ravel(), b.ravel()).correlation))

# Gaussian blur, mode 'mirror' = reflect without repeating the edge; truncate 3 -> radius int(3*1.2+0.5) = 4.
img = np.array([[(3 * x + 7 * y) % 5 for x in range(6)] for y in range(5)], dtype=np.float64)
print('blur sigma 1.2 =', repr(ndimage.gaussian_filter(img, sigma=1.2, mode='mirror', truncate=3.0).ravel().tolist()))
