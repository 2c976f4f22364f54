import { strict as assert } from 'node:assert';
import sharp from 'sharp';
import { applyColormap, colormapLegendPng, colormapTable, DIVERGING_ENDS, labToSrgb8 } from '../../../core/image/colormap';
import { requirePython, runPython } from '../io/support';

/** sRGB 8-bit → CIELAB (D65), the inverse of IEC 61966-2-1 + CIE 1976 L*a*b*, written independently of the code under test. */
function srgbToLab(r: number, g: number, b: number): [number, number, number] {
  const lin = (v: number) => {
    const c = v / 255;
    return c <= 0.04045 ? c / 12.92 : ((c + 0.055) / 1.055) ** 2.4;
  };
  const [R, G, B] = [lin(r), lin(g), lin(b)];
  const X = (0.4124564 * R + 0.3575761 * G + 0.1804375 * B) / 0.95047;
  const Y = 0.2126729 * R + 0.7151522 * G + 0.072175 * B;
  const Z = (0.0193339 * R + 0.119192 * G + 0.9503041 * B) / 1.08883;
  const f = (t: number) => (t > (6 / 29) ** 3 ? Math.cbrt(t) : t / (3 * (6 / 29) ** 2) + 4 / 29);
  return [116 * f(Y) - 16, 500 * (f(X) - f(Y)), 200 * (f(Y) - f(Z))];
}

const entry = (name: 'viridis' | 'inferno' | 'diverging', i: number) => [...colormapTable(name).subarray(i * 3, i * 3 + 3)];

describe('core/image/colormap', () => {
  it('has the published viridis and inferno endpoints', () => {
    // Reference: the published tables (first/last rows: viridis 0.267004 0.004874 0.329415 and
    // 0.993248 0.906157 0.143936; inferno 0.001462 0.000466 0.013866 and 0.988362 0.998364 0.644924), ×255 rounded.
    assert.deepEqual(entry('viridis', 0), [68, 1, 84]);
    assert.deepEqual(entry('viridis', 255), [253, 231, 37]);
    assert.deepEqual(entry('inferno', 0), [0, 0, 4]);
    assert.deepEqual(entry('inferno', 255), [252, 255, 164]);
  });

  it('matches an installed matplotlib entry by entry', function () {
    // Reference: matplotlib's own colormap objects (Debian python3-matplotlib), ×255 rounded.
    requirePython(this, 'numpy', 'matplotlib');
    const out = JSON.parse(
      runPython(`import json, numpy as np, matplotlib
get = (lambda n: matplotlib.colormaps[n]) if hasattr(matplotlib, 'colormaps') else (lambda n: matplotlib.cm.get_cmap(n))
print(json.dumps({n: np.round(get(n)(np.arange(256))[:, :3] * 255).astype(int).ravel().tolist() for n in ['viridis', 'inferno']}))`).toString(),
    );
    assert.deepEqual([...colormapTable('viridis')], out.viridis);
    assert.deepEqual([...colormapTable('inferno')], out.inferno);
  });

  it('diverging map: white-ish centre, equal lightness for equal magnitudes, monotone halves, in gamut', () => {
    const L = (i: number) => srgbToLab(...(entry('diverging', i) as [number, number, number]))[0];
    assert.ok(Math.abs(L(127.5 | 0) - 97) < 1.5 && Math.abs(L(128) - 97) < 1.5, `centre L* ${L(128)}`);
    for (let i = 0; i < 128; i++) assert.ok(Math.abs(L(i) - L(255 - i)) < 1.0, `L*(${i}) = ${L(i)} vs L*(${255 - i}) = ${L(255 - i)}`);
    for (let i = 1; i < 128; i++) assert.ok(L(i) > L(i - 1) - 0.3, `lightness rises towards the centre at ${i}`);
    // In gamut: each entry's Lab is the intended straight-line point within 8-bit rounding (ΔE < 1.5).
    for (let i = 0; i < 256; i++) {
      const u = (i / 255) * 2 - 1;
      const end = u < 0 ? DIVERGING_ENDS.negative : DIVERGING_ENDS.positive;
      const c = DIVERGING_ENDS.centre;
      const want = [0, 1, 2].map((k) => c[k] + (end[k] - c[k]) * Math.abs(u));
      const got = srgbToLab(...(entry('diverging', i) as [number, number, number]));
      const dE = Math.hypot(got[0] - want[0], got[1] - want[1], got[2] - want[2]);
      assert.ok(dE < 1.5, `entry ${i}: ΔE ${dE.toFixed(2)}`);
    }
    const [r0, , b0] = entry('diverging', 0);
    const [r1, , b1] = entry('diverging', 255);
    assert.ok(b0 > r0 && r1 > b1, 'blue for negative, red for positive');
  });

  it('labToSrgb8 maps the D65 white point and black exactly', () => {
    assert.deepEqual(labToSrgb8(100, 0, 0), [255, 255, 255]);
    assert.deepEqual(labToSrgb8(0, 0, 0), [0, 0, 0]);
  });

  it('indexes floor(t·256), clipped, NaN → first entry, flat range → first or centre entry', () => {
    const v = Float32Array.from([-1, 0, 0.5, 0.999, 1, 2, NaN, 1 / 256 - 1e-6, 1 / 256]);
    const rgb = applyColormap(v, 0, 1, 'viridis');
    const idx = (i: number) => [...rgb.subarray(i * 3, i * 3 + 3)];
    assert.deepEqual(idx(0), entry('viridis', 0));
    assert.deepEqual(idx(1), entry('viridis', 0));
    assert.deepEqual(idx(2), entry('viridis', 128));
    assert.deepEqual(idx(3), entry('viridis', 255));
    assert.deepEqual(idx(4), entry('viridis', 255));
    assert.deepEqual(idx(5), entry('viridis', 255));
    assert.deepEqual(idx(6), entry('viridis', 0));
    assert.deepEqual(idx(7), entry('viridis', 0));
    assert.deepEqual(idx(8), entry('viridis', 1));
    assert.deepEqual([...applyColormap([5, 7], 0, 0, 'inferno')], [...entry('inferno', 0), ...entry('inferno', 0)]);
    assert.deepEqual([...applyColormap([5], 0, 0, 'diverging')], entry('diverging', 128));
    assert.deepEqual([...applyColormap([-2, 0, 2], -2, 2, 'diverging')], [...entry('diverging', 0), ...entry('diverging', 128), ...entry('diverging', 255)]);
  });

  it('renders a legend strip from the low to the high end', async () => {
    const png = await colormapLegendPng('inferno', 64, 6);
    const { data, info } = await sharp(png).raw().toBuffer({ resolveWithObject: true });
    assert.deepEqual([info.width, info.height, info.channels], [64, 6, 3]);
    assert.deepEqual([...data.subarray(0, 3)], entry('inferno', 0));
    assert.deepEqual([...data.subarray(63 * 3, 64 * 3)], entry('inferno', 255));
  });
});
