import { strict as assert } from 'node:assert';
import { writeFileSync } from 'node:fs';
import * as path from 'node:path';
import type { DecodedImage } from '../../../core/image/decode';
import {
  computeGeometry,
  inputToOriginal,
  originalToInput,
  PREPROCESS_PRESETS,
  preprocessImage,
  specFromInputShape,
  type PreprocessSpec,
} from '../../../core/image/preprocess';
import { requirePython, runPython, throwsUserError, useTempDir } from '../io/support';

function image(width: number, height: number, at: (x: number, y: number) => [number, number, number]): DecodedImage {
  const rgb = new Uint8Array(width * height * 3);
  for (let y = 0; y < height; y++) for (let x = 0; x < width; x++) rgb.set(at(x, y), (y * width + x) * 3);
  return { width, height, rgb, format: 'png', path: 'synthetic.png' };
}

const f32 = Math.fround;
const spec = (over: Partial<PreprocessSpec>): PreprocessSpec => ({
  size: [2, 2], resize: 'stretch', channels: 'RGB', layout: 'NCHW', scale: 1 / 255, mean: [0, 0, 0], std: [1, 1, 1], ...over,
});

describe('core/image/preprocess', () => {
  const tmp = useTempDir('preprocess');

  it('writes ((pixel·scale) − mean)/std per channel, NCHW, hand-computed', () => {
    // 2×2 image, no resize: the tensor is the formula applied to each pixel.
    const img = image(2, 2, (x, y) => [10 * (x + 1), 100 + y, 255 * x]);
    const s = spec({ scale: 1 / 255, mean: [0.5, 0.25, 0], std: [0.5, 2, 0.25] });
    const t = preprocessImage(img, s);
    assert.deepEqual(t.dims, [1, 3, 2, 2]);
    const expected = [
      // R plane: pixels 10, 20, 10, 20
      f32((10 / 255 - 0.5) / 0.5), f32((20 / 255 - 0.5) / 0.5), f32((10 / 255 - 0.5) / 0.5), f32((20 / 255 - 0.5) / 0.5),
      // G plane: 100, 100, 101, 101
      f32((100 / 255 - 0.25) / 2), f32((100 / 255 - 0.25) / 2), f32((101 / 255 - 0.25) / 2), f32((101 / 255 - 0.25) / 2),
      // B plane: 0, 255, 0, 255
      f32(0 / 0.25), f32((255 / 255) / 0.25), f32(0), f32(4),
    ];
    assert.deepEqual([...t.data], expected);
  });

  it('orders channels BGR with mean/std listed in tensor order, and lays out NHWC', () => {
    const img = image(1, 2, (_x, y) => [200, 100 + y, 50]);
    const t = preprocessImage(img, spec({ size: [2, 1], channels: 'BGR', layout: 'NHWC', scale: 1, mean: [50, 100, 200], std: [1, 1, 2] }));
    assert.deepEqual(t.dims, [1, 2, 1, 3]);
    // pixel (0,0): B=50 → 0, G=100 → 0, R=200 → 0; pixel (0,1): G=101 → 1
    assert.deepEqual([...t.data], [0, 0, 0, 0, 1, 0]);
  });

  it('feeds Pillow-style luma for GRAY inputs', () => {
    // L = (19595 R + 38470 G + 7471 B + 2^15) >> 16 (Pillow's fixed-point BT.601 luma, from memory; checked against Pillow below).
    const img = image(2, 1, (x) => (x === 0 ? [255, 0, 0] : [10, 200, 30]));
    const t = preprocessImage(img, spec({ size: [1, 2], channels: 'GRAY', scale: 1, mean: [0], std: [1] }));
    assert.deepEqual(t.dims, [1, 1, 1, 2]);
    assert.deepEqual([...t.data], [76, 124]); // (19595·255 + 32768) >> 16 = 76; (195950 + 7694000 + 224130 + 32768) >> 16 = 124
  });

  it('agrees with Pillow convert("L") on random colours', function () {
    requirePython(this, 'numpy', 'PIL');
    const n = 4096;
    const rgb = new Uint8Array(n * 3);
    for (let i = 0; i < rgb.length; i++) rgb[i] = (i * 2654435761) >>> 24;
    const file = path.join(tmp(), 'gray.bin');
    writeFileSync(file, rgb);
    const pil = runPython(
      `import sys, numpy as np
from PIL import Image
a = np.fromfile(sys.argv[1], dtype=np.uint8).reshape(64, 64, 3)
sys.stdout.buffer.write(np.asarray(Image.fromarray(a).convert('L')).tobytes())`,
      [file],
    );
    const t = preprocessImage({ width: 64, height: 64, rgb, format: 'png', path: 'x' }, spec({ size: [64, 64], channels: 'GRAY', scale: 1, mean: [0], std: [1] }));
    assert.deepEqual([...t.data], [...pil]);
  });

  it('stretch: an exact 2× downsample of constant blocks, hand-computed', () => {
    // 4×4 image of four constant 2×2 blocks → 2×2. The widened triangle reaches one pixel into the
    // neighbouring block, so along x (blocks equal) values survive and along y they mix:
    const img = image(4, 4, (x, y) => (y < 2 ? [40, 40, 40] : [200, 200, 200]));
    const t = preprocessImage(img, spec({ scale: 1, layout: 'NCHW' }));
    // Rows: output 0 has taps rows 0,1,2 with weights .75,.75,.25 / 1.75 → (40·1.5 + 200·.25)/1.75 = 62.86 → 63;
    // output 1: rows 1,2,3 with .25,.75,.75 → (40·.25 + 200·1.5)/1.75 = 177.14 → 177.
    for (let c = 0; c < 3; c++) assert.deepEqual([...t.data.subarray(c * 4, c * 4 + 4)], [63, 63, 177, 177]);
    assert.deepEqual(t.geometry.source, { x: 0, y: 0, width: 4, height: 4 });
    assert.deepEqual(t.geometry.target, { x: 0, y: 0, width: 2, height: 2 });
  });

  it('crop: scales the shorter side to fit and keeps the centre, taking the crop before the resize', () => {
    // 24×8 image in three 8-wide bands (red, green, blue) → 4×4: shorter side 8 → 4 (scale ½),
    // the crop is the middle 8×8 of the original, i.e. exactly the green band.
    const img = image(24, 8, (x) => (x < 8 ? [255, 0, 0] : x < 16 ? [0, 255, 0] : [0, 0, 255]));
    const t = preprocessImage(img, spec({ size: [4, 4], resize: 'crop', scale: 1, layout: 'NHWC' }));
    assert.deepEqual(t.dims, [1, 4, 4, 3]);
    for (let p = 0; p < 16; p++) assert.deepEqual([...t.data.subarray(p * 3, p * 3 + 3)], [0, 255, 0]);
    assert.deepEqual(t.geometry.source, { x: 8, y: 0, width: 8, height: 8 });
    assert.deepEqual(t.geometry.target, { x: 0, y: 0, width: 4, height: 4 });
    // Portrait: 6×18 → 3×3 keeps rows 6..11.
    const g = computeGeometry(6, 18, [3, 3], 'crop');
    assert.deepEqual(g.source, { x: 0, y: 6, width: 6, height: 6 });
  });

  it('letterbox: fits inside, centres, pads with the background colour', () => {
    // 8×4 red → 4×4: content 4×2 at rows 1..2, rows 0 and 3 are padding (default mid-grey 128).
    const img = image(8, 4, () => [255, 0, 0]);
    const t = preprocessImage(img, spec({ size: [4, 4], resize: 'letterbox', scale: 1 }));
    assert.deepEqual(t.geometry.target, { x: 0, y: 1, width: 4, height: 2 });
    const R = t.data.subarray(0, 16);
    const G = t.data.subarray(16, 32);
    assert.deepEqual([...R], [128, 128, 128, 128, 255, 255, 255, 255, 255, 255, 255, 255, 128, 128, 128, 128]);
    assert.deepEqual([...G], [128, 128, 128, 128, 0, 0, 0, 0, 0, 0, 0, 0, 128, 128, 128, 128]);
    const black = preprocessImage(img, spec({ size: [4, 4], resize: 'letterbox', scale: 1, background: [0, 0, 0] }));
    assert.equal(black.data[0], 0);
    // 6×2 → 4×4: scale 2/3, content 4×round(4/3)=1, at row floor(3/2) = 1.
    assert.deepEqual(computeGeometry(6, 2, [4, 4], 'letterbox').target, { x: 0, y: 1, width: 4, height: 1 });
  });

  it('maps points between original and input coordinates both ways', () => {
    for (const mode of ['stretch', 'crop', 'letterbox'] as const) {
      const g = computeGeometry(640, 480, [224, 224], mode);
      for (const [x, y] of [[0, 0], [100.5, 33.25], [640, 480]]) {
        const [ix, iy] = originalToInput(g, x, y);
        const [ox, oy] = inputToOriginal(g, ix, iy);
        assert.ok(Math.abs(ox - x) < 1e-9 && Math.abs(oy - y) < 1e-9, `${mode} (${x}, ${y})`);
      }
    }
    const crop = computeGeometry(640, 480, [224, 224], 'crop');
    assert.deepEqual(crop.source, { x: 80, y: 0, width: 480, height: 480 });
    assert.deepEqual(inputToOriginal(crop, 0, 0), [80, 0]);
    assert.deepEqual(inputToOriginal(crop, 224, 224), [560, 480]);
    const box = computeGeometry(640, 480, [224, 224], 'letterbox');
    assert.deepEqual(box.target, { x: 0, y: 28, width: 224, height: 168 });
  });

  it('fills size and layout from the model input shape', () => {
    assert.deepEqual(specFromInputShape([1, 3, 96, 128]).size, [96, 128]);
    assert.equal(specFromInputShape([1, 3, 96, 128]).layout, 'NCHW');
    const nhwc = specFromInputShape([1, 299, 299, 3]);
    assert.deepEqual([nhwc.layout, ...nhwc.size], ['NHWC', 299, 299]);
    const dyn = specFromInputShape(['batch', 3, 'height', 'width']);
    assert.deepEqual(dyn.size, [224, 224], 'dynamic H/W default to 224');
    assert.deepEqual(specFromInputShape([-1, 3, -1, -1]).size, [224, 224]);
    assert.equal(specFromInputShape([1, 1, 28, 28]).channels, 'GRAY');
    assert.equal(specFromInputShape([1, 3, 3, 3]).layout, 'NCHW', 'ambiguous → NCHW');
    assert.deepEqual(specFromInputShape([1, 3, 8, 8]).mean, PREPROCESS_PRESETS.unit.mean);
    throwsUserError(() => specFromInputShape([1, 5, 7, 9]), /no axis of size 3/);
    throwsUserError(() => specFromInputShape([1, 784]), /\[1, 784\]/, /\[1,3,H,W\]/);
  });

  it('implements each preset as its stated formula', () => {
    const img = image(1, 1, () => [0, 128, 255]);
    const run = (name: keyof typeof PREPROCESS_PRESETS) => [...preprocessImage(img, spec({ size: [1, 1], ...PREPROCESS_PRESETS[name] })).data];
    assert.deepEqual(run('unit'), [0, f32(128 / 255), 1]);
    assert.deepEqual(run('raw255'), [0, 128, 255]);
    assert.deepEqual(run('symmetric'), [-1, f32(128 / 127.5 - 1), 1]);
    assert.deepEqual(run('standardized'), [f32(-0.485 / 0.229), f32((128 / 255 - 0.456) / 0.224), f32((1 - 0.406) / 0.225)]);
    assert.deepEqual(run('bgr-mean'), [f32(255 - 103.939), f32(128 - 116.779), f32(0 - 123.68)]);
  });

  it('refuses invalid specs with the field named', () => {
    const img = image(1, 1, () => [0, 0, 0]);
    throwsUserError(() => preprocessImage(img, spec({ size: [0, 4] })), /preprocess\.size/);
    throwsUserError(() => preprocessImage(img, spec({ std: [1, 0, 1] })), /preprocess\.std/);
    throwsUserError(() => preprocessImage(img, spec({ mean: [0, 0] })), /preprocess\.mean/);
  });
});
